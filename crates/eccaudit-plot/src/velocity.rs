//! The velocity figure: measured radial velocities with error bars, one
//! colour per instrument, and optionally a model curve over them.

use plotters::coord::Shift;
use plotters::prelude::*;

use crate::legend::draw_legend;
use crate::{
    draw_instruments, error_bar_ends, house_mesh, instrument_legend, padded_range,
    time_axis_offset, DrawResult, INK,
};

/// One instrument's measurements.
#[derive(Debug, Clone, Default)]
pub struct VelocitySeries {
    /// Instrument name, shown in the legend as plain text.
    pub name: String,
    /// Times [d].
    pub time: Vec<f64>,
    /// Velocities [m/s].
    pub velocity: Vec<f64>,
    /// One-sigma uncertainties [m/s].
    pub uncertainty: Vec<f64>,
}

/// A model curve sampled densely in time.
#[derive(Debug, Clone, Default)]
pub struct ModelCurve {
    /// Times [d], on the same axis as the measurements.
    pub time: Vec<f64>,
    /// Model velocities [m/s] at those times.
    pub velocity: Vec<f64>,
}

/// Everything the velocity figure shows.
#[derive(Debug, Clone, Default)]
pub struct VelocityFigure {
    /// The measurements, one series per instrument.
    pub series: Vec<VelocitySeries>,
    /// The model curve drawn over them, if any.
    pub curve: Option<ModelCurve>,
    /// Name of the time axis' convention, e.g. "BJD" (the offset is added).
    pub time_label: String,
}

/// Draw `figure` on `area`, filling it.
pub fn draw_velocities<DB: DrawingBackend>(
    area: &DrawingArea<DB, Shift>,
    figure: &VelocityFigure,
) -> DrawResult<DB> {
    area.fill(&WHITE)?;

    let all_times = figure.series.iter().flat_map(|s| s.time.iter().copied());
    let t0 = time_axis_offset(all_times.clone().fold(f64::INFINITY, f64::min));
    let (t_lo, t_hi) = padded_range(all_times, 0.03);

    let data_extent = figure
        .series
        .iter()
        .flat_map(|s| error_bar_ends(&s.velocity, &s.uncertainty));
    let curve_extent = figure.curve.iter().flat_map(|c| c.velocity.iter().copied());
    let (v_lo, v_hi) = padded_range(data_extent.chain(curve_extent), 0.08);

    let x_label = if t0 == 0.0 {
        format!("time [{}]", figure.time_label)
    } else {
        format!("time [{} − {}]", figure.time_label, t0)
    };

    let mut chart = ChartBuilder::on(area)
        .margin(12)
        .x_label_area_size(40)
        .y_label_area_size(80)
        .build_cartesian_2d((t_lo - t0)..(t_hi - t0), v_lo..v_hi)?;

    house_mesh(&mut chart, 0.8, ("sans-serif", 13).into_font().color(&INK))
        .x_label_formatter(&|t| tick_label(*t, t_hi - t_lo))
        .y_label_formatter(&|v| tick_label(*v, v_hi - v_lo))
        .x_desc(x_label)
        .y_desc("radial velocity [m/s]")
        .draw()?;

    if let Some(curve) = &figure.curve {
        chart
            .draw_series(LineSeries::new(
                curve
                    .time
                    .iter()
                    .zip(&curve.velocity)
                    .map(|(t, v)| (t - t0, *v)),
                INK.stroke_width(2),
            ))?
            .label("model")
            .legend(|(x, y)| PathElement::new(vec![(x, y), (x + 16, y)], INK.stroke_width(2)));
    }

    draw_instruments(
        &mut chart,
        figure.series.iter().map(|s| {
            s.time
                .iter()
                .zip(&s.velocity)
                .zip(&s.uncertainty)
                .map(move |((t, v), e)| (t - t0, *v, *e))
        }),
    )?;

    let legend = instrument_legend(
        figure.series.iter().map(|s| s.name.as_str()),
        figure.curve.is_some(),
    );
    draw_legend(area, &legend, (24, 20))?;

    area.present()?;
    Ok(())
}

/// A tick label with as many decimals as the axis span calls for.
fn tick_label(value: f64, span: f64) -> String {
    let decimals = if span >= 20.0 {
        0
    } else if span >= 2.0 {
        1
    } else if span >= 0.2 {
        2
    } else {
        3
    };
    format!("{value:.decimals$}")
}

#[cfg(test)]
mod tests {
    use super::*;

    fn figure() -> VelocityFigure {
        VelocityFigure {
            series: vec![
                VelocitySeries {
                    name: "north".into(),
                    time: vec![2_460_001.0, 2_460_005.5, 2_460_010.0],
                    velocity: vec![-10.0, 4.0, 12.0],
                    uncertainty: vec![1.0, 1.5, 2.0],
                },
                VelocitySeries {
                    name: "<b>south</b>".into(),
                    time: vec![2_460_003.0],
                    velocity: vec![0.0],
                    uncertainty: vec![3.0],
                },
            ],
            curve: Some(ModelCurve {
                time: vec![2_460_000.0, 2_460_011.0],
                velocity: vec![-12.0, 13.0],
            }),
            time_label: "BJD".into(),
        }
    }

    #[test]
    fn svg_has_every_point_the_legend_and_the_offset_axis() {
        let mut svg = String::new();
        {
            let root = SVGBackend::with_string(&mut svg, (640, 400)).into_drawing_area();
            draw_velocities(&root, &figure()).unwrap();
        }
        // Four measurements drawn as filled circles, plus two legend markers
        // (the SVG writer also emits an outline for each; count the fills).
        let filled = svg
            .lines()
            .filter(|l| l.starts_with("<circle") && l.contains("stroke=\"none\""));
        assert_eq!(filled.count(), 4 + 2);
        assert!(svg.contains("BJD − 2460000"));
        // Instrument names are text, escaped by the SVG writer.
        assert!(svg.contains("&lt;b&gt;south&lt;/b&gt;"));
        assert!(svg.contains("<polyline"), "model curve missing");
    }
}
