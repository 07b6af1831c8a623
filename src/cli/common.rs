//! Options shared by several commands.

use std::path::Path;

use clap::Args as ClapArgs;

use gliss::analysis::calibration::{Calibration, Drive};
use gliss::analysis::correction::Correction;
use gliss::analysis::gate::Gate;
use gliss::analysis::target::Target;
use gliss::analysis::{AnalysisConfig, Smoothing, distortion};
use gliss::error::{Error, Result};
use gliss::folder::schema::FileEntry;
use gliss::folder::sha256_hex;
use gliss::session::TargetJob;
use gliss::signal::sweep::{SweepDesign, SweepParams};

/// The refusal of a command that needs the sound card in a build without
/// it: `what` is what could not run, `instead` what works without one.
#[cfg(not(feature = "soundcard"))]
pub fn no_soundcard(what: &str, instead: &str) -> Error {
    Error::new(
        gliss::ErrorKind::Device,
        format!(
            "this build of gliss has no sound-card support, so {what} cannot run; {instead}build gliss with its default features (the `soundcard` feature; on Linux it needs the ALSA headers, e.g. libasound2-dev)"
        ),
    )
}

/// The sweep options of `sweep`, `demo` (and later `measure`).
#[derive(Debug, Clone, ClapArgs)]
pub struct SweepArgs {
    /// Start frequency of the sweep in Hz.
    #[arg(
        long,
        value_name = "HZ",
        default_value_t = 20.0,
        allow_hyphen_values = true
    )]
    pub start: f64,
    /// End frequency of the sweep in Hz (at most half the sample rate).
    #[arg(
        long,
        value_name = "HZ",
        default_value_t = 20_000.0,
        allow_hyphen_values = true
    )]
    pub end: f64,
    /// Length of the sweep in seconds; rounded slightly so that harmonic
    /// responses stay phase-aligned. Doubling it gains about 3 dB of
    /// signal-to-noise.
    #[arg(
        long,
        value_name = "S",
        default_value_t = 5.0,
        allow_hyphen_values = true
    )]
    pub length: f64,
    /// Silence after the sweep in seconds, long enough for the decay of the
    /// room or device (at least its reverberation time).
    #[arg(
        long,
        value_name = "S",
        default_value_t = 2.0,
        allow_hyphen_values = true
    )]
    pub tail: f64,
    /// Sample rate in Hz.
    #[arg(long, value_name = "HZ", default_value_t = 48_000)]
    pub rate: u32,
    /// Peak level of the sweep in dBFS (0 dBFS = full-scale sine). Start low
    /// and raise it step by step.
    #[arg(long, value_name = "DBFS", default_value_t = -20.0, allow_hyphen_values = true)]
    pub level: f64,
}

impl SweepArgs {
    /// The checked sweep.
    pub fn design(&self) -> Result<SweepDesign> {
        SweepParams {
            start_hz: self.start,
            end_hz: self.end,
            requested_length_s: self.length,
            sample_rate_hz: self.rate,
            level_dbfs: self.level,
            tail_s: self.tail,
            ..SweepParams::default()
        }
        .design()
    }
}

pub use gliss::model::Profile;
use gliss::model::plot_kind::PhaseView;

/// The STI's listening conditions of `analyze` and `demo` (`measure` has
/// its own, as its `--noise` records the noise).
#[derive(Debug, Clone, ClapArgs)]
pub struct SpeechArgs {
    /// The A-weighted speech level at 1 m in front of the talker, dB(A),
    /// for the speech transmission index (IEC 60268-16 male speech
    /// spectrum; applied at the listening position as it is) [default:
    /// 60, normal vocal effort, when --noise is given]. With it (or
    /// --noise) the STI includes the auditory masking and the hearing
    /// threshold; without either, it is for the impulse response alone.
    #[arg(long, value_name = "DB", allow_hyphen_values = true)]
    pub speech_level: Option<f64>,
    /// A noise folder of the same room (gliss noise, or measure --noise):
    /// the STI then includes its background noise per octave.
    #[arg(long, value_name = "DIR")]
    pub noise: Option<std::path::PathBuf>,
}

impl SpeechArgs {
    /// The STI's conditions ([`speech_conditions`]).
    pub fn conditions(&self) -> Result<Option<gliss::analysis::speech::Conditions>> {
        speech_conditions(self.speech_level, self.noise.as_deref())
    }
}

/// Where around a loudspeaker a measurement is taken (`analyze`,
/// `measure`), recorded in the manifest for `gliss directivity`.
#[derive(Debug, Clone, ClapArgs)]
pub struct OrbitArgs {
    /// The plane of a directivity measurement around a loudspeaker:
    /// horizontal or vertical (with --angle). Recorded in the manifest;
    /// `gliss directivity` gathers the folders of a series.
    #[arg(long, value_name = "PLANE", requires = "angle")]
    pub orbit: Option<gliss::model::Orbit>,
    /// The angle off the loudspeaker's axis on --orbit, whole degrees,
    /// −170…180 (vertical: positive up, toward the ceiling; horizontal:
    /// positive to the loudspeaker's left seen from the front).
    #[arg(
        long,
        value_name = "DEG",
        allow_hyphen_values = true,
        requires = "orbit"
    )]
    pub angle: Option<String>,
}

impl OrbitArgs {
    /// The position given, checked.
    pub fn position(&self) -> Result<Option<gliss::model::Position>> {
        let (Some(orbit), Some(angle)) = (self.orbit, self.angle.as_deref()) else {
            return Ok(None);
        };
        let deg: i32 = angle.trim().parse().map_err(|_| {
            Error::parameter(format!(
                "--angle {angle} is not a whole number of degrees; give e.g. --angle 30 or --angle -20"
            ))
        })?;
        gliss::model::Position::new(orbit, deg)
            .map(Some)
            .ok_or_else(|| {
                Error::parameter(format!(
                    "--angle {deg} is outside {}",
                    gliss::model::orbit::angle_range_words()
                ))
            })
    }
}

/// Analysis and output options of `analyze` and `demo`.
#[derive(Debug, Clone, ClapArgs)]
pub struct OutputArgs {
    /// What is measured, which picks the defaults: room, speech or music
    /// (no gate, 1/6-octave smoothing, bands on; speech and music also
    /// tell the report to lead with D50 or C80) or speaker (auto gate,
    /// 1/12-octave smoothing, bands off); distortion is on in all. Every
    /// option below overrides its default. Recorded in the manifest
    /// [default: room; the demo's rehearsal room: music].
    #[arg(long, value_enum)]
    pub profile: Option<Profile>,
    /// Fractional-octave smoothing of the frequency response: 1/1, 1/2,
    /// 1/3, 1/6, 1/12, 1/24, 1/48, or none [default: 1/6, speaker 1/12].
    #[arg(long, value_name = "1/N|none", allow_hyphen_values = true)]
    pub smooth: Option<String>,
    /// Separate the harmonic distortion orders 2..N from the same sweep
    /// (N up to 9); 1 analyses the linear response only.
    #[arg(long, value_name = "N", default_value_t = 5)]
    pub harmonics: u32,
    /// Gate the impulse response for a quasi-anechoic response: auto (end
    /// just before the first strong reflection, not the loudspeaker's own
    /// ringing; a warning says when it cannot tell them apart) or
    /// START_MS,END_MS relative to the impulse peak, e.g. -1,5, or none.
    /// Below 1/gate length the response is marked unresolved [default:
    /// none, speaker auto].
    #[arg(
        long,
        value_name = "auto|START_MS,END_MS|none",
        allow_hyphen_values = true
    )]
    pub gate: Option<String>,
    /// A microphone correction file (frequency Hz and dB per line, optional
    /// phase in degrees; # comments) to remove from the response.
    #[arg(long, value_name = "FILE")]
    pub mic_correction: Option<std::path::PathBuf>,
    /// A calibration file from `gliss calibrate`: the response is then also
    /// given in dB SPL at the microphone for the sweep's drive level.
    #[arg(long, value_name = "FILE.json")]
    pub calibration: Option<std::path::PathBuf>,
    /// The drive voltage: V RMS at the loudspeaker's terminals for a
    /// full-scale sine (0 dBFS) from the sound card. Measure it with a
    /// voltmeter while a sine at a known level plays, and scale: a -20 dBFS
    /// sine reading 0.2 V gives 2.0. With --calibration the response is
    /// then also given as a sensitivity, dB SPL at 2.83 V RMS (1 W into
    /// 8 ohm), in results.json (response.sensitivity_db_spl) and
    /// response.csv. Needs --calibration.
    #[arg(long, value_name = "V", allow_hyphen_values = true)]
    pub volts_per_fs: Option<String>,
    /// The microphone's distance from the loudspeaker in metres: the
    /// sensitivity is then referred to 1 m by the inverse-square law
    /// (+20*lg(d/1 m) dB). That law holds only in the far field: several
    /// times the size of the driver or baffle away, and beyond the near
    /// field of a multi-way speaker, where its drivers' sound has merged;
    /// at short distance in a room, reflections count too (gate them).
    /// Needs --calibration and --volts-per-fs.
    #[arg(long, value_name = "M", allow_hyphen_values = true)]
    pub distance: Option<String>,
    #[command(flatten)]
    pub targets: TargetArgs,
    /// Skip the reverberation and energy parameters per octave and
    /// one-third-octave band (the speaker profile's default).
    #[arg(long, conflicts_with = "bands")]
    pub no_bands: bool,
    /// Analyse the bands even with the speaker profile.
    #[arg(long)]
    pub bands: bool,
    /// Skip the PNG plots (faster for batch runs).
    #[arg(long)]
    pub no_plots: bool,
    /// How plots/phase.png shows the phase: wrapped into -180..180 degrees
    /// (every turn on one scale) or unwrapped (the accumulated phase, on a
    /// scale that fits it: shows how much phase a crossover or a delay
    /// adds). results.json always holds both.
    #[arg(long, value_enum, value_name = "wrapped|unwrapped", default_value_t = PhaseView::Wrapped)]
    pub phase_plot: PhaseView,
    /// Replace the derived files of an existing measurement folder made
    /// from the same raw files; raw recordings are always kept.
    #[arg(long)]
    pub overwrite: bool,
}

impl OutputArgs {
    /// The checked analysis settings.
    pub fn config(&self) -> Result<AnalysisConfig> {
        self.config_for(self.profile.unwrap_or_default())
    }

    /// The checked analysis settings with `profile`'s defaults (every
    /// option given still overrides them).
    pub fn config_for(&self, profile: Profile) -> Result<AnalysisConfig> {
        if self.harmonics == 0 || self.harmonics > distortion::MAX_ORDER {
            return Err(Error::parameter(format!(
                "--harmonics {} is out of range; use 2 to {} (the orders to separate), or 1 for none",
                self.harmonics,
                distortion::MAX_ORDER
            )));
        }
        let speaker = profile.is_speaker();
        let smooth = self
            .smooth
            .as_deref()
            .unwrap_or(if speaker { "1/12" } else { "1/6" });
        let gate = match self.gate.as_deref() {
            Some(g) if g.trim().eq_ignore_ascii_case("none") => None,
            Some(g) => Some(Gate::parse(g)?),
            None if speaker => Some(Gate::Auto),
            None => None,
        };
        Ok(AnalysisConfig {
            smoothing: Smoothing::parse(smooth)?,
            harmonics: self.harmonics,
            bands: if speaker { self.bands } else { !self.no_bands },
            gate,
            // read by `mic_correction`, once, by the command
            mic_correction: None,
            profile,
            speech: None,
        })
    }

    /// The checked drive voltage and distance (`None` without
    /// --volts-per-fs); refused without --calibration.
    pub fn drive(&self) -> Result<Option<Drive>> {
        let volts = self
            .volts_per_fs
            .as_deref()
            .map(|v| {
                positive(
                    "--volts-per-fs",
                    v,
                    "V RMS for a full-scale sine, e.g. --volts-per-fs 2.0",
                )
            })
            .transpose()?;
        let distance = self
            .distance
            .as_deref()
            .map(|v| {
                positive(
                    "--distance",
                    v,
                    "the microphone's distance in metres, e.g. --distance 1",
                )
            })
            .transpose()?;
        if self.calibration.is_none() && (volts.is_some() || distance.is_some()) {
            let which = if volts.is_some() {
                "--volts-per-fs"
            } else {
                "--distance"
            };
            return Err(Error::parameter(format!(
                "{which} needs --calibration: a sensitivity in dB SPL needs a calibrated microphone; run gliss calibrate on a calibrator's tone and pass --calibration FILE.json"
            )));
        }
        match (volts, distance) {
            (Some(volts_per_fs), distance_m) => Ok(Some(Drive {
                volts_per_fs,
                distance_m,
            })),
            (None, Some(_)) => Err(Error::parameter(
                "--distance refers the sensitivity (dB SPL at 2.83 V) to 1 m and needs the drive voltage: add --volts-per-fs V",
            )),
            (None, None) => Ok(None),
        }
    }

    /// The calibration, parsed, with its path and SHA-256 for the manifest.
    pub fn calibration(&self) -> Result<Option<(Calibration, FileEntry)>> {
        self.calibration
            .as_deref()
            .map(read_calibration)
            .transpose()
    }

    /// The microphone correction, parsed, with its path and SHA-256 for the
    /// manifest.
    pub fn mic_correction(&self) -> Result<Option<(Correction, FileEntry)>> {
        let Some(path) = &self.mic_correction else {
            return Ok(None);
        };
        let (bytes, entry) = read_input(path)?;
        let text = String::from_utf8_lossy(&bytes);
        let c = Correction::parse(&text).map_err(|m| {
            Error::input(format!("the microphone correction {}: {m}", path.display()))
        })?;
        Ok(Some((c, entry)))
    }

    /// The target curve of --target, checked against the sweep band.
    pub fn target(&self, band: (f64, f64)) -> Result<Option<TargetJob>> {
        self.targets.target(band)
    }
}

/// Parses `value` of `option` as a positive finite number; `what` says
/// what to give instead.
fn positive(option: &str, value: &str, what: &str) -> Result<f64> {
    match value.trim().parse::<f64>() {
        Ok(v) if v.is_finite() && v > 0.0 => Ok(v),
        Ok(_) => Err(Error::parameter(format!(
            "{option} {value} must be a positive finite number: {what}"
        ))),
        Err(_) => Err(Error::parameter(format!(
            "{option} {value:?} is not a number: give {what}"
        ))),
    }
}

/// The target-curve options of analyze, measure, demo and compare.
#[derive(Debug, Clone, ClapArgs)]
pub struct TargetArgs {
    /// A target curve to compare the response with: lines of
    /// `frequency_hz target_db [lower_db [upper_db]]` (CSV or spaces, #
    /// comments, an optional header line), the tolerances in dB below and
    /// above the target (one column: ±). Interpolated linearly in dB
    /// against log frequency. By default the response is level-aligned to
    /// the target first (its level re the sweep is arbitrary): the mean
    /// difference over the range is taken out and reported as
    /// level_offset_db. results.json gets `target` (max and mean
    /// deviation, share within tolerance, worst frequency); the response
    /// plot draws the target and its tolerance band.
    #[arg(long, value_name = "FILE.csv")]
    pub target: Option<std::path::PathBuf>,
    /// The range compared with the target, LO,HI in Hz, e.g. 50,10000
    /// [default: where both the target and the sweep are]. Needs --target.
    #[arg(long, value_name = "LO,HI")]
    pub target_range: Option<String>,
    /// Compare the levels with the target as they are, without aligning
    /// (for a target in dB SPL with --calibration, or in dB re the sweep).
    /// Needs --target.
    #[arg(long)]
    pub target_absolute: bool,
}

impl TargetArgs {
    /// The target curve, parsed and checked against the sweep band
    /// `band` (Hz), with its path and SHA-256 for the manifest.
    pub fn target(&self, band: (f64, f64)) -> Result<Option<TargetJob>> {
        let Some(path) = &self.target else {
            if self.target_range.is_some() || self.target_absolute {
                let which = if self.target_range.is_some() {
                    "--target-range"
                } else {
                    "--target-absolute"
                };
                return Err(Error::parameter(format!(
                    "{which} needs --target FILE.csv: the target curve to compare the response with"
                )));
            }
            return Ok(None);
        };
        let range = self
            .target_range
            .as_deref()
            .map(|r| parse_band("--target-range", r, "50,10000"))
            .transpose()?;
        let (bytes, file) = read_input(path)?;
        let text = String::from_utf8_lossy(&bytes);
        let target = Target::parse(&text)
            .map_err(|m| Error::input(format!("the target {}: {m}", path.display())))?;
        let job = TargetJob {
            target,
            file,
            range,
            absolute: self.target_absolute,
        };
        job.resolve_range(band)?;
        Ok(Some(job))
    }
}

/// The folder name for messages.
pub fn show(p: &Path) -> String {
    p.display().to_string()
}

/// The conditions of the STI: `--speech-level` (default the standard's
/// normal vocal effort when only `--noise` is given) and the noise
/// folder of `--noise`, read through `folder::open_noise`. `None`
/// without either: the STI of the impulse response alone.
pub fn speech_conditions(
    speech_level: Option<f64>,
    noise_dir: Option<&Path>,
) -> Result<Option<gliss::analysis::speech::Conditions>> {
    use gliss::analysis::speech::{Conditions, NORMAL_EFFORT_DBA};
    if speech_level.is_none() && noise_dir.is_none() {
        return Ok(None);
    }
    if let Some(l) = speech_level {
        if !(30.0..=100.0).contains(&l) {
            return Err(Error::parameter(format!(
                "--speech-level {l} dB(A) is no speech level at 1 m; talkers give 45 (relaxed) to 90 (shouting), {NORMAL_EFFORT_DBA} for normal vocal effort"
            )));
        }
    }
    let noise = match noise_dir {
        None => None,
        Some(dir) => {
            let f = gliss::folder::open_noise(dir)?;
            let Some(octaves) = f.noise.speech_octaves() else {
                return Err(Error::input(format!(
                    "the noise folder {} does not hold every octave 125 Hz-8 kHz (recorded at {} Hz); record the noise at 44.1 kHz or more",
                    dir.display(),
                    f.noise.sample_rate_hz
                )));
            };
            Some((
                octaves,
                format!(
                    "{} (noise folder, manifest SHA-256 {})",
                    dir.display(),
                    f.manifest_sha256
                ),
                f.noise,
            ))
        }
    };
    Ok(Some(Conditions {
        speech_level_dba: speech_level.unwrap_or(NORMAL_EFFORT_DBA),
        speech_level_given: speech_level.is_some(),
        noise_db: noise.as_ref().map(|n| n.0),
        noise_source: noise.as_ref().map(|n| n.1.clone()),
        noise: noise.map(|n| n.2),
    }))
}

/// Reads a calibration file from `gliss calibrate`, with its manifest entry.
pub fn read_calibration(path: &Path) -> Result<(Calibration, FileEntry)> {
    let (bytes, entry) = read_input(path)?;
    let c: Calibration = serde_json::from_slice(&bytes)
        .ok()
        .filter(|c: &Calibration| c.format == "gliss calibration" && c.pa_per_fs > 0.0)
        .ok_or_else(|| {
            Error::input(format!(
                "{} is not a calibration file from gliss calibrate",
                path.display()
            ))
        })?;
    Ok((c, entry))
}

/// Reads an input file named on the command line; returns its bytes and
/// its manifest entry (path as given, role "input", SHA-256).
pub fn read_input(path: &Path) -> Result<(Vec<u8>, FileEntry)> {
    let bytes = std::fs::read(path).map_err(|e| Error::io("read", path, &e))?;
    let entry = FileEntry {
        name: path.display().to_string(),
        role: gliss::folder::schema::FileRole::Input,
        sha256: sha256_hex(&bytes),
    };
    Ok((bytes, entry))
}

/// The octave-band T30 of input `k` of a comparison against the reference,
/// one line per band, with the verdict comparison.json stores (and, with a
/// room volume, the change of absorption area).
pub fn print_octave_verdicts(cmp: &gliss::folder::schema::Comparison, k: usize) {
    use gliss::model::{Fraction, Parameter};
    for r in cmp
        .bands
        .iter()
        .filter(|r| r.fraction == Fraction::Octave && r.parameter == Parameter::T30)
    {
        let (Some(t0), Some(t1)) = (r.values[0], r.values.get(k).copied().flatten()) else {
            continue;
        };
        let area = cmp
            .absorption
            .iter()
            .find(|x| x.fraction == Fraction::Octave && (x.center_hz - r.center_hz).abs() < 1e-6)
            .and_then(|x| x.delta_area_m2.get(k).copied().flatten());
        let verdict = r
            .changes
            .verdict
            .get(k)
            .copied()
            .flatten()
            .map_or("not judged", gliss::analysis::compare::Verdict::words);
        println!(
            "  {:>9}  T30 {t0:.2} s -> {t1:.2} s ({:+.0} %){}: {verdict}",
            gliss::model::units::hz(r.center_hz),
            100.0 * r.changes.relative_change[k].unwrap_or(0.0),
            area.map_or(String::new(), |x| format!(", {x:+.1} m² absorption")),
        );
    }
}

/// Parses a band `LO,HI` in Hz (0 < LO < HI) given to `option`; the
/// refusal shows `example`.
pub fn parse_band(option: &str, r: &str, example: &str) -> Result<(f64, f64)> {
    let parts: Vec<&str> = r.split(',').map(str::trim).collect();
    let nums: Option<Vec<f64>> = (parts.len() == 2)
        .then(|| parts.iter().map(|p| p.parse::<f64>().ok()).collect())
        .flatten();
    match nums.as_deref() {
        Some(&[lo, hi]) if lo.is_finite() && hi.is_finite() && lo > 0.0 && hi > lo => Ok((lo, hi)),
        _ => Err(Error::parameter(format!(
            "{option} {r:?} is not LO,HI in Hz with 0 < LO < HI; give e.g. {option} {example}"
        ))),
    }
}

/// One measurement's outcome in a few words, for the lines of commands
/// that make many: "impulse response 106 dB above its noise, 0 warnings"
/// (the measurement's own warnings; the bands' are grouped elsewhere).
pub fn outcome_in_brief(o: &gliss::session::Outcome) -> String {
    let n = o.analysis.warnings.len();
    format!(
        "impulse response {:.0} dB above its noise, {n} warning{}",
        o.analysis.peak_to_noise_db,
        if n == 1 { "" } else { "s" }
    )
}
