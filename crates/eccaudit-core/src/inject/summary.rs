//! Per-cell statistics of an injection–recovery run: bias, RMSE, quantiles and histogram of
//! each estimate, interval coverage, and the rate of eccentric calls (false-eccentric rate for
//! circular injections), each with its Monte-Carlo standard error.

use serde::Serialize;

use super::design::{GridCell, InjectionDesign};
use super::engine::{settings_fingerprint, Outcome, TrialRecord};
use super::estimators::{all_outputs, Estimator, OutputInfo};

/// Width of the histogram bins of the estimates.
pub const HISTOGRAM_BIN_WIDTH: f64 = 0.02;
/// Number of histogram bins (covering e in [0, 1]).
pub const HISTOGRAM_BINS: usize = 50;

/// Quantiles of the estimates: 2.5, 16, 50, 84, 97.5%.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct Quantiles {
    /// 2.5%.
    pub q025: f64,
    /// 16%.
    pub q16: f64,
    /// 50% (median).
    pub q50: f64,
    /// 84%.
    pub q84: f64,
    /// 97.5%.
    pub q975: f64,
}

/// A rate with its binomial standard error √(p(1−p)/n) (common practice).
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct Rate {
    /// The share.
    pub value: f64,
    /// Its Monte-Carlo standard error.
    pub standard_error: f64,
    /// Trials it is counted over.
    pub n: usize,
}

impl Rate {
    /// `hits` of `n`, or None when `n` is 0.
    pub fn of(hits: usize, n: usize) -> Option<Self> {
        Self::new(hits, n)
    }

    fn new(hits: usize, n: usize) -> Option<Self> {
        if n == 0 {
            return None;
        }
        let p = hits as f64 / n as f64;
        Some(Self {
            value: p,
            standard_error: libm::sqrt(p * (1.0 - p) / n as f64),
            n,
        })
    }
}

/// One output's statistics in one cell.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct OutputCellSummary {
    /// Output name.
    pub name: String,
    /// Trials with an estimate that is counted (for a posterior output: from a run that met
    /// its convergence rule); every statistic below is over these.
    pub n_estimates: usize,
    /// Trials where the estimator failed.
    pub n_failed: usize,
    /// Share of the trials it was run on that failed.
    pub failed_share: Option<Rate>,
    /// Trials whose run gave an estimate but did not meet its convergence rule: left out of
    /// every statistic (a number from such a run is not quoted).
    pub n_unconverged: usize,
    /// Share of the trials it was run on that did not converge (None for outputs without a
    /// convergence rule, or run on no trial).
    pub unconverged_share: Option<Rate>,
    /// Mean estimate.
    pub mean: f64,
    /// Bias: mean estimate − true e.
    pub bias: f64,
    /// Monte-Carlo standard error of the bias (sample standard deviation / √n).
    pub bias_standard_error: f64,
    /// Sample standard deviation of the estimates (n − 1 in the denominator).
    pub scatter: f64,
    /// Root-mean-square error about the true e.
    pub rmse: f64,
    /// Quantiles of the estimates.
    pub quantiles: Quantiles,
    /// Counts of the estimates in bins of [`HISTOGRAM_BIN_WIDTH`] from 0 (last bin closed).
    pub histogram: Vec<u32>,
    /// Share of 68% intervals containing the true e.
    pub coverage68: Option<Rate>,
    /// Share of 95% intervals containing the true e.
    pub coverage95: Option<Rate>,
    /// Share of trials the estimator calls eccentric (None if it never decides).
    pub eccentric_call_rate: Option<Rate>,
    /// For a circular injection: the same share, i.e. the false-eccentric rate.
    pub false_eccentric_rate: Option<Rate>,
}

/// One grid cell's statistics.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct CellSummary {
    /// The cell.
    pub cell: GridCell,
    /// K/σ of the cell (σ: median stated uncertainty ⊕ jitter).
    pub signal_to_noise: f64,
    /// Trials of the cell found in the records.
    pub n_trials: usize,
    /// One entry per output.
    pub outputs: Vec<OutputCellSummary>,
}

/// The summary of a whole run.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct InjectionSummary {
    /// Settings fingerprint (see [`settings_fingerprint`]).
    pub fingerprint: String,
    /// The design.
    pub design: InjectionDesign,
    /// The outputs compared.
    pub outputs: Vec<OutputInfo>,
    /// Cost of each estimator per data set, in words.
    pub estimator_costs: Vec<String>,
    /// Trials planned.
    pub n_trials_planned: u64,
    /// Trials summarised.
    pub n_trials_done: u64,
    /// Per-cell statistics.
    pub cells: Vec<CellSummary>,
}

/// The p-quantile of sorted values by linear interpolation between order statistics (Hyndman &
/// Fan 1996, definition 7), kept here under its earlier path.
pub use crate::sampler::quantile_sorted;

fn histogram(values: &[f64]) -> Vec<u32> {
    let mut counts = vec![0u32; HISTOGRAM_BINS];
    for &v in values {
        if (0.0..=1.0).contains(&v) {
            let bin = ((v / HISTOGRAM_BIN_WIDTH) as usize).min(HISTOGRAM_BINS - 1);
            counts[bin] += 1;
        }
    }
    counts
}

fn summarise_output(
    name: &str,
    true_e: f64,
    records: &[&TrialRecord],
    index: usize,
    converged: Option<usize>,
) -> OutputCellSummary {
    let estimates: Vec<_> = records
        .iter()
        .filter_map(|r| r.outcomes.get(index).and_then(|o| o.counted(converged)))
        .collect();
    let n = estimates.len();
    let n_failed = records
        .iter()
        .filter(|r| matches!(r.outcomes.get(index), Some(Outcome::Failed(_))))
        .count();
    let n_unconverged = records
        .iter()
        .filter(|r| {
            r.outcomes
                .get(index)
                .is_some_and(|o| o.is_unconverged(converged))
        })
        .count();
    let n_run = n + n_failed + n_unconverged;
    let mut points: Vec<f64> = estimates.iter().map(|e| e.point).collect();
    let mean = points.iter().sum::<f64>() / n as f64;
    let scatter = if n > 1 {
        libm::sqrt(points.iter().map(|p| (p - mean) * (p - mean)).sum::<f64>() / (n - 1) as f64)
    } else {
        f64::NAN
    };
    let rmse = libm::sqrt(
        points
            .iter()
            .map(|p| (p - true_e) * (p - true_e))
            .sum::<f64>()
            / n as f64,
    );
    let hist = histogram(&points);
    points.sort_by(f64::total_cmp);
    let q = |p| quantile_sorted(&points, p);
    let covered = |lo: fn(&super::EccentricityEstimate) -> f64,
                   hi: fn(&super::EccentricityEstimate) -> f64| {
        let hits = estimates
            .iter()
            .filter(|e| lo(e) <= true_e && true_e <= hi(e))
            .count();
        Rate::new(hits, n)
    };
    let decisions: Vec<bool> = estimates.iter().filter_map(|e| e.calls_eccentric).collect();
    let eccentric_call_rate = if decisions.is_empty() {
        None
    } else {
        Rate::new(decisions.iter().filter(|&&d| d).count(), decisions.len())
    };
    OutputCellSummary {
        name: name.to_string(),
        n_estimates: n,
        n_failed,
        failed_share: Rate::new(n_failed, n_run),
        n_unconverged,
        unconverged_share: converged.and_then(|_| Rate::new(n_unconverged, n_run)),
        mean,
        bias: mean - true_e,
        bias_standard_error: scatter / libm::sqrt(n as f64),
        scatter,
        rmse,
        quantiles: Quantiles {
            q025: q(0.025),
            q16: q(0.16),
            q50: q(0.5),
            q84: q(0.84),
            q975: q(0.975),
        },
        histogram: hist,
        coverage68: covered(|e| e.lower68, |e| e.upper68),
        coverage95: covered(|e| e.lower95, |e| e.upper95),
        eccentric_call_rate,
        false_eccentric_rate: if true_e == 0.0 {
            eccentric_call_rate
        } else {
            None
        },
    }
}

/// Summarises `records` (any order, any subset; duplicates of a trial index are counted once)
/// cell by cell. The records are sorted by trial index first, so the result depends only on
/// which trials are present, not on the order they finished in.
pub fn summarise(
    design: &InjectionDesign,
    estimators: &[&dyn Estimator],
    records: &[TrialRecord],
) -> InjectionSummary {
    let outputs = all_outputs(estimators);
    let mut sorted: Vec<&TrialRecord> = records.iter().collect();
    sorted.sort_by_key(|r| r.trial);
    sorted.dedup_by_key(|r| r.trial);
    let cells = design
        .cells()
        .into_iter()
        .map(|cell| {
            let in_cell: Vec<&TrialRecord> = sorted
                .iter()
                .copied()
                .filter(|r| r.cell == cell.index)
                .collect();
            CellSummary {
                cell,
                signal_to_noise: design.signal_to_noise(cell.semi_amplitude),
                n_trials: in_cell.len(),
                outputs: outputs
                    .iter()
                    .enumerate()
                    .map(|(i, o)| {
                        summarise_output(
                            &o.name,
                            cell.eccentricity,
                            &in_cell,
                            i,
                            o.converged_index(),
                        )
                    })
                    .collect(),
            }
        })
        .collect();
    InjectionSummary {
        fingerprint: settings_fingerprint(design, estimators),
        design: design.clone(),
        outputs,
        estimator_costs: estimators.iter().map(|e| e.cost()).collect(),
        n_trials_planned: design.n_trials(),
        n_trials_done: sorted.len() as u64,
        cells,
    }
}

impl InjectionSummary {
    /// A plain-text table: one line per cell and output.
    pub fn text_table(&self) -> String {
        let mut out = String::new();
        out.push_str(&format!(
            "{:>6} {:>8} {:>6} {:<13} {:>5} {:>8} {:>7} {:>7} {:>7} {:>7} {:>7} {:>7} {:>7} {:>7}\n",
            "true_e",
            "K",
            "K/sig",
            "estimator",
            "n",
            "bias",
            "+-",
            "rmse",
            "median",
            "cov68",
            "cov95",
            "ecc",
            "failed",
            "unconv"
        ));
        let rate = |r: &Option<Rate>| r.map_or("-".to_string(), |r| format!("{:.3}", r.value));
        for cell in &self.cells {
            for o in &cell.outputs {
                out.push_str(&format!(
                    "{:>6.3} {:>8.3} {:>6.2} {:<13} {:>5} {:>+8.4} {:>7.4} {:>7.4} {:>7.4} {:>7} {:>7} {:>7} {:>7} {:>7}\n",
                    cell.cell.eccentricity,
                    cell.cell.semi_amplitude,
                    cell.signal_to_noise,
                    o.name,
                    o.n_estimates,
                    o.bias,
                    o.bias_standard_error,
                    o.rmse,
                    o.quantiles.q50,
                    rate(&o.coverage68),
                    rate(&o.coverage95),
                    rate(&o.eccentric_call_rate),
                    o.n_failed,
                    o.n_unconverged
                ));
            }
        }
        out
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::inject::design::{Sampling, Schedule, Spacing};
    use crate::inject::engine::run_trials;
    use crate::inject::estimators::LeastSquaresEstimator;

    #[test]
    fn quantiles_follow_definition_seven() {
        // numpy.quantile([1, 2, 3, 4], [0.16, 0.5, 0.975]) = [1.48, 2.5, 3.925] (NumPy's default
        // linear method = Hyndman & Fan definition 7; values computed by hand).
        let v = [1.0, 2.0, 3.0, 4.0];
        approx::assert_relative_eq!(quantile_sorted(&v, 0.16), 1.48, max_relative = 1e-14);
        approx::assert_relative_eq!(quantile_sorted(&v, 0.5), 2.5, max_relative = 1e-14);
        approx::assert_relative_eq!(quantile_sorted(&v, 0.975), 3.925, max_relative = 1e-14);
        assert!(quantile_sorted(&[], 0.5).is_nan());
    }

    #[test]
    fn histogram_bins_and_clipping() {
        let h = histogram(&[0.0, 0.019, 0.02, 0.5, 1.0, 1.5, -0.1]);
        assert_eq!(h[0], 2);
        assert_eq!(h[1], 1);
        assert_eq!(h[25], 1);
        assert_eq!(h[49], 1);
        assert_eq!(h.iter().sum::<u32>(), 5);
    }

    #[test]
    fn summary_does_not_depend_on_record_order() {
        let design = InjectionDesign {
            sampling: Sampling::from_schedule(
                &Schedule {
                    n_epochs: 20,
                    baseline: 90.0,
                    start_time: 0.0,
                    spacing: Spacing::Random,
                    uncertainty: 2.0,
                },
                5,
            )
            .unwrap(),
            period: 9.1,
            eccentricities: vec![0.0, 0.3],
            semi_amplitudes: vec![15.0],
            omegas: vec![],
            jitter: 0.0,
            trials_per_cell: 4,
            seed: 8,
            model: crate::inject::TrialModel::default(),
        };
        let lsq = LeastSquaresEstimator::default();
        let est: [&dyn Estimator; 1] = [&lsq];
        let records = run_trials(&design, &est, 0..8, &mut |_| {}).unwrap();
        let mut shuffled = records.clone();
        shuffled.reverse();
        shuffled.push(records[3].clone());
        let a = summarise(&design, &est, &records);
        let b = summarise(&design, &est, &shuffled);
        assert_eq!(a, b);
        assert_eq!(a.n_trials_done, 8);
        let circular = &a.cells[0].outputs[0];
        assert_eq!(circular.n_estimates + circular.n_failed, 4);
        // Least-squares ê ≥ 0, so the bias of a circular injection is ≥ 0 (definition).
        assert!(circular.bias >= 0.0);
        assert!(circular.false_eccentric_rate.is_some());
        assert!(a.cells[1].outputs[0].false_eccentric_rate.is_none());
        assert!(a.text_table().lines().count() == 1 + 2 * 2);
    }

    #[test]
    fn runs_that_missed_their_convergence_rule_are_left_out_and_counted() {
        // A posterior-like output (extra = [converged]) in one cell at true e = 0.2: three
        // converged runs at 0.1, 0.2, 0.3, two unconverged ones at 0.9 and one failure. The
        // statistics are over the converged three only (house rule: no number from a run
        // that missed its convergence rule), and the shares say what was left out.
        let estimate = |point: f64, converged: f64| {
            Outcome::Estimate(super::super::EccentricityEstimate {
                point,
                lower68: 0.0,
                upper68: 1.0,
                lower95: 0.0,
                upper95: 1.0,
                calls_eccentric: None,
                extra: vec![converged],
            })
        };
        let outcomes = [
            estimate(0.1, 1.0),
            estimate(0.9, 0.0),
            estimate(0.2, 1.0),
            Outcome::Failed("sampler failed".into()),
            estimate(0.9, 0.0),
            estimate(0.3, 1.0),
        ];
        let records: Vec<TrialRecord> = outcomes
            .into_iter()
            .enumerate()
            .map(|(k, o)| TrialRecord {
                trial: k as u64,
                cell: 0,
                eccentricity: 0.2,
                semi_amplitude: 10.0,
                omega: 0.0,
                mean_anomaly: 0.0,
                outcomes: vec![o],
            })
            .collect();
        let refs: Vec<&TrialRecord> = records.iter().collect();
        let s = summarise_output("post_mean", 0.2, &refs, 0, Some(0));
        assert_eq!((s.n_estimates, s.n_unconverged, s.n_failed), (3, 2, 1));
        approx::assert_relative_eq!(s.mean, 0.2, max_relative = 1e-12);
        approx::assert_relative_eq!(s.bias, 0.0, epsilon = 1e-12);
        let share = s.unconverged_share.unwrap();
        assert_eq!(share.n, 6);
        approx::assert_relative_eq!(share.value, 2.0 / 6.0, max_relative = 1e-12);
        approx::assert_relative_eq!(
            s.failed_share.unwrap().value,
            1.0 / 6.0,
            max_relative = 1e-12
        );
        // Without a convergence flag (least squares) every estimate counts.
        let all = summarise_output("lsq", 0.2, &refs, 0, None);
        assert_eq!((all.n_estimates, all.n_unconverged), (5, 0));
        assert!(all.unconverged_share.is_none());
    }
}
