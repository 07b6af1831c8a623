//! The decay spectrum within the gate.

use std::path::Path;

use super::annotate::Marks;
use super::axes::{Clip, Series, draw_log_panel};
use super::theme::{band_colour, canvas, plot_error};
use crate::error::Result;

/// Draws the decay spectrum: the spectrum of the gated response as its
/// start moves later, every fourth slice, coloured from the first (deep
/// blue) to the last (warm red).
pub fn decay_spectrum_png(
    path: &Path,
    title: &str,
    frequency_hz: &[f64],
    slices: &[crate::analysis::csd::Slice],
    resolved: (f64, f64),
) -> Result<()> {
    let (root, body) = canvas(path, &format!("Decay spectrum within the gate — {title}"))?;
    // only where the gate resolves the response
    let f1 = frequency_hz
        .first()
        .copied()
        .unwrap_or(20.0)
        .max(resolved.0);
    let f2 = frequency_hz
        .last()
        .copied()
        .unwrap_or(20_000.0)
        .min(resolved.1)
        .max(f1 * 2.0);
    let shown: Vec<&crate::analysis::csd::Slice> = slices.iter().step_by(4).collect();
    let n = shown.len();
    let names: Vec<String> = shown
        .iter()
        .map(|s| format!("window from {:+.2} ms (re the peak)", s.start_s * 1e3))
        .collect();
    let series: Vec<Series<'_>> = shown
        .iter()
        .enumerate()
        .map(|(k, s)| {
            (
                frequency_hz,
                &s.level_db[..],
                band_colour(k, n),
                names[k].clone(),
            )
        })
        .collect();
    let mut marks = Marks::new();
    draw_log_panel(
        &body,
        (f1, f2),
        (-45.0, 3.0),
        "Level (dB re the first spectrum's maximum)",
        true,
        None,
        &series,
        None,
        Clip::End,
        &mut marks,
        "decay spectrum",
    )
    .map_err(plot_error(path))?;
    root.present().map_err(plot_error(path))?;
    drop(root);
    marks.write(path)
}
