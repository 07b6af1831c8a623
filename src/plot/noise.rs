//! The background noise of a room per band, with the noise rating curve
//! it touches.

use std::path::Path;

use plotters::prelude::*;

use super::annotate::Marks;
use super::axes::{Drawn, band_axis, band_chart_y, place_legend};
use super::theme::{BLUE, ORANGE, canvas, pixels, plot_error};
use crate::analysis::noise::{NR_COEFFICIENTS, NoiseLevels};
use crate::error::Result;

/// Draws the octave levels (markers, bold), the one-third-octave levels
/// (thin, grey) and the NR curve of the rating (dashed orange), dB SPL
/// against band centre; the A-weighted total and the rating in the title.
pub fn noise_png(path: &Path, title: &str, n: &NoiseLevels) -> Result<()> {
    let rating = n
        .rating
        .as_ref()
        .map_or(String::new(), |r| format!(", NR {}", r.value));
    let mut px = pixels();
    let (root, body) = canvas(
        &mut px,
        path,
        &format!("Background noise — {title}: {:.1} dB(A){rating}", n.laeq_db),
    )?;
    let oct: Vec<(f64, f64)> = n.octaves.iter().map(|b| (b.center_hz, b.leq_db)).collect();
    let third: Vec<(f64, f64)> = n.thirds.iter().map(|b| (b.center_hz, b.leq_db)).collect();
    let curve: Vec<(f64, f64)> = n.rating.as_ref().map_or_else(Vec::new, |r| {
        NR_COEFFICIENTS
            .iter()
            .map(|&(f, a, b)| (f, a + b * f64::from(r.value)))
            .collect()
    });
    let top = oct
        .iter()
        .chain(&third)
        .chain(&curve)
        .map(|p| p.1)
        .fold(10.0f64, f64::max);
    let y_max = ((top + 15.0) / 10.0).ceil() * 10.0;
    let centres: Vec<f64> = third.iter().map(|p| p.0).collect();
    let (f_lo, f_hi) = band_axis(&centres);
    let ticks: Vec<f64> = oct.iter().map(|p| p.0).collect();
    let mut marks = Marks::new();
    let mut draw = || -> std::result::Result<(), Box<dyn std::error::Error>> {
        let mut chart = band_chart_y(
            &body,
            (f_lo, f_hi),
            &ticks,
            y_max,
            0,
            ("Band centre frequency (Hz)", "Leq (dB SPL)"),
            &mut marks,
        )?;
        let mut drawn = Drawn::default();
        let mut labels = Vec::new();
        let grey = RGBColor(150, 150, 150);
        chart
            .draw_series(LineSeries::new(third.iter().copied(), grey.stroke_width(1)))?
            .label("one-third octaves")
            .legend(move |(x, y)| {
                PathElement::new(vec![(x, y), (x + 24, y)], grey.stroke_width(1))
            });
        chart.draw_series(third.iter().map(|&p| Circle::new(p, 2, grey.filled())))?;
        drawn.line(third.iter().copied());
        labels.push("one-third octaves".to_string());
        chart
            .draw_series(LineSeries::new(oct.iter().copied(), BLUE.stroke_width(3)))?
            .label("octaves")
            .legend(|(x, y)| PathElement::new(vec![(x, y), (x + 24, y)], BLUE.stroke_width(3)));
        chart.draw_series(oct.iter().map(|&p| Circle::new(p, 5, BLUE.filled())))?;
        drawn.line(oct.iter().copied());
        drawn.markers(oct.iter().copied(), 5);
        labels.push("octaves".to_string());
        if let Some(r) = &n.rating {
            let name = format!("NR {} curve", r.value);
            chart
                .draw_series(DashedLineSeries::new(
                    curve.iter().copied(),
                    10,
                    6,
                    ORANGE.stroke_width(2),
                ))?
                .label(name.clone())
                .legend(|(x, y)| {
                    PathElement::new(vec![(x, y), (x + 24, y)], ORANGE.stroke_width(2))
                });
            drawn.line(curve.iter().copied());
            labels.push(name);
        }
        place_legend(&mut chart, &labels, &drawn, &mut marks, "main")?;
        Ok(())
    };
    draw().map_err(plot_error(path))?;
    root.present().map_err(plot_error(path))?;
    // the chart's areas hold the pixels until they are dropped
    drop((root, body));
    marks.save(path, &px)
}
