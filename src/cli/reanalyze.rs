//! `gliss reanalyze`: measurement folders analysed again from their raw
//! files with new settings, in parallel.

use std::path::{Path, PathBuf};

use clap::Args as ClapArgs;

use crate::cli::common::{self, OutputArgs};
use gliss::error::{Error, ErrorKind, Result};
use gliss::model::Profile;
use gliss::session::reanalyze::{self, Settings};

/// Options of `gliss reanalyze`.
#[derive(Debug, ClapArgs)]
#[command(
    after_help = "Each folder is analysed again in place from the raw files it holds \
(recording.wav and stimulus.wav, or input-impulse.wav), with the channel, loopback \
reference and takes it was measured with; only the analysis settings given are new. The raw \
files are checked against their SHA-256 first and never changed; the derived files \
(results, tables, plots) are replaced as --overwrite replaces them, so a run cut off \
leaves each folder either as it was or refused until it is run again. The folders run in \
parallel, one per core; one that fails is named and the others go on.

The analysis options work as for analyze, except that each folder keeps the profile, the \
smoothing and the gate it was analysed with unless --profile, --smooth or --gate is given \
(--gate none takes a gate away; a new --profile brings its own smoothing and gate). A calibration, microphone correction or target is used \
only when given again here. Averages and comparisons made from these folders are not \
updated: run gliss average and gliss compare again."
)]
pub struct Args {
    /// The measurement folders to analyse again.
    #[arg(value_name = "DIR", required = true)]
    pub dirs: Vec<PathBuf>,
    #[command(flatten)]
    pub output: OutputArgs,
}

/// Runs `gliss reanalyze`.
pub fn run(a: Args) -> Result<()> {
    let mic = a.output.mic_correction()?;
    let configs = [
        Profile::Room,
        Profile::Speech,
        Profile::Music,
        Profile::Speaker,
    ]
    .into_iter()
    .map(|p| {
        let mut c = a.output.config_for(p)?;
        c.mic_correction = mic.as_ref().map(|m| m.0.clone());
        Ok(c)
    })
    .collect::<Result<Vec<_>>>()?;
    // the same folder twice would be two writers of one folder
    for (i, d) in a.dirs.iter().enumerate() {
        if a.dirs[..i].iter().any(|e| same(e, d)) {
            return Err(Error::parameter(format!(
                "{} is given twice; give each folder once",
                d.display()
            )));
        }
    }
    // a target is checked against every folder's sweep band first
    let mut target = None;
    if a.output.targets.target.is_some() {
        for d in &a.dirs {
            let m = gliss::folder::read_manifest(d)?;
            target = a
                .output
                .target((m.sweep.params.start_hz, m.sweep.params.end_hz))?;
        }
    }
    let settings = Settings {
        configs,
        profile: a.output.profile,
        smoothing_given: a.output.smooth.is_some(),
        gate_given: a.output.gate.is_some(),
        mic_correction: mic.map(|m| m.1),
        calibration: a.output.calibration()?,
        drive: a.output.drive()?,
        target,
        plots: !a.output.no_plots,
        phase_view: a.output.phase_plot,
        command_line: std::env::args().collect(),
    };
    let n = a.dirs.len();
    let bar = indicatif::ProgressBar::with_draw_target(
        Some(n as u64),
        indicatif::ProgressDrawTarget::stderr(),
    );
    if let Ok(style) = indicatif::ProgressStyle::with_template("{bar:30} {pos}/{len} {msg}") {
        bar.set_style(style.progress_chars("=> "));
    }
    let done = |d: &Path, r: &Result<gliss::session::Outcome>| {
        bar.set_message(common::show(d));
        bar.inc(1);
        if let (Err(e), true) = (r, n > 1) {
            bar.suspend(|| eprintln!("note: {}: {}", d.display(), e.message()));
        }
    };
    let results = reanalyze::reanalyze_all(&a.dirs, &settings, &done);
    bar.finish_and_clear();
    let mut failed = Vec::new();
    let mut first_error = None;
    for (d, r) in a.dirs.iter().zip(results) {
        match r {
            Ok(o) => println!(
                "analysed {} again: {}",
                common::show(d),
                common::outcome_in_brief(&o)
            ),
            Err(e) => {
                failed.push(d.display().to_string());
                first_error.get_or_insert(e);
            }
        }
    }
    match first_error {
        None => Ok(()),
        // one folder: its own error is the one line
        Some(e) if n == 1 => Err(e),
        Some(_) => Err(Error::new(
            ErrorKind::InvalidInput,
            format!(
                "{} of {n} folders could not be analysed again ({}); see the notes above, mend them and run again",
                failed.len(),
                failed.join(", ")
            ),
        )),
    }
}

/// Whether two paths name the same folder.
fn same(a: &Path, b: &Path) -> bool {
    match (a.canonicalize(), b.canonicalize()) {
        (Ok(x), Ok(y)) => x == y,
        _ => a == b,
    }
}
