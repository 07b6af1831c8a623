//! The log-frequency grid and fractional-octave smoothing.
//!
//! Smoothing at 1/N octave averages |H|² over [f·2^(−1/(2N)), f·2^(1/(2N))]
//! (the usual definition; P. Hatziantoniou, J. Mourjopoulos, JAES 48(4),
//! 2000 — kernel from memory). The spectrum between FFT bins is taken as
//! piecewise linear and integrated exactly, so the average is continuous
//! in f and tends to plain interpolation as the window narrows below a bin.

use serde::{Deserialize, Serialize};

use crate::error::{Error, Result};

/// Points per octave of the log-frequency grid of every response.
pub const POINTS_PER_OCTAVE: u32 = 48;

/// The fractions of an octave that `--smooth` accepts.
pub const FRACTIONS: [u32; 7] = [1, 2, 3, 6, 12, 24, 48];

/// Fractional-octave smoothing, or none. Written to files as its label
/// (`"1/6"`, `"none"`) and read back from it.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Smoothing {
    /// The spectrum interpolated at each grid frequency.
    None,
    /// Power averaged over 1/N octave.
    Fraction(u32),
}

impl Smoothing {
    /// Parses `1/N` (N in [`FRACTIONS`]) or `none`.
    pub fn parse(s: &str) -> Result<Self> {
        let t = s.trim().to_ascii_lowercase();
        if t == "none" || t == "off" {
            return Ok(Smoothing::None);
        }
        let n = t
            .strip_prefix("1/")
            .and_then(|n| n.parse::<u32>().ok())
            .filter(|n| FRACTIONS.contains(n));
        match n {
            Some(n) => Ok(Smoothing::Fraction(n)),
            None => Err(Error::parameter(format!(
                "--smooth {s:?} is not understood; use none, 1/1, 1/2, 1/3, 1/6, 1/12, 1/24 or 1/48"
            ))),
        }
    }

    /// The label used in files: "1/6" or "none".
    pub fn label(self) -> String {
        match self {
            Smoothing::None => "none".into(),
            Smoothing::Fraction(n) => format!("1/{n}"),
        }
    }

    /// In words, as plots and reports say it: "1/6-octave smoothing", "no
    /// smoothing".
    pub fn words(self) -> String {
        match self {
            Smoothing::None => "no smoothing".into(),
            Smoothing::Fraction(n) => format!("1/{n}-octave smoothing"),
        }
    }

    /// The width of the averaging band in octaves (0 without smoothing).
    pub fn octaves(self) -> f64 {
        match self {
            Smoothing::None => 0.0,
            Smoothing::Fraction(n) => 1.0 / f64::from(n),
        }
    }

    /// The averaging band [lo, hi] around f (lo = hi = f without smoothing).
    pub fn band(self, f: f64) -> (f64, f64) {
        match self {
            Smoothing::None => (f, f),
            Smoothing::Fraction(n) => {
                let half = 2f64.powf(1.0 / (2.0 * f64::from(n)));
                (f / half, f * half)
            }
        }
    }
}

impl std::fmt::Display for Smoothing {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str(&self.label())
    }
}

impl Serialize for Smoothing {
    fn serialize<S: serde::Serializer>(&self, s: S) -> std::result::Result<S::Ok, S::Error> {
        s.serialize_str(&self.label())
    }
}

impl<'de> Deserialize<'de> for Smoothing {
    fn deserialize<D: serde::Deserializer<'de>>(d: D) -> std::result::Result<Self, D::Error> {
        let s = String::deserialize(d)?;
        Smoothing::parse(&s).map_err(|_| {
            serde::de::Error::custom(format!(
                "smoothing {s:?} is not one of none, 1/1, 1/2, 1/3, 1/6, 1/12, 1/24, 1/48"
            ))
        })
    }
}

/// The log grid f1·2^(k/48) for k = 0, 1, … while ≤ f2 (plus a tolerance
/// of 10⁻⁹ octave, so that f2 is on the grid when it falls there).
pub fn log_grid(f1: f64, f2: f64) -> Vec<f64> {
    let octaves = (f2 / f1).log2();
    let count = (octaves * f64::from(POINTS_PER_OCTAVE) + 1e-9).floor() as usize + 1;
    (0..count)
        .map(|k| f1 * 2f64.powf(k as f64 / f64::from(POINTS_PER_OCTAVE)))
        .collect()
}

/// Power smoothing of a curve on the 48-per-octave grid over `1/n` octave
/// (a moving power average of the grid points within ±1/(2n) octave),
/// for curves that no longer have a spectrum behind them (an average of
/// positions). The grid is logarithmic, so a fixed number of points is a
/// fixed fraction of an octave; written by hand because it is a few lines
/// over the grid gliss already has.
pub fn smooth_on_log_grid(values: &[Option<f64>], n: u32) -> Vec<Option<f64>> {
    let half = (f64::from(POINTS_PER_OCTAVE) / (2.0 * f64::from(n))).round() as usize;
    (0..values.len())
        .map(|i| {
            values[i]?;
            let lo = i.saturating_sub(half);
            let hi = (i + half).min(values.len() - 1);
            let mut sum = 0.0;
            let mut count = 0usize;
            for v in values[lo..=hi].iter().flatten() {
                sum += 10f64.powf(v / 10.0);
                count += 1;
            }
            Some(10.0 * (sum / count as f64).log10())
        })
        .collect()
}

/// Running integral of a sequence sampled every `step` and taken as
/// piecewise linear between samples, so that any interval's mean is exact.
#[derive(Debug, Clone)]
pub struct PiecewiseIntegral {
    values: Vec<f64>,
    cumulative: Vec<f64>,
    step: f64,
}

impl PiecewiseIntegral {
    /// Prepares the integral of `values` sampled at 0, step, 2·step, …
    pub fn new(values: Vec<f64>, step: f64) -> Self {
        let mut cumulative = Vec::with_capacity(values.len());
        let mut acc = 0.0;
        cumulative.push(0.0);
        for w in values.windows(2) {
            acc += 0.5 * (w[0] + w[1]) * step;
            cumulative.push(acc);
        }
        PiecewiseIntegral {
            values,
            cumulative,
            step,
        }
    }

    /// ∫ from 0 to x, with x clamped to the sampled range.
    fn integral_to(&self, x: f64) -> f64 {
        let last = (self.values.len() - 1) as f64;
        let pos = (x / self.step).clamp(0.0, last);
        let k = (pos.floor() as usize).min(self.values.len().saturating_sub(2));
        let u = pos - k as f64;
        let (a, b) = (
            self.values[k],
            self.values[(k + 1).min(self.values.len() - 1)],
        );
        self.cumulative[k] + self.step * (a * u + 0.5 * (b - a) * u * u)
    }

    /// Linear interpolation at x (clamped to the sampled range).
    pub fn at(&self, x: f64) -> f64 {
        let last = (self.values.len() - 1) as f64;
        let pos = (x / self.step).clamp(0.0, last);
        let k = (pos.floor() as usize).min(self.values.len().saturating_sub(2));
        let u = pos - k as f64;
        let b = self.values[(k + 1).min(self.values.len() - 1)];
        self.values[k] * (1.0 - u) + b * u
    }

    /// Mean over [lo, hi] ∩ the sampled range (a window reaching past the
    /// last sample averages what there is); the interpolated value where
    /// the interval is empty.
    pub fn mean(&self, lo: f64, hi: f64) -> f64 {
        let last = (self.values.len().max(1) - 1) as f64 * self.step;
        let (lo, hi) = (lo.clamp(0.0, last), hi.clamp(0.0, last));
        if hi <= lo || self.values.len() < 2 {
            return self.at(lo);
        }
        (self.integral_to(hi) - self.integral_to(lo)) / (hi - lo)
    }
}

/// Smoothed power at each grid frequency, from a power spectrum on linear
/// bins `df` apart (bin k at k·df).
pub fn smooth_power(power: &[f64], df: f64, grid: &[f64], smoothing: Smoothing) -> Vec<f64> {
    let p = PiecewiseIntegral::new(power.to_vec(), df);
    grid.iter()
        .map(|&f| {
            let (lo, hi) = smoothing.band(f);
            p.mean(lo, hi)
        })
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn grid_has_48_points_per_octave() {
        let g = log_grid(20.0, 20_000.0);
        assert_eq!(g.len(), (48.0 * (1000f64).log2()).floor() as usize + 1);
        assert_eq!(g[0], 20.0);
        assert!((g[48] - 40.0).abs() < 1e-9);
        assert!(*g.last().unwrap() <= 20_000.0);
        let g = log_grid(100.0, 400.0);
        assert_eq!(g.len(), 97);
        assert!((g[96] - 400.0).abs() < 1e-9);
    }

    #[test]
    fn parse_and_label() {
        assert_eq!(Smoothing::parse("1/6").unwrap(), Smoothing::Fraction(6));
        assert_eq!(Smoothing::parse("none").unwrap(), Smoothing::None);
        assert!(Smoothing::parse("1/5").is_err());
        assert!(Smoothing::parse("sixth").is_err());
        assert_eq!(Smoothing::Fraction(48).label(), "1/48");
    }

    #[test]
    fn flat_stays_flat_and_power_is_conserved() {
        // closed form: the mean of a constant is the constant
        let power = vec![2.5; 10_000];
        let grid = log_grid(20.0, 20_000.0);
        for s in [
            Smoothing::None,
            Smoothing::Fraction(1),
            Smoothing::Fraction(6),
            Smoothing::Fraction(48),
        ] {
            let out = smooth_power(&power, 2.4, &grid, s);
            assert!(out.iter().all(|&v| (v - 2.5).abs() < 1e-12), "{s:?}");
        }
    }

    #[test]
    fn a_line_spreads_over_exactly_one_nth_octave() {
        // closed form: a line at f0 is inside [f·2^(−1/2N), f·2^(1/2N)] for
        // f in [f0·2^(−1/2N), f0·2^(1/2N)] — a width of 1/N octave; inside,
        // the mean is the line's area divided by the window width.
        let df = 0.5;
        let k0 = 2000; // 1000 Hz
        let mut power = vec![0.0; 8000];
        power[k0] = 1.0;
        let f0 = k0 as f64 * df;
        let area = df; // triangle of height 1 and base 2·df
        for n in [1u32, 3, 6, 12] {
            let s = Smoothing::Fraction(n);
            // a fine grid to find the support
            let fine: Vec<f64> = (0..40_000).map(|i| 500.0 + i as f64 * 0.05).collect();
            let out = smooth_power(&power, df, &fine, s);
            let support: Vec<f64> = fine
                .iter()
                .zip(&out)
                .filter(|(_, v)| **v > 1e-12)
                .map(|(f, _)| *f)
                .collect();
            let lo = support[0];
            let hi = *support.last().unwrap();
            let width_oct = (hi / lo).log2();
            // the line itself is 2 bins wide when taken as piecewise
            // linear: allow that much in octaves at 1 kHz
            let slack = 2.0 * (2.0 * df / f0);
            assert!(
                (width_oct - 1.0 / f64::from(n)).abs() < slack,
                "1/{n}: {width_oct}"
            );
            // level at the centre: area over window width
            let (a, b) = s.band(f0);
            let centre = smooth_power(&power, df, &[f0], s)[0];
            assert!((centre - area / (b - a)).abs() < 1e-12);
        }
    }

    #[test]
    fn matches_a_naive_bin_average_when_windows_are_wide() {
        // naive reference: the plain mean of the bins inside the window
        let df = 1.0;
        let power: Vec<f64> = (0..20_000)
            .map(|k| 1.0 + ((k as f64) * 0.37).sin().powi(2))
            .collect();
        let grid = log_grid(1000.0, 8000.0);
        let out = smooth_power(&power, df, &grid, Smoothing::Fraction(3));
        for (&f, &v) in grid.iter().zip(&out) {
            let (lo, hi) = Smoothing::Fraction(3).band(f);
            let bins: Vec<f64> = (lo.ceil() as usize..=hi.floor() as usize)
                .map(|k| power[k])
                .collect();
            let naive = bins.iter().sum::<f64>() / bins.len() as f64;
            assert!((v / naive - 1.0).abs() < 0.01, "f={f}");
        }
    }

    #[test]
    fn log_grid_smoothing_of_a_flat_curve_is_flat_and_averages_power() {
        let flat = vec![Some(-3.0); 200];
        assert!(
            smooth_on_log_grid(&flat, 3)
                .iter()
                .all(|v| (v.unwrap() + 3.0).abs() < 1e-12)
        );
        // a step of 0 / -inf-like power: at the step the power average of
        // an equal number of points at 1.0 and 0.25 (naive reference)
        let step: Vec<Option<f64>> = (0..97)
            .map(|i| Some(if i < 48 { 0.0 } else { -6.020_599_913 }))
            .collect();
        // 1/1 octave: ±24 points around point 48: 24 points at 1.0 (24..48)
        // and 25 at 0.25 (48..=72)
        let s = smooth_on_log_grid(&step, 1);
        let want = 10.0 * ((24.0 * 1.0 + 25.0 * 0.25) / 49.0f64).log10();
        assert!((s[48].unwrap() - want).abs() < 1e-9);
    }

    #[test]
    fn smoothing_in_words_and_in_files() {
        assert_eq!(Smoothing::None.words(), "no smoothing");
        assert_eq!(Smoothing::Fraction(6).words(), "1/6-octave smoothing");
        // written as its label and read back, never parsed from words
        let j = serde_json::to_string(&Smoothing::Fraction(24)).unwrap();
        assert_eq!(j, "\"1/24\"");
        assert_eq!(
            serde_json::from_str::<Smoothing>(&j).unwrap(),
            Smoothing::Fraction(24)
        );
        assert!(serde_json::from_str::<Smoothing>("\"1/5\"").is_err());
    }
}
