//! Opens a measurement folder through the library's one folder reader and
//! prints its reverberation time per octave band. Run with
//! `cargo run --example folder_t30 -- measurements/rehearsal-room/before-1`
//! (without an argument it reads that committed example folder).

use std::path::{Path, PathBuf};

use gliss::folder;
use gliss::model::{Fraction, Parameter};

/// The folder to read: the first argument, else the committed example.
fn folder_arg() -> PathBuf {
    std::env::args_os().nth(1).map_or_else(
        || Path::new(env!("CARGO_MANIFEST_DIR")).join("measurements/rehearsal-room/before-1"),
        PathBuf::from,
    )
}

/// The octave-band T30 of `dir`, with the reason where it was withheld.
pub fn octave_t30(dir: &Path) -> gliss::Result<Vec<(f64, Result<f64, String>)>> {
    // open() refuses an incomplete folder or one whose raw files changed
    let f = folder::open(dir)?;
    let (_, results) = f.measurement("give one of the measurement folders it compared")?;
    Ok(results
        .bands
        .iter()
        .filter(|b| b.fraction == Fraction::Octave)
        .map(|b| {
            let t30 = b.get(Parameter::T30).ok_or_else(|| {
                b.warnings
                    .iter()
                    .find(|w| w.message.contains("T30") || w.message.contains("nothing measured"))
                    .map_or_else(|| "not measured".to_string(), |w| w.message.clone())
            });
            (b.center_hz, t30)
        })
        .collect())
}

/// Prints the table of `dir` (public so that the integration tests run it
/// too).
pub fn run(dir: &Path) -> gliss::Result<()> {
    println!("{}: T30 per octave band", dir.display());
    for (hz, t30) in octave_t30(dir)? {
        match t30 {
            Ok(t) => println!("{hz:>7} Hz  {}", Parameter::T30.show_with_unit(t)),
            Err(why) => println!("{hz:>7} Hz  —  ({why})"),
        }
    }
    Ok(())
}

/// The folder named on the command line, or the committed example.
pub fn main() -> gliss::Result<()> {
    run(&folder_arg())
}
