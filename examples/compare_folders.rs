//! Compares two measurement folders band by band with the library and
//! prints the verdict on each octave's T30: the same verdict `gliss
//! compare` stores in comparison.json. Nothing is written. Run with
//! `cargo run --example compare_folders -- BEFORE AFTER` (without
//! arguments it compares the committed example's averages).

use std::path::{Path, PathBuf};

use gliss::analysis::compare::{Verdict, judge, t_uncertainty};
use gliss::folder;
use gliss::model::{Fraction, Parameter};

/// The octave-band T30 of a folder with its standard uncertainty: the
/// spread over positions for an average, else ISO 3382-2's formula.
/// A band's centre, its T30 and the T30's standard uncertainty.
type Point = (f64, Option<f64>, Option<f64>);

fn t30_with_uncertainty(dir: &Path) -> gliss::Result<Vec<Point>> {
    let f = folder::open(dir)?;
    let (_, r) = f.measurement("give the measurement folders it compared")?;
    let positions = r.average.as_ref().map_or(1, |a| a.positions);
    Ok(r.bands
        .iter()
        .filter(|b| b.fraction == Fraction::Octave)
        .map(|b| {
            let t = b.get(Parameter::T30);
            let u = t.and_then(
                |t| match b.spread.as_ref().and_then(|s| s.get(&Parameter::T30)) {
                    Some(s) if s.n >= 2 => s.std.map(|std| std / (s.n as f64).sqrt()),
                    _ => t_uncertainty(
                        Parameter::T30,
                        t,
                        Fraction::Octave.uncertainty_bandwidth_hz(b.center_hz)?,
                        1,
                        positions,
                    ),
                },
            );
            (b.center_hz, t, u)
        })
        .collect())
}

/// The verdict on each octave band both folders measured.
pub fn octave_verdicts(before: &Path, after: &Path) -> gliss::Result<Vec<(f64, Verdict)>> {
    let a = t30_with_uncertainty(before)?;
    let b = t30_with_uncertainty(after)?;
    Ok(a.iter()
        .filter_map(|(hz, t0, u0)| {
            let (_, t1, u1) = b.iter().find(|x| (x.0 - hz).abs() < 1e-6 * hz)?;
            let c = judge(Parameter::T30, &[*t0, *t1], &[*u0, *u1]);
            Some((*hz, c.verdict[1]?))
        })
        .collect())
}

/// Prints the verdicts of `after` against `before` (public so that the
/// integration tests run it too).
pub fn run(before: &Path, after: &Path) -> gliss::Result<()> {
    println!("T30 of {} against {}:", after.display(), before.display());
    for (hz, v) in octave_verdicts(before, after)? {
        println!("{hz:>7} Hz  {}", v.words());
    }
    Ok(())
}

/// The two folders named on the command line, or the committed example's
/// averages.
pub fn main() -> gliss::Result<()> {
    let root = Path::new(env!("CARGO_MANIFEST_DIR")).join("measurements/rehearsal-room");
    let mut args = std::env::args_os().skip(1).map(PathBuf::from);
    let before = args.next().unwrap_or_else(|| root.join("before"));
    let after = args.next().unwrap_or_else(|| root.join("after"));
    run(&before, &after)
}
