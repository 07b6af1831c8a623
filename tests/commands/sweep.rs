//! `gliss sweep`: the file it writes, and the parameters it refuses.

use crate::util::*;

#[test]
fn the_sweep_file_has_the_requested_level_length_and_band() {
    let t = tempfile::tempdir().unwrap();
    for (bits, level) in [("32", "-20"), ("24", "-6"), ("16", "-3")] {
        let name = format!("s{bits}.wav");
        make_sweep(
            t.path(),
            &name,
            &[
                "--bits", bits, "--level", level, "--length", "1", "--tail", "0.25",
            ],
        );
        let (rate, ch) = read_wav(&t.path().join(&name));
        assert_eq!(rate, 48_000);
        assert_eq!(ch.len(), 1);
        let side = json(&t.path().join(format!("s{bits}.json")));
        assert_eq!(side["format"], "gliss sweep");
        let design = &side["sweep"];
        // Novak et al. 2010: L = round(f1·T̃/ln(f2/f1))/f1 → 20·L is whole
        let l = design["rate_constant_s"].as_f64().unwrap();
        assert!((20.0 * l - (20.0 * l).round()).abs() < 1e-9);
        let samples = design["total_samples"].as_u64().unwrap() as usize;
        assert_eq!(ch[0].len(), samples);
        let peak = ch[0].iter().fold(0.0f64, |m, v| m.max(v.abs()));
        let want: f64 = level.parse().unwrap();
        // the criterion: peak within 0.1 dB of --level
        assert!((20.0 * peak.log10() - want).abs() < 0.1, "{bits}: {peak}");
        // the tail is silent
        let sweep_samples = design["sweep_samples"].as_u64().unwrap() as usize;
        assert!(ch[0][sweep_samples..].iter().all(|v| *v == 0.0));
    }
}

#[test]
fn impossible_sweeps_are_refused_with_a_usage_error() {
    let t = tempfile::tempdir().unwrap();
    let cases: &[(&[&str], &str)] = &[
        (&["--end", "30000"], "Nyquist"),
        (&["--start", "0"], "above 0 Hz"),
        (&["--start", "-10"], "above 0 Hz"),
        (&["--start", "2000", "--end", "1000"], "below --end"),
        (&["--length", "0.0001"], "too short"),
        (&["--level", "3"], "full scale"),
        (&["--bits", "12"], "--bits"),
        (&["--rate", "1000"], "--rate"),
    ];
    for (extra, needle) in cases {
        let mut args = vec!["sweep", "--out", "x.wav"];
        args.extend_from_slice(extra);
        let line = refused(t.path(), &args);
        assert!(line.contains(needle), "{extra:?}: {line}");
        assert_eq!(run(t.path(), &args).status.code(), Some(2));
        assert!(!t.path().join("x.wav").exists());
    }
}

#[test]
fn an_existing_file_is_never_overwritten() {
    let t = tempfile::tempdir().unwrap();
    std::fs::write(t.path().join("mine.wav"), b"precious").unwrap();
    let line = refused(t.path(), &["sweep", "--out", "mine.wav"]);
    assert!(line.contains("already exists"));
    assert_eq!(
        std::fs::read(t.path().join("mine.wav")).unwrap(),
        b"precious"
    );
    assert!(!t.path().join("mine.json").exists());
    // nor its parameters file
    std::fs::write(t.path().join("other.json"), b"mine too").unwrap();
    refused(t.path(), &["sweep", "--out", "other.wav"]);
    assert!(!t.path().join("other.wav").exists());
    assert_eq!(
        std::fs::read(t.path().join("other.json")).unwrap(),
        b"mine too"
    );
}

#[test]
fn overwrite_replaces_a_sweep_and_its_description_together() {
    let t = tempfile::tempdir().unwrap();
    let d = t.path();
    make_sweep(d, "s.wav", &["--length", "1", "--tail", "0.5"]);
    let line = refused(d, &["sweep", "--out", "s.wav", "--length", "2"]);
    assert!(line.contains("--overwrite"), "{line}");
    ok(
        d,
        &[
            "sweep",
            "--out",
            "s.wav",
            "--length",
            "2",
            "--tail",
            "0.5",
            "--overwrite",
        ],
    );
    // the pair describes the new sweep, and analyses as one
    let j = json(&d.join("s.json"));
    let len = j["sweep"]["length_s"].as_f64().unwrap();
    assert!(len > 1.5, "{len}");
    let (_, x) = read_wav(&d.join("s.wav"));
    let expected = j["sweep"]["total_samples"].as_u64().unwrap() as usize;
    assert_eq!(x[0].len(), expected);
    ok(
        d,
        &[
            "analyze",
            "s.wav",
            "--sweep",
            "s.wav",
            "--out",
            "m",
            "--no-plots",
        ],
    );
    assert!(
        !std::fs::read_dir(d)
            .unwrap()
            .flatten()
            .any(|e| e.file_name().to_string_lossy().starts_with(".partial"))
    );
}

#[test]
fn every_help_page_explains_its_options() {
    let t = tempfile::tempdir().unwrap();
    let top = ok(t.path(), &["--help"]);
    for cmd in ["sweep", "analyze", "demo", "calibrate"] {
        assert!(top.contains(cmd));
    }
    assert!(top.contains("hearing"), "the safety note is in --help");
    for (cmd, opts) in [
        (
            "sweep",
            &[
                "--out", "--start", "--end", "--length", "--tail", "--rate", "--level", "--bits",
            ][..],
        ),
        (
            "analyze",
            &[
                "--sweep",
                "--out",
                "--channel",
                "--smooth",
                "--no-plots",
                "--overwrite",
                "--harmonics",
                "--no-bands",
                "--gate",
                "--calibration",
                "--volts-per-fs",
                "--distance",
            ][..],
        ),
        ("calibrate", &["--level", "--channel", "--out"][..]),
        (
            "demo",
            &[
                "--out",
                "--smooth",
                "--no-plots",
                "--seed",
                "--harmonics",
                "--no-bands",
                "--gate",
                "--volts-per-fs",
                "--distance",
            ][..],
        ),
    ] {
        let h = ok(t.path(), &[cmd, "--help"]);
        for o in opts {
            assert!(h.contains(o), "{cmd} --help lacks {o}");
        }
    }
}

/// A 1 s sweep in `dir` (sweep.wav, sweep.json) and dut.wav, the sweep
/// recorded as it is.
fn sweep_and_recording(dir: &std::path::Path) {
    record_device(dir, &["--length", "1", "--tail", "0.5"], |x| x.to_vec());
}

/// Analyses dut.wav against sweep.wav into `out`; whether results.json
/// says the sweep file differs from its description.
fn warns_sweep_differs(dir: &std::path::Path, out: &str) -> bool {
    ok(
        dir,
        &[
            "analyze",
            "dut.wav",
            "--sweep",
            "sweep.wav",
            "--out",
            out,
            "--no-plots",
        ],
    );
    let r = json(&dir.join(out).join("results.json"));
    r["warning_codes"]
        .as_array()
        .unwrap()
        .iter()
        .any(|c| c == "sweep-file-differs")
}

/// sweep.wav with sample `n` set to 0.5 (a 32-bit float WAV, mono).
fn change_one_sample(dir: &std::path::Path, n: usize) {
    let path = dir.join("sweep.wav");
    let mut bytes = std::fs::read(&path).unwrap();
    let data = bytes.windows(4).position(|w| w == b"data").unwrap() + 8;
    bytes[data + 4 * n..data + 4 * n + 4].copy_from_slice(&0.5f32.to_le_bytes());
    std::fs::write(&path, bytes).unwrap();
}

/// sweep.json changed by `edit`, written back.
fn edit_description(dir: &std::path::Path, edit: impl Fn(&mut serde_json::Value)) {
    let path = dir.join("sweep.json");
    let mut j = json(&path);
    edit(&mut j);
    std::fs::write(&path, serde_json::to_vec_pretty(&j).unwrap()).unwrap();
}

#[test]
fn a_sweep_gliss_made_is_vouched_for_by_its_description() {
    let t = tempfile::tempdir().unwrap();
    let d = t.path();
    sweep_and_recording(d);
    let j = json(&d.join("sweep.json"));
    let binding = j["binding_sha256"].as_str().expect("a binding");
    let file: gliss::session::sweep_file::SweepFile = serde_json::from_value(j.clone()).unwrap();
    assert_eq!(
        binding,
        gliss::session::sweep_file::binding_sha256(
            &file.sweep.params,
            j["wav"]["sha256"].as_str().unwrap()
        )
    );
    assert!(file.vouches(&std::fs::read(d.join("sweep.wav")).unwrap()));
    assert!(!warns_sweep_differs(d, "m"));
    // the manifest records the stimulus's hash as before: the one taken
    // to vouch for it
    let m = json(&d.join("m/manifest.json"));
    let stim = m["files"]
        .as_array()
        .unwrap()
        .iter()
        .find(|f| f["name"] == "stimulus.wav")
        .unwrap();
    assert_eq!(stim["sha256"], j["wav"]["sha256"]);
}

#[test]
fn a_hand_edited_design_fails_its_binding_and_the_sweep_is_compared_again() {
    let t = tempfile::tempdir().unwrap();
    let d = t.path();
    sweep_and_recording(d);
    // the WAV is untouched and its hash still right; the level is not
    edit_description(d, |j| j["sweep"]["params"]["level_dbfs"] = (-14.0).into());
    assert!(warns_sweep_differs(d, "m"));
}

#[test]
fn a_wav_changed_after_it_was_written_fails_its_hash_and_is_compared_again() {
    let t = tempfile::tempdir().unwrap();
    let d = t.path();
    sweep_and_recording(d);
    change_one_sample(d, 20_000);
    assert!(warns_sweep_differs(d, "m"));
}

#[test]
fn a_binding_that_vouches_for_a_wav_is_believed_without_generating_the_sweep() {
    // what proves the comparison is skipped: a WAV the comparison would
    // flag, with its hash and binding made again to vouch for it, passes.
    // (The binding guards against a description and a WAV that were not
    // written together, not against whoever makes both hashes again.)
    let t = tempfile::tempdir().unwrap();
    let d = t.path();
    sweep_and_recording(d);
    change_one_sample(d, 20_000);
    let sha = gliss::folder::sha256_hex(&std::fs::read(d.join("sweep.wav")).unwrap());
    edit_description(d, |j| {
        let file: gliss::session::sweep_file::SweepFile =
            serde_json::from_value(j.clone()).unwrap();
        j["wav"]["sha256"] = sha.clone().into();
        j["binding_sha256"] =
            gliss::session::sweep_file::binding_sha256(&file.sweep.params, &sha).into();
    });
    assert!(!warns_sweep_differs(d, "m"));
}

#[test]
fn a_description_without_a_binding_is_compared_as_before_to_the_same_numbers() {
    let t = tempfile::tempdir().unwrap();
    let d = t.path();
    sweep_and_recording(d);
    assert!(!warns_sweep_differs(d, "bound"));
    // as an earlier gliss wrote it
    edit_description(d, |j| {
        j.as_object_mut().unwrap().remove("binding_sha256");
    });
    assert!(!warns_sweep_differs(d, "old"));
    // the analysis is the same whichever check ran
    for f in [
        "results.json",
        "response.csv",
        "bands.csv",
        "distortion.csv",
        "impulse.wav",
    ] {
        assert!(
            std::fs::read(d.join("bound").join(f)).unwrap()
                == std::fs::read(d.join("old").join(f)).unwrap(),
            "{f} differs"
        );
    }
    // and a changed sample is still found by the comparison
    change_one_sample(d, 20_000);
    assert!(warns_sweep_differs(d, "changed"));
}
