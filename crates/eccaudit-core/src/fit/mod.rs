//! Global least-squares Keplerian orbit fit: period search, multi-start Levenberg–Marquardt,
//! optional jitter (Baluev 2009 modified likelihood), χ² goodness of fit, covariance, and the Lucy & Sweeney eccentricity test.
//!
//! Split, as in [`crate::lsq`]: [`problem`] is the RV residual problem with its analytic
//! Jacobian (the model velocities and the parameter layout are [`crate::model`]'s); `data.rs`
//! holds [`FitData`]; [`multistart`] is the driver (period search → starts → LM → best → polish →
//! jitter → covariance → Lucy–Sweeney → circular refit); [`report`] holds what is returned;
//! [`lucy_sweeney`] and [`jitter`] are the two statistical pieces.

mod data;
pub mod figures;
pub mod goodness;
pub mod jitter;
pub mod lucy_sweeney;
pub mod multistart;
pub mod problem;
pub mod report;

use serde::Serialize;
use thiserror::Error;

use crate::lsq::{LsqError, LsqOptions};
use crate::periodogram::{FrequencyLimits, PeriodogramError};

pub use crate::model::{EccentricityCoordinates, ParameterLayout, MAX_ECCENTRICITY};
pub use data::FitData;
pub use goodness::{chi_squared_p_value, Goodness, EXCESS_SCATTER_P};
pub use jitter::JitterMethod;
pub use lucy_sweeney::{
    eccentricity_error, lucy_sweeney, lucy_sweeney_wald, LucySweeney, LUCY_SWEENEY_THRESHOLD,
};
pub use multistart::{fit_from_start, fit_orbit, StartPoint};
pub use problem::RvProblem;
pub use report::{
    CompanionFit, Estimate, FitReport, InstrumentFit, PeriodSearchSummary, Solution, StartOutcome,
};

/// Fewest distinct orbital phases (bins of [`PHASE_BIN_CYCLES`]) a candidate period must show
/// before an eccentric Keplerian (K, two eccentricity coordinates, phase, offset) is fitted at it.
pub const MIN_DISTINCT_PHASES: usize = 5;

/// Width of the phase bins, in cycles, used to count distinct phases.
pub const PHASE_BIN_CYCLES: f64 = 1e-3;

/// Highest frequency searched by default [1/d]: periods down to 1 d. The periodogram's own
/// automatic limit (half the median sampling rate) would miss the short periods typical of
/// irregular radial-velocity sampling (common practice).
pub const DEFAULT_MAX_FREQUENCY: f64 = 1.0;

/// Settings of [`fit_orbit`].
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct FitOptions {
    /// Number of Keplerian companions (≥ 1), found one after another from the periodogram of the
    /// residuals and then fitted jointly.
    pub n_companions: usize,
    /// Fit a linear trend [m/s/d] about the reference epoch.
    pub trend: bool,
    /// Frequency range of the period search; by default periods from 1 d
    /// ([`DEFAULT_MAX_FREQUENCY`]) up to the baseline.
    pub limits: FrequencyLimits,
    /// Periodogram oversampling (samples per 1/T).
    pub oversampling: f64,
    /// Starting periods [d] given by the user, one per companion in order; companions without one
    /// are found by the period search.
    pub initial_periods: Vec<f64>,
    /// Number of periodogram peaks used as starting periods.
    pub n_peaks: usize,
    /// Starting eccentricities of the (e, ω) grid at each candidate period.
    pub start_eccentricities: Vec<f64>,
    /// Number of starting ω values (evenly spaced from 0) for each starting e ≥ 0.1; a single
    /// ω = 0 is used below 0.1, where ω hardly matters.
    pub n_omega_starts: usize,
    /// Extra random starts (e uniform in [0, 0.9), ω uniform) per candidate period, drawn from
    /// [`crate::random::stream_rng`]`(seed, …)`.
    pub n_random_starts: usize,
    /// Seed of the random starts.
    pub seed: u64,
    /// Starting phases tried (each with K, γ and trend solved linearly) before each LM start.
    pub n_phase_scan: usize,
    /// The period search must find a peak with false-alarm probability at most this, else
    /// [`FitError::NoSignificantPeriod`]. Ignored for periods given in `initial_periods`.
    pub max_false_alarm_probability: f64,
    /// Fit one jitter per instrument.
    pub jitter: bool,
    /// How the jitters are estimated (when `jitter`).
    pub jitter_method: JitterMethod,
    /// Lucy–Sweeney threshold; eccentricities with p above it are refitted circular.
    pub lucy_sweeney_threshold: f64,
    /// Stellar mass [M_sun]; when given, m sin i and the relative semi-major axis are reported.
    pub stellar_mass: Option<f64>,
    /// Levenberg–Marquardt settings of the runs from each start: looser tolerances, since only
    /// the best start is refined further.
    pub start_lsq: LsqOptions,
    /// Levenberg–Marquardt settings of the final (polish, jitter, circular) runs. The covariance
    /// is computed by the driver itself.
    pub lsq: LsqOptions,
}

impl Default for FitOptions {
    fn default() -> Self {
        Self {
            n_companions: 1,
            trend: false,
            limits: FrequencyLimits::MaxFrequency(DEFAULT_MAX_FREQUENCY),
            oversampling: crate::periodogram::DEFAULT_OVERSAMPLING,
            initial_periods: Vec::new(),
            n_peaks: 3,
            start_eccentricities: vec![0.05, 0.4, 0.75],
            n_omega_starts: 4,
            n_random_starts: 0,
            seed: 1,
            n_phase_scan: 12,
            max_false_alarm_probability: 0.01,
            jitter: false,
            jitter_method: JitterMethod::ModifiedLikelihood,
            lucy_sweeney_threshold: LUCY_SWEENEY_THRESHOLD,
            stellar_mass: None,
            start_lsq: LsqOptions {
                ftol: 1e-6,
                xtol: 1e-6,
                compute_covariance: false,
                ..LsqOptions::default()
            },
            lsq: LsqOptions {
                ftol: 1e-10,
                xtol: 1e-10,
                compute_covariance: false,
                ..LsqOptions::default()
            },
        }
    }
}

/// What can go wrong in a fit; each variant carries what the user needs to act.
#[derive(Debug, Clone, PartialEq, Error)]
pub enum FitError {
    /// Fewer epochs than parameters plus one.
    #[error(
        "too few points: {n_points} epochs for {n_params} parameters ({n_companions} companion(s), \
         {n_instruments} instrument offset(s){extra}); at least {needed} epochs are needed"
    )]
    TooFewPoints {
        /// Epochs given.
        n_points: usize,
        /// Parameters of the model (including jitters).
        n_params: usize,
        /// Companions asked for.
        n_companions: usize,
        /// Instruments.
        n_instruments: usize,
        /// Description of trend/jitter parameters.
        extra: String,
        /// Epochs needed.
        needed: usize,
    },
    /// An input value is unusable.
    #[error("epoch {index} (0-based): {what} is {value}; it must be finite{constraint}")]
    InvalidData {
        /// 0-based epoch.
        index: usize,
        /// Which column.
        what: &'static str,
        /// The value.
        value: f64,
        /// Extra constraint.
        constraint: &'static str,
    },
    /// Column lengths differ.
    #[error("column lengths differ: {0}")]
    LengthMismatch(String),
    /// A count is above its bound in [`crate::limits`].
    #[error(transparent)]
    TooLarge(#[from] crate::limits::LimitError),
    /// An option is out of range.
    #[error("option {name} = {value}: {reason}")]
    InvalidOption {
        /// Option name.
        name: &'static str,
        /// Value given.
        value: String,
        /// What is required.
        reason: &'static str,
    },
    /// The period search found nothing significant.
    #[error(
        "no significant period for companion {companion}: the highest periodogram peak \
         (P = {period:.6} d, power {power:.3}) has false-alarm probability {false_alarm_probability:.3}, \
         above the limit {threshold}; give a starting period (--period) or raise the limit \
         (--max-fap)"
    )]
    NoSignificantPeriod {
        /// 1-based companion number.
        companion: usize,
        /// Period of the highest peak [d].
        period: f64,
        /// Its power.
        power: f64,
        /// Its false-alarm probability.
        false_alarm_probability: f64,
        /// The limit in force.
        threshold: f64,
    },
    /// The epochs fall at too few phases of every candidate period.
    #[error(
        "degenerate sampling for companion {companion}: at P = {period:.6} d the {n_points} epochs \
         fall at only {n_distinct_phases} distinct phase(s) (bins of {bin} cycle); at least \
         {needed} are needed to fit a Keplerian orbit"
    )]
    DegenerateSampling {
        /// 1-based companion number.
        companion: usize,
        /// The period examined [d].
        period: f64,
        /// Epochs.
        n_points: usize,
        /// Distinct phases found.
        n_distinct_phases: usize,
        /// Phases needed.
        needed: usize,
        /// Bin width [cycles].
        bin: f64,
    },
    /// The period search failed. The message carries the periodogram's error, so it is not
    /// also returned as `source()` (an error chain printed in full says it once).
    #[error("period search for companion {companion}: {error}")]
    PeriodSearch {
        /// 1-based companion number.
        companion: usize,
        /// The periodogram's error.
        error: PeriodogramError,
    },
    /// Every start failed before the search began (e.g. non-finite model at all starts).
    #[error("no start could be fitted: {0}")]
    NoStart(LsqError),
}

/// Number of distinct phases of `times` at `period`, counting phases within
/// [`PHASE_BIN_CYCLES`] of their neighbour (circularly) as one (common practice).
pub fn count_distinct_phases(times: &[f64], period: f64) -> usize {
    if times.is_empty() || period.is_nan() || period <= 0.0 {
        return 0;
    }
    let t0 = times[0];
    let mut phases: Vec<f64> = times
        .iter()
        .map(|t| {
            let x = (t - t0) / period;
            x - libm::floor(x)
        })
        .collect();
    phases.sort_by(f64::total_cmp);
    let gaps = phases
        .windows(2)
        .filter(|w| w[1] - w[0] > PHASE_BIN_CYCLES)
        .count();
    let wrap = phases[0] + 1.0 - phases[phases.len() - 1] > PHASE_BIN_CYCLES;
    // n clusters on a circle = number of gaps (when at least one gap), else 1.
    let n_gaps = gaps + usize::from(wrap);
    n_gaps.max(1)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn a_period_search_error_says_its_cause_once() {
        let error = FitError::PeriodSearch {
            companion: 2,
            error: PeriodogramError::TooFewEpochs {
                n_epochs: 3,
                minimum: 4,
            },
        };
        assert_eq!(
            error.to_string(),
            "period search for companion 2: too few epochs for a periodogram: 3 given, at least 4 needed"
        );
        assert!(std::error::Error::source(&error).is_none());
    }

    #[test]
    fn distinct_phases() {
        // Integer days at P = 1 d: one phase; at P = 1.5 d: three (0, 1/3, 2/3).
        let t: Vec<f64> = (0..20).map(|i| i as f64).collect();
        assert_eq!(count_distinct_phases(&t, 1.0), 1);
        assert_eq!(count_distinct_phases(&t, 1.5), 3);
        assert_eq!(count_distinct_phases(&t, 7.3), 20);
    }
}
