//! The analysis of an impulse response given as it is (measured by another
//! tool, or simulated): every analysis of [`super::analyze`] that needs no
//! sweep — response, phase, gate, decay spectrum or spectrogram, bands —
//! by the same stages. What differs:
//!
//! - no deconvolution, so no band limit of it to divide out: the response
//!   is the file's own over [`band`];
//! - the delay is the position of the response's peak (|h|, to a fraction
//!   of a sample), from the file's first sample, or of its direct sound
//!   when that comes well ahead of a stronger build-up
//!   ([`delay::direct_sound`], searched back to the file's first sample);
//! - no harmonic distortion: the harmonic orders are separated from the
//!   recording of a sweep, and an impulse response holds the linear
//!   response alone (a typed warning says so);
//! - the peak-to-noise ratio is the peak over the mean power of the last
//!   tenth of the response (there is no stretch of noise alone to take it
//!   from).

use super::{
    Analysis, AnalysisConfig, ImpulseResponse, Linear, ResponseParts, band_warnings, check_signal,
    db20, delay, response, response_parts, room, smoothing,
};
use crate::deconv;
use crate::error::{Error, Result};
use crate::model::{Code, Warnings};

/// The band analysed in an impulse response of `len` samples at `fs` Hz:
/// 20 Hz (or four periods of the response's length, if higher) to 20 kHz
/// (or 45 % of the sample rate, if lower).
pub fn band(fs: f64, len: usize) -> (f64, f64) {
    (
        20f64.max(4.0 * fs / len.max(1) as f64),
        20_000f64.min(0.45 * fs),
    )
}

/// Silence put before the response, s, so that windows reaching before its
/// peak read zeros instead of wrapping round to its end; also how far the
/// analysed window starts before the peak (at most).
pub const PRE_S: f64 = 0.1;

/// The sentence of the typed warning that an impulse response has no
/// distortion.
pub const NO_DISTORTION: &str = "no harmonic distortion: it is separated from the recording of a sweep, and an impulse response holds the linear response alone; analyse the recording with the sweep that was played for distortion";

/// Analyses the impulse response `ir` at `fs_hz` (see the module's notes).
pub fn analyze(ir: &[f64], fs_hz: u32, config: &AnalysisConfig) -> Result<Analysis> {
    let fs = f64::from(fs_hz);
    let peak = check_signal(ir, "the impulse response")?;
    let (f1, f2) = band(fs, ir.len());
    if ir.len() < 64 || f1 >= f2 {
        return Err(Error::input(format!(
            "the impulse response holds only {} samples ({:.1} ms): too short to analyse; give the whole response",
            ir.len(),
            ir.len() as f64 / fs * 1e3
        )));
    }
    let mut warnings = Warnings::new();
    let pad = (PRE_S * fs).round() as usize;
    let mut h = vec![0.0; pad];
    h.extend_from_slice(ir);
    let strongest = delay::peak_index(&h, pad..h.len()).unwrap_or(pad);
    let pre = pad;
    let window = |ipeak: usize| {
        let start = ipeak - pre;
        let len = h.len() - start;
        let fade = (len / 20).max(8).min(len);
        (start, len, fade)
    };
    let (_, len, fade) = window(strongest);
    // peak over the last tenth of the response before its fade-out (the
    // end of the response, whatever the window's start)
    let kept = len - fade;
    let tail = &h[h.len() - len + kept * 9 / 10..h.len() - fade];
    let noise = tail.iter().map(|v| v * v).sum::<f64>() / tail.len().max(1) as f64;
    let peak_to_noise_db = if noise > 0.0 {
        10.0 * (h[strongest] * h[strongest] / noise).log10()
    } else {
        300.0
    };
    // the direct sound ahead of a stronger build-up, as for a sweep
    // (super::analyze): searched back to the file's first sample
    let (ipeak, delay_samples, direct) = super::reference_arrival(
        &h,
        (strongest, delay::refine_peak(&h, strongest)),
        (strongest - pad, pre),
        (fs, f1),
        peak_to_noise_db,
        &mut warnings,
    );
    let (start, len, fade) = window(ipeak);
    let cut = deconv::cut(&h, start as isize, len, pre / 2, fade);
    let decay = &cut[..len - fade];
    if peak_to_noise_db < super::MIN_PEAK_TO_NOISE_DB {
        warnings.add(
            Code::LowPeakToNoise,
            format!(
                "the end of the impulse response is only {peak_to_noise_db:.0} dB below its peak: it holds little decay above its noise, or was cut off before the decay ended"
            ),
        );
    }
    warnings.add(Code::DistortionNeedsSweep, NO_DISTORTION);

    let fft_len = response::spectrum_len(len, fs, f1);
    let grid = smoothing::log_grid(f1, f2);
    let (spec, df) = response::delay_free_spectrum(&cut, start as f64, delay_samples, fs, fft_len);
    let ResponseParts {
        response: resp,
        phase,
        gate: gate_info,
        decay_spectrum,
        spectrogram,
    } = response_parts(
        Linear {
            h: &h,
            ipeak,
            delay_samples,
            fs,
            band: (f1, f2),
            fft_len,
            grid: &grid,
            spec: &spec,
            df,
            decay,
        },
        config,
        &mut warnings,
        |cut, start| response::delay_free_spectrum(cut, start, delay_samples, fs, fft_len).0,
    );
    let room = config.bands.then(|| {
        let r = room::analyze_from(decay, fs, f1, f2, direct.then_some(pre));
        band_warnings(&r, &mut warnings);
        r
    });
    let speech = room
        .as_ref()
        .map(|r| crate::analysis::speech::speech(&r.mtf, config.speech.as_ref()));
    Ok(Analysis {
        sample_rate_hz: fs_hz,
        delay_s: (delay_samples - pad as f64) / fs,
        impulse: ImpulseResponse {
            samples: cut,
            start_s: (start as f64 - pad as f64) / fs,
            sample_rate_hz: fs_hz,
        },
        response: resp,
        phase,
        gate: gate_info,
        decay_spectrum,
        spectrogram,
        distortion: None,
        room,
        speech,
        peak_dbfs: db20(peak),
        peak_to_noise_db,
        warnings,
    })
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::model::Parameter;
    use rand::{Rng, SeedableRng};

    #[test]
    fn a_delayed_impulse_is_flat_and_placed_at_its_peak() {
        // closed form: δ[n − k] has |H| = 1 (0 dB) and its peak at k/fs
        let mut x = vec![0.0; 48_000];
        x[480] = 0.5;
        let config = AnalysisConfig {
            bands: false,
            smoothing: smoothing::Smoothing::None,
            ..AnalysisConfig::default()
        };
        let a = analyze(&x, 48_000, &config).unwrap();
        assert!((a.delay_s - 0.01).abs() < 1e-9, "{}", a.delay_s);
        for (f, m) in a.response.frequency_hz.iter().zip(&a.response.magnitude_db) {
            assert!((m - 20.0 * 0.5f64.log10()).abs() < 0.01, "{f} Hz: {m} dB");
        }
        assert!(a.distortion.is_none());
        assert!(
            a.warnings
                .iter()
                .any(|w| w.code == Code::DistortionNeedsSweep)
        );
    }

    #[test]
    fn an_exponential_decay_gives_its_reverberation_time() {
        // closed form: noise decaying 60 dB in T has T30 = T per band
        let fs = 48_000.0;
        let t60 = 0.8;
        let mut r = rand::rngs::StdRng::seed_from_u64(5);
        let x: Vec<f64> = (0..(2.0 * fs) as usize)
            .map(|i| (r.random::<f64>() - 0.5) * 10f64.powf(-3.0 * i as f64 / (t60 * fs)))
            .collect();
        let a = analyze(&x, 48_000, &AnalysisConfig::default()).unwrap();
        let room = a.room.unwrap();
        for b in room.bands.iter().filter(|b| {
            b.fraction == crate::model::Fraction::Octave && (250.0..=8_000.0).contains(&b.center_hz)
        }) {
            let t30 = b.get(Parameter::T30).unwrap();
            assert!((t30 / t60 - 1.0).abs() < 0.05, "{} Hz: {t30}", b.center_hz);
        }
        assert!(analyze(&[0.0; 100], 48_000, &AnalysisConfig::default()).is_err());
        assert!(analyze(&[1.0; 10], 48_000, &AnalysisConfig::default()).is_err());
    }
}
