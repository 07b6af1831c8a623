//! SPL calibration from a sound calibrator's tone (commonly 94 dB SPL,
//! 1 Pa, or 114 dB at 1 kHz; common practice).
//!
//! The tone is found as the strongest spectral line; its RMS is the power
//! within ±1/6 octave of it (Hann-windowed spectrum, so broadband noise
//! outside hardly counts). Sensitivity is stated as Pa (RMS) per unit RMS
//! of the recorded signal (full scale ±1): p = x·pa_per_fs.

use serde::{Deserialize, Serialize};

use crate::error::{Error, Result};
use crate::signal::fft;
use crate::signal::window::Window;

/// Reference pressure of dB SPL, 20 µPa.
pub const P_REF_PA: f64 = 20e-6;

/// A microphone channel's calibration.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Calibration {
    /// Always "gliss calibration".
    pub format: String,
    /// Layout version.
    pub schema_version: u32,
    /// The calibrator's level, dB SPL.
    pub level_db_spl: f64,
    /// The tone's frequency as found, Hz.
    pub tone_hz: f64,
    /// The tone's RMS in the recording, full scale = 1.
    pub tone_rms_fs: f64,
    /// Pa (RMS) per unit RMS of the recording.
    pub pa_per_fs: f64,
    /// Sensitivity as the dB SPL that a full-scale sine (0 dBFS) would read.
    pub full_scale_db_spl: f64,
}

/// Finds the calibrator's tone in `x` (sample rate `fs`) and states the
/// sensitivity for a calibrator of `level_db_spl`.
pub fn calibrate(x: &[f64], fs: f64, level_db_spl: f64) -> Result<Calibration> {
    if !(60.0..=150.0).contains(&level_db_spl) {
        return Err(Error::parameter(format!(
            "--level {level_db_spl} dB SPL is not a calibrator's level; calibrators give 94 or 114 dB SPL"
        )));
    }
    // skip the first and last tenth (the calibrator being seated)
    let a = x.len() / 10;
    let seg = &x[a..x.len() - a];
    if (seg.len() as f64) < 0.25 * fs {
        return Err(Error::input(
            "the calibrator recording is shorter than a third of a second; record at least 2 s of the tone",
        ));
    }
    let w = Window::Hann.make(seg.len());
    let energy: f64 = w.iter().map(|v| v * v).sum();
    let xw: Vec<f64> = seg.iter().zip(&w).map(|(s, w)| s * w).collect();
    let n = fft::fast_len(seg.len());
    let spec = fft::rfft(&xw, n);
    let df = fs / n as f64;
    let power: Vec<f64> = spec.iter().map(|c| c.norm_sqr()).collect();
    let (k, _) = power
        .iter()
        .enumerate()
        .skip((20.0 / df) as usize)
        .fold((0, 0.0), |m, (i, &p)| if p > m.1 { (i, p) } else { m });
    let tone_hz = k as f64 * df;
    let lo = ((tone_hz * 2f64.powf(-1.0 / 6.0)) / df) as usize;
    let hi = (((tone_hz * 2f64.powf(1.0 / 6.0)) / df) as usize).min(power.len() - 1);
    // Parseval with the window: Σ|X|² (both halves) / (n·Σw²) = mean square
    let band: f64 = power[lo..=hi].iter().sum::<f64>() * 2.0;
    let total: f64 = power.iter().sum::<f64>() * 2.0;
    let tone_rms_fs = (band / (n as f64 * energy)).sqrt();
    if tone_rms_fs < 1e-5 || band < 0.5 * total {
        return Err(Error::input(format!(
            "no clear calibrator tone in the recording (the strongest line, {tone_hz:.0} Hz, carries {:.0} % of the power); check the channel and that the calibrator is on",
            100.0 * band / total.max(f64::MIN_POSITIVE)
        )));
    }
    check_tone(seg, fs, tone_hz, &power, df)?;
    let p_rms = P_REF_PA * 10f64.powf(level_db_spl / 20.0);
    let pa_per_fs = p_rms / tone_rms_fs;
    Ok(Calibration {
        format: "gliss calibration".into(),
        schema_version: 1,
        level_db_spl,
        tone_hz,
        tone_rms_fs,
        pa_per_fs,
        full_scale_db_spl: 20.0 * (pa_per_fs / std::f64::consts::SQRT_2 / P_REF_PA).log10(),
    })
}

/// [`calibrate`] on channel `channel` (counted from 0) of a recording;
/// when that channel holds no usable tone but another one does (the
/// microphone on another input), the refusal names it and says to give
/// `--channel` (counted from 1).
pub fn calibrate_channel(
    channels: &[Vec<f64>],
    channel: usize,
    fs: f64,
    level_db_spl: f64,
) -> Result<Calibration> {
    let one = |x: &[f64]| {
        crate::analysis::check_signal(x, "the calibrator recording")
            .and_then(|_| calibrate(x, fs, level_db_spl))
    };
    let err = match one(&channels[channel]) {
        Ok(c) => return Ok(c),
        Err(e) => e,
    };
    if err.kind() != crate::error::ErrorKind::InvalidInput {
        return Err(err);
    }
    let other = channels
        .iter()
        .enumerate()
        .filter(|(k, _)| *k != channel)
        .find_map(|(k, x)| one(x).ok().map(|c| (k, c)));
    match other {
        Some((k, c)) => Err(Error::input(format!(
            "channel {} holds no usable calibrator tone ({}), but channel {} holds a clear {:.0} Hz tone at {:.1} dBFS: give --channel {}",
            channel + 1,
            err.message(),
            k + 1,
            c.tone_hz,
            20.0 * (c.tone_rms_fs * std::f64::consts::SQRT_2).log10(),
            k + 1
        ))),
        None => Err(err),
    }
}

/// The most harmonic distortion a calibrator's tone may carry, %:
/// calibrators are specified at 1 to 2 % or less (common practice), so
/// more means the input overloads or the calibrator is faulty.
pub const MAX_TONE_THD_PERCENT: f64 = 3.0;
/// The most the tone's level may swing over the recording (200 ms blocks,
/// max − min), dB: a seated calibrator holds its level to about 0.1 dB.
pub const MAX_TONE_SWING_DB: f64 = 1.0;
/// The tones calibrators give, Hz: 1 kHz (sound calibrators) and 250 Hz
/// (pistonphones); common practice.
pub const CALIBRATOR_TONES_HZ: [f64; 2] = [250.0, 1000.0];

/// Refuses a tone that cannot calibrate: clipped, distorted, unsteady or
/// at a frequency no calibrator gives, each with the measured figure.
fn check_tone(seg: &[f64], fs: f64, tone_hz: f64, power: &[f64], df: f64) -> Result<()> {
    let clipped = seg
        .iter()
        .filter(|v| v.abs() >= crate::analysis::CLIP_LEVEL)
        .count();
    if clipped > 0 {
        let peak = seg.iter().fold(0.0f64, |m, v| m.max(v.abs()));
        return Err(Error::input(format!(
            "the calibrator's tone clips ({clipped} samples at or above -0.1 dBFS, peak {:.2} dBFS); lower the input gain and record the tone again",
            20.0 * peak.log10()
        )));
    }
    if !CALIBRATOR_TONES_HZ
        .iter()
        .any(|&f| (tone_hz / f - 1.0).abs() < 0.05)
    {
        return Err(Error::input(format!(
            "the tone is at {tone_hz:.0} Hz, and calibrators give 1 kHz (or 250 Hz for a pistonphone); check that the recording is of the calibrator"
        )));
    }
    let band_power = |f: f64| -> f64 {
        let lo = ((f * 2f64.powf(-1.0 / 6.0)) / df) as usize;
        let hi = (((f * 2f64.powf(1.0 / 6.0)) / df) as usize).min(power.len() - 1);
        if lo > hi {
            0.0
        } else {
            power[lo..=hi].iter().sum()
        }
    };
    let fundamental = band_power(tone_hz);
    let harmonics: f64 = (2..=5)
        .map(|h| f64::from(h) * tone_hz)
        .filter(|&f| f * 2f64.powf(1.0 / 6.0) < fs / 2.0)
        .map(band_power)
        .sum();
    let thd = 100.0 * (harmonics / fundamental).sqrt();
    if thd > MAX_TONE_THD_PERCENT {
        return Err(Error::input(format!(
            "the calibrator's tone is distorted (THD {thd:.1} %, more than {MAX_TONE_THD_PERCENT} %): the input overloads or the calibrator is faulty; lower the input gain and record it again"
        )));
    }
    let block = ((0.2 * fs) as usize).max(1);
    let levels: Vec<f64> = seg
        .chunks_exact(block)
        .map(|c| 10.0 * (c.iter().map(|v| v * v).sum::<f64>() / c.len() as f64).log10())
        .collect();
    let (lo, hi) = levels
        .iter()
        .fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), &l| {
            (a.min(l), b.max(l))
        });
    if levels.len() >= 2 && hi - lo > MAX_TONE_SWING_DB {
        return Err(Error::input(format!(
            "the calibrator's tone is unsteady (its level swings {:.1} dB over the recording, more than {MAX_TONE_SWING_DB} dB): seat the calibrator firmly on the microphone and record it again",
            hi - lo
        )));
    }
    Ok(())
}

impl Calibration {
    /// dB SPL at the microphone of a response level `magnitude_db` (re the
    /// sweep as written) for a sweep of peak `level_dbfs`: the sweep's sine
    /// has RMS 10^(level/20)/√2 of full scale.
    pub fn spl_db(&self, magnitude_db: f64, level_dbfs: f64) -> f64 {
        let drive_rms = 10f64.powf(level_dbfs / 20.0) / std::f64::consts::SQRT_2;
        magnitude_db + 20.0 * (drive_rms * self.pa_per_fs / P_REF_PA).log10()
    }

    /// [`Calibration::spl_db`] of every point of a response.
    pub fn spl_curve(&self, magnitude_db: &[f64], level_dbfs: f64) -> Vec<f64> {
        magnitude_db
            .iter()
            .map(|&m| self.spl_db(m, level_dbfs))
            .collect()
    }
}

/// The reference drive of a loudspeaker's sensitivity: 2.83 V RMS, 1 W
/// into 8 Ω (the trade's usual reference; common practice).
pub const REFERENCE_VOLTS: f64 = 2.83;

/// The reference distance of a sensitivity, 1 m.
pub const REFERENCE_DISTANCE_M: f64 = 1.0;

/// The electrical drive of the loudspeaker and the microphone's distance:
/// what turns the SPL at the microphone into a sensitivity.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Drive {
    /// V RMS at the loudspeaker's terminals for a full-scale sine (0 dBFS)
    /// from the sound card.
    pub volts_per_fs: f64,
    /// Distance from the loudspeaker to the microphone, m; `None` leaves
    /// the sensitivity at the microphone's distance.
    pub distance_m: Option<f64>,
}

impl Drive {
    /// V RMS of a sweep of peak `level_dbfs`: its sine peaks at
    /// 10^(level/20) of full scale, so its RMS is that fraction of a
    /// full-scale sine's.
    pub fn drive_volts_rms(&self, level_dbfs: f64) -> f64 {
        self.volts_per_fs * 10f64.powf(level_dbfs / 20.0)
    }

    /// dB to add to the SPL at the microphone (for a sweep of peak
    /// `level_dbfs`) to refer it to [`REFERENCE_VOLTS`] and, with a
    /// distance, to 1 m: 20·lg(2.83 V / V_drive) (the SPL of a linear
    /// system scales with its drive) + 20·lg(d / 1 m) (inverse-square law:
    /// pressure falls as 1/d in the far field); common practice.
    pub fn sensitivity_offset_db(&self, level_dbfs: f64) -> f64 {
        20.0 * (REFERENCE_VOLTS / self.drive_volts_rms(level_dbfs)).log10()
            + self
                .distance_m
                .map_or(0.0, |d| 20.0 * (d / REFERENCE_DISTANCE_M).log10())
    }

    /// The sensitivity curve (dB SPL for the reference drive, at 1 m where
    /// the distance is known) of an SPL curve measured with a sweep of peak
    /// `level_dbfs`: each point shifted by [`Drive::sensitivity_offset_db`].
    pub fn sensitivity_curve(&self, spl_db: &[f64], level_dbfs: f64) -> Vec<f64> {
        let offset = self.sensitivity_offset_db(level_dbfs);
        spl_db.iter().map(|s| s + offset).collect()
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn a_drive_refers_the_spl_to_2_83_volts_and_1_metre() {
        // by hand: 2 V RMS per full scale at -20 dBFS peak is 0.2 V RMS;
        // 20·lg(2.83/0.2) = 23.0148 dB; at 0.5 m the inverse-square law
        // takes 20·lg(0.5) = -6.0206 dB (common practice)
        let d = Drive {
            volts_per_fs: 2.0,
            distance_m: Some(0.5),
        };
        assert!((d.drive_volts_rms(-20.0) - 0.2).abs() < 1e-12);
        assert!((d.sensitivity_offset_db(-20.0) - (23.0148 - 6.0206)).abs() < 1e-3);
        // at 2 m the far-away microphone is 6.02 dB down: add it back
        let far = Drive {
            distance_m: Some(2.0),
            ..d
        };
        assert!((far.sensitivity_offset_db(-20.0) - (23.0148 + 6.0206)).abs() < 1e-3);
        // driven at exactly 2.83 V, at the microphone's own distance: nothing
        let exact = Drive {
            volts_per_fs: 2.83,
            distance_m: None,
        };
        assert!(exact.sensitivity_offset_db(0.0).abs() < 1e-12);
    }

    #[test]
    fn a_known_tone_gives_its_sensitivity() {
        // closed form: a 1 kHz sine of peak a has RMS a/√2; at 94 dB SPL
        // (1.0024 Pa) the sensitivity is 1.0024/(a/√2) Pa per unit RMS
        let fs = 48_000.0;
        for a in [0.05, 0.3] {
            let mut s = 3u64;
            let x: Vec<f64> = (0..(3.0 * fs) as usize)
                .map(|i| {
                    s = s.wrapping_mul(6364136223846793005).wrapping_add(1);
                    let noise = ((s >> 11) as f64 / (1u64 << 53) as f64 - 0.5) * 1e-4;
                    a * (std::f64::consts::TAU * 1000.0 * i as f64 / fs).sin() + noise
                })
                .collect();
            let c = calibrate(&x, fs, 94.0).unwrap();
            let want = P_REF_PA * 10f64.powf(94.0 / 20.0) / (a / std::f64::consts::SQRT_2);
            assert!(
                (20.0 * (c.pa_per_fs / want).log10()).abs() < 0.05,
                "{} vs {want}",
                c.pa_per_fs
            );
            assert!((c.tone_hz - 1000.0).abs() < 1.0);
        }
        // silence or noise is no calibrator
        assert!(calibrate(&vec![0.0; 96_000], fs, 94.0).is_err());
        assert!(calibrate(&vec![0.1; 1000], fs, 94.0).is_err());
        assert!(calibrate(&vec![0.1; 96_000], fs, 20.0).is_err());
    }

    #[test]
    fn spl_of_a_response() {
        // a wire with 1 Pa per unit RMS: a −20 dBFS peak sweep has RMS
        // 0.0707, i.e. 0.0707 Pa = 70.97 dB SPL at 0 dB response
        let c = Calibration {
            format: String::new(),
            schema_version: 1,
            level_db_spl: 94.0,
            tone_hz: 1000.0,
            tone_rms_fs: 1.0,
            pa_per_fs: 1.0,
            full_scale_db_spl: 0.0,
        };
        let want = 20.0 * (0.1 / std::f64::consts::SQRT_2 / P_REF_PA).log10();
        assert!((c.spl_db(0.0, -20.0) - want).abs() < 1e-9);
        assert!((want - 70.97).abs() < 0.01);
    }

    #[test]
    fn the_sensitivity_curve_is_the_spl_shifted_by_drive_and_distance() {
        // 2.83 V RMS at full scale, a sweep peaking at -6.0206 dBFS (half
        // the voltage: +6.02 dB to reach 2.83 V) measured at 2 m (+6.02 dB
        // to refer to 1 m by the inverse-square law): +12.04 dB in all
        let d = Drive {
            volts_per_fs: REFERENCE_VOLTS,
            distance_m: Some(2.0),
        };
        let level = -20.0 * 2f64.log10();
        let s = d.sensitivity_curve(&[80.0, 90.5], level);
        let want = 40.0 * 2f64.log10();
        assert!((s[0] - 80.0 - want).abs() < 1e-9);
        assert!((s[1] - 90.5 - want).abs() < 1e-9);
    }

    fn tone(f: f64, amp: f64, secs: f64, shape: impl Fn(f64, f64) -> f64) -> Vec<f64> {
        let fs = 48_000.0;
        (0..(secs * fs) as usize)
            .map(|i| {
                let t = i as f64 / fs;
                shape(amp * (std::f64::consts::TAU * f * t).sin(), t)
            })
            .collect()
    }

    #[test]
    fn a_tone_that_cannot_calibrate_is_refused_with_its_figure() {
        let fs = 48_000.0;
        // clean: passes, and reads the closed form (a sine of peak 0.1 has
        // RMS 0.1/√2)
        let c = calibrate(&tone(1000.0, 0.1, 2.0, |x, _| x), fs, 94.0).unwrap();
        assert!((c.tone_rms_fs - 0.1 / 2f64.sqrt()).abs() < 1e-3 * 0.1);
        // clipped at full scale
        let e = calibrate(&tone(1000.0, 3.0, 2.0, |x, _| x.clamp(-1.0, 1.0)), fs, 94.0)
            .unwrap_err()
            .message()
            .to_string();
        assert!(e.contains("clips"), "{e}");
        // 10 % of 3rd harmonic (closed form: THD = 10 %)
        let e = calibrate(
            &tone(1000.0, 0.1, 2.0, |x, t| {
                x + 0.01 * (std::f64::consts::TAU * 3000.0 * t).sin()
            }),
            fs,
            94.0,
        )
        .unwrap_err()
        .message()
        .to_string();
        assert!(e.contains("THD 10.0 %"), "{e}");
        // a 440 Hz tone is no calibrator's
        let e = calibrate(&tone(440.0, 0.1, 2.0, |x, _| x), fs, 94.0)
            .unwrap_err()
            .message()
            .to_string();
        assert!(e.contains("440 Hz"), "{e}");
        // a level that swings ±2 dB at 2 Hz
        let e = calibrate(
            &tone(1000.0, 0.1, 2.0, |x, t| {
                x * 10f64.powf(2.0 * (std::f64::consts::TAU * 2.0 * t).sin() / 20.0)
            }),
            fs,
            94.0,
        )
        .unwrap_err()
        .message()
        .to_string();
        assert!(e.contains("unsteady"), "{e}");
        // a pistonphone's 250 Hz passes
        assert!(calibrate(&tone(250.0, 0.1, 2.0, |x, _| x), fs, 114.0).is_ok());
    }

    #[test]
    fn a_tone_on_another_channel_is_named() {
        let fs = 48_000.0;
        let tone: Vec<f64> = (0..96_000)
            .map(|i| 0.1 * (std::f64::consts::TAU * 1000.0 * i as f64 / fs).sin())
            .collect();
        // channel 1 a faint hiss, channel 2 the calibrator
        let hiss: Vec<f64> = (0..96_000)
            .map(|i| 1e-4 * ((i as f64 * 12.9898).sin() * 43_758.545).fract())
            .collect();
        let e = calibrate_channel(&[hiss.clone(), tone.clone()], 0, fs, 94.0).unwrap_err();
        assert!(e.message().contains("give --channel 2"), "{e}");
        // a 0.1-peak sine is -20 dBFS re a full-scale sine (closed form)
        assert!(e.message().contains("-20.0 dBFS"), "{e}");
        assert!(calibrate_channel(&[hiss.clone(), tone], 1, fs, 94.0).is_ok());
        // nowhere a tone: the channel's own refusal
        let e = calibrate_channel(&[hiss.clone(), hiss], 0, fs, 94.0).unwrap_err();
        assert!(!e.message().contains("--channel"), "{e}");
    }
}
