//! Background noise from a calibrated recording of the room with the sweep
//! silent: the equivalent continuous level (Leq, dB SPL) per octave and
//! one-third-octave band through the IEC 61260-1 band filters of
//! [`bands`], the A-weighted total (IEC 61672-1 A-weighting, closed form),
//! and the rating on the noise rating (NR) curves.
//!
//! The NR curves are those of ISO/R 1996:1971 (Kosten and van Os, 1962) in
//! their formula form L = a + b·NR per octave band (the coefficients below
//! are from memory, as widely tabulated; the tests check that the formula
//! gives the tabulated curve values, also from memory). A noise's rating
//! is the lowest curve that no octave 63 Hz–8 kHz exceeds.

use serde::{Deserialize, Serialize};

use crate::analysis::bands::{self, Band};
use crate::analysis::calibration::{Calibration, P_REF_PA};
use crate::error::{Error, Result};
use crate::model::{Code, Warnings};
use crate::signal::fft;

/// The NR coefficients (a, b) per octave 31.5 Hz … 8 kHz: L = a + b·NR
/// (ISO/R 1996:1971, from memory).
pub const NR_COEFFICIENTS: [(f64, f64, f64); 9] = [
    (31.5, 55.4, 0.681),
    (63.0, 35.5, 0.790),
    (125.0, 22.0, 0.870),
    (250.0, 12.0, 0.930),
    (500.0, 4.8, 0.974),
    (1000.0, 0.0, 1.000),
    (2000.0, -3.5, 1.015),
    (4000.0, -6.1, 1.025),
    (8000.0, -8.0, 1.030),
];

/// The name of the rating family, as results say it.
pub const NR_FAMILY: &str = "NR (noise rating curves of ISO/R 1996:1971, L = a + b·NR per octave)";

/// The octaves a rating needs: 63 Hz … 8 kHz (31.5 Hz counts when measured).
pub const NR_NEEDED_HZ: [f64; 8] = [63.0, 125.0, 250.0, 500.0, 1000.0, 2000.0, 4000.0, 8000.0];

/// The shortest recording gliss rates, s: a noise level is a mean over time.
pub const MIN_DURATION_S: f64 = 1.0;

/// A band's level.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct BandLevel {
    /// Nominal centre (ISO 266), Hz.
    pub center_hz: f64,
    /// Exact mid-band frequency, Hz.
    pub exact_hz: f64,
    /// Equivalent continuous level, dB SPL.
    pub leq_db: f64,
}

/// The rating on a curve family.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Rating {
    /// The family and its source.
    pub family: String,
    /// The lowest whole curve no octave exceeds (NR 35 …).
    pub value: i32,
    /// The curve the noise touches, unrounded.
    pub exact: f64,
    /// The octave that sets it, Hz.
    pub governing_hz: f64,
}

/// noise.json: the background noise of a room.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct NoiseLevels {
    /// Length of the recording analysed, s.
    pub duration_s: f64,
    /// Sample rate, Hz.
    pub sample_rate_hz: u32,
    /// The calibration's sensitivity: dB SPL of a full-scale sine.
    pub full_scale_db_spl: f64,
    /// Octave bands 31.5 Hz … 16 kHz that the recording holds.
    pub octaves: Vec<BandLevel>,
    /// One-third-octave bands 20 Hz … 20 kHz that the recording holds.
    pub thirds: Vec<BandLevel>,
    /// The A-weighted equivalent level, dB(A) SPL.
    pub laeq_db: f64,
    /// The unweighted equivalent level over the whole band, dB SPL.
    pub lzeq_db: f64,
    /// The noise rating (`null` when an octave it needs is missing).
    pub rating: Option<Rating>,
    /// Why a value is missing.
    #[serde(flatten)]
    pub warnings: Warnings,
}

impl NoiseLevels {
    /// The octave levels 125 Hz … 8 kHz the STI needs, if all were measured.
    pub fn speech_octaves(&self) -> Option<[f64; 7]> {
        let mut out = [0.0; 7];
        for (o, c) in out.iter_mut().zip(crate::analysis::speech::OCTAVES_HZ) {
            *o = self.octave(c)?;
        }
        Some(out)
    }

    /// The level of the octave at nominal `center_hz`.
    pub fn octave(&self, center_hz: f64) -> Option<f64> {
        self.octaves
            .iter()
            .find(|b| (b.center_hz - center_hz).abs() < 1e-6 * center_hz)
            .map(|b| b.leq_db)
    }
}

/// A-weighting at `f` Hz, dB (IEC 61672-1:2013 closed form, with the
/// +2.00 dB that makes A(1 kHz) = 0).
pub fn a_weighting_db(f: f64) -> f64 {
    let f2 = f * f;
    let ra = 12194f64.powi(2) * f2 * f2
        / ((f2 + 20.6f64.powi(2))
            * ((f2 + 107.7f64.powi(2)) * (f2 + 737.9f64.powi(2))).sqrt()
            * (f2 + 12194f64.powi(2)));
    20.0 * ra.log10() + 2.0
}

/// The NR rating of octave levels (nominal centre, dB SPL): the largest
/// (L − a)/b over the octaves, rounded up to the curve above. `None`
/// when an octave of [`NR_NEEDED_HZ`] is missing.
pub fn noise_rating(octaves: &[(f64, f64)]) -> Option<Rating> {
    let level = |c: f64| {
        octaves
            .iter()
            .find(|(f, _)| (f - c).abs() < 1e-6 * c)
            .map(|x| x.1)
    };
    if NR_NEEDED_HZ.iter().any(|&c| level(c).is_none()) {
        return None;
    }
    let (exact, governing_hz) = NR_COEFFICIENTS
        .iter()
        .filter_map(|&(c, a, b)| level(c).map(|l| ((l - a) / b, c)))
        .fold(
            (f64::NEG_INFINITY, 0.0),
            |acc, x| if x.0 > acc.0 { x } else { acc },
        );
    Some(Rating {
        family: NR_FAMILY.into(),
        value: (exact - 1e-9).ceil() as i32,
        exact,
        governing_hz,
    })
}

/// The background noise of the calibrated recording `x` (full scale ±1,
/// sample rate `fs`) with the sensitivity `cal`.
pub fn analyze(x: &[f64], fs: f64, cal: &Calibration) -> Result<NoiseLevels> {
    crate::analysis::check_signal(x, "the noise recording")?;
    let duration_s = x.len() as f64 / fs;
    if duration_s < MIN_DURATION_S {
        return Err(Error::input(format!(
            "the noise recording lasts {duration_s:.2} s; a noise level is a mean over time: record at least {MIN_DURATION_S} s (30 s or more for a steady room noise)"
        )));
    }
    // One transform for every band (Parseval): the mean square of the band-
    // filtered signal is Σ|X|²·|H|² over the spectrum, divided by N·m for
    // a transform of length m ≥ N. Written here rather than filtering
    // per band because the filters are defined by their magnitude
    // (bands::Band::power_gain), applied as elsewhere in the frequency domain.
    // A long recording is taken in equal segments of at most SEGMENT
    // samples (about 22 s at 48 kHz), their mean squares weighted by their
    // lengths: the same mean over time, in bounded memory.
    const SEGMENT: usize = 1 << 20;
    let n = x.len();
    let segments = n.div_ceil(SEGMENT);
    let seg_len = n.div_ceil(segments);
    // a band is measured when it lies below the Nyquist frequency and the
    // recording (each segment) holds at least 10 periods of its lower edge
    let seg_s = seg_len.min(n) as f64 / fs;
    let held = |b: &Band| {
        let (lo, hi) = b.edges();
        hi <= fs / 2.0 && lo * seg_s >= 10.0
    };
    let octave_bands: Vec<Band> = bands::octave_bands().into_iter().filter(held).collect();
    let third_bands: Vec<Band> = bands::third_octave_bands()
        .into_iter()
        .filter(held)
        .collect();
    let mut octave_ms = vec![0.0; octave_bands.len()];
    let mut third_ms = vec![0.0; third_bands.len()];
    let (mut a, mut z) = (0.0, 0.0);
    for seg in x.chunks(seg_len) {
        let len = seg.len();
        let m = fft::fast_len(len);
        let spec = fft::rfft(seg, m);
        let df = fs / m as f64;
        // this segment's share of the whole recording's mean square
        let share = len as f64 / n as f64;
        let power: Vec<f64> = spec
            .iter()
            .enumerate()
            .map(|(k, c)| {
                let w = if k == 0 || 2 * k == m { 1.0 } else { 2.0 };
                share * w * c.norm_sqr() / (len as f64 * m as f64)
            })
            .collect();
        let in_band = |b: &Band| -> f64 {
            power
                .iter()
                .enumerate()
                .skip(1)
                .map(|(k, p)| p * b.power_gain(k as f64 * df))
                .sum()
        };
        for (acc, b) in octave_ms.iter_mut().zip(&octave_bands) {
            *acc += in_band(b);
        }
        for (acc, b) in third_ms.iter_mut().zip(&third_bands) {
            *acc += in_band(b);
        }
        a += power
            .iter()
            .enumerate()
            .skip(1)
            .map(|(k, p)| p * 10f64.powf(a_weighting_db(k as f64 * df) / 10.0))
            .sum::<f64>();
        z += power.iter().skip(1).sum::<f64>();
    }
    let pa2 = cal.pa_per_fs * cal.pa_per_fs;
    let db = |ms: f64| 10.0 * (ms * pa2 / (P_REF_PA * P_REF_PA)).max(1e-30).log10();
    let level = |(b, ms): (&Band, &f64)| BandLevel {
        center_hz: b.nominal_hz,
        exact_hz: b.exact_hz,
        leq_db: db(*ms),
    };
    let octaves: Vec<BandLevel> = octave_bands.iter().zip(&octave_ms).map(level).collect();
    let thirds: Vec<BandLevel> = third_bands.iter().zip(&third_ms).map(level).collect();
    let mut warnings = Warnings::new();
    let pairs: Vec<(f64, f64)> = octaves.iter().map(|b| (b.center_hz, b.leq_db)).collect();
    let rating = noise_rating(&pairs);
    if rating.is_none() {
        warnings.add(
            Code::NoiseRatingWithheld,
            "noise rating: not given, because the recording does not hold every octave 63 Hz–8 kHz (a sample rate of at least 32 kHz is needed)",
        );
    }
    Ok(NoiseLevels {
        duration_s,
        sample_rate_hz: fs.round() as u32,
        full_scale_db_spl: cal.full_scale_db_spl,
        octaves,
        thirds,
        laeq_db: db(a),
        lzeq_db: db(z),
        rating,
        warnings,
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    /// A calibration of 10 Pa per full scale (a 94 dB SPL tone at 0.1 FS).
    fn ten_pa_per_fs() -> Calibration {
        Calibration {
            format: "gliss calibration".into(),
            schema_version: 1,
            level_db_spl: 94.0,
            tone_hz: 1000.0,
            tone_rms_fs: 0.1,
            pa_per_fs: 10.0,
            full_scale_db_spl: 0.0,
        }
    }

    #[test]
    fn a_weighting_matches_the_tabulated_values() {
        // IEC 61672-1:2013 table 3 (from memory): the values at the exact
        // base-10 octave frequencies, to the table's 0.1 dB
        let table = [-39.4, -26.2, -16.1, -8.6, -3.2, 0.0, 1.2, 1.0, -1.1];
        for (x, want) in (-5..=3).zip(table) {
            let f = Band::new(1, x).exact_hz;
            assert!(
                (a_weighting_db(f) - want).abs() < 0.06,
                "{f}: {}",
                a_weighting_db(f)
            );
        }
    }

    #[test]
    fn the_nr_formula_gives_the_tabulated_curves() {
        // tabulated NR curves (from memory): NR 30 at 125 Hz 48 dB, NR 50
        // at 63 Hz 75 dB, NR 25 at 8 kHz 18 dB, NR 40 at 500 Hz 44 dB
        for (nr, f, want) in [
            (30.0, 125.0, 48.0),
            (50.0, 63.0, 75.0),
            (25.0, 8000.0, 18.0),
            (40.0, 500.0, 44.0),
        ] {
            let (_, a, b) = NR_COEFFICIENTS.iter().find(|c| c.0 == f).unwrap();
            assert!((a + b * nr - want).abs() < 0.8, "NR{nr} at {f} Hz");
        }
    }

    #[test]
    fn the_rating_of_a_hand_worked_spectrum() {
        // worked by hand with L = a + b·NR: (L − a)/b per octave is
        // 63: 31.0, 125: 32.2, 250: 35.5, 500: 36.1, 1k: 35.0, 2k: 33.0,
        // 4k: 30.3, 8k: 27.2 → the 500 Hz octave touches NR 36.1: NR 37
        let levels = [
            (63.0, 60.0),
            (125.0, 50.0),
            (250.0, 45.0),
            (500.0, 40.0),
            (1000.0, 35.0),
            (2000.0, 30.0),
            (4000.0, 25.0),
            (8000.0, 20.0),
        ];
        let r = noise_rating(&levels).unwrap();
        assert_eq!(r.value, 37);
        assert_eq!(r.governing_hz, 500.0);
        assert!((r.exact - 36.14).abs() < 0.01, "{}", r.exact);
        // a spectrum lying on NR 35 rates NR 35
        let on: Vec<(f64, f64)> = NR_COEFFICIENTS
            .iter()
            .map(|&(f, a, b)| (f, a + b * 35.0))
            .collect();
        assert_eq!(noise_rating(&on).unwrap().value, 35);
        assert!(noise_rating(&levels[1..]).is_none());
    }

    /// Pink noise (equal power per band) by shaping white Gaussian noise
    /// with 1/√f in the frequency domain, scaled so that each octave holds
    /// `octave_ms` of mean square (full scale units).
    fn pink(seed: u64, n: usize, fs: f64) -> Vec<f64> {
        use rand::{Rng, SeedableRng};
        let mut rng = rand::rngs::StdRng::seed_from_u64(seed);
        let m = fft::fast_len(n);
        let mut spec: Vec<_> = (0..m / 2 + 1)
            .map(|k| {
                let f = k as f64 * fs / m as f64;
                let g = if f < 10.0 { 0.0 } else { 1.0 / f.sqrt() };
                let (a, b): (f64, f64) = (rng.random::<f64>() - 0.5, rng.random::<f64>() - 0.5);
                rustfft::num_complex::Complex::new(a * g, b * g)
            })
            .collect();
        let x = fft::irfft(&mut spec, m);
        x[..n].to_vec()
    }

    #[test]
    fn pink_noise_at_a_known_level_reads_that_level_in_every_band() {
        let fs = 48_000.0;
        let n = (20.0 * fs) as usize;
        let mut x = pink(7, n, fs);
        // scale so that the 1 kHz octave (band edges 707–1413 Hz) holds a
        // known level: the reference below is a plain sum of the bins
        // between the edges of a direct DFT of the same samples (Parseval),
        // independent of the band filter's shape
        let ms = |x: &[f64], lo: f64, hi: f64| {
            let m = x.len();
            let spec = fft::rfft(x, m);
            let df = fs / m as f64;
            spec.iter()
                .enumerate()
                .filter(|(k, _)| (*k as f64 * df) >= lo && (*k as f64 * df) < hi)
                .map(|(_, c)| 2.0 * c.norm_sqr() / (m as f64 * m as f64))
                .sum::<f64>()
        };
        let (lo, hi) = Band::new(1, 0).edges();
        let k = (1e-4 / ms(&x, lo, hi)).sqrt();
        x.iter_mut().for_each(|v| *v *= k);
        let cal = ten_pa_per_fs();
        let r = analyze(&x, fs, &cal).unwrap();
        // pink noise of mean square 1e-4 FS² per octave, 10 Pa per FS:
        // 1e-2 Pa² per octave → 10·lg(1e-2/4e-10) = 73.98 dB SPL in every
        // octave, and 4.77 dB less (a third of the power) per third octave
        let want = 10.0 * (1e-4 * 100.0 / (P_REF_PA * P_REF_PA)).log10();
        for b in r
            .octaves
            .iter()
            .filter(|b| b.center_hz >= 63.0 && b.center_hz <= 8000.0)
        {
            assert!(
                (b.leq_db - want).abs() < 0.2,
                "{} Hz {} vs {want}",
                b.center_hz,
                b.leq_db
            );
        }
        let third = want - 10.0 * 3f64.log10();
        for b in r
            .thirds
            .iter()
            .filter(|b| b.center_hz >= 100.0 && b.center_hz <= 10_000.0)
        {
            assert!(
                (b.leq_db - third).abs() < 0.2,
                "{} Hz {} vs {third}",
                b.center_hz,
                b.leq_db
            );
        }
        // the A-weighted total equals the power sum of the A-weighted third
        // octaves (IEC 61672-1 weighting at each centre), within 0.3 dB
        let sum: f64 = r
            .thirds
            .iter()
            .map(|b| 10f64.powf((b.leq_db + a_weighting_db(b.exact_hz)) / 10.0))
            .sum();
        assert!(
            (r.laeq_db - 10.0 * sum.log10()).abs() < 0.3,
            "{} vs {}",
            r.laeq_db,
            10.0 * sum.log10()
        );
        // pink noise flat per octave rates on its steepest-rising curve
        // point: (L − a)/b is largest at 8 kHz (a = −8.0, b = 1.03)
        let rating = r.rating.unwrap();
        assert_eq!(rating.governing_hz, 8000.0);
        assert!((rating.exact - (want + 8.0) / 1.03).abs() < 0.2);
    }

    #[test]
    fn a_long_recording_taken_in_segments_reads_its_level() {
        // 40 s of white noise at 48 kHz (two segments): RMS 0.01 FS at
        // 10 Pa/FS is 0.1 Pa, 74.0 dB SPL over 0–24 kHz; an octave holds
        // its bandwidth's share (closed form for white noise)
        use rand::{Rng, SeedableRng};
        let fs = 48_000.0;
        let mut rng = rand::rngs::StdRng::seed_from_u64(3);
        let a = 0.01 * 3f64.sqrt();
        let x: Vec<f64> = (0..(40.0 * fs) as usize)
            .map(|_| a * (2.0 * rng.random::<f64>() - 1.0))
            .collect();
        let cal = ten_pa_per_fs();
        let r = analyze(&x, fs, &cal).unwrap();
        assert!((r.lzeq_db - 74.0).abs() < 0.05, "{}", r.lzeq_db);
        for b in r.octaves.iter().filter(|b| b.center_hz >= 125.0) {
            let band = Band::new(1, (b.exact_hz / 1000.0).log(bands::G).round() as i32);
            let want = 74.0 + 10.0 * (band.bandwidth_hz() / 24_000.0).log10();
            assert!(
                (b.leq_db - want).abs() < 0.2,
                "{} Hz {} vs {want}",
                b.center_hz,
                b.leq_db
            );
        }
    }

    #[test]
    fn a_short_recording_is_refused() {
        let cal = ten_pa_per_fs();
        let x = vec![0.01; 100];
        assert!(analyze(&x, 48_000.0, &cal).is_err());
    }
}
