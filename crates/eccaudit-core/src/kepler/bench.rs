//! The benchmark workload shared by the native and wasm builds: deterministic (M, e) inputs and
//! [`solve_all`], the solver over many pairs on the widest lanes the processor offers.

use rand::{RngExt, SeedableRng};
use rand_xoshiro::Xoshiro256PlusPlus;

use super::*;
use crate::lanes::{self, Isa, Kernel};

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

/// The branch-free common path of [`eccentric_anomaly`] for raw (M, e) pairs (one value or
/// several lanes): E ∈ [0, 2π) and whether it is valid. It is false for an eccentricity outside
/// [0, 1), |M| beyond the Cody–Waite range, NaN, or one of the rare cases of
/// [`solve_nonnegative`]; the caller then uses [`eccentric_anomaly`] (whose common path performs
/// exactly the same operations, so the bits agree).
#[inline(always)]
pub(super) fn eccentric_anomaly_fast<T: Real>(mean_anomaly: T, e: T) -> (T, T::Mask) {
    let e_valid = e.ge(0.0) & e.lt(1.0);
    let e = T::select(e_valid, e, T::splat(0.0));
    let m_in_range = mean_anomaly.abs().lt(CODY_WAITE_LIMIT);
    let reduced = cody_waite_signed(mean_anomaly);
    let step = markley_step(reduced.abs(), e);
    let (angle, _, _) = rotate_by_correction(&step);
    let ok = e_valid & m_in_range & step.usable & step.d5.abs().lt(TAYLOR_DELTA_LIMIT);
    (wrap_negative(reduced.unit_with_sign() * angle), ok)
}

/// [`eccentric_anomaly`] for a raw (M, e) pair; NaN for an eccentricity outside [0, 1).
#[inline]
pub(super) fn eccentric_anomaly_or_nan(mean_anomaly: f64, e: f64) -> f64 {
    match Eccentricity::new(e) {
        Ok(eccentricity) => eccentric_anomaly(mean_anomaly, eccentricity),
        Err(_) => f64::NAN,
    }
}

/// How many independent solves [`solve_all`] interleaves without AVX, so that the processor
/// overlaps their long dependency chains (divisions, square root, sine and cosine): two SSE2
/// registers of two lanes each.
pub(super) const PORTABLE_LANES: usize = 4;

/// The lane count of [`solve_all`] with AVX2 (two 256-bit registers of four) and with AVX-512F
/// (one 512-bit register; measured no faster with 16).
pub(super) const WIDE_LANES: usize = 8;

/// Solves Kepler's equation for every (M, e) pair of `inputs` and returns the sum of the
/// eccentric anomalies (added in input order), a checksum that keeps the optimiser from removing
/// the work. Pairs with an eccentricity outside [0, 1) contribute NaN (so the checksum becomes
/// NaN) instead of panicking. Each E is bit for bit the value of [`eccentric_anomaly`].
///
/// Runs on the widest instruction set the processor offers ([`crate::lanes::dispatch`]); the
/// lanes perform only correctly rounded IEEE operations without fused multiply–add, so the bits
/// do not change.
pub fn solve_all(inputs: &[(f64, f64)]) -> f64 {
    lanes::dispatch(SolveAll { inputs })
}

/// [`solve_all`] compiled for `isa` (when the processor offers it; for the tests of every path).
#[cfg(test)]
pub(super) fn solve_all_on(isa: Isa, inputs: &[(f64, f64)]) -> f64 {
    lanes::dispatch_on(isa, SolveAll { inputs })
}

/// [`solve_all_lanes`] as a lane kernel.
struct SolveAll<'a> {
    inputs: &'a [(f64, f64)],
}

impl Kernel for SolveAll<'_> {
    type Output = f64;

    #[inline(always)]
    fn run(self, isa: Isa) -> f64 {
        match isa {
            Isa::Portable => solve_all_lanes::<PORTABLE_LANES>(self.inputs),
            Isa::Avx2 | Isa::Avx512 => solve_all_lanes::<WIDE_LANES>(self.inputs),
        }
    }
}

/// [`solve_all`] with `N` lanes.
#[inline(always)]
pub(super) fn solve_all_lanes<const N: usize>(inputs: &[(f64, f64)]) -> f64 {
    let mut sum = 0.0;
    let mut chunks = inputs.chunks_exact(N);
    for chunk in &mut chunks {
        let mean_anomalies = Lanes(core::array::from_fn(|i| chunk[i].0));
        let eccentricities = Lanes(core::array::from_fn(|i| chunk[i].1));
        let (Lanes(mut angles), valid) =
            eccentric_anomaly_fast::<Lanes<N>>(mean_anomalies, eccentricities);
        if !valid.all() {
            for (i, (angle, &(mean_anomaly, e))) in angles.iter_mut().zip(chunk).enumerate() {
                if !valid.lane(i) {
                    *angle = eccentric_anomaly_or_nan(mean_anomaly, e);
                }
            }
        }
        for angle in angles {
            sum += angle;
        }
    }
    for &(mean_anomaly, e) in chunks.remainder() {
        sum += eccentric_anomaly_or_nan(mean_anomaly, e);
    }
    sum
}
