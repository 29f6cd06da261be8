//! Colours: a colour-blind-safe set for instruments, and the ink of axes and text.
//!
//! The instrument colours are the eight-colour set of Okabe & Ito (2008,
//! "Color Universal Design", J*FLY), reordered so that the first few differ
//! most in lightness as well as hue.

use plotters::style::RGBColor;

/// Axes, text and the model curve.
pub const INK: RGBColor = RGBColor(0x22, 0x2a, 0x35);
/// Grid lines and secondary marks.
pub const MUTED: RGBColor = RGBColor(0xc8, 0xcf, 0xd8);

const INSTRUMENT_COLOURS: [RGBColor; 7] = [
    RGBColor(0x00, 0x72, 0xb2), // blue
    RGBColor(0xd5, 0x5e, 0x00), // vermillion
    RGBColor(0x00, 0x9e, 0x73), // bluish green
    RGBColor(0xcc, 0x79, 0xa7), // reddish purple
    RGBColor(0xe6, 0x9f, 0x00), // orange
    RGBColor(0x56, 0xb4, 0xe9), // sky blue
    RGBColor(0x80, 0x80, 0x80), // grey
];

/// Colour of the instrument with this index (cycles after seven).
pub fn instrument_colour(instrument_idx: usize) -> RGBColor {
    INSTRUMENT_COLOURS[instrument_idx % INSTRUMENT_COLOURS.len()]
}
