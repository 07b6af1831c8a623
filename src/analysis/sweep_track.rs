//! Which exponential sweep a signal follows, from its instantaneous
//! frequency.
//!
//! An exponential sweep has the law f(t) = f1·e^(t/L) (A. Farina, 108th
//! AES Convention, 2000), so the time at which a frequency f is heard is
//! t(f) = t0 + L·ln(f/f1): a straight line in (ln f, t) whose slope is the
//! rate constant L. Two tools here:
//!
//! - [`track`] follows the strongest component of a recording over time
//!   (a short-time Fourier transform, one peak per frame, keeping only the
//!   frames clearly tonal above their own median), and [`fit_law`] fits
//!   the line t = a + L·ln f to the first arrival of each frequency. The
//!   right sweep gives the slope of the sweep that was played, in a
//!   reverberant room too (the first arrival of each frequency is the
//!   direct sound; the reverberation only comes later); a different sweep
//!   gives another slope. [`check_recording`] makes that judgement.
//! - [`recover`] finds the parameters of a clean sweep file (no recording:
//!   the file itself) from its analytic signal's phase derivative, fitted
//!   to ln f = a + t/L, and refuses what is not an exponential sweep.

use rustfft::num_complex::Complex;

use crate::signal::fft;
use crate::signal::sweep::{SweepDesign, SweepParams};
use crate::signal::window::Window;

/// A frame counts as tonal when its peak bin's power is at least this far
/// above the median power of its bins, in dB. For Gaussian noise a bin's
/// power is exponential, so the chance that any of 2000 bins of a noise
/// frame reaches 15 dB above the median (21.9 times the mean) is about
/// 2000·e^(−21.9) ≈ 6·10⁻⁷: noise frames are left out. Our choice.
pub const TONAL_DB: f64 = 15.0;

/// Frames quieter than this below the loudest frame's peak (dB) are left
/// out (digital silence and dither).
pub const QUIET_DB: f64 = 90.0;

/// One confident frame of a track.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct TrackPoint {
    /// The frame's centre, s from the first sample.
    pub time_s: f64,
    /// The frame's peak frequency (parabolic interpolation of the log
    /// power over the peak bin and its neighbours), Hz.
    pub frequency_hz: f64,
    /// The peak's power over the frame's median power, dB.
    pub prominence_db: f64,
}

/// The frame length of a track at `fs` Hz: the power of two at or above
/// 40 ms (2048 samples at 48 kHz). Long enough to resolve 100 Hz within a
/// few bins, short enough that a fast sweep (1 s over 20 Hz–20 kHz) stays
/// a clear peak.
pub fn frame_len(fs: f64) -> usize {
    ((0.04 * fs).ceil().max(64.0) as usize).next_power_of_two()
}

/// The hop between frames: a quarter of [`frame_len`].
pub fn hop_len(fs: f64) -> usize {
    frame_len(fs) / 4
}

/// The lowest frequency a track reports at `fs` Hz: four bins of
/// [`frame_len`] (94 Hz at 48 kHz); below it the Hann window's main lobe
/// and its mirror image at negative frequency bias the peak.
pub fn lowest_hz(fs: f64) -> f64 {
    4.0 * fs / frame_len(fs) as f64
}

/// The confident frames of `x` (sampled at `fs` Hz): Hann frames of
/// [`frame_len`] every [`hop_len`] (each wholly inside `x`), zero-padded twice for the peak search,
/// searched from [`lowest_hz`] to 95 % of the Nyquist frequency; a frame
/// is kept when its peak is [`TONAL_DB`] above its median and within
/// [`QUIET_DB`] of the loudest frame's peak.
pub fn track(x: &[f64], fs: f64) -> Vec<TrackPoint> {
    if !positive(fs) || x.is_empty() {
        return Vec::new();
    }
    let n = frame_len(fs);
    let hop = hop_len(fs);
    let nfft = 2 * n;
    let df = fs / nfft as f64;
    let k_lo = (lowest_hz(fs) / df).ceil() as usize;
    let k_hi = ((0.95 * fs / 2.0) / df).floor() as usize;
    if k_hi <= k_lo + 2 {
        return Vec::new();
    }
    let w = Window::Hann.make(n);
    // frames wholly inside the signal (one, zero-padded, if it is shorter)
    let frames = if x.len() >= n {
        (x.len() - n) / hop + 1
    } else {
        1
    };
    let mut frame = vec![0.0; n];
    let mut raw = Vec::with_capacity(frames);
    let mut loudest = 0.0f64;
    let mut powers: Vec<f64> = Vec::with_capacity(k_hi - k_lo + 1);
    for m in 0..frames {
        let start = m * hop;
        for (i, (f, wv)) in frame.iter_mut().zip(&w).enumerate() {
            *f = x.get(start + i).map_or(0.0, |v| v * wv);
        }
        let spec = fft::rfft(&frame, nfft);
        powers.clear();
        powers.extend(spec[k_lo..=k_hi].iter().map(|c| c.norm_sqr()));
        let (kp, peak) = powers
            .iter()
            .enumerate()
            .fold((0, 0.0f64), |b, (k, &p)| if p > b.1 { (k, p) } else { b });
        if !positive(peak) || !peak.is_finite() {
            continue;
        }
        // a peak on the edge of the searched range is the skirt of a
        // component outside it (a sweep still below the lowest frequency)
        if kp == 0 || kp + 1 == powers.len() {
            continue;
        }
        loudest = loudest.max(peak);
        let median = {
            let mut s = powers.clone();
            let mid = s.len() / 2;
            *s.select_nth_unstable_by(mid, f64::total_cmp).1
        };
        let prominence_db = if median > 0.0 {
            10.0 * (peak / median).log10()
        } else {
            f64::INFINITY
        };
        // parabolic interpolation of the log power around the peak
        let k = kp + k_lo;
        let offset = if kp > 0 && kp + 1 < powers.len() {
            let (a, b, c) = (
                powers[kp - 1].max(1e-300).ln(),
                peak.ln(),
                powers[kp + 1].max(1e-300).ln(),
            );
            let d = a - 2.0 * b + c;
            if d < 0.0 {
                (0.5 * (a - c) / d).clamp(-0.5, 0.5)
            } else {
                0.0
            }
        } else {
            0.0
        };
        raw.push((
            (start as f64 + n as f64 / 2.0) / fs,
            (k as f64 + offset) * df,
            prominence_db,
            peak,
        ));
    }
    let floor = loudest * 10f64.powf(-QUIET_DB / 10.0);
    raw.into_iter()
        .filter(|r| r.2 >= TONAL_DB && r.3 >= floor)
        .map(|r| TrackPoint {
            time_s: r.0,
            frequency_hz: r.1,
            prominence_db: r.2,
        })
        .collect()
}

/// The line t = intercept + L·ln f fitted to a track.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct LawFit {
    /// The slope: the rate constant L of the sweep the signal follows, s.
    pub rate_constant_s: f64,
    /// t at 1 Hz on the fitted line, s (the time the sweep would pass
    /// 1 Hz: only a parameter of the line).
    pub intercept_s: f64,
    /// The lowest and highest frequency among the points the fit kept, Hz.
    pub low_hz: f64,
    /// See `low_hz`.
    pub high_hz: f64,
    /// Points fitted: one per sixth of an octave that the track reached.
    pub points: usize,
    /// Points within the residual limit of the final line.
    pub inliers: usize,
    /// RMS residual of the inliers, s.
    pub rms_residual_s: f64,
}

impl LawFit {
    /// The time the fitted sweep passes `f_hz`, s.
    pub fn time_at(&self, f_hz: f64) -> f64 {
        self.intercept_s + self.rate_constant_s * f_hz.ln()
    }

    /// The length of the fitted sweep between `low_hz` and `high_hz`, s.
    pub fn span_s(&self) -> f64 {
        self.rate_constant_s * (self.high_hz / self.low_hz).ln()
    }
}

/// Fits t = a + L·ln f to the first arrival of each sixth of an octave of
/// a track (the earliest confident frame whose peak lies in it: in a room,
/// later frames at that frequency are its reverberation). A Theil–Sen line
/// first (P. K. Sen, JASA 63(324), 1968: the median pairwise slope), then
/// the points further from the line than three times the median absolute
/// residual (scaled to a standard deviation, 1.4826·MAD) or two hops,
/// whichever is more, are dropped and the line fitted again by least
/// squares, until no point is dropped (at most eight rounds). `None` with fewer than
/// three points or no spread in frequency.
pub fn fit_law(points: &[TrackPoint], hop_s: f64) -> Option<LawFit> {
    use std::collections::BTreeMap;
    let mut first: BTreeMap<i64, (f64, f64)> = BTreeMap::new();
    for p in points {
        if !positive(p.frequency_hz) {
            continue;
        }
        let key = (6.0 * p.frequency_hz.log2()).floor() as i64;
        let e = first.entry(key).or_insert((p.frequency_hz.ln(), p.time_s));
        if p.time_s < e.1 {
            *e = (p.frequency_hz.ln(), p.time_s);
        }
    }
    let pts: Vec<(f64, f64)> = first.into_values().collect();
    if pts.len() < 3 {
        return None;
    }
    // a robust start (Theil–Sen: the median of the slopes between every
    // two points, the median intercept), so that a cluster of late points
    // (a reverberant tail that looks tonal) cannot pull the first line
    let mut slopes = Vec::with_capacity(pts.len() * pts.len() / 2);
    for (i, p) in pts.iter().enumerate() {
        for q in &pts[i + 1..] {
            if q.0 - p.0 > 1e-9 {
                slopes.push((q.1 - p.1) / (q.0 - p.0));
            }
        }
    }
    if slopes.is_empty() {
        return None;
    }
    let b0 = median(&slopes);
    let a0 = median(&pts.iter().map(|p| p.1 - b0 * p.0).collect::<Vec<_>>());
    let mut line = (a0, b0);
    let mut keep = vec![true; pts.len()];
    for round in 0..8 {
        if round > 0 {
            line = least_squares(&pts, &keep)?;
        }
        let resid: Vec<f64> = pts
            .iter()
            .map(|&(u, t)| (t - line.0 - line.1 * u).abs())
            .collect();
        let kept: Vec<f64> = resid
            .iter()
            .zip(&keep)
            .filter(|(_, k)| **k)
            .map(|(r, _)| *r)
            .collect();
        let mad = median(&kept);
        let limit = (3.0 * 1.4826 * mad).max(2.0 * hop_s);
        let next: Vec<bool> = resid.iter().map(|&r| r <= limit).collect();
        if next.iter().filter(|k| **k).count() < 3 {
            break;
        }
        if next == keep {
            break;
        }
        keep = next;
    }
    let inl: Vec<(f64, f64)> = pts
        .iter()
        .zip(&keep)
        .filter(|(_, k)| **k)
        .map(|(p, _)| *p)
        .collect();
    let rms = (inl
        .iter()
        .map(|&(u, t)| (t - line.0 - line.1 * u).powi(2))
        .sum::<f64>()
        / inl.len().max(1) as f64)
        .sqrt();
    let low = inl.iter().map(|p| p.0).fold(f64::INFINITY, f64::min).exp();
    let high = inl
        .iter()
        .map(|p| p.0)
        .fold(f64::NEG_INFINITY, f64::max)
        .exp();
    Some(LawFit {
        rate_constant_s: line.1,
        intercept_s: line.0,
        low_hz: low,
        high_hz: high,
        points: pts.len(),
        inliers: inl.len(),
        rms_residual_s: rms,
    })
}

/// (a, b) of t = a + b·u by least squares over the kept points; `None`
/// without spread in u.
fn least_squares(pts: &[(f64, f64)], keep: &[bool]) -> Option<(f64, f64)> {
    let sel = || pts.iter().zip(keep).filter(|(_, k)| **k).map(|(p, _)| *p);
    let n = sel().count() as f64;
    if n < 2.0 {
        return None;
    }
    let mu = sel().map(|p| p.0).sum::<f64>() / n;
    let mt = sel().map(|p| p.1).sum::<f64>() / n;
    let suu = sel().map(|p| (p.0 - mu).powi(2)).sum::<f64>();
    if suu <= 1e-12 {
        return None;
    }
    let sut = sel().map(|p| (p.0 - mu) * (p.1 - mt)).sum::<f64>();
    let b = sut / suu;
    Some((mt - b * mu, b))
}

/// `x` is a number above zero (false for NaN).
fn positive(x: f64) -> bool {
    x > 0.0
}

fn median(v: &[f64]) -> f64 {
    if v.is_empty() {
        return 0.0;
    }
    let mut s = v.to_vec();
    s.sort_by(f64::total_cmp);
    s[s.len() / 2]
}

/// At least this many sixth-octave points must stay on the fitted line
/// for [`check_recording`] to judge.
pub const MIN_POINTS: usize = 6;
/// ... and they must span at least this many octaves.
pub const MIN_SPAN_OCTAVES: f64 = 2.0;
/// ... and be at least this share of the points fitted.
pub const MIN_INLIER_SHARE: f64 = 0.6;
/// ... and lie on their line within this many hops RMS (21 ms at 48 kHz):
/// a clean or reverberant sweep, right or wrong, stays within about one
/// (0.1–13 ms measured); a fit that mixes the sweep with late arrivals of
/// a very reverberant room does not (27 ms and more), and then no
/// judgement is made.
pub const MAX_RMS_HOPS: f64 = 2.0;
/// The slope may differ from the sweep's rate constant by up to this
/// factor either way and still be the sweep (a few hops of error over
/// two octaves of a fast sweep; a different sweep of gliss's range
/// differs by far more: 1 s against 2 s is a factor 2). Our choice.
pub const RATE_TOLERANCE: f64 = 1.25;

/// What [`check_recording`] found.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum SweepCheck {
    /// The recording follows the sweep's law.
    Follows(LawFit),
    /// The recording clearly follows another sweep.
    Different(LawFit),
    /// Too few confident frames (noise, a very quiet or short recording,
    /// something that is not a sweep): no judgement.
    Unclear,
}

/// Whether `recording` (at `fs` Hz) follows an exponential sweep of rate
/// constant `rate_constant_s`: [`track`], [`fit_law`], then the fitted
/// slope against the rate constant within [`RATE_TOLERANCE`], judged only
/// with [`MIN_POINTS`] points over [`MIN_SPAN_OCTAVES`] on the line,
/// [`MIN_INLIER_SHARE`] of the points fitted, and within [`MAX_RMS_HOPS`]
/// of the line.
pub fn check_recording(recording: &[f64], fs: f64, rate_constant_s: f64) -> SweepCheck {
    let points = track(recording, fs);
    let Some(fit) = fit_law(&points, hop_len(fs) as f64 / fs) else {
        return SweepCheck::Unclear;
    };
    let clear = fit.inliers >= MIN_POINTS
        && (fit.high_hz / fit.low_hz).log2() >= MIN_SPAN_OCTAVES
        && fit.inliers as f64 >= MIN_INLIER_SHARE * fit.points as f64
        && fit.rms_residual_s <= MAX_RMS_HOPS * hop_len(fs) as f64 / fs
        && fit.rate_constant_s > 0.0;
    if !clear || !positive(rate_constant_s) {
        return SweepCheck::Unclear;
    }
    let ratio = fit.rate_constant_s / rate_constant_s;
    if (1.0 / RATE_TOLERANCE..=RATE_TOLERANCE).contains(&ratio) {
        SweepCheck::Follows(fit)
    } else {
        SweepCheck::Different(fit)
    }
}

/// The parameters of an exponential sweep recovered from its samples.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct RecoveredSweep {
    /// The frequency at the sweep's first sample, Hz.
    pub start_hz: f64,
    /// The frequency at the sweep's end (one sample after its last), Hz.
    pub end_hz: f64,
    /// The rate constant L, s.
    pub rate_constant_s: f64,
    /// The sweep's first sample in the file (the sample before the first
    /// one that is not digital silence).
    pub first_sample: usize,
    /// The samples from `first_sample` to the sample after the last one
    /// that is not digital silence.
    pub samples: usize,
    /// The peak of its envelope (|analytic signal|), full scale = 1.
    pub amplitude: f64,
    /// RMS departure of ln f from the fitted law over the fitted part.
    pub rms_log_residual: f64,
}

/// Largest RMS departure of ln f from the law accepted by [`recover`]
/// (2 %; a clean exponential sweep reaches a few 10⁻⁴, a linear sweep
/// over two decades tens of percent). Our choice.
pub const MAX_LOG_RESIDUAL: f64 = 0.02;

/// Recovers the exponential sweep in `x` (a sweep file: the sweep alone,
/// with silence around it) at `fs` Hz. The analytic signal (by FFT: the
/// negative frequencies removed) gives the instantaneous frequency
/// f_n = arg(z_{n+1}·z_n*)·fs/2π; over the samples whose envelope is at
/// least half its peak (the fades left out), but for a twentieth of that
/// stretch at either end, ln f is fitted to
/// a + t/L by least squares. The sweep's extent is where the file is not
/// digital silence; f1 and f2 are the law at its ends. Refuses, with the
/// reason, a file that is silent or too short, whose frequency does not
/// rise over at least an octave, or that departs from the law by more
/// than [`MAX_LOG_RESIDUAL`] (a linear sweep, noise, music).
pub fn recover(x: &[f64], fs: f64) -> Result<RecoveredSweep, String> {
    if !positive(fs) {
        return Err("the sample rate is not positive".into());
    }
    if x.iter().any(|v| !v.is_finite()) {
        return Err("it holds non-finite samples".into());
    }
    let Some(first_nz) = x.iter().position(|v| *v != 0.0) else {
        return Err("it is silent".into());
    };
    let last_nz = x.iter().rposition(|v| *v != 0.0).unwrap_or(first_nz);
    let first = first_nz.saturating_sub(1);
    let end = (last_nz + 1).min(x.len());
    if end - first < 64 {
        return Err(format!("it holds only {} samples of sound", end - first));
    }
    let seg = &x[first..end];
    let n = fft::fast_len(2 * seg.len());
    let mut spec = fft::rfft(seg, n);
    // analytic signal: positive frequencies doubled, DC and Nyquist kept,
    // negative ones (not stored by the real FFT) zero
    let mut full = vec![Complex::new(0.0, 0.0); n];
    for (k, c) in spec.iter_mut().enumerate() {
        let g = if k == 0 || 2 * k == n { 1.0 } else { 2.0 };
        full[k] = *c * g;
    }
    let z = inverse_complex(&mut full);
    let z = &z[..seg.len()];
    let env: Vec<f64> = z.iter().map(|c| c.norm()).collect();
    let peak = env.iter().fold(0.0f64, |m, v| m.max(*v));
    if !positive(peak) {
        return Err("it is silent".into());
    }
    // the part at least half the peak, a twentieth of its length in from
    // each end of it (the analytic signal rings at an abrupt start or end)
    let lo = env.iter().position(|v| *v >= 0.5 * peak).unwrap_or(0);
    let hi = env.iter().rposition(|v| *v >= 0.5 * peak).unwrap_or(0);
    let margin = (hi.saturating_sub(lo)) / 20;
    let (lo, hi) = (lo + margin, hi.saturating_sub(margin));
    if hi <= lo + 32 {
        return Err("it holds no steady sound to follow".into());
    }
    let mut pts = Vec::with_capacity(hi - lo);
    for i in lo..hi {
        let f = (z[i + 1] * z[i].conj()).arg() * fs / std::f64::consts::TAU;
        if f > 0.0 && env[i] >= 0.5 * peak {
            pts.push((i as f64 / fs, f.ln()));
        }
    }
    if pts.len() < 32 {
        return Err("its instantaneous frequency is not positive: it holds no sweep".into());
    }
    let keep = vec![true; pts.len()];
    let Some((a, b)) = least_squares(&pts, &keep) else {
        return Err("its frequency cannot be followed".into());
    };
    let rms = (pts
        .iter()
        .map(|&(t, u)| (u - a - b * t).powi(2))
        .sum::<f64>()
        / pts.len() as f64)
        .sqrt();
    if rms > MAX_LOG_RESIDUAL {
        return Err(format!(
            "its instantaneous frequency departs from an exponential law by {:.0} % (rms): a linear sweep, noise or music, not an exponential sweep",
            100.0 * rms
        ));
    }
    let f_lo = a.exp();
    let f_hi = (a + b * seg.len() as f64 / fs).exp();
    if !positive(b) || f_hi / f_lo < 2.0 {
        return Err(format!(
            "its frequency does not rise over an octave (from {:.0} Hz to {:.0} Hz)",
            f_lo, f_hi
        ));
    }
    Ok(RecoveredSweep {
        start_hz: f_lo,
        end_hz: f_hi,
        rate_constant_s: 1.0 / b,
        first_sample: first,
        samples: seg.len(),
        amplitude: peak,
        rms_log_residual: rms,
    })
}

/// A sweep design recovered from a sweep file's samples, and whether it
/// is exactly a gliss sweep.
#[derive(Debug, Clone, PartialEq)]
pub struct RecoveredDesign {
    /// The design: for a gliss sweep, the one that generates the file; else
    /// the measured law (rate constant, band, extent) of the file.
    pub design: SweepDesign,
    /// The design generates the file's samples to within `step` (a
    /// synchronised gliss sweep with the default fades).
    pub exact: bool,
    /// What [`recover`] measured.
    pub measured: RecoveredSweep,
}

/// The round value nearest `f` (two, three or four significant digits,
/// the fewest that lie within `rel` of it), or `f` itself.
pub fn round_frequency(f: f64, rel: f64) -> f64 {
    if !positive(f) {
        return f;
    }
    for digits in 2..=4 {
        let scale = 10f64.powi(f.log10().floor() as i32 + 1 - digits);
        let r = (f / scale).round() * scale;
        if ((r - f) / f).abs() <= rel {
            return r;
        }
    }
    f
}

/// The sweep design of a sweep file's samples `x` at `fs` Hz, quantised
/// in steps of `step` (1/2^(bits−1) for integer WAVs, about 10⁻⁷ for
/// float): [`recover`], then the frequencies rounded to the round values
/// within the recovery's precision (0.5 %), the rate constant to f1·L
/// whole where it is within 0.02 of it (Novak et al. 2010's
/// synchronisation), the level to 0.1 dB; if that synchronised design
/// (default fades, the file's silence after the sweep as its tail)
/// generates `x` to within 1.5 steps, it is the design, exactly. Otherwise
/// the design holds the measured law itself: rate constant, band and the
/// sweep's extent in the file (harmonic orders placed by the measured
/// rate), and `exact` is false.
pub fn recovered_design(x: &[f64], fs: u32, step: f64) -> Result<RecoveredDesign, String> {
    let fsf = f64::from(fs);
    let r = recover(x, fsf)?;
    let f1 = round_frequency(r.start_hz, 5e-3);
    let f2 = round_frequency(r.end_hz, 5e-3).min(fsf / 2.0);
    let cycles = f1 * r.rate_constant_s;
    let peak = x.iter().fold(0.0f64, |m, v| m.max(v.abs()));
    let level = 20.0 * peak.log10();
    let level = if (level - (level * 10.0).round() / 10.0).abs() < 0.05 {
        (level * 10.0).round() / 10.0
    } else {
        level
    }
    .min(0.0);
    if (cycles - cycles.round()).abs() < 0.02 && cycles.round() >= 1.0 && r.first_sample == 0 {
        let l = cycles.round() / f1;
        for samples in [r.samples + 1, r.samples] {
            let params = SweepParams {
                start_hz: f1,
                end_hz: f2,
                requested_length_s: l * (f2 / f1).ln(),
                sample_rate_hz: fs,
                level_dbfs: level,
                tail_s: x.len().saturating_sub(samples) as f64 / fsf,
                ..SweepParams::default()
            };
            let Ok(d) = params.design() else { continue };
            if d.sweep_samples != samples || d.total_samples != x.len() {
                continue;
            }
            let g = d.generate();
            let worst = g
                .iter()
                .zip(x)
                .map(|(a, b)| (a - b).abs())
                .fold(0.0, f64::max);
            if worst <= 1.5 * step {
                return Ok(RecoveredDesign {
                    design: d,
                    exact: true,
                    measured: r,
                });
            }
        }
    }
    // the measured law as it is
    let sweep_samples = r.first_sample + r.samples;
    let l = r.rate_constant_s;
    let design = SweepDesign {
        params: SweepParams {
            start_hz: r.start_hz,
            end_hz: r.end_hz.min(fsf / 2.0),
            requested_length_s: r.samples as f64 / fsf,
            sample_rate_hz: fs,
            level_dbfs: level,
            tail_s: x.len().saturating_sub(sweep_samples) as f64 / fsf,
            ..SweepParams::default()
        },
        rate_constant_s: l,
        length_s: r.samples as f64 / fsf,
        sweep_samples,
        total_samples: x.len(),
        fade_in_samples: 0,
        fade_out_samples: 0,
    };
    Ok(RecoveredDesign {
        design,
        exact: false,
        measured: r,
    })
}

/// The inverse complex FFT of `x` (length n), normalised by 1/n.
fn inverse_complex(x: &mut [Complex<f64>]) -> Vec<Complex<f64>> {
    let n = x.len();
    let mut planner = rustfft::FftPlanner::<f64>::new();
    let plan = planner.plan_fft_inverse(n);
    plan.process(x);
    let s = 1.0 / n as f64;
    x.iter().map(|c| c * s).collect()
}

#[cfg(test)]
mod tests {
    use super::*;
    use rand::{Rng, SeedableRng};

    fn design(f1: f64, f2: f64, len: f64, tail: f64) -> SweepDesign {
        SweepParams {
            start_hz: f1,
            end_hz: f2,
            requested_length_s: len,
            tail_s: tail,
            ..SweepParams::default()
        }
        .design()
        .unwrap()
    }

    fn noise(n: usize, rms: f64, seed: u64) -> Vec<f64> {
        // uniform noise of the given RMS (uniform on ±a has RMS a/√3)
        let mut r = rand::rngs::StdRng::seed_from_u64(seed);
        let a = rms * 3f64.sqrt();
        (0..n)
            .map(|_| a * (2.0 * r.random::<f64>() - 1.0))
            .collect()
    }

    fn rms(x: &[f64]) -> f64 {
        (x.iter().map(|v| v * v).sum::<f64>() / x.len() as f64).sqrt()
    }

    /// The sweep through an exponentially decaying noise tail of
    /// reverberation time `t60` after a direct sound, delayed by `delay`
    /// samples.
    fn room(x: &[f64], t60: f64, delay: usize, seed: u64) -> Vec<f64> {
        let fs = 48_000.0;
        let mut h = noise((1.5 * t60 * fs) as usize, 0.05, seed);
        for (i, v) in h.iter_mut().enumerate() {
            *v *= 10f64.powf(-3.0 * i as f64 / (t60 * fs));
        }
        h[0] = 1.0;
        let mut y = vec![0.0; delay];
        y.extend(fft::convolve(x, &h));
        y.truncate(x.len() + delay);
        y
    }

    #[test]
    fn a_track_follows_the_sweeps_closed_form_law() {
        // closed form: the sweep passes f at t = L·ln(f/f1) (Farina 2000)
        for (len, f1, f2) in [
            (1.0, 20.0, 20_000.0),
            (5.0, 20.0, 20_000.0),
            (2.0, 100.0, 10_000.0),
        ] {
            let d = design(f1, f2, len, 0.5);
            let x = d.generate();
            let pts = track(&x, 48_000.0);
            assert!(pts.len() > 20, "{len} s: {} points", pts.len());
            let l = d.rate_constant_s;
            // every point within two hops (21 ms) of the law, except the
            // fades and the sweep's ends
            let hop = hop_len(48_000.0) as f64 / 48_000.0;
            let inside: Vec<_> = pts
                .iter()
                .filter(|p| {
                    p.frequency_hz > 1.5 * f1.max(lowest_hz(48_000.0)) && p.frequency_hz < f2 / 1.5
                })
                .collect();
            assert!(inside.len() > 10);
            for p in &inside {
                let want = l * (p.frequency_hz / f1).ln();
                assert!(
                    (p.time_s - want).abs() < 2.0 * hop,
                    "{len} s: {p:?} vs {want}"
                );
            }
            let fit = fit_law(&pts, hop).unwrap();
            assert!(
                (fit.rate_constant_s / l - 1.0).abs() < 0.03,
                "{len} s: {fit:?} vs L {l}"
            );
            assert!((fit.time_at(f1) - 0.0).abs() < 2.0 * hop, "{fit:?}");
        }
    }

    #[test]
    fn the_right_sweep_follows_and_a_different_one_is_found() {
        let fs = 48_000.0;
        let played = design(20.0, 20_000.0, 1.0, 1.0);
        let l = played.rate_constant_s;
        let x = played.generate();
        // clean, delayed by 10 ms
        let mut y = vec![0.0; 480];
        y.extend(&x);
        assert!(matches!(check_recording(&y, fs, l), SweepCheck::Follows(_)));
        // a different sweep: 100 Hz–10 kHz over 2 s, delayed 1 s
        let other = design(100.0, 10_000.0, 2.0, 0.5);
        let mut z = vec![0.0; 48_000];
        z.extend(other.generate());
        match check_recording(&z, fs, l) {
            SweepCheck::Different(f) => {
                // its own law: L = 2/ln 100 (synchronised: 43/100 s)
                assert!(
                    (f.rate_constant_s / other.rate_constant_s - 1.0).abs() < 0.05,
                    "{f:?}"
                );
                assert!(f.low_hz < 130.0 && f.high_hz > 8_000.0, "{f:?}");
                assert!((f.span_s() - 2.0).abs() < 0.25, "{f:?}");
            }
            c => panic!("{c:?}"),
        }
        // the same band over 2 s instead of 1 s
        let longer = design(20.0, 20_000.0, 2.0, 0.5).generate();
        assert!(matches!(
            check_recording(&longer, fs, l),
            SweepCheck::Different(_)
        ));
    }

    #[test]
    fn the_right_sweep_is_not_refused_in_a_room_in_noise_or_distorted() {
        let fs = 48_000.0;
        for len in [1.0, 5.0] {
            let d = design(20.0, 20_000.0, len, 2.5);
            let l = d.rate_constant_s;
            let x = d.generate();
            // reverberant rooms up to T = 2 s
            for (t60, seed) in [(0.5, 1), (1.0, 2), (2.0, 3)] {
                let y = room(&x, t60, 300, seed);
                let c = check_recording(&y, fs, l);
                assert!(
                    matches!(c, SweepCheck::Follows(_)),
                    "{len} s, T {t60}: {c:?}"
                );
            }
            // −20 dB broadband signal-to-noise: no refusal
            let n = noise(x.len(), 10.0 * rms(&x[..d.sweep_samples]), 7);
            let y: Vec<f64> = x.iter().zip(&n).map(|(a, b)| a + b).collect();
            let c = check_recording(&y, fs, l);
            assert!(
                !matches!(c, SweepCheck::Different(_)),
                "{len} s in noise: {c:?}"
            );
            // strong harmonic distortion (a soft clipper)
            let y: Vec<f64> = x.iter().map(|v| 0.1 * (8.0 * v).tanh()).collect();
            let c = check_recording(&y, fs, l);
            assert!(
                matches!(c, SweepCheck::Follows(_)),
                "{len} s distorted: {c:?}"
            );
        }
        // noise alone says nothing
        let c = check_recording(&noise(96_000, 0.1, 9), fs, 0.15);
        assert_eq!(c, SweepCheck::Unclear);
    }

    #[test]
    fn a_sweep_file_is_recovered_from_its_samples() {
        // against the design's closed form: f1, f2 = f1·e^(T/L), L
        for (f1, f2, len) in [
            (20.0, 20_000.0, 1.0),
            (20.0, 20_000.0, 5.0),
            (100.0, 10_000.0, 2.0),
            (50.0, 16_000.0, 3.0),
        ] {
            let d = design(f1, f2, len, 1.0);
            let x = d.generate();
            let r = recover(&x, 48_000.0).unwrap();
            assert_eq!(r.first_sample, 0);
            // the sweep's last sample is the fade-out's zero
            assert_eq!(r.samples, d.sweep_samples - 1);
            // the per-sample frequency of the analytic signal ripples
            // (its envelope by about 1 %), so the law is found to within
            // 0.1 % in L and 0.3 % in f1 and f2: enough to name the design
            // (see `recovered_design`)
            assert!(
                (r.rate_constant_s / d.rate_constant_s - 1.0).abs() < 1e-3,
                "{r:?}"
            );
            assert!((r.start_hz / f1 - 1.0).abs() < 3e-3, "{r:?}");
            assert!((r.end_hz / f2 - 1.0).abs() < 3e-3, "{r:?}");
            assert!(
                (r.amplitude / d.params.amplitude() - 1.0).abs() < 0.03,
                "{r:?}"
            );
            assert!(r.rms_log_residual < 0.01, "{r:?}");
        }
    }

    #[test]
    fn what_is_not_an_exponential_sweep_is_refused_with_the_reason() {
        let fs = 48_000.0;
        // a linear sweep 20 Hz–20 kHz over 2 s
        let lin: Vec<f64> = (0..96_000)
            .map(|n| {
                let t = n as f64 / fs;
                0.1 * (std::f64::consts::TAU * (20.0 * t + 0.5 * 9_990.0 * t * t)).sin()
            })
            .collect();
        let e = recover(&lin, fs).unwrap_err();
        assert!(e.contains("not an exponential sweep"), "{e}");
        let e = recover(&noise(48_000, 0.1, 3), fs).unwrap_err();
        assert!(e.contains("not an exponential sweep"), "{e}");
        // a steady tone
        let tone: Vec<f64> = (0..48_000)
            .map(|n| 0.1 * (std::f64::consts::TAU * 1000.0 * n as f64 / fs).sin())
            .collect();
        let e = recover(&tone, fs).unwrap_err();
        assert!(e.contains("does not rise"), "{e}");
        assert!(recover(&[0.0; 1000], fs).unwrap_err().contains("silent"));
        assert!(recover(&[f64::NAN; 10], fs).is_err());
    }

    #[test]
    fn a_gliss_sweep_file_gives_its_own_design_back() {
        for (f1, f2, len, level) in [
            (20.0, 20_000.0, 1.0, -20.0),
            (100.0, 10_000.0, 2.0, -12.0),
            (20.0, 20_000.0, 3.0, -6.0),
        ] {
            let d = SweepParams {
                start_hz: f1,
                end_hz: f2,
                requested_length_s: len,
                level_dbfs: level,
                tail_s: 0.7,
                ..SweepParams::default()
            }
            .design()
            .unwrap();
            // stored as 32-bit float
            let x: Vec<f64> = d.generate().iter().map(|v| f64::from(*v as f32)).collect();
            let r = recovered_design(&x, 48_000, 1e-7).unwrap();
            assert!(r.exact, "{r:?}");
            // everything but the length asked for (which the rounding of
            // the synchronisation hides: the design's own length stands in)
            let mut want = d.clone();
            want.params.requested_length_s = d.length_s;
            assert_eq!(r.design, want);
            assert_eq!(r.design.generate(), d.generate());
        }
        // an unsynchronised exponential sweep of another program: not exact,
        // but its measured law (L = 1/ln 1000 = 0.1448 s, 20 Hz–20 kHz)
        let fs = 48_000.0;
        let l = 1.0 / 1000f64.ln();
        let n = 48_000;
        let mut x: Vec<f64> = (0..n)
            .map(|i| {
                let t = i as f64 / fs;
                0.5 * (std::f64::consts::TAU * 20.0 * l * ((t / l).exp() - 1.0)).sin()
            })
            .collect();
        x.extend(vec![0.0; 24_000]);
        let r = recovered_design(&x, 48_000, 1e-7).unwrap();
        assert!(!r.exact);
        // abrupt ends ring, but well inside the refusal limit
        assert!(
            r.measured.rms_log_residual < 0.5 * MAX_LOG_RESIDUAL,
            "{r:?}"
        );
        assert!((r.design.rate_constant_s / l - 1.0).abs() < 1e-3, "{r:?}");
        assert!(
            (r.design.params.start_hz / 20.0 - 1.0).abs() < 5e-3,
            "{r:?}"
        );
        assert!(
            (r.design.params.end_hz / 20_000.0 - 1.0).abs() < 5e-3,
            "{r:?}"
        );
        assert_eq!(r.design.total_samples, 72_000);
    }

    #[test]
    fn round_frequencies_are_the_fewest_digits_within_the_tolerance() {
        assert_eq!(round_frequency(20.023, 5e-3), 20.0);
        assert_eq!(round_frequency(19_988.0, 5e-3), 20_000.0);
        assert_eq!(round_frequency(31.52, 5e-3), 31.5);
        assert_eq!(round_frequency(12_345.0, 1e-6), 12_345.0);
    }

    #[test]
    fn odd_inputs_give_no_judgement_and_no_panic() {
        let fs = 48_000.0;
        for x in [
            vec![],
            vec![0.0; 10],
            vec![f64::NAN; 5000],
            vec![1e300; 5000],
            vec![0.5; 5000],
        ] {
            assert_eq!(check_recording(&x, fs, 0.15), SweepCheck::Unclear);
            assert!(recover(&x, fs).is_err());
            assert!(recovered_design(&x, 48_000, 1e-7).is_err());
        }
        assert!(track(&[0.1; 100], 0.0).is_empty());
        assert!(track(&[0.1; 100], f64::NAN).is_empty());
        assert_eq!(fit_law(&[], 0.01), None);
    }
}
