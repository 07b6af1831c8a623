//! The speech transmission index and the background noise through the
//! binary: `gliss noise` writes a noise folder from a calibrated recording,
//! `gliss analyze --noise DIR --speech-level DB` includes it in the STI,
//! and results.json says what the value stands for.

use std::path::Path;

use rand::{Rng, SeedableRng};

use crate::util::{json, ok, refused, snapshot, write_wav_f32};

const FS: u32 = 48_000;

/// A calibration file as `gliss calibrate` writes it: `pa_per_fs` Pa RMS
/// per unit RMS of the recording.
fn calibration(dir: &Path, pa_per_fs: f64) {
    let c = serde_json::json!({
        "format": "gliss calibration",
        "schema_version": 1,
        "level_db_spl": 94.0,
        "tone_hz": 1000.0,
        "tone_rms_fs": 1.0 / pa_per_fs,
        "pa_per_fs": pa_per_fs,
        "full_scale_db_spl": 20.0 * (pa_per_fs / 20e-6f64).log10() - 3.0103,
    });
    std::fs::write(dir.join("mic.json"), serde_json::to_vec_pretty(&c).unwrap()).unwrap();
}

/// White noise of RMS `rms` (full scale), `secs` long: equal power per Hz,
/// so an octave holds its bandwidth's share of the power.
fn white(seed: u64, rms: f64, secs: f64) -> Vec<f64> {
    let mut r = rand::rngs::StdRng::seed_from_u64(seed);
    // uniform on ±a has RMS a/√3
    let a = rms * 3f64.sqrt();
    (0..(secs * f64::from(FS)) as usize)
        .map(|_| a * (2.0 * r.random::<f64>() - 1.0))
        .collect()
}

/// An exponentially decaying noise impulse response of reverberation time
/// `t60` (every band the same), after 10 ms of silence.
fn diffuse_ir(seed: u64, t60: f64, secs: f64) -> Vec<f64> {
    let mut r = rand::rngs::StdRng::seed_from_u64(seed);
    let lead = (0.01 * f64::from(FS)) as usize;
    let mut x = vec![0.0; lead];
    for i in 0..(secs * f64::from(FS)) as usize {
        let t = i as f64 / f64::from(FS);
        let g = (-0.5 * 13.815_510_557_964_274 * t / t60).exp();
        x.push(g * (2.0 * r.random::<f64>() - 1.0));
    }
    x
}

/// The STI of an exponential decay of `t60` in every octave, no noise, by
/// hand from the standard's formulas (IEC 60268-16:2011 annex A, weights
/// from memory) and the closed-form m of Houtgast and Steeneken.
fn sti_by_hand(t60: f64) -> f64 {
    let f = [
        0.63, 0.8, 1.0, 1.25, 1.6, 2.0, 2.5, 3.15, 4.0, 5.0, 6.3, 8.0, 10.0, 12.5,
    ];
    let mut mti = 0.0;
    for fm in f {
        let x = std::f64::consts::TAU * fm * t60 / 13.815_510_557_964_274;
        let m = 1.0 / (1.0 + x * x).sqrt();
        let snr = (10.0 * (m / (1.0 - m)).log10()).clamp(-15.0, 15.0);
        mti += (snr + 15.0) / 30.0 / 14.0;
    }
    // the same MTI in every band: STI = MTI·(Σα − Σβ) = MTI
    mti
}

#[test]
fn noise_levels_and_the_sti_with_the_room_noise() {
    let tmp = tempfile::tempdir().unwrap();
    let d = tmp.path();
    calibration(d, 10.0);
    // white noise of RMS 0.01 FS at 10 Pa/FS: 0.1 Pa, 74.0 dB SPL over
    // 0–24 kHz; the 1 kHz octave (707–1413 Hz) holds 706/24000 of it:
    // 74.0 + 10·lg(706.1/24000) = 58.7 dB SPL (closed form)
    write_wav_f32(&d.join("noise.wav"), FS, &[white(3, 0.01, 20.0)]);
    let out = ok(
        d,
        &[
            "noise",
            "noise.wav",
            "--calibration",
            "mic.json",
            "--out",
            "quiet",
        ],
    );
    assert!(out.contains("noise rating NR"), "{out}");
    let n = json(&d.join("quiet/noise.json"));
    let l1k = n["octaves"]
        .as_array()
        .unwrap()
        .iter()
        .find(|b| b["center_hz"] == 1000.0)
        .unwrap()["leq_db"]
        .as_f64()
        .unwrap();
    let want = 20.0 * (0.1f64 / 20e-6).log10() + 10.0 * (706.1f64 / 24_000.0).log10();
    assert!((l1k - want).abs() < 0.2, "1 kHz octave {l1k} vs {want}");
    assert!((n["lzeq_db"].as_f64().unwrap() - 74.0).abs() < 0.1);
    assert!(d.join("quiet/plots/noise.png").is_file());
    let m = json(&d.join("quiet/manifest.json"));
    assert_eq!(m["kind"], "noise");

    // the room: T = 0.8 s in every band, analysed as it is
    write_wav_f32(&d.join("ir.wav"), FS, &[diffuse_ir(5, 0.8, 2.5)]);
    ok(d, &["analyze", "--impulse", "ir.wav", "--out", "alone"]);
    let r = json(&d.join("alone/results.json"));
    let s = &r["speech"];
    let sti = s["sti"].as_f64().unwrap();
    // one realisation of a diffuse decay scatters about the closed form;
    // 0.03 is the STI's just-noticeable difference (Bradley, from memory)
    let hand = sti_by_hand(0.8);
    assert!((sti - hand).abs() < 0.03, "STI {sti} vs by hand {hand}");
    assert_eq!(s["corrections"]["impulse_response_only"], true);
    assert_eq!(s["bands"].as_array().unwrap().len(), 7);
    assert_eq!(s["modulation_hz"].as_array().unwrap().len(), 14);
    assert!(
        s["warning_codes"]
            .as_array()
            .unwrap()
            .iter()
            .any(|c| c == "speech-impulse-only")
    );
    assert!(s["truncation"].as_str().unwrap().contains("crosspoint"));
    assert!(d.join("alone/plots/mtf.png").is_file());

    // with the noise and a raised voice the corrections are applied and
    // recorded, and the noise lowers the STI
    ok(
        d,
        &[
            "analyze",
            "--impulse",
            "ir.wav",
            "--out",
            "noisy",
            "--noise",
            "quiet",
            "--speech-level",
            "66",
        ],
    );
    let r = json(&d.join("noisy/results.json"));
    let s = &r["speech"];
    assert_eq!(s["corrections"]["impulse_response_only"], false);
    assert_eq!(s["corrections"]["speech_level_dba"], 66.0);
    let b1k = s["bands"]
        .as_array()
        .unwrap()
        .iter()
        .find(|b| b["center_hz"] == 1000.0)
        .unwrap();
    assert!((b1k["noise_db"].as_f64().unwrap() - l1k).abs() < 1e-9);
    // speech 66 + (−6.8) dB at 1 kHz against the noise: the factor is at
    // most the noise's 1/(1 + 10^(−SNR/10)) (Houtgast and Steeneken)
    let snr = 66.0 - 6.8 - l1k;
    let noise_part = 1.0 / (1.0 + 10f64.powf(-snr / 10.0));
    let factor = b1k["factor"].as_f64().unwrap();
    assert!(
        factor <= noise_part + 1e-12 && factor > 0.9 * noise_part,
        "{factor} vs {noise_part}"
    );
    let noisy = s["sti"].as_f64().unwrap();
    assert!(noisy < sti - 0.05, "{noisy} vs {sti}");
    assert!(r["noise"]["laeq_db"].as_f64().is_some());
    let m = json(&d.join("noisy/manifest.json"));
    assert_eq!(m["settings"]["speech_level_dba"], 66.0);
    assert!(
        m["settings"]["noise_folder"]
            .as_str()
            .unwrap()
            .starts_with("quiet")
    );
    // the report shows the STI with its band, the MTI table and the noise
    ok(d, &["report", "noisy", "--out", "noisy.html"]);
    let html = std::fs::read_to_string(d.join("noisy.html")).unwrap();
    let q = s["qualification"].as_str().unwrap();
    assert!(
        html.contains(&format!("STI {noisy:.2} (qualification band {q}")),
        "the report names the STI and its band"
    );
    assert!(html.contains("data-table=\"speech\""));
    assert!(html.contains("data-table=\"noise\""));
    assert!(html.contains("dB(A)"));
}

#[test]
fn noise_mistakes_are_refused_in_one_line() {
    let tmp = tempfile::tempdir().unwrap();
    let d = tmp.path();
    calibration(d, 10.0);
    write_wav_f32(&d.join("short.wav"), FS, &[white(1, 0.01, 0.5)]);
    let before = snapshot(d);
    let e = refused(
        d,
        &[
            "noise",
            "short.wav",
            "--calibration",
            "mic.json",
            "--out",
            "n",
        ],
    );
    assert!(e.contains("at least"), "{e}");
    assert_eq!(snapshot(d), before, "a refused run leaves nothing behind");
    std::fs::write(d.join("not-cal.json"), b"{}").unwrap();
    write_wav_f32(&d.join("noise.wav"), FS, &[white(2, 0.01, 2.0)]);
    let e = refused(
        d,
        &[
            "noise",
            "noise.wav",
            "--calibration",
            "not-cal.json",
            "--out",
            "n",
        ],
    );
    assert!(e.contains("calibration"), "{e}");
    // a measurement folder is no noise folder, and a noise folder no measurement
    write_wav_f32(&d.join("ir.wav"), FS, &[diffuse_ir(5, 0.5, 1.5)]);
    ok(d, &["analyze", "--impulse", "ir.wav", "--out", "room"]);
    let e = refused(
        d,
        &[
            "analyze",
            "--impulse",
            "ir.wav",
            "--out",
            "again",
            "--noise",
            "room",
        ],
    );
    assert!(e.contains("not a noise folder"), "{e}");
    ok(
        d,
        &[
            "noise",
            "noise.wav",
            "--calibration",
            "mic.json",
            "--out",
            "n",
        ],
    );
    let e = refused(d, &["report", "n", "--out", "r.html"]);
    assert!(e.contains("noise folder"), "{e}");
    let e = refused(
        d,
        &[
            "analyze",
            "--impulse",
            "ir.wav",
            "--out",
            "x",
            "--speech-level",
            "200",
        ],
    );
    assert!(e.contains("--speech-level"), "{e}");
}

#[test]
fn measure_records_the_room_noise_and_demo_takes_it() {
    let tmp = tempfile::tempdir().unwrap();
    let d = tmp.path();
    calibration(d, 10.0);
    let out = ok(
        d,
        &[
            "measure",
            "--device",
            "virtual",
            "--noise",
            "2",
            "--calibration",
            "mic.json",
            "--out",
            "room-noise",
        ],
    );
    assert!(
        out.contains("outputs silent") || out.contains("every output silent"),
        "{out}"
    );
    let m = json(&d.join("room-noise/manifest.json"));
    assert_eq!(m["kind"], "noise");
    assert_eq!(m["source"]["kind"], "virtual");
    let n = json(&d.join("room-noise/noise.json"));
    assert!(n["rating"]["value"].as_i64().is_some());
    // the raw recording is what was captured: 2 s at 48 kHz
    let (rate, ch) = crate::util::read_wav(&d.join("room-noise/recording.wav"));
    assert_eq!(rate, 48_000);
    assert_eq!(ch[0].len(), 96_000);
    ok(
        d,
        &["demo", "--single", "--out", "talk", "--noise", "room-noise"],
    );
    let r = json(&d.join("talk/results.json"));
    let c = &r["speech"]["corrections"];
    assert_eq!(c["impulse_response_only"], false);
    assert_eq!(c["speech_level_dba"], 60.0);
    assert!(
        c["speech_level_source"]
            .as_str()
            .unwrap()
            .contains("normal vocal effort")
    );
    assert!(r["speech"]["sti"].as_f64().is_some());
    // without a calibration the noise cannot be stated in dB SPL
    let e = refused(
        d,
        &[
            "measure", "--device", "virtual", "--noise", "2", "--out", "x",
        ],
    );
    assert!(e.contains("--calibration"), "{e}");
    assert!(!d.join("x").exists());
}
