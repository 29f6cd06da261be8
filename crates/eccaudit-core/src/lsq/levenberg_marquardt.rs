//! Levenberg–Marquardt solver state and steps, after Moré (1978).
//!
//! J. J. Moré, "The Levenberg-Marquardt algorithm: implementation and theory",
//! in G. A. Watson (ed.), Numerical Analysis, Lecture Notes in Mathematics 630,
//! Springer 1978, pp. 105–116; with the details of its MINPACK realisation
//! `lmder`/`lmpar` (Moré, Garbow & Hillstrom 1980, Argonne report ANL-80-74).
//! What is followed:
//!
//! * trust-region form: each step solves `min ‖J p + r‖` subject to
//!   `‖D p‖ ≤ Δ`, the Levenberg–Marquardt parameter λ being found by the
//!   safeguarded Newton iteration of Moré 1978 §5 (Algorithm 5.5), accepted
//!   when `|‖D p‖ − Δ| ≤ 0.1 Δ`;
//! * damped system solved through the pivoted QR of `J` and Givens
//!   elimination of `√λ D` (§3), never forming `JᵀJ`; a rank-deficient `J` at
//!   λ = 0 yields the minimum-length-in-the-pivoted-sense Gauss–Newton step;
//! * diagonal scaling `D_jj = max(D_jj, ‖J_{·j}‖)` updated at every Jacobian
//!   (§6, eq. 6.3), starting from the column norms (1 for a zero column);
//! * radius update from ρ = actual / predicted reduction (§4, eq. 4.4 and
//!   Algorithm 7.1): ρ ≤ ¼ shrinks Δ by a factor μ ∈ [0.1, 0.5] from the
//!   quadratic interpolation of MINPACK; ρ ≥ ¾ (or λ = 0) sets Δ = 2‖D p‖;
//!   the step is accepted when ρ ≥ 10⁻⁴;
//! * initial radius Δ₀ = factor·‖D x₀‖ (§6), clipped to the first step length.
//!
//! Trial points where the problem returns non-finite residuals are treated as
//! failed steps (ρ < 0), which shrinks Δ by the factor 0.1.
//!
//! The solver works on internal (unbounded) variables, see [`super::bounds`].
//! All buffers live in [`LmSolver`]; `refresh_jacobian` and `trial_step` do not
//! allocate.

use nalgebra::DMatrix;
use serde::Serialize;

use super::bounds::Transform;
use super::qr::{apply_q_transpose, qr_factor_pivoted, solve_damped};
use super::{
    euclidean_norm, finite_difference_jacobian, Bounds, LeastSquaresProblem, LsqError, LsqOptions,
};

/// Outcome of one Jacobian refresh.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum JacobianRefresh {
    /// Largest cosine between the residual vector and a Jacobian column.
    GradientCosine(f64),
    /// The Jacobian had a non-finite entry; the solver cannot continue.
    NonFinite,
}

/// Figures of one trial step (Moré 1978 §4), all relative to the current χ.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct TrialStep {
    /// Whether the step was accepted (ρ ≥ 10⁻⁴).
    pub accepted: bool,
    /// Actual relative reduction `1 − (‖r(x+p)‖/‖r(x)‖)²` (−1 for a rise by
    /// more than a factor 10 in ‖r‖ or non-finite residuals).
    pub actual_reduction: f64,
    /// Predicted relative reduction of the linear model.
    pub predicted_reduction: f64,
    /// ρ = actual / predicted.
    pub ratio: f64,
    /// Trust-region radius after the update.
    pub radius: f64,
    /// Scaled norm ‖D x‖ of the current (possibly new) point.
    pub scaled_norm: f64,
    /// Levenberg–Marquardt parameter λ after the update.
    pub lm_parameter: f64,
}

/// Levenberg–Marquardt state and every buffer it needs, sized once for a
/// problem shape and reused across fits.
#[derive(Debug, Clone)]
pub struct LmSolver {
    n_params: usize,
    n_residuals: usize,
    transforms: Vec<Transform>,
    bounds: Bounds,
    has_bounds: bool,
    internal: Vec<f64>,
    external: Vec<f64>,
    residuals: Vec<f64>,
    residual_norm: f64,
    jacobian: DMatrix<f64>,
    diag: Vec<f64>,
    qtf: Vec<f64>,
    permutation: Vec<usize>,
    r_diag: Vec<f64>,
    column_norms: Vec<f64>,
    s_diag: Vec<f64>,
    work_n1: Vec<f64>,
    work_n2: Vec<f64>,
    step: Vec<f64>,
    trial_internal: Vec<f64>,
    trial_external: Vec<f64>,
    trial_residuals: Vec<f64>,
    work_m: Vec<f64>,
    fd_params: Vec<f64>,
    fd_minus: Vec<f64>,
    finite_difference: super::FiniteDifference,
    step_bound_factor: f64,
    radius: f64,
    lm_parameter: f64,
    scaled_norm: f64,
    gradient_cosine: f64,
    n_iterations: usize,
    n_residual_evals: usize,
    n_jacobian_evals: usize,
    n_finite_difference_evals: usize,
    first_jacobian: bool,
    first_trial: bool,
    needs_jacobian: bool,
}

impl LmSolver {
    /// A solver with buffers for `n_params` parameters and `n_residuals`
    /// residuals. [`LmSolver::start`] resizes them if a problem of another
    /// shape comes along.
    pub fn new(n_params: usize, n_residuals: usize) -> Self {
        let mut solver = Self {
            n_params: 0,
            n_residuals: 0,
            transforms: Vec::new(),
            bounds: Bounds::unbounded(0),
            has_bounds: false,
            internal: Vec::new(),
            external: Vec::new(),
            residuals: Vec::new(),
            residual_norm: f64::NAN,
            jacobian: DMatrix::zeros(0, 0),
            diag: Vec::new(),
            qtf: Vec::new(),
            permutation: Vec::new(),
            r_diag: Vec::new(),
            column_norms: Vec::new(),
            s_diag: Vec::new(),
            work_n1: Vec::new(),
            work_n2: Vec::new(),
            step: Vec::new(),
            trial_internal: Vec::new(),
            trial_external: Vec::new(),
            trial_residuals: Vec::new(),
            work_m: Vec::new(),
            fd_params: Vec::new(),
            fd_minus: Vec::new(),
            finite_difference: super::FiniteDifference::Central,
            step_bound_factor: 100.0,
            radius: 0.0,
            lm_parameter: 0.0,
            scaled_norm: 0.0,
            gradient_cosine: f64::NAN,
            n_iterations: 0,
            n_residual_evals: 0,
            n_jacobian_evals: 0,
            n_finite_difference_evals: 0,
            first_jacobian: true,
            first_trial: true,
            needs_jacobian: true,
        };
        solver.resize(n_params, n_residuals);
        solver
    }

    fn resize(&mut self, n_params: usize, n_residuals: usize) {
        if self.n_params == n_params && self.n_residuals == n_residuals {
            return;
        }
        self.n_params = n_params;
        self.n_residuals = n_residuals;
        for v in [
            &mut self.internal,
            &mut self.external,
            &mut self.diag,
            &mut self.qtf,
            &mut self.r_diag,
            &mut self.column_norms,
            &mut self.s_diag,
            &mut self.work_n1,
            &mut self.work_n2,
            &mut self.step,
            &mut self.trial_internal,
            &mut self.trial_external,
            &mut self.fd_params,
        ] {
            v.resize(n_params, 0.0);
        }
        for v in [
            &mut self.residuals,
            &mut self.trial_residuals,
            &mut self.work_m,
            &mut self.fd_minus,
        ] {
            v.resize(n_residuals, 0.0);
        }
        self.permutation.resize(n_params, 0);
        self.transforms.resize(n_params, Transform::Identity);
        self.jacobian = DMatrix::zeros(n_residuals, n_params);
    }

    /// Validates the problem, the start point and the options, and evaluates
    /// the residuals at `initial` (external values).
    pub fn start<P: LeastSquaresProblem + ?Sized>(
        &mut self,
        problem: &P,
        initial: &[f64],
        bounds: Option<&Bounds>,
        options: &LsqOptions,
    ) -> Result<(), LsqError> {
        let n_params = problem.n_params();
        let n_residuals = problem.n_residuals();
        if n_params == 0 {
            return Err(LsqError::NoParameters);
        }
        if n_residuals < n_params {
            return Err(LsqError::MoreParamsThanResiduals {
                n_params,
                n_residuals,
            });
        }
        if initial.len() != n_params {
            return Err(LsqError::InitialLength {
                got: initial.len(),
                expected: n_params,
            });
        }
        if let Some((index, &value)) = initial.iter().enumerate().find(|(_, v)| !v.is_finite()) {
            return Err(LsqError::NonFiniteInitialParameter { index, value });
        }
        validate_options(options)?;
        self.resize(n_params, n_residuals);
        match bounds {
            Some(b) => {
                b.validate(initial)?;
                self.bounds.clone_from(b);
                self.has_bounds = true;
            }
            None => {
                self.bounds.lower.clear();
                self.bounds.lower.resize(n_params, f64::NEG_INFINITY);
                self.bounds.upper.clear();
                self.bounds.upper.resize(n_params, f64::INFINITY);
                self.has_bounds = false;
            }
        }
        for (j, &value) in initial.iter().enumerate() {
            let transform = Transform::new(self.bounds.lower[j], self.bounds.upper[j]);
            self.transforms[j] = transform;
            self.internal[j] = transform.to_internal(value);
            self.external[j] = transform.to_external(self.internal[j]);
        }
        problem.residuals(&self.external, &mut self.residuals);
        if let Some((index, &value)) = self
            .residuals
            .iter()
            .enumerate()
            .find(|(_, v)| !v.is_finite())
        {
            return Err(LsqError::NonFiniteInitialResidual { index, value });
        }
        self.residual_norm = euclidean_norm(&self.residuals);
        self.finite_difference = options.finite_difference;
        self.step_bound_factor = options.step_bound_factor;
        self.radius = 0.0;
        self.lm_parameter = 0.0;
        self.scaled_norm = 0.0;
        self.gradient_cosine = f64::NAN;
        self.n_iterations = 0;
        self.n_residual_evals = 1;
        self.n_jacobian_evals = 0;
        self.n_finite_difference_evals = 0;
        self.first_jacobian = true;
        self.first_trial = true;
        self.needs_jacobian = true;
        Ok(())
    }

    /// True after `start` and after every accepted step: the next call should
    /// be [`LmSolver::refresh_jacobian`].
    pub fn needs_jacobian(&self) -> bool {
        self.needs_jacobian
    }

    /// The Jacobian of the external parameters at the current point into `self.jacobian`
    /// (analytic when the problem gives one, else finite differences in the solver's buffers).
    fn fill_jacobian_at_current<P: LeastSquaresProblem + ?Sized>(
        &mut self,
        problem: &P,
    ) -> Result<(), LsqError> {
        fill_external_jacobian(
            problem,
            &self.external,
            &self.residuals,
            self.finite_difference,
            self.has_bounds.then_some(&self.bounds),
            &mut self.jacobian,
            &mut self.fd_params,
            &mut self.trial_residuals,
            &mut self.fd_minus,
            &mut self.n_finite_difference_evals,
        )
    }

    /// Evaluates the Jacobian at the current point (analytic, else finite
    /// differences), factorises it, updates the scaling `D` (Moré 1978 §6) and
    /// returns the gradient cosine `max_j |J_jᵀ r| / (‖J_j‖ ‖r‖)` of MINPACK.
    pub fn refresh_jacobian<P: LeastSquaresProblem + ?Sized>(
        &mut self,
        problem: &P,
    ) -> Result<JacobianRefresh, LsqError> {
        let (m, n) = (self.n_residuals, self.n_params);
        self.fill_jacobian_at_current(problem)?;
        self.n_jacobian_evals += 1;
        self.needs_jacobian = false;
        // Chain rule to internal variables.
        for j in 0..n {
            let factor = self.transforms[j].derivative(self.internal[j]);
            if factor != 1.0 {
                for value in self.jacobian.column_mut(j).iter_mut() {
                    *value *= factor;
                }
            }
        }
        if self.jacobian.iter().any(|v| !v.is_finite()) {
            return Ok(JacobianRefresh::NonFinite);
        }
        let a = self.jacobian.as_mut_slice();
        qr_factor_pivoted(
            a,
            m,
            n,
            &mut self.permutation,
            &mut self.r_diag,
            &mut self.column_norms,
            &mut self.work_n1,
        );
        if self.first_jacobian {
            for j in 0..n {
                self.diag[j] = if self.column_norms[j] == 0.0 {
                    1.0
                } else {
                    self.column_norms[j]
                };
            }
            for j in 0..n {
                self.work_n1[j] = self.diag[j] * self.internal[j];
            }
            self.scaled_norm = euclidean_norm(&self.work_n1);
            self.radius = self.step_bound_factor * self.scaled_norm;
            if self.radius == 0.0 {
                self.radius = self.step_bound_factor;
            }
            self.first_jacobian = false;
        }
        self.work_m.copy_from_slice(&self.residuals);
        apply_q_transpose(a, m, n, &mut self.work_m);
        for j in 0..n {
            a[j + j * m] = self.r_diag[j];
            self.qtf[j] = self.work_m[j];
        }
        // Gradient cosine.
        let mut cosine: f64 = 0.0;
        if self.residual_norm != 0.0 {
            for j in 0..n {
                let l = self.permutation[j];
                if self.column_norms[l] != 0.0 {
                    let mut sum = 0.0;
                    for i in 0..=j {
                        sum += a[i + j * m] * (self.qtf[i] / self.residual_norm);
                    }
                    cosine = cosine.max((sum / self.column_norms[l]).abs());
                }
            }
        }
        self.gradient_cosine = cosine;
        for j in 0..n {
            self.diag[j] = self.diag[j].max(self.column_norms[j]);
        }
        Ok(JacobianRefresh::GradientCosine(cosine))
    }

    /// One trial step (Moré 1978, Algorithm 7.1, steps (b)–(d)): determines
    /// λ and the step `p` for the current radius, evaluates the residuals at
    /// `x + p`, updates the radius and λ, and accepts the step when ρ ≥ 10⁻⁴.
    /// Call after [`LmSolver::refresh_jacobian`].
    pub fn trial_step<P: LeastSquaresProblem + ?Sized>(&mut self, problem: &P) -> TrialStep {
        let (m, n) = (self.n_residuals, self.n_params);
        let r = self.jacobian.as_mut_slice();
        self.lm_parameter = levenberg_marquardt_parameter(
            r,
            m,
            n,
            &self.permutation,
            &self.diag,
            &self.qtf,
            self.radius,
            self.lm_parameter,
            &mut self.step,
            &mut self.s_diag,
            &mut self.work_n1,
            &mut self.work_n2,
        );
        for j in 0..n {
            self.step[j] = -self.step[j];
            self.trial_internal[j] = self.internal[j] + self.step[j];
            self.work_n1[j] = self.diag[j] * self.step[j];
        }
        let step_norm = euclidean_norm(&self.work_n1);
        if self.first_trial {
            self.radius = self.radius.min(step_norm);
            self.first_trial = false;
        }
        for j in 0..n {
            self.trial_external[j] = self.transforms[j].to_external(self.trial_internal[j]);
        }
        problem.residuals(&self.trial_external, &mut self.trial_residuals);
        self.n_residual_evals += 1;
        let mut trial_norm = euclidean_norm(&self.trial_residuals);
        if !trial_norm.is_finite() {
            trial_norm = f64::INFINITY;
        }
        let fnorm = self.residual_norm;
        let mut actual_reduction = -1.0;
        if 0.1 * trial_norm < fnorm {
            let q = trial_norm / fnorm;
            actual_reduction = 1.0 - q * q;
        }
        // Predicted reduction from ‖J p‖ = ‖R Pᵀ p‖.
        for j in 0..n {
            self.work_n1[j] = 0.0;
        }
        for j in 0..n {
            let value = self.step[self.permutation[j]];
            for i in 0..=j {
                self.work_n1[i] += r[i + j * m] * value;
            }
        }
        let t1 = euclidean_norm(&self.work_n1) / fnorm;
        let t2 = libm::sqrt(self.lm_parameter) * step_norm / fnorm;
        let predicted_reduction = t1 * t1 + t2 * t2 / 0.5;
        let directional_derivative = -(t1 * t1 + t2 * t2);
        let ratio = if predicted_reduction != 0.0 {
            actual_reduction / predicted_reduction
        } else {
            0.0
        };
        if ratio <= 0.25 {
            let mut shrink = if actual_reduction >= 0.0 {
                0.5
            } else {
                0.5 * directional_derivative / (directional_derivative + 0.5 * actual_reduction)
            };
            if 0.1 * trial_norm >= fnorm || shrink.is_nan() || shrink < 0.1 {
                shrink = 0.1;
            }
            self.radius = shrink * self.radius.min(step_norm / 0.1);
            self.lm_parameter /= shrink;
        } else if self.lm_parameter == 0.0 || ratio >= 0.75 {
            self.radius = step_norm / 0.5;
            self.lm_parameter *= 0.5;
        }
        let accepted = ratio >= 1e-4;
        if accepted {
            std::mem::swap(&mut self.internal, &mut self.trial_internal);
            std::mem::swap(&mut self.external, &mut self.trial_external);
            std::mem::swap(&mut self.residuals, &mut self.trial_residuals);
            for j in 0..n {
                self.work_n1[j] = self.diag[j] * self.internal[j];
            }
            self.scaled_norm = euclidean_norm(&self.work_n1);
            self.residual_norm = trial_norm;
            self.n_iterations += 1;
            self.needs_jacobian = true;
        }
        TrialStep {
            accepted,
            actual_reduction,
            predicted_reduction,
            ratio,
            radius: self.radius,
            scaled_norm: self.scaled_norm,
            lm_parameter: self.lm_parameter,
        }
    }

    /// Current best parameters (external values).
    pub fn params(&self) -> &[f64] {
        &self.external
    }

    /// Residuals at the current best parameters.
    pub fn residuals(&self) -> &[f64] {
        &self.residuals
    }

    /// χ² at the current best parameters.
    pub fn chi_squared(&self) -> f64 {
        self.residual_norm * self.residual_norm
    }

    /// Gradient cosine at the last Jacobian refresh (NaN before the first).
    pub fn gradient_cosine(&self) -> f64 {
        self.gradient_cosine
    }

    /// Accepted steps so far.
    pub fn n_iterations(&self) -> usize {
        self.n_iterations
    }

    /// Residual evaluations at the start and at trial points.
    pub fn n_residual_evals(&self) -> usize {
        self.n_residual_evals
    }

    /// Jacobian evaluations.
    pub fn n_jacobian_evals(&self) -> usize {
        self.n_jacobian_evals
    }

    /// Residual evaluations spent on finite differences.
    pub fn n_finite_difference_evals(&self) -> usize {
        self.n_finite_difference_evals
    }

    /// Evaluates the Jacobian with respect to the external parameters at the
    /// current best point into the solver's Jacobian buffer and returns it
    /// (used for the covariance). The solver then needs a refresh before
    /// another trial step.
    pub fn external_jacobian_at_best<P: LeastSquaresProblem + ?Sized>(
        &mut self,
        problem: &P,
    ) -> Result<&DMatrix<f64>, LsqError> {
        self.fill_jacobian_at_current(problem)?;
        self.needs_jacobian = true;
        Ok(&self.jacobian)
    }
}

fn validate_options(options: &LsqOptions) -> Result<(), LsqError> {
    for (name, value) in [
        ("ftol", options.ftol),
        ("xtol", options.xtol),
        ("gtol", options.gtol),
        ("singular_tolerance", options.singular_tolerance),
    ] {
        if !(value >= 0.0 && value.is_finite()) {
            return Err(LsqError::InvalidOption {
                name,
                value,
                reason: "must be finite and non-negative",
            });
        }
    }
    if !(options.step_bound_factor > 0.0 && options.step_bound_factor.is_finite()) {
        return Err(LsqError::InvalidOption {
            name: "step_bound_factor",
            value: options.step_bound_factor,
            reason: "must be finite and positive",
        });
    }
    Ok(())
}

/// Analytic Jacobian if the problem has one, finite differences otherwise.
#[allow(clippy::too_many_arguments)]
fn fill_external_jacobian<P: LeastSquaresProblem + ?Sized>(
    problem: &P,
    params: &[f64],
    residuals: &[f64],
    rule: super::FiniteDifference,
    bounds: Option<&Bounds>,
    jacobian: &mut DMatrix<f64>,
    scratch_params: &mut [f64],
    scratch_plus: &mut [f64],
    scratch_minus: &mut [f64],
    n_finite_difference_evals: &mut usize,
) -> Result<(), LsqError> {
    let expected = (residuals.len(), params.len());
    if problem.jacobian(params, jacobian) {
        if jacobian.shape() != expected {
            return Err(LsqError::JacobianShape {
                rows: jacobian.nrows(),
                cols: jacobian.ncols(),
                expected_rows: expected.0,
                expected_cols: expected.1,
            });
        }
    } else {
        *n_finite_difference_evals += finite_difference_jacobian(
            problem,
            params,
            residuals,
            rule,
            bounds,
            jacobian,
            scratch_params,
            scratch_plus,
            scratch_minus,
        );
    }
    Ok(())
}

/// Determines the Levenberg–Marquardt parameter λ ≥ 0 such that the solution
/// `x` of `min ‖[J; √λ D] x − [r; 0]‖` satisfies `|‖D x‖ − Δ| ≤ 0.1 Δ`, or
/// λ = 0 when the Gauss–Newton step is already inside `1.1 Δ` (Moré 1978 §5,
/// Algorithm 5.5; MINPACK `lmpar`). At most 10 Newton iterations on
/// φ(λ) = ‖D x(λ)‖ − Δ, safeguarded by the bounds `l ≤ λ ≤ u` of eq. 5.3–5.4.
///
/// `r` holds the pivoted `R` of `J` (first `n` rows, leading dimension `ld`);
/// its strict lower triangle is overwritten. `qtb` = first `n` entries of `Qᵀ r`.
/// Returns λ; `x` receives the solution (step is `−x`).
#[allow(clippy::too_many_arguments)]
fn levenberg_marquardt_parameter(
    r: &mut [f64],
    ld: usize,
    n: usize,
    permutation: &[usize],
    diag: &[f64],
    qtb: &[f64],
    radius: f64,
    initial_parameter: f64,
    x: &mut [f64],
    s_diag: &mut [f64],
    work1: &mut [f64],
    work2: &mut [f64],
) -> f64 {
    let dwarf = f64::MIN_POSITIVE;
    // Gauss–Newton direction; least-squares solution if R is singular.
    let mut n_nonsingular = n;
    for j in 0..n {
        work1[j] = qtb[j];
        if r[j + j * ld] == 0.0 && n_nonsingular == n {
            n_nonsingular = j;
        }
        if n_nonsingular < n {
            work1[j] = 0.0;
        }
    }
    for j in (0..n_nonsingular).rev() {
        work1[j] /= r[j + j * ld];
        let value = work1[j];
        for i in 0..j {
            work1[i] -= r[i + j * ld] * value;
        }
    }
    for j in 0..n {
        x[permutation[j]] = work1[j];
    }
    for j in 0..n {
        work2[j] = diag[j] * x[j];
    }
    let mut scaled_norm = euclidean_norm(&work2[..n]);
    let mut phi = scaled_norm - radius;
    if phi <= 0.1 * radius {
        return 0.0;
    }
    // Lower bound l from the Newton step at λ = 0 (only if J has full rank).
    let mut lower = 0.0;
    if n_nonsingular == n {
        for j in 0..n {
            let l = permutation[j];
            work1[j] = diag[l] * (work2[l] / scaled_norm);
        }
        for j in 0..n {
            let mut sum = 0.0;
            for i in 0..j {
                sum += r[i + j * ld] * work1[i];
            }
            work1[j] = (work1[j] - sum) / r[j + j * ld];
        }
        let norm = euclidean_norm(&work1[..n]);
        lower = ((phi / radius) / norm) / norm;
    }
    // Upper bound u = ‖(J D⁻¹)ᵀ r‖ / Δ.
    for j in 0..n {
        let mut sum = 0.0;
        for i in 0..=j {
            sum += r[i + j * ld] * qtb[i];
        }
        work1[j] = sum / diag[permutation[j]];
    }
    let gradient_norm = euclidean_norm(&work1[..n]);
    let mut upper = gradient_norm / radius;
    if upper == 0.0 {
        upper = dwarf / radius.min(0.1);
    }
    let mut parameter = initial_parameter.max(lower).min(upper);
    if parameter == 0.0 {
        parameter = gradient_norm / scaled_norm;
    }
    let mut iteration = 0;
    loop {
        iteration += 1;
        if parameter == 0.0 {
            parameter = dwarf.max(0.001 * upper);
        }
        let root = libm::sqrt(parameter);
        for j in 0..n {
            work1[j] = root * diag[j];
        }
        solve_damped(r, ld, n, permutation, work1, qtb, x, s_diag, work2);
        for j in 0..n {
            work2[j] = diag[j] * x[j];
        }
        scaled_norm = euclidean_norm(&work2[..n]);
        let previous_phi = phi;
        phi = scaled_norm - radius;
        if phi.abs() <= 0.1 * radius
            || (lower == 0.0 && phi <= previous_phi && previous_phi < 0.0)
            || iteration == 10
        {
            return parameter;
        }
        // Newton correction.
        for j in 0..n {
            let l = permutation[j];
            work1[j] = diag[l] * (work2[l] / scaled_norm);
        }
        for j in 0..n {
            work1[j] /= s_diag[j];
            let value = work1[j];
            for i in (j + 1)..n {
                work1[i] -= r[i + j * ld] * value;
            }
        }
        let norm = euclidean_norm(&work1[..n]);
        let correction = ((phi / radius) / norm) / norm;
        if phi > 0.0 {
            lower = lower.max(parameter);
        }
        if phi < 0.0 {
            upper = upper.min(parameter);
        }
        parameter = lower.max(parameter + correction);
    }
}
