//! Header names of a velocity table: column roles, aliases, units and time conventions written in them.

use super::{TimeScale, TimeSpec, VelocityUnit};

/// What a column of a velocity table holds.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(crate) enum ColumnRole {
    Time,
    Velocity,
    Uncertainty,
    Instrument,
}

impl ColumnRole {
    /// Plain name of the role, used in messages and for headerless tables.
    pub(crate) fn name(self) -> &'static str {
        match self {
            ColumnRole::Time => "time",
            ColumnRole::Velocity => "velocity",
            ColumnRole::Uncertainty => "uncertainty",
            ColumnRole::Instrument => "instrument",
        }
    }
}

/// One header cell understood: its role and what it says about units or time convention.
#[derive(Debug, Clone, PartialEq)]
pub(crate) struct HeaderColumn {
    pub(crate) role: ColumnRole,
    /// Velocity unit stated in a velocity or uncertainty header.
    pub(crate) unit: Option<VelocityUnit>,
    /// Time convention stated in a time header.
    pub(crate) time: Option<TimeSpec>,
}

/// Why a header cell was not understood.
#[derive(Debug, Clone, PartialEq)]
pub(crate) enum HeaderProblem {
    /// The name is none of the known aliases.
    UnknownName,
    /// The name is known but the unit in brackets is not m/s or km/s.
    UnknownUnit(String),
}

const TIME_ALIASES: &[&str] = &[
    "time",
    "t",
    "times",
    "date",
    "epoch",
    "obs_time",
    "obstime",
    "julian_date",
];
const VELOCITY_ALIASES: &[&str] = &[
    "velocity",
    "velocities",
    "vel",
    "v",
    "rv",
    "vr",
    "vrad",
    "v_rad",
    "radial_velocity",
    "radialvelocity",
];
const UNCERTAINTY_ALIASES: &[&str] = &[
    "uncertainty",
    "uncertainties",
    "unc",
    "err",
    "error",
    "errors",
    "sigma",
    "sig",
    "e_rv",
    "erv",
    "rv_err",
    "rv_error",
    "err_rv",
    "error_rv",
    "sigma_rv",
    "rv_sigma",
    "sig_rv",
    "rv_unc",
    "unc_rv",
    "rv_uncertainty",
    "uncertainty_rv",
    "e_vel",
    "vel_err",
    "verr",
    "e_v",
    "ev",
    "sigma_v",
    "e_vrad",
    "vrad_err",
    "dv",
    "drv",
    "σ",
];
const INSTRUMENT_ALIASES: &[&str] = &[
    "instrument",
    "instruments",
    "inst",
    "instr",
    "spectrograph",
    "telescope",
    "tel",
    "source",
    "observatory",
    "site",
    "dataset",
    "data_set",
    "set",
];

/// Short list of accepted names, for messages.
pub(crate) const ACCEPTED_NAMES: &str = "time (t, date, epoch, jd, bjd, mjd, bjd-2450000), \
     velocity (rv, vel, vrad), uncertainty (err, error, sigma, e_rv), \
     instrument (inst, spectrograph, telescope, source); units as `rv [km/s]`, `rv (m/s)` or `rv_kms`";

fn role_of_alias(name: &str) -> Option<ColumnRole> {
    let table = [
        (TIME_ALIASES, ColumnRole::Time),
        (VELOCITY_ALIASES, ColumnRole::Velocity),
        (UNCERTAINTY_ALIASES, ColumnRole::Uncertainty),
        (INSTRUMENT_ALIASES, ColumnRole::Instrument),
    ];
    table
        .iter()
        .find(|(aliases, _)| aliases.contains(&name))
        .map(|(_, role)| *role)
}

/// Lower-case, trim, and write every minus sign as ASCII '-'.
fn canonical(text: &str) -> String {
    text.trim()
        .to_lowercase()
        .replace(['\u{2212}', '\u{2013}'], "-")
}

/// Replace spaces, dashes and dots in a name by single underscores.
fn underscored(name: &str) -> String {
    let mut out = String::with_capacity(name.len());
    for ch in name.chars() {
        let ch = if matches!(ch, ' ' | '\t' | '-' | '.') {
            '_'
        } else {
            ch
        };
        if !(ch == '_' && out.ends_with('_')) {
            out.push(ch);
        }
    }
    out.trim_matches('_').to_string()
}

/// Parse a velocity unit as written in a header or on the command line:
/// `m/s`, `ms`, `m s-1`, `m s^-1`, `mps`, `km/s`, `kms`, `km s^-1`, `kmps` (any case).
pub(crate) fn parse_velocity_unit(text: &str) -> Option<VelocityUnit> {
    let compact: String = canonical(text)
        .chars()
        .filter(|c| !matches!(c, ' ' | '\t' | '_' | '.' | '^' | '*' | '·'))
        .collect();
    match compact.as_str() {
        "m/s" | "ms" | "ms-1" | "mps" | "meters/s" | "metres/s" => {
            Some(VelocityUnit::MetresPerSecond)
        }
        "km/s" | "kms" | "kms-1" | "kmps" | "kilometers/s" | "kilometres/s" => {
            Some(VelocityUnit::KilometresPerSecond)
        }
        _ => None,
    }
}

/// Parse a time convention: `jd`, `bjd`, `hjd`, `mjd`, `bmjd`, `rjd`, with an optional
/// scale suffix (`bjd_tdb`, `hjd_utc`) and an optional offset (`bjd-2450000`,
/// `jd - 2400000`), or `offset:2450000` for an offset Julian date of unstated scale.
/// MJD = JD − 2400000.5 (common practice; IAU 1973 resolution, from memory) and
/// RJD = JD − 2400000 (common practice).
pub(crate) fn parse_time_spec(text: &str) -> Option<TimeSpec> {
    let compact: String = canonical(text)
        .chars()
        .filter(|c| !c.is_whitespace())
        .collect();
    if let Some(rest) = compact.strip_prefix("offset:") {
        let offset_days = parse_offset(rest)?;
        return Some(TimeSpec {
            scale: TimeScale::Unstated,
            offset_days,
        });
    }
    let (name, extra_offset) = match compact.find(['-', '+']) {
        Some(at) => {
            let value = parse_offset(&compact[at + 1..])?;
            let signed = if compact.as_bytes()[at] == b'-' {
                value
            } else {
                -value
            };
            (&compact[..at], signed)
        }
        None => (compact.as_str(), 0.0),
    };
    let name = ["_tdb", "_utc", "_tt", "(tdb)", "(utc)"]
        .iter()
        .find_map(|suffix| name.strip_suffix(suffix))
        .unwrap_or(name);
    let (scale, base_offset) = match name {
        "jd" => (TimeScale::Jd, 0.0),
        "bjd" => (TimeScale::Bjd, 0.0),
        "hjd" => (TimeScale::Hjd, 0.0),
        "mjd" => (TimeScale::Jd, 2_400_000.5),
        "bmjd" => (TimeScale::Bjd, 2_400_000.5),
        "hmjd" => (TimeScale::Hjd, 2_400_000.5),
        "rjd" => (TimeScale::Jd, 2_400_000.0),
        _ => return None,
    };
    Some(TimeSpec {
        scale,
        offset_days: base_offset + extra_offset,
    })
}

fn parse_offset(text: &str) -> Option<f64> {
    let value: f64 = text.parse().ok()?;
    value.is_finite().then_some(value)
}

/// Is this qualifier a plain statement that times are in days?
fn is_day_unit(text: &str) -> bool {
    matches!(canonical(text).as_str(), "d" | "day" | "days")
}

/// Read a qualifier (bracketed or after an underscore) for a column of the given role.
fn qualify(role: ColumnRole, qualifier: &str) -> Result<HeaderColumn, HeaderProblem> {
    let mut column = HeaderColumn {
        role,
        unit: None,
        time: None,
    };
    match role {
        ColumnRole::Time => {
            if is_day_unit(qualifier) {
                return Ok(column);
            }
            column.time = Some(parse_time_spec(qualifier).ok_or(HeaderProblem::UnknownName)?);
        }
        ColumnRole::Velocity | ColumnRole::Uncertainty => {
            column.unit = Some(
                parse_velocity_unit(qualifier)
                    .ok_or_else(|| HeaderProblem::UnknownUnit(qualifier.trim().to_string()))?,
            );
        }
        ColumnRole::Instrument => return Err(HeaderProblem::UnknownName),
    }
    Ok(column)
}

/// Split `name [qualifier]` or `name (qualifier)` into its parts.
fn split_brackets(cell: &str) -> Option<(&str, &str)> {
    let open = cell.find(['[', '(', '{'])?;
    let close_char = match cell.as_bytes()[open] {
        b'[' => ']',
        b'(' => ')',
        _ => '}',
    };
    let close = cell.rfind(close_char)?;
    if close < open || !cell[close + 1..].trim().is_empty() {
        return None;
    }
    Some((cell[..open].trim(), &cell[open + 1..close]))
}

/// Understand one header cell: `rv`, `RV [km/s]`, `rv (m/s)`, `rv_kms`, `e_rv_kms`,
/// `bjd`, `BJD - 2450000`, `time [bjd-2450000]`, `instrument`, ...
pub(crate) fn classify_header_cell(cell: &str) -> Result<HeaderColumn, HeaderProblem> {
    let cell = canonical(cell);
    if cell.is_empty() {
        return Err(HeaderProblem::UnknownName);
    }
    if let Some((name, qualifier)) = split_brackets(&cell) {
        if let Some(role) = role_of_alias(&underscored(name)) {
            return qualify(role, qualifier);
        }
        // `bjd [d]`: a time convention followed by the unit of days.
        if let (Some(time), true) = (parse_time_spec(name), is_day_unit(qualifier)) {
            return Ok(time_column(time));
        }
        // `bjd (tdb)` and the like: the whole cell is a time convention.
        if let Some(time) = parse_time_spec(&cell) {
            return Ok(time_column(time));
        }
        return Err(HeaderProblem::UnknownName);
    }
    if let Some(time) = parse_time_spec(&cell) {
        return Ok(time_column(time));
    }
    let name = underscored(&cell);
    if let Some(role) = role_of_alias(&name) {
        return Ok(HeaderColumn {
            role,
            unit: None,
            time: None,
        });
    }
    // `rv_kms`, `e_rv_kms`, `time_bjd`: an alias followed by a qualifier.
    for (at, _) in name.match_indices('_') {
        let (prefix, suffix) = (&name[..at], &name[at + 1..]);
        if let Some(role) = role_of_alias(prefix) {
            if let Ok(column) = qualify(role, suffix) {
                return Ok(column);
            }
        }
    }
    Err(HeaderProblem::UnknownName)
}

fn time_column(time: TimeSpec) -> HeaderColumn {
    HeaderColumn {
        role: ColumnRole::Time,
        unit: None,
        time: Some(time),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn unit_of(cell: &str) -> (ColumnRole, Option<VelocityUnit>) {
        let column = classify_header_cell(cell).expect(cell);
        (column.role, column.unit)
    }

    #[test]
    fn velocity_headers_with_units() {
        use ColumnRole::*;
        use VelocityUnit::*;
        assert_eq!(unit_of("rv"), (Velocity, None));
        assert_eq!(unit_of("RV [km/s]"), (Velocity, Some(KilometresPerSecond)));
        assert_eq!(unit_of("rv (m/s)"), (Velocity, Some(MetresPerSecond)));
        assert_eq!(unit_of("rv_kms"), (Velocity, Some(KilometresPerSecond)));
        assert_eq!(
            unit_of("vrad [km s^-1]"),
            (Velocity, Some(KilometresPerSecond))
        );
        assert_eq!(unit_of("e_rv"), (Uncertainty, None));
        assert_eq!(
            unit_of("e_rv_kms"),
            (Uncertainty, Some(KilometresPerSecond))
        );
        assert_eq!(
            unit_of("rv_err [m/s]"),
            (Uncertainty, Some(MetresPerSecond))
        );
        assert_eq!(unit_of("Sigma"), (Uncertainty, None));
        assert_eq!(unit_of("Telescope"), (Instrument, None));
    }

    #[test]
    fn time_headers_with_conventions() {
        let spec = |cell: &str| classify_header_cell(cell).expect(cell).time;
        let bjd_offset = Some(TimeSpec {
            scale: TimeScale::Bjd,
            offset_days: 2_450_000.0,
        });
        assert_eq!(spec("time"), None);
        assert_eq!(spec("time [d]"), None);
        assert_eq!(spec("bjd-2450000"), bjd_offset);
        assert_eq!(spec("BJD − 2450000"), bjd_offset);
        assert_eq!(spec("time [BJD_TDB - 2450000]"), bjd_offset);
        assert_eq!(
            spec("time_bjd"),
            Some(TimeSpec {
                scale: TimeScale::Bjd,
                offset_days: 0.0
            })
        );
        assert_eq!(
            spec("MJD"),
            Some(TimeSpec {
                scale: TimeScale::Jd,
                offset_days: 2_400_000.5
            })
        );
        assert_eq!(
            spec("time [offset:2457000]"),
            Some(TimeSpec {
                scale: TimeScale::Unstated,
                offset_days: 2_457_000.0
            })
        );
    }

    #[test]
    fn unknown_names_and_units() {
        assert_eq!(
            classify_header_cell("flux"),
            Err(HeaderProblem::UnknownName)
        );
        assert_eq!(classify_header_cell(""), Err(HeaderProblem::UnknownName));
        assert_eq!(
            classify_header_cell("rv [cm/s]"),
            Err(HeaderProblem::UnknownUnit("cm/s".to_string()))
        );
    }
}
