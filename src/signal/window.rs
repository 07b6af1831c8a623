//! Window functions and half-window tapers.
//!
//! Definitions follow F. J. Harris, "On the use of windows for harmonic
//! analysis with the discrete Fourier transform", Proc. IEEE 66(1), 1978.
//! Windows are "periodic" (DFT-even, the form Harris tabulates): `w[n]` for
//! n = 0..N with period N.

use std::f64::consts::PI;

/// The windows gliss uses.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Window {
    /// All ones.
    Rectangular,
    /// Hann (raised cosine).
    Hann,
    /// Four-term Blackman–Harris (−92 dB sidelobes).
    BlackmanHarris,
}

impl Window {
    /// Value at sample n of a periodic window of length `len`.
    pub fn value(self, n: usize, len: usize) -> f64 {
        let x = 2.0 * PI * n as f64 / len as f64;
        match self {
            Window::Rectangular => 1.0,
            Window::Hann => 0.5 - 0.5 * x.cos(),
            Window::BlackmanHarris => {
                0.35875 - 0.48829 * x.cos() + 0.14128 * (2.0 * x).cos() - 0.01168 * (3.0 * x).cos()
            }
        }
    }

    /// The whole window of length `len`.
    pub fn make(self, len: usize) -> Vec<f64> {
        (0..len).map(|n| self.value(n, len)).collect()
    }
}

/// Rising half of a Hann window over `len` samples: 0 at the first sample,
/// approaching 1 at the last. Multiplies `x[..len]` in place.
pub fn fade_in(x: &mut [f64], len: usize) {
    let len = len.min(x.len());
    for (n, v) in x[..len].iter_mut().enumerate() {
        *v *= half_hann_rise(n, len);
    }
}

/// Falling half of a Hann window over the last `len` samples, ending at 0.
pub fn fade_out(x: &mut [f64], len: usize) {
    let len = len.min(x.len());
    let start = x.len() - len;
    for (n, v) in x[start..].iter_mut().enumerate() {
        *v *= half_hann_rise(len - 1 - n, len);
    }
}

/// Gain of a half-Hann rise of `len` samples at sample n (0 at n = 0).
pub fn half_hann_rise(n: usize, len: usize) -> f64 {
    if len == 0 {
        return 1.0;
    }
    0.5 - 0.5 * (PI * n as f64 / len as f64).cos()
}

/// Σw² of a window of `len` ones with the half-Hann [`fade_in`] and
/// [`fade_out`] of the given lengths applied (without building it).
pub fn taper_energy(len: usize, fade_in_len: usize, fade_out_len: usize) -> f64 {
    let fi = fade_in_len.min(len);
    let fo = fade_out_len.min(len);
    if fi + fo > len {
        // overlapping fades: build it
        let mut w = vec![1.0; len];
        fade_in(&mut w, fi);
        fade_out(&mut w, fo);
        return w.iter().map(|v| v * v).sum();
    }
    let ramp = |l: usize| (0..l).map(|n| half_hann_rise(n, l).powi(2)).sum::<f64>();
    (len - fi - fo) as f64 + ramp(fi) + ramp(fo)
}

#[cfg(test)]
mod tests {
    use super::*;
    use rustfft::num_complex::Complex;

    /// Highest sidelobe in dB relative to the main lobe, from a heavily
    /// zero-padded FFT: the first local minimum ends the main lobe.
    fn highest_sidelobe_db(w: Window) -> f64 {
        let len = 64;
        let pad = 64 * 256;
        let mut buf: Vec<Complex<f64>> = (0..pad)
            .map(|n| Complex::new(if n < len { w.value(n, len) } else { 0.0 }, 0.0))
            .collect();
        crate::signal::fft::complex_plan(pad, false).process(&mut buf);
        let mag: Vec<f64> = buf[..pad / 2].iter().map(|c| c.norm()).collect();
        let mut k = 1;
        while k + 1 < mag.len() && mag[k + 1] < mag[k] {
            k += 1;
        }
        let side = mag[k..].iter().cloned().fold(0.0, f64::max);
        20.0 * (side / mag[0]).log10()
    }

    #[test]
    fn sidelobes_match_harris_1978() {
        // F. J. Harris, Proc. IEEE 66(1), 1978, Table 1 (values as in
        // REFERENCES.md): rectangular −13.26 dB, Hann −31.47 dB,
        // four-term Blackman–Harris −92.01 dB.
        assert!((highest_sidelobe_db(Window::Rectangular) + 13.26).abs() < 0.05);
        assert!((highest_sidelobe_db(Window::Hann) + 31.47).abs() < 0.05);
        assert!((highest_sidelobe_db(Window::BlackmanHarris) + 92.01).abs() < 0.1);
    }

    #[test]
    fn equivalent_noise_bandwidth_matches_harris_1978() {
        // ENBW = N·Σw²/(Σw)²: rectangular 1.000, Hann 1.500,
        // Blackman–Harris 2.004 bins (Harris 1978, Table 1).
        for (w, want) in [
            (Window::Rectangular, 1.0),
            (Window::Hann, 1.5),
            (Window::BlackmanHarris, 2.004),
        ] {
            let v = w.make(4096);
            let s: f64 = v.iter().sum();
            let s2: f64 = v.iter().map(|x| x * x).sum();
            let enbw = 4096.0 * s2 / (s * s);
            assert!((enbw - want).abs() < 0.002, "{w:?} {enbw}");
        }
    }

    #[test]
    fn taper_energy_matches_the_built_window() {
        for (len, fi, fo) in [(100, 10, 20), (50, 0, 0), (30, 20, 20), (1000, 333, 1)] {
            let mut w = vec![1.0; len];
            fade_in(&mut w, fi);
            fade_out(&mut w, fo);
            let want: f64 = w.iter().map(|v| v * v).sum();
            assert!((taper_energy(len, fi, fo) - want).abs() < 1e-9);
        }
    }

    #[test]
    fn fades_reach_zero_and_keep_the_middle() {
        let mut x = vec![1.0; 100];
        fade_in(&mut x, 10);
        fade_out(&mut x, 20);
        assert_eq!(x[0], 0.0);
        assert!(x[99] < 0.01 && x[99] >= 0.0);
        assert!(x[10..80].iter().all(|&v| v == 1.0));
        assert!(x[1..10].windows(2).all(|w| w[1] > w[0]));
        assert!(x[80..].windows(2).all(|w| w[1] < w[0]));
    }
}
