//! Box bounds on parameters through the MINUIT change of variables.
//!
//! The solver works on unbounded internal variables `u`; the problem sees
//! external values `x` (James & Roos 1975, Comput. Phys. Commun. 10, 343;
//! F. James, MINUIT Reference Manual, CERN Program Library D506, §"Parameter
//! limits"):
//!
//! * both bounds: `x = lo + (hi − lo)(sin u + 1)/2`, `u = asin(2(x − lo)/(hi − lo) − 1)`;
//! * lower only: `x = lo − 1 + sqrt(u² + 1)`, `u = sqrt((x − lo + 1)² − 1)`;
//! * upper only: `x = hi + 1 − sqrt(u² + 1)`, `u = sqrt((hi − x + 1)² − 1)`;
//! * none: `x = u`.
//!
//! A parameter that starts exactly on a bound has `dx/du = 0` and cannot move;
//! start strictly inside. Convergence tolerances (`xtol`) apply to `u`.

use super::LsqError;

/// Lower and upper bound for each parameter; infinite values mean "no bound".
#[derive(Debug, Clone, PartialEq)]
pub struct Bounds {
    /// Lower bounds (`f64::NEG_INFINITY` for none).
    pub lower: Vec<f64>,
    /// Upper bounds (`f64::INFINITY` for none).
    pub upper: Vec<f64>,
}

impl Bounds {
    /// No bounds on any of `n_params` parameters.
    pub fn unbounded(n_params: usize) -> Self {
        Self {
            lower: vec![f64::NEG_INFINITY; n_params],
            upper: vec![f64::INFINITY; n_params],
        }
    }

    /// Bounds from `(lower, upper)` pairs.
    pub fn from_pairs(pairs: &[(f64, f64)]) -> Self {
        Self {
            lower: pairs.iter().map(|p| p.0).collect(),
            upper: pairs.iter().map(|p| p.1).collect(),
        }
    }

    /// Checks lengths, ordering, and that `initial` lies within the bounds.
    pub fn validate(&self, initial: &[f64]) -> Result<(), LsqError> {
        let expected = initial.len();
        for got in [self.lower.len(), self.upper.len()] {
            if got != expected {
                return Err(LsqError::BoundsLength { got, expected });
            }
        }
        for (index, ((&lower, &upper), &value)) in
            self.lower.iter().zip(&self.upper).zip(initial).enumerate()
        {
            // Also rejects lower = +∞ and upper = −∞.
            if lower.is_nan() || upper.is_nan() || lower >= upper {
                return Err(LsqError::InvalidBounds {
                    index,
                    lower,
                    upper,
                });
            }
            if value < lower || value > upper {
                return Err(LsqError::InitialOutsideBounds {
                    index,
                    value,
                    lower,
                    upper,
                });
            }
        }
        Ok(())
    }
}

/// The kind of transformation for one parameter.
#[derive(Debug, Clone, Copy, PartialEq)]
pub(crate) enum Transform {
    /// `x = u`.
    Identity,
    /// `x = lo − 1 + sqrt(u² + 1)`.
    Lower(f64),
    /// `x = hi + 1 − sqrt(u² + 1)`.
    Upper(f64),
    /// `x = lo + (hi − lo)(sin u + 1)/2`.
    Both(f64, f64),
}

impl Transform {
    /// The transformation for bounds `lower`, `upper`.
    pub(crate) fn new(lower: f64, upper: f64) -> Self {
        match (lower.is_finite(), upper.is_finite()) {
            (false, false) => Transform::Identity,
            (true, false) => Transform::Lower(lower),
            (false, true) => Transform::Upper(upper),
            (true, true) => Transform::Both(lower, upper),
        }
    }

    /// External value from internal `u`.
    pub(crate) fn to_external(self, u: f64) -> f64 {
        match self {
            Transform::Identity => u,
            Transform::Lower(lo) => lo - 1.0 + libm::sqrt(u * u + 1.0),
            Transform::Upper(hi) => hi + 1.0 - libm::sqrt(u * u + 1.0),
            Transform::Both(lo, hi) => {
                let x = lo + 0.5 * (hi - lo) * (libm::sin(u) + 1.0);
                x.clamp(lo, hi)
            }
        }
    }

    /// Internal value from external `x` (inside the bounds).
    pub(crate) fn to_internal(self, x: f64) -> f64 {
        match self {
            Transform::Identity => x,
            Transform::Lower(lo) => {
                let t = x - lo + 1.0;
                libm::sqrt((t * t - 1.0).max(0.0))
            }
            Transform::Upper(hi) => {
                let t = hi - x + 1.0;
                libm::sqrt((t * t - 1.0).max(0.0))
            }
            Transform::Both(lo, hi) => {
                libm::asin((2.0 * (x - lo) / (hi - lo) - 1.0).clamp(-1.0, 1.0))
            }
        }
    }

    /// Derivative `dx/du` at internal `u`.
    pub(crate) fn derivative(self, u: f64) -> f64 {
        match self {
            Transform::Identity => 1.0,
            Transform::Lower(_) => u / libm::sqrt(u * u + 1.0),
            Transform::Upper(_) => -u / libm::sqrt(u * u + 1.0),
            Transform::Both(lo, hi) => 0.5 * (hi - lo) * libm::cos(u),
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use approx::assert_relative_eq;
    use proptest::prelude::*;

    proptest! {
        // Round trip external → internal → external; tolerance 1e-9 relative to
        // the bound scale (asin/sin lose ~sqrt(eps) only at the bounds, where
        // we stay away by 1e-3 of the interval).
        #[test]
        fn round_trip_two_sided(lo in -10.0f64..0.0, width in 0.1f64..10.0, frac in 1e-3f64..(1.0 - 1e-3)) {
            let hi = lo + width;
            let x = lo + frac * width;
            let t = Transform::new(lo, hi);
            let back = t.to_external(t.to_internal(x));
            prop_assert!((back - x).abs() <= 1e-9 * width);
        }

        #[test]
        fn round_trip_one_sided(lo in -10.0f64..10.0, offset in 1e-3f64..100.0) {
            let lower = Transform::new(lo, f64::INFINITY);
            let back = lower.to_external(lower.to_internal(lo + offset));
            prop_assert!((back - (lo + offset)).abs() <= 1e-9 * (1.0 + offset));
            let upper = Transform::new(f64::NEG_INFINITY, lo);
            let back = upper.to_external(upper.to_internal(lo - offset));
            prop_assert!((back - (lo - offset)).abs() <= 1e-9 * (1.0 + offset));
        }

        // External values always stay inside the bounds, whatever u is.
        #[test]
        fn external_always_inside(u in -1e3f64..1e3) {
            let both = Transform::new(0.0, 1.0).to_external(u);
            prop_assert!((0.0..=1.0).contains(&both));
            prop_assert!(Transform::new(2.0, f64::INFINITY).to_external(u) >= 2.0);
            prop_assert!(Transform::new(f64::NEG_INFINITY, -2.0).to_external(u) <= -2.0);
        }
    }

    #[test]
    fn derivative_matches_central_difference() {
        // Central difference with h = 1e-6: truncation error ~h² ≈ 1e-12,
        // rounding ~eps/h ≈ 2e-10, so 1e-8 absolute is safe.
        let h = 1e-6;
        for t in [
            Transform::new(0.0, 1.0),
            Transform::new(-3.0, f64::INFINITY),
            Transform::new(f64::NEG_INFINITY, 5.0),
            Transform::new(f64::NEG_INFINITY, f64::INFINITY),
        ] {
            for u in [-2.0, -0.3, 0.0, 0.7, 1.9] {
                let numeric = (t.to_external(u + h) - t.to_external(u - h)) / (2.0 * h);
                assert_relative_eq!(t.derivative(u), numeric, epsilon = 1e-8);
            }
        }
    }

    #[test]
    fn validate_rejects_bad_bounds_and_outside_start() {
        let b = Bounds::from_pairs(&[(0.0, 1.0), (2.0, 2.0)]);
        assert!(matches!(
            b.validate(&[0.5, 2.0]),
            Err(LsqError::InvalidBounds { index: 1, .. })
        ));
        let b = Bounds::from_pairs(&[(0.0, 1.0)]);
        assert!(matches!(
            b.validate(&[1.5]),
            Err(LsqError::InitialOutsideBounds { index: 0, .. })
        ));
        assert!(matches!(
            b.validate(&[0.5, 0.5]),
            Err(LsqError::BoundsLength {
                got: 1,
                expected: 2
            })
        ));
        assert!(b.validate(&[0.25]).is_ok());
    }
}
