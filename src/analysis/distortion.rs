//! Harmonic distortion orders from the same sweep.
//!
//! With an exponential sweep the n-th harmonic impulse response arrives
//! L·ln n before the linear one (A. Farina, 108th AES Convention, 2000);
//! with the synchronised sweep its phase is meaningful too (A. Novak et
//! al., JAES 63(10), 2015). Each order is cut from the circular
//! deconvolution with a window that reaches halfway to its neighbours'
//! windows, and its spectrum is read at n·f for the excitation frequency f:
//! HD_n(f) = |H_n(n·f)| / |H_1(f)|.
//!
//! The noise floor of each order is the noise spectrum (from a stretch of
//! the deconvolution that holds neither the linear nor the harmonic
//! responses) scaled to that order's window. An order less than 10 dB above
//! its floor is not reported (`None`), so that noise is never read as
//! distortion.

use rustfft::num_complex::Complex;
use serde::{Deserialize, Serialize};

use crate::analysis::etc;
use crate::analysis::response;
use crate::analysis::smoothing::{PiecewiseIntegral, Smoothing};
use crate::deconv;
use crate::model::{Code, Warnings};
use crate::signal::fft;
use crate::signal::sweep::SweepDesign;
use crate::signal::window::{self, Window};

/// Highest order that can be asked for.
pub const MAX_ORDER: u32 = 9;
/// An order is reported only this far (dB) above its noise floor.
pub const MIN_ABOVE_NOISE_DB: f64 = 10.0;
/// THD above this (percent) over [`HIGH_SHARE`] of the band is a warning.
pub const HIGH_THD_PERCENT: f64 = 3.0;
/// Share of the band over which high THD becomes a warning.
pub const HIGH_SHARE: f64 = 1.0 / 3.0;
/// Decay (dB, Schroeder, noise subtracted) that must be reached before the
/// 2nd harmonic's window ends, or the responses run into each other (our
/// choice: the 2nd harmonic is then at least 30 dB down where it meets the
/// linear response).
pub const OVERLAP_DECAY_DB: f64 = 30.0;

/// Where one harmonic order is cut from the circular deconvolution.
#[derive(Debug, Clone, PartialEq)]
pub struct HarmonicWindow {
    /// The order n ≥ 2.
    pub order: u32,
    /// First sample (circular; negative = before index 0).
    pub start: isize,
    /// Length in samples.
    pub len: usize,
    /// Samples before the expected arrival L·ln n ahead of the linear peak.
    pub pre: usize,
}

/// The windows of orders 2..=`max_order`: order n from `pre` before its
/// arrival to the start of order n − 1's window (the linear window, which
/// starts `linear_pre` before the peak `ipeak`, for n = 2). `pre` is half
/// the gap to order n + 1, at most 100 ms, as for the linear window.
pub fn harmonic_windows(
    design: &SweepDesign,
    ipeak: usize,
    linear_pre: usize,
    max_order: u32,
) -> Vec<HarmonicWindow> {
    let fs = design.fs();
    let l = design.rate_constant_s;
    let mut next_start = ipeak as isize - linear_pre as isize;
    let mut out = Vec::new();
    for n in 2..=max_order {
        let arrival = ipeak as f64 - design.harmonic_offset_s(n) * fs;
        let gap_above = l * (f64::from(n + 1) / f64::from(n)).ln() * fs;
        let pre = (0.5 * gap_above).min(0.1 * fs).round() as usize;
        let start = arrival.round() as isize - pre as isize;
        let len = (next_start - start).max(1) as usize;
        out.push(HarmonicWindow {
            order: n,
            start,
            len,
            pre,
        });
        next_start = start;
    }
    out
}

/// One harmonic order against the excitation frequency.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Order {
    /// The order n (2 = second harmonic).
    pub order: u32,
    /// Excitation frequencies, Hz: from half an octave above the sweep's
    /// start (three fade-in lengths) to where the n-th harmonic reaches the
    /// sweep's fade-out (see docs/method.md).
    pub frequency_hz: Vec<f64>,
    /// Level re the fundamental at the same excitation frequency, dB;
    /// `null` where the order is less than 10 dB above its noise floor.
    pub level_db: Vec<Option<f64>>,
    /// The noise floor of this order re the fundamental, dB (`null` where
    /// no noise estimate could be made).
    pub noise_floor_db: Vec<Option<f64>>,
    /// L·ln n, s: how far ahead of the linear response this order arrives.
    pub expected_offset_s: f64,
    /// The measured lead of this order's envelope peak over the linear
    /// response's, s (`null` where the order is nowhere above its noise).
    pub measured_offset_s: Option<f64>,
}

/// Total harmonic distortion against the excitation frequency.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Thd {
    /// Excitation frequencies, Hz (those of the 2nd order).
    pub frequency_hz: Vec<f64>,
    /// √(Σ V_n²)/V1 over the reported orders whose harmonic lies in the
    /// band, percent; `null` where no order is above its noise.
    pub percent: Vec<Option<f64>>,
    /// The same sum over the orders' noise floors, percent.
    pub noise_floor_percent: Vec<Option<f64>>,
}

/// Everything the distortion analysis reports.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Distortion {
    /// Highest order analysed.
    pub harmonics: u32,
    /// Smoothing applied to the orders and the fundamental.
    pub smoothing: Smoothing,
    /// What `level_db` is relative to, in words.
    pub level_reference: String,
    /// Orders 2..=harmonics.
    pub orders: Vec<Order>,
    /// Total harmonic distortion.
    pub thd: Thd,
    /// Warnings about the distortion estimate (`warnings` and
    /// `warning_codes`).
    #[serde(flatten)]
    pub warnings: Warnings,
}

/// What the distortion analysis needs from the linear analysis.
#[derive(Debug, Clone, Copy)]
pub struct Inputs<'a> {
    /// The circular deconvolution.
    pub h: &'a [f64],
    /// Index of the linear impulse peak in `h`.
    pub ipeak: usize,
    /// Samples of the linear window before the peak.
    pub linear_pre: usize,
    /// The windowed linear impulse response and its first sample in `h`.
    pub linear_ir: &'a [f64],
    /// First sample of `linear_ir` in `h` (circular).
    pub linear_start: isize,
    /// The linear spectrum (band limit removed) on `fft_len` bins.
    pub linear_spectrum: &'a [Complex<f64>],
    /// FFT length of `linear_spectrum`, also used for the orders.
    pub fft_len: usize,
    /// A stretch of `h` with noise only, [start, end), if there is one.
    pub noise_region: Option<(usize, usize)>,
}

fn power_of(spec: &[Complex<f64>]) -> Vec<f64> {
    spec.iter().map(|c| c.norm_sqr()).collect()
}

/// |FFT|² of `x` on `n` bins with the band limit [`deconv::low_edge`]
/// divided out, and the bin spacing. Only bins below 4·f1 need it: above,
/// |low_edge|² differs from 1 by less than (1/4)^16 ≈ 2·10⁻¹⁰.
fn power_spectrum(x: &[f64], n: usize, fs: f64, f1: f64) -> (Vec<f64>, f64) {
    let df = fs / n as f64;
    let mut p = power_of(&fft::rfft(x, n));
    for (k, v) in p.iter_mut().enumerate() {
        let f = k as f64 * df;
        if f >= 4.0 * f1 {
            break;
        }
        if f >= f1 * 2f64.powf(-0.25) {
            *v /= deconv::low_edge(f, f1).norm_sqr();
        }
    }
    (p, df)
}

/// Sub-sample position of the largest value of `e` (parabola through the
/// peak and its neighbours).
fn peak_position(e: &[f64]) -> f64 {
    let i = e
        .iter()
        .enumerate()
        .fold(0, |m, (i, &v)| if v > e[m] { i } else { m });
    if i == 0 || i + 1 >= e.len() {
        return i as f64;
    }
    let (a, b, c) = (e[i - 1], e[i], e[i + 1]);
    let d = a - 2.0 * b + c;
    if d.abs() < f64::MIN_POSITIVE {
        i as f64
    } else {
        i as f64 + 0.5 * (a - c) / d
    }
}

/// The distortion orders 2..=`max_order` on the excitation-frequency grid
/// `grid` (the response grid), smoothed like the response.
pub fn analyze(
    inputs: Inputs<'_>,
    design: &SweepDesign,
    max_order: u32,
    smoothing: Smoothing,
    grid: &[f64],
) -> Distortion {
    let fs = design.fs();
    let f1 = design.params.start_hz;
    let f2 = design.params.end_hz;
    // Harmonics are read only below the sweep's fade-out, with a margin of
    // as much again: the linear response's own band edge at f2 rings on
    // both sides of its peak, and the part before the peak lies in the
    // harmonic windows, right at the top of their band.
    let f_top = f2 * 2f64.powf(-2.0 * design.params.fade_out_octaves.max(1.0 / 48.0));
    // ... and from three fade-in lengths above f1 (half an octave with the
    // default fade): while the sweep fades in, a nonlinear device's output
    // is not yet a clean set of harmonics, and its onset lands in every
    // order's window at excitation frequencies near f1 (measured with a
    // Chebyshev device of 5 % distortion: −31 dB of a false order at f1,
    // −65 dB at f1·√2; see tests/commands/distortion.rs).
    let f_low = f1 * 2f64.powf(3.0 * design.params.fade_in_octaves.max(1.0 / 48.0));
    let first = grid
        .iter()
        .position(|&f| f >= f_low * (1.0 - 1e-12))
        .unwrap_or(grid.len());
    let m = inputs.fft_len;
    let df = fs / m as f64;
    let band = |f: f64| {
        let (lo, hi) = smoothing.band(f);
        (lo.max(f1), hi.min(f2))
    };
    let harmonic_band = |f: f64| {
        let (lo, hi) = smoothing.band(f);
        (lo.max(f1), hi.min(f_top))
    };
    let linear = PiecewiseIntegral::new(power_of(inputs.linear_spectrum), df);
    let fundamental: Vec<f64> = grid
        .iter()
        .map(|&f| {
            let (lo, hi) = band(f);
            linear.mean(lo, hi)
        })
        .collect();

    // noise power spectral density (per unit of window energy), from at
    // most a second of the noise-only stretch
    let noise_psd = inputs.noise_region.and_then(|(a, b)| {
        let len = b.saturating_sub(a).min(fs as usize);
        if (len as f64) < 0.05 * fs {
            return None;
        }
        let w = Window::Hann.make(len);
        let energy: f64 = w.iter().map(|v| v * v).sum();
        let seg: Vec<f64> = (0..len).map(|i| inputs.h[a + i] * w[i]).collect();
        let fft_len = response::spectrum_len(len, fs, 2.0 * f_low);
        let (mut power, df) = power_spectrum(&seg, fft_len, fs, f1);
        for v in &mut power {
            *v /= energy;
        }
        Some(PiecewiseIntegral::new(power, df))
    });

    // the linear response's arrival: its envelope peak near the impulse
    // peak (`linear_pre` into the window)
    let near_len = |pre: usize, len: usize| (3 * pre + 1).min(len);
    let lin_near = &inputs.linear_ir[..near_len(inputs.linear_pre, inputs.linear_ir.len())];
    let lin_env = etc::envelope_squared(lin_near);
    let lin_peak_abs = inputs.linear_start as f64 + peak_position(&lin_env);

    let windows = harmonic_windows(design, inputs.ipeak, inputs.linear_pre, max_order);
    let mut orders = Vec::new();
    // per THD grid point: Σ of reported powers and of floors, re fundamental
    let thd_end = grid
        .iter()
        .filter(|&&f| 2.0 * f <= f_top)
        .count()
        .max(first);
    let thd_len = thd_end - first;
    let mut thd_sum = vec![0.0; thd_len];
    let mut thd_any = vec![false; thd_len];
    let mut thd_floor = vec![0.0; thd_len];
    for w in &windows {
        let n = f64::from(w.order);
        let fade_out = (w.len / 10).max(1);
        let cut = deconv::cut(inputs.h, w.start, w.len, w.pre / 2, fade_out);
        let taper_energy = window::taper_energy(w.len, w.pre / 2, fade_out);
        // bins dense enough for the grid at this order's lowest frequency
        let fft_len = response::spectrum_len(w.len, fs, n * f_low);
        let (power, df_n) = power_spectrum(&cut, fft_len, fs, f1);
        let power = PiecewiseIntegral::new(power, df_n);
        let end = grid.iter().filter(|&&f| n * f <= f_top).count().max(first);
        let mut level_db = Vec::with_capacity(end - first);
        let mut noise_floor_db = Vec::with_capacity(end - first);
        let mut any_valid = false;
        for (i, &f) in grid[first..end].iter().enumerate() {
            let (lo, hi) = harmonic_band(n * f);
            let p = power.mean(lo, hi);
            let p1 = fundamental[first + i].max(f64::MIN_POSITIVE);
            let floor = noise_psd.as_ref().map(|s| s.mean(lo, hi) * taper_energy);
            let valid = match floor {
                Some(fl) => p >= fl * 10f64.powf(MIN_ABOVE_NOISE_DB / 10.0),
                None => false,
            };
            level_db.push(valid.then(|| 10.0 * (p / p1).log10()));
            noise_floor_db.push(floor.map(|fl| 10.0 * (fl.max(1e-300) / p1).log10()));
            if i < thd_len {
                if valid {
                    thd_sum[i] += p / p1;
                    thd_any[i] = true;
                }
                if let Some(fl) = floor {
                    thd_floor[i] += fl / p1;
                }
            }
            any_valid |= valid;
        }
        // the order's own arrival: its envelope peak within ±pre of where
        // it is expected (later parts of the window hold its decay, and in
        // a room other orders' decays too)
        let env = etc::envelope_squared(&cut[..near_len(w.pre, cut.len())]);
        let near = &env[..(2 * w.pre + 1).min(env.len())];
        let peak_abs = w.start as f64 + peak_position(near);
        orders.push(Order {
            order: w.order,
            frequency_hz: grid[first..end].to_vec(),
            level_db,
            noise_floor_db,
            expected_offset_s: design.harmonic_offset_s(w.order),
            measured_offset_s: any_valid.then(|| (lin_peak_abs - peak_abs) / fs),
        });
    }
    let thd = Thd {
        frequency_hz: grid[first..thd_end].to_vec(),
        percent: (0..thd_len)
            .map(|i| thd_any[i].then(|| 100.0 * thd_sum[i].sqrt()))
            .collect(),
        noise_floor_percent: (0..thd_len)
            .map(|i| noise_psd.is_some().then(|| 100.0 * thd_floor[i].sqrt()))
            .collect(),
    };

    let mut warnings = Warnings::new();
    if noise_psd.is_none() {
        warnings.add(
            Code::DistortionUnmeasurable,
            "no stretch of the recording holds only noise, so the distortion orders cannot be told from noise and are not reported; use a sweep that spans more than a decade, with a silent tail",
        );
    }
    let high = thd
        .percent
        .iter()
        .filter(|p| p.is_some_and(|v| v > HIGH_THD_PERCENT))
        .count();
    if thd_len > 0 && high as f64 > HIGH_SHARE * thd_len as f64 {
        warnings.add(Code::DistortionHigh, format!(
            "harmonic distortion exceeds {HIGH_THD_PERCENT} % over {:.0} % of the band: the device is driven hard or is clipping; lower the level and measure again",
            100.0 * high as f64 / thd_len as f64
        ));
    }
    if let Some(w) = overlap_warning(inputs, design) {
        warnings.add(Code::HarmonicOverlap, w);
    }
    Distortion {
        harmonics: max_order,
        smoothing,
        level_reference: "dB re the fundamental at the same excitation frequency".into(),
        orders,
        thd,
        warnings,
    }
}

/// Time (s after the peak) at which the linear response's energy decay
/// (Schroeder backward integral, with the noise energy subtracted, W. T.
/// Chu 1978 — method from memory) has fallen by `drop_db`; `None` if it
/// never does within the window.
pub fn decay_time(
    ir: &[f64],
    peak: usize,
    noise_per_sample: f64,
    drop_db: f64,
    fs: f64,
) -> Option<f64> {
    let tail = &ir[peak.min(ir.len())..];
    let mut backward = vec![0.0; tail.len() + 1];
    for i in (0..tail.len()).rev() {
        backward[i] = backward[i + 1] + tail[i] * tail[i];
    }
    let corrected = |i: usize| backward[i] - noise_per_sample * (tail.len() - i) as f64;
    let total = corrected(0);
    if total <= 0.0 {
        return None;
    }
    let target = total * 10f64.powf(-drop_db / 10.0);
    (0..tail.len())
        .find(|&i| corrected(i) <= target)
        .map(|i| i as f64 / fs)
}

fn overlap_warning(inputs: Inputs<'_>, design: &SweepDesign) -> Option<String> {
    let fs = design.fs();
    let noise = inputs.noise_region.map_or(0.0, |(a, b)| {
        let seg = &inputs.h[a..b.max(a)];
        seg.iter().map(|v| v * v).sum::<f64>() / seg.len().max(1) as f64
    });
    let peak = (inputs.ipeak as isize - inputs.linear_start).max(0) as usize;
    let t = decay_time(inputs.linear_ir, peak, noise, OVERLAP_DECAY_DB, fs)?;
    let room = design.harmonic_offset_s(2) - inputs.linear_pre as f64 / fs;
    if t <= room {
        return None;
    }
    // L must grow so that L·ln 2 covers the decay and the pre-window
    let l_needed = (t + inputs.linear_pre as f64 / fs) / std::f64::consts::LN_2;
    let length = l_needed * (design.params.end_hz / design.params.start_hz).ln();
    Some(format!(
        "the response takes {t:.2} s to decay by {OVERLAP_DECAY_DB:.0} dB but the 2nd harmonic arrives only {:.2} s ahead of it: the harmonic responses run into the linear one and into each other; use a sweep of at least --length {:.0} s",
        design.harmonic_offset_s(2),
        length.ceil()
    ))
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::signal::sweep::SweepParams;

    #[test]
    fn windows_tile_without_overlap_and_sit_at_l_ln_n() {
        let d = SweepParams::default().design().unwrap();
        let fs = d.fs();
        let ipeak = 1000;
        let w = harmonic_windows(&d, ipeak, 4800, 9);
        assert_eq!(w.len(), 8);
        assert_eq!(w[0].start + w[0].len as isize, ipeak as isize - 4800);
        for pair in w.windows(2) {
            assert_eq!(pair[1].start + pair[1].len as isize, pair[0].start);
        }
        for x in &w {
            // Farina 2000: order n arrives L·ln n before the linear response
            let arrival = x.start + x.pre as isize;
            let want = ipeak as f64 - d.harmonic_offset_s(x.order) * fs;
            assert!((arrival as f64 - want).abs() <= 0.5);
        }
    }

    #[test]
    fn decay_time_of_an_exponential_matches_closed_form() {
        // closed form: energy e^(−13.8155·t/T) falls 30 dB in T/2
        let fs = 48_000.0;
        let t60 = 0.4;
        let ir: Vec<f64> = (0..48_000)
            .map(|i| (-6.907_755 * i as f64 / fs / t60).exp())
            .collect();
        let t = decay_time(&ir, 0, 0.0, 30.0, fs).unwrap();
        assert!((t - t60 / 2.0).abs() < 0.005, "{t}");
    }
}
