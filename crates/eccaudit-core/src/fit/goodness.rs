//! Goodness of fit of a least-squares solution: the χ² test with ν = N − d degrees of freedom.

use serde::{Deserialize, Serialize};

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

/// The regularised upper incomplete gamma function Q(a, x) = Γ(a, x)/Γ(a) for a > 0, x ≥ 0:
/// the series of P(a, x) for x < a + 1 and the continued fraction of Q(a, x), evaluated by the
/// modified Lentz method, otherwise (Press et al. 2007, Numerical Recipes, 3rd ed., §6.2; from
/// memory). Both run to a relative change of 1e-16 (at most 10⁴ terms); ln Γ from `libm`.
pub fn regularized_gamma_q(a: f64, x: f64) -> f64 {
    if x.is_nan() || a.is_nan() || a <= 0.0 || x < 0.0 {
        return f64::NAN;
    }
    if x == 0.0 {
        return 1.0;
    }
    let log_prefactor = a * libm::log(x) - x - libm::lgamma(a);
    if x < a + 1.0 {
        // P(a, x) = e^{−x} x^a / Γ(a + 1) Σ x^n / ((a + 1)…(a + n)).
        let mut term = 1.0 / a;
        let mut sum = term;
        let mut ap = a;
        for _ in 0..10_000 {
            ap += 1.0;
            term *= x / ap;
            sum += term;
            if term.abs() < sum.abs() * 1e-16 {
                break;
            }
        }
        (1.0 - sum * libm::exp(log_prefactor)).max(0.0)
    } else {
        const TINY: f64 = 1e-300;
        let mut b = x + 1.0 - a;
        let mut c = 1.0 / TINY;
        let mut d = 1.0 / b;
        let mut h = d;
        for i in 1..10_000 {
            let an = -(i as f64) * (i as f64 - a);
            b += 2.0;
            d = an * d + b;
            if d.abs() < TINY {
                d = TINY;
            }
            c = b + an / c;
            if c.abs() < TINY {
                c = TINY;
            }
            d = 1.0 / d;
            let delta = d * c;
            h *= delta;
            if (delta - 1.0).abs() < 1e-16 {
                break;
            }
        }
        (libm::exp(log_prefactor) * h).clamp(0.0, 1.0)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Closed forms: Q(1, x) = e^{−x} (χ² with 2 degrees of freedom) and
    /// Q(1/2, x) = erfc(√x) (1 degree of freedom) — textbook identities (Abramowitz & Stegun
    /// 1964, 6.5.17 and 6.5.19; from memory).
    #[test]
    fn closed_forms() {
        for x in [0.01, 0.5, 1.0, 2.0, 5.0, 20.0, 60.0] {
            let q1 = regularized_gamma_q(1.0, x);
            assert!((q1 / libm::exp(-x) - 1.0).abs() < 1e-13, "x = {x}: {q1}");
            let qh = regularized_gamma_q(0.5, x);
            assert!(
                (qh / libm::erfc(libm::sqrt(x)) - 1.0).abs() < 1e-12,
                "x = {x}: {qh}"
            );
        }
        assert_eq!(regularized_gamma_q(3.0, 0.0), 1.0);
    }

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
