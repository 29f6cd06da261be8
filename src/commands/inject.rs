//! `eccaudit inject`: injection–recovery at the observer's own epochs and error bars, on all
//! cores, streamed to a resumable CSV, with a JSON summary and SVG figures.

use std::collections::HashSet;
use std::fs::{self, OpenOptions};
use std::io::{IsTerminal, Write};
use std::ops::Range;
use std::path::{Path, PathBuf};
use std::sync::atomic::{AtomicU64, Ordering};
use std::sync::Mutex;

use super::input::{read_table, TableArgs};
use super::model_args::ModelArgs;
use anyhow::{bail, Context};
use eccaudit_core::audit::{
    table_design, InjectedAmplitudes, PosteriorInjectionSettings, TableDesignGrid,
};
use eccaudit_core::inject::trials_ecsv;
use eccaudit_core::inject::{
    default_eccentricity_grid, run_trial, settings_fingerprint, summarise, trial_file, Estimator,
    InjectionDesign, InjectionSummary, LeastSquaresEstimator, LeastSquaresSettings, Sampling,
    Schedule, Spacing, TrialModel, TrialPeriod, TrialRecord,
};
use eccaudit_core::survey::Shard;
use eccaudit_plot::plotters::prelude::{IntoDrawingArea, SVGBackend};
use eccaudit_plot::{bias_figure, distribution_figure, draw_bias_curve, draw_distributions};
use indicatif::{ProgressBar, ProgressDrawTarget, ProgressStyle};
use rayon::prelude::*;

/// Options shared by `inject` and `audit`: the run itself.
#[derive(Debug, Clone, clap::Args)]
pub struct RunArgs {
    /// Injected eccentricities, comma-separated (default 0, 0.05, ..., 0.6).
    #[arg(long = "e", value_delimiter = ',', value_name = "E,...")]
    pub eccentricities: Vec<f64>,
    /// Injected arguments of periastron [deg], comma-separated (default: random per trial).
    #[arg(long = "omega", value_delimiter = ',', value_name = "DEG,...")]
    pub omegas_deg: Vec<f64>,
    /// Extra Gaussian noise [m/s] added in quadrature to each uncertainty and told to the
    /// estimators as known (instrument jitters are the model's: see --jitter).
    #[arg(long, value_name = "M/S", default_value_t = 0.0)]
    pub added_noise: f64,
    /// Trials per grid cell (default: 200 for `inject`; for `audit`, the base trials per cell
    /// of its settings, to which it adds trials where its statement needs them).
    #[arg(long)]
    pub trials: Option<usize>,
    /// Master seed: trial i draws from the stream (seed, i).
    #[arg(long, default_value_t = 1)]
    pub seed: u64,
    /// Worker threads (default: all cores, or RAYON_NUM_THREADS).
    #[arg(long)]
    pub threads: Option<usize>,
    /// Directory for trials.csv, summary.json, bias.svg and distributions.svg.
    #[arg(long, value_name = "DIR")]
    pub out: PathBuf,
    /// Continue the run in DIR: keep its finished trials (the settings must match).
    #[arg(long)]
    pub resume: bool,
    /// Stop after this many new trials (to split a run over sessions; resume later).
    #[arg(long, value_name = "N")]
    pub stop_after: Option<u64>,
    /// Least squares in each trial: search the periodogram instead of starting at the known
    /// (injected) period.
    #[arg(long)]
    pub period_search: bool,
    /// Starting eccentricities of the least-squares fit in each trial.
    #[arg(long, value_delimiter = ',', default_values_t = LeastSquaresSettings::default().start_eccentricities)]
    pub start_e: Vec<f64>,
    /// Starting omega values per starting eccentricity.
    #[arg(long, default_value_t = LeastSquaresSettings::default().n_omega_starts)]
    pub omega_starts: usize,
    /// Leave out the Lucy-Sweeney output.
    #[arg(long)]
    pub no_lucy_sweeney: bool,
    /// Posterior estimators: one eccentricity prior spec per flag (`uniform`, `kipping2013`,
    /// `beta(0.867,3.03):0..0.8`, `rayleigh(0.3)`, …); each gives the posterior median, mean and
    /// mode of e from a short sampler run per trial. Default: `uniform` (on [0, 0.99]).
    #[arg(long = "posterior", value_name = "PRIOR")]
    pub posterior_priors: Vec<String>,
    /// Least squares only: no posterior estimators (much faster).
    #[arg(long, conflicts_with = "posterior_priors")]
    pub no_posterior: bool,
    /// Walkers per ensemble of each posterior run (4 independent ensembles).
    #[arg(long, default_value_t = 16)]
    pub posterior_walkers: usize,
    /// Steps of each posterior run after burn-in before its first convergence check; the run
    /// then extends itself until converged or out of budget.
    #[arg(long, default_value_t = 400)]
    pub posterior_steps: usize,
    /// Burn-in steps of each posterior run.
    #[arg(long, default_value_t = 200)]
    pub posterior_burn: usize,
    /// Most log-density evaluations of each posterior run (its per-trial budget).
    #[arg(long, default_value_t = eccaudit_core::posterior::FAST_MAX_EVALUATIONS)]
    pub posterior_max_evaluations: u64,
    /// `audit` and `survey`: base simulations per injected e that also run the posterior
    /// estimators (the first ones of each e; the others run least squares only). Posterior
    /// runs are the expensive part of an audit; their Monte-Carlo errors are printed.
    /// Default 8; `inject` runs the posterior in every trial.
    #[arg(long, value_name = "N", default_value_t = eccaudit_core::audit::DEFAULT_POSTERIOR_TRIALS_PER_CELL)]
    pub posterior_trials: usize,
    /// Hide the progress bar (it is hidden anyway when standard error is not a terminal).
    #[arg(long)]
    pub quiet: bool,
    /// Run slice I of N (0 ≤ I < N) of the work: trial t when t mod N = I (for `survey`: table
    /// i when i mod N = I). Inside a Slurm job array the slice defaults to the array task's
    /// (SLURM_ARRAY_TASK_ID of SLURM_ARRAY_TASK_COUNT); `--shard 0/1` runs everything.
    /// Combine the slices with `eccaudit merge`.
    #[arg(long, value_name = "I/N")]
    pub shard: Option<Shard>,
    /// `audit` and `survey`: most circular simulations the circular decision may add (default
    /// and largest 10000); fewer is quicker, and the decision's p less precise (its Monte-Carlo
    /// error is printed either way).
    #[arg(long, value_name = "N", default_value_t = eccaudit_core::inject::adaptive::DECISION_CAP)]
    pub max_circular: u64,
    /// `audit` and `survey`: the estimator the statement quotes, by its name in the
    /// statement's table (`lsq`, or a posterior output such as `posterior_uniform_median`);
    /// default: the stated rule (smallest RMSE over the injected e inside its calibrated
    /// interval). Stored in the settings file.
    #[arg(long, value_name = "NAME")]
    pub estimator: Option<String>,
}

impl RunArgs {
    /// The slice of the work to run: `--shard`, else the Slurm array task's, else all of it.
    pub fn shard(&self) -> anyhow::Result<Shard> {
        if let Some(shard) = self.shard {
            return Ok(shard);
        }
        let var = |name: &str| std::env::var(name).ok().filter(|v| !v.trim().is_empty());
        let Some(id) = var("SLURM_ARRAY_TASK_ID") else {
            return Ok(Shard::WHOLE);
        };
        let number = |name: &str, text: &str| -> anyhow::Result<usize> {
            text.trim()
                .parse::<usize>()
                .with_context(|| format!("{name}=`{text}` is not a whole number"))
        };
        let id = number("SLURM_ARRAY_TASK_ID", &id)?;
        let min =
            var("SLURM_ARRAY_TASK_MIN").map_or(Ok(0), |v| number("SLURM_ARRAY_TASK_MIN", &v))?;
        let span = match var("SLURM_ARRAY_TASK_MAX") {
            Some(max) => Some(number("SLURM_ARRAY_TASK_MAX", &max)? + 1 - min),
            None => None,
        };
        let count = match (var("SLURM_ARRAY_TASK_COUNT"), span) {
            (Some(c), Some(span)) => {
                let c = number("SLURM_ARRAY_TASK_COUNT", &c)?;
                if c != span {
                    bail!(
                        "the Slurm array is not a plain range (SLURM_ARRAY_TASK_COUNT={c}, \
                         MIN..MAX spans {span}): give --shard I/N"
                    );
                }
                c
            }
            (Some(c), None) => number("SLURM_ARRAY_TASK_COUNT", &c)?,
            (None, Some(span)) => span,
            (None, None) => bail!(
                "SLURM_ARRAY_TASK_ID is set but neither SLURM_ARRAY_TASK_COUNT nor \
                 SLURM_ARRAY_TASK_MAX: give --shard I/N"
            ),
        };
        let index = id.checked_sub(min).with_context(|| {
            format!("SLURM_ARRAY_TASK_ID={id} is below SLURM_ARRAY_TASK_MIN={min}")
        })?;
        let shard = Shard::new(index, count)?;
        eprintln!("eccaudit: note: running shard {shard} (from the Slurm job array)");
        Ok(shard)
    }
}

/// Arguments of `eccaudit inject`.
#[derive(Debug, clap::Args)]
pub struct Args {
    /// Velocity table whose epochs and uncertainties are simulated (omit to use a schedule).
    pub file: Option<PathBuf>,
    /// Schedule: number of epochs (instead of a table).
    #[arg(long)]
    pub epochs: Option<usize>,
    /// Schedule: baseline [d].
    #[arg(long)]
    pub baseline: Option<f64>,
    /// Schedule: first epoch [d].
    #[arg(long, default_value_t = 0.0)]
    pub start: f64,
    /// Schedule: regular or random epochs.
    #[arg(long, default_value = "random", value_parser = ["regular", "random"])]
    pub spacing: String,
    /// Schedule: stated uncertainty of every epoch [m/s].
    #[arg(long)]
    pub uncertainty: Option<f64>,
    /// The model fitted to a table (with a schedule: the first --period is the injected one).
    #[command(flatten)]
    pub model: ModelArgs,
    /// Injected semi-amplitudes [m/s], comma-separated (default: fitted to the table).
    #[arg(
        long = "k",
        value_delimiter = ',',
        value_name = "K,...",
        conflicts_with = "k_over_sigma"
    )]
    pub semi_amplitudes: Vec<f64>,
    /// Injected K/sigma values, comma-separated (sigma: median uncertainty with the jitter).
    #[arg(long, value_delimiter = ',', value_name = "RATIO,...")]
    pub k_over_sigma: Vec<f64>,
    #[command(flatten)]
    pub run: RunArgs,
    #[command(flatten)]
    pub table: TableArgs,
    /// Print the summary as JSON instead of a text table.
    #[arg(long)]
    pub json: bool,
}

/// The least-squares estimator of the run arguments.
pub fn estimator(run: &RunArgs) -> LeastSquaresEstimator {
    LeastSquaresEstimator {
        settings: LeastSquaresSettings {
            period: if run.period_search {
                TrialPeriod::Search
            } else {
                TrialPeriod::StartAtKnown
            },
            start_eccentricities: run.start_e.clone(),
            n_omega_starts: run.omega_starts,
            lucy_sweeney: !run.no_lucy_sweeney,
            ..LeastSquaresSettings::default()
        },
    }
}

/// The posterior estimators of the run arguments (the same settings type the audit replay uses).
pub fn posterior_settings(run: &RunArgs) -> PosteriorInjectionSettings {
    PosteriorInjectionSettings {
        priors: if run.no_posterior {
            Vec::new()
        } else if run.posterior_priors.is_empty() {
            PosteriorInjectionSettings::default().priors
        } else {
            run.posterior_priors.clone()
        },
        n_walkers: run.posterior_walkers,
        n_steps: run.posterior_steps,
        n_burn: run.posterior_burn,
        max_evaluations: run.posterior_max_evaluations,
        trials_per_cell: Some(run.posterior_trials),
    }
}

/// The design from a sampling, a period, semi-amplitudes and the run arguments.
pub fn design(
    sampling: Sampling,
    period: f64,
    semi_amplitudes: Vec<f64>,
    run: &RunArgs,
) -> anyhow::Result<InjectionDesign> {
    let design = InjectionDesign {
        sampling,
        period,
        eccentricities: if run.eccentricities.is_empty() {
            default_eccentricity_grid()
        } else {
            run.eccentricities.clone()
        },
        semi_amplitudes,
        omegas: run.omegas_deg.iter().map(|d| d.to_radians()).collect(),
        jitter: run.added_noise,
        trials_per_cell: run.trials.unwrap_or(200),
        seed: run.seed,
        model: TrialModel::default(),
    };
    design.validate()?;
    Ok(design)
}

/// Writes the complete trial file (magic line, header, `records` in trial order) through a
/// temporary file, so an interruption never leaves a half-written file.
fn write_csv_file(
    path: &Path,
    fingerprint: &str,
    n_trials: u64,
    estimators: &[&dyn Estimator],
    records: &[TrialRecord],
) -> anyhow::Result<()> {
    let tmp = path.with_extension("csv.tmp");
    fs::write(
        &tmp,
        trial_file::write_trial_file(fingerprint, n_trials, estimators, records),
    )
    .with_context(|| format!("cannot write `{}`", tmp.display()))?;
    fs::rename(&tmp, path).with_context(|| format!("cannot write `{}`", path.display()))?;
    Ok(())
}

/// A progress bar on standard error (hidden with `quiet` or when it is not a terminal).
pub fn progress_bar(quiet: bool, length: u64, unit: &str) -> ProgressBar {
    let progress = if quiet || !std::io::stderr().is_terminal() {
        ProgressBar::hidden()
    } else {
        ProgressBar::with_draw_target(Some(length), ProgressDrawTarget::stderr())
    };
    progress.set_style(
        ProgressStyle::with_template(&format!(
            "{{spinner}} [{{elapsed_precise}}] {{wide_bar}} {{pos}}/{{len}} {unit} (ETA {{eta}}) {{msg}}"
        ))
        .expect("the progress template is valid"),
    );
    progress
}

/// How a run gets its trials: which to run next, and how to run one.
pub struct Driver<'a> {
    /// Runs one trial.
    pub run_one: &'a (dyn Fn(u64) -> anyhow::Result<TrialRecord> + Sync),
    /// The next batch of trial indices wanted, given the records so far (None: done).
    pub next: &'a dyn Fn(&[TrialRecord]) -> Option<Range<u64>>,
    /// True for an index the run may hold (records of other indices in a resumed file are dropped).
    pub valid: &'a dyn Fn(u64) -> bool,
}

/// Runs the trials `driver` asks for over the thread pool, batch after batch, keeping to the
/// trials of `shard`, appending each row to `out/trials.csv` as it finishes (advancing `bar`
/// when given, else its own); returns all records (old and new) sorted by trial index, and
/// whether the driver wants no more (false after `--stop-after`, and for a split shard, which
/// cannot choose the next adaptive batch without the other shards' trials: `eccaudit merge`
/// and a `--resume` run without `--shard` finish those).
pub fn run_design_with(
    design: &InjectionDesign,
    estimators: &[&dyn Estimator],
    run: &RunArgs,
    driver: &Driver,
    shard: Shard,
    bar: Option<&ProgressBar>,
) -> anyhow::Result<(Vec<TrialRecord>, bool)> {
    fs::create_dir_all(&run.out)
        .with_context(|| format!("cannot create `{}`", run.out.display()))?;
    let csv_path = run.out.join("trials.csv");
    let fingerprint = settings_fingerprint(design, estimators);
    let n_trials = design.n_trials();
    let mut records = if run.resume && csv_path.exists() {
        let text = super::read_input_text(&csv_path).context("--resume")?;
        let name = csv_path.display().to_string();
        trial_file::read_trial_file(&text, &name, estimators, Some(&fingerprint))
            .context("--resume")?
            .records
    } else {
        if csv_path.exists() && !run.resume {
            bail!(
                "`{}` exists: add --resume to continue that run, or choose another --out",
                csv_path.display()
            );
        }
        Vec::new()
    };
    trial_file::normalise_records(&mut records, n_trials);
    records.retain(|r| (driver.valid)(r.trial));
    // Start the file afresh from the trials kept (drops a cut-off row), then append.
    write_csv_file(&csv_path, &fingerprint, n_trials, estimators, &records)?;
    let mut done: HashSet<u64> = records.iter().map(|r| r.trial).collect();

    let file = OpenOptions::new()
        .append(true)
        .open(&csv_path)
        .with_context(|| format!("cannot append to `{}`", csv_path.display()))?;
    let writer = Mutex::new(file);
    let own_bar;
    let progress = match bar {
        Some(bar) => bar,
        None => {
            own_bar = progress_bar(run.quiet, 0, "trials");
            &own_bar
        }
    };
    let pool = match run.threads {
        Some(n) => Some(
            rayon::ThreadPoolBuilder::new()
                .num_threads(n)
                .build()
                .context("cannot start the worker threads")?,
        ),
        None => None,
    };
    let mut budget = run.stop_after.unwrap_or(u64::MAX);
    while let Some(batch) = (driver.next)(&records) {
        let pending: Vec<u64> = batch
            .filter(|t| !done.contains(t) && shard.contains(*t))
            .collect();
        if pending.is_empty() || budget == 0 {
            break;
        }
        let to_run = budget.min(pending.len() as u64);
        // A caller's bar already counts the base design; extra trials lengthen it.
        let new_length = if bar.is_some() {
            pending
                .iter()
                .take(to_run as usize)
                .filter(|&&t| t >= n_trials)
                .count() as u64
        } else {
            to_run
        };
        progress.inc_length(new_length);
        let started = AtomicU64::new(0);
        let work = || -> anyhow::Result<Vec<TrialRecord>> {
            pending
                .par_iter()
                .filter(|_| started.fetch_add(1, Ordering::Relaxed) < to_run)
                .map(|&trial| -> anyhow::Result<TrialRecord> {
                    let record = (driver.run_one)(trial)?;
                    let line = trial_file::row_line(&record, estimators);
                    let mut w = writer.lock().expect("no thread panicked while writing");
                    w.write_all(line.as_bytes())?;
                    progress.inc(1);
                    Ok(record)
                })
                .collect()
        };
        let new_records = match &pool {
            Some(pool) => pool.install(work)?,
            None => work()?,
        };
        budget -= new_records.len() as u64;
        done.extend(new_records.iter().map(|r| r.trial));
        records.extend(new_records);
        records.sort_by_key(|r| r.trial);
    }
    let complete = (driver.next)(&records).is_none();
    if bar.is_none() {
        progress.finish_and_clear();
    }
    drop(writer);
    // The final file holds every row in trial order, whatever order they finished in.
    write_csv_file(&csv_path, &fingerprint, n_trials, estimators, &records)?;
    // The same trials as ECSV, which astropy reads with units.
    let ecsv_path = run.out.join("trials.ecsv");
    let meta = [("settings_fingerprint", fingerprint.clone())];
    fs::write(&ecsv_path, trials_ecsv(&records, estimators, &meta))
        .with_context(|| format!("cannot write `{}`", ecsv_path.display()))?;
    Ok((records, complete))
}

/// What a shard of a trial grid leaves behind, and how to combine the shards.
pub fn shard_note(shard: Shard, records: &[TrialRecord], n_trials: u64, out: &Path) {
    let mine = (0..n_trials).filter(|&t| shard.contains(t)).count();
    let done = records.iter().filter(|r| shard.contains(r.trial)).count();
    eprintln!(
        "eccaudit: note: shard {shard}: {done} of its {mine} trials are in {}; when every shard \
         is done, `eccaudit merge SHARD_DIRS... --out DIR` combines them and the same command \
         with `--out DIR --resume` (no --shard) writes the summary",
        out.join("trials.csv").display()
    );
}

/// Writes summary.json and the two figures.
pub fn write_outputs(
    summary: &InjectionSummary,
    out: &Path,
    observed: Option<f64>,
) -> anyhow::Result<()> {
    let json_path = out.join("summary.json");
    fs::write(&json_path, serde_json::to_string_pretty(summary)?)
        .with_context(|| format!("cannot write `{}`", json_path.display()))?;
    let bias_path = out.join("bias.svg");
    {
        let root = SVGBackend::new(&bias_path, (760, 560)).into_drawing_area();
        draw_bias_curve(&root, &bias_figure(summary, observed))
            .map_err(|e| anyhow::anyhow!("cannot draw `{}`: {e}", bias_path.display()))?;
    }
    let dist_path = out.join("distributions.svg");
    {
        let root = SVGBackend::new(&dist_path, (1000, 640)).into_drawing_area();
        draw_distributions(&root, &distribution_figure(summary))
            .map_err(|e| anyhow::anyhow!("cannot draw `{}`: {e}", dist_path.display()))?;
    }
    Ok(())
}

/// Run the injection–recovery grid and report it.
pub fn run(args: Args) -> anyhow::Result<()> {
    let design = match (&args.file, args.epochs) {
        (Some(path), None) => {
            // The core's design of an injection run on a table (shared with Python).
            let table = read_table(path, &args.table)?;
            let grid = TableDesignGrid {
                eccentricities: args.run.eccentricities.clone(),
                omegas_deg: args.run.omegas_deg.clone(),
                added_noise: args.run.added_noise,
                trials_per_cell: args.run.trials.unwrap_or(200),
                seed: args.run.seed,
                semi_amplitudes: if !args.semi_amplitudes.is_empty() {
                    InjectedAmplitudes::Given(args.semi_amplitudes.clone())
                } else if !args.k_over_sigma.is_empty() {
                    InjectedAmplitudes::OverSigma(args.k_over_sigma.clone())
                } else {
                    InjectedAmplitudes::Fitted
                },
            };
            let (fit, design) = table_design(&table, &args.model.spec(Some(1)), &grid)?;
            for note in &fit.notes {
                eprintln!("eccaudit: {note}");
            }
            design
        }
        (None, Some(n_epochs)) => {
            let (Some(baseline), Some(uncertainty)) = (args.baseline, args.uncertainty) else {
                bail!("a schedule needs --epochs, --baseline and --uncertainty");
            };
            let schedule = Schedule {
                n_epochs,
                baseline,
                start_time: args.start,
                spacing: if args.spacing == "regular" {
                    Spacing::Regular
                } else {
                    Spacing::Random
                },
                uncertainty,
            };
            let sampling = Sampling::from_schedule(&schedule, args.run.seed)?;
            let Some(&period) = args.model.periods.first() else {
                bail!("a schedule needs --period");
            };
            let mut design = design(sampling, period, vec![1.0], &args.run)?;
            design.semi_amplitudes = if !args.semi_amplitudes.is_empty() {
                args.semi_amplitudes.clone()
            } else if !args.k_over_sigma.is_empty() {
                let unit = design.signal_to_noise(1.0);
                args.k_over_sigma.iter().map(|r| r / unit).collect()
            } else {
                bail!("a schedule needs --k or --k-over-sigma");
            };
            design.validate()?;
            design
        }
        (Some(_), Some(_)) => bail!("give either a table FILE or a schedule (--epochs), not both"),
        (None, None) => {
            bail!("give a table FILE or a schedule (--epochs, --baseline, --uncertainty)")
        }
    };
    let lsq = estimator(&args.run);
    // The trial posteriors sample the jitter as `priors` and `audit` do under the jitter mode.
    let posteriors = posterior_settings(&args.run).estimators_for_mode(
        args.run.seed,
        &design,
        args.model.jitter,
    )?;
    let estimators: Vec<&dyn Estimator> = std::iter::once(&lsq as &dyn Estimator)
        .chain(posteriors.iter().map(|p| p as &dyn Estimator))
        .collect();
    let n = design.n_trials();
    let run_one =
        |t: u64| -> anyhow::Result<TrialRecord> { Ok(run_trial(&design, &estimators, t)?) };
    let next = |records: &[TrialRecord]| (records.len() < n as usize).then_some(0..n);
    let valid = |t: u64| t < n;
    let driver = Driver {
        run_one: &run_one,
        next: &next,
        valid: &valid,
    };
    let shard = args.run.shard()?;
    let (records, complete) =
        run_design_with(&design, &estimators, &args.run, &driver, shard, None)?;
    if shard.is_split() && !complete {
        shard_note(shard, &records, design.n_trials(), &args.run.out);
        return Ok(());
    }
    let summary = summarise(&design, &estimators, &records);
    write_outputs(&summary, &args.run.out, None)?;
    if args.json {
        println!("{}", serde_json::to_string_pretty(&summary)?);
    } else {
        println!(
            "Injection-recovery: {} epochs, P = {:.6} d, {} cell(s) x {} trials, seed {}",
            design.sampling.n_epochs(),
            design.period,
            design.n_cells(),
            design.trials_per_cell,
            design.seed
        );
        for cost in &summary.estimator_costs {
            println!("Least squares per trial: {cost}");
        }
        print!("{}", summary.text_table());
        println!("Outputs in {}", args.run.out.display());
    }
    if !complete {
        eprintln!(
            "eccaudit: note: {} of {} trials done; run again with --resume to finish",
            records.len(),
            design.n_trials()
        );
    }
    Ok(())
}
