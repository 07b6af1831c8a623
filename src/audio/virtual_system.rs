//! The virtual system: a simulated loudspeaker in a simulated small room,
//! recorded through a simulated interface with latency and background noise.
//!
//! The scenario is the project's own invention: the "Kestrel 5" two-way
//! monitor (virtual) on a stand, measured at 1.2 m in a bare 4.6 × 3.8 ×
//! 2.6 m rehearsal room (virtual). Nothing here is a model of a real product.
//!
//! It plays and records like a sound card, through [`PlayRecord`]:
//!
//! ```
//! use std::sync::atomic::AtomicBool;
//!
//! use gliss::audio::virtual_system::VirtualSystem;
//! use gliss::audio::{NoSink, PlayRecord, Playback};
//! use gliss::signal::sweep::SweepParams;
//!
//! let design = SweepParams {
//!     requested_length_s: 1.0,
//!     tail_s: 0.5,
//!     ..SweepParams::default()
//! }
//! .design()?;
//! let sweep = design.generate();
//! let mut system = VirtualSystem::default();
//! let stop = AtomicBool::new(false);
//! let capture = system.play_record(
//!     &Playback {
//!         signal: &sweep,
//!         sample_rate_hz: 48_000,
//!         output_channels: &[0],
//!         stop: &stop,
//!     },
//!     &mut NoSink,
//!     &mut |_| {},
//! )?;
//! // one microphone, the whole sweep and more, nothing lost or stopped
//! assert_eq!(capture.channels.len(), 1);
//! assert!(capture.channels[0].len() >= sweep.len());
//! assert_eq!(capture.lost_frames, 0);
//! assert!(!capture.stopped && capture.fault.is_none());
//! // the loudspeaker is heard: the recording is not silent
//! assert!(capture.channels[0].iter().any(|v| v.abs() > 1e-3));
//! # Ok::<(), gliss::Error>(())
//! ```

use rand::{SeedableRng, rngs::StdRng};
use rand_distr::{Distribution, Normal};

use crate::analysis::bands;
use crate::audio::{Capture, PlayRecord, Playback, Progress, RawSink, STOP_RAMP_S, stop_gain};
use crate::error::{Error, Result};
use crate::signal::biquad::Biquad;
use crate::signal::fft;

/// Speed of sound used by the room model, m/s (20 °C, common practice).
const SPEED_OF_SOUND: f64 = 343.0;

/// Parameters of the virtual loudspeaker, room and interface.
#[derive(Debug, Clone, PartialEq)]
pub struct VirtualSystem {
    /// Interface round-trip latency in samples.
    pub latency_samples: usize,
    /// Loudspeaker-to-microphone distance in metres.
    pub distance_m: f64,
    /// Room dimensions (length, width, height) in metres.
    pub room_m: (f64, f64, f64),
    /// Reverberation time of the diffuse tail per octave band: (nominal
    /// centre Hz, seconds), for the octaves 31.5 Hz–16 kHz.
    pub reverberation_s: [(f64, f64); 10],
    /// Level of the diffuse tail relative to the direct sound, in dB.
    pub tail_level_db: f64,
    /// Scale of the walls' reflection factors (1 = the bare room; less
    /// where panels absorb the first reflections).
    pub reflection_gain: f64,
    /// Quadratic and cubic coefficients of the driver's nonlinearity,
    /// applied to its excursion (the drive low-passed at 120 Hz),
    /// normalised to −20 dBFS peak.
    pub nonlinearity: (f64, f64),
    /// RMS level of the background noise in dBFS.
    pub noise_dbfs: f64,
    /// Seed of the noise generators (a take is reproducible).
    pub seed: u64,
    /// Record a second input wired back from output 2 (a loopback through
    /// the interface, with the same latency): for `--reference 2`.
    pub loopback: bool,
    /// Faults to inject, for tests of what a measurement does when the
    /// sound path fails.
    pub faults: Faults,
    /// Instead of the loudspeaker in the room: its woofer on the bench,
    /// wired for an impedance measurement (input 1 the amplifier side of
    /// the sense resistor, input 2 across the driver).
    pub driver: Option<VirtualDriver>,
    /// Where around the loudspeaker the microphone is (`--orbit`,
    /// `--angle`): the loudspeaker then radiates with its directivity
    /// ([`loudspeaker_directivity`]); `None`, the default, is on axis and
    /// renders exactly as before directivity existed.
    pub position: Option<crate::model::Position>,
}

/// The Kestrel 5's woofer as a baffled piston, radius in m.
pub const WOOFER_RADIUS_M: f64 = 0.065;
/// Its tweeter in a shallow waveguide, as a piston of this radius in the
/// horizontal plane and a larger (narrower beam) in the vertical, m.
pub const TWEETER_RADIUS_M: (f64, f64) = (0.018, 0.03);
/// The crossover frequency, Hz.
pub const CROSSOVER_HZ: f64 = 2200.0;

/// The Kestrel 5's (invented) far-field pressure at `f_hz` and `p`
/// relative to on axis, real (no phase of its own): the woofer's and the
/// tweeter's baffled-piston patterns 2·J1(ka·sin θ)/(ka·sin θ) (Kinsler
/// et al., ch. 7) weighted by complementary 4th-order crossover gains that
/// sum to one on axis; behind the baffle the level at 90° falls further
/// as the cabinet shadows it, less at low frequencies (the cabinet is
/// small against the wavelength there: the source is nearly omnidirectional
/// below about 150 Hz).
pub fn loudspeaker_directivity(f_hz: f64, p: crate::model::Position) -> f64 {
    use crate::signal::special::piston_directivity;
    let k = std::f64::consts::TAU * f_hz / SPEED_OF_SOUND;
    let tweeter = match p.orbit {
        crate::model::Orbit::Horizontal => TWEETER_RADIUS_M.0,
        crate::model::Orbit::Vertical => TWEETER_RADIUS_M.1,
    };
    let high = 1.0 / (1.0 + (CROSSOVER_HZ / f_hz.max(1e-3)).powi(4));
    let front = |theta: f64| {
        (1.0 - high) * piston_directivity(k * WOOFER_RADIUS_M, theta)
            + high * piston_directivity(k * tweeter, theta)
    };
    let off = f64::from(p.off_axis_deg()).to_radians();
    let right = std::f64::consts::FRAC_PI_2;
    if off <= right {
        front(off)
    } else {
        let shadow = 1.0 / (1.0 + (f_hz / 150.0).powi(2)).sqrt();
        front(right) * shadow.powf((off - right) / right)
    }
}

/// The Kestrel 5's woofer (virtual, invented) on the bench behind a sense
/// resistor: the lumped model Z = Re + jωLe + Bl²/(Rms + jωMms + 1/(jωCms))
/// (Small 1972's equivalent circuit) with its small-signal parameters.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct VirtualDriver {
    /// Voice-coil DC resistance, Ω.
    pub re_ohm: f64,
    /// Voice-coil inductance, H.
    pub le_h: f64,
    /// Resonance, Hz.
    pub fs_hz: f64,
    /// Mechanical Q.
    pub qms: f64,
    /// Electrical Q.
    pub qes: f64,
    /// Moving mass, kg.
    pub mms_kg: f64,
    /// The sense resistor in series, Ω.
    pub sense_ohms: f64,
    /// The amplifier's output as the pads deliver it to the inputs, per
    /// unit of the sweep (the gain of amplifier and pad).
    pub gain: f64,
}

impl VirtualDriver {
    /// The Kestrel 5's woofer (invented): Re 5.6 Ω, fs 48 Hz, Qms 3.8,
    /// Qes 0.42, Le 0.45 mH, Mms 14 g, behind `sense_ohms`.
    pub fn kestrel_woofer(sense_ohms: f64) -> Self {
        VirtualDriver {
            re_ohm: 5.6,
            le_h: 0.45e-3,
            fs_hz: 48.0,
            qms: 3.8,
            qes: 0.42,
            mms_kg: 0.014,
            sense_ohms,
            gain: 0.5,
        }
    }

    /// Z at `f` Hz (Re at 0 Hz).
    pub fn z(&self, f: f64) -> rustfft::num_complex::Complex<f64> {
        use rustfft::num_complex::Complex;
        if f <= 0.0 {
            return Complex::new(self.re_ohm, 0.0);
        }
        let w0 = std::f64::consts::TAU * self.fs_hz;
        let cms = 1.0 / (w0 * w0 * self.mms_kg);
        let rms = w0 * self.mms_kg / self.qms;
        let bl2 = w0 * self.mms_kg * self.re_ohm / self.qes;
        let w = std::f64::consts::TAU * f;
        let j = Complex::new(0.0, 1.0);
        self.re_ohm + j * w * self.le_h + bl2 / (rms + j * w * self.mms_kg + 1.0 / (j * w * cms))
    }

    /// The two inputs for a drive signal: V1 = gain·drive, V2 = V1
    /// filtered by Z/(R + Z) in the frequency domain (over a buffer twice
    /// as long, so the driver's ringing does not wrap), both delayed by
    /// the interface's latency.
    pub fn render(&self, drive: &[f64], fs: f64, latency: usize) -> (Vec<f64>, Vec<f64>) {
        let n = drive.len();
        let len = fft::fast_len(2 * n);
        let mut spec = fft::rfft(drive, len);
        let df = fs / len as f64;
        for (k, c) in spec.iter_mut().enumerate() {
            let z = self.z(k as f64 * df);
            *c *= self.gain * z / (self.sense_ohms + z);
        }
        let last = spec.len() - 1;
        spec[0].im = 0.0;
        spec[last].im = 0.0;
        let across = fft::irfft(&mut spec, len);
        let mut v1 = vec![0.0; n];
        let mut v2 = vec![0.0; n];
        for i in latency..n {
            v1[i] = self.gain * drive[i - latency];
            v2[i] = across[i - latency];
        }
        (v1, v2)
    }
}

/// Faults the virtual interface can be told to have.
#[derive(Debug, Clone, Copy, PartialEq, Default)]
pub struct Faults {
    /// Lose this many input frames (an overrun) at the given time, in s.
    pub lose_frames_at_s: Option<(f64, usize)>,
    /// Stop as if Ctrl-C had been pressed at this time, in s.
    pub stop_at_s: Option<f64>,
    /// Go away (as an unplugged interface does) at this time, in s.
    pub fail_at_s: Option<f64>,
}

/// Sample rates the virtual interface runs at, Hz.
pub const VIRTUAL_RATES: [u32; 6] = [44_100, 48_000, 88_200, 96_000, 176_400, 192_000];

impl Default for VirtualSystem {
    fn default() -> Self {
        VirtualSystem {
            latency_samples: 293,
            distance_m: 1.2,
            room_m: (4.6, 3.8, 2.6),
            // a bare room: long at low frequencies (little absorbs them),
            // shorter towards high ones (air, soft furnishings)
            reverberation_s: [
                (31.5, 1.15),
                (63.0, 1.0),
                (125.0, 0.85),
                (250.0, 0.7),
                (500.0, 0.6),
                (1000.0, 0.55),
                (2000.0, 0.5),
                (4000.0, 0.45),
                (8000.0, 0.38),
                (16000.0, 0.3),
            ],
            tail_level_db: -4.0,
            reflection_gain: 1.0,
            nonlinearity: (0.04, 0.03),
            noise_dbfs: -96.0,
            seed: 2026,
            loopback: false,
            faults: Faults::default(),
            driver: None,
            position: None,
        }
    }
}

/// Where the monitor stands in the room (x, y, z), metres.
const MONITOR_AT: (f64, f64, f64) = (1.1, 1.4, 1.2);

/// Where the virtual subwoofer stands: on the floor, 0.6 m behind the
/// monitor and 0.9 m to its side, metres.
const SUBWOOFER_AT: (f64, f64, f64) = (0.5, 2.3, 0.3);

/// The virtual subwoofer's crossover: a 4th-order Linkwitz–Riley low-pass
/// (two 2nd-order Butterworth sections), Hz.
pub const SUBWOOFER_CROSSOVER_HZ: f64 = 80.0;

/// Adds `gain`·δ(t − `at`) to `buf`, band-limited: a Hann-windowed sinc
/// over ±16 samples, so that fractional arrival times are exact in phase.
pub fn add_fractional_impulse(buf: &mut [f64], at: f64, gain: f64) {
    let hw = 16isize;
    let c = at.floor() as isize;
    for i in (c - hw + 1)..=(c + hw) {
        if i < 0 || i as usize >= buf.len() {
            continue;
        }
        let x = i as f64 - at;
        let s = if x.abs() < 1e-12 {
            1.0
        } else {
            (std::f64::consts::PI * x).sin() / (std::f64::consts::PI * x)
        };
        let w = 0.5 + 0.5 * (std::f64::consts::PI * x / hw as f64).cos();
        buf[i as usize] += gain * s * w;
    }
}

impl VirtualSystem {
    /// The loudspeaker's linear part: a closed-box high-pass, a cone
    /// resonance, a crossover dip and the tweeter's roll-off.
    pub fn loudspeaker_filters(&self, fs: f64) -> Vec<Biquad> {
        let nyq = fs / 2.0;
        vec![
            Biquad::highpass(fs, 58.0, 0.9),
            Biquad::peaking(fs, 1750.0, 4.0, 3.5),
            Biquad::peaking(fs, 2900.0, 2.0, -2.5),
            Biquad::lowpass(fs, (19_000.0f64).min(0.45 * fs).min(nyq * 0.9), 0.75),
        ]
    }

    /// The room's impulse response from the loudspeaker to the microphone,
    /// time zero at the loudspeaker: the direct sound, the six first-order
    /// reflections of a rectangular room (image sources) and an
    /// exponentially decaying diffuse tail.
    pub fn room_impulse(&self, fs: f64) -> Vec<f64> {
        self.room_impulse_from(fs, MONITOR_AT, self.seed ^ 0x5eed_7a11)
    }

    /// The room's impulse response from a source at `src` (metres) to the
    /// microphone (placed from the monitor's position as
    /// [`Self::room_impulse`] places it), time zero at the source; its
    /// direct sound scaled by the monitor's distance over its own (the
    /// inverse-distance law), its diffuse tail drawn from `tail_seed`.
    pub fn room_impulse_from(&self, fs: f64, src: (f64, f64, f64), tail_seed: u64) -> Vec<f64> {
        let (lx, ly, lz) = self.room_m;
        // the microphone's position in the room, metres
        let mic = (MONITOR_AT.0 + self.distance_m, MONITOR_AT.1 + 0.15, 1.25);
        let longest = self.reverberation_s.iter().map(|b| b.1).fold(0.0, f64::max);
        let len = ((longest * 1.5 + 0.05) * fs) as usize;
        let mut h = vec![0.0; len];
        let dist = |p: (f64, f64, f64)| {
            ((p.0 - mic.0).powi(2) + (p.1 - mic.1).powi(2) + (p.2 - mic.2).powi(2)).sqrt()
        };
        let direct = dist(src);
        add_fractional_impulse(
            &mut h,
            direct / SPEED_OF_SOUND * fs,
            dist(MONITOR_AT) / direct,
        );
        // image sources across the six walls, reflection factor per wall
        let images = [
            ((-src.0, src.1, src.2), 0.8),
            ((2.0 * lx - src.0, src.1, src.2), 0.75),
            ((src.0, -src.1, src.2), 0.8),
            ((src.0, 2.0 * ly - src.1, src.2), 0.7),
            ((src.0, src.1, -src.2), 0.85),
            ((src.0, src.1, 2.0 * lz - src.2), 0.6),
        ];
        for (p, r) in images {
            let d = dist(p);
            add_fractional_impulse(
                &mut h,
                d / SPEED_OF_SOUND * fs,
                self.reflection_gain * r * dist(MONITOR_AT) / d,
            );
        }
        // diffuse tail: noise split into octave bands (the band filters of
        // the analysis, which together pass a flat spectrum), each under
        // its own exponential envelope, starting after the first reflections
        let mut rng = StdRng::seed_from_u64(tail_seed);
        let normal = Normal::new(0.0, 1.0).expect("unit normal");
        let t0 = (direct / SPEED_OF_SOUND + 0.006) * fs;
        let amp = 10f64.powf(self.tail_level_db / 20.0) * (48_000.0 / fs).sqrt() * 0.05;
        let noise: Vec<f64> = (0..len).map(|_| normal.sample(&mut rng)).collect();
        let n = fft::fast_len(len);
        let spectrum = fft::rfft(&noise, n);
        let df = fs / n as f64;
        for (x, (_, t60)) in (-5..=4).zip(self.reverberation_s) {
            let band = bands::Band::new(1, x);
            if band.edges().0 >= fs / 2.0 {
                continue;
            }
            let mut spec: Vec<_> = spectrum
                .iter()
                .enumerate()
                .map(|(k, c)| c * band.power_gain(k as f64 * df).sqrt())
                .collect();
            let part = fft::irfft(&mut spec, n);
            // energy decays 60 dB in T: amplitude e^(−6.9078·t/T)
            let k = 3.0 * std::f64::consts::LN_10 / t60;
            for (i, v) in h.iter_mut().enumerate() {
                let t = (i as f64 - t0) / fs;
                if t >= 0.0 {
                    let onset = (t / 0.004).min(1.0);
                    *v += amp * onset * (-k * t).exp() * part[i];
                }
            }
        }
        h
    }

    /// Turns a stimulus into a recording of the same length: driver
    /// nonlinearity, loudspeaker filters, room, latency, noise.
    pub fn render(&self, stimulus: &[f64], fs: f64) -> Vec<f64> {
        // The driver's nonlinearity acts on its cone excursion, which falls
        // 12 dB per octave above the box resonance: a 2nd-order low-pass
        // of the drive stands for it. Distortion therefore rises towards
        // low frequencies, as a real woofer's does, and its harmonics stay
        // far below the Nyquist frequency (no aliasing).
        let (a2, a3) = self.nonlinearity;
        let norm = 0.1; // −20 dBFS peak
        let mut excursion: Vec<f64> = stimulus.iter().map(|&s| s / norm).collect();
        Biquad::lowpass(fs, 120.0, 0.7).process(&mut excursion);
        // The even-order term also shifts the cone's rest position while
        // the sweep plays; a microphone does not hear that shift, so its
        // slow part (below a few hertz) is taken out, zero-phase.
        let mut even: Vec<f64> = excursion.iter().map(|&e| a2 * e * e).collect();
        let mut slow = even.clone();
        let lp = Biquad::lowpass(fs, 4.0, std::f64::consts::FRAC_1_SQRT_2);
        lp.process(&mut slow);
        slow.reverse();
        lp.process(&mut slow);
        slow.reverse();
        for (v, s) in even.iter_mut().zip(&slow) {
            *v -= s;
        }
        let mut x: Vec<f64> = stimulus
            .iter()
            .zip(&excursion)
            .zip(&even)
            .map(|((&s, &e), &ev)| s + norm * (ev + a3 * e * e * e))
            .collect();
        for f in self.loudspeaker_filters(fs) {
            f.process(&mut x);
        }
        if let Some(p) = self.position {
            // off axis: the loudspeaker's directivity, as the microphone
            // at that angle hears it (the room's reflections get the same
            // filter: gate them off for the loudspeaker's own response)
            x = crate::signal::fft::zero_phase_filter(&x, fs, |f| loudspeaker_directivity(f, p));
        }
        let room = self.room_impulse(fs);
        // sensitivity and distance: −6 dB at 1.2 m into the interface
        let gain = 0.5;
        let wet = fft::convolve(&x, &room);
        let mut y = vec![0.0; stimulus.len()];
        for (i, v) in y.iter_mut().enumerate().skip(self.latency_samples) {
            *v = gain * wet.get(i - self.latency_samples).copied().unwrap_or(0.0);
        }
        // background noise: white plus a low-frequency rumble of equal power
        let mut rng = StdRng::seed_from_u64(self.seed);
        let normal = Normal::new(0.0, 1.0).expect("unit normal");
        let sigma = 10f64.powf(self.noise_dbfs / 20.0) / 2f64.sqrt();
        let pole = (-std::f64::consts::TAU * 80.0 / fs).exp();
        // a one-pole low-pass of unit-variance noise has variance (1−p)/(1+p)
        let rumble_norm = ((1.0 + pole) / (1.0 - pole)).sqrt();
        let mut low = 0.0;
        for v in y.iter_mut() {
            let white: f64 = normal.sample(&mut rng);
            low = pole * low + (1.0 - pole) * normal.sample(&mut rng);
            *v += sigma * (white + low * rumble_norm);
        }
        y
    }
}

impl VirtualSystem {
    /// What the microphone hears of the subwoofer on output 3 (invented,
    /// for trying `gliss measure --each-output` and `gliss align` without
    /// a sound card): the drive through a 4th-order Linkwitz–Riley
    /// low-pass at [`SUBWOOFER_CROSSOVER_HZ`], the same sensitivity as the
    /// monitor, from its place in the room, with the interface's latency.
    /// The monitor's path carries the noise.
    pub fn render_subwoofer(&self, drive: &[f64], fs: f64) -> Vec<f64> {
        let mut x = drive.to_vec();
        let section = Biquad::lowpass(fs, SUBWOOFER_CROSSOVER_HZ, std::f64::consts::FRAC_1_SQRT_2);
        section.process(&mut x);
        section.process(&mut x);
        let room = self.room_impulse_from(fs, SUBWOOFER_AT, self.seed ^ 0x50b_0a5e);
        let wet = fft::convolve(&x, &room);
        let gain = 0.5;
        let mut y = vec![0.0; drive.len()];
        for (i, v) in y.iter_mut().enumerate().skip(self.latency_samples) {
            *v = gain * wet.get(i - self.latency_samples).copied().unwrap_or(0.0);
        }
        y
    }

    /// The same room after treatment (the demo's invented scenario):
    /// broadband panels at the first reflection points and on the rear
    /// wall, and two corner bass traps. The first reflections fall to a
    /// third, the decay shortens most from 250 Hz to 4 kHz.
    pub fn treated(&self) -> Self {
        VirtualSystem {
            reflection_gain: 0.35,
            reverberation_s: [
                (31.5, 1.05),
                (63.0, 0.82),
                (125.0, 0.6),
                (250.0, 0.42),
                (500.0, 0.34),
                (1000.0, 0.31),
                (2000.0, 0.3),
                (4000.0, 0.29),
                (8000.0, 0.27),
                (16000.0, 0.22),
            ],
            tail_level_db: self.tail_level_db - 3.0,
            ..self.clone()
        }
    }
}

impl PlayRecord for VirtualSystem {
    fn describe(&self) -> String {
        if let Some(d) = &self.driver {
            return format!(
                "virtual system (simulated): the Kestrel 5's woofer on the bench behind {} Ω; input 1 the amplifier side of the resistor, input 2 across the driver; latency {} samples",
                d.sense_ohms, self.latency_samples
            );
        }
        format!(
            "virtual system (simulated): Kestrel 5 monitor at {:.1} m in a {:.1} × {:.1} × {:.1} m room, T {:.2} s at 125 Hz to {:.2} s at 4 kHz, latency {} samples{}{}",
            self.distance_m,
            self.room_m.0,
            self.room_m.1,
            self.room_m.2,
            self.reverberation_s[2].1,
            self.reverberation_s[7].1,
            self.latency_samples,
            if self.loopback {
                "; input 2 is a loopback from output 2"
            } else {
                ""
            },
            self.position.map_or(String::new(), |p| format!(
                "; microphone at {} off the loudspeaker's axis",
                p.words()
            ))
        )
    }

    fn input_channels(&self) -> usize {
        if self.loopback || self.driver.is_some() {
            2
        } else {
            1
        }
    }

    fn output_channels(&self) -> usize {
        if self.driver.is_some() { 2 } else { 3 }
    }

    fn check_rate(&self, rate: u32) -> Result<()> {
        if VIRTUAL_RATES.contains(&rate) {
            return Ok(());
        }
        Err(Error::new(
            crate::ErrorKind::Device,
            format!(
                "the virtual interface cannot run at {rate} Hz; it runs at {} Hz; choose one with --rate",
                VIRTUAL_RATES.map(|r| r.to_string()).join(", ")
            ),
        ))
    }

    /// Output 1 drives the loudspeaker, heard by the microphone on input
    /// 1; with `loopback`, output 2 is wired to input 2.
    fn play_record(
        &mut self,
        what: &Playback<'_>,
        sink: &mut dyn RawSink,
        progress: &mut dyn FnMut(Progress),
    ) -> Result<Capture> {
        let rate = what.sample_rate_hz;
        self.check_rate(rate)?;
        if what.signal.is_empty() {
            return Err(Error::parameter("nothing to play: the signal is empty"));
        }
        let fs = f64::from(rate);
        let n = what.signal.len();
        // a stop: Ctrl-C before the start, or an injected one
        let stop_at = if what.stop.load(std::sync::atomic::Ordering::SeqCst) {
            Some(0)
        } else {
            self.faults.stop_at_s.map(|t| ((t * fs) as usize).min(n))
        };
        let ramp = (STOP_RAMP_S * fs).round() as usize;
        let drive_of = |ch: usize| -> Vec<f64> {
            if !what.output_channels.contains(&ch) {
                return vec![0.0; n];
            }
            let mut d = what.signal.to_vec();
            if let Some(s) = stop_at {
                for (i, v) in d.iter_mut().enumerate().skip(s) {
                    *v *= stop_gain(i - s, ramp);
                }
            }
            d
        };
        let mut channels = match &self.driver {
            Some(d) => {
                let (v1, v2) = d.render(&drive_of(0), fs, self.latency_samples);
                // the interface's noise on both inputs (no room is heard)
                let mut rng = StdRng::seed_from_u64(self.seed);
                let normal =
                    Normal::new(0.0, 10f64.powf(self.noise_dbfs / 20.0)).expect("a normal");
                let mut inputs = vec![v1, v2];
                for v in inputs.iter_mut().flatten() {
                    *v += normal.sample(&mut rng);
                }
                inputs
            }
            None => {
                let mut mic = self.render(&drive_of(0), fs);
                if what.output_channels.contains(&2) {
                    for (m, v) in mic.iter_mut().zip(self.render_subwoofer(&drive_of(2), fs)) {
                        *m += v;
                    }
                }
                vec![mic]
            }
        };
        if self.loopback && self.driver.is_none() {
            let d = drive_of(1);
            let mut wire = vec![0.0; n];
            for (i, v) in wire.iter_mut().enumerate().skip(self.latency_samples) {
                *v = d[i - self.latency_samples];
            }
            channels.push(wire);
        }
        let mut problems = Vec::new();
        let mut kept = n;
        if let Some(s) = stop_at {
            // the recording goes on for the ramp and a little after it
            kept = (s + 2 * ramp).min(n);
            problems.push(format!(
                "stopped after {:.2} s of {:.2} s",
                s as f64 / fs,
                n as f64 / fs
            ));
        }
        let mut lost = 0;
        if let Some((t, frames)) = self.faults.lose_frames_at_s {
            let at = ((t * fs) as usize).min(kept);
            let frames = frames.min(kept - at);
            for c in &mut channels {
                c.truncate(kept);
                c.drain(at..at + frames);
            }
            kept -= frames;
            lost = frames as u64;
            problems.push(format!(
                "{frames} input frames were lost at {t:.2} s (an overrun)"
            ));
        }
        let mut fault = None;
        if let Some(t) = self.faults.fail_at_s {
            kept = kept.min((t * fs) as usize);
            fault = Some(format!(
                "the virtual interface went away after {t:.2} s (a simulated unplugging)"
            ));
        }
        for c in &mut channels {
            c.truncate(kept);
        }
        // hand the recording to the sink in blocks, as a sound card would
        let chans = channels.len();
        sink.begin(chans, rate)?;
        let block = 4800;
        let mut inter = Vec::with_capacity(block * chans);
        let mut start = 0;
        while start < kept {
            let end = (start + block).min(kept);
            inter.clear();
            let mut peak = 0.0f32;
            for i in start..end {
                for c in &channels {
                    let v = c[i] as f32;
                    peak = peak.max(v.abs());
                    inter.push(v);
                }
            }
            sink.write(&inter)?;
            progress(Progress {
                done_frames: end as u64,
                total_frames: n as u64,
                peak,
            });
            start = end;
        }
        sink.finish()?;
        Ok(Capture {
            channels,
            sample_rate_hz: rate,
            signal_start: 0,
            lost_frames: lost,
            interruptions: 0,
            stopped: stop_at.is_some(),
            fault,
            problems,
            stream: "simulated, 32-bit float".into(),
        })
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn render_is_reproducible_and_as_long_as_the_stimulus() {
        let v = VirtualSystem::default();
        let x: Vec<f64> = (0..24_000).map(|n| 0.1 * (n as f64 * 0.05).sin()).collect();
        let a = v.render(&x, 48_000.0);
        let b = v.render(&x, 48_000.0);
        assert_eq!(a.len(), x.len());
        assert_eq!(a, b);
        // the latency is silent but for the noise
        let early = a[..v.latency_samples]
            .iter()
            .fold(0.0f64, |m, s| m.max(s.abs()));
        assert!(early < 1e-3);
    }

    #[test]
    fn direct_sound_arrives_after_its_time_of_flight() {
        // 1 m ≈ 2.915 ms at 343 m/s (common practice)
        let v = VirtualSystem::default();
        let h = v.room_impulse(48_000.0);
        let i = h
            .iter()
            .enumerate()
            .fold(0, |m, (i, x)| if x.abs() > h[m].abs() { i } else { m });
        let expected =
            (1.2f64.powi(2) + 0.15f64.powi(2) + 0.05f64.powi(2)).sqrt() / 343.0 * 48_000.0;
        assert!((i as f64 - expected).abs() <= 1.0);
    }

    #[test]
    fn the_loudspeaker_is_omnidirectional_low_and_narrows_high() {
        use crate::model::{Orbit, Position};
        let at = |o, a| Position {
            orbit: o,
            angle_deg: a,
        };
        // on axis: the crossover's gains sum to one
        for f in [50.0, 500.0, 2200.0, 10_000.0] {
            assert!((loudspeaker_directivity(f, at(Orbit::Horizontal, 0)) - 1.0).abs() < 1e-12);
        }
        // 60 Hz: within 1 dB all round (ka of the woofer ≈ 0.07; the
        // cabinet's shadow behind is 0.6 dB there)
        for a in (-170..=180).step_by(10) {
            let d = loudspeaker_directivity(60.0, at(Orbit::Horizontal, a)).abs();
            assert!(20.0 * d.log10() > -1.0, "{a}°: {d}");
        }
        // 1.5 kHz, 60° off: the woofer's piston, 2·J1(v)/v with
        // v = ka·sin 60° (the tweeter's share is 13 % there)
        let d = loudspeaker_directivity(1500.0, at(Orbit::Horizontal, 60));
        assert!(d < 0.8 && d > 0.3, "{d}");
        // 10 kHz: the waveguide is narrower vertically than horizontally
        let h = loudspeaker_directivity(10_000.0, at(Orbit::Horizontal, 40)).abs();
        let v = loudspeaker_directivity(10_000.0, at(Orbit::Vertical, 40)).abs();
        assert!(v < h, "{v} vs {h}");
        // behind, 4 kHz: well below on axis
        assert!(loudspeaker_directivity(4000.0, at(Orbit::Horizontal, 180)).abs() < 0.1);
    }
}
