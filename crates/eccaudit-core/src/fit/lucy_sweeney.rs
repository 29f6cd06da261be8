//! The Lucy & Sweeney (1971) significance test of a fitted eccentricity.

use serde::Serialize;

/// Threshold of the test recommended by Lucy & Sweeney (1971, AJ 76, 544): an orbit whose
/// probability `p` of arising from a circular orbit by chance exceeds 5 % is kept circular.
pub const LUCY_SWEENEY_THRESHOLD: f64 = 0.05;

/// Outcome of the test for one companion.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct LucySweeney {
    /// Fitted eccentricity ê.
    pub eccentricity: f64,
    /// Its standard error σ_e (see [`eccentricity_error`]).
    pub eccentricity_error: f64,
    /// p = exp(−ê² / (2 σ_e²)).
    pub probability: f64,
    /// The threshold used.
    pub threshold: f64,
    /// True when the eccentricity is significant (`p ≤ threshold`); false means the orbit is
    /// kept circular.
    pub significant: bool,
}

/// σ_e from the covariance of (x, y) = (e cos ω, e sin ω) by the delta method: with
/// e = √(x² + y²), ∇e = (cos ω, sin ω), so σ_e² = cos²ω Σxx + 2 cos ω sin ω Σxy + sin²ω Σyy
/// (common practice). These coordinates are used because the Jacobian of the RV model is regular
/// there even at e = 0, unlike in (√e cos ω, √e sin ω). At ê = 0 exactly the direction is
/// undefined and the mean variance √((Σxx + Σyy)/2) is returned.
pub fn eccentricity_error(x: f64, y: f64, sxx: f64, sxy: f64, syy: f64) -> f64 {
    let e = libm::hypot(x, y);
    if e == 0.0 {
        return libm::sqrt(0.5 * (sxx + syy));
    }
    let (c, s) = (x / e, y / e);
    libm::sqrt((c * c * sxx + 2.0 * c * s * sxy + s * s * syy).max(0.0))
}

/// The test of Lucy, L. B. & Sweeney, M. A. (1971), AJ 76, 544 (formula as commonly quoted; from memory):
/// the probability that an eccentricity at least `eccentricity` would be found from a truly
/// circular orbit is p = exp(−ê² / (2 σ_e²)); the eccentricity is significant when p ≤
/// `threshold` (they recommend 0.05). A non-finite or zero σ_e gives p = 0 when ê > 0
/// (nothing contradicts the fit) and p = 1 when ê = 0.
pub fn lucy_sweeney(eccentricity: f64, eccentricity_error: f64, threshold: f64) -> LucySweeney {
    let probability = if eccentricity == 0.0 {
        1.0
    } else if eccentricity_error > 0.0 && eccentricity_error.is_finite() {
        libm::exp(-eccentricity * eccentricity / (2.0 * eccentricity_error * eccentricity_error))
    } else {
        0.0
    };
    LucySweeney {
        eccentricity,
        eccentricity_error,
        probability,
        threshold,
        significant: probability <= threshold,
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use approx::assert_relative_eq;

    #[test]
    fn probability_formula_and_threshold() {
        // p = exp(−ê²/(2σ²)) (Lucy & Sweeney 1971, AJ 76, 544). ê = 2.4477 σ gives p = 0.05:
        // √(2 ln 20) = 2.44775 (closed form).
        let edge = libm::sqrt(2.0 * libm::log(20.0));
        let at = lucy_sweeney(edge * 0.01, 0.01, LUCY_SWEENEY_THRESHOLD);
        assert_relative_eq!(at.probability, 0.05, max_relative = 1e-12);
        assert!(lucy_sweeney(3.0 * 0.01, 0.01, 0.05).significant);
        assert!(!lucy_sweeney(2.0 * 0.01, 0.01, 0.05).significant);
        assert_relative_eq!(
            lucy_sweeney(0.02, 0.01, 0.05).probability,
            libm::exp(-2.0),
            max_relative = 1e-14
        );
        assert_eq!(lucy_sweeney(0.0, 0.01, 0.05).probability, 1.0);
    }

    #[test]
    fn delta_method_sigma_e() {
        // Along x only: σ_e = √Σxx; rotated by 45°: (Σxx + 2Σxy + Σyy)/2 (delta method).
        assert_relative_eq!(
            eccentricity_error(0.3, 0.0, 0.04, 0.01, 0.09),
            0.2,
            max_relative = 1e-14
        );
        assert_relative_eq!(
            eccentricity_error(0.2, 0.2, 0.04, 0.01, 0.09),
            libm::sqrt((0.04 + 0.02 + 0.09) / 2.0),
            max_relative = 1e-14
        );
        assert_relative_eq!(
            eccentricity_error(0.0, 0.0, 0.04, 0.0, 0.09),
            libm::sqrt(0.065),
            max_relative = 1e-14
        );
    }
}
