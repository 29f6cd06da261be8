//! Why a velocity table was rejected: one typed error per problem, located by file, line and column.

use serde::Serialize;

use super::VelocityUnit;
#[cfg(doc)]
use super::{VelocityTable, MIN_ROWS};

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
    /// Text that breaks the syntax of its format (XML of a VOTable, YAML of an ECSV header).
    #[error("{source_name}:{line}:{column}: not valid {format}: {message}")]
    Syntax {
        /// File name.
        source_name: String,
        /// Line of the problem (1-based).
        line: usize,
        /// Character column of the problem (1-based).
        column: usize,
        /// What the text should have been (`VOTable XML`, `ECSV header (YAML)`, ...).
        format: String,
        /// The parser's message.
        message: String,
    },
    /// Well-formed text that uses something the reader does not support, or a header that
    /// contradicts itself.
    #[error("{source_name}:{line}:{column}: {message}")]
    Unsupported {
        /// File name.
        source_name: String,
        /// Line of the problem (1-based).
        line: usize,
        /// Character column of the problem (1-based).
        column: usize,
        /// What is wrong and what to do instead.
        message: String,
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
