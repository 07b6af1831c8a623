//! A tuning folder: correction filters designed for the response of one
//! measurement or the power average of several positions
//! ([`crate::analysis::tuning`]), written through the one folder writer:
//! tuning.json, filters.txt, the plot, the manifest last.

use std::fmt::Write as _;
use std::path::PathBuf;

use crate::analysis::target::Target;
use crate::analysis::tuning::{self, AboveTransition, TuneSettings, Tuning};
use crate::error::{Error, Result};
use crate::folder::MeasurementFolder;
use crate::folder::schema::{
    COEFFICIENT_ORDER, CoefficientSet, FileEntry, FolderKind, Results, SCHEMA_VERSION,
    TUNING_SCHEMA_VERSION, TransitionRecord, TuningFile, TuningManifest, TuningResponse,
};
use crate::model::plot_kind::PLOTS_BUILT;
use crate::model::{Code, Fraction, Parameter, Warnings};
use crate::session::compare::{Input, average_results, read_inputs};
use crate::session::to_json;

/// What `gliss tune` hands the library.
#[derive(Debug, Clone)]
pub struct TuneJob {
    /// The tuning folder to write.
    pub out: PathBuf,
    /// Replace the derived files of an existing tuning folder.
    pub overwrite: bool,
    /// Draw the plot.
    pub plots: bool,
    /// The measurement or average folders (several: their power average
    /// is tuned).
    pub inputs: Vec<PathBuf>,
    /// The target curve.
    pub target: Target,
    /// Its file as given, with its hash.
    pub target_file: FileEntry,
    /// --range; `None`: where the target and the sweep both are.
    pub range: Option<(f64, f64)>,
    /// --filters.
    pub filters: usize,
    /// --max-boost, dB.
    pub max_boost_db: f64,
    /// --max-cut, dB.
    pub max_cut_db: f64,
    /// --q-range.
    pub q_range: (f64, f64),
    /// --rate (empty: the measurement's rate).
    pub rates: Vec<f64>,
    /// --volume, m³.
    pub volume_m3: Option<f64>,
    /// --above-transition (`None`: broad).
    pub above_transition: Option<AboveTransition>,
    /// --fir TAPS: also the correction as a minimum-phase FIR.
    pub fir_taps: Option<usize>,
    /// The command line, for the manifest.
    pub command_line: Vec<String>,
}

/// What a tuning job wrote.
#[derive(Debug, Clone)]
pub struct TuneOutcome {
    /// tuning.json as written.
    pub tuning: TuningFile,
    /// The files written, manifest first.
    pub files: Vec<String>,
}

/// Designs the correction and writes the tuning folder. Every check and
/// the design run before anything is written.
pub fn run(job: &TuneJob) -> Result<TuneOutcome> {
    check_job(job)?;
    let inputs = read_inputs(&job.inputs, &[])?;
    let results = response_to_tune(&inputs)?;
    let file = design(job, &inputs, &results)?;
    let folder = MeasurementFolder::check(&job.out, job.overwrite, &[])?;
    folder.create()?;
    let mut files = Vec::new();
    if let Some(taps) = job.fir_taps {
        let h = tuning::fir(&file.filters, file.settings.sample_rate_hz, taps);
        let bytes = crate::signal::wav::encode_wav(
            &[&h],
            file.settings.sample_rate_hz as u32,
            crate::signal::wav::SampleEncoding::Float,
        );
        files.push(folder.derived_entry("correction.wav", &bytes)?);
    }
    files.insert(0, folder.derived_entry("tuning.json", &to_json(&file)?)?);
    files.push(folder.derived_entry("filters.txt", filters_txt(&file).as_bytes())?);
    let plots = job.plots && PLOTS_BUILT;
    #[cfg(not(feature = "plots"))]
    let _ = plots;
    #[cfg(feature = "plots")]
    if plots {
        let kind = crate::model::PlotKind::Tuning;
        let title = inputs
            .iter()
            .map(|i| i.record.label.clone())
            .collect::<Vec<_>>()
            .join(", ");
        files.push(folder.draw(kind.file(), |p| {
            crate::plot::tuning::tuning_png(p, &title, &file)
        })?);
    }
    let manifest = TuningManifest {
        schema_version: SCHEMA_VERSION,
        tool: "gliss".into(),
        tool_version: env!("CARGO_PKG_VERSION").into(),
        created_utc: humantime::format_rfc3339_seconds(std::time::SystemTime::now()).to_string(),
        complete: true,
        kind: FolderKind::Tuning,
        command_line: job.command_line.clone(),
        inputs: inputs.iter().map(|i| i.record.clone()).collect(),
        target: job.target_file.clone(),
        files,
    };
    folder.write_derived("manifest.json", &to_json(&manifest)?)?;
    Ok(TuneOutcome {
        tuning: file,
        files: std::iter::once("manifest.json".to_string())
            .chain(manifest.files.into_iter().map(|f| f.name))
            .collect(),
    })
}

/// Refuses options that would be ignored or make no sense, before any
/// folder is read.
fn check_job(job: &TuneJob) -> Result<()> {
    if job.above_transition.is_some() && job.volume_m3.is_none() {
        return Err(Error::parameter(
            "--above-transition needs --volume M3: the transition frequency 2000·√(T/V) comes from the room's volume and its reverberation time",
        ));
    }
    if let Some(v) = job.volume_m3 {
        if !(v.is_finite() && v > 1.0 && v < 1e6) {
            return Err(Error::parameter(format!(
                "--volume {v} m³ is no room's volume; give the volume in cubic metres, e.g. --volume 120"
            )));
        }
    }
    if let Some(t) = job.fir_taps {
        if !(64..=262_144).contains(&t) {
            return Err(Error::parameter(format!(
                "--fir {t} taps is out of range; give 64 to 262144 (e.g. --fir 8192: 171 ms at 48 kHz)"
            )));
        }
    }
    for &r in &job.rates {
        if !(8000.0..=768_000.0).contains(&r) {
            return Err(Error::parameter(format!(
                "--rate {r} Hz is out of range; give the processor's sample rate in Hz, 8000 to 768000 (e.g. --rate 48000)"
            )));
        }
    }
    Ok(())
}

/// The results whose response is tuned: the one folder's, or the power
/// average of several positions (which must be single positions).
fn response_to_tune(inputs: &[Input]) -> Result<Results> {
    if inputs.len() == 1 {
        return Ok(inputs[0].results.clone());
    }
    if let Some(i) = inputs.iter().find(|i| i.results.average.is_some()) {
        return Err(Error::input(format!(
            "{} is already an average; give either that average alone or the position folders, not both",
            i.dir.display()
        )));
    }
    average_results(inputs, 1)
}

/// The mean T30 (T20 where T30 is missing) of the 500 Hz and 1 kHz
/// octaves, s: the reverberation time of the transition frequency.
fn mid_reverberation(r: &Results) -> Option<f64> {
    let t = |c: f64| {
        r.bands
            .iter()
            .find(|b| b.is(Fraction::Octave, c))
            .and_then(|b| b.get(Parameter::T30).or_else(|| b.get(Parameter::T20)))
    };
    Some(0.5 * (t(500.0)? + t(1000.0)?))
}

/// The design and everything tuning.json records.
fn design(job: &TuneJob, inputs: &[Input], results: &Results) -> Result<TuningFile> {
    let resp = &results.response;
    let band = (
        resp.frequency_hz.first().copied().unwrap_or(20.0),
        resp.frequency_hz.last().copied().unwrap_or(20_000.0),
    );
    let range = job.target.range(band, job.range).map_err(|m| {
        let m = format!("the target {}: {}", job.target_file.name, m.message());
        let m = m.replace("--target-range", "--range");
        if job.range.is_some() {
            Error::parameter(m)
        } else {
            Error::input(m)
        }
    })?;
    let transition = match job.volume_m3 {
        None => None,
        Some(v) => {
            let t = mid_reverberation(results).ok_or_else(|| {
                Error::input(format!(
                    "--volume needs the room's reverberation time, but {} has no T30 or T20 in the 500 Hz and 1 kHz octaves; analyse it with bands, or leave out --volume",
                    inputs[0].dir.display()
                ))
            })?;
            Some(TransitionRecord {
                frequency_hz: tuning::transition_hz(t, v),
                t_s: t,
                volume_m3: v,
            })
        }
    };
    let fs = f64::from(results.sample_rate_hz);
    let settings = TuneSettings {
        range_hz: range,
        filters: job.filters,
        max_boost_db: job.max_boost_db,
        max_cut_db: job.max_cut_db,
        q_range: job.q_range,
        sample_rate_hz: fs,
        transition_hz: transition.map(|t| t.frequency_hz),
        above_transition: job.above_transition.unwrap_or(AboveTransition::Broad),
    };
    let t = tuning::design(
        &resp.frequency_hz,
        &resp.magnitude_db,
        &job.target,
        &settings,
    )?;
    let rates = if job.rates.is_empty() {
        vec![fs]
    } else {
        job.rates.clone()
    };
    let coefficients = rates
        .iter()
        .map(|&r| {
            Ok(CoefficientSet {
                sample_rate_hz: r,
                sections: tuning::coefficients(&t.filters, r)?,
            })
        })
        .collect::<Result<Vec<_>>>()?;
    let warnings = warnings(&t, &settings, inputs, results, transition.is_some());
    let below_transition = t.below_transition;
    let fir = match job.fir_taps {
        None => None,
        Some(taps) => Some(fir_record(&t, &job.target, range, fs, taps)?),
    };
    let (lower, upper) = t.tolerance_db.clone().unwrap_or_default();
    Ok(TuningFile {
        schema_version: TUNING_SCHEMA_VERSION,
        settings,
        transition,
        filters: t.filters.clone(),
        coefficient_order: COEFFICIENT_ORDER.into(),
        coefficients,
        response: TuningResponse {
            smoothing: resp.smoothing,
            frequency_hz: t.frequency_hz,
            measured_db: t.measured_db,
            target_db: t.target_db,
            tolerance_lower_db: lower,
            tolerance_upper_db: upper,
            correction_db: t.correction_db,
            predicted_db: t.predicted_db,
        },
        before: t.before,
        after: t.after,
        uncorrectable: t.uncorrectable,
        below_transition,
        fir,
        warnings,
    })
}

/// The FIR of the design's filters and what it predicts (the WAV itself is
/// made again from the filters when the folder is written).
fn fir_record(
    t: &Tuning,
    target: &Target,
    range: (f64, f64),
    fs: f64,
    taps: usize,
) -> Result<crate::folder::schema::FirRecord> {
    let h = tuning::fir(&t.filters, fs, taps);
    let response_db = tuning::fir_response_db(&h, fs, &t.frequency_hz);
    let max_difference_db = response_db
        .iter()
        .zip(&t.correction_db)
        .map(|(a, b)| (a - b).abs())
        .fold(0.0, f64::max);
    let with_fir: Vec<f64> = t
        .measured_db
        .iter()
        .zip(&response_db)
        .map(|(a, b)| a + b)
        .collect();
    let after =
        crate::analysis::target::deviation(&t.frequency_hz, &with_fir, target, range, true)?;
    Ok(crate::folder::schema::FirRecord {
        file: "correction.wav".into(),
        taps,
        sample_rate_hz: fs,
        method: "the impulse response of the filters in cascade (minimum phase, as each cookbook section is), its last eighth faded out with half a Hann window".into(),
        response_db,
        max_difference_db,
        after,
    })
}

/// The warnings of a design.
fn warnings(
    t: &Tuning,
    settings: &TuneSettings,
    inputs: &[Input],
    results: &Results,
    transition: bool,
) -> Warnings {
    let mut w = Warnings::new();
    for r in &t.uncorrectable {
        w.add(
            Code::TuningUncorrectable,
            format!(
                "{:.0}–{:.0} Hz is left uncorrected: {}",
                r.range_hz[0], r.range_hz[1], r.reason
            ),
        );
    }
    for (f, edge, past) in
        tuning::boosts_past_edges(&t.filters, settings.range_hz, settings.sample_rate_hz)
    {
        let side = if edge <= f.frequency_hz {
            "below"
        } else {
            "above"
        };
        w.add(
            Code::TuningBoostPastEdge,
            format!(
                "the {} filter of {:+.1} dB at {:.0} Hz also boosts {side} the range's edge at {:.0} Hz, where nothing was measured ({:+.1} dB half an octave {side} it); if the loudspeaker does not play there, narrow --range to where it does, or add a high-pass in the processor",
                f.kind.words(),
                f.gain_db,
                f.frequency_hz,
                edge,
                past
            ),
        );
    }
    let one_position = inputs.len() == 1 && results.average.is_none();
    if one_position && !results.bands.is_empty() && !transition {
        w.add(
            Code::TuningSinglePosition,
            "one microphone position of a room was tuned across the whole range: above the room's transition frequency a single position's response changes within centimetres; tune a spatial average of several positions, or give --volume so that only broad filters are used there",
        );
    }
    if let Some(share) = t.after.inside_share {
        if share < 0.999 {
            w.add(
                Code::TuningOutsideTolerance,
                format!(
                    "the predicted response stays outside the target's tolerance over {:.1} % of the range (largest deviation {:.1} dB at {:.0} Hz)",
                    100.0 * (1.0 - share),
                    t.after.max_abs_db,
                    t.after.worst_hz
                ),
            );
        }
    }
    w
}

/// filters.txt: the filters as a person types them into a processor, and
/// what the design left alone.
pub fn filters_txt(t: &TuningFile) -> String {
    let mut s = String::new();
    let _ = writeln!(
        s,
        "# gliss tuning: {} filter{} (Audio EQ Cookbook biquads), designed at {} Hz",
        t.filters.len(),
        if t.filters.len() == 1 { "" } else { "s" },
        t.settings.sample_rate_hz
    );
    let _ = writeln!(
        s,
        "# largest deviation from the target {:.1} dB before, {:.1} dB predicted after ({:.0}–{:.0} Hz); set the overall level by ear or meter",
        t.before.max_abs_db, t.after.max_abs_db, t.settings.range_hz.0, t.settings.range_hz.1
    );
    for (k, f) in t.filters.iter().enumerate() {
        let _ = writeln!(
            s,
            "Filter {}: {:<10} {:>8.1} Hz  gain {:+6.1} dB  Q {:.2}",
            k + 1,
            f.kind.words(),
            f.frequency_hz,
            f.gain_db,
            f.q
        );
    }
    for r in &t.uncorrectable {
        let _ = writeln!(
            s,
            "# left alone: {:.0}–{:.0} Hz, {}",
            r.range_hz[0], r.range_hz[1], r.reason
        );
    }
    s
}
