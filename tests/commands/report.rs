//! `gliss report`: one self-contained HTML file from measurement folders,
//! checked as text (no requests, escaped names, the band values of
//! results.json, every embedded PNG decodes) and in a real headless
//! browser (Chromium renders it to a screenshot and to a PDF).
//!
//! `.ci/run` installs Chromium and sets GLISS_REQUIRE_CHROMIUM=1; elsewhere
//! the browser test skips (and says so) where Chromium is missing.

use std::path::{Path, PathBuf};
use std::process::{Command, Stdio};
use std::time::{Duration, Instant};

use base64::Engine;
use serde_json::{Value, json};

use crate::util::*;

/// Makes the demo folders the report tests read: a room, a gated speaker
/// and a quiet room (-60 dBFS, short tail: some bands lack T20 or T30).
fn demo_folders(dir: &Path) {
    ok(dir, &["demo", "--single", "--out", "room"]);
    ok(
        dir,
        &[
            "demo",
            "--single",
            "--out",
            "speaker",
            "--profile",
            "speaker",
        ],
    );
    ok(
        dir,
        &[
            "demo", "--single", "--out", "quiet", "--level", "-60", "--tail", "1", "--seed", "3",
        ],
    );
}

/// The text of every `<table ...data-fraction="F">` band table of the
/// section `id`, as (centre Hz, results.json key, cell text without its
/// note marks).
fn band_cells(html: &str, section: &str, fraction: &str) -> Vec<(f64, String, String)> {
    let start = html
        .find(&format!("id=\"{section}\""))
        .expect("the section");
    let end = html[start..]
        .find("</section>")
        .map_or(html.len(), |e| start + e);
    // the section's evidence and its part of the appendix (a1 for m1)
    let mut sec = html[start..end].to_string();
    if let Some(a) = html.find(&format!("id=\"a{}\"", &section[1..])) {
        let rest = &html[a..];
        let e = [rest.find("<div class=\"part\""), rest.find("</section>")]
            .into_iter()
            .flatten()
            .min()
            .unwrap_or(rest.len());
        sec.push_str(&rest[..e]);
    }
    let open = format!("<table class=\"bands\" data-fraction=\"{fraction}\">");
    let Some(t0) = sec.find(&open) else {
        return Vec::new();
    };
    let table = &sec[t0..t0 + sec[t0..].find("</table>").unwrap()];
    let mut out = Vec::new();
    for row in table.split("<tr data-center-hz=\"").skip(1) {
        let center: f64 = row[..row.find('"').unwrap()].parse().unwrap();
        for cell in row.split("data-key=\"").skip(1) {
            let key = &cell[..cell.find('"').unwrap()];
            let body = &cell[cell.find('>').unwrap() + 1..cell.find("</td>").unwrap()];
            let text = match body.find("<sup>") {
                Some(i) => &body[..i],
                None => body,
            };
            out.push((center, key.to_string(), text.to_string()));
        }
    }
    out
}

/// Decimals and scale the report prints each band parameter with.
fn precision(key: &str) -> (usize, f64) {
    match key {
        "edt_s" | "t20_s" | "t30_s" | "d50" => (2, 1.0),
        "c50_db" | "c80_db" => (1, 1.0),
        "ts_s" => (0, 1000.0),
        "inr_db" => (0, 1.0),
        other => panic!("unexpected column {other}"),
    }
}

/// Every `src="..."` of the page: all must be PNG data URIs; returns the
/// decoded images' sizes (decoded by the `png` crate, independently of
/// gliss).
fn decoded_images(html: &str) -> Vec<(u32, u32)> {
    let mut sizes = Vec::new();
    for part in html.split("src=\"").skip(1) {
        let uri = &part[..part.find('"').unwrap()];
        let data = uri
            .strip_prefix("data:image/png;base64,")
            .unwrap_or_else(|| panic!("an image that is not an embedded PNG: {:.80}", uri));
        let bytes = base64::engine::general_purpose::STANDARD
            .decode(data)
            .expect("valid base64");
        let mut reader = png::Decoder::new(std::io::Cursor::new(bytes))
            .read_info()
            .expect("a PNG header");
        let mut buf = vec![0; reader.output_buffer_size()];
        let info = reader.next_frame(&mut buf).expect("the PNG decodes");
        assert!(
            buf[..info.buffer_size()].iter().any(|&b| b != buf[0]),
            "an embedded plot is a single colour"
        );
        sizes.push((info.width, info.height));
    }
    sizes
}

/// The page makes no requests: no URLs, no external style, script or
/// image, nothing but data URIs.
fn assert_self_contained(html: &str) {
    for bad in [
        "http://", "https://", "<script", "<link", "url(", "@import", "<iframe", "<object",
    ] {
        assert!(!html.contains(bad), "the report contains {bad:?}");
    }
    for part in html.split("src=").skip(1) {
        assert!(part.starts_with("\"data:"), "a src that is not a data URI");
    }
    for part in html.split("href=\"").skip(1) {
        assert!(part.starts_with('#'), "a link that leaves the page");
    }
}

#[test]
fn report_holds_the_plots_warnings_and_band_values_of_each_folder() {
    let t = tempfile::tempdir().unwrap();
    let dir = t.path();
    demo_folders(dir);
    let out = ok(
        dir,
        &["report", "room", "speaker", "quiet", "--out", "report.html"],
    );
    assert!(out.contains("wrote report.html: 3 folders"), "{out}");
    let html = std::fs::read_to_string(dir.join("report.html")).unwrap();
    assert_self_contained(&html);

    // one section per folder, in the order given, each in the contents
    let pos: Vec<usize> = ["room", "speaker", "quiet"]
        .iter()
        .enumerate()
        .map(|(i, name)| {
            assert!(html.contains(&format!(
                "<a href=\"#m{}\"><span class=\"folder\">{name}</span></a>",
                i + 1
            )));
            html.find(&format!("id=\"m{}\"><h2>", i + 1)).unwrap()
        })
        .collect();
    assert!(pos[0] < pos[1] && pos[1] < pos[2]);

    // every plot of every folder is embedded once and decodes at its size
    let mut want = Vec::new();
    for name in ["room", "speaker", "quiet"] {
        let mut files: Vec<PathBuf> = std::fs::read_dir(dir.join(name).join("plots"))
            .unwrap()
            .map(|e| e.unwrap().path())
            .collect();
        files.sort();
        for f in files {
            let d = png::Decoder::new(std::fs::File::open(&f).unwrap())
                .read_info()
                .unwrap();
            want.push((d.info().width, d.info().height));
            let file = format!("plots/{}", f.file_name().unwrap().to_str().unwrap());
            assert!(html.contains(&file), "{name}: {file} has no caption");
        }
    }
    let mut got = decoded_images(&html);
    assert_eq!(got.len(), want.len(), "one embedded image per plot");
    got.sort();
    want.sort();
    assert_eq!(got, want);
    assert!(html.contains("Figure 1.</span> Frequency response"));

    // the band tables hold results.json's values at the printed precision
    for (section, name) in [("m1", "room"), ("m3", "quiet")] {
        let r = json(&dir.join(name).join("results.json"));
        let mut nulls = 0;
        for fraction in ["1/1", "1/3"] {
            let cells = band_cells(&html, section, fraction);
            let bands: Vec<&Value> = r["bands"]
                .as_array()
                .unwrap()
                .iter()
                .filter(|b| b["fraction"] == fraction)
                .collect();
            assert_eq!(cells.len(), bands.len() * 8, "{name} {fraction}");
            for (center, key, text) in &cells {
                let b = bands
                    .iter()
                    .find(|b| b["center_hz"].as_f64() == Some(*center))
                    .unwrap();
                match b[key.as_str()].as_f64() {
                    Some(v) => {
                        let (dec, scale) = precision(key);
                        let shown: f64 = text.parse().unwrap_or_else(|_| {
                            panic!("{name} {center} {key}: {text:?} is not a number")
                        });
                        assert!(
                            (shown - v * scale).abs() <= 0.5 * 10f64.powi(-(dec as i32)) + 1e-9,
                            "{name} {center} Hz {key}: shows {shown}, results.json {v}"
                        );
                    }
                    None => {
                        nulls += 1;
                        assert_eq!(text, "—", "{name} {center} Hz {key}");
                    }
                }
            }
        }
        if name == "quiet" {
            assert!(nulls > 0, "the quiet demo should withhold some values");
            // each withheld value comes with its reason
            assert!(html.contains("T30 needs 45 dB of decay above the noise"));
        }
    }
    // a speaker measurement has no bands, and says so
    assert!(band_cells(&html, "m2", "1/1").is_empty());
    assert!(html.contains("analysed without bands"));

    // key numbers and the gate
    let room = json(&dir.join("room/results.json"));
    let t30 = room["broadband"]["t30_s"].as_f64().unwrap();
    assert!(html.contains(&format!("<span class=\"value\">{t30:.2} s</span>")));
    let delay_ms = room["delay_s"].as_f64().unwrap() * 1e3;
    assert!(html.contains(&format!("{delay_ms:.3} ms")));
    let speaker = json(&dir.join("speaker/results.json"));
    let gate = &speaker["response"]["gate"];
    assert!(html.contains(&format!(
        "{:.2} to {:.2} ms",
        gate["start_s"].as_f64().unwrap() * 1e3,
        gate["end_s"].as_f64().unwrap() * 1e3
    )));

    // warnings are grouped with what to do
    assert!(html.contains("<h4>Gated (quasi-anechoic) response</h4>"));
    assert!(html.contains("<h4>Too little decay above the background noise</h4>"));
    assert!(html.contains("What to do:"));

    // the raw files with their SHA-256, checked
    let manifest = json(&dir.join("room/manifest.json"));
    for f in manifest["files"].as_array().unwrap() {
        if f["role"] == "raw" {
            let sha = f["sha256"].as_str().unwrap();
            assert!(
                html.contains(&format!(
                    "<td class=\"hash\">{sha}</td><td class=\"ok\">matches</td>"
                )),
                "{f}"
            );
        }
    }
}

#[test]
fn report_escapes_folder_names_and_says_when_a_file_changed() {
    let t = tempfile::tempdir().unwrap();
    let dir = t.path();
    let name = "<script>alert('x')</script> & \"co\"";
    ok(
        dir,
        &[
            "demo",
            "--single",
            "--out",
            name,
            "--no-plots",
            "--no-bands",
        ],
    );
    // a recording that is no longer the one measured
    let rec = dir.join(name).join("recording.wav");
    let mut bytes = std::fs::read(&rec).unwrap();
    let last = bytes.len() - 1;
    bytes[last] ^= 1;
    std::fs::write(&rec, bytes).unwrap();
    // refused unless asked to show the damage
    let e = refused(dir, &["report", name, "--out", "r.html"]);
    assert!(
        e.contains("recording.wav does not match the SHA-256"),
        "{e}"
    );
    ok(
        dir,
        &["report", name, "--out", "r.html", "--show-changed-raw"],
    );
    let html = std::fs::read_to_string(dir.join("r.html")).unwrap();
    assert_self_contained(&html);
    assert!(!html.contains("<script>"));
    assert!(html.contains("&lt;script&gt;alert(&#39;x&#39;)&lt;/script&gt; &amp; &quot;co&quot;"));
    assert!(html.contains("recording.wav differs from the file the analysis wrote or read"));
    assert!(html.contains("<td class=\"bad\">differs</td>"));
    assert!(html.contains("no plots"));
}

#[test]
fn report_refuses_what_is_not_a_complete_measurement_and_never_overwrites() {
    let t = tempfile::tempdir().unwrap();
    let dir = t.path();
    ok(dir, &["demo", "--single", "--out", "room", "--no-plots"]);
    std::fs::create_dir(dir.join("empty")).unwrap();
    let e = refused(dir, &["report", "room", "empty", "--out", "r.html"]);
    assert!(
        e.contains("empty is not a measurement folder: it has no manifest.json"),
        "{e}"
    );
    let e = refused(dir, &["report", "missing", "--out", "r.html"]);
    assert!(e.contains("missing is not a folder"), "{e}");

    // an interrupted measurement
    copy_dir(&dir.join("room"), &dir.join("cut"));
    let mut m = json(&dir.join("cut/manifest.json"));
    m["complete"] = json!(false);
    m["problems"] = json!(["stopped by Ctrl-C after 2.1 s"]);
    std::fs::write(dir.join("cut/manifest.json"), m.to_string()).unwrap();
    let e = refused(dir, &["report", "cut", "--out", "r.html"]);
    assert!(
        e.contains("cut is an incomplete measurement (stopped by Ctrl-C"),
        "{e}"
    );

    // a results.json that does not parse
    copy_dir(&dir.join("room"), &dir.join("broken"));
    std::fs::write(dir.join("broken/results.json"), "{\"schema_version\": 1,").unwrap();
    let e = refused(dir, &["report", "broken", "--out", "r.html"]);
    assert!(e.contains("broken") && e.contains("results.json"), "{e}");
    assert!(!dir.join("r.html").exists(), "nothing written on a refusal");

    // an existing --out is kept unless --overwrite
    std::fs::write(dir.join("r.html"), "mine").unwrap();
    let e = refused(dir, &["report", "room", "--out", "r.html"]);
    assert!(
        e.contains("r.html already exists") && e.contains("--overwrite"),
        "{e}"
    );
    assert_eq!(std::fs::read_to_string(dir.join("r.html")).unwrap(), "mine");
    ok(dir, &["report", "room", "--out", "r.html", "--overwrite"]);
    assert!(
        std::fs::read_to_string(dir.join("r.html"))
            .unwrap()
            .starts_with("<!DOCTYPE html>")
    );
    let o = run(dir, &["report", "room", "--out", "r.html"]);
    assert_eq!(o.status.code(), Some(1));
}

fn copy_dir(from: &Path, to: &Path) {
    std::fs::create_dir_all(to).unwrap();
    for e in std::fs::read_dir(from).unwrap() {
        let p = e.unwrap().path();
        let target = to.join(p.file_name().unwrap());
        if p.is_dir() {
            copy_dir(&p, &target);
        } else {
            std::fs::copy(&p, &target).unwrap();
        }
    }
}

/// A comparison folder as `gliss compare` writes it (the shape of its
/// comparison.json is the agreed one), made by hand from two demo rooms'
/// results.json: the room as the reference, the quiet room after it.
/// The flags follow ISO 3382-1 Annex A's just-noticeable differences
/// (EDT 5 %, C80 1 dB [sec, see REFERENCES.md]); the uncertainty flag is
/// the test's own rule (a change of more than 5 % or 0.5 dB).
fn comparison_folder(dir: &Path) -> Value {
    let before = json(&dir.join("room/results.json"));
    let after = json(&dir.join("quiet/results.json"));
    let mut bands = Vec::new();
    for b in before["bands"].as_array().unwrap() {
        let a = after["bands"]
            .as_array()
            .unwrap()
            .iter()
            .find(|a| a["center_hz"] == b["center_hz"] && a["fraction"] == b["fraction"])
            .unwrap();
        for p in ["edt_s", "t30_s", "c80_db"] {
            let (x, y) = (b[p].as_f64(), a[p].as_f64());
            let change = x.zip(y).map(|(x, y)| y - x);
            let rel = x.zip(change).map(|(x, d)| d / x);
            let jnd = match p {
                "edt_s" => rel.map(|r| r.abs() > 0.05),
                "c80_db" => change.map(|d| d.abs() > 1.0),
                _ => None,
            };
            let unc = match p {
                "c80_db" => change.map(|d| d.abs() > 0.5),
                _ => rel.map(|r| r.abs() > 0.05),
            };
            bands.push(json!({
                "center_hz": b["center_hz"], "fraction": b["fraction"], "parameter": p,
                "values": [x, y], "change": [null, change], "relative_change": [null, rel],
                "exceeds_jnd": [null, jnd], "exceeds_uncertainty": [null, unc],
            }));
        }
    }
    let c = json!({
        "inputs": [
            {"folder": "room", "sha256": "a".repeat(64), "label": "before"},
            {"folder": "quiet", "sha256": "b".repeat(64), "label": "after <quiet>"},
        ],
        "bands": bands,
        "warnings": ["the two measurements used different sweep levels (-20 and -60 dBFS)"],
    });
    let cdir = dir.join("cmp");
    std::fs::create_dir_all(cdir.join("plots")).unwrap();
    std::fs::write(cdir.join("comparison.json"), c.to_string()).unwrap();
    for (from, to) in [
        ("response", "compare-response"),
        ("distortion", "compare-difference"),
        ("reverberation", "compare-reverberation"),
    ] {
        std::fs::copy(
            dir.join(format!("room/plots/{from}.png")),
            cdir.join(format!("plots/{to}.png")),
        )
        .unwrap();
    }
    let manifest = json!({
        "schema_version": 1, "tool": "gliss", "tool_version": "0.1.0",
        "created_utc": "2026-12-01T12:00:00Z", "complete": true, "kind": "comparison",
        "command_line": ["gliss", "compare", "room", "quiet", "--out", "cmp"],
        "source": {"kind": "comparison", "description": "before and after, two demo rooms"},
        "files": [],
    });
    std::fs::write(cdir.join("manifest.json"), manifest.to_string()).unwrap();
    c
}

#[test]
fn report_of_a_comparison_gives_a_verdict_per_band_and_parameter() {
    let t = tempfile::tempdir().unwrap();
    let dir = t.path();
    ok(dir, &["demo", "--single", "--out", "room"]);
    ok(
        dir,
        &[
            "demo",
            "--single",
            "--out",
            "quiet",
            "--level",
            "-60",
            "--tail",
            "1",
            "--seed",
            "3",
            "--no-plots",
        ],
    );
    let c = comparison_folder(dir);
    ok(dir, &["report", "cmp", "room", "--out", "c.html"]);
    let html = std::fs::read_to_string(dir.join("c.html")).unwrap();
    assert_self_contained(&html);
    assert!(html.contains("before and after, two demo rooms"));
    assert!(html.contains("after &lt;quiet&gt;"), "labels are escaped");
    assert!(html.contains("different sweep levels"));
    // the room's 9 plots: the 8 of a room measurement and its MTF (plots/mtf.png)
    assert_eq!(decoded_images(&html).len(), 3 + 9);
    for f in [
        "compare-response",
        "compare-difference",
        "compare-reverberation",
    ] {
        assert!(html.contains(&format!("plots/{f}.png")));
    }
    // every octave band of every parameter, and T30 per one-third octave
    // (the appendix): before, after, change, verdict
    let sec = html.as_str();
    let mut audible_edt = (0, 0);
    for b in c["bands"].as_array().unwrap() {
        let p = b["parameter"].as_str().unwrap();
        let f = b["fraction"].as_str().unwrap();
        if f != "1/1" && p != "t30_s" {
            assert!(
                !sec.contains(&format!("data-parameter=\"{p}\" data-fraction=\"{f}\"")),
                "{p} {f} belongs in comparison.csv, not the report"
            );
            continue;
        }
        let t0 = sec
            .find(&format!("data-parameter=\"{p}\" data-fraction=\"{f}\""))
            .unwrap_or_else(|| panic!("no table for {p} {f}"));
        let table = &sec[t0..t0 + sec[t0..].find("</table>").unwrap()];
        let row0 = table
            .find(&format!(
                "<tr data-center-hz=\"{}\">",
                b["center_hz"].as_f64().unwrap()
            ))
            .unwrap();
        let row = &table[row0..row0 + table[row0..].find("</tr>").unwrap()];
        let cell = |i: usize| {
            let s = &row[row.find(&format!("data-input=\"{i}\">")).unwrap()..];
            s[s.find('>').unwrap() + 1..s.find("</td>").unwrap()].to_string()
        };
        let (scale, dec) = if p == "c80_db" { (1.0, 1) } else { (1.0, 2) };
        for i in 0..2 {
            match b["values"][i].as_f64() {
                Some(v) => assert_eq!(cell(i), format!("{:.dec$}", v * scale), "{p} {row}"),
                None => assert_eq!(cell(i), "—"),
            }
        }
        let verdict = match (
            b["change"][1].as_f64(),
            b["exceeds_jnd"][1].as_bool(),
            b["exceeds_uncertainty"][1].as_bool(),
        ) {
            (None, ..) => "not measured in both",
            (_, Some(true), Some(true)) => {
                if p == "edt_s" && f == "1/1" {
                    audible_edt.0 += 1;
                }
                "audible change"
            }
            (_, Some(true), Some(false)) => "within measurement uncertainty, though larger",
            (_, Some(false), Some(true)) => "measurable, below the just-noticeable difference",
            (_, Some(false), _) => "below the just-noticeable difference",
            (_, None, Some(true)) => "measurable change",
            (_, None, Some(false)) => "within measurement uncertainty",
            (_, None, None) => "not judged",
            (_, Some(true), None) => "audible change (uncertainty not estimated)",
        };
        assert!(row.contains(verdict), "{p} {f}: {verdict:?} in {row}");
        if p == "edt_s" && f == "1/1" && b["change"][1].as_f64().is_some() {
            audible_edt.1 += 1;
        }
    }
    // the headline counts octave bands of one quantity, never table cells
    let (k, n) = audible_edt;
    assert!(k > 0, "the quiet room should differ audibly somewhere");
    let counted = if k == n {
        format!("all {n} octave bands")
    } else {
        format!("{k} of the {n} octave bands")
    };
    let page1 = &html[..html.find("<nav").unwrap()];
    assert!(
        page1.contains(&format!("<tr><th scope=\"row\">EDT</th><td>{counted}</td>")),
        "no EDT headline counting {counted}"
    );
    assert!(!html.contains("Audible changes</dt>"), "a count of cells");
    // no absorption without a room volume
    assert!(!html.contains("absorption area"));
}

/// The Chromium binary, if one is installed.
fn chromium() -> Option<PathBuf> {
    let path = std::env::var_os("PATH")?;
    std::env::split_paths(&path)
        .flat_map(|d| ["chromium", "chromium-browser"].map(|n| d.join(n)))
        .find(|p| p.is_file())
}

/// Runs headless Chromium on `page` with `extra` options, stdout and
/// stderr to files in `work`; killed after two minutes.
fn headless(
    browser: &Path,
    work: &Path,
    page: &Path,
    extra: &[String],
    tag: &str,
) -> (String, String) {
    let stdout = work.join(format!("{tag}.out"));
    let stderr = work.join(format!("{tag}.err"));
    let mut child = Command::new(browser)
        .args([
            "--headless",
            "--no-sandbox",
            "--disable-gpu",
            "--disable-quic",
            "--no-first-run",
            "--disable-background-networking",
            "--disable-component-update",
            "--disable-sync",
            "--disable-extensions",
            "--enable-logging=stderr",
            "--v=0",
            "--hide-scrollbars",
            "--window-size=1200,3000",
        ])
        .arg(format!(
            "--user-data-dir={}",
            work.join(format!("profile-{tag}")).display()
        ))
        .args(extra)
        .arg(format!("file://{}", page.display()))
        .stdin(Stdio::null())
        .stdout(std::fs::File::create(&stdout).unwrap())
        .stderr(std::fs::File::create(&stderr).unwrap())
        .spawn()
        .expect("chromium starts");
    let started = Instant::now();
    loop {
        if let Some(status) = child.try_wait().unwrap() {
            let err = std::fs::read_to_string(&stderr).unwrap_or_default();
            assert!(status.success(), "chromium {tag} failed: {err}");
            return (std::fs::read_to_string(&stdout).unwrap_or_default(), err);
        }
        if started.elapsed() > Duration::from_secs(120) {
            let _ = child.kill();
            let _ = child.wait();
            panic!("chromium {tag} did not finish within two minutes");
        }
        std::thread::sleep(Duration::from_millis(100));
    }
}

#[test]
fn report_renders_in_a_headless_browser_to_a_screenshot_and_a_pdf() {
    let Some(browser) = chromium() else {
        assert!(
            std::env::var_os("GLISS_REQUIRE_CHROMIUM").is_none(),
            "GLISS_REQUIRE_CHROMIUM is set but no chromium is on PATH"
        );
        eprintln!("skipped: no chromium on PATH (apt-get install chromium, as .ci/run does)");
        return;
    };
    let t = tempfile::tempdir().unwrap();
    let dir = t.path().canonicalize().unwrap();
    demo_folders(&dir);
    ok(
        &dir,
        &["report", "room", "speaker", "quiet", "--out", "report.html"],
    );
    let page = dir.join("report.html");
    let html = std::fs::read_to_string(&page).unwrap();
    let images = decoded_images(&html).len();

    // it loads: the DOM after loading holds every section, table and image
    let (dom, log) = headless(&browser, &dir, &page, &["--dump-dom".into()], "dom");
    assert!(
        dom.contains("<h1>Measurement report: 3 folders</h1>"),
        "{log}"
    );
    assert_eq!(dom.matches("<img ").count(), images);
    assert_eq!(dom.matches("<table class=\"bands\"").count(), 4);
    for bad in [
        "net::ERR_",
        "Failed to load",
        "Refused to",
        "Not allowed to load",
    ] {
        assert!(!log.contains(bad), "chromium reported {bad:?}:\n{log}");
    }

    // a screenshot that decodes and is not blank
    let shot = dir.join("page.png");
    headless(
        &browser,
        &dir,
        &page,
        &[format!("--screenshot={}", shot.display())],
        "shot",
    );
    let mut reader = png::Decoder::new(std::fs::File::open(&shot).unwrap())
        .read_info()
        .unwrap();
    let mut buf = vec![0; reader.output_buffer_size()];
    let info = reader.next_frame(&mut buf).unwrap();
    assert_eq!((info.width, info.height), (1200, 3000));
    let channels = info.color_type.samples();
    let pixels: Vec<&[u8]> = buf[..info.buffer_size()].chunks(channels).collect();
    let inked = pixels
        .iter()
        .filter(|p| p[..3].iter().any(|&v| v < 200))
        .count();
    // the plots' coloured curves and the colour maps: pixels far from grey
    let coloured = pixels
        .iter()
        .filter(|p| {
            let (lo, hi) = (p[..3].iter().min().unwrap(), p[..3].iter().max().unwrap());
            hi - lo > 60
        })
        .count();
    assert!(
        inked > pixels.len() / 50,
        "the screenshot is nearly blank: {inked} of {} pixels inked",
        pixels.len()
    );
    assert!(
        coloured > 5000,
        "no plot visible in the screenshot: {coloured} coloured pixels"
    );

    // a PDF for print: A4 pages, each measurement from a new page, every
    // plot drawn (Chromium embeds an image only once it decoded it)
    let pdf = dir.join("page.pdf");
    headless(
        &browser,
        &dir,
        &page,
        &[
            "--no-pdf-header-footer".into(),
            format!("--print-to-pdf={}", pdf.display()),
        ],
        "pdf",
    );
    let bytes = std::fs::read(&pdf).unwrap();
    assert!(bytes.starts_with(b"%PDF"), "not a PDF");
    let text = String::from_utf8_lossy(&bytes);
    // the page tree's root counts every page
    let pages = text
        .split("/Count ")
        .skip(1)
        .filter_map(|s| {
            s.split(|c: char| !c.is_ascii_digit())
                .next()?
                .parse::<usize>()
                .ok()
        })
        .max()
        .unwrap_or(0);
    assert!(pages >= 3, "{pages} pages for three measurements");
    assert!(
        text.contains("/MediaBox [0 0 594.95996 841.91998]") || text.contains("/MediaBox [0 0 595"),
        "the pages are not A4"
    );
    // identical plots (the demo's two impulse responses) are stored once
    let distinct: std::collections::BTreeSet<&str> = html
        .split("src=\"")
        .skip(1)
        .map(|p| &p[..p.find('"').unwrap()])
        .collect();
    let drawn = text.matches("/Subtype /Image").count();
    assert!(
        drawn >= distinct.len(),
        "{drawn} images in the PDF, {} distinct plots in the page",
        distinct.len()
    );
}

/// The text of page `page` (1-based) of `pdf` in the order it is drawn
/// (poppler's pdftotext -raw).
fn pdf_page_text(pdf: &Path, page: usize) -> String {
    let p = page.to_string();
    let o = Command::new("pdftotext")
        .args(["-raw", "-f", &p, "-l", &p])
        .arg(pdf)
        .arg("-")
        .output()
        .expect("pdftotext (poppler-utils) runs");
    assert!(o.status.success(), "pdftotext failed");
    String::from_utf8_lossy(&o.stdout).into_owned()
}

#[test]
fn the_demo_report_prints_to_at_most_ten_pages_with_the_answer_on_page_one() {
    let Some(browser) = chromium() else {
        assert!(
            std::env::var_os("GLISS_REQUIRE_CHROMIUM").is_none(),
            "GLISS_REQUIRE_CHROMIUM is set but no chromium is on PATH"
        );
        eprintln!("skipped: no chromium on PATH (apt-get install chromium, as .ci/run does)");
        return;
    };
    let t = tempfile::tempdir().unwrap();
    let dir = t.path().canonicalize().unwrap();
    ok(&dir, &["demo", "--out", "story"]);
    let page = dir.join("story/report.html");
    let html = std::fs::read_to_string(&page).unwrap();
    assert_self_contained(&html);
    assert!(
        html.len() < 1_500_000,
        "the demo report is {} bytes",
        html.len()
    );
    let pdf = dir.join("story.pdf");
    headless(
        &browser,
        &dir,
        &page,
        &[
            "--no-pdf-header-footer".into(),
            format!("--print-to-pdf={}", pdf.display()),
        ],
        "story",
    );
    let info = Command::new("pdfinfo").arg(&pdf).output().unwrap();
    let info = String::from_utf8_lossy(&info.stdout);
    let pages: usize = info
        .lines()
        .find_map(|l| l.strip_prefix("Pages:"))
        .and_then(|v| v.trim().parse().ok())
        .expect("pdfinfo gives the page count");
    assert!(
        (1..=10).contains(&pages),
        "the demo report prints to {pages} A4 pages"
    );
    let texts: Vec<String> = (1..=pages).map(|p| pdf_page_text(&pdf, p)).collect();

    // page 1: the verdict in words and the reverberation figure (its
    // words as one line: the printed lines break anywhere)
    let one = &texts[0].split_whitespace().collect::<Vec<_>>().join(" ");
    for want in [
        "The verdict",
        "Mid-frequency reverberation time Tmid",
        "Bass ratio",
        "Audible changes per quantity over the octave bands",
        // the story's room is for music: C80 leads, D50 is left to the tables
        "C80 at mid frequencies",
        // the story's brief, judged in words and drawn
        "Against the target (0.30–0.50 s in every band), after treatment: T30 is within",
        "Figure 1. Reverberation time T30 per octave band",
        "octave band (Hz)",
    ] {
        assert!(one.contains(want), "page 1 lacks {want:?}:\n{one}");
    }
    assert!(!one.contains("D50 at mid frequencies"), "{one}");

    // no numbered table is split: its caption and every row, in order, on
    // one page
    let mut tables = 0;
    for part in html.split("<caption>Table ").skip(1) {
        let number = &part[..part.find('.').unwrap()];
        let table = &part[..part.find("</table>").unwrap()];
        let rows: Vec<&str> = table
            .split("<th scope=\"row\">")
            .skip(1)
            .map(|r| {
                let r = &r[..r.find(['<']).unwrap()];
                r.trim()
            })
            .collect();
        let caption = format!("Table {number}. ");
        let on: Vec<usize> = (0..pages)
            .filter(|&p| texts[p].contains(&caption))
            .collect();
        assert_eq!(on.len(), 1, "{caption} on pages {on:?}");
        let text = &texts[on[0]];
        let mut at = text.find(&caption).unwrap();
        for r in &rows {
            match text[at..].find(r) {
                Some(i) => at += i + r.len(),
                None => panic!(
                    "{caption}: row {r:?} is not on page {} after the caption: the table is split",
                    on[0] + 1
                ),
            }
        }
        tables += 1;
    }
    assert!(tables >= 10, "only {tables} numbered tables");

    // plot text: the smallest text of a plot, scaled by its printed size
    // (pdfimages gives each image's pixels per inch as printed)
    let list = Command::new("pdfimages")
        .arg("-list")
        .arg(&pdf)
        .output()
        .unwrap();
    let list = String::from_utf8_lossy(&list.stdout);
    let mut images = 0;
    for line in list.lines().skip(2) {
        let f: Vec<&str> = line.split_whitespace().collect();
        let (width, ppi): (u32, f64) = (f[3].parse().unwrap(), f[12].parse().unwrap());
        assert_eq!(width, 1200, "{line}");
        let smallest_pt = f64::from(gliss::plot::SMALLEST_TEXT_PX) * 72.0 / ppi;
        assert!(
            smallest_pt >= 8.0,
            "plot text prints at {smallest_pt:.1} pt: {line}"
        );
        images += 1;
    }
    assert!(images >= 3, "{images} plots printed");
}

#[test]
fn report_refuses_an_out_that_is_not_html_and_says_how_to_get_a_pdf() {
    let t = tempfile::tempdir().unwrap();
    let dir = t.path();
    ok(dir, &["demo", "--single", "--out", "room", "--no-plots"]);
    let o = run(dir, &["report", "room", "--out", "r.pdf"]);
    assert_eq!(o.status.code(), Some(2), "a usage error");
    let e = refused(dir, &["report", "room", "--out", "r.pdf"]);
    assert!(
        e.contains("not an .html file name") && e.contains("--print-to-pdf"),
        "{e}"
    );
    assert!(!dir.join("r.pdf").exists());
    let help = ok(dir, &["report", "--help"]);
    assert!(help.contains("--out must end in .html"), "{help}");
}

/// `--target-rt`: T30 per octave judged against per-band limits made from
/// the measurement's own values (one band clearly above, one within, one
/// clearly below), a flat range, and the refusals of nonsense limits. The
/// profile the folder was analysed with picks C80 or D50 for the key
/// numbers.
#[test]
fn report_judges_t30_against_a_target_range_and_leads_with_the_profiles_clarity() {
    let t = tempfile::tempdir().unwrap();
    let dir = t.path();
    ok(
        dir,
        &[
            "demo",
            "--single",
            "--out",
            "room",
            "--profile",
            "speech",
            "--no-plots",
        ],
    );
    let r = json(&dir.join("room/results.json"));
    let manifest = json(&dir.join("room/manifest.json"));
    assert_eq!(manifest["settings"]["profile"], "speech");
    let t30 = |f: f64| {
        r["bands"]
            .as_array()
            .unwrap()
            .iter()
            .find(|b| b["fraction"] == "1/1" && b["center_hz"].as_f64() == Some(f))
            .and_then(|b| b["t30_s"].as_f64())
            .unwrap()
    };
    let (a, b, c) = (t30(500.0), t30(1000.0), t30(2000.0));
    std::fs::write(
        dir.join("brief.txt"),
        format!(
            "# centre_hz min_s max_s\n500 {:.3} {:.3}\n1000 {:.3} {:.3}\n2000 {:.3} {:.3}\n",
            a - 0.4,
            a - 0.2,
            b - 0.1,
            b + 0.1,
            c + 0.2,
            c + 0.4
        ),
    )
    .unwrap();
    ok(
        dir,
        &[
            "report",
            "room",
            "--out",
            "r.html",
            "--target-rt",
            "brief.txt",
        ],
    );
    let html = std::fs::read_to_string(dir.join("r.html")).unwrap();
    let page1 = &html[..html.find("<nav").unwrap()];
    assert!(
        page1.contains(
            "T30 is within the target in 1 of the 3 octave bands with a target; above it at 500 Hz; below it at 2 kHz."
        ),
        "{page1}"
    );
    // a room for speech: D50 among the key numbers, not C80
    assert!(
        page1.contains("<dt>D50</dt>") && !page1.contains("<dt>C80</dt>"),
        "{page1}"
    );
    // and its speech transmission index on page 1, as results.json has it
    let sti = r["speech"]["sti"]
        .as_f64()
        .expect("an STI for the demo room");
    assert!(
        page1.contains("<strong>Speech intelligibility:</strong> STI")
            && page1.contains(&format!("{sti:.2}")),
        "{page1}"
    );

    // a flat range far above the room: below it in every octave band
    ok(
        dir,
        &["report", "room", "--out", "f.html", "--target-rt", "5,6"],
    );
    let html = std::fs::read_to_string(dir.join("f.html")).unwrap();
    assert!(html.contains(
        "Against the target (5.00–6.00 s in every band), T30 is within the target in 0 of the"
    ));

    for (arg, says) in [
        ("0.5,0.3", "lower limit"),
        ("300,500", "not milliseconds"),
        ("missing.txt", "nor a file that exists"),
    ] {
        let e = refused(
            dir,
            &["report", "room", "--out", "x.html", "--target-rt", arg],
        );
        assert!(e.contains(says), "{arg}: {e}");
    }
    std::fs::write(dir.join("bad.txt"), "500 0.4\n1000 0.4 0.6\n").unwrap();
    let e = refused(
        dir,
        &[
            "report",
            "room",
            "--out",
            "x.html",
            "--target-rt",
            "bad.txt",
        ],
    );
    assert!(e.contains("bad.txt") && e.contains("line 1"), "{e}");
    assert!(!dir.join("x.html").exists());
}
