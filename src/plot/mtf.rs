//! The modulation transfer function per octave of one measurement (the
//! matrix behind its STI, IEC 60268-16).

use std::path::Path;

use plotters::prelude::*;

use super::annotate::Marks;
use super::axes::{Drawn, band_chart, place_legend};
use super::theme::{band_colour, canvas, pixels, plot_error};
use crate::analysis::speech::Speech;
use crate::error::Result;
use crate::model::units::format_hz;

/// Draws m against the modulation frequency (log axis, 0.63–12.5 Hz), one
/// line per octave 125 Hz–8 kHz in the band colours, the STI and its
/// qualification band in the title.
pub fn mtf_png(path: &Path, title: &str, speech: &Speech) -> Result<()> {
    let sti = speech.sti.map_or("STI not given".to_string(), |v| {
        format!(
            "STI {v:.2} ({})",
            speech.qualification.as_deref().unwrap_or("?")
        )
    });
    let mut px = pixels();
    let (root, body) = canvas(
        &mut px,
        path,
        &format!("Modulation transfer function — {title}, {sti}"),
    )?;
    let mut marks = Marks::new();
    let n = speech.bands.len();
    let mut draw = || -> std::result::Result<(), Box<dyn std::error::Error>> {
        let mut chart = band_chart(
            &body,
            (0.55, 14.5),
            &[1.0, 2.0, 4.0, 8.0],
            1.0,
            ("Modulation frequency (Hz)", "Modulation transfer m"),
            &mut marks,
        )?;
        let mut drawn = Drawn::default();
        let mut labels = Vec::new();
        for (k, b) in speech.bands.iter().enumerate() {
            let colour = band_colour(k, n);
            let pts: Vec<(f64, f64)> = speech
                .modulation_hz
                .iter()
                .copied()
                .zip(b.mtf.iter().copied())
                .collect();
            let name = format!("{} Hz, MTI {:.2}", format_hz(b.center_hz), b.mti);
            chart
                .draw_series(LineSeries::new(pts.iter().copied(), colour.stroke_width(3)))?
                .label(name.clone())
                .legend(move |(x, y)| {
                    PathElement::new(vec![(x, y), (x + 24, y)], colour.stroke_width(3))
                });
            chart.draw_series(pts.iter().map(|&p| Circle::new(p, 4, colour.filled())))?;
            drawn.line(pts.iter().copied());
            drawn.markers(pts.iter().copied(), 4);
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
