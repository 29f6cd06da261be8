//! One posterior run under one prior, and the prior-sensitivity set: the same data sampled under
//! a list of eccentricity priors, one summary each.

use std::fmt;
use std::ops::ControlFlow;

use serde::{Deserialize, Serialize};

use crate::fit::{fit_orbit, FitData, FitOptions, FitReport};
use crate::priors::{EccentricityPriorSettings, EccentricityShape};
use crate::sampler::{
    diagnose_derived, diagnose_traces, diagnose_with, Chains, ConvergenceThresholds,
    DiagnosisDepth, EnsembleState, SamplerSettings,
};

use super::start::{start_from_fit, PosteriorStart};
use super::summary::{summarise_eccentricity, EccentricitySummary, SamplerCost};
use super::target::{PosteriorSettings, RvPosterior};
use super::PosteriorError;

/// The fast sampler preset for repeated use (injection–recovery): 24 walkers, 300 burn-in and
/// 600 stored steps, i.e. 21 624 log-density evaluations with the initial ball. Cost: see
/// `eccaudit bench --posterior` and the performance table of DEVELOPERS.md (one Keplerian,
/// 30 epochs: tens of milliseconds per run, almost all of it in `RvProblem::model_velocities`).
/// Short for convergence by the default thresholds: use it for population statistics, not for
/// a quoted value.
pub fn fast_sampler_settings(seed: u64) -> SamplerSettings {
    SamplerSettings {
        n_walkers: 24,
        n_steps: 600,
        n_burn: 300,
        thin: 1,
        stretch_a: 2.0,
        seed,
    }
}

/// Steps advanced between observer calls.
const CHUNK: usize = 50;

/// Progress of a run or a set of runs.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct PosteriorProgress {
    /// Index of the prior being sampled.
    pub prior_index: usize,
    /// Priors in the set.
    pub n_priors: usize,
    /// Steps done in this run (burn-in included).
    pub steps_done: usize,
    /// Steps of this run.
    pub total_steps: usize,
}

/// One run's result: the summary of e, the chains and the parameter names.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct PosteriorRun {
    /// What the run says about e (companion 1).
    pub summary: EccentricitySummary,
    /// Names of the sampled parameters, in the chains' order.
    pub parameter_names: Vec<String>,
    /// The start used.
    pub start: PosteriorStart,
    /// The chains (not serialised: they are large).
    #[serde(skip)]
    pub chains: Chains,
}

/// Samples the posterior of `data` under `settings` from `start` and summarises e of the first
/// companion. `observer` sees progress every 50 steps and may cancel.
pub fn run_posterior(
    data: &FitData,
    settings: &PosteriorSettings,
    sampler: &SamplerSettings,
    start: &PosteriorStart,
    observer: &mut impl FnMut(PosteriorProgress) -> ControlFlow<()>,
    prior_index: (usize, usize),
) -> Result<PosteriorRun, PosteriorError> {
    run_posterior_judged(
        data,
        settings,
        sampler,
        start,
        observer,
        prior_index,
        Judged::EveryParameter,
    )
}

/// Which quantities decide whether a run has converged.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
enum Judged {
    /// Every sampled parameter (a run whose result is looked at or quoted).
    EveryParameter,
    /// e alone, by the quick checks of [`DiagnosisDepth::Quick`] (injection–recovery, where only
    /// e is used and thousands of runs are summarised together; a small fraction of the cost).
    EccentricityAlone,
}

fn run_posterior_judged(
    data: &FitData,
    settings: &PosteriorSettings,
    sampler: &SamplerSettings,
    start: &PosteriorStart,
    observer: &mut impl FnMut(PosteriorProgress) -> ControlFlow<()>,
    prior_index: (usize, usize),
    judged: Judged,
) -> Result<PosteriorRun, PosteriorError> {
    if settings.priors.eccentricity.shape == EccentricityShape::Circular {
        return Err(PosteriorError::CircularInSet);
    }
    let centres = start.lambda_centres(settings, data.n_instruments());
    let target = RvPosterior::new(data, settings, &centres)?;
    let mut state = EnsembleState::new(&target, &start.point, &start.scales, sampler)?;
    while !state.is_finished() {
        state.advance(&target, CHUNK)?;
        let progress = state.progress();
        let report = PosteriorProgress {
            prior_index: prior_index.0,
            n_priors: prior_index.1,
            steps_done: progress.steps_done,
            total_steps: progress.total_steps,
        };
        if observer(report).is_break() {
            return Err(PosteriorError::Cancelled {
                prior_index: prior_index.0,
                steps_done: progress.steps_done,
            });
        }
    }
    let chains = state.into_chains();
    let start_index = target.layout().companion_start(0);
    let e_traces: Vec<Vec<f64>> = (0..chains.n_walkers)
        .map(|w| {
            (0..chains.n_stored_steps)
                .map(|s| {
                    let x = chains.sample(s, w);
                    x[start_index + 2] * x[start_index + 2]
                        + x[start_index + 3] * x[start_index + 3]
                })
                .collect()
        })
        .collect();
    let cost = SamplerCost {
        n_walkers: chains.n_walkers,
        n_steps_total: sampler.n_burn + sampler.n_steps,
        n_samples: chains.n_walkers * chains.n_stored_steps,
        log_density_evaluations: target.evaluations(),
    };
    let thresholds = ConvergenceThresholds::default();
    let (diagnostics, e_diagnostics) = match judged {
        Judged::EveryParameter => (
            diagnose_with(&chains, &thresholds),
            diagnose_traces(
                &e_traces,
                "e",
                chains.thin,
                &thresholds,
                DiagnosisDepth::Full,
            )
            .0,
        ),
        Judged::EccentricityAlone => {
            let diagnostics =
                diagnose_derived(&chains, "e", &e_traces, &thresholds, DiagnosisDepth::Quick);
            let e = diagnostics.parameters[0];
            (diagnostics, e)
        }
    };
    let summary = summarise_eccentricity(
        &e_traces,
        target.eccentricity_prior(),
        &e_diagnostics,
        &diagnostics,
        cost,
    );
    Ok(PosteriorRun {
        summary,
        parameter_names: settings.parameter_names(data.instrument_names()),
        start: start.clone(),
        chains,
    })
}

/// The function for repeated use (e.g. the injection–recovery engine): the e summary of one run
/// from a given start, without progress reporting. Pair with [`fast_sampler_settings`].
///
/// Only e is used, so convergence is judged on e alone, by the quick checks of
/// [`DiagnosisDepth::Quick`] ([`diagnose_derived`]): the full diagnostics of every parameter cost
/// several times the sampling of a short run and change nothing that is reported per trial.
pub fn posterior_eccentricity(
    data: &FitData,
    settings: &PosteriorSettings,
    sampler: &SamplerSettings,
    start: &PosteriorStart,
) -> Result<EccentricitySummary, PosteriorError> {
    run_posterior_judged(
        data,
        settings,
        sampler,
        start,
        &mut |_| ControlFlow::Continue(()),
        (0, 1),
        Judged::EccentricityAlone,
    )
    .map(|run| run.summary)
}

/// The default prior-sensitivity set (stated choices):
/// 1–3. uniform in e truncated at e_max = 0.99, 0.8, 0.5 (the same family, three truncations;
///      0.99 is the model's domain);
/// 4. Beta(0.867, 3.03) of Kipping (2013, MNRAS 434, L51), on [0, 0.99];
/// 5. Rayleigh σ = 0.3 on [0, 0.99] (the scale Jurić & Tremaine 2008, ApJ 686, 603 found for
///    planet–planet scattering, from memory);
/// 6. p(e) ∝ e on [0, 0.99], the prior implied by sampling uniformly in (e cos ω, e sin ω)
///    (Eastman, Gaudi & Agol 2013, PASP 125, 83), which disfavours small e.
pub fn default_prior_set() -> Vec<EccentricityPriorSettings> {
    let on = |shape, e_max| EccentricityPriorSettings {
        shape,
        e_min: 0.0,
        e_max,
    };
    vec![
        on(EccentricityShape::Uniform, 0.99),
        on(EccentricityShape::Uniform, 0.8),
        on(EccentricityShape::Uniform, 0.5),
        on(EccentricityShape::KIPPING_2013_ALL, 0.99),
        on(EccentricityShape::Rayleigh { sigma: 0.3 }, 0.99),
        on(EccentricityShape::UniformInECosOmega, 0.99),
    ]
}

/// Settings of [`prior_sensitivity`].
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct SensitivitySettings {
    /// Priors other than e (the eccentricity prior in it is ignored), jitter, trend.
    pub posterior: PosteriorSettings,
    /// The eccentricity priors to compare (at least one; not circular).
    pub priors: Vec<EccentricityPriorSettings>,
    /// Sampler settings; the same seed is used for every prior.
    pub sampler: SamplerSettings,
    /// Settings of the least-squares fit that gives the start (its `jitter` and `trend` are
    /// taken from `posterior`).
    pub fit: FitOptions,
}

impl Default for SensitivitySettings {
    fn default() -> Self {
        Self {
            posterior: PosteriorSettings::default(),
            priors: default_prior_set(),
            sampler: SamplerSettings::default(),
            fit: FitOptions::default(),
        }
    }
}

/// The least-squares figures shown beside the posteriors.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct LeastSquaresEccentricity {
    /// Period [d].
    pub period: f64,
    /// Minimum-χ² eccentricity.
    pub e: f64,
    /// Its formal error.
    pub e_error: Option<f64>,
    /// Lucy–Sweeney probability that an e this large arises from a circular orbit.
    pub lucy_sweeney_probability: Option<f64>,
}

/// The prior-sensitivity set.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct SensitivityReport {
    /// Epochs.
    pub n_points: usize,
    /// The least-squares start.
    pub least_squares: LeastSquaresEccentricity,
    /// The priors on the other parameters, every bound.
    pub settings: PosteriorSettings,
    /// Sampler settings.
    pub sampler: SamplerSettings,
    /// One run per prior, in the order given.
    pub runs: Vec<PosteriorRun>,
    /// Largest minus smallest posterior median of e over the set.
    pub median_spread: f64,
    /// The methods, in words.
    pub methods: Vec<String>,
}

/// The methods behind each figure, for reports.
pub fn method_notes() -> Vec<String> {
    vec![
        "Sampling: affine-invariant ensemble (stretch move) in (P, K, √e cos ω, √e sin ω, λ, γ, [trend], [jitter]); the (√e cos ω, √e sin ω) Jacobian makes the implied prior on e exactly the chosen one; walkers start around the least-squares optimum.".into(),
        "Median, mean, intervals: sample quantiles (type 7); HDI = shortest interval of the samples. Mode: maximum of a Gaussian KDE reflected at the prior's bounds, Silverman bandwidth.".into(),
        "P(e < 0.05): fraction of samples; error √(p(1−p)/ESS_tail).".into(),
        "Information gain: KL(posterior ‖ prior) of e in nats on 50 equal bins over the prior's support, Miller–Madow bias (m−1)/(2 ESS) removed; binning makes it a lower bound.".into(),
        "BF01 (circular over eccentric): Savage–Dickey ratio P_post(e<ε)/P_prior(e<ε) at the smallest ball of prior mass 0.005–0.1 holding ≥ 100 samples; error from the binomial with ESS; valid for nested models with e_min = 0, undefined for e_min > 0.".into(),
    ]
}

/// The shared start of a prior-sensitivity set: the least-squares fit every prior's run starts
/// from (see [`sensitivity_start`]).
#[derive(Debug, Clone)]
pub struct SensitivityStart {
    /// The least-squares report.
    pub fit: FitReport,
    /// Its figures for e, as reported.
    pub least_squares: LeastSquaresEccentricity,
}

/// Checks the set (not empty, no circular prior, every prior valid) and runs the least-squares
/// fit that every run of [`sensitivity_run`] starts from. Deterministic: the same data and
/// settings give the same start in every process, so runs may be spread over workers.
pub fn sensitivity_start(
    data: &FitData,
    settings: &SensitivitySettings,
) -> Result<SensitivityStart, PosteriorError> {
    if settings.priors.is_empty() {
        return Err(PosteriorError::EmptyPriorSet);
    }
    if settings
        .priors
        .iter()
        .any(|p| p.shape == EccentricityShape::Circular)
    {
        return Err(PosteriorError::CircularInSet);
    }
    // Check every prior before spending time on the fit.
    for p in &settings.priors {
        settings.posterior.with_eccentricity(*p).priors.validate()?;
    }
    let fit_options = FitOptions {
        n_companions: settings.posterior.n_companions,
        jitter: settings.posterior.jitter,
        trend: settings.posterior.trend,
        ..settings.fit.clone()
    };
    let fit: FitReport = fit_orbit(data, &fit_options)?;
    let first = &fit.eccentric.companions[0];
    let least_squares = LeastSquaresEccentricity {
        period: first.period.value,
        e: first.eccentricity.value,
        e_error: first.eccentricity.error,
        lucy_sweeney_probability: first.lucy_sweeney.map(|l| l.probability),
    };
    Ok(SensitivityStart { fit, least_squares })
}

/// The run of prior `prior_index` of the set, from the shared `start`; `observer` sees progress
/// (with this prior's index) and may cancel. Independent of the other priors' runs.
pub fn sensitivity_run(
    data: &FitData,
    settings: &SensitivitySettings,
    start: &SensitivityStart,
    prior_index: usize,
    observer: &mut impl FnMut(PosteriorProgress) -> ControlFlow<()>,
) -> Result<PosteriorRun, PosteriorError> {
    let n_priors = settings.priors.len();
    let prior = settings
        .priors
        .get(prior_index)
        .ok_or(PosteriorError::PriorIndex {
            index: prior_index,
            n_priors,
        })?;
    let posterior = settings.posterior.with_eccentricity(*prior);
    let effective = posterior.effective_eccentricity().validate()?;
    let walker_start = start_from_fit(
        &start.fit,
        &posterior,
        &effective,
        data.uncertainties(),
        data.n_instruments(),
    )?;
    run_posterior(
        data,
        &posterior,
        &settings.sampler,
        &walker_start,
        observer,
        (prior_index, n_priors),
    )
}

/// Assembles the report of a set from its runs, given in prior order (one per prior of
/// `settings`): the spread of the medians and the method notes are added here, so a set run in
/// one process and a set run prior by prior elsewhere give the same report.
pub fn assemble_sensitivity_report(
    n_points: usize,
    least_squares: LeastSquaresEccentricity,
    settings: &SensitivitySettings,
    runs: Vec<PosteriorRun>,
) -> Result<SensitivityReport, PosteriorError> {
    if runs.len() != settings.priors.len() {
        return Err(PosteriorError::RunCount {
            runs: runs.len(),
            n_priors: settings.priors.len(),
        });
    }
    let medians = runs.iter().map(|r| r.summary.median);
    let median_spread =
        medians.clone().fold(f64::NEG_INFINITY, f64::max) - medians.fold(f64::INFINITY, f64::min);
    Ok(SensitivityReport {
        n_points,
        least_squares,
        settings: settings.posterior,
        sampler: settings.sampler,
        runs,
        median_spread,
        methods: method_notes(),
    })
}

/// Runs the least-squares fit (for the start) and then the sampler under each prior of
/// `settings.priors`, all with the same seed. `observer` sees progress and may cancel.
/// Composed of [`sensitivity_start`], [`sensitivity_run`] per prior and
/// [`assemble_sensitivity_report`].
pub fn prior_sensitivity(
    data: &FitData,
    settings: &SensitivitySettings,
    observer: &mut impl FnMut(PosteriorProgress) -> ControlFlow<()>,
) -> Result<SensitivityReport, PosteriorError> {
    let start = sensitivity_start(data, settings)?;
    let runs = (0..settings.priors.len())
        .map(|i| sensitivity_run(data, settings, &start, i, observer))
        .collect::<Result<Vec<_>, _>>()?;
    assemble_sensitivity_report(data.n_points(), start.least_squares, settings, runs)
}

fn interval(i: [f64; 2]) -> String {
    format!("[{:.3}, {:.3}]", i[0], i[1])
}

impl fmt::Display for SensitivityReport {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        let ls = &self.least_squares;
        writeln!(
            f,
            "Prior sensitivity of e: {} epochs; least squares P = {:.6} d, e = {:.4}{}",
            self.n_points,
            ls.period,
            ls.e,
            ls.e_error.map_or(String::new(), |s| format!(" ± {s:.4}")),
        )?;
        let p = &self.settings.priors;
        writeln!(
            f,
            "Other priors: P {} d; K {} m/s; jitter {} {} m/s; offset {} m/s{}",
            p.period,
            p.semi_amplitude,
            if self.settings.jitter {
                "sampled,"
            } else {
                "not sampled,"
            },
            p.jitter,
            p.offset,
            if self.settings.trend {
                format!("; trend {:?} m/s/d", self.settings.trend_prior)
            } else {
                String::new()
            }
        )?;
        writeln!(
            f,
            "Sampler: {} walkers x ({} burn-in + {} steps), seed {}",
            self.sampler.n_walkers, self.sampler.n_burn, self.sampler.n_steps, self.sampler.seed
        )?;
        writeln!(f)?;
        writeln!(
            f,
            "{:<3} {:<44} {:>13} {:>6} {:>6} {:>16} {:>16} {:>14} {:>13} {:>16} converged",
            "#",
            "prior on e",
            "median",
            "mode",
            "mean",
            "68% interval",
            "95% interval",
            "P(e<0.05)",
            "KL [nats]",
            "BF01 (circ/ecc)",
        )?;
        for (i, run) in self.runs.iter().enumerate() {
            let s = &run.summary;
            let bf = &s.bayes_factor;
            let bf_text = match bf.status {
                super::BayesFactorStatus::Estimated => {
                    format!("{:.3} ± {:.3}", bf.bf01, bf.bf01_error)
                }
                super::BayesFactorStatus::UpperLimit => format!("< {:.3e}", bf.bf01),
                super::BayesFactorStatus::Undefined => "undefined".into(),
            };
            writeln!(
                f,
                "{:<3} {:<44} {:>13} {:>6.3} {:>6.3} {:>16} {:>16} {:>14} {:>13} {:>16} {}",
                i + 1,
                s.prior_label,
                format!("{:.3} ± {:.3}", s.median, s.median_mc_error),
                s.mode,
                s.mean,
                interval(s.interval_68),
                interval(s.interval_95),
                format!(
                    "{:.3} ± {:.3}",
                    s.p_nearly_circular, s.p_nearly_circular_mc_error
                ),
                format!(
                    "{:.3} ± {:.3}",
                    s.information_gain.nats, s.information_gain.standard_error
                ),
                bf_text,
                if s.converged { "yes" } else { "NO" },
            )?;
        }
        writeln!(f)?;
        writeln!(
            f,
            "Spread of the posterior median over the set: {:.3}",
            self.median_spread
        )?;
        for (i, run) in self.runs.iter().enumerate() {
            if !run.summary.converged {
                let first = run.summary.verdict.lines().nth(1).unwrap_or("");
                writeln!(
                    f,
                    "Run {} not converged: {}",
                    i + 1,
                    first.trim_start_matches("- ")
                )?;
            }
            if run.start.eccentricity_moved {
                writeln!(
                    f,
                    "Run {}: the least-squares e lies outside this prior's truncation; walkers \
                     started inside it",
                    i + 1
                )?;
            }
        }
        writeln!(f, "Methods:")?;
        for note in &self.methods {
            writeln!(f, "- {note}")?;
        }
        Ok(())
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::model::RvModel;
    use crate::orbit::OrbitalElements;
    use crate::posterior::SensitivityRequest;

    /// An eccentric orbit (P = 40 d, K = 30 m/s, e = 0.3) at 30 uneven epochs, with a
    /// deterministic ±1.5 m/s wiggle standing in for noise.
    fn data() -> FitData {
        let times: Vec<f64> = (0..30)
            .map(|i| 100.0 + 7.3 * i as f64 + 2.1 * libm::sin(1.3 * i as f64))
            .collect();
        let orbit = OrbitalElements::new(40.0, 30.0, 0.3, 1.0, 95.0).unwrap();
        let model = RvModel::new(vec![orbit], vec![5.0], 0.0, 100.0).unwrap();
        let mut velocities = vec![0.0; times.len()];
        model
            .velocities_one_instrument(&times, 0, &mut velocities)
            .unwrap();
        for (i, v) in velocities.iter_mut().enumerate() {
            *v += 1.5 * libm::sin(2.7 * i as f64);
        }
        let errors = vec![2.0; times.len()];
        FitData::new(&times, &velocities, &errors, &[0; 30], &["a".into()])
    }

    fn short_settings() -> SensitivitySettings {
        SensitivityRequest {
            priors: vec!["uniform:0..0.8".into(), "rayleigh(0.3)".into()],
            walkers: 16,
            steps: 60,
            burn: 20,
            seed: 5,
            model: crate::spec::ModelSpec {
                periods: vec![40.0],
                ..crate::spec::ModelSpec::DEFAULT
            },
            ..SensitivityRequest::default()
        }
        .to_settings()
        .unwrap()
    }

    #[test]
    fn runs_done_separately_and_in_any_order_assemble_to_the_same_report() {
        // What the page relies on when it spreads the priors over workers: each run depends
        // only on the data, the settings and its index, not on the runs before it.
        let data = data();
        let settings = short_settings();
        let whole =
            prior_sensitivity(&data, &settings, &mut |_| ControlFlow::Continue(())).unwrap();
        let start = sensitivity_start(&data, &settings).unwrap();
        let mut continue_ = |_| ControlFlow::Continue(());
        let second = sensitivity_run(&data, &settings, &start, 1, &mut continue_).unwrap();
        let first = sensitivity_run(&data, &settings, &start, 0, &mut continue_).unwrap();
        let parts = assemble_sensitivity_report(
            data.n_points(),
            start.least_squares,
            &settings,
            vec![first, second],
        )
        .unwrap();
        // Debug text compares every field bit for bit (f64 Debug is shortest-round-trip) and
        // treats NaN (e.g. an undefined Bayes-factor error) as equal to NaN, unlike `==`.
        assert_eq!(format!("{parts:?}"), format!("{whole:?}"));
        assert_eq!(
            whole.median_spread,
            (whole.runs[0].summary.median - whole.runs[1].summary.median).abs()
        );
    }

    #[test]
    fn wrong_index_and_wrong_run_count_are_errors() {
        let data = data();
        let settings = short_settings();
        let start = sensitivity_start(&data, &settings).unwrap();
        let err = sensitivity_run(&data, &settings, &start, 2, &mut |_| {
            ControlFlow::Continue(())
        })
        .unwrap_err();
        assert_eq!(
            err,
            PosteriorError::PriorIndex {
                index: 2,
                n_priors: 2
            }
        );
        let err = assemble_sensitivity_report(30, start.least_squares, &settings, Vec::new())
            .unwrap_err();
        assert_eq!(
            err,
            PosteriorError::RunCount {
                runs: 0,
                n_priors: 2
            }
        );
    }
}
