//! `eccaudit priors FILE`: sample the posterior under a set of eccentricity priors and print, per
//! prior, what e looks like (text table or JSON); optionally write the figures as SVG.

use std::ops::ControlFlow;
use std::path::{Path, PathBuf};

use super::input::{read_table, TableArgs};
use anyhow::{bail, Context};
use eccaudit_core::fit::{FitData, FitOptions};
use eccaudit_core::posterior::{
    default_prior_set, parse_prior_spec, prior_sensitivity, PosteriorSettings, SensitivityReport,
    SensitivitySettings,
};
use eccaudit_core::priors::ScalarPrior;
use eccaudit_core::sampler::SamplerSettings;
use eccaudit_plot::plotters::prelude::{IntoDrawingArea, SVGBackend};
use eccaudit_plot::{
    draw_corner, draw_eccentricity_posteriors, draw_traces, CornerFigure, EccentricityFigure,
    EccentricityPanel, ParameterTraces, TraceFigure,
};

/// Arguments of `eccaudit priors`.
#[derive(Debug, clap::Args)]
pub struct Args {
    /// Velocity table: CSV, TSV or whitespace-separated; columns time, velocity, uncertainty[, instrument].
    pub file: PathBuf,
    /// Eccentricity prior, repeatable: SHAPE[(ARGS)][:E_MIN..E_MAX] with SHAPE one of uniform,
    /// beta(a,b), kipping2013, rayleigh(sigma), halfnormal(sigma), loguniform, ecosw, sqrtecosw.
    /// Default: uniform:0..0.99, uniform:0..0.8, uniform:0..0.5, kipping2013, rayleigh(0.3), ecosw.
    #[arg(long = "priors", value_name = "SPEC", num_args = 1..)]
    pub priors: Vec<String>,
    /// Walkers.
    #[arg(long, default_value_t = 32)]
    pub walkers: usize,
    /// Stored steps per walker after burn-in.
    #[arg(long, default_value_t = 4000)]
    pub steps: usize,
    /// Burn-in steps.
    #[arg(long, default_value_t = 1000)]
    pub burn: usize,
    /// Seed of the sampler (the same for every prior).
    #[arg(long, default_value_t = 1)]
    pub seed: u64,
    /// Write posterior-e.svg, and corner-N.svg and traces-N.svg per prior, into this directory.
    #[arg(long, value_name = "DIR")]
    pub plots: Option<PathBuf>,
    /// Starting period [d] for the least-squares start (skips the period search).
    #[arg(long)]
    pub period: Option<f64>,
    /// Period prior, log-uniform on [MIN, MAX] days.
    #[arg(long, num_args = 2, value_names = ["MIN", "MAX"], default_values_t = [1.0, 1.0e4])]
    pub period_range: Vec<f64>,
    /// Largest K [m/s] of its modified Jeffreys prior (knee 1 m/s).
    #[arg(long, default_value_t = 2.0e5)]
    pub k_max: f64,
    /// Largest jitter [m/s] of its modified Jeffreys prior (knee 1 m/s).
    #[arg(long, default_value_t = 1.0e3)]
    pub jitter_max: f64,
    /// Do not sample a jitter.
    #[arg(long)]
    pub no_jitter: bool,
    /// Sample a linear trend (uniform on ±10 m/s/d).
    #[arg(long)]
    pub trend: bool,
    #[command(flatten)]
    pub table: TableArgs,
    /// Print the report as JSON instead of a text table.
    #[arg(long)]
    pub json: bool,
}

fn settings(args: &Args) -> anyhow::Result<SensitivitySettings> {
    let priors = if args.priors.is_empty() {
        default_prior_set()
    } else {
        args.priors
            .iter()
            .map(|spec| parse_prior_spec(spec))
            .collect::<Result<Vec<_>, _>>()?
    };
    let mut posterior = PosteriorSettings {
        jitter: !args.no_jitter,
        trend: args.trend,
        ..PosteriorSettings::default()
    };
    posterior.priors.period = ScalarPrior::LogUniform {
        min: args.period_range[0],
        max: args.period_range[1],
    };
    posterior.priors.semi_amplitude = ScalarPrior::ModifiedJeffreys {
        knee: 1.0,
        max: args.k_max,
    };
    posterior.priors.jitter = ScalarPrior::ModifiedJeffreys {
        knee: 1.0,
        max: args.jitter_max,
    };
    posterior.priors.validate()?;
    if let Some(p) = args.period {
        if !(p > 0.0 && p.is_finite()) {
            bail!("--period {p}: must be a positive number of days");
        }
    }
    Ok(SensitivitySettings {
        posterior,
        priors,
        sampler: SamplerSettings {
            n_walkers: args.walkers,
            n_steps: args.steps,
            n_burn: args.burn,
            seed: args.seed,
            ..SamplerSettings::default()
        },
        fit: FitOptions {
            initial_periods: args.period.into_iter().collect(),
            ..FitOptions::default()
        },
    })
}

/// Read the table, run the set, print; write the figures when asked.
pub fn run(args: Args) -> anyhow::Result<()> {
    let settings = settings(&args)?;
    let source_name = args.file.display().to_string();
    let table = read_table(&args.file, &args.table)?;
    let data = FitData::from_table(&table);
    let report = prior_sensitivity(&data, &settings, &mut |_| ControlFlow::Continue(()))
        .with_context(|| format!("posterior of `{source_name}`"))?;
    if args.json {
        println!("{}", serde_json::to_string_pretty(&report)?);
    } else {
        println!("{source_name} ({})", table.time_convention().label());
        print!("{report}");
    }
    if let Some(dir) = &args.plots {
        write_plots(dir, &report).with_context(|| format!("plots in `{}`", dir.display()))?;
    }
    Ok(())
}

/// Stored samples drawn in the corner plot at most (thinned evenly).
const CORNER_POINTS: usize = 1000;

fn write_plots(dir: &Path, report: &SensitivityReport) -> anyhow::Result<()> {
    std::fs::create_dir_all(dir)?;
    let figure = EccentricityFigure {
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
        columns: 3,
        reference: Some(("least squares".into(), report.least_squares.e)),
    };
    let rows = report.runs.len().div_ceil(3).max(1) as u32;
    let path = dir.join("posterior-e.svg");
    {
        let root = SVGBackend::new(&path, (1200, 300 * rows)).into_drawing_area();
        draw_eccentricity_posteriors(&root, &figure)
            .map_err(|e| anyhow::anyhow!("{}: {e}", path.display()))?;
    }
    for (i, run) in report.runs.iter().enumerate() {
        let chains = &run.chains;
        let dim = chains.dim;
        let names = &run.parameter_names;
        let total = chains.n_walkers * chains.n_stored_steps;
        let stride = total.div_ceil(CORNER_POINTS).max(1);
        let samples: Vec<Vec<f64>> = (0..dim)
            .map(|p| {
                chains
                    .flat_parameter(p)
                    .into_iter()
                    .step_by(stride)
                    .collect()
            })
            .collect();
        let corner = CornerFigure {
            names: names.clone(),
            samples,
            reference: Some(run.start.point.clone()),
        };
        let path = dir.join(format!("corner-{}.svg", i + 1));
        {
            let side = (160 * dim as u32).max(480);
            let root = SVGBackend::new(&path, (side, side)).into_drawing_area();
            draw_corner(&root, &corner).map_err(|e| anyhow::anyhow!("{}: {e}", path.display()))?;
        }
        let traces = TraceFigure {
            parameters: (0..dim)
                .map(|p| ParameterTraces {
                    name: names[p].clone(),
                    walkers: chains.parameter_traces(p),
                })
                .collect(),
            step_label: "stored step after burn-in".into(),
        };
        let path = dir.join(format!("traces-{}.svg", i + 1));
        {
            let root = SVGBackend::new(&path, (1000, 110 * dim as u32 + 40)).into_drawing_area();
            draw_traces(&root, &traces).map_err(|e| anyhow::anyhow!("{}: {e}", path.display()))?;
        }
    }
    Ok(())
}
