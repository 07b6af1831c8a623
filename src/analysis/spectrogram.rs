//! The spectrogram of an impulse response: short-time Fourier transform
//! (Hann windows, overlapping frames; common practice) from just before the
//! direct sound to where the decay meets the noise, read on the
//! 48-points-per-octave log grid. It shows how a room's decay runs in
//! time and frequency: modes as long ridges at low frequencies, the faster
//! decay of the highs.
//!
//! Conventions: time zero is the direct sound (where the broadband squared
//! response first reaches −20 dB re its maximum, as in the room analysis,
//! ISO 3382-1); a frame's time is the centre of its window; levels are
//! 10·lg of the frame's power in each 1/48-octave row, in dB re the
//! largest of all, floored. A window of length W smears each event over
//! ±W/2 in time and resolves frequencies about 2/W apart (Hann main lobe;
//! F. J. Harris, Proc. IEEE 66(1), 1978), so the lowest octave is coarse.

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
    /// Length of each Hann window, s.
    pub window_s: f64,
    /// Step between frames as a fraction of the window.
    pub hop_fraction: f64,
    /// Zero padding: the FFT is at least this many windows long.
    pub padding: usize,
    /// Lowest level kept, dB re the maximum.
    pub floor_db: f64,
}

impl Default for SpectrogramConfig {
    /// 40 ms windows (about 50 Hz resolved: enough for a room's modes
    /// above 100 Hz, and the decay still sampled finely), a step of 1/8
    /// window, 4 times zero padding, an 80 dB range (our choices).
    fn default() -> Self {
        SpectrogramConfig {
            window_s: 0.04,
            hop_fraction: 0.125,
            padding: 4,
            floor_db: -80.0,
        }
    }
}

/// A spectrogram on the log grid.
#[derive(Debug, Clone, PartialEq)]
pub struct Spectrogram {
    /// Centre of each frame's window, s after the direct sound.
    pub time_s: Vec<f64>,
    /// The rows: the log grid over the band, Hz.
    pub frequency_hz: Vec<f64>,
    /// `level_db[m][j]`: frame m, row j, dB re the largest value, at
    /// least `floor_db`.
    pub level_db: Vec<Vec<f64>>,
    /// Window length, s.
    pub window_s: f64,
    /// Step between frames, s.
    pub hop_s: f64,
    /// The floor of `level_db`, dB.
    pub floor_db: f64,
    /// Where the broadband decay meets the noise (Lundeby's crosspoint), s
    /// after the direct sound; `None` when it was not found, and the frames
    /// then run to the end of the response.
    pub noise_s: Option<f64>,
}

/// The spectrogram of the impulse response `ir` (sample rate `fs`) over
/// the band (f1, f2): frames from half a window before the direct sound
/// to where the broadband decay meets the noise.
pub fn spectrogram(ir: &[f64], fs: f64, band: (f64, f64), c: SpectrogramConfig) -> Spectrogram {
    let w_len = ((c.window_s * fs / 2.0).round() as usize * 2).max(8);
    let hop = ((w_len as f64 * c.hop_fraction).round() as usize).max(1);
    let window = Window::Hann.make(w_len);
    let fft_len = fft::fast_len(w_len * c.padding.max(1));
    let df = fs / fft_len as f64;
    let p2: Vec<f64> = ir.iter().map(|v| v * v).collect();
    let onset = if p2.iter().any(|&v| v > 0.0) {
        decay::onset(&p2, fs).index
    } else {
        0
    };
    // the decay meets the noise at Lundeby's crosspoint (10 ms intervals
    // to start with, as for the bands at 1 kHz and above)
    let cross = decay::lundeby(&p2[onset..], fs, 0.01).map(|t| t.crosspoint);
    let end = onset + cross.unwrap_or(ir.len() - onset);
    // frame m's centre is at first + m·hop + w_len/2; the first sits half
    // a window before the direct sound, the last at `end`
    let first = onset as isize - w_len as isize;
    let frames = (end + w_len / 2 - onset) / hop + 1;
    let power = stft_power(ir, &window, first, hop, frames, fft_len);
    let grid = smoothing::log_grid(band.0, band.1.min(0.5 * fs));
    // each row averages the power over its own 1/48 octave (the grid's
    // spacing), which becomes interpolation where bins are sparser
    let rows: Vec<Vec<f64>> = power
        .iter()
        .map(|p| smoothing::smooth_power(p, df, &grid, Smoothing::Fraction(48)))
        .collect();
    let max = rows
        .iter()
        .flatten()
        .cloned()
        .fold(0.0f64, f64::max)
        .max(f64::MIN_POSITIVE);
    let level_db = rows
        .iter()
        .map(|r| {
            r.iter()
                .map(|&p| (10.0 * (p / max).max(1e-300).log10()).max(c.floor_db))
                .collect()
        })
        .collect();
    let time_s = (0..frames)
        .map(|m| (first + (m * hop + w_len / 2) as isize - onset as isize) as f64 / fs)
        .collect();
    Spectrogram {
        time_s,
        frequency_hz: grid,
        level_db,
        window_s: w_len as f64 / fs,
        hop_s: hop as f64 / fs,
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
        // the picture starts half a window before the direct sound
        assert!((sp.time_s[0] + 0.02).abs() < 1e-9, "{}", sp.time_s[0]);
        assert!(
            sp.level_db
                .iter()
                .flatten()
                .all(|&l| (-80.0..=0.0).contains(&l))
        );
    }
}
