//! The radial-velocity model: v(t) = Σ_companions K [cos(ν + ω) + e cos ω] + γ_instrument +
//! trend · (t − t_ref), evaluated at one time or over slices without allocating.

use crate::kepler::{
    eccentric_anomaly_reduced, true_anomaly_cos_sin_prepared, Eccentricity, TWO_PI,
};
use crate::orbit::{phase_cycles_with_frequency, OrbitalElements};

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
    frequency: f64,
    time_of_periastron: f64,
    eccentricity: Eccentricity,
    sqrt_one_minus_e2: f64,
    k_cos_omega: f64,
    k_sin_omega: f64,
    k_e_cos_omega: f64,
}

impl PreparedCompanion {
    fn new(elements: &OrbitalElements) -> Self {
        let k = elements.semi_amplitude();
        let (sin_w, cos_w) = libm::sincos(elements.omega());
        let e = elements.eccentricity().value();
        PreparedCompanion {
            frequency: 1.0 / elements.period(),
            time_of_periastron: elements.time_of_periastron(),
            eccentricity: elements.eccentricity(),
            sqrt_one_minus_e2: libm::sqrt((1.0 - e) * (1.0 + e)),
            k_cos_omega: k * cos_w,
            k_sin_omega: k * sin_w,
            k_e_cos_omega: k * e * cos_w,
        }
    }

    /// K [cos(ν + ω) + e cos ω] = K cos ω cos ν − K sin ω sin ν + K e cos ω.
    #[inline(always)]
    fn velocity(&self, time: f64) -> f64 {
        let mean_anomaly =
            TWO_PI * phase_cycles_with_frequency(time, self.frequency, self.time_of_periastron);
        let anomaly = eccentric_anomaly_reduced(mean_anomaly, self.eccentricity);
        let (cos_nu, sin_nu) = true_anomaly_cos_sin_prepared(
            &anomaly,
            self.eccentricity.value(),
            self.sqrt_one_minus_e2,
        );
        self.k_cos_omega * cos_nu - self.k_sin_omega * sin_nu + self.k_e_cos_omega
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
        for ((slot, &time), &instrument) in out.iter_mut().zip(times).zip(instruments) {
            *slot = self.keplerian_velocity(time)
                + self.offsets[instrument]
                + self.trend * (time - self.reference_time);
        }
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
        for (slot, &time) in out.iter_mut().zip(times) {
            *slot =
                self.keplerian_velocity(time) + gamma + self.trend * (time - self.reference_time);
        }
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
