//! An alignment's plots: each loudspeaker's level with their complex sum
//! as measured and with the suggested settings, and their phases through
//! the crossover band.

use std::path::Path;

use plotters::style::RGBColor;

use super::annotate::Marks;
use super::axes::{Clip, Series, db_range, draw_log_panel};
use super::theme::{canvas, input_colour, pixels, plot_error};
use crate::analysis::align::Alignment;
use crate::error::Result;

/// The sum as measured.
const SUM_AS_IS: RGBColor = RGBColor(120, 120, 120);
/// The sum with the suggested settings.
const SUM_SUGGESTED: RGBColor = RGBColor(20, 20, 20);
/// The crossover band's edges.
const EDGE: RGBColor = RGBColor(170, 170, 170);

/// A curve as dashes (4 points drawn, 3 left out: a break, as the panels
/// draw a non-finite value), so that a curve under it shows through.
fn dashed(values: &[f64]) -> Vec<f64> {
    values
        .iter()
        .enumerate()
        .map(|(i, &v)| if i % 7 < 4 { v } else { f64::NAN })
        .collect()
}

/// A colour halfway to white: the suggested curves over the measured.
fn faint(c: RGBColor) -> RGBColor {
    let m = |v: u8| ((u16::from(v) + 255) / 2) as u8;
    RGBColor(m(c.0), m(c.1), m(c.2))
}

/// The crossover band's edges as two vertical lines from `lo` to `hi`,
/// the first labelled (none without a crossover).
fn edges(a: &Alignment, lo: f64, hi: f64) -> Vec<([f64; 2], [f64; 2], String)> {
    a.crossover
        .as_ref()
        .map(|c| {
            vec![
                ([c.band_hz[0]; 2], [lo, hi], "crossover band".to_string()),
                ([c.band_hz[1]; 2], [lo, hi], String::new()),
            ]
        })
        .unwrap_or_default()
}

/// Each loudspeaker's level and the complex sum, as measured and with the
/// suggested settings.
pub fn align_sum_png(path: &Path, title: &str, a: &Alignment) -> Result<()> {
    let c = &a.curves;
    let f = c.frequency_hz.as_slice();
    let mut px = pixels();
    let (root, body) = canvas(
        &mut px,
        path,
        &format!("Loudspeakers and their sum — {title}"),
    )?;
    let f1 = f.first().copied().unwrap_or(20.0);
    let f2 = f.last().copied().unwrap_or(20_000.0);
    let all: Vec<f64> = c
        .level_db
        .iter()
        .flatten()
        .chain(&c.sum_as_is_db)
        .chain(&c.sum_suggested_db)
        .copied()
        .filter(|v| v.is_finite())
        .collect();
    let (lo, hi) = db_range(&all, 6.0, 36.0);
    let hi = hi + 6.0; // room for the key above the curves
    let mut series: Vec<Series<'_>> = Vec::new();
    for (k, (l, s)) in c.level_db.iter().zip(&a.loudspeakers).enumerate() {
        series.push((f, l, input_colour(k), s.name.clone()));
    }
    series.push((f, &c.sum_as_is_db, SUM_AS_IS, "sum as measured".into()));
    if let Some(x) = &a.crossover {
        series.push((
            f,
            &c.sum_suggested_db,
            SUM_SUGGESTED,
            format!(
                "sum with the suggested settings ({:+.1} dB over the band)",
                x.gain_db
            ),
        ));
    }
    let edge = edges(a, lo, hi);
    for (x, y, label) in &edge {
        series.push((x, y, EDGE, label.clone()));
    }
    let mut marks = Marks::new();
    draw_log_panel(
        &body,
        (f1, f2),
        (lo, hi),
        "Level (dB), 1/24-octave smoothing",
        true,
        None,
        &series,
        None,
        Clip::End,
        &mut marks,
        "sum",
    )
    .map_err(plot_error(path))?;
    root.present().map_err(plot_error(path))?;
    drop((root, body));
    marks.save(path, &px)
}

/// The phases through the crossover band, the first loudspeaker's arrival
/// taken out, as measured (solid) and with the suggested settings
/// (dashed).
pub fn align_phase_png(path: &Path, title: &str, a: &Alignment) -> Result<()> {
    let c = &a.curves;
    let f = c.frequency_hz.as_slice();
    let mut px = pixels();
    let (root, body) = canvas(
        &mut px,
        path,
        &format!("Phase through the crossover — {title}"),
    )?;
    let f1 = f.first().copied().unwrap_or(20.0);
    let f2 = f.last().copied().unwrap_or(20_000.0);
    // the first loudspeaker is the reference: its curve with its setting
    // is the curve as measured, so only the others get a dashed one
    let suggested: Vec<Vec<f64>> = c
        .phase_suggested_deg
        .iter()
        .skip(1)
        .map(|p| dashed(p))
        .collect();
    let mut series: Vec<Series<'_>> = Vec::new();
    for (k, (p, s)) in c.phase_deg.iter().zip(&a.loudspeakers).enumerate() {
        let label = if k == 0 {
            format!("{} (reference)", s.name)
        } else {
            format!("{} as measured", s.name)
        };
        series.push((f, p, input_colour(k), label));
    }
    for (k, (p, s)) in suggested.iter().zip(&a.loudspeakers[1..]).enumerate() {
        series.push((
            f,
            p,
            faint(input_colour(k + 1)),
            format!("{} with its suggested setting (dashed)", s.name),
        ));
    }
    let edge = edges(a, -180.0, 180.0);
    for (x, y, label) in &edge {
        series.push((x, y, EDGE, label.clone()));
    }
    let mut marks = Marks::new();
    draw_log_panel(
        &body,
        (f1, f2),
        (-180.0, 180.0),
        "Phase (degrees)",
        true,
        None,
        &series,
        None,
        Clip::End,
        &mut marks,
        "phase",
    )
    .map_err(plot_error(path))?;
    root.present().map_err(plot_error(path))?;
    drop((root, body));
    marks.save(path, &px)
}
