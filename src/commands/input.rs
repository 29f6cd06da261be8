//! Reading a velocity table from a file: the options every table-reading subcommand shares.

use std::path::Path;

use eccaudit_core::table::{
    parse_table, Delimiter, ReadOptions, TimeSpec, VelocityTable, VelocityUnit,
};

/// Options for reading a velocity table (flattened into each subcommand that reads one).
#[derive(Debug, Clone, clap::Args)]
pub struct TableArgs {
    /// Unit of the velocity and uncertainty columns when the header does not state it: m/s or km/s.
    #[arg(long, value_name = "UNIT")]
    pub velocity_unit: Option<VelocityUnit>,
    /// Time convention when the header does not state it: BJD, JD, HJD, MJD, BJD-2450000, offset:2450000, ...
    #[arg(long = "time", value_name = "CONVENTION")]
    pub time: Option<TimeSpec>,
    /// Field separator (detected when not given): comma, semicolon, tab or whitespace.
    #[arg(long, value_name = "SEPARATOR")]
    pub delimiter: Option<Delimiter>,
}

/// The file's text, or a one-line error naming it.
pub fn read_text(path: &Path) -> anyhow::Result<String> {
    super::read_input_text(path)
}

/// Read and parse the table at `path` (errors name the file, line and column).
pub fn read_table(path: &Path, args: &TableArgs) -> anyhow::Result<VelocityTable> {
    let text = read_text(path)?;
    let options = ReadOptions {
        source_name: path.display().to_string(),
        velocity_unit: args.velocity_unit,
        time: args.time,
        delimiter: args.delimiter,
    };
    Ok(parse_table(&text, &options)?)
}
