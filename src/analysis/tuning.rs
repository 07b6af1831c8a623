//! Tuning: parametric correction filters that bring a measured response
//! to a target curve.
//!
//! The design (docs/method.md, "Tuning"):
//! 1. The response is level-aligned to the target as `--target` does
//!    ([`super::target::deviation`]), giving the error e(f) = measured +
//!    offset − target on the response's log-frequency grid within the range.
//! 2. Dips a filter must not fill are found first ([`find_dips`]): a dip
//!    narrower than [`NARROW_DIP_OCTAVES`] at half its depth, or deeper than
//!    the largest boost, is most likely a cancellation (a reflection arriving
//!    in opposite phase, a room mode's node) whose depth changes with every
//!    small move of the listener; boosting it spends amplifier and driver
//!    headroom on energy that cancels again. Those regions are left out of
//!    the fit and the filters are kept from boosting there.
//! 3. Above the room's transition frequency (Schroeder: 2000·√(T/V)) the
//!    response at one position is dominated by reflections that change
//!    within centimetres, so only broad filters (Q ≤ [`BROAD_Q`]) may be
//!    centred there, or none ([`AboveTransition`]).
//! 4. Greedy placement: the largest remaining deviation (peaks first: a
//!    boost's deviation counts [`BOOST_DISFAVOUR`] times less) gets a
//!    peaking filter sized from the deviation's height and width, or a
//!    shelf where a shelf fits the remaining error better; then all filters
//!    so far are refined jointly by Levenberg–Marquardt over their log
//!    frequency, gain and log Q (and one common level) on the log-frequency
//!    grid, each point weighted by the octaves it stands for. Gains, Q and
//!    frequencies are held to their limits by projection after each step.
//! 5. The total boost of all filters at any frequency is capped at the
//!    largest boost (a penalty in the fit, then an exact scaling of the
//!    boosts where the penalty left any excess).
//!
//! The filters are the Audio EQ Cookbook biquads (R. Bristow-Johnson,
//! "Cookbook formulae for audio EQ biquad filter coefficients"), computed
//! by [`crate::signal::biquad::Biquad`]; their exact responses at the
//! design rate are what the prediction adds to the measured response.

use serde::{Deserialize, Serialize};

use super::target::{self, Target, TargetReport};
use crate::error::{Error, Result};
use crate::signal::biquad::Biquad;

/// A dip whose width at half its depth is less than this (octaves) is
/// left uncorrected: 1/6 octave is a peaking dip of Q ≈ 8.7, narrower than
/// the ear resolves as a change of timbre and typical of a cancellation.
pub const NARROW_DIP_OCTAVES: f64 = 1.0 / 6.0;

/// A local minimum of the error this far (dB) below its surroundings is
/// examined as a dip; shallower ones are ordinary ripple the fit handles.
pub const DIP_MIN_DB: f64 = 3.0;

/// A dip is too deep to fill when it is deeper than the largest boost by
/// more than this (dB): the deviation a correction is allowed to leave.
pub const DEEP_MARGIN_DB: f64 = 1.0;

/// The largest Q of a filter centred above the transition frequency
/// (Q 1 spans about 1.4 octaves at half its gain).
pub const BROAD_Q: f64 = 1.0;

/// Cuts are preferred to boosts: in the greedy placement a deviation below
/// the target (that needs a boost) counts this many times less than one
/// above it, and each boost adds a small cost in the refinement.
pub const BOOST_DISFAVOUR: f64 = 1.5;

/// The fixed Q of the shelves: 1/√2, the cookbook's slope S = 1, the
/// steepest shelf without overshoot.
pub const SHELF_Q: f64 = std::f64::consts::FRAC_1_SQRT_2;

/// The cost of each dB of boost in the fit (in dB² of mean squared
/// deviation): small, so that it tips a choice towards cuts without
/// holding back a boost the target needs.
pub const BOOST_COST: f64 = 1e-3;

/// The fit's grid: at most this many points an octave (24: a peaking
/// filter of Q 8 spans about four of them at half its gain).
pub const FIT_POINTS_PER_OCTAVE: f64 = 24.0;

/// A shelf is placed instead of the peaking filter only when it leaves
/// less than 1/this of the peaking filter's cost.
pub const SHELF_ADVANTAGE: f64 = 2.0;

/// A filter is kept only when it lowers the cost by at least this share;
/// otherwise its place is not tried again.
pub const MIN_GAIN: f64 = 0.02;

/// The placement stops when no deviation larger than this (dB) is left.
pub const DONE_DB: f64 = 0.2;

/// The kind of a parametric filter.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum FilterKind {
    /// Peaking (bell) equaliser.
    Peaking,
    /// Low shelf.
    LowShelf,
    /// High shelf.
    HighShelf,
}

impl FilterKind {
    /// In words, as filters.txt and the report say it.
    pub fn words(self) -> &'static str {
        match self {
            FilterKind::Peaking => "peaking",
            FilterKind::LowShelf => "low shelf",
            FilterKind::HighShelf => "high shelf",
        }
    }
}

/// One parametric filter.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct Filter {
    /// Peaking or shelf.
    #[serde(rename = "type")]
    pub kind: FilterKind,
    /// Centre (peaking) or corner (shelf, where the gain in dB is half), Hz.
    pub frequency_hz: f64,
    /// Gain, dB (negative: a cut).
    pub gain_db: f64,
    /// Quality factor (shelves: 1/√2, the cookbook's S = 1).
    pub q: f64,
}

impl Filter {
    /// The cookbook biquad at `fs` Hz, normalised so that a0 = 1.
    pub fn biquad(&self, fs: f64) -> Biquad {
        match self.kind {
            FilterKind::Peaking => Biquad::peaking(fs, self.frequency_hz, self.q, self.gain_db),
            // with Q = 1/√2 the cookbook's shelf alpha equals its S = 1 form
            FilterKind::LowShelf => Biquad::low_shelf(fs, self.frequency_hz, 1.0, self.gain_db),
            FilterKind::HighShelf => Biquad::high_shelf(fs, self.frequency_hz, 1.0, self.gain_db),
        }
    }
}

/// What to do above the room's transition frequency.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "lowercase")]
pub enum AboveTransition {
    /// Only broad filters (Q ≤ [`BROAD_Q`]) centred there.
    Broad,
    /// No filter centred there and no fit there.
    None,
    /// As below it (for a loudspeaker measured outside a room, or a
    /// spatial average the user trusts).
    Full,
}

/// A range edge where the measured response lies at least this far (dB)
/// under its median over the range may be the loudspeaker's own roll-off.
pub const ROLL_OFF_MIN_DB: f64 = 6.0;

/// A roll-off region reaches from the range's edge to where the measured
/// response first comes within this (dB) of its median: the roll-off's
/// −3 dB point.
pub const ROLL_OFF_EDGE_DB: f64 = 3.0;

/// Going towards the edge, a roll-off's response may rise again by at most
/// this (dB): more is a dip or a mode beside the edge, which the dip rule
/// judges, not a steady fall.
pub const ROLL_OFF_RIPPLE_DB: f64 = 2.0;

/// Why a region is left uncorrected.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum Uncorrectable {
    /// A dip narrower than [`NARROW_DIP_OCTAVES`] at half its depth.
    NarrowDip,
    /// A dip deeper than the largest boost (by more than [`DEEP_MARGIN_DB`]).
    DeepDip,
    /// Above the transition frequency with `--above-transition none`.
    AboveTransition,
    /// The loudspeaker's own roll-off at an edge of the range
    /// ([`find_roll_offs`]).
    RollOff,
}

impl Uncorrectable {
    /// The reason in words.
    pub fn reason(self) -> &'static str {
        match self {
            Uncorrectable::NarrowDip => {
                "not correctable by equalisation: likely a cancellation or a room null (a narrow dip)"
            }
            Uncorrectable::DeepDip => {
                "not correctable by equalisation: likely a cancellation or a room null (deeper than the largest boost)"
            }
            Uncorrectable::AboveTransition => {
                "above the room's transition frequency, where one position's response is not the room's (--above-transition none)"
            }
            Uncorrectable::RollOff => {
                "the loudspeaker's own roll-off at the edge of the range: a boost there drives it hardest where it can take least (a woofer's excursion below its bass limit, a tweeter past its top); narrow --range to where it plays, or give a target that follows the roll-off"
            }
        }
    }
}

/// A region of the range the filters leave alone.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct UncorrectableRegion {
    /// The kind.
    pub kind: Uncorrectable,
    /// The reason in words.
    pub reason: String,
    /// Lower and upper edge, Hz.
    pub range_hz: [f64; 2],
    /// Where the dip is deepest, Hz (`null` for a region that is not a dip).
    pub center_hz: Option<f64>,
    /// Depth below its surroundings, dB (`null` likewise).
    pub depth_db: Option<f64>,
    /// Width at half its depth, octaves (`null` likewise).
    pub width_octaves: Option<f64>,
}

/// The limits of a design.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct TuneSettings {
    /// The range to correct, Hz.
    pub range_hz: (f64, f64),
    /// The most filters.
    pub filters: usize,
    /// The largest boost of one filter and of all together, dB (≥ 0).
    pub max_boost_db: f64,
    /// The largest cut of one filter, dB (≥ 0).
    pub max_cut_db: f64,
    /// The range of Q of a peaking filter.
    pub q_range: (f64, f64),
    /// The rate the filters are designed (and their responses predicted)
    /// at, Hz.
    pub sample_rate_hz: f64,
    /// The room's transition frequency, Hz, when known.
    pub transition_hz: Option<f64>,
    /// What to do above it.
    pub above_transition: AboveTransition,
}

/// A designed correction and its predicted effect.
#[derive(Debug, Clone, PartialEq)]
pub struct Tuning {
    /// The filters, by frequency.
    pub filters: Vec<Filter>,
    /// The grid within the range, Hz.
    pub frequency_hz: Vec<f64>,
    /// The measured response there as given, dB.
    pub measured_db: Vec<f64>,
    /// The target there, dB.
    pub target_db: Vec<f64>,
    /// The target's tolerance there (below, above; positive dB), when it
    /// has one.
    pub tolerance_db: Option<(Vec<f64>, Vec<f64>)>,
    /// The filters' summed response there, dB.
    pub correction_db: Vec<f64>,
    /// measured + correction, dB (the prediction, not level-aligned).
    pub predicted_db: Vec<f64>,
    /// The measured response's deviation from the target (level-aligned).
    pub before: TargetReport,
    /// The prediction's deviation from the target (level-aligned again).
    pub after: TargetReport,
    /// The regions left alone, with their reasons.
    pub uncorrectable: Vec<UncorrectableRegion>,
    /// The deviations before and after from the range's low end up to the
    /// transition frequency, where equalisation acts on the room's modes
    /// (`None` without a transition frequency, or when it lies below the
    /// range or holds too few points).
    pub below_transition: Option<BeforeAfter>,
}

/// The deviation from the target before and after over part of the range.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct BeforeAfter {
    /// The measured response's.
    pub before: TargetReport,
    /// The predicted response's.
    pub after: TargetReport,
}

/// Schroeder's transition frequency 2000·√(T/V) Hz (M. R. Schroeder, K. H.
/// Kuttruff, JASA 34, 1962; the constant 2000 as commonly quoted, from
/// memory), T in s and V in m³.
pub fn transition_hz(t_s: f64, volume_m3: f64) -> f64 {
    2000.0 * (t_s / volume_m3).sqrt()
}

/// The cookbook coefficients of `filters` at `fs` Hz, each as b0, b1, b2,
/// a1, a2 (a0 = 1; direct form I: `y[n] = b0·x[n] + b1·x[n−1] + b2·x[n−2]
/// − a1·y[n−1] − a2·y[n−2]`). Refused when a filter lies at or above 0.49·fs.
pub fn coefficients(filters: &[Filter], fs: f64) -> Result<Vec<[f64; 5]>> {
    filters
        .iter()
        .map(|f| {
            if f.frequency_hz >= 0.49 * fs {
                return Err(Error::parameter(format!(
                    "--rate {fs} Hz cannot hold the {} filter at {:.0} Hz (it must lie below 0.49 of the rate); give a higher --rate or narrow --range",
                    f.kind.words(),
                    f.frequency_hz
                )));
            }
            let b = f.biquad(fs);
            Ok([b.b[0], b.b[1], b.b[2], b.a[0], b.a[1]])
        })
        .collect()
}

/// The correction as a finite impulse response of `taps` samples at `fs`:
/// the impulse response of the filters in cascade (each cookbook section
/// is minimum phase: its zeros and poles lie inside the unit circle for
/// any gain, so the cascade is too), its last eighth faded out with half
/// a Hann window so that the cut does not ring. For a processor that
/// takes an FIR instead of biquads; its own response
/// ([`fir_response_db`]) says how far the truncation changes it.
pub fn fir(filters: &[Filter], fs: f64, taps: usize) -> Vec<f64> {
    let mut x = vec![0.0; taps];
    if let Some(first) = x.first_mut() {
        *first = 1.0;
    }
    for f in filters {
        f.biquad(fs).process(&mut x);
    }
    crate::signal::window::fade_out(&mut x, taps / 8);
    x
}

/// The magnitude of the FIR `h` at `fs` at each frequency, dB, by its
/// discrete-time Fourier transform summed directly (Goertzel's recursion).
pub fn fir_response_db(h: &[f64], fs: f64, frequency_hz: &[f64]) -> Vec<f64> {
    frequency_hz
        .iter()
        .map(|&f| {
            let w = std::f64::consts::TAU * f / fs;
            let c = 2.0 * w.cos();
            let (mut s1, mut s2) = (0.0, 0.0);
            for &v in h {
                let s0 = v + c * s1 - s2;
                s2 = s1;
                s1 = s0;
            }
            // |H|² of the sum over n of h[n]·e^{−jωn}
            let power = s1 * s1 + s2 * s2 - c * s1 * s2;
            10.0 * power.max(1e-30).log10()
        })
        .collect()
}

/// The summed response of `filters` at `fs`, dB, at each frequency.
pub fn response_db(filters: &[Filter], fs: f64, frequency_hz: &[f64]) -> Vec<f64> {
    let grid = Grid::new(frequency_hz, fs);
    let mut out = vec![0.0; frequency_hz.len()];
    for f in filters {
        grid.add_db(&f.biquad(fs), &mut out);
    }
    out
}

/// cos ω and cos 2ω of each grid point at one rate.
struct Grid {
    cos: Vec<(f64, f64)>,
}

impl Grid {
    fn new(frequency_hz: &[f64], fs: f64) -> Grid {
        Grid {
            cos: frequency_hz
                .iter()
                .map(|&f| {
                    let w = std::f64::consts::TAU * f / fs;
                    (w.cos(), (2.0 * w).cos())
                })
                .collect(),
        }
    }

    /// Adds the biquad's magnitude in dB to `out`.
    fn add_db(&self, b: &Biquad, out: &mut [f64]) {
        for (o, &(c1, c2)) in out.iter_mut().zip(&self.cos) {
            *o += 10.0 * b.power_at(c1, c2).log10();
        }
    }

    fn db(&self, b: &Biquad, out: &mut [f64]) {
        out.fill(0.0);
        self.add_db(b, out);
    }
}

/// Refuses settings that cannot make a design.
fn check(s: &TuneSettings) -> Result<()> {
    let (lo, hi) = s.range_hz;
    if !(lo > 0.0 && hi > lo * 1.1 && hi < 0.49 * s.sample_rate_hz) {
        return Err(Error::parameter(format!(
            "--range {lo},{hi} is not a range below 0.49 of the rate {} Hz; give LO,HI in Hz with HI above LO",
            s.sample_rate_hz
        )));
    }
    if s.filters == 0 || s.filters > 64 {
        return Err(Error::parameter(format!(
            "--filters {} is out of range; give 1 to 64",
            s.filters
        )));
    }
    if !(0.0..=24.0).contains(&s.max_boost_db) || !(0.0..=40.0).contains(&s.max_cut_db) {
        return Err(Error::parameter(format!(
            "--max-boost {} dB / --max-cut {} dB out of range; give 0 to 24 dB of boost and 0 to 40 dB of cut",
            s.max_boost_db, s.max_cut_db
        )));
    }
    let (q1, q2) = s.q_range;
    if !(q1 >= 0.1 && q2 >= q1 && q2 <= 30.0) {
        return Err(Error::parameter(format!(
            "--q-range {q1},{q2} is not a range within 0.1 to 30; give LO,HI with LO ≤ HI"
        )));
    }
    Ok(())
}

/// Designs the correction of `measured_db` (at `frequency_hz`, increasing)
/// towards `target` within `s`.
pub fn design(
    frequency_hz: &[f64],
    measured_db: &[f64],
    target: &Target,
    s: &TuneSettings,
) -> Result<Tuning> {
    check(s)?;
    let range = s.range_hz;
    let before = target::deviation(frequency_hz, measured_db, target, range, true)?;
    let weights = target::log_weights(frequency_hz, range);
    let idx: Vec<usize> = weights.iter().map(|w| w.0).collect();
    if idx.len() < 8 {
        return Err(Error::input(format!(
            "the range {} to {} Hz holds {} points of the response; widen --range",
            range.0,
            range.1,
            idx.len()
        )));
    }
    let f: Vec<f64> = idx.iter().map(|&i| frequency_hz[i]).collect();
    let m: Vec<f64> = idx.iter().map(|&i| measured_db[i]).collect();
    if let Some(k) = m.iter().position(|v| !v.is_finite()) {
        return Err(Error::input(format!(
            "the response has no finite level at {:.1} Hz; narrow --range to where the measurement holds a response",
            f[k]
        )));
    }
    let points: Vec<_> = f.iter().map(|&x| target.at(x)).collect();
    let t: Vec<f64> = points
        .iter()
        .map(|p| p.map_or(0.0, |p| p.target_db))
        .collect();
    let tolerance_db = target.has_tolerance().then(|| {
        let tol = |k: usize| -> Vec<f64> {
            points
                .iter()
                .map(|p| {
                    p.and_then(|p| p.tolerance_db)
                        .map_or(0.0, |t| if k == 0 { t.0 } else { t.1 })
                })
                .collect()
        };
        (tol(0), tol(1))
    });
    let e: Vec<f64> = (0..f.len())
        .map(|i| m[i] + before.level_offset_db - t[i])
        .collect();
    let mut uncorrectable = find_dips(&f, &e, s.max_boost_db);
    // a dip that reaches into a roll-off is part of it
    let roll_offs = find_roll_offs(&f, &m);
    uncorrectable.retain(|d| {
        !roll_offs
            .iter()
            .any(|r| d.range_hz[0] <= r.range_hz[1] && d.range_hz[1] >= r.range_hz[0])
    });
    uncorrectable.extend(roll_offs);
    if let (Some(ft), AboveTransition::None) = (s.transition_hz, s.above_transition) {
        if ft < range.1 {
            uncorrectable.push(UncorrectableRegion {
                kind: Uncorrectable::AboveTransition,
                reason: Uncorrectable::AboveTransition.reason().into(),
                range_hz: [ft.max(range.0), range.1],
                center_hz: None,
                depth_db: None,
                width_octaves: None,
            });
        }
    }
    // the fit runs on at most FIT_POINTS_PER_OCTAVE points an octave: a
    // filter of the highest Q allowed still spans several of them, and
    // the fit costs half as much as on the 48-per-octave grid
    let per_octave = (f.len() - 1) as f64 / (f[f.len() - 1] / f[0]).log2();
    let stride = ((per_octave / FIT_POINTS_PER_OCTAVE).round() as usize).max(1);
    let pick = |k: &usize| k % stride == 0 || *k == f.len() - 1;
    let sub = |v: &[f64]| -> Vec<f64> {
        v.iter()
            .enumerate()
            .filter(|(k, _)| pick(k))
            .map(|(_, x)| *x)
            .collect()
    };
    let (fs_fit, es_fit) = (sub(&f), sub(&e));
    let ws_fit: Vec<(usize, f64)> = weights
        .iter()
        .enumerate()
        .filter(|(k, _)| pick(k))
        .map(|(_, w)| (w.0, w.1 * stride as f64))
        .collect();
    let problem = Problem::new(&fs_fit, &es_fit, &ws_fit, s, &uncorrectable);
    let mut set = problem.solve();
    // the boost cap checked on every point of the grid
    Problem::new(&f, &e, &weights, s, &uncorrectable).cap_boost(&mut set);
    let mut filters: Vec<Filter> = set
        .iter()
        .map(Params::filter)
        .filter(|f| f.gain_db.abs() >= 0.05)
        .collect();
    filters.sort_by(|a, b| a.frequency_hz.total_cmp(&b.frequency_hz));
    let correction = response_db(&filters, s.sample_rate_hz, &f);
    let predicted: Vec<f64> = m.iter().zip(&correction).map(|(a, b)| a + b).collect();
    let after = target::deviation(&f, &predicted, target, range, true)?;
    let below_transition = s
        .transition_hz
        .filter(|&ft| ft > range.0 * 1.05)
        .and_then(|ft| {
            let low = (range.0, ft.min(range.1));
            Some(BeforeAfter {
                before: target::deviation(&f, &m, target, low, true).ok()?,
                after: target::deviation(&f, &predicted, target, low, true).ok()?,
            })
        });
    Ok(Tuning {
        filters,
        frequency_hz: f,
        measured_db: m,
        target_db: t,
        tolerance_db,
        correction_db: correction,
        predicted_db: predicted,
        before,
        after,
        uncorrectable,
        below_transition,
    })
}

/// A boost of `filters` that reaches past an edge of `range` (Hz), where
/// nothing was measured: a peaking boost whose half-gain band (from its Q
/// by the cookbook's bandwidth relation 1/Q = 2·sinh(ln 2/2·BW)) crosses
/// an edge, or a shelf that boosts the side beyond one. Each as the
/// filter, the edge it crosses, and the boost at half an octave past that
/// edge (dB, at `fs`). The design cannot tell from the measurement
/// whether a loudspeaker plays below the range asked for (in a room its
/// roll-off is often hidden by the room's gain), so this is said, not
/// prevented.
pub fn boosts_past_edges(
    filters: &[Filter],
    range: (f64, f64),
    fs: f64,
) -> Vec<(Filter, f64, f64)> {
    let mut out = Vec::new();
    for f in filters.iter().filter(|f| f.gain_db > 0.0) {
        let (low, high) = match f.kind {
            FilterKind::Peaking => {
                let bw = 2.0 / std::f64::consts::LN_2 * (1.0 / (2.0 * f.q)).asinh();
                let half = 2f64.powf(bw / 2.0);
                (
                    f.frequency_hz / half < range.0,
                    f.frequency_hz * half > range.1,
                )
            }
            FilterKind::LowShelf => (true, false),
            FilterKind::HighShelf => (false, true),
        };
        for (crosses, edge, past) in [
            (low, range.0, range.0 / std::f64::consts::SQRT_2),
            (high, range.1, range.1 * std::f64::consts::SQRT_2),
        ] {
            if crosses && past < fs / 2.0 {
                out.push((*f, edge, response_db(&[*f], fs, &[past])[0]));
            }
        }
    }
    out
}

/// The loudspeaker's own roll-offs at the edges of the range, from the
/// measured response `m` at `f` (the range's points, by frequency): at an
/// edge where `m` lies at least [`ROLL_OFF_MIN_DB`] under its median over
/// the range, the region from the edge to where `m` first comes within
/// [`ROLL_OFF_EDGE_DB`] of the median, provided `m` falls steadily
/// towards the edge (never rising again by more than
/// [`ROLL_OFF_RIPPLE_DB`]). Boosting a roll-off is the classic way to
/// overdrive a loudspeaker: below its bass limit a woofer's excursion
/// grows fast with every dB of boost (and a vented box no longer loads
/// it), and a tweeter past its top takes the boost as heat. Our rule: the
/// design leaves such a region alone and never boosts there. The depth is
/// the fall at the edge below the median; `center_hz` is the edge; a
/// roll-off has no width at half depth (`None`).
pub fn find_roll_offs(f: &[f64], m: &[f64]) -> Vec<UncorrectableRegion> {
    let n = f.len().min(m.len());
    if n < 3 {
        return Vec::new();
    }
    let mut sorted = m[..n].to_vec();
    sorted.sort_by(f64::total_cmp);
    let median = sorted[n / 2];
    // the region from the edge (index `edge`) inward, stepping by `dir`
    let walk = |edge: usize, dir: isize| -> Option<UncorrectableRegion> {
        let at = |k: usize| m[k];
        if at(edge) > median - ROLL_OFF_MIN_DB {
            return None;
        }
        let mut k = edge;
        let mut inner = None;
        for _ in 0..n {
            if at(k) >= median - ROLL_OFF_EDGE_DB {
                inner = Some(k);
                break;
            }
            let next = k as isize + dir;
            if next < 0 || next as usize >= n {
                break;
            }
            k = next as usize;
        }
        let inner = inner?;
        // steady: from the inner end towards the edge, the response never
        // rises more than the ripple above the lowest level passed so far
        let mut lowest = at(inner);
        let mut k = inner;
        while k != edge {
            k = (k as isize - dir) as usize;
            if at(k) > lowest + ROLL_OFF_RIPPLE_DB {
                return None;
            }
            lowest = lowest.min(at(k));
        }
        let (lo, hi) = if dir > 0 {
            (edge, inner)
        } else {
            (inner, edge)
        };
        Some(UncorrectableRegion {
            kind: Uncorrectable::RollOff,
            reason: Uncorrectable::RollOff.reason().into(),
            range_hz: [f[lo], f[hi]],
            center_hz: Some(f[edge]),
            depth_db: Some(median - at(edge)),
            width_octaves: None,
        })
    };
    walk(0, 1).into_iter().chain(walk(n - 1, -1)).collect()
}

/// The dips of the error `e` (at `f`) that equalisation should leave: a
/// local minimum at least [`DIP_MIN_DB`] below the median of the error
/// within an octave either side, narrower than [`NARROW_DIP_OCTAVES`] at
/// half that depth or deeper than `max_boost_db` by more than
/// [`DEEP_MARGIN_DB`]. The region reported
/// reaches to where the error comes back within 1 dB of its surroundings.
pub fn find_dips(f: &[f64], e: &[f64], max_boost_db: f64) -> Vec<UncorrectableRegion> {
    let n = f.len();
    let mut minima: Vec<(usize, f64, f64)> = Vec::new();
    for i in 0..n {
        let left = i == 0 || e[i] <= e[i - 1];
        let right = i + 1 == n || e[i] < e[i + 1];
        if !(left && right) || i == 0 || i + 1 == n {
            continue;
        }
        let mut around: Vec<f64> = (0..n)
            .filter(|&k| (f[k] / f[i]).log2().abs() <= 1.0)
            .map(|k| e[k])
            .collect();
        around.sort_by(f64::total_cmp);
        let median = around[around.len() / 2];
        let depth = median - e[i];
        if depth >= DIP_MIN_DB {
            minima.push((i, median, depth));
        }
    }
    minima.sort_by(|a, b| b.2.total_cmp(&a.2));
    let mut out: Vec<UncorrectableRegion> = Vec::new();
    let mut taken: Vec<(usize, usize)> = Vec::new();
    for (i, median, depth) in minima {
        if taken.iter().any(|&(a, b)| (a..=b).contains(&i)) {
            continue;
        }
        let edges = |level: f64| {
            let mut l = i;
            while l > 0 && e[l - 1] < level {
                l -= 1;
            }
            let mut r = i;
            while r + 1 < n && e[r + 1] < level {
                r += 1;
            }
            (l, r)
        };
        let (hl, hr) = edges(median - depth / 2.0);
        // half a grid step beyond each edge: the crossing lies between points
        let step = if n > 1 { (f[1] / f[0]).log2() } else { 0.0 };
        let width = (f[hr] / f[hl]).log2() + step;
        let (rl, rr) = edges(median - 1.0);
        taken.push((rl, rr));
        let kind = if depth > max_boost_db + DEEP_MARGIN_DB {
            Uncorrectable::DeepDip
        } else if width < NARROW_DIP_OCTAVES {
            Uncorrectable::NarrowDip
        } else {
            continue;
        };
        out.push(UncorrectableRegion {
            kind,
            reason: kind.reason().into(),
            range_hz: [f[rl], f[rr]],
            center_hz: Some(f[i]),
            depth_db: Some(depth),
            width_octaves: Some(width),
        });
    }
    out.sort_by(|a, b| a.range_hz[0].total_cmp(&b.range_hz[0]));
    out
}

/// The fit: the grid, the error, the weights and limits, and the filters'
/// cached responses.
struct Problem<'a> {
    s: &'a TuneSettings,
    grid: Grid,
    log_f: Vec<f64>,
    e: Vec<f64>,
    /// Fit weight of each point (octaves it stands for over the total;
    /// zero where left alone).
    w: Vec<f64>,
    /// Weight of the no-boost penalty at each point (inside a dip left alone).
    protect: Vec<f64>,
    /// Weight of the total-boost cap at each point.
    cap: f64,
    /// A buffer for the median, reused by every evaluation.
    scratch: std::cell::RefCell<Vec<f64>>,
}

/// One filter as the fit sees it: log2 f, gain, log2 Q.
#[derive(Debug, Clone, Copy)]
struct Params {
    kind: FilterKind,
    p: [f64; 3],
}

impl Params {
    fn filter(&self) -> Filter {
        Filter {
            kind: self.kind,
            frequency_hz: self.p[0].exp2(),
            gain_db: self.p[1],
            q: if self.kind == FilterKind::Peaking {
                self.p[2].exp2()
            } else {
                SHELF_Q
            },
        }
    }
}

impl<'a> Problem<'a> {
    fn new(
        f: &[f64],
        e: &[f64],
        weights: &[(usize, f64)],
        s: &'a TuneSettings,
        uncorrectable: &[UncorrectableRegion],
    ) -> Problem<'a> {
        let total: f64 = weights.iter().map(|w| w.1).sum();
        let inside = |x: f64, k: Uncorrectable| {
            uncorrectable
                .iter()
                .any(|r| r.kind == k && x >= r.range_hz[0] && x <= r.range_hz[1])
        };
        let left_alone = |x: f64| {
            inside(x, Uncorrectable::NarrowDip)
                || inside(x, Uncorrectable::DeepDip)
                || inside(x, Uncorrectable::AboveTransition)
                || inside(x, Uncorrectable::RollOff)
        };
        let w: Vec<f64> = f
            .iter()
            .zip(weights)
            .map(|(&x, &(_, wi))| if left_alone(x) { 0.0 } else { wi / total })
            .collect();
        let protect: Vec<f64> = f
            .iter()
            .zip(weights)
            .map(|(&x, &(_, wi))| {
                let dip = inside(x, Uncorrectable::NarrowDip)
                    || inside(x, Uncorrectable::DeepDip)
                    || inside(x, Uncorrectable::RollOff);
                if dip { 100.0 * wi / total } else { 0.0 }
            })
            .collect();
        Problem {
            s,
            grid: Grid::new(f, s.sample_rate_hz),
            log_f: f.iter().map(|x| x.log2()).collect(),
            e: e.to_vec(),
            w,
            protect,
            cap: 100.0 / f.len() as f64,
            scratch: std::cell::RefCell::new(Vec::with_capacity(f.len())),
        }
    }

    /// The highest Q a peaking filter at log2 frequency `lf` may have.
    fn q_max(&self, lf: f64) -> f64 {
        let above = self.s.transition_hz.is_some_and(|t| lf.exp2() > t);
        if above && self.s.above_transition == AboveTransition::Broad {
            self.s.q_range.1.min(BROAD_Q).max(self.s.q_range.0)
        } else {
            self.s.q_range.1
        }
    }

    /// Holds a filter to its limits.
    fn project(&self, x: &mut Params) {
        let (lo, hi) = self.s.range_hz;
        let mut top = hi;
        if let (Some(t), AboveTransition::None) = (self.s.transition_hz, self.s.above_transition) {
            top = top.min(t).max(lo);
        }
        x.p[0] = x.p[0].clamp(lo.log2(), top.log2());
        x.p[1] = x.p[1].clamp(-self.s.max_cut_db, self.s.max_boost_db);
        x.p[2] = if x.kind == FilterKind::Peaking {
            x.p[2].clamp(self.s.q_range.0.log2(), self.q_max(x.p[0]).log2())
        } else {
            SHELF_Q.log2()
        };
    }

    fn db_of(&self, x: &Params, out: &mut [f64]) {
        self.grid.db(&x.filter().biquad(self.s.sample_rate_hz), out);
    }

    /// The residuals for filter responses summing to `h` (dB per point),
    /// `gains` and the common level `g`.
    fn residuals(&self, h: &[f64], gains: &[f64], g: f64, out: &mut Vec<f64>) {
        out.clear();
        // a boost counts from the level of the rest: cutting everything
        // but one region by 10 dB is a 10 dB boost of that region once the
        // level is set again
        let floor = self.median(h).min(0.0);
        for (((&hi, &w), &e), &protect) in h.iter().zip(&self.w).zip(&self.e).zip(&self.protect) {
            if w > 0.0 {
                out.push(w.sqrt() * (e + hi - g));
            }
            if protect > 0.0 {
                out.push(protect.sqrt() * hi.max(0.0));
            }
            out.push(self.cap.sqrt() * (hi - floor - self.s.max_boost_db).max(0.0));
        }
        // cuts preferred: each dB of boost costs a little
        let boost = BOOST_COST.sqrt();
        out.extend(gains.iter().map(|&gain| boost * gain.max(0.0)));
    }

    /// One column of the Jacobian of [`Problem::residuals`] by the chain
    /// rule, in the same row order: `dh` is the derivative of the summed
    /// response at each point; the penalty rows count where they are
    /// active (the median's own movement is left out, as Gauss–Newton
    /// leaves out second derivatives); `gain_row` is the filter whose
    /// gain this is, with the slope of its boost cost.
    fn jacobian_column(
        &self,
        dh: &[f64],
        h: &[f64],
        gain_row: Option<(usize, f64)>,
        filters: usize,
        out: &mut Vec<f64>,
    ) {
        out.clear();
        let floor = self.median(h).min(0.0);
        for (i, (&d, &hi)) in dh.iter().zip(h).enumerate() {
            if self.w[i] > 0.0 {
                out.push(self.w[i].sqrt() * d);
            }
            if self.protect[i] > 0.0 {
                out.push(if hi > 0.0 {
                    self.protect[i].sqrt() * d
                } else {
                    0.0
                });
            }
            let active = hi - floor - self.s.max_boost_db > 0.0;
            out.push(if active { self.cap.sqrt() * d } else { 0.0 });
        }
        out.extend((0..filters).map(|k| match gain_row {
            Some((fi, slope)) if fi == k => slope,
            _ => 0.0,
        }));
    }

    /// The Jacobian column of the common level.
    fn level_column(&self, filters: usize, out: &mut Vec<f64>) {
        out.clear();
        for i in 0..self.w.len() {
            if self.w[i] > 0.0 {
                out.push(-self.w[i].sqrt());
            }
            if self.protect[i] > 0.0 {
                out.push(0.0);
            }
            out.push(0.0);
        }
        out.extend(std::iter::repeat_n(0.0, filters));
    }

    /// The weighted mean of e + h over the fitted points: the level the
    /// alignment would take out.
    fn level(&self, h: &[f64]) -> f64 {
        let (mut s, mut sw) = (0.0, 0.0);
        for ((&hi, &w), &e) in h.iter().zip(&self.w).zip(&self.e) {
            s += w * (e + hi);
            sw += w;
        }
        if sw > 0.0 { s / sw } else { 0.0 }
    }

    fn cost(&self, h: &[f64], gains: &[f64], g: f64, scratch: &mut Vec<f64>) -> f64 {
        self.residuals(h, gains, g, scratch);
        scratch.iter().map(|r| r * r).sum()
    }

    /// Greedy placement, each step refined jointly.
    fn solve(&self) -> Vec<Params> {
        let n = self.e.len();
        let mut set: Vec<Params> = Vec::new();
        let mut h = vec![0.0; n];
        let mut scratch = Vec::new();
        let mut one = vec![0.0; n];
        // points where a filter could not help (a roll-off the boost limit
        // keeps, a region the penalties hold): not picked again
        let mut tabu = vec![false; n];
        let mut tries = 0;
        while set.len() < self.s.filters && tries < 3 * self.s.filters {
            tries += 1;
            let g = self.level(&h);
            let before = self.cost(&h, &gains_of(&set), g, &mut scratch);
            let (cands, pick) = self.candidates(&h, g, &set, &tabu, &mut scratch, &mut one);
            if cands.is_empty() {
                break;
            }
            // each candidate refined alone; a shelf must do clearly better
            // than the peaking filter at the largest deviation, which
            // corrects locally what is local
            let k = set.len() + 1;
            let mut chosen: Option<(Vec<Params>, f64)> = None;
            for (c, x) in cands.into_iter().enumerate() {
                let mut trial = set.clone();
                trial.push(x);
                let cost = refine(self, &mut trial, k - 1..k, 12);
                let cost = if c == 0 { cost } else { cost * SHELF_ADVANTAGE };
                if chosen.as_ref().is_none_or(|b| cost < b.1) {
                    chosen = Some((trial, cost));
                }
            }
            let Some((trial, cost)) = chosen else { break };
            if cost > (1.0 - MIN_GAIN) * before {
                // within a sixth of an octave of the pick
                for (t, lf) in tabu.iter_mut().zip(&self.log_f) {
                    if (lf - self.log_f[pick]).abs() <= 1.0 / 6.0 {
                        *t = true;
                    }
                }
                continue;
            }
            set = trial;
            refine(self, &mut set, 0..k, 8);
            self.sum(&set, &mut h, &mut one);
        }
        let k = set.len();
        refine(self, &mut set, 0..k, 60);
        self.prune(&mut set);
        set
    }

    fn sum(&self, set: &[Params], h: &mut [f64], one: &mut [f64]) {
        h.fill(0.0);
        for x in set {
            self.db_of(x, one);
            for (a, b) in h.iter_mut().zip(one.iter()) {
                *a += b;
            }
        }
    }

    /// The candidates for the next filter: at the largest remaining
    /// deviation (boosts counted [`BOOST_DISFAVOUR`] times less) a peaking
    /// filter sized from its height and width, then the shelf that leaves
    /// the smallest cost; none when nothing worth a filter is left.
    fn candidates(
        &self,
        h: &[f64],
        g: f64,
        set: &[Params],
        tabu: &[bool],
        scratch: &mut Vec<f64>,
        one: &mut [f64],
    ) -> (Vec<Params>, usize) {
        let n = h.len();
        let r: Vec<f64> = (0..n).map(|i| self.e[i] + h[i] - g).collect();
        let mut best: Option<(usize, f64)> = None;
        for i in 0..n {
            if self.w[i] <= 0.0 || tabu[i] {
                continue;
            }
            let score = if r[i] > 0.0 {
                r[i]
            } else {
                -r[i] / BOOST_DISFAVOUR
            };
            if best.is_none_or(|b| score > b.1) {
                best = Some((i, score));
            }
        }
        let Some((i, score)) = best else {
            return (Vec::new(), 0);
        };
        if score < DONE_DB {
            return (Vec::new(), 0);
        }
        // the width at half height, in octaves
        let half = r[i] / 2.0;
        let mut l = i;
        while l > 0 && (r[l - 1] - half) * r[i].signum() > 0.0 {
            l -= 1;
        }
        let mut rr = i;
        while rr + 1 < n && (r[rr + 1] - half) * r[i].signum() > 0.0 {
            rr += 1;
        }
        let bw = (self.log_f[rr] - self.log_f[l]).max(1.0 / 48.0);
        // cookbook: 1/Q = 2·sinh(ln2/2·BW), BW in octaves between the
        // half-gain (in dB) frequencies of a peaking filter
        let q = 1.0 / (2.0 * (std::f64::consts::LN_2 / 2.0 * bw).sinh());
        // the width read off a curve with overlapping features is rough:
        // half and twice that Q are tried too
        let mut cands: Vec<Params> = [1.0, 0.5, 2.0]
            .iter()
            .map(|k| Params {
                kind: FilterKind::Peaking,
                p: [self.log_f[i], -r[i], (q * k).log2()],
            })
            .collect();
        // shelves with corners every third of an octave across the range;
        // gain: minus the mean remaining error beyond the corner
        let (a, b) = (self.log_f[0], self.log_f[n - 1]);
        let mut c = a + 1.0 / 3.0;
        while c < b - 1.0 / 3.0 {
            for kind in [FilterKind::LowShelf, FilterKind::HighShelf] {
                let (mut s, mut sw) = (0.0, 0.0);
                for ((&lf, &w), &rk) in self.log_f.iter().zip(&self.w).zip(&r) {
                    let beyond = if kind == FilterKind::LowShelf {
                        lf < c
                    } else {
                        lf > c
                    };
                    if beyond && w > 0.0 {
                        s += w * rk;
                        sw += w;
                    }
                }
                if sw > 0.0 && (s / sw).abs() > DONE_DB {
                    cands.push(Params {
                        kind,
                        p: [c, -s / sw, SHELF_Q.log2()],
                    });
                }
            }
            c += 1.0 / 3.0;
        }
        let gains: Vec<f64> = set.iter().map(|x| x.p[1]).collect();
        let mut trial = vec![0.0; n];
        let mut out: Vec<(Params, f64)> = Vec::new();
        for mut x in cands {
            self.project(&mut x);
            self.db_of(&x, one);
            for k in 0..n {
                trial[k] = h[k] + one[k];
            }
            let mut gs = gains.clone();
            gs.push(x.p[1]);
            let cost = self.cost(&trial, &gs, self.level(&trial), scratch);
            // the best peaking filter first, then the best shelf
            let slot = usize::from(x.kind != FilterKind::Peaking);
            match out.get(slot) {
                None => out.push((x, cost)),
                Some(o) if cost < o.1 => out[slot] = (x, cost),
                Some(_) => {}
            }
        }
        (out.into_iter().map(|c| c.0).collect(), i)
    }

    /// Scales every boost down, where the penalty left the summed boost
    /// above the largest allowed anywhere, until it is not (bisection on
    /// one factor for all boosts).
    fn cap_boost(&self, set: &mut [Params]) {
        let n = self.e.len();
        let (mut h, mut one) = (vec![0.0; n], vec![0.0; n]);
        let limit = self.s.max_boost_db + 1e-9;
        let peak = |set: &[Params], h: &mut Vec<f64>, one: &mut Vec<f64>| {
            self.sum(set, h, one);
            let protect = (0..n)
                .filter(|&i| self.protect[i] > 0.0)
                .map(|i| h[i] - 0.05)
                .fold(f64::NEG_INFINITY, f64::max);
            let floor = self.median(h).min(0.0);
            let over = h.iter().fold(f64::NEG_INFINITY, |a, &b| a.max(b - floor)) - limit;
            over.max(protect)
        };
        if peak(set, &mut h, &mut one) <= 0.0 {
            return;
        }
        let original: Vec<Params> = set.to_vec();
        // the boosts scaled down first; only when cuts alone still lift
        // part of the range above the rest by too much, every gain
        for boosts_only in [true, false] {
            let scaled = |k: f64, set: &mut [Params]| {
                for (x, o) in set.iter_mut().zip(&original) {
                    if o.p[1] > 0.0 || !boosts_only {
                        x.p[1] = o.p[1] * k;
                    }
                }
            };
            scaled(0.0, set);
            if peak(set, &mut h, &mut one) > 0.0 {
                continue;
            }
            let (mut lo, mut hi) = (0.0, 1.0);
            for _ in 0..40 {
                let mid = 0.5 * (lo + hi);
                scaled(mid, set);
                if peak(set, &mut h, &mut one) <= 0.0 {
                    lo = mid;
                } else {
                    hi = mid;
                }
            }
            scaled(lo, set);
            return;
        }
    }

    /// Drops, smallest gain first, each filter whose removal raises the
    /// cost by less than [`MIN_GAIN`] (a filter the joint fit left with
    /// nothing to do is one more thing to type in for no audible change).
    fn prune(&self, set: &mut Vec<Params>) {
        let n = self.e.len();
        let (mut h, mut one, mut scratch) = (vec![0.0; n], vec![0.0; n], Vec::new());
        let mut order: Vec<usize> = (0..set.len()).collect();
        order.sort_by(|&a, &b| set[a].p[1].abs().total_cmp(&set[b].p[1].abs()));
        let mut keep = vec![true; set.len()];
        let cost_of = |keep: &[bool], h: &mut Vec<f64>, one: &mut Vec<f64>, s: &mut Vec<f64>| {
            let kept: Vec<Params> = set
                .iter()
                .zip(keep)
                .filter(|(_, k)| **k)
                .map(|(x, _)| *x)
                .collect();
            self.sum(&kept, h, one);
            self.cost(h, &gains_of(&kept), self.level(h), s)
        };
        let mut now = cost_of(&keep, &mut h, &mut one, &mut scratch);
        for i in order {
            keep[i] = false;
            let without = cost_of(&keep, &mut h, &mut one, &mut scratch);
            if without < (1.0 + MIN_GAIN) * now {
                now = without;
            } else {
                keep[i] = true;
            }
        }
        let mut k = 0;
        set.retain(|_| {
            k += 1;
            keep[k - 1]
        });
    }

    /// The median of `h` over the fitted points (the grid is even in log
    /// frequency, so this is the level of half the range): the level of
    /// the part of the range the filters leave alone, however deep their
    /// cuts elsewhere.
    fn median(&self, h: &[f64]) -> f64 {
        let mut v = self.scratch.borrow_mut();
        v.clear();
        v.extend(
            h.iter()
                .zip(&self.w)
                .filter(|(_, w)| **w > 0.0)
                .map(|(x, _)| *x),
        );
        if v.is_empty() {
            return 0.0;
        }
        let k = v.len() / 2;
        *v.select_nth_unstable_by(k, f64::total_cmp).1
    }
}

fn gains_of(set: &[Params]) -> Vec<f64> {
    set.iter().map(|x| x.p[1]).collect()
}

/// Levenberg–Marquardt (K. Levenberg 1944, D. Marquardt 1963; damping
/// λ·diag(JᵀJ)) over the filters `which` of `set` and the common level,
/// at most `iterations` accepted steps; a forward-difference Jacobian
/// (each column needs only the one filter's response again). Written here
/// rather than reusing the fixed-size one of [`super::thiele_small`]: the
/// number of parameters grows with the filters, and each step is
/// projected onto the limits. Returns the cost it reached.
fn refine(
    p: &Problem<'_>,
    set: &mut [Params],
    which: std::ops::Range<usize>,
    iterations: usize,
) -> f64 {
    let n = p.e.len();
    let k = which.len();
    let np = 3 * k + 1;
    let mut parts: Vec<Vec<f64>> = set
        .iter()
        .map(|x| {
            let mut v = vec![0.0; n];
            p.db_of(x, &mut v);
            v
        })
        .collect();
    let total = |parts: &[Vec<f64>], h: &mut Vec<f64>| {
        h.clear();
        h.resize(n, 0.0);
        for v in parts {
            for (a, b) in h.iter_mut().zip(v) {
                *a += b;
            }
        }
    };
    let gains = |set: &[Params]| set.iter().map(|x| x.p[1]).collect::<Vec<_>>();
    let mut h = Vec::new();
    total(&parts, &mut h);
    let mut g = p.level(&h);
    let mut r0 = Vec::new();
    p.residuals(&h, &gains(set), g, &mut r0);
    let mut c0: f64 = r0.iter().map(|r| r * r).sum();
    let mut lambda = 1e-3;
    let mut col = vec![0.0; n];

    let mut jac: Vec<Vec<f64>> = vec![Vec::new(); np];
    let mut hj = vec![0.0; n];
    for _ in 0..iterations {
        // Jacobian columns by forward differences
        for (j, fi) in which.clone().enumerate() {
            for d in 0..3 {
                let c = 3 * j + d;
                let shelf = set[fi].kind != FilterKind::Peaking && d == 2;
                if shelf {
                    jac[c].clear();
                    jac[c].resize(r0.len(), 0.0);
                    continue;
                }
                let step = if d == 1 { 1e-4 } else { 1e-6 };
                let mut x = set[fi];
                x.p[d] += step;
                p.db_of(&x, &mut col);
                for i in 0..n {
                    hj[i] = (col[i] - parts[fi][i]) / step;
                }
                // the gain's own row of the boost cost
                let gain_row = (d == 1).then(|| {
                    let slope = if set[fi].p[1] > 0.0 {
                        BOOST_COST.sqrt()
                    } else {
                        0.0
                    };
                    (fi, slope)
                });
                p.jacobian_column(&hj, &h, gain_row, set.len(), &mut jac[c]);
            }
        }
        // the common level: −√w on the fitted rows
        p.level_column(set.len(), &mut jac[np - 1]);
        // normal equations, over the rows some column moves (an inactive
        // penalty row adds nothing)
        let rows: Vec<usize> = (0..r0.len())
            .filter(|&row| jac.iter().any(|c| c[row] != 0.0))
            .collect();
        for c in jac.iter_mut() {
            let packed: Vec<f64> = rows.iter().map(|&row| c[row]).collect();
            *c = packed;
        }
        let r_active: Vec<f64> = rows.iter().map(|&row| r0[row]).collect();
        let mut a = vec![vec![0.0; np]; np];
        let mut grad = vec![0.0; np];
        for i in 0..np {
            grad[i] = -jac[i]
                .iter()
                .zip(&r_active)
                .map(|(x, y)| x * y)
                .sum::<f64>();
            for kk in i..np {
                let v: f64 = jac[i].iter().zip(&jac[kk]).map(|(x, y)| x * y).sum();
                a[i][kk] = v;
                a[kk][i] = v;
            }
        }
        let mut improved = false;
        while lambda < 1e10 {
            let mut damped = a.clone();
            for (i, row) in damped.iter_mut().enumerate() {
                row[i] += lambda * a[i][i].max(1e-9);
            }
            let Some(step) = solve(damped, grad.clone()) else {
                lambda *= 10.0;
                continue;
            };
            let mut trial: Vec<Params> = set.to_vec();
            for (j, fi) in which.clone().enumerate() {
                for d in 0..3 {
                    trial[fi].p[d] += step[3 * j + d];
                }
                p.project(&mut trial[fi]);
            }
            let gt = g + step[np - 1];
            let mut tparts = parts.clone();
            for fi in which.clone() {
                p.db_of(&trial[fi], &mut tparts[fi]);
            }
            let mut ht = Vec::new();
            total(&tparts, &mut ht);
            let mut rt = Vec::new();
            p.residuals(&ht, &gains(&trial), gt, &mut rt);
            let ct: f64 = rt.iter().map(|r| r * r).sum();
            if ct.is_finite() && ct < c0 {
                let done = c0 - ct <= 1e-6 * c0.max(1e-12);
                set.copy_from_slice(&trial);
                parts = tparts;
                h = ht;
                g = gt;
                r0 = rt;
                c0 = ct;
                lambda = (lambda / 10.0).max(1e-9);
                improved = !done;
                break;
            }
            lambda *= 10.0;
        }
        if !improved {
            break;
        }
    }
    c0
}

/// Solves a x = b by Gaussian elimination with partial pivoting; `None`
/// when singular.
fn solve(mut a: Vec<Vec<f64>>, mut b: Vec<f64>) -> Option<Vec<f64>> {
    let n = b.len();
    for c in 0..n {
        let piv = (c..n).max_by(|&x, &y| a[x][c].abs().total_cmp(&a[y][c].abs()))?;
        if a[piv][c].abs() < 1e-300 {
            return None;
        }
        a.swap(c, piv);
        b.swap(c, piv);
        for i in c + 1..n {
            let m = a[i][c] / a[c][c];
            if m == 0.0 {
                continue;
            }
            let (upper, lower) = a.split_at_mut(i);
            for (x, y) in lower[0][c..].iter_mut().zip(&upper[c][c..]) {
                *x -= m * y;
            }
            b[i] -= m * b[c];
        }
    }
    let mut x = vec![0.0; n];
    for c in (0..n).rev() {
        let s: f64 = (c + 1..n).map(|k| a[c][k] * x[k]).sum();
        x[c] = (b[c] - s) / a[c][c];
    }
    Some(x)
}

#[cfg(test)]
mod tests;
