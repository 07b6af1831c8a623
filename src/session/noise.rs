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

/// The longest noise `gliss measure --noise` records, s.
pub const MAX_RECORD_S: f64 = 600.0;

/// How `gliss measure --noise S` records the room's noise through a
/// device.
#[derive(Debug, Clone)]
pub struct NoiseRecording {
    /// The noise folder to write.
    pub out: PathBuf,
    /// Draw the plot.
    pub plots: bool,
    /// Seconds to record.
    pub seconds: f64,
    /// The microphone input, counted from 0.
    pub channel: usize,
    /// The calibration of that input, with its file entry.
    pub calibration: (Calibration, FileEntry),
    /// Sample rate, Hz.
    pub sample_rate_hz: u32,
    /// "virtual" or "soundcard".
    pub source_kind: String,
    /// The command line that made it.
    pub command_line: Vec<String>,
}

/// Records `r.seconds` of the room through `device` with every output
/// silent, then writes the noise folder of [`run`] from every input
/// channel as captured (32-bit float). A capture that lost samples, was
/// stopped or failed is refused (nothing written): a noise level over a
/// broken recording would be a guess.
pub fn record(
    device: &mut dyn crate::audio::PlayRecord,
    r: &NoiseRecording,
    stop: &std::sync::atomic::AtomicBool,
    progress: &mut dyn FnMut(crate::audio::Progress),
) -> Result<NoiseOutcome> {
    // the capture is held in memory until it is written: ten minutes of
    // every input at 48 kHz is a few hundred megabytes at most
    if !(noise::MIN_DURATION_S..=MAX_RECORD_S).contains(&r.seconds) {
        return Err(Error::parameter(format!(
            "--noise {} s is out of range; record {} s to {MAX_RECORD_S} s of the room (30 s or more for a steady noise; for longer, record with any recorder and use gliss noise)",
            r.seconds,
            noise::MIN_DURATION_S
        )));
    }
    if r.channel >= device.input_channels() {
        return Err(Error::parameter(format!(
            "--channel {} does not exist: the device records {} input(s)",
            r.channel + 1,
            device.input_channels()
        )));
    }
    device.check_rate(r.sample_rate_hz)?;
    let silence = vec![0.0; (r.seconds * f64::from(r.sample_rate_hz)).round() as usize];
    let playback = crate::audio::Playback {
        signal: &silence,
        sample_rate_hz: r.sample_rate_hz,
        output_channels: &[],
        stop,
    };
    let capture = device.play_record(&playback, &mut crate::audio::NoSink, progress)?;
    if capture.lost_frames > 0
        || capture.interruptions > 0
        || capture.stopped
        || capture.fault.is_some()
    {
        let why = if capture.problems.is_empty() {
            "the recording was interrupted".to_string()
        } else {
            capture.problems.join("; ")
        };
        return Err(Error::new(
            crate::error::ErrorKind::Device,
            format!(
                "the noise recording is not whole ({why}); nothing was written: record it again"
            ),
        ));
    }
    let channels: Vec<&[f64]> = capture.channels.iter().map(Vec::as_slice).collect();
    let bytes = crate::signal::wav::encode_wav(
        &channels,
        capture.sample_rate_hz,
        crate::signal::wav::SampleEncoding::Float,
    );
    let job = NoiseJob {
        out: r.out.clone(),
        overwrite: false,
        plots: r.plots,
        recording_bytes: bytes,
        recording: WavData {
            sample_rate_hz: capture.sample_rate_hz,
            encoding: crate::signal::wav::SampleEncoding::Float,
            // as the WAV holds them (32-bit float)
            channels: capture
                .channels
                .iter()
                .map(|c| c.iter().map(|&v| f64::from(v as f32)).collect())
                .collect(),
        },
        channel: r.channel,
        calibration: r.calibration.clone(),
        source: Source {
            kind: r.source_kind.clone(),
            description: format!(
                "{} s of the room's noise through {}, outputs silent",
                r.seconds,
                device.describe()
            ),
            recording_path: None,
            sweep_path: None,
        },
        command_line: r.command_line.clone(),
    };
    run(&job)
}
