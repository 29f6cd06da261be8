//! Convergence diagnostics of ensemble chains: autocorrelation time, split rank-normalised R̂, bulk and tail ESS, and a plain verdict with advice.
//!
//! All functions take `traces: &[Vec<f64>]`, one trace per chain (walker) of
//! equal length; longer traces are cut to the shortest. Walkers of one
//! ensemble are not independent chains, but their between-walker spread is
//! still the quantity R̂ compares (common practice for ensemble samplers).

use serde::Serialize;

use super::ensemble::Chains;

/// Integrated autocorrelation time with the window actually used.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct AutocorrelationEstimate {
    /// τ, in stored steps.
    pub tau: f64,
    /// Window M (lags summed).
    pub window: usize,
    /// False when no lag M ≤ n − 1 satisfied M ≥ 5τ(M): the chain is too short
    /// for a reliable τ and the returned value is a lower bound.
    pub window_found: bool,
}

/// Sokal's automatic windowing constant c (Sokal 1997, "Monte Carlo methods
/// in statistical mechanics", §3; the value 5 as in Foreman-Mackey et al. 2013).
const SOKAL_WINDOW_C: f64 = 5.0;

/// Integrated autocorrelation time τ = 1 + 2 Σ_{t=1}^{M} ρ(t) by Sokal's
/// automatic-windowing estimator (Sokal 1997, §3; Goodman & Weare 2010,
/// CAMCOS 5, 65, §4), with the normalised autocorrelation function averaged
/// over walkers before summing, as in Foreman-Mackey et al. (2013, PASP 125,
/// 306, §3 and their `autocorr` module): M is the smallest lag with
/// M ≥ 5 τ(M). Autocovariances only up to the window (direct sums, then FFT for long windows).
pub fn integrated_autocorrelation_time(traces: &[Vec<f64>]) -> AutocorrelationEstimate {
    let n = common_length(traces);
    if n < 2 {
        return AutocorrelationEstimate {
            tau: f64::NAN,
            window: 0,
            window_found: false,
        };
    }
    // Only chains with positive variance contribute; their autocorrelations ρ_c = γ_c/γ_c(0)
    // are averaged, i.e. the autocovariances are pooled with weights 1/(γ_c(0) · chains used).
    let centred = centre(traces, n);
    let variances: Vec<f64> = centred
        .iter()
        .map(|x| lag_product(x, 0) / n as f64)
        .collect();
    let n_used = variances
        .iter()
        .filter(|v| !v.is_nan() && **v > 0.0)
        .count();
    if n_used == 0 {
        return AutocorrelationEstimate {
            tau: f64::NAN,
            window: 0,
            window_found: false,
        };
    }
    let weights = variances
        .iter()
        .map(|&v| {
            if !v.is_nan() && v > 0.0 {
                1.0 / (v * n_used as f64)
            } else {
                0.0
            }
        })
        .collect();
    let pooled = PooledAutocovariance::new(centred, weights);
    let mean_rho = |lag: usize| pooled.at(lag);
    let mut tau = 1.0;
    for window in 1..n {
        tau += 2.0 * mean_rho(window);
        if window as f64 >= SOKAL_WINDOW_C * tau {
            return AutocorrelationEstimate {
                tau,
                window,
                window_found: true,
            };
        }
    }
    AutocorrelationEstimate {
        tau,
        window: n - 1,
        window_found: false,
    }
}

/// R̂ of one parameter: bulk (rank-normalised split chains), tail (the same on
/// draws folded about the median) and their maximum, the value to report
/// (Vehtari et al. 2021, Bayesian Analysis 16, 667, §4.1, eqs. 3–4 for the
/// split R̂ and §4.2 for rank normalisation and folding). The quick diagnosis
/// ([`DiagnosisDepth::Quick`]) fills it with the classic split R̂ of the draws
/// and of the draws folded about their middle draw, without rank normalisation.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct RHat {
    /// Split R̂ of the rank-normalised draws.
    pub bulk: f64,
    /// Split R̂ of the rank-normalised folded draws |θ − median|.
    pub tail: f64,
    /// max(bulk, tail).
    pub max: f64,
}

/// Split rank-normalised R̂ (Vehtari et al. 2021, Bayesian Analysis 16, 667, §4).
pub fn rank_normalized_split_r_hat(traces: &[Vec<f64>]) -> RHat {
    SplitDraws::new(traces).r_hat()
}

/// Bulk effective sample size: the ESS of the rank-normalised split chains
/// (Vehtari et al. 2021, Bayesian Analysis 16, 667, §4.3).
pub fn ess_bulk(traces: &[Vec<f64>]) -> f64 {
    effective_sample_size(&SplitDraws::new(traces).normalized())
}

/// Tail effective sample size: the smaller ESS of the indicators
/// I(θ ≤ q₀.₀₅) and I(θ ≤ q₀.₉₅) on split chains (Vehtari et al. 2021,
/// Bayesian Analysis 16, 667, §4.3).
pub fn ess_tail(traces: &[Vec<f64>]) -> f64 {
    SplitDraws::new(traces).ess_tail()
}

/// Split chains of one quantity with their pooled ranking, sorted once and shared by R̂ (bulk
/// and folded), the bulk ESS and the tail ESS.
struct SplitDraws {
    chains: Vec<Vec<f64>>,
    ranked: RankedDraws,
    scores: std::cell::RefCell<NormalScores>,
}

impl SplitDraws {
    fn new(traces: &[Vec<f64>]) -> Self {
        let chains = split_chains(traces);
        let ranked = RankedDraws::new(&chains);
        let scores = std::cell::RefCell::new(NormalScores::new(ranked.len()));
        SplitDraws {
            chains,
            ranked,
            scores,
        }
    }

    /// The rank-normalised split chains.
    fn normalized(&self) -> Vec<Vec<f64>> {
        self.ranked.normalized(&mut self.scores.borrow_mut())
    }

    /// Bulk R̂ from `normalized` (as returned by [`Self::normalized`]) and tail R̂ from the
    /// draws folded about the median.
    fn r_hat_from(&self, normalized: &[Vec<f64>]) -> RHat {
        let bulk = split_r_hat_of(normalized);
        let median = self.ranked.quantile(0.5);
        let folded = self.ranked.folded(median);
        let tail = split_r_hat_of(&folded.normalized(&mut self.scores.borrow_mut()));
        RHat {
            bulk,
            tail,
            max: bulk.max(tail),
        }
    }

    fn r_hat(&self) -> RHat {
        self.r_hat_from(&self.normalized())
    }

    fn ess_tail(&self) -> f64 {
        let ess_at = |prob: f64| {
            let q = self.ranked.quantile(prob);
            let indicator: Vec<Vec<f64>> = self
                .chains
                .iter()
                .map(|c| c.iter().map(|&x| if x <= q { 1.0 } else { 0.0 }).collect())
                .collect();
            effective_sample_size(&indicator)
        };
        let (low, high) = (ess_at(0.05), ess_at(0.95));
        if low.is_nan() || high.is_nan() {
            f64::NAN
        } else {
            low.min(high)
        }
    }
}

/// Effective sample size of several chains (no splitting, no rank
/// normalisation): the multi-chain autocorrelation estimate of Vehtari et al.
/// (2021, Bayesian Analysis 16, 667, §3.2, eqs. 10–11) truncated and made
/// monotone by Geyer's initial monotone sequence (Geyer 1992, Statistical
/// Science 7, 473), as implemented in Stan and the `posterior` R package
/// (`ess_rfun`, from memory), including the cap τ̂ ≥ 1/log₁₀(MN).
pub fn effective_sample_size(traces: &[Vec<f64>]) -> f64 {
    let n = common_length(traces);
    let m = traces.len();
    if m == 0 || n < 4 {
        return f64::NAN;
    }
    let chain_means: Vec<f64> = traces.iter().map(|t| mean(&t[..n])).collect();
    let pooled = PooledAutocovariance::new(centre(traces, n), vec![1.0 / m as f64; m]);
    let nf = n as f64;
    let mean_acov = |t: usize| pooled.at(t);
    let mean_var = mean_acov(0) * nf / (nf - 1.0);
    let mut var_plus = mean_var * (nf - 1.0) / nf;
    if m > 1 {
        var_plus += sample_variance(&chain_means);
    }
    if var_plus.is_nan() || var_plus <= 0.0 || !mean_var.is_finite() {
        return f64::NAN;
    }
    let rho_at = |t: usize| 1.0 - (mean_var - mean_acov(t)) / var_plus;
    let mut rho = vec![0.0; n];
    rho[0] = 1.0;
    let mut rho_even = 1.0;
    let mut rho_odd = rho_at(1);
    rho[1] = rho_odd;
    let mut t = 0usize;
    while t + 5 < n && (rho_even + rho_odd) > 0.0 {
        t += 2;
        rho_even = rho_at(t);
        rho_odd = rho_at(t + 1);
        if rho_even + rho_odd >= 0.0 {
            rho[t] = rho_even;
            rho[t + 1] = rho_odd;
        }
    }
    let max_t = t;
    if rho_even > 0.0 {
        rho[max_t] = rho_even;
    }
    // Geyer's initial monotone sequence on the pair sums.
    let mut t = 0usize;
    while t + 4 <= max_t {
        t += 2;
        if rho[t] + rho[t + 1] > rho[t - 2] + rho[t - 1] {
            let average = (rho[t - 2] + rho[t - 1]) / 2.0;
            rho[t] = average;
            rho[t + 1] = average;
        }
    }
    let total = (m * n) as f64;
    let tau = -1.0 + 2.0 * rho[..max_t].iter().sum::<f64>() + rho[max_t];
    let tau = tau.max(1.0 / libm::log10(total));
    total / tau
}

/// Thresholds of the convergence verdict.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct ConvergenceThresholds {
    /// R̂ must be below this (1.01, Vehtari et al. 2021, §4.4).
    pub r_hat_below: f64,
    /// Stored steps per autocorrelation time must reach this (50, the
    /// tolerance of Foreman-Mackey et al.'s `autocorr` module, from memory).
    pub min_autocorrelation_times: f64,
    /// Bulk and tail ESS must reach this (400, Vehtari et al. 2021, §4.4:
    /// 100 per chain for 4 chains).
    pub min_ess: f64,
    /// Acceptance fraction range outside which a warning is given (0.2–0.5,
    /// Foreman-Mackey et al. 2013, §4, rule of thumb).
    pub acceptance_range: (f64, f64),
}

impl Default for ConvergenceThresholds {
    fn default() -> Self {
        ConvergenceThresholds {
            r_hat_below: 1.01,
            min_autocorrelation_times: 50.0,
            min_ess: 400.0,
            acceptance_range: (0.2, 0.5),
        }
    }
}

/// Per-parameter diagnostics.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct ParameterDiagnostics {
    /// Autocorrelation time (stored steps) and window.
    pub autocorrelation: AutocorrelationEstimate,
    /// Stored steps divided by τ.
    pub autocorrelation_times_in_run: f64,
    /// Split rank-normalised R̂.
    pub r_hat: RHat,
    /// Bulk ESS.
    pub ess_bulk: f64,
    /// Tail ESS.
    pub ess_tail: f64,
}

/// What a convergence issue is about.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum IssueKind {
    /// R̂ at or above the threshold (or undefined).
    RHat,
    /// Too few autocorrelation times in the run, or τ not estimable.
    ShortRun,
    /// Bulk or tail ESS below the threshold.
    LowEss,
    /// Acceptance fraction outside the usual range (warning only).
    Acceptance,
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

/// Diagnostics of a whole run.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Diagnostics {
    /// Walkers.
    pub n_walkers: usize,
    /// Stored steps per walker.
    pub n_stored_steps: usize,
    /// Thinning of the stored steps.
    pub thin: usize,
    /// Mean acceptance fraction after burn-in.
    pub acceptance_fraction: f64,
    /// One entry per parameter.
    pub parameters: Vec<ParameterDiagnostics>,
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
    /// Every sampled parameter ([`diagnose_with`]); `parameters[i]` is parameter i.
    Every,
    /// One derived quantity ([`diagnose_derived`]); `parameters` holds its entry.
    Derived {
        /// Its name.
        name: String,
        /// How thoroughly.
        depth: DiagnosisDepth,
    },
}

impl Diagnostics {
    /// A plain-text verdict: "converged" or "NOT converged" (with "judged on NAME alone" when
    /// only a derived quantity was checked) followed by the advice lines.
    pub fn verdict(&self) -> String {
        let mut text = if self.converged {
            "converged".to_string()
        } else {
            "NOT converged".to_string()
        };
        if let DiagnosedQuantities::Derived { name, depth } = &self.quantities {
            text.push_str(&match depth {
                DiagnosisDepth::Full => format!(" (judged on {name} alone)"),
                DiagnosisDepth::Quick => {
                    format!(" (judged on {name} alone, by split R̂ and τ)")
                }
            });
        }
        for issue in self.issues.iter().chain(&self.warnings) {
            text.push_str("\n- ");
            text.push_str(&issue.advice);
        }
        text
    }
}

/// [`diagnose_with`] with the default thresholds.
pub fn diagnose(chains: &Chains) -> Diagnostics {
    diagnose_with(chains, &ConvergenceThresholds::default())
}

/// Diagnoses every parameter of a run and gives a verdict: not converged if
/// any R̂ ≥ `r_hat_below` (or undefined), any τ unreliable or longer than
/// `1/min_autocorrelation_times` of the run, or any ESS below `min_ess`.
pub fn diagnose_with(chains: &Chains, thresholds: &ConvergenceThresholds) -> Diagnostics {
    let mut parameters = Vec::with_capacity(chains.dim);
    let mut issues = Vec::new();
    for param in 0..chains.dim {
        let traces = chains.parameter_traces(param);
        let (diagnostics, found) = diagnose_traces(
            &traces,
            &format!("parameter {param}"),
            chains.thin,
            thresholds,
            DiagnosisDepth::Full,
        );
        parameters.push(diagnostics);
        issues.extend(found.into_iter().map(|issue| ConvergenceIssue {
            parameter: Some(param),
            ..issue
        }));
    }
    finish_diagnostics(
        chains,
        parameters,
        issues,
        thresholds,
        DiagnosedQuantities::Every,
    )
}

/// Diagnoses a run by one derived quantity only (e.g. e = h² + k² in injection–recovery, where
/// only e is reported): the same checks as [`diagnose_with`], applied to `traces` (one per
/// walker, stored steps of `chains`), named `name` in the advice. The verdict says so.
pub fn diagnose_derived(
    chains: &Chains,
    name: &str,
    traces: &[Vec<f64>],
    thresholds: &ConvergenceThresholds,
    depth: DiagnosisDepth,
) -> Diagnostics {
    let (diagnostics, issues) = diagnose_traces(traces, name, chains.thin, thresholds, depth);
    finish_diagnostics(
        chains,
        vec![diagnostics],
        issues,
        thresholds,
        DiagnosedQuantities::Derived {
            name: name.to_string(),
            depth,
        },
    )
}

/// How thoroughly one quantity is diagnosed.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum DiagnosisDepth {
    /// τ, rank-normalised split R̂ (bulk and folded) and bulk/tail ESS (Vehtari et al. 2021):
    /// for a result that is looked at or quoted.
    Full,
    /// τ, classic split R̂ of the draws and of the draws folded about their middle draw (the
    /// median to within one draw; Gelman et al.
    /// 2013, Bayesian Data Analysis, 3rd ed., §11.4), and ESS = N/τ for both bulk and tail
    /// (Foreman-Mackey et al. 2013, PASP 125, 306, §3; Goodman & Weare 2010): no sorting and
    /// one set of FFTs instead of four, for the thousands of runs of injection–recovery.
    Quick,
}

/// τ, split R̂ and bulk/tail ESS of one quantity at `depth`, and the issues it raises (their
/// `parameter` left unset); `subject` names it in the advice, `thin` is the chains' thinning.
pub fn diagnose_traces(
    traces: &[Vec<f64>],
    subject: &str,
    thin: usize,
    thresholds: &ConvergenceThresholds,
    depth: DiagnosisDepth,
) -> (ParameterDiagnostics, Vec<ConvergenceIssue>) {
    let n = common_length(traces);
    let autocorrelation = integrated_autocorrelation_time(traces);
    let (r_hat, ess_bulk, ess_tail) = match depth {
        DiagnosisDepth::Full => {
            // Split, rank and rank-normalise once for R̂, the bulk ESS and the tail ESS.
            let split = SplitDraws::new(traces);
            let normalized = split.normalized();
            let r_hat = split.r_hat_from(&normalized);
            (r_hat, effective_sample_size(&normalized), split.ess_tail())
        }
        DiagnosisDepth::Quick => {
            let ess = if autocorrelation.tau.is_nan() {
                f64::NAN
            } else {
                (traces.len() * n) as f64 / autocorrelation.tau.max(1.0)
            };
            (classic_split_r_hat(traces), ess, ess)
        }
    };
    let diagnostics = ParameterDiagnostics {
        autocorrelation,
        autocorrelation_times_in_run: n as f64 / autocorrelation.tau,
        r_hat,
        ess_bulk,
        ess_tail,
    };
    let issues = convergence_issues(subject, &diagnostics, thin, thresholds);
    (diagnostics, issues)
}

/// Classic split R̂ (Gelman et al. 2013, BDA3 §11.4) of the draws and of the draws folded about
/// their middle draw, for [`DiagnosisDepth::Quick`]: no ranks, no full sort.
fn classic_split_r_hat(traces: &[Vec<f64>]) -> RHat {
    let split = split_chains(traces);
    let bulk = split_r_hat_of(&split);
    let mut pooled: Vec<f64> = split.iter().flatten().copied().collect();
    let tail = if pooled.is_empty() || pooled.iter().any(|x| x.is_nan()) {
        f64::NAN
    } else {
        let middle = pooled.len() / 2;
        let median = *pooled.select_nth_unstable_by(middle, f64::total_cmp).1;
        let folded: Vec<Vec<f64>> = split
            .iter()
            .map(|c| c.iter().map(|x| (x - median).abs()).collect())
            .collect();
        split_r_hat_of(&folded)
    };
    RHat {
        bulk,
        tail,
        max: bulk.max(tail),
    }
}

/// The blocking issues of one quantity's diagnostics (their `parameter` left unset).
fn convergence_issues(
    subject: &str,
    diagnostics: &ParameterDiagnostics,
    thin: usize,
    thresholds: &ConvergenceThresholds,
) -> Vec<ConvergenceIssue> {
    let ParameterDiagnostics {
        autocorrelation,
        autocorrelation_times_in_run: times,
        r_hat,
        ess_bulk: bulk,
        ess_tail: tail,
    } = *diagnostics;
    let mut issues = Vec::new();
    if r_hat.max.is_nan() || r_hat.max >= thresholds.r_hat_below {
        issues.push(ConvergenceIssue {
            kind: IssueKind::RHat,
            parameter: None,
            value: r_hat.max,
            threshold: thresholds.r_hat_below,
            advice: format!(
                "{subject}: walkers disagree (R̂ = {:.3}, needs < {}); run longer \
                 (raise n_steps), lengthen the burn-in (n_burn) or start nearer the best fit; \
                 if it stays high the posterior may have several modes — look at the traces",
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
                 so the run spans only {:.1} τ (needs ≥ {}); raise n_steps to at least {needed}",
                autocorrelation.tau, times, thresholds.min_autocorrelation_times
            ),
        });
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
                 (needs ≥ {}); raise n_steps or n_walkers",
                thresholds.min_ess
            ),
        });
    }
    issues
}

/// The acceptance warnings and the verdict.
fn finish_diagnostics(
    chains: &Chains,
    parameters: Vec<ParameterDiagnostics>,
    issues: Vec<ConvergenceIssue>,
    thresholds: &ConvergenceThresholds,
    quantities: DiagnosedQuantities,
) -> Diagnostics {
    let n = chains.n_stored_steps;
    let thin = chains.thin;
    let acceptance_fraction = chains.acceptance_fraction();
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
                 the posterior may be multimodal or very narrow in some direction — start nearer \
                 the best fit with smaller scales, or check the model"
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
                 low-dimensional, nearly Gaussian posteriors; no action needed if R̂ and τ are fine"
            ),
        });
    }
    Diagnostics {
        n_walkers: chains.n_walkers,
        n_stored_steps: n,
        thin,
        acceptance_fraction,
        parameters,
        converged: issues.is_empty(),
        issues,
        warnings,
        thresholds: *thresholds,
        quantities,
    }
}

/// The standard normal quantile Φ⁻¹(p): starting value from Abramowitz &
/// Stegun (1964) 26.2.23 (|error| < 4.5·10⁻⁴), refined by two Halley steps
/// on Φ(x) = ½ erfc(−x/√2) with `libm::erfc` (cubic convergence: 4.5·10⁻⁴ →
/// ~10⁻¹⁰ → machine precision).
pub fn standard_normal_quantile(p: f64) -> f64 {
    if !(p > 0.0 && p < 1.0) {
        return if p == 0.0 {
            f64::NEG_INFINITY
        } else if p == 1.0 {
            f64::INFINITY
        } else {
            f64::NAN
        };
    }
    if p > 0.5 {
        return -standard_normal_quantile(1.0 - p);
    }
    let t = libm::sqrt(-2.0 * libm::log(p));
    let mut x = -(t
        - (2.515_517 + 0.802_853 * t + 0.010_328 * t * t)
            / (1.0 + 1.432_788 * t + 0.189_269 * t * t + 0.001_308 * t * t * t));
    for _ in 0..2 {
        let cdf = 0.5 * libm::erfc(-x / std::f64::consts::SQRT_2);
        let pdf = libm::exp(-0.5 * x * x) / libm::sqrt(2.0 * std::f64::consts::PI);
        let f = cdf - p;
        x -= f / (pdf * (1.0 + x * f / (2.0 * pdf)));
    }
    x
}

fn common_length(traces: &[Vec<f64>]) -> usize {
    traces.iter().map(Vec::len).min().unwrap_or(0)
}

fn mean(x: &[f64]) -> f64 {
    x.iter().sum::<f64>() / x.len() as f64
}

fn sample_variance(x: &[f64]) -> f64 {
    let m = mean(x);
    x.iter().map(|v| (v - m) * (v - m)).sum::<f64>() / (x.len() as f64 - 1.0)
}

/// Each trace cut into its first and last halves (the middle draw dropped
/// when the length is odd), Vehtari et al. 2021, §4.1.
fn split_chains(traces: &[Vec<f64>]) -> Vec<Vec<f64>> {
    let n = common_length(traces);
    let half = n / 2;
    traces
        .iter()
        .flat_map(|t| [t[..half].to_vec(), t[n - half..n].to_vec()])
        .collect()
}

/// Classic split-R̂ formula on already split chains (Vehtari et al. 2021,
/// eqs. 3–4): √(((N−1)/N W + B/N) / W).
fn split_r_hat_of(chains: &[Vec<f64>]) -> f64 {
    let n = common_length(chains);
    let m = chains.len();
    if m < 2 || n < 2 {
        return f64::NAN;
    }
    let means: Vec<f64> = chains.iter().map(|c| mean(&c[..n])).collect();
    let between = n as f64 * sample_variance(&means);
    let within = chains.iter().map(|c| sample_variance(&c[..n])).sum::<f64>() / m as f64;
    let nf = n as f64;
    let var_plus = (nf - 1.0) / nf * within + between / nf;
    libm::sqrt(var_plus / within)
}

/// The `prob`-quantile of `len` values in ascending order, value i given by `at(i)`, by linear
/// interpolation between order statistics (Hyndman & Fan 1996, The American Statistician 50, 361,
/// definition 7; NumPy's default); NaN for no values. The one implementation of the crate's sample
/// quantiles.
pub fn quantile_type7(len: usize, at: impl Fn(usize) -> f64, prob: f64) -> f64 {
    if len == 0 {
        return f64::NAN;
    }
    let h = (len - 1) as f64 * prob;
    let lo = libm::floor(h) as usize;
    let hi = (lo + 1).min(len - 1);
    at(lo) + (h - lo as f64) * (at(hi) - at(lo))
}

/// [`quantile_type7`] of a sorted slice.
pub fn quantile_sorted(sorted: &[f64], prob: f64) -> f64 {
    quantile_type7(sorted.len(), |i| sorted[i], prob)
}

/// Pooled draws of several equal-length chains in ascending order, each with its place
/// (chain · n + index), sorted once.
struct RankedDraws {
    order: Vec<(f64, usize)>,
    n: usize,
}

impl RankedDraws {
    fn new(chains: &[Vec<f64>]) -> Self {
        let n = common_length(chains);
        let mut order: Vec<(f64, usize)> = chains
            .iter()
            .enumerate()
            .flat_map(|(c, chain)| {
                chain[..n]
                    .iter()
                    .enumerate()
                    .map(move |(i, &x)| (x, c * n + i))
            })
            .collect();
        // Equal values need no particular order: they share their averaged rank.
        order.sort_unstable_by(|a, b| a.0.total_cmp(&b.0));
        RankedDraws { order, n }
    }

    fn len(&self) -> usize {
        self.order.len()
    }

    /// Quantile of the pooled draws ([`quantile_type7`]).
    fn quantile(&self, prob: f64) -> f64 {
        quantile_type7(self.order.len(), |i| self.order[i].0, prob)
    }

    /// The draws folded about `centre`, |x − centre|, ranked by merging the two monotone runs
    /// below and above the centre (no second sort); with non-finite draws or centre, by sorting.
    fn folded(&self, centre: f64) -> RankedDraws {
        let order = &self.order;
        let fold = |&(x, place): &(f64, usize)| ((x - centre).abs(), place);
        // Non-finite values break the two monotone runs (∞ − ∞ is NaN): sort those instead.
        if !centre.is_finite() || order.iter().any(|(x, _)| !x.is_finite()) {
            let mut folded: Vec<(f64, usize)> = order.iter().map(fold).collect();
            folded.sort_unstable_by(|a, b| a.0.total_cmp(&b.0));
            return RankedDraws {
                order: folded,
                n: self.n,
            };
        }
        let split = order.partition_point(|&(x, _)| x < centre);
        let mut below = order[..split].iter().rev().map(fold).peekable();
        let mut above = order[split..].iter().map(fold).peekable();
        let mut merged = Vec::with_capacity(order.len());
        loop {
            let next = match (below.peek(), above.peek()) {
                (Some(b), Some(a)) => {
                    if b.0 <= a.0 {
                        below.next()
                    } else {
                        above.next()
                    }
                }
                (Some(_), None) => below.next(),
                (None, Some(_)) => above.next(),
                (None, None) => break,
            };
            merged.extend(next);
        }
        RankedDraws {
            order: merged,
            n: self.n,
        }
    }

    /// Rank normalisation (Vehtari et al. 2021, eq. 14): pooled ranks r (ties averaged) mapped
    /// to Φ⁻¹((r − 3/8)/(S + 1/4)), returned chain by chain.
    fn normalized(&self, scores: &mut NormalScores) -> Vec<Vec<f64>> {
        let order = &self.order;
        let total = order.len();
        let mut z = vec![0.0; total];
        let mut i = 0;
        while i < total {
            let mut j = i;
            while j + 1 < total && order[j + 1].0 == order[i].0 {
                j += 1;
            }
            // Ranks i+1 ..= j+1 share their average (i + j)/2 + 1, i.e. twice it is i + j + 2.
            let value = scores.at_twice_rank(i + j + 2);
            for item in &order[i..=j] {
                z[item.1] = value;
            }
            i = j + 1;
        }
        z.chunks(self.n.max(1)).map(<[f64]>::to_vec).collect()
    }
}

/// The normal scores Φ⁻¹((r − 3/8)/(S + 1/4)) of S pooled draws (Blom's scores, as in Vehtari
/// et al. 2021, eq. 14), computed once per rank r (half ranks included, for ties) and shared by
/// the bulk and the folded rank normalisation. Ranks above the middle take the negated score of
/// rank S + 1 − r (Φ⁻¹(1 − p) = −Φ⁻¹(p)), which also keeps the upper tail as accurate as the
/// lower one.
struct NormalScores {
    total: usize,
    /// By twice the rank; NaN until computed.
    by_twice_rank: Vec<f64>,
}

impl NormalScores {
    fn new(total: usize) -> Self {
        NormalScores {
            total,
            by_twice_rank: vec![f64::NAN; 2 * total + 3],
        }
    }

    /// The score of rank `twice_rank / 2` (1 ≤ rank ≤ S).
    fn at_twice_rank(&mut self, twice_rank: usize) -> f64 {
        let mirror = 2 * (self.total + 1) - twice_rank;
        if twice_rank > mirror {
            return -self.at_twice_rank(mirror);
        }
        let cached = self.by_twice_rank[twice_rank];
        if !cached.is_nan() {
            return cached;
        }
        let rank = twice_rank as f64 / 2.0;
        let value = standard_normal_quantile((rank - 0.375) / (self.total as f64 + 0.25));
        self.by_twice_rank[twice_rank] = value;
        value
    }
}

/// Lags summed directly before [`PooledAutocovariance`] switches to FFTs for all lags.
///
/// A direct lag costs n multiply-adds per chain, the FFTs about 5 · 2n · log₂(2n) operations per
/// pair of chains, i.e. as much as a few dozen lags; but a window that passes a dozen lags
/// usually runs to hundreds (ensemble walkers have τ of tens of steps), so the switch comes
/// early: fast-mixing chains stay on direct sums, the others pay for few wasted lags.
const DIRECT_LAGS: usize = 16;

/// The first `n` draws of each trace, centred on their own mean.
fn centre(traces: &[Vec<f64>], n: usize) -> Vec<Vec<f64>> {
    traces
        .iter()
        .map(|t| {
            let m = mean(&t[..n]);
            t[..n].iter().map(|x| x - m).collect()
        })
        .collect()
}

/// Σᵢ x_i x_{i+lag} over the overlap.
fn lag_product(x: &[f64], lag: usize) -> f64 {
    x[..x.len() - lag]
        .iter()
        .zip(&x[lag..])
        .map(|(a, b)| a * b)
        .sum()
}

/// A weighted sum over chains of biased autocovariances,
/// Γ(t) = Σ_c w_c γ_c(t) with γ_c(t) = (1/n) Σ_{i<n−t} (x_i − x̄)(x_{i+t} − x̄),
/// each lag computed when asked for.
///
/// Every window that uses it (Sokal's for τ, Geyer's initial sequence for the ESS) needs only the
/// pooled sum, and stops after a few autocorrelation times. Short lags are summed directly; the
/// first lag beyond [`DIRECT_LAGS`] gets all lags at once by the Wiener–Khinchin theorem, with
/// the power spectra summed before a single inverse transform, and two real chains packed into
/// each complex forward transform (|A(k)|² + |B(k)|² = (|Z(k)|² + |Z(N−k)|²)/2 for z = a + ib,
/// Press et al. 2007, Numerical Recipes, 3rd ed., §12.3.2, "FFT of two real functions
/// simultaneously" — section number from memory).
///
/// The transforms are zero-padded to at least n + L points, which leaves lags ≤ L free of
/// wrap-around: first with L = n/4 (windows rarely reach further; half the size of a full
/// transform), and to 2n only when a longer lag is asked for.
struct PooledAutocovariance {
    centred: Vec<Vec<f64>>,
    weights: Vec<f64>,
    n: usize,
    short_lags: std::cell::OnceCell<Vec<f64>>,
    all_lags: std::cell::OnceCell<Vec<f64>>,
}

impl PooledAutocovariance {
    /// `centred[c]` (all of one length n, centred on their means) with weights `weights[c]` ≥ 0.
    fn new(centred: Vec<Vec<f64>>, weights: Vec<f64>) -> Self {
        let n = centred.first().map_or(0, Vec::len);
        PooledAutocovariance {
            centred,
            weights,
            n,
            short_lags: std::cell::OnceCell::new(),
            all_lags: std::cell::OnceCell::new(),
        }
    }

    /// Γ(lag); 0 beyond the last lag.
    fn at(&self, lag: usize) -> f64 {
        if lag >= self.n {
            return 0.0;
        }
        if lag < DIRECT_LAGS {
            return self
                .centred
                .iter()
                .zip(&self.weights)
                .filter(|(_, &w)| w != 0.0)
                .map(|(x, &w)| w * lag_product(x, lag))
                .sum::<f64>()
                / self.n as f64;
        }
        // Short chains (n/4 below the direct lags) go straight to all lags.
        if self.n / 4 >= DIRECT_LAGS {
            let short = self.short_lags.get_or_init(|| self.lags_up_to(self.n / 4));
            if lag < short.len() {
                return short[lag];
            }
        }
        self.all_lags.get_or_init(|| self.lags_up_to(self.n - 1))[lag]
    }

    /// Γ(t) for t = 0..=max_lag by FFTs zero-padded to at least n + max_lag points (see the
    /// type's notes).
    fn lags_up_to(&self, max_lag: usize) -> Vec<f64> {
        let n = self.n;
        let size = (n + max_lag).next_power_of_two();
        let mut power = vec![0.0; size];
        let mut re = vec![0.0; size];
        let mut im = vec![0.0; size];
        let fft = Fft::new(size);
        let used: Vec<(&Vec<f64>, f64)> = self
            .centred
            .iter()
            .zip(self.weights.iter().copied())
            .filter(|&(_, w)| w != 0.0)
            .collect();
        for pair in used.chunks(2) {
            re.fill(0.0);
            im.fill(0.0);
            let scaled = |x: &Vec<f64>, w: f64, out: &mut [f64]| {
                let s = libm::sqrt(w);
                for (o, v) in out.iter_mut().zip(x) {
                    *o = s * v;
                }
            };
            scaled(pair[0].0, pair[0].1, &mut re);
            if let Some(&(x, w)) = pair.get(1) {
                scaled(x, w, &mut im);
            }
            fft.transform(&mut re, &mut im, false);
            for (k, p) in power.iter_mut().enumerate() {
                let j = (size - k) & (size - 1);
                *p += 0.5 * (re[k] * re[k] + im[k] * im[k] + re[j] * re[j] + im[j] * im[j]);
            }
        }
        im.fill(0.0);
        fft.transform(&mut power, &mut im, true);
        power.truncate(max_lag + 1);
        for p in &mut power {
            *p /= (size * n) as f64;
        }
        power
    }
}

/// Iterative radix-2 Cooley–Tukey FFT (Cooley & Tukey 1965, Math. Comp. 19, 297) of one
/// power-of-two size, with its twiddle factors e^(−2πik/len) computed once (by `libm`, so the
/// same bits natively and in WebAssembly) for all the transforms of that size, laid out stage by
/// stage so that every butterfly loop runs over contiguous slices.
struct Fft {
    /// Stage with blocks of length `len` = 2, 4, …, n: entries `len/2 − 1 .. len − 1`.
    cos: Vec<f64>,
    sin: Vec<f64>,
}

impl Fft {
    /// Twiddles for transforms of size `n` (a power of two).
    fn new(n: usize) -> Self {
        let mut cos = Vec::with_capacity(n);
        let mut sin = Vec::with_capacity(n);
        let mut len = 2;
        while len <= n {
            for k in 0..len / 2 {
                let (s, c) = libm::sincos(-2.0 * core::f64::consts::PI * k as f64 / len as f64);
                cos.push(c);
                sin.push(s);
            }
            len <<= 1;
        }
        Fft { cos, sin }
    }

    /// Transforms (`re`, `im`) in place; `inverse` flips the sign of the exponent and does not
    /// scale.
    fn transform(&self, re: &mut [f64], im: &mut [f64], inverse: bool) {
        let n = re.len();
        debug_assert_eq!(n, self.cos.len() + 1);
        let mut j = 0;
        for i in 1..n {
            let mut bit = n >> 1;
            while j & bit != 0 {
                j ^= bit;
                bit >>= 1;
            }
            j |= bit;
            if i < j {
                re.swap(i, j);
                im.swap(i, j);
            }
        }
        let sign = if inverse { -1.0 } else { 1.0 };
        let mut len = 2;
        while len <= n {
            let half = len / 2;
            let w_re = &self.cos[half - 1..len - 1];
            let w_sin = &self.sin[half - 1..len - 1];
            for (block_re, block_im) in re.chunks_exact_mut(len).zip(im.chunks_exact_mut(len)) {
                let (a_re, b_re) = block_re.split_at_mut(half);
                let (a_im, b_im) = block_im.split_at_mut(half);
                for k in 0..half {
                    let (wr, wi) = (w_re[k], sign * w_sin[k]);
                    let t_re = b_re[k] * wr - b_im[k] * wi;
                    let t_im = b_re[k] * wi + b_im[k] * wr;
                    b_re[k] = a_re[k] - t_re;
                    b_im[k] = a_im[k] - t_im;
                    a_re[k] += t_re;
                    a_im[k] += t_im;
                }
            }
            len <<= 1;
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use approx::assert_relative_eq;

    /// Φ⁻¹ against tabulated values (Abramowitz & Stegun 1964, Table 26.5 /
    /// common practice): Φ⁻¹(0.975) = 1.959963984540054, Φ⁻¹(0.5) = 0,
    /// Φ⁻¹(1e-10) = −6.361340902404056 (scipy.stats.norm.ppf, scipy 1.17.1).
    #[test]
    fn normal_quantile_matches_reference_values() {
        assert_relative_eq!(
            standard_normal_quantile(0.975),
            1.959_963_984_540_054,
            epsilon = 1e-14
        );
        assert!(standard_normal_quantile(0.5).abs() < 1e-15);
        assert_relative_eq!(
            standard_normal_quantile(1e-10),
            -6.361_340_902_404_056,
            max_relative = 1e-13
        );
    }

    proptest::proptest! {
        /// Φ(Φ⁻¹(p)) = p to a relative 1e-13 across the range used by rank
        /// normalisation (p ≥ 0.375/(S + 0.25) for S up to 10⁹ draws).
        #[test]
        fn normal_quantile_inverts_the_cdf(log10_p in -9.5f64..-0.302) {
            let p = libm::pow(10.0, log10_p);
            for q in [p, 1.0 - p] {
                let x = standard_normal_quantile(q);
                let back = 0.5 * libm::erfc(-x / std::f64::consts::SQRT_2);
                proptest::prop_assert!((back - q).abs() <= 1e-13 * q.min(1.0 - q) + 1e-16, "{q}: {back}");
            }
        }
    }

    /// The pooled autocovariance is Σ_c w_c γ_c(t) of the biased estimator
    /// γ(t) = (1/n) Σ (x_i − x̄)(x_{i+t} − x̄) (definition, common practice), by direct sums below
    /// DIRECT_LAGS and by paired FFTs above, for odd and even chain counts, and 0 beyond the last
    /// lag. Tolerance: FFT rounding, ~1e-15 of Σ x², far below 1e-12.
    #[test]
    fn pooled_autocovariance_is_the_weighted_biased_estimator() {
        let n = 137;
        let chains: Vec<Vec<f64>> = (0..3)
            .map(|c| {
                (0..n)
                    .map(|i| libm::sin(i as f64 * (0.7 + 0.1 * c as f64)) + 0.01 * (i * c) as f64)
                    .collect()
            })
            .collect();
        for n_chains in [1, 2, 3] {
            let traces = &chains[..n_chains];
            let weights: Vec<f64> = (0..n_chains).map(|c| 0.5 + c as f64).collect();
            let pooled = PooledAutocovariance::new(centre(traces, n), weights.clone());
            for t in [0, 1, 5, 15, 16, 47, 48, 100, 136] {
                let direct: f64 = traces
                    .iter()
                    .zip(&weights)
                    .map(|(x, w)| {
                        let m = mean(x);
                        w * (0..n - t).map(|i| (x[i] - m) * (x[i + t] - m)).sum::<f64>() / n as f64
                    })
                    .sum();
                assert!(
                    (pooled.at(t) - direct).abs() < 1e-12,
                    "{n_chains} chains, lag {t}: {} vs {direct}",
                    pooled.at(t)
                );
            }
            assert_eq!(pooled.at(n), 0.0);
        }
    }

    /// Ranking the folded draws by merging the runs below and above the centre gives exactly
    /// the normal scores of ranking them by a sort (ties across the centre included), and the
    /// shared score table (which mirrors ranks above the middle) gives the scores computed one by
    /// one, to rounding (definition of the rank normalisation, Vehtari et al. 2021, eq. 14).
    #[test]
    fn folded_ranking_by_merge_equals_sorting() {
        // Values on a coarse grid so that ties are common, also |x − c| ties across c.
        let chains: Vec<Vec<f64>> = (0..5)
            .map(|c| {
                (0..201)
                    .map(|i| (((i * 37 + c * 11) % 23) as f64 - 11.0) * 0.25)
                    .collect()
            })
            .collect();
        let ranked = RankedDraws::new(&chains);
        for centre in [ranked.quantile(0.5), 0.0, 0.125, -3.0, 10.0] {
            let merged = ranked.folded(centre);
            let mut sorted: Vec<(f64, usize)> = ranked
                .order
                .iter()
                .map(|&(x, place)| ((x - centre).abs(), place))
                .collect();
            sorted.sort_by(|a, b| a.0.total_cmp(&b.0));
            let by_sort = RankedDraws {
                order: sorted,
                n: ranked.n,
            };
            let values = |r: &RankedDraws| r.order.iter().map(|p| p.0).collect::<Vec<_>>();
            assert_eq!(values(&merged), values(&by_sort), "centre {centre}");
            let total = ranked.len();
            assert_eq!(
                merged.normalized(&mut NormalScores::new(total)),
                by_sort.normalized(&mut NormalScores::new(total)),
                "centre {centre}"
            );
        }
        let mut scores = NormalScores::new(1001);
        for twice_rank in [2, 3, 500, 1001, 1002, 1003, 1500, 2002] {
            let rank = twice_rank as f64 / 2.0;
            let p = (rank - 0.375) / 1001.25;
            let direct = standard_normal_quantile(p);
            assert!(
                (scores.at_twice_rank(twice_rank) - direct).abs() < 1e-12,
                "rank {rank}"
            );
        }
    }

    #[test]
    fn ranks_with_ties_are_averaged() {
        let chains = [vec![1.0, 2.0], vec![2.0, 3.0]];
        let ranked = RankedDraws::new(&chains);
        let z = ranked.normalized(&mut NormalScores::new(ranked.len()));
        assert_eq!(z[0][1], z[1][0]);
        assert!(z[0][0] < z[0][1] && z[1][0] < z[1][1]);
        assert_relative_eq!(z[0][1], 0.0, epsilon = 1e-15);
    }

    #[test]
    fn constant_chains_give_nan_not_a_panic() {
        let traces = vec![vec![1.0; 20]; 4];
        assert!(integrated_autocorrelation_time(&traces).tau.is_nan());
        assert!(effective_sample_size(&traces).is_nan());
        assert!(ess_tail(&traces).is_nan());
        assert!(rank_normalized_split_r_hat(&traces).max.is_nan());
    }
}
