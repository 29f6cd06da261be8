//! `eccaudit priors FILE`: sample the posterior under a set of eccentricity priors and print, per
//! prior, what e looks like (text table or JSON); optionally write the figures as SVG.

use std::ops::ControlFlow;
use std::path::{Path, PathBuf};

use super::input::{read_table, TableArgs};
use super::model_args::ModelArgs;
use anyhow::Context;
use eccaudit_core::fit::FitData;
use eccaudit_core::posterior::{
    prior_sensitivity, SensitivityReport, SensitivityRequest, SensitivitySettings,
};
use eccaudit_core::spec::fit_model;
use eccaudit_plot::plotters::prelude::{IntoDrawingArea, SVGBackend};
use eccaudit_plot::{
    corner_figure, corner_figure_size, draw_corner, draw_eccentricity_posteriors, draw_traces,
    eccentricity_figure, eccentricity_figure_size, trace_figure, trace_figure_size, CORNER_POINTS,
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
    #[command(flatten)]
    pub model: ModelArgs,
    /// Period prior, log-uniform on [MIN, MAX] days.
    #[arg(long, num_args = 2, value_names = ["MIN", "MAX"], default_values_t = [1.0, 1.0e4])]
    pub period_range: Vec<f64>,
    /// Largest K [m/s] of its modified Jeffreys prior (knee 1 m/s).
    #[arg(long, default_value_t = 2.0e5)]
    pub k_max: f64,
    /// Largest jitter [m/s] of its modified Jeffreys prior (knee 1 m/s).
    #[arg(long, default_value_t = 1.0e3)]
    pub jitter_max: f64,
    #[command(flatten)]
    pub table: TableArgs,
    /// Print the report as JSON instead of a text table.
    #[arg(long)]
    pub json: bool,
}

/// The flags as a core request: the page builds its settings through the same request.
fn settings(args: &Args) -> anyhow::Result<SensitivitySettings> {
    let request = SensitivityRequest {
        priors: args.priors.clone(),
        walkers: args.walkers,
        steps: args.steps,
        burn: args.burn,
        seed: args.seed,
        model: args.model.spec(None),
        period_range: [args.period_range[0], args.period_range[1]],
        k_max: args.k_max,
        jitter_max: args.jitter_max,
    };
    Ok(request.to_settings()?)
}

/// Read the table, run the set, print; write the figures when asked.
pub fn run(args: Args) -> anyhow::Result<()> {
    let settings = settings(&args)?;
    let source_name = args.file.display().to_string();
    let table = read_table(&args.file, &args.table)?;
    let data = FitData::from_table(&table);
    // The model's checks (chi2 test, jitter decision, false-alarm probabilities), from the
    // least-squares fit of the same model.
    let model = args.model.spec(None).validate()?;
    let check = fit_model(&data, &model, &settings.fit)
        .with_context(|| format!("fit of `{source_name}`"))?
        .check();
    let report = prior_sensitivity(&data, &settings, &mut |_| ControlFlow::Continue(()))
        .with_context(|| format!("posterior of `{source_name}`"))?;
    if args.json {
        for note in &check.notes {
            eprintln!("eccaudit: {note}");
        }
        let mut value = serde_json::to_value(&report)?;
        if let Some(object) = value.as_object_mut() {
            object.insert("model_check".into(), serde_json::to_value(&check)?);
        }
        println!("{}", serde_json::to_string_pretty(&value)?);
    } else {
        for note in &check.notes {
            println!("NOTE: {note}");
        }
        println!("{source_name} ({})", table.time_convention().label());
        print!("{report}");
        let mut lines = check.to_string();
        // The notes are printed first already.
        lines = lines
            .lines()
            .filter(|l| !l.starts_with("NOTE: "))
            .map(|l| format!("{l}\n"))
            .collect();
        print!("{lines}");
    }
    if let Some(dir) = &args.plots {
        write_plots(dir, &report).with_context(|| format!("plots in `{}`", dir.display()))?;
    }
    Ok(())
}

fn write_plots(dir: &Path, report: &SensitivityReport) -> anyhow::Result<()> {
    std::fs::create_dir_all(dir)?;
    let path = dir.join("posterior-e.svg");
    {
        let size = eccentricity_figure_size(report.runs.len());
        let root = SVGBackend::new(&path, size).into_drawing_area();
        draw_eccentricity_posteriors(&root, &eccentricity_figure(report))
            .map_err(|e| anyhow::anyhow!("{}: {e}", path.display()))?;
    }
    for (i, run) in report.runs.iter().enumerate() {
        let dim = run.chains.dim;
        let path = dir.join(format!("corner-{}.svg", i + 1));
        {
            let root = SVGBackend::new(&path, corner_figure_size(dim)).into_drawing_area();
            draw_corner(&root, &corner_figure(run, CORNER_POINTS))
                .map_err(|e| anyhow::anyhow!("{}: {e}", path.display()))?;
        }
        let path = dir.join(format!("traces-{}.svg", i + 1));
        {
            let root = SVGBackend::new(&path, trace_figure_size(dim)).into_drawing_area();
            draw_traces(&root, &trace_figure(run))
                .map_err(|e| anyhow::anyhow!("{}: {e}", path.display()))?;
        }
    }
    Ok(())
}
