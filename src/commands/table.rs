//! `eccaudit table FILE`: read a velocity table and print its summary (text or JSON).

use std::path::PathBuf;

use super::input::{read_table, TableArgs};

/// Arguments of `eccaudit table`.
#[derive(Debug, clap::Args)]
pub struct Args {
    /// Velocity table: CSV, TSV or whitespace-separated; columns time, velocity, uncertainty[, instrument].
    pub file: PathBuf,
    #[command(flatten)]
    pub table: TableArgs,
    /// Print the summary as JSON instead of a text table.
    #[arg(long)]
    pub json: bool,
}

/// Read the file, parse it with the core reader and print the summary.
pub fn run(args: Args) -> anyhow::Result<()> {
    let table = read_table(&args.file, &args.table)?;
    let summary = table.summary();
    if args.json {
        println!("{}", serde_json::to_string_pretty(&summary)?);
    } else {
        print!("{summary}");
    }
    Ok(())
}
