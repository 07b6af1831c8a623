//! Reverberation times per octave band of a comparison.

use std::path::Path;

use plotters::prelude::*;

use super::axes::{band_axis, band_chart, legend};
use super::theme::{canvas, input_colour, plot_error};
use crate::analysis::compare::Verdict;
use crate::error::Result;
use crate::model::{Fraction, Parameter};

/// The values of one band of a comparison, as the caller chose them (a
/// decay time per input: T30, or T20 where T30 is missing), with the
/// stored verdict of each input's change.
#[derive(Debug, Clone, PartialEq)]
pub struct BandPoints {
    /// Nominal centre, Hz.
    pub center_hz: f64,
    /// The band's width; the plot draws the octaves.
    pub fraction: Fraction,
    /// Which decay time the values are.
    pub parameter: Parameter,
    /// The value per input, s (`None` where not measured).
    pub values: Vec<Option<f64>>,
    /// Per input, the verdict comparison.json stores for its change (the
    /// first input, the reference, has none). An audible change gets a
    /// ring.
    pub verdict: Vec<Option<Verdict>>,
}

impl BandPoints {
    /// Whether input `k`'s point gets a ring: its change is audible.
    pub fn ringed(&self, k: usize) -> bool {
        k > 0
            && self.values.get(k).copied().flatten().is_some()
            && self
                .verdict
                .get(k)
                .copied()
                .flatten()
                .is_some_and(Verdict::is_audible)
    }
}

/// What the plot marks, one line per octave band and input after the
/// first: "T30 1/1 500 Hz input 2: audible (ring)". Written into the PNG
/// as a tEXt chunk so that the marks can be read without the pixels.
pub fn marks_text(bands: &[BandPoints], inputs: usize) -> String {
    let mut lines = Vec::new();
    for b in bands.iter().filter(|b| b.fraction == Fraction::Octave) {
        for k in 1..inputs {
            lines.push(format!(
                "{} {} {} Hz input {}: {} ({})",
                b.parameter,
                b.fraction,
                b.center_hz,
                k + 1,
                b.verdict
                    .get(k)
                    .copied()
                    .flatten()
                    .map_or("not_judged", Verdict::code),
                if b.ringed(k) { "ring" } else { "no ring" }
            ));
        }
    }
    lines.join("\n")
}

/// A decay time per octave band for each input (`labels`, the first the
/// reference); the points the caller marked get a ring, explained in the
/// legend by `mark_label`.
pub fn compare_reverberation_png(
    path: &Path,
    title: &str,
    labels: &[String],
    bands: &[BandPoints],
    mark_label: &str,
) -> Result<()> {
    let (root, body) = canvas(path, &format!("Reverberation time per octave — {title}"))?;
    let per_band: Vec<&BandPoints> = bands
        .iter()
        .filter(|b| b.fraction == Fraction::Octave)
        .collect();
    let centres: Vec<f64> = per_band.iter().map(|r| r.center_hz).collect();
    let (f_lo, f_hi) = band_axis(&centres);
    let y_max = per_band
        .iter()
        .flat_map(|r| r.values.iter().flatten())
        .fold(0.1f64, |m, v| m.max(*v))
        * 1.3;
    let y_max = (y_max * 10.0).ceil() / 10.0;
    let draw = || -> std::result::Result<(), Box<dyn std::error::Error>> {
        let mut chart = band_chart(
            &body,
            (f_lo, f_hi),
            y_max,
            "Octave band centre frequency (Hz)",
            "Decay time (s): T30, or T20 where T30 is missing",
        )?;
        for (k, label) in labels.iter().enumerate() {
            let colour = input_colour(k);
            let pts: Vec<(f64, f64)> = per_band
                .iter()
                .filter_map(|r| r.values.get(k).copied().flatten().map(|v| (r.center_hz, v)))
                .collect();
            chart
                .draw_series(LineSeries::new(pts.iter().copied(), colour.stroke_width(2)))?
                .label(if k == 0 {
                    format!("{label} (reference)")
                } else {
                    label.clone()
                })
                .legend(move |(x, y)| {
                    PathElement::new(vec![(x, y), (x + 24, y)], colour.stroke_width(3))
                });
            chart.draw_series(pts.iter().map(|&p| Circle::new(p, 5, colour.filled())))?;
            if k > 0 {
                let rings: Vec<(f64, f64)> = per_band
                    .iter()
                    .filter(|r| r.ringed(k))
                    .filter_map(|r| r.values.get(k).copied().flatten().map(|v| (r.center_hz, v)))
                    .collect();
                let s = chart.draw_series(
                    rings
                        .iter()
                        .map(|&p| Circle::new(p, 10, colour.stroke_width(2))),
                )?;
                if k == 1 && !rings.is_empty() {
                    s.label(mark_label)
                        .legend(move |(x, y)| Circle::new((x + 12, y), 7, colour.stroke_width(2)));
                }
            }
        }
        legend(&mut chart, SeriesLabelPosition::UpperRight)?;
        Ok(())
    };
    draw().map_err(plot_error(path))?;
    root.present().map_err(plot_error(path))?;
    drop(root);
    super::annotate::add_text(
        path,
        super::annotate::MARKS_KEYWORD,
        &marks_text(bands, labels.len()),
    )
}
