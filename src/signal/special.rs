//! Special functions the closed forms need: the Bessel function of the
//! first kind of order one, J1, and the far-field directivity of a
//! circular piston in an infinite baffle built on it.
//!
//! No crate in gliss's dependencies has J1, so it is written here. It is
//! Bessel's integral J1(x) = (1/2π)·∫ cos(τ − x·sin τ) dτ over one period,
//! taken by the trapezoid rule: for a periodic analytic integrand the rule
//! converges exponentially (its error is the aliased terms J(1±N)(x), which
//! vanish once N exceeds |x| by a margin; Trefethen & Weideman, "The
//! exponentially convergent trapezoidal rule", SIAM Review 56(3), 2014).
//! It is checked against Abramowitz & Stegun, Handbook of Mathematical
//! Functions, Table 9.1 and Table 9.5 (the zeros), in the tests below.

use std::f64::consts::PI;

/// The Bessel function of the first kind of order one, J1(x), to about
/// 1e-14 absolute for |x| up to a few thousand.
pub fn bessel_j1(x: f64) -> f64 {
    if x == 0.0 {
        return 0.0;
    }
    // Nodes: the aliased error term J(N−1)(x) is below 1e-16 once N exceeds
    // |x| + 40 (J_n(x) decays faster than (ex/2n)^n for n > x).
    let n = (x.abs().ceil() as usize + 40).max(32);
    let step = 2.0 * PI / n as f64;
    let sum: f64 = (0..n)
        .map(|k| {
            let t = k as f64 * step;
            (t - x * t.sin()).cos()
        })
        .sum();
    sum / n as f64
}

/// The far-field pressure of a baffled circular piston at `theta_rad` off
/// its axis relative to on axis, 2·J1(v)/v with v = ka·sin θ (Kinsler,
/// Frey, Coppens & Sanders, Fundamentals of Acoustics, ch. 7); `ka` is the
/// wavenumber times the radius. Signed: negative in the side lobes.
pub fn piston_directivity(ka: f64, theta_rad: f64) -> f64 {
    let v = ka * theta_rad.sin();
    if v.abs() < 1e-8 {
        // 2·J1(v)/v = 1 − v²/8 + …
        return 1.0 - v * v / 8.0;
    }
    2.0 * bessel_j1(v) / v
}

/// The directivity factor of a baffled piston radiating into the front
/// half-space only, Q = (ka)² / (1 − J1(2ka)/(ka)) (Kinsler et al., ch. 7):
/// on-axis intensity over the intensity averaged over the whole sphere.
pub fn piston_directivity_factor(ka: f64) -> f64 {
    ka * ka / (1.0 - bessel_j1(2.0 * ka) / ka)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn j1_matches_abramowitz_and_stegun_table_9_1() {
        // A&S Table 9.1 (ten decimals).
        for (x, j1) in [
            (1.0, 0.440_050_585_7),
            (2.0, 0.576_724_807_8),
            (5.0, -0.327_579_137_6),
            (10.0, 0.043_472_746_2),
            (0.5, 0.242_268_457_7),
        ] {
            assert!((bessel_j1(x) - j1).abs() < 1e-10, "J1({x})");
            assert!((bessel_j1(-x) + j1).abs() < 1e-10, "J1 is odd at {x}");
        }
        // Far beyond the table, where a power series would cancel away:
        // values from scipy.special.j1 (tests/fixtures/directivity/bessel_j1.py).
        for (x, j1) in [
            (50.0, -0.097_511_828_125_175_09),
            (100.0, -0.077_145_352_014_112_3),
        ] {
            assert!(
                (bessel_j1(x) - j1).abs() < 1e-11,
                "J1({x}) = {}",
                bessel_j1(x)
            );
        }
    }

    #[test]
    fn j1_vanishes_at_its_tabulated_zeros() {
        // A&S Table 9.5: the first zeros of J1.
        for z in [3.831_705_970_2, 7.015_586_669_8, 10.173_468_135_1] {
            assert!(bessel_j1(z).abs() < 1e-9, "J1({z})");
        }
    }

    #[test]
    fn the_piston_is_6_db_down_where_2_j1_v_over_v_is_one_half() {
        // v = 2.2150894 (solved with scipy, see the fixture script).
        let ka = 5.0;
        let theta = (2.215_089_367_7_f64 / ka).asin();
        assert!((piston_directivity(ka, theta) - 0.5).abs() < 1e-9);
        assert_eq!(piston_directivity(ka, 0.0), 1.0);
    }

    #[test]
    fn the_directivity_factor_tends_to_two_for_a_small_piston() {
        // A small piston radiates into the half-space evenly: Q → 2.
        assert!((piston_directivity_factor(0.01) - 2.0).abs() < 1e-3);
        // And it equals the numerical mean of D² over the front half-sphere.
        let ka = 4.0;
        let n = 20_000;
        let h = (PI / 2.0) / n as f64;
        let mean: f64 = (0..n)
            .map(|i| {
                let t = (i as f64 + 0.5) * h;
                piston_directivity(ka, t).powi(2) * t.sin() * h
            })
            .sum::<f64>()
            / 2.0;
        assert!((1.0 / mean - piston_directivity_factor(ka)).abs() < 1e-6);
    }
}
