//! The group delay and the excess group delay.

use std::path::Path;

use super::annotate::Marks;
use super::axes::{Clip, draw_log_panel};
use super::theme::{BLUE, ORANGE, canvas, pixels, plot_error};
use crate::error::Result;

/// Draws the group delay (delay removed) and the excess group delay (with
/// the delay put back), in milliseconds.
pub fn group_delay_png(
    path: &Path,
    title: &str,
    frequency_hz: &[f64],
    p: &crate::analysis::phase::PhaseAnalysis,
    delay_s: f64,
) -> Result<()> {
    let mut px = pixels();
    let (root, body) = canvas(&mut px, path, &format!("Group delay — {title}"))?;
    let f1 = frequency_hz.first().copied().unwrap_or(20.0);
    let f2 = frequency_hz.last().copied().unwrap_or(20_000.0);
    let gd: Vec<f64> = p.group_delay_s.iter().map(|t| t * 1e3).collect();
    let excess: Vec<f64> = p.excess_group_delay_s.iter().map(|t| t * 1e3).collect();
    // the view: around the delay, clipped so that a spike at a notch does
    // not flatten everything else
    let mut sorted: Vec<f64> = gd
        .iter()
        .chain(&excess)
        .copied()
        .filter(|v| v.is_finite())
        .collect();
    sorted.sort_by(|a, b| a.total_cmp(b));
    let q = |x: f64| {
        sorted
            .get(((sorted.len() as f64 - 1.0) * x) as usize)
            .copied()
            .unwrap_or(0.0)
    };
    let (lo, hi) = (q(0.02).min(0.0) - 1.0, q(0.98).max(delay_s * 1e3) + 1.0);
    let mut marks = Marks::new();
    draw_log_panel(
        &body,
        (f1, f2),
        (lo, hi),
        "Time (ms)",
        true,
        None,
        &[
            (
                frequency_hz,
                &gd,
                ORANGE,
                format!("group delay, 0 ms = the arrival at {:.3} ms", delay_s * 1e3),
            ),
            (
                frequency_hz,
                &excess,
                BLUE,
                format!(
                    "excess group delay: beyond the minimum phase, arrival at {:.3} ms not removed",
                    delay_s * 1e3
                ),
            ),
        ],
        None,
        Clip::Mark,
        &mut marks,
        "group delay",
    )
    .map_err(plot_error(path))?;
    root.present().map_err(plot_error(path))?;
    // the chart's areas hold the pixels until they are dropped
    drop((root, body));
    marks.save(path, &px)
}
