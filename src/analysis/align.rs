//! Several loudspeakers heard at one listening position: their arrival
//! times, levels and polarities relative to the first, and the delay and
//! polarity for each that make their complex sum strongest through a
//! crossover band.
//!
//! Every measurement's impulse response is placed on its own time axis
//! (its first sample at `start_s` after the recording's start, which with
//! a loopback reference is the moment the sweep left the interface), so
//! that the relative times between measurements are exact whatever the
//! interface's latency. The complex responses are taken at the bins of one
//! FFT length for all of them, so that they add bin by bin with no
//! interpolation: the predicted sum is the sum of the measured responses.
//!
//! *Arrival of a band-limited source.* A subwoofer's impulse response has
//! no sharp peak; its arrival is read from the band it radiates: the peak
//! of the envelope (the magnitude of the analytic signal) of the impulse
//! response band-passed to the band, refined between samples by
//! band-limited interpolation of the analytic signal. For a full-range
//! loudspeaker and a wide band it falls on the peak of |h|; for two
//! loudspeakers of different bandwidths it is a group delay in the band,
//! not the time their sound starts.
//!
//! *The best sum.* The objective is the mean level of the complex sum in
//! dB over the band, each bin weighted by 1/f so that each octave counts
//! alike (a log-frequency mean); a bin's level is floored 30 dB below the
//! sum of the magnitudes there, so that one deep notch of the room does not
//! decide. The delay of each loudspeaker after the first is searched over
//! ±`max_delay_s` with both polarities: a coarse pass at 1/32 of the
//! period of the band's top, then a fine pass at 1/16 sample around the
//! best coarse candidates. With more than two loudspeakers each is placed
//! in turn against the sum of those before it, then each is placed again
//! against all the others. With several listening positions the
//! objective is the mean over positions: the best delay at one seat is
//! not the best everywhere.

use rustfft::num_complex::Complex;
use serde::{Deserialize, Serialize};

use crate::analysis::delay;
use crate::signal::fft;

/// One measurement's impulse response on its time axis.
#[derive(Debug, Clone, Copy)]
pub struct Impulse<'a> {
    /// The samples.
    pub samples: &'a [f64],
    /// Time of the first sample after the recording's start (with a
    /// loopback reference: after the sweep left the interface), s.
    pub start_s: f64,
}

/// A complex response at the bins `k·df` (k = 0 … n/2) of one FFT length,
/// with the time origin at the recording's start.
#[derive(Debug, Clone, PartialEq)]
pub struct Spectrum {
    /// Bin spacing, Hz.
    pub df: f64,
    /// H(k·df).
    pub bins: Vec<Complex<f64>>,
}

impl Spectrum {
    /// The points a band is read at: for each frequency of a grid of
    /// [`POINTS_PER_OCTAVE`] points per octave over `band`, the nearest
    /// bin; a bin that several grid points fall on counts as many times.
    /// Read at these points, every mean is a log-frequency mean (each
    /// octave alike), and the cost of a band does not grow with the length
    /// of the impulse response. Empty when no bin falls in the band.
    pub fn band_points(&self, band: (f64, f64)) -> Vec<(usize, f64)> {
        let mut points: Vec<(usize, f64)> = Vec::new();
        if !(band.0 > 0.0 && band.1 >= band.0) || self.bins.len() < 2 {
            return points;
        }
        let count = ((band.1 / band.0).log2() * POINTS_PER_OCTAVE).floor() as usize + 1;
        for i in 0..count {
            let f = band.0 * 2f64.powf(i as f64 / POINTS_PER_OCTAVE);
            let k = ((f / self.df).round() as usize).clamp(1, self.bins.len() - 1);
            match points.last_mut() {
                Some((last, w)) if *last == k => *w += 1.0,
                _ => points.push((k, 1.0)),
            }
        }
        points
    }
}

/// The density of the log-frequency points a band is read at.
pub const POINTS_PER_OCTAVE: f64 = 96.0;

/// The FFT length that holds the longest of `lengths` without wrapping.
pub fn common_len(lengths: &[usize]) -> usize {
    fft::fast_len(lengths.iter().copied().max().unwrap_or(2).max(2))
}

/// The complex response of `imp` at the bins of length `n` (at least the
/// impulse's length), with its time axis put back: bin k is multiplied by
/// e^{−j2π·k·df·start_s}, so that a loudspeaker that sounds later has the
/// larger phase lag.
pub fn spectrum(imp: Impulse<'_>, fs: f64, n: usize) -> Spectrum {
    let x = fft::rfft(imp.samples, n);
    let df = fs / n as f64;
    let bins = x
        .into_iter()
        .enumerate()
        .map(|(k, v)| {
            v * Complex::from_polar(
                1.0,
                -2.0 * std::f64::consts::PI * k as f64 * df * imp.start_s,
            )
        })
        .collect();
    Spectrum { df, bins }
}

/// The weight of a raised-cosine band edge: 1 inside `band`, falling to 0
/// over half an octave outside each edge.
fn band_weight(f: f64, band: (f64, f64)) -> f64 {
    if f <= 0.0 {
        return 0.0;
    }
    let taper = 0.5; // octaves
    let below = (band.0 / f).log2();
    let above = (f / band.1).log2();
    let out = below.max(above);
    if out <= 0.0 {
        1.0
    } else if out >= taper {
        0.0
    } else {
        0.5 * (1.0 + (std::f64::consts::PI * out / taper).cos())
    }
}

/// The analytic signal of `h` band-passed to `band` (raised-cosine edges
/// half an octave wide), on a circular axis of `fast_len(2·len)` samples
/// so that the band-pass's ringing before the peak does not wrap onto it.
pub fn analytic_in_band(h: &[f64], fs: f64, band: (f64, f64)) -> Vec<Complex<f64>> {
    let n = fft::fast_len(2 * h.len().max(1));
    let x = fft::rfft(h, n);
    let mut c = vec![Complex::new(0.0, 0.0); n];
    for (k, v) in x.iter().enumerate().skip(1) {
        if k >= n.div_ceil(2) {
            break;
        }
        let f = k as f64 * fs / n as f64;
        c[k] = 2.0 * v * band_weight(f, band);
    }
    let plan = fft::complex_plan(n, true);
    plan.process(&mut c);
    let scale = 1.0 / n as f64;
    for v in &mut c {
        *v *= scale;
    }
    c
}

/// The arrival is the first hump of the band-passed envelope that comes
/// within this ratio of its highest value (−6 dB, common practice for
/// telling an arrival from a later build-up).
pub const ARRIVAL_WITHIN: f64 = 0.5;

/// The arrival time of `imp` in `band`: the first peak of its band-passed
/// envelope within 6 dB of the highest ([`ARRIVAL_WITHIN`]), refined
/// between samples; s after the recording's start. None for a silent
/// response.
pub fn arrival_s(imp: Impulse<'_>, fs: f64, band: (f64, f64)) -> Option<f64> {
    arrival(imp, fs, band).map(|a| a.time_s)
}

/// An arrival read from a band.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Arrival {
    /// The arrival ([`arrival_s`]), s after the recording's start.
    pub time_s: f64,
    /// An earlier hump of the envelope, within 20 dB of the highest but
    /// more than 6 dB under it, and its level relative to the highest,
    /// dB: the sound's own arrival, likely, with the arrival read being a
    /// room's build-up (None when the envelope rises straight to the
    /// arrival).
    pub earlier_hump: Option<(f64, f64)>,
}

/// [`arrival_s`] with the time the envelope first rose.
pub fn arrival(imp: Impulse<'_>, fs: f64, band: (f64, f64)) -> Option<Arrival> {
    let a = analytic_in_band(imp.samples, fs, band);
    let env: Vec<f64> = a.iter().map(|v| v.norm()).collect();
    let top = delay::peak_index(&env, 0..env.len())?;
    if env[top] <= 0.0 || !env[top].is_finite() {
        return None;
    }
    // the first hump of the envelope that comes within 6 dB of its
    // highest: in a room a band's envelope can peak later, on the
    // build-up of a mode, than on the sound's own arrival. The circular
    // axis starts half-way round, before the response's pre-roll, so
    // that a band-pass's ringing ahead of the start is passed over too.
    let n = env.len();
    let half = env[top] * ARRIVAL_WITHIN;
    let mut order = (0..n).map(|k| (k + n / 2) % n);
    let rise = order
        .clone()
        .find(|&k| env[k] >= env[top] * 0.1)
        .unwrap_or(top);
    let first = order.find(|&k| env[k] >= half).unwrap_or(top);
    // between the rise and the arrival: a hump the envelope falls from by
    // more than 2 dB before it rises again
    let mut earlier = None;
    let (mut k, mut hump) = (rise, rise);
    while k != first {
        if env[k] > env[hump] {
            hump = k;
        } else if env[k] < env[hump] * 0.8 && earlier.is_none() {
            earlier = Some(hump);
        }
        k = (k + 1) % n;
    }
    let mut i = first;
    while env[(i + 1) % n] > env[i] {
        i = (i + 1) % n;
    }
    let re: Vec<f64> = a.iter().map(|v| v.re).collect();
    let im: Vec<f64> = a.iter().map(|v| v.im).collect();
    let mag = |t: f64| delay::interpolate(&re, t).hypot(delay::interpolate(&im, t));
    let t = golden_max(mag, i as f64 - 1.0, i as f64 + 1.0, 60);
    // a time in the second half of the circular axis lies before the start
    let n = a.len() as f64;
    let unwrap = |t: f64| if t > n / 2.0 { t - n } else { t };
    Some(Arrival {
        time_s: imp.start_s + unwrap(t) / fs,
        earlier_hump: earlier.map(|h| {
            (
                imp.start_s + unwrap(h as f64) / fs,
                20.0 * (env[h] / env[top]).log10(),
            )
        }),
    })
}

/// The maximum of a unimodal `f` on [a, b] by golden-section search,
/// after a scan of 21 points to find the right hump.
fn golden_max(f: impl Fn(f64) -> f64, a: f64, b: f64, iterations: usize) -> f64 {
    let step = (b - a) / 20.0;
    let (mut best, mut best_v) = (a, f(a));
    for k in 1..=20 {
        let t = a + k as f64 * step;
        let v = f(t);
        if v > best_v {
            best = t;
            best_v = v;
        }
    }
    delay::golden_section_max(f, best - step, best + step, iterations)
}

/// The level of `s` over `band`: its power averaged over the band's
/// log-frequency points ([`Spectrum::band_points`]: each octave alike),
/// dB. None when no bin falls in the band.
pub fn band_level_db(s: &Spectrum, band: (f64, f64)) -> Option<f64> {
    let points = s.band_points(band);
    if points.is_empty() {
        return None;
    }
    let (mut p, mut w) = (0.0, 0.0);
    for (k, wk) in points {
        p += wk * s.bins[k].norm_sqr();
        w += wk;
    }
    Some(10.0 * (p / w).log10())
}

/// A polarity judged from two responses over a band.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "lowercase")]
pub enum Polarity {
    /// They add as they are.
    Same,
    /// They add with one of them inverted.
    Inverted,
}

impl Polarity {
    /// In words.
    pub fn words(self) -> &'static str {
        match self {
            Polarity::Same => "same",
            Polarity::Inverted => "inverted",
        }
    }
}

/// Below this |agreement| the polarity is not told: the two responses are
/// too near quadrature over the band for either sign to add (common
/// practice; a cosine of 0.3 is a phase difference within 17° of 90°).
pub const POLARITY_MIN_AGREEMENT: f64 = 0.3;

/// How two responses agree in phase over `band` once `b` is advanced by
/// `shift_s` (its arrival after `a`'s): Σ w·Re(A·conj(B')) / Σ w·|A|·|B'|
/// over the band's log-frequency points ([`Spectrum::band_points`], w
/// their weights), from −1 (opposite) to +1 (in phase). None when no bin
/// falls in the band or either is silent there.
pub fn phase_agreement(a: &Spectrum, b: &Spectrum, band: (f64, f64), shift_s: f64) -> Option<f64> {
    let (mut num, mut den) = (0.0, 0.0);
    for (k, w) in a.band_points(band) {
        let f = k as f64 * a.df;
        let bk = b.bins[k] * Complex::from_polar(1.0, 2.0 * std::f64::consts::PI * f * shift_s);
        num += w * (a.bins[k] * bk.conj()).re;
        den += w * a.bins[k].norm() * bk.norm();
    }
    (den > 0.0).then_some(num / den)
}

/// The polarity an agreement means, or None when it is too weak to tell.
pub fn polarity(agreement: f64) -> Option<Polarity> {
    if agreement >= POLARITY_MIN_AGREEMENT {
        Some(Polarity::Same)
    } else if agreement <= -POLARITY_MIN_AGREEMENT {
        Some(Polarity::Inverted)
    } else {
        None
    }
}

/// A bin's level is floored this far below the sum of the magnitudes
/// there (power ratio 10⁻³, −30 dB), so that one deep notch does not
/// decide the objective.
const NOTCH_FLOOR: f64 = 1e-3;

/// One loudspeaker's setting: a delay added to it (negative: it should
/// sound earlier, i.e. the others be delayed) and its polarity.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Setting {
    /// Delay added, s.
    pub delay_s: f64,
    /// Whether its polarity is inverted.
    pub inverted: bool,
}

impl Setting {
    /// As measured: no delay, polarity as is.
    pub const AS_IS: Setting = Setting {
        delay_s: 0.0,
        inverted: false,
    };

    fn factor(self, f: f64) -> Complex<f64> {
        let sign = if self.inverted { -1.0 } else { 1.0 };
        Complex::from_polar(sign, -2.0 * std::f64::consts::PI * f * self.delay_s)
    }
}

/// The mean level of the complex sum of `spectra` with `settings` over
/// `band`, dB (log-frequency mean of each bin's level, floored as the
/// module explains). `positions[p][s]` is loudspeaker s at position p;
/// the mean is over positions too. None when no bin falls in the band.
pub fn sum_level_db(
    positions: &[Vec<&Spectrum>],
    settings: &[Setting],
    band: (f64, f64),
) -> Option<f64> {
    let mut total = 0.0;
    for spectra in positions {
        let points = spectra.first()?.band_points(band);
        if points.is_empty() {
            return None;
        }
        let (mut acc, mut w) = (0.0, 0.0);
        for (k, wk) in points {
            let f = k as f64 * spectra[0].df;
            let mut s = Complex::new(0.0, 0.0);
            let mut mags = 0.0;
            for (sp, set) in spectra.iter().zip(settings) {
                s += sp.bins[k] * set.factor(f);
                mags += sp.bins[k].norm();
            }
            acc += wk * level(s.norm_sqr(), mags);
            w += wk;
        }
        total += 10.0 * acc / w;
    }
    Some(total / positions.len() as f64)
}

/// log10 of a bin's power, floored at [`NOTCH_FLOOR`] of the squared sum
/// of the magnitudes there.
fn level(power: f64, mags: f64) -> f64 {
    power
        .max(NOTCH_FLOOR * mags * mags)
        .max(f64::MIN_POSITIVE)
        .log10()
}

/// What [`best_sum`] found.
#[derive(Debug, Clone, PartialEq)]
pub struct BestSum {
    /// One setting per loudspeaker; the first is always as is.
    pub settings: Vec<Setting>,
    /// The objective with these settings, dB.
    pub level_db: f64,
    /// The objective as measured, dB.
    pub as_is_db: f64,
    /// Loudspeakers (indices) whose best delay lies at the edge of the
    /// search: the best may lie beyond it.
    pub at_edge: Vec<usize>,
}

/// The delay (within ±`max_delay_s`, to 1/16 sample at `fs`) and polarity
/// of each loudspeaker after the first that make the complex sum's mean
/// level over `band` highest; see the module for the search. None when
/// no bin falls in the band or there is only one loudspeaker.
pub fn best_sum(
    positions: &[Vec<&Spectrum>],
    band: (f64, f64),
    max_delay_s: f64,
    fs: f64,
) -> Option<BestSum> {
    let speakers = positions.first()?.len();
    if speakers < 2 || positions.iter().any(|p| p.len() != speakers) {
        return None;
    }
    let as_is = vec![Setting::AS_IS; speakers];
    let as_is_db = sum_level_db(positions, &as_is, band)?;
    let mut settings = as_is.clone();
    // the bins of the band, their frequencies and weights, per position
    let first = positions[0][0];
    let points = first.band_points(band);
    let freqs: Vec<f64> = points.iter().map(|&(k, _)| k as f64 * first.df).collect();
    let coarse = (1.0 / (32.0 * band.1)).min(max_delay_s.max(1e-9));
    let fine = 1.0 / (16.0 * fs);
    let mut at_edge = vec![false; speakers];
    // the first pass places each against those before it; the second
    // against all the others
    for pass in 0..2 {
        for s in 1..speakers {
            let others: Vec<usize> = (0..speakers)
                .filter(|&j| j != s && (pass == 1 || j < s))
                .collect();
            // the sum of the others and this one's response, per position and bin
            let fixed: Vec<Vec<Complex<f64>>> = positions
                .iter()
                .map(|sp| {
                    points
                        .iter()
                        .zip(&freqs)
                        .map(|(&(k, _), &f)| {
                            others
                                .iter()
                                .map(|&j| sp[j].bins[k] * settings[j].factor(f))
                                .sum()
                        })
                        .collect()
                })
                .collect();
            let mags: Vec<Vec<f64>> = positions
                .iter()
                .map(|sp| {
                    points
                        .iter()
                        .map(|&(k, _)| {
                            (0..speakers)
                                .filter(|j| others.contains(j) || *j == s)
                                .map(|j| sp[j].bins[k].norm())
                                .sum()
                        })
                        .collect()
                })
                .collect();
            let own: Vec<Vec<Complex<f64>>> = positions
                .iter()
                .map(|sp| points.iter().map(|&(k, _)| sp[s].bins[k]).collect())
                .collect();
            let objective = |d: f64, inverted: bool| -> f64 {
                let set = Setting {
                    delay_s: d,
                    inverted,
                };
                let mut total = 0.0;
                for p in 0..positions.len() {
                    let (mut acc, mut w) = (0.0, 0.0);
                    for (i, &f) in freqs.iter().enumerate() {
                        let v = fixed[p][i] + own[p][i] * set.factor(f);
                        let wk = points[i].1;
                        acc += wk * level(v.norm_sqr(), mags[p][i]);
                        w += wk;
                    }
                    total += 10.0 * acc / w;
                }
                total / positions.len() as f64
            };
            // coarse scan: keep the best few candidates
            let steps = (max_delay_s / coarse).ceil() as i64;
            let mut candidates: Vec<(f64, f64, bool)> = Vec::new();
            for inverted in [false, true] {
                for k in -steps..=steps {
                    let d = (k as f64 * coarse).clamp(-max_delay_s, max_delay_s);
                    candidates.push((objective(d, inverted), d, inverted));
                }
            }
            candidates.sort_by(|a, b| b.0.total_cmp(&a.0));
            let mut best = (f64::NEG_INFINITY, 0.0, false);
            for &(_, d0, inverted) in candidates.iter().take(4) {
                let lo = (d0 - coarse).max(-max_delay_s);
                let hi = (d0 + coarse).min(max_delay_s);
                let n = ((hi - lo) / fine).ceil() as i64;
                for k in 0..=n {
                    let d = (lo + k as f64 * fine).min(hi);
                    let v = objective(d, inverted);
                    if v > best.0 {
                        best = (v, d, inverted);
                    }
                }
            }
            settings[s] = Setting {
                delay_s: best.1,
                inverted: best.2,
            };
            at_edge[s] = (best.1.abs() - max_delay_s).abs() < fine;
        }
        if speakers == 2 {
            break;
        }
    }
    let level_db = sum_level_db(positions, &settings, band)?;
    Some(BestSum {
        settings,
        level_db,
        as_is_db,
        at_edge: at_edge
            .iter()
            .enumerate()
            .filter(|&(_, &e)| e)
            .map(|(i, _)| i)
            .collect(),
    })
}

/// The band where every response is within `within_db` of its own
/// maximum (each smoothed over a third of an octave on a 1/48-octave
/// grid within `limits`): the widest such stretch, or None when they
/// share none at least a third of an octave wide.
pub fn overlap_band(
    spectra: &[&Spectrum],
    limits: (f64, f64),
    within_db: f64,
) -> Option<(f64, f64)> {
    use crate::analysis::smoothing::{Smoothing, log_grid, smooth_power};
    let first = spectra.first()?;
    let grid = log_grid(limits.0, limits.1);
    let mut ok = vec![true; grid.len()];
    for s in spectra {
        let power: Vec<f64> = s.bins.iter().map(|v| v.norm_sqr()).collect();
        let db: Vec<f64> = smooth_power(&power, first.df, &grid, Smoothing::Fraction(3))
            .into_iter()
            .map(|p| 10.0 * p.max(1e-300).log10())
            .collect();
        let max = db.iter().copied().fold(f64::NEG_INFINITY, f64::max);
        for (o, v) in ok.iter_mut().zip(&db) {
            *o &= *v >= max - within_db;
        }
    }
    let mut best: Option<(usize, usize)> = None;
    let mut start = None;
    for (i, inside) in ok.iter().copied().chain(std::iter::once(false)).enumerate() {
        match (inside, start) {
            (true, None) => start = Some(i),
            (false, Some(s)) => {
                if best.is_none_or(|(a, b)| i - 1 - s > b - a) {
                    best = Some((s, i - 1));
                }
                start = None;
            }
            _ => {}
        }
    }
    let (a, b) = best?;
    let band = (grid[a], grid[b]);
    ((band.1 / band.0).log2() >= 1.0 / 3.0 - 1e-9).then_some(band)
}

/// The level of the head of an impulse response relative to its peak, dB,
/// when it is above [`CUT_WITHIN_DB`]: the file begins inside the response
/// (a measured response's file begins with its pre-roll, tens of dB down).
/// The head is the first 5 % of the file, but no more than the first half
/// of the `pre_roll` samples ahead of the analysis's reference peak (the
/// window's fade-in): when the analysis takes the direct sound ahead of a
/// stronger build-up as its reference, that direct sound lies a little
/// before the peak and may fall within the first 5 % of a long file,
/// while a file cut after the direct sound holds the build-up all through
/// its fade-in.
pub fn starts_inside(h: &[f64], pre_roll: usize) -> Option<f64> {
    let head = (h.len() / 20).min(pre_roll / 2).max(1);
    let peak = h.iter().fold(0.0f64, |m, v| m.max(v.abs()));
    if peak <= 0.0 || h.len() < 40 {
        return None;
    }
    let rms = (h[..head].iter().map(|v| v * v).sum::<f64>() / head as f64).sqrt();
    let db = 20.0 * (rms / peak).max(1e-300).log10();
    (db > CUT_WITHIN_DB).then_some(db)
}

/// See [`starts_inside`], dB (common practice: a file's pre-roll holds
/// noise and pre-ringing far lower than this).
pub const CUT_WITHIN_DB: f64 = -30.0;

/// The version of align.json's layout (fields are added, never renamed).
pub const ALIGN_SCHEMA_VERSION: u32 = 1;

/// How far from the measured timing the crossover search looks by
/// default, s (±).
pub const DEFAULT_MAX_DELAY_S: f64 = 0.02;

/// Where the band the arrivals, levels and polarities are read over came
/// from.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "lowercase")]
pub enum BandChoice {
    /// Given (`--band`).
    Given,
    /// The crossover band (`--crossover`, no `--band`).
    Crossover,
    /// Where every response is within [`OVERLAP_WITHIN_DB`] of its own
    /// maximum.
    Overlap,
}

/// The default band is where every response is within this of its own
/// maximum (third-octave smoothed), dB: where they all radiate.
pub const OVERLAP_WITHIN_DB: f64 = 12.0;

/// One measurement handed to [`align`].
#[derive(Debug, Clone, Copy)]
pub struct Input<'a> {
    /// Its impulse response on its time axis.
    pub impulse: Impulse<'a>,
    /// Whether its time axis rests on a loopback reference.
    pub has_reference: bool,
    /// The analysis's reference peak (results.json's `delay_s`) on the
    /// time axis of `impulse`, s: the file's pre-roll runs from
    /// `impulse.start_s` to it.
    pub delay_s: f64,
}

/// What [`align`] is asked.
#[derive(Debug, Clone, PartialEq)]
pub struct Options {
    /// The loudspeakers' names, in order.
    pub names: Vec<String>,
    /// Listening positions: the inputs are position by position, each
    /// position holding every loudspeaker in the order of `names`.
    pub positions: usize,
    /// The band for arrival, level and polarity (`--band`); None: the
    /// crossover band, or else where all radiate.
    pub band: Option<(f64, f64)>,
    /// The crossover band to optimise the sum over (`--crossover`).
    pub crossover: Option<(f64, f64)>,
    /// The delay search's reach, ± s.
    pub max_delay_s: f64,
    /// The band every measurement's sweep covers, Hz.
    pub limits: (f64, f64),
}

/// One loudspeaker, relative to the first.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Loudspeaker {
    /// Its name (the first folder's label).
    pub name: String,
    /// Its arrival at each position in the band, s on the measurement's
    /// time axis (null: silent in the band).
    pub arrival_s: Vec<Option<f64>>,
    /// Its arrival after the first loudspeaker's, mean over positions, s
    /// (0 for the first; negative: it arrives earlier).
    pub relative_arrival_s: Option<f64>,
    /// The largest minus the smallest relative arrival over the
    /// positions, s (null for one position).
    pub relative_arrival_spread_s: Option<f64>,
    /// Its level over the band minus the first's, mean over positions, dB.
    pub relative_level_db: Option<f64>,
    /// Its polarity against the first's, once its relative arrival is
    /// taken out (null when it cannot be told: see `polarity_withheld`).
    pub polarity: Option<Polarity>,
    /// The phase agreement behind it, −1 … +1 (mean over positions).
    pub polarity_agreement: Option<f64>,
    /// Why the polarity is null.
    pub polarity_withheld: Option<String>,
}

/// One loudspeaker's suggested setting for the crossover.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Suggestion {
    /// The delay relative to the measured timing that the search found,
    /// s (negative: the loudspeaker should sound earlier).
    pub relative_delay_s: f64,
    /// The delay to set in the processor, s: the relative delays made
    /// non-negative (the earliest loudspeaker gets 0).
    pub set_delay_s: f64,
    /// Its polarity in the processor: `same` as measured or `inverted`.
    pub polarity: Polarity,
}

/// The best sum through the crossover.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Crossover {
    /// The band optimised, Hz.
    pub band_hz: [f64; 2],
    /// The search's reach, ± s.
    pub max_delay_s: f64,
    /// One per loudspeaker.
    pub suggestions: Vec<Suggestion>,
    /// The sum's mean level over the band as measured, dB (mean over
    /// positions).
    pub level_as_is_db: f64,
    /// The same with the suggested settings, dB.
    pub level_suggested_db: f64,
    /// What the settings gain, dB.
    pub gain_db: f64,
}

/// The curves behind the plots, on a 1/48-octave grid, magnitudes
/// power-smoothed over 1/24 octave and power-averaged over the positions;
/// phases at the first position with the first loudspeaker's arrival
/// taken out.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Curves {
    /// Grid frequencies, Hz.
    pub frequency_hz: Vec<f64>,
    /// Each loudspeaker's level, dB (0 dB: the first loudspeaker's
    /// highest level on the grid).
    pub level_db: Vec<Vec<f64>>,
    /// Each loudspeaker's phase, degrees in (−180, 180].
    pub phase_deg: Vec<Vec<f64>>,
    /// Each loudspeaker's phase with its suggested setting (empty
    /// without `--crossover`).
    pub phase_suggested_deg: Vec<Vec<f64>>,
    /// The complex sum as measured, dB.
    pub sum_as_is_db: Vec<f64>,
    /// The complex sum with the suggested settings, dB (empty without
    /// `--crossover`).
    pub sum_suggested_db: Vec<f64>,
}

/// align.json: several loudspeakers relative to the first.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Alignment {
    /// Layout version ([`ALIGN_SCHEMA_VERSION`]).
    pub schema_version: u32,
    /// Sample rate of every measurement, Hz.
    pub sample_rate_hz: f64,
    /// The band arrival, level and polarity are read over, Hz.
    pub band_hz: [f64; 2],
    /// Where that band came from.
    pub band_from: BandChoice,
    /// Listening positions.
    pub positions: usize,
    /// Whether every measurement's timing rests on a loopback reference.
    pub loopback_reference: bool,
    /// The loudspeakers, the first being the reference.
    pub loudspeakers: Vec<Loudspeaker>,
    /// The best sum through `--crossover` (null when not asked).
    pub crossover: Option<Crossover>,
    /// Why `crossover` is null although `--crossover` was given.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub crossover_withheld: Option<String>,
    /// The curves behind the plots.
    pub curves: Curves,
    /// Warnings: `warnings` (the sentences) and `warning_codes` beside them.
    #[serde(flatten)]
    pub warnings: crate::model::Warnings,
}

/// Relates several loudspeakers measured at the same position(s): see the
/// module. `inputs` are position by position (`o.positions` groups of
/// `o.names.len()`), all at `fs`.
pub fn align(inputs: &[Input<'_>], fs: f64, o: &Options) -> crate::Result<Alignment> {
    use crate::error::Error;
    use crate::model::warning::Code;
    let speakers = o.names.len();
    if speakers < 2 {
        return Err(Error::parameter(
            "alignment needs at least two loudspeakers: give a measurement folder of each",
        ));
    }
    if o.positions == 0 || inputs.len() != speakers * o.positions {
        return Err(Error::parameter(format!(
            "{} folders do not make {} positions of {speakers} loudspeakers; give the folders position by position, each with every loudspeaker in the same order",
            inputs.len(),
            o.positions
        )));
    }
    let check_band = |b: (f64, f64), what: &str| -> crate::Result<()> {
        if !(b.0 > 0.0 && b.1 > b.0 && b.0.is_finite() && b.1.is_finite()) {
            return Err(Error::parameter(format!(
                "{what} {},{} is not a band: give LO,HI in Hz with LO below HI",
                b.0, b.1
            )));
        }
        if b.0 < o.limits.0 * (1.0 - 1e-9) || b.1 > o.limits.1 * (1.0 + 1e-9) {
            return Err(Error::parameter(format!(
                "{what} {},{} Hz reaches outside the band the sweeps cover ({:.0}–{:.0} Hz); give a band inside it",
                b.0, b.1, o.limits.0, o.limits.1
            )));
        }
        Ok(())
    };
    if let Some(b) = o.band {
        check_band(b, "--band")?;
    }
    if let Some(b) = o.crossover {
        check_band(b, "--crossover")?;
    }
    if !(o.max_delay_s > 0.0 && o.max_delay_s <= 1.0) {
        return Err(Error::parameter(
            "--max-delay must be above 0 and at most 1000 ms",
        ));
    }
    let n = common_len(
        &inputs
            .iter()
            .map(|i| i.impulse.samples.len())
            .collect::<Vec<_>>(),
    );
    let spectra: Vec<Spectrum> = inputs.iter().map(|i| spectrum(i.impulse, fs, n)).collect();
    let at = |p: usize, s: usize| &spectra[p * speakers + s];
    let (band, band_from) = match (o.band, o.crossover) {
        (Some(b), _) => (b, BandChoice::Given),
        (None, Some(c)) => (c, BandChoice::Crossover),
        (None, None) => {
            let all: Vec<&Spectrum> = spectra.iter().collect();
            let b = overlap_band(&all, o.limits, OVERLAP_WITHIN_DB).ok_or_else(|| {
                Error::parameter(format!(
                    "the loudspeakers share no band where all are within {OVERLAP_WITHIN_DB} dB of their own maximum; give the band they overlap in with --band LO,HI (and the crossover with --crossover LO,HI)"
                ))
            })?;
            (b, BandChoice::Overlap)
        }
    };
    let mut warnings = crate::model::Warnings::new();
    let loopback_reference = inputs.iter().all(|i| i.has_reference);
    if !loopback_reference {
        warnings.add(
            Code::AlignNoReference,
            "not every measurement has a loopback reference: their arrival times include the interface's latency, which can change from one run to the next, so the relative delays are only as good as that latency is repeatable; measure with --reference (or --each-output) for exact relative timing",
        );
    }
    // arrival, level and polarity per position
    let read: Vec<Vec<Option<Arrival>>> = (0..o.positions)
        .map(|p| {
            (0..speakers)
                .map(|s| arrival(inputs[p * speakers + s].impulse, fs, band))
                .collect()
        })
        .collect();
    for (p, row) in read.iter().enumerate() {
        for (s, a) in row.iter().enumerate() {
            if let Some((at, db)) = a
                .and_then(|a| Some((a.time_s, a.earlier_hump?)))
                .map(|(t, (h, db))| (t - h, db))
            {
                warnings.add(
                    Code::AlignArrivalDoubtful,
                    format!(
                        "{}{}: its envelope over {:.0}–{:.0} Hz has an earlier hump {:.1} ms before the arrival read, {:.0} dB under the highest: the arrival read is likely the room's build-up and the earlier hump the loudspeaker's own sound (common with a subwoofer in a small room); trust the crossover's settings, which rest on the complex sum, rather than the arrival",
                        o.names[s],
                        if o.positions > 1 {
                            format!(" at position {}", p + 1)
                        } else {
                            String::new()
                        },
                        band.0,
                        band.1,
                        at * 1e3,
                        -db
                    ),
                );
            }
        }
    }
    let arrivals: Vec<Vec<Option<f64>>> = read
        .iter()
        .map(|row| row.iter().map(|a| a.map(|a| a.time_s)).collect())
        .collect();
    let mut loudspeakers = Vec::with_capacity(speakers);
    for (s, name) in o.names.iter().enumerate() {
        let rel: Vec<f64> = (0..o.positions)
            .filter_map(|p| Some(arrivals[p][s]? - arrivals[p][0]?))
            .collect();
        let mean = |v: &[f64]| (!v.is_empty()).then(|| v.iter().sum::<f64>() / v.len() as f64);
        let relative_arrival_s = mean(&rel);
        let relative_arrival_spread_s = (o.positions > 1 && rel.len() == o.positions).then(|| {
            rel.iter().copied().fold(f64::NEG_INFINITY, f64::max)
                - rel.iter().copied().fold(f64::INFINITY, f64::min)
        });
        let levels: Vec<f64> = (0..o.positions)
            .filter_map(|p| Some(band_level_db(at(p, s), band)? - band_level_db(at(p, 0), band)?))
            .collect();
        let agreements: Vec<f64> = (0..o.positions)
            .filter_map(|p| {
                let shift = arrivals[p][s]? - arrivals[p][0]?;
                phase_agreement(at(p, 0), at(p, s), band, shift)
            })
            .collect();
        let agreement = mean(&agreements);
        let polarity = agreement.and_then(polarity);
        let polarity_withheld = match (s, agreement, polarity) {
            (0, _, _) | (_, _, Some(_)) => None,
            (_, None, _) => Some("it is silent in the band".to_string()),
            (_, Some(a), None) => Some(format!(
                "once their arrivals are aligned the two responses are near quadrature over {:.0}–{:.0} Hz (agreement {a:+.2}, within ±{POLARITY_MIN_AGREEMENT}), so neither sign makes them add; {}",
                band.0,
                band.1,
                if o.crossover.is_some() {
                    "the crossover's suggested setting gives the polarity for the sum"
                } else {
                    "read it over a band both reproduce fully (--band), or give the crossover (--crossover) for the polarity of the best sum"
                }
            )),
        };
        if let Some(why) = &polarity_withheld {
            warnings.add(
                Code::AlignPolarityUnclear,
                format!("{name}: polarity not told: {why}"),
            );
        }
        loudspeakers.push(Loudspeaker {
            name: name.clone(),
            arrival_s: (0..o.positions).map(|p| arrivals[p][s]).collect(),
            relative_arrival_s,
            relative_arrival_spread_s,
            relative_level_db: mean(&levels),
            polarity: if s == 0 {
                Some(Polarity::Same)
            } else {
                polarity
            },
            polarity_agreement: if s == 0 { Some(1.0) } else { agreement },
            polarity_withheld,
        });
    }
    // the best sum through the crossover
    let grouped: Vec<Vec<&Spectrum>> = (0..o.positions)
        .map(|p| (0..speakers).map(|s| at(p, s)).collect())
        .collect();
    let cut: Vec<(usize, f64)> = inputs
        .iter()
        .enumerate()
        .filter_map(|(i, x)| {
            let pre_roll = ((x.delay_s - x.impulse.start_s) * fs).round();
            // a pre-roll that cannot be read leaves the head at 5 %
            let pre_roll = if pre_roll.is_finite() && pre_roll > 0.0 {
                pre_roll as usize
            } else {
                x.impulse.samples.len()
            };
            Some((i, starts_inside(x.impulse.samples, pre_roll)?))
        })
        .collect();
    for &(i, db) in &cut {
        warnings.add(
            Code::AlignImpulseCut,
            format!(
                "{}{}: its impulse response begins inside the response (the first 5 % of impulse.wav is only {:.0} dB under its peak): the analysis placed the file's window after the sound's start, as it does when a room's build-up outweighs a subwoofer's direct sound, so the sums would miss that start",
                o.names[i % speakers],
                if o.positions > 1 {
                    format!(" at position {}", i / speakers + 1)
                } else {
                    String::new()
                },
                -db
            ),
        );
    }
    let crossover_withheld = (o.crossover.is_some() && !cut.is_empty()).then(|| {
        "a measurement's impulse response begins inside the response (see the warnings): a sum without its start would be a guess".to_string()
    });
    let best = o
        .crossover
        .filter(|_| cut.is_empty())
        .and_then(|c| Some((c, best_sum(&grouped, c, o.max_delay_s, fs)?)));
    let crossover = best.as_ref().map(|(c, b)| {
        let earliest = b
            .settings
            .iter()
            .map(|s| s.delay_s)
            .fold(f64::INFINITY, f64::min)
            .min(0.0);
        for &i in &b.at_edge {
            warnings.add(
                Code::AlignSearchEdge,
                format!(
                    "{}: the best delay lies at the edge of the search (±{:.1} ms): the best may lie beyond it; measure with the loudspeakers nearer in time, or widen --max-delay",
                    o.names[i],
                    o.max_delay_s * 1e3
                ),
            );
        }
        Crossover {
            band_hz: [c.0, c.1],
            max_delay_s: o.max_delay_s,
            suggestions: b
                .settings
                .iter()
                .map(|s| Suggestion {
                    relative_delay_s: s.delay_s,
                    set_delay_s: s.delay_s - earliest,
                    polarity: if s.inverted {
                        Polarity::Inverted
                    } else {
                        Polarity::Same
                    },
                })
                .collect(),
            level_as_is_db: b.as_is_db,
            level_suggested_db: b.level_db,
            gain_db: b.level_db - b.as_is_db,
        }
    });
    let settings = best.as_ref().map(|(_, b)| b.settings.clone());
    let curves = curves(&grouped, settings.as_deref(), o, arrivals[0][0]);
    Ok(Alignment {
        schema_version: ALIGN_SCHEMA_VERSION,
        sample_rate_hz: fs,
        band_hz: [band.0, band.1],
        band_from,
        positions: o.positions,
        loopback_reference,
        loudspeakers,
        crossover,
        crossover_withheld,
        curves,
        warnings,
    })
}

/// The curves of [`Curves`], over the crossover band widened by an octave
/// each side (or the whole sweep band without one).
fn curves(
    grouped: &[Vec<&Spectrum>],
    settings: Option<&[Setting]>,
    o: &Options,
    t0: Option<f64>,
) -> Curves {
    use crate::analysis::smoothing::{Smoothing, log_grid, smooth_power};
    let (lo, hi) = match o.crossover {
        Some(c) => ((c.0 / 2.0).max(o.limits.0), (c.1 * 2.0).min(o.limits.1)),
        None => o.limits,
    };
    let grid = log_grid(lo, hi);
    let df = grouped[0][0].df;
    let smooth = Smoothing::Fraction(24);
    let speakers = grouped[0].len();
    // power-average over positions of a power spectrum made per position
    let averaged = |power_of: &dyn Fn(&[&Spectrum]) -> Vec<f64>| -> Vec<f64> {
        let mut acc = vec![0.0; grid.len()];
        for spectra in grouped {
            let p = smooth_power(&power_of(spectra), df, &grid, smooth);
            for (a, v) in acc.iter_mut().zip(p) {
                *a += v / grouped.len() as f64;
            }
        }
        acc
    };
    let db = |v: Vec<f64>, zero: f64| -> Vec<f64> {
        v.into_iter()
            .map(|p| 10.0 * p.max(1e-30).log10() - zero)
            .collect()
    };
    let first_power = averaged(&|sp| sp[0].bins.iter().map(|v| v.norm_sqr()).collect());
    let zero = 10.0 * first_power.iter().copied().fold(1e-30, f64::max).log10();
    let level_db = (0..speakers)
        .map(|s| {
            db(
                averaged(&|sp| sp[s].bins.iter().map(|v| v.norm_sqr()).collect()),
                zero,
            )
        })
        .collect();
    let sum_power = |sp: &[&Spectrum], set: &[Setting]| -> Vec<f64> {
        (0..sp[0].bins.len())
            .map(|k| {
                let f = k as f64 * df;
                sp.iter()
                    .zip(set)
                    .map(|(s, st)| s.bins[k] * st.factor(f))
                    .sum::<Complex<f64>>()
                    .norm_sqr()
            })
            .collect()
    };
    let as_is = vec![Setting::AS_IS; speakers];
    let sum_as_is_db = db(averaged(&|sp| sum_power(sp, &as_is)), zero);
    let sum_suggested_db = settings
        .map(|set| db(averaged(&|sp| sum_power(sp, set)), zero))
        .unwrap_or_default();
    // phases at the first position, the first loudspeaker's arrival out,
    // interpolated between bins (with the arrival out the phase turns
    // slowly from bin to bin)
    let t0 = t0.unwrap_or(0.0);
    let phase = |s: usize, set: Setting| -> Vec<f64> {
        let sp = grouped[0][s];
        let at = |k: usize| {
            let fk = k as f64 * df;
            sp.bins[k]
                * set.factor(fk)
                * Complex::from_polar(1.0, 2.0 * std::f64::consts::PI * fk * t0)
        };
        grid.iter()
            .map(|&f| {
                let x = (f / df).clamp(1.0, (sp.bins.len() - 2) as f64);
                let k = x.floor() as usize;
                let u = x - k as f64;
                let v = at(k) * (1.0 - u) + at(k + 1) * u;
                crate::analysis::response::wrap_deg(v.arg().to_degrees())
            })
            .collect()
    };
    let phase_deg = (0..speakers).map(|s| phase(s, Setting::AS_IS)).collect();
    let phase_suggested_deg = settings
        .map(|set| (0..speakers).map(|s| phase(s, set[s])).collect())
        .unwrap_or_default();
    Curves {
        frequency_hz: grid,
        level_db,
        phase_deg,
        phase_suggested_deg,
        sum_as_is_db,
        sum_suggested_db,
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use std::f64::consts::PI;

    const FS: f64 = 48_000.0;

    /// The spectrum of `h` at FFT length `n`, its first sample at time 0.
    fn spectrum_at_zero(h: &[f64], n: usize) -> Spectrum {
        spectrum(
            Impulse {
                samples: h,
                start_s: 0.0,
            },
            FS,
            n,
        )
    }

    /// A unit impulse delayed by a fraction of a sample: the ideal
    /// band-limited interpolator sinc(n − d), Hann-tapered over ±400
    /// samples (a closed form).
    fn delayed_impulse(len: usize, d: f64) -> Vec<f64> {
        (0..len)
            .map(|n| {
                let x = n as f64 - d;
                if x.abs() >= 400.0 {
                    return 0.0;
                }
                let s = if x.abs() < 1e-12 {
                    1.0
                } else {
                    (PI * x).sin() / (PI * x)
                };
                s * (0.5 + 0.5 * (PI * x / 400.0).cos())
            })
            .collect()
    }

    /// Direct form I biquad (a naive reference, a0 = 1).
    fn biquad(b: [f64; 3], a: [f64; 2], x: &[f64]) -> Vec<f64> {
        let (mut x1, mut x2, mut y1, mut y2) = (0.0, 0.0, 0.0, 0.0);
        x.iter()
            .map(|&v| {
                let y = b[0] * v + b[1] * x1 + b[2] * x2 - a[0] * y1 - a[1] * y2;
                x2 = x1;
                x1 = v;
                y2 = y1;
                y1 = y;
                y
            })
            .collect()
    }

    /// Audio EQ Cookbook (R. Bristow-Johnson) low-pass and high-pass.
    fn cookbook(f0: f64, q: f64, high: bool) -> ([f64; 3], [f64; 2]) {
        let w = 2.0 * PI * f0 / FS;
        let alpha = w.sin() / (2.0 * q);
        let c = w.cos();
        let a0 = 1.0 + alpha;
        let b = if high {
            [(1.0 + c) / 2.0, -(1.0 + c), (1.0 + c) / 2.0]
        } else {
            [(1.0 - c) / 2.0, 1.0 - c, (1.0 - c) / 2.0]
        };
        (
            [b[0] / a0, b[1] / a0, b[2] / a0],
            [-2.0 * c / a0, (1.0 - alpha) / a0],
        )
    }

    /// A loudspeaker-like response: a 2nd-order high-pass at 70 Hz and a
    /// low-pass at 16 kHz, both Q 0.707.
    fn speaker(x: &[f64]) -> Vec<f64> {
        let (b, a) = cookbook(70.0, std::f64::consts::FRAC_1_SQRT_2, true);
        let y = biquad(b, a, x);
        let (b, a) = cookbook(16_000.0, std::f64::consts::FRAC_1_SQRT_2, false);
        biquad(b, a, &y)
    }

    /// 4th-order Linkwitz–Riley: two 2nd-order Butterworth sections.
    fn lr4(x: &[f64], fc: f64, high: bool) -> Vec<f64> {
        let (b, a) = cookbook(fc, std::f64::consts::FRAC_1_SQRT_2, high);
        biquad(b, a, &biquad(b, a, x))
    }

    #[test]
    fn a_delayed_copy_arrives_later_by_its_delay() {
        let len = 16_384;
        for (d1, d2) in [(300.0, 314.4), (512.25, 656.73), (1000.0, 1000.5)] {
            let h1 = speaker(&delayed_impulse(len, d1));
            let h2: Vec<f64> = speaker(&delayed_impulse(len, d2))
                .iter()
                .map(|v| -0.5 * v)
                .collect();
            let band = (200.0, 8000.0);
            let t1 = arrival_s(
                Impulse {
                    samples: &h1,
                    start_s: -0.01,
                },
                FS,
                band,
            )
            .unwrap();
            let t2 = arrival_s(
                Impulse {
                    samples: &h2,
                    start_s: -0.01,
                },
                FS,
                band,
            )
            .unwrap();
            let want = (d2 - d1) / FS;
            assert!(((t2 - t1) - want).abs() < 1e-6, "{} vs {want}", t2 - t1);
        }
    }

    #[test]
    fn the_time_axis_is_kept_between_impulses_that_start_at_different_times() {
        // the same response, one file starting 10 ms later: no arrival difference
        let len = 8192;
        let h = speaker(&delayed_impulse(len, 1200.0));
        let shifted: Vec<f64> = h[480..].to_vec();
        let band = (300.0, 5000.0);
        let t1 = arrival_s(
            Impulse {
                samples: &h,
                start_s: 0.0,
            },
            FS,
            band,
        )
        .unwrap();
        let t2 = arrival_s(
            Impulse {
                samples: &shifted,
                start_s: 0.01,
            },
            FS,
            band,
        )
        .unwrap();
        assert!((t1 - t2).abs() < 1e-7);
        let n = common_len(&[h.len(), shifted.len()]);
        let a = spectrum_at_zero(&h, n);
        let b = spectrum(
            Impulse {
                samples: &shifted,
                start_s: 0.01,
            },
            FS,
            n,
        );
        for (k, _) in a.band_points((100.0, 10_000.0)) {
            assert!((a.bins[k] - b.bins[k]).norm() < 1e-6 * a.bins[k].norm().max(1e-3));
        }
    }

    #[test]
    fn level_and_polarity_are_read_over_the_band() {
        let len = 16_384;
        let h1 = speaker(&delayed_impulse(len, 400.0));
        let h2: Vec<f64> = speaker(&delayed_impulse(len, 473.3))
            .iter()
            .map(|v| -0.25 * v)
            .collect();
        let n = common_len(&[len]);
        let a = spectrum_at_zero(&h1, n);
        let b = spectrum_at_zero(&h2, n);
        let band = (300.0, 3000.0);
        let level = band_level_db(&b, band).unwrap() - band_level_db(&a, band).unwrap();
        assert!((level - 20.0 * 0.25f64.log10()).abs() < 1e-6, "{level}");
        let shift = 73.3 / FS;
        let agree = phase_agreement(&a, &b, band, shift).unwrap();
        assert!(agree < -0.999, "{agree}");
        assert_eq!(polarity(agree), Some(Polarity::Inverted));
        assert_eq!(polarity(-agree), Some(Polarity::Same));
        assert_eq!(polarity(0.1), None);
    }

    /// The objective of the best sum by exhaustive search over the true
    /// complex responses: every delay at 1/16 sample and both polarities.
    fn exhaustive(a: &Spectrum, b: &Spectrum, band: (f64, f64), max: f64) -> f64 {
        let steps = (max * FS * 16.0) as i64;
        let mut best = f64::NEG_INFINITY;
        for k in (-steps..=steps).step_by(4) {
            for inverted in [false, true] {
                let s = [
                    Setting::AS_IS,
                    Setting {
                        delay_s: k as f64 / (16.0 * FS),
                        inverted,
                    },
                ];
                best = best.max(sum_level_db(&[vec![a, b]], &s, band).unwrap());
            }
        }
        best
    }

    #[test]
    fn a_subwoofer_and_a_main_loudspeaker_sum_best_at_the_delay_an_exhaustive_search_finds() {
        // LR4 at 80 Hz; the main 2.7 ms late (and inverted in one case)
        let len = 32_768;
        for (extra, invert) in [(130.0, false), (57.3, true), (0.0, true)] {
            let sub = lr4(&delayed_impulse(len, 500.0), 80.0, false);
            // LR4 halves are in phase at every frequency and their
            // magnitudes add to 1: undoing the extra delay is the best sum
            let main: Vec<f64> = lr4(&delayed_impulse(len, 500.0 + extra), 80.0, true)
                .iter()
                .map(|v| if invert { -v } else { *v })
                .collect();
            let n = common_len(&[len]);
            let a = spectrum_at_zero(&sub, n);
            let b = spectrum_at_zero(&main, n);
            let band = (50.0, 150.0);
            let found = best_sum(&[vec![&a, &b]], band, 0.02, FS).unwrap();
            let best = exhaustive(&a, &b, band, 0.02);
            assert!(
                found.level_db >= best - 0.3,
                "{extra}: {} vs {best}",
                found.level_db
            );
            assert!(found.level_db >= found.as_is_db);
            assert_eq!(found.settings[1].inverted, invert, "{extra}");
            // the sum with the settings undoes the extra delay within 0.3 ms
            assert!(
                (found.settings[1].delay_s + extra / FS).abs() < 3e-4,
                "{extra}: {:?}",
                found.settings
            );
        }
    }

    #[test]
    fn with_two_positions_the_search_maximises_their_mean() {
        // the main loudspeaker 1.2 ms later at the second seat than at the first
        let len = 32_768;
        let sub = lr4(&delayed_impulse(len, 500.0), 80.0, false);
        let n = common_len(&[len]);
        let a = spectrum_at_zero(&sub, n);
        let m1 = lr4(&delayed_impulse(len, 560.0), 80.0, true);
        let m2 = lr4(&delayed_impulse(len, 560.0 + 57.6), 80.0, true);
        let b1 = spectrum_at_zero(&m1, n);
        let b2 = spectrum_at_zero(&m2, n);
        let band = (50.0, 150.0);
        let positions = [vec![&a, &b1], vec![&a, &b2]];
        let found = best_sum(&positions, band, 0.02, FS).unwrap();
        // an exhaustive search of the mean over both seats
        let mut best = f64::NEG_INFINITY;
        for k in (-(0.02 * FS * 16.0) as i64..=(0.02 * FS * 16.0) as i64).step_by(8) {
            for inverted in [false, true] {
                let s = [
                    Setting::AS_IS,
                    Setting {
                        delay_s: k as f64 / (16.0 * FS),
                        inverted,
                    },
                ];
                best = best.max(sum_level_db(&positions, &s, band).unwrap());
            }
        }
        assert!(
            found.level_db >= best - 0.05,
            "{} vs {best}",
            found.level_db
        );
        // the delay lies between the two seats' own best delays
        let d = found.settings[1].delay_s * FS;
        assert!(d < -55.0 && d > -122.0, "{d} samples");
    }

    #[test]
    fn a_file_that_begins_inside_its_response_is_told_from_one_with_a_pre_roll() {
        let len = 8192;
        let h = speaker(&delayed_impulse(len, 1000.0));
        assert_eq!(starts_inside(&h, 1000), None);
        // the same response with its first 1000 samples and 200 more cut:
        // the file begins in its decay
        let decay: Vec<f64> = lr4(&delayed_impulse(len, 300.0), 80.0, false)[400..].to_vec();
        // (its pre-roll unknown: the head is the first 5 %)
        let db = starts_inside(&decay, decay.len()).expect("begins inside");
        assert!(db > CUT_WITHIN_DB, "{db}");
        // its pre-roll read as 200 samples: the head is the first 100
        let db = starts_inside(&decay, 200).expect("begins inside");
        assert!(db > CUT_WITHIN_DB, "{db}");
    }

    #[test]
    fn the_predicted_sum_is_the_sum_of_the_responses() {
        let len = 8192;
        let h1 = speaker(&delayed_impulse(len, 300.0));
        // 2 samples apart: the first notch of their comb lies at 12 kHz,
        // far above the band, so no bin meets the notch floor
        let h2 = speaker(&delayed_impulse(len, 302.0));
        let both: Vec<f64> = h1.iter().zip(&h2).map(|(a, b)| a + b).collect();
        let n = common_len(&[len]);
        let a = spectrum_at_zero(&h1, n);
        let b = spectrum_at_zero(&h2, n);
        let s = spectrum_at_zero(&both, n);
        let band = (100.0, 2000.0);
        let predicted = sum_level_db(&[vec![&a, &b]], &[Setting::AS_IS; 2], band).unwrap();
        let single = sum_level_db(&[vec![&s]], &[Setting::AS_IS], band).unwrap();
        assert!((predicted - single).abs() < 1e-9);
    }

    #[test]
    fn two_full_range_loudspeakers_overlap_where_both_radiate() {
        let len = 8192;
        let sub = lr4(&delayed_impulse(len, 300.0), 100.0, false);
        let main = lr4(&delayed_impulse(len, 300.0), 100.0, true);
        let n = common_len(&[len]);
        let a = spectrum_at_zero(&sub, n);
        let b = spectrum_at_zero(&main, n);
        let (lo, hi) = overlap_band(&[&a, &b], (20.0, 20_000.0), 12.0).unwrap();
        assert!(
            lo > 40.0 && lo < 100.0 && hi > 100.0 && hi < 250.0,
            "{lo} {hi}"
        );
        let same = overlap_band(&[&b, &b], (20.0, 20_000.0), 12.0).unwrap();
        assert!(same.0 < 100.0 && same.1 > 15_000.0, "{same:?}");
    }
}
