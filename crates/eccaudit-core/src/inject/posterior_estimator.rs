//! Posterior estimators of e for injection–recovery: median, mean and mode of e under one
//! eccentricity prior, from a short ensemble-sampler run on each simulated data set.

use rand::RngExt;

use super::design::InjectionDesign;
use super::estimators::{
    EccentricityEstimate, Estimator, EstimatorError, LeastSquaresEstimator, OutputInfo,
};
use crate::fit::{fit_orbit, FitData};
use crate::posterior::{
    add_other_optima, fast_run_length, posterior_eccentricity, start_from_fit, BayesFactorStatus,
    PosteriorSettings,
};
use crate::priors::EccentricityPriorSettings;
use crate::random::SimRng;
use crate::sampler::{RunLength, SamplerSettings, StopReason};

/// The posterior of e under one prior, summarised three ways.
///
/// Each data set is first fitted by least squares at the known period (the same eight starts
/// as [`LeastSquaresEstimator`]); independent ensembles start around that optimum and run with
/// `sampler` (its seed is replaced by one drawn from the trial's own stream) until the
/// convergence rule ([`crate::sampler::CONVERGENCE_RULE`], judged on e) holds or the per-trial
/// budget of `length` runs out; the `converged` output says which. The jitter is sampled
/// under the same prior as `eccaudit priors` (one jitter, modified Jeffreys), so that the
/// posterior in a trial is the posterior a user gets for a table like the simulated one.
/// Intervals are highest-density intervals, upper limits [0, u] when they reach e = 0.
#[derive(Debug, Clone)]
pub struct PosteriorEstimator {
    /// The eccentricity prior.
    pub prior: EccentricityPriorSettings,
    /// Sampler settings (walkers per ensemble, steps before the first check, burn-in); the seed
    /// is per trial.
    pub sampler: SamplerSettings,
    /// Ensembles and the per-trial budget.
    pub length: RunLength,
    /// Priors on the other parameters.
    pub posterior: PosteriorSettings,
    /// Short name used as the prefix of the output names, e.g. `uniform`.
    pub tag: String,
}

impl PosteriorEstimator {
    /// An estimator under `prior` with the sampler settings given, the run length of
    /// [`fast_run_length`] and the default priors on the other parameters, jitter sampled as in
    /// `eccaudit priors`.
    pub fn new(
        prior: EccentricityPriorSettings,
        sampler: SamplerSettings,
        tag: impl Into<String>,
    ) -> Self {
        let posterior = PosteriorSettings::default().with_eccentricity(prior);
        PosteriorEstimator {
            prior,
            sampler,
            length: fast_run_length(),
            posterior,
            tag: tag.into(),
        }
    }

    /// The same estimator with another run length (e.g. a per-trial budget).
    pub fn with_length(mut self, length: RunLength) -> Self {
        self.length = length;
        self
    }

    fn prior_label(&self) -> String {
        let p = &self.prior;
        format!("{} on [{}, {}]", p.shape.label(), p.e_min, p.e_max)
    }
}

impl Estimator for PosteriorEstimator {
    fn name(&self) -> &str {
        &self.tag
    }

    fn outputs(&self) -> Vec<OutputInfo> {
        let prior = self.prior_label();
        let intervals = "highest-density posterior intervals (68.27% and 95%); an upper limit \
                         [0, u] (u the 68.27% or 95% quantile) when the highest-density region \
                         reaches e = 0";
        let call = "posterior probability of e < 0.05 is below 5%";
        let extra_names = vec![
            "p_e_below_0.05".to_string(),
            "bf01".to_string(),
            "bf01_is_upper_limit".to_string(),
            "converged".to_string(),
            "hdi68_is_upper_limit".to_string(),
            "hdi95_is_upper_limit".to_string(),
            "mode_at_boundary".to_string(),
            "evaluations".to_string(),
            "autocorrelation_times".to_string(),
            "budget_exhausted".to_string(),
        ];
        ["median", "mean", "mode"]
            .into_iter()
            .map(|statistic| OutputInfo {
                name: format!("{}_{statistic}", self.tag),
                label: format!("posterior {statistic} of e"),
                prior: prior.clone(),
                intervals: intervals.into(),
                eccentric_call: call.into(),
                extra_names: extra_names.clone(),
            })
            .collect()
    }

    fn settings_text(&self) -> String {
        format!(
            "{:?} {:?} {:?} {:?}",
            self.prior, self.sampler, self.length, self.posterior
        )
    }

    fn cost(&self) -> String {
        let s = &self.sampler;
        let l = &self.length;
        format!(
            "a least-squares fit (8 starts), then {} ensembles of {} walkers x ({} burn-in + at \
             least {} steps), extended until converged: {} to {} posterior evaluations",
            l.n_ensembles,
            s.n_walkers,
            s.n_burn,
            s.n_steps,
            l.n_ensembles * s.n_walkers * (s.n_burn + s.n_steps),
            l.max_evaluations
        )
    }

    fn estimate(
        &self,
        data: &FitData,
        design: &InjectionDesign,
        rng: &mut SimRng,
    ) -> Result<Vec<EccentricityEstimate>, EstimatorError> {
        let other = |e: &dyn std::fmt::Display| {
            EstimatorError::Other(format!("posterior ({}): {e}", self.tag))
        };
        // A prior chosen by period (kipping2013auto) is resolved with the simulated period.
        let resolved = self.prior.for_period(design.period);
        let prior = resolved.validate().map_err(|e| other(&e))?;
        let posterior_settings = self.posterior.with_eccentricity(resolved);
        let fit_options = LeastSquaresEstimator::default().fit_options_for(design);
        let report = fit_orbit(data, &fit_options)?;
        let mut start = start_from_fit(
            &report,
            &posterior_settings,
            &prior,
            data.uncertainties(),
            data.n_instruments(),
        )
        .map_err(|e| other(&e))?;
        add_other_optima(&mut start, data, &report, &fit_options, &posterior_settings);
        let sampler = SamplerSettings {
            seed: rng.random::<u64>(),
            ..self.sampler
        };
        // The refit keeps the real fit's companion order; the audited companion is an index.
        let summary = posterior_eccentricity(
            data,
            &posterior_settings,
            &sampler,
            &self.length,
            &start,
            design.model.audited,
        )
        .map_err(|e| other(&e))?;
        let flag = |b: bool| if b { 1.0 } else { 0.0 };
        let calls_eccentric = Some(summary.p_nearly_circular < 0.05);
        let extra = vec![
            summary.p_nearly_circular,
            match summary.bayes_factor.status {
                BayesFactorStatus::Estimated | BayesFactorStatus::UpperLimit => {
                    summary.bayes_factor.bf01
                }
                BayesFactorStatus::Undefined => f64::NAN,
            },
            if summary.bayes_factor.status == BayesFactorStatus::UpperLimit {
                1.0
            } else {
                0.0
            },
            flag(summary.converged),
            flag(summary.hdi_68_is_upper_limit),
            flag(summary.hdi_95_is_upper_limit),
            flag(summary.mode_at_boundary),
            summary.cost.log_density_evaluations as f64,
            summary.cost.autocorrelation_times,
            flag(summary.cost.stop == StopReason::Budget),
        ];
        let estimate = |point: f64| EccentricityEstimate {
            point,
            lower68: summary.hdi_68[0],
            upper68: summary.hdi_68[1],
            lower95: summary.hdi_95[0],
            upper95: summary.hdi_95[1],
            calls_eccentric,
            extra: extra.clone(),
        };
        Ok(vec![
            estimate(summary.median),
            estimate(summary.mean),
            estimate(summary.mode),
        ])
    }
}

#[cfg(test)]
mod tests {
    use crate::audit::{AuditPlan, AuditSettings};
    use crate::fit::FitData;
    use crate::inject::{Estimator, Outcome};
    use crate::posterior::{prior_sensitivity, SensitivityRequest};
    use crate::sampler::Steer;
    use crate::spec::{JitterMode, ModelSpec};
    use crate::table::{parse_table, ReadOptions};
    use crate::test_support::two_companion_table;

    /// Truth of companion 2 (e) in the shared simulated table
    /// ([`two_companion_table`]: P = 9.7 d and 61 d, a trend, two instruments, 60 epochs).
    const TRUE_E2: f64 = 0.3;

    /// The shared two-companion table with this module's seed (13) and no extra noise.
    fn two_companion_text() -> String {
        two_companion_table(0.0, 13)
    }

    fn model() -> ModelSpec {
        ModelSpec {
            companions: 2,
            trend: true,
            jitter: JitterMode::Off,
            audit_companion: Some(2),
            ..ModelSpec::DEFAULT
        }
    }

    #[test]
    fn posterior_of_companion_two_agrees_with_truth_and_least_squares() {
        let table = parse_table(&two_companion_text(), &ReadOptions::new("two.csv")).unwrap();
        let data = FitData::from_table(&table);
        let settings = SensitivityRequest {
            priors: vec!["uniform".into()],
            seed: 3,
            model: model(),
            ..SensitivityRequest::default()
        }
        .to_settings()
        .unwrap();
        assert_eq!(settings.companion, 1);
        let report = prior_sensitivity(&data, &settings, &mut |_| Steer::Continue).unwrap();
        let ls = report.least_squares;
        assert_eq!(ls.companion, 1);
        // The least-squares fit found companion 2 at its period (fit order: strongest first).
        assert!((ls.period - 61.0).abs() < 1.0, "P2 = {}", ls.period);
        let run = &report.runs[0];
        assert_eq!(run.companion, 1);
        let s = &run.summary;
        assert!(s.converged, "{}", s.verdict);
        // Consistent with the truth: within 3 posterior standard deviations (a 99.7 % band for a
        // near-Gaussian posterior; the Monte-Carlo error of the median, ≤ sd/√400, adds < 0.15
        // sd and is covered by it).
        assert!(
            (s.median - TRUE_E2).abs() < 3.0 * s.sd,
            "median {} ± {} vs truth {TRUE_E2}",
            s.median,
            s.sd
        );
        // Consistent with least squares: for a well-constrained e (sd ≈ 0.03 here, K/σ ≈ 6 at
        // 60 epochs) the posterior median under a uniform prior and the minimum-χ² value differ
        // by a small fraction of sd (the likelihood is near-Gaussian in e); 1 sd plus 4
        // Monte-Carlo errors of the median is a loose bound.
        assert!(
            (s.median - ls.e).abs() < s.sd + 4.0 * s.median_mc_error,
            "median {} vs least squares {} (sd {}, mc {})",
            s.median,
            ls.e,
            s.sd,
            s.median_mc_error
        );
        // Companion 1's e must not be what is summarised: its truth is 0.1, 6 sd away.
        assert!(s.median > 0.2);
    }

    #[test]
    fn injection_trials_for_companion_two_run_and_converge() {
        let text = two_companion_text();
        let table = parse_table(&text, &ReadOptions::new("two.csv")).unwrap();
        let mut settings = AuditSettings {
            model: model(),
            seed: 11,
            ..AuditSettings::default()
        };
        settings.injection.eccentricities = vec![TRUE_E2];
        settings.injection.trials_per_cell = 3;
        settings.injection.posterior.priors = vec!["uniform".into()];
        let plan = AuditPlan::new(&table, &settings).unwrap();
        assert_eq!(plan.companion(), 2);
        assert_eq!(plan.design().model.audited, 1);
        let records = plan.run_trials(0..3, &mut |_| {}).unwrap();
        let names: Vec<String> = crate::inject::all_outputs(&plan.estimators())
            .iter()
            .map(|o| o.name.clone())
            .collect();
        let median_at = names
            .iter()
            .position(|n| n == "posterior_uniform_median")
            .unwrap();
        for record in &records {
            let estimate = match &record.outcomes[median_at] {
                Outcome::Estimate(e) => e,
                Outcome::Failed(why) => panic!("trial {}: {why}", record.trial),
                // Base trials run every estimator.
                Outcome::Skipped => panic!("trial {}: skipped", record.trial),
            };
            // extra[3] = converged (see `outputs`).
            assert_eq!(
                estimate.extra[3], 1.0,
                "trial {} not converged",
                record.trial
            );
            // The audited companion's e (injected 0.3; σ_e ≈ 0.03), not companion 1's 0.1:
            // 4 σ either side.
            assert!(
                (estimate.point - TRUE_E2).abs() < 0.15,
                "trial {}: median {}",
                record.trial,
                estimate.point
            );
        }
    }

    #[test]
    fn trial_posteriors_treat_the_jitter_as_priors_does() {
        // Under every jitter mode, the posterior settings inside the audit's trials equal those
        // `eccaudit priors` builds for the same model (jitter sampled under auto and fit even
        // when the χ² test of the real fit needed none; the same priors on P, K, jitter,
        // trend), up to the eccentricity prior, which each estimator sets.
        let text = two_companion_text();
        let table = parse_table(&text, &ReadOptions::new("two.csv")).unwrap();
        for mode in [JitterMode::Auto, JitterMode::Fit, JitterMode::Off] {
            let spec = ModelSpec {
                jitter: mode,
                ..model()
            };
            let mut settings = AuditSettings {
                model: spec.clone(),
                ..AuditSettings::default()
            };
            settings.injection.eccentricities = vec![TRUE_E2];
            settings.injection.trials_per_cell = 1;
            let plan = AuditPlan::new(&table, &settings).unwrap();
            let priors = SensitivityRequest {
                model: spec,
                ..SensitivityRequest::default()
            }
            .to_settings()
            .unwrap()
            .posterior;
            let trial = plan.design().model.clone();
            let estimators = settings
                .injection
                .posterior
                .estimators_for_mode(1, plan.design(), mode)
                .unwrap();
            for estimator in &estimators {
                let mut p = estimator.posterior;
                p.priors.eccentricity = priors.priors.eccentricity;
                assert_eq!(
                    p, priors,
                    "mode {mode:?}, refit fits jitter: {}",
                    trial.fit_jitter
                );
            }
            if mode == JitterMode::Auto {
                // The table's stated σ are right, so auto fitted no jitter to the real data,
                // yet the trial posteriors sample one, as priors does: the case this is for.
                assert!(!trial.fit_jitter);
                assert!(estimators.iter().all(|e| e.posterior.jitter));
            }
            // The plan's own estimators are built the same way.
            let names: Vec<String> = plan
                .estimators()
                .iter()
                .map(|e| e.settings_text())
                .collect();
            let expected: Vec<String> = std::iter::once(plan.estimators()[0].settings_text())
                .chain(estimators.iter().map(|e| e.settings_text()))
                .collect();
            assert_eq!(names, expected, "mode {mode:?}");
        }
    }
}
