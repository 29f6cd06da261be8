//! Prior densities for posterior sampling: selectable eccentricity priors (with truncation) and scalar priors for period, semi-amplitude, jitter and offset.
//!
//! # Eccentricity
//!
//! An [`EccentricityPriorSettings`] names a shape ([`EccentricityShape`]) and
//! a truncation `[e_min, e_max]` chosen by the user; [`EccentricityPriorSettings::validate`]
//! checks it and returns an [`EccentricityPrior`] that knows its normalisation.
//! Every density is normalised on the truncation interval, so `density` is
//! the density the user asked for, not just proportional to it.
//!
//! The sampler works in the plane `(h, k) = (√e cos ω, √e sin ω)` (Eastman,
//! Gaudi & Agol 2013, PASP 125, 83). With `e = h² + k²` and `ω = atan2(k, h)`,
//! the area element is `dh dk = ½ de dω`, so a density `p(e)` on `e` with `ω`
//! uniform on `[0, 2π)` becomes `p(h, k) = p(e) · (1/2π) · 2 = p(e)/π`
//! ([`EccentricityPrior::log_density_sqrt_e_plane`]). Uniform sampling in the
//! plane therefore implies a uniform prior on `e`, and uniform sampling in
//! `(e cos ω, e sin ω)` implies `p(e) = 2e` (Eastman et al. 2013, §3.3.1 from
//! memory); both are offered as named shapes.
//!
//! # Other parameters
//!
//! [`ScalarPrior`] is uniform, log-uniform or the modified Jeffreys prior
//! `p(x) ∝ 1/(x + x₀)` on `[0, x_max]` (Gregory 2005, ApJ 631, 1198, his
//! eq. for K and s, from memory), every bound explicit. [`OrbitPriorSettings`]
//! groups them with defaults.

use rand::{Rng, RngExt};
use std::fmt;

use serde::{Deserialize, Serialize};
use thiserror::Error;

use crate::stats::{ln_beta, regularized_incomplete_beta};

/// Impossible prior settings, with the offending values.
#[derive(Debug, Clone, PartialEq, Error)]
pub enum PriorError {
    /// The period-dependent Kipping (2013) prior was used before the period was known.
    #[error(
        "the Kipping (2013) prior chosen by period (kipping2013auto) needs the fitted period; \
         resolve it with EccentricityPriorSettings::for_period first"
    )]
    UnresolvedByPeriod,
    /// The eccentricity truncation is empty or reversed.
    #[error("eccentricity truncation: e_max = {e_max} must be above e_min = {e_min}")]
    EccentricityRange {
        /// Lower truncation given.
        e_min: f64,
        /// Upper truncation given.
        e_max: f64,
    },
    /// The upper eccentricity bound exceeds 1 (unbound orbit).
    #[error("eccentricity truncation: e_max = {e_max} exceeds 1 (bound orbits need e < 1)")]
    EccentricityAboveOne {
        /// Upper truncation given.
        e_max: f64,
    },
    /// The lower eccentricity bound is negative.
    #[error("eccentricity truncation: e_min = {e_min} is negative")]
    EccentricityBelowZero {
        /// Lower truncation given.
        e_min: f64,
    },
    /// A setting is NaN or infinite.
    #[error("{setting} = {value} is not a finite number")]
    NonFinite {
        /// Which setting.
        setting: &'static str,
        /// Value given.
        value: f64,
    },
    /// A scale parameter (Rayleigh or half-normal σ) is not positive.
    #[error("{setting} = {value} must be positive")]
    NonPositiveScale {
        /// Which setting.
        setting: &'static str,
        /// Value given.
        value: f64,
    },
    /// A Beta shape parameter is not positive.
    #[error("Beta prior shape parameters a = {a}, b = {b} must both be positive")]
    NonPositiveBetaShape {
        /// First shape parameter.
        a: f64,
        /// Second shape parameter.
        b: f64,
    },
    /// A log-uniform prior needs a positive floor.
    #[error("{setting}: a log-uniform prior needs a positive lower bound, got {value}")]
    LogUniformFloor {
        /// Which setting.
        setting: &'static str,
        /// Lower bound given.
        value: f64,
    },
    /// The bounds of a scalar prior are empty or reversed.
    #[error("{parameter} prior: upper bound {max} must be above lower bound {min}")]
    Bounds {
        /// Which parameter.
        parameter: &'static str,
        /// Lower bound given.
        min: f64,
        /// Upper bound given.
        max: f64,
    },
    /// A fixed circular orbit cannot be combined with e_min > 0.
    #[error("a fixed circular orbit (e = 0) lies outside the truncation e_min = {e_min}")]
    CircularExcluded {
        /// Lower truncation given.
        e_min: f64,
    },
    /// The chosen shape puts no probability (to double precision) in the truncation.
    #[error(
        "the prior puts no probability between e_min = {e_min} and e_max = {e_max}; \
         widen the truncation or change the shape"
    )]
    NoMass {
        /// Lower truncation given.
        e_min: f64,
        /// Upper truncation given.
        e_max: f64,
    },
}

/// The shape of an eccentricity prior before truncation.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
#[serde(tag = "kind", rename_all = "snake_case")]
pub enum EccentricityShape {
    /// Uniform in e.
    Uniform,
    /// Beta(a, b): `p(e) ∝ e^(a−1) (1−e)^(b−1)`. Presets after Kipping
    /// (2013, MNRAS 434, L51): [`EccentricityShape::KIPPING_2013_ALL`] and friends.
    Beta {
        /// First shape parameter, > 0.
        a: f64,
        /// Second shape parameter, > 0.
        b: f64,
    },
    /// Rayleigh(σ): `p(e) ∝ e exp(−e²/2σ²)`.
    Rayleigh {
        /// Scale σ, > 0.
        sigma: f64,
    },
    /// Half-normal(σ): `p(e) ∝ exp(−e²/2σ²)`.
    HalfNormal {
        /// Scale σ, > 0.
        sigma: f64,
    },
    /// Log-uniform on `[e_min, e_max]`: `p(e) ∝ 1/e`; needs `e_min > 0`.
    LogUniform,
    /// The prior implied by sampling uniformly in `(e cos ω, e sin ω)`:
    /// `p(e) ∝ e` (Eastman, Gaudi & Agol 2013, PASP 125, 83).
    UniformInECosOmega,
    /// The prior implied by sampling uniformly in `(√e cos ω, √e sin ω)`:
    /// uniform in e (Eastman, Gaudi & Agol 2013, PASP 125, 83). Same density as
    /// [`EccentricityShape::Uniform`]; kept as its own name so reports say which
    /// convention the user picked.
    UniformInSqrtECosOmega,
    /// e fixed at 0: no eccentricity parameters are sampled.
    Circular,
    /// Kipping's (2013) short- or long-period Beta, chosen by the fitted period (below or above
    /// [`KIPPING_2013_PERIOD_SPLIT`] days) through [`EccentricityPriorSettings::for_period`];
    /// must be resolved before use.
    Kipping2013ByPeriod,
    /// Jeffreys' (1946) prior from the table itself: density ∝ √det F(θ) over the orbital
    /// parameters of every companion jointly, F = JᵀΣ⁻¹J the Fisher information of the model
    /// at the table's own epochs and stated uncertainties (see
    /// [`crate::posterior::RvPosterior::jeffreys_log_density`] for exactly what it covers).
    /// Not a prior on e alone: as an eccentricity shape it is the base measure only (uniform
    /// in the (√e cos ω, √e sin ω) disk, i.e. uniform in e, on `[e_min, e_max]`, which sets
    /// the bounds and the starts), and the posterior target multiplies it by √det F and drops
    /// the densities of P and K (keeping their bounds). Its marginal on e depends on the data,
    /// so the prior-dependent summaries (prior curve, KL, Savage–Dickey BF₀₁) are not given.
    Jeffreys,
}

/// The period [d] that separates Kipping's (2013, MNRAS 434, L51) short- and long-period
/// samples (382.3 d, from memory).
pub const KIPPING_2013_PERIOD_SPLIT: f64 = 382.3;

impl EccentricityShape {
    /// Kipping (2013, MNRAS 434, L51) Beta fit to all radial-velocity planets:
    /// a = 0.867, b = 3.03 (mean a/(a+b) = 0.2225).
    pub const KIPPING_2013_ALL: EccentricityShape = EccentricityShape::Beta { a: 0.867, b: 3.03 };
    /// Kipping (2013, MNRAS 434, L51) Beta fit to planets with P < 382.3 d:
    /// a = 0.697, b = 3.27 (from memory: the paper's values could not be checked with the
    /// search tool, whose copies of the abstract give only the all-planet fit; the assignment
    /// follows the abstract's statement that the two samples "display a signature consistent
    /// with the effects of tidal circularization", i.e. the short-period sample has the lower
    /// mean, 0.697/3.967 = 0.176 against 1.12/4.21 = 0.266; the crate had them swapped before).
    pub const KIPPING_2013_SHORT_PERIOD: EccentricityShape =
        EccentricityShape::Beta { a: 0.697, b: 3.27 };
    /// Kipping (2013, MNRAS 434, L51) Beta fit to planets with P > 382.3 d:
    /// a = 1.12, b = 3.09 (from memory; see [`Self::KIPPING_2013_SHORT_PERIOD`]).
    pub const KIPPING_2013_LONG_PERIOD: EccentricityShape =
        EccentricityShape::Beta { a: 1.12, b: 3.09 };

    /// A short label for reports, e.g. `Beta(0.867, 3.03)`.
    pub fn label(&self) -> String {
        match *self {
            EccentricityShape::Uniform => "uniform".into(),
            EccentricityShape::Beta { a, b } => format!("Beta({a}, {b})"),
            EccentricityShape::Rayleigh { sigma } => format!("Rayleigh(σ = {sigma})"),
            EccentricityShape::HalfNormal { sigma } => format!("half-normal(σ = {sigma})"),
            EccentricityShape::LogUniform => "log-uniform".into(),
            EccentricityShape::UniformInECosOmega => "uniform in (e cos ω, e sin ω)".into(),
            EccentricityShape::UniformInSqrtECosOmega => "uniform in (√e cos ω, √e sin ω)".into(),
            EccentricityShape::Circular => "circular (e = 0)".into(),
            EccentricityShape::Kipping2013ByPeriod => {
                "Kipping (2013) Beta by period (not yet resolved)".into()
            }
            EccentricityShape::Jeffreys => "Jeffreys (table's Fisher information)".into(),
        }
    }
}

/// An eccentricity prior as the user chose it: shape plus truncation.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
#[serde(default)]
pub struct EccentricityPriorSettings {
    /// The shape before truncation.
    pub shape: EccentricityShape,
    /// Lower truncation, `0 ≤ e_min < e_max`.
    pub e_min: f64,
    /// Upper truncation, `e_max ≤ 1`; e = 1 itself is always excluded.
    pub e_max: f64,
}

impl Default for EccentricityPriorSettings {
    fn default() -> Self {
        EccentricityPriorSettings {
            shape: EccentricityShape::Uniform,
            e_min: 0.0,
            e_max: 1.0,
        }
    }
}

impl EccentricityPriorSettings {
    /// The same settings with [`EccentricityShape::Kipping2013ByPeriod`] replaced by Kipping's
    /// (2013) short-period Beta when `period` < [`KIPPING_2013_PERIOD_SPLIT`] days and by the
    /// long-period one otherwise; any other shape is returned unchanged.
    pub fn for_period(&self, period: f64) -> Self {
        let mut out = *self;
        if out.shape == EccentricityShape::Kipping2013ByPeriod {
            out.shape = if period < KIPPING_2013_PERIOD_SPLIT {
                EccentricityShape::KIPPING_2013_SHORT_PERIOD
            } else {
                EccentricityShape::KIPPING_2013_LONG_PERIOD
            };
        }
        out
    }

    /// Checks the settings and precomputes the normalisation.
    pub fn validate(&self) -> Result<EccentricityPrior, PriorError> {
        let EccentricityPriorSettings {
            shape,
            e_min,
            e_max,
        } = *self;
        finite("e_min", e_min)?;
        finite("e_max", e_max)?;
        if e_min < 0.0 {
            return Err(PriorError::EccentricityBelowZero { e_min });
        }
        if e_max > 1.0 {
            return Err(PriorError::EccentricityAboveOne { e_max });
        }
        if e_max <= e_min {
            return Err(PriorError::EccentricityRange { e_min, e_max });
        }
        match shape {
            EccentricityShape::Beta { a, b } => {
                finite("Beta a", a)?;
                finite("Beta b", b)?;
                if a <= 0.0 || b <= 0.0 {
                    return Err(PriorError::NonPositiveBetaShape { a, b });
                }
            }
            EccentricityShape::Rayleigh { sigma } => positive_scale("Rayleigh sigma", sigma)?,
            EccentricityShape::HalfNormal { sigma } => positive_scale("half-normal sigma", sigma)?,
            EccentricityShape::LogUniform if e_min <= 0.0 => {
                return Err(PriorError::LogUniformFloor {
                    setting: "eccentricity e_min",
                    value: e_min,
                })
            }
            EccentricityShape::Circular if e_min > 0.0 => {
                return Err(PriorError::CircularExcluded { e_min })
            }
            EccentricityShape::Kipping2013ByPeriod => return Err(PriorError::UnresolvedByPeriod),
            _ => {}
        }
        let cdf_at_min = shape_cdf(shape, e_min);
        let mass = shape_cdf(shape, e_max) - cdf_at_min;
        if shape != EccentricityShape::Circular
            && mass.partial_cmp(&0.0) != Some(std::cmp::Ordering::Greater)
        {
            return Err(PriorError::NoMass { e_min, e_max });
        }
        Ok(EccentricityPrior {
            settings: *self,
            cdf_at_min,
            mass,
            log_normaliser: libm::log(mass) + shape_log_normaliser(shape),
        })
    }
}

/// A checked eccentricity prior, normalised on its truncation interval.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct EccentricityPrior {
    settings: EccentricityPriorSettings,
    /// Untruncated CDF at e_min.
    cdf_at_min: f64,
    /// Untruncated probability in [e_min, e_max].
    mass: f64,
    /// ln(mass) plus the shape's own normalising constant.
    log_normaliser: f64,
}

impl EccentricityPrior {
    /// The settings this prior was made from.
    pub fn settings(&self) -> &EccentricityPriorSettings {
        &self.settings
    }

    /// True for the fixed circular orbit (no eccentricity parameters to sample).
    pub fn is_circular(&self) -> bool {
        self.settings.shape == EccentricityShape::Circular
    }

    /// `[e_min, e_max]`.
    pub fn bounds(&self) -> (f64, f64) {
        (self.settings.e_min, self.settings.e_max)
    }

    /// True when `e` lies in the support: `e_min ≤ e ≤ e_max` and `e < 1`.
    fn in_support(&self, e: f64) -> bool {
        e >= self.settings.e_min && e <= self.settings.e_max && e < 1.0
    }

    /// Normalised log-density of e on the truncation interval; −∞ outside.
    /// For [`EccentricityShape::Circular`] (a point mass at 0) this returns 0
    /// at e = 0 and −∞ elsewhere.
    pub fn log_density(&self, e: f64) -> f64 {
        if self.is_circular() {
            return if e == 0.0 { 0.0 } else { f64::NEG_INFINITY };
        }
        if !self.in_support(e) {
            return f64::NEG_INFINITY;
        }
        shape_log_kernel(self.settings.shape, e) - self.log_normaliser
    }

    /// Normalised density of e (see [`EccentricityPrior::log_density`]).
    pub fn density(&self, e: f64) -> f64 {
        libm::exp(self.log_density(e))
    }

    /// Log-density in the plane `(h, k) = (√e cos ω, √e sin ω)` with ω uniform,
    /// including the Jacobian: `ln p(e) − ln π` (see the module notes;
    /// Eastman, Gaudi & Agol 2013, PASP 125, 83). −∞ outside the truncation.
    /// For a circular prior, 0 at the origin and −∞ elsewhere.
    pub fn log_density_sqrt_e_plane(&self, h: f64, k: f64) -> f64 {
        let e = h * h + k * k;
        if self.is_circular() {
            return self.log_density(e);
        }
        self.log_density(e) - LN_PI
    }

    /// Cumulative distribution of the truncated prior.
    pub fn cdf(&self, e: f64) -> f64 {
        if self.is_circular() {
            return if e >= 0.0 { 1.0 } else { 0.0 };
        }
        let (lo, hi) = self.bounds();
        if e <= lo {
            0.0
        } else if e >= hi {
            1.0
        } else {
            ((shape_cdf(self.settings.shape, e) - self.cdf_at_min) / self.mass).clamp(0.0, 1.0)
        }
    }

    /// The quantile (inverse CDF) for `u` in `[0, 1]`: closed forms for
    /// uniform, `p ∝ e`, log-uniform and Rayleigh; bisection on the CDF to
    /// machine precision for Beta and half-normal.
    pub fn quantile(&self, u: f64) -> f64 {
        let shape = self.settings.shape;
        let (lo, hi) = self.bounds();
        let u = u.clamp(0.0, 1.0);
        let target = self.cdf_at_min + u * self.mass;
        let e = match shape {
            EccentricityShape::Circular => 0.0,
            EccentricityShape::Uniform
            | EccentricityShape::UniformInSqrtECosOmega
            | EccentricityShape::Jeffreys => lo + u * (hi - lo),
            EccentricityShape::UniformInECosOmega => libm::sqrt(lo * lo + u * (hi * hi - lo * lo)),
            EccentricityShape::LogUniform => lo * libm::exp(u * libm::log(hi / lo)),
            EccentricityShape::Rayleigh { sigma } => {
                // F(e) = 1 − exp(−e²/2σ²); solve with the survival function for accuracy.
                let survival_lo = libm::exp(-lo * lo / (2.0 * sigma * sigma));
                let survival_hi = libm::exp(-hi * hi / (2.0 * sigma * sigma));
                let survival = survival_lo - u * (survival_lo - survival_hi);
                sigma * libm::sqrt(-2.0 * libm::log(survival))
            }
            EccentricityShape::Beta { .. }
            | EccentricityShape::HalfNormal { .. }
            | EccentricityShape::Kipping2013ByPeriod => {
                bisect_cdf(|e| shape_cdf(shape, e), target, lo, hi)
            }
        };
        e.clamp(lo, hi)
    }

    /// One draw by inversion of the CDF.
    pub fn draw<R: Rng + ?Sized>(&self, rng: &mut R) -> f64 {
        self.quantile(rng.random::<f64>())
    }
}

const LN_PI: f64 = 1.144_729_885_849_400_2;

fn finite(setting: &'static str, value: f64) -> Result<(), PriorError> {
    if value.is_finite() {
        Ok(())
    } else {
        Err(PriorError::NonFinite { setting, value })
    }
}

fn positive_scale(setting: &'static str, value: f64) -> Result<(), PriorError> {
    finite(setting, value)?;
    if value > 0.0 {
        Ok(())
    } else {
        Err(PriorError::NonPositiveScale { setting, value })
    }
}

/// The log of the shape's kernel, without constants: `ln p(e) = kernel(e) − log_normaliser`.
fn shape_log_kernel(shape: EccentricityShape, e: f64) -> f64 {
    match shape {
        EccentricityShape::Uniform
        | EccentricityShape::UniformInSqrtECosOmega
        | EccentricityShape::Jeffreys
        | EccentricityShape::Circular => 0.0,
        EccentricityShape::Beta { a, b } => (a - 1.0) * libm::log(e) + (b - 1.0) * libm::log1p(-e),
        EccentricityShape::Rayleigh { sigma } => libm::log(e) - e * e / (2.0 * sigma * sigma),
        EccentricityShape::HalfNormal { sigma } => -e * e / (2.0 * sigma * sigma),
        EccentricityShape::LogUniform => -libm::log(e),
        EccentricityShape::UniformInECosOmega => libm::log(e),
        // Refused by `validate`; the all-planet fit keeps the function total.
        EccentricityShape::Kipping2013ByPeriod => {
            shape_log_kernel(EccentricityShape::KIPPING_2013_ALL, e)
        }
    }
}

/// The constant that makes the kernel a density on [0, 1] (Beta, p ∝ e) or
/// [0, ∞) (Rayleigh, half-normal), consistent with [`shape_cdf`]; for
/// log-uniform, 0 (its `shape_cdf` is the antiderivative ln e).
fn shape_log_normaliser(shape: EccentricityShape) -> f64 {
    match shape {
        EccentricityShape::Beta { a, b } => ln_beta(a, b),
        EccentricityShape::Kipping2013ByPeriod => {
            shape_log_normaliser(EccentricityShape::KIPPING_2013_ALL)
        }
        // σ² for e exp(−e²/2σ²).
        EccentricityShape::Rayleigh { sigma } => 2.0 * libm::log(sigma),
        // σ √(π/2) for exp(−e²/2σ²).
        EccentricityShape::HalfNormal { sigma } => {
            libm::log(sigma) + 0.5 * LN_PI - 0.5 * libm::log(2.0)
        }
        // ½ for e.
        EccentricityShape::UniformInECosOmega => -libm::log(2.0),
        _ => 0.0,
    }
}

/// CDF of a shape before truncation (for log-uniform: ln e, an antiderivative).
fn shape_cdf(shape: EccentricityShape, e: f64) -> f64 {
    match shape {
        EccentricityShape::Uniform
        | EccentricityShape::UniformInSqrtECosOmega
        | EccentricityShape::Jeffreys => e,
        EccentricityShape::Circular => 1.0,
        EccentricityShape::Beta { a, b } => regularized_incomplete_beta(a, b, e),
        EccentricityShape::Kipping2013ByPeriod => shape_cdf(EccentricityShape::KIPPING_2013_ALL, e),
        EccentricityShape::Rayleigh { sigma } => -libm::expm1(-e * e / (2.0 * sigma * sigma)),
        EccentricityShape::HalfNormal { sigma } => {
            libm::erf(e / (sigma * std::f64::consts::SQRT_2))
        }
        EccentricityShape::LogUniform => libm::log(e),
        EccentricityShape::UniformInECosOmega => e * e,
    }
}

/// Solves `cdf(x) = target` on `[lo, hi]` by bisection until the interval
/// stops shrinking (machine precision); `cdf` must be non-decreasing.
fn bisect_cdf(cdf: impl Fn(f64) -> f64, target: f64, lo: f64, hi: f64) -> f64 {
    let (mut lo, mut hi) = (lo, hi);
    for _ in 0..200 {
        let mid = 0.5 * (lo + hi);
        if mid <= lo || mid >= hi {
            break;
        }
        if cdf(mid) < target {
            lo = mid;
        } else {
            hi = mid;
        }
    }
    0.5 * (lo + hi)
}

/// A prior on one non-negative or real scalar parameter, with explicit bounds.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
#[serde(tag = "kind", rename_all = "snake_case")]
pub enum ScalarPrior {
    /// Uniform on `[min, max]`.
    Uniform {
        /// Lower bound.
        min: f64,
        /// Upper bound, > min.
        max: f64,
    },
    /// Log-uniform (Jeffreys) on `[min, max]`, `p(x) = 1/(x ln(max/min))`, `min > 0`.
    LogUniform {
        /// Lower bound, > 0.
        min: f64,
        /// Upper bound, > min.
        max: f64,
    },
    /// Modified Jeffreys on `[0, max]`: `p(x) = 1 / ((x + knee) ln(1 + max/knee))`
    /// (Gregory 2005, ApJ 631, 1198): uniform below the knee, log-uniform above.
    ModifiedJeffreys {
        /// The knee x₀ > 0 (same unit as x).
        knee: f64,
        /// Upper bound, > 0.
        max: f64,
    },
}

/// A [`ScalarPrior`] with its bounds and normalising constant precomputed.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct PreparedScalarPrior {
    prior: ScalarPrior,
    lo: f64,
    hi: f64,
    log_normaliser: f64,
}

impl PreparedScalarPrior {
    /// Normalised log-density; −∞ outside the support (see [`ScalarPrior`] for each form).
    #[inline]
    pub fn log_density(&self, x: f64) -> f64 {
        if !(x >= self.lo && x <= self.hi) {
            return f64::NEG_INFINITY;
        }
        match self.prior {
            ScalarPrior::Uniform { .. } => -self.log_normaliser,
            ScalarPrior::LogUniform { .. } => -libm::log(x) - self.log_normaliser,
            ScalarPrior::ModifiedJeffreys { knee, .. } => {
                -libm::log(x + knee) - self.log_normaliser
            }
        }
    }
}

impl fmt::Display for ScalarPrior {
    /// Plain words with the bounds, e.g. `modified Jeffreys (knee 1) on [0, 1000]`.
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match *self {
            ScalarPrior::Uniform { min, max } => write!(f, "uniform on [{min}, {max}]"),
            ScalarPrior::LogUniform { min, max } => write!(f, "log-uniform on [{min}, {max}]"),
            ScalarPrior::ModifiedJeffreys { knee, max } => {
                write!(f, "modified Jeffreys (knee {knee}) on [0, {max}]")
            }
        }
    }
}

impl ScalarPrior {
    /// Checks the bounds; `parameter` names the quantity in the error.
    pub fn validate(&self, parameter: &'static str) -> Result<(), PriorError> {
        match *self {
            ScalarPrior::Uniform { min, max } => {
                finite(parameter, min)?;
                finite(parameter, max)?;
                if max <= min {
                    return Err(PriorError::Bounds {
                        parameter,
                        min,
                        max,
                    });
                }
            }
            ScalarPrior::LogUniform { min, max } => {
                finite(parameter, min)?;
                finite(parameter, max)?;
                if min <= 0.0 {
                    return Err(PriorError::LogUniformFloor {
                        setting: parameter,
                        value: min,
                    });
                }
                if max <= min {
                    return Err(PriorError::Bounds {
                        parameter,
                        min,
                        max,
                    });
                }
            }
            ScalarPrior::ModifiedJeffreys { knee, max } => {
                positive_scale("modified Jeffreys knee", knee)?;
                finite(parameter, max)?;
                if max <= 0.0 {
                    return Err(PriorError::Bounds {
                        parameter,
                        min: 0.0,
                        max,
                    });
                }
            }
        }
        Ok(())
    }

    /// The support `[min, max]`.
    pub fn bounds(&self) -> (f64, f64) {
        match *self {
            ScalarPrior::Uniform { min, max } | ScalarPrior::LogUniform { min, max } => (min, max),
            ScalarPrior::ModifiedJeffreys { max, .. } => (0.0, max),
        }
    }

    /// Normalised log-density; −∞ outside the bounds. Assumes [`ScalarPrior::validate`] passed.
    pub fn log_density(&self, x: f64) -> f64 {
        self.prepared().log_density(x)
    }

    /// The same prior with its normalising constant computed once, for repeated evaluation
    /// (e.g. inside a sampler): [`PreparedScalarPrior::log_density`] gives exactly the bits of
    /// [`ScalarPrior::log_density`].
    pub fn prepared(&self) -> PreparedScalarPrior {
        let (lo, hi) = self.bounds();
        let log_normaliser = match *self {
            ScalarPrior::Uniform { min, max } => libm::log(max - min),
            ScalarPrior::LogUniform { min, max } => libm::log(libm::log(max / min)),
            ScalarPrior::ModifiedJeffreys { knee, max } => libm::log(libm::log1p(max / knee)),
        };
        PreparedScalarPrior {
            prior: *self,
            lo,
            hi,
            log_normaliser,
        }
    }

    /// Normalised density.
    pub fn density(&self, x: f64) -> f64 {
        libm::exp(self.log_density(x))
    }

    /// Cumulative distribution.
    pub fn cdf(&self, x: f64) -> f64 {
        let (lo, hi) = self.bounds();
        if x <= lo {
            return 0.0;
        }
        if x >= hi {
            return 1.0;
        }
        match *self {
            ScalarPrior::Uniform { min, max } => (x - min) / (max - min),
            ScalarPrior::LogUniform { min, max } => libm::log(x / min) / libm::log(max / min),
            ScalarPrior::ModifiedJeffreys { knee, max } => {
                libm::log1p(x / knee) / libm::log1p(max / knee)
            }
        }
    }

    /// Quantile (inverse CDF), closed form, for `u` in `[0, 1]`.
    pub fn quantile(&self, u: f64) -> f64 {
        let u = u.clamp(0.0, 1.0);
        let (lo, hi) = self.bounds();
        let x = match *self {
            ScalarPrior::Uniform { min, max } => min + u * (max - min),
            ScalarPrior::LogUniform { min, max } => min * libm::exp(u * libm::log(max / min)),
            ScalarPrior::ModifiedJeffreys { knee, max } => {
                knee * libm::expm1(u * libm::log1p(max / knee))
            }
        };
        x.clamp(lo, hi)
    }

    /// One draw by inversion.
    pub fn draw<R: Rng + ?Sized>(&self, rng: &mut R) -> f64 {
        self.quantile(rng.random::<f64>())
    }
}

/// Priors on every orbital and noise parameter of an RV fit, all bounds explicit.
///
/// The defaults are broad, stated choices (not from a paper): period
/// log-uniform on [1, 10⁴] d; semi-amplitude modified Jeffreys with knee
/// 1 m/s up to 2·10⁵ m/s (binary stars included); jitter modified Jeffreys
/// with knee 1 m/s up to 10³ m/s; offset γ uniform on ±3·10⁵ m/s;
/// eccentricity uniform on [0, 1). Time of periastron / phase is uniform over
/// one period and ω uniform on [0, 2π) by construction, so they need no setting.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
#[serde(default)]
pub struct OrbitPriorSettings {
    /// Period prior, days.
    pub period: ScalarPrior,
    /// Semi-amplitude K prior, m/s.
    pub semi_amplitude: ScalarPrior,
    /// Jitter prior (per instrument), m/s.
    pub jitter: ScalarPrior,
    /// Systemic offset γ prior (per instrument), m/s.
    pub offset: ScalarPrior,
    /// Eccentricity prior.
    pub eccentricity: EccentricityPriorSettings,
}

impl Default for OrbitPriorSettings {
    fn default() -> Self {
        OrbitPriorSettings {
            period: ScalarPrior::LogUniform {
                min: 1.0,
                max: 1.0e4,
            },
            semi_amplitude: ScalarPrior::ModifiedJeffreys {
                knee: 1.0,
                max: 2.0e5,
            },
            jitter: ScalarPrior::ModifiedJeffreys {
                knee: 1.0,
                max: 1.0e3,
            },
            offset: ScalarPrior::Uniform {
                min: -3.0e5,
                max: 3.0e5,
            },
            eccentricity: EccentricityPriorSettings::default(),
        }
    }
}

/// [`OrbitPriorSettings`] after validation.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct OrbitPriors {
    /// Period prior, days.
    pub period: ScalarPrior,
    /// Semi-amplitude prior, m/s.
    pub semi_amplitude: ScalarPrior,
    /// Jitter prior, m/s.
    pub jitter: ScalarPrior,
    /// Offset prior, m/s.
    pub offset: ScalarPrior,
    /// Eccentricity prior.
    pub eccentricity: EccentricityPrior,
}

impl OrbitPriorSettings {
    /// Checks every prior.
    pub fn validate(&self) -> Result<OrbitPriors, PriorError> {
        self.period.validate("period")?;
        if let ScalarPrior::ModifiedJeffreys { .. } = self.period {
            // A period of 0 is meaningless; demand a positive floor.
            return Err(PriorError::LogUniformFloor {
                setting: "period (modified Jeffreys starts at 0)",
                value: 0.0,
            });
        }
        if self.period.bounds().0 <= 0.0 {
            return Err(PriorError::LogUniformFloor {
                setting: "period",
                value: self.period.bounds().0,
            });
        }
        self.semi_amplitude.validate("semi-amplitude")?;
        if self.semi_amplitude.bounds().0 < 0.0 {
            return Err(PriorError::Bounds {
                parameter: "semi-amplitude (must be ≥ 0)",
                min: self.semi_amplitude.bounds().0,
                max: self.semi_amplitude.bounds().1,
            });
        }
        self.jitter.validate("jitter")?;
        if self.jitter.bounds().0 < 0.0 {
            return Err(PriorError::Bounds {
                parameter: "jitter (must be ≥ 0)",
                min: self.jitter.bounds().0,
                max: self.jitter.bounds().1,
            });
        }
        self.offset.validate("offset")?;
        Ok(OrbitPriors {
            period: self.period,
            semi_amplitude: self.semi_amplitude,
            jitter: self.jitter,
            offset: self.offset,
            eccentricity: self.eccentricity.validate()?,
        })
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use approx::assert_relative_eq;
    use proptest::prelude::*;

    fn prior(shape: EccentricityShape, e_min: f64, e_max: f64) -> EccentricityPrior {
        EccentricityPriorSettings {
            shape,
            e_min,
            e_max,
        }
        .validate()
        .unwrap()
    }

    #[test]
    fn impossible_settings_are_typed_errors() {
        let settings = |shape, e_min, e_max| EccentricityPriorSettings {
            shape,
            e_min,
            e_max,
        };
        let u = EccentricityShape::Uniform;
        assert_eq!(
            settings(u, 0.5, 0.5).validate(),
            Err(PriorError::EccentricityRange {
                e_min: 0.5,
                e_max: 0.5
            })
        );
        assert_eq!(
            settings(u, 0.0, 1.2).validate(),
            Err(PriorError::EccentricityAboveOne { e_max: 1.2 })
        );
        assert_eq!(
            settings(u, -0.1, 0.5).validate(),
            Err(PriorError::EccentricityBelowZero { e_min: -0.1 })
        );
        assert!(matches!(
            settings(EccentricityShape::Rayleigh { sigma: 0.0 }, 0.0, 1.0).validate(),
            Err(PriorError::NonPositiveScale { value, .. }) if value == 0.0
        ));
        assert!(matches!(
            settings(EccentricityShape::HalfNormal { sigma: -1.0 }, 0.0, 1.0).validate(),
            Err(PriorError::NonPositiveScale { .. })
        ));
        assert_eq!(
            settings(EccentricityShape::Beta { a: 0.0, b: 3.0 }, 0.0, 1.0).validate(),
            Err(PriorError::NonPositiveBetaShape { a: 0.0, b: 3.0 })
        );
        assert!(matches!(
            settings(EccentricityShape::LogUniform, 0.0, 1.0).validate(),
            Err(PriorError::LogUniformFloor { .. })
        ));
        assert_eq!(
            settings(EccentricityShape::Circular, 0.1, 1.0).validate(),
            Err(PriorError::CircularExcluded { e_min: 0.1 })
        );
        assert!(matches!(
            settings(u, f64::NAN, 1.0).validate(),
            Err(PriorError::NonFinite { .. })
        ));
        // Rayleigh(0.001) has ~exp(−0.9²/2e-6) mass above 0.9: zero in double precision.
        assert_eq!(
            settings(EccentricityShape::Rayleigh { sigma: 0.001 }, 0.9, 1.0).validate(),
            Err(PriorError::NoMass {
                e_min: 0.9,
                e_max: 1.0
            })
        );
        let bad_k = OrbitPriorSettings {
            semi_amplitude: ScalarPrior::Uniform {
                min: 10.0,
                max: 5.0,
            },
            ..Default::default()
        };
        assert!(matches!(
            bad_k.validate(),
            Err(PriorError::Bounds { min, max, .. }) if min == 10.0 && max == 5.0
        ));
        assert!(OrbitPriorSettings::default().validate().is_ok());
    }

    /// Plane log-density = ln p(e) − ln π: integrating p(h,k) over the unit
    /// disc in polar form ∫∫ p r dr dω with e = r² must give 1 (checked here
    /// by midpoint quadrature in e, since dh dk = ½ de dω).
    #[test]
    fn plane_density_integrates_to_one() {
        for shape in [
            EccentricityShape::Uniform,
            EccentricityShape::KIPPING_2013_ALL,
            EccentricityShape::Rayleigh { sigma: 0.2 },
            EccentricityShape::UniformInECosOmega,
        ] {
            let p = prior(shape, 0.05, 0.9);
            let n = 200_000;
            let width = 0.85 / n as f64;
            let total: f64 = (0..n)
                .map(|i| {
                    let e = 0.05 + (i as f64 + 0.5) * width;
                    let (h, k) = (libm::sqrt(e) * 0.6, libm::sqrt(e) * 0.8);
                    libm::exp(p.log_density_sqrt_e_plane(h, k))
                        * 0.5
                        * width
                        * 2.0
                        * std::f64::consts::PI
                })
                .sum();
            assert_relative_eq!(total, 1.0, epsilon = 1e-6);
        }
    }

    #[test]
    fn serde_round_trip_with_defaults() {
        let json = r#"{"eccentricity":{"shape":{"kind":"beta","a":0.867,"b":3.03},"e_max":0.95}}"#;
        let settings: OrbitPriorSettings = serde_json::from_str(json).unwrap();
        assert_eq!(
            settings.eccentricity.shape,
            EccentricityShape::KIPPING_2013_ALL
        );
        assert_eq!(settings.eccentricity.e_min, 0.0);
        assert_eq!(settings.eccentricity.e_max, 0.95);
        assert_eq!(settings.period, OrbitPriorSettings::default().period);
        let back: OrbitPriorSettings =
            serde_json::from_str(&serde_json::to_string(&settings).unwrap()).unwrap();
        assert_eq!(back, settings);
    }

    proptest! {
        /// quantile ∘ cdf is the identity on the support (common practice).
        #[test]
        fn quantile_inverts_cdf(u in 0.0f64..1.0, which in 0usize..7) {
            let shapes = [
                EccentricityShape::Uniform,
                EccentricityShape::KIPPING_2013_ALL,
                EccentricityShape::Rayleigh { sigma: 0.3 },
                EccentricityShape::HalfNormal { sigma: 0.2 },
                EccentricityShape::LogUniform,
                EccentricityShape::UniformInECosOmega,
                EccentricityShape::Beta { a: 2.5, b: 0.7 },
            ];
            let p = prior(shapes[which], 0.02, 0.93);
            let e = p.quantile(u);
            prop_assert!((0.02..=0.93).contains(&e));
            prop_assert!((p.cdf(e) - u).abs() < 1e-9, "u {} cdf {}", u, p.cdf(e));
        }

        #[test]
        fn scalar_quantile_inverts_cdf(u in 0.0f64..1.0) {
            for prior in [
                ScalarPrior::Uniform { min: -5.0, max: 7.0 },
                ScalarPrior::LogUniform { min: 0.5, max: 3000.0 },
                ScalarPrior::ModifiedJeffreys { knee: 2.0, max: 1.0e4 },
            ] {
                let x = prior.quantile(u);
                prop_assert!((prior.cdf(x) - u).abs() < 1e-12);
            }
        }
    }
}
