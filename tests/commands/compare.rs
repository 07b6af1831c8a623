//! `gliss average` and `gliss compare` on rooms of the test's own: the
//! sweep through an exponentially decaying noise of known decay time.

use std::path::Path;

use rand::{Rng, SeedableRng, rngs::StdRng};
use serde_json::Value;

use crate::util::*;

/// An impulse response of Gaussian-like noise (the same `seed`, so two rooms
/// differ only in their decay) decaying by 60 dB in `t60` seconds.
fn room(t60: f64, seed: u64) -> Vec<f64> {
    let fs = 48_000.0;
    let mut rng = StdRng::seed_from_u64(seed);
    let n = (1.6 * t60 * fs) as usize;
    let mut h: Vec<f64> = (0..n)
        .map(|i| {
            // the sum of four uniforms is close enough to Gaussian here
            let x: f64 = (0..4).map(|_| rng.random::<f64>() - 0.5).sum();
            // energy falls 60 dB in t60: amplitude e^(−6.9078 t / t60)
            x * (-6.907_755 * i as f64 / fs / t60).exp()
        })
        .collect();
    h[0] += 1.0; // the direct sound
    let peak = h.iter().fold(0.0f64, |m, v| m.max(v.abs()));
    h.iter_mut().for_each(|v| *v *= 0.5 / peak);
    h
}

/// Analyses the sweep through `h` scaled by `gain` into `out`.
fn measure_room(dir: &Path, out: &str, h: &[f64], gain: f64) -> Value {
    let sweep = dir.join("sweep.wav");
    if !sweep.exists() {
        make_sweep(dir, "sweep.wav", &["--length", "3", "--tail", "2"]);
    }
    let x = read_wav(&sweep).1.remove(0);
    let mut y = gliss::signal::fft::convolve(&x, h);
    y.truncate(x.len());
    y.iter_mut().for_each(|v| *v *= gain);
    let rec = format!("{out}.wav");
    write_wav_f32(&dir.join(&rec), 48_000, &[y]);
    ok(
        dir,
        &[
            "analyze",
            &rec,
            "--sweep",
            "sweep.wav",
            "--out",
            out,
            "--no-plots",
            "--harmonics",
            "1",
        ],
    );
    json(&dir.join(out).join("results.json"))
}

fn band<'a>(r: &'a Value, center: f64, fraction: &str) -> &'a Value {
    r["bands"]
        .as_array()
        .unwrap()
        .iter()
        .find(|b| {
            b["fraction"] == fraction && (b["center_hz"].as_f64().unwrap() - center).abs() < 1e-6
        })
        .expect("the band")
}

#[test]
fn the_average_is_the_power_mean_and_the_band_values_their_mean_and_spread() {
    let t = tempfile::tempdir().unwrap();
    let d = t.path();
    // the same room at full level and at half the amplitude (-6.02 dB),
    // and a third, more reverberant position
    let a = measure_room(d, "a", &room(0.5, 7), 1.0);
    measure_room(d, "b", &room(0.5, 7), 0.5);
    let c = measure_room(d, "c", &room(0.6, 8), 1.0);
    ok(d, &["average", "a", "b", "--out", "ab", "--no-plots"]);
    let ab = json(&d.join("ab/results.json"));
    // power average of L and L − 6.02 dB: L + 10·lg((1 + 1/4)/2) (the
    // definition of a power average)
    let want = 10.0 * (1.25f64 / 2.0).log10();
    let la = numbers(&a["response"]["magnitude_db"]);
    let lab = numbers(&ab["response"]["magnitude_db"]);
    let f = numbers(&ab["response"]["frequency_hz"]);
    assert_eq!(la.len(), lab.len());
    for i in 0..f.len() {
        assert!(
            (lab[i] - la[i] - want).abs() < 0.01,
            "{} Hz: {} dB, expected {} dB",
            f[i],
            lab[i] - la[i],
            want
        );
    }
    // three positions: mean and sample standard deviation of T30 by hand
    ok(d, &["average", "a", "b", "c", "--out", "abc", "--no-plots"]);
    let abc = json(&d.join("abc/results.json"));
    let b = json(&d.join("b/results.json"));
    for (center, fraction) in [(500.0, "1/1"), (1000.0, "1/1"), (2000.0, "1/3")] {
        let v: Vec<f64> = [&a, &b, &c]
            .iter()
            .map(|r| band(r, center, fraction)["t30_s"].as_f64().unwrap())
            .collect();
        let mean = (v[0] + v[1] + v[2]) / 3.0;
        let std =
            (((v[0] - mean).powi(2) + (v[1] - mean).powi(2) + (v[2] - mean).powi(2)) / 2.0).sqrt();
        let got = band(&abc, center, fraction);
        assert!(
            (got["t30_s"].as_f64().unwrap() - mean).abs() < 1e-9,
            "{center}"
        );
        assert!(
            (got["spread"]["t30_s"]["std"].as_f64().unwrap() - std).abs() < 1e-9,
            "{center}"
        );
        assert_eq!(got["spread"]["t30_s"]["n"], 3);
    }
    // the folder says what it is and names its inputs with their hashes
    let m = json(&d.join("abc/manifest.json"));
    assert_eq!(m["kind"], "average");
    assert_eq!(m["complete"], true);
    let inputs = m["inputs"].as_array().unwrap();
    assert_eq!(inputs.len(), 3);
    let manifest_a = std::fs::read(d.join("a/manifest.json")).unwrap();
    assert_eq!(
        inputs[0]["sha256"].as_str().unwrap(),
        gliss::folder::sha256_hex(&manifest_a)
    );
    assert_eq!(abc["average"]["positions"], 3);
    assert_eq!(abc["average"]["grade"], "survey");
    // a position folder is still a position folder: average of averages refused
    let line = refused(d, &["average", "ab", "c", "--out", "x"]);
    assert!(line.contains("already an average"), "{line}");
}

fn compare_json(dir: &Path, out: &str, args: &[&str]) -> Value {
    let mut all = vec!["compare"];
    all.extend_from_slice(args);
    all.extend_from_slice(&["--out", out]);
    ok(dir, &all);
    json(&dir.join(out).join("comparison.json"))
}

fn rows<'a>(c: &'a Value, fraction: &str, parameter: &str) -> Vec<&'a Value> {
    c["bands"]
        .as_array()
        .unwrap()
        .iter()
        .filter(|r| r["fraction"] == fraction && r["parameter"] == parameter)
        .collect()
}

#[test]
fn a_measurement_compared_with_itself_shows_no_change() {
    let t = tempfile::tempdir().unwrap();
    let d = t.path();
    measure_room(d, "a", &room(0.5, 3), 1.0);
    let c = compare_json(d, "self", &["a", "a", "--volume", "50"]);
    assert_eq!(c["inputs"].as_array().unwrap().len(), 2);
    let mut checked = 0;
    for r in c["bands"].as_array().unwrap() {
        if r["values"][0].is_null() {
            continue;
        }
        assert_eq!(r["change"][1].as_f64().unwrap(), 0.0, "{r}");
        assert_eq!(r["exceeds_jnd"][1], false, "{r}");
        assert!(r["exceeds_uncertainty"][1] != true, "{r}");
        checked += 1;
    }
    assert!(checked > 50, "only {checked} band values compared");
    for v in c["response"]["difference_db"][1].as_array().unwrap() {
        assert_eq!(v.as_f64().unwrap(), 0.0);
    }
    for a in c["absorption"].as_array().unwrap() {
        if !a["delta_area_m2"][1].is_null() {
            assert_eq!(a["delta_area_m2"][1].as_f64().unwrap(), 0.0);
        }
    }
    for p in [
        "comparison.csv",
        "manifest.json",
        "plots/compare-response.png",
        "plots/compare-difference.png",
        "plots/compare-reverberation.png",
    ] {
        assert!(d.join("self").join(p).is_file(), "{p}");
    }
    assert_eq!(json(&d.join("self/manifest.json"))["kind"], "comparison");
}

#[test]
fn three_percent_is_below_the_jnd_and_ten_percent_above_and_the_absorption_follows_iso_354() {
    let t = tempfile::tempdir().unwrap();
    let d = t.path();
    // the same noise, decaying 3 % and 10 % slower
    measure_room(d, "base", &room(0.6, 11), 1.0);
    measure_room(d, "plus3", &room(0.618, 11), 1.0);
    measure_room(d, "plus10", &room(0.66, 11), 1.0);
    let c = compare_json(
        d,
        "cmp",
        &[
            "base",
            "plus3",
            "plus10",
            "--volume",
            "80",
            "--temperature",
            "24",
        ],
    );
    let mut bands_checked = 0;
    for r in rows(&c, "1/1", "t30_s") {
        let f = r["center_hz"].as_f64().unwrap();
        if !(250.0..=4000.0).contains(&f) {
            continue;
        }
        let rel3 = r["relative_change"][1].as_f64().unwrap();
        let rel10 = r["relative_change"][2].as_f64().unwrap();
        // the measured change is the decay's own, within two points (one
        // realisation of a band-filtered decay scatters by about that;
        // seen: 2.7 to 3.3 % and 9.8 to 11.8 %)
        assert!((rel3 - 0.03).abs() < 0.02, "{f} Hz: {rel3}");
        assert!((rel10 - 0.10).abs() < 0.02, "{f} Hz: {rel10}");
        // ISO 3382-1 Annex A: 5 % for T
        assert_eq!(r["exceeds_jnd"][1], false, "{f} Hz");
        assert_eq!(r["exceeds_jnd"][2], true, "{f} Hz");
        bands_checked += 1;
    }
    assert_eq!(bands_checked, 5);
    // ISO 354 (from memory, one secondary source agrees): A = 55.3·V/(c·T)
    // with c = 331 + 0.6·t, here from each folder's own T30
    let cs = 331.0 + 0.6 * 24.0;
    let rb = json(&d.join("base/results.json"));
    let r10 = json(&d.join("plus10/results.json"));
    for a in c["absorption"].as_array().unwrap() {
        if a["fraction"] != "1/1" || a["parameter"] != "t30_s" {
            continue;
        }
        let f = a["center_hz"].as_f64().unwrap();
        let t0 = band(&rb, f, "1/1")["t30_s"].as_f64().unwrap();
        let t2 = band(&r10, f, "1/1")["t30_s"].as_f64().unwrap();
        let want = 55.3 * 80.0 / (cs * t2) - 55.3 * 80.0 / (cs * t0);
        let got = a["delta_area_m2"][2].as_f64().unwrap();
        assert!((got - want).abs() < 1e-9, "{f} Hz: {got} vs {want}");
        assert!(got < 0.0, "a longer decay is less absorption");
    }
    assert!(c["speed_of_sound_m_s"].as_f64().unwrap() == cs);
}

#[test]
fn folders_of_different_sweeps_are_compared_on_their_common_band_with_a_warning() {
    let t = tempfile::tempdir().unwrap();
    let d = t.path();
    ok(
        d,
        &[
            "demo",
            "--single",
            "--out",
            "wide",
            "--length",
            "2",
            "--tail",
            "1",
            "--no-plots",
        ],
    );
    ok(
        d,
        &[
            "demo",
            "--single",
            "--out",
            "narrow",
            "--length",
            "2",
            "--tail",
            "1",
            "--start",
            "100",
            "--end",
            "10000",
            "--no-plots",
        ],
    );
    let out = ok(
        d,
        &["compare", "wide", "narrow", "--out", "c", "--no-plots"],
    );
    assert!(
        out.contains("warning: the folders' sweeps cover different bands"),
        "{out}"
    );
    let c = json(&d.join("c/comparison.json"));
    let f = numbers(&c["response"]["frequency_hz"]);
    assert!(f[0] >= 100.0 - 1e-6 && *f.last().unwrap() <= 10_000.0 + 1e-6);
    assert!((f[0] - 100.0).abs() < 1.0);
}

#[test]
fn what_is_not_a_complete_measurement_is_refused() {
    let t = tempfile::tempdir().unwrap();
    let d = t.path();
    ok(
        d,
        &[
            "demo",
            "--single",
            "--out",
            "m",
            "--length",
            "2",
            "--tail",
            "1",
            "--no-plots",
        ],
    );
    std::fs::create_dir(d.join("empty")).unwrap();
    let line = refused(d, &["compare", "m", "empty", "--out", "x"]);
    assert!(line.contains("empty is not a measurement folder"), "{line}");
    let line = refused(d, &["compare", "m", "nowhere", "--out", "x"]);
    assert!(line.contains("nowhere is not a folder"), "{line}");
    // an interrupted measurement: its manifest says incomplete
    std::fs::create_dir(d.join("cut")).unwrap();
    let mut m = json(&d.join("m/manifest.json"));
    m["complete"] = Value::Bool(false);
    m["problems"] = serde_json::json!(["stopped after 1.00 s of 3.00 s"]);
    std::fs::write(d.join("cut/manifest.json"), m.to_string()).unwrap();
    let line = refused(d, &["average", "m", "cut", "--out", "x"]);
    assert!(
        line.contains("incomplete") && line.contains("stopped after"),
        "{line}"
    );
    // a comparison is not a measurement
    ok(d, &["compare", "m", "m", "--out", "c", "--no-plots"]);
    let line = refused(d, &["compare", "m", "c", "--out", "x"]);
    assert!(line.contains("is a comparison"), "{line}");
    // and a comparison is never written over an existing folder
    let before = snapshot(&d.join("c"));
    let line = refused(d, &["compare", "m", "m", "--out", "c"]);
    assert!(line.contains("--overwrite"), "{line}");
    assert_eq!(before, snapshot(&d.join("c")));
    for (args, needle) in [
        (
            vec!["compare", "m", "m", "--out", "x", "--volume", "-3"],
            "--volume",
        ),
        (
            vec!["compare", "m", "m", "--out", "x", "--smooth", "1/9"],
            "--smooth",
        ),
        (
            vec!["average", "m", "m", "--out", "x", "--sources", "3"],
            "--sources",
        ),
        (
            vec!["compare", "m", "m", "--out", "x", "--labels", "one"],
            "--labels",
        ),
    ] {
        let line = refused(d, &args);
        assert!(line.contains(needle), "{args:?}: {line}");
    }
    assert!(!d.join("x").exists());
}

#[test]
fn compare_judges_every_response_against_a_target() {
    let t = tempfile::tempdir().unwrap();
    let d = t.path();
    let a = measure_room(d, "a", &room(0.5, 5), 1.0);
    measure_room(d, "b", &room(0.5, 5), 0.5);
    // the target is a's own response between 100 Hz and 10 kHz, ±1 dB
    let f = numbers(&a["response"]["frequency_hz"]);
    let m = numbers(&a["response"]["magnitude_db"]);
    let mut text = String::from("# frequency_hz target_db tolerance_db\n");
    for (f, m) in f.iter().zip(&m) {
        if (100.0..=10_000.0).contains(f) {
            text.push_str(&format!("{f} {m} 1\n"));
        }
    }
    std::fs::write(d.join("target.txt"), text).unwrap();
    let c = compare_json(d, "aligned", &["a", "b", "--target", "target.txt"]);
    // level-aligned, b (a at half the amplitude) matches the target as a
    // does: the offset is taken out and reported (20·lg 2 = 6.02 dB)
    for k in 0..2 {
        let r = &c["target"]["per_input"][k];
        assert!(r["max_abs_db"].as_f64().unwrap() < 0.02, "{r}");
        assert_eq!(r["inside_share"].as_f64().unwrap(), 1.0, "{r}");
    }
    let off = c["target"]["per_input"][1]["level_offset_db"]
        .as_f64()
        .unwrap();
    assert!((off - 20.0 * 2f64.log10()).abs() < 0.02, "{off}");
    let c = compare_json(
        d,
        "absolute",
        &["a", "b", "--target", "target.txt", "--target-absolute"],
    );
    let r = &c["target"]["per_input"][1];
    assert!(
        (r["mean_abs_db"].as_f64().unwrap() - 20.0 * 2f64.log10()).abs() < 0.02,
        "{r}"
    );
    assert_eq!(r["inside_share"].as_f64().unwrap(), 0.0, "{r}");
}

#[test]
fn compare_smooths_measurements_again_from_their_impulse_responses() {
    let t = tempfile::tempdir().unwrap();
    let d = t.path();
    measure_room(d, "a", &room(0.5, 9), 1.0);
    measure_room(d, "b", &room(0.5, 9), 0.5);
    // finer than the folders' 1/6: exact, the same as export gives
    let c = compare_json(d, "c", &["a", "b", "--smooth", "1/24", "--no-plots"]);
    assert_eq!(c["response"]["smoothing"], "1/24");
    let e: Value = serde_json::from_str(&ok(
        d,
        &[
            "export", "a", "--what", "response", "--smooth", "1/24", "--format", "json", "--out",
            "-",
        ],
    ))
    .unwrap();
    let want = numbers(&e["data"]["magnitude_db"]);
    let got: Vec<f64> = c["response"]["magnitude_db"][0]
        .as_array()
        .unwrap()
        .iter()
        .map(|v| v.as_f64().unwrap())
        .collect();
    assert_eq!(want.len(), got.len());
    for (w, g) in want.iter().zip(&got) {
        assert!((w - g).abs() < 1e-6, "{w} vs {g}");
    }
    // the difference of a copy at half the amplitude stays -6.02 dB
    for v in c["response"]["difference_db"][1].as_array().unwrap() {
        assert!((v.as_f64().unwrap() + 20.0 * 2f64.log10()).abs() < 1e-6);
    }
    // an average has no impulse response: finer than its own is refused
    ok(d, &["average", "a", "b", "--out", "ab", "--no-plots"]);
    let line = refused(d, &["compare", "ab", "a", "--out", "x", "--smooth", "1/24"]);
    assert!(line.contains("finer"), "{line}");
}

#[test]
fn align_takes_a_change_of_level_out_of_the_differences_and_says_by_how_much() {
    let t = tempfile::tempdir().unwrap();
    let d = t.path();
    let h = room(0.5, 7);
    measure_room(d, "a", &h, 1.0);
    // the same room measured with the gain 6.02 dB lower (closed form:
    // 20·log10(0.5))
    measure_room(d, "b", &h, 0.5);
    let before = snapshot(d);
    let out = ok(
        d,
        &[
            "compare",
            "a",
            "b",
            "--out",
            "c",
            "--align",
            "200,2000",
            "--no-plots",
        ],
    );
    let c = json(&d.join("c/comparison.json"));
    let al = &c["response"]["alignment"];
    assert_eq!(numbers(&al["band_hz"]), [200.0, 2000.0]);
    let offset = numbers(&al["offset_db"]);
    let expected = -20.0 * 0.5f64.log10();
    assert_eq!(offset[0], 0.0);
    assert!((offset[1] - expected).abs() < 0.01, "{offset:?}");
    assert!(
        out.contains("levels aligned to a over 200 Hz–2 kHz: b +6.02 dB"),
        "{out}"
    );
    // the differences are the shape alone: zero everywhere both have a value
    let f = numbers(&c["response"]["frequency_hz"]);
    for (f, v) in f
        .iter()
        .zip(c["response"]["difference_db"][1].as_array().unwrap())
    {
        if let Some(v) = v.as_f64() {
            assert!(v.abs() < 0.01, "{f} Hz: {v} dB");
        }
    }
    // without --align the level change is there, and nothing is aligned
    let c = compare_json(d, "plain", &["a", "b", "--no-plots"]);
    assert!(c["response"].get("alignment").is_none());
    let at_1k = f
        .iter()
        .position(|x| *x >= 1000.0)
        .map(|i| c["response"]["difference_db"][1][i].as_f64().unwrap())
        .unwrap();
    assert!((at_1k + expected).abs() < 0.01, "{at_1k}");
    // the inputs are untouched; a band outside the response is refused
    for (p, bytes) in &before {
        assert_eq!(&std::fs::read(p).unwrap(), bytes, "{}", p.display());
    }
    let line = refused(
        d,
        &["compare", "a", "b", "--out", "x", "--align", "30000,40000"],
    );
    assert!(
        line.contains("--align") && line.contains("measured range"),
        "{line}"
    );
    assert!(!d.join("x").exists());
}
