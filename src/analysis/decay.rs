//! Energy decay of a (band-filtered) impulse response and the ISO 3382-1
//! parameters taken from it.
//!
//! - Onset: where the squared response first rises to 20 dB below its
//!   maximum (ISO 3382-1); the room analysis takes it from the broadband
//!   response for every band.
//! - Noise: the iterative truncation point and compensation of A. Lundeby,
//!   T. E. Vigran, H. Bietz, M. Vorländer, Acustica 81(4), 1995 (steps as
//!   quoted in REFERENCES.md, secondary source).
//! - Decay curve: Schroeder's backward integration (M. R. Schroeder,
//!   JASA 37(3), 1965) from the truncation point, plus the energy an
//!   exponential with the late decay rate would still have had.
//! - EDT, T20, T30: least-squares lines over 0…−10, −5…−25, −5…−35 dB,
//!   extrapolated to 60 dB; C50, C80, D50, Ts from the energy integrals,
//!   t = 0 at the onset (ISO 3382-1 definitions as quoted, secondary source).

use serde::{Deserialize, Serialize};

/// 6·ln 10: the energy-decay constant of a 60 dB decay in 1 s.
pub const SIXTY_DB: f64 = 13.815_510_557_964_274;

/// A least-squares line through part of a decay curve.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct Fit {
    /// Decay rate, dB per second (negative).
    pub slope_db_per_s: f64,
    /// Level of the line at the onset, dB.
    pub intercept_db: f64,
    /// Time of the first and last point of the evaluation range, s after the onset.
    pub range_s: (f64, f64),
    /// −60 / slope: the decay time this line gives, s.
    pub decay_time_s: f64,
}

/// What the noise handling found.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Truncation {
    /// Truncation point (Lundeby's crosspoint), samples after the onset.
    pub crosspoint: usize,
    /// Noise power (mean square) of the response.
    pub noise: f64,
    /// Decay time of the late decay, s (for the compensation).
    pub late_decay_s: f64,
    /// Level at the onset of the first regression line (mean square).
    pub start_level: f64,
}

/// Index of the onset: the first sample where `p2` reaches 1/100 of its
/// maximum (−20 dB).
pub fn onset(p2: &[f64]) -> usize {
    let max = p2.iter().cloned().fold(0.0, f64::max);
    p2.iter().position(|&v| v >= 0.01 * max).unwrap_or(0)
}

/// Block means of `x` in blocks of `len` samples: (centre time s, dB).
fn blocks_db(x: &[f64], len: usize, fs: f64) -> Vec<(f64, f64)> {
    let len = len.max(1);
    x.chunks(len)
        .filter(|c| c.len() * 2 >= len)
        .enumerate()
        .map(|(i, c)| {
            let mean = c.iter().sum::<f64>() / c.len() as f64;
            (
                (i as f64 + 0.5) * len as f64 / fs,
                10.0 * mean.max(1e-300).log10(),
            )
        })
        .collect()
}

/// Least squares y = a + b·x; returns (a, b).
pub fn line_fit(points: impl Iterator<Item = (f64, f64)> + Clone) -> Option<(f64, f64)> {
    let n = points.clone().count() as f64;
    if n < 2.0 {
        return None;
    }
    let (sx, sy) = points
        .clone()
        .fold((0.0, 0.0), |(a, b), (x, y)| (a + x, b + y));
    let (mx, my) = (sx / n, sy / n);
    let (sxx, sxy) = points.fold((0.0, 0.0), |(a, b), (x, y)| {
        (a + (x - mx) * (x - mx), b + (x - mx) * (y - my))
    });
    if sxx <= 0.0 {
        return None;
    }
    let b = sxy / sxx;
    Some((my - b * mx, b))
}

fn mean(x: &[f64]) -> f64 {
    if x.is_empty() {
        0.0
    } else {
        x.iter().sum::<f64>() / x.len() as f64
    }
}

/// Lundeby's iteration on the squared response `x` (from the onset) at
/// sample rate `fs`; `interval_s` is the first averaging interval (10–50
/// ms). `None` when there is no decay to speak of.
pub fn lundeby(x: &[f64], fs: f64, interval_s: f64) -> Option<Truncation> {
    let n = x.len();
    if n < 16 {
        return None;
    }
    // (1) averages; (2) noise from the last 10 %
    let blocks = blocks_db(x, (interval_s * fs).round() as usize, fs);
    let mut noise = mean(&x[n - n / 10..]).max(1e-300);
    let mut noise_db = 10.0 * noise.log10();
    // (3) regression from the start to 10 dB above the noise
    let last = blocks.iter().rposition(|&(_, l)| l > noise_db + 10.0)?;
    let (a, b) = line_fit(blocks[..=last].iter().copied())?;
    if b >= 0.0 {
        return None;
    }
    let start_level = 10f64.powf(a / 10.0);
    // (4) crosspoint
    let mut cross_s = (noise_db - a) / b;
    let mut slope = b;
    let end_s = n as f64 / fs;
    for _ in 0..8 {
        // (5) intervals: 5 per 10 dB of decay; (6) re-average
        let interval = (10.0 / -slope / 5.0).clamp(1.0 / fs, 0.05);
        let blocks = blocks_db(x, (interval * fs).round().max(1.0) as usize, fs);
        // (7) noise from 10 dB of decay after the crosspoint, at least the last 10 %
        let from_s = (cross_s + 10.0 / -slope).min(0.9 * end_s);
        let from = ((from_s * fs) as usize).min(n - n / 10);
        noise = mean(&x[from..]).max(1e-300);
        noise_db = 10.0 * noise.log10();
        // (8) late decay: from 25 dB to 5 dB above the noise (20 dB, or
        // what the response offers above the noise, at least 10 dB)
        let top = blocks.first().map_or(noise_db, |b| b.1);
        let hi = (noise_db + 25.0).min(top);
        let lo = noise_db + 5.0;
        if hi - lo < 5.0 {
            break;
        }
        let pts: Vec<(f64, f64)> = blocks
            .iter()
            .copied()
            .skip_while(|&(_, l)| l > hi)
            .take_while(|&(_, l)| l > lo)
            .collect();
        let Some((a2, b2)) = line_fit(pts.iter().copied()) else {
            break;
        };
        if b2 >= 0.0 {
            break;
        }
        // (9) new crosspoint, until it settles
        let new_cross = (noise_db - a2) / b2;
        slope = b2;
        let settled = (new_cross - cross_s).abs() < interval;
        cross_s = new_cross;
        if settled {
            break;
        }
    }
    let crosspoint = ((cross_s.max(0.0) * fs).round() as usize).min(n);
    Some(Truncation {
        crosspoint,
        noise,
        late_decay_s: -60.0 / slope,
        start_level,
    })
}

/// Schroeder decay curve in dB (0 dB at the first sample) of `x` up to
/// `end`, with the mean noise power `noise` subtracted from every sample
/// (W. T. Chu, JASA 63(5), 1978 — method from memory; with Lundeby's
/// truncation this removes the noise energy before the truncation point
/// that would otherwise lift the late curve), plus `tail` (energy beyond
/// `end`, in the same units as Σx²).
pub fn schroeder_db(x: &[f64], end: usize, noise: f64, tail: f64) -> Vec<f64> {
    let end = end.min(x.len());
    let mut e = vec![0.0; end];
    let mut acc = tail;
    for i in (0..end).rev() {
        acc += x[i] - noise;
        e[i] = acc.max(tail * 1e-3).max(1e-300);
    }
    let total = e.first().copied().unwrap_or(0.0).max(1e-300);
    e.iter()
        .map(|v| 10.0 * (v / total).max(1e-300).log10())
        .collect()
}

/// A line through the part of `curve_db` (at `fs`) between `from_db` and
/// `to_db` (negative), or `None` when the curve does not reach `to_db`.
pub fn fit_range(curve_db: &[f64], fs: f64, from_db: f64, to_db: f64) -> Option<Fit> {
    let i0 = curve_db.iter().position(|&v| v <= from_db)?;
    let i1 = curve_db.iter().position(|&v| v <= to_db)?;
    if i1 <= i0 + 1 {
        return None;
    }
    let pts = (i0..=i1).map(|i| (i as f64 / fs, curve_db[i]));
    let (a, b) = line_fit(pts)?;
    if b >= 0.0 {
        return None;
    }
    Some(Fit {
        slope_db_per_s: b,
        intercept_db: a,
        range_s: (i0 as f64 / fs, i1 as f64 / fs),
        decay_time_s: -60.0 / b,
    })
}

/// C50, C80 (dB), D50 and Ts (s) of the squared response `x`, with t = 0
/// at sample `zero` (the direct sound); `x[..zero]` is energy the band
/// filter spread ahead of the direct sound, counted as early energy.
/// Integrated to sample `end` plus an exponential tail of energy `tail`
/// (Σx² units) and energy-decay time constant `tau_s` starting at `end`.
pub fn energy_parameters(
    x: &[f64],
    zero: usize,
    fs: f64,
    end: usize,
    tail: f64,
    tau_s: f64,
) -> (f64, f64, f64, f64) {
    let end = end.min(x.len()).max(zero.min(x.len()));
    let t_end = (end as f64 - zero as f64) / fs;
    let upto = |t: f64| -> f64 {
        let k = zero + (t * fs).round() as usize;
        if k <= end {
            x[..k].iter().sum::<f64>()
        } else {
            x[..end].iter().sum::<f64>() + tail_part(tail, tau_s, 0.0, t - t_end)
        }
    };
    let total: f64 = x[..end].iter().sum::<f64>() + tail;
    let e50 = upto(0.05);
    let e80 = upto(0.08);
    let c = |e: f64| 10.0 * (e / (total - e).max(1e-300)).log10();
    let first_moment: f64 = x[..end]
        .iter()
        .enumerate()
        .map(|(i, v)| v * (i as f64 - zero as f64) / fs)
        .sum::<f64>()
        + tail * (t_end + tau_s);
    (c(e50), c(e80), e50 / total, first_moment / total)
}

/// Energy of the exponential tail between `a` and `b` seconds after its
/// start (both ≥ 0), of total `tail` and time constant `tau`.
fn tail_part(tail: f64, tau: f64, a: f64, b: f64) -> f64 {
    if tau <= 0.0 || b <= a {
        return 0.0;
    }
    tail * ((-a.max(0.0) / tau).exp() - (-b / tau).exp())
}

#[cfg(test)]
mod tests {
    use super::*;

    fn exponential(t60: f64, fs: f64, secs: f64) -> Vec<f64> {
        (0..(secs * fs) as usize)
            .map(|i| (-SIXTY_DB * i as f64 / fs / t60).exp())
            .collect()
    }

    #[test]
    fn fits_of_a_pure_exponential_give_its_decay_time() {
        // closed form: a straight line in dB
        let fs = 8000.0;
        let x = exponential(1.0, fs, 4.0);
        let e = schroeder_db(&x, x.len(), 0.0, 0.0);
        for (from, to) in [(0.0, -10.0), (-5.0, -25.0), (-5.0, -35.0)] {
            let f = fit_range(&e, fs, from, to).unwrap();
            assert!(
                (f.decay_time_s - 1.0).abs() < 0.002,
                "{from}..{to}: {}",
                f.decay_time_s
            );
        }
    }

    #[test]
    fn energy_parameters_match_the_closed_forms() {
        // REFERENCES.md [alg]: for e^(−13.8155·t/T), D50 = 1 − e^(−0.6908/T),
        // C80 = 10·lg(e^(1.1052/T) − 1), Ts = T/13.8155; [calc] values at
        // T = 1 s: 0.4988, 3.05 dB, 72.4 ms; T = 0.5: 0.7488, 9.10 dB, 36.2 ms.
        for (t, d50, c80, ts) in [
            (1.0, 0.4988, 3.05, 0.0724),
            (0.5, 0.7488, 9.10, 0.0362),
            (2.0, 0.2921, -1.32, 0.1448),
        ] {
            let fs = 48_000.0;
            let x = exponential(t, fs, 1.5 * t);
            // cut at 1.5·T with the exact tail beyond
            let tau = t / SIXTY_DB;
            let end = x.len();
            let tail = x[end - 1] * fs * tau;
            let (_, c, d, s) = energy_parameters(&x, 0, fs, end, tail, tau);
            assert!((d - d50).abs() < 0.001, "D50 {d}");
            assert!((c - c80).abs() < 0.01, "C80 {c}");
            assert!((s / ts - 1.0).abs() < 0.005, "Ts {s}");
        }
    }

    #[test]
    fn lundeby_finds_where_the_decay_meets_the_noise() {
        // closed form: a decay of T = 0.5 s from 0 dB meets a floor at
        // −50 dB after 50/60·T = 0.4167 s
        let fs = 8000.0;
        let mut x = exponential(0.5, fs, 2.0);
        for v in x.iter_mut() {
            *v += 1e-5;
        }
        let t = lundeby(&x, fs, 0.01).unwrap();
        assert!(
            (t.crosspoint as f64 / fs - 0.4167).abs() < 0.02,
            "{}",
            t.crosspoint as f64 / fs
        );
        assert!((t.noise / 1e-5 - 1.0).abs() < 0.05);
        assert!((t.late_decay_s - 0.5).abs() < 0.03, "{}", t.late_decay_s);
    }

    #[test]
    fn onset_is_at_minus_twenty_db() {
        let mut x = vec![0.0; 100];
        x[40] = 0.005;
        x[41] = 0.02;
        x[45] = 2.0;
        assert_eq!(onset(&x), 41);
    }
}
