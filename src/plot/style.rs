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

/// The colours of levels, in level order. The first seven are the palette of Okabe & Ito
/// (2008), "Color Universal Design (CUD): how to make figures and presentations that are
/// friendly to colorblind people", J*FLY, with yellow, weakest on a light page, last and black
/// left out because the text is near black. The last five are covey's own: deep tones, darker
/// than every one of the first seven, so that they differ from them in lightness (and so in
/// grey) as well as in hue; each is paired with an open marker shape ([`SHAPES`]).
pub const PALETTE: [RGBColor; STYLES] = [
    RGBColor(0x00, 0x72, 0xB2), // blue
    RGBColor(0xD5, 0x5E, 0x00), // vermillion
    RGBColor(0x00, 0x9E, 0x73), // bluish green
    RGBColor(0xCC, 0x79, 0xA7), // reddish purple
    RGBColor(0xE6, 0x9F, 0x00), // orange
    RGBColor(0x56, 0xB4, 0xE9), // sky blue
    RGBColor(0xF0, 0xE4, 0x42), // yellow
    RGBColor(0x3A, 0x2C, 0x8C), // indigo
    RGBColor(0x9B, 0x23, 0x2E), // brick red
    RGBColor(0x4A, 0x6B, 0x12), // moss green
    RGBColor(0x7A, 0x45, 0x19), // umber
    RGBColor(0x70, 0x1F, 0x66), // plum
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
    /// A five-pointed star, filled.
    Star,
    /// The open shapes: outlines only.
    Ring,
    OpenSquare,
    OpenTriangle,
    OpenDiamond,
}

/// The marker shapes of levels, in level order (as many as colours): level i has colour i
/// and shape i, so the first [`STYLES`] levels differ from each other in both.
pub const SHAPES: [Shape; STYLES] = [
    Shape::Circle,
    Shape::Triangle,
    Shape::Square,
    Shape::Diamond,
    Shape::TriangleDown,
    Shape::Plus,
    Shape::Cross,
    Shape::Star,
    Shape::Ring,
    Shape::OpenSquare,
    Shape::OpenTriangle,
    Shape::OpenDiamond,
];

/// Number of distinct level styles (colour and shape together); levels beyond it repeat them
/// in the same order, and the figure says so and names each line or group directly.
pub const STYLES: usize = 12;

/// Colour of level `i` (0-based).
pub fn colour(i: usize) -> RGBColor {
    PALETTE.get(i % STYLES).copied().unwrap_or(INK)
}

/// Marker shape of level `i` (0-based).
pub fn shape(i: usize) -> Shape {
    SHAPES.get(i % STYLES).copied().unwrap_or(Shape::Circle)
}

/// Stroke width of an open marker's outline, in pixels.
pub const OPEN_STROKE: u32 = 2;

/// Half-size of a marker in pixels.
pub const MARKER: i32 = 4;

impl Shape {
    /// Whether the shape is drawn as an outline ([`OPEN_STROKE`] wide) rather than filled.
    pub fn is_open(self) -> bool {
        matches!(
            self,
            Shape::Ring | Shape::OpenSquare | Shape::OpenTriangle | Shape::OpenDiamond
        )
    }

    /// Vertices of the shape around (0, 0) in pixels (y down); `None` for the circle and
    /// the ring.
    pub fn outline(self) -> Option<Vec<(i32, i32)>> {
        let s = MARKER;
        let t = MARKER + 1;
        let w = 2; // half-width of the bars of plus and cross
        Some(match self {
            Shape::Circle | Shape::Ring => return None,
            Shape::Triangle | Shape::OpenTriangle => vec![(0, -t), (t, s), (-t, s)],
            Shape::TriangleDown => vec![(0, t), (t, -s), (-t, -s)],
            Shape::Square | Shape::OpenSquare => vec![(-s, -s), (s, -s), (s, s), (-s, s)],
            Shape::Diamond | Shape::OpenDiamond => vec![(0, -t), (t, 0), (0, t), (-t, 0)],
            // Points at radius 6 and inner corners at about half of it, fuller than a
            // regular star so that so small a marker keeps some area; whole pixels.
            Shape::Star => vec![
                (0, -6),
                (2, -2),
                (6, -2),
                (3, 1),
                (4, 5),
                (0, 3),
                (-4, 5),
                (-3, 1),
                (-6, -2),
                (-2, -2),
            ],
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
