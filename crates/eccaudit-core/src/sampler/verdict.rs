//! The convergence verdict of ensemble runs by a rule made for ensembles (τ, its stability, R̂ between independent ensembles, ESS, stranded walkers): thresholds, figures, issues with plain advice, the verdict text.

use serde::Serialize;

use super::autocorrelation::{
    integrated_autocorrelation_time_in, AutocorrelationEstimate, Workspace,
};
use super::common_length;
use super::ensemble::Chains;
use super::rank::{classic_split_r_hat, effective_sample_size, RHat, SplitDraws};

/// The convergence rule for ensemble samplers, stated once for the doc comments, the verdict
/// text and the reports.
///
/// A run is converged when, for every quantity judged:
/// 1. the run spans at least 50 integrated autocorrelation times τ, with τ estimated by Sokal's
///    automatic window on the walker-averaged autocorrelation function (Goodman & Weare 2010,
///    CAMCOS 5, 65, §3–4; Foreman-Mackey et al. 2013, PASP 125, 306, §3 — walkers of one
///    ensemble are coupled, so τ, not a between-walker R̂, measures their progress);
/// 2. τ is stable: the estimates from the whole stored run and from its last half differ by at
///    most 25 % (a τ that still grows with the run length means the walkers have not yet
///    explored the posterior; Sokal 1997, §3, gives the relative standard error of τ̂ as
///    √(2(2M+1)/N) for window M ≈ 5τ and N draws, ≈ 11 % for the last half of a 50 τ run
///    pooled over 64 walkers, so 25 % is about 3 standard errors of the difference);
/// 3. at least two independent ensembles, started apart, agree: the split R̂ between them
///    (each ensemble's draws pooled over its walkers, first and second half as separate
///    chains) is below 1.01 (Gelman & Rubin 1992, Stat. Sci. 7, 457; threshold of Vehtari et
///    al. 2021, Bayesian Analysis 16, 667, §4.4), rank-normalised and folded for a full
///    diagnosis;
/// 4. the bulk and tail effective sample sizes reach 400 (Vehtari et al. 2021, §4.4);
/// 5. no walker is stranded: none stays, over the whole last half, more than
///    10 + 3√(d/2) nats below the median walker's mean log-density (d parameters; the
///    log-density of a d-dimensional Gaussian posterior has standard deviation √(d/2)).
pub const CONVERGENCE_RULE: &str = "rule: every quantity spans >= 50 autocorrelation times \
(Sokal window, walker-averaged; Goodman & Weare 2010, Foreman-Mackey et al. 2013), tau stable \
within 25% between the run and its last half, split R-hat < 1.01 between independent ensembles \
(Gelman & Rubin 1992; Vehtari et al. 2021), bulk and tail ESS >= 400, no stranded walker";

/// Thresholds of the convergence rule ([`CONVERGENCE_RULE`]).
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct ConvergenceThresholds {
    /// R̂ between independent ensembles must be below this (1.01, Vehtari et al. 2021, §4.4).
    pub r_hat_below: f64,
    /// Stored steps per autocorrelation time must reach this (50, Foreman-Mackey et al. 2013,
    /// §3 and their `autocorr` module's tolerance, from memory).
    pub min_autocorrelation_times: f64,
    /// Largest relative difference between τ of the whole run and of its last half (0.25).
    pub tau_stability: f64,
    /// Bulk and tail ESS must reach this (400, Vehtari et al. 2021, §4.4:
    /// 100 per chain for 4 chains).
    pub min_ess: f64,
    /// Independent ensembles needed for the between-chain check (2).
    pub min_ensembles: usize,
    /// A walker is stranded when its largest log-density over the last half lies more than
    /// this many nats plus 3√(d/2) below the median walker's mean (10).
    pub stranded_gap: f64,
    /// Acceptance fraction range outside which a warning is given (0.2–0.5,
    /// Foreman-Mackey et al. 2013, §4, rule of thumb).
    pub acceptance_range: (f64, f64),
}

impl Default for ConvergenceThresholds {
    fn default() -> Self {
        ConvergenceThresholds {
            r_hat_below: 1.01,
            min_autocorrelation_times: 50.0,
            tau_stability: 0.25,
            min_ess: 400.0,
            min_ensembles: 2,
            stranded_gap: 10.0,
            acceptance_range: (0.2, 0.5),
        }
    }
}

/// Per-quantity diagnostics.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct ParameterDiagnostics {
    /// Autocorrelation time (stored steps) and window, all walkers of all ensembles.
    pub autocorrelation: AutocorrelationEstimate,
    /// τ of the last half of the stored steps.
    pub tau_last_half: f64,
    /// Stored steps divided by τ.
    pub autocorrelation_times_in_run: f64,
    /// Split R̂ between independent ensembles (NaN with one ensemble): rank-normalised bulk and
    /// folded for a full diagnosis, classic for a quick one.
    pub r_hat: RHat,
    /// Split rank-normalised R̂ over single walkers, for information only (walkers of one
    /// ensemble are coupled; not part of the rule). NaN for a quick diagnosis.
    pub r_hat_walkers: f64,
    /// Bulk ESS.
    pub ess_bulk: f64,
    /// Tail ESS.
    pub ess_tail: f64,
}

/// What a convergence issue is about.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum IssueKind {
    /// R̂ between ensembles at or above the threshold (or undefined).
    RHat,
    /// Too few autocorrelation times in the run, or τ not estimable.
    ShortRun,
    /// τ of the last half differs too much from τ of the whole run.
    TauUnstable,
    /// Bulk or tail ESS below the threshold.
    LowEss,
    /// Fewer independent ensembles than the between-chain check needs.
    TooFewEnsembles,
    /// Walkers stranded in a far lower-probability region.
    StrandedWalkers,
    /// Acceptance fraction outside the usual range (warning only).
    Acceptance,
    /// The evaluation budget ran out before the rule held (with run-until-converged).
    Budget,
}

/// One issue found, with the figure, the threshold and what to do.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct ConvergenceIssue {
    /// Kind of issue.
    pub kind: IssueKind,
    /// Parameter index, when the issue concerns one parameter.
    pub parameter: Option<usize>,
    /// The figure measured.
    pub value: f64,
    /// The threshold it missed.
    pub threshold: f64,
    /// Plain advice.
    pub advice: String,
}

/// A walker found stranded.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct StrandedWalker {
    /// Ensemble index.
    pub ensemble: usize,
    /// Walker index within its ensemble.
    pub walker: usize,
    /// Its largest log-density over the last half minus the median walker's mean [nats].
    pub gap: f64,
}

/// Diagnostics of a whole run (one or several independent ensembles).
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Diagnostics {
    /// Independent ensembles.
    pub n_ensembles: usize,
    /// Walkers per ensemble.
    pub n_walkers: usize,
    /// Stored steps per walker.
    pub n_stored_steps: usize,
    /// Thinning of the stored steps.
    pub thin: usize,
    /// Mean acceptance fraction after burn-in.
    pub acceptance_fraction: f64,
    /// One entry per quantity judged.
    pub parameters: Vec<ParameterDiagnostics>,
    /// Walkers stranded far below the others.
    pub stranded: Vec<StrandedWalker>,
    /// True when no blocking issue was found.
    pub converged: bool,
    /// Issues that mean the run has not converged.
    pub issues: Vec<ConvergenceIssue>,
    /// Warnings that do not by themselves deny convergence.
    pub warnings: Vec<ConvergenceIssue>,
    /// Thresholds used.
    pub thresholds: ConvergenceThresholds,
    /// What the verdict covers.
    pub quantities: DiagnosedQuantities,
}

/// What a verdict covers.
#[derive(Debug, Clone, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum DiagnosedQuantities {
    /// Every sampled parameter ([`diagnose_ensembles`]); `parameters[i]` is parameter i.
    Every,
    /// One derived quantity ([`diagnose_ensembles_derived`]); `parameters` holds its entry.
    Derived {
        /// Its name.
        name: String,
        /// How thoroughly.
        depth: DiagnosisDepth,
    },
}

impl Diagnostics {
    /// A plain-text verdict: "converged" or "NOT converged" (with "judged on NAME alone" when
    /// only a derived quantity was checked) and the rule on the first line, then one advice line
    /// per issue or warning.
    pub fn verdict(&self) -> String {
        let mut text = if self.converged {
            "converged".to_string()
        } else {
            "NOT converged".to_string()
        };
        if let DiagnosedQuantities::Derived { name, depth } = &self.quantities {
            text.push_str(&match depth {
                DiagnosisDepth::Full => format!(" (judged on {name} alone)"),
                DiagnosisDepth::Quick => format!(" (judged on {name} alone, quick)"),
            });
        }
        text.push_str(&format!(
            " [{} ensembles; {CONVERGENCE_RULE}]",
            self.n_ensembles
        ));
        for issue in self.issues.iter().chain(&self.warnings) {
            text.push_str("\n- ");
            text.push_str(&issue.advice);
        }
        text
    }

    /// The largest τ over the quantities judged, in steps (stored steps × thinning); NaN when
    /// none could be estimated.
    pub fn tau_max_steps(&self) -> f64 {
        let tau = self
            .parameters
            .iter()
            .map(|p| {
                if p.tau_last_half.is_nan() {
                    p.autocorrelation.tau
                } else {
                    p.autocorrelation.tau.max(p.tau_last_half)
                }
            })
            .fold(f64::NAN, f64::max);
        tau * self.thin as f64
    }

    /// Adds an issue (e.g. the budget ran out) and clears `converged`.
    pub fn push_issue(&mut self, issue: ConvergenceIssue) {
        self.issues.push(issue);
        self.converged = false;
    }
}

/// [`diagnose_with`] with the default thresholds.
pub fn diagnose(chains: &Chains) -> Diagnostics {
    diagnose_with(chains, &ConvergenceThresholds::default())
}

/// Diagnoses one ensemble alone: the same figures as [`diagnose_ensembles`], and never
/// "converged", because the between-chain check needs independent ensembles (its walkers are
/// coupled).
pub fn diagnose_with(chains: &Chains, thresholds: &ConvergenceThresholds) -> Diagnostics {
    diagnose_ensembles(&[chains], thresholds)
}

/// Diagnoses every parameter of independent ensembles (equal walkers and stored steps) by
/// [`CONVERGENCE_RULE`], at full depth.
pub fn diagnose_ensembles(
    ensembles: &[&Chains],
    thresholds: &ConvergenceThresholds,
) -> Diagnostics {
    diagnose_ensembles_at(ensembles, thresholds, DiagnosisDepth::Full, true, &[])
}

/// Diagnoses independent ensembles by [`CONVERGENCE_RULE`] at `depth`: every sampled parameter
/// when `every_parameter` (entries 0..dim of `parameters`), then each derived quantity of
/// `derived` (name, one trace per walker with the walkers of ensemble 0 first). Without
/// `every_parameter` the verdict says it judged the first derived quantity alone.
pub fn diagnose_ensembles_at(
    ensembles: &[&Chains],
    thresholds: &ConvergenceThresholds,
    depth: DiagnosisDepth,
    every_parameter: bool,
    derived: &[(&str, &[Vec<f64>])],
) -> Diagnostics {
    let dim = ensembles.first().map_or(0, |c| c.dim);
    let thin = ensembles.first().map_or(1, |c| c.thin);
    let mut parameters = Vec::with_capacity(dim + derived.len());
    let mut issues = Vec::new();
    let mut scratch = Scratch::default();
    if every_parameter {
        // Every parameter's traces from one pass over the stored steps: walker-major rows of n
        // draws, parameter after parameter, all walkers of all ensembles (ensemble 0 first).
        let n = ensembles
            .iter()
            .map(|c| c.n_stored_steps)
            .min()
            .unwrap_or(0);
        let rows: usize = ensembles.iter().map(|c| c.n_walkers).sum();
        let mut by_parameter: Vec<Vec<f64>> =
            (0..dim).map(|_| Vec::with_capacity(rows * n)).collect();
        for c in ensembles {
            let stride = c.n_walkers * dim;
            for w in 0..c.n_walkers {
                for s in 0..n {
                    let x = &c.samples[s * stride + w * dim..][..dim];
                    for (column, &v) in by_parameter.iter_mut().zip(x) {
                        column.push(v);
                    }
                }
            }
        }
        for (param, column) in by_parameter.iter().enumerate() {
            let traces: Vec<&[f64]> = if n == 0 {
                vec![&[][..]; rows]
            } else {
                column.chunks_exact(n).collect()
            };
            let (diagnostics, found) = diagnose_rows(
                &traces,
                ensembles.len(),
                &format!("parameter {param}"),
                thin,
                thresholds,
                depth,
                &mut scratch,
            );
            parameters.push(diagnostics);
            issues.extend(found.into_iter().map(|issue| ConvergenceIssue {
                parameter: Some(param),
                ..issue
            }));
        }
    }
    for (name, traces) in derived {
        let (diagnostics, found) = diagnose_rows(
            traces,
            ensembles.len(),
            name,
            thin,
            thresholds,
            depth,
            &mut scratch,
        );
        parameters.push(diagnostics);
        issues.extend(found);
    }
    let quantities = match (every_parameter, derived.first()) {
        (false, Some((name, _))) => DiagnosedQuantities::Derived {
            name: name.to_string(),
            depth,
        },
        _ => DiagnosedQuantities::Every,
    };
    finish_diagnostics(ensembles, parameters, issues, thresholds, quantities)
}

/// One ensemble judged by one derived quantity ([`diagnose_ensembles_derived`] with one
/// ensemble; never "converged", see [`diagnose_with`]).
pub fn diagnose_derived(
    chains: &Chains,
    name: &str,
    traces: &[Vec<f64>],
    thresholds: &ConvergenceThresholds,
    depth: DiagnosisDepth,
) -> Diagnostics {
    diagnose_ensembles_derived(&[chains], name, traces, thresholds, depth)
}

/// Diagnoses independent ensembles by one derived quantity only (e.g. e = h² + k² in
/// injection–recovery, where only e is reported), by [`CONVERGENCE_RULE`]: `traces` holds one
/// trace per walker, the walkers of ensemble 0 first, then those of ensemble 1, and so on.
/// The verdict says that only `name` was judged.
pub fn diagnose_ensembles_derived(
    ensembles: &[&Chains],
    name: &str,
    traces: &[Vec<f64>],
    thresholds: &ConvergenceThresholds,
    depth: DiagnosisDepth,
) -> Diagnostics {
    diagnose_ensembles_at(ensembles, thresholds, depth, false, &[(name, traces)])
}

/// How thoroughly one quantity is diagnosed.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum DiagnosisDepth {
    /// τ (whole run and last half), rank-normalised split R̂ between ensembles (bulk and
    /// folded), R̂ over walkers for information, and bulk/tail ESS (Vehtari et al. 2021): for a
    /// result that is looked at or quoted.
    Full,
    /// τ (whole run and last half), classic split R̂ between ensembles of the draws and of the
    /// draws folded about their middle draw (Gelman et al. 2013, Bayesian Data Analysis, 3rd
    /// ed., §11.4), and ESS = N/τ for both bulk and tail (Foreman-Mackey et al. 2013, §3;
    /// Goodman & Weare 2010): no sorting, for the thousands of runs of injection–recovery.
    Quick,
}

/// Buffers one diagnosis reuses from quantity to quantity: the autocorrelation workspace, the
/// ensembles' step-major series and the pooled draws of the folded R̂'s median.
#[derive(Debug, Default)]
struct Scratch {
    autocorrelation: Workspace,
    series: Vec<f64>,
    pooled: Vec<f64>,
}

/// Each ensemble's draws in step-major order (step 0 of every walker, then step 1, …), so that
/// the first and second halves of a series are the first and second halves of the run; written
/// into `out`, one series of `per walkers × n` after another.
fn ensemble_series<R: AsRef<[f64]>>(
    traces: &[R],
    n_ensembles: usize,
    n: usize,
    out: &mut Vec<f64>,
) -> usize {
    let per = traces.len() / n_ensembles.max(1);
    out.clear();
    for m in 0..n_ensembles {
        let walkers = &traces[m * per..(m + 1) * per];
        for s in 0..n {
            out.extend(walkers.iter().map(|t| t.as_ref()[s]));
        }
    }
    per * n
}

/// τ (whole and last half), R̂ between ensembles and bulk/tail ESS of one quantity at `depth`,
/// and the issues it raises (their `parameter` left unset). `traces` holds one trace per
/// walker, ensemble after ensemble (`n_ensembles` equal groups); `subject` names the quantity
/// in the advice, `thin` is the chains' thinning.
pub fn diagnose_traces(
    traces: &[Vec<f64>],
    n_ensembles: usize,
    subject: &str,
    thin: usize,
    thresholds: &ConvergenceThresholds,
    depth: DiagnosisDepth,
) -> (ParameterDiagnostics, Vec<ConvergenceIssue>) {
    diagnose_rows(
        traces,
        n_ensembles,
        subject,
        thin,
        thresholds,
        depth,
        &mut Scratch::default(),
    )
}

/// [`diagnose_traces`] of traces given as any slices, with reused buffers (the same figures,
/// bit for bit).
fn diagnose_rows<R: AsRef<[f64]>>(
    traces: &[R],
    n_ensembles: usize,
    subject: &str,
    thin: usize,
    thresholds: &ConvergenceThresholds,
    depth: DiagnosisDepth,
    scratch: &mut Scratch,
) -> (ParameterDiagnostics, Vec<ConvergenceIssue>) {
    let n = common_length(traces);
    let autocorrelation = integrated_autocorrelation_time_in(traces, &mut scratch.autocorrelation);
    let too_short = !autocorrelation.window_found
        || (n as f64)
            .partial_cmp(&(thresholds.min_autocorrelation_times * autocorrelation.tau))
            .is_none_or(|o| o == std::cmp::Ordering::Less);
    if depth == DiagnosisDepth::Quick && too_short {
        // The run must go on anyway: skip the rest of a quick check (the extension needs only τ).
        let nan = f64::NAN;
        let diagnostics = ParameterDiagnostics {
            autocorrelation,
            tau_last_half: nan,
            autocorrelation_times_in_run: n as f64 / autocorrelation.tau,
            r_hat: RHat {
                bulk: nan,
                tail: nan,
                max: nan,
            },
            r_hat_walkers: nan,
            ess_bulk: nan,
            ess_tail: nan,
        };
        let issues = convergence_issues(subject, &diagnostics, 1, thin, thresholds)
            .into_iter()
            .filter(|i| i.kind == IssueKind::ShortRun)
            .collect();
        return (diagnostics, issues);
    }
    let last_half: Vec<&[f64]> = traces.iter().map(|t| &t.as_ref()[n - n / 2..n]).collect();
    let tau_last_half =
        integrated_autocorrelation_time_in(&last_half, &mut scratch.autocorrelation).tau;
    let mut between = |full: bool| {
        if n_ensembles < 2 {
            return RHat {
                bulk: f64::NAN,
                tail: f64::NAN,
                max: f64::NAN,
            };
        }
        let length = ensemble_series(traces, n_ensembles, n, &mut scratch.series);
        let series: Vec<&[f64]> = if length == 0 {
            vec![&[][..]; n_ensembles]
        } else {
            scratch.series.chunks_exact(length).collect()
        };
        if full {
            SplitDraws::new(&series).r_hat()
        } else {
            classic_split_r_hat(&series, &mut scratch.pooled)
        }
    };
    let (r_hat, r_hat_walkers, ess_bulk, ess_tail) = match depth {
        DiagnosisDepth::Full => {
            // Split, rank and rank-normalise once for the walker R̂, the bulk and the tail ESS.
            let split = SplitDraws::new(traces);
            let normalized = split.normalized();
            let walkers = split.r_hat_from(&normalized).max;
            (
                between(true),
                walkers,
                effective_sample_size(&normalized),
                split.ess_tail(),
            )
        }
        DiagnosisDepth::Quick => {
            let ess = if autocorrelation.tau.is_nan() {
                f64::NAN
            } else {
                (traces.len() * n) as f64 / autocorrelation.tau.max(1.0)
            };
            (between(false), f64::NAN, ess, ess)
        }
    };
    let diagnostics = ParameterDiagnostics {
        autocorrelation,
        tau_last_half,
        autocorrelation_times_in_run: n as f64 / autocorrelation.tau,
        r_hat,
        r_hat_walkers,
        ess_bulk,
        ess_tail,
    };
    let issues = convergence_issues(subject, &diagnostics, n_ensembles, thin, thresholds);
    (diagnostics, issues)
}

/// The blocking issues of one quantity's diagnostics (their `parameter` left unset).
fn convergence_issues(
    subject: &str,
    diagnostics: &ParameterDiagnostics,
    n_ensembles: usize,
    thin: usize,
    thresholds: &ConvergenceThresholds,
) -> Vec<ConvergenceIssue> {
    let ParameterDiagnostics {
        autocorrelation,
        tau_last_half,
        autocorrelation_times_in_run: times,
        r_hat,
        ess_bulk: bulk,
        ess_tail: tail,
        ..
    } = *diagnostics;
    let mut issues = Vec::new();
    if n_ensembles >= thresholds.min_ensembles
        && (r_hat.max.is_nan() || r_hat.max >= thresholds.r_hat_below)
    {
        issues.push(ConvergenceIssue {
            kind: IssueKind::RHat,
            parameter: None,
            value: r_hat.max,
            threshold: thresholds.r_hat_below,
            advice: format!(
                "{subject}: the {n_ensembles} independent ensembles disagree (R̂ between them \
                 = {:.3}, needs < {}); run longer, or the posterior has several modes that the \
                 walkers do not cross — look at the traces",
                r_hat.max, thresholds.r_hat_below
            ),
        });
    }
    if !autocorrelation.window_found
        || times.is_nan()
        || times < thresholds.min_autocorrelation_times
    {
        let needed =
            (thresholds.min_autocorrelation_times * autocorrelation.tau * thin as f64).ceil();
        let lower_bound = if autocorrelation.window_found {
            ""
        } else {
            " at least (the run is too short to estimate it)"
        };
        issues.push(ConvergenceIssue {
            kind: IssueKind::ShortRun,
            parameter: None,
            value: times,
            threshold: thresholds.min_autocorrelation_times,
            advice: format!(
                "{subject}: autocorrelation time τ = {:.1} stored steps{lower_bound}, \
                 so the run spans only {:.1} τ (needs ≥ {}); run at least {needed} steps",
                autocorrelation.tau, times, thresholds.min_autocorrelation_times
            ),
        });
    } else {
        let change = (tau_last_half - autocorrelation.tau).abs() / autocorrelation.tau;
        if change.is_nan() || change > thresholds.tau_stability {
            issues.push(ConvergenceIssue {
                kind: IssueKind::TauUnstable,
                parameter: None,
                value: change,
                threshold: thresholds.tau_stability,
                advice: format!(
                    "{subject}: τ = {:.1} over the run but {:.1} over its last half (a change of \
                     {:.0} %, allowed {:.0} %): the walkers are still settling; run longer",
                    autocorrelation.tau,
                    tau_last_half,
                    100.0 * change,
                    100.0 * thresholds.tau_stability
                ),
            });
        }
    }
    let worst_ess = if bulk.is_nan() || tail.is_nan() {
        f64::NAN
    } else {
        bulk.min(tail)
    };
    if worst_ess.is_nan() || worst_ess < thresholds.min_ess {
        issues.push(ConvergenceIssue {
            kind: IssueKind::LowEss,
            parameter: None,
            value: worst_ess,
            threshold: thresholds.min_ess,
            advice: format!(
                "{subject}: effective sample size bulk {bulk:.0}, tail {tail:.0} \
                 (needs ≥ {}); run longer or with more walkers",
                thresholds.min_ess
            ),
        });
    }
    issues
}

/// Walkers whose largest log-density over the last half of the stored steps lies more than
/// `stranded_gap + 3√(d/2)` nats below the median of the walkers' mean log-densities.
fn stranded_walkers(
    ensembles: &[&Chains],
    thresholds: &ConvergenceThresholds,
) -> Vec<StrandedWalker> {
    let mut out = Vec::new();
    for (m, chains) in ensembles.iter().enumerate() {
        let (w, n) = (chains.n_walkers, chains.n_stored_steps);
        if n == 0 || w == 0 {
            continue;
        }
        let gap = thresholds.stranded_gap + 3.0 * libm::sqrt(chains.dim as f64 / 2.0);
        let mut means = vec![0.0; w];
        let mut maxima = vec![f64::NEG_INFINITY; w];
        let first = (n - n / 2).min(n - 1);
        for s in first..n {
            for k in 0..w {
                let lp = chains.log_densities[s * w + k];
                means[k] += lp;
                maxima[k] = maxima[k].max(lp);
            }
        }
        let count = (n - first) as f64;
        let mut sorted: Vec<f64> = means.iter().map(|v| v / count).collect();
        sorted.sort_by(f64::total_cmp);
        let median = sorted[w / 2];
        for (k, &max) in maxima.iter().enumerate() {
            if max < median - gap {
                out.push(StrandedWalker {
                    ensemble: m,
                    walker: k,
                    gap: max - median,
                });
            }
        }
    }
    out
}

/// The ensemble-count and stranded-walker issues, the acceptance warnings and the verdict.
fn finish_diagnostics(
    ensembles: &[&Chains],
    parameters: Vec<ParameterDiagnostics>,
    mut issues: Vec<ConvergenceIssue>,
    thresholds: &ConvergenceThresholds,
    quantities: DiagnosedQuantities,
) -> Diagnostics {
    let first = ensembles.first();
    let n = first.map_or(0, |c| c.n_stored_steps);
    let thin = first.map_or(1, |c| c.thin);
    let n_walkers = first.map_or(0, |c| c.n_walkers);
    let (accepted, proposals) = ensembles.iter().fold((0u64, 0u64), |(a, p), c| {
        (
            a + c.accepted.iter().sum::<u64>(),
            p + c.proposals_per_walker * c.n_walkers as u64,
        )
    });
    let acceptance_fraction = accepted as f64 / proposals.max(1) as f64;
    if ensembles.len() < thresholds.min_ensembles {
        issues.push(ConvergenceIssue {
            kind: IssueKind::TooFewEnsembles,
            parameter: None,
            value: ensembles.len() as f64,
            threshold: thresholds.min_ensembles as f64,
            advice: format!(
                "{} ensemble(s): walkers of one ensemble are coupled, so the between-chain check \
                 needs at least {} independent ensembles",
                ensembles.len(),
                thresholds.min_ensembles
            ),
        });
    }
    let stranded = stranded_walkers(ensembles, thresholds);
    if let Some(worst) = stranded.iter().map(|s| s.gap).reduce(f64::min) {
        issues.push(ConvergenceIssue {
            kind: IssueKind::StrandedWalkers,
            parameter: None,
            value: stranded.len() as f64,
            threshold: 0.0,
            advice: format!(
                "{} walker(s) stranded in a far less probable region (up to {:.0} nats below \
                 the others); they bias the summary — start nearer the best fit or run longer",
                stranded.len(),
                -worst
            ),
        });
    }
    let mut warnings = Vec::new();
    let (low, high) = thresholds.acceptance_range;
    if acceptance_fraction < low {
        warnings.push(ConvergenceIssue {
            kind: IssueKind::Acceptance,
            parameter: None,
            value: acceptance_fraction,
            threshold: low,
            advice: format!(
                "acceptance fraction {acceptance_fraction:.2} is below {low}: walkers rarely move; \
                 the posterior may be multimodal or very narrow in some direction"
            ),
        });
    } else if acceptance_fraction > high {
        warnings.push(ConvergenceIssue {
            kind: IssueKind::Acceptance,
            parameter: None,
            value: acceptance_fraction,
            threshold: high,
            advice: format!(
                "acceptance fraction {acceptance_fraction:.2} is above {high}: usual for \
                 low-dimensional, nearly Gaussian posteriors; no action needed if τ is fine"
            ),
        });
    }
    Diagnostics {
        n_ensembles: ensembles.len(),
        n_walkers,
        n_stored_steps: n,
        thin,
        acceptance_fraction,
        parameters,
        stranded,
        converged: issues.is_empty(),
        issues,
        warnings,
        thresholds: *thresholds,
        quantities,
    }
}

#[cfg(test)]
mod tests {
    use super::super::autocorrelation::integrated_autocorrelation_time;
    use super::super::rank::{ess_tail, rank_normalized_split_r_hat};
    use super::*;

    #[test]
    fn constant_chains_give_nan_not_a_panic() {
        let traces = vec![vec![1.0; 20]; 4];
        assert!(integrated_autocorrelation_time(&traces).tau.is_nan());
        assert!(effective_sample_size(&traces).is_nan());
        assert!(ess_tail(&traces).is_nan());
        assert!(rank_normalized_split_r_hat(&traces).max.is_nan());
    }
}
