//! The self-contained HTML report of one or more measurement folders.
//!
//! [`render`] is pure: it takes folders already read (by `gliss report`)
//! and returns one HTML document with its style sheet inline and every
//! plot embedded as a base64 PNG data URI. It makes no requests of any
//! kind and needs no JavaScript. All text from the folders is escaped.

pub mod advice;
pub mod align;
pub mod answer;
pub mod comparison;
mod directivity;
pub mod html;
mod impedance;
pub mod speech;
mod tuning;

use std::fmt::Write;

use base64::Engine;

use crate::analysis::room::BandResult;
use crate::analysis::rt_target::RtTarget;
use crate::folder::schema::{Comparison, ComparisonManifest, FileRole, Manifest, Results};
use crate::model::plot_kind::{CaptionFacts, PlotKind};
use crate::model::{Code, Fraction, Parameter, Warning};
use html::{esc, hz, num, trim};

/// A plot of a folder.
#[derive(Debug, Clone, PartialEq)]
pub struct Plot {
    /// Its path inside the folder ("plots/response.png").
    pub file: String,
    /// The PNG's bytes.
    pub png: Vec<u8>,
}

pub use crate::folder::{Content, FileCheck, FileState};

/// What the report is asked for beyond its folders.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct Options {
    /// The reverberation time's target range (`--target-rt`): drawn on
    /// page 1's figure and judged in words per octave band.
    pub target_rt: Option<RtTarget>,
}

/// One folder of the report, read.
#[derive(Debug, Clone)]
pub struct Folder {
    /// The folder as given on the command line.
    pub name: String,
    /// What it holds.
    pub content: Content,
    /// Its plots/*.png.
    pub plots: Vec<Plot>,
    /// The files its manifest lists, checked.
    pub files: Vec<FileCheck>,
    /// What reading it found wrong that is not an error (a damaged plot).
    pub notes: Vec<String>,
}

/// Rank of a plot file in the report's order ([`PlotKind::rank`]: comparison
/// plots, response, phase, group delay, distortion, decay, reverberation,
/// decay spectrum, spectrogram, impulse; files gliss does not draw after).
pub fn plot_rank(file: &str) -> usize {
    crate::model::plot_kind::plot_rank(file)
}

/// The generic caption of a plot gliss does not know.
fn unknown_caption(file: &str) -> String {
    let name = file.rsplit('/').next().unwrap_or(file);
    format!("The plot {}.", name.strip_suffix(".png").unwrap_or(name))
}

/// Width and height of a PNG from its header, if it is one.
pub fn png_size(png: &[u8]) -> Option<(u32, u32)> {
    const SIGNATURE: [u8; 8] = [0x89, b'P', b'N', b'G', 0x0d, 0x0a, 0x1a, 0x0a];
    if png.len() < 24 || png[..8] != SIGNATURE || &png[12..16] != b"IHDR" {
        return None;
    }
    let w = u32::from_be_bytes([png[16], png[17], png[18], png[19]]);
    let h = u32::from_be_bytes([png[20], png[21], png[22], png[23]]);
    Some((w, h))
}

/// Figure and table numbers, counted through the whole report.
#[derive(Debug, Default)]
struct Counters {
    figure: usize,
    table: usize,
}

/// Whether folder `k` is a position of an average that is also in the
/// report (its name is one of that average's inputs): such folders go to
/// the appendix as tables only.
fn is_position(folders: &[Folder], k: usize) -> bool {
    let name = &folders[k].name;
    folders.iter().any(|f| match &f.content {
        Content::Measurement { manifest, results } => {
            results.average.is_some() && manifest.inputs.iter().any(|i| &i.folder == name)
        }
        Content::Comparison { .. }
        | Content::Align { .. }
        | Content::Directivity { .. }
        | Content::Tuning { .. } => false,
    })
}

/// Whether the folder `name` is an input of a comparison in the report.
fn is_compared(folders: &[Folder], name: &str) -> bool {
    folders.iter().any(|f| match &f.content {
        Content::Comparison { comparison, .. } => {
            comparison.inputs.iter().any(|i| i.folder == name)
        }
        Content::Measurement { .. }
        | Content::Align { .. }
        | Content::Directivity { .. }
        | Content::Tuning { .. } => false,
    })
}

/// The report of `folders`, in the order given. `written_utc` is the time
/// to print as the report's date.
///
/// Page 1 is the answer for the first folder (a comparison's verdict and
/// its reverberation figure, or a measurement's key numbers, response and
/// decay). The evidence follows: each folder's plots with captions and its
/// octave-band tables. The appendix holds the one-third-octave tables, the
/// positions of any average in the report (tables only) and the method and
/// provenance of every folder.
pub fn render(folders: &[Folder], written_utc: &str, options: &Options) -> String {
    let mut out = String::with_capacity(1 << 20);
    let title = match folders {
        [one] => format!("Measurement report: {}", one.name),
        _ => format!("Measurement report: {} folders", folders.len()),
    };
    let _ = write!(
        out,
        "<!DOCTYPE html>\n<html lang=\"en\">\n<head>\n<meta charset=\"utf-8\">\n<meta name=\"viewport\" content=\"width=device-width, initial-scale=1\">\n<meta name=\"generator\" content=\"gliss {}\">\n<title>{}</title>\n<style>\n{}</style>\n</head>\n<body>\n",
        env!("CARGO_PKG_VERSION"),
        esc(&title),
        STYLE
    );
    let _ = write!(
        out,
        "<header class=\"report\"><p class=\"kicker\">gliss measurement report · written {} by gliss {}</p><h1>{}</h1></header>",
        esc(written_utc),
        env!("CARGO_PKG_VERSION"),
        esc(&title),
    );
    let mut counters = Counters::default();
    let positions: Vec<bool> = (0..folders.len())
        .map(|k| is_position(folders, k))
        .collect();
    // page 1: the answer
    if let Some(lead) = folders.first() {
        out.push_str("<section class=\"answer\" id=\"answer\">");
        match &lead.content {
            Content::Comparison {
                manifest,
                comparison,
            } => comparison_answer(
                &mut out,
                lead,
                manifest,
                comparison,
                options.target_rt.as_ref(),
                &mut counters,
            ),
            Content::Measurement { manifest, results } => {
                let _ = write!(
                    out,
                    "<p class=\"lede\"><span class=\"folder\">{}</span>: {}</p>",
                    esc(&lead.name),
                    esc(&manifest.source.description)
                );
                key_numbers(&mut out, lead, manifest, results);
                // a room for speech: its intelligibility is the answer
                if manifest.settings.profile == Some(crate::model::Profile::Speech) {
                    if let Some(line) = speech::answer_line(results) {
                        let _ = write!(
                            out,
                            "<p class=\"verdict\"><strong>Speech intelligibility:</strong> {}</p>",
                            esc(&line)
                        );
                    }
                }
                if let Some(t) = &options.target_rt {
                    out.push_str(&measurement_target(t, results));
                }
                impedance::parameters(&mut out, results, &mut counters);
                for p in lead_plots(lead, results) {
                    figure(&mut out, p, &caption(p, manifest, results), &mut counters);
                }
            }
            Content::Align {
                manifest,
                alignment,
            } => align::answer(&mut out, lead, manifest, alignment, &mut counters),
            Content::Directivity {
                manifest,
                directivity: file,
            } => directivity::answer(&mut out, lead, manifest, file, &mut counters),
            Content::Tuning { manifest, tuning } => {
                tuning::answer(&mut out, lead, manifest, tuning, &mut counters)
            }
        }
        out.push_str("</section>\n");
    }
    // contents, at the head of the evidence
    out.push_str("<nav class=\"contents\"><h2>Contents</h2><ol>");
    for (i, f) in folders.iter().enumerate() {
        if positions[i] {
            continue;
        }
        let (kind, what, nwarn) = match &f.content {
            Content::Measurement { manifest, results } => (
                if results.impedance.is_some() {
                    "impedance"
                } else if results.average.is_some() {
                    "average"
                } else {
                    "measurement"
                },
                manifest.source.description.clone(),
                results.warnings.len()
                    + results
                        .bands
                        .iter()
                        .map(|b| b.warnings.len())
                        .sum::<usize>(),
            ),
            Content::Comparison {
                manifest,
                comparison,
            } => (
                "comparison",
                comparison_title(manifest, comparison),
                comparison.warnings.len(),
            ),
            Content::Align {
                manifest,
                alignment,
            } => (
                "alignment",
                manifest.source.description.clone(),
                alignment.warnings.0.len(),
            ),
            Content::Directivity {
                manifest,
                directivity: file,
            } => (
                "directivity",
                manifest.source.description.clone(),
                file.directivity.warnings.len(),
            ),
            Content::Tuning { manifest, tuning } => {
                ("tuning", tuning::title(manifest), tuning.warnings.len())
            }
        };
        let _ = write!(
            out,
            "<li><a href=\"#m{}\"><span class=\"folder\">{}</span></a> <span class=\"tag\">{kind}</span> <span class=\"muted\">{}</span>{}</li>",
            i + 1,
            esc(&f.name),
            esc(&what),
            match nwarn {
                0 => String::new(),
                1 => " <span class=\"warn-count\">1 warning</span>".to_string(),
                n => format!(" <span class=\"warn-count\">{n} warnings</span>"),
            }
        );
    }
    let npos = positions.iter().filter(|p| **p).count();
    let _ = write!(
        out,
        "<li><a href=\"#appendix\">Appendix</a> <span class=\"muted\">one-third-octave tables{}, method and provenance</span></li></ol></nav>",
        if npos > 0 {
            format!(", the {npos} positions' tables")
        } else {
            String::new()
        }
    );
    // the evidence
    for (i, f) in folders.iter().enumerate() {
        if positions[i] {
            continue;
        }
        let _ = write!(
            out,
            "<section class=\"measurement\" id=\"m{}\"><h2><span class=\"num-label\">{}.</span> <span class=\"folder\">{}</span></h2>",
            i + 1,
            i + 1,
            esc(&f.name)
        );
        match &f.content {
            Content::Measurement { manifest, results } => {
                let compared = results.average.is_some() && is_compared(folders, &f.name);
                measurement(
                    &mut out,
                    f,
                    manifest,
                    results,
                    i == 0,
                    compared,
                    &mut counters,
                )
            }
            Content::Comparison {
                manifest,
                comparison,
            } => comparison_section(&mut out, f, manifest, comparison, &mut counters),
            Content::Align {
                manifest,
                alignment,
            } => align::section(&mut out, f, manifest, alignment, i == 0, &mut counters),
            Content::Directivity {
                directivity: file, ..
            } => directivity::section(&mut out, f, file, i == 0, &mut counters),
            Content::Tuning { tuning, .. } => {
                tuning::section(&mut out, f, tuning, i == 0, &mut counters)
            }
        }
        out.push_str("</section>\n");
    }
    // the appendix
    out.push_str("<section class=\"appendix\" id=\"appendix\"><h2>Appendix</h2><p class=\"muted\">The finer detail behind the answer: one-third-octave tables, the single positions, and how each folder was made, with the SHA-256 of its raw files.</p>");
    for (i, f) in folders.iter().enumerate() {
        if positions[i] {
            continue;
        }
        let _ = write!(
            out,
            "<div class=\"part\" id=\"a{}\"><h3><span class=\"num-label\">A{}.</span> <span class=\"folder\">{}</span></h3>",
            i + 1,
            i + 1,
            esc(&f.name)
        );
        match &f.content {
            Content::Measurement { manifest, results } => {
                let thirds: Vec<&BandResult> = results
                    .bands
                    .iter()
                    .filter(|b| b.fraction == Fraction::Third)
                    .collect();
                if results.average.is_some() && is_compared(folders, &f.name) {
                    out.push_str("<p class=\"muted\">Its values per one-third-octave band are in the comparison's appendix (T30) and in the folder's bands.csv (all).</p>");
                } else if !thirds.is_empty() {
                    band_table(&mut out, &thirds, Fraction::Third, &mut counters);
                }
                about(&mut out, f, manifest);
            }
            Content::Comparison {
                manifest,
                comparison,
            } => comparison_appendix(&mut out, f, manifest, comparison, &mut counters),
            Content::Align {
                manifest,
                alignment,
            } => align::appendix(&mut out, f, manifest, alignment),
            Content::Directivity {
                directivity: file, ..
            } => directivity::appendix(&mut out, file),
            Content::Tuning { manifest, tuning } => tuning::appendix(&mut out, f, manifest, tuning),
        }
        out.push_str("</div>");
    }
    if npos > 0 {
        positions_appendix(&mut out, folders, &positions, &mut counters);
    }
    out.push_str("</section>\n");
    let _ = write!(
        out,
        "<footer><p>Made with gliss {}. Values that could not be measured honestly are shown as — with the reason beside them, never estimated.</p></footer>\n</body>\n</html>\n",
        env!("CARGO_PKG_VERSION")
    );
    out
}

/// The plots of a measurement's first page: its response and its decay
/// (an average has no decay: its reverberation time per band instead; an
/// impedance folder shows its impedance, then the driver channel's
/// response).
fn lead_plots<'a>(f: &'a Folder, r: &Results) -> Vec<&'a Plot> {
    let (first, second) = if r.impedance.is_some() {
        (PlotKind::Impedance.file(), PlotKind::Response.file())
    } else if r.average.is_some() {
        (
            PlotKind::Response.file(),
            PlotKind::AverageReverberation.file(),
        )
    } else {
        (PlotKind::Response.file(), PlotKind::Decay.file())
    };
    [first, second]
        .iter()
        .filter_map(|file| f.plots.iter().find(|p| p.file == *file))
        .collect()
}

/// The positions of the report's averages: each one's octave-band table
/// and its raw files with their SHA-256, no plots (they are in each
/// position's plots folder).
fn positions_appendix(out: &mut String, folders: &[Folder], positions: &[bool], n: &mut Counters) {
    out.push_str("<div class=\"part\" id=\"positions\"><h3>The positions</h3><p class=\"muted\">Each microphone position averaged above, octave bands; their plots and one-third-octave values are in each folder (plots/, bands.csv).</p><div class=\"grid2 positions\">");
    for (i, f) in folders.iter().enumerate() {
        if !positions[i] {
            continue;
        }
        let Content::Measurement { manifest, results } = &f.content else {
            continue;
        };
        let _ = write!(
            out,
            "<div class=\"position\" id=\"m{}\"><h4><span class=\"folder\">{}</span> <span class=\"muted\">{}</span></h4>",
            i + 1,
            esc(&f.name),
            esc(&manifest.source.description)
        );
        let octaves: Vec<&BandResult> = results
            .bands
            .iter()
            .filter(|b| b.fraction == Fraction::Octave)
            .collect();
        if !octaves.is_empty() {
            band_table(out, &octaves, Fraction::Octave, n);
        }
        out.push_str("</div>");
    }
    out.push_str("</div><table class=\"files\"><caption>The positions' raw files and their SHA-256</caption><thead><tr><th scope=\"col\">Position</th><th scope=\"col\">File</th><th scope=\"col\">SHA-256 (manifest)</th><th scope=\"col\">Check</th></tr></thead><tbody>");
    for (i, f) in folders.iter().enumerate() {
        if !positions[i] {
            continue;
        }
        for c in f.files.iter().filter(|c| c.entry.role == FileRole::Raw) {
            let (class, words) = file_state(c.state);
            let _ = write!(
                out,
                "<tr><td class=\"file\">{}</td><td class=\"file\">{}</td><td class=\"hash\">{}</td><td class=\"{class}\">{words}</td></tr>",
                esc(&f.name),
                esc(&c.entry.name),
                esc(&c.entry.sha256)
            );
        }
    }
    out.push_str("</tbody></table></div>");
}

/// A file check as a CSS class and words.
fn file_state(s: FileState) -> (&'static str, &'static str) {
    match s {
        FileState::Matches => ("ok", "matches"),
        FileState::Differs => ("bad", "differs"),
        FileState::Missing => ("bad", "missing"),
    }
}

/// A comparison's first page: the question, the verdict in words, the
/// headline counts and the reverberation figure.
fn comparison_answer(
    out: &mut String,
    f: &Folder,
    manifest: &ComparisonManifest,
    c: &Comparison,
    target: Option<&RtTarget>,
    n: &mut Counters,
) {
    let names: Vec<&str> = c.inputs.iter().map(|i| i.name()).collect();
    let _ = write!(
        out,
        "<p class=\"question\"><strong>The question:</strong> what changed from <em>{}</em> to <em>{}</em>? {}<br><span class=\"muted\">Comparison <span class=\"folder\">{}</span>, made {}{}.</span></p>",
        esc(names.first().copied().unwrap_or("the reference")),
        esc(&names[1.min(names.len().saturating_sub(1))..].join(", ")),
        esc(&comparison_title(manifest, c)),
        esc(&f.name),
        esc(&manifest.created_utc),
        c.volume_m3
            .map(|v| format!("; room volume {} m³", num(v, 1)))
            .unwrap_or_default()
    );
    for i in 1..c.inputs.len() {
        if c.inputs.len() > 2 {
            let _ = write!(out, "<h3>{} against {}</h3>", esc(names[i]), esc(names[0]));
        }
        out.push_str("<div class=\"verdict\"><h3>The verdict</h3><ul>");
        for s in answer::verdict_sentences(c, i) {
            let _ = write!(out, "<li>{}</li>", esc(&s));
        }
        if let Some(t) = target {
            for k in [0, i] {
                if k == 0 && i > 1 {
                    continue; // the reference is judged once, with the first
                }
                let who = format!("{}: ", names[k]);
                if let Some(s) =
                    answer::target_sentence(&who, t, &answer::target_judgements(c, t, k))
                {
                    let _ = write!(out, "<li>{}</li>", esc(&s));
                }
            }
        }
        out.push_str("</ul></div>");
    }
    if let Some(svg) = answer::reverberation_svg(c, target) {
        n.figure += 1;
        let _ = write!(
            out,
            "<figure class=\"svg\">{svg}<figcaption><span class=\"fig\">Figure {}.</span> Reverberation time T30 per octave band, {}. Bars: ± twice each value's standard uncertainty (for an average, from the spread over its positions: their standard deviation / √n); a ring marks an audible change (beyond the just-noticeable difference and the uncertainty){}.</figcaption></figure>",
            n.figure,
            esc(&names.join(" and ")),
            target
                .map(|t| format!(
                    "; the shaded band is the target range, {}",
                    esc(&t.describe())
                ))
                .unwrap_or_default()
        );
    }
    // the counts per quantity after the figure, one row each, so page 1
    // holds the verdict, the figure and the counts
    for i in 1..c.inputs.len() {
        let _ = write!(
            out,
            "<table class=\"counts\"><caption>Audible changes per quantity over the octave bands{}: beyond the just-noticeable difference and twice the uncertainty</caption><thead><tr><th scope=\"col\">Quantity</th><th scope=\"col\">Audible change in</th><th scope=\"col\">Way</th><th scope=\"col\">No audible change at</th></tr></thead><tbody>",
            if c.inputs.len() > 2 {
                format!(", {} against {}", esc(names[i]), esc(names[0]))
            } else {
                String::new()
            }
        );
        for h in answer::headline_rows(c, i) {
            let _ = write!(
                out,
                "<tr><th scope=\"row\">{}</th><td>{}</td><td>{}</td><td>{}</td></tr>",
                esc(h.parameter.label()),
                if h.audible == 0 {
                    format!("none of the {} octave bands", h.measured)
                } else {
                    h.count()
                },
                h.way.as_deref().unwrap_or("—"),
                if h.not_at.is_empty() {
                    "—".to_string()
                } else {
                    esc(&h
                        .not_at
                        .iter()
                        .map(|f| hz(*f))
                        .collect::<Vec<_>>()
                        .join(", "))
                }
            );
        }
        out.push_str("</tbody></table>");
        if let Some(s) = answer::not_compared(c, i) {
            let _ = write!(out, "<p class=\"muted\">{}</p>", esc(&s));
        }
    }
    if !c.warnings.is_empty() {
        let _ = write!(
            out,
            "<p class=\"todo\"><strong>{} warning{}</strong> about this comparison: see section 1.</p>",
            c.warnings.len(),
            if c.warnings.len() == 1 { "" } else { "s" }
        );
    }
}

/// A comparison's one-line description.
fn comparison_title(manifest: &ComparisonManifest, c: &Comparison) -> String {
    match Some(manifest.source.description.as_str()).filter(|d| !d.is_empty()) {
        Some(t) => t.to_string(),
        None => format!(
            "comparison of {}",
            c.inputs
                .iter()
                .map(|i| i.name().to_string())
                .collect::<Vec<_>>()
                .join(", ")
        ),
    }
}

/// A key number: label, value, note.
fn key(out: &mut String, label: &str, value: &str, note: &str) {
    let _ = write!(
        out,
        "<div class=\"key\"><dt>{}</dt><dd><span class=\"value\">{}</span>{}</dd></div>",
        esc(label),
        esc(value),
        if note.is_empty() {
            String::new()
        } else {
            format!("<span class=\"note\">{}</span>", esc(note))
        }
    );
}

/// Tmid of a folder's octave bands: the mean of T30 at 500 Hz and 1 kHz.
fn tmid(r: &Results) -> Option<f64> {
    let at = |f: f64| {
        r.bands
            .iter()
            .find(|b| b.is(Fraction::Octave, f))
            .and_then(|b| b.get(Parameter::T30))
    };
    Some((at(500.0)? + at(1000.0)?) / 2.0)
}

/// A measurement's T30 per octave judged against the target, as a
/// paragraph (empty when it has no octave T30 where the target has limits).
fn measurement_target(t: &RtTarget, r: &Results) -> String {
    let positions = r.average.as_ref().map_or(1, |a| a.positions);
    let judged: Vec<_> = r
        .bands
        .iter()
        .filter(|b| b.fraction == Fraction::Octave)
        .filter_map(|b| {
            let v = b.get(Parameter::T30)?;
            t.judge(
                b.center_hz,
                v,
                b.standard_uncertainty(Parameter::T30, positions),
            )
        })
        .collect();
    match answer::target_sentence("", t, &judged) {
        Some(s) => format!("<p class=\"verdict\">{}</p>", esc(&s)),
        None => format!(
            "<p class=\"todo\">{}</p>",
            esc(&format!(
                "The target ({}) could not be judged: this folder has no octave-band T30 where the target gives limits.",
                t.describe()
            ))
        ),
    }
}

/// A measurement's or an average's key numbers. An average shows no delay
/// or levels (the positions stand at different distances: their mean
/// means nothing) but how many positions it holds.
fn key_numbers(out: &mut String, f: &Folder, m: &Manifest, r: &Results) {
    let _ = f;
    out.push_str("<dl class=\"keys\">");
    let fs = f64::from(r.sample_rate_hz);
    match &r.average {
        Some(a) => key(
            out,
            "Positions",
            &a.positions.to_string(),
            &format!(
                "{} source position{}; ISO 3382-2 grade: {}",
                a.sources,
                if a.sources == 1 { "" } else { "s" },
                a.grade
            ),
        ),
        None => {
            // an impedance folder's driver channel has a delay of no use
            // to anyone: its answer is the impedance
            if m.kind != Some(crate::folder::schema::FolderKind::Impedance) {
                key(
                    out,
                    "Delay",
                    &format!("{} ms", num(r.delay_s * 1e3, 3)),
                    &format!(
                        "{} samples; from the {}",
                        num(r.delay_s * fs, 2),
                        r.delay_reference
                            .split(';')
                            .next()
                            .unwrap_or(&r.delay_reference)
                    ),
                );
            }
            key(
                out,
                "Recording peak",
                &format!("{} dBFS", num(r.peak_dbfs, 1)),
                "0 dBFS = a full-scale sine",
            );
            key(
                out,
                "Peak to noise",
                &format!("{} dB", num(r.peak_to_noise_db, 0)),
                "impulse response peak over its noise",
            );
        }
    }
    if let Some(m) = r.average.as_ref().and_then(|a| a.sti.as_ref()) {
        key(
            out,
            "STI",
            &format!("{:.2}", m.mean),
            &speech::spatial_words(m),
        );
    }
    if let Some(t) = tmid(r) {
        key(
            out,
            "Tmid",
            &Parameter::T30.show_with_unit(t),
            "T30 averaged over the 500 Hz and 1 kHz octaves",
        );
    }
    if let Some(b) = &r.broadband {
        let band = format!(
            "over the whole sweep band, {}–{}",
            hz(m.sweep.params.start_hz),
            hz(m.sweep.params.end_hz)
        );
        let profile = m.settings.profile.unwrap_or_default();
        let leading = [Parameter::T30, Parameter::Edt]
            .into_iter()
            .chain(profile.clarity_parameters().iter().copied());
        for p in leading {
            let label = p.label();
            match b.get(p) {
                Some(v) => key(out, label, &p.show_with_unit(v), &band),
                None => key(
                    out,
                    label,
                    "—",
                    advice::reason_for(&b.warnings, label)
                        .map(advice::without_label)
                        .unwrap_or("not measured"),
                ),
            }
        }
    }
    match &r.response.gate {
        Some(g) => key(
            out,
            "Gate",
            &format!(
                "{} to {} ms",
                num(g.start_s * 1e3, 2),
                num(g.end_s * 1e3, 2)
            ),
            &format!(
                "{}around the impulse peak; the response holds from {} to {}",
                if g.auto {
                    "found automatically before the first reflection, "
                } else {
                    ""
                },
                hz(g.resolution_hz),
                hz(g.resolved_to_hz)
            ),
        ),
        // an impedance is taken from the whole response, with no room in it
        None if r.impedance.is_some() => {}
        None if r.average.is_none() => key(
            out,
            "Gate",
            "none",
            "the whole impulse response, room included",
        ),
        None => {}
    }
    key(
        out,
        "Smoothing",
        &match r.response.smoothing {
            crate::analysis::Smoothing::None => "none".to_string(),
            s => format!("{s} octave"),
        },
        "of the frequency response",
    );
    out.push_str("</dl>");
}

/// The evidence of one measurement or average: its key numbers (unless
/// page 1 showed them), warnings, plots and octave-band table.
fn measurement(
    out: &mut String,
    f: &Folder,
    m: &Manifest,
    r: &Results,
    lead: bool,
    compared: bool,
    n: &mut Counters,
) {
    let _ = write!(out, "<p class=\"lede\">{}</p>", esc(&m.source.description));
    if !lead {
        key_numbers(out, f, m, r);
    }
    warnings(out, &r.warnings, &r.bands, f);

    // plots
    let shown: Vec<&Plot> = if lead { lead_plots(f, r) } else { Vec::new() };
    if compared && !f.plots.is_empty() {
        out.push_str("<p class=\"muted\">Its response and reverberation time are drawn with the other condition's in the comparison's figures above; its own plots are in the folder's plots/.</p>");
    } else if f.plots.is_empty() {
        out.push_str(
            "<h3>Plots</h3><p class=\"muted\">This folder has no plots (it was analysed with --no-plots, or by a gliss built without plots).</p>",
        );
    } else if f.plots.len() > shown.len() {
        out.push_str("<h3>Plots</h3>");
        for p in &f.plots {
            if !shown.iter().any(|s| std::ptr::eq(*s, p)) {
                figure(out, p, &caption(p, m, r), n);
            }
        }
    }

    // an impedance's parameters (page 1 shows the lead's)
    if r.impedance.is_some() {
        if !lead {
            impedance::parameters(out, r, n);
        }
    } else if r.bands.is_empty() {
        out.push_str("<h3>Bands</h3><p class=\"muted\">No band parameters: this measurement was analysed without bands (the speaker profile's default, or --no-bands).</p>");
    } else {
        out.push_str("<h3>Reverberation and energy parameters per octave band</h3><p class=\"muted\">ISO 3382-1 parameters from the impulse response. EDT, T20 and T30 are decay times extrapolated to 60 dB; C50 and C80 the early-to-late energy ratios; D50 the share of energy in the first 50 ms; Ts the centre time; INR the decay's start above the noise. — marks a value that could not be measured; the note says why. One-third-octave bands are in the appendix.</p>");
        let rows: Vec<&BandResult> = r
            .bands
            .iter()
            .filter(|b| b.fraction == Fraction::Octave)
            .collect();
        if !rows.is_empty() {
            band_table(out, &rows, Fraction::Octave, n);
        }
    }
    speech::section(out, r, &mut n.table);
}

/// Warnings in plain words, grouped, with what to do.
fn warnings(out: &mut String, general: &[Warning], bands: &[BandResult], f: &Folder) {
    let mut all: Vec<Warning> = general.to_vec();
    all.extend(
        f.notes
            .iter()
            .map(|n| Warning::new(Code::FileUnreadable, n.clone())),
    );
    for c in &f.files {
        match c.state {
            FileState::Matches => {}
            FileState::Differs => all.push(Warning::new(
                Code::FileChanged,
                format!(
                    "{} differs from the file the analysis wrote or read (its SHA-256 does not match the manifest)",
                    c.entry.name
                ),
            )),
            FileState::Missing => all.push(Warning::new(
                Code::FileMissing,
                format!(
                    "{} is missing from the folder though the manifest lists it",
                    c.entry.name
                ),
            )),
        }
    }
    let groups = advice::group(&all, bands);
    out.push_str("<h3>Warnings</h3>");
    if groups.is_empty() {
        out.push_str("<p class=\"ok\">No warnings: every check of the analysis passed.</p>");
        return;
    }
    for g in groups {
        let _ = write!(out, "<div class=\"warning\"><h4>{}</h4><ul>", esc(g.title));
        for w in &g.items {
            let _ = write!(out, "<li>{}</li>", esc(&plain(w)));
        }
        out.push_str("</ul>");
        if !g.advice.is_empty() {
            let _ = write!(
                out,
                "<p class=\"todo\"><strong>What to do:</strong> {}</p>",
                esc(g.advice)
            );
        }
        out.push_str("</div>");
    }
}

/// A warning with the pointers into results.json put in words.
fn plain(w: &str) -> String {
    w.replace("; see bands[].warnings", "; the bands are listed here")
        .replace(
            "bands[].warnings says which and why",
            "the band tables say which and why",
        )
        .replace("results.json marks it", "the results mark it")
}

/// A figure with its caption.
fn figure(out: &mut String, p: &Plot, caption: &str, n: &mut Counters) {
    n.figure += 1;
    let data = base64::engine::general_purpose::STANDARD.encode(&p.png);
    let size = png_size(&p.png)
        .map(|(w, h)| format!(" width=\"{w}\" height=\"{h}\""))
        .unwrap_or_default();
    let _ = write!(
        out,
        "<figure><img src=\"data:image/png;base64,{data}\"{size} alt=\"{}\"><figcaption><span class=\"fig\">Figure {}.</span> {} <span class=\"file\">{}</span></figcaption></figure>",
        esc(caption),
        n.figure,
        esc(caption),
        esc(&p.file)
    );
}

/// What a measurement's (or an average's) plot shows, in words.
fn caption(p: &Plot, m: &Manifest, r: &Results) -> String {
    let kinds: &[PlotKind] = if r.average.is_some() {
        &PlotKind::AVERAGE
    } else {
        &PlotKind::MEASUREMENT
    };
    let smoothing = r.response.smoothing.words();
    let facts = CaptionFacts {
        smoothing: &smoothing,
        magnitude_reference: &r.response.magnitude_reference,
        gate_hz: r.response.gate.map(|g| (g.resolution_hz, g.resolved_to_hz)),
        delay_s: r.delay_s,
        harmonics: m.settings.harmonics,
        ..CaptionFacts::default()
    };
    PlotKind::from_file_among(&p.file, kinds)
        .map_or_else(|| unknown_caption(&p.file), |k| k.caption(&facts))
}

/// One table of bands with notes for missing and doubtful values.
fn band_table(out: &mut String, rows: &[&BandResult], fraction: Fraction, n: &mut Counters) {
    n.table += 1;
    let mut notes: Vec<String> = Vec::new();
    let mut note = |text: &str| -> usize {
        match notes.iter().position(|t| t == text) {
            Some(i) => i + 1,
            None => {
                notes.push(text.to_string());
                notes.len()
            }
        }
    };
    let _ = write!(
        out,
        "<table class=\"bands\" data-fraction=\"{}\"><caption>Table {}. Per {} band</caption><thead><tr><th scope=\"col\">Band</th>",
        esc(fraction.code()),
        n.table,
        fraction.words()
    );
    for p in Parameter::ALL {
        let (label, unit) = (p.label(), p.info().display_unit);
        let _ = write!(
            out,
            "<th scope=\"col\" class=\"num\">{label}{}</th>",
            if unit.is_empty() {
                String::new()
            } else {
                format!(" <span class=\"unit\">({unit})</span>")
            }
        );
    }
    out.push_str("</tr></thead><tbody>");
    for b in rows {
        let mut cells = String::new();
        let mut used: Vec<&str> = Vec::new();
        for p in Parameter::ALL {
            let keyname = p.key();
            match b.get(p) {
                Some(v) => {
                    let _ = write!(
                        cells,
                        "<td class=\"num\" data-key=\"{keyname}\">{}</td>",
                        p.show(v)
                    );
                }
                None => {
                    let reason = advice::reason_for(&b.warnings, p.label());
                    if let Some(r) = reason {
                        used.push(r);
                    }
                    let k = note(reason.map_or("not measured (no reason recorded)", |r| {
                        advice::without_label(r)
                    }));
                    let _ = write!(
                        cells,
                        "<td class=\"num missing\" data-key=\"{keyname}\">—<sup>{k}</sup></td>"
                    );
                }
            }
        }
        // warnings that withheld nothing (a curved decay) mark the band
        let marks: Vec<String> = b
            .warnings
            .iter()
            .filter(|w| !used.contains(&w.message.as_str()))
            .map(|w| note(advice::without_label(&w.message)).to_string())
            .collect();
        let _ = write!(
            out,
            "<tr data-center-hz=\"{}\" data-fraction=\"{}\"><th scope=\"row\">{}{}</th>{cells}</tr>",
            b.center_hz,
            esc(b.fraction.code()),
            esc(&hz(b.center_hz)),
            if marks.is_empty() {
                String::new()
            } else {
                format!("<sup>{}</sup>", marks.join(","))
            }
        );
    }
    out.push_str("</tbody></table>");
    if !notes.is_empty() {
        out.push_str("<ol class=\"notes\">");
        for t in &notes {
            let _ = write!(out, "<li>{}</li>", esc(t));
        }
        out.push_str("</ol>");
    }
}

/// What was measured, where and how; the raw files and their hashes.
fn about(out: &mut String, f: &Folder, m: &Manifest) {
    out.push_str("<table class=\"facts\"><caption>What was measured, and how</caption><tbody>");
    let mut row = |k: &str, v: &str| fact_row(out, k, v);
    row("Folder", &f.name);
    row(
        "Source",
        &format!("{} ({})", m.source.description, source_kind(&m.source.kind)),
    );
    if let Some(p) = &m.source.recording_path {
        row("Recording given", p);
    }
    if let Some(p) = &m.source.sweep_path {
        row("Sweep given", p);
    }
    if let Some(d) = &m.measurement {
        row("Device", &d.device);
        row("Streams", &d.stream);
        row(
            "Output channels",
            &d.output_channels
                .iter()
                .map(|c| c.to_string())
                .collect::<Vec<_>>()
                .join(", "),
        );
        if let Some(r) = d.reference_channel {
            row("Loopback reference", &format!("input {r}"));
        }
        row(
            "Sweeps averaged",
            &format!("{} (gap {} s)", d.repeat, trim(d.gap_s, 3)),
        );
        row(
            "Lost samples",
            &if d.lost_frames == 0 && d.interruptions == 0 {
                "none".to_string()
            } else {
                format!(
                    "{} frames dropped, {} overruns, underruns or driver errors (the measurement is not valid)",
                    d.lost_frames, d.interruptions
                )
            },
        );
    }
    row("Measured", &m.created_utc);
    let s = &m.sweep;
    if m.source.kind == "impulse" {
        row(
            "Sweep",
            &format!(
                "none: an impulse response was analysed as it is, over {}–{}",
                hz(s.params.start_hz),
                hz(s.params.end_hz)
            ),
        );
    } else {
        row(
            "Sweep",
            &format!(
                "exponential, {}–{}, {} s (asked {} s) then {} s of silence, peak {} dBFS",
                hz(s.params.start_hz),
                hz(s.params.end_hz),
                num(s.length_s, 3),
                trim(s.params.requested_length_s, 3),
                trim(s.params.tail_s, 3),
                trim(s.params.level_dbfs, 1)
            ),
        );
    }
    row("Sample rate", &format!("{} Hz", m.sample_rate_hz));
    row(
        "Channel",
        &format!(
            "{} of {} ({})",
            m.channel, m.recording_channels, m.recording_encoding
        ),
    );
    let st = &m.settings;
    let mut settings = vec![
        format!("smoothing {}", st.smoothing),
        if st.harmonics > 1 {
            format!("harmonics 2 to {}", st.harmonics)
        } else {
            "no harmonics".to_string()
        },
        if st.bands { "bands" } else { "no bands" }.to_string(),
        if st.plots { "plots" } else { "no plots" }.to_string(),
    ];
    if let Some(v) = st.volts_per_fs {
        settings.push(format!("{} V RMS at full scale", trim(v, 4)));
    }
    if let Some(d) = st.distance_m {
        settings.push(format!("microphone at {} m", trim(d, 3)));
    }
    row("Settings", &settings.join(", "));
    if let Some(c) = &st.calibration {
        row("Calibration", &format!("{} (SHA-256 {})", c.name, c.sha256));
    }
    if let Some(c) = &st.mic_correction {
        row(
            "Microphone correction",
            &format!("{} (SHA-256 {})", c.name, c.sha256),
        );
    }
    row("Tool", &format!("{} {}", m.tool, m.tool_version));
    row("Command", &m.command_line.join(" "));
    for p in &m.problems {
        row("Problem", p);
    }
    out.push_str("</tbody></table>");
    files_table(out, f, FileRole::Raw);
}

fn source_kind(k: &str) -> &str {
    match k {
        "virtual" => "simulated by gliss demo, not a real measurement",
        "file" => "a recording analysed with gliss analyze",
        "device" => "measured through a sound card with gliss measure",
        other => other,
    }
}

/// The files of `role` with their SHA-256 and whether they still match.
fn files_table(out: &mut String, f: &Folder, role: FileRole) {
    let files: Vec<&FileCheck> = f.files.iter().filter(|c| c.entry.role == role).collect();
    if files.is_empty() {
        return;
    }
    let _ = write!(
        out,
        "<table class=\"files\"><caption>The {} files and their SHA-256</caption><thead><tr><th scope=\"col\">File</th><th scope=\"col\">SHA-256 (manifest)</th><th scope=\"col\">Check</th></tr></thead><tbody>",
        if role == FileRole::Raw {
            "raw"
        } else {
            "input"
        }
    );
    for c in files {
        let (class, words) = match c.state {
            FileState::Matches => ("ok", "matches"),
            FileState::Differs => ("bad", "differs"),
            FileState::Missing => ("bad", "missing"),
        };
        let _ = write!(
            out,
            "<tr><td class=\"file\">{}</td><td class=\"hash\">{}</td><td class=\"{class}\">{words}</td></tr>",
            esc(&c.entry.name),
            esc(&c.entry.sha256)
        );
    }
    out.push_str("</tbody></table>");
}

/// The evidence of a comparison folder: its warnings, plots with captions
/// and the octave-band tables of every compared quantity.
fn comparison_section(
    out: &mut String,
    f: &Folder,
    manifest: &ComparisonManifest,
    c: &Comparison,
    n: &mut Counters,
) {
    let _ = write!(
        out,
        "<p class=\"lede\">{}</p>",
        esc(&comparison_title(manifest, c))
    );
    warnings(out, &c.warnings, &[], f);
    if !f.plots.is_empty() {
        out.push_str("<h3>Plots</h3>");
        for p in &f.plots {
            let names = c
                .inputs
                .iter()
                .map(|i| i.name().to_string())
                .collect::<Vec<_>>()
                .join(", ");
            let facts = CaptionFacts {
                inputs: &names,
                reference: c.inputs.first().map_or("the first", |i| i.name()),
                ..CaptionFacts::default()
            };
            let text = PlotKind::from_file_among(&p.file, &PlotKind::COMPARISON)
                .map_or_else(|| unknown_caption(&p.file), |k| k.caption(&facts));
            figure(out, p, &text, n);
        }
    }
    if c.bands.is_empty() {
        out.push_str(
            "<h3>Band by band</h3><p class=\"muted\">The comparison holds no band parameters.</p>",
        );
    } else {
        out.push_str("<h3>The changes band by band</h3><p class=\"muted\">Each change against the reference, judged by gliss compare against the just-noticeable difference (JND) of ISO 3382-1 Annex A and against twice the measurement's own combined uncertainty: \"audible\" means beyond both (or beyond the JND where no uncertainty was estimated, as marked); \"real\" means beyond the uncertainty. The one-third-octave bands and the whole-band values are in the appendix.</p>");
        comparison::tables(out, c, Fraction::Octave, &mut n.table);
    }
    comparison::absorption(out, c, Fraction::Octave, &mut n.table);
}

/// A comparison's appendix: its one-third-octave and whole-band tables,
/// the compared folders with their hashes, and how it was made.
fn comparison_appendix(
    out: &mut String,
    f: &Folder,
    manifest: &ComparisonManifest,
    c: &Comparison,
    n: &mut Counters,
) {
    comparison::tables_of(out, c, Fraction::Third, &[Parameter::T30], &mut n.table);
    out.push_str("<p class=\"muted\">The other quantities per one-third-octave band, the values over the whole sweep band and the absorption per one-third-octave band are in the folder's comparison.csv and comparison.json.</p>");
    out.push_str("<table class=\"files\"><caption>The compared measurements</caption><thead><tr><th scope=\"col\">#</th><th scope=\"col\">Label</th><th scope=\"col\">Folder</th><th scope=\"col\">SHA-256 (as recorded)</th></tr></thead><tbody>");
    for (i, input) in c.inputs.iter().enumerate() {
        let _ = write!(
            out,
            "<tr><td>{}</td><td>{}{}</td><td class=\"file\">{}</td><td class=\"hash\">{}</td></tr>",
            i + 1,
            esc(&input.label),
            if i == 0 {
                " <span class=\"muted\">(reference)</span>"
            } else {
                ""
            },
            esc(&input.folder),
            esc(if input.sha256.is_empty() {
                "—"
            } else {
                &input.sha256
            })
        );
    }
    out.push_str("</tbody></table>");
    out.push_str("<table class=\"facts\"><caption>How the comparison was made</caption><tbody>");
    let mut row = |k: &str, v: &str| fact_row(out, k, v);
    row("Folder", &f.name);
    row("Made", &manifest.created_utc);
    row(
        "Tool",
        &format!("{} {}", manifest.tool, manifest.tool_version),
    );
    if !manifest.command_line.is_empty() {
        row("Command", &manifest.command_line.join(" "));
    }
    for k in &c.criteria {
        row("Criterion", k);
    }
    out.push_str("</tbody></table>");
}

/// One row of a facts table: the fact and its value, escaped.
fn fact_row(out: &mut String, k: &str, v: &str) {
    let _ = write!(
        out,
        "<tr><th scope=\"row\">{}</th><td>{}</td></tr>",
        esc(k),
        esc(v)
    );
}

/// The style sheet: screen and print.
const STYLE: &str = r#":root {
  --ink: #1e2428; --muted: #5d666d; --rule: #d5dadd; --panel: #f4f6f7;
  --accent: #1d4f7a; --warn: #8a5300; --warn-bg: #fbf4e6; --bad: #9b2c2c; --good: #2f6b3a;
}
* { box-sizing: border-box; }
html { font-size: 15px; }
body { margin: 0 auto; max-width: 64rem; padding: 2rem 2.2rem 3rem; color: var(--ink); background: #fff;
  font-family: "DejaVu Sans", "Noto Sans", "Liberation Sans", system-ui, sans-serif; line-height: 1.45; }
h1, h2, h3, h4 { line-height: 1.2; font-weight: 600; }
h1 { font-size: 1.75rem; margin: 0.2rem 0 0.6rem; }
h2 { font-size: 1.4rem; margin: 2.6rem 0 0.4rem; padding-bottom: 0.3rem; border-bottom: 2px solid var(--accent); }
h3 { font-size: 1.1rem; margin: 1.8rem 0 0.6rem; color: var(--accent); }
h4 { font-size: 1rem; margin: 1.2rem 0 0.4rem; }
p { margin: 0.4rem 0 0.8rem; }
a { color: var(--accent); }
.kicker { margin: 0; text-transform: uppercase; letter-spacing: 0.12em; font-size: 0.75rem; color: var(--muted); }
.muted, .note, .unit { color: var(--muted); }
.lede { font-size: 1.05rem; margin-top: 0.2rem; }
.folder, .file, .hash { font-family: "DejaVu Sans Mono", "Noto Sans Mono", monospace; }
.folder { font-size: 0.95em; }
.num-label { color: var(--muted); font-weight: 400; }
nav.contents { margin-top: 1.2rem; padding: 0.8rem 1.2rem; background: var(--panel); border-left: 3px solid var(--accent); }
nav.contents h2 { font-size: 1rem; margin: 0 0 0.4rem; border: 0; padding: 0; }
nav.contents ol { margin: 0; padding-left: 1.4rem; }
nav.contents li { margin: 0.2rem 0; }
.tag { font-size: 0.75rem; padding: 0.05rem 0.4rem; border: 1px solid var(--rule); border-radius: 3px; color: var(--muted); }
.warn-count { font-size: 0.8rem; color: var(--warn); }
dl.keys { display: grid; grid-template-columns: repeat(auto-fit, minmax(12rem, 1fr)); gap: 0.6rem; margin: 0; }
.key { border: 1px solid var(--rule); border-radius: 4px; padding: 0.5rem 0.7rem; break-inside: avoid; }
.key dt { font-size: 0.78rem; text-transform: uppercase; letter-spacing: 0.06em; color: var(--muted); }
.key dd { margin: 0.1rem 0 0; }
.key .value { display: block; font-size: 1.3rem; font-weight: 600; font-variant-numeric: tabular-nums; }
.key .note { display: block; font-size: 0.78rem; line-height: 1.3; }
.warning { border-left: 3px solid var(--warn); background: var(--warn-bg); padding: 0.4rem 1rem 0.5rem; margin: 0.7rem 0; break-inside: avoid; }
.warning h4 { margin: 0.3rem 0; color: var(--warn); }
.warning ul { margin: 0.2rem 0; padding-left: 1.2rem; font-size: 0.9rem; }
.warning .todo { margin: 0.4rem 0 0.2rem; font-size: 0.9rem; }
p.ok { color: var(--good); }
figure { margin: 1.2rem 0 1.6rem; break-inside: avoid; }
figure img { display: block; width: 100%; height: auto; border: 1px solid var(--rule); }
figcaption { font-size: 0.88rem; margin-top: 0.4rem; color: var(--ink); }
figcaption .fig { font-weight: 600; }
figcaption .file { color: var(--muted); font-size: 0.8rem; margin-left: 0.3rem; }
table { border-collapse: collapse; width: 100%; margin: 0.6rem 0 1.2rem; font-size: 0.88rem; break-inside: avoid; }
caption { text-align: left; font-weight: 600; padding: 0 0 0.4rem; }
th, td { padding: 0.22rem 0.5rem; border-bottom: 1px solid var(--rule); text-align: left; vertical-align: top; }
thead th { border-bottom: 2px solid var(--ink); font-weight: 600; white-space: nowrap; }
tbody th { font-weight: 600; white-space: nowrap; }
td.nowrap { white-space: nowrap; }
.num { text-align: right; font-variant-numeric: tabular-nums; }
table.bands tbody tr:nth-child(even) { background: var(--panel); }
td.missing { color: var(--muted); }
sup { font-size: 0.7em; color: var(--warn); margin-left: 0.1em; }
ol.notes { font-size: 0.82rem; color: var(--muted); margin: -0.6rem 0 1.4rem; padding-left: 1.6rem; break-inside: avoid; }
table.facts th { width: 12rem; color: var(--muted); font-weight: 400; }
table.files td.hash { font-size: 0.78rem; word-break: break-all; }
td.ok { color: var(--good); } td.bad { color: var(--bad); font-weight: 600; }
td.verdict { font-size: 0.85rem; }
table.counts { font-size: 0.8rem; margin: 0.3rem 0 0.6rem; }
table.counts caption { font-size: 0.8rem; }
table.counts th, table.counts td { padding: 0.1rem 0.4rem; }
td.verdict.audible { color: var(--bad); font-weight: 600; }
td.verdict.unsure, td.verdict.small { color: var(--warn); }
td.verdict.none, td.verdict.na { color: var(--muted); }
.question { font-size: 1.05rem; margin: 0.4rem 0 0.6rem; }
.verdict { border-left: 3px solid var(--accent); padding: 0.1rem 0 0.1rem 0.9rem; margin: 0.6rem 0; }
.verdict h3 { margin: 0.3rem 0; }
.verdict h4 { margin: 0.5rem 0 0.2rem; color: var(--muted); font-weight: 600; }
.verdict ul { margin: 0.2rem 0; padding-left: 1.2rem; }
.verdict li { margin: 0.15rem 0; }
figure.svg svg { display: block; width: 100%; height: auto; }
.grid2 { display: grid; grid-template-columns: repeat(auto-fit, minmax(20rem, 1fr)); gap: 0 1.2rem; align-items: start; }
.grid2 table { margin: 0.3rem 0 0.8rem; }
section.appendix table { font-size: 0.8rem; }
td.file { overflow-wrap: anywhere; }
.grid2 thead th { white-space: normal; }
.grid2 td.verdict { font-size: 0.95em; line-height: 1.2; }
.hash { word-break: break-all; }
footer { margin-top: 3rem; padding-top: 0.6rem; border-top: 1px solid var(--rule); font-size: 0.8rem; color: var(--muted); }
@media print {
  @page { size: A4; margin: 14mm 14mm 14mm; }
  html { font-size: 9.5pt; }
  body { max-width: none; padding: 0; }
  nav.contents { display: none; }
  nav.contents + section.measurement, section.appendix { break-before: page; }
  h2 { margin-top: 0.4rem; }
  h3 { margin: 1rem 0 0.4rem; }
  h2, h3, h4 { break-after: avoid; }
  figure, table, .warning, .key, ol.notes, .verdict, .position { break-inside: avoid; }
  figure img { width: 144mm; max-width: none; height: auto; margin: 0 auto; }
  figure { margin: 0.4rem 0 0.6rem; }
  figure.svg svg { width: 170mm; margin: 0 auto; }
  .grid2 { grid-template-columns: minmax(0, 1fr) minmax(0, 1fr); gap: 0 5mm; }
  .grid2 table { font-size: 8pt; }
  section.appendix table { font-size: 7.5pt; }
  section.appendix th, section.appendix td { padding: 0.06rem 0.3rem; }
  .positions thead th { white-space: normal; }
  .positions h4 { font-size: 0.85rem; }
  th, td { padding: 0.12rem 0.35rem; }
  dl.keys { grid-template-columns: repeat(4, 1fr); gap: 0.4rem; }
  .key { padding: 0.3rem 0.5rem; }
  .key .value { font-size: 1.1rem; }
  a { color: inherit; text-decoration: none; }
  nav.contents { background: none; border: 1px solid var(--rule); }
  thead { display: table-header-group; }
  tbody tr:nth-child(even) { background: none; }
}
"#;
