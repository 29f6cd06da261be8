//! `eccaudit fit FILE`: global least-squares Keplerian fit of a velocity table (text or JSON).

use std::path::PathBuf;

use super::input::{read_table, TableArgs};
use super::model_args::ModelArgs;
use anyhow::Context;
use eccaudit_core::fit::{FitData, FitOptions};
use eccaudit_core::spec::fit_model;

/// Arguments of `eccaudit fit`.
#[derive(Debug, clap::Args)]
pub struct Args {
    /// Velocity table: CSV, TSV or whitespace-separated; columns time, velocity, uncertainty[, instrument].
    pub file: PathBuf,
    #[command(flatten)]
    pub model: ModelArgs,
    /// Periodogram peaks used as starting periods.
    #[arg(long, default_value_t = FitOptions::default().n_peaks)]
    pub peaks: usize,
    /// Extra random (e, omega) starts per starting period.
    #[arg(long, default_value_t = FitOptions::default().n_random_starts)]
    pub random_starts: usize,
    /// Seed of the random starts.
    #[arg(long, default_value_t = FitOptions::default().seed)]
    pub seed: u64,
    /// Stellar mass [solar masses]; adds m sin i and the semi-major axis to the report.
    #[arg(long)]
    pub stellar_mass: Option<f64>,
    #[command(flatten)]
    pub table: TableArgs,
    /// Print the report as JSON instead of a text table.
    #[arg(long)]
    pub json: bool,
    /// Also write the figures as SVG into this folder: periodogram.svg and one
    /// phase-c1.svg, phase-c2.svg, ... per companion.
    #[arg(long, value_name = "DIR")]
    pub plots: Option<PathBuf>,
}

/// Read the table, fit the model, print (notes on excess scatter or marginal detections first).
pub fn run(args: Args) -> anyhow::Result<()> {
    let model = args.model.spec(None).validate()?;
    let source_name = args.file.display().to_string();
    let table = read_table(&args.file, &args.table)?;
    let data = FitData::from_table(&table);
    let base = FitOptions {
        n_peaks: args.peaks,
        n_random_starts: args.random_starts,
        seed: args.seed,
        stellar_mass: args.stellar_mass,
        ..FitOptions::default()
    };
    let fit = fit_model(&data, &model, &base).with_context(|| format!("fit of `{source_name}`"))?;
    if args.json {
        for note in &fit.notes {
            eprintln!("eccaudit: {note}");
        }
        println!("{}", serde_json::to_string_pretty(&fit)?);
    } else {
        for note in &fit.notes {
            println!("NOTE: {note}");
        }
        println!("{source_name} ({})", table.time_convention().label());
        print!("{}", fit.report);
        println!("Jitter: {}", fit.jitter.reason);
    }
    for warning in &fit.report.warnings {
        eprintln!("eccaudit: warning: {warning}");
    }
    if let Some(dir) = &args.plots {
        let label = table.time_convention().label();
        let options = model.fit_options(fit.jitter.fitted, &base);
        for path in super::fit_plots::write_plots(dir, &data, &options, &fit.report, &label)? {
            eprintln!("eccaudit: wrote {}", path.display());
        }
    }
    Ok(())
}
