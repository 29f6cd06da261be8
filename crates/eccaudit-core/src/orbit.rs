//! Orbital elements of one companion as seen in the star's radial velocity, their conversions
//! (mean anomaly at an epoch, √e cos ω / √e sin ω, e cos ω / e sin ω) and derived quantities
//! (mass function, minimum companion mass, a sin i).
//!
//! Units: time in days, velocity in m/s, angles in radians, masses in solar masses (nominal
//! GM_sun, see [`crate::constants`]), lengths in metres.

use core::f64::consts::PI;

use crate::constants::{GM_SUN, SECONDS_PER_DAY};
use crate::kepler::{
    eccentric_anomaly_reduced, true_anomaly_cos_sin, Eccentricity, KeplerError, TWO_PI,
};

/// Errors in orbital elements or in the inputs of derived quantities.
#[derive(Debug, Clone, Copy, PartialEq, thiserror::Error)]
pub enum OrbitError {
    /// The eccentricity is outside [0, 1).
    #[error(transparent)]
    Eccentricity(#[from] KeplerError),
    /// The period must be positive and finite.
    #[error("period must be a positive finite number of days, got {value}")]
    InvalidPeriod {
        /// The rejected period [d].
        value: f64,
    },
    /// The semi-amplitude must be finite and ≥ 0.
    #[error("semi-amplitude K must be a finite number >= 0 m/s, got {value}")]
    InvalidSemiAmplitude {
        /// The rejected semi-amplitude [m/s].
        value: f64,
    },
    /// A quantity that must be finite is not.
    #[error("{name} must be a finite number, got {value}")]
    NotFinite {
        /// Which quantity.
        name: &'static str,
        /// The rejected value.
        value: f64,
    },
    /// A mass must be positive and finite.
    #[error("{name} must be a positive finite number of solar masses, got {value}")]
    InvalidMass {
        /// Which mass.
        name: &'static str,
        /// The rejected value [M_sun].
        value: f64,
    },
    /// sin i must lie in (0, 1].
    #[error("sin i must satisfy 0 < sin i <= 1, got {value}")]
    InvalidSinInclination {
        /// The rejected value.
        value: f64,
    },
}

fn check_finite(name: &'static str, value: f64) -> Result<f64, OrbitError> {
    if value.is_finite() {
        Ok(value)
    } else {
        Err(OrbitError::NotFinite { name, value })
    }
}

fn check_period(period: f64) -> Result<f64, OrbitError> {
    if period.is_finite() && period > 0.0 {
        Ok(period)
    } else {
        Err(OrbitError::InvalidPeriod { value: period })
    }
}

fn check_mass(name: &'static str, value: f64) -> Result<f64, OrbitError> {
    if value.is_finite() && value > 0.0 {
        Ok(value)
    } else {
        Err(OrbitError::InvalidMass { name, value })
    }
}

/// Adding and subtracting 1.5·2^52 rounds |x| < 2^51 to the nearest integer (common practice,
/// as in msun's `e_rem_pio2.c`).
const TO_INT: f64 = 1.5 / f64::EPSILON;

/// Orbital phase (t − T_p)/P reduced to [−½, ½] cycles. Reducing in cycles before multiplying by
/// 2π keeps the mean anomaly accurate for large t − T_p (e.g. Julian dates).
#[inline(always)]
pub(crate) fn phase_cycles(time: f64, period: f64, time_of_periastron: f64) -> f64 {
    phase_cycles_with_frequency(time, 1.0 / period, time_of_periastron)
}

/// [`phase_cycles`] with the frequency 1/P [1/d] precomputed (a multiplication instead of a
/// division in the model's hot loop; differs by at most an ulp or so of the phase).
#[inline(always)]
pub(crate) fn phase_cycles_with_frequency(
    time: f64,
    frequency: f64,
    time_of_periastron: f64,
) -> f64 {
    let phase = (time - time_of_periastron) * frequency;
    if f64::abs(phase) < 2_251_799_813_685_248.0 {
        // 2^51
        phase - ((phase + TO_INT) - TO_INT)
    } else {
        phase - libm::round(phase)
    }
}

/// Mean anomaly M = 2π (t − T_p) / P at `time`, reduced to [0, 2π) radians (all times in days).
pub fn mean_anomaly_at(time: f64, period: f64, time_of_periastron: f64) -> f64 {
    let m = TWO_PI * phase_cycles(time, period, time_of_periastron);
    if m < 0.0 {
        let wrapped = m + TWO_PI;
        if wrapped >= TWO_PI {
            0.0
        } else {
            wrapped
        }
    } else {
        m
    }
}

/// Time of periastron T_p = epoch − M P / (2π) [d] from the mean anomaly M [rad] at `epoch` [d].
pub fn time_of_periastron_from_mean_anomaly(mean_anomaly: f64, epoch: f64, period: f64) -> f64 {
    epoch - mean_anomaly * period / TWO_PI
}

/// (√e cos ω, √e sin ω), the sampling parameters that give a uniform prior in e and ω a flat
/// density (common practice).
pub fn sqrt_e_cos_sin_omega(eccentricity: Eccentricity, omega: f64) -> (f64, f64) {
    let root_e = libm::sqrt(eccentricity.value());
    let (s, c) = libm::sincos(omega);
    (root_e * c, root_e * s)
}

/// (e, ω) from (√e cos ω, √e sin ω): e = h² + k², ω = atan2(k, h) ∈ (−π, π] (ω = 0 when e = 0).
/// Errors when e ≥ 1 or an input is not finite.
pub fn from_sqrt_e_cos_sin_omega(
    sqrt_e_cos_omega: f64,
    sqrt_e_sin_omega: f64,
) -> Result<(Eccentricity, f64), OrbitError> {
    let h = check_finite("sqrt(e) cos(omega)", sqrt_e_cos_omega)?;
    let k = check_finite("sqrt(e) sin(omega)", sqrt_e_sin_omega)?;
    let eccentricity = Eccentricity::new(h * h + k * k)?;
    Ok((eccentricity, libm::atan2(k, h)))
}

/// (e cos ω, e sin ω).
pub fn e_cos_sin_omega(eccentricity: Eccentricity, omega: f64) -> (f64, f64) {
    let e = eccentricity.value();
    let (s, c) = libm::sincos(omega);
    (e * c, e * s)
}

/// (e, ω) from (e cos ω, e sin ω): e = √(h² + k²) (via `hypot`), ω = atan2(k, h) ∈ (−π, π]
/// (ω = 0 when e = 0). Errors when e ≥ 1 or an input is not finite.
pub fn from_e_cos_sin_omega(
    e_cos_omega: f64,
    e_sin_omega: f64,
) -> Result<(Eccentricity, f64), OrbitError> {
    let h = check_finite("e cos(omega)", e_cos_omega)?;
    let k = check_finite("e sin(omega)", e_sin_omega)?;
    let eccentricity = Eccentricity::new(libm::hypot(h, k))?;
    Ok((eccentricity, libm::atan2(k, h)))
}

/// Spectroscopic mass function f(m) = m³ sin³i / (M + m)² = P K³ (1 − e²)^{3/2} / (2π G)
/// in solar masses (period in days, K in m/s), with G M_sun the IAU 2015 nominal value
/// (textbook relation, e.g. Hilditch 2001, An Introduction to Close Binary Stars, eq. 2.51 —
/// equation number from memory).
pub fn mass_function(period: f64, semi_amplitude: f64, eccentricity: Eccentricity) -> f64 {
    let e = eccentricity.value();
    let one_minus_e2 = (1.0 - e) * (1.0 + e);
    let period_s = period * SECONDS_PER_DAY;
    period_s
        * semi_amplitude
        * semi_amplitude
        * semi_amplitude
        * one_minus_e2
        * libm::sqrt(one_minus_e2)
        / (TWO_PI * GM_SUN)
}

/// Minimum companion mass m_min [M_sun] (the mass for sin i = 1, i.e. "m sin i" in the edge-on
/// sense) from the mass function f [M_sun] and the stellar mass M [M_sun], solving
/// m³ / (M + m)² = f exactly — not only the m ≪ M approximation m ≈ (f M²)^{1/3}.
///
/// With y = m / (M + m) the equation becomes the depressed cubic y³ + q y − q = 0, q = f / M,
/// which has exactly one real root; it is taken from the hyperbolic form of Cardano's solution,
/// y = 2√(q/3) sinh(⅓ asinh((3/2)√(3/q))) (e.g. Press et al. 2007, Numerical Recipes 3rd ed.,
/// §5.6 — section from memory), polished by one Newton step; then m = f / y², free of the
/// cancellation in M y / (1 − y) when m ≫ M.
pub fn minimum_companion_mass(mass_function: f64, stellar_mass: f64) -> Result<f64, OrbitError> {
    let stellar_mass = check_mass("stellar mass", stellar_mass)?;
    if !(mass_function.is_finite() && mass_function >= 0.0) {
        return Err(OrbitError::NotFinite {
            name: "mass function (finite, >= 0)",
            value: mass_function,
        });
    }
    if mass_function == 0.0 {
        return Ok(0.0);
    }
    let q = mass_function / stellar_mass;
    let argument = 1.5 * libm::sqrt(3.0 / q);
    let mut y = 2.0 * libm::sqrt(q / 3.0) * libm::sinh(libm::asinh(argument) / 3.0);
    y -= (y * y * y + q * y - q) / (3.0 * y * y + q);
    Ok(mass_function / (y * y))
}

/// Semi-amplitude K [m/s] of the star (mass `stellar_mass` [M_sun]) due to a companion of mass
/// `companion_mass` [M_sun] on an orbit of `period` [d] and eccentricity e, seen at inclination i:
/// K = (2π G / P)^{1/3} m sin i / (M + m)^{2/3} / √(1 − e²) (textbook relation; e.g. Lovis &
/// Fischer 2010, in Exoplanets, ed. Seager, eq. 1 — from memory).
pub fn semi_amplitude_from_masses(
    period: f64,
    eccentricity: Eccentricity,
    companion_mass: f64,
    stellar_mass: f64,
    sin_inclination: f64,
) -> Result<f64, OrbitError> {
    let period = check_period(period)?;
    let companion_mass = check_mass("companion mass", companion_mass)?;
    let stellar_mass = check_mass("stellar mass", stellar_mass)?;
    if !(sin_inclination > 0.0 && sin_inclination <= 1.0) {
        return Err(OrbitError::InvalidSinInclination {
            value: sin_inclination,
        });
    }
    let e = eccentricity.value();
    let period_s = period * SECONDS_PER_DAY;
    let total = stellar_mass + companion_mass;
    let speed = libm::cbrt(TWO_PI * GM_SUN / period_s);
    Ok(speed * companion_mass * sin_inclination
        / libm::cbrt(total * total)
        / libm::sqrt((1.0 - e) * (1.0 + e)))
}

/// The elements of one companion's orbit, as they shape the star's radial velocity.
///
/// ω is the argument of periastron of the *star's* orbit (the companion's is ω + π), so that the
/// star's velocity is v = K [cos(ν + ω) + e cos ω] (positive = receding).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct OrbitalElements {
    period: f64,
    semi_amplitude: f64,
    eccentricity: Eccentricity,
    omega: f64,
    time_of_periastron: f64,
}

impl OrbitalElements {
    /// Checks and stores the elements: period P > 0 [d], semi-amplitude K ≥ 0 [m/s],
    /// 0 ≤ e < 1, ω [rad] and time of periastron T_p [d] finite.
    pub fn new(
        period: f64,
        semi_amplitude: f64,
        eccentricity: f64,
        omega: f64,
        time_of_periastron: f64,
    ) -> Result<Self, OrbitError> {
        let period = check_period(period)?;
        if !(semi_amplitude.is_finite() && semi_amplitude >= 0.0) {
            return Err(OrbitError::InvalidSemiAmplitude {
                value: semi_amplitude,
            });
        }
        let eccentricity = Eccentricity::new(eccentricity)?;
        let omega = check_finite("argument of periastron omega", omega)?;
        let time_of_periastron = check_finite("time of periastron", time_of_periastron)?;
        Ok(OrbitalElements {
            period,
            semi_amplitude,
            eccentricity,
            omega,
            time_of_periastron,
        })
    }

    /// Elements from the mean anomaly `mean_anomaly` [rad] at a reference `epoch` [d] instead of
    /// the time of periastron (T_p = epoch − M P / 2π).
    pub fn from_mean_anomaly_at_epoch(
        period: f64,
        semi_amplitude: f64,
        eccentricity: f64,
        omega: f64,
        mean_anomaly: f64,
        epoch: f64,
    ) -> Result<Self, OrbitError> {
        let period = check_period(period)?;
        let mean_anomaly = check_finite("mean anomaly", mean_anomaly)?;
        let epoch = check_finite("reference epoch", epoch)?;
        let time_of_periastron = time_of_periastron_from_mean_anomaly(mean_anomaly, epoch, period);
        Self::new(
            period,
            semi_amplitude,
            eccentricity,
            omega,
            time_of_periastron,
        )
    }

    /// Period P [d].
    pub fn period(&self) -> f64 {
        self.period
    }

    /// Semi-amplitude K [m/s].
    pub fn semi_amplitude(&self) -> f64 {
        self.semi_amplitude
    }

    /// Eccentricity e.
    pub fn eccentricity(&self) -> Eccentricity {
        self.eccentricity
    }

    /// Argument of periastron ω of the star's orbit [rad].
    pub fn omega(&self) -> f64 {
        self.omega
    }

    /// Time of periastron T_p [d].
    pub fn time_of_periastron(&self) -> f64 {
        self.time_of_periastron
    }

    /// Mean anomaly at `time` [d], in [0, 2π).
    pub fn mean_anomaly_at(&self, time: f64) -> f64 {
        mean_anomaly_at(time, self.period, self.time_of_periastron)
    }

    /// (√e cos ω, √e sin ω).
    pub fn sqrt_e_cos_sin_omega(&self) -> (f64, f64) {
        sqrt_e_cos_sin_omega(self.eccentricity, self.omega)
    }

    /// (e cos ω, e sin ω).
    pub fn e_cos_sin_omega(&self) -> (f64, f64) {
        e_cos_sin_omega(self.eccentricity, self.omega)
    }

    /// The star's radial velocity due to this companion at `time` [d]:
    /// v = K [cos(ν + ω) + e cos ω] [m/s] (e.g. Murray & Dermott 1999, Solar System Dynamics,
    /// eq. 2.123 — equation number from memory). For many evaluations use
    /// [`crate::model::RvModel`], which precomputes the per-companion constants.
    pub fn radial_velocity(&self, time: f64) -> f64 {
        let mean_anomaly = TWO_PI * phase_cycles(time, self.period, self.time_of_periastron);
        let anomaly = eccentric_anomaly_reduced(mean_anomaly, self.eccentricity);
        let (cos_nu, sin_nu) = true_anomaly_cos_sin(&anomaly, self.eccentricity);
        let (sin_w, cos_w) = libm::sincos(self.omega);
        let e = self.eccentricity.value();
        self.semi_amplitude * ((cos_nu * cos_w - sin_nu * sin_w) + e * cos_w)
    }

    /// Mass function f(m) [M_sun] (see [`mass_function`]).
    pub fn mass_function(&self) -> f64 {
        mass_function(self.period, self.semi_amplitude, self.eccentricity)
    }

    /// Minimum companion mass m_min [M_sun] for a star of `stellar_mass` [M_sun] (see
    /// [`minimum_companion_mass`]).
    pub fn minimum_companion_mass(&self, stellar_mass: f64) -> Result<f64, OrbitError> {
        minimum_companion_mass(self.mass_function(), stellar_mass)
    }

    /// a₁ sin i [m]: projected semi-major axis of the *star's* orbit about the barycentre,
    /// K P √(1 − e²) / (2π) (textbook relation, common practice).
    pub fn star_semi_major_axis_sin_i(&self) -> f64 {
        let e = self.eccentricity.value();
        self.semi_amplitude * self.period * SECONDS_PER_DAY * libm::sqrt((1.0 - e) * (1.0 + e))
            / TWO_PI
    }

    /// Semi-major axis [m] of the *relative* orbit (companion about star, a = a₁ + a₂) for an
    /// edge-on orbit, i.e. with the companion mass m = m_min: a = (G (M + m_min) P² / 4π²)^{1/3}
    /// (Kepler's third law). At inclination i < 90° the true companion mass exceeds m_min, and
    /// a grows with it as (M + m)^{1/3}.
    pub fn relative_semi_major_axis_edge_on(&self, stellar_mass: f64) -> Result<f64, OrbitError> {
        let minimum_mass = self.minimum_companion_mass(stellar_mass)?;
        let period_s = self.period * SECONDS_PER_DAY;
        Ok(libm::cbrt(
            GM_SUN * (stellar_mass + minimum_mass) * period_s * period_s / (4.0 * PI * PI),
        ))
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use approx::assert_relative_eq;

    #[test]
    fn rejects_bad_elements_without_panicking() {
        assert!(matches!(
            OrbitalElements::new(0.0, 10.0, 0.1, 0.0, 0.0),
            Err(OrbitError::InvalidPeriod { .. })
        ));
        assert!(matches!(
            OrbitalElements::new(3.0, -1.0, 0.1, 0.0, 0.0),
            Err(OrbitError::InvalidSemiAmplitude { .. })
        ));
        assert!(matches!(
            OrbitalElements::new(3.0, 10.0, 1.0, 0.0, 0.0),
            Err(OrbitError::Eccentricity(_))
        ));
        assert!(matches!(
            OrbitalElements::new(3.0, 10.0, 0.1, f64::NAN, 0.0),
            Err(OrbitError::NotFinite { .. })
        ));
    }

    #[test]
    fn mean_anomaly_epoch_round_trip() {
        // Identity T_p = epoch − M P / 2π (definition of the mean anomaly; common practice).
        let elements =
            OrbitalElements::from_mean_anomaly_at_epoch(7.3, 40.0, 0.3, 1.0, 2.5, 2_459_000.5)
                .unwrap();
        assert_relative_eq!(
            elements.mean_anomaly_at(2_459_000.5),
            2.5,
            epsilon = 1e-9 // P/2π · 1e-9 rad ≈ 1e-9 d, the rounding of JD-sized times
        );
    }

    #[test]
    fn parameterisations_round_trip() {
        // Definitions of (√e cos ω, √e sin ω) and (e cos ω, e sin ω) (common practice).
        let e = Eccentricity::new(0.37).unwrap();
        let omega = -2.1;
        let (h, k) = sqrt_e_cos_sin_omega(e, omega);
        let (e2, w2) = from_sqrt_e_cos_sin_omega(h, k).unwrap();
        assert_relative_eq!(e2.value(), 0.37, epsilon = 1e-15);
        assert_relative_eq!(w2, omega, epsilon = 1e-15);
        let (h, k) = e_cos_sin_omega(e, omega);
        let (e3, w3) = from_e_cos_sin_omega(h, k).unwrap();
        assert_relative_eq!(e3.value(), 0.37, epsilon = 1e-15);
        assert_relative_eq!(w3, omega, epsilon = 1e-15);
        assert!(from_sqrt_e_cos_sin_omega(0.8, 0.8).is_err()); // e = 1.28
    }

    #[test]
    fn minimum_mass_solves_the_cubic_in_both_limits() {
        // m³/(M + m)² = f must hold for the returned m (definition of the mass function).
        for &(f, stellar) in &[(1e-20, 1.0), (8.6e-10, 1.0), (0.25, 1.0), (50.0, 0.5)] {
            let m: f64 = minimum_companion_mass(f, stellar).unwrap();
            assert_relative_eq!(
                m * m * m / ((stellar + m) * (stellar + m)),
                f,
                max_relative = 1e-13
            );
        }
    }
}
