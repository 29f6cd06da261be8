//! Velocity tables: read CSV, TSV or whitespace-separated text into checked times, velocities and uncertainties.
//!
//! The reader works on text already in memory (the command line reads the
//! file, the browser passes the dropped file's text) and never guesses the
//! velocity unit. Times stay in the file's convention (days); velocities and
//! uncertainties are stored in m/s.

mod assemble;
mod columns;
pub mod ecsv;
mod error;
mod header;
mod reader;
mod summary;
mod units;
pub mod votable;
mod writer;

pub use ecsv::{write_ecsv, write_table_ecsv, EcsvColumn, EcsvValues};
pub use error::TableError;
pub use reader::{infer_time_convention, parse_table, Delimiter, ReadOptions, TableFormat};
pub use summary::{GroupSummary, TableSummary};
pub use units::{OptionParseError, StatedBy, TimeConvention, TimeScale, TimeSpec, VelocityUnit};
pub use writer::write_table_csv;

use serde::Serialize;

use assemble::{assemble, check_finite, name_blank_instruments, Field, Row};
#[cfg(test)]
use reader::{detect_delimiter, read_records, split_whitespace_fields};

/// Fewest data rows a table may have.
pub const MIN_ROWS: usize = 3;

/// Instrument name given to rows without an instrument label.
pub const DEFAULT_INSTRUMENT: &str = "default";

/// Times at or above this value are taken as full Julian dates when the
/// convention is not stated (JD 2 400 000 is 1858 November 16; common practice).
pub const FULL_JULIAN_DATE_THRESHOLD: f64 = 2_400_000.0;

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

#[cfg(test)]
mod tests;
