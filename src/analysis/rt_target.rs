//! A target for the reverberation time: the range of T30 a room should
//! have per octave band, flat (`0.3,0.5`: the same limits in every band)
//! or per band from a file, and the judgement of a measured value against
//! it. Room standards and design guides give such ranges per octave band
//! (often a mid-frequency value with a tolerance that widens in the bass);
//! gliss takes the limits as given and does not pick a standard.
//!
//! The judgement is made here, once: within the range, below it or above
//! it, and whether the side is certain — a value closer to the limit than
//! twice its standard uncertainty is marked `marginal` (it could lie on
//! the other side of the limit within the measurement's own uncertainty).

use serde::{Deserialize, Serialize};

use super::curve_file::{self, Layout};
use crate::error::{Error, Result};

/// The limits of one octave band, s.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct BandLimits {
    /// The band's centre frequency, Hz, as given.
    pub center_hz: f64,
    /// The lowest reverberation time the target allows, s.
    pub min_s: f64,
    /// The highest, s.
    pub max_s: f64,
}

/// The target range of the reverberation time.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(tag = "kind", rename_all = "lowercase")]
pub enum RtTarget {
    /// The same limits in every band.
    Flat {
        /// Lowest, s.
        min_s: f64,
        /// Highest, s.
        max_s: f64,
    },
    /// Limits per octave band; a band not listed has no target.
    Bands {
        /// The bands, low to high.
        bands: Vec<BandLimits>,
    },
}

/// Where a value lies against its band's limits.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum Fit {
    /// min ≤ value ≤ max.
    Within,
    /// value < min: the room is too dry in this band.
    Below,
    /// value > max: the room rings too long in this band.
    Above,
}

impl Fit {
    /// In words: "within the target", "below the target", "above the target".
    pub fn words(self) -> &'static str {
        match self {
            Fit::Within => "within the target",
            Fit::Below => "below the target",
            Fit::Above => "above the target",
        }
    }
}

/// One band's value judged against its limits.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct Judgement {
    /// The band's centre frequency, Hz.
    pub center_hz: f64,
    /// The measured reverberation time, s.
    pub value_s: f64,
    /// The limits applied, s.
    pub min_s: f64,
    /// The limits applied, s.
    pub max_s: f64,
    /// Where the value lies.
    pub fit: Fit,
    /// The value is closer to a limit than twice its standard uncertainty:
    /// within the measurement's uncertainty it could lie on the other side.
    pub marginal: bool,
}

/// Longest reverberation time a target may name, s: beyond any room gliss
/// measures (a large reverberant church is about 10 s), so a larger number
/// is a typing error (ms given for s, say).
const MAX_S: f64 = 30.0;

fn check_limits(min_s: f64, max_s: f64, what: &str) -> Result<()> {
    if !(min_s.is_finite() && max_s.is_finite()) || min_s < 0.0 || max_s <= 0.0 {
        return Err(Error::parameter(format!(
            "{what}: the limits {min_s} and {max_s} s must be positive numbers of seconds"
        )));
    }
    if min_s > max_s {
        return Err(Error::parameter(format!(
            "{what}: the lower limit {min_s} s is above the upper limit {max_s} s; give the lower first"
        )));
    }
    if max_s > MAX_S {
        return Err(Error::parameter(format!(
            "{what}: {max_s} s is longer than any room's reverberation time (limits are in seconds, not milliseconds)"
        )));
    }
    Ok(())
}

impl RtTarget {
    /// A flat range from "MIN,MAX" in seconds, e.g. "0.3,0.5".
    pub fn parse_range(s: &str) -> Result<RtTarget> {
        let parts: Vec<&str> = s.split(',').map(str::trim).collect();
        let nums: Option<Vec<f64>> = match parts.as_slice() {
            [a, b] => [a, b].iter().map(|x| x.parse::<f64>().ok()).collect(),
            _ => None,
        };
        let Some(nums) = nums else {
            return Err(Error::parameter(format!(
                "--target-rt {s:?} is neither MIN,MAX in seconds (e.g. 0.3,0.5) nor a file that exists"
            )));
        };
        check_limits(nums[0], nums[1], &format!("--target-rt {s}"))?;
        Ok(RtTarget::Flat {
            min_s: nums[0],
            max_s: nums[1],
        })
    }

    /// Per-band limits from the text of a file: one band a line,
    /// `centre_hz min_s max_s` (spaces, tabs or commas; `#` comments; an
    /// optional header line), centres increasing.
    pub fn parse_file(text: &str) -> Result<RtTarget> {
        let rows = curve_file::parse(
            text,
            Layout {
                columns: (3, 3),
                expect: "\"centre_hz min_s max_s\" (e.g. \"500 0.4 0.6\")",
                header: true,
                same_columns: true,
            },
        )?;
        let mut bands = Vec::with_capacity(rows.rows.len());
        for (r, line) in rows.rows.iter().zip(&rows.lines) {
            check_limits(r[1], r[2], &format!("line {line}"))?;
            bands.push(BandLimits {
                center_hz: r[0],
                min_s: r[1],
                max_s: r[2],
            });
        }
        Ok(RtTarget::Bands { bands })
    }

    /// The limits at the octave band centred on `center_hz` (exact or
    /// nominal; a listed centre within a sixth of an octave matches), or
    /// `None` where the target names none.
    pub fn limits_at(&self, center_hz: f64) -> Option<(f64, f64)> {
        match self {
            RtTarget::Flat { min_s, max_s } => Some((*min_s, *max_s)),
            RtTarget::Bands { bands } => bands
                .iter()
                .find(|b| (b.center_hz / center_hz).log2().abs() < 1.0 / 6.0)
                .map(|b| (b.min_s, b.max_s)),
        }
    }

    /// In words, for captions: "0.30–0.50 s in every band" or "per band
    /// from 125 Hz to 4 kHz".
    pub fn describe(&self) -> String {
        match self {
            RtTarget::Flat { min_s, max_s } => {
                format!("{min_s:.2}–{max_s:.2} s in every band")
            }
            RtTarget::Bands { bands } => match (bands.first(), bands.last()) {
                (Some(a), Some(b)) => format!(
                    "per band from {} to {}",
                    crate::model::units::hz(a.center_hz),
                    crate::model::units::hz(b.center_hz)
                ),
                _ => "no bands".to_string(),
            },
        }
    }

    /// Judges `value_s` (with its standard uncertainty, if known) in the
    /// octave band at `center_hz`; `None` where the target names no limits.
    pub fn judge(
        &self,
        center_hz: f64,
        value_s: f64,
        uncertainty_s: Option<f64>,
    ) -> Option<Judgement> {
        let (min_s, max_s) = self.limits_at(center_hz)?;
        let fit = if value_s < min_s {
            Fit::Below
        } else if value_s > max_s {
            Fit::Above
        } else {
            Fit::Within
        };
        let distance = (value_s - min_s).abs().min((value_s - max_s).abs());
        let marginal = uncertainty_s.is_some_and(|u| distance < 2.0 * u);
        Some(Judgement {
            center_hz,
            value_s,
            min_s,
            max_s,
            fit,
            marginal,
        })
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn a_flat_range_judges_every_band_by_its_limits() {
        let t = RtTarget::parse_range("0.3, 0.5").unwrap();
        let j = |v| t.judge(1000.0, v, None).unwrap().fit;
        assert_eq!(j(0.29), Fit::Below);
        assert_eq!(j(0.3), Fit::Within);
        assert_eq!(j(0.5), Fit::Within);
        assert_eq!(j(0.51), Fit::Above);
        assert_eq!(t.limits_at(63.0), Some((0.3, 0.5)));
    }

    #[test]
    fn a_value_nearer_a_limit_than_twice_its_uncertainty_is_marginal() {
        let t = RtTarget::parse_range("0.3,0.5").unwrap();
        // 0.52 s with u = 0.015 s: 0.02 s from the limit < 0.03 s
        let near = t.judge(500.0, 0.52, Some(0.015)).unwrap();
        assert_eq!((near.fit, near.marginal), (Fit::Above, true));
        // 0.60 s with the same uncertainty: clearly above
        let far = t.judge(500.0, 0.60, Some(0.015)).unwrap();
        assert_eq!((far.fit, far.marginal), (Fit::Above, false));
        // unknown uncertainty: never marked marginal
        assert!(!t.judge(500.0, 0.501, None).unwrap().marginal);
    }

    #[test]
    fn a_band_file_matches_exact_and_nominal_centres_and_skips_the_rest() {
        let text = "# room for music\ncentre min max\n125 0.5 0.9\n250 0.45 0.7\n500, 0.4, 0.6\n1000\t0.4\t0.6\n";
        let t = RtTarget::parse_file(text).unwrap();
        // the exact base-ten centre of the 125 Hz octave (IEC 61260-1) is 125.89 Hz
        assert_eq!(t.limits_at(125.89), Some((0.5, 0.9)));
        assert_eq!(t.limits_at(1000.0), Some((0.4, 0.6)));
        assert_eq!(t.limits_at(2000.0), None);
        assert!(t.judge(63.0, 1.0, None).is_none());
        assert!(t.describe().contains("125 Hz") && t.describe().contains("1 kHz"));
    }

    #[test]
    fn nonsense_limits_are_refused_with_what_to_do() {
        for (arg, says) in [
            ("0.5,0.3", "lower limit"),
            ("300,500", "not milliseconds"),
            ("0.3", "MIN,MAX"),
            ("a,b", "MIN,MAX"),
            ("-0.1,0.5", "positive"),
        ] {
            let e = RtTarget::parse_range(arg).unwrap_err().to_string();
            assert!(e.contains(says), "{arg}: {e}");
        }
        let e = RtTarget::parse_file("125 0.5\n250 0.4 0.6\n")
            .unwrap_err()
            .to_string();
        assert!(
            e.contains("line 1") && e.contains("centre_hz min_s max_s"),
            "{e}"
        );
        let e = RtTarget::parse_file("125 0.9 0.5\n250 0.4 0.6\n")
            .unwrap_err()
            .to_string();
        assert!(e.contains("line 1") && e.contains("lower limit"), "{e}");
    }
}
