//! Signals: the sweep, windows, FFT helpers, filters, WAV files and the
//! special functions of closed forms (Bessel J1, the baffled piston).

pub mod biquad;
pub mod fft;
pub mod special;
pub mod sweep;
pub mod wav;
pub mod window;
