//! A comparison folder's comparison.json as the report reads it, and its
//! verdict tables.
//!
//! The report reads only these fields; everything else in the file is
//! ignored, and `absorption` and `warnings` may be absent:
//! `inputs[].folder`, `inputs[].label`, `inputs[].sha256`;
//! `bands[].center_hz`, `.fraction`, `.parameter`, `.values`, `.change`,
//! `.relative_change`, `.exceeds_jnd`, `.exceeds_uncertainty` (arrays with
//! one entry per input; entry 0, the reference, holds nulls);
//! `absorption[].center_hz`, `.fraction`, `.delta_area_m2`; `warnings`.

use std::fmt::Write;

use serde::Deserialize;

use super::html::{esc, hz, num, signed};

/// comparison.json.
#[derive(Debug, Clone, PartialEq, Deserialize)]
pub struct Comparison {
    /// The compared measurements; the first is the reference.
    pub inputs: Vec<Input>,
    /// One entry per band and parameter.
    #[serde(default)]
    pub bands: Vec<BandChange>,
    /// Change of equivalent absorption area per band (with a room volume).
    #[serde(default)]
    pub absorption: Vec<Absorption>,
    /// Warnings, in plain words.
    #[serde(default)]
    pub warnings: Vec<String>,
}

/// One compared measurement.
#[derive(Debug, Clone, PartialEq, Deserialize)]
pub struct Input {
    /// The measurement folder as given to compare.
    pub folder: String,
    /// The SHA-256 the comparison recorded for it.
    #[serde(default)]
    pub sha256: Option<String>,
    /// A short name ("before", "after").
    #[serde(default)]
    pub label: Option<String>,
}

impl Input {
    /// The label, or the folder when there is none.
    pub fn name(&self) -> &str {
        self.label
            .as_deref()
            .filter(|l| !l.trim().is_empty())
            .unwrap_or(&self.folder)
    }
}

/// One parameter of one band across the inputs.
#[derive(Debug, Clone, PartialEq, Deserialize)]
pub struct BandChange {
    /// Nominal centre, Hz.
    pub center_hz: f64,
    /// "1/1" or "1/3".
    pub fraction: String,
    /// The results.json name of the parameter ("t30_s", "c80_db", …).
    pub parameter: String,
    /// The value of each input.
    pub values: Vec<Option<f64>>,
    /// Each input's value minus the reference's.
    #[serde(default)]
    pub change: Vec<Option<f64>>,
    /// `change` over the reference's value.
    #[serde(default)]
    pub relative_change: Vec<Option<f64>>,
    /// Whether the change exceeds the just-noticeable difference.
    #[serde(default)]
    pub exceeds_jnd: Vec<Option<bool>>,
    /// Whether the change exceeds the measurement's uncertainty.
    #[serde(default)]
    pub exceeds_uncertainty: Vec<Option<bool>>,
}

/// Change of equivalent absorption area in one band.
#[derive(Debug, Clone, PartialEq, Deserialize)]
pub struct Absorption {
    /// Nominal centre, Hz.
    pub center_hz: f64,
    /// "1/1" or "1/3".
    pub fraction: String,
    /// Per input, m² (null for the reference).
    pub delta_area_m2: Vec<Option<f64>>,
}

/// How a parameter is shown: (label, unit, scale to the unit, decimals,
/// just-noticeable difference in words).
pub fn parameter(p: &str) -> (&str, &'static str, f64, usize, &'static str) {
    match p {
        "edt_s" => ("EDT", "s", 1.0, 2, "5 %"),
        // ISO 3382-1 Annex A gives 5 % for the reverberation time T;
        // C50 has no entry there and compare uses C80's 1 dB for it
        "t20_s" => ("T20", "s", 1.0, 2, "5 %"),
        "t30_s" => ("T30", "s", 1.0, 2, "5 %"),
        "c50_db" => ("C50", "dB", 1.0, 1, "1 dB, as for C80"),
        "c80_db" => ("C80", "dB", 1.0, 1, "1 dB"),
        "d50" => ("D50", "", 1.0, 2, "0.05"),
        "ts_s" => ("Ts", "ms", 1000.0, 0, "10 ms"),
        "inr_db" => ("INR", "dB", 1.0, 0, ""),
        other => (other, "", 1.0, 3, ""),
    }
}

/// The order parameters are shown in.
const ORDER: [&str; 8] = [
    "edt_s", "t20_s", "t30_s", "c50_db", "c80_db", "d50", "ts_s", "inr_db",
];

/// The verdict on one change, as (CSS class, words).
pub fn verdict(
    change: Option<f64>,
    jnd: Option<bool>,
    uncertainty: Option<bool>,
) -> (&'static str, &'static str) {
    if change.is_none() {
        return ("na", "not measured in both");
    }
    match (jnd, uncertainty) {
        (Some(true), Some(true)) => ("audible", "audible change"),
        (Some(true), None) => ("audible", "audible change (uncertainty not estimated)"),
        (Some(true), Some(false)) => (
            "unsure",
            "within measurement uncertainty, though larger than the just-noticeable difference",
        ),
        (Some(false), Some(true)) => ("small", "measurable, below the just-noticeable difference"),
        (Some(false), _) => ("none", "below the just-noticeable difference"),
        (None, Some(true)) => (
            "small",
            "measurable change (no just-noticeable difference given)",
        ),
        (None, Some(false)) => ("none", "within measurement uncertainty"),
        (None, None) => ("na", "not judged"),
    }
}

fn at<T: Copy>(v: &[Option<T>], i: usize) -> Option<T> {
    v.get(i).copied().flatten()
}

/// Counts of the verdicts over every band and input after the first:
/// (audible, measured but not audible or uncertain, not measured).
pub fn tally(c: &Comparison) -> (usize, usize, usize) {
    let (mut audible, mut other, mut missing) = (0, 0, 0);
    for b in &c.bands {
        for i in 1..c.inputs.len() {
            match verdict(
                at(&b.change, i),
                at(&b.exceeds_jnd, i),
                at(&b.exceeds_uncertainty, i),
            )
            .0
            {
                "audible" => audible += 1,
                "na" => missing += 1,
                _ => other += 1,
            }
        }
    }
    (audible, other, missing)
}

/// The verdict tables: one per parameter and band fraction, octave bands first.
pub fn tables(out: &mut String, c: &Comparison, table: &mut usize) {
    let mut params: Vec<&str> = ORDER
        .iter()
        .copied()
        .filter(|p| c.bands.iter().any(|b| b.parameter == *p))
        .collect();
    for b in &c.bands {
        if !params.contains(&b.parameter.as_str()) {
            params.push(&b.parameter);
        }
    }
    let mut fractions: Vec<&str> = vec!["1/1", "1/3"];
    for b in &c.bands {
        if !fractions.contains(&b.fraction.as_str()) {
            fractions.push(&b.fraction);
        }
    }
    for fraction in fractions {
        let rows_of = |p: &str| -> Vec<&BandChange> {
            c.bands
                .iter()
                .filter(|b| b.fraction == fraction && b.parameter == p)
                .collect()
        };
        if params.iter().all(|p| rows_of(p).is_empty()) {
            continue;
        }
        let _ = write!(
            out,
            "<h4>{}</h4>",
            match fraction {
                "1/1" => "Octave bands".to_string(),
                "1/3" => "One-third-octave bands".to_string(),
                f => format!("Bands {}", esc(f)),
            }
        );
        for p in &params {
            let rows = rows_of(p);
            if rows.is_empty() {
                continue;
            }
            *table += 1;
            let (label, unit, scale, dec, jnd) = parameter(p);
            let u = if unit.is_empty() {
                String::new()
            } else {
                format!(" ({unit})")
            };
            let _ = write!(
                out,
                "<table class=\"bands compare\" data-parameter=\"{}\" data-fraction=\"{}\"><caption>Table {}. {}{} per {} band{}</caption><thead><tr><th scope=\"col\">Band</th>",
                esc(p),
                esc(fraction),
                table,
                esc(label),
                esc(&u),
                if fraction == "1/1" {
                    "octave"
                } else {
                    "one-third-octave"
                },
                if jnd.is_empty() {
                    String::new()
                } else {
                    format!("; just-noticeable difference {jnd} (ISO 3382-1 Annex A)")
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
                    let _ = write!(
                        out,
                        "<th scope=\"col\" class=\"num\">Change</th><th scope=\"col\">Verdict</th>"
                    );
                }
            }
            out.push_str("</tr></thead><tbody>");
            for b in rows {
                let _ = write!(
                    out,
                    "<tr data-center-hz=\"{}\"><th scope=\"row\">{}</th>",
                    b.center_hz,
                    esc(&hz(b.center_hz))
                );
                for i in 0..c.inputs.len() {
                    let v = at(&b.values, i);
                    let _ = write!(
                        out,
                        "<td class=\"num\" data-input=\"{i}\">{}</td>",
                        v.map_or("—".to_string(), |v| num(v * scale, dec))
                    );
                    if i > 0 {
                        let ch = at(&b.change, i);
                        let rel = at(&b.relative_change, i);
                        let shown = match (ch, rel) {
                            (Some(d), Some(r)) if unit == "s" => format!(
                                "{} <span class=\"muted\">({} %)</span>",
                                signed(d * scale, dec),
                                signed(r * 100.0, 0)
                            ),
                            (Some(d), _) => signed(d * scale, dec),
                            (None, _) => "—".to_string(),
                        };
                        let (class, words) =
                            verdict(ch, at(&b.exceeds_jnd, i), at(&b.exceeds_uncertainty, i));
                        let _ = write!(
                            out,
                            "<td class=\"num nowrap\">{shown}</td><td class=\"verdict {class}\">{words}</td>"
                        );
                    }
                }
                out.push_str("</tr>");
            }
            out.push_str("</tbody></table>");
        }
    }
}

/// The absorption table, if the comparison has one.
pub fn absorption(out: &mut String, c: &Comparison, table: &mut usize) {
    if c.absorption.is_empty() {
        return;
    }
    *table += 1;
    let _ = write!(
        out,
        "<table class=\"bands\" data-parameter=\"delta_area_m2\"><caption>Table {table}. Change of equivalent absorption area against {} (Sabine), m²</caption><thead><tr><th scope=\"col\">Band</th>",
        esc(c.inputs.first().map_or("the reference", Input::name))
    );
    for input in c.inputs.iter().skip(1) {
        let _ = write!(
            out,
            "<th scope=\"col\" class=\"num\">{} (m²)</th>",
            esc(input.name())
        );
    }
    out.push_str("</tr></thead><tbody>");
    for a in &c.absorption {
        let _ = write!(
            out,
            "<tr data-center-hz=\"{}\"><th scope=\"row\">{} <span class=\"muted\">{}</span></th>",
            a.center_hz,
            esc(&hz(a.center_hz)),
            esc(&a.fraction)
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

    #[test]
    fn verdicts_follow_the_flags() {
        assert_eq!(
            verdict(Some(-0.13), Some(true), Some(true)).1,
            "audible change"
        );
        assert_eq!(verdict(Some(0.01), Some(false), Some(false)).0, "none");
        assert_eq!(verdict(Some(0.1), Some(true), Some(false)).0, "unsure");
        assert_eq!(verdict(None, None, None).1, "not measured in both");
    }

    #[test]
    fn optional_parts_may_be_absent() {
        let c: Comparison = serde_json::from_str(
            r#"{"inputs": [{"folder": "a"}, {"folder": "b", "label": "after"}],
                "bands": [{"center_hz": 125.0, "fraction": "1/1", "parameter": "t30_s",
                           "values": [0.6, null]}]}"#,
        )
        .unwrap();
        assert!(c.absorption.is_empty() && c.warnings.is_empty());
        assert_eq!(c.inputs[1].name(), "after");
        assert_eq!(c.inputs[0].name(), "a");
        assert_eq!(tally(&c), (0, 0, 1));
        let mut s = String::new();
        let mut n = 0;
        tables(&mut s, &c, &mut n);
        assert!(s.contains("not measured in both"));
        assert_eq!(n, 1);
    }
}
