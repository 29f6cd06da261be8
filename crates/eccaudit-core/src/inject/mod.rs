//! Injection–recovery: simulate the observer's own run with orbits of known eccentricity,
//! estimate e from each simulation with every estimator, and summarise bias, scatter,
//! interval coverage and false-eccentric rate per grid cell; then calibrate the real data's
//! estimates into a statement.
//!
//! [`design`] says what is simulated; [`engine`] runs any range of trial indices (no threads:
//! the command line spreads ranges over cores, the page over Web Workers); [`estimators`] holds
//! the [`Estimator`] trait and the least-squares estimator (posterior estimators plug in through
//! the same trait); [`summary`] and [`statement`] turn records into numbers and words;
//! [`trial_file`] is the text format of the trials (resumable, mergeable).

pub mod adaptive;
pub mod belt;
pub mod context;
pub mod design;
pub mod engine;
pub mod estimators;
pub mod posterior_estimator;
pub mod statement;
pub mod summary;
pub mod trial_file;
pub mod trials_ecsv;

use thiserror::Error;

pub use belt::{belt_estimate, Belt, BeltCellInput, BeltEstimate, BeltInterval};
pub use context::{AuditContext, InstrumentNoise, OtherCompanion};
pub use design::{
    default_eccentricity_grid, DesignError, GridCell, InjectionDesign, Sampling, Schedule, Spacing,
    TrialModel, EXTRA_BLOCK,
};
pub use engine::{
    run_trial, run_trials, settings_fingerprint, simulate_trial, Outcome, SimulatedTrial,
    TrialRecord,
};
pub use estimators::{
    all_outputs, nearest_companion, EccentricityEstimate, Estimator, EstimatorError,
    LeastSquaresEstimator, LeastSquaresSettings, OutputInfo, TrialPeriod,
};
pub use posterior_estimator::PosteriorEstimator;
pub use statement::{
    eccentricity_statement, BayesNote, CircularDecision, EccentricityStatement, EstimatorRow,
    FittedOrbit, LucySweeneyCheck, MonteCarloP,
};
pub use summary::{summarise, CellSummary, InjectionSummary, OutputCellSummary, Quantiles, Rate};
pub use trial_file::{
    csv_header, read_trial_file, record_from_csv_row, record_to_csv_row, write_trial_file,
    TrialFile, TrialFileError, TrialFileHead,
};
pub use trials_ecsv::trials_ecsv;

// The Design message already prints the inner error, so it is not also reported as `source()`
// (which would make a printed chain say it twice).
impl From<DesignError> for InjectError {
    fn from(error: DesignError) -> Self {
        InjectError::Design(error)
    }
}

/// What can go wrong in an injection–recovery run.
#[derive(Debug, Clone, PartialEq, Error)]
pub enum InjectError {
    /// The design is unusable.
    #[error("injection design: {0}")]
    Design(DesignError),
    /// A trial index beyond the design.
    #[error("trial {trial} is beyond the design's {n_trials} trials")]
    TrialOutOfRange {
        /// The index asked for.
        trial: u64,
        /// Trials in the design.
        n_trials: u64,
    },
    /// The model cannot be evaluated for an injected orbit.
    #[error("cannot evaluate the orbit P = {period} d, e = {eccentricity}")]
    Model {
        /// Period [d].
        period: f64,
        /// Eccentricity.
        eccentricity: f64,
    },
    /// A row of a trial CSV cannot be read.
    #[error("trial CSV line {line}, column `{column}`: `{value}`: {reason}")]
    CsvRow {
        /// 1-based line.
        line: u64,
        /// Column name (empty when the whole row is wrong).
        column: String,
        /// The offending text.
        value: String,
        /// What was expected.
        reason: String,
    },
    /// The statement cannot be made.
    #[error("eccentricity statement: {0}")]
    Statement(String),
}
