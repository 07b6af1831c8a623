//! A wire from output to input, with and without delay: the reference
//! case of every transfer-function measurement (closed form: H = e^{−jωτ}).

use rustfft::{FftPlanner, num_complex::Complex};

use crate::util::*;

/// Delays `x` by `d` samples (any real d) by a phase ramp in the frequency
/// domain: x(t − d), band-limited (closed form of a pure delay).
fn fractional_delay(x: &[f64], d: f64, pad: usize) -> Vec<f64> {
    let n = x.len() + pad;
    let mut buf: Vec<Complex<f64>> = (0..n)
        .map(|i| Complex::new(x.get(i).copied().unwrap_or(0.0), 0.0))
        .collect();
    let mut planner = FftPlanner::new();
    planner.plan_fft_forward(n).process(&mut buf);
    for (k, c) in buf.iter_mut().enumerate() {
        // signed frequency index, Nyquist bin treated as real
        let kk = if k <= n / 2 {
            k as f64
        } else {
            k as f64 - n as f64
        };
        if n % 2 == 0 && k == n / 2 {
            *c *= (std::f64::consts::PI * d).cos();
        } else {
            *c *= Complex::from_polar(1.0, -std::f64::consts::TAU * kk * d / n as f64);
        }
    }
    planner.plan_fft_inverse(n).process(&mut buf);
    buf.iter().map(|c| c.re / n as f64).collect()
}

struct Wire {
    delay_s: f64,
    f: Vec<f64>,
    mag: Vec<f64>,
    phase: Vec<f64>,
}

fn analyse_wire(recording: Vec<Vec<f64>>, channel: &str, smooth: &str) -> Wire {
    let t = tempfile::tempdir().unwrap();
    let sweep = make_sweep(t.path(), "sweep.wav", &["--length", "2", "--tail", "0.5"]);
    let (rate, _) = read_wav(&sweep);
    let _ = rate;
    write_wav_f32(&t.path().join("rec.wav"), 48_000, &recording);
    ok(
        t.path(),
        &[
            "analyze",
            "rec.wav",
            "--sweep",
            "sweep.wav",
            "--out",
            "m",
            "--smooth",
            smooth,
            "--channel",
            channel,
            "--no-plots",
        ],
    );
    let r = json(&t.path().join("m/results.json"));
    Wire {
        delay_s: r["delay_s"].as_f64().unwrap(),
        f: numbers(&r["response"]["frequency_hz"]),
        mag: numbers(&r["response"]["magnitude_db"]),
        phase: numbers(&r["response"]["phase_deg"]),
    }
}

fn the_sweep() -> Vec<f64> {
    let t = tempfile::tempdir().unwrap();
    let sweep = make_sweep(t.path(), "sweep.wav", &["--length", "2", "--tail", "0.5"]);
    read_wav(&sweep).1.remove(0)
}

/// The criterion: 0.00 ± 0.05 dB from an octave above the sweep's
/// start (20 Hz) to a third of an octave below its end (20 kHz).
fn assert_flat(w: &Wire) {
    let lo = 40.0;
    let hi = 20_000.0 / 2f64.powf(1.0 / 3.0);
    let mut n = 0;
    for (f, m) in w.f.iter().zip(&w.mag) {
        if *f >= lo && *f <= hi {
            assert!(m.abs() <= 0.05, "wire reads {m:.4} dB at {f:.1} Hz");
            n += 1;
        }
    }
    assert!(n > 400, "the band holds {n} grid points");
}

#[test]
fn a_wire_reads_zero_db_and_zero_delay() {
    let x = the_sweep();
    let w = analyse_wire(vec![x], "1", "none");
    assert_flat(&w);
    // 0 samples of delay (the peak refined to well under 0.05 sample)
    assert!(
        (w.delay_s * 48_000.0).abs() < 0.05,
        "delay {} samples",
        w.delay_s * 48_000.0
    );
    // with the removed delay put back, the phase of a wire is 0 (closed form)
    for (f, p) in w.f.iter().zip(&w.phase) {
        if *f >= 40.0 && *f <= 15_000.0 {
            let back = wrap_deg(p - 360.0 * f * w.delay_s);
            assert!(back.abs() < 0.5, "phase {back} at {f}");
        }
    }
}

#[test]
fn a_wire_stays_flat_under_every_smoothing() {
    // fractional-octave smoothing of a flat response stays flat (closed form)
    let x = the_sweep();
    for s in ["1/1", "1/3", "1/48"] {
        let w = analyse_wire(vec![x.clone()], "1", s);
        assert_flat(&w);
    }
}

#[test]
fn an_integer_delay_of_k_samples_reads_k_over_fs() {
    let x = the_sweep();
    for k in [1usize, 480, 4801] {
        let mut y = vec![0.0; k];
        y.extend_from_slice(&x);
        let w = analyse_wire(vec![y], "1", "none");
        let got = w.delay_s * 48_000.0;
        assert!((got - k as f64).abs() < 0.01, "k = {k}: read {got} samples");
        assert_flat(&w);
    }
}

#[test]
fn a_fractional_delay_reads_within_five_hundredths_of_a_sample() {
    let x = the_sweep();
    for d in [0.5, 37.3, 1000.77] {
        let y = fractional_delay(&x, d, 2048);
        let w = analyse_wire(vec![y], "1", "none");
        let got = w.delay_s * 48_000.0;
        assert!((got - d).abs() < 0.05, "d = {d}: read {got} samples");
        // after removing the measured delay the phase is flat to within
        // what 0.05 sample leaves at high frequency: 360·f·0.05/fs degrees
        for (f, p) in w.f.iter().zip(&w.phase) {
            if *f >= 40.0 && *f <= 15_000.0 {
                let allowed = 360.0 * f * 0.05 / 48_000.0 + 0.5;
                assert!(p.abs() < allowed, "d = {d}: phase {p} at {f}");
            }
        }
    }
}

#[test]
fn the_chosen_channel_of_a_multichannel_recording_is_analysed() {
    let x = the_sweep();
    let other: Vec<f64> = x.iter().map(|v| 0.3 * v).collect(); // −10.46 dB
    let w = analyse_wire(vec![other.clone(), x.clone(), other], "2", "none");
    assert_flat(&w);
    let w1 = analyse_wire(vec![x.iter().map(|v| 0.3 * v).collect(), x], "1", "none");
    let mid = w1.mag[w1.f.iter().position(|f| *f >= 1000.0).unwrap()];
    // 20·lg 0.3 = −10.457 dB (closed form)
    assert!((mid - 20.0 * 0.3f64.log10()).abs() < 0.01, "{mid}");
}

#[test]
fn integer_recordings_read_the_same_as_float() {
    // 24-bit quantisation of the recording leaves the wire within 0.05 dB;
    // 16-bit at −20 dBFS too (its noise is ~70 dB below the sweep)
    let x = the_sweep();
    for bits in [16u16, 24] {
        let t = tempfile::tempdir().unwrap();
        make_sweep(t.path(), "sweep.wav", &["--length", "2", "--tail", "0.5"]);
        write_wav_int(
            &t.path().join("rec.wav"),
            48_000,
            bits,
            std::slice::from_ref(&x),
        );
        ok(
            t.path(),
            &[
                "analyze",
                "rec.wav",
                "--sweep",
                "sweep.wav",
                "--out",
                "m",
                "--no-plots",
            ],
        );
        let r = json(&t.path().join("m/results.json"));
        let w = Wire {
            delay_s: r["delay_s"].as_f64().unwrap(),
            f: numbers(&r["response"]["frequency_hz"]),
            mag: numbers(&r["response"]["magnitude_db"]),
            phase: numbers(&r["response"]["phase_deg"]),
        };
        assert_flat(&w);
        assert!(w.delay_s.abs() * 48_000.0 < 0.05);
        assert_eq!(w.phase.len(), w.f.len());
    }
}

#[test]
fn a_microphone_correction_comes_off_the_response() {
    // a correction of +3 dB at all frequencies lowers the response by
    // exactly 3.00 dB (closed form: the file's deviation is divided out)
    let t = tempfile::tempdir().unwrap();
    make_sweep(t.path(), "sweep.wav", &["--length", "2", "--tail", "0.5"]);
    std::fs::copy(t.path().join("sweep.wav"), t.path().join("rec.wav")).unwrap();
    std::fs::write(t.path().join("plus3.txt"), "# flat +3 dB\n10 3\n24000 3\n").unwrap();
    let args = |out: &'static str| {
        vec![
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
    };
    ok(t.path(), &args("plain"));
    let mut with = args("corrected");
    with.extend_from_slice(&["--mic-correction", "plus3.txt"]);
    ok(t.path(), &with);
    let a = numbers(&json(&t.path().join("plain/results.json"))["response"]["magnitude_db"]);
    let b = numbers(&json(&t.path().join("corrected/results.json"))["response"]["magnitude_db"]);
    for (x, y) in a.iter().zip(&b) {
        assert!((x - y - 3.0).abs() < 0.005, "{x} vs {y}");
    }
    let m = json(&t.path().join("corrected/manifest.json"));
    assert_eq!(m["settings"]["mic_correction"]["name"], "plus3.txt");
    // malformed files: one error line naming the line, nothing written
    for (name, text, needle) in [
        ("words.txt", "# only words\nflat response\n", "line 2"),
        ("empty.txt", "# nothing\n", "fewer than two"),
        ("order.txt", "1000 0\n500 1\n", "line 2"),
    ] {
        std::fs::write(t.path().join(name), text).unwrap();
        let mut bad = args("never");
        bad.extend_from_slice(&["--mic-correction", name]);
        let line = refused(t.path(), &bad);
        assert!(line.contains(needle) && line.contains(name), "{line}");
        assert!(!t.path().join("never").exists());
    }
    // a file that does not cover the sweep: a warning naming its lines
    std::fs::write(t.path().join("narrow.txt"), "100 0\n10000 0\n").unwrap();
    let mut narrow = args("narrow");
    narrow.extend_from_slice(&["--mic-correction", "narrow.txt"]);
    let out = ok(t.path(), &narrow);
    assert!(
        out.contains("line 1") && out.contains("line 2") && out.contains("end values are held"),
        "{out}"
    );
}

#[test]
fn a_calibrated_measurement_reads_the_right_spl() {
    // closed forms: 94 dB SPL is 20 µPa·10^(94/20) = 1.0024 Pa RMS; a tone
    // of peak 0.2 has RMS 0.2/√2, so a full-scale sine (RMS 1/√2) reads
    // 94 − 20·lg 0.2 = 107.98 dB SPL. A wire at gain 0.5 driven by a
    // −20 dBFS sweep then reads 107.98 − 20 + 20·lg 0.5 = 81.96 dB SPL.
    let t = tempfile::tempdir().unwrap();
    let tone: Vec<f64> = (0..96_000)
        .map(|i| 0.2 * (std::f64::consts::TAU * 1000.0 * i as f64 / 48_000.0).sin())
        .collect();
    write_wav_f32(&t.path().join("tone.wav"), 48_000, &[tone]);
    let out = ok(
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
    assert!(out.contains("dB SPL"), "{out}");
    let cal = json(&t.path().join("cal.json"));
    let fs_spl = cal["full_scale_db_spl"].as_f64().unwrap();
    assert!(
        (fs_spl - (94.0 - 20.0 * 0.2f64.log10())).abs() < 0.05,
        "{fs_spl}"
    );
    // never overwritten
    refused(
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
    ok(
        t.path(),
        &[
            "analyze",
            "rec.wav",
            "--sweep",
            "sweep.wav",
            "--out",
            "m",
            "--calibration",
            "cal.json",
            "--no-plots",
            "--no-bands",
        ],
    );
    let r = json(&t.path().join("m/results.json"));
    let f = numbers(&r["response"]["frequency_hz"]);
    let spl = numbers(&r["response"]["spl_db"]);
    let want = 94.0 - 20.0 * 0.2f64.log10() - 20.0 + 20.0 * 0.5f64.log10();
    for (f, s) in f.iter().zip(&spl) {
        if *f >= 40.0 && *f <= 15_000.0 {
            assert!(
                (s - want).abs() < 0.06,
                "{f:.1} Hz: {s:.3} dB SPL, want {want:.3}"
            );
        }
    }
    let m = json(&t.path().join("m/manifest.json"));
    assert_eq!(m["settings"]["calibration"]["name"], "cal.json");
    // a file that is not a calibration: one error line
    std::fs::write(t.path().join("bogus.json"), "{\"hello\": 1}").unwrap();
    let line = refused(
        t.path(),
        &[
            "analyze",
            "rec.wav",
            "--sweep",
            "sweep.wav",
            "--out",
            "n",
            "--calibration",
            "bogus.json",
        ],
    );
    assert!(line.contains("not a calibration file"), "{line}");
}

#[test]
fn a_loopback_reference_channel_divides_out_the_interface() {
    // channel 2 is the loopback: the sweep through an "interface" with 117
    // samples of latency and 3 dB of loss; channel 1 is the same interface
    // plus a wire 25.4 samples long. Divided by the reference, the
    // interface goes: 0 dB and a delay of 25.4 samples (closed form of a
    // pure delay).
    let t = tempfile::tempdir().unwrap();
    let sweep = make_sweep(t.path(), "sweep.wav", &["--length", "2", "--tail", "0.5"]);
    let x = read_wav(&sweep).1.remove(0);
    let gain = 10f64.powf(-3.0 / 20.0);
    let scale = |v: Vec<f64>| v.into_iter().map(|s| s * gain).collect::<Vec<_>>();
    let reference = scale(fractional_delay(&x, 117.0, 0));
    let mic = scale(fractional_delay(&x, 142.4, 0));
    write_wav_f32(&t.path().join("rec.wav"), 48_000, &[mic, reference]);
    ok(
        t.path(),
        &[
            "analyze",
            "rec.wav",
            "--sweep",
            "sweep.wav",
            "--out",
            "m",
            "--reference",
            "2",
            "--no-plots",
            "--no-bands",
            "--harmonics",
            "1",
        ],
    );
    let r = json(&t.path().join("m/results.json"));
    let d = r["delay_s"].as_f64().unwrap() * 48_000.0;
    assert!((d - 25.4).abs() < 0.05, "delay {d} samples");
    let f = numbers(&r["response"]["frequency_hz"]);
    let m = numbers(&r["response"]["magnitude_db"]);
    for (f, m) in f.iter().zip(&m) {
        if (30.0..=18_000.0).contains(f) {
            assert!(m.abs() < 0.05, "{f} Hz: {m} dB");
        }
    }
    assert!(r["delay_reference"].as_str().unwrap().contains("loopback"));
    // a reference that is the microphone itself is refused
    let line = refused(
        t.path(),
        &[
            "analyze",
            "rec.wav",
            "--sweep",
            "sweep.wav",
            "--out",
            "n",
            "--reference",
            "1",
        ],
    );
    assert!(line.contains("--reference 1"), "{line}");
}
