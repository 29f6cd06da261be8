//! One figure, two backends: the page's `<canvas>` and SVG text for the export buttons.
//!
//! Each wasm draw method builds its figure once (an eccaudit-plot figure value) and hands it to
//! [`on_canvas`] or [`to_svg`]; the drawing itself is eccaudit-plot's, so the canvas and the SVG
//! come from the very same code.

use eccaudit_plot::plotters::coord::Shift;
use eccaudit_plot::plotters::prelude::{DrawingArea, DrawingBackend, IntoDrawingArea, SVGBackend};
use eccaudit_plot::{
    BetaParameterFigure, BiasFigure, CornerFigure, DistributionFigure, DrawResult,
    EccentricityFigure, PeriodogramFigure, PhaseFoldFigure, PopulationDensityFigure, TraceFigure,
    VelocityFigure,
};
use plotters_backend::{
    BackendColor, BackendCoord, BackendStyle, BackendTextStyle, DrawingErrorKind,
};
use wasm_bindgen::JsValue;
use web_sys::{CanvasRenderingContext2d, HtmlCanvasElement};

use crate::canvas::{detached_text_context, measure_text, MeasuredCanvas};
use crate::js_error;

/// A figure of eccaudit-plot, drawable on any plotters backend.
pub(crate) trait Figure {
    /// Draw the figure on `area` with its eccaudit-plot drawing function.
    fn draw_on<DB: DrawingBackend>(&self, area: &DrawingArea<DB, Shift>) -> DrawResult<DB>;
}

macro_rules! figure {
    ($figure:ty, $draw:path) => {
        impl Figure for $figure {
            fn draw_on<DB: DrawingBackend>(&self, area: &DrawingArea<DB, Shift>) -> DrawResult<DB> {
                $draw(area, self)
            }
        }
    };
}

figure!(VelocityFigure, eccaudit_plot::draw_velocities);
figure!(PeriodogramFigure, eccaudit_plot::draw_periodogram);
figure!(PhaseFoldFigure, eccaudit_plot::draw_phase_fold);
figure!(BiasFigure, eccaudit_plot::draw_bias_curve);
figure!(DistributionFigure, eccaudit_plot::draw_distributions);
figure!(
    EccentricityFigure,
    eccaudit_plot::draw_eccentricity_posteriors
);
figure!(CornerFigure, eccaudit_plot::draw_corner);
figure!(TraceFigure, eccaudit_plot::draw_traces);
figure!(
    PopulationDensityFigure,
    eccaudit_plot::draw_population_density
);
figure!(BetaParameterFigure, eccaudit_plot::draw_beta_parameters);

/// Draw `figure` on `canvas` at the canvas's size.
pub(crate) fn on_canvas(figure: &impl Figure, canvas: HtmlCanvasElement) -> Result<(), JsValue> {
    let backend = MeasuredCanvas::new(canvas)
        .ok_or_else(|| js_error("the canvas has no 2-D drawing context"))?;
    figure
        .draw_on(&backend.into_drawing_area())
        .map_err(js_error)
}

/// Draw `figure` on `canvas` after setting the canvas to `width` × `height` pixels.
pub(crate) fn on_sized_canvas(
    figure: &impl Figure,
    canvas: HtmlCanvasElement,
    (width, height): (u32, u32),
) -> Result<(), JsValue> {
    canvas.set_width(width);
    canvas.set_height(height);
    on_canvas(figure, canvas)
}

/// The SVG text of `figure` drawn at `width` × `height` pixels.
pub(crate) fn to_svg(figure: &impl Figure, width: u32, height: u32) -> Result<String, JsValue> {
    if width == 0 || height == 0 {
        return Err(js_error(format!(
            "an SVG of {width} × {height} pixels has nothing to draw on"
        )));
    }
    let mut text = String::new();
    {
        let backend = MeasuredSvg {
            inner: SVGBackend::with_string(&mut text, (width, height)),
            context: detached_text_context(),
        };
        let area = backend.into_drawing_area();
        figure.draw_on(&area).map_err(js_error)?;
        area.present().map_err(js_error)?;
    }
    Ok(text)
}

/// plotters' SVG backend with text measured by a canvas 2-D context, as [`MeasuredCanvas`]: in
/// the browser plotters would otherwise measure text with a styled `<span>`, which the page's
/// Content-Security-Policy refuses. Every drawing call goes to the SVG backend unchanged.
struct MeasuredSvg<'a> {
    inner: SVGBackend<'a>,
    context: Option<CanvasRenderingContext2d>,
}

type SvgError = <SVGBackend<'static> as DrawingBackend>::ErrorType;

impl DrawingBackend for MeasuredSvg<'_> {
    type ErrorType = SvgError;

    fn get_size(&self) -> (u32, u32) {
        self.inner.get_size()
    }

    fn ensure_prepared(&mut self) -> Result<(), DrawingErrorKind<SvgError>> {
        self.inner.ensure_prepared()
    }

    fn present(&mut self) -> Result<(), DrawingErrorKind<SvgError>> {
        self.inner.present()
    }

    fn draw_pixel(
        &mut self,
        point: BackendCoord,
        color: BackendColor,
    ) -> Result<(), DrawingErrorKind<SvgError>> {
        self.inner.draw_pixel(point, color)
    }

    fn draw_line<S: BackendStyle>(
        &mut self,
        from: BackendCoord,
        to: BackendCoord,
        style: &S,
    ) -> Result<(), DrawingErrorKind<SvgError>> {
        self.inner.draw_line(from, to, style)
    }

    fn draw_rect<S: BackendStyle>(
        &mut self,
        upper_left: BackendCoord,
        bottom_right: BackendCoord,
        style: &S,
        fill: bool,
    ) -> Result<(), DrawingErrorKind<SvgError>> {
        self.inner.draw_rect(upper_left, bottom_right, style, fill)
    }

    fn draw_path<S: BackendStyle, I: IntoIterator<Item = BackendCoord>>(
        &mut self,
        path: I,
        style: &S,
    ) -> Result<(), DrawingErrorKind<SvgError>> {
        self.inner.draw_path(path, style)
    }

    fn fill_polygon<S: BackendStyle, I: IntoIterator<Item = BackendCoord>>(
        &mut self,
        vert: I,
        style: &S,
    ) -> Result<(), DrawingErrorKind<SvgError>> {
        self.inner.fill_polygon(vert, style)
    }

    fn draw_circle<S: BackendStyle>(
        &mut self,
        center: BackendCoord,
        radius: u32,
        style: &S,
        fill: bool,
    ) -> Result<(), DrawingErrorKind<SvgError>> {
        self.inner.draw_circle(center, radius, style, fill)
    }

    fn draw_text<S: BackendTextStyle>(
        &mut self,
        text: &str,
        style: &S,
        pos: BackendCoord,
    ) -> Result<(), DrawingErrorKind<SvgError>> {
        self.inner.draw_text(text, style, pos)
    }

    fn estimate_text_size<S: BackendTextStyle>(
        &self,
        text: &str,
        style: &S,
    ) -> Result<(u32, u32), DrawingErrorKind<SvgError>> {
        Ok(measure_text(self.context.as_ref(), text, style))
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use eccaudit_plot::VelocitySeries;

    #[test]
    fn svg_of_a_velocity_figure_names_the_instrument_and_draws_each_point() {
        let figure = VelocityFigure {
            series: vec![VelocitySeries {
                name: "spectrograph-A".into(),
                time: vec![0.0, 1.0, 2.0],
                velocity: vec![1.0, -1.0, 0.5],
                uncertainty: vec![0.1, 0.1, 0.1],
            }],
            curve: None,
            time_label: "BJD".into(),
        };
        let svg = to_svg(&figure, 400, 300).unwrap();
        assert!(svg.starts_with("<svg"));
        assert!(svg.contains("spectrograph-A"));
        assert!(svg.matches("<circle").count() >= 3);
    }
}
