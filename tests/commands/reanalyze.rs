//! `gliss reanalyze`: folders analysed again in place from their raw files
//! with new settings, in parallel, the raw files untouched, each folder
//! keeping its profile unless told, and the results the same whether the
//! folders run on one thread or many.

use std::path::Path;

use crate::util::*;

fn bytes(p: &Path) -> Vec<u8> {
    std::fs::read(p).unwrap()
}

#[test]
fn reanalyze_applies_new_settings_in_place_and_keeps_the_raw_files() {
    let t = tempfile::tempdir().unwrap();
    let dir = t.path();
    let short = ["--length", "1", "--tail", "0.6", "--no-plots"];
    for (name, seed, extra) in [
        ("a", "1", None),
        ("b", "2", None),
        ("s", "3", Some("speaker")),
    ] {
        let mut args = vec!["demo", "--single", "--out", name, "--seed", seed];
        args.extend(short);
        if let Some(p) = extra {
            args.extend(["--profile", p]);
        }
        ok(dir, &args);
    }
    let raw_before: Vec<Vec<u8>> = ["a", "b", "s"]
        .iter()
        .flat_map(|d| ["recording.wav", "stimulus.wav"].map(|f| bytes(&dir.join(d).join(f))))
        .collect();
    let out = ok(
        dir,
        &["reanalyze", "a", "b", "s", "--smooth", "1/3", "--no-plots"],
    );
    assert_eq!(out.matches("analysed ").count(), 3, "{out}");
    let raw_after: Vec<Vec<u8>> = ["a", "b", "s"]
        .iter()
        .flat_map(|d| ["recording.wav", "stimulus.wav"].map(|f| bytes(&dir.join(d).join(f))))
        .collect();
    assert!(raw_before == raw_after, "a raw file changed");
    for d in ["a", "b", "s"] {
        let r = json(&dir.join(d).join("results.json"));
        assert_eq!(r["response"]["smoothing"], "1/3", "{d}");
        let m = json(&dir.join(d).join("manifest.json"));
        assert_eq!(m["command_line"][1], "reanalyze");
        assert_eq!(m["complete"], true);
    }
    // the speaker folder kept its profile and so its gate and no bands
    let s = json(&dir.join("s/results.json"));
    assert_eq!(s["response"]["gate"]["auto"], true);
    assert!(s["bands"].as_array().unwrap().is_empty());
    let m = json(&dir.join("s/manifest.json"));
    assert_eq!(m["settings"]["profile"], "speaker");
    // the same as analysing the folder's own files with analyze
    ok(
        dir,
        &[
            "analyze",
            "a/recording.wav",
            "--sweep",
            "a/stimulus.wav",
            "--out",
            "a2",
            "--smooth",
            "1/3",
            "--no-plots",
            "--profile",
            "music",
        ],
    );
    let mut x = json(&dir.join("a/results.json"));
    let mut y = json(&dir.join("a2/results.json"));
    // the sweep file's path differs; everything measured is the same
    for v in [&mut x, &mut y] {
        v.as_object_mut().unwrap().remove("warnings");
        v.as_object_mut().unwrap().remove("warning_codes");
    }
    assert_eq!(x, y);
}

#[test]
fn folders_give_the_same_results_on_one_thread_and_on_many() {
    let t = tempfile::tempdir().unwrap();
    let dir = t.path();
    let names: Vec<String> = (1..=6).map(|k| format!("p{k}")).collect();
    for (k, n) in names.iter().enumerate() {
        let seed = (10 + k).to_string();
        ok(
            dir,
            &[
                "demo",
                "--single",
                "--out",
                n,
                "--seed",
                &seed,
                "--length",
                "1",
                "--tail",
                "0.6",
                "--no-plots",
            ],
        );
    }
    let args = |extra: &[&str]| {
        let mut v: Vec<String> = vec!["reanalyze".into()];
        v.extend(names.iter().cloned());
        v.extend(extra.iter().map(|s| s.to_string()));
        v
    };
    let run_with = |threads: &str| -> Vec<Vec<u8>> {
        let a = args(&["--smooth", "1/12", "--no-plots"]);
        let o = std::process::Command::new(env!("CARGO_BIN_EXE_gliss"))
            .args(&a)
            .current_dir(dir)
            .env("RAYON_NUM_THREADS", threads)
            .output()
            .unwrap();
        assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
        names
            .iter()
            .map(|n| bytes(&dir.join(n).join("results.json")))
            .collect()
    };
    let one = run_with("1");
    let many = run_with("4");
    assert!(one == many, "results differ between one thread and four");
}

#[test]
fn reanalyze_refuses_what_it_cannot_make_again_and_goes_on_with_the_rest() {
    let t = tempfile::tempdir().unwrap();
    let dir = t.path();
    let short = ["--length", "1", "--tail", "0.6", "--no-plots"];
    for n in ["a", "b"] {
        let mut args = vec!["demo", "--single", "--out", n];
        args.extend(short);
        ok(dir, &args);
    }
    let e = refused(dir, &["reanalyze", "a", "./a"]);
    assert!(e.contains("given twice"), "{e}");
    // a changed raw file: that folder is refused by name, the other is done
    let rec = dir.join("b/recording.wav");
    let mut data = bytes(&rec);
    let last = data.len() - 1;
    data[last] ^= 1;
    std::fs::write(&rec, data).unwrap();
    let before = bytes(&dir.join("a/results.json"));
    let o = run(
        dir,
        &["reanalyze", "a", "b", "--smooth", "1/3", "--no-plots"],
    );
    assert!(!o.status.success());
    let err = String::from_utf8_lossy(&o.stderr);
    assert!(err.contains("b") && err.contains("recording.wav"), "{err}");
    assert!(
        err.lines()
            .last()
            .unwrap()
            .starts_with("error: 1 of 2 folders"),
        "{err}"
    );
    assert!(
        bytes(&dir.join("a/results.json")) != before,
        "a was analysed again"
    );
    // an average has no recording of its own
    ok(
        dir,
        &[
            "demo",
            "--single",
            "--out",
            "c",
            "--seed",
            "9",
            "--length",
            "1",
            "--tail",
            "0.6",
            "--no-plots",
        ],
    );
    ok(dir, &["average", "a", "c", "--out", "avg", "--no-plots"]);
    let e = refused(dir, &["reanalyze", "avg"]);
    assert!(
        e.contains("is an average") && e.contains("gliss average again"),
        "{e}"
    );
}

#[test]
fn each_folder_keeps_its_own_gate_and_smoothing_unless_given() {
    // a fixed gate and 1/12-octave smoothing, then new distortion orders
    // only: the gate and the smoothing stay (new smoothing used to take
    // the gate away, and a directivity series in a room with it)
    let t = tempfile::tempdir().unwrap();
    let dir = t.path();
    let short = ["--length", "1", "--tail", "0.6", "--no-plots"];
    let mut args = vec![
        "demo", "--single", "--out", "g", "--gate", "-1,4", "--smooth", "1/12",
    ];
    args.extend(short);
    ok(dir, &args);
    let gate = |d: &str| json(&dir.join(d).join("results.json"))["response"]["gate"].clone();
    let smoothing =
        |d: &str| json(&dir.join(d).join("results.json"))["response"]["smoothing"].clone();
    assert_eq!(gate("g")["end_s"], 0.004);
    ok(dir, &["reanalyze", "g", "--harmonics", "3", "--no-plots"]);
    assert_eq!(gate("g")["start_s"], -0.001);
    assert_eq!(gate("g")["end_s"], 0.004);
    assert_eq!(gate("g")["auto"], false);
    assert_eq!(smoothing("g"), "1/12");
    // new smoothing keeps the gate
    ok(dir, &["reanalyze", "g", "--smooth", "1/3", "--no-plots"]);
    assert_eq!(gate("g")["end_s"], 0.004);
    assert_eq!(smoothing("g"), "1/3");
    // --gate none takes it away; a new --profile brings its own defaults
    ok(dir, &["reanalyze", "g", "--gate", "none", "--no-plots"]);
    assert!(gate("g").is_null());
    assert_eq!(smoothing("g"), "1/3");
    ok(
        dir,
        &["reanalyze", "g", "--profile", "speaker", "--no-plots"],
    );
    assert_eq!(gate("g")["auto"], true);
    assert_eq!(smoothing("g"), "1/12");
}
