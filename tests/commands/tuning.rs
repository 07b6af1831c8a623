//! `gliss tune` through the binary: a device built from known filters is
//! measured, tuned to a flat target, and the exported coefficients, run
//! through the tests' own difference equation after the device, bring it
//! within the tolerance; a demo room's average is tuned below its
//! transition frequency; the folder is read back, reported and refused
//! where it is not a measurement.

use std::path::Path;

use crate::cookbook::{Coeffs, FS, filter, highpass, lowpass, peaking, response};
use crate::util::{json, ok, read_wav, record_device, refused, snapshot};

/// A loudspeaker-like device: high-pass at 45 Hz, low-pass at 18 kHz, a
/// +6 dB peak at 400 Hz (Q 3), a −5 dB dip at 2.5 kHz (Q 2).
fn device() -> [Coeffs; 4] {
    let q = std::f64::consts::FRAC_1_SQRT_2;
    [
        highpass(45.0, q),
        lowpass(18_000.0, q),
        peaking(400.0, 3.0, 6.0),
        peaking(2500.0, 2.0, -5.0),
    ]
}

fn through(filters: &[Coeffs], x: &[f64]) -> Vec<f64> {
    filters.iter().fold(x.to_vec(), |y, c| filter(c, &y))
}

fn flat_target(dir: &Path) {
    std::fs::write(dir.join("flat.csv"), "# flat, ±1 dB\n20 0 1\n20000 0 1\n").unwrap();
}

/// Measures the device into `m` and tunes it into `t` over 100 Hz–10 kHz.
fn measured_and_tuned(dir: &Path) -> serde_json::Value {
    tuned_over(
        dir,
        "100,10000",
        &["--rate", "48000", "--rate", "96000", "--fir", "8192"],
    )
}

/// Measures the device into `m` and tunes it into `t` over `range` to a
/// flat target, with `extra` options.
fn tuned_over(dir: &Path, range: &str, extra: &[&str]) -> serde_json::Value {
    record_device(dir, &[], |x| through(&device(), x));
    ok(
        dir,
        &[
            "analyze",
            "dut.wav",
            "--sweep",
            "sweep.wav",
            "--out",
            "m",
            "--no-plots",
        ],
    );
    flat_target(dir);
    let mut args = vec![
        "tune", "m", "--target", "flat.csv", "--out", "t", "--range", range,
    ];
    args.extend_from_slice(extra);
    ok(dir, &args);
    json(&dir.join("t/tuning.json"))
}

/// The sections exported at the first rate of a tuning.json.
fn sections(t: &serde_json::Value) -> Vec<Coeffs> {
    t["coefficients"][0]["sections"]
        .as_array()
        .unwrap()
        .iter()
        .map(|s| {
            let v: Vec<f64> = s
                .as_array()
                .unwrap()
                .iter()
                .map(|x| x.as_f64().unwrap())
                .collect();
            [v[0], v[1], v[2], v[3], v[4]]
        })
        .collect()
}

#[test]
fn the_exported_filters_bring_a_known_device_within_a_flat_targets_tolerance() {
    let d = tempfile::tempdir().unwrap();
    let t = measured_and_tuned(d.path());
    assert_eq!(t["schema_version"], 1);
    assert!(
        t["coefficient_order"]
            .as_str()
            .unwrap()
            .starts_with("b0, b1, b2, a1, a2")
    );
    let filters = t["filters"].as_array().unwrap();
    assert!(!filters.is_empty() && filters.len() <= 10);
    for f in filters {
        assert!(f["gain_db"].as_f64().unwrap() <= 6.0 + 1e-9, "{f}");
    }
    // the coefficients as exported at 48 kHz, applied to the device's own
    // response by the tests' closed form (not gliss's)
    let set = &t["coefficients"][0];
    assert_eq!(set["sample_rate_hz"], 48_000.0);
    let sections = sections(&t);
    assert_eq!(sections.len(), filters.len());
    assert_eq!(t["coefficients"][1]["sample_rate_hz"], 96_000.0);
    let grid: Vec<f64> = (0..=(48.0 * (10_000f64 / 100.0).log2()) as usize)
        .map(|k| 100.0 * 2f64.powf(k as f64 / 48.0))
        .collect();
    let db = |cs: &[Coeffs], f: f64| -> f64 {
        cs.iter()
            .map(|c| 20.0 * response(c, f).norm().log10())
            .sum()
    };
    let corrected: Vec<f64> = grid
        .iter()
        .map(|&f| db(&device(), f) + db(&sections, f))
        .collect();
    let mean = corrected.iter().sum::<f64>() / corrected.len() as f64;
    let worst = corrected
        .iter()
        .map(|c| (c - mean).abs())
        .fold(0.0, f64::max);
    assert!(
        worst <= 1.0,
        "{worst:.2} dB from flat after the exported filters"
    );
    let before = t["before"]["max_abs_db"].as_f64().unwrap();
    let after = t["after"]["max_abs_db"].as_f64().unwrap();
    assert!(before > 5.0 && after < 1.0, "{before} → {after}");
    // and through the difference equation: a sine at the peak comes out
    // of device + filters at the level of one in the flat part (1 kHz)
    let level = |f: f64| {
        let x: Vec<f64> = (0..48_000)
            .map(|n| (std::f64::consts::TAU * f * n as f64 / FS).sin())
            .collect();
        let y = through(&sections, &through(&device(), &x));
        let tail = &y[24_000..];
        (2.0 * tail.iter().map(|v| v * v).sum::<f64>() / tail.len() as f64).sqrt()
    };
    let diff = 20.0 * (level(400.0) / level(1000.0)).log10();
    assert!(
        diff.abs() < 1.0,
        "400 Hz is {diff:.2} dB from 1 kHz after tuning"
    );
    // the FIR: 8192 taps of 32-bit float; the device through it at 400 Hz
    // and 1 kHz by the naive DTFT, as flat as through the biquads
    let (rate, ch) = read_wav(&d.path().join("t/correction.wav"));
    assert_eq!((rate, ch.len(), ch[0].len()), (48_000, 1, 8192));
    assert_eq!(t["fir"]["taps"], 8192);
    let dtft_db = |f: f64| {
        let w = std::f64::consts::TAU * f / FS;
        let (re, im) = ch[0]
            .iter()
            .enumerate()
            .fold((0.0, 0.0), |(re, im), (n, v)| {
                (re + v * (w * n as f64).cos(), im - v * (w * n as f64).sin())
            });
        10.0 * (re * re + im * im).log10()
    };
    let through_fir = |f: f64| db(&device(), f) + dtft_db(f);
    let d400 = through_fir(400.0) - through_fir(1000.0);
    assert!(
        d400.abs() < 1.0,
        "400 Hz is {d400:.2} dB from 1 kHz through the FIR"
    );
    // gliss compare takes the tuning's prediction as one curve: against the
    // measurement it is the correction, about −6 dB at the 400 Hz peak
    ok(d.path(), &["compare", "m", "t", "--out", "c", "--no-plots"]);
    let c = json(&d.path().join("c/comparison.json"));
    assert_eq!(c["inputs"][1]["label"], "t (predicted)");
    let f = crate::util::numbers(&c["response"]["frequency_hz"]);
    let k = f.iter().position(|&x| x >= 400.0).unwrap();
    let diff = c["response"]["difference_db"][1][k].as_f64().unwrap();
    assert!((diff + 6.0).abs() < 1.0, "{diff} dB at {} Hz", f[k]);
    let txt = std::fs::read_to_string(d.path().join("t/filters.txt")).unwrap();
    assert_eq!(
        txt.lines().filter(|l| l.starts_with("Filter ")).count(),
        filters.len()
    );
}

#[test]
fn a_demo_room_is_tuned_below_its_transition_frequency_and_reported() {
    let d = tempfile::tempdir().unwrap();
    let dir = d.path();
    ok(dir, &["demo", "--out", "demo", "--no-plots"]);
    // the demo's own tuning step: the treated room to a gently sloping
    // target, in its own report
    let own = json(&dir.join("demo/tuning/tuning.json"));
    assert!(
        own["after"]["mean_abs_db"].as_f64().unwrap()
            < own["before"]["mean_abs_db"].as_f64().unwrap()
    );
    let page = std::fs::read_to_string(dir.join("demo/tuning.html")).unwrap();
    assert!(page.contains("Correction filters"));
    std::fs::write(
        dir.join("slope.csv"),
        "frequency_hz,target_db,lower_db,upper_db\n20,4,2,2\n200,2,2,2\n1000,0,2,2\n20000,-4,2,2\n",
    )
    .unwrap();
    // the demo room: 4.6 × 3.8 × 2.6 m
    let out = ok(
        dir,
        &[
            "tune",
            "demo/after-1",
            "demo/after-2",
            "demo/after-3",
            "--target",
            "slope.csv",
            "--out",
            "t",
            "--volume",
            "45.448",
        ],
    );
    assert!(out.contains("below it"), "{out}");
    let t = json(&dir.join("t/tuning.json"));
    let tr = t["transition"]["frequency_hz"].as_f64().unwrap();
    // 2000·√(T/V) with the average's T of about 0.3 s in 45 m³
    assert!(tr > 120.0 && tr < 250.0, "{tr}");
    let b = &t["below_transition"];
    let (mb, ma) = (
        b["before"]["mean_abs_db"].as_f64().unwrap(),
        b["after"]["mean_abs_db"].as_f64().unwrap(),
    );
    assert!(ma < mb, "mean deviation below the transition {mb} → {ma}");
    assert!(
        b["after"]["max_abs_db"].as_f64().unwrap() < b["before"]["max_abs_db"].as_f64().unwrap()
    );
    // above the transition only broad filters
    for f in t["filters"].as_array().unwrap() {
        if f["frequency_hz"].as_f64().unwrap() > tr {
            assert!(f["q"].as_f64().unwrap() <= 1.0 + 1e-9, "{f}");
        }
    }
    let m = json(&dir.join("t/manifest.json"));
    assert_eq!(m["kind"], "tuning");
    assert_eq!(m["inputs"].as_array().unwrap().len(), 3);
    // the report shows before, predicted and target, and the filters
    ok(dir, &["report", "t", "--out", "r.html"]);
    let html = std::fs::read_to_string(dir.join("r.html")).unwrap();
    assert!(html.contains("Correction filters"), "no filters table");
    assert!(html.contains("predicted"), "no prediction");
    assert!(html.contains("Below the room's transition frequency"));
    #[cfg(feature = "plots")]
    assert!(html.contains("plots/tuning.png"));
}

#[test]
fn a_tuning_folder_is_refused_where_a_measurement_is_needed() {
    let d = tempfile::tempdir().unwrap();
    let dir = d.path();
    measured_and_tuned(dir);
    let e = refused(
        dir,
        &["export", "t", "--what", "response", "--out", "x.csv"],
    );
    assert!(e.contains("is a tuning folder (gliss tune)"), "{e}");
    // a tuning folder is not tuned again
    let e = refused(dir, &["tune", "t", "--target", "flat.csv", "--out", "t2"]);
    assert!(e.contains("tuning folder"), "{e}");
    // never overwritten without --overwrite
    let before = snapshot(&dir.join("t"));
    let e = refused(dir, &["tune", "m", "--target", "flat.csv", "--out", "t"]);
    assert!(e.contains("--overwrite"), "{e}");
    assert_eq!(snapshot(&dir.join("t")), before);
    // a changed tuning.json is noticed by the one reader
    let p = dir.join("t/tuning.json");
    let mut bytes = std::fs::read(&p).unwrap();
    bytes.push(b'\n');
    std::fs::write(&p, bytes).unwrap();
    let e = refused(dir, &["report", "t", "--out", "r.html"]);
    assert!(e.contains("tuning.json does not match"), "{e}");
}

#[test]
fn bad_tuning_options_get_one_clear_line() {
    let d = tempfile::tempdir().unwrap();
    let dir = d.path();
    ok(dir, &["demo", "--single", "--out", "m", "--no-plots"]);
    flat_target(dir);
    let base = ["tune", "m", "--target", "flat.csv", "--out", "t"];
    let with = |extra: &[&str]| -> Vec<String> {
        base.iter().chain(extra).map(|s| s.to_string()).collect()
    };
    for (extra, says) in [
        (&["--above-transition", "none"][..], "needs --volume"),
        (&["--q-range", "4,1"][..], "--q-range"),
        (&["--filters", "0"][..], "--filters"),
        (&["--max-boost", "-3"][..], "--max-boost"),
        (&["--range", "10,30000"][..], "--range"),
        (&["--rate", "1000"][..], "--rate"),
        (&["--volume", "0"][..], "--volume"),
        (&["--fir", "10"][..], "--fir"),
    ] {
        let args = with(extra);
        let args: Vec<&str> = args.iter().map(String::as_str).collect();
        let e = refused(dir, &args);
        assert!(e.contains(says), "{extra:?}: {e}");
    }
    assert!(
        !dir.join("t").exists(),
        "nothing is written for a refused run"
    );
}

#[test]
fn a_loudspeakers_roll_off_is_left_alone_and_a_boost_past_the_range_is_said() {
    // the device of the tests above (high-pass at 45 Hz), measured without
    // a room and tuned over 20 Hz–10 kHz, wider than it plays
    let d = tempfile::tempdir().unwrap();
    let dir = d.path();
    let t = tuned_over(dir, "20,10000", &[]);
    let roll = t["uncorrectable"]
        .as_array()
        .unwrap()
        .iter()
        .find(|r| r["kind"] == "roll_off")
        .expect("the roll-off below 45 Hz is left alone");
    // a second-order Butterworth high-pass is 3 dB down at its corner
    // (closed form), so the region reaches from 20 Hz to about 45 Hz
    let top = roll["range_hz"][1].as_f64().unwrap();
    assert!((40.0..52.0).contains(&top), "{roll}");
    // the filters as exported, by the tests' own closed form: no boost
    // into the roll-off
    let sections = sections(&t);
    for f in [20.0, 25.0, 30.0, 35.0, 40.0] {
        let db: f64 = sections
            .iter()
            .map(|c| 20.0 * response(c, f).norm().log10())
            .sum();
        assert!(db <= 0.1, "{db:.2} dB of boost at {f} Hz");
    }
    let txt = std::fs::read_to_string(dir.join("t/filters.txt")).unwrap();
    assert!(txt.contains("roll-off"), "{txt}");

    // a boost the design places at the range's edge is said: the committed
    // demo room tuned from 40 Hz, below where its monitors play (the
    // room's gain hides their roll-off from the measurement)
    let m = Path::new(env!("CARGO_MANIFEST_DIR")).join("measurements/rehearsal-room");
    let arg = |k: u32| m.join(format!("after-{k}")).display().to_string();
    let target = m.join("target.csv").display().to_string();
    ok(
        dir,
        &[
            "tune",
            &arg(1),
            &arg(2),
            &arg(3),
            "--target",
            &target,
            "--range",
            "40,16000",
            "--volume",
            "45.448",
            "--out",
            "room",
            "--no-plots",
        ],
    );
    let r = json(&dir.join("room/tuning.json"));
    let codes: Vec<&str> = r["warning_codes"]
        .as_array()
        .unwrap()
        .iter()
        .filter_map(|c| c.as_str())
        .collect();
    assert!(codes.contains(&"tuning-boost-past-edge"), "{codes:?}");
    // and none when the range is where the monitors play (the demo's own)
    let own = json(&m.join("tuning/tuning.json"));
    assert!(!own["warning_codes"].to_string().contains("boost-past-edge"));
}
