//! VOTable (IVOA Recommendation, XML) velocity tables in the TABLEDATA serialisation: columns
//! picked by their UCDs (or names), units from `unit`, the time convention from `TIMESYS`.
//!
//! The XML is read by the `quick-xml` crate (pure Rust, builds for wasm32). Only the first
//! `TABLE` is read; `BINARY`, `BINARY2` and `FITS` data are refused with a message saying how
//! to write TABLEDATA instead.

use std::collections::HashMap;

use quick_xml::events::{BytesStart, Event};
use quick_xml::{Reader, XmlVersion};

use super::columns::{layout_from_described, role_from_ucd, time_spec_from, DescribedColumn};
use super::reader::{table_from_records, Record};
use super::{ReadOptions, TableError, TimeSpec, VelocityTable};

/// Byte offsets → 1-based (line, character column).
struct Positions<'a> {
    text: &'a str,
    line_starts: Vec<usize>,
}

impl<'a> Positions<'a> {
    fn new(text: &'a str) -> Self {
        let mut line_starts = vec![0];
        line_starts.extend(
            text.bytes()
                .enumerate()
                .filter(|(_, b)| *b == b'\n')
                .map(|(i, _)| i + 1),
        );
        Positions { text, line_starts }
    }

    fn at(&self, byte: u64) -> (usize, usize) {
        let byte = (byte as usize).min(self.text.len());
        let line = self.line_starts.partition_point(|&start| start <= byte);
        let start = self.line_starts[line - 1];
        let column = self
            .text
            .get(start..byte)
            .map_or(byte - start, |s| s.chars().count())
            + 1;
        (line, column)
    }
}

/// A `FIELD` of the table.
struct FieldInfo {
    name: String,
    unit: Option<String>,
    ucd: Option<String>,
    reference: Option<String>,
    position: (usize, usize),
}

/// A `TIMESYS` element.
struct TimeSystem {
    origin: Option<String>,
    scale: Option<String>,
    reference_position: Option<String>,
    position: (usize, usize),
}

fn attributes(
    element: &BytesStart<'_>,
    source_name: &str,
    position: (usize, usize),
) -> Result<HashMap<String, String>, TableError> {
    let mut map = HashMap::new();
    for attribute in element.attributes() {
        let bad = |message: String| TableError::Syntax {
            source_name: source_name.to_string(),
            line: position.0,
            column: position.1,
            format: "VOTable XML".to_string(),
            message,
        };
        let attribute = attribute.map_err(|err| bad(err.to_string()))?;
        let key = String::from(attribute.key.local_name().as_ref());
        let value = attribute
            .normalized_value(XmlVersion::Implicit1_0)
            .map_err(|err| bad(err.to_string()))?
            .into_owned();
        map.insert(key, value);
    }
    Ok(map)
}

/// Text of a predefined XML entity or character reference (`amp`, `#x41`).
fn resolve_reference(name: &str) -> Option<char> {
    match name {
        "lt" => Some('<'),
        "gt" => Some('>'),
        "amp" => Some('&'),
        "quot" => Some('"'),
        "apos" => Some('\''),
        _ => {
            let digits = name.strip_prefix('#')?;
            let code = match digits.strip_prefix('x') {
                Some(hex) => u32::from_str_radix(hex, 16).ok()?,
                None => digits.parse().ok()?,
            };
            char::from_u32(code)
        }
    }
}

/// Read a VOTable velocity table (TABLEDATA). Columns are recognised by UCD (`time.epoch`,
/// `spect.dopplerVeloc…` or `phys.veloc…`, `stat.error;` of a velocity, `instr…`), else by name
/// as in a CSV header; velocity units from `unit` (`m/s`, `km.s**-1`, …); the time convention
/// from the `TIMESYS` the time column refers to (`refposition` BARYCENTER → BJD, HELIOCENTER →
/// HJD; `timeorigin` a Julian date, `JD-origin` or `MJD-origin`), else from the column's name.
pub(super) fn parse_votable(
    text: &str,
    options: &ReadOptions,
) -> Result<VelocityTable, TableError> {
    let source_name = options.source_name.as_str();
    let positions = Positions::new(text);
    let mut reader = Reader::from_str(text);
    let syntax = |position: (usize, usize), message: String| TableError::Syntax {
        source_name: source_name.to_string(),
        line: position.0,
        column: position.1,
        format: "VOTable XML".to_string(),
        message,
    };
    let unsupported = |position: (usize, usize), message: String| TableError::Unsupported {
        source_name: source_name.to_string(),
        line: position.0,
        column: position.1,
        message,
    };

    let mut stack: Vec<String> = Vec::new();
    let mut saw_votable = false;
    let mut tables_seen = 0usize;
    let mut table_position = (1, 1);
    let mut fields: Vec<FieldInfo> = Vec::new();
    let mut systems: HashMap<String, TimeSystem> = HashMap::new();
    let mut records: Vec<Record> = Vec::new();
    let mut cell: Option<String> = None;
    let mut notices = Vec::new();
    loop {
        let before = reader.buffer_position();
        let event = reader
            .read_event()
            .map_err(|err| syntax(positions.at(reader.error_position()), err.to_string()))?;
        let position = positions.at(before);
        let in_first_table = tables_seen == 1;
        match event {
            Event::Eof => break,
            Event::Start(ref element) | Event::Empty(ref element) => {
                let empty = matches!(event, Event::Empty(_));
                let name = String::from(element.local_name().as_ref());
                if stack.is_empty() {
                    if name != "VOTABLE" {
                        return Err(syntax(
                            position,
                            format!("the root element is <{name}>, not <VOTABLE>"),
                        ));
                    }
                    saw_votable = true;
                }
                match name.as_str() {
                    "TABLE" => {
                        tables_seen += 1;
                        if tables_seen == 1 {
                            table_position = position;
                        } else if tables_seen == 2 {
                            notices.push(format!(
                                "the file holds more than one TABLE; only the first (line {}) is read",
                                table_position.0
                            ));
                        }
                    }
                    "TIMESYS" => {
                        let attrs = attributes(element, source_name, position)?;
                        if let Some(id) = attrs.get("ID") {
                            systems.insert(
                                id.clone(),
                                TimeSystem {
                                    origin: attrs.get("timeorigin").cloned(),
                                    scale: attrs.get("timescale").cloned(),
                                    reference_position: attrs.get("refposition").cloned(),
                                    position,
                                },
                            );
                        }
                    }
                    "FIELD" if in_first_table && stack.last().is_some_and(|p| p == "TABLE") => {
                        let attrs = attributes(element, source_name, position)?;
                        let name = attrs
                            .get("name")
                            .or_else(|| attrs.get("ID"))
                            .cloned()
                            .unwrap_or_else(|| format!("column {}", fields.len() + 1));
                        fields.push(FieldInfo {
                            name,
                            unit: attrs.get("unit").cloned(),
                            ucd: attrs.get("ucd").cloned(),
                            reference: attrs.get("ref").cloned(),
                            position,
                        });
                    }
                    "BINARY" | "BINARY2" | "FITS" if in_first_table => {
                        return Err(unsupported(
                            position,
                            format!(
                                "VOTable data in {name} serialisation is not read; write the \
                                 table as TABLEDATA (astropy: votable.to_xml(path, \
                                 tabledata_format='tabledata'))"
                            ),
                        ));
                    }
                    "TR" if in_first_table => records.push(Record {
                        line: position.0,
                        fields: Vec::new(),
                        field_lines: Vec::new(),
                    }),
                    "TD" if in_first_table => {
                        let Some(record) = records.last_mut() else {
                            return Err(syntax(position, "<TD> outside a <TR>".to_string()));
                        };
                        record.field_lines.push(position.0);
                        if empty {
                            record.fields.push(String::new());
                        } else {
                            cell = Some(String::new());
                        }
                    }
                    _ => {}
                }
                if !empty {
                    stack.push(name);
                }
            }
            Event::End(_) => {
                let name = stack.pop().unwrap_or_default();
                if name == "TD" {
                    if let (Some(text), Some(record)) = (cell.take(), records.last_mut()) {
                        record.fields.push(text.trim().to_string());
                    }
                }
            }
            Event::Text(ref content) => {
                if let Some(text) = cell.as_mut() {
                    text.push_str(&content.xml10_content());
                }
            }
            Event::CData(ref content) => {
                if let Some(text) = cell.as_mut() {
                    text.push_str(content.as_ref());
                }
            }
            Event::GeneralRef(ref reference) => {
                let name: &str = reference;
                let Some(ch) = resolve_reference(name) else {
                    return Err(syntax(position, format!("unknown entity `&{name};`")));
                };
                if let Some(text) = cell.as_mut() {
                    text.push(ch);
                }
            }
            _ => {}
        }
    }
    if !saw_votable {
        return Err(syntax((1, 1), "no <VOTABLE> element".to_string()));
    }
    if let Some(open) = stack.last() {
        return Err(syntax(
            positions.at(text.len() as u64),
            format!("the file ends inside <{open}>"),
        ));
    }
    if fields.is_empty() {
        return Err(TableError::Empty {
            source_name: source_name.to_string(),
            what: "no TABLE with FIELDs".to_string(),
        });
    }
    let mut described = Vec::with_capacity(fields.len());
    for field in &fields {
        let time = match field.reference.as_ref().and_then(|id| systems.get(id)) {
            Some(system) => Some(time_from_system(system, source_name, &mut notices)?),
            None => None,
        };
        described.push(DescribedColumn {
            name: field.name.clone(),
            role: field.ucd.as_deref().and_then(role_from_ucd),
            unit: field.unit.clone(),
            time,
            line: field.position.0,
            column: field.position.1,
        });
    }
    let layout = layout_from_described(&described, table_position.0, source_name, &mut notices)?;
    if records.is_empty() {
        return Err(TableError::Empty {
            source_name: source_name.to_string(),
            what: format!("a TABLE without rows on line {}", table_position.0),
        });
    }
    table_from_records(&layout, &records, options, notices)
}

/// The time convention of a `TIMESYS`: `timeorigin` is a Julian date or `JD-origin` /
/// `MJD-origin` (VOTable 1.4, section 4.4, from memory); without it, full Julian dates.
fn time_from_system(
    system: &TimeSystem,
    source_name: &str,
    notices: &mut Vec<String>,
) -> Result<TimeSpec, TableError> {
    let offset_days = match system.origin.as_deref().map(str::trim) {
        None | Some("JD-origin") => 0.0,
        Some("MJD-origin") => 2_400_000.5,
        Some(number) => number.parse::<f64>().ok().filter(|x| x.is_finite()).ok_or_else(|| {
            TableError::Unsupported {
                source_name: source_name.to_string(),
                line: system.position.0,
                column: system.position.1,
                message: format!(
                    "TIMESYS timeorigin `{number}` is neither a Julian date, JD-origin nor MJD-origin"
                ),
            }
        })?,
    };
    Ok(time_spec_from(
        system.scale.as_deref(),
        system.reference_position.as_deref(),
        offset_days,
        notices,
    ))
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::table::{parse_table, TimeScale, VelocityUnit};

    const SMALL: &str = r#"<?xml version="1.0"?>
<VOTABLE version="1.4">
 <RESOURCE>
  <TIMESYS ID="t" timeorigin="MJD-origin" timescale="TDB" refposition="BARYCENTER"/>
  <TABLE>
   <FIELD name="a" datatype="double" unit="d" ucd="time.epoch" ref="t"/>
   <FIELD name="b" datatype="double" unit="km/s" ucd="spect.dopplerVeloc"/>
   <FIELD name="c" datatype="double" unit="m.s**-1" ucd="stat.error;spect.dopplerVeloc"/>
   <FIELD name="d" datatype="char" arraysize="*" ucd="instr.setup"/>
   <DATA><TABLEDATA>
    <TR><TD>59000.5</TD><TD>1.5</TD><TD>2</TD><TD>A &amp; B</TD></TR>
    <TR><TD>59001.5</TD><TD>1.25</TD><TD>3</TD><TD><![CDATA[C]]></TD></TR>
    <TR>
     <TD>59002.5</TD>
     <TD>-1</TD>
     <TD>4</TD>
     <TD/>
    </TR>
   </TABLEDATA></DATA>
  </TABLE>
 </RESOURCE>
</VOTABLE>
"#;

    #[test]
    fn reads_ucds_units_timesys_entities() {
        let table = parse_table(SMALL, &ReadOptions::new("small.vot")).unwrap();
        assert_eq!(table.times(), &[59000.5, 59001.5, 59002.5]);
        assert_eq!(table.velocities(), &[1500.0, 1250.0, -1000.0]);
        assert_eq!(table.uncertainties(), &[2.0, 3.0, 4.0]);
        assert_eq!(
            table.velocity_unit_in_source(),
            VelocityUnit::KilometresPerSecond
        );
        assert_eq!(table.instrument_names(), &["A & B", "C", "default"]);
        let convention = table.time_convention();
        assert_eq!(convention.scale, TimeScale::Bjd);
        assert_eq!(convention.offset_days, Some(2_400_000.5));
        assert_eq!(table.lines(), &[11, 12, 13]);
    }

    #[test]
    fn malformed_xml_is_located() {
        let text = SMALL.replace("<TD>1.25</TD>", "<TD>1.25</TX>");
        let err = parse_table(&text, &ReadOptions::new("bad.vot")).unwrap_err();
        let message = err.to_string();
        assert!(message.starts_with("bad.vot:12:"), "{message}");
        assert!(message.contains("not valid VOTable XML"), "{message}");
    }

    #[test]
    fn bad_value_is_located_on_its_own_line() {
        let text = SMALL.replace("<TD>-1</TD>", "<TD>minus one</TD>");
        let err = parse_table(&text, &ReadOptions::new("x.vot")).unwrap_err();
        assert!(err.to_string().starts_with("x.vot:15:2:"), "{err}");
    }

    #[test]
    fn binary_data_is_refused_with_advice() {
        let start = SMALL.find("<DATA>").unwrap();
        let end = SMALL.find("</DATA>").unwrap() + "</DATA>".len();
        let text = format!(
            "{}<DATA><BINARY2><STREAM encoding=\"base64\">AAAA</STREAM></BINARY2></DATA>{}",
            &SMALL[..start],
            &SMALL[end..]
        );
        let err = parse_table(&text, &ReadOptions::new("b.vot")).unwrap_err();
        assert!(err.to_string().contains("TABLEDATA"), "{err}");
        assert!(err.to_string().starts_with("b.vot:10:"), "{err}");
    }

    #[test]
    fn truncated_file_is_located() {
        let text = &SMALL[..SMALL.find("</TABLEDATA>").unwrap()];
        let err = parse_table(text, &ReadOptions::new("t.xml")).unwrap_err();
        assert!(err.to_string().contains("not valid VOTable XML"), "{err}");
    }
}
