//! Tests of what the charts mark, read back from the tEXt chunk of the
//! PNGs they draw (`annotate::mark_values`), with the pixel arithmetic
//! of a log axis done here, independently of plotters.

use super::annotate::mark_values;
use super::*;

fn grid(f1: f64, f2: f64, n: usize) -> Vec<f64> {
    (0..n)
        .map(|i| f1 * (f2 / f1).powf(i as f64 / (n - 1) as f64))
        .collect()
}

fn read(path: &std::path::Path) -> Vec<u8> {
    std::fs::read(path).unwrap()
}

fn one(png: &[u8], key: &str) -> String {
    let v = mark_values(png, key);
    assert_eq!(v.len(), 1, "one mark {key}: {v:?}");
    v[0].clone()
}

fn four(s: &str) -> [f64; 4] {
    let v: Vec<f64> = s.split(',').map(|x| x.parse().unwrap()).collect();
    [v[0], v[1], v[2], v[3]]
}

fn range(s: &str) -> (f64, f64) {
    let (a, b) = s.split_once("..").unwrap();
    (a.parse().unwrap(), b.parse().unwrap())
}

#[test]
fn band_charts_tick_the_band_centres() {
    let t = tempfile::tempdir().unwrap();
    let path = t.path().join("c.png");
    let centres = [
        31.5, 63.0, 125.0, 250.0, 500.0, 1000.0, 2000.0, 4000.0, 8000.0,
    ];
    let bands: Vec<BandPoints> = centres
        .iter()
        .map(|&c| BandPoints {
            center_hz: c,
            fraction: crate::model::Fraction::Octave,
            parameter: crate::model::Parameter::T30,
            values: vec![Some(1.0), Some(0.6)],
            verdict: vec![None, Some(crate::analysis::compare::Verdict::Audible)],
        })
        .collect();
    let labels = vec!["before".to_string(), "after".to_string()];
    compare_reverberation_png(&path, "t", &labels, &bands, "ring: audible").unwrap();
    let png = read(&path);
    // the labels drawn under the axis are the nominal band centres
    assert_eq!(
        one(&png, "x ticks"),
        "31.5, 63, 125, 250, 500, 1k, 2k, 4k, 8k"
    );
    assert_eq!(one(&png, "main legend covers"), "0");
}

#[test]
fn frequency_axes_end_on_a_labelled_tick() {
    let t = tempfile::tempdir().unwrap();
    let path = t.path().join("d.png");
    // the response grid of a 48 kHz measurement ends just short of 20 kHz
    let f = grid(20.0, 19_896.97, 400);
    let diff = vec![("after".to_string(), vec![-3.0; f.len()])];
    compare_difference_png(&path, "t", &f, &diff, "before").unwrap();
    let png = read(&path);
    let ticks = one(&png, "difference x ticks");
    assert!(ticks.ends_with(", 20k"), "{ticks}");
    assert!(ticks.starts_with("20, 50, 100"), "{ticks}");
    assert_eq!(range(&one(&png, "difference x range")).1, 20_000.0);
}

#[test]
fn no_legend_over_the_data() {
    let t = tempfile::tempdir().unwrap();
    let path = t.path().join("r.png");
    let f = grid(20.0, 20_000.0, 300);
    // a rising curve fills the upper right, a falling one the upper left:
    // the legend must find a corner below them
    let up: Vec<f64> = f.iter().map(|x| 10.0 * (x / 20.0).log10()).collect();
    let down: Vec<f64> = f.iter().map(|x| 30.0 - 10.0 * (x / 20.0).log10()).collect();
    let curves = vec![
        ("up".to_string(), up.clone()),
        ("down".to_string(), down.clone()),
    ];
    compare_response_png(&path, "t", &f, &curves, "no smoothing", None).unwrap();
    let png = read(&path);
    let [lx0, ly0, lx1, ly1] = four(&one(&png, "response legend"));
    let [px0, py0, px1, py1] = four(&one(&png, "response plot area"));
    let (f1, f2) = range(&one(&png, "response x range"));
    let (lo, hi) = range(&one(&png, "response y range"));
    // the plotted points in pixels, by the log axis's own arithmetic
    let to_px = |x: f64, y: f64| {
        (
            px0 + (x / f1).ln() / (f2 / f1).ln() * (px1 - px0),
            py0 + (hi - y) / (hi - lo) * (py1 - py0),
        )
    };
    let mut inside = 0;
    for curve in [&up, &down] {
        for w in f.iter().zip(curve.iter()).collect::<Vec<_>>().windows(2) {
            for k in 0..10 {
                let s = k as f64 / 10.0;
                let x = w[0].0 * (w[1].0 / w[0].0).powf(s);
                let y = w[0].1 + (w[1].1 - w[0].1) * s;
                let (a, b) = to_px(x, y);
                if a > lx0 + 2.0 && a < lx1 - 2.0 && b > ly0 + 2.0 && b < ly1 - 2.0 {
                    inside += 1;
                }
            }
        }
    }
    assert_eq!(inside, 0, "legend {lx0},{ly0},{lx1},{ly1}");
    assert!(lx0 >= px0 && lx1 <= px1 && ly0 >= py0 && ly1 <= py1);
}

#[test]
fn the_energy_time_curve_starts_just_before_the_direct_sound() {
    let t = tempfile::tempdir().unwrap();
    let path = t.path().join("i.png");
    let fs = 48_000u32;
    // a causal response: silence, then a peak at 80 ms and a decaying
    // tail (a deterministic pseudo-random sign sequence)
    let onset = (0.08 * f64::from(fs)) as usize;
    let mut ir = vec![0.0; fs as usize];
    let mut seed = 12345u32;
    for (i, v) in ir.iter_mut().enumerate().skip(onset) {
        seed = seed.wrapping_mul(1_103_515_245).wrapping_add(12345);
        let sign = if seed >> 16 & 1 == 1 { 1.0 } else { -1.0 };
        *v = 0.1 * sign * (-((i - onset) as f64) / 4800.0).exp();
    }
    ir[onset] = 1.0;
    impulse_png(&path, "t", &ir, 0.0, 0.08, fs).unwrap();
    let png = read(&path);
    let (start, _) = range(&one(&png, "etc x range"));
    assert!((70.0..80.0).contains(&start), "{start} ms");
}

#[test]
fn wrapped_phase_stays_in_range_and_breaks_at_a_wrap() {
    // a pure delay of 1 ms: −360°·f·0.001, closed form
    let f = grid(20.0, 2000.0, 200);
    let p: Vec<f64> = f.iter().map(|x| -360.0 * x * 1e-3).collect();
    let (wf, wp) = wrap_phase(&f, &p);
    assert!(
        wp.iter()
            .filter(|v| v.is_finite())
            .all(|v| (-180.0..=180.0).contains(v))
    );
    // −720° at 2 kHz: the curve crosses −180° twice below it
    assert_eq!(wp.iter().filter(|v| v.is_nan()).count(), 2);
    assert_eq!(wf.len(), f.len() + 2);
    for (x, v) in wf.iter().zip(&wp).filter(|(_, v)| v.is_finite()) {
        let exact = (-360.0 * x * 1e-3 + 180.0).rem_euclid(360.0) - 180.0;
        assert!((v - exact).abs() < 1e-9);
    }
}

#[test]
fn group_delay_marks_what_it_clips() {
    let t = tempfile::tempdir().unwrap();
    let path = t.path().join("g.png");
    let f = grid(20.0, 20_000.0, 300);
    // flat 1 ms with one spike of 500 ms at a notch: off any sensible scale
    let mut gd = vec![1e-3; f.len()];
    gd[100] = 0.5;
    let p = crate::analysis::phase::PhaseAnalysis {
        phase_unwrapped_deg: vec![0.0; f.len()],
        group_delay_s: gd.clone(),
        minimum_phase_deg: vec![0.0; f.len()],
        excess_group_delay_s: gd,
    };
    group_delay_png(&path, "t", &f, &p, 0.0).unwrap();
    let png = read(&path);
    // the spike is in both curves: one triangle each
    assert_eq!(one(&png, "group delay clipped above"), "2");
    assert_eq!(one(&png, "group delay clipped below"), "0");
}
