//! Run until converged: several independent ensembles advanced together, judged by the ensemble rule at growing lengths, and extended until it holds or an evaluation budget runs out.

use serde::{Deserialize, Serialize};

use super::ensemble::{Chains, EnsembleState, LogDensity, SamplerError, SamplerSettings};
use super::verdict::{ConvergenceIssue, Diagnostics, IssueKind};

/// How long a run lasts.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
#[serde(default)]
pub struct RunLength {
    /// Independent ensembles, each of `SamplerSettings::n_walkers` walkers on its own random
    /// stream and its own start (default 4; the between-chain check needs at least 2).
    pub n_ensembles: usize,
    /// Extend the run until the convergence rule holds (default true); false runs exactly
    /// `n_burn + n_steps` steps and judges once.
    pub until_converged: bool,
    /// Most log-density evaluations of the whole run, all ensembles and the start included
    /// (default 4·10⁶, about 2–4 s for one Keplerian at 30–100 epochs).
    pub max_evaluations: u64,
    /// Most stored steps per walker: beyond it every second stored step is dropped and the
    /// thinning doubled, which bounds memory and the cost of each check (default 4096).
    pub max_stored_steps: usize,
}

impl Default for RunLength {
    fn default() -> Self {
        RunLength {
            n_ensembles: 4,
            until_converged: true,
            max_evaluations: 4_000_000,
            max_stored_steps: 4096,
        }
    }
}

/// Why a run stopped.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum StopReason {
    /// The rule held.
    Converged,
    /// The evaluation budget ran out first.
    Budget,
    /// A fixed-length run reached its end.
    FixedLength,
    /// The observer asked to finish early.
    Finished,
}

/// Progress of a run, reported after every chunk of steps.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct RunProgress {
    /// Steps done per walker, burn-in included.
    pub steps_done: usize,
    /// Burn-in steps.
    pub n_burn: usize,
    /// Steps planned so far (grows as the run extends itself).
    pub steps_planned: usize,
    /// Log-density evaluations so far.
    pub evaluations: u64,
    /// The budget.
    pub max_evaluations: u64,
    /// Convergence checks made so far.
    pub checks: usize,
    /// Run length in units of the largest τ at the last check (NaN before the first).
    pub autocorrelation_times: f64,
}

/// What the observer wants.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Steer {
    /// Go on.
    Continue,
    /// Stop sampling now and judge what there is (the verdict says so).
    Finish,
    /// Abandon the run ([`SamplerError::Cancelled`]).
    Cancel,
}

/// A finished run of independent ensembles.
#[derive(Debug, Clone)]
pub struct EnsembleRun {
    /// One set of chains per ensemble (equal walkers, stored steps and thinning).
    pub ensembles: Vec<Chains>,
    /// The verdict of the last check.
    pub diagnostics: Diagnostics,
    /// Why the run stopped.
    pub stop: StopReason,
    /// Log-density evaluations, starts included.
    pub evaluations: u64,
    /// Steps per walker, burn-in included.
    pub steps: usize,
    /// Walkers moved at the end of burn-in because they were stranded far below the others.
    pub relocated: usize,
    /// Convergence checks made.
    pub checks: usize,
}

impl EnsembleRun {
    /// All walkers of all ensembles as one set of chains ([`Chains::concat_walkers`]).
    pub fn merged(&self) -> Chains {
        let refs: Vec<&Chains> = self.ensembles.iter().collect();
        Chains::concat_walkers(&refs)
    }
}

/// Steps advanced between observer calls.
pub const RUN_CHUNK: usize = 50;

/// Nats below the median below which a walker is moved at the end of burn-in
/// ([`EnsembleState::relocate_stranded_walkers`]): 20 + 3√(d/2) — a current log-density that low
/// has probability below 10⁻⁷ for a d ≤ 20-dimensional Gaussian posterior (χ²_d tail; common
/// practice), so only walkers in a far lower mode are moved.
fn relocation_gap(dim: usize) -> f64 {
    20.0 + 3.0 * libm::sqrt(dim as f64 / 2.0)
}

/// Stored steps per autocorrelation time below which a run is not thinned further
/// ([`thinning_halvings`]).
pub const MIN_STORED_PER_TAU: f64 = 8.0;

/// Fewest stored steps a run keeps after thinning.
const MIN_STORED_AFTER_THINNING: usize = 64;

/// How many times to halve the stored steps (doubling the thinning) after a check that asks
/// for more steps, so that the fastest-mixing quantity judged keeps at least
/// [`MIN_STORED_PER_TAU`] stored steps per autocorrelation time τ (and at least 64 stored
/// steps remain). Every later check, the summary and the storage then cost a bounded number of
/// stored steps per τ instead of growing with τ. Thinning a chain whose τ is ≥ 16 stored steps
/// by 2 costs little: for an AR(1) series (ρ = (τ − 1)/(τ + 1)) the effective sample size falls
/// by τ / (2 τ₂) with τ₂ = (1 + ρ²)/(1 − ρ²), i.e. by 0.4 % at τ = 16 (computed; Geyer 1992,
/// Stat. Sci. 7, 473, §3.6 on thinning). Only estimates whose Sokal window was found count.
pub fn thinning_halvings(diagnostics: &Diagnostics, n_stored_steps: usize) -> usize {
    let tau_min = diagnostics
        .parameters
        .iter()
        .filter(|p| p.autocorrelation.window_found && p.autocorrelation.tau.is_finite())
        .map(|p| p.autocorrelation.tau)
        .fold(f64::INFINITY, f64::min);
    if !tau_min.is_finite() {
        return 0;
    }
    let mut halvings = 0;
    let mut tau = tau_min;
    let mut stored = n_stored_steps;
    while tau / 2.0 >= MIN_STORED_PER_TAU && stored / 2 >= MIN_STORED_AFTER_THINNING {
        tau /= 2.0;
        stored /= 2;
        halvings += 1;
    }
    halvings
}

/// Runs `starts.len()` independent ensembles (walker positions of ensemble m in `starts[m]`,
/// random stream m of `sampler.seed`) through `sampler.n_burn` burn-in steps, moves walkers
/// stranded far below the others at the end of burn-in, then samples `sampler.n_steps` steps
/// and judges the run with `judge`. With `length.until_converged`, the run then extends itself
/// until `judge` says converged or the budget `length.max_evaluations` runs out: each
/// extension aims at 10 % beyond the length the rule asks for (50 τ_max of the last check) and
/// is at least half the current length, so the checks cost a bounded share of the run.
///
/// `observer` sees progress every [`RUN_CHUNK`] steps and at each check, and may finish early
/// or cancel. The same seed gives the same chains whatever the chunking, natively and in
/// WebAssembly.
pub fn run_until_converged<T: LogDensity + ?Sized>(
    target: &T,
    starts: &[Vec<f64>],
    sampler: &SamplerSettings,
    length: &RunLength,
    judge: &mut impl FnMut(&[&Chains]) -> Diagnostics,
    observer: &mut impl FnMut(&RunProgress) -> Steer,
) -> Result<EnsembleRun, SamplerError> {
    let mut states = starts
        .iter()
        .enumerate()
        .map(|(m, positions)| {
            EnsembleState::from_positions(&target, positions.clone(), sampler, m as u64)
        })
        .collect::<Result<Vec<_>, _>>()?;
    let per_step = (sampler.n_walkers * states.len()) as u64;
    // Storage for every step the run may store, reserved once: at most the steps the budget
    // affords after burn-in, and never more than `max_stored_steps` plus one chunk (storage is
    // halved beyond it), so no reallocation and copy happens while the run grows.
    let stored_bound = if length.until_converged {
        let affordable = (length.max_evaluations / per_step.max(1)) as usize;
        (affordable.saturating_sub(sampler.n_burn) / sampler.thin.max(1))
            .min(length.max_stored_steps.max(2) + RUN_CHUNK)
    } else {
        sampler.n_steps / sampler.thin.max(1)
    };
    for state in &mut states {
        state.reserve_stored_steps(stored_bound);
    }
    let mut evaluations = per_step;
    let mut checks = 0usize;
    let mut last_times = f64::NAN;
    let mut relocated = 0usize;
    let budget = length.max_evaluations;
    let progress = |states: &[EnsembleState], evaluations: u64, checks: usize, times: f64| {
        let s = &states[0];
        RunProgress {
            steps_done: s.steps_done(),
            n_burn: s.settings().n_burn,
            steps_planned: s.total_steps(),
            evaluations,
            max_evaluations: budget,
            checks,
            autocorrelation_times: times,
        }
    };
    let cancelled = |states: &[EnsembleState]| SamplerError::Cancelled {
        steps_done: states[0].steps_done(),
        total_steps: states[0].total_steps(),
    };
    let mut finished_early = false;
    loop {
        // Advance every ensemble to the planned end, chunk by chunk.
        while !states[0].is_finished() {
            let before_burn_end = states[0].steps_done() < sampler.n_burn;
            let chunk = if before_burn_end {
                RUN_CHUNK.min(sampler.n_burn - states[0].steps_done())
            } else {
                RUN_CHUNK
            };
            let mut taken = 0;
            for state in &mut states {
                taken = state.advance(&target, chunk)?;
            }
            evaluations += taken as u64 * per_step;
            if before_burn_end && states[0].steps_done() == sampler.n_burn {
                let gap = relocation_gap(target.dim());
                for state in &mut states {
                    relocated += state.relocate_stranded_walkers(gap).len();
                }
            }
            for state in &mut states {
                if state.chains().n_stored_steps > length.max_stored_steps.max(2) {
                    state.halve_storage();
                }
            }
            match observer(&progress(&states, evaluations, checks, last_times)) {
                Steer::Continue => {}
                Steer::Finish => {
                    finished_early = true;
                    break;
                }
                Steer::Cancel => return Err(cancelled(&states)),
            }
        }
        // Nothing stored yet (finished during burn-in): take one more chunk of the run proper.
        if states[0].chains().n_stored_steps < 4 {
            if finished_early {
                return Err(cancelled(&states));
            }
            continue;
        }
        let refs: Vec<&Chains> = states.iter().map(EnsembleState::chains).collect();
        let mut diagnostics = judge(&refs);
        checks += 1;
        let tau_steps = diagnostics.tau_max_steps();
        let stored_span = (states[0].steps_done() - sampler.n_burn) as f64;
        last_times = stored_span / tau_steps;
        let stop = if diagnostics.converged {
            StopReason::Converged
        } else if finished_early {
            StopReason::Finished
        } else if !length.until_converged {
            StopReason::FixedLength
        } else {
            // Aim 10 % beyond what the rule asks for, at least half the current length.
            let wanted = if tau_steps.is_finite() {
                1.1 * diagnostics.thresholds.min_autocorrelation_times * tau_steps - stored_span
            } else {
                0.0
            };
            let extra = (wanted.max(0.5 * stored_span).ceil() as usize).max(RUN_CHUNK);
            let affordable = (budget.saturating_sub(evaluations) / per_step.max(1)) as usize;
            let extra = extra.min(affordable);
            if extra >= RUN_CHUNK {
                for _ in 0..thinning_halvings(&diagnostics, states[0].chains().n_stored_steps) {
                    for state in &mut states {
                        state.halve_storage();
                    }
                }
                for state in &mut states {
                    state.extend(extra);
                }
                if observer(&progress(&states, evaluations, checks, last_times)) == Steer::Cancel {
                    return Err(cancelled(&states));
                }
                continue;
            }
            StopReason::Budget
        };
        match stop {
            StopReason::Budget => diagnostics.push_issue(ConvergenceIssue {
                kind: IssueKind::Budget,
                parameter: None,
                value: evaluations as f64,
                threshold: budget as f64,
                advice: format!(
                    "the budget of {budget} log-density evaluations ran out at {last_times:.0} \
                     autocorrelation times; raise the budget"
                ),
            }),
            StopReason::Finished if !diagnostics.converged => {
                diagnostics.push_issue(ConvergenceIssue {
                    kind: IssueKind::Budget,
                    parameter: None,
                    value: evaluations as f64,
                    threshold: budget as f64,
                    advice: format!(
                        "stopped early on request at {last_times:.0} autocorrelation times"
                    ),
                })
            }
            _ => {}
        }
        let steps = states[0].steps_done();
        return Ok(EnsembleRun {
            ensembles: states.into_iter().map(EnsembleState::into_chains).collect(),
            diagnostics,
            stop,
            evaluations,
            steps,
            relocated,
            checks,
        });
    }
}

#[cfg(test)]
mod tests {
    use super::super::ensemble::DensityFn;
    use super::super::verdict::{diagnose_ensembles_at, ConvergenceThresholds, DiagnosisDepth};
    use super::*;
    use crate::random::{standard_normal, stream_rng};

    /// A slowly mixing run (stretch move only, scale a = 1.2, on a 2-D unit Gaussian: τ of
    /// tens of steps) is thinned at its checks, keeps ≥ 64 stored steps, converges, and its
    /// thinned draws still give the target's moments: |mean| within 4 Monte-Carlo standard
    /// errors (σ/√ESS with ESS = N/τ of the final check) and the variance within 4 standard
    /// errors (√(2/ESS) relative, Gaussian draws; common practice).
    #[test]
    fn slow_chains_are_thinned_and_keep_the_moments() {
        let target = DensityFn {
            dim: 2,
            log_density: |x: &[f64]| -0.5 * (x[0] * x[0] + x[1] * x[1]),
        };
        let sampler = SamplerSettings {
            n_walkers: 8,
            n_steps: 600,
            n_burn: 100,
            stretch_a: 1.2,
            de_fraction: 0.0,
            gaussian_fraction: 0.0,
            seed: 3,
            ..SamplerSettings::default()
        };
        let starts: Vec<Vec<f64>> = (0..4)
            .map(|m| {
                let mut rng = stream_rng(3, 50 + m);
                (0..16).map(|_| standard_normal(&mut rng)).collect()
            })
            .collect();
        let thresholds = ConvergenceThresholds::default();
        let run = run_until_converged(
            &target,
            &starts,
            &sampler,
            &RunLength {
                max_evaluations: 4_000_000,
                ..RunLength::default()
            },
            &mut |e: &[&Chains]| {
                diagnose_ensembles_at(e, &thresholds, DiagnosisDepth::Quick, true, &[])
            },
            &mut |_| Steer::Continue,
        )
        .unwrap();
        assert!(run.diagnostics.converged, "{}", run.diagnostics.verdict());
        let chains = run.merged();
        assert!(chains.thin >= 2, "thin {}", chains.thin);
        assert!(chains.n_stored_steps >= MIN_STORED_AFTER_THINNING);
        for param in 0..2 {
            let d = &run.diagnostics.parameters[param];
            let values = chains.flat_parameter(param);
            let n = values.len() as f64;
            let ess = n / d.autocorrelation.tau;
            let mean = values.iter().sum::<f64>() / n;
            let var = values.iter().map(|v| (v - mean) * (v - mean)).sum::<f64>() / (n - 1.0);
            assert!(mean.abs() < 4.0 / ess.sqrt(), "mean {mean}, ESS {ess}");
            assert!(
                (var - 1.0).abs() < 4.0 * (2.0 / ess).sqrt(),
                "var {var}, ESS {ess}"
            );
        }
    }
}
