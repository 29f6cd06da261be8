//! Columns described by a file's own metadata (ECSV header, VOTable FIELDs): which one holds the
//! time, the velocity, the uncertainty and the instrument, in which unit and time convention.

use super::header::{
    classify_header_cell, parse_velocity_unit, ColumnRole, HeaderProblem, ACCEPTED_NAMES,
};
use super::reader::Layout;
use super::{TableError, TimeScale, TimeSpec, VelocityUnit};

/// A column as its format describes it.
#[derive(Debug, Clone, Default)]
pub(super) struct DescribedColumn {
    /// Column name.
    pub(super) name: String,
    /// Role stated by the metadata (a UCD); `None` to recognise the column by its name.
    pub(super) role: Option<ColumnRole>,
    /// Unit as written (`m / s`, `km.s**-1`, `d`), if any.
    pub(super) unit: Option<String>,
    /// Time convention stated by the metadata (astropy Time, VOTable TIMESYS).
    pub(super) time: Option<TimeSpec>,
    /// Where the description sits, for messages (1-based line and character column).
    pub(super) line: usize,
    /// Character column of the description.
    pub(super) column: usize,
}

/// The role a Unified Content Descriptor (IVOA UCD1+) gives a column, if it is one we use:
/// `time.epoch` → time; `spect.dopplerVeloc*` or `phys.veloc*` → velocity; `stat.error` of
/// one of these → uncertainty; `instr*` or `meta.id;instr*` → instrument.
pub(super) fn role_from_ucd(ucd: &str) -> Option<ColumnRole> {
    let words: Vec<String> = ucd
        .split(';')
        .map(|word| word.trim().to_ascii_lowercase())
        .filter(|word| !word.is_empty())
        .collect();
    let primary = words.first()?;
    let is_velocity =
        |word: &str| word.starts_with("spect.dopplerveloc") || word.starts_with("phys.veloc");
    if primary.starts_with("time.epoch") {
        Some(ColumnRole::Time)
    } else if primary == "stat.error" || primary.starts_with("stat.error.") {
        words[1..]
            .iter()
            .any(|word| is_velocity(word))
            .then_some(ColumnRole::Uncertainty)
    } else if is_velocity(primary) {
        Some(ColumnRole::Velocity)
    } else if primary.starts_with("instr")
        || (primary == "meta.id" && words[1..].iter().any(|word| word.starts_with("instr")))
    {
        Some(ColumnRole::Instrument)
    } else {
        None
    }
}

/// A time convention from a time scale (`tdb`, `utc`, `TT`, ...), a reference position
/// (`BARYCENTER`, `HELIOCENTER`, ...) and an origin in days. A barycentric reference position
/// gives BJD, a heliocentric one HJD. Without a reference position, the scales TDB and TCB are
/// read as BJD, with a notice (barycentric dynamical time is what RV tables use with
/// barycentric-corrected times; common practice).
pub(super) fn time_spec_from(
    scale: Option<&str>,
    reference_position: Option<&str>,
    offset_days: f64,
    notices: &mut Vec<String>,
) -> TimeSpec {
    let scale_lower = scale.map(|s| s.trim().to_ascii_lowercase());
    let position = reference_position.map(|p| p.trim().to_ascii_uppercase());
    let time_scale = match position.as_deref() {
        Some("BARYCENTER") => TimeScale::Bjd,
        Some("HELIOCENTER") => TimeScale::Hjd,
        Some(_) => TimeScale::Jd,
        None => match scale_lower.as_deref() {
            Some("tdb") | Some("tcb") => {
                notices.push(format!(
                    "times in scale {} are read as barycentric Julian dates (BJD)",
                    scale.unwrap_or_default().trim()
                ));
                TimeScale::Bjd
            }
            Some("utc") | Some("tt") | Some("tai") | Some("ut1") | Some("tcg") => TimeScale::Jd,
            _ => TimeScale::Unstated,
        },
    };
    TimeSpec {
        scale: time_scale,
        offset_days,
    }
}

/// Whether a time unit means days (or says nothing).
fn is_day_unit(unit: &str) -> bool {
    matches!(
        unit.trim().to_ascii_lowercase().as_str(),
        "" | "d" | "day" | "days"
    )
}

/// The [`Layout`] of a table whose columns are described by its format. Columns that are
/// neither time, velocity, uncertainty nor instrument are left out, with a notice; roles come
/// from the metadata (UCD) first, then from the column name as in a CSV header.
pub(super) fn layout_from_described(
    columns: &[DescribedColumn],
    header_line: usize,
    source_name: &str,
    notices: &mut Vec<String>,
) -> Result<Layout, TableError> {
    // (index, name, unit, time) per role, in the order time, velocity, uncertainty, instrument.
    type Slot = Option<(usize, String, Option<VelocityUnit>, Option<TimeSpec>)>;
    let mut found: [Slot; 4] = Default::default();
    let mut unused = Vec::new();
    for (index, column) in columns.iter().enumerate() {
        let by_name = classify_header_cell(&column.name);
        let role = match (column.role, &by_name) {
            (Some(role), _) => role,
            (None, Ok(header)) => header.role,
            (None, Err(HeaderProblem::UnknownUnit(unit))) => {
                return Err(TableError::UnknownUnit {
                    source_name: source_name.to_string(),
                    line: column.line,
                    column: column.column,
                    name: column.name.clone(),
                    unit: unit.clone(),
                })
            }
            (None, Err(HeaderProblem::UnknownName)) => {
                unused.push(column.name.clone());
                continue;
            }
        };
        let name_unit = by_name.as_ref().ok().and_then(|header| header.unit);
        let name_time = by_name.as_ref().ok().and_then(|header| header.time);
        let written_unit = column
            .unit
            .as_deref()
            .filter(|unit| !unit.trim().is_empty());
        let (unit, time) = match role {
            ColumnRole::Velocity | ColumnRole::Uncertainty => {
                let unit =
                    match written_unit {
                        Some(text) => Some(parse_velocity_unit(text).ok_or_else(|| {
                            TableError::UnknownUnit {
                                source_name: source_name.to_string(),
                                line: column.line,
                                column: column.column,
                                name: column.name.clone(),
                                unit: text.to_string(),
                            }
                        })?),
                        None => name_unit,
                    };
                (unit, None)
            }
            ColumnRole::Time => {
                if let Some(text) = written_unit {
                    if !is_day_unit(text) {
                        return Err(TableError::Unsupported {
                            source_name: source_name.to_string(),
                            line: column.line,
                            column: column.column,
                            message: format!(
                                "the time column `{}` is in `{text}`; eccaudit reads times in days",
                                column.name
                            ),
                        });
                    }
                }
                (None, column.time.or(name_time))
            }
            ColumnRole::Instrument => (None, None),
        };
        let slot = &mut found[role as usize];
        if let Some((first_index, first_name, _, _)) = slot {
            return Err(TableError::DuplicateColumn {
                source_name: source_name.to_string(),
                line: column.line,
                column: index + 1,
                name: column.name.clone(),
                first_column: *first_index + 1,
                first_name: first_name.clone(),
                role: role.name().to_string(),
            });
        }
        *slot = Some((index, column.name.clone(), unit, time));
    }
    let [time, velocity, uncertainty, instrument] = found;
    let missing = |role: ColumnRole| {
        TableError::MissingColumn {
        source_name: source_name.to_string(),
        line: header_line,
        role: role.name().to_string(),
        accepted: format!("{ACCEPTED_NAMES}; or UCDs time.epoch, spect.dopplerVeloc, stat.error;spect.dopplerVeloc, instr"),
    }
    };
    let time = time.ok_or_else(|| missing(ColumnRole::Time))?;
    let velocity = velocity.ok_or_else(|| missing(ColumnRole::Velocity))?;
    let uncertainty = uncertainty.ok_or_else(|| missing(ColumnRole::Uncertainty))?;
    if !unused.is_empty() {
        notices.push(format!(
            "column(s) not used: {}",
            unused
                .iter()
                .map(|name| format!("`{name}`"))
                .collect::<Vec<_>>()
                .join(", ")
        ));
    }
    Ok(Layout {
        reference_line: header_line,
        header_line: Some(header_line),
        n_fields: columns.len(),
        time: (time.0, time.1, time.3),
        velocity: (velocity.0, velocity.1, velocity.2),
        uncertainty: (uncertainty.0, uncertainty.1, uncertainty.2),
        instrument: instrument.map(|slot| slot.0),
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn roles_from_ucds() {
        assert_eq!(role_from_ucd("time.epoch"), Some(ColumnRole::Time));
        assert_eq!(role_from_ucd("time.epoch;obs"), Some(ColumnRole::Time));
        assert_eq!(
            role_from_ucd("spect.dopplerVeloc.opt"),
            Some(ColumnRole::Velocity)
        );
        assert_eq!(
            role_from_ucd("phys.veloc;pos.barycentric"),
            Some(ColumnRole::Velocity)
        );
        assert_eq!(
            role_from_ucd("stat.error;spect.dopplerVeloc.opt"),
            Some(ColumnRole::Uncertainty)
        );
        assert_eq!(role_from_ucd("stat.error;phot.mag"), None);
        assert_eq!(role_from_ucd("instr.setup"), Some(ColumnRole::Instrument));
        assert_eq!(role_from_ucd("meta.id;instr"), Some(ColumnRole::Instrument));
        assert_eq!(role_from_ucd("meta.id"), None);
        assert_eq!(role_from_ucd(""), None);
    }

    #[test]
    fn time_specs_from_scale_and_position() {
        let mut notices = Vec::new();
        let bjd = time_spec_from(Some("TDB"), Some("BARYCENTER"), 0.0, &mut notices);
        assert_eq!(bjd.scale, TimeScale::Bjd);
        assert!(notices.is_empty());
        let hjd = time_spec_from(Some("UTC"), Some("HELIOCENTER"), 2_400_000.5, &mut notices);
        assert_eq!((hjd.scale, hjd.offset_days), (TimeScale::Hjd, 2_400_000.5));
        let tdb = time_spec_from(Some("tdb"), None, 0.0, &mut notices);
        assert_eq!(tdb.scale, TimeScale::Bjd);
        assert_eq!(notices.len(), 1, "{notices:?}");
        assert_eq!(
            time_spec_from(Some("utc"), None, 0.0, &mut notices).scale,
            TimeScale::Jd
        );
        assert_eq!(
            time_spec_from(None, None, 0.0, &mut notices).scale,
            TimeScale::Unstated
        );
    }
}
