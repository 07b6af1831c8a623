//! A directivity folder's charts: the spatial averages of ANSI/CTA-2034-A
//! with their indices on a second axis, the polar map of each orbit
//! (angle against log frequency, level as colour, contours at −3, −6 and
//! −10 dB) and polar diagrams at a few frequencies.

use std::path::Path;

use plotters::prelude::*;

use super::annotate::Marks;
use super::axes::{axis_end, chart_builder, frequency_label, frequency_ticks, styled_mesh};
use super::theme::{BLUE, FONT, ORANGE, canvas, level_colour, pixels, plot_error};
use crate::analysis::directivity::{Curve, Directivity, OrbitResponses};
use crate::error::Result;
use crate::folder::schema::DirectivityFile;
use crate::model::PlotKind;

/// The lowest level the polar map and diagrams show, dB re on axis.
const FLOOR_DB: f64 = -30.0;
/// The polar map's contour levels, dB re on axis.
const CONTOURS_DB: [f64; 3] = [-3.0, -6.0, -10.0];
/// The frequencies of the polar diagrams, Hz (those inside the grid).
const DIAGRAM_HZ: [f64; 6] = [500.0, 1000.0, 2000.0, 4000.0, 8000.0, 16000.0];

type DrawResult = std::result::Result<(), Box<dyn std::error::Error>>;

/// Draws the plot `kind` of a directivity folder to `path`.
pub fn draw(kind: PlotKind, path: &Path, f: &DirectivityFile) -> Result<()> {
    let resolved = f.gate.map(|g| (g.resolution_hz, g.resolved_to_hz));
    match kind {
        PlotKind::PolarMap => polar_map_png(path, &f.directivity, resolved),
        PlotKind::PolarDiagram => polar_diagram_png(path, &f.directivity),
        _ => spatial_averages_png(path, &f.directivity, &f.magnitude_reference, resolved),
    }
}

/// The rectangles that grey out what the gate does not resolve (below
/// `lo` and above `hi`), from `y0` to `y1`.
fn unresolved(
    (f1, f2): (f64, f64),
    (y0, y1): (f64, f64),
    resolved: Option<(f64, f64)>,
) -> Vec<Rectangle<(f64, f64)>> {
    let Some((lo, hi)) = resolved else {
        return Vec::new();
    };
    let shade = WHITE.mix(0.65).filled();
    let mut out = Vec::new();
    if lo > f1 {
        out.push(Rectangle::new([(f1, y0), (lo.min(f2), y1)], shade));
    }
    if hi < f2 {
        out.push(Rectangle::new([(hi.max(f1), y0), (f2, y1)], shade));
    }
    out
}

fn band(d: &Directivity) -> (f64, f64) {
    let f1 = d.frequency_hz.first().copied().unwrap_or(20.0);
    let f2 = d
        .frequency_hz
        .last()
        .copied()
        .unwrap_or(20_000.0)
        .max(f1 * 1.01);
    (f1, axis_end(f2))
}

const LEVELS: [(Curve, RGBColor, u32); 5] = [
    (Curve::OnAxis, RGBColor(30, 30, 30), 2),
    (Curve::ListeningWindow, BLUE, 3),
    (Curve::EarlyReflections, ORANGE, 3),
    (Curve::SoundPower, RGBColor(150, 40, 110), 3),
    (Curve::EstimatedInRoom, RGBColor(60, 140, 70), 2),
];
const INDICES: [(Curve, RGBColor); 2] = [
    (Curve::SoundPowerDi, RGBColor(150, 40, 110)),
    (Curve::EarlyReflectionsDi, ORANGE),
];

/// The standard's level curves on the left axis, its directivity indices
/// (dashed) on the right; withheld curves are left out.
pub fn spatial_averages_png(
    path: &Path,
    d: &Directivity,
    reference: &str,
    resolved: Option<(f64, f64)>,
) -> Result<()> {
    let mut px = pixels();
    let (root, body) = canvas(
        &mut px,
        path,
        "Spatial averages (ANSI/CTA-2034-A) and directivity indices",
    )?;
    let (f1, f2) = band(d);
    let top = LEVELS
        .iter()
        .filter_map(|(c, _, _)| d.levels(*c))
        .flatten()
        .copied()
        .fold(f64::NEG_INFINITY, f64::max);
    let top = if top.is_finite() {
        (top / 5.0).ceil() * 5.0 + 5.0
    } else {
        10.0
    };
    let (bold, light) = frequency_ticks(f1, f2);
    let label = frequency_label(f2);
    let mut marks = Marks::new();
    let mut draw = || -> DrawResult {
        let mut chart = chart_builder(&body, 55)
            .right_y_label_area_size(80)
            .build_cartesian_2d(
                (f1..f2)
                    .log_scale()
                    .with_key_points(bold.clone())
                    .with_light_points(light.clone()),
                top - 70.0..top,
            )?
            .set_secondary_coord((f1..f2).log_scale(), -5.0..45.0);
        styled_mesh(&mut chart)
            .x_label_formatter(&label)
            .y_label_formatter(&|v: &f64| format!("{v:.0}"))
            .x_desc("Frequency (Hz)")
            .y_desc("Level (dB)")
            .draw()?;
        chart
            .configure_secondary_axes()
            .label_style((FONT, super::SMALLEST_TEXT_PX))
            .axis_desc_style((FONT, super::SMALLEST_TEXT_PX + 2))
            .y_label_formatter(&|v: &f64| format!("{v:.0}"))
            .y_desc("Directivity index (dB)")
            .draw()?;
        for (c, colour, width) in LEVELS {
            if let Some(l) = d.levels(c) {
                let pts: Vec<(f64, f64)> = d
                    .frequency_hz
                    .iter()
                    .copied()
                    .zip(l.iter().copied())
                    .collect();
                chart
                    .draw_series(LineSeries::new(pts, colour.stroke_width(width)))?
                    .label(c.label())
                    .legend(move |(x, y)| {
                        PathElement::new(vec![(x, y), (x + 24, y)], colour.stroke_width(width))
                    });
            }
        }
        for (c, colour) in INDICES {
            if let Some(l) = d.levels(c) {
                let pts: Vec<(f64, f64)> = d
                    .frequency_hz
                    .iter()
                    .copied()
                    .zip(l.iter().copied())
                    .collect();
                chart
                    .draw_secondary_series(DashedLineSeries::new(
                        pts,
                        10,
                        6,
                        colour.stroke_width(2),
                    ))?
                    .label(format!("{} (right axis)", c.label()))
                    .legend(move |(x, y)| {
                        PathElement::new(vec![(x, y), (x + 24, y)], colour.stroke_width(2))
                    });
            }
        }
        // what the gate does not resolve, faded over the curves
        chart.draw_series(unresolved((f1, f2), (top - 70.0, top), resolved))?;
        chart
            .configure_series_labels()
            .position(SeriesLabelPosition::MiddleLeft)
            .label_font((FONT, super::SMALLEST_TEXT_PX))
            .background_style(WHITE.mix(0.85))
            .border_style(RGBColor(200, 200, 200))
            .draw()?;
        let (xr, yr) = chart.plotting_area().get_pixel_range();
        marks.push(
            "main plot area",
            format!("{},{},{},{}", xr.start, yr.start, xr.end, yr.end),
        );
        marks.push("level reference", reference);
        Ok(())
    };
    draw().map_err(plot_error(path))?;
    root.present().map_err(plot_error(path))?;
    drop((root, body));
    marks.save(path, &px)
}

/// The segments where the level `v` crosses `level` in one cell of the
/// grid (marching squares; a saddle is split the simple way).
fn cell_segments(corners: [((f64, f64), f64); 4], level: f64) -> Vec<((f64, f64), (f64, f64))> {
    let mut pts = Vec::new();
    for e in 0..4 {
        let (pa, va) = corners[e];
        let (pb, vb) = corners[(e + 1) % 4];
        if (va - level) * (vb - level) < 0.0 {
            let t = (level - va) / (vb - va);
            pts.push((pa.0 + t * (pb.0 - pa.0), pa.1 + t * (pb.1 - pa.1)));
        }
    }
    pts.chunks_exact(2).map(|p| (p[0], p[1])).collect()
}

fn map_panel(
    area: &super::theme::Area,
    d: &Directivity,
    o: &OrbitResponses,
    resolved: Option<(f64, f64)>,
    marks: &mut Marks,
) -> DrawResult {
    let (f1, f2) = band(d);
    let (bold, light) = frequency_ticks(f1, f2);
    let label = frequency_label(f2);
    let a_lo = f64::from(*o.angles_deg.first().unwrap_or(&-170)) - 5.0;
    let a_hi = f64::from(*o.angles_deg.last().unwrap_or(&180)) + 5.0;
    let mut chart = chart_builder(area, 45).build_cartesian_2d(
        (f1..f2)
            .log_scale()
            .with_key_points(bold.clone())
            .with_light_points(light.clone()),
        a_lo..a_hi,
    )?;
    let f = &d.frequency_hz;
    let edge = |i: usize| -> (f64, f64) {
        let lo = if i == 0 {
            f[0]
        } else {
            (f[i - 1] * f[i]).sqrt()
        };
        let hi = if i + 1 == f.len() {
            f[i]
        } else {
            (f[i] * f[i + 1]).sqrt()
        };
        (lo.max(f1), hi.min(f2))
    };
    let half = |k: usize| -> (f64, f64) {
        let a = f64::from(o.angles_deg[k]);
        let below = if k == 0 {
            a - 5.0
        } else {
            0.5 * (a + f64::from(o.angles_deg[k - 1]))
        };
        let above = if k + 1 == o.angles_deg.len() {
            a + 5.0
        } else {
            0.5 * (a + f64::from(o.angles_deg[k + 1]))
        };
        (below, above)
    };
    chart.draw_series((0..o.angles_deg.len()).flat_map(|k| {
        let (b, a) = half(k);
        (0..f.len()).map(move |i| {
            let (lo, hi) = edge(i);
            let v = o.normalized_db[k][i].min(0.0);
            Rectangle::new([(lo, b), (hi, a)], level_colour(v, FLOOR_DB).filled())
        })
    }))?;
    for (n, level) in CONTOURS_DB.iter().enumerate() {
        let style = WHITE.stroke_width(if n == 1 { 3 } else { 1 });
        let mut segs = Vec::new();
        for k in 0..o.angles_deg.len().saturating_sub(1) {
            for i in 0..f.len().saturating_sub(1) {
                let (a0, a1) = (f64::from(o.angles_deg[k]), f64::from(o.angles_deg[k + 1]));
                let v = |kk: usize, ii: usize| o.normalized_db[kk][ii];
                let corners = [
                    ((f[i], a0), v(k, i)),
                    ((f[i + 1], a0), v(k, i + 1)),
                    ((f[i + 1], a1), v(k + 1, i + 1)),
                    ((f[i], a1), v(k + 1, i)),
                ];
                segs.extend(cell_segments(corners, *level));
            }
        }
        chart.draw_series(
            segs.into_iter()
                .map(|(p, q)| PathElement::new(vec![p, q], style)),
        )?;
    }
    chart.draw_series(unresolved((f1, f2), (a_lo, a_hi), resolved))?;
    styled_mesh(&mut chart)
        .disable_mesh()
        .x_label_formatter(&label)
        .y_labels(13)
        .y_label_formatter(&|v: &f64| format!("{v:.0}°"))
        .x_desc("Frequency (Hz)")
        .y_desc(format!("Angle, {} (°)", o.orbit.code()))
        .draw()?;
    let (xr, yr) = chart.plotting_area().get_pixel_range();
    marks.push(
        &format!("{} plot area", o.orbit.code()),
        format!("{},{},{},{}", xr.start, yr.start, xr.end, yr.end),
    );
    Ok(())
}

/// The polar map of each measured orbit, one above the other, with a
/// colour bar.
pub fn polar_map_png(path: &Path, d: &Directivity, resolved: Option<(f64, f64)>) -> Result<()> {
    let mut px = pixels();
    let (root, body) = canvas(
        &mut px,
        path,
        "Polar map: level re on axis (contours −3, −6 (bold), −10 dB)",
    )?;
    let (main, bar) = body.split_horizontally(body.dim_in_pixel().0 - 150);
    let mut marks = Marks::new();
    let mut draw = || -> DrawResult {
        let panels = main.split_evenly((d.orbits.len().max(1), 1));
        for (o, area) in d.orbits.iter().zip(&panels) {
            map_panel(area, d, o, resolved, &mut marks)?;
        }
        let mut chart = ChartBuilder::on(&bar)
            .margin(10)
            .x_label_area_size(55)
            .right_y_label_area_size(85)
            .build_cartesian_2d(0.0..1.0, FLOOR_DB..0.0)?;
        chart.draw_series((0..60).map(|i| {
            let a = FLOOR_DB * (1.0 - i as f64 / 60.0);
            let b = FLOOR_DB * (1.0 - (i + 1) as f64 / 60.0);
            Rectangle::new(
                [(0.0, a), (1.0, b)],
                level_colour(0.5 * (a + b), FLOOR_DB).filled(),
            )
        }))?;
        styled_mesh(&mut chart)
            .disable_mesh()
            .disable_x_axis()
            .y_labels(7)
            .y_label_formatter(&|v: &f64| format!("{v:.0}"))
            .y_desc("Level (dB re on axis)")
            .draw()?;
        Ok(())
    };
    draw().map_err(plot_error(path))?;
    root.present().map_err(plot_error(path))?;
    drop((root, body, main, bar));
    marks.save(path, &px)
}

/// The index of the grid frequency nearest `hz` (in octaves), if inside.
fn nearest(d: &Directivity, hz: f64) -> Option<usize> {
    let f = &d.frequency_hz;
    if f.is_empty() || hz < f[0] || hz > *f.last()? {
        return None;
    }
    (0..f.len()).min_by(|&a, &b| (f[a] / hz).ln().abs().total_cmp(&(f[b] / hz).ln().abs()))
}

fn diagram_panel(
    area: &super::theme::Area,
    d: &Directivity,
    o: &OrbitResponses,
    marks: &mut Marks,
) -> DrawResult {
    let mut chart = ChartBuilder::on(area)
        .margin(20)
        .caption(
            format!("{} orbit", o.orbit.code()),
            (FONT, super::SMALLEST_TEXT_PX + 2),
        )
        .build_cartesian_2d(-1.15..1.15, -1.15..1.15)?;
    let radius = |db: f64| ((db.min(0.0) - FLOOR_DB) / -FLOOR_DB).clamp(0.0, 1.0);
    let xy = |deg: f64, r: f64| {
        let t = deg.to_radians();
        (r * t.sin(), r * t.cos())
    };
    let grid = RGBColor(200, 200, 200);
    for ring_db in [0.0, -6.0, -10.0, -20.0] {
        let r = radius(ring_db);
        let pts: Vec<(f64, f64)> = (0..=360).map(|a| xy(f64::from(a), r)).collect();
        chart.draw_series(LineSeries::new(pts, grid.stroke_width(1)))?;
        chart.draw_series(std::iter::once(Text::new(
            format!("{ring_db:.0} dB"),
            xy(-135.0, r),
            (FONT, super::SMALLEST_TEXT_PX)
                .into_font()
                .color(&RGBColor(120, 120, 120)),
        )))?;
    }
    for a in (0..360).step_by(30) {
        chart.draw_series(LineSeries::new(
            vec![(0.0, 0.0), xy(f64::from(a), 1.0)],
            grid.stroke_width(1),
        ))?;
    }
    for (n, hz) in DIAGRAM_HZ.iter().enumerate() {
        let Some(i) = nearest(d, *hz) else { continue };
        let colour = diagram_colour(n);
        let mut pts: Vec<(f64, f64)> = o
            .angles_deg
            .iter()
            .zip(&o.normalized_db)
            .map(|(&a, l)| xy(f64::from(a), radius(l[i])))
            .collect();
        if o.angles_deg.first() == Some(&-170) && o.angles_deg.last() == Some(&180) {
            pts.push(pts[0]);
        }
        chart.draw_series(LineSeries::new(pts, colour.stroke_width(3)))?;
    }
    let (xr, yr) = chart.plotting_area().get_pixel_range();
    marks.push(
        &format!("{} plot area", o.orbit.code()),
        format!("{},{},{},{}", xr.start, yr.start, xr.end, yr.end),
    );
    Ok(())
}

fn diagram_colour(n: usize) -> RGBColor {
    super::theme::ramp(n as f64 / (DIAGRAM_HZ.len() - 1) as f64)
}

/// The legend of the diagrams in one row: a line of each frequency's
/// colour and its nominal frequency.
fn diagram_legend(strip: &super::theme::Area, d: &Directivity) -> DrawResult {
    let mut x = 40;
    for (n, hz) in DIAGRAM_HZ.iter().enumerate() {
        if nearest(d, *hz).is_none() {
            continue;
        }
        let colour = diagram_colour(n);
        strip.draw(&PathElement::new(
            vec![(x, 16), (x + 30, 16)],
            colour.stroke_width(4),
        ))?;
        strip.draw(&Text::new(
            format!("{} Hz", crate::model::units::format_hz(*hz)),
            (x + 38, 4),
            (FONT, super::SMALLEST_TEXT_PX).into_font(),
        ))?;
        x += 170;
    }
    Ok(())
}

/// Polar diagrams of each measured orbit side by side: the level re on
/// axis at a few frequencies, rings at 0, −6, −10 and −20 dB, 0° up.
pub fn polar_diagram_png(path: &Path, d: &Directivity) -> Result<()> {
    let mut px = pixels();
    let (root, body) = canvas(
        &mut px,
        path,
        "Polar diagrams: level re on axis (dB), 0° up",
    )?;
    let mut marks = Marks::new();
    let (top, strip) = body.split_vertically(body.dim_in_pixel().1 - 40);
    let mut draw = || -> DrawResult {
        let panels = top.split_evenly((1, d.orbits.len().max(1)));
        for (o, area) in d.orbits.iter().zip(&panels) {
            diagram_panel(area, d, o, &mut marks)?;
        }
        diagram_legend(&strip, d)
    };
    draw().map_err(plot_error(path))?;
    root.present().map_err(plot_error(path))?;
    drop((root, body, top, strip));
    marks.save(path, &px)
}
