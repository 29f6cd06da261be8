//! Kepler solver against published worked examples and against Kepler's equation itself.

use std::f64::consts::PI;

use approx::assert_relative_eq;
use eccaudit_core::kepler::{
    eccentric_anomaly, eccentric_anomaly_with_sincos, mean_anomaly_from_eccentric, reduce_angle,
    reduce_angle_signed, true_anomaly, true_anomaly_cos_sin, Eccentricity, KeplerError, TWO_PI,
};
use proptest::prelude::*;

/// The brief's accuracy requirement on the residual of Kepler's equation [rad].
const RESIDUAL_TOLERANCE: f64 = 1e-12;

fn ecc(value: f64) -> Eccentricity {
    Eccentricity::new(value).unwrap()
}

/// |E − e sin E − M| reduced modulo 2π to [0, π]: the residual of Kepler's equation.
fn residual(mean_anomaly: f64, e: f64, eccentric: f64) -> f64 {
    reduce_angle_signed(eccentric - e * eccentric.sin() - reduce_angle(mean_anomaly)).abs()
}

#[test]
fn vallado_example_2_1() {
    // Vallado, D. A., Fundamentals of Astrodynamics and Applications (4th ed., 2013),
    // Example 2-1 (KepEqtnE): e = 0.4, M = 235.4° → E = 220.512074767522°.
    let e_deg = eccentric_anomaly(235.4_f64.to_radians(), ecc(0.4)).to_degrees();
    // The book quotes 12 decimals in degrees; allow 1e-10° (≈ 2e-12 rad).
    assert!((e_deg - 220.512074767522).abs() < 1e-10, "E = {e_deg:.12}°");
}

#[test]
fn residual_over_dense_grid_up_to_e_0_999() {
    // Kepler's equation itself is the reference (Markley 1995, CMDA 63, 101, eq. 1).
    let mut worst = 0.0_f64;
    let n_e = 400;
    let n_m = 2000;
    for i in 0..=n_e {
        let e = 0.999 * i as f64 / n_e as f64;
        for j in 0..n_m {
            let m = TWO_PI * j as f64 / n_m as f64;
            let r = residual(m, e, eccentric_anomaly(m, ecc(e)));
            worst = worst.max(r);
        }
    }
    assert!(worst <= RESIDUAL_TOLERANCE, "worst residual {worst:e}");
}

#[test]
fn residual_near_zero_and_two_pi_and_for_extreme_e() {
    // Kepler's equation as the reference; corners where starters and iterations are known to
    // struggle (Markley 1995, §1: e → 1 with M → 0).
    let mean_anomalies = [
        0.0,
        1e-300,
        1e-200,
        1e-12,
        1e-8,
        1e-4,
        PI - 1e-12,
        PI,
        PI + 1e-12,
        TWO_PI - 1e-4,
        TWO_PI - 1e-8,
        TWO_PI - 1e-12,
        -1e-300,
        -1e-12,
        -1.0,
        -PI,
        -7.5,
    ];
    let eccentricities = [
        0.0,
        1e-12,
        0.1,
        0.5,
        0.9,
        0.99,
        0.995,
        0.999,
        0.9999,
        0.999_999,
        1.0 - 1e-9,
    ];
    for &e in &eccentricities {
        for &m in &mean_anomalies {
            let solved = eccentric_anomaly_with_sincos(m, ecc(e));
            assert!(
                (0.0..TWO_PI).contains(&solved.angle),
                "E out of [0, 2π) for e={e}, M={m:e}"
            );
            let r = residual(m, e, solved.angle);
            assert!(r <= RESIDUAL_TOLERANCE, "residual {r:e} at e={e}, M={m:e}");
            // sin E and cos E returned by the solver agree with the platform's (absolute 1e-15).
            assert!((solved.sin - solved.angle.sin()).abs() < 1e-15);
            assert!((solved.cos - solved.angle.cos()).abs() < 1e-15);
        }
    }
}

#[test]
fn tiny_mean_anomaly_scales_like_m_over_one_minus_e() {
    // For M → 0, E → M / (1 − e) (series of Kepler's equation, e.g. Murray & Dermott 1999,
    // Solar System Dynamics, §2.4 — from memory); relative, so it tests more than the residual.
    for &e in &[0.0, 0.5, 0.999] {
        let m = 1e-300;
        assert_relative_eq!(
            eccentric_anomaly(m, ecc(e)),
            m / (1.0 - e),
            max_relative = 1e-12
        );
    }
}

#[test]
fn huge_and_negative_mean_anomalies() {
    // Reference: the platform sin and cos, which reduce any argument exactly (Payne–Hanek), so
    // E − e sin E must have the same sine and cosine as M.
    for &m in &[
        -1e3,
        1e5,
        3.3e6,
        1e7,
        -1e7,
        1e12,
        1e15,
        -2e100,
        1e300,
        -f64::MAX,
    ] {
        for &e in &[0.0, 0.3, 0.95, 0.999] {
            let solved = eccentric_anomaly(m, ecc(e));
            let m_back = solved - e * solved.sin();
            assert!((m_back.sin() - m.sin()).abs() < 1e-12, "M={m:e}, e={e}");
            assert!((m_back.cos() - m.cos()).abs() < 1e-12, "M={m:e}, e={e}");
        }
    }
    // Odd symmetry: E(−M) = 2π − E(M) (Kepler's equation is odd in (M, E)).
    for &m in &[0.3, 2.0, 3.1] {
        let plus = eccentric_anomaly(m, ecc(0.7));
        let minus = eccentric_anomaly(-m, ecc(0.7));
        assert_relative_eq!(plus + minus, TWO_PI, epsilon = 1e-14);
    }
    assert!(eccentric_anomaly(f64::NAN, ecc(0.3)).is_nan());
}

#[test]
fn eccentricity_is_validated() {
    assert_eq!(
        Eccentricity::new(1.0),
        Err(KeplerError::EccentricityOutOfRange { value: 1.0 })
    );
    assert!(Eccentricity::new(-0.1).is_err());
    assert!(Eccentricity::new(f64::NAN).is_err());
}

#[test]
fn true_anomaly_forms_agree_and_behave_as_e_approaches_one() {
    // At E = π/2: cos ν = −e and sin ν = √(1 − e²) exactly, from
    // cos ν = (cos E − e)/(1 − e cos E), sin ν = √(1 − e²) sin E/(1 − e cos E)
    // (Murray & Dermott 1999, eqs. 2.43–2.44 — equation numbers from memory).
    for &e in &[0.0, 0.3, 0.9, 0.999, 0.999_999, 1.0 - 1e-12] {
        let anomaly =
            eccentric_anomaly_with_sincos(mean_anomaly_from_eccentric(PI / 2.0, ecc(e)), ecc(e));
        let (cos_nu, sin_nu) = true_anomaly_cos_sin(&anomaly, ecc(e));
        assert_relative_eq!(cos_nu, -e, epsilon = 1e-14);
        assert_relative_eq!(sin_nu, ((1.0 - e) * (1.0 + e)).sqrt(), max_relative = 1e-9);
        assert_relative_eq!(
            true_anomaly(anomaly.angle, ecc(e)),
            sin_nu.atan2(cos_nu),
            epsilon = 1e-12
        );
    }
    // Near periastron at e → 1, ν follows tan(ν/2) = √((1+e)/(1−e)) tan(E/2) (same source,
    // eq. 2.46): check ν relative to the small-angle limit ν ≈ √((1+e)/(1−e)) E.
    let e = 0.999_999;
    let small_e_anomaly = 1e-9;
    let anomaly =
        eccentric_anomaly_with_sincos(mean_anomaly_from_eccentric(small_e_anomaly, ecc(e)), ecc(e));
    let (cos_nu, sin_nu) = true_anomaly_cos_sin(&anomaly, ecc(e));
    let expected = ((1.0 + e) / (1.0 - e)).sqrt() * small_e_anomaly;
    assert_relative_eq!(sin_nu.atan2(cos_nu), expected, max_relative = 1e-6);
    assert_relative_eq!(
        true_anomaly(anomaly.angle, ecc(e)),
        expected,
        max_relative = 1e-6
    );
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(4000))]

    #[test]
    fn residual_is_small_everywhere(m in -1e4_f64..1e4, e in 0.0_f64..0.999) {
        // Kepler's equation as the reference.
        let r = residual(m, e, eccentric_anomaly(m, ecc(e)));
        prop_assert!(r <= RESIDUAL_TOLERANCE, "residual {:e} at M={}, e={}", r, m, e);
    }

    #[test]
    fn mean_anomaly_round_trip(eccentric in 0.0_f64..TWO_PI, e in 0.0_f64..0.999) {
        // E → M = E − e sin E → E again (Kepler's equation is monotonic in E for e < 1).
        let m = mean_anomaly_from_eccentric(eccentric, ecc(e));
        let back = eccentric_anomaly(m, ecc(e));
        // dE/dM = 1/(1 − e cos E) ≤ 1/(1 − e): an M error of ~1e-15 becomes ≤ 1e-12 in E.
        let diff = reduce_angle_signed(back - eccentric).abs();
        prop_assert!(diff <= 1e-15 / (1.0 - e) + 1e-14, "E={} e={} back={}", eccentric, e, back);
    }

    #[test]
    fn true_anomaly_atan2_matches_cos_sin(m in 0.0_f64..TWO_PI, e in 0.0_f64..0.9999) {
        // Two routes to ν (half-angle atan2 vs. direct cos ν, sin ν; Murray & Dermott 1999,
        // eqs. 2.43–2.46 — from memory) must agree, and (cos ν, sin ν) must be a unit vector.
        let anomaly = eccentric_anomaly_with_sincos(m, ecc(e));
        let (cos_nu, sin_nu) = true_anomaly_cos_sin(&anomaly, ecc(e));
        prop_assert!((cos_nu * cos_nu + sin_nu * sin_nu - 1.0).abs() < 1e-13);
        let nu = true_anomaly(anomaly.angle, ecc(e));
        prop_assert!(reduce_angle_signed(nu - sin_nu.atan2(cos_nu)).abs() < 1e-10);
    }
}
