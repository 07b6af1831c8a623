//! A tuning: the measured response, the prediction after the correction
//! and the target with its tolerance above; the correction and each
//! filter's curve below.

use std::path::Path;

use plotters::prelude::*;

use super::annotate::Marks;
use super::axes::{Clip, TargetOverlay, db_range, draw_log_panel};
use super::theme::{BLUE, ORANGE, canvas, pixels, plot_error};
use crate::analysis::target::TargetCurve;
use crate::analysis::tuning::response_db;
use crate::error::Result;
use crate::folder::schema::TuningFile;

/// Draws `plots/tuning.png` of a tuning: above, the measured response and
/// the prediction (each level-aligned to the target as the deviations
/// are) over the target and its tolerance band; below, the summed
/// correction and, faintly, each filter's own curve.
pub fn tuning_png(path: &Path, title: &str, t: &TuningFile) -> Result<()> {
    let r = &t.response;
    let f = &r.frequency_hz;
    let measured: Vec<f64> = r
        .measured_db
        .iter()
        .map(|m| m + t.before.level_offset_db)
        .collect();
    let predicted: Vec<f64> = r
        .predicted_db
        .iter()
        .map(|m| m + t.after.level_offset_db)
        .collect();
    let band_db = (!r.tolerance_lower_db.is_empty()).then(|| {
        (
            r.target_db
                .iter()
                .zip(&r.tolerance_lower_db)
                .map(|(a, b)| a - b)
                .collect(),
            r.target_db
                .iter()
                .zip(&r.tolerance_upper_db)
                .map(|(a, b)| a + b)
                .collect(),
        )
    });
    let overlay = TargetOverlay {
        curve: TargetCurve {
            frequency_hz: f.clone(),
            target_db: r.target_db.clone(),
            band_db,
        },
        label: "target".into(),
    };
    let fs = t.settings.sample_rate_hz;
    let each: Vec<Vec<f64>> = t
        .filters
        .iter()
        .map(|x| response_db(std::slice::from_ref(x), fs, f))
        .collect();
    let mut px = pixels();
    let (root, body) = canvas(
        &mut px,
        path,
        &format!(
            "Tuning — {title}: {} filter{}, largest deviation {:.1} → {:.1} dB",
            t.filters.len(),
            if t.filters.len() == 1 { "" } else { "s" },
            t.before.max_abs_db,
            t.after.max_abs_db
        ),
    )?;
    let (top, bottom) = body.split_vertically(480);
    let (f1, f2) = (
        f.first().copied().unwrap_or(20.0),
        f.last().copied().unwrap_or(20_000.0),
    );
    let all: Vec<f64> = measured
        .iter()
        .chain(&predicted)
        .chain(&r.target_db)
        .copied()
        .collect();
    let (lo, hi) = db_range(&all, 6.0, 30.0);
    let mut marks = Marks::new();
    draw_log_panel(
        &top,
        (f1, f2),
        (lo, hi),
        &format!("Level (dB), {}", r.smoothing.words()),
        false,
        None,
        &[
            (f, &measured, BLUE, "measured".into()),
            (f, &predicted, ORANGE, "predicted after correction".into()),
        ],
        Some(&overlay),
        Clip::Mark,
        &mut marks,
        "response",
    )
    .map_err(plot_error(path))?;
    let faint = RGBColor(170, 170, 170);
    let mut series: Vec<(&[f64], &[f64], RGBColor, String)> = each
        .iter()
        .enumerate()
        .map(|(k, v)| {
            let name = if k == 0 { "each filter" } else { "" };
            (f.as_slice(), v.as_slice(), faint, name.to_string())
        })
        .collect();
    series.push((
        f,
        &r.correction_db,
        RGBColor(40, 40, 40),
        "all filters".into(),
    ));
    let corr: Vec<f64> = each
        .iter()
        .flatten()
        .chain(&r.correction_db)
        .copied()
        .collect();
    let (clo, chi) = db_range(&corr, 3.0, 24.0);
    draw_log_panel(
        &bottom,
        (f1, f2),
        (clo.min(-3.0), chi.max(3.0)),
        "Correction (dB)",
        true,
        None,
        &series,
        None,
        Clip::Mark,
        &mut marks,
        "correction",
    )
    .map_err(plot_error(path))?;
    root.present().map_err(plot_error(path))?;
    // the chart's areas hold the pixels until they are dropped
    drop((root, top, bottom, body));
    marks.save(path, &px)
}
