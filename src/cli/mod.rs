//! The command line: one file per command; argument structs become checked
//! settings here, and the library does the work.

mod align;
mod analyze;
mod average;
mod calibrate;
mod common;
mod compare;
mod demo;
mod devices;
mod directivity;
mod export;
mod impedance;
mod measure;
mod noise;
mod reanalyze;
mod report;
mod sweep;
mod tune;

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
    /// Analyse measurement folders again from their raw files with new settings, in parallel.
    Reanalyze(reanalyze::Args),
    /// A loudspeaker driver's impedance through a sense resistor, and its small-signal (Thiele–Small) parameters.
    Impedance(impedance::Args),
    /// Run the whole job on the built-in virtual loudspeaker and room (simulated).
    Demo(demo::Args),
    /// Average several microphone positions of one condition into one folder.
    Average(average::Args),
    /// Compare measurements before and after: responses, band parameters, absorption.
    Compare(compare::Args),
    /// Several loudspeakers at the listening position: relative delay, level, polarity and the best sum at a crossover.
    Align(align::Args),
    /// Turn a sound calibrator's tone (a WAV, or recorded now) into a calibration file.
    Calibrate(calibrate::Args),
    /// Write one self-contained HTML report (plots embedded, prints on A4) of measurement folders.
    Report(report::Args),
    /// Background noise from a calibrated recording: Leq per band, dB(A), noise rating (NR).
    Noise(noise::Args),
    /// Correction filters (parametric EQ) that bring a measured response to a target curve.
    Tune(tune::Args),
    /// Write one curve of a measurement folder (response, distortion, bands, impulse) as CSV or JSON.
    Export(export::Args),
    /// Measurements at angles around a loudspeaker into polar data, beamwidth and the ANSI/CTA-2034-A spatial averages.
    Directivity(directivity::Args),
}

/// Whether the command draws PNG plots unless told not to (--no-plots).
fn wants_plots(command: &Command) -> bool {
    match command {
        Command::Measure(a) => !a.output.no_plots,
        Command::Analyze(a) => !a.output.no_plots,
        Command::Reanalyze(a) => !a.output.no_plots,
        Command::Impedance(a) => !a.no_plots,
        Command::Demo(a) => !a.output.no_plots,
        Command::Average(a) => !a.no_plots,
        Command::Compare(a) => !a.no_plots,
        Command::Noise(a) => !a.no_plots,
        Command::Align(a) => !a.no_plots,
        Command::Directivity(a) => !a.no_plots,
        Command::Tune(a) => !a.no_plots,
        _ => false,
    }
}

/// A usage error as clap renders it (an `error:` line, then usage, tips
/// and possible values on lines of their own) folded into the one
/// `error:` line every refusal gets: the error, the possible values or
/// the tip in brackets, and where to read more.
fn usage_error_line(rendered: &str) -> String {
    let mut lines = rendered.lines().map(str::trim).filter(|l| !l.is_empty());
    let first = lines
        .next()
        .unwrap_or("error: the command line is not valid");
    let mut out = if first.starts_with("error:") {
        first.to_string()
    } else {
        format!("error: {first}")
    };
    for l in lines {
        if let Some(v) = l
            .strip_prefix("[possible values:")
            .and_then(|v| v.strip_suffix(']'))
        {
            out.push_str(&format!(" (possible values:{v})"));
        } else if let Some(t) = l.strip_prefix("tip:") {
            out.push_str(&format!(" (tip:{t})"));
        } else if l.starts_with("--") || l.starts_with('<') {
            // the arguments a "required arguments were not provided" lists
            out.push_str(&format!(" {l}"));
        }
    }
    out.push_str("; see gliss --help, or gliss COMMAND --help");
    out
}

/// Largest allocation glibc's malloc serves from its heap rather than a
/// fresh mapping of its own (glibc's ceiling for this setting, 32 MB on
/// 64-bit systems).
#[cfg(all(target_os = "linux", target_env = "gnu"))]
const HEAP_ALLOCATION_MAX: libc::c_int = 32 << 20;

/// Lets glibc's malloc keep the buffers an analysis frees for the next one
/// to reuse. By default it maps each allocation over a threshold that
/// adapts up from 128 kB and returns it to the system when freed, so the
/// next buffer of that size is mapped and faulted in, page by page, again:
/// the spectra, envelopes and FFT inputs of one analysis came to about 16
/// 000 page faults and a fifth of its CPU time. Served from the heap up to
/// [`HEAP_ALLOCATION_MAX`] and trimmed only beyond twice that, the 8.7 s
/// case of docs/performance.md takes about 6 % less CPU with the same peak
/// memory; longer recordings' buffers are still mapped and returned, so
/// their peak does not grow either. Elsewhere the allocator is left as it
/// is.
fn keep_freed_buffers() {
    #[cfg(all(target_os = "linux", target_env = "gnu"))]
    // SAFETY: called once at the start of main, before any thread starts
    // or anything is allocated that depends on these settings; mallopt
    // only changes the allocator's thresholds.
    unsafe {
        libc::mallopt(libc::M_MMAP_THRESHOLD, HEAP_ALLOCATION_MAX);
        libc::mallopt(libc::M_TRIM_THRESHOLD, 2 * HEAP_ALLOCATION_MAX);
    }
}

/// Parses the command line, runs the command, prints any error once.
pub fn main() -> ExitCode {
    // Rust ignores SIGPIPE, so printing to a closed pipe (`gliss demo |
    // head`) would panic; with the default action the process ends
    // quietly, as Unix tools do. Files being written are then left as a
    // kill leaves them, which every writer already survives.
    #[cfg(unix)]
    // SAFETY: called once at the start of main, before any thread starts;
    // setting a signal's action to SIG_DFL has no other effect.
    unsafe {
        libc::signal(libc::SIGPIPE, libc::SIG_DFL);
    }
    keep_freed_buffers();
    let cli = match Cli::try_parse() {
        Ok(c) => c,
        Err(e) if e.use_stderr() => {
            eprintln!("{}", usage_error_line(&e.render().to_string()));
            return ExitCode::from(EXIT_USAGE);
        }
        Err(e) => {
            // --help, --version
            let _ = e.print();
            return ExitCode::SUCCESS;
        }
    };
    let unplotted = wants_plots(&cli.command) && !gliss::model::plot_kind::PLOTS_BUILT;
    let result = match cli.command {
        Command::Sweep(a) => sweep::run(a),
        Command::Devices(a) => devices::run(a),
        Command::Measure(a) => measure::run(a),
        Command::Analyze(a) => analyze::run(a),
        Command::Reanalyze(a) => reanalyze::run(a),
        Command::Impedance(a) => impedance::run(a),
        Command::Demo(a) => demo::run(a),
        Command::Calibrate(a) => calibrate::run(a),
        Command::Average(a) => average::run(a),
        Command::Compare(a) => compare::run(a),
        Command::Report(a) => report::run(a),
        Command::Export(a) => export::run(a),
        Command::Noise(a) => noise::run(a),
        Command::Align(a) => align::run(a),
        Command::Directivity(a) => directivity::run(a),
        Command::Tune(a) => tune::run(a),
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

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn a_usage_error_is_one_error_line_with_its_possible_values() {
        let e = Cli::try_parse_from(["gliss", "demo", "--phase-plot", "rolled"]).unwrap_err();
        let line = usage_error_line(&e.render().to_string());
        assert_eq!(line.lines().count(), 1, "{line}");
        assert!(line.starts_with("error: invalid value 'rolled'"), "{line}");
        assert!(
            line.contains("possible values: wrapped, unwrapped"),
            "{line}"
        );
        let e = Cli::try_parse_from([
            "gliss", "analyze", "r.wav", "--sweep", "s.wav", "--out", "o", "--orbit", "vertical",
        ])
        .unwrap_err();
        let line = usage_error_line(&e.render().to_string());
        assert_eq!(line.lines().count(), 1, "{line}");
        assert!(line.contains("not provided: --angle <DEG>"), "{line}");
        let e = Cli::try_parse_from(["gliss", "analyse"]).unwrap_err();
        let line = usage_error_line(&e.render().to_string());
        assert_eq!(line.lines().count(), 1, "{line}");
        assert!(
            line.contains("analyze"),
            "the tip names the command meant: {line}"
        );
    }
}
