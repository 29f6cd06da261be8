//! Posterior sampling of Keplerian orbits under selectable eccentricity priors, the
//! prior-sensitivity set, and the circular-versus-eccentric Bayes factor.
//!
//! * [`target`] — [`RvPosterior`], the log-posterior as a [`crate::sampler::LogDensity`]
//!   (Gaussian likelihood with jitter, priors with their Jacobian in the (√e cos ω, √e sin ω) plane).
//! * [`start`] — walkers around the least-squares optimum ([`start_from_fit`]).
//! * [`summary`] — [`EccentricitySummary`]: median, mean, mode, intervals, P(e < 0.05),
//!   KL(posterior ‖ prior), density curves.
//! * [`bayes`] — BF₀₁ by the Savage–Dickey small-ball ratio ([`savage_dickey`]).
//! * [`run`] — one run ([`posterior_eccentricity`], [`run_posterior`]) and the set
//!   ([`prior_sensitivity`], [`default_prior_set`]).
//! * [`spec`] — priors written as text ([`parse_prior_spec`]).
//! * [`request`] — a set asked for in plain terms ([`SensitivityRequest`]), shared by the command
//!   line and the page.
//!
//! The point, as the project puts it: an eccentricity must not be quoted from one estimator
//! under one prior.

pub mod bayes;
pub mod request;
pub mod run;
pub mod spec;
pub mod start;
pub mod summary;
pub mod target;

use thiserror::Error;

use crate::fit::FitError;
use crate::priors::PriorError;
use crate::sampler::SamplerError;

pub use bayes::{
    savage_dickey, savage_dickey_ball_ratio, BallRatio, BayesFactorStatus, SavageDickey,
};
pub use request::SensitivityRequest;
pub use run::{
    assemble_sensitivity_report, default_prior_set, fast_run_length, fast_sampler_settings,
    method_notes, posterior_eccentricity, prior_sensitivity, run_posterior, sensitivity_run,
    sensitivity_start, LeastSquaresEccentricity, PosteriorProgress, PosteriorRun,
    SensitivityReport, SensitivitySettings, SensitivityStart, FAST_MAX_EVALUATIONS,
};
pub use spec::{parse_prior_spec, DEFAULT_PRIOR_SPECS, SPEC_SHAPES};
pub use start::{
    add_other_optima, ensemble_starts, start_centres, start_from_fit, OptimumNote, PosteriorStart,
    StartOptimum, KEEP_GAP, MAX_OTHER_OPTIMA,
};
pub use summary::{
    kl_divergence_binned, kl_divergence_histogram, prior_label, summarise_eccentricity,
    DensityCurves, EccentricitySummary, KlEstimate, SamplerCost,
};
pub use target::{LinearParameters, PosteriorSettings, RvPosterior};

/// What can go wrong in posterior sampling.
#[derive(Debug, Clone, PartialEq, Error)]
pub enum PosteriorError {
    /// A prior setting is impossible.
    #[error("prior: {0}")]
    Prior(PriorError),
    /// The least-squares fit that gives the start failed.
    #[error("least-squares start: {0}")]
    Fit(FitError),
    /// The sampler refused its settings or found no valid start.
    #[error("sampler: {0}")]
    Sampler(SamplerError),
    /// A prior written as text could not be read.
    #[error("prior spec `{spec}`: {reason}")]
    PriorSpec {
        /// The text given.
        spec: String,
        /// What is wrong.
        reason: String,
    },
    /// The least-squares value lies outside a prior's bounds.
    #[error(
        "the least-squares {parameter} = {value} lies outside its prior [{min}, {max}]; widen \
         the prior"
    )]
    StartOutsidePrior {
        /// Which parameter.
        parameter: &'static str,
        /// The least-squares value.
        value: f64,
        /// Lower bound of the prior.
        min: f64,
        /// Upper bound of the prior.
        max: f64,
    },
    /// The fitted and sampled models have different numbers of companions.
    #[error("the fit has {fitted} companion(s) but {sampled} are to be sampled")]
    CompanionCount {
        /// Companions fitted.
        fitted: usize,
        /// Companions sampled.
        sampled: usize,
    },
    /// The companion to summarise is not in the model.
    #[error("companion {companion} asked for, but the model has {n_companions} companion(s)")]
    CompanionIndex {
        /// The companion asked for (1-based).
        companion: usize,
        /// Companions in the model.
        n_companions: usize,
    },
    /// No companion to sample.
    #[error("at least one companion is needed")]
    NoCompanion,
    /// Mean-longitude centres of the wrong length or not finite.
    #[error(
        "{got} mean-longitude centres given for {expected} companion(s), or one is not finite"
    )]
    StartLength {
        /// Companions.
        expected: usize,
        /// Centres given.
        got: usize,
    },
    /// The set is empty.
    #[error("the prior set is empty; give at least one prior")]
    EmptyPriorSet,
    /// The circular prior has no eccentricity posterior; it enters through the Bayes factor.
    #[error(
        "the circular prior has no eccentricity posterior to summarise; the circular model is \
         compared through the Bayes factor BF01 reported for each prior with e_min = 0"
    )]
    CircularInSet,
    /// A prior index beyond the set.
    #[error("prior {index} asked for, but the set has {n_priors} prior(s) (0-based index)")]
    PriorIndex {
        /// The index asked for (0-based).
        index: usize,
        /// Priors in the set.
        n_priors: usize,
    },
    /// A report was to be assembled from the wrong number of runs.
    #[error("{runs} run(s) given for a set of {n_priors} prior(s)")]
    RunCount {
        /// Runs given.
        runs: usize,
        /// Priors in the set.
        n_priors: usize,
    },
    /// An entry of a list of priors is wrong.
    #[error("prior {number} of the list: {error}")]
    PriorInList {
        /// 1-based position in the list as given.
        number: usize,
        /// What is wrong with it.
        error: Box<PosteriorError>,
    },
    /// A sampler or start setting of a request is impossible.
    #[error("{setting} = {value}: {reason}")]
    RequestSetting {
        /// The setting, as named in the request.
        setting: &'static str,
        /// The value given.
        value: f64,
        /// What it must be.
        reason: &'static str,
    },
    /// The model of a request is impossible (companions, periods, range, limit).
    #[error("model: {0}")]
    Model(crate::spec::ModelSpecError),
    /// The observer cancelled.
    #[error("cancelled while sampling prior {prior_index} after {steps_done} steps")]
    Cancelled {
        /// 0-based prior index.
        prior_index: usize,
        /// Steps done in that run.
        steps_done: usize,
    },
}

// The message above already prints the inner error, so it is not also reported as `source()`
// (which would make a printed chain say it twice).
impl From<PriorError> for PosteriorError {
    fn from(err: PriorError) -> Self {
        Self::Prior(err)
    }
}

// The message above already prints the inner error, so it is not also reported as `source()`
// (which would make a printed chain say it twice).
impl From<FitError> for PosteriorError {
    fn from(err: FitError) -> Self {
        Self::Fit(err)
    }
}

// The message above already prints the inner error, so it is not also reported as `source()`
// (which would make a printed chain say it twice).
impl From<SamplerError> for PosteriorError {
    fn from(err: SamplerError) -> Self {
        Self::Sampler(err)
    }
}
