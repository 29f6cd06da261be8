//! Maximum-likelihood jitter of one instrument for fixed model residuals.

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
