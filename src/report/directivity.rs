//! A directivity folder's part of the report: the answer (beamwidth and
//! directivity indices at a few frequencies, the standard's curves), the
//! evidence (the table by octave, the withheld curves with their reasons,
//! the polar map and diagrams) and its inputs in the appendix. The values
//! are those directivity.json stores, shown, never recomputed.

use std::fmt::Write;

use super::html::{esc, num};
use super::{Counters, Folder, figure};
use crate::analysis::directivity::{Curve, Directivity};
use crate::folder::schema::{DirectivityFile, DirectivityManifest};
use crate::model::plot_kind::{CaptionFacts, PlotKind};
use crate::model::{Orbit, units};

/// The octave frequencies of the table, Hz.
const TABLE_HZ: [f64; 8] = [125.0, 250.0, 500.0, 1000.0, 2000.0, 4000.0, 8000.0, 16000.0];

/// The grid point at `hz` (the first at or above it within 1 %).
fn at(d: &Directivity, hz: f64) -> Option<usize> {
    d.frequency_hz
        .iter()
        .position(|&f| f >= hz / 1.01)
        .filter(|&i| d.frequency_hz[i] <= hz * 1.01)
}

fn beamwidth(d: &Directivity, o: Orbit, i: usize) -> Option<f64> {
    d.beamwidth(o)
        .and_then(|b| b.beamwidth_deg.as_ref())
        .and_then(|b| b[i])
}

fn cell(v: Option<f64>, unit: &str, decimals: usize) -> String {
    v.map_or_else(
        || "—".to_string(),
        |v| format!("{}{unit}", num(v, decimals)),
    )
}

fn caption(p: &super::Plot, file: &DirectivityFile) -> String {
    let smoothing = file.smoothing.words();
    let facts = CaptionFacts {
        smoothing: &smoothing,
        magnitude_reference: &file.magnitude_reference,
        gate_hz: file.gate.map(|g| (g.resolution_hz, g.resolved_to_hz)),
        ..CaptionFacts::default()
    };
    PlotKind::from_file_among(&p.file, &PlotKind::DIRECTIVITY)
        .map_or_else(|| super::unknown_caption(&p.file), |k| k.caption(&facts))
}

fn plot(f: &Folder, kind: PlotKind) -> Option<&super::Plot> {
    f.plots.iter().find(|p| p.file == kind.file())
}

/// Page 1 of a report that leads with a directivity folder.
pub(super) fn answer(
    out: &mut String,
    f: &Folder,
    manifest: &DirectivityManifest,
    file: &DirectivityFile,
    n: &mut Counters,
) {
    let d = &file.directivity;
    let _ = write!(
        out,
        "<p class=\"lede\"><span class=\"folder\">{}</span>: {}</p><dl class=\"keys\">",
        esc(&f.name),
        esc(&manifest.source.description)
    );
    for hz in [1000.0, 4000.0] {
        let Some(i) = at(d, hz) else { continue };
        let label = format!("At {}", units::hz(hz));
        let value = format!(
            "{} horizontal, {} vertical",
            cell(beamwidth(d, Orbit::Horizontal, i), "°", 0),
            cell(beamwidth(d, Orbit::Vertical, i), "°", 0)
        );
        super::key(out, &label, &value, "−6 dB beamwidth");
        if let Some(l) = d.levels(Curve::SoundPowerDi) {
            super::key(
                out,
                &format!("Sound power DI at {}", units::hz(hz)),
                &format!("{} dB", num(l[i], 1)),
                "listening window − sound power (ANSI/CTA-2034-A)",
            );
        }
    }
    out.push_str("</dl>");
    withheld(out, d);
    if let Some(p) = plot(f, PlotKind::SpatialAverages) {
        figure(out, p, &caption(p, file), n);
    }
}

/// The curves and beamwidths that could not be computed, with the reason.
fn withheld(out: &mut String, d: &Directivity) {
    let mut items = Vec::new();
    for c in &d.curves {
        if let Some(w) = &c.withheld {
            items.push(format!("{}: {}", c.curve.label(), w.reason));
        }
    }
    for o in Orbit::ALL {
        if let Some(w) = d.beamwidth(o).and_then(|b| b.withheld.as_ref()) {
            items.push(format!("{} beamwidth: {}", o.code(), w.reason));
        }
    }
    if items.is_empty() {
        return;
    }
    out.push_str(
        "<p class=\"todo\">— Not computed from the angles measured:</p><ul class=\"warnings\">",
    );
    for i in items {
        let _ = write!(out, "<li>{}</li>", esc(&i));
    }
    out.push_str("</ul>");
}

/// The evidence: the table by octave and every plot.
pub(super) fn section(
    out: &mut String,
    f: &Folder,
    file: &DirectivityFile,
    lead: bool,
    n: &mut Counters,
) {
    let d = &file.directivity;
    let orbits: Vec<String> = d
        .orbits
        .iter()
        .map(|o| format!("{} orbit, {} angles", o.orbit.code(), o.angles_deg.len()))
        .collect();
    let _ = write!(
        out,
        "<p class=\"muted\">{} measurements ({}), {}, gate {}. Spatial averages as ANSI/CTA-2034-A defines them: every average of pressures squared; the sound power over its 70 positions weighted by the standard's Appendix C; see the method in docs/method.md.</p>",
        file.inputs.len(),
        esc(&orbits.join("; ")),
        esc(&file.smoothing.words()),
        esc(&file.gate.as_ref().map_or_else(
            || "none".to_string(),
            |g| format!(
                "{} to {} ms",
                num(g.start_s * 1e3, 2),
                num(g.end_s * 1e3, 2)
            )
        ))
    );
    n.table += 1;
    let _ = write!(
        out,
        "<table class=\"params\"><caption>Table {}. Beamwidth and directivity indices by octave</caption><thead><tr><th scope=\"col\">Frequency</th><th scope=\"col\" class=\"num\">Beamwidth H</th><th scope=\"col\" class=\"num\">Beamwidth V</th><th scope=\"col\" class=\"num\">DI</th><th scope=\"col\" class=\"num\">Sound power DI</th><th scope=\"col\" class=\"num\">Early reflections DI</th></tr></thead><tbody>",
        n.table
    );
    for hz in TABLE_HZ {
        let Some(i) = at(d, hz) else { continue };
        let level = |c: Curve| d.levels(c).map(|l| l[i]);
        let _ = write!(
            out,
            "<tr><th scope=\"row\">{}</th><td class=\"num\">{}</td><td class=\"num\">{}</td><td class=\"num\">{}</td><td class=\"num\">{}</td><td class=\"num\">{}</td></tr>",
            esc(&units::hz(hz)),
            esc(&cell(beamwidth(d, Orbit::Horizontal, i), "°", 0)),
            esc(&cell(beamwidth(d, Orbit::Vertical, i), "°", 0)),
            esc(&cell(level(Curve::DirectivityIndex), " dB", 1)),
            esc(&cell(level(Curve::SoundPowerDi), " dB", 1)),
            esc(&cell(level(Curve::EarlyReflectionsDi), " dB", 1)),
        );
    }
    out.push_str("</tbody></table><p class=\"muted\">— : not computed (the reason is listed) or, for a beamwidth, the level stays within 6 dB of on axis on a side all the way round. DI is on axis − sound power.</p>");
    if !lead {
        withheld(out, d);
    }
    let kinds: &[PlotKind] = if lead {
        &[PlotKind::PolarMap, PlotKind::PolarDiagram]
    } else {
        &PlotKind::DIRECTIVITY
    };
    for k in kinds {
        if let Some(p) = plot(f, *k) {
            figure(out, p, &caption(p, file), n);
        }
    }
}

/// The appendix: the measurements with their positions and hashes.
pub(super) fn appendix(out: &mut String, file: &DirectivityFile) {
    out.push_str("<h4>Measurements</h4><table class=\"files\"><thead><tr><th scope=\"col\">Position</th><th scope=\"col\">Folder</th><th scope=\"col\">SHA-256 of its manifest</th></tr></thead><tbody>");
    for i in &file.inputs {
        let _ = write!(
            out,
            "<tr><td>{}</td><td class=\"folder\">{}</td><td class=\"hash\">{}</td></tr>",
            esc(&i.position.words()),
            esc(&i.folder.folder),
            esc(&i.folder.sha256)
        );
    }
    out.push_str("</tbody></table>");
}
