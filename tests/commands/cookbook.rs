//! The tests' own Audio EQ Cookbook biquads (R. Bristow-Johnson's
//! formulas, written here independently of gliss's), their direct-form-I
//! difference equation and their closed-form response H(e^{jω}).

use rustfft::num_complex::Complex;

/// Sample rate of every device under test.
pub const FS: f64 = 48_000.0;

/// Coefficients (b0, b1, b2, a1, a2), normalised by a0.
pub type Coeffs = [f64; 5];

fn normalised(b: [f64; 3], a: [f64; 3]) -> Coeffs {
    [
        b[0] / a[0],
        b[1] / a[0],
        b[2] / a[0],
        a[1] / a[0],
        a[2] / a[0],
    ]
}

/// Peaking equaliser at f0 with quality q and gain in dB.
pub fn peaking(f0: f64, q: f64, gain_db: f64) -> Coeffs {
    let a = 10f64.powf(gain_db / 40.0);
    let w0 = std::f64::consts::TAU * f0 / FS;
    let alpha = w0.sin() / (2.0 * q);
    let c = w0.cos();
    normalised(
        [1.0 + alpha * a, -2.0 * c, 1.0 - alpha * a],
        [1.0 + alpha / a, -2.0 * c, 1.0 - alpha / a],
    )
}

/// Second-order high-pass at f0 with quality q (1/√2: Butterworth).
pub fn highpass(f0: f64, q: f64) -> Coeffs {
    let w0 = std::f64::consts::TAU * f0 / FS;
    let alpha = w0.sin() / (2.0 * q);
    let c = w0.cos();
    normalised(
        [(1.0 + c) / 2.0, -(1.0 + c), (1.0 + c) / 2.0],
        [1.0 + alpha, -2.0 * c, 1.0 - alpha],
    )
}

/// Second-order low-pass at f0 with quality q.
pub fn lowpass(f0: f64, q: f64) -> Coeffs {
    let w0 = std::f64::consts::TAU * f0 / FS;
    let alpha = w0.sin() / (2.0 * q);
    let c = w0.cos();
    normalised(
        [(1.0 - c) / 2.0, 1.0 - c, (1.0 - c) / 2.0],
        [1.0 + alpha, -2.0 * c, 1.0 - alpha],
    )
}

/// Direct form I: y[n] = b0x[n] + b1x[n−1] + b2x[n−2] − a1y[n−1] − a2y[n−2].
pub fn filter(c: &Coeffs, x: &[f64]) -> Vec<f64> {
    let mut y = vec![0.0; x.len()];
    for n in 0..x.len() {
        let x1 = if n >= 1 { x[n - 1] } else { 0.0 };
        let x2 = if n >= 2 { x[n - 2] } else { 0.0 };
        let y1 = if n >= 1 { y[n - 1] } else { 0.0 };
        let y2 = if n >= 2 { y[n - 2] } else { 0.0 };
        y[n] = c[0] * x[n] + c[1] * x1 + c[2] * x2 - c[3] * y1 - c[4] * y2;
    }
    y
}

/// H(e^{jω}) = B(z)/A(z) at f Hz.
pub fn response(c: &Coeffs, f: f64) -> Complex<f64> {
    let z1 = Complex::from_polar(1.0, -std::f64::consts::TAU * f / FS);
    (c[0] + z1 * c[1] + z1 * z1 * c[2]) / (1.0 + z1 * c[3] + z1 * z1 * c[4])
}
