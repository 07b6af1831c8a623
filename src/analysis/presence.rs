//! How clearly a recorded channel holds the sweep: the peak of the
//! normalised cross-correlation of the channel with the sweep as written,
//! max|Σ x(n+k)·s(n)| / (‖x‖·‖s‖), between 0 and 1 (Cauchy–Schwarz). A
//! wire reads 1, noise reads close to 0, a microphone in a room reads in
//! between (the room spreads the sweep's energy over its decay). It tells
//! the channel that holds the microphone from one that holds noise, so that
//! a recording analysed on the wrong channel is named instead of analysed.

use crate::signal::fft;

/// The peak of the normalised cross-correlation of `x` with `s` (0 when
/// either is silent). Computed by FFT: the correlation is the convolution
/// of `x` with `s` reversed.
pub fn sweep_match(x: &[f64], s: &[f64]) -> f64 {
    let ex: f64 = x.iter().map(|v| v * v).sum();
    let es: f64 = s.iter().map(|v| v * v).sum();
    if ex <= 0.0 || es <= 0.0 {
        return 0.0;
    }
    let reversed: Vec<f64> = s.iter().rev().copied().collect();
    let c = fft::convolve(x, &reversed);
    let peak = c.iter().fold(0.0f64, |m, v| m.max(v.abs()));
    (peak / (ex * es).sqrt()).min(1.0)
}

/// What the channels of a recording say about where the sweep is, for the
/// analysed channel `analysed` (the loopback reference `reference`, if any,
/// is left out of the comparison).
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum ChannelCheck {
    /// The analysed channel holds the sweep at least as clearly as any
    /// other (or there is no other).
    Fine,
    /// The analysed channel holds no sweep (its match is below
    /// [`NO_SWEEP`]) and another channel clearly does: analyse that one.
    Wrong {
        /// The analysed channel, 0-based, and its match.
        analysed: (usize, f64),
        /// The channel that holds the sweep, 0-based, and its match.
        other: (usize, f64),
    },
    /// The analysed channel holds the sweep, but another holds it far
    /// more clearly (a loopback not given as the reference, or the
    /// microphone on that channel).
    OtherClearer {
        /// The analysed channel, 0-based, and its match.
        analysed: (usize, f64),
        /// The clearer channel, 0-based, and its match.
        other: (usize, f64),
    },
}

/// Below this match a channel holds no sweep: noise reaches a few
/// thousandths at these lengths (1/√N for N samples); a microphone in a
/// reverberant room still reaches tenths. Our choice, tested below.
pub const NO_SWEEP: f64 = 0.05;
/// A recording whose frequency track follows another sweep is refused only
/// when it also matches the sweep less than this: the second evidence that
/// it does not hold it. Measured: a 100 Hz–10 kHz 2 s sweep against the
/// 20 Hz–20 kHz 1 s one matches 0.034, a 2 s sweep of the same band 0.077;
/// the right sweep at −20 dB broadband SNR 0.095 (its track is then too
/// unclear to judge), in a room of T = 2 s with the direct sound 14 dB
/// under the reverberation 0.19. Our choice, between them.
pub const DIFFERENT_SWEEP_MATCH: f64 = 0.12;
/// How much clearer another channel must be to be named.
pub const CLEARER: f64 = 3.0;

/// Checks the channels of a recording against the sweep `s`.
pub fn check_channels(
    channels: &[Vec<f64>],
    s: &[f64],
    analysed: usize,
    reference: Option<usize>,
) -> ChannelCheck {
    if channels.len() < 2 || analysed >= channels.len() {
        return ChannelCheck::Fine;
    }
    let mine = sweep_match(&channels[analysed], s);
    let best = channels
        .iter()
        .enumerate()
        .filter(|(i, _)| *i != analysed && Some(*i) != reference)
        .map(|(i, c)| (i, sweep_match(c, s)))
        .fold(None, |b: Option<(usize, f64)>, (i, m)| match b {
            Some((_, bm)) if bm >= m => b,
            _ => Some((i, m)),
        });
    match best {
        Some(other) if other.1 > CLEARER * mine && other.1 > NO_SWEEP => {
            if mine < NO_SWEEP {
                ChannelCheck::Wrong {
                    analysed: (analysed, mine),
                    other,
                }
            } else {
                ChannelCheck::OtherClearer {
                    analysed: (analysed, mine),
                    other,
                }
            }
        }
        _ => ChannelCheck::Fine,
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::signal::sweep::SweepParams;
    use rand::{Rng, SeedableRng};

    fn sweep() -> Vec<f64> {
        SweepParams {
            requested_length_s: 1.0,
            tail_s: 0.5,
            ..SweepParams::default()
        }
        .design()
        .unwrap()
        .generate()
    }

    fn noise(n: usize, amp: f64, seed: u64) -> Vec<f64> {
        let mut r = rand::rngs::StdRng::seed_from_u64(seed);
        (0..n).map(|_| amp * (r.random::<f64>() - 0.5)).collect()
    }

    #[test]
    fn a_wire_matches_fully_and_noise_hardly() {
        let s = sweep();
        // a delayed, scaled copy is the sweep: 1 (Cauchy–Schwarz equality)
        let mut x = vec![0.0; 300];
        x.extend(s.iter().map(|v| 0.3 * v));
        assert!((sweep_match(&x, &s) - 1.0).abs() < 1e-9);
        assert!(sweep_match(&noise(s.len(), 0.1, 1), &s) < 0.02);
        assert_eq!(sweep_match(&vec![0.0; 100], &s), 0.0);
    }

    #[test]
    fn a_reverberant_room_still_matches_clearly() {
        // the sweep through a decaying noise tail (T60 = 1 s, 60 dB in 1 s)
        // after a direct sound of the same energy as the tail's first 10 ms
        let s = sweep();
        let fs = 48_000.0;
        let mut h = noise(48_000, 1.0, 2);
        for (i, v) in h.iter_mut().enumerate() {
            *v *= 10f64.powf(-3.0 * i as f64 / fs);
        }
        h[0] = 3.0;
        let x = crate::signal::fft::convolve(&s, &h);
        let m = sweep_match(&x, &s);
        assert!(m > 2.0 * NO_SWEEP && m < 0.9, "{m}");
    }

    #[test]
    fn the_wrong_channel_is_named_and_a_loopback_pointed_out() {
        let s = sweep();
        let n = noise(s.len() + 1000, 0.01, 3);
        let mut wire = vec![0.0; 1000];
        wire.extend(&s);
        // microphone on channel 2, noise on 1
        match check_channels(&[n.clone(), wire.clone()], &s, 0, None) {
            ChannelCheck::Wrong { analysed, other } => {
                assert_eq!((analysed.0, other.0), (0, 1));
            }
            c => panic!("{c:?}"),
        }
        // given as the reference, the loopback is not compared
        assert_eq!(
            check_channels(&[n.clone(), wire.clone()], &s, 0, Some(1)),
            ChannelCheck::Fine
        );
        // the right channel analysed
        assert_eq!(
            check_channels(&[wire.clone(), n], &s, 0, None),
            ChannelCheck::Fine
        );
        // a reverberant microphone beside an undeclared loopback
        let mut h = noise(24_000, 1.0, 4);
        for (i, v) in h.iter_mut().enumerate() {
            *v *= 10f64.powf(-6.0 * i as f64 / 48_000.0);
        }
        let room = crate::signal::fft::convolve(&s, &h);
        let mut wire2 = wire;
        wire2.resize(room.len(), 0.0);
        match check_channels(&[room, wire2], &s, 0, None) {
            ChannelCheck::OtherClearer { other, .. } => assert_eq!(other.0, 1),
            c => panic!("{c:?}"),
        }
    }
}
