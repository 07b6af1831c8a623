//! Impulse responses by regularised spectral division.
//!
//! H = Y·X*/(|X|² + ε(f)) (S. Müller, P. Massarani, JAES 49(6), 2001 for
//! deconvolution by division; O. Kirkeby, P. Nelson et al., IEEE Trans.
//! Speech Audio Process. 6(2), 1998 for the frequency-dependent ε). X is the
//! stimulus as actually played (the samples of the sweep file), so the fades
//! and the quantisation of the file cancel. ε is tiny inside the sweep band
//! and rises to the stimulus' own peak power outside it, where division
//! would only amplify noise.
//!
//! The result is circular: the linear impulse response starts at index 0
//! (time zero = first sample of the recording) and the harmonic responses of
//! an exponential sweep wrap around to the end of the buffer, L·ln n before
//! the linear one (A. Farina, 108th AES Convention, 2000).

use rustfft::num_complex::Complex;

use crate::signal::fft;

/// In-band regularisation relative to the stimulus' peak in-band power
/// (−100 dB: its bias, ε/|X|², stays below 10⁻⁶ even 40 dB down the sweep).
pub const IN_BAND_REGULARISATION_DB: f64 = -100.0;

/// Octaves over which ε rises from its in-band value to full outside the
/// band (raised cosine on a log-frequency axis; common practice).
pub const TRANSITION_OCTAVES: f64 = 0.5;

/// Relative regularisation r(f) ∈ (0, 1] at f Hz for the band [f1, f2]:
/// 10^(IN_BAND/10) inside, 1 from `TRANSITION_OCTAVES` outside on, a
/// raised cosine in log frequency between.
pub fn regularisation(f: f64, f1: f64, f2: f64) -> f64 {
    let inside = 10f64.powf(IN_BAND_REGULARISATION_DB / 10.0);
    let octaves_out = if f <= 0.0 {
        f64::INFINITY
    } else if f < f1 {
        (f1 / f).log2()
    } else if f > f2 {
        (f / f2).log2()
    } else {
        0.0
    };
    if octaves_out >= TRANSITION_OCTAVES {
        return 1.0;
    }
    let u = octaves_out / TRANSITION_OCTAVES; // 0..1
    let w = 0.5 - 0.5 * (std::f64::consts::PI * u).cos();
    // interpolate in dB so the rise is smooth on a log scale
    10f64
        .powf((IN_BAND_REGULARISATION_DB * (1.0 - w)) / 10.0)
        .max(inside)
}

/// FFT length used for deconvolving a recording of `rec_len` samples with
/// a stimulus of `stim_len` samples.
pub fn fft_len(rec_len: usize, stim_len: usize) -> usize {
    fft::fast_len(rec_len.max(stim_len))
}

/// The spectrum of the inverse filter C(f) = X*/(|X|² + ε(f)) for a
/// stimulus, on `n`-point FFT bins, for the sweep band [f1, f2].
pub fn inverse_filter(stimulus: &[f64], n: usize, fs: f64, f1: f64, f2: f64) -> Vec<Complex<f64>> {
    let mut x = fft::rfft(stimulus, n);
    let df = fs / n as f64;
    let peak = x
        .iter()
        .enumerate()
        .filter(|(k, _)| {
            let f = *k as f64 * df;
            f >= f1 && f <= f2
        })
        .map(|(_, c)| c.norm_sqr())
        .fold(0.0, f64::max);
    let peak = if peak > 0.0 { peak } else { 1.0 };
    for (k, c) in x.iter_mut().enumerate() {
        let eps = peak * regularisation(k as f64 * df, f1, f2);
        *c = c.conj() / (c.norm_sqr() + eps);
    }
    x
}

/// Circular impulse response of length `n` from a recording and the
/// inverse filter made by [`inverse_filter`] for the same `n`.
pub fn apply_inverse(recording: &[f64], inverse: &[Complex<f64>], n: usize) -> Vec<f64> {
    let mut y = fft::rfft(recording, n);
    for (a, b) in y.iter_mut().zip(inverse) {
        *a *= *b;
    }
    fft::irfft(&mut y, n)
}

/// Deconvolves `recording` by `stimulus` over the band [f1, f2] Hz; returns
/// the circular impulse response (length [`fft_len`]).
pub fn deconvolve(recording: &[f64], stimulus: &[f64], fs: f64, f1: f64, f2: f64) -> Vec<f64> {
    let n = fft_len(recording.len(), stimulus.len());
    let inv = inverse_filter(stimulus, n, fs, f1, f2);
    apply_inverse(recording, &inv, n)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::signal::sweep::SweepParams;

    #[test]
    fn regularisation_profile_is_flat_in_band_and_full_outside() {
        let inside = 10f64.powf(IN_BAND_REGULARISATION_DB / 10.0);
        assert_eq!(regularisation(1000.0, 20.0, 20_000.0), inside);
        assert_eq!(regularisation(20.0, 20.0, 20_000.0), inside);
        assert_eq!(regularisation(0.0, 20.0, 20_000.0), 1.0);
        assert_eq!(regularisation(10.0, 20.0, 20_000.0), 1.0);
        let mid = regularisation(20.0 / 2f64.powf(0.25), 20.0, 20_000.0);
        assert!(mid > inside && mid < 1.0);
    }

    #[test]
    fn delayed_scaled_copy_gives_a_scaled_delayed_impulse() {
        // closed form: y[n] = g·x[n − k] ⇒ h = g·δ[n − k] inside the band
        let d = SweepParams {
            requested_length_s: 0.5,
            tail_s: 0.2,
            start_hz: 100.0,
            end_hz: 10_000.0,
            ..Default::default()
        }
        .design()
        .unwrap();
        let x = d.generate();
        let k = 37;
        let g = 0.25;
        let mut y = vec![0.0; x.len()];
        for n in k..x.len() {
            y[n] = g * x[n - k];
        }
        let h = deconvolve(&y, &x, d.fs(), 100.0, 10_000.0);
        let (imax, vmax) =
            h.iter().enumerate().fold(
                (0, 0.0f64),
                |m, (i, v)| if v.abs() > m.1.abs() { (i, *v) } else { m },
            );
        assert_eq!(imax, k);
        // band-limited to 100 Hz–10 kHz of 24 kHz, so the peak is a bit
        // below g (the pulse is spread); its spectrum is exactly g in band
        assert!(vmax > 0.3 * g && vmax <= g * 1.01, "{vmax}");
        let spec = fft::rfft(&h, h.len());
        let df = d.fs() / h.len() as f64;
        for (i, c) in spec.iter().enumerate() {
            let f = i as f64 * df;
            if (200.0..8_000.0).contains(&f) {
                let want = Complex::from_polar(g, -std::f64::consts::TAU * f * k as f64 / d.fs());
                assert!((c - want).norm() < 1e-4 * g, "f={f}");
            }
        }
    }
}
