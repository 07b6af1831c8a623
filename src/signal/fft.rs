//! FFT helpers over realfft: cached plans, sizes that transform fast, and
//! linear convolution.

use std::cell::RefCell;
use std::sync::Arc;

use realfft::{ComplexToReal, RealFftPlanner, RealToComplex};
use rustfft::num_complex::Complex;

thread_local! {
    static PLANNER: RefCell<RealFftPlanner<f64>> = RefCell::new(RealFftPlanner::new());
    static COMPLEX_PLANNER: RefCell<rustfft::FftPlanner<f64>> =
        RefCell::new(rustfft::FftPlanner::new());
}

/// A complex FFT plan of length n, forward or inverse (cached per thread,
/// like the real plans, so every stage shares one plan per size; not
/// cached above [`CACHED_PLAN_MAX_LEN`]).
pub fn complex_plan(n: usize, inverse: bool) -> Arc<dyn rustfft::Fft<f64>> {
    if n > CACHED_PLAN_MAX_LEN {
        let mut p = rustfft::FftPlanner::new();
        return if inverse {
            p.plan_fft_inverse(n)
        } else {
            p.plan_fft_forward(n)
        };
    }
    COMPLEX_PLANNER.with(|p| {
        let mut p = p.borrow_mut();
        if inverse {
            p.plan_fft_inverse(n)
        } else {
            p.plan_fft_forward(n)
        }
    })
}

/// The longest transform whose plan is kept in the per-thread cache.
///
/// A plan holds twiddle tables of about 12 bytes per point (realfft's own
/// quarter-length table and the inner complex FFT's half-length one), and
/// the cache keeps every plan for the thread's life. Up to 2²¹ points (a
/// 43 s recording at 48 kHz) a plan costs at most 25 MB and is worth
/// keeping: `reanalyze` and the demo transform many recordings of one
/// length, and building a plan costs about as much as using it once.
/// Longer plans are built for each use and dropped with it, so a long
/// recording at a high rate never holds a forward and an inverse plan of
/// its full length at once (60 s at 192 kHz: 146 MB each).
pub const CACHED_PLAN_MAX_LEN: usize = 1 << 21;

/// A forward real FFT plan of length n (cached per thread by realfft up to
/// [`CACHED_PLAN_MAX_LEN`]).
pub fn forward_plan(n: usize) -> Arc<dyn RealToComplex<f64>> {
    if n > CACHED_PLAN_MAX_LEN {
        return RealFftPlanner::new().plan_fft_forward(n);
    }
    PLANNER.with(|p| p.borrow_mut().plan_fft_forward(n))
}

/// An inverse real FFT plan of length n (cached like [`forward_plan`]).
pub fn inverse_plan(n: usize) -> Arc<dyn ComplexToReal<f64>> {
    if n > CACHED_PLAN_MAX_LEN {
        return RealFftPlanner::new().plan_fft_inverse(n);
    }
    PLANNER.with(|p| p.borrow_mut().plan_fft_inverse(n))
}

/// The smallest even n ≥ `min` whose only prime factors are 2, 3 and 5:
/// such lengths transform nearly as fast as powers of two and waste less
/// zero padding.
pub fn fast_len(min: usize) -> usize {
    let mut n = min.max(2);
    loop {
        if n % 2 == 0 {
            let mut m = n;
            for p in [2, 3, 5] {
                while m % p == 0 {
                    m /= p;
                }
            }
            if m == 1 {
                return n;
            }
        }
        n += 1;
    }
}

/// Spectrum (n/2 + 1 bins) of `x` zero-padded (or cut) to length n.
/// Unnormalised: a unit impulse gives 1 in every bin.
pub fn rfft(x: &[f64], n: usize) -> Vec<Complex<f64>> {
    let plan = forward_plan(n);
    let mut input = plan.make_input_vec();
    let m = x.len().min(n);
    input[..m].copy_from_slice(&x[..m]);
    let mut out = plan.make_output_vec();
    let mut scratch = plan.make_scratch_vec();
    plan.process_with_scratch(&mut input, &mut out, &mut scratch)
        .expect("buffer lengths come from the plan");
    out
}

/// Inverse of [`rfft`], normalised by 1/n so that irfft(rfft(x)) = x.
/// Clears the imaginary parts of the DC and Nyquist bins first, as realfft
/// requires.
pub fn irfft(spectrum: &mut [Complex<f64>], n: usize) -> Vec<f64> {
    let plan = inverse_plan(n);
    assert_eq!(spectrum.len(), n / 2 + 1, "spectrum length must be n/2 + 1");
    spectrum[0].im = 0.0;
    if n % 2 == 0 {
        spectrum[n / 2].im = 0.0;
    }
    let mut out = plan.make_output_vec();
    let mut scratch = plan.make_scratch_vec();
    plan.process_with_scratch(spectrum, &mut out, &mut scratch)
        .expect("buffer lengths come from the plan");
    let scale = 1.0 / n as f64;
    for v in &mut out {
        *v *= scale;
    }
    out
}

/// `x` through a zero-phase filter of real gain `gain(f_hz)` at sample
/// rate `fs`, by one FFT padded against wrap-around: the output has the
/// length of `x`. A real gain delays nothing; a gain that changes slowly
/// with frequency rings only briefly either side of each sample.
pub fn zero_phase_filter(x: &[f64], fs: f64, gain: impl Fn(f64) -> f64) -> Vec<f64> {
    let n = fast_len(2 * x.len().max(1));
    let mut spectrum = rfft(x, n);
    let df = fs / n as f64;
    for (k, c) in spectrum.iter_mut().enumerate() {
        *c *= gain(k as f64 * df);
    }
    let mut y = irfft(&mut spectrum, n);
    y.truncate(x.len());
    y
}

/// Linear convolution of `a` and `b` (length a + b − 1) by FFT.
pub fn convolve(a: &[f64], b: &[f64]) -> Vec<f64> {
    if a.is_empty() || b.is_empty() {
        return Vec::new();
    }
    let len = a.len() + b.len() - 1;
    let n = fast_len(len);
    let mut sa = rfft(a, n);
    let sb = rfft(b, n);
    for (x, y) in sa.iter_mut().zip(&sb) {
        *x *= *y;
    }
    let mut out = irfft(&mut sa, n);
    out.truncate(len);
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    fn lcg(seed: &mut u64) -> f64 {
        // deterministic test input, common practice
        *seed = seed
            .wrapping_mul(6364136223846793005)
            .wrapping_add(1442695040888963407);
        ((*seed >> 11) as f64 / (1u64 << 53) as f64) - 0.5
    }

    #[test]
    fn long_plans_are_not_kept_and_short_ones_are() {
        // a kept plan is the same object each time; a long one is built
        // for each use, so its twiddle tables go when the transform is done
        let short = fast_len(48_000);
        assert!(Arc::ptr_eq(&forward_plan(short), &forward_plan(short)));
        assert!(Arc::ptr_eq(&inverse_plan(short), &inverse_plan(short)));
        let long = fast_len(CACHED_PLAN_MAX_LEN + 1);
        assert!(!Arc::ptr_eq(&forward_plan(long), &forward_plan(long)));
        assert!(!Arc::ptr_eq(
            &complex_plan(long, true),
            &complex_plan(long, true)
        ));
    }

    #[test]
    fn fast_len_has_small_factors() {
        assert_eq!(fast_len(1), 2);
        assert_eq!(fast_len(7), 8);
        assert_eq!(fast_len(11), 12);
        assert_eq!(fast_len(384_000), 384_000);
        for n in [97, 1001, 65_537, 480_001] {
            let f = fast_len(n);
            assert!(f >= n && f < n + n / 8 + 8);
        }
    }

    #[test]
    fn rfft_matches_naive_dft() {
        // naive O(n²) DFT as the reference (common practice)
        let mut s = 1;
        for n in [2usize, 6, 30, 64, 90] {
            let x: Vec<f64> = (0..n).map(|_| lcg(&mut s)).collect();
            let fast = rfft(&x, n);
            for (k, got) in fast.iter().enumerate() {
                let mut want = Complex::new(0.0, 0.0);
                for (t, &v) in x.iter().enumerate() {
                    let a = -2.0 * std::f64::consts::PI * (k * t) as f64 / n as f64;
                    want += Complex::new(a.cos(), a.sin()) * v;
                }
                assert!((got - want).norm() < 1e-9, "n={n} k={k}");
            }
            let mut spec = fast.clone();
            let back = irfft(&mut spec, n);
            for (a, b) in x.iter().zip(&back) {
                assert!((a - b).abs() < 1e-12);
            }
        }
    }

    #[test]
    fn convolve_matches_direct_sum() {
        let mut s = 7;
        let a: Vec<f64> = (0..257).map(|_| lcg(&mut s)).collect();
        let b: Vec<f64> = (0..33).map(|_| lcg(&mut s)).collect();
        let fast = convolve(&a, &b);
        assert_eq!(fast.len(), 289);
        for (n, got) in fast.iter().enumerate() {
            let mut want = 0.0;
            for (k, &bk) in b.iter().enumerate() {
                if n >= k && n - k < a.len() {
                    want += a[n - k] * bk;
                }
            }
            assert!((got - want).abs() < 1e-12);
        }
    }

    #[test]
    fn a_zero_phase_filter_scales_each_frequency_by_its_gain_without_delay() {
        let fs = 48_000.0;
        let n = 4800;
        // 1 kHz and 5 kHz, whole periods in the block; the filter halves
        // the first and removes the second, with no phase shift
        let x: Vec<f64> = (0..n)
            .map(|i| {
                let t = i as f64 / fs;
                (std::f64::consts::TAU * 1000.0 * t).sin()
                    + (std::f64::consts::TAU * 5000.0 * t).sin()
            })
            .collect();
        let y = zero_phase_filter(&x, fs, |f| if f < 3000.0 { 0.5 } else { 0.0 });
        // away from the ends, where the padding cuts the sines
        for (i, v) in y.iter().enumerate().take(3600).skip(1200) {
            let t = i as f64 / fs;
            let want = 0.5 * (std::f64::consts::TAU * 1000.0 * t).sin();
            assert!((v - want).abs() < 0.02, "{i}: {v} vs {want}");
        }
        assert!((zero_phase_filter(&x, fs, |_| 2.0)[17] - 2.0 * x[17]).abs() < 1e-12);
    }
}
