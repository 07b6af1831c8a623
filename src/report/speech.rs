//! The report's section on speech intelligibility and background noise of
//! one measurement: the STI with its qualification band (IEC 60268-16
//! annex F) and what it includes, the MTI per octave, and the background
//! noise per octave with its A-weighted level and noise rating. It shows
//! what results.json stores; nothing is judged here.

use std::fmt::Write;

use crate::analysis::speech::{QUALIFICATION_BANDS, Speech};
use crate::folder::schema::Results;
use crate::report::html::{esc, hz};

/// "0.64 (band C, 0.64–0.68)" for an STI and its band, or why it is missing.
pub fn sti_words(s: &Speech) -> String {
    match (s.sti, s.qualification.as_deref()) {
        (Some(v), Some(q)) => {
            let range = QUALIFICATION_BANDS
                .iter()
                .position(|(name, _)| *name == q)
                .map(|i| {
                    let from = QUALIFICATION_BANDS[i].1;
                    match i {
                        0 => format!("above {from:.2}"),
                        i if i + 1 == QUALIFICATION_BANDS.len() => {
                            format!("below {:.2}", QUALIFICATION_BANDS[i - 1].1)
                        }
                        _ => format!("{from:.2}–{:.2}", QUALIFICATION_BANDS[i - 1].1),
                    }
                })
                .unwrap_or_default();
            format!("{v:.2} (qualification band {q}, {range})")
        }
        _ => "not given".to_string(),
    }
}

/// An average's STI in words: "STI 0.64 ± 0.04 (qualification band B),
/// the mean of 3 positions from 0.60 to 0.68".
pub fn spatial_words(m: &crate::analysis::speech::SpatialSti) -> String {
    let lo = m.positions.iter().cloned().fold(f64::INFINITY, f64::min);
    let hi = m
        .positions
        .iter()
        .cloned()
        .fold(f64::NEG_INFINITY, f64::max);
    let mut s = format!("STI {:.2}", m.mean);
    if let Some(sd) = m.std {
        let _ = write!(s, " ± {sd:.2}");
    }
    let _ = write!(
        s,
        " (qualification band {}), the mean of {} position{}",
        m.qualification,
        m.positions.len(),
        if m.positions.len() == 1 { "" } else { "s" }
    );
    if m.positions.len() > 1 {
        let _ = write!(s, " from {lo:.2} to {hi:.2}");
    }
    s
}

/// One line for a page that answers the question of a speech room: the
/// STI, its band, and the noise (for the report's first page).
pub fn answer_line(r: &Results) -> Option<String> {
    // an average: the spatial mean of its positions
    if let Some(m) = r.average.as_ref().and_then(|a| a.sti.as_ref()) {
        return Some(spatial_words(m));
    }
    let s = r.speech.as_ref()?;
    let mut line = format!("STI {}", sti_words(s));
    if s.corrections.impulse_response_only {
        line.push_str(", for the impulse response alone");
    }
    if let Some(n) = &r.noise {
        let _ = write!(line, "; background noise {:.1} dB(A)", n.laeq_db);
        if let Some(rt) = &n.rating {
            let _ = write!(line, ", NR {}", rt.value);
        }
    }
    Some(line)
}

/// Writes the section (nothing when results.json has no `speech`);
/// `table` counts the report's tables.
pub fn section(out: &mut String, r: &Results, table: &mut usize) {
    let Some(s) = &r.speech else { return };
    out.push_str("<h3>Speech intelligibility</h3>");
    let _ = write!(
        out,
        "<p><strong>STI {}</strong>. <span class=\"muted\">{}: {}. {}</span></p>",
        esc(&sti_words(s)),
        esc(&s.standard),
        esc(&s.corrections.statement),
        esc(&format!(
            "The impulse response's own noise is kept out: {}.",
            s.truncation
        ))
    );
    for w in s.warnings.iter() {
        let _ = write!(out, "<p class=\"muted\">{}</p>", esc(&w.message));
    }
    if !s.bands.is_empty() {
        *table += 1;
        let levels = s.bands.iter().any(|b| b.speech_db.is_some());
        let _ = write!(
            out,
            "<table class=\"bands speech\" data-table=\"speech\"><caption>Table {}. Modulation transfer index per octave band</caption><thead><tr><th scope=\"col\">Band</th><th scope=\"col\" class=\"num\">MTI</th><th scope=\"col\" class=\"num\">m at 0.63 Hz</th><th scope=\"col\" class=\"num\">m at 12.5 Hz</th>",
            *table
        );
        if levels {
            out.push_str("<th scope=\"col\" class=\"num\">Speech <span class=\"unit\">(dB SPL)</span></th><th scope=\"col\" class=\"num\">Noise <span class=\"unit\">(dB SPL)</span></th><th scope=\"col\" class=\"num\">Factor on m</th>");
        }
        out.push_str("</tr></thead><tbody>");
        for b in &s.bands {
            let first = b.mtf.first().copied().unwrap_or(f64::NAN);
            let last = b.mtf.last().copied().unwrap_or(f64::NAN);
            let _ = write!(
                out,
                "<tr><th scope=\"row\">{}</th><td class=\"num\">{:.2}</td><td class=\"num\">{first:.2}</td><td class=\"num\">{last:.2}</td>",
                esc(&hz(b.center_hz)),
                b.mti
            );
            if levels {
                let cell =
                    |v: Option<f64>, d: usize| v.map_or("—".to_string(), |x| format!("{x:.d$}"));
                let _ = write!(
                    out,
                    "<td class=\"num\">{}</td><td class=\"num\">{}</td><td class=\"num\">{}</td>",
                    cell(b.speech_db, 1),
                    cell(b.noise_db, 1),
                    cell(b.factor, 3)
                );
            }
            out.push_str("</tr>");
        }
        out.push_str("</tbody></table>");
    }
    let Some(n) = &r.noise else { return };
    out.push_str("<h3>Background noise</h3>");
    let rating = n.rating.as_ref().map_or(
        "no noise rating (an octave it needs is missing)".to_string(),
        |rt| {
            format!(
                "NR {} (the {} octave touches NR {:.1}; {})",
                rt.value,
                hz(rt.governing_hz),
                rt.exact,
                rt.family
            )
        },
    );
    let _ = write!(
        out,
        "<p><strong>{:.1} dB(A)</strong>, {}. <span class=\"muted\">Equivalent continuous level over {:.0} s of the noise folder the STI used.</span></p>",
        n.laeq_db,
        esc(&rating),
        n.duration_s
    );
    *table += 1;
    let _ = write!(
        out,
        "<table class=\"bands noise\" data-table=\"noise\"><caption>Table {}. Background noise per octave band, Leq (dB SPL)</caption><thead><tr>",
        *table
    );
    for b in &n.octaves {
        let _ = write!(
            out,
            "<th scope=\"col\" class=\"num\">{}</th>",
            esc(&hz(b.center_hz))
        );
    }
    out.push_str("</tr></thead><tbody><tr>");
    for b in &n.octaves {
        let _ = write!(out, "<td class=\"num\">{:.1}</td>", b.leq_db);
    }
    out.push_str("</tr></tbody></table>");
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn the_band_is_named_with_its_range() {
        let m = [1.0; 14];
        let mut s = crate::analysis::speech::speech(
            &crate::analysis::speech::OCTAVES_HZ.map(|c| (c, m)),
            None,
        );
        assert_eq!(sti_words(&s), "1.00 (qualification band A+, above 0.76)");
        s.sti = Some(0.66);
        s.qualification = Some("C".into());
        assert_eq!(sti_words(&s), "0.66 (qualification band C, 0.64–0.68)");
        s.sti = Some(0.2);
        s.qualification = Some("U".into());
        assert_eq!(sti_words(&s), "0.20 (qualification band U, below 0.36)");
        s.sti = None;
        assert_eq!(sti_words(&s), "not given");
    }
}
