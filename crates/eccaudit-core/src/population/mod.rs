//! The eccentricity distribution of a population from each star's posterior draws (Hogg, Myers & Bovy 2010, ApJ 725, 2166): the saved-samples format, the importance-sampling likelihood, Beta and histogram populations sampled by the project's sampler, derived quantities and the naive histograms beside them. No I/O: callers pass text and get typed results.
//!
//! * [`samples`] — `eccaudit-samples` version 1 (ECSV): write, read with file:line:column
//!   errors, thin to the effective sample size, e of a companion from a run's chains.
//! * [`likelihood`] — per-star importance sums in log-sum-exp form, Kish's effective number
//!   of draws behind each.
//! * [`infer`] — [`infer_population`]: the report; [`report`] — its text form.

pub mod infer;
pub mod likelihood;
pub mod report;
pub mod samples;

use thiserror::Error;

pub use infer::{
    infer_population, kipping_2013_marks, population_methods, DensityBand, Derived, ModelResult,
    NaiveHistogram, PopulationData, PopulationReport, PopulationSettings, Quantity, StarEntry,
};
pub use likelihood::{log_sum_exp, Bins, PreparedStar, E_FLOOR};
pub use report::{error_text, population_csv};
pub use samples::{
    eccentricity_draws, parse_samples_ecsv, prior_spec_text, samples_file_name, samples_from_run,
    survey_table_samples, thin_to_ess, write_samples_ecsv, EccentricitySamples, MAX_SAVED_DRAWS,
    SAMPLES_FORMAT, SAMPLES_VERSION,
};

/// Errors of the population module.
#[derive(Debug, Clone, PartialEq, Error)]
pub enum PopulationError {
    /// A samples file is malformed.
    #[error("{source_name}:{line}:{column}: {message}")]
    Samples {
        /// File name as given.
        source_name: String,
        /// 1-based line.
        line: usize,
        /// 1-based character column.
        column: usize,
        /// What is wrong.
        message: String,
    },
    /// Too few stars to infer a population.
    #[error("{used} usable companions of {read} read: a population needs at least 2 whose runs converged")]
    TooFewStars {
        /// Companions used.
        used: usize,
        /// Companions read.
        read: usize,
    },
    /// A setting out of range.
    #[error("population setting: {0}")]
    Setting(String),
    /// The sampler refused or was cancelled.
    #[error(transparent)]
    Sampler(#[from] crate::sampler::SamplerError),
}
