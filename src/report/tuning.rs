//! A tuning folder in the report: what the correction achieves, the
//! filters to type into the processor, the before/after plot and the
//! regions left alone with their reasons (all decided in
//! `analysis::tuning` and read from tuning.json; only rendered here).

use std::fmt::Write;

use super::html::{esc, hz};
use super::{Counters, Folder, Plot, figure};
use crate::analysis::tuning::Uncorrectable;
use crate::folder::schema::{TuningFile, TuningManifest};
use crate::model::plot_kind::{CaptionFacts, PlotKind};

/// The tuning in one line for the contents: what was tuned.
pub fn title(m: &TuningManifest) -> String {
    let names: Vec<&str> = m.inputs.iter().map(|i| i.label.as_str()).collect();
    let what = if names.len() == 1 {
        names[0].to_string()
    } else {
        format!("the average of {}", names.join(", "))
    };
    format!("correction filters for {what} towards {}", m.target.name)
}

/// The answer: the deviation before and after in one sentence.
pub fn answer(out: &mut String, f: &Folder, m: &TuningManifest, t: &TuningFile, n: &mut Counters) {
    let _ = write!(
        out,
        "<p class=\"lede\"><span class=\"folder\">{}</span>: {}</p>",
        esc(&f.name),
        esc(&title(m))
    );
    let _ = write!(
        out,
        "<p class=\"verdict\"><strong>{} filter{}</strong> bring the largest deviation from the target over {}–{} from {:.1} dB to {:.1} dB (mean {:.1} → {:.1} dB), as predicted from the filters' exact responses.</p>",
        t.filters.len(),
        if t.filters.len() == 1 { "" } else { "s" },
        esc(&hz(t.before.range_hz[0])),
        esc(&hz(t.before.range_hz[1])),
        t.before.max_abs_db,
        t.after.max_abs_db,
        t.before.mean_abs_db,
        t.after.mean_abs_db
    );
    if let (Some(b), Some(tr)) = (&t.below_transition, &t.transition) {
        let _ = write!(
            out,
            "<p>Below the room's transition frequency ({:.0} Hz), where equalisation acts on the room's modes: largest deviation {:.1} → {:.1} dB, mean {:.1} → {:.1} dB.</p>",
            tr.frequency_hz,
            b.before.max_abs_db,
            b.after.max_abs_db,
            b.before.mean_abs_db,
            b.after.mean_abs_db
        );
    }
    // what to do and what it does, on the first page
    for p in &f.plots {
        figure(out, p, &caption(p, t), n);
    }
    filters_table(out, t, n);
}

/// The evidence: the plot and the filters table (unless the first page
/// showed them: `lead`), the regions left alone and the warnings.
pub fn section(out: &mut String, f: &Folder, t: &TuningFile, lead: bool, n: &mut Counters) {
    if !lead {
        for p in &f.plots {
            figure(out, p, &caption(p, t), n);
        }
        filters_table(out, t, n);
    }
    if t.uncorrectable.is_empty() {
        out.push_str("<p class=\"muted\">No part of the range was left uncorrected.</p>");
    } else {
        out.push_str("<p><strong>Left uncorrected:</strong></p><ul>");
        for r in &t.uncorrectable {
            let depth = match (r.kind, r.depth_db, r.width_octaves) {
                (Uncorrectable::RollOff, Some(d), _) => {
                    format!(" ({d:.1} dB under the range's median at its edge)")
                }
                (_, Some(d), Some(w)) => {
                    format!(" ({d:.1} dB deep, {w:.2} octave wide at half depth)")
                }
                _ => String::new(),
            };
            let _ = write!(
                out,
                "<li>{}–{}{}: {}</li>",
                esc(&hz(r.range_hz[0])),
                esc(&hz(r.range_hz[1])),
                esc(&depth),
                esc(&r.reason)
            );
        }
        out.push_str("</ul>");
    }
    // the regions left alone are listed above; the other warnings here
    for w in t
        .warnings
        .iter()
        .filter(|w| w.code != crate::model::Code::TuningUncorrectable)
    {
        let _ = write!(out, "<p class=\"muted\">Warning: {}</p>", esc(&w.message));
    }
}

fn caption(p: &Plot, t: &TuningFile) -> String {
    let smoothing = t.response.smoothing.words();
    let facts = CaptionFacts {
        smoothing: &smoothing,
        ..CaptionFacts::default()
    };
    PlotKind::from_file_among(&p.file, &PlotKind::TUNING)
        .map_or_else(|| super::unknown_caption(&p.file), |k| k.caption(&facts))
}

/// The filters as a person types them into a processor.
fn filters_table(out: &mut String, t: &TuningFile, n: &mut Counters) {
    n.table += 1;
    let _ = write!(
        out,
        "<table class=\"bands\" data-table=\"tuning\"><caption>Table {}. Correction filters (Audio EQ Cookbook biquads; coefficients per rate in tuning.json)</caption><thead><tr><th scope=\"col\">Filter</th><th scope=\"col\">Type</th><th scope=\"col\" class=\"num\">Frequency <span class=\"unit\">(Hz)</span></th><th scope=\"col\" class=\"num\">Gain <span class=\"unit\">(dB)</span></th><th scope=\"col\" class=\"num\">Q</th></tr></thead><tbody>",
        n.table
    );
    for (k, x) in t.filters.iter().enumerate() {
        let _ = write!(
            out,
            "<tr><th scope=\"row\">{}</th><td>{}</td><td class=\"num\">{:.1}</td><td class=\"num\">{:+.1}</td><td class=\"num\">{:.2}</td></tr>",
            k + 1,
            esc(x.kind.words()),
            x.frequency_hz,
            x.gain_db,
            x.q
        );
    }
    out.push_str("</tbody></table>");
}

/// The appendix: how the tuning was made.
pub fn appendix(out: &mut String, f: &Folder, m: &TuningManifest, t: &TuningFile) {
    out.push_str("<table class=\"facts\"><caption>How the tuning was made</caption><tbody>");
    let mut row = |k: &str, v: &str| super::fact_row(out, k, v);
    row("Folder", &f.name);
    for i in &m.inputs {
        row(
            "Response tuned",
            &format!("{} (manifest SHA-256 {})", i.folder, i.sha256),
        );
    }
    row(
        "Target",
        &format!("{} (SHA-256 {})", m.target.name, m.target.sha256),
    );
    let s = &t.settings;
    row(
        "Limits",
        &format!(
            "{}–{}, at most {} filters, boost ≤ {} dB, cut ≤ {} dB, Q {}–{}, designed at {} Hz",
            hz(s.range_hz.0),
            hz(s.range_hz.1),
            s.filters,
            s.max_boost_db,
            s.max_cut_db,
            s.q_range.0,
            s.q_range.1,
            s.sample_rate_hz
        ),
    );
    match &t.transition {
        Some(tr) => row(
            "Transition frequency",
            &format!(
                "{:.0} Hz = 2000·√(T/V), T {:.2} s, V {} m³; above it {}",
                tr.frequency_hz,
                tr.t_s,
                tr.volume_m3,
                match s.above_transition {
                    crate::analysis::tuning::AboveTransition::Broad => "only broad filters",
                    crate::analysis::tuning::AboveTransition::None => "no filters",
                    crate::analysis::tuning::AboveTransition::Full => "any filters",
                }
            ),
        ),
        None => row("Transition frequency", "not known (no --volume)"),
    }
    row("Command", &m.command_line.join(" "));
    row(
        "Written",
        &format!("{} by gliss {}", m.created_utc, m.tool_version),
    );
    out.push_str("</tbody></table>");
}
