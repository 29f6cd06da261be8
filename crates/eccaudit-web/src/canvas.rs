//! A plotters backend for `<canvas>` that measures text with the canvas itself.
//!
//! plotters-canvas draws well, but plotters measures text on the web by
//! inserting a `<span style="…">` into the page, which the page's
//! Content-Security-Policy (`style-src 'self'`) rightly refuses. This wrapper
//! delegates every drawing call to plotters-canvas and answers text-size
//! questions with `CanvasRenderingContext2D.measureText`, which needs no DOM.
//!
//! It also batches runs of opaque lines and paths of one colour and width,
//! and of opaque filled circles of one colour, into a single canvas path each
//! (one `stroke()`/`fill()` per run instead of one per mark): a table of
//! 100 000 points is some 300 000 marks, and one path per mark made drawing
//! it take seconds of the page's main thread. A line or dot already in the
//! run (same pixels) is not added again: one path paints the union of its
//! sub-paths once, so the picture is the same.

use std::collections::HashSet;

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
    /// The run of marks collected in the context's current path, not yet painted.
    batch: Option<Batch>,
    /// The marks of the pending run (end points of a line; centre and radius of a dot).
    marks: HashSet<Mark>,
}

/// A run of marks painted together.
#[derive(Debug, Clone, Copy, PartialEq)]
enum Batch {
    /// Lines stroked in one colour and width.
    Lines { rgb: (u8, u8, u8), width: u32 },
    /// Circles filled in one colour.
    Dots { rgb: (u8, u8, u8) },
}

impl Batch {
    /// The run of lines stroked in `style`'s colour and width.
    fn lines_in<S: BackendStyle>(style: &S) -> Batch {
        Batch::Lines {
            rgb: style.color().rgb,
            width: style.stroke_width(),
        }
    }
}

/// A line (end points) or circle (centre, radius, filled) in pixels, to skip repeats in a run.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
enum Mark {
    Line(BackendCoord, BackendCoord),
    Circle(BackendCoord, u32, bool),
}

fn css_colour((r, g, b): (u8, u8, u8)) -> String {
    // As plotters-canvas writes an opaque colour.
    format!("rgba({r},{g},{b},1)")
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
        Some(MeasuredCanvas {
            inner,
            context,
            batch: None,
            marks: HashSet::new(),
        })
    }
}

impl MeasuredCanvas {
    /// Paint the pending run, if any.
    fn flush(&mut self) {
        self.marks.clear();
        match self.batch.take() {
            Some(Batch::Lines { .. }) => self.context.stroke(),
            Some(Batch::Dots { .. }) => self.context.fill(),
            None => {}
        }
    }

    /// Make `batch` the current run: paint the pending one if it differs and start a new path.
    fn join(&mut self, batch: Batch) {
        if self.batch == Some(batch) {
            return;
        }
        self.flush();
        match batch {
            Batch::Lines { rgb, width } => {
                self.context.set_stroke_style_str(&css_colour(rgb));
                self.context.set_line_width(f64::from(width));
            }
            Batch::Dots { rgb } => self.context.set_fill_style_str(&css_colour(rgb)),
        }
        self.context.begin_path();
        self.batch = Some(batch);
    }
}

impl Drop for MeasuredCanvas {
    fn drop(&mut self) {
        self.flush();
    }
}

impl DrawingBackend for MeasuredCanvas {
    type ErrorType = CanvasError;

    fn get_size(&self) -> (u32, u32) {
        self.inner.get_size()
    }

    fn ensure_prepared(&mut self) -> Result<(), DrawingErrorKind<CanvasError>> {
        // plotters calls this before every mark; it paints nothing, so the run goes on.
        self.inner.ensure_prepared()
    }

    fn present(&mut self) -> Result<(), DrawingErrorKind<CanvasError>> {
        self.flush();
        self.inner.present()
    }

    fn draw_pixel(
        &mut self,
        point: BackendCoord,
        color: BackendColor,
    ) -> Result<(), DrawingErrorKind<CanvasError>> {
        self.flush();
        self.inner.draw_pixel(point, color)
    }

    fn draw_line<S: BackendStyle>(
        &mut self,
        from: BackendCoord,
        to: BackendCoord,
        style: &S,
    ) -> Result<(), DrawingErrorKind<CanvasError>> {
        let colour = style.color();
        if colour.alpha == 1.0 {
            self.join(Batch::lines_in(style));
            if !self.marks.insert(Mark::Line(from, to)) {
                return Ok(());
            }
            // plotters-canvas's half-pixel shift of horizontal and vertical lines.
            let (mut from, mut to) = ((from.0 as f64, from.1 as f64), (to.0 as f64, to.1 as f64));
            if from.0 == to.0 {
                from.0 -= 0.5;
                to.0 -= 0.5;
            }
            if from.1 == to.1 {
                from.1 -= 0.5;
                to.1 -= 0.5;
            }
            self.context.move_to(from.0, from.1);
            self.context.line_to(to.0, to.1);
            return Ok(());
        }
        self.flush();
        self.inner.draw_line(from, to, style)
    }

    fn draw_rect<S: BackendStyle>(
        &mut self,
        upper_left: BackendCoord,
        bottom_right: BackendCoord,
        style: &S,
        fill: bool,
    ) -> Result<(), DrawingErrorKind<CanvasError>> {
        self.flush();
        self.inner.draw_rect(upper_left, bottom_right, style, fill)
    }

    fn draw_path<S: BackendStyle, I: IntoIterator<Item = BackendCoord>>(
        &mut self,
        path: I,
        style: &S,
    ) -> Result<(), DrawingErrorKind<CanvasError>> {
        let colour = style.color();
        if colour.alpha == 1.0 {
            // As plotters-canvas, one sub-path through the points, without the half-pixel shift.
            self.join(Batch::lines_in(style));
            let mut points = path.into_iter();
            if let Some(start) = points.next() {
                self.context.move_to(f64::from(start.0), f64::from(start.1));
                for next in points {
                    self.context.line_to(f64::from(next.0), f64::from(next.1));
                }
            }
            return Ok(());
        }
        self.flush();
        self.inner.draw_path(path, style)
    }

    fn fill_polygon<S: BackendStyle, I: IntoIterator<Item = BackendCoord>>(
        &mut self,
        vert: I,
        style: &S,
    ) -> Result<(), DrawingErrorKind<CanvasError>> {
        self.flush();
        self.inner.fill_polygon(vert, style)
    }

    fn draw_circle<S: BackendStyle>(
        &mut self,
        center: BackendCoord,
        radius: u32,
        style: &S,
        fill: bool,
    ) -> Result<(), DrawingErrorKind<CanvasError>> {
        let colour = style.color();
        if colour.alpha == 1.0 {
            // A filled circle joins the dots; an outline joins the lines of its colour and width
            // (plotters' error bars draw one around each point).
            let batch = if fill {
                Batch::Dots { rgb: colour.rgb }
            } else {
                Batch::lines_in(style)
            };
            self.join(batch);
            if !self.marks.insert(Mark::Circle(center, radius, fill)) {
                return Ok(());
            }
            let (x, y, r) = (f64::from(center.0), f64::from(center.1), f64::from(radius));
            // A new sub-path per circle, so no line joins one circle to the next.
            self.context.move_to(x + r, y);
            if self
                .context
                .arc(x, y, r, 0.0, std::f64::consts::TAU)
                .is_ok()
            {
                return Ok(());
            }
            // `arc` refuses only a negative radius, which a u32 cannot be; should it refuse
            // anyway, plotters-canvas draws the circle alone and reports the error.
        }
        self.flush();
        self.inner.draw_circle(center, radius, style, fill)
    }

    fn draw_text<S: BackendTextStyle>(
        &mut self,
        text: &str,
        style: &S,
        pos: BackendCoord,
    ) -> Result<(), DrawingErrorKind<CanvasError>> {
        self.flush();
        self.inner.draw_text(text, style, pos)
    }

    fn estimate_text_size<S: BackendTextStyle>(
        &self,
        text: &str,
        style: &S,
    ) -> Result<(u32, u32), DrawingErrorKind<CanvasError>> {
        Ok(measure_text(Some(&self.context), text, style))
    }
}

/// Width and height in pixels of `text` in `style`, measured with `context.measureText` (no
/// DOM, so the page's CSP is respected); without a context, estimated as 0.6 em per character.
pub(crate) fn measure_text<S: BackendTextStyle>(
    context: Option<&CanvasRenderingContext2d>,
    text: &str,
    style: &S,
) -> (u32, u32) {
    let estimate = 0.6 * style.size() * text.chars().count() as f64;
    let width = match context {
        Some(context) => {
            // The same font string plotters-canvas sets before fillText.
            context.set_font(&format!(
                "{} {}px {}",
                style.style().as_str(),
                style.size(),
                style.family().as_str()
            ));
            context
                .measure_text(text)
                .map(|metrics| metrics.width())
                .unwrap_or(estimate)
        }
        None => estimate,
    };
    (width.ceil() as u32, style.size().ceil() as u32)
}

/// A 2-D context of a detached `<canvas>`, for measuring text outside any drawn canvas; `None`
/// off the web (native tests) or where there is no document.
pub(crate) fn detached_text_context() -> Option<CanvasRenderingContext2d> {
    if !cfg!(target_arch = "wasm32") {
        return None;
    }
    web_sys::window()?
        .document()?
        .create_element("canvas")
        .ok()?
        .dyn_into::<HtmlCanvasElement>()
        .ok()?
        .get_context("2d")
        .ok()??
        .dyn_into::<CanvasRenderingContext2d>()
        .ok()
}
