//! Arrival time of an impulse response: the peak of |h|, refined to a
//! fraction of a sample by band-limited (windowed-sinc) interpolation.

/// Half-width, in samples, of the windowed-sinc interpolator.
pub const SINC_HALF_WIDTH: usize = 48;

/// Index of the largest `|h[i]|` for i in `range` (clamped to h).
pub fn peak_index(h: &[f64], range: std::ops::Range<usize>) -> Option<usize> {
    let end = range.end.min(h.len());
    let start = range.start.min(end);
    h[start..end]
        .iter()
        .enumerate()
        .fold(None, |best: Option<(usize, f64)>, (i, &v)| match best {
            Some((_, b)) if b >= v.abs() => best,
            _ => Some((i, v.abs())),
        })
        .map(|(i, _)| start + i)
}

/// Band-limited value of the circular signal h at fractional time t
/// (samples), by a Hann-windowed sinc over ±[`SINC_HALF_WIDTH`] samples.
pub fn interpolate(h: &[f64], t: f64) -> f64 {
    let n = h.len() as isize;
    let center = t.floor() as isize;
    let hw = SINC_HALF_WIDTH as isize;
    let mut acc = 0.0;
    for i in (center - hw + 1)..=(center + hw) {
        let x = t - i as f64;
        let w = 0.5 + 0.5 * (std::f64::consts::PI * x / hw as f64).cos();
        let s = if x.abs() < 1e-12 {
            1.0
        } else {
            let px = std::f64::consts::PI * x;
            px.sin() / px
        };
        acc += h[i.rem_euclid(n) as usize] * s * w;
    }
    acc
}

/// Sub-sample position of the peak of |h| near integer index `i`, treating
/// h as circular (index −1 is the last sample). Maximises the interpolated
/// value with the peak's sign by golden-section search within ±1 sample.
pub fn refine_peak(h: &[f64], i: usize) -> f64 {
    let sign = if h[i] < 0.0 { -1.0 } else { 1.0 };
    let f = |t: f64| sign * interpolate(h, t);
    // coarse scan, then golden section around the best point
    let center = i as f64;
    let mut best = center;
    let mut best_v = f(center);
    for k in -20..=20 {
        let t = center + k as f64 * 0.05;
        let v = f(t);
        if v > best_v {
            best_v = v;
            best = t;
        }
    }
    golden_section_max(f, best - 0.05, best + 0.05, 40)
}

/// The maximum of `f`, unimodal on [a, b], by `iterations` steps of
/// golden-section search (each shrinks the bracket by 0.618); the middle
/// of the last bracket.
pub fn golden_section_max(f: impl Fn(f64) -> f64, a: f64, b: f64, iterations: usize) -> f64 {
    let (mut a, mut b) = (a, b);
    let g = 0.5 * (5f64.sqrt() - 1.0);
    let mut c = b - g * (b - a);
    let mut d = a + g * (b - a);
    let (mut fc, mut fd) = (f(c), f(d));
    for _ in 0..iterations {
        if fc > fd {
            b = d;
            d = c;
            fd = fc;
            c = b - g * (b - a);
            fc = f(c);
        } else {
            a = c;
            c = d;
            fc = fd;
            d = a + g * (b - a);
            fd = f(d);
        }
    }
    0.5 * (a + b)
}

#[cfg(test)]
mod tests {
    use super::*;

    /// A band-limited pulse centred at `d` samples: the ideal low-pass
    /// sinc(n − d) with cutoff 0.45·fs, Hann-tapered over a long window.
    fn pulse(len: usize, d: f64) -> Vec<f64> {
        (0..len)
            .map(|n| {
                let x = n as f64 - d;
                let c = 0.9; // cutoff as a fraction of Nyquist
                let s = if x.abs() < 1e-12 {
                    c
                } else {
                    (std::f64::consts::PI * c * x).sin() / (std::f64::consts::PI * x)
                };
                let w = if x.abs() < 400.0 {
                    0.5 + 0.5 * (std::f64::consts::PI * x / 400.0).cos()
                } else {
                    0.0
                };
                s * w
            })
            .collect()
    }

    #[test]
    fn fractional_peaks_are_found_to_a_hundredth_of_a_sample() {
        // closed form: a symmetric band-limited pulse peaks at its centre
        for d in [500.0, 500.25, 500.5, 731.73, 612.01] {
            let h = pulse(2000, d);
            let i = peak_index(&h, 0..2000).unwrap();
            let t = refine_peak(&h, i);
            assert!((t - d).abs() < 0.01, "{d} → {t}");
        }
    }

    #[test]
    fn negative_peaks_and_circular_wrap() {
        let mut h = pulse(1000, 0.3);
        // the half before zero wraps to the end
        let wrapped: Vec<f64> = pulse(1000, 1000.3);
        for (a, b) in h.iter_mut().zip(&wrapped) {
            *a = -(*a + b);
        }
        let i = peak_index(&h, 0..500).unwrap();
        assert_eq!(i, 0);
        assert!((refine_peak(&h, i) - 0.3).abs() < 0.01);
    }

    #[test]
    fn interpolation_reproduces_samples() {
        let h = pulse(300, 150.4);
        for n in [100usize, 150, 151, 170] {
            assert!((interpolate(&h, n as f64) - h[n]).abs() < 1e-12);
        }
    }
}
