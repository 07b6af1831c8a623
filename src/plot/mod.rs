//! PNG plots (plotters, bitmap backend, the project's own embedded font).
//!
//! The look is gliss's own: white ground, light grey grid, a deep blue for
//! the main curve and a burnt orange for the second quantity.

use std::path::Path;
use std::sync::Once;

use plotters::chart::MeshStyle;
use plotters::coord::ranged1d::ValueFormatter;
use plotters::coord::{CoordTranslate, Shift};
use plotters::drawing::DrawingAreaErrorKind;
use plotters::prelude::*;

pub mod annotate;
pub mod compare;

use crate::analysis::etc;
use crate::error::{Error, ErrorKind, Result};
use crate::model::{Fraction, Parameter};

/// Font family name under which the embedded font is registered.
const FONT: &str = "sans-serif";
/// DejaVu Sans (Bitstream Vera licence, assets/fonts/DejaVuSans-LICENSE.txt),
/// embedded so that plots need no system fonts.
static FONT_BYTES: &[u8] = include_bytes!("../../assets/fonts/DejaVuSans.ttf");

/// Main curve colour.
pub const BLUE: RGBColor = RGBColor(22, 86, 140);
/// Second curve colour.
pub const ORANGE: RGBColor = RGBColor(196, 98, 24);
/// Grid colour.
pub const GRID: RGBColor = RGBColor(225, 225, 225);
/// Minor grid colour.
pub const GRID_MINOR: RGBColor = RGBColor(242, 242, 242);

/// Plot size in pixels.
pub const SIZE: (u32, u32) = (1200, 800);

fn register_font() {
    static ONCE: Once = Once::new();
    ONCE.call_once(|| {
        // The bytes are a valid TrueType font compiled into the binary.
        let _ = plotters::style::register_font(FONT, FontStyle::Normal, FONT_BYTES);
    });
}

type Area<'a> = DrawingArea<BitMapBackend<'a>, Shift>;

/// A white canvas of [`SIZE`] with `heading` across its top: the root (to
/// present when done) and the area below the heading.
fn canvas<'a>(path: &'a Path, heading: &str) -> Result<(Area<'a>, Area<'a>)> {
    register_font();
    let root = BitMapBackend::new(path, SIZE).into_drawing_area();
    root.fill(&WHITE).map_err(plot_error(path))?;
    let (head, body) = root.split_vertically(50);
    head.draw(&Text::new(
        heading.to_string(),
        (20, 14),
        (FONT, 24).into_font(),
    ))
    .map_err(plot_error(path))?;
    Ok((root, body))
}

/// A chart on `area` with the house margins; `x_label_area` px for the
/// x labels (more where the axis has a title).
fn chart_builder<'a, 'b>(
    area: &'a Area<'b>,
    x_label_area: u32,
) -> ChartBuilder<'a, 'b, BitMapBackend<'b>> {
    let mut b = ChartBuilder::on(area);
    b.margin_left(10)
        .margin_right(30)
        .margin_top(10)
        .x_label_area_size(x_label_area)
        .y_label_area_size(75);
    b
}

/// The mesh of `chart` in the house style: fonts and grey grid lines.
fn styled_mesh<'a, 'b, DB, XT, YT, X, Y>(
    chart: &'b mut ChartContext<'a, DB, Cartesian2d<X, Y>>,
) -> MeshStyle<'a, 'b, X, Y, DB>
where
    DB: DrawingBackend,
    X: Ranged<ValueType = XT> + ValueFormatter<XT>,
    Y: Ranged<ValueType = YT> + ValueFormatter<YT>,
{
    let mut m = chart.configure_mesh();
    m.label_style((FONT, 16))
        .axis_desc_style((FONT, 18))
        .bold_line_style(GRID)
        .light_line_style(GRID_MINOR);
    m
}

/// Draws the legend of `chart` at `position` in the house style.
fn legend<'a, DB: DrawingBackend + 'a, CT: CoordTranslate>(
    chart: &mut ChartContext<'a, DB, CT>,
    position: SeriesLabelPosition,
) -> std::result::Result<(), DrawingAreaErrorKind<DB::ErrorType>> {
    chart
        .configure_series_labels()
        .position(position)
        .background_style(WHITE.mix(0.85))
        .border_style(GRID)
        .label_font((FONT, 15))
        .draw()
}

fn plot_error<E: std::fmt::Display>(path: &Path) -> impl FnOnce(E) -> Error + '_ {
    move |e| {
        Error::new(
            ErrorKind::Io,
            format!("could not draw {}: {e}", path.display()),
        )
    }
}

/// "20", "500", "1k", "12.5k" for an axis in Hz.
pub fn format_hz(f: f64) -> String {
    if f >= 1000.0 {
        let k = f / 1000.0;
        if (k - k.round()).abs() < 1e-6 {
            format!("{}k", k.round())
        } else {
            format!("{k:.1}k")
        }
    } else if (f - f.round()).abs() < 1e-6 {
        format!("{}", f.round())
    } else {
        format!("{f:.1}")
    }
}

/// Label only 1, 2 and 5 times a power of ten; the rest are grid lines.
fn log_label(f: &f64) -> String {
    if is_one_two_five(*f) {
        format_hz(*f)
    } else {
        String::new()
    }
}

fn is_one_two_five(f: f64) -> bool {
    let mantissa = f / 10f64.powf(f.log10().floor());
    [1.0, 2.0, 5.0, 10.0]
        .iter()
        .any(|m| (mantissa - m).abs() < 1e-6)
}

/// Grid frequencies of a log axis over [f1, f2]: (1, 2, 5 × 10^k, which
/// are labelled; every other integer multiple of 10^k, which are not).
pub fn log_ticks(f1: f64, f2: f64) -> (Vec<f64>, Vec<f64>) {
    let (mut bold, mut light) = (Vec::new(), Vec::new());
    let mut decade = 10f64.powf(f1.log10().floor());
    while decade <= f2 {
        for m in 1..10 {
            let f = decade * f64::from(m);
            if f >= f1 * (1.0 - 1e-9) && f <= f2 * (1.0 + 1e-9) {
                if is_one_two_five(f) {
                    bold.push(f);
                } else {
                    light.push(f);
                }
            }
        }
        decade *= 10.0;
    }
    (bold, light)
}

/// Rounds a dB range outward to multiples of `step`.
fn db_range(values: &[f64], step: f64, min_span: f64) -> (f64, f64) {
    let finite = values.iter().filter(|v| v.is_finite());
    let max = finite.clone().cloned().fold(f64::NEG_INFINITY, f64::max);
    let min = finite.cloned().fold(f64::INFINITY, f64::min);
    if !max.is_finite() {
        return (-60.0, 0.0);
    }
    let top = (max / step).ceil() * step + step * 0.5;
    let mut bottom = (min / step).floor() * step;
    if top - bottom < min_span {
        bottom = top - min_span;
    }
    (bottom, top)
}

/// Colour of a target curve and its tolerance band.
pub const TARGET: RGBColor = RGBColor(40, 40, 40);
/// Fill of a target's tolerance band.
pub const TOLERANCE: RGBColor = RGBColor(110, 170, 110);

/// A target curve to draw over a response, in the plotted curve's units,
/// with its legend entry.
#[derive(Debug, Clone, PartialEq)]
pub struct TargetOverlay {
    /// The target and its tolerance band on the response's grid.
    pub curve: crate::analysis::target::TargetCurve,
    /// Legend entry of the target line (the band's is "tolerance").
    pub label: String,
}

/// Draws a target on `chart` (x in Hz, y in dB): its tolerance band as a
/// light fill behind, the target as a dark dashed line, each with a legend
/// entry ("tolerance"; the overlay's label). Any chart with those axes
/// can call it (the response plot; an overlay of several responses).
pub fn draw_target<'a, DB, X, Y>(
    chart: &mut ChartContext<'a, DB, Cartesian2d<X, Y>>,
    t: &TargetOverlay,
) -> std::result::Result<(), DrawingAreaErrorKind<DB::ErrorType>>
where
    DB: DrawingBackend + 'a,
    X: Ranged<ValueType = f64>,
    Y: Ranged<ValueType = f64>,
{
    let c = &t.curve;
    if let Some((lower, upper)) = &c.band_db {
        let outline: Vec<(f64, f64)> = c
            .frequency_hz
            .iter()
            .zip(upper)
            .map(|(f, v)| (*f, *v))
            .chain(
                c.frequency_hz
                    .iter()
                    .zip(lower)
                    .rev()
                    .map(|(f, v)| (*f, *v)),
            )
            .collect();
        chart
            .draw_series(std::iter::once(Polygon::new(
                outline,
                TOLERANCE.mix(0.22).filled(),
            )))?
            .label("tolerance")
            .legend(|(x, y)| {
                Rectangle::new([(x, y - 5), (x + 24, y + 5)], TOLERANCE.mix(0.35).filled())
            });
        for edge in [lower, upper] {
            chart.draw_series(LineSeries::new(
                c.frequency_hz.iter().zip(edge).map(|(f, v)| (*f, *v)),
                TOLERANCE.mix(0.6).stroke_width(1),
            ))?;
        }
    }
    chart
        .draw_series(DashedLineSeries::new(
            c.frequency_hz
                .iter()
                .zip(&c.target_db)
                .map(|(f, v)| (*f, *v)),
            10,
            6,
            TARGET.stroke_width(2),
        ))?
        .label(t.label.clone())
        .legend(|(x, y)| {
            plotters::element::DashedPathElement::new(
                vec![(x, y), (x + 24, y)],
                7,
                4,
                TARGET.stroke_width(2),
            )
        });
    Ok(())
}

/// Draws the frequency response (magnitude above, phase below) to a PNG,
/// with a target and its tolerance band over the magnitude if given.
#[allow(clippy::too_many_arguments)]
pub fn response_png(
    path: &Path,
    title: &str,
    frequency_hz: &[f64],
    magnitude_db: &[f64],
    phase_deg: &[f64],
    smoothing: &str,
    resolved: Option<(f64, f64)>,
    target: Option<&TargetOverlay>,
) -> Result<()> {
    let err = plot_error(path);
    let (root, body) = canvas(path, &format!("Frequency response — {title}"))?;
    let (top, bottom) = body.split_vertically((body.dim_in_pixel().1 as f64 * 0.64) as u32);
    let f1 = frequency_hz.first().copied().unwrap_or(20.0);
    let f2 = frequency_hz.last().copied().unwrap_or(20_000.0);
    let mut levels = magnitude_db.to_vec();
    if let Some(t) = target {
        levels.extend(&t.curve.target_db);
        if let Some((lo, hi)) = &t.curve.band_db {
            levels.extend(lo);
            levels.extend(hi);
        }
    }
    let (lo, hi) = db_range(&levels, 10.0, 40.0);
    let smoothing_label = if smoothing == "none" {
        "no smoothing".to_string()
    } else {
        format!("{smoothing}-octave smoothing")
    };
    draw_log_panel(
        &top,
        (f1, f2),
        (lo, hi),
        "Magnitude (dB re sweep)",
        false,
        resolved,
        &[(
            frequency_hz,
            magnitude_db,
            BLUE,
            format!("magnitude, {smoothing_label}"),
        )],
        target,
    )
    .map_err(plot_error(path))?;
    draw_log_panel(
        &bottom,
        (f1, f2),
        (-180.0, 180.0),
        "Phase (degrees, delay removed)",
        true,
        resolved,
        &[(frequency_hz, phase_deg, ORANGE, "phase".to_string())],
        None,
    )
    .map_err(plot_error(path))?;
    root.present().map_err(err)?;
    Ok(())
}

/// A chart over band centre frequencies (log axis from `f_lo` to `f_hi`)
/// and a decay time from 0 to `y_max` s, its mesh drawn in the house
/// style with `x_desc` and `y_desc`: what every plot of values per band
/// starts from.
type BandChart<'a, 'b> = ChartContext<
    'a,
    BitMapBackend<'b>,
    Cartesian2d<
        plotters::coord::combinators::WithKeyPoints<plotters::coord::combinators::LogCoord<f64>>,
        plotters::coord::types::RangedCoordf64,
    >,
>;

fn band_chart<'a, 'b>(
    area: &'a Area<'b>,
    (f_lo, f_hi): (f64, f64),
    y_max: f64,
    x_desc: &str,
    y_desc: &str,
) -> std::result::Result<BandChart<'a, 'b>, Box<dyn std::error::Error>> {
    let (bold, light) = log_ticks(f_lo, f_hi);
    let mut chart = chart_builder(area, 55).build_cartesian_2d(
        (f_lo..f_hi)
            .log_scale()
            .with_key_points(bold)
            .with_light_points(light),
        0.0..y_max,
    )?;
    styled_mesh(&mut chart)
        .x_labels(40)
        .x_label_formatter(&log_label)
        .y_label_formatter(&|v: &f64| format!("{v:.1}"))
        .x_desc(x_desc)
        .y_desc(y_desc)
        .draw()?;
    Ok(chart)
}

type Series<'a> = (&'a [f64], &'a [f64], RGBColor, String);

/// One panel with a log-frequency x axis (and a target over it, if given).
#[allow(clippy::too_many_arguments)]
fn draw_log_panel(
    area: &DrawingArea<BitMapBackend<'_>, Shift>,
    (f1, f2): (f64, f64),
    (lo, hi): (f64, f64),
    y_desc: &str,
    x_desc: bool,
    resolved: Option<(f64, f64)>,
    series: &[Series<'_>],
    target: Option<&TargetOverlay>,
) -> std::result::Result<(), Box<dyn std::error::Error>> {
    let mut chart = chart_builder(area, if x_desc { 55 } else { 30 }).build_cartesian_2d(
        (f1..f2)
            .log_scale()
            .with_key_points(log_ticks(f1, f2).0)
            .with_light_points(log_ticks(f1, f2).1),
        lo..hi,
    )?;
    let mut mesh = styled_mesh(&mut chart);
    mesh.x_labels(40)
        .x_label_formatter(&log_label)
        .y_label_formatter(&|v: &f64| format!("{v:.0}"))
        .y_desc(y_desc);
    if x_desc {
        mesh.x_desc("Frequency (Hz)");
    }
    if (hi - lo - 360.0).abs() < 1e-9 {
        mesh.y_labels(9);
    }
    mesh.draw()?;
    if let Some((from, to)) = resolved {
        let grey = RGBColor(120, 120, 120);
        let mut labelled = false;
        for (a, b) in [(f1, from.min(f2)), (to.max(f1), f2)] {
            if b <= a {
                continue;
            }
            let s = chart.draw_series(std::iter::once(Rectangle::new(
                [(a, lo), (b, hi)],
                grey.mix(0.15).filled(),
            )))?;
            if !labelled {
                s.label(format!(
                    "shaded: not resolved by the gate (below {} Hz, above {} Hz)",
                    format_hz(from.round()),
                    format_hz((to / 10.0).round() * 10.0)
                ))
                .legend(move |(x, y)| {
                    Rectangle::new([(x, y - 5), (x + 24, y + 5)], grey.mix(0.3).filled())
                });
                labelled = true;
            }
        }
    }
    if let Some(t) = target {
        draw_target(&mut chart, t)?;
    }
    for (x, y, colour, name) in series {
        let pts = x
            .iter()
            .zip(y.iter())
            .filter(|(_, v)| v.is_finite())
            .map(|(a, b)| (*a, *b));
        let drawn = chart.draw_series(LineSeries::new(pts, colour.stroke_width(2)))?;
        // an unnamed series (one of many alike) stays out of the legend
        if !name.is_empty() {
            drawn.label(name.clone()).legend(move |(x, y)| {
                PathElement::new(vec![(x, y), (x + 24, y)], colour.stroke_width(3))
            });
        }
    }
    legend(&mut chart, SeriesLabelPosition::LowerRight)?;
    Ok(())
}

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
    let root = BitMapBackend::new(path, SIZE).into_drawing_area();
    root.fill(&WHITE).map_err(plot_error(path))?;
    let (head, body) = root.split_vertically(50);
    head.draw(&Text::new(
        format!("Impulse response — {title}"),
        (20, 14),
        (FONT, 24).into_font(),
    ))
    .map_err(plot_error(path))?;
    let (top, bottom) = body.split_vertically(body.dim_in_pixel().1 / 2);
    let t_ms = |i: usize| (start_s + i as f64 / fs) * 1e3;
    let peak = ir.iter().fold(0.0f64, |m, v| m.max(v.abs())).max(1e-300);
    // top: from 5 ms before the peak to 60 ms after it
    let d_ms = delay_s * 1e3;
    let (a, b) = (d_ms - 5.0, d_ms + 60.0);
    let draw_top = || -> std::result::Result<(), Box<dyn std::error::Error>> {
        let mut chart = chart_builder(&top, 50).build_cartesian_2d(a..b, -1.05..1.05)?;
        styled_mesh(&mut chart)
            .x_desc("Time after the start of the recording (ms)")
            .y_desc("Amplitude (re peak)")
            .x_label_formatter(&|v: &f64| format!("{v:.0}"))
            .y_label_formatter(&|v: &f64| format!("{:.1}", (v * 10.0).round() / 10.0 + 0.0))
            .draw()?;
        let pts = ir
            .iter()
            .enumerate()
            .map(|(i, v)| (t_ms(i), v / peak))
            .filter(|(t, _)| *t >= a && *t <= b);
        chart
            .draw_series(LineSeries::new(pts, BLUE.stroke_width(1)))?
            .label(format!("impulse response, peak at {d_ms:.3} ms"))
            .legend(|(x, y)| PathElement::new(vec![(x, y), (x + 24, y)], BLUE.stroke_width(3)));
        legend(&mut chart, SeriesLabelPosition::UpperRight)?;
        Ok(())
    };
    draw_top().map_err(plot_error(path))?;
    let etc_db = etc::energy_time_curve_db(ir, -120.0);
    let reduced = block_max(&etc_db, 2000);
    let floor = {
        let mut sorted: Vec<f64> = etc_db.clone();
        sorted.sort_by(|x, y| x.total_cmp(y));
        let median = sorted.get(sorted.len() / 2).copied().unwrap_or(-100.0);
        ((median - 20.0) / 10.0).floor() * 10.0
    };
    let (ta, tb) = (t_ms(0), t_ms(ir.len().saturating_sub(1)));
    let draw_bottom = || -> std::result::Result<(), Box<dyn std::error::Error>> {
        let mut chart =
            chart_builder(&bottom, 50).build_cartesian_2d(ta..tb, floor.max(-120.0)..3.0)?;
        styled_mesh(&mut chart)
            .x_desc("Time after the start of the recording (ms)")
            .y_desc("Energy (dB re peak)")
            .x_label_formatter(&|v: &f64| format!("{v:.0}"))
            .y_label_formatter(&|v: &f64| format!("{v:.0}"))
            .draw()?;
        let pts = reduced.iter().map(|(i, v)| (t_ms(*i), *v));
        chart
            .draw_series(LineSeries::new(pts, ORANGE.stroke_width(1)))?
            .label("energy-time curve (squared envelope)")
            .legend(|(x, y)| PathElement::new(vec![(x, y), (x + 24, y)], ORANGE.stroke_width(3)));
        legend(&mut chart, SeriesLabelPosition::UpperRight)?;
        Ok(())
    };
    draw_bottom().map_err(plot_error(path))?;
    root.present().map_err(plot_error(path))?;
    Ok(())
}

/// Colour of harmonic order n (2..=9), the project's own palette.
pub fn order_colour(n: u32) -> RGBColor {
    match n {
        2 => ORANGE,
        3 => RGBColor(46, 139, 87),
        4 => RGBColor(120, 80, 160),
        5 => RGBColor(178, 34, 52),
        6 => RGBColor(0, 128, 128),
        7 => RGBColor(128, 128, 0),
        8 => RGBColor(139, 90, 43),
        _ => RGBColor(90, 90, 90),
    }
}

/// Draws the distortion orders: above, the fundamental and each order in
/// dB re sweep against the excitation frequency, each order's noise floor
/// dashed; below, THD in percent on a log scale with its noise floor.
pub fn distortion_png(
    path: &Path,
    title: &str,
    response: &crate::analysis::FrequencyResponse,
    d: &crate::analysis::Distortion,
) -> Result<()> {
    let (root, body) = canvas(path, &format!("Harmonic distortion — {title}"))?;
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
    let (bold, light) = log_ticks(f1, f2);
    let draw_top = || -> std::result::Result<(), Box<dyn std::error::Error>> {
        let mut chart = chart_builder(&top, 30).build_cartesian_2d(
            (f1..f2)
                .log_scale()
                .with_key_points(bold.clone())
                .with_light_points(light.clone()),
            top_lo..top_hi,
        )?;
        styled_mesh(&mut chart)
            .x_labels(40)
            .x_label_formatter(&log_label)
            .y_label_formatter(&|v: &f64| format!("{v:.0}"))
            .y_desc("Level (dB re sweep)")
            .draw()?;
        let fund_pts: Vec<(f64, f64)> = f
            .iter()
            .zip(fund)
            .map(|(a, b)| (*a, *b))
            .filter(|(a, _)| *a <= f2)
            .collect();
        chart
            .draw_series(LineSeries::new(fund_pts, BLUE.stroke_width(2)))?
            .label("fundamental")
            .legend(|(x, y)| PathElement::new(vec![(x, y), (x + 24, y)], BLUE.stroke_width(3)));
        for o in &d.orders {
            let colour = order_colour(o.order);
            let floor = absolute(o, true);
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
            for run in runs {
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
        legend(&mut chart, SeriesLabelPosition::MiddleRight)?;
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
    let draw_bottom = || -> std::result::Result<(), Box<dyn std::error::Error>> {
        let mut chart = chart_builder(&bottom, 55).build_cartesian_2d(
            (f1..f2)
                .log_scale()
                .with_key_points(bold.clone())
                .with_light_points(light.clone()),
            (lo..hi).log_scale(),
        )?;
        styled_mesh(&mut chart)
            .x_labels(40)
            .x_label_formatter(&log_label)
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
        legend(&mut chart, SeriesLabelPosition::UpperRight)?;
        Ok(())
    };
    draw_bottom().map_err(plot_error(path))?;
    root.present().map_err(plot_error(path))?;
    Ok(())
}

/// Colour of the k-th of `n` bands: from deep blue at low frequencies
/// through green to a warm red at high ones (the project's own ramp,
/// [`ramp`]).
pub fn band_colour(k: usize, n: usize) -> RGBColor {
    ramp(if n <= 1 {
        0.0
    } else {
        k as f64 / (n - 1) as f64
    })
}

/// The project's own colour ramp at u in [0, 1]: deep blue, green, ochre,
/// warm red. Bands run along it from low to high frequency, the decay
/// spectrum from its first slice to its last, the spectrogram from its
/// floor to its maximum.
pub fn ramp(u: f64) -> RGBColor {
    let stops = [
        (22.0, 86.0, 140.0),
        (46.0, 139.0, 87.0),
        (196.0, 150.0, 24.0),
        (178.0, 34.0, 52.0),
    ];
    let u = u.clamp(0.0, 1.0) * (stops.len() - 1) as f64;
    let i = (u.floor() as usize).min(stops.len() - 2);
    let t = u - i as f64;
    let mix = |a: f64, b: f64| (a + (b - a) * t).round() as u8;
    RGBColor(
        mix(stops[i].0, stops[i + 1].0),
        mix(stops[i].1, stops[i + 1].1),
        mix(stops[i].2, stops[i + 1].2),
    )
}

fn seconds(v: f64) -> String {
    if v < 1.0 {
        format!("{:.0} ms", v * 1e3)
    } else {
        format!("{v:.2} s")
    }
}

/// Draws the Schroeder decay curves of the octave bands, each with the
/// line fitted for T30 (or T20, or EDT) over its evaluation range.
pub fn decay_png(path: &Path, title: &str, room: &crate::analysis::room::Room) -> Result<()> {
    let (root, body) = canvas(path, &format!("Energy decay per octave band — {title}"))?;
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
    let draw = || -> std::result::Result<(), Box<dyn std::error::Error>> {
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
        legend(&mut chart, SeriesLabelPosition::UpperRight)?;
        Ok(())
    };
    draw().map_err(plot_error(path))?;
    root.present().map_err(plot_error(path))?;
    Ok(())
}

/// Draws T20, T30 and EDT per octave band (markers) with T30 per
/// one-third-octave band (thin), on a log frequency axis.
pub fn reverberation_png(
    path: &Path,
    title: &str,
    room: &crate::analysis::room::Room,
) -> Result<()> {
    let (root, body) = canvas(path, &format!("Reverberation time per band — {title}"))?;
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
    let f_lo = freqs
        .iter()
        .cloned()
        .fold(f64::INFINITY, f64::min)
        .min(31.5)
        / 1.3;
    let f_hi = freqs.iter().cloned().fold(0.0f64, f64::max).max(1000.0) * 1.3;
    let draw = || -> std::result::Result<(), Box<dyn std::error::Error>> {
        let mut chart = band_chart(
            &body,
            (f_lo, f_hi),
            y_max,
            "Band centre frequency (Hz)",
            "Decay time (s)",
        )?;
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
        }
        legend(&mut chart, SeriesLabelPosition::UpperRight)?;
        Ok(())
    };
    draw().map_err(plot_error(path))?;
    root.present().map_err(plot_error(path))?;
    Ok(())
}

/// Draws the measured phase (delay removed, unwrapped) against the
/// minimum phase its magnitude implies.
pub fn phase_png(
    path: &Path,
    title: &str,
    frequency_hz: &[f64],
    p: &crate::analysis::phase::PhaseAnalysis,
) -> Result<()> {
    let (root, body) = canvas(path, &format!("Phase — {title}"))?;
    let f1 = frequency_hz.first().copied().unwrap_or(20.0);
    let f2 = frequency_hz.last().copied().unwrap_or(20_000.0);
    let all: Vec<f64> = p
        .phase_unwrapped_deg
        .iter()
        .chain(&p.minimum_phase_deg)
        .copied()
        .collect();
    let hi = (all.iter().cloned().fold(f64::MIN, f64::max) / 90.0).ceil() * 90.0 + 45.0;
    let lo = (all.iter().cloned().fold(f64::MAX, f64::min) / 90.0).floor() * 90.0 - 45.0;
    draw_log_panel(
        &body,
        (f1, f2),
        (lo, hi),
        "Phase (degrees, delay removed, unwrapped)",
        true,
        None,
        &[
            (
                frequency_hz,
                &p.phase_unwrapped_deg,
                ORANGE,
                "measured".to_string(),
            ),
            (
                frequency_hz,
                &p.minimum_phase_deg,
                BLUE,
                "minimum phase from the magnitude".to_string(),
            ),
        ],
        None,
    )
    .map_err(plot_error(path))?;
    root.present().map_err(plot_error(path))?;
    Ok(())
}

/// Draws the group delay (delay removed) and the excess group delay (with
/// the delay put back), in milliseconds.
pub fn group_delay_png(
    path: &Path,
    title: &str,
    frequency_hz: &[f64],
    p: &crate::analysis::phase::PhaseAnalysis,
    delay_s: f64,
) -> Result<()> {
    let (root, body) = canvas(path, &format!("Group delay — {title}"))?;
    let f1 = frequency_hz.first().copied().unwrap_or(20.0);
    let f2 = frequency_hz.last().copied().unwrap_or(20_000.0);
    let gd: Vec<f64> = p.group_delay_s.iter().map(|t| t * 1e3).collect();
    let excess: Vec<f64> = p.excess_group_delay_s.iter().map(|t| t * 1e3).collect();
    // the view: around the delay, clipped so that a spike at a notch does
    // not flatten everything else
    let mut sorted: Vec<f64> = gd
        .iter()
        .chain(&excess)
        .copied()
        .filter(|v| v.is_finite())
        .collect();
    sorted.sort_by(|a, b| a.total_cmp(b));
    let q = |x: f64| {
        sorted
            .get(((sorted.len() as f64 - 1.0) * x) as usize)
            .copied()
            .unwrap_or(0.0)
    };
    let (lo, hi) = (q(0.02).min(0.0) - 1.0, q(0.98).max(delay_s * 1e3) + 1.0);
    draw_log_panel(
        &body,
        (f1, f2),
        (lo, hi),
        "Time (ms)",
        true,
        None,
        &[
            (
                frequency_hz,
                &gd,
                ORANGE,
                format!("group delay (after the {:.3} ms delay)", delay_s * 1e3),
            ),
            (
                frequency_hz,
                &excess,
                BLUE,
                "excess group delay (delay included)".to_string(),
            ),
        ],
        None,
    )
    .map_err(plot_error(path))?;
    root.present().map_err(plot_error(path))?;
    Ok(())
}

/// Draws the decay spectrum: the spectrum of the gated response as its
/// start moves later, every fourth slice, coloured from the first (deep
/// blue) to the last (warm red).
pub fn decay_spectrum_png(
    path: &Path,
    title: &str,
    frequency_hz: &[f64],
    slices: &[crate::analysis::csd::Slice],
    resolved: (f64, f64),
) -> Result<()> {
    let (root, body) = canvas(path, &format!("Decay spectrum within the gate — {title}"))?;
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
    let shown: Vec<&crate::analysis::csd::Slice> = slices.iter().step_by(4).collect();
    let n = shown.len();
    let names: Vec<String> = shown
        .iter()
        .map(|s| format!("window from {:+.2} ms (re the peak)", s.start_s * 1e3))
        .collect();
    let series: Vec<Series<'_>> = shown
        .iter()
        .enumerate()
        .map(|(k, s)| {
            (
                frequency_hz,
                &s.level_db[..],
                band_colour(k, n),
                names[k].clone(),
            )
        })
        .collect();
    draw_log_panel(
        &body,
        (f1, f2),
        (-45.0, 3.0),
        "Level (dB re the first spectrum's maximum)",
        true,
        None,
        &series,
        None,
    )
    .map_err(plot_error(path))?;
    root.present().map_err(plot_error(path))?;
    Ok(())
}

/// Colour of a spectrogram level `db` (dB re the maximum, ≤ 0) above a
/// floor of `floor_db`: the project's ramp from the floor to 0 dB.
pub fn level_colour(db: f64, floor_db: f64) -> RGBColor {
    ramp(1.0 - db / floor_db)
}

/// Draws the spectrogram: time after the direct sound across, frequency
/// (log) up, colour the level in dB re the maximum, with a colour bar.
pub fn spectrogram_png(
    path: &Path,
    title: &str,
    s: &crate::analysis::spectrogram::Spectrogram,
) -> Result<()> {
    let (root, body) = canvas(path, &format!("Spectrogram of the decay — {title}"))?;
    let (main, bar) = body.split_horizontally(body.dim_in_pixel().0 - 150);
    let f1 = s.frequency_hz.first().copied().unwrap_or(20.0);
    let f2 = s
        .frequency_hz
        .last()
        .copied()
        .unwrap_or(20_000.0)
        .max(f1 * 1.01);
    let half_row = 2f64.powf(1.0 / 96.0);
    let half_hop = 0.5 * s.hop_s;
    let t0 = s.time_s.first().copied().unwrap_or(0.0) - half_hop;
    let t1 = (s.time_s.last().copied().unwrap_or(0.0) + half_hop).max(t0 + s.hop_s);
    let ms = t1 < 1.0;
    let (scale, unit) = if ms { (1e3, "ms") } else { (1.0, "s") };
    let (bold, light) = log_ticks(f1, f2);
    let floor = s.floor_db;
    let draw_main = || -> std::result::Result<(), Box<dyn std::error::Error>> {
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
            .y_label_formatter(&log_label)
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
        let note = format!(
            "Hann windows of {}, step {}, 1/48-octave rows{}",
            short(s.window_s * 1e3),
            short(s.hop_s * 1e3),
            match s.noise_s {
                Some(n) => format!("; ends where the decay meets the noise ({})", seconds(n)),
                None => "; runs to the end of the response".to_string(),
            }
        );
        chart
            .draw_series(std::iter::empty::<Circle<(f64, f64), i32>>())?
            .label(note)
            .legend(|(x, y)| PathElement::new(vec![(x, y)], TRANSPARENT));
        legend(&mut chart, SeriesLabelPosition::UpperRight)?;
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
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn hz_labels() {
        assert_eq!(format_hz(20.0), "20");
        assert_eq!(format_hz(1000.0), "1k");
        assert_eq!(format_hz(12_500.0), "12.5k");
        assert_eq!(log_label(&200.0), "200");
        assert_eq!(log_label(&300.0), "");
        assert_eq!(log_label(&5000.0), "5k");
    }
}
