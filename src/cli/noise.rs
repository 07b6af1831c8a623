//! `gliss noise`: a calibrated recording of the room's background noise
//! into a noise folder.

use std::path::PathBuf;

use clap::Args as ClapArgs;

use crate::cli::common;
use gliss::error::{Error, Result};
use gliss::folder::schema::Source;
use gliss::session::noise::{self, NoiseJob};
use gliss::signal::wav::decode_wav;

/// Options of `gliss noise`.
#[derive(Debug, ClapArgs)]
#[command(
    after_help = "Record the room as it is used (ventilation on, doors shut, \
nobody talking) with the calibrated microphone at the listening position, 30 s or \
more for a steady noise. The noise folder gets manifest.json, recording.wav (raw, \
copied unchanged), noise.json (Leq per octave 31.5 Hz-16 kHz and one-third octave \
20 Hz-20 kHz, dB SPL; the A-weighted and unweighted totals; the noise rating NR of \
ISO/R 1996), noise.csv and plots/noise.png.\n\n\
Give the folder to `gliss analyze --noise DIR` or `gliss demo --noise DIR` (`gliss measure --noise-folder DIR`) of the same room: \
the speech transmission index then includes the background noise."
)]
pub struct Args {
    /// The recording of the room's noise (WAV, any channels), made with the
    /// sweep silent.
    #[arg(value_name = "RECORDING.wav")]
    pub recording: PathBuf,
    /// The microphone's calibration from `gliss calibrate` (required: the
    /// levels are dB SPL).
    #[arg(long, value_name = "FILE.json")]
    pub calibration: PathBuf,
    /// The noise folder to write.
    #[arg(long, value_name = "DIR")]
    pub out: PathBuf,
    /// The recording's microphone channel, counted from 1.
    #[arg(long, value_name = "N", default_value_t = 1)]
    pub channel: usize,
    /// Replace the derived files of an existing noise folder (its
    /// recording must be the same).
    #[arg(long)]
    pub overwrite: bool,
    /// Do not draw the plot.
    #[arg(long)]
    pub no_plots: bool,
}

/// Runs `gliss noise`.
pub fn run(a: Args) -> Result<()> {
    if a.channel == 0 {
        return Err(Error::parameter(
            "--channel counts from 1; use --channel 1 for the first channel",
        ));
    }
    let calibration = common::read_calibration(&a.calibration)?;
    let bytes = std::fs::read(&a.recording).map_err(|e| Error::io("read", &a.recording, &e))?;
    let recording = decode_wav(&bytes)
        .map_err(|m| Error::input(format!("the noise recording {} {m}", a.recording.display())))?;
    let job = NoiseJob {
        out: a.out.clone(),
        overwrite: a.overwrite,
        plots: !a.no_plots,
        recording_bytes: bytes,
        recording,
        channel: a.channel - 1,
        calibration,
        source: Source {
            kind: "file".into(),
            description: format!("noise recording {}", a.recording.display()),
            recording_path: Some(a.recording.display().to_string()),
            sweep_path: None,
        },
        command_line: std::env::args().collect(),
    };
    let outcome = noise::run(&job)?;
    print_levels(&common::show(&a.out), &outcome.levels);
    Ok(())
}

/// Prints the levels of a noise folder just written.
pub fn print_levels(out: &str, n: &gliss::analysis::noise::NoiseLevels) {
    println!("background noise written to {out}");
    let octaves: Vec<String> = n
        .octaves
        .iter()
        .map(|b| {
            format!(
                "{} {:.1}",
                gliss::model::units::format_hz(b.center_hz),
                b.leq_db
            )
        })
        .collect();
    println!("  Leq per octave (Hz dB SPL): {}", octaves.join(", "));
    println!(
        "  {:.1} dB(A), {:.1} dB unweighted, over {:.1} s",
        n.laeq_db, n.lzeq_db, n.duration_s
    );
    match &n.rating {
        Some(r) => println!(
            "  noise rating NR {} (the {} Hz octave touches NR {:.1})",
            r.value, r.governing_hz, r.exact
        ),
        None => println!("  noise rating: not given (see noise.json warnings)"),
    }
}
