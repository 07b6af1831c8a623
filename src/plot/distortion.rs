//! The harmonic orders and THD against the excitation frequency.

use std::path::Path;

use plotters::prelude::*;

use super::annotate::Marks;
use super::axes::{
    Drawn, axis_end, chart_builder, frequency_label, frequency_ticks, place_legend, styled_mesh,
    tick_labels,
};
use super::theme::{BLUE, GRID, canvas, order_colour, pixels, plot_error};
use crate::error::Result;

/// Draws the distortion orders: above, the fundamental and each order in
/// dB re sweep against the excitation frequency, each order's noise floor
/// dashed; below, THD in percent on a log scale with its noise floor.
pub fn distortion_png(
    path: &Path,
    title: &str,
    response: &crate::analysis::FrequencyResponse,
    d: &crate::analysis::Distortion,
) -> Result<()> {
    let mut px = pixels();
    let (root, body) = canvas(&mut px, path, &format!("Harmonic distortion — {title}"))?;
    let (top, bottom) = body.split_vertically((body.dim_in_pixel().1 as f64 * 0.6) as u32);
    let f = &response.frequency_hz;
    let fund = &response.magnitude_db;
    let f1 = f.first().copied().unwrap_or(20.0);
    let f2 = d
        .thd
        .frequency_hz
        .last()
        .copied()
        .unwrap_or(f1 * 2.0)
        .max(f1 * 1.01);
    let n_thd = d.thd.frequency_hz.len();
    // absolute curves of each order and its floor
    // the orders' grids are stretches of the response grid
    let offset = |o: &crate::analysis::distortion::Order| {
        f.iter()
            .position(|&g| {
                o.frequency_hz
                    .first()
                    .is_some_and(|&x| (x - g).abs() < 1e-9)
            })
            .unwrap_or(0)
    };
    let absolute = |o: &crate::analysis::distortion::Order, floor: bool| -> Vec<(f64, f64)> {
        let k = offset(o);
        o.frequency_hz
            .iter()
            .enumerate()
            .filter_map(|(i, &x)| {
                let rel = if floor {
                    o.noise_floor_db[i]
                } else {
                    o.level_db[i]
                };
                rel.map(|r| (x, fund[k + i] + r))
            })
            .filter(|(x, _)| *x <= f2)
            .collect()
    };
    let top_max = fund[..n_thd.min(fund.len())]
        .iter()
        .cloned()
        .fold(f64::MIN, f64::max);
    let top_hi = (top_max / 10.0).ceil() * 10.0 + 5.0;
    let top_lo = top_hi - 110.0;
    let f2 = axis_end(f2);
    let (bold, light) = frequency_ticks(f1, f2);
    let label = frequency_label(f2);
    let mut marks = Marks::new();
    marks.push("x ticks", tick_labels(&bold, &label));
    marks.push("x range", format!("{f1}..{f2}"));
    let mut draw_top = || -> std::result::Result<(), Box<dyn std::error::Error>> {
        let mut chart = chart_builder(&top, 30).build_cartesian_2d(
            (f1..f2)
                .log_scale()
                .with_key_points(bold.clone())
                .with_light_points(light.clone()),
            top_lo..top_hi,
        )?;
        styled_mesh(&mut chart)
            .x_labels(40)
            .x_label_formatter(&label)
            .y_label_formatter(&|v: &f64| format!("{v:.0}"))
            .y_desc("Level (dB re sweep)")
            .draw()?;
        let fund_pts: Vec<(f64, f64)> = f
            .iter()
            .zip(fund)
            .map(|(a, b)| (*a, *b))
            .filter(|(a, _)| *a <= f2)
            .collect();
        let mut drawn = Drawn::default();
        let mut labels = vec!["fundamental".to_string()];
        drawn.line(fund_pts.iter().copied());
        chart
            .draw_series(LineSeries::new(fund_pts, BLUE.stroke_width(2)))?
            .label("fundamental")
            .legend(|(x, y)| PathElement::new(vec![(x, y), (x + 24, y)], BLUE.stroke_width(3)));
        for o in &d.orders {
            let colour = order_colour(o.order);
            let floor = absolute(o, true);
            drawn.line(floor.iter().copied());
            chart.draw_series(DashedLineSeries::new(
                floor,
                6,
                4,
                colour.mix(0.45).stroke_width(1),
            ))?;
            // a gap where the order is not reported: draw runs separately
            let pts = absolute(o, false);
            let mut runs: Vec<Vec<(f64, f64)>> = Vec::new();
            let mut last_i = usize::MAX;
            for (i, lvl) in o.level_db.iter().enumerate() {
                if lvl.is_none() || o.frequency_hz[i] > f2 {
                    continue;
                }
                if last_i == usize::MAX || i != last_i + 1 {
                    runs.push(Vec::new());
                }
                last_i = i;
                let p = pts.iter().find(|(x, _)| *x == o.frequency_hz[i]).copied();
                if let (Some(run), Some(p)) = (runs.last_mut(), p) {
                    run.push(p);
                }
            }
            let name = match o.order {
                2 => "2nd harmonic".to_string(),
                3 => "3rd harmonic".to_string(),
                n => format!("{n}th harmonic"),
            };
            let mut first = true;
            if !runs.is_empty() {
                labels.push(name.clone());
            }
            for run in runs {
                drawn.line(run.iter().copied());
                let s = chart.draw_series(LineSeries::new(run, colour.stroke_width(2)))?;
                if first {
                    s.label(name.clone()).legend(move |(x, y)| {
                        PathElement::new(vec![(x, y), (x + 24, y)], colour.stroke_width(3))
                    });
                    first = false;
                }
            }
        }
        let silent: Vec<String> = d
            .orders
            .iter()
            .filter(|o| o.level_db.iter().all(Option::is_none))
            .map(|o| o.order.to_string())
            .collect();
        if !silent.is_empty() {
            labels.push(format!(
                "orders {}: below their noise floor throughout",
                silent.join(", ")
            ));
            chart
                .draw_series(std::iter::once(PathElement::new(
                    vec![(f1, top_lo - 10.0)],
                    GRID,
                )))?
                .label(format!(
                    "orders {}: below their noise floor throughout",
                    silent.join(", ")
                ))
                .legend(|(x, y)| PathElement::new(vec![(x, y), (x + 1, y)], WHITE));
        }
        chart
            .draw_series(std::iter::once(PathElement::new(
                vec![(f1, top_lo - 10.0), (f1, top_lo - 10.0)],
                GRID,
            )))?
            .label("dashed: each order's noise floor")
            .legend(|(x, y)| {
                PathElement::new(
                    vec![(x, y), (x + 6, y), (x + 10, y), (x + 16, y)],
                    RGBColor(150, 150, 150).stroke_width(1),
                )
            });
        labels.push("dashed: each order's noise floor".into());
        place_legend(&mut chart, &labels, &drawn, &mut marks, "orders")?;
        Ok(())
    };
    draw_top().map_err(plot_error(path))?;

    let thd: Vec<(f64, f64)> = d
        .thd
        .frequency_hz
        .iter()
        .zip(&d.thd.percent)
        .filter_map(|(x, p)| p.map(|p| (*x, p)))
        .collect();
    let thd_floor: Vec<(f64, f64)> = d
        .thd
        .frequency_hz
        .iter()
        .zip(&d.thd.noise_floor_percent)
        .filter_map(|(x, p)| p.map(|p| (*x, p.max(1e-6))))
        .collect();
    let ymax = thd.iter().map(|p| p.1).fold(1.0f64, f64::max);
    let ymin = thd
        .iter()
        .chain(thd_floor.iter())
        .map(|p| p.1)
        .fold(ymax, f64::min)
        .max(1e-4);
    let hi = 10f64.powf(ymax.log10().ceil());
    let lo = 10f64.powf(ymin.log10().floor()).min(hi / 100.0);
    let mut draw_bottom = || -> std::result::Result<(), Box<dyn std::error::Error>> {
        let mut chart = chart_builder(&bottom, 55).build_cartesian_2d(
            (f1..f2)
                .log_scale()
                .with_key_points(bold.clone())
                .with_light_points(light.clone()),
            (lo..hi).log_scale(),
        )?;
        styled_mesh(&mut chart)
            .x_labels(40)
            .x_label_formatter(&label)
            .y_label_formatter(&|v: &f64| {
                if *v >= 1.0 {
                    format!("{v:.0} %")
                } else {
                    format!("{v} %")
                }
            })
            .x_desc("Excitation frequency (Hz)")
            .y_desc("THD")
            .draw()?;
        chart
            .draw_series(DashedLineSeries::new(
                thd_floor.iter().copied(),
                6,
                4,
                RGBColor(120, 120, 120).stroke_width(1),
            ))?
            .label("THD of the noise floors")
            .legend(|(x, y)| {
                PathElement::new(
                    vec![(x, y), (x + 6, y), (x + 10, y), (x + 16, y)],
                    RGBColor(120, 120, 120).stroke_width(1),
                )
            });
        chart
            .draw_series(LineSeries::new(thd.iter().copied(), BLUE.stroke_width(2)))?
            .label(format!(
                "THD, orders 2–{}, {} smoothing",
                d.harmonics, d.smoothing
            ))
            .legend(|(x, y)| PathElement::new(vec![(x, y), (x + 24, y)], BLUE.stroke_width(3)));
        let mut drawn = Drawn::default();
        drawn.line(thd.iter().copied());
        drawn.line(thd_floor.iter().copied());
        let labels = [
            "THD of the noise floors".to_string(),
            format!("THD, orders 2–{}, {} smoothing", d.harmonics, d.smoothing),
        ];
        place_legend(&mut chart, &labels, &drawn, &mut marks, "thd")?;
        Ok(())
    };
    draw_bottom().map_err(plot_error(path))?;
    root.present().map_err(plot_error(path))?;
    // the chart's areas hold the pixels until they are dropped
    drop((root, body, top, bottom));
    marks.save(path, &px)
}
