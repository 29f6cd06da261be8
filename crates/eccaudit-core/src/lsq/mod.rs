//! Generic, model-independent nonlinear least squares: problem trait, options, report and errors.
//!
//! The module follows a problem / solver / driver split:
//!
//! * a **problem** ([`LeastSquaresProblem`]) exposes weighted residuals
//!   `r_i = (data_i − model_i) / σ_i` and, optionally, their Jacobian, so that
//!   χ² = Σ r_i²;
//! * the **solver** ([`levenberg_marquardt::LmSolver`]) holds the state and all
//!   buffers of the Levenberg–Marquardt method of Moré (1978) and performs one
//!   Jacobian refresh or one trial step at a time;
//! * the **driver** ([`fit_least_squares`]) owns the loop, applies the stopping
//!   tests, and reports the result with its covariance ([`LsqReport`]).
//!
//! Box bounds are handled by the smooth change of variables of the MINUIT
//! package (James & Roos 1975, Comput. Phys. Commun. 10, 343; see
//! [`bounds`]): the solver works on unbounded internal variables, the problem
//! always sees external (bounded) values.

pub mod bounds;
pub mod covariance;
mod driver;
pub mod finite_difference;
pub mod levenberg_marquardt;
mod qr;

/// The matrix type of [`LeastSquaresProblem::jacobian`], re-exported so that
/// callers need no direct dependency on nalgebra.
pub use nalgebra::DMatrix;
use serde::{Deserialize, Serialize};
use thiserror::Error;

pub use bounds::Bounds;
pub use covariance::{covariance_from_jacobian, CovarianceEstimate};
pub use driver::{fit_least_squares, fit_least_squares_with};
pub use finite_difference::{finite_difference_jacobian, FiniteDifference};
pub use levenberg_marquardt::LmSolver;

/// A least-squares problem: `n_residuals` weighted residuals depending on
/// `n_params` parameters.
///
/// Residuals must already be weighted, `(data − model) / σ`, so that the
/// quantity minimised is χ² = Σ r². The Jacobian is that of the residuals,
/// `J[i, j] = ∂r_i / ∂p_j` (note the sign: with `r = (data − model)/σ`,
/// `J = −(∂model/∂p)/σ`).
pub trait LeastSquaresProblem {
    /// Number of free parameters.
    fn n_params(&self) -> usize;

    /// Number of residuals (data points).
    fn n_residuals(&self) -> usize;

    /// Writes the `n_residuals()` weighted residuals at `params` into `out`.
    ///
    /// A parameter vector where the model is undefined may be answered with
    /// non-finite residuals; the solver then rejects that trial step.
    fn residuals(&self, params: &[f64], out: &mut [f64]);

    /// Writes the analytic Jacobian `∂r_i/∂p_j` at `params` into `out`
    /// (already sized `n_residuals × n_params`) and returns `true`.
    ///
    /// The default returns `false` without touching `out`, and the solver then
    /// uses finite differences ([`finite_difference_jacobian`], step rule in
    /// [`FiniteDifference`]) with its own preallocated buffers.
    fn jacobian(&self, params: &[f64], out: &mut DMatrix<f64>) -> bool {
        let _ = (params, out);
        false
    }
}

/// Settings of the Levenberg–Marquardt driver. Defaults follow MINPACK
/// `lmder` (Moré, Garbow & Hillstrom 1980, Argonne report ANL-80-74) except
/// for the tighter tolerances.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct LsqOptions {
    /// Stop when both the actual and the predicted relative reduction of χ²
    /// in a step are at most `ftol` (Moré 1978, §8, first test).
    pub ftol: f64,
    /// Stop when the trust-region radius is at most `xtol · ‖D x‖`, i.e. the
    /// relative change of the scaled (internal) parameters is at most `xtol`
    /// (Moré 1978, §8, second test).
    pub xtol: f64,
    /// Stop when the cosine of the angle between the residual vector and
    /// every Jacobian column is at most `gtol` (MINPACK `lmder`).
    pub gtol: f64,
    /// Maximum number of residual evaluations at trial points (finite-difference
    /// evaluations are counted separately).
    pub max_evaluations: usize,
    /// Initial trust-region radius is `step_bound_factor · ‖D x₀‖`
    /// (or `step_bound_factor` when that is zero); MINPACK `factor`.
    pub step_bound_factor: f64,
    /// Finite-difference rule used when the problem has no analytic Jacobian.
    pub finite_difference: FiniteDifference,
    /// Compute the covariance matrix at the optimum.
    pub compute_covariance: bool,
    /// The Jacobian at the optimum is called singular when, after scaling its
    /// columns to unit norm, a pivoted-QR diagonal element is at most
    /// `singular_tolerance` times the largest one.
    pub singular_tolerance: f64,
}

impl Default for LsqOptions {
    fn default() -> Self {
        Self {
            ftol: 1e-12,
            xtol: 1e-12,
            gtol: 0.0,
            max_evaluations: 0,
            step_bound_factor: 100.0,
            finite_difference: FiniteDifference::Central,
            compute_covariance: true,
            singular_tolerance: 1e-12,
        }
    }
}

impl LsqOptions {
    /// The evaluation limit actually used: `max_evaluations`, or, when that is
    /// zero, MINPACK's default `100 · (n_params + 1)`.
    pub fn evaluation_limit(&self, n_params: usize) -> usize {
        if self.max_evaluations == 0 {
            100 * (n_params + 1)
        } else {
            self.max_evaluations
        }
    }
}

/// Why the driver stopped. Numbers in brackets are MINPACK's `info` codes.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum Termination {
    /// Relative reduction of χ² below `ftol` (1).
    RelativeReduction,
    /// Relative step size below `xtol` (2).
    StepSize,
    /// Both of the above (3).
    RelativeReductionAndStepSize,
    /// Residual vector orthogonal to the Jacobian columns within `gtol` (4).
    GradientOrthogonal,
    /// `max_evaluations` residual evaluations used (5).
    MaxEvaluations,
    /// Reduction of χ² below machine precision: `ftol` too small (6).
    ReductionAtMachinePrecision,
    /// Step below machine precision: `xtol` too small (7).
    StepAtMachinePrecision,
    /// Gradient cosine below machine precision: `gtol` too small (8).
    GradientAtMachinePrecision,
    /// The Jacobian had a non-finite entry; the best point so far is reported.
    NonFiniteJacobian,
}

impl Termination {
    /// True when a convergence test (ftol, xtol or gtol) was met.
    pub fn converged(self) -> bool {
        matches!(
            self,
            Termination::RelativeReduction
                | Termination::StepSize
                | Termination::RelativeReductionAndStepSize
                | Termination::GradientOrthogonal
        )
    }

    /// True when the tolerances asked for more than double precision allows;
    /// the point reached is then usually as good as it gets, but no test of
    /// the requested tolerance was passed.
    pub fn at_machine_precision(self) -> bool {
        matches!(
            self,
            Termination::ReductionAtMachinePrecision
                | Termination::StepAtMachinePrecision
                | Termination::GradientAtMachinePrecision
        )
    }
}

/// State of the covariance estimate at the optimum.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case", tag = "status")]
pub enum CovarianceStatus {
    /// The covariance was computed.
    Computed,
    /// Not requested ([`LsqOptions::compute_covariance`] was false).
    NotComputed,
    /// The Jacobian at the optimum is (numerically) rank deficient: some
    /// parameter combination is not constrained by the data (e.g. degenerate
    /// sampling). `rank` is the numerical rank found.
    Singular {
        /// Numerical rank of the column-scaled Jacobian.
        rank: usize,
    },
    /// The Jacobian at the optimum had a non-finite entry.
    NonFiniteJacobian,
}

impl std::fmt::Display for CovarianceStatus {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        match self {
            CovarianceStatus::Computed => f.write_str("computed"),
            CovarianceStatus::NotComputed => f.write_str("not computed"),
            CovarianceStatus::Singular { rank } => {
                write!(
                    f,
                    "singular (rank {rank}): some parameters are not constrained by the data"
                )
            }
            CovarianceStatus::NonFiniteJacobian => {
                f.write_str("not available (non-finite Jacobian)")
            }
        }
    }
}

impl std::fmt::Display for Termination {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str(match self {
            Termination::RelativeReduction => "relative chi2 reduction below ftol",
            Termination::StepSize => "relative step below xtol",
            Termination::RelativeReductionAndStepSize => {
                "chi2 reduction below ftol and step below xtol"
            }
            Termination::GradientOrthogonal => "gradient orthogonal within gtol",
            Termination::MaxEvaluations => "evaluation limit reached",
            Termination::ReductionAtMachinePrecision => "chi2 reduction at machine precision",
            Termination::StepAtMachinePrecision => "step at machine precision",
            Termination::GradientAtMachinePrecision => "gradient at machine precision",
            Termination::NonFiniteJacobian => "non-finite Jacobian",
        })
    }
}

/// Result of a least-squares fit.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct LsqReport {
    /// Best parameters found (external, bounded values).
    pub params: Vec<f64>,
    /// χ² = Σ r² at `params`.
    pub chi_squared: f64,
    /// Number of residuals.
    pub n_residuals: usize,
    /// Number of parameters.
    pub n_params: usize,
    /// Degrees of freedom, `n_residuals − n_params`.
    pub dof: usize,
    /// χ² / dof, or `None` when dof is zero.
    pub reduced_chi_squared: Option<f64>,
    /// Accepted steps.
    pub n_iterations: usize,
    /// Residual evaluations at trial points (including the start).
    pub n_residual_evals: usize,
    /// Jacobian evaluations (analytic or finite-difference) during the search.
    pub n_jacobian_evals: usize,
    /// Residual evaluations spent on finite differences.
    pub n_finite_difference_evals: usize,
    /// Why the search stopped.
    pub termination: Termination,
    /// Largest cosine between the residual vector and a Jacobian column at the
    /// last Jacobian refresh (0 at an exact stationary point).
    pub gradient_cosine: f64,
    /// State of the covariance estimate.
    pub covariance_status: CovarianceStatus,
    /// (JᵀJ)⁻¹ at `params`, row-major `n_params × n_params`; `None` unless
    /// `covariance_status` is `Computed`. Because residuals are weighted, no
    /// rescaling by the reduced χ² is applied.
    pub covariance: Option<Vec<f64>>,
    /// `sqrt(diag(covariance))`; `None` unless the covariance was computed.
    pub formal_errors: Option<Vec<f64>>,
    /// Ratio of the smallest to the largest pivoted-QR diagonal of the
    /// column-scaled Jacobian at `params`: a cheap estimate of its reciprocal
    /// condition number (0 when singular, NaN when not computed).
    pub jacobian_reciprocal_condition: f64,
}

impl LsqReport {
    /// True when a convergence test (ftol, xtol or gtol) was met.
    pub fn converged(&self) -> bool {
        self.termination.converged()
    }

    /// Covariance element `(i, j)`, if the covariance was computed.
    pub fn covariance_at(&self, i: usize, j: usize) -> Option<f64> {
        self.covariance
            .as_ref()
            .filter(|_| i < self.n_params && j < self.n_params)
            .map(|c| c[i * self.n_params + j])
    }
}

/// Errors detected before the search starts.
#[derive(Debug, Clone, PartialEq, Error)]
pub enum LsqError {
    /// The problem has no parameters.
    #[error("the problem has no parameters")]
    NoParameters,
    /// More parameters than residuals: the problem is underdetermined.
    #[error(
        "{n_params} parameters but only {n_residuals} residuals: \
         least squares needs at least as many residuals as parameters"
    )]
    MoreParamsThanResiduals {
        /// Parameters declared by the problem.
        n_params: usize,
        /// Residuals declared by the problem.
        n_residuals: usize,
    },
    /// The initial parameter vector has the wrong length.
    #[error("initial parameter vector has {got} entries, the problem has {expected} parameters")]
    InitialLength {
        /// Length given.
        got: usize,
        /// Length expected.
        expected: usize,
    },
    /// The bounds have the wrong length.
    #[error("bounds given for {got} parameters, the problem has {expected}")]
    BoundsLength {
        /// Length given.
        got: usize,
        /// Length expected.
        expected: usize,
    },
    /// A lower bound is not strictly below its upper bound, or is NaN.
    #[error("parameter {index}: lower bound {lower} must be below upper bound {upper}")]
    InvalidBounds {
        /// Parameter index.
        index: usize,
        /// Lower bound given.
        lower: f64,
        /// Upper bound given.
        upper: f64,
    },
    /// An initial parameter is not finite.
    #[error("parameter {index}: initial value {value} is not finite")]
    NonFiniteInitialParameter {
        /// Parameter index.
        index: usize,
        /// Value given.
        value: f64,
    },
    /// An initial parameter lies outside its bounds.
    #[error("parameter {index}: initial value {value} lies outside [{lower}, {upper}]")]
    InitialOutsideBounds {
        /// Parameter index.
        index: usize,
        /// Value given.
        value: f64,
        /// Lower bound.
        lower: f64,
        /// Upper bound.
        upper: f64,
    },
    /// A residual is not finite at the initial parameters.
    #[error("residual {index} is {value} at the initial parameters")]
    NonFiniteInitialResidual {
        /// Residual index.
        index: usize,
        /// Value returned by the problem.
        value: f64,
    },
    /// The problem's analytic Jacobian changed the shape of the output matrix.
    #[error("jacobian has shape {rows}×{cols}, expected {expected_rows}×{expected_cols}")]
    JacobianShape {
        /// Rows returned.
        rows: usize,
        /// Columns returned.
        cols: usize,
        /// Rows expected (`n_residuals`).
        expected_rows: usize,
        /// Columns expected (`n_params`).
        expected_cols: usize,
    },
    /// An option is out of its range.
    #[error("option {name} = {value} is invalid: {reason}")]
    InvalidOption {
        /// Option name.
        name: &'static str,
        /// Value given.
        value: f64,
        /// What is required.
        reason: &'static str,
    },
}

/// Euclidean norm; small vectors only, no overflow guard (values here are
/// weighted residuals and scaled parameters).
pub(crate) fn euclidean_norm(values: &[f64]) -> f64 {
    libm::sqrt(values.iter().map(|v| v * v).sum::<f64>())
}
