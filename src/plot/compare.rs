//! Plots of averages and comparisons, in the house style of the parent
//! module.

use std::path::Path;

use plotters::prelude::*;

use super::{
    BLUE, ORANGE, band_chart, canvas, db_range, draw_log_panel, legend, order_colour, plot_error,
};
use crate::analysis::compare::Verdict;
use crate::analysis::room::BandResult;
use crate::error::Result;
use crate::folder::schema::BandRow;
use crate::model::{Fraction, Parameter};

/// The colour of input `k` of a comparison: the house blue and orange,
/// then the distortion orders' colours.
pub fn input_colour(k: usize) -> RGBColor {
    match k {
        0 => BLUE,
        1 => ORANGE,
        _ => order_colour(k as u32 + 1),
    }
}

fn smoothing_words(s: &str) -> String {
    if s == "none" {
        "no smoothing".into()
    } else if let Some((outer, inner)) = s.split_once(" of ") {
        format!("{outer}-octave smoothing of the {inner}-octave curves")
    } else {
        format!("{s}-octave smoothing")
    }
}

/// The responses of a comparison over each other.
pub fn overlay_png(
    path: &Path,
    title: &str,
    frequency_hz: &[f64],
    curves: &[(String, Vec<f64>)],
    smoothing: &str,
    target: Option<&super::TargetOverlay>,
) -> Result<()> {
    let (root, body) = canvas(path, &format!("Frequency responses — {title}"))?;
    let f1 = frequency_hz.first().copied().unwrap_or(20.0);
    let f2 = frequency_hz.last().copied().unwrap_or(20_000.0);
    let all: Vec<f64> = curves.iter().flat_map(|c| c.1.iter().copied()).collect();
    let (lo, hi) = db_range(&all, 10.0, 40.0);
    let series: Vec<_> = curves
        .iter()
        .enumerate()
        .map(|(k, (label, v))| {
            (
                frequency_hz,
                v.as_slice(),
                input_colour(k),
                if k == 0 {
                    format!("{label} (reference)")
                } else {
                    label.clone()
                },
            )
        })
        .collect();
    draw_log_panel(
        &body,
        (f1, f2),
        (lo, hi),
        &format!("Magnitude (dB), {}", smoothing_words(smoothing)),
        true,
        None,
        &series,
        target,
    )
    .map_err(plot_error(path))?;
    root.present().map_err(plot_error(path))?;
    Ok(())
}

/// Each response minus the reference's.
pub fn difference_png(
    path: &Path,
    title: &str,
    frequency_hz: &[f64],
    diffs: &[(String, Vec<f64>)],
    reference: &str,
) -> Result<()> {
    let (root, body) = canvas(path, &format!("Change of the response — {title}"))?;
    let f1 = frequency_hz.first().copied().unwrap_or(20.0);
    let f2 = frequency_hz.last().copied().unwrap_or(20_000.0);
    let all: Vec<f64> = diffs.iter().flat_map(|c| c.1.iter().copied()).collect();
    let peak = all
        .iter()
        .filter(|v| v.is_finite())
        .fold(0.0f64, |m, v| m.max(v.abs()));
    // symmetric about 0 dB, at least ±6 dB, in steps of 3 dB
    let span = ((peak * 1.15 / 3.0).ceil() * 3.0).max(6.0);
    let zero = vec![0.0; frequency_hz.len()];
    let mut series = vec![(
        frequency_hz,
        zero.as_slice(),
        RGBColor(140, 140, 140),
        format!("{reference} (reference, 0 dB)"),
    )];
    for (k, (label, v)) in diffs.iter().enumerate() {
        series.push((
            frequency_hz,
            v.as_slice(),
            input_colour(k + 1),
            format!("{label} minus {reference}"),
        ));
    }
    draw_log_panel(
        &body,
        (f1, f2),
        (-span, span),
        "Difference (dB)",
        true,
        None,
        &series,
        None,
    )
    .map_err(plot_error(path))?;
    root.present().map_err(plot_error(path))?;
    Ok(())
}

/// A log axis over octave band centres.
fn band_axis(centres: &[f64]) -> (f64, f64) {
    let lo = centres
        .iter()
        .copied()
        .fold(f64::INFINITY, f64::min)
        .min(63.0)
        / 1.3;
    let hi = centres.iter().copied().fold(0.0f64, f64::max).max(1000.0) * 1.3;
    (lo, hi)
}

/// T30 (T20 where T30 is missing) per octave band for each input; bands
/// whose stored verdict is an audible change (beyond both the
/// just-noticeable difference and the measurement uncertainty) get a ring.
pub fn reverberation_png(
    path: &Path,
    title: &str,
    labels: &[String],
    rows: &[BandRow],
) -> Result<()> {
    let (root, body) = canvas(path, &format!("Reverberation time per octave — {title}"))?;
    let octave = |p: Parameter| -> Vec<&BandRow> {
        rows.iter()
            .filter(|r| r.fraction == Fraction::Octave && r.parameter == p)
            .collect()
    };
    let t30 = octave(Parameter::T30);
    let t20 = octave(Parameter::T20);
    // per band: T30 if every input has it, else T20
    let mut per_band: Vec<(&BandRow, &'static str)> = Vec::new();
    for (i, r) in t30.iter().enumerate() {
        if r.values.iter().all(Option::is_some) {
            per_band.push((r, "T30"));
        } else if let Some(r20) = t20.get(i) {
            per_band.push((r20, "T20"));
        }
    }
    let centres: Vec<f64> = per_band.iter().map(|r| r.0.center_hz).collect();
    let (f_lo, f_hi) = band_axis(&centres);
    let y_max = per_band
        .iter()
        .flat_map(|r| r.0.values.iter().flatten())
        .fold(0.1f64, |m, v| m.max(*v))
        * 1.3;
    let y_max = (y_max * 10.0).ceil() / 10.0;
    let draw = || -> std::result::Result<(), Box<dyn std::error::Error>> {
        let mut chart = band_chart(
            &body,
            (f_lo, f_hi),
            y_max,
            "Octave band centre frequency (Hz)",
            "Decay time (s): T30, or T20 where T30 is missing",
        )?;
        for (k, label) in labels.iter().enumerate() {
            let colour = input_colour(k);
            let pts: Vec<(f64, f64)> = per_band
                .iter()
                .filter_map(|(r, _)| r.values[k].map(|v| (r.center_hz, v)))
                .collect();
            chart
                .draw_series(LineSeries::new(pts.iter().copied(), colour.stroke_width(2)))?
                .label(if k == 0 {
                    format!("{label} (reference)")
                } else {
                    label.clone()
                })
                .legend(move |(x, y)| {
                    PathElement::new(vec![(x, y), (x + 24, y)], colour.stroke_width(3))
                });
            chart.draw_series(pts.iter().map(|&p| Circle::new(p, 5, colour.filled())))?;
            if k > 0 {
                let rings: Vec<(f64, f64)> = per_band
                    .iter()
                    .filter(|(r, _)| {
                        r.changes
                            .verdict
                            .get(k)
                            .copied()
                            .flatten()
                            .is_some_and(Verdict::is_audible)
                    })
                    .filter_map(|(r, _)| r.values[k].map(|v| (r.center_hz, v)))
                    .collect();
                let s = chart.draw_series(
                    rings
                        .iter()
                        .map(|&p| Circle::new(p, 10, colour.stroke_width(2))),
                )?;
                if k == 1 && !rings.is_empty() {
                    s.label("ring: audible (beyond the 5 % JND and the uncertainty)")
                        .legend(move |(x, y)| Circle::new((x + 12, y), 7, colour.stroke_width(2)));
                }
            }
        }
        legend(&mut chart, SeriesLabelPosition::UpperRight)?;
        Ok(())
    };
    draw().map_err(plot_error(path))?;
    root.present().map_err(plot_error(path))?;
    Ok(())
}

/// The average of several positions over the positions themselves.
pub fn average_response_png(
    path: &Path,
    title: &str,
    frequency_hz: &[f64],
    positions: &[(String, Vec<f64>)],
    average: &[f64],
    smoothing: &str,
) -> Result<()> {
    let (root, body) = canvas(path, &format!("Frequency response — {title}"))?;
    let f1 = frequency_hz.first().copied().unwrap_or(20.0);
    let f2 = frequency_hz.last().copied().unwrap_or(20_000.0);
    let all: Vec<f64> = positions
        .iter()
        .flat_map(|c| c.1.iter().copied())
        .chain(average.iter().copied())
        .collect();
    let (lo, hi) = db_range(&all, 10.0, 40.0);
    let faint = RGBColor(160, 175, 190);
    let mut series: Vec<_> = positions
        .iter()
        .enumerate()
        .map(|(k, (label, v))| {
            (
                frequency_hz,
                v.as_slice(),
                faint,
                if k == 0 {
                    format!("positions ({label} …)")
                } else {
                    String::new()
                },
            )
        })
        .collect();
    series.push((
        frequency_hz,
        average,
        BLUE,
        format!("power average of {} positions", positions.len()),
    ));
    draw_log_panel(
        &body,
        (f1, f2),
        (lo, hi),
        &format!("Magnitude (dB), {}", smoothing_words(smoothing)),
        true,
        None,
        &series,
        None,
    )
    .map_err(plot_error(path))?;
    root.present().map_err(plot_error(path))?;
    Ok(())
}

/// Mean T30 per band over positions with ± one standard deviation.
pub fn average_reverberation_png(path: &Path, title: &str, bands: &[BandResult]) -> Result<()> {
    let (root, body) = canvas(path, &format!("Reverberation time per band — {title}"))?;
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
    let draw = || -> std::result::Result<(), Box<dyn std::error::Error>> {
        let mut chart = band_chart(
            &body,
            (f_lo, f_hi),
            y_max,
            "Band centre frequency (Hz)",
            "T30 (s), mean over positions",
        )?;
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
            .label("octaves, with ± one standard deviation over positions")
            .legend(|(x, y)| PathElement::new(vec![(x, y), (x + 24, y)], BLUE.stroke_width(3)));
        chart.draw_series(
            oct.iter()
                .map(|p| Circle::new((p.0, p.1), 5, BLUE.filled())),
        )?;
        chart.draw_series(oct.iter().map(|p| {
            PathElement::new(
                vec![(p.0, p.1 - p.2), (p.0, p.1 + p.2)],
                BLUE.stroke_width(2),
            )
        }))?;
        legend(&mut chart, SeriesLabelPosition::UpperRight)?;
        Ok(())
    };
    draw().map_err(plot_error(path))?;
    root.present().map_err(plot_error(path))?;
    Ok(())
}
