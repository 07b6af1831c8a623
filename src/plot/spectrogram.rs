//! The spectrogram of the decay, with its colour bar.

use std::path::Path;

use plotters::prelude::*;

use super::annotate::Marks;
use super::axes::{
    axis_end, chart_builder, frequency_label, frequency_ticks, styled_mesh, tick_labels,
};
use super::theme::FONT;
use super::theme::{canvas, level_colour, pixels, plot_error};
use crate::error::Result;
use crate::model::units::seconds;

/// Draws the spectrogram: time after the direct sound across, frequency
/// (log) up, colour the level in dB re the maximum, with a colour bar.
pub fn spectrogram_png(
    path: &Path,
    title: &str,
    s: &crate::analysis::spectrogram::Spectrogram,
) -> Result<()> {
    let mut px = pixels();
    let (root, whole) = canvas(
        &mut px,
        path,
        &format!("Spectrogram of the decay — {title}"),
    )?;
    // the note on how it was made goes in a strip below, off the data
    let (body, note_strip) = whole.split_vertically(whole.dim_in_pixel().1 - 32);
    let (main, bar) = body.split_horizontally(body.dim_in_pixel().0 - 150);
    let f1 = s.frequency_hz.first().copied().unwrap_or(20.0);
    let f2 = s
        .frequency_hz
        .last()
        .copied()
        .unwrap_or(20_000.0)
        .max(f1 * 1.01);
    let f2 = axis_end(f2);
    let half_row = 2f64.powf(1.0 / 96.0);
    let half_hop = 0.5 * s.hop_s;
    let t0 = s.time_s.first().copied().unwrap_or(0.0) - half_hop;
    let t1 = (s.time_s.last().copied().unwrap_or(0.0) + half_hop).max(t0 + s.hop_s);
    let ms = t1 < 1.0;
    let (scale, unit) = if ms { (1e3, "ms") } else { (1.0, "s") };
    let (bold, light) = frequency_ticks(f1, f2);
    let label = frequency_label(f2);
    let mut marks = Marks::new();
    marks.push("y ticks", tick_labels(&bold, &label));
    let floor = s.floor_db;
    let mut draw_main = || -> std::result::Result<(), Box<dyn std::error::Error>> {
        let mut chart = chart_builder(&main, 55).build_cartesian_2d(
            t0 * scale..t1 * scale,
            (f1..f2)
                .log_scale()
                .with_key_points(bold.clone())
                .with_light_points(light.clone()),
        )?;
        chart.plotting_area().fill(&level_colour(floor, floor))?;
        chart.draw_series(s.time_s.iter().zip(&s.level_db).flat_map(|(&t, row)| {
            s.frequency_hz.iter().zip(row).map(move |(&f, &l)| {
                Rectangle::new(
                    [
                        ((t - half_hop) * scale, (f / half_row).max(f1)),
                        ((t + half_hop) * scale, (f * half_row).min(f2)),
                    ],
                    level_colour(l, floor).filled(),
                )
            })
        }))?;
        let time_label = move |v: &f64| {
            if ms {
                format!("{v:.0}")
            } else {
                format!("{v:.2}")
            }
        };
        styled_mesh(&mut chart)
            .disable_x_mesh()
            .bold_line_style(WHITE.mix(0.25))
            .light_line_style(TRANSPARENT)
            .y_labels(40)
            .y_label_formatter(&label)
            .x_label_formatter(&time_label)
            .x_desc(format!("Time after the direct sound ({unit})"))
            .y_desc("Frequency (Hz)")
            .draw()?;
        // how it was made, as the legend's one line
        let short = |ms: f64| {
            if (ms - ms.round()).abs() < 0.05 {
                format!("{ms:.0} ms")
            } else {
                format!("{ms:.1} ms")
            }
        };
        let w = |i: usize| s.window_s.get(i).copied().unwrap_or(0.0) * 1e3;
        let top = s.window_s.len().saturating_sub(1);
        let note = format!(
            "{:.0}-period Hann windows: {} at {}, {} at {}; step {}{}",
            s.cycles,
            short(w(0)),
            crate::model::units::hz(f1),
            short(w(top)),
            crate::model::units::hz(s.frequency_hz.last().copied().unwrap_or(f2)),
            short(s.hop_s * 1e3),
            match s.noise_s {
                Some(n) => format!("; to the noise at {}", seconds(n)),
                None => "; to the end".to_string(),
            }
        );
        let (xr, yr) = chart.plotting_area().get_pixel_range();
        marks.push(
            "main plot area",
            format!("{},{},{},{}", xr.start, yr.start, xr.end, yr.end),
        );
        let (nx, ny) = note_strip.get_base_pixel();
        let h = note_strip.dim_in_pixel().1 as i32;
        marks.push(
            "note",
            format!("{},{},{},{}", nx + xr.start, ny, nx + xr.end, ny + h),
        );
        note_strip.draw(&Text::new(
            note,
            (xr.start, 2),
            (FONT, super::SMALLEST_TEXT_PX).into_font(),
        ))?;
        Ok(())
    };
    draw_main().map_err(plot_error(path))?;
    let draw_bar = || -> std::result::Result<(), Box<dyn std::error::Error>> {
        let mut chart = ChartBuilder::on(&bar)
            .margin_left(10)
            .margin_right(10)
            .margin_top(10)
            .x_label_area_size(55)
            .right_y_label_area_size(85)
            .build_cartesian_2d(0.0..1.0, floor..0.0)?;
        let steps = (-floor * 2.0).round().max(1.0) as usize;
        chart.draw_series((0..steps).map(|i| {
            let a = floor + i as f64 * (-floor) / steps as f64;
            let b = floor + (i + 1) as f64 * (-floor) / steps as f64;
            Rectangle::new(
                [(0.0, a), (1.0, b)],
                level_colour(0.5 * (a + b), floor).filled(),
            )
        }))?;
        styled_mesh(&mut chart)
            .disable_mesh()
            .disable_x_axis()
            .y_labels(9)
            .y_label_formatter(&|v: &f64| format!("{v:.0}"))
            .y_desc("Level (dB re maximum)")
            .draw()?;
        Ok(())
    };
    draw_bar().map_err(plot_error(path))?;
    root.present().map_err(plot_error(path))?;
    // the chart's areas hold the pixels until they are dropped
    drop((root, whole, body, note_strip, main, bar));
    marks.save(path, &px)
}
