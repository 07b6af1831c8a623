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
//!
//! A wire (the recording is the sweep itself) deconvolves to a unit
//! impulse at index 0, band-limited to the sweep's band:
//!
//! ```
//! use gliss::deconv::deconvolve;
//! use gliss::signal::sweep::SweepParams;
//!
//! let design = SweepParams {
//!     requested_length_s: 1.0,
//!     tail_s: 0.5,
//!     ..SweepParams::default()
//! }
//! .design()?;
//! let sweep = design.generate();
//! let h = deconvolve(&sweep, &sweep, design.fs(), 20.0, 20_000.0);
//! let peak = (0..h.len())
//!     .max_by(|&a, &b| h[a].abs().total_cmp(&h[b].abs()))
//!     .unwrap_or(usize::MAX);
//! assert_eq!(peak, 0);
//! // its height is about the share of the band 20 Hz–20 kHz in 0–24 kHz
//! // (a band-limited spectrum of ones, summed over the FFT length), a
//! // little less because the band edges are tapered: 0.827 against 0.833
//! assert!((h[0] - 19_980.0 / 24_000.0).abs() < 0.02, "{}", h[0]);
//! # Ok::<(), gliss::Error>(())
//! ```

use rustfft::num_complex::Complex;

use crate::signal::fft;

/// In-band regularisation relative to the stimulus' peak in-band power
/// (−100 dB: its bias, ε/|X|², stays below 10⁻⁶ even 40 dB down the sweep).
pub const IN_BAND_REGULARISATION_DB: f64 = -100.0;

/// Octaves below f1 over which ε rises from its in-band value to the
/// stimulus' peak power (raised cosine in dB on a log-frequency axis).
/// Gentle, so that the edge it makes lies where the causal band limit
/// [`low_edge`] has already attenuated it.
pub const TRANSITION_OCTAVES: f64 = 0.5;

/// Octaves above f2 over which ε rises to the stimulus' peak power, as a
/// raised cosine in power (not in dB: within 16 dB of full a tenth of the
/// way in). Above f2 the recording still holds the harmonics of the top of
/// the sweep while the stimulus has no power left; an ε that stayed small
/// there (as a rise in dB does for most of its way) would amplify them by
/// up to 1/(2√ε) — some 90 dB — and spread them over the harmonic windows.
pub const TOP_TRANSITION_OCTAVES: f64 = 0.5;

/// Relative regularisation r(f) ∈ (0, 1] at f Hz for the band [f1, f2]:
/// 10^(IN_BAND/10) inside; below f1 rising in dB over
/// [`TRANSITION_OCTAVES`]; above f2 rising in power over
/// [`TOP_TRANSITION_OCTAVES`]; 1 beyond (clipped at the Nyquist frequency
/// by the FFT itself).
pub fn regularisation(f: f64, f1: f64, f2: f64) -> f64 {
    let inside = 10f64.powf(IN_BAND_REGULARISATION_DB / 10.0);
    let rise = |u: f64| 0.5 - 0.5 * (std::f64::consts::PI * u.clamp(0.0, 1.0)).cos();
    if f <= 0.0 {
        1.0
    } else if f < f1 {
        let w = rise((f1 / f).log2() / TRANSITION_OCTAVES);
        // interpolate in dB so the rise is smooth on a log scale
        10f64
            .powf((IN_BAND_REGULARISATION_DB * (1.0 - w)) / 10.0)
            .max(inside)
    } else if f > f2 {
        let w = rise((f / f2).log2() / TOP_TRANSITION_OCTAVES);
        inside + (1.0 - inside) * w
    } else {
        inside
    }
}

/// FFT length used for deconvolving a recording of `rec_len` samples with
/// a stimulus of `stim_len` samples.
pub fn fft_len(rec_len: usize, stim_len: usize) -> usize {
    fft::fast_len(rec_len.max(stim_len))
}

/// The spectrum of the inverse filter C(f) = X*/(|X|² + ε(f)) for a
/// stimulus, on `n`-point FFT bins, for the sweep band [f1, f2], times the
/// band limits [`low_edge`] and [`top_edge`].
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
    let nyquist = fs / 2.0;
    for (k, c) in x.iter_mut().enumerate() {
        let f = k as f64 * df;
        let eps = peak * regularisation(f, f1, f2);
        *c = c.conj() / (c.norm_sqr() + eps) * low_edge(f, f1) * top_edge(f, f2, nyquist);
    }
    x
}

/// Order of the causal band limit below the sweep band.
pub const LOW_EDGE_ORDER: usize = 8;

/// The causal band limit applied at the bottom of the band: an analog
/// Butterworth high-pass of order [`LOW_EDGE_ORDER`] with its −3 dB point
/// at f1, evaluated on the FFT bins. Being minimum-phase, its impulse
/// response lies after the peak, inside the analysis window; the frequency
/// response divides it out again (see `analysis::response`), so in band it
/// changes nothing.
///
/// Why it is there: without it the response would end where the
/// stimulus' power sinks under ε — abruptly, just below f1 — and a
/// zero-phase edge rings on both sides of the peak; the analysis window
/// would cut the ringing before the peak and bend the response near f1
/// by tenths of a dB. This filter is already 24 dB down half an octave
/// below f1, where that edge lies.
pub fn low_edge(f: f64, f1: f64) -> Complex<f64> {
    // H(s) = Π s/(ωc − p_k·s) with the left-half-plane Butterworth poles
    // p_k of the unit low-pass (the low-pass-to-high-pass substitution
    // s/ωc → ωc/s); |H(jω)|² = 1/(1 + (ωc/ω)^(2N)).
    if f <= 0.0 {
        return Complex::new(0.0, 0.0);
    }
    let s = Complex::new(0.0, f / f1); // normalised to ωc = 1
    let mut h = Complex::new(1.0, 0.0);
    for p in LOW_EDGE_POLES.iter() {
        h *= s / (1.0 - p * s);
    }
    h
}

/// The left-half-plane poles of the unit Butterworth low-pass of order
/// [`LOW_EDGE_ORDER`], e^(iπ(2k + N + 1)/2N), computed once: [`low_edge`]
/// is evaluated on every bin of every deconvolution, and the poles' sines
/// and cosines were most of its cost.
static LOW_EDGE_POLES: std::sync::LazyLock<[Complex<f64>; LOW_EDGE_ORDER]> =
    std::sync::LazyLock::new(|| {
        let n = LOW_EDGE_ORDER as f64;
        std::array::from_fn(|k| {
            let angle = std::f64::consts::PI * (2.0 * k as f64 + n + 1.0) / (2.0 * n);
            Complex::from_polar(1.0, angle)
        })
    });

/// Divides [`low_edge`] out of a spectrum on bins `df` apart, from a
/// quarter octave below f1 up (below that the band limit is left in: it
/// is outside the band and dividing would only raise noise).
pub fn remove_low_edge(spectrum: &mut [Complex<f64>], df: f64, f1: f64) {
    let from = f1 * 2f64.powf(-0.25);
    for (k, c) in spectrum.iter_mut().enumerate() {
        let f = k as f64 * df;
        if f >= from {
            *c /= low_edge(f, f1);
        }
    }
}

/// The zero-phase band limit at the top of the band: 1 up to f2, then a
/// raised cosine on a linear frequency axis to 0 at the Nyquist frequency
/// (1 everywhere when f2 is the Nyquist frequency). Kilohertz wide, it
/// rings for well under a millisecond.
pub fn top_edge(f: f64, f2: f64, nyquist: f64) -> f64 {
    if f <= f2 || f2 >= nyquist {
        1.0
    } else {
        let u = ((nyquist - f) / (nyquist - f2)).clamp(0.0, 1.0);
        0.5 - 0.5 * (std::f64::consts::PI * u).cos()
    }
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
    // as apply_inverse, with the product kept in the inverse filter's
    // buffer and the recording's spectrum dropped before the inverse
    // transform: one spectrum fewer at the peak of memory
    let mut h = inverse_filter(stimulus, n, fs, f1, f2);
    let y = fft::rfft(recording, n);
    for (c, y) in h.iter_mut().zip(&y) {
        // y·c, the product apply_inverse takes, bit for bit
        *c = *y * *c;
    }
    drop(y);
    fft::irfft(&mut h, n)
}

/// Cuts `len` samples from the circular response `h`, starting at
/// `start` (negative: before index 0, i.e. from the end of the buffer),
/// with a half-Hann fade-in over the first `fade_in` samples and a
/// fade-out over the last `fade_out`.
pub fn cut(h: &[f64], start: isize, len: usize, fade_in: usize, fade_out: usize) -> Vec<f64> {
    let n = h.len() as isize;
    let mut out: Vec<f64> = (0..len)
        .map(|i| h[(start + i as isize).rem_euclid(n) as usize])
        .collect();
    crate::signal::window::fade_in(&mut out, fade_in);
    crate::signal::window::fade_out(&mut out, fade_out);
    out
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::signal::sweep::SweepParams;

    #[test]
    fn deconvolve_is_the_inverse_filter_applied_bit_for_bit() {
        // deconvolve keeps one spectrum fewer in memory than the two steps
        // it stands for; the numbers must not move by a single bit
        let design = SweepParams {
            requested_length_s: 0.5,
            tail_s: 0.2,
            ..SweepParams::default()
        }
        .design()
        .unwrap();
        let x = design.generate();
        let fs = design.fs();
        // a recording: the sweep delayed, scaled and with a little echo
        let mut y = vec![0.0; x.len() + 300];
        for (i, v) in x.iter().enumerate() {
            y[i + 100] += 0.5 * v;
            y[i + 250] += 0.1 * v;
        }
        let n = fft_len(y.len(), x.len());
        let two_steps = apply_inverse(&y, &inverse_filter(&x, n, fs, 20.0, 20_000.0), n);
        let one = deconvolve(&y, &x, fs, 20.0, 20_000.0);
        assert_eq!(one.len(), two_steps.len());
        assert!(
            one.iter()
                .zip(&two_steps)
                .all(|(a, b)| a.to_bits() == b.to_bits())
        );
    }

    #[test]
    fn cut_wraps_round_the_buffer() {
        let h: Vec<f64> = (0..10).map(f64::from).collect();
        assert_eq!(cut(&h, -2, 5, 0, 0), vec![8.0, 9.0, 0.0, 1.0, 2.0]);
        let c = cut(&h, 3, 4, 2, 1);
        assert_eq!(c[0], 0.0); // the fade starts at zero
        assert_eq!(c[2], 5.0);
    }

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
    fn low_edge_is_a_butterworth_highpass() {
        // closed form: |H|² = 1/(1 + (f1/f)^(2N)); −3.01 dB at f1
        for f in [2.0, 10.0, 14.0, 20.0, 25.0, 40.0, 1000.0] {
            let want = 1.0 / (1.0 + (20.0f64 / f).powi(2 * LOW_EDGE_ORDER as i32));
            let got = low_edge(f, 20.0).norm_sqr();
            assert!((got / want - 1.0).abs() < 1e-9, "{f}: {got} vs {want}");
        }
        // and it is causal: its poles are in the left half plane, so its
        // phase at high frequency tends to 0
        assert!(low_edge(20_000.0, 20.0).arg().abs() < 0.01);
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
                let want = Complex::from_polar(g, -std::f64::consts::TAU * f * k as f64 / d.fs())
                    * low_edge(f, 100.0);
                assert!((c - want).norm() < 1e-4 * g, "f={f}");
            }
        }
    }
}
