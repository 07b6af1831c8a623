//! `gliss calibrate`: a sound calibrator's tone into a calibration file.

use std::fs::OpenOptions;
use std::io::Write;
use std::path::PathBuf;

use clap::Args as ClapArgs;

use crate::analysis::calibration;
use crate::error::{Error, ErrorKind, Result};
use crate::signal::wav::read_wav;

/// Options of `gliss calibrate`.
#[derive(Debug, ClapArgs)]
#[command(
    after_help = "Record the calibrator's tone (2 s or more) through the same \
microphone, preamplifier and gain you will measure with, then pass the file written here to \
analyze or demo with --calibration. Existing files are never overwritten."
)]
pub struct Args {
    /// The recording of the calibrator's tone (WAV).
    #[arg(value_name = "TONE.wav")]
    pub recording: PathBuf,
    /// The calibrator's level in dB SPL (94 dB = 1 Pa, 114 dB = 10 Pa).
    #[arg(long, value_name = "DB_SPL", default_value_t = 94.0)]
    pub level: f64,
    /// The microphone channel, counted from 1.
    #[arg(long, value_name = "N", default_value_t = 1)]
    pub channel: usize,
    /// The calibration file to write (JSON).
    #[arg(long, value_name = "FILE.json")]
    pub out: PathBuf,
}

/// Runs `gliss calibrate`.
pub fn run(a: Args) -> Result<()> {
    let data = read_wav(&a.recording, "the calibrator recording")?;
    if a.channel == 0 || a.channel > data.channels.len() {
        return Err(Error::input(format!(
            "--channel {} does not exist: the recording has {} channel(s)",
            a.channel,
            data.channels.len()
        )));
    }
    let x = &data.channels[a.channel - 1];
    crate::analysis::check_signal(x, "the calibrator recording")?;
    let c = calibration::calibrate(x, f64::from(data.sample_rate_hz), a.level)?;
    let json = crate::session::to_json(&c)?;
    let mut f = OpenOptions::new()
        .write(true)
        .create_new(true)
        .open(&a.out)
        .map_err(|e| {
            if e.kind() == std::io::ErrorKind::AlreadyExists {
                Error::new(
                    ErrorKind::AlreadyExists,
                    format!(
                        "{} already exists; gliss never overwrites files, choose another --out",
                        a.out.display()
                    ),
                )
            } else {
                Error::io("create", &a.out, &e)
            }
        })?;
    f.write_all(&json)
        .map_err(|e| Error::io("write", &a.out, &e))?;
    println!(
        "wrote {}: a {:.1} Hz tone at {:.1} dBFS RMS reads {} dB SPL; 0 dBFS (a full-scale sine) is {:.1} dB SPL",
        a.out.display(),
        c.tone_hz,
        20.0 * c.tone_rms_fs.log10(),
        c.level_db_spl,
        c.full_scale_db_spl
    );
    Ok(())
}
