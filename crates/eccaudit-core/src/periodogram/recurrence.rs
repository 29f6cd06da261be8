//! The sums on a uniform grid by a trigonometric recurrence (Press & Rybicki 1989): several
//! frequencies side by side in SIMD-friendly lanes, phases recomputed exactly every
//! [`RECURRENCE_RESTART`] frequencies.

use super::*;
use crate::lanes::{self, Isa, Kernel};

/// Number of grid frequencies after which [`grid_sums`] recomputes the phases exactly, bounding
/// the rounding drift of the recurrence to about one ulp per rotation, here 512 / [`GRID_LANES`]
/// = 128 rotations (≲ 3e-14 in cos and sin). A multiple of [`GRID_LANES`].
pub(super) const RECURRENCE_RESTART: usize = 512;

/// Consecutive grid frequencies [`grid_sums`] carries side by side: independent accumulators
/// that the compiler can keep in SIMD registers.
pub(super) const GRID_LANES: usize = 4;

/// The sums of [`GRID_LANES`] consecutive frequencies, lane `l` for frequency k + l.
pub(super) struct LaneSums {
    pub(super) cos_sum: Lanes<GRID_LANES>,
    pub(super) sin_sum: Lanes<GRID_LANES>,
    pub(super) value_cos: Lanes<GRID_LANES>,
    pub(super) value_sin: Lanes<GRID_LANES>,
    pub(super) cos_cos: Lanes<GRID_LANES>,
    pub(super) sin_sin: Lanes<GRID_LANES>,
    pub(super) cos_sin: Lanes<GRID_LANES>,
}

impl LaneSums {
    pub(super) fn lane(&self, l: usize) -> FrequencySums {
        FrequencySums {
            cos_sum: self.cos_sum.0[l],
            sin_sum: self.sin_sum.0[l],
            value_cos: self.value_cos.0[l],
            value_sin: self.value_sin.0[l],
            cos_cos: self.cos_cos.0[l],
            sin_sin: self.sin_sin.0[l],
            cos_sin: self.cos_sin.0[l],
        }
    }
}

/// Calls `visit(sums)` with the sums of [`frequency_sums`] at every frequency
/// `frequencies[k]` = f_0 + k·`df` of a uniform grid, in order.
///
/// Method: trigonometric recurrence over the grid (Press & Rybicki 1989, ApJ 338, 277, Sect. 2,
/// as used in Press et al. 1992, Numerical Recipes, 2nd ed., §13.8, routine `period` — from
/// memory): cos and sin of 2π f_{k+L} t_i follow from those of 2π f_k t_i by one rotation through
/// 2π·L·df·t_i, for [`GRID_LANES`] = L frequencies carried side by side, so only one
/// `libm::sincos` per epoch and lane is needed for every [`RECURRENCE_RESTART`] frequencies,
/// where the phases are recomputed exactly. Each frequency's sums run over the epochs in order,
/// as in [`frequency_sums`], with which they agree to ~1e-13 relative.
///
/// Runs on the widest instruction set the processor offers ([`crate::lanes::dispatch`]); the
/// operations and their order are the same on every instruction set, so are the bits.
#[inline]
pub(super) fn grid_sums(
    epochs: &PreparedEpochs,
    df: f64,
    frequencies: &[f64],
    visit: impl FnMut(&FrequencySums),
) {
    grid_sums_on(Isa::detected(), epochs, df, frequencies, visit);
}

/// [`grid_sums`] compiled for `isa` (when the processor offers it).
#[inline]
pub(super) fn grid_sums_on(
    isa: Isa,
    epochs: &PreparedEpochs,
    df: f64,
    frequencies: &[f64],
    visit: impl FnMut(&FrequencySums),
) {
    lanes::dispatch_on(
        isa,
        GridSums {
            epochs,
            df,
            frequencies,
            visit,
        },
    );
}

/// [`grid_sums_portable`] as a lane kernel (its lane count, [`GRID_LANES`], is the same on every
/// instruction set).
struct GridSums<'a, V> {
    epochs: &'a PreparedEpochs,
    df: f64,
    frequencies: &'a [f64],
    visit: V,
}

impl<V: FnMut(&FrequencySums)> Kernel for GridSums<'_, V> {
    type Output = ();

    #[inline(always)]
    fn run(mut self, _isa: Isa) {
        grid_sums_portable(self.epochs, self.df, self.frequencies, &mut self.visit);
    }
}

/// The body of [`grid_sums`].
#[inline(always)]
pub(super) fn grid_sums_portable(
    epochs: &PreparedEpochs,
    df: f64,
    frequencies: &[f64],
    visit: &mut impl FnMut(&FrequencySums),
) {
    let n = epochs.shifted_times.len();
    let two_pi = 2.0 * core::f64::consts::PI;
    let mut cos = vec![[0.0; GRID_LANES]; n];
    let mut sin = vec![[0.0; GRID_LANES]; n];
    let (step_cos, step_sin): (Vec<f64>, Vec<f64>) = epochs
        .shifted_times
        .iter()
        .map(|&t| {
            let (s, c) = libm::sincos(two_pi * (GRID_LANES as f64 * df) * t);
            (c, s)
        })
        .unzip();
    let f_0 = frequencies.first().copied().unwrap_or(0.0);
    for block in (0..frequencies.len()).step_by(GRID_LANES) {
        if block % RECURRENCE_RESTART == 0 {
            // Lanes past the end of the grid continue it (their sums are not visited).
            let angular: [f64; GRID_LANES] = core::array::from_fn(|l| {
                two_pi
                    * frequencies
                        .get(block + l)
                        .copied()
                        .unwrap_or(f_0 + (block + l) as f64 * df)
            });
            for (i, &t) in epochs.shifted_times.iter().enumerate() {
                for l in 0..GRID_LANES {
                    (sin[i][l], cos[i][l]) = libm::sincos(angular[l] * t);
                }
            }
        }
        let zero = Lanes([0.0; GRID_LANES]);
        let mut sums = LaneSums {
            cos_sum: zero,
            sin_sum: zero,
            value_cos: zero,
            value_sin: zero,
            cos_cos: zero,
            sin_sin: zero,
            cos_sin: zero,
        };
        let states = cos.iter_mut().zip(sin.iter_mut());
        let constants = epochs.weights.iter().zip(&epochs.centred_values);
        let steps = step_cos.iter().zip(&step_sin);
        for (((cos, sin), (&w, &y)), (&step_cos, &step_sin)) in states.zip(constants).zip(steps) {
            let (c, s) = (Lanes(*cos), Lanes(*sin));
            let w_cos = c * w;
            let w_sin = s * w;
            sums.cos_sum = sums.cos_sum + w_cos;
            sums.sin_sum = sums.sin_sum + w_sin;
            sums.value_cos = sums.value_cos + w_cos * y;
            sums.value_sin = sums.value_sin + w_sin * y;
            sums.cos_cos = sums.cos_cos + w_cos * c;
            sums.sin_sin = sums.sin_sin + w_sin * s;
            sums.cos_sin = sums.cos_sin + w_cos * s;
            *cos = (c * step_cos - s * step_sin).0;
            *sin = (s * step_cos + c * step_sin).0;
        }
        for l in 0..GRID_LANES.min(frequencies.len() - block) {
            visit(&sums.lane(l));
        }
    }
}
