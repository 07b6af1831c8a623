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

/// How far below the strongest sample (dB, in |h|²) an earlier arrival may
/// lie and still be taken for the direct sound: the 20 dB by which
/// ISO 3382-1 places the direct sound (the start of a decay) below the
/// maximum. In the virtual room the subwoofer's direct sound (its first
/// half-cycle, through an 80 Hz Linkwitz–Riley low-pass) stands 8 dB below
/// the build-up of the room's modes 120 ms later; a loudspeaker's own
/// response puts nothing within 20 dB ahead of its peak but the ringing of
/// the deconvolution's band limits, a few milliseconds at most, well
/// inside the part of the window the rule leaves alone.
pub const DIRECT_SOUND_DB: f64 = 20.0;

/// How far (dB) the level [`DIRECT_SOUND_DB`] below the peak must stand
/// above the mean noise power for the search to run. A sample of Gaussian
/// noise exceeds k times its mean power with odds of about e^(−k/2): the
/// largest of the few thousand samples ahead of an arrival lies about
/// 12 dB above their mean, and 20 dB (k = 100, odds e^−50) is never
/// reached. A response less than [`DIRECT_SOUND_DB`] + 20 dB above its
/// noise keeps its strongest sample as the reference, as before.
pub const DIRECT_SOUND_NOISE_MARGIN_DB: f64 = 20.0;

/// The direct sound's peak is the first sample of |h| at or above the
/// threshold that no sample in the next this many seconds exceeds: longer
/// than the wiggles noise puts on the rise of a half-cycle, shorter than a
/// half-cycle of anything below 500 Hz, so the direct sound's first
/// half-cycle is taken, not a later one.
pub const DIRECT_SOUND_HOLD_S: f64 = 1e-3;

/// An earlier arrival found ahead of the strongest sample of a response.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct DirectSound {
    /// The first sample of |h| within [`DIRECT_SOUND_DB`] of the strongest.
    pub onset: usize,
    /// The peak of that arrival: from the onset, the first sample that no
    /// sample in the next [`DIRECT_SOUND_HOLD_S`] exceeds.
    pub peak: usize,
    /// Whether the response already stood within [`DIRECT_SOUND_DB`] of
    /// the strongest sample in the half-period of the lowest frequency
    /// just ahead of the search's reach: the direct sound may lie further
    /// ahead, out of reach, and `peak` is then only the earliest arrival
    /// the search could see.
    pub out_of_reach: bool,
}

/// The direct sound ahead of the strongest sample `ipeak` of `h` (sample
/// rate `fs`, lowest frequency `lowest_hz`), when it lies more than `kept`
/// samples ahead of it (the part before the peak that the analysis window
/// already holds at full gain): the first sample within
/// [`DIRECT_SOUND_DB`] of |h\[ipeak\]| no more than `back` samples ahead of
/// `ipeak` (nor before index 0), and the peak of the arrival it begins.
/// `None` when there is none, and whenever `peak_to_noise_db` is too low
/// to tell an arrival from the noise ([`DIRECT_SOUND_NOISE_MARGIN_DB`]):
/// the strongest sample stays the reference. The search never wraps round
/// the circular response.
pub fn direct_sound(
    h: &[f64],
    ipeak: usize,
    back: usize,
    kept: usize,
    (fs, lowest_hz): (f64, f64),
    peak_to_noise_db: f64,
) -> Option<DirectSound> {
    if ipeak >= h.len()
        || peak_to_noise_db.is_nan()
        || peak_to_noise_db < DIRECT_SOUND_DB + DIRECT_SOUND_NOISE_MARGIN_DB
    {
        return None;
    }
    let level = h[ipeak].abs() * 10f64.powf(-DIRECT_SOUND_DB / 20.0);
    if level.is_nan() || level <= 0.0 {
        return None;
    }
    let lo = ipeak.saturating_sub(back);
    let onset = lo + h[lo..=ipeak].iter().position(|v| v.abs() >= level)?;
    if onset + kept >= ipeak {
        return None;
    }
    let hold = ((DIRECT_SOUND_HOLD_S * fs).round() as usize).max(1);
    let peak = (onset..ipeak)
        .find(|&i| {
            let v = h[i].abs();
            v >= level
                && h[i + 1..=(i + hold).min(ipeak)]
                    .iter()
                    .all(|w| w.abs() <= v)
        })
        .unwrap_or(ipeak);
    let half_period = (0.5 * fs / lowest_hz.max(1.0)).round() as usize;
    let out_of_reach = h[lo.saturating_sub(half_period)..lo]
        .iter()
        .any(|v| v.abs() >= level);
    Some(DirectSound {
        onset,
        peak,
        out_of_reach,
    })
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
    fn the_direct_sound_is_found_ahead_of_a_stronger_arrival_only_when_it_stands_clear() {
        let fs = 48_000.0;
        // a pulse at 1000 and one three times as strong 6000 samples later
        let mut h = pulse(10_000, 1000.0);
        for (a, b) in h.iter_mut().zip(pulse(10_000, 7000.0)) {
            *a += 3.0 * b;
        }
        let ipeak = peak_index(&h, 0..10_000).unwrap();
        assert_eq!(ipeak, 7000);
        let d = direct_sound(&h, ipeak, 8000, 2400, (fs, 20.0), 100.0).unwrap();
        assert_eq!(d.peak, 1000);
        assert!(!d.out_of_reach);
        assert!(d.onset <= 1000 && d.onset > 990, "{d:?}");
        // out of reach of the search, or within the part the window holds
        assert_eq!(direct_sound(&h, ipeak, 5000, 2400, (fs, 20.0), 100.0), None);
        assert_eq!(direct_sound(&h, ipeak, 8000, 6500, (fs, 20.0), 100.0), None);
        // too close to the noise to be told from it
        assert_eq!(direct_sound(&h, ipeak, 8000, 2400, (fs, 20.0), 35.0), None);
        // more than 20 dB below the strongest: not taken
        let mut weak = pulse(10_000, 1000.0);
        for (a, b) in weak.iter_mut().zip(pulse(10_000, 7000.0)) {
            *a += 12.0 * b;
        }
        assert_eq!(
            direct_sound(&weak, 7000, 8000, 2400, (fs, 20.0), 100.0),
            None
        );
        // a lone pulse: nothing ahead of it
        let lone = pulse(10_000, 7000.0);
        assert_eq!(
            direct_sound(&lone, 7000, 8000, 2400, (fs, 20.0), 100.0),
            None
        );
    }

    #[test]
    fn interpolation_reproduces_samples() {
        let h = pulse(300, 150.4);
        for n in [100usize, 150, 151, 170] {
            assert!((interpolate(&h, n as f64) - h[n]).abs() < 1e-12);
        }
    }
}
