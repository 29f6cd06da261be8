//! From an injection–recovery summary of the core to the two figures of this crate: the one
//! conversion shared by the command line (SVG) and the page (canvas).

use eccaudit_core::format::grid_value;
use eccaudit_core::inject::summary::HISTOGRAM_BIN_WIDTH;
use eccaudit_core::inject::{CellSummary, InjectionSummary, Quantiles};

use crate::{BiasCurve, BiasFigure, DistributionFigure, DistributionPanel, EstimateHistogram};

/// The cells a figure shows for injected semi-amplitude `k`: those at the first ω of the
/// design's ω axis (or the random-ω cells when it has none).
fn cells_at(summary: &InjectionSummary, k: f64) -> impl Iterator<Item = &CellSummary> {
    let first_omega = summary.design.omegas.first().copied();
    summary
        .cells
        .iter()
        .filter(move |c| c.cell.semi_amplitude == k && c.cell.omega == first_omega)
}

/// The bias figure of `summary`: per injected K and estimator output, the quantiles of the
/// estimates against the injected e (cells with no trials or no estimates are left out), with
/// `observed` (the real data's estimate) marked when given.
pub fn bias_figure(summary: &InjectionSummary, observed: Option<f64>) -> BiasFigure {
    let design = &summary.design;
    let mut curves = Vec::new();
    for &k in &design.semi_amplitudes {
        let cells: Vec<&CellSummary> = cells_at(summary, k).filter(|c| c.n_trials > 0).collect();
        for (i, output) in summary.outputs.iter().enumerate() {
            let usable: Vec<&&CellSummary> = cells
                .iter()
                .filter(|c| c.outputs[i].n_estimates > 0)
                .collect();
            let pick = |f: fn(&Quantiles) -> f64| {
                usable.iter().map(|c| f(&c.outputs[i].quantiles)).collect()
            };
            let name = if design.semi_amplitudes.len() > 1 {
                format!("{}, K/σ = {:.2}", output.name, design.signal_to_noise(k))
            } else {
                output.name.clone()
            };
            curves.push(BiasCurve {
                name,
                true_e: usable.iter().map(|c| c.cell.eccentricity).collect(),
                q025: pick(|q| q.q025),
                q16: pick(|q| q.q16),
                median: pick(|q| q.q50),
                q84: pick(|q| q.q84),
                q975: pick(|q| q.q975),
            });
        }
    }
    BiasFigure { curves, observed }
}

/// The distribution figure of `summary`: one panel per injected e at the first injected K,
/// one histogram per estimator output.
pub fn distribution_figure(summary: &InjectionSummary) -> DistributionFigure {
    let Some(&k0) = summary.design.semi_amplitudes.first() else {
        return DistributionFigure::default();
    };
    let panels = cells_at(summary, k0)
        .map(|c| DistributionPanel {
            true_e: c.cell.eccentricity,
            title: format!("injected e = {}", grid_value(c.cell.eccentricity)),
            histograms: c
                .outputs
                .iter()
                .map(|o| EstimateHistogram {
                    name: o.name.clone(),
                    bin_width: HISTOGRAM_BIN_WIDTH,
                    counts: o.histogram.clone(),
                })
                .collect(),
        })
        .collect();
    DistributionFigure { panels }
}
