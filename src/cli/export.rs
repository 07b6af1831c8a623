//! `gliss export`: one curve or table of a measurement folder as CSV or
//! JSON, with its units.

use std::path::PathBuf;

use clap::Args as ClapArgs;

use gliss::analysis::Smoothing;
use gliss::error::Result;
use gliss::session::export::{self, Format, What};

/// What each --what holds; the band columns come from the parameters'
/// own keys.
fn after_help() -> String {
    let bands: Vec<&str> = gliss::model::Parameter::ALL
        .iter()
        .map(|p| p.key())
        .collect();
    format!(
        "\
What each --what holds (CSV header names carry the units):
  response    frequency_hz, magnitude_db, phase_deg (delay removed); spl_db and \
sensitivity_db_spl when calibrated; resolved with a gate
  distortion  frequency_hz (excitation), h2_db ... hN_db (dB re the fundamental), \
thd_percent; empty (JSON null) where not measured
  bands       center_hz, exact_hz, fraction, {}, curvature_percent, warnings; per \
octave, one-third octave, broadband
  impulse     time_s (after the first sample of the recording), amplitude (full scale)

JSON holds the same columns under data, their order under columns, a units object \
and source (the folder and the SHA-256 of its results.json). An existing --out is \
never replaced without --overwrite.",
        bands.join(", ")
    )
}

/// Options of `gliss export`.
#[derive(Debug, ClapArgs)]
#[command(after_help = after_help())]
pub struct Args {
    /// The measurement folder (made by analyze, measure or demo).
    #[arg(value_name = "DIR")]
    pub dir: PathBuf,
    /// What to export: response, distortion, bands or impulse.
    #[arg(long, value_name = "response|distortion|bands|impulse")]
    pub what: String,
    /// Smooth the response again at 1/N octave (1/1, 1/2, 1/3, 1/6, 1/12,
    /// 1/24, 1/48) or none, from the unsmoothed response taken again from
    /// impulse.wav by the analysis's own stages [default: the response as
    /// results.json holds it, at the folder's smoothing]. Response only.
    #[arg(long, value_name = "1/N|none", allow_hyphen_values = true)]
    pub smooth: Option<String>,
    /// csv or json [default: json when --out ends in .json, else csv].
    #[arg(long, value_name = "csv|json")]
    pub format: Option<String>,
    /// The file to write, or - for standard output.
    #[arg(long, value_name = "FILE|-", allow_hyphen_values = true)]
    pub out: PathBuf,
    /// Replace --out if it exists.
    #[arg(long)]
    pub overwrite: bool,
}

/// Runs `gliss export`.
pub fn run(a: Args) -> Result<()> {
    let what = What::parse(&a.what)?;
    let smooth = a.smooth.as_deref().map(Smoothing::parse).transpose()?;
    let format = match a.format.as_deref() {
        Some(f) => Format::parse(f)?,
        None if a
            .out
            .extension()
            .is_some_and(|e| e.eq_ignore_ascii_case("json")) =>
        {
            Format::Json
        }
        None => Format::Csv,
    };
    let m = export::open(&a.dir)?;
    let t = export::table(&m, what, smooth)?;
    let bytes = match format {
        Format::Csv => export::to_csv(&t)?,
        Format::Json => export::to_json(&t, &m)?,
    };
    export::write(&a.out, &bytes, a.overwrite, &m)?;
    if a.out.as_os_str() != "-" {
        let smoothing = t
            .smoothing
            .map(|s| {
                if t.resmoothed {
                    format!(", smoothed again at {s} from impulse.wav")
                } else {
                    format!(", {s} smoothing as analysed")
                }
            })
            .unwrap_or_default();
        println!(
            "wrote {} ({} rows of {}{smoothing})",
            a.out.display(),
            t.rows(),
            what.label()
        );
    }
    Ok(())
}
