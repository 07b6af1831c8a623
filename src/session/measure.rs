//! A measurement through a device: the folder is made first, the sweep is
//! written, the recording goes to disk while it is captured, and the
//! manifest says "incomplete" until the analysis has finished. A stop, a
//! fault or lost samples leave the raw files and an honest manifest.

use std::fs::{File, OpenOptions};
use std::io::BufWriter;
use std::path::{Path, PathBuf};
use std::sync::atomic::AtomicBool;

use crate::analysis::AnalysisConfig;
use crate::audio::{PlayRecord, Playback, Progress, RawSink};
use crate::error::{Error, ErrorKind, Result};
use crate::session::folder::{self, MeasurementFolder};
use crate::session::records::{
    FileEntry, Manifest, MeasurementRecord, SCHEMA_VERSION, Settings, Source, TakeRecord,
};
use crate::session::{Job, Outcome, analyse_into, to_json};
use crate::signal::sweep::SweepDesign;
use crate::signal::wav::{SampleEncoding, WavData, decode_wav, encode_wav};

/// Silence between repeated sweeps, s (the sweep's own tail holds the
/// decay; this keeps one sweep's decay out of the next one's start).
pub const GAP_S: f64 = 0.5;

/// Writes the raw recording while it is captured: 32-bit float WAV,
/// created new (never over an existing file), its header brought up to
/// date about twice a second so that a crash leaves a readable file.
pub struct RawWavSink {
    path: PathBuf,
    writer: Option<hound::WavWriter<BufWriter<File>>>,
    frames_since_flush: usize,
    flush_every: usize,
    channels: usize,
}

impl RawWavSink {
    /// A sink that will create `path`.
    pub fn new(path: &Path) -> Self {
        RawWavSink {
            path: path.to_path_buf(),
            writer: None,
            frames_since_flush: 0,
            flush_every: 24_000,
            channels: 1,
        }
    }

    fn fail(&self, e: hound::Error) -> Error {
        Error::new(
            ErrorKind::Io,
            format!("could not write {}: {e}", self.path.display()),
        )
    }
}

impl RawSink for RawWavSink {
    fn begin(&mut self, channels: usize, sample_rate_hz: u32) -> Result<()> {
        let file = OpenOptions::new()
            .write(true)
            .create_new(true)
            .open(&self.path)
            .map_err(|e| Error::io("create", &self.path, &e))?;
        let spec = hound::WavSpec {
            channels: channels as u16,
            sample_rate: sample_rate_hz,
            bits_per_sample: 32,
            sample_format: hound::SampleFormat::Float,
        };
        let w = hound::WavWriter::new(BufWriter::new(file), spec).map_err(|e| self.fail(e))?;
        self.writer = Some(w);
        self.channels = channels.max(1);
        self.flush_every = (sample_rate_hz / 2) as usize;
        Ok(())
    }

    fn write(&mut self, interleaved: &[f32]) -> Result<()> {
        let Some(w) = self.writer.as_mut() else {
            return Err(Error::new(
                ErrorKind::Io,
                "the recording was written before it was begun",
            ));
        };
        for &v in interleaved {
            if let Err(e) = w.write_sample(v) {
                let path = self.path.display().to_string();
                return Err(Error::new(
                    ErrorKind::Io,
                    format!("could not write {path}: {e}"),
                ));
            }
        }
        self.frames_since_flush += interleaved.len() / self.channels;
        if self.frames_since_flush >= self.flush_every {
            self.frames_since_flush = 0;
            if let Err(e) = w.flush() {
                return Err(self.fail(e));
            }
        }
        Ok(())
    }

    fn finish(&mut self) -> Result<()> {
        if let Some(w) = self.writer.take() {
            let mut inner = w.finalize().map_err(|e| self.fail(e));
            if inner.is_ok() {
                if let Ok(f) = OpenOptions::new().write(true).open(&self.path) {
                    inner = f.sync_all().map_err(|e| Error::io("write", &self.path, &e));
                }
            }
            inner?;
        }
        Ok(())
    }
}

impl Drop for RawWavSink {
    fn drop(&mut self) {
        // an error path that skipped finish still leaves a proper header
        let _ = self.finish();
    }
}

/// Everything a measurement needs besides the device.
#[derive(Debug, Clone)]
pub struct MeasureJob {
    /// The new measurement folder.
    pub out: PathBuf,
    /// Draw PNG plots.
    pub plots: bool,
    /// The microphone input, 0-based.
    pub channel: usize,
    /// The loopback reference input, 0-based.
    pub reference: Option<usize>,
    /// Output channels that play the sweep, 0-based.
    pub output_channels: Vec<usize>,
    /// Sweeps to play and average.
    pub repeat: usize,
    /// The sweep.
    pub design: SweepDesign,
    /// Analysis settings.
    pub config: AnalysisConfig,
    /// A short title for plots.
    pub title: String,
    /// The command line, for the manifest.
    pub command_line: Vec<String>,
    /// The microphone correction file, if any.
    pub mic_correction: Option<FileEntry>,
    /// The calibration and its file, if any.
    pub calibration: Option<(crate::analysis::calibration::Calibration, FileEntry)>,
    /// The drive voltage and distance for a sensitivity, if any.
    pub drive: Option<crate::analysis::calibration::Drive>,
    /// "soundcard" or "virtual".
    pub source_kind: String,
    /// A target curve to compare the response with.
    pub target: Option<super::TargetJob>,
}

/// The signal played: `repeat` sweeps (each with its tail) with `gap`
/// frames of silence between them. Returns it and the period in frames.
pub fn program(stimulus: &[f64], repeat: usize, gap: usize) -> (Vec<f64>, usize) {
    let period = stimulus.len() + gap;
    let mut out = Vec::with_capacity(period * repeat);
    for k in 0..repeat {
        out.extend_from_slice(stimulus);
        if k + 1 < repeat {
            out.resize(out.len() + gap, 0.0);
        }
    }
    (out, period)
}

/// Where each take lies in a recording of `recorded` frames whose signal
/// started at `start`: `repeat` takes one `period` apart, all of the same
/// length (at most a period, at least `min_len`). `None` when the
/// recording does not hold every take.
pub fn take_spans(
    recorded: usize,
    start: usize,
    repeat: usize,
    period: usize,
    min_len: usize,
) -> Option<Vec<TakeRecord>> {
    let last = start + (repeat - 1) * period;
    let len = recorded.checked_sub(last)?;
    let len = if repeat > 1 { len.min(period) } else { len };
    if len < min_len {
        return None;
    }
    Some(
        (0..repeat)
            .map(|k| TakeRecord {
                start_frame: start + k * period,
                frames: len,
            })
            .collect(),
    )
}

/// The synchronous average of the takes of every channel (each take is
/// the same sweep at the same place, so the signal adds coherently and
/// uncorrelated noise falls by 10·log10 N dB).
pub fn synchronous_average(channels: &[Vec<f64>], takes: &[TakeRecord]) -> Vec<Vec<f64>> {
    let n = takes.len().max(1) as f64;
    channels
        .iter()
        .map(|c| {
            let len = takes.first().map_or(0, |t| t.frames);
            let mut acc = vec![0.0; len];
            for t in takes {
                for (a, v) in acc
                    .iter_mut()
                    .zip(&c[t.start_frame..t.start_frame + t.frames])
                {
                    *a += v;
                }
            }
            acc.iter_mut().for_each(|a| *a /= n);
            acc
        })
        .collect()
}

fn manifest(
    m: &MeasureJob,
    device: &str,
    files: Vec<FileEntry>,
    rec: Option<MeasurementRecord>,
    problems: Vec<String>,
    channels: usize,
) -> Manifest {
    Manifest {
        schema_version: SCHEMA_VERSION,
        tool: "gliss".into(),
        tool_version: env!("CARGO_PKG_VERSION").into(),
        created_utc: humantime::format_rfc3339_seconds(std::time::SystemTime::now()).to_string(),
        complete: false,
        command_line: m.command_line.clone(),
        source: Source {
            kind: m.source_kind.clone(),
            description: device.to_string(),
            recording_path: None,
            sweep_path: None,
        },
        sample_rate_hz: m.design.params.sample_rate_hz,
        channel: m.channel + 1,
        recording_channels: channels,
        recording_encoding: SampleEncoding::Float.describe(),
        sweep: m.design.clone(),
        settings: Settings {
            smoothing: m.config.smoothing,
            plots: m.plots && crate::model::plot_kind::PLOTS_BUILT,
            harmonics: m.config.harmonics,
            bands: m.config.bands,
            mic_correction: m.mic_correction.clone(),
            calibration: m.calibration.as_ref().map(|c| c.1.clone()),
            volts_per_fs: m.drive.map(|d| d.volts_per_fs),
            distance_m: m.drive.and_then(|d| d.distance_m),
            target: m.target.as_ref().map(|t| t.file.clone()),
            target_range_hz: m.target.as_ref().and_then(|t| t.range.map(|r| [r.0, r.1])),
            target_absolute: m.target.as_ref().is_some_and(|t| t.absolute),
        },
        files,
        measurement: rec,
        problems,
        kind: None,
        inputs: Vec::new(),
    }
}

/// Checks what can be checked before anything is played or written.
pub fn check(m: &MeasureJob, device: &dyn PlayRecord) -> Result<()> {
    device.check_rate(m.design.params.sample_rate_hz)?;
    let ins = device.input_channels();
    let outs = device.output_channels();
    let plural = |n: usize| if n == 1 { "" } else { "s" };
    if m.channel >= ins {
        return Err(Error::new(
            ErrorKind::Device,
            format!(
                "--channel {} does not exist: the input has {ins} channel{}",
                m.channel + 1,
                plural(ins)
            ),
        ));
    }
    if let Some(r) = m.reference {
        if r >= ins {
            return Err(Error::new(
                ErrorKind::Device,
                format!(
                    "--reference {} does not exist: the input has {ins} channel{}",
                    r + 1,
                    plural(ins)
                ),
            ));
        }
        if r == m.channel {
            return Err(Error::parameter(
                "--reference must be another input than --channel (the microphone)",
            ));
        }
    }
    for &o in &m.output_channels {
        if o >= outs {
            return Err(Error::new(
                ErrorKind::Device,
                format!(
                    "--output-channel {} does not exist: the output has {outs} channel{}",
                    o + 1,
                    plural(outs)
                ),
            ));
        }
    }
    if m.repeat == 0 {
        return Err(Error::parameter("--repeat must be at least 1"));
    }
    if let Some(t) = &m.target {
        t.resolve_range((m.design.params.start_hz, m.design.params.end_hz))?;
    }
    MeasurementFolder::check(&m.out, false, &[])?;
    Ok(())
}

/// Plays and records through `device` into a new folder, then analyses.
/// `progress` hears about the capture; `stop` ends it early.
pub fn measure(
    device: &mut dyn PlayRecord,
    m: &MeasureJob,
    stop: &AtomicBool,
    progress: &mut dyn FnMut(Progress),
) -> Result<Outcome> {
    check(m, device)?;
    let folder = MeasurementFolder::check(&m.out, false, &[])?;
    let rate = m.design.params.sample_rate_hz;
    let fs = f64::from(rate);
    let stimulus = m.design.generate();
    let stimulus_bytes = encode_wav(&[&stimulus], rate, SampleEncoding::Float);
    let description = device.describe();
    folder.create()?;
    let stim_hash = folder.write_raw("stimulus.wav", &stimulus_bytes)?;
    let raw = |name: &str, sha256: String| FileEntry {
        name: name.into(),
        role: crate::folder::schema::FileRole::Raw,
        sha256,
    };
    let write_manifest = |man: &Manifest| folder.write_derived("manifest.json", &to_json(man)?);
    let mut files = vec![raw("stimulus.wav", stim_hash)];
    write_manifest(&manifest(
        m,
        &description,
        files.clone(),
        None,
        vec!["the measurement is in progress (or was cut off before it finished)".into()],
        device.input_channels(),
    ))?;

    let gap = if m.repeat > 1 {
        (GAP_S * fs).round() as usize
    } else {
        0
    };
    let (signal, period) = program(&stimulus, m.repeat, gap);
    let rec_path = folder.dir().join("recording.wav");
    let mut sink = RawWavSink::new(&rec_path);
    let played = device.play_record(
        &Playback {
            signal: &signal,
            sample_rate_hz: rate,
            output_channels: &m.output_channels,
            stop,
        },
        &mut sink,
        progress,
    );
    let finished = sink.finish();
    let hash_of_recording = || -> Result<Option<(Vec<u8>, String)>> {
        if !rec_path.exists() {
            return Ok(None);
        }
        let bytes = std::fs::read(&rec_path).map_err(|e| Error::io("read", &rec_path, &e))?;
        let h = folder::sha256_hex(&bytes);
        Ok(Some((bytes, h)))
    };
    let kept = |files: &mut Vec<FileEntry>| -> Result<Option<Vec<u8>>> {
        Ok(hash_of_recording()?.map(|(b, h)| {
            files.push(raw("recording.wav", h));
            b
        }))
    };
    let capture = match played.and_then(|c| finished.map(|_| c)) {
        Ok(c) => c,
        Err(e) => {
            kept(&mut files)?;
            write_manifest(&manifest(
                m,
                &description,
                files,
                None,
                vec![e.message().to_string()],
                device.input_channels(),
            ))?;
            return Err(Error::new(
                e.kind(),
                format!(
                    "{}; what was recorded is kept in {} (manifest marked incomplete)",
                    e.message(),
                    folder.dir().display()
                ),
            ));
        }
    };
    let recording_bytes = kept(&mut files)?.unwrap_or_default();
    let chans = capture.channels.len();
    let spans = take_spans(
        capture.channels.first().map_or(0, Vec::len),
        capture.signal_start,
        m.repeat,
        period,
        m.design.sweep_samples,
    );
    let delay_note = if m.reference.is_some() {
        "the loopback reference channel: the interface's own latency is divided out".to_string()
    } else {
        format!(
            "the moment the sweep was handed to the output ({}); the delay includes the interface's latency",
            if capture.signal_start == 0 {
                "frame 0 of the recording".to_string()
            } else {
                format!(
                    "frame {} of the recording, known to about one buffer",
                    capture.signal_start
                )
            }
        )
    };
    let mut record = MeasurementRecord {
        device: description.clone(),
        stream: capture.stream.clone(),
        output_channels: m.output_channels.iter().map(|c| c + 1).collect(),
        reference_channel: m.reference.map(|r| r + 1),
        repeat: m.repeat,
        gap_s: gap as f64 / fs,
        takes: spans.clone().unwrap_or_default(),
        lost_frames: capture.lost_frames,
        input_peaks_dbfs: capture
            .channels
            .iter()
            .map(|c| 20.0 * c.iter().fold(1e-12f64, |m, v| m.max(v.abs())).log10())
            .collect(),
        delay_note,
    };
    let mut problems = capture.problems.clone();
    if let Some(f) = &capture.fault {
        problems.push(f.clone());
    }
    let invalid = capture.stopped || capture.fault.is_some() || capture.lost_frames > 0;
    if !invalid && spans.is_none() {
        problems.push("the recording does not hold every sweep and its tail".into());
    }
    if invalid || spans.is_none() {
        let why = if let Some(f) = &capture.fault {
            f.clone()
        } else if capture.stopped {
            "the measurement was stopped".to_string()
        } else if capture.lost_frames > 0 {
            "samples were lost (an overrun or underrun), so the measurement is invalid; close other programs, use a larger --buffer, and measure again".to_string()
        } else {
            "the recording is too short".to_string()
        };
        record.takes = spans.unwrap_or_default();
        write_manifest(&manifest(
            m,
            &description,
            files,
            Some(record),
            problems.clone(),
            chans,
        ))?;
        let others: Vec<&String> = problems.iter().filter(|p| **p != why).collect();
        let detail = if others.is_empty() {
            String::new()
        } else {
            format!(
                " ({})",
                others
                    .iter()
                    .map(|s| s.as_str())
                    .collect::<Vec<_>>()
                    .join("; ")
            )
        };
        return Err(Error::new(
            ErrorKind::Device,
            format!(
                "{why}; the raw recording is kept in {} and its manifest is marked incomplete{detail}",
                folder.dir().display()
            ),
        ));
    }
    let spans = spans.unwrap_or_default();
    // analyse what is on disk, exactly as `analyze` would read it
    let on_disk = decode_wav(&recording_bytes)
        .map_err(|e| Error::input(format!("the recording just written {e}")))?;
    let averaged = synchronous_average(&on_disk.channels, &spans);
    let job = Job {
        out: m.out.clone(),
        overwrite: false,
        plots: m.plots,
        recording_bytes,
        recording: WavData {
            sample_rate_hz: rate,
            encoding: SampleEncoding::Float,
            channels: averaged,
        },
        channel: m.channel,
        stimulus: decode_wav(&stimulus_bytes)
            .map_err(|e| Error::input(format!("the sweep just written {e}")))?,
        stimulus_bytes,
        design: m.design.clone(),
        config: m.config.clone(),
        source: Source {
            kind: m.source_kind.clone(),
            description,
            recording_path: None,
            sweep_path: None,
        },
        title: m.title.clone(),
        command_line: m.command_line.clone(),
        mic_correction: m.mic_correction.clone(),
        calibration: m.calibration.clone(),
        reference: m.reference,
        measurement: Some(record),
        drive: m.drive,
        target: m.target.clone(),
    };
    let mut outcome = analyse_into(&job, &folder)?;
    // clipping on any input used, by name (the analysis looks at the
    // microphone only)
    if let Some(r) = m.reference {
        let peak = on_disk.channels[r]
            .iter()
            .fold(0.0f64, |a, v| a.max(v.abs()));
        if peak >= crate::analysis::CLIP_LEVEL {
            outcome.analysis.warnings.add(
                crate::model::Code::ReferenceClips,
                format!(
                    "the reference input {} clips (peak {:.2} dBFS); lower the level of the loopback",
                    r + 1,
                    20.0 * peak.log10()
                ),
            );
        }
    }
    Ok(outcome)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn takes_lie_one_period_apart_and_share_a_length() {
        let (p, period) = program(&[1.0, 2.0, 3.0], 3, 2);
        assert_eq!(
            p,
            vec![
                1.0, 2.0, 3.0, 0.0, 0.0, 1.0, 2.0, 3.0, 0.0, 0.0, 1.0, 2.0, 3.0
            ]
        );
        assert_eq!(period, 5);
        // recorded with 4 frames of latency before the signal, 3 after
        let spans = take_spans(4 + p.len() + 3, 4, 3, period, 3).unwrap();
        assert_eq!(
            spans.iter().map(|t| t.start_frame).collect::<Vec<_>>(),
            vec![4, 9, 14]
        );
        assert!(spans.iter().all(|t| t.frames == 5));
        // a recording cut inside the last take does not hold every take
        assert!(take_spans(4 + 11, 4, 3, period, 3).is_none());
    }

    #[test]
    fn the_average_of_aligned_takes_keeps_the_signal() {
        let sig = [0.5, -0.25, 1.0];
        let (p, period) = program(&sig, 4, 1);
        let ch = vec![p.clone()];
        let spans = take_spans(p.len(), 0, 4, period, 3).unwrap();
        let avg = synchronous_average(&ch, &spans);
        assert_eq!(&avg[0][..3], &sig);
    }
}
