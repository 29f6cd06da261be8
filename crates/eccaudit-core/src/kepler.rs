//! Kepler's equation M = E − e sin E: eccentric anomaly from mean anomaly, true anomaly from
//! eccentric anomaly, and a deterministic benchmark workload shared by the native and wasm builds.
//!
//! Angles are in radians. Every transcendental function comes from the `libm` crate so that the
//! native command line and the browser compute identical bits.

use core::f64::consts::PI;

use rand::{RngExt, SeedableRng};
use rand_xoshiro::Xoshiro256PlusPlus;

/// 2π.
pub const TWO_PI: f64 = 2.0 * PI;

/// 2π split for Cody–Waite argument reduction: the high part holds the first 33 significant bits
/// of 2π (so `k * TWO_PI_HI` is exact for |k| < 2^20), the low part the rest. These are the
/// `PIO2_1` / `PIO2_1T` constants of FreeBSD msun `e_rem_pio2.c` (as carried by `libm`) scaled by 4
/// (an exact power-of-two scaling).
const TWO_PI_HI: f64 = f64::from_bits(0x4019_21FB_5440_0000);
const TWO_PI_LO: f64 = f64::from_bits(0x3DF0_B461_1A62_6331);
const INV_TWO_PI: f64 = 1.0 / TWO_PI;
/// Adding and subtracting 1.5·2^52 rounds a double of magnitude < 2^51 to the nearest integer
/// (ties to even) in the default rounding mode, without calling `round` (same trick as msun).
const TO_INT: f64 = 1.5 / f64::EPSILON;
/// Beyond this |angle| the Cody–Waite reduction would lose exactness of `k * TWO_PI_HI`.
const CODY_WAITE_LIMIT: f64 = 524_288.0 * TWO_PI; // 2^19 · 2π

/// Errors of the Kepler solver's inputs.
#[derive(Debug, Clone, Copy, PartialEq, thiserror::Error)]
pub enum KeplerError {
    /// The eccentricity of a bound orbit must satisfy 0 ≤ e < 1.
    #[error("eccentricity must satisfy 0 <= e < 1, got {value}")]
    EccentricityOutOfRange {
        /// The rejected value.
        value: f64,
    },
}

/// An eccentricity checked to satisfy 0 ≤ e < 1 (bound, non-parabolic orbit).
///
/// The only way to build one is [`Eccentricity::new`], so every solver function that takes it can
/// rely on the range without checking again.
#[derive(Debug, Clone, Copy, PartialEq, PartialOrd)]
pub struct Eccentricity(f64);

impl Eccentricity {
    /// A circular orbit.
    pub const ZERO: Eccentricity = Eccentricity(0.0);

    /// Checks 0 ≤ `value` < 1 (NaN is rejected).
    pub fn new(value: f64) -> Result<Self, KeplerError> {
        if (0.0..1.0).contains(&value) {
            Ok(Eccentricity(value))
        } else {
            Err(KeplerError::EccentricityOutOfRange { value })
        }
    }

    /// The eccentricity as a plain number.
    #[inline]
    pub fn value(self) -> f64 {
        self.0
    }
}

/// An eccentric anomaly together with its sine and cosine, as the solver produces them.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct EccentricAnomaly {
    /// E in radians, in [0, 2π) for [`eccentric_anomaly_with_sincos`].
    pub angle: f64,
    /// sin E.
    pub sin: f64,
    /// cos E.
    pub cos: f64,
}

/// Reduces any finite angle to [−π, π] (radians). Non-finite input gives NaN.
///
/// |angle| ≤ π is returned unchanged (k = 0 below); up to 2^19·2π a two-constant Cody–Waite reduction is used
/// (absolute error ≲ 1e-15 rad); beyond that `atan2(sin x, cos x)`, whose `libm` sine and cosine
/// reduce exactly by the Payne–Hanek method, so even |angle| = 1e300 reduces correctly.
#[inline]
pub fn reduce_angle_signed(angle: f64) -> f64 {
    if f64::abs(angle) < CODY_WAITE_LIMIT {
        // Branch-free for the common case; k = 0 leaves |angle| ≤ π unchanged (exactly).
        let k = (angle * INV_TWO_PI + TO_INT) - TO_INT;
        let reduced = (angle - k * TWO_PI_HI) - k * TWO_PI_LO;
        reduced.clamp(-PI, PI)
    } else if angle.is_finite() {
        let (s, c) = libm::sincos(angle);
        libm::atan2(s, c)
    } else {
        f64::NAN
    }
}

/// Reduces any finite angle to [0, 2π) (radians). Non-finite input gives NaN.
///
/// A negative angle smaller in magnitude than half an ulp of 2π folds to 0.0 (the same angle to
/// within that half ulp) so that the result is always strictly below 2π.
#[inline]
pub fn reduce_angle(angle: f64) -> f64 {
    wrap_negative(reduce_angle_signed(angle))
}

/// Maps an angle in [−π, π] to [0, 2π): negative values get 2π added (in two parts, so no
/// precision is lost); a sum that rounds to 2π folds to 0.0. Written as selects, not branches.
#[inline(always)]
fn wrap_negative(angle: f64) -> f64 {
    let wrapped = (angle + TWO_PI_HI) + TWO_PI_LO;
    let wrapped = if wrapped >= TWO_PI { 0.0 } else { wrapped };
    if angle >= 0.0 {
        angle
    } else {
        wrapped
    }
}

/// Markley's starter: coefficients of α(M, e) = (3π² + 1.6π(π − |M|)/(1 + e)) / (π² − 6).
const MARKLEY_A: f64 = 3.0 * PI * PI / (PI * PI - 6.0);
const MARKLEY_B: f64 = 1.6 * PI / (PI * PI - 6.0);

/// Below this |δ| the Taylor series to δ⁵ gives sin δ and cos δ to better than 1e-19 (the first
/// omitted terms are δ⁷/5040 and δ⁶/720).
const TAYLOR_DELTA_LIMIT: f64 = 1.0e-3;

/// Solves Kepler's equation for |M| ≤ π (M = `mean_anomaly_abs` ≥ 0) and returns E ∈ [0, π]
/// with its sine and cosine.
///
/// Method: Markley, F. L. (1995), "Kepler Equation Solver", Celestial Mechanics and Dynamical
/// Astronomy 63, 101–111: the cubic starter (his eqs. 5–20, α with the 1.6π term) followed by one
/// fifth-order Halley-type correction (his eqs. 21–30, δ₃, δ₄, δ₅). sin E and cos E come from
/// sin E₁, cos E₁ rotated by δ₅ with a Taylor series (no second sine/cosine). Where the
/// correction was large (|δ₅| ≥ 1e-3, which only happens for e close to 1 and small M) one
/// safeguarding Newton step follows; it needs no further trigonometry.
#[inline(always)]
fn solve_nonnegative(mean_anomaly_abs: f64, e: f64) -> (f64, f64, f64) {
    let m = mean_anomaly_abs;
    let one_minus_e = 1.0 - e;
    // Starter (Markley 1995, eqs. 19–20 and the closed-form root of the cubic).
    let alpha = MARKLEY_A + MARKLEY_B * (PI - m) / (1.0 + e);
    let d = 3.0 * one_minus_e + alpha * e;
    let alpha_d = alpha * d;
    let q = 2.0 * alpha_d * one_minus_e - m * m;
    let q2 = q * q;
    let r = 3.0 * alpha_d * (d - one_minus_e) * m + m * m * m;
    // w = (|r| + sqrt(q³ + r²))^(2/3); r ≥ 0 because m ≥ 0.
    let base = r + libm::sqrt(q2 * q + r * r);
    let w = starter_two_thirds_power(base);
    let denominator = w * w + w * q + q2;
    let e1 = (2.0 * r * w + m * denominator) / (d * denominator);

    // Fifth-order correction (Markley 1995, eqs. 21–30).
    let (s1, c1) = sincos_zero_to_pi(e1);
    let f0 = e1 - e * s1 - m;
    let f1 = 1.0 - e * c1;
    let f2 = e * s1;
    let f3 = e * c1;
    let d3 = -f0 * f1 / (f1 * f1 - 0.5 * f0 * f2);
    let d4 = -f0 / (f1 + 0.5 * d3 * f2 + d3 * d3 * f3 * (1.0 / 6.0));
    let d5 =
        -f0 / (f1 + 0.5 * d4 * f2 + d4 * d4 * f3 * (1.0 / 6.0) - d4 * d4 * d4 * f2 * (1.0 / 24.0));

    if f64::abs(d5) < TAYLOR_DELTA_LIMIT {
        let (sd, cd) = small_angle_sincos(d5);
        let ecc_anomaly = e1 + d5;
        let sin_e = s1 * cd + c1 * sd;
        let cos_e = c1 * cd - s1 * sd;
        (ecc_anomaly, sin_e, cos_e)
    } else {
        // Rare path (e → 1, M → 0): exact sine and cosine, then one safeguarding Newton step
        // whose own rotation is tiny.
        let ecc_anomaly = e1 + d5;
        let (s, c) = libm::sincos(ecc_anomaly);
        let f0 = ecc_anomaly - e * s - m;
        let f1 = one_minus_e + e * one_minus_cos(s, c);
        let step = -f0 / f1;
        let (sd, cd) = small_angle_sincos(step);
        (ecc_anomaly + step, s * cd + c * sd, c * cd - s * sd)
    }
}

/// x^(2/3) for x > 0, for Markley's starter, without a division: a bit-level first guess of
/// y = x^(−1/3) (relative error < 3.5e-2) refined by three Newton steps y ← y (4 − x y³) / 3
/// (error ε → 2ε²: 3.5e-2 → 2.4e-3 → 1.2e-5 → 3e-10), then x^(2/3) = x·y. Pure IEEE
/// arithmetic, so native and wasm agree bit for bit; the starter does not need a correctly rounded
/// power because Markley's fifth-order correction removes such an error (the residual tests check
/// this). Inputs outside [1e-200, 1e200] fall back to `libm::cbrt`.
#[inline(always)]
fn starter_two_thirds_power(x: f64) -> f64 {
    if !(1.0e-200..=1.0e200).contains(&x) {
        let c = libm::cbrt(x);
        return c * c;
    }
    // 0x553E_F0FE_C9D9_B000 ≈ (4/3)·2^52·(1023 − 0.045), tuned to minimise the first guess's
    // maximum relative error: the inverse-cube-root analogue of the inverse-square-root bit trick.
    let mut y = f64::from_bits(0x553E_F0FE_C9D9_B000 - x.to_bits() / 3);
    let third_x = x * (1.0 / 3.0);
    y *= 4.0 / 3.0 - third_x * (y * y * y);
    y *= 4.0 / 3.0 - third_x * (y * y * y);
    y *= 4.0 / 3.0 - third_x * (y * y * y);
    x * y
}

/// sin x and cos x for x in about [0, 5π/4] (the starter E₁): x is reduced here to
/// |y| ≤ π/4 by y = x − nπ/2 (n = round(2x/π), with π/2 split as in msun's `e_rem_pio2.c`) so that
/// `libm::sincos` takes its no-reduction path, and the quadrant is applied with selects instead
/// of the unpredictable branch inside `libm::sincos`: q = 0: (sin y, cos y); 1: (cos y, −sin y);
/// 2: (−sin y, −cos y); 3: (−cos y, sin y). Absolute error ≲ 2e-16.
#[inline(always)]
fn sincos_zero_to_pi(x: f64) -> (f64, f64) {
    const PIO2_HI: f64 = f64::from_bits(0x3FF9_21FB_5440_0000);
    const PIO2_LO: f64 = f64::from_bits(0x3DD0_B461_1A62_6331);
    let n = (x * core::f64::consts::FRAC_2_PI + TO_INT) - TO_INT;
    let y = (x - n * PIO2_HI) - n * PIO2_LO;
    let (sy, cy) = libm::sincos(y);
    // Bit-level selects: LLVM turns `if`-selects of this shape into real branches, which the
    // random quadrant would mispredict about half the time.
    let quadrant = (n as i64 as u64) & 3;
    let swap_mask = (quadrant & 1).wrapping_neg(); // all ones in odd quadrants
    let (sy_bits, cy_bits) = (sy.to_bits(), cy.to_bits());
    let sin_bits = (sy_bits & !swap_mask) | (cy_bits & swap_mask);
    let cos_bits = (cy_bits & !swap_mask) | (sy_bits & swap_mask);
    let sin_flip = ((quadrant >> 1) & 1) << 63; // quadrants 2, 3
    let cos_flip = (((quadrant + 1) >> 1) & 1) << 63; // quadrants 1, 2
    (
        f64::from_bits(sin_bits ^ sin_flip),
        f64::from_bits(cos_bits ^ cos_flip),
    )
}

/// sin δ and cos δ for |δ| ≲ 1e-3 by their Taylor series to the δ⁵ term (common practice).
#[inline(always)]
fn small_angle_sincos(delta: f64) -> (f64, f64) {
    let d2 = delta * delta;
    let sin = delta * (1.0 - d2 * (1.0 / 6.0) * (1.0 - d2 * (1.0 / 20.0)));
    let cos = 1.0 - d2 * 0.5 * (1.0 - d2 * (1.0 / 12.0));
    (sin, cos)
}

/// 1 − cos x from sin x and cos x without cancellation: sin²x / (1 + cos x) when cos x > 0.
#[inline(always)]
fn one_minus_cos(sin: f64, cos: f64) -> f64 {
    if cos > 0.0 {
        sin * sin / (1.0 + cos)
    } else {
        1.0 - cos
    }
}

/// Solves Kepler's equation for a mean anomaly already in [−π, π]; returns E ∈ [−π, π] (same
/// sign as M) with its sine and cosine. Values outside [−π, π] are accepted but lose the accuracy
/// guarantee; use [`eccentric_anomaly_with_sincos`] for arbitrary M.
///
/// Method: Markley (1995), Celestial Mechanics and Dynamical Astronomy 63, 101 (see
/// [`eccentric_anomaly`]). This is the hot-path entry point for the radial-velocity model, which
/// reduces the orbital phase itself.
#[inline]
pub fn eccentric_anomaly_reduced(
    mean_anomaly: f64,
    eccentricity: Eccentricity,
) -> EccentricAnomaly {
    let (angle, sin, cos) = solve_nonnegative(f64::abs(mean_anomaly), eccentricity.0);
    // Odd symmetry E(−M) = −E(M); a multiplication instead of an unpredictable branch.
    let sign = f64::copysign(1.0, mean_anomaly);
    EccentricAnomaly {
        angle: sign * angle,
        sin: sign * sin,
        cos,
    }
}

/// Solves Kepler's equation M = E − e sin E for any real mean anomaly M (radians); returns E in
/// [0, 2π) with sin E and cos E. M is reduced first with [`reduce_angle_signed`] (robust also for
/// huge |M|). Non-finite M gives NaN.
///
/// Method: Markley, F. L. (1995), Celestial Mechanics and Dynamical Astronomy 63, 101: cubic
/// starter plus one fifth-order correction, with a safeguarding Newton step where the correction
/// was large. The residual |E − e sin E − M| (modulo 2π) is ≤ 1e-12 rad for all M and
/// 0 ≤ e ≤ 0.999 (verified by this crate's tests; in practice it is at the 1e-15 level).
#[inline]
pub fn eccentric_anomaly_with_sincos(
    mean_anomaly: f64,
    eccentricity: Eccentricity,
) -> EccentricAnomaly {
    let reduced = reduce_angle_signed(mean_anomaly);
    let signed = eccentric_anomaly_reduced(reduced, eccentricity);
    EccentricAnomaly {
        angle: wrap_negative(signed.angle),
        sin: signed.sin,
        cos: signed.cos,
    }
}

/// Eccentric anomaly E ∈ [0, 2π) (radians) from any real mean anomaly M (radians) for a checked
/// eccentricity 0 ≤ e < 1. Non-finite M gives NaN.
///
/// Method: Markley, F. L. (1995), "Kepler Equation Solver", Celestial Mechanics and Dynamical
/// Astronomy 63, 101–111 — cubic starter and one fifth-order correction — with a safeguarding
/// Newton step only where that correction was large (e near 1, M near 0 or 2π).
#[inline]
pub fn eccentric_anomaly(mean_anomaly: f64, eccentricity: Eccentricity) -> f64 {
    eccentric_anomaly_with_sincos(mean_anomaly, eccentricity).angle
}

/// Mean anomaly M = E − e sin E (Kepler's equation, forward direction), radians, not reduced.
#[inline]
pub fn mean_anomaly_from_eccentric(eccentric_anomaly: f64, eccentricity: Eccentricity) -> f64 {
    eccentric_anomaly - eccentricity.0 * libm::sin(eccentric_anomaly)
}

/// True anomaly ν ∈ (−π, π] (radians) from the eccentric anomaly E (radians).
///
/// Uses ν = 2 atan2(√(1+e) sin(E/2), √(1−e) cos(E/2)) (the half-angle relation
/// tan(ν/2) = √((1+e)/(1−e)) tan(E/2), e.g. Murray & Dermott 1999, Solar System Dynamics,
/// eq. 2.46), which stays accurate as e → 1 and needs no quadrant fix-up.
pub fn true_anomaly(eccentric_anomaly: f64, eccentricity: Eccentricity) -> f64 {
    let e = eccentricity.0;
    let (s, c) = libm::sincos(0.5 * eccentric_anomaly);
    2.0 * libm::atan2(libm::sqrt(1.0 + e) * s, libm::sqrt(1.0 - e) * c)
}

/// (cos ν, sin ν) of the true anomaly directly from E, sin E and cos E, without atan2.
///
/// cos ν = (cos E − e) / (1 − e cos E), sin ν = √((1−e)(1+e)) sin E / (1 − e cos E) (e.g. Murray &
/// Dermott 1999, eqs. 2.43–2.44), with 1 − e cos E = (1 − e) + 2e sin²(E/2) and
/// cos E − e = (1 − e) − 2 sin²(E/2), where 2 sin²(E/2) = 1 − cos E is formed from sin E and cos E
/// without cancellation. Accurate as e → 1 near periastron. This is the model's hot path.
#[inline]
pub fn true_anomaly_cos_sin(anomaly: &EccentricAnomaly, eccentricity: Eccentricity) -> (f64, f64) {
    let e = eccentricity.0;
    true_anomaly_cos_sin_prepared(anomaly, e, libm::sqrt((1.0 - e) * (1.0 + e)))
}

/// [`true_anomaly_cos_sin`] with √((1−e)(1+e)) precomputed by the caller (the model does this
/// once per companion).
#[inline(always)]
pub(crate) fn true_anomaly_cos_sin_prepared(
    anomaly: &EccentricAnomaly,
    e: f64,
    sqrt_one_minus_e2: f64,
) -> (f64, f64) {
    let one_minus_e = 1.0 - e;
    let two_sin2_half = one_minus_cos(anomaly.sin, anomaly.cos);
    let inv_denominator = 1.0 / (one_minus_e + e * two_sin2_half);
    let cos_nu = (one_minus_e - two_sin2_half) * inv_denominator;
    let sin_nu = sqrt_one_minus_e2 * anomaly.sin * inv_denominator;
    (cos_nu, sin_nu)
}

/// Deterministic benchmark workload: `n` pairs (M, e) with M uniform in [0, 2π) and e uniform in
/// [0, 0.99], drawn from `Xoshiro256PlusPlus::seed_from_u64(seed)`. Identical on native and wasm.
pub fn benchmark_inputs(n: usize, seed: u64) -> Vec<(f64, f64)> {
    let mut rng = Xoshiro256PlusPlus::seed_from_u64(seed);
    (0..n)
        .map(|_| {
            let mean_anomaly: f64 = rng.random_range(0.0..TWO_PI);
            let eccentricity: f64 = rng.random_range(0.0..=0.99);
            (mean_anomaly, eccentricity)
        })
        .collect()
}

/// Solves Kepler's equation for every (M, e) pair of `inputs` and returns the sum of the
/// eccentric anomalies, a checksum that keeps the optimiser from removing the work. Pairs with an
/// eccentricity outside [0, 1) contribute NaN (so the checksum becomes NaN) instead of panicking.
pub fn solve_all(inputs: &[(f64, f64)]) -> f64 {
    inputs
        .iter()
        .map(|&(mean_anomaly, e)| match Eccentricity::new(e) {
            Ok(eccentricity) => eccentric_anomaly(mean_anomaly, eccentricity),
            Err(_) => f64::NAN,
        })
        .sum()
}

#[cfg(test)]
mod tests {
    use super::*;
    use approx::assert_relative_eq;

    #[test]
    fn rejects_eccentricity_outside_zero_to_one() {
        for bad in [-1e-300, 1.0, 1.5, f64::NAN, f64::INFINITY] {
            assert!(Eccentricity::new(bad).is_err(), "accepted {bad}");
        }
        assert!(Eccentricity::new(0.0).is_ok());
        assert!(Eccentricity::new(1.0 - f64::EPSILON / 2.0).is_ok());
    }

    #[test]
    fn starter_power_matches_libm_cbrt() {
        // The division-free x^(2/3) against libm's correctly rounded cbrt (CORE-MATH port).
        let mut x = 1.0e-199;
        while x < 1.0e199 {
            let c = libm::cbrt(x);
            assert_relative_eq!(starter_two_thirds_power(x), c * c, max_relative = 1e-9);
            x *= 1.37;
        }
    }

    #[test]
    fn reduced_sincos_matches_libm() {
        // Own quadrant handling against libm::sincos over the starter's range [0, 5π/4].
        for i in 0..=10_000 {
            let x = 1.25 * PI * i as f64 / 10_000.0;
            let (s, c) = sincos_zero_to_pi(x);
            let (s_ref, c_ref) = libm::sincos(x);
            assert!(
                (s - s_ref).abs() <= 4e-16 && (c - c_ref).abs() <= 4e-16,
                "x = {x}"
            );
        }
    }

    #[test]
    fn reduce_angle_ranges() {
        // Reduction identities (definition of angle modulo 2π; common practice).
        assert_eq!(reduce_angle(0.0), 0.0);
        assert_eq!(reduce_angle(-1e-300), 0.0);
        assert_relative_eq!(reduce_angle(-1.0), TWO_PI - 1.0, epsilon = 1e-15);
        assert_relative_eq!(reduce_angle(7.0), 7.0 - TWO_PI, epsilon = 1e-15);
        assert_relative_eq!(reduce_angle(1000.0 * TWO_PI + 0.5), 0.5, epsilon = 1e-12);
        assert!(reduce_angle(f64::NAN).is_nan());
        assert!(reduce_angle(f64::INFINITY).is_nan());
        for x in [1e7, -1e7, 1e15, -3e100, 1e300, f64::MAX] {
            let r = reduce_angle(x);
            assert!((0.0..TWO_PI).contains(&r), "{x} -> {r}");
            // libm's sin and cos reduce exactly (Payne–Hanek), so they are the reference.
            assert!((libm::sin(r) - libm::sin(x)).abs() < 1e-15, "{x}");
            assert!((libm::cos(r) - libm::cos(x)).abs() < 1e-15, "{x}");
        }
    }

    #[test]
    fn benchmark_workload_is_deterministic_and_in_range() {
        let a = benchmark_inputs(1000, 7);
        assert_eq!(a, benchmark_inputs(1000, 7));
        assert_ne!(a, benchmark_inputs(1000, 8));
        assert!(a
            .iter()
            .all(|&(m, e)| (0.0..TWO_PI).contains(&m) && (0.0..=0.99).contains(&e)));
        let checksum = solve_all(&a);
        let direct: f64 = a
            .iter()
            .map(|&(m, e)| eccentric_anomaly(m, Eccentricity::new(e).unwrap()))
            .sum();
        assert_eq!(checksum, direct);
        assert!(solve_all(&[(1.0, 1.5)]).is_nan());
    }
}
