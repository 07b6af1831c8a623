//! Folders into answers: `average` (several positions of one condition
//! become one folder) and `compare` (before and after). Reads measurement
//! folders, calls the pure arithmetic of `analysis::compare`, writes the
//! new folder.

use std::collections::BTreeMap;
use std::path::{Path, PathBuf};

use serde::{Deserialize, Serialize};

use crate::analysis::compare::{self as calc, PARAMETERS};
use crate::analysis::room::{BandResult, Spread};
use crate::error::{Error, ErrorKind, Result};
use crate::model::plot_kind::PLOTS_BUILT;
use crate::model::units::format_hz;
#[cfg(feature = "plots")]
use crate::plot;
use crate::session::folder::{MeasurementFolder, sha256_hex};
use crate::session::records::{
    AverageRecord, FileEntry, InputRecord, Manifest, ResponseRecord, Results, SCHEMA_VERSION,
    Settings, Source,
};
use crate::session::{bands_table_csv, response_csv, to_json};

/// A measurement folder read for averaging or comparing.
#[derive(Debug, Clone)]
pub struct Input {
    /// The folder as given.
    pub dir: PathBuf,
    /// Its name, label and hashes.
    pub record: InputRecord,
    /// Its manifest.
    pub manifest: Manifest,
    /// Its results.
    pub results: Results,
}

impl Input {
    /// Positions behind this input (more than one for an average).
    pub fn positions(&self) -> usize {
        self.results.average.as_ref().map_or(1, |a| a.positions)
    }
}

/// The label of a folder: its last path component.
fn folder_label(dir: &Path) -> String {
    dir.file_name()
        .map(|n| n.to_string_lossy().into_owned())
        .unwrap_or_else(|| dir.display().to_string())
}

/// Reads and checks one input folder: it must be a complete measurement
/// or average written by gliss.
pub fn read_input(dir: &Path, label: Option<&str>) -> Result<Input> {
    let show = dir.display();
    let mpath = dir.join("manifest.json");
    if !dir.is_dir() {
        return Err(Error::input(format!(
            "{show} is not a folder; give measurement folders written by gliss measure, analyze, demo or average"
        )));
    }
    let mbytes = std::fs::read(&mpath).map_err(|_| {
        Error::input(format!(
            "{show} is not a measurement folder (it has no manifest.json); give folders written by gliss measure, analyze, demo or average"
        ))
    })?;
    let value: serde_json::Value = serde_json::from_slice(&mbytes)
        .map_err(|e| Error::input(format!("{show}/manifest.json is not valid JSON: {e}")))?;
    if value.get("kind").and_then(|k| k.as_str()) == Some("comparison") {
        return Err(Error::input(format!(
            "{show} is a comparison, not a measurement; give the measurement folders it compared"
        )));
    }
    let manifest: Manifest = serde_json::from_value(value).map_err(|e| {
        Error::input(format!(
            "{show}/manifest.json is not a gliss measurement manifest ({e})"
        ))
    })?;
    if !manifest.complete {
        let why = if manifest.problems.is_empty() {
            "it was interrupted".to_string()
        } else {
            manifest.problems.join("; ")
        };
        return Err(Error::input(format!(
            "{show} holds an incomplete measurement ({why}); measure again, or leave it out"
        )));
    }
    let rpath = dir.join("results.json");
    let rbytes = std::fs::read(&rpath).map_err(|e| Error::io("read", &rpath, &e))?;
    let results: Results = serde_json::from_slice(&rbytes).map_err(|e| {
        Error::input(format!(
            "{show}/results.json is not a gliss results file ({e}); re-analyse the folder"
        ))
    })?;
    if results.response.frequency_hz.is_empty()
        || results.response.frequency_hz.len() != results.response.magnitude_db.len()
    {
        return Err(Error::input(format!(
            "{show}/results.json holds no frequency response"
        )));
    }
    Ok(Input {
        dir: dir.to_path_buf(),
        record: InputRecord {
            folder: dir.display().to_string(),
            label: label.map_or_else(|| folder_label(dir), str::to_string),
            sha256: sha256_hex(&mbytes),
            results_sha256: sha256_hex(&rbytes),
        },
        manifest,
        results,
    })
}

/// Reads all inputs, with labels from `labels` (comma list) where given.
pub fn read_inputs(dirs: &[PathBuf], labels: &[String]) -> Result<Vec<Input>> {
    if !labels.is_empty() && labels.len() != dirs.len() {
        return Err(Error::parameter(format!(
            "--labels gives {} labels for {} folders; give one per folder, in order",
            labels.len(),
            dirs.len()
        )));
    }
    dirs.iter()
        .enumerate()
        .map(|(i, d)| read_input(d, labels.get(i).map(String::as_str)))
        .collect()
}

/// The value of `parameter` (a results.json name) in a band.
pub fn band_value(b: &BandResult, parameter: &str) -> Option<f64> {
    match parameter {
        "edt_s" => b.edt_s,
        "t20_s" => b.t20_s,
        "t30_s" => b.t30_s,
        "c50_db" => b.c50_db,
        "c80_db" => b.c80_db,
        "d50" => b.d50,
        "ts_s" => b.ts_s,
        "inr_db" => b.inr_db,
        _ => None,
    }
}

fn set_band_value(b: &mut BandResult, parameter: &str, v: Option<f64>) {
    match parameter {
        "edt_s" => b.edt_s = v,
        "t20_s" => b.t20_s = v,
        "t30_s" => b.t30_s = v,
        "c50_db" => b.c50_db = v,
        "c80_db" => b.c80_db = v,
        "d50" => b.d50 = v,
        "ts_s" => b.ts_s = v,
        "inr_db" => b.inr_db = v,
        _ => {}
    }
}

/// The band of `fraction` at `center_hz` in a results file.
fn find_band<'a>(r: &'a Results, center_hz: f64, fraction: &str) -> Option<&'a BandResult> {
    r.bands
        .iter()
        .find(|b| b.fraction == fraction && (b.center_hz - center_hz).abs() < 1e-6 * center_hz)
}

/// The frequency grid all inputs share: the first input's grid within the
/// band every input covers. Warns when the inputs' rates or bands differ.
fn common_grid(inputs: &[Input], warnings: &mut Vec<String>) -> Result<Vec<f64>> {
    let lo = inputs
        .iter()
        .map(|i| i.results.response.frequency_hz[0])
        .fold(0.0, f64::max);
    let hi = inputs
        .iter()
        .map(|i| *i.results.response.frequency_hz.last().unwrap_or(&0.0))
        .fold(f64::INFINITY, f64::min);
    if hi <= lo * 1.01 {
        return Err(Error::input(format!(
            "the folders share no frequency band (the common part would be {lo:.0} to {hi:.0} Hz); compare measurements of overlapping sweeps"
        )));
    }
    let rates: Vec<u32> = inputs.iter().map(|i| i.results.sample_rate_hz).collect();
    if rates.iter().any(|&r| r != rates[0]) {
        warnings.push(format!(
            "the folders were measured at different sample rates ({} Hz); they are compared on their common band",
            rates
                .iter()
                .map(|r| r.to_string())
                .collect::<Vec<_>>()
                .join(", ")
        ));
    }
    let bands: Vec<(f64, f64)> = inputs
        .iter()
        .map(|i| {
            let f = &i.results.response.frequency_hz;
            (f[0], *f.last().unwrap_or(&f[0]))
        })
        .collect();
    if bands
        .iter()
        .any(|b| (b.0 / bands[0].0 - 1.0).abs() > 1e-3 || (b.1 / bands[0].1 - 1.0).abs() > 1e-3)
    {
        warnings.push(format!(
            "the folders' sweeps cover different bands; only the common band {} Hz to {} Hz is compared",
            format_hz(lo.round()),
            format_hz(hi.round())
        ));
    }
    Ok(inputs[0]
        .results
        .response
        .frequency_hz
        .iter()
        .copied()
        .filter(|&f| f >= lo * (1.0 - 1e-9) && f <= hi * (1.0 + 1e-9))
        .collect())
}

/// Each input's magnitude on `grid`.
fn on_grid(
    inputs: &[Input],
    grid: &[f64],
    pick: fn(&ResponseRecord) -> &[f64],
) -> Vec<Vec<Option<f64>>> {
    inputs
        .iter()
        .map(|i| {
            let r = &i.results.response;
            let v = pick(r);
            if v.len() != r.frequency_hz.len() {
                return vec![None; grid.len()];
            }
            calc::interpolate_log(&r.frequency_hz, v, grid)
        })
        .collect()
}

/// Bands (centre, fraction) that every input measured.
fn common_bands(inputs: &[Input]) -> Vec<(f64, String)> {
    inputs[0]
        .results
        .bands
        .iter()
        .filter(|b| {
            inputs
                .iter()
                .all(|i| find_band(&i.results, b.center_hz, &b.fraction).is_some())
        })
        .map(|b| (b.center_hz, b.fraction.clone()))
        .collect()
}

/// Averages bands over the inputs: mean and spread of every parameter.
fn average_band(bands: &[&BandResult]) -> BandResult {
    let mut out = bands[0].clone();
    out.warnings.clear();
    out.curvature_percent = None;
    let mut spread = BTreeMap::new();
    for p in PARAMETERS.iter().chain(std::iter::once(&"inr_db")) {
        let values: Vec<Option<f64>> = bands.iter().map(|b| band_value(b, p)).collect();
        let (mean, std, n) = calc::mean_std(&values);
        set_band_value(&mut out, p, mean);
        spread.insert(p.to_string(), Spread { n, std });
        if n < bands.len() && PARAMETERS.contains(p) {
            out.warnings.push(format!(
                "{p}: measured at {n} of {} positions; the mean is over those",
                bands.len()
            ));
        }
    }
    if let (Some(t20), Some(t30)) = (out.t20_s, out.t30_s) {
        out.curvature_percent = Some(100.0 * (t30 / t20 - 1.0));
    }
    out.spread = Some(spread);
    out
}

/// What `gliss average` needs.
#[derive(Debug, Clone)]
pub struct AverageJob {
    /// The new folder.
    pub out: PathBuf,
    /// Replace the derived files of an existing average of the same inputs.
    pub overwrite: bool,
    /// The position folders.
    pub inputs: Vec<PathBuf>,
    /// Their labels (empty: the folder names).
    pub labels: Vec<String>,
    /// Source positions among the inputs (for the ISO 3382-2 grade).
    pub sources: usize,
    /// Draw PNG plots.
    pub plots: bool,
    /// The command line, for the manifest.
    pub command_line: Vec<String>,
}

/// What an average or comparison wrote.
#[derive(Debug, Clone)]
pub struct Written {
    /// Files written, relative to the folder, manifest first.
    pub files: Vec<String>,
    /// Warnings, in plain words.
    pub warnings: Vec<String>,
}

/// Averages position folders into a new folder.
pub fn average(job: &AverageJob) -> Result<(Results, Written)> {
    if job.inputs.len() < 2 {
        return Err(Error::parameter(
            "average needs at least two position folders",
        ));
    }
    if job.sources == 0 || job.sources > job.inputs.len() {
        return Err(Error::parameter(format!(
            "--sources {} must be between 1 and the number of folders ({})",
            job.sources,
            job.inputs.len()
        )));
    }
    let inputs = read_inputs(&job.inputs, &job.labels)?;
    if inputs.iter().any(|i| i.results.average.is_some()) {
        return Err(Error::input(
            "one of the folders is already an average; average the position folders themselves",
        ));
    }
    let folder = MeasurementFolder::check(&job.out, job.overwrite, &[])?;
    let mut warnings = Vec::new();
    let grid = common_grid(&inputs, &mut warnings)?;
    let smoothing: Vec<&str> = inputs
        .iter()
        .map(|i| i.results.response.smoothing.as_str())
        .collect();
    if smoothing.iter().any(|s| *s != smoothing[0]) {
        warnings.push(format!(
            "the positions were smoothed differently ({}); the average mixes them",
            smoothing.join(", ")
        ));
    }
    let mags = on_grid(&inputs, &grid, |r| &r.magnitude_db);
    let avg = calc::power_average_db(&mags);
    let (grid, avg): (Vec<f64>, Vec<f64>) = grid
        .iter()
        .zip(&avg)
        .filter_map(|(f, v)| v.map(|v| (*f, v)))
        .unzip();
    let spl = if inputs.iter().all(|i| !i.results.response.spl_db.is_empty()) {
        calc::power_average_db(&on_grid(&inputs, &grid, |r| &r.spl_db))
            .into_iter()
            .collect::<Option<Vec<f64>>>()
            .unwrap_or_default()
    } else {
        Vec::new()
    };
    let bands: Vec<BandResult> = common_bands(&inputs)
        .into_iter()
        .map(|(c, f)| {
            let per: Vec<&BandResult> = inputs
                .iter()
                .filter_map(|i| find_band(&i.results, c, &f))
                .collect();
            average_band(&per)
        })
        .collect();
    let broadband = {
        let per: Vec<&BandResult> = inputs
            .iter()
            .filter_map(|i| i.results.broadband.as_ref())
            .collect();
        (per.len() == inputs.len()).then(|| average_band(&per))
    };
    let n = inputs.len();
    let grade = calc::grade(n, job.sources).to_string();
    warnings.push(format!(
        "{n} source–microphone combinations ({} source position{}): ISO 3382-2 grade {grade}",
        job.sources,
        if job.sources == 1 { "" } else { "s" }
    ));
    let first = &inputs[0].results;
    let delays: Vec<Option<f64>> = inputs.iter().map(|i| Some(i.results.delay_s)).collect();
    let results = Results {
        schema_version: SCHEMA_VERSION,
        sample_rate_hz: first.sample_rate_hz,
        delay_s: calc::mean_std(&delays).0.unwrap_or(0.0),
        delay_reference: "the mean of the positions' delays".into(),
        peak_dbfs: inputs
            .iter()
            .map(|i| i.results.peak_dbfs)
            .fold(f64::NEG_INFINITY, f64::max),
        peak_to_noise_db: inputs
            .iter()
            .map(|i| i.results.peak_to_noise_db)
            .fold(f64::INFINITY, f64::min),
        impulse: None,
        response: ResponseRecord {
            smoothing: first.response.smoothing.clone(),
            magnitude_reference: format!(
                "power average over {n} positions of: {}",
                first.response.magnitude_reference
            ),
            frequency_hz: grid.clone(),
            magnitude_db: avg.clone(),
            phase_deg: Vec::new(),
            phase_unwrapped_deg: Vec::new(),
            group_delay_s: Vec::new(),
            minimum_phase_deg: Vec::new(),
            excess_group_delay_s: Vec::new(),
            gate: None,
            spl_db: spl,
            sensitivity_db_spl: Vec::new(),
            sensitivity: None,
            resolved: Vec::new(),
        },
        distortion: None,
        bands,
        broadband,
        warnings: warnings.clone(),
        target: None,
        average: Some(AverageRecord {
            positions: n,
            sources: job.sources,
            grade,
            response_method:
                "power average of the smoothed magnitudes, 10·lg(mean of 10^(L/10)); phase is not averaged"
                    .into(),
            inputs: inputs.iter().map(|i| i.record.clone()).collect(),
        }),
    };

    folder.create()?;
    let mut files: Vec<FileEntry> = Vec::new();
    files.push(folder.derived_entry("results.json", &to_json(&results)?)?);
    files.push(folder.derived_entry("response.csv", &response_csv(&results.response)?)?);
    if !results.bands.is_empty() {
        files.push(folder.derived_entry(
            "bands.csv",
            &bands_table_csv(&results.bands, results.broadband.as_ref())?,
        )?);
    }
    #[cfg(feature = "plots")]
    if job.plots {
        let title = format!("average of {n} positions");
        let positions: Vec<(String, Vec<f64>)> = inputs
            .iter()
            .zip(&on_grid(&inputs, &grid, |r| &r.magnitude_db))
            .map(|(i, v)| {
                (
                    i.record.label.clone(),
                    v.iter().map(|x| x.unwrap_or(f64::NAN)).collect(),
                )
            })
            .collect();
        let input = plot::AveragePlotInput {
            title: &title,
            frequency_hz: &grid,
            positions: &positions,
            average: &avg,
            smoothing: &results.response.smoothing,
            bands: &results.bands,
        };
        for kind in input.kinds() {
            let tmp = folder.temp_path(kind.file());
            plot::draw_average(kind, &tmp, &input)?;
            files.push(folder.commit_entry(&tmp, kind.file())?);
        }
    }
    let m0 = &inputs[0].manifest;
    let manifest = Manifest {
        schema_version: SCHEMA_VERSION,
        tool: "gliss".into(),
        tool_version: env!("CARGO_PKG_VERSION").into(),
        created_utc: humantime::format_rfc3339_seconds(std::time::SystemTime::now()).to_string(),
        complete: true,
        command_line: job.command_line.clone(),
        source: Source {
            kind: "average".into(),
            description: format!(
                "power average of {n} positions: {}",
                inputs
                    .iter()
                    .map(|i| i.record.label.as_str())
                    .collect::<Vec<_>>()
                    .join(", ")
            ),
            recording_path: None,
            sweep_path: None,
        },
        sample_rate_hz: results.sample_rate_hz,
        channel: m0.channel,
        recording_channels: 0,
        recording_encoding: "none (an average has no recording)".into(),
        sweep: m0.sweep.clone(),
        settings: Settings {
            smoothing: results.response.smoothing.clone(),
            plots: job.plots && PLOTS_BUILT,
            harmonics: 1,
            bands: !results.bands.is_empty(),
            calibration: None,
            mic_correction: None,
            volts_per_fs: None,
            distance_m: None,
            target: None,
            target_range_hz: None,
            target_absolute: false,
        },
        files,
        measurement: None,
        problems: Vec::new(),
        kind: Some("average".into()),
        inputs: inputs.iter().map(|i| i.record.clone()).collect(),
    };
    folder.write_derived("manifest.json", &to_json(&manifest)?)?;
    let files = std::iter::once("manifest.json".to_string())
        .chain(manifest.files.iter().map(|f| f.name.clone()))
        .collect();
    Ok((results, Written { files, warnings }))
}

/// comparison.json.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Comparison {
    /// Layout version.
    pub schema_version: u32,
    /// "comparison".
    pub kind: String,
    /// The folders in order (the first is the reference), with their hashes.
    pub inputs: Vec<InputRecord>,
    /// The band every input covers, Hz.
    pub common_band_hz: [f64; 2],
    /// The responses and their differences from the first.
    pub response: CompareResponse,
    /// Every band parameter: values, changes and their significance.
    pub bands: Vec<BandRow>,
    /// With --volume: the change of equivalent absorption area per band.
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
    pub criteria: Vec<String>,
    /// Warnings, in plain words.
    pub warnings: Vec<String>,
}

/// The responses of a comparison on one grid.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct CompareResponse {
    /// Smoothing of the curves.
    pub smoothing: String,
    /// Grid frequencies, Hz.
    pub frequency_hz: Vec<f64>,
    /// Per input, the magnitude in dB (`null` where it has none).
    pub magnitude_db: Vec<Vec<Option<f64>>>,
    /// Per input, its magnitude minus the first's, dB (the first: zeros).
    pub difference_db: Vec<Vec<Option<f64>>>,
}

/// One parameter of one band across the inputs. Arrays hold one entry per
/// input; for the first input (the reference) the change fields are null.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct BandRow {
    /// Nominal centre, Hz.
    pub center_hz: f64,
    /// "1/1" or "1/3" or "broadband".
    pub fraction: String,
    /// The results.json field name, e.g. "t30_s".
    pub parameter: String,
    /// The value per input (`null` where not measured).
    pub values: Vec<Option<f64>>,
    /// Value minus the first input's.
    pub change: Vec<Option<f64>>,
    /// Change over the first input's value.
    pub relative_change: Vec<Option<f64>>,
    /// Whether the change exceeds the just-noticeable difference of
    /// ISO 3382-1 Annex A.
    pub exceeds_jnd: Vec<Option<bool>>,
    /// The standard uncertainty of each value (`null` where unknown).
    pub uncertainty: Vec<Option<f64>>,
    /// Whether the change exceeds twice the combined standard uncertainty
    /// of the two values.
    pub exceeds_uncertainty: Vec<Option<bool>>,
}

/// The equivalent absorption area of one band across the inputs.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct AbsorptionRow {
    /// Nominal centre, Hz.
    pub center_hz: f64,
    /// "1/1" or "1/3".
    pub fraction: String,
    /// The decay time it comes from: "t30_s", or "t20_s" where T30 is
    /// missing in any input.
    pub parameter: String,
    /// A = 55.3·V/(c·T) per input, m².
    pub area_m2: Vec<Option<f64>>,
    /// Area minus the first input's, m² (`null` for the first).
    pub delta_area_m2: Vec<Option<f64>>,
}

/// What `gliss compare` needs.
#[derive(Debug, Clone)]
pub struct CompareJob {
    /// The new folder.
    pub out: PathBuf,
    /// Replace the derived files of an existing comparison.
    pub overwrite: bool,
    /// The folders, the reference first.
    pub inputs: Vec<PathBuf>,
    /// Their labels (empty: the folder names).
    pub labels: Vec<String>,
    /// Further smoothing of the responses (`None`: as the inputs are).
    pub smoothing: Option<crate::analysis::Smoothing>,
    /// Room volume for the absorption change, m³.
    pub volume_m3: Option<f64>,
    /// Air temperature, °C.
    pub temperature_c: f64,
    /// Draw PNG plots.
    pub plots: bool,
    /// The command line, for the manifest.
    pub command_line: Vec<String>,
    /// A target curve to judge every response against (`--target`).
    pub target: Option<crate::session::TargetJob>,
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

/// The smoothing label of the inputs' responses, or their mix.
fn smoothing_of(inputs: &[Input]) -> String {
    let s: Vec<&str> = inputs
        .iter()
        .map(|i| i.results.response.smoothing.as_str())
        .collect();
    if s.iter().all(|x| *x == s[0]) {
        s[0].to_string()
    } else {
        s.join("/")
    }
}

/// Power smoothing of a curve on the 48-per-octave grid over `1/n` octave
/// (a moving power average of the grid points within ±1/(2n) octave).
/// The grid is logarithmic, so a fixed number of points is a fixed
/// fraction of an octave; written by hand because it is a few lines over
/// the grid gliss already has.
pub fn smooth_on_log_grid(values: &[Option<f64>], n: u32) -> Vec<Option<f64>> {
    let half = (f64::from(crate::analysis::smoothing::POINTS_PER_OCTAVE) / (2.0 * f64::from(n)))
        .round() as usize;
    (0..values.len())
        .map(|i| {
            values[i]?;
            let lo = i.saturating_sub(half);
            let hi = (i + half).min(values.len() - 1);
            let mut sum = 0.0;
            let mut count = 0usize;
            for v in values[lo..=hi].iter().flatten() {
                sum += 10f64.powf(v / 10.0);
                count += 1;
            }
            Some(10.0 * (sum / count as f64).log10())
        })
        .collect()
}

/// The width of a smoothing label in octaves ("1/6" → 1/6, "none" → 0).
fn octaves(label: &str) -> f64 {
    label
        .strip_prefix("1/")
        .and_then(|n| n.parse::<f64>().ok())
        .map_or(0.0, |n| 1.0 / n)
}

/// Compares folders into a new comparison folder.
pub fn compare(job: &CompareJob) -> Result<(Comparison, Written)> {
    if job.inputs.len() < 2 {
        return Err(Error::parameter(
            "compare needs at least two folders: the reference (before) first, then the others",
        ));
    }
    if let Some(v) = job.volume_m3 {
        if !(v.is_finite() && v > 0.0) {
            return Err(Error::parameter(format!(
                "--volume {v} must be a positive room volume in m³"
            )));
        }
    }
    if !(job.temperature_c.is_finite() && (-30.0..=60.0).contains(&job.temperature_c)) {
        return Err(Error::parameter(format!(
            "--temperature {} °C is outside -30 to 60 °C; give the air temperature of the room",
            job.temperature_c
        )));
    }
    let inputs = read_inputs(&job.inputs, &job.labels)?;
    let folder = MeasurementFolder::check(&job.out, job.overwrite, &[])?;
    let mut warnings = Vec::new();
    let grid = common_grid(&inputs, &mut warnings)?;
    let mut mags = on_grid(&inputs, &grid, |r| &r.magnitude_db);
    let mut smoothing = smoothing_of(&inputs);
    if let Some(want) = job.smoothing {
        let label = want.label();
        if inputs.iter().all(|i| i.results.impulse.is_some()) {
            // every input keeps its impulse response: smooth each again from
            // it with the analysis's own stages (exact, finer or coarser)
            mags = inputs
                .iter()
                .map(|i| {
                    let m = crate::session::export::open(&i.dir)?;
                    let fresh = crate::session::export::fresh_response(&m, want)?;
                    Ok(calc::interpolate_log(
                        &fresh.frequency_hz,
                        &fresh.magnitude_db,
                        &grid,
                    ))
                })
                .collect::<Result<Vec<_>>>()?;
            smoothing = label;
        } else if want == crate::analysis::Smoothing::None {
            return Err(Error::parameter(
                "--smooth none needs every folder's impulse response, and an average has none; leave --smooth out, or give a fraction such as 1/3",
            ));
        } else if let crate::analysis::Smoothing::Fraction(n) = want {
            // an average has no impulse response: smooth its curve further
            let widest = inputs
                .iter()
                .map(|i| octaves(&i.results.response.smoothing))
                .fold(0.0, f64::max);
            if 1.0 / f64::from(n) < widest - 1e-9 {
                return Err(Error::parameter(format!(
                    "--smooth 1/{n} is finer than the folders' own smoothing ({smoothing}), and an average has no impulse response to smooth again from: choose a coarser one, or average positions analysed with a finer --smooth"
                )));
            }
            if 1.0 / f64::from(n) > widest + 1e-9 {
                mags = mags.iter().map(|m| smooth_on_log_grid(m, n)).collect();
                smoothing = format!("1/{n} of {smoothing}");
            }
        }
    }
    let diffs: Vec<Vec<Option<f64>>> = mags
        .iter()
        .map(|m| {
            m.iter()
                .zip(&mags[0])
                .map(|(a, b)| Some(a.as_ref()? - b.as_ref()?))
                .collect()
        })
        .collect();

    // the band table
    let mut rows = Vec::new();
    let mut bands: Vec<(f64, String)> = common_bands(&inputs);
    if inputs.iter().all(|i| i.results.broadband.is_some()) {
        if let Some(b) = &inputs[0].results.broadband {
            bands.push((b.center_hz, "broadband".into()));
        }
    }
    let lookup = |i: &Input, c: f64, f: &str| -> Option<BandResult> {
        if f == "broadband" {
            i.results.broadband.clone()
        } else {
            find_band(&i.results, c, f).cloned()
        }
    };
    for (c, f) in &bands {
        let per: Vec<Option<BandResult>> = inputs.iter().map(|i| lookup(i, *c, f)).collect();
        for p in PARAMETERS {
            let values: Vec<Option<f64>> = per
                .iter()
                .map(|b| b.as_ref().and_then(|b| band_value(b, p)))
                .collect();
            let uncertainty: Vec<Option<f64>> = per
                .iter()
                .zip(&inputs)
                .map(|(b, i)| {
                    let b = b.as_ref()?;
                    let v = band_value(b, p)?;
                    if let Some(s) = b.spread.as_ref().and_then(|s| s.get(p)) {
                        if let (Some(std), true) = (s.std, s.n >= 2) {
                            // the spread over positions, as the standard
                            // uncertainty of their mean
                            return Some(std / (s.n as f64).sqrt());
                        }
                    }
                    calc::t_uncertainty(p, v, calc::bandwidth_hz(*c, f)?, 1, i.positions())
                })
                .collect();
            let v0 = values[0];
            let u0 = uncertainty[0];
            let mut row = BandRow {
                center_hz: *c,
                fraction: f.clone(),
                parameter: p.to_string(),
                values: values.clone(),
                change: vec![None],
                relative_change: vec![None],
                exceeds_jnd: vec![None],
                uncertainty: uncertainty.clone(),
                exceeds_uncertainty: vec![None],
            };
            for k in 1..inputs.len() {
                let d = v0.zip(values[k]).map(|(a, b)| b - a);
                row.change.push(d);
                row.relative_change
                    .push(v0.zip(d).and_then(|(a, d)| (a.abs() > 0.0).then(|| d / a)));
                row.exceeds_jnd.push(
                    v0.zip(values[k])
                        .and_then(|(a, b)| calc::exceeds_jnd(p, a, b)),
                );
                row.exceeds_uncertainty.push(
                    d.zip(u0.zip(uncertainty[k]))
                        .map(|(d, (a, b))| d.abs() > 2.0 * (a * a + b * b).sqrt()),
                );
            }
            rows.push(row);
        }
    }

    // absorption
    let c_sound = calc::speed_of_sound(job.temperature_c);
    let mut absorption = Vec::new();
    if let Some(v) = job.volume_m3 {
        for (c, f) in bands.iter().filter(|b| b.1 != "broadband") {
            let t = |p: &str| -> Vec<Option<f64>> {
                inputs
                    .iter()
                    .map(|i| lookup(i, *c, f).and_then(|b| band_value(&b, p)))
                    .collect()
            };
            let t30 = t("t30_s");
            let (parameter, ts) = if t30.iter().all(Option::is_some) {
                ("t30_s", t30)
            } else {
                ("t20_s", t("t20_s"))
            };
            let area: Vec<Option<f64>> = ts
                .iter()
                .map(|t| t.map(|t| calc::absorption_area_m2(v, t, c_sound)))
                .collect();
            let mut delta = vec![None];
            for a in &area[1..] {
                delta.push(area[0].zip(*a).map(|(a0, a)| a - a0));
            }
            absorption.push(AbsorptionRow {
                center_hz: *c,
                fraction: f.clone(),
                parameter: parameter.into(),
                area_m2: area,
                delta_area_m2: delta,
            });
        }
    }
    // the target: every response judged against it on the common grid
    let target = match &job.target {
        None => None,
        Some(t) => {
            let range = t.resolve_range((grid[0], *grid.last().unwrap_or(&grid[0])))?;
            let per_input = mags
                .iter()
                .map(|m| {
                    let (f, v): (Vec<f64>, Vec<f64>) = grid
                        .iter()
                        .zip(m)
                        .filter_map(|(f, v)| v.map(|v| (*f, v)))
                        .unzip();
                    crate::analysis::target::deviation(&f, &v, &t.target, range, !t.absolute).ok()
                })
                .collect();
            Some(CompareTarget {
                file: t.file.name.clone(),
                sha256: t.file.sha256.clone(),
                aligned: !t.absolute,
                per_input,
            })
        }
    };
    let comparison = Comparison {
        schema_version: SCHEMA_VERSION,
        kind: "comparison".into(),
        inputs: inputs.iter().map(|i| i.record.clone()).collect(),
        common_band_hz: [grid[0], *grid.last().unwrap_or(&grid[0])],
        response: CompareResponse {
            smoothing,
            frequency_hz: grid.clone(),
            magnitude_db: mags,
            difference_db: diffs,
        },
        bands: rows,
        absorption,
        volume_m3: job.volume_m3,
        temperature_c: job.volume_m3.map(|_| job.temperature_c),
        speed_of_sound_m_s: job.volume_m3.map(|_| c_sound),
        target,
        criteria: vec![
            "exceeds_jnd: the change is larger than the just-noticeable difference of ISO 3382-1 Annex A (EDT and T 5 %, C80 1 dB, D50 0.05, Ts 10 ms; C50 1 dB by analogy with C80)".into(),
            "exceeds_uncertainty: the change is larger than twice the combined standard uncertainty of the two values (the spread over positions for an average, ISO 3382-2's formula for T20 and T30 of one measurement; unknown otherwise)".into(),
            "absorption: A = 55.3·V/(c·T), the Sabine relation as ISO 354 writes it, c = 331 + 0.6·t m/s; the air term cancels in the difference".into(),
        ],
        warnings: warnings.clone(),
    };
    write_comparison(job, &folder, &inputs, &comparison)
        .map(|files| (comparison, Written { files, warnings }))
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
    /// "comparison".
    pub kind: String,
    /// The command line that made it.
    pub command_line: Vec<String>,
    /// kind "comparison" and a description.
    pub source: Source,
    /// The folders compared, with their hashes.
    pub inputs: Vec<InputRecord>,
    /// Every file of the folder with its SHA-256.
    pub files: Vec<FileEntry>,
}

/// The decay time the reverberation plot shows per band (T30 where every
/// input has it, else T20), ringed where the change exceeds the
/// just-noticeable difference.
#[cfg(feature = "plots")]
fn reverberation_points(rows: &[BandRow]) -> Vec<plot::BandPoints> {
    let mut points = Vec::new();
    for fraction in ["1/1", "1/3"] {
        let of = |p: &str| -> Vec<&BandRow> {
            rows.iter()
                .filter(|r| r.fraction == fraction && r.parameter == p)
                .collect()
        };
        let (t30, t20) = (of("t30_s"), of("t20_s"));
        for (i, r) in t30.iter().enumerate() {
            let row = if r.values.iter().all(Option::is_some) {
                Some(*r)
            } else {
                t20.get(i).copied()
            };
            if let Some(row) = row {
                points.push(plot::BandPoints {
                    center_hz: row.center_hz,
                    fraction: row.fraction.clone(),
                    values: row.values.clone(),
                    mark: row.exceeds_jnd.iter().map(|e| *e == Some(true)).collect(),
                });
            }
        }
    }
    points
}

fn write_comparison(
    job: &CompareJob,
    folder: &MeasurementFolder,
    inputs: &[Input],
    cmp: &Comparison,
) -> Result<Vec<String>> {
    folder.create()?;
    // the plots follow, with the plots feature
    #[cfg_attr(not(feature = "plots"), allow(unused_mut))]
    let mut files = vec![
        folder.derived_entry("comparison.json", &to_json(cmp)?)?,
        folder.derived_entry("comparison.csv", &comparison_csv(cmp)?)?,
    ];
    #[cfg(feature = "plots")]
    if job.plots {
        let labels: Vec<String> = inputs.iter().map(|i| i.record.label.clone()).collect();
        let nan =
            |v: &Vec<Option<f64>>| v.iter().map(|x| x.unwrap_or(f64::NAN)).collect::<Vec<_>>();
        let curves: Vec<(String, Vec<f64>)> = labels
            .iter()
            .cloned()
            .zip(cmp.response.magnitude_db.iter().map(nan))
            .collect();
        let diffs: Vec<(String, Vec<f64>)> = labels
            .iter()
            .cloned()
            .zip(cmp.response.difference_db.iter().map(nan))
            .skip(1)
            .collect();
        let title = labels.join(" vs ");
        // the target drawn level-aligned to the first response
        let overlay = job
            .target
            .as_ref()
            .zip(cmp.target.as_ref())
            .and_then(|(t, ct)| {
                let r = ct.per_input.first()?.as_ref()?;
                Some(plot::TargetOverlay {
                    curve: t.target.curve(
                        &cmp.response.frequency_hz,
                        (r.range_hz[0], r.range_hz[1]),
                        -r.level_offset_db,
                    ),
                    label: format!("target ({})", t.file.name),
                })
            });
        let bands = reverberation_points(&cmp.bands);
        let input = plot::ComparisonPlotInput {
            title: &title,
            labels: &labels,
            frequency_hz: &cmp.response.frequency_hz,
            responses: &curves,
            differences: &diffs,
            smoothing: &cmp.response.smoothing,
            target: overlay.as_ref(),
            bands: &bands,
            mark_label: "ring: change larger than the just-noticeable 5 %",
        };
        for kind in input.kinds() {
            let tmp = folder.temp_path(kind.file());
            plot::draw_comparison(kind, &tmp, &input)?;
            files.push(folder.commit_entry(&tmp, kind.file())?);
        }
    }
    let manifest = ComparisonManifest {
        schema_version: SCHEMA_VERSION,
        tool: "gliss".into(),
        tool_version: env!("CARGO_PKG_VERSION").into(),
        created_utc: humantime::format_rfc3339_seconds(std::time::SystemTime::now()).to_string(),
        complete: true,
        kind: "comparison".into(),
        command_line: job.command_line.clone(),
        source: Source {
            kind: "comparison".into(),
            description: format!(
                "comparison of {} against {}",
                inputs[1..]
                    .iter()
                    .map(|i| i.record.label.as_str())
                    .collect::<Vec<_>>()
                    .join(", "),
                inputs[0].record.label
            ),
            recording_path: None,
            sweep_path: None,
        },
        inputs: cmp.inputs.clone(),
        files,
    };
    folder.write_derived("manifest.json", &to_json(&manifest)?)?;
    Ok(std::iter::once("manifest.json".to_string())
        .chain(manifest.files.iter().map(|f| f.name.clone()))
        .collect())
}

/// comparison.csv: one row per band, parameter and input.
pub fn comparison_csv(c: &Comparison) -> Result<Vec<u8>> {
    let mut w = csv::Writer::from_writer(Vec::new());
    let err = |e: csv::Error| Error::new(ErrorKind::Io, format!("could not encode CSV: {e}"));
    w.write_record([
        "center_hz",
        "fraction",
        "parameter",
        "input",
        "label",
        "value",
        "change",
        "relative_change",
        "exceeds_jnd",
        "uncertainty",
        "exceeds_uncertainty",
    ])
    .map_err(err)?;
    let num = |v: Option<f64>| v.map_or(String::new(), |x| format!("{x:.5}"));
    let flag = |v: Option<bool>| v.map_or(String::new(), |x| x.to_string());
    for r in &c.bands {
        for (k, input) in c.inputs.iter().enumerate() {
            w.write_record([
                format!("{}", (r.center_hz * 10.0).round() / 10.0),
                r.fraction.clone(),
                r.parameter.clone(),
                (k + 1).to_string(),
                input.label.clone(),
                num(r.values[k]),
                num(r.change[k]),
                num(r.relative_change[k]),
                flag(r.exceeds_jnd[k]),
                num(r.uncertainty[k]),
                flag(r.exceeds_uncertainty[k]),
            ])
            .map_err(err)?;
        }
    }
    for r in &c.absorption {
        for (k, input) in c.inputs.iter().enumerate() {
            w.write_record([
                format!("{}", (r.center_hz * 10.0).round() / 10.0),
                r.fraction.clone(),
                "delta_area_m2".into(),
                (k + 1).to_string(),
                input.label.clone(),
                num(r.area_m2[k]),
                num(r.delta_area_m2[k]),
                String::new(),
                String::new(),
                String::new(),
                String::new(),
            ])
            .map_err(err)?;
        }
    }
    w.into_inner()
        .map_err(|e| Error::new(ErrorKind::Io, format!("could not encode CSV: {e}")))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn log_grid_smoothing_of_a_flat_curve_is_flat_and_averages_power() {
        let flat = vec![Some(-3.0); 200];
        assert!(
            smooth_on_log_grid(&flat, 3)
                .iter()
                .all(|v| (v.unwrap() + 3.0).abs() < 1e-12)
        );
        // a step of 0 / -inf-like power: at the step the power average of
        // an equal number of points at 1.0 and 0.25 (naive reference)
        let step: Vec<Option<f64>> = (0..97)
            .map(|i| Some(if i < 48 { 0.0 } else { -6.020_599_913 }))
            .collect();
        // 1/1 octave: ±24 points around point 48: 24 points at 1.0 (24..48)
        // and 25 at 0.25 (48..=72)
        let s = smooth_on_log_grid(&step, 1);
        let want = 10.0 * ((24.0 * 1.0 + 25.0 * 0.25) / 49.0f64).log10();
        assert!((s[48].unwrap() - want).abs() < 1e-9);
    }
}
