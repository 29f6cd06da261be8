//! The figures of a prior-sensitivity set built from the core's report (feature `core`): one
//! conversion shared by the command line (SVG) and the page (canvas), with the figure sizes.

use eccaudit_core::posterior::{PosteriorRun, SensitivityReport};

use crate::{CornerFigure, EccentricityFigure, EccentricityPanel, ParameterTraces, TraceFigure};

/// Panels per row of the posterior-over-prior figure.
pub const ECCENTRICITY_COLUMNS: usize = 3;

/// Stored samples drawn in the corner plot at most (thinned evenly).
pub const CORNER_POINTS: usize = 1000;

/// Posterior and prior density of e, one panel per prior, with the least-squares e marked.
pub fn eccentricity_figure(report: &SensitivityReport) -> EccentricityFigure {
    EccentricityFigure {
        panels: report
            .runs
            .iter()
            .map(|run| EccentricityPanel {
                title: run.summary.prior_label.clone(),
                e: run.summary.density.e.clone(),
                posterior: run.summary.density.posterior.clone(),
                prior: run.summary.density.prior.clone(),
                median: Some(run.summary.median),
            })
            .collect(),
        columns: ECCENTRICITY_COLUMNS,
        reference: Some(("least squares".into(), report.least_squares.e)),
    }
}

/// Size in pixels of [`eccentricity_figure`] for `n_priors` panels.
pub fn eccentricity_figure_size(n_priors: usize) -> (u32, u32) {
    let rows = n_priors.div_ceil(ECCENTRICITY_COLUMNS).max(1) as u32;
    (1200, 300 * rows)
}

/// Pairwise scatter of one run's stored samples (at most `max_points`, thinned evenly) with the
/// start point marked.
pub fn corner_figure(run: &PosteriorRun, max_points: usize) -> CornerFigure {
    let chains = &run.chains;
    let total = chains.n_walkers * chains.n_stored_steps;
    let stride = total.div_ceil(max_points.max(1)).max(1);
    CornerFigure {
        names: run.parameter_names.clone(),
        samples: (0..chains.dim)
            .map(|p| {
                chains
                    .flat_parameter(p)
                    .into_iter()
                    .step_by(stride)
                    .collect()
            })
            .collect(),
        reference: Some(run.start.point.clone()),
    }
}

/// Size in pixels of [`corner_figure`] for `dim` parameters.
pub fn corner_figure_size(dim: usize) -> (u32, u32) {
    let side = (160 * dim as u32).max(480);
    (side, side)
}

/// Every walker's trace of every parameter of one run.
pub fn trace_figure(run: &PosteriorRun) -> TraceFigure {
    let chains = &run.chains;
    TraceFigure {
        parameters: (0..chains.dim)
            .map(|p| ParameterTraces {
                name: run.parameter_names[p].clone(),
                walkers: chains.parameter_traces(p),
            })
            .collect(),
        step_label: "stored step after burn-in".into(),
    }
}

/// Size in pixels of [`trace_figure`] for `dim` parameters.
pub fn trace_figure_size(dim: usize) -> (u32, u32) {
    (1000, 110 * dim as u32 + 40)
}
