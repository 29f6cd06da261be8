//! The periodogram figure: power against period on a logarithmic axis, false-alarm levels as
//! dashed lines, the best peak marked, and optionally the spectral window in a faint panel below.

use plotters::coord::Shift;
use plotters::prelude::*;
use plotters::style::text_anchor::{HPos, Pos, VPos};

use crate::{blank_titled_area, house_mesh, DrawResult, INK, MUTED};

/// Colour of the false-alarm levels.
const LEVEL_COLOUR: RGBColor = RGBColor(0xa0, 0x52, 0x2d);
/// Colour of the best-peak marker.
const PEAK_COLOUR: RGBColor = RGBColor(0xd5, 0x5e, 0x00);
/// Colour of the spectral window.
const WINDOW_COLOUR: RGBColor = RGBColor(0x7a, 0x86, 0x94);

/// A power level with the false-alarm probability it stands for.
#[derive(Debug, Clone, Default)]
pub struct PowerLevel {
    /// Text beside the line, e.g. "FAP 1%".
    pub label: String,
    /// Normalised power of the level.
    pub power: f64,
}

/// A marked peak.
#[derive(Debug, Clone, Default)]
pub struct MarkedPeak {
    /// Period [d].
    pub period: f64,
    /// Power.
    pub power: f64,
    /// Text beside the mark, e.g. "P = 112.3 d".
    pub label: String,
}

/// Everything the periodogram figure shows.
#[derive(Debug, Clone, Default)]
pub struct PeriodogramFigure {
    /// Periods [d] of the samples (any order, all > 0).
    pub periods: Vec<f64>,
    /// Normalised power at each period.
    pub power: Vec<f64>,
    /// Spectral window at each period, drawn in its own faint panel when given.
    pub window_power: Option<Vec<f64>>,
    /// False-alarm levels, drawn as dashed horizontal lines.
    pub levels: Vec<PowerLevel>,
    /// The best peak.
    pub best_peak: Option<MarkedPeak>,
    /// A line of text above the figure (empty for none).
    pub title: String,
}

/// Share of the height given to the window panel when there is one.
const WINDOW_SHARE: f64 = 0.27;

/// Draw `figure` on `area`, filling it.
pub fn draw_periodogram<DB: DrawingBackend>(
    area: &DrawingArea<DB, Shift>,
    figure: &PeriodogramFigure,
) -> DrawResult<DB> {
    let area = blank_titled_area(area, &figure.title)?;
    let positive = || {
        figure
            .periods
            .iter()
            .copied()
            .filter(|p| p.is_finite() && *p > 0.0)
    };
    let mut p_lo = positive().fold(f64::INFINITY, f64::min);
    let mut p_hi = positive().fold(f64::NEG_INFINITY, f64::max);
    if !(p_lo.is_finite() && p_hi.is_finite()) {
        (p_lo, p_hi) = (1.0, 10.0);
    }
    if p_hi <= p_lo {
        (p_lo, p_hi) = (p_lo / 2.0, p_hi * 2.0);
    }
    let power_top = figure
        .power
        .iter()
        .copied()
        .chain(figure.levels.iter().map(|l| l.power))
        .filter(|v| v.is_finite())
        .fold(0.0_f64, f64::max);
    let power_top = if power_top > 0.0 {
        power_top * 1.12
    } else {
        1.0
    };

    let (main, window_area) = match &figure.window_power {
        Some(_) => {
            let (_, height) = area.dim_in_pixel();
            let split = (f64::from(height) * (1.0 - WINDOW_SHARE)) as i32;
            let (top, bottom) = area.split_vertically(split);
            (top, Some(bottom))
        }
        None => (area.clone(), None),
    };
    let period_axis = || (p_lo..p_hi).log_scale();
    let label_style = ("sans-serif", 13).into_font().color(&INK);

    let mut chart = ChartBuilder::on(&main)
        .margin(12)
        .x_label_area_size(40)
        .y_label_area_size(70)
        .build_cartesian_2d(period_axis(), 0.0..power_top)?;
    house_mesh(&mut chart, 0.8, label_style.clone())
        .x_label_formatter(&|p| period_label(*p))
        .y_label_formatter(&|v| format!("{v:.2}"))
        .x_desc("period [d]")
        .y_desc("normalised power")
        .draw()?;

    chart.draw_series(LineSeries::new(
        figure
            .periods
            .iter()
            .zip(&figure.power)
            .filter(|(p, v)| p.is_finite() && **p > 0.0 && v.is_finite())
            .map(|(p, v)| (*p, *v)),
        INK.stroke_width(1),
    ))?;

    for level in figure.levels.iter().filter(|l| l.power.is_finite()) {
        chart.draw_series(DashedLineSeries::new(
            [(p_lo, level.power), (p_hi, level.power)],
            6,
            4,
            LEVEL_COLOUR.stroke_width(1),
        ))?;
        chart.draw_series(std::iter::once(Text::new(
            level.label.clone(),
            (p_hi, level.power),
            label_style
                .clone()
                .color(&LEVEL_COLOUR)
                .pos(Pos::new(HPos::Right, VPos::Bottom)),
        )))?;
    }

    if let Some(peak) = &figure.best_peak {
        if peak.period.is_finite() && peak.period > 0.0 && peak.power.is_finite() {
            // Label on the side with more room: left of the mark in the right third.
            let at = (peak.period.ln() - p_lo.ln()) / (p_hi.ln() - p_lo.ln());
            let (dx, h_pos) = if at > 0.66 {
                (-9, HPos::Right)
            } else {
                (9, HPos::Left)
            };
            let mark = EmptyElement::at((peak.period, peak.power))
                + Circle::new((0, 0), 5, PEAK_COLOUR.stroke_width(2))
                + Text::new(
                    peak.label.clone(),
                    (dx, 0),
                    label_style
                        .clone()
                        .color(&PEAK_COLOUR)
                        .pos(Pos::new(h_pos, VPos::Center)),
                );
            chart.draw_series(std::iter::once(mark))?;
        }
    }

    if let (Some(window), Some(window_area)) = (&figure.window_power, window_area) {
        let mut window_chart = ChartBuilder::on(&window_area)
            .margin(12)
            .margin_top(2)
            .x_label_area_size(0)
            .y_label_area_size(70)
            .build_cartesian_2d(period_axis(), 0.0..1.05)?;
        window_chart
            .configure_mesh()
            .disable_x_mesh()
            .light_line_style(MUTED.mix(0.15))
            .bold_line_style(MUTED.mix(0.5))
            .axis_style(MUTED)
            .label_style(label_style.clone().color(&WINDOW_COLOUR))
            .y_labels(3)
            .y_label_formatter(&|v| format!("{v:.1}"))
            .y_desc("window")
            .draw()?;
        window_chart.draw_series(LineSeries::new(
            figure
                .periods
                .iter()
                .zip(window)
                .filter(|(p, v)| p.is_finite() && **p > 0.0 && v.is_finite())
                .map(|(p, v)| (*p, *v)),
            WINDOW_COLOUR.mix(0.8).stroke_width(1),
        ))?;
    }

    area.present()?;
    Ok(())
}

/// A period tick label: whole days from 10 d up, otherwise up to two decimals.
fn period_label(period: f64) -> String {
    if period >= 10.0 {
        format!("{period:.0}")
    } else {
        let text = format!("{period:.2}");
        text.trim_end_matches('0').trim_end_matches('.').to_string()
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn figure(window: bool) -> PeriodogramFigure {
        let periods: Vec<f64> = (0..400).map(|i| 1.0 + i as f64 * 0.9).collect();
        let power: Vec<f64> = periods
            .iter()
            .map(|p| 0.05 + 0.7 * (-((p - 112.0) / 3.0).powi(2)).exp())
            .collect();
        PeriodogramFigure {
            window_power: window.then(|| vec![0.1; periods.len()]),
            periods,
            power,
            levels: vec![
                PowerLevel {
                    label: "FAP 10%".into(),
                    power: 0.3,
                },
                PowerLevel {
                    label: "FAP 1%".into(),
                    power: 0.38,
                },
            ],
            best_peak: Some(MarkedPeak {
                period: 112.0,
                power: 0.75,
                label: "P = 112.0 d <best>".into(),
            }),
            title: String::new(),
        }
    }

    fn svg_of(figure: &PeriodogramFigure) -> String {
        let mut svg = String::new();
        {
            let root = SVGBackend::with_string(&mut svg, (720, 420)).into_drawing_area();
            draw_periodogram(&root, figure).unwrap();
        }
        svg
    }

    #[test]
    fn svg_has_the_curve_levels_peak_and_log_axis() {
        let svg = svg_of(&figure(false));
        // The power curve is one polyline with a vertex per sample.
        let curve = svg
            .lines()
            .filter(|l| l.starts_with("<polyline"))
            .map(|l| l.matches(',').count())
            .max()
            .unwrap();
        assert_eq!(curve, 400);
        let texts = crate::svg_texts(&svg);
        let has = |wanted: &str| texts.iter().any(|t| t == wanted);
        assert!(has("FAP 1%") && has("FAP 10%"), "{texts:?}");
        // The peak label is escaped text, not markup.
        assert!(has("P = 112.0 d &lt;best&gt;"), "{texts:?}");
        assert!(has("period [d]") && has("normalised power"), "{texts:?}");
        // A logarithmic axis from 1 to 360 d has decade ticks at 10 and 100.
        assert!(has("10") && has("100"), "{texts:?}");
        // Dashed levels are drawn as many short segments.
        let dashes = svg
            .lines()
            .filter(|l| l.contains("#A0522D") || l.contains("#a0522d"))
            .count();
        assert!(dashes > 20, "{dashes} dash segments");
        assert!(!has("window"));
    }

    #[test]
    fn window_panel_appears_when_given() {
        let svg = svg_of(&figure(true));
        assert!(crate::svg_texts(&svg).iter().any(|t| t == "window"));
        let long_lines = svg
            .lines()
            .filter(|l| l.starts_with("<polyline") && l.matches(',').count() == 400)
            .count();
        assert_eq!(long_lines, 2, "power and window curves");
    }

    #[test]
    fn period_ticks_are_short() {
        assert_eq!(period_label(100.0), "100");
        assert_eq!(period_label(2.0), "2");
        assert_eq!(period_label(1.5), "1.5");
        assert_eq!(period_label(0.25), "0.25");
    }
}
