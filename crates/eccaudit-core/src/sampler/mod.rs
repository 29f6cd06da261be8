//! Model-independent posterior sampling: the affine-invariant ensemble sampler, its convergence rule for ensembles, and the run-until-converged driver.
//!
//! * [`ensemble`] — the stretch move of Goodman & Weare (2010, CAMCOS 5, 65) mixed with the
//!   differential-evolution move of ter Braak (2006, Stat. Comput. 16, 239), in the parallel
//!   (two-halves) form of Foreman-Mackey et al. (2013, PASP 125, 306, Algorithm 3); a resumable
//!   [`EnsembleState`] and the one-call driver [`run_ensemble`].
//! * [`autocorrelation`] — integrated autocorrelation time (Sokal windowed estimate) on pooled
//!   FFT autocovariances.
//! * [`rank`] — split rank-normalised R̂ and bulk/tail effective sample size (Vehtari et al.
//!   2021, Bayesian Analysis 16, 667), the classic split R̂, quantiles.
//! * [`verdict`] — the convergence rule for ensembles ([`CONVERGENCE_RULE`]) and a plain
//!   verdict with advice ([`diagnose_ensembles`]).
//! * [`adaptive`] — independent ensembles run until the rule holds or a budget runs out
//!   ([`run_until_converged`]).
//!
//! Every random number comes from [`crate::random::SimRng`] seeded by
//! [`crate::random::stream_rng`], and all floating-point functions from
//! `libm`, so a seed gives the same chains natively and in WebAssembly.

pub mod adaptive;
pub mod autocorrelation;
pub mod ensemble;
pub mod rank;
pub mod verdict;

pub use adaptive::{
    run_until_converged, EnsembleRun, RunLength, RunProgress, Steer, StopReason, RUN_CHUNK,
};
pub use autocorrelation::{integrated_autocorrelation_time, AutocorrelationEstimate};
pub use ensemble::{
    run_ensemble, Chains, DensityFn, EnsembleState, LogDensity, Progress, SamplerError,
    SamplerSettings, DEFAULT_DE_FRACTION,
};
pub use rank::{effective_sample_size, ess_bulk, ess_tail, rank_normalized_split_r_hat, RHat};
// Defined in `crate::stats`; re-exported here for the sampler's users.
pub use crate::stats::{quantile_sorted, quantile_type7, standard_normal_quantile};
pub use verdict::{
    diagnose, diagnose_derived, diagnose_ensembles, diagnose_ensembles_at,
    diagnose_ensembles_derived, diagnose_traces, diagnose_with, ConvergenceIssue,
    ConvergenceThresholds, DiagnosedQuantities, DiagnosisDepth, Diagnostics, IssueKind,
    ParameterDiagnostics, StrandedWalker, CONVERGENCE_RULE,
};

/// Length of the shortest trace.
pub(crate) fn common_length<R: AsRef<[f64]>>(traces: &[R]) -> usize {
    traces.iter().map(|t| t.as_ref().len()).min().unwrap_or(0)
}

/// Arithmetic mean.
pub(crate) fn mean(x: &[f64]) -> f64 {
    x.iter().sum::<f64>() / x.len() as f64
}

/// Sample variance (n − 1 in the denominator).
pub(crate) fn sample_variance(x: &[f64]) -> f64 {
    let m = mean(x);
    x.iter().map(|v| (v - m) * (v - m)).sum::<f64>() / (x.len() as f64 - 1.0)
}
