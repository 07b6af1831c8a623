//! Room acoustics from an impulse response: per octave and one-third-octave
//! band (and broadband) the decay times EDT, T20, T30 and the energy
//! parameters C50, C80, D50, Ts of ISO 3382-1:2009, with the checks that
//! decide whether each value can be stated honestly.

use serde::{Deserialize, Serialize};

use crate::analysis::bands::{self, Band};
use crate::analysis::compare;
use crate::analysis::decay::{self, Fit, SIXTY_DB, Truncation};
use crate::analysis::speech;
use crate::model::parameter::Values;
use crate::model::{Code, Fraction, Parameter, Warnings, units};
use crate::signal::fft;

/// Decay range (dB above the noise) each parameter needs: its evaluation
/// range must end at least 10 dB above the noise (ISO 3382-1; REFERENCES.md
/// from memory): EDT 0…−10 dB → 20, T20 −5…−25 → 35, T30 −5…−35 → 45. The
/// energy parameters are given from 20 dB (our choice, as for EDT).
pub const RANGE_EDT_DB: f64 = 20.0;
/// See [`RANGE_EDT_DB`].
pub const RANGE_T20_DB: f64 = 35.0;
/// See [`RANGE_EDT_DB`].
pub const RANGE_T30_DB: f64 = 45.0;
/// Smallest bandwidth × decay time for zero-phase (or time-reversed)
/// filtering (F. Jacobsen, J. H. Rindel, JSV 117(1), 1987 — from memory:
/// about 4 time-reversed, 16 forward).
pub const MIN_BT: f64 = 4.0;
/// The least curvature (%) that is a warning of a non-exponential decay,
/// however small the band's uncertainty: ISO 3382-2 (seen through a
/// secondary source) says a curvature of tens of per cent suggests a decay
/// along more than one slope; below 10 % gliss never says so.
pub const MAX_CURVATURE_PERCENT: f64 = 10.0;
/// Coverage factor of the curvature's uncertainty: a curvature is a
/// warning only beyond this many combined standard uncertainties of T20
/// and T30 (2, as for the verdict of a comparison, common practice).
pub const CURVATURE_COVERAGE: f64 = 2.0;

/// The largest curvature (%) the scatter of a single measurement's T20
/// `t20_s` and T30 `t30_s` allows in a band whose uncertainty bandwidth is
/// `bandwidth_hz` (`None`: broadband, where the scatter is negligible):
/// k·100·√((u20/T20)² + (u30/T30)²), with u20 and u30 the standard
/// uncertainties of ISO 3382-2:2008 for one decay at one position
/// ([`compare::t_uncertainty`]) and k = [`CURVATURE_COVERAGE`], and never
/// below [`MAX_CURVATURE_PERCENT`]. C = 100·(T30/T20 − 1) has, to first
/// order, the relative uncertainty of the ratio T30/T20; T20 and T30 come
/// from overlapping parts of one decay and their errors are positively
/// correlated, so treating them as independent overstates the scatter of
/// the ratio: the rule errs towards saying nothing.
pub fn curvature_limit_percent(t20_s: f64, t30_s: f64, bandwidth_hz: Option<f64>) -> f64 {
    let relative = bandwidth_hz.and_then(|b| {
        let u20 = compare::t_uncertainty(Parameter::T20, t20_s, b, 1, 1)?;
        let u30 = compare::t_uncertainty(Parameter::T30, t30_s, b, 1, 1)?;
        Some(((u20 / t20_s).powi(2) + (u30 / t30_s).powi(2)).sqrt())
    });
    match relative {
        Some(r) if r.is_finite() => (CURVATURE_COVERAGE * 100.0 * r).max(MAX_CURVATURE_PERCENT),
        _ => MAX_CURVATURE_PERCENT,
    }
}
/// The least rise (dB) of the broadband response's maximum above the
/// noise ahead of it for a start point: ISO 3382-1 starts the response
/// 20 dB below its maximum, where it must stand above the background
/// noise; with less, the start cannot be told from the noise and EDT,
/// C50, C80, D50 and Ts (which count from it) are withheld.
pub const MIN_ONSET_RISE_DB: f64 = 20.0;

/// The parameters of one band (or of the whole band: `fraction` broadband).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct BandResult {
    /// Nominal centre (ISO 266), Hz; for broadband the geometric centre of the sweep.
    pub center_hz: f64,
    /// Exact base-10 mid-band frequency, Hz.
    pub exact_hz: f64,
    /// The band's width.
    pub fraction: Fraction,
    /// EDT, T20, T30, C50, C80, D50, Ts and INR (each its own key in JSON).
    #[serde(flatten)]
    pub values: Values,
    /// Curvature 100·(T30/T20 − 1), %.
    pub curvature_percent: Option<f64>,
    /// Why a value is missing or doubtful (`warnings` and `warning_codes`).
    #[serde(flatten)]
    pub warnings: Warnings,
    /// For an average over positions: per parameter, how many positions
    /// measured it and their sample standard deviation.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub spread: Option<std::collections::BTreeMap<Parameter, Spread>>,
}

impl BandResult {
    /// A band with nothing measured yet.
    pub fn empty(center_hz: f64, exact_hz: f64, fraction: Fraction) -> Self {
        BandResult {
            center_hz,
            exact_hz,
            fraction,
            values: Values::none(),
            curvature_percent: None,
            warnings: Warnings::new(),
            spread: None,
        }
    }

    /// The value of `p`.
    pub fn get(&self, p: Parameter) -> Option<f64> {
        self.values.get(p)
    }

    /// The standard uncertainty of `p` in this band: for an average (a
    /// `spread` of at least two positions) the standard uncertainty of the
    /// positions' mean, their standard deviation / √n; otherwise ISO
    /// 3382-2's formula for T20 and T30 measured at `positions` positions
    /// with one decay each ([`crate::analysis::compare::t_uncertainty`]);
    /// unknown for the other parameters of one measurement.
    pub fn standard_uncertainty(&self, p: Parameter, positions: usize) -> Option<f64> {
        let v = self.get(p)?;
        if let Some(s) = self.spread.as_ref().and_then(|s| s.get(&p)) {
            if let (Some(std), true) = (s.std, s.n >= 2) {
                return Some(std / (s.n as f64).sqrt());
            }
        }
        let bandwidth = self.fraction.uncertainty_bandwidth_hz(self.center_hz)?;
        crate::analysis::compare::t_uncertainty(p, v, bandwidth, 1, positions)
    }

    /// Whether this is the band of `fraction` at nominal `center_hz`.
    pub fn is(&self, fraction: Fraction, center_hz: f64) -> bool {
        self.fraction == fraction && (self.center_hz - center_hz).abs() <= 1e-6 * center_hz
    }
}

/// The spread of one band parameter over positions (an average).
#[derive(Debug, Clone, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct Spread {
    /// Positions that measured the parameter.
    pub n: usize,
    /// Sample standard deviation over them (`null` below two).
    pub std: Option<f64>,
}

/// A band's decay curve for plotting.
#[derive(Debug, Clone, PartialEq)]
pub struct DecayCurve {
    /// The band.
    pub band: Band,
    /// Times after the onset, s.
    pub time_s: Vec<f64>,
    /// Schroeder curve, dB re its start.
    pub level_db: Vec<f64>,
    /// The fitted lines: EDT, T20, T30 (where measured).
    pub fits: [Option<Fit>; 3],
}

/// Everything the room analysis gives.
#[derive(Debug, Clone, PartialEq)]
pub struct Room {
    /// Octave bands then one-third-octave bands.
    pub bands: Vec<BandResult>,
    /// The whole sweep band.
    pub broadband: BandResult,
    /// Decay curves of the octave bands.
    pub curves: Vec<DecayCurve>,
    /// The modulation transfer function of the octaves 125 Hz–8 kHz that
    /// have a decay (nominal centre, m at each of
    /// [`speech::MODULATION_HZ`]), by Schroeder's formula from the band's
    /// squared response truncated where it meets its noise
    /// ([`band_mtf`]).
    pub mtf: Vec<(f64, [f64; 14])>,
}

/// First Lundeby averaging interval for a band at `fc` Hz: 10 ms at 1 kHz
/// and above, longer at low frequencies, at most 50 ms (Lundeby et al.
/// give 10–50 ms).
fn interval_s(fc: f64) -> f64 {
    (0.01 * (1000.0 / fc).sqrt()).clamp(0.01, 0.05)
}

/// A decay curve thinned for plotting: times (s), levels (dB), and the
/// EDT, T20 and T30 lines.
type PlotCurve = (Vec<f64>, Vec<f64>, [Option<Fit>; 3]);

/// Analyses one squared band response `p2` at rate `fs` from sample
/// `o`, the arrival of the direct sound.
fn band_decay(
    p2: &[f64],
    o: usize,
    fs: f64,
    label: &str,
    bandwidth_hz: f64,
    uncertainty_bandwidth_hz: Option<f64>,
    fc: f64,
) -> (BandResult, Option<PlotCurve>, Option<Truncation>) {
    let mut r = BandResult::empty(fc, fc, Fraction::Broadband);
    let x = &p2[o.min(p2.len())..];
    let Some(tr) = decay::lundeby(x, fs, interval_s(fc)) else {
        r.warnings.add(
            Code::BandNoDecay,
            format!("{label}: no decay found above the noise; nothing measured"),
        );
        return (r, None, None);
    };
    let inr = 10.0 * (tr.start_level / tr.noise).log10();
    r.values[Parameter::Inr] = Some(inr);
    let tau = tr.late_decay_s / SIXTY_DB;
    // energy an exponential at the late rate still holds after the
    // crosspoint, in Σx² units (Lundeby compensation)
    let tail = tr.noise * tau * fs;
    let curve = decay::schroeder_db(x, tr.crosspoint, tr.noise, tail);
    let mut fits = [None, None, None];
    let specs = [
        (Parameter::Edt, 0.0, -10.0, RANGE_EDT_DB),
        (Parameter::T20, -5.0, -25.0, RANGE_T20_DB),
        (Parameter::T30, -5.0, -35.0, RANGE_T30_DB),
    ];
    for (k, (p, from, to, need)) in specs.into_iter().enumerate() {
        if inr < need {
            r.warnings.add(
                Code::BandDecayRange,
                format!(
                    "{label}: {p} needs {need:.0} dB of decay above the noise (its range must end 10 dB above it, ISO 3382-1); this band has {inr:.0} dB"
                ),
            );
            continue;
        }
        let Some(fit) = decay::fit_range(&curve, fs, from, to) else {
            r.warnings.add(
                Code::BandRangeNotReached,
                format!("{label}: the decay curve does not reach {to} dB before the noise; no {p}"),
            );
            continue;
        };
        let bt = bandwidth_hz * fit.decay_time_s;
        if bt < MIN_BT {
            r.warnings.add(
                Code::BandTooShortForFilter,
                format!(
                    "{label}: {p} of {:.3} s is too short for the band's filter (bandwidth × time {bt:.1} < {MIN_BT}, Jacobsen & Rindel 1987); not given",
                    fit.decay_time_s
                ),
            );
            continue;
        }
        fits[k] = Some(fit);
        r.values[p] = Some(fit.decay_time_s);
    }
    if let (Some(t20), Some(t30)) = (r.get(Parameter::T20), r.get(Parameter::T30)) {
        let c = 100.0 * (t30 / t20 - 1.0);
        r.curvature_percent = Some(c);
        let limit = curvature_limit_percent(t20, t30, uncertainty_bandwidth_hz);
        if c.abs() > limit {
            r.warnings.add(
                Code::BandCurvature,
                format!(
                    "{label}: curvature {c:.0} % (T30 against T20), beyond the {limit:.0} % the scatter of T20 and T30 allows in this band (twice their ISO 3382-2 uncertainty): the decay bends, more than one decay process (coupled spaces, absorption gathered on a few surfaces); read T20 and T30 with care"
                ),
            );
        }
    }
    if inr >= RANGE_EDT_DB {
        // The zero-phase filter spreads the direct sound symmetrically in
        // time; what it moved ahead of t = 0 (within 4/bandwidth) is
        // counted as early energy, so the band's D50 and Ts are those of
        // the unfiltered decay (common practice to first order).
        let ahead = ((4.0 / bandwidth_hz * fs) as usize).min(o);
        let xe = &p2[o - ahead..];
        let (c50, c80, d50, ts) =
            decay::energy_parameters(xe, ahead, fs, ahead + tr.crosspoint, tr.noise, tail, tau);
        r.values[Parameter::C50] = Some(c50);
        r.values[Parameter::C80] = Some(c80);
        r.values[Parameter::D50] = Some(d50);
        r.values[Parameter::Ts] = Some(ts);
    } else {
        r.warnings.add(
            Code::BandEnergyRange,
            format!(
                "{label}: only {inr:.0} dB above the noise; C50, C80, D50 and Ts need {RANGE_EDT_DB:.0} dB"
            ),
        );
    }
    // a light copy of the curve for plots (about 600 points)
    let step = (curve.len() / 600).max(1);
    let level: Vec<f64> = curve.iter().step_by(step).copied().collect();
    let time: Vec<f64> = (0..level.len()).map(|i| (i * step) as f64 / fs).collect();
    (r, Some((time, level, fits)), Some(tr))
}

/// The band warnings of one code in bands of one width, told in one line:
/// the bands it holds in, of how many.
#[derive(Debug, Clone, PartialEq)]
pub struct BandGroup {
    /// The warnings' code.
    pub code: Code,
    /// The bands' width.
    pub fraction: Fraction,
    /// Nominal centres (Hz) of the bands with the warning, in their order.
    pub center_hz: Vec<f64>,
    /// How many bands of this width there are.
    pub of: usize,
}

impl BandGroup {
    /// "curvature in 4 of 31 one-third-octave bands: 63, 80, 125, 160 Hz".
    pub fn line(&self) -> String {
        format!(
            "{} in {} of {} {} bands: {}",
            self.code.in_few_words(),
            self.center_hz.len(),
            self.of,
            self.fraction.words(),
            units::hz_list(&self.center_hz)
        )
    }
}

/// The bands' warnings grouped: one [`BandGroup`] per code and band width,
/// in the order they first appear (octaves before one-third octaves as
/// the analysis lists them). A band counts once however many warnings of
/// a code it has. The terminal and the report both show these lines;
/// results.json keeps every warning in its band.
pub fn group_band_warnings(bands: &[BandResult]) -> Vec<BandGroup> {
    let mut groups: Vec<BandGroup> = Vec::new();
    for b in bands {
        // a sentence read from a file without codes is shown as it is
        for w in b.warnings.iter().filter(|w| w.code != Code::Unclassified) {
            match groups
                .iter_mut()
                .find(|g| g.code == w.code && g.fraction == b.fraction)
            {
                Some(g) => {
                    if g.center_hz.last() != Some(&b.center_hz) {
                        g.center_hz.push(b.center_hz);
                    }
                }
                None => groups.push(BandGroup {
                    code: w.code,
                    fraction: b.fraction,
                    center_hz: vec![b.center_hz],
                    of: 0,
                }),
            }
        }
    }
    for g in &mut groups {
        g.of = bands.iter().filter(|b| b.fraction == g.fraction).count();
    }
    groups
}

/// Whether a whole-result warning of `code` only summarises the bands'
/// warnings (some bands lack values, some decays bend), so that a list of
/// [`BandGroup`] lines says it in full.
pub fn summarises_bands(code: Code) -> bool {
    matches!(code, Code::BandsIncomplete | Code::CurvedDecays)
}

/// Withholds every value of every band (and of the broadband values) with
/// one reason, for a response that cannot be trusted as a whole.
pub fn withhold_all(room: &mut Room, code: Code, why: &str) {
    for b in room
        .bands
        .iter_mut()
        .chain(std::iter::once(&mut room.broadband))
    {
        let label = match b.fraction {
            Fraction::Broadband => "broadband".to_string(),
            f => format!("{} Hz ({f}-octave)", b.center_hz),
        };
        b.values = Values::none();
        b.curvature_percent = None;
        b.warnings = Warnings::new();
        b.warnings.add(code, format!("{label}: {why}"));
    }
    room.curves.clear();
    room.mtf.clear();
}

/// Withholds the values that count from the start of the response (EDT,
/// C50, C80, D50, Ts) of band `r` called `label`, when the direct sound
/// rose only `rise_db` above the noise ahead of it.
fn withhold_early(r: &mut BandResult, label: &str, rise_db: f64) {
    for p in Parameter::FROM_THE_START {
        r.values[p] = None;
    }
    r.warnings.add(
        Code::BandStartInNoise,
        format!(
            "{label}: the response's maximum stands only {rise_db:.0} dB above the noise ahead of it, so its start (20 dB below the maximum, ISO 3382-1) cannot be told from the noise; EDT, C50, C80, D50 and Ts, which count from the start, are not given (T20 and T30 do not depend on it)"
        ),
    );
}

/// Runs the room analysis of `ir` (sample rate `fs`) for the sweep band
/// [f1, f2].
pub fn analyze(ir: &[f64], fs: f64, f1: f64, f2: f64) -> Room {
    analyze_from(ir, fs, f1, f2, None)
}

/// [`analyze`], with the direct sound's peak at sample `direct` of `ir`
/// when the analysis took it as the reference ahead of a stronger
/// build-up ([`super::delay::direct_sound`]): the start of every band is
/// then searched back from it ([`decay::onset_from`]). Averaged over
/// half a millisecond, a low-frequency build-up falls 20 dB below its
/// maximum at each zero crossing, and a search back from the build-up's
/// maximum stops at the last of them: the start would lie inside the
/// build-up, with the build-up itself read as the noise ahead.
pub fn analyze_from(ir: &[f64], fs: f64, f1: f64, f2: f64, direct: Option<usize>) -> Room {
    let len = ir.len();
    let pad = (0.5 * fs) as usize;
    let m = fft::fast_len(len + pad);
    let spectrum = fft::rfft(ir, m);
    let df = fs / m as f64;
    let mut bands_out = Vec::new();
    let mut curves = Vec::new();
    let mut mtf = Vec::new();
    // t = 0 for every band: the direct sound, where the broadband squared
    // response first rises to 20 dB below its maximum (ISO 3382-1). A
    // band's own filtered onset is smeared by the filter (earlier by a few
    // milliseconds at low frequencies), which would bias C50, D50 and Ts.
    let p2_broad: Vec<f64> = ir.iter().map(|v| v * v).collect();
    let start = decay::onset_from(&p2_broad, fs, direct);
    let onset_s = start.index as f64 / fs;
    let early_ok = start.rise_db >= MIN_ONSET_RISE_DB;
    for band in bands::bands_within(f1, f2, fs / 2.0) {
        // keep the bins up to where the filter is 70 dB down, and transform
        // back at the lower rate they need
        let k = ((band.stop_hz() / df).ceil() as usize + 1).min(m / 2 + 1);
        let m2 = fft::fast_len(2 * k).min(m);
        let mut spec = vec![rustfft::num_complex::Complex::new(0.0, 0.0); m2 / 2 + 1];
        // below fm²/stop the filter is as far down as above stop (the
        // shape is symmetric in 1/Ω): leave those bins at zero
        let from = ((band.exact_hz * band.exact_hz / band.stop_hz()) / df).floor() as usize;
        for (i, v) in spec.iter_mut().enumerate().take(k).skip(from) {
            *v = spectrum[i] * band.power_gain(i as f64 * df).sqrt();
        }
        let x = fft::irfft(&mut spec, m2);
        let fs2 = fs * m2 as f64 / m as f64;
        let scale = m2 as f64 / m as f64;
        let len2 = (((len as f64) * scale).ceil() as usize).min(x.len());
        // the filter's ringing ahead of the response's first sample wraps
        // round to the end of the buffer: put it back in front
        let ahead = ((0.5 * pad as f64) * scale) as usize;
        let p2: Vec<f64> = x[x.len() - ahead..]
            .iter()
            .chain(&x[..len2])
            .map(|v| (v * scale).powi(2))
            .collect();
        let fraction = Fraction::of_designator(band.b).unwrap_or(Fraction::Third);
        let label = format!("{} Hz ({fraction}-octave)", band.nominal_hz);
        let o = ahead + (onset_s * fs2).round() as usize;
        let (mut r, curve, truncation) = band_decay(
            &p2,
            o,
            fs2,
            &label,
            band.bandwidth_hz(),
            fraction.uncertainty_bandwidth_hz(band.nominal_hz),
            band.exact_hz,
        );
        r.center_hz = band.nominal_hz;
        r.exact_hz = band.exact_hz;
        r.fraction = fraction;
        if !early_ok && r.get(Parameter::Inr).is_some() {
            withhold_early(&mut r, &label, start.rise_db);
        }
        if band.b == 1 && speech::OCTAVES_HZ.contains(&band.nominal_hz) {
            if let Some(m) = truncation.and_then(|t| band_mtf(&p2, o, fs2, band.bandwidth_hz(), &t))
            {
                mtf.push((band.nominal_hz, m));
            }
        }
        if band.b == 1 {
            if let Some((time_s, level_db, mut fits)) = curve {
                if !early_ok {
                    fits[0] = None;
                }
                curves.push(DecayCurve {
                    band,
                    time_s,
                    level_db,
                    fits,
                });
            }
        }
        bands_out.push(r);
    }
    let centre = (f1 * f2).sqrt();
    let o = (onset_s * fs).round() as usize;
    let (mut broadband, _, _) = band_decay(&p2_broad, o, fs, "broadband", f2 - f1, None, centre);
    broadband.fraction = Fraction::Broadband;
    if !early_ok && broadband.get(Parameter::Inr).is_some() {
        withhold_early(&mut broadband, "broadband", start.rise_db);
    }
    Room {
        bands: bands_out,
        broadband,
        curves,
        mtf,
    }
}

/// The modulation transfer function of one band's squared response `p2`
/// (rate `fs`, direct sound at sample `o`) with its Lundeby truncation
/// `tr`: from 4/bandwidth ahead of the direct sound (what the zero-phase
/// filter spread ahead of it, as for D50) to the crosspoint, with the
/// noise's mean power subtracted from every sample (as for the Schroeder
/// curve) and the decay continued beyond the crosspoint as an exponential
/// at the late decay rate (Lundeby's compensation), so that the
/// measurement's own noise does not lower m.
pub fn band_mtf(
    p2: &[f64],
    o: usize,
    fs: f64,
    bandwidth_hz: f64,
    tr: &Truncation,
) -> Option<[f64; 14]> {
    let ahead = ((4.0 / bandwidth_hz * fs) as usize).min(o);
    let end = (o + tr.crosspoint).min(p2.len());
    let e: Vec<f64> = p2[o - ahead..end].iter().map(|v| v - tr.noise).collect();
    let tail = speech::Tail {
        at_s: e.len() as f64 / fs,
        level: tr.noise,
        tau_s: tr.late_decay_s / SIXTY_DB,
    };
    speech::mtf(&e, fs, Some(tail))
}

#[cfg(test)]
mod tests {
    use super::*;

    const FS: f64 = 48_000.0;
    /// Octave mid-bands 125 Hz–8 kHz (exact) and a decay time for each.
    const CASES: [(i32, f64); 7] = [
        (-3, 3.0),
        (-2, 2.0),
        (-1, 1.4),
        (0, 1.0),
        (1, 0.7),
        (2, 0.45),
        (3, 0.2),
    ];

    /// Σ sin(2π·fm·t)·e^(−3·ln10·t/T): each band's energy falls 60 dB in
    /// its own T (closed form). Long enough for the slowest to fall 120 dB,
    /// and faded out over its last half second so that its end is no
    /// click.
    fn decaying_sines(secs: f64) -> Vec<f64> {
        let mut x: Vec<f64> = (0..(secs * FS) as usize)
            .map(|i| {
                let t = i as f64 / FS;
                CASES
                    .iter()
                    .map(|&(x, t60)| {
                        let fm = Band::new(1, x).exact_hz;
                        (std::f64::consts::TAU * fm * t).sin() * (-0.5 * SIXTY_DB * t / t60).exp()
                    })
                    .sum()
            })
            .collect();
        crate::signal::window::fade_out(&mut x, (0.5 * FS) as usize);
        x
    }

    fn octave(room: &Room, x: i32) -> &BandResult {
        let want = Band::new(1, x).nominal_hz;
        room.bands
            .iter()
            .find(|b| b.fraction == Fraction::Octave && b.center_hz == want)
            .unwrap()
    }

    #[test]
    fn decay_times_and_energy_parameters_of_exact_decays() {
        let ir = decaying_sines(6.0);
        let room = analyze(&ir, FS, 20.0, 20_000.0);
        for (x, t60) in CASES {
            let b = octave(&room, x);
            let (t20, t30, edt) = (
                b.get(Parameter::T20).unwrap(),
                b.get(Parameter::T30).unwrap(),
                b.get(Parameter::Edt).unwrap(),
            );
            // the criteria: T20, T30 within 1 %, EDT within 2 %
            assert!(
                (t20 / t60 - 1.0).abs() < 0.01,
                "{} Hz T20 {t20} vs {t60}",
                b.center_hz
            );
            assert!(
                (t30 / t60 - 1.0).abs() < 0.01,
                "{} Hz T30 {t30} vs {t60}",
                b.center_hz
            );
            assert!(
                (edt / t60 - 1.0).abs() < 0.02,
                "{} Hz EDT {edt} vs {t60}",
                b.center_hz
            );
            // ISO 3382-1 definitions for an exponential energy decay
            // (REFERENCES.md [alg]): D50 = 1 − e^(−13.8·0.05/T),
            // C80 = 10·lg(e^(13.8·0.08/T) − 1), Ts = T/13.8
            let d50 = 1.0 - (-SIXTY_DB * 0.05 / t60).exp();
            let c80 = 10.0 * ((SIXTY_DB * 0.08 / t60).exp() - 1.0).log10();
            let ts = t60 / SIXTY_DB;
            assert!(
                (b.get(Parameter::D50).unwrap() - d50).abs() < 0.01,
                "{} Hz D50 {:?} vs {d50}",
                b.center_hz,
                b.get(Parameter::D50)
            );
            assert!(
                (b.get(Parameter::C80).unwrap() - c80).abs() < 0.3,
                "{} Hz C80 {:?} vs {c80}",
                b.center_hz,
                b.get(Parameter::C80)
            );
            assert!(
                (b.get(Parameter::Ts).unwrap() / ts - 1.0).abs() < 0.02,
                "{} Hz Ts {:?} vs {ts}",
                b.center_hz,
                b.get(Parameter::Ts)
            );
            assert!(b.warnings.is_empty(), "{:?}", b.warnings);
        }
    }

    #[test]
    fn exponential_decays_give_the_closed_form_mtf_and_sti() {
        // the criterion: m(F) = 1/√(1 + (2πF·T/13.8)²) (Houtgast
        // and Steeneken; IEC 60268-16 annex) within 0.01 at every octave
        // and modulation frequency, and the STI within 0.005 of the one
        // computed by the standard's formulas from those closed-form m
        let ir = decaying_sines(6.0);
        let room = analyze(&ir, FS, 20.0, 20_000.0);
        assert_eq!(room.mtf.len(), 7);
        let mut closed = Vec::new();
        for ((x, t60), (hz, m)) in CASES.iter().zip(&room.mtf) {
            assert_eq!(*hz, Band::new(1, *x).nominal_hz);
            let want = speech::MODULATION_HZ.map(|f| speech::mtf_exponential(*t60, f));
            for (i, f) in speech::MODULATION_HZ.iter().enumerate() {
                assert!(
                    (m[i] - want[i]).abs() < 0.01,
                    "{hz} Hz, F = {f} Hz: m {} vs closed form {}",
                    m[i],
                    want[i]
                );
            }
            closed.push((*hz, want));
        }
        let measured = speech::speech(&room.mtf, None).sti.unwrap();
        let hand = speech::speech(&closed, None).sti.unwrap();
        assert!((measured - hand).abs() < 0.005, "STI {measured} vs {hand}");
    }

    #[test]
    fn the_measurement_noise_is_kept_out_of_the_mtf() {
        // a diffuse decay of T = 1.0 s with its measurement noise 50 dB
        // below the start: truncated at the crosspoint, the MTF is that of
        // the noise-free response of the same seed within 0.02 (without the
        // truncation a noise 50 dB down over 3 s would lower m at low F)
        let clean = analyze(&diffuse(21, 1.0, 3.0, None), FS, 20.0, 20_000.0);
        let noisy = analyze(&diffuse(21, 1.0, 3.0, Some(-50.0)), FS, 20.0, 20_000.0);
        assert_eq!(noisy.mtf.len(), 7);
        for ((hz, a), (_, b)) in clean.mtf.iter().zip(&noisy.mtf) {
            for i in 0..14 {
                assert!(
                    (a[i] - b[i]).abs() < 0.02,
                    "{hz} Hz F#{i}: {} vs {}",
                    b[i],
                    a[i]
                );
            }
        }
        let (a, b) = (
            speech::speech(&clean.mtf, None).sti.unwrap(),
            speech::speech(&noisy.mtf, None).sti.unwrap(),
        );
        assert!((a - b).abs() < 0.01, "STI {b} vs {a}");
    }

    /// Exponentially decaying Gaussian noise of decay time `t60`, then
    /// (when `floor_db` is given) steady noise that many dB below the
    /// decay's starting power, faded out over the last 0.2 s.
    fn diffuse(seed: u64, t60: f64, secs: f64, floor_db: Option<f64>) -> Vec<f64> {
        use rand::{SeedableRng, rngs::StdRng};
        use rand_distr::{Distribution, Normal};
        let mut rng = StdRng::seed_from_u64(seed);
        let mut floor_rng = StdRng::seed_from_u64(seed ^ 0xf100_7000);
        let normal = Normal::new(0.0, 1.0).unwrap();
        let lead = (0.1 * FS) as usize; // silence ahead, as in a measured response
        let n = (secs * FS) as usize;
        let mut x = vec![0.0; lead + n];
        for i in 0..n {
            let t = i as f64 / FS;
            x[lead + i] = normal.sample(&mut rng) * (-0.5 * SIXTY_DB * t / t60).exp();
        }
        if let Some(db) = floor_db {
            let sigma = 10f64.powf(db / 20.0);
            for v in x.iter_mut() {
                *v += sigma * normal.sample(&mut floor_rng);
            }
        }
        crate::signal::window::fade_out(&mut x, (0.2 * FS) as usize);
        x
    }

    fn t30_of(room: &Room, hz: f64) -> Option<f64> {
        room.bands
            .iter()
            .find(|b| b.fraction == Fraction::Octave && b.center_hz == hz)
            .and_then(|b| b.get(Parameter::T30))
    }

    fn t20_of(room: &Room, hz: f64) -> Option<f64> {
        room.bands
            .iter()
            .find(|b| b.fraction == Fraction::Octave && b.center_hz == hz)
            .and_then(|b| b.get(Parameter::T20))
    }

    #[test]
    fn diffuse_decays_read_their_own_decay_through_the_noise() {
        // the criterion: with a floor 50 to 80 dB down, T20 and T30
        // agree within 2 % with the noise-free response of the same seed
        for (seed, floor) in [(1u64, -50.0), (2, -65.0), (3, -80.0)] {
            let clean = analyze(&diffuse(seed, 0.8, 2.5, None), FS, 20.0, 20_000.0);
            let noisy = analyze(&diffuse(seed, 0.8, 2.5, Some(floor)), FS, 20.0, 20_000.0);
            for hz in [250.0, 500.0, 1000.0, 2000.0, 4000.0, 8000.0] {
                for (name, get) in [
                    ("T20", t20_of as fn(&Room, f64) -> Option<f64>),
                    ("T30", t30_of),
                ] {
                    let a = get(&clean, hz).unwrap();
                    let b = get(&noisy, hz)
                        .unwrap_or_else(|| panic!("{name} at {hz} Hz, floor {floor} dB: none"));
                    assert!(
                        (b / a - 1.0).abs() < 0.02,
                        "{name} {hz} Hz floor {floor}: {b} vs {a}"
                    );
                }
            }
        }
    }

    #[test]
    fn the_mean_over_seeds_is_the_nominal_decay_time() {
        // one realisation scatters by σ(T30) ≈ 0.55·T·√(2.52/(B·T))
        // (ISO 3382-2, REFERENCES.md [sec]): 3.3 % at 1 kHz; the mean of 24
        // seeds is within 2 % of the nominal T in the octaves 1–8 kHz
        let t60 = 0.6;
        let seeds = 24;
        let mut sums = [0.0; 4];
        for seed in 0..seeds {
            let room = analyze(&diffuse(100 + seed, t60, 1.8, None), FS, 20.0, 20_000.0);
            for (k, hz) in [1000.0, 2000.0, 4000.0, 8000.0].iter().enumerate() {
                sums[k] += t30_of(&room, *hz).unwrap();
            }
        }
        for (k, s) in sums.iter().enumerate() {
            let mean = s / seeds as f64;
            assert!(
                (mean / t60 - 1.0).abs() < 0.02,
                "octave {k}: mean T30 {mean}"
            );
        }
    }

    #[test]
    fn truncation_and_compensation_keep_t30_through_the_noise() {
        // The issue asks for floors at −45 and −80 dB. T30 needs 45 dB of
        // decay range (its range must end 10 dB above the noise, ISO
        // 3382-1), so a floor exactly at −45 dB leaves the decision to the
        // scatter of the noise estimate itself (it read 44.7 dB at 500 Hz
        // and T30 was, rightly, withheld): the floor sits 2 dB inside, at
        // −47 dB.
        let quiet = analyze(&diffuse(7, 1.0, 3.0, Some(-80.0)), FS, 20.0, 20_000.0);
        let noisy = analyze(&diffuse(7, 1.0, 3.0, Some(-47.0)), FS, 20.0, 20_000.0);
        for hz in [500.0, 1000.0, 2000.0, 4000.0] {
            let a = t30_of(&quiet, hz).unwrap();
            match t30_of(&noisy, hz) {
                Some(b) => assert!((b / a - 1.0).abs() < 0.03, "{hz} Hz: {b} vs {a}"),
                None => panic!("{hz} Hz: no T30 with the floor at -47 dB"),
            }
        }
        // a floor at −30 dB leaves no room for T30: null, with the reason
        let loud = analyze(&diffuse(7, 1.0, 3.0, Some(-30.0)), FS, 20.0, 20_000.0);
        let b = loud
            .bands
            .iter()
            .find(|b| b.fraction == Fraction::Octave && b.center_hz == 1000.0)
            .unwrap();
        assert!(b.get(Parameter::T30).is_none());
        assert!(
            b.warnings
                .iter()
                .any(|w| w.message.contains("T30 needs 45 dB")),
            "{:?}",
            b.warnings
        );
    }

    #[test]
    fn a_two_slope_decay_warns_of_curvature() {
        // an early decay of 0.3 s and a late one of 1.5 s, crossing 15 dB down
        let a = diffuse(11, 0.3, 3.0, None);
        let b = diffuse(12, 1.5, 3.0, None);
        let mix: Vec<f64> = a
            .iter()
            .zip(&b)
            .map(|(x, y)| x + 10f64.powf(-15.0 / 20.0) * y)
            .collect();
        let room = analyze(&mix, FS, 20.0, 20_000.0);
        let band = room
            .bands
            .iter()
            .find(|b| b.fraction == Fraction::Octave && b.center_hz == 2000.0)
            .unwrap();
        assert!(
            band.curvature_percent.unwrap() > 10.0,
            "{:?}",
            band.curvature_percent
        );
        assert!(
            band.warnings
                .iter()
                .any(|w| w.message.contains("curvature")),
            "{:?}",
            band.warnings
        );
    }

    fn has_curvature_warning(b: &BandResult) -> bool {
        b.warnings.iter().any(|w| w.code == Code::BandCurvature)
    }

    #[test]
    fn single_exponential_decays_give_no_curvature_warning() {
        // one exponential: T30 = T20 up to the scatter of one decay, which
        // ISO 3382-2 puts at σ(T20) ≈ 0.88·T·√(2.9/(B·T)) — 45 % at 25 Hz
        // (one-third octave, T = 1 s). Seeded noise decays, the floor 45 dB
        // below the decay's start (T30 then a coin toss, so also −60 dB)
        let mut measured = 0;
        let mut old_rule = 0;
        for (seed, t60, floor) in [
            (21u64, 0.5, -45.0),
            (22, 1.0, -45.0),
            (23, 0.5, -60.0),
            (24, 1.0, -60.0),
            (25, 0.7, -45.0),
        ] {
            let room = analyze(&diffuse(seed, t60, 2.5, Some(floor)), FS, 20.0, 20_000.0);
            for b in &room.bands {
                if let Some(c) = b.curvature_percent {
                    measured += 1;
                    if c.abs() > MAX_CURVATURE_PERCENT {
                        old_rule += 1;
                    }
                }
                assert!(
                    !has_curvature_warning(b),
                    "seed {seed}, T {t60} s, floor {floor} dB, {} Hz {}: {:?}",
                    b.center_hz,
                    b.fraction,
                    b.warnings
                );
            }
            let mut whole = Warnings::new();
            crate::analysis::band_warnings(&room, &mut whole);
            assert!(!whole.iter().any(|w| w.code == Code::CurvedDecays));
        }
        eprintln!(
            "curvature measured in {measured} bands; a fixed 10 % limit would have warned in {old_rule}"
        );
        // the test bites: about half the bands of the five decays had both
        // T20 and T30 (with the floor at -45 dB, T30 mostly not)
        assert!(measured >= 80, "{measured}");
    }

    /// The Schroeder curve of two exponential energy decays of decay times
    /// `t1` < `t2`, the second starting `r` (power) below the first, has
    /// the closed form S(t) = τ1·e^(−t/τ1) + r·τ2·e^(−t/τ2), τ = T/13.8.
    /// Returns r such that the knee (where the two terms are equal) lies
    /// `knee_db` below S(0), and the T20 and T30 of least-squares lines over
    /// −5…−25 and −5…−35 dB of the curve sampled every 0.1 ms.
    fn two_slopes_closed_form(t1: f64, t2: f64, knee_db: f64) -> (f64, f64, f64) {
        let (tau1, tau2) = (t1 / SIXTY_DB, t2 / SIXTY_DB);
        let level = |r: f64, t: f64| {
            10.0 * ((tau1 * (-t / tau1).exp() + r * tau2 * (-t / tau2).exp()) / (tau1 + r * tau2))
                .log10()
        };
        let knee = |r: f64| level(r, (tau1 / (r * tau2)).ln() / (1.0 / tau1 - 1.0 / tau2));
        let (mut lo, mut hi) = (1e-9f64, 1.0f64);
        for _ in 0..200 {
            let m = (lo * hi).sqrt();
            if knee(m) < knee_db { lo = m } else { hi = m }
        }
        let r = lo;
        let fit = |from: f64, to: f64| {
            let pts: Vec<(f64, f64)> = (0..60_000)
                .map(|i| (i as f64 * 1e-4, level(r, i as f64 * 1e-4)))
                .filter(|&(_, l)| l <= from && l >= to)
                .collect();
            let n = pts.len() as f64;
            let mt = pts.iter().map(|p| p.0).sum::<f64>() / n;
            let ml = pts.iter().map(|p| p.1).sum::<f64>() / n;
            let num: f64 = pts.iter().map(|p| (p.0 - mt) * (p.1 - ml)).sum();
            let den: f64 = pts.iter().map(|p| (p.0 - mt).powi(2)).sum();
            -60.0 / (num / den)
        };
        (r, fit(-5.0, -25.0), fit(-5.0, -35.0))
    }

    /// Noise decaying at 0.4 s with, `r` below it, noise decaying at 1.5 s.
    fn two_slopes(r: f64) -> Vec<f64> {
        let a = diffuse(31, 0.4, 3.0, Some(-70.0));
        let b = diffuse(32, 1.5, 3.0, None);
        a.iter().zip(&b).map(|(x, y)| x + r.sqrt() * y).collect()
    }

    #[test]
    fn a_double_slope_decay_is_flagged_where_its_knee_lies_in_the_t30_range() {
        // knee 20 dB down, inside both fit ranges: the closed form gives
        // T20 0.55 s, T30 0.92 s, C 67 %
        let (r, t20, t30) = two_slopes_closed_form(0.4, 1.5, -20.0);
        let c = 100.0 * (t30 / t20 - 1.0);
        assert!((c - 66.6).abs() < 1.0, "closed form {c}");
        let room = analyze(&two_slopes(r), FS, 20.0, 20_000.0);
        let mut flagged = 0;
        for b in &room.bands {
            let limit =
                curvature_limit_percent(t20, t30, b.fraction.uncertainty_bandwidth_hz(b.center_hz));
            let got = b.curvature_percent.unwrap_or(f64::NAN);
            eprintln!(
                "{} {} Hz: curvature {got:.1} % (closed form {c:.1} %), limit {limit:.1} %, warned {}",
                b.fraction,
                b.center_hz,
                has_curvature_warning(b)
            );
            flagged += usize::from(has_curvature_warning(b));
            // where the closed form stands well clear of the band's limit
            // (by half again: the measured value scatters by about
            // limit/2) the band must say so
            if c > 1.5 * limit {
                assert!(
                    has_curvature_warning(b),
                    "{} {} Hz: {got} %, limit {limit}",
                    b.fraction,
                    b.center_hz
                );
                assert!(
                    (got / c - 1.0).abs() < 0.5,
                    "{} {} Hz: {got} % vs {c} %",
                    b.fraction,
                    b.center_hz
                );
            }
        }
        assert!(flagged >= 20, "{flagged}");
        let mut whole = Warnings::new();
        crate::analysis::band_warnings(&room, &mut whole);
        assert!(
            whole.iter().any(|w| w.code == Code::CurvedDecays),
            "{whole:?}"
        );

        // knee 45 dB down, below the T30 range: both lines see the early
        // slope alone (closed form C 0.8 %), and no band may warn
        let (r, t20, t30) = two_slopes_closed_form(0.4, 1.5, -45.0);
        assert!(100.0 * (t30 / t20 - 1.0) < 2.0, "{t20} {t30}");
        let room = analyze(&two_slopes(r), FS, 20.0, 20_000.0);
        for b in &room.bands {
            assert!(
                !has_curvature_warning(b),
                "{} {} Hz: {:?}",
                b.fraction,
                b.center_hz,
                b.warnings
            );
        }
    }

    #[test]
    fn band_warnings_are_grouped_one_line_per_code_and_band_width() {
        let mut bands: Vec<BandResult> = [63.0, 80.0, 100.0, 125.0, 160.0, 1000.0]
            .iter()
            .map(|&f| BandResult::empty(f, f, Fraction::Third))
            .collect();
        bands.insert(0, BandResult::empty(125.0, 125.0, Fraction::Octave));
        for i in [1, 2, 4, 5] {
            let hz = bands[i].center_hz;
            bands[i].warnings.add(
                Code::BandCurvature,
                format!("{hz} Hz (1/3-octave): curvature"),
            );
        }
        // two warnings of one code in one band count the band once
        for _ in 0..2 {
            bands[6].warnings.add(
                Code::BandDecayRange,
                "1000 Hz (1/3-octave): T30 needs 45 dB",
            );
        }
        bands[0]
            .warnings
            .add(Code::BandCurvature, "125 Hz (1/1-octave): curvature");
        let g = group_band_warnings(&bands);
        let lines: Vec<String> = g.iter().map(BandGroup::line).collect();
        assert_eq!(
            lines,
            [
                "curvature in 1 of 1 octave bands: 125 Hz",
                "curvature in 4 of 6 one-third-octave bands: 63, 80, 125, 160 Hz",
                "too little decay range for EDT, T20 or T30 in 1 of 6 one-third-octave bands: 1 kHz",
            ]
        );
        assert!(group_band_warnings(&bands[3..4]).is_empty());
    }
}
