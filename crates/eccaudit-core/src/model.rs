//! The radial-velocity model: v(t) = Σ_companions K [cos(ν + ω) + e cos ω] + γ_instrument +
//! trend · (t − t_ref), evaluated at one time or over slices without allocating.
//!
//! One evaluator computes every companion's true anomaly at many epochs (`keplerian.rs`, on the
//! Kepler solver's lanes); it serves both forms of the model: [`RvModel`] (elements with the
//! time of periastron, absolute times) and [`ParameterModel`] (the fit's parameter vector with
//! the mean longitude at a reference epoch; `parameters.rs`), which the least-squares problem,
//! the posterior and the injection engine share.

mod keplerian;
pub mod parameters;

use keplerian::{FromPeriastron, Keplerian};
pub use parameters::{
    convert_coordinates, decode_companion, encode_companion, keplerian_shape, DecodedCompanion,
    EccentricityCoordinates, ElementsAtEpoch, ParameterLayout, ParameterModel, MAX_ECCENTRICITY,
};

use crate::lanes::Isa;
use crate::orbit::OrbitalElements;

/// Errors of model construction and evaluation.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum ModelError {
    /// An instrument index has no offset γ.
    #[error(
        "instrument index {index} has no offset (the model has {n_instruments} instrument(s))"
    )]
    InstrumentOutOfRange {
        /// The index asked for.
        index: usize,
        /// How many offsets the model holds.
        n_instruments: usize,
    },
    /// Two slices that must have equal lengths do not.
    #[error("{what}: expected {expected} values, got {found}")]
    LengthMismatch {
        /// Which slice.
        what: &'static str,
        /// The length required.
        expected: usize,
        /// The length given.
        found: usize,
    },
    /// A model parameter must be finite.
    #[error("{name} must be a finite number, got {value}")]
    NotFinite {
        /// Which parameter.
        name: &'static str,
        /// The rejected value.
        value: f64,
    },
    /// The model needs at least one instrument offset.
    #[error("the model needs at least one instrument offset")]
    NoInstrument,
}

/// One companion with the constants of its velocity term precomputed.
#[derive(Debug, Clone, Copy, PartialEq)]
struct PreparedCompanion {
    keplerian: Keplerian<FromPeriastron>,
    k_cos_omega: f64,
    k_sin_omega: f64,
    k_e_cos_omega: f64,
}

impl PreparedCompanion {
    fn new(elements: &OrbitalElements) -> Self {
        let k = elements.semi_amplitude();
        let (sin_w, cos_w) = libm::sincos(elements.omega());
        let e = elements.eccentricity().value();
        let phase = FromPeriastron {
            frequency: 1.0 / elements.period(),
            time_of_periastron: elements.time_of_periastron(),
        };
        PreparedCompanion {
            keplerian: Keplerian::new(phase, elements.eccentricity()),
            k_cos_omega: k * cos_w,
            k_sin_omega: k * sin_w,
            k_e_cos_omega: k * e * cos_w,
        }
    }

    /// K [cos(ν + ω) + e cos ω] = K cos ω cos ν − K sin ω sin ν + K e cos ω, from (cos ν, sin ν).
    #[inline(always)]
    fn velocity_from(&self, cos_nu: f64, sin_nu: f64) -> f64 {
        self.k_cos_omega * cos_nu - self.k_sin_omega * sin_nu + self.k_e_cos_omega
    }

    /// [`Self::velocity_from`] at `time`.
    #[inline(always)]
    fn velocity(&self, time: f64) -> f64 {
        let (cos_nu, sin_nu) = self.keplerian.true_anomaly(time);
        self.velocity_from(cos_nu, sin_nu)
    }
}

/// A radial-velocity model: Keplerian companions, one velocity offset γ per instrument
/// (indexed 0, 1, …), and a linear trend [m/s/d] about the reference time t_ref [d].
#[derive(Debug, Clone, PartialEq)]
pub struct RvModel {
    elements: Vec<OrbitalElements>,
    prepared: Vec<PreparedCompanion>,
    offsets: Vec<f64>,
    trend: f64,
    reference_time: f64,
}

impl RvModel {
    /// Builds a model. `offsets[i]` is γ of instrument i [m/s] (at least one); `trend` is in
    /// m/s per day; `reference_time` [d] is where the trend term vanishes. Zero companions are
    /// allowed (a constant-plus-trend model).
    pub fn new(
        companions: Vec<OrbitalElements>,
        offsets: Vec<f64>,
        trend: f64,
        reference_time: f64,
    ) -> Result<Self, ModelError> {
        if offsets.is_empty() {
            return Err(ModelError::NoInstrument);
        }
        if let Some(&value) = offsets.iter().find(|v| !v.is_finite()) {
            return Err(ModelError::NotFinite {
                name: "instrument offset gamma",
                value,
            });
        }
        if !trend.is_finite() {
            return Err(ModelError::NotFinite {
                name: "trend",
                value: trend,
            });
        }
        if !reference_time.is_finite() {
            return Err(ModelError::NotFinite {
                name: "reference time",
                value: reference_time,
            });
        }
        let prepared = companions.iter().map(PreparedCompanion::new).collect();
        Ok(RvModel {
            elements: companions,
            prepared,
            offsets,
            trend,
            reference_time,
        })
    }

    /// The companions' elements.
    pub fn companions(&self) -> &[OrbitalElements] {
        &self.elements
    }

    /// The instrument offsets γ [m/s].
    pub fn offsets(&self) -> &[f64] {
        &self.offsets
    }

    /// The linear trend [m/s/d].
    pub fn trend(&self) -> f64 {
        self.trend
    }

    /// The reference time t_ref [d] of the trend.
    pub fn reference_time(&self) -> f64 {
        self.reference_time
    }

    /// Σ of the companions' Keplerian velocities at `time` [m/s], without offset or trend.
    #[inline]
    pub fn keplerian_velocity(&self, time: f64) -> f64 {
        self.prepared.iter().map(|c| c.velocity(time)).sum()
    }

    /// Fills `out[i]` with the model velocity at `times[i]` with offset `offset_at(i)`, the
    /// companions' velocities evaluated by [`Keplerian::for_each_group_on`] on `isa`; the
    /// lengths are equal (checked by the callers). Each sum is formed in the order of
    /// [`Self::velocity`] (companions in order from the same zero, then γ, then the trend), so
    /// every value has exactly the bits of the point evaluation.
    #[inline]
    fn fill_velocities_on(
        &self,
        isa: Isa,
        times: &[f64],
        out: &mut [f64],
        offset_at: impl Fn(usize) -> f64,
    ) {
        // The scalar path sums with `Iterator::sum`; start from the same zero it starts from.
        let zero: f64 = core::iter::empty::<f64>().sum();
        out.fill(zero);
        for companion in &self.prepared {
            companion
                .keplerian
                .for_each_group_on(isa, times, |start, cos_nu, sin_nu| {
                    let group = &mut out[start..start + cos_nu.len()];
                    for ((slot, &cos), &sin) in group.iter_mut().zip(cos_nu).zip(sin_nu) {
                        *slot += companion.velocity_from(cos, sin);
                    }
                });
        }
        for (i, (slot, &time)) in out.iter_mut().zip(times).enumerate() {
            *slot = *slot + offset_at(i) + self.trend * (time - self.reference_time);
        }
    }

    /// Full model velocity [m/s] at `time` [d] for instrument `instrument`.
    pub fn velocity(&self, time: f64, instrument: usize) -> Result<f64, ModelError> {
        let gamma = self.offset(instrument)?;
        Ok(self.keplerian_velocity(time) + gamma + self.trend * (time - self.reference_time))
    }

    fn offset(&self, instrument: usize) -> Result<f64, ModelError> {
        self.offsets
            .get(instrument)
            .copied()
            .ok_or(ModelError::InstrumentOutOfRange {
                index: instrument,
                n_instruments: self.offsets.len(),
            })
    }

    /// Fills `out[i]` with the model velocity at `times[i]` for instrument `instruments[i]`.
    /// Checks lengths and instrument indices first; the loop itself allocates nothing.
    pub fn velocities(
        &self,
        times: &[f64],
        instruments: &[usize],
        out: &mut [f64],
    ) -> Result<(), ModelError> {
        check_length("instrument indices", times.len(), instruments.len())?;
        check_length("output buffer", times.len(), out.len())?;
        if let Some(&index) = instruments.iter().find(|&&i| i >= self.offsets.len()) {
            return Err(ModelError::InstrumentOutOfRange {
                index,
                n_instruments: self.offsets.len(),
            });
        }
        // Indices were checked above, so the lookup cannot fail.
        self.fill_velocities_on(Isa::detected(), times, out, |i| {
            self.offsets[instruments[i]]
        });
        Ok(())
    }

    /// Fills `out[i]` with the model velocity at `times[i]`, all for one instrument.
    pub fn velocities_one_instrument(
        &self,
        times: &[f64],
        instrument: usize,
        out: &mut [f64],
    ) -> Result<(), ModelError> {
        check_length("output buffer", times.len(), out.len())?;
        let gamma = self.offset(instrument)?;
        self.fill_velocities_on(Isa::detected(), times, out, |_| gamma);
        Ok(())
    }
}

fn check_length(what: &'static str, expected: usize, found: usize) -> Result<(), ModelError> {
    if expected == found {
        Ok(())
    } else {
        Err(ModelError::LengthMismatch {
            what,
            expected,
            found,
        })
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use approx::assert_relative_eq;

    fn one_companion_model() -> RvModel {
        let elements = OrbitalElements::new(4.2, 55.0, 0.3, 0.7, 100.0).unwrap();
        RvModel::new(vec![elements], vec![-3.0, 12.0], 0.5, 110.0).unwrap()
    }

    #[test]
    fn lane_slice_evaluations_give_the_bits_of_point_evaluations() {
        // The lane paths (every instruction set and group size, and the run-time dispatch) must
        // reproduce the one-time-at-a-time model bit for bit: ordinary times, a companion with e = 0.999999
        // sampled just after periastron (mean anomalies 1e-9 to 1e-3), a NaN time (a lane that
        // falls back to the scalar path), and the scalar remainder.
        let near_parabolic = OrbitalElements::new(50.0, 20.0, 0.999_999, 2.0, 1000.0).unwrap();
        let ordinary = OrbitalElements::new(4.2, 55.0, 0.3, 0.7, 100.0).unwrap();
        let model =
            RvModel::new(vec![ordinary, near_parabolic], vec![-3.0, 12.0], 0.5, 110.0).unwrap();
        let n = 1003;
        let times: Vec<f64> = (0..n)
            .map(|i| {
                if i % 7 == 3 {
                    // Just after a periastron passage of the near-parabolic companion.
                    let offsets = [1e-9, 1e-7, 1e-5, 1e-3];
                    1000.0 + 50.0 * (i / 100) as f64 + 50.0 * offsets[i % 4]
                } else {
                    999.9 + 0.37 * i as f64
                }
            })
            .collect();
        let mut times = times;
        times[5] = f64::NAN;
        let same = |a: f64, b: f64| a.to_bits() == b.to_bits() || (a.is_nan() && b.is_nan());
        let instruments: Vec<usize> = (0..n).map(|i| i % 2).collect();
        let expected: Vec<f64> = (0..n)
            .map(|i| model.velocity(times[i], instruments[i]).unwrap())
            .collect();
        let offset_at = |i: usize| model.offsets()[instruments[i]];
        let mut dispatched = vec![0.0; n];
        model
            .velocities(&times, &instruments, &mut dispatched)
            .unwrap();
        for i in 0..n {
            assert!(same(dispatched[i], expected[i]), "time {}", times[i]);
        }
        // Every instruction set this processor offers, at lengths that use every group size.
        for isa in Isa::available() {
            for len in [1, 7, 12, 30, 33, n] {
                let mut lanes = vec![0.0; len];
                model.fill_velocities_on(isa, &times[..len], &mut lanes, offset_at);
                for i in 0..len {
                    assert!(same(lanes[i], expected[i]), "{isa:?}, time {}", times[i]);
                }
            }
        }
        let mut one = vec![0.0; n];
        model
            .velocities_one_instrument(&times, 1, &mut one)
            .unwrap();
        for i in 0..n {
            let point = model.velocity(times[i], 1).unwrap();
            assert!(same(one[i], point), "time {}", times[i]);
        }
    }

    #[test]
    fn slice_and_point_evaluations_agree() {
        // Same formula on both paths (self-consistency; no external source needed).
        let model = one_companion_model();
        let times = [100.0, 101.3, 107.9, 2_459_000.25];
        let instruments = [0, 1, 1, 0];
        let mut out = [0.0; 4];
        model.velocities(&times, &instruments, &mut out).unwrap();
        for i in 0..4 {
            assert_relative_eq!(
                out[i],
                model.velocity(times[i], instruments[i]).unwrap(),
                epsilon = 0.0
            );
        }
        let mut one = [0.0; 4];
        model
            .velocities_one_instrument(&times, 1, &mut one)
            .unwrap();
        assert_relative_eq!(one[1], out[1], epsilon = 0.0);
    }

    #[test]
    fn errors_instead_of_panics() {
        let model = one_companion_model();
        assert!(matches!(
            model.velocity(1.0, 2),
            Err(ModelError::InstrumentOutOfRange {
                index: 2,
                n_instruments: 2
            })
        ));
        let mut out = [0.0; 1];
        assert!(matches!(
            model.velocities(&[1.0, 2.0], &[0, 0], &mut out),
            Err(ModelError::LengthMismatch { .. })
        ));
        assert!(RvModel::new(vec![], vec![], 0.0, 0.0).is_err());
        assert!(RvModel::new(vec![], vec![f64::NAN], 0.0, 0.0).is_err());
    }

    #[test]
    fn matches_orbital_elements_velocity() {
        // The model's precomputed path against the direct per-element formula
        // K [cos(ν + ω) + e cos ω] (Murray & Dermott 1999, eq. 2.123 — from memory).
        let model = one_companion_model();
        let elements = model.companions()[0];
        for i in 0..50 {
            let t = 95.0 + 0.37 * i as f64;
            let expected = elements.radial_velocity(t) - 3.0 + 0.5 * (t - 110.0);
            assert_relative_eq!(model.velocity(t, 0).unwrap(), expected, epsilon = 1e-12);
        }
    }
}
