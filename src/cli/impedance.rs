//! `gliss impedance`: a loudspeaker driver's impedance through a sense
//! resistor, and its small-signal parameters, into an impedance folder.

use std::path::PathBuf;

use clap::Args as ClapArgs;

use crate::cli::common;
use gliss::analysis::{AnalysisConfig, Smoothing};
use gliss::error::{Error, Result};
use gliss::folder::schema::Source;
use gliss::session::impedance::{ImpedanceJob, Second};
use gliss::session::{self, Job, Outcome, sweep_file};
use gliss::signal::wav::decode_wav;

/// The cautions every impedance measurement needs, shared by `impedance`
/// and `measure --impedance`.
pub const CAUTIONS: &str = "\
Example:\n  gliss sweep --start 10 --out sweep.wav\n  \
(play sweep.wav into the amplifier; record the two inputs below)\n  \
gliss impedance rec.wav --sweep sweep.wav --reference 1 --channel 2 --sense-ohms 10 --out woofer\n\n\
Wiring: amplifier output -> sense resistor R -> driver -> back to the amplifier's \
return. The reference input records the amplifier side of R, the driver input the \
voltage across the driver, both against the amplifier's return (the inputs' grounds \
joined to it). Both inputs must be set alike (same gain, same pad).\n\n\
Cautions:\n\
- Never connect an amplifier's output straight to a sound-card input: line inputs \
take a few volts at most and a power amplifier gives tens. Put a divider or pad in \
each input lead (e.g. 10 kOhm over 1 kOhm, /11) and, before connecting the sound \
card, play a sine at the level you will measure with and check with a voltmeter \
(AC volts) that each input would see less than its rated level.\n\
- The sense resistor carries the driver's whole current: rate it for the power \
(I^2 * R) with room to spare; a 5 W to 10 W non-inductive power resistor of 1 to \
10 ohm, near the driver's nominal impedance, is usual. Measure its value with an ohmmeter and give \
that to --sense-ohms.\n\
- Small-signal parameters depend on level: drive the driver gently (well under \
1 V at its terminals is usual, IEC 60268-5 asks for a level in the driver's linear \
range) and note the level with the results.\n\
- Mind the excursion: a driver in free air at its resonance moves most; fix it \
(magnet down or clamped, the cone free and away from walls), and keep the level \
low so the cone stays well within its travel.\n\n\
Constant current (--constant-current): one input across the driver, a large R \
(1 kOhm), and the sweep as written standing for the amplifier's output: the chain \
from the sweep file to the amplifier's output, as that input records it through the \
same pad, must have unity gain (record the amplifier's output once to check); any \
error of that gain is an error of |Z| in the same proportion, and the low current \
leaves the driver's voltage far down, near the input's noise.";

/// Options of `gliss impedance`.
#[derive(Debug, ClapArgs)]
#[command(after_help = CAUTIONS)]
pub struct Args {
    /// The recording (WAV: two channels, the reference and the driver).
    #[arg(value_name = "RECORDING.wav")]
    pub recording: PathBuf,
    /// The sweep that was played (from `gliss sweep`, or an exponential
    /// sweep from elsewhere).
    #[arg(long, value_name = "SWEEP.wav")]
    pub sweep: PathBuf,
    /// The channel at the amplifier side of the sense resistor, from 1.
    #[arg(long, value_name = "N", required_unless_present = "constant_current")]
    pub reference: Option<usize>,
    /// The channel across the driver, from 1 [default: 2; with
    /// --constant-current 1].
    #[arg(long, value_name = "N")]
    pub channel: Option<usize>,
    /// The sense resistor in series with the driver, ohms (as measured
    /// with an ohmmeter).
    #[arg(long, value_name = "R", allow_hyphen_values = true)]
    pub sense_ohms: f64,
    /// One channel across the driver and a large sense resistor; see
    /// below for its limits.
    #[arg(long, conflicts_with = "reference")]
    pub constant_current: bool,
    /// The voice coil's DC resistance as measured with an ohmmeter, ohms;
    /// without it Re is read from the impedance.
    #[arg(long, value_name = "OHMS", allow_hyphen_values = true)]
    pub re_ohms: Option<f64>,
    /// The added-mass method: this recording is the driver with a mass of
    /// G grams fixed to its cone (needs --free-air and --cone-diameter).
    #[arg(long, value_name = "G", requires_all = ["free_air", "cone_diameter"], conflicts_with = "box_volume")]
    pub added_mass: Option<f64>,
    /// The closed-box method: this recording is the driver in a sealed box
    /// of L litres net volume (needs --free-air).
    #[arg(long, value_name = "L", requires = "free_air")]
    pub box_volume: Option<f64>,
    /// The cone's effective diameter in mm (the cone and about half the
    /// surround) for Sd, Vas, Mms, Cms and Bl.
    #[arg(long, value_name = "MM")]
    pub cone_diameter: Option<f64>,
    /// The folder `gliss impedance` wrote for the same driver in free air
    /// (for --added-mass or --box-volume).
    #[arg(long, value_name = "FREE_DIR")]
    pub free_air: Option<PathBuf>,
    /// The folder to write.
    #[arg(long, value_name = "DIR")]
    pub out: PathBuf,
    /// Replace the derived files of an existing folder of the same raw files.
    #[arg(long)]
    pub overwrite: bool,
    /// Write no PNG plots.
    #[arg(long)]
    pub no_plots: bool,
}

impl Args {
    /// The impedance settings, checked.
    pub fn job(&self) -> Result<ImpedanceJob> {
        impedance_job(
            self.reference,
            self.sense_ohms,
            self.re_ohms,
            self.second()?,
        )
    }

    fn second(&self) -> Result<Option<Second>> {
        if self.free_air.is_some() && self.added_mass.is_none() && self.box_volume.is_none() {
            return Err(Error::parameter(
                "--free-air is the reference of a second measurement: give --added-mass G (with --cone-diameter) or --box-volume L",
            ));
        }
        let free_air = self.free_air.clone().unwrap_or_default();
        Ok(match (self.added_mass, self.box_volume) {
            (Some(grams), _) => Some(Second::AddedMass {
                grams,
                cone_mm: self.cone_diameter.unwrap_or(0.0),
                free_air,
            }),
            (None, Some(litres)) => Some(Second::ClosedBox {
                litres,
                cone_mm: self.cone_diameter,
                free_air,
            }),
            (None, None) => None,
        })
    }
}

/// The checked impedance settings (channels 1-based as given).
pub fn impedance_job(
    reference: Option<usize>,
    sense_ohms: f64,
    re_ohms: Option<f64>,
    second: Option<Second>,
) -> Result<ImpedanceJob> {
    if !(sense_ohms.is_finite() && sense_ohms > 0.0) {
        return Err(Error::parameter(format!(
            "--sense-ohms {sense_ohms} is not a resistance; give the sense resistor's value in ohms as an ohmmeter reads it, e.g. --sense-ohms 10"
        )));
    }
    if let Some(re) = re_ohms
        && !(re.is_finite() && re > 0.0)
    {
        return Err(Error::parameter(format!(
            "--re-ohms {re} is not a resistance; give the voice coil's DC resistance in ohms, or leave it out"
        )));
    }
    let reference = match reference {
        Some(0) => {
            return Err(Error::parameter(
                "--reference counts from 1; use --reference 1 for the first channel",
            ));
        }
        r => r.map(|r| r - 1),
    };
    Ok(ImpedanceJob {
        reference,
        sense_ohms,
        re_ohms,
        second,
    })
}

/// The analysis settings of an impedance folder: the driver channel's
/// response at 1/12 octave, distortion to the 5th, no gate, no bands.
pub fn config() -> Result<AnalysisConfig> {
    Ok(AnalysisConfig {
        smoothing: Smoothing::parse("1/12")?,
        harmonics: 5,
        bands: false,
        gate: None,
        mic_correction: None,
        profile: gliss::model::Profile::Speaker,
        speech: None,
    })
}

fn read(path: &PathBuf, what: &str) -> Result<(Vec<u8>, gliss::signal::wav::WavData)> {
    let bytes = std::fs::read(path).map_err(|e| Error::io("read", path, &e))?;
    let data =
        decode_wav(&bytes).map_err(|m| Error::input(format!("{what} {} {m}", path.display())))?;
    Ok((bytes, data))
}

/// Runs `gliss impedance`.
pub fn run(a: Args) -> Result<()> {
    let channel = a.channel.unwrap_or(if a.constant_current { 1 } else { 2 });
    if channel == 0 {
        return Err(Error::parameter(
            "--channel counts from 1; use --channel 2 for the second channel",
        ));
    }
    let imp = a.job()?;
    let sweep_file::LoadedSweep {
        design,
        recovered: recovered_sweep,
        binding: sweep_binding,
    } = sweep_file::load_or_recover(&a.sweep)?;
    let (stimulus_bytes, stimulus) = read(&a.sweep, "the sweep")?;
    let (recording_bytes, recording) = read(&a.recording, "the recording")?;
    let title = a
        .recording
        .file_name()
        .map(|n| n.to_string_lossy().into_owned())
        .unwrap_or_else(|| "recording".into());
    let job = Job {
        out: a.out.clone(),
        overwrite: a.overwrite,
        plots: !a.no_plots,
        phase_view: Default::default(),
        recording_bytes,
        recording,
        channel: channel - 1,
        stimulus_bytes,
        stimulus,
        design,
        config: config()?,
        source: Source {
            kind: "file".into(),
            description: format!(
                "impedance recording {} of sweep {} through {} Ω",
                a.recording.display(),
                a.sweep.display(),
                a.sense_ohms
            ),
            recording_path: Some(a.recording.display().to_string()),
            sweep_path: Some(a.sweep.display().to_string()),
        },
        title,
        command_line: std::env::args().collect(),
        mic_correction: None,
        calibration: None,
        reference: None,
        measurement: None,
        drive: None,
        target: None,
        impulse: false,
        recovered_sweep,
        sweep_binding,
        impedance: Some(imp),
        position: None,
    };
    let outcome = session::run(job)?;
    print_summary(&common::show(&a.out), &outcome);
    Ok(())
}

/// The folder's files, the parameters and the warnings, for the terminal.
pub fn print_summary(out: &str, o: &Outcome) {
    println!("wrote the impedance folder {out}:");
    for f in &o.files {
        println!("  {f}");
    }
    let Some(imp) = &o.impedance else {
        return;
    };
    let z = &imp.impedance;
    let (lo, hi) = z
        .magnitude_ohm
        .iter()
        .fold((f64::INFINITY, 0.0f64), |(a, b), &m| (a.min(m), b.max(m)));
    println!(
        "|Z| from {lo:.2} to {hi:.2} Ω over {:.0} Hz to {:.0} Hz",
        z.band_hz[0], z.band_hz[1]
    );
    match &imp.thiele_small {
        Some(t) => {
            println!(
                "Re {:.3} Ω{}, fs {:.2} Hz, Qms {:.3}, Qes {:.3}, Qts {:.3}, Le {:.3} mH, Res {:.2} Ω (fit {:.2} % RMS)",
                t.re_ohm,
                if t.re_given { " (given)" } else { "" },
                t.fs_hz,
                t.qms,
                t.qes,
                t.qts,
                t.le_mh,
                t.res_ohm,
                t.fit_rms_percent
            );
            if let Some(s) = &t.semi_inductance {
                println!(
                    "semi-inductance model: K {:.4e} Ω·s^n, n {:.3} (fit {:.2} % RMS)",
                    s.k, s.n, s.fit_rms_percent
                );
            }
            if let Some(m) = &t.mechanics {
                let opt = |v: Option<f64>, unit: &str, d: usize| {
                    v.map_or("—".to_string(), |v| format!("{v:.d$} {unit}"))
                };
                println!(
                    "{}: Vas {:.2} l, Mms {}, Cms {}, Bl {}, Sd {} (fs {:.2} Hz in the second measurement)",
                    m.method,
                    m.vas_l,
                    opt(m.mms_g, "g", 2),
                    opt(m.cms_mm_per_n, "mm/N", 3),
                    opt(m.bl_tm, "T·m", 2),
                    opt(m.sd_cm2, "cm²", 1),
                    m.second_fs_hz
                );
            }
        }
        None => println!("no small-signal parameters (see the warnings)"),
    }
    if o.analysis.warnings.is_empty() {
        println!("no warnings");
    }
    for w in &o.analysis.warnings {
        println!("warning: {w}");
    }
}
