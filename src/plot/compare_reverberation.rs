//! Reverberation times per octave band of a comparison.

use std::path::Path;

use plotters::prelude::*;

use super::annotate::Marks;
use super::axes::{Drawn, band_axis, band_chart, place_legend};
use super::theme::{canvas, input_colour, pixels, plot_error};
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
    let mut px = pixels();
    let (root, body) = canvas(
        &mut px,
        path,
        &format!("Reverberation time per octave — {title}"),
    )?;
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
    let mut marks = Marks::new();
    let mut draw = || -> std::result::Result<(), Box<dyn std::error::Error>> {
        let mut chart = band_chart(
            &body,
            (f_lo, f_hi),
            &centres,
            y_max,
            (
                "Octave band centre frequency (Hz)",
                "Decay time (s): T30, or T20 where T30 is missing",
            ),
            &mut marks,
        )?;
        let mut drawn = Drawn::default();
        let mut legend_labels: Vec<String> = Vec::new();
        for (k, label) in labels.iter().enumerate() {
            let colour = input_colour(k);
            let pts: Vec<(f64, f64)> = per_band
                .iter()
                .filter_map(|r| r.values.get(k).copied().flatten().map(|v| (r.center_hz, v)))
                .collect();
            let name = if k == 0 {
                format!("{label} (reference)")
            } else {
                label.clone()
            };
            chart
                .draw_series(LineSeries::new(pts.iter().copied(), colour.stroke_width(2)))?
                .label(name.clone())
                .legend(move |(x, y)| {
                    PathElement::new(vec![(x, y), (x + 24, y)], colour.stroke_width(3))
                });
            legend_labels.push(name);
            chart.draw_series(pts.iter().map(|&p| Circle::new(p, 5, colour.filled())))?;
            drawn.line(pts.iter().copied());
            drawn.markers(pts.iter().copied(), 5);
        }
        // one mark per verdict, in the colour of the changed input; each
        // verdict present gets its legend entry (in black: the shape is
        // what it says)
        for v in Verdict::ALL {
            let mut at: Vec<((f64, f64), RGBColor)> = Vec::new();
            for (k, _) in labels.iter().enumerate().skip(1) {
                for r in &per_band {
                    let value = r.values.get(k).copied().flatten();
                    if let (Some(y), Some(rv)) = (value, r.verdict.get(k).copied().flatten()) {
                        if rv == v {
                            at.push(((r.center_hz, y), input_colour(k)));
                        }
                    }
                }
            }
            if at.is_empty() {
                continue;
            }
            let shape = verdict_shape(v);
            let s = chart.draw_series(at.iter().map(|&(p, c)| {
                EmptyElement::at(p) + PathElement::new(shape_path(shape), c.stroke_width(2))
            }))?;
            let text = if v.is_audible() {
                mark_label.to_string()
            } else {
                format!("{}: {}", shape_name(shape), v.words())
            };
            s.label(text.clone()).legend(move |(x, y)| {
                PathElement::new(
                    shape_path(shape)
                        .into_iter()
                        .map(|(a, b)| (x + 12 + a, y + b))
                        .collect::<Vec<_>>(),
                    BLACK.stroke_width(2),
                )
            });
            legend_labels.push(text);
            drawn.markers(at.iter().map(|a| a.0), 11);
        }
        place_legend(&mut chart, &legend_labels, &drawn, &mut marks, "main")?;
        Ok(())
    };
    draw().map_err(plot_error(path))?;
    root.present().map_err(plot_error(path))?;
    // the chart's areas hold the pixels until they are dropped
    drop((root, body));
    marks.extend_lines(&marks_text(bands, labels.len()));
    marks.save(path, &px)
}

/// The shape that marks a verdict: its place in [`Verdict::ALL`] (0 a
/// ring, the audible change).
fn verdict_shape(v: Verdict) -> usize {
    Verdict::ALL.iter().position(|a| *a == v).unwrap_or(8)
}

/// The shape's name in the legend.
fn shape_name(shape: usize) -> &'static str {
    [
        "ring",
        "square",
        "diamond",
        "triangle",
        "cross",
        "plus",
        "down triangle",
        "bar",
        "dot",
    ][shape.min(8)]
}

/// The outline of mark `shape` round (0, 0) as one path in px, about 20
/// px across.
fn shape_path(shape: usize) -> Vec<(i32, i32)> {
    let circle = |r: f64| -> Vec<(i32, i32)> {
        (0..=24)
            .map(|i| {
                let a = std::f64::consts::TAU * f64::from(i) / 24.0;
                ((r * a.cos()).round() as i32, (r * a.sin()).round() as i32)
            })
            .collect()
    };
    match shape {
        0 => circle(10.0),
        1 => vec![(-9, -9), (9, -9), (9, 9), (-9, 9), (-9, -9)],
        2 => vec![(0, -11), (11, 0), (0, 11), (-11, 0), (0, -11)],
        3 => vec![(0, -11), (10, 8), (-10, 8), (0, -11)],
        4 => vec![(-8, -8), (8, 8), (0, 0), (-8, 8), (8, -8)],
        5 => vec![(-10, 0), (10, 0), (0, 0), (0, -10), (0, 10)],
        6 => vec![(0, 11), (10, -8), (-10, -8), (0, 11)],
        7 => vec![(-10, 0), (10, 0)],
        _ => circle(3.0),
    }
}
