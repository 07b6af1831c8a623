//! The frequency response: magnitude above, phase below.

use std::path::Path;

use super::annotate::Marks;
use super::axes::{Clip, TargetOverlay, db_range, draw_log_panel, wrap_phase};
use super::theme::{BLUE, ORANGE, canvas, pixels, plot_error};
use crate::error::Result;

/// Draws the frequency response (magnitude above, phase below) to a PNG,
/// with a target and its tolerance band over the magnitude if given.
#[allow(clippy::too_many_arguments)]
pub fn response_png(
    path: &Path,
    title: &str,
    frequency_hz: &[f64],
    magnitude_db: &[f64],
    phase_deg: &[f64],
    smoothing: &str,
    resolved: Option<(f64, f64)>,
    target: Option<&TargetOverlay>,
) -> Result<()> {
    let err = plot_error(path);
    let mut px = pixels();
    let (root, body) = canvas(&mut px, path, &format!("Frequency response — {title}"))?;
    let (top, bottom) = body.split_vertically((body.dim_in_pixel().1 as f64 * 0.64) as u32);
    let f1 = frequency_hz.first().copied().unwrap_or(20.0);
    let f2 = frequency_hz.last().copied().unwrap_or(20_000.0);
    let mut levels = magnitude_db.to_vec();
    if let Some(t) = target {
        levels.extend(&t.curve.target_db);
        if let Some((lo, hi)) = &t.curve.band_db {
            levels.extend(lo);
            levels.extend(hi);
        }
    }
    let (lo, hi) = db_range(&levels, 10.0, 40.0);
    let mut marks = Marks::new();
    let (phase_f, phase) = wrap_phase(frequency_hz, phase_deg);
    draw_log_panel(
        &top,
        (f1, f2),
        (lo, hi),
        "Magnitude (dB re sweep)",
        false,
        resolved,
        &[(
            frequency_hz,
            magnitude_db,
            BLUE,
            format!("magnitude, {smoothing}"),
        )],
        target,
        Clip::Nothing,
        &mut marks,
        "magnitude",
    )
    .map_err(plot_error(path))?;
    draw_log_panel(
        &bottom,
        (f1, f2),
        (-180.0, 180.0),
        "Phase (degrees)",
        true,
        resolved,
        &[(
            &phase_f,
            &phase,
            ORANGE,
            "phase, delay removed, wrapped".to_string(),
        )],
        None,
        Clip::Nothing,
        &mut marks,
        "phase",
    )
    .map_err(plot_error(path))?;
    root.present().map_err(err)?;
    // the chart's areas hold the pixels until they are dropped
    drop((root, body, top, bottom));
    marks.save(path, &px)
}
