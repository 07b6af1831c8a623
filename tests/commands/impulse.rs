//! Issue 13, items 2 and 14: a recording of a different sweep is refused
//! with what it follows; an impulse response from another tool is analysed
//! as it is (`analyze --impulse`); a sweep WAV without its .json is
//! accepted when its parameters can be recovered from the file, and
//! refused with the reason when it is not an exponential sweep.

use std::path::Path;

use rand::{Rng, SeedableRng};
use serde_json::Value;

use crate::util::{json, make_sweep, ok, read_wav, refused, snapshot, write_wav_f32};

fn noise(n: usize, rms: f64, seed: u64) -> Vec<f64> {
    let mut r = rand::rngs::StdRng::seed_from_u64(seed);
    let a = rms * 3f64.sqrt();
    (0..n)
        .map(|_| a * (2.0 * r.random::<f64>() - 1.0))
        .collect()
}

fn rms(x: &[f64]) -> f64 {
    (x.iter().map(|v| v * v).sum::<f64>() / x.len() as f64).sqrt()
}

/// `x` through a room: a direct sound, then a decaying noise tail of
/// reverberation time `t60` (60 dB in t60), 5 ms later.
fn room(x: &[f64], t60: f64, seed: u64) -> Vec<f64> {
    let fs = 48_000.0;
    let mut h = noise((1.2 * t60 * fs) as usize, 0.03, seed);
    for (i, v) in h.iter_mut().enumerate() {
        *v *= 10f64.powf(-3.0 * i as f64 / (t60 * fs));
    }
    let mut k = vec![0.0; 240];
    k.push(0.5);
    k.extend(h);
    let mut y = gliss::signal::fft::convolve(x, &k);
    y.truncate(x.len());
    y
}

fn codes(r: &Value) -> Vec<String> {
    r["warning_codes"]
        .as_array()
        .unwrap()
        .iter()
        .map(|c| c.as_str().unwrap().to_string())
        .collect()
}

#[test]
fn a_recording_of_a_different_sweep_is_refused_naming_what_it_follows() {
    let t = tempfile::tempdir().unwrap();
    let d = t.path();
    make_sweep(d, "SWEEP.wav", &["--length", "1", "--tail", "1"]);
    make_sweep(
        d,
        "other.wav",
        &[
            "--start", "100", "--end", "10000", "--length", "2", "--tail", "0.5",
        ],
    );
    // the other sweep recorded 1 s late (the case that analysed to a
    // 1.000 s delay without a word)
    let other = read_wav(&d.join("other.wav")).1.remove(0);
    let mut rec = vec![0.0; 48_000];
    rec.extend(&other);
    write_wav_f32(&d.join("rec.wav"), 48_000, &[rec]);
    let before = snapshot(d);
    let line = refused(
        d,
        &["analyze", "rec.wav", "--sweep", "SWEEP.wav", "--out", "x"],
    );
    assert!(
        line.contains("the recording follows a sweep of about 1")
            && ["over 1.9 s", "over 2.0 s", "over 2.1 s"]
                .iter()
                .any(|l| line.contains(l))
            && line.contains("s, not SWEEP.wav's 20 Hz–20 kHz over 1.0 s")
            && line.contains("analyse it with the sweep that was played"),
        "{line}"
    );
    assert_eq!(snapshot(d), before, "nothing written");
    // analysed with the sweep that was played, it is a wire 1 s late
    ok(
        d,
        &[
            "analyze",
            "rec.wav",
            "--sweep",
            "other.wav",
            "--out",
            "y",
            "--no-plots",
        ],
    );
    let r = json(&d.join("y/results.json"));
    assert!((r["delay_s"].as_f64().unwrap() - 1.0).abs() < 1e-4);
}

#[test]
fn the_right_sweep_is_analysed_in_a_room_in_noise_distorted_and_through_a_loopback() {
    let t = tempfile::tempdir().unwrap();
    let d = t.path();
    make_sweep(d, "sweep.wav", &["--length", "1", "--tail", "2.5"]);
    let s = read_wav(&d.join("sweep.wav")).1.remove(0);
    let sweep_rms = rms(&s[..49_000]);
    let reverberant = room(&s, 2.0, 1);
    let n = noise(s.len(), 10.0 * sweep_rms, 2); // −20 dB broadband SNR
    let noisy: Vec<f64> = s.iter().zip(&n).map(|(a, b)| a + b).collect();
    let distorted: Vec<f64> = s.iter().map(|v| 0.1 * (8.0 * v).tanh()).collect();
    for (name, x) in [
        ("room.wav", vec![reverberant.clone()]),
        ("noisy.wav", vec![noisy]),
        ("distorted.wav", vec![distorted]),
        // microphone in the room on 1, loopback on 2
        ("loop.wav", vec![reverberant, s.clone()]),
    ] {
        write_wav_f32(&d.join(name), 48_000, &x);
        let out = format!("out-{name}");
        let mut args = vec![
            "analyze",
            name,
            "--sweep",
            "sweep.wav",
            "--out",
            &out,
            "--no-plots",
        ];
        if name == "loop.wav" {
            args.extend(["--reference", "2"]);
        }
        ok(d, &args);
    }
}

#[test]
fn the_committed_measurements_follow_their_own_sweeps() {
    use gliss::analysis::sweep_track::{SweepCheck, check_recording};
    let root = Path::new(env!("CARGO_MANIFEST_DIR")).join("measurements");
    let mut seen = 0;
    let mut stack = vec![root];
    while let Some(dir) = stack.pop() {
        for e in std::fs::read_dir(&dir).unwrap() {
            let p = e.unwrap().path();
            if p.is_dir() {
                stack.push(p);
            }
        }
        let rec = dir.join("recording.wav");
        if !rec.is_file() {
            continue;
        }
        let m = json(&dir.join("manifest.json"));
        let l = m["sweep"]["rate_constant_s"].as_f64().unwrap();
        let ch = m["channel"].as_u64().unwrap() as usize - 1;
        let (fs, x) = read_wav(&rec);
        let c = check_recording(&x[ch], f64::from(fs), l);
        assert!(
            !matches!(c, SweepCheck::Different(_)),
            "{}: {c:?}",
            dir.display()
        );
        seen += 1;
    }
    assert!(seen >= 3, "{seen} measurements");
}

/// The fixture of tests/fixtures/pyroomacoustics (see its README.md).
fn fixture(name: &str) -> std::path::PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR"))
        .join("tests/fixtures/pyroomacoustics")
        .join(name)
}

#[test]
fn a_simulated_room_from_pyroomacoustics_gives_its_own_t30_per_octave() {
    // the source: pyroomacoustics 0.10.1's hybrid simulator (image-source
    // model to order 3 plus ray tracing, pra.ShoeBox + compute_rir) and its
    // own T30 per octave (pyroomacoustics.experimental.rt60.measure_rt60,
    // decay_db=30, on its OctaveBandsFactory bands) in
    // ism_shoebox_t30.json, made by make_ir.py beside it; its README.md
    // says how the two estimators differ and how eight realisations agreed
    let t = tempfile::tempdir().unwrap();
    let d = t.path();
    std::fs::copy(fixture("ism_shoebox.wav"), d.join("ir.wav")).unwrap();
    let out = ok(d, &["analyze", "--impulse", "ir.wav", "--out", "room"]);
    assert!(out.contains("wrote the measurement folder"), "{out}");
    let r = json(&d.join("room/results.json"));
    let want = json(&fixture("ism_shoebox_t30.json"));
    assert!(want["source"].as_str().unwrap().contains("pyroomacoustics"));
    let bands = r["bands"].as_array().unwrap();
    let mut compared = 0;
    for b in want["bands"].as_array().unwrap() {
        let fc = b["center_hz"].as_f64().unwrap();
        let theirs = b["t30_s"].as_f64().unwrap();
        let ours = bands
            .iter()
            .find(|g| g["fraction"] == "1/1" && (g["center_hz"].as_f64().unwrap() - fc).abs() < 1.0)
            .and_then(|g| g["t30_s"].as_f64())
            .unwrap_or_else(|| panic!("no T30 at {fc} Hz"));
        eprintln!("{fc} Hz: gliss {ours:.4} s, pyroomacoustics {theirs:.4} s");
        assert!(
            (ours / theirs - 1.0).abs() < 0.02,
            "{fc} Hz: gliss {ours} s, pyroomacoustics {theirs} s"
        );
        compared += 1;
    }
    assert_eq!(compared, 6);
}

#[test]
fn an_impulse_response_is_analysed_as_it_is() {
    let t = tempfile::tempdir().unwrap();
    let d = t.path();
    // a decaying noise tail (T 0.6 s) after a direct sound at 12.5 ms
    let fs = 48_000.0;
    let mut h = vec![0.0; 600];
    h.push(0.8);
    let mut tail = noise(48_000, 0.05, 7);
    for (i, v) in tail.iter_mut().enumerate() {
        *v *= 10f64.powf(-3.0 * i as f64 / (0.6 * fs));
    }
    h.extend(tail);
    write_wav_f32(&d.join("ir.wav"), 48_000, &[h.clone()]);
    let before = snapshot(d);
    ok(d, &["analyze", "--impulse", "ir.wav", "--out", "m"]);
    let r = json(&d.join("m/results.json"));
    // the delay is the peak's position
    assert!(
        (r["delay_s"].as_f64().unwrap() - 600.0 / fs).abs() < 1e-6,
        "{}",
        r["delay_s"]
    );
    assert!(r["delay_reference"].as_str().unwrap().contains("peak"));
    assert!(r["distortion"].is_null());
    assert!(
        codes(&r).contains(&"distortion-needs-sweep".to_string()),
        "{:?}",
        codes(&r)
    );
    let m = json(&d.join("m/manifest.json"));
    assert_eq!(m["source"]["kind"], "impulse");
    let files = m["files"].as_array().unwrap();
    let input = files
        .iter()
        .find(|f| f["name"] == "input-impulse.wav")
        .unwrap();
    assert_eq!(input["role"], "raw");
    assert_eq!(
        std::fs::read(d.join("m/input-impulse.wav")).unwrap(),
        before[&d.join("ir.wav")],
        "kept unchanged"
    );
    assert!(
        !files
            .iter()
            .any(|f| f["name"] == "stimulus.wav" || f["name"] == "recording.wav")
    );
    // T30 per octave from 250 Hz: the decay's own 0.6 s
    for b in r["bands"].as_array().unwrap() {
        let fc = b["center_hz"].as_f64().unwrap();
        if b["fraction"] == "1/1" && (250.0..=8_000.0).contains(&fc) {
            let t30 = b["t30_s"].as_f64().unwrap();
            assert!((t30 / 0.6 - 1.0).abs() < 0.06, "{fc} Hz: {t30}");
        }
    }
    // the plots are drawn and the folder reads back (report)
    #[cfg(feature = "plots")]
    assert!(d.join("m/plots/response.png").is_file());
    ok(d, &["report", "m", "--out", "report.html"]);
    // its curves export as they are; smoothing again from impulse.wav,
    // which needs the sweep's window layout, is refused with the reason
    let csv = ok(d, &["export", "m", "--what", "response", "--out", "-"]);
    assert!(csv.lines().count() > 100, "{csv}");
    let line = refused(
        d,
        &[
            "export", "m", "--what", "response", "--smooth", "1/3", "--out", "-",
        ],
    );
    assert!(line.contains("analysed from an impulse response"), "{line}");
    // what needs a sweep or a level is refused, and nothing is written
    let before = snapshot(d);
    let line = refused(
        d,
        &[
            "analyze",
            "--impulse",
            "ir.wav",
            "--out",
            "n",
            "--channel",
            "2",
        ],
    );
    assert!(line.contains("--channel 2 does not exist"), "{line}");
    assert_eq!(snapshot(d), before);
}

#[test]
fn a_sweep_without_its_json_analyses_as_with_it() {
    let t = tempfile::tempdir().unwrap();
    let d = t.path();
    make_sweep(d, "sweep.wav", &["--length", "2", "--tail", "1.5"]);
    let s = read_wav(&d.join("sweep.wav")).1.remove(0);
    let mut rec = vec![0.0; 300];
    rec.extend(room(&s, 0.8, 3).iter().map(|v| v + 0.0));
    rec.truncate(s.len());
    write_wav_f32(&d.join("rec.wav"), 48_000, &[rec]);
    ok(
        d,
        &[
            "analyze",
            "rec.wav",
            "--sweep",
            "sweep.wav",
            "--out",
            "with",
            "--no-plots",
        ],
    );
    // the same sweep, its .json gone
    std::fs::create_dir(d.join("bare")).unwrap();
    std::fs::copy(d.join("sweep.wav"), d.join("bare/sweep.wav")).unwrap();
    ok(
        d,
        &[
            "analyze",
            "rec.wav",
            "--sweep",
            "bare/sweep.wav",
            "--out",
            "without",
            "--no-plots",
        ],
    );
    let a = json(&d.join("with/results.json"));
    let b = json(&d.join("without/results.json"));
    assert_eq!(a["delay_s"], b["delay_s"]);
    assert_eq!(a["response"]["frequency_hz"], b["response"]["frequency_hz"]);
    assert_eq!(a["response"]["magnitude_db"], b["response"]["magnitude_db"]);
    assert_eq!(a["bands"], b["bands"]);
    assert_eq!(a["distortion"], b["distortion"]);
    let ma = json(&d.join("with/manifest.json"));
    let mb = json(&d.join("without/manifest.json"));
    assert_eq!(
        ma["sweep"]["rate_constant_s"],
        mb["sweep"]["rate_constant_s"]
    );
    assert_eq!(ma["sweep"]["sweep_samples"], mb["sweep"]["sweep_samples"]);
    assert!(
        codes(&b).contains(&"sweep-recovered".to_string()),
        "{:?}",
        codes(&b)
    );
    assert!(
        b["warnings"]
            .to_string()
            .contains("generate the file exactly"),
        "{}",
        b["warnings"]
    );

    // an exponential sweep of another program (not synchronised: L =
    // 1/ln 1000, 20 Hz–20 kHz in 1 s, then 1 s of silence), recorded
    // through a wire 2 ms late: analysed with its measured law, a flat
    // response and the delay of the wire
    let fs = 48_000.0;
    let l = 1.0 / 1000f64.ln();
    let mut theirs: Vec<f64> = (0..48_000)
        .map(|n| {
            let t = n as f64 / fs;
            0.3 * (std::f64::consts::TAU * 20.0 * l * ((t / l).exp() - 1.0)).sin()
        })
        .collect();
    theirs.extend(vec![0.0; 48_000]);
    let mut wire = vec![0.0; 96];
    wire.extend(&theirs[..theirs.len() - 96]);
    write_wav_f32(&d.join("theirs.wav"), 48_000, &[theirs]);
    write_wav_f32(&d.join("wire.wav"), 48_000, &[wire]);
    ok(
        d,
        &[
            "analyze",
            "wire.wav",
            "--sweep",
            "theirs.wav",
            "--out",
            "theirs",
            "--no-plots",
        ],
    );
    let r = json(&d.join("theirs/results.json"));
    assert!(
        (r["delay_s"].as_f64().unwrap() - 0.002).abs() < 1e-5,
        "{}",
        r["delay_s"]
    );
    let f = crate::util::numbers(&r["response"]["frequency_hz"]);
    let m = crate::util::numbers(&r["response"]["magnitude_db"]);
    for (f, m) in f.iter().zip(&m) {
        if (100.0..=10_000.0).contains(f) {
            assert!(m.abs() < 0.1, "{f} Hz: {m} dB");
        }
    }
    assert!(
        r["warnings"].to_string().contains("not a sweep gliss made"),
        "{}",
        r["warnings"]
    );
    let mt = json(&d.join("theirs/manifest.json"));
    let lt = mt["sweep"]["rate_constant_s"].as_f64().unwrap();
    // the law to within 0.3 % (the analytic signal's ripple)
    assert!((lt / l - 1.0).abs() < 3e-3, "{lt}");

    // a linear sweep and noise, without a .json, are refused with the reason
    let fs = 48_000.0;
    let lin: Vec<f64> = (0..96_000)
        .map(|n| {
            let t = n as f64 / fs;
            0.1 * (std::f64::consts::TAU * (20.0 * t + 0.5 * 9_990.0 * t * t)).sin()
        })
        .collect();
    write_wav_f32(&d.join("linear.wav"), 48_000, &[lin]);
    write_wav_f32(&d.join("noise.wav"), 48_000, &[noise(96_000, 0.05, 4)]);
    let before = snapshot(d);
    for bad in ["linear.wav", "noise.wav"] {
        let line = refused(d, &["analyze", "rec.wav", "--sweep", bad, "--out", "z"]);
        assert!(
            line.contains("its parameters cannot be recovered from the file")
                && line.contains("not an exponential sweep"),
            "{line}"
        );
    }
    assert_eq!(snapshot(d), before, "nothing written");
}
