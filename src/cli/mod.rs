//! The command line: one file per command; argument structs become checked
//! settings here, and the library does the work.

mod analyze;
mod average;
mod calibrate;
mod common;
mod compare;
mod demo;
mod devices;
mod export;
mod measure;
mod noise;
mod report;
mod sweep;

use std::process::ExitCode;

use clap::{Parser, Subcommand};

/// Exit status for a usage error (bad option or value).
pub const EXIT_USAGE: u8 = 2;
/// Exit status for any other failure.
pub const EXIT_FAILURE: u8 = 1;

const AFTER_HELP: &str = "\
Safety: sweeps are loud, broadband signals. Protect your hearing and start at a low \
level; high-level sweeps with much high-frequency energy can damage tweeters; follow \
local rules on noise exposure. The default sweep level is a modest -20 dBFS.";

/// gliss — swept-sine acoustic measurement: impulse response, frequency
/// response, distortion and room acoustics from the command line.
#[derive(Debug, Parser)]
#[command(name = "gliss", version, about, after_help = AFTER_HELP)]
pub struct Cli {
    #[command(subcommand)]
    command: Command,
}

#[derive(Debug, Subcommand)]
enum Command {
    /// Write a synchronised exponential sine sweep (WAV plus its parameters as .json).
    Sweep(sweep::Args),
    /// List the sound cards: inputs, outputs, channels, sample rates, formats.
    Devices(devices::Args),
    /// Play the sweep through a sound card while recording, then analyse (mind the level).
    Measure(measure::Args),
    /// Analyse a recording of a gliss sweep made with any recorder into a measurement folder.
    Analyze(analyze::Args),
    /// Run the whole job on the built-in virtual loudspeaker and room (simulated).
    Demo(demo::Args),
    /// Average several microphone positions of one condition into one folder.
    Average(average::Args),
    /// Compare measurements before and after: responses, band parameters, absorption.
    Compare(compare::Args),
    /// Turn a sound calibrator's tone (a WAV, or recorded now) into a calibration file.
    Calibrate(calibrate::Args),
    /// Write one self-contained HTML report (plots embedded, prints on A4) of measurement folders.
    Report(report::Args),
    /// Background noise from a calibrated recording: Leq per band, dB(A), noise rating (NR).
    Noise(noise::Args),
    /// Write one curve of a measurement folder (response, distortion, bands, impulse) as CSV or JSON.
    Export(export::Args),
}

/// Whether the command draws PNG plots unless told not to (--no-plots).
fn wants_plots(command: &Command) -> bool {
    match command {
        Command::Measure(a) => !a.output.no_plots,
        Command::Analyze(a) => !a.output.no_plots,
        Command::Demo(a) => !a.output.no_plots,
        Command::Average(a) => !a.no_plots,
        Command::Compare(a) => !a.no_plots,
        Command::Noise(a) => !a.no_plots,
        _ => false,
    }
}

/// Parses the command line, runs the command, prints any error once.
pub fn main() -> ExitCode {
    let cli = match Cli::try_parse() {
        Ok(c) => c,
        Err(e) => {
            let code = if e.use_stderr() { EXIT_USAGE } else { 0 };
            let _ = e.print();
            return ExitCode::from(code);
        }
    };
    let unplotted = wants_plots(&cli.command) && !gliss::model::plot_kind::PLOTS_BUILT;
    let result = match cli.command {
        Command::Sweep(a) => sweep::run(a),
        Command::Devices(a) => devices::run(a),
        Command::Measure(a) => measure::run(a),
        Command::Analyze(a) => analyze::run(a),
        Command::Demo(a) => demo::run(a),
        Command::Calibrate(a) => calibrate::run(a),
        Command::Average(a) => average::run(a),
        Command::Compare(a) => compare::run(a),
        Command::Report(a) => report::run(a),
        Command::Export(a) => export::run(a),
        Command::Noise(a) => noise::run(a),
    };
    match result {
        Ok(()) => {
            if unplotted {
                eprintln!("note: this gliss was built without plots; no PNGs were drawn");
            }
            ExitCode::SUCCESS
        }
        Err(e) => {
            eprintln!("error: {e}");
            let code = match e.kind() {
                gliss::ErrorKind::InvalidParameter => EXIT_USAGE,
                _ => EXIT_FAILURE,
            };
            ExitCode::from(code)
        }
    }
}
