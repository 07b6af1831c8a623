//! The speech transmission index (STI) by the indirect method of
//! IEC 60268-16:2011 (edition 4): the modulation transfer function (MTF)
//! from the impulse response by Schroeder's formula, corrected for the
//! background noise, the speech level, the auditory masking and the
//! absolute reception threshold when calibrated levels are known, then
//! the transmission index per modulation frequency, the modulation
//! transfer index (MTI) per octave and the STI with the male-speech
//! weighting factors and redundancy correction.
//!
//! Sources (REFERENCES.md; every table below is from memory of edition 4
//! and marked so — edition 5 (2020) keeps these tables for the indirect
//! method as far as we know, also from memory):
//! - M. R. Schroeder, "Modulation transfer functions: definition and
//!   measurement", Acustica 49, 1981: m(F) = |∫h²(t)e^(−j2πFt)dt| / ∫h²(t)dt;
//! - T. Houtgast, H. J. M. Steeneken, JASA 77(3), 1985 and IEC 60268-16
//!   annex: for an exponential decay of reverberation time T,
//!   m(F) = 1/√(1 + (2πF·T/13.8)²), and with a steady noise of
//!   signal-to-noise ratio SNR the factor 1/(1 + 10^(−SNR/10));
//! - IEC 60268-16:2011 annex A: the effective SNR 10·lg(m/(1−m)) clipped
//!   to ±15 dB, TI = (SNR + 15)/30, MTI the mean TI of a band,
//!   STI = Σα_k·MTI_k − Σβ_k·√(MTI_k·MTI_(k+1)), the level-dependent
//!   auditory masking and the absolute reception threshold; annex F: the
//!   qualification bands A+ … U.

use serde::{Deserialize, Serialize};

use crate::model::{Code, Warnings};

/// The standard and edition implemented.
pub const STANDARD: &str = "IEC 60268-16:2011 (edition 4), indirect method";

/// The 14 modulation frequencies, 0.63–12.5 Hz in one-third-octave steps
/// (IEC 60268-16, nominal values).
pub const MODULATION_HZ: [f64; 14] = [
    0.63, 0.8, 1.0, 1.25, 1.6, 2.0, 2.5, 3.15, 4.0, 5.0, 6.3, 8.0, 10.0, 12.5,
];

/// The 7 octave bands of the STI, nominal centres, Hz.
pub const OCTAVES_HZ: [f64; 7] = [125.0, 250.0, 500.0, 1000.0, 2000.0, 4000.0, 8000.0];

/// Male-speech weighting factors α_k, 125 Hz … 8 kHz (IEC 60268-16:2011
/// annex A, from memory; with β they sum to Σα − Σβ = 1).
pub const ALPHA_MALE: [f64; 7] = [0.085, 0.127, 0.230, 0.233, 0.309, 0.224, 0.173];

/// Male-speech redundancy factors β_k between octaves k and k+1
/// (IEC 60268-16:2011 annex A, from memory).
pub const BETA_MALE: [f64; 6] = [0.085, 0.078, 0.065, 0.011, 0.047, 0.095];

/// Absolute reception threshold per octave, dB SPL (IEC 60268-16:2011
/// annex A, from memory).
pub const THRESHOLD_DB: [f64; 7] = [46.0, 27.0, 12.0, 6.5, 7.5, 8.0, 12.0];

/// Octave levels of male speech relative to its A-weighted level, dB
/// (IEC 60268-16:2011 table A.2, from memory; at 60 dB(A) they sum,
/// A-weighted, to 60.0 dB(A), which `the_speech_spectrum_sums_to_its_a_weighted_level`
/// checks).
pub const MALE_SPEECH_RELATIVE_DB: [f64; 7] = [2.9, 2.9, -0.8, -6.8, -12.8, -18.8, -24.8];

/// The speech level of normal vocal effort at 1 m, dB(A) (IEC 60268-16:2011,
/// from memory).
pub const NORMAL_EFFORT_DBA: f64 = 60.0;

/// The qualification bands of IEC 60268-16:2011 annex F (from memory):
/// the band's name and the lowest STI in it (each band is 0.04 wide; A+
/// above 0.76, U below 0.36).
pub const QUALIFICATION_BANDS: [(&str, f64); 12] = [
    ("A+", 0.76),
    ("A", 0.72),
    ("B", 0.68),
    ("C", 0.64),
    ("D", 0.60),
    ("E", 0.56),
    ("F", 0.52),
    ("G", 0.48),
    ("H", 0.44),
    ("I", 0.40),
    ("J", 0.36),
    ("U", 0.0),
];

/// The energy an exponential decay still holds after the truncation point:
/// a density `level` (energy per second, in the units of the samples
/// times fs) at `at_s` falling as e^(−(t − at_s)/tau_s).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Tail {
    /// Where the tail starts, s from the first sample.
    pub at_s: f64,
    /// Energy density there, in sample units (the mean noise power per
    /// sample the decay meets).
    pub level: f64,
    /// Time constant of the energy decay, T/13.8, s.
    pub tau_s: f64,
}

/// The block over which the squared response is summed before the
/// modulation sums, s: its centre stands for its time, which changes
/// m(F) by a factor sinc(F·block) ≥ 1 − 3·10⁻⁶ at 12.5 Hz (closed form),
/// far below anything the STI resolves, and makes the sums ~20× cheaper.
pub const BLOCK_S: f64 = 0.0005;

/// Schroeder's modulation transfer function of the squared response `e`
/// (energy density samples at rate `fs`, from any start; negative samples
/// are allowed: the noise subtracted from them) plus an exponential
/// `tail`, at each of [`MODULATION_HZ`]:
/// m(F) = |Σe·e^(−j2πFt) + tail| / (Σe + tail). `None` when the total
/// energy is not positive.
pub fn mtf(e: &[f64], fs: f64, tail: Option<Tail>) -> Option<[f64; 14]> {
    let block = ((BLOCK_S * fs).round() as usize).max(1);
    let sums: Vec<(f64, f64)> = e
        .chunks(block)
        .enumerate()
        .map(|(b, c)| {
            let t = ((b * block) as f64 + 0.5 * (c.len() as f64 - 1.0)) / fs;
            (t, c.iter().sum::<f64>())
        })
        .collect();
    let tail_total = tail.map_or(0.0, |t| t.level * t.tau_s * fs);
    let total = sums.iter().map(|s| s.1).sum::<f64>() + tail_total;
    if total.is_nan() || total <= 0.0 || !total.is_finite() {
        return None;
    }
    let mut out = [0.0; 14];
    for (o, &f) in out.iter_mut().zip(&MODULATION_HZ) {
        let w = std::f64::consts::TAU * f;
        let (mut re, mut im) = sums.iter().fold((0.0, 0.0), |(re, im), &(t, s)| {
            (re + s * (w * t).cos(), im - s * (w * t).sin())
        });
        if let Some(t) = tail {
            // ∫ L·e^(−u/τ)·e^(−jω(u + t0)) du = L·τ/(1 + jωτ)·e^(−jωt0)
            let a = t.level * t.tau_s * fs;
            let d = 1.0 + (w * t.tau_s).powi(2);
            let (cr, ci) = (a / d, -a * w * t.tau_s / d);
            let (c0, s0) = ((w * t.at_s).cos(), -(w * t.at_s).sin());
            re += cr * c0 - ci * s0;
            im += cr * s0 + ci * c0;
        }
        *o = ((re * re + im * im).sqrt() / total).min(1.0);
    }
    Some(out)
}

/// The MTF of an exponential decay of reverberation time `t60_s` at
/// modulation frequency `f` (Houtgast and Steeneken, closed form).
pub fn mtf_exponential(t60_s: f64, f: f64) -> f64 {
    let x = std::f64::consts::TAU * f * t60_s / crate::analysis::decay::SIXTY_DB;
    1.0 / (1.0 + x * x).sqrt()
}

/// The reduction of m by a steady noise of signal-to-noise ratio `snr_db`:
/// 1/(1 + 10^(−SNR/10)) (IEC 60268-16).
pub fn noise_factor(snr_db: f64) -> f64 {
    1.0 / (1.0 + 10f64.powf(-snr_db / 10.0))
}

/// The auditory masking slope (dB) of an octave at level `level_db` into
/// the octave above (IEC 60268-16 annex A): 0.5·L − 65 below 63 dB,
/// 1.8·L − 146.9 to 67 dB, 0.5·L − 59.8 to 100 dB, −10 above (from
/// memory, with the 59.8 of the third piece checked against a secondary
/// source quoting edition 5's table, where memory had 60).
pub fn masking_db(level_db: f64) -> f64 {
    if level_db < 63.0 {
        0.5 * level_db - 65.0
    } else if level_db < 67.0 {
        1.8 * level_db - 146.9
    } else if level_db < 100.0 {
        0.5 * level_db - 59.8
    } else {
        -10.0
    }
}

/// The transmission index of one modulation depth: effective SNR
/// 10·lg(m/(1 − m)) clipped to ±15 dB, TI = (SNR + 15)/30.
pub fn transmission_index(m: f64) -> f64 {
    let snr = if m >= 1.0 {
        15.0
    } else if m <= 0.0 {
        -15.0
    } else {
        (10.0 * (m / (1.0 - m)).log10()).clamp(-15.0, 15.0)
    };
    (snr + 15.0) / 30.0
}

/// The modulation transfer index of a band: the mean transmission index
/// over its 14 modulation frequencies.
pub fn mti(m: &[f64; 14]) -> f64 {
    m.iter().map(|&v| transmission_index(v)).sum::<f64>() / 14.0
}

/// The STI of seven octave MTIs with the male weights and the redundancy
/// correction, limited to [0, 1].
pub fn sti(mti: &[f64; 7]) -> f64 {
    let a: f64 = ALPHA_MALE.iter().zip(mti).map(|(a, m)| a * m).sum();
    let b: f64 = BETA_MALE
        .iter()
        .enumerate()
        .map(|(k, b)| b * (mti[k] * mti[k + 1]).sqrt())
        .sum();
    (a - b).clamp(0.0, 1.0)
}

/// The qualification band of annex F an STI falls in ("A+" … "U").
pub fn qualification(sti: f64) -> &'static str {
    QUALIFICATION_BANDS
        .iter()
        .find(|(_, from)| sti >= *from - 1e-12)
        .map_or("U", |(name, _)| name)
}

/// The listening conditions beyond the impulse response.
#[derive(Debug, Clone, PartialEq)]
pub struct Conditions {
    /// The A-weighted speech level at 1 m in front of the talker, dB(A),
    /// applied at the listening position as it is.
    pub speech_level_dba: f64,
    /// Whether the speech level was given (false: the default, normal
    /// vocal effort).
    pub speech_level_given: bool,
    /// The background noise per octave 125 Hz–8 kHz, dB SPL (`None`: no
    /// noise measured; the masking and threshold still apply).
    pub noise_db: Option<[f64; 7]>,
    /// Where the noise came from (a noise folder), in words.
    pub noise_source: Option<String>,
    /// The noise folder's levels, as they were read (for results.json).
    pub noise: Option<crate::analysis::noise::NoiseLevels>,
}

/// One octave of the STI.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct SpeechBand {
    /// Nominal centre, Hz.
    pub center_hz: f64,
    /// The MTF of the impulse response alone, one per modulation frequency.
    pub mtf_impulse: Vec<f64>,
    /// The MTF the STI used (after the corrections, if any).
    pub mtf: Vec<f64>,
    /// The modulation transfer index.
    pub mti: f64,
    /// The speech level in the band, dB SPL (with conditions).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub speech_db: Option<f64>,
    /// The background noise in the band, dB SPL (with a noise folder).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub noise_db: Option<f64>,
    /// The auditory masking from the octave below, dB SPL (with conditions).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub masking_db: Option<f64>,
    /// The absolute reception threshold, dB SPL (with conditions).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub threshold_db: Option<f64>,
    /// The factor every m of the band was multiplied by (with conditions).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub factor: Option<f64>,
}

/// What went into the STI beyond the impulse response.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Corrections {
    /// True when the STI is for the impulse response alone.
    pub impulse_response_only: bool,
    /// The speech level at 1 m, dB(A), when levels were applied.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub speech_level_dba: Option<f64>,
    /// Whether that level was given or is the standard's normal vocal effort.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub speech_level_source: Option<String>,
    /// The background noise's source (a noise folder), when applied.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub noise: Option<String>,
    /// The level-dependent auditory masking was applied.
    pub masking: bool,
    /// The absolute reception threshold was applied.
    pub threshold: bool,
    /// The whole in words.
    pub statement: String,
}

/// results.json `speech`: the STI and how it was reached.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Speech {
    /// The standard and edition implemented.
    pub standard: String,
    /// The STI (`null` when withheld; the warnings say why).
    pub sti: Option<f64>,
    /// The qualification band of the standard's annex F ("A+" … "U").
    pub qualification: Option<String>,
    /// The modulation frequencies, Hz.
    pub modulation_hz: Vec<f64>,
    /// The octaves measured, 125 Hz … 8 kHz.
    pub bands: Vec<SpeechBand>,
    /// What went into the value.
    pub corrections: Corrections,
    /// How the impulse response's own measurement noise was kept out.
    pub truncation: String,
    /// Why a value is missing, and what it stands for.
    #[serde(flatten)]
    pub warnings: Warnings,
}

/// The words of [`Speech::truncation`].
pub const TRUNCATION: &str = "each octave's squared impulse response from the direct sound to where its decay meets its own measurement noise (Lundeby's crosspoint, as for the decay times), with the noise's mean power subtracted and the decay continued as an exponential beyond it; the measurement's noise is not in the MTF";

/// The STI of several positions of one room: their arithmetic mean and
/// sample standard deviation with the qualification band of the mean
/// (common practice: the STI is given per position and as the spatial
/// mean of those values).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct SpatialSti {
    /// The mean of the positions' STI.
    pub mean: f64,
    /// Their sample standard deviation (`null` with one position).
    pub std: Option<f64>,
    /// Each position's STI, in the average's order.
    pub positions: Vec<f64>,
    /// The qualification band of the mean.
    pub qualification: String,
}

/// The spatial mean of the positions' STI, or `None` (with the reason)
/// when a position has none: a mean of the others would describe only
/// part of the room.
pub fn spatial_mean(values: &[Option<f64>]) -> std::result::Result<SpatialSti, String> {
    let missing = values.iter().filter(|v| v.is_none()).count();
    if values.is_empty() || missing > 0 {
        return Err(format!(
            "no mean STI: {missing} of the {} positions have no STI of their own",
            values.len()
        ));
    }
    let (mean, std, _) = crate::analysis::compare::mean_std(values);
    let mean = mean.expect("values are present");
    Ok(SpatialSti {
        mean,
        std,
        positions: values.iter().flatten().copied().collect(),
        qualification: qualification(mean).to_string(),
    })
}

/// The STI of an impulse response whose octave MTFs are `impulse`
/// (centre in Hz and m per modulation frequency; an octave of
/// [`OCTAVES_HZ`] that is missing withholds the STI), under `conditions`
/// (`None`: the impulse response alone).
pub fn speech(impulse: &[(f64, [f64; 14])], conditions: Option<&Conditions>) -> Speech {
    let mut warnings = Warnings::new();
    let found: Vec<Option<[f64; 14]>> = OCTAVES_HZ
        .iter()
        .map(|&c| {
            impulse
                .iter()
                .find(|(f, _)| (f - c).abs() < 1e-6 * c)
                .map(|x| x.1)
        })
        .collect();
    let missing: Vec<String> = OCTAVES_HZ
        .iter()
        .zip(&found)
        .filter(|(_, m)| m.is_none())
        .map(|(c, _)| crate::model::units::format_hz(*c))
        .collect();
    // the levels per octave: speech, noise, masking from below, threshold
    let levels = conditions.map(|c| {
        let speech: Vec<f64> = MALE_SPEECH_RELATIVE_DB
            .iter()
            .map(|r| c.speech_level_dba + r)
            .collect();
        let noise_i: Vec<f64> = (0..7)
            .map(|k| c.noise_db.map_or(0.0, |n| 10f64.powf(n[k] / 10.0)))
            .collect();
        let total: Vec<f64> = (0..7)
            .map(|k| 10f64.powf(speech[k] / 10.0) + noise_i[k])
            .collect();
        (0..7)
            .map(|k| {
                let is = 10f64.powf(speech[k] / 10.0);
                let noise_f = is / (is + noise_i[k]);
                let am = (k > 0).then(|| {
                    let l = 10.0 * total[k - 1].log10();
                    total[k - 1] * 10f64.powf(masking_db(l) / 10.0)
                });
                let rt = 10f64.powf(THRESHOLD_DB[k] / 10.0);
                let mask_f = total[k] / (total[k] + am.unwrap_or(0.0) + rt);
                (
                    speech[k],
                    c.noise_db.map(|n| n[k]),
                    am.map(|a| 10.0 * a.log10()),
                    THRESHOLD_DB[k],
                    noise_f * mask_f,
                )
            })
            .collect::<Vec<_>>()
    });
    let mut bands = Vec::new();
    let mut mtis = [0.0; 7];
    for (k, m) in found.iter().enumerate() {
        let Some(m) = m else { continue };
        let l = levels.as_ref().map(|l| l[k]);
        let factor = l.map_or(1.0, |l| l.4);
        let mut used = [0.0; 14];
        for (u, v) in used.iter_mut().zip(m) {
            *u = v * factor;
        }
        mtis[k] = mti(&used);
        bands.push(SpeechBand {
            center_hz: OCTAVES_HZ[k],
            mtf_impulse: m.to_vec(),
            mtf: used.to_vec(),
            mti: mtis[k],
            speech_db: l.map(|l| l.0),
            noise_db: l.and_then(|l| l.1),
            masking_db: l.and_then(|l| l.2),
            threshold_db: l.map(|l| l.3),
            factor: l.map(|l| l.4),
        });
    }
    let value = missing.is_empty().then(|| sti(&mtis));
    if !missing.is_empty() {
        warnings.add(
            Code::SpeechWithheld,
            format!(
                "STI: not given, because the octave{} {} {} no decay above the noise in this measurement; the STI needs all seven octaves 125 Hz–8 kHz (sweep from below 88 Hz to above 11.3 kHz)",
                if missing.len() > 1 { "s" } else { "" },
                missing.join(", "),
                if missing.len() > 1 { "have" } else { "has" },
            ),
        );
    }
    let corrections = match conditions {
        None => {
            warnings.add(
                Code::SpeechImpulseOnly,
                "STI: for the impulse response alone (reverberation and echoes), without background noise, speech level, auditory masking or hearing threshold; give --noise and --speech-level for the STI of a talker in this room's noise",
            );
            Corrections {
                impulse_response_only: true,
                speech_level_dba: None,
                speech_level_source: None,
                noise: None,
                masking: false,
                threshold: false,
                statement: "the impulse response alone: no background noise, speech level, masking or threshold".into(),
            }
        }
        Some(c) => {
            let source = if c.speech_level_given {
                "given with --speech-level"
            } else {
                "the standard's normal vocal effort (default)"
            };
            let noise = c.noise_source.clone().filter(|_| c.noise_db.is_some());
            Corrections {
                impulse_response_only: false,
                speech_level_dba: Some(c.speech_level_dba),
                speech_level_source: Some(source.into()),
                statement: format!(
                    "male speech at {:.1} dB(A) at 1 m ({source}), applied at the listening position as it is; {}; the auditory masking and the absolute reception threshold of the standard",
                    c.speech_level_dba,
                    noise
                        .as_ref()
                        .map_or("no background noise measured".to_string(), |n| format!(
                            "the background noise of {n}"
                        ))
                ),
                noise,
                masking: true,
                threshold: true,
            }
        }
    };
    Speech {
        standard: STANDARD.into(),
        sti: value,
        qualification: value.map(|v| qualification(v).to_string()),
        modulation_hz: MODULATION_HZ.to_vec(),
        bands,
        corrections,
        truncation: TRUNCATION.into(),
        warnings,
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// The STI written out from the standard's formulas, independently of
    /// the functions above (IEC 60268-16:2011 annex A, from memory).
    fn by_hand(m: &[[f64; 14]; 7]) -> f64 {
        let mut mti = [0.0; 7];
        for k in 0..7 {
            let mut s = 0.0;
            for &v in &m[k] {
                let snr: f64 = (10.0 * (v / (1.0 - v)).log10()).clamp(-15.0, 15.0);
                s += (snr + 15.0) / 30.0;
            }
            mti[k] = s / 14.0;
        }
        let alpha = [0.085, 0.127, 0.230, 0.233, 0.309, 0.224, 0.173];
        let beta = [0.085, 0.078, 0.065, 0.011, 0.047, 0.095];
        let mut sti = 0.0;
        for k in 0..7 {
            sti += alpha[k] * mti[k];
        }
        for k in 0..6 {
            sti -= beta[k] * (mti[k] * mti[k + 1]).sqrt();
        }
        sti
    }

    #[test]
    fn the_weights_sum_to_one() {
        // IEC 60268-16: Σα − Σβ = 1, so perfect transmission gives STI 1
        let s: f64 = ALPHA_MALE.iter().sum::<f64>() - BETA_MALE.iter().sum::<f64>();
        assert!((s - 1.0).abs() < 1e-12, "{s}");
        assert!((sti(&[1.0; 7]) - 1.0).abs() < 1e-12);
        assert_eq!(sti(&[0.0; 7]), 0.0);
    }

    #[test]
    fn the_speech_spectrum_sums_to_its_a_weighted_level() {
        // A-weighting at the octave centres, IEC 61672-1 closed form
        // (crate::analysis::noise::a_weighting_db)
        let total: f64 = OCTAVES_HZ
            .iter()
            .zip(&MALE_SPEECH_RELATIVE_DB)
            .map(|(&f, r)| {
                10f64.powf(
                    (NORMAL_EFFORT_DBA + r + crate::analysis::noise::a_weighting_db(f)) / 10.0,
                )
            })
            .sum();
        let dba = 10.0 * total.log10();
        assert!((dba - NORMAL_EFFORT_DBA).abs() < 0.15, "{dba}");
    }

    #[test]
    fn mtf_of_a_sampled_exponential_is_the_closed_form() {
        // h²(t) = e^(−13.8t/T), truncated at 1 s with the tail in closed form
        let fs = 8000.0;
        let t60 = 1.3;
        let tau = t60 / crate::analysis::decay::SIXTY_DB;
        let n = (1.0 * fs) as usize;
        let e: Vec<f64> = (0..n).map(|i| (-(i as f64) / fs / tau).exp()).collect();
        let tail = Tail {
            at_s: n as f64 / fs,
            level: (-(n as f64) / fs / tau).exp(),
            tau_s: tau,
        };
        let m = mtf(&e, fs, Some(tail)).unwrap();
        for (f, v) in MODULATION_HZ.iter().zip(m) {
            let want = mtf_exponential(t60, *f);
            // the sampled sum is the integral to O(1/fs): 0.002 is ample
            assert!((v - want).abs() < 0.002, "{f} Hz: {v} vs {want}");
        }
        // without the tail the truncated decay modulates more (sanity: the
        // tail term matters)
        let cut = mtf(&e, fs, None).unwrap();
        assert!(cut[0] > m[0]);
    }

    #[test]
    fn a_single_impulse_transmits_fully_and_nothing_gives_none() {
        let mut e = vec![0.0; 100];
        e[10] = 1.0;
        let m = mtf(&e, 1000.0, None).unwrap();
        assert!(m.iter().all(|&v| (v - 1.0).abs() < 1e-12));
        assert!(mtf(&[0.0; 10], 1000.0, None).is_none());
        let s = speech(&OCTAVES_HZ.map(|c| (c, m)), None);
        assert_eq!(s.sti, Some(1.0));
        assert_eq!(s.qualification.as_deref(), Some("A+"));
    }

    #[test]
    fn sti_of_exponential_decays_equals_the_hand_computation() {
        let t60 = [1.8, 1.5, 1.2, 1.0, 0.9, 0.8, 0.6];
        let m: [[f64; 14]; 7] =
            std::array::from_fn(|k| MODULATION_HZ.map(|f| mtf_exponential(t60[k], f)));
        let s = speech(
            &std::array::from_fn::<_, 7, _>(|k| (OCTAVES_HZ[k], m[k])),
            None,
        );
        let want = by_hand(&m);
        assert!(
            (s.sti.unwrap() - want).abs() < 1e-12,
            "{:?} vs {want}",
            s.sti
        );
        assert!(s.corrections.impulse_response_only);
        assert!(s.warnings.iter().any(|w| w.code == Code::SpeechImpulseOnly));
    }

    /// IEC 60268-16:2011 annex M, table M.1 (the standard's worked example,
    /// transcribed from a secondary source): the MTF matrix of the
    /// transmission channel alone (step 2; rows the 14 modulation
    /// frequencies, columns the octaves 125 Hz … 8 kHz).
    const ANNEX_M_MTF: [[f64; 7]; 14] = [
        [0.983, 0.960, 0.978, 0.990, 0.990, 0.986, 0.997],
        [0.968, 0.936, 0.959, 0.974, 0.980, 0.979, 0.995],
        [0.947, 0.904, 0.931, 0.953, 0.966, 0.968, 0.992],
        [0.920, 0.869, 0.898, 0.927, 0.949, 0.955, 0.987],
        [0.886, 0.826, 0.852, 0.892, 0.925, 0.935, 0.981],
        [0.851, 0.791, 0.808, 0.856, 0.900, 0.914, 0.974],
        [0.816, 0.756, 0.764, 0.816, 0.871, 0.891, 0.964],
        [0.773, 0.721, 0.730, 0.776, 0.841, 0.866, 0.953],
        [0.741, 0.684, 0.705, 0.745, 0.809, 0.838, 0.941],
        [0.726, 0.628, 0.678, 0.736, 0.780, 0.812, 0.929],
        [0.714, 0.557, 0.656, 0.723, 0.753, 0.786, 0.916],
        [0.670, 0.520, 0.623, 0.678, 0.728, 0.765, 0.904],
        [0.591, 0.483, 0.556, 0.615, 0.701, 0.749, 0.893],
        [0.554, 0.446, 0.523, 0.614, 0.685, 0.737, 0.884],
    ];

    #[test]
    fn the_standards_worked_example_of_annex_m() {
        // step 3: operational speech 82.9, 82.9, 79.2, 73.2, 67.2, 61.2,
        // 55.2 dB (the male spectrum at 80 dB(A)) and occupancy noise
        // 55.5 … 30.5 dB; printed: the combined adjustment per octave, the
        // MTI row (two decimals) and STI 0.76 (two decimals)
        let c = Conditions {
            speech_level_dba: 80.0,
            speech_level_given: true,
            noise_db: Some([55.5, 47.5, 41.5, 37.5, 34.5, 32.5, 30.5]),
            noise_source: None,
            noise: None,
        };
        let bands: Vec<(f64, [f64; 14])> = (0..7)
            .map(|k| (OCTAVES_HZ[k], std::array::from_fn(|i| ANNEX_M_MTF[i][k])))
            .collect();
        let s = speech(&bands, Some(&c));
        let printed_speech = [82.9, 82.9, 79.2, 73.2, 67.2, 61.2, 55.2];
        let adjustment = [0.998, 0.985, 0.967, 0.963, 0.981, 0.989, 0.995];
        let mti = [0.73, 0.66, 0.67, 0.71, 0.77, 0.80, 0.92];
        for (k, b) in s.bands.iter().enumerate() {
            assert!((b.speech_db.unwrap() - printed_speech[k]).abs() < 0.05);
            // printed to three decimals
            assert!(
                (b.factor.unwrap() - adjustment[k]).abs() < 0.0015,
                "{} Hz factor {:?} vs {}",
                b.center_hz,
                b.factor,
                adjustment[k]
            );
            // printed to two decimals
            assert!(
                (b.mti - mti[k]).abs() < 0.006,
                "{} Hz MTI {} vs {}",
                b.center_hz,
                b.mti,
                mti[k]
            );
        }
        let sti = s.sti.unwrap();
        assert!((sti - 0.76).abs() < 0.006, "STI {sti} vs 0.76");
    }

    #[test]
    fn the_standards_weighting_factor_test() {
        // IEC 60268-16:2020 A.2.2 (edition 5), as quoted by a secondary
        // source: two adjacent octaves fully transmitted (TI = 1, m = 1),
        // the others not at all (m = 0), give STI 0.127, 0.279, 0.398,
        // 0.531, 0.486, 0.302 for the pairs 125/250 Hz … 4k/8k Hz, within
        // the test's 0.001
        let want = [0.127, 0.279, 0.398, 0.531, 0.486, 0.302];
        for (k, w) in want.iter().enumerate() {
            let bands: Vec<(f64, [f64; 14])> = OCTAVES_HZ
                .iter()
                .enumerate()
                .map(|(i, &c)| (c, [if i == k || i == k + 1 { 1.0 } else { 0.0 }; 14]))
                .collect();
            let got = speech(&bands, None).sti.unwrap();
            assert!((got - w).abs() < 0.001, "pair {k}: {got} vs {w}");
        }
    }

    #[test]
    fn a_missing_octave_withholds_the_sti() {
        let m = MODULATION_HZ.map(|f| mtf_exponential(1.0, f));
        let s = speech(&[(250.0, m), (500.0, m)], None);
        assert_eq!(s.sti, None);
        assert_eq!(s.qualification, None);
        assert_eq!(s.bands.len(), 2);
        assert!(s.warnings.iter().any(|w| w.code == Code::SpeechWithheld));
    }

    #[test]
    fn qualification_bands_of_annex_f() {
        // IEC 60268-16:2011 table F.1 (from memory): band edges 0.04 apart
        assert_eq!(qualification(0.80), "A+");
        assert_eq!(qualification(0.74), "A");
        assert_eq!(qualification(0.62), "D");
        assert_eq!(qualification(0.60), "D");
        assert_eq!(qualification(0.599), "E");
        assert_eq!(qualification(0.45), "H");
        assert_eq!(qualification(0.2), "U");
    }

    #[test]
    fn masking_slope_is_continuous_at_its_joints() {
        // the piecewise slope of annex A joins at 63 and 67 dB, and to
        // within 0.2 dB (the table's rounding) at 100 dB
        assert!((masking_db(63.0 - 1e-9) - masking_db(63.0)).abs() < 0.01);
        assert!((masking_db(67.0 - 1e-9) - masking_db(67.0)).abs() < 0.01);
        assert!((masking_db(100.0 - 1e-9) - masking_db(100.0)).abs() < 0.21);
        // at the absolute reception threshold of 125 Hz (46 dB), alone,
        // m is halved: I/(I + I_rt) = 1/2 (annex A, closed form)
        let c = Conditions {
            speech_level_dba: 46.0 - MALE_SPEECH_RELATIVE_DB[0],
            speech_level_given: true,
            noise_db: None,
            noise_source: None,
            noise: None,
        };
        let s = speech(&OCTAVES_HZ.map(|f| (f, [1.0; 14])), Some(&c));
        assert!((s.bands[0].factor.unwrap() - 0.5).abs() < 1e-12);
        assert_eq!(masking_db(110.0), -10.0);
    }

    #[test]
    fn a_steady_noise_scales_every_m_and_the_sti_follows_by_hand() {
        // speech 20 dB above the noise in every octave, levels loud enough
        // that masking and threshold hardly count: m·1/(1 + 10^(−SNR/10))
        let t60 = 0.8;
        let m = MODULATION_HZ.map(|f| mtf_exponential(t60, f));
        let speech_dba = 60.0;
        let snr = [12.0, 9.0, 6.0, 3.0, 0.0, -3.0, 15.0];
        let noise: [f64; 7] =
            std::array::from_fn(|k| speech_dba + MALE_SPEECH_RELATIVE_DB[k] - snr[k]);
        let c = Conditions {
            speech_level_dba: speech_dba,
            speech_level_given: true,
            noise_db: Some(noise),
            noise_source: Some("a test noise".into()),
            noise: None,
        };
        let s = speech(&OCTAVES_HZ.map(|f| (f, m)), Some(&c));
        let mut hand = [[0.0; 14]; 7];
        for k in 0..7 {
            let b = &s.bands[k];
            // the noise's part of the factor, Houtgast & Steeneken
            let noise_part = 1.0 / (1.0 + 10f64.powf(-snr[k] / 10.0));
            // masking and threshold: the band's total over itself plus the
            // masking from below and the threshold (IEC 60268-16 A.2)
            let it = 10f64.powf((speech_dba + MALE_SPEECH_RELATIVE_DB[k]) / 10.0)
                + 10f64.powf(noise[k] / 10.0);
            let am = b.masking_db.map_or(0.0, |d| 10f64.powf(d / 10.0));
            let rt = 10f64.powf(THRESHOLD_DB[k] / 10.0);
            let mask_part = it / (it + am + rt);
            for i in 0..14 {
                hand[k][i] = m[i] * noise_part * mask_part;
                assert!((b.mtf[i] - hand[k][i]).abs() < 1e-12);
            }
            // the noise dominates the correction where it is close
            assert!((b.factor.unwrap() / noise_part - 1.0).abs() < 0.05);
        }
        let want = by_hand(&hand);
        assert!((s.sti.unwrap() - want).abs() < 0.01, "{:?} {want}", s.sti);
        // and the noise lowers it below the impulse response alone
        let alone = speech(&OCTAVES_HZ.map(|f| (f, m)), None).sti.unwrap();
        assert!(s.sti.unwrap() < alone - 0.1);
        assert!(!s.corrections.impulse_response_only);
    }

    #[test]
    fn the_spatial_mean_is_the_mean_of_the_positions_and_needs_them_all() {
        // hand computation: mean of 0.60, 0.64, 0.68 is 0.64; sample
        // standard deviation sqrt((0.04² + 0 + 0.04²)/2) = 0.04
        let m = spatial_mean(&[Some(0.60), Some(0.64), Some(0.68)]).unwrap();
        assert!((m.mean - 0.64).abs() < 1e-12);
        assert!((m.std.unwrap() - 0.04).abs() < 1e-12);
        assert_eq!(m.qualification, qualification(0.64));
        let e = spatial_mean(&[Some(0.6), None]).unwrap_err();
        assert!(e.contains("1 of the 2 positions"), "{e}");
    }
}
