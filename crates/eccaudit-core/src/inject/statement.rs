//! The eccentricity statement: each estimator's value on the real data set beside its
//! simulated bias and scatter at the data's own sampling and fitted orbit, whether a circular
//! orbit is excluded, and one paragraph of plain text for a paper.

use serde::Serialize;

use super::engine::TrialRecord;
use super::estimators::EccentricityEstimate;
use super::summary::{CellSummary, InjectionSummary};
use super::InjectError;
use crate::fit::LUCY_SWEENEY_THRESHOLD;

/// The fitted orbit of the real data the simulations were made at.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct FittedOrbit {
    /// Fitted period [d].
    pub period: f64,
    /// Fitted semi-amplitude [m/s].
    pub semi_amplitude: f64,
    /// Fitted ω [rad] (used only when the design has an ω axis).
    pub omega: f64,
    /// Lucy–Sweeney p of the fitted eccentricity, when computed.
    pub lucy_sweeney_p: Option<f64>,
}

/// A Monte-Carlo p-value (k + 1)/(n + 1) of k exceedances in n simulations (Davison & Hinkley
/// 1997, Bootstrap Methods and their Application, eq. 4.11; from memory).
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct MonteCarloP {
    /// (k + 1)/(n + 1).
    pub value: f64,
    /// Simulations with an estimate at least the observed one.
    pub exceedances: usize,
    /// Simulations.
    pub n: usize,
}

/// One output's calibrated value.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct OutputCalibration {
    /// Output name.
    pub name: String,
    /// What it is.
    pub label: String,
    /// Its prior.
    pub prior: String,
    /// How its intervals are made.
    pub intervals: String,
    /// The estimate on the real data.
    pub observed: EccentricityEstimate,
    /// The injected e nearest the observed value, where bias and scatter are quoted.
    pub nearest_true_e: f64,
    /// Simulated bias there (mean estimate − true e).
    pub bias: f64,
    /// Its Monte-Carlo standard error.
    pub bias_standard_error: f64,
    /// Simulated scatter there (standard deviation of the estimates).
    pub scatter: f64,
    /// Share of circular injections giving an estimate ≥ the observed one, when the grid has
    /// e = 0.
    pub circular_exceedance: Option<MonteCarloP>,
    /// Lowest and highest injected e whose central 95% range of estimates (2.5–97.5%) contains
    /// the observed value: a confidence set by inverting the simulated distributions on the
    /// grid (the confidence belt of Neyman 1937, Phil. Trans. R. Soc. A 236, 333).
    pub belt95: Option<(f64, f64)>,
    /// True when the observed value lies above the 97.5% point of the largest injected e, so
    /// the set is open above the grid.
    pub belt95_open_above: bool,
}

/// The bias-aware statement for the real data.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct EccentricityStatement {
    /// Epochs of the data set.
    pub n_epochs: usize,
    /// The fitted orbit the simulations used.
    pub fitted: FittedOrbit,
    /// The injected K nearest the fitted one (the cells used) [m/s].
    pub semi_amplitude_used: f64,
    /// Trials per cell.
    pub trials_per_cell: usize,
    /// Master seed.
    pub seed: u64,
    /// Per output.
    pub calibrations: Vec<OutputCalibration>,
    /// Circular orbit excluded at the 5% level by the Lucy–Sweeney test (None: not computed).
    /// A Bayes factor will join it when posterior estimators are added.
    pub circular_excluded: Option<bool>,
    /// A paragraph for a paper.
    pub paragraph: String,
}

fn nearest(values: impl Iterator<Item = f64>, target: f64) -> Option<f64> {
    values.min_by(|a, b| (a - target).abs().total_cmp(&(b - target).abs()))
}

/// Builds the statement from a run at the data's fitted orbit.
///
/// `observed` holds one estimate per output of the summary, made on the real data (a `None`
/// where that estimator failed on it). The cells used are those with the injected K nearest
/// the fitted K (and, with an ω axis, the ω nearest the fitted ω).
pub fn eccentricity_statement(
    summary: &InjectionSummary,
    records: &[TrialRecord],
    observed: &[Option<EccentricityEstimate>],
    fitted: FittedOrbit,
) -> Result<EccentricityStatement, InjectError> {
    if observed.len() != summary.outputs.len() {
        return Err(InjectError::Statement(format!(
            "{} observed estimates for {} outputs",
            observed.len(),
            summary.outputs.len()
        )));
    }
    let design = &summary.design;
    let k_used = nearest(
        design.semi_amplitudes.iter().copied(),
        fitted.semi_amplitude,
    )
    .ok_or_else(|| InjectError::Statement("the design has no semi-amplitude".into()))?;
    let omega_used = nearest(design.omegas.iter().copied(), fitted.omega);
    let mut cells: Vec<&CellSummary> = summary
        .cells
        .iter()
        .filter(|c| c.cell.semi_amplitude == k_used && c.cell.omega == omega_used)
        .filter(|c| c.n_trials > 0)
        .collect();
    cells.sort_by(|a, b| a.cell.eccentricity.total_cmp(&b.cell.eccentricity));
    if cells.is_empty() {
        return Err(InjectError::Statement(
            "no simulated trials at the fitted semi-amplitude".into(),
        ));
    }
    let mut calibrations = Vec::new();
    for (index, (info, obs)) in summary.outputs.iter().zip(observed).enumerate() {
        let Some(obs) = obs else { continue };
        let value = obs.point;
        let usable: Vec<&&CellSummary> = cells
            .iter()
            .filter(|c| c.outputs[index].n_estimates > 1)
            .collect();
        let Some(near) = usable.iter().min_by(|a, b| {
            (a.cell.eccentricity - value)
                .abs()
                .total_cmp(&(b.cell.eccentricity - value).abs())
        }) else {
            continue;
        };
        let stats = &near.outputs[index];
        let circular_exceedance = usable.iter().find(|c| c.cell.eccentricity == 0.0).map(|c| {
            let estimates: Vec<f64> = records
                .iter()
                .filter(|r| r.cell == c.cell.index)
                .filter_map(|r| r.outcomes.get(index).and_then(|o| o.estimate()))
                .map(|e| e.point)
                .collect();
            let k = estimates.iter().filter(|&&e| e >= value).count();
            MonteCarloP {
                value: (k + 1) as f64 / (estimates.len() + 1) as f64,
                exceedances: k,
                n: estimates.len(),
            }
        });
        let inside: Vec<f64> = usable
            .iter()
            .filter(|c| {
                let q = c.outputs[index].quantiles;
                q.q025 <= value && value <= q.q975
            })
            .map(|c| c.cell.eccentricity)
            .collect();
        let top = usable.last().expect("usable is not empty");
        calibrations.push(OutputCalibration {
            name: info.name.clone(),
            label: info.label.clone(),
            prior: info.prior.clone(),
            intervals: info.intervals.clone(),
            observed: obs.clone(),
            nearest_true_e: near.cell.eccentricity,
            bias: stats.bias,
            bias_standard_error: stats.bias_standard_error,
            scatter: stats.scatter,
            circular_exceedance,
            belt95: inside.first().zip(inside.last()).map(|(lo, hi)| (*lo, *hi)),
            belt95_open_above: value > top.outputs[index].quantiles.q975,
        });
    }
    let circular_excluded = fitted.lucy_sweeney_p.map(|p| p <= LUCY_SWEENEY_THRESHOLD);
    let mut statement = EccentricityStatement {
        n_epochs: design.sampling.n_epochs(),
        fitted,
        semi_amplitude_used: k_used,
        trials_per_cell: design.trials_per_cell,
        seed: design.seed,
        calibrations,
        circular_excluded,
        paragraph: String::new(),
    };
    statement.paragraph = paragraph(&statement, summary);
    Ok(statement)
}

fn grid_text(values: &[f64]) -> String {
    match values {
        [] => String::new(),
        [one] => format!("{one}"),
        [first, .., last] if values.len() > 3 => {
            let step = values[1] - values[0];
            let regular = values
                .windows(2)
                .all(|w| ((w[1] - w[0]) - step).abs() < 1e-9);
            if regular {
                format!(
                    "{} to {} in steps of {}",
                    round_step(*first),
                    round_step(*last),
                    round_step(step)
                )
            } else {
                values
                    .iter()
                    .map(|v| v.to_string())
                    .collect::<Vec<_>>()
                    .join(", ")
            }
        }
        _ => values
            .iter()
            .map(|v| v.to_string())
            .collect::<Vec<_>>()
            .join(", "),
    }
}

/// "no prior on e" or "prior on e: …".
fn prior_text(prior: &str) -> String {
    if prior.starts_with("none") {
        "no prior on e".to_string()
    } else {
        format!("prior on e: {prior}")
    }
}

/// A grid value without the float noise of its arithmetic (six decimals).
fn round_step(step: f64) -> f64 {
    (step * 1e6).round() / 1e6
}

fn paragraph(s: &EccentricityStatement, summary: &InjectionSummary) -> String {
    let design = &summary.design;
    let mut text = String::new();
    let Some(first) = s.calibrations.first() else {
        return "No estimator produced an eccentricity for these data.".into();
    };
    let jitter = if design.jitter > 0.0 {
        format!(" plus {:.3} m/s of extra Gaussian noise", design.jitter)
    } else {
        String::new()
    };
    let omega_text = if design.omegas.is_empty() {
        "random orbital phase and argument of periastron"
    } else {
        "random orbital phase"
    };
    text.push_str(&format!(
        "From the {} radial velocities, the {} ({}) is e = {:.3} (68% interval {:.3}-{:.3}; {}). \
         To calibrate it we simulated our own observing run, with the same epochs and stated \
         uncertainties{}, {} times for each injected eccentricity (e = {}) at the fitted period \
         P = {:.4} d and semi-amplitude K = {:.2} m/s, with {}, and estimated e from each \
         simulation in the same way. ",
        s.n_epochs,
        first.label,
        prior_text(&first.prior),
        first.observed.point,
        first.observed.lower68,
        first.observed.upper68,
        first.intervals,
        jitter,
        s.trials_per_cell,
        grid_text(&design.eccentricities),
        s.fitted.period,
        s.semi_amplitude_used,
        omega_text,
    ));
    for c in &s.calibrations {
        text.push_str(&format!(
            "At an injected e = {} the {} ({}) is biased by {:+.3} (Monte-Carlo error {:.3}) \
             with a scatter of {:.3}",
            round_step(c.nearest_true_e),
            c.label,
            prior_text(&c.prior),
            c.bias,
            c.bias_standard_error,
            c.scatter
        ));
        if let Some(p) = c.circular_exceedance {
            text.push_str(&format!(
                "; circular orbits gave a value at least as large as ours in {} of {} \
                 simulations (p = {:.3})",
                p.exceedances, p.n, p.value
            ));
        }
        match (c.belt95, c.belt95_open_above) {
            (Some((lo, hi)), false) => text.push_str(&format!(
                "; injected eccentricities from {} to {} produce our value within their \
                 central 95% of simulated estimates",
                round_step(lo),
                round_step(hi)
            )),
            (_, true) => {
                let lo = c
                    .belt95
                    .map_or(design.eccentricities.last().copied().unwrap_or(0.0), |b| {
                        b.0
                    });
                text.push_str(&format!(
                    "; our value lies above the central 95% of estimates for the largest \
                     injected e, so the data favour e above {} (beyond the simulated grid)",
                    round_step(lo)
                ));
            }
            (None, false) => text.push_str(
                "; no injected eccentricity on the grid produces our value within its central \
                 95% of simulated estimates",
            ),
        }
        text.push_str(". ");
    }
    match (s.fitted.lucy_sweeney_p, s.circular_excluded) {
        (Some(p), Some(true)) => text.push_str(&format!(
            "The test of Lucy & Sweeney (1971) gives p = {p:.3}, so a circular orbit is excluded \
             at the 5% level."
        )),
        (Some(p), _) => text.push_str(&format!(
            "The test of Lucy & Sweeney (1971) gives p = {p:.3}, so a circular orbit is not \
             excluded at the 5% level."
        )),
        (None, _) => {}
    }
    // The Savage–Dickey Bayes factor of each posterior estimator (once per prior).
    for (calibration, info) in s.calibrations.iter().zip(&summary.outputs) {
        let Some(bf_index) = info.extra_names.iter().position(|n| n == "bf01") else {
            continue;
        };
        if !calibration.name.ends_with("_median") {
            continue;
        }
        let upper_limit = calibration
            .observed
            .extra
            .get(bf_index + 1)
            .is_some_and(|&flag| flag == 1.0);
        match calibration.observed.extra.get(bf_index) {
            Some(bf01) if bf01.is_finite() && upper_limit => text.push_str(&format!(
                " Under the prior {}, no posterior sample lies near e = 0, so the Savage–Dickey \
                 Bayes factor of a circular over an eccentric orbit is only bounded: BF01 < {bf01:.3} \
                 ({}).",
                calibration.prior,
                if *bf01 < 1.0 / 3.0 {
                    "the data favour an eccentric orbit"
                } else {
                    "the bound does not decide between them"
                }
            )),
            Some(bf01) if bf01.is_finite() => text.push_str(&format!(
                " Under the prior {}, the Savage–Dickey Bayes factor of a circular over an eccentric \
                 orbit is BF01 = {bf01:.3} ({}).",
                calibration.prior,
                if *bf01 < 1.0 / 3.0 {
                    "the data favour an eccentric orbit"
                } else if *bf01 > 3.0 {
                    "the data favour a circular orbit"
                } else {
                    "the data do not decide between them"
                }
            )),
            _ => text.push_str(&format!(
                " Under the prior {}, the Savage–Dickey Bayes factor is not defined (the prior \
                 excludes e = 0).",
                calibration.prior
            )),
        }
    }
    text.trim_end().to_string()
}

impl EccentricityStatement {
    /// A plain-text layout: one line per output, then the paragraph.
    pub fn text(&self) -> String {
        let mut out = String::new();
        out.push_str(&format!(
            "Eccentricity statement ({} epochs; simulations at P = {:.4} d, K = {:.2} m/s, {} trials per e, seed {})\n",
            self.n_epochs,
            self.fitted.period,
            self.semi_amplitude_used,
            self.trials_per_cell,
            self.seed
        ));
        let width = self
            .calibrations
            .iter()
            .map(|c| c.name.chars().count())
            .max()
            .unwrap_or(0)
            .max(9);
        out.push_str(&format!(
            "  {:<width$} {:>7} {:>15} {:>7} {:>8} {:>7} {:>10} {:>13}\n",
            "estimator", "value", "68% interval", "at e", "bias", "scatter", "p(circ)", "95% belt"
        ));
        for c in &self.calibrations {
            let p = c
                .circular_exceedance
                .map_or("-".to_string(), |p| format!("{:.4}", p.value));
            let belt = match (c.belt95, c.belt95_open_above) {
                (Some((lo, hi)), false) => format!("{}-{}", round_step(lo), round_step(hi)),
                (_, true) => "above grid".to_string(),
                (None, false) => "none".to_string(),
            };
            out.push_str(&format!(
                "  {:<width$} {:>7.4} {:>15} {:>7} {:>+8.4} {:>7.4} {:>10} {:>13}\n",
                c.name,
                c.observed.point,
                format!("{:.3}-{:.3}", c.observed.lower68, c.observed.upper68),
                round_step(c.nearest_true_e),
                c.bias,
                c.scatter,
                p,
                belt
            ));
        }
        if let Some(p) = self.fitted.lucy_sweeney_p {
            out.push_str(&format!(
                "  Lucy-Sweeney p = {p:.4}: circular orbit {}excluded at the 5% level\n",
                if p <= LUCY_SWEENEY_THRESHOLD {
                    ""
                } else {
                    "not "
                }
            ));
        }
        out.push('\n');
        out.push_str(&self.paragraph);
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
}
