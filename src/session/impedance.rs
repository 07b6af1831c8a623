//! An impedance measurement's steps: Z from the recording's channels
//! ([`crate::analysis::impedance`]), the small-signal parameters
//! ([`crate::analysis::thiele_small`]), with a second measurement the
//! driver's volume and mechanics (the free-air folder read back through
//! [`crate::folder::open`]), and impedance.csv at full resolution.

use std::path::{Path, PathBuf};

use crate::analysis::impedance::{self, Impedance, ImpedanceInput};
use crate::analysis::thiele_small::{self, ThieleSmall};
use crate::error::{Error, Result};
use crate::folder::schema::{FolderKind, ImpedanceRecord};
use crate::model::{Code, Warning};

use super::Job;

/// The file of Z at every FFT bin of the band.
pub const IMPEDANCE_CSV: &str = "impedance.csv";

/// What an impedance job measures, besides the recording and sweep of its
/// [`Job`].
#[derive(Debug, Clone)]
pub struct ImpedanceJob {
    /// The channel at the amplifier side of the sense resistor, 0-based;
    /// `None`: constant current, one channel (the job's `channel`).
    pub reference: Option<usize>,
    /// The sense resistor, Ω.
    pub sense_ohms: f64,
    /// Re as measured with an ohmmeter, Ω; `None`: read from the impedance.
    pub re_ohms: Option<f64>,
    /// A second measurement of the same driver.
    pub second: Option<Second>,
}

/// The second measurement's method and the folder of the free-air one.
#[derive(Debug, Clone)]
pub enum Second {
    /// A known mass on the cone (the added-mass method).
    AddedMass {
        /// The mass, g.
        grams: f64,
        /// The cone's effective diameter, mm.
        cone_mm: f64,
        /// The free-air measurement's folder.
        free_air: PathBuf,
    },
    /// A closed box of known volume (the closed-box method).
    ClosedBox {
        /// The box's net volume, litres.
        litres: f64,
        /// The cone's effective diameter, mm, for Mms, Cms and Bl.
        cone_mm: Option<f64>,
        /// The free-air measurement's folder.
        free_air: PathBuf,
    },
}

/// What an impedance job found.
#[derive(Debug, Clone)]
pub struct ImpedanceOutcome {
    /// Z on the grid and at full resolution.
    pub impedance: Impedance,
    /// The small-signal parameters (`None`: the resonance could not be
    /// read; the reason is among `warnings`).
    pub thiele_small: Option<ThieleSmall>,
    /// What the impedance and the fit warn of.
    pub warnings: Vec<Warning>,
}

impl ImpedanceOutcome {
    /// results.json's `impedance` for `job`.
    pub fn record(&self, job: &Job, imp: &ImpedanceJob) -> ImpedanceRecord {
        ImpedanceRecord {
            reference_channel: imp.reference.map(|r| r + 1),
            driver_channel: job.channel + 1,
            impedance_file: IMPEDANCE_CSV.into(),
            curve: self.impedance.clone(),
        }
    }
}

/// The small-signal parameters of the free-air folder `dir`.
fn free_air(dir: &Path) -> Result<ThieleSmall> {
    let folder = crate::folder::open(dir)?;
    let (_, results) = folder.measurement("give the folder of the driver's free-air impedance")?;
    if folder.kind != FolderKind::Impedance {
        return Err(Error::input(format!(
            "{} is {}, not an impedance measurement; give --free-air the folder gliss impedance wrote for the driver in free air",
            dir.display(),
            folder.kind.words()
        )));
    }
    results.thiele_small.clone().ok_or_else(|| {
        Error::input(format!(
            "{} has no small-signal parameters (its resonance could not be read); measure the driver in free air again",
            dir.display()
        ))
    })
}

/// Measures the impedance of `job`'s recording and reads the parameters.
pub fn analyse(job: &Job, imp: &ImpedanceJob) -> Result<ImpedanceOutcome> {
    let channels = &job.recording.channels;
    if let Some(r) = imp.reference {
        if r == job.channel {
            return Err(Error::parameter(format!(
                "--reference {} is also --channel: give the channel at the amplifier side of the sense resistor as --reference and the one across the driver as --channel",
                r + 1
            )));
        }
        if r >= channels.len() {
            return Err(Error::parameter(format!(
                "--reference {} does not exist: the recording has {} channel{}",
                r + 1,
                channels.len(),
                if channels.len() == 1 { "" } else { "s" }
            )));
        }
    }
    let stimulus = job.stimulus.channels.first().map_or(&[][..], |c| &c[..]);
    let design = &job.design;
    let z = impedance::impedance(&ImpedanceInput {
        reference: imp.reference.map(|r| &channels[r][..]),
        driver: &channels[job.channel],
        stimulus,
        fs: design.fs(),
        band: (design.params.start_hz, design.params.end_hz),
        rate_s: design.harmonic_offset_s(2) / 2f64.ln(),
        sense_ohms: imp.sense_ohms,
    })?;
    let mut warnings = z.warnings.clone();
    let read = thiele_small::thiele_small(&z.frequency_hz, &z.grid_complex(), imp.re_ohms);
    let thiele_small = match (read, &imp.second) {
        (Ok((mut ts, mut w)), second) => {
            warnings.append(&mut w);
            ts.mechanics = match second {
                None => None,
                Some(Second::AddedMass {
                    grams,
                    cone_mm,
                    free_air: dir,
                }) => {
                    let free = free_air(dir)?;
                    Some(thiele_small::added_mass(&free, ts.fs_hz, *grams, *cone_mm)?)
                }
                Some(Second::ClosedBox {
                    litres,
                    cone_mm,
                    free_air: dir,
                }) => {
                    let free = free_air(dir)?;
                    Some(thiele_small::closed_box(&free, &ts, *litres, *cone_mm)?)
                }
            };
            Some(ts)
        }
        // the second measurement's method needs its resonance
        (Err(e), Some(_)) => return Err(e),
        (Err(e), None) => {
            warnings.push(Warning::new(Code::ResonanceOutsideBand, e.message()));
            None
        }
    };
    Ok(ImpedanceOutcome {
        impedance: z,
        thiele_small,
        warnings,
    })
}

/// impedance.csv: frequency, |Z|, phase, and the real and imaginary parts
/// at every FFT bin of the band.
pub fn impedance_csv(z: &Impedance) -> Result<Vec<u8>> {
    let mut w = csv::Writer::from_writer(Vec::new());
    let err = |e: csv::Error| Error::input(format!("could not encode CSV: {e}"));
    w.write_record([
        "frequency_hz",
        "magnitude_ohm",
        "phase_deg",
        "real_ohm",
        "imaginary_ohm",
    ])
    .map_err(err)?;
    for (f, m, p) in z.full_resolution() {
        let c = rustfft::num_complex::Complex::from_polar(m, p.to_radians());
        w.write_record([
            format!("{f:.4}"),
            format!("{m:.5}"),
            format!("{p:.3}"),
            format!("{:.5}", c.re),
            format!("{:.5}", c.im),
        ])
        .map_err(err)?;
    }
    w.into_inner()
        .map_err(|e| Error::input(format!("could not encode CSV: {e}")))
}
