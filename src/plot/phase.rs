//! The measured phase against the minimum phase its magnitude implies.

use std::path::Path;

use super::annotate::Marks;
use super::axes::{Clip, draw_log_panel, wrap_phase};
use super::theme::{BLUE, ORANGE, canvas, pixels, plot_error};
use crate::error::Result;

pub use crate::model::plot_kind::PhaseView;

/// Draws the measured phase (delay removed) against the minimum phase its
/// magnitude implies, wrapped into −180…180° or unwrapped as `view` asks.
pub fn phase_png(
    path: &Path,
    title: &str,
    frequency_hz: &[f64],
    p: &crate::analysis::phase::PhaseAnalysis,
    view: PhaseView,
) -> Result<()> {
    let mut px = pixels();
    let (root, body) = canvas(&mut px, path, &format!("Phase — {title}"))?;
    let f1 = frequency_hz.first().copied().unwrap_or(20.0);
    let f2 = frequency_hz.last().copied().unwrap_or(20_000.0);
    let mut marks = Marks::new();
    marks.push(
        "phase view",
        match view {
            PhaseView::Wrapped => "wrapped",
            PhaseView::Unwrapped => "unwrapped",
        },
    );
    let (measured_f, measured, minimum_f, minimum, range, desc) = match view {
        PhaseView::Wrapped => {
            let (mf, m) = wrap_phase(frequency_hz, &p.phase_unwrapped_deg);
            let (nf, n) = wrap_phase(frequency_hz, &p.minimum_phase_deg);
            (
                mf,
                m,
                nf,
                n,
                (-180.0, 180.0),
                "Phase (degrees, delay removed, wrapped)",
            )
        }
        PhaseView::Unwrapped => {
            let all: Vec<f64> = p
                .phase_unwrapped_deg
                .iter()
                .chain(&p.minimum_phase_deg)
                .copied()
                .filter(|v| v.is_finite())
                .collect();
            let hi = (all.iter().cloned().fold(f64::MIN, f64::max) / 90.0).ceil() * 90.0 + 45.0;
            let lo = (all.iter().cloned().fold(f64::MAX, f64::min) / 90.0).floor() * 90.0 - 45.0;
            (
                frequency_hz.to_vec(),
                p.phase_unwrapped_deg.clone(),
                frequency_hz.to_vec(),
                p.minimum_phase_deg.clone(),
                (lo, hi),
                "Phase (degrees, delay removed, unwrapped)",
            )
        }
    };
    draw_log_panel(
        &body,
        (f1, f2),
        range,
        desc,
        true,
        None,
        &[
            (&measured_f, &measured, ORANGE, "measured".to_string()),
            (
                &minimum_f,
                &minimum,
                BLUE,
                "minimum phase from the magnitude".to_string(),
            ),
        ],
        None,
        Clip::Nothing,
        &mut marks,
        "phase",
    )
    .map_err(plot_error(path))?;
    root.present().map_err(plot_error(path))?;
    // the chart's areas hold the pixels until they are dropped
    drop((root, body));
    marks.save(path, &px)
}
