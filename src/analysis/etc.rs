//! Energy-time curve: the squared envelope of the impulse response (the
//! magnitude of its analytic signal, by the Hilbert transform), in dB
//! relative to its peak. Common practice for reading reflections.

use rustfft::{FftPlanner, num_complex::Complex};

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
    FftPlanner::new().plan_fft_inverse(n).process(&mut full);
    let scale = 1.0 / (n as f64 * n as f64);
    full[..h.len()]
        .iter()
        .map(|z| z.norm_sqr() * scale)
        .collect()
}

/// The energy-time curve in dB re its maximum, floored at `floor_db`.
pub fn energy_time_curve_db(h: &[f64], floor_db: f64) -> Vec<f64> {
    let e = envelope_squared(h);
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
        let etc = energy_time_curve_db(&h, -120.0);
        let imax = etc
            .iter()
            .enumerate()
            .fold(0, |m, (i, v)| if *v > etc[m] { i } else { m });
        assert_eq!(imax, 300);
        assert!((etc[600] + 20.0).abs() < 1.0, "{}", etc[600]);
    }
}
