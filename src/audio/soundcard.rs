//! The sound card, through cpal: device listing and play-and-record.
//!
//! cpal has no duplex stream, so an input and an output stream run side by
//! side. Their callbacks only move samples: the input callback converts
//! each block to `f32` and pushes it into a lock-free ring buffer (rtrb),
//! the output callback reads the signal from a buffer made before the start;
//! both bump atomic counters. Neither allocates nor locks. The calling
//! thread is the writer: it drains the ring buffer into the raw sink (the
//! WAV file on disk) while the measurement runs, and shows the progress.
//!
//! Alignment: the output callback notes how many input frames had been
//! captured when it handed out the first frame of the signal. That marks
//! the signal's start in the recording to about one buffer; the rest of
//! the interface's latency stays in the measured delay, unless a loopback
//! reference is recorded and divided out.

use std::sync::Arc;
use std::sync::atomic::{AtomicBool, AtomicU32, AtomicU64, Ordering};
use std::time::{Duration, Instant};

use cpal::traits::{DeviceTrait, HostTrait, StreamTrait};
use cpal::{
    BufferSize, Data, FromSample, I24, Sample, SampleFormat, StreamConfig, SupportedBufferSize,
};
use serde::Serialize;

use crate::audio::{Capture, PlayRecord, Playback, Progress, RawSink, STOP_RAMP_S, stop_gain};
use crate::error::{Error, ErrorKind, Result};

/// Sample rates checked for each device, Hz (the usual ones).
pub const COMMON_RATES: [u32; 11] = [
    8_000, 11_025, 16_000, 22_050, 32_000, 44_100, 48_000, 88_200, 96_000, 176_400, 192_000,
];

/// Silence played before the signal, so that both streams are running
/// when it starts, s.
const PREROLL_S: f64 = 0.25;
/// Recording kept after the signal ends, for the interface's latency, s.
const POSTROLL_S: f64 = 0.5;
/// How long the input may deliver nothing before the device counts as
/// gone, s.
const STALL_S: f64 = 2.0;

fn device_error(message: impl Into<String>) -> Error {
    Error::new(ErrorKind::Device, message)
}

/// What one direction (input or output) of a device can do.
#[derive(Debug, Clone, Serialize, PartialEq)]
pub struct Capabilities {
    /// Most channels it opens.
    pub max_channels: u16,
    /// Channel counts it opens.
    pub channel_counts: Vec<u16>,
    /// The usual sample rates it supports, Hz.
    pub sample_rates_hz: Vec<u32>,
    /// Sample formats, e.g. "f32", "i16".
    pub formats: Vec<String>,
    /// Smallest and largest buffer in frames, where the device says.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub buffer_frames: Option<(u32, u32)>,
    /// The device's own default: channels, rate, format.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub default: Option<(u16, u32, String)>,
}

/// One device as `gliss devices` lists it.
#[derive(Debug, Clone, Serialize, PartialEq)]
pub struct DeviceInfo {
    /// Position in the list, counted from 1 (for `--device N`).
    pub index: usize,
    /// The device's name.
    pub name: String,
    /// The host's identifier of the device.
    pub id: String,
    /// Whether it is the system's default input.
    pub default_input: bool,
    /// Whether it is the system's default output.
    pub default_output: bool,
    /// What it records, if anything.
    pub input: Option<Capabilities>,
    /// What it plays, if anything.
    pub output: Option<Capabilities>,
}

fn name_of(d: &cpal::Device) -> String {
    d.description()
        .map(|x| x.name().to_string())
        .unwrap_or_else(|_| "(unnamed device)".into())
}

fn id_of(d: &cpal::Device) -> String {
    d.id().map(|x| x.to_string()).unwrap_or_default()
}

fn capabilities(
    ranges: Vec<cpal::SupportedStreamConfigRange>,
    default: Option<cpal::SupportedStreamConfig>,
) -> Option<Capabilities> {
    if ranges.is_empty() {
        return None;
    }
    let mut counts: Vec<u16> = ranges.iter().map(|r| r.channels()).collect();
    counts.sort_unstable();
    counts.dedup();
    let mut rates: Vec<u32> = COMMON_RATES
        .iter()
        .copied()
        .filter(|&r| ranges.iter().any(|c| c.contains_rate(r)))
        .collect();
    rates.dedup();
    let mut formats: Vec<String> = Vec::new();
    for r in &ranges {
        let f = r.sample_format().to_string();
        if !formats.contains(&f) {
            formats.push(f);
        }
    }
    let buffer_frames = ranges
        .iter()
        .filter_map(|r| match r.buffer_size() {
            SupportedBufferSize::Range { min, max } => Some((*min, *max)),
            SupportedBufferSize::Unknown => None,
        })
        .reduce(|a, b| (a.0.min(b.0), a.1.max(b.1)));
    Some(Capabilities {
        max_channels: counts.last().copied().unwrap_or(0),
        channel_counts: counts,
        sample_rates_hz: rates,
        formats,
        buffer_frames,
        default: default.map(|d| (d.channels(), d.sample_rate(), d.sample_format().to_string())),
    })
}

/// The host's devices, in a stable order, with what each can do.
pub fn list_devices() -> Result<Vec<DeviceInfo>> {
    let host = cpal::default_host();
    let def_in = host.default_input_device().map(|d| id_of(&d));
    let def_out = host.default_output_device().map(|d| id_of(&d));
    Ok(listed(&host)?
        .into_iter()
        .enumerate()
        .map(|(i, (d, input, output))| {
            let id = id_of(&d);
            DeviceInfo {
                index: i + 1,
                name: name_of(&d),
                default_input: def_in.as_deref() == Some(id.as_str()),
                default_output: def_out.as_deref() == Some(id.as_str()),
                id,
                input,
                output,
            }
        })
        .collect())
}

/// A device of the host's list with what it records and plays.
type Listed = (cpal::Device, Option<Capabilities>, Option<Capabilities>);

/// The devices that play or record, in the host's order: the list
/// `gliss devices` numbers 1…N and `--device N` counts in (plugins that
/// do neither, rate converters and the like, are left out of both).
fn listed(host: &cpal::Host) -> Result<Vec<Listed>> {
    let devices = host.devices().map_err(|e| {
        device_error(format!(
            "could not list the sound devices ({e}); check that the sound system is running"
        ))
    })?;
    let mut out = Vec::new();
    for d in devices {
        let input = capabilities(
            d.supported_input_configs()
                .map(|c| c.collect())
                .unwrap_or_default(),
            d.default_input_config().ok(),
        );
        let output = capabilities(
            d.supported_output_configs()
                .map(|c| c.collect())
                .unwrap_or_default(),
            d.default_output_config().ok(),
        );
        if input.is_some() || output.is_some() {
            out.push((d, input, output));
        }
    }
    Ok(out)
}

/// Which way a device is used.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
enum Direction {
    Input,
    Output,
}

impl Direction {
    fn word(self) -> &'static str {
        match self {
            Direction::Input => "input",
            Direction::Output => "output",
        }
    }
}

/// Finds a device by its index in `gliss devices` or by part of its name
/// (case-insensitive); `None` means the system's default.
fn find_device(host: &cpal::Host, spec: Option<&str>, dir: Direction) -> Result<cpal::Device> {
    let Some(spec) = spec
        .map(str::trim)
        .filter(|s| !s.is_empty() && *s != "default")
    else {
        let d = match dir {
            Direction::Input => host.default_input_device(),
            Direction::Output => host.default_output_device(),
        };
        return d.ok_or_else(|| {
            device_error(format!(
                "there is no default {} device; connect a sound card, or name one with --device (see gliss devices)",
                dir.word()
            ))
        });
    };
    let devices: Vec<cpal::Device> = host
        .devices()
        .map_err(|e| device_error(format!("could not list the sound devices ({e})")))?
        .collect();
    if let Ok(n) = spec.parse::<usize>() {
        // the numbers of gliss devices: the devices that play or record
        return listed(host)?
            .into_iter()
            .nth(n.wrapping_sub(1))
            .map(|(d, _, _)| d)
            .ok_or_else(|| {
                device_error(format!(
                    "there is no device {n}; gliss devices lists the devices with their numbers"
                ))
            });
    }
    let want = spec.to_lowercase();
    let usable = |d: &cpal::Device| match dir {
        Direction::Input => d.supports_input(),
        Direction::Output => d.supports_output(),
    };
    let mut hits: Vec<cpal::Device> = devices
        .into_iter()
        .filter(|d| {
            name_of(d).to_lowercase().contains(&want) || id_of(d).to_lowercase().contains(&want)
        })
        .filter(usable)
        .collect();
    // an exact name or id wins over partial matches
    if hits.len() > 1 {
        if let Some(i) = hits
            .iter()
            .position(|d| name_of(d).to_lowercase() == want || id_of(d).to_lowercase() == want)
        {
            return Ok(hits.swap_remove(i));
        }
    }
    match hits.len() {
        0 => Err(device_error(format!(
            "no {} device matches \"{spec}\"; gliss devices lists them",
            dir.word()
        ))),
        1 => Ok(hits.remove(0)),
        _ => Err(device_error(format!(
            "\"{spec}\" matches {} {} devices ({}); give more of the name, or the number from gliss devices",
            hits.len(),
            dir.word(),
            hits.iter().map(name_of).collect::<Vec<_>>().join(", ")
        ))),
    }
}

/// The sample formats gliss converts, best first.
const FORMATS: [SampleFormat; 4] = [
    SampleFormat::F32,
    SampleFormat::I32,
    SampleFormat::I24,
    SampleFormat::I16,
];

/// Picks a stream configuration: at least `channels` channels, at `rate`,
/// in the best format gliss converts. Errors say what the device can do.
fn pick_config(
    device: &cpal::Device,
    dir: Direction,
    channels: usize,
    rate: u32,
    buffer: Option<u32>,
) -> Result<(StreamConfig, SampleFormat)> {
    let name = name_of(device);
    let ranges: Vec<cpal::SupportedStreamConfigRange> = match dir {
        Direction::Input => device.supported_input_configs().map(|c| c.collect()),
        Direction::Output => device.supported_output_configs().map(|c| c.collect()),
    }
    .map_err(|e| {
        device_error(format!(
            "could not ask {name} what it can {} ({e}); is it still connected?",
            if dir == Direction::Input {
                "record"
            } else {
                "play"
            }
        ))
    })?;
    if ranges.is_empty() {
        return Err(device_error(format!(
            "{name} has no {}s; choose another with --{}-device (see gliss devices)",
            dir.word(),
            dir.word()
        )));
    }
    let max_ch = ranges
        .iter()
        .map(|r| usize::from(r.channels()))
        .max()
        .unwrap_or(0);
    if max_ch < channels {
        return Err(device_error(format!(
            "{name} has {max_ch} {} channel{}, but channel {channels} was asked for; choose a channel from 1 to {max_ch}",
            dir.word(),
            if max_ch == 1 { "" } else { "s" }
        )));
    }
    let at_rate: Vec<&cpal::SupportedStreamConfigRange> =
        ranges.iter().filter(|r| r.contains_rate(rate)).collect();
    if at_rate.is_empty() {
        let rates: Vec<String> = COMMON_RATES
            .iter()
            .filter(|&&r| ranges.iter().any(|c| c.contains_rate(r)))
            .map(|r| r.to_string())
            .collect();
        return Err(device_error(format!(
            "{name} cannot {} at {rate} Hz; it supports {} Hz; choose one with --rate",
            if dir == Direction::Input {
                "record"
            } else {
                "play"
            },
            if rates.is_empty() {
                "none of the usual rates".to_string()
            } else {
                rates.join(", ")
            }
        )));
    }
    // the fewest channels that hold the ones asked for, the best format
    let mut best: Option<(usize, usize, &cpal::SupportedStreamConfigRange)> = None;
    for r in at_rate {
        let ch = usize::from(r.channels());
        let Some(rank) = FORMATS.iter().position(|f| *f == r.sample_format()) else {
            continue;
        };
        if ch < channels {
            continue;
        }
        let key = (ch, rank);
        if best.is_none_or(|b| key < (b.0, b.1)) {
            best = Some((ch, rank, r));
        }
    }
    let Some((ch, _, r)) = best else {
        return Err(device_error(format!(
            "{name} offers no sample format gliss can convert (f32, i32, i24, i16) with {channels} channels at {rate} Hz"
        )));
    };
    let buffer_size = match buffer {
        None => BufferSize::Default,
        Some(b) => {
            if let SupportedBufferSize::Range { min, max } = r.buffer_size() {
                if b < *min || b > *max {
                    return Err(Error::parameter(format!(
                        "--buffer {b} is outside what {name} offers ({min} to {max} frames)"
                    )));
                }
            }
            BufferSize::Fixed(b)
        }
    };
    Ok((
        StreamConfig {
            channels: ch as u16,
            sample_rate: rate,
            buffer_size,
        },
        r.sample_format(),
    ))
}

/// A sound card opened for a measurement: an input and an output device,
/// each with a checked configuration.
pub struct SoundCard {
    input: cpal::Device,
    output: cpal::Device,
    in_config: StreamConfig,
    in_format: SampleFormat,
    out_config: StreamConfig,
    out_format: SampleFormat,
}

impl std::fmt::Debug for SoundCard {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str(&self.describe())
    }
}

/// What the measurement needs of the sound card.
#[derive(Debug, Clone, Default)]
pub struct Request {
    /// Input device: a number from `gliss devices` or part of a name.
    pub input_device: Option<String>,
    /// Output device, the same way.
    pub output_device: Option<String>,
    /// Sample rate in Hz.
    pub sample_rate_hz: u32,
    /// Input channels that must exist (the highest one used, 1-based).
    pub input_channels: usize,
    /// Output channels that must exist (the highest one used, 1-based).
    pub output_channels: usize,
    /// Buffer size in frames (`None` = the device's default).
    pub buffer_frames: Option<u32>,
}

impl SoundCard {
    /// Opens the devices of `req` and checks that they can do what it asks.
    /// Plays nothing yet.
    pub fn open(req: &Request) -> Result<Self> {
        let host = cpal::default_host();
        let input = find_device(&host, req.input_device.as_deref(), Direction::Input)?;
        let output = find_device(&host, req.output_device.as_deref(), Direction::Output)?;
        let (in_config, in_format) = pick_config(
            &input,
            Direction::Input,
            req.input_channels,
            req.sample_rate_hz,
            req.buffer_frames,
        )?;
        let (out_config, out_format) = pick_config(
            &output,
            Direction::Output,
            req.output_channels,
            req.sample_rate_hz,
            req.buffer_frames,
        )?;
        Ok(SoundCard {
            input,
            output,
            in_config,
            in_format,
            out_config,
            out_format,
        })
    }
}

/// Counters and flags shared with the callbacks.
#[derive(Debug)]
struct Shared {
    /// Input frames pushed into the ring buffer.
    in_frames: AtomicU64,
    /// Input frames dropped because the ring buffer was full.
    dropped_frames: AtomicU64,
    /// Overruns and underruns the host reported.
    input_xruns: AtomicU64,
    output_xruns: AtomicU64,
    /// Other errors the driver reported while the streams went on.
    driver_errors: AtomicU64,
    /// The device went away or the stream failed.
    failed: AtomicBool,
    /// Output frames handed out since the stream started.
    out_frames: AtomicU64,
    /// Input frame count when the signal's first frame was handed out
    /// (u64::MAX until then).
    signal_start: AtomicU64,
    /// Set by the writer to stop; the output ramps down.
    stop: AtomicBool,
    /// Output frame at which the stop was seen (u64::MAX until then).
    stopped_at: AtomicU64,
    /// Highest absolute input sample since the writer last looked (f32 bits).
    peak_bits: AtomicU32,
}

impl Shared {
    fn new() -> Self {
        Shared {
            in_frames: AtomicU64::new(0),
            dropped_frames: AtomicU64::new(0),
            input_xruns: AtomicU64::new(0),
            output_xruns: AtomicU64::new(0),
            driver_errors: AtomicU64::new(0),
            failed: AtomicBool::new(false),
            out_frames: AtomicU64::new(0),
            signal_start: AtomicU64::new(u64::MAX),
            stop: AtomicBool::new(false),
            stopped_at: AtomicU64::new(u64::MAX),
            peak_bits: AtomicU32::new(0),
        }
    }
}

/// Converts an input block to f32 and pushes whole frames into the ring;
/// returns the frames that did not fit. No allocation, no lock.
fn push_input<T>(data: &[T], channels: usize, ring: &mut rtrb::Producer<f32>, sh: &Shared) -> u64
where
    T: Sample,
    f32: FromSample<T>,
{
    let frames = data.len() / channels;
    let room = ring.slots() / channels;
    let take = frames.min(room);
    let mut peak = 0.0f32;
    if take > 0 {
        if let Ok(chunk) = ring.write_chunk_uninit(take * channels) {
            chunk.fill_from_iter(data[..take * channels].iter().map(|&s| {
                let v = f32::from_sample(s);
                peak = peak.max(v.abs());
                v
            }));
        }
    }
    sh.peak_bits.fetch_max(peak.to_bits(), Ordering::Relaxed);
    sh.in_frames.fetch_add(take as u64, Ordering::Release);
    (frames - take) as u64
}

fn on_input(data: &Data, channels: usize, ring: &mut rtrb::Producer<f32>, sh: &Shared) {
    let lost = match data.sample_format() {
        SampleFormat::F32 => data
            .as_slice::<f32>()
            .map(|d| push_input(d, channels, ring, sh)),
        SampleFormat::I32 => data
            .as_slice::<i32>()
            .map(|d| push_input(d, channels, ring, sh)),
        SampleFormat::I24 => data
            .as_slice::<I24>()
            .map(|d| push_input(d, channels, ring, sh)),
        SampleFormat::I16 => data
            .as_slice::<i16>()
            .map(|d| push_input(d, channels, ring, sh)),
        _ => None,
    };
    match lost {
        Some(0) => {}
        Some(n) => {
            sh.dropped_frames.fetch_add(n, Ordering::Relaxed);
        }
        None => sh.failed.store(true, Ordering::Release),
    }
}

/// The output side: what it plays and where it is.
struct Player {
    signal: Arc<[f32]>,
    channels: usize,
    /// Which output channels carry the signal.
    active: [bool; 64],
    preroll: u64,
    ramp: usize,
    pos: u64,
}

impl Player {
    /// The player of `signal` on the `active` channels of an output of
    /// `channels` channels (it allocates: made before the start).
    fn new(signal: &[f64], channels: usize, active: [bool; 64], timing: &Timing) -> Self {
        Player {
            signal: signal.iter().map(|&v| v as f32).collect(),
            channels,
            active,
            preroll: timing.preroll,
            ramp: timing.ramp,
            pos: 0,
        }
    }

    /// The sample of output frame `pos`, before the channel mask.
    fn sample(&self, pos: u64, sh: &Shared) -> f32 {
        if pos < self.preroll {
            return 0.0;
        }
        let i = (pos - self.preroll) as usize;
        let Some(&s) = self.signal.get(i) else {
            return 0.0;
        };
        let stopped_at = sh.stopped_at.load(Ordering::Relaxed);
        if stopped_at == u64::MAX {
            return s;
        }
        let since = pos.saturating_sub(stopped_at) as usize;
        (f64::from(s) * stop_gain(since, self.ramp)) as f32
    }

    fn fill<T>(&mut self, out: &mut [T], sh: &Shared)
    where
        T: Sample + FromSample<f32>,
    {
        if sh.stop.load(Ordering::Acquire) && sh.stopped_at.load(Ordering::Relaxed) == u64::MAX {
            sh.stopped_at.store(self.pos, Ordering::Relaxed);
        }
        let frames = out.len() / self.channels;
        for f in 0..frames {
            let pos = self.pos + f as u64;
            if pos == self.preroll {
                // the signal starts in this buffer
                let captured = sh.in_frames.load(Ordering::Acquire);
                sh.signal_start
                    .store(captured + f as u64, Ordering::Release);
            }
            let s = self.sample(pos, sh);
            let frame = &mut out[f * self.channels..(f + 1) * self.channels];
            for (c, v) in frame.iter_mut().enumerate() {
                *v = if self.active[c] {
                    T::from_sample(s)
                } else {
                    T::EQUILIBRIUM
                };
            }
        }
        self.pos += frames as u64;
        sh.out_frames.store(self.pos, Ordering::Release);
    }
}

fn on_output(data: &mut Data, player: &mut Player, sh: &Shared) {
    match data.sample_format() {
        SampleFormat::F32 => {
            if let Some(d) = data.as_slice_mut::<f32>() {
                player.fill(d, sh);
            }
        }
        SampleFormat::I32 => {
            if let Some(d) = data.as_slice_mut::<i32>() {
                player.fill(d, sh);
            }
        }
        SampleFormat::I24 => {
            if let Some(d) = data.as_slice_mut::<I24>() {
                player.fill(d, sh);
            }
        }
        SampleFormat::I16 => {
            if let Some(d) = data.as_slice_mut::<i16>() {
                player.fill(d, sh);
            }
        }
        _ => sh.failed.store(true, Ordering::Release),
    }
}

fn error_handler(sh: &Arc<Shared>, input: bool) -> impl FnMut(cpal::Error) + Send + 'static {
    let sh = Arc::clone(sh);
    move |e: cpal::Error| match e.kind() {
        cpal::ErrorKind::Xrun => {
            let c = if input {
                &sh.input_xruns
            } else {
                &sh.output_xruns
            };
            c.fetch_add(1, Ordering::Relaxed);
        }
        // the host rerouted or could not raise priority: not fatal
        cpal::ErrorKind::DeviceChanged | cpal::ErrorKind::RealtimeDenied => {}
        // the device is gone or can no longer stream
        cpal::ErrorKind::DeviceNotAvailable
        | cpal::ErrorKind::StreamInvalidated
        | cpal::ErrorKind::DeviceBusy
        | cpal::ErrorKind::PermissionDenied => sh.failed.store(true, Ordering::Release),
        // a driver call failed but the stream goes on (the PulseAudio
        // plugin does this right after an underrun): samples may be
        // missing, so the take is invalid, but the device is still there
        _ => {
            sh.driver_errors.fetch_add(1, Ordering::Relaxed);
        }
    }
}

/// Drops the streams on a helper thread; false when that took longer than
/// `within` (the thread is then left behind, and ends with the process).
fn close_within(streams: (cpal::Stream, cpal::Stream), within: Duration) -> bool {
    let (tx, rx) = std::sync::mpsc::channel();
    let spawned = std::thread::Builder::new()
        .name("gliss-close".into())
        .spawn(move || {
            drop(streams);
            let _ = tx.send(());
        });
    spawned.is_ok() && rx.recv_timeout(within).is_ok()
}

impl PlayRecord for SoundCard {
    fn describe(&self) -> String {
        let in_name = name_of(&self.input);
        let out_name = name_of(&self.output);
        let dev = if in_name == out_name {
            format!("sound card {in_name}")
        } else {
            format!("sound card: input {in_name}, output {out_name}")
        };
        format!(
            "{dev} ({} in / {} out at {} Hz)",
            self.in_config.channels, self.out_config.channels, self.in_config.sample_rate
        )
    }

    fn input_channels(&self) -> usize {
        usize::from(self.in_config.channels)
    }

    fn output_channels(&self) -> usize {
        usize::from(self.out_config.channels)
    }

    fn check_rate(&self, rate: u32) -> Result<()> {
        if rate == self.in_config.sample_rate {
            Ok(())
        } else {
            Err(Error::parameter(format!(
                "the sound card was opened at {} Hz, not {rate} Hz",
                self.in_config.sample_rate
            )))
        }
    }

    fn play_record(
        &mut self,
        what: &Playback<'_>,
        sink: &mut dyn RawSink,
        progress: &mut dyn FnMut(Progress),
    ) -> Result<Capture> {
        let rate = what.sample_rate_hz;
        self.check_rate(rate)?;
        let in_ch = usize::from(self.in_config.channels);
        let out_ch = usize::from(self.out_config.channels);
        let active = active_outputs(what.output_channels, out_ch)?;
        let timing = Timing::new(what.signal.len(), rate);
        let player = Player::new(what.signal, out_ch, active, &timing);
        let sh = Arc::new(Shared::new());
        // two seconds of room: the writer drains every 20 ms
        let (producer, consumer) = rtrb::RingBuffer::<f32>::new(2 * rate as usize * in_ch);
        let (input, output) = self.open_streams(in_ch, producer, player, &sh)?;
        sink.begin(in_ch, rate)?;
        let mut writer = Writer::new(consumer, in_ch, rate, &timing);
        start_streams(&input, &output)?;
        // what the host really chose (a fixed request is only a wish)
        let period = input.buffer_size().ok();
        let ending = run_until_done(&sh, what.stop, &timing, &mut writer, sink, progress)?;
        let ramp_first = ending.fault.is_some() && !ending.stopped;
        let closed = close_streams(&sh, (output, input), ramp_first);
        writer.drain(sink)?;
        let fault = fault_after_close(ending.fault, closed);
        sink.finish()?;
        let counters = Counters::load(&sh);
        let mut problems = counters.problems();
        if ending.stopped {
            problems.push(timing.stopped_note(sh.out_frames.load(Ordering::Relaxed)));
        }
        Ok(Capture {
            channels: writer.channels,
            sample_rate_hz: rate,
            signal_start: signal_start_frame(sh.signal_start.load(Ordering::Acquire)),
            lost_frames: counters.lost_frames(),
            interruptions: counters.interruptions(),
            stopped: ending.stopped,
            fault,
            problems,
            stream: self.stream_description(period),
        })
    }
}

impl SoundCard {
    /// Builds the input stream, whose callback pushes into `producer`, and
    /// the output stream, whose callback plays `player`; neither runs yet.
    /// Returns (input, output).
    fn open_streams(
        &self,
        in_ch: usize,
        mut producer: rtrb::Producer<f32>,
        mut player: Player,
        sh: &Arc<Shared>,
    ) -> Result<(cpal::Stream, cpal::Stream)> {
        let sh_in = Arc::clone(sh);
        let input = self
            .input
            .build_input_stream_raw(
                self.in_config,
                self.in_format,
                move |data: &Data, _: &cpal::InputCallbackInfo| {
                    on_input(data, in_ch, &mut producer, &sh_in);
                },
                error_handler(sh, true),
                Some(Duration::from_secs(2)),
            )
            .map_err(|e| {
                device_error(format!(
                    "could not open the input of {} ({e}); is another program using it?",
                    name_of(&self.input)
                ))
            })?;
        let sh_out = Arc::clone(sh);
        let output = self
            .output
            .build_output_stream_raw(
                self.out_config,
                self.out_format,
                move |data: &mut Data, _: &cpal::OutputCallbackInfo| {
                    on_output(data, &mut player, &sh_out);
                },
                error_handler(sh, false),
                Some(Duration::from_secs(2)),
            )
            .map_err(|e| {
                device_error(format!(
                    "could not open the output of {} ({e}); is another program using it?",
                    name_of(&self.output)
                ))
            })?;
        Ok((input, output))
    }

    /// The streams as they ran, for the manifest: channels, formats, and
    /// the buffer the host chose (`period`, when it says).
    fn stream_description(&self, period: Option<u32>) -> String {
        format!(
            "input {} ch {}, output {} ch {}, buffer {}",
            self.in_config.channels,
            self.in_format,
            self.out_config.channels,
            self.out_format,
            buffer_words(self.in_config.buffer_size, period)
        )
    }
}

/// The output channels that carry the signal, as a mask over the first 64
/// channels; refuses a channel the output does not have.
fn active_outputs(chosen: &[usize], out_ch: usize) -> Result<[bool; 64]> {
    let mut active = [false; 64];
    for &c in chosen {
        if c >= out_ch.min(64) {
            return Err(device_error(format!(
                "output channel {} does not exist: the output has {out_ch}",
                c + 1
            )));
        }
        active[c] = true;
    }
    Ok(active)
}

/// Starts recording, then playback (the preroll covers the gap between).
fn start_streams(input: &cpal::Stream, output: &cpal::Stream) -> Result<()> {
    input
        .play()
        .map_err(|e| device_error(format!("could not start recording ({e})")))?;
    output
        .play()
        .map_err(|e| device_error(format!("could not start playback ({e})")))
}

/// The frame counts of one play-and-record, from the signal's length and
/// the sample rate.
#[derive(Debug, Clone, Copy, PartialEq)]
struct Timing {
    /// Sample rate, Hz.
    fs: f64,
    /// Frames of the signal.
    signal: u64,
    /// Silent output frames before the signal ([`PREROLL_S`]).
    preroll: u64,
    /// Input frames kept after the signal was handed out ([`POSTROLL_S`]).
    postroll: u64,
    /// Frames of the stop ramp ([`STOP_RAMP_S`]).
    ramp: usize,
}

impl Timing {
    fn new(signal_frames: usize, rate: u32) -> Self {
        let fs = f64::from(rate);
        Timing {
            fs,
            signal: signal_frames as u64,
            preroll: (PREROLL_S * fs) as u64,
            postroll: (POSTROLL_S * fs) as u64,
            ramp: (STOP_RAMP_S * fs).round() as usize,
        }
    }

    /// The frames of the recording: the signal and both rolls.
    fn expected_frames(&self) -> u64 {
        self.signal + self.preroll + self.postroll
    }

    /// Frames of the signal handed out once the output has handed out
    /// `out_frames` frames in all.
    fn played(&self, out_frames: u64) -> u64 {
        out_frames.saturating_sub(self.preroll).min(self.signal)
    }

    /// Every wait is bounded: the whole signal with its rolls, half as
    /// long again, and 5 s of slack.
    fn time_limit(&self) -> Duration {
        Duration::from_secs_f64(self.expected_frames() as f64 / self.fs * 1.5 + 5.0)
    }

    /// Input frames recorded after a stop before the writer ends: the
    /// ramp, and a little after it.
    fn stop_tail(&self) -> u64 {
        (2 * self.ramp) as u64 + (0.1 * self.fs) as u64
    }

    /// The problem a stop leaves: how much of the signal was played.
    fn stopped_note(&self, out_frames: u64) -> String {
        format!(
            "stopped after {:.2} s of {:.2} s",
            self.played(out_frames) as f64 / self.fs,
            self.signal as f64 / self.fs
        )
    }
}

/// How often the writer drains the ring buffer and looks at the streams.
const DRAIN_EVERY: Duration = Duration::from_millis(20);

/// What the writer sees when it looks at the streams.
#[derive(Debug, Clone, Copy)]
struct Look {
    /// Input frames captured so far.
    in_frames: u64,
    /// Output frames handed out so far.
    out_frames: u64,
    /// The device failed or went away.
    failed: bool,
    /// The caller asked to stop.
    stop_asked: bool,
    /// When it looked.
    now: Instant,
}

/// What the writer does after a look.
#[derive(Debug, Clone, PartialEq)]
enum Next {
    /// Keep draining.
    Wait,
    /// A stop was just asked: tell the output to ramp down, keep draining.
    RampDown,
    /// Everything is recorded (or the stop's ramp is).
    Done,
    /// The device is gone or stopped keeping time.
    Fault(String),
}

/// The writer's watch over the streams: when the input last moved, the
/// deadline, the stop, the end of the signal.
#[derive(Debug, Clone)]
struct Watch {
    timing: Timing,
    deadline: Instant,
    last_in: u64,
    last_in_change: Instant,
    /// Input frames when the stop was seen.
    stop_seen: Option<u64>,
    /// Input frames when the output had handed out the whole signal.
    end_in: Option<u64>,
}

impl Watch {
    /// A watch over streams started at `started`.
    fn new(started: Instant, timing: Timing) -> Self {
        Watch {
            timing,
            deadline: started + timing.time_limit(),
            last_in: 0,
            last_in_change: started,
            stop_seen: None,
            end_in: None,
        }
    }

    /// Whether a stop was seen.
    fn stopped(&self) -> bool {
        self.stop_seen.is_some()
    }

    /// Decides from one look: the device is gone when it says so, when the
    /// input delivers nothing for [`STALL_S`], or when the deadline passes;
    /// after a stop the writer waits for the ramp; otherwise for the signal
    /// and the postroll.
    fn look(&mut self, l: &Look) -> Next {
        let t = &self.timing;
        if l.in_frames != self.last_in {
            self.last_in = l.in_frames;
            self.last_in_change = l.now;
        }
        if l.failed {
            return Next::Fault(
                "the sound device failed or went away during the measurement".into(),
            );
        }
        if l.now.duration_since(self.last_in_change) > Duration::from_secs_f64(STALL_S) {
            return Next::Fault(format!(
                "the input delivered no samples for {STALL_S:.0} s; the device may have gone away"
            ));
        }
        if l.now > self.deadline {
            return Next::Fault(
                "the measurement took far longer than the signal; the device stopped keeping time"
                    .into(),
            );
        }
        if l.stop_asked && self.stop_seen.is_none() {
            self.stop_seen = Some(l.in_frames);
            return Next::RampDown;
        }
        if let Some(at) = self.stop_seen {
            return if l.in_frames >= at + t.stop_tail() {
                Next::Done
            } else {
                Next::Wait
            };
        }
        if self.end_in.is_none() && l.out_frames >= t.preroll + t.signal {
            self.end_in = Some(l.in_frames);
        }
        if self.end_in.is_some_and(|e| l.in_frames >= e + t.postroll) {
            return Next::Done;
        }
        Next::Wait
    }
}

/// How the drain loop ended.
#[derive(Debug, Clone, PartialEq)]
struct Ending {
    /// The device's fault, if it failed.
    fault: Option<String>,
    /// A stop was seen (and the output ramped down).
    stopped: bool,
}

/// The drain loop: every [`DRAIN_EVERY`] it moves what the input captured
/// to the sink, reports the progress and looks at the streams, until the
/// signal and its postroll are recorded, a stop's ramp is, or the device
/// fails.
fn run_until_done(
    sh: &Shared,
    stop: &AtomicBool,
    timing: &Timing,
    writer: &mut Writer,
    sink: &mut dyn RawSink,
    progress: &mut dyn FnMut(Progress),
) -> Result<Ending> {
    let mut watch = Watch::new(Instant::now(), *timing);
    loop {
        std::thread::sleep(DRAIN_EVERY);
        writer.drain(sink)?;
        let in_frames = sh.in_frames.load(Ordering::Acquire);
        let out_frames = sh.out_frames.load(Ordering::Acquire);
        let peak = f32::from_bits(sh.peak_bits.swap(0, Ordering::Relaxed));
        progress(Progress {
            done_frames: timing.played(out_frames),
            total_frames: timing.signal,
            peak,
        });
        let look = Look {
            in_frames,
            out_frames,
            failed: sh.failed.load(Ordering::Acquire),
            stop_asked: stop.load(Ordering::SeqCst),
            now: Instant::now(),
        };
        let fault = match watch.look(&look) {
            Next::Wait => continue,
            Next::RampDown => {
                sh.stop.store(true, Ordering::Release);
                continue;
            }
            Next::Done => None,
            Next::Fault(f) => Some(f),
        };
        return Ok(Ending {
            fault,
            stopped: watch.stopped(),
        });
    }
}

/// The writer's side of the ring buffer: drains it into the sink and keeps
/// the recording, one vector per channel.
struct Writer {
    consumer: rtrb::Consumer<f32>,
    /// The block being moved (allocated once, before the start).
    block: Vec<f32>,
    /// The recording so far.
    channels: Vec<Vec<f64>>,
}

impl Writer {
    fn new(consumer: rtrb::Consumer<f32>, in_ch: usize, rate: u32, timing: &Timing) -> Self {
        Writer {
            consumer,
            block: Vec::with_capacity(rate as usize * in_ch),
            channels: vec![Vec::with_capacity(timing.expected_frames() as usize); in_ch],
        }
    }

    /// Moves everything in the ring buffer to the recording and the sink.
    fn drain(&mut self, sink: &mut dyn RawSink) -> Result<()> {
        let avail = self.consumer.slots();
        if avail == 0 {
            return Ok(());
        }
        self.block.clear();
        if let Ok(chunk) = self.consumer.read_chunk(avail) {
            self.block.extend(chunk);
        }
        deinterleave(&self.block, &mut self.channels);
        sink.write(&self.block)
    }
}

/// Appends interleaved frames to one vector per channel.
fn deinterleave(block: &[f32], channels: &mut [Vec<f64>]) {
    let n = channels.len();
    for (i, v) in block.iter().enumerate() {
        channels[i % n].push(f64::from(*v));
    }
}

/// How long the writer waits for the output to ramp down after a fault:
/// the ramp twice and a buffer's worth.
fn ramp_wait() -> Duration {
    Duration::from_secs_f64(2.0 * STOP_RAMP_S + 0.02)
}

/// How long closing the streams may take.
const CLOSE_WAIT: Duration = Duration::from_secs(2);

/// Ends the streams. After a fault that came without a stop the output is
/// ramped down first (it is silent by now, or ramped down, otherwise);
/// then both close within [`CLOSE_WAIT`]: a driver whose server has died
/// can hang in its own lock while the stream closes. False when it hung.
fn close_streams(sh: &Shared, streams: (cpal::Stream, cpal::Stream), ramp_first: bool) -> bool {
    if ramp_first {
        sh.stop.store(true, Ordering::Release);
        std::thread::sleep(ramp_wait());
    }
    close_within(streams, CLOSE_WAIT)
}

/// The fault after closing: the first one stays; a driver that hung while
/// closing is a fault of its own when there was none.
fn fault_after_close(fault: Option<String>, closed: bool) -> Option<String> {
    if !closed && fault.is_none() {
        return Some("the sound device did not close (its driver hung)".into());
    }
    fault
}

/// What the callbacks and the host counted as lost.
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq)]
struct Counters {
    /// Input frames dropped because the ring buffer was full.
    dropped: u64,
    /// Overruns of the input.
    input_xruns: u64,
    /// Underruns of the output.
    output_xruns: u64,
    /// Other errors of the driver while streaming.
    driver_errors: u64,
}

impl Counters {
    fn load(sh: &Shared) -> Self {
        Counters {
            dropped: sh.dropped_frames.load(Ordering::Relaxed),
            input_xruns: sh.input_xruns.load(Ordering::Relaxed),
            output_xruns: sh.output_xruns.load(Ordering::Relaxed),
            driver_errors: sh.driver_errors.load(Ordering::Relaxed),
        }
    }

    /// Frames known to be lost: those the callback dropped.
    fn lost_frames(&self) -> u64 {
        self.dropped
    }

    /// Events that lost an unknown number of frames: xruns and errors of
    /// the driver.
    fn interruptions(&self) -> u64 {
        self.input_xruns + self.output_xruns + self.driver_errors
    }

    /// Each kind of loss, in words.
    fn problems(&self) -> Vec<String> {
        let s = |n: u64| if n == 1 { "" } else { "s" };
        let mut problems = Vec::new();
        if self.dropped > 0 {
            problems.push(format!(
                "{} input frames were lost because the writer fell behind",
                self.dropped
            ));
        }
        if self.input_xruns > 0 {
            problems.push(format!(
                "the input overran {} time{} (samples were lost)",
                self.input_xruns,
                s(self.input_xruns)
            ));
        }
        if self.output_xruns > 0 {
            problems.push(format!(
                "the output underran {} time{} (the sweep had gaps)",
                self.output_xruns,
                s(self.output_xruns)
            ));
        }
        if self.driver_errors > 0 {
            problems.push(format!(
                "the sound driver reported {} error{} while streaming (samples may be missing)",
                self.driver_errors,
                s(self.driver_errors)
            ));
        }
        problems
    }
}

/// The input frame of the signal's start (0 when the output never reached
/// it).
fn signal_start_frame(raw: u64) -> usize {
    if raw == u64::MAX { 0 } else { raw as usize }
}

/// The buffer as it ran, in words: what the host chose, and what was asked
/// for when that differs.
fn buffer_words(asked: BufferSize, period: Option<u32>) -> String {
    match (asked, period) {
        (BufferSize::Default, Some(p)) => format!("{p} frames (device default)"),
        (BufferSize::Default, None) => "device default".to_string(),
        (BufferSize::Fixed(b), Some(p)) if p != b => format!("{p} frames ({b} asked for)"),
        (BufferSize::Fixed(b), _) => format!("{b} frames"),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// A sink that keeps what it is given.
    #[derive(Default)]
    struct Keep(Vec<f32>);

    impl RawSink for Keep {
        fn begin(&mut self, _: usize, _: u32) -> Result<()> {
            Ok(())
        }
        fn write(&mut self, interleaved: &[f32]) -> Result<()> {
            self.0.extend_from_slice(interleaved);
            Ok(())
        }
        fn finish(&mut self) -> Result<()> {
            Ok(())
        }
    }

    fn look(in_frames: u64, out_frames: u64, now: Instant) -> Look {
        Look {
            in_frames,
            out_frames,
            failed: false,
            stop_asked: false,
            now,
        }
    }

    #[test]
    fn the_timing_follows_the_rolls_the_ramp_and_the_slack() {
        let t = Timing::new(48_000, 48_000);
        assert_eq!((t.preroll, t.postroll, t.ramp), (12_000, 24_000, 480));
        assert_eq!(t.expected_frames(), 84_000);
        // (1 s + 0.25 s + 0.5 s) · 1.5 + 5 s
        assert_eq!(t.time_limit(), Duration::from_secs_f64(1.75 * 1.5 + 5.0));
        // the ramp twice and 0.1 s
        assert_eq!(t.stop_tail(), 960 + 4_800);
        assert_eq!(t.played(0), 0);
        assert_eq!(t.played(12_100), 100);
        assert_eq!(t.played(u64::MAX), 48_000);
        assert_eq!(
            t.stopped_note(12_000 + 24_000),
            "stopped after 0.50 s of 1.00 s"
        );
        let t = Timing::new(10, 44_100);
        assert_eq!((t.preroll, t.postroll, t.ramp), (11_025, 22_050, 441));
    }

    #[test]
    fn the_writer_ends_after_the_signal_and_its_postroll() {
        let t = Timing::new(1_000, 48_000);
        let t0 = Instant::now();
        let mut w = Watch::new(t0, t);
        let ms = |n: u64| t0 + Duration::from_millis(n);
        assert_eq!(w.look(&look(500, 800, ms(20))), Next::Wait);
        // the whole signal is handed out at input frame 14_000
        assert_eq!(w.look(&look(14_000, 13_000, ms(40))), Next::Wait);
        assert_eq!(w.look(&look(14_000 + 23_999, 40_000, ms(60))), Next::Wait);
        assert_eq!(w.look(&look(14_000 + 24_000, 40_000, ms(80))), Next::Done);
        assert!(!w.stopped());
    }

    #[test]
    fn a_stop_ramps_down_once_and_ends_after_the_ramp() {
        let t = Timing::new(1_000_000, 48_000);
        let t0 = Instant::now();
        let mut w = Watch::new(t0, t);
        let ms = |n: u64| t0 + Duration::from_millis(n);
        let stop = |in_frames, now| Look {
            stop_asked: true,
            ..look(in_frames, in_frames, now)
        };
        assert_eq!(w.look(&stop(1_000, ms(20))), Next::RampDown);
        assert!(w.stopped());
        let tail = t.stop_tail();
        assert_eq!(w.look(&stop(1_000 + tail - 1, ms(40))), Next::Wait);
        assert_eq!(w.look(&stop(1_000 + tail, ms(60))), Next::Done);
    }

    #[test]
    fn the_device_is_gone_when_it_says_so_stalls_or_misses_the_deadline() {
        let t = Timing::new(48_000, 48_000);
        let t0 = Instant::now();
        let mut w = Watch::new(t0, t);
        let failed = Look {
            failed: true,
            ..look(10, 10, t0)
        };
        assert_eq!(
            w.look(&failed),
            Next::Fault("the sound device failed or went away during the measurement".into())
        );
        // an input that moves is alive; one that stands for 2 s is not
        let mut w = Watch::new(t0, t);
        let s = |x: f64| t0 + Duration::from_secs_f64(x);
        assert_eq!(w.look(&look(100, 100, s(1.9))), Next::Wait);
        assert_eq!(w.look(&look(100, 100, s(3.8))), Next::Wait);
        assert_eq!(
            w.look(&look(100, 100, s(3.95))),
            Next::Fault(
                "the input delivered no samples for 2 s; the device may have gone away".into()
            )
        );
        // a device that keeps delivering but never ends the signal
        let mut w = Watch::new(t0, t);
        let limit = t.time_limit().as_secs_f64();
        let mut frames = 0;
        let mut x = 0.0;
        while x < limit {
            frames += 1;
            assert_eq!(w.look(&look(frames, 0, s(x))), Next::Wait);
            x += 1.0;
        }
        assert_eq!(
            w.look(&look(frames + 1, 0, s(limit + 0.01))),
            Next::Fault(
                "the measurement took far longer than the signal; the device stopped keeping time"
                    .into()
            )
        );
    }

    #[test]
    fn every_loss_is_named_and_counted_at_least_once() {
        let none = Counters::default();
        assert!(none.problems().is_empty());
        assert_eq!((none.lost_frames(), none.interruptions()), (0, 0));
        let one = Counters {
            dropped: 1,
            input_xruns: 1,
            output_xruns: 1,
            driver_errors: 1,
        };
        assert_eq!((one.lost_frames(), one.interruptions()), (1, 3));
        assert_eq!(
            one.problems(),
            vec![
                "1 input frames were lost because the writer fell behind",
                "the input overran 1 time (samples were lost)",
                "the output underran 1 time (the sweep had gaps)",
                "the sound driver reported 1 error while streaming (samples may be missing)",
            ]
        );
        let many = Counters {
            dropped: 0,
            input_xruns: 2,
            output_xruns: 0,
            driver_errors: 3,
        };
        // errors of the driver are counted as events, not as frames
        assert_eq!((many.lost_frames(), many.interruptions()), (0, 5));
        assert_eq!(
            many.problems(),
            vec![
                "the input overran 2 times (samples were lost)",
                "the sound driver reported 3 errors while streaming (samples may be missing)",
            ]
        );
        let sh = Shared::new();
        sh.dropped_frames.store(7, Ordering::Relaxed);
        sh.output_xruns.store(2, Ordering::Relaxed);
        assert_eq!(
            Counters::load(&sh),
            Counters {
                dropped: 7,
                output_xruns: 2,
                ..Counters::default()
            }
        );
    }

    #[test]
    fn a_hang_on_closing_is_a_fault_only_when_there_was_none() {
        assert_eq!(fault_after_close(None, true), None);
        assert_eq!(
            fault_after_close(None, false).as_deref(),
            Some("the sound device did not close (its driver hung)")
        );
        assert_eq!(
            fault_after_close(Some("gone".into()), false).as_deref(),
            Some("gone")
        );
        // the ramp twice and 20 ms
        assert_eq!(ramp_wait(), Duration::from_secs_f64(0.04));
    }

    #[test]
    fn only_existing_outputs_carry_the_signal() {
        let a = active_outputs(&[0, 2], 4).unwrap();
        assert_eq!(&a[..4], &[true, false, true, false]);
        assert!(a[4..].iter().all(|x| !x));
        let e = active_outputs(&[4], 4).unwrap_err();
        assert_eq!(
            e.message(),
            "output channel 5 does not exist: the output has 4"
        );
        // the mask holds 64 channels
        assert!(active_outputs(&[63], 70).is_ok());
        assert!(active_outputs(&[64], 70).is_err());
    }

    #[test]
    fn the_buffer_is_described_as_it_ran() {
        assert_eq!(
            buffer_words(BufferSize::Default, Some(512)),
            "512 frames (device default)"
        );
        assert_eq!(buffer_words(BufferSize::Default, None), "device default");
        assert_eq!(
            buffer_words(BufferSize::Fixed(256), Some(512)),
            "512 frames (256 asked for)"
        );
        assert_eq!(
            buffer_words(BufferSize::Fixed(256), Some(256)),
            "256 frames"
        );
        assert_eq!(buffer_words(BufferSize::Fixed(256), None), "256 frames");
        assert_eq!(signal_start_frame(u64::MAX), 0);
        assert_eq!(signal_start_frame(1234), 1234);
    }

    #[test]
    fn the_writer_moves_the_ring_to_the_sink_and_the_channels() {
        let (mut producer, consumer) = rtrb::RingBuffer::<f32>::new(16);
        let t = Timing::new(4, 100);
        let mut w = Writer::new(consumer, 2, 100, &t);
        let mut sink = Keep::default();
        w.drain(&mut sink).unwrap();
        assert!(sink.0.is_empty());
        for v in [1.0, -1.0, 0.5, -0.5, 0.25, -0.25] {
            producer.push(v).unwrap();
        }
        w.drain(&mut sink).unwrap();
        producer.push(0.125).unwrap();
        producer.push(-0.125).unwrap();
        w.drain(&mut sink).unwrap();
        assert_eq!(
            sink.0,
            vec![1.0, -1.0, 0.5, -0.5, 0.25, -0.25, 0.125, -0.125]
        );
        assert_eq!(
            w.channels,
            vec![vec![1.0, 0.5, 0.25, 0.125], vec![-1.0, -0.5, -0.25, -0.125]]
        );
    }

    #[test]
    fn the_input_callback_keeps_whole_frames_and_counts_the_rest() {
        let sh = Shared::new();
        // room for two stereo frames
        let (mut producer, mut consumer) = rtrb::RingBuffer::<f32>::new(4);
        let data: [i16; 6] = [i16::MIN, 0, 16_384, 0, 1, 1];
        let lost = push_input(&data, 2, &mut producer, &sh);
        assert_eq!(lost, 1);
        assert_eq!(sh.in_frames.load(Ordering::Relaxed), 2);
        let got: Vec<f32> = consumer.read_chunk(4).unwrap().into_iter().collect();
        // i16 full scale is 2^15
        assert_eq!(got, vec![-1.0, 0.0, 0.5, 0.0]);
        assert_eq!(f32::from_bits(sh.peak_bits.load(Ordering::Relaxed)), 1.0);
    }

    #[test]
    fn the_player_plays_after_the_preroll_on_its_channels_and_marks_the_start() {
        let sh = Shared::new();
        let t = Timing::new(3, 16);
        assert_eq!(t.preroll, 4);
        let mut active = [false; 64];
        active[1] = true;
        let mut p = Player::new(&[0.5, -0.5, 0.25], 2, active, &t);
        sh.in_frames.store(10, Ordering::Relaxed);
        let mut out = [9.0f32; 2 * 8];
        p.fill(&mut out, &sh);
        assert_eq!(
            out,
            [
                0.0, 0.0, 0.0, 0.0, 0.0, 0.0, 0.0, 0.0, // the preroll
                0.0, 0.5, 0.0, -0.5, 0.0, 0.25, // the signal on channel 2
                0.0, 0.0, // silence after it
            ]
        );
        // the signal's first frame went out when 10 input frames were in,
        // 4 frames into this buffer
        assert_eq!(sh.signal_start.load(Ordering::Relaxed), 14);
        assert_eq!(sh.out_frames.load(Ordering::Relaxed), 8);
    }

    #[test]
    fn a_stop_ramps_the_output_down_to_silence() {
        let sh = Shared::new();
        let t = Timing::new(4_800, 48_000);
        let ramp = t.ramp;
        let mut p = Player::new(&vec![1.0; 4_800], 1, [true; 64], &t);
        let mut out = vec![0.0f32; t.preroll as usize + 100];
        p.fill(&mut out, &sh);
        assert!(out[t.preroll as usize..].iter().all(|&v| v == 1.0));
        sh.stop.store(true, Ordering::Release);
        let mut out = vec![0.0f32; 2 * ramp];
        p.fill(&mut out, &sh);
        let at = t.preroll + 100;
        assert_eq!(sh.stopped_at.load(Ordering::Relaxed), at);
        // the gain of the raised cosine, frame by frame, then silence
        for (i, &v) in out.iter().enumerate() {
            let want = stop_gain(i, ramp) as f32;
            assert!((v - want).abs() < 1e-6, "frame {i}: {v} against {want}");
        }
        assert_eq!(out[ramp..].iter().copied().fold(0.0f32, f32::max), 0.0);
    }

    #[test]
    fn deinterleaving_appends_frame_by_frame() {
        let mut ch = vec![vec![9.0], vec![8.0], vec![7.0]];
        deinterleave(&[1.0, 2.0, 3.0, 4.0, 5.0, 6.0], &mut ch);
        assert_eq!(
            ch,
            vec![
                vec![9.0, 1.0, 4.0],
                vec![8.0, 2.0, 5.0],
                vec![7.0, 3.0, 6.0]
            ]
        );
    }
}
