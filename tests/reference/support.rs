//! What the reference tests share: a sampler run judged by the project's own convergence rule.

use eccaudit_core::sampler::{
    diagnose_ensembles, run_until_converged, Chains, ConvergenceThresholds, EnsembleRun,
    LogDensity, RunLength, SamplerSettings, Steer,
};

/// Runs the independent ensembles started at `starts` until the default convergence rule
/// (`ConvergenceThresholds::default()`, judged by `diagnose_ensembles`) holds or `length`'s
/// budget runs out, with no observer: the run the posterior and population code make, without
/// their targets.
pub fn run_to_verdict<T: LogDensity + ?Sized>(
    target: &T,
    starts: &[Vec<f64>],
    settings: &SamplerSettings,
    length: &RunLength,
) -> EnsembleRun {
    let thresholds = ConvergenceThresholds::default();
    run_until_converged(
        target,
        starts,
        settings,
        length,
        &mut |e: &[&Chains]| diagnose_ensembles(e, &thresholds),
        &mut |_| Steer::Continue,
    )
    .expect("the sampler's settings and starts are valid")
}
