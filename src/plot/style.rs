//! covey's look: page and panel colours, the palette of levels, marker shapes and the font.

use std::sync::OnceLock;

use plotters::style::{register_font, FontStyle, RGBColor};

/// Width of every figure in pixels.
pub const WIDTH: u32 = 720;
/// Height of every figure in pixels.
pub const HEIGHT: u32 = 450;
/// Width of the legend column at the right of the plotting area.
pub const LEGEND_WIDTH: u32 = 176;

/// The page around the panel: a warm paper tone.
pub const PAGE: RGBColor = RGBColor(0xF7, 0xF5, 0xF0);
/// The panel behind the data.
pub const PANEL: RGBColor = RGBColor(0xFF, 0xFF, 0xFF);
/// Horizontal guide lines of the value axis.
pub const GRID: RGBColor = RGBColor(0xE4, 0xE1, 0xDA);
/// Axis lines, tick labels and text.
pub const INK: RGBColor = RGBColor(0x33, 0x33, 0x33);
/// Reference lines (zero, y = x, thresholds) and level means: a mid grey that no level uses.
pub const GUIDE: RGBColor = RGBColor(0x6E, 0x6E, 0x6E);

/// The colours of levels, in level order: the palette of Okabe & Ito (2008), "Color
/// Universal Design (CUD): how to make figures and presentations that are friendly to
/// colorblind people", J*FLY. Yellow, weakest on a light page, is last; black is left out
/// because the text is near black.
pub const PALETTE: [RGBColor; 7] = [
    RGBColor(0x00, 0x72, 0xB2), // blue
    RGBColor(0xD5, 0x5E, 0x00), // vermillion
    RGBColor(0x00, 0x9E, 0x73), // bluish green
    RGBColor(0xCC, 0x79, 0xA7), // reddish purple
    RGBColor(0xE6, 0x9F, 0x00), // orange
    RGBColor(0x56, 0xB4, 0xE9), // sky blue
    RGBColor(0xF0, 0xE4, 0x42), // yellow
];

/// A marker shape. Each level gets its own, so that a figure printed in grey still tells
/// the levels apart.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Shape {
    Circle,
    Triangle,
    Square,
    Diamond,
    TriangleDown,
    Plus,
    Cross,
}

/// The marker shapes of levels, in level order (as many as colours).
pub const SHAPES: [Shape; 7] = [
    Shape::Circle,
    Shape::Triangle,
    Shape::Square,
    Shape::Diamond,
    Shape::TriangleDown,
    Shape::Plus,
    Shape::Cross,
];

/// Number of distinct level styles; levels beyond it repeat them (and the caption says so).
pub const STYLES: usize = 7;

/// Colour of level `i` (0-based).
pub fn colour(i: usize) -> RGBColor {
    PALETTE.get(i % STYLES).copied().unwrap_or(INK)
}

/// Marker shape of level `i` (0-based).
pub fn shape(i: usize) -> Shape {
    SHAPES.get(i % STYLES).copied().unwrap_or(Shape::Circle)
}

/// Half-size of a marker in pixels.
pub const MARKER: i32 = 4;

impl Shape {
    /// Vertices of the shape around (0, 0) in pixels (y down); `None` for the circle.
    pub fn outline(self) -> Option<Vec<(i32, i32)>> {
        let s = MARKER;
        let t = MARKER + 1;
        let w = 2; // half-width of the bars of plus and cross
        Some(match self {
            Shape::Circle => return None,
            Shape::Triangle => vec![(0, -t), (t, s), (-t, s)],
            Shape::TriangleDown => vec![(0, t), (t, -s), (-t, -s)],
            Shape::Square => vec![(-s, -s), (s, -s), (s, s), (-s, s)],
            Shape::Diamond => vec![(0, -t), (t, 0), (0, t), (-t, 0)],
            Shape::Plus => vec![
                (-w, -t),
                (w, -t),
                (w, -w),
                (t, -w),
                (t, w),
                (w, w),
                (w, t),
                (-w, t),
                (-w, w),
                (-t, w),
                (-t, -w),
                (-w, -w),
            ],
            Shape::Cross => vec![
                (-t, -t + 2),
                (-t + 2, -t),
                (0, -2),
                (t - 2, -t),
                (t, -t + 2),
                (2, 0),
                (t, t - 2),
                (t - 2, t),
                (0, 2),
                (-t + 2, t),
                (-t, t - 2),
                (-2, 0),
            ],
        })
    }
}

/// The font family name under which the embedded font is registered. plotters writes it
/// into the SVG's `font-family` attribute as it is, so it is a CSS list with a fallback.
pub const FONT: &str = "DejaVu Sans, sans-serif";

/// DejaVu Sans (Bitstream Vera licence, see fonts/LICENSE-DejaVu), embedded so that text
/// layout never depends on the fonts of the machine that renders.
pub static FONT_BYTES: &[u8] = include_bytes!("fonts/DejaVuSans.ttf");

/// Registers the embedded font with plotters once; false when it could not be read.
pub fn font_ready() -> bool {
    static READY: OnceLock<bool> = OnceLock::new();
    *READY.get_or_init(|| register_font(FONT, FontStyle::Normal, FONT_BYTES).is_ok())
}

/// Size of tick labels and legend text, in plotters' units.
pub const TEXT_SIZE: f64 = 15.0;
/// Size of axis titles and of the legend title.
pub const TITLE_SIZE: f64 = 16.0;
