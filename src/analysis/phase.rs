//! Phase and time: the unwrapped phase, group delay, the minimum phase
//! that the magnitude alone implies, and the excess group delay.
//!
//! The minimum phase is the Hilbert transform of the log magnitude,
//! computed with the real cepstrum (A. V. Oppenheim, R. W. Schafer,
//! "Discrete-Time Signal Processing", homomorphic deconvolution — from
//! memory): fold the cepstrum of ln|H| onto positive quefrencies and
//! transform back; the imaginary part is the minimum phase, already
//! continuous. Outside the sweep band the magnitude is not measured: below
//! f1 it is continued along its slope over the band's first third of an
//! octave (0 to 24 dB per octave), above f2 it is held flat (our choice;
//! the phase near the band edges depends on it).

use rustfft::num_complex::Complex;
use serde::{Deserialize, Serialize};

use crate::analysis::smoothing::{PiecewiseIntegral, Smoothing};
use crate::signal::fft;

/// Phase quantities on the log grid.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct PhaseAnalysis {
    /// The measured phase with the bulk delay removed, unwrapped, degrees.
    pub phase_unwrapped_deg: Vec<f64>,
    /// Group delay −dφ/dω of that phase, s (relative to `delay_s`).
    pub group_delay_s: Vec<f64>,
    /// The minimum phase the magnitude implies, degrees.
    pub minimum_phase_deg: Vec<f64>,
    /// Group delay of the excess (measured − minimum) phase, with the bulk
    /// delay `delay_s` put back: the time the device adds beyond what its
    /// magnitude implies, s.
    pub excess_group_delay_s: Vec<f64>,
}

/// Unwraps a phase sequence in degrees (steps over 180° are taken as wraps).
pub fn unwrap_deg(p: &[f64]) -> Vec<f64> {
    let mut out = Vec::with_capacity(p.len());
    let mut offset = 0.0f64;
    for (i, &v) in p.iter().enumerate() {
        if i > 0 {
            let d: f64 = v + offset - out[i - 1];
            offset -= 360.0 * (d / 360.0).round();
        }
        out.push(v + offset);
    }
    out
}

/// Group delay −dφ/dω (s) of an unwrapped phase in degrees on frequencies
/// `f` (Hz), by central differences (one-sided at the ends).
pub fn group_delay_s(f: &[f64], phase_deg: &[f64]) -> Vec<f64> {
    let n = f.len();
    (0..n)
        .map(|i| {
            let (a, b) = (i.saturating_sub(1), (i + 1).min(n - 1));
            if a == b {
                return 0.0;
            }
            let dphi = (phase_deg[b] - phase_deg[a]).to_radians();
            let dw = std::f64::consts::TAU * (f[b] - f[a]);
            -dphi / dw
        })
        .collect()
}

/// Minimum phase (radians, continuous) on the `n`-point FFT bins from the
/// power spectrum `power` (bins 0..=n/2, `df` apart) measured on [f1, f2].
pub fn minimum_phase(power: &[f64], n: usize, df: f64, f1: f64, f2: f64) -> Vec<f64> {
    let p = PiecewiseIntegral::new(power.to_vec(), df);
    let level = |lo: f64, hi: f64| 0.5 * p.mean(lo, hi).max(1e-300).ln(); // ln|H|
    let third = 2f64.powf(1.0 / 3.0);
    let sixth = 2f64.powf(1.0 / 12.0);
    let l1 = level(f1, f1 * sixth);
    let l2 = level(f1 * third / sixth, f1 * third);
    let slope = ((l2 - l1) / (third / sixth).ln()).clamp(0.0, 4.0);
    let top = level(f2 / sixth, f2);
    let mut logmag: Vec<Complex<f64>> = (0..=n / 2)
        .map(|k| {
            let f = (k as f64 * df).max(df * 0.5);
            let v = if f < f1 {
                l1 + slope * (f / f1).ln()
            } else if f > f2 {
                top
            } else {
                0.5 * power[k].max(1e-300).ln()
            };
            Complex::new(v.max(-700.0), 0.0)
        })
        .collect();
    // real cepstrum, folded onto positive quefrencies
    let c = fft::irfft(&mut logmag, n);
    let mut folded = vec![0.0; n];
    folded[0] = c[0];
    for k in 1..n / 2 {
        folded[k] = 2.0 * c[k];
    }
    folded[n / 2] = c[n / 2];
    fft::rfft(&folded, n).iter().map(|z| z.im).collect()
}

/// All phase quantities on `grid`: from the measured (delay-free, wrapped)
/// phase on the grid, the delay-free spectrum on the bins of an even-length
/// FFT (`df` apart), the sweep band, the smoothing and the removed delay.
pub fn analyze(
    grid: &[f64],
    phase_deg: &[f64],
    spectrum: &[Complex<f64>],
    df: f64,
    band: (f64, f64),
    smoothing: Smoothing,
    delay_s: f64,
) -> PhaseAnalysis {
    let n = 2 * (spectrum.len() - 1);
    let mut measured = unwrap_deg(phase_deg);
    // whole turns are arbitrary after unwrapping: put the band's centre
    // within ±180°, where a device without delay reads near 0
    let mid = grid.iter().position(|&f| f >= (band.0 * band.1).sqrt());
    if let Some(mid) = mid {
        let turns = (measured[mid] / 360.0).round();
        for v in &mut measured {
            *v -= 360.0 * turns;
        }
    }
    let power: Vec<f64> = spectrum.iter().map(|c| c.norm_sqr()).collect();
    let min_bins = minimum_phase(&power, n, df, band.0, band.1);
    // read the minimum phase as the measured phase is read: the angle of
    // the complex average over the same smoothing band, then unwrapped
    let re = PiecewiseIntegral::new(min_bins.iter().map(|p| p.cos()).collect(), df);
    let im = PiecewiseIntegral::new(min_bins.iter().map(|p| p.sin()).collect(), df);
    let wrapped: Vec<f64> = grid
        .iter()
        .map(|&f| {
            let (lo, hi) = smoothing.band(f);
            let (lo, hi) = (lo.max(band.0), hi.min(band.1));
            im.mean(lo, hi).atan2(re.mean(lo, hi)).to_degrees()
        })
        .collect();
    let mut minimum = unwrap_deg(&wrapped);
    // the two unwrappings start from different ends; align them by whole
    // turns where the sweep is at its best (the band's geometric centre)
    if let Some(mid) = mid {
        let turns = ((measured[mid] - minimum[mid]) / 360.0).round();
        for v in &mut minimum {
            *v += 360.0 * turns;
        }
    }
    let excess: Vec<f64> = measured.iter().zip(&minimum).map(|(a, b)| a - b).collect();
    let excess_group_delay_s = group_delay_s(grid, &excess)
        .into_iter()
        .map(|t| t + delay_s)
        .collect();
    PhaseAnalysis {
        group_delay_s: group_delay_s(grid, &measured),
        phase_unwrapped_deg: measured,
        minimum_phase_deg: minimum,
        excess_group_delay_s,
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn unwrap_removes_jumps() {
        let wrapped = [170.0, -175.0, -160.0, 175.0, 10.0];
        let u = unwrap_deg(&wrapped);
        assert_eq!(u, vec![170.0, 185.0, 200.0, 175.0, 10.0]);
    }

    #[test]
    fn group_delay_of_a_delay_is_the_delay() {
        // closed form: φ = −360·f·τ degrees ⇒ −dφ/dω = τ
        let f: Vec<f64> = (1..200).map(|i| i as f64 * 10.0).collect();
        let p: Vec<f64> = f.iter().map(|f| -360.0 * f * 0.002).collect();
        for g in group_delay_s(&f, &p) {
            assert!((g - 0.002).abs() < 1e-12);
        }
    }

    #[test]
    fn minimum_phase_of_a_one_pole_lowpass_matches_its_phase() {
        // closed form: H(z) = (1 − a)/(1 − a·z⁻¹), a pole inside the unit
        // circle and no zeros outside, is minimum phase with
        // arg H = −atan2(a·sin ω, 1 − a·cos ω); its magnitude alone must
        // give that phase
        let n = 1 << 18;
        let fs = 48_000.0;
        let df = fs / n as f64;
        let a: f64 = 0.9;
        let h = |f: f64| {
            let w = std::f64::consts::TAU * f / fs;
            Complex::new(1.0 - a, 0.0) / (Complex::new(1.0, 0.0) - Complex::from_polar(a, -w))
        };
        let power: Vec<f64> = (0..=n / 2).map(|k| h(k as f64 * df).norm_sqr()).collect();
        let phi = minimum_phase(&power, n, df, df, fs / 2.0);
        for f in [100.0, 500.0, 1000.0, 3000.0, 8000.0, 20_000.0] {
            let k = (f / df).round() as usize;
            let want = h(k as f64 * df).arg();
            assert!(
                (phi[k] - want).abs().to_degrees() < 0.1,
                "{f}: {} vs {}",
                phi[k].to_degrees(),
                want.to_degrees()
            );
        }
    }
}
