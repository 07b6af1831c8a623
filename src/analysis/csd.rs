//! Cumulative spectral decay: the spectra of the impulse response as the
//! start of the analysis window moves later in small steps while its end
//! stays put (the usual construction of a decay waterfall; common
//! practice). A resonance shows as a ridge that falls, for a mode of
//! frequency f and quality Q, at 20·lg(e)·π·f/Q dB per second (the
//! envelope e^(−πft/Q), closed form).

use crate::analysis::smoothing::{PiecewiseIntegral, Smoothing};
use crate::signal::{fft, window};

/// One spectrum of the waterfall.
#[derive(Debug, Clone, PartialEq)]
pub struct Slice {
    /// Start of its window relative to the impulse peak, s.
    pub start_s: f64,
    /// Level on the grid, dB re the first slice's maximum.
    pub level_db: Vec<f64>,
}

/// Settings of the decay spectrum.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct CsdConfig {
    /// Start of the first window relative to the impulse peak, s (≤ 0,
    /// so that the first spectrum is the gated response itself).
    pub first_s: f64,
    /// Step between window starts, s.
    pub step_s: f64,
    /// Number of slices.
    pub slices: usize,
    /// End of every window after the impulse peak, s.
    pub end_s: f64,
    /// Rise time of the window's start (half-Hann), s.
    pub rise_s: f64,
}

impl Default for CsdConfig {
    fn default() -> Self {
        CsdConfig {
            first_s: -0.5e-3,
            step_s: 0.1e-3,
            slices: 40,
            end_s: 0.02,
            rise_s: 0.1e-3,
        }
    }
}

/// The decay spectrum of `h` (circular, sample rate `fs`) around its peak
/// `ipeak`, on `grid`, power-smoothed by `smoothing` within `band`.
pub fn decay_spectrum(
    h: &[f64],
    ipeak: usize,
    fs: f64,
    grid: &[f64],
    smoothing: Smoothing,
    band: (f64, f64),
    c: CsdConfig,
) -> Vec<Slice> {
    let n = h.len() as isize;
    let end = ipeak as isize + (c.end_s * fs).round() as isize;
    let rise = (c.rise_s * fs).round() as usize;
    // one FFT length for all: dense enough for the grid's low end
    let m = fft::fast_len(((fs / band.0) * 8.0) as usize)
        .max(fft::fast_len((c.end_s * fs) as usize + 1));
    let df = fs / m as f64;
    let mut out = Vec::with_capacity(c.slices);
    let mut reference = None;
    for k in 0..c.slices {
        let offset_s = c.first_s + k as f64 * c.step_s;
        let start = ipeak as isize + (offset_s * fs).round() as isize;
        if start >= end {
            break;
        }
        let len = (end - start) as usize;
        let mut x: Vec<f64> = (0..len)
            .map(|i| h[(start + i as isize).rem_euclid(n) as usize])
            .collect();
        window::fade_in(&mut x, rise.min(len));
        window::fade_out(&mut x, (len / 4).max(1));
        let power: Vec<f64> = fft::rfft(&x, m).iter().map(|z| z.norm_sqr()).collect();
        let p = PiecewiseIntegral::new(power, df);
        let levels: Vec<f64> = grid
            .iter()
            .map(|&f| {
                let (lo, hi) = smoothing.band(f);
                p.mean(lo.max(band.0), hi.min(band.1))
            })
            .collect();
        let r = *reference
            .get_or_insert_with(|| levels.iter().cloned().fold(f64::MIN_POSITIVE, f64::max));
        out.push(Slice {
            start_s: offset_s,
            level_db: levels
                .iter()
                .map(|v| 10.0 * (v / r).max(1e-30).log10())
                .collect(),
        });
    }
    out
}

/// The slices worth showing: the first, then each that differs from the
/// last one kept by more than `tolerance_db` somewhere on the grid (the
/// windows that start before the response arrives all hold the same
/// response, and so the same spectrum). Indices into `slices`.
pub fn distinct(slices: &[Slice], tolerance_db: f64) -> Vec<usize> {
    let mut kept: Vec<usize> = Vec::new();
    for (i, s) in slices.iter().enumerate() {
        let differs = kept.last().is_none_or(|&k| {
            slices[k]
                .level_db
                .iter()
                .zip(&s.level_db)
                .any(|(a, b)| (a - b).abs() > tolerance_db)
        });
        if differs {
            kept.push(i);
        }
    }
    kept
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::analysis::smoothing::log_grid;

    #[test]
    fn a_resonance_decays_at_the_rate_its_q_gives() {
        // closed form: e^(−σt)·sin(2πf0·t) with σ = π·f0/Q falls at
        // 20·lg(e)·σ dB/s at f0
        let fs = 48_000.0;
        for (f0, q) in [(1000.0, 10.0), (3000.0, 25.0)] {
            let sigma = std::f64::consts::PI * f0 / q;
            let mut h = vec![0.0; 48_000];
            let lead = 100;
            for (i, v) in h.iter_mut().enumerate().skip(lead) {
                let t = (i - lead) as f64 / fs;
                *v = (-sigma * t).exp() * (std::f64::consts::TAU * f0 * t).sin();
            }
            let grid = log_grid(100.0, 20_000.0);
            let cfg = CsdConfig {
                first_s: 0.0,
                step_s: 0.5e-3,
                slices: 8,
                end_s: 0.05,
                rise_s: 0.1e-3,
            };
            let s = decay_spectrum(&h, lead, fs, &grid, Smoothing::None, (100.0, 20_000.0), cfg);
            let i = grid.iter().position(|&f| f >= f0).unwrap();
            // slope of the level at f0 over the slices after the first
            let pts: Vec<(f64, f64)> = s[1..].iter().map(|x| (x.start_s, x.level_db[i])).collect();
            let (_, slope) = crate::analysis::decay::line_fit(pts.iter().copied()).unwrap();
            let want = -20.0 * std::f64::consts::LOG10_E * sigma;
            assert!(
                (slope / want - 1.0).abs() < 0.03,
                "{f0} Hz Q {q}: {slope} dB/s vs {want}"
            );
        }
    }

    #[test]
    fn windows_that_start_before_the_response_are_shown_once() {
        // a response arriving 2 ms after the analysis starts: every window
        // starting earlier holds all of it, so their spectra are equal
        let fs = 48_000.0;
        let lead = 2000;
        let mut h = vec![0.0; 16_384];
        for (i, v) in h.iter_mut().enumerate().skip(lead) {
            let t = (i - lead) as f64 / fs;
            *v = (-3000.0 * t).exp() * (std::f64::consts::TAU * 2000.0 * t).sin();
        }
        let grid = log_grid(200.0, 20_000.0);
        let cfg = CsdConfig {
            first_s: -1.0e-3,
            step_s: 0.25e-3,
            slices: 12,
            end_s: 0.02,
            rise_s: 0.1e-3,
        };
        // the peak is taken as the response's start here, so windows from
        // -1 ms to -0.25 ms (and 0) start in the silence before it
        let s = decay_spectrum(
            &h,
            lead,
            fs,
            &grid,
            Smoothing::Fraction(6),
            (200.0, 20_000.0),
            cfg,
        );
        let keep = distinct(&s, 0.5);
        assert_eq!(keep[0], 0);
        assert!(
            keep[1] >= 4,
            "the windows before the arrival repeat the first: {keep:?}"
        );
        // after the arrival every slice cuts off more of the decay
        assert_eq!(keep.len(), s.len() - keep[1] + 1, "{keep:?}");
    }
}
