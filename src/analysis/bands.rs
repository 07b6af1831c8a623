//! Octave and one-third-octave band filters per IEC 61260-1:2014.
//!
//! Mid-band frequencies are the base-10 exact ones: G = 10^(3/10),
//! fm = 1000·G^(x/b) for odd b (octave b = 1, third octave b = 3), band
//! edges fm·G^(∓1/(2b)); bands are labelled with the nominal ISO 266
//! centres. The magnitude is that of a 6th-order Butterworth band-pass
//! (|H|² = 1/(1 + ((Ω − 1/Ω)/Δ)¹²), Ω = f/fm, Δ = G^(1/(2b)) − G^(−1/(2b)),
//! −3 dB at the edges), applied in the frequency domain with zero phase, so
//! that the filter's own ringing does not lengthen a short decay
//! (zero-phase in place of time-reversed filtering). Its class 1
//! compliance is checked in the tests against the limits quoted in
//! REFERENCES.md. The order is our choice: 3 already meets class 1, but its
//! skirt lets a neighbouring band through at −20 dB, enough to bend the
//! late decay of a band whose neighbour rings longer; order 6 puts the
//! neighbour's centre 39 dB down.

use serde::{Deserialize, Serialize};

/// The octave ratio of base-10 bands, G = 10^(3/10) (IEC 61260-1).
pub const G: f64 = 1.995_262_314_968_88;
/// The reference frequency, 1000 Hz.
pub const REFERENCE_HZ: f64 = 1000.0;
/// Order of the Butterworth shape of each band.
pub const ORDER: i32 = 6;

/// Nominal octave centres (ISO 266), 31.5 Hz to 16 kHz, x = −5..=4.
pub const OCTAVE_NOMINAL: [f64; 10] = [
    31.5, 63.0, 125.0, 250.0, 500.0, 1000.0, 2000.0, 4000.0, 8000.0, 16000.0,
];
/// Nominal one-third-octave centres (ISO 266), 20 Hz to 20 kHz, x = −17..=13.
pub const THIRD_NOMINAL: [f64; 31] = [
    20.0, 25.0, 31.5, 40.0, 50.0, 63.0, 80.0, 100.0, 125.0, 160.0, 200.0, 250.0, 315.0, 400.0,
    500.0, 630.0, 800.0, 1000.0, 1250.0, 1600.0, 2000.0, 2500.0, 3150.0, 4000.0, 5000.0, 6300.0,
    8000.0, 10000.0, 12500.0, 16000.0, 20000.0,
];

/// One band.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct Band {
    /// 1 for octave bands, 3 for one-third-octave bands.
    pub b: u32,
    /// Nominal centre (ISO 266), Hz.
    pub nominal_hz: f64,
    /// Exact mid-band frequency, Hz.
    pub exact_hz: f64,
}

impl Band {
    /// The band of index x (x = 0 at 1 kHz) for 1/b octave (b odd).
    pub fn new(b: u32, x: i32) -> Self {
        let exact_hz = REFERENCE_HZ * G.powf(f64::from(x) / f64::from(b));
        let nominal_hz = match b {
            1 => OCTAVE_NOMINAL[(x + 5) as usize],
            _ => THIRD_NOMINAL[(x + 17) as usize],
        };
        Band {
            b,
            nominal_hz,
            exact_hz,
        }
    }

    /// Lower and upper band edges fm·G^(∓1/(2b)), Hz.
    pub fn edges(&self) -> (f64, f64) {
        let k = G.powf(1.0 / (2.0 * f64::from(self.b)));
        (self.exact_hz / k, self.exact_hz * k)
    }

    /// Bandwidth between the edges, Hz.
    pub fn bandwidth_hz(&self) -> f64 {
        let (lo, hi) = self.edges();
        hi - lo
    }

    /// "1/1" or "1/3".
    pub fn fraction(&self) -> String {
        format!("1/{}", self.b)
    }

    /// Power gain |H(f)|² of the band's filter.
    pub fn power_gain(&self, f: f64) -> f64 {
        if f <= 0.0 {
            return 0.0;
        }
        let k = G.powf(1.0 / (2.0 * f64::from(self.b)));
        let delta = k - 1.0 / k;
        let omega = f / self.exact_hz;
        let x = (omega - 1.0 / omega) / delta;
        1.0 / (1.0 + x.powi(2 * ORDER))
    }

    /// Relative attenuation in dB at f (positive = attenuated).
    pub fn attenuation_db(&self, f: f64) -> f64 {
        -10.0 * self.power_gain(f).log10()
    }

    /// The frequency above which the filter attenuates by at least 70 dB
    /// (class 1's floor far from the band): used to cut the spectrum.
    pub fn stop_hz(&self) -> f64 {
        // solve ((Ω − 1/Ω)/Δ)^(2·ORDER) = 10^7 for Ω > 1
        let k = G.powf(1.0 / (2.0 * f64::from(self.b)));
        let delta = k - 1.0 / k;
        let x = 10f64.powf(7.0 / f64::from(2 * ORDER));
        let y = x * delta; // Ω − 1/Ω = y
        let omega = 0.5 * (y + (y * y + 4.0).sqrt());
        self.exact_hz * omega
    }
}

/// All octave bands, 31.5 Hz to 16 kHz.
pub fn octave_bands() -> Vec<Band> {
    (-5..=4).map(|x| Band::new(1, x)).collect()
}

/// All one-third-octave bands, 20 Hz to 20 kHz.
pub fn third_octave_bands() -> Vec<Band> {
    (-17..=13).map(|x| Band::new(3, x)).collect()
}

/// The bands whose edges both lie inside [f1, f2] and below `nyquist`.
pub fn bands_within(f1: f64, f2: f64, nyquist: f64) -> Vec<Band> {
    octave_bands()
        .into_iter()
        .chain(third_octave_bands())
        .filter(|b| {
            let (lo, hi) = b.edges();
            lo >= f1 * (1.0 - 1e-9) && hi <= f2.min(nyquist) * (1.0 + 1e-9)
        })
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn mid_band_frequencies_are_base_ten_exact() {
        // IEC 61260-1 (formulas as quoted in REFERENCES.md [sec]):
        // fm = 1000·G^(x/b), G = 10^(3/10); values [calc].
        assert!((G - 10f64.powf(0.3)).abs() < 1e-12);
        let octave = [
            31.623, 63.096, 125.893, 251.189, 501.187, 1000.0, 1995.262, 3981.072, 7943.282,
            15848.93,
        ];
        for (band, want) in octave_bands().iter().zip(octave) {
            assert!(
                (band.exact_hz / want - 1.0).abs() < 1e-4,
                "{}",
                band.exact_hz
            );
        }
        let thirds = third_octave_bands();
        assert!((thirds[0].exact_hz / 19.953 - 1.0).abs() < 1e-4);
        assert!((thirds[30].exact_hz / 19952.62 - 1.0).abs() < 1e-4);
        for t in &thirds {
            let x = (t.exact_hz / 1000.0).log(G) * 3.0;
            assert!((x - x.round()).abs() < 1e-9);
            // nominal within 3 % of exact (ISO 266 rounding; common practice)
            assert!(
                (t.nominal_hz / t.exact_hz - 1.0).abs() < 0.03,
                "{}",
                t.nominal_hz
            );
        }
        // edges around 1 kHz: octave 707.946/1412.538, third 891.251/1122.018
        let (lo, hi) = Band::new(1, 0).edges();
        assert!((lo - 707.946).abs() < 1e-3 && (hi - 1412.538).abs() < 1e-3);
        let (lo, hi) = Band::new(3, 0).edges();
        assert!((lo - 891.251).abs() < 1e-3 && (hi - 1122.018).abs() < 1e-3);
    }

    /// Class 1 acceptance limits of relative attenuation for octave bands
    /// at Ω = G^(k/8) and above, as quoted in REFERENCES.md ("two
    /// independent implementations agree" [sec]); (Ω exponent of G,
    /// minimum dB, maximum dB).
    const CLASS1_OCTAVE: [(f64, f64, f64); 9] = [
        (0.0, -0.4, 0.4),
        (0.125, -0.4, 0.5),
        (0.25, -0.4, 0.7),
        (0.375, -0.4, 1.4),
        (0.5, 1.2, 5.3),
        (1.0, 16.6, f64::INFINITY),
        (2.0, 40.5, f64::INFINITY),
        (3.0, 60.0, f64::INFINITY),
        (4.0, 70.0, f64::INFINITY),
    ];

    /// Ω for a 1/b-octave band from the octave breakpoint Ω₁ by
    /// Ω_b = 1 + (G^(1/(2b)) − 1)/(G^(1/2) − 1)·(Ω₁ − 1) (REFERENCES.md
    /// [sec; mem that it is the standard's equation]).
    fn omega_b(omega_1: f64, b: f64) -> f64 {
        1.0 + (G.powf(1.0 / (2.0 * b)) - 1.0) / (G.sqrt() - 1.0) * (omega_1 - 1.0)
    }

    #[test]
    fn magnitude_stays_inside_the_class_1_limits() {
        for band in [
            Band::new(1, 0),
            Band::new(1, -3),
            Band::new(3, 0),
            Band::new(3, 7),
        ] {
            for (e, lo, hi) in CLASS1_OCTAVE {
                let omega = omega_b(G.powf(e), f64::from(band.b));
                // symmetric in 1/Ω: check above and below the band
                for w in [omega, 1.0 / omega] {
                    let a = band.attenuation_db(band.exact_hz * w);
                    assert!(
                        a >= lo && a <= hi,
                        "1/{} at Ω = {w:.4}: {a:.2} dB not in [{lo}, {hi}]",
                        band.b
                    );
                }
            }
        }
        // the third-octave breakpoints of REFERENCES.md [calc]
        for (i, want) in [
            1.0267, 1.0558, 1.0875, 1.1220, 1.2944, 1.8817, 3.0537, 5.3919,
        ]
        .iter()
        .enumerate()
        {
            let got = omega_b(G.powf(CLASS1_OCTAVE[i + 1].0), 3.0);
            assert!((got - want).abs() < 1e-4, "{got} vs {want}");
        }
    }

    #[test]
    fn bands_together_pass_a_flat_spectrum_within_a_db() {
        // power complementarity (common practice): Σ|H_b|² ≈ 1 between
        // the outer bands' centres
        for bands in [octave_bands(), third_octave_bands()] {
            let lo = bands[1].exact_hz;
            let hi = bands[bands.len() - 2].exact_hz;
            let mut f = lo;
            while f < hi {
                let sum: f64 = bands.iter().map(|b| b.power_gain(f)).sum();
                assert!(
                    (10.0 * sum.log10()).abs() < 1.0,
                    "{f}: {}",
                    10.0 * sum.log10()
                );
                f *= 1.01;
            }
        }
    }

    #[test]
    fn bands_are_limited_to_the_sweep() {
        let b = bands_within(20.0, 20_000.0, 24_000.0);
        assert!(b.iter().any(|x| x.b == 1 && x.nominal_hz == 31.5));
        assert!(b.iter().any(|x| x.b == 1 && x.nominal_hz == 8000.0));
        assert!(
            !b.iter().any(|x| x.b == 1 && x.nominal_hz == 16000.0),
            "16 kHz octave reaches 22.4 kHz"
        );
        assert!(b.iter().any(|x| x.b == 3 && x.nominal_hz == 25.0));
        assert!(!b.iter().any(|x| x.b == 3 && x.nominal_hz == 20.0));
        assert!(b.iter().any(|x| x.b == 3 && x.nominal_hz == 16000.0));
        let stop = Band::new(1, 0).stop_hz();
        assert!((Band::new(1, 0).attenuation_db(stop) - 70.0).abs() < 1e-6);
    }
}
