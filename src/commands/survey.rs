//! `eccaudit survey MANIFEST`: the full audit of every table a manifest lists, one folder per
//! table and a catalogue (CSV and JSON, one row per audited companion); resumable, on all
//! cores, and split over a cluster's job array with `--shard I/N` (see `eccaudit merge`).
//!
//! Each table is audited exactly as `eccaudit audit` would audit it with the same flags: the
//! same settings ([`super::audit::settings_from_flags`] + the manifest row through
//! `eccaudit_core::survey::entry_settings`), the same core plan, the same trial file and output
//! files, so a table's numbers do not depend on which survey, shard or machine ran it.

use std::fs;
use std::path::{Path, PathBuf};

use anyhow::{bail, Context};
use eccaudit_core::audit::{data_fingerprint, AuditPlan, AuditSettings, DataIdentity};
use eccaudit_core::survey::{
    catalogue_csv, catalogue_json, catalogue_rows, entry_settings, error_row, parse_manifest,
    rows_from_json, CatalogueRow, ManifestEntry, Shard, SurveyIndex,
};
use eccaudit_core::table::{parse_table, ReadOptions};
use indicatif::ProgressBar;

use super::audit::{run_plan, settings_from_flags, write_audit_outputs};
use super::inject::{progress_bar, RunArgs};
use super::input::TableArgs;
use super::model_args::ModelArgs;

/// Arguments of `eccaudit survey`.
#[derive(Debug, clap::Args)]
pub struct Args {
    /// Manifest (CSV): a `table` column with paths relative to the manifest, and optional
    /// per-table columns companions, trend, periods, stellar_mass, velocity_unit, time,
    /// min_period, max_period.
    pub manifest: PathBuf,
    #[command(flatten)]
    pub model: ModelArgs,
    #[command(flatten)]
    pub run: RunArgs,
    #[command(flatten)]
    pub table: TableArgs,
    /// Print a Slurm batch script that runs this survey (same flags) as a job array of N
    /// tasks, each task one shard, all writing into --out (created now, for the task logs);
    /// then exit.
    #[arg(long, value_name = "N")]
    pub write_sbatch: Option<usize>,
    /// With --write-sbatch: CPUs per array task (the trials of a table use them all).
    #[arg(long, value_name = "N", default_value_t = 1)]
    pub cpus_per_task: usize,
    /// Stop after this many tables have been audited in this run (resume later).
    #[arg(long, value_name = "N")]
    pub stop_after_tables: Option<usize>,
    /// Also sample each table's posterior under this eccentricity prior (default
    /// uniform:0..0.99) and save the draws of e of every companion in its folder, for
    /// `eccaudit population` (format: DEVELOPERS.md, "Saved posterior draws").
    #[arg(long, value_name = "SPEC", num_args = 0..=1, default_missing_value = "uniform:0..0.99")]
    pub save_samples: Option<String>,
}

/// The survey files in an output folder.
pub const INDEX_FILE: &str = "survey.json";
/// A table folder's own catalogue rows; written last, so its presence marks the folder done.
pub const TABLE_ROWS_FILE: &str = "catalogue.json";

/// Writes `text` to `path` through a temporary file named after this process (several shards
/// may write the same file at once; each rename is atomic).
pub fn write_atomic(path: &Path, text: &str) -> anyhow::Result<()> {
    let tmp = path.with_extension(format!("tmp{}", std::process::id()));
    fs::write(&tmp, text).with_context(|| format!("cannot write `{}`", tmp.display()))?;
    fs::rename(&tmp, path).with_context(|| format!("cannot write `{}`", path.display()))?;
    Ok(())
}

/// The rows of a finished table folder, or `None` when the folder is not done.
pub fn finished_rows(folder: &Path) -> anyhow::Result<Option<Vec<CatalogueRow>>> {
    let path = folder.join(TABLE_ROWS_FILE);
    if !path.exists() {
        return Ok(None);
    }
    let text =
        fs::read_to_string(&path).with_context(|| format!("cannot read `{}`", path.display()))?;
    let rows = rows_from_json(&text).map_err(|e| anyhow::anyhow!("`{}`: {e}", path.display()))?;
    Ok(Some(rows))
}

/// What happened to one table.
enum TableOutcome {
    /// Audited (or failed as a table): its rows.
    Done(Vec<CatalogueRow>),
    /// The trial budget (--stop-after) ran out before its trials were done.
    Stopped,
}

/// Audits one manifest row into `folder`. A problem of the table itself (unreadable, not a
/// velocity table, fit failed, …) becomes an error row; an output that cannot be written
/// stops the survey.
#[allow(clippy::too_many_arguments)]
fn audit_entry(
    entry: &ManifestEntry,
    folder_name: &str,
    manifest_dir: &Path,
    out: &Path,
    base: &AuditSettings,
    table_args: &TableArgs,
    run: &RunArgs,
    bar: &ProgressBar,
    save_samples: Option<&str>,
) -> anyhow::Result<TableOutcome> {
    let folder = out.join(folder_name);
    let error = |message: String| {
        Ok(TableOutcome::Done(vec![error_row(
            &entry.table,
            folder_name,
            &message,
        )]))
    };
    let path = manifest_dir.join(&entry.table);
    let bytes = match fs::read(&path) {
        Ok(bytes) => bytes,
        Err(e) => return error(format!("cannot read `{}`: {e}", entry.table)),
    };
    let identity = DataIdentity {
        file_name: path
            .file_name()
            .map_or(entry.table.clone(), |n| n.to_string_lossy().into_owned()),
        sha256: data_fingerprint(&bytes),
    };
    let mut settings = match entry_settings(entry, base) {
        Ok(settings) => settings,
        Err(e) => return error(e.to_string()),
    };
    settings.data = Some(identity);
    let Ok(text) = String::from_utf8(bytes) else {
        return error(format!(
            "cannot read `{}`: the file is not UTF-8 text",
            entry.table
        ));
    };
    let options = ReadOptions {
        delimiter: table_args.delimiter,
        ..settings.read.options(entry.table.clone())
    };
    let table = match parse_table(&text, &options) {
        Ok(table) => table,
        Err(e) => return error(e.to_string()),
    };
    let plans = match AuditPlan::all(&table, &settings) {
        Ok(plans) => plans,
        Err(e) => return error(format!("audit of `{}`: {e}", entry.table)),
    };
    fs::create_dir_all(&folder).with_context(|| format!("cannot create `{}`", folder.display()))?;
    // A folder left by an interrupted run must hold this table with these settings.
    let settings_path = folder.join("settings.json");
    if settings_path.exists() {
        let old = fs::read_to_string(&settings_path)
            .with_context(|| format!("cannot read `{}`", settings_path.display()))?;
        if old != settings.to_json() {
            bail!(
                "`{}` was made with other settings or another table: remove the folder or choose another --out",
                folder.display()
            );
        }
    } else {
        write_atomic(&settings_path, &settings.to_json())?;
    }
    // As `eccaudit audit`: one companion in the folder itself, several in c1, c2, ...
    let several = plans.len() > 1;
    let mut rows = Vec::new();
    for plan in &plans {
        let out = if several {
            folder.join(format!("c{}", plan.companion()))
        } else {
            folder.clone()
        };
        let table_run = RunArgs {
            out,
            resume: true,
            ..run.clone()
        };
        let (records, complete) = run_plan(plan, &table_run, Shard::WHOLE, Some(bar))?;
        if !complete {
            return Ok(TableOutcome::Stopped);
        }
        let report = match plan.finish(&records) {
            Ok(report) => report,
            Err(e) => return error(format!("audit of `{}`: {e}", entry.table)),
        };
        write_audit_outputs(&report, &settings, &table_run.out)?;
        rows.extend(catalogue_rows(
            &entry.table,
            folder_name,
            &report,
            entry.stellar_mass,
        ));
    }
    if let Some(spec) = save_samples {
        super::population::save_table_samples(&folder, &entry.table, &table, &settings, spec, bar)?;
    }
    Ok(TableOutcome::Done(rows))
}

/// Writes catalogue.csv and catalogue.json into `out` from the table folders of `index` that
/// are done (in manifest order); returns the number of tables missing.
pub fn write_catalogue(out: &Path, index: &SurveyIndex) -> anyhow::Result<usize> {
    let mut rows = Vec::new();
    let mut missing = 0;
    for t in &index.tables {
        match finished_rows(&out.join(&t.folder))? {
            Some(r) => rows.extend(r),
            None => missing += 1,
        }
    }
    write_atomic(&out.join("catalogue.csv"), &catalogue_csv(&rows))?;
    write_atomic(&out.join("catalogue.json"), &catalogue_json(&rows))?;
    Ok(missing)
}

/// Writes `survey.json` into `out`, or checks that the one there is the same survey.
pub fn write_or_check_index(out: &Path, index: &SurveyIndex) -> anyhow::Result<()> {
    let path = out.join(INDEX_FILE);
    if path.exists() {
        let text = fs::read_to_string(&path)
            .with_context(|| format!("cannot read `{}`", path.display()))?;
        if text != index.to_json() {
            bail!(
                "`{}` belongs to another survey (other manifest or settings): choose another --out",
                out.display()
            );
        }
        return Ok(());
    }
    write_atomic(&path, &index.to_json())
}

/// A word of a shell command line, quoted for bash when needed.
fn shell_word(word: &str) -> String {
    if !word.is_empty()
        && word
            .chars()
            .all(|c| c.is_ascii_alphanumeric() || "-_./=:,+@%".contains(c))
    {
        word.to_string()
    } else {
        format!("'{}'", word.replace('\'', "'\\''"))
    }
}

/// The Slurm batch script of this survey as an array of `n` tasks.
fn sbatch_script(args: &Args, n: usize) -> anyhow::Result<String> {
    if n == 0 || n > eccaudit_core::survey::MAX_SHARDS {
        bail!(
            "--write-sbatch {n}: give 1 to {} tasks",
            eccaudit_core::survey::MAX_SHARDS
        );
    }
    if args.run.shard.is_some() {
        bail!("--write-sbatch sets each task's --shard itself: leave --shard out");
    }
    let exe = std::env::current_exe().context("cannot find this program's path")?;
    let cwd = std::env::current_dir().context("cannot read the working directory")?;
    // The same command line without --write-sbatch/--cpus-per-task (and their values).
    let mut words: Vec<String> = Vec::new();
    let mut skip = false;
    for a in std::env::args().skip(1) {
        if skip {
            skip = false;
            continue;
        }
        if a == "--write-sbatch" || a == "--cpus-per-task" {
            skip = true;
            continue;
        }
        if a.starts_with("--write-sbatch=") || a.starts_with("--cpus-per-task=") {
            continue;
        }
        words.push(shell_word(&a));
    }
    let out = cwd.join(&args.run.out);
    // Slurm opens each task's log in --out before the task starts: the folder must exist.
    fs::create_dir_all(&out).with_context(|| format!("cannot create `{}`", out.display()))?;
    Ok(format!(
        "#!/bin/bash\n\
         # eccaudit survey as a Slurm job array of {n} tasks, written by `eccaudit survey --write-sbatch`.\n\
         # Submit:  sbatch --wait job.sh   (or sbatch job.sh, then wait for the array)\n\
         # Then:    {exe} merge {out} --out {out}\n\
         # Each task runs shard $SLURM_ARRAY_TASK_ID/{n} of the tables into the shared --out folder;\n\
         # a task that is interrupted or re-run continues where it stopped.\n\
         #SBATCH --job-name=eccaudit-survey\n\
         #SBATCH --array=0-{last}\n\
         #SBATCH --ntasks=1\n\
         #SBATCH --cpus-per-task={cpus}\n\
         #SBATCH --output={out}/slurm-%A_%a.log\n\
         set -euo pipefail\n\
         mkdir -p {out}\n\
         cd {cwd}\n\
         export RAYON_NUM_THREADS=\"${{SLURM_CPUS_PER_TASK:-{cpus}}}\"\n\
         exec {exe} {words} --shard \"${{SLURM_ARRAY_TASK_ID}}/{n}\" --quiet\n",
        last = n - 1,
        cpus = args.cpus_per_task,
        exe = shell_word(&exe.display().to_string()),
        out = shell_word(&out.display().to_string()),
        cwd = shell_word(&cwd.display().to_string()),
        words = words.join(" "),
    ))
}

/// Run the survey (or print its batch script).
pub fn run(args: Args) -> anyhow::Result<()> {
    if let Some(n) = args.write_sbatch {
        print!("{}", sbatch_script(&args, n)?);
        return Ok(());
    }
    let manifest_name = args.manifest.display().to_string();
    let manifest_text = super::input::read_text(&args.manifest)?;
    let manifest = parse_manifest(&manifest_text, &manifest_name)?;
    let manifest_dir = args
        .manifest
        .parent()
        .map_or_else(|| PathBuf::from("."), Path::to_path_buf);
    let shard = args.run.shard()?;
    let base = settings_from_flags(&args.run, &args.table, &args.model, None, None);
    let file_name = args
        .manifest
        .file_name()
        .map_or(manifest_name.clone(), |n| n.to_string_lossy().into_owned());
    let index = SurveyIndex::new(&file_name, &manifest_text, &manifest, &base);
    let out = &args.run.out;
    fs::create_dir_all(out).with_context(|| format!("cannot create `{}`", out.display()))?;
    write_or_check_index(out, &index)?;

    let mine: Vec<usize> = (0..manifest.entries.len())
        .filter(|&i| shard.contains(i as u64))
        .collect();
    let per_table = (base.injection.eccentricities.len() * base.injection.trials_per_cell) as u64;
    let bar = progress_bar(args.run.quiet, per_table * mine.len() as u64, "trials");
    let mut budget = args.run.stop_after;
    let (mut audited, mut failed, mut skipped) = (0usize, 0usize, 0usize);
    let mut stopped = false;
    for &i in &mine {
        let entry = &manifest.entries[i];
        let folder_name = &index.tables[i].folder;
        let folder = out.join(folder_name);
        if let Some(rows) = finished_rows(&folder)? {
            if rows.iter().all(|r| r.status != "error") {
                skipped += 1;
                bar.inc(per_table);
                continue;
            }
        }
        if args
            .stop_after_tables
            .is_some_and(|n| audited + failed >= n)
            || budget == Some(0)
        {
            stopped = true;
            break;
        }
        bar.set_message(entry.table.clone());
        let before = bar.position();
        let run = RunArgs {
            stop_after: budget,
            ..args.run.clone()
        };
        let outcome = audit_entry(
            entry,
            folder_name,
            &manifest_dir,
            out,
            &base,
            &args.table,
            &run,
            &bar,
            args.save_samples.as_deref(),
        )?;
        let ran = bar.position() - before;
        if let Some(b) = budget.as_mut() {
            *b = b.saturating_sub(ran);
        }
        match outcome {
            TableOutcome::Done(rows) => {
                if rows.iter().any(|r| r.status == "error") {
                    failed += 1;
                    if let Some(e) = rows.iter().find_map(|r| r.error.as_ref()) {
                        bar.suspend(|| eprintln!("eccaudit: table not audited: {e}"));
                    }
                    // A failed table's folder holds only its row.
                    fs::create_dir_all(&folder)
                        .with_context(|| format!("cannot create `{}`", folder.display()))?;
                } else {
                    audited += 1;
                }
                write_atomic(&folder.join(TABLE_ROWS_FILE), &catalogue_json(&rows))?;
                bar.set_position(bar.position().max(before + per_table));
            }
            TableOutcome::Stopped => {
                stopped = true;
                break;
            }
        }
    }
    bar.finish_and_clear();
    let summary =
        format!("{audited} table(s) audited, {failed} not auditable, {skipped} already done");
    if shard.is_split() {
        println!(
            "Shard {shard} of `{manifest_name}`: {summary}; outputs in {}",
            out.display()
        );
        if !stopped {
            println!(
                "When every shard is done: eccaudit merge {} --out {}",
                out.display(),
                out.display()
            );
        }
    } else {
        let missing = write_catalogue(out, &index)?;
        println!("Survey of `{manifest_name}`: {summary}");
        println!(
            "Catalogue: {} and {}",
            out.join("catalogue.csv").display(),
            out.join("catalogue.json").display()
        );
        if missing > 0 {
            eprintln!(
                "eccaudit: note: {missing} of {} tables not done yet; the catalogue lists the others; run the same command again to continue",
                index.tables.len()
            );
        }
    }
    if stopped {
        eprintln!("eccaudit: note: stopped early; run the same command again to continue");
    }
    Ok(())
}
