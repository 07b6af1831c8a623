//! A known filter as the device under test: an Audio EQ Cookbook peaking
//! biquad (R. Bristow-Johnson) after a 2nd-order Butterworth high-pass,
//! run over the sweep here in the test, by its own difference equation.
//! The measured response must match the closed form H(e^{jω}) = B(z)/A(z).

use rustfft::num_complex::Complex;

use crate::cookbook::{filter, highpass, peaking, response};
use crate::util::*;

#[test]
fn a_peaking_filter_after_a_highpass_matches_its_closed_form() {
    let t = tempfile::tempdir().unwrap();
    let hp = highpass(100.0, std::f64::consts::FRAC_1_SQRT_2);
    let pk = peaking(1000.0, 1.0, 6.0);
    record_device(t.path(), &["--length", "3", "--tail", "1"], |x| {
        filter(&pk, &filter(&hp, x))
    });
    for smooth in ["none", "1/48"] {
        let out = format!("m-{}", smooth.replace('/', "_"));
        let r = analyze_device(t.path(), &out, &["--smooth", smooth, "--no-plots"]);
        let delay = r["delay_s"].as_f64().unwrap();
        let f = numbers(&r["response"]["frequency_hz"]);
        let mag = numbers(&r["response"]["magnitude_db"]);
        let phase = numbers(&r["response"]["phase_deg"]);
        let want: Vec<Complex<f64>> = f
            .iter()
            .map(|&f| response(&hp, f) * response(&pk, f))
            .collect();
        let max_db = want
            .iter()
            .map(|h| 20.0 * h.norm().log10())
            .fold(f64::MIN, f64::max);
        for i in 0..f.len() {
            let want_db = if smooth == "none" {
                20.0 * want[i].norm().log10()
            } else {
                // the closed form smoothed the same way: |H|² averaged over
                // f·2^(±1/96), cut to the sweep band (trapezoid rule)
                let lo = (f[i] * 2f64.powf(-1.0 / 96.0)).max(20.0);
                let hi = (f[i] * 2f64.powf(1.0 / 96.0)).min(20_000.0);
                let steps = 400;
                let mut acc = 0.0;
                for k in 0..=steps {
                    let fk = lo + (hi - lo) * k as f64 / steps as f64;
                    let w = if k == 0 || k == steps { 0.5 } else { 1.0 };
                    acc += w * (response(&hp, fk) * response(&pk, fk)).norm_sqr();
                }
                10.0 * (acc / steps as f64).log10()
            };
            assert!(
                (mag[i] - want_db).abs() < 0.1,
                "{smooth}: {:.1} Hz measured {:.3} dB, closed form {:.3} dB",
                f[i],
                mag[i],
                want_db
            );
            if want_db > max_db - 20.0 {
                // put back the delay that gliss removed
                let measured = phase[i] - 360.0 * f[i] * delay;
                let d = wrap_deg(measured - want[i].arg().to_degrees());
                assert!(
                    d.abs() < 2.0,
                    "{smooth}: {:.1} Hz phase off by {d:.2}°",
                    f[i]
                );
            }
        }
        // the peak: +6 dB at 1 kHz on top of the high-pass (closed form)
        let i = f.iter().position(|&v| v >= 1000.0).unwrap();
        assert!((mag[i] - 20.0 * want[i].norm().log10()).abs() < 0.02);
    }
}

/// Runs `filter` (and a delay of `delay` samples) over a 3 s sweep and
/// returns results.json of `analyze --smooth none`.
fn measure_filter(c: &crate::cookbook::Coeffs, delay: usize) -> serde_json::Value {
    let t = tempfile::tempdir().unwrap();
    record_device(t.path(), &["--length", "3", "--tail", "1"], |x| {
        let mut y = vec![0.0; delay];
        y.extend(filter(c, x));
        y
    });
    analyze_device(
        t.path(),
        "m",
        &["--smooth", "none", "--no-plots", "--no-bands"],
    )
}

#[test]
fn the_minimum_phase_of_a_butterworth_highpass_is_its_phase() {
    // A Butterworth high-pass is minimum phase: the phase its magnitude
    // implies (Hilbert transform of ln|H|) is its closed-form phase, within
    // 3° in its band (the criterion), and its excess group delay
    // is near zero; a pure delay added to it is all excess group delay.
    let hp = highpass(100.0, std::f64::consts::FRAC_1_SQRT_2);
    for delay in [0usize, 48] {
        let r = measure_filter(&hp, delay);
        let f = numbers(&r["response"]["frequency_hz"]);
        let min = numbers(&r["response"]["minimum_phase_deg"]);
        let excess = numbers(&r["response"]["excess_group_delay_s"]);
        let want_delay = delay as f64 / 48_000.0;
        for i in 0..f.len() {
            if f[i] < 100.0 || f[i] > 15_000.0 {
                continue;
            }
            let d = wrap_deg(min[i] - response(&hp, f[i]).arg().to_degrees());
            assert!(
                d.abs() < 3.0,
                "delay {delay}: {:.1} Hz minimum phase off by {d:.2}°",
                f[i]
            );
            if f[i] >= 200.0 {
                // near zero: within 20 µs (about one sample) of the delay
                assert!(
                    (excess[i] - want_delay).abs() < 20e-6,
                    "delay {delay}: {:.1} Hz excess group delay {:.6} s",
                    f[i],
                    excess[i]
                );
            }
        }
    }
}

#[test]
fn a_gate_removes_a_reflection_and_auto_finds_it() {
    // the direct sound through a known filter F, and a reflection of it
    // 4 ms later at half the amplitude: ungated, the response combs by
    // ±3.5 dB (20·lg 1.5 and 20·lg 0.5, closed form); gated, it is F
    // within 0.3 dB above the gate's resolution 1/Tg (the criterion)
    let hp = highpass(300.0, std::f64::consts::FRAC_1_SQRT_2);
    let pk = peaking(2000.0, 2.0, 6.0);
    let t = tempfile::tempdir().unwrap();
    let lag = 192; // 4 ms at 48 kHz
    record_device(t.path(), &["--length", "3", "--tail", "1"], |x| {
        let direct = filter(&pk, &filter(&hp, x));
        let mut y = direct.clone();
        y.extend(std::iter::repeat_n(0.0, lag));
        for (i, v) in direct.iter().enumerate() {
            y[i + lag] += 0.5 * v;
        }
        y
    });
    for (gate, out) in [("auto", "auto"), ("-0.5,3.8", "fixed")] {
        let r = analyze_device(
            t.path(),
            out,
            &[
                "--smooth",
                "none",
                "--gate",
                gate,
                "--no-plots",
                "--no-bands",
            ],
        );
        let g = &r["response"]["gate"];
        let end = g["end_s"].as_f64().unwrap();
        if gate == "auto" {
            assert_eq!(g["auto"], true);
            assert!(
                (0.004 - 0.0002..=0.004).contains(&end),
                "auto gate ends at {end} s, reflection at 0.004 s"
            );
        }
        let res = g["resolution_hz"].as_f64().unwrap();
        let top = g["resolved_to_hz"].as_f64().unwrap();
        let f = numbers(&r["response"]["frequency_hz"]);
        let mag = numbers(&r["response"]["magnitude_db"]);
        let resolved = r["response"]["resolved"].as_array().unwrap();
        let mut checked = 0;
        for i in 0..f.len() {
            assert_eq!(resolved[i].as_bool().unwrap(), f[i] >= res && f[i] <= top);
            if f[i] < res || f[i] > top {
                continue;
            }
            let want = 20.0 * (response(&hp, f[i]) * response(&pk, f[i])).norm().log10();
            assert!(
                (mag[i] - want).abs() < 0.3,
                "{gate}: {:.1} Hz gated {:.2} dB, direct {want:.2} dB",
                f[i],
                mag[i]
            );
            checked += 1;
        }
        assert!(checked > 250, "{checked}");
    }
}
