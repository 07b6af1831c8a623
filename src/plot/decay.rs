//! The Schroeder decay curves per octave band with their fitted lines.

use std::path::Path;

use plotters::prelude::*;

use super::annotate::Marks;
use super::axes::{Drawn, chart_builder, place_legend, styled_mesh};
use super::theme::{GRID, band_colour, canvas, pixels, plot_error};
use crate::error::Result;
use crate::model::units::{format_hz, seconds};

/// Draws the Schroeder decay curves of the octave bands, each with the
/// line fitted for T30 (or T20, or EDT) over its evaluation range.
pub fn decay_png(path: &Path, title: &str, room: &crate::analysis::room::Room) -> Result<()> {
    let mut px = pixels();
    let (root, body) = canvas(
        &mut px,
        path,
        &format!("Energy decay per octave band — {title}"),
    )?;
    let t_max = room
        .curves
        .iter()
        .filter_map(|c| c.time_s.last().copied())
        .fold(0.1f64, f64::max)
        .min(
            // enough for the slowest fitted line to reach −65 dB
            room.curves
                .iter()
                .flat_map(|c| c.fits.iter().flatten())
                .map(|f| 65.0 / -f.slope_db_per_s)
                .fold(0.2f64, f64::max),
        );
    let n = room.curves.len();
    let mut marks = Marks::new();
    let mut draw = || -> std::result::Result<(), Box<dyn std::error::Error>> {
        let mut drawn = Drawn::default();
        let mut labels: Vec<String> = Vec::new();
        let mut chart = chart_builder(&body, 55).build_cartesian_2d(0.0..t_max, -70.0..2.0)?;
        styled_mesh(&mut chart)
            .x_desc("Time after the direct sound (s)")
            .y_desc("Decay curve (dB re start, Schroeder integral)")
            .x_label_formatter(&|v: &f64| format!("{v:.2}"))
            .y_label_formatter(&|v: &f64| format!("{v:.0}"))
            .draw()?;
        for (k, c) in room.curves.iter().enumerate() {
            let colour = band_colour(k, n);
            let pts: Vec<(f64, f64)> = c
                .time_s
                .iter()
                .zip(&c.level_db)
                .map(|(t, l)| (*t, *l))
                .filter(|(t, l)| *t <= t_max && *l >= -70.0)
                .collect();
            let (name, fit) = match (c.fits[2], c.fits[1], c.fits[0]) {
                (Some(f), _, _) => ("T30", Some(f)),
                (None, Some(f), _) => ("T20", Some(f)),
                (None, None, Some(f)) => ("EDT", Some(f)),
                _ => ("", None),
            };
            let label = match fit {
                Some(f) => format!(
                    "{} Hz: {name} {}",
                    format_hz(c.band.nominal_hz),
                    seconds(f.decay_time_s)
                ),
                None => format!("{} Hz: no decay time", format_hz(c.band.nominal_hz)),
            };
            drawn.line(pts.iter().copied());
            labels.push(label.clone());
            chart
                .draw_series(LineSeries::new(pts, colour.stroke_width(2)))?
                .label(label)
                .legend(move |(x, y)| {
                    PathElement::new(vec![(x, y), (x + 24, y)], colour.stroke_width(3))
                });
            if let Some(f) = fit {
                let (a, b) = f.range_s;
                let line = [a, b].map(|t| (t, f.intercept_db + f.slope_db_per_s * t));
                chart.draw_series(DashedLineSeries::new(
                    line,
                    5,
                    4,
                    BLACK.mix(0.7).stroke_width(1),
                ))?;
            }
        }
        chart
            .draw_series(std::iter::once(PathElement::new(vec![(0.0, -80.0)], GRID)))?
            .label("dashed: fitted line over the evaluation range")
            .legend(|(x, y)| {
                PathElement::new(
                    vec![(x, y), (x + 6, y), (x + 10, y), (x + 16, y)],
                    BLACK.mix(0.7).stroke_width(1),
                )
            });
        labels.push("dashed: fitted line over the evaluation range".into());
        place_legend(&mut chart, &labels, &drawn, &mut marks, "main")?;
        Ok(())
    };
    draw().map_err(plot_error(path))?;
    root.present().map_err(plot_error(path))?;
    // the chart's areas hold the pixels until they are dropped
    drop((root, body));
    marks.save(path, &px)
}
