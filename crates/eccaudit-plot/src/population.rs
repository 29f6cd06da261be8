//! Population figures: the population density of e with its credible band over each star's posterior, and the posterior of a Beta population's (a, b) with reference values marked.

use plotters::coord::Shift;
use plotters::prelude::*;

use crate::legend::{draw_legend, LegendMark};
use crate::{
    density_axis_top, house_mesh, instrument_colour, panel_labels, DrawResult, INK, MUTED,
};

/// The density figure's numbers.
#[derive(Debug, Clone, Default)]
pub struct PopulationDensityFigure {
    /// Grid of e for the band.
    pub e: Vec<f64>,
    /// Median density of the Beta population.
    pub median: Vec<f64>,
    /// 68 % band (lower, upper).
    pub band68: (Vec<f64>, Vec<f64>),
    /// 95 % band (lower, upper).
    pub band95: (Vec<f64>, Vec<f64>),
    /// Median density of the histogram population on the same grid.
    pub histogram_median: Vec<f64>,
    /// Each star's posterior density of e (equal bins on [0, 1)), drawn faintly.
    pub stars: Vec<Vec<f64>>,
}

/// The (a, b) figure's numbers.
#[derive(Debug, Clone, Default)]
pub struct BetaParameterFigure {
    /// Posterior draws (a, b).
    pub draws: Vec<(f64, f64)>,
    /// Marked reference values (label, a, b).
    pub marks: Vec<(String, f64, f64)>,
}

/// Draws the population density over the per-star posteriors.
pub fn draw_population_density<DB: DrawingBackend>(
    area: &DrawingArea<DB, Shift>,
    figure: &PopulationDensityFigure,
) -> DrawResult<DB> {
    area.fill(&WHITE)?;
    let band_colour = instrument_colour(0);
    let hist_colour = instrument_colour(1);
    let star_colour = MUTED;
    let y_max = density_axis_top(figure.band95.1.iter().chain(&figure.histogram_median)).min(30.0);
    let mut chart = ChartBuilder::on(area)
        .margin(12)
        .caption(
            "Population density of e",
            ("sans-serif", 15).into_font().color(&INK),
        )
        .x_label_area_size(32)
        .y_label_area_size(46)
        .build_cartesian_2d(0.0..1.0, 0.0..y_max)?;
    house_mesh(&mut chart, 0.6, panel_labels())
        .x_desc("e")
        .y_desc("density")
        .draw()?;
    for star in &figure.stars {
        let n = star.len().max(1) as f64;
        let steps = star.iter().enumerate().flat_map(|(i, &d)| {
            let d = d.min(y_max);
            [(i as f64 / n, d), ((i + 1) as f64 / n, d)]
        });
        chart.draw_series(LineSeries::new(
            steps,
            star_colour.mix(0.35).stroke_width(1),
        ))?;
    }
    let polygon = |lower: &[f64], upper: &[f64]| -> Vec<(f64, f64)> {
        let mut pts: Vec<(f64, f64)> = figure
            .e
            .iter()
            .zip(upper)
            .map(|(&e, &u)| (e, u.min(y_max)))
            .collect();
        pts.extend(
            figure
                .e
                .iter()
                .zip(lower)
                .rev()
                .map(|(&e, &l)| (e, l.min(y_max))),
        );
        pts
    };
    chart.draw_series(std::iter::once(Polygon::new(
        polygon(&figure.band95.0, &figure.band95.1),
        band_colour.mix(0.15).filled(),
    )))?;
    chart.draw_series(std::iter::once(Polygon::new(
        polygon(&figure.band68.0, &figure.band68.1),
        band_colour.mix(0.3).filled(),
    )))?;
    chart.draw_series(LineSeries::new(
        figure
            .e
            .iter()
            .copied()
            .zip(figure.median.iter().map(|m| m.min(y_max))),
        band_colour.stroke_width(2),
    ))?;
    chart.draw_series(LineSeries::new(
        figure
            .e
            .iter()
            .copied()
            .zip(figure.histogram_median.iter().map(|m| m.min(y_max))),
        hist_colour.stroke_width(2),
    ))?;
    draw_legend(
        area,
        &[
            (
                "Beta population (median, 68%, 95%)".to_string(),
                LegendMark::Line(band_colour),
            ),
            (
                "histogram population (median)".to_string(),
                LegendMark::Line(hist_colour),
            ),
            (
                "each star's posterior".to_string(),
                LegendMark::Line(star_colour),
            ),
        ],
        (20, 40),
    )?;
    area.present()?;
    Ok(())
}

/// Draws the (a, b) posterior draws with the marked reference values.
pub fn draw_beta_parameters<DB: DrawingBackend>(
    area: &DrawingArea<DB, Shift>,
    figure: &BetaParameterFigure,
) -> DrawResult<DB> {
    area.fill(&WHITE)?;
    let (a_max, b_max) = figure
        .draws
        .iter()
        .map(|&(a, b)| (a, b))
        .chain(figure.marks.iter().map(|(_, a, b)| (*a, *b)))
        .fold((0.0f64, 0.0f64), |(x, y), (a, b)| (x.max(a), y.max(b)));
    let mut chart = ChartBuilder::on(area)
        .margin(12)
        .caption(
            "Beta population: posterior of (a, b)",
            ("sans-serif", 15).into_font().color(&INK),
        )
        .x_label_area_size(32)
        .y_label_area_size(46)
        .build_cartesian_2d(0.0..a_max * 1.05 + 1e-9, 0.0..b_max * 1.05 + 1e-9)?;
    house_mesh(&mut chart, 0.6, panel_labels())
        .x_desc("a")
        .y_desc("b")
        .draw()?;
    let draw_colour = instrument_colour(0);
    chart.draw_series(
        figure
            .draws
            .iter()
            .map(|&(a, b)| Circle::new((a, b), 2, draw_colour.mix(0.4).filled())),
    )?;
    let mut legend = vec![("posterior draws".to_string(), LegendMark::Dot(draw_colour))];
    for (i, (label, a, b)) in figure.marks.iter().enumerate() {
        let colour = instrument_colour(i + 2);
        chart.draw_series(std::iter::once(Cross::new(
            (*a, *b),
            7,
            colour.stroke_width(3),
        )))?;
        legend.push((label.clone(), LegendMark::Dot(colour)));
    }
    draw_legend(area, &legend, (20, 40))?;
    area.present()?;
    Ok(())
}

/// The density figure of a population report (feature `core`).
#[cfg(feature = "core")]
pub fn population_density_figure(
    report: &eccaudit_core::population::PopulationReport,
) -> PopulationDensityFigure {
    let d = &report.beta.density;
    PopulationDensityFigure {
        e: d.e.clone(),
        median: d.median.clone(),
        band68: (d.lower68.clone(), d.upper68.clone()),
        band95: (d.lower95.clone(), d.upper95.clone()),
        histogram_median: report.histogram.density.median.clone(),
        stars: report
            .stars
            .iter()
            .filter(|s| s.used)
            .map(|s| s.draw_density.clone())
            .collect(),
    }
}

/// The (a, b) figure of a population report with Kipping's (2013) values marked (feature
/// `core`).
#[cfg(feature = "core")]
pub fn beta_parameter_figure(
    report: &eccaudit_core::population::PopulationReport,
) -> BetaParameterFigure {
    BetaParameterFigure {
        draws: report.beta.draws.iter().map(|p| (p[0], p[1])).collect(),
        marks: eccaudit_core::population::kipping_2013_marks(),
    }
}

/// Size in pixels of both population figures.
pub const POPULATION_FIGURE_SIZE: (u32, u32) = (900, 600);

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn both_figures_draw_their_parts() {
        let e: Vec<f64> = (0..100).map(|i| (i as f64 + 0.5) / 100.0).collect();
        let beta: Vec<f64> = e.iter().map(|x| 12.0 * x * (1.0 - x) * (1.0 - x)).collect();
        let figure = PopulationDensityFigure {
            median: beta.clone(),
            band68: (
                beta.iter().map(|v| 0.8 * v).collect(),
                beta.iter().map(|v| 1.2 * v).collect(),
            ),
            band95: (
                beta.iter().map(|v| 0.6 * v).collect(),
                beta.iter().map(|v| 1.4 * v).collect(),
            ),
            histogram_median: beta.clone(),
            stars: vec![vec![1.0; 20], vec![2.0; 20]],
            e,
        };
        let mut svg = String::new();
        {
            let root = SVGBackend::with_string(&mut svg, (900, 600)).into_drawing_area();
            draw_population_density(&root, &figure).unwrap();
        }
        assert!(svg.contains("Population density of e"));
        assert!(svg.matches("<polygon").count() >= 2);
        assert!(svg.matches("<polyline").count() >= 4);
        let figure = BetaParameterFigure {
            draws: vec![(1.0, 3.0), (1.2, 3.5)],
            marks: vec![("Kipping 2013, all".into(), 0.867, 3.03)],
        };
        let mut svg = String::new();
        {
            let root = SVGBackend::with_string(&mut svg, (900, 600)).into_drawing_area();
            draw_beta_parameters(&root, &figure).unwrap();
        }
        assert!(svg.contains("Kipping 2013, all"));
        assert!(svg.matches("<circle").count() >= 2);
    }
}
