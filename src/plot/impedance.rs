//! A driver's electrical impedance: |Z| in ohms above, its phase below,
//! the fitted lumped model faint over the measurement and fs marked.

use std::path::Path;

use plotters::style::RGBColor;

use super::annotate::Marks;
use super::axes::{Clip, draw_log_panel};
use super::theme::{BLUE, ORANGE, canvas, pixels, plot_error};
use crate::analysis::impedance::Impedance;
use crate::analysis::thiele_small::{Lumped, ThieleSmall};
use crate::error::Result;

/// The model's colours: the measurement's, lightened (faint).
const MODEL_MAGNITUDE: RGBColor = RGBColor(140, 180, 215);
const MODEL_PHASE: RGBColor = RGBColor(235, 180, 135);
/// The resonance's mark.
const MARK: RGBColor = RGBColor(90, 90, 90);

/// A curve on the 48-per-octave grid as dashes (4 points drawn, 3 left
/// out: a break, as the panels draw a non-finite value), so that the
/// measurement shows through the model drawn over it.
fn dashed(values: impl Iterator<Item = f64>) -> Vec<f64> {
    values
        .enumerate()
        .map(|(i, v)| if i % 7 < 4 { v } else { f64::NAN })
        .collect()
}

/// Draws the impedance (with the fitted model and fs when the parameters
/// were read) to a PNG.
pub fn impedance_png(
    path: &Path,
    title: &str,
    z: &Impedance,
    ts: Option<&ThieleSmall>,
) -> Result<()> {
    let err = plot_error(path);
    let mut px = pixels();
    let (root, body) = canvas(&mut px, path, &format!("Impedance — {title}"))?;
    let (top, bottom) = body.split_vertically((body.dim_in_pixel().1 as f64 * 0.64) as u32);
    let f = &z.frequency_hz;
    let f1 = f.first().copied().unwrap_or(20.0);
    let f2 = f.last().copied().unwrap_or(20_000.0);
    let model = ts.map(|t| Lumped {
        re: t.re_ohm,
        le: t.le_mh * 1e-3,
        res: t.res_ohm,
        qms: t.qms,
        fs: t.fs_hz,
    });
    let model_z: Vec<_> = model.map_or_else(Vec::new, |m| f.iter().map(|&x| m.z(x)).collect());
    let model_mag: Vec<f64> = dashed(model_z.iter().map(|c| c.norm()));
    let model_phase: Vec<f64> = dashed(model_z.iter().map(|c| c.arg().to_degrees()));
    let top_ohm = z
        .magnitude_ohm
        .iter()
        .chain(&model_mag)
        .copied()
        .filter(|v| v.is_finite())
        .fold(1.0f64, f64::max);
    // a round top: the next multiple of 5 Ω above 130 % of the peak,
    // room for the legend above the curves
    let hi = ((top_ohm * 1.3) / 5.0).ceil() * 5.0;
    let mut marks = Marks::new();
    let fs_line = ts.map(|t| ([t.fs_hz, t.fs_hz], format!("fs {:.1} Hz", t.fs_hz)));
    let mut upper: Vec<(&[f64], &[f64], RGBColor, String)> =
        vec![(f, &z.magnitude_ohm, BLUE, "|Z| measured".to_string())];
    let fs_mag = [0.0, hi];
    if let Some(t) = ts {
        upper.push((
            f,
            &model_mag,
            MODEL_MAGNITUDE,
            format!(
                "fitted model, dashed (Re {:.2} Ω, Qts {:.3}, Le {:.3} mH)",
                t.re_ohm, t.qts, t.le_mh
            ),
        ));
    }
    if let Some((x, label)) = &fs_line {
        upper.push((x, &fs_mag, MARK, label.clone()));
    }
    draw_log_panel(
        &top,
        (f1, f2),
        (0.0, hi),
        "Impedance magnitude (Ω)",
        false,
        None,
        &upper,
        None,
        Clip::Nothing,
        &mut marks,
        "magnitude",
    )
    .map_err(plot_error(path))?;
    let mut lower: Vec<(&[f64], &[f64], RGBColor, String)> =
        vec![(f, &z.phase_deg, ORANGE, "phase measured".to_string())];
    if ts.is_some() {
        lower.push((
            f,
            &model_phase,
            MODEL_PHASE,
            "phase of the model, dashed".to_string(),
        ));
    }
    let fs_phase = [-90.0, 90.0];
    if let Some((x, _)) = &fs_line {
        lower.push((x, &fs_phase, MARK, String::new()));
    }
    draw_log_panel(
        &bottom,
        (f1, f2),
        (-90.0, 90.0),
        "Phase (degrees)",
        true,
        None,
        &lower,
        None,
        Clip::End,
        &mut marks,
        "phase",
    )
    .map_err(plot_error(path))?;
    root.present().map_err(err)?;
    // the chart's areas hold the pixels until they are dropped
    drop((root, body, top, bottom));
    marks.save(path, &px)
}
