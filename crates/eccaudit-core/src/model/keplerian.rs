//! The one velocity evaluator: a companion's true anomaly (cos ν, sin ν) at many epochs, on the
//! Kepler solver's lanes, compiled for the widest instruction set the processor offers.
//!
//! Both parameterisations of the phase go through it: [`FromPeriastron`] (time of periastron
//! T_p, absolute times; [`super::RvModel`]) and [`FromEpoch`] (mean anomaly M₀ at a reference
//! epoch, times t − t_ref; the fit's and the posterior's [`super::ParameterModel`]). Each keeps
//! the arithmetic it always had, so each keeps its bits.

use crate::kepler::{
    eccentric_anomaly_reduced, eccentric_anomaly_reduced_fast, reduce_angle_signed,
    reduce_angle_signed_lanes, true_anomaly_cos_sin_lanes, true_anomaly_cos_sin_prepared,
    Eccentricity, TWO_PI,
};
use crate::lanes::{self, Isa, Kernel, LaneMask, Lanes};
use crate::orbit::phase_cycles_with_frequency;

/// How a companion's mean anomaly follows from the time the evaluator is given.
pub(crate) trait Phase: Copy {
    /// The mean anomaly M [rad] at `time`, reduced to [−π, π].
    fn mean_anomaly(&self, time: f64) -> f64;
    /// [`Self::mean_anomaly`] on lanes (the same operations, so the same bits) and the mask of
    /// the lanes this path covers; the others need [`Self::mean_anomaly`].
    fn mean_anomaly_lanes<const N: usize>(&self, times: Lanes<N>) -> (Lanes<N>, LaneMask<N>);
}

/// M = 2π · ((t − T_p) f reduced to the nearest cycle), for absolute times t [d].
#[derive(Debug, Clone, Copy, PartialEq)]
pub(crate) struct FromPeriastron {
    /// 1/P [1/d].
    pub(crate) frequency: f64,
    /// T_p [d].
    pub(crate) time_of_periastron: f64,
}

impl Phase for FromPeriastron {
    #[inline(always)]
    fn mean_anomaly(&self, time: f64) -> f64 {
        TWO_PI * phase_cycles_with_frequency(time, self.frequency, self.time_of_periastron)
    }

    #[inline(always)]
    fn mean_anomaly_lanes<const N: usize>(&self, times: Lanes<N>) -> (Lanes<N>, LaneMask<N>) {
        (
            Lanes(core::array::from_fn(|i| self.mean_anomaly(times.0[i]))),
            LaneMask([u64::MAX; N]),
        )
    }
}

/// M = M₀ + n (t − t_ref) reduced to [−π, π], for shifted times t − t_ref [d].
#[derive(Debug, Clone, Copy, PartialEq)]
pub(crate) struct FromEpoch {
    /// n = 2π/P [rad/d].
    pub(crate) mean_motion: f64,
    /// M₀ at t_ref [rad].
    pub(crate) mean_anomaly_at_reference: f64,
}

impl Phase for FromEpoch {
    #[inline(always)]
    fn mean_anomaly(&self, dt: f64) -> f64 {
        reduce_angle_signed(self.mean_anomaly_at_reference + self.mean_motion * dt)
    }

    #[inline(always)]
    fn mean_anomaly_lanes<const N: usize>(&self, dt: Lanes<N>) -> (Lanes<N>, LaneMask<N>) {
        reduce_angle_signed_lanes(dt * self.mean_motion + self.mean_anomaly_at_reference)
    }
}

/// Epochs solved side by side without AVX: two SSE2 registers on x86-64, four WebAssembly SIMD
/// registers in wasm (measured with `scripts/bench-reference-job.mjs`: 81 ms per reference trial
/// with 8 lanes, 93 ms with 4, 117 ms with 16).
#[cfg(not(target_arch = "wasm32"))]
const PORTABLE_LANES: usize = 4;
#[cfg(target_arch = "wasm32")]
const PORTABLE_LANES: usize = 8;

/// Epochs solved side by side with AVX2: two 256-bit registers.
const AVX2_LANES: usize = 8;

/// One companion's orbit shape: its phase and eccentricity, with √(1 − e²) precomputed.
#[derive(Debug, Clone, Copy, PartialEq)]
pub(crate) struct Keplerian<P> {
    phase: P,
    eccentricity: Eccentricity,
    e: f64,
    sqrt_one_minus_e2: f64,
}

impl<P: Phase> Keplerian<P> {
    /// The evaluator of one companion.
    pub(crate) fn new(phase: P, eccentricity: Eccentricity) -> Self {
        let e = eccentricity.value();
        Self {
            phase,
            eccentricity,
            e,
            sqrt_one_minus_e2: libm::sqrt((1.0 - e) * (1.0 + e)),
        }
    }

    /// The phase.
    pub(crate) fn phase(&self) -> &P {
        &self.phase
    }

    /// e.
    pub(crate) fn e(&self) -> f64 {
        self.e
    }

    /// √((1 − e)(1 + e)).
    pub(crate) fn sqrt_one_minus_e2(&self) -> f64 {
        self.sqrt_one_minus_e2
    }

    /// (cos ν, sin ν) at one epoch: Kepler's equation by [`eccentric_anomaly_reduced`]
    /// (Markley 1995) and the true anomaly from E without cancellation
    /// ([`crate::kepler::true_anomaly_cos_sin`]; Murray & Dermott 1999, eqs. 2.43–2.44).
    #[inline(always)]
    pub(crate) fn true_anomaly(&self, time: f64) -> (f64, f64) {
        let anomaly = eccentric_anomaly_reduced(self.phase.mean_anomaly(time), self.eccentricity);
        true_anomaly_cos_sin_prepared(&anomaly, self.e, self.sqrt_one_minus_e2)
    }

    /// Calls `visit(start, cos ν[start..start + len], sin ν[start..start + len])` for every
    /// group of `N` epochs of `times`, in order, on the solver's branch-free lane path; the last,
    /// partial group is padded with copies of its first epoch (their results are dropped).
    /// Lanes the fast path does not cover take [`Self::true_anomaly`], whose common path
    /// performs the same operations, so the values do not depend on the lane count.
    #[inline(always)]
    fn groups<const N: usize>(&self, times: &[f64], visit: &mut impl FnMut(usize, &[f64], &[f64])) {
        for (group, chunk) in times.chunks(N).enumerate() {
            let start = group * N;
            let t: Lanes<N> = Lanes(core::array::from_fn(|i| *chunk.get(i).unwrap_or(&chunk[0])));
            let (mean_anomaly, in_range) = self.phase.mean_anomaly_lanes(t);
            let (_, sin_e, cos_e, solved) = eccentric_anomaly_reduced_fast(mean_anomaly, self.e);
            let valid = solved & in_range;
            let (Lanes(mut cos_nu), Lanes(mut sin_nu)) =
                true_anomaly_cos_sin_lanes(sin_e, cos_e, self.e, self.sqrt_one_minus_e2);
            if !valid.all() {
                for (i, &time) in chunk.iter().enumerate() {
                    if !valid.lane(i) {
                        (cos_nu[i], sin_nu[i]) = self.true_anomaly(time);
                    }
                }
            }
            visit(start, &cos_nu[..chunk.len()], &sin_nu[..chunk.len()]);
        }
    }

    /// [`Self::groups`] with the lane count of `isa`, compiled for `isa` when the processor
    /// offers it (else for [`Isa::Portable`]); the groups' values are the same on every path.
    #[inline]
    pub(crate) fn for_each_group_on(
        &self,
        isa: Isa,
        times: &[f64],
        visit: impl FnMut(usize, &[f64], &[f64]),
    ) {
        lanes::dispatch_on(
            isa,
            Groups {
                keplerian: self,
                times,
                visit,
            },
        );
    }

    /// [`Self::for_each_group_on`] on the widest instruction set the processor offers.
    #[inline]
    pub(crate) fn for_each_group(&self, times: &[f64], visit: impl FnMut(usize, &[f64], &[f64])) {
        self.for_each_group_on(Isa::detected(), times, visit);
    }

    /// Calls `visit(i, cos ν_i, sin ν_i)` for every epoch, through [`Self::for_each_group`].
    #[inline]
    pub(crate) fn for_each(&self, times: &[f64], mut visit: impl FnMut(usize, f64, f64)) {
        self.for_each_group(times, |start, cos_nu, sin_nu| {
            for (i, (&cos, &sin)) in cos_nu.iter().zip(sin_nu).enumerate() {
                visit(start + i, cos, sin);
            }
        });
    }
}

/// [`Keplerian::groups`] as a lane kernel.
struct Groups<'a, P, V> {
    keplerian: &'a Keplerian<P>,
    times: &'a [f64],
    visit: V,
}

impl<P: Phase, V: FnMut(usize, &[f64], &[f64])> Kernel for Groups<'_, P, V> {
    type Output = ();

    #[inline(always)]
    fn run(mut self, isa: Isa) {
        let (keplerian, times, visit) = (self.keplerian, self.times, &mut self.visit);
        match isa {
            // One group for up to 32 epochs: four independent registers per operation keep the
            // solver's long dependency chains busy (measured: 20 % faster per log-density at 30
            // epochs than groups of 8; no faster at 12 or 100 epochs, where the padding or the
            // register pressure eat the gain).
            Isa::Avx512 => match times.len() {
                17..=32 => keplerian.groups::<32>(times, visit),
                9..=16 => keplerian.groups::<16>(times, visit),
                _ => keplerian.groups::<8>(times, visit),
            },
            Isa::Avx2 => keplerian.groups::<AVX2_LANES>(times, visit),
            Isa::Portable => keplerian.groups::<PORTABLE_LANES>(times, visit),
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn every_instruction_set_and_group_size_gives_the_bits_of_one_epoch_at_a_time() {
        // Both phases, ordinary and near-parabolic orbits (e = 0.98 just after periastron, where
        // the fast path hands lanes to the scalar solver), a NaN epoch and a far epoch (outside
        // the lane reduction's range), at lengths that exercise every group size and padding.
        let same = |a: f64, b: f64| a.to_bits() == b.to_bits() || (a.is_nan() && b.is_nan());
        let mut times: Vec<f64> = (0..70)
            .map(|i| -40.0 + 1.37 * i as f64 + 1e-4 * (i % 5) as f64)
            .collect();
        times[9] = f64::NAN;
        times[33] = 7.0e7;
        for e in [0.0, 0.3, 0.98] {
            let eccentricity = Eccentricity::new(e).unwrap();
            let epoch = Keplerian::new(
                FromEpoch {
                    mean_motion: TWO_PI / 11.3,
                    mean_anomaly_at_reference: -1.2,
                },
                eccentricity,
            );
            let periastron = Keplerian::new(
                FromPeriastron {
                    frequency: 1.0 / 11.3,
                    time_of_periastron: 2.5,
                },
                eccentricity,
            );
            for n in [1, 5, 8, 12, 16, 23, 32, 33, 70] {
                let times = &times[..n];
                for isa in Isa::available() {
                    let mut seen = 0;
                    epoch.for_each_group_on(isa, times, |start, cos, sin| {
                        for (i, (&c, &s)) in cos.iter().zip(sin).enumerate() {
                            let (c0, s0) = epoch.true_anomaly(times[start + i]);
                            assert!(same(c, c0) && same(s, s0), "{isa:?} n = {n} e = {e}");
                            seen += 1;
                        }
                    });
                    periastron.for_each_group_on(isa, times, |start, cos, sin| {
                        for (i, (&c, &s)) in cos.iter().zip(sin).enumerate() {
                            let (c0, s0) = periastron.true_anomaly(times[start + i]);
                            assert!(same(c, c0) && same(s, s0), "{isa:?} n = {n} e = {e}");
                            seen += 1;
                        }
                    });
                    assert_eq!(seen, 2 * n);
                }
            }
        }
    }
}
