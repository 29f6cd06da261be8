//! The phase-fold figure: one companion's velocities folded on its period, with error bars and
//! a colour per instrument, the model curve, and a residual panel beneath on the same phase axis.

use plotters::coord::Shift;
use plotters::prelude::*;

use crate::legend::draw_legend;
use crate::{
    blank_titled_area, draw_instruments, error_bar_ends, house_mesh, instrument_legend,
    padded_range, DrawResult, INK,
};

/// One instrument's folded measurements.
#[derive(Debug, Clone, Default)]
pub struct PhaseSeries {
    /// Instrument name, shown in the legend as plain text.
    pub name: String,
    /// Phase of each point, in [0, 1).
    pub phase: Vec<f64>,
    /// Velocity with the other terms of the model removed [m/s].
    pub velocity: Vec<f64>,
    /// Error bar (half length) [m/s].
    pub error: Vec<f64>,
    /// Residual from the full model [m/s].
    pub residual: Vec<f64>,
}

/// Everything the phase-fold figure shows.
#[derive(Debug, Clone, Default)]
pub struct PhaseFoldFigure {
    /// One series per instrument, in the instruments' order (which sets the colours).
    pub series: Vec<PhaseSeries>,
    /// Phases of the model curve, in [0, 1].
    pub curve_phase: Vec<f64>,
    /// Model velocity at each curve phase [m/s].
    pub curve_velocity: Vec<f64>,
    /// Label of the phase axis, saying where phase 0 is (e.g. "phase (0 = periastron)").
    pub phase_label: String,
    /// Label of the velocity axis.
    pub velocity_label: String,
    /// A line of text above the figure (empty for none).
    pub title: String,
}

/// Share of the height given to the residual panel.
const RESIDUAL_SHARE: f64 = 0.3;
/// Width of the y label area, the same in both panels so their phase axes line up.
const Y_LABEL_AREA: u32 = 80;

/// Draw `figure` on `area`, filling it.
pub fn draw_phase_fold<DB: DrawingBackend>(
    area: &DrawingArea<DB, Shift>,
    figure: &PhaseFoldFigure,
) -> DrawResult<DB> {
    let area = blank_titled_area(area, &figure.title)?;
    let (_, height) = area.dim_in_pixel();
    let split = (f64::from(height) * (1.0 - RESIDUAL_SHARE)) as i32;
    let (top, bottom) = area.split_vertically(split);
    let label_style = ("sans-serif", 13).into_font().color(&INK);

    let data_extent = figure
        .series
        .iter()
        .flat_map(|s| error_bar_ends(&s.velocity, &s.error));
    let (v_lo, v_hi) = padded_range(
        data_extent.chain(figure.curve_velocity.iter().copied()),
        0.08,
    );
    let residual_extent = figure
        .series
        .iter()
        .flat_map(|s| error_bar_ends(&s.residual, &s.error));
    let (r_lo, r_hi) = padded_range(residual_extent.chain([0.0]), 0.1);
    let phase_range = -0.02..1.02;

    let mut chart = ChartBuilder::on(&top)
        .margin(12)
        .margin_bottom(4)
        .x_label_area_size(8)
        .y_label_area_size(Y_LABEL_AREA)
        .build_cartesian_2d(phase_range.clone(), v_lo..v_hi)?;
    house_mesh(&mut chart, 0.8, label_style.clone())
        .x_label_formatter(&|_| String::new())
        .y_label_formatter(&|v| tick_label(*v, v_hi - v_lo))
        .y_desc(figure.velocity_label.clone())
        .draw()?;
    chart.draw_series(LineSeries::new(
        figure
            .curve_phase
            .iter()
            .zip(&figure.curve_velocity)
            .map(|(p, v)| (*p, *v)),
        INK.stroke_width(2),
    ))?;
    draw_instruments(
        &mut chart,
        figure.series.iter().map(|s| folded(&s.velocity, s)),
    )?;

    let mut residual_chart = ChartBuilder::on(&bottom)
        .margin(12)
        .margin_top(4)
        .x_label_area_size(40)
        .y_label_area_size(Y_LABEL_AREA)
        .build_cartesian_2d(phase_range, r_lo..r_hi)?;
    house_mesh(&mut residual_chart, 0.8, label_style)
        .y_labels(5)
        .x_label_formatter(&|p| format!("{p:.1}"))
        .y_label_formatter(&|v| tick_label(*v, r_hi - r_lo))
        .x_desc(figure.phase_label.clone())
        .y_desc("residual [m/s]")
        .draw()?;
    residual_chart.draw_series(LineSeries::new(
        [(0.0, 0.0), (1.0, 0.0)],
        INK.mix(0.6).stroke_width(1),
    ))?;
    draw_instruments(
        &mut residual_chart,
        figure.series.iter().map(|s| folded(&s.residual, s)),
    )?;

    let legend = instrument_legend(
        figure.series.iter().map(|s| s.name.as_str()),
        !figure.curve_phase.is_empty(),
    );
    draw_legend(&top, &legend, (24, 16))?;
    area.present()?;
    Ok(())
}

/// `values` of `series` (its velocities or its residuals) at its phases, with its error bars.
fn folded<'s>(
    values: &'s [f64],
    series: &'s PhaseSeries,
) -> impl Iterator<Item = (f64, f64, f64)> + Clone + 's {
    series
        .phase
        .iter()
        .zip(values)
        .zip(&series.error)
        .map(|((p, v), e)| (*p, *v, *e))
}

/// A tick label with as many decimals as the axis span calls for.
fn tick_label(value: f64, span: f64) -> String {
    let decimals = if span >= 20.0 {
        0
    } else if span >= 2.0 {
        1
    } else {
        2
    };
    format!("{value:.decimals$}")
}

#[cfg(test)]
mod tests {
    use super::*;

    fn figure() -> PhaseFoldFigure {
        PhaseFoldFigure {
            series: vec![
                PhaseSeries {
                    name: "north".into(),
                    phase: vec![0.1, 0.4, 0.7],
                    velocity: vec![30.0, -5.0, -20.0],
                    error: vec![2.0, 2.0, 3.0],
                    residual: vec![1.0, -0.5, 2.0],
                },
                PhaseSeries {
                    name: "<i>south</i> & co".into(),
                    phase: vec![0.2, 0.9],
                    velocity: vec![20.0, 10.0],
                    error: vec![4.0, 4.0],
                    residual: vec![-3.0, 0.2],
                },
            ],
            curve_phase: (0..=100).map(|k| k as f64 / 100.0).collect(),
            curve_velocity: (0..=100)
                .map(|k| 35.0 * (std::f64::consts::TAU * k as f64 / 100.0).cos())
                .collect(),
            phase_label: "phase (0 = periastron, P = 112.31 d)".into(),
            velocity_label: "velocity − γ [m/s]".into(),
            title: "companion 1".into(),
        }
    }

    #[test]
    fn svg_has_points_in_both_panels_curve_labels_and_escaped_names() {
        let mut svg = String::new();
        {
            let root = SVGBackend::with_string(&mut svg, (720, 520)).into_drawing_area();
            draw_phase_fold(&root, &figure()).unwrap();
        }
        // Five points, each drawn in the velocity panel and in the residual panel, plus
        // two legend dots.
        let filled = svg
            .lines()
            .filter(|l| l.starts_with("<circle") && l.contains("stroke=\"none\""))
            .count();
        assert_eq!(filled, 2 * 5 + 2);
        // The model curve: one polyline with a vertex per curve sample.
        let curve = svg
            .lines()
            .filter(|l| l.starts_with("<polyline"))
            .map(|l| l.matches(',').count())
            .max()
            .unwrap();
        assert_eq!(curve, 101);
        let texts = crate::svg_texts(&svg);
        for wanted in [
            "phase (0 = periastron, P = 112.31 d)",
            "residual [m/s]",
            "velocity − γ [m/s]",
            "companion 1",
            "model",
            "north",
            // Instrument names are text, escaped by the SVG writer.
            "&lt;i&gt;south&lt;/i&gt; &amp; co",
        ] {
            assert!(
                texts.iter().any(|t| t == wanted),
                "{wanted:?} not in {texts:?}"
            );
        }
    }
}
