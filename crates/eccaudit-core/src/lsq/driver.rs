//! The Levenberg–Marquardt driver: the loop, the stopping tests, the report.

use super::covariance::covariance_from_jacobian;
use super::levenberg_marquardt::{JacobianRefresh, LmSolver};
use super::{
    Bounds, CovarianceStatus, LeastSquaresProblem, LsqError, LsqOptions, LsqReport, Termination,
};

/// Minimises χ² = Σ r² of `problem` from `initial` by Levenberg–Marquardt
/// (Moré 1978, Lecture Notes in Mathematics 630, 105; see
/// [`super::levenberg_marquardt`]), with optional box `bounds`.
///
/// Allocates a fresh [`LmSolver`]; use [`fit_least_squares_with`] to reuse
/// one across many fits.
pub fn fit_least_squares<P: LeastSquaresProblem + ?Sized>(
    problem: &P,
    initial: &[f64],
    bounds: Option<&Bounds>,
    options: &LsqOptions,
) -> Result<LsqReport, LsqError> {
    let mut solver = LmSolver::new(problem.n_params(), problem.n_residuals());
    fit_least_squares_with(&mut solver, problem, initial, bounds, options)
}

/// As [`fit_least_squares`], reusing the buffers of `solver`.
///
/// Stopping tests, in MINPACK `lmder` order (Moré 1978 §8; Moré, Garbow &
/// Hillstrom 1980, ANL-80-74): after each Jacobian, gradient cosine ≤ `gtol`;
/// after each trial step, relative reduction ≤ `ftol`
/// (`|actual| ≤ ftol`, `predicted ≤ ftol`, `ρ ≤ 2`) and/or radius ≤
/// `xtol·‖D x‖`; then the evaluation limit; then the same three tests at
/// machine precision.
pub fn fit_least_squares_with<P: LeastSquaresProblem + ?Sized>(
    solver: &mut LmSolver,
    problem: &P,
    initial: &[f64],
    bounds: Option<&Bounds>,
    options: &LsqOptions,
) -> Result<LsqReport, LsqError> {
    solver.start(problem, initial, bounds, options)?;
    let n_params = problem.n_params();
    let n_residuals = problem.n_residuals();
    let evaluation_limit = options.evaluation_limit(n_params);
    let eps = f64::EPSILON;
    let termination = loop {
        if solver.needs_jacobian() {
            match solver.refresh_jacobian(problem)? {
                JacobianRefresh::NonFinite => break Termination::NonFiniteJacobian,
                JacobianRefresh::GradientCosine(cosine) => {
                    if cosine <= options.gtol {
                        break Termination::GradientOrthogonal;
                    }
                }
            }
        }
        let step = solver.trial_step(problem);
        let reduction_small = |tol: f64| {
            step.actual_reduction.abs() <= tol
                && step.predicted_reduction <= tol
                && 0.5 * step.ratio <= 1.0
        };
        let ftol_met = reduction_small(options.ftol);
        let xtol_met = step.radius <= options.xtol * step.scaled_norm;
        match (ftol_met, xtol_met) {
            (true, true) => break Termination::RelativeReductionAndStepSize,
            (true, false) => break Termination::RelativeReduction,
            (false, true) => break Termination::StepSize,
            (false, false) => {}
        }
        if solver.n_residual_evals() >= evaluation_limit {
            break Termination::MaxEvaluations;
        }
        if reduction_small(eps) {
            break Termination::ReductionAtMachinePrecision;
        }
        if step.radius <= eps * step.scaled_norm {
            break Termination::StepAtMachinePrecision;
        }
        if solver.gradient_cosine() <= eps {
            break Termination::GradientAtMachinePrecision;
        }
    };
    let chi_squared = solver.chi_squared();
    let dof = n_residuals - n_params;
    let mut report = LsqReport {
        params: solver.params().to_vec(),
        chi_squared,
        n_residuals,
        n_params,
        dof,
        reduced_chi_squared: (dof > 0).then(|| chi_squared / dof as f64),
        n_iterations: solver.n_iterations(),
        n_residual_evals: solver.n_residual_evals(),
        n_jacobian_evals: solver.n_jacobian_evals(),
        n_finite_difference_evals: 0,
        termination,
        gradient_cosine: solver.gradient_cosine(),
        covariance_status: CovarianceStatus::NotComputed,
        covariance: None,
        formal_errors: None,
        jacobian_reciprocal_condition: f64::NAN,
    };
    if options.compute_covariance {
        let jacobian = solver.external_jacobian_at_best(problem)?;
        let estimate = covariance_from_jacobian(jacobian, options.singular_tolerance);
        report.formal_errors = estimate.covariance.as_ref().map(|c| {
            (0..n_params)
                .map(|j| libm::sqrt(c[j * n_params + j]))
                .collect()
        });
        report.covariance_status = estimate.status;
        report.covariance = estimate.covariance;
        report.jacobian_reciprocal_condition = estimate.reciprocal_condition;
    }
    report.n_finite_difference_evals = solver.n_finite_difference_evals();
    Ok(report)
}
