//! The benchmark workload shared by the native and wasm builds: deterministic (M, e) inputs and
//! [`solve_all`], the solver over many pairs on the widest lanes the processor offers.

use rand::{RngExt, SeedableRng};
use rand_xoshiro::Xoshiro256PlusPlus;

use super::*;

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

/// How many independent solves [`solve_all`] interleaves, so that the processor overlaps their
/// long dependency chains (divisions, square root, sine and cosine): two SSE2 registers of two
/// lanes each.
pub(super) const SOLVE_LANES: usize = 4;

/// The lane count of [`solve_all`] on x86-64 processors with AVX2: two 256-bit registers of four.
#[cfg(target_arch = "x86_64")]
pub(super) const SOLVE_LANES_AVX2: usize = 8;

/// Solves Kepler's equation for every (M, e) pair of `inputs` and returns the sum of the
/// eccentric anomalies (added in input order), a checksum that keeps the optimiser from removing
/// the work. Pairs with an eccentricity outside [0, 1) contribute NaN (so the checksum becomes
/// NaN) instead of panicking. Each E is bit for bit the value of [`eccentric_anomaly`].
///
/// On x86-64 processors with AVX2 or AVX-512F the same code runs with wider registers (detected
/// at run time);
/// the lanes still perform only correctly rounded IEEE operations without fused multiply–add,
/// so the bits do not change.
pub fn solve_all(inputs: &[(f64, f64)]) -> f64 {
    #[cfg(target_arch = "x86_64")]
    {
        if std::is_x86_feature_detected!("avx512f") {
            // SAFETY: the processor supports AVX-512F, checked just above.
            return unsafe { solve_all_avx512(inputs) };
        }
        if std::is_x86_feature_detected!("avx2") {
            // SAFETY: the processor supports AVX2, checked just above.
            return unsafe { solve_all_avx2(inputs) };
        }
    }
    solve_all_lanes::<SOLVE_LANES>(inputs)
}

/// [`solve_all_lanes`] compiled for AVX-512F: eight lanes in one 512-bit register.
///
/// # Safety
/// The processor must support AVX-512F.
#[cfg(target_arch = "x86_64")]
#[target_feature(enable = "avx512f")]
pub(super) unsafe fn solve_all_avx512(inputs: &[(f64, f64)]) -> f64 {
    solve_all_lanes::<SOLVE_LANES_AVX2>(inputs)
}

/// [`solve_all_lanes`] compiled for AVX2.
///
/// # Safety
/// The processor must support AVX2.
#[cfg(target_arch = "x86_64")]
#[target_feature(enable = "avx2")]
pub(super) unsafe fn solve_all_avx2(inputs: &[(f64, f64)]) -> f64 {
    solve_all_lanes::<SOLVE_LANES_AVX2>(inputs)
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
