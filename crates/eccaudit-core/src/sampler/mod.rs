//! Model-independent posterior sampling: the affine-invariant ensemble sampler and its convergence diagnostics.
//!
//! * [`ensemble`] — the stretch move of Goodman & Weare (2010, CAMCOS 5, 65)
//!   in the parallel (two-halves) form of Foreman-Mackey et al. (2013, PASP
//!   125, 306, Algorithm 3); a resumable [`EnsembleState`] and the one-call
//!   driver [`run_ensemble`] with a progress/cancellation observer.
//! * [`diagnostics`] — integrated autocorrelation time (Sokal windowed
//!   estimate), split rank-normalised R̂ and bulk/tail effective sample size
//!   (Vehtari et al. 2021, Bayesian Analysis 16, 667), and a plain verdict
//!   with advice ([`diagnose`]).
//!
//! Every random number comes from [`crate::random::SimRng`] seeded by
//! [`crate::random::stream_rng`], and all floating-point functions from
//! `libm`, so a seed gives the same chains natively and in WebAssembly.

pub mod diagnostics;
pub mod ensemble;

pub use diagnostics::{
    diagnose, diagnose_derived, diagnose_traces, diagnose_with, effective_sample_size, ess_bulk,
    ess_tail, integrated_autocorrelation_time, quantile_sorted, quantile_type7,
    rank_normalized_split_r_hat, standard_normal_quantile, AutocorrelationEstimate,
    ConvergenceIssue, ConvergenceThresholds, DiagnosedQuantities, DiagnosisDepth, Diagnostics,
    IssueKind, ParameterDiagnostics, RHat,
};
pub use ensemble::{
    run_ensemble, Chains, DensityFn, EnsembleState, LogDensity, Progress, SamplerError,
    SamplerSettings,
};
