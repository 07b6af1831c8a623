//! A full disk: a failed write leaves nothing that blocks the retry, and
//! the error says how much room was needed.
//!
//! Portable tests make the system refuse a write the way a full disk does
//! with the largest file size a process may write (`ulimit -f`, with
//! SIGXFSZ ignored so that the write fails with EFBIG instead of killing
//! the process): every write path of gliss meets a failed write halfway,
//! as on a full disk. A test on a real full disk (a small tmpfs in a
//! private mount namespace) runs where the system allows one.

use std::path::{Path, PathBuf};
use std::process::{Command, Output};

use crate::util::{json, make_sweep, ok, snapshot};

/// Runs gliss in `dir` with `args`, allowed to write files of at most
/// `limit` bytes (rounded down to 512-byte blocks, the unit of `ulimit -f`
/// in a POSIX shell).
fn run_limited(dir: &Path, limit: u64, args: &[&str]) -> Output {
    Command::new("sh")
        .current_dir(dir)
        .arg("-c")
        .arg(format!(
            "trap '' XFSZ; ulimit -f {} && exec \"$0\" \"$@\"",
            limit / 512
        ))
        .arg(assert_cmd::cargo::cargo_bin("gliss"))
        .args(args)
        .output()
        .expect("sh runs")
}

/// Asserts a clean refusal for lack of room and returns its one line.
fn refused_for_room(o: &Output) -> String {
    let err = String::from_utf8_lossy(&o.stderr).into_owned();
    assert_eq!(o.status.code(), Some(1), "{err}");
    assert!(!err.contains("panicked"), "{err}");
    let lines: Vec<&str> = err.lines().filter(|l| !l.starts_with("warning:")).collect();
    assert_eq!(lines.len(), 1, "one error line expected, got:\n{err}");
    assert!(lines[0].starts_with("error: "), "{err}");
    assert!(
        lines[0].contains("larger than this system allows"),
        "the error names the lack of room: {err}"
    );
    lines[0].to_string()
}

/// Every file under `dir`, relative.
fn files_in(dir: &Path) -> Vec<PathBuf> {
    snapshot(dir)
        .into_keys()
        .map(|p| p.strip_prefix(dir).unwrap().to_path_buf())
        .collect()
}

/// A short sweep and the arguments that analyse it into `out`: raw files
/// of about 96 kB (16-bit), results and plots far larger.
fn small_job(d: &Path, out: &str) -> Vec<String> {
    make_sweep(
        d,
        "sweep.wav",
        &["--length", "0.5", "--tail", "0.5", "--bits", "16"],
    );
    ["analyze", "sweep.wav", "--sweep", "sweep.wav", "--out", out]
        .map(String::from)
        .to_vec()
}

/// The limit that lets the raw files through and stops the derived set
/// halfway: twice the larger raw file (checked to be below the largest
/// file the analysis writes, measured on a run without a limit).
fn halfway_limit(d: &Path, job: &[String]) -> u64 {
    let mut probe = job.to_vec();
    let n = probe.len();
    probe[n - 1] = "probe".into();
    let args: Vec<&str> = probe.iter().map(String::as_str).collect();
    ok(d, &args);
    let sizes: Vec<(PathBuf, u64)> = files_in(&d.join("probe"))
        .into_iter()
        .map(|p| {
            let len = std::fs::metadata(d.join("probe").join(&p)).unwrap().len();
            (p, len)
        })
        .collect();
    let raw = sizes
        .iter()
        .filter(|(p, _)| p.ends_with("recording.wav") || p.ends_with("stimulus.wav"))
        .map(|(_, l)| *l)
        .max()
        .unwrap();
    let largest = sizes.iter().map(|(_, l)| *l).max().unwrap();
    let limit = 2 * raw + 1024;
    assert!(
        largest > limit,
        "the test needs a derived file larger than {limit} bytes: {sizes:?}"
    );
    std::fs::remove_dir_all(d.join("probe")).unwrap();
    limit
}

#[test]
fn a_new_folder_that_cannot_be_written_whole_is_taken_away_and_the_retry_works() {
    let t = tempfile::tempdir().unwrap();
    let d = t.path();
    let job = small_job(d, "m");
    let limit = halfway_limit(d, &job);
    let before = snapshot(d);
    let args: Vec<&str> = job.iter().map(String::as_str).collect();
    let line = refused_for_room(&run_limited(d, limit, &args));
    assert!(
        line.contains("what this run wrote has been removed"),
        "{line}"
    );
    assert!(line.contains("needs more than"), "{line}");
    // nothing of the failed run is left: not the folder, not a temporary
    assert!(!d.join("m").exists(), "{:?}", files_in(d));
    assert_eq!(snapshot(d), before, "the files that existed are unchanged");
    // the same command again, with room, succeeds
    ok(d, &args);
    assert_eq!(json(&d.join("m/manifest.json"))["complete"], true);
}

#[test]
fn a_reanalysis_that_cannot_be_written_whole_keeps_the_raw_files_and_the_retry_mends_it() {
    let t = tempfile::tempdir().unwrap();
    let d = t.path();
    let job = small_job(d, "m");
    let limit = halfway_limit(d, &job);
    let mut args: Vec<&str> = job.iter().map(String::as_str).collect();
    ok(d, &args);
    let raw: Vec<Vec<u8>> = ["recording.wav", "stimulus.wav"]
        .iter()
        .map(|f| std::fs::read(d.join("m").join(f)).unwrap())
        .collect();
    args.push("--overwrite");
    let line = refused_for_room(&run_limited(d, limit, &args));
    assert!(
        line.contains("what this run wrote has been removed"),
        "{line}"
    );
    // the raw files as they were, a manifest that says the re-analysis
    // did not finish, and nothing else: no stale or half-written file
    let mut left = files_in(&d.join("m"));
    left.sort();
    assert_eq!(
        left,
        ["manifest.json", "recording.wav", "stimulus.wav"].map(PathBuf::from),
        "left: {left:?}"
    );
    for (f, bytes) in ["recording.wav", "stimulus.wav"].iter().zip(&raw) {
        assert_eq!(&std::fs::read(d.join("m").join(f)).unwrap(), bytes, "{f}");
    }
    assert_eq!(json(&d.join("m/manifest.json"))["complete"], false);
    // the same command again mends it, and every reader takes the folder
    ok(d, &args);
    assert_eq!(json(&d.join("m/manifest.json"))["complete"], true);
    ok(
        d,
        &["export", "m", "--what", "response", "--out", "response.csv"],
    );
}

#[test]
fn a_sweep_an_export_and_a_report_that_do_not_fit_leave_nothing_behind() {
    let t = tempfile::tempdir().unwrap();
    let d = t.path();
    let job = small_job(d, "m");
    let args: Vec<&str> = job.iter().map(String::as_str).collect();
    ok(d, &args);
    let before = snapshot(d);
    // a 10 s sweep (about 2.4 MB) where 64 kB may be written
    let o = run_limited(d, 65_536, &["sweep", "--out", "long.wav", "--length", "10"]);
    let line = refused_for_room(&o);
    assert!(line.contains("the file needs"), "{line}");
    assert!(line.contains("nothing was left behind"), "{line}");
    // the report (it embeds the plots) and an export, replacing an older one
    std::fs::write(d.join("old.csv"), b"an older export\n").unwrap();
    let mut with_old = before.clone();
    with_old.insert(d.join("old.csv"), b"an older export\n".to_vec());
    refused_for_room(&run_limited(d, 8192, &["report", "m", "--out", "r.html"]));
    refused_for_room(&run_limited(
        d,
        4096,
        &[
            "export",
            "m",
            "--what",
            "distortion",
            "--out",
            "old.csv",
            "--overwrite",
        ],
    ));
    // no sweep, no half file, no temporary; the older export untouched
    assert_eq!(snapshot(d), with_old, "{:?}", files_in(d));
    // the retries succeed
    ok(d, &["sweep", "--out", "long.wav", "--length", "10"]);
    ok(d, &["report", "m", "--out", "r.html"]);
}

/// Runs `script` (sh) in a private mount namespace where `$1` is a fresh
/// tmpfs of `size` (e.g. "2m"), with gliss as `$2` and `dir` as the
/// working folder; `None` when this system allows no such namespace.
fn on_small_disk(dir: &Path, size: &str, script: &str) -> Option<Output> {
    let disk = dir.join("disk");
    std::fs::create_dir_all(&disk).unwrap();
    let o = Command::new("unshare")
        .current_dir(dir)
        .args(["-r", "-m", "sh", "-c"])
        .arg(format!(
            "mount -t tmpfs -o size={size} tmpfs \"$1\" || exit 99; {script}"
        ))
        .arg("sh")
        .arg(&disk)
        .arg(assert_cmd::cargo::cargo_bin("gliss"))
        .output()
        .ok()?;
    if o.status.code() == Some(99) || String::from_utf8_lossy(&o.stderr).contains("unshare") {
        eprintln!(
            "skipped: no private tmpfs here ({})",
            String::from_utf8_lossy(&o.stderr).trim()
        );
        return None;
    }
    Some(o)
}

#[test]
fn on_a_full_disk_a_measurement_is_refused_before_it_plays_and_an_analysis_says_what_it_needed() {
    let t = tempfile::tempdir().unwrap();
    let d = t.path();
    make_sweep(d, "sweep.wav", &["--length", "2", "--tail", "1"]);
    // a 1 MB disk: the measurement's own recording would not fit
    let Some(o) = on_small_disk(
        d,
        "1m",
        "\"$2\" measure --device virtual --out \"$1/m\" --no-plots; echo \"rc=$?\"; ls -A \"$1\"; \
         \"$2\" analyze sweep.wav --sweep sweep.wav --out \"$1/a\"; echo \"rc=$?\"; ls -A \"$1\"",
    ) else {
        return;
    };
    let out = String::from_utf8_lossy(&o.stdout).into_owned();
    let err = String::from_utf8_lossy(&o.stderr).into_owned();
    assert!(!err.contains("panicked"), "{err}");
    let errors: Vec<&str> = err.lines().filter(|l| l.starts_with("error:")).collect();
    assert_eq!(errors.len(), 2, "{err}");
    // the measurement: refused with the sizes, before anything played
    assert!(errors[0].contains("needs about"), "{}", errors[0]);
    assert!(errors[0].contains("nothing was played"), "{}", errors[0]);
    assert!(!out.contains("playing"), "{out}");
    // the analysis: the disk filled on the way; it says so and how much
    // room it had, and takes its partial folder away
    assert!(errors[1].contains("the disk is full"), "{}", errors[1]);
    assert!(errors[1].contains("needs more than"), "{}", errors[1]);
    let listed: Vec<&str> = out.lines().filter(|l| !l.starts_with("rc=")).collect();
    assert!(listed.is_empty(), "left on the disk: {listed:?}\n{out}");
    assert_eq!(
        out.lines().filter(|l| *l == "rc=1").count(),
        2,
        "both refused with status 1: {out}"
    );
}
