//! `gliss analyze`: a recording made elsewhere, into a measurement folder.

use std::path::PathBuf;

use clap::Args as ClapArgs;

use crate::cli::common::{self, OutputArgs};
use gliss::error::{Error, Result};
use gliss::folder::schema::Source;
use gliss::session::{self, Job, sweep_file};
use gliss::signal::wav::{self, decode_wav};

/// Options of `gliss analyze`.
#[derive(Debug, ClapArgs)]
#[command(
    after_help = "The measurement folder gets manifest.json, stimulus.wav and \
recording.wav (raw, copied unchanged), impulse.wav, results.json, response.csv and \
plots/. An existing measurement is never overwritten; --overwrite replaces only its \
derived files, and only when its raw files are the same."
)]
pub struct Args {
    /// The recording (WAV: 16/24/32-bit integer or 32-bit float, any channels).
    #[arg(value_name = "RECORDING.wav")]
    pub recording: PathBuf,
    /// The sweep that was played, as written by `gliss sweep` (its .json must be beside it).
    #[arg(long, value_name = "SWEEP.wav")]
    pub sweep: PathBuf,
    /// The measurement folder to write.
    #[arg(long, value_name = "DIR")]
    pub out: PathBuf,
    /// The recording's microphone channel, counted from 1.
    #[arg(long, value_name = "N", default_value_t = 1)]
    pub channel: usize,
    /// A channel of the recording wired straight back from an output that
    /// also played the sweep (a loopback): the response is divided by it,
    /// which removes the interface's own response and latency.
    #[arg(long, value_name = "N")]
    pub reference: Option<usize>,
    #[command(flatten)]
    pub output: OutputArgs,
}

fn read(path: &PathBuf, what: &str) -> Result<(Vec<u8>, wav::WavData)> {
    let bytes = std::fs::read(path).map_err(|e| Error::io("read", path, &e))?;
    let data =
        decode_wav(&bytes).map_err(|m| Error::input(format!("{what} {} {m}", path.display())))?;
    Ok((bytes, data))
}

/// Runs `gliss analyze`.
pub fn run(a: Args) -> Result<()> {
    let mut config = a.output.config()?;
    let drive = a.output.drive()?;
    let mic = a.output.mic_correction()?;
    config.mic_correction = mic.as_ref().map(|m| m.0.clone());
    if a.channel == 0 {
        return Err(Error::parameter(
            "--channel counts from 1; use --channel 1 for the first channel",
        ));
    }
    let design = sweep_file::load_design(&a.sweep)?;
    let target = a
        .output
        .target((design.params.start_hz, design.params.end_hz))?;
    let (stimulus_bytes, stimulus) = read(&a.sweep, "the sweep")?;
    let (recording_bytes, recording) = read(&a.recording, "the recording")?;
    let title = a
        .recording
        .file_name()
        .map(|n| n.to_string_lossy().into_owned())
        .unwrap_or_else(|| "recording".into());
    let job = Job {
        out: a.out.clone(),
        overwrite: a.output.overwrite,
        plots: !a.output.no_plots,
        recording_bytes,
        recording,
        channel: a.channel - 1,
        stimulus_bytes,
        stimulus,
        design,
        config,
        source: Source {
            kind: "file".into(),
            description: format!(
                "recording {} of sweep {}",
                a.recording.display(),
                a.sweep.display()
            ),
            recording_path: Some(a.recording.display().to_string()),
            sweep_path: Some(a.sweep.display().to_string()),
        },
        title: format!("{title}, channel {}", a.channel),
        command_line: std::env::args().collect(),
        mic_correction: mic.map(|m| m.1),
        calibration: a.output.calibration()?,
        reference: match a.reference {
            Some(0) => {
                return Err(Error::parameter(
                    "--reference counts from 1; use --reference 2 for the second channel",
                ));
            }
            r => r.map(|r| r - 1),
        },
        measurement: None,
        drive,
        target,
    };
    let outcome = session::run(&job)?;
    super::demo::print_summary(&common::show(&a.out), &outcome);
    Ok(())
}
