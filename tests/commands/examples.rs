//! The committed example folders in measurements/ still come out of the
//! code as it is: every position is analysed again from its raw files, the
//! averages and the comparison are made again from those, and the numbers
//! must agree with what is committed. The example programs in examples/
//! are compiled into this test binary and run.

use std::path::{Path, PathBuf};

use serde_json::Value;

use crate::util::*;

#[path = "../../examples/compare_folders.rs"]
mod compare_folders;
#[path = "../../examples/folder_t30.rs"]
mod folder_t30;
/// The example programs, compiled in here so that the tests run them.
#[path = "../../examples/known_filter.rs"]
mod known_filter;
#[path = "../../examples/measure_virtual.rs"]
mod measure_virtual;

#[test]
fn the_example_programs_run() {
    known_filter::main().expect("examples/known_filter.rs runs");
    measure_virtual::main().expect("examples/measure_virtual.rs runs");
    // their main reads the command line, which here is the test runner's:
    // run them on the committed folders instead (main is still compiled)
    let _mains: [fn() -> gliss::Result<()>; 2] = [folder_t30::main, compare_folders::main];
    let room = examples().join("rehearsal-room");
    folder_t30::run(&room.join("before-1")).expect("examples/folder_t30.rs runs");
    compare_folders::run(&room.join("before"), &room.join("after"))
        .expect("examples/compare_folders.rs runs");
}

#[test]
fn the_folder_examples_agree_with_the_committed_files() {
    let root = examples().join("rehearsal-room");
    // the T30 the example reads is results.json's
    let t30 = folder_t30::octave_t30(&root.join("before-1")).unwrap();
    let r = json(&root.join("before-1/results.json"));
    let octaves: Vec<&Value> = r["bands"]
        .as_array()
        .unwrap()
        .iter()
        .filter(|b| b["fraction"] == "1/1")
        .collect();
    assert_eq!(t30.len(), octaves.len());
    for ((hz, t), b) in t30.iter().zip(&octaves) {
        assert_eq!(*hz, b["center_hz"].as_f64().unwrap());
        assert_eq!(t.as_ref().ok().copied(), b["t30_s"].as_f64(), "{hz} Hz");
    }
    // the library's verdict is the one gliss compare stored
    let verdicts =
        compare_folders::octave_verdicts(&root.join("before"), &root.join("after")).unwrap();
    let c = json(&root.join("comparison/comparison.json"));
    let stored: Vec<(f64, String)> = c["bands"]
        .as_array()
        .unwrap()
        .iter()
        .filter(|b| b["fraction"] == "1/1" && b["parameter"] == "t30_s")
        .map(|b| {
            (
                b["center_hz"].as_f64().unwrap(),
                b["verdict"][1].as_str().unwrap().to_string(),
            )
        })
        .collect();
    assert_eq!(verdicts.len(), stored.len());
    for ((hz, v), (shz, code)) in verdicts.iter().zip(&stored) {
        assert_eq!(hz, shz);
        assert_eq!(v.code(), code, "{hz} Hz");
    }
}

fn examples() -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join("measurements")
}

/// `a` and `b` agree: the same shape, strings equal, numbers within `tol`
/// (relative to their size, at least absolute `tol`).
fn agree(a: &Value, b: &Value, tol: f64, at: &str) {
    match (a, b) {
        (Value::Number(x), Value::Number(y)) => {
            let (x, y) = (x.as_f64().unwrap(), y.as_f64().unwrap());
            assert!(
                (x - y).abs() <= tol * x.abs().max(1.0),
                "{at}: committed {x}, now {y}"
            );
        }
        (Value::Array(x), Value::Array(y)) => {
            assert_eq!(x.len(), y.len(), "{at}: length");
            for (i, (p, q)) in x.iter().zip(y).enumerate() {
                agree(p, q, tol, &format!("{at}[{i}]"));
            }
        }
        (Value::Object(x), Value::Object(y)) => {
            for (k, v) in x {
                // where the folder was made from is not a result
                if k == "folder" || k == "sha256" || k == "results_sha256" || k == "file" {
                    continue;
                }
                let w = y.get(k).unwrap_or_else(|| panic!("{at}.{k} is gone"));
                agree(v, w, tol, &format!("{at}.{k}"));
            }
        }
        _ => assert_eq!(a, b, "{at}"),
    }
}

/// The analyze options that reproduce a folder's settings.
fn settings(dir: &Path) -> Vec<String> {
    let m = json(&dir.join("manifest.json"));
    let r = json(&dir.join("results.json"));
    let s = &m["settings"];
    let mut args = vec![
        "--smooth".to_string(),
        s["smoothing"].as_str().unwrap().to_string(),
        "--harmonics".into(),
        s["harmonics"].to_string(),
        if s["bands"] == true {
            "--bands"
        } else {
            "--no-bands"
        }
        .into(),
        "--no-plots".into(),
        "--gate".into(),
    ];
    let g = &r["response"]["gate"];
    args.push(if g.is_null() {
        "none".into()
    } else if g["auto"] == true {
        "auto".into()
    } else {
        format!(
            "{},{}",
            g["start_s"].as_f64().unwrap() * 1e3,
            g["end_s"].as_f64().unwrap() * 1e3
        )
    });
    args
}

fn reanalyse(dir: &Path, out: &Path) {
    let mut args: Vec<String> = vec![
        "analyze".into(),
        dir.join("recording.wav").display().to_string(),
        "--sweep".into(),
        dir.join("stimulus.wav").display().to_string(),
        "--out".into(),
        out.display().to_string(),
    ];
    args.extend(settings(dir));
    let refs: Vec<&str> = args.iter().map(String::as_str).collect();
    ok(out.parent().unwrap(), &refs);
}

#[test]
fn the_committed_examples_still_come_out() {
    let t = tempfile::tempdir().unwrap();
    let root = examples();
    // every measurement folder, from its raw files
    let mut positions = Vec::new();
    for name in [
        "rehearsal-room/before-1",
        "rehearsal-room/before-2",
        "rehearsal-room/before-3",
        "rehearsal-room/after-1",
        "rehearsal-room/after-2",
        "rehearsal-room/after-3",
        "kestrel5-speaker",
    ] {
        let dir = root.join(name);
        let out = t.path().join(name.replace('/', "_"));
        reanalyse(&dir, &out);
        let mut committed = json(&dir.join("results.json"));
        let mut now = json(&out.join("results.json"));
        // the same numbers; the words of the warnings may name paths
        committed["warnings"] = Value::Null;
        now["warnings"] = Value::Null;
        agree(&committed, &now, 1e-6, name);
        positions.push(out);
    }
    // the averages and the comparison, from the positions made again
    let p = |k: usize| positions[k].display().to_string();
    for (name, range) in [("before", 0..3), ("after", 3..6)] {
        let out = t.path().join(name);
        let mut args = vec!["average".to_string()];
        args.extend(range.map(p));
        args.extend([
            "--out".into(),
            out.display().to_string(),
            "--labels".into(),
            "position 1,position 2,position 3".into(),
            "--no-plots".into(),
        ]);
        let refs: Vec<&str> = args.iter().map(String::as_str).collect();
        ok(t.path(), &refs);
        let mut committed = json(&root.join("rehearsal-room").join(name).join("results.json"));
        let mut now = json(&out.join("results.json"));
        committed["warnings"] = Value::Null;
        now["warnings"] = Value::Null;
        agree(&committed, &now, 1e-6, name);
    }
    ok(
        t.path(),
        &[
            "compare",
            "before",
            "after",
            "--out",
            "comparison",
            "--labels",
            "before treatment,after treatment",
            "--volume",
            &format!("{}", 4.6 * 3.8 * 2.6),
            "--no-plots",
        ],
    );
    let committed = json(&root.join("rehearsal-room/comparison/comparison.json"));
    let now = json(&t.path().join("comparison/comparison.json"));
    agree(&committed["bands"], &now["bands"], 1e-6, "comparison.bands");
    agree(
        &committed["absorption"],
        &now["absorption"],
        1e-6,
        "comparison.absorption",
    );
}

#[test]
fn the_committed_folders_hold_what_their_manifests_say() {
    // every file a manifest lists is there with that SHA-256
    let root = examples();
    let mut checked = 0;
    let mut stack = vec![root.clone()];
    while let Some(d) = stack.pop() {
        for e in std::fs::read_dir(&d).unwrap() {
            let p = e.unwrap().path();
            if p.is_dir() {
                stack.push(p);
            }
        }
        let m = d.join("manifest.json");
        if !m.is_file() {
            continue;
        }
        let m = json(&m);
        assert_eq!(m["complete"], true, "{}", d.display());
        for f in m["files"].as_array().unwrap() {
            let bytes = std::fs::read(d.join(f["name"].as_str().unwrap())).unwrap();
            assert_eq!(
                f["sha256"].as_str().unwrap(),
                gliss::folder::sha256_hex(&bytes),
                "{}/{}",
                d.display(),
                f["name"]
            );
            checked += 1;
        }
    }
    assert!(checked > 50, "only {checked} files checked");
}
