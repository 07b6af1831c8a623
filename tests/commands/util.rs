//! Helpers shared by the integration tests.

use std::collections::BTreeMap;
use std::path::{Path, PathBuf};
use std::process::Output;

use assert_cmd::Command;
use serde_json::Value;

/// The gliss binary under test.
pub fn gliss() -> Command {
    Command::cargo_bin("gliss").expect("the gliss binary is built")
}

/// Runs gliss with `args` in `dir`.
pub fn run(dir: &Path, args: &[&str]) -> Output {
    gliss()
        .current_dir(dir)
        .args(args)
        .output()
        .expect("gliss runs")
}

/// Asserts success and returns stdout.
pub fn ok(dir: &Path, args: &[&str]) -> String {
    let o = run(dir, args);
    assert!(
        o.status.success(),
        "gliss {args:?} failed\n--- stdout\n{}\n--- stderr\n{}",
        String::from_utf8_lossy(&o.stdout),
        String::from_utf8_lossy(&o.stderr)
    );
    String::from_utf8_lossy(&o.stdout).into_owned()
}

/// Asserts a clean refusal: non-zero exit, exactly one line on stderr that
/// starts with `error:`, no panic. Returns that line.
pub fn refused(dir: &Path, args: &[&str]) -> String {
    let o = run(dir, args);
    let err = String::from_utf8_lossy(&o.stderr).into_owned();
    assert!(
        !o.status.success(),
        "gliss {args:?} should fail; stderr: {err}"
    );
    assert!(!err.contains("panicked"), "gliss {args:?} panicked: {err}");
    let lines: Vec<&str> = err.lines().collect();
    assert_eq!(
        lines.len(),
        1,
        "one error line expected for {args:?}, got:\n{err}"
    );
    assert!(lines[0].starts_with("error: "), "{err}");
    lines[0].to_string()
}

/// Writes a sweep with `gliss sweep` and returns its path.
pub fn make_sweep(dir: &Path, name: &str, extra: &[&str]) -> PathBuf {
    let mut args = vec!["sweep", "--out", name];
    args.extend_from_slice(extra);
    ok(dir, &args);
    dir.join(name)
}

/// Reads a mono or multichannel WAV as f64 per channel (full scale ±1),
/// with hound directly, independently of gliss's reader.
pub fn read_wav(path: &Path) -> (u32, Vec<Vec<f64>>) {
    let mut r = hound::WavReader::open(path).expect("a WAV file");
    let spec = r.spec();
    let nch = spec.channels as usize;
    let samples: Vec<f64> = match spec.sample_format {
        hound::SampleFormat::Float => r.samples::<f32>().map(|s| s.unwrap() as f64).collect(),
        hound::SampleFormat::Int => {
            let scale = 1.0 / (1u64 << (spec.bits_per_sample - 1)) as f64;
            r.samples::<i32>()
                .map(|s| s.unwrap() as f64 * scale)
                .collect()
        }
    };
    let mut ch = vec![Vec::new(); nch];
    for (i, v) in samples.into_iter().enumerate() {
        ch[i % nch].push(v);
    }
    (spec.sample_rate, ch)
}

/// Writes channels as a 32-bit float WAV.
pub fn write_wav_f32(path: &Path, rate: u32, channels: &[Vec<f64>]) {
    let spec = hound::WavSpec {
        channels: channels.len() as u16,
        sample_rate: rate,
        bits_per_sample: 32,
        sample_format: hound::SampleFormat::Float,
    };
    let mut w = hound::WavWriter::create(path, spec).unwrap();
    for n in 0..channels[0].len() {
        for c in channels {
            w.write_sample(c[n] as f32).unwrap();
        }
    }
    w.finalize().unwrap();
}

/// Writes channels as integer PCM of `bits` bits.
pub fn write_wav_int(path: &Path, rate: u32, bits: u16, channels: &[Vec<f64>]) {
    let spec = hound::WavSpec {
        channels: channels.len() as u16,
        sample_rate: rate,
        bits_per_sample: bits,
        sample_format: hound::SampleFormat::Int,
    };
    let full = (1i64 << (bits - 1)) as f64;
    let mut w = hound::WavWriter::create(path, spec).unwrap();
    for n in 0..channels[0].len() {
        for c in channels {
            let v = (c[n] * full).round().clamp(-full, full - 1.0) as i32;
            w.write_sample(v).unwrap();
        }
    }
    w.finalize().unwrap();
}

/// Parses a JSON file.
pub fn json(path: &Path) -> Value {
    serde_json::from_str(&std::fs::read_to_string(path).unwrap()).unwrap()
}

/// A JSON array of numbers as Vec<f64>.
pub fn numbers(v: &Value) -> Vec<f64> {
    v.as_array()
        .expect("an array")
        .iter()
        .map(|x| x.as_f64().expect("a number"))
        .collect()
}

/// Every file under `dir` with its bytes, to prove nothing was touched.
pub fn snapshot(dir: &Path) -> BTreeMap<PathBuf, Vec<u8>> {
    let mut out = BTreeMap::new();
    let mut stack = vec![dir.to_path_buf()];
    while let Some(d) = stack.pop() {
        for e in std::fs::read_dir(&d).unwrap() {
            let p = e.unwrap().path();
            if p.is_dir() {
                stack.push(p);
            } else {
                out.insert(p.clone(), std::fs::read(&p).unwrap());
            }
        }
    }
    out
}

/// Wraps degrees to (−180, 180].
pub fn wrap_deg(d: f64) -> f64 {
    let w = (d + 180.0).rem_euclid(360.0) - 180.0;
    if w == -180.0 { 180.0 } else { w }
}

/// Makes `sweep.wav` in `dir` with `sweep_args`, runs it through `device`
/// (a function of the test's own) and writes the result as `dut.wav`.
pub fn record_device(dir: &Path, sweep_args: &[&str], device: impl Fn(&[f64]) -> Vec<f64>) {
    let sweep = make_sweep(dir, "sweep.wav", sweep_args);
    let x = read_wav(&sweep).1.remove(0);
    write_wav_f32(&dir.join("dut.wav"), 48_000, &[device(&x)]);
}

/// Analyses `dut.wav` against `sweep.wav` in `dir` into `out` with the
/// extra options `args`; returns its results.json.
pub fn analyze_device(dir: &Path, out: &str, args: &[&str]) -> Value {
    let mut all = vec!["analyze", "dut.wav", "--sweep", "sweep.wav", "--out", out];
    all.extend_from_slice(args);
    ok(dir, &all);
    json(&dir.join(out).join("results.json"))
}

/// Two single demo measurements, `a` and `b` (seeds 1 and 2, no plots),
/// in `dir`: two positions of one room.
pub fn two_positions(dir: &Path) {
    for (name, seed) in [("a", "1"), ("b", "2")] {
        ok(
            dir,
            &[
                "demo",
                "--single",
                "--out",
                name,
                "--no-plots",
                "--seed",
                seed,
            ],
        );
    }
}
