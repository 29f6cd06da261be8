//! eccaudit's figures, drawn once and generic over the plotters backend.
//!
//! The page draws them on a `<canvas>` through plotters-canvas and the
//! command line writes them as SVG; both call the same functions here, so a
//! figure looks the same wherever it is made. This crate only draws: it
//! takes plain numbers and computes nothing scientific.

mod bias;
mod corner;
#[cfg(feature = "core")]
pub mod fit;
#[cfg(feature = "core")]
mod injection;
mod legend;
mod palette;
mod periodogram;
mod phase;
mod population;
mod posterior;
#[cfg(feature = "core")]
mod sensitivity;
mod traces;
mod velocity;

pub use bias::{
    draw_bias_curve, draw_distributions, BiasCurve, BiasFigure, DistributionFigure,
    DistributionPanel, EstimateHistogram,
};
pub use corner::{draw_corner, CornerFigure};
#[cfg(feature = "core")]
pub use injection::{bias_figure, distribution_figure};
pub use legend::{draw_legend, LegendMark};
pub use palette::{instrument_colour, INK, MUTED};
pub use periodogram::{draw_periodogram, MarkedPeak, PeriodogramFigure, PowerLevel};
pub use phase::{draw_phase_fold, PhaseFoldFigure, PhaseSeries};
/// plotters itself, so adapters can build drawing areas on their own backend.
pub use plotters;
#[cfg(feature = "core")]
pub use population::{beta_parameter_figure, population_density_figure};
pub use population::{
    draw_beta_parameters, draw_population_density, BetaParameterFigure, PopulationDensityFigure,
    POPULATION_FIGURE_SIZE,
};
pub use posterior::{draw_eccentricity_posteriors, EccentricityFigure, EccentricityPanel};
#[cfg(feature = "core")]
pub use sensitivity::{
    corner_figure, corner_figure_size, eccentricity_figure, eccentricity_figure_size, trace_figure,
    trace_figure_size, CORNER_POINTS, ECCENTRICITY_COLUMNS,
};
pub use traces::{draw_traces, ParameterTraces, TraceFigure};
pub use velocity::{draw_velocities, ModelCurve, VelocityFigure, VelocitySeries};

/// The error every drawing function returns: the backend's own error type,
/// wrapped by plotters.
pub type DrawResult<DB> = Result<
    (),
    plotters::drawing::DrawingAreaErrorKind<<DB as plotters::prelude::DrawingBackend>::ErrorType>,
>;

/// A chart with linear `f64` axes on both sides: the coordinate system of every measurement
/// figure (velocities, phase folds, residuals, periodogram).
type XyChart<'a, DB> = plotters::prelude::ChartContext<
    'a,
    DB,
    plotters::prelude::Cartesian2d<
        plotters::coord::types::RangedCoordf64,
        plotters::coord::types::RangedCoordf64,
    >,
>;

/// The house grid and axes of every figure's panels: light grid lines in [`MUTED`] at 15 %,
/// bold ones in [`MUTED`] at opacity `bold`, axes in [`INK`], tick labels in `labels`. The
/// caller adds its own label counts, formatters and axis names, then draws.
fn house_mesh<'a, 'b, DB, X, Y, XT, YT>(
    chart: &'b mut plotters::prelude::ChartContext<'a, DB, plotters::prelude::Cartesian2d<X, Y>>,
    bold: f64,
    labels: impl plotters::style::IntoTextStyle<'b>,
) -> plotters::chart::MeshStyle<'a, 'b, X, Y, DB>
where
    DB: plotters::prelude::DrawingBackend,
    X: plotters::prelude::Ranged<ValueType = XT> + plotters::coord::ranged1d::ValueFormatter<XT>,
    Y: plotters::prelude::Ranged<ValueType = YT> + plotters::coord::ranged1d::ValueFormatter<YT>,
{
    use plotters::style::Color;
    let mut mesh = chart.configure_mesh();
    mesh.light_line_style(MUTED.mix(0.15))
        .bold_line_style(MUTED.mix(bold))
        .axis_style(INK)
        .label_style(labels);
    mesh
}

/// Tick labels of the small panels (posterior and population figures): 11 px, in [`INK`].
fn panel_labels() -> plotters::style::TextStyle<'static> {
    use plotters::style::IntoFont;
    ("sans-serif", 11).into_font().color(&INK)
}

/// The top of a density axis: 10 % above the largest finite value of `values`, or 1 when
/// none is above 0.
fn density_axis_top<'v>(values: impl Iterator<Item = &'v f64>) -> f64 {
    let top = values
        .copied()
        .filter(|v| v.is_finite())
        .fold(0.0f64, f64::max);
    if top > 0.0 {
        top * 1.1
    } else {
        1.0
    }
}

/// Fills `area` white and, when `title` is not empty, writes it above the figure (15 px, in
/// [`INK`]): the area a titled figure draws its panels in.
fn blank_titled_area<DB: plotters::prelude::DrawingBackend>(
    area: &plotters::prelude::DrawingArea<DB, plotters::coord::Shift>,
    title: &str,
) -> Result<
    plotters::prelude::DrawingArea<DB, plotters::coord::Shift>,
    plotters::drawing::DrawingAreaErrorKind<DB::ErrorType>,
> {
    use plotters::prelude::{IntoFont, WHITE};
    area.fill(&WHITE)?;
    Ok(if title.is_empty() {
        area.clone()
    } else {
        area.titled(title, ("sans-serif", 15).into_font().color(&INK))?
    })
}

/// Both ends of every error bar, value ∓ σ: what a panel of measurements must show.
fn error_bar_ends<'v>(values: &'v [f64], errors: &'v [f64]) -> impl Iterator<Item = f64> + 'v {
    values.iter().zip(errors).flat_map(|(v, e)| [v - e, v + e])
}

/// The legend of a figure of measurements: a dot in each instrument's colour
/// ([`instrument_colour`]) with its name, then "model" as a line when a model curve is drawn.
fn instrument_legend<'n>(
    names: impl Iterator<Item = &'n str>,
    model: bool,
) -> Vec<(String, LegendMark)> {
    let mut legend: Vec<(String, LegendMark)> = names
        .enumerate()
        .map(|(idx, name)| (name.to_string(), LegendMark::Dot(instrument_colour(idx))))
        .collect();
    if model {
        legend.push(("model".to_string(), LegendMark::Line(INK)));
    }
    legend
}

/// Each instrument's measurements `(x, y, σ)` drawn by [`draw_measurements`] in that
/// instrument's colour ([`instrument_colour`]), in the instruments' order.
fn draw_instruments<DB, P>(
    chart: &mut XyChart<'_, DB>,
    per_instrument: impl Iterator<Item = P>,
) -> DrawResult<DB>
where
    DB: plotters::prelude::DrawingBackend,
    P: Iterator<Item = (f64, f64, f64)> + Clone,
{
    for (idx, points) in per_instrument.enumerate() {
        draw_measurements(chart, points, instrument_colour(idx))?;
    }
    Ok(())
}

/// Measurements `(x, y, σ)` as filled dots with vertical one-sigma error bars, in one colour:
/// how every figure draws data points (velocities, phase folds, residuals).
fn draw_measurements<DB: plotters::prelude::DrawingBackend>(
    chart: &mut XyChart<'_, DB>,
    points: impl Iterator<Item = (f64, f64, f64)> + Clone,
    colour: plotters::style::RGBColor,
) -> DrawResult<DB> {
    use plotters::prelude::{Circle, Color, ErrorBar};
    chart.draw_series(
        points
            .clone()
            .map(|(x, y, e)| ErrorBar::new_vertical(x, y - e, y, y + e, colour.stroke_width(1), 6)),
    )?;
    chart.draw_series(points.map(|(x, y, _)| Circle::new((x, y), 3, colour.filled())))?;
    Ok(())
}

/// A readable axis offset for large time values: times such as
/// 2 460 123.4 are drawn as 123.4 with the offset named in the axis label.
///
/// Returns 0 when the times are already small. The offset is a round
/// multiple of 1000 days below the first time.
pub fn time_axis_offset(t_min: f64) -> f64 {
    if t_min.abs() < 10_000.0 || !t_min.is_finite() {
        0.0
    } else {
        (t_min / 1000.0).floor() * 1000.0
    }
}

/// Range `[lo, hi]` of the finite values, padded by `pad` of its width on
/// each side (a zero-width range is widened by one unit).
pub fn padded_range(values: impl IntoIterator<Item = f64>, pad: f64) -> (f64, f64) {
    let (mut lo, mut hi) = (f64::INFINITY, f64::NEG_INFINITY);
    for v in values.into_iter().filter(|v| v.is_finite()) {
        lo = lo.min(v);
        hi = hi.max(v);
    }
    if !lo.is_finite() {
        return (0.0, 1.0);
    }
    let width = if hi > lo { hi - lo } else { 1.0 };
    (lo - pad * width, hi + pad * width)
}

/// The text of every `<text>` element of an SVG written by plotters (one line inside each).
#[cfg(test)]
pub(crate) fn svg_texts(svg: &str) -> Vec<String> {
    let mut lines = svg.lines();
    let mut texts = Vec::new();
    while let Some(line) = lines.next() {
        if line.starts_with("<text") {
            if let Some(content) = lines.next() {
                texts.push(content.trim().to_string());
            }
        }
    }
    texts
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn time_offset_is_round_and_below_first_time() {
        assert_eq!(time_axis_offset(2_460_123.4), 2_460_000.0);
        assert_eq!(time_axis_offset(55_321.0), 55_000.0);
        assert_eq!(time_axis_offset(123.4), 0.0);
    }

    #[test]
    fn padded_range_handles_flat_and_empty_input() {
        assert_eq!(padded_range([2.0, 2.0], 0.5), (1.5, 2.5));
        assert_eq!(padded_range([], 0.1), (0.0, 1.0));
        assert_eq!(padded_range([0.0, 10.0, f64::NAN], 0.1), (-1.0, 11.0));
    }
}
