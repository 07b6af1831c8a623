//! A target curve and the measured response's deviation from it.
//!
//! The file: one point a line, `frequency_hz target_db [lower_db
//! [upper_db]]`, separated by commas, spaces or tabs; `#` comments; an
//! optional header line of column names first. `lower_db` and `upper_db`
//! are the tolerances below and above the target (positive numbers: `3 3`
//! means −3/+3 dB); one tolerance column means ± that much. Between its
//! points the target is interpolated linearly in dB against log frequency
//! (common practice); it is never extrapolated beyond its first and last
//! point.
//!
//! The measured response in dB re the sweep has an arbitrary level (the
//! gain of the amplifier, the microphone, the interface), so by default
//! it is aligned to the target first: the mean level difference over the
//! compared range (weighted by log frequency) is added to it and reported
//! as `level_offset_db`. Without alignment (`--target-absolute`) the
//! levels are compared as they are, for calibrated SPL targets.

use crate::error::Error;
use serde::{Deserialize, Serialize};

use super::curve_file::{self, Layout};

/// One point of a target curve.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct TargetPoint {
    /// Frequency, Hz.
    pub frequency_hz: f64,
    /// Target level, dB.
    pub target_db: f64,
    /// Tolerances below and above the target, dB (positive), if given.
    pub tolerance_db: Option<(f64, f64)>,
}

/// A target curve, parsed.
#[derive(Debug, Clone, PartialEq)]
pub struct Target {
    /// The points, frequencies increasing.
    pub points: Vec<TargetPoint>,
    /// Line number of each point in the file.
    pub lines: Vec<usize>,
}

/// How far a measured response lies from a target over a range.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct TargetReport {
    /// Largest |measured + offset − target| over the range, dB.
    pub max_abs_db: f64,
    /// Mean |measured + offset − target| over the range, weighted by log
    /// frequency, dB.
    pub mean_abs_db: f64,
    /// Share (0 to 1) of the range, on a log-frequency axis, where the
    /// aligned response lies within the tolerance; `null` when the target
    /// has no tolerance.
    pub inside_share: Option<f64>,
    /// Frequency of the largest deviation, Hz.
    pub worst_hz: f64,
    /// Signed deviation there (measured + offset − target), dB.
    pub worst_db: f64,
    /// The compared range [low, high], Hz.
    pub range_hz: [f64; 2],
    /// Added to the measured response to align it to the target: the
    /// mean of target − measured over the range (0 without alignment), dB.
    pub level_offset_db: f64,
    /// Whether the offset was taken out (false: `--target-absolute`).
    pub aligned: bool,
    /// Grid points compared.
    pub points: usize,
}

/// The target drawn over a response: on the response's grid within the
/// compared range, already in the plotted curve's units.
#[derive(Debug, Clone, PartialEq)]
pub struct TargetCurve {
    /// Frequencies, Hz.
    pub frequency_hz: Vec<f64>,
    /// Target, dB.
    pub target_db: Vec<f64>,
    /// The tolerance band (lower and upper edge, dB), if the target has one.
    pub band_db: Option<(Vec<f64>, Vec<f64>)>,
}

impl Target {
    /// Parses a target file; an error names the line.
    pub fn parse(text: &str) -> crate::Result<Target> {
        let rows = curve_file::parse(
            text,
            Layout {
                columns: (2, 4),
                expect: "\"frequency_hz target_db [lower_db [upper_db]]\"",
                header: true,
                same_columns: true,
            },
        )?;
        let mut points = Vec::with_capacity(rows.rows.len());
        for (v, &n) in rows.rows.iter().zip(&rows.lines) {
            let tolerance_db = match v.len() {
                2 => None,
                3 => Some((v[2], v[2])),
                _ => Some((v[2], v[3])),
            };
            if let Some((lo, hi)) = tolerance_db {
                if lo < 0.0 || hi < 0.0 || lo + hi <= 0.0 {
                    return Err(Error::input(format!(
                        "line {n}: the tolerances must be positive dB below and above the target (e.g. 3 3 for -3/+3 dB); read {lo} and {hi}"
                    )));
                }
            }
            points.push(TargetPoint {
                frequency_hz: v[0],
                target_db: v[1],
                tolerance_db,
            });
        }
        Ok(Target {
            points,
            lines: rows.lines,
        })
    }

    /// First and last frequency of the file, Hz.
    pub fn span_hz(&self) -> (f64, f64) {
        (
            self.points[0].frequency_hz,
            self.points[self.points.len() - 1].frequency_hz,
        )
    }

    /// Whether the file gives tolerances.
    pub fn has_tolerance(&self) -> bool {
        self.points[0].tolerance_db.is_some()
    }

    /// The target and its tolerances at `f`, interpolated linearly in dB
    /// against log frequency; `None` outside the file's span.
    pub fn at(&self, f: f64) -> Option<TargetPoint> {
        let p = &self.points;
        let (lo, hi) = self.span_hz();
        if !(f >= lo * (1.0 - 1e-12) && f <= hi * (1.0 + 1e-12)) {
            return None;
        }
        let k = p
            .partition_point(|q| q.frequency_hz <= f)
            .clamp(1, p.len() - 1);
        let (a, b) = (p[k - 1], p[k]);
        let u = curve_file::log_fraction(f, a.frequency_hz, b.frequency_hz).clamp(0.0, 1.0);
        let lerp = |x: f64, y: f64| x + u * (y - x);
        Some(TargetPoint {
            frequency_hz: f,
            target_db: lerp(a.target_db, b.target_db),
            tolerance_db: match (a.tolerance_db, b.tolerance_db) {
                (Some(x), Some(y)) => Some((lerp(x.0, y.0), lerp(x.1, y.1))),
                _ => None,
            },
        })
    }

    /// The compared range: `requested` [low, high] Hz, or by default the
    /// overlap of the file's span and `band` (the measured band). Refused
    /// when it does not lie within both.
    pub fn range(
        &self,
        band: (f64, f64),
        requested: Option<(f64, f64)>,
    ) -> crate::Result<(f64, f64)> {
        let (t1, t2) = self.span_hz();
        let (lo, hi) = (t1.max(band.0), t2.min(band.1));
        if hi <= lo {
            return Err(Error::input(format!(
                "the target covers {t1} to {t2} Hz and the measurement {} to {} Hz: they do not overlap; give a target for the swept band",
                band.0, band.1
            )));
        }
        match requested {
            None => Ok((lo, hi)),
            Some((a, b)) if a >= lo * (1.0 - 1e-9) && b <= hi * (1.0 + 1e-9) => Ok((a, b)),
            Some((a, b)) => Err(Error::input(format!(
                "--target-range {a},{b} reaches beyond {lo} to {hi} Hz, where both the target ({t1} to {t2} Hz) and the sweep ({} to {} Hz) are; narrow it",
                band.0, band.1
            ))),
        }
    }

    /// The target on the grid `frequency_hz` within `range`, shifted by
    /// `shift_db` (to draw it in the units of a plotted curve).
    pub fn curve(&self, frequency_hz: &[f64], range: (f64, f64), shift_db: f64) -> TargetCurve {
        let mut c = TargetCurve {
            frequency_hz: Vec::new(),
            target_db: Vec::new(),
            band_db: self.has_tolerance().then(|| (Vec::new(), Vec::new())),
        };
        // the range's own ends too, so the line spans exactly the range
        let mut fs: Vec<f64> = vec![range.0];
        fs.extend(
            frequency_hz
                .iter()
                .copied()
                .filter(|&f| f > range.0 && f < range.1),
        );
        fs.push(range.1);
        for f in fs {
            let Some(p) = self.at(f) else { continue };
            c.frequency_hz.push(f);
            c.target_db.push(p.target_db + shift_db);
            if let (Some((lo, hi)), Some((l, u))) = (&mut c.band_db, p.tolerance_db) {
                lo.push(p.target_db + shift_db - l);
                hi.push(p.target_db + shift_db + u);
            }
        }
        c
    }
}

/// Weights of the grid points inside [lo, hi] on a log-frequency axis:
/// each point stands for the stretch halfway to its neighbours, cut to
/// the range (midpoint rule). Returns (index, weight in octaves).
pub(crate) fn log_weights(frequency_hz: &[f64], (lo, hi): (f64, f64)) -> Vec<(usize, f64)> {
    let inside: Vec<usize> = (0..frequency_hz.len())
        .filter(|&i| {
            let f = frequency_hz[i];
            f >= lo * (1.0 - 1e-12) && f <= hi * (1.0 + 1e-12)
        })
        .collect();
    let (a, b) = (lo.log2(), hi.log2());
    inside
        .iter()
        .enumerate()
        .map(|(j, &i)| {
            let x = frequency_hz[i].log2();
            let left = if j == 0 {
                a
            } else {
                0.5 * (x + frequency_hz[inside[j - 1]].log2())
            };
            let right = if j + 1 == inside.len() {
                b
            } else {
                0.5 * (x + frequency_hz[inside[j + 1]].log2())
            };
            (i, (right.min(b) - left.max(a)).max(0.0))
        })
        .collect()
}

/// The deviation of a measured response (`magnitude_db` at
/// `frequency_hz`, increasing) from `target` over `range` (Hz, within the
/// target's span): aligned by the mean level difference when `align`,
/// else as it is. Refused when fewer than two grid points fall in range.
pub fn deviation(
    frequency_hz: &[f64],
    magnitude_db: &[f64],
    target: &Target,
    range: (f64, f64),
    align: bool,
) -> crate::Result<TargetReport> {
    let weights = log_weights(frequency_hz, range);
    let mut pts = Vec::with_capacity(weights.len());
    for &(i, w) in &weights {
        let f = frequency_hz[i];
        let t = target.at(f).ok_or_else(|| {
            Error::input(format!(
                "the target does not reach {f:.1} Hz; narrow --target-range to the target's span"
            ))
        })?;
        pts.push((f, magnitude_db[i], t, w));
    }
    let total: f64 = pts.iter().map(|p| p.3).sum();
    if pts.len() < 2 || total <= 0.0 {
        return Err(Error::input(format!(
            "the range {} to {} Hz holds fewer than two points of the response; widen --target-range",
            range.0, range.1
        )));
    }
    let offset = if align {
        pts.iter().map(|p| (p.2.target_db - p.1) * p.3).sum::<f64>() / total
    } else {
        0.0
    };
    let (mut max_abs, mut worst_hz, mut worst_db, mut sum_abs, mut inside) =
        (0.0f64, pts[0].0, 0.0, 0.0, 0.0);
    for &(f, m, t, w) in &pts {
        let d = m + offset - t.target_db;
        if d.abs() > max_abs {
            (max_abs, worst_hz, worst_db) = (d.abs(), f, d);
        }
        sum_abs += d.abs() * w;
        if let Some((lo, hi)) = t.tolerance_db {
            if d >= -lo && d <= hi {
                inside += w;
            }
        }
    }
    Ok(TargetReport {
        max_abs_db: max_abs,
        mean_abs_db: sum_abs / total,
        inside_share: target.has_tolerance().then_some(inside / total),
        worst_hz,
        worst_db,
        range_hz: [range.0, range.1],
        level_offset_db: offset,
        aligned: align,
        points: pts.len(),
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    fn flat(db: f64, tol: Option<f64>) -> Target {
        let t = tol.map_or(String::new(), |t| format!(" {t}"));
        Target::parse(&format!("100 {db}{t}\n1600 {db}{t}\n")).unwrap()
    }

    #[test]
    fn interpolation_is_linear_in_db_against_log_frequency() {
        // hand computation: 200 Hz is a quarter of the way from 100 to
        // 1600 Hz in octaves (1 of 4), so 0 + (8 − 0)/4 = 2 dB; tolerances
        // likewise 1 + (3 − 1)/4 = 1.5 and 2 + (6 − 2)/4 = 3
        let t = Target::parse("frequency_hz,target_db,lower_db,upper_db\n100,0,1,2\n1600,8,3,6\n")
            .unwrap();
        let p = t.at(200.0).unwrap();
        assert!((p.target_db - 2.0).abs() < 1e-12);
        let (lo, hi) = p.tolerance_db.unwrap();
        assert!((lo - 1.5).abs() < 1e-12 && (hi - 3.0).abs() < 1e-12);
        assert!(t.at(99.0).is_none() && t.at(1601.0).is_none());
        // one tolerance column is symmetric
        let s = Target::parse("20 0 3\n20000 0 3\n").unwrap();
        assert_eq!(s.at(1000.0).unwrap().tolerance_db, Some((3.0, 3.0)));
    }

    #[test]
    fn deviation_matches_a_hand_computation() {
        // five points one octave apart, 100 … 1600 Hz; range 100–1600 Hz,
        // so the midpoint weights are ½, 1, 1, 1, ½ octave (sum 4).
        let f = [100.0, 200.0, 400.0, 800.0, 1600.0];
        let m = [0.0, 1.0, -2.0, 0.5, 0.0];
        let t = flat(0.0, Some(1.0));
        let r = deviation(&f, &m, &t, (100.0, 1600.0), false).unwrap();
        // |d| = 0, 1, 2, 0.5, 0: max 2 at 400 Hz; mean (0·½ + 1 + 2 + 0.5 + 0·½)/4 = 0.875
        assert!((r.max_abs_db - 2.0).abs() < 1e-12);
        assert_eq!(r.worst_hz, 400.0);
        assert!((r.worst_db + 2.0).abs() < 1e-12);
        assert!((r.mean_abs_db - 0.875).abs() < 1e-12);
        // inside ±1 dB: all but 400 Hz → (4 − 1)/4 = 0.75
        assert!((r.inside_share.unwrap() - 0.75).abs() < 1e-12);
        assert_eq!(r.level_offset_db, 0.0);
        assert_eq!(r.points, 5);
        // aligned: offset = −(0·½ + 1 − 2 + 0.5 + 0·½)/4 = 0.125; then
        // d = 0.125, 1.125, −1.875, 0.625, 0.125; max 1.875 at 400 Hz,
        // mean (0.0625 + 1.125 + 1.875 + 0.625 + 0.0625)/4 = 0.9375; inside:
        // 100, 800, 1600 → (½ + 1 + ½)/4 = 0.5
        let r = deviation(&f, &m, &t, (100.0, 1600.0), true).unwrap();
        assert!((r.level_offset_db - 0.125).abs() < 1e-12);
        assert!((r.max_abs_db - 1.875).abs() < 1e-12);
        assert!((r.mean_abs_db - 0.9375).abs() < 1e-12);
        assert!((r.inside_share.unwrap() - 0.5).abs() < 1e-12);
        // no tolerance: no share
        let r = deviation(&f, &m, &flat(0.0, None), (100.0, 1600.0), true).unwrap();
        assert!(r.inside_share.is_none());
    }

    #[test]
    fn a_level_offset_is_taken_out_only_when_aligning() {
        // closed form: measured = target − 3 everywhere
        let f: Vec<f64> = (0..=48 * 4)
            .map(|k| 100.0 * 2f64.powf(k as f64 / 48.0))
            .collect();
        let m = vec![-3.0; f.len()];
        let t = flat(0.0, Some(1.0));
        let a = deviation(&f, &m, &t, (100.0, 1600.0), true).unwrap();
        assert!((a.level_offset_db - 3.0).abs() < 1e-12 && a.max_abs_db < 1e-12);
        assert_eq!(a.inside_share, Some(1.0));
        let b = deviation(&f, &m, &t, (100.0, 1600.0), false).unwrap();
        assert!((b.max_abs_db - 3.0).abs() < 1e-12 && (b.mean_abs_db - 3.0).abs() < 1e-12);
        assert_eq!(b.inside_share, Some(0.0));
    }

    #[test]
    fn the_range_defaults_to_the_overlap_and_is_checked() {
        let t = flat(0.0, None);
        assert_eq!(t.range((20.0, 20_000.0), None).unwrap(), (100.0, 1600.0));
        assert_eq!(t.range((200.0, 1000.0), None).unwrap(), (200.0, 1000.0));
        assert!(t.range((20.0, 20_000.0), Some((50.0, 1000.0))).is_err());
        assert!(t.range((2000.0, 20_000.0), None).is_err());
    }

    #[test]
    fn malformed_files_name_the_line() {
        let e = Target::parse("100 0\n200 zero\n")
            .unwrap_err()
            .message()
            .to_string();
        assert!(e.starts_with("line 2 "), "{e}");
        let e = Target::parse("100 0 -1\n200 0 1\n")
            .unwrap_err()
            .message()
            .to_string();
        assert!(e.starts_with("line 1:") && e.contains("positive"), "{e}");
        let e = Target::parse("100 0\n200 0 1\n")
            .unwrap_err()
            .message()
            .to_string();
        assert!(e.contains("line 2"), "{e}");
        let e = Target::parse("100 0 1 1 1\n200 0\n")
            .unwrap_err()
            .message()
            .to_string();
        assert!(e.starts_with("line 1 "), "{e}");
    }
}
