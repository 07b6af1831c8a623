//! Bad input: each gives one `error:` line, a non-zero exit, no panic, and
//! leaves every file that was there as it was.

use std::path::Path;

use crate::util::*;

/// A folder with a short sweep and a good recording of it.
fn setup() -> tempfile::TempDir {
    let t = tempfile::tempdir().unwrap();
    let s = make_sweep(t.path(), "sweep.wav", &["--length", "1", "--tail", "0.25"]);
    let (_, ch) = read_wav(&s);
    write_wav_f32(&t.path().join("good.wav"), 48_000, &ch);
    t
}

/// Runs analyze on `rec` and checks the refusal leaves the folder as it was.
fn refuse_recording(t: &Path, rec: &str, needle: &str) {
    let before = snapshot(t);
    let line = refused(t, &["analyze", rec, "--sweep", "sweep.wav", "--out", "m"]);
    assert!(line.contains(needle), "{rec}: {line}");
    assert_eq!(snapshot(t), before, "{rec}: files changed");
    assert!(
        !t.join("m").exists(),
        "{rec}: an output folder was left behind"
    );
}

#[test]
fn a_file_that_is_not_a_wav() {
    let t = setup();
    std::fs::write(t.path().join("notes.wav"), "these are my notes, not audio").unwrap();
    refuse_recording(t.path(), "notes.wav", "not");
}

#[test]
fn a_truncated_wav() {
    let t = setup();
    let bytes = std::fs::read(t.path().join("good.wav")).unwrap();
    std::fs::write(t.path().join("cut.wav"), &bytes[..bytes.len() / 3]).unwrap();
    refuse_recording(t.path(), "cut.wav", "truncated");
}

#[test]
fn an_empty_recording() {
    let t = setup();
    write_wav_f32(&t.path().join("empty.wav"), 48_000, &[vec![]]);
    refuse_recording(t.path(), "empty.wav", "empty");
}

#[test]
fn a_silent_recording() {
    let t = setup();
    write_wav_f32(&t.path().join("silent.wav"), 48_000, &[vec![0.0; 60_000]]);
    refuse_recording(t.path(), "silent.wav", "silent");
}

#[test]
fn nan_and_infinite_samples() {
    let t = setup();
    let (_, mut ch) = read_wav(&t.path().join("good.wav"));
    ch[0][1000] = f64::NAN;
    write_wav_f32(&t.path().join("nan.wav"), 48_000, &ch);
    refuse_recording(t.path(), "nan.wav", "non-finite");
    ch[0][1000] = f64::INFINITY;
    write_wav_f32(&t.path().join("inf.wav"), 48_000, &ch);
    refuse_recording(t.path(), "inf.wav", "non-finite");
}

#[test]
fn a_recording_shorter_than_the_sweep() {
    let t = setup();
    let (_, ch) = read_wav(&t.path().join("good.wav"));
    write_wav_f32(
        &t.path().join("short.wav"),
        48_000,
        &[ch[0][..20_000].to_vec()],
    );
    refuse_recording(t.path(), "short.wav", "shorter than the sweep");
}

#[test]
fn sample_rates_that_differ() {
    let t = setup();
    let (_, ch) = read_wav(&t.path().join("good.wav"));
    write_wav_f32(&t.path().join("rate.wav"), 44_100, &ch);
    refuse_recording(t.path(), "rate.wav", "44100 Hz");
}

#[test]
fn a_channel_that_does_not_exist() {
    let t = setup();
    let before = snapshot(t.path());
    let line = refused(
        t.path(),
        &[
            "analyze",
            "good.wav",
            "--sweep",
            "sweep.wav",
            "--out",
            "m",
            "--channel",
            "3",
        ],
    );
    assert!(
        line.contains("--channel 3") && line.contains("1 channel"),
        "{line}"
    );
    let line = refused(
        t.path(),
        &[
            "analyze",
            "good.wav",
            "--sweep",
            "sweep.wav",
            "--out",
            "m",
            "--channel",
            "0",
        ],
    );
    assert!(line.contains("counts from 1"), "{line}");
    assert_eq!(snapshot(t.path()), before);
}

#[test]
fn a_missing_file_and_a_sweep_without_its_parameters() {
    let t = setup();
    refuse_recording(t.path(), "nowhere.wav", "nowhere.wav");
    // a sweep WAV without its .json is recovered from its samples (issue
    // 13 item 14, tests/commands/impulse.rs); one that is no sweep is
    // refused, naming the .json it lacks and why it cannot do without
    let (_, s) = read_wav(&t.path().join("sweep.wav"));
    let not_a_sweep: Vec<f64> = (0..s[0].len())
        .map(|i| 0.1 * (((i * 7919) % 1000) as f64 / 500.0 - 1.0))
        .collect();
    write_wav_f32(&t.path().join("bare.wav"), 48_000, &[not_a_sweep]);
    let before = snapshot(t.path());
    let line = refused(
        t.path(),
        &["analyze", "good.wav", "--sweep", "bare.wav", "--out", "m"],
    );
    assert!(
        line.contains("bare.json") && line.contains("not an exponential sweep"),
        "{line}"
    );
    assert_eq!(snapshot(t.path()), before);
}

#[test]
fn an_output_folder_that_already_holds_a_measurement() {
    let t = setup();
    ok(
        t.path(),
        &[
            "analyze",
            "good.wav",
            "--sweep",
            "sweep.wav",
            "--out",
            "m",
            "--no-plots",
        ],
    );
    let before = snapshot(t.path());
    let line = refused(
        t.path(),
        &["analyze", "good.wav", "--sweep", "sweep.wav", "--out", "m"],
    );
    assert!(line.contains("already holds a measurement"), "{line}");
    assert_eq!(snapshot(t.path()), before);
    // a folder of other files is refused too
    std::fs::create_dir(t.path().join("photos")).unwrap();
    std::fs::write(t.path().join("photos/room.jpg"), b"jpeg").unwrap();
    let line = refused(
        t.path(),
        &[
            "analyze",
            "good.wav",
            "--sweep",
            "sweep.wav",
            "--out",
            "photos",
        ],
    );
    assert!(line.contains("not empty"), "{line}");
    assert_eq!(
        std::fs::read(t.path().join("photos/room.jpg")).unwrap(),
        b"jpeg"
    );
}

#[test]
fn overwrite_replaces_derived_files_but_never_a_different_raw_recording() {
    let t = setup();
    ok(
        t.path(),
        &[
            "analyze",
            "good.wav",
            "--sweep",
            "sweep.wav",
            "--out",
            "m",
            "--no-plots",
        ],
    );
    let raw = std::fs::read(t.path().join("m/recording.wav")).unwrap();
    // same raw files, new smoothing: allowed, raw kept byte for byte
    ok(
        t.path(),
        &[
            "analyze",
            "good.wav",
            "--sweep",
            "sweep.wav",
            "--out",
            "m",
            "--overwrite",
            "--smooth",
            "1/3",
            "--no-plots",
        ],
    );
    assert_eq!(
        std::fs::read(t.path().join("m/recording.wav")).unwrap(),
        raw
    );
    assert_eq!(
        json(&t.path().join("m/results.json"))["response"]["smoothing"],
        "1/3"
    );
    // a different recording into the same folder: refused, nothing changed
    let (_, ch) = read_wav(&t.path().join("good.wav"));
    let half: Vec<f64> = ch[0].iter().map(|v| v * 0.5).collect();
    write_wav_f32(&t.path().join("other.wav"), 48_000, &[half]);
    let before = snapshot(t.path());
    let line = refused(
        t.path(),
        &[
            "analyze",
            "other.wav",
            "--sweep",
            "sweep.wav",
            "--out",
            "m",
            "--overwrite",
        ],
    );
    assert!(line.contains("different raw file"), "{line}");
    assert_eq!(snapshot(t.path()), before);
}

#[test]
fn clipping_is_a_warning_in_the_results() {
    let t = setup();
    let (_, ch) = read_wav(&t.path().join("good.wav"));
    // drive the wire 26 dB too hot and clip at full scale
    let hot: Vec<f64> = ch[0].iter().map(|v| (v * 20.0).clamp(-1.0, 1.0)).collect();
    write_wav_f32(&t.path().join("hot.wav"), 48_000, &[hot]);
    let out = ok(
        t.path(),
        &[
            "analyze",
            "hot.wav",
            "--sweep",
            "sweep.wav",
            "--out",
            "m",
            "--no-plots",
        ],
    );
    assert!(
        out.contains("warning: channel 1 of the recording clips"),
        "{out}"
    );
    let r = json(&t.path().join("m/results.json"));
    let w = r["warnings"].as_array().unwrap();
    assert!(
        w.iter().any(|s| s.as_str().unwrap().contains("clips")),
        "{w:?}"
    );
}

#[test]
fn a_recording_of_something_else_is_flagged() {
    let t = setup();
    // noise instead of the sweep: analysis goes on but says so
    let mut s = 12345u64;
    let noise: Vec<f64> = (0..70_000)
        .map(|_| {
            s = s
                .wrapping_mul(6364136223846793005)
                .wrapping_add(1442695040888963407);
            ((s >> 11) as f64 / (1u64 << 53) as f64 - 0.5) * 0.2
        })
        .collect();
    write_wav_f32(&t.path().join("noise.wav"), 48_000, &[noise]);
    let out = ok(
        t.path(),
        &[
            "analyze",
            "noise.wav",
            "--sweep",
            "sweep.wav",
            "--out",
            "m",
            "--no-plots",
        ],
    );
    assert!(out.contains("above its noise"), "{out}");
}

/// Output into a pipe that was closed (`gliss demo | head -1`) ends the
/// process quietly, as Unix tools do: no panic on stderr.
#[cfg(unix)]
#[test]
fn a_closed_pipe_on_stdout_ends_quietly() {
    let t = tempfile::tempdir().unwrap();
    let mut child = std::process::Command::new(env!("CARGO_BIN_EXE_gliss"))
        .args([
            "demo",
            "--single",
            "--out",
            "d",
            "--length",
            "1",
            "--tail",
            "0.5",
            "--no-plots",
        ])
        .current_dir(t.path())
        .stdout(std::process::Stdio::piped())
        .stderr(std::process::Stdio::piped())
        .spawn()
        .unwrap();
    drop(child.stdout.take()); // the reader goes away at once
    let out = child.wait_with_output().unwrap();
    let err = String::from_utf8_lossy(&out.stderr);
    assert!(!err.contains("panicked"), "{err}");
}
