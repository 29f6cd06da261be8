//! A plotters backend for `<canvas>` that measures text with the canvas itself.
//!
//! plotters-canvas draws well, but plotters measures text on the web by
//! inserting a `<span style="…">` into the page, which the page's
//! Content-Security-Policy (`style-src 'self'`) rightly refuses. This wrapper
//! delegates every drawing call to plotters-canvas and answers text-size
//! questions with `CanvasRenderingContext2D.measureText`, which needs no DOM.

use plotters_backend::{
    BackendColor, BackendCoord, BackendStyle, BackendTextStyle, DrawingBackend, DrawingErrorKind,
};
use plotters_canvas::CanvasBackend;
use wasm_bindgen::JsCast;
use web_sys::{CanvasRenderingContext2d, HtmlCanvasElement};

type CanvasError = <CanvasBackend as DrawingBackend>::ErrorType;

/// plotters-canvas with canvas-based text measurement.
pub struct MeasuredCanvas {
    inner: CanvasBackend,
    context: CanvasRenderingContext2d,
}

impl MeasuredCanvas {
    /// `None` when the canvas has no 2-D context.
    pub fn new(canvas: HtmlCanvasElement) -> Option<Self> {
        let context = canvas
            .get_context("2d")
            .ok()??
            .dyn_into::<CanvasRenderingContext2d>()
            .ok()?;
        let inner = CanvasBackend::with_canvas_object(canvas)?;
        Some(MeasuredCanvas { inner, context })
    }
}

impl DrawingBackend for MeasuredCanvas {
    type ErrorType = CanvasError;

    fn get_size(&self) -> (u32, u32) {
        self.inner.get_size()
    }

    fn ensure_prepared(&mut self) -> Result<(), DrawingErrorKind<CanvasError>> {
        self.inner.ensure_prepared()
    }

    fn present(&mut self) -> Result<(), DrawingErrorKind<CanvasError>> {
        self.inner.present()
    }

    fn draw_pixel(
        &mut self,
        point: BackendCoord,
        color: BackendColor,
    ) -> Result<(), DrawingErrorKind<CanvasError>> {
        self.inner.draw_pixel(point, color)
    }

    fn draw_line<S: BackendStyle>(
        &mut self,
        from: BackendCoord,
        to: BackendCoord,
        style: &S,
    ) -> Result<(), DrawingErrorKind<CanvasError>> {
        self.inner.draw_line(from, to, style)
    }

    fn draw_rect<S: BackendStyle>(
        &mut self,
        upper_left: BackendCoord,
        bottom_right: BackendCoord,
        style: &S,
        fill: bool,
    ) -> Result<(), DrawingErrorKind<CanvasError>> {
        self.inner.draw_rect(upper_left, bottom_right, style, fill)
    }

    fn draw_path<S: BackendStyle, I: IntoIterator<Item = BackendCoord>>(
        &mut self,
        path: I,
        style: &S,
    ) -> Result<(), DrawingErrorKind<CanvasError>> {
        self.inner.draw_path(path, style)
    }

    fn fill_polygon<S: BackendStyle, I: IntoIterator<Item = BackendCoord>>(
        &mut self,
        vert: I,
        style: &S,
    ) -> Result<(), DrawingErrorKind<CanvasError>> {
        self.inner.fill_polygon(vert, style)
    }

    fn draw_circle<S: BackendStyle>(
        &mut self,
        center: BackendCoord,
        radius: u32,
        style: &S,
        fill: bool,
    ) -> Result<(), DrawingErrorKind<CanvasError>> {
        self.inner.draw_circle(center, radius, style, fill)
    }

    fn draw_text<S: BackendTextStyle>(
        &mut self,
        text: &str,
        style: &S,
        pos: BackendCoord,
    ) -> Result<(), DrawingErrorKind<CanvasError>> {
        self.inner.draw_text(text, style, pos)
    }

    fn estimate_text_size<S: BackendTextStyle>(
        &self,
        text: &str,
        style: &S,
    ) -> Result<(u32, u32), DrawingErrorKind<CanvasError>> {
        // The same font string plotters-canvas sets before fillText.
        self.context.set_font(&format!(
            "{} {}px {}",
            style.style().as_str(),
            style.size(),
            style.family().as_str()
        ));
        let width = self
            .context
            .measure_text(text)
            .map(|metrics| metrics.width())
            .unwrap_or(0.6 * style.size() * text.chars().count() as f64);
        Ok((width.ceil() as u32, style.size().ceil() as u32))
    }
}
