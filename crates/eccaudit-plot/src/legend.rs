//! A small legend box drawn from plain primitives.
//!
//! plotters' own series labels measure text through the font machinery,
//! which on the web inserts styled elements into the page; this legend asks
//! the drawing area (and so the backend) for text sizes instead.

use plotters::coord::Shift;
use plotters::prelude::*;

use crate::{DrawResult, INK, MUTED};

/// How an entry is marked.
#[derive(Debug, Clone, Copy)]
pub enum LegendMark {
    /// A filled dot, as for measurements.
    Dot(RGBColor),
    /// A short line, as for a model curve.
    Line(RGBColor),
}

const FONT_SIZE: f64 = 13.0;
const PAD: i32 = 6;
const MARK_WIDTH: i32 = 18;
const ROW_GAP: i32 = 4;

/// Draw a legend in the upper-right corner of `area`, `inset` pixels from its edges.
pub fn draw_legend<DB: DrawingBackend>(
    area: &DrawingArea<DB, Shift>,
    entries: &[(String, LegendMark)],
    inset: (i32, i32),
) -> DrawResult<DB> {
    if entries.is_empty() {
        return Ok(());
    }
    let font = ("sans-serif", FONT_SIZE).into_font().color(&INK);
    let mut text_width = 0;
    let mut row_height = FONT_SIZE as i32;
    for (label, _) in entries {
        let (w, h) = area.estimate_text_size(label, &font)?;
        text_width = text_width.max(w as i32);
        row_height = row_height.max(h as i32);
    }
    let (width, _) = area.dim_in_pixel();
    let box_width = PAD + MARK_WIDTH + PAD + text_width + PAD;
    let box_height = PAD + entries.len() as i32 * (row_height + ROW_GAP) - ROW_GAP + PAD;
    let x0 = width as i32 - inset.0 - box_width;
    let y0 = inset.1;
    area.draw(&Rectangle::new(
        [(x0, y0), (x0 + box_width, y0 + box_height)],
        WHITE.mix(0.9).filled(),
    ))?;
    area.draw(&Rectangle::new(
        [(x0, y0), (x0 + box_width, y0 + box_height)],
        MUTED.stroke_width(1),
    ))?;
    for (row, (label, mark)) in entries.iter().enumerate() {
        let y_mid = y0 + PAD + row as i32 * (row_height + ROW_GAP) + row_height / 2;
        let x_mark = x0 + PAD;
        match *mark {
            LegendMark::Dot(colour) => {
                area.draw(&Circle::new(
                    (x_mark + MARK_WIDTH / 2, y_mid),
                    4,
                    colour.filled(),
                ))?;
            }
            LegendMark::Line(colour) => {
                area.draw(&PathElement::new(
                    vec![(x_mark, y_mid), (x_mark + MARK_WIDTH, y_mid)],
                    colour.stroke_width(2),
                ))?;
            }
        }
        let style = font.clone().pos(plotters::style::text_anchor::Pos::new(
            plotters::style::text_anchor::HPos::Left,
            plotters::style::text_anchor::VPos::Center,
        ));
        area.draw(&Text::new(
            label.clone(),
            (x_mark + MARK_WIDTH + PAD, y_mid),
            style,
        ))?;
    }
    Ok(())
}
