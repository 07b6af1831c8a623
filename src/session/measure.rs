//! A measurement through a device: the folder is made first, the sweep is
//! written, the recording goes to disk while it is captured, and the
//! manifest says "incomplete" until the analysis has finished. A stop, a
//! fault or lost samples leave the raw files and an honest manifest.

use std::fs::{File, OpenOptions};
use std::io::BufWriter;
use std::path::{Path, PathBuf};
use std::sync::atomic::AtomicBool;

use crate::analysis::AnalysisConfig;
use crate::audio::{Capture, PlayRecord, Playback, Progress, RawSink};
use crate::error::{Error, ErrorKind, Result};
use crate::folder::schema::{
    FileEntry, Manifest, MeasurementRecord, SCHEMA_VERSION, Source, TakeRecord,
};
use crate::folder::{self, MeasurementFolder};
use crate::model::Code;
use crate::session::{Job, Outcome, analyse_into, settings_record, to_json};
use crate::signal::sweep::SweepDesign;
use crate::signal::wav::{SampleEncoding, WavData, decode_wav, encode_wav};

/// Silence between repeated sweeps, s (the sweep's own tail holds the
/// decay; this keeps one sweep's decay out of the next one's start).
pub const GAP_S: f64 = 0.5;

/// How often the raw recording's header is brought up to date, s: a
/// header rewrite (one seek, 44 bytes) and a write of the buffered data
/// twenty times a second cost nothing next to the audio itself.
pub const FLUSH_S: f64 = 0.05;

/// Writes the raw recording while it is captured: 32-bit float WAV,
/// created new (never over an existing file), its header brought up to
/// date every [`FLUSH_S`] so that a crash (even `kill -9`) leaves a
/// readable file whose header lags its data by no more than that and one
/// block.
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
            flush_every: 2_400,
            channels: 1,
        }
    }

    fn fail(&self, e: hound::Error) -> Error {
        match e {
            // a full disk says so, and what is kept
            hound::Error::IoError(io) => Error::io("write", &self.path, &io),
            e => Error::new(
                ErrorKind::Io,
                format!("could not write {}: {e}", self.path.display()),
            ),
        }
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
        self.flush_every = ((FLUSH_S * f64::from(sample_rate_hz)) as usize).max(1);
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
                return Err(self.fail(e));
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
    /// How the phase plot shows the phase (`--phase-plot`).
    pub phase_view: crate::model::plot_kind::PhaseView,
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
    /// An impedance measurement through a sense resistor: `reference` is
    /// then the input at the amplifier side of the resistor (not a
    /// loopback) and `channel` the input across the driver.
    pub impedance: Option<super::impedance::ImpedanceJob>,
    /// Where around a loudspeaker it is measured (`--orbit`, `--angle`).
    pub position: Option<crate::model::Position>,
}

/// The jobs of `gliss measure --each-output`: `base` once per output of
/// `each` (0-based), into `base.out/output-N`, the sweep on that output
/// and on `base.output_channels` (the loopback's) every time; the title
/// names the output.
pub fn each_output_jobs(base: &MeasureJob, each: &[usize]) -> Vec<MeasureJob> {
    each.iter()
        .map(|&o| {
            let mut j = base.clone();
            j.out = base.out.join(format!("output-{}", o + 1));
            j.output_channels = std::iter::once(o)
                .chain(base.output_channels.iter().copied().filter(|&c| c != o))
                .collect();
            j.title = format!("{}, output {}", base.title, o + 1);
            j
        })
        .collect()
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

/// The manifest of a measurement that has no analysis (yet): while it
/// runs, and when it ends without one. `complete` is false and `problems`
/// says why; `channels` is the number of recorded inputs.
fn incomplete_manifest(
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
        source: source(m, device),
        sample_rate_hz: m.design.params.sample_rate_hz,
        channel: m.channel + 1,
        recording_channels: channels,
        recording_encoding: SampleEncoding::Float.describe(),
        sweep: m.design.clone(),
        settings: settings_record(
            &m.config,
            m.plots && crate::model::plot_kind::PLOTS_BUILT,
            m.mic_correction.as_ref(),
            m.calibration.as_ref().map(|c| &c.1),
            m.drive,
            m.target.as_ref(),
        ),
        files,
        measurement: rec,
        problems,
        kind: None,
        inputs: Vec::new(),
    }
}

/// Where a measurement's recording came from: the device, as it describes
/// itself.
fn source(m: &MeasureJob, device: &str) -> Source {
    Source {
        kind: m.source_kind.clone(),
        description: device.to_string(),
        recording_path: None,
        sweep_path: None,
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
    check_space(m, ins)
}

/// Room the analysis of a measurement takes besides its raw files and
/// impulse response: results.json and the tables (about 0.3 MB measured on
/// a 48 kHz measurement, with a margin), bytes.
const TABLES_ROOM: u64 = 500_000;

/// Room its plots take (about 1.5 to 2 MB measured for a loudspeaker or a
/// room, with a margin), bytes.
const PLOTS_ROOM: u64 = 2_500_000;

/// The bytes a measurement writes, about: (recording, sweep, analysis).
/// The recording is 32-bit float on every input for the whole program and
/// a second more (the device's start and latency); the sweep and the
/// impulse response are 32-bit float, one channel.
pub fn space_needed(m: &MeasureJob, input_channels: usize) -> (u64, u64, u64) {
    let p = &m.design.params;
    let frames = (m.design.total_samples as u64 + (GAP_S * f64::from(p.sample_rate_hz)) as u64)
        * m.repeat as u64
        + u64::from(p.sample_rate_hz);
    let recording = frames * input_channels.max(1) as u64 * 4 + 44;
    let sweep = m.design.total_samples as u64 * 4 + 44;
    let plots = if m.plots { PLOTS_ROOM } else { 0 };
    (recording, sweep, sweep + TABLES_ROOM + plots)
}

/// Refuses, before anything is played, a measurement whose files would
/// not fit on the disk that is to hold them: found out halfway, it would
/// have to be played again.
fn check_space(m: &MeasureJob, input_channels: usize) -> Result<()> {
    let existing = m
        .out
        .ancestors()
        .find(|d| d.is_dir())
        .unwrap_or(Path::new("."));
    let Ok(free) = fs4::available_space(existing) else {
        return Ok(());
    };
    let (recording, sweep, analysis) = space_needed(m, input_channels);
    let needed = recording + sweep + analysis;
    if free >= needed {
        return Ok(());
    }
    let b = crate::model::units::bytes;
    Err(Error::new(
        ErrorKind::DiskFull,
        format!(
            "the disk that would hold {} has {} free, and this measurement needs about {} (the recording {}, the sweep {}, the analysis and plots about {}): free space or choose another --out; nothing was played",
            m.out.display(),
            b(free),
            b(needed),
            b(recording),
            b(sweep),
            b(analysis)
        ),
    ))
}

/// Plays and records through `device` into a new folder, then analyses.
/// `progress` hears about the capture; `stop` ends it early.
///
/// The steps: check everything that can be checked; make the folder with
/// the sweep and a manifest marked in progress; play and record, the raw
/// recording going to disk as it arrives; keep the recording in the
/// manifest whatever happened; refuse (keeping the files) a capture that
/// failed, was stopped, lost samples or is too short; otherwise average
/// the takes and analyse them into the folder.
pub fn measure(
    device: &mut dyn PlayRecord,
    m: &MeasureJob,
    stop: &AtomicBool,
    progress: &mut dyn FnMut(Progress),
) -> Result<Outcome> {
    check(m, device)?;
    let started = start_folder(m, device)?;
    let gap = gap_frames(m.repeat, m.design.params.sample_rate_hz);
    let (signal, period) = program(&started.stimulus, m.repeat, gap);
    let captured = capture(device, m, &started, &signal, stop, progress);
    let mut files = started.files.clone();
    let recording_bytes = keep_recording(&started.folder, &mut files)?;
    let capture = match captured {
        Ok(c) => c,
        Err(e) => return Err(keep_failed_capture(m, &started, files, &e)?),
    };
    let spans = take_spans(
        capture.channels.first().map_or(0, Vec::len),
        capture.signal_start,
        m.repeat,
        period,
        m.design.sweep_samples,
    );
    let record = measurement_record(
        m,
        &started.description,
        &capture,
        gap,
        spans.clone().unwrap_or_default(),
    );
    let holds_every_take = spans.is_some();
    if let Some(why) = invalid_reason(&capture, holds_every_take) {
        let problems = capture_problems(&capture, holds_every_take);
        let kept = incomplete_manifest(
            m,
            &started.description,
            files,
            Some(record),
            problems.clone(),
            capture.channels.len(),
        );
        write_manifest(&started.folder, &kept)?;
        return Err(invalid_capture_error(&why, &problems, started.folder.dir()));
    }
    let spans = spans.unwrap_or_default();
    analyse_takes(
        m,
        started,
        recording_bytes.unwrap_or_default(),
        &spans,
        record,
    )
}

/// The folder made, its sweep written, before anything is played.
struct Started {
    /// The new measurement folder (made).
    folder: MeasurementFolder,
    /// The device as it describes itself.
    description: String,
    /// The sweep as generated.
    stimulus: Vec<f64>,
    /// stimulus.wav as written.
    stimulus_bytes: Vec<u8>,
    /// The raw files written so far (stimulus.wav).
    files: Vec<FileEntry>,
    /// The device's input channels, for a manifest written before any
    /// recording.
    input_channels: usize,
}

/// Folder first: makes the folder, writes stimulus.wav once and a manifest
/// that says the measurement is in progress, so that a crash from here on
/// leaves an honest folder.
fn start_folder(m: &MeasureJob, device: &dyn PlayRecord) -> Result<Started> {
    let folder = MeasurementFolder::check(&m.out, false, &[])?;
    let rate = m.design.params.sample_rate_hz;
    let stimulus = m.design.generate();
    let stimulus_bytes = encode_wav(&[&stimulus], rate, SampleEncoding::Float);
    let description = device.describe();
    folder.create()?;
    let stim_hash = folder.write_raw("stimulus.wav", &stimulus_bytes)?;
    // from here on the folder holds a measurement's raw files, which a
    // failure never takes away
    folder.keep_on_failure();
    let files = vec![raw_entry("stimulus.wav", stim_hash)];
    write_manifest(
        &folder,
        &incomplete_manifest(
            m,
            &description,
            files.clone(),
            None,
            vec![IN_PROGRESS.into()],
            device.input_channels(),
        ),
    )?;
    Ok(Started {
        folder,
        description,
        stimulus,
        stimulus_bytes,
        files,
        input_channels: device.input_channels(),
    })
}

/// The problem an in-progress manifest names (it stays if the measurement
/// never finishes).
const IN_PROGRESS: &str = "the measurement is in progress (or was cut off before it finished)";

/// The manifest entry of a raw file.
fn raw_entry(name: &str, sha256: String) -> FileEntry {
    FileEntry {
        name: name.into(),
        role: crate::folder::schema::FileRole::Raw,
        sha256,
    }
}

/// Writes (or replaces) manifest.json.
fn write_manifest(folder: &MeasurementFolder, man: &Manifest) -> Result<()> {
    folder.write_derived("manifest.json", &to_json(man)?)
}

/// The silence between sweeps in frames: [`GAP_S`] when more than one
/// sweep is played, none for one.
fn gap_frames(repeat: usize, sample_rate_hz: u32) -> usize {
    if repeat > 1 {
        (GAP_S * f64::from(sample_rate_hz)).round() as usize
    } else {
        0
    }
}

/// Plays `signal` and records through the device, the recording written
/// to recording.wav while it is captured. An error of the device or of the
/// file, whichever came first.
fn capture(
    device: &mut dyn PlayRecord,
    m: &MeasureJob,
    started: &Started,
    signal: &[f64],
    stop: &AtomicBool,
    progress: &mut dyn FnMut(Progress),
) -> Result<Capture> {
    let mut sink = RawWavSink::new(&started.folder.dir().join("recording.wav"));
    let played = device.play_record(
        &Playback {
            signal,
            sample_rate_hz: m.design.params.sample_rate_hz,
            output_channels: &m.output_channels,
            stop,
        },
        &mut sink,
        progress,
    );
    let finished = sink.finish();
    played.and_then(|c| finished.map(|_| c))
}

/// Adds recording.wav to `files` with its hash if it was written, and
/// returns its bytes (`None` when nothing was recorded).
fn keep_recording(
    folder: &MeasurementFolder,
    files: &mut Vec<FileEntry>,
) -> Result<Option<Vec<u8>>> {
    let path = folder.dir().join("recording.wav");
    if !path.exists() {
        return Ok(None);
    }
    let bytes = std::fs::read(&path).map_err(|e| Error::io("read", &path, &e))?;
    files.push(raw_entry("recording.wav", folder::sha256_hex(&bytes)));
    Ok(Some(bytes))
}

/// A capture that ended in an error: the manifest keeps what was recorded
/// and names the error; returns the error to report, which says where the
/// files are.
fn keep_failed_capture(
    m: &MeasureJob,
    started: &Started,
    files: Vec<FileEntry>,
    e: &Error,
) -> Result<Error> {
    let noted = write_manifest(
        &started.folder,
        &incomplete_manifest(
            m,
            &started.description,
            files,
            None,
            vec![e.message().to_string()],
            started.input_channels,
        ),
    );
    // on a full disk the manifest may not be written either: the error
    // that stopped the measurement is still the one to tell
    let manifest = match noted {
        Ok(()) => "manifest marked incomplete".to_string(),
        Err(_) => "its manifest still says the measurement is in progress".to_string(),
    };
    Ok(Error::new(
        e.kind(),
        format!(
            "{}; what was recorded is kept in {} ({manifest})",
            e.message(),
            started.folder.dir().display()
        ),
    ))
}

/// What the measured delay is relative to: the loopback reference, or the
/// input frame at which the sweep was handed to the output.
fn delay_note(reference: bool, signal_start: usize) -> String {
    if reference {
        return "the loopback reference channel: the interface's own latency is divided out"
            .to_string();
    }
    format!(
        "the moment the sweep was handed to the output ({}); the delay includes the interface's latency",
        if signal_start == 0 {
            "frame 0 of the recording".to_string()
        } else {
            format!("frame {signal_start} of the recording, known to about one buffer")
        }
    )
}

/// The peak of each recorded input, dBFS (−240 dBFS for silence).
fn input_peaks_dbfs(channels: &[Vec<f64>]) -> Vec<f64> {
    channels
        .iter()
        .map(|c| 20.0 * c.iter().fold(1e-12f64, |m, v| m.max(v.abs())).log10())
        .collect()
}

/// How the measurement ran, for the manifest: the device, the stream, the
/// takes found, lost frames, the input peaks, what the delay is relative to.
fn measurement_record(
    m: &MeasureJob,
    device: &str,
    capture: &Capture,
    gap: usize,
    takes: Vec<TakeRecord>,
) -> MeasurementRecord {
    MeasurementRecord {
        device: device.to_string(),
        stream: capture.stream.clone(),
        output_channels: m.output_channels.iter().map(|c| c + 1).collect(),
        reference_channel: m.reference.map(|r| r + 1),
        repeat: m.repeat,
        gap_s: gap as f64 / f64::from(m.design.params.sample_rate_hz),
        takes,
        lost_frames: capture.lost_frames,
        interruptions: capture.interruptions,
        input_peaks_dbfs: input_peaks_dbfs(&capture.channels),
        delay_note: delay_note(m.reference.is_some(), capture.signal_start),
    }
}

/// Whether a capture cannot be analysed: a fault, a stop or lost samples.
fn is_invalid(capture: &Capture) -> bool {
    capture.stopped
        || capture.fault.is_some()
        || capture.lost_frames > 0
        || capture.interruptions > 0
}

/// Everything that went wrong in a capture, in words: the device's
/// problems, its fault, and a recording that does not hold every take
/// (named only when nothing else made the capture invalid).
fn capture_problems(capture: &Capture, holds_every_take: bool) -> Vec<String> {
    let mut problems = capture.problems.clone();
    if let Some(f) = &capture.fault {
        problems.push(f.clone());
    }
    if !is_invalid(capture) && !holds_every_take {
        problems.push("the recording does not hold every sweep and its tail".into());
    }
    problems
}

/// The one reason a capture is not analysed, the weightiest first (a
/// fault, a stop, lost samples, a short recording); `None` when it can be.
fn invalid_reason(capture: &Capture, holds_every_take: bool) -> Option<String> {
    if !is_invalid(capture) && holds_every_take {
        return None;
    }
    Some(if let Some(f) = &capture.fault {
        f.clone()
    } else if capture.stopped {
        "the measurement was stopped".to_string()
    } else if capture.lost_frames > 0 || capture.interruptions > 0 {
        "samples were lost (an overrun or underrun), so the measurement is invalid; close other programs, use a larger --buffer, and measure again".to_string()
    } else {
        "the recording is too short".to_string()
    })
}

/// The error of a capture that is kept but not analysed: the reason, where
/// the files are, and the other problems in brackets.
fn invalid_capture_error(why: &str, problems: &[String], dir: &Path) -> Error {
    let others: Vec<&str> = problems
        .iter()
        .map(String::as_str)
        .filter(|p| *p != why)
        .collect();
    let detail = if others.is_empty() {
        String::new()
    } else {
        format!(" ({})", others.join("; "))
    };
    Error::new(
        ErrorKind::Device,
        format!(
            "{why}; the raw recording is kept in {} and its manifest is marked incomplete{detail}",
            dir.display()
        ),
    )
}

/// Averages the takes of the recording as it is on disk (exactly as
/// `analyze` would read it), analyses the average into the folder, which
/// commits the derived files and the complete manifest, and names a
/// clipping reference input.
fn analyse_takes(
    m: &MeasureJob,
    started: Started,
    recording_bytes: Vec<u8>,
    takes: &[TakeRecord],
    record: MeasurementRecord,
) -> Result<Outcome> {
    let on_disk = decode_wav(&recording_bytes)
        .map_err(|e| Error::input(format!("the recording just written {e}")))?;
    let averaged = synchronous_average(&on_disk.channels, takes);
    let folder = &started.folder;
    let job = analysis_job(m, &started, recording_bytes, averaged, record)?;
    let mut outcome = analyse_into(job, folder)?;
    // clipping on any input used, by name (the analysis looks at the
    // microphone only)
    if let Some(r) = m.reference {
        if let Some(w) = reference_clip_warning(&on_disk.channels[r], r) {
            outcome.analysis.warnings.add(Code::ReferenceClips, w);
        }
    }
    Ok(outcome)
}

/// The analysis job of a measurement: the averaged takes as the recording,
/// the bytes on disk as the raw files, the record of how it ran.
fn analysis_job(
    m: &MeasureJob,
    started: &Started,
    recording_bytes: Vec<u8>,
    averaged: Vec<Vec<f64>>,
    record: MeasurementRecord,
) -> Result<Job> {
    Ok(Job {
        out: m.out.clone(),
        overwrite: false,
        plots: m.plots,
        phase_view: m.phase_view,
        recording_bytes,
        recording: WavData {
            sample_rate_hz: m.design.params.sample_rate_hz,
            encoding: SampleEncoding::Float,
            channels: averaged,
        },
        channel: m.channel,
        stimulus: decode_wav(&started.stimulus_bytes)
            .map_err(|e| Error::input(format!("the sweep just written {e}")))?,
        stimulus_bytes: started.stimulus_bytes.clone(),
        design: m.design.clone(),
        config: m.config.clone(),
        source: source(m, &started.description),
        title: m.title.clone(),
        command_line: m.command_line.clone(),
        mic_correction: m.mic_correction.clone(),
        calibration: m.calibration.clone(),
        // an impedance's reference is the amplifier side of the sense
        // resistor, not a loopback to divide the response by
        reference: m.reference.filter(|_| m.impedance.is_none()),
        measurement: Some(record),
        drive: m.drive,
        target: m.target.clone(),
        impulse: false,
        recovered_sweep: None,
        sweep_binding: None,
        impedance: m.impedance.clone(),
        position: m.position,
    })
}

/// The warning for a loopback reference input (0-based `index`) that
/// clips, if it does.
fn reference_clip_warning(reference: &[f64], index: usize) -> Option<String> {
    let peak = reference.iter().fold(0.0f64, |a, v| a.max(v.abs()));
    (peak >= crate::analysis::CLIP_LEVEL).then(|| {
        format!(
            "the reference input {} clips (peak {:.2} dBFS); lower the level of the loopback",
            index + 1,
            20.0 * peak.log10()
        )
    })
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

    use crate::analysis::Smoothing;
    use crate::signal::sweep::SweepParams;

    /// A short measurement job into `out` (nothing is analysed here).
    fn job(out: &Path) -> MeasureJob {
        let design = SweepParams {
            start_hz: 100.0,
            end_hz: 10_000.0,
            requested_length_s: 0.1,
            tail_s: 0.05,
            ..SweepParams::default()
        }
        .design()
        .unwrap();
        MeasureJob {
            out: out.to_path_buf(),
            plots: true,
            phase_view: Default::default(),
            channel: 1,
            reference: Some(0),
            output_channels: vec![0, 2],
            repeat: 2,
            design,
            config: AnalysisConfig {
                smoothing: Smoothing::parse("1/3").unwrap(),
                harmonics: 3,
                bands: true,
                gate: None,
                mic_correction: None,
                profile: Default::default(),
                speech: None,
            },
            title: "step test".into(),
            command_line: vec!["gliss".into(), "measure".into()],
            mic_correction: None,
            calibration: None,
            drive: None,
            source_kind: "virtual".into(),
            target: None,
            impedance: None,
            position: None,
        }
    }

    /// A device that records what it plays on `inputs` channels (or fails
    /// after half of it), for the steps around the capture.
    struct Echo {
        inputs: usize,
        fail: bool,
    }

    impl PlayRecord for Echo {
        fn describe(&self) -> String {
            "echo".into()
        }
        fn input_channels(&self) -> usize {
            self.inputs
        }
        fn output_channels(&self) -> usize {
            4
        }
        fn check_rate(&self, _: u32) -> Result<()> {
            Ok(())
        }
        fn play_record(
            &mut self,
            what: &Playback<'_>,
            sink: &mut dyn RawSink,
            _: &mut dyn FnMut(Progress),
        ) -> Result<Capture> {
            sink.begin(self.inputs, what.sample_rate_hz)?;
            let n = if self.fail {
                what.signal.len() / 2
            } else {
                what.signal.len()
            };
            let block: Vec<f32> = what.signal[..n]
                .iter()
                .flat_map(|&v| std::iter::repeat_n(v as f32, self.inputs))
                .collect();
            sink.write(&block)?;
            if self.fail {
                return Err(Error::new(ErrorKind::Device, "the echo went away"));
            }
            Ok(Capture {
                channels: vec![what.signal.to_vec(); self.inputs],
                sample_rate_hz: what.sample_rate_hz,
                ..Capture::default()
            })
        }
    }

    fn read_manifest(dir: &Path) -> Manifest {
        let t = std::fs::read_to_string(dir.join("manifest.json")).unwrap();
        serde_json::from_str(&t).unwrap()
    }

    #[test]
    fn the_gap_is_half_a_second_between_sweeps_and_none_for_one() {
        assert_eq!(gap_frames(1, 48_000), 0);
        assert_eq!(gap_frames(2, 48_000), 24_000);
        assert_eq!(gap_frames(8, 44_100), 22_050);
    }

    #[test]
    fn the_folder_starts_with_the_sweep_and_a_manifest_in_progress() {
        let t = tempfile::tempdir().unwrap();
        let out = t.path().join("m");
        let m = job(&out);
        let started = start_folder(
            &m,
            &Echo {
                inputs: 3,
                fail: false,
            },
        )
        .unwrap();
        let bytes = std::fs::read(out.join("stimulus.wav")).unwrap();
        assert_eq!(bytes, started.stimulus_bytes);
        assert_eq!(started.stimulus, m.design.generate());
        assert_eq!(started.files.len(), 1);
        // FIPS 180 SHA-256 of the bytes on disk
        assert_eq!(started.files[0].sha256, folder::sha256_hex(&bytes));
        let man = read_manifest(&out);
        assert!(!man.complete);
        assert_eq!(man.problems, vec![IN_PROGRESS.to_string()]);
        assert_eq!(man.recording_channels, 3);
        assert_eq!(man.files, started.files);
        assert!(man.measurement.is_none());
        // nothing recorded yet: recording.wav is not listed
        let mut files = started.files.clone();
        assert!(
            keep_recording(&started.folder, &mut files)
                .unwrap()
                .is_none()
        );
        assert_eq!(files.len(), 1);
    }

    #[test]
    fn the_capture_writes_the_recording_and_it_is_kept_with_its_hash() {
        let t = tempfile::tempdir().unwrap();
        let out = t.path().join("m");
        let m = job(&out);
        let mut dev = Echo {
            inputs: 2,
            fail: false,
        };
        let started = start_folder(&m, &dev).unwrap();
        let stop = AtomicBool::new(false);
        let c = capture(&mut dev, &m, &started, &[0.5, -0.25], &stop, &mut |_| {}).unwrap();
        assert_eq!(c.channels.len(), 2);
        let mut files = started.files.clone();
        let bytes = keep_recording(&started.folder, &mut files)
            .unwrap()
            .unwrap();
        let wav = decode_wav(&bytes).unwrap();
        assert_eq!(wav.channels, vec![vec![0.5, -0.25]; 2]);
        assert_eq!(files[1].name, "recording.wav");
        assert_eq!(files[1].sha256, folder::sha256_hex(&bytes));
    }

    #[test]
    fn a_failed_capture_keeps_what_was_recorded_and_says_where() {
        let t = tempfile::tempdir().unwrap();
        let out = t.path().join("m");
        let m = job(&out);
        let mut dev = Echo {
            inputs: 2,
            fail: true,
        };
        let started = start_folder(&m, &dev).unwrap();
        let stop = AtomicBool::new(false);
        let e = capture(&mut dev, &m, &started, &[0.5; 8], &stop, &mut |_| {}).unwrap_err();
        let mut files = started.files.clone();
        let bytes = keep_recording(&started.folder, &mut files)
            .unwrap()
            .unwrap();
        assert_eq!(decode_wav(&bytes).unwrap().channels[0].len(), 4);
        let reported = keep_failed_capture(&m, &started, files.clone(), &e).unwrap();
        assert_eq!(reported.kind(), ErrorKind::Device);
        assert_eq!(
            reported.message(),
            format!(
                "the echo went away; what was recorded is kept in {} (manifest marked incomplete)",
                out.display()
            )
        );
        let man = read_manifest(&out);
        assert!(!man.complete);
        assert_eq!(man.problems, vec!["the echo went away".to_string()]);
        assert_eq!(man.files, files);
        assert_eq!(man.recording_channels, 2);
    }

    #[test]
    fn the_incomplete_manifest_says_what_the_job_chose() {
        let m = job(Path::new("unused"));
        let man = incomplete_manifest(&m, "echo", Vec::new(), None, vec!["why".into()], 4);
        assert!(!man.complete);
        assert_eq!(man.tool, "gliss");
        assert_eq!(man.channel, 2, "1-based");
        assert_eq!(man.recording_channels, 4);
        assert_eq!(man.recording_encoding, "32-bit float");
        assert_eq!(man.source.kind, "virtual");
        assert_eq!(man.source.description, "echo");
        assert_eq!(man.sample_rate_hz, m.design.params.sample_rate_hz);
        assert_eq!(man.command_line, m.command_line);
        assert_eq!(man.problems, vec!["why".to_string()]);
        let s = &man.settings;
        assert_eq!(s.plots, crate::model::plot_kind::PLOTS_BUILT);
        assert_eq!((s.harmonics, s.bands), (3, true));
        assert_eq!(s.smoothing, m.config.smoothing);
        assert!(s.calibration.is_none() && s.target.is_none() && !s.target_absolute);
    }

    #[test]
    fn the_delay_is_referred_to_the_reference_or_to_the_frame_the_sweep_started() {
        assert!(delay_note(true, 480).starts_with("the loopback reference channel"));
        assert!(delay_note(false, 0).contains("(frame 0 of the recording)"));
        assert!(
            delay_note(false, 480)
                .contains("(frame 480 of the recording, known to about one buffer)")
        );
    }

    #[test]
    fn input_peaks_are_in_dbfs_and_silence_is_not_minus_infinity() {
        // closed form: 20·log10(|peak|)
        let p = input_peaks_dbfs(&[vec![0.5, -1.0], vec![0.1, -0.01], vec![0.0; 3]]);
        assert!(p[0].abs() < 1e-12);
        assert!((p[1] + 20.0).abs() < 1e-12);
        assert!((p[2] + 240.0).abs() < 1e-9);
    }

    #[test]
    fn the_record_numbers_channels_from_one_and_gives_the_gap_in_seconds() {
        let m = job(Path::new("unused"));
        let capture = Capture {
            channels: vec![vec![0.5], vec![1.0]],
            signal_start: 7,
            lost_frames: 2,
            stream: "stream".into(),
            ..Capture::default()
        };
        let takes = vec![TakeRecord {
            start_frame: 7,
            frames: 1,
        }];
        let r = measurement_record(&m, "echo", &capture, 24_000, takes.clone());
        assert_eq!(r.output_channels, vec![1, 3]);
        assert_eq!(r.reference_channel, Some(1));
        assert_eq!(
            r.gap_s,
            24_000.0 / f64::from(m.design.params.sample_rate_hz)
        );
        assert_eq!((r.repeat, r.lost_frames), (2, 2));
        assert_eq!(r.takes, takes);
        assert_eq!(r.input_peaks_dbfs.len(), 2);
        assert_eq!(r.stream, "stream");
        assert_eq!(r.delay_note, delay_note(true, 7));
    }

    #[test]
    fn an_invalid_capture_names_the_weightiest_reason_once() {
        let clean = Capture::default();
        assert_eq!(invalid_reason(&clean, true), None);
        assert!(capture_problems(&clean, true).is_empty());
        // only too short
        assert_eq!(
            invalid_reason(&clean, false).as_deref(),
            Some("the recording is too short")
        );
        assert_eq!(
            capture_problems(&clean, false),
            vec!["the recording does not hold every sweep and its tail".to_string()]
        );
        // lost samples: the short recording is not named besides
        let lost = Capture {
            lost_frames: 3,
            problems: vec!["the input overran 3 times (samples were lost)".into()],
            ..Capture::default()
        };
        assert!(
            invalid_reason(&lost, false)
                .unwrap()
                .starts_with("samples were lost")
        );
        assert_eq!(capture_problems(&lost, false), lost.problems);
        // a stop outweighs lost samples, a fault outweighs both
        let stopped = Capture {
            stopped: true,
            ..lost.clone()
        };
        assert_eq!(
            invalid_reason(&stopped, true).as_deref(),
            Some("the measurement was stopped")
        );
        let gone = Capture {
            fault: Some("gone".into()),
            ..stopped
        };
        assert_eq!(invalid_reason(&gone, true).as_deref(), Some("gone"));
        assert_eq!(
            capture_problems(&gone, true),
            vec![lost.problems[0].clone(), "gone".to_string()]
        );
    }

    #[test]
    fn the_refusal_gives_the_reason_the_folder_and_the_other_problems() {
        let dir = Path::new("/tmp/m");
        let e = invalid_capture_error("gone", &["gone".into()], dir);
        assert_eq!(e.kind(), ErrorKind::Device);
        assert_eq!(
            e.message(),
            "gone; the raw recording is kept in /tmp/m and its manifest is marked incomplete"
        );
        let e = invalid_capture_error("gone", &["a".into(), "gone".into(), "b".into()], dir);
        assert_eq!(
            e.message(),
            "gone; the raw recording is kept in /tmp/m and its manifest is marked incomplete (a; b)"
        );
    }

    #[test]
    fn a_reference_that_reaches_the_clip_level_is_named_from_one() {
        let crate_clip = crate::analysis::CLIP_LEVEL;
        assert_eq!(reference_clip_warning(&[0.5, -0.9], 0), None);
        assert_eq!(
            reference_clip_warning(&[0.1, -1.0], 2).as_deref(),
            Some("the reference input 3 clips (peak 0.00 dBFS); lower the level of the loopback")
        );
        assert!(reference_clip_warning(&[crate_clip], 0).is_some());
    }
}
