//! Play-and-record devices. A device plays a mono signal on chosen output
//! channels while it records all of its input channels, and hands every
//! captured block to a [`RawSink`] as it arrives, so that the raw recording
//! is on disk while it is being made. The sound card (`soundcard`, with the
//! cargo feature `soundcard`) and the virtual system ([`virtual_system`],
//! always there) are the two implementations.

#[cfg(feature = "soundcard")]
pub mod soundcard;
pub mod virtual_system;

use std::sync::atomic::AtomicBool;

use crate::error::Result;

/// What to play.
#[derive(Debug, Clone, Copy)]
pub struct Playback<'a> {
    /// The signal, full scale ±1.0, played on every channel of
    /// `output_channels`.
    pub signal: &'a [f64],
    /// Sample rate in Hz.
    pub sample_rate_hz: u32,
    /// Output channels that carry the signal, 0-based; the others are silent.
    pub output_channels: &'a [usize],
    /// Set (by Ctrl-C) to stop early: the output ramps down, the recording
    /// so far is kept.
    pub stop: &'a AtomicBool,
}

/// Receives the recording while it is captured: interleaved frames of
/// `channels` samples, full scale ±1.0.
pub trait RawSink {
    /// Called once before the first block.
    fn begin(&mut self, channels: usize, sample_rate_hz: u32) -> Result<()>;
    /// One block of interleaved frames.
    fn write(&mut self, interleaved: &[f32]) -> Result<()>;
    /// Called once after the last block (also after a stop or a fault).
    fn finish(&mut self) -> Result<()>;
}

/// A sink that keeps nothing (for callers that only need the [`Capture`]).
#[derive(Debug, Default)]
pub struct NoSink;

impl RawSink for NoSink {
    fn begin(&mut self, _: usize, _: u32) -> Result<()> {
        Ok(())
    }
    fn write(&mut self, _: &[f32]) -> Result<()> {
        Ok(())
    }
    fn finish(&mut self) -> Result<()> {
        Ok(())
    }
}

/// How far a measurement is, for the progress bar and the level meter.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Progress {
    /// Frames of the signal played so far.
    pub done_frames: u64,
    /// Frames of the signal in all.
    pub total_frames: u64,
    /// Highest absolute input sample since the last report, full scale 1.0.
    pub peak: f32,
}

/// What a device recorded.
#[derive(Debug, Clone, Default)]
pub struct Capture {
    /// Every recorded input channel, full scale ±1.0, as captured.
    pub channels: Vec<Vec<f64>>,
    /// Sample rate in Hz.
    pub sample_rate_hz: u32,
    /// The input frame at which the first frame of the signal was handed
    /// to the output (0 for the virtual system). Without a loopback
    /// reference this is known to about one buffer.
    pub signal_start: usize,
    /// Input frames known to be lost (dropped because the writer fell
    /// behind); the measurement is invalid when this is not zero.
    pub lost_frames: u64,
    /// Overruns, underruns and errors of the driver while streaming: each
    /// loses an unknown number of frames (the measurement is invalid when
    /// this is not zero). Counted apart from `lost_frames`, which counts
    /// frames: a driver that fails thousands of times in a second has not
    /// lost thousands of frames.
    pub interruptions: u64,
    /// Set when the measurement was stopped (Ctrl-C) before the signal
    /// ended.
    pub stopped: bool,
    /// Set when the device failed or went away during the measurement.
    pub fault: Option<String>,
    /// What went wrong, in words (empty when all went well).
    pub problems: Vec<String>,
    /// A description of the stream as it ran (format, buffer), for the
    /// manifest.
    pub stream: String,
}

/// A device that plays and records at the same time.
pub trait PlayRecord {
    /// A one-line description for the manifest and the terminal.
    fn describe(&self) -> String;
    /// Input channels the device records.
    fn input_channels(&self) -> usize;
    /// Output channels the device plays.
    fn output_channels(&self) -> usize;
    /// Refuses a sample rate the device cannot run at (checked before
    /// anything is written).
    fn check_rate(&self, sample_rate_hz: u32) -> Result<()>;
    /// Plays `what` while recording; every block goes to `sink` as it is
    /// captured, `progress` hears about it a few times a second. Returns
    /// what was recorded, including after a stop or lost samples (which
    /// are reported in the [`Capture`], not as an error, so that the raw
    /// file is kept and described).
    fn play_record(
        &mut self,
        what: &Playback<'_>,
        sink: &mut dyn RawSink,
        progress: &mut dyn FnMut(Progress),
    ) -> Result<Capture>;
}

/// The ramp applied when a measurement is stopped: the output falls to
/// silence over this many seconds instead of stopping with a click that
/// could hurt a tweeter (common practice).
pub const STOP_RAMP_S: f64 = 0.01;

/// The gain of the stop ramp `frames_since_stop` frames after the stop, for
/// a ramp of `ramp_frames` frames (raised cosine from 1 to 0).
pub fn stop_gain(frames_since_stop: usize, ramp_frames: usize) -> f64 {
    if frames_since_stop >= ramp_frames {
        return 0.0;
    }
    let x = frames_since_stop as f64 / ramp_frames.max(1) as f64;
    0.5 * (1.0 + (std::f64::consts::PI * x).cos())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn the_stop_ramp_falls_smoothly_from_one_to_zero() {
        let n = 480;
        assert_eq!(stop_gain(0, n), 1.0);
        assert!((stop_gain(n / 2, n) - 0.5).abs() < 1e-12);
        assert_eq!(stop_gain(n, n), 0.0);
        let mut last = 1.0;
        for i in 0..=n {
            let g = stop_gain(i, n);
            assert!(g <= last && (0.0..=1.0).contains(&g));
            // no step larger than the raised cosine's steepest slope, π/2n
            assert!(last - g <= std::f64::consts::PI / (2.0 * n as f64) + 1e-12);
            last = g;
        }
    }
}
