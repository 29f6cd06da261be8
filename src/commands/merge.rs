//! `eccaudit merge DIR... --out DIR`: combines the outputs of shards (`--shard I/N`) into the
//! files one machine would have written: a survey's table folders and catalogue, or one
//! inject/audit grid's trials.csv.

use std::fs;
use std::path::{Path, PathBuf};

use anyhow::{bail, Context};
use eccaudit_core::inject::trial_file::merge_trial_files;
use eccaudit_core::survey::SurveyIndex;

use super::survey::{finished_rows, write_atomic, write_catalogue, INDEX_FILE};

/// Arguments of `eccaudit merge`.
#[derive(Debug, clap::Args)]
pub struct Args {
    /// Output folders of the shards (a survey's --out, or an inject/audit --out). Shards of a
    /// survey that all wrote into one shared folder: give that folder (it may also be --out).
    #[arg(required = true, value_name = "DIR")]
    pub inputs: Vec<PathBuf>,
    /// Folder for the merged files.
    #[arg(long, value_name = "DIR")]
    pub out: PathBuf,
}

/// Copies the files (and sub-folders) of `from` into `to`, replacing files of the same name.
fn copy_folder(from: &Path, to: &Path) -> anyhow::Result<()> {
    fs::create_dir_all(to).with_context(|| format!("cannot create `{}`", to.display()))?;
    for entry in fs::read_dir(from).with_context(|| format!("cannot read `{}`", from.display()))? {
        let entry = entry?;
        let target = to.join(entry.file_name());
        if entry.file_type()?.is_dir() {
            copy_folder(&entry.path(), &target)?;
        } else {
            fs::copy(entry.path(), &target).with_context(|| {
                format!(
                    "cannot copy `{}` to `{}`",
                    entry.path().display(),
                    target.display()
                )
            })?;
        }
    }
    Ok(())
}

fn same_folder(a: &Path, b: &Path) -> bool {
    match (fs::canonicalize(a), fs::canonicalize(b)) {
        (Ok(a), Ok(b)) => a == b,
        _ => false,
    }
}

fn merge_survey(args: &Args) -> anyhow::Result<()> {
    let mut index: Option<(SurveyIndex, String)> = None;
    for dir in &args.inputs {
        let path = dir.join(INDEX_FILE);
        let text = fs::read_to_string(&path)
            .with_context(|| format!("cannot read `{}` (not a survey folder?)", path.display()))?;
        let this = SurveyIndex::from_json(&text)
            .map_err(|e| anyhow::anyhow!("`{}`: {e}", path.display()))?;
        match &index {
            None => index = Some((this, text)),
            Some((first, _)) if *first != this => bail!(
                "`{}` belongs to another survey than `{}` (other manifest or settings)",
                dir.display(),
                args.inputs[0].display()
            ),
            Some(_) => {}
        }
    }
    let (index, text) = index.expect("at least one input");
    let out = &args.out;
    fs::create_dir_all(out).with_context(|| format!("cannot create `{}`", out.display()))?;
    write_atomic(&out.join(INDEX_FILE), &text)?;
    let mut missing = Vec::new();
    for t in &index.tables {
        let source = args
            .inputs
            .iter()
            .map(|dir| dir.join(&t.folder))
            .find(|folder| matches!(finished_rows(folder), Ok(Some(_))));
        match source {
            Some(folder) => {
                let target = out.join(&t.folder);
                if !same_folder(&folder, &target) {
                    copy_folder(&folder, &target)?;
                }
            }
            None => missing.push(t.table.clone()),
        }
    }
    if !missing.is_empty() {
        bail!(
            "{} of {} tables are not done in any input folder (first: `{}`): run the missing shards again, then merge",
            missing.len(),
            index.tables.len(),
            missing[0]
        );
    }
    write_catalogue(out, &index)?;
    println!(
        "Merged {} tables: {} and {}",
        index.tables.len(),
        out.join("catalogue.csv").display(),
        out.join("catalogue.json").display()
    );
    Ok(())
}

fn merge_trials(args: &Args) -> anyhow::Result<()> {
    let mut texts = Vec::new();
    for dir in &args.inputs {
        let path = dir.join("trials.csv");
        let text = fs::read_to_string(&path)
            .with_context(|| format!("cannot read `{}`", path.display()))?;
        texts.push((path.display().to_string(), text));
    }
    let pairs: Vec<(&str, &str)> = texts
        .iter()
        .map(|(n, t)| (n.as_str(), t.as_str()))
        .collect();
    let (merged, n) = merge_trial_files(&pairs)?;
    let head = eccaudit_core::inject::trial_file::read_head(&merged, "merged")?;
    fs::create_dir_all(&args.out)
        .with_context(|| format!("cannot create `{}`", args.out.display()))?;
    let path = args.out.join("trials.csv");
    write_atomic(&path, &merged)?;
    println!(
        "Merged {n} of {} trials into {}",
        head.n_trials,
        path.display()
    );
    if n < head.n_trials {
        eprintln!(
            "eccaudit: note: {} trials are in no shard: run the missing shards, or finish them with the run's command and `--out {} --resume`",
            head.n_trials - n,
            args.out.display()
        );
    } else {
        println!(
            "Summary and figures: run the same inject/audit command with `--out {} --resume` and no --shard (no trial is run again)",
            args.out.display()
        );
    }
    Ok(())
}

/// Merge shard outputs.
pub fn run(args: Args) -> anyhow::Result<()> {
    let surveys = args
        .inputs
        .iter()
        .filter(|d| d.join(INDEX_FILE).exists())
        .count();
    if surveys == args.inputs.len() {
        merge_survey(&args)
    } else if surveys == 0 {
        merge_trials(&args)
    } else {
        bail!("give either survey folders (with {INDEX_FILE}) or inject/audit folders (with trials.csv), not both")
    }
}
