//! The synchronised exponential sine sweep.
//!
//! x(t) = sin(2π·f1·L·(e^(t/L) − 1)) for 0 ≤ t < T, with instantaneous
//! frequency f1·e^(t/L) (A. Farina, "Simultaneous measurement of impulse
//! response and distortion with a swept-sine technique", 108th AES Convention,
//! Paris, 2000). The rate constant L is rounded so that f1·L is an integer,
//! which makes every harmonic impulse response phase-aligned with the linear
//! one (A. Novak, L. Simon, F. Kadlec, P. Lotton, IEEE Trans. Instrum. Meas.
//! 59(8), 2010): L = round(f1·T̃/ln(f2/f1))/f1, actual length T = L·ln(f2/f1).
//!
//! ```
//! use gliss::signal::sweep::SweepParams;
//!
//! // 20 Hz to 20 kHz in about 2 s, then 1 s of silence, at 48 kHz
//! let design = SweepParams {
//!     requested_length_s: 2.0,
//!     tail_s: 1.0,
//!     ..SweepParams::default()
//! }
//! .design()?;
//! // f1·L is an integer: L = round(20·2/ln 1000)/20 = 6/20 s, so the
//! // sweep lasts T = 0.3·ln 1000 = 2.072 s instead of the 2 s asked for
//! assert_eq!(design.rate_constant_s, 0.3);
//! assert!((design.length_s - 0.3 * 1000f64.ln()).abs() < 1e-12);
//! let x = design.generate();
//! assert_eq!(x.len(), design.total_samples);
//! assert_eq!(design.total_samples, design.sweep_samples + 48_000);
//! // the peak is the level asked for, −20 dBFS = 0.1 (within the sampling
//! // of the sine's crests)
//! let peak = x.iter().fold(0.0f64, |m, v| m.max(v.abs()));
//! assert!((peak - 0.1).abs() < 1e-4);
//! # Ok::<(), gliss::Error>(())
//! ```

use serde::{Deserialize, Serialize};

use crate::error::{Error, Result};
use crate::signal::window;

/// Lowest and highest sample rates gliss accepts.
pub const RATE_RANGE_HZ: (u32, u32) = (8_000, 768_000);
/// Longest sweep accepted, in seconds (memory stays in the hundreds of MB).
pub const MAX_LENGTH_S: f64 = 600.0;
/// Longest silent tail accepted, in seconds.
pub const MAX_TAIL_S: f64 = 60.0;

/// Version of the samples [`SweepDesign::generate`] makes from a set of
/// parameters. Raise it with any change to the generation that changes a
/// sample beyond a WAV's quantisation step: it is part of
/// [`SweepParams::canonical_text`], so the sweep files an earlier gliss
/// wrote are then compared with the new generation again instead of
/// being vouched for by their hash.
pub const SAMPLES_VERSION: u32 = 1;

/// What the user asks for. [`SweepParams::design`] checks it and derives the
/// exact sweep.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct SweepParams {
    /// Start frequency f1 in Hz.
    pub start_hz: f64,
    /// End frequency f2 in Hz.
    pub end_hz: f64,
    /// Requested length T̃ in seconds; the synchronised sweep's length is
    /// within ln(f2/f1)/(2·f1) of it (0.17 s for 20 Hz–20 kHz).
    pub requested_length_s: f64,
    /// Sample rate in Hz.
    pub sample_rate_hz: u32,
    /// Peak level of the sweep in dBFS (0 dBFS = full-scale sine peak).
    pub level_dbfs: f64,
    /// Silence after the sweep, in seconds, for the decay to be recorded.
    pub tail_s: f64,
    /// Fade-in length, as the octaves the sweep covers while fading in.
    pub fade_in_octaves: f64,
    /// Fade-out length, as the octaves the sweep covers while fading out.
    pub fade_out_octaves: f64,
}

impl Default for SweepParams {
    fn default() -> Self {
        SweepParams {
            start_hz: 20.0,
            end_hz: 20_000.0,
            requested_length_s: 5.0,
            sample_rate_hz: 48_000,
            level_dbfs: -20.0,
            tail_s: 2.0,
            fade_in_octaves: 1.0 / 6.0,
            fade_out_octaves: 1.0 / 24.0,
        }
    }
}

/// A checked sweep with everything derived from its parameters.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct SweepDesign {
    /// The parameters it was made from.
    pub params: SweepParams,
    /// Rate constant L in seconds (f1·L is an integer).
    pub rate_constant_s: f64,
    /// Actual sweep length T = L·ln(f2/f1), in seconds, without the tail.
    pub length_s: f64,
    /// Samples in the sweep itself.
    pub sweep_samples: usize,
    /// Samples in the sweep plus its silent tail.
    pub total_samples: usize,
    /// Samples of the half-Hann fade-in.
    pub fade_in_samples: usize,
    /// Samples of the half-Hann fade-out.
    pub fade_out_samples: usize,
}

fn finite(name: &str, v: f64) -> Result<()> {
    if v.is_finite() {
        Ok(())
    } else {
        Err(Error::parameter(format!("{name} must be a finite number")))
    }
}

impl SweepParams {
    /// A fixed text of everything that defines the sweep's samples: every
    /// parameter, one `name: value` line each in a fixed order, floats in
    /// their shortest exact form (`{:?}`, which reads back to the same
    /// bits), after a line naming [`SAMPLES_VERSION`]. Two sets of
    /// parameters have the same text only if they are equal, whatever the
    /// field order or spacing of the JSON they were read from.
    pub fn canonical_text(&self) -> String {
        // no `..`: a new parameter must be added here before it compiles
        let SweepParams {
            start_hz,
            end_hz,
            requested_length_s,
            sample_rate_hz,
            level_dbfs,
            tail_s,
            fade_in_octaves,
            fade_out_octaves,
        } = self;
        format!(
            "gliss sweep samples version: {SAMPLES_VERSION}\n\
             start_hz: {start_hz:?}\n\
             end_hz: {end_hz:?}\n\
             requested_length_s: {requested_length_s:?}\n\
             sample_rate_hz: {sample_rate_hz}\n\
             level_dbfs: {level_dbfs:?}\n\
             tail_s: {tail_s:?}\n\
             fade_in_octaves: {fade_in_octaves:?}\n\
             fade_out_octaves: {fade_out_octaves:?}\n"
        )
    }

    /// Peak amplitude (full scale = 1.0) of `level_dbfs`.
    pub fn amplitude(&self) -> f64 {
        10f64.powf(self.level_dbfs / 20.0)
    }

    /// Checks the parameters and derives the synchronised sweep.
    pub fn design(&self) -> Result<SweepDesign> {
        let p = self;
        finite("--start", p.start_hz)?;
        finite("--end", p.end_hz)?;
        finite("--length", p.requested_length_s)?;
        finite("--level", p.level_dbfs)?;
        finite("--tail", p.tail_s)?;
        let (rmin, rmax) = RATE_RANGE_HZ;
        if p.sample_rate_hz < rmin || p.sample_rate_hz > rmax {
            return Err(Error::parameter(format!(
                "--rate {} Hz is outside {rmin}..{rmax} Hz; use a rate the sound card supports, such as 48000",
                p.sample_rate_hz
            )));
        }
        let fs = f64::from(p.sample_rate_hz);
        if p.start_hz <= 0.0 {
            return Err(Error::parameter(format!(
                "--start must be above 0 Hz (got {} Hz); an exponential sweep cannot start at 0 Hz, try 20",
                p.start_hz
            )));
        }
        if p.start_hz >= p.end_hz {
            return Err(Error::parameter(format!(
                "--start ({} Hz) must be below --end ({} Hz)",
                p.start_hz, p.end_hz
            )));
        }
        let nyquist = fs / 2.0;
        if p.end_hz > nyquist {
            return Err(Error::parameter(format!(
                "--end {} Hz is above the Nyquist frequency {} Hz of --rate {}; lower --end or raise --rate",
                p.end_hz, nyquist, p.sample_rate_hz
            )));
        }
        if p.level_dbfs > 0.0 {
            return Err(Error::parameter(format!(
                "--level {} dBFS is above full scale; the peak level must be 0 dBFS or lower (the default is -20)",
                p.level_dbfs
            )));
        }
        if p.level_dbfs < -120.0 {
            return Err(Error::parameter(format!(
                "--level {} dBFS is below -120 dBFS and would be lost in the noise; use -40 to 0",
                p.level_dbfs
            )));
        }
        if p.tail_s < 0.0 || p.tail_s > MAX_TAIL_S {
            return Err(Error::parameter(format!(
                "--tail {} s must be between 0 and {MAX_TAIL_S} s",
                p.tail_s
            )));
        }
        if p.requested_length_s > MAX_LENGTH_S {
            return Err(Error::parameter(format!(
                "--length {} s is longer than the {MAX_LENGTH_S} s gliss accepts; use --repeat to average shorter sweeps",
                p.requested_length_s
            )));
        }
        let octaves_ln = (p.end_hz / p.start_hz).ln();
        // Synchronisation (Novak et al. 2010): f1·L must be a whole number.
        let cycles = (p.start_hz * p.requested_length_s / octaves_ln).round();
        // The shortest length that rounds to one cycle, for the message.
        let min_length = 0.5 * octaves_ln / p.start_hz;
        if cycles < 1.0 {
            return Err(Error::parameter(format!(
                "--length {} s is too short for a synchronised sweep from {} Hz to {} Hz; it must be at least {:.3} s (longer gives more signal-to-noise)",
                p.requested_length_s,
                p.start_hz,
                p.end_hz,
                min_length.max(0.001)
            )));
        }
        let rate_constant_s = cycles / p.start_hz;
        let length_s = rate_constant_s * octaves_ln;
        let sweep_samples = (length_s * fs).round() as usize;
        let fade = |oct: f64| -> usize {
            let oct = if oct.is_finite() { oct.max(0.0) } else { 0.0 };
            ((rate_constant_s * std::f64::consts::LN_2 * oct * fs).round() as usize)
                .min(sweep_samples / 4)
        };
        let fade_in_samples = fade(p.fade_in_octaves);
        let fade_out_samples = fade(p.fade_out_octaves);
        if sweep_samples < 64 {
            return Err(Error::parameter(format!(
                "a {length_s:.4} s sweep at {} Hz has only {sweep_samples} samples; raise --length",
                p.sample_rate_hz
            )));
        }
        let total_samples = sweep_samples + (p.tail_s * fs).round() as usize;
        Ok(SweepDesign {
            params: p.clone(),
            rate_constant_s,
            length_s,
            sweep_samples,
            total_samples,
            fade_in_samples,
            fade_out_samples,
        })
    }
}

impl SweepDesign {
    /// Sample rate in Hz as f64.
    pub fn fs(&self) -> f64 {
        f64::from(self.params.sample_rate_hz)
    }

    /// Instantaneous frequency f1·e^(t/L) at time t (s) from the sweep start.
    pub fn instantaneous_frequency(&self, t_s: f64) -> f64 {
        self.params.start_hz * (t_s / self.rate_constant_s).exp()
    }

    /// Time by which the n-th harmonic impulse response precedes the linear
    /// one: L·ln n (Farina 2000).
    pub fn harmonic_offset_s(&self, order: u32) -> f64 {
        self.rate_constant_s * f64::from(order).ln()
    }

    /// The sweep followed by its silent tail, peak at `level_dbfs`, with
    /// half-Hann fades at both ends.
    pub fn generate(&self) -> Vec<f64> {
        let fs = self.fs();
        let l = self.rate_constant_s;
        let k = self.params.start_hz * l; // an integer: the synchronisation
        let amp = self.params.amplitude();
        let mut x = vec![0.0; self.total_samples];
        for (n, v) in x[..self.sweep_samples].iter_mut().enumerate() {
            let t = n as f64 / fs;
            // 2π·f1·L·(e^(t/L) − 1); exp_m1 keeps precision near t = 0.
            let phase = std::f64::consts::TAU * k * (t / l).exp_m1();
            *v = amp * phase.sin();
        }
        let sweep = &mut x[..self.sweep_samples];
        window::fade_in(sweep, self.fade_in_samples);
        window::fade_out(sweep, self.fade_out_samples);
        x
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn canonical_text_names_every_parameter_exactly() {
        let p = SweepParams::default();
        let t = p.canonical_text();
        assert_eq!(
            t,
            "gliss sweep samples version: 1\nstart_hz: 20.0\nend_hz: 20000.0\n\
             requested_length_s: 5.0\nsample_rate_hz: 48000\nlevel_dbfs: -20.0\n\
             tail_s: 2.0\nfade_in_octaves: 0.16666666666666666\n\
             fade_out_octaves: 0.041666666666666664\n"
        );
        // the shortest form reads back to the same bits
        let fade: f64 = "0.16666666666666666".parse().unwrap();
        assert_eq!(fade.to_bits(), (1.0f64 / 6.0).to_bits());
        // one ulp of one parameter changes the text
        let q = SweepParams {
            level_dbfs: f64::from_bits((-20.0f64).to_bits() + 1),
            ..p.clone()
        };
        assert_ne!(q.canonical_text(), t);
        let q = SweepParams { tail_s: 2.5, ..p };
        assert_ne!(q.canonical_text(), t);
    }

    fn design(start: f64, end: f64, len: f64) -> SweepDesign {
        SweepParams {
            start_hz: start,
            end_hz: end,
            requested_length_s: len,
            ..Default::default()
        }
        .design()
        .unwrap()
    }

    #[test]
    fn synchronised_rate_constant_matches_published_check() {
        // REFERENCES.md [calc] from Novak et al. 2010's rounding rule:
        // f1 = 20, f2 = 20 k, T̃ = 10 s → f1·L = 29, L = 1.45 s, T = 10.01625 s.
        let d = design(20.0, 20_000.0, 10.0);
        assert!((d.rate_constant_s - 1.45).abs() < 1e-12);
        assert!((d.length_s - 10.01625).abs() < 1e-5, "{}", d.length_s);
    }

    #[test]
    fn harmonic_offsets_match_farina_check_values() {
        // REFERENCES.md [calc]: 20 Hz–20 kHz, T = 1 s unsynchronised gives
        // L = 0.144765 s; the synchronised L is round(20·0.144765)/20 = 0.15 s.
        // Check the formula Δt_n = L·ln n against the published shape with L = 0.144765.
        let l: f64 = 1.0 / (20_000f64 / 20.0).ln();
        assert!((l - 0.144765).abs() < 1e-6);
        for (n, want_ms) in [(2u32, 100.34), (3, 159.04), (5, 232.99)] {
            assert!((l * f64::from(n).ln() * 1e3 - want_ms).abs() < 0.01);
        }
        let d = design(20.0, 20_000.0, 1.0);
        assert!((d.harmonic_offset_s(2) - d.rate_constant_s * 2f64.ln()).abs() < 1e-15);
    }

    #[test]
    fn harmonic_phase_alignment_holds() {
        // Novak et al. 2015: with f1·L integer, m·φ(t) = φ(t + L·ln m) mod 2π.
        let d = design(20.0, 20_000.0, 3.0);
        let l = d.rate_constant_s;
        let k = d.params.start_hz * l;
        let phi = |t: f64| std::f64::consts::TAU * k * (t / l).exp_m1();
        for m in 2..=5u32 {
            let m = f64::from(m);
            for t in [0.0, 0.013, 0.5, 1.1] {
                let diff = (m * phi(t) - phi(t + l * m.ln())).rem_euclid(std::f64::consts::TAU);
                let diff = diff.min(std::f64::consts::TAU - diff);
                assert!(diff < 1e-6, "m={m} t={t} diff={diff}");
            }
        }
    }

    #[test]
    fn instantaneous_frequency_follows_the_exponential_law() {
        // Farina 2000: f(t) = f1·e^(t/L). Measure it from the samples by the
        // zero-crossing intervals and compare with the formula.
        let d = design(50.0, 10_000.0, 2.0);
        let x = d.generate();
        let fs = d.fs();
        let mut crossings = Vec::new();
        for n in 1..d.sweep_samples {
            if x[n - 1] < 0.0 && x[n] >= 0.0 {
                // linear interpolation of the upward zero crossing
                let frac = -x[n - 1] / (x[n] - x[n - 1]);
                crossings.push((n as f64 - 1.0 + frac) / fs);
            }
        }
        let mut checked = 0;
        for w in crossings.windows(2) {
            let t_mid = 0.5 * (w[0] + w[1]);
            if t_mid < 0.1 || t_mid > d.length_s - 0.1 {
                continue;
            }
            let f_meas = 1.0 / (w[1] - w[0]);
            let f_law = d.instantaneous_frequency(t_mid);
            if f_law < 5_000.0 {
                assert!(
                    (f_meas / f_law - 1.0).abs() < 0.005,
                    "t={t_mid} {f_meas} vs {f_law}"
                );
                checked += 1;
            }
        }
        assert!(checked > 100);
        // start and end frequencies within 0.5 % (the issue's criterion)
        assert!((d.instantaneous_frequency(0.0) / 50.0 - 1.0).abs() < 0.005);
        assert!((d.instantaneous_frequency(d.length_s) / 10_000.0 - 1.0).abs() < 0.005);
    }

    #[test]
    fn peak_level_matches_request() {
        for level in [-20.0, -6.0, 0.0, -40.0] {
            let d = SweepParams {
                level_dbfs: level,
                ..Default::default()
            }
            .design()
            .unwrap();
            let x = d.generate();
            let peak = x.iter().fold(0.0f64, |m, v| m.max(v.abs()));
            assert!((20.0 * peak.log10() - level).abs() < 0.1);
            assert!(
                x[d.sweep_samples..].iter().all(|&v| v == 0.0),
                "tail is silent"
            );
            assert_eq!(x[0], 0.0, "fade-in starts at zero");
        }
    }

    #[test]
    fn impossible_parameters_are_refused() {
        let base = SweepParams::default();
        let cases = [
            SweepParams {
                end_hz: 30_000.0,
                ..base.clone()
            },
            SweepParams {
                start_hz: 0.0,
                ..base.clone()
            },
            SweepParams {
                start_hz: -5.0,
                ..base.clone()
            },
            SweepParams {
                start_hz: 1000.0,
                end_hz: 1000.0,
                ..base.clone()
            },
            SweepParams {
                requested_length_s: 0.001,
                ..base.clone()
            },
            SweepParams {
                level_dbfs: 0.5,
                ..base.clone()
            },
            SweepParams {
                level_dbfs: f64::NAN,
                ..base.clone()
            },
            SweepParams {
                sample_rate_hz: 100,
                ..base.clone()
            },
            SweepParams {
                tail_s: -1.0,
                ..base.clone()
            },
        ];
        for c in cases {
            let e = c.design().unwrap_err();
            assert_eq!(e.kind(), crate::error::ErrorKind::InvalidParameter, "{c:?}");
        }
    }
}
