//! Finite-difference Jacobians of least-squares residuals.

use nalgebra::DMatrix;
use serde::Serialize;

use super::{Bounds, LeastSquaresProblem};

/// Finite-difference rule and its step.
///
/// With ε the double-precision machine epsilon and `x_j` the parameter, the
/// step is `h_j = c·max(|x_j|, 1)`, the rule of `scipy.optimize.least_squares`
/// (Virtanen et al. 2020, Nature Methods 17, 261; documentation of `diff_step`),
/// which keeps the step from vanishing for parameters near zero (a purely
/// relative step `c·|x_j|` would make rounding dominate there):
/// * `Forward`: `c = sqrt(ε)`, error O(h);
/// * `Central`: `c = cbrt(ε)`, error O(h²) — the steps balancing truncation
///   and rounding (Press et al. 2007, Numerical Recipes 3rd ed., §5.7,
///   eqs. 5.7.5 and 5.7.8).
///
/// Parameters much smaller than 1 in magnitude therefore get an absolute step
/// of about 1.5e-8 (forward) or 6e-6 (central); scale such parameters to order
/// unity, or supply an analytic Jacobian.
///
/// Steps are rounded so that `x_j + h_j` is exactly representable. Near a
/// bound the rule falls back to a one-sided difference on the feasible side.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum FiniteDifference {
    /// One extra residual evaluation per parameter.
    Forward,
    /// Two extra residual evaluations per parameter.
    Central,
}

/// Fills `jacobian` (`n_residuals × n_params`) with a finite-difference
/// approximation of `∂r_i/∂p_j` at `params`, given the residuals there.
///
/// `scratch_params` (length `n_params`), `scratch_plus` and `scratch_minus`
/// (length `n_residuals`) are work buffers, so no allocation happens. Returns
/// the number of residual evaluations spent.
///
/// # Panics
/// When a buffer has the wrong length (a programming error, never user input).
#[allow(clippy::too_many_arguments)]
pub fn finite_difference_jacobian<P: LeastSquaresProblem + ?Sized>(
    problem: &P,
    params: &[f64],
    residuals_at_params: &[f64],
    rule: FiniteDifference,
    bounds: Option<&Bounds>,
    jacobian: &mut DMatrix<f64>,
    scratch_params: &mut [f64],
    scratch_plus: &mut [f64],
    scratch_minus: &mut [f64],
) -> usize {
    let n_params = params.len();
    let n_residuals = residuals_at_params.len();
    assert_eq!(jacobian.shape(), (n_residuals, n_params));
    assert_eq!(scratch_params.len(), n_params);
    assert_eq!(scratch_plus.len(), n_residuals);
    assert_eq!(scratch_minus.len(), n_residuals);
    let relative_step = match rule {
        FiniteDifference::Forward => libm::sqrt(f64::EPSILON),
        FiniteDifference::Central => libm::cbrt(f64::EPSILON),
    };
    scratch_params.copy_from_slice(params);
    let mut n_evals = 0;
    for j in 0..n_params {
        let x = params[j];
        let (lower, upper) = bounds
            .map(|b| (b.lower[j], b.upper[j]))
            .unwrap_or((f64::NEG_INFINITY, f64::INFINITY));
        let raw_step = relative_step * x.abs().max(1.0);
        // Exactly representable steps (Press et al. 2007, §5.7, eq. 5.7.4).
        let step_up = (x + raw_step) - x;
        let step_down = x - (x - raw_step);
        let up_ok = x + step_up <= upper;
        let down_ok = x - step_down >= lower;
        let use_central = rule == FiniteDifference::Central && up_ok && down_ok;
        let mut column = jacobian.column_mut(j);
        if use_central {
            scratch_params[j] = x + step_up;
            problem.residuals(scratch_params, scratch_plus);
            scratch_params[j] = x - step_down;
            problem.residuals(scratch_params, scratch_minus);
            n_evals += 2;
            let width = step_up + step_down;
            for i in 0..n_residuals {
                column[i] = (scratch_plus[i] - scratch_minus[i]) / width;
            }
        } else if up_ok || !down_ok {
            scratch_params[j] = x + step_up;
            problem.residuals(scratch_params, scratch_plus);
            n_evals += 1;
            for i in 0..n_residuals {
                column[i] = (scratch_plus[i] - residuals_at_params[i]) / step_up;
            }
        } else {
            scratch_params[j] = x - step_down;
            problem.residuals(scratch_params, scratch_minus);
            n_evals += 1;
            for i in 0..n_residuals {
                column[i] = (residuals_at_params[i] - scratch_minus[i]) / step_down;
            }
        }
        scratch_params[j] = x;
    }
    n_evals
}
