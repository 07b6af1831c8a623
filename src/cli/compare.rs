//! `gliss compare`: before and after, band by band.

use std::path::PathBuf;

use clap::Args as ClapArgs;

use crate::cli::common;
use gliss::analysis::Smoothing;
use gliss::error::Result;
use gliss::session::compare::{self, CompareJob};

/// Options of `gliss compare`.
#[derive(Debug, ClapArgs)]
#[command(
    after_help = "The first folder is the reference (before); every other one is compared \
with it. A change counts as audible when it exceeds the just-noticeable difference of \
ISO 3382-1 Annex A (EDT and T 5 %, C80 1 dB, D50 0.05, Ts 10 ms), and as real when it \
exceeds twice the combined standard uncertainty of the two values (the spread over \
positions for an average made with gliss average, ISO 3382-2's formula for T20 and T30 of \
a single measurement). With --volume, the change of equivalent absorption area per band \
follows from the Sabine relation as ISO 354 writes it, A = 55.3·V/(c·T). Writes \
comparison.json, comparison.csv and plots/compare-*.png."
)]
pub struct Args {
    /// The folders: the reference (before) first, then the others
    /// (measurements or averages; a tuning folder from gliss tune gives
    /// its predicted response, without bands).
    #[arg(value_name = "DIR", required = true)]
    pub inputs: Vec<PathBuf>,
    /// The new comparison folder.
    #[arg(long, value_name = "DIR")]
    pub out: PathBuf,
    /// Labels, comma-separated, in order [default: the folder names].
    #[arg(long, value_name = "A,B,...", value_delimiter = ',')]
    pub labels: Vec<String>,
    /// Smooth the responses for the overlay, e.g. 1/3 or none: each is
    /// taken again from its impulse.wav (an average, which has none, can
    /// only be smoothed further) [default: as the folders are].
    #[arg(long, value_name = "1/N", allow_hyphen_values = true)]
    pub smooth: Option<String>,
    /// The room's volume in m³: adds the change of equivalent absorption
    /// area per band.
    #[arg(long, value_name = "M3", allow_hyphen_values = true)]
    pub volume: Option<f64>,
    /// The air temperature in °C, for the speed of sound (c = 331 + 0.6·t).
    #[arg(
        long,
        value_name = "C",
        default_value_t = 20.0,
        allow_hyphen_values = true
    )]
    pub temperature: f64,
    /// Level-align every response to the reference over the band LO,HI in
    /// Hz (the mean of their dB difference over it) before the differences
    /// are taken, e.g. 200,2000: a change of level (a source or gain set
    /// differently) then does not hide a change of shape. The offsets are
    /// kept in comparison.json and printed; the band parameters (decay
    /// times, C80, D50) do not depend on the level and are not touched.
    #[arg(long, value_name = "LO,HI")]
    pub align: Option<String>,
    /// Skip the PNG plots.
    #[arg(long)]
    pub no_plots: bool,
    /// Replace the derived files of an existing comparison.
    #[arg(long)]
    pub overwrite: bool,
    #[command(flatten)]
    pub targets: common::TargetArgs,
}

/// Runs `gliss compare`.
pub fn run(a: Args) -> Result<()> {
    let smoothing = a.smooth.as_deref().map(Smoothing::parse).transpose()?;
    let (cmp, written) = compare::compare(&CompareJob {
        out: a.out.clone(),
        overwrite: a.overwrite,
        inputs: a.inputs.clone(),
        labels: a.labels.clone(),
        smoothing,
        align: a
            .align
            .as_deref()
            .map(|r| common::parse_band("--align", r, "200,2000"))
            .transpose()?,
        volume_m3: a.volume,
        temperature_c: a.temperature,
        plots: !a.no_plots,
        command_line: std::env::args().collect(),
        target: a.targets.target((1.0, 1e6))?,
    })?;
    println!("wrote the comparison {}:", common::show(&a.out));
    for f in &written.files {
        println!("  {f}");
    }
    if let Some(al) = &cmp.response.alignment {
        let offsets: Vec<String> = cmp
            .inputs
            .iter()
            .map(|i| &i.label)
            .zip(&al.offset_db)
            .skip(1)
            .map(|(l, o)| format!("{l} {o:+.2} dB"))
            .collect();
        println!(
            "levels aligned to {} over {}–{}: {}",
            cmp.inputs[0].label,
            gliss::model::units::hz(al.band_hz[0]),
            gliss::model::units::hz(al.band_hz[1]),
            offsets.join(", ")
        );
    }
    // the octave-band verdict on the decay time, in a few lines
    for k in 1..cmp.inputs.len() {
        println!("{} against {}:", cmp.inputs[k].label, cmp.inputs[0].label);
        common::print_octave_verdicts(&cmp, k);
        if let Some(s) = gliss::report::answer::sti_sentence(&cmp, k) {
            println!("  {s}");
        }
    }
    if let Some(t) = &cmp.target {
        for (i, r) in cmp.inputs.iter().zip(&t.per_input) {
            match r {
                Some(r) => println!(
                    "target {}: {} deviates at most {:.1} dB (mean {:.1} dB) over {}–{}{}",
                    t.file,
                    i.label,
                    r.max_abs_db,
                    r.mean_abs_db,
                    gliss::model::units::hz(r.range_hz[0].round()),
                    gliss::model::units::hz(r.range_hz[1].round()),
                    r.inside_share
                        .map(|s| format!(", {:.0} % within tolerance", 100.0 * s))
                        .unwrap_or_default()
                ),
                None => println!("target {}: {} does not cover its range", t.file, i.label),
            }
        }
    }
    for w in &written.warnings {
        println!("warning: {w}");
    }
    Ok(())
}
