//! Units and time conventions of a velocity table: velocity units, time scales and specs, who stated them.

use std::fmt;
use std::str::FromStr;

use serde::{Deserialize, Serialize};

use super::header;

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
