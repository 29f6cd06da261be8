//! `eccaudit audit FILE`: the one-shot audit — least-squares fit, injection–recovery at the
//! fitted orbit with the data's own epochs and error bars, and the eccentricity statement.
//!
//! The work itself is `eccaudit_core::audit::AuditPlan`, the same plan the page runs in its
//! Web Workers; this command adds threads, a progress bar, resumable CSV output and files.
//! `--settings FILE` replays a settings file written by the page (or by `--write-settings`),
//! so the command line reproduces the page's numbers exactly.

use std::fs;
use std::path::{Path, PathBuf};

use anyhow::Context;
use eccaudit_core::audit::{
    data_fingerprint, AuditPlan, AuditReport, AuditSettings, DataIdentity, InjectionSettings,
    ReadSettings,
};
use eccaudit_core::inject::TrialRecord;
use eccaudit_core::survey::Shard;
use eccaudit_core::table::{parse_table, ReadOptions};

use super::inject::{
    posterior_settings, run_design_with, shard_note, write_outputs, Driver, RunArgs,
};
use indicatif::ProgressBar;

use super::input::TableArgs;
use super::model_args::ModelArgs;

/// Arguments of `eccaudit audit`.
#[derive(Debug, clap::Args)]
pub struct Args {
    /// Velocity table: CSV, TSV or whitespace-separated; columns time, velocity, uncertainty[, instrument].
    pub file: PathBuf,
    #[command(flatten)]
    pub model: ModelArgs,
    /// Audit only this companion (1-based); default: every companion, each with its own
    /// statement (outputs in DIR/c1, DIR/c2, ... when there are several).
    #[arg(long, value_name = "N")]
    pub companion: Option<usize>,
    #[command(flatten)]
    pub run: RunArgs,
    #[command(flatten)]
    pub table: TableArgs,
    /// Replay a settings file (JSON, written by the page or by --write-settings). Every analysis
    /// choice then comes from the file; only --out, --resume, --stop-after, --threads and --quiet
    /// still apply. The table must be the one the settings name (its SHA-256 is checked).
    #[arg(long, value_name = "FILE")]
    pub settings: Option<PathBuf>,
    /// Also write this run's settings, with the table's SHA-256, to FILE.
    #[arg(long, value_name = "FILE")]
    pub write_settings: Option<PathBuf>,
    /// Print the statement as JSON instead of text.
    #[arg(long)]
    pub json: bool,
}

/// The settings from the command-line flags (shared by `audit` and `survey`).
pub fn settings_from_flags(
    run: &RunArgs,
    table: &TableArgs,
    model: &ModelArgs,
    companion: Option<usize>,
    identity: Option<DataIdentity>,
) -> AuditSettings {
    AuditSettings {
        data: identity,
        read: ReadSettings {
            velocity_unit: table.velocity_unit,
            time: table.time,
        },
        model: model.spec(companion),
        injection: InjectionSettings {
            eccentricities: if run.eccentricities.is_empty() {
                InjectionSettings::default().eccentricities
            } else {
                run.eccentricities.clone()
            },
            trials_per_cell: run
                .trials
                .unwrap_or(InjectionSettings::default().trials_per_cell),
            jitter: run.added_noise,
            omegas_deg: run.omegas_deg.clone(),
            period_search: run.period_search,
            start_eccentricities: run.start_e.clone(),
            n_omega_starts: run.omega_starts,
            lucy_sweeney: !run.no_lucy_sweeney,
            posterior: posterior_settings(run),
            estimator: run.estimator.clone(),
            max_circular_trials: run.max_circular,
        },
        seed: run.seed,
        ..AuditSettings::default()
    }
}

/// Writes an audit's files into `out`: summary.json and the figures, statement.txt,
/// statement.json, context.json and settings.json (shared by `audit` and `survey`).
pub fn write_audit_outputs(
    report: &AuditReport,
    settings: &AuditSettings,
    out: &Path,
) -> anyhow::Result<()> {
    let lsq_observed = report.statement.observed_least_squares();
    write_outputs(&report.injection, out, lsq_observed)?;
    fs::write(out.join("statement.txt"), report.statement.text())
        .with_context(|| format!("cannot write into `{}`", out.display()))?;
    fs::write(
        out.join("statement.json"),
        serde_json::to_string_pretty(&report.statement)?,
    )
    .with_context(|| format!("cannot write into `{}`", out.display()))?;
    fs::write(
        out.join("context.json"),
        serde_json::to_string_pretty(&report.context)?,
    )
    .with_context(|| format!("cannot write into `{}`", out.display()))?;
    fs::write(out.join("settings.json"), settings.to_json())
        .with_context(|| format!("cannot write into `{}`", out.display()))?;
    Ok(())
}

/// Runs the trials of `plan` that `shard` holds, batch after batch as the plan's adaptive rule
/// asks (`AuditPlan::next_batch`), into `run.out/trials.csv`; see `run_design_with`.
pub fn run_plan(
    plan: &AuditPlan,
    run: &RunArgs,
    shard: Shard,
    bar: Option<&ProgressBar>,
) -> anyhow::Result<(Vec<TrialRecord>, bool)> {
    let estimators = plan.estimators();
    let run_one = |t: u64| -> anyhow::Result<TrialRecord> {
        plan.run_trials(t..t + 1, &mut |_| {})?
            .pop()
            .with_context(|| format!("trial {t} is not in the design"))
    };
    let next = |records: &[TrialRecord]| plan.next_batch(records);
    let valid = |t: u64| plan.has_trial(t);
    let driver = Driver {
        run_one: &run_one,
        next: &next,
        valid: &valid,
    };
    run_design_with(plan.design(), &estimators, run, &driver, shard, bar)
}

/// Fit, simulate, summarise, state.
pub fn run(args: Args) -> anyhow::Result<()> {
    let source_name = args.file.display().to_string();
    let bytes = super::read_input_file(&args.file)?;
    let identity = DataIdentity {
        file_name: args
            .file
            .file_name()
            .map_or(source_name.clone(), |n| n.to_string_lossy().into_owned()),
        sha256: data_fingerprint(&bytes),
    };
    let settings = match &args.settings {
        Some(path) => {
            let text = super::read_input_text(path).context("settings")?;
            let settings = AuditSettings::from_json(&text)
                .with_context(|| format!("settings `{}`", path.display()))?;
            settings
                .check_data(&bytes)
                .with_context(|| format!("settings `{}`", path.display()))?;
            settings
        }
        None => settings_from_flags(
            &args.run,
            &args.table,
            &args.model,
            args.companion,
            Some(identity),
        ),
    };
    if let Some(path) = &args.write_settings {
        fs::write(path, settings.to_json())
            .with_context(|| format!("cannot write settings `{}`", path.display()))?;
    }

    let text = String::from_utf8(bytes)
        .with_context(|| format!("cannot read `{source_name}`: the file is not UTF-8 text"))?;
    let options = ReadOptions {
        delimiter: args.table.delimiter,
        ..settings.read.options(source_name.clone())
    };
    let table = parse_table(&text, &options)?;
    let plans =
        AuditPlan::all(&table, &settings).with_context(|| format!("audit of `{source_name}`"))?;
    let several = plans.len() > 1;
    if args.json {
        if let Some(first) = plans.first() {
            for note in &first.model_fit().notes {
                eprintln!("eccaudit: {note}");
            }
        }
    }
    if !args.json {
        println!(
            "{} ({})",
            args.file.display(),
            table.time_convention().label()
        );
        if let Some(first) = plans.first() {
            print!("{}", first.model_fit().check());
        }
    }
    let mut reports = Vec::new();
    for plan in &plans {
        let mut run = args.run.clone();
        if several {
            run.out = args.run.out.join(format!("c{}", plan.companion()));
        }
        let shard = run.shard()?;
        let (records, complete) = run_plan(plan, &run, shard, None)?;
        if shard.is_split() && !complete {
            shard_note(shard, &records, plan.n_trials(), &run.out);
            continue;
        }
        let report = plan.finish(&records)?;
        let out = &run.out;
        write_audit_outputs(&report, &settings, out)?;
        let text = report.statement.text();
        if !args.json {
            if several {
                println!();
                println!(
                    "Companion {} of {} (P = {:.4} d)",
                    report.context.companion,
                    report.context.n_companions,
                    plan.design().period
                );
            }
            print!("{text}");
            println!("Outputs in {}", out.display());
        }
        if !complete {
            eprintln!(
                "eccaudit: note: companion {}: {} trials done ({} base of {}, {} adaptive) and \
                 more are needed; the statement uses those only; run again with --resume to finish",
                report.context.companion,
                report.trials_done,
                report.trials_done - report.extra_trials,
                report.trials_total,
                report.extra_trials
            );
        }
        reports.push(report);
    }
    if args.json {
        if several {
            println!("{}", serde_json::to_string_pretty(&reports)?);
        } else if let Some(report) = reports.first() {
            println!("{}", serde_json::to_string_pretty(report)?);
        }
    }
    Ok(())
}
