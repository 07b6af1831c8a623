//! The library stands alone: without its default features it depends on
//! neither the sound card (cpal) nor the plots (plotters) nor the command
//! line's crates, and with them it has both. `cargo tree` only resolves the
//! dependency graph; nothing is built.

use std::collections::BTreeSet;
use std::process::Command;

#[cfg(not(feature = "soundcard"))]
use crate::util::*;

/// The names of the normal (not dev or build) dependencies of gliss, with
/// `extra` arguments to `cargo tree`.
fn dependencies(extra: &[&str]) -> BTreeSet<String> {
    let cargo = std::env::var("CARGO").unwrap_or_else(|_| "cargo".into());
    let o = Command::new(&cargo)
        .current_dir(env!("CARGO_MANIFEST_DIR"))
        .args(["tree", "--offline", "-e", "normal", "--prefix", "none"])
        .args(extra)
        .output()
        .expect("cargo runs");
    assert!(
        o.status.success(),
        "cargo tree {extra:?} failed:\n{}",
        String::from_utf8_lossy(&o.stderr)
    );
    // one crate a line: "name vX.Y.Z (...)"
    String::from_utf8_lossy(&o.stdout)
        .lines()
        .filter_map(|l| l.split_whitespace().next())
        .map(str::to_string)
        .collect()
}

#[test]
fn without_default_features_the_library_has_no_sound_card_plots_or_cli() {
    let deps = dependencies(&["--no-default-features"]);
    assert!(
        deps.contains("gliss") && deps.contains("realfft"),
        "{deps:?}"
    );
    for absent in ["cpal", "rtrb", "plotters", "clap", "indicatif", "ctrlc"] {
        assert!(
            !deps.contains(absent),
            "{absent} is a dependency without default features"
        );
    }
}

#[test]
fn with_default_features_the_sound_card_plots_and_cli_are_there() {
    let deps = dependencies(&[]);
    for present in ["cpal", "rtrb", "plotters", "clap", "indicatif", "ctrlc"] {
        assert!(
            deps.contains(present),
            "{present} is missing with the default features: {deps:?}"
        );
    }
}

#[test]
#[cfg(not(feature = "soundcard"))]
fn a_build_without_the_sound_card_says_so_and_the_virtual_system_still_measures() {
    let t = tempfile::tempdir().unwrap();
    for args in [
        &["devices"][..],
        &["measure", "--out", "m"],
        &["calibrate", "--record", "2", "--out", "cal.json"],
    ] {
        let line = refused(t.path(), args);
        assert!(line.contains("no sound-card support"), "{line}");
        assert!(line.contains("default features"), "{line}");
    }
    assert!(std::fs::read_dir(t.path()).unwrap().next().is_none());
    ok(
        t.path(),
        &[
            "measure",
            "--device",
            "virtual",
            "--out",
            "v",
            "--length",
            "1",
            "--tail",
            "1",
            "--no-bands",
            "--no-plots",
        ],
    );
    assert!(t.path().join("v/results.json").is_file());
}
