//! `gliss calibrate`: a sound calibrator's tone into a calibration file.

use std::path::PathBuf;

use clap::Args as ClapArgs;

use gliss::analysis::calibration;
#[cfg(feature = "soundcard")]
use gliss::audio::soundcard::{Request, SoundCard};
#[cfg(feature = "soundcard")]
use gliss::audio::{PlayRecord, Playback};
use gliss::error::{Error, ErrorKind, Result};
#[cfg(feature = "soundcard")]
use gliss::session::measure::RawWavSink;
#[cfg(feature = "soundcard")]
use gliss::signal::wav::SampleEncoding;
use gliss::signal::wav::{WavData, read_wav};

/// Options of `gliss calibrate`.
#[derive(Debug, ClapArgs)]
#[command(
    after_help = "Record the calibrator's tone (2 s or more) through the same \
microphone, preamplifier and gain you will measure with (with --record S gliss records it \
from the sound card itself and keeps the tone beside the calibration file as FILE.wav), then \
pass the file written here to measure, analyze or demo with --calibration. An existing \
calibration file is replaced only with --overwrite; a recorded tone (FILE.wav) is a raw \
recording and is never replaced."
)]
pub struct Args {
    /// The recording of the calibrator's tone (WAV); or use --record.
    #[arg(value_name = "TONE.wav", required_unless_present = "record")]
    pub recording: Option<PathBuf>,
    /// Record the tone from the sound card for this many seconds instead
    /// of reading a file (nothing is played).
    #[arg(long, value_name = "S", conflicts_with = "recording")]
    pub record: Option<f64>,
    /// With --record: the input device, a number from `gliss devices` or
    /// part of its name [default: the system's default input].
    #[arg(long, value_name = "N|NAME")]
    pub device: Option<String>,
    /// With --record: the sample rate in Hz.
    #[arg(long, value_name = "HZ", default_value_t = 48_000)]
    pub rate: u32,
    /// The calibrator's level in dB SPL (94 dB = 1 Pa, 114 dB = 10 Pa).
    #[arg(long, value_name = "DB_SPL", default_value_t = 94.0)]
    pub level: f64,
    /// The microphone channel, counted from 1.
    #[arg(long, value_name = "N", default_value_t = 1)]
    pub channel: usize,
    /// The calibration file to write (JSON).
    #[arg(long, value_name = "FILE.json")]
    pub out: PathBuf,
    /// Replace an existing calibration file (never a recorded tone).
    #[arg(long)]
    pub overwrite: bool,
}

/// A build without the sound card cannot record the tone.
#[cfg(not(feature = "soundcard"))]
fn record_tone(a: &Args, _: f64, _: &std::path::Path) -> Result<WavData> {
    // the recording options have nothing to act on here
    let _ = (&a.device, a.rate);
    Err(super::common::no_soundcard(
        "gliss calibrate --record",
        "record the calibrator's tone with any recorder and pass the WAV file instead, or ",
    ))
}

/// Records `seconds` of every input of the sound card into `tone` (created
/// new), playing silence; returns the recording.
#[cfg(feature = "soundcard")]
fn record_tone(a: &Args, seconds: f64, tone: &std::path::Path) -> Result<WavData> {
    if !(seconds.is_finite() && (1.0..=60.0).contains(&seconds)) {
        return Err(Error::parameter(format!(
            "--record {seconds} is out of range; record 1 to 60 s of the calibrator's tone (2 s or more is plenty)"
        )));
    }
    if tone.exists() {
        return Err(Error::new(
            ErrorKind::AlreadyExists,
            format!(
                "{} already exists and is a recording, which gliss never replaces; choose another --out",
                tone.display()
            ),
        ));
    }
    let mut card = SoundCard::open(&Request {
        input_device: a.device.clone(),
        output_device: a.device.clone(),
        sample_rate_hz: a.rate,
        input_channels: a.channel.max(1),
        output_channels: 1,
        buffer_frames: None,
    })?;
    let silence = vec![0.0; (seconds * f64::from(a.rate)) as usize];
    let stop = std::sync::atomic::AtomicBool::new(false);
    let mut sink = RawWavSink::new(tone);
    println!(
        "recording {seconds} s of the calibrator's tone: {}",
        card.describe()
    );
    let c = card.play_record(
        &Playback {
            signal: &silence,
            sample_rate_hz: a.rate,
            output_channels: &[],
            stop: &stop,
        },
        &mut sink,
        &mut |_| {},
    )?;
    if let Some(f) = c.fault.as_ref() {
        return Err(Error::new(
            ErrorKind::Device,
            format!("{f}; the tone so far is in {}", tone.display()),
        ));
    }
    if c.lost_frames > 0 || c.interruptions > 0 {
        return Err(Error::new(
            ErrorKind::Device,
            format!(
                "samples were lost while recording the tone ({}); record again",
                c.problems.join("; ")
            ),
        ));
    }
    Ok(WavData {
        sample_rate_hz: c.sample_rate_hz,
        encoding: SampleEncoding::Float,
        channels: c
            .channels
            .into_iter()
            .map(|ch| ch.get(c.signal_start..).unwrap_or_default().to_vec())
            .collect(),
    })
}

/// Runs `gliss calibrate`.
pub fn run(a: Args) -> Result<()> {
    let data = match (&a.recording, a.record) {
        (Some(p), _) => read_wav(p, "the calibrator recording")?,
        (None, Some(s)) => {
            if a.out.exists() && !a.overwrite {
                return Err(Error::new(
                    ErrorKind::AlreadyExists,
                    format!(
                        "{} already exists; choose another --out, or add --overwrite to replace it",
                        a.out.display()
                    ),
                ));
            }
            record_tone(&a, s, &a.out.with_extension("wav"))?
        }
        (None, None) => {
            return Err(Error::parameter(
                "give the calibrator's recording (TONE.wav), or --record S to record it",
            ));
        }
    };
    if a.channel == 0 || a.channel > data.channels.len() {
        return Err(Error::input(format!(
            "--channel {} does not exist: the recording has {} channel(s)",
            a.channel,
            data.channels.len()
        )));
    }
    let c = calibration::calibrate_channel(
        &data.channels,
        a.channel - 1,
        f64::from(data.sample_rate_hz),
        a.level,
    )?;
    let json = gliss::session::to_json(&c)?;
    if a.overwrite {
        gliss::folder::write::write_replacing(&a.out, &json, true)?;
    } else {
        gliss::folder::write::write_new(&a.out, &json)?;
    }
    println!(
        "wrote {}: a {:.1} Hz tone at {:.1} dBFS reads {} dB SPL; a full-scale sine (0 dBFS: dBFS here are RMS re a full-scale sine's RMS) reads {:.1} dB SPL",
        a.out.display(),
        c.tone_hz,
        20.0 * (c.tone_rms_fs * std::f64::consts::SQRT_2).log10(),
        c.level_db_spl,
        c.full_scale_db_spl
    );
    Ok(())
}
