//! Velocity tables: read CSV, TSV or whitespace-separated text into checked times, velocities and uncertainties.
//!
//! The reader works on text already in memory (the command line reads the
//! file, the browser passes the dropped file's text) and never guesses the
//! velocity unit. Times stay in the file's convention (days); velocities and
//! uncertainties are stored in m/s.

mod header;
mod summary;

pub use summary::{GroupSummary, TableSummary};

use std::collections::HashMap;
use std::fmt;
use std::str::FromStr;

use serde::{Deserialize, Serialize};

use header::{classify_header_cell, ColumnRole, HeaderColumn, HeaderProblem, ACCEPTED_NAMES};

/// Fewest data rows a table may have.
pub const MIN_ROWS: usize = 3;

/// Instrument name given to rows without an instrument label.
pub const DEFAULT_INSTRUMENT: &str = "default";

/// Times at or above this value are taken as full Julian dates when the
/// convention is not stated (JD 2 400 000 is 1858 November 16; common practice).
pub const FULL_JULIAN_DATE_THRESHOLD: f64 = 2_400_000.0;

/// Unit of the velocity and uncertainty columns in the source text.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
pub enum VelocityUnit {
    /// Metres per second.
    #[serde(rename = "m/s")]
    MetresPerSecond,
    /// Kilometres per second.
    #[serde(rename = "km/s")]
    KilometresPerSecond,
}

impl VelocityUnit {
    /// Factor that turns a value in this unit into m/s.
    pub fn to_metres_per_second(self) -> f64 {
        match self {
            VelocityUnit::MetresPerSecond => 1.0,
            VelocityUnit::KilometresPerSecond => 1000.0,
        }
    }

    /// Symbol of the unit: `m/s` or `km/s`.
    pub fn symbol(self) -> &'static str {
        match self {
            VelocityUnit::MetresPerSecond => "m/s",
            VelocityUnit::KilometresPerSecond => "km/s",
        }
    }
}

impl fmt::Display for VelocityUnit {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(self.symbol())
    }
}

/// A command-line or form setting that could not be understood.
#[derive(Debug, Clone, PartialEq, Eq, thiserror::Error)]
#[error("cannot read `{value}` as {what}; expected {expected}")]
pub struct OptionParseError {
    /// The text given.
    pub value: String,
    /// What it was meant to be.
    pub what: &'static str,
    /// What is accepted.
    pub expected: &'static str,
}

impl FromStr for VelocityUnit {
    type Err = OptionParseError;

    fn from_str(text: &str) -> Result<Self, Self::Err> {
        header::parse_velocity_unit(text).ok_or_else(|| OptionParseError {
            value: text.to_string(),
            what: "a velocity unit",
            expected: "m/s or km/s",
        })
    }
}

/// Time scale of a Julian date.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum TimeScale {
    /// Julian date (scale as recorded, usually UTC).
    Jd,
    /// Barycentric Julian date.
    Bjd,
    /// Heliocentric Julian date.
    Hjd,
    /// A Julian-date-like count whose scale the file does not state.
    Unstated,
}

impl TimeScale {
    fn symbol(self) -> &'static str {
        match self {
            TimeScale::Jd | TimeScale::Unstated => "JD",
            TimeScale::Bjd => "BJD",
            TimeScale::Hjd => "HJD",
        }
    }
}

/// A stated time convention: times are `scale − offset_days` (days).
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct TimeSpec {
    /// Time scale of the underlying Julian date.
    pub scale: TimeScale,
    /// Days subtracted from the full Julian date (0 for full dates, 2 400 000.5 for MJD).
    pub offset_days: f64,
}

impl FromStr for TimeSpec {
    type Err = OptionParseError;

    /// Accepts `JD`, `BJD`, `HJD`, `MJD`, `BMJD`, `RJD`, `BJD-2450000`, `offset:2450000` (any case).
    fn from_str(text: &str) -> Result<Self, Self::Err> {
        header::parse_time_spec(text).ok_or_else(|| OptionParseError {
            value: text.to_string(),
            what: "a time convention",
            expected: "JD, BJD, HJD, MJD, BJD-2450000 or offset:2450000",
        })
    }
}

/// Who stated a unit or time convention.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum StatedBy {
    /// Written in the table's header.
    Header,
    /// Given explicitly (command-line option or browser form).
    Explicit,
    /// Not stated; inferred from the magnitude of the values.
    Inferred,
}

impl fmt::Display for StatedBy {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(match self {
            StatedBy::Header => "stated in the header",
            StatedBy::Explicit => "stated explicitly",
            StatedBy::Inferred => "inferred from the magnitude of the times",
        })
    }
}

/// The time convention of a table: times are `scale − offset_days`, in days.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct TimeConvention {
    /// Time scale of the underlying Julian date.
    pub scale: TimeScale,
    /// Days subtracted from the full Julian date; `None` when the origin is unknown.
    pub offset_days: Option<f64>,
    /// Where the convention came from.
    pub stated_by: StatedBy,
}

impl TimeConvention {
    /// A stated convention.
    pub fn stated(spec: TimeSpec, stated_by: StatedBy) -> Self {
        TimeConvention {
            scale: spec.scale,
            offset_days: Some(spec.offset_days),
            stated_by,
        }
    }

    /// Readable name: `BJD`, `MJD`, `BJD - 2450000`, `JD-like full date (scale not stated)`, ...
    pub fn label(&self) -> String {
        let Some(offset) = self.offset_days else {
            return "days from an unknown origin (not full Julian dates)".to_string();
        };
        let unstated = if self.scale == TimeScale::Unstated {
            " (scale not stated)"
        } else {
            ""
        };
        let symbol = self.scale.symbol();
        if offset == 0.0 {
            if self.scale == TimeScale::Unstated {
                "JD-like full date (scale not stated)".to_string()
            } else {
                symbol.to_string()
            }
        } else if offset == 2_400_000.5 {
            let prefix = match self.scale {
                TimeScale::Jd | TimeScale::Unstated => "",
                TimeScale::Bjd => "B",
                TimeScale::Hjd => "H",
            };
            format!("{prefix}MJD ({symbol} - 2400000.5){unstated}")
        } else if offset < 0.0 {
            format!("{symbol} + {}{unstated}", -offset)
        } else {
            format!("{symbol} - {offset}{unstated}")
        }
    }
}

/// How fields are separated.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum Delimiter {
    /// `,`
    Comma,
    /// `;`
    Semicolon,
    /// A single tab.
    Tab,
    /// Any run of spaces and tabs.
    Whitespace,
}

impl FromStr for Delimiter {
    type Err = OptionParseError;

    fn from_str(text: &str) -> Result<Self, Self::Err> {
        match text.trim().to_lowercase().as_str() {
            "," | "comma" | "csv" => Ok(Delimiter::Comma),
            ";" | "semicolon" => Ok(Delimiter::Semicolon),
            "\t" | "\\t" | "tab" | "tsv" => Ok(Delimiter::Tab),
            "whitespace" | "space" | "spaces" | "ws" => Ok(Delimiter::Whitespace),
            _ => Err(OptionParseError {
                value: text.to_string(),
                what: "a delimiter",
                expected: "comma, semicolon, tab or whitespace",
            }),
        }
    }
}

/// Settings for [`parse_table`].
#[derive(Debug, Clone, Default, PartialEq, Serialize, Deserialize)]
#[serde(default)]
pub struct ReadOptions {
    /// Name of the source (file name), used in messages.
    pub source_name: String,
    /// Velocity unit of the file, when not written in the header.
    pub velocity_unit: Option<VelocityUnit>,
    /// Time convention of the file, when not written in the header.
    pub time: Option<TimeSpec>,
    /// Field separator; detected from the first data lines when `None`.
    pub delimiter: Option<Delimiter>,
}

impl ReadOptions {
    /// Options with only a source name: unit and time convention from the header, delimiter detected.
    pub fn new(source_name: impl Into<String>) -> Self {
        ReadOptions {
            source_name: source_name.into(),
            ..ReadOptions::default()
        }
    }
}

/// Why a velocity table was rejected. Lines and columns are 1-based and refer
/// to the original text.
#[derive(Debug, Clone, PartialEq, thiserror::Error, Serialize)]
#[serde(tag = "kind", rename_all = "snake_case")]
pub enum TableError {
    /// No data rows at all.
    #[error("{source_name}: the table has no data rows (only {what})")]
    Empty {
        /// File name.
        source_name: String,
        /// What was found instead: blank or comment lines, or only a header.
        what: String,
    },
    /// Fewer than [`MIN_ROWS`] data rows.
    #[error("{source_name}: too few data rows: found {found}, need at least {minimum}")]
    TooFewRows {
        /// File name.
        source_name: String,
        /// Data rows found.
        found: usize,
        /// Rows needed.
        minimum: usize,
    },
    /// A header cell that names no known column.
    #[error(
        "{source_name}:{line}:{column}: unknown column name `{name}` in the header (column {column}); \
         accepted names: {accepted}"
    )]
    UnknownHeader {
        /// File name.
        source_name: String,
        /// Line of the header.
        line: usize,
        /// Column number.
        column: usize,
        /// The header cell.
        name: String,
        /// Accepted names.
        accepted: String,
    },
    /// A velocity or uncertainty header with a unit other than m/s or km/s.
    #[error(
        "{source_name}:{line}:{column}: unit `{unit}` in header `{name}` (column {column}) \
         not recognised; write m/s or km/s"
    )]
    UnknownUnit {
        /// File name.
        source_name: String,
        /// Line of the header.
        line: usize,
        /// Column number.
        column: usize,
        /// The header cell.
        name: String,
        /// The unit written.
        unit: String,
    },
    /// Two header cells name the same kind of column.
    #[error(
        "{source_name}:{line}:{column}: the header names the {role} column twice: \
         column {first_column} `{first_name}` and column {column} `{name}`"
    )]
    DuplicateColumn {
        /// File name.
        source_name: String,
        /// Line of the header.
        line: usize,
        /// Column number of the second cell.
        column: usize,
        /// The second cell.
        name: String,
        /// Column number of the first cell.
        first_column: usize,
        /// The first cell.
        first_name: String,
        /// time, velocity, uncertainty or instrument.
        role: String,
    },
    /// The header lacks a required column.
    #[error("{source_name}:{line}: the header has no {role} column; accepted names: {accepted}")]
    MissingColumn {
        /// File name.
        source_name: String,
        /// Line of the header.
        line: usize,
        /// time, velocity or uncertainty.
        role: String,
        /// Accepted names.
        accepted: String,
    },
    /// A headerless table whose first row has neither 3 nor 4 fields.
    #[error(
        "{source_name}:{line}: without a header a row needs 3 or 4 fields \
         (time, velocity, uncertainty[, instrument]); found {found}"
    )]
    ColumnCount {
        /// File name.
        source_name: String,
        /// Line of the row.
        line: usize,
        /// Fields found.
        found: usize,
    },
    /// A row with a different number of fields from the header or first row.
    #[error("{source_name}:{line}: expected {expected} fields (as on line {reference_line}), found {found}")]
    WrongFieldCount {
        /// File name.
        source_name: String,
        /// Line of the row.
        line: usize,
        /// Fields expected.
        expected: usize,
        /// Fields found.
        found: usize,
        /// Line that set the expected count (header or first row).
        reference_line: usize,
    },
    /// A field that is not a number.
    #[error(
        "{source_name}:{line}:{column}: {column_name} (column {column}) is not a number: `{value}`"
    )]
    NotANumber {
        /// File name.
        source_name: String,
        /// Line of the row.
        line: usize,
        /// Column number.
        column: usize,
        /// Header cell, or the role for headerless tables.
        column_name: String,
        /// The field.
        value: String,
    },
    /// NaN or infinity.
    #[error("{source_name}:{line}:{column}: {column_name} (column {column}) is `{value}`; only finite numbers are allowed")]
    NotFinite {
        /// File name.
        source_name: String,
        /// Line of the row.
        line: usize,
        /// Column number.
        column: usize,
        /// Header cell, or the role for headerless tables.
        column_name: String,
        /// The field.
        value: String,
    },
    /// An uncertainty that is zero or negative.
    #[error("{source_name}:{line}:{column}: {column_name} (column {column}) must be greater than zero, found `{value}`")]
    NonPositiveUncertainty {
        /// File name.
        source_name: String,
        /// Line of the row.
        line: usize,
        /// Column number.
        column: usize,
        /// Header cell, or the role for headerless tables.
        column_name: String,
        /// The field.
        value: String,
    },
    /// Two rows with the same time and instrument.
    #[error(
        "{source_name}:{line}: duplicate row: time {time} for instrument `{instrument}` \
         appears on line {first_line} and line {line}"
    )]
    DuplicateRow {
        /// File name.
        source_name: String,
        /// Line of the second row.
        line: usize,
        /// Line of the first row.
        first_line: usize,
        /// The repeated time.
        time: String,
        /// The instrument.
        instrument: String,
    },
    /// Neither the header nor the options state the velocity unit.
    #[error(
        "{source_name}: velocity unit not stated: write it in the header of column {column} \
         (e.g. `rv [m/s]`) or choose it (command line: --velocity-unit m/s|km/s; page: the Velocity unit menu)"
    )]
    UnitNotStated {
        /// File name.
        source_name: String,
        /// Column of the velocities.
        column: usize,
    },
    /// The header and the options state different velocity units.
    #[error(
        "{source_name}:{line}:{column}: header `{name}` (column {column}) says {header_unit} \
         but the velocity unit was given as {explicit_unit}"
    )]
    UnitConflict {
        /// File name.
        source_name: String,
        /// Line of the header.
        line: usize,
        /// Column number.
        column: usize,
        /// The header cell.
        name: String,
        /// Unit in the header.
        header_unit: VelocityUnit,
        /// Unit in the options.
        explicit_unit: VelocityUnit,
    },
    /// The header and the options state different time conventions.
    #[error(
        "{source_name}:{line}:{column}: header `{name}` (column {column}) says the times are \
         {header_convention} but they were given as {explicit_convention}"
    )]
    TimeConventionConflict {
        /// File name.
        source_name: String,
        /// Line of the header.
        line: usize,
        /// Column number.
        column: usize,
        /// The header cell.
        name: String,
        /// Convention in the header.
        header_convention: String,
        /// Convention in the options.
        explicit_convention: String,
    },
    /// Columns of different lengths given to [`VelocityTable::from_columns`].
    #[error("{source_name}: columns differ in length: {lengths}")]
    ColumnLengths {
        /// Name of the table.
        source_name: String,
        /// The lengths found.
        lengths: String,
    },
    /// Text the CSV reader could not split into fields.
    #[error("{source_name}:{line}: cannot split the line into fields: {message}")]
    Malformed {
        /// File name.
        source_name: String,
        /// Line where the reader stopped.
        line: usize,
        /// The reader's message.
        message: String,
    },
}

/// A checked velocity table, sorted by time. Velocities and uncertainties in
/// m/s; times in days in the convention of [`VelocityTable::time_convention`].
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct VelocityTable {
    source_name: String,
    times: Vec<f64>,
    velocities: Vec<f64>,
    uncertainties: Vec<f64>,
    instrument_index: Vec<usize>,
    instrument_names: Vec<String>,
    lines: Vec<usize>,
    time_convention: TimeConvention,
    velocity_unit_in_source: VelocityUnit,
    velocity_unit_stated_by: StatedBy,
    notices: Vec<String>,
}

impl VelocityTable {
    /// Build a table from columns already in memory (velocities and
    /// uncertainties in m/s), with the same checks as [`parse_table`]. Row
    /// `i` is reported as line `i + 1` in errors.
    pub fn from_columns(
        source_name: &str,
        times: &[f64],
        velocities: &[f64],
        uncertainties: &[f64],
        instruments: &[String],
        time_convention: TimeConvention,
    ) -> Result<Self, TableError> {
        let n_rows = times.len();
        if velocities.len() != n_rows
            || uncertainties.len() != n_rows
            || instruments.len() != n_rows
        {
            return Err(TableError::ColumnLengths {
                source_name: source_name.to_string(),
                lengths: format!(
                    "{} times, {} velocities, {} uncertainties, {} instruments",
                    n_rows,
                    velocities.len(),
                    uncertainties.len(),
                    instruments.len()
                ),
            });
        }
        let mut rows = Vec::with_capacity(n_rows);
        for row_index in 0..n_rows {
            let line = row_index + 1;
            let values = [
                (1, "time", times[row_index]),
                (2, "velocity", velocities[row_index]),
                (3, "uncertainty", uncertainties[row_index]),
            ];
            for (column, column_name, value) in values {
                let field = Field {
                    source_name,
                    line,
                    column,
                    column_name,
                    text: &value.to_string(),
                };
                check_finite(value, &field)?;
                if column == 3 && value <= 0.0 {
                    return Err(field.error_non_positive());
                }
            }
            let label = instruments[row_index].trim();
            rows.push(Row {
                line,
                time: times[row_index],
                time_text: times[row_index].to_string(),
                velocity: velocities[row_index],
                uncertainty: uncertainties[row_index],
                instrument: label.to_string(),
            });
        }
        let mut notices = Vec::new();
        name_blank_instruments(&mut rows, &mut notices);
        assemble(
            source_name,
            rows,
            time_convention,
            (VelocityUnit::MetresPerSecond, StatedBy::Explicit),
            notices,
        )
    }

    /// Name of the source (file name).
    pub fn source_name(&self) -> &str {
        &self.source_name
    }
    /// Number of rows.
    pub fn n_rows(&self) -> usize {
        self.times.len()
    }
    /// Times in days, in the table's time convention, increasing.
    pub fn times(&self) -> &[f64] {
        &self.times
    }
    /// Velocities in m/s.
    pub fn velocities(&self) -> &[f64] {
        &self.velocities
    }
    /// One-sigma uncertainties in m/s, all positive.
    pub fn uncertainties(&self) -> &[f64] {
        &self.uncertainties
    }
    /// Instrument of each row, as an index into [`VelocityTable::instrument_names`].
    pub fn instrument_index(&self) -> &[usize] {
        &self.instrument_index
    }
    /// Instrument names in order of first appearance in the source.
    pub fn instrument_names(&self) -> &[String] {
        &self.instrument_names
    }
    /// Number of instruments.
    pub fn n_instruments(&self) -> usize {
        self.instrument_names.len()
    }
    /// Source line of each row (1-based; row number for tables built from columns).
    pub fn lines(&self) -> &[usize] {
        &self.lines
    }
    /// Time convention of [`VelocityTable::times`].
    pub fn time_convention(&self) -> TimeConvention {
        self.time_convention
    }
    /// Unit the velocities were written in (they are stored in m/s).
    pub fn velocity_unit_in_source(&self) -> VelocityUnit {
        self.velocity_unit_in_source
    }
    /// Whether the velocity unit came from the header or an explicit setting.
    pub fn velocity_unit_stated_by(&self) -> StatedBy {
        self.velocity_unit_stated_by
    }
    /// Things the reader did or noticed that the user should know (sorting, inferred conventions, ...).
    pub fn notices(&self) -> &[String] {
        &self.notices
    }
    /// Summary statistics of the table; see [`TableSummary`].
    pub fn summary(&self) -> TableSummary {
        summary::summarize(self)
    }
}

/// One data row before assembly (velocities already in m/s).
#[derive(Debug, Clone)]
struct Row {
    line: usize,
    time: f64,
    /// The time as written, for messages.
    time_text: String,
    velocity: f64,
    uncertainty: f64,
    instrument: String,
}

/// A field being read, with what messages need to name it.
struct Field<'a> {
    source_name: &'a str,
    line: usize,
    column: usize,
    column_name: &'a str,
    text: &'a str,
}

impl<'a> Field<'a> {
    /// Field `index` (0-based) of a record.
    fn of(source_name: &'a str, record: &'a Record, index: usize, column_name: &'a str) -> Self {
        Field {
            source_name,
            line: record.line,
            column: index + 1,
            column_name,
            text: &record.fields[index],
        }
    }
    fn error_not_a_number(&self) -> TableError {
        TableError::NotANumber {
            source_name: self.source_name.to_string(),
            line: self.line,
            column: self.column,
            column_name: self.column_name.to_string(),
            value: self.text.to_string(),
        }
    }
    fn error_not_finite(&self) -> TableError {
        TableError::NotFinite {
            source_name: self.source_name.to_string(),
            line: self.line,
            column: self.column,
            column_name: self.column_name.to_string(),
            value: self.text.to_string(),
        }
    }
    fn error_non_positive(&self) -> TableError {
        TableError::NonPositiveUncertainty {
            source_name: self.source_name.to_string(),
            line: self.line,
            column: self.column,
            column_name: self.column_name.to_string(),
            value: self.text.to_string(),
        }
    }
    fn number(&self) -> Result<f64, TableError> {
        let value: f64 = self.text.parse().map_err(|_| self.error_not_a_number())?;
        check_finite(value, self)?;
        Ok(value)
    }
}

fn check_finite(value: f64, field: &Field<'_>) -> Result<(), TableError> {
    if value.is_finite() {
        Ok(())
    } else {
        Err(field.error_not_finite())
    }
}

/// Where each kind of column sits (0-based field index) and what it is called.
struct Layout {
    /// Line of the header, or of the first data row for headerless tables.
    reference_line: usize,
    /// Line of the header, if any.
    header_line: Option<usize>,
    n_fields: usize,
    time: (usize, String, Option<TimeSpec>),
    velocity: (usize, String, Option<VelocityUnit>),
    uncertainty: (usize, String, Option<VelocityUnit>),
    instrument: Option<usize>,
}

fn is_comment_or_blank(line: &str) -> bool {
    let trimmed = line.trim();
    trimmed.is_empty() || trimmed.starts_with('#')
}

/// Choose the delimiter from the first data lines: comma, tab or semicolon if
/// every sampled line has it, otherwise runs of whitespace.
fn detect_delimiter(text: &str) -> Delimiter {
    let sample: Vec<&str> = text
        .lines()
        .filter(|line| !is_comment_or_blank(line))
        .take(5)
        .collect();
    let candidates = [
        (',', Delimiter::Comma),
        ('\t', Delimiter::Tab),
        (';', Delimiter::Semicolon),
    ];
    candidates
        .iter()
        .find(|(ch, _)| !sample.is_empty() && sample.iter().all(|line| line.trim().contains(*ch)))
        .map(|(_, delimiter)| *delimiter)
        .unwrap_or(Delimiter::Whitespace)
}

/// Split a line at runs of spaces and tabs, keeping double-quoted text and
/// bracketed units (`rv [km s^-1]`) whole; a bracket opening after a space
/// joins the previous field (`rv [m/s]` is one header cell).
fn split_whitespace_fields(line: &str) -> Vec<String> {
    let mut fields: Vec<String> = Vec::new();
    let mut current = String::new();
    let mut in_quotes = false;
    let mut bracket_depth = 0usize;
    for ch in line.chars() {
        if in_quotes {
            current.push(ch);
            if ch == '"' {
                in_quotes = false;
            }
            continue;
        }
        match ch {
            '"' if current.is_empty() => {
                in_quotes = true;
                current.push(ch);
            }
            ' ' | '\t' => {
                if bracket_depth > 0 {
                    if !current.ends_with(' ') {
                        current.push(' ');
                    }
                } else if !current.is_empty() {
                    fields.push(std::mem::take(&mut current));
                }
            }
            '[' | '(' => {
                if current.is_empty() {
                    if let Some(previous) = fields.pop() {
                        current = previous;
                        current.push(' ');
                    }
                }
                bracket_depth += 1;
                current.push(ch);
            }
            ']' | ')' => {
                bracket_depth = bracket_depth.saturating_sub(1);
                current.push(ch);
            }
            _ => current.push(ch),
        }
    }
    if !current.is_empty() {
        fields.push(current);
    }
    fields
}

/// Rewrite the text line by line for the CSV reader: comment lines become
/// blank, whitespace-separated lines become tab-separated. Line numbers are kept.
fn prepare_text(text: &str, delimiter: Delimiter) -> String {
    let mut prepared = String::with_capacity(text.len() + 16);
    for line in text.lines() {
        if !is_comment_or_blank(line) {
            if delimiter == Delimiter::Whitespace {
                prepared.push_str(&split_whitespace_fields(line).join("\t"));
            } else {
                prepared.push_str(line);
            }
        }
        prepared.push('\n');
    }
    prepared
}

/// Turns byte positions (increasing) into 1-based line numbers, counting each newline once.
struct LineCounter<'a> {
    bytes: &'a [u8],
    byte: usize,
    line: usize,
}

impl<'a> LineCounter<'a> {
    fn new(text: &'a str) -> Self {
        LineCounter {
            bytes: text.as_bytes(),
            byte: 0,
            line: 1,
        }
    }

    /// Line of the first non-newline byte at or after `byte`. The CSV reader's
    /// own line count skips blank lines inconsistently, and its byte position of
    /// a record may precede the blank lines it skipped.
    fn line_of(&mut self, byte: usize) -> usize {
        let mut start = byte.clamp(self.byte, self.bytes.len());
        while start < self.bytes.len() && matches!(self.bytes[start], b'\n' | b'\r') {
            start += 1;
        }
        self.line += self.bytes[self.byte..start]
            .iter()
            .filter(|&&b| b == b'\n')
            .count();
        self.byte = start;
        self.line
    }
}

/// A record from the CSV reader with its original line.
struct Record {
    line: usize,
    fields: Vec<String>,
}

fn read_records(
    text: &str,
    delimiter: Delimiter,
    source_name: &str,
) -> Result<Vec<Record>, TableError> {
    let prepared = prepare_text(text, delimiter);
    let delimiter_byte = match delimiter {
        Delimiter::Comma => b',',
        Delimiter::Semicolon => b';',
        Delimiter::Tab | Delimiter::Whitespace => b'\t',
    };
    let mut reader = csv::ReaderBuilder::new()
        .has_headers(false)
        .flexible(true)
        .trim(csv::Trim::All)
        .comment(Some(b'#'))
        .delimiter(delimiter_byte)
        .from_reader(prepared.as_bytes());
    let mut line_counter = LineCounter::new(&prepared);
    let mut records = Vec::new();
    for (record_index, result) in reader.records().enumerate() {
        let record = result.map_err(|err| TableError::Malformed {
            source_name: source_name.to_string(),
            line: err
                .position()
                .map(|position| line_counter.line_of(position.byte() as usize))
                .unwrap_or(record_index + 1),
            message: err.to_string(),
        })?;
        if record.iter().all(str::is_empty) {
            continue;
        }
        let line = record
            .position()
            .map(|position| line_counter.line_of(position.byte() as usize))
            .unwrap_or(record_index + 1);
        let mut fields: Vec<String> = record.iter().map(str::to_string).collect();
        // A trailing delimiter (`1,2,3,`) adds empty fields; drop them.
        while fields.len() > 1 && fields.last().is_some_and(|field| field.is_empty()) {
            fields.pop();
        }
        records.push(Record { line, fields });
    }
    Ok(records)
}

/// A first record is a header if some of its first three cells are not
/// numbers and either none of them is or some cell is a known column name.
/// (A data row always starts with three numbers, so an instrument label that
/// happens to be a column name, like `site`, does not make it a header.)
fn looks_like_header(record: &Record) -> bool {
    let leading = &record.fields[..record.fields.len().min(3)];
    let n_numbers = leading
        .iter()
        .filter(|cell| cell.parse::<f64>().is_ok())
        .count();
    n_numbers < leading.len()
        && (n_numbers == 0
            || record
                .fields
                .iter()
                .any(|cell| classify_header_cell(cell).is_ok()))
}

fn layout_from_header(record: &Record, source_name: &str) -> Result<Layout, TableError> {
    let mut found: [Option<(usize, String, HeaderColumn)>; 4] = Default::default();
    for (index, cell) in record.fields.iter().enumerate() {
        let column = index + 1;
        let header = classify_header_cell(cell).map_err(|problem| match problem {
            HeaderProblem::UnknownName => TableError::UnknownHeader {
                source_name: source_name.to_string(),
                line: record.line,
                column,
                name: cell.clone(),
                accepted: ACCEPTED_NAMES.to_string(),
            },
            HeaderProblem::UnknownUnit(unit) => TableError::UnknownUnit {
                source_name: source_name.to_string(),
                line: record.line,
                column,
                name: cell.clone(),
                unit,
            },
        })?;
        let slot = &mut found[header.role as usize];
        if let Some((first_index, first_name, _)) = slot {
            return Err(TableError::DuplicateColumn {
                source_name: source_name.to_string(),
                line: record.line,
                column,
                name: cell.clone(),
                first_column: *first_index + 1,
                first_name: first_name.clone(),
                role: header.role.name().to_string(),
            });
        }
        *slot = Some((index, cell.clone(), header));
    }
    let [time, velocity, uncertainty, instrument] = found;
    let missing = |role: ColumnRole| TableError::MissingColumn {
        source_name: source_name.to_string(),
        line: record.line,
        role: role.name().to_string(),
        accepted: ACCEPTED_NAMES.to_string(),
    };
    let time = time.ok_or_else(|| missing(ColumnRole::Time))?;
    let velocity = velocity.ok_or_else(|| missing(ColumnRole::Velocity))?;
    let uncertainty = uncertainty.ok_or_else(|| missing(ColumnRole::Uncertainty))?;
    Ok(Layout {
        reference_line: record.line,
        header_line: Some(record.line),
        n_fields: record.fields.len(),
        time: (time.0, time.1, time.2.time),
        velocity: (velocity.0, velocity.1, velocity.2.unit),
        uncertainty: (uncertainty.0, uncertainty.1, uncertainty.2.unit),
        instrument: instrument.map(|(index, _, _)| index),
    })
}

fn layout_without_header(record: &Record, source_name: &str) -> Result<Layout, TableError> {
    let n_fields = record.fields.len();
    if !(3..=4).contains(&n_fields) {
        return Err(TableError::ColumnCount {
            source_name: source_name.to_string(),
            line: record.line,
            found: n_fields,
        });
    }
    Ok(Layout {
        reference_line: record.line,
        header_line: None,
        n_fields,
        time: (0, ColumnRole::Time.name().to_string(), None),
        velocity: (1, ColumnRole::Velocity.name().to_string(), None),
        uncertainty: (2, ColumnRole::Uncertainty.name().to_string(), None),
        instrument: (n_fields == 4).then_some(3),
    })
}

/// Decide the velocity units of the velocity and uncertainty columns.
fn resolve_units(
    layout: &Layout,
    explicit: Option<VelocityUnit>,
    source_name: &str,
    notices: &mut Vec<String>,
) -> Result<(VelocityUnit, VelocityUnit, StatedBy), TableError> {
    let header_line = layout.header_line.unwrap_or(layout.reference_line);
    let stated = [&layout.velocity, &layout.uncertainty];
    if let Some(explicit_unit) = explicit {
        for (index, name, unit) in stated {
            if let Some(header_unit) = *unit {
                if header_unit != explicit_unit {
                    return Err(TableError::UnitConflict {
                        source_name: source_name.to_string(),
                        line: header_line,
                        column: index + 1,
                        name: name.clone(),
                        header_unit,
                        explicit_unit,
                    });
                }
            }
        }
        return Ok((explicit_unit, explicit_unit, StatedBy::Explicit));
    }
    match (layout.velocity.2, layout.uncertainty.2) {
        (Some(velocity_unit), uncertainty_unit) => Ok((
            velocity_unit,
            uncertainty_unit.unwrap_or(velocity_unit),
            StatedBy::Header,
        )),
        (None, Some(uncertainty_unit)) => {
            notices.push(format!(
                "the velocity header `{}` states no unit; using {} from the uncertainty header `{}`",
                layout.velocity.1, uncertainty_unit, layout.uncertainty.1
            ));
            Ok((uncertainty_unit, uncertainty_unit, StatedBy::Header))
        }
        (None, None) => Err(TableError::UnitNotStated {
            source_name: source_name.to_string(),
            column: layout.velocity.0 + 1,
        }),
    }
}

fn same_spec(a: TimeSpec, b: TimeSpec) -> bool {
    let scales_agree =
        a.scale == b.scale || a.scale == TimeScale::Unstated || b.scale == TimeScale::Unstated;
    scales_agree && (a.offset_days - b.offset_days).abs() < 1e-9
}

/// Decide the time convention from the header, the options, or the magnitude of the times.
fn resolve_time_convention(
    layout: &Layout,
    explicit: Option<TimeSpec>,
    rows: &[Row],
    source_name: &str,
    notices: &mut Vec<String>,
) -> Result<TimeConvention, TableError> {
    let (time_index, time_name, header_spec) = &layout.time;
    let convention = match (*header_spec, explicit) {
        (Some(header), Some(given)) => {
            if !same_spec(header, given) {
                return Err(TableError::TimeConventionConflict {
                    source_name: source_name.to_string(),
                    line: layout.header_line.unwrap_or(layout.reference_line),
                    column: time_index + 1,
                    name: time_name.clone(),
                    header_convention: TimeConvention::stated(header, StatedBy::Header).label(),
                    explicit_convention: TimeConvention::stated(given, StatedBy::Explicit).label(),
                });
            }
            let scale = if given.scale == TimeScale::Unstated {
                header.scale
            } else {
                given.scale
            };
            let spec = TimeSpec {
                scale,
                offset_days: given.offset_days,
            };
            TimeConvention::stated(spec, StatedBy::Explicit)
        }
        (None, Some(given)) => TimeConvention::stated(given, StatedBy::Explicit),
        (Some(header), None) => TimeConvention::stated(header, StatedBy::Header),
        (None, None) => return Ok(infer_time_convention(rows, notices)),
    };
    let n_full = rows
        .iter()
        .filter(|row| row.time >= FULL_JULIAN_DATE_THRESHOLD)
        .count();
    match convention.offset_days {
        Some(offset) if offset == 0.0 && n_full < rows.len() => notices.push(format!(
            "times are labelled {} (full Julian dates) but {} of {} are below 2400000; \
             check whether an offset was subtracted",
            convention.label(),
            rows.len() - n_full,
            rows.len()
        )),
        Some(offset) if offset >= FULL_JULIAN_DATE_THRESHOLD && n_full > 0 => {
            notices.push(format!(
            "times are labelled {} but {} of {} are at or above 2400000, like full Julian dates; \
                 check the time convention",
            convention.label(),
            n_full,
            rows.len()
        ))
        }
        _ => {}
    }
    Ok(convention)
}

fn infer_time_convention(rows: &[Row], notices: &mut Vec<String>) -> TimeConvention {
    let n_full = rows
        .iter()
        .filter(|row| row.time >= FULL_JULIAN_DATE_THRESHOLD)
        .count();
    if n_full == rows.len() {
        notices.push(
            "time convention not stated: all times are at or above 2400000, so they are taken as \
             full Julian dates of unstated scale (state it in the header, e.g. `bjd`, or with --time)"
                .to_string(),
        );
        TimeConvention {
            scale: TimeScale::Unstated,
            offset_days: Some(0.0),
            stated_by: StatedBy::Inferred,
        }
    } else {
        let mixed = if n_full > 0 {
            format!(
                "; {} of {} times are at or above 2400000 and the rest below, which suggests mixed conventions",
                n_full,
                rows.len()
            )
        } else {
            String::new()
        };
        notices.push(format!(
            "time convention not stated and times are below 2400000: they are days from an unknown \
             origin (state it in the header, e.g. `bjd-2450000`, or with --time){mixed}"
        ));
        TimeConvention {
            scale: TimeScale::Unstated,
            offset_days: None,
            stated_by: StatedBy::Inferred,
        }
    }
}

/// Give rows with a blank instrument label the name [`DEFAULT_INSTRUMENT`], with a notice.
fn name_blank_instruments(rows: &mut [Row], notices: &mut Vec<String>) {
    let blank_lines: Vec<usize> = rows
        .iter()
        .filter(|row| row.instrument.is_empty())
        .map(|row| row.line)
        .collect();
    if blank_lines.is_empty() {
        return;
    }
    for row in rows.iter_mut().filter(|row| row.instrument.is_empty()) {
        row.instrument = DEFAULT_INSTRUMENT.to_string();
    }
    notices.push(format!(
        "{} row(s) have a blank instrument label (first on line {}); they are assigned to instrument `{}`",
        blank_lines.len(),
        blank_lines[0],
        DEFAULT_INSTRUMENT
    ));
}

/// Check row count and duplicates, number the instruments, sort by time.
fn assemble(
    source_name: &str,
    mut rows: Vec<Row>,
    time_convention: TimeConvention,
    (velocity_unit_in_source, velocity_unit_stated_by): (VelocityUnit, StatedBy),
    mut notices: Vec<String>,
) -> Result<VelocityTable, TableError> {
    if rows.is_empty() {
        return Err(TableError::Empty {
            source_name: source_name.to_string(),
            what: "blank or comment lines".to_string(),
        });
    }
    if rows.len() < MIN_ROWS {
        return Err(TableError::TooFewRows {
            source_name: source_name.to_string(),
            found: rows.len(),
            minimum: MIN_ROWS,
        });
    }
    let mut instrument_names: Vec<String> = Vec::new();
    let mut seen: HashMap<(u64, usize), usize> = HashMap::new();
    let mut row_instruments = Vec::with_capacity(rows.len());
    for row in &rows {
        let instrument = match instrument_names
            .iter()
            .position(|name| *name == row.instrument)
        {
            Some(index) => index,
            None => {
                instrument_names.push(row.instrument.clone());
                instrument_names.len() - 1
            }
        };
        // Adding 0.0 makes -0.0 and 0.0 the same key.
        let key = ((row.time + 0.0).to_bits(), instrument);
        if let Some(first_line) = seen.insert(key, row.line) {
            return Err(TableError::DuplicateRow {
                source_name: source_name.to_string(),
                line: row.line,
                first_line,
                time: row.time_text.clone(),
                instrument: row.instrument.clone(),
            });
        }
        row_instruments.push(instrument);
    }
    let first_unsorted = rows
        .windows(2)
        .find(|pair| pair[1].time < pair[0].time)
        .map(|pair| pair[1].line);
    let mut order: Vec<usize> = (0..rows.len()).collect();
    if let Some(line) = first_unsorted {
        order.sort_by(|&a, &b| rows[a].time.total_cmp(&rows[b].time));
        notices.push(format!(
            "times are not in increasing order (first out of order on line {line}); rows were sorted by time"
        ));
    }
    let rows_sorted: Vec<(Row, usize)> = order
        .iter()
        .map(|&index| {
            (
                std::mem::replace(&mut rows[index], empty_row()),
                row_instruments[index],
            )
        })
        .collect();
    Ok(VelocityTable {
        source_name: source_name.to_string(),
        times: rows_sorted.iter().map(|(row, _)| row.time).collect(),
        velocities: rows_sorted.iter().map(|(row, _)| row.velocity).collect(),
        uncertainties: rows_sorted.iter().map(|(row, _)| row.uncertainty).collect(),
        instrument_index: rows_sorted.iter().map(|(_, index)| *index).collect(),
        instrument_names,
        lines: rows_sorted.iter().map(|(row, _)| row.line).collect(),
        time_convention,
        velocity_unit_in_source,
        velocity_unit_stated_by,
        notices,
    })
}

fn empty_row() -> Row {
    Row {
        line: 0,
        time: 0.0,
        time_text: String::new(),
        velocity: 0.0,
        uncertainty: 0.0,
        instrument: String::new(),
    }
}

/// Read a velocity table from text: CSV, TSV, semicolon- or
/// whitespace-separated, with or without a header, `#` comment lines allowed.
///
/// With a header, columns may come in any order and are recognised by name
/// (`time`/`bjd`/`mjd`/..., `rv`/`velocity`/..., `err`/`sigma`/`e_rv`/...,
/// `instrument`/`telescope`/...), with units written in the name (`rv [km/s]`,
/// `rv_kms`) and time conventions (`bjd-2450000`, `time [mjd]`). Without a
/// header the order is time, velocity, uncertainty and an optional instrument.
/// The velocity unit must be stated in the header or in `options`; the time
/// convention is inferred from the magnitude of the times when not stated.
/// Rows out of time order are sorted (stably), with a notice.
pub fn parse_table(text: &str, options: &ReadOptions) -> Result<VelocityTable, TableError> {
    let source_name = options.source_name.as_str();
    let text = text.strip_prefix('\u{feff}').unwrap_or(text);
    let delimiter = options.delimiter.unwrap_or_else(|| detect_delimiter(text));
    let records = read_records(text, delimiter, source_name)?;
    let Some(first) = records.first() else {
        return Err(TableError::Empty {
            source_name: source_name.to_string(),
            what: "blank or comment lines".to_string(),
        });
    };
    let has_header = looks_like_header(first);
    let layout = if has_header {
        layout_from_header(first, source_name)?
    } else {
        layout_without_header(first, source_name)?
    };
    let data = &records[usize::from(has_header)..];
    if data.is_empty() {
        return Err(TableError::Empty {
            source_name: source_name.to_string(),
            what: format!("a header on line {}", first.line),
        });
    }
    let mut notices = Vec::new();
    let (velocity_unit, uncertainty_unit, unit_stated_by) =
        resolve_units(&layout, options.velocity_unit, source_name, &mut notices)?;
    let mut rows = Vec::with_capacity(data.len());
    for record in data {
        if record.fields.len() != layout.n_fields {
            return Err(TableError::WrongFieldCount {
                source_name: source_name.to_string(),
                line: record.line,
                expected: layout.n_fields,
                found: record.fields.len(),
                reference_line: layout.reference_line,
            });
        }
        let time_field = Field::of(source_name, record, layout.time.0, &layout.time.1);
        let time = time_field.number()?;
        let velocity =
            Field::of(source_name, record, layout.velocity.0, &layout.velocity.1).number()?;
        let uncertainty_field = Field::of(
            source_name,
            record,
            layout.uncertainty.0,
            &layout.uncertainty.1,
        );
        let uncertainty = uncertainty_field.number()?;
        if uncertainty <= 0.0 {
            return Err(uncertainty_field.error_non_positive());
        }
        let instrument = layout
            .instrument
            .map(|index| record.fields[index].clone())
            .unwrap_or_else(|| DEFAULT_INSTRUMENT.to_string());
        rows.push(Row {
            line: record.line,
            time,
            time_text: time_field.text.to_string(),
            velocity: velocity * velocity_unit.to_metres_per_second(),
            uncertainty: uncertainty * uncertainty_unit.to_metres_per_second(),
            instrument,
        });
    }
    let time_convention =
        resolve_time_convention(&layout, options.time, &rows, source_name, &mut notices)?;
    name_blank_instruments(&mut rows, &mut notices);
    assemble(
        source_name,
        rows,
        time_convention,
        (velocity_unit, unit_stated_by),
        notices,
    )
}

/// Header cell naming a time convention so that [`parse_table`] reads it back.
fn time_header(convention: &TimeConvention) -> String {
    let Some(offset) = convention.offset_days else {
        return "time".to_string();
    };
    let name = match convention.scale {
        TimeScale::Jd => "jd",
        TimeScale::Bjd => "bjd",
        TimeScale::Hjd => "hjd",
        TimeScale::Unstated if offset == 0.0 => return "time".to_string(),
        TimeScale::Unstated => return format!("time [offset:{offset}]"),
    };
    if offset == 0.0 {
        format!("time [{name}]")
    } else {
        format!("time [{name}-{offset}]")
    }
}

/// Write a table as CSV text (header with time convention and `m/s`, values
/// at full precision) that [`parse_table`] reads back to the same table. A
/// full Julian date of unstated scale, or an unknown origin, is written as a
/// plain `time` column and inferred again on reading.
pub fn write_table_csv(table: &VelocityTable) -> String {
    let mut writer = csv::WriterBuilder::new().from_writer(Vec::new());
    let mut text_rows: Vec<Vec<String>> = vec![vec![
        time_header(&table.time_convention),
        "rv [m/s]".to_string(),
        "uncertainty [m/s]".to_string(),
        "instrument".to_string(),
    ]];
    for row_index in 0..table.n_rows() {
        text_rows.push(vec![
            table.times[row_index].to_string(),
            table.velocities[row_index].to_string(),
            table.uncertainties[row_index].to_string(),
            table.instrument_names[table.instrument_index[row_index]].clone(),
        ]);
    }
    for text_row in &text_rows {
        // Writing to a Vec cannot fail.
        writer
            .write_record(text_row)
            .expect("writing CSV to memory");
    }
    let bytes = writer.into_inner().expect("flushing CSV to memory");
    String::from_utf8(bytes).expect("CSV of UTF-8 strings is UTF-8")
}

#[cfg(test)]
mod tests;
