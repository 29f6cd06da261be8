//! Our own sine and cosine for the solver's lanes: the fdlibm polynomial kernels (as carried by
//! `libm`) on [0, π] after a π/2 quadrant reduction, written once over scalar and SIMD lanes, and
//! 1 − cos x without cancellation.

use super::*;

/// π/2 split for the quadrant reduction: `PIO2_1` holds the first 33 bits of π/2 (so n·PIO2_1 is
/// exact for small n) and `PIO2_1T` = π/2 − PIO2_1 (FreeBSD msun / Sun fdlibm `e_rem_pio2.c`
/// constants `pio2_1`, `pio2_1t`, as carried by the `libm` crate).
pub(super) const PIO2_1: f64 = f64::from_bits(0x3FF9_21FB_5440_0000);
pub(super) const PIO2_1T: f64 = f64::from_bits(0x3DD0_B461_1A62_6331);

/// Polynomial coefficients of Sun Microsystems fdlibm `k_sin.c` (`__kernel_sin`, S1–S6,
/// Copyright 1993 Sun Microsystems, freely redistributable; the same bits as FreeBSD msun, musl
/// and the `libm` crate's `k_sin.rs`): sin x ≈ x + S1 x³ + … + S6 x¹³ on |x| ≤ π/4 with
/// |error| < 2^−58 (fdlibm's comment).
pub(super) const SIN_S1: f64 = f64::from_bits(0xBFC5_5555_5555_5549); // −1.66666666666666324348e−01
pub(super) const SIN_S2: f64 = f64::from_bits(0x3F81_1111_1110_F8A6); // 8.33333333332248946124e−03
pub(super) const SIN_S3: f64 = f64::from_bits(0xBF2A_01A0_19C1_61D5); // −1.98412698298579493134e−04
pub(super) const SIN_S4: f64 = f64::from_bits(0x3EC7_1DE3_57B1_FE7D); // 2.75573137070700676789e−06
pub(super) const SIN_S5: f64 = f64::from_bits(0xBE5A_E5E6_8A2B_9CEB); // −2.50507602534068634195e−08
pub(super) const SIN_S6: f64 = f64::from_bits(0x3DE5_D93A_5ACF_D57C); // 1.58969099521155010221e−10

/// Polynomial coefficients of Sun Microsystems fdlibm `k_cos.c` (`__kernel_cos`, C1–C6, same
/// provenance): cos x ≈ 1 − x²/2 + C1 x⁴ + … + C6 x¹⁴ on |x| ≤ π/4 with |error| < 2^−58.
pub(super) const COS_C1: f64 = f64::from_bits(0x3FA5_5555_5555_554C); // 4.16666666666666019037e−02
pub(super) const COS_C2: f64 = f64::from_bits(0xBF56_C16C_16C1_5177); // −1.38888888888741095749e−03
pub(super) const COS_C3: f64 = f64::from_bits(0x3EFA_01A0_19CB_1590); // 2.48015872894767294178e−05
pub(super) const COS_C4: f64 = f64::from_bits(0xBE92_7E4F_809C_52AD); // −2.75573143513906633035e−07
pub(super) const COS_C5: f64 = f64::from_bits(0x3E21_EE9E_BDB4_B1C4); // 2.08757232129817482790e−09
pub(super) const COS_C6: f64 = f64::from_bits(0xBDA8_FAE9_BE88_38D4); // −1.13596475577881948265e−11

/// sin(x + y) for |x| ≤ π/4 and a tail |y| ≤ ulp(x)/2: fdlibm's `__kernel_sin` (k_sin.c, the
/// branch with a tail), plain IEEE arithmetic without FMA.
#[inline(always)]
pub(super) fn kernel_sin<T: Real>(x: T, y: T) -> T {
    let z = x * x;
    let w = z * z;
    let r = z * (z * SIN_S4 + SIN_S3) + SIN_S2 + z * w * (z * SIN_S6 + SIN_S5);
    let v = z * x;
    x - ((z * (y * 0.5 - v * r) - y) - v * SIN_S1)
}

/// cos(x + y) for |x| ≤ π/4 and a tail |y| ≤ ulp(x)/2: fdlibm's `__kernel_cos` (k_cos.c, the
/// branch-free FreeBSD/musl form), plain IEEE arithmetic without FMA.
#[inline(always)]
pub(super) fn kernel_cos<T: Real>(x: T, y: T) -> T {
    let z = x * x;
    let w = z * z;
    let r = z * (z * (z * COS_C3 + COS_C2) + COS_C1) + w * w * (z * (z * COS_C6 + COS_C5) + COS_C4);
    let hz = z * 0.5;
    let w = T::splat(1.0) - hz;
    w + (((T::splat(1.0) - w) - hz) + (z * r - x * y))
}

/// sin x and cos x for x in about [−5π/4, 5π/4] (the starter E₁ lies in [0, π]), branch-free:
/// x − nπ/2 = y₀ + y₁ with n = round(2x/π) (the medium-range step of fdlibm `e_rem_pio2.c`), the
/// fdlibm kernels on |y₀| ≤ π/4, and the quadrant n mod 4 applied with bit selects:
/// 0: (sin y, cos y); 1: (cos y, −sin y); 2: (−sin y, −cos y); 3: (−cos y, sin y).
#[inline(always)]
pub(super) fn sincos_zero_to_pi<T: Real>(x: T) -> (T, T) {
    // shifted = 1.5·2^52 + n exactly, so its low mantissa bits are n mod 4 (also for n < 0).
    let shifted = x * core::f64::consts::FRAC_2_PI + TO_INT;
    let n = shifted - TO_INT;
    let r = x - n * PIO2_1;
    let w = n * PIO2_1T;
    let y0 = r - w;
    let y1 = (r - y0) - w;
    let sy = kernel_sin(y0, y1);
    let cy = kernel_cos(y0, y1);
    // Bit-level selects: LLVM turns `if`-selects of this shape into real branches, which the
    // random quadrant would mispredict about half the time.
    let sin = T::zip3_bits(sy, cy, shifted, |sy_bits, cy_bits, shifted_bits| {
        let quadrant = shifted_bits & 3;
        let swap_mask = (quadrant & 1).wrapping_neg(); // all ones in odd quadrants
        let flip = ((quadrant >> 1) & 1) << 63; // quadrants 2, 3
        ((sy_bits & !swap_mask) | (cy_bits & swap_mask)) ^ flip
    });
    let cos = T::zip3_bits(sy, cy, shifted, |sy_bits, cy_bits, shifted_bits| {
        let quadrant = shifted_bits & 3;
        let swap_mask = (quadrant & 1).wrapping_neg();
        let flip = (((quadrant + 1) >> 1) & 1) << 63; // quadrants 1, 2
        ((cy_bits & !swap_mask) | (sy_bits & swap_mask)) ^ flip
    });
    (sin, cos)
}

/// sin δ and cos δ for |δ| ≲ 1e-3 by their Taylor series to the δ⁵ term (common practice).
#[inline(always)]
pub(super) fn small_angle_sincos<T: Real>(delta: T) -> (T, T) {
    let d2 = delta * delta;
    let sin = delta * (T::splat(1.0) - d2 * (1.0 / 6.0) * (T::splat(1.0) - d2 * (1.0 / 20.0)));
    let cos = T::splat(1.0) - d2 * 0.5 * (T::splat(1.0) - d2 * (1.0 / 12.0));
    (sin, cos)
}

/// 1 − cos x from sin x and cos x without cancellation: sin²x / (1 + cos x) when cos x > 0.
#[inline(always)]
pub(super) fn one_minus_cos(sin: f64, cos: f64) -> f64 {
    if cos > 0.0 {
        sin * sin / (1.0 + cos)
    } else {
        1.0 - cos
    }
}

/// [`one_minus_cos`] for lanes: both forms computed, the right one selected (same bits).
#[inline(always)]
pub(super) fn one_minus_cos_lanes<T: Real>(sin: T, cos: T) -> T {
    let positive = T::splat(0.0).lt_lanes(cos);
    T::select(positive, sin * sin / (cos + 1.0), T::splat(1.0) - cos)
}
