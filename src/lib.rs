//! gliss: swept-sine acoustic measurement.
//!
//! The pipeline as plain functions over slices: a synchronised exponential
//! sweep ([`signal::sweep`]), deconvolution by regularised spectral
//! division ([`deconv`]), the impulse and frequency response
//! ([`analysis`]), PNG plots (`plot`, with the default `plots` feature),
//! the measurement folder ([`session`]) and the self-contained HTML report
//! ([`report`]), all speaking the shared vocabulary of [`model`]. The
//! virtual system ([`audio::virtual_system`]) stands in for a sound card,
//! a loudspeaker and a room.
//!
//! The library never sees the command line: the `gliss` binary
//! (`src/main.rs` and its `cli` modules) parses arguments, draws the
//! progress bar and handles Ctrl-C, and calls these functions. Cargo
//! features: `soundcard` (the sound card through cpal,
//! `audio::soundcard`), `plots` (PNG plots) and `cli` (the binary's
//! dependencies); all on by default. `cargo build --no-default-features
//! --lib` is the pure analysis library, which needs no ALSA headers.
#![warn(missing_docs)]

pub mod analysis;
pub mod audio;
pub mod deconv;
pub mod error;
pub mod folder;
pub mod model;
#[cfg(feature = "plots")]
pub mod plot;
pub mod report;
pub mod session;
pub mod signal;

pub use error::{Error, ErrorKind, Result};
