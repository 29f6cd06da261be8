//! Figures of the least-squares fit from the core's results (feature `core`): the period
//! search's periodogram and the phase fold of each companion, shared by `eccaudit fit --plots`
//! and the page.

use eccaudit_core::fit::figures::{PhaseFold, PhaseZero};
use eccaudit_core::fit::FitData;
use eccaudit_core::periodogram::Periodogram;

use crate::{MarkedPeak, PeriodogramFigure, PhaseFoldFigure, PhaseSeries, PowerLevel};

/// "FAP 1%" for 0.01: the percentage with at most six decimals, trailing zeros dropped.
pub fn level_label(false_alarm_probability: f64) -> String {
    let percent = (false_alarm_probability * 100.0 * 1e6).round() / 1e6;
    format!("FAP {percent}%")
}

/// The periodogram figure of the fit's period search, with `title` (empty for none).
pub fn periodogram_figure(pg: &Periodogram, title: &str) -> PeriodogramFigure {
    PeriodogramFigure {
        periods: pg.periods.clone(),
        power: pg.power.clone(),
        window_power: Some(pg.window_power.clone()),
        levels: pg
            .fap_thresholds
            .iter()
            .filter_map(|t| {
                t.power.map(|power| PowerLevel {
                    label: level_label(t.false_alarm_probability),
                    power,
                })
            })
            .collect(),
        best_peak: Some(MarkedPeak {
            period: pg.best_peak.period,
            power: pg.best_peak.power,
            label: format!("P = {:.2} d", pg.best_peak.period),
        }),
        title: title.to_string(),
    }
}

/// The phase-fold figure of one companion; `time_label` names the time convention of the
/// table; `title` is empty for none.
pub fn phase_figure(
    fold: &PhaseFold,
    data: &FitData,
    time_label: &str,
    title: &str,
) -> PhaseFoldFigure {
    let mut series: Vec<PhaseSeries> = data
        .instrument_names()
        .iter()
        .map(|name| PhaseSeries {
            name: name.clone(),
            ..PhaseSeries::default()
        })
        .collect();
    for i in 0..fold.phases.len() {
        let s = &mut series[fold.instruments[i]];
        s.phase.push(fold.phases[i]);
        s.velocity.push(fold.velocities[i]);
        s.error.push(fold.errors[i]);
        s.residual.push(fold.residuals[i]);
    }
    let zero = match fold.zero {
        PhaseZero::Periastron => "periastron",
        PhaseZero::MaximumVelocity => "maximum velocity",
    };
    PhaseFoldFigure {
        series,
        curve_phase: fold.curve_phases.clone(),
        curve_velocity: fold.curve_velocities.clone(),
        phase_label: format!(
            "phase (0 = {zero} at {:.3} [{time_label}]; P = {:.4} d)",
            fold.zero_epoch, fold.period
        ),
        velocity_label: "velocity − γ − other terms [m/s]".to_string(),
        title: title.to_string(),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn level_labels_are_plain_percentages() {
        assert_eq!(level_label(0.1), "FAP 10%");
        assert_eq!(level_label(0.01), "FAP 1%");
        assert_eq!(level_label(0.001), "FAP 0.1%");
    }
}
