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
derived files, and only when its raw files are the same.\n\n\
A sweep WAV without its .json (played by another program) is accepted when it is an \
exponential sweep: its band and rate are recovered from its instantaneous frequency, \
and anything else is refused with the reason. A recording that clearly follows another \
sweep than --sweep is refused, naming the sweep it follows.\n\n\
--impulse IR.wav analyses an impulse response from another tool instead (no \
recording, no --sweep): the response, phase, gate, decay and bands, with the delay at \
the response's peak; no distortion (that needs a sweep). The file is kept as \
input-impulse.wav."
)]
pub struct Args {
    /// The recording (WAV: 16/24/32-bit integer or 32-bit float, any channels).
    #[arg(value_name = "RECORDING.wav", required_unless_present = "impulse")]
    pub recording: Option<PathBuf>,
    /// The sweep that was played: as written by `gliss sweep` (with its
    /// .json beside it), or an exponential sweep from another program
    /// (its parameters are then recovered from the file).
    #[arg(long, value_name = "SWEEP.wav", required_unless_present = "impulse")]
    pub sweep: Option<PathBuf>,
    /// Analyse an impulse response (WAV) as it is, instead of a recording
    /// and its sweep: response, phase, gate, decay and bands; the delay is
    /// its peak's position; no distortion.
    #[arg(long, value_name = "IR.wav", conflicts_with_all = ["recording", "sweep", "reference"])]
    pub impulse: Option<PathBuf>,
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
    #[command(flatten)]
    pub speech: common::SpeechArgs,
    #[command(flatten)]
    pub orbit: common::OrbitArgs,
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
    config.speech = a.speech.conditions()?;
    let drive = a.output.drive()?;
    let mic = a.output.mic_correction()?;
    config.mic_correction = mic.as_ref().map(|m| m.0.clone());
    if a.channel == 0 {
        return Err(Error::parameter(
            "--channel counts from 1; use --channel 1 for the first channel",
        ));
    }
    if let Some(ir) = &a.impulse {
        return run_impulse(&a, ir, config, mic);
    }
    let (Some(recording_path), Some(sweep_path)) = (&a.recording, &a.sweep) else {
        return Err(Error::parameter(
            "give the recording and --sweep SWEEP.wav, or --impulse IR.wav",
        ));
    };
    let sweep_file::LoadedSweep {
        design,
        recovered: recovered_sweep,
        binding: sweep_binding,
    } = sweep_file::load_or_recover(sweep_path)?;
    let target = a
        .output
        .target((design.params.start_hz, design.params.end_hz))?;
    let (stimulus_bytes, stimulus) = read(sweep_path, "the sweep")?;
    let (recording_bytes, recording) = read(recording_path, "the recording")?;
    let title = recording_path
        .file_name()
        .map(|n| n.to_string_lossy().into_owned())
        .unwrap_or_else(|| "recording".into());
    let job = Job {
        out: a.out.clone(),
        overwrite: a.output.overwrite,
        plots: !a.output.no_plots,
        phase_view: a.output.phase_plot,
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
                recording_path.display(),
                sweep_path.display()
            ),
            recording_path: Some(recording_path.display().to_string()),
            sweep_path: Some(sweep_path.display().to_string()),
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
        impulse: false,
        recovered_sweep,
        sweep_binding,
        impedance: None,
        position: a.orbit.position()?,
    };
    let outcome = session::run(job)?;
    super::demo::print_summary(&common::show(&a.out), &outcome);
    Ok(())
}

/// `gliss analyze --impulse IR.wav`: the impulse response as it is.
fn run_impulse(
    a: &Args,
    ir: &PathBuf,
    config: gliss::analysis::AnalysisConfig,
    mic: Option<(
        gliss::analysis::correction::Correction,
        gliss::folder::schema::FileEntry,
    )>,
) -> Result<()> {
    if a.channel == 0 {
        return Err(Error::parameter(
            "--channel counts from 1; use --channel 1 for the first channel",
        ));
    }
    let (bytes, data) = read(ir, "the impulse response")?;
    let len = data.channels.first().map_or(0, Vec::len);
    let design = session::impulse_design(data.sample_rate_hz, len);
    let target = a
        .output
        .target((design.params.start_hz, design.params.end_hz))?;
    let title = ir
        .file_name()
        .map(|n| n.to_string_lossy().into_owned())
        .unwrap_or_else(|| "impulse response".into());
    let job = Job {
        out: a.out.clone(),
        overwrite: a.output.overwrite,
        plots: !a.output.no_plots,
        phase_view: a.output.phase_plot,
        recording_bytes: bytes,
        recording: data,
        channel: a.channel - 1,
        stimulus_bytes: Vec::new(),
        stimulus: wav::WavData {
            sample_rate_hz: design.params.sample_rate_hz,
            encoding: wav::SampleEncoding::Float,
            channels: Vec::new(),
        },
        design,
        config,
        source: Source {
            kind: "impulse".into(),
            description: format!("impulse response {} (no sweep)", ir.display()),
            recording_path: Some(ir.display().to_string()),
            sweep_path: None,
        },
        title: format!("{title}, channel {}", a.channel),
        command_line: std::env::args().collect(),
        mic_correction: mic.map(|m| m.1),
        calibration: a.output.calibration()?,
        reference: None,
        measurement: None,
        drive: a.output.drive()?,
        target,
        impulse: true,
        recovered_sweep: None,
        sweep_binding: None,
        impedance: None,
        position: a.orbit.position()?,
    };
    let outcome = session::run(job)?;
    super::demo::print_summary(&common::show(&a.out), &outcome);
    println!(
        "(an impulse response analysed as it is: the delay is where it peaks, from the first sample of {}; \"recording peak\" is its own peak)",
        ir.display()
    );
    Ok(())
}
