//! One writer per folder, and the manifest as the commit point: two runs
//! into one folder never both write it, and a re-analysis killed at any
//! moment leaves either a consistent folder or one that is refused as
//! interrupted (and the next run mends it). Raw files are never touched.

use std::path::Path;

use crate::util::*;

/// A short sweep and its recording (the sweep itself, a wire), in `dir`.
fn small_recording(dir: &Path) {
    make_sweep(dir, "sweep.wav", &["--length", "0.3", "--tail", "0.2"]);
}

/// The arguments of an analysis of the small recording into `out`,
/// without plots.
fn analyze_args<'a>(out: &'a str, extra: &[&'a str]) -> Vec<&'a str> {
    let mut a = with_plots(out, extra);
    a.push("--no-plots");
    a
}

/// The arguments of an analysis of the small recording into `out`, with
/// its plots: drawn between results.json and the manifest, they make the
/// stretch a kill can cut into a large part of the run.
fn with_plots<'a>(out: &'a str, extra: &[&'a str]) -> Vec<&'a str> {
    let mut a = vec!["analyze", "sweep.wav", "--sweep", "sweep.wav", "--out", out];
    a.extend_from_slice(extra);
    a
}

/// Whether the folder opens and verifies: `gliss export` reads it through
/// `folder::open`. Returns stderr when it is refused.
fn verifies(dir: &Path, out: &str) -> Result<(), String> {
    let o = run(dir, &["export", out, "--what", "response", "--out", "-"]);
    if o.status.success() {
        Ok(())
    } else {
        Err(String::from_utf8_lossy(&o.stderr).into_owned())
    }
}

#[test]
fn a_folder_being_written_refuses_a_second_run_and_changes_nothing() {
    let t = tempfile::tempdir().unwrap();
    small_recording(t.path());
    ok(t.path(), &analyze_args("m", &[]));
    let before = snapshot(t.path());
    // this test process holds the folder, as a run that is writing it would
    let held = gliss::folder::MeasurementFolder::check(&t.path().join("m"), true, &[]).unwrap();
    let e = refused(t.path(), &analyze_args("m", &["--overwrite"]));
    assert!(
        e.contains("m is being written by another gliss run")
            && e.contains(&format!("(pid {})", std::process::id()))
            && e.contains("wait for it or choose another --out"),
        "{e}"
    );
    // a new folder too, while it is held
    let new = gliss::folder::MeasurementFolder::check(&t.path().join("n"), false, &[]).unwrap();
    let e = refused(t.path(), &analyze_args("n", &[]));
    assert!(e.contains("is being written by another gliss run"), "{e}");
    drop(new);
    drop(held);
    assert_eq!(
        snapshot(t.path()),
        before,
        "the refused runs changed nothing"
    );
    assert!(!t.path().join("n").exists());
}

#[test]
fn results_that_are_not_the_ones_the_manifest_lists_are_refused_as_interrupted() {
    // what a re-analysis cut off between results.json and its manifest
    // leaves when nothing marked the old manifest (an older gliss)
    let t = tempfile::tempdir().unwrap();
    let dir = t.path();
    small_recording(dir);
    ok(dir, &analyze_args("m", &[]));
    ok(dir, &analyze_args("other", &["--smooth", "1/12"]));
    std::fs::copy(dir.join("other/results.json"), dir.join("m/results.json")).unwrap();
    let e = refused(dir, &["export", "m", "--what", "response", "--out", "-"]);
    assert!(
        e.contains("m/results.json does not match the SHA-256 its manifest recorded")
            && e.contains("a re-analysis was interrupted")
            && e.contains("run the analysis again with --overwrite"),
        "{e}"
    );
    ok(dir, &analyze_args("m", &["--overwrite"]));
    verifies(dir, "m").unwrap();
}

#[cfg(unix)]
#[test]
fn simultaneous_runs_into_one_new_folder_leave_one_consistent_measurement() {
    use std::process::{Command, Stdio};
    let t = tempfile::tempdir().unwrap();
    small_recording(t.path());
    let mut locked = 0;
    for i in 0..20 {
        let out = format!("m{i}");
        let spawn = || {
            Command::new(env!("CARGO_BIN_EXE_gliss"))
                .current_dir(t.path())
                .args(analyze_args(&out, &[]))
                .stdout(Stdio::null())
                .stderr(Stdio::piped())
                .spawn()
                .unwrap()
        };
        let (a, b) = (spawn(), spawn());
        let runs = [a.wait_with_output().unwrap(), b.wait_with_output().unwrap()];
        let won = runs.iter().filter(|o| o.status.success()).count();
        assert_eq!(won, 1, "pair {i}: exactly one run writes the folder");
        let lost = runs.iter().find(|o| !o.status.success()).unwrap();
        let err = String::from_utf8_lossy(&lost.stderr);
        let lines: Vec<&str> = err.lines().collect();
        assert_eq!(lines.len(), 1, "pair {i}: one error line, got {err}");
        let by_lock = lines[0].contains("is being written by another gliss run");
        assert!(
            lines[0].starts_with("error: ")
                && (by_lock || lines[0].contains("already holds a measurement")),
            "pair {i}: {err}"
        );
        locked += usize::from(by_lock);
        verifies(t.path(), &out).unwrap_or_else(|e| panic!("pair {i}: {e}"));
        assert!(!t.path().join(&out).join(".lock").exists());
    }
    // the runs did overlap: the lock, not the order, decided most pairs
    assert!(locked > 0, "no pair overlapped");
    eprintln!("{locked} of 20 pairs refused by the lock");
}

#[cfg(unix)]
#[test]
fn a_killed_re_analysis_leaves_a_consistent_or_refused_folder() {
    use rand::{Rng, SeedableRng};
    use std::process::{Command, Stdio};
    use std::time::{Duration, Instant};
    let t = tempfile::tempdir().unwrap();
    let dir = t.path();
    small_recording(dir);
    ok(dir, &with_plots("m", &[]));
    let raw = std::fs::read(dir.join("m/recording.wav")).unwrap();
    // the typical run time of a re-analysis
    let start = Instant::now();
    ok(dir, &with_plots("m", &["--overwrite", "--smooth", "1/6"]));
    let typical = start.elapsed();
    let smooth = ["1/3", "1/12", "1/24", "none"];
    let mut rng = rand::rngs::StdRng::seed_from_u64(20_260_311);
    let (mut old_or_new, mut interrupted) = (0, 0);
    for i in 0..20 {
        let mut child = Command::new(env!("CARGO_BIN_EXE_gliss"))
            .current_dir(dir)
            .args(with_plots("m", &["--overwrite", "--smooth", smooth[i % 4]]))
            .stdout(Stdio::null())
            .stderr(Stdio::null())
            .spawn()
            .unwrap();
        let at = typical.mul_f64(rng.random_range(0.0..1.0));
        std::thread::sleep(at);
        child.kill().unwrap(); // SIGKILL on Unix
        child.wait().unwrap();
        match verifies(dir, "m") {
            Ok(()) => old_or_new += 1,
            Err(e) => {
                assert!(
                    e.starts_with("error: ")
                        && e.lines().count() == 1
                        && e.contains("interrupted")
                        && e.contains("run the analysis again with --overwrite"),
                    "kill {i} after {at:?}: {e}"
                );
                interrupted += 1;
            }
        }
        // the next run mends it, and cleans up what the killed one left
        ok(dir, &with_plots("m", &["--overwrite", "--smooth", "1/6"]));
        verifies(dir, "m").unwrap_or_else(|e| panic!("after kill {i}: {e}"));
        let left: Vec<String> = ["m", "m/plots"]
            .iter()
            .flat_map(|d| std::fs::read_dir(dir.join(d)).unwrap().flatten())
            .map(|e| e.file_name().to_string_lossy().into_owned())
            .filter(|n| n.starts_with('.'))
            .collect();
        assert!(left.is_empty(), "after kill {i}: left behind {left:?}");
        assert_eq!(std::fs::read(dir.join("m/recording.wav")).unwrap(), raw);
    }
    eprintln!(
        "20 kills within {:?}: {old_or_new} consistent, {interrupted} refused as interrupted",
        typical + Duration::ZERO
    );
}
