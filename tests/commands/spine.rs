//! The typed spine: one verdict shown alike everywhere, one folder reader
//! that refuses a changed raw file, each band parameter's key written once,
//! and a library without the command line.

use std::path::{Path, PathBuf};

use gliss::analysis::compare::Verdict;
use gliss::model::Parameter;
use gliss::plot::annotate::{MARKS_KEYWORD, texts};
use serde_json::Value;

use crate::util::{json, ok, refused, snapshot};

/// The verdict whose stored code is `code`.
fn verdict(code: &str) -> Verdict {
    serde_json::from_value(Value::String(code.into()))
        .unwrap_or_else(|e| panic!("{code:?} is no verdict: {e}"))
}

/// The `data-verdict` of input 2 in the report's row of `center_hz` in the
/// table of `parameter` and `fraction`.
fn report_verdict(html: &str, parameter: &str, fraction: &str, center_hz: f64) -> String {
    let t0 = html
        .find(&format!(
            "data-parameter=\"{parameter}\" data-fraction=\"{fraction}\""
        ))
        .unwrap_or_else(|| panic!("no table for {parameter} {fraction}"));
    let table = &html[t0..t0 + html[t0..].find("</table>").unwrap()];
    let r0 = table
        .find(&format!("<tr data-center-hz=\"{center_hz}\">"))
        .unwrap_or_else(|| panic!("no row {center_hz} in {parameter} {fraction}"));
    let row = &table[r0..r0 + table[r0..].find("</tr>").unwrap()];
    let v = &row[row.find("data-verdict=\"").expect("a verdict cell") + 14..];
    v[..v.find('"').unwrap()].to_string()
}

#[test]
fn the_demo_gives_one_verdict_in_the_terminal_the_json_the_plot_and_the_report() {
    let t = tempfile::tempdir().unwrap();
    let dir = t.path();
    let out = ok(dir, &["demo", "--out", "story"]);
    let story = dir.join("story");
    let c = json(&story.join("comparison/comparison.json"));
    let html = std::fs::read_to_string(story.join("report.html")).unwrap();
    let png = std::fs::read(story.join("comparison/plots/compare-reverberation.png")).unwrap();
    let marks: Vec<String> = texts(&png)
        .into_iter()
        .filter(|(k, _)| k == MARKS_KEYWORD)
        .flat_map(|(_, v)| v.lines().map(str::to_string).collect::<Vec<_>>())
        .collect();
    assert!(!marks.is_empty(), "the plot says what it marks");
    // the terminal: "     125 Hz  T30 0.87 s -> 0.52 s (-40 %), +9.9 m² absorption: audible change"
    let summary = &out[out.find("compared before and after").expect("a summary")..];
    let terminal: Vec<(f64, String)> = summary
        .lines()
        .skip(1)
        .take_while(|l| l.contains(" T30 "))
        .map(|l| {
            // "125 Hz" or "1 kHz"
            let mut words = l.split_whitespace();
            let number: f64 = words.next().unwrap().parse().unwrap();
            let hz = match words.next().unwrap() {
                "kHz" => number * 1000.0,
                unit => {
                    assert_eq!(unit, "Hz", "{l}");
                    number
                }
            };
            (hz, l[l.rfind(": ").unwrap() + 2..].to_string())
        })
        .collect();
    let mut octave_t30 = 0;
    let mut seen = std::collections::BTreeSet::new();
    for b in c["bands"].as_array().unwrap() {
        let p = b["parameter"].as_str().unwrap();
        let f = b["fraction"].as_str().unwrap();
        let hz = b["center_hz"].as_f64().unwrap();
        let code = b["verdict"][1].as_str().expect("a stored verdict");
        assert!(b["verdict"][0].is_null(), "the reference has none");
        seen.insert(code.to_string());
        // the report: every parameter of every octave band, T30 of every
        // one-third-octave band (the rest is in comparison.csv)
        if f == "1/1" || (f == "1/3" && p == "t30_s") {
            assert_eq!(report_verdict(&html, p, f, hz), code, "{p} {f} {hz} Hz");
        }
        if p != "t30_s" || f != "1/1" {
            continue;
        }
        octave_t30 += 1;
        // the terminal, every octave T30
        let words = &terminal
            .iter()
            .find(|(h, _)| (h - hz).abs() < 0.01 * hz)
            .unwrap_or_else(|| panic!("no terminal line for {hz} Hz in {summary}"))
            .1;
        assert_eq!(words, verdict(code).words(), "{hz} Hz in the terminal");
        // the plot, where it shows T30: the verdict, and the ring only on
        // an audible change
        if let Some(m) = marks
            .iter()
            .find(|m| m.starts_with(&format!("T30 1/1 {hz} Hz input 2:")))
        {
            assert!(m.contains(&format!(": {code} (")), "{m} against {code}");
            assert_eq!(m.ends_with("(ring)"), code == "audible", "{m}");
        }
    }
    assert_eq!(octave_t30, terminal.len(), "one terminal line per octave");
    assert!(
        octave_t30 >= 8,
        "the demo's octaves 31.5 Hz to 4 kHz at least"
    );
    assert!(
        seen.len() >= 2,
        "the demo shows more than one kind of verdict: {seen:?}"
    );
}

/// Flips one bit of the last byte of `path`.
fn damage(path: &Path) {
    let mut bytes = std::fs::read(path).unwrap();
    let last = bytes.len() - 1;
    bytes[last] ^= 1;
    std::fs::write(path, bytes).unwrap();
}

#[test]
fn a_raw_file_changed_by_one_byte_is_refused_by_every_command() {
    let t = tempfile::tempdir().unwrap();
    let dir = t.path();
    crate::util::two_positions(dir);
    ok(dir, &["compare", "a", "b", "--out", "ab", "--no-plots"]);
    damage(&dir.join("a/recording.wav"));
    let manifest = std::fs::read(dir.join("a/manifest.json")).unwrap();
    let before = snapshot(dir);
    let named = |line: &str| {
        assert!(
            line.contains("recording.wav") && line.contains("SHA-256"),
            "{line}"
        )
    };
    named(&refused(dir, &["average", "a", "b", "--out", "avg"]));
    named(&refused(dir, &["compare", "a", "b", "--out", "ab2"]));
    named(&refused(
        dir,
        &["export", "a", "--what", "bands", "--out", "a.csv"],
    ));
    named(&refused(dir, &["report", "a", "--out", "a.html"]));
    named(&refused(
        dir,
        &[
            "analyze",
            "a/recording.wav",
            "--sweep",
            "a/stimulus.wav",
            "--out",
            "a",
            "--overwrite",
        ],
    ));
    assert_eq!(snapshot(dir), before, "a refusal changes nothing");
    // asked for explicitly, the report shows the folder with the damage
    ok(
        dir,
        &["report", "a", "--out", "a.html", "--show-changed-raw"],
    );
    let html = std::fs::read_to_string(dir.join("a.html")).unwrap();
    assert!(html.contains("recording.wav differs from the file the analysis wrote or read"));
    // the manifest keeps the hash of the recording as measured
    assert_eq!(
        std::fs::read(dir.join("a/manifest.json")).unwrap(),
        manifest
    );
    // an intact folder still re-analyses in place from its own raw files
    ok(
        dir,
        &[
            "analyze",
            "b/recording.wav",
            "--sweep",
            "b/stimulus.wav",
            "--out",
            "b",
            "--overwrite",
            "--no-plots",
        ],
    );
}

/// The library's source files, with their unit tests (a trailing
/// `#[cfg(test)]` module) and comment lines left out.
fn library_source() -> Vec<(PathBuf, String)> {
    let mut out = Vec::new();
    let mut stack = vec![PathBuf::from(env!("CARGO_MANIFEST_DIR")).join("src")];
    while let Some(d) = stack.pop() {
        for e in std::fs::read_dir(&d).unwrap().flatten() {
            let p = e.path();
            if p.is_dir() {
                stack.push(p);
            } else if p.extension().is_some_and(|x| x == "rs") {
                let text = std::fs::read_to_string(&p).unwrap();
                let code = text.split("#[cfg(test)]").next().unwrap_or("");
                let code: String = code
                    .lines()
                    .filter(|l| !l.trim_start().starts_with("//"))
                    .map(|l| format!("{l}\n"))
                    .collect();
                out.push((p, code));
            }
        }
    }
    out
}

#[test]
fn each_band_parameter_key_is_written_once_in_the_source() {
    let src = library_source();
    for p in Parameter::ALL {
        let quoted = format!("\"{}\"", p.key());
        let places: Vec<String> = src
            .iter()
            .flat_map(|(path, code)| {
                code.lines()
                    .filter(|l| l.contains(&quoted))
                    .map(|l| format!("{}: {}", path.display(), l.trim()))
                    .collect::<Vec<_>>()
            })
            .collect();
        assert_eq!(places.len(), 1, "{quoted} in {places:#?}");
    }
}

#[test]
fn the_library_exposes_no_command_line_and_has_one_folder_reader() {
    let lib = std::fs::read_to_string(concat!(env!("CARGO_MANIFEST_DIR"), "/src/lib.rs")).unwrap();
    assert!(!lib.contains("pub mod cli"), "src/lib.rs");
    // every reader of manifest.json outside the folder layer goes through
    // folder::open: no other file reads a manifest into its type
    for (path, code) in library_source() {
        let p = path.to_string_lossy();
        if p.contains("/folder/") {
            continue;
        }
        assert!(
            !code.contains("join(\"manifest.json\")"),
            "{p} reads manifest.json itself"
        );
    }
}
