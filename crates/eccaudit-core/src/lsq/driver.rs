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

#[cfg(test)]
mod tests {
    use super::*;
    use crate::lsq::{covariance_from_jacobian, DMatrix, FiniteDifference};
    use approx::assert_relative_eq;
    use nalgebra::DVector;
    use proptest::prelude::*;

    /// Weighted linear model `y = Σ_j p_j t^j` (a polynomial), σ per point.
    struct Polynomial {
        t: Vec<f64>,
        y: Vec<f64>,
        sigma: Vec<f64>,
        degree: usize,
    }

    impl Polynomial {
        fn design(&self) -> DMatrix<f64> {
            DMatrix::from_fn(self.t.len(), self.degree + 1, |i, j| {
                self.t[i].powi(j as i32) / self.sigma[i]
            })
        }
        fn sample() -> Self {
            let t: Vec<f64> = (0..20).map(|i| -1.0 + 0.1 * i as f64).collect();
            // Deterministic "noise" so the fit has non-zero residuals.
            let y = t
                .iter()
                .enumerate()
                .map(|(i, &t)| 1.5 - 2.0 * t + 0.7 * t * t + 0.05 * ((i * 7 % 5) as f64 - 2.0))
                .collect();
            let sigma = (0..20).map(|i| 0.05 + 0.01 * (i % 3) as f64).collect();
            Self {
                t,
                y,
                sigma,
                degree: 2,
            }
        }
    }

    impl LeastSquaresProblem for Polynomial {
        fn n_params(&self) -> usize {
            self.degree + 1
        }
        fn n_residuals(&self) -> usize {
            self.t.len()
        }
        fn residuals(&self, params: &[f64], out: &mut [f64]) {
            for (i, r) in out.iter_mut().enumerate() {
                let model: f64 = params
                    .iter()
                    .enumerate()
                    .map(|(j, p)| p * self.t[i].powi(j as i32))
                    .sum();
                *r = (self.y[i] - model) / self.sigma[i];
            }
        }
        fn jacobian(&self, _params: &[f64], out: &mut DMatrix<f64>) -> bool {
            out.copy_from(&(-self.design()));
            true
        }
    }

    #[test]
    fn linear_problem_matches_svd_solution_and_covariance() {
        // Weighted linear least squares: p = A⁺ b by SVD and cov = (AᵀA)⁻¹
        // (Press et al. 2007, Numerical Recipes 3rd ed., §15.4, eqs. 15.4.17
        // and 15.4.20); LM must agree to 1e-10 relative.
        let problem = Polynomial::sample();
        let a = problem.design();
        let b =
            DVector::from_iterator(20, problem.y.iter().zip(&problem.sigma).map(|(y, s)| y / s));
        let svd = a.clone().svd(true, true);
        let expected = svd.solve(&b, 1e-14).unwrap();
        let v = svd.v_t.as_ref().unwrap().transpose();
        let inv_s2 = DMatrix::from_diagonal(&svd.singular_values.map(|s| 1.0 / (s * s)));
        let expected_cov = &v * inv_s2 * v.transpose();
        let expected_chi2 = (&a * &expected - &b).norm_squared();
        for rule in [None, Some(FiniteDifference::Central)] {
            let report = match rule {
                None => fit_least_squares(&problem, &[0.0, 0.0, 0.0], None, &LsqOptions::default())
                    .unwrap(),
                Some(_) => {
                    let fd = NoJacobian(&problem);
                    fit_least_squares(&fd, &[0.0, 0.0, 0.0], None, &LsqOptions::default()).unwrap()
                }
            };
            assert!(report.converged(), "{report:?}");
            // The residuals are linear in the parameters, so finite differences
            // are exact up to rounding and the parameters agree to 1e-10 too.
            for j in 0..3 {
                assert_relative_eq!(report.params[j], expected[j], max_relative = 1e-10);
            }
            assert_relative_eq!(report.chi_squared, expected_chi2, max_relative = 1e-10);
            assert_eq!(report.dof, 17);
            assert_relative_eq!(
                report.reduced_chi_squared.unwrap(),
                expected_chi2 / 17.0,
                max_relative = 1e-10
            );
            assert_eq!(report.covariance_status, CovarianceStatus::Computed);
            // Analytic Jacobian: 1e-10. Finite differences: the Jacobian itself
            // carries a rounding error ~ε·|r|/h with h = ε^(1/3)·|p| (Press et
            // al. 2007, §5.7), ~1e-10 relative here, so 1e-8 is stated.
            let covariance_tolerance = if rule.is_none() { 1e-10 } else { 1e-8 };
            for i in 0..3 {
                for j in 0..3 {
                    assert_relative_eq!(
                        report.covariance_at(i, j).unwrap(),
                        expected_cov[(i, j)],
                        max_relative = covariance_tolerance
                    );
                }
                assert_relative_eq!(
                    report.formal_errors.as_ref().unwrap()[i],
                    expected_cov[(i, i)].sqrt(),
                    max_relative = covariance_tolerance
                );
            }
        }
    }

    /// Wraps a problem and hides its analytic Jacobian.
    struct NoJacobian<'a, P>(&'a P);

    impl<P: LeastSquaresProblem> LeastSquaresProblem for NoJacobian<'_, P> {
        fn n_params(&self) -> usize {
            self.0.n_params()
        }
        fn n_residuals(&self) -> usize {
            self.0.n_residuals()
        }
        fn residuals(&self, params: &[f64], out: &mut [f64]) {
            self.0.residuals(params, out)
        }
    }

    /// Damped sinusoid `y = a·exp(−b t)·cos(c t + d)`, σ = 0.1.
    struct DampedSinusoid {
        t: Vec<f64>,
        y: Vec<f64>,
    }

    impl DampedSinusoid {
        fn new(truth: [f64; 4]) -> Self {
            let t: Vec<f64> = (0..30).map(|i| 0.2 * i as f64).collect();
            let y = t.iter().map(|&t| Self::model(&truth, t)).collect();
            Self { t, y }
        }
        fn model(p: &[f64], t: f64) -> f64 {
            p[0] * libm::exp(-p[1] * t) * libm::cos(p[2] * t + p[3])
        }
    }

    impl LeastSquaresProblem for DampedSinusoid {
        fn n_params(&self) -> usize {
            4
        }
        fn n_residuals(&self) -> usize {
            self.t.len()
        }
        fn residuals(&self, p: &[f64], out: &mut [f64]) {
            for (i, &t) in self.t.iter().enumerate() {
                out[i] = (self.y[i] - Self::model(p, t)) / 0.1;
            }
        }
        fn jacobian(&self, p: &[f64], out: &mut DMatrix<f64>) -> bool {
            for (i, &t) in self.t.iter().enumerate() {
                let decay = libm::exp(-p[1] * t);
                let (sin, cos) = libm::sincos(p[2] * t + p[3]);
                out[(i, 0)] = -decay * cos / 0.1;
                out[(i, 1)] = p[0] * t * decay * cos / 0.1;
                out[(i, 2)] = p[0] * decay * t * sin / 0.1;
                out[(i, 3)] = p[0] * decay * sin / 0.1;
            }
            true
        }
    }

    proptest! {
        // Analytic vs finite-difference Jacobian. Error bounds (Press et al.
        // 2007, §5.7): forward ~ sqrt(ε)·scale ≈ 1.5e-8, central ~ ε^(2/3)
        // ≈ 4e-11, relative to the largest |J| entry of the matrix; tolerances
        // 1e-5 and 1e-7 leave room for curvature up to 10³ times the scale.
        #[test]
        fn finite_difference_matches_analytic_jacobian(
            a in 0.5f64..5.0, b in 0.01f64..0.5, c in 0.5f64..3.0, d in -3.0f64..3.0
        ) {
            let problem = DampedSinusoid::new([1.0, 0.1, 1.0, 0.0]);
            let params = [a, b, c, d];
            let mut analytic = DMatrix::zeros(30, 4);
            problem.jacobian(&params, &mut analytic);
            let mut base = vec![0.0; 30];
            problem.residuals(&params, &mut base);
            let scale = analytic.amax();
            for (rule, tol) in [(FiniteDifference::Forward, 1e-5), (FiniteDifference::Central, 1e-7)] {
                let mut numeric = DMatrix::zeros(30, 4);
                let (mut sp, mut s1, mut s2) = (vec![0.0; 4], vec![0.0; 30], vec![0.0; 30]);
                let evals = finite_difference_jacobian_for_test(&problem, &params, &base, rule, &mut numeric, &mut sp, &mut s1, &mut s2);
                prop_assert_eq!(evals, if rule == FiniteDifference::Central { 8 } else { 4 });
                let worst = (&numeric - &analytic).amax() / scale;
                prop_assert!(worst <= tol, "{:?}: {}", rule, worst);
            }
        }
    }

    #[allow(clippy::too_many_arguments)]
    fn finite_difference_jacobian_for_test(
        problem: &DampedSinusoid,
        params: &[f64],
        base: &[f64],
        rule: FiniteDifference,
        out: &mut DMatrix<f64>,
        sp: &mut [f64],
        s1: &mut [f64],
        s2: &mut [f64],
    ) -> usize {
        crate::lsq::finite_difference_jacobian(problem, params, base, rule, None, out, sp, s1, s2)
    }

    #[test]
    fn recovers_noise_free_damped_sinusoid_exactly() {
        // Noise-free data: the minimum is χ² = 0 at the truth (common
        // practice); LM from a start 20-30 % off must reach it.
        let truth = [2.0, 0.3, 1.7, 0.4];
        let problem = DampedSinusoid::new(truth);
        let report = fit_least_squares(
            &problem,
            &[1.6, 0.25, 1.5, 0.5],
            None,
            &LsqOptions::default(),
        )
        .unwrap();
        assert!(report.converged(), "{report:?}");
        assert!(report.chi_squared < 1e-20, "{report:?}");
        for (got, want) in report.params.iter().zip(truth) {
            assert_relative_eq!(*got, want, max_relative = 1e-9);
        }
    }

    #[test]
    fn solver_reuse_gives_identical_bits() {
        let problem = DampedSinusoid::new([2.0, 0.3, 1.7, 0.4]);
        let start = [1.6, 0.25, 1.5, 0.5];
        let fresh = fit_least_squares(&problem, &start, None, &LsqOptions::default()).unwrap();
        let mut solver = LmSolver::new(1, 1);
        let other = Polynomial::sample();
        fit_least_squares_with(&mut solver, &other, &[0.0; 3], None, &LsqOptions::default())
            .unwrap();
        let reused =
            fit_least_squares_with(&mut solver, &problem, &start, None, &LsqOptions::default())
                .unwrap();
        assert_eq!(fresh, reused);
    }

    #[test]
    fn bound_active_at_constrained_optimum() {
        // Unconstrained slope of the sample is −2 (plus the quadratic term);
        // with the slope bounded to [−1, 5] the optimum lies on −1. The
        // sin-transform approaches the bound quadratically in the internal
        // variable, so 1e-6 absolute is the stated tolerance. Closed form for
        // the other two parameters with p1 = −1: weighted linear fit of
        // y + t on (1, t²) (common practice).
        let problem = Polynomial::sample();
        let bounds = Bounds::from_pairs(&[
            (f64::NEG_INFINITY, f64::INFINITY),
            (-1.0, 5.0),
            (-10.0, f64::INFINITY),
        ]);
        let report = fit_least_squares(
            &problem,
            &[0.0, 0.0, 0.0],
            Some(&bounds),
            &LsqOptions::default(),
        )
        .unwrap();
        assert!(
            report.converged() || report.termination.at_machine_precision(),
            "{report:?}"
        );
        assert!(
            report.params[1] >= -1.0 && report.params[1] < -1.0 + 1e-6,
            "{report:?}"
        );
        let a = DMatrix::from_fn(20, 2, |i, j| {
            problem.t[i].powi(2 * j as i32) / problem.sigma[i]
        });
        let b = DVector::from_iterator(
            20,
            (0..20).map(|i| (problem.y[i] + problem.t[i]) / problem.sigma[i]),
        );
        let expected = a.svd(true, true).solve(&b, 1e-14).unwrap();
        assert_relative_eq!(report.params[0], expected[0], max_relative = 1e-5);
        assert_relative_eq!(report.params[2], expected[1], max_relative = 1e-5);
    }

    #[test]
    fn inactive_bounds_do_not_change_the_optimum() {
        // Bounds far from the optimum: same answer as unbounded within 1e-8
        // relative (xtol applies to the internal variables).
        let problem = Polynomial::sample();
        let free = fit_least_squares(&problem, &[0.0; 3], None, &LsqOptions::default()).unwrap();
        let bounds = Bounds::from_pairs(&[
            (-10.0, 10.0),
            (-10.0, f64::INFINITY),
            (f64::NEG_INFINITY, 10.0),
        ]);
        let bounded =
            fit_least_squares(&problem, &[0.0; 3], Some(&bounds), &LsqOptions::default()).unwrap();
        assert!(bounded.converged(), "{bounded:?}");
        for j in 0..3 {
            assert_relative_eq!(bounded.params[j], free.params[j], max_relative = 1e-8);
            assert_relative_eq!(
                bounded.formal_errors.as_ref().unwrap()[j],
                free.formal_errors.as_ref().unwrap()[j],
                max_relative = 1e-6
            );
        }
    }

    /// `y = a + b cos(2π t / P) + c sin(2π t / P)` with P fixed.
    struct Sinusoid {
        t: Vec<f64>,
        y: Vec<f64>,
        period: f64,
    }

    impl LeastSquaresProblem for Sinusoid {
        fn n_params(&self) -> usize {
            3
        }
        fn n_residuals(&self) -> usize {
            self.t.len()
        }
        fn residuals(&self, p: &[f64], out: &mut [f64]) {
            for (i, &t) in self.t.iter().enumerate() {
                let (s, c) = libm::sincos(2.0 * std::f64::consts::PI * t / self.period);
                out[i] = self.y[i] - (p[0] + p[1] * c + p[2] * s);
            }
        }
    }

    #[test]
    fn degenerate_sampling_is_reported_singular() {
        // All epochs at the same phase (t = whole periods): the cosine column
        // equals the constant column and the sine column vanishes, so only
        // a + b is constrained — rank 1 (common practice).
        let problem = Sinusoid {
            t: vec![0.0, 3.0, 7.0, 12.0, 20.0],
            y: vec![1.0, 1.2, 0.9, 1.1, 1.05],
            period: 1.0,
        };
        let report =
            fit_least_squares(&problem, &[0.5, 0.5, 0.1], None, &LsqOptions::default()).unwrap();
        assert_eq!(
            report.covariance_status,
            CovarianceStatus::Singular { rank: 1 }
        );
        assert!(report.covariance.is_none() && report.formal_errors.is_none());
        assert!(report.jacobian_reciprocal_condition < 1e-12);
        // The constrained combination still fits the mean (1.05).
        assert_relative_eq!(
            report.params[0] + report.params[1],
            1.05,
            max_relative = 1e-9
        );
    }

    /// `y = sqrt(p)·t`, undefined (NaN) for p < 0.
    struct SquareRootSlope;

    impl LeastSquaresProblem for SquareRootSlope {
        fn n_params(&self) -> usize {
            1
        }
        fn n_residuals(&self) -> usize {
            4
        }
        fn residuals(&self, p: &[f64], out: &mut [f64]) {
            for (i, r) in out.iter_mut().enumerate() {
                let t = 1.0 + i as f64;
                *r = 0.1 * t - libm::sqrt(p[0]) * t;
            }
        }
    }

    #[test]
    fn non_finite_trial_points_are_rejected_not_fatal() {
        // Truth p = 0.01 (sqrt = 0.1); from p = 4 the full Gauss–Newton step
        // lands at negative p where the model is NaN. LM must reject those
        // trials and converge (exact fit, so 1e-8 relative).
        let report =
            fit_least_squares(&SquareRootSlope, &[4.0], None, &LsqOptions::default()).unwrap();
        assert!(report.converged(), "{report:?}");
        assert_relative_eq!(report.params[0], 0.01, max_relative = 1e-8);
    }

    /// Rosenbrock as least squares: r = (10(x₂ − x₁²), 1 − x₁)
    /// (Moré, Garbow & Hillstrom 1981, ACM TOMS 7, 17, problem 1).
    struct Rosenbrock;

    impl LeastSquaresProblem for Rosenbrock {
        fn n_params(&self) -> usize {
            2
        }
        fn n_residuals(&self) -> usize {
            2
        }
        fn residuals(&self, x: &[f64], out: &mut [f64]) {
            out[0] = 10.0 * (x[1] - x[0] * x[0]);
            out[1] = 1.0 - x[0];
        }
        fn jacobian(&self, x: &[f64], out: &mut DMatrix<f64>) -> bool {
            out[(0, 0)] = -20.0 * x[0];
            out[(0, 1)] = 10.0;
            out[(1, 0)] = -1.0;
            out[(1, 1)] = 0.0;
            true
        }
    }

    #[test]
    fn rosenbrock_from_standard_start_and_evaluation_limit() {
        // Standard start (−1.2, 1), minimum (1, 1) with f = 0 (Moré, Garbow &
        // Hillstrom 1981, problem 1).
        let report =
            fit_least_squares(&Rosenbrock, &[-1.2, 1.0], None, &LsqOptions::default()).unwrap();
        assert!(report.converged(), "{report:?}");
        assert_relative_eq!(report.params[0], 1.0, max_relative = 1e-10);
        assert_relative_eq!(report.params[1], 1.0, max_relative = 1e-10);
        assert_eq!(report.reduced_chi_squared, None);
        let limited = LsqOptions {
            max_evaluations: 3,
            ..LsqOptions::default()
        };
        let report = fit_least_squares(&Rosenbrock, &[-1.2, 1.0], None, &limited).unwrap();
        assert_eq!(report.termination, Termination::MaxEvaluations);
        assert!(!report.converged());
        assert_eq!(report.n_residual_evals, 3);
    }

    #[test]
    fn input_errors_are_typed() {
        let problem = Polynomial::sample();
        let options = LsqOptions::default();
        assert_eq!(
            fit_least_squares(&problem, &[0.0; 2], None, &options),
            Err(LsqError::InitialLength {
                got: 2,
                expected: 3
            })
        );
        assert!(matches!(
            fit_least_squares(&problem, &[0.0, f64::NAN, 0.0], None, &options),
            Err(LsqError::NonFiniteInitialParameter { index: 1, .. })
        ));
        let underdetermined = Polynomial {
            t: vec![0.0, 1.0],
            y: vec![1.0, 2.0],
            sigma: vec![1.0, 1.0],
            degree: 2,
        };
        assert_eq!(
            fit_least_squares(&underdetermined, &[0.0; 3], None, &options),
            Err(LsqError::MoreParamsThanResiduals {
                n_params: 3,
                n_residuals: 2
            })
        );
        assert!(matches!(
            fit_least_squares(&SquareRootSlope, &[-1.0], None, &options),
            Err(LsqError::NonFiniteInitialResidual { index: 0, .. })
        ));
        let bad = LsqOptions {
            ftol: -1.0,
            ..LsqOptions::default()
        };
        assert!(matches!(
            fit_least_squares(&problem, &[0.0; 3], None, &bad),
            Err(LsqError::InvalidOption { name: "ftol", .. })
        ));
        let bounds = Bounds::from_pairs(&[(0.0, 1.0); 3]);
        assert!(matches!(
            fit_least_squares(&problem, &[0.5, 2.0, 0.5], Some(&bounds), &options),
            Err(LsqError::InitialOutsideBounds { index: 1, .. })
        ));
    }

    /// Returns a Jacobian of the wrong shape.
    struct WrongShape;

    impl LeastSquaresProblem for WrongShape {
        fn n_params(&self) -> usize {
            1
        }
        fn n_residuals(&self) -> usize {
            2
        }
        fn residuals(&self, p: &[f64], out: &mut [f64]) {
            out[0] = p[0];
            out[1] = p[0] - 1.0;
        }
        fn jacobian(&self, _p: &[f64], out: &mut DMatrix<f64>) -> bool {
            *out = DMatrix::zeros(3, 1);
            true
        }
    }

    #[test]
    fn wrong_jacobian_shape_is_an_error_not_a_panic() {
        assert_eq!(
            fit_least_squares(&WrongShape, &[0.3], None, &LsqOptions::default()),
            Err(LsqError::JacobianShape {
                rows: 3,
                cols: 1,
                expected_rows: 2,
                expected_cols: 1
            })
        );
    }

    #[test]
    fn report_serialises_with_named_termination() {
        let report = fit_least_squares(
            &Polynomial::sample(),
            &[0.0; 3],
            None,
            &LsqOptions::default(),
        )
        .unwrap();
        let json = serde_json::to_value(&report).unwrap();
        assert!(json["termination"].is_string());
        assert_eq!(json["covariance_status"]["status"], "computed");
        assert_eq!(json["params"].as_array().unwrap().len(), 3);
        // Same covariance as the stand-alone function on the final Jacobian.
        let estimate = covariance_from_jacobian(&(-Polynomial::sample().design()), 1e-12);
        for (x, y) in report
            .covariance
            .unwrap()
            .iter()
            .zip(estimate.covariance.unwrap())
        {
            assert_relative_eq!(*x, y, max_relative = 1e-12);
        }
    }
}
