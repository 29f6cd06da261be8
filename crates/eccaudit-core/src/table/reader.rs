//! The text reader: CSV, TSV, semicolon- or whitespace-separated velocity tables with or without a header.

use std::str::FromStr;

use serde::{Deserialize, Serialize};

use super::assemble::{assemble, name_blank_instruments, Field, Row};
use super::header::{
    classify_header_cell, ColumnRole, HeaderColumn, HeaderProblem, ACCEPTED_NAMES,
};
use super::{
    OptionParseError, StatedBy, TableError, TimeConvention, TimeScale, TimeSpec, VelocityTable,
    VelocityUnit, DEFAULT_INSTRUMENT, FULL_JULIAN_DATE_THRESHOLD,
};

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
                value: crate::one_line(text),
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

/// Where each kind of column sits (0-based field index) and what it is called.
pub(super) struct Layout {
    /// Line of the header, or of the first data row for headerless tables.
    pub(super) reference_line: usize,
    /// Line of the header, if any.
    pub(super) header_line: Option<usize>,
    pub(super) n_fields: usize,
    pub(super) time: (usize, String, Option<TimeSpec>),
    pub(super) velocity: (usize, String, Option<VelocityUnit>),
    pub(super) uncertainty: (usize, String, Option<VelocityUnit>),
    pub(super) instrument: Option<usize>,
}

fn is_comment_or_blank(line: &str) -> bool {
    let trimmed = line.trim();
    trimmed.is_empty() || trimmed.starts_with('#')
}

/// Choose the delimiter from the first data lines: comma, tab or semicolon if
/// every sampled line has it, otherwise runs of whitespace.
pub(super) fn detect_delimiter(text: &str) -> Delimiter {
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
pub(super) fn split_whitespace_fields(line: &str) -> Vec<String> {
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
pub(super) struct Record {
    pub(super) line: usize,
    pub(super) fields: Vec<String>,
    /// Line of each field, when fields of one record sit on different lines (VOTable);
    /// empty when they all sit on `line`.
    pub(super) field_lines: Vec<usize>,
}

pub(super) fn read_records(
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
            message: crate::one_line(&err.to_string()),
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
        records.push(Record {
            line,
            fields,
            field_lines: Vec::new(),
        });
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
                name: crate::one_line(cell),
                accepted: ACCEPTED_NAMES.to_string(),
            },
            HeaderProblem::UnknownUnit(unit) => TableError::UnknownUnit {
                source_name: source_name.to_string(),
                line: record.line,
                column,
                name: crate::one_line(cell),
                unit: crate::one_line(&unit),
            },
        })?;
        let slot = &mut found[header.role as usize];
        if let Some((first_index, first_name, _)) = slot {
            return Err(TableError::DuplicateColumn {
                source_name: source_name.to_string(),
                line: record.line,
                column,
                name: crate::one_line(cell),
                first_column: *first_index + 1,
                first_name: crate::one_line(first_name),
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
                        name: crate::one_line(name),
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
                    name: crate::one_line(time_name),
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
        (None, None) => {
            let times: Vec<f64> = rows.iter().map(|row| row.time).collect();
            return Ok(infer_time_convention(&times, notices));
        }
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

/// The time convention of times whose convention nobody stated: full Julian dates of unstated
/// scale when all are at or above [`FULL_JULIAN_DATE_THRESHOLD`], else days from an unknown
/// origin; `notices` says which and why.
pub fn infer_time_convention(times: &[f64], notices: &mut Vec<String>) -> TimeConvention {
    let n_full = times
        .iter()
        .filter(|&&time| time >= FULL_JULIAN_DATE_THRESHOLD)
        .count();
    if n_full == times.len() {
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
                times.len()
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

/// Read a velocity table from text: CSV, TSV, semicolon- or
/// whitespace-separated, ECSV or VOTable, with or without a header, `#` comment lines allowed.
///
/// The format is recognised from the content, and from the extension of
/// `options.source_name` when the content is ambiguous: text starting with
/// `# %ECSV` is ECSV (see [`super::ecsv`]), text starting with `<?xml` or
/// `<VOTABLE`, or a file named `*.xml`/`*.vot`, is a VOTable (see
/// [`super::votable`]); anything else is delimited text.
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
    let text = text.strip_prefix('\u{feff}').unwrap_or(text);
    match TableFormat::detect(text, &options.source_name) {
        TableFormat::Ecsv => super::ecsv::parse_ecsv(text, options),
        TableFormat::VoTable => super::votable::parse_votable(text, options),
        TableFormat::Delimited => parse_delimited(text, options),
    }
}

/// The file formats [`parse_table`] reads.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum TableFormat {
    /// CSV, TSV, semicolon- or whitespace-separated text.
    Delimited,
    /// astropy's Enhanced Character Separated Values (APE 6).
    Ecsv,
    /// IVOA VOTable (XML), TABLEDATA serialisation.
    VoTable,
}

impl TableFormat {
    /// The format of `text`, from its first line, or from the extension of `source_name`
    /// when the first line says nothing.
    pub fn detect(text: &str, source_name: &str) -> TableFormat {
        let start = text.trim_start();
        let lower_name = source_name.to_ascii_lowercase();
        if start.starts_with("# %ECSV") {
            TableFormat::Ecsv
        } else if start.starts_with("<?xml")
            || start.starts_with("<VOTABLE")
            || lower_name.ends_with(".vot")
            || lower_name.ends_with(".xml")
        {
            TableFormat::VoTable
        } else if lower_name.ends_with(".ecsv") {
            TableFormat::Ecsv
        } else {
            TableFormat::Delimited
        }
    }
}

/// [`parse_table`] for delimited text (CSV, TSV, semicolon- or whitespace-separated).
fn parse_delimited(text: &str, options: &ReadOptions) -> Result<VelocityTable, TableError> {
    let source_name = crate::one_line(&options.source_name);
    let source_name = source_name.as_str();
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
    table_from_records(&layout, data, options, Vec::new())
}

/// Check and convert the data records of any format once its [`Layout`] is known: fields,
/// units, time convention, blank instruments, then [`assemble`].
pub(super) fn table_from_records(
    layout: &Layout,
    data: &[Record],
    options: &ReadOptions,
    mut notices: Vec<String>,
) -> Result<VelocityTable, TableError> {
    let source_name = options.source_name.as_str();
    let (velocity_unit, uncertainty_unit, unit_stated_by) =
        resolve_units(layout, options.velocity_unit, source_name, &mut notices)?;
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
        resolve_time_convention(layout, options.time, &rows, source_name, &mut notices)?;
    name_blank_instruments(&mut rows, &mut notices);
    assemble(
        source_name,
        rows,
        time_convention,
        (velocity_unit, unit_stated_by),
        notices,
    )
}
