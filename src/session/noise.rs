//! A noise folder: a calibrated recording of the room with the sweep
//! silent, its levels per band (analysis::noise), written through the one
//! folder writer: recording.wav (raw, never replaced), noise.json,
//! noise.csv, the plot, the manifest last.

use std::path::PathBuf;

use crate::analysis::calibration::Calibration;
use crate::analysis::noise::{self, NoiseLevels};
use crate::error::{Error, Result};
use crate::folder::MeasurementFolder;
use crate::folder::schema::{
    FileEntry, FileRole, FolderKind, NoiseManifest, SCHEMA_VERSION, Source,
};
use crate::model::plot_kind::PLOTS_BUILT;
use crate::session::to_json;
use crate::signal::wav::WavData;

/// What `gliss noise` (or `gliss measure --noise`) hands the library.
#[derive(Debug, Clone)]
pub struct NoiseJob {
    /// The noise folder to write.
    pub out: PathBuf,
    /// Replace the derived files of an existing noise folder.
    pub overwrite: bool,
    /// Draw the plot.
    pub plots: bool,
    /// recording.wav as given or captured (written unchanged).
    pub recording_bytes: Vec<u8>,
    /// The same, decoded.
    pub recording: WavData,
    /// The microphone channel, counted from 0.
    pub channel: usize,
    /// The calibration of that channel, with its file entry.
    pub calibration: (Calibration, FileEntry),
    /// Where the recording came from.
    pub source: Source,
    /// The command line that made it.
    pub command_line: Vec<String>,
}

/// What a noise job wrote.
#[derive(Debug, Clone)]
pub struct NoiseOutcome {
    /// The levels.
    pub levels: NoiseLevels,
    /// The files written, manifest first.
    pub files: Vec<String>,
}

/// noise.csv: one row per band (octaves, then one-third octaves) and the
/// totals.
pub fn noise_csv(n: &NoiseLevels) -> Result<Vec<u8>> {
    let mut w = csv::Writer::from_writer(Vec::new());
    let err = |e: csv::Error| Error::input(format!("could not encode CSV: {e}"));
    w.write_record(["center_hz", "fraction", "leq_db_spl"])
        .map_err(err)?;
    for (f, bands) in [("1/1", &n.octaves), ("1/3", &n.thirds)] {
        for b in bands {
            w.write_record([
                format!("{}", b.center_hz),
                f.to_string(),
                format!("{:.1}", b.leq_db),
            ])
            .map_err(err)?;
        }
    }
    w.write_record(["", "A-weighted", &format!("{:.1}", n.laeq_db)])
        .map_err(err)?;
    w.write_record(["", "unweighted", &format!("{:.1}", n.lzeq_db)])
        .map_err(err)?;
    w.into_inner()
        .map_err(|e| Error::input(format!("could not encode CSV: {e}")))
}

/// Analyses the job's recording and writes the noise folder. Every check
/// and the analysis run before anything is written.
pub fn run(job: &NoiseJob) -> Result<NoiseOutcome> {
    let n = job.recording.channels.len();
    let Some(x) = job.recording.channels.get(job.channel) else {
        return Err(Error::parameter(format!(
            "--channel {} does not exist: the recording has {n} channel{}",
            job.channel + 1,
            if n == 1 { "" } else { "s" }
        )));
    };
    let fs = f64::from(job.recording.sample_rate_hz);
    let levels = noise::analyze(x, fs, &job.calibration.0)?;
    let folder = MeasurementFolder::check(
        &job.out,
        job.overwrite,
        &[("recording.wav", &job.recording_bytes)],
    )?;
    folder.create()?;
    let mut files = vec![FileEntry {
        name: "recording.wav".into(),
        role: FileRole::Raw,
        sha256: folder.write_raw("recording.wav", &job.recording_bytes)?,
    }];
    files.push(folder.derived_entry("noise.json", &to_json(&levels)?)?);
    files.push(folder.derived_entry("noise.csv", &noise_csv(&levels)?)?);
    let plots = job.plots && PLOTS_BUILT;
    #[cfg(not(feature = "plots"))]
    let _ = plots;
    #[cfg(feature = "plots")]
    if plots {
        let kind = crate::model::PlotKind::Noise;
        let title = job.source.description.clone();
        files.push(folder.draw(kind.file(), |p| {
            crate::plot::noise::noise_png(p, &title, &levels)
        })?);
    }
    let manifest = NoiseManifest {
        schema_version: SCHEMA_VERSION,
        tool: "gliss".into(),
        tool_version: env!("CARGO_PKG_VERSION").into(),
        created_utc: humantime::format_rfc3339_seconds(std::time::SystemTime::now()).to_string(),
        complete: true,
        kind: FolderKind::Noise,
        command_line: job.command_line.clone(),
        source: job.source.clone(),
        sample_rate_hz: job.recording.sample_rate_hz,
        channel: job.channel + 1,
        calibration: job.calibration.1.clone(),
        files,
    };
    folder.write_derived("manifest.json", &to_json(&manifest)?)?;
    Ok(NoiseOutcome {
        levels,
        files: std::iter::once("manifest.json".to_string())
            .chain(manifest.files.into_iter().map(|f| f.name))
            .collect(),
    })
}
