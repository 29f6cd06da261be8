//! Arithmetic on one `f64` or on a small array of independent `f64` lanes, so that the Kepler
//! solver is written once and runs either one solve at a time or several side by side.
//!
//! Every lane operation is the same correctly rounded IEEE operation as the scalar one (+, −, ×,
//! ÷, √, comparisons, bit operations; never a fused multiply–add), so a lane gives exactly the
//! bits of the scalar code, on any platform, whether or not the compiler turns the lane loops
//! into SIMD instructions.

use core::ops::{Add, BitAnd, Div, Mul, Neg, Sub};

/// A floating-point value: one `f64` or several lanes. Mixed operations with a plain `f64`
/// constant apply the constant to every lane.
pub(crate) trait Real:
    Copy
    + Add<Output = Self>
    + Sub<Output = Self>
    + Mul<Output = Self>
    + Div<Output = Self>
    + Neg<Output = Self>
    + Add<f64, Output = Self>
    + Sub<f64, Output = Self>
    + Mul<f64, Output = Self>
{
    /// A per-lane truth value.
    type Mask: Copy + BitAnd<Output = Self::Mask>;

    /// The constant `x` in every lane.
    fn splat(x: f64) -> Self;
    /// Correctly rounded square root.
    fn sqrt(self) -> Self;
    /// |x|.
    fn abs(self) -> Self;
    /// copysign(1.0, x): ±1 with the sign bit of x.
    fn unit_with_sign(self) -> Self;
    /// `f64::clamp(lo, hi)` for non-NaN lanes (a NaN lane gives an unspecified value).
    fn clamp(self, lo: f64, hi: f64) -> Self;
    /// x < bound (false for NaN).
    fn lt(self, bound: f64) -> Self::Mask;
    /// x ≥ bound (false for NaN).
    fn ge(self, bound: f64) -> Self::Mask;
    /// x ≤ bound (false for NaN).
    fn le(self, bound: f64) -> Self::Mask;
    /// x < y lane by lane (false for NaN).
    fn lt_lanes(self, other: Self) -> Self::Mask;
    /// Lane-wise `if mask { if_true } else { if_false }`.
    fn select(mask: Self::Mask, if_true: Self, if_false: Self) -> Self;
    /// Applies `f` to the bit pattern of every lane.
    fn map_bits(self, f: impl Fn(u64) -> u64) -> Self;
    /// Applies `f` to the bit patterns of three values, lane by lane.
    fn zip3_bits(a: Self, b: Self, c: Self, f: impl Fn(u64, u64, u64) -> u64) -> Self;
}

impl Real for f64 {
    type Mask = bool;

    #[inline(always)]
    fn splat(x: f64) -> Self {
        x
    }
    #[inline(always)]
    fn sqrt(self) -> Self {
        libm::sqrt(self)
    }
    #[inline(always)]
    fn abs(self) -> Self {
        f64::abs(self)
    }
    #[inline(always)]
    fn unit_with_sign(self) -> Self {
        f64::copysign(1.0, self)
    }
    #[inline(always)]
    fn clamp(self, lo: f64, hi: f64) -> Self {
        f64::clamp(self, lo, hi)
    }
    #[inline(always)]
    fn lt(self, bound: f64) -> bool {
        self < bound
    }
    #[inline(always)]
    fn ge(self, bound: f64) -> bool {
        self >= bound
    }
    #[inline(always)]
    fn le(self, bound: f64) -> bool {
        self <= bound
    }
    #[inline(always)]
    fn lt_lanes(self, other: Self) -> bool {
        self < other
    }
    #[inline(always)]
    fn select(mask: bool, if_true: Self, if_false: Self) -> Self {
        if mask {
            if_true
        } else {
            if_false
        }
    }
    #[inline(always)]
    fn map_bits(self, f: impl Fn(u64) -> u64) -> Self {
        f64::from_bits(f(self.to_bits()))
    }
    #[inline(always)]
    fn zip3_bits(a: Self, b: Self, c: Self, f: impl Fn(u64, u64, u64) -> u64) -> Self {
        f64::from_bits(f(a.to_bits(), b.to_bits(), c.to_bits()))
    }
}

/// `N` independent `f64` lanes; every operation is a loop over the lanes.
#[derive(Debug, Clone, Copy, PartialEq)]
pub(crate) struct Lanes<const N: usize>(pub(crate) [f64; N]);

/// Per-lane truth values of [`Lanes`] as all-ones / all-zeros words (the shape SIMD compares
/// produce).
#[derive(Debug, Clone, Copy, PartialEq)]
pub(crate) struct LaneMask<const N: usize>(pub(crate) [u64; N]);

impl<const N: usize> LaneMask<N> {
    /// Whether every lane is true.
    #[inline(always)]
    pub(crate) fn all(self) -> bool {
        self.0.iter().fold(u64::MAX, |acc, &m| acc & m) == u64::MAX
    }

    /// Whether lane `i` is true.
    #[inline(always)]
    pub(crate) fn lane(self, i: usize) -> bool {
        self.0[i] != 0
    }
}

impl<const N: usize> BitAnd for LaneMask<N> {
    type Output = Self;
    #[inline(always)]
    fn bitand(self, rhs: Self) -> Self {
        LaneMask(core::array::from_fn(|i| self.0[i] & rhs.0[i]))
    }
}

#[inline(always)]
fn mask_word(condition: bool) -> u64 {
    (condition as u64).wrapping_neg()
}

macro_rules! lane_binary {
    ($trait:ident, $method:ident, $op:tt) => {
        impl<const N: usize> $trait for Lanes<N> {
            type Output = Self;
            #[inline(always)]
            fn $method(self, rhs: Self) -> Self {
                Lanes(core::array::from_fn(|i| self.0[i] $op rhs.0[i]))
            }
        }
        impl<const N: usize> $trait<f64> for Lanes<N> {
            type Output = Self;
            #[inline(always)]
            fn $method(self, rhs: f64) -> Self {
                Lanes(core::array::from_fn(|i| self.0[i] $op rhs))
            }
        }
    };
}

lane_binary!(Add, add, +);
lane_binary!(Sub, sub, -);
lane_binary!(Mul, mul, *);
lane_binary!(Div, div, /);

impl<const N: usize> Neg for Lanes<N> {
    type Output = Self;
    #[inline(always)]
    fn neg(self) -> Self {
        Lanes(core::array::from_fn(|i| -self.0[i]))
    }
}

impl<const N: usize> Real for Lanes<N> {
    type Mask = LaneMask<N>;

    #[inline(always)]
    fn splat(x: f64) -> Self {
        Lanes([x; N])
    }
    #[inline(always)]
    fn sqrt(self) -> Self {
        // `f64::sqrt` is the IEEE 754 square root (correctly rounded, so the same bits as
        // `libm::sqrt` on every platform; it lowers to `sqrtpd` / `f64.sqrt`, not to a system
        // library); unlike the `libm` call it lets the lanes become one SIMD instruction.
        Lanes(core::array::from_fn(|i| f64::sqrt(self.0[i])))
    }
    #[inline(always)]
    fn abs(self) -> Self {
        Lanes(core::array::from_fn(|i| f64::abs(self.0[i])))
    }
    #[inline(always)]
    fn unit_with_sign(self) -> Self {
        Lanes(core::array::from_fn(|i| f64::copysign(1.0, self.0[i])))
    }
    #[inline(always)]
    fn clamp(self, lo: f64, hi: f64) -> Self {
        // max/min shapes that map onto SIMD max/min; equal to f64::clamp for non-NaN lanes.
        Lanes(core::array::from_fn(|i| {
            let x = self.0[i];
            let x = if x < lo { lo } else { x };
            if x > hi {
                hi
            } else {
                x
            }
        }))
    }
    #[inline(always)]
    fn lt(self, bound: f64) -> LaneMask<N> {
        LaneMask(core::array::from_fn(|i| mask_word(self.0[i] < bound)))
    }
    #[inline(always)]
    fn ge(self, bound: f64) -> LaneMask<N> {
        LaneMask(core::array::from_fn(|i| mask_word(self.0[i] >= bound)))
    }
    #[inline(always)]
    fn le(self, bound: f64) -> LaneMask<N> {
        LaneMask(core::array::from_fn(|i| mask_word(self.0[i] <= bound)))
    }
    #[inline(always)]
    fn lt_lanes(self, other: Self) -> LaneMask<N> {
        LaneMask(core::array::from_fn(|i| mask_word(self.0[i] < other.0[i])))
    }
    #[inline(always)]
    fn select(mask: LaneMask<N>, if_true: Self, if_false: Self) -> Self {
        Lanes(core::array::from_fn(|i| {
            f64::from_bits(
                (if_true.0[i].to_bits() & mask.0[i]) | (if_false.0[i].to_bits() & !mask.0[i]),
            )
        }))
    }
    #[inline(always)]
    fn map_bits(self, f: impl Fn(u64) -> u64) -> Self {
        Lanes(core::array::from_fn(|i| {
            f64::from_bits(f(self.0[i].to_bits()))
        }))
    }
    #[inline(always)]
    fn zip3_bits(a: Self, b: Self, c: Self, f: impl Fn(u64, u64, u64) -> u64) -> Self {
        Lanes(core::array::from_fn(|i| {
            f64::from_bits(f(a.0[i].to_bits(), b.0[i].to_bits(), c.0[i].to_bits()))
        }))
    }
}
