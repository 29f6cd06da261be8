//! The corner plot: histograms of each parameter on the diagonal, pairwise scatter below it.
//!
//! The figure only bins what it is given for display; every number a user would quote comes from
//! the core.

use plotters::coord::Shift;
use plotters::prelude::*;

use crate::{instrument_colour, padded_range, DrawResult, INK, MUTED};

/// Bins of the diagonal histograms.
const BINS: usize = 30;

/// Everything the corner plot shows.
#[derive(Debug, Clone, Default)]
pub struct CornerFigure {
    /// Parameter names (plain text).
    pub names: Vec<String>,
    /// Samples per parameter, all of equal length (thin before passing: every point is drawn).
    pub samples: Vec<Vec<f64>>,
    /// Optional reference values (e.g. the least-squares optimum), one per parameter.
    pub reference: Option<Vec<f64>>,
}

/// Draws `figure` on `area`, filling it.
pub fn draw_corner<DB: DrawingBackend>(
    area: &DrawingArea<DB, Shift>,
    figure: &CornerFigure,
) -> DrawResult<DB> {
    area.fill(&WHITE)?;
    let n = figure.samples.len().max(1);
    let cells = area.split_evenly((n, n));
    let ranges: Vec<(f64, f64)> = figure
        .samples
        .iter()
        .map(|s| padded_range(s.iter().copied(), 0.05))
        .collect();
    let colour = instrument_colour(0);
    let reference_colour = instrument_colour(1);
    let label = ("sans-serif", 10).into_font().color(&INK);
    for row in 0..figure.samples.len() {
        for col in 0..=row {
            let cell = &cells[row * n + col];
            let (x_lo, x_hi) = ranges[col];
            let bottom = row + 1 == figure.samples.len();
            let left = col == 0;
            let name = |i: usize| figure.names.get(i).cloned().unwrap_or_default();
            if row == col {
                let width = (x_hi - x_lo) / BINS as f64;
                let mut counts = [0usize; BINS];
                for &v in &figure.samples[col] {
                    if v >= x_lo && v <= x_hi {
                        counts[(((v - x_lo) / width) as usize).min(BINS - 1)] += 1;
                    }
                }
                let top = counts.iter().copied().max().unwrap_or(1).max(1) as f64 * 1.1;
                let mut chart = ChartBuilder::on(cell)
                    .margin(2)
                    .x_label_area_size(if bottom { 30 } else { 0 })
                    .y_label_area_size(if left { 44 } else { 0 })
                    .build_cartesian_2d(x_lo..x_hi, 0.0..top)?;
                let mut mesh = chart.configure_mesh();
                mesh.disable_mesh()
                    .axis_style(INK)
                    .label_style(label.clone())
                    .x_labels(3)
                    .y_labels(0);
                if bottom {
                    mesh.x_desc(name(col));
                }
                mesh.draw()?;
                chart.draw_series(counts.iter().enumerate().map(|(b, &c)| {
                    let x0 = x_lo + b as f64 * width;
                    Rectangle::new(
                        [(x0, 0.0), (x0 + width, c as f64)],
                        colour.mix(0.5).filled(),
                    )
                }))?;
                if let Some(r) = figure.reference.as_ref().and_then(|r| r.get(col)) {
                    chart.draw_series(LineSeries::new(
                        [(*r, 0.0), (*r, top)],
                        reference_colour.stroke_width(1),
                    ))?;
                }
            } else {
                let (y_lo, y_hi) = ranges[row];
                let mut chart = ChartBuilder::on(cell)
                    .margin(2)
                    .x_label_area_size(if bottom { 30 } else { 0 })
                    .y_label_area_size(if left { 44 } else { 0 })
                    .build_cartesian_2d(x_lo..x_hi, y_lo..y_hi)?;
                let mut mesh = chart.configure_mesh();
                mesh.light_line_style(MUTED.mix(0.1))
                    .bold_line_style(MUTED.mix(0.4))
                    .axis_style(INK)
                    .label_style(label.clone())
                    .x_labels(3)
                    .y_labels(3);
                if bottom {
                    mesh.x_desc(name(col));
                }
                if left {
                    mesh.y_desc(name(row));
                }
                mesh.draw()?;
                chart.draw_series(
                    figure.samples[col]
                        .iter()
                        .zip(&figure.samples[row])
                        .map(|(&x, &y)| Circle::new((x, y), 1, colour.mix(0.3).filled())),
                )?;
                if let Some(r) = figure.reference.as_ref() {
                    if let (Some(&x), Some(&y)) = (r.get(col), r.get(row)) {
                        chart.draw_series(std::iter::once(Cross::new(
                            (x, y),
                            4,
                            reference_colour.stroke_width(2),
                        )))?;
                    }
                }
            }
        }
    }
    area.present()?;
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn svg_has_every_point_below_the_diagonal() {
        let a: Vec<f64> = (0..50).map(|i| i as f64).collect();
        let b: Vec<f64> = (0..50).map(|i| (i * i) as f64).collect();
        let c: Vec<f64> = (0..50).map(|i| (i % 7) as f64).collect();
        let figure = CornerFigure {
            names: vec!["P [d]".into(), "K [m/s]".into(), "e".into()],
            samples: vec![a, b, c],
            reference: None,
        };
        let mut svg = String::new();
        {
            let root = SVGBackend::with_string(&mut svg, (600, 600)).into_drawing_area();
            draw_corner(&root, &figure).unwrap();
        }
        // Three scatter panels of 50 points each (filled circles).
        let filled = svg
            .lines()
            .filter(|l| l.starts_with("<circle") && l.contains("stroke=\"none\""))
            .count();
        assert_eq!(filled, 3 * 50);
        assert!(svg.contains("K [m/s]"));
    }
}
