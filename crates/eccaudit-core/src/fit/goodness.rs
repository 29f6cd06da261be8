//! Goodness of fit of a least-squares solution: the χ² test with ν = N − d degrees of freedom
//! (its tail probability from [`crate::stats::regularized_gamma_q`]).

use serde::{Deserialize, Serialize};

use crate::stats::regularized_gamma_q;

/// Below this χ² p-value the stated uncertainties are taken to be underestimated (excess
/// scatter): 1% (common practice).
pub const EXCESS_SCATTER_P: f64 = 0.01;

/// χ², its degrees of freedom and the probability of a χ² at least this large if the model and
/// the stated uncertainties were right.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct Goodness {
    /// χ² = Σ ((v − model)/σ)² (σ including any fitted jitter).
    pub chi_squared: f64,
    /// Degrees of freedom ν = N − d (d: every fitted parameter, jitters included).
    pub dof: usize,
    /// P(χ²_ν ≥ χ²) = Q(ν/2, χ²/2); None when ν = 0.
    pub p_value: Option<f64>,
}

impl Goodness {
    /// The test for `chi_squared` with `dof` degrees of freedom.
    pub fn new(chi_squared: f64, dof: usize) -> Self {
        Self {
            chi_squared,
            dof,
            p_value: chi_squared_p_value(chi_squared, dof),
        }
    }

    /// True when p < [`EXCESS_SCATTER_P`]: more scatter than the uncertainties allow.
    pub fn excess_scatter(&self) -> bool {
        self.p_value.is_some_and(|p| p < EXCESS_SCATTER_P)
    }
}

/// P(χ²_ν ≥ `chi_squared`), the upper tail of the χ² distribution with `dof` degrees of freedom:
/// the regularised upper incomplete gamma function Q(ν/2, χ²/2). None when ν = 0 or χ² is not a
/// finite number ≥ 0.
pub fn chi_squared_p_value(chi_squared: f64, dof: usize) -> Option<f64> {
    if dof == 0 || !(chi_squared.is_finite() && chi_squared >= 0.0) {
        return None;
    }
    Some(regularized_gamma_q(0.5 * dof as f64, 0.5 * chi_squared))
}

#[cfg(test)]
mod tests {
    use super::*;

    /// P(χ²_ν ≥ x) against scipy 1.17.1 (PyPI), `scipy.special.gammaincc(nu/2, x/2)` (equal to
    /// `scipy.stats.chi2.sf(x, nu)`), computed in a throw-away venv; relative 1e-10, far below
    /// any use of these p-values.
    #[test]
    fn scipy_reference_values() {
        let cases = [
            (1, 3.84, 0.050_043_521_248_705_19),
            (5, 11.07, 0.050_009_618_622_405_425),
            (10, 2.0, 0.996_340_153_172_656_3),
            (21, 33.078, 0.045_359_339_694_492_09),
            (30, 60.0, 0.000_920_682_396_148_663_6),
            (100, 130.0, 0.023_512_397_809_808_71),
            (7, 0.5, 0.999_446_481_390_424_9),
            (200, 150.0, 0.996_647_558_501_813),
            (50, 120.0, 1.095_880_711_259_967_8e-7),
        ];
        for (nu, x, want) in cases {
            let got = chi_squared_p_value(x, nu).unwrap();
            assert!(
                (got / want - 1.0).abs() < 1e-10,
                "nu = {nu}, x = {x}: {got} vs scipy {want}"
            );
        }
        assert_eq!(chi_squared_p_value(4.0, 0), None);
    }
}
