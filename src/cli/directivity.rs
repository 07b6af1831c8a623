//! `gliss directivity`: measurement folders taken around a loudspeaker
//! into a directivity folder.

use std::path::PathBuf;

use clap::Args as ClapArgs;

use crate::cli::common;
use gliss::analysis::directivity::Curve;
use gliss::error::Result;
use gliss::model::Orbit;
use gliss::session::directivity::{self, DirectivityJob};

/// Options of `gliss directivity`.
#[derive(Debug, ClapArgs)]
#[command(
    after_help = "Each folder is a measurement at one angle, analysed with --orbit \
horizontal|vertical and --angle DEG (gliss analyze or gliss measure), all with one sweep, \
sample rate, smoothing and gate (give the on-axis gate as --gate START_MS,END_MS to \
every angle). 0° is needed; 0° and 180° count for both orbits.\n\n\
The folder gets directivity.json (the responses by angle on one grid, absolute and \
relative to on axis; the -6 dB beamwidth of each orbit; the spatial averages and \
directivity indices of ANSI/CTA-2034-A), directivity.csv (the curves), polar.csv (every \
angle) and plots/. A curve whose angles were not all measured is null, with the reason \
(e.g. only the horizontal orbit: no listening window, no sound power). The standard's \
curves need both orbits at 10° steps (70 positions)."
)]
pub struct Args {
    /// The measurement folders, one per angle.
    #[arg(value_name = "FOLDER", required = true)]
    pub folders: Vec<PathBuf>,
    /// The directivity folder to write.
    #[arg(long, value_name = "DIR")]
    pub out: PathBuf,
    /// Replace the derived files of an existing directivity folder.
    #[arg(long)]
    pub overwrite: bool,
    /// Do not draw PNG plots.
    #[arg(long)]
    pub no_plots: bool,
}

/// Runs `gliss directivity`.
pub fn run(a: Args) -> Result<()> {
    let job = DirectivityJob {
        inputs: a.folders.clone(),
        out: a.out.clone(),
        overwrite: a.overwrite,
        plots: !a.no_plots,
        command_line: std::env::args().collect(),
    };
    let outcome = directivity::run(&job)?;
    print_summary(&common::show(&a.out), &outcome.file);
    Ok(())
}

/// Prints what a directivity folder holds.
pub fn print_summary(out: &str, f: &gliss::folder::schema::DirectivityFile) {
    let d = &f.directivity;
    println!("directivity written to {out}");
    for o in &d.orbits {
        println!(
            "  {} orbit: {} angles, {}° to {}°",
            o.orbit.code(),
            o.angles_deg.len(),
            o.angles_deg.first().copied().unwrap_or(0),
            o.angles_deg.last().copied().unwrap_or(0)
        );
    }
    let at = |hz: f64| {
        d.frequency_hz
            .iter()
            .position(|&f| f >= hz)
            .filter(|_| d.frequency_hz.last().is_some_and(|&l| l >= hz))
    };
    for hz in [1000.0, 4000.0] {
        let Some(i) = at(hz) else { continue };
        let mut parts = Vec::new();
        for o in Orbit::ALL {
            if let Some(b) = d
                .beamwidth(o)
                .and_then(|b| b.beamwidth_deg.as_ref())
                .and_then(|b| b[i])
            {
                parts.push(format!("{} beamwidth {b:.0}°", o.code()));
            }
        }
        for c in [
            Curve::SoundPowerDi,
            Curve::EarlyReflectionsDi,
            Curve::DirectivityIndex,
        ] {
            if let Some(l) = d.levels(c) {
                parts.push(format!("{} {:.1} dB", c.label(), l[i]));
            }
        }
        if !parts.is_empty() {
            println!(
                "  at {}: {}",
                gliss::model::units::format_hz(d.frequency_hz[i]),
                parts.join(", ")
            );
        }
    }
    for c in &d.curves {
        if let Some(w) = &c.withheld {
            println!("  {}: withheld ({})", c.curve.label(), w.reason);
        }
    }
    for o in Orbit::ALL {
        if let Some(w) = d.beamwidth(o).and_then(|b| b.withheld.as_ref()) {
            println!("  {} beamwidth: withheld ({})", o.code(), w.reason);
        }
    }
}
