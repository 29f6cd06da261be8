//! Checks every table reader shares: one row's fields, blank instruments, duplicates, order, row count.

use std::collections::HashMap;

use super::reader::Record;
use super::{
    StatedBy, TableError, TimeConvention, VelocityTable, VelocityUnit, DEFAULT_INSTRUMENT, MIN_ROWS,
};

/// One data row before assembly (velocities already in m/s).
#[derive(Debug, Clone)]
pub(super) struct Row {
    pub(super) line: usize,
    pub(super) time: f64,
    /// The time as written, for messages.
    pub(super) time_text: String,
    pub(super) velocity: f64,
    pub(super) uncertainty: f64,
    pub(super) instrument: String,
}

/// A field being read, with what messages need to name it.
pub(super) struct Field<'a> {
    pub(super) source_name: &'a str,
    pub(super) line: usize,
    pub(super) column: usize,
    pub(super) column_name: &'a str,
    pub(super) text: &'a str,
}

impl<'a> Field<'a> {
    /// Field `index` (0-based) of a record.
    pub(super) fn of(
        source_name: &'a str,
        record: &'a Record,
        index: usize,
        column_name: &'a str,
    ) -> Self {
        Field {
            source_name,
            line: record
                .field_lines
                .get(index)
                .copied()
                .unwrap_or(record.line),
            column: index + 1,
            column_name,
            text: &record.fields[index],
        }
    }
    pub(super) fn error_not_a_number(&self) -> TableError {
        TableError::NotANumber {
            source_name: self.source_name.to_string(),
            line: self.line,
            column: self.column,
            column_name: crate::one_line(self.column_name),
            value: crate::one_line(self.text),
        }
    }
    pub(super) fn error_not_finite(&self) -> TableError {
        TableError::NotFinite {
            source_name: self.source_name.to_string(),
            line: self.line,
            column: self.column,
            column_name: crate::one_line(self.column_name),
            value: crate::one_line(self.text),
        }
    }
    pub(super) fn error_non_positive(&self) -> TableError {
        TableError::NonPositiveUncertainty {
            source_name: self.source_name.to_string(),
            line: self.line,
            column: self.column,
            column_name: crate::one_line(self.column_name),
            value: crate::one_line(self.text),
        }
    }
    pub(super) fn number(&self) -> Result<f64, TableError> {
        let value: f64 = self.text.parse().map_err(|_| self.error_not_a_number())?;
        check_finite(value, self)?;
        Ok(value)
    }
}

pub(super) fn check_finite(value: f64, field: &Field<'_>) -> Result<(), TableError> {
    if value.is_finite() {
        Ok(())
    } else {
        Err(field.error_not_finite())
    }
}

/// Give rows with a blank instrument label the name [`DEFAULT_INSTRUMENT`], with a notice.
pub(super) fn name_blank_instruments(rows: &mut [Row], notices: &mut Vec<String>) {
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
pub(super) fn assemble(
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
                time: crate::one_line(&row.time_text),
                instrument: crate::one_line(&row.instrument),
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
