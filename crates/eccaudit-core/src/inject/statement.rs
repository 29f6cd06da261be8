//! The eccentricity statement: at most three sentences one can quote for the recommended
//! estimator (its belt-calibrated interval, its measured bias, the calibrated circular-vs-
//! eccentric decision), a compact table of every estimator, and a short methods paragraph.
//! Every number is computed from the simulations of this table's fitted orbit and noise, with
//! its Monte-Carlo error; nothing is quoted from a posterior run that failed its convergence
//! rule.

use serde::Serialize;

use super::belt::{belt_estimate, Belt, BeltCellInput, BeltEstimate, BeltInterval};
use super::context::AuditContext;
use super::design::{GridCell, InjectionDesign};
use super::engine::TrialRecord;
use super::estimators::{EccentricityEstimate, OutputInfo};
use super::summary::{InjectionSummary, Rate};
use super::InjectError;
use crate::fit::LUCY_SWEENEY_THRESHOLD;
use crate::format::grid_value;
use crate::random::stream_rng;

/// Confidence level of the belt intervals.
pub const BELT_LEVEL: f64 = 0.95;
/// Level of the circular-vs-eccentric decision.
pub const DECISION_ALPHA: f64 = 0.05;
/// z of the two-sided 95% normal interval (common practice).
const Z95: f64 = 1.959_963_984_540_054;
/// Bootstrap resamples for the Monte-Carlo errors of the recommended interval's ends.
pub const BOOTSTRAP_RESAMPLES: usize = 20;
/// Random stream of the bootstrap (trials use 0, 1, …; the real data u64::MAX − 1).
const BOOTSTRAP_STREAM: u64 = u64::MAX - 2;

/// The fitted orbit of the real data the simulations were made at.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct FittedOrbit {
    /// Fitted period [d].
    pub period: f64,
    /// Fitted semi-amplitude [m/s].
    pub semi_amplitude: f64,
    /// Fitted ω [rad] (used only when the design has an ω axis).
    pub omega: f64,
    /// Lucy–Sweeney p of the fitted eccentricity (2-D Wald form), when computed.
    pub lucy_sweeney_p: Option<f64>,
}

/// A Monte-Carlo p-value (k + 1)/(n + 1) of k simulations at least as extreme as the data in
/// n (Davison & Hinkley 1997, Bootstrap Methods and their Application, eq. 4.11; from memory),
/// with its binomial standard error and the Wilson (1927, JASA 22, 209) 95% interval of k/n.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct MonteCarloP {
    /// (k + 1)/(n + 1).
    pub value: f64,
    /// Simulations at least as extreme as the data.
    pub exceedances: usize,
    /// Simulations.
    pub n: usize,
    /// √(p(1 − p)/n).
    pub standard_error: f64,
    /// Wilson 95% interval of k/n.
    pub wilson95: [f64; 2],
}

/// The Wilson score interval of a binomial share k/n at normal quantile z (Wilson 1927, JASA
/// 22, 209): (k + z²/2 ± z √(k(n − k)/n + z²/4)) / (n + z²).
pub fn wilson_interval(k: usize, n: usize, z: f64) -> [f64; 2] {
    if n == 0 {
        return [0.0, 1.0];
    }
    let (k, n) = (k as f64, n as f64);
    let z2 = z * z;
    let centre = (k + 0.5 * z2) / (n + z2);
    let half = z * libm::sqrt(k * (n - k) / n + 0.25 * z2) / (n + z2);
    [(centre - half).max(0.0), (centre + half).min(1.0)]
}

impl MonteCarloP {
    /// From k exceedances in n simulations.
    pub fn new(k: usize, n: usize) -> Self {
        let value = (k + 1) as f64 / (n + 1) as f64;
        MonteCarloP {
            value,
            exceedances: k,
            n,
            standard_error: libm::sqrt(value * (1.0 - value) / n.max(1) as f64),
            wilson95: wilson_interval(k, n, Z95),
        }
    }

    /// True when the Wilson interval lies wholly on one side of `alpha`: more simulations would
    /// not change the decision at that level (at 95% confidence).
    pub fn resolves(&self, alpha: f64) -> bool {
        self.wilson95[1] < alpha || self.wilson95[0] > alpha
    }
}

/// The statistic of the circular-vs-eccentric decision.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct DecisionStatistic {
    /// Index of the output it is read from.
    pub output: usize,
    /// What it is, in words.
    pub description: String,
    /// True when smaller values are more eccentric (a p-value).
    pub smaller_is_extreme: bool,
}

/// The decision statistic of a set of outputs: the Wald statistic W = zᵀΣ⁻¹z of the
/// least-squares fit, read as its asymptotic p = exp(−W/2) from the `lucy_sweeney` output
/// (monotone in W); without that output, the least-squares ê itself.
pub fn decision_statistic(outputs: &[OutputInfo]) -> Option<DecisionStatistic> {
    if let Some(i) = outputs
        .iter()
        .position(|o| o.name == "lucy_sweeney" && o.extra_names.first().is_some_and(|n| n == "p"))
    {
        return Some(DecisionStatistic {
            output: i,
            description: "the Wald statistic W = zᵀΣ⁻¹z of the least-squares (e cos ω, e sin ω) \
                          and its covariance"
                .into(),
            smaller_is_extreme: true,
        });
    }
    outputs
        .iter()
        .position(|o| o.name == "lsq")
        .map(|i| DecisionStatistic {
            output: i,
            description: "the least-squares eccentricity ê".into(),
            smaller_is_extreme: false,
        })
}

impl DecisionStatistic {
    fn value(&self, e: &EccentricityEstimate) -> f64 {
        if self.smaller_is_extreme {
            e.extra.first().copied().unwrap_or(f64::NAN)
        } else {
            e.point
        }
    }

    /// The Monte-Carlo p of the observed estimate against circular simulations.
    pub fn p_value(
        &self,
        observed: &EccentricityEstimate,
        circular: &[&TrialRecord],
    ) -> Option<MonteCarloP> {
        let t0 = self.value(observed);
        if !t0.is_finite() {
            return None;
        }
        let sims: Vec<f64> = circular
            .iter()
            .filter_map(|r| r.outcomes.get(self.output).and_then(|o| o.estimate()))
            .map(|e| self.value(e))
            .filter(|t| !t.is_nan())
            .collect();
        if sims.is_empty() {
            return None;
        }
        let k = sims
            .iter()
            .filter(|&&t| {
                if self.smaller_is_extreme {
                    t <= t0
                } else {
                    t >= t0
                }
            })
            .count();
        Some(MonteCarloP::new(k, sims.len()))
    }
}

/// The calibrated circular-vs-eccentric decision.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct CircularDecision {
    /// The statistic, in words.
    pub statistic: String,
    /// Its Monte-Carlo p against the circular simulations of the full model.
    pub p: MonteCarloP,
    /// True when p ≤ 0.05: a circular orbit is excluded at the 5% level.
    pub circular_excluded: bool,
    /// True when more simulations would not change the decision (Wilson interval clear of 0.05).
    pub resolved: bool,
}

/// The Lucy–Sweeney test beside its false-alarm rate measured at this sampling.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct LucySweeneyCheck {
    /// Asymptotic p = exp(−W/2) of the real data.
    pub p: f64,
    /// Share of the circular simulations with p ≤ 0.05 (nominally 5%).
    pub false_alarm_rate: Rate,
}

/// One estimator's row of the table.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct EstimatorRow {
    /// Output name.
    pub name: String,
    /// What it is.
    pub label: String,
    /// Its prior.
    pub prior: String,
    /// The estimate on the real data (None when its run failed or did not converge).
    pub value: Option<f64>,
    /// Why no value is quoted, when none is.
    pub value_note: Option<String>,
    /// The belt-calibrated 95% interval on the true e (from all its simulations).
    pub interval: Option<BeltInterval>,
    /// Bootstrap Monte-Carlo errors of the interval's ends (recommended estimator only).
    pub interval_errors: Option<BeltEstimate>,
    /// The injected e nearest the value, where bias, RMSE and coverage are quoted.
    pub at_true_e: f64,
    /// Simulations there.
    pub n_at_true_e: usize,
    /// Bias there (mean estimate − true e).
    pub bias: f64,
    /// Its Monte-Carlo standard error.
    pub bias_standard_error: f64,
    /// RMSE there.
    pub rmse: f64,
    /// Coverage of the estimator's own 95% intervals there.
    pub coverage95: Option<Rate>,
    /// Share of circular simulations it calls eccentric.
    pub false_eccentric_rate: Option<Rate>,
    /// Share of its simulations (all cells) that failed.
    pub failed: Option<Rate>,
    /// Share of its simulations (all cells) whose run missed its convergence rule, left out of
    /// its numbers (None for an estimator without such a rule).
    pub unconverged: Option<Rate>,
}

/// A Bayes factor quoted, or left out with the reason.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct BayesNote {
    /// The prior.
    pub prior: String,
    /// BF₀₁ (circular over eccentric) when quoted.
    pub bf01: Option<f64>,
    /// True when BF₀₁ is only an upper bound.
    pub upper_bound: bool,
    /// The sentence about it.
    pub text: String,
}

/// The statement about the real data.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct EccentricityStatement {
    /// Epochs of the data set.
    pub n_epochs: usize,
    /// The fitted orbit the simulations used.
    pub fitted: FittedOrbit,
    /// The injected K nearest the fitted one (the cells used) [m/s].
    pub semi_amplitude_used: f64,
    /// Base trials per cell.
    pub trials_per_cell: usize,
    /// Extra (adaptive) trials run.
    pub extra_trials: usize,
    /// Master seed.
    pub seed: u64,
    /// The audited companion (1-based) and the companions in the model.
    pub companion: usize,
    /// Companions in the model.
    pub n_companions: usize,
    /// The recommended output's name.
    pub recommended: Option<String>,
    /// How it was chosen.
    pub recommendation_rule: String,
    /// Most circular simulations the decision was allowed (the settings' cap).
    pub max_circular_trials: u64,
    /// The calibrated circular-vs-eccentric decision.
    pub decision: Option<CircularDecision>,
    /// The Lucy–Sweeney test and its measured false-alarm rate.
    pub lucy_sweeney: Option<LucySweeneyCheck>,
    /// One row per output with an estimate on the real data.
    pub rows: Vec<EstimatorRow>,
    /// Bayes factors quoted or left out.
    pub bayes: Vec<BayesNote>,
    /// The quotable sentences (opening warnings, then at most three for the recommended estimator).
    pub sentences: Vec<String>,
    /// The methods paragraph.
    pub methods: String,
    /// The quotable sentences as one paragraph (what the page copies).
    pub paragraph: String,
}

/// The cells the statement uses: the injected K nearest the fitted K (and the ω nearest the
/// fitted ω when the design has an ω axis), sorted by injected e.
pub fn statement_cells(design: &InjectionDesign, fitted: &FittedOrbit) -> Vec<GridCell> {
    let nearest = |values: &[f64], target: f64| {
        values
            .iter()
            .copied()
            .min_by(|a, b| (a - target).abs().total_cmp(&(b - target).abs()))
    };
    let k = nearest(&design.semi_amplitudes, fitted.semi_amplitude);
    let w = nearest(&design.omegas, fitted.omega);
    let mut cells: Vec<GridCell> = design
        .cells()
        .into_iter()
        .filter(|c| Some(c.semi_amplitude) == k && c.omega == w)
        .collect();
    cells.sort_by(|a, b| a.eccentricity.total_cmp(&b.eccentricity));
    cells
}

/// Each cell's estimates of output `output` from `records` (sorted by trial index, so the
/// result does not depend on the order the trials finished in). `converged` is the output's
/// convergence flag ([`OutputInfo::converged_index`]): estimates from runs that missed their
/// convergence rule are left out ([`Outcome::counted`]).
///
/// [`Outcome::counted`]: super::engine::Outcome::counted
pub fn estimates_by_cell(
    cells: &[GridCell],
    records: &[&TrialRecord],
    output: usize,
    converged: Option<usize>,
) -> Vec<Vec<f64>> {
    let mut sorted: Vec<&TrialRecord> = records.to_vec();
    sorted.sort_by_key(|r| r.trial);
    sorted.dedup_by_key(|r| r.trial);
    cells
        .iter()
        .map(|c| {
            sorted
                .iter()
                .filter(|r| r.cell == c.index)
                .filter_map(|r| r.outcomes.get(output).and_then(|o| o.counted(converged)))
                .map(|e| e.point)
                .filter(|x| x.is_finite())
                .collect()
        })
        .collect()
}

/// The recommended output's belt interval at `x0` with the bootstrap standard errors of its
/// ends ([`BOOTSTRAP_RESAMPLES`] resamples on the design's bootstrap stream): what the
/// statement quotes, and what the audit's adaptive rule drives below its target error.
pub fn interval_errors(
    design: &InjectionDesign,
    cells: &[GridCell],
    per_cell: &[Vec<f64>],
    x0: f64,
) -> Option<BeltEstimate> {
    let inputs: Vec<BeltCellInput> = cells
        .iter()
        .zip(per_cell)
        .map(|(c, v)| BeltCellInput {
            e: c.eccentricity,
            estimates: v,
        })
        .collect();
    let mut rng = stream_rng(design.seed, BOOTSTRAP_STREAM);
    belt_estimate(&inputs, BELT_LEVEL, x0, BOOTSTRAP_RESAMPLES, &mut rng)
}

/// The belt of one output over the statement's cells.
pub fn output_belt(cells: &[GridCell], per_cell: &[Vec<f64>], x0: f64) -> Option<Belt> {
    let inputs: Vec<BeltCellInput> = cells
        .iter()
        .zip(per_cell)
        .map(|(c, v)| BeltCellInput {
            e: c.eccentricity,
            estimates: v,
        })
        .collect();
    Belt::new(&inputs, BELT_LEVEL, x0)
}

fn rmse(values: &[f64], truth: f64) -> f64 {
    libm::sqrt(
        values
            .iter()
            .map(|x| (x - truth) * (x - truth))
            .sum::<f64>()
            / values.len() as f64,
    )
}

fn mean_sd(values: &[f64]) -> (f64, f64) {
    let n = values.len() as f64;
    let mean = values.iter().sum::<f64>() / n;
    let sd = if values.len() > 1 {
        libm::sqrt(values.iter().map(|x| (x - mean) * (x - mean)).sum::<f64>() / (n - 1.0))
    } else {
        f64::NAN
    };
    (mean, sd)
}

/// Whether the real-data run of an output can be quoted: it exists and, for a posterior
/// output, met its convergence criterion.
fn quotable(info: &OutputInfo, observed: Option<&EccentricityEstimate>) -> Result<f64, String> {
    let Some(obs) = observed else {
        return Err("the estimator failed on the data".into());
    };
    if let Some(i) = info.extra_names.iter().position(|n| n == "converged") {
        if obs.extra.get(i) != Some(&1.0) {
            return Err(
                "its sampler run on the data did not meet its convergence criterion".into(),
            );
        }
    }
    if obs.point.is_finite() {
        Ok(obs.point)
    } else {
        Err("the estimate is not finite".into())
    }
}

/// The recommendation rule, in words.
pub const RECOMMENDATION_RULE: &str = "the estimator with the smallest root-mean-square error \
    averaged over the injected e inside its own calibrated interval, from the base simulations \
    (the Lucy-Sweeney adopted value, a test, and posterior runs that did not converge on the data \
    are not candidates, nor are estimators counted on fewer than half of the base simulations of \
    an injected e: posterior estimators run at a smaller count per e, or whose runs missed their \
    convergence rule)";

/// The recommended output (index) by [`RECOMMENDATION_RULE`], from `base_records` (the base
/// trials only, so adding extra trials never changes the choice).
pub fn recommend(
    outputs: &[OutputInfo],
    observed: &[Option<EccentricityEstimate>],
    cells: &[GridCell],
    base_records: &[&TrialRecord],
) -> Option<usize> {
    let mut best: Option<(usize, f64)> = None;
    for (i, info) in outputs.iter().enumerate() {
        if info.name == "lucy_sweeney" {
            continue;
        }
        let Ok(x0) = quotable(info, observed.get(i).and_then(Option::as_ref)) else {
            continue;
        };
        let per_cell = estimates_by_cell(cells, base_records, i, info.converged_index());
        let Some(belt) = output_belt(cells, &per_cell, x0) else {
            continue;
        };
        let interval = belt.interval(x0);
        // Estimators counted on a smaller share of the base simulations (the audit's posterior
        // estimators, `injection.posterior.trials_per_cell`, or runs that missed their
        // convergence rule) are shown, not recommended.
        let run_on_fewer = cells.iter().zip(&per_cell).any(|(c, v)| {
            let n_base = base_records.iter().filter(|r| r.cell == c.index).count();
            2 * v.len() < n_base
        });
        if run_on_fewer {
            continue;
        }
        let inside: Vec<f64> = cells
            .iter()
            .zip(&per_cell)
            .filter(|(c, v)| {
                v.len() >= 2 && interval.lower <= c.eccentricity && c.eccentricity <= interval.upper
            })
            .map(|(c, v)| rmse(v, c.eccentricity))
            .collect();
        if inside.is_empty() {
            continue;
        }
        let score = inside.iter().sum::<f64>() / inside.len() as f64;
        if best.is_none_or(|(_, s)| score < s) {
            best = Some((i, score));
        }
    }
    best.map(|(i, _)| i)
}

/// The output the statement quotes: the user's `chosen` one (by name) when given and quotable
/// on the real data, else none (the statement says why); without a choice, [`recommend`].
pub fn choose(
    outputs: &[OutputInfo],
    observed: &[Option<EccentricityEstimate>],
    cells: &[GridCell],
    base_records: &[&TrialRecord],
    chosen: Option<&str>,
) -> Option<usize> {
    match chosen {
        Some(name) => {
            let i = outputs.iter().position(|o| o.name == name)?;
            quotable(&outputs[i], observed.get(i).and_then(Option::as_ref))
                .ok()
                .map(|_| i)
        }
        None => recommend(outputs, observed, cells, base_records),
    }
}

/// The cells of the statement that the recommended output's quoted numbers rest on: those
/// inside its calibrated interval, one on each side of it, and the one nearest its value
/// (indices into `cells`), with the index of the nearest.
pub fn cells_in_use(cells: &[GridCell], interval: &BeltInterval, x0: f64) -> (Vec<usize>, usize) {
    let inside: Vec<usize> = (0..cells.len())
        .filter(|&j| {
            interval.lower <= cells[j].eccentricity && cells[j].eccentricity <= interval.upper
        })
        .collect();
    let nearest = (0..cells.len())
        .min_by(|&a, &b| {
            (cells[a].eccentricity - x0)
                .abs()
                .total_cmp(&(cells[b].eccentricity - x0).abs())
        })
        .unwrap_or(0);
    let mut used: Vec<usize> = Vec::new();
    if let (Some(&first), Some(&last)) = (inside.first(), inside.last()) {
        used.extend(first.saturating_sub(1)..=(last + 1).min(cells.len() - 1));
    }
    used.push(nearest);
    used.sort_unstable();
    used.dedup();
    (used, nearest)
}

/// Builds the statement from the run at the data's fitted orbit.
///
/// `observed` holds one estimate per output of the summary, made on the real data (a `None`
/// where that estimator failed on it); `records` are all trials (base and extra); those with
/// index below `design.n_trials()` are the base trials the recommendation is chosen from.
pub fn eccentricity_statement(
    summary: &InjectionSummary,
    records: &[TrialRecord],
    observed: &[Option<EccentricityEstimate>],
    fitted: FittedOrbit,
    context: &AuditContext,
    chosen: Option<&str>,
    max_circular_trials: u64,
) -> Result<EccentricityStatement, InjectError> {
    if observed.len() != summary.outputs.len() {
        return Err(InjectError::Statement(format!(
            "{} observed estimates for {} outputs",
            observed.len(),
            summary.outputs.len()
        )));
    }
    let design = &summary.design;
    let cells = statement_cells(design, &fitted);
    let Some(first_cell) = cells.first() else {
        return Err(InjectError::Statement(
            "the design has no cell at the fitted semi-amplitude".into(),
        ));
    };
    let semi_amplitude_used = first_cell.semi_amplitude;
    let all: Vec<&TrialRecord> = records.iter().collect();
    if !all.iter().any(|r| cells.iter().any(|c| c.index == r.cell)) {
        return Err(InjectError::Statement(
            "no simulated trials at the fitted semi-amplitude".into(),
        ));
    }
    let n_base = design.n_trials();
    let base: Vec<&TrialRecord> = all.iter().copied().filter(|r| r.trial < n_base).collect();
    let extra_trials = {
        let mut t: Vec<u64> = all
            .iter()
            .filter(|r| r.trial >= n_base)
            .map(|r| r.trial)
            .collect();
        t.sort_unstable();
        t.dedup();
        t.len()
    };
    let recommended = choose(&summary.outputs, observed, &cells, &base, chosen);
    let circular_cell = cells.iter().find(|c| c.eccentricity == 0.0);
    let circular_records: Vec<&TrialRecord> = match circular_cell {
        Some(c) => all.iter().copied().filter(|r| r.cell == c.index).collect(),
        None => Vec::new(),
    };
    let decision = decision_statistic(&summary.outputs).and_then(|stat| {
        let obs = observed.get(stat.output)?.as_ref()?;
        let p = stat.p_value(obs, &circular_records)?;
        Some(CircularDecision {
            statistic: stat.description.clone(),
            p,
            circular_excluded: p.value <= DECISION_ALPHA,
            resolved: p.resolves(DECISION_ALPHA),
        })
    });
    let cell_summary = |cell: &GridCell| summary.cells.iter().find(|c| c.cell.index == cell.index);
    let lucy_index = summary
        .outputs
        .iter()
        .position(|o| o.name == "lucy_sweeney");
    let lucy_sweeney = match (fitted.lucy_sweeney_p, lucy_index, circular_cell) {
        (Some(p), Some(i), Some(c)) => cell_summary(c)
            .and_then(|s| s.outputs[i].false_eccentric_rate)
            .map(|rate| LucySweeneyCheck {
                p,
                false_alarm_rate: rate,
            }),
        _ => None,
    };

    let mut rows = Vec::new();
    for (i, (info, obs)) in summary.outputs.iter().zip(observed).enumerate() {
        let Some(obs) = obs else { continue };
        let per_cell = estimates_by_cell(&cells, &all, i, info.converged_index());
        let (value, value_note) = match quotable(info, Some(obs)) {
            Ok(v) => (Some(v), None),
            Err(why) => (None, Some(why)),
        };
        let x0 = obs.point;
        let belt = output_belt(&cells, &per_cell, x0);
        let interval = value.and(belt.as_ref()).map(|b| b.interval(x0));
        let interval_errors = if recommended == Some(i) {
            interval_errors(design, &cells, &per_cell, x0)
        } else {
            None
        };
        // Bias etc. at the usable injected e nearest the estimate.
        let Some(j) = (0..cells.len())
            .filter(|&j| per_cell[j].len() >= 2)
            .min_by(|&a, &b| {
                (cells[a].eccentricity - x0)
                    .abs()
                    .total_cmp(&(cells[b].eccentricity - x0).abs())
            })
        else {
            continue;
        };
        let (mean, sd) = mean_sd(&per_cell[j]);
        let n_j = per_cell[j].len();
        let stats = cell_summary(&cells[j]).map(|s| &s.outputs[i]);
        let (failed, unconverged, tried) = cells
            .iter()
            .filter_map(&cell_summary)
            .map(|s| {
                let o = &s.outputs[i];
                (
                    o.n_failed,
                    o.n_unconverged,
                    o.n_failed + o.n_unconverged + o.n_estimates,
                )
            })
            .fold((0, 0, 0), |a, b| (a.0 + b.0, a.1 + b.1, a.2 + b.2));
        rows.push(EstimatorRow {
            name: info.name.clone(),
            label: info.label.clone(),
            prior: info.prior.clone(),
            value,
            value_note,
            interval,
            interval_errors,
            at_true_e: cells[j].eccentricity,
            n_at_true_e: n_j,
            bias: mean - cells[j].eccentricity,
            bias_standard_error: sd / libm::sqrt(n_j as f64),
            rmse: rmse(&per_cell[j], cells[j].eccentricity),
            coverage95: stats.and_then(|s| s.coverage95),
            false_eccentric_rate: circular_cell
                .and_then(&cell_summary)
                .and_then(|s| s.outputs[i].false_eccentric_rate),
            failed: Rate::of(failed, tried),
            unconverged: info
                .converged_index()
                .and_then(|_| Rate::of(unconverged, tried)),
        });
    }
    let bayes = bayes_notes(&summary.outputs, observed);
    let mut statement = EccentricityStatement {
        n_epochs: design.sampling.n_epochs(),
        fitted,
        semi_amplitude_used,
        trials_per_cell: design.trials_per_cell,
        extra_trials,
        seed: design.seed,
        companion: context.companion,
        n_companions: context.n_companions,
        recommended: recommended.map(|i| summary.outputs[i].name.clone()),
        max_circular_trials,
        recommendation_rule: match chosen {
            Some(name) => format!("chosen by the user ({name})"),
            None => RECOMMENDATION_RULE.into(),
        },
        decision,
        lucy_sweeney,
        rows,
        bayes,
        sentences: Vec::new(),
        methods: String::new(),
        paragraph: String::new(),
    };
    statement.sentences = sentences(&statement, context);
    statement.methods = methods(&statement, summary, context);
    statement.paragraph = statement.sentences.join(" ");
    Ok(statement)
}

fn bayes_notes(
    outputs: &[OutputInfo],
    observed: &[Option<EccentricityEstimate>],
) -> Vec<BayesNote> {
    let mut notes = Vec::new();
    for (info, obs) in outputs.iter().zip(observed) {
        let Some(bf_index) = info.extra_names.iter().position(|n| n == "bf01") else {
            continue;
        };
        if !info.name.ends_with("_median") {
            continue;
        }
        let prior = info.prior.clone();
        let Some(obs) = obs else {
            notes.push(BayesNote {
                text: format!(
                    "No Bayes factor under the prior {prior}: the sampler failed on the data."
                ),
                prior,
                bf01: None,
                upper_bound: false,
            });
            continue;
        };
        if let Err(why) = quotable(info, Some(obs)) {
            notes.push(BayesNote {
                text: format!("No Bayes factor is quoted under the prior {prior}: {why}."),
                prior,
                bf01: None,
                upper_bound: false,
            });
            continue;
        }
        let upper_bound = obs.extra.get(bf_index + 1).is_some_and(|&f| f == 1.0);
        let note = match obs.extra.get(bf_index) {
            Some(&bf) if bf.is_finite() => {
                let verdict = if bf < 1.0 / 3.0 {
                    "the data favour an eccentric orbit"
                } else if bf > 3.0 && !upper_bound {
                    "the data favour a circular orbit"
                } else {
                    "the data do not decide between them"
                };
                BayesNote {
                    text: format!(
                        "Under the prior {prior}, the Savage-Dickey Bayes factor of a circular \
                         over an eccentric orbit is BF01 {} {bf:.3} ({verdict}; from a converged \
                         run).",
                        if upper_bound { "<" } else { "=" }
                    ),
                    prior,
                    bf01: Some(bf),
                    upper_bound,
                }
            }
            _ => BayesNote {
                text: format!("No Bayes factor under the prior {prior}: the prior excludes e = 0."),
                prior,
                bf01: None,
                upper_bound: false,
            },
        };
        notes.push(note);
    }
    notes
}

/// An interval end printed no finer than its Monte-Carlo error supports: three decimals when
/// its bootstrap standard error is at most 0.005, else two (so no 0.005-level claim rests on
/// an end that moves by more between resamples), with the error beside it when known.
fn end_text(value: f64, se: f64) -> String {
    if se.is_finite() && se <= 0.005 {
        format!("{value:.3} (±{se:.3})")
    } else if se.is_finite() {
        format!("{value:.2} (±{se:.2})")
    } else {
        format!("{value:.2}")
    }
}

fn interval_text(i: &BeltInterval, errors: Option<&BeltEstimate>) -> String {
    let (lo_se, hi_se) = errors.map_or((f64::NAN, f64::NAN), |e| {
        (e.lower_standard_error, e.upper_standard_error)
    });
    if i.open_above {
        // The set reaches the top of the simulated grid: only its lower end is bounded here.
        return if i.upper_limit {
            format!(
                "unbounded over the whole simulated grid (e = 0 to {}; extend the grid)",
                grid_value(i.upper)
            )
        } else {
            format!(
                "e > {} (open above: it reaches the top of the simulated grid, e = {}; extend \
                 the grid to bound it)",
                end_text(i.lower, lo_se),
                grid_value(i.upper)
            )
        };
    }
    let coarse = if i.under_resolved {
        " (interpolated between injected e spaced wider than 2.5 times the estimator's scatter \
         or whose simulated estimates do not overlap: a finer grid there would place its ends \
         more reliably)"
    } else {
        ""
    };
    if i.upper_limit {
        format!("e < {}{coarse}", end_text(i.upper, hi_se))
    } else {
        format!(
            "{} < e < {}{coarse}",
            end_text(i.lower, lo_se),
            end_text(i.upper, hi_se)
        )
    }
}

/// The estimator the user chose, read back from the statement's rule.
fn chosen_name(s: &EccentricityStatement) -> Option<&str> {
    s.recommendation_rule
        .strip_prefix("chosen by the user (")
        .and_then(|r| r.strip_suffix(')'))
}

fn sentences(s: &EccentricityStatement, context: &AuditContext) -> Vec<String> {
    // The model side's opening lines (excess scatter, marginal detections) come first.
    let mut out: Vec<String> = context
        .notes
        .iter()
        .map(|n| {
            let n = n.trim();
            if n.ends_with('.') {
                n.to_string()
            } else {
                format!("{n}.")
            }
        })
        .collect();
    if context.n_companions > 1 {
        out.push(format!(
            "This statement is about companion {} of {} (P = {:.4} d).",
            context.companion, context.n_companions, s.fitted.period
        ));
    }
    let rec = s
        .recommended
        .as_ref()
        .and_then(|name| s.rows.iter().find(|r| &r.name == name));
    match rec {
        Some(r) => {
            let value = r.value.unwrap_or(f64::NAN);
            let interval = r.interval.map_or("not available".to_string(), |i| {
                interval_text(&i, r.interval_errors.as_ref())
            });
            let prior = if r.prior.starts_with("none") {
                String::new()
            } else {
                format!(" under a {} prior", r.prior)
            };
            out.push(format!(
                "The {}{prior} gives e = {value:.3}; its 95% confidence interval, calibrated by \
                 simulations of these {} epochs and uncertainties, is {interval}.",
                r.label, s.n_epochs
            ));
            // Three decimals only when the Monte-Carlo error supports them (as the ends).
            let bias = if r.bias_standard_error <= 0.005 {
                format!("{:+.3} ± {:.3}", r.bias, r.bias_standard_error)
            } else {
                format!("{:+.2} ± {:.2}", r.bias, r.bias_standard_error)
            };
            out.push(format!(
                "At this sampling it is biased by {bias} at a true e = {} ({} simulations).",
                grid_value(r.at_true_e),
                r.n_at_true_e
            ));
        }
        None => out.push(match chosen_name(s) {
            Some(name) => format!(
                "The chosen estimator ({name}) gave no value that can be quoted for these data \
                 (see the table)."
            ),
            None => "No estimator gave a value that can be quoted for these data (see the table)."
                .into(),
        }),
    }
    if let Some(d) = &s.decision {
        out.push(format!(
            "Against {} simulated circular orbits, a circular orbit is {}excluded at the 5% level \
             (p = {:.3} ± {:.3}{}).",
            d.p.n,
            if d.circular_excluded { "" } else { "not " },
            d.p.value,
            d.p.standard_error,
            if d.resolved {
                ""
            } else {
                "; the simulations do not resolve p from 0.05"
            }
        ));
    }
    out
}

/// "name p% ± se% of n; …" for the rows whose `share` (of simulations left out of their
/// numbers) is above zero; empty when none is.
fn shares_left_out(rows: &[EstimatorRow], share: impl Fn(&EstimatorRow) -> Option<Rate>) -> String {
    rows.iter()
        .filter_map(|r| share(r).filter(|f| f.value > 0.0).map(|f| (r, f)))
        .map(|(r, f)| {
            format!(
                "{} {:.1}% ± {:.1}% of {}",
                r.name,
                100.0 * f.value,
                100.0 * f.standard_error,
                f.n
            )
        })
        .collect::<Vec<_>>()
        .join("; ")
}

fn methods(
    s: &EccentricityStatement,
    summary: &InjectionSummary,
    context: &AuditContext,
) -> String {
    let design = &summary.design;
    let grid = grid_text(&design.eccentricities);
    let jitter = if design.jitter > 0.0 {
        format!(
            " plus {} m/s of extra Gaussian noise",
            grid_value(design.jitter)
        )
    } else {
        String::new()
    };
    let mut text = format!(
        "Methods: the observing run was simulated {} times at each injected e = {grid} (plus {} \
         adaptive trials) at the fitted P = {:.4} d and K = {:.2} m/s, with random phase{}, the \
         same epochs and uncertainties{jitter}, and each simulation was estimated as the data were. \
         Intervals invert the simulated confidence belt (Neyman 1937) with the likelihood-ratio \
         ordering of Feldman & Cousins (1998) on reflected kernel density estimates, each \
         acceptance cut a conformal rank of leave-one-out ratios (Lei, Robins & Wasserman 2013), \
         the acceptance bounds linear in e between grid points; their ends' Monte-Carlo errors \
         come from {} bootstrap resamples. ",
        s.trials_per_cell,
        s.extra_trials,
        s.fitted.period,
        s.semi_amplitude_used,
        if design.omegas.is_empty() {
            " and argument of periastron"
        } else {
            ""
        },
        BOOTSTRAP_RESAMPLES
    );
    if !context.held_fixed.is_empty() {
        text.push_str(&format!(
            "The simulations hold fixed {}; {}. ",
            context.held_fixed.join("; "),
            context.refit
        ));
    }
    let g = &context.goodness;
    text.push_str(&format!(
        "The fit of the data has chi-squared {:.1} for {} degrees of freedom{}; {}. ",
        g.chi_squared,
        g.dof,
        g.p_value
            .map_or(String::new(), |p| format!(" (p = {p:.3})")),
        context.jitter_reason.trim_end_matches('.')
    ));
    if let Some(fap) = context.detection.false_alarm_probability {
        text.push_str(&format!(
            "The period of companion {} was found with false-alarm probability {fap:.2e} \
             (limit {}). ",
            context.companion,
            grid_value(context.detection.fap_limit)
        ));
    }
    if let Some(d) = &s.decision {
        text.push_str(&format!(
            "The circular decision is the Monte-Carlo p = (k+1)/(n+1) of {} against the circular \
             simulations; circular trials were added in batches while the Wilson 95% interval of \
             p contained 0.05 or, unless that interval lay wholly below {} or above {}, its \
             standard error exceeded {}, up to {}. ",
            d.statistic,
            grid_value(crate::inject::adaptive::DECISION_FAR[0]),
            grid_value(crate::inject::adaptive::DECISION_FAR[1]),
            grid_value(crate::inject::adaptive::DECISION_TARGET_ERROR),
            s.max_circular_trials
        ));
    }
    if let Some(ls) = &s.lucy_sweeney {
        text.push_str(&format!(
            "The asymptotic Lucy & Sweeney (1971) test in its 2-D Wald form gives p = {:.3}; at \
             this sampling it fires on {:.1}% ± {:.1}% of circular simulations (nominally 5%). ",
            ls.p,
            100.0 * ls.false_alarm_rate.value,
            100.0 * ls.false_alarm_rate.standard_error
        ));
    }
    let failures = shares_left_out(&s.rows, |r| r.failed);
    if !failures.is_empty() {
        text.push_str(&format!(
            "Simulations where an estimator failed are left out of its numbers: {failures}. "
        ));
    }
    let unconverged = shares_left_out(&s.rows, |r| r.unconverged);
    if !unconverged.is_empty() {
        text.push_str(&format!(
            "Simulations whose posterior run missed its convergence rule within the per-trial \
             budget are left out of that estimator's numbers (which may favour the easier \
             simulations): {unconverged}. "
        ));
    }
    text.push_str(&format!("Recommended: {}.", s.recommendation_rule));
    for b in &s.bayes {
        text.push(' ');
        text.push_str(&b.text);
    }
    text
}

/// The grid in words: "0 to 0.6 in steps of 0.05" when regular, else the list.
fn grid_text(values: &[f64]) -> String {
    if values.len() > 3 {
        let step = values[1] - values[0];
        let regular = values
            .windows(2)
            .all(|w| ((w[1] - w[0]) - step).abs() < 1e-9);
        if regular {
            return format!(
                "{} to {} in steps of {}",
                grid_value(values[0]),
                grid_value(values[values.len() - 1]),
                grid_value(step)
            );
        }
    }
    crate::format::grid_list(values)
}

fn rate_text(r: &Option<Rate>) -> String {
    r.map_or("-".into(), |r| {
        format!("{:.1}±{:.1}%", 100.0 * r.value, 100.0 * r.standard_error)
    })
}

impl EccentricityStatement {
    /// The least-squares estimate on the real data (the `lsq` row's value), where the bias
    /// figures mark the observed e; `None` when there is no such row or value.
    pub fn observed_least_squares(&self) -> Option<f64> {
        self.rows
            .iter()
            .find(|r| r.name == "lsq")
            .and_then(|r| r.value)
    }

    /// A plain-text layout: the sentences, the table of every estimator, the methods.
    pub fn text(&self) -> String {
        let mut out = String::new();
        out.push_str(&format!(
            "Eccentricity statement ({} epochs; simulations at P = {:.4} d, K = {:.2} m/s, {} base trials per e + {} adaptive, seed {})\n\n",
            self.n_epochs,
            self.fitted.period,
            self.semi_amplitude_used,
            self.trials_per_cell,
            self.extra_trials,
            self.seed
        ));
        out.push_str(&self.paragraph);
        out.push_str("\n\n");
        let width = self
            .rows
            .iter()
            .map(|r| r.name.chars().count() + 2)
            .max()
            .unwrap_or(0)
            .max(9);
        out.push_str(&format!(
            "  {:<width$} {:>7} {:>22} {:>6} {:>16} {:>7} {:>13} {:>13} {:>13} {:>13}\n",
            "estimator",
            "value",
            "95% calibrated",
            "at e",
            "bias",
            "RMSE",
            "coverage95",
            "false-ecc",
            "failed",
            "unconverged"
        ));
        for r in &self.rows {
            let mark = if self.recommended.as_ref() == Some(&r.name) {
                " *"
            } else {
                ""
            };
            let value = r.value.map_or("-".into(), |v| format!("{v:.4}"));
            let interval = r.interval.map_or("-".into(), |i| {
                let top = if i.open_above { "+" } else { "" };
                if i.upper_limit {
                    format!("< {:.3}{top}", i.upper)
                } else {
                    format!("{:.3}-{:.3}{top}", i.lower, i.upper)
                }
            });
            let failed = match r.failed {
                Some(f) if f.value > 0.0 => rate_text(&Some(f)),
                _ => "0".into(),
            };
            let unconverged = match r.unconverged {
                Some(f) if f.value > 0.0 => rate_text(&Some(f)),
                Some(_) => "0".into(),
                None => "-".into(),
            };
            out.push_str(&format!(
                "  {:<width$} {:>7} {:>22} {:>6} {:>16} {:>7.4} {:>13} {:>13} {:>13} {:>13}\n",
                format!("{}{mark}", r.name),
                value,
                interval,
                grid_value(r.at_true_e),
                format!("{:+.4}±{:.4}", r.bias, r.bias_standard_error),
                r.rmse,
                rate_text(&r.coverage95),
                rate_text(&r.false_eccentric_rate),
                failed,
                unconverged
            ));
        }
        out.push_str("  (* recommended; value '-' : not quoted, see the notes)\n");
        for r in &self.rows {
            if let Some(note) = &r.value_note {
                out.push_str(&format!("  {}: not quoted: {note}.\n", r.name));
            }
        }
        if let Some(d) = &self.decision {
            out.push_str(&format!(
                "  circular decision: p = {:.4} ± {:.4} ({} of {} circular simulations at least as \
                 eccentric; Wilson 95% {:.4}-{:.4}) -> circular {}excluded at 5%\n",
                d.p.value,
                d.p.standard_error,
                d.p.exceedances,
                d.p.n,
                d.p.wilson95[0],
                d.p.wilson95[1],
                if d.circular_excluded { "" } else { "not " }
            ));
        }
        if let Some(ls) = &self.lucy_sweeney {
            out.push_str(&format!(
                "  Lucy-Sweeney (2-D Wald) p = {:.4}: circular {}excluded at 5% by the asymptotic \
                 test, whose false-alarm rate here is {}\n",
                ls.p,
                if ls.p <= LUCY_SWEENEY_THRESHOLD {
                    ""
                } else {
                    "not "
                },
                rate_text(&Some(ls.false_alarm_rate))
            ));
        }
        out.push('\n');
        out.push_str(&self.methods);
        out.push('\n');
        out
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn grid_text_compacts_regular_grids() {
        let grid: Vec<f64> = (0..=12).map(|i| i as f64 * 0.05).collect();
        assert_eq!(grid_text(&grid), "0 to 0.6 in steps of 0.05");
        assert_eq!(grid_text(&[0.0, 0.3]), "0, 0.3");
    }

    #[test]
    fn wilson_interval_and_monte_carlo_p() {
        // Wilson (1927) for 5 of 100 at z = 1.96: 0.0215-0.1118 (closed form, computed by hand
        // from the formula in the doc comment).
        let [lo, hi] = wilson_interval(5, 100, Z95);
        assert!(
            (lo - 0.02154).abs() < 1e-4 && (hi - 0.11175).abs() < 1e-4,
            "{lo} {hi}"
        );
        let p = MonteCarloP::new(4, 99);
        assert_eq!(p.value, 0.05);
        assert!(!p.resolves(0.05));
        assert!(MonteCarloP::new(0, 2000).resolves(0.05));
        assert!(MonteCarloP::new(800, 2000).resolves(0.05));
    }

    /// A posterior output whose run on the data did not converge is not quoted, and neither is
    /// its Bayes factor; a converged one is.
    #[test]
    fn unconverged_runs_are_not_quoted() {
        let info = OutputInfo {
            name: "posterior_uniform_median".into(),
            label: "posterior median of e".into(),
            prior: "uniform on [0, 0.99]".into(),
            intervals: String::new(),
            eccentric_call: String::new(),
            extra_names: vec![
                "p_e_below_0.05".into(),
                "bf01".into(),
                "bf01_is_upper_limit".into(),
                "converged".into(),
            ],
        };
        let estimate = |converged: f64| EccentricityEstimate {
            point: 0.12,
            lower68: 0.05,
            upper68: 0.2,
            lower95: 0.0,
            upper95: 0.3,
            calls_eccentric: Some(false),
            extra: vec![0.2, 0.8, 0.0, converged],
        };
        let no = estimate(0.0);
        let yes = estimate(1.0);
        assert!(quotable(&info, Some(&no))
            .unwrap_err()
            .contains("convergence"));
        assert_eq!(quotable(&info, Some(&yes)), Ok(0.12));
        let notes = bayes_notes(std::slice::from_ref(&info), &[Some(no)]);
        assert_eq!(notes[0].bf01, None);
        assert!(notes[0]
            .text
            .contains("did not meet its convergence criterion"));
        let notes = bayes_notes(&[info], &[Some(yes)]);
        assert_eq!(notes[0].bf01, Some(0.8));
        assert!(notes[0].text.contains("BF01 = 0.800"), "{}", notes[0].text);
    }

    /// Interval ends carry three decimals only when their bootstrap error is ≤ 0.005.
    #[test]
    fn interval_ends_print_no_finer_than_their_monte_carlo_error() {
        let interval = BeltInterval {
            level: 0.95,
            lower: 0.1234,
            upper: 0.3456,
            e_best: 0.2,
            upper_limit: false,
            open_above: false,
            under_resolved: false,
        };
        let errors = |lo: f64, hi: f64| BeltEstimate {
            interval,
            lower_standard_error: lo,
            upper_standard_error: hi,
            resamples: 20,
        };
        assert_eq!(
            interval_text(&interval, Some(&errors(0.004, 0.02))),
            "0.123 (±0.004) < e < 0.35 (±0.02)"
        );
        assert_eq!(interval_text(&interval, None), "0.12 < e < 0.35");
        let limit = BeltInterval {
            lower: 0.0,
            upper_limit: true,
            ..interval
        };
        assert_eq!(
            interval_text(&limit, Some(&errors(0.0, 0.003))),
            "e < 0.346 (±0.003)"
        );
    }
}
