//! `--target FILE.csv`: the response's deviation from a target curve in
//! results.json (with the file's hash in the manifest), level-aligned by
//! default and absolute with --target-absolute; malformed files refused.

use std::path::Path;

use crate::cookbook::{filter, peaking, response};
use crate::util::*;

/// Sweep options of these tests: short, and enough tail for a biquad.
const SWEEP: &[&str] = &["--length", "2", "--tail", "0.5"];

/// A peaking filter as the device: +6 dB at 1 kHz, Q 1 (Audio EQ
/// Cookbook, the tests' own implementation).
fn device(dir: &Path) {
    let pk = peaking(1000.0, 1.0, 6.0);
    record_device(dir, SWEEP, |x| filter(&pk, x));
}

/// Writes a target file from points (Hz, dB) with `tolerance` appended
/// to each line (a header line only without: both forms are accepted).
fn write_target(path: &Path, f: &[f64], db: &[f64], tolerance: &str) {
    let mut s = String::from("# written by the test\n");
    if tolerance.is_empty() {
        s.push_str("frequency_hz,target_db\n");
    }
    for (f, d) in f.iter().zip(db) {
        s.push_str(&format!("{f:.6},{d:.6}{tolerance}\n"));
    }
    std::fs::write(path, s).unwrap();
}

#[test]
fn a_target_equal_to_the_response_deviates_by_nothing() {
    let t = tempfile::tempdir().unwrap();
    device(t.path());
    let r = analyze_device(t.path(), "plain", &["--no-plots"]);
    let f = numbers(&r["response"]["frequency_hz"]);
    let m = numbers(&r["response"]["magnitude_db"]);
    // results.json's own curve as the target, ±0.1 dB
    write_target(&t.path().join("own.csv"), &f, &m, ",0.1,0.1");
    let out = ok(
        t.path(),
        &[
            "analyze",
            "dut.wav",
            "--sweep",
            "sweep.wav",
            "--out",
            "own",
            "--target",
            "own.csv",
        ],
    );
    let r = json(&t.path().join("own/results.json"));
    let tg = &r["target"];
    // the same analysis of the same files: the target is the response to
    // the 6 decimals written, so below 0.01 dB, all of it inside ±0.1 dB
    assert!(tg["max_abs_db"].as_f64().unwrap() < 0.01, "{tg}");
    assert_eq!(tg["inside_share"].as_f64(), Some(1.0));
    assert!(tg["level_offset_db"].as_f64().unwrap().abs() < 0.01);
    assert_eq!(tg["compared"], "magnitude_db");
    assert_eq!(tg["aligned"], true);
    // default range: where both the target and the sweep are
    let range = numbers(&tg["range_hz"]);
    assert!((range[0] - f[0]).abs() < 1e-3 && (range[1] - f[f.len() - 1]).abs() < 1e-3);
    // the manifest names the file with its SHA-256, like a mic correction
    let m = json(&t.path().join("own/manifest.json"));
    assert_eq!(m["settings"]["target"]["name"], "own.csv");
    assert_eq!(m["settings"]["target"]["sha256"], tg["sha256"]);
    assert_eq!(tg["sha256"].as_str().unwrap().len(), 64);
    // the terminal gets one line about it
    let line: Vec<&str> = out.lines().filter(|l| l.starts_with("target ")).collect();
    assert_eq!(line.len(), 1, "{out}");
    assert!(line[0].contains("max deviation 0.00 dB"), "{}", line[0]);
    // and the response plot is drawn with it
    assert!(t.path().join("own/plots/response.png").is_file());
}

#[test]
fn a_level_offset_is_taken_out_unless_absolute() {
    let t = tempfile::tempdir().unwrap();
    device(t.path());
    let r = analyze_device(t.path(), "plain", &["--no-plots"]);
    let f = numbers(&r["response"]["frequency_hz"]);
    let m: Vec<f64> = numbers(&r["response"]["magnitude_db"])
        .iter()
        .map(|v| v + 2.0)
        .collect();
    write_target(&t.path().join("plus2.csv"), &f, &m, "");
    // absolute: 2 dB below the target everywhere (by construction)
    let a = analyze_device(
        t.path(),
        "abs",
        &["--no-plots", "--target", "plus2.csv", "--target-absolute"],
    );
    let tg = &a["target"];
    assert!(
        (tg["max_abs_db"].as_f64().unwrap() - 2.0).abs() < 0.005,
        "{tg}"
    );
    assert!(
        (tg["mean_abs_db"].as_f64().unwrap() - 2.0).abs() < 0.005,
        "{tg}"
    );
    assert!(
        (tg["worst_db"].as_f64().unwrap() + 2.0).abs() < 0.005,
        "{tg}"
    );
    assert_eq!(tg["level_offset_db"].as_f64(), Some(0.0));
    assert_eq!(tg["aligned"], false);
    assert!(tg["inside_share"].is_null(), "no tolerance, no share");
    let man = json(&t.path().join("abs/manifest.json"));
    assert_eq!(man["settings"]["target_absolute"], true);
    // aligned (the default): the offset is taken out and reported
    let b = analyze_device(
        t.path(),
        "aligned",
        &["--no-plots", "--target", "plus2.csv"],
    );
    let tg = &b["target"];
    assert!(tg["max_abs_db"].as_f64().unwrap() < 0.005, "{tg}");
    assert!(
        (tg["level_offset_db"].as_f64().unwrap() - 2.0).abs() < 0.005,
        "{tg}"
    );
    assert!(tg["alignment"].as_str().unwrap().contains("mean"));
}

#[test]
fn the_share_inside_a_tolerance_matches_the_closed_form() {
    let t = tempfile::tempdir().unwrap();
    device(t.path());
    // a flat 0 dB target with ±1 dB: the peaking filter lies outside where
    // its gain exceeds 1 dB, around 1 kHz
    std::fs::write(
        t.path().join("flat.csv"),
        "frequency_hz target_db tolerance_db\n20 0 1\n20000 0 1\n",
    )
    .unwrap();
    let r = analyze_device(
        t.path(),
        "m",
        &[
            "--no-plots",
            "--smooth",
            "none",
            "--target",
            "flat.csv",
            "--target-absolute",
            "--target-range",
            "100,10000",
        ],
    );
    // the closed form H(e^{jω}) of the same biquad on a fine log grid over
    // 100 Hz–10 kHz: the share of log frequency where |gain| ≤ 1 dB
    let pk = peaking(1000.0, 1.0, 6.0);
    let n = 100_000;
    let inside = (0..n)
        .filter(|&k| {
            let f = 100.0 * 100f64.powf((k as f64 + 0.5) / n as f64);
            (20.0 * response(&pk, f).norm().log10()).abs() <= 1.0
        })
        .count() as f64
        / n as f64;
    let share = r["target"]["inside_share"].as_f64().unwrap();
    // the grid is 1/48 octave: each of the two crossings may be off by
    // half a point (1/96 octave of 6.64 octaves); the measured response
    // is within 0.1 dB of the closed form (device_under_test)
    assert!((share - inside).abs() < 0.01, "{share} vs {inside}");
    assert!(
        inside > 0.3 && inside < 0.9,
        "the test must cut the band: {inside}"
    );
    assert_eq!(numbers(&r["target"]["range_hz"]), [100.0, 10000.0]);
    // the peak: +6 dB at 1 kHz (Cookbook: the gain at f0)
    let worst = r["target"]["worst_hz"].as_f64().unwrap();
    assert!((worst / 1000.0).log2().abs() < 1.0 / 48.0, "{worst}");
    assert!((r["target"]["max_abs_db"].as_f64().unwrap() - 6.0).abs() < 0.1);
    let m = json(&t.path().join("m/manifest.json"));
    assert_eq!(numbers(&m["settings"]["target_range_hz"]), [100.0, 10000.0]);
}

#[test]
fn bad_targets_are_refused_naming_the_line() {
    let t = tempfile::tempdir().unwrap();
    device(t.path());
    let base = ["analyze", "dut.wav", "--sweep", "sweep.wav", "--out", "m"];
    let cases: [(&str, &str, &str); 5] = [
        (
            "20 0\n1000 zero\n20000 0\n",
            "line 2",
            "frequency_hz target_db",
        ),
        ("# c\n20 0\n2000 0\n1000 0\n", "line 4", "does not increase"),
        ("20 0 1\n20000 0\n", "line 2", "same columns"),
        ("20 0 -1\n20000 0 1\n", "line 1", "positive"),
        ("# nothing\n", "t.csv", "fewer than two"),
    ];
    for (text, line_no, words) in cases {
        std::fs::write(t.path().join("t.csv"), text).unwrap();
        let mut args = base.to_vec();
        args.extend(["--target", "t.csv"]);
        let line = refused(t.path(), &args);
        assert!(line.contains(line_no) && line.contains(words), "{line}");
        assert!(!t.path().join("m").exists(), "nothing written");
    }
    // options that need --target, and a range the target does not cover
    std::fs::write(t.path().join("t.csv"), "100 0\n10000 0\n").unwrap();
    for (extra, words) in [
        (vec!["--target-absolute"], "needs --target"),
        (vec!["--target-range", "100,1000"], "needs --target"),
        (
            vec!["--target", "t.csv", "--target-range", "50,1000"],
            "narrow it",
        ),
        (
            vec!["--target", "t.csv", "--target-range", "1000,100"],
            "LO,HI",
        ),
    ] {
        let mut args = base.to_vec();
        args.extend(extra);
        let line = refused(t.path(), &args);
        assert!(line.contains(words), "{line}");
        assert_eq!(run(t.path(), &args).status.code(), Some(2), "{line}");
        assert!(!t.path().join("m").exists());
    }
}
