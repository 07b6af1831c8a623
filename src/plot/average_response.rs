//! The power average of several positions over the positions.

use std::path::Path;

use plotters::prelude::*;

use super::annotate::Marks;
use super::axes::{Clip, db_range, draw_log_panel};
use super::theme::{BLUE, canvas, pixels, plot_error};
use crate::error::Result;

/// The average of several positions over the positions themselves.
pub fn average_response_png(
    path: &Path,
    title: &str,
    frequency_hz: &[f64],
    positions: &[(String, Vec<f64>)],
    average: &[f64],
    smoothing: &str,
) -> Result<()> {
    let mut px = pixels();
    let (root, body) = canvas(&mut px, path, &format!("Frequency response — {title}"))?;
    let f1 = frequency_hz.first().copied().unwrap_or(20.0);
    let f2 = frequency_hz.last().copied().unwrap_or(20_000.0);
    let all: Vec<f64> = positions
        .iter()
        .flat_map(|c| c.1.iter().copied())
        .chain(average.iter().copied())
        .collect();
    let (lo, hi) = db_range(&all, 10.0, 40.0);
    // each position its own grey (light to dark) and its own legend
    // entry, so that one can tell which faint line is which
    let n = positions.len().max(1);
    let greys: Vec<RGBColor> = (0..positions.len())
        .map(|k| {
            let t = if n == 1 {
                0.5
            } else {
                k as f64 / (n - 1) as f64
            };
            let v = (185.0 - 95.0 * t).round() as u8;
            RGBColor(v, v, v.saturating_add(12))
        })
        .collect();
    let mut series: Vec<_> = positions
        .iter()
        .enumerate()
        .map(|(k, (label, v))| (frequency_hz, v.as_slice(), greys[k], label.clone()))
        .collect();
    series.push((
        frequency_hz,
        average,
        BLUE,
        format!("power average of {} positions", positions.len()),
    ));
    let mut marks = Marks::new();
    draw_log_panel(
        &body,
        (f1, f2),
        (lo, hi),
        &format!("Magnitude (dB), {smoothing}"),
        true,
        None,
        &series,
        None,
        Clip::Nothing,
        &mut marks,
        "response",
    )
    .map_err(plot_error(path))?;
    root.present().map_err(plot_error(path))?;
    // the chart's areas hold the pixels until they are dropped
    drop((root, body));
    marks.save(path, &px)
}
