//! An alignment folder's part of the report: the loudspeakers relative to
//! the first, the suggested settings for the crossover, the plots and how
//! it was made. Every value is read from align.json, never recomputed.

use std::fmt::Write;

use super::html::{esc, num};
use super::{Counters, Folder, figure, unknown_caption, warnings};
use crate::analysis::align::{Alignment, BandChoice, Polarity};
use crate::folder::schema::AlignManifest;
use crate::model::plot_kind::{CaptionFacts, PlotKind};

/// Milliseconds with a sign and two decimals, or — for none.
fn ms(v: Option<f64>) -> String {
    v.map_or_else(|| "—".to_string(), |s| format!("{:+.2}", s * 1e3))
}

/// `v` rounded to a tenth with a rounded −0.0 written as 0.0.
fn no_minus_zero(v: f64) -> f64 {
    let r = (v * 10.0).round() / 10.0;
    if r == 0.0 { 0.0 } else { r }
}

/// The alignment in one sentence: what to set, and what it gains.
pub fn answer_line(a: &Alignment) -> String {
    if let (None, Some(why)) = (&a.crossover, &a.crossover_withheld) {
        return format!("No settings are suggested: {why}.");
    }
    let Some(x) = &a.crossover else {
        return format!(
            "{} loudspeakers related to {} over {}–{} Hz; no crossover was given, so no settings are suggested (gliss align --crossover LO,HI).",
            a.loudspeakers.len(),
            a.loudspeakers
                .first()
                .map_or("the first", |l| l.name.as_str()),
            num(a.band_hz[0], 0),
            num(a.band_hz[1], 0)
        );
    };
    let mut parts = Vec::new();
    for (l, s) in a.loudspeakers.iter().zip(&x.suggestions) {
        let mut what = Vec::new();
        if s.set_delay_s > 0.0 {
            what.push(format!("delay {:.2} ms", s.set_delay_s * 1e3));
        }
        if s.polarity == Polarity::Inverted {
            what.push("invert".to_string());
        }
        if !what.is_empty() {
            parts.push(format!("{}: {}", l.name, what.join(", ")));
        }
    }
    let settings = if parts.is_empty() {
        "leave them as they are".to_string()
    } else {
        parts.join("; ")
    };
    format!(
        "Through {}–{} Hz: {settings}. The sum's mean level over the band then changes by {:+.1} dB ({:.1} dB as measured, {:.1} dB with the settings{}).",
        num(x.band_hz[0], 0),
        num(x.band_hz[1], 0),
        x.gain_db,
        no_minus_zero(x.level_as_is_db),
        no_minus_zero(x.level_suggested_db),
        if a.positions > 1 {
            format!(", mean over {} positions", a.positions)
        } else {
            String::new()
        }
    )
}

/// Page 1 of a report that leads with an alignment.
pub(super) fn answer(
    out: &mut String,
    f: &Folder,
    m: &AlignManifest,
    a: &Alignment,
    n: &mut Counters,
) {
    let _ = write!(
        out,
        "<p class=\"lede\"><span class=\"folder\">{}</span>: {}</p><p class=\"verdict\"><strong>Settings:</strong> {}</p>",
        esc(&f.name),
        esc(&m.source.description),
        esc(&answer_line(a))
    );
    table(out, a, n);
    if let Some(p) = f.plots.iter().find(|p| p.file == PlotKind::AlignSum.file()) {
        figure(out, p, &caption(p, a), n);
    }
}

/// The caption of one of its plots.
fn caption(p: &super::Plot, a: &Alignment) -> String {
    let facts = CaptionFacts {
        reference: a
            .loudspeakers
            .first()
            .map_or("the first", |l| l.name.as_str()),
        ..CaptionFacts::default()
    };
    PlotKind::from_file_among(&p.file, &PlotKind::ALIGN)
        .map_or_else(|| unknown_caption(&p.file), |k| k.caption(&facts))
}

/// The loudspeakers table (and the suggestions' columns with a crossover).
fn table(out: &mut String, a: &Alignment, n: &mut Counters) {
    n.table += 1;
    let band = match a.band_from {
        BandChoice::Given => "the band given",
        BandChoice::Crossover => "the crossover band",
        BandChoice::Overlap => "where all of them radiate",
    };
    let _ = write!(
        out,
        "<table class=\"params\"><caption>Table {}. Each loudspeaker against {} over {}–{} Hz ({band}){}</caption><thead><tr><th scope=\"col\">Loudspeaker</th><th scope=\"col\" class=\"num\">Arrival <span class=\"unit\">(ms)</span></th><th scope=\"col\" class=\"num\">Level <span class=\"unit\">(dB)</span></th><th scope=\"col\">Polarity</th>",
        n.table,
        esc(a
            .loudspeakers
            .first()
            .map_or("the first", |l| l.name.as_str())),
        num(a.band_hz[0], 0),
        num(a.band_hz[1], 0),
        if a.positions > 1 {
            format!(", mean over {} positions", a.positions)
        } else {
            String::new()
        }
    );
    if a.crossover.is_some() {
        out.push_str("<th scope=\"col\" class=\"num\">Set delay <span class=\"unit\">(ms)</span></th><th scope=\"col\">Set polarity</th>");
    }
    out.push_str("</tr></thead><tbody>");
    for (i, l) in a.loudspeakers.iter().enumerate() {
        let polarity = match (l.polarity, &l.polarity_withheld) {
            (Some(p), _) => p.words().to_string(),
            (None, Some(_)) => "— (not told: see the warnings)".to_string(),
            (None, None) => "—".to_string(),
        };
        let spread = l.relative_arrival_spread_s.map_or(String::new(), |s| {
            format!(" <span class=\"muted\">(spread {:.2})</span>", s * 1e3)
        });
        let _ = write!(
            out,
            "<tr><th scope=\"row\">{}{}</th><td class=\"num\">{}{spread}</td><td class=\"num\">{}</td><td>{}</td>",
            esc(&l.name),
            if i == 0 {
                " <span class=\"muted\">(reference)</span>"
            } else {
                ""
            },
            ms(l.relative_arrival_s),
            l.relative_level_db
                .map_or("—".to_string(), |v| format!("{v:+.1}")),
            esc(&polarity)
        );
        if let Some(s) = a.crossover.as_ref().and_then(|x| x.suggestions.get(i)) {
            let _ = write!(
                out,
                "<td class=\"num\">{:.2}</td><td>{}</td>",
                s.set_delay_s * 1e3,
                s.polarity.words()
            );
        }
        out.push_str("</tr>");
    }
    out.push_str("</tbody></table>");
}

/// The evidence of an alignment folder.
pub(super) fn section(
    out: &mut String,
    f: &Folder,
    m: &AlignManifest,
    a: &Alignment,
    lead: bool,
    n: &mut Counters,
) {
    let _ = write!(out, "<p class=\"lede\">{}</p>", esc(&m.source.description));
    warnings(out, &a.warnings.0, &[], f);
    if !lead {
        let _ = write!(
            out,
            "<p class=\"verdict\"><strong>Settings:</strong> {}</p>",
            esc(&answer_line(a))
        );
        table(out, a, n);
    }
    out.push_str("<p class=\"muted\">The arrival of each is the peak of the envelope of its impulse response in the band: for a loudspeaker that reproduces only part of it (a subwoofer) that is a group delay in the band, not the moment its sound starts. The suggested delays maximise the mean level of the complex sum over the crossover band at the position(s) measured; elsewhere in the room the best delay differs.</p>");
    let lead_plot = PlotKind::AlignSum.file();
    let plots: Vec<_> = f
        .plots
        .iter()
        .filter(|p| !(lead && p.file == lead_plot))
        .collect();
    if !plots.is_empty() {
        out.push_str("<h3>Plots</h3>");
        for p in plots {
            figure(out, p, &caption(p, a), n);
        }
    }
}

/// An alignment's appendix: the folders with their hashes and how it was
/// made.
pub(super) fn appendix(out: &mut String, f: &Folder, m: &AlignManifest, a: &Alignment) {
    let per = a.loudspeakers.len().max(1);
    out.push_str("<table class=\"files\"><caption>The measurements related</caption><thead><tr><th scope=\"col\">Position</th><th scope=\"col\">Loudspeaker</th><th scope=\"col\">Folder</th><th scope=\"col\">SHA-256 (as recorded)</th></tr></thead><tbody>");
    for (i, input) in m.inputs.iter().enumerate() {
        let _ = write!(
            out,
            "<tr><td>{}</td><td>{}</td><td class=\"file\">{}</td><td class=\"hash\">{}</td></tr>",
            i / per + 1,
            esc(a.loudspeakers.get(i % per).map_or("", |l| l.name.as_str())),
            esc(&input.folder),
            esc(&input.sha256)
        );
    }
    out.push_str("</tbody></table><table class=\"facts\"><caption>How the alignment was made</caption><tbody>");
    let mut row = |k: &str, v: &str| super::fact_row(out, k, v);
    row("Folder", &f.name);
    row("Made", &m.created_utc);
    row("Tool", &format!("{} {}", m.tool, m.tool_version));
    if !m.command_line.is_empty() {
        row("Command", &m.command_line.join(" "));
    }
    row(
        "Timing",
        if a.loopback_reference {
            "every measurement's time axis rests on a loopback reference: relative times are exact to the sample"
        } else {
            "not every measurement has a loopback reference: relative times include the interface's latency"
        },
    );
    if let Some(x) = &a.crossover {
        row(
            "Search",
            &format!(
                "delays within ±{:.1} ms of the measured timing, to 1/16 sample, both polarities; objective: the mean level of the complex sum over {}–{} Hz on a log-frequency grid (96 points per octave), each point floored 30 dB below the sum of the magnitudes there",
                x.max_delay_s * 1e3,
                num(x.band_hz[0], 0),
                num(x.band_hz[1], 0)
            ),
        );
    }
    out.push_str("</tbody></table>");
}
