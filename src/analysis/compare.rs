//! Averaging positions and comparing conditions: the arithmetic of
//! ISO 3382-2 (means and spreads over positions, the uncertainty of T20 and
//! T30, the measurement grades), the just-noticeable differences of
//! ISO 3382-1 Annex A, and the Sabine relation of ISO 354 for the change
//! of equivalent absorption area. Pure functions over numbers.

use serde::{Deserialize, Serialize};

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

/// The band parameters gliss compares, by their results.json names.
pub const PARAMETERS: [&str; 7] = ["edt_s", "t20_s", "t30_s", "c50_db", "c80_db", "d50", "ts_s"];

/// A just-noticeable difference.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub enum Jnd {
    /// A share of the first value (0.05 = 5 %).
    Relative(f64),
    /// An absolute difference in the parameter's unit.
    Absolute(f64),
}

/// The just-noticeable difference of a parameter, ISO 3382-1:2009 Annex A
/// Table A.1 (seen through a secondary source): EDT and T 5 %, C80 1 dB,
/// D50 0.05, Ts 10 ms. C50 has no entry there; gliss uses C80's 1 dB for
/// it, which is our choice, not the standard's.
pub fn jnd(parameter: &str) -> Option<Jnd> {
    match parameter {
        "edt_s" | "t20_s" | "t30_s" => Some(Jnd::Relative(0.05)),
        "c50_db" | "c80_db" => Some(Jnd::Absolute(1.0)),
        "d50" => Some(Jnd::Absolute(0.05)),
        "ts_s" => Some(Jnd::Absolute(0.010)),
        _ => None,
    }
}

/// Whether going from `before` to `after` exceeds the JND of `parameter`.
pub fn exceeds_jnd(parameter: &str, before: f64, after: f64) -> Option<bool> {
    Some(match jnd(parameter)? {
        Jnd::Relative(r) => (after - before).abs() > r * before.abs(),
        Jnd::Absolute(a) => (after - before).abs() > a,
    })
}

/// The effective bandwidth ISO 3382-2 puts in its uncertainty formula, Hz:
/// about 0.71·fc for octaves and 0.23·fc for one-third octaves.
pub fn bandwidth_hz(center_hz: f64, fraction: &str) -> Option<f64> {
    match fraction {
        "1/1" => Some(0.71 * center_hz),
        "1/3" => Some(0.23 * center_hz),
        _ => None,
    }
}

/// Standard uncertainty of T20 or T30 measured with the integrated impulse
/// response method, ISO 3382-2:2008 (seen through a secondary source):
/// σ(T20) = 0.88·T·√((1 + 1.90/n)/(N·B·T)), σ(T30) = 0.55·T·√((1 +
/// 1.52/n)/(N·B·T)), with n decays averaged per position and N positions.
pub fn t_uncertainty(
    parameter: &str,
    t_s: f64,
    bandwidth_hz: f64,
    decays: usize,
    positions: usize,
) -> Option<f64> {
    let (k, a) = match parameter {
        "t20_s" => (0.88, 1.90),
        "t30_s" => (0.55, 1.52),
        _ => return None,
    };
    if t_s.is_nan() || bandwidth_hz.is_nan() || t_s <= 0.0 || bandwidth_hz <= 0.0 {
        return None;
    }
    let n = decays.max(1) as f64;
    let big_n = positions.max(1) as f64;
    Some(k * t_s * ((1.0 + a / n) / (big_n * bandwidth_hz * t_s)).sqrt())
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

#[cfg(test)]
mod tests {
    use super::*;

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
        let b1 = bandwidth_hz(1000.0, "1/1").unwrap();
        let b3 = bandwidth_hz(1000.0, "1/3").unwrap();
        let u = |p, b| t_uncertainty(p, 1.0, b, 1, 1).unwrap();
        assert!((u("t20_s", b1) - 0.0562).abs() < 5e-5);
        assert!((u("t30_s", b1) - 0.0328).abs() < 5e-5);
        assert!((u("t20_s", b3) - 0.0988).abs() < 5e-5);
        assert!((u("t30_s", b3) - 0.0576).abs() < 5e-5);
        assert_eq!(t_uncertainty("edt_s", 1.0, b1, 1, 1), None);
    }

    #[test]
    fn jnd_thresholds() {
        assert_eq!(exceeds_jnd("t30_s", 1.0, 1.03), Some(false));
        assert_eq!(exceeds_jnd("t30_s", 1.0, 1.10), Some(true));
        assert_eq!(exceeds_jnd("c80_db", 2.0, 2.9), Some(false));
        assert_eq!(exceeds_jnd("c80_db", 2.0, 3.1), Some(true));
        assert_eq!(exceeds_jnd("d50", 0.5, 0.56), Some(true));
        assert_eq!(exceeds_jnd("ts_s", 0.050, 0.055), Some(false));
        assert_eq!(exceeds_jnd("inr_db", 50.0, 60.0), None);
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
}
