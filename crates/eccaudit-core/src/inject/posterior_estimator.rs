//! Posterior estimators of e for injection–recovery: median, mean and mode of e under one
//! eccentricity prior, from a short ensemble-sampler run on each simulated data set.

use rand::RngExt;

use super::design::InjectionDesign;
use super::estimators::{
    EccentricityEstimate, Estimator, EstimatorError, LeastSquaresEstimator, OutputInfo,
};
use crate::fit::{fit_orbit, FitData};
use crate::posterior::{
    posterior_eccentricity, start_from_fit, BayesFactorStatus, PosteriorSettings,
};
use crate::priors::EccentricityPriorSettings;
use crate::random::SimRng;
use crate::sampler::SamplerSettings;

/// The posterior of e under one prior, summarised three ways.
///
/// Each data set is first fitted by least squares at the known period (the same eight starts
/// as [`LeastSquaresEstimator`]); the walkers start around that optimum and run with
/// `sampler` (its seed is replaced by one drawn from the trial's own stream). The jitter is
/// not sampled: the simulated uncertainties already include any injected jitter, exactly as
/// the least-squares estimator treats them.
#[derive(Debug, Clone)]
pub struct PosteriorEstimator {
    /// The eccentricity prior.
    pub prior: EccentricityPriorSettings,
    /// Sampler settings (walkers, steps, burn-in); the seed is per trial.
    pub sampler: SamplerSettings,
    /// Priors on the other parameters.
    pub posterior: PosteriorSettings,
    /// Short name used as the prefix of the output names, e.g. `uniform`.
    pub tag: String,
}

impl PosteriorEstimator {
    /// An estimator under `prior` with the sampler settings given and the default priors on the
    /// other parameters (jitter not sampled).
    pub fn new(
        prior: EccentricityPriorSettings,
        sampler: SamplerSettings,
        tag: impl Into<String>,
    ) -> Self {
        let posterior = PosteriorSettings {
            jitter: false,
            ..PosteriorSettings::default()
        }
        .with_eccentricity(prior);
        PosteriorEstimator {
            prior,
            sampler,
            posterior,
            tag: tag.into(),
        }
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
        let intervals = "equal-tailed posterior intervals (16–84% and 2.5–97.5% quantiles)";
        let call = "posterior probability of e < 0.05 is below 5%";
        let extra_names = vec![
            "p_e_below_0.05".to_string(),
            "bf01".to_string(),
            "bf01_is_upper_limit".to_string(),
            "converged".to_string(),
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
        format!("{:?} {:?} {:?}", self.prior, self.sampler, self.posterior)
    }

    fn cost(&self) -> String {
        let s = &self.sampler;
        format!(
            "a least-squares fit (8 starts), then {} walkers x ({} burn-in + {} steps) = {} posterior evaluations",
            s.n_walkers,
            s.n_burn,
            s.n_steps,
            s.n_walkers * (s.n_burn + s.n_steps)
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
        let prior = self.prior.validate().map_err(|e| other(&e))?;
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
            &self.posterior,
            &prior,
            data.uncertainties(),
            data.n_instruments(),
        )
        .map_err(|e| other(&e))?;
        let sampler = SamplerSettings {
            seed: rng.random::<u64>(),
            ..self.sampler
        };
        let summary = posterior_eccentricity(data, &self.posterior, &sampler, &start)
            .map_err(|e| other(&e))?;
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
            if summary.converged { 1.0 } else { 0.0 },
        ];
        let estimate = |point: f64| EccentricityEstimate {
            point,
            lower68: summary.interval_68[0],
            upper68: summary.interval_68[1],
            lower95: summary.interval_95[0],
            upper95: summary.interval_95[1],
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
