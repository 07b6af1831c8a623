//! Averaging positions and comparing conditions: the arithmetic of
//! ISO 3382-2 (means and spreads over positions, the uncertainty of T20 and
//! T30, the measurement grades), the just-noticeable differences of
//! ISO 3382-1 Annex A, and the Sabine relation of ISO 354 for the change
//! of equivalent absorption area. Pure functions over numbers.

use serde::{Deserialize, Serialize};

use crate::model::Parameter;

/// Power average of curves in dB, point by point:
/// 10·lg(mean 10^(L/10)). A point missing (`None`) in any curve is
/// missing in the average.
pub fn power_average_db(curves: &[Vec<Option<f64>>]) -> Vec<Option<f64>> {
    let n = curves.iter().map(Vec::len).min().unwrap_or(0);
    (0..n)
        .map(|i| {
            let mut sum = 0.0;
            for c in curves {
                sum += 10f64.powf(c[i]? / 10.0);
            }
            Some(10.0 * (sum / curves.len() as f64).log10())
        })
        .collect()
}

/// `values` at `at`, interpolated linearly in dB against log frequency
/// (common practice; the same rule as the correction and target files,
/// `curve_file::log_fraction`); `None` outside `frequency_hz`, with a
/// millionth of an octave of slack for grids that agree.
pub fn interpolate_log(frequency_hz: &[f64], values: &[f64], at: &[f64]) -> Vec<Option<f64>> {
    let n = frequency_hz.len().min(values.len());
    let slack = 2f64.powf(1e-6);
    at.iter()
        .map(|&f| {
            if n == 0 || f.is_nan() || f <= 0.0 {
                return None;
            }
            if f < frequency_hz[0] / slack || f > frequency_hz[n - 1] * slack {
                return None;
            }
            let k = frequency_hz[..n].partition_point(|&x| x < f);
            if k == 0 {
                return Some(values[0]);
            }
            if k >= n {
                return Some(values[n - 1]);
            }
            let u = super::curve_file::log_fraction(f, frequency_hz[k - 1], frequency_hz[k]);
            Some(values[k - 1] + u * (values[k] - values[k - 1]))
        })
        .collect()
}

/// Mean and sample standard deviation (n − 1 in the denominator; `None`
/// with fewer than two values) of the values present.
pub fn mean_std(values: &[Option<f64>]) -> (Option<f64>, Option<f64>, usize) {
    let v: Vec<f64> = values.iter().flatten().copied().collect();
    let n = v.len();
    if n == 0 {
        return (None, None, 0);
    }
    let mean = v.iter().sum::<f64>() / n as f64;
    let std = (n >= 2)
        .then(|| (v.iter().map(|x| (x - mean).powi(2)).sum::<f64>() / (n as f64 - 1.0)).sqrt());
    (Some(mean), std, n)
}

/// Precision grades of ISO 3382-2:2008 by the number of source–microphone
/// combinations and of source positions (from memory: survey at least 2
/// combinations; engineering at least 6, with at least 2 sources and 2
/// microphones; precision at least 12, with at least 2 sources and 3
/// microphones).
pub fn grade(combinations: usize, sources: usize) -> &'static str {
    let sources = sources.max(1);
    let microphones = combinations.div_ceil(sources);
    if combinations >= 12 && sources >= 2 && microphones >= 3 {
        "precision"
    } else if combinations >= 6 && sources >= 2 && microphones >= 2 {
        "engineering"
    } else if combinations >= 2 {
        "survey"
    } else {
        "below survey (one position)"
    }
}

/// Whether going from `before` to `after` exceeds the just-noticeable
/// difference of `parameter` (ISO 3382-1:2009 Annex A Table A.1, seen
/// through a secondary source: EDT and T 5 %, C80 1 dB, D50 0.05, Ts
/// 10 ms; C50 takes C80's 1 dB, which is our choice, not the standard's);
/// `None` for a parameter without one.
pub fn exceeds_jnd(parameter: Parameter, before: f64, after: f64) -> Option<bool> {
    Some(parameter.jnd()?.exceeded(before, after))
}

/// Standard uncertainty of T20 or T30 measured with the integrated impulse
/// response method, ISO 3382-2:2008 (seen through a secondary source):
/// σ(T20) = 0.88·T·√((1 + 1.90/n)/(N·B·T)), σ(T30) = 0.55·T·√((1 +
/// 1.52/n)/(N·B·T)), with n decays averaged per position and N positions.
pub fn t_uncertainty(
    parameter: Parameter,
    t_s: f64,
    bandwidth_hz: f64,
    decays: usize,
    positions: usize,
) -> Option<f64> {
    let (k, a) = match parameter {
        Parameter::T20 => (0.88, 1.90),
        Parameter::T30 => (0.55, 1.52),
        _ => return None,
    };
    if t_s.is_nan() || bandwidth_hz.is_nan() || t_s <= 0.0 || bandwidth_hz <= 0.0 {
        return None;
    }
    let n = decays.max(1) as f64;
    let big_n = positions.max(1) as f64;
    Some(k * t_s * ((1.0 + a / n) / (big_n * bandwidth_hz * t_s)).sqrt())
}

/// The judgement of one change of a band parameter against the reference:
/// decided here, once, and stored in comparison.json; the terminal, the
/// plots and the report only show it. It combines two tests: is the change
/// larger than the just-noticeable difference (can it be heard), and is it
/// larger than twice the combined uncertainty (is it real).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum Verdict {
    /// Larger than both the just-noticeable difference and the
    /// uncertainty: an audible change.
    Audible,
    /// Larger than the just-noticeable difference, with no estimate of the
    /// uncertainty to hold it against (C50, C80, D50, Ts and EDT of single
    /// measurements): audible if it is real.
    BeyondJndUncertaintyUnknown,
    /// Larger than the just-noticeable difference, but within the
    /// measurement's uncertainty: it may be the measurement, not the room.
    WithinUncertainty,
    /// Larger than the uncertainty, so real, but no larger than the
    /// just-noticeable difference: not heard.
    MeasurableBelowJnd,
    /// No larger than the just-noticeable difference.
    BelowJnd,
    /// A parameter without a just-noticeable difference whose change is
    /// larger than the uncertainty.
    MeasurableNoJnd,
    /// A parameter without a just-noticeable difference whose change is
    /// within the uncertainty.
    WithinUncertaintyNoJnd,
    /// Neither test could be made.
    NotJudged,
    /// One of the two values was not measured: nothing to judge.
    NotMeasured,
}

impl Verdict {
    /// Every verdict, from the strongest.
    pub const ALL: [Verdict; 9] = [
        Verdict::Audible,
        Verdict::BeyondJndUncertaintyUnknown,
        Verdict::WithinUncertainty,
        Verdict::MeasurableBelowJnd,
        Verdict::BelowJnd,
        Verdict::MeasurableNoJnd,
        Verdict::WithinUncertaintyNoJnd,
        Verdict::NotJudged,
        Verdict::NotMeasured,
    ];

    /// The verdict from its two tests (`None`: that test could not be made).
    pub fn of(
        measured: bool,
        exceeds_jnd: Option<bool>,
        exceeds_uncertainty: Option<bool>,
    ) -> Self {
        if !measured {
            return Verdict::NotMeasured;
        }
        match (exceeds_jnd, exceeds_uncertainty) {
            (Some(true), Some(true)) => Verdict::Audible,
            (Some(true), Some(false)) => Verdict::WithinUncertainty,
            (Some(true), None) => Verdict::BeyondJndUncertaintyUnknown,
            (Some(false), Some(true)) => Verdict::MeasurableBelowJnd,
            (Some(false), _) => Verdict::BelowJnd,
            (None, Some(true)) => Verdict::MeasurableNoJnd,
            (None, Some(false)) => Verdict::WithinUncertaintyNoJnd,
            (None, None) => Verdict::NotJudged,
        }
    }

    /// The verdict as comparison.json and comparison.csv write it.
    pub fn code(self) -> &'static str {
        match self {
            Verdict::Audible => "audible",
            Verdict::BeyondJndUncertaintyUnknown => "beyond_jnd_uncertainty_unknown",
            Verdict::WithinUncertainty => "within_uncertainty",
            Verdict::MeasurableBelowJnd => "measurable_below_jnd",
            Verdict::BelowJnd => "below_jnd",
            Verdict::MeasurableNoJnd => "measurable_no_jnd",
            Verdict::WithinUncertaintyNoJnd => "within_uncertainty_no_jnd",
            Verdict::NotJudged => "not_judged",
            Verdict::NotMeasured => "not_measured",
        }
    }

    /// The verdict in words, for tables and the terminal.
    pub fn words(self) -> &'static str {
        match self {
            Verdict::Audible => "audible change",
            Verdict::BeyondJndUncertaintyUnknown => {
                "larger than the just-noticeable difference (uncertainty not estimated)"
            }
            Verdict::WithinUncertainty => {
                "within measurement uncertainty, though larger than the just-noticeable difference"
            }
            Verdict::MeasurableBelowJnd => "measurable, below the just-noticeable difference",
            Verdict::BelowJnd => "below the just-noticeable difference",
            Verdict::MeasurableNoJnd => "measurable change (no just-noticeable difference given)",
            Verdict::WithinUncertaintyNoJnd => "within measurement uncertainty",
            Verdict::NotJudged => "not judged",
            Verdict::NotMeasured => "not measured in both",
        }
    }

    /// Whether the change is established as audible (beyond both tests):
    /// what the headline counts and the plots ring.
    pub fn is_audible(self) -> bool {
        self == Verdict::Audible
    }
}

/// One parameter's change from the reference (input 0) to each input, as
/// stored in comparison.json: arrays with one entry per input, the
/// reference's entries `null`.
#[derive(Debug, Clone, PartialEq, Default, Serialize, Deserialize)]
pub struct Changes {
    /// Value minus the reference's.
    #[serde(default)]
    pub change: Vec<Option<f64>>,
    /// Change over the reference's value.
    #[serde(default)]
    pub relative_change: Vec<Option<f64>>,
    /// Whether the change exceeds the just-noticeable difference.
    #[serde(default)]
    pub exceeds_jnd: Vec<Option<bool>>,
    /// Whether the change exceeds twice the combined standard uncertainty.
    #[serde(default)]
    pub exceeds_uncertainty: Vec<Option<bool>>,
    /// The judgement of each change (absent in files written before it
    /// was stored: read as not judged).
    #[serde(default)]
    pub verdict: Vec<Option<Verdict>>,
}

/// Judges the changes of `parameter` from `values[0]` (the reference) to
/// every other value, each with its standard uncertainty (`None` where
/// unknown). A change exceeds the uncertainty when it is larger than twice
/// the combined standard uncertainty √(u₀² + u²) (a coverage factor of 2,
/// common practice).
///
/// ```
/// use gliss::analysis::compare::{Verdict, judge};
/// use gliss::model::Parameter;
/// // T30 1.14 s → 1.06 s is 7 %, beyond the 5 % just-noticeable
/// // difference, but each value is only known to ±0.06 s
/// let c = judge(Parameter::T30, &[Some(1.14), Some(1.06)], &[Some(0.06), Some(0.06)]);
/// assert_eq!(c.verdict[1], Some(Verdict::WithinUncertainty));
/// ```
pub fn judge(parameter: Parameter, values: &[Option<f64>], uncertainty: &[Option<f64>]) -> Changes {
    judge_by(|a, b| exceeds_jnd(parameter, a, b), values, uncertainty)
}

/// The just-noticeable difference of the speech transmission index, in STI
/// units: 0.03, the figure commonly quoted for it (from memory; ISO
/// 3382-1's table has no STI, and IEC 60268-16 gives none as such).
pub const STI_JND: f64 = 0.03;

/// [`judge`] for the STI: each value's change from the first against
/// [`STI_JND`] and twice the combined standard uncertainty.
pub fn judge_sti(values: &[Option<f64>], uncertainty: &[Option<f64>]) -> Changes {
    judge_by(|a, b| Some((b - a).abs() > STI_JND), values, uncertainty)
}

/// [`judge`] with the just-noticeable difference as a test of a change
/// from `before` to `after` (`None`: the quantity has none).
fn judge_by(
    exceeds: impl Fn(f64, f64) -> Option<bool>,
    values: &[Option<f64>],
    uncertainty: &[Option<f64>],
) -> Changes {
    let mut out = Changes {
        change: vec![None],
        relative_change: vec![None],
        exceeds_jnd: vec![None],
        exceeds_uncertainty: vec![None],
        verdict: vec![None],
    };
    let v0 = values.first().copied().flatten();
    let u0 = uncertainty.first().copied().flatten();
    for (k, &vk) in values.iter().enumerate().skip(1) {
        let d = v0.zip(vk).map(|(a, b)| b - a);
        let jnd = v0.zip(vk).and_then(|(a, b)| exceeds(a, b));
        let unc = d
            .zip(u0.zip(uncertainty.get(k).copied().flatten()))
            .map(|(d, (a, b))| d.abs() > 2.0 * (a * a + b * b).sqrt());
        out.change.push(d);
        out.relative_change
            .push(v0.zip(d).and_then(|(a, d)| (a.abs() > 0.0).then(|| d / a)));
        out.exceeds_jnd.push(jnd);
        out.exceeds_uncertainty.push(unc);
        out.verdict.push(Some(Verdict::of(d.is_some(), jnd, unc)));
    }
    out
}

/// Speed of sound at `celsius`, m/s: c = 331 + 0.6·t, the form ISO 354
/// gives for 15–30 °C (from memory; one secondary source agrees).
pub fn speed_of_sound(celsius: f64) -> f64 {
    331.0 + 0.6 * celsius
}

/// Equivalent absorption area by the Sabine relation as ISO 354 writes it,
/// A = 55.3·V/(c·T), m² (without the air term 4·V·m, which cancels in a
/// before/after difference at the same temperature and humidity).
pub fn absorption_area_m2(volume_m3: f64, t_s: f64, c: f64) -> f64 {
    55.3 * volume_m3 / (c * t_s)
}

/// The fewest grid points a level alignment averages over.
pub const MIN_ALIGN_POINTS: usize = 5;

/// The level that brings `curve` to `reference` over `band` (Hz) on the
/// log grid `frequency_hz`: the mean of their dB difference there, each
/// grid point (an equal share of an octave) weighing the same (common
/// practice). `None` with fewer than [`MIN_ALIGN_POINTS`] points where
/// both have a value.
pub fn level_offset(
    reference: &[Option<f64>],
    curve: &[Option<f64>],
    frequency_hz: &[f64],
    band: (f64, f64),
) -> Option<f64> {
    let diffs: Vec<f64> = frequency_hz
        .iter()
        .zip(reference.iter().zip(curve))
        .filter(|(f, _)| (band.0..=band.1).contains(*f))
        .filter_map(|(_, (r, c))| Some(r.as_ref()? - c.as_ref()?))
        .collect();
    (diffs.len() >= MIN_ALIGN_POINTS).then(|| diffs.iter().sum::<f64>() / diffs.len() as f64)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::model::Fraction;

    #[test]
    fn power_average_is_the_level_of_the_mean_power() {
        // 0 dB and -6.0206 dB (half the amplitude): mean power (1 + 1/4)/2
        let a = vec![Some(0.0), Some(3.0), None];
        let b = vec![Some(-20.0 * 2f64.log10()), Some(3.0), Some(1.0)];
        let avg = power_average_db(&[a, b]);
        assert!((avg[0].unwrap() - 10.0 * (1.25f64 / 2.0).log10()).abs() < 1e-12);
        assert!((avg[1].unwrap() - 3.0).abs() < 1e-12);
        assert_eq!(avg[2], None);
    }

    #[test]
    fn interpolation_is_linear_in_log_frequency() {
        let f = [100.0, 200.0, 400.0];
        let v = [0.0, 6.0, 0.0];
        let got = interpolate_log(&f, &v, &[100.0, 141.421_356, 300.0, 50.0, 400.0]);
        assert_eq!(got[0], Some(0.0));
        assert!((got[1].unwrap() - 3.0).abs() < 1e-5); // half an octave up
        // 300 Hz is log2(1.5) = 0.585 octave above 200 Hz
        assert!((got[2].unwrap() - 6.0 * (1.0 - 1.5f64.log2())).abs() < 1e-9);
        assert_eq!(got[3], None);
        assert_eq!(got[4], Some(0.0));
    }

    #[test]
    fn mean_and_sample_spread_by_hand() {
        // 1, 2, 4: mean 7/3, deviations -4/3, -1/3, 5/3, squares sum
        // 42/9, over n-1 = 2: 7/3
        let (m, s, n) = mean_std(&[Some(1.0), None, Some(2.0), Some(4.0)]);
        assert_eq!(n, 3);
        assert!((m.unwrap() - 7.0 / 3.0).abs() < 1e-12);
        assert!((s.unwrap() - (7.0f64 / 3.0).sqrt()).abs() < 1e-12);
        assert_eq!(mean_std(&[Some(1.0)]).1, None);
    }

    #[test]
    fn grades_follow_the_position_counts() {
        assert_eq!(grade(1, 1), "below survey (one position)");
        assert_eq!(grade(2, 1), "survey");
        assert_eq!(grade(6, 1), "survey"); // one source is never engineering
        assert_eq!(grade(6, 2), "engineering");
        assert_eq!(grade(12, 2), "precision");
        assert_eq!(grade(12, 6), "engineering"); // only 2 microphones each
    }

    #[test]
    fn uncertainty_matches_the_reference_check_values() {
        // REFERENCES.md [calc]: T = 1 s at 1 kHz, n = N = 1: octave
        // σ(T20) = 0.0562 s, σ(T30) = 0.0328 s; third 0.0988 and 0.0576 s
        let b1 = Fraction::Octave.uncertainty_bandwidth_hz(1000.0).unwrap();
        let b3 = Fraction::Third.uncertainty_bandwidth_hz(1000.0).unwrap();
        let u = |p, b| t_uncertainty(p, 1.0, b, 1, 1).unwrap();
        assert!((u(Parameter::T20, b1) - 0.0562).abs() < 5e-5);
        assert!((u(Parameter::T30, b1) - 0.0328).abs() < 5e-5);
        assert!((u(Parameter::T20, b3) - 0.0988).abs() < 5e-5);
        assert!((u(Parameter::T30, b3) - 0.0576).abs() < 5e-5);
        assert_eq!(t_uncertainty(Parameter::Edt, 1.0, b1, 1, 1), None);
    }

    #[test]
    fn jnd_thresholds() {
        assert_eq!(exceeds_jnd(Parameter::T30, 1.0, 1.03), Some(false));
        assert_eq!(exceeds_jnd(Parameter::T30, 1.0, 1.10), Some(true));
        assert_eq!(exceeds_jnd(Parameter::C80, 2.0, 2.9), Some(false));
        assert_eq!(exceeds_jnd(Parameter::C80, 2.0, 3.1), Some(true));
        assert_eq!(exceeds_jnd(Parameter::D50, 0.5, 0.56), Some(true));
        assert_eq!(exceeds_jnd(Parameter::Ts, 0.050, 0.055), Some(false));
        assert_eq!(exceeds_jnd(Parameter::Inr, 50.0, 60.0), None);
    }

    #[test]
    fn verdict_codes_are_the_serialised_form() {
        for v in Verdict::ALL {
            assert_eq!(serde_json::to_value(v).unwrap(), v.code());
        }
    }

    #[test]
    fn one_verdict_from_the_two_tests() {
        // the demo's case: T30 1.14 s -> 1.06 s is 7 % (beyond the 5 %
        // JND), with an uncertainty of 0.06 s each (2·√2·0.06 = 0.17 s):
        // within the uncertainty, so not called audible
        let c = judge(
            Parameter::T30,
            &[Some(1.14), Some(1.06)],
            &[Some(0.06), Some(0.06)],
        );
        assert_eq!(c.exceeds_jnd, vec![None, Some(true)]);
        assert_eq!(c.exceeds_uncertainty, vec![None, Some(false)]);
        assert_eq!(c.verdict, vec![None, Some(Verdict::WithinUncertainty)]);
        // the same change measured ten times more precisely is audible
        let c = judge(
            Parameter::T30,
            &[Some(1.14), Some(1.06)],
            &[Some(0.006), Some(0.006)],
        );
        assert_eq!(c.verdict[1], Some(Verdict::Audible));
        // a real change too small to hear
        let c = judge(
            Parameter::T30,
            &[Some(1.0), Some(1.04)],
            &[Some(0.001), Some(0.001)],
        );
        assert_eq!(c.verdict[1], Some(Verdict::MeasurableBelowJnd));
        // beyond the JND without an uncertainty; below the JND; missing
        let c = judge(
            Parameter::C80,
            &[Some(0.0), Some(2.0), Some(0.5), None],
            &[None; 4],
        );
        assert_eq!(
            c.verdict,
            vec![
                None,
                Some(Verdict::BeyondJndUncertaintyUnknown),
                Some(Verdict::BelowJnd),
                Some(Verdict::NotMeasured)
            ]
        );
        assert!((c.change[1].unwrap() - 2.0).abs() < 1e-12);
        assert_eq!(c.relative_change[1], None); // over a reference of 0
    }

    #[test]
    fn sabine_area_of_the_reference_room() {
        // REFERENCES.md [calc]: 240 m³, ᾱ = 0.2 over 268 m² (A = 53.6 m²),
        // c = 343 m/s gives Sabine T = 0.721 s (with 24·ln 10 = 55.26; the
        // rounded 55.3 of ISO 354 reads 0.722 s); back again A = 53.6 m²
        let t: f64 = 55.3 * 240.0 / (343.0 * 53.6);
        assert!((t - 0.721).abs() < 1e-3);
        assert!((absorption_area_m2(240.0, t, 343.0) - 53.6).abs() < 1e-9);
        assert!((speed_of_sound(20.0) - 343.0).abs() < 1e-12);
    }

    #[test]
    fn a_level_offset_is_the_mean_difference_over_the_band() {
        // closed form: a curve 3 dB above the reference over the band, and
        // anything outside it, needs -3 dB; a tilt averages to its middle
        let f: Vec<f64> = (0..49)
            .map(|k| 100.0 * 2f64.powf(k as f64 / 12.0))
            .collect();
        let reference: Vec<Option<f64>> = f.iter().map(|_| Some(0.0)).collect();
        let louder: Vec<Option<f64>> = f
            .iter()
            .map(|&x| Some(if x < 1000.0 { 3.0 } else { 20.0 }))
            .collect();
        let o = level_offset(&reference, &louder, &f, (200.0, 800.0)).unwrap();
        assert!((o + 3.0).abs() < 1e-12, "{o}");
        let tilt: Vec<Option<f64>> = f.iter().map(|&x| Some((x / 400.0).log2())).collect();
        let o = level_offset(&reference, &tilt, &f, (200.0, 800.0)).unwrap();
        assert!(o.abs() < 1e-9, "{o}");
        // too few points in common: no offset
        let holes: Vec<Option<f64>> = f.iter().map(|_| None).collect();
        assert!(level_offset(&reference, &holes, &f, (200.0, 800.0)).is_none());
        assert!(level_offset(&reference, &louder, &f, (20_000.0, 30_000.0)).is_none());
    }
}
