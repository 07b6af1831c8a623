//! `gliss average`: several microphone positions of one condition become
//! one folder.

use std::path::PathBuf;

use clap::Args as ClapArgs;

use crate::cli::common;
use gliss::error::Result;
use gliss::session::compare::{self, AverageJob};

/// Options of `gliss average`.
#[derive(Debug, ClapArgs)]
#[command(
    after_help = "The response is the power average of the positions' smoothed magnitudes \
(10·lg of the mean of 10^(L/10)); every band parameter is the arithmetic mean over the \
positions that measured it, with its sample standard deviation (ISO 3382-2:2008). The \
number of source–microphone combinations sets the ISO 3382-2 grade: survey (2 or more), \
engineering (6, with at least 2 sources and 2 microphones), precision (12, with 2 sources \
and 3 microphones). The new folder is a measurement folder marked as an average \
(manifest.json: kind \"average\") that names its inputs with their SHA-256; compare and \
report take it like any other."
)]
pub struct Args {
    /// The position folders (complete measurements of one condition).
    #[arg(value_name = "DIR", required = true)]
    pub inputs: Vec<PathBuf>,
    /// The new folder.
    #[arg(long, value_name = "DIR")]
    pub out: PathBuf,
    /// Labels for the positions, comma-separated, in order [default: the
    /// folder names].
    #[arg(long, value_name = "A,B,...", value_delimiter = ',')]
    pub labels: Vec<String>,
    /// How many different source (loudspeaker) positions the folders
    /// cover; with the number of folders it sets the ISO 3382-2 grade.
    #[arg(long, value_name = "N", default_value_t = 1)]
    pub sources: usize,
    /// Skip the PNG plots.
    #[arg(long)]
    pub no_plots: bool,
    /// Replace the derived files of an existing average.
    #[arg(long)]
    pub overwrite: bool,
}

/// Runs `gliss average`.
pub fn run(a: Args) -> Result<()> {
    let (results, written) = compare::average(&AverageJob {
        out: a.out.clone(),
        overwrite: a.overwrite,
        inputs: a.inputs.clone(),
        labels: a.labels.clone(),
        sources: a.sources,
        plots: !a.no_plots,
        command_line: std::env::args().collect(),
    })?;
    println!("wrote the average {}:", common::show(&a.out));
    for f in &written.files {
        println!("  {f}");
    }
    if let Some(b) = results.broadband.as_ref() {
        if let Some(t) = b.get(gliss::model::Parameter::T30) {
            println!("broadband T30 {t:.2} s (mean over positions)");
        }
    }
    for w in &written.warnings {
        println!("note: {w}");
    }
    Ok(())
}
