//! Reverberation times per band of one measurement.

use std::path::Path;

use plotters::prelude::*;

use super::annotate::Marks;
use super::axes::{Drawn, band_chart, place_legend};
use super::theme::{BLUE, ORANGE, canvas, order_colour, pixels, plot_error};
use crate::error::Result;
use crate::model::{Fraction, Parameter};

/// Draws T20, T30 and EDT per octave band (markers) with T30 per
/// one-third-octave band (thin), on a log frequency axis.
pub fn reverberation_png(
    path: &Path,
    title: &str,
    room: &crate::analysis::room::Room,
) -> Result<()> {
    let mut px = pixels();
    let (root, body) = canvas(
        &mut px,
        path,
        &format!("Reverberation time per band — {title}"),
    )?;
    let get = |fraction: Fraction,
               f: fn(&crate::analysis::room::BandResult) -> Option<f64>|
     -> Vec<(f64, f64)> {
        room.bands
            .iter()
            .filter(|b| b.fraction == fraction)
            .filter_map(|b| f(b).map(|v| (b.center_hz, v)))
            .collect()
    };
    let t30 = get(Fraction::Octave, |b| b.get(Parameter::T30));
    let t20 = get(Fraction::Octave, |b| b.get(Parameter::T20));
    let edt = get(Fraction::Octave, |b| b.get(Parameter::Edt));
    let third = get(Fraction::Third, |b| b.get(Parameter::T30));
    let all: Vec<f64> = [&t30, &t20, &edt, &third]
        .iter()
        .flat_map(|v| v.iter().map(|p| p.1))
        .collect();
    let y_max = (all.iter().cloned().fold(0.1f64, f64::max) * 1.25 * 10.0).ceil() / 10.0;
    let freqs: Vec<f64> = room.bands.iter().map(|b| b.center_hz).collect();
    let (f_lo, f_hi) = super::axes::band_axis(&freqs);
    let ticks: Vec<f64> = room
        .bands
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
            ("Band centre frequency (Hz)", "Decay time (s)"),
            &mut marks,
        )?;
        let mut drawn = Drawn::default();
        drawn.line(third.iter().copied());
        drawn.markers(third.iter().copied(), 2);
        let mut labels = vec!["T30, one-third octaves".to_string()];
        let grey = RGBColor(150, 150, 150);
        chart
            .draw_series(LineSeries::new(third.iter().copied(), grey.stroke_width(1)))?
            .label("T30, one-third octaves")
            .legend(move |(x, y)| {
                PathElement::new(vec![(x, y), (x + 24, y)], grey.stroke_width(1))
            });
        chart.draw_series(third.iter().map(|&p| Circle::new(p, 2, grey.filled())))?;
        for (series, name, colour) in [
            (&t30, "T30, octaves", BLUE),
            (&t20, "T20, octaves", ORANGE),
            (&edt, "EDT, octaves", order_colour(3)),
        ] {
            chart
                .draw_series(LineSeries::new(
                    series.iter().copied(),
                    colour.stroke_width(2),
                ))?
                .label(name)
                .legend(move |(x, y)| {
                    PathElement::new(vec![(x, y), (x + 24, y)], colour.stroke_width(3))
                });
            chart.draw_series(series.iter().map(|&p| Circle::new(p, 5, colour.filled())))?;
            drawn.line(series.iter().copied());
            drawn.markers(series.iter().copied(), 5);
            labels.push(name.to_string());
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
