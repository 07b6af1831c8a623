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

/// Length of the short average the onset search runs on, s: long enough
/// that noise averages to near its mean (25 samples at 48 kHz), short
/// against the 80 ms of C80 (our choice).
pub const ONSET_SMOOTHING_S: f64 = 0.0005;

/// The onset threshold stands at least this far above the mean noise
/// power ahead of the arrival, dB (our choice): the 0.5 ms average of
/// noise (about 24 degrees of freedom at 48 kHz) exceeds 6 dB above its
/// mean with odds of about 1e-9 per window, so the search cannot run on
/// into the noise.
pub const ONSET_ABOVE_NOISE_DB: f64 = 6.0;

/// The start of an impulse response (ISO 3382-1) and how far its maximum
/// stands above the noise ahead of it.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Onset {
    /// Index of the start.
    pub index: usize,
    /// Maximum of the squared response over the mean noise power ahead of
    /// the arrival, dB; infinite where nothing but silence (or too little
    /// to judge) lies ahead.
    pub rise_db: f64,
}

/// The onset of the squared response `p2` at rate `fs`: where it first
/// rises to 20 dB below its maximum (ISO 3382-1) without a break back
/// to the noise before the maximum. ISO 3382-1 also asks that the start
/// stand significantly above the background noise: the threshold is
/// raised to [`ONSET_ABOVE_NOISE_DB`] above the noise ahead of the
/// arrival where that is higher.
///
/// A forward search for the first sample above the threshold finds the
/// noise instead as soon as the noise comes within about 12 dB of it
/// (the largest of thousands of squared Gaussian samples lies that far
/// above their mean); so the search runs back from the maximum over the
/// response averaged over [`ONSET_SMOOTHING_S`] and stops where that
/// falls below the threshold, then takes the first sample above the
/// threshold from one averaging length before that point. The noise is
/// read from the second half of what lies ahead of that point (the first
/// half may be faded in), and the search repeated with the raised
/// threshold until the threshold stands above the noise so found.
pub fn onset(p2: &[f64], fs: f64) -> Onset {
    onset_from(p2, fs, None)
}

/// [`onset`], with the search run back from sample `from` (the direct
/// sound's peak, within 20 dB of the maximum, ahead of a stronger
/// build-up) rather than from the maximum; the threshold stays 20 dB below
/// the maximum. `None`, or a `from` past the maximum or the end: as
/// [`onset`].
pub fn onset_from(p2: &[f64], fs: f64, from: Option<usize>) -> Onset {
    let Some((ipk, max)) = p2
        .iter()
        .copied()
        .enumerate()
        .fold(None, |best: Option<(usize, f64)>, (i, v)| match best {
            Some((_, m)) if m >= v => best,
            _ => Some((i, v)),
        })
        .filter(|&(_, m)| m > 0.0)
    else {
        return Onset {
            index: 0,
            rise_db: f64::INFINITY,
        };
    };
    let ipk = from.filter(|&f| f < ipk).unwrap_or(ipk);
    let w = ((ONSET_SMOOTHING_S * fs).round() as usize).max(1);
    let margin = 10f64.powf(ONSET_ABOVE_NOISE_DB / 10.0);
    let mut threshold = 0.01 * max;
    let mut i0 = rise_start(p2, ipk, w, threshold);
    let mut noise = 0.0;
    for _ in 0..8 {
        let end = i0.saturating_sub(w);
        noise = noise_ahead(&p2[end / 2..end], w);
        let wanted = (noise * margin).min(max);
        if wanted <= threshold {
            break;
        }
        threshold = wanted;
        i0 = rise_start(p2, ipk, w, threshold);
    }
    let rise_db = if noise > 0.0 {
        10.0 * (max / noise).log10()
    } else {
        f64::INFINITY
    };
    let index = (i0.saturating_sub(w)..=ipk)
        .find(|&i| p2[i] >= threshold)
        .unwrap_or(ipk);
    Onset { index, rise_db }
}

/// Back from the maximum at `ipk` while the mean of `p2` over the next
/// `w` samples stays at or above `threshold`: the first index of that
/// run (a running sum, updated backwards).
fn rise_start(p2: &[f64], ipk: usize, w: usize, threshold: f64) -> usize {
    let mut sum: f64 = p2[ipk..(ipk + w).min(p2.len())].iter().sum();
    let mut i0 = ipk;
    while i0 > 0 {
        let j = i0 - 1;
        sum += p2[j];
        if j + w < p2.len() {
            sum -= p2[j + w];
        }
        if sum < threshold * w as f64 {
            break;
        }
        i0 = j;
    }
    i0
}

/// Mean power of the noise in `ahead` (squared samples ahead of the
/// arrival): the median of its means over blocks of `w` samples, which a
/// few louder blocks do not move; 0 when fewer than 8 blocks lie ahead
/// (too little to judge).
pub fn noise_ahead(ahead: &[f64], w: usize) -> f64 {
    let mut means: Vec<f64> = ahead
        .chunks_exact(w.max(1))
        .map(|c| c.iter().sum::<f64>() / c.len() as f64)
        .collect();
    if means.len() < 8 {
        return 0.0;
    }
    let mid = means.len() / 2;
    let (_, m, _) = means.select_nth_unstable_by(mid, f64::total_cmp);
    *m
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
/// Integrated to sample `end` with the mean noise power `noise` taken
/// from every sample (as in [`schroeder_db`]: the noise's energy would
/// otherwise count as sound, early where the start is early, late up to
/// the truncation point), plus an exponential tail of energy `tail` (Σx²
/// units) and energy-decay time constant `tau_s` starting at `end`.
pub fn energy_parameters(
    x: &[f64],
    zero: usize,
    fs: f64,
    end: usize,
    noise: f64,
    tail: f64,
    tau_s: f64,
) -> (f64, f64, f64, f64) {
    let end = end.min(x.len()).max(zero.min(x.len()));
    let t_end = (end as f64 - zero as f64) / fs;
    let sum = |k: usize| -> f64 { x[..k].iter().map(|v| v - noise).sum::<f64>() };
    let upto = |t: f64| -> f64 {
        let k = zero + (t * fs).round() as usize;
        if k <= end {
            sum(k)
        } else {
            sum(end) + tail_part(tail, tau_s, 0.0, t - t_end)
        }
    };
    let total: f64 = (sum(end) + tail).max(1e-300);
    let e50 = upto(0.05).max(0.0);
    let e80 = upto(0.08).max(0.0);
    let c = |e: f64| 10.0 * (e.max(1e-300) / (total - e).max(1e-300)).log10();
    let first_moment: f64 = x[..end]
        .iter()
        .enumerate()
        .map(|(i, v)| (v - noise) * (i as f64 - zero as f64) / fs)
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
            let (_, c, d, s) = energy_parameters(&x, 0, fs, end, 0.0, tail, tau);
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
    fn the_onset_is_not_found_in_the_noise_ahead_of_the_arrival() {
        use rand::{SeedableRng, rngs::StdRng};
        use rand_distr::{Distribution, Normal};
        // 100 ms of Gaussian noise at 48 kHz, then a decaying 1 kHz tone
        // (T = 0.5 s) whose first peak stands 25 dB above the noise's
        // mean power
        let fs = 48_000.0;
        let arrival = 4800;
        let mut rng = StdRng::seed_from_u64(5);
        let normal = Normal::new(0.0, 1.0).unwrap();
        let p2: Vec<f64> = (0..arrival + 24_000)
            .map(|i| {
                let n: f64 = normal.sample(&mut rng);
                let s = if i >= arrival {
                    let t = (i - arrival) as f64 / fs;
                    10f64.powf(25.0 / 20.0)
                        * (std::f64::consts::TAU * 1000.0 * t).cos()
                        * (-0.5 * SIXTY_DB * t / 0.5).exp()
                } else {
                    0.0
                };
                (n + s) * (n + s)
            })
            .collect();
        // the first sample 20 dB below the maximum is noise, far ahead
        let max = p2.iter().cloned().fold(0.0, f64::max);
        let first = p2.iter().position(|&v| v >= 0.01 * max).unwrap();
        assert!(first < arrival - 480, "{first}");
        // the onset is at the arrival (within 1 ms), with the rise measured
        let o = onset(&p2, fs);
        assert!(
            (o.index as f64 - arrival as f64).abs() <= 48.0,
            "onset {} against {arrival}",
            o.index
        );
        let rise = 10.0 * max.log10();
        assert!((o.rise_db - rise).abs() < 1.0, "{} vs {rise}", o.rise_db);
    }

    #[test]
    fn the_noise_ahead_is_its_mean_power() {
        // squared samples of unit Gaussian noise: mean 1; the median of
        // 0.5 ms block means sits within a few per cent of it
        use rand::{SeedableRng, rngs::StdRng};
        use rand_distr::{Distribution, Normal};
        let mut rng = StdRng::seed_from_u64(9);
        let normal = Normal::new(0.0, 1.0).unwrap();
        let p2: Vec<f64> = (0..4800)
            .map(|_| {
                let v: f64 = normal.sample(&mut rng);
                v * v
            })
            .collect();
        let n = noise_ahead(&p2, 24);
        assert!((n - 1.0).abs() < 0.1, "{n}");
        assert_eq!(noise_ahead(&p2[..100], 24), 0.0, "too little to judge");
    }

    #[test]
    fn energy_parameters_take_the_noise_out() {
        // T = 1 s from 0 dB over a floor at −30 dB, summed to 1 s with the
        // exact tail beyond: with the floor given, the closed form C80 =
        // 10·lg(e^(13.8·0.08) − 1) = 3.05 dB and D50 = 0.4988; without, the
        // floor's energy lowers both
        let fs = 8000.0;
        let floor = 1e-3;
        let mut x = exponential(1.0, fs, 1.0);
        let tau = 1.0 / SIXTY_DB;
        let tail = x[x.len() - 1] * fs * tau;
        for v in x.iter_mut() {
            *v += floor;
        }
        let end = x.len();
        let (_, c, d, _) = energy_parameters(&x, 0, fs, end, floor, tail, tau);
        assert!((c - 3.05).abs() < 0.02, "C80 {c}");
        assert!((d - 0.4988).abs() < 0.002, "D50 {d}");
        let (_, c0, d0, _) = energy_parameters(&x, 0, fs, end, 0.0, tail, tau);
        assert!(c0 < 3.05 - 0.1 && d0 < 0.4988 - 0.005, "{c0} {d0}");
    }

    #[test]
    fn onset_is_at_minus_twenty_db() {
        let mut x = vec![0.0; 100];
        x[40] = 0.005;
        x[41] = 0.02;
        x[45] = 2.0;
        let o = onset(&x, 8000.0);
        assert_eq!(o.index, 41);
        assert!(o.rise_db.is_infinite());
    }

    #[test]
    fn a_search_from_the_direct_sound_starts_at_it_not_in_the_build_up() {
        // silence with a little noise, a direct sound at 100 ms (a 60 Hz
        // half-cycle, 8 dB under the maximum), then from 120 ms a 45 Hz
        // oscillation rising to the maximum: averaged over 0.5 ms it falls
        // 20 dB below the maximum at each zero crossing
        let fs = 48_000.0;
        let mut x: Vec<f64> = (0..(0.4 * fs) as usize)
            .map(|i| 1e-4 * ((i * 7919 % 1000) as f64 / 500.0 - 1.0))
            .collect();
        let half = (fs / 120.0) as usize;
        for k in 0..half {
            x[(0.1 * fs) as usize + k] +=
                0.4 * (std::f64::consts::PI * k as f64 / half as f64).sin();
        }
        for (i, v) in x.iter_mut().enumerate().skip((0.12 * fs) as usize) {
            let t = i as f64 / fs - 0.12;
            *v += (5.0 * t).min(1.0) * (std::f64::consts::TAU * 45.0 * t).sin();
        }
        let p2: Vec<f64> = x.iter().map(|v| v * v).collect();
        // from the maximum: stopped in the build-up, the build-up read as
        // the noise ahead
        let from_max = onset(&p2, fs);
        assert!(from_max.index > (0.13 * fs) as usize, "{}", from_max.index);
        assert!(
            from_max.rise_db < crate::analysis::room::MIN_ONSET_RISE_DB,
            "{}",
            from_max.rise_db
        );
        // from the direct sound's peak: its leading edge (where 0.4·sin
        // first reaches 0.1, 0.67 ms in), with the silence ahead as the
        // noise
        let direct = (0.1 * fs) as usize + half / 2;
        let o = onset_from(&p2, fs, Some(direct));
        let at = o.index as f64 / fs - 0.1;
        assert!((0.6e-3..0.75e-3).contains(&at), "{} ms", at * 1e3);
        assert!(o.rise_db > 60.0, "{}", o.rise_db);
        // no direct sound given, or one past the maximum: as onset
        assert_eq!(onset_from(&p2, fs, None), from_max);
        assert_eq!(onset_from(&p2, fs, Some(p2.len() + 5)), from_max);
    }
}
