//! Householder QR with column pivoting and the damped triangular solve of Levenberg–Marquardt.
//!
//! Matrices are column-major slices with `m` rows (leading dimension `m`),
//! the storage of `nalgebra::DMatrix`. Nothing here allocates.

/// Householder QR factorisation with column pivoting, `A P = Q R`
/// (Businger & Golub 1965, Numer. Math. 7, 269; in the form of MINPACK
/// `qrfac`, Moré, Garbow & Hillstrom 1980, ANL-80-74).
///
/// On return the strict upper triangle of the first `n` rows of `a` holds the
/// off-diagonal part of `R`, `r_diag` its diagonal, and column `j` of `a` from
/// row `j` down holds the Householder vector `v_j`, with `Q_j = I − v vᵀ / v_j[j]`.
/// `permutation[j]` is the original index of the column now in position `j`.
/// `column_norms` receives the norms of the original columns; `work` is scratch
/// (length `n`).
pub(crate) fn qr_factor_pivoted(
    a: &mut [f64],
    m: usize,
    n: usize,
    permutation: &mut [usize],
    r_diag: &mut [f64],
    column_norms: &mut [f64],
    work: &mut [f64],
) {
    for j in 0..n {
        let norm = super::euclidean_norm(&a[j * m..(j + 1) * m]);
        column_norms[j] = norm;
        r_diag[j] = norm;
        work[j] = norm;
        permutation[j] = j;
    }
    for j in 0..n {
        // Bring the column of largest remaining norm into the pivot position.
        let mut k_max = j;
        for k in j..n {
            if r_diag[k] > r_diag[k_max] {
                k_max = k;
            }
        }
        if k_max != j {
            for i in 0..m {
                a.swap(i + j * m, i + k_max * m);
            }
            r_diag[k_max] = r_diag[j];
            work[k_max] = work[j];
            permutation.swap(j, k_max);
        }
        // Householder reflection zeroing column j below the diagonal.
        let mut a_j_norm = super::euclidean_norm(&a[j + j * m..(j + 1) * m]);
        if a_j_norm != 0.0 {
            if a[j + j * m] < 0.0 {
                a_j_norm = -a_j_norm;
            }
            for i in j..m {
                a[i + j * m] /= a_j_norm;
            }
            a[j + j * m] += 1.0;
            let pivot = a[j + j * m];
            for k in (j + 1)..n {
                // Column j (the reflector) and column k as disjoint slices, rows j..m.
                let (head, tail) = a.split_at_mut(k * m);
                let reflector = &head[j + j * m..(j + 1) * m];
                let column = &mut tail[j..m];
                let mut sum = 0.0;
                for (v, x) in reflector.iter().zip(column.iter()) {
                    sum += v * x;
                }
                let factor = sum / pivot;
                for (x, v) in column.iter_mut().zip(reflector) {
                    *x -= factor * v;
                }
                // Downdate the partial column norm; recompute when cancellation
                // has eaten its accuracy.
                if r_diag[k] != 0.0 {
                    let ratio = a[j + k * m] / r_diag[k];
                    r_diag[k] *= libm::sqrt((1.0 - ratio * ratio).max(0.0));
                    let relative = r_diag[k] / work[k];
                    if 0.05 * relative * relative <= f64::EPSILON {
                        r_diag[k] = super::euclidean_norm(&a[(j + 1) + k * m..(k + 1) * m]);
                        work[k] = r_diag[k];
                    }
                }
            }
        }
        r_diag[j] = -a_j_norm;
    }
}

/// Applies `Qᵀ` from [`qr_factor_pivoted`] to `vector` (length `m`) in place.
pub(crate) fn apply_q_transpose(a: &[f64], m: usize, n: usize, vector: &mut [f64]) {
    for j in 0..n {
        let pivot = a[j + j * m];
        if pivot != 0.0 {
            let reflector = &a[j + j * m..(j + 1) * m];
            let part = &mut vector[j..m];
            let mut sum = 0.0;
            for (v, x) in reflector.iter().zip(part.iter()) {
                sum += v * x;
            }
            let factor = -sum / pivot;
            for (x, v) in part.iter_mut().zip(reflector) {
                *x += factor * v;
            }
        }
    }
}

/// Solves the damped least-squares problem `min ‖[R; D_P] z − [qtb; 0]‖`
/// for `x = P z`, where `R P = Q R` came from [`qr_factor_pivoted`] and `D_P`
/// is the diagonal `diag` permuted by `P` (Moré 1978, §3, eliminating the
/// diagonal rows by Givens rotations; MINPACK `qrsolv`).
///
/// `r` holds `R` in the upper triangle of its first `n` rows (leading
/// dimension `ld`); its strict lower triangle is overwritten with the
/// transpose of the strict upper triangle of `S`, where `Sᵀ S = Pᵀ(JᵀJ + D²)P`,
/// and `s_diag` receives the diagonal of `S`. `work` is scratch (length `n`).
#[allow(clippy::too_many_arguments)]
pub(crate) fn solve_damped(
    r: &mut [f64],
    ld: usize,
    n: usize,
    permutation: &[usize],
    diag: &[f64],
    qtb: &[f64],
    x: &mut [f64],
    s_diag: &mut [f64],
    work: &mut [f64],
) {
    // Copy R's upper triangle into the lower one; keep R's diagonal in x.
    for j in 0..n {
        for i in j..n {
            r[i + j * ld] = r[j + i * ld];
        }
        x[j] = r[j + j * ld];
        work[j] = qtb[j];
    }
    // Eliminate the diagonal matrix D_P row by row.
    for j in 0..n {
        let d = diag[permutation[j]];
        if d != 0.0 {
            for value in s_diag[j..n].iter_mut() {
                *value = 0.0;
            }
            s_diag[j] = d;
            let mut qtb_extra = 0.0;
            for k in j..n {
                if s_diag[k] == 0.0 {
                    continue;
                }
                let r_kk = r[k + k * ld];
                let (cos, sin) = if r_kk.abs() < s_diag[k].abs() {
                    let cotan = r_kk / s_diag[k];
                    let sin = 0.5 / libm::sqrt(0.25 + 0.25 * cotan * cotan);
                    (sin * cotan, sin)
                } else {
                    let tan = s_diag[k] / r_kk;
                    let cos = 0.5 / libm::sqrt(0.25 + 0.25 * tan * tan);
                    (cos, cos * tan)
                };
                r[k + k * ld] = cos * r_kk + sin * s_diag[k];
                let rotated = cos * work[k] + sin * qtb_extra;
                qtb_extra = -sin * work[k] + cos * qtb_extra;
                work[k] = rotated;
                for i in (k + 1)..n {
                    let r_ik = r[i + k * ld];
                    let rotated = cos * r_ik + sin * s_diag[i];
                    s_diag[i] = -sin * r_ik + cos * s_diag[i];
                    r[i + k * ld] = rotated;
                }
            }
        }
        s_diag[j] = r[j + j * ld];
        r[j + j * ld] = x[j];
    }
    // Back substitution with S; a singular S gives the least-squares solution
    // with the trailing components set to zero.
    let mut n_nonsingular = n;
    for j in 0..n {
        if s_diag[j] == 0.0 && n_nonsingular == n {
            n_nonsingular = j;
        }
        if n_nonsingular < n {
            work[j] = 0.0;
        }
    }
    for j in (0..n_nonsingular).rev() {
        let mut sum = 0.0;
        for i in (j + 1)..n_nonsingular {
            sum += r[i + j * ld] * work[i];
        }
        work[j] = (work[j] - sum) / s_diag[j];
    }
    for j in 0..n {
        x[permutation[j]] = work[j];
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use approx::assert_relative_eq;
    use nalgebra::{DMatrix, DVector};

    fn test_matrix() -> DMatrix<f64> {
        DMatrix::from_row_slice(
            5,
            3,
            &[
                1.0, 2.0, 0.5, //
                -1.0, 0.3, 4.0, //
                2.0, -1.0, 1.0, //
                0.0, 5.0, -2.0, //
                3.0, 1.0, 0.7,
            ],
        )
    }

    /// `a0` factored by [`qr_factor_pivoted`]: the factored matrix (R above the diagonal),
    /// the column permutation and R's diagonal.
    fn factored(a0: &DMatrix<f64>) -> (DMatrix<f64>, Vec<usize>, Vec<f64>) {
        let (m, n) = a0.shape();
        let mut a = a0.clone();
        let (mut perm, mut r_diag, mut norms, mut work) =
            (vec![0; n], vec![0.0; n], vec![0.0; n], vec![0.0; n]);
        qr_factor_pivoted(
            a.as_mut_slice(),
            m,
            n,
            &mut perm,
            &mut r_diag,
            &mut norms,
            &mut work,
        );
        (a, perm, r_diag)
    }

    #[test]
    fn pivoted_qr_reproduces_r_transpose_r() {
        // (A P)ᵀ(A P) = Rᵀ R for any QR factorisation (common practice);
        // tolerance 1e-12 relative for a well-conditioned 5×3 matrix.
        let a0 = test_matrix();
        let (m, n) = a0.shape();
        let (a, perm, r_diag) = factored(&a0);
        let mut r = DMatrix::zeros(n, n);
        for j in 0..n {
            r[(j, j)] = r_diag[j];
            for i in 0..j {
                r[(i, j)] = a[(i, j)];
            }
        }
        let ap = DMatrix::from_fn(m, n, |i, j| a0[(i, perm[j])]);
        let lhs = ap.transpose() * &ap;
        let rhs = r.transpose() * &r;
        for (x, y) in lhs.iter().zip(rhs.iter()) {
            assert_relative_eq!(x, y, epsilon = 1e-12, max_relative = 1e-12);
        }
        // Pivoting puts the largest diagonal first.
        assert!(r_diag[0].abs() >= r_diag[1].abs() && r_diag[1].abs() >= r_diag[2].abs());
    }

    #[test]
    fn damped_solve_matches_normal_equations() {
        // x solves (AᵀA + D²) x = Aᵀ b (Moré 1978, eq. 3.1 with λ absorbed in
        // D); compared with nalgebra's LU to 1e-12 relative.
        let a0 = test_matrix();
        let (m, n) = a0.shape();
        let b = DVector::from_vec(vec![1.0, -2.0, 0.5, 3.0, 0.25]);
        let diag = [0.7, 1.3, 0.2];
        let (mut a, perm, r_diag) = factored(&a0);
        let mut qtb = b.clone();
        apply_q_transpose(a.as_slice(), m, n, qtb.as_mut_slice());
        for j in 0..n {
            a[(j, j)] = r_diag[j];
        }
        let (mut x, mut s_diag, mut work) = (vec![0.0; n], vec![0.0; n], vec![0.0; n]);
        solve_damped(
            a.as_mut_slice(),
            m,
            n,
            &perm,
            &diag,
            &qtb.as_slice()[..n],
            &mut x,
            &mut s_diag,
            &mut work,
        );
        let d2 = DMatrix::from_diagonal(&DVector::from_iterator(n, diag.iter().map(|d| d * d)));
        let lhs = a0.transpose() * &a0 + d2;
        let expected = lhs.lu().solve(&(a0.transpose() * &b)).unwrap();
        for j in 0..n {
            assert_relative_eq!(x[j], expected[j], max_relative = 1e-12);
        }
    }
}
