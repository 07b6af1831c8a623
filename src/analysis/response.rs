//! Frequency response of an impulse response on the log grid: magnitude
//! (power-smoothed), and phase with the bulk delay removed.

use rustfft::num_complex::Complex;
use serde::Serialize;

use crate::analysis::smoothing::{POINTS_PER_OCTAVE, PiecewiseIntegral, Smoothing};
use crate::signal::fft;

/// Largest FFT used for a response (2^23 points: 175 s at 48 kHz).
const MAX_FFT: usize = 1 << 23;

/// A response on the log grid.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct FrequencyResponse {
    /// The smoothing applied.
    pub smoothing: Smoothing,
    /// Grid frequencies in Hz.
    pub frequency_hz: Vec<f64>,
    /// Magnitude in dB (0 dB: the recording equals the sweep).
    pub magnitude_db: Vec<f64>,
    /// Phase in degrees, wrapped to (−180, 180], with the bulk delay removed.
    pub phase_deg: Vec<f64>,
}

/// FFT length for the spectrum of a response of `len` samples: at least
/// as long as the response, and long enough that the bins are as dense as
/// the log grid at `f_min`.
pub fn spectrum_len(len: usize, fs: f64, f_min: f64) -> usize {
    let grid_step = f_min * (2f64.powf(1.0 / f64::from(POINTS_PER_OCTAVE)) - 1.0);
    let dense = (fs / grid_step).ceil() as usize;
    fft::fast_len(len.max(dense).min(MAX_FFT.max(len)))
}

/// The complex spectrum of `ir` on the bins of an `n`-point FFT (n from
/// [`spectrum_len`], at least `ir.len()`), with the phase referred to time
/// `delay` (samples): `ir[0]` lies at time `start` (samples, may be
/// negative). Returns the bins and their spacing in Hz.
pub fn delay_free_spectrum(
    ir: &[f64],
    start: f64,
    delay: f64,
    fs: f64,
    n: usize,
) -> (Vec<Complex<f64>>, f64) {
    assert!(n >= ir.len(), "the FFT must hold the whole response");
    let mut spec = fft::rfft(ir, n);
    // ir[m] = h(start + m) ⇒ DFT = e^{jω·start}·H; remove the delay d:
    // H·e^{jωd} = DFT·e^{jω(d − start)}, ω = 2πk/n per sample.
    let shift = delay - start;
    let w = std::f64::consts::TAU * shift / n as f64;
    for (k, c) in spec.iter_mut().enumerate() {
        *c *= Complex::from_polar(1.0, w * k as f64);
    }
    (spec, fs / n as f64)
}

/// Magnitude and phase at each grid frequency from a delay-free spectrum
/// (bins `df` apart): power averaged over the smoothing band, phase of the
/// complex average over the same band. The smoothing band is cut to
/// `band` (the measured band), so values from outside it never leak in.
pub fn on_grid(
    spec: &[Complex<f64>],
    df: f64,
    grid: &[f64],
    smoothing: Smoothing,
    band: (f64, f64),
) -> FrequencyResponse {
    let power = PiecewiseIntegral::new(spec.iter().map(|c| c.norm_sqr()).collect(), df);
    let re = PiecewiseIntegral::new(spec.iter().map(|c| c.re).collect(), df);
    let im = PiecewiseIntegral::new(spec.iter().map(|c| c.im).collect(), df);
    let mut magnitude_db = Vec::with_capacity(grid.len());
    let mut phase_deg = Vec::with_capacity(grid.len());
    for &f in grid {
        let (lo, hi) = smoothing.band(f);
        let (lo, hi) = (lo.max(band.0), hi.min(band.1));
        let p = power.mean(lo, hi);
        magnitude_db.push(10.0 * p.max(1e-30).log10());
        let z = Complex::new(re.mean(lo, hi), im.mean(lo, hi));
        phase_deg.push(wrap_deg(z.arg().to_degrees()));
    }
    FrequencyResponse {
        smoothing,
        frequency_hz: grid.to_vec(),
        magnitude_db,
        phase_deg,
    }
}

/// Wraps degrees to (−180, 180].
pub fn wrap_deg(d: f64) -> f64 {
    let w = (d + 180.0).rem_euclid(360.0) - 180.0;
    if w == -180.0 { 180.0 } else { w }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::analysis::smoothing::log_grid;

    #[test]
    fn an_impulse_reads_flat_with_zero_phase_after_delay_removal() {
        // closed form: δ[n − k] has |H| = 1 and phase −ωk
        let fs = 48_000.0;
        let mut ir = vec![0.0; 4800];
        ir[100] = 1.0;
        let grid = log_grid(20.0, 20_000.0);
        let (spec, df) =
            delay_free_spectrum(&ir, -50.0, 50.0, fs, spectrum_len(ir.len(), fs, 20.0));
        let r = on_grid(&spec, df, &grid, Smoothing::None, (1.0, 24_000.0));
        for (m, p) in r.magnitude_db.iter().zip(&r.phase_deg) {
            assert!(m.abs() < 1e-9);
            assert!(p.abs() < 1e-6);
        }
    }

    #[test]
    fn phase_of_a_delay_matches_closed_form() {
        // closed form: the phase of a pure delay τ is −360·f·τ degrees
        let fs = 48_000.0;
        let mut ir = vec![0.0; 2048];
        ir[10] = 1.0;
        let grid = log_grid(100.0, 1000.0);
        let (spec, df) = delay_free_spectrum(&ir, 0.0, 0.0, fs, spectrum_len(ir.len(), fs, 100.0));
        let r = on_grid(&spec, df, &grid, Smoothing::None, (1.0, 24_000.0));
        for (f, p) in grid.iter().zip(&r.phase_deg) {
            let want = wrap_deg(-360.0 * f * 10.0 / fs);
            let d = wrap_deg(p - want);
            assert!(d.abs() < 0.05, "{f}: {p} vs {want}");
        }
    }

    #[test]
    fn wrap_is_half_open() {
        assert_eq!(wrap_deg(180.0), 180.0);
        assert_eq!(wrap_deg(-180.0), 180.0);
        assert!((wrap_deg(370.0) - 10.0).abs() < 1e-12);
        assert!((wrap_deg(-190.0) - 170.0).abs() < 1e-12);
    }
}
