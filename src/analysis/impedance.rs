//! A loudspeaker driver's electrical impedance from a swept sine through a
//! series (sense) resistor.
//!
//! Wiring (the voltage-divider method): the amplifier drives the sense
//! resistor R and the driver in series; one input records V1, the voltage
//! at the amplifier side of R (the reference), the other V2, the voltage
//! across the driver. The same current flows through both, so
//!
//! Z(f) = R · V2(f) / (V1(f) − V2(f)).
//!
//! Both channels are deconvolved with the same inverse filter of the sweep
//! ([`crate::deconv`]), each impulse response is cut before the harmonic
//! responses of orders 2 to [`EXCLUDED_ORDERS`] (A. Farina, 108th AES
//! Convention, 2000: they lie before the linear response in the circular
//! buffer), and the ratio is taken bin by bin of the two spectra. The
//! sweep and the amplifier's gain cancel in the ratio; the two inputs must
//! have equal gain (the same input type and setting).
//!
//! The constant-current variant records only V2, with R much larger than
//! the driver's impedance (1 kΩ is usual). gliss then takes V1 as the sweep
//! as written: the chain from the sweep file to the amplifier's output, as
//! the input records it, must have unity gain (check it once by recording
//! the amplifier's output through the same pad). Its limits: any error of
//! that gain is an error of |Z| in the same proportion, and the low drive
//! current leaves V2 tens of dB down, near the input's noise.
//!
//! The judgements (swapped channels, an open circuit, a sense resistor far
//! from the driver's impedance) are made here: the first two refuse, the
//! last is a typed [`Warning`].

use rustfft::num_complex::Complex;
use serde::{Deserialize, Serialize};

use crate::analysis::smoothing::{POINTS_PER_OCTAVE, PiecewiseIntegral, log_grid};
use crate::deconv;
use crate::error::{Error, Result};
use crate::model::{Code, Warning};
use crate::signal::fft;

/// Harmonic orders whose responses are cut off: 2 to this.
pub const EXCLUDED_ORDERS: u32 = 5;

/// Median |Z| above this over the band is no driver but an open circuit
/// (the input's own impedance, or a disconnected lead).
pub const OPEN_CIRCUIT_OHMS: f64 = 1000.0;

/// A sense resistor raises the noise in Z by this factor (26 dB) or more
/// somewhere in the band: warned.
pub const MISMATCH_FACTOR: f64 = 20.0;

/// How the driver was wired.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum Wiring {
    /// Two channels: the reference across amplifier side of R, the
    /// driver channel across the driver.
    VoltageDivider,
    /// One channel across the driver, a large R, the sweep as written
    /// standing for the amplifier's output.
    ConstantCurrent,
}

/// What the impedance is computed from.
#[derive(Debug, Clone, Copy)]
pub struct ImpedanceInput<'a> {
    /// V1: the amplifier side of the sense resistor (`None`: constant
    /// current, the sweep as written stands for it).
    pub reference: Option<&'a [f64]>,
    /// V2: the voltage across the driver.
    pub driver: &'a [f64],
    /// The sweep as played.
    pub stimulus: &'a [f64],
    /// Sample rate, Hz.
    pub fs: f64,
    /// The sweep band, Hz.
    pub band: (f64, f64),
    /// Time before the linear response at which the second harmonic's
    /// response lies in the circular buffer, s per `ln(order)`: the sweep's
    /// rate constant L (harmonic n at L·ln n).
    pub rate_s: f64,
    /// The sense resistor, Ω.
    pub sense_ohms: f64,
}

/// The complex impedance on linear bins (full resolution) and on the
/// 48-per-octave log grid.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Impedance {
    /// How the driver was wired.
    pub wiring: Wiring,
    /// The sense resistor, Ω.
    pub sense_ohms: f64,
    /// The band the impedance is given over, Hz.
    pub band_hz: [f64; 2],
    /// Log-grid frequencies, Hz.
    pub frequency_hz: Vec<f64>,
    /// |Z| on the grid, Ω.
    pub magnitude_ohm: Vec<f64>,
    /// arg Z on the grid, degrees.
    pub phase_deg: Vec<f64>,
    /// Full resolution: the bin spacing, Hz (bin k at k·df).
    #[serde(skip)]
    pub df: f64,
    /// Full resolution: the first bin given.
    #[serde(skip)]
    pub first_bin: usize,
    /// Full resolution: Z at bins `first_bin..`, Ω.
    #[serde(skip)]
    pub bins: Vec<Complex<f64>>,
    /// The warnings of the measurement.
    #[serde(skip)]
    pub warnings: Vec<Warning>,
}

impl Impedance {
    /// The complex impedance on the log grid.
    pub fn grid_complex(&self) -> Vec<Complex<f64>> {
        self.magnitude_ohm
            .iter()
            .zip(&self.phase_deg)
            .map(|(&m, &p)| Complex::from_polar(m, p.to_radians()))
            .collect()
    }

    /// Full-resolution rows: (frequency Hz, |Z| Ω, phase degrees).
    pub fn full_resolution(&self) -> impl Iterator<Item = (f64, f64, f64)> + '_ {
        self.bins.iter().enumerate().map(|(i, z)| {
            (
                (self.first_bin + i) as f64 * self.df,
                z.norm(),
                z.arg().to_degrees(),
            )
        })
    }
}

/// Peak |x| of a channel.
fn peak(x: &[f64]) -> f64 {
    x.iter().fold(0.0f64, |m, v| m.max(v.abs()))
}

/// The impedance of the driver from its recording; refuses swapped
/// channels, a clipping or silent channel and an open circuit with one
/// message each, and warns of a sense resistor far from the driver's
/// impedance.
pub fn impedance(input: &ImpedanceInput) -> Result<Impedance> {
    let r = input.sense_ohms;
    if !(r.is_finite() && r > 0.0) {
        return Err(Error::parameter(format!(
            "--sense-ohms {r} is not a resistance; give the sense resistor's measured value in ohms, e.g. --sense-ohms 10"
        )));
    }
    check_levels(input)?;
    let (f1, f2) = input.band;
    let n = deconv::fft_len(
        input
            .driver
            .len()
            .max(input.reference.map_or(0, <[f64]>::len)),
        input.stimulus.len(),
    );
    let inverse = deconv::inverse_filter(input.stimulus, n, input.fs, f1, f2);
    // the window: a little before time zero (latency and the band limits'
    // ringing) to just before harmonic EXCLUDED_ORDERS, at most half the
    // buffer
    let pre = ((0.005 * input.fs) as usize).max(16);
    let harmonic = (input.rate_s * f64::from(EXCLUDED_ORDERS).ln() * input.fs).ceil() as usize;
    let len = (n / 2)
        .min(n.saturating_sub(harmonic + 2 * pre))
        .max(4 * pre);
    let spectrum = |x: &[f64]| -> (Vec<Complex<f64>>, usize) {
        let h = deconv::apply_inverse(x, &inverse, n);
        let cut = deconv::cut(&h, -(pre as isize), len, pre / 2, len / 10);
        let m = fft::fast_len(len);
        (fft::rfft(&cut, m), m)
    };
    let (h2, m) = spectrum(input.driver);
    let df = input.fs / m as f64;
    let first_bin = (f1 / df).ceil().max(1.0) as usize;
    let last_bin = ((f2 / df).floor() as usize).min(m / 2);
    let bins: Vec<Complex<f64>> = match input.reference {
        Some(reference) => {
            let (h1, _) = spectrum(reference);
            (first_bin..=last_bin)
                .map(|k| r * h2[k] / (h1[k] - h2[k]))
                .collect()
        }
        None => {
            // the sweep as written deconvolves to the band-limited unit
            // impulse: its spectrum is the band limit, applied to h2 too
            let (h1, _) = spectrum(input.stimulus);
            (first_bin..=last_bin)
                .map(|k| r * h2[k] / (h1[k] - h2[k]))
                .collect()
        }
    };
    let wiring = if input.reference.is_some() {
        Wiring::VoltageDivider
    } else {
        Wiring::ConstantCurrent
    };
    let mut z = Impedance {
        wiring,
        sense_ohms: r,
        band_hz: [f1, f2],
        frequency_hz: Vec::new(),
        magnitude_ohm: Vec::new(),
        phase_deg: Vec::new(),
        df,
        first_bin,
        bins,
        warnings: Vec::new(),
    };
    on_log_grid(&mut z);
    judge(&mut z, input.reference.is_some())?;
    Ok(z)
}

/// Each recorded channel must be there and must not clip.
fn check_levels(input: &ImpedanceInput) -> Result<()> {
    let channels = [
        ("reference", input.reference),
        ("driver", Some(input.driver)),
    ];
    for (what, x) in channels {
        let Some(x) = x else { continue };
        let p = peak(x);
        if p >= crate::analysis::CLIP_LEVEL {
            return Err(Error::input(format!(
                "the {what} channel clips (peak {:.2} dBFS); the impedance of a clipped recording is wrong: lower the amplifier's level or pad that input further, check with a voltmeter that the input sees no more than its rated voltage, and measure again",
                20.0 * p.log10()
            )));
        }
        if p < 1e-4 {
            return Err(Error::input(format!(
                "the {what} channel is silent (peak {:.0} dBFS); check that the sweep reaches the amplifier and that the channel is wired to the sense resistor as the help says",
                20.0 * p.max(1e-12).log10()
            )));
        }
    }
    Ok(())
}

/// The complex Z of the bins averaged over each grid point's 1/48 octave
/// (the grid's own spacing: no smoothing beyond it).
fn on_log_grid(z: &mut Impedance) {
    let [f1, f2] = z.band_hz;
    let offset = z.first_bin as f64 * z.df;
    let re = PiecewiseIntegral::new(z.bins.iter().map(|c| c.re).collect(), z.df);
    let im = PiecewiseIntegral::new(z.bins.iter().map(|c| c.im).collect(), z.df);
    let half = 2f64.powf(0.5 / f64::from(POINTS_PER_OCTAVE));
    let lo = offset.max(f1);
    let hi = (offset + (z.bins.len().max(1) - 1) as f64 * z.df).min(f2);
    for f in log_grid(lo, hi) {
        let (a, b) = ((f / half).max(lo) - offset, (f * half).min(hi) - offset);
        let c = Complex::new(re.mean(a, b), im.mean(a, b));
        z.frequency_hz.push(f);
        z.magnitude_ohm.push(c.norm());
        z.phase_deg.push(c.arg().to_degrees());
    }
}

/// The median of a list (NaN-free).
fn median(mut v: Vec<f64>) -> f64 {
    v.sort_by(f64::total_cmp);
    v.get(v.len() / 2).copied().unwrap_or(f64::NAN)
}

/// Refuses swapped channels and an open circuit; warns of a sense resistor
/// far from the driver's impedance.
fn judge(z: &mut Impedance, two_channels: bool) -> Result<()> {
    let r = z.sense_ohms;
    // V2/V1 = Z/(R + Z): a passive driver (Re Z ≥ 0) never makes it above
    // 1; swapped channels make it R/Z + 1 > 1, i.e. Re Z < 0 throughout
    let negative = z.grid_complex().iter().filter(|c| c.re < 0.0).count();
    if two_channels && negative * 2 > z.frequency_hz.len() {
        return Err(Error::input(
            "the driver channel is louder than the reference channel over most of the band, which a resistor in series cannot do: the channels are swapped; give the channel at the amplifier side of the sense resistor as --reference and the one across the driver as --channel".to_string(),
        ));
    }
    let typical = median(z.magnitude_ohm.clone());
    if typical.is_nan() || typical >= OPEN_CIRCUIT_OHMS {
        return Err(Error::input(format!(
            "the impedance is {} over most of the band: no driver is connected (an open circuit); check the leads and the terminals, then measure again",
            if typical.is_finite() {
                format!("about {typical:.0} Ω")
            } else {
                "unbounded".to_string()
            }
        )));
    }
    // the noise of V1 − V2 (R small) or of V2 (R large) reaches Z
    // amplified by |1 + Z/R| or |1 + R/Z|
    let worst = z
        .grid_complex()
        .iter()
        .map(|&c| {
            if two_channels {
                (1.0 + c / r).norm().max((1.0 + r / c).norm())
            } else {
                (1.0 + c / r).norm()
            }
        })
        .fold(0.0f64, f64::max);
    if two_channels && worst >= MISMATCH_FACTOR {
        let (lo, hi) = z
            .magnitude_ohm
            .iter()
            .fold((f64::INFINITY, 0.0f64), |(a, b), &m| (a.min(m), b.max(m)));
        z.warnings.push(Warning::new(
            Code::SenseResistorMismatch,
            format!(
                "the sense resistor ({r} Ω) is far from the driver's impedance ({lo:.1} to {hi:.1} Ω): the noise of the recording reaches the impedance up to {:.0} dB louder; a resistor near the driver's nominal impedance gives the best resolution",
                20.0 * worst.log10()
            ),
        ));
    }
    Ok(())
}

#[cfg(test)]
pub(crate) mod tests {
    use super::*;
    use crate::signal::sweep::SweepParams;
    use rand::SeedableRng;
    use rand_distr::{Distribution, Normal};

    /// A lumped driver: Z = Re + jωLe + Bl²/(Rms + jωMms + 1/(jωCms)), the
    /// electrical side of the mechanical impedance (Small 1972's
    /// equivalent circuit).
    #[derive(Debug, Clone, Copy)]
    pub struct Driver {
        pub re: f64,
        pub le: f64,
        pub bl: f64,
        pub mms: f64,
        pub cms: f64,
        pub rms: f64,
    }

    impl Driver {
        /// From the small-signal parameters and a moving mass.
        pub fn from_ts(re: f64, fs: f64, qms: f64, qes: f64, le: f64, mms: f64) -> Driver {
            let w = std::f64::consts::TAU * fs;
            Driver {
                re,
                le,
                bl: (w * mms * re / qes).sqrt(),
                mms,
                cms: 1.0 / (w * w * mms),
                rms: w * mms / qms,
            }
        }

        pub fn z(&self, f: f64) -> Complex<f64> {
            if f <= 0.0 {
                return Complex::new(self.re, 0.0);
            }
            let w = std::f64::consts::TAU * f;
            let j = Complex::new(0.0, 1.0);
            let zm = self.rms + j * w * self.mms + 1.0 / (j * w * self.cms);
            self.re + j * w * self.le + self.bl * self.bl / zm
        }
    }

    /// The two channel voltages of the divider for a sweep at amplitude
    /// `gain`: V1 = gain·sweep, V2 = V1·Z/(R + Z), filtered in the
    /// frequency domain over a buffer long enough for the driver's decay,
    /// with Gaussian noise of `noise_rms` on each input.
    pub fn divider(
        sweep: &[f64],
        fs: f64,
        driver: &Driver,
        r: f64,
        gain: f64,
        noise_rms: f64,
        seed: u64,
    ) -> (Vec<f64>, Vec<f64>) {
        let len = sweep.len();
        let n = fft::fast_len(len * 2);
        let mut s = fft::rfft(sweep, n);
        let df = fs / n as f64;
        for (k, c) in s.iter_mut().enumerate() {
            let z = driver.z(k as f64 * df);
            *c *= gain * z / (r + z);
        }
        let last = s.len() - 1;
        s[0].im = 0.0;
        s[last].im = 0.0;
        let mut v2 = fft::irfft(&mut s, n);
        v2.truncate(len);
        let mut v1: Vec<f64> = sweep.iter().map(|x| x * gain).collect();
        let mut rng = rand::rngs::StdRng::seed_from_u64(seed);
        let noise = Normal::new(0.0, noise_rms.max(1e-300)).unwrap();
        for x in v1.iter_mut().chain(v2.iter_mut()) {
            *x += noise.sample(&mut rng);
        }
        (v1, v2)
    }

    pub fn sweep(length_s: f64) -> (Vec<f64>, crate::signal::sweep::SweepDesign) {
        let design = SweepParams {
            requested_length_s: length_s,
            tail_s: 1.0,
            start_hz: 10.0,
            end_hz: 20_000.0,
            ..SweepParams::default()
        }
        .design()
        .unwrap();
        (design.generate(), design)
    }

    pub fn input<'a>(
        v1: Option<&'a [f64]>,
        v2: &'a [f64],
        sweep: &'a [f64],
        design: &crate::signal::sweep::SweepDesign,
        r: f64,
    ) -> ImpedanceInput<'a> {
        ImpedanceInput {
            reference: v1,
            driver: v2,
            stimulus: sweep,
            fs: design.fs(),
            band: (design.params.start_hz, design.params.end_hz),
            rate_s: design.harmonic_offset_s(2) / 2f64.ln(),
            sense_ohms: r,
        }
    }

    #[test]
    fn a_resistor_measures_as_itself_over_the_band() {
        // closed form: a pure resistance Z = 8 Ω behind R = 10 Ω gives
        // V2/V1 = 8/18 at every frequency; the method must return 8 Ω, 0°
        let (s, d) = sweep(2.0);
        let resistor = Driver {
            re: 8.0,
            le: 0.0,
            bl: 0.0,
            mms: 1.0,
            cms: 1.0,
            rms: 1.0,
        };
        let (v1, v2) = divider(&s, d.fs(), &resistor, 10.0, 0.5, 0.0, 1);
        let z = impedance(&input(Some(&v1), &v2, &s, &d, 10.0)).unwrap();
        for (f, (m, p)) in z
            .frequency_hz
            .iter()
            .zip(z.magnitude_ohm.iter().zip(&z.phase_deg))
        {
            if *f > 20.0 && *f < 18_000.0 {
                assert!((m - 8.0).abs() < 0.01, "{f} Hz: {m} Ω");
                assert!(p.abs() < 0.1, "{f} Hz: {p}°");
            }
        }
        assert!(z.warnings.is_empty(), "{:?}", z.warnings);
    }

    #[test]
    fn a_driver_s_impedance_follows_its_model_within_a_percent() {
        // reference: the lumped model evaluated directly (closed form)
        let (s, d) = sweep(3.0);
        let drv = Driver::from_ts(6.0, 50.0, 4.0, 0.5, 0.5e-3, 0.015);
        let (v1, v2) = divider(&s, d.fs(), &drv, 8.0, 0.3, 1e-5, 2);
        let z = impedance(&input(Some(&v1), &v2, &s, &d, 8.0)).unwrap();
        let mut worst = 0.0f64;
        for (i, &f) in z.frequency_hz.iter().enumerate() {
            if f > 15.0 && f < 18_000.0 {
                let want = drv.z(f);
                let got = Complex::from_polar(z.magnitude_ohm[i], z.phase_deg[i].to_radians());
                worst = worst.max((got - want).norm() / want.norm());
            }
        }
        assert!(worst < 0.01, "worst relative error {worst}");
        // the check driver of REFERENCES.md: |Z(fs)| = Re + Res = 54 Ω
        // (Le adds 0.16 Ω in quadrature at 50 Hz: negligible) [calc]
        let at_fs = z
            .frequency_hz
            .iter()
            .position(|&f| (f / 50.0).log2().abs() < 0.5 / 48.0)
            .unwrap();
        assert!(
            (z.magnitude_ohm[at_fs] - 54.0).abs() < 1.0,
            "{}",
            z.magnitude_ohm[at_fs]
        );
    }

    #[test]
    fn swapped_channels_are_refused_by_name() {
        let (s, d) = sweep(1.0);
        let drv = Driver::from_ts(6.0, 50.0, 4.0, 0.5, 0.5e-3, 0.015);
        let (v1, v2) = divider(&s, d.fs(), &drv, 8.0, 0.3, 1e-6, 3);
        let e = impedance(&input(Some(&v2), &v1, &s, &d, 8.0)).unwrap_err();
        assert!(e.message().contains("swapped"), "{e}");
    }

    #[test]
    fn an_open_circuit_is_refused() {
        // no driver: V2 = V1 but for the noise
        let (s, d) = sweep(1.0);
        let open = Driver {
            re: 1e9,
            le: 0.0,
            bl: 0.0,
            mms: 1.0,
            cms: 1.0,
            rms: 1.0,
        };
        let (v1, v2) = divider(&s, d.fs(), &open, 8.0, 0.3, 1e-6, 4);
        let e = impedance(&input(Some(&v1), &v2, &s, &d, 8.0)).unwrap_err();
        assert!(e.message().contains("open circuit"), "{e}");
    }

    #[test]
    fn a_clipping_reference_is_refused() {
        let (s, d) = sweep(1.0);
        let drv = Driver::from_ts(6.0, 50.0, 4.0, 0.5, 0.5e-3, 0.015);
        let (v1, v2) = divider(&s, d.fs(), &drv, 8.0, 0.3, 0.0, 5);
        let loud: Vec<f64> = v1.iter().map(|x| (x * 1000.0).clamp(-1.0, 1.0)).collect();
        let e = impedance(&input(Some(&loud), &v2, &s, &d, 8.0)).unwrap_err();
        assert!(e.message().contains("reference channel clips"), "{e}");
    }

    #[test]
    fn a_sense_resistor_far_from_the_driver_is_warned() {
        let (s, d) = sweep(1.0);
        let drv = Driver::from_ts(6.0, 50.0, 4.0, 0.5, 0.5e-3, 0.015);
        // 0.1 Ω against up to 54 Ω: V1 − V2 is 55 dB below V1 at fs
        let (v1, v2) = divider(&s, d.fs(), &drv, 0.1, 0.3, 0.0, 6);
        let z = impedance(&input(Some(&v1), &v2, &s, &d, 0.1)).unwrap();
        assert!(
            z.warnings
                .iter()
                .any(|w| w.code == Code::SenseResistorMismatch),
            "{:?}",
            z.warnings
        );
    }

    #[test]
    fn constant_current_with_unity_gain_measures_the_driver() {
        // one channel, R = 1 kΩ; the sweep as written is V1 (gain 1)
        let (s, d) = sweep(2.0);
        let drv = Driver::from_ts(6.0, 50.0, 4.0, 0.5, 0.5e-3, 0.015);
        let (_, v2) = divider(&s, d.fs(), &drv, 1000.0, 1.0, 0.0, 7);
        let z = impedance(&input(None, &v2, &s, &d, 1000.0)).unwrap();
        assert_eq!(z.wiring, Wiring::ConstantCurrent);
        for (i, &f) in z.frequency_hz.iter().enumerate() {
            if f > 20.0 && f < 18_000.0 {
                let want = drv.z(f).norm();
                assert!((z.magnitude_ohm[i] - want).abs() / want < 0.01, "{f} Hz");
            }
        }
    }
}
