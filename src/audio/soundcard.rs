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
    let devices = host.devices().map_err(|e| {
        device_error(format!(
            "could not list the sound devices ({e}); check that the sound system is running"
        ))
    })?;
    let def_in = host.default_input_device().map(|d| id_of(&d));
    let def_out = host.default_output_device().map(|d| id_of(&d));
    let mut out = Vec::new();
    for (i, d) in devices.enumerate() {
        let id = id_of(&d);
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
        // plugins that neither play nor record (rate converters and the
        // like) are left out; the numbers stay those of the host's list
        if input.is_none() && output.is_none() {
            continue;
        }
        out.push(DeviceInfo {
            index: i + 1,
            name: name_of(&d),
            default_input: def_in.as_deref() == Some(id.as_str()),
            default_output: def_out.as_deref() == Some(id.as_str()),
            id,
            input,
            output,
        });
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
        return devices.into_iter().nth(n.wrapping_sub(1)).ok_or_else(|| {
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
        let fs = f64::from(rate);
        let in_ch = usize::from(self.in_config.channels);
        let out_ch = usize::from(self.out_config.channels);
        let mut active = [false; 64];
        for &c in what.output_channels {
            if c >= out_ch.min(64) {
                return Err(device_error(format!(
                    "output channel {} does not exist: the output has {out_ch}",
                    c + 1
                )));
            }
            active[c] = true;
        }
        let n = what.signal.len() as u64;
        let preroll = (PREROLL_S * fs) as u64;
        let postroll = (POSTROLL_S * fs) as u64;
        let ramp = (STOP_RAMP_S * fs).round() as usize;
        let signal: Arc<[f32]> = what.signal.iter().map(|&v| v as f32).collect();
        let sh = Arc::new(Shared::new());
        // two seconds of room: the writer drains every 20 ms
        let (mut producer, mut consumer) = rtrb::RingBuffer::<f32>::new(2 * rate as usize * in_ch);

        let sh_in = Arc::clone(&sh);
        let input = self
            .input
            .build_input_stream_raw(
                self.in_config,
                self.in_format,
                move |data: &Data, _: &cpal::InputCallbackInfo| {
                    on_input(data, in_ch, &mut producer, &sh_in);
                },
                error_handler(&sh, true),
                Some(Duration::from_secs(2)),
            )
            .map_err(|e| {
                device_error(format!(
                    "could not open the input of {} ({e}); is another program using it?",
                    name_of(&self.input)
                ))
            })?;
        let mut player = Player {
            signal,
            channels: out_ch,
            active,
            preroll,
            ramp,
            pos: 0,
        };
        let sh_out = Arc::clone(&sh);
        let output = self
            .output
            .build_output_stream_raw(
                self.out_config,
                self.out_format,
                move |data: &mut Data, _: &cpal::OutputCallbackInfo| {
                    on_output(data, &mut player, &sh_out);
                },
                error_handler(&sh, false),
                Some(Duration::from_secs(2)),
            )
            .map_err(|e| {
                device_error(format!(
                    "could not open the output of {} ({e}); is another program using it?",
                    name_of(&self.output)
                ))
            })?;

        sink.begin(in_ch, rate)?;
        let mut channels: Vec<Vec<f64>> =
            vec![Vec::with_capacity((n + preroll + postroll) as usize); in_ch];
        let mut block: Vec<f32> = Vec::with_capacity(rate as usize * in_ch);
        let mut drain = |consumer: &mut rtrb::Consumer<f32>,
                         sink: &mut dyn RawSink,
                         channels: &mut Vec<Vec<f64>>|
         -> Result<()> {
            let avail = consumer.slots();
            if avail == 0 {
                return Ok(());
            }
            block.clear();
            if let Ok(chunk) = consumer.read_chunk(avail) {
                block.extend(chunk);
            }
            for (i, v) in block.iter().enumerate() {
                channels[i % in_ch].push(f64::from(*v));
            }
            sink.write(&block)
        };

        input
            .play()
            .map_err(|e| device_error(format!("could not start recording ({e})")))?;
        output
            .play()
            .map_err(|e| device_error(format!("could not start playback ({e})")))?;

        // what the host really chose (a fixed request is only a wish)
        let period = input.buffer_size().ok();
        let started = Instant::now();
        // every wait is bounded: the whole signal, its rolls, and slack
        let deadline =
            started + Duration::from_secs_f64((n + preroll + postroll) as f64 / fs * 1.5 + 5.0);
        let mut last_in = 0u64;
        let mut last_in_change = Instant::now();
        let mut fault: Option<String> = None;
        let mut stop_seen: Option<u64> = None;
        let mut end_in: Option<u64> = None;
        loop {
            std::thread::sleep(Duration::from_millis(20));
            drain(&mut consumer, sink, &mut channels)?;
            let in_now = sh.in_frames.load(Ordering::Acquire);
            let out_now = sh.out_frames.load(Ordering::Acquire);
            let peak = f32::from_bits(sh.peak_bits.swap(0, Ordering::Relaxed));
            progress(Progress {
                done_frames: out_now.saturating_sub(preroll).min(n),
                total_frames: n,
                peak,
            });
            if in_now != last_in {
                last_in = in_now;
                last_in_change = Instant::now();
            }
            if sh.failed.load(Ordering::Acquire) {
                fault = Some("the sound device failed or went away during the measurement".into());
                break;
            }
            if last_in_change.elapsed() > Duration::from_secs_f64(STALL_S) {
                fault = Some(format!(
                    "the input delivered no samples for {STALL_S:.0} s; the device may have gone away"
                ));
                break;
            }
            if Instant::now() > deadline {
                fault = Some("the measurement took far longer than the signal; the device stopped keeping time".into());
                break;
            }
            if what.stop.load(Ordering::SeqCst) && stop_seen.is_none() {
                sh.stop.store(true, Ordering::Release);
                stop_seen = Some(in_now);
            }
            if let Some(at) = stop_seen {
                // the ramp, and a little after it
                if in_now >= at + (2 * ramp) as u64 + (0.1 * fs) as u64 {
                    break;
                }
                continue;
            }
            if end_in.is_none() && out_now >= preroll + n {
                end_in = Some(in_now);
            }
            if end_in.is_some_and(|e| in_now >= e + postroll) {
                break;
            }
        }
        // the output is silent by now (or ramped down); stop it first
        if stop_seen.is_none() && fault.is_some() {
            sh.stop.store(true, Ordering::Release);
            std::thread::sleep(Duration::from_secs_f64(2.0 * STOP_RAMP_S + 0.02));
        }
        // a driver whose server has died can hang in its own lock while the
        // stream closes: close on another thread and wait a bounded time
        let closed = close_within((output, input), Duration::from_secs(2));
        drain(&mut consumer, sink, &mut channels)?;
        if !closed && fault.is_none() {
            fault = Some("the sound device did not close (its driver hung)".into());
        }
        sink.finish()?;

        let dropped = sh.dropped_frames.load(Ordering::Relaxed);
        let in_x = sh.input_xruns.load(Ordering::Relaxed);
        let out_x = sh.output_xruns.load(Ordering::Relaxed);
        let mut problems = Vec::new();
        if dropped > 0 {
            problems.push(format!(
                "{dropped} input frames were lost because the writer fell behind"
            ));
        }
        if in_x > 0 {
            problems.push(format!(
                "the input overran {in_x} time{} (samples were lost)",
                if in_x == 1 { "" } else { "s" }
            ));
        }
        if out_x > 0 {
            problems.push(format!(
                "the output underran {out_x} time{} (the sweep had gaps)",
                if out_x == 1 { "" } else { "s" }
            ));
        }
        let driver = sh.driver_errors.load(Ordering::Relaxed);
        if driver > 0 {
            problems.push(format!(
                "the sound driver reported {driver} error{} while streaming (samples may be missing)",
                if driver == 1 { "" } else { "s" }
            ));
        }
        let stopped = stop_seen.is_some();
        if stopped {
            problems.push(format!(
                "stopped after {:.2} s of {:.2} s",
                sh.out_frames
                    .load(Ordering::Relaxed)
                    .saturating_sub(preroll)
                    .min(n) as f64
                    / fs,
                n as f64 / fs
            ));
        }
        let start = sh.signal_start.load(Ordering::Acquire);
        Ok(Capture {
            channels,
            sample_rate_hz: rate,
            signal_start: if start == u64::MAX { 0 } else { start as usize },
            // an xrun loses an unknown number of frames: count at least one
            lost_frames: dropped + in_x + out_x + driver,
            stopped,
            fault,
            problems,
            stream: format!(
                "input {} ch {}, output {} ch {}, buffer {}",
                in_ch,
                self.in_format,
                out_ch,
                self.out_format,
                match (self.in_config.buffer_size, period) {
                    (BufferSize::Default, Some(p)) => format!("{p} frames (device default)"),
                    (BufferSize::Default, None) => "device default".to_string(),
                    (BufferSize::Fixed(b), Some(p)) if p != b => {
                        format!("{p} frames ({b} asked for)")
                    }
                    (BufferSize::Fixed(b), _) => format!("{b} frames"),
                }
            ),
        })
    }
}
