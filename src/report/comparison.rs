//! A comparison folder's verdict tables. The comparison is read through
//! the folder's own schema ([`crate::folder::schema::Comparison`]); the
//! verdict of every change is the one `gliss compare` stored, only shown
//! here.

use std::fmt::Write;

use super::html::{esc, hz, signed};
use crate::analysis::compare::Verdict;
use crate::folder::schema::{AbsorptionRow, BandRow, Comparison};
use crate::model::{Fraction, Parameter};

fn at<T: Copy>(v: &[Option<T>], i: usize) -> Option<T> {
    v.get(i).copied().flatten()
}

/// The stored verdict of input `i`'s change in a row (not judged: `None`).
pub fn verdict_of(b: &BandRow, i: usize) -> Option<Verdict> {
    at(&b.changes.verdict, i)
}

/// The CSS class a verdict is shown with.
pub fn css_class(v: Option<Verdict>) -> &'static str {
    match v {
        Some(Verdict::Audible) => "audible",
        Some(Verdict::BeyondJndUncertaintyUnknown | Verdict::WithinUncertainty) => "unsure",
        Some(Verdict::MeasurableBelowJnd | Verdict::MeasurableNoJnd) => "small",
        Some(Verdict::BelowJnd | Verdict::WithinUncertaintyNoJnd) => "none",
        Some(Verdict::NotJudged | Verdict::NotMeasured) | None => "na",
    }
}

/// A verdict in a few words for a table cell; the full words
/// ([`Verdict::words`]) are its tooltip and the legend above the tables.
pub fn short_words(v: Option<Verdict>) -> &'static str {
    match v {
        Some(Verdict::Audible) => "audible",
        Some(Verdict::BeyondJndUncertaintyUnknown) => "audible if real (uncertainty unknown)",
        Some(Verdict::WithinUncertainty) => "beyond JND, within uncertainty",
        Some(Verdict::MeasurableBelowJnd) => "real, below JND",
        Some(Verdict::BelowJnd) => "below JND",
        Some(Verdict::MeasurableNoJnd) => "real (no JND)",
        Some(Verdict::WithinUncertaintyNoJnd) => "within uncertainty",
        Some(Verdict::NotJudged) | None => "not judged",
        Some(Verdict::NotMeasured) => "not measured",
    }
}

/// The heading of a block of tables of one band width.
fn fraction_heading(f: Fraction) -> &'static str {
    match f {
        Fraction::Octave => "Octave bands",
        Fraction::Third => "One-third-octave bands",
        Fraction::Broadband => "The whole sweep band (broadband)",
    }
}

/// The verdict tables of one band width: one per parameter, side by side
/// in print (two to a row).
pub fn tables(out: &mut String, c: &Comparison, fraction: Fraction, table: &mut usize) {
    tables_of(out, c, fraction, &Parameter::ALL, table);
}

/// The verdict tables of `parameters` in one band width.
pub fn tables_of(
    out: &mut String,
    c: &Comparison,
    fraction: Fraction,
    parameters: &[Parameter],
    table: &mut usize,
) {
    let rows_of = |p: Parameter| -> Vec<&BandRow> {
        c.bands
            .iter()
            .filter(|b| b.fraction == fraction && b.parameter == p)
            .collect()
    };
    if parameters.iter().all(|&p| rows_of(p).is_empty()) {
        return;
    }
    let _ = write!(
        out,
        "<h4>{}</h4><div class=\"grid2\">",
        fraction_heading(fraction)
    );
    for &p in parameters {
        let rows = rows_of(p);
        if !rows.is_empty() {
            parameter_table(out, c, p, fraction, &rows, table);
        }
    }
    out.push_str("</div>");
}

/// One parameter's table in one band width: each input's value, and for
/// each after the first the change and its verdict.
fn parameter_table(
    out: &mut String,
    c: &Comparison,
    p: Parameter,
    fraction: Fraction,
    rows: &[&BandRow],
    table: &mut usize,
) {
    *table += 1;
    let info = p.info();
    let u = if info.display_unit.is_empty() {
        String::new()
    } else {
        format!(" ({})", info.display_unit)
    };
    let _ = write!(
        out,
        "<table class=\"bands compare\" data-parameter=\"{}\" data-fraction=\"{}\"><caption>Table {}. {}{} {}{}</caption><thead><tr><th scope=\"col\">Band</th>",
        esc(p.key()),
        esc(fraction.code()),
        table,
        esc(info.label),
        esc(&u),
        match fraction {
            Fraction::Broadband => "over the whole sweep band".to_string(),
            f => format!("per {} band", f.words()),
        },
        if info.jnd_words.is_empty() {
            String::new()
        } else {
            format!("; JND {}", info.jnd_words)
        }
    );
    for (i, input) in c.inputs.iter().enumerate() {
        let _ = write!(
            out,
            "<th scope=\"col\" class=\"num\">{}{}</th>",
            esc(input.name()),
            if i == 0 {
                " <span class=\"muted\">(reference)</span>"
            } else {
                ""
            }
        );
        if i > 0 {
            out.push_str(
                "<th scope=\"col\" class=\"num\">Change</th><th scope=\"col\">Verdict</th>",
            );
        }
    }
    out.push_str("</tr></thead><tbody>");
    let (scale, dec) = (info.display_scale, info.display_decimals);
    for b in rows {
        let _ = write!(
            out,
            "<tr data-center-hz=\"{}\"><th scope=\"row\">{}</th>",
            b.center_hz,
            if fraction == Fraction::Broadband {
                "whole band".to_string()
            } else {
                esc(&hz(b.center_hz))
            }
        );
        for i in 0..c.inputs.len() {
            let _ = write!(
                out,
                "<td class=\"num\" data-input=\"{i}\">{}</td>",
                at(&b.values, i).map_or("—".to_string(), |v| p.show(v))
            );
            if i > 0 {
                let ch = at(&b.changes.change, i);
                let rel = at(&b.changes.relative_change, i);
                let shown = match (ch, rel) {
                    (Some(d), Some(r)) if p.is_decay_time() => format!(
                        "<span title=\"{} s\">{} %</span>",
                        signed(d * scale, dec),
                        signed(r * 100.0, 0)
                    ),
                    (Some(d), _) => signed(d * scale, dec),
                    (None, _) => "—".to_string(),
                };
                let v = verdict_of(b, i);
                let _ = write!(
                    out,
                    "<td class=\"num nowrap\">{shown}</td><td class=\"verdict {}\" data-verdict=\"{}\" title=\"{}\">{}</td>",
                    css_class(v),
                    v.map_or("", Verdict::code),
                    v.map_or("not judged", Verdict::words),
                    short_words(v)
                );
            }
        }
        out.push_str("</tr>");
    }
    out.push_str("</tbody></table>");
}

/// The absorption table, if the comparison has one.
pub fn absorption(out: &mut String, c: &Comparison, fraction: Fraction, table: &mut usize) {
    let rows: Vec<&AbsorptionRow> = c
        .absorption
        .iter()
        .filter(|a| a.fraction == fraction)
        .collect();
    if rows.is_empty() {
        return;
    }
    *table += 1;
    let _ = write!(
        out,
        "<table class=\"bands\" data-parameter=\"delta_area_m2\"><caption>Table {table}. Change of equivalent absorption area against {} (Sabine), m², per {} band</caption><thead><tr><th scope=\"col\">Band</th>",
        esc(c.inputs.first().map_or("the reference", |i| i.name())),
        fraction.words()
    );
    for input in c.inputs.iter().skip(1) {
        let _ = write!(
            out,
            "<th scope=\"col\" class=\"num\">{} (m²)</th>",
            esc(input.name())
        );
    }
    out.push_str("</tr></thead><tbody>");
    for a in rows {
        let _ = write!(
            out,
            "<tr data-center-hz=\"{}\"><th scope=\"row\">{} <span class=\"muted\">{}</span></th>",
            a.center_hz,
            esc(&hz(a.center_hz)),
            esc(a.fraction.code())
        );
        for i in 1..c.inputs.len() {
            let _ = write!(
                out,
                "<td class=\"num\">{}</td>",
                at(&a.delta_area_m2, i).map_or("—".to_string(), |v| signed(v, 1))
            );
        }
        out.push_str("</tr>");
    }
    out.push_str("</tbody></table>");
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::analysis::compare::judge;
    use crate::folder::schema::{CompareResponse, FolderKind, InputRecord};

    fn input(label: &str) -> InputRecord {
        InputRecord {
            folder: format!("/m/{label}"),
            label: label.into(),
            sha256: String::new(),
            results_sha256: String::new(),
        }
    }

    #[test]
    fn the_tables_show_the_stored_verdict() {
        let values = vec![Some(1.14), Some(1.06)];
        let uncertainty = vec![Some(0.06), Some(0.06)];
        let c = Comparison {
            schema_version: 1,
            kind: FolderKind::Comparison,
            inputs: vec![input("before"), input("after")],
            common_band_hz: [20.0, 20000.0],
            response: CompareResponse::default(),
            bands: vec![BandRow {
                center_hz: 31.5,
                fraction: Fraction::Octave,
                parameter: Parameter::T30,
                changes: judge(Parameter::T30, &values, &uncertainty),
                values,
                uncertainty,
            }],
            absorption: Vec::new(),
            volume_m3: None,
            temperature_c: None,
            speed_of_sound_m_s: None,
            target: None,
            criteria: Vec::new(),
            profile: None,
            speech: None,
            warnings: Default::default(),
        };
        let mut s = String::new();
        let mut n = 0;
        tables(&mut s, &c, Fraction::Octave, &mut n);
        assert_eq!(n, 1);
        assert!(s.contains("data-verdict=\"within_uncertainty\""), "{s}");
        assert!(s.contains("within measurement uncertainty, though larger"));
    }
}
