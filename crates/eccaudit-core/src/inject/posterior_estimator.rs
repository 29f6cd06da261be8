//! Posterior estimators of e for injection–recovery: median, mean and mode of e under one
//! eccentricity prior, from a short ensemble-sampler run on each simulated data set.

use rand::RngExt;

use super::design::InjectionDesign;
use super::estimators::{
    EccentricityEstimate, Estimator, EstimatorError, LeastSquaresEstimator, OutputInfo,
};
use crate::fit::{fit_orbit, FitData};
use crate::posterior::{
    fast_run_length, posterior_eccentricity, start_from_fit, BayesFactorStatus, PosteriorSettings,
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
        if design.model.audited != 0 {
            // The posterior summary describes companion 1 of the model; another companion's
            // e is not summarised yet, so no number is given rather than a wrong one.
            return Err(other(&format!(
                "only companion 1's eccentricity is summarised; companion {} is audited",
                design.model.audited + 1
            )));
        }
        let report = fit_orbit(
            data,
            &LeastSquaresEstimator::default().fit_options_for(design),
        )?;
        let start = start_from_fit(
            &report,
            &posterior_settings,
            &prior,
            data.uncertainties(),
            data.n_instruments(),
        )
        .map_err(|e| other(&e))?;
        let sampler = SamplerSettings {
            seed: rng.random::<u64>(),
            ..self.sampler
        };
        let summary = posterior_eccentricity(data, &self.posterior, &sampler, &self.length, &start)
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
