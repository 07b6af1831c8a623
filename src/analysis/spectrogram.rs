//! The spectrogram of an impulse response: a multi-resolution short-time
//! Fourier transform (Hann windows whose length suits each row's
//! frequency, overlapping frames; common practice) from just before the
//! direct sound to where the decay meets the noise, read on the
//! 48-points-per-octave log grid. It shows how a room's decay runs in
//! time and frequency: modes as long ridges at low frequencies, the faster
//! decay of the highs.
//!
//! Conventions: time zero is the direct sound (where the broadband squared
//! response first reaches −20 dB re its maximum, as in the room analysis,
//! ISO 3382-1); a frame's time is the centre of its window; levels are
//! 10·lg of the frame's power in each 1/48-octave row divided by the
//! window's energy, in dB re the largest of all, floored. A window of
//! length W smears each event over ±W/2 in time and resolves frequencies
//! about 2/W apart (Hann main lobe; F. J. Harris, Proc. IEEE 66(1), 1978):
//! with one length for all rows either the bass is a blur in frequency or
//! the highs in time, so each row takes a window of a fixed number of its
//! own periods (a constant relative resolution, as a wavelet analysis
//! has). A transient (the direct sound) then reads higher in the short
//! windows than in the long ones, by the ratio of their lengths; the
//! decay, a noise-like signal, reads the same.

use crate::analysis::decay;
use crate::analysis::smoothing::{self, Smoothing};
use crate::signal::fft;
use crate::signal::window::Window;

/// Power spectra |X_m\[k\]|² (k = 0..=fft_len/2) of `frames` frames of `x`:
/// frame m is x\[first + m·hop ..\] times `window`, zero-padded to
/// `fft_len` (at least the window's length). Samples outside `x` count as
/// zero. Unnormalised like [`fft::rfft`]: a sinusoid of amplitude A at a bin
/// centre gives |X| = A·Σw/2, i.e. A·N·g/2 with g the window's coherent
/// gain (0.5 for Hann; F. J. Harris 1978).
pub fn stft_power(
    x: &[f64],
    window: &[f64],
    first: isize,
    hop: usize,
    frames: usize,
    fft_len: usize,
) -> Vec<Vec<f64>> {
    assert!(fft_len >= window.len(), "fft_len must hold the window");
    let n = x.len() as isize;
    let mut frame = vec![0.0; window.len()];
    (0..frames)
        .map(|m| {
            let start = first + (m * hop) as isize;
            for (i, (f, w)) in frame.iter_mut().zip(window).enumerate() {
                let j = start + i as isize;
                *f = if (0..n).contains(&j) {
                    x[j as usize] * w
                } else {
                    0.0
                };
            }
            fft::rfft(&frame, fft_len)
                .iter()
                .map(|c| c.norm_sqr())
                .collect()
        })
        .collect()
}

/// Settings of a spectrogram.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct SpectrogramConfig {
    /// Periods of each row's frequency its window holds: the window at f
    /// is `cycles / f` long (between `shortest_s` and `longest_s`), so
    /// every row resolves about the same fraction of an octave (a Hann
    /// window of W s resolves about 2/W Hz: 12 cycles give f/6, about a
    /// quarter of an octave) and rings for the same number of periods.
    pub cycles: f64,
    /// The shortest window, s (the highs: time resolution bounded here).
    pub shortest_s: f64,
    /// The longest window, s (the lowest bass: a room's modes resolved).
    pub longest_s: f64,
    /// Step between the picture's columns, s.
    pub hop_s: f64,
    /// How long before the direct sound the picture starts, s.
    pub lead_s: f64,
    /// Lowest level kept, dB re the maximum.
    pub floor_db: f64,
}

impl Default for SpectrogramConfig {
    /// 12 cycles per window, from 5 ms (above 2.4 kHz) to 320 ms (below
    /// 38 Hz, resolving about 6 Hz: a small room's lowest modes), columns
    /// every 5 ms from 20 ms before the direct sound, an 80 dB range (our
    /// choices).
    fn default() -> Self {
        SpectrogramConfig {
            cycles: 12.0,
            shortest_s: 0.005,
            longest_s: 0.32,
            hop_s: 0.005,
            lead_s: 0.02,
            floor_db: -80.0,
        }
    }
}

/// A spectrogram on the log grid.
#[derive(Debug, Clone, PartialEq)]
pub struct Spectrogram {
    /// Centre of each column, s after the direct sound.
    pub time_s: Vec<f64>,
    /// The rows: the log grid over the band, Hz.
    pub frequency_hz: Vec<f64>,
    /// `level_db[m][j]`: column m, row j, dB re the largest value, at
    /// least `floor_db`.
    pub level_db: Vec<Vec<f64>>,
    /// The window each row was analysed with, s (`cycles / f` within the
    /// shortest and longest window).
    pub window_s: Vec<f64>,
    /// Periods of its frequency each row's window holds.
    pub cycles: f64,
    /// Step between columns, s.
    pub hop_s: f64,
    /// The floor of `level_db`, dB.
    pub floor_db: f64,
    /// Where the broadband decay meets the noise (Lundeby's crosspoint), s
    /// after the direct sound; `None` when it was not found, and the
    /// columns then run to the end of the response.
    pub noise_s: Option<f64>,
}

/// One resolution of the multi-resolution analysis: Hann windows of one
/// length, each frame's power per row scaled by the window's energy Σw²
/// (so a steady noise reads the same at every window length and the
/// resolutions join without a step), sampled at `hop` samples.
struct Level {
    /// Frame m's centre, in samples after the direct sound.
    first_centre: f64,
    hop: f64,
    /// `rows[m][r]`: frame m, the r-th row this level serves.
    rows: Vec<Vec<f64>>,
}

impl Level {
    /// Row r's power at `t` samples after the direct sound, interpolated
    /// linearly between frames (clamped at the ends).
    fn at(&self, r: usize, t: f64) -> f64 {
        let u = ((t - self.first_centre) / self.hop).max(0.0);
        let m = (u.floor() as usize).min(self.rows.len() - 1);
        let m1 = (m + 1).min(self.rows.len() - 1);
        let w = (u - m as f64).clamp(0.0, 1.0);
        self.rows[m][r] * (1.0 - w) + self.rows[m1][r] * w
    }
}

/// The spectrogram of the impulse response `ir` (sample rate `fs`) over
/// the band (f1, f2), from `lead_s` before the direct sound to where the
/// broadband decay meets the noise, with a window per row that suits its
/// frequency: `cycles / f` long, so the bass is resolved in frequency
/// (long windows) and the highs in time (short ones).
///
/// Done as a multi-resolution short-time Fourier transform (common
/// practice): Hann windows of the shortest length and each doubling up to
/// the longest; a row whose ideal length falls between two of them mixes
/// their powers by where it lies on the log scale of lengths, so the
/// picture has no seams.
pub fn spectrogram(ir: &[f64], fs: f64, band: (f64, f64), c: SpectrogramConfig) -> Spectrogram {
    let p2: Vec<f64> = ir.iter().map(|v| v * v).collect();
    let onset = if p2.iter().any(|&v| v > 0.0) {
        decay::onset(&p2, fs).index
    } else {
        0
    };
    // the decay meets the noise at Lundeby's crosspoint (10 ms intervals
    // to start with, as for the bands at 1 kHz and above)
    let cross = decay::lundeby(&p2[onset..], fs, 0.01).map(|t| t.crosspoint);
    let end = cross.unwrap_or(ir.len() - onset) as f64;
    let grid = smoothing::log_grid(band.0, band.1.min(0.5 * fs));
    let shortest = c.shortest_s.max(16.0 / fs);
    let longest = c.longest_s.max(shortest);
    let levels_n = (longest / shortest).log2().ceil().max(0.0) as usize + 1;
    let window_s: Vec<f64> = grid
        .iter()
        .map(|f| (c.cycles / f).clamp(shortest, longest))
        .collect();
    // row j mixes level k (weight 1 − t) and k + 1 (weight t)
    let place: Vec<(usize, f64)> = window_s
        .iter()
        .map(|w| {
            let u = (w / shortest).log2().clamp(0.0, (levels_n - 1) as f64);
            let k = (u.floor() as usize).min(levels_n.saturating_sub(2));
            (k, if levels_n == 1 { 0.0 } else { u - k as f64 })
        })
        .collect();
    let hop = (c.hop_s * fs).max(1.0);
    let t_first = -c.lead_s * fs;
    let columns = ((end - t_first) / hop).floor().max(0.0) as usize + 1;
    // each level: its rows (those that take any of it) and their powers
    let mut levels: Vec<Option<(Vec<usize>, Level)>> = Vec::with_capacity(levels_n);
    for k in 0..levels_n {
        let served: Vec<usize> = (0..grid.len())
            .filter(|&j| {
                let (kj, t) = place[j];
                (kj == k && t < 1.0) || (kj + 1 == k && t > 0.0)
            })
            .collect();
        if served.is_empty() {
            levels.push(None);
            continue;
        }
        let w_len = (((shortest * 2f64.powi(k as i32)) * fs / 2.0).round() as usize * 2).max(8);
        let window = Window::Hann.make(w_len);
        let energy: f64 = window.iter().map(|w| w * w).sum();
        let padding = if w_len < 4096 { 4 } else { 2 };
        let fft_len = fft::fast_len(w_len * padding);
        let df = fs / fft_len as f64;
        // frames every eighth of a window, but no closer than the columns
        // need (at most half a window apart, so no event falls between)
        let level_hop = ((w_len / 2) as f64)
            .min(hop)
            .max((w_len / 8) as f64)
            .max(1.0)
            .round() as usize;
        // frames whose centres run from one step before the first column
        // to one after the last
        let first_centre = t_first - level_hop as f64;
        let frames = ((end - first_centre) / level_hop as f64).ceil().max(0.0) as usize + 2;
        let first = onset as isize + first_centre.round() as isize - (w_len / 2) as isize;
        let power = stft_power(ir, &window, first, level_hop, frames, fft_len);
        let rows_f: Vec<f64> = served.iter().map(|&j| grid[j]).collect();
        // only the bins up to the top row's 1/48 octave (and two more)
        // enter its rows: the long windows serve the bass alone
        let top = rows_f
            .last()
            .map_or(0.0, |f| Smoothing::Fraction(48).band(*f).1);
        let bins = ((top / df).ceil() as usize + 2).min(fft_len / 2 + 1);
        let rows = power
            .iter()
            .map(|p| {
                smoothing::smooth_power(&p[..bins], df, &rows_f, Smoothing::Fraction(48))
                    .into_iter()
                    .map(|v| v / energy)
                    .collect()
            })
            .collect();
        levels.push(Some((
            served,
            Level {
                first_centre: first_centre.round(),
                hop: level_hop as f64,
                rows,
            },
        )));
    }
    // row j of level k sits at position r of that level's served rows
    let slot = |k: usize, j: usize| -> Option<(&Level, usize)> {
        let (served, level) = levels.get(k)?.as_ref()?;
        served.binary_search(&j).ok().map(|r| (level, r))
    };
    let time_samples: Vec<f64> = (0..columns).map(|m| t_first + m as f64 * hop).collect();
    let power: Vec<Vec<f64>> = time_samples
        .iter()
        .map(|&t| {
            (0..grid.len())
                .map(|j| {
                    let (k, w) = place[j];
                    let a = slot(k, j).map_or(0.0, |(l, r)| l.at(r, t));
                    let b = if w > 0.0 {
                        slot(k + 1, j).map_or(0.0, |(l, r)| l.at(r, t))
                    } else {
                        0.0
                    };
                    a * (1.0 - w) + b * w
                })
                .collect()
        })
        .collect();
    let max = power
        .iter()
        .flatten()
        .cloned()
        .fold(0.0f64, f64::max)
        .max(f64::MIN_POSITIVE);
    let level_db = power
        .iter()
        .map(|r| {
            r.iter()
                .map(|&p| (10.0 * (p / max).max(1e-300).log10()).max(c.floor_db))
                .collect()
        })
        .collect();
    Spectrogram {
        time_s: time_samples.iter().map(|t| t / fs).collect(),
        frequency_hz: grid,
        level_db,
        window_s,
        cycles: c.cycles,
        hop_s: hop / fs,
        floor_db: c.floor_db,
        noise_s: cross.map(|k| k as f64 / fs),
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use rustfft::num_complex::Complex;
    use std::f64::consts::TAU;

    fn lcg(seed: &mut u64) -> f64 {
        // deterministic test input, common practice
        *seed = seed
            .wrapping_mul(6364136223846793005)
            .wrapping_add(1442695040888963407);
        ((*seed >> 11) as f64 / (1u64 << 53) as f64) - 0.5
    }

    #[test]
    fn a_frame_matches_a_direct_dft() {
        // naive reference: the DFT sum of one windowed frame at one bin,
        // for a frame inside the signal and one reaching before its start
        let mut s = 5;
        let x: Vec<f64> = (0..1000).map(|_| lcg(&mut s)).collect();
        let w = Window::Hann.make(64);
        let n = 256;
        let p = stft_power(&x, &w, -40, 16, 20, n);
        assert_eq!(p.len(), 20);
        assert_eq!(p[0].len(), n / 2 + 1);
        for (m, k) in [(0usize, 3usize), (1, 17), (9, 40), (19, 128)] {
            let start = -40 + 16 * m as isize;
            let mut want = Complex::new(0.0, 0.0);
            for (i, wi) in w.iter().enumerate() {
                let j = start + i as isize;
                let v = if (0..1000).contains(&j) {
                    x[j as usize]
                } else {
                    0.0
                };
                want += Complex::from_polar(v * wi, -TAU * (k * i) as f64 / n as f64);
            }
            let got = p[m][k];
            assert!(
                (got - want.norm_sqr()).abs() < 1e-9 * want.norm_sqr().max(1.0),
                "frame {m}, bin {k}: {got} vs {}",
                want.norm_sqr()
            );
        }
    }

    #[test]
    fn a_tone_lands_in_its_bin_at_the_coherent_gain() {
        // a sine of amplitude A at bin k0 of an N-point Hann window: the
        // largest bin is k0 and 2|X|/N = A·0.5, Hann's coherent gain
        // (F. J. Harris 1978; common practice)
        let n = 480;
        let (a, k0) = (0.3, 25);
        let x: Vec<f64> = (0..4800)
            .map(|i| a * (TAU * k0 as f64 * i as f64 / n as f64 + 0.4).sin())
            .collect();
        let p = stft_power(&x, &Window::Hann.make(n), 0, 120, 10, n);
        for frame in &p {
            let (k, &pk) = frame
                .iter()
                .enumerate()
                .max_by(|a, b| a.1.total_cmp(b.1))
                .unwrap();
            assert_eq!(k, k0);
            let level = 2.0 * pk.sqrt() / n as f64;
            assert!((level - a * 0.5).abs() < 1e-9, "{level}");
            // the neighbours are 6.02 dB down (Hann: half the peak at ±1 bin)
            let side = 2.0 * frame[k0 + 1].sqrt() / n as f64;
            assert!((side - a * 0.25).abs() < 1e-9, "{side}");
        }
    }

    #[test]
    fn a_decaying_tone_falls_at_its_rate_and_the_noise_is_found() {
        // e^(−a·t)·sin(2π·1 kHz·t): energy falls 20·lg(e)·a dB/s at 1 kHz
        // whatever the window (windowing a shifted exponential scales it;
        // closed form). T = 0.5 s → 120 dB/s. White noise 70 dB below the
        // start's mean square meets the decay at 70/120 s (closed form of
        // the crosspoint of an exponential with a flat floor).
        let fs = 48_000.0;
        let decay_rate = 6.0 * std::f64::consts::LN_10 / 0.5; // 60 dB in 0.5 s
        let mut s = 11;
        let sigma = (0.5f64).sqrt() * 10f64.powf(-70.0 / 20.0);
        let x: Vec<f64> = (0..(1.5 * fs) as usize)
            .map(|i| {
                let t = i as f64 / fs;
                (-0.5 * decay_rate * t).exp() * (TAU * 1000.0 * t).sin()
                    + sigma * 12f64.sqrt() * lcg(&mut s)
            })
            .collect();
        let sp = spectrogram(&x, fs, (100.0, 10_000.0), SpectrogramConfig::default());
        let noise = sp.noise_s.expect("the crosspoint is found");
        assert!((noise - 70.0 / 120.0).abs() < 0.06, "crosspoint {noise}");
        // the loudest point: the 1 kHz row near t = 0
        let (m, j) = (0..sp.time_s.len())
            .flat_map(|m| (0..sp.frequency_hz.len()).map(move |j| (m, j)))
            .max_by(|a, b| sp.level_db[a.0][a.1].total_cmp(&sp.level_db[b.0][b.1]))
            .unwrap();
        assert!((sp.frequency_hz[j] / 1000.0).log2().abs() < 1.0 / 48.0);
        assert!(sp.time_s[m].abs() < 0.02, "{}", sp.time_s[m]);
        assert_eq!(sp.level_db[m][j], 0.0);
        // that row between 0.1 and 0.3 s: slope by least squares
        let pts = sp
            .time_s
            .iter()
            .zip(&sp.level_db)
            .filter(|(t, _)| **t >= 0.1 && **t <= 0.3)
            .map(|(t, l)| (*t, l[j]));
        let (_, slope) = decay::line_fit(pts).unwrap();
        assert!((slope + 120.0).abs() < 1.0, "{slope} dB/s");
        // the picture starts 20 ms before the direct sound
        assert!((sp.time_s[0] + 0.02).abs() < 1e-9, "{}", sp.time_s[0]);
        assert!(
            sp.level_db
                .iter()
                .flatten()
                .all(|&l| (-80.0..=0.0).contains(&l))
        );
    }

    /// The power mean of rows `rows` over columns from `t0` to `t1` s, dB
    /// (a mean of dB values would be biased by each row's scatter).
    fn mean_db(sp: &Spectrogram, rows: std::ops::Range<usize>, t0: f64, t1: f64) -> f64 {
        let cols: Vec<usize> = (0..sp.time_s.len())
            .filter(|&m| sp.time_s[m] >= t0 && sp.time_s[m] <= t1)
            .collect();
        let n = (cols.len() * rows.len()) as f64;
        let p = cols
            .iter()
            .flat_map(|&m| {
                rows.clone()
                    .map(move |j| 10f64.powf(sp.level_db[m][j] / 10.0))
            })
            .sum::<f64>()
            / n;
        10.0 * p.log10()
    }

    #[test]
    fn a_steady_noise_reads_the_same_at_every_window_length() {
        // white noise has the same power per hertz everywhere; scaled by
        // each window's energy, every resolution reads it alike, so the
        // picture has no step where the window length changes (closed
        // form: E|X[k]|² = σ²·Σw² for white noise of variance σ²)
        let fs = 48_000.0;
        let mut seed = 3;
        let x: Vec<f64> = (0..(8.0 * fs) as usize).map(|_| lcg(&mut seed)).collect();
        let sp = spectrogram(&x, fs, (30.0, 16_000.0), SpectrogramConfig::default());
        assert!(sp.noise_s.is_none(), "no decay, no crosspoint");
        // one-third-octave groups of 16 rows, averaged over 7 s
        let groups: Vec<f64> = (0..sp.frequency_hz.len() / 16)
            .map(|g| mean_db(&sp, 16 * g..16 * g + 16, 0.4, 7.4))
            .collect();
        let mut sorted = groups.clone();
        sorted.sort_by(f64::total_cmp);
        let median = sorted[sorted.len() / 2];
        for (g, l) in groups.iter().enumerate() {
            assert!(
                (l - median).abs() < 1.0,
                "group at {:.0} Hz: {l:.2} dB vs {median:.2} dB",
                sp.frequency_hz[16 * g]
            );
        }
        // the windows run from 320 ms in the bass to 5 ms in the highs
        assert!((sp.window_s[0] - 0.32).abs() < 1e-12);
        assert!((sp.window_s.last().unwrap() - 0.005).abs() < 1e-12);
        let at_100 = sp.frequency_hz.iter().position(|&f| f >= 100.0).unwrap();
        assert!((sp.window_s[at_100] - 0.12).abs() < 0.002);
    }

    #[test]
    fn two_modes_ten_hertz_apart_in_the_bass_are_two_ridges() {
        // decaying tones at 40 and 50 Hz (T = 1.5 s): the 320 ms window
        // resolves about 6 Hz, so 45 Hz between them lies in a dip; a
        // single 40 ms window (25 Hz wide main lobe) would merge them
        let fs = 48_000.0;
        let rate = 6.0 * std::f64::consts::LN_10 / 1.5;
        let x: Vec<f64> = (0..(1.5 * fs) as usize)
            .map(|i| {
                let t = i as f64 / fs;
                (-0.5 * rate * t).exp() * ((TAU * 40.0 * t).sin() + (TAU * 50.0 * t).sin())
                    + if i == 0 { 1.0 } else { 0.0 }
            })
            .collect();
        let dips = |c: SpectrogramConfig| {
            let sp = spectrogram(&x, fs, (20.0, 1000.0), c);
            let row = |f: f64| sp.frequency_hz.iter().position(|&g| g >= f).unwrap();
            let level = |f: f64| mean_db(&sp, row(f)..row(f) + 1, 0.2, 0.6);
            let (a, mid, b) = (level(40.0), level(45.0), level(50.0));
            (a - mid).min(b - mid)
        };
        let d = dips(SpectrogramConfig::default());
        assert!(d > 5.0, "the dip between the modes is {d:.1} dB");
        let one_length = SpectrogramConfig {
            shortest_s: 0.04,
            longest_s: 0.04,
            ..SpectrogramConfig::default()
        };
        let d = dips(one_length);
        assert!(
            d < 2.0,
            "with 40 ms windows only, the modes merge ({d:.1} dB)"
        );
    }
}
