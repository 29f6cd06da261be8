//! A prior-sensitivity set asked for in plain terms (prior specs as text, walkers, steps, seed,
//! bounds of the other priors), turned into [`SensitivitySettings`] in one place so that the
//! command line (`eccaudit priors`) and the page build identical settings from identical input.

use serde::{Deserialize, Serialize};

use crate::fit::FitOptions;
use crate::priors::ScalarPrior;
use crate::sampler::{RunLength, SamplerSettings};
use crate::spec::{JitterMode, ModelSpec};

use super::run::{default_prior_set, SensitivitySettings};
use super::spec::parse_prior_spec;
use super::target::PosteriorSettings;
use super::PosteriorError;

/// What a user asks for. Absent fields take the defaults below; an unknown field is an error.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(default, deny_unknown_fields)]
pub struct SensitivityRequest {
    /// Eccentricity priors as text specs (see [`parse_prior_spec`]); empty means
    /// [`default_prior_set`].
    pub priors: Vec<String>,
    /// Walkers per ensemble (default 64, so that each half of an ensemble fits the Gaussian of
    /// the ensemble Gaussian move well; raised to 2·dim + 2 when the model needs more).
    pub walkers: usize,
    /// Steps after burn-in before the first convergence check (default 300); with
    /// `until_converged` the run then extends itself.
    pub steps: usize,
    /// Burn-in steps (default 100; walkers stranded far below the others at its end are moved).
    pub burn: usize,
    /// Independent ensembles (default 4; the convergence rule needs at least 2).
    pub ensembles: usize,
    /// Extend each run until it has converged (default true).
    pub until_converged: bool,
    /// Most log-density evaluations per prior (default 4·10⁶).
    pub max_evaluations: u64,
    /// Seed of the sampler, the same for every prior (default 1).
    pub seed: u64,
    /// The model: companions (each optionally with a given period), the companion whose e is
    /// summarised (`audit_companion`, 1-based; default the first), trend, jitter mode
    /// (`auto` and `fit` sample one jitter per instrument, `off` samples none), period range of
    /// the least-squares start's search, false-alarm limit (marginal peaks are sampled all the
    /// same; see [`crate::spec::fit_model`]).
    pub model: ModelSpec,
    /// Period prior, log-uniform on [min, max] days (default [1, 10⁴]).
    pub period_range: [f64; 2],
    /// Largest K [m/s] of its modified Jeffreys prior with knee 1 m/s (default 2·10⁵).
    pub k_max: f64,
    /// Largest jitter [m/s] of its modified Jeffreys prior with knee 1 m/s (default 10³).
    pub jitter_max: f64,
}

impl Default for SensitivityRequest {
    fn default() -> Self {
        Self {
            priors: Vec::new(),
            walkers: 64,
            steps: 300,
            burn: 100,
            ensembles: 4,
            until_converged: true,
            max_evaluations: RunLength::default().max_evaluations,
            seed: 1,
            model: ModelSpec::DEFAULT,
            period_range: [1.0, 1.0e4],
            k_max: 2.0e5,
            jitter_max: 1.0e3,
        }
    }
}

impl SensitivityRequest {
    /// The settings of [`super::prior_sensitivity`] for this request. A bad prior spec is
    /// reported as [`PosteriorError::PriorInList`] with its 1-based position in `priors`.
    pub fn to_settings(&self) -> Result<SensitivitySettings, PosteriorError> {
        let priors = if self.priors.is_empty() {
            default_prior_set()
        } else {
            self.priors
                .iter()
                .enumerate()
                .map(|(i, spec)| {
                    parse_prior_spec(spec).map_err(|error| PosteriorError::PriorInList {
                        number: i + 1,
                        error: Box::new(error),
                    })
                })
                .collect::<Result<Vec<_>, _>>()?
        };
        let model = self.model.validate().map_err(PosteriorError::Model)?;
        let mut posterior = PosteriorSettings {
            jitter: self.model.jitter != JitterMode::Off,
            trend: self.model.trend,
            n_companions: self.model.companions,
            ..PosteriorSettings::default()
        };
        posterior.priors.period = ScalarPrior::LogUniform {
            min: self.period_range[0],
            max: self.period_range[1],
        };
        posterior.priors.semi_amplitude = ScalarPrior::ModifiedJeffreys {
            knee: 1.0,
            max: self.k_max,
        };
        posterior.priors.jitter = ScalarPrior::ModifiedJeffreys {
            knee: 1.0,
            max: self.jitter_max,
        };
        posterior.priors.validate()?;
        if self.ensembles == 0 || self.ensembles > 64 {
            return Err(PosteriorError::RequestSetting {
                setting: "ensembles",
                value: self.ensembles as f64,
                reason: "must be between 1 and 64",
            });
        }
        Ok(SensitivitySettings {
            posterior,
            priors,
            sampler: SamplerSettings {
                n_walkers: self.walkers,
                n_steps: self.steps,
                n_burn: self.burn,
                seed: self.seed,
                ..SamplerSettings::default()
            },
            length: RunLength {
                n_ensembles: self.ensembles,
                until_converged: self.until_converged,
                max_evaluations: self.max_evaluations,
                ..RunLength::default()
            },
            fit: model.fit_options(posterior.jitter, &FitOptions::default()),
            companion: self.model.audit_companion.map_or(0, |c| c - 1),
        })
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::priors::EccentricityShape;

    #[test]
    fn empty_request_gives_the_default_set_and_sampler() {
        let settings = SensitivityRequest::default().to_settings().unwrap();
        assert_eq!(settings.priors, default_prior_set());
        assert_eq!(settings.sampler.n_walkers, 64);
        assert_eq!(settings.sampler.n_steps, 300);
        assert_eq!(settings.sampler.n_burn, 100);
        assert_eq!(settings.length.n_ensembles, 4);
        assert!(settings.length.until_converged);
        assert!(settings.posterior.jitter);
        assert!(settings.fit.initial_periods.is_empty());
        assert_eq!(settings.posterior.n_companions, 1);
    }

    #[test]
    fn specs_are_read_in_order_and_a_bad_one_is_named_by_position() {
        let request = SensitivityRequest {
            priors: vec!["uniform:0..0.5".into(), "rayleigh(0.2)".into()],
            ..SensitivityRequest::default()
        };
        let settings = request.to_settings().unwrap();
        assert_eq!(settings.priors[0].e_max, 0.5);
        assert_eq!(
            settings.priors[1].shape,
            EccentricityShape::Rayleigh { sigma: 0.2 }
        );
        let bad = SensitivityRequest {
            priors: vec!["uniform".into(), "beta(2)".into()],
            ..SensitivityRequest::default()
        };
        match bad.to_settings() {
            Err(PosteriorError::PriorInList { number, error }) => {
                assert_eq!(number, 2);
                assert!(matches!(*error, PosteriorError::PriorSpec { .. }));
            }
            other => panic!("expected PriorInList, got {other:?}"),
        }
    }

    #[test]
    fn unknown_fields_and_bad_periods_are_refused() {
        assert!(serde_json::from_str::<SensitivityRequest>(r#"{"walker": 8}"#).is_err());
        let request: SensitivityRequest =
            serde_json::from_str(r#"{"walkers": 16, "model": {"periods": [-3]}}"#).unwrap();
        assert_eq!(request.walkers, 16);
        let err = request.to_settings().unwrap_err().to_string();
        assert!(err.contains("period = -3"), "{err}");
    }
}
