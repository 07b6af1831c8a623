//! Signals: the sweep, windows, FFT helpers, filters and WAV files.

pub mod biquad;
pub mod fft;
pub mod sweep;
pub mod wav;
pub mod window;
