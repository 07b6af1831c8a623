//! The mean T30 per band over positions with its spread.

use std::path::Path;

use plotters::prelude::*;

use super::annotate::Marks;
use super::axes::{Drawn, band_axis, band_chart, place_legend};
use super::theme::{BLUE, canvas, pixels, plot_error};
use crate::analysis::room::BandResult;
use crate::error::Result;
use crate::model::{Fraction, Parameter};

/// Mean T30 per band over positions with ± one standard deviation.
pub fn average_reverberation_png(path: &Path, title: &str, bands: &[BandResult]) -> Result<()> {
    let mut px = pixels();
    let (root, body) = canvas(
        &mut px,
        path,
        &format!("Reverberation time per band — {title}"),
    )?;
    let get = |fraction: Fraction| -> Vec<(f64, f64, f64)> {
        bands
            .iter()
            .filter(|b| b.fraction == fraction)
            .filter_map(|b| {
                let t = b.get(Parameter::T30)?;
                let s = b
                    .spread
                    .as_ref()
                    .and_then(|s| s.get(&Parameter::T30))
                    .and_then(|s| s.std)
                    .unwrap_or(0.0);
                Some((b.center_hz, t, s))
            })
            .collect()
    };
    let oct = get(Fraction::Octave);
    let third = get(Fraction::Third);
    let centres: Vec<f64> = bands.iter().map(|b| b.center_hz).collect();
    let (f_lo, f_hi) = band_axis(&centres);
    let y_max = oct
        .iter()
        .chain(&third)
        .map(|p| p.1 + p.2)
        .fold(0.1f64, f64::max)
        * 1.25;
    let y_max = (y_max * 10.0).ceil() / 10.0;
    let ticks: Vec<f64> = bands
        .iter()
        .filter(|b| b.fraction == Fraction::Octave)
        .map(|b| b.center_hz)
        .collect();
    let mut marks = Marks::new();
    let mut draw = || -> std::result::Result<(), Box<dyn std::error::Error>> {
        let mut chart = band_chart(
            &body,
            (f_lo, f_hi),
            &ticks,
            y_max,
            ("Band centre frequency (Hz)", "T30 (s), mean over positions"),
            &mut marks,
        )?;
        let mut drawn = Drawn::default();
        drawn.line(third.iter().map(|p| (p.0, p.1)));
        drawn.line(oct.iter().map(|p| (p.0, p.1)));
        drawn.markers(oct.iter().map(|p| (p.0, p.1)), 5);
        for p in &oct {
            drawn.line([(p.0, p.1 - p.2), (p.0, p.1 + p.2)]);
        }
        let grey = RGBColor(150, 150, 150);
        chart
            .draw_series(LineSeries::new(
                third.iter().map(|p| (p.0, p.1)),
                grey.stroke_width(1),
            ))?
            .label("one-third octaves")
            .legend(move |(x, y)| PathElement::new(vec![(x, y), (x + 24, y)], grey));
        chart
            .draw_series(LineSeries::new(
                oct.iter().map(|p| (p.0, p.1)),
                BLUE.stroke_width(2),
            ))?
            .label("octaves, mean")
            .legend(|(x, y)| PathElement::new(vec![(x, y), (x + 24, y)], BLUE.stroke_width(3)));
        chart.draw_series(
            oct.iter()
                .map(|p| Circle::new((p.0, p.1), 5, BLUE.filled())),
        )?;
        // error bars: ± one standard deviation over the positions, capped
        let caps = 1.07;
        let bars = chart.draw_series(oct.iter().filter(|p| p.2 > 0.0).flat_map(|p| {
            let (a, b) = (p.1 - p.2, p.1 + p.2);
            [
                PathElement::new(vec![(p.0, a), (p.0, b)], BLUE.stroke_width(2)),
                PathElement::new(vec![(p.0 / caps, a), (p.0 * caps, a)], BLUE.stroke_width(2)),
                PathElement::new(vec![(p.0 / caps, b), (p.0 * caps, b)], BLUE.stroke_width(2)),
            ]
        }))?;
        bars.label("± one standard deviation over the positions")
            .legend(|(x, y)| {
                PathElement::new(
                    vec![
                        (x + 8, y - 7),
                        (x + 16, y - 7),
                        (x + 12, y - 7),
                        (x + 12, y + 7),
                        (x + 8, y + 7),
                        (x + 16, y + 7),
                    ],
                    BLUE.stroke_width(2),
                )
            });
        let labels = [
            "one-third octaves".to_string(),
            "octaves, mean".to_string(),
            "± one standard deviation over the positions".to_string(),
        ];
        place_legend(&mut chart, &labels, &drawn, &mut marks, "main")?;
        Ok(())
    };
    draw().map_err(plot_error(path))?;
    root.present().map_err(plot_error(path))?;
    // the chart's areas hold the pixels until they are dropped
    drop((root, body));
    marks.save(path, &px)
}
