//! Chain traces: one strip per parameter, every walker's path as a thin line.

use plotters::coord::Shift;
use plotters::prelude::*;

use crate::{instrument_colour, padded_range, DrawResult, INK, MUTED};

/// The traces of one parameter.
#[derive(Debug, Clone, Default)]
pub struct ParameterTraces {
    /// Parameter name (plain text).
    pub name: String,
    /// One trace per walker, in step order.
    pub walkers: Vec<Vec<f64>>,
}

/// Everything the trace figure shows.
#[derive(Debug, Clone, Default)]
pub struct TraceFigure {
    /// One strip per parameter, top to bottom.
    pub parameters: Vec<ParameterTraces>,
    /// Label of the step axis, e.g. "step after burn-in".
    pub step_label: String,
}

/// Draws `figure` on `area`, filling it.
pub fn draw_traces<DB: DrawingBackend>(
    area: &DrawingArea<DB, Shift>,
    figure: &TraceFigure,
) -> DrawResult<DB> {
    area.fill(&WHITE)?;
    let n = figure.parameters.len().max(1);
    let strips = area.split_evenly((n, 1));
    for (index, (parameter, strip)) in figure.parameters.iter().zip(strips.iter()).enumerate() {
        let n_steps = parameter
            .walkers
            .iter()
            .map(Vec::len)
            .max()
            .unwrap_or(1)
            .max(2);
        let (lo, hi) = padded_range(parameter.walkers.iter().flatten().copied(), 0.05);
        let last = index + 1 == figure.parameters.len();
        let mut chart = ChartBuilder::on(strip)
            .margin(4)
            .x_label_area_size(if last { 30 } else { 0 })
            .y_label_area_size(70)
            .build_cartesian_2d(0.0..(n_steps - 1) as f64, lo..hi)?;
        let mut mesh = chart.configure_mesh();
        mesh.light_line_style(MUTED.mix(0.1))
            .bold_line_style(MUTED.mix(0.5))
            .axis_style(INK)
            .label_style(("sans-serif", 11).into_font().color(&INK))
            .y_labels(3)
            .y_desc(parameter.name.clone());
        if last {
            mesh.x_desc(figure.step_label.clone());
        }
        mesh.draw()?;
        for (w, trace) in parameter.walkers.iter().enumerate() {
            chart.draw_series(LineSeries::new(
                trace.iter().enumerate().map(|(s, &v)| (s as f64, v)),
                instrument_colour(w).mix(0.35).stroke_width(1),
            ))?;
        }
    }
    area.present()?;
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn svg_has_a_line_per_walker_and_parameter() {
        let figure = TraceFigure {
            parameters: vec![
                ParameterTraces {
                    name: "period".into(),
                    walkers: vec![vec![1.0, 2.0, 1.5], vec![1.1, 1.9, 1.4]],
                },
                ParameterTraces {
                    name: "e".into(),
                    walkers: vec![vec![0.1, 0.2, 0.3], vec![0.3, 0.2, 0.1]],
                },
            ],
            step_label: "step after burn-in".into(),
        };
        let mut svg = String::new();
        {
            let root = SVGBackend::with_string(&mut svg, (600, 400)).into_drawing_area();
            draw_traces(&root, &figure).unwrap();
        }
        // Walker lines are the translucent polylines (the mesh lines are opaque or fainter).
        let walker_lines = svg
            .lines()
            .filter(|l| l.starts_with("<polyline") && l.contains("opacity=\"0.35\""))
            .count();
        assert_eq!(walker_lines, 4);
        assert!(svg.contains("step after burn-in") && svg.contains("period"));
    }
}
