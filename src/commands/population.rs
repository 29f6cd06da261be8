//! `eccaudit population INPUT...`: the eccentricity distribution of a population from the posterior draws saved by `priors --save-samples` or `survey --save-samples` (Hogg, Myers & Bovy 2010), as text, JSON, CSV and SVG figures; and the writers of those draws.

use std::fs;
use std::path::{Path, PathBuf};

use anyhow::{bail, Context};
use eccaudit_core::population::{
    infer_population, parse_samples_ecsv, population_csv, samples_file_name, samples_from_run,
    survey_table_samples, write_samples_ecsv, EccentricitySamples, PopulationSettings,
};
use eccaudit_core::posterior::PosteriorRun;
use eccaudit_core::sampler::Steer;
use eccaudit_plot::plotters::prelude::{IntoDrawingArea, SVGBackend};
use eccaudit_plot::{
    beta_parameter_figure, draw_beta_parameters, draw_population_density,
    population_density_figure, POPULATION_FIGURE_SIZE,
};

/// Arguments of `eccaudit population`.
#[derive(Debug, clap::Args)]
pub struct Args {
    /// Samples files (`posterior-e*.ecsv`), folders searched for them (a survey's --out, a
    /// priors --save-samples folder), or a survey's catalogue.csv / catalogue.json (its folder
    /// is searched).
    #[arg(required = true, num_args = 1..)]
    pub inputs: Vec<PathBuf>,
    /// Equal bins of the histogram population on [0, 1).
    #[arg(long, default_value_t = PopulationSettings::default().bins)]
    pub bins: usize,
    /// Step s of the Gaussian random walk of the histogram population's log heights.
    #[arg(long, default_value_t = PopulationSettings::default().smoothness)]
    pub smoothness: f64,
    /// Draws used per companion (files with more are thinned evenly).
    #[arg(long, default_value_t = PopulationSettings::default().max_draws_per_star)]
    pub draws_per_star: usize,
    /// Most log-density evaluations of each population run.
    #[arg(long, default_value_t = PopulationSettings::default().length.max_evaluations)]
    pub max_evaluations: u64,
    /// Seed of the population sampler.
    #[arg(long, default_value_t = PopulationSettings::default().sampler.seed)]
    pub seed: u64,
    /// Write population.json, population.csv, population-density.svg and beta-ab.svg here.
    #[arg(long, value_name = "DIR")]
    pub out: Option<PathBuf>,
    /// Print the report as JSON instead of text.
    #[arg(long)]
    pub json: bool,
}

/// Name prefix and extension of the samples files this command looks for in folders.
pub const SAMPLES_PREFIX: &str = "posterior-e";
/// See [`SAMPLES_PREFIX`].
pub const SAMPLES_EXTENSION: &str = "ecsv";

/// Most samples files read from folders (a bound on what a folder can make us read).
const MAX_FILES: usize = 100_000;

fn is_samples_file(path: &Path) -> bool {
    path.extension().is_some_and(|e| e == SAMPLES_EXTENSION)
        && path
            .file_name()
            .is_some_and(|n| n.to_string_lossy().starts_with(SAMPLES_PREFIX))
}

/// Samples files under `dir`, depth first, sorted by path.
fn find_samples(dir: &Path, found: &mut Vec<PathBuf>, depth: usize) -> anyhow::Result<()> {
    if depth > 8 {
        return Ok(());
    }
    let mut entries: Vec<PathBuf> = fs::read_dir(dir)
        .with_context(|| format!("cannot read the folder `{}`", dir.display()))?
        .filter_map(|e| e.ok().map(|e| e.path()))
        .collect();
    entries.sort();
    for path in entries {
        if path.is_dir() {
            find_samples(&path, found, depth + 1)?;
        } else if is_samples_file(&path) {
            if found.len() >= MAX_FILES {
                bail!(
                    "more than {MAX_FILES} samples files under `{}`",
                    dir.display()
                );
            }
            found.push(path);
        }
    }
    Ok(())
}

/// The samples files named by the inputs.
fn sample_files(inputs: &[PathBuf]) -> anyhow::Result<Vec<PathBuf>> {
    let mut files = Vec::new();
    for input in inputs {
        let name = input
            .file_name()
            .map(|n| n.to_string_lossy().into_owned())
            .unwrap_or_default();
        if input.is_dir() {
            let before = files.len();
            find_samples(input, &mut files, 0)?;
            if files.len() == before {
                bail!(
                    "`{}`: no {SAMPLES_PREFIX}*.{SAMPLES_EXTENSION} files in it (run `priors --save-samples DIR` or `survey --save-samples`)",
                    input.display()
                );
            }
        } else if name == "catalogue.csv" || name == "catalogue.json" {
            let dir = input.parent().filter(|p| !p.as_os_str().is_empty());
            let dir = dir.unwrap_or(Path::new("."));
            let before = files.len();
            find_samples(dir, &mut files, 0)?;
            if files.len() == before {
                bail!(
                    "`{}`: the survey folder holds no saved posterior draws (run the survey with --save-samples)",
                    input.display()
                );
            }
        } else if input.exists() {
            files.push(input.clone());
        } else {
            bail!("cannot read `{}`: no such file or folder", input.display());
        }
    }
    Ok(files)
}

/// Reads and runs the population inference; prints and writes.
pub fn run(args: Args) -> anyhow::Result<()> {
    let files = sample_files(&args.inputs)?;
    let mut samples = Vec::with_capacity(files.len());
    for path in &files {
        let text = super::read_input_text(path)?;
        samples.push(parse_samples_ecsv(&text, &path.display().to_string())?);
    }
    let defaults = PopulationSettings::default();
    let settings = PopulationSettings {
        bins: args.bins,
        smoothness: args.smoothness,
        max_draws_per_star: args.draws_per_star,
        sampler: eccaudit_core::sampler::SamplerSettings {
            seed: args.seed,
            ..defaults.sampler
        },
        length: eccaudit_core::sampler::RunLength {
            max_evaluations: args.max_evaluations,
            ..defaults.length
        },
        ..defaults
    };
    let report = infer_population(&samples, &settings, &mut || Steer::Continue)?;
    if args.json {
        for note in &report.notes {
            eprintln!("eccaudit: {note}");
        }
        println!("{}", serde_json::to_string_pretty(&report)?);
    } else {
        print!("{report}");
    }
    if let Some(dir) = &args.out {
        fs::create_dir_all(dir).with_context(|| format!("cannot create `{}`", dir.display()))?;
        let write = |name: &str, text: &str| {
            let path = dir.join(name);
            fs::write(&path, text).with_context(|| format!("cannot write `{}`", path.display()))
        };
        write("population.json", &serde_json::to_string_pretty(&report)?)?;
        write("population.csv", &population_csv(&report))?;
        let path = dir.join("population-density.svg");
        {
            let root = SVGBackend::new(&path, POPULATION_FIGURE_SIZE).into_drawing_area();
            draw_population_density(&root, &population_density_figure(&report))
                .map_err(|e| anyhow::anyhow!("{}: {e}", path.display()))?;
        }
        let path = dir.join("beta-ab.svg");
        {
            let root = SVGBackend::new(&path, POPULATION_FIGURE_SIZE).into_drawing_area();
            draw_beta_parameters(&root, &beta_parameter_figure(&report))
                .map_err(|e| anyhow::anyhow!("{}: {e}", path.display()))?;
        }
    }
    Ok(())
}

/// Writes the posterior draws of every companion of `run` into `dir` as
/// `{stem}.ecsv` (one companion) or `{stem}-cN.ecsv` (several); `least_squares_e[c-1]` is
/// companion c's least-squares e when known. Returns the files written.
pub fn write_run_samples(
    dir: &Path,
    stem: &str,
    table: &str,
    run: &PosteriorRun,
    n_companions: usize,
    least_squares_e: &[Option<f64>],
) -> anyhow::Result<Vec<PathBuf>> {
    fs::create_dir_all(dir).with_context(|| format!("cannot create `{}`", dir.display()))?;
    let mut written = Vec::new();
    for c in 1..=n_companions {
        let ls = least_squares_e.get(c - 1).copied().flatten();
        let Some(samples): Option<EccentricitySamples> = samples_from_run(table, c, run, ls) else {
            continue;
        };
        let name = if n_companions > 1 {
            format!("{stem}-c{c}.{SAMPLES_EXTENSION}")
        } else {
            format!("{stem}.{SAMPLES_EXTENSION}")
        };
        let path = dir.join(name);
        super::survey::write_atomic(&path, &write_samples_ecsv(&samples))?;
        written.push(path);
    }
    Ok(written)
}

/// `survey --save-samples SPEC`: the draws of every companion of `table`
/// ([`eccaudit_core::population::survey_table_samples`], the same as the page's survey) written
/// into `folder` (`posterior-e.ecsv`, or `posterior-e-cN.ecsv` with several). A posterior that
/// fails is reported on standard error and leaves no file; the audit stands.
pub fn save_table_samples(
    folder: &Path,
    table_name: &str,
    table: &eccaudit_core::table::VelocityTable,
    settings: &eccaudit_core::audit::AuditSettings,
    spec: &str,
    bar: &indicatif::ProgressBar,
) -> anyhow::Result<()> {
    let data = eccaudit_core::fit::FitData::from_table(table);
    let samples = match survey_table_samples(&data, table_name, settings, spec) {
        Ok(samples) => samples,
        Err(e) => {
            bar.suspend(|| eprintln!("eccaudit: no posterior draws saved for `{table_name}`: {e}"));
            return Ok(());
        }
    };
    fs::create_dir_all(folder).with_context(|| format!("cannot create `{}`", folder.display()))?;
    let n = settings.model.companions;
    for s in &samples {
        let path = folder.join(samples_file_name(s.companion, n));
        super::survey::write_atomic(&path, &write_samples_ecsv(s))?;
    }
    Ok(())
}
