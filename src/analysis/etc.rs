//! Energy-time curve: the squared envelope of the impulse response (the
//! magnitude of its analytic signal, by the Hilbert transform), in dB
//! relative to its peak. Common practice for reading reflections.
//!
//! The Hilbert transform of an impulse is 1/(πt) on both sides of it, so
//! the analytic envelope of a causal response has a skirt before its
//! onset: about −57 dB at 5 ms (48 kHz) before a lone peak, energy that is
//! not in the room. The curve drawn is therefore the analytic envelope
//! limited by the local peak of h² within ±[`LOCAL_S`]: where the
//! response is, the two agree (the peak of h² over a millisecond reaches
//! the envelope of anything above 1 kHz, and most of it below); before
//! the onset only what is there, the noise, remains.

use rustfft::num_complex::Complex;

use crate::signal::fft;

/// Squared envelope |h + j·Hilbert(h)|² of `h`.
pub fn envelope_squared(h: &[f64]) -> Vec<f64> {
    if h.is_empty() {
        return Vec::new();
    }
    let n = fft::fast_len(h.len());
    let half = fft::rfft(h, n);
    let mut full = vec![Complex::new(0.0, 0.0); n];
    full[0] = half[0];
    full[n / 2] = half[n / 2];
    for k in 1..n / 2 {
        full[k] = half[k] * 2.0;
    }
    fft::complex_plan(n, true).process(&mut full);
    let scale = 1.0 / (n as f64 * n as f64);
    full[..h.len()]
        .iter()
        .map(|z| z.norm_sqr() * scale)
        .collect()
}

/// Half-width of the local peak that limits the analytic envelope, s.
pub const LOCAL_S: f64 = 1e-3;

/// The running maximum of `x` over `x[i − half ..= i + half]` (clamped at
/// the ends), in O(n) with a monotonic queue of indices.
pub fn running_max(x: &[f64], half: usize) -> Vec<f64> {
    let n = x.len();
    let mut out = Vec::with_capacity(n);
    let mut q: std::collections::VecDeque<usize> = std::collections::VecDeque::new();
    let mut next = 0; // next index to enter the window
    for i in 0..n {
        let hi = (i + half).min(n - 1);
        while next <= hi {
            while q.back().is_some_and(|&b| x[b] <= x[next]) {
                q.pop_back();
            }
            q.push_back(next);
            next += 1;
        }
        let lo = i.saturating_sub(half);
        while q.front().is_some_and(|&f| f < lo) {
            q.pop_front();
        }
        out.push(q.front().map_or(0.0, |&f| x[f]));
    }
    out
}

/// The squared envelope the energy-time curve shows: the analytic
/// envelope, at most the peak of h² within ±[`LOCAL_S`] (sample rate
/// `fs`), so a causal response shows no energy before its onset.
pub fn local_envelope_squared(h: &[f64], fs: f64) -> Vec<f64> {
    let e = envelope_squared(h);
    let h2: Vec<f64> = h.iter().map(|v| v * v).collect();
    let local = running_max(&h2, (LOCAL_S * fs).round() as usize);
    e.iter().zip(&local).map(|(a, b)| a.min(*b)).collect()
}

/// The energy-time curve of `h` (sample rate `fs`) in dB re its maximum,
/// floored at `floor_db` ([`local_envelope_squared`]).
pub fn energy_time_curve_db(h: &[f64], fs: f64, floor_db: f64) -> Vec<f64> {
    let e = local_envelope_squared(h, fs);
    let max = e.iter().cloned().fold(0.0, f64::max);
    if max <= 0.0 {
        return vec![floor_db; e.len()];
    }
    e.iter()
        .map(|&v| (10.0 * (v / max).log10()).max(floor_db))
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn envelope_of_a_tone_burst_is_its_amplitude() {
        // closed form: the analytic signal of A·cos(ωt) is A·e^{jωt}, so
        // the squared envelope is A² (away from the ends)
        let n = 4800;
        let h: Vec<f64> = (0..n)
            .map(|i| 0.5 * (std::f64::consts::TAU * 1000.0 * i as f64 / 48_000.0).cos())
            .collect();
        let e = envelope_squared(&h);
        for &v in &e[500..4300] {
            assert!((v - 0.25).abs() < 1e-3, "{v}");
        }
    }

    #[test]
    fn etc_peaks_at_zero_db_where_the_impulse_is() {
        let mut h = vec![0.0; 1000];
        h[300] = 1.0;
        h[600] = 0.1; // a reflection 20 dB down
        let etc = energy_time_curve_db(&h, 48_000.0, -120.0);
        let imax = etc
            .iter()
            .enumerate()
            .fold(0, |m, (i, v)| if *v > etc[m] { i } else { m });
        assert_eq!(imax, 300);
        assert!((etc[600] + 20.0).abs() < 1.0, "{}", etc[600]);
    }

    #[test]
    fn the_running_max_is_the_naive_one() {
        let mut seed = 7u64;
        let x: Vec<f64> = (0..500)
            .map(|_| {
                seed = seed.wrapping_mul(6364136223846793005).wrapping_add(1);
                (seed >> 11) as f64 / (1u64 << 53) as f64
            })
            .collect();
        for half in [0, 1, 5, 48, 600] {
            let got = running_max(&x, half);
            for i in 0..x.len() {
                let want = x[i.saturating_sub(half)..=(i + half).min(x.len() - 1)]
                    .iter()
                    .cloned()
                    .fold(f64::MIN, f64::max);
                assert_eq!(got[i], want, "half {half}, i {i}");
            }
        }
    }

    #[test]
    fn a_causal_response_shows_no_energy_before_its_onset() {
        // a peak at 100 ms and a decaying tail after it, nothing before:
        // the plain analytic envelope shows the 1/(πt) skirt (−57 dB at
        // 5 ms before, closed form), the curve drawn shows none
        let fs = 48_000.0;
        let onset = 4800;
        let mut h = vec![0.0; 48_000];
        // a diffuse tail: Gaussian noise under an exponential decay
        use rand::{SeedableRng, rngs::StdRng};
        use rand_distr::{Distribution, Normal};
        let mut rng = StdRng::seed_from_u64(99);
        let normal = Normal::new(0.0, 0.1).unwrap();
        for (i, v) in h.iter_mut().enumerate().skip(onset) {
            *v = normal.sample(&mut rng) * (-((i - onset) as f64) / 4800.0).exp();
        }
        h[onset] = 1.0;
        let plain = envelope_squared(&h);
        let at5 = 10.0 * plain[onset - 240].log10();
        assert!(at5 > -70.0, "the plain envelope's skirt: {at5} dB");
        let etc = energy_time_curve_db(&h, fs, -120.0);
        assert!(
            etc[..onset - 48].iter().all(|&v| v <= -120.0),
            "energy before the onset"
        );
        // after the onset it is the analytic envelope: the tail within
        // 1 dB of the plain curve where it is smooth
        let max = plain.iter().cloned().fold(0.0, f64::max);
        let tail = onset + 2400..onset + 4800;
        let (a, b): (f64, f64) = (
            tail.clone().map(|i| plain[i] / max).sum(),
            tail.map(|i| 10f64.powf(etc[i] / 10.0)).sum(),
        );
        let d = 10.0 * (b / a).log10();
        assert!(d.abs() < 1.0, "the tail differs by {d:.2} dB");
    }
}
