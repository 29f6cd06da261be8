//! Jitter of one instrument for fixed model residuals: plain maximum likelihood, and the
//! modified likelihood of Baluev (2009), which is much less biased low.

use serde::{Deserialize, Serialize};

/// How a jitter is estimated.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize, Default)]
#[serde(rename_all = "snake_case")]
pub enum JitterMethod {
    /// Plain maximum likelihood ([`ml_jitter`]): biased low by the fitted parameters.
    MaximumLikelihood,
    /// The modified likelihood of Baluev (2009, MNRAS 393, 969; volume from memory): the
    /// likelihood of the residuals scaled by √(N/(N − d)), d the number of fitted model
    /// parameters, N the number of epochs ([`modified_likelihood_jitter`]).
    #[default]
    ModifiedLikelihood,
}

impl JitterMethod {
    /// The method in words, with its source.
    pub fn label(self) -> &'static str {
        match self {
            JitterMethod::MaximumLikelihood => "maximum likelihood",
            JitterMethod::ModifiedLikelihood => {
                "modified likelihood of Baluev (2009), residuals scaled by sqrt(N/(N-d))"
            }
        }
    }
}

/// The jitter of one instrument by the modified maximum-likelihood method of Baluev (2009,
/// MNRAS 393, 969 — "Accounting for velocity jitter in planet search surveys"; the form below
/// from memory): the likelihood is maximised with every residual multiplied by √(N/(N − d)),
/// where N is the number of epochs of the whole fit and d the number of fitted model
/// parameters (orbits, offsets, trend; not the jitters). This removes, to first order, the
/// downward bias of the plain maximum-likelihood jitter, which sees residuals shrunk by the
/// fit. With N ≤ d the factor is undefined and plain maximum likelihood is returned.
pub fn modified_likelihood_jitter(
    residuals: &[f64],
    sigmas: &[f64],
    n_points: usize,
    n_model_params: usize,
) -> f64 {
    if n_points <= n_model_params {
        return ml_jitter(residuals, sigmas);
    }
    let scale = libm::sqrt(n_points as f64 / (n_points - n_model_params) as f64);
    let scaled: Vec<f64> = residuals.iter().map(|r| r * scale).collect();
    ml_jitter(&scaled, sigmas)
}

/// The jitter s ≥ 0 [m/s] that maximises the Gaussian likelihood of `residuals` (data − model,
/// m/s) with uncertainties `sigmas` (m/s) inflated to √(σ² + s²), i.e. minimises
/// Σ [u²/(σ² + s²) + ln(σ² + s²)] (common practice; e.g. Gregory 2005, ApJ 631, 1198, for the
/// "jitter" term — reference from memory).
///
/// The derivative in v = s², g(v) = Σ [1/(σ²+v) − u²/(σ²+v)²], is negative where more jitter
/// helps; when g(0) ≥ 0 the answer is s = 0. Otherwise g changes sign in (0, max u²] (every term
/// is ≥ 0 once v ≥ u²) and the root is found by bisection to 1e-12 relative in v. This is the
/// maximum-likelihood value, which is biased low by the fitted parameters (no degrees-of-freedom
/// correction).
pub fn ml_jitter(residuals: &[f64], sigmas: &[f64]) -> f64 {
    let g = |v: f64| -> f64 {
        residuals
            .iter()
            .zip(sigmas)
            .map(|(u, s)| {
                let var = s * s + v;
                (1.0 - u * u / var) / var
            })
            .sum()
    };
    if residuals.is_empty() || g(0.0) >= 0.0 {
        return 0.0;
    }
    let mut lo = 0.0;
    let mut hi = residuals.iter().fold(0.0f64, |m, u| m.max(u * u));
    if hi.is_nan() || hi <= 0.0 {
        return 0.0;
    }
    while g(hi) < 0.0 {
        hi *= 2.0;
    }
    for _ in 0..200 {
        let mid = 0.5 * (lo + hi);
        if g(mid) < 0.0 {
            lo = mid;
        } else {
            hi = mid;
        }
        if hi - lo <= 1e-12 * hi {
            break;
        }
    }
    libm::sqrt(0.5 * (lo + hi))
}

#[cfg(test)]
mod tests {
    use super::*;
    use approx::assert_relative_eq;

    #[test]
    fn equal_errors_closed_form() {
        // With equal σ the ML variance is mean(u²) − σ² (closed form of g(v) = 0).
        let u = [3.0, -4.0, 5.0, -1.0, 2.0];
        let s = [1.5; 5];
        let mean_sq = u.iter().map(|x| x * x).sum::<f64>() / 5.0;
        assert_relative_eq!(
            ml_jitter(&u, &s),
            libm::sqrt(mean_sq - 2.25),
            max_relative = 1e-10
        );
        // Residuals smaller than the errors: no jitter.
        assert_eq!(ml_jitter(&[0.1, -0.2], &[1.0, 1.0]), 0.0);
    }
}
