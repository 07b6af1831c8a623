//! `gliss export`: what it writes parses back to the numbers of
//! results.json; smoothing again from impulse.wav reproduces the folder's
//! own response and smooths at other settings; bad input is refused.

use std::path::{Path, PathBuf};
use std::sync::OnceLock;

use serde_json::Value;

use crate::util::{json, numbers, ok, read_wav, refused, snapshot};

/// One demo folder (room profile: response, distortion and bands) shared
/// by the tests of this module; kept for the whole test run.
fn demo() -> &'static Path {
    static DIR: OnceLock<PathBuf> = OnceLock::new();
    DIR.get_or_init(|| {
        let t = tempfile::tempdir().unwrap().keep();
        ok(
            &t,
            &[
                "demo",
                "--single",
                "--out",
                "room",
                "--length",
                "2",
                "--tail",
                "1",
                "--no-plots",
            ],
        );
        t.join("room")
    })
}

/// Parses CSV text with the csv crate: header and rows.
fn parse_csv(text: &str) -> (Vec<String>, Vec<Vec<String>>) {
    let mut r = csv::Reader::from_reader(text.as_bytes());
    let header = r.headers().unwrap().iter().map(String::from).collect();
    let rows = r
        .records()
        .map(|rec| rec.unwrap().iter().map(String::from).collect())
        .collect();
    (header, rows)
}

/// Column `name` of a parsed CSV as numbers (`None` for an empty field).
fn column(csv: &(Vec<String>, Vec<Vec<String>>), name: &str) -> Vec<Option<f64>> {
    let k = csv
        .0
        .iter()
        .position(|h| h == name)
        .unwrap_or_else(|| panic!("no column {name} in {:?}", csv.0));
    csv.1
        .iter()
        .map(|r| (!r[k].is_empty()).then(|| r[k].parse::<f64>().unwrap()))
        .collect()
}

/// Exports `what` (extra options `args`) to stdout and returns it.
fn export(what: &str, args: &[&str]) -> String {
    let dir = demo();
    let mut all = vec!["export", "room", "--what", what, "--out", "-"];
    all.extend_from_slice(args);
    ok(dir.parent().unwrap(), &all)
}

/// JSON values as Option<f64> (null → None).
fn maybe(v: &Value) -> Vec<Option<f64>> {
    v.as_array().unwrap().iter().map(Value::as_f64).collect()
}

/// Asserts two columns agree within `tol` and are null in the same places.
fn same(name: &str, got: &[Option<f64>], want: &[Option<f64>], tol: f64) {
    assert_eq!(got.len(), want.len(), "{name}: length");
    for (i, (g, w)) in got.iter().zip(want).enumerate() {
        match (g, w) {
            (Some(g), Some(w)) => assert!((g - w).abs() <= tol, "{name}[{i}]: {g} vs {w}"),
            (None, None) => {}
            _ => panic!("{name}[{i}]: {g:?} vs {w:?} (measured in one, not the other)"),
        }
    }
}

fn some(v: &[f64]) -> Vec<Option<f64>> {
    v.iter().copied().map(Some).collect()
}

/// Half a unit in the last printed decimal, plus a hair for the float.
fn printed(decimals: i32) -> f64 {
    0.5 * 10f64.powi(-decimals) + 1e-9
}

#[test]
fn response_csv_and_json_parse_back_to_results() {
    let r = json(&demo().join("results.json"));
    let resp = &r["response"];
    let csv = parse_csv(&export("response", &[]));
    assert_eq!(csv.0, ["frequency_hz", "magnitude_db", "phase_deg"]);
    // CSV precision: 4 decimals for Hz and dB, 3 for degrees
    same(
        "frequency_hz",
        &column(&csv, "frequency_hz"),
        &some(&numbers(&resp["frequency_hz"])),
        printed(4),
    );
    same(
        "magnitude_db",
        &column(&csv, "magnitude_db"),
        &some(&numbers(&resp["magnitude_db"])),
        printed(4),
    );
    same(
        "phase_deg",
        &column(&csv, "phase_deg"),
        &some(&numbers(&resp["phase_deg"])),
        printed(3),
    );
    let j: Value = serde_json::from_str(&export("response", &["--format", "json"])).unwrap();
    for name in ["frequency_hz", "magnitude_db", "phase_deg"] {
        // JSON keeps every digit
        same(
            name,
            &maybe(&j["data"][name]),
            &some(&numbers(&resp[name])),
            0.0,
        );
        assert!(j["units"][name].as_str().is_some_and(|u| !u.is_empty()));
    }
    assert_eq!(j["units"]["frequency_hz"], "Hz");
    assert_eq!(j["smoothing"], resp["smoothing"]);
    // the source names the folder and the SHA-256 of its results.json
    // (FIPS 180 hash, computed here with sha2 independently of gliss)
    use sha2::Digest;
    let bytes = std::fs::read(demo().join("results.json")).unwrap();
    let hex: String = sha2::Sha256::digest(&bytes)
        .iter()
        .map(|b| format!("{b:02x}"))
        .collect();
    assert_eq!(j["source"]["results_sha256"], hex.as_str());
    assert_eq!(j["source"]["folder"], "room");
}

#[test]
fn distortion_csv_and_json_parse_back_to_results() {
    let r = json(&demo().join("results.json"));
    let d = &r["distortion"];
    let thd_f = numbers(&d["thd"]["frequency_hz"]);
    let csv = parse_csv(&export("distortion", &[]));
    let j: Value = serde_json::from_str(&export("distortion", &["--format", "json"])).unwrap();
    same(
        "frequency_hz",
        &column(&csv, "frequency_hz"),
        &some(&thd_f),
        printed(4),
    );
    let thd = maybe(&d["thd"]["percent"]);
    same(
        "thd_percent",
        &column(&csv, "thd_percent"),
        &thd,
        printed(5),
    );
    same("thd_percent", &maybe(&j["data"]["thd_percent"]), &thd, 0.0);
    assert!(thd.iter().any(Option::is_some) && thd.iter().any(Option::is_none));
    for o in d["orders"].as_array().unwrap() {
        let n = o["order"].as_u64().unwrap();
        let name = format!("h{n}_db");
        // an order's grid is a stretch of the excitation grid from its start;
        // beyond its end the export has no value
        let mut want = maybe(&o["level_db"]);
        assert_eq!(numbers(&o["frequency_hz"])[..], thd_f[..want.len()]);
        want.resize(thd_f.len(), None);
        same(&name, &column(&csv, &name), &want, printed(3));
        same(&name, &maybe(&j["data"][&name]), &want, 0.0);
    }
}

#[test]
fn bands_csv_and_json_parse_back_to_results() {
    let r = json(&demo().join("results.json"));
    let mut bands: Vec<&Value> = r["bands"].as_array().unwrap().iter().collect();
    bands.push(&r["broadband"]);
    let csv = parse_csv(&export("bands", &[]));
    let j: Value = serde_json::from_str(&export("bands", &["--format", "json"])).unwrap();
    for (name, decimals) in [
        ("edt_s", 3),
        ("t20_s", 3),
        ("t30_s", 3),
        ("c50_db", 2),
        ("c80_db", 2),
        ("d50", 3),
        ("ts_s", 4),
        ("inr_db", 1),
        ("curvature_percent", 1),
        ("exact_hz", 3),
    ] {
        let want: Vec<Option<f64>> = bands.iter().map(|b| b[name].as_f64()).collect();
        same(name, &column(&csv, name), &want, printed(decimals));
        same(name, &maybe(&j["data"][name]), &want, 0.0);
    }
    let k = csv.0.iter().position(|h| h == "fraction").unwrap();
    let fractions: Vec<&str> = csv.1.iter().map(|r| r[k].as_str()).collect();
    let want: Vec<&str> = bands
        .iter()
        .map(|b| b["fraction"].as_str().unwrap())
        .collect();
    assert_eq!(fractions, want);
    assert_eq!(
        j["units"]["t30_s"].as_str().unwrap().split(',').next(),
        Some("s")
    );
}

#[test]
fn impulse_csv_and_json_parse_back_to_impulse_wav() {
    let r = json(&demo().join("results.json"));
    let (rate, ch) = read_wav(&demo().join("impulse.wav"));
    let ir = &ch[0];
    let start = r["impulse"]["start_s"].as_f64().unwrap();
    let csv = parse_csv(&export("impulse", &[]));
    assert_eq!(csv.0, ["time_s", "amplitude"]);
    let amp = column(&csv, "amplitude");
    let time = column(&csv, "time_s");
    assert_eq!(amp.len(), ir.len());
    for (i, (a, t)) in amp.iter().zip(&time).enumerate() {
        // amplitude: the shortest text that reads back as the same 32-bit
        // float; time: 9 decimals
        assert_eq!(a.unwrap() as f32, ir[i] as f32, "sample {i}");
        let want = start + i as f64 / f64::from(rate);
        assert!((t.unwrap() - want).abs() <= printed(9), "time {i}");
    }
    let j: Value = serde_json::from_str(&export("impulse", &["--format", "json"])).unwrap();
    let ja = numbers(&j["data"]["amplitude"]);
    assert!(ja.iter().zip(ir).all(|(a, b)| *a as f32 == *b as f32));
}

/// Second differences of a curve on the log grid, summed squared: how
/// rough it is.
fn roughness(v: &[f64]) -> f64 {
    v.windows(3)
        .map(|w| (w[0] - 2.0 * w[1] + w[2]).powi(2))
        .sum()
}

#[test]
fn smoothing_again_reproduces_the_folder_and_smooths_more_when_wider() {
    let r = json(&demo().join("results.json"));
    let own = r["response"]["smoothing"].as_str().unwrap().to_string();
    let want = numbers(&r["response"]["magnitude_db"]);
    let j: Value =
        serde_json::from_str(&export("response", &["--smooth", &own, "--format", "json"])).unwrap();
    assert_eq!(j["smoothing"], own.as_str());
    assert!(j["smoothed_from"].as_str().unwrap().contains("impulse.wav"));
    let got = numbers(&j["data"]["magnitude_db"]);
    // the same stages on the same impulse response (stored as 32-bit
    // float): the folder's magnitude within 0.01 dB everywhere
    assert_eq!(got.len(), want.len());
    let worst = got
        .iter()
        .zip(&want)
        .map(|(a, b)| (a - b).abs())
        .fold(0.0, f64::max);
    assert!(worst < 0.01, "worst {worst} dB");
    // a wider smoothing is smoother: averaging over 1/1 octave removes the
    // room's peaks and dips narrower than an octave, which 1/24 keeps
    // (common practice: wide smoothing for the tonal balance, narrow for
    // modes and resonances), so its second differences are far smaller
    let wide: Value = serde_json::from_str(&export(
        "response",
        &["--smooth", "1/1", "--format", "json"],
    ))
    .unwrap();
    let narrow: Value = serde_json::from_str(&export(
        "response",
        &["--smooth", "1/24", "--format", "json"],
    ))
    .unwrap();
    let (w, n) = (
        roughness(&numbers(&wide["data"]["magnitude_db"])),
        roughness(&numbers(&narrow["data"]["magnitude_db"])),
    );
    assert!(w < 0.1 * n, "1/1 {w} vs 1/24 {n}");
    // a gated folder too: the committed speaker example (auto gate, 1/12)
    let gated = Path::new(env!("CARGO_MANIFEST_DIR")).join("measurements/kestrel5-speaker");
    let r = json(&gated.join("results.json"));
    assert!(r["response"]["gate"].is_object());
    let g = gated.display().to_string();
    let j: Value = serde_json::from_str(&ok(
        demo(),
        &[
            "export", &g, "--what", "response", "--smooth", "1/12", "--format", "json", "--out",
            "-",
        ],
    ))
    .unwrap();
    let worst = numbers(&j["data"]["magnitude_db"])
        .iter()
        .zip(&numbers(&r["response"]["magnitude_db"]))
        .map(|(a, b)| (a - b).abs())
        .fold(0.0, f64::max);
    assert!(worst < 0.01, "gated: worst {worst} dB");
    // the command says what it did
    let out = ok(
        demo().parent().unwrap(),
        &[
            "export", "room", "--what", "response", "--smooth", "1/3", "--out", "r3.csv",
        ],
    );
    assert!(out.contains("1/3") && out.contains("impulse.wav"), "{out}");
}

#[test]
fn bad_input_is_refused_and_nothing_is_overwritten() {
    let t = tempfile::tempdir().unwrap();
    let dir = t.path();
    let room = demo().display().to_string();
    // not a folder
    std::fs::write(dir.join("file.txt"), "x").unwrap();
    let line = refused(
        dir,
        &["export", "file.txt", "--what", "response", "--out", "-"],
    );
    assert!(line.contains("not a folder"), "{line}");
    let line = refused(
        dir,
        &["export", "missing", "--what", "response", "--out", "-"],
    );
    assert!(line.contains("not a folder"), "{line}");
    // a folder without a manifest
    std::fs::create_dir(dir.join("empty")).unwrap();
    let line = refused(
        dir,
        &["export", "empty", "--what", "response", "--out", "-"],
    );
    assert!(line.contains("no manifest.json"), "{line}");
    // an incomplete measurement: its manifest says so
    std::fs::create_dir(dir.join("cut")).unwrap();
    let mut m = json(&demo().join("manifest.json"));
    m["complete"] = Value::Bool(false);
    m["problems"] = serde_json::json!(["stopped by the user (Ctrl-C)"]);
    std::fs::write(dir.join("cut/manifest.json"), m.to_string()).unwrap();
    let line = refused(dir, &["export", "cut", "--what", "response", "--out", "-"]);
    assert!(
        line.contains("incomplete") && line.contains("Ctrl-C"),
        "{line}"
    );
    // unknown --what, bad --smooth, --smooth where it does not apply:
    // usage errors (exit 2)
    for (args, word) in [
        (vec!["--what", "spectrum"], "--what"),
        (vec!["--what", "response", "--smooth", "1/5"], "--smooth"),
        (vec!["--what", "bands", "--smooth", "1/3"], "--smooth"),
        (vec!["--what", "response", "--format", "xml"], "--format"),
    ] {
        let mut all = vec!["export", room.as_str()];
        all.extend(args);
        all.extend(["--out", "-"]);
        let line = refused(dir, &all);
        assert!(line.contains(word), "{line}");
        assert_eq!(crate::util::run(dir, &all).status.code(), Some(2));
    }
    // an existing --out is not overwritten without --overwrite
    std::fs::write(dir.join("keep.csv"), "mine").unwrap();
    let line = refused(
        dir,
        &["export", &room, "--what", "response", "--out", "keep.csv"],
    );
    assert!(line.contains("--overwrite"), "{line}");
    assert_eq!(
        std::fs::read_to_string(dir.join("keep.csv")).unwrap(),
        "mine"
    );
    ok(
        dir,
        &[
            "export",
            &room,
            "--what",
            "response",
            "--out",
            "keep.csv",
            "--overwrite",
        ],
    );
    assert!(
        std::fs::read_to_string(dir.join("keep.csv"))
            .unwrap()
            .starts_with("frequency_hz,magnitude_db,phase_deg")
    );
    // a file of the measurement folder itself, even with --overwrite
    let before = snapshot(demo());
    let inside = demo().join("response.csv").display().to_string();
    let line = refused(
        dir,
        &[
            "export",
            &room,
            "--what",
            "response",
            "--out",
            &inside,
            "--overwrite",
        ],
    );
    assert!(line.contains("measurement folder itself"), "{line}");
    assert_eq!(snapshot(demo()), before);
}
