//! Second-order IIR sections: the Audio EQ Cookbook filters
//! (R. Bristow-Johnson) and their exact frequency responses. The virtual
//! loudspeaker is built from them.

use rustfft::num_complex::Complex;

/// A biquad normalised so that a0 = 1.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Biquad {
    /// Feed-forward coefficients b0, b1, b2.
    pub b: [f64; 3],
    /// Feedback coefficients a1, a2 (a0 = 1).
    pub a: [f64; 2],
}

impl Biquad {
    fn normalised(b: [f64; 3], a: [f64; 3]) -> Self {
        Biquad {
            b: [b[0] / a[0], b[1] / a[0], b[2] / a[0]],
            a: [a[1] / a[0], a[2] / a[0]],
        }
    }

    /// Peaking equaliser at f0 with quality Q and gain in dB.
    pub fn peaking(fs: f64, f0: f64, q: f64, gain_db: f64) -> Self {
        let a = 10f64.powf(gain_db / 40.0);
        let w0 = std::f64::consts::TAU * f0 / fs;
        let alpha = w0.sin() / (2.0 * q);
        let c = w0.cos();
        Self::normalised(
            [1.0 + alpha * a, -2.0 * c, 1.0 - alpha * a],
            [1.0 + alpha / a, -2.0 * c, 1.0 - alpha / a],
        )
    }

    /// Second-order high-pass at f0 with quality Q (Q = 1/√2: Butterworth).
    pub fn highpass(fs: f64, f0: f64, q: f64) -> Self {
        let w0 = std::f64::consts::TAU * f0 / fs;
        let alpha = w0.sin() / (2.0 * q);
        let c = w0.cos();
        Self::normalised(
            [(1.0 + c) / 2.0, -(1.0 + c), (1.0 + c) / 2.0],
            [1.0 + alpha, -2.0 * c, 1.0 - alpha],
        )
    }

    /// Second-order low-pass at f0 with quality Q.
    pub fn lowpass(fs: f64, f0: f64, q: f64) -> Self {
        let w0 = std::f64::consts::TAU * f0 / fs;
        let alpha = w0.sin() / (2.0 * q);
        let c = w0.cos();
        Self::normalised(
            [(1.0 - c) / 2.0, 1.0 - c, (1.0 - c) / 2.0],
            [1.0 + alpha, -2.0 * c, 1.0 - alpha],
        )
    }

    /// Low shelf at f0 with shelf slope S and gain in dB.
    pub fn low_shelf(fs: f64, f0: f64, slope: f64, gain_db: f64) -> Self {
        let a = 10f64.powf(gain_db / 40.0);
        let w0 = std::f64::consts::TAU * f0 / fs;
        let c = w0.cos();
        let alpha = w0.sin() / 2.0 * ((a + 1.0 / a) * (1.0 / slope - 1.0) + 2.0).sqrt();
        let sa = 2.0 * a.sqrt() * alpha;
        Self::normalised(
            [
                a * ((a + 1.0) - (a - 1.0) * c + sa),
                2.0 * a * ((a - 1.0) - (a + 1.0) * c),
                a * ((a + 1.0) - (a - 1.0) * c - sa),
            ],
            [
                (a + 1.0) + (a - 1.0) * c + sa,
                -2.0 * ((a - 1.0) + (a + 1.0) * c),
                (a + 1.0) + (a - 1.0) * c - sa,
            ],
        )
    }

    /// High shelf at f0 with shelf slope S and gain in dB (S = 1 is the
    /// steepest slope without overshoot, the same as Q = 1/√2).
    pub fn high_shelf(fs: f64, f0: f64, slope: f64, gain_db: f64) -> Self {
        let a = 10f64.powf(gain_db / 40.0);
        let w0 = std::f64::consts::TAU * f0 / fs;
        let c = w0.cos();
        let alpha = w0.sin() / 2.0 * ((a + 1.0 / a) * (1.0 / slope - 1.0) + 2.0).sqrt();
        let sa = 2.0 * a.sqrt() * alpha;
        Self::normalised(
            [
                a * ((a + 1.0) + (a - 1.0) * c + sa),
                -2.0 * a * ((a - 1.0) + (a + 1.0) * c),
                a * ((a + 1.0) + (a - 1.0) * c - sa),
            ],
            [
                (a + 1.0) - (a - 1.0) * c + sa,
                2.0 * ((a - 1.0) - (a + 1.0) * c),
                (a + 1.0) - (a - 1.0) * c - sa,
            ],
        )
    }

    /// |H(e^{jω})|² from cos ω and cos 2ω: |b0 + b1·z⁻¹ + b2·z⁻²|² over
    /// |1 + a1·z⁻¹ + a2·z⁻²|², expanded (no complex arithmetic, for the
    /// inner loop of a fit on a fixed grid).
    pub fn power_at(&self, cos_w: f64, cos_2w: f64) -> f64 {
        let [b0, b1, b2] = self.b;
        let [a1, a2] = self.a;
        let num = b0 * b0
            + b1 * b1
            + b2 * b2
            + 2.0 * (b0 * b1 + b1 * b2) * cos_w
            + 2.0 * b0 * b2 * cos_2w;
        let den = 1.0 + a1 * a1 + a2 * a2 + 2.0 * (a1 + a1 * a2) * cos_w + 2.0 * a2 * cos_2w;
        num / den
    }

    /// Filters `x` in place (transposed direct form II, zero initial state).
    pub fn process(&self, x: &mut [f64]) {
        let [b0, b1, b2] = self.b;
        let [a1, a2] = self.a;
        let (mut s1, mut s2) = (0.0, 0.0);
        for v in x.iter_mut() {
            let input = *v;
            let y = b0 * input + s1;
            s1 = b1 * input - a1 * y + s2;
            s2 = b2 * input - a2 * y;
            *v = y;
        }
    }

    /// Exact frequency response H(e^{jω}) at f Hz.
    pub fn response(&self, fs: f64, f: f64) -> Complex<f64> {
        let w = std::f64::consts::TAU * f / fs;
        let z1 = Complex::from_polar(1.0, -w);
        let z2 = z1 * z1;
        let num = self.b[0] + z1 * self.b[1] + z2 * self.b[2];
        let den = 1.0 + z1 * self.a[0] + z2 * self.a[1];
        num / den
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn peaking_coefficients_match_the_cookbook_check() {
        // REFERENCES.md [calc] from the Audio EQ Cookbook: fs 48 kHz, 1 kHz,
        // Q 1, +6 dB: b = [1.04395309, −1.89532072, 0.86772228],
        // a = [1, −1.89532072, 0.91167537]; +6.000 dB at f0.
        let f = Biquad::peaking(48_000.0, 1000.0, 1.0, 6.0);
        let want_b = [1.04395309, -1.89532072, 0.86772228];
        let want_a = [-1.89532072, 0.91167537];
        for (got, want) in f.b.iter().zip(want_b) {
            assert!((got - want).abs() < 1e-8);
        }
        for (got, want) in f.a.iter().zip(want_a) {
            assert!((got - want).abs() < 1e-8);
        }
        let g = 20.0 * f.response(48_000.0, 1000.0).norm().log10();
        assert!((g - 6.0).abs() < 1e-9);
    }

    #[test]
    fn butterworth_highpass_is_3db_down_at_cutoff() {
        // Closed form: a Butterworth magnitude is 1/√2 at its cutoff (the
        // bilinear transform maps the cutoff exactly in the cookbook design).
        let f = Biquad::highpass(48_000.0, 100.0, std::f64::consts::FRAC_1_SQRT_2);
        let g = f.response(48_000.0, 100.0).norm();
        assert!((g - std::f64::consts::FRAC_1_SQRT_2).abs() < 1e-9);
        assert!(f.response(48_000.0, 10_000.0).norm() > 0.999);
    }

    #[test]
    fn processing_matches_the_difference_equation() {
        let f = Biquad::peaking(48_000.0, 500.0, 2.0, -4.0);
        let x: Vec<f64> = (0..200).map(|n| ((n * 37 % 11) as f64) - 5.0).collect();
        let mut y = x.clone();
        f.process(&mut y);
        // direct form I as the naive reference
        let mut want = vec![0.0; x.len()];
        for n in 0..x.len() {
            let xm = |k: usize| if n >= k { x[n - k] } else { 0.0 };
            let ym = |k: usize, w: &Vec<f64>| if n >= k { w[n - k] } else { 0.0 };
            want[n] = f.b[0] * xm(0) + f.b[1] * xm(1) + f.b[2] * xm(2)
                - f.a[0] * ym(1, &want)
                - f.a[1] * ym(2, &want);
        }
        for (a, b) in y.iter().zip(&want) {
            assert!((a - b).abs() < 1e-10);
        }
    }
}
