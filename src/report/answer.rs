//! The report's first page: the answer. For a comparison, the question,
//! the verdict in words for the quantities a client asks about (Tmid, the
//! bass ratio, C80 or D50 as the profile suits, the change of absorption,
//! T30 against a target range), the headline counts
//! per quantity and band, and the reverberation time per octave before and
//! after as an inline SVG figure. The verdicts are the ones comparison.json
//! stores; this module only reads and words them.

use std::fmt::Write;

use super::html::{esc, hz, num, signed};
use crate::analysis::compare::Verdict;
use crate::analysis::rt_target::{Fit, Judgement, RtTarget};
use crate::folder::schema::{BandRow, Comparison, InputRecord};
use crate::model::{Fraction, Parameter};

/// The octave rows of `p`, in the order stored (low to high).
pub fn octave_rows(c: &Comparison, p: Parameter) -> Vec<&BandRow> {
    c.bands
        .iter()
        .filter(|b| b.fraction == Fraction::Octave && b.parameter == p)
        .collect()
}

/// The octave row of `p` at nominal `center_hz`.
fn row_at(c: &Comparison, p: Parameter, center_hz: f64) -> Option<&BandRow> {
    octave_rows(c, p)
        .into_iter()
        .find(|b| (b.center_hz - center_hz).abs() < 1e-6 * center_hz)
}

fn value(b: &BandRow, i: usize) -> Option<f64> {
    b.values.get(i).copied().flatten()
}

fn uncertainty(b: &BandRow, i: usize) -> Option<f64> {
    b.uncertainty.get(i).copied().flatten()
}

/// The mean of the octave values of `p` at `centers` for input `i`, with
/// its standard uncertainty (the values' uncertainties taken as
/// independent: √Σu² / n; `None` where one is unknown). Tmid is this mean
/// of T30 at 500 Hz and 1 kHz (ISO 3382-1 Annex A's single numbers
/// average the 500 Hz and 1 kHz octaves).
pub fn band_mean(
    c: &Comparison,
    p: Parameter,
    centers: &[f64],
    i: usize,
) -> Option<(f64, Option<f64>)> {
    let rows: Vec<&BandRow> = centers
        .iter()
        .map(|&f| row_at(c, p, f))
        .collect::<Option<_>>()?;
    let values: Vec<f64> = rows.iter().map(|b| value(b, i)).collect::<Option<_>>()?;
    let n = values.len() as f64;
    let u = rows
        .iter()
        .map(|b| uncertainty(b, i).map(|u| u * u))
        .sum::<Option<f64>>()
        .map(|s| s.sqrt() / n);
    Some((values.iter().sum::<f64>() / n, u))
}

/// The bass ratio of input `i`: (T30 at 125 Hz + 250 Hz) / (T30 at
/// 500 Hz + 1 kHz) (ISO 3382-1 names no such number; this is the common
/// definition of the concert-hall literature).
pub fn bass_ratio(c: &Comparison, i: usize) -> Option<f64> {
    let (low, _) = band_mean(c, Parameter::T30, &[125.0, 250.0], i)?;
    let (mid, _) = band_mean(c, Parameter::T30, &[500.0, 1000.0], i)?;
    (mid > 0.0).then(|| low / mid)
}

/// The stored verdicts of `p` at `centers` for input `i`, in words: one
/// phrase when they agree, else each band's.
fn verdicts_in_words(c: &Comparison, p: Parameter, centers: &[f64], i: usize) -> String {
    let v: Vec<(f64, Option<Verdict>)> = centers
        .iter()
        .map(|&f| {
            (
                f,
                row_at(c, p, f).and_then(|b| b.changes.verdict.get(i).copied().flatten()),
            )
        })
        .collect();
    let words = |x: Option<Verdict>| x.map_or("not judged", Verdict::words);
    if v.iter().all(|(_, x)| *x == v[0].1) {
        format!("in both bands: {}", words(v[0].1))
    } else {
        v.iter()
            .map(|(f, x)| format!("{}: {}", hz(*f), words(*x)))
            .collect::<Vec<_>>()
            .join("; ")
    }
}

/// How a set of changes went: all down, all up, or both.
fn direction(changes: &[f64], down: &str, up: &str) -> String {
    if changes.iter().all(|d| *d < 0.0) {
        down.to_string()
    } else if changes.iter().all(|d| *d > 0.0) {
        up.to_string()
    } else {
        format!("{down} or {up}")
    }
}

/// One compared quantity's audible changes over the octave bands.
#[derive(Debug, Clone, PartialEq)]
pub struct Headline {
    /// The quantity.
    pub parameter: Parameter,
    /// Octave bands where it was measured in both.
    pub measured: usize,
    /// Of those, where the change is audible (beyond the just-noticeable
    /// difference and the uncertainty, as stored).
    pub audible: usize,
    /// How the audible changes went: "fell", "rose", "fell or rose";
    /// `None` with no audible change.
    pub way: Option<String>,
    /// The measured bands without an audible change, Hz.
    pub not_at: Vec<f64>,
}

impl Headline {
    /// "all 9 octave bands", "6 of the 9 octave bands".
    pub fn count(&self) -> String {
        if self.audible == self.measured {
            format!("all {} octave bands", self.measured)
        } else {
            format!("{} of the {} octave bands", self.audible, self.measured)
        }
    }
}

/// The headline counts of input `i` against the reference: per compared
/// quantity, in how many octave bands its change is audible and which way
/// it went. Never a count of table cells.
pub fn headline_rows(c: &Comparison, i: usize) -> Vec<Headline> {
    let mut out = Vec::new();
    for p in Parameter::COMPARED {
        let rows = octave_rows(c, p);
        let measured: Vec<&&BandRow> = rows
            .iter()
            .filter(|b| b.changes.change.get(i).copied().flatten().is_some())
            .collect();
        if measured.is_empty() {
            continue;
        }
        let is_audible = |b: &BandRow| {
            b.changes
                .verdict
                .get(i)
                .copied()
                .flatten()
                .is_some_and(Verdict::is_audible)
        };
        let changes: Vec<f64> = measured
            .iter()
            .filter(|b| is_audible(b))
            .filter_map(|b| b.changes.change.get(i).copied().flatten())
            .collect();
        out.push(Headline {
            parameter: p,
            measured: measured.len(),
            audible: changes.len(),
            way: (!changes.is_empty()).then(|| direction(&changes, "fell", "rose")),
            not_at: measured
                .iter()
                .filter(|b| !is_audible(b))
                .map(|b| b.center_hz)
                .collect(),
        });
    }
    out
}

/// The compared quantities not measured in both in some octave band, or
/// `None` when every one was.
pub fn not_compared(c: &Comparison, i: usize) -> Option<String> {
    let missing = c
        .bands
        .iter()
        .filter(|b| b.fraction == Fraction::Octave)
        .filter(|b| b.changes.change.get(i).copied().flatten().is_none())
        .map(|b| b.parameter)
        .collect::<std::collections::BTreeSet<_>>();
    (!missing.is_empty()).then(|| {
        format!(
            "Not compared in some octave bands (not measured in both): {}",
            missing
                .iter()
                .map(|p| p.label())
                .collect::<Vec<_>>()
                .join(", ")
        )
    })
}

/// The headline counts of input `i` in sentences ([`headline_rows`]), with
/// the quantities not compared everywhere last.
pub fn headlines(c: &Comparison, i: usize) -> Vec<String> {
    let mut out: Vec<String> = headline_rows(c, i)
        .iter()
        .map(|h| {
            let label = h.parameter.label();
            match &h.way {
                None => format!(
                    "{label}: no audible change in any of the {} octave bands measured in both",
                    h.measured
                ),
                Some(way) => {
                    let mut s = format!(
                        "{label} {way} beyond the just-noticeable difference and the uncertainty in {}",
                        h.count()
                    );
                    if !h.not_at.is_empty() {
                        let rest: Vec<String> = h.not_at.iter().map(|f| hz(*f)).collect();
                        let _ = write!(s, " (not at {})", rest.join(", "));
                    }
                    s
                }
            }
        })
        .collect();
    out.extend(not_compared(c, i));
    out
}

/// T30 of input `i` per octave band judged against the target.
pub fn target_judgements(c: &Comparison, target: &RtTarget, i: usize) -> Vec<Judgement> {
    octave_rows(c, Parameter::T30)
        .into_iter()
        .filter_map(|b| target.judge(b.center_hz, value(b, i)?, uncertainty(b, i)))
        .collect()
}

/// One sentence on how `judged` sits against the target, for `who`
/// ("before treatment: "), or `None` when no band was judged.
pub fn target_sentence(who: &str, target: &RtTarget, judged: &[Judgement]) -> Option<String> {
    if judged.is_empty() {
        return None;
    }
    let n = judged.len();
    let at = |fit: Fit| -> Vec<String> {
        judged
            .iter()
            .filter(|j| j.fit == fit)
            .map(|j| hz(j.center_hz))
            .collect()
    };
    let within = at(Fit::Within).len();
    let mut s = format!(
        "Against the target ({}), {who}T30 is within the target in {}",
        target.describe(),
        if within == n {
            format!("all {n} octave bands with a target")
        } else {
            format!("{within} of the {n} octave bands with a target")
        }
    );
    for (fit, word) in [(Fit::Above, "above"), (Fit::Below, "below")] {
        let bands = at(fit);
        if !bands.is_empty() {
            let _ = write!(s, "; {word} it at {}", bands.join(", "));
        }
    }
    let marginal: Vec<String> = judged
        .iter()
        .filter(|j| j.marginal)
        .map(|j| hz(j.center_hz))
        .collect();
    s.push('.');
    if !marginal.is_empty() {
        let _ = write!(
            s,
            " Within twice the uncertainty of a limit, so on either side of it: {}.",
            marginal.join(", ")
        );
    }
    Some(s)
}

/// "0.58 s" with its uncertainty when known.
fn seconds_pm(v: f64, u: Option<f64>) -> String {
    match u {
        // a small uncertainty keeps a significant digit: ± 0.004 s, not ± 0.00 s
        Some(u) if u < 0.005 => format!("{} ± {} s", num(v, 3), num(u, 3)),
        Some(u) => format!("{} ± {} s", num(v, 2), num(u, 2)),
        None => format!("{} s", num(v, 2)),
    }
}

/// The verdict of input `i` against the reference, in sentences, one per
/// quantity.
pub fn verdict_sentences(c: &Comparison, i: usize) -> Vec<String> {
    let name = |k: usize| c.inputs.get(k).map_or("?", InputRecord::name).to_string();
    let (before, after) = (name(0), name(i));
    let mid = [500.0, 1000.0];
    let mut out = Vec::new();
    match (
        band_mean(c, Parameter::T30, &mid, 0),
        band_mean(c, Parameter::T30, &mid, i),
    ) {
        (Some((t0, u0)), Some((t1, u1))) => out.push(format!(
            "Mid-frequency reverberation time Tmid (T30 averaged over the 500 Hz and 1 kHz octaves) {} from {} ({before}) to {} ({after}), {} %; the change {}.",
            if t1 < t0 { "fell" } else { "rose" },
            seconds_pm(t0, u0),
            seconds_pm(t1, u1),
            signed(100.0 * (t1 / t0 - 1.0), 0),
            verdicts_in_words(c, Parameter::T30, &mid, i)
        )),
        _ => out.push(
            "Tmid could not be given: T30 is missing at 500 Hz or 1 kHz in one of the measurements."
                .to_string(),
        ),
    }
    if let (Some(b0), Some(b1)) = (bass_ratio(c, 0), bass_ratio(c, i)) {
        out.push(format!(
            "Bass ratio (T30 at 125 and 250 Hz over T30 at 500 Hz and 1 kHz) went from {} to {}: {}.",
            num(b0, 2),
            num(b1, 2),
            if b1 > b0 + 0.005 {
                "the low bands now ring longer relative to the mid bands"
            } else if b1 < b0 - 0.005 {
                "the low bands now ring shorter relative to the mid bands"
            } else {
                "the balance of low and mid reverberation is unchanged"
            }
        ));
    }
    out.extend(sti_sentence(c, i));
    for &p in c.profile.unwrap_or_default().clarity_parameters() {
        let (unit, dec) = if p == Parameter::C80 {
            (" dB", 1)
        } else {
            ("", 2)
        };
        if let (Some((v0, _)), Some((v1, _))) = (band_mean(c, p, &mid, 0), band_mean(c, p, &mid, i))
        {
            let scale = p.info().display_scale;
            out.push(format!(
                "{} at mid frequencies (500 Hz and 1 kHz) went from {}{unit} to {}{unit} ({}{unit}); the change {}. {}",
                p.label(),
                num(v0 * scale, dec),
                num(v1 * scale, dec),
                signed((v1 - v0) * scale, dec),
                verdicts_in_words(c, p, &mid, i),
                if p == Parameter::C80 {
                    "C80 is the clarity of music."
                } else {
                    "D50 is the definition of speech."
                }
            ));
        }
    }
    let octave_area: Vec<(f64, f64)> = c
        .absorption
        .iter()
        .filter(|a| a.fraction == Fraction::Octave)
        .filter_map(|a| Some((a.center_hz, a.delta_area_m2.get(i).copied().flatten()?)))
        .collect();
    if let (Some(lo), Some(hi)) = (
        octave_area
            .iter()
            .min_by(|a, b| a.1.total_cmp(&b.1))
            .copied(),
        octave_area
            .iter()
            .max_by(|a, b| a.1.total_cmp(&b.1))
            .copied(),
    ) {
        let mid_area: Vec<f64> = octave_area
            .iter()
            .filter(|(f, _)| mid.iter().any(|m| (m - f).abs() < 1e-6))
            .map(|(_, a)| *a)
            .collect();
        let mut s = String::from("Equivalent absorption area (Sabine");
        if let Some(v) = c.volume_m3 {
            let _ = write!(s, ", room volume {} m³", num(v, 1));
        }
        s.push_str(") changed by ");
        if mid_area.len() == 2 {
            let _ = write!(
                s,
                "{} m² at mid frequencies (mean of 500 Hz and 1 kHz), ",
                signed((mid_area[0] + mid_area[1]) / 2.0, 1)
            );
        }
        let _ = write!(
            s,
            "from {} m² at {} to {} m² at {}.",
            signed(lo.1, 1),
            hz(lo.0),
            signed(hi.1, 1),
            hz(hi.0)
        );
        out.push(s);
    }
    out
}

/// The STI of input `i` against the reference in one sentence, with the
/// judgement stored in the comparison, or `None` when either has none.
pub fn sti_sentence(c: &Comparison, i: usize) -> Option<String> {
    let sp = c.speech.as_ref()?;
    let name = |k: usize| c.inputs.get(k).map_or("?", InputRecord::name).to_string();
    let value = |k: usize| -> Option<String> {
        let v = sp.values.get(k).copied().flatten()?;
        let band = sp
            .qualification
            .get(k)
            .cloned()
            .flatten()
            .unwrap_or_default();
        let who = name(k);
        Some(match sp.uncertainty.get(k).copied().flatten() {
            // one significant figure of a small uncertainty
            Some(u) => format!(
                "{} ± {} ({band}, {who})",
                num(v, 2),
                num(u, if u < 0.01 { 3 } else { 2 })
            ),
            None => format!("{} ({band}, {who})", num(v, 2)),
        })
    };
    let (v0, v1) = (value(0)?, value(i)?);
    let d = sp.changes.change.get(i).copied().flatten()?;
    let verdict = sp
        .changes
        .verdict
        .get(i)
        .copied()
        .flatten()
        .map_or("not judged", Verdict::words);
    Some(format!(
        "Speech transmission index (STI) went from {v0} to {v1}, {}: {verdict} (just-noticeable difference {}).",
        signed(d, 2),
        num(sp.jnd, 2)
    ))
}

/// The reverberation time (T30) per octave of every input as an inline
/// SVG: points joined by lines, error bars of ± twice each value's stored
/// standard uncertainty, the audible changes ringed. Text is sized for
/// 9 pt when printed 170 mm wide.
pub fn reverberation_svg(c: &Comparison, target: Option<&RtTarget>) -> Option<String> {
    let rows = octave_rows(c, Parameter::T30);
    if rows.is_empty() || c.inputs.is_empty() {
        return None;
    }
    let (w, h) = (680.0, 300.0);
    let (left, right, top, bottom) = (62.0, 150.0, 16.0, 46.0);
    let pw = w - left - right;
    let ph = h - top - bottom;
    let mut top_value: f64 = 0.0;
    for b in &rows {
        for i in 0..c.inputs.len() {
            if let Some(v) = value(b, i) {
                top_value = top_value.max(v + 2.0 * uncertainty(b, i).unwrap_or(0.0));
            }
        }
    }
    if top_value <= 0.0 {
        return None;
    }
    let limits: Vec<Option<(f64, f64)>> = rows
        .iter()
        .map(|b| target.and_then(|t| t.limits_at(b.center_hz)))
        .collect();
    for (_, hi) in limits.iter().flatten() {
        top_value = top_value.max(*hi);
    }
    let step = nice_step(top_value / 5.0);
    let y_max = (top_value / step).ceil() * step;
    let n = rows.len();
    let x_of = |k: usize| left + pw * (k as f64 + 0.5) / n as f64;
    let y_of = |v: f64| top + ph * (1.0 - v / y_max);
    let mut s = String::new();
    let _ = write!(
        s,
        "<svg class=\"rt\" viewBox=\"0 0 {w} {h}\" role=\"img\" aria-label=\"Reverberation time T30 per octave band\" font-family=\"DejaVu Sans, sans-serif\" font-size=\"13\">"
    );
    // grid and y axis
    let mut v = 0.0;
    while v <= y_max + 1e-9 {
        let y = y_of(v);
        let _ = write!(
            s,
            "<line x1=\"{left}\" x2=\"{:.1}\" y1=\"{y:.1}\" y2=\"{y:.1}\" stroke=\"#dddddd\"/><text x=\"{:.1}\" y=\"{:.1}\" text-anchor=\"end\">{}</text>",
            left + pw,
            left - 6.0,
            y + 4.5,
            trim_step(v, step)
        );
        v += step;
    }
    let _ = write!(
        s,
        "<text transform=\"translate(16 {:.1}) rotate(-90)\" text-anchor=\"middle\">T30 (s)</text>",
        top + ph / 2.0
    );
    for (k, b) in rows.iter().enumerate() {
        let _ = write!(
            s,
            "<text x=\"{:.1}\" y=\"{:.1}\" text-anchor=\"middle\">{}</text>",
            x_of(k),
            top + ph + 18.0,
            esc(&short_hz(b.center_hz))
        );
    }
    let _ = write!(
        s,
        "<text x=\"{:.1}\" y=\"{:.1}\" text-anchor=\"middle\">octave band (Hz)</text><rect x=\"{left}\" y=\"{top}\" width=\"{pw}\" height=\"{ph}\" fill=\"none\" stroke=\"#888888\"/>",
        left + pw / 2.0,
        h - 6.0
    );
    // the target range: a green band over the octave columns, one
    // rectangle per run of columns with the same limits, under the data
    let band_w = pw / n as f64;
    let mut k = 0;
    while k < n {
        let Some((lo, hi)) = limits[k] else {
            k += 1;
            continue;
        };
        let run = limits[k..]
            .iter()
            .take_while(|l| **l == Some((lo, hi)))
            .count();
        {
            let (lo, hi) = (&lo, &hi);
            let band_w = band_w * run as f64;
            let _ = write!(
                s,
                "<rect class=\"target\" x=\"{:.1}\" y=\"{:.1}\" width=\"{band_w:.1}\" height=\"{:.1}\" fill=\"#2e8b57\" fill-opacity=\"0.14\" stroke=\"#2e8b57\" stroke-opacity=\"0.5\" stroke-dasharray=\"4 3\"/>",
                left + pw / n as f64 * k as f64,
                y_of(*hi),
                (y_of(*lo) - y_of(*hi)).max(0.5)
            );
        }
        k += run;
    }
    let colours = ["#16568c", "#c46218", "#2e8b57", "#784fa0", "#b22234"];
    let ni = c.inputs.len();
    for i in 0..ni {
        let colour = colours[i % colours.len()];
        let dx = (i as f64 - (ni as f64 - 1.0) / 2.0) * 7.0;
        let mut path = String::new();
        for (k, b) in rows.iter().enumerate() {
            let Some(v) = value(b, i) else {
                path.push(' ');
                continue;
            };
            let (x, y) = (x_of(k) + dx, y_of(v));
            let _ = write!(
                path,
                "{}{x:.1},{y:.1}",
                if path.ends_with(|ch: char| ch.is_ascii_digit()) {
                    " L"
                } else {
                    " M"
                }
            );
            if let Some(u) = uncertainty(b, i) {
                let (y0, y1) = (y_of((v - 2.0 * u).max(0.0)), y_of(v + 2.0 * u));
                let _ = write!(
                    s,
                    "<path d=\"M{x:.1},{y0:.1}V{y1:.1}M{:.1},{y0:.1}h8M{:.1},{y1:.1}h8\" stroke=\"{colour}\" stroke-width=\"1.4\"/>",
                    x - 4.0,
                    x - 4.0
                );
            }
            if i == 0 {
                let _ = write!(
                    s,
                    "<circle cx=\"{x:.1}\" cy=\"{y:.1}\" r=\"4.5\" fill=\"{colour}\"/>"
                );
            } else {
                let _ = write!(
                    s,
                    "<rect x=\"{:.1}\" y=\"{:.1}\" width=\"9\" height=\"9\" fill=\"{colour}\"/>",
                    x - 4.5,
                    y - 4.5
                );
                if b.changes
                    .verdict
                    .get(i)
                    .copied()
                    .flatten()
                    .is_some_and(Verdict::is_audible)
                {
                    let _ = write!(
                        s,
                        "<circle cx=\"{x:.1}\" cy=\"{y:.1}\" r=\"9\" fill=\"none\" stroke=\"#222222\" stroke-width=\"1.2\"/>"
                    );
                }
            }
        }
        let _ = write!(
            s,
            "<path d=\"{}\" fill=\"none\" stroke=\"{colour}\" stroke-width=\"2\"/>",
            path.trim()
        );
        // legend
        let ly = top + 14.0 + 20.0 * i as f64;
        let lx = left + pw + 14.0;
        let _ = write!(
            s,
            "<line x1=\"{lx}\" x2=\"{:.1}\" y1=\"{ly:.1}\" y2=\"{ly:.1}\" stroke=\"{colour}\" stroke-width=\"2\"/><text x=\"{:.1}\" y=\"{:.1}\">{}</text>",
            lx + 18.0,
            lx + 24.0,
            ly + 4.5,
            esc(&clip(c.inputs[i].name(), 16))
        );
    }
    let mut extra = 0.0;
    if ni > 1 {
        let ly = top + 14.0 + 20.0 * ni as f64;
        let lx = left + pw + 14.0;
        let _ = write!(
            s,
            "<circle cx=\"{:.1}\" cy=\"{ly:.1}\" r=\"7\" fill=\"none\" stroke=\"#222222\" stroke-width=\"1.2\"/><text x=\"{:.1}\" y=\"{:.1}\">audible</text>",
            lx + 9.0,
            lx + 24.0,
            ly + 4.5
        );
        extra = 20.0;
    }
    if limits.iter().any(Option::is_some) {
        let ly = top + 14.0 + 20.0 * ni as f64 + extra;
        let lx = left + pw + 14.0;
        let _ = write!(
            s,
            "<rect x=\"{lx:.1}\" y=\"{:.1}\" width=\"18\" height=\"12\" fill=\"#2e8b57\" fill-opacity=\"0.14\" stroke=\"#2e8b57\" stroke-opacity=\"0.5\" stroke-dasharray=\"4 3\"/><text x=\"{:.1}\" y=\"{:.1}\">target</text>",
            ly - 6.0,
            lx + 24.0,
            ly + 4.5
        );
    }
    s.push_str("</svg>");
    Some(s)
}

/// A band centre in the figure's axis: "63", "1k".
fn short_hz(f: f64) -> String {
    if f >= 1000.0 {
        format!("{}k", super::html::trim(f / 1000.0, 2))
    } else {
        super::html::trim(f, 1)
    }
}

/// `s` cut to `n` characters with an ellipsis.
fn clip(s: &str, n: usize) -> String {
    if s.chars().count() <= n {
        s.to_string()
    } else {
        format!("{}…", s.chars().take(n - 1).collect::<String>())
    }
}

/// A step of 1, 2 or 5 times a power of ten at least `raw`.
fn nice_step(raw: f64) -> f64 {
    let p = 10f64.powf(raw.log10().floor());
    [1.0, 2.0, 5.0, 10.0]
        .iter()
        .map(|m| m * p)
        .find(|s| *s >= raw)
        .unwrap_or(10.0 * p)
}

/// A tick value with the decimals its step needs.
fn trim_step(v: f64, step: f64) -> String {
    let dec = (-step.log10().floor()).max(0.0) as usize;
    num(v, dec)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::analysis::compare::judge;
    use crate::folder::schema::{CompareResponse, FolderKind};

    fn input(label: &str) -> InputRecord {
        InputRecord {
            folder: format!("/m/{label}"),
            label: label.into(),
            sha256: String::new(),
            results_sha256: String::new(),
        }
    }

    fn row(f: f64, p: Parameter, before: f64, after: f64, u: f64) -> BandRow {
        let values = vec![Some(before), Some(after)];
        let uncertainty = vec![Some(u), Some(u)];
        BandRow {
            center_hz: f,
            fraction: Fraction::Octave,
            parameter: p,
            changes: judge(p, &values, &uncertainty),
            values,
            uncertainty,
        }
    }

    fn comparison(bands: Vec<BandRow>) -> Comparison {
        Comparison {
            schema_version: 1,
            kind: FolderKind::Comparison,
            inputs: vec![input("before"), input("after")],
            common_band_hz: [20.0, 20000.0],
            response: CompareResponse::default(),
            bands,
            absorption: Vec::new(),
            volume_m3: None,
            temperature_c: None,
            speed_of_sound_m_s: None,
            target: None,
            criteria: Vec::new(),
            profile: None,
            speech: None,
            warnings: Default::default(),
        }
    }

    #[test]
    fn the_sti_sentence_says_the_stored_judgement() {
        use crate::analysis::compare::{STI_JND, judge_sti};
        use crate::folder::schema::CompareSti;
        let mut c = comparison(Vec::new());
        assert_eq!(sti_sentence(&c, 1), None);
        // averages of positions: 0.55 ± 0.01 → 0.63 ± 0.01 is 0.08, beyond
        // the JND (0.03) and twice the combined uncertainty (0.028)
        let values = vec![Some(0.55), Some(0.63)];
        let uncertainty = vec![Some(0.01), Some(0.01)];
        c.speech = Some(CompareSti {
            qualification: vec![Some("F".into()), Some("D".into())],
            changes: judge_sti(&values, &uncertainty),
            values,
            uncertainty,
            jnd: STI_JND,
        });
        let s = sti_sentence(&c, 1).unwrap();
        assert!(
            s.contains(
                "from 0.55 ± 0.01 (F, before) to 0.63 ± 0.01 (D, after), +0.08: audible change"
            ),
            "{s}"
        );
        assert!(s.contains("audible change"), "{s}");
        // one measurement each: no uncertainty, so not called audible
        let values = vec![Some(0.55), Some(0.57)];
        let c2 = judge_sti(&values, &[None, None]);
        assert_eq!(c2.verdict[1], Some(Verdict::BelowJnd));
        let c3 = judge_sti(&[Some(0.55), Some(0.60)], &[None, None]);
        assert_eq!(c3.verdict[1], Some(Verdict::BeyondJndUncertaintyUnknown));
    }

    #[test]
    fn tmid_and_bass_ratio_are_the_band_means_by_hand() {
        let c = comparison(vec![
            row(125.0, Parameter::T30, 0.9, 0.8, 0.01),
            row(250.0, Parameter::T30, 0.7, 0.5, 0.01),
            row(500.0, Parameter::T30, 0.6, 0.3, 0.03),
            row(1000.0, Parameter::T30, 0.4, 0.3, 0.04),
        ]);
        // Tmid = (0.6 + 0.4) / 2; u = √(0.03² + 0.04²) / 2 = 0.025
        let (t, u) = band_mean(&c, Parameter::T30, &[500.0, 1000.0], 0).unwrap();
        assert!((t - 0.5).abs() < 1e-12 && (u.unwrap() - 0.025).abs() < 1e-12);
        // BR = (0.9 + 0.7) / (0.6 + 0.4) = 1.6; after (0.8 + 0.5) / 0.6
        assert!((bass_ratio(&c, 0).unwrap() - 1.6).abs() < 1e-12);
        assert!((bass_ratio(&c, 1).unwrap() - 1.3 / 0.6).abs() < 1e-12);
        let s = verdict_sentences(&c, 1);
        assert!(s[0].contains("fell from 0.50 ± 0.03 s"), "{}", s[0]);
        assert!(s[1].contains("from 1.60 to 2.17"), "{}", s[1]);
    }

    #[test]
    fn headlines_count_bands_of_a_quantity_not_cells() {
        // three bands: two fall by far more than the 5 % JND and 2u, one
        // barely moves
        let c = comparison(vec![
            row(250.0, Parameter::T30, 0.8, 0.5, 0.01),
            row(500.0, Parameter::T30, 0.6, 0.3, 0.01),
            row(1000.0, Parameter::T30, 0.5, 0.505, 0.01),
            row(500.0, Parameter::C80, 1.0, 1.2, 0.1),
        ]);
        let h = headlines(&c, 1);
        assert_eq!(
            h[0],
            "T30 fell beyond the just-noticeable difference and the uncertainty in 2 of the 3 octave bands (not at 1 kHz)"
        );
        assert_eq!(
            h[1],
            "C80: no audible change in any of the 1 octave bands measured in both"
        );
    }

    #[test]
    fn the_figure_has_a_point_per_band_and_input_and_rings_audible_changes() {
        let c = comparison(vec![
            row(500.0, Parameter::T30, 0.6, 0.3, 0.01),
            row(1000.0, Parameter::T30, 0.5, 0.49, 0.01),
        ]);
        let svg = reverberation_svg(&c, None).unwrap();
        assert_eq!(svg.matches("<circle").count(), 2 + 1 + 1, "{svg}");
        assert_eq!(svg.matches("width=\"9\"").count(), 2);
        assert!(svg.contains(">1k</text>") && svg.contains(">500</text>"));
    }

    #[test]
    fn the_figure_shades_the_target_range_and_the_words_judge_each_band() {
        let c = comparison(vec![
            row(250.0, Parameter::T30, 0.8, 0.55, 0.01),
            row(500.0, Parameter::T30, 0.6, 0.45, 0.01),
            row(1000.0, Parameter::T30, 0.5, 0.285, 0.01),
        ]);
        let flat = RtTarget::parse_range("0.3,0.5").unwrap();
        let svg = reverberation_svg(&c, Some(&flat)).unwrap();
        // one rectangle over every column: the limits are the same
        assert_eq!(svg.matches("class=\"target\"").count(), 1, "{svg}");
        assert!(svg.contains(">target</text>"));
        let judged = target_judgements(&c, &flat, 1);
        let s = target_sentence("after: ", &flat, &judged).unwrap();
        assert_eq!(
            s,
            "Against the target (0.30–0.50 s in every band), after: T30 is within the target in 1 of the 3 octave bands with a target; above it at 250 Hz; below it at 1 kHz. Within twice the uncertainty of a limit, so on either side of it: 1 kHz."
        );
        // per band: only the listed bands are shaded and judged
        let bands = RtTarget::parse_file("500 0.4 0.6\n1000 0.3 0.5\n").unwrap();
        let svg = reverberation_svg(&c, Some(&bands)).unwrap();
        assert_eq!(svg.matches("class=\"target\"").count(), 2, "{svg}");
        assert_eq!(target_judgements(&c, &bands, 0).len(), 2);
    }
}
