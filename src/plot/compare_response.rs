//! The responses of a comparison over each other.

use std::path::Path;

use super::annotate::Marks;
use super::axes::{Clip, TargetOverlay, db_range, draw_log_panel};
use super::theme::{canvas, input_colour, pixels, plot_error};
use crate::error::Result;

/// The responses of a comparison over each other.
pub fn compare_response_png(
    path: &Path,
    title: &str,
    frequency_hz: &[f64],
    curves: &[(String, Vec<f64>)],
    smoothing: &str,
    target: Option<&TargetOverlay>,
) -> Result<()> {
    let mut px = pixels();
    let (root, body) = canvas(&mut px, path, &format!("Frequency responses — {title}"))?;
    let f1 = frequency_hz.first().copied().unwrap_or(20.0);
    let f2 = frequency_hz.last().copied().unwrap_or(20_000.0);
    let all: Vec<f64> = curves.iter().flat_map(|c| c.1.iter().copied()).collect();
    let (lo, hi) = db_range(&all, 10.0, 40.0);
    let series: Vec<_> = curves
        .iter()
        .enumerate()
        .map(|(k, (label, v))| {
            (
                frequency_hz,
                v.as_slice(),
                input_colour(k),
                if k == 0 {
                    format!("{label} (reference)")
                } else {
                    label.clone()
                },
            )
        })
        .collect();
    let mut marks = Marks::new();
    draw_log_panel(
        &body,
        (f1, f2),
        (lo, hi),
        &format!("Magnitude (dB), {smoothing}"),
        true,
        None,
        &series,
        target,
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
