//! Kepler's equation M = E − e sin E: eccentric anomaly from mean anomaly, true anomaly from
//! eccentric anomaly, and a deterministic benchmark workload shared by the native and wasm builds.
//!
//! Angles are in radians. Every transcendental function comes from the `libm` crate so that the
//! native command line and the browser compute identical bits.

use core::f64::consts::PI;

mod bench;
mod trig;

pub(crate) use crate::lanes::{LaneMask, Lanes, Real};
#[cfg(test)]
use bench::*;
pub use bench::{benchmark_inputs, solve_all};
use trig::*;

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

/// Two-constant Cody–Waite reduction of `angle` to [−π, π] (exact k = 0 for |angle| ≤ π); valid
/// (absolute error ≲ 1e-15 rad) for |angle| < [`CODY_WAITE_LIMIT`]; the caller checks the range.
#[inline(always)]
fn cody_waite_signed<T: Real>(angle: T) -> T {
    let k = (angle * INV_TWO_PI + TO_INT) - TO_INT;
    let reduced = (angle - k * TWO_PI_HI) - k * TWO_PI_LO;
    reduced.clamp(-PI, PI)
}

/// Reduces any finite angle to [−π, π] (radians). Non-finite input gives NaN.
///
/// |angle| ≤ π is returned unchanged (k = 0 below); up to 2^19·2π a two-constant Cody–Waite reduction is used
/// (absolute error ≲ 1e-15 rad); beyond that `atan2(sin x, cos x)`, whose `libm` sine and cosine
/// reduce exactly by the Payne–Hanek method, so even |angle| = 1e300 reduces correctly.
#[inline]
pub fn reduce_angle_signed(angle: f64) -> f64 {
    if f64::abs(angle) < CODY_WAITE_LIMIT {
        cody_waite_signed(angle)
    } else {
        reduce_angle_signed_far(angle)
    }
}

/// [`reduce_angle_signed`] on lanes: the Cody–Waite path on every lane (the same operations, so
/// the same bits) and the mask of lanes inside its range; the others need
/// [`reduce_angle_signed`].
#[inline(always)]
pub(crate) fn reduce_angle_signed_lanes<const N: usize>(
    angle: Lanes<N>,
) -> (Lanes<N>, LaneMask<N>) {
    (cody_waite_signed(angle), angle.abs().lt(CODY_WAITE_LIMIT))
}

/// [`reduce_angle_signed`] beyond the Cody–Waite range (and for non-finite input).
#[cold]
#[inline(never)]
fn reduce_angle_signed_far(angle: f64) -> f64 {
    if angle.is_finite() {
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
fn wrap_negative<T: Real>(angle: T) -> T {
    let wrapped = (angle + TWO_PI_HI) + TWO_PI_LO;
    let wrapped = T::select(wrapped.ge(TWO_PI), T::splat(0.0), wrapped);
    T::select(angle.ge(0.0), angle, wrapped)
}

/// Markley's starter: coefficients of α(M, e) = (3π² + 1.6π(π − |M|)/(1 + e)) / (π² − 6).
const MARKLEY_A: f64 = 3.0 * PI * PI / (PI * PI - 6.0);
const MARKLEY_B: f64 = 1.6 * PI / (PI * PI - 6.0);

/// Below this |δ| the Taylor series to δ⁵ gives sin δ and cos δ to better than 1e-19 (the first
/// omitted terms are δ⁷/5040 and δ⁶/720).
const TAYLOR_DELTA_LIMIT: f64 = 1.0e-3;

/// Range of the cube-root argument where [`starter_two_thirds_power_fast`]'s bit trick is valid.
const STARTER_POWER_MIN: f64 = 1.0e-200;
const STARTER_POWER_MAX: f64 = 1.0e200;

/// Markley's starter E₁ for M = `m` ∈ [0, π], its sine and cosine, and the fifth-order correction
/// δ₅, computed without branches. `usable` is false where the division-free cube root is out of
/// range (or an input was NaN); the caller then takes [`solve_nonnegative_careful`].
struct MarkleyStep<T: Real> {
    e1: T,
    sin_e1: T,
    cos_e1: T,
    d5: T,
    usable: T::Mask,
}

/// The cubic starter and fifth-order correction of Markley, F. L. (1995), "Kepler Equation
/// Solver", Celestial Mechanics and Dynamical Astronomy 63, 101–111 (his eqs. 5–30), for one
/// value or for several lanes at once.
#[inline(always)]
fn markley_step<T: Real>(m: T, e: T) -> MarkleyStep<T> {
    let cubic = markley_cubic(m, e);
    let usable = cubic.base.ge(STARTER_POWER_MIN) & cubic.base.le(STARTER_POWER_MAX);
    let w = starter_two_thirds_power_fast(cubic.base);
    markley_correction(m, e, &cubic, w, usable)
}

/// The pieces of Markley's cubic (his eqs. 5–20) that the starter needs.
struct MarkleyCubic<T> {
    /// |r| + √(q³ + r²), whose 2/3 power is w.
    base: T,
    d: T,
    q: T,
    q2: T,
    r: T,
}

/// Markley's cubic (his eqs. 5–20, α with the 1.6π term); r ≥ 0 because m ≥ 0.
#[inline(always)]
fn markley_cubic<T: Real>(m: T, e: T) -> MarkleyCubic<T> {
    let one_minus_e = T::splat(1.0) - e;
    let alpha = (T::splat(PI) - m) * MARKLEY_B / (e + 1.0) + MARKLEY_A;
    let d = one_minus_e * 3.0 + alpha * e;
    let alpha_d = alpha * d;
    let q = alpha_d * 2.0 * one_minus_e - m * m;
    let q2 = q * q;
    let r = alpha_d * 3.0 * (d - one_minus_e) * m + m * m * m;
    let base = r + (q2 * q + r * r).sqrt();
    MarkleyCubic { base, d, q, q2, r }
}

/// E₁ from w = base^(2/3) (Markley's closed-form root of the cubic, his eq. 20).
#[inline(always)]
fn markley_starter<T: Real>(m: T, cubic: &MarkleyCubic<T>, w: T) -> T {
    let MarkleyCubic { d, q, q2, r, .. } = *cubic;
    let denominator = w * w + w * q + q2;
    (r * 2.0 * w + m * denominator) / (d * denominator)
}

/// Above this |e·(E − e sin E − M)/(1 − e cos E)| at E₁ the reverted series of
/// [`markley_correction`] is not trusted (its first omitted term is ~ 42·y·h⁵ with y = −f₀/f₁,
/// h this ratio: < 1e-16 below the limit); such cases go to [`solve_nonnegative_careful`]. On a
/// dense grid up to e = 1 − 10⁻⁹ the ratio stays below 6e-4 wherever |δ| < 1e-3.
const SERIES_RATIO_LIMIT: f64 = 1.0e-3;

/// E₁ (Markley's starter), sin E₁, cos E₁ and a fifth-order correction δ with a single division.
///
/// As in Markley (1995), CMDA 63, 101, eqs. 21–30, Kepler's equation f(E) = E − e sin E − M is
/// expanded about E₁ to fifth order, f(E₁ + δ) = f₀ + f₁δ + f₂δ²/2 + f₃δ³/6 − f₂δ⁴/24 − f₃δ⁵/120
/// (f₁ = 1 − e cos E₁, f₂ = e sin E₁, f₃ = e cos E₁). Markley solves it by three nested
/// Halley-type steps, three dependent divisions; here, with g = 1/f₁ (the only division) and
/// y = −f₀g, it is solved by reversion of the series δ + aδ² + bδ³ + cδ⁴ + dδ⁵ = y (a = f₂g/2,
/// b = f₃g/6, c = −a/12, d = −b/20): δ = y − a y² + (2a² − b) y³ + (5ab − 5a³ − c) y⁴ +
/// (14a⁴ − 21a²b + 6ac + 3b² − d) y⁵ (Abramowitz & Stegun 1964, Handbook of Mathematical
/// Functions, eq. 3.6.25 — equation number from memory). On the grids of this crate's tests the
/// residual equals that of Markley's δ₅ (max 8.9e-16 rad).
#[inline(always)]
fn markley_correction<T: Real>(
    m: T,
    e: T,
    cubic: &MarkleyCubic<T>,
    w: T,
    usable: T::Mask,
) -> MarkleyStep<T> {
    let e1 = markley_starter(m, cubic, w);
    let (s1, c1) = sincos_zero_to_pi(e1);
    let f0 = e1 - e * s1 - m;
    let f1 = T::splat(1.0) - e * c1;
    let g = T::splat(1.0) / f1;
    let y = -f0 * g;
    let a = e * s1 * g * 0.5;
    let b = e * c1 * g * (1.0 / 6.0);
    let c = a * (-1.0 / 12.0);
    let d = b * (-1.0 / 20.0);
    let a2 = a * a;
    let k3 = a2 * 2.0 - b;
    let k4 = a * (b - a2) * 5.0 - c;
    let k5 = a2 * (a2 * 14.0 - b * 21.0) + a * c * 6.0 + b * b * 3.0 - d;
    let delta = y * (y * (y * (y * (y * k5 + k4) + k3) - a) + 1.0);
    let series_ok = (e * g * y).abs().lt(SERIES_RATIO_LIMIT);
    MarkleyStep {
        e1,
        sin_e1: s1,
        cos_e1: c1,
        d5: delta,
        usable: usable & series_ok,
    }
}

/// Markley's own fifth-order correction δ₅ (Markley 1995, CMDA 63, 101, eqs. 21–30: δ₃, δ₄,
/// δ₅, three dependent divisions) from E₁: the robust form used by
/// [`solve_nonnegative_careful`].
#[inline(always)]
fn markley_nested_correction(m: f64, e: f64, e1: f64) -> MarkleyStep<f64> {
    let (s1, c1) = sincos_zero_to_pi(e1);
    let f0 = e1 - e * s1 - m;
    let f1 = 1.0 - e * c1;
    let f2 = e * s1;
    let f3 = e * c1;
    let d3 = -f0 * f1 / (f1 * f1 - 0.5 * f0 * f2);
    let d4 = -f0 / (f1 + 0.5 * d3 * f2 + d3 * d3 * f3 * (1.0 / 6.0));
    let d5 =
        -f0 / (f1 + 0.5 * d4 * f2 + d4 * d4 * f3 * (1.0 / 6.0) - d4 * d4 * d4 * f2 * (1.0 / 24.0));
    MarkleyStep {
        e1,
        sin_e1: s1,
        cos_e1: c1,
        d5,
        usable: true,
    }
}

impl<T: Real> Clone for MarkleyCubic<T> {
    fn clone(&self) -> Self {
        *self
    }
}
impl<T: Real> Copy for MarkleyCubic<T> {}

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
    let step = markley_step(mean_anomaly_abs, e);
    if step.usable && f64::abs(step.d5) < TAYLOR_DELTA_LIMIT {
        rotate_by_correction(&step)
    } else {
        solve_nonnegative_careful(mean_anomaly_abs, e)
    }
}

/// E₁ + δ₅ with sin and cos rotated from those of E₁ by a Taylor series in δ₅.
#[inline(always)]
fn rotate_by_correction<T: Real>(step: &MarkleyStep<T>) -> (T, T, T) {
    let (sd, cd) = small_angle_sincos(step.d5);
    let ecc_anomaly = step.e1 + step.d5;
    let sin_e = step.sin_e1 * cd + step.cos_e1 * sd;
    let cos_e = step.cos_e1 * cd - step.sin_e1 * sd;
    (ecc_anomaly, sin_e, cos_e)
}

/// The rare cases of [`solve_nonnegative`]: a cube-root argument outside the bit trick's range
/// (then `libm::cbrt`), and a large correction (e → 1, M → 0: exact sine and cosine of E₁ + δ₅,
/// then one safeguarding Newton step whose own rotation is tiny).
#[cold]
#[inline(never)]
fn solve_nonnegative_careful(m: f64, e: f64) -> (f64, f64, f64) {
    let cubic = markley_cubic(m, e);
    let w = starter_two_thirds_power(cubic.base);
    let step = markley_nested_correction(m, e, markley_starter(m, &cubic, w));
    if f64::abs(step.d5) < TAYLOR_DELTA_LIMIT {
        return rotate_by_correction(&step);
    }
    let ecc_anomaly = step.e1 + step.d5;
    let (s, c) = libm::sincos(ecc_anomaly);
    let f0 = ecc_anomaly - e * s - m;
    let f1 = (1.0 - e) + e * one_minus_cos(s, c);
    let newton = -f0 / f1;
    let (sd, cd) = small_angle_sincos(newton);
    (ecc_anomaly + newton, s * cd + c * sd, c * cd - s * sd)
}

/// x^(2/3) for x > 0, for Markley's starter; [`starter_two_thirds_power_fast`] inside
/// [1e-200, 1e200], `libm::cbrt` outside.
#[inline]
fn starter_two_thirds_power(x: f64) -> f64 {
    if (STARTER_POWER_MIN..=STARTER_POWER_MAX).contains(&x) {
        starter_two_thirds_power_fast(x)
    } else {
        let c = libm::cbrt(x);
        c * c
    }
}

/// x^(2/3) for x in [1e-200, 1e200], without a division: a bit-level first guess of
/// y = x^(−1/3) (relative error < 3.5e-2) refined by three Newton steps y ← y (4 − x y³) / 3
/// (error ε → 2ε²: 3.5e-2 → 2.4e-3 → 1.2e-5 → 3e-10), then x^(2/3) = x·y. Pure IEEE
/// arithmetic, so native and wasm agree bit for bit; the starter does not need a correctly rounded
/// power because Markley's fifth-order correction removes such an error (the residual tests check
/// this). Outside [1e-200, 1e200] the result is meaningless (the caller checks the range).
#[inline(always)]
fn starter_two_thirds_power_fast<T: Real>(x: T) -> T {
    // 0x553E_F0FE_C9D9_B000 ≈ (4/3)·2^52·(1023 − 0.045), tuned to minimise the first guess's
    // maximum relative error: the inverse-cube-root analogue of the inverse-square-root bit trick.
    // Only the high 32 bits of x are divided by 3 (exactly: ⌊h/3⌋ = (h·0xAAAA_AAAB) >> 33 for
    // h < 2^32), a 32×32→64-bit product that SIMD units have; dropping the low word changes the
    // guess by < 2^−19 relative, far below its own error.
    let mut y = x.map_bits(|bits| {
        let high_third = ((bits >> 32) * 0xAAAA_AAAB) >> 33;
        0x553E_F0FE_C9D9_B000_u64.wrapping_sub(high_third << 32)
    });
    let third_x = x * (1.0 / 3.0);
    y = y * (T::splat(4.0 / 3.0) - third_x * (y * y * y));
    y = y * (T::splat(4.0 / 3.0) - third_x * (y * y * y));
    y = y * (T::splat(4.0 / 3.0) - third_x * (y * y * y));
    x * y
}

/// The branch-free common path of [`eccentric_anomaly_reduced`] for lanes: (E, sin E, cos E)
/// and whether each lane is valid (false: NaN, or a rare case of [`solve_nonnegative`]; the
/// caller then uses [`eccentric_anomaly_reduced`], whose common path performs exactly the same
/// operations).
#[inline(always)]
pub(crate) fn eccentric_anomaly_reduced_fast<T: Real>(
    mean_anomaly: T,
    e: f64,
) -> (T, T, T, T::Mask) {
    let step = markley_step(mean_anomaly.abs(), T::splat(e));
    let (angle, sin, cos) = rotate_by_correction(&step);
    let ok = step.usable & step.d5.abs().lt(TAYLOR_DELTA_LIMIT);
    let sign = mean_anomaly.unit_with_sign();
    (sign * angle, sign * sin, cos, ok)
}

/// [`true_anomaly_cos_sin_prepared`] for lanes (same operations, same bits).
#[inline(always)]
pub(crate) fn true_anomaly_cos_sin_lanes<T: Real>(
    sin_e: T,
    cos_e: T,
    e: f64,
    sqrt_one_minus_e2: f64,
) -> (T, T) {
    let one_minus_e = T::splat(1.0 - e);
    let two_sin2_half = one_minus_cos_lanes(sin_e, cos_e);
    let inv_denominator = T::splat(1.0) / (one_minus_e + two_sin2_half * e);
    let cos_nu = (one_minus_e - two_sin2_half) * inv_denominator;
    let sin_nu = sin_e * sqrt_one_minus_e2 * inv_denominator;
    (cos_nu, sin_nu)
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

#[cfg(test)]
mod tests {
    use super::*;
    use crate::lanes::Isa;
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

    /// Distance in units in the last place between two finite doubles of the same sign (or
    /// zero), measured on the integer line of their bit patterns.
    fn ulps_apart(a: f64, b: f64) -> u64 {
        let key = |x: f64| {
            let bits = x.to_bits() as i64;
            if bits < 0 {
                i64::MIN - bits
            } else {
                bits
            }
        };
        key(a).abs_diff(key(b))
    }

    #[test]
    fn fdlibm_kernel_sincos_within_one_ulp_of_libm() {
        // Own quadrant reduction + fdlibm k_sin/k_cos polynomials (Sun Microsystems fdlibm
        // k_sin.c, k_cos.c) against libm::sin/cos (the same kernels behind msun's full argument
        // reduction) on 2·10^6 + 1 points of [−5π/4, 5π/4], the range the solver can feed in.
        // Stated accuracy: at most 1 ulp apart where |value| ≥ 1e-9, and an absolute difference
        // of at most 1.2e-16 (about half an ulp of 1) everywhere.
        let n = 2_000_000;
        let mut worst_ulps = 0;
        let mut worst_abs = 0.0_f64;
        for i in 0..=n {
            let x = -1.25 * PI + 2.5 * PI * i as f64 / n as f64;
            let (s, c) = sincos_zero_to_pi(x);
            let (s_ref, c_ref) = (libm::sin(x), libm::cos(x));
            worst_abs = worst_abs.max((s - s_ref).abs()).max((c - c_ref).abs());
            // Relative (ulp) comparison away from the zeros of sin and cos, where the two-part
            // π/2 of the reduction (≈ 86 bits) leaves an absolute error of ~1e-27 that is many
            // ulps of a value near zero; msun adds a third part of π/2 there.
            for (value, reference) in [(s, s_ref), (c, c_ref)] {
                if reference.abs() >= 1e-9 {
                    worst_ulps = worst_ulps.max(ulps_apart(value, reference));
                }
            }
        }
        assert!(worst_ulps <= 1, "worst {worst_ulps} ulp");
        assert!(
            worst_abs <= 1.2e-16,
            "worst absolute difference {worst_abs:e}"
        );
    }

    #[test]
    fn lanes_give_the_bits_of_the_scalar_solver() {
        // solve_all's lane paths must reproduce eccentric_anomaly bit for bit, including
        // chunks that mix ordinary pairs with every fallback: invalid e, NaN, huge |M|, e → 1 at
        // small M (large correction), M at ±0 and ±π.
        let mut inputs = benchmark_inputs(4001, 11);
        let specials = [
            (0.3, 1.0),
            (f64::NAN, 0.5),
            (1e9, 0.4),
            (1e-6, 0.999_999),
            (-0.0, 0.9),
            (PI, 0.99),
            (-PI, 0.2),
            (1e-300, 0.999),
            (2.0, -0.1),
            (TWO_PI - 1e-12, 0.999),
        ];
        for (k, &pair) in specials.iter().enumerate() {
            inputs.insert(7 * k + 1, pair);
        }
        let same = |a: f64, b: f64| a.to_bits() == b.to_bits() || (a.is_nan() && b.is_nan());
        for chunk in inputs.chunks(4).chain(inputs.chunks(8)) {
            let scalar: f64 = chunk
                .iter()
                .map(|&(m, e)| eccentric_anomaly_or_nan(m, e))
                .sum();
            // Four and eight lanes in plain code, every instruction set this processor offers,
            // and whatever solve_all dispatches to.
            let mut results = vec![solve_all_lanes::<4>(chunk), solve_all_lanes::<8>(chunk)];
            results.extend(
                Isa::available()
                    .into_iter()
                    .map(|isa| solve_all_on(isa, chunk)),
            );
            results.push(solve_all(chunk));
            for lanes in results {
                assert!(same(lanes, scalar), "{chunk:?}: {lanes} vs {scalar}");
            }
        }
        for &(m, e) in &inputs {
            // (The checksum starts from +0.0, so a −0.0 angle comes back as +0.0: compare with ==.)
            let one = solve_all(&[(m, e), (m, e), (m, e), (m, e)]) * 0.25;
            let direct = eccentric_anomaly_or_nan(m, e);
            assert!(
                one == direct || (one.is_nan() && direct.is_nan()),
                "M = {m}, e = {e}"
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
