//! Axes and the charts built on them: log-frequency ticks, dB ranges,
//! the house chart and mesh, the legend, the log-frequency panel, the
//! chart of values per band, and a target drawn over any Hz–dB chart.

use plotters::chart::MeshStyle;
use plotters::coord::ranged1d::ValueFormatter;
use plotters::coord::{CoordTranslate, Shift};
use plotters::drawing::DrawingAreaErrorKind;
use plotters::prelude::*;

use super::theme::{Area, FONT, GRID, GRID_MINOR, TARGET, TOLERANCE};
use crate::model::units::format_hz;

/// A chart on `area` with the house margins; `x_label_area` px for the
/// x labels (more where the axis has a title).
pub(super) fn chart_builder<'a, 'b>(
    area: &'a Area<'b>,
    x_label_area: u32,
) -> ChartBuilder<'a, 'b, BitMapBackend<'b>> {
    let mut b = ChartBuilder::on(area);
    b.margin_left(10)
        .margin_right(30)
        .margin_top(10)
        .x_label_area_size(x_label_area + 14)
        .y_label_area_size(95);
    b
}

/// The mesh of `chart` in the house style: fonts and grey grid lines.
pub(super) fn styled_mesh<'a, 'b, DB, XT, YT, X, Y>(
    chart: &'b mut ChartContext<'a, DB, Cartesian2d<X, Y>>,
) -> MeshStyle<'a, 'b, X, Y, DB>
where
    DB: DrawingBackend,
    X: Ranged<ValueType = XT> + ValueFormatter<XT>,
    Y: Ranged<ValueType = YT> + ValueFormatter<YT>,
{
    let mut m = chart.configure_mesh();
    m.label_style((FONT, super::SMALLEST_TEXT_PX))
        .axis_desc_style((FONT, super::SMALLEST_TEXT_PX + 2))
        .bold_line_style(GRID)
        .light_line_style(GRID_MINOR);
    m
}

/// Draws the legend of `chart` at `position` in the house style.
pub(super) fn legend<'a, DB: DrawingBackend + 'a, CT: CoordTranslate>(
    chart: &mut ChartContext<'a, DB, CT>,
    position: SeriesLabelPosition,
) -> std::result::Result<(), DrawingAreaErrorKind<DB::ErrorType>> {
    chart
        .configure_series_labels()
        .position(position)
        .background_style(WHITE.mix(0.85))
        .border_style(GRID)
        .label_font((FONT, super::SMALLEST_TEXT_PX))
        .draw()
}

/// Label only 1, 2 and 5 times a power of ten; the rest are grid lines.
pub(super) fn log_label(f: &f64) -> String {
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
pub(super) fn db_range(values: &[f64], step: f64, min_span: f64) -> (f64, f64) {
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

/// A chart over band centre frequencies (log axis from `f_lo` to `f_hi`)
/// and a decay time from 0 to `y_max` s, its mesh drawn in the house
/// style with `x_desc` and `y_desc`: what every plot of values per band
/// starts from.
pub(super) type BandChart<'a, 'b> = ChartContext<
    'a,
    BitMapBackend<'b>,
    Cartesian2d<
        plotters::coord::combinators::WithKeyPoints<plotters::coord::combinators::LogCoord<f64>>,
        plotters::coord::types::RangedCoordf64,
    >,
>;

pub(super) fn band_chart<'a, 'b>(
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

pub(super) type Series<'a> = (&'a [f64], &'a [f64], RGBColor, String);

/// One panel with a log-frequency x axis (and a target over it, if given).
#[allow(clippy::too_many_arguments)]
pub(super) fn draw_log_panel(
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

/// A log axis over octave band centres.
pub(super) fn band_axis(centres: &[f64]) -> (f64, f64) {
    let lo = centres
        .iter()
        .copied()
        .fold(f64::INFINITY, f64::min)
        .min(63.0)
        / 1.3;
    let hi = centres.iter().copied().fold(0.0f64, f64::max).max(1000.0) * 1.3;
    (lo, hi)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn log_labels_only_at_one_two_five() {
        assert_eq!(log_label(&200.0), "200");
        assert_eq!(log_label(&300.0), "");
        assert_eq!(log_label(&5000.0), "5k");
    }
}
