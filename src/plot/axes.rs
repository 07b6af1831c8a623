//! Axes and the charts built on them: log-frequency ticks, dB ranges,
//! the house chart and mesh, the legend, the log-frequency panel, the
//! chart of values per band, and a target drawn over any Hz–dB chart.

use plotters::chart::MeshStyle;
use plotters::coord::ranged1d::ValueFormatter;
use plotters::coord::{CoordTranslate, Shift};
use plotters::drawing::DrawingAreaErrorKind;
use plotters::prelude::*;

use super::annotate::Marks;
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

/// The legend's label font size, px.
const LEGEND_FONT: u32 = super::SMALLEST_TEXT_PX;

/// Where a legend went: its box in pixels of the whole image and how many
/// sampled points of the plotted data it covers.
#[derive(Debug, Clone, Copy, PartialEq)]
pub(super) struct LegendPlace {
    /// Left, top, right, bottom, px.
    pub box_px: (i32, i32, i32, i32),
    /// Sampled data points (every 3 px along each line, each marker)
    /// inside the box.
    pub covered: usize,
}

/// The data of a chart as the legend placement sees it: polylines (a
/// non-finite point breaks a line) and single markers with their radius
/// in pixels, both in the chart's coordinates.
#[derive(Debug, Clone, Default)]
pub(super) struct Drawn {
    /// Lines as drawn, point to point.
    pub lines: Vec<Vec<(f64, f64)>>,
    /// Markers: centre and radius in px.
    pub markers: Vec<((f64, f64), i32)>,
}

impl Drawn {
    /// Adds a line.
    pub fn line(&mut self, pts: impl IntoIterator<Item = (f64, f64)>) {
        self.lines.push(pts.into_iter().collect());
    }

    /// Adds markers of radius `r` px.
    pub fn markers(&mut self, pts: impl IntoIterator<Item = (f64, f64)>, r: i32) {
        self.markers.extend(pts.into_iter().map(|p| (p, r)));
    }
}

/// The data of `drawn` as pixels of the image, lines sampled every 3 px
/// or closer, markers as their centre and the four points of their rim.
fn drawn_pixels<DB, CT>(chart: &ChartContext<'_, DB, CT>, drawn: &Drawn) -> Vec<(i32, i32)>
where
    DB: DrawingBackend,
    CT: CoordTranslate<From = (f64, f64)>,
{
    let mut out = Vec::new();
    for line in &drawn.lines {
        let mut last: Option<(i32, i32)> = None;
        for p in line {
            if !(p.0.is_finite() && p.1.is_finite()) {
                last = None;
                continue;
            }
            let q = chart.as_coord_spec().translate(p);
            if let Some(a) = last {
                let (dx, dy) = (f64::from(q.0 - a.0), f64::from(q.1 - a.1));
                let steps = ((dx.hypot(dy) / 3.0).ceil() as i32).clamp(1, 2000);
                for k in 1..steps {
                    let t = f64::from(k) / f64::from(steps);
                    out.push((a.0 + (dx * t).round() as i32, a.1 + (dy * t).round() as i32));
                }
            }
            out.push(q);
            last = Some(q);
        }
    }
    for (p, r) in &drawn.markers {
        if p.0.is_finite() && p.1.is_finite() {
            let c = chart.as_coord_spec().translate(p);
            out.extend([
                c,
                (c.0 - r, c.1),
                (c.0 + r, c.1),
                (c.0, c.1 - r),
                (c.0, c.1 + r),
            ]);
        }
    }
    out
}

/// The size in px of a legend of `labels` as plotters draws it: the
/// lines of text, the 30 px of the symbols and a margin of 10 px round.
fn legend_size<DB: DrawingBackend, CT: CoordTranslate>(
    chart: &ChartContext<'_, DB, CT>,
    labels: &[String],
) -> (i32, i32) {
    let font = (FONT, LEGEND_FONT).into_font();
    let mut text = plotters::element::MultiLineText::<_, &str>::new((0, 0), font);
    for l in labels {
        text.push_line(l.as_str());
    }
    let (w, h) = text
        .estimate_dimension()
        .unwrap_or((300, 20 * labels.len() as i32));
    let _ = chart;
    (w + 30 + 20, h + 20)
}

/// Draws the legend of `chart` (whose entries read `labels`) where it
/// covers the least of the plotted data `drawn`: each corner of the
/// plotting area and the middle of each edge are tried, the first with
/// nothing under it wins (upper right, upper left, lower right, lower left,
/// then the middles), else the one over the fewest points. Every chart
/// places its legend here, so none is put by hand. Writes `NAME legend`
/// (its box), `NAME legend covers` (the sampled data points under it) and
/// `NAME plot area` into `marks`.
pub(super) fn place_legend<'a, 'b: 'a, CT>(
    chart: &mut ChartContext<'a, BitMapBackend<'b>, CT>,
    labels: &[String],
    drawn: &Drawn,
    marks: &mut Marks,
    name: &str,
) -> std::result::Result<LegendPlace, Box<dyn std::error::Error>>
where
    CT: CoordTranslate<From = (f64, f64)>,
{
    let (xr, yr) = chart.plotting_area().get_pixel_range();
    marks.push(
        &format!("{name} plot area"),
        format!("{},{},{},{}", xr.start, yr.start, xr.end, yr.end),
    );
    let labels: Vec<String> = labels.iter().filter(|l| !l.is_empty()).cloned().collect();
    if labels.is_empty() {
        return Ok(LegendPlace {
            box_px: (0, 0, 0, 0),
            covered: 0,
        });
    }
    let (w, h) = legend_size(chart, &labels);
    let (aw, ah) = (xr.end - xr.start, yr.end - yr.start);
    let inset = 6;
    let candidates = [
        (aw - w - inset, inset),
        (inset, inset),
        (aw - w - inset, ah - h - inset),
        (inset, ah - h - inset),
        ((aw - w) / 2, inset),
        ((aw - w) / 2, ah - h - inset),
        (aw - w - inset, (ah - h) / 2),
        (inset, (ah - h) / 2),
    ];
    let pixels = drawn_pixels(chart, drawn);
    let count = |(rx, ry): (i32, i32)| {
        let (x0, y0) = (xr.start + rx - 2, yr.start + ry - 2);
        let (x1, y1) = (x0 + w + 4, y0 + h + 4);
        pixels
            .iter()
            .filter(|p| p.0 >= x0 && p.0 <= x1 && p.1 >= y0 && p.1 <= y1)
            .count()
    };
    let mut best = (candidates[0], usize::MAX);
    for c in candidates {
        let n = count(c);
        if n < best.1 {
            best = (c, n);
        }
        if n == 0 {
            break;
        }
    }
    let ((rx, ry), covered) = best;
    chart
        .configure_series_labels()
        .position(SeriesLabelPosition::Coordinate(rx, ry))
        .background_style(WHITE.mix(0.85))
        .border_style(GRID)
        .label_font((FONT, LEGEND_FONT))
        .draw()?;
    let box_px = (
        xr.start + rx,
        yr.start + ry,
        xr.start + rx + w,
        yr.start + ry + h,
    );
    marks.push(
        &format!("{name} legend"),
        format!("{},{},{},{}", box_px.0, box_px.1, box_px.2, box_px.3),
    );
    marks.push(&format!("{name} legend covers"), covered);
    Ok(LegendPlace { box_px, covered })
}

/// The right end of a frequency axis that reaches `f2`: `f2` rounded up
/// to two significant figures (19 897 Hz → 20 kHz), so that the axis ends
/// on a value its label can say.
pub fn axis_end(f2: f64) -> f64 {
    if !(f2.is_finite() && f2 > 0.0) {
        return f2;
    }
    let step = 10f64.powf(f2.log10().floor() - 1.0);
    let end = (f2 / step - 1e-9).ceil() * step;
    // no float dust in the label
    (end * 1e6).round() / 1e6
}

/// The ticks of a log frequency axis over [f1, f2]: the labelled ones
/// (1, 2, 5 × 10^k, and `f2` itself, the right edge; a 1-2-5 tick too near
/// the edge for its label to stand clear gives way) and the grid lines.
pub fn frequency_ticks(f1: f64, f2: f64) -> (Vec<f64>, Vec<f64>) {
    let (bold, mut light) = log_ticks(f1, f2);
    let mut key: Vec<f64> = Vec::new();
    for f in bold {
        if f < f2 / 1.3 {
            key.push(f);
        } else {
            light.push(f);
        }
    }
    key.push(f2);
    (key, light)
}

/// The label of a frequency tick: 1-2-5 values and the axis's right edge
/// `end`.
pub(super) fn frequency_label(end: f64) -> impl Fn(&f64) -> String {
    move |f: &f64| {
        if (f / end - 1.0).abs() < 1e-9 {
            format_hz(end)
        } else {
            log_label(f)
        }
    }
}

/// The labels of the ticks `key` as `label` writes them, joined by ", ":
/// what the `x ticks` mark says.
pub(super) fn tick_labels(key: &[f64], label: &dyn Fn(&f64) -> String) -> String {
    key.iter()
        .map(label)
        .filter(|l| !l.is_empty())
        .collect::<Vec<_>>()
        .join(", ")
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

/// The label of a band centre: "31.5", "63", "1k", "16k".
pub(super) fn band_label(centre: f64) -> String {
    format_hz(centre)
}

/// A chart of values per band: a log frequency axis over (`f_lo`, `f_hi`)
/// whose labelled ticks are the band centres `ticks` (nominal, e.g. 31.5,
/// 63 … 8k), the 1-2-5 grid faint behind; y a decay time from 0 to
/// `y_max` s. Writes `x ticks` (the labels drawn) and `x range` into
/// `marks`.
pub(super) fn band_chart<'a, 'b>(
    area: &'a Area<'b>,
    (f_lo, f_hi): (f64, f64),
    ticks: &[f64],
    y_max: f64,
    descs: (&str, &str),
    marks: &mut Marks,
) -> std::result::Result<BandChart<'a, 'b>, Box<dyn std::error::Error>> {
    band_chart_y(area, (f_lo, f_hi), ticks, y_max, 1, descs, marks)
}

/// [`band_chart`] with its y labels to `y_decimals` decimals (0 for a
/// level in dB).
pub(super) fn band_chart_y<'a, 'b>(
    area: &'a Area<'b>,
    (f_lo, f_hi): (f64, f64),
    ticks: &[f64],
    y_max: f64,
    y_decimals: usize,
    (x_desc, y_desc): (&str, &str),
    marks: &mut Marks,
) -> std::result::Result<BandChart<'a, 'b>, Box<dyn std::error::Error>> {
    let (bold, light) = log_ticks(f_lo, f_hi);
    let grid: Vec<f64> = bold
        .into_iter()
        .chain(light)
        .filter(|f| ticks.iter().all(|t| (f / t - 1.0).abs() > 0.02))
        .collect();
    let key: Vec<f64> = ticks.to_vec();
    let label = {
        let key = key.clone();
        move |f: &f64| {
            if key.iter().any(|t| (f / t - 1.0).abs() < 1e-9) {
                band_label(*f)
            } else {
                String::new()
            }
        }
    };
    marks.push("x ticks", tick_labels(&key, &label));
    marks.push("x range", format!("{f_lo}..{f_hi}"));
    let mut chart = chart_builder(area, 55).build_cartesian_2d(
        (f_lo..f_hi)
            .log_scale()
            .with_key_points(key)
            .with_light_points(grid),
        0.0..y_max,
    )?;
    styled_mesh(&mut chart)
        .x_labels(40)
        .x_label_formatter(&label)
        .y_label_formatter(&|v: &f64| format!("{v:.y_decimals$}"))
        .x_desc(x_desc)
        .y_desc(y_desc)
        .draw()?;
    Ok(chart)
}

pub(super) type Series<'a> = (&'a [f64], &'a [f64], RGBColor, String);

/// What a log panel does with values outside its y range.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(super) enum Clip {
    /// Nothing: the range holds the data.
    Nothing,
    /// Each run of values off the scale gets a triangle at the edge it
    /// left by, pointing out, with a legend entry; counted in the marks.
    Mark,
    /// A curve ends where it leaves the range (a floor it sinks into).
    End,
}

/// One panel with a log-frequency x axis (and a target over it, if
/// given). The axis runs to [`axis_end`] of `f2` and labels its right
/// edge; a non-finite value breaks a curve. The legend is placed by
/// [`place_legend`]; the panel's ticks, ranges and legend go into `marks`
/// under `name`.
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
    clip: Clip,
    marks: &mut Marks,
    name: &str,
) -> std::result::Result<(), Box<dyn std::error::Error>> {
    let f2 = axis_end(f2);
    let (key, light) = frequency_ticks(f1, f2);
    let label = frequency_label(f2);
    marks.push(&format!("{name} x ticks"), tick_labels(&key, &label));
    marks.push(&format!("{name} x range"), format!("{f1}..{f2}"));
    marks.push(&format!("{name} y range"), format!("{lo}..{hi}"));
    let mut chart = chart_builder(area, if x_desc { 55 } else { 30 }).build_cartesian_2d(
        (f1..f2)
            .log_scale()
            .with_key_points(key)
            .with_light_points(light),
        lo..hi,
    )?;
    let mut mesh = styled_mesh(&mut chart);
    mesh.x_labels(40)
        .x_label_formatter(&label)
        .y_label_formatter(&|v: &f64| format!("{v:.0}"))
        .y_desc(y_desc);
    if x_desc {
        mesh.x_desc("Frequency (Hz)");
    }
    if (hi - lo - 360.0).abs() < 1e-9 {
        mesh.y_labels(9);
    }
    mesh.draw()?;
    let mut labels: Vec<String> = Vec::new();
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
                let text = format!(
                    "shaded: not resolved by the gate (below {} Hz, above {} Hz)",
                    format_hz(from.round()),
                    format_hz((to / 10.0).round() * 10.0)
                );
                labels.push(text.clone());
                s.label(text).legend(move |(x, y)| {
                    Rectangle::new([(x, y - 5), (x + 24, y + 5)], grey.mix(0.3).filled())
                });
                labelled = true;
            }
        }
    }
    let mut drawn = Drawn::default();
    if let Some(t) = target {
        draw_target(&mut chart, t)?;
        if t.curve.band_db.is_some() {
            labels.push("tolerance".into());
        }
        labels.push(t.label.clone());
        let c = &t.curve;
        drawn.line(
            c.frequency_hz
                .iter()
                .copied()
                .zip(c.target_db.iter().copied()),
        );
        if let Some((lower, upper)) = &c.band_db {
            drawn.line(c.frequency_hz.iter().copied().zip(lower.iter().copied()));
            drawn.line(c.frequency_hz.iter().copied().zip(upper.iter().copied()));
        }
    }
    let mut clipped: Vec<(f64, bool, RGBColor)> = Vec::new();
    for (x, y, colour, name) in series {
        let mut pts: Vec<(f64, f64)> = x.iter().copied().zip(y.iter().copied()).collect();
        if clip == Clip::End {
            for p in &mut pts {
                if p.1 < lo || p.1 > hi {
                    p.1 = f64::NAN;
                }
            }
        }
        if clip == Clip::Mark {
            // one triangle per run off the scale, at its most extreme point
            let mut run: Option<(f64, f64, bool)> = None;
            for p in pts.iter().chain(std::iter::once(&(f64::NAN, 0.0))) {
                let side = if p.1 > hi {
                    Some(true)
                } else if p.1 < lo {
                    Some(false)
                } else {
                    None
                };
                match (side, run) {
                    (Some(up), Some((_, v, s))) if s == up => {
                        if (up && p.1 > v) || (!up && p.1 < v) {
                            run = Some((p.0, p.1, up));
                        }
                    }
                    (Some(up), r) => {
                        if let Some((f, _, s)) = r {
                            clipped.push((f, s, *colour));
                        }
                        run = Some((p.0, p.1, up));
                    }
                    (None, r) => {
                        if let Some((f, _, s)) = r {
                            clipped.push((f, s, *colour));
                        }
                        run = None;
                    }
                }
            }
        }
        // a non-finite value ends a run: each run is drawn on its own
        let mut first = true;
        for run in pts.split(|p| !p.1.is_finite()).filter(|r| !r.is_empty()) {
            let drawn_run =
                chart.draw_series(LineSeries::new(run.iter().copied(), colour.stroke_width(2)))?;
            // an unnamed series (one of many alike) stays out of the legend
            if first && !name.is_empty() {
                let colour = *colour;
                drawn_run.label(name.clone()).legend(move |(x, y)| {
                    PathElement::new(vec![(x, y), (x + 24, y)], colour.stroke_width(3))
                });
                labels.push(name.clone());
            }
            first = false;
        }
        drawn.line(pts);
    }
    if clip == Clip::Mark {
        let up = clipped.iter().filter(|c| c.1).count();
        marks.push(&format!("{name} clipped above"), up);
        marks.push(&format!("{name} clipped below"), clipped.len() - up);
        for (f, above, colour) in &clipped {
            let (y, dir) = if *above { (hi, -1) } else { (lo, 1) };
            chart.draw_series(std::iter::once(
                EmptyElement::at((*f, y))
                    + Polygon::new(
                        vec![(0, 0), (-6, 11 * -dir), (6, 11 * -dir)],
                        colour.filled(),
                    ),
            ))?;
            drawn.markers(std::iter::once((*f, y)), 12);
        }
        if !clipped.is_empty() {
            let text = "triangle at the edge: the curve goes off the scale there".to_string();
            chart
                .draw_series(std::iter::empty::<Circle<(f64, f64), i32>>())?
                .label(text.clone())
                .legend(|(x, y)| {
                    Polygon::new(
                        vec![(x + 12, y - 6), (x + 6, y + 5), (x + 18, y + 5)],
                        BLACK.filled(),
                    )
                });
            labels.push(text);
        }
    }
    place_legend(&mut chart, &labels, &drawn, marks, name)?;
    Ok(())
}

/// A phase in degrees wrapped into (−180, 180] on its frequency grid,
/// with a break (a non-finite value at the geometric middle) wherever the
/// wrapped curve jumps by more than 180°, so that a wrap is not drawn as a
/// vertical line.
pub fn wrap_phase(frequency_hz: &[f64], phase_deg: &[f64]) -> (Vec<f64>, Vec<f64>) {
    let wrap = |p: f64| {
        let w = (p + 180.0).rem_euclid(360.0) - 180.0;
        if w == -180.0 { 180.0 } else { w }
    };
    let (mut f, mut v) = (Vec::new(), Vec::new());
    let mut last: Option<(f64, f64)> = None;
    for (&x, &p) in frequency_hz.iter().zip(phase_deg) {
        let w = if p.is_finite() { wrap(p) } else { f64::NAN };
        if let Some((lx, lw)) = last {
            if (w - lw).abs() > 180.0 {
                f.push((lx * x).sqrt());
                v.push(f64::NAN);
            }
        }
        f.push(x);
        v.push(w);
        last = Some((x, w));
    }
    (f, v)
}

/// A log axis over octave band centres.
pub(super) fn band_axis(centres: &[f64]) -> (f64, f64) {
    let lo = centres
        .iter()
        .copied()
        .fold(f64::INFINITY, f64::min)
        .min(63.0)
        / 1.45;
    let hi = centres.iter().copied().fold(0.0f64, f64::max).max(1000.0) * 1.45;
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
