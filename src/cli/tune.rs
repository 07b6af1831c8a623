//! `gliss tune`: correction filters that bring a measured response to a
//! target curve, into a tuning folder.

use std::path::PathBuf;

use clap::{Args as ClapArgs, ValueEnum};

use crate::cli::common;
use gliss::analysis::target::Target;
use gliss::analysis::tuning::AboveTransition;
use gliss::error::{Error, Result};
use gliss::session::tuning::{self, TuneJob};

/// What to do above the room's transition frequency.
#[derive(Debug, Clone, Copy, PartialEq, Eq, ValueEnum)]
pub enum Above {
    /// Only broad filters (Q at most 1) centred there.
    Broad,
    /// No filter centred there, and the response there is not fitted.
    None,
    /// As below it.
    Full,
}

/// Options of `gliss tune`.
#[derive(Debug, ClapArgs)]
#[command(
    after_help = "For a room, give the folders of several microphone positions around the \
listening area (or their average from gliss average): their power average is tuned. A spatial \
average is the right input for a room: the response at one point changes from one seat to the \
next, and a correction fitted to one point fixes that point's accidents at every other seat's \
expense. One folder of a loudspeaker measured outdoors or gated is fine on its own.\n\n\
The response is first level-aligned to the target as --target does. Then up to --filters \
peaking and shelf filters (the Audio EQ Cookbook biquads) are placed one at a time at the \
largest remaining deviation and refined together by least squares on the log-frequency grid. \
The rules that keep a correction sensible, and why:\n\
- A dip narrower than 1/6 octave at half its depth, or deeper than --max-boost by more than \
1 dB, is left alone and reported as not correctable by equalisation: it is most likely a \
cancellation (a reflection in opposite phase) or a room null, whose depth changes with every \
small move and which a boost fills only by spending amplifier and driver headroom on energy \
that cancels again.\n\
- The filters together never boost more than --max-boost anywhere.\n\
- Cuts are preferred to boosts: a deviation above the target is corrected before one of the \
same size below it, and each boost adds a little cost to the fit.\n\
- With --volume, above the room's transition frequency 2000*sqrt(T/V) (T the mean T30 at 500 Hz \
and 1 kHz) the sound at a seat is dominated by reflections that change within centimetres: only \
broad filters (Q at most 1) are centred there, or none with --above-transition none.\n\
- Q is held within --q-range: the narrowest features are ones the ear hears least and that \
move most between positions.\n\n\
The tuning folder gets tuning.json (the filters; for each --rate the normalised biquad \
coefficients b0, b1, b2, a1, a2 in direct form I order; the measured, target, correction and \
predicted responses; the largest and mean deviation before and after; the regions left alone \
with their reasons), filters.txt (the list to type into a processor), manifest.json and \
plots/tuning.png. gliss report shows it."
)]
pub struct Args {
    /// One measurement or average folder, or several position folders
    /// (their power average is tuned).
    #[arg(value_name = "FOLDER", required = true)]
    pub inputs: Vec<PathBuf>,
    /// The target curve: lines of `frequency_hz target_db [lower_db
    /// [upper_db]]` (CSV or spaces, # comments), as --target of analyze.
    #[arg(long, value_name = "FILE.csv")]
    pub target: PathBuf,
    /// The tuning folder to write.
    #[arg(long, value_name = "DIR")]
    pub out: PathBuf,
    /// The range to correct, LO,HI in Hz [default: where both the target
    /// and the sweep are].
    #[arg(long, value_name = "LO,HI")]
    pub range: Option<String>,
    /// The most filters.
    #[arg(long, value_name = "N", default_value_t = 10)]
    pub filters: usize,
    /// The largest boost of any filter, and of all together at any
    /// frequency, dB.
    #[arg(
        long,
        value_name = "DB",
        default_value_t = 6.0,
        allow_hyphen_values = true
    )]
    pub max_boost: f64,
    /// The largest cut of any filter, dB (a positive number).
    #[arg(
        long,
        value_name = "DB",
        default_value_t = 15.0,
        allow_hyphen_values = true
    )]
    pub max_cut: f64,
    /// The range of Q of the peaking filters, LO,HI.
    #[arg(long, value_name = "LO,HI", default_value = "0.3,8")]
    pub q_range: String,
    /// A sample rate of the processor to export coefficients for, Hz;
    /// repeat for several [default: the measurement's rate].
    #[arg(long, value_name = "HZ")]
    pub rate: Vec<f64>,
    /// The room's volume in m³: gives its transition frequency 2000·√(T/V),
    /// above which only broad filters are used.
    #[arg(long, value_name = "M3", allow_hyphen_values = true)]
    pub volume: Option<f64>,
    /// Above the transition frequency: broad filters only, none, or as
    /// below (full). Needs --volume [default: broad].
    #[arg(long, value_enum, value_name = "broad|none|full")]
    pub above_transition: Option<Above>,
    /// Also write the correction as a minimum-phase finite impulse
    /// response of TAPS samples at the measurement's rate
    /// (correction.wav, 32-bit float), for a processor that takes an FIR;
    /// tuning.json's `fir` gives its response and what it predicts.
    #[arg(long, value_name = "TAPS")]
    pub fir: Option<usize>,
    /// Replace the derived files of an existing tuning folder.
    #[arg(long)]
    pub overwrite: bool,
    /// Do not draw the plot.
    #[arg(long)]
    pub no_plots: bool,
}

/// Runs `gliss tune`.
pub fn run(a: Args) -> Result<()> {
    let range = a
        .range
        .as_deref()
        .map(|r| common::parse_band("--range", r, "50,500"))
        .transpose()?;
    let q_range = q_range(&a.q_range)?;
    let (bytes, target_file) = common::read_input(&a.target)?;
    let target = Target::parse(&String::from_utf8_lossy(&bytes))
        .map_err(|m| Error::input(format!("the target {}: {m}", a.target.display())))?;
    let job = TuneJob {
        out: a.out.clone(),
        overwrite: a.overwrite,
        plots: !a.no_plots,
        inputs: a.inputs.clone(),
        target,
        target_file,
        range,
        filters: a.filters,
        max_boost_db: a.max_boost,
        max_cut_db: a.max_cut,
        q_range,
        rates: a.rate.clone(),
        volume_m3: a.volume,
        above_transition: a.above_transition.map(|x| match x {
            Above::Broad => AboveTransition::Broad,
            Above::None => AboveTransition::None,
            Above::Full => AboveTransition::Full,
        }),
        fir_taps: a.fir,
        command_line: std::env::args().collect(),
    };
    let outcome = tuning::run(&job)?;
    let t = &outcome.tuning;
    println!("wrote the tuning {}:", common::show(&a.out));
    for f in &outcome.files {
        println!("  {f}");
    }
    print!("{}", tuning::filters_txt(t));
    if let Some(tr) = &t.transition {
        println!(
            "transition frequency {:.0} Hz (T {:.2} s, V {} m³)",
            tr.frequency_hz, tr.t_s, tr.volume_m3
        );
    }
    if let Some(b) = &t.below_transition {
        println!(
            "below it ({:.0}–{:.0} Hz): largest deviation {:.1} → {:.1} dB, mean {:.1} → {:.1} dB",
            b.before.range_hz[0],
            b.before.range_hz[1],
            b.before.max_abs_db,
            b.after.max_abs_db,
            b.before.mean_abs_db,
            b.after.mean_abs_db
        );
    }
    if let Some(f) = &t.fir {
        println!(
            "{}: {} taps at {} Hz, within {:.2} dB of the filters; largest deviation with it {:.1} dB",
            f.file, f.taps, f.sample_rate_hz, f.max_difference_db, f.after.max_abs_db
        );
    }
    for w in t.warnings.iter() {
        println!("warning: {}", w.message);
    }
    Ok(())
}

/// --q-range LO,HI.
fn q_range(s: &str) -> Result<(f64, f64)> {
    let nums: Vec<Option<f64>> = s.split(',').map(|p| p.trim().parse().ok()).collect();
    match nums.as_slice() {
        [Some(lo), Some(hi)] if *lo > 0.0 && hi >= lo => Ok((*lo, *hi)),
        _ => Err(Error::parameter(format!(
            "--q-range {s:?} is not LO,HI with 0 < LO ≤ HI; give e.g. --q-range 0.5,6"
        ))),
    }
}
