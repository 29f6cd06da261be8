//! Posterior-over-prior overlays of e: one small panel per prior, the posterior density as a
//! filled line and the prior as a thin line, with the median marked.

use plotters::coord::Shift;
use plotters::prelude::*;

use crate::legend::{draw_legend, LegendMark};
use crate::{density_axis_top, house_mesh, instrument_colour, panel_labels, DrawResult, INK};

/// One prior's curves on a common e grid.
#[derive(Debug, Clone, Default)]
pub struct EccentricityPanel {
    /// Title, e.g. the prior's label (plain text).
    pub title: String,
    /// The e grid.
    pub e: Vec<f64>,
    /// Posterior density on the grid.
    pub posterior: Vec<f64>,
    /// Prior density on the grid.
    pub prior: Vec<f64>,
    /// Posterior median, marked by a vertical line.
    pub median: Option<f64>,
}

/// Everything the overlay figure shows.
#[derive(Debug, Clone, Default)]
pub struct EccentricityFigure {
    /// One panel per prior, drawn in rows of `columns`.
    pub panels: Vec<EccentricityPanel>,
    /// Panels per row (at least 1).
    pub columns: usize,
    /// A value to mark on every panel (e.g. the least-squares e), with its name.
    pub reference: Option<(String, f64)>,
}

/// Draws `figure` on `area`, filling it.
pub fn draw_eccentricity_posteriors<DB: DrawingBackend>(
    area: &DrawingArea<DB, Shift>,
    figure: &EccentricityFigure,
) -> DrawResult<DB> {
    area.fill(&WHITE)?;
    let n = figure.panels.len().max(1);
    let columns = figure.columns.clamp(1, n);
    let rows = n.div_ceil(columns);
    let cells = area.split_evenly((rows, columns));
    let posterior_colour = instrument_colour(0);
    let prior_colour = instrument_colour(6);
    let reference_colour = instrument_colour(1);
    for (panel, cell) in figure.panels.iter().zip(cells.iter()) {
        let y_max = density_axis_top(panel.posterior.iter().chain(&panel.prior));
        let mut chart = ChartBuilder::on(cell)
            .margin(8)
            .caption(&panel.title, ("sans-serif", 13).into_font().color(&INK))
            .x_label_area_size(28)
            .y_label_area_size(40)
            .build_cartesian_2d(0.0..1.0, 0.0..y_max)?;
        house_mesh(&mut chart, 0.6, panel_labels())
            .x_labels(6)
            .y_labels(4)
            .x_desc("e")
            .draw()?;
        let mut outline: Vec<(f64, f64)> = panel
            .e
            .iter()
            .copied()
            .zip(panel.posterior.iter().copied())
            .collect();
        if let (Some(first), Some(last)) = (panel.e.first(), panel.e.last()) {
            outline.push((*last, 0.0));
            outline.push((*first, 0.0));
        }
        chart.draw_series(std::iter::once(Polygon::new(
            outline,
            posterior_colour.mix(0.25).filled(),
        )))?;
        chart.draw_series(LineSeries::new(
            panel.e.iter().copied().zip(panel.posterior.iter().copied()),
            posterior_colour.stroke_width(2),
        ))?;
        chart.draw_series(LineSeries::new(
            panel
                .e
                .iter()
                .copied()
                .zip(panel.prior.iter().map(|p| p.min(y_max))),
            prior_colour.stroke_width(1),
        ))?;
        if let Some(m) = panel.median {
            chart.draw_series(LineSeries::new([(m, 0.0), (m, y_max)], INK.stroke_width(1)))?;
        }
        if let Some((_, value)) = &figure.reference {
            chart.draw_series(LineSeries::new(
                [(*value, 0.0), (*value, y_max)],
                reference_colour.stroke_width(1),
            ))?;
        }
    }
    let mut legend = vec![
        ("posterior".to_string(), LegendMark::Line(posterior_colour)),
        ("prior".to_string(), LegendMark::Line(prior_colour)),
        ("median".to_string(), LegendMark::Line(INK)),
    ];
    if let Some((name, _)) = &figure.reference {
        legend.push((name.clone(), LegendMark::Line(reference_colour)));
    }
    draw_legend(&cells[0], &legend, (14, 26))?;
    area.present()?;
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn svg_has_one_panel_per_prior_and_escaped_titles() {
        let e: Vec<f64> = (0..=100).map(|i| i as f64 / 100.0).collect();
        let panel = |title: &str| EccentricityPanel {
            title: title.into(),
            posterior: e.iter().map(|x| 6.0 * x * (1.0 - x)).collect(),
            prior: vec![1.0; e.len()],
            e: e.clone(),
            median: Some(0.5),
        };
        let figure = EccentricityFigure {
            panels: vec![
                panel("uniform on [0, 0.99]"),
                panel("<b>beta</b>"),
                panel("third"),
            ],
            columns: 2,
            reference: Some(("least squares".into(), 0.3)),
        };
        let mut svg = String::new();
        {
            let root = SVGBackend::with_string(&mut svg, (800, 600)).into_drawing_area();
            draw_eccentricity_posteriors(&root, &figure).unwrap();
        }
        assert!(svg.contains("uniform on [0, 0.99]"));
        assert!(svg.contains("&lt;b&gt;beta&lt;/b&gt;"));
        assert!(svg.contains("least squares"));
        // Three panels × (posterior + prior + median + reference) lines, and one filled area each.
        assert!(svg.matches("<polyline").count() >= 3 * 4);
        assert!(svg.matches("<polygon").count() >= 3);
    }
}
