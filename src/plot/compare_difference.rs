//! Each response of a comparison minus the reference's.

use std::path::Path;

use plotters::prelude::*;

use super::annotate::Marks;
use super::axes::{Clip, draw_log_panel};
use super::theme::{canvas, input_colour, pixels, plot_error};
use crate::error::Result;

/// Each response minus the reference's.
pub fn compare_difference_png(
    path: &Path,
    title: &str,
    frequency_hz: &[f64],
    diffs: &[(String, Vec<f64>)],
    reference: &str,
) -> Result<()> {
    let mut px = pixels();
    let (root, body) = canvas(&mut px, path, &format!("Change of the response — {title}"))?;
    let f1 = frequency_hz.first().copied().unwrap_or(20.0);
    let f2 = frequency_hz.last().copied().unwrap_or(20_000.0);
    let all: Vec<f64> = diffs.iter().flat_map(|c| c.1.iter().copied()).collect();
    let peak = all
        .iter()
        .filter(|v| v.is_finite())
        .fold(0.0f64, |m, v| m.max(v.abs()));
    // symmetric about 0 dB, at least ±6 dB, in steps of 3 dB
    let span = ((peak * 1.15 / 3.0).ceil() * 3.0).max(6.0);
    let zero = vec![0.0; frequency_hz.len()];
    let mut series = vec![(
        frequency_hz,
        zero.as_slice(),
        RGBColor(140, 140, 140),
        format!("{reference} (reference, 0 dB)"),
    )];
    for (k, (label, v)) in diffs.iter().enumerate() {
        series.push((
            frequency_hz,
            v.as_slice(),
            input_colour(k + 1),
            format!("{label} minus {reference}"),
        ));
    }
    let mut marks = Marks::new();
    draw_log_panel(
        &body,
        (f1, f2),
        (-span, span),
        "Difference (dB)",
        true,
        None,
        &series,
        None,
        Clip::Nothing,
        &mut marks,
        "difference",
    )
    .map_err(plot_error(path))?;
    root.present().map_err(plot_error(path))?;
    // the chart's areas hold the pixels until they are dropped
    drop((root, body));
    marks.save(path, &px)
}
