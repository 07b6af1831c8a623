//! The impulse response near its peak above its energy-time curve.

use std::path::Path;

use plotters::prelude::*;

use super::annotate::Marks;
use super::axes::{Drawn, chart_builder, place_legend, styled_mesh};
use super::theme::{BLUE, FONT, ORANGE, SIZE, pixels, plot_error, register_font};
use crate::analysis::etc;
use crate::error::Result;

/// Largest value per block, so a long curve keeps its peaks when drawn
/// with about `points` points. Returns (index of block start, value).
fn block_max(values: &[f64], points: usize) -> Vec<(usize, f64)> {
    let block = (values.len() / points.max(1)).max(1);
    values
        .chunks(block)
        .enumerate()
        .map(|(i, c)| {
            (
                i * block,
                c.iter().cloned().fold(f64::NEG_INFINITY, f64::max),
            )
        })
        .collect()
}

/// Draws the impulse response near its peak (linear, normalised) above its
/// energy-time curve in dB to a PNG. `start_s` is the time of `ir[0]`.
pub fn impulse_png(
    path: &Path,
    title: &str,
    ir: &[f64],
    start_s: f64,
    delay_s: f64,
    sample_rate_hz: u32,
) -> Result<()> {
    register_font();
    let fs = f64::from(sample_rate_hz);
    let mut px = pixels();
    let root = BitMapBackend::with_buffer(&mut px, SIZE).into_drawing_area();
    root.fill(&WHITE).map_err(plot_error(path))?;
    let (head, body) = root.split_vertically(50);
    head.draw(&Text::new(
        format!("Impulse response — {title}"),
        (20, 14),
        (FONT, 26).into_font(),
    ))
    .map_err(plot_error(path))?;
    let (top, bottom) = body.split_vertically(body.dim_in_pixel().1 / 2);
    let t_ms = |i: usize| (start_s + i as f64 / fs) * 1e3;
    let peak = ir.iter().fold(0.0f64, |m, v| m.max(v.abs())).max(1e-300);
    // top: from 5 ms before the peak to 60 ms after it
    let d_ms = delay_s * 1e3;
    let (a, b) = (d_ms - 5.0, d_ms + 60.0);
    let mut marks = Marks::new();
    let mut draw_top = || -> std::result::Result<(), Box<dyn std::error::Error>> {
        let mut chart = chart_builder(&top, 50).build_cartesian_2d(a..b, -1.05..1.05)?;
        styled_mesh(&mut chart)
            .x_desc("Time after the start of the recording (ms)")
            .y_desc("Amplitude (re peak)")
            .x_label_formatter(&|v: &f64| format!("{v:.0}"))
            .y_label_formatter(&|v: &f64| format!("{:.1}", (v * 10.0).round() / 10.0 + 0.0))
            .draw()?;
        let pts: Vec<(f64, f64)> = ir
            .iter()
            .enumerate()
            .map(|(i, v)| (t_ms(i), v / peak))
            .filter(|(t, _)| *t >= a && *t <= b)
            .collect();
        let mut drawn = Drawn::default();
        drawn.line(pts.iter().copied());
        // the arrival: the peak, or a direct sound ahead of a stronger
        // build-up (analysis::delay::direct_sound)
        let label = format!("impulse response, arrival at {d_ms:.3} ms");
        chart
            .draw_series(LineSeries::new(pts, BLUE.stroke_width(1)))?
            .label(label.clone())
            .legend(|(x, y)| PathElement::new(vec![(x, y), (x + 24, y)], BLUE.stroke_width(3)));
        place_legend(&mut chart, &[label], &drawn, &mut marks, "impulse")?;
        Ok(())
    };
    draw_top().map_err(plot_error(path))?;
    let etc_db = etc::energy_time_curve_db(ir, fs, -120.0);
    let floor = {
        let mut sorted: Vec<f64> = etc_db.clone();
        sorted.sort_by(|x, y| x.total_cmp(y));
        let median = sorted.get(sorted.len() / 2).copied().unwrap_or(-100.0);
        ((median - 20.0) / 10.0).floor() * 10.0
    };
    // the axis starts 5 ms before the direct sound: what comes before is
    // the circular response's wrap-around and the envelope's tails, not
    // sound in the room
    let lead_ms = 5.0;
    let (ta, tb) = (
        (d_ms - lead_ms).max(t_ms(0)),
        t_ms(ir.len().saturating_sub(1)),
    );
    let i0 = (((ta / 1e3 - start_s) * fs).floor().max(0.0) as usize).min(etc_db.len());
    let reduced: Vec<(usize, f64)> = block_max(&etc_db[i0..], 2000)
        .into_iter()
        .map(|(i, v)| (i + i0, v))
        .collect();
    marks.push("etc x range", format!("{ta:.3}..{tb:.3}"));
    marks.push("direct sound ms", format!("{d_ms:.3}"));
    let floor_shown = floor.max(-120.0);
    // the most the curve shows before the direct sound (the last 0.5 ms
    // before it excepted: the rise of the peak itself)
    let before = etc_db
        .iter()
        .enumerate()
        .filter(|(i, _)| t_ms(*i) >= ta && t_ms(*i) < d_ms - 0.5)
        .map(|(_, v)| *v)
        .fold(f64::NEG_INFINITY, f64::max);
    marks.push("etc max before direct sound db", format!("{before:.1}"));
    marks.push("etc floor db", format!("{floor_shown:.1}"));
    let mut draw_bottom = || -> std::result::Result<(), Box<dyn std::error::Error>> {
        let mut chart = chart_builder(&bottom, 50).build_cartesian_2d(ta..tb, floor_shown..3.0)?;
        styled_mesh(&mut chart)
            .x_desc("Time after the start of the recording (ms)")
            .y_desc("Energy (dB re peak)")
            .x_label_formatter(&|v: &f64| format!("{v:.0}"))
            .y_label_formatter(&|v: &f64| format!("{v:.0}"))
            .draw()?;
        let pts: Vec<(f64, f64)> = reduced
            .iter()
            .map(|(i, v)| (t_ms(*i), *v))
            .filter(|(t, _)| *t >= ta)
            .collect();
        let mut drawn = Drawn::default();
        drawn.line(pts.iter().copied());
        chart
            .draw_series(LineSeries::new(pts, ORANGE.stroke_width(1)))?
            .label("energy-time curve (squared envelope)")
            .legend(|(x, y)| PathElement::new(vec![(x, y), (x + 24, y)], ORANGE.stroke_width(3)));
        place_legend(
            &mut chart,
            &["energy-time curve (squared envelope)".to_string()],
            &drawn,
            &mut marks,
            "etc",
        )?;
        Ok(())
    };
    draw_bottom().map_err(plot_error(path))?;
    root.present().map_err(plot_error(path))?;
    // the chart's areas hold the pixels until they are dropped
    drop((root, head, body, top, bottom));
    marks.save(path, &px)
}
