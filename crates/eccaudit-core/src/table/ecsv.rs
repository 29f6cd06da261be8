//! ECSV, astropy's Enhanced Character Separated Values (Astropy Proposal for Enhancement 6):
//! reading velocity tables with their units and time conventions, and writing any table.
//!
//! An ECSV file is a `# %ECSV 1.0` line, a YAML header behind `# ` (column names, units, data
//! types, table metadata, with astropy's serialised `Time` columns), a line of column names and
//! the data, space- or comma-separated. The YAML is parsed by the `yaml-rust2` crate (pure Rust,
//! so it builds for wasm32 like the rest of the core).

use yaml_rust2::{Yaml, YamlLoader};

use super::columns::{layout_from_described, role_from_ucd, time_spec_from, DescribedColumn};
use super::reader::{read_records, table_from_records, Record};
use super::{Delimiter, ReadOptions, TableError, TimeConvention, TimeScale, VelocityTable};

/// What the reader needs of one column's entry in the header's `datatype` list.
struct HeaderColumn {
    name: String,
    unit: Option<String>,
    datatype: String,
    ucd: Option<String>,
}

/// The ECSV header: its end (first line after it), delimiter, columns, the YAML lines with
/// their file lines.
struct Header {
    /// File line of each YAML line (the YAML starts at `---`).
    yaml_lines: Vec<(usize, String)>,
    delimiter: u8,
    columns: Vec<HeaderColumn>,
    /// `__serialized_columns__` entry of the table metadata, if any.
    serialized: Option<Yaml>,
}

impl Header {
    /// File line and character column where `needle` first appears in the header, for messages.
    fn locate(&self, needle: &str) -> (usize, usize) {
        self.yaml_lines
            .iter()
            .find_map(|(line, text)| {
                text.find(needle)
                    .map(|at| (*line, text[..at].chars().count() + 3))
            })
            .unwrap_or((1, 1))
    }
}

fn syntax(source_name: &str, line: usize, column: usize, message: impl Into<String>) -> TableError {
    TableError::Syntax {
        source_name: source_name.to_string(),
        line,
        column,
        format: "ECSV".to_string(),
        message: message.into(),
    }
}

fn unsupported(source_name: &str, (line, column): (usize, usize), message: String) -> TableError {
    TableError::Unsupported {
        source_name: source_name.to_string(),
        line,
        column,
        message,
    }
}

/// Look a key up in a mapping, or in an ordered map written as a list of one-key mappings
/// (YAML `!!omap`, which astropy uses for table metadata).
fn lookup<'a>(node: &'a Yaml, key: &str) -> Option<&'a Yaml> {
    match node {
        Yaml::Hash(map) => map.get(&Yaml::String(key.to_string())),
        Yaml::Array(items) => items.iter().find_map(|item| lookup_hash(item, key)),
        _ => None,
    }
}

fn lookup_hash<'a>(node: &'a Yaml, key: &str) -> Option<&'a Yaml> {
    match node {
        Yaml::Hash(map) => map.get(&Yaml::String(key.to_string())),
        _ => None,
    }
}

/// A scalar as text (numbers as written).
fn scalar_text(node: &Yaml) -> Option<String> {
    match node {
        Yaml::String(text) | Yaml::Real(text) => Some(text.clone()),
        Yaml::Integer(value) => Some(value.to_string()),
        Yaml::Boolean(value) => Some(value.to_string()),
        _ => None,
    }
}

fn read_header(text: &str, source_name: &str) -> Result<(Header, usize), TableError> {
    let mut lines = text.lines().enumerate();
    let Some((_, first)) = lines.next() else {
        return Err(syntax(source_name, 1, 1, "empty file"));
    };
    let version = first.trim().strip_prefix("# %ECSV").map(str::trim);
    match version {
        Some(v) if v.starts_with("1.") || v.starts_with("0.9") => {}
        Some(v) => {
            return Err(unsupported(
                source_name,
                (1, 9),
                format!("ECSV version `{v}` is not read; versions 0.9 and 1.x are"),
            ))
        }
        None => {
            return Err(syntax(
                source_name,
                1,
                1,
                "the first line must be `# %ECSV 1.0`",
            ))
        }
    }
    let mut yaml_lines: Vec<(usize, String)> = Vec::new();
    let mut end = 1;
    for (index, line) in lines {
        let Some(rest) = line.strip_prefix('#') else {
            break;
        };
        end = index + 1;
        if yaml_lines.is_empty() && rest.trim().is_empty() {
            continue;
        }
        if yaml_lines.is_empty() && rest.trim() != "---" {
            return Err(syntax(
                source_name,
                index + 1,
                1,
                "the header must start with `# ---` after the `# %ECSV` line",
            ));
        }
        let yaml = rest.strip_prefix(' ').unwrap_or(rest);
        yaml_lines.push((index + 1, yaml.to_string()));
    }
    if yaml_lines.is_empty() {
        return Err(syntax(
            source_name,
            2,
            1,
            "no YAML header (`# ---`) after `# %ECSV`",
        ));
    }
    let yaml_text: String = yaml_lines
        .iter()
        .map(|(_, text)| text.as_str())
        .collect::<Vec<_>>()
        .join("\n");
    let documents = YamlLoader::load_from_str(&yaml_text).map_err(|err| {
        let marker = err.marker();
        // Marker lines count from 1 in the YAML text; its columns from 0; `# ` adds 2.
        let yaml_line = marker.line().max(1);
        let line = yaml_lines
            .get(yaml_line - 1)
            .map_or(yaml_lines.last().map_or(1, |l| l.0), |l| l.0);
        TableError::Syntax {
            source_name: source_name.to_string(),
            line,
            column: marker.col() + 3,
            format: "ECSV header (YAML)".to_string(),
            message: err.info().to_string(),
        }
    })?;
    let document = documents.into_iter().next().unwrap_or(Yaml::Null);
    let mut header = Header {
        yaml_lines,
        delimiter: b' ',
        columns: Vec::new(),
        serialized: None,
    };
    match lookup(&document, "delimiter")
        .and_then(scalar_text)
        .as_deref()
    {
        None | Some(" ") => {}
        Some(",") => header.delimiter = b',',
        Some(other) => {
            return Err(unsupported(
                source_name,
                header.locate("delimiter"),
                format!("ECSV delimiter `{other}` is not allowed (only a space or a comma)"),
            ))
        }
    }
    let Some(Yaml::Array(entries)) = lookup(&document, "datatype") else {
        return Err(syntax(
            source_name,
            header.yaml_lines[0].0,
            1,
            "the header has no `datatype:` list of columns",
        ));
    };
    for entry in entries {
        let name = lookup_hash(entry, "name").and_then(scalar_text);
        let Some(name) = name else {
            return Err(syntax(
                source_name,
                header.locate("datatype").0,
                1,
                "a column in the `datatype` list has no `name`",
            ));
        };
        header.columns.push(HeaderColumn {
            unit: lookup_hash(entry, "unit").and_then(scalar_text),
            datatype: lookup_hash(entry, "datatype")
                .and_then(scalar_text)
                .unwrap_or_else(|| "string".to_string()),
            ucd: lookup_hash(entry, "meta")
                .and_then(|meta| lookup(meta, "ucd"))
                .and_then(scalar_text),
            name,
        });
    }
    header.serialized = lookup(&document, "meta")
        .and_then(|meta| lookup(meta, "__serialized_columns__"))
        .cloned();
    Ok((header, end))
}

/// The time convention astropy serialised for column `name` (a `Time` in format jd or mjd),
/// or `None` when the column is not a serialised `Time`.
fn serialized_time(
    header: &Header,
    name: &str,
    source_name: &str,
    notices: &mut Vec<String>,
) -> Result<Option<super::TimeSpec>, TableError> {
    let Some(entry) = header.serialized.as_ref().and_then(|s| lookup(s, name)) else {
        return Ok(None);
    };
    let class = lookup_hash(entry, "__class__").and_then(scalar_text);
    if class.as_deref() != Some("astropy.time.core.Time") {
        return Ok(None);
    }
    let stored_as = lookup_hash(entry, "value")
        .and_then(|value| lookup_hash(value, "name"))
        .and_then(scalar_text);
    if stored_as.as_deref() != Some(name) {
        return Err(unsupported(
            source_name,
            header.locate(&format!("{name}:")),
            format!(
                "the time column `{name}` is stored as two parts (jd1, jd2); write it as one \
                 value (astropy: serialize_method='formatted_value')"
            ),
        ));
    }
    let format = lookup_hash(entry, "format")
        .and_then(scalar_text)
        .unwrap_or_default();
    let offset_days = match format.as_str() {
        "jd" => 0.0,
        "mjd" => 2_400_000.5,
        other => {
            return Err(unsupported(
                source_name,
                header.locate("format:"),
                format!(
                    "time column `{name}` is in format `{other}`; eccaudit reads Julian dates: \
                     write it in format jd or mjd"
                ),
            ))
        }
    };
    let scale = lookup_hash(entry, "scale").and_then(scalar_text);
    Ok(Some(time_spec_from(
        scale.as_deref(),
        None,
        offset_days,
        notices,
    )))
}

/// Split one ECSV data line at single spaces outside double quotes (`""` is a quote inside a
/// quoted field); runs of spaces count as one separator, as hand-aligned files have them.
fn split_space_line(line: &str) -> Vec<String> {
    let mut fields = Vec::new();
    let mut current = String::new();
    let mut in_field = false;
    let mut in_quotes = false;
    let mut chars = line.chars().peekable();
    while let Some(ch) = chars.next() {
        if in_quotes {
            if ch == '"' {
                if chars.peek() == Some(&'"') {
                    current.push('"');
                    chars.next();
                } else {
                    in_quotes = false;
                }
            } else {
                current.push(ch);
            }
            continue;
        }
        match ch {
            ' ' | '\t' => {
                if in_field {
                    fields.push(std::mem::take(&mut current));
                    in_field = false;
                }
            }
            '"' => {
                in_field = true;
                in_quotes = true;
            }
            _ => {
                in_field = true;
                current.push(ch);
            }
        }
    }
    if in_field {
        fields.push(current);
    }
    fields
}

/// Read an ECSV velocity table: columns recognised by name (as in a CSV header) or by a `ucd`
/// in their metadata, velocity units from their `unit`, the time convention from an astropy
/// `Time` column (format jd or mjd; scale tdb read as BJD) or from the time column's name.
pub(super) fn parse_ecsv(text: &str, options: &ReadOptions) -> Result<VelocityTable, TableError> {
    let source_name = options.source_name.as_str();
    let (header, end) = read_header(text, source_name)?;
    // The data part, with the header blanked so that line numbers stay those of the file.
    let records: Vec<Record> = if header.delimiter == b',' {
        let body: String = text
            .lines()
            .enumerate()
            .map(|(index, line)| if index < end { "" } else { line })
            .collect::<Vec<_>>()
            .join("\n");
        read_records(&body, Delimiter::Comma, source_name)?
    } else {
        text.lines()
            .enumerate()
            .skip(end)
            .filter(|(_, line)| !line.trim().is_empty() && !line.trim_start().starts_with('#'))
            .map(|(index, line)| Record {
                line: index + 1,
                fields: split_space_line(line),
                field_lines: Vec::new(),
            })
            .collect()
    };
    let Some(names) = records.first() else {
        return Err(TableError::Empty {
            source_name: source_name.to_string(),
            what: "an ECSV header".to_string(),
        });
    };
    let declared: Vec<&str> = header.columns.iter().map(|c| c.name.as_str()).collect();
    if names.fields != declared {
        return Err(syntax(
            source_name,
            names.line,
            1,
            format!(
                "the column names `{}` differ from the header's `{}`",
                names.fields.join(" "),
                declared.join(" ")
            ),
        ));
    }
    let mut notices = Vec::new();
    let mut described = Vec::with_capacity(header.columns.len());
    for column in &header.columns {
        let (line, character) = header.locate(&format!("name: {}", column.name));
        let time = serialized_time(&header, &column.name, source_name, &mut notices)?;
        if time.is_some() && !matches!(column.datatype.as_str(), "float64" | "float32") {
            return Err(unsupported(
                source_name,
                (line, character),
                format!(
                    "time column `{}` has datatype `{}`; a Julian date needs float64",
                    column.name, column.datatype
                ),
            ));
        }
        described.push(DescribedColumn {
            name: column.name.clone(),
            role: column.ucd.as_deref().and_then(role_from_ucd),
            unit: column.unit.clone(),
            time,
            line,
            column: character,
        });
    }
    let layout = layout_from_described(&described, names.line, source_name, &mut notices)?;
    let data = &records[1..];
    if data.is_empty() {
        return Err(TableError::Empty {
            source_name: source_name.to_string(),
            what: format!("a header and column names on line {}", names.line),
        });
    }
    table_from_records(&layout, data, options, notices)
}

/// Values of one column of a table written by [`write_ecsv`].
#[derive(Debug, Clone, PartialEq)]
pub enum EcsvValues {
    /// 64-bit floats; `None` is written as a missing (masked) value.
    Float(Vec<Option<f64>>),
    /// 64-bit integers; `None` is written as a missing (masked) value.
    Int(Vec<Option<i64>>),
    /// Booleans; `None` is written as a missing (masked) value.
    Bool(Vec<Option<bool>>),
    /// Text.
    Text(Vec<String>),
}

impl EcsvValues {
    fn len(&self) -> usize {
        match self {
            EcsvValues::Float(v) => v.len(),
            EcsvValues::Int(v) => v.len(),
            EcsvValues::Bool(v) => v.len(),
            EcsvValues::Text(v) => v.len(),
        }
    }

    fn datatype(&self) -> &'static str {
        match self {
            EcsvValues::Float(_) => "float64",
            EcsvValues::Int(_) => "int64",
            EcsvValues::Bool(_) => "bool",
            EcsvValues::Text(_) => "string",
        }
    }

    fn cell(&self, row: usize) -> String {
        match self {
            EcsvValues::Float(v) => v[row].map_or_else(|| "\"\"".to_string(), |x| x.to_string()),
            EcsvValues::Int(v) => v[row].map_or_else(|| "\"\"".to_string(), |x| x.to_string()),
            EcsvValues::Bool(v) => v[row].map_or_else(
                || "\"\"".to_string(),
                |x| if x { "True" } else { "False" }.to_string(),
            ),
            EcsvValues::Text(v) => quote_field(&v[row]),
        }
    }
}

/// One column of a table written by [`write_ecsv`].
#[derive(Debug, Clone, PartialEq)]
pub struct EcsvColumn {
    /// Column name.
    pub name: String,
    /// Unit in astropy's notation (`m / s`, `rad`, `d`), if any.
    pub unit: Option<String>,
    /// One-line description, if any.
    pub description: Option<String>,
    /// The values.
    pub values: EcsvValues,
}

impl EcsvColumn {
    /// A column of floats without missing values.
    pub fn float(name: &str, unit: Option<&str>, description: &str, values: &[f64]) -> Self {
        EcsvColumn {
            name: name.to_string(),
            unit: unit.map(str::to_string),
            description: (!description.is_empty()).then(|| description.to_string()),
            values: EcsvValues::Float(values.iter().copied().map(Some).collect()),
        }
    }

    /// A column of text.
    pub fn text(name: &str, description: &str, values: Vec<String>) -> Self {
        EcsvColumn {
            name: name.to_string(),
            unit: None,
            description: (!description.is_empty()).then(|| description.to_string()),
            values: EcsvValues::Text(values),
        }
    }
}

/// A YAML scalar for a header value: plain when it is safe, single-quoted otherwise.
fn yaml_scalar(text: &str) -> String {
    let plain = !text.is_empty()
        && text
            .chars()
            .all(|c| c.is_ascii_alphanumeric() || " _./()+-*^".contains(c))
        && text.starts_with(|c: char| c.is_ascii_alphabetic() || c == '_')
        && !text.ends_with(' ')
        && !matches!(
            text.to_ascii_lowercase().as_str(),
            "true" | "false" | "yes" | "no" | "on" | "off" | "null" | "y" | "n"
        );
    if plain {
        text.to_string()
    } else {
        format!("'{}'", text.replace('\'', "''"))
    }
}

/// A data field: quoted when empty or when it holds a space, a quote or a `#`.
fn quote_field(text: &str) -> String {
    if text.is_empty() || text.contains([' ', '\t', '"', '#', ',']) {
        format!("\"{}\"", text.replace('"', "\"\""))
    } else {
        text.to_string()
    }
}

/// Write columns of equal length as ECSV 1.0 text (space-separated, floats in their shortest
/// round-trip form), with `meta` as the table's metadata. astropy reads it back with units
/// (`Table.read(path, format="ascii.ecsv")`); missing values come back masked.
///
/// Panics if the columns differ in length (a programming error, not an input error).
pub fn write_ecsv(columns: &[EcsvColumn], meta: &[(&str, String)]) -> String {
    let n_rows = columns.first().map_or(0, |c| c.values.len());
    assert!(
        columns.iter().all(|c| c.values.len() == n_rows),
        "ECSV columns must have equal lengths"
    );
    let mut out = String::from("# %ECSV 1.0\n# ---\n# datatype:\n");
    for column in columns {
        out.push_str(&format!("# - {{name: {}", yaml_scalar(&column.name)));
        if let Some(unit) = &column.unit {
            out.push_str(&format!(", unit: {}", yaml_scalar(unit)));
        }
        out.push_str(&format!(", datatype: {}", column.values.datatype()));
        if let Some(description) = &column.description {
            out.push_str(&format!(", description: {}", yaml_scalar(description)));
        }
        out.push_str("}\n");
    }
    if !meta.is_empty() {
        out.push_str("# meta: !!omap\n");
        for (key, value) in meta {
            out.push_str(&format!(
                "# - {{{}: {}}}\n",
                yaml_scalar(key),
                yaml_scalar(value)
            ));
        }
    }
    out.push_str("# schema: astropy-2.0\n");
    let names: Vec<String> = columns.iter().map(|c| quote_field(&c.name)).collect();
    out.push_str(&names.join(" "));
    out.push('\n');
    for row in 0..n_rows {
        let cells: Vec<String> = columns.iter().map(|c| c.values.cell(row)).collect();
        out.push_str(&cells.join(" "));
        out.push('\n');
    }
    out
}

/// Write a velocity table as ECSV that astropy reads with units and that [`super::parse_table`]
/// reads back to the same table: a `time` column (an astropy `Time` in format jd or mjd when the
/// convention is a full or modified Julian date of known scale, else a float column in days
/// named by its convention), `rv` and `uncertainty` in m/s, and `instrument`.
pub fn write_table_ecsv(table: &VelocityTable) -> String {
    let convention = table.time_convention();
    let time_column = time_column_for(&convention);
    let columns = vec![
        // An astropy Time column carries its format and scale in the metadata, not a unit.
        EcsvColumn::float(
            &time_column.name,
            time_column.serialized.is_none().then_some("d"),
            "",
            table.times(),
        ),
        EcsvColumn::float("rv", Some("m / s"), "radial velocity", table.velocities()),
        EcsvColumn::float(
            "uncertainty",
            Some("m / s"),
            "one-sigma uncertainty of rv",
            table.uncertainties(),
        ),
        EcsvColumn::text(
            "instrument",
            "",
            table
                .instrument_index()
                .iter()
                .map(|&i| table.instrument_names()[i].clone())
                .collect(),
        ),
    ];
    let mut text = write_ecsv(&columns, &[]);
    if let Some(serialized) = time_column.serialized {
        // The Time column's description goes in the table metadata, as astropy writes it.
        let at = text
            .find("# schema:")
            .expect("write_ecsv always writes the schema line");
        text.insert_str(at, &serialized);
    }
    text
}

/// Name of the time column for a convention, and astropy's `Time` metadata when it has one.
struct TimeColumn {
    name: String,
    serialized: Option<String>,
}

fn time_column_for(convention: &TimeConvention) -> TimeColumn {
    let format = match convention.offset_days {
        Some(0.0) => Some("jd"),
        Some(2_400_000.5) => Some("mjd"),
        _ => None,
    };
    let scale = match convention.scale {
        TimeScale::Bjd => Some("tdb"),
        TimeScale::Jd => Some("utc"),
        TimeScale::Hjd | TimeScale::Unstated => None,
    };
    match (format, scale) {
        (Some(format), Some(scale)) => TimeColumn {
            name: "time".to_string(),
            serialized: Some(format!(
                "# meta: !!omap\n# - __serialized_columns__:\n#     time:\n\
                 #       __class__: astropy.time.core.Time\n#       format: {format}\n\
                 #       scale: {scale}\n\
                 #       value: !astropy.table.SerializedColumn {{name: time}}\n"
            )),
        },
        _ => TimeColumn {
            name: super::writer::time_header(convention),
            serialized: None,
        },
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::table::{parse_table, StatedBy, VelocityUnit};

    const SMALL: &str = "# %ECSV 1.0\n# ---\n# datatype:\n# - {name: bjd, unit: d, datatype: float64}\n\
        # - {name: rv, unit: km / s, datatype: float64}\n# - {name: err, unit: m / s, datatype: float64}\n\
        # - {name: inst, datatype: string}\n# - {name: fwhm, unit: km / s, datatype: float64}\n\
        # schema: astropy-2.0\nbjd rv err inst fwhm\n2459000.5 1.5 2.0 \"HARPS N\" 7\n\
        2459001.5 1.25 3.0 A 7\n2459002.5 -1.0 4.0 A 7\n";

    #[test]
    fn reads_units_names_and_quoted_instruments() {
        let table = parse_table(SMALL, &ReadOptions::new("small.ecsv")).unwrap();
        assert_eq!(table.velocities(), &[1500.0, 1250.0, -1000.0]);
        assert_eq!(table.uncertainties(), &[2.0, 3.0, 4.0]);
        assert_eq!(table.instrument_names(), &["HARPS N", "A"]);
        assert_eq!(
            table.velocity_unit_in_source(),
            VelocityUnit::KilometresPerSecond
        );
        assert_eq!(table.velocity_unit_stated_by(), StatedBy::Header);
        assert_eq!(table.time_convention().scale, TimeScale::Bjd);
        assert_eq!(table.lines(), &[11, 12, 13]);
        assert!(
            table.notices().iter().any(|n| n.contains("`fwhm`")),
            "{:?}",
            table.notices()
        );
    }

    #[test]
    fn malformed_yaml_is_located() {
        let text = SMALL.replace(
            "# - {name: rv, unit: km / s,",
            "# - {name: rv, unit: [km / s,",
        );
        let err = parse_table(&text, &ReadOptions::new("bad.ecsv")).unwrap_err();
        let TableError::Syntax { line, column, .. } = &err else {
            panic!("{err}");
        };
        // The broken flow sequence opens on line 5; the scanner reports where it gave up,
        // on that line or the next.
        assert!((5..=6).contains(line), "{err}");
        assert!(*column >= 3, "{err}");
        assert!(err.to_string().starts_with("bad.ecsv:"), "{err}");
    }

    #[test]
    fn names_must_match_the_header() {
        let text = SMALL.replace("bjd rv err inst fwhm\n", "bjd rv sigma inst fwhm\n");
        let err = parse_table(&text, &ReadOptions::new("x.ecsv")).unwrap_err();
        assert!(
            err.to_string().starts_with("x.ecsv:10:1: not valid ECSV"),
            "{err}"
        );
    }

    #[test]
    fn bad_number_is_located_by_line_and_column() {
        let text = SMALL.replace("2459001.5 1.25", "2459001.5 x1.25");
        let err = parse_table(&text, &ReadOptions::new("x.ecsv")).unwrap_err();
        assert!(err.to_string().starts_with("x.ecsv:12:2:"), "{err}");
    }

    #[test]
    fn split_space_line_keeps_quotes() {
        assert_eq!(
            split_space_line("1  \"a \"\"b\"\" c\" \"\" 3"),
            vec!["1", "a \"b\" c", "", "3"]
        );
    }

    #[test]
    fn written_table_reads_back() {
        let table = parse_table(SMALL, &ReadOptions::new("small.ecsv")).unwrap();
        let text = write_table_ecsv(&table);
        let again = parse_table(&text, &ReadOptions::new("again.ecsv")).unwrap();
        assert_eq!(again.times(), table.times());
        assert_eq!(again.velocities(), table.velocities());
        assert_eq!(again.uncertainties(), table.uncertainties());
        assert_eq!(again.instrument_names(), table.instrument_names());
        assert_eq!(again.time_convention().scale, TimeScale::Bjd);
        assert_eq!(again.time_convention().offset_days, Some(0.0));
    }

    #[test]
    fn writer_marks_missing_values_and_quotes_text() {
        let columns = vec![
            EcsvColumn {
                name: "x".into(),
                unit: Some("rad".into()),
                description: Some("it's".into()),
                values: EcsvValues::Float(vec![Some(0.1), None]),
            },
            EcsvColumn::text("s", "", vec!["a b".into(), String::new()]),
        ];
        let text = write_ecsv(&columns, &[("origin", "eccaudit".to_string())]);
        assert!(text.contains("# - {name: x, unit: rad, datatype: float64, description: 'it''s'}"));
        assert!(text.ends_with("x s\n0.1 \"a b\"\n\"\" \"\"\n"), "{text}");
    }
}
