//! `eccaudit fit FILE --plots DIR`: the least-squares fit's figures as SVG files (periodogram of
//! the period search, one phase fold per companion), drawn by eccaudit-plot like the page's.

use std::path::{Path, PathBuf};

use anyhow::Context;
use eccaudit_core::fit::figures::{phase_fold, search_periodogram, PhaseFold, PhaseZero};
use eccaudit_core::fit::{FitData, FitOptions, FitReport};
use eccaudit_core::periodogram::Periodogram;
use eccaudit_plot::plotters::prelude::{IntoDrawingArea, SVGBackend};
use eccaudit_plot::{
    draw_periodogram, draw_phase_fold, MarkedPeak, PeriodogramFigure, PhaseFoldFigure, PhaseSeries,
    PowerLevel,
};

/// Size of the periodogram figure [px].
const PERIODOGRAM_SIZE: (u32, u32) = (900, 520);
/// Size of a phase-fold figure [px].
const PHASE_SIZE: (u32, u32) = (900, 620);
/// Samples of the model curve over one phase.
const CURVE_POINTS: usize = 600;

/// "FAP 1%" for 0.01: the percentage with at most six decimals, trailing zeros dropped.
fn level_label(false_alarm_probability: f64) -> String {
    let percent = (false_alarm_probability * 100.0 * 1e6).round() / 1e6;
    format!("FAP {percent}%")
}

/// The periodogram figure of the period search.
fn periodogram_figure(pg: &Periodogram) -> PeriodogramFigure {
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
        title: "Period search: periodogram of the velocities (companion 1)".to_string(),
    }
}

/// The phase-fold figure of one companion.
fn phase_figure(fold: &PhaseFold, data: &FitData, time_label: &str) -> PhaseFoldFigure {
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
        title: format!("Companion {} folded on its fitted period", fold.companion),
    }
}

/// Draws every figure of `report` into `dir` (created when missing); returns the files written.
pub fn write_plots(
    dir: &Path,
    data: &FitData,
    options: &FitOptions,
    report: &FitReport,
    time_label: &str,
) -> anyhow::Result<Vec<PathBuf>> {
    std::fs::create_dir_all(dir)
        .with_context(|| format!("cannot create the plot folder `{}`", dir.display()))?;
    let mut written = Vec::new();
    let pg = search_periodogram(data, options)?;
    let path = dir.join("periodogram.svg");
    {
        let root = SVGBackend::new(&path, PERIODOGRAM_SIZE).into_drawing_area();
        draw_periodogram(&root, &periodogram_figure(&pg))
            .map_err(|err| anyhow::anyhow!("cannot draw `{}`: {err}", path.display()))?;
    }
    written.push(path);
    let solution = report.adopted_solution();
    for companion in 1..=solution.companions.len() {
        let fold = phase_fold(
            data,
            solution,
            report.reference_time,
            companion,
            CURVE_POINTS,
        )?;
        let path = dir.join(format!("phase-c{companion}.svg"));
        {
            let root = SVGBackend::new(&path, PHASE_SIZE).into_drawing_area();
            draw_phase_fold(&root, &phase_figure(&fold, data, time_label))
                .map_err(|err| anyhow::anyhow!("cannot draw `{}`: {err}", path.display()))?;
        }
        written.push(path);
    }
    Ok(written)
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
