//! The fit driver: period search, multi-start Levenberg–Marquardt, polish, jitter, covariance,
//! Lucy–Sweeney test and circular refit.

use nalgebra::{DMatrix as Matrix, DVector};

use super::jitter::{ml_jitter, modified_likelihood_jitter, JitterMethod};
use super::report::{
    build_solution, Adopted, FitReport, PeriodSearchSummary, Solution, SolutionContext,
    StartOutcome,
};
use super::{count_distinct_phases, FitError, FitOptions, MIN_DISTINCT_PHASES, PHASE_BIN_CYCLES};
use super::{FitData, RvProblem};
use crate::kepler::TWO_PI;
use crate::lsq::{fit_least_squares_with, LeastSquaresProblem, LmSolver, LsqReport, Termination};
use crate::model::{
    convert_coordinates, decode_companion, encode_companion, keplerian_shape,
    EccentricityCoordinates, ElementsAtEpoch, ParameterLayout,
};
use crate::periodogram::{peak_search, GridOptions, PeriodogramOptions};
use crate::random::stream_rng;
use rand::RngExt;

/// Two starts are taken to have reached the same minimum when their χ² differ by at most this
/// (absolute; a Δχ² of 10⁻³ is statistically nothing — common practice).
pub const SAME_MINIMUM: f64 = 1e-3;

/// Most jitter/orbit alternations before the jitter iteration is declared not converged.
pub const MAX_JITTER_ITERATIONS: usize = 100;

/// A starting point for one companion: period [d], eccentricity, ω [rad]. K, the phase, the
/// offsets and the trend are chosen by [`linear_start`].
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize)]
pub struct StartPoint {
    /// Starting period [d].
    pub period: f64,
    /// Starting eccentricity (0 < e < 0.99; exactly 0 would pin the √e coordinates).
    pub eccentricity: f64,
    /// Starting ω [rad].
    pub omega: f64,
}

/// Completes a start for companion `c` (the last of `layout`), the earlier companions fixed at
/// `previous` (parameters of companions 0..c in √e coordinates): for `n_phase` evenly spaced
/// mean anomalies at t_ref, K, the offsets and the trend are solved by weighted linear least
/// squares (normal equations, common practice), and the phase with the least χ² is kept.
/// Returns the full parameter vector in √e coordinates, or None if no phase gave a solution.
pub fn linear_start(
    data: &FitData,
    layout: &ParameterLayout,
    previous: &[f64],
    start: StartPoint,
    n_phase: usize,
) -> Option<Vec<f64>> {
    let c = layout.n_companions() - 1;
    let n = data.n_points();
    let n_inst = layout.n_instruments;
    let n_cols = 1 + n_inst + usize::from(layout.trend);
    // Velocities minus the earlier companions.
    let mut target = data.velocities().to_vec();
    let mut shape = vec![0.0; n];
    for p in 0..c {
        let comp = decode_companion(layout, EccentricityCoordinates::SqrtE, previous, p);
        if !keplerian_shape(
            data.shifted_times(),
            comp.period,
            comp.eccentricity,
            comp.omega(),
            comp.mean_longitude,
            &mut shape,
        ) {
            return None;
        }
        for (t, s) in target.iter_mut().zip(&shape) {
            *t -= comp.semi_amplitude * s;
        }
    }
    let weights: Vec<f64> = data.uncertainties().iter().map(|s| 1.0 / (s * s)).collect();
    let mut best: Option<(f64, f64, DVector<f64>)> = None;
    for k in 0..n_phase.max(1) {
        let mean_anomaly = TWO_PI * k as f64 / n_phase.max(1) as f64;
        let lambda = mean_anomaly + start.omega;
        if !keplerian_shape(
            data.shifted_times(),
            start.period,
            start.eccentricity,
            start.omega,
            lambda,
            &mut shape,
        ) {
            return None;
        }
        let mut a = Matrix::<f64>::zeros(n_cols, n_cols);
        let mut b = DVector::<f64>::zeros(n_cols);
        let mut row = vec![0.0; n_cols];
        for i in 0..n {
            row.fill(0.0);
            row[0] = shape[i];
            row[1 + data.instruments()[i]] = 1.0;
            if layout.trend {
                row[n_cols - 1] = data.shifted_times()[i];
            }
            for p in 0..n_cols {
                b[p] += weights[i] * row[p] * target[i];
                for q in 0..n_cols {
                    a[(p, q)] += weights[i] * row[p] * row[q];
                }
            }
        }
        let Some(chol) = a.cholesky() else {
            continue;
        };
        let beta = chol.solve(&b);
        let chi2: f64 = (0..n)
            .map(|i| {
                let mut m = beta[0] * shape[i] + beta[1 + data.instruments()[i]];
                if layout.trend {
                    m += beta[n_cols - 1] * data.shifted_times()[i];
                }
                weights[i] * (target[i] - m) * (target[i] - m)
            })
            .sum();
        if chi2.is_finite() && best.as_ref().is_none_or(|(b, _, _)| chi2 < *b) {
            best = Some((chi2, lambda, beta));
        }
    }
    let (_, lambda, beta) = best?;
    let mut params = vec![0.0; layout.n_params()];
    let start_c = layout.companion_start(c);
    params[..start_c].copy_from_slice(&previous[..start_c]);
    // A zero K would leave the eccentricity columns of the Jacobian empty; keep it away from 0.
    let k = if beta[0].abs() > 1e-6 { beta[0] } else { 1e-6 };
    encode_companion(
        layout,
        EccentricityCoordinates::SqrtE,
        &mut params,
        c,
        &ElementsAtEpoch {
            period: start.period,
            semi_amplitude: k,
            eccentricity: start.eccentricity,
            omega: start.omega,
            mean_longitude: lambda,
        },
    );
    let o = layout.offsets_start();
    params[o..o + n_inst].copy_from_slice(&beta.as_slice()[1..1 + n_inst]);
    if let Some(t) = layout.trend_index() {
        params[t] = beta[n_cols - 1];
    }
    Some(params)
}

/// One Levenberg–Marquardt run of `layout` from a single start per companion (no period
/// search, no multi-start): each companion is completed in turn by [`linear_start`] with the
/// earlier ones at their start values, then all parameters are fitted jointly in √e
/// coordinates. Used to show what a lone start finds.
pub fn fit_from_start(
    data: &FitData,
    options: &FitOptions,
    starts: &[StartPoint],
) -> Result<LsqReport, FitError> {
    check_inputs(data, options)?;
    let mut params: Vec<f64> = Vec::new();
    for (c, start) in starts.iter().enumerate() {
        let layout = ParameterLayout::new(c + 1, data.n_instruments(), options.trend);
        params = linear_start(data, &layout, &params, *start, options.n_phase_scan).ok_or(
            FitError::InvalidOption {
                name: "start",
                value: format!("{start:?}"),
                reason: "no finite model at this start",
            },
        )?;
    }
    let layout = ParameterLayout::new(starts.len(), data.n_instruments(), options.trend);
    let problem = RvProblem::new(data, layout, EccentricityCoordinates::SqrtE);
    let mut solver = LmSolver::new(problem.n_params(), problem.n_residuals());
    fit_least_squares_with(&mut solver, &problem, &params, None, &options.lsq)
        .map_err(FitError::NoStart)
}

fn check_inputs(data: &FitData, options: &FitOptions) -> Result<(), FitError> {
    let n = data.n_points();
    let lengths = [
        data.velocities().len(),
        data.uncertainties().len(),
        data.instruments().len(),
    ];
    if lengths.iter().any(|&l| l != n) {
        return Err(FitError::LengthMismatch(format!(
            "{n} times, {} velocities, {} uncertainties, {} instrument indices",
            lengths[0], lengths[1], lengths[2]
        )));
    }
    for i in 0..n {
        for (what, value, constraint) in [
            ("time", data.times()[i], ""),
            ("velocity", data.velocities()[i], ""),
            ("uncertainty", data.uncertainties()[i], " and > 0"),
        ] {
            if !value.is_finite() || (what == "uncertainty" && value <= 0.0) {
                return Err(FitError::InvalidData {
                    index: i,
                    what,
                    value,
                    constraint,
                });
            }
        }
        if data.instruments()[i] >= data.n_instruments() {
            return Err(FitError::InvalidData {
                index: i,
                what: "instrument index",
                value: data.instruments()[i] as f64,
                constraint: " and name a listed instrument",
            });
        }
    }
    let bad = |name: &'static str, value: String, reason: &'static str| {
        Err(FitError::InvalidOption {
            name,
            value,
            reason,
        })
    };
    if options.n_companions == 0 {
        return bad("n_companions", "0".into(), "at least one companion");
    }
    {
        use crate::limits::{check_count, MAX_COMPANIONS, MAX_EPOCHS, MAX_STARTS};
        check_count("epochs", n as u64, MAX_EPOCHS)?;
        check_count("companions", options.n_companions as u64, MAX_COMPANIONS)?;
        for (what, count) in [
            ("periodogram peaks (n_peaks)", options.n_peaks),
            ("ω starts (n_omega_starts)", options.n_omega_starts),
            ("random starts (n_random_starts)", options.n_random_starts),
            ("phases scanned (n_phase_scan)", options.n_phase_scan),
            (
                "starting eccentricities",
                options.start_eccentricities.len(),
            ),
            ("initial periods", options.initial_periods.len()),
        ] {
            check_count(what, count as u64, MAX_STARTS)?;
        }
    }
    if options
        .start_eccentricities
        .iter()
        .any(|e| !(*e > 0.0 && *e < 0.95))
    {
        return bad(
            "start_eccentricities",
            format!("{:?}", options.start_eccentricities),
            "each must lie in (0, 0.95)",
        );
    }
    if options.start_eccentricities.is_empty() && options.n_random_starts == 0 {
        return bad(
            "start_eccentricities",
            "[]".into(),
            "give at least one start",
        );
    }
    if options.n_omega_starts == 0 {
        return bad("n_omega_starts", "0".into(), "at least 1");
    }
    if options.n_peaks == 0 {
        return bad("n_peaks", "0".into(), "at least 1");
    }
    if let Some(p) = options
        .initial_periods
        .iter()
        .find(|p| !(**p > 0.0 && p.is_finite()))
    {
        return bad("initial_periods", p.to_string(), "periods must be positive");
    }
    if !(options.max_false_alarm_probability > 0.0 && options.max_false_alarm_probability <= 1.0) {
        return bad(
            "max_false_alarm_probability",
            options.max_false_alarm_probability.to_string(),
            "must lie in (0, 1]",
        );
    }
    if let Some(m) = options.stellar_mass {
        if !(m > 0.0 && m.is_finite()) {
            return bad("stellar_mass", m.to_string(), "must be positive");
        }
    }
    let layout = ParameterLayout::new(options.n_companions, data.n_instruments(), options.trend);
    let n_jitter = if options.jitter {
        data.n_instruments()
    } else {
        0
    };
    let n_params = layout.n_params() + n_jitter;
    if n <= n_params {
        let mut extra = String::new();
        if options.trend {
            extra.push_str(", a trend");
        }
        if options.jitter {
            extra.push_str(&format!(", {n_jitter} jitter(s)"));
        }
        return Err(FitError::TooFewPoints {
            n_points: n,
            n_params,
            n_companions: options.n_companions,
            n_instruments: data.n_instruments(),
            extra,
            needed: n_params + 1,
        });
    }
    Ok(())
}

/// The (e, ω) grid of starts at one period.
fn start_grid(options: &FitOptions, period: f64, stream: u64) -> Vec<StartPoint> {
    let mut starts = Vec::new();
    for &e in &options.start_eccentricities {
        let n_omega = if e < 0.1 { 1 } else { options.n_omega_starts };
        for j in 0..n_omega {
            starts.push(StartPoint {
                period,
                eccentricity: e,
                omega: TWO_PI * j as f64 / n_omega as f64,
            });
        }
    }
    let mut rng = stream_rng(options.seed, stream);
    for _ in 0..options.n_random_starts {
        let e: f64 = 0.01 + 0.89 * rng.random::<f64>();
        let omega: f64 = TWO_PI * rng.random::<f64>();
        starts.push(StartPoint {
            period,
            eccentricity: e,
            omega,
        });
    }
    starts
}

/// Velocities minus the inverse-variance weighted mean of their instrument: what the first
/// period search (and its figure) examines.
pub(crate) fn centred_velocities(data: &FitData) -> Vec<f64> {
    let n_inst = data.n_instruments();
    let (mut sum, mut weight) = (vec![0.0; n_inst], vec![0.0; n_inst]);
    for i in 0..data.n_points() {
        let w = 1.0 / (data.uncertainties()[i] * data.uncertainties()[i]);
        sum[data.instruments()[i]] += w * data.velocities()[i];
        weight[data.instruments()[i]] += w;
    }
    (0..data.n_points())
        .map(|i| {
            let j = data.instruments()[i];
            data.velocities()[i] - sum[j] / weight[j]
        })
        .collect()
}

/// Best of a stage: parameters (√e coordinates) and χ².
struct StageBest {
    params: Vec<f64>,
    chi_squared: f64,
}

/// Global least-squares fit of `options.n_companions` Keplerian orbits to `data`.
///
/// 1. **Period search** for companion c: the generalised Lomb–Scargle periodogram (Zechmeister
///    & Kürster 2009, A&A 496, 577; [`crate::periodogram`]) of the velocities with per-instrument
///    means removed (c = 1) or of the residuals of the fit so far (c > 1); the highest peak must
///    have Baluev (2008, MNRAS 385, 1279) false-alarm probability ≤
///    `max_false_alarm_probability`. The `n_peaks` highest peaks whose epochs cover at least
///    [`MIN_DISTINCT_PHASES`] phases are the candidate periods (or the user's period).
/// 2. **Starts**: at each candidate period, a grid of (e, ω) (plus optional random ones), each
///    completed by [`linear_start`] (phase scan, K/γ/trend linear).
/// 3. **Levenberg–Marquardt** (Moré 1978; [`crate::lsq`]) of all parameters of companions 1..c,
///    offsets and trend from every start in (P, K, √e cos ω, √e sin ω, λ) coordinates, one
///    [`LmSolver`] reused throughout; the least χ² wins. e < 1 is kept by the model answering NaN
///    for e ≥ [`super::MAX_ECCENTRICITY`] (the solver rejects such steps).
/// 4. **Polish** of the winner in (e cos ω, e sin ω) coordinates, regular at e = 0.
/// 5. **Jitter** (optional): alternate LM at fixed jitter with a per-instrument update by
///    `options.jitter_method` (Baluev 2009 modified likelihood,
///    [`modified_likelihood_jitter`], by default; plain [`ml_jitter`] on request) until the jitters change by less than 10⁻⁶ of the median
///    uncertainty (at most [`MAX_JITTER_ITERATIONS`]); a coordinate ascent of the likelihood.
/// 6. **Report**: covariance `(JᵀJ)⁻¹` of the analytic Jacobian in (e cos ω, e sin ω)
///    coordinates, σ_e by the delta method, and the Lucy & Sweeney (1971, AJ 76, 544) test; if
///    any companion's p exceeds the threshold, those companions are refitted circular and that
///    solution is adopted.
pub fn fit_orbit(data: &FitData, options: &FitOptions) -> Result<FitReport, FitError> {
    check_inputs(data, options)?;
    let n_inst = data.n_instruments();
    let max_params = ParameterLayout::new(options.n_companions, n_inst, options.trend).n_params();
    let mut solver = LmSolver::new(max_params, data.n_points());
    let mut search = Search::default();
    let mut previous: Vec<f64> = Vec::new();
    let mut last_stage_range = 0..0;
    let mut stage_best: Option<StageBest> = None;
    for c in 0..options.n_companions {
        let stage_start = search.starts.len();
        let best = fit_companion(data, options, c, &previous, &mut solver, &mut search)?;
        last_stage_range = stage_start..search.starts.len();
        previous.clone_from(&best.params);
        stage_best = Some(best);
    }
    let best = stage_best.expect("at least one companion");
    let layout = ParameterLayout::new(options.n_companions, n_inst, options.trend);
    let refiner = Refiner { data, options };
    let mut warnings = Vec::new();

    // Polish in (e cos ω, e sin ω), with the jitter when asked for.
    let polish_start = convert_coordinates(
        &layout,
        EccentricityCoordinates::SqrtE,
        EccentricityCoordinates::E,
        &best.params,
    );
    let eccentric_fit = refiner.refine(&mut solver, &layout, &polish_start)?;
    let eccentric = refiner.solution(&layout, &eccentric_fit);
    note_solution(&eccentric, "eccentric solution", &mut warnings);

    let circular = circular_refit(&refiner, &mut solver, &layout, &eccentric)?;
    if let Some(solution) = &circular {
        note_solution(solution, "circular refit", &mut warnings);
    }
    let adopted = if circular.is_some() {
        Adopted::Circular
    } else {
        Adopted::Eccentric
    };
    let last = &search.starts[last_stage_range.clone()];
    let n_reached_best = last.iter().filter(|s| s.reached_best).count();
    if n_reached_best == 1 && last.len() > 1 {
        warnings.push(
            "only one start reached the best chi2; the global minimum may be narrow — \
             consider more starts or peaks"
                .into(),
        );
    }
    Ok(FitReport {
        n_points: data.n_points(),
        reference_time: data.reference_time(),
        period_search: search.period_search,
        eccentric,
        circular,
        adopted,
        n_starts: search.starts.len(),
        n_reached_best,
        n_starts_last_stage: last.len(),
        starts: search.starts,
        warnings,
    })
}

/// What the search stages record for the report: the period search of each companion and the
/// outcome of every start.
#[derive(Default)]
struct Search {
    period_search: Vec<PeriodSearchSummary>,
    starts: Vec<StartOutcome>,
}

/// Stages 1–3 of [`fit_orbit`] for companion `c` (0-based), the earlier companions starting
/// at `previous`: the candidate periods, the start grid at each, Levenberg–Marquardt from every
/// start; returns the least-χ² result. Every start is recorded in `search` (those within
/// [`SAME_MINIMUM`] of the best marked as having reached it).
fn fit_companion(
    data: &FitData,
    options: &FitOptions,
    c: usize,
    previous: &[f64],
    solver: &mut LmSolver,
    search: &mut Search,
) -> Result<StageBest, FitError> {
    let layout = ParameterLayout::new(c + 1, data.n_instruments(), options.trend);
    let candidates = candidate_periods(data, options, c, previous, &mut search.period_search)?;
    let problem = RvProblem::new(data, layout.clone(), EccentricityCoordinates::SqrtE);
    let starts_out = &mut search.starts;
    let stage_start = starts_out.len();
    let mut best: Option<StageBest> = None;
    let mut first_error = None;
    for (p_index, &period) in candidates.iter().enumerate() {
        for start in start_grid(options, period, (c * 1000 + p_index) as u64) {
            let outcome = |chi2: f64, p: f64, e: f64, converged: bool| StartOutcome {
                companion: c + 1,
                start_period: start.period,
                start_eccentricity: start.eccentricity,
                start_omega_deg: start.omega.to_degrees(),
                chi_squared: chi2,
                period: p,
                eccentricity: e,
                converged,
                reached_best: false,
            };
            let Some(initial) = linear_start(data, &layout, previous, start, options.n_phase_scan)
            else {
                starts_out.push(outcome(f64::NAN, f64::NAN, f64::NAN, false));
                continue;
            };
            match fit_least_squares_with(solver, &problem, &initial, None, &options.start_lsq) {
                Ok(report) => {
                    let comp = decode_companion(
                        &layout,
                        EccentricityCoordinates::SqrtE,
                        &report.params,
                        c,
                    );
                    starts_out.push(outcome(
                        report.chi_squared,
                        comp.period,
                        comp.eccentricity,
                        report.converged() || report.termination.at_machine_precision(),
                    ));
                    if report.chi_squared.is_finite()
                        && best
                            .as_ref()
                            .is_none_or(|b| report.chi_squared < b.chi_squared)
                    {
                        best = Some(StageBest {
                            params: report.params,
                            chi_squared: report.chi_squared,
                        });
                    }
                }
                Err(err) => {
                    first_error.get_or_insert(err);
                    starts_out.push(outcome(f64::NAN, f64::NAN, f64::NAN, false));
                }
            }
        }
    }
    let Some(best) = best else {
        return Err(match first_error {
            Some(err) => FitError::NoStart(err),
            None => FitError::InvalidOption {
                name: "starts",
                value: format!("{candidates:?}"),
                reason: "no start gave a finite model",
            },
        });
    };
    for s in &mut starts_out[stage_start..] {
        s.reached_best = (s.chi_squared - best.chi_squared).abs() <= SAME_MINIMUM;
    }
    Ok(best)
}

/// Stages 4–6 of [`fit_orbit`] at a given layout: the refinement in (e cos ω, e sin ω) with the
/// jitter, and the solution with its covariance and tests.
struct Refiner<'a> {
    data: &'a FitData,
    options: &'a FitOptions,
}

impl Refiner<'_> {
    /// Levenberg–Marquardt in E coordinates from `start`, with the jitter alternation when
    /// asked for ([`refine_with_jitter`]).
    fn refine(
        &self,
        solver: &mut LmSolver,
        layout: &ParameterLayout,
        start: &[f64],
    ) -> Result<Refined, FitError> {
        refine_with_jitter(solver, self.data, layout, start, self.options)
    }

    /// The reported solution of a refined fit ([`build_solution`]).
    fn solution(&self, layout: &ParameterLayout, fit: &Refined) -> Solution {
        let options = self.options;
        build_solution(
            &SolutionContext {
                data: self.data,
                layout,
                jitter: fit.jitter.as_deref(),
                jitter_iterations: fit.jitter.as_ref().map(|_| fit.jitter_iterations),
                jitter_converged: fit.jitter_converged,
                jitter_method: options.jitter_method,
                termination: fit.termination,
                stellar_mass: options.stellar_mass,
                lucy_sweeney_threshold: options.lucy_sweeney_threshold,
                singular_tolerance: options.lsq.singular_tolerance,
            },
            &fit.params,
        )
    }
}

/// The Lucy–Sweeney step of [`fit_orbit`]: the companions whose eccentricity the test does not
/// find significant are refitted circular, started from the eccentric solution (the other
/// companions, offsets and trend at their values); None when every eccentricity is significant.
fn circular_refit(
    refiner: &Refiner,
    solver: &mut LmSolver,
    layout: &ParameterLayout,
    eccentric: &Solution,
) -> Result<Option<Solution>, FitError> {
    let circular_flags: Vec<bool> = eccentric
        .companions
        .iter()
        .map(|c| c.lucy_sweeney.is_some_and(|ls| !ls.significant))
        .collect();
    if !circular_flags.iter().any(|&f| f) {
        return Ok(None);
    }
    let mut circ_layout = layout.clone();
    circ_layout.circular = circular_flags;
    let mut start = vec![0.0; circ_layout.n_params()];
    for c in 0..layout.n_companions() {
        let comp = decode_companion(layout, EccentricityCoordinates::E, &eccentric.parameters, c);
        encode_companion(
            &circ_layout,
            EccentricityCoordinates::E,
            &mut start,
            c,
            &comp.into(),
        );
    }
    let (o_old, o_new) = (layout.offsets_start(), circ_layout.offsets_start());
    let tail = layout.n_params() - o_old;
    start[o_new..o_new + tail].copy_from_slice(&eccentric.parameters[o_old..]);
    let fit = refiner.refine(solver, &circ_layout, &start)?;
    Ok(Some(refiner.solution(&circ_layout, &fit)))
}

fn note_solution(solution: &Solution, what: &str, warnings: &mut Vec<String>) {
    if !solution.converged {
        warnings.push(format!(
            "{what}: the fit did not converge ({:?}{}); the best point found is shown",
            solution.termination,
            if solution.jitter_iterations == Some(MAX_JITTER_ITERATIONS) {
                ", jitter iteration limit reached"
            } else {
                ""
            }
        ));
    }
    if solution.covariance.is_none() {
        warnings.push(format!(
            "{what}: covariance {:?}: some parameter combination is not constrained by the data \
             (e.g. poor phase coverage); formal errors are not available",
            solution.covariance_status
        ));
    }
    for (c, comp) in solution.companions.iter().enumerate() {
        if comp.eccentricity.value > super::MAX_ECCENTRICITY - 1e-3 {
            warnings.push(format!(
                "{what}: companion {} reached the eccentricity limit {}",
                c + 1,
                super::MAX_ECCENTRICITY
            ));
        }
    }
}

/// Candidate periods of companion `c`.
fn candidate_periods(
    data: &FitData,
    options: &FitOptions,
    c: usize,
    previous: &[f64],
    summaries: &mut Vec<PeriodSearchSummary>,
) -> Result<Vec<f64>, FitError> {
    let degenerate = |period: f64| {
        let n_distinct = count_distinct_phases(data.times(), period);
        (n_distinct < MIN_DISTINCT_PHASES).then_some(FitError::DegenerateSampling {
            companion: c + 1,
            period,
            n_points: data.n_points(),
            n_distinct_phases: n_distinct,
            needed: MIN_DISTINCT_PHASES,
            bin: PHASE_BIN_CYCLES,
        })
    };
    if let Some(&period) = options.initial_periods.get(c) {
        if let Some(err) = degenerate(period) {
            return Err(err);
        }
        summaries.push(PeriodSearchSummary {
            companion: c + 1,
            given: true,
            best_period: None,
            best_power: None,
            false_alarm_probability: None,
            candidate_periods: vec![period],
        });
        return Ok(vec![period]);
    }
    let values = if c == 0 {
        centred_velocities(data)
    } else {
        let layout = ParameterLayout::new(c, data.n_instruments(), options.trend);
        let problem = RvProblem::new(data, layout, EccentricityCoordinates::SqrtE);
        let mut model = vec![0.0; data.n_points()];
        problem.model_velocities(previous, &mut model);
        data.velocities()
            .iter()
            .zip(&model)
            .map(|(v, m)| v - m)
            .collect()
    };
    let pg_options = PeriodogramOptions {
        grid: GridOptions {
            limits: options.limits,
            oversampling: options.oversampling,
            ..GridOptions::default()
        },
        n_top_peaks: options.n_peaks,
    };
    let pg =
        peak_search(data.times(), &values, data.uncertainties(), &pg_options).map_err(|error| {
            FitError::PeriodSearch {
                companion: c + 1,
                error,
            }
        })?;
    let best = pg.best_peak;
    if best.false_alarm_probability > options.max_false_alarm_probability {
        return Err(FitError::NoSignificantPeriod {
            companion: c + 1,
            period: best.period,
            power: best.power,
            false_alarm_probability: best.false_alarm_probability,
            threshold: options.max_false_alarm_probability,
        });
    }
    let mut first_degenerate = None;
    let mut candidates = Vec::new();
    for peak in &pg.top_peaks {
        match degenerate(peak.period) {
            Some(err) => {
                first_degenerate.get_or_insert(err);
            }
            None => candidates.push(peak.period),
        }
    }
    if candidates.is_empty() {
        return Err(first_degenerate.unwrap_or(FitError::DegenerateSampling {
            companion: c + 1,
            period: best.period,
            n_points: data.n_points(),
            n_distinct_phases: 0,
            needed: MIN_DISTINCT_PHASES,
            bin: PHASE_BIN_CYCLES,
        }));
    }
    summaries.push(PeriodSearchSummary {
        companion: c + 1,
        given: false,
        best_period: Some(best.period),
        best_power: Some(best.power),
        false_alarm_probability: Some(best.false_alarm_probability),
        candidate_periods: candidates.clone(),
    });
    Ok(candidates)
}

/// A refined solution in (e cos ω, e sin ω) coordinates.
struct Refined {
    params: Vec<f64>,
    termination: Termination,
    jitter: Option<Vec<f64>>,
    jitter_iterations: usize,
    jitter_converged: bool,
}

/// LM in E coordinates from `start`, with the jitter alternation when asked for.
fn refine_with_jitter(
    solver: &mut LmSolver,
    data: &FitData,
    layout: &ParameterLayout,
    start: &[f64],
    options: &FitOptions,
) -> Result<Refined, FitError> {
    let mut problem = RvProblem::new(data, layout.clone(), EccentricityCoordinates::E);
    let run = |solver: &mut LmSolver, problem: &RvProblem, start: &[f64]| {
        fit_least_squares_with(solver, problem, start, None, &options.lsq)
            .map_err(FitError::NoStart)
    };
    let first = run(solver, &problem, start)?;
    if !options.jitter {
        return Ok(Refined {
            params: first.params,
            termination: first.termination,
            jitter: None,
            jitter_iterations: 0,
            jitter_converged: true,
        });
    }
    let n_inst = data.n_instruments();
    let mut sorted = data.uncertainties().to_vec();
    sorted.sort_by(f64::total_cmp);
    let tolerance = 1e-6 * sorted[sorted.len() / 2];
    let mut jitter = vec![0.0; n_inst];
    let mut params = first.params;
    let mut termination = first.termination;
    let mut model = vec![0.0; data.n_points()];
    let mut converged = false;
    let mut iterations = 0;
    while iterations < MAX_JITTER_ITERATIONS {
        iterations += 1;
        problem.model_velocities(&params, &mut model);
        let mut change = 0.0f64;
        for (j, slot) in jitter.iter_mut().enumerate() {
            let (res, sig): (Vec<f64>, Vec<f64>) = (0..data.n_points())
                .filter(|&i| data.instruments()[i] == j)
                .map(|i| (data.velocities()[i] - model[i], data.uncertainties()[i]))
                .unzip();
            let updated = match options.jitter_method {
                JitterMethod::MaximumLikelihood => ml_jitter(&res, &sig),
                JitterMethod::ModifiedLikelihood => {
                    modified_likelihood_jitter(&res, &sig, data.n_points(), layout.n_params())
                }
            };
            change = change.max((updated - *slot).abs());
            *slot = updated;
        }
        problem.set_jitter(&jitter);
        let report = run(solver, &problem, &params)?;
        params = report.params;
        termination = report.termination;
        if change <= tolerance {
            converged = true;
            break;
        }
    }
    Ok(Refined {
        params,
        termination,
        jitter: Some(jitter),
        jitter_iterations: iterations,
        jitter_converged: converged,
    })
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::random::normal;

    /// Simulated single-companion data: irregular epochs, σ = `sigma`, seeded noise.
    pub(crate) fn simulate(
        n: usize,
        truth: (f64, f64, f64, f64, f64),
        sigma: f64,
        seed: u64,
    ) -> FitData {
        let (p, k, e, w, tp) = truth;
        let mut rng = stream_rng(seed, 0);
        let times: Vec<f64> = (0..n)
            .map(|i| 2_460_000.0 + 400.0 * (i as f64 + 0.8 * rng.random::<f64>()) / n as f64)
            .collect();
        let el = crate::orbit::OrbitalElements::new(p, k, e, w, tp).unwrap();
        let v: Vec<f64> = times
            .iter()
            .map(|&t| el.radial_velocity(t) + 12.0 + normal(&mut rng, 0.0, sigma))
            .collect();
        FitData::new(&times, &v, &vec![sigma; n], &vec![0; n], &["sim".into()])
    }

    #[test]
    fn too_few_points_is_a_typed_error() {
        let data = simulate(6, (10.0, 20.0, 0.2, 1.0, 2_460_003.0), 1.0, 1);
        let err = fit_orbit(&data, &FitOptions::default()).unwrap_err();
        assert!(matches!(
            err,
            FitError::TooFewPoints {
                n_points: 6,
                n_params: 6,
                needed: 7,
                ..
            }
        ));
    }

    #[test]
    fn recovers_a_high_snr_orbit_and_counts_starts() {
        // K/σ = 50, 40 epochs: elements within 3 formal σ of the truth (Gaussian noise; the
        // 3σ bound fails with probability ~0.3 % per element for a linear-enough problem).
        let truth = (17.3, 50.0, 0.35, 1.1, 2_460_004.0);
        let data = simulate(40, truth, 1.0, 7);
        let report = fit_orbit(&data, &FitOptions::default()).unwrap();
        let sol = &report.eccentric;
        let c = &sol.companions[0];
        assert!(sol.converged, "{report}");
        for (est, want) in [
            (c.period, truth.0),
            (c.semi_amplitude, truth.1),
            (c.eccentricity, truth.2),
        ] {
            let err = est.error.unwrap();
            assert!((est.value - want).abs() < 3.0 * err, "{report}");
        }
        assert_eq!(report.adopted, Adopted::Eccentric);
        assert!(report.n_reached_best >= 2, "{report}");
        assert_eq!(report.n_starts, 3 * 9);
    }
}
