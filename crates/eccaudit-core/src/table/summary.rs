//! Summary of a velocity table: counts, time span, uncertainties and velocity scatter, overall and per instrument.

use std::fmt;

use serde::Serialize;

use super::{StatedBy, TimeConvention, VelocityTable, VelocityUnit};
use crate::stats::median;

/// Statistics of one group of rows (one instrument, or all rows).
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct GroupSummary {
    /// Instrument name, or `all` for the whole table.
    pub name: String,
    /// Number of rows.
    pub n_rows: usize,
    /// Earliest time (days, table's time convention).
    pub first_time: f64,
    /// Latest time (days, table's time convention).
    pub last_time: f64,
    /// `last_time − first_time`, days.
    pub baseline_days: f64,
    /// Median one-sigma uncertainty, m/s.
    pub median_uncertainty_m_s: f64,
    /// Unweighted mean velocity, m/s.
    pub mean_velocity_m_s: f64,
    /// RMS of the velocities about the unweighted mean (divided by N), m/s.
    pub rms_m_s: f64,
    /// Mean velocity weighted by 1/σ², m/s.
    pub weighted_mean_velocity_m_s: f64,
    /// Weighted RMS about the weighted mean, sqrt(Σ w (v − v̄_w)² / Σ w) with w = 1/σ², m/s.
    pub weighted_rms_m_s: f64,
}

/// Summary of a velocity table, self-describing for JSON: every number
/// carries its unit in its name or in a sibling field.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct TableSummary {
    /// File name.
    pub source_name: String,
    /// Number of rows.
    pub n_rows: usize,
    /// Number of instruments.
    pub n_instruments: usize,
    /// Unit of every velocity figure in this summary (always `m/s`).
    pub velocity_unit: VelocityUnit,
    /// Unit the velocities were written in.
    pub velocity_unit_in_source: VelocityUnit,
    /// Whether that unit came from the header or an explicit setting.
    pub velocity_unit_stated_by: StatedBy,
    /// Unit of the times (always `days`).
    pub time_unit: String,
    /// Time convention of the times.
    pub time_convention: TimeConvention,
    /// Readable name of the time convention, e.g. `BJD - 2450000`.
    pub time_convention_label: String,
    /// Statistics over all rows (scatter includes offsets between instruments).
    pub overall: GroupSummary,
    /// Statistics per instrument, in order of first appearance.
    pub instruments: Vec<GroupSummary>,
    /// Notices from reading the table.
    pub notices: Vec<String>,
}

/// Statistics of the rows whose indices are given (non-empty).
///
/// Weighted mean and weighted scatter with weights 1/σ² (Bevington & Robinson
/// 2003, "Data Reduction and Error Analysis", 3rd ed., eq. 4.17 for the
/// weighted mean; from memory). RMS divides by N, not N − 1 (common practice
/// for a descriptive scatter).
fn group_summary(table: &VelocityTable, name: &str, rows: &[usize]) -> GroupSummary {
    let n_rows = rows.len();
    let times: Vec<f64> = rows.iter().map(|&i| table.times[i]).collect();
    let velocities: Vec<f64> = rows.iter().map(|&i| table.velocities[i]).collect();
    let uncertainties: Vec<f64> = rows.iter().map(|&i| table.uncertainties[i]).collect();
    let first_time = times.iter().copied().fold(f64::INFINITY, f64::min);
    let last_time = times.iter().copied().fold(f64::NEG_INFINITY, f64::max);
    let count = n_rows as f64;
    let mean_velocity = velocities.iter().sum::<f64>() / count;
    let rms = libm::sqrt(
        velocities
            .iter()
            .map(|v| (v - mean_velocity) * (v - mean_velocity))
            .sum::<f64>()
            / count,
    );
    let weights: Vec<f64> = uncertainties.iter().map(|s| 1.0 / (s * s)).collect();
    let weight_sum: f64 = weights.iter().sum();
    let weighted_mean = weights
        .iter()
        .zip(&velocities)
        .map(|(w, v)| w * v)
        .sum::<f64>()
        / weight_sum;
    let weighted_rms = libm::sqrt(
        weights
            .iter()
            .zip(&velocities)
            .map(|(w, v)| w * (v - weighted_mean) * (v - weighted_mean))
            .sum::<f64>()
            / weight_sum,
    );
    GroupSummary {
        name: name.to_string(),
        n_rows,
        first_time,
        last_time,
        baseline_days: last_time - first_time,
        median_uncertainty_m_s: median(&uncertainties),
        mean_velocity_m_s: mean_velocity,
        rms_m_s: rms,
        weighted_mean_velocity_m_s: weighted_mean,
        weighted_rms_m_s: weighted_rms,
    }
}

/// Summarise a table (see [`TableSummary`]).
pub(super) fn summarize(table: &VelocityTable) -> TableSummary {
    let all_rows: Vec<usize> = (0..table.n_rows()).collect();
    let instruments = table
        .instrument_names
        .iter()
        .enumerate()
        .map(|(instrument, name)| {
            let rows: Vec<usize> = all_rows
                .iter()
                .copied()
                .filter(|&row| table.instrument_index[row] == instrument)
                .collect();
            group_summary(table, name, &rows)
        })
        .collect();
    TableSummary {
        source_name: table.source_name.clone(),
        n_rows: table.n_rows(),
        n_instruments: table.n_instruments(),
        velocity_unit: VelocityUnit::MetresPerSecond,
        velocity_unit_in_source: table.velocity_unit_in_source,
        velocity_unit_stated_by: table.velocity_unit_stated_by,
        time_unit: "days".to_string(),
        time_convention: table.time_convention,
        time_convention_label: table.time_convention.label(),
        overall: group_summary(table, "all", &all_rows),
        instruments,
        notices: table.notices.clone(),
    }
}

impl fmt::Display for TableSummary {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        writeln!(f, "table          {}", self.source_name)?;
        writeln!(
            f,
            "rows           {} ({} instrument{})",
            self.n_rows,
            self.n_instruments,
            if self.n_instruments == 1 { "" } else { "s" }
        )?;
        writeln!(
            f,
            "time           {}, {}, in days",
            self.time_convention_label, self.time_convention.stated_by
        )?;
        writeln!(
            f,
            "span           {} to {}, baseline {:.3} d",
            self.overall.first_time, self.overall.last_time, self.overall.baseline_days
        )?;
        writeln!(
            f,
            "velocity unit  {} in the file ({}); figures below in {}",
            self.velocity_unit_in_source, self.velocity_unit_stated_by, self.velocity_unit
        )?;
        writeln!(f)?;
        let name_width = self
            .instruments
            .iter()
            .map(|group| group.name.chars().count())
            .chain([10])
            .max()
            .unwrap_or(10);
        writeln!(
            f,
            "{:<name_width$}  {:>5}  {:>12}  {:>16}  {:>12}  {:>14}",
            "instrument", "N", "baseline [d]", "median err [m/s]", "RMS [m/s]", "wRMS [m/s]"
        )?;
        let groups = self.instruments.iter().chain(
            // The overall line only adds information with several instruments.
            (self.instruments.len() > 1).then_some(&self.overall),
        );
        for group in groups {
            writeln!(
                f,
                "{:<name_width$}  {:>5}  {:>12.3}  {:>16.3}  {:>12.3}  {:>14.3}",
                group.name,
                group.n_rows,
                group.baseline_days,
                group.median_uncertainty_m_s,
                group.rms_m_s,
                group.weighted_rms_m_s
            )?;
        }
        if !self.notices.is_empty() {
            writeln!(f)?;
            writeln!(f, "notices")?;
            for notice in &self.notices {
                writeln!(f, "  - {notice}")?;
            }
        }
        Ok(())
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use approx::assert_relative_eq;

    #[test]
    fn median_of_odd_and_even_counts() {
        assert_eq!(median(&[3.0, 1.0, 2.0]), 2.0);
        assert_eq!(median(&[4.0, 1.0, 3.0, 2.0]), 2.5);
    }

    /// Hand computation (common practice): v = 1, 2, 3, 6 m/s, σ = 1, 1, 1, 2 m/s.
    /// Mean 3, RMS sqrt((4 + 1 + 0 + 9) / 4) = sqrt(3.5).
    /// Weights 1, 1, 1, 0.25: weighted mean (1 + 2 + 3 + 1.5) / 3.25 = 7.5 / 3.25;
    /// weighted RMS sqrt(Σ w (v − v̄_w)² / 3.25), written out term by term below.
    #[test]
    fn scatter_by_hand() {
        let table = VelocityTable::from_columns(
            "hand",
            &[1.0, 2.0, 3.0, 4.0],
            &[1.0, 2.0, 3.0, 6.0],
            &[1.0, 1.0, 1.0, 2.0],
            &vec!["A".to_string(); 4],
            TimeConvention::stated(
                super::super::TimeSpec {
                    scale: super::super::TimeScale::Bjd,
                    offset_days: 2_450_000.0,
                },
                StatedBy::Explicit,
            ),
        )
        .unwrap();
        let summary = table.summary();
        let group = &summary.instruments[0];
        assert_eq!(group.n_rows, 4);
        assert_relative_eq!(group.rms_m_s, 3.5_f64.sqrt(), max_relative = 1e-14);
        let weighted_mean = 7.5 / 3.25;
        assert_relative_eq!(
            group.weighted_mean_velocity_m_s,
            weighted_mean,
            max_relative = 1e-14
        );
        let weighted_variance = ((1.0 - weighted_mean).powi(2)
            + (2.0 - weighted_mean).powi(2)
            + (3.0 - weighted_mean).powi(2)
            + 0.25 * (6.0 - weighted_mean).powi(2))
            / 3.25;
        assert_relative_eq!(
            group.weighted_rms_m_s,
            weighted_variance.sqrt(),
            max_relative = 1e-14
        );
        assert_relative_eq!(group.median_uncertainty_m_s, 1.0);
        assert_relative_eq!(group.baseline_days, 3.0);
        assert_eq!(
            summary.overall,
            GroupSummary {
                name: "all".into(),
                ..group.clone()
            }
        );
    }
}
