use super::*;
use rand::rngs::StdRng;
use rand::{Rng, SeedableRng};

const FS: f64 = 48_000.0;

/// The log grid of every response: 48 points per octave from 20 Hz.
fn grid() -> Vec<f64> {
    (0..=(48.0 * (20_000f64 / 20.0).log2()) as usize)
        .map(|k| 20.0 * 2f64.powf(k as f64 / 48.0))
        .collect()
}

/// |H| in dB of a chain of biquads at each frequency, from the complex
/// response (not the expanded power formula the design uses).
fn chain_db(chain: &[Biquad], f: &[f64]) -> Vec<f64> {
    f.iter()
        .map(|&x| {
            chain
                .iter()
                .map(|b| 20.0 * b.response(FS, x).norm().log10())
                .sum()
        })
        .collect()
}

fn settings(range: (f64, f64)) -> TuneSettings {
    TuneSettings {
        range_hz: range,
        filters: 10,
        max_boost_db: 6.0,
        max_cut_db: 15.0,
        q_range: (0.3, 8.0),
        sample_rate_hz: FS,
        transition_hz: None,
        above_transition: AboveTransition::Broad,
    }
}

fn flat_target() -> Target {
    Target::parse("20 0 1\n20000 0 1\n").unwrap()
}

/// A loudspeaker-like device: a second-order high-pass and low-pass and
/// three peaks or dips from `rng`, at least an octave apart (two dips
/// closer than that add up to one deeper than the largest boost, which
/// the rules leave alone: see the notch test).
fn device(rng: &mut StdRng) -> Vec<Biquad> {
    let q = std::f64::consts::FRAC_1_SQRT_2;
    let mut chain = vec![
        Biquad::highpass(FS, rng.random_range(35.0..55.0), q),
        Biquad::lowpass(FS, rng.random_range(17_000.0..20_000.0), q),
    ];
    let mut at: Vec<f64> = Vec::new();
    while at.len() < 3 {
        let f = 2f64.powf(rng.random_range(150f64.log2()..7000f64.log2()));
        if at.iter().any(|g| (f / g).log2().abs() < 1.0) {
            continue;
        }
        at.push(f);
        let q = 2f64.powf(rng.random_range(0.7f64.log2()..5f64.log2()));
        let gain = if rng.random_bool(0.5) {
            rng.random_range(3.0..8.0)
        } else {
            -rng.random_range(3.0..6.0)
        };
        chain.push(Biquad::peaking(FS, f, q, gain));
    }
    chain
}

/// Deviation of `curve` from 0 dB over `range` after taking out the mean
/// (weighted by log frequency, as the alignment does), by the midpoint rule
/// written out again here.
fn aligned_max_abs(f: &[f64], curve: &[f64], range: (f64, f64)) -> f64 {
    let pts: Vec<(f64, f64)> = f
        .iter()
        .zip(curve)
        .filter(|(x, _)| **x >= range.0 && **x <= range.1)
        .map(|(x, y)| (x.log2(), *y))
        .collect();
    let mut s = 0.0;
    let mut sw = 0.0;
    for (k, &(x, y)) in pts.iter().enumerate() {
        let l = if k == 0 {
            range.0.log2()
        } else {
            0.5 * (x + pts[k - 1].0)
        };
        let r = if k + 1 == pts.len() {
            range.1.log2()
        } else {
            0.5 * (x + pts[k + 1].0)
        };
        s += y * (r - l);
        sw += r - l;
    }
    let mean = s / sw;
    pts.iter().map(|p| (p.1 - mean).abs()).fold(0.0, f64::max)
}

#[test]
fn coefficients_equal_the_cookbook_formulas_at_three_rates() {
    // tests/fixtures/tuning/cookbook_coefficients.csv: written by
    // cookbook_coefficients.py beside it, from the published Audio EQ
    // Cookbook formulas (R. Bristow-Johnson), each checked there with
    // scipy.signal.freqz against the gain it promises
    let text = include_str!("../../../tests/fixtures/tuning/cookbook_coefficients.csv");
    let mut rates = std::collections::BTreeSet::new();
    let mut rows = 0;
    for line in text.lines().skip(1) {
        let v: Vec<&str> = line.split(',').collect();
        let num = |i: usize| v[i].parse::<f64>().unwrap();
        let kind = match v[0] {
            "peaking" => FilterKind::Peaking,
            "low_shelf" => FilterKind::LowShelf,
            _ => FilterKind::HighShelf,
        };
        let filter = Filter {
            kind,
            frequency_hz: num(2),
            gain_db: num(3),
            q: num(4),
        };
        let got = coefficients(&[filter], num(1)).unwrap()[0];
        for (k, g) in got.iter().enumerate() {
            let want = num(5 + k);
            assert!(
                (g - want).abs() < 1e-12,
                "{line}: coefficient {k} is {g}, the cookbook gives {want}"
            );
        }
        rates.insert(num(1) as u64);
        rows += 1;
    }
    assert_eq!(
        rates.into_iter().collect::<Vec<_>>(),
        [44_100, 48_000, 96_000]
    );
    assert_eq!(rows, 24);
}

#[test]
fn a_rate_that_cannot_hold_a_filter_is_refused() {
    let f = Filter {
        kind: FilterKind::Peaking,
        frequency_hz: 12_000.0,
        gain_db: -3.0,
        q: 2.0,
    };
    let e = coefficients(&[f], 22_050.0).unwrap_err();
    assert!(e.message().contains("--rate"), "{e}");
}

#[test]
fn known_devices_are_corrected_to_within_one_db_of_flat() {
    let f = grid();
    let range = (100.0, 10_000.0);
    let mut rng = StdRng::seed_from_u64(16);
    let mut worst: f64 = 0.0;
    for n in 0..20 {
        let chain = device(&mut rng);
        let measured = chain_db(&chain, &f);
        let t = design(&f, &measured, &flat_target(), &settings(range)).unwrap();
        assert!(
            t.filters.len() <= 10,
            "device {n}: {} filters",
            t.filters.len()
        );
        assert!(
            t.filters.iter().all(|x| x.gain_db <= 6.0 + 1e-9),
            "device {n}: a boost beyond 6 dB: {:?}",
            t.filters
        );
        // the corrected response: the measured one plus the designed
        // filters' exact (complex) responses
        let filters: Vec<Biquad> = t.filters.iter().map(|x| x.biquad(FS)).collect();
        let correction = chain_db(&filters, &f);
        assert!(
            correction.iter().all(|&c| c <= 6.0 + 1e-6),
            "device {n}: the filters together boost beyond 6 dB"
        );
        let corrected: Vec<f64> = measured
            .iter()
            .zip(&correction)
            .map(|(a, b)| a + b)
            .collect();
        let dev = aligned_max_abs(&f, &corrected, range);
        assert!(
            dev <= 1.0,
            "device {n}: {dev:.2} dB from flat after correction at {} Hz, {:?} {:?} {:?}",
            t.after.worst_hz,
            t.filters,
            chain,
            t.uncorrectable
        );
        assert!(
            (t.after.max_abs_db - dev).abs() < 1e-6,
            "device {n}: the design reports {} dB",
            t.after.max_abs_db
        );
        assert!(t.after.max_abs_db < t.before.max_abs_db);
        worst = worst.max(dev);
    }
    eprintln!("largest deviation after correction over 20 devices: {worst:.3} dB");
}

#[test]
fn a_deep_narrow_notch_is_reported_and_not_filled() {
    let f = grid();
    let range = (100.0, 10_000.0);
    let q = std::f64::consts::FRAC_1_SQRT_2;
    let chain = [
        Biquad::highpass(FS, 45.0, q),
        Biquad::lowpass(FS, 18_000.0, q),
        Biquad::peaking(FS, 1000.0, 10.0, -20.0),
        Biquad::peaking(FS, 300.0, 2.0, 5.0),
    ];
    let measured = chain_db(&chain, &f);
    let t = design(&f, &measured, &flat_target(), &settings(range)).unwrap();
    let notch = t
        .uncorrectable
        .iter()
        .find(|r| r.range_hz[0] <= 1000.0 && r.range_hz[1] >= 1000.0)
        .expect("the notch at 1 kHz is reported");
    assert_eq!(notch.kind, Uncorrectable::DeepDip);
    assert!(
        notch
            .reason
            .contains("likely a cancellation or a room null")
    );
    // closed form: a −20 dB peaking cut is 20 dB deep at its centre
    let depth = notch.depth_db.unwrap();
    assert!((depth - 20.0).abs() < 1.0, "depth {depth}");
    let filters: Vec<Biquad> = t.filters.iter().map(|x| x.biquad(FS)).collect();
    let correction = chain_db(&filters, &f);
    let most = correction.iter().fold(f64::NEG_INFINITY, |a, &b| a.max(b));
    assert!(most <= 6.0 + 1e-6, "the filters boost {most} dB somewhere");
    let at_notch = chain_db(&filters, &[1000.0])[0];
    assert!(at_notch < 0.5, "{at_notch} dB of boost into the notch");
    // the peak at 300 Hz is still corrected
    let i = f.iter().position(|&x| x >= 300.0).unwrap();
    let j = t.frequency_hz.iter().position(|&x| x >= 300.0).unwrap();
    let after = measured[i] + correction[i] + t.after.level_offset_db;
    assert!(
        after.abs() < 1.0,
        "{after} dB at 300 Hz after correction, {:?}",
        t.filters
    );
    assert!((t.predicted_db[j] - measured[i] - correction[i]).abs() < 1e-6);
}

#[test]
fn dips_are_judged_by_width_and_depth() {
    // hand-made error curves on the 48-per-octave grid
    let f: Vec<f64> = (0..=48 * 6)
        .map(|k| 100.0 * 2f64.powf(k as f64 / 48.0))
        .collect();
    let dip = |center: f64, width_oct: f64, depth: f64| -> Vec<f64> {
        // a triangular dip in log frequency, `width_oct` wide at half depth
        f.iter()
            .map(|&x| {
                let d = (x / center).log2().abs();
                -(depth * (1.0 - d / width_oct)).max(0.0)
            })
            .collect()
    };
    // narrow: 1/12 octave at half depth, 4 dB deep
    let r = find_dips(&f, &dip(800.0, 1.0 / 12.0, 4.0), 6.0);
    assert_eq!(r.len(), 1);
    assert_eq!(r[0].kind, Uncorrectable::NarrowDip);
    assert!((r[0].depth_db.unwrap() - 4.0).abs() < 1e-9);
    // broad and shallow enough: left to the filters
    assert!(find_dips(&f, &dip(800.0, 0.5, 4.0), 6.0).is_empty());
    // broad but deeper than the largest boost
    let r = find_dips(&f, &dip(800.0, 0.5, 8.0), 6.0);
    assert_eq!(r.len(), 1);
    assert_eq!(r[0].kind, Uncorrectable::DeepDip);
    // shallow ripple is not a dip
    assert!(find_dips(&f, &dip(800.0, 1.0 / 12.0, 2.0), 6.0).is_empty());
}

#[test]
fn above_the_transition_only_broad_filters_or_none() {
    let f = grid();
    let range = (50.0, 10_000.0);
    let chain = [
        Biquad::peaking(FS, 80.0, 4.0, 8.0),
        Biquad::peaking(FS, 2000.0, 6.0, 6.0),
        Biquad::peaking(FS, 5000.0, 1.0, -3.0),
    ];
    let measured = chain_db(&chain, &f);
    let mut s = settings(range);
    s.transition_hz = Some(transition_hz(0.5, 50.0));
    // 2000·√(0.5/50) = 200 Hz
    assert!((s.transition_hz.unwrap() - 200.0).abs() < 1e-9);
    let t = design(&f, &measured, &flat_target(), &s).unwrap();
    assert!(
        t.filters
            .iter()
            .any(|x| (x.frequency_hz / 80.0).log2().abs() < 0.2)
    );
    for x in t.filters.iter().filter(|x| x.frequency_hz > 200.0) {
        assert!(
            x.q <= BROAD_Q + 1e-9,
            "{x:?} is narrow above the transition"
        );
    }
    s.above_transition = AboveTransition::None;
    let t = design(&f, &measured, &flat_target(), &s).unwrap();
    assert!(
        t.filters.iter().all(|x| x.frequency_hz <= 200.0 + 1e-6),
        "{:?}",
        t.filters
    );
    assert!(
        t.uncorrectable
            .iter()
            .any(|r| r.kind == Uncorrectable::AboveTransition)
    );
}

#[test]
fn cuts_are_preferred_to_boosts() {
    // one peak and one dip of the same size and shape: with the level free
    // either could be the one corrected first; the peak is
    let f = grid();
    let chain = [
        Biquad::peaking(FS, 400.0, 2.0, 5.0),
        Biquad::peaking(FS, 3000.0, 2.0, -5.0),
    ];
    let measured = chain_db(&chain, &f);
    let mut s = settings((100.0, 10_000.0));
    s.filters = 1;
    let t = design(&f, &measured, &flat_target(), &s).unwrap();
    assert_eq!(t.filters.len(), 1);
    assert!(
        t.filters[0].gain_db < 0.0 && (t.filters[0].frequency_hz / 400.0).log2().abs() < 0.1,
        "{:?}",
        t.filters
    );
}

#[test]
fn the_fir_realises_the_filters_within_its_length() {
    // a cut and a boost whose rings die within 8192 taps at 48 kHz
    let filters = [
        Filter {
            kind: FilterKind::Peaking,
            frequency_hz: 120.0,
            gain_db: -6.0,
            q: 4.0,
        },
        Filter {
            kind: FilterKind::HighShelf,
            frequency_hz: 3000.0,
            gain_db: 2.0,
            q: SHELF_Q,
        },
    ];
    let f = grid();
    let h = fir(&filters, FS, 8192);
    let want = chain_db(&filters.map(|x| x.biquad(FS)), &f);
    let got = fir_response_db(&h, FS, &f);
    for ((x, a), b) in f.iter().zip(&got).zip(&want) {
        assert!(
            (a - b).abs() < 0.05,
            "{x} Hz: FIR {a:.3} dB, filters {b:.3} dB"
        );
    }
    // the naive DTFT at 1 kHz as the reference of the Goertzel sum
    let w = std::f64::consts::TAU * 1000.0 / FS;
    let (re, im) = h.iter().enumerate().fold((0.0, 0.0), |(re, im), (n, v)| {
        (re + v * (w * n as f64).cos(), im - v * (w * n as f64).sin())
    });
    let naive = 10.0 * (re * re + im * im).log10();
    assert!((fir_response_db(&h, FS, &[1000.0])[0] - naive).abs() < 1e-9);
    // minimum phase: the energy comes first; half of it is in the first
    // few samples
    let total: f64 = h.iter().map(|v| v * v).sum();
    let early: f64 = h[..16].iter().map(|v| v * v).sum();
    assert!(early > 0.5 * total);
}

#[test]
fn a_response_on_its_target_gets_no_filters_and_a_silent_one_is_refused() {
    let f = grid();
    // 2 dB above a flat target everywhere: the level alignment takes it out
    let t = design(
        &f,
        &vec![2.0; f.len()],
        &flat_target(),
        &settings((100.0, 10_000.0)),
    )
    .unwrap();
    assert!(t.filters.is_empty(), "{:?}", t.filters);
    assert!(t.after.max_abs_db < 1e-9 && t.uncorrectable.is_empty());
    let mut m = vec![0.0; f.len()];
    let k = f.iter().position(|&x| x > 1000.0).unwrap();
    m[k] = f64::NEG_INFINITY;
    let e = design(&f, &m, &flat_target(), &settings((100.0, 10_000.0))).unwrap_err();
    assert!(e.message().contains("no finite level"), "{e}");
}

#[test]
fn a_loudspeakers_roll_off_at_the_range_edge_is_never_boosted() {
    // a loudspeaker whose second-order high-pass at 60 Hz sits inside the
    // range asked for (20 Hz–20 kHz, flat target): the design must not
    // push up to 6 dB of boost into the falling bass below its −3 dB
    // point, where a woofer's excursion grows fastest
    let f = grid();
    let q = std::f64::consts::FRAC_1_SQRT_2;
    let chain = [
        Biquad::highpass(FS, 60.0, q),
        Biquad::peaking(FS, 1200.0, 2.0, 5.0),
    ];
    let measured = chain_db(&chain, &f);
    let t = design(&f, &measured, &flat_target(), &settings((20.0, 20_000.0))).unwrap();
    let roll = t
        .uncorrectable
        .iter()
        .find(|r| r.kind == Uncorrectable::RollOff)
        .expect("the roll-off is reported");
    assert_eq!(roll.range_hz[0], 20.0);
    // closed form: a second-order Butterworth high-pass is 3 dB down at
    // its corner, so the region ends within a grid step of 60 Hz
    assert!(
        (roll.range_hz[1] / 60.0).log2().abs() < 2.0 / 48.0,
        "{:?}",
        roll.range_hz
    );
    // |H|² = x⁴/(1 + x⁴) with x = f/fc: 19.1 dB down at 20 Hz
    let depth = roll.depth_db.unwrap();
    let closed = -10.0 * ((20.0f64 / 60.0).powi(4) / (1.0 + (20.0f64 / 60.0).powi(4))).log10();
    assert!((depth - closed).abs() < 0.2, "{depth} against {closed}");
    assert!(roll.reason.contains("roll-off"));
    let filters: Vec<Biquad> = t.filters.iter().map(|x| x.biquad(FS)).collect();
    let below: Vec<f64> = f
        .iter()
        .copied()
        .filter(|&x| x <= roll.range_hz[1])
        .collect();
    let most = chain_db(&filters, &below)
        .into_iter()
        .fold(f64::NEG_INFINITY, f64::max);
    assert!(
        most <= 0.1,
        "{most:.2} dB of boost into the roll-off: {:?}",
        t.filters
    );
    // the peak at 1.2 kHz is still corrected
    let i = f.iter().position(|&x| x >= 1200.0).unwrap();
    // (against the passband's 0 dB: the level-aligned deviation takes in
    // the roll-off left alone too)
    let after = measured[i] + chain_db(&filters, &[f[i]])[0];
    assert!(after.abs() < 1.0, "{after} dB at 1.2 kHz after correction");
}

#[test]
fn a_roll_off_must_fall_steadily_to_the_edge() {
    let f: Vec<f64> = (0..=48 * 6)
        .map(|k| 40.0 * 2f64.powf(k as f64 / 48.0))
        .collect();
    // a tweeter's roll-off at the top: falling 12 dB an octave above
    // 1.28 kHz, steadily
    let top: Vec<f64> = f
        .iter()
        .map(|&x| -12.0 * (x / 1280.0).log2().max(0.0))
        .collect();
    let r = find_roll_offs(&f, &top);
    assert_eq!(r.len(), 1);
    assert_eq!(r[0].range_hz[1], 2560.0);
    assert!(
        (r[0].range_hz[0] / 2f64.powf(1280f64.log2() + 0.25))
            .log2()
            .abs()
            < 1.0 / 48.0
    );
    assert!((r[0].depth_db.unwrap() - 12.0).abs() < 1e-9);
    // a dip beside the low edge that comes back up towards it (a room
    // null at 60 Hz, the edge at 40 Hz 8 dB down but rising 5 dB from the
    // null) is no roll-off: the dip rule judges it
    let null: Vec<f64> = f
        .iter()
        .map(|&x| {
            let d = (x / 60.0).log2();
            if x < 60.0 {
                -13.0 - 5.0 * d / 1.5f64.log2()
            } else {
                -13.0 * (1.0 - d / 0.5).max(0.0)
            }
        })
        .collect();
    assert!((null[0] + 8.0).abs() < 0.1);
    assert!(find_roll_offs(&f, &null).is_empty());
    // a response within 6 dB of its median at both edges has none
    let gentle: Vec<f64> = f.iter().map(|&x| -2.0 * (x / 40.0).log2()).collect();
    assert!(
        find_roll_offs(&f, &gentle)
            .iter()
            .all(|r| r.range_hz[0] > 40.0)
    );
}

#[test]
fn a_boost_past_the_range_is_found_by_its_half_gain_band() {
    let peak = |f: f64, q: f64, g: f64| Filter {
        kind: FilterKind::Peaking,
        frequency_hz: f,
        gain_db: g,
        q,
    };
    let range = (40.0, 16_000.0);
    // 1/Q = 2·sinh(ln 2/2·BW): Q 8 is 0.18 octave wide at half gain, so
    // centred at 40 Hz it reaches below; at 45 Hz it stays above 42.3 Hz
    let found = boosts_past_edges(&[peak(40.0, 8.0, 5.0)], range, FS);
    assert_eq!(found.len(), 1);
    assert_eq!(found[0].1, 40.0);
    assert!(found[0].2 > 0.0 && found[0].2 < 1.0, "{}", found[0].2);
    assert!(boosts_past_edges(&[peak(45.0, 8.0, 5.0)], range, FS).is_empty());
    // Q 1 is 1.39 octaves wide: at 60 Hz it reaches down to 37 Hz
    assert_eq!(
        boosts_past_edges(&[peak(60.0, 1.0, 3.0)], range, FS).len(),
        1
    );
    // a cut may reach anywhere
    assert!(boosts_past_edges(&[peak(40.0, 8.0, -5.0)], range, FS).is_empty());
    // a high shelf that boosts lifts everything above the top edge too
    let shelf = Filter {
        kind: FilterKind::HighShelf,
        frequency_hz: 8000.0,
        gain_db: 2.0,
        q: SHELF_Q,
    };
    let s = boosts_past_edges(&[shelf], range, FS);
    assert_eq!(s.len(), 1);
    assert_eq!(s[0].1, 16_000.0);
    assert!((s[0].2 - 2.0).abs() < 0.3, "{}", s[0].2);
}
