//! Play-and-record devices. Every device plays a stimulus while recording;
//! the virtual system simulates a loudspeaker in a room, so that the whole
//! pipeline runs without hardware.

pub mod virtual_system;

use crate::error::Result;

/// What a device returns: the recorded channels and anything that went
/// wrong while recording (lost samples, a stop).
#[derive(Debug, Clone)]
pub struct Take {
    /// Recorded channels, full scale ±1.0, each as long as the stimulus.
    pub channels: Vec<Vec<f64>>,
    /// Sample rate in Hz.
    pub sample_rate_hz: u32,
    /// Problems that make the take doubtful (empty when all went well).
    pub problems: Vec<String>,
}

/// A device that plays a stimulus and records at the same time.
pub trait PlayRecord {
    /// A one-line description for the manifest and the terminal.
    fn describe(&self) -> String;
    /// Plays `stimulus` (full scale ±1.0) at `sample_rate_hz` and returns
    /// the recording of the same length.
    fn play_record(&mut self, stimulus: &[f64], sample_rate_hz: u32) -> Result<Take>;
}
