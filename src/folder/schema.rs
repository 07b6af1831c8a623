//! The files of every folder gliss writes, as data: manifest.json,
//! results.json (a measurement or an average) and comparison.json (schema
//! version 1; fields are added, never renamed). The writers and every
//! reader share these types.

use serde::{Deserialize, Serialize};

use crate::analysis::Distortion;
use crate::analysis::Smoothing;
use crate::analysis::compare::{Changes, Verdict};
use crate::analysis::gate::GateInfo;
use crate::analysis::impedance::Impedance;
use crate::analysis::room::BandResult;
use crate::analysis::thiele_small::ThieleSmall;
use crate::model::{Fraction, Parameter, Warnings};
use crate::signal::sweep::SweepDesign;

/// Version of results.json and manifest.json.
pub const SCHEMA_VERSION: u32 = 1;

/// What a folder holds, as manifest.json's `kind` says (absent: a
/// measurement).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "lowercase")]
pub enum FolderKind {
    /// One measurement: raw recording, impulse response, results.
    Measurement,
    /// A power average of measurement positions (results, no recording).
    Average,
    /// A comparison of measurements (comparison.json).
    Comparison,
    /// A loudspeaker driver's impedance through a sense resistor, with
    /// its small-signal parameters (results.json's `impedance` and
    /// `thiele_small`).
    Impedance,
    /// The background noise of a room (noise.json, `gliss noise`).
    Noise,
    /// Several loudspeakers related to the first: arrival, level,
    /// polarity and the best sum through a crossover (align.json, `gliss
    /// align`).
    Align,
    /// Measurements around a loudspeaker reduced to its directivity
    /// (directivity.json, `gliss directivity`).
    Directivity,
    /// Correction filters designed for a response (tuning.json, `gliss tune`).
    Tuning,
}

impl FolderKind {
    /// In words, with an article: "a measurement", "an average", "a comparison".
    pub fn words(self) -> &'static str {
        match self {
            FolderKind::Measurement => "a measurement",
            FolderKind::Average => "an average",
            FolderKind::Comparison => "a comparison",
            FolderKind::Impedance => "an impedance measurement",
            FolderKind::Noise => "a noise measurement",
            FolderKind::Align => "an alignment",
            FolderKind::Directivity => "a directivity reduction",
            FolderKind::Tuning => "a tuning",
        }
    }
}

/// results.json.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Results {
    /// Layout version.
    pub schema_version: u32,
    /// Sample rate in Hz.
    pub sample_rate_hz: u32,
    /// Arrival of the impulse response peak after the recording's start, s:
    /// the strongest sample's, or the direct sound's when that comes well
    /// ahead of a stronger build-up (warning code `direct-sound-ahead`).
    pub delay_s: f64,
    /// What `delay_s` is measured from, in words.
    pub delay_reference: String,
    /// Peak level of the analysed recording channel, dBFS.
    pub peak_dbfs: f64,
    /// Peak of the impulse response above its noise, dB.
    pub peak_to_noise_db: f64,
    /// Where the impulse response is and how it is placed in time
    /// (absent in an average, which has none).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub impulse: Option<ImpulseRecord>,
    /// The frequency response.
    pub response: ResponseRecord,
    /// The harmonic distortion orders and THD (`null` with --harmonics 1).
    #[serde(default)]
    pub distortion: Option<Distortion>,
    /// Octave then one-third-octave bands (ISO 3382-1 parameters); empty
    /// with --no-bands.
    #[serde(default)]
    pub bands: Vec<BandResult>,
    /// The same parameters over the whole sweep band.
    #[serde(default)]
    pub broadband: Option<BandResult>,
    /// Warnings: `warnings` (the sentences) and `warning_codes` beside them.
    #[serde(flatten)]
    pub warnings: Warnings,
    /// For an average over positions: what was averaged.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub average: Option<AverageRecord>,
    /// With --target: the response's deviation from the target curve.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub target: Option<TargetRecord>,
    /// An impedance measurement: Z on the log grid (the full resolution
    /// is in `impedance_file`).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub impedance: Option<ImpedanceRecord>,
    /// An impedance measurement: the small-signal parameters; `null` with
    /// the reason in `warnings` when the resonance cannot be read.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub thiele_small: Option<ThieleSmall>,
    /// The speech transmission index (IEC 60268-16) with its MTF per
    /// octave and the corrections it includes (absent without bands and
    /// in an average).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub speech: Option<crate::analysis::speech::Speech>,
    /// The background noise the STI included (--noise): the noise
    /// folder's levels as they were read.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub noise: Option<crate::analysis::noise::NoiseLevels>,
}

/// results.json's `impedance`.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct ImpedanceRecord {
    /// The recording's channel at the amplifier side of the sense
    /// resistor, 1-based (`null`: constant current, one channel).
    pub reference_channel: Option<usize>,
    /// The channel across the driver, 1-based.
    pub driver_channel: usize,
    /// The CSV with Z at every FFT bin of the band.
    pub impedance_file: String,
    /// Z on the log grid.
    #[serde(flatten)]
    pub curve: Impedance,
}

/// What an average over positions was made of.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct AverageRecord {
    /// Source–microphone combinations averaged (one folder each).
    pub positions: usize,
    /// Source positions among them (as given with --sources).
    pub sources: usize,
    /// The ISO 3382-2 precision grade that many positions reach.
    pub grade: String,
    /// How the response was averaged.
    pub response_method: String,
    /// The input folders in order, with their hashes.
    pub inputs: Vec<InputRecord>,
    /// The spatial mean of the positions' speech transmission index
    /// (absent when a position has none; `warnings` says why).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub sti: Option<crate::analysis::speech::SpatialSti>,
}

/// An input folder of an average or a comparison.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct InputRecord {
    /// The folder as given.
    pub folder: String,
    /// A short label for plots and tables.
    #[serde(default)]
    pub label: String,
    /// SHA-256 of its manifest.json (which lists the hash of every file).
    #[serde(default)]
    pub sha256: String,
    /// SHA-256 of its results.json.
    #[serde(default)]
    pub results_sha256: String,
}

impl InputRecord {
    /// The label, or the folder when the label is empty.
    pub fn name(&self) -> &str {
        if self.label.trim().is_empty() {
            &self.folder
        } else {
            &self.label
        }
    }
}

/// The deviation of the response from a target curve (`--target`).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct TargetRecord {
    /// The target file as given.
    pub file: String,
    /// SHA-256 of its bytes.
    pub sha256: String,
    /// The response curve compared: "magnitude_db", or with a calibration
    /// "spl_db", with a drive voltage too "sensitivity_db_spl".
    pub compared: String,
    /// How the levels were aligned, in words.
    pub alignment: String,
    /// Whether the target gives a tolerance band.
    pub tolerance: bool,
    /// The deviation numbers.
    #[serde(flatten)]
    pub report: crate::analysis::target::TargetReport,
}

/// The impulse response file.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct ImpulseRecord {
    /// File name in the folder ("impulse.wav").
    pub file: String,
    /// Time of its first sample after the recording's start, s.
    pub start_s: f64,
    /// Number of samples.
    pub samples: usize,
}

/// The frequency response on the log grid.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct ResponseRecord {
    /// The fractional-octave smoothing ("1/6", …, or "none").
    pub smoothing: Smoothing,
    /// What 0 dB means.
    pub magnitude_reference: String,
    /// Grid frequencies, Hz (48 per octave).
    pub frequency_hz: Vec<f64>,
    /// Magnitude, dB.
    pub magnitude_db: Vec<f64>,
    /// Phase with the delay `delay_s` removed, degrees in (−180, 180].
    pub phase_deg: Vec<f64>,
    /// The same phase unwrapped along the grid, degrees.
    #[serde(default)]
    pub phase_unwrapped_deg: Vec<f64>,
    /// Group delay of that phase, s, relative to `delay_s`.
    #[serde(default)]
    pub group_delay_s: Vec<f64>,
    /// The minimum phase the magnitude implies, degrees.
    #[serde(default)]
    pub minimum_phase_deg: Vec<f64>,
    /// Group delay beyond the minimum phase, with `delay_s` put back, s.
    #[serde(default)]
    pub excess_group_delay_s: Vec<f64>,
    /// The gate the response was taken through (`null`: none).
    #[serde(default)]
    pub gate: Option<GateInfo>,
    /// With --calibration: the response as dB SPL at the microphone for the
    /// sweep's drive level (its peak `level_dbfs`); empty without.
    #[serde(default, skip_serializing_if = "Vec::is_empty")]
    pub spl_db: Vec<f64>,
    /// With --calibration and --volts-per-fs: the sensitivity, dB SPL for
    /// `sensitivity.reference_volts` at `sensitivity.reference_distance_m`
    /// (the microphone's distance when that is `null`); empty without.
    #[serde(default, skip_serializing_if = "Vec::is_empty")]
    pub sensitivity_db_spl: Vec<f64>,
    /// What `sensitivity_db_spl` is referred to and how it was derived.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub sensitivity: Option<SensitivityRecord>,
    /// Per grid point, whether the gate resolves it (from 1/gate length up
    /// to `gate.resolved_to_hz`); empty without a gate.
    #[serde(default, skip_serializing_if = "Vec::is_empty")]
    pub resolved: Vec<bool>,
}

/// How `response.sensitivity_db_spl` was derived from `response.spl_db`.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct SensitivityRecord {
    /// The drive the sensitivity is stated for, V RMS (2.83 V: 1 W into 8 Ω).
    pub reference_volts: f64,
    /// The distance it is stated for, m (1 m); `null` without --distance:
    /// then it holds at the microphone's distance.
    pub reference_distance_m: Option<f64>,
    /// --volts-per-fs: V RMS at the loudspeaker's terminals for a
    /// full-scale sine (0 dBFS).
    pub volts_per_fs: f64,
    /// V RMS of the sweep as played (its peak `level_dbfs` re full scale).
    pub drive_volts_rms: f64,
    /// --distance: the microphone's distance, m (`null`: not given).
    pub measured_distance_m: Option<f64>,
    /// `sensitivity_db_spl` − `spl_db`, dB: 20·lg(reference_volts /
    /// drive_volts_rms) + 20·lg(measured_distance_m / 1 m).
    pub offset_db: f64,
    /// The same in words.
    pub description: String,
}

/// manifest.json: what was done.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Manifest {
    /// Layout version.
    pub schema_version: u32,
    /// "gliss".
    pub tool: String,
    /// Version of gliss that wrote the folder.
    pub tool_version: String,
    /// When the folder was written (UTC, RFC 3339).
    pub created_utc: String,
    /// False when the measurement was interrupted.
    pub complete: bool,
    /// The command line that made it.
    pub command_line: Vec<String>,
    /// Where the recording came from.
    pub source: Source,
    /// Sample rate in Hz.
    pub sample_rate_hz: u32,
    /// The analysed channel of recording.wav, 1-based.
    pub channel: usize,
    /// Channels in recording.wav.
    pub recording_channels: usize,
    /// Sample encoding of recording.wav.
    pub recording_encoding: String,
    /// The sweep.
    pub sweep: SweepDesign,
    /// Analysis settings.
    pub settings: Settings,
    /// Every file of the folder with its role and SHA-256.
    pub files: Vec<FileEntry>,
    /// How a measurement through a device ran (measure only).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub measurement: Option<MeasurementRecord>,
    /// What went wrong; an incomplete folder says why here.
    #[serde(default, skip_serializing_if = "Vec::is_empty")]
    pub problems: Vec<String>,
    /// `average` for an average over positions (absent for a measurement).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub kind: Option<FolderKind>,
    /// The input folders of an average, with their hashes.
    #[serde(default, skip_serializing_if = "Vec::is_empty")]
    pub inputs: Vec<InputRecord>,
}

/// How `gliss measure` played and recorded.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct MeasurementRecord {
    /// The device as it described itself.
    pub device: String,
    /// The streams as they ran (formats, buffer).
    pub stream: String,
    /// Output channels that played the sweep, 1-based.
    pub output_channels: Vec<usize>,
    /// The loopback reference input, 1-based, if one was recorded.
    pub reference_channel: Option<usize>,
    /// Sweeps played and averaged.
    pub repeat: usize,
    /// Silence between sweeps, s.
    pub gap_s: f64,
    /// Where each take lies in recording.wav.
    pub takes: Vec<TakeRecord>,
    /// Input frames known to be lost, dropped because the writer fell
    /// behind (invalid if not 0).
    pub lost_frames: u64,
    /// Overruns, underruns and errors of the driver, each losing an
    /// unknown number of frames (invalid if not 0).
    #[serde(default)]
    pub interruptions: u64,
    /// Peak level of each recorded input over the whole recording, dBFS.
    pub input_peaks_dbfs: Vec<f64>,
    /// What the measured delay is relative to.
    pub delay_note: String,
}

/// One sweep of a measurement inside recording.wav.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct TakeRecord {
    /// First frame, counted from 0.
    pub start_frame: usize,
    /// Frames analysed.
    pub frames: usize,
}

/// Where the recording came from.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Source {
    /// "file" (gliss analyze) or "virtual" (gliss demo).
    pub kind: String,
    /// A description of the device or the input files.
    pub description: String,
    /// The recording file given to analyze, as given.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub recording_path: Option<String>,
    /// The sweep file given to analyze, as given.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub sweep_path: Option<String>,
}

/// Analysis settings recorded in the manifest.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Settings {
    /// Smoothing of the response.
    pub smoothing: Smoothing,
    /// Whether plots were drawn.
    pub plots: bool,
    /// Highest harmonic order separated (1 = none).
    #[serde(default)]
    pub harmonics: u32,
    /// Whether the band parameters were analysed.
    #[serde(default)]
    pub bands: bool,
    /// The calibration file the SPL came from, with its hash.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub calibration: Option<FileEntry>,
    /// The microphone correction removed from the response, with its hash.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub mic_correction: Option<FileEntry>,
    /// --volts-per-fs: V RMS at the loudspeaker for a full-scale sine.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub volts_per_fs: Option<f64>,
    /// --distance: the microphone's distance, m.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub distance_m: Option<f64>,
    /// --target: the target curve compared with, with its hash.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub target: Option<FileEntry>,
    /// --target-range: the compared range [low, high], Hz, when given.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub target_range_hz: Option<[f64; 2]>,
    /// --target-absolute: the levels were compared without aligning.
    #[serde(default, skip_serializing_if = "std::ops::Not::not")]
    pub target_absolute: bool,
    /// --profile: what was measured (absent in folders written before it
    /// was recorded, and in an average of positions that differ).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub profile: Option<crate::model::Profile>,
    /// --reference: the recording's loopback channel the response was
    /// divided by, 1-based (absent without one, and in folders written
    /// before it was recorded).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub reference_channel: Option<usize>,
    /// --speech-level: the speech level at 1 m, dB(A), for the STI.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub speech_level_dba: Option<f64>,
    /// --noise: the noise folder the STI took the background noise from
    /// (its path and the SHA-256 of its manifest).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub noise_folder: Option<String>,
    /// --orbit and --angle: where around a loudspeaker the measurement was
    /// taken (`{"orbit": "horizontal", "angle_deg": 30}`), for `gliss
    /// directivity`.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub position: Option<crate::model::Position>,
}

/// What a file of a folder is.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "lowercase")]
pub enum FileRole {
    /// Written once as captured or given, never modified: the measurement.
    Raw,
    /// Made by analysis from the raw files; may be made again.
    Derived,
    /// A file given to the analysis from outside the folder (a
    /// calibration, a microphone correction, a target), named by its path.
    Input,
}

/// One file of the folder.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct FileEntry {
    /// Path inside the folder.
    pub name: String,
    /// Raw (never modified) or derived (remade by analysis).
    pub role: FileRole,
    /// SHA-256 of its bytes.
    pub sha256: String,
}

/// comparison.json. Every part but `inputs` may be absent when read
/// (a comparison written by another tool or an older gliss).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Comparison {
    /// Layout version.
    #[serde(default = "schema_version")]
    pub schema_version: u32,
    /// Always `comparison`.
    #[serde(default = "comparison_kind")]
    pub kind: FolderKind,
    /// The folders in order (the first is the reference), with their hashes.
    pub inputs: Vec<InputRecord>,
    /// The band every input covers, Hz.
    #[serde(default)]
    pub common_band_hz: [f64; 2],
    /// The responses and their differences from the first.
    #[serde(default)]
    pub response: CompareResponse,
    /// Every band parameter: values, changes and their significance.
    #[serde(default)]
    pub bands: Vec<BandRow>,
    /// With --volume: the change of equivalent absorption area per band.
    #[serde(default)]
    pub absorption: Vec<AbsorptionRow>,
    /// The room volume, m³ (with --volume).
    pub volume_m3: Option<f64>,
    /// The air temperature, °C (with --volume).
    pub temperature_c: Option<f64>,
    /// The speed of sound used, m/s (with --volume).
    pub speed_of_sound_m_s: Option<f64>,
    /// With --target: each response against the target curve.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub target: Option<CompareTarget>,
    /// How a change is judged, in words.
    #[serde(default)]
    pub criteria: Vec<String>,
    /// What was measured, when every input records the same profile.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub profile: Option<crate::model::Profile>,
    /// The speech transmission index of each input and its change from
    /// the first, judged once (absent when no input has one).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub speech: Option<CompareSti>,
    /// Warnings: `warnings` (the sentences) and `warning_codes` beside them.
    #[serde(flatten)]
    pub warnings: Warnings,
}

/// The STI across the inputs of a comparison. Arrays hold one entry per
/// input; for the first (the reference) the change fields are null.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct CompareSti {
    /// Each input's STI: its own, or for an average of positions their
    /// spatial mean (`null` when it has none; its warnings say why).
    pub values: Vec<Option<f64>>,
    /// The qualification band of each value (IEC 60268-16 annex F).
    pub qualification: Vec<Option<String>>,
    /// Each value's standard uncertainty: for an average, the spread of its
    /// positions over √n (the standard uncertainty of their mean); unknown
    /// (`null`) for one measurement.
    pub uncertainty: Vec<Option<f64>>,
    /// The just-noticeable difference the changes were judged against.
    pub jnd: f64,
    /// The changes from the first and their judgement.
    pub changes: Changes,
}

/// The responses of a comparison on one grid.
#[derive(Debug, Clone, PartialEq, Default, Serialize, Deserialize)]
pub struct CompareResponse {
    /// Smoothing of the curves in words: the inputs' own ("1/6", or their
    /// mix "1/6/1/3"), or a further smoothing of them ("1/3 of 1/6").
    pub smoothing: String,
    /// Each input's own smoothing.
    #[serde(default)]
    pub input_smoothing: Vec<Smoothing>,
    /// The smoothing `--smooth` asked for, if any.
    #[serde(default)]
    pub further_smoothing: Option<Smoothing>,
    /// How the curves got their smoothing.
    #[serde(default)]
    pub smoothing_method: SmoothingMethod,
    /// Grid frequencies, Hz.
    pub frequency_hz: Vec<f64>,
    /// Per input, the magnitude in dB (`null` where it has none).
    pub magnitude_db: Vec<Vec<Option<f64>>>,
    /// Per input, its magnitude minus the first's, dB (the first: zeros).
    pub difference_db: Vec<Vec<Option<f64>>>,
    /// The level alignment applied before the differences (`--align`),
    /// if any: `magnitude_db` and `difference_db` hold the aligned curves.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub alignment: Option<Alignment>,
}

/// A level alignment of a comparison's responses to the first.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Alignment {
    /// The band the levels were matched over, Hz.
    pub band_hz: [f64; 2],
    /// Per input, the dB added to its curve (the first: 0).
    pub offset_db: Vec<f64>,
}

/// How the responses of a comparison got their smoothing.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum SmoothingMethod {
    /// As each input was analysed.
    #[default]
    AsAnalysed,
    /// Taken again from each input's impulse response at the further
    /// smoothing (exact, finer or coarser).
    FromImpulse,
    /// Smoothed further on the log grid (an average has no impulse
    /// response).
    FurtherOnGrid,
}

impl CompareResponse {
    /// The curves' smoothing in words, from the typed fields.
    pub fn smoothing_words(&self) -> String {
        let own = || {
            let labels: Vec<String> = self.input_smoothing.iter().map(|s| s.label()).collect();
            let mut distinct = labels.clone();
            distinct.dedup();
            distinct.join(", ")
        };
        match (self.smoothing_method, self.further_smoothing) {
            (SmoothingMethod::FromImpulse, Some(s)) => s.words(),
            (SmoothingMethod::FurtherOnGrid, Some(s)) => {
                format!("{s}-octave smoothing of the {}-octave curves", own())
            }
            _ => match self.input_smoothing.as_slice() {
                [first, rest @ ..] if rest.iter().all(|s| s == first) => first.words(),
                [] => "smoothing as analysed".into(),
                _ => format!("each input's own smoothing ({})", own()),
            },
        }
    }
}

/// One parameter of one band across the inputs. Arrays hold one entry per
/// input; for the first input (the reference) the change fields are null.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct BandRow {
    /// Nominal centre, Hz.
    pub center_hz: f64,
    /// The band's width.
    pub fraction: Fraction,
    /// The parameter, by its results.json key.
    pub parameter: Parameter,
    /// The value per input (`null` where not measured).
    pub values: Vec<Option<f64>>,
    /// The standard uncertainty of each value (`null` where unknown).
    #[serde(default)]
    pub uncertainty: Vec<Option<f64>>,
    /// The changes from the first input and their judgement: `change`,
    /// `relative_change`, `exceeds_jnd` (ISO 3382-1 Annex A),
    /// `exceeds_uncertainty` (twice the combined standard uncertainty) and
    /// `verdict`, the one judgement every output shows.
    #[serde(flatten)]
    pub changes: Changes,
}

/// The equivalent absorption area of one band across the inputs.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct AbsorptionRow {
    /// Nominal centre, Hz.
    pub center_hz: f64,
    /// The band's width.
    pub fraction: Fraction,
    /// The decay time it comes from: T30, or T20 where T30 is missing in
    /// any input.
    pub parameter: Parameter,
    /// A = 55.3·V/(c·T) per input, m².
    pub area_m2: Vec<Option<f64>>,
    /// Area minus the first input's, m² (`null` for the first).
    pub delta_area_m2: Vec<Option<f64>>,
}

/// Every response of a comparison against a target curve.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct CompareTarget {
    /// The target file as given.
    pub file: String,
    /// SHA-256 of its bytes.
    pub sha256: String,
    /// Whether each response was level-aligned to the target first.
    pub aligned: bool,
    /// Per input, the deviation from the target (`null` where the
    /// response does not cover the range).
    pub per_input: Vec<Option<crate::analysis::target::TargetReport>>,
}

/// The manifest of a comparison folder.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct ComparisonManifest {
    /// Layout version.
    pub schema_version: u32,
    /// "gliss".
    pub tool: String,
    /// Version of gliss that wrote the folder.
    pub tool_version: String,
    /// When (UTC, RFC 3339).
    pub created_utc: String,
    /// Always true once written.
    pub complete: bool,
    /// Always `comparison`.
    pub kind: FolderKind,
    /// The command line that made it.
    pub command_line: Vec<String>,
    /// kind "comparison" and a description.
    pub source: Source,
    /// The folders compared, with their hashes.
    #[serde(default)]
    pub inputs: Vec<InputRecord>,
    /// Every file of the folder with its SHA-256.
    pub files: Vec<FileEntry>,
}

/// The manifest of a noise folder (`gliss noise`, `gliss measure --noise`):
/// the recording of the room with the sweep silent, and its levels in
/// noise.json ([`crate::analysis::noise::NoiseLevels`]).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct NoiseManifest {
    /// Layout version.
    pub schema_version: u32,
    /// "gliss".
    pub tool: String,
    /// Version of gliss that wrote the folder.
    pub tool_version: String,
    /// When (UTC, RFC 3339).
    pub created_utc: String,
    /// Always true once written.
    pub complete: bool,
    /// Always `noise`.
    pub kind: FolderKind,
    /// The command line that made it.
    pub command_line: Vec<String>,
    /// Where the recording came from.
    pub source: Source,
    /// Sample rate in Hz.
    pub sample_rate_hz: u32,
    /// The analysed channel of recording.wav, 1-based.
    pub channel: usize,
    /// The calibration file the levels rest on, with its hash.
    pub calibration: FileEntry,
    /// Every file of the folder with its SHA-256.
    pub files: Vec<FileEntry>,
}

/// The manifest of an alignment folder (`gliss align`): the measurement
/// folders it relates, with their hashes; align.json is
/// [`crate::analysis::align::Alignment`].
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct AlignManifest {
    /// Layout version.
    pub schema_version: u32,
    /// "gliss".
    pub tool: String,
    /// Version of gliss that wrote the folder.
    pub tool_version: String,
    /// When (UTC, RFC 3339).
    pub created_utc: String,
    /// Always true once written.
    pub complete: bool,
    /// Always `align`.
    pub kind: FolderKind,
    /// The command line that made it.
    pub command_line: Vec<String>,
    /// kind "align" and a description.
    pub source: Source,
    /// The measurement folders, position by position, with their hashes.
    pub inputs: Vec<InputRecord>,
    /// Every file of the folder with its SHA-256.
    pub files: Vec<FileEntry>,
}

/// The manifest of a directivity folder (`gliss directivity`): the
/// measurement folders it reduced, with their hashes, and its files.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct DirectivityManifest {
    /// Layout version.
    pub schema_version: u32,
    /// "gliss".
    pub tool: String,
    /// Version of gliss that wrote the folder.
    pub tool_version: String,
    /// When (UTC, RFC 3339).
    pub created_utc: String,
    /// Always true once written.
    pub complete: bool,
    /// Always `directivity`.
    pub kind: FolderKind,
    /// The command line that made it.
    pub command_line: Vec<String>,
    /// kind "directivity" and a description.
    pub source: Source,
    /// The measurement folders reduced, with their hashes.
    pub inputs: Vec<InputRecord>,
    /// Every file of the folder with its SHA-256.
    pub files: Vec<FileEntry>,
}

/// One measurement of a directivity set: its folder and position.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct DirectivityInput {
    /// Where it was measured.
    pub position: crate::model::Position,
    /// The folder and its hashes.
    #[serde(flatten)]
    pub folder: InputRecord,
}

/// directivity.json (schema version 1): what the set was and its
/// reduction ([`crate::analysis::directivity::Directivity`]).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct DirectivityFile {
    /// Layout version.
    pub schema_version: u32,
    /// Sample rate of every input, Hz.
    pub sample_rate_hz: u32,
    /// The smoothing of every input's response.
    pub smoothing: Smoothing,
    /// The gate every input's response was taken through (`null`: none).
    pub gate: Option<GateInfo>,
    /// What 0 dB means in `level_db` (the inputs' reference).
    pub magnitude_reference: String,
    /// The measurements, in the order given.
    pub inputs: Vec<DirectivityInput>,
    /// The reduction: responses by angle, beamwidths, curves, warnings.
    #[serde(flatten)]
    pub directivity: crate::analysis::directivity::Directivity,
}

/// The manifest of a tuning folder (`gliss tune`): the filters designed
/// for the response of its inputs, in tuning.json ([`TuningFile`]).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct TuningManifest {
    /// Layout version.
    pub schema_version: u32,
    /// "gliss".
    pub tool: String,
    /// Version of gliss that wrote the folder.
    pub tool_version: String,
    /// When (UTC, RFC 3339).
    pub created_utc: String,
    /// Always true once written.
    pub complete: bool,
    /// Always `tuning`.
    pub kind: FolderKind,
    /// The command line that made it.
    pub command_line: Vec<String>,
    /// The measurement or average folders tuned, with their hashes (more
    /// than one: their power average was tuned).
    pub inputs: Vec<InputRecord>,
    /// The target curve file as given, with its hash.
    pub target: FileEntry,
    /// Every file of the folder with its SHA-256.
    pub files: Vec<FileEntry>,
}

/// Version of tuning.json.
pub const TUNING_SCHEMA_VERSION: u32 = 1;

/// The order of every coefficient row of tuning.json, in words.
pub const COEFFICIENT_ORDER: &str = "b0, b1, b2, a1, a2: normalised so that a0 = 1; direct form I: y[n] = b0*x[n] + b1*x[n-1] + b2*x[n-2] - a1*y[n-1] - a2*y[n-2]";

/// tuning.json: the correction filters, their coefficients per rate, the
/// predicted effect and what was left alone (schema version 1; fields are
/// added, never renamed).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct TuningFile {
    /// Layout version ([`TUNING_SCHEMA_VERSION`]).
    pub schema_version: u32,
    /// The limits the design kept to.
    pub settings: crate::analysis::tuning::TuneSettings,
    /// The room's transition frequency and what it rests on (`null`
    /// without --volume).
    pub transition: Option<TransitionRecord>,
    /// The filters, by frequency, in the order they are applied (any
    /// order gives the same response).
    pub filters: Vec<crate::analysis::tuning::Filter>,
    /// The order of each row of `coefficients[].sections`
    /// ([`COEFFICIENT_ORDER`]).
    pub coefficient_order: String,
    /// The filters' cookbook coefficients for each requested rate.
    pub coefficients: Vec<CoefficientSet>,
    /// The response tuned, the target, the correction and the prediction
    /// on the log-frequency grid within the range.
    pub response: TuningResponse,
    /// The measured response's deviation from the target, level-aligned.
    pub before: crate::analysis::target::TargetReport,
    /// The predicted response's deviation, level-aligned again.
    pub after: crate::analysis::target::TargetReport,
    /// The regions left alone, with their reasons.
    pub uncorrectable: Vec<crate::analysis::tuning::UncorrectableRegion>,
    /// The deviations before and after below the transition frequency
    /// (each level-aligned over that part alone; `null` without
    /// --volume).
    #[serde(default)]
    pub below_transition: Option<crate::analysis::tuning::BeforeAfter>,
    /// With --fir: the correction as a minimum-phase finite impulse
    /// response and its predicted effect.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub fir: Option<FirRecord>,
    /// Warnings: `warnings` (the sentences) and `warning_codes` beside them.
    #[serde(flatten)]
    pub warnings: Warnings,
}

/// tuning.json's `fir`.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct FirRecord {
    /// The WAV in the folder (32-bit float, one channel).
    pub file: String,
    /// Its length, samples.
    pub taps: usize,
    /// Its rate (the design rate), Hz.
    pub sample_rate_hz: f64,
    /// How it was made, in words.
    pub method: String,
    /// Its magnitude on `response.frequency_hz`, dB.
    pub response_db: Vec<f64>,
    /// Its largest difference from the filters' `correction_db` over the
    /// range, dB (what the truncation costs).
    pub max_difference_db: f64,
    /// The deviation of measured + FIR from the target (level-aligned).
    pub after: crate::analysis::target::TargetReport,
}

/// tuning.json's `transition`.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct TransitionRecord {
    /// 2000·√(T/V), Hz.
    pub frequency_hz: f64,
    /// The reverberation time it uses: the mean T30 (T20 where T30 is
    /// missing) of the 500 Hz and 1 kHz octaves, s.
    pub t_s: f64,
    /// The room's volume (--volume), m³.
    pub volume_m3: f64,
}

/// The coefficients of every filter at one rate.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct CoefficientSet {
    /// The rate, Hz.
    pub sample_rate_hz: f64,
    /// One row per filter, in the order of `filters`: b0, b1, b2, a1, a2.
    pub sections: Vec<[f64; 5]>,
}

/// tuning.json's `response`: curves on one grid, dB.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct TuningResponse {
    /// The smoothing of the response tuned (as its folder has it).
    pub smoothing: Smoothing,
    /// Grid frequencies, Hz.
    pub frequency_hz: Vec<f64>,
    /// The measured response as read (dB re the sweep, arbitrary level).
    pub measured_db: Vec<f64>,
    /// The target.
    pub target_db: Vec<f64>,
    /// The target's tolerance below it (positive dB); empty when the
    /// target has none.
    #[serde(default, skip_serializing_if = "Vec::is_empty")]
    pub tolerance_lower_db: Vec<f64>,
    /// The target's tolerance above it (positive dB); likewise.
    #[serde(default, skip_serializing_if = "Vec::is_empty")]
    pub tolerance_upper_db: Vec<f64>,
    /// The filters' summed response at the design rate.
    pub correction_db: Vec<f64>,
    /// measured_db + correction_db: the predicted response.
    pub predicted_db: Vec<f64>,
}

fn schema_version() -> u32 {
    SCHEMA_VERSION
}

fn comparison_kind() -> FolderKind {
    FolderKind::Comparison
}

impl Comparison {
    /// Gives every row the verdict of its two stored tests where the file
    /// has none (a comparison written before verdicts were stored), by the
    /// one rule [`Verdict::of`]; rows that have verdicts keep them.
    pub fn fill_missing_verdicts(&mut self) {
        let n = self.inputs.len();
        for b in &mut self.bands {
            let c = &mut b.changes;
            if c.verdict.len() == n {
                continue;
            }
            c.verdict = (0..n)
                .map(|i| {
                    (i > 0).then(|| {
                        let get = |v: &[Option<bool>]| v.get(i).copied().flatten();
                        let measured = c.change.get(i).copied().flatten().is_some();
                        Verdict::of(measured, get(&c.exceeds_jnd), get(&c.exceeds_uncertainty))
                    })
                })
                .collect();
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn a_comparison_says_its_smoothing_in_words_from_the_typed_fields() {
        let mut r = CompareResponse {
            input_smoothing: vec![Smoothing::Fraction(6), Smoothing::Fraction(6)],
            ..CompareResponse::default()
        };
        assert_eq!(r.smoothing_words(), "1/6-octave smoothing");
        r.further_smoothing = Some(Smoothing::Fraction(3));
        r.smoothing_method = SmoothingMethod::FurtherOnGrid;
        assert_eq!(
            r.smoothing_words(),
            "1/3-octave smoothing of the 1/6-octave curves"
        );
        r.smoothing_method = SmoothingMethod::FromImpulse;
        assert_eq!(r.smoothing_words(), "1/3-octave smoothing");
        r.smoothing_method = SmoothingMethod::AsAnalysed;
        r.input_smoothing[1] = Smoothing::Fraction(24);
        assert_eq!(
            r.smoothing_words(),
            "each input's own smoothing (1/6, 1/24)"
        );
    }
}
