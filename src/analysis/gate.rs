//! Gating: the quasi-anechoic response of a loudspeaker measured in a room,
//! from the impulse response cut before the first strong reflection.
//!
//! A gate of length Tg resolves frequencies down to about 1/Tg (common
//! practice); below that the response is marked unresolved, never shown
//! as valid.

use serde::{Deserialize, Serialize};

use crate::analysis::etc;
use crate::error::{Error, Result};
use crate::model::{Code, Warning};

/// What the user asked for.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Gate {
    /// From `start_s` to `end_s` relative to the impulse peak (start ≤ 0 < end).
    Fixed {
        /// Start, s relative to the peak (negative: before it).
        start_s: f64,
        /// End, s after the peak.
        end_s: f64,
    },
    /// End just before the first strong reflection in the energy-time curve
    /// (see [`find_arrival`]).
    Auto,
}

impl Gate {
    /// Parses `auto` or `START_MS,END_MS` (relative to the peak, e.g. `-1,5`).
    pub fn parse(s: &str) -> Result<Gate> {
        let t = s.trim();
        if t.eq_ignore_ascii_case("auto") {
            return Ok(Gate::Auto);
        }
        let bad = || {
            Error::parameter(format!(
                "--gate {s:?} is not understood; use auto, or START_MS,END_MS around the impulse peak such as -1,5"
            ))
        };
        let (a, b) = t.split_once(',').ok_or_else(bad)?;
        let start: f64 = a.trim().parse().map_err(|_| bad())?;
        let end: f64 = b.trim().parse().map_err(|_| bad())?;
        if !start.is_finite() || !end.is_finite() || start > 0.0 || end <= 0.0 || end - start < 0.5
        {
            return Err(Error::parameter(format!(
                "--gate {s}: the start must be at or before the peak (≤ 0 ms), the end after it, and the gate at least 0.5 ms long"
            )));
        }
        Ok(Gate::Fixed {
            start_s: start / 1e3,
            end_s: end / 1e3,
        })
    }
}

impl Gate {
    /// The gate that was asked for when `info` was applied: the same
    /// fixed times (recorded as given), or auto.
    pub fn of(info: &GateInfo) -> Gate {
        if info.auto {
            Gate::Auto
        } else {
            Gate::Fixed {
                start_s: info.start_s,
                end_s: info.end_s,
            }
        }
    }
}

/// The gate as applied, for results.json.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct GateInfo {
    /// True when found in the energy-time curve (`--gate auto`).
    pub auto: bool,
    /// Start relative to the impulse peak, s.
    pub start_s: f64,
    /// End relative to the impulse peak, s.
    pub end_s: f64,
    /// 1/(end − start): below this the gated response is not resolved, Hz.
    pub resolution_hz: f64,
    /// Above this the gated response is not resolved either: the sweep's
    /// band edge at f2 rings, and the gate cuts the ringing, which ripples
    /// the response below f2 by about 1/(π·Δf·Tg) (a truncated sinc;
    /// measured 1 dB at 400 Hz and 0.5 dB at 950 Hz below a 20 kHz edge
    /// with 4 ms gates). Ten resolutions below f2 it is under 0.3 dB, Hz.
    pub resolved_to_hz: f64,
}

/// Longest auto gate, s (when no reflection is found before it).
pub const AUTO_MAX_S: f64 = 0.05;

/// A local maximum of the envelope is the largest value within ±this, s.
const LOCAL_MAX_S: f64 = 1e-4;

/// Arrivals earlier than this after the direct sound's peak are part of
/// it (the old rule's choice, kept), s.
const EARLIEST_S: f64 = 0.3e-3;

/// Only arrivals within this of the direct sound's peak count, dB.
const WITHIN_DB: f64 = 25.0;

/// The direct sound's decay is judged over the local maxima of this last
/// stretch of the envelope (and the last one before it), s.
pub const DECAY_MEMORY_S: f64 = 1e-3;

/// A local maximum this far above the direct sound's decay (the highest
/// local maximum over [`DECAY_MEMORY_S`] before it) is a new arrival, dB.
pub const NEW_ARRIVAL_DB: f64 = 6.0;

/// A local maximum this far, but less than [`NEW_ARRIVAL_DB`], above the
/// decay cannot be told from the direct sound's ringing, dB.
pub const UNSURE_DB: f64 = 2.0;

/// A local maximum as concentrated as the direct sound (see
/// [`concentration`]) this far above the lowest point since the last
/// local maximum is a new arrival too, dB.
pub const COPY_DIP_DB: f64 = 6.0;

/// A local maximum whose [`concentration`] is at least this fraction of
/// the direct sound's is shaped like the direct sound.
pub const COPY_CONCENTRATION: f64 = 0.85;

/// The outer half-width of [`concentration`], s.
const CONCENTRATION_SPAN_S: f64 = 0.15e-3;

/// What follows the direct sound in the squared envelope.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Arrival {
    /// A reflection, whose rise starts at `rise` (a sample index).
    Reflection {
        /// Start of the rise: the last sample 10 dB below its maximum (or
        /// the lowest point before it, if later).
        rise: usize,
    },
    /// A rise that may be a reflection or the direct sound's own ringing.
    Unsure {
        /// Start of the rise, as for a reflection.
        rise: usize,
        /// Its local maximum.
        at: usize,
        /// How far that maximum stands above the direct sound's decay, dB.
        above_decay_db: f64,
    },
    /// Nothing: the envelope only decays.
    None,
}

/// The first arrival after the direct sound in the squared envelope `env`
/// whose maximum (the direct sound) is at `peak` (our rule).
///
/// The direct sound's own envelope is that of a sum of decaying parts (the
/// ringing of each resonance decays exponentially): it is bounded by the
/// sum of their amplitudes, which only falls, and it beats below that
/// bound, its local maxima touching it where the parts come into phase.
/// Its dips can be deep, so a rise out of a dip says nothing (the rule
/// before this one took the first local maximum 6 dB above the lowest
/// point since the peak, and a loudspeaker's 3–5 dB resonance at 2–3 kHz
/// beating with the rest of its response made such a rise 0.5 ms after
/// the peak in 22 of 50 two-way-like filters). Its local maxima, though,
/// do not rise: over that family each rose at most 0.9 dB above the local
/// maximum before it, down to 45 dB below the peak, while reflections
/// 3–10 dB down rose 28–39 dB above theirs (the rule's reference, the
/// highest over the last millisecond, is never lower than the last one).
/// So, over the local maxima (largest within ±0.1 ms) from 0.3 ms after
/// the peak and within 25 dB of it:
/// - one that rises [`NEW_ARRIVAL_DB`] above the decay (the highest local
///   maximum over the millisecond before it, or the last one before that)
///   is a reflection: a new arrival the decay cannot hold;
/// - so is one that rises [`COPY_DIP_DB`] out of the dip before it and is
///   shaped like the direct sound: its [`concentration`] is at least
///   [`COPY_CONCENTRATION`] of the direct sound's. A delayed copy of the
///   direct sound is as broadband as it, hence as sharp, while the beats
///   of narrowband ringing spread their energy over the beat period (over
///   100 filters like the family and 300 with one to three resonances of
///   Q 1–10 at 0.5–8 kHz, with and without a reflection: reflections
///   0.96–1.08 of the direct sound, beats of ringing at most 0.66). This
///   finds a reflection that arrives before the direct sound's ringing has
///   beaten once, where there is no decay to rise above yet;
/// - one that rises [`UNSURE_DB`] above the decay but is neither, cannot
///   be told from ringing (a weak or dull reflection, or three or more
///   ringing parts whose beats do not decay evenly): [`Arrival::Unsure`].
pub fn find_arrival(env: &[f64], peak: usize, fs: f64) -> Arrival {
    let Some(&top) = env.get(peak) else {
        return Arrival::None;
    };
    if !(top > 0.0 && top.is_finite()) {
        return Arrival::None;
    }
    let db = |i: usize| 10.0 * (env[i] / top).max(1e-30).log10();
    let half = ((LOCAL_MAX_S * fs) as usize).max(1);
    let from = peak + ((EARLIEST_S * fs) as usize).max(1);
    let memory = ((DECAY_MEMORY_S * fs) as usize).max(1);
    let spans = spans(env, peak, fs);
    let direct = concentration(env, peak, spans);
    // local maxima since the peak (index, dB), the direct sound first
    let mut maxima: Vec<(usize, f64)> = vec![(peak, 0.0)];
    // the lowest point since the last local maximum (index, dB)
    let mut dip = (peak, 0.0);
    for i in peak + 1..env.len().saturating_sub(half) {
        let level = db(i);
        if level < dip.1 {
            dip = (i, level);
        }
        let local_max = (i.saturating_sub(half)..=i + half).all(|k| env[k] <= env[i]);
        if !local_max {
            continue;
        }
        if i >= from && level >= -WITHIN_DB {
            // the direct sound's decay just before: the highest local
            // maximum over the last millisecond, or the last one
            let last = maxima[maxima.len() - 1];
            let decay = maxima
                .iter()
                .rev()
                .take_while(|m| m.0 + memory >= i)
                .fold(last.1, |a, m| a.max(m.1));
            let above_decay = level - decay;
            let copy = concentration(env, i, spans) >= COPY_CONCENTRATION * direct;
            let rise = || {
                let mut j = i;
                while j > dip.0 && db(j) > level - 10.0 {
                    j -= 1;
                }
                j
            };
            if above_decay >= NEW_ARRIVAL_DB || (copy && level - dip.1 >= COPY_DIP_DB) {
                return Arrival::Reflection { rise: rise() };
            }
            if above_decay >= UNSURE_DB {
                return Arrival::Unsure {
                    rise: rise(),
                    at: i,
                    above_decay_db: above_decay,
                };
            }
        }
        maxima.push((i, level));
        dip = (i, level);
    }
    Arrival::None
}

/// The half-widths (inner, outer) of [`concentration`] in samples: inner,
/// half the direct sound's peak width at a quarter of its power (6 dB
/// down); outer, [`CONCENTRATION_SPAN_S`] or three inner ones.
fn spans(env: &[f64], peak: usize, fs: f64) -> (usize, usize) {
    let floor = env[peak] / 4.0;
    let reach = ((CONCENTRATION_SPAN_S * fs) as usize).max(1);
    let lo = peak.saturating_sub(reach);
    let hi = (peak + reach).min(env.len() - 1);
    let left = (lo..peak).rev().take_while(|&k| env[k] > floor).count();
    let right = (peak + 1..=hi).take_while(|&k| env[k] > floor).count();
    let inner = ((left + 1 + right) / 2).max(1);
    (
        inner,
        ((CONCENTRATION_SPAN_S * fs).round() as usize).max(3 * inner),
    )
}

/// How concentrated the envelope is at `i`: its energy within ±inner
/// samples over that within ±outer (`spans`), cut to the envelope.
pub fn concentration(env: &[f64], i: usize, (inner, outer): (usize, usize)) -> f64 {
    let sum = |r: usize| -> f64 {
        env[i.saturating_sub(r)..=(i + r).min(env.len() - 1)]
            .iter()
            .sum()
    };
    let all = sum(outer);
    if all > 0.0 { sum(inner) / all } else { 0.0 }
}

/// The start of the rise of the first arrival after the direct sound
/// ([`find_arrival`]) that may be a reflection, sure or not.
pub fn find_reflection(env: &[f64], peak: usize, fs: f64) -> Option<usize> {
    match find_arrival(env, peak, fs) {
        Arrival::Reflection { rise } | Arrival::Unsure { rise, .. } => Some(rise),
        Arrival::None => None,
    }
}

/// A gate as cut from the circular response.
#[derive(Debug, Clone, PartialEq)]
pub struct Cut {
    /// First sample (negative: from the end of the circular buffer).
    pub start: isize,
    /// Length, samples.
    pub len: usize,
    /// Half-Hann fade-in, samples.
    pub fade_in: usize,
    /// Half-Hann fade-out, samples.
    pub fade_out: usize,
    /// The gate for results.json.
    pub info: GateInfo,
    /// What the user should know about an auto gate (it may have ended
    /// before the loudspeaker's own ringing rather than a reflection).
    pub warning: Option<Warning>,
}

/// Where to cut the circular response `h` around the peak `ipeak`.
/// Half-Hann tapers over the part before the peak and over the last
/// quarter after it. An auto gate ends 0.05 ms before the rise of the
/// first arrival [`find_arrival`] finds (at least 0.5 ms after the peak),
/// also when it cannot tell that arrival from ringing: better the
/// loudspeaker's ringing cut than a reflection kept; a warning says so.
pub fn window(h: &[f64], ipeak: usize, fs: f64, f2: f64, gate: Gate) -> Cut {
    let mut warning = None;
    let (start_s, end_s, auto) = match gate {
        Gate::Fixed { start_s, end_s } => (start_s, end_s, false),
        Gate::Auto => {
            // the envelope from 1 ms before the peak to AUTO_MAX_S after
            let pre = (1e-3 * fs) as usize;
            let len = pre + (AUTO_MAX_S * fs) as usize;
            let n = h.len() as isize;
            let seg: Vec<f64> = if h.is_empty() {
                Vec::new()
            } else {
                (0..len)
                    .map(|i| {
                        h[((ipeak as isize - pre as isize) + i as isize).rem_euclid(n) as usize]
                    })
                    .collect()
            };
            let env = etc::envelope_squared(&seg);
            // a twentieth of a millisecond short of the rise
            let before = |j: usize| (j as f64 - pre as f64) / fs - 5e-5;
            let end = match find_arrival(&env, pre, fs) {
                Arrival::Reflection { rise } => before(rise),
                Arrival::Unsure {
                    rise,
                    at,
                    above_decay_db,
                } => {
                    let end = before(rise).max(0.5e-3);
                    let at_ms = (at as f64 - pre as f64) / fs * 1e3;
                    warning = Some(Warning::new(
                        Code::GateUncertain,
                        format!(
                            "the auto gate cannot tell whether the rise in the energy-time curve {at_ms:.2} ms after the peak ({above_decay_db:.1} dB above the decay before it) is a reflection or the loudspeaker's own ringing; it ends before it, at {:.2} ms, which cuts the ringing if that is what it is (the response is then smoothed around sharp resonances); look at the energy-time curve and, if the first reflection comes later, give the gate by hand, e.g. --gate -1,N with N (ms) before it",
                            end * 1e3
                        ),
                    ));
                    end
                }
                Arrival::None => AUTO_MAX_S,
            };
            let end = end.max(0.5e-3);
            (-(0.25 * end).min(1e-3), end, true)
        }
    };
    let start = ipeak as isize + (start_s * fs).round() as isize;
    let len = (((end_s - start_s) * fs).round() as usize).max(2);
    let fade_in = (ipeak as isize - start).max(0) as usize;
    let fade_out = ((end_s * fs * 0.25).round() as usize).min(len - fade_in.min(len));
    let resolution_hz = 1.0 / (end_s - start_s);
    let info = GateInfo {
        auto,
        start_s,
        end_s,
        resolution_hz,
        resolved_to_hz: f2 - 10.0 * resolution_hz,
    };
    Cut {
        start,
        len,
        fade_in,
        fade_out,
        info,
        warning,
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn parse_gates() {
        assert_eq!(Gate::parse("auto").unwrap(), Gate::Auto);
        assert_eq!(
            Gate::parse("-1,5").unwrap(),
            Gate::Fixed {
                start_s: -0.001,
                end_s: 0.005
            }
        );
        for bad in ["", "5", "1,5", "-1,-2", "x,y", "-0.1,0.2", "nan,3"] {
            assert!(Gate::parse(bad).is_err(), "{bad}");
        }
    }

    #[test]
    fn a_reflection_is_found_at_its_rise() {
        // a direct impulse and one reflection 4 ms later, 6 dB down
        let fs = 48_000.0;
        let mut h = vec![0.0; 4800];
        h[100] = 1.0;
        h[100 + 192] = 0.5;
        let env = etc::envelope_squared(&h);
        let j = find_reflection(&env, 100, fs).unwrap();
        assert!((292 - 10..292).contains(&j), "{j}");
    }

    use crate::signal::biquad::Biquad;
    use rand::{Rng, SeedableRng, rngs::StdRng};

    const FS: f64 = 48_000.0;

    /// A two-way-like loudspeaker as issue 13 describes it: a 2nd-order
    /// high-pass at 40–90 Hz, a sharp peak of 3–5 dB at 2–3 kHz with Q 2–5,
    /// half the time a crossover dip of 1–3 dB at 3.2–4.5 kHz, and a
    /// low-pass at 15–19 kHz.
    fn two_way(rng: &mut StdRng) -> Vec<Biquad> {
        let mut v = vec![
            Biquad::highpass(FS, rng.random_range(40.0..90.0), rng.random_range(0.6..1.0)),
            Biquad::peaking(
                FS,
                rng.random_range(2000.0..3000.0),
                rng.random_range(2.0..5.0),
                rng.random_range(3.0..5.0),
            ),
            Biquad::lowpass(
                FS,
                rng.random_range(15_000.0..19_000.0),
                rng.random_range(0.6..0.9),
            ),
        ];
        if rng.random_bool(0.5) {
            v.push(Biquad::peaking(
                FS,
                rng.random_range(3200.0..4500.0),
                rng.random_range(1.0..3.0),
                rng.random_range(-3.0..-1.0),
            ));
        }
        v
    }

    /// Any loudspeaker-like filter: a high-pass at 30–120 Hz, one to three
    /// peaks or dips of −6 to +8 dB with Q 1–10 at 0.5–8 kHz, a low-pass
    /// at 12–20 kHz.
    fn resonant(rng: &mut StdRng) -> Vec<Biquad> {
        let mut v = vec![Biquad::highpass(
            FS,
            rng.random_range(30.0..120.0),
            rng.random_range(0.5..1.2),
        )];
        for _ in 0..rng.random_range(1..4) {
            v.push(Biquad::peaking(
                FS,
                rng.random_range(500.0..8000.0),
                rng.random_range(1.0..10.0),
                rng.random_range(-6.0..8.0),
            ));
        }
        v.push(Biquad::lowpass(
            FS,
            rng.random_range(12_000.0..20_000.0),
            rng.random_range(0.5..1.0),
        ));
        v
    }

    /// The filters' impulse response from a unit impulse at `at` in `n`
    /// samples, with `extra` (sample, gain) impulses through them too.
    fn impulse_response(
        filters: &[Biquad],
        n: usize,
        at: usize,
        extra: &[(usize, f64)],
    ) -> Vec<f64> {
        let mut h = vec![0.0; n];
        h[at] = 1.0;
        for &(i, g) in extra {
            h[i] += g;
        }
        for b in filters {
            b.process(&mut h);
        }
        h
    }

    /// The envelope from 1 ms (48 samples) before the largest |h| on.
    fn envelope_from_peak(h: &[f64]) -> (Vec<f64>, usize) {
        let ipeak = (0..h.len())
            .max_by(|&a, &b| h[a].abs().total_cmp(&h[b].abs()))
            .unwrap();
        (etc::envelope_squared(&h[ipeak - 48..]), ipeak - 48)
    }

    #[test]
    fn the_ringing_of_a_loudspeaker_is_no_reflection_and_a_copy_is() {
        // 100 filters like issue 13's and 300 more resonant ones, their
        // impulse responses run through the filters' difference equations:
        // alone, nothing follows the direct sound (the rule before this
        // one took the first beat of the ringing, 0.5 ms after the peak,
        // for a reflection: in 22 of the 50 of the first kind in the test
        // through the whole analysis below); with a copy
        // 8 dB down 0.4–6 ms later, the copy is found at its rise (its
        // 10 dB point, within 0.25 ms before it)
        let mut rng = StdRng::seed_from_u64(7);
        for k in 0..400 {
            let filters = if k < 100 {
                two_way(&mut rng)
            } else {
                resonant(&mut rng)
            };
            let lag = rng.random_range(0.4e-3..6e-3);
            let alone = impulse_response(&filters, 4000, 100, &[]);
            let (env, off) = envelope_from_peak(&alone);
            assert_eq!(find_arrival(&env, 48, FS), Arrival::None, "filter {k}");
            let at = 100 + (lag * FS).round() as usize;
            let with = impulse_response(&filters, 4000, 100, &[(at, 0.4)]);
            let (env, off2) = envelope_from_peak(&with);
            assert_eq!(off, off2, "filter {k}: the peak moved");
            match find_arrival(&env, 48, FS) {
                Arrival::Reflection { rise } => {
                    let rise = rise + off;
                    assert!(
                        rise < at && rise + 12 >= at,
                        "filter {k}: reflection at sample {at}, rise found at {rise}"
                    );
                }
                other => panic!("filter {k}: reflection at {lag} s, found {other:?}"),
            }
        }
    }

    /// A loudspeaker (a high-pass at 60 Hz, a 4 dB peak at 2.5 kHz with
    /// Q 4, a low-pass at 18 kHz) and an arrival that rings like it: a
    /// Hann-windowed 2.5 kHz burst of 0.8 ms, of amplitude 0.055, centred
    /// 1.2 ms after the direct sound. Its maximum stands 3–5 dB above the
    /// decay before it (measured), and it is no copy of the direct sound.
    fn ringing_arrival() -> Vec<f64> {
        let filters = [
            Biquad::highpass(FS, 60.0, 0.7),
            Biquad::peaking(FS, 2500.0, 4.0, 4.0),
            Biquad::lowpass(FS, 18_000.0, 0.7),
        ];
        let mut h = impulse_response(&filters, 4000, 100, &[]);
        let (centre, half) = (100.0 + 1.2e-3 * FS, 0.4e-3 * FS);
        for (i, v) in h.iter_mut().enumerate() {
            let x = i as f64 - centre;
            if x.abs() < half {
                let w = 0.5 + 0.5 * (std::f64::consts::PI * x / half).cos();
                *v += 0.055 * w * (std::f64::consts::TAU * 2500.0 * x / FS).cos();
            }
        }
        h
    }

    #[test]
    fn a_rise_that_may_be_ringing_ends_the_gate_with_a_warning() {
        let h = ringing_arrival();
        let (env, off) = envelope_from_peak(&h);
        let ipeak = off + 48;
        assert!((100..=101).contains(&ipeak), "the direct sound is the peak");
        // the burst starts 0.8 ms (38.4 samples) after the impulse
        let burst = 100 + 38 - ipeak;
        let rise = match find_arrival(&env, 48, FS) {
            Arrival::Unsure {
                rise,
                above_decay_db,
                ..
            } => {
                assert!(
                    (UNSURE_DB..NEW_ARRIVAL_DB).contains(&above_decay_db),
                    "{above_decay_db}"
                );
                // the burst's 10 dB point, in its first 0.2 ms
                assert!((48 + burst..48 + burst + 10).contains(&rise), "{rise}");
                rise - 48
            }
            other => panic!("{other:?}"),
        };
        // the gate ends before it, and says why
        let cut = window(&h, ipeak, FS, 20_000.0, Gate::Auto);
        assert!(
            cut.info.end_s < rise as f64 / FS && cut.info.end_s >= 0.5e-3,
            "{:?}",
            cut.info
        );
        let w = cut.warning.expect("a warning");
        assert_eq!(w.code, Code::GateUncertain);
        assert!(
            w.message.contains("--gate -1,N") && w.message.contains("ringing"),
            "{}",
            w.message
        );
        // a fixed gate is the user's: no warning
        let fixed = window(&h, ipeak, FS, 20_000.0, Gate::parse("-1,3").unwrap());
        assert!(fixed.warning.is_none());
    }

    #[test]
    fn a_resonant_loudspeaker_gated_before_its_reflection_reads_as_itself() {
        // Issue 13's check, through the whole analysis: 50 filters like
        // issue 13's (two_way), each with one reflection 3–6 ms later and
        // 3–10 dB down (a band-limited impulse at a fractional delay), over
        // a 1 s sweep. The auto gate must end within 0.25 ms before the
        // reflection, without a warning of doubt, and the gated response
        // must be the filter's own, the closed form Π B(z)/A(z) of its
        // biquads, within 0.3 dB from 4 resolutions (4/Tg) up to
        // resolved_to_hz. Below 4/Tg the gate's cut of the high-pass's
        // slow tail (not any reflection) deviates more: measured up to
        // 1.0 dB at 1–1.5/Tg, 0.65 dB at 2/Tg, 0.36 dB at 3/Tg over this
        // family with gates of 3–6 ms. The rule before this one gated 22
        // of these 50 at 0.5 ms, reading the peak 1.5–2.9 dB low.
        use crate::analysis::{AnalysisConfig, Smoothing, analyze};
        use crate::audio::virtual_system::add_fractional_impulse;
        use crate::signal::sweep::SweepParams;
        use rustfft::num_complex::Complex;

        let design = SweepParams {
            requested_length_s: 1.0,
            tail_s: 0.5,
            ..SweepParams::default()
        }
        .design()
        .unwrap();
        let sweep = design.generate();
        let config = AnalysisConfig {
            smoothing: Smoothing::None,
            harmonics: 1,
            bands: false,
            gate: Some(Gate::Auto),
            ..AnalysisConfig::default()
        };
        let mut rng = StdRng::seed_from_u64(13);
        let mut worst = 0.0f64;
        for k in 0..50 {
            let filters = two_way(&mut rng);
            let lag = rng.random_range(3e-3..6e-3);
            let gain_db: f64 = rng.random_range(-10.0..-3.0);
            let mut direct = sweep.clone();
            direct.extend(std::iter::repeat_n(0.0, 2000));
            for b in &filters {
                b.process(&mut direct);
            }
            // the room: the direct sound 20 samples in, the reflection later
            let mut room = vec![0.0; (lag * FS) as usize + 40];
            add_fractional_impulse(&mut room, 20.0, 1.0);
            add_fractional_impulse(&mut room, 20.0 + lag * FS, 10f64.powf(gain_db / 20.0));
            let mut recording = vec![0.0; direct.len() + room.len()];
            for (i, &x) in direct.iter().enumerate() {
                for (j, &r) in room.iter().enumerate() {
                    recording[i + j] += x * r;
                }
            }
            let a = analyze(&recording, &sweep, &design, &config).unwrap();
            let g = a.gate.unwrap();
            assert!(g.auto);
            assert!(
                g.end_s < lag && g.end_s > lag - 0.25e-3,
                "filter {k}: reflection at {lag} s, gate ends at {} s",
                g.end_s
            );
            assert!(
                a.warnings.iter().all(|w| w.code != Code::GateUncertain),
                "filter {k}: {:?}",
                a.warnings
            );
            let r = &a.response;
            let mut checked = 0;
            for (&f, &db) in r.frequency_hz.iter().zip(&r.magnitude_db) {
                if f < 4.0 * g.resolution_hz || f > g.resolved_to_hz {
                    continue;
                }
                let h: Complex<f64> = filters.iter().map(|b| b.response(FS, f)).product();
                let err = db - 20.0 * h.norm().log10();
                assert!(
                    err.abs() < 0.3,
                    "filter {k}: {f:.0} Hz gated {db:.2} dB, closed form off by {err:.2} dB"
                );
                worst = worst.max(err.abs());
                checked += 1;
            }
            assert!(checked > 150, "filter {k}: {checked} points");
        }
        println!("worst deviation over the family: {worst:.3} dB");
    }
}
