//! `gliss align`: several loudspeakers at the listening position(s),
//! related to the first, and the delay and polarity for each that make
//! their sum strongest through a crossover.

use std::path::PathBuf;

use clap::Args as ClapArgs;

use crate::cli::common;
use gliss::analysis::align::{Alignment, DEFAULT_MAX_DELAY_S, Polarity};
use gliss::error::{Error, Result};
use gliss::session::align::{self, AlignJob};

/// Options of `gliss align`.
#[derive(Debug, ClapArgs)]
#[command(after_help = "\
Measure each loudspeaker on its own at the same microphone position, with the same \
sweep and the same loopback reference (gliss measure --each-output 1,2 does this in one \
run), then give the folders here, the reference loudspeaker first. For every other \
loudspeaker: its arrival after the first, its level difference and its polarity over \
--band; with --crossover, the delay and polarity to set in the processor so that the \
complex sum of the measured responses is strongest over the crossover band, the sum \
predicted with and without them, and what the settings gain.

Arrival of a band-limited source: a subwoofer's impulse response has no sharp peak, so \
each arrival is read from the band (the peak of the band-passed envelope). For two \
loudspeakers of different bandwidths it is a group delay in that band, not the moment \
the sound starts; the crossover search does not rest on it.

One seat is not the room: the best delay at one position is not the best everywhere. \
Measure at several positions and give them in turn with --positions N (each position's \
folders in the same loudspeaker order): the search then maximises the mean over the \
positions.

Without a loopback reference each measurement's timing includes the interface's latency, \
which can change between runs: the relative delays are then only as good as it is \
repeatable (a warning says so).

The folder gets manifest.json, align.json, align.csv, plots/align-sum.png and \
plots/align-phase.png; gliss report renders it.")]
pub struct Args {
    /// The measurement folders: the reference loudspeaker first, then the
    /// others; with --positions, each position's folders in turn.
    #[arg(value_name = "FOLDER", required = true, num_args = 2..)]
    pub folders: Vec<PathBuf>,
    /// The alignment folder to write.
    #[arg(long, value_name = "DIR")]
    pub out: PathBuf,
    /// The loudspeakers' names, comma-separated, in order [default: the
    /// first position's folder names].
    #[arg(long, value_name = "NAME[,NAME...]", value_delimiter = ',')]
    pub names: Vec<String>,
    /// The band the arrivals, levels and polarities are read over, Hz
    /// [default: the crossover band, or where every loudspeaker is within
    /// 12 dB of its own maximum].
    #[arg(long, value_name = "LO,HI")]
    pub band: Option<String>,
    /// The crossover band to optimise the sum over, Hz, e.g. 50,150 for a
    /// subwoofer crossed at 80 Hz.
    #[arg(long, value_name = "LO,HI")]
    pub crossover: Option<String>,
    /// How far from the measured timing the crossover search looks, ms
    /// (±).
    #[arg(long, value_name = "MS", default_value_t = DEFAULT_MAX_DELAY_S * 1e3, allow_hyphen_values = true)]
    pub max_delay: f64,
    /// Listening positions: the folders are N groups, one per position.
    #[arg(long, value_name = "N", default_value_t = 1)]
    pub positions: usize,
    /// Replace the derived files of an existing alignment folder.
    #[arg(long)]
    pub overwrite: bool,
    /// Do not draw the plots.
    #[arg(long)]
    pub no_plots: bool,
}

/// Runs `gliss align`.
pub fn run(a: Args) -> Result<()> {
    let band = a
        .band
        .as_deref()
        .map(|b| common::parse_band("--band", b, "200,2000"))
        .transpose()?;
    let crossover = a
        .crossover
        .as_deref()
        .map(|b| common::parse_band("--crossover", b, "50,150"))
        .transpose()?;
    if !(a.max_delay > 0.0 && a.max_delay <= 1000.0) {
        return Err(Error::parameter(format!(
            "--max-delay {} ms is out of range; give a reach above 0 and at most 1000 ms, e.g. --max-delay 20",
            a.max_delay
        )));
    }
    if a.max_delay != DEFAULT_MAX_DELAY_S * 1e3 && crossover.is_none() {
        return Err(Error::parameter(
            "--max-delay sets the reach of the crossover search: give --crossover LO,HI with it",
        ));
    }
    let job = AlignJob {
        inputs: a.folders.clone(),
        names: a.names.clone(),
        positions: a.positions,
        band,
        crossover,
        max_delay_s: a.max_delay * 1e-3,
        out: a.out.clone(),
        overwrite: a.overwrite,
        plots: !a.no_plots,
        command_line: std::env::args().collect(),
    };
    let (alignment, files) = align::run(&job)?;
    print(&common::show(&a.out), &alignment, &files);
    Ok(())
}

/// `v` rounded to a tenth, a rounded −0.0 written as 0.0.
fn tenth(v: f64) -> f64 {
    let r = (v * 10.0).round() / 10.0;
    if r == 0.0 { 0.0 } else { r }
}

/// The terminal's summary.
fn print(out: &str, a: &Alignment, files: &[String]) {
    println!("wrote {out}: {}", files.join(", "));
    println!(
        "over {:.0}-{:.0} Hz, against {}{}:",
        a.band_hz[0],
        a.band_hz[1],
        a.loudspeakers[0].name,
        if a.positions > 1 {
            format!(" (mean over {} positions)", a.positions)
        } else {
            String::new()
        }
    );
    for l in &a.loudspeakers[1..] {
        let arrival = l
            .relative_arrival_s
            .map_or("—".to_string(), |t| format!("{:+.3} ms", t * 1e3));
        let level = l
            .relative_level_db
            .map_or("—".to_string(), |v| format!("{v:+.1} dB"));
        let polarity = match (l.polarity, &l.polarity_withheld) {
            (Some(p), _) => p.words().to_string(),
            (None, Some(why)) => format!("not told ({why})"),
            (None, None) => "—".to_string(),
        };
        println!(
            "  {}: arrives {arrival}, level {level}, polarity {polarity}",
            l.name
        );
    }
    if let Some(why) = &a.crossover_withheld {
        println!("crossover: no settings: {why}");
    }
    if let Some(x) = &a.crossover {
        println!("crossover {:.0}-{:.0} Hz: set", x.band_hz[0], x.band_hz[1]);
        for (l, s) in a.loudspeakers.iter().zip(&x.suggestions) {
            println!(
                "  {}: delay {:.3} ms, polarity {}",
                l.name,
                s.set_delay_s * 1e3,
                if s.polarity == Polarity::Inverted {
                    "inverted"
                } else {
                    "as is"
                }
            );
        }
        println!(
            "  the sum's mean level over the band: {:.1} dB as measured, {:.1} dB with the settings ({:+.1} dB)",
            tenth(x.level_as_is_db),
            tenth(x.level_suggested_db),
            x.gain_db
        );
    }
    if a.warnings.0.is_empty() {
        println!("no warnings");
    } else {
        for w in &a.warnings.0 {
            println!("warning: {}", w.message);
        }
    }
}
