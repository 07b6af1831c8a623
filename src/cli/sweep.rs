//! `gliss sweep`: write a sweep and its parameters.

use std::path::PathBuf;

use clap::Args as ClapArgs;

use crate::cli::common::SweepArgs;
use gliss::error::{Error, ErrorKind, Result};
use gliss::folder::write::{write_new, write_replacing};
use gliss::session::sweep_file;
use gliss::signal::wav::{self, SampleEncoding};

/// Options of `gliss sweep`.
#[derive(Debug, ClapArgs)]
#[command(
    after_help = "Writes FILE.wav and FILE.json beside it; analysis needs both. \
Existing files are never overwritten.\n\nSafety: sweeps are loud. Protect your hearing, \
start low, mind tweeters at high levels, and follow local rules on noise exposure."
)]
pub struct Args {
    /// The WAV file to write (must end in .wav and not exist yet).
    #[arg(long, value_name = "FILE.wav")]
    pub out: PathBuf,
    #[command(flatten)]
    pub sweep: SweepArgs,
    /// Sample format: 16 or 24 (integer) or 32 (float).
    #[arg(long, value_name = "16|24|32", default_value_t = 32)]
    pub bits: u16,
    /// Replace an existing sweep file and its description (a sweep is
    /// made again exactly from its settings, so nothing is lost).
    #[arg(long)]
    pub overwrite: bool,
}

/// Runs `gliss sweep`.
pub fn run(a: Args) -> Result<()> {
    let design = a.sweep.design()?;
    let encoding = SampleEncoding::from_bits(a.bits)?;
    let is_wav = a
        .out
        .extension()
        .is_some_and(|e| e.eq_ignore_ascii_case("wav"));
    if !is_wav {
        return Err(Error::parameter(format!(
            "--out {} must end in .wav",
            a.out.display()
        )));
    }
    let side = sweep_file::sidecar_path(&a.out);
    for p in [&a.out, &side] {
        if p.exists() && !a.overwrite {
            return Err(Error::new(
                ErrorKind::AlreadyExists,
                format!(
                    "{} already exists; choose another --out, or add --overwrite to replace it",
                    p.display()
                ),
            ));
        }
    }
    let x = design.generate();
    let bytes = wav::encode_wav(&[&x], design.params.sample_rate_hz, encoding);
    let file = a
        .out
        .file_name()
        .map(|n| n.to_string_lossy().into_owned())
        .unwrap_or_default();
    let json = sweep_file::describe(&design, &file, &encoding.describe(), &bytes)?;
    if a.overwrite {
        // each file whole or not at all; if the second fails, the pair
        // disagrees: the old WAV does not have the hash the new .json
        // records, so the analysis makes the sweep again from the .json,
        // compares it with the WAV and warns that they differ
        write_replacing(&side, &json, true)?;
        write_replacing(&a.out, &bytes, true)?;
    } else {
        write_new(&a.out, &bytes)?;
        if let Err(e) = write_new(&side, &json) {
            // the sweep without its description could not be analysed: the
            // sweep this run wrote goes too, so the retry starts clean
            let _ = std::fs::remove_file(&a.out);
            return Err(e);
        }
    }
    println!(
        "wrote {} ({:.4} s sweep {}–{} Hz + {} s silence, {} Hz, peak {} dBFS, {}) and {}",
        a.out.display(),
        design.length_s,
        design.params.start_hz,
        design.params.end_hz,
        design.params.tail_s,
        design.params.sample_rate_hz,
        design.params.level_dbfs,
        encoding.describe(),
        side.display()
    );
    println!(
        "rate constant L = {:.6} s; harmonic n arrives L·ln(n) before the linear response (2nd: {:.1} ms)",
        design.rate_constant_s,
        design.harmonic_offset_s(2) * 1e3
    );
    Ok(())
}
