//! `eccaudit priors FILE`: sample the posterior under a set of eccentricity priors and print, per
//! prior, what e looks like (text table or JSON); optionally write the figures as SVG.

use std::io::IsTerminal;
use std::path::{Path, PathBuf};
use std::time::{Duration, Instant};

use super::input::{read_table, TableArgs};
use super::model_args::ModelArgs;
use anyhow::Context;
use eccaudit_core::fit::FitData;
use eccaudit_core::posterior::{
    prior_sensitivity, PosteriorProgress, SensitivityReport, SensitivityRequest,
    SensitivitySettings,
};
use eccaudit_core::sampler::Steer;
use eccaudit_core::spec::fit_model;
use eccaudit_plot::plotters::prelude::{IntoDrawingArea, SVGBackend};
use eccaudit_plot::{
    corner_figure, corner_figure_size, draw_corner, draw_eccentricity_posteriors, draw_traces,
    eccentricity_figure, eccentricity_figure_size, trace_figure, trace_figure_size, CORNER_POINTS,
};
use indicatif::{ProgressBar, ProgressDrawTarget, ProgressStyle};

/// Arguments of `eccaudit priors`.
#[derive(Debug, clap::Args)]
pub struct Args {
    /// Velocity table: CSV, TSV or whitespace-separated; columns time, velocity, uncertainty[, instrument].
    pub file: PathBuf,
    /// Eccentricity prior, repeatable: SHAPE[(ARGS)][:E_MIN..E_MAX] with SHAPE one of uniform,
    /// beta(a,b), kipping2013, kipping2013short|long|auto, rayleigh(sigma), halfnormal(sigma),
    /// loguniform, ecosw, sqrtecosw, jeffreys (from the table's Fisher information).
    /// Default: uniform:0..0.99, uniform:0..0.8, uniform:0..0.5, kipping2013, rayleigh(0.3), ecosw.
    #[arg(long = "priors", value_name = "SPEC", num_args = 1..)]
    pub priors: Vec<String>,
    /// Walkers per ensemble (raised to 2·parameters + 2 when the model needs more).
    #[arg(long, default_value_t = SensitivityRequest::default().walkers)]
    pub walkers: usize,
    /// Steps after burn-in before the first convergence check (each run then extends itself
    /// until converged, unless --fixed-length).
    #[arg(long, default_value_t = SensitivityRequest::default().steps)]
    pub steps: usize,
    /// Burn-in steps.
    #[arg(long, default_value_t = SensitivityRequest::default().burn)]
    pub burn: usize,
    /// Independent ensembles per prior (the convergence rule compares them; at least 2).
    #[arg(long, default_value_t = SensitivityRequest::default().ensembles)]
    pub ensembles: usize,
    /// Run exactly --burn + --steps steps instead of extending each run until converged.
    #[arg(long)]
    pub fixed_length: bool,
    /// Most log-density evaluations per prior.
    #[arg(long, default_value_t = SensitivityRequest::default().max_evaluations)]
    pub max_evaluations: u64,
    /// Stop each prior's run after this many seconds and report it as it stands (the verdict
    /// then says whether it converged).
    #[arg(long, value_name = "SECONDS")]
    pub time_limit: Option<f64>,
    /// Hide the progress line (it is hidden anyway when standard error is not a terminal).
    #[arg(long)]
    pub quiet: bool,
    /// Seed of the sampler (the same for every prior).
    #[arg(long, default_value_t = SensitivityRequest::default().seed)]
    pub seed: u64,
    /// Write posterior-e.svg, and corner-N.svg and traces-N.svg per prior, into this directory.
    #[arg(long, value_name = "DIR")]
    pub plots: Option<PathBuf>,
    /// Write each prior's posterior draws of e (every companion, thinned to about the run's
    /// effective sample size) as DIR/posterior-e-N.ecsv, for `eccaudit population`.
    #[arg(long, value_name = "DIR")]
    pub save_samples: Option<PathBuf>,
    #[command(flatten)]
    pub model: ModelArgs,
    /// Summarise e of this companion (1-based, in the order of the least-squares fit; default
    /// 1). Every companion is sampled under the same eccentricity prior.
    #[arg(long, value_name = "N")]
    pub companion: Option<usize>,
    /// Period prior, log-uniform on [MIN, MAX] days.
    #[arg(long, num_args = 2, value_names = ["MIN", "MAX"], default_values_t = SensitivityRequest::default().period_range)]
    pub period_range: Vec<f64>,
    /// Largest K [m/s] of its modified Jeffreys prior (knee 1 m/s).
    #[arg(long, default_value_t = SensitivityRequest::default().k_max)]
    pub k_max: f64,
    /// Largest jitter [m/s] of its modified Jeffreys prior (knee 1 m/s).
    #[arg(long, default_value_t = SensitivityRequest::default().jitter_max)]
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
        ensembles: args.ensembles,
        until_converged: !args.fixed_length,
        max_evaluations: args.max_evaluations,
        seed: args.seed,
        model: args.model.spec(args.companion),
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
    if let Some(limit) = args.time_limit {
        if !(limit > 0.0 && limit.is_finite()) {
            anyhow::bail!("--time-limit {limit}: give a positive number of seconds");
        }
    }
    let bar = if args.quiet || !std::io::stderr().is_terminal() {
        ProgressBar::hidden()
    } else {
        ProgressBar::with_draw_target(Some(1000), ProgressDrawTarget::stderr())
    };
    bar.set_style(
        ProgressStyle::with_template("{prefix} [{bar:30}] {msg}")
            .expect("valid template")
            .progress_chars("=> "),
    );
    let mut observer = progress_observer(bar.clone(), args.time_limit);
    let report = prior_sensitivity(&data, &settings, &mut observer)
        .with_context(|| format!("posterior of `{source_name}`"))?;
    bar.finish_and_clear();
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
    if let Some(dir) = &args.save_samples {
        for (i, run) in report.runs.iter().enumerate() {
            let stem = format!("{}-{}", super::population::SAMPLES_PREFIX, i + 1);
            // The least-squares e is known here for the summarised companion only.
            let mut ls = vec![None; settings.posterior.n_companions];
            if let Some(slot) = ls.get_mut(report.least_squares.companion) {
                *slot = Some(report.least_squares.e);
            }
            super::population::write_run_samples(
                dir,
                &stem,
                &source_name,
                run,
                settings.posterior.n_companions,
                &ls,
            )?;
        }
    }
    if let Some(dir) = &args.plots {
        write_plots(dir, &report).with_context(|| format!("plots in `{}`", dir.display()))?;
    }
    Ok(())
}

/// The observer of `priors`: a progress line per prior (steps, evaluations against the budget,
/// run length in autocorrelation times at the last check) and the time limit, kept here
/// because the core reads no clock.
fn progress_observer(
    bar: ProgressBar,
    time_limit: Option<f64>,
) -> impl FnMut(PosteriorProgress) -> Steer {
    let mut prior_started = (usize::MAX, Instant::now());
    move |p: PosteriorProgress| {
        if prior_started.0 != p.prior_index {
            prior_started = (p.prior_index, Instant::now());
            bar.set_prefix(format!("prior {}/{}", p.prior_index + 1, p.n_priors));
        }
        bar.set_position((1000 * p.evaluations / p.max_evaluations.max(1)).min(1000));
        let phase = if p.steps_done < p.n_burn {
            "burn-in".to_string()
        } else if p.autocorrelation_times.is_finite() {
            format!(
                "{:.0} autocorrelation times at the last check",
                p.autocorrelation_times
            )
        } else {
            "sampling".to_string()
        };
        bar.set_message(format!(
            "step {} of {} planned; {} evaluations (budget {}); {phase}",
            p.steps_done, p.total_steps, p.evaluations, p.max_evaluations
        ));
        match time_limit {
            Some(limit) if prior_started.1.elapsed() >= Duration::from_secs_f64(limit) => {
                Steer::Finish
            }
            _ => Steer::Continue,
        }
    }
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
