//! The session layer: turns inputs into a measurement folder on disk.
//! All file I/O of an analysis happens here; the stages it calls are pure.

pub mod align;
pub mod compare;
pub mod directivity;
pub mod export;
pub mod impedance;
pub mod measure;
pub mod noise;
pub mod reanalyze;
pub mod sweep_file;
pub mod tuning;

use std::path::{Path, PathBuf};

use crate::analysis::target::{self, Target};
use crate::analysis::{self, Analysis, AnalysisConfig, Distortion};
use crate::error::{Error, Result};
use crate::model::plot_kind::PLOTS_BUILT;
use crate::model::{Code, Parameter, Warnings};
#[cfg(feature = "plots")]
use crate::plot;
use crate::signal::sweep::SweepDesign;
use crate::signal::wav::{self, SampleEncoding, WavData};

use crate::folder::MeasurementFolder;
use crate::folder::schema::{
    FileEntry, ImpulseRecord, Manifest, ResponseRecord, Results, SCHEMA_VERSION, SensitivityRecord,
    Settings, Source, TargetRecord,
};

/// Everything needed to analyse one recording into a folder.
#[derive(Debug, Clone)]
pub struct Job {
    /// The output folder.
    pub out: PathBuf,
    /// Replace derived files of an existing measurement of the same raw files.
    pub overwrite: bool,
    /// Draw PNG plots.
    pub plots: bool,
    /// How the phase plot shows the phase (`--phase-plot`).
    pub phase_view: crate::model::plot_kind::PhaseView,
    /// The recording file's bytes, kept unchanged as recording.wav.
    pub recording_bytes: Vec<u8>,
    /// The decoded recording.
    pub recording: WavData,
    /// The analysed channel, 0-based.
    pub channel: usize,
    /// The sweep file's bytes, kept unchanged as stimulus.wav.
    pub stimulus_bytes: Vec<u8>,
    /// The decoded sweep.
    pub stimulus: WavData,
    /// The sweep's design.
    pub design: SweepDesign,
    /// Analysis settings.
    pub config: AnalysisConfig,
    /// Where the recording came from.
    pub source: Source,
    /// A short title for plots.
    pub title: String,
    /// The command line, for the manifest.
    pub command_line: Vec<String>,
    /// The microphone correction file, if one was given (path and hash).
    pub mic_correction: Option<FileEntry>,
    /// The calibration, if one was given, and its file (path and hash).
    pub calibration: Option<(crate::analysis::calibration::Calibration, FileEntry)>,
    /// The recording's loopback reference channel, 0-based: the response
    /// is then divided by it instead of the sweep as written.
    pub reference: Option<usize>,
    /// How a device measurement ran, for the manifest.
    pub measurement: Option<crate::folder::schema::MeasurementRecord>,
    /// The drive voltage and microphone distance for a sensitivity (only
    /// with a calibration).
    pub drive: Option<crate::analysis::calibration::Drive>,
    /// A target curve to compare the response with.
    pub target: Option<TargetJob>,
    /// `recording` is an impulse response given as it is (`analyze
    /// --impulse`), not the recording of a sweep: no stimulus (its bytes
    /// and samples are empty), `design` only names the analysed band
    /// ([`impulse_design`]), and the file is kept as input-impulse.wav.
    pub impulse: bool,
    /// The sweep file had no description and its design was recovered
    /// from its samples: what was found, said as a note.
    pub recovered_sweep: Option<String>,
    /// The binding the sweep file's description records
    /// ([`sweep_file::SweepBinding`]): when it vouches for
    /// `stimulus_bytes` and `design`, the sweep is not generated again to
    /// be compared with the file. `None` (a sweep generated in memory, a
    /// measurement folder's stimulus.wav, a description without one): the
    /// file is compared with the sweep generated again.
    pub sweep_binding: Option<sweep_file::SweepBinding>,
    /// A loudspeaker driver's impedance through a sense resistor: the
    /// folder is an impedance measurement ([`impedance`]).
    pub impedance: Option<impedance::ImpedanceJob>,
    /// Where around a loudspeaker the measurement was taken (`--orbit`,
    /// `--angle`), recorded in the manifest for `gliss directivity`.
    pub position: Option<crate::model::Position>,
}

/// The name an impulse response given to `analyze --impulse` is kept
/// under in the folder (raw: never replaced).
pub const INPUT_IMPULSE: &str = "input-impulse.wav";

/// The design an impulse-response job records: no sweep was played, so it
/// names the analysed band ([`analysis::impulse::band`]) and the
/// response's length, with no tail, no fades and a rate constant that
/// spans the band over that length. Nothing is generated from it.
pub fn impulse_design(fs: u32, len: usize) -> SweepDesign {
    use crate::signal::sweep::SweepParams;
    let fsf = f64::from(fs);
    let (f1, f2) = analysis::impulse::band(fsf, len);
    let length_s = len as f64 / fsf;
    SweepDesign {
        params: SweepParams {
            start_hz: f1,
            end_hz: f2,
            requested_length_s: length_s,
            sample_rate_hz: fs,
            level_dbfs: 0.0,
            tail_s: 0.0,
            fade_in_octaves: 0.0,
            fade_out_octaves: 0.0,
        },
        rate_constant_s: length_s / (f2 / f1).ln().max(1e-9),
        length_s,
        sweep_samples: len,
        total_samples: len,
        fade_in_samples: 0,
        fade_out_samples: 0,
    }
}

/// The raw files of a job, as they are kept in the folder.
fn raw_files(job: &Job) -> Vec<(&'static str, &[u8])> {
    if job.impulse {
        vec![(INPUT_IMPULSE, &job.recording_bytes)]
    } else {
        vec![
            ("stimulus.wav", &job.stimulus_bytes),
            ("recording.wav", &job.recording_bytes),
        ]
    }
}

/// A target curve to compare the response with (`--target`).
#[derive(Debug, Clone)]
pub struct TargetJob {
    /// The parsed curve.
    pub target: Target,
    /// Its file (path as given, SHA-256).
    pub file: FileEntry,
    /// --target-range [low, high] Hz; `None`: the overlap of the target
    /// and the sweep band.
    pub range: Option<(f64, f64)>,
    /// --target-absolute: compare the levels without aligning them.
    pub absolute: bool,
}

impl TargetJob {
    /// The compared range for a sweep band, checked: a range given by the
    /// user that does not fit is a usage error.
    pub fn resolve_range(&self, band: (f64, f64)) -> Result<(f64, f64)> {
        self.target.range(band, self.range).map_err(|m| {
            let m = format!("the target {}: {m}", self.file.name);
            if self.range.is_some() {
                Error::parameter(m)
            } else {
                Error::input(m)
            }
        })
    }
}

/// What a finished job wrote.
#[derive(Debug, Clone)]
pub struct Outcome {
    /// The analysis.
    pub analysis: Analysis,
    /// Files written, relative to the folder.
    pub files: Vec<String>,
    /// The deviation from the target curve, with --target.
    pub target: Option<TargetRecord>,
    /// An impedance job's impedance and small-signal parameters.
    pub impedance: Option<impedance::ImpedanceOutcome>,
}

/// Checks the inputs of a job before any file is written: sample rates,
/// the channel, the sweep file against its description (vouched for by
/// the description's binding, [`Job::sweep_binding`], or else compared
/// with the sweep generated again, [`sweep_file::differs`]).
pub fn check_inputs(job: &Job) -> Result<Warnings> {
    checked_inputs(job).map(|c| c.warnings)
}

/// What [`checked_inputs`] found: the warnings, and the SHA-256 of the
/// stimulus's bytes when it took it (to vouch for the sweep file), so
/// that writing stimulus.wav does not hash them again.
struct Checked {
    warnings: Warnings,
    stimulus_sha256: Option<String>,
}

/// [`check_inputs`], keeping the stimulus's hash it took.
fn checked_inputs(job: &Job) -> Result<Checked> {
    if job.impulse {
        return check_impulse_inputs(job).map(|warnings| Checked {
            warnings,
            stimulus_sha256: None,
        });
    }
    let mut warnings = Warnings::new();
    let rec = &job.recording;
    let stim = &job.stimulus;
    let rate = job.design.params.sample_rate_hz;
    if stim.sample_rate_hz != rate {
        return Err(Error::input(format!(
            "the sweep file is at {} Hz but its parameters say {rate} Hz; use the sweep file that gliss made with them",
            stim.sample_rate_hz
        )));
    }
    if rec.sample_rate_hz != stim.sample_rate_hz {
        return Err(Error::input(format!(
            "the recording is at {} Hz but the sweep at {} Hz; record at the sweep's rate, or make a sweep with --rate {}",
            rec.sample_rate_hz, stim.sample_rate_hz, rec.sample_rate_hz
        )));
    }
    if job.drive.is_some() && job.calibration.is_none() {
        return Err(Error::parameter(
            "a drive voltage needs a calibration: --volts-per-fs and --distance need --calibration",
        ));
    }
    if let Some(d) = &job.drive {
        if d.distance_m.is_none() {
            warnings.add(
                Code::SensitivityAtMicrophone,
                "the sensitivity holds at the microphone's distance, not at 1 m: give --distance M to refer it to 1 m",
            );
        }
    }
    if let Some(t) = &job.target {
        t.resolve_range((job.design.params.start_hz, job.design.params.end_hz))?;
    }
    if job.channel >= rec.channels.len() {
        return Err(Error::input(format!(
            "--channel {} does not exist: the recording has {} channel{}",
            job.channel + 1,
            rec.channels.len(),
            if rec.channels.len() == 1 { "" } else { "s" }
        )));
    }
    if let Some(r) = job.reference {
        if r >= rec.channels.len() || r == job.channel {
            return Err(Error::parameter(format!(
                "--reference {} must be another channel of the recording, which has {}",
                r + 1,
                rec.channels.len()
            )));
        }
    }
    if stim.channels.len() != 1 {
        return Err(Error::input(format!(
            "the sweep file has {} channels; a gliss sweep is mono, give the file gliss sweep wrote",
            stim.channels.len()
        )));
    }
    check_channel(job, &mut warnings)?;
    check_sweep_law(job)?;
    if let Some(note) = &job.recovered_sweep {
        // the design came from the file itself: nothing to compare it with
        warnings.add(Code::SweepRecovered, note.clone());
        return Ok(Checked {
            warnings,
            stimulus_sha256: None,
        });
    }
    // the file must hold the sweep its parameters describe: vouched for
    // by its description's binding, or compared with the sweep generated
    // again (within its quantisation step)
    let stimulus_sha256 = job
        .sweep_binding
        .as_ref()
        .map(|_| crate::folder::sha256_hex(&job.stimulus_bytes));
    let vouched = match (&job.sweep_binding, &stimulus_sha256) {
        (Some(b), Some(h)) => b.vouches(&job.design.params, h),
        _ => false,
    };
    if !vouched && sweep_file::differs(&job.design, stim) {
        warnings.add(
            Code::SweepFileDiffers,
            "the sweep file differs from the sweep its .json describes; the analysis divides by the file as it is, but check that it is the file that was played",
        );
    }
    Ok(Checked {
        warnings,
        stimulus_sha256,
    })
}

/// The checks of an impulse-response job: the channel exists, and nothing
/// that needs a sweep or an absolute level was asked for.
fn check_impulse_inputs(job: &Job) -> Result<Warnings> {
    let n = job.recording.channels.len();
    if job.channel >= n {
        return Err(Error::input(format!(
            "--channel {} does not exist: the impulse response has {n} channel{}",
            job.channel + 1,
            if n == 1 { "" } else { "s" }
        )));
    }
    if job.reference.is_some() {
        return Err(Error::parameter(
            "--reference needs a recording of a sweep; an impulse response has already been divided by its stimulus",
        ));
    }
    if job.calibration.is_some() || job.drive.is_some() {
        return Err(Error::parameter(
            "--calibration, --volts-per-fs and --distance need the recording of a sweep at a known level; an impulse response from elsewhere has an arbitrary scale",
        ));
    }
    if let Some(t) = &job.target {
        t.resolve_range((job.design.params.start_hz, job.design.params.end_hz))?;
    }
    Ok(Warnings::new())
}

/// Refuses a recording that clearly follows another exponential sweep than
/// the one it is analysed with, naming what it follows: its frequency
/// track follows another law ([`analysis::sweep_track::check_recording`])
/// and it hardly matches the sweep (below
/// [`crate::analysis::presence::DIFFERENT_SWEEP_MATCH`]). Says nothing
/// when the recording's frequency cannot be followed clearly (noise, a
/// quiet or short recording): the low-SNR warnings of the analysis cover
/// that.
fn check_sweep_law(job: &Job) -> Result<()> {
    use crate::analysis::sweep_track::{SweepCheck, check_recording};
    let d = &job.design;
    let x = &job.recording.channels[job.channel];
    let SweepCheck::Different(found) = check_recording(x, d.fs(), d.rate_constant_s) else {
        return Ok(());
    };
    // the second evidence: the recording hardly holds this sweep
    let m = crate::analysis::presence::sweep_match(x, &job.stimulus.channels[0]);
    if m >= crate::analysis::presence::DIFFERENT_SWEEP_MATCH {
        return Ok(());
    }
    let name = job
        .source
        .sweep_path
        .as_deref()
        .map(|p| {
            Path::new(p)
                .file_name()
                .map_or_else(|| p.to_string(), |n| n.to_string_lossy().into_owned())
        })
        .map_or_else(|| "the sweep's".to_string(), |n| format!("{n}'s"));
    Err(Error::input(format!(
        "the recording follows a sweep of about {}–{} over {:.1} s, not {name} {}–{} over {:.1} s: analyse it with the sweep that was played",
        about_hz(found.low_hz),
        about_hz(found.high_hz),
        found.span_s(),
        about_hz(d.params.start_hz),
        about_hz(d.params.end_hz),
        d.length_s
    )))
}

/// A frequency to two significant digits with its unit: "100 Hz", "9.9 kHz".
fn about_hz(f: f64) -> String {
    let step = if f > 0.0 && f.is_finite() {
        10f64.powi(f.log10().floor() as i32 - 1)
    } else {
        1.0
    };
    let r = (f / step).round() * step;
    if r >= 1000.0 {
        format!("{} kHz", trim_number(r / 1000.0))
    } else {
        format!("{} Hz", trim_number(r))
    }
}

fn trim_number(v: f64) -> String {
    let s = format!("{v:.1}");
    s.strip_suffix(".0").map_or(s.clone(), str::to_string)
}

/// Refuses a recording analysed on a channel that holds no sweep while
/// another does (naming it), and warns where another channel holds the
/// sweep far more clearly (an undeclared loopback, or the microphone).
fn check_channel(job: &Job, warnings: &mut Warnings) -> Result<()> {
    use crate::analysis::presence::{ChannelCheck, check_channels};
    match check_channels(
        &job.recording.channels,
        &job.stimulus.channels[0],
        job.channel,
        job.reference,
    ) {
        ChannelCheck::Fine => Ok(()),
        ChannelCheck::Wrong { analysed, other } => Err(Error::input(format!(
            "channel {} of the recording holds no sweep (it matches the sweep {:.3}), but channel {} does ({:.2}): analyse it with --channel {}",
            analysed.0 + 1,
            analysed.1,
            other.0 + 1,
            other.1,
            other.0 + 1
        ))),
        ChannelCheck::OtherClearer { analysed, other } => {
            warnings.add(
                Code::OtherChannelClearer,
                format!(
                    "channel {} of the recording holds the sweep far more clearly than the analysed channel {} (it matches the sweep {:.2} against {:.2}): if it is a loopback, give --reference {}; if the microphone is on it, --channel {}",
                    other.0 + 1,
                    analysed.0 + 1,
                    other.1,
                    analysed.1,
                    other.0 + 1,
                    other.0 + 1
                ),
            );
            Ok(())
        }
    }
}

/// Runs a job: checks, analyses, then writes the folder. Nothing is
/// written when the inputs or the folder are refused.
pub fn run(job: Job) -> Result<Outcome> {
    let checked = checked_inputs(&job)?;
    let folder = MeasurementFolder::check(&job.out, job.overwrite, &raw_files(&job))?;
    analyse_checked(job, &folder, checked)
}

/// Analyses a job into `folder`, whose raw files may already be there
/// (a measurement writes them while it records).
pub fn analyse_into(job: Job, folder: &MeasurementFolder) -> Result<Outcome> {
    let checked = checked_inputs(&job)?;
    analyse_checked(job, folder, checked)
}

/// [`analyse_into`] once [`check_inputs`] has passed and said `checked`.
fn analyse_checked(mut job: Job, folder: &MeasurementFolder, checked: Checked) -> Result<Outcome> {
    let Checked {
        warnings: mut extra,
        stimulus_sha256,
    } = checked;
    // an impedance is refused (swapped channels, clipping, an open
    // circuit) before anything is written
    let imp = match &job.impedance {
        Some(i) => Some(impedance::analyse(&job, i)?),
        None => None,
    };
    // The raw files go into the folder first, as they came, and their
    // bytes are let go before the analysis needs its memory (8 bytes per
    // recorded sample for a 32-bit recording and its sweep). A run that
    // fails from here on takes the files it created away again when the
    // folder is dropped; raw files already there are only compared.
    let raw = write_raw_files(&job, folder, stimulus_sha256.as_deref())?;
    job.recording_bytes = Vec::new();
    job.stimulus_bytes = Vec::new();
    let job = &job;
    if let Some(o) = &imp {
        extra.extend(o.warnings.iter().cloned());
    }
    let divisor = match job.reference.filter(|_| !job.impulse) {
        Some(r) => {
            let reference = &job.recording.channels[r];
            let peak = reference.iter().fold(0.0f64, |m, v| m.max(v.abs()));
            if peak < 1e-4 {
                return Err(Error::input(format!(
                    "the reference channel {} is silent (peak {:.0} dBFS); wire an output that plays the sweep back to it, and play the sweep on that output too (--output-channel)",
                    r + 1,
                    20.0 * peak.max(1e-12).log10()
                )));
            }
            // divided by a loopback that started as late as the microphone,
            // the response would look whole while the sweep's start is
            // missing from both: the loopback is checked against the sweep
            analysis::refuse_late_start(
                reference,
                &job.stimulus.channels[0],
                &job.design,
                &format!("the loopback (channel {})", r + 1),
            )?;
            reference
        }
        None => job.stimulus.channels.first().map_or(&[][..], |c| &c[..]),
    };
    let mut analysis = if job.impulse {
        analysis::impulse::analyze(
            &job.recording.channels[job.channel],
            job.recording.sample_rate_hz,
            &job.config,
        )?
    } else {
        analysis::analyze(
            &job.recording.channels[job.channel],
            divisor,
            &job.design,
            &job.config,
        )?
    };
    // name the channel that clips
    for w in analysis.warnings.iter_mut() {
        if w.code == Code::RecordingClips {
            w.message = w.message.replacen(
                "the recording clips",
                &format!("channel {} of the recording clips", job.channel + 1),
                1,
            );
        }
    }
    extra.append(&mut analysis.warnings);
    analysis.warnings = extra;
    let target = compare_target(job, &analysis)?;
    let files = write_folder(job, folder, raw, &analysis, target.as_ref(), imp.as_ref())?;
    Ok(Outcome {
        analysis,
        files,
        target: target.map(|t| t.0),
        impedance: imp,
    })
}

/// The dB to add to `magnitude_db` for the curve a target is compared
/// with, and that curve's name: 0 and "magnitude_db"; with a calibration,
/// "spl_db"; with a drive voltage too, "sensitivity_db_spl".
fn compared_curve(job: &Job) -> (f64, &'static str) {
    let level = job.design.params.level_dbfs;
    match (&job.calibration, &job.drive) {
        (Some((c, _)), Some(d)) => (
            c.spl_db(0.0, level) + d.sensitivity_offset_db(level),
            "sensitivity_db_spl",
        ),
        (Some((c, _)), None) => (c.spl_db(0.0, level), "spl_db"),
        _ => (0.0, "magnitude_db"),
    }
}

/// The deviation of the response from the job's target (before anything
/// is written), and the shift that draws the target over `magnitude_db`.
fn compare_target(job: &Job, a: &Analysis) -> Result<Option<(TargetRecord, f64)>> {
    let Some(t) = &job.target else {
        return Ok(None);
    };
    let range = t.resolve_range((job.design.params.start_hz, job.design.params.end_hz))?;
    let (shift, compared) = compared_curve(job);
    let curve: Vec<f64> = a.response.magnitude_db.iter().map(|m| m + shift).collect();
    let report = target::deviation(
        &a.response.frequency_hz,
        &curve,
        &t.target,
        range,
        !t.absolute,
    )
    .map_err(|m| Error::input(format!("the target {}: {m}", t.file.name)))?;
    let alignment = if t.absolute {
        format!("absolute: {compared} compared with the target as it is (--target-absolute)")
    } else {
        format!(
            "level-aligned: level_offset_db, the mean of target − {compared} over range_hz (weighted by log frequency), is added to {compared} before comparing; its level re the sweep is arbitrary"
        )
    };
    let record = TargetRecord {
        file: t.file.name.clone(),
        sha256: t.file.sha256.clone(),
        compared: compared.into(),
        alignment,
        tolerance: t.target.has_tolerance(),
        report,
    };
    // aligned: magnitude + shift + offset ≈ target, so the target sits at
    // target − shift − offset over magnitude_db
    Ok(Some((record, -shift - report.level_offset_db)))
}

/// Writes the folder after the raw files (`raw`, already written): the
/// impulse response, the results and the curves, the plots, then the
/// manifest last. Returns the files written, manifest first.
fn write_folder(
    job: &Job,
    folder: &MeasurementFolder,
    raw: Vec<FileEntry>,
    a: &Analysis,
    target: Option<&(TargetRecord, f64)>,
    imp: Option<&impedance::ImpedanceOutcome>,
) -> Result<Vec<String>> {
    folder.create()?;
    let mut files = raw;
    files.push(folder.derived_entry(
        "impulse.wav",
        &wav::encode_wav(
            &[&a.impulse.samples],
            a.sample_rate_hz,
            SampleEncoding::Float,
        ),
    )?);
    let mut results = job_results(job, a, target.map(|t| &t.0));
    if let (Some(o), Some(i)) = (imp, &job.impedance) {
        results.impedance = Some(o.record(job, i));
        results.thiele_small = o.thiele_small.clone();
    }
    files.extend(write_tables(folder, a, &results)?);
    if let Some(o) = imp {
        files.push(folder.derived_entry(
            impedance::IMPEDANCE_CSV,
            &impedance::impedance_csv(&o.impedance)?,
        )?);
    }
    // without the plots feature, no PNGs: the manifest says so
    let plots = job.plots && PLOTS_BUILT;
    #[cfg(feature = "plots")]
    if plots {
        files.extend(draw_plots(job, folder, a, target, imp)?);
    }
    let manifest = job_manifest(job, a, plots, files);
    folder.write_derived("manifest.json", &to_json(&manifest)?)?;
    Ok(std::iter::once("manifest.json".to_string())
        .chain(manifest.files.into_iter().map(|f| f.name))
        .collect())
}

/// Writes the raw files first (they are the measurement), once, and
/// returns their manifest entries.
fn write_raw_files(
    job: &Job,
    folder: &MeasurementFolder,
    stimulus_sha256: Option<&str>,
) -> Result<Vec<FileEntry>> {
    raw_files(job)
        .into_iter()
        .map(|(name, bytes)| {
            let sha256 = match stimulus_sha256.filter(|_| name == "stimulus.wav") {
                Some(h) => folder.write_raw_hashed(name, bytes, h.to_string())?,
                None => folder.write_raw(name, bytes)?,
            };
            Ok(FileEntry {
                name: name.into(),
                role: crate::folder::schema::FileRole::Raw,
                sha256,
            })
        })
        .collect()
}

/// results.json of a job's analysis: what the delay and 0 dB are
/// referred to, the SPL and sensitivity with a calibration, the target.
pub fn job_results(job: &Job, a: &Analysis, target: Option<&TargetRecord>) -> Results {
    let mut results = results_record(a);
    if job.impulse {
        results.delay_reference = format!(
            "the peak of |h| in the impulse response given ({INPUT_IMPULSE}), from its first sample: no sweep was played, so the delay is where the response peaks"
        );
        results.response.magnitude_reference =
            "0 dB = the impulse response given is a unit impulse".into();
    } else if job.reference.is_some() {
        results.delay_reference =
            "the loopback reference channel: the interface's own latency is divided out".into();
        results.response.magnitude_reference =
            "0 dB = the microphone channel equals the loopback reference channel".into();
    } else if let Some(m) = &job.measurement {
        results.delay_reference = m.delay_note.clone();
    }
    if let Some((c, _)) = &job.calibration {
        let level = job.design.params.level_dbfs;
        results.response.spl_db = c.spl_curve(&a.response.magnitude_db, level);
        if let Some(d) = &job.drive {
            results.response.sensitivity = Some(sensitivity_record(d, level));
            results.response.sensitivity_db_spl =
                d.sensitivity_curve(&results.response.spl_db, level);
        }
    }
    results.target = target.cloned();
    results.noise = job.config.speech.as_ref().and_then(|c| c.noise.clone());
    results
}

/// results.json, response.csv, and distortion.csv and bands.csv where the
/// analysis has them.
fn write_tables(
    folder: &MeasurementFolder,
    a: &Analysis,
    results: &Results,
) -> Result<Vec<FileEntry>> {
    let mut files = vec![
        folder.derived_entry("results.json", &to_json(results)?)?,
        folder.derived_entry("response.csv", &response_csv(&results.response)?)?,
    ];
    if let Some(d) = &a.distortion {
        files.push(folder.derived_entry("distortion.csv", &distortion_csv(d, &a.response)?)?);
    }
    if let Some(r) = &a.room {
        files.push(folder.derived_entry("bands.csv", &bands_csv(r)?)?);
    }
    Ok(files)
}

/// The settings a job analysed with, for the manifest.
pub fn job_settings(job: &Job, plots: bool) -> Settings {
    let mut s = settings_record(
        &job.config,
        plots,
        job.mic_correction.as_ref(),
        job.calibration.as_ref().map(|c| &c.1),
        job.drive,
        job.target.as_ref(),
    );
    s.reference_channel = job.reference.filter(|_| !job.impulse).map(|r| r + 1);
    s.position = job.position;
    s
}

/// The manifest of a finished job, listing `files`.
fn job_manifest(job: &Job, a: &Analysis, plots: bool, files: Vec<FileEntry>) -> Manifest {
    Manifest {
        schema_version: SCHEMA_VERSION,
        tool: "gliss".into(),
        tool_version: env!("CARGO_PKG_VERSION").into(),
        created_utc: humantime::format_rfc3339_seconds(std::time::SystemTime::now()).to_string(),
        complete: true,
        command_line: job.command_line.clone(),
        source: job.source.clone(),
        sample_rate_hz: a.sample_rate_hz,
        channel: job.channel + 1,
        recording_channels: job.recording.channels.len(),
        recording_encoding: job.recording.encoding.describe(),
        sweep: job.design.clone(),
        settings: job_settings(job, plots),
        files,
        measurement: job.measurement.clone(),
        problems: Vec::new(),
        kind: job
            .impedance
            .as_ref()
            .map(|_| crate::folder::schema::FolderKind::Impedance),
        inputs: Vec::new(),
    }
}

/// Draws every plot the analysis has into the folder; returns their
/// manifest entries.
#[cfg(feature = "plots")]
fn draw_plots(
    job: &Job,
    folder: &MeasurementFolder,
    a: &Analysis,
    target: Option<&(TargetRecord, f64)>,
    imp: Option<&impedance::ImpedanceOutcome>,
) -> Result<Vec<FileEntry>> {
    let overlay = job.target.as_ref().zip(target).map(|(t, (r, shift))| {
        let range = (r.report.range_hz[0], r.report.range_hz[1]);
        plot::TargetOverlay {
            curve: t.target.curve(&a.response.frequency_hz, range, *shift),
            label: target_label(r),
        }
    });
    let input = plot::MeasurementPlotInput {
        title: &job.title,
        analysis: a,
        target: overlay.as_ref(),
        phase_view: job.phase_view,
        impedance: imp.map(|o| (&o.impedance, o.thiele_small.as_ref())),
    };
    folder.draw_all(input.kinds(), |kind, tmp| {
        plot::draw_measurement(kind, tmp, &input)
    })
}

/// The legend entry of the target on the response plot.
#[cfg(feature = "plots")]
fn target_label(r: &TargetRecord) -> String {
    let name = std::path::Path::new(&r.file)
        .file_name()
        .map_or_else(|| r.file.clone(), |n| n.to_string_lossy().into_owned());
    if r.report.aligned {
        format!(
            "target {name}, level-aligned to the response ({:+.1} dB)",
            -r.report.level_offset_db
        )
    } else {
        format!("target {name}")
    }
}

/// One line on the deviation from the target, for the terminal.
pub fn target_summary(r: &TargetRecord) -> String {
    let inside = r.report.inside_share.map_or(String::new(), |s| {
        format!(", {:.0} % of the band within tolerance", 100.0 * s)
    });
    let how = if r.report.aligned {
        format!("level-aligned by {:+.2} dB", r.report.level_offset_db)
    } else {
        "absolute levels".to_string()
    };
    format!(
        "target {}: {} to {} ({how}): max deviation {:.2} dB at {}, mean {:.2} dB{inside}",
        r.file,
        crate::model::units::hz(r.report.range_hz[0]),
        crate::model::units::hz(r.report.range_hz[1]),
        r.report.max_abs_db,
        crate::model::units::hz(r.report.worst_hz.round()),
        r.report.mean_abs_db,
    )
}

/// What the sensitivity of a sweep of peak `level_dbfs` driven by `d` is
/// referred to.
fn sensitivity_record(
    d: &crate::analysis::calibration::Drive,
    level_dbfs: f64,
) -> SensitivityRecord {
    use crate::analysis::calibration::{REFERENCE_DISTANCE_M, REFERENCE_VOLTS};
    let drive = d.drive_volts_rms(level_dbfs);
    SensitivityRecord {
        reference_volts: REFERENCE_VOLTS,
        reference_distance_m: d.distance_m.map(|_| REFERENCE_DISTANCE_M),
        volts_per_fs: d.volts_per_fs,
        drive_volts_rms: drive,
        measured_distance_m: d.distance_m,
        offset_db: d.sensitivity_offset_db(level_dbfs),
        description: match d.distance_m {
            Some(m) => format!(
                "dB SPL for {REFERENCE_VOLTS} V RMS at the loudspeaker's terminals at 1 m: spl_db (driven at {drive:.4} V RMS) scaled by the drive and referred from {m} m to 1 m by the inverse-square law, which holds in the far field only"
            ),
            None => format!(
                "dB SPL for {REFERENCE_VOLTS} V RMS at the loudspeaker's terminals at the microphone's distance (not given): spl_db (driven at {drive:.4} V RMS) scaled by the drive"
            ),
        },
    }
}

/// distortion.csv: one row per excitation frequency up to half the sweep's
/// end: the fundamental (dB re sweep), each order and its noise floor (dB
/// re the fundamental; empty where not reported), THD and its floor (%).
pub fn distortion_csv(
    d: &Distortion,
    response: &crate::analysis::FrequencyResponse,
) -> Result<Vec<u8>> {
    let mut w = csv::Writer::from_writer(Vec::new());
    let err = |e: csv::Error| Error::input(format!("could not encode CSV: {e}"));
    let mut header = vec!["frequency_hz".to_string(), "fundamental_db".to_string()];
    for o in &d.orders {
        header.push(format!("h{}_db", o.order));
        header.push(format!("h{}_noise_floor_db", o.order));
    }
    header.push("thd_percent".into());
    header.push("thd_noise_floor_percent".into());
    w.write_record(&header).map_err(err)?;
    let cell = |v: Option<f64>, digits: usize| v.map_or(String::new(), |x| format!("{x:.digits$}"));
    // every excitation frequency that has the 2nd order; the orders'
    // grids are stretches of the response grid starting at the same point
    let Some(second) = d.orders.first() else {
        return w
            .into_inner()
            .map_err(|e| Error::input(format!("could not encode CSV: {e}")));
    };
    let offset = response
        .frequency_hz
        .iter()
        .position(|&f| {
            second
                .frequency_hz
                .first()
                .is_some_and(|&g| (f - g).abs() < 1e-9)
        })
        .unwrap_or(0);
    for i in 0..second.frequency_hz.len() {
        let mut row = vec![
            format!("{:.4}", second.frequency_hz[i]),
            format!("{:.4}", response.magnitude_db[offset + i]),
        ];
        for o in &d.orders {
            row.push(cell(o.level_db.get(i).copied().flatten(), 3));
            row.push(cell(o.noise_floor_db.get(i).copied().flatten(), 3));
        }
        row.push(cell(d.thd.percent.get(i).copied().flatten(), 5));
        row.push(cell(d.thd.noise_floor_percent.get(i).copied().flatten(), 5));
        w.write_record(&row).map_err(err)?;
    }
    w.into_inner()
        .map_err(|e| Error::input(format!("could not encode CSV: {e}")))
}

/// bands.csv: one row per band (octave, then one-third octave, then
/// broadband) with every parameter; empty cells where not measured.
pub fn bands_csv(r: &crate::analysis::room::Room) -> Result<Vec<u8>> {
    bands_table_csv(&r.bands, Some(&r.broadband))
}

/// bands.csv of any list of bands (a measurement's or an average's).
pub fn bands_table_csv(
    bands: &[crate::analysis::room::BandResult],
    broadband: Option<&crate::analysis::room::BandResult>,
) -> Result<Vec<u8>> {
    let mut w = csv::Writer::from_writer(Vec::new());
    let err = |e: csv::Error| Error::input(format!("could not encode CSV: {e}"));
    let mut header = vec!["center_hz", "fraction"];
    header.extend(Parameter::ALL.iter().map(|p| p.key()));
    header.extend(["curvature_percent", "warnings"]);
    w.write_record(&header).map_err(err)?;
    let cell = |v: Option<f64>, digits: usize| v.map_or(String::new(), |x| format!("{x:.digits$}"));
    for b in bands.iter().chain(broadband) {
        let mut row = vec![
            format!("{}", (b.center_hz * 10.0).round() / 10.0),
            b.fraction.code().to_string(),
        ];
        row.extend(
            Parameter::ALL
                .iter()
                .map(|&p| cell(b.get(p), p.info().file_decimals)),
        );
        row.push(cell(b.curvature_percent, 1));
        row.push(b.warnings.messages().join("; "));
        w.write_record(&row).map_err(err)?;
    }
    w.into_inner()
        .map_err(|e| Error::input(format!("could not encode CSV: {e}")))
}

/// results.json of an analysis.
pub fn results_record(a: &Analysis) -> Results {
    Results {
        schema_version: SCHEMA_VERSION,
        sample_rate_hz: a.sample_rate_hz,
        delay_s: a.delay_s,
        delay_reference:
            "first sample of the recording; includes any latency between playback and recording"
                .into(),
        peak_dbfs: a.peak_dbfs,
        peak_to_noise_db: a.peak_to_noise_db,
        impulse: Some(ImpulseRecord {
            file: "impulse.wav".into(),
            start_s: a.impulse.start_s,
            samples: a.impulse.samples.len(),
        }),
        response: ResponseRecord {
            smoothing: a.response.smoothing,
            magnitude_reference: "0 dB = the recording equals the sweep as written (a wire)".into(),
            frequency_hz: a.response.frequency_hz.clone(),
            magnitude_db: a.response.magnitude_db.clone(),
            phase_deg: a.response.phase_deg.clone(),
            phase_unwrapped_deg: a.phase.phase_unwrapped_deg.clone(),
            group_delay_s: a.phase.group_delay_s.clone(),
            minimum_phase_deg: a.phase.minimum_phase_deg.clone(),
            excess_group_delay_s: a.phase.excess_group_delay_s.clone(),
            gate: a.gate,
            spl_db: Vec::new(),
            sensitivity_db_spl: Vec::new(),
            sensitivity: None,
            resolved: a.gate.map_or_else(Vec::new, |g| {
                a.response
                    .frequency_hz
                    .iter()
                    .map(|&f| f >= g.resolution_hz && f <= g.resolved_to_hz)
                    .collect()
            }),
        },
        distortion: a.distortion.clone(),
        bands: a.room.as_ref().map(|r| r.bands.clone()).unwrap_or_default(),
        broadband: a.room.as_ref().map(|r| r.broadband.clone()),
        warnings: a.warnings.clone(),
        average: None,
        target: None,
        impedance: None,
        thiele_small: None,
        speech: a.speech.clone(),
        noise: None,
    }
}

/// The analysis settings a manifest records, from what chose them: the
/// analysis configuration, whether plots are drawn (with [`PLOTS_BUILT`]
/// already applied), and the files and drive given. One builder for every
/// manifest of a measurement, finished or not.
pub fn settings_record(
    config: &AnalysisConfig,
    plots: bool,
    mic_correction: Option<&FileEntry>,
    calibration: Option<&FileEntry>,
    drive: Option<crate::analysis::calibration::Drive>,
    target: Option<&TargetJob>,
) -> Settings {
    Settings {
        smoothing: config.smoothing,
        plots,
        harmonics: config.harmonics,
        bands: config.bands,
        mic_correction: mic_correction.cloned(),
        calibration: calibration.cloned(),
        volts_per_fs: drive.map(|d| d.volts_per_fs),
        distance_m: drive.and_then(|d| d.distance_m),
        target: target.map(|t| t.file.clone()),
        target_range_hz: target.and_then(|t| t.range.map(|r| [r.0, r.1])),
        target_absolute: target.is_some_and(|t| t.absolute),
        profile: Some(config.profile),
        reference_channel: None,
        speech_level_dba: config
            .speech
            .as_ref()
            .filter(|c| c.speech_level_given)
            .map(|c| c.speech_level_dba),
        noise_folder: config.speech.as_ref().and_then(|c| c.noise_source.clone()),
        position: None,
    }
}

/// Pretty JSON with a final newline.
pub fn to_json<T: serde::Serialize>(v: &T) -> Result<Vec<u8>> {
    let mut s = serde_json::to_vec_pretty(v)
        .map_err(|e| Error::input(format!("could not encode JSON: {e}")))?;
    s.push(b'\n');
    Ok(s)
}

/// response.csv: header, then frequency_hz,magnitude_db,phase_deg, and
/// spl_db and sensitivity_db_spl where results.json has them.
pub fn response_csv(r: &ResponseRecord) -> Result<Vec<u8>> {
    let mut w = csv::Writer::from_writer(Vec::new());
    let err = |e: csv::Error| Error::input(format!("could not encode CSV: {e}"));
    let mut extra: Vec<(&str, &[f64])> = Vec::new();
    for (name, v) in [
        ("spl_db", &r.spl_db),
        ("sensitivity_db_spl", &r.sensitivity_db_spl),
    ] {
        if v.len() == r.frequency_hz.len() {
            extra.push((name, v));
        }
    }
    let mut header = vec!["frequency_hz", "magnitude_db", "phase_deg"];
    header.extend(extra.iter().map(|e| e.0));
    w.write_record(&header).map_err(err)?;
    for i in 0..r.frequency_hz.len() {
        let mut row = vec![
            format!("{:.4}", r.frequency_hz[i]),
            format!("{:.4}", r.magnitude_db[i]),
            // an average has no phase: the cell stays empty
            r.phase_deg
                .get(i)
                .map_or(String::new(), |p| format!("{p:.3}")),
        ];
        row.extend(extra.iter().map(|e| format!("{:.4}", e.1[i])));
        w.write_record(&row).map_err(err)?;
    }
    w.into_inner()
        .map_err(|e| Error::input(format!("could not encode CSV: {e}")))
}

/// Reads a measurement's results.json.
pub fn read_results(dir: &Path) -> Result<Results> {
    let p = dir.join("results.json");
    let t = std::fs::read_to_string(&p).map_err(|e| Error::io("read", &p, &e))?;
    serde_json::from_str(&t)
        .map_err(|e| Error::input(format!("{} is not a gliss results file: {e}", p.display())))
}
