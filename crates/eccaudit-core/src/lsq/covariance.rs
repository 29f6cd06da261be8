//! Covariance of least-squares parameters from the Jacobian at the optimum.

use nalgebra::DMatrix;

use super::qr::qr_factor_pivoted;
use super::CovarianceStatus;

/// Covariance estimate: status, row-major `(JᵀJ)⁻¹` when computed, and the
/// reciprocal-condition estimate of the column-scaled Jacobian.
#[derive(Debug, Clone, PartialEq)]
pub struct CovarianceEstimate {
    /// Whether the covariance could be computed.
    pub status: CovarianceStatus,
    /// Row-major `n × n` matrix `(JᵀJ)⁻¹`, when `status` is `Computed`.
    pub covariance: Option<Vec<f64>>,
    /// `min |R_kk| / max |R_kk|` of the pivoted QR of the column-scaled `J`.
    pub reciprocal_condition: f64,
}

/// `(JᵀJ)⁻¹` for weighted residuals, computed as `S P R⁻¹ R⁻ᵀ Pᵀ S` from
/// the pivoted QR of the column-scaled Jacobian `J S⁻¹`, `S = diag(‖J_j‖)`
/// (the R-factor route of Björck 1996, Numerical Methods for Least Squares
/// Problems, SIAM, §2.8.1; scaling by column norms after van der Sluis 1969,
/// Numer. Math. 14, 14). Forming `JᵀJ` is avoided, which would square the
/// condition number.
///
/// The matrix is declared singular (numerical rank `< n`) when a diagonal
/// element of `R` is at most `singular_tolerance` times the largest one.
pub fn covariance_from_jacobian(
    jacobian: &DMatrix<f64>,
    singular_tolerance: f64,
) -> CovarianceEstimate {
    let (m, n) = jacobian.shape();
    if jacobian.iter().any(|v| !v.is_finite()) {
        return CovarianceEstimate {
            status: CovarianceStatus::NonFiniteJacobian,
            covariance: None,
            reciprocal_condition: f64::NAN,
        };
    }
    let mut a = jacobian.clone();
    let mut scale = vec![1.0; n];
    for (j, s) in scale.iter_mut().enumerate() {
        let norm = super::euclidean_norm(a.column(j).as_slice());
        if norm > 0.0 {
            *s = norm;
            for value in a.column_mut(j).iter_mut() {
                *value /= norm;
            }
        }
    }
    let (mut permutation, mut r_diag, mut norms, mut work) =
        (vec![0usize; n], vec![0.0; n], vec![0.0; n], vec![0.0; n]);
    qr_factor_pivoted(
        a.as_mut_slice(),
        m,
        n,
        &mut permutation,
        &mut r_diag,
        &mut norms,
        &mut work,
    );
    let largest = r_diag.iter().fold(0.0f64, |acc, v| acc.max(v.abs()));
    let smallest = r_diag.iter().fold(f64::INFINITY, |acc, v| acc.min(v.abs()));
    let reciprocal_condition = if largest > 0.0 {
        smallest / largest
    } else {
        0.0
    };
    let rank = r_diag
        .iter()
        .filter(|v| largest > 0.0 && v.abs() > singular_tolerance * largest)
        .count();
    if rank < n {
        return CovarianceEstimate {
            status: CovarianceStatus::Singular { rank },
            covariance: None,
            reciprocal_condition,
        };
    }
    // R⁻¹ (upper triangular) column by column: R · R⁻¹ = I.
    let r = |i: usize, j: usize| if i == j { r_diag[i] } else { a[(i, j)] };
    let mut r_inverse = DMatrix::<f64>::zeros(n, n);
    for j in 0..n {
        for i in (0..=j).rev() {
            let mut sum = if i == j { 1.0 } else { 0.0 };
            for k in (i + 1)..=j {
                sum -= r(i, k) * r_inverse[(k, j)];
            }
            r_inverse[(i, j)] = sum / r(i, i);
        }
    }
    let mut covariance = vec![0.0; n * n];
    for i in 0..n {
        for j in 0..n {
            let mut sum = 0.0;
            for k in i.max(j)..n {
                sum += r_inverse[(i, k)] * r_inverse[(j, k)];
            }
            let (pi, pj) = (permutation[i], permutation[j]);
            covariance[pi * n + pj] = sum / (scale[pi] * scale[pj]);
        }
    }
    CovarianceEstimate {
        status: CovarianceStatus::Computed,
        covariance: Some(covariance),
        reciprocal_condition,
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use approx::assert_relative_eq;

    #[test]
    fn matches_inverse_normal_matrix_on_badly_scaled_columns() {
        // Columns differing by 10⁶ in scale: (JᵀJ)⁻¹ from nalgebra's LU of the
        // normal matrix (common practice) agrees to 1e-9 relative (cond(J) of
        // the scaled matrix is ~10, so the normal matrix loses nothing here).
        let j = DMatrix::from_row_slice(4, 2, &[1e6, 0.1, 2e6, -0.3, -1e6, 0.2, 0.5e6, 0.4]);
        let expected = (j.transpose() * &j).try_inverse().unwrap();
        let estimate = covariance_from_jacobian(&j, 1e-12);
        assert_eq!(estimate.status, CovarianceStatus::Computed);
        let c = estimate.covariance.unwrap();
        for a in 0..2 {
            for b in 0..2 {
                assert_relative_eq!(c[a * 2 + b], expected[(a, b)], max_relative = 1e-9);
            }
        }
    }

    #[test]
    fn collinear_columns_are_reported_singular() {
        // Column 2 = 3 × column 1: rank 1 exactly (degenerate sampling).
        let j = DMatrix::from_row_slice(3, 2, &[1.0, 3.0, 2.0, 6.0, -1.0, -3.0]);
        let estimate = covariance_from_jacobian(&j, 1e-12);
        assert_eq!(estimate.status, CovarianceStatus::Singular { rank: 1 });
        assert!(estimate.covariance.is_none());
        assert!(estimate.reciprocal_condition < 1e-12);
    }

    #[test]
    fn zero_column_is_reported_singular() {
        let j = DMatrix::from_row_slice(3, 2, &[1.0, 0.0, 2.0, 0.0, -1.0, 0.0]);
        let estimate = covariance_from_jacobian(&j, 1e-12);
        assert_eq!(estimate.status, CovarianceStatus::Singular { rank: 1 });
    }
}
