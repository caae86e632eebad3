//! kimech's chart look: colours, marker shapes, type sizes.
//!
//! Colours are the eight-colour set of Okabe & Ito ("Color Universal Design",
//! 2008), chosen because it stays distinguishable under the common forms of
//! colour-vision deficiency. Each series also gets its own marker shape, so a
//! greyscale print still tells the series apart. Our order starts with the
//! dark blue and the vermilion (the pair with the most contrast in grey) and
//! leaves the yellow, which is faint on white, to last.
//!
//! The look is our own: a white page, an uncoloured plotting area framed on
//! the left and at the bottom only, faint horizontal guides, a bold title set
//! flush left with a grey line of detail under it, and a legend that runs
//! along the top rather than sitting inside the data.

use plotters::style::RGBColor;

/// Okabe & Ito (2008) colours in kimech's series order.
pub const SERIES_COLOURS: [RGBColor; 8] = [
    RGBColor(0x00, 0x72, 0xB2), // blue
    RGBColor(0xD5, 0x5E, 0x00), // vermilion
    RGBColor(0x00, 0x9E, 0x73), // bluish green
    RGBColor(0xCC, 0x79, 0xA7), // reddish purple
    RGBColor(0xE6, 0x9F, 0x00), // orange
    RGBColor(0x56, 0xB4, 0xE9), // sky blue
    RGBColor(0x00, 0x00, 0x00), // black
    RGBColor(0xF0, 0xE4, 0x42), // yellow
];

/// Text and axis ink: a dark slate rather than pure black.
pub const INK: RGBColor = RGBColor(0x26, 0x32, 0x38);
/// Secondary text (subtitles, notes).
pub const MUTED: RGBColor = RGBColor(0x6A, 0x70, 0x74);
/// Horizontal guide lines.
pub const GUIDE: RGBColor = RGBColor(0xE3, 0xE0, 0xDA);
/// Reference lines (zero residual, IC50 marker).
pub const REFERENCE: RGBColor = RGBColor(0x9A, 0x9E, 0xA1);
/// Flagged results: the vermilion of the palette, used for flag text.
pub const FLAG: RGBColor = RGBColor(0xB3, 0x4A, 0x00);

/// The font family written into the SVG; the viewer supplies the face.
pub const FONT: &str = "sans-serif";
/// Plotters' SVG backend writes font sizes divided by this factor, so the
/// sizes below are the wanted pixel sizes times it.
pub const FONT_SCALE: f64 = 1.24;
/// Title size (16 px on the page).
pub const TITLE_SIZE: f64 = 16.0 * FONT_SCALE;
/// Subtitle, legend and note size (12 px).
pub const SMALL_SIZE: f64 = 12.0 * FONT_SCALE;
/// Tick label size (12.5 px).
pub const TICK_SIZE: f64 = 12.5 * FONT_SCALE;
/// Axis title size (13.5 px).
pub const AXIS_SIZE: f64 = 13.5 * FONT_SCALE;

/// Opacity of confidence bands.
pub const BAND_OPACITY: f64 = 0.18;

/// Marker shapes, one per series, in the same order as the colours.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Shape {
    /// Filled circle.
    Circle,
    /// Filled triangle, point up.
    TriangleUp,
    /// Filled square.
    Square,
    /// Filled diamond.
    Diamond,
    /// Filled triangle, point down.
    TriangleDown,
    /// Open circle.
    OpenCircle,
    /// Open square.
    OpenSquare,
    /// Diagonal cross.
    Cross,
}

const SHAPES: [Shape; 8] = [
    Shape::Circle,
    Shape::TriangleUp,
    Shape::Square,
    Shape::Diamond,
    Shape::TriangleDown,
    Shape::OpenCircle,
    Shape::OpenSquare,
    Shape::Cross,
];

/// The colour of series `i` (cycling after eight).
pub fn colour(i: usize) -> RGBColor {
    SERIES_COLOURS[i % SERIES_COLOURS.len()]
}

/// The marker shape of series `i` (cycling after eight).
pub fn shape(i: usize) -> Shape {
    SHAPES[i % SHAPES.len()]
}

/// `#rrggbb` for a colour, as the SVG backend writes it.
pub fn hex(c: RGBColor) -> String {
    format!("#{:02X}{:02X}{:02X}", c.0, c.1, c.2)
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Grey level of a colour (ITU-R BT.709 luma weights).
    fn grey(c: RGBColor) -> f64 {
        0.2126 * c.0 as f64 + 0.7152 * c.1 as f64 + 0.0722 * c.2 as f64
    }

    #[test]
    fn series_stay_apart_in_colour_and_in_grey() {
        for i in 0..8 {
            for j in 0..i {
                assert_ne!(hex(colour(i)), hex(colour(j)));
                // Printed in grey, two series may look alike (orange and sky blue do:
                // 163 vs 163); their markers must then differ, and all eight do.
                assert_ne!(
                    shape(i),
                    shape(j),
                    "series {i} and {j} (grey {:.0} / {:.0})",
                    grey(colour(i)),
                    grey(colour(j))
                );
            }
        }
        // The palette is Okabe & Ito's (2008): spot-check two of its published values.
        assert_eq!(hex(colour(0)), "#0072B2");
        assert_eq!(hex(colour(1)), "#D55E00");
    }
}
