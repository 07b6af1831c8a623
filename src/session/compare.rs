//! Folders into answers: `average` (several positions of one condition
//! become one folder) and `compare` (before and after). Reads measurement
//! folders, calls the pure arithmetic of `analysis::compare`, writes the
//! new folder.

use std::collections::BTreeMap;
use std::path::{Path, PathBuf};

use crate::analysis::Smoothing;
use crate::analysis::compare::{self as calc};
use crate::analysis::room::{BandResult, Spread};
use crate::analysis::smoothing::smooth_on_log_grid;
use crate::error::{Error, ErrorKind, Result};
use crate::folder::schema::{
    AbsorptionRow, Alignment, AverageRecord, BandRow, CompareResponse, CompareSti, CompareTarget,
    Comparison, ComparisonManifest, FileEntry, FolderKind, InputRecord, Manifest, ResponseRecord,
    Results, SCHEMA_VERSION, Settings, SmoothingMethod, Source,
};
use crate::folder::{self, MeasurementFolder};
use crate::model::plot_kind::PLOTS_BUILT;
use crate::model::{Code, Fraction, Parameter, Profile, Warnings};
#[cfg(feature = "plots")]
use crate::plot;
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

    /// Its band of `fraction` at `center_hz` (the broadband values for
    /// [`Fraction::Broadband`]).
    pub fn band(&self, center_hz: f64, fraction: Fraction) -> Option<&BandResult> {
        if fraction == Fraction::Broadband {
            return self.results.broadband.as_ref();
        }
        self.results
            .bands
            .iter()
            .find(|b| b.is(fraction, center_hz))
    }
}

/// Reads and checks one input folder through [`folder::open`]: it must be
/// a complete measurement or average whose raw files are intact.
pub fn read_input(dir: &Path, label: Option<&str>) -> Result<Input> {
    let f = folder::open(dir)?;
    let record = f.input_record(label);
    let (manifest, results) = f.into_measurement("give the measurement folders it compared")?;
    if results.response.frequency_hz.is_empty()
        || results.response.frequency_hz.len() != results.response.magnitude_db.len()
    {
        return Err(Error::input(format!(
            "{}/results.json holds no frequency response",
            dir.display()
        )));
    }
    Ok(Input {
        dir: dir.to_path_buf(),
        record,
        manifest,
        results,
    })
}

/// Reads a tuning folder (`gliss tune`) as an input of a comparison: the
/// response it predicts (measured + the filters' exact response, at the
/// tuned response's level), on the manifest of the first folder it tuned
/// (found as the tuning recorded it, or beside the tuning folder). It has
/// no impulse response and no bands: a comparison shows its curve only.
pub fn read_tuning_input(dir: &Path, label: Option<&str>) -> Result<Input> {
    let t = folder::open_tuning(dir)?;
    let first = t
        .manifest
        .inputs
        .first()
        .ok_or_else(|| Error::input(format!("{} names no folder it tuned", dir.display())))?;
    let given = PathBuf::from(&first.folder);
    let beside = dir
        .parent()
        .map(|p| p.join(given.file_name().unwrap_or_default()));
    let source = [Some(given.clone()), beside]
        .into_iter()
        .flatten()
        .find(|p| folder::has_manifest(p))
        .ok_or_else(|| {
            Error::input(format!(
                "{} tuned {}, which is not found from here nor beside it; run gliss compare from where gliss tune was run",
                dir.display(),
                given.display()
            ))
        })?;
    let base = read_input(&source, None)?;
    let name = dir.file_name().map_or_else(
        || dir.display().to_string(),
        |n| n.to_string_lossy().into_owned(),
    );
    let r = &t.tuning.response;
    let mut results = base.results;
    results.response = crate::folder::schema::ResponseRecord {
        smoothing: r.smoothing,
        magnitude_reference: format!(
            "{} + the correction filters of {name} (predicted)",
            results.response.magnitude_reference
        ),
        frequency_hz: r.frequency_hz.clone(),
        magnitude_db: r.predicted_db.clone(),
        phase_deg: Vec::new(),
        phase_unwrapped_deg: Vec::new(),
        group_delay_s: Vec::new(),
        minimum_phase_deg: Vec::new(),
        excess_group_delay_s: Vec::new(),
        gate: None,
        spl_db: Vec::new(),
        sensitivity_db_spl: Vec::new(),
        sensitivity: None,
        resolved: Vec::new(),
    };
    results.impulse = None;
    results.bands.clear();
    results.broadband = None;
    results.speech = None;
    results.distortion = None;
    Ok(Input {
        dir: dir.to_path_buf(),
        record: InputRecord {
            folder: dir.display().to_string(),
            label: label.map_or_else(|| format!("{name} (predicted)"), str::to_string),
            sha256: t.manifest_sha256,
            results_sha256: t.content_sha256,
        },
        manifest: base.manifest,
        results,
    })
}

/// The inputs of a comparison: measurement and average folders through
/// [`read_input`], a tuning folder's prediction through
/// [`read_tuning_input`].
fn read_compare_inputs(dirs: &[PathBuf], labels: &[String]) -> Result<Vec<Input>> {
    if !labels.is_empty() && labels.len() != dirs.len() {
        return Err(Error::parameter(format!(
            "--labels gives {} labels for {} folders; give one per folder, in order",
            labels.len(),
            dirs.len()
        )));
    }
    dirs.iter()
        .enumerate()
        .map(|(i, d)| {
            let label = labels.get(i).map(String::as_str);
            if folder::kind_of(d).as_deref() == Some("tuning") {
                read_tuning_input(d, label)
            } else {
                read_input(d, label)
            }
        })
        .collect()
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

/// The frequency grid all inputs share: the first input's grid within the
/// band every input covers. Warns when the inputs' rates or bands differ.
fn common_grid(inputs: &[Input], warnings: &mut Warnings) -> Result<Vec<f64>> {
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
        warnings.add(
            Code::MixedSampleRates,
            format!(
                "the folders were measured at different sample rates ({} Hz); they are compared on their common band",
                rates
                    .iter()
                    .map(|r| r.to_string())
                    .collect::<Vec<_>>()
                    .join(", ")
            ),
        );
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
        warnings.add(
            Code::DifferentBands,
            format!(
                "the folders' sweeps cover different bands; only the common band {} to {} is compared",
                crate::model::units::hz(lo.round()),
                crate::model::units::hz(hi.round())
            ),
        );
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
fn common_bands(inputs: &[Input]) -> Vec<(f64, Fraction)> {
    inputs[0]
        .results
        .bands
        .iter()
        .filter(|b| {
            inputs
                .iter()
                .all(|i| i.band(b.center_hz, b.fraction).is_some())
        })
        .map(|b| (b.center_hz, b.fraction))
        .collect()
}

/// Averages bands over the inputs: mean and spread of every parameter.
fn average_band(bands: &[&BandResult]) -> BandResult {
    let mut out = BandResult::empty(bands[0].center_hz, bands[0].exact_hz, bands[0].fraction);
    let mut spread = BTreeMap::new();
    for p in Parameter::ALL {
        let values: Vec<Option<f64>> = bands.iter().map(|b| b.get(p)).collect();
        let (mean, std, n) = calc::mean_std(&values);
        out.values[p] = mean;
        spread.insert(p, Spread { n, std });
        if n < bands.len() && p.jnd().is_some() {
            out.warnings.add(
                Code::PartialPositions,
                format!(
                    "{}: measured at {n} of {} positions; the mean is over those",
                    p.key(),
                    bands.len()
                ),
            );
        }
    }
    if let (Some(t20), Some(t30)) = (out.get(Parameter::T20), out.get(Parameter::T30)) {
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
    /// Warnings.
    pub warnings: Warnings,
}

/// Averages position folders into a new folder: checks the job, reads the
/// positions, averages them, writes the folder.
pub fn average(job: &AverageJob) -> Result<(Results, Written)> {
    check_average_job(job)?;
    let inputs = read_inputs(&job.inputs, &job.labels)?;
    refuse_repeated_positions(&inputs)?;
    if inputs.iter().any(|i| i.results.average.is_some()) {
        return Err(Error::input(
            "one of the folders is already an average; average the position folders themselves",
        ));
    }
    let folder = MeasurementFolder::check(&job.out, job.overwrite, &[])?;
    let results = average_results(&inputs, job.sources)?;
    let files = write_average(job, &folder, &inputs, &results)?;
    let warnings = results.warnings.clone();
    Ok((results, Written { files, warnings }))
}

/// An average counts each position once: the same folder given twice, or
/// two folders holding the same recording (a copy), are refused by name.
fn refuse_repeated_positions(inputs: &[Input]) -> Result<()> {
    let recording = |i: &Input| {
        i.manifest
            .files
            .iter()
            .find(|f| f.name == "recording.wav")
            .map(|f| f.sha256.clone())
    };
    for (k, a) in inputs.iter().enumerate() {
        for b in &inputs[..k] {
            let same_folder = match (a.dir.canonicalize(), b.dir.canonicalize()) {
                (Ok(x), Ok(y)) => x == y,
                _ => a.dir == b.dir,
            };
            let same_recording = recording(a).is_some() && recording(a) == recording(b);
            if same_folder || same_recording {
                return Err(Error::input(format!(
                    "{} and {} are the same measurement ({}); an average counts each microphone position once: give each position's folder once",
                    b.dir.display(),
                    a.dir.display(),
                    if same_folder {
                        "the same folder"
                    } else {
                        "the same recording.wav"
                    }
                )));
            }
        }
    }
    Ok(())
}

/// The counts `gliss average` needs, checked before anything is read.
fn check_average_job(job: &AverageJob) -> Result<()> {
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
    Ok(())
}

/// The average of the positions as a results file: the power average of
/// the responses, the mean and spread of every band parameter, and the
/// ISO 3382-2 grade `sources` source positions reach.
pub fn average_results(inputs: &[Input], sources: usize) -> Result<Results> {
    let mut warnings = Warnings::new();
    let grid = common_grid(inputs, &mut warnings)?;
    let first = &inputs[0].results;
    let smoothing: Vec<Smoothing> = inputs
        .iter()
        .map(|i| i.results.response.smoothing)
        .collect();
    if smoothing.iter().any(|s| *s != smoothing[0]) {
        warnings.add(
            Code::MixedSmoothing,
            format!(
                "the positions were smoothed differently ({}); the average mixes them",
                smoothing
                    .iter()
                    .map(|s| s.label())
                    .collect::<Vec<_>>()
                    .join(", ")
            ),
        );
    }
    let avg = calc::power_average_db(&on_grid(inputs, &grid, |r| &r.magnitude_db));
    let (grid, avg): (Vec<f64>, Vec<f64>) = grid
        .iter()
        .zip(&avg)
        .filter_map(|(f, v)| v.map(|v| (*f, v)))
        .unzip();
    let spl = if inputs.iter().all(|i| !i.results.response.spl_db.is_empty()) {
        calc::power_average_db(&on_grid(inputs, &grid, |r| &r.spl_db))
            .into_iter()
            .collect::<Option<Vec<f64>>>()
            .unwrap_or_default()
    } else {
        Vec::new()
    };
    let bands: Vec<BandResult> = common_bands(inputs)
        .into_iter()
        .map(|(c, f)| {
            let per: Vec<&BandResult> = inputs.iter().filter_map(|i| i.band(c, f)).collect();
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
    let grade = calc::grade(n, sources).to_string();
    warnings.add(
        Code::PrecisionGrade,
        format!(
            "{n} source–microphone combinations ({sources} source position{}): ISO 3382-2 grade {grade}",
            if sources == 1 { "" } else { "s" }
        ),
    );
    // the room's STI: the spatial mean of the positions' values, when
    // every position has one (none at all: not a speech analysis)
    let sti_values: Vec<Option<f64>> = inputs
        .iter()
        .map(|i| i.results.speech.as_ref().and_then(|s| s.sti))
        .collect();
    let sti = if inputs.iter().all(|i| i.results.speech.is_none()) {
        None
    } else {
        match crate::analysis::speech::spatial_mean(&sti_values) {
            Ok(m) => Some(m),
            Err(why) => {
                warnings.add(Code::SpeechWithheld, why);
                None
            }
        }
    };
    let delays: Vec<Option<f64>> = inputs.iter().map(|i| Some(i.results.delay_s)).collect();
    Ok(Results {
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
            smoothing: first.response.smoothing,
            magnitude_reference: format!(
                "power average over {n} positions of: {}",
                first.response.magnitude_reference
            ),
            frequency_hz: grid,
            magnitude_db: avg,
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
        warnings,
        target: None,
        impedance: None,
        thiele_small: None,
        speech: None,
        noise: None,
        average: Some(AverageRecord {
            positions: n,
            sources,
            grade,
            response_method:
                "power average of the smoothed magnitudes, 10·lg(mean of 10^(L/10)); phase is not averaged"
                    .into(),
            inputs: inputs.iter().map(|i| i.record.clone()).collect(),
            sti,
        }),
    })
}

/// Writes an average's folder: results, curves, plots, then the manifest.
fn write_average(
    job: &AverageJob,
    folder: &MeasurementFolder,
    inputs: &[Input],
    results: &Results,
) -> Result<Vec<String>> {
    folder.create()?;
    let mut files: Vec<FileEntry> = Vec::new();
    files.push(folder.derived_entry("results.json", &to_json(results)?)?);
    files.push(folder.derived_entry("response.csv", &response_csv(&results.response)?)?);
    if !results.bands.is_empty() {
        files.push(folder.derived_entry(
            "bands.csv",
            &bands_table_csv(&results.bands, results.broadband.as_ref())?,
        )?);
    }
    #[cfg(feature = "plots")]
    if job.plots {
        files.extend(draw_average_plots(folder, inputs, results)?);
    }
    let n = inputs.len();
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
            smoothing: results.response.smoothing,
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
            profile: Profile::common(inputs.iter().map(|i| i.manifest.settings.profile)),
            reference_channel: None,
            speech_level_dba: None,
            noise_folder: None,
            position: None,
        },
        files,
        measurement: None,
        problems: Vec::new(),
        kind: Some(FolderKind::Average),
        inputs: inputs.iter().map(|i| i.record.clone()).collect(),
    };
    folder.write_derived("manifest.json", &to_json(&manifest)?)?;
    Ok(std::iter::once("manifest.json".to_string())
        .chain(manifest.files.iter().map(|f| f.name.clone()))
        .collect())
}

/// The plots of an average: every position's response with their power
/// average, and the band parameters with their spread.
#[cfg(feature = "plots")]
fn draw_average_plots(
    folder: &MeasurementFolder,
    inputs: &[Input],
    results: &Results,
) -> Result<Vec<FileEntry>> {
    let grid = &results.response.frequency_hz;
    let title = format!("average of {} positions", inputs.len());
    let positions: Vec<(String, Vec<f64>)> = inputs
        .iter()
        .zip(&on_grid(inputs, grid, |r| &r.magnitude_db))
        .map(|(i, v)| {
            (
                i.record.label.clone(),
                v.iter().map(|x| x.unwrap_or(f64::NAN)).collect(),
            )
        })
        .collect();
    let smoothing = results.response.smoothing.words();
    let input = plot::AveragePlotInput {
        title: &title,
        frequency_hz: grid,
        positions: &positions,
        average: &results.response.magnitude_db,
        smoothing: &smoothing,
        bands: &results.bands,
    };
    folder.draw_all(input.kinds(), |kind, tmp| {
        plot::draw_average(kind, tmp, &input)
    })
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
    pub smoothing: Option<Smoothing>,
    /// Level-align the responses to the reference over this band, Hz.
    pub align: Option<(f64, f64)>,
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

/// Compares folders into a new comparison folder: checks the job, reads
/// the folders, compares the responses, judges every band parameter,
/// adds the absorption and the target, writes the folder.
pub fn compare(job: &CompareJob) -> Result<(Comparison, Written)> {
    check_compare_job(job)?;
    let inputs = read_compare_inputs(&job.inputs, &job.labels)?;
    let folder = MeasurementFolder::check(&job.out, job.overwrite, &[])?;
    let mut warnings = Warnings::new();
    let grid = common_grid(&inputs, &mut warnings)?;
    let response = compare_responses(&inputs, grid, job.smoothing, job.align)?;
    let bands = band_rows(&inputs);
    let c_sound = calc::speed_of_sound(job.temperature_c);
    let absorption = job
        .volume_m3
        .map(|v| absorption_rows(&inputs, v, c_sound))
        .unwrap_or_default();
    let target = job
        .target
        .as_ref()
        .map(|t| compare_target(t, &response))
        .transpose()?;
    let comparison = Comparison {
        schema_version: SCHEMA_VERSION,
        kind: FolderKind::Comparison,
        inputs: inputs.iter().map(|i| i.record.clone()).collect(),
        common_band_hz: [
            response.frequency_hz[0],
            *response.frequency_hz.last().unwrap_or(&response.frequency_hz[0]),
        ],
        response,
        bands,
        absorption,
        volume_m3: job.volume_m3,
        temperature_c: job.volume_m3.map(|_| job.temperature_c),
        speed_of_sound_m_s: job.volume_m3.map(|_| c_sound),
        target,
        criteria: vec![
            "exceeds_jnd: the change is larger than the just-noticeable difference of ISO 3382-1 Annex A (EDT and T 5 %, C80 1 dB, D50 0.05, Ts 10 ms; C50 1 dB by analogy with C80)".into(),
            "exceeds_uncertainty: the change is larger than twice the combined standard uncertainty of the two values (the spread over positions for an average, ISO 3382-2's formula for T20 and T30 of one measurement; unknown otherwise)".into(),
            "verdict: audible (beyond both), within_uncertainty (beyond the just-noticeable difference but not the uncertainty), beyond_jnd_uncertainty_unknown, below_jnd, or not_measured; the one judgement the terminal, the plots and the report show".into(),
            "absorption: A = 55.3·V/(c·T), the Sabine relation as ISO 354 writes it, c = 331 + 0.6·t m/s; the air term cancels in the difference".into(),
        ]
        .into_iter()
        .chain(job.align.map(|_| {
            "response.alignment: each curve moved by the mean of its dB difference from the reference over the band (equal weight per grid point, i.e. per fraction of an octave) before the differences were taken; band parameters are not affected".to_string()
        }))
        .collect(),
        profile: Profile::common(inputs.iter().map(|i| i.manifest.settings.profile)),
        speech: compare_sti(&inputs),
        warnings: warnings.clone(),
    };
    write_comparison(job, &folder, &inputs, &comparison)
        .map(|files| (comparison, Written { files, warnings }))
}

/// The STI of each input (an average's spatial mean, with the standard
/// uncertainty of that mean) and its change from the first, judged once;
/// `None` when no input has one.
fn compare_sti(inputs: &[Input]) -> Option<CompareSti> {
    // (value, its standard uncertainty, its qualification band as stored)
    type Sti = (Option<f64>, Option<f64>, Option<String>);
    let per: Vec<Sti> = inputs
        .iter()
        .map(|i| match i.results.average.as_ref() {
            Some(a) => a.sti.as_ref().map_or((None, None, None), |m| {
                let n = m.positions.len().max(1) as f64;
                (
                    Some(m.mean),
                    m.std.map(|s| s / n.sqrt()),
                    Some(m.qualification.clone()),
                )
            }),
            None => i.results.speech.as_ref().map_or((None, None, None), |s| {
                (s.sti, None, s.qualification.clone())
            }),
        })
        .collect();
    if per.iter().all(|p| p.0.is_none()) {
        return None;
    }
    let values: Vec<Option<f64>> = per.iter().map(|p| p.0).collect();
    let uncertainty: Vec<Option<f64>> = per.iter().map(|p| p.1).collect();
    Some(CompareSti {
        qualification: per.into_iter().map(|p| p.2).collect(),
        changes: calc::judge_sti(&values, &uncertainty),
        values,
        uncertainty,
        jnd: calc::STI_JND,
    })
}

/// The volume and temperature `gliss compare` needs, checked.
fn check_compare_job(job: &CompareJob) -> Result<()> {
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
    Ok(())
}

/// The inputs' responses on the common `grid`, smoothed further where
/// `want` asks, and their differences from the first.
fn compare_responses(
    inputs: &[Input],
    grid: Vec<f64>,
    want: Option<Smoothing>,
    align: Option<(f64, f64)>,
) -> Result<CompareResponse> {
    let input_smoothing: Vec<Smoothing> = inputs
        .iter()
        .map(|i| i.results.response.smoothing)
        .collect();
    let own = if input_smoothing.iter().all(|s| *s == input_smoothing[0]) {
        input_smoothing[0].label()
    } else {
        input_smoothing
            .iter()
            .map(|s| s.label())
            .collect::<Vec<_>>()
            .join("/")
    };
    let mut mags = on_grid(inputs, &grid, |r| &r.magnitude_db);
    let mut smoothing = own.clone();
    let mut smoothing_method = SmoothingMethod::AsAnalysed;
    if let Some(want) = want {
        if inputs.iter().all(|i| i.results.impulse.is_some()) {
            // every input keeps its impulse response: smooth each again from
            // it with the analysis's own stages (exact, finer or coarser)
            mags = inputs
                .iter()
                .map(|i| {
                    let fresh = crate::session::export::fresh_response(&i.as_export(), want)?;
                    Ok(calc::interpolate_log(
                        &fresh.frequency_hz,
                        &fresh.magnitude_db,
                        &grid,
                    ))
                })
                .collect::<Result<Vec<_>>>()?;
            smoothing = want.label();
            smoothing_method = SmoothingMethod::FromImpulse;
        } else if want == Smoothing::None {
            return Err(Error::parameter(
                "--smooth none needs every folder's impulse response, and an average has none; leave --smooth out, or give a fraction such as 1/3",
            ));
        } else if let Smoothing::Fraction(n) = want {
            // an average has no impulse response: smooth its curve further
            let widest = input_smoothing
                .iter()
                .map(|s| s.octaves())
                .fold(0.0, f64::max);
            if want.octaves() < widest - 1e-9 {
                return Err(Error::parameter(format!(
                    "--smooth 1/{n} is finer than the folders' own smoothing ({own}), and an average has no impulse response to smooth again from: choose a coarser one, or average positions analysed with a finer --smooth"
                )));
            }
            if want.octaves() > widest + 1e-9 {
                mags = mags.iter().map(|m| smooth_on_log_grid(m, n)).collect();
                smoothing = format!("1/{n} of {own}");
                smoothing_method = SmoothingMethod::FurtherOnGrid;
            }
        }
    }
    let alignment = align
        .map(|band| {
            let offset_db = mags
                .iter()
                .map(|m| {
                    calc::level_offset(&mags[0], m, &grid, band).ok_or_else(|| {
                        Error::parameter(format!(
                            "--align {}–{}: the responses have fewer than {} points in common there; choose a band inside the measured range ({}–{})",
                            crate::model::units::hz(band.0),
                            crate::model::units::hz(band.1),
                            calc::MIN_ALIGN_POINTS,
                            crate::model::units::hz(grid.first().copied().unwrap_or(0.0)),
                            crate::model::units::hz(grid.last().copied().unwrap_or(0.0)),
                        ))
                    })
                })
                .collect::<Result<Vec<f64>>>()?;
            Ok::<_, Error>(Alignment {
                band_hz: [band.0, band.1],
                offset_db,
            })
        })
        .transpose()?;
    if let Some(al) = &alignment {
        for (m, o) in mags.iter_mut().zip(&al.offset_db) {
            for v in m.iter_mut().flatten() {
                *v += o;
            }
        }
    }
    let difference_db: Vec<Vec<Option<f64>>> = mags
        .iter()
        .map(|m| {
            m.iter()
                .zip(&mags[0])
                .map(|(a, b)| Some(a.as_ref()? - b.as_ref()?))
                .collect()
        })
        .collect();
    Ok(CompareResponse {
        smoothing,
        input_smoothing,
        further_smoothing: want,
        smoothing_method,
        frequency_hz: grid,
        magnitude_db: mags,
        difference_db,
        alignment,
    })
}

impl Input {
    /// This input as the export layer takes it (to take its response again
    /// from its impulse response).
    fn as_export(&self) -> crate::session::export::Measurement {
        crate::session::export::Measurement {
            dir: self.dir.clone(),
            manifest: self.manifest.clone(),
            results: self.results.clone(),
            results_sha256: self.record.results_sha256.clone(),
        }
    }

    /// The standard uncertainty of `p` in a band: the spread over positions
    /// for an average (the standard uncertainty of their mean), ISO
    /// 3382-2's formula for T20 and T30 of one measurement, else unknown.
    fn uncertainty(&self, band: &BandResult, p: Parameter) -> Option<f64> {
        band.standard_uncertainty(p, self.positions())
    }
}

/// Every compared parameter of every band all inputs share (and of the
/// broadband values), judged once.
fn band_rows(inputs: &[Input]) -> Vec<BandRow> {
    let mut bands: Vec<(f64, Fraction)> = common_bands(inputs);
    if inputs.iter().all(|i| i.results.broadband.is_some()) {
        if let Some(b) = &inputs[0].results.broadband {
            bands.push((b.center_hz, Fraction::Broadband));
        }
    }
    let mut rows = Vec::new();
    for (c, f) in bands {
        let per: Vec<Option<&BandResult>> = inputs.iter().map(|i| i.band(c, f)).collect();
        for p in Parameter::COMPARED {
            let values: Vec<Option<f64>> = per.iter().map(|b| b.and_then(|b| b.get(p))).collect();
            let uncertainty: Vec<Option<f64>> = per
                .iter()
                .zip(inputs)
                .map(|(b, i)| i.uncertainty(b.as_ref()?, p))
                .collect();
            let changes = calc::judge(p, &values, &uncertainty);
            rows.push(BandRow {
                center_hz: c,
                fraction: f,
                parameter: p,
                values,
                uncertainty,
                changes,
            });
        }
    }
    rows
}

/// The equivalent absorption area of every band all inputs share, from
/// T30 (T20 where any input lacks T30), for a room of `volume_m3` and a
/// speed of sound `c_sound`.
fn absorption_rows(inputs: &[Input], volume_m3: f64, c_sound: f64) -> Vec<AbsorptionRow> {
    common_bands(inputs)
        .into_iter()
        .map(|(c, f)| {
            let t = |p: Parameter| -> Vec<Option<f64>> {
                inputs
                    .iter()
                    .map(|i| i.band(c, f).and_then(|b| b.get(p)))
                    .collect()
            };
            let t30 = t(Parameter::T30);
            let (parameter, ts) = if t30.iter().all(Option::is_some) {
                (Parameter::T30, t30)
            } else {
                (Parameter::T20, t(Parameter::T20))
            };
            let area: Vec<Option<f64>> = ts
                .iter()
                .map(|t| t.map(|t| calc::absorption_area_m2(volume_m3, t, c_sound)))
                .collect();
            let mut delta = vec![None];
            for a in &area[1..] {
                delta.push(area[0].zip(*a).map(|(a0, a)| a - a0));
            }
            AbsorptionRow {
                center_hz: c,
                fraction: f,
                parameter,
                area_m2: area,
                delta_area_m2: delta,
            }
        })
        .collect()
}

/// Every response of the comparison against the target curve.
fn compare_target(t: &crate::session::TargetJob, r: &CompareResponse) -> Result<CompareTarget> {
    let grid = &r.frequency_hz;
    let range = t.resolve_range((grid[0], *grid.last().unwrap_or(&grid[0])))?;
    let per_input = r
        .magnitude_db
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
    Ok(CompareTarget {
        file: t.file.name.clone(),
        sha256: t.file.sha256.clone(),
        aligned: !t.absolute,
        per_input,
    })
}

/// The bands the comparison's reverberation plot draws: per band, T30
/// where every input has it, else T20, with the stored verdicts.
#[cfg(feature = "plots")]
fn reverberation_points(rows: &[BandRow]) -> Vec<plot::BandPoints> {
    let mut points = Vec::new();
    for fraction in [Fraction::Octave, Fraction::Third] {
        let of = |p: Parameter| -> Vec<&BandRow> {
            rows.iter()
                .filter(|r| r.fraction == fraction && r.parameter == p)
                .collect()
        };
        let (t30, t20) = (of(Parameter::T30), of(Parameter::T20));
        for (i, r) in t30.iter().enumerate() {
            let row = if r.values.iter().all(Option::is_some) {
                Some(*r)
            } else {
                t20.get(i).copied()
            };
            if let Some(row) = row {
                points.push(plot::BandPoints {
                    center_hz: row.center_hz,
                    fraction: row.fraction,
                    parameter: row.parameter,
                    values: row.values.clone(),
                    verdict: row.changes.verdict.clone(),
                });
            }
        }
    }
    points
}

/// The plots of a comparison: the responses over each other, their
/// differences, and the decay times per band with the audible changes
/// ringed.
#[cfg(feature = "plots")]
fn draw_comparison_plots(
    job: &CompareJob,
    folder: &MeasurementFolder,
    inputs: &[Input],
    cmp: &Comparison,
) -> Result<Vec<FileEntry>> {
    let labels: Vec<String> = inputs.iter().map(|i| i.record.label.clone()).collect();
    // an aligned curve says by how much it was moved, and over what band
    let shown: Vec<String> = match &cmp.response.alignment {
        Some(al) => labels
            .iter()
            .zip(&al.offset_db)
            .enumerate()
            .map(|(k, (l, o))| {
                if k == 0 {
                    l.clone()
                } else {
                    format!(
                        "{l} {o:+.1} dB (level-aligned over {}–{})",
                        crate::model::units::hz(al.band_hz[0]),
                        crate::model::units::hz(al.band_hz[1])
                    )
                }
            })
            .collect(),
        None => labels.clone(),
    };
    let nan = |v: &Vec<Option<f64>>| v.iter().map(|x| x.unwrap_or(f64::NAN)).collect::<Vec<_>>();
    let curves: Vec<(String, Vec<f64>)> = shown
        .iter()
        .cloned()
        .zip(cmp.response.magnitude_db.iter().map(nan))
        .collect();
    let diffs: Vec<(String, Vec<f64>)> = shown
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
        smoothing: &cmp.response.smoothing_words(),
        target: overlay.as_ref(),
        bands: &bands,
        mark_label: "ring: audible (beyond the 5 % JND and the uncertainty)",
    };
    folder.draw_all(input.kinds(), |kind, tmp| {
        plot::draw_comparison(kind, tmp, &input)
    })
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
        files.extend(draw_comparison_plots(job, folder, inputs, cmp)?);
    }
    let manifest = ComparisonManifest {
        schema_version: SCHEMA_VERSION,
        tool: "gliss".into(),
        tool_version: env!("CARGO_PKG_VERSION").into(),
        created_utc: humantime::format_rfc3339_seconds(std::time::SystemTime::now()).to_string(),
        complete: true,
        kind: FolderKind::Comparison,
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
        "verdict",
    ])
    .map_err(err)?;
    let num = |v: Option<f64>| v.map_or(String::new(), |x| format!("{x:.5}"));
    let flag = |v: Option<bool>| v.map_or(String::new(), |x| x.to_string());
    for r in &c.bands {
        for (k, input) in c.inputs.iter().enumerate() {
            w.write_record([
                format!("{}", (r.center_hz * 10.0).round() / 10.0),
                r.fraction.code().to_string(),
                r.parameter.key().to_string(),
                (k + 1).to_string(),
                input.label.clone(),
                num(r.values[k]),
                num(r.changes.change[k]),
                num(r.changes.relative_change[k]),
                flag(r.changes.exceeds_jnd[k]),
                num(r.uncertainty[k]),
                flag(r.changes.exceeds_uncertainty[k]),
                r.changes
                    .verdict
                    .get(k)
                    .copied()
                    .flatten()
                    .map_or(String::new(), |v| v.code().to_string()),
            ])
            .map_err(err)?;
        }
    }
    for r in &c.absorption {
        for (k, input) in c.inputs.iter().enumerate() {
            w.write_record([
                format!("{}", (r.center_hz * 10.0).round() / 10.0),
                r.fraction.code().to_string(),
                "delta_area_m2".into(),
                (k + 1).to_string(),
                input.label.clone(),
                num(r.area_m2[k]),
                num(r.delta_area_m2[k]),
                String::new(),
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
