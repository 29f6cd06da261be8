//! The injection–recovery figures: the bias curve (estimate against true e with the 1:1 line
//! and the 16–84% and 2.5–97.5% bands of the estimates) and the distributions of the estimates
//! at each injected e.

use plotters::coord::Shift;
use plotters::prelude::*;

use crate::legend::{draw_legend, LegendMark};
use crate::{instrument_colour, DrawResult, INK, MUTED};

/// One estimator's simulated estimates against the injected e, one entry per injected e.
#[derive(Debug, Clone, Default)]
pub struct BiasCurve {
    /// Name shown in the legend.
    pub name: String,
    /// Injected eccentricities (increasing).
    pub true_e: Vec<f64>,
    /// 2.5% quantile of the estimates.
    pub q025: Vec<f64>,
    /// 16% quantile.
    pub q16: Vec<f64>,
    /// Median.
    pub median: Vec<f64>,
    /// 84% quantile.
    pub q84: Vec<f64>,
    /// 97.5% quantile.
    pub q975: Vec<f64>,
}

/// Everything the bias figure shows.
#[derive(Debug, Clone, Default)]
pub struct BiasFigure {
    /// One curve per estimator (each with its bands).
    pub curves: Vec<BiasCurve>,
    /// An observed value to mark as a horizontal line (the real data's estimate), if any.
    pub observed: Option<f64>,
}

/// One estimator's histogram of estimates in one panel.
#[derive(Debug, Clone, Default)]
pub struct EstimateHistogram {
    /// Name shown in the legend.
    pub name: String,
    /// Width of the bins, which start at 0.
    pub bin_width: f64,
    /// Counts per bin.
    pub counts: Vec<u32>,
}

/// The estimates at one injected e.
#[derive(Debug, Clone, Default)]
pub struct DistributionPanel {
    /// The injected e (marked by a vertical line).
    pub true_e: f64,
    /// The panel's title, with e as typed (made by the caller, e.g. with
    /// `eccaudit_core::format::grid_value`).
    pub title: String,
    /// One histogram per estimator.
    pub histograms: Vec<EstimateHistogram>,
}

/// Everything the distribution figure shows: one panel per injected e.
#[derive(Debug, Clone, Default)]
pub struct DistributionFigure {
    /// The panels, drawn left to right, top to bottom.
    pub panels: Vec<DistributionPanel>,
}

fn band_polygon(x: &[f64], lo: &[f64], hi: &[f64]) -> Vec<(f64, f64)> {
    let mut points: Vec<(f64, f64)> = x.iter().zip(hi).map(|(x, y)| (*x, *y)).collect();
    points.extend(x.iter().zip(lo).rev().map(|(x, y)| (*x, *y)));
    points
}

/// Draw the bias curve on `area`, filling it: the 1:1 line, then for each estimator its
/// 2.5–97.5% band (light), 16–84% band (darker) and median line with dots.
pub fn draw_bias_curve<DB: DrawingBackend>(
    area: &DrawingArea<DB, Shift>,
    figure: &BiasFigure,
) -> DrawResult<DB> {
    area.fill(&WHITE)?;
    let top = figure
        .curves
        .iter()
        .flat_map(|c| c.true_e.iter().chain(&c.q975).copied())
        .chain(figure.observed)
        .filter(|v| v.is_finite())
        .fold(0.1_f64, f64::max);
    let right = figure
        .curves
        .iter()
        .flat_map(|c| c.true_e.iter().copied())
        .fold(0.1_f64, f64::max);
    let x_max = (right * 1.05).min(1.0);
    let y_max = (top * 1.08).min(1.0);
    let mut chart = ChartBuilder::on(area)
        .margin(12)
        .x_label_area_size(40)
        .y_label_area_size(60)
        .build_cartesian_2d(0.0..x_max, 0.0..y_max)?;
    chart
        .configure_mesh()
        .light_line_style(MUTED.mix(0.15))
        .bold_line_style(MUTED.mix(0.8))
        .axis_style(INK)
        .label_style(("sans-serif", 13).into_font().color(&INK))
        .x_label_formatter(&|v| format!("{v:.2}"))
        .y_label_formatter(&|v| format!("{v:.2}"))
        .x_desc("injected e")
        .y_desc("estimated e")
        .draw()?;
    let diagonal = x_max.min(y_max);
    chart.draw_series(LineSeries::new(
        vec![(0.0, 0.0), (diagonal, diagonal)],
        INK.mix(0.6).stroke_width(1),
    ))?;
    if let Some(value) = figure.observed {
        chart.draw_series(LineSeries::new(
            vec![(0.0, value), (x_max, value)],
            MUTED.stroke_width(2),
        ))?;
    }
    for (idx, curve) in figure.curves.iter().enumerate() {
        let colour = instrument_colour(idx);
        chart.draw_series(std::iter::once(Polygon::new(
            band_polygon(&curve.true_e, &curve.q025, &curve.q975),
            colour.mix(0.15).filled(),
        )))?;
        chart.draw_series(std::iter::once(Polygon::new(
            band_polygon(&curve.true_e, &curve.q16, &curve.q84),
            colour.mix(0.3).filled(),
        )))?;
        let median = || {
            curve
                .true_e
                .iter()
                .zip(&curve.median)
                .map(|(x, y)| (*x, *y))
        };
        chart.draw_series(LineSeries::new(median(), colour.stroke_width(2)))?;
        chart.draw_series(median().map(|p| Circle::new(p, 3, colour.filled())))?;
    }
    let mut legend: Vec<(String, LegendMark)> = figure
        .curves
        .iter()
        .enumerate()
        .map(|(idx, c)| {
            (
                format!("{} (median, 68%, 95%)", c.name),
                LegendMark::Line(instrument_colour(idx)),
            )
        })
        .collect();
    legend.push(("true = estimated".to_string(), LegendMark::Line(INK)));
    if figure.observed.is_some() {
        legend.push(("observed value".to_string(), LegendMark::Line(MUTED)));
    }
    draw_legend(area, &legend, (24, 20))?;
    area.present()?;
    Ok(())
}

/// Draw the distributions of the estimates on `area`, one panel per injected e (up to four
/// per row), each histogram normalised to a density and drawn as steps, the injected e
/// marked by a vertical line.
pub fn draw_distributions<DB: DrawingBackend>(
    area: &DrawingArea<DB, Shift>,
    figure: &DistributionFigure,
) -> DrawResult<DB> {
    area.fill(&WHITE)?;
    let n = figure.panels.len().max(1);
    let n_cols = n.min(4);
    let n_rows = n.div_ceil(n_cols);
    let (body, legend_strip) = area.split_vertically(area.dim_in_pixel().1 as i32 - 30);
    let panels = body.split_evenly((n_rows, n_cols));
    // A common x range: up to the last non-empty bin of any histogram.
    let x_max = figure
        .panels
        .iter()
        .flat_map(|p| {
            p.histograms.iter().map(|h| {
                let last = h.counts.iter().rposition(|&c| c > 0).unwrap_or(0);
                (last + 1) as f64 * h.bin_width
            })
        })
        .chain(figure.panels.iter().map(|p| p.true_e * 1.1))
        .fold(0.05_f64, f64::max)
        .min(1.0);
    for (panel, cell) in figure.panels.iter().zip(&panels) {
        let densities: Vec<Vec<f64>> = panel
            .histograms
            .iter()
            .map(|h| {
                let total: u32 = h.counts.iter().sum();
                let scale = if total > 0 {
                    1.0 / (f64::from(total) * h.bin_width)
                } else {
                    0.0
                };
                h.counts.iter().map(|&c| f64::from(c) * scale).collect()
            })
            .collect();
        let y_max = densities.iter().flatten().copied().fold(1e-9_f64, f64::max) * 1.1;
        let mut chart = ChartBuilder::on(cell)
            .margin(8)
            .caption(
                panel.title.clone(),
                ("sans-serif", 13).into_font().color(&INK),
            )
            .x_label_area_size(28)
            .y_label_area_size(40)
            .build_cartesian_2d(0.0..x_max, 0.0..y_max)?;
        chart
            .configure_mesh()
            .light_line_style(MUTED.mix(0.15))
            .bold_line_style(MUTED.mix(0.6))
            .axis_style(INK)
            .x_labels(5)
            .y_labels(4)
            .label_style(("sans-serif", 11).into_font().color(&INK))
            .x_label_formatter(&|v| format!("{v:.2}"))
            .y_label_formatter(&|v| format!("{v:.0}"))
            .draw()?;
        chart.draw_series(LineSeries::new(
            vec![(panel.true_e, 0.0), (panel.true_e, y_max)],
            INK.stroke_width(1),
        ))?;
        for (idx, (h, density)) in panel.histograms.iter().zip(&densities).enumerate() {
            let mut steps = vec![(0.0, 0.0)];
            for (bin, d) in density.iter().enumerate() {
                let x0 = bin as f64 * h.bin_width;
                if x0 > x_max {
                    break;
                }
                steps.push((x0, *d));
                steps.push((x0 + h.bin_width, *d));
            }
            steps.push((steps.last().map_or(0.0, |p| p.0), 0.0));
            chart.draw_series(LineSeries::new(
                steps,
                instrument_colour(idx).stroke_width(2),
            ))?;
        }
    }
    let names: Vec<(String, LegendMark)> = figure
        .panels
        .first()
        .map(|p| {
            p.histograms
                .iter()
                .enumerate()
                .map(|(idx, h)| (h.name.clone(), LegendMark::Line(instrument_colour(idx))))
                .collect()
        })
        .unwrap_or_default();
    let mut entries = names;
    entries.push(("injected e".to_string(), LegendMark::Line(INK)));
    draw_row_legend(&legend_strip, &entries)?;
    area.present()?;
    Ok(())
}

/// A one-row legend along a strip (short line marks and plain text).
fn draw_row_legend<DB: DrawingBackend>(
    area: &DrawingArea<DB, Shift>,
    entries: &[(String, LegendMark)],
) -> DrawResult<DB> {
    let font = ("sans-serif", 13.0).into_font().color(&INK);
    let y = area.dim_in_pixel().1 as i32 / 2;
    let mut x = 16;
    for (label, mark) in entries {
        let colour = match *mark {
            LegendMark::Dot(c) | LegendMark::Line(c) => c,
        };
        area.draw(&PathElement::new(
            vec![(x, y), (x + 18, y)],
            colour.stroke_width(2),
        ))?;
        let style = font.clone().pos(plotters::style::text_anchor::Pos::new(
            plotters::style::text_anchor::HPos::Left,
            plotters::style::text_anchor::VPos::Center,
        ));
        area.draw(&Text::new(label.clone(), (x + 24, y), style))?;
        let (w, _) = area.estimate_text_size(label, &font)?;
        x += 24 + w as i32 + 20;
    }
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;

    fn curve(name: &str) -> BiasCurve {
        BiasCurve {
            name: name.into(),
            true_e: vec![0.0, 0.1, 0.2],
            q025: vec![0.01, 0.05, 0.15],
            q16: vec![0.03, 0.08, 0.18],
            median: vec![0.06, 0.11, 0.2],
            q84: vec![0.1, 0.15, 0.23],
            q975: vec![0.14, 0.19, 0.27],
        }
    }

    #[test]
    fn bias_svg_has_bands_medians_and_legend_text() {
        let mut svg = String::new();
        {
            let root = SVGBackend::with_string(&mut svg, (640, 480)).into_drawing_area();
            let figure = BiasFigure {
                curves: vec![curve("lsq"), curve("<lucy>")],
                observed: Some(0.12),
            };
            draw_bias_curve(&root, &figure).unwrap();
        }
        // Two bands per curve drawn as polygons.
        assert_eq!(svg.matches("<polygon").count(), 4);
        // Three median dots per curve (the legend uses line marks).
        let filled = svg
            .lines()
            .filter(|l| l.starts_with("<circle") && l.contains("stroke=\"none\""));
        assert_eq!(filled.count(), 6);
        assert!(svg.contains("injected e") && svg.contains("estimated e"));
        assert!(svg.contains("&lt;lucy&gt; (median, 68%, 95%)"));
        assert!(svg.contains("observed value"));
    }

    #[test]
    fn distribution_svg_has_one_panel_per_injected_e() {
        let mut svg = String::new();
        {
            let root = SVGBackend::with_string(&mut svg, (800, 500)).into_drawing_area();
            let panel = |e: f64| DistributionPanel {
                true_e: e,
                title: format!("injected e = {e}"),
                histograms: vec![EstimateHistogram {
                    name: "lsq".into(),
                    bin_width: 0.02,
                    counts: vec![0, 3, 9, 4, 1],
                }],
            };
            let figure = DistributionFigure {
                panels: vec![panel(0.0), panel(0.05), panel(0.1)],
            };
            draw_distributions(&root, &figure).unwrap();
        }
        assert_eq!(svg.matches("injected e = ").count(), 3);
        assert!(
            svg.lines().any(|l| l.trim() == "lsq"),
            "legend text missing"
        );
    }
}
