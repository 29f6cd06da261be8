//! `eccaudit table FILE`: read a velocity table and print its summary (text or JSON).

use std::path::PathBuf;

use anyhow::Context;
use eccaudit_core::table::{parse_table, Delimiter, ReadOptions, TimeSpec, VelocityUnit};

/// Arguments of `eccaudit table`.
#[derive(Debug, clap::Args)]
pub struct Args {
    /// Velocity table: CSV, TSV or whitespace-separated; columns time, velocity, uncertainty[, instrument].
    pub file: PathBuf,
    /// Unit of the velocity and uncertainty columns when the header does not state it: m/s or km/s.
    #[arg(long, value_name = "UNIT")]
    pub velocity_unit: Option<VelocityUnit>,
    /// Time convention when the header does not state it: BJD, JD, HJD, MJD, BJD-2450000, offset:2450000, ...
    #[arg(long = "time", value_name = "CONVENTION")]
    pub time: Option<TimeSpec>,
    /// Field separator (detected when not given): comma, semicolon, tab or whitespace.
    #[arg(long, value_name = "SEPARATOR")]
    pub delimiter: Option<Delimiter>,
    /// Print the summary as JSON instead of a text table.
    #[arg(long)]
    pub json: bool,
}

/// Read the file, parse it with the core reader and print the summary.
pub fn run(args: Args) -> anyhow::Result<()> {
    let source_name = args.file.display().to_string();
    let bytes =
        std::fs::read(&args.file).with_context(|| format!("cannot read `{source_name}`"))?;
    let text = String::from_utf8(bytes)
        .with_context(|| format!("cannot read `{source_name}`: the file is not UTF-8 text"))?;
    let options = ReadOptions {
        source_name,
        velocity_unit: args.velocity_unit,
        time: args.time,
        delimiter: args.delimiter,
    };
    let table = parse_table(&text, &options)?;
    let summary = table.summary();
    if args.json {
        println!("{}", serde_json::to_string_pretty(&summary)?);
    } else {
        print!("{summary}");
    }
    Ok(())
}
