//! The measured phase against the minimum phase its magnitude implies.

use std::path::Path;

use super::axes::draw_log_panel;
use super::theme::{BLUE, ORANGE, canvas, plot_error};
use crate::error::Result;

/// Draws the measured phase (delay removed, unwrapped) against the
/// minimum phase its magnitude implies.
pub fn phase_png(
    path: &Path,
    title: &str,
    frequency_hz: &[f64],
    p: &crate::analysis::phase::PhaseAnalysis,
) -> Result<()> {
    let (root, body) = canvas(path, &format!("Phase — {title}"))?;
    let f1 = frequency_hz.first().copied().unwrap_or(20.0);
    let f2 = frequency_hz.last().copied().unwrap_or(20_000.0);
    let all: Vec<f64> = p
        .phase_unwrapped_deg
        .iter()
        .chain(&p.minimum_phase_deg)
        .copied()
        .collect();
    let hi = (all.iter().cloned().fold(f64::MIN, f64::max) / 90.0).ceil() * 90.0 + 45.0;
    let lo = (all.iter().cloned().fold(f64::MAX, f64::min) / 90.0).floor() * 90.0 - 45.0;
    draw_log_panel(
        &body,
        (f1, f2),
        (lo, hi),
        "Phase (degrees, delay removed, unwrapped)",
        true,
        None,
        &[
            (
                frequency_hz,
                &p.phase_unwrapped_deg,
                ORANGE,
                "measured".to_string(),
            ),
            (
                frequency_hz,
                &p.minimum_phase_deg,
                BLUE,
                "minimum phase from the magnitude".to_string(),
            ),
        ],
        None,
    )
    .map_err(plot_error(path))?;
    root.present().map_err(plot_error(path))?;
    Ok(())
}
