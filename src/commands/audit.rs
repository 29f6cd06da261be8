//! `eccaudit audit FILE`: the one-shot audit — least-squares fit, injection–recovery at the
//! fitted orbit with the data's own epochs and error bars, and the eccentricity statement.
//! (A prior set and posterior estimators will join when the sampler lands.)

use std::fs;
use std::path::PathBuf;

use anyhow::Context;
use eccaudit_core::inject::{eccentricity_statement, summarise, Estimator, FittedOrbit, Sampling};
use eccaudit_core::random::stream_rng;

use super::inject::{
    design, estimator, fit_table, read_table, run_design, write_outputs, RunArgs, TableArgs,
};

/// Stream of the generator handed to the estimators for the real data (trial streams are
/// 0, 1, …; the schedule uses u64::MAX).
const REAL_DATA_STREAM: u64 = u64::MAX - 1;

/// Arguments of `eccaudit audit`.
#[derive(Debug, clap::Args)]
pub struct Args {
    /// Velocity table: CSV, TSV or whitespace-separated; columns time, velocity, uncertainty[, instrument].
    pub file: PathBuf,
    #[command(flatten)]
    pub run: RunArgs,
    #[command(flatten)]
    pub table: TableArgs,
    /// Print the statement as JSON instead of text.
    #[arg(long)]
    pub json: bool,
}

/// Fit, simulate, summarise, state.
pub fn run(args: Args) -> anyhow::Result<()> {
    let table = read_table(&args.file, &args.table)?;
    let (data, report) = fit_table(&table)?;
    let companion = &report.eccentric.companions[0];
    let period = companion.period.value;
    let semi_amplitude = companion.semi_amplitude.value;
    let design = design(
        Sampling::from_table(&table),
        period,
        vec![semi_amplitude],
        &args.run,
    )?;
    let lsq = estimator(&args.run);
    let estimators: [&dyn Estimator; 1] = [&lsq];
    // The real data, estimated exactly as each simulation is.
    let mut rng = stream_rng(design.seed, REAL_DATA_STREAM);
    let observed_lsq = lsq
        .estimate(&data, &design, &mut rng)
        .with_context(|| format!("least squares on `{}`", args.file.display()))?;
    let lucy_sweeney_p = lsq
        .outputs()
        .iter()
        .zip(&observed_lsq)
        .find(|(o, _)| o.name == "lucy_sweeney")
        .and_then(|(_, e)| e.extra.first().copied());
    let observed: Vec<_> = observed_lsq.into_iter().map(Some).collect();

    let (records, complete) = run_design(&design, &estimators, &args.run)?;
    let summary = summarise(&design, &estimators, &records);
    write_outputs(
        &summary,
        &args.run.out,
        observed[0].as_ref().map(|e| e.point),
    )?;
    let statement = eccentricity_statement(
        &summary,
        &records,
        &observed,
        FittedOrbit {
            period,
            semi_amplitude,
            omega: companion.omega_deg.value.to_radians(),
            lucy_sweeney_p,
        },
    )?;
    let text = statement.text();
    fs::write(args.run.out.join("statement.txt"), &text)
        .with_context(|| format!("cannot write into `{}`", args.run.out.display()))?;
    fs::write(
        args.run.out.join("statement.json"),
        serde_json::to_string_pretty(&statement)?,
    )
    .with_context(|| format!("cannot write into `{}`", args.run.out.display()))?;
    if args.json {
        println!("{}", serde_json::to_string_pretty(&statement)?);
    } else {
        println!(
            "{} ({})",
            args.file.display(),
            table.time_convention().label()
        );
        print!("{text}");
        println!("Outputs in {}", args.run.out.display());
    }
    if !complete {
        eprintln!(
            "eccaudit: note: {} of {} trials done; the statement uses those only; run again with --resume to finish",
            records.len(),
            design.n_trials()
        );
    }
    Ok(())
}
