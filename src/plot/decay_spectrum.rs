//! The decay spectrum within the gate.

use std::path::Path;

use super::annotate::Marks;
use super::axes::{Clip, Series, draw_log_panel};
use super::theme::{FONT, band_colour, canvas, pixels, plot_error};
use crate::error::Result;
use plotters::prelude::*;

/// Draws the decay spectrum: the spectrum of the gated response as its
/// start moves later, only the windows whose spectra differ (at most
/// eight), coloured from the first (deep blue) to the last (warm red),
/// each curve ending where it meets the floor, with the key of window
/// starts in a strip of its own beside the data.
pub fn decay_spectrum_png(
    path: &Path,
    title: &str,
    frequency_hz: &[f64],
    slices: &[crate::analysis::csd::Slice],
    resolved: (f64, f64),
) -> Result<()> {
    let mut px = pixels();
    let (root, body) = canvas(
        &mut px,
        path,
        &format!("Decay spectrum within the gate — {title}"),
    )?;
    // only where the gate resolves the response
    let f1 = frequency_hz
        .first()
        .copied()
        .unwrap_or(20.0)
        .max(resolved.0);
    let f2 = frequency_hz
        .last()
        .copied()
        .unwrap_or(20_000.0)
        .min(resolved.1)
        .max(f1 * 2.0);
    // the windows whose spectra differ, at most eight of them evenly
    // spread, each curve ending where it meets the floor of the scale
    let differing = crate::analysis::csd::distinct(slices, 0.5);
    let step = differing.len().div_ceil(8).max(1);
    let shown: Vec<&crate::analysis::csd::Slice> = differing
        .iter()
        .step_by(step)
        .map(|&i| &slices[i])
        .collect();
    let n = shown.len();
    let floor = -45.0;
    let cut: Vec<Vec<f64>> = shown
        .iter()
        .map(|s| {
            s.level_db
                .iter()
                .map(|&v| if v < floor { f64::NAN } else { v })
                .collect()
        })
        .collect();
    // unnamed series: the key is drawn in its own strip, off the data
    let series: Vec<Series<'_>> = cut
        .iter()
        .enumerate()
        .map(|(k, l)| (frequency_hz, &l[..], band_colour(k, n), String::new()))
        .collect();
    let (main, key) = body.split_horizontally(body.dim_in_pixel().0 - 200);
    let mut marks = Marks::new();
    draw_log_panel(
        &main,
        (f1, f2),
        (floor, 3.0),
        "Level (dB re the first spectrum's maximum)",
        true,
        None,
        &series,
        None,
        Clip::End,
        &mut marks,
        "decay spectrum",
    )
    .map_err(plot_error(path))?;
    marks.push(
        "windows shown",
        shown
            .iter()
            .map(|s| format!("{:+.2}", s.start_s * 1e3))
            .collect::<Vec<_>>()
            .join(", "),
    );
    let draw_key = || -> std::result::Result<(), Box<dyn std::error::Error>> {
        let font = (FONT, super::SMALLEST_TEXT_PX).into_font();
        key.draw(&Text::new("window start", (12, 40), font.clone()))?;
        key.draw(&Text::new("(ms re peak)", (12, 68), font.clone()))?;
        for (k, s) in shown.iter().enumerate() {
            let y = 112 + 34 * k as i32;
            let c = band_colour(k, n);
            key.draw(&PathElement::new(vec![(12, y), (44, y)], c.stroke_width(4)))?;
            key.draw(&Text::new(
                format!("{:+.2}", s.start_s * 1e3),
                (54, y - 12),
                font.clone(),
            ))?;
        }
        Ok(())
    };
    draw_key().map_err(plot_error(path))?;
    root.present().map_err(plot_error(path))?;
    // the chart's areas hold the pixels until they are dropped
    drop((root, body, main, key));
    marks.save(path, &px)
}
