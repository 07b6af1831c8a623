//! Sensitivity: a calibrated microphone, the drive voltage and the
//! distance turn the response into dB SPL at 2.83 V and 1 m.

use crate::util::*;

/// A calibration from a 0.2-peak tone at 94 dB SPL (`cal.json`), a 2 s
/// sweep at −20 dBFS and a wire of gain 0.5 as the "loudspeaker" (`rec.wav`).
fn setup() -> tempfile::TempDir {
    let t = tempfile::tempdir().unwrap();
    let tone: Vec<f64> = (0..96_000)
        .map(|i| 0.2 * (std::f64::consts::TAU * 1000.0 * i as f64 / 48_000.0).sin())
        .collect();
    write_wav_f32(&t.path().join("tone.wav"), 48_000, &[tone]);
    ok(
        t.path(),
        &[
            "calibrate",
            "tone.wav",
            "--level",
            "94",
            "--out",
            "cal.json",
        ],
    );
    make_sweep(t.path(), "sweep.wav", &["--length", "2", "--tail", "0.5"]);
    let x = read_wav(&t.path().join("sweep.wav")).1.remove(0);
    write_wav_f32(
        &t.path().join("rec.wav"),
        48_000,
        &[x.iter().map(|v| 0.5 * v).collect()],
    );
    t
}

/// `gliss analyze rec.wav` into `out` with `extra`, the options a quick
/// linear analysis needs.
fn analyze(out: &str, extra: &[&str]) -> Vec<String> {
    let mut args: Vec<String> = [
        "analyze",
        "rec.wav",
        "--sweep",
        "sweep.wav",
        "--out",
        out,
        "--no-plots",
        "--no-bands",
        "--harmonics",
        "1",
    ]
    .iter()
    .map(|s| s.to_string())
    .collect();
    args.extend(extra.iter().map(|s| s.to_string()));
    args
}

#[test]
fn a_wire_reads_its_closed_form_sensitivity_at_2_83_volts_and_1_metre() {
    let t = setup();
    let args = analyze(
        "m",
        &[
            "--calibration",
            "cal.json",
            "--volts-per-fs",
            "2.0",
            "--distance",
            "0.5",
        ],
    );
    let args: Vec<&str> = args.iter().map(String::as_str).collect();
    ok(t.path(), &args);
    let r = json(&t.path().join("m/results.json"));
    // by hand: the tone says full scale (a 0 dBFS sine) is
    // 94 − 20·lg(0.2) = 107.98 dB SPL; the wire gives 20·lg(0.5) below
    // the sweep, which is a −20 dBFS sine: 2.0 V per full scale makes it
    // 0.2 V RMS, and 20·lg(2.83/0.2) refers it to 2.83 V; the microphone
    // at 0.5 m reads 20·lg(1/0.5) more than at 1 m, so 20·lg(0.5/1) refers
    // it to 1 m (inverse-square law and 20·lg of the voltage ratio, common
    // practice)
    let full_scale = 94.0 - 20.0 * 0.2f64.log10();
    let at_mic = full_scale - 20.0 + 20.0 * 0.5f64.log10();
    let want = at_mic + 20.0 * (2.83f64 / 0.2).log10() + 20.0 * (0.5f64 / 1.0).log10();
    assert!((want - 98.95).abs() < 0.01, "{want}");
    let f = numbers(&r["response"]["frequency_hz"]);
    let spl = numbers(&r["response"]["spl_db"]);
    let sens = numbers(&r["response"]["sensitivity_db_spl"]);
    assert_eq!(sens.len(), f.len());
    let mut checked = 0;
    for i in 0..f.len() {
        if f[i] >= 40.0 && f[i] <= 15_000.0 {
            assert!(
                (sens[i] - want).abs() < 0.05,
                "{:.1} Hz: {:.3} dB SPL at 2.83 V / 1 m, want {want:.3}",
                f[i],
                sens[i]
            );
            assert!((spl[i] - at_mic).abs() < 0.05, "{}: {}", f[i], spl[i]);
            checked += 1;
        }
    }
    assert!(checked > 400);
    let s = &r["response"]["sensitivity"];
    assert_eq!(s["reference_volts"], 2.83);
    assert_eq!(s["reference_distance_m"], 1.0);
    assert_eq!(s["measured_distance_m"], 0.5);
    assert_eq!(s["volts_per_fs"], 2.0);
    assert!((s["drive_volts_rms"].as_f64().unwrap() - 0.2).abs() < 1e-9);
    let offset = 20.0 * (2.83f64 / 0.2).log10() + 20.0 * 0.5f64.log10();
    assert!((s["offset_db"].as_f64().unwrap() - offset).abs() < 1e-9);
    // response.csv carries both curves
    let csv = std::fs::read_to_string(t.path().join("m/response.csv")).unwrap();
    let mut lines = csv.lines();
    assert_eq!(
        lines.next(),
        Some("frequency_hz,magnitude_db,phase_deg,spl_db,sensitivity_db_spl")
    );
    for (line, s) in lines.zip(&sens) {
        let cells: Vec<f64> = line.split(',').map(|c| c.parse().unwrap()).collect();
        assert!((cells[4] - s).abs() < 1e-4);
    }
    // the manifest records the drive and the distance
    let m = json(&t.path().join("m/manifest.json"));
    assert_eq!(m["settings"]["volts_per_fs"], 2.0);
    assert_eq!(m["settings"]["distance_m"], 0.5);
}

#[test]
fn without_a_distance_the_sensitivity_stays_at_the_microphone() {
    let t = setup();
    let args = analyze(
        "m",
        &["--calibration", "cal.json", "--volts-per-fs", "2.83"],
    );
    let args: Vec<&str> = args.iter().map(String::as_str).collect();
    let out = ok(t.path(), &args);
    assert!(out.contains("--distance"), "{out}");
    let r = json(&t.path().join("m/results.json"));
    let s = &r["response"]["sensitivity"];
    assert!(s["reference_distance_m"].is_null());
    assert!(s["measured_distance_m"].is_null());
    // driven at 2.83 V per full scale, a −20 dBFS sweep is 0.283 V:
    // the sensitivity is the SPL at the microphone plus 20 dB (by hand)
    let spl = numbers(&r["response"]["spl_db"]);
    let sens = numbers(&r["response"]["sensitivity_db_spl"]);
    for (a, b) in spl.iter().zip(&sens) {
        assert!((b - a - 20.0).abs() < 1e-9);
    }
    assert!(
        r["warnings"]
            .as_array()
            .unwrap()
            .iter()
            .any(|w| w.as_str().unwrap().contains("--distance"))
    );
    // and without --volts-per-fs there is no sensitivity at all
    let args = analyze("n", &["--calibration", "cal.json"]);
    let args: Vec<&str> = args.iter().map(String::as_str).collect();
    ok(t.path(), &args);
    let r = json(&t.path().join("n/results.json"));
    assert!(r["response"].get("sensitivity").is_none());
    assert!(r["response"].get("sensitivity_db_spl").is_none());
    let csv = std::fs::read_to_string(t.path().join("n/response.csv")).unwrap();
    assert!(csv.starts_with("frequency_hz,magnitude_db,phase_deg,spl_db\n"));
}

#[test]
fn bad_drive_voltages_and_distances_are_refused() {
    let t = setup();
    let before = snapshot(t.path());
    let cal = ["--calibration", "cal.json"];
    let mut cases: Vec<(Vec<&str>, &str)> = Vec::new();
    for bad in ["-1", "0", "NaN", "inf", "two", ""] {
        let mut v = cal.to_vec();
        v.extend(["--volts-per-fs", bad]);
        cases.push((v, "--volts-per-fs"));
        let mut d = cal.to_vec();
        d.extend(["--volts-per-fs", "2", "--distance", bad]);
        cases.push((d, "--distance"));
    }
    // each needs a calibrated microphone; the distance needs the voltage
    cases.push((vec!["--volts-per-fs", "2"], "needs --calibration"));
    cases.push((
        vec!["--volts-per-fs", "2", "--distance", "1"],
        "needs --calibration",
    ));
    cases.push((vec!["--distance", "1"], "needs --calibration"));
    cases.push((
        vec!["--calibration", "cal.json", "--distance", "1"],
        "--volts-per-fs",
    ));
    for (extra, needle) in &cases {
        let args = analyze("m", extra);
        let args: Vec<&str> = args.iter().map(String::as_str).collect();
        let line = refused(t.path(), &args);
        assert!(line.contains(needle), "{extra:?}: {line}");
        assert_eq!(run(t.path(), &args).status.code(), Some(2), "{extra:?}");
    }
    // nothing was written
    assert_eq!(snapshot(t.path()), before);
}

#[test]
fn calibrate_replaces_a_calibration_only_with_overwrite() {
    let t = setup();
    let d = t.path();
    let before = std::fs::read(d.join("cal.json")).unwrap();
    let args = [
        "calibrate",
        "tone.wav",
        "--level",
        "114",
        "--out",
        "cal.json",
    ];
    let line = refused(d, &args);
    assert!(
        line.contains("already exists") && line.contains("--overwrite"),
        "{line}"
    );
    assert_eq!(std::fs::read(d.join("cal.json")).unwrap(), before);
    let mut again = args.to_vec();
    again.push("--overwrite");
    ok(d, &again);
    // 20 dB more for the same tone: the full-scale level moves by 20 dB
    let (old, new) = (
        serde_json::from_slice::<serde_json::Value>(&before).unwrap(),
        json(&d.join("cal.json")),
    );
    let key = "full_scale_db_spl";
    let delta = new[key].as_f64().unwrap() - old[key].as_f64().unwrap();
    assert!((delta - 20.0).abs() < 1e-6, "{delta}: {new}");
}

#[test]
fn calibrate_names_the_channel_that_holds_the_tone() {
    let t = tempfile::tempdir().unwrap();
    let d = t.path();
    let tone: Vec<f64> = (0..96_000)
        .map(|i| 0.2 * (std::f64::consts::TAU * 1000.0 * i as f64 / 48_000.0).sin())
        .collect();
    // the microphone on input 2; input 1 silent
    write_wav_f32(&d.join("two.wav"), 48_000, &[vec![0.0; 96_000], tone]);
    let before = snapshot(d);
    let line = refused(d, &["calibrate", "two.wav", "--out", "cal.json"]);
    assert!(line.contains("give --channel 2"), "{line}");
    assert_eq!(snapshot(d), before, "nothing written");
    ok(
        d,
        &[
            "calibrate",
            "two.wav",
            "--channel",
            "2",
            "--out",
            "cal.json",
        ],
    );
}
