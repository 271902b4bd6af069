//! A chart described as data (points, curves, intervals, reference lines), and its drawing
//! as SVG with plotters.

use plotters::coord::types::RangedCoordf64;
use plotters::coord::Shift;
use plotters::prelude::*;
use plotters::style::text_anchor::{HPos, Pos, VPos};

use super::style;
use super::PlotError;

/// One observation drawn as a marker of its group's style.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Point {
    /// Index into [`Chart::groups`].
    pub group: usize,
    pub x: f64,
    pub y: f64,
}

/// A polyline in data coordinates, in a group's colour or (group `None`) in the guide grey.
#[derive(Debug, Clone, PartialEq)]
pub struct Curve {
    pub group: Option<usize>,
    pub points: Vec<(f64, f64)>,
}

/// A vertical interval with a marker at its centre (an estimate with its limits).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Interval {
    pub group: usize,
    pub x: f64,
    pub centre: f64,
    pub lower: f64,
    pub upper: f64,
}

/// A reference line across the panel.
#[derive(Debug, Clone, PartialEq)]
pub enum Guide {
    /// y = value.
    Horizontal { y: f64, label: String },
    /// y = x.
    Identity { label: String },
}

/// Everything one figure shows.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct Chart {
    pub x_label: String,
    pub y_label: String,
    /// The legend's heading (the factor's name), if any.
    pub legend_title: Option<String>,
    /// Group labels in legend order; their index picks colour and marker.
    pub groups: Vec<String>,
    /// When set, the x axis is categorical: these labels stand at x = 0, 1, 2, ...
    pub categories: Option<Vec<String>>,
    pub points: Vec<Point>,
    pub curves: Vec<Curve>,
    pub intervals: Vec<Interval>,
    pub guides: Vec<Guide>,
    /// Extra legend entry for neutral curves (e.g. "level mean"), if any.
    pub neutral_curve_label: Option<String>,
    /// Whether legend entries of groups show a line beside the marker.
    pub group_lines: bool,
    /// Whether the value axis starts at zero (for quantities that cannot be negative).
    pub y_from_zero: bool,
}

/// Relative padding added at each end of an axis range, so that markers at the extremes
/// are not cut by the panel's edge.
const PAD: f64 = 0.05;
/// Longest label shown in the legend or on a categorical axis, in characters; longer ones
/// are cut with an ellipsis so that text stays inside the figure.
const MAX_LABEL_CHARS: usize = 16;

/// Draws `chart` as an SVG document of [`style::WIDTH`] x [`style::HEIGHT`] pixels.
pub fn render(chart: &Chart) -> Result<String, PlotError> {
    if !style::font_ready() {
        return Err(PlotError::Font);
    }
    let mut svg = String::new();
    {
        let root =
            SVGBackend::with_string(&mut svg, (style::WIDTH, style::HEIGHT)).into_drawing_area();
        draw(&root, chart).map_err(|e| PlotError::Drawing(e.to_string()))?;
        root.present()
            .map_err(|e| PlotError::Drawing(e.to_string()))?;
    }
    // The text grew by doubling; a document with many figures holds them all until written.
    svg.shrink_to_fit();
    Ok(svg)
}

type DrawResult<'a> =
    Result<(), DrawingAreaErrorKind<<SVGBackend<'a> as DrawingBackend>::ErrorType>>;

fn font(size: f64) -> TextStyle<'static> {
    (style::FONT, size).into_font().color(&style::INK)
}

fn draw<'a>(root: &DrawingArea<SVGBackend<'a>, Shift>, chart: &Chart) -> DrawResult<'a> {
    root.fill(&style::PAGE)?;
    let split = style::WIDTH.saturating_sub(style::LEGEND_WIDTH);
    let (plot_area, legend_area) = root.split_horizontally(split);
    let (x_range, y_range) = ranges(chart);
    let x_decimals = decimals(x_range);
    let y_decimals = decimals(y_range);

    let mut ctx = ChartBuilder::on(&plot_area)
        .margin_top(18)
        .margin_left(10)
        .margin_right(14)
        .margin_bottom(10)
        .x_label_area_size(52)
        .y_label_area_size(y_label_width(y_range, y_decimals))
        .build_cartesian_2d(x_range.0..x_range.1, y_range.0..y_range.1)?;
    ctx.plotting_area().fill(&style::PANEL)?;

    let format_x = |v: &f64| tick(*v, x_decimals);
    let format_y = |v: &f64| tick(*v, y_decimals);
    let mut mesh = ctx.configure_mesh();
    mesh.disable_x_mesh()
        .bold_line_style(style::GRID.stroke_width(1))
        .light_line_style(TRANSPARENT.stroke_width(0))
        .axis_style(style::INK.stroke_width(1))
        .label_style(font(style::TEXT_SIZE))
        .axis_desc_style(font(style::TITLE_SIZE))
        .x_desc(svg_text(&chart.x_label))
        .y_desc(svg_text(&chart.y_label))
        .y_labels(6)
        .y_label_formatter(&format_y);
    if chart.categories.is_some() {
        mesh.x_labels(0);
    } else {
        mesh.x_labels(7).x_label_formatter(&format_x);
    }
    mesh.draw()?;

    if let Some(cats) = &chart.categories {
        for (i, c) in cats.iter().enumerate() {
            let (px, py) = ctx.backend_coord(&(i as f64, y_range.0));
            let style = font(style::TEXT_SIZE).pos(Pos::new(HPos::Center, VPos::Top));
            root.draw(&Text::new(short(c), (px, py + 8), style))?;
        }
    }

    // Reference lines first, so that data stand above them.
    for g in &chart.guides {
        let line = match g {
            Guide::Horizontal { y, .. } => vec![(x_range.0, *y), (x_range.1, *y)],
            Guide::Identity { .. } => {
                let lo = x_range.0.max(y_range.0);
                let hi = x_range.1.min(y_range.1);
                if lo >= hi {
                    continue;
                }
                vec![(lo, lo), (hi, hi)]
            }
        };
        ctx.draw_series(std::iter::once(PathElement::new(
            line,
            style::GUIDE.stroke_width(1),
        )))?;
    }
    for iv in &chart.intervals {
        let colour = style::colour(iv.group);
        let st = colour.stroke_width(2);
        ctx.draw_series(std::iter::once(PathElement::new(
            vec![(iv.x, iv.lower), (iv.x, iv.upper)],
            st,
        )))?;
        for end in [iv.lower, iv.upper] {
            ctx.draw_series(std::iter::once(
                EmptyElement::at((iv.x, end)) + PathElement::new(vec![(-7, 0), (7, 0)], st),
            ))?;
        }
    }
    for g in 0..chart.groups.len() {
        let pts = chart
            .points
            .iter()
            .filter(|p| p.group == g)
            .map(|p| (p.x, p.y));
        for (x, y) in pts {
            draw_marker(&mut ctx, (x, y), g)?;
        }
    }
    for c in &chart.curves {
        let (colour, width) = match c.group {
            Some(g) => (style::colour(g), 2),
            None => (style::GUIDE, 2),
        };
        ctx.draw_series(std::iter::once(PathElement::new(
            c.points.clone(),
            colour.stroke_width(width),
        )))?;
    }
    for iv in &chart.intervals {
        draw_marker(&mut ctx, (iv.x, iv.centre), iv.group)?;
    }
    legend(&legend_area, chart)
}

type Ctx<'a, 'b> = ChartContext<'b, SVGBackend<'a>, Cartesian2d<RangedCoordf64, RangedCoordf64>>;

fn draw_marker<'a>(ctx: &mut Ctx<'a, '_>, at: (f64, f64), group: usize) -> DrawResult<'a> {
    let colour = style::colour(group).filled();
    match style::shape(group).outline() {
        None => ctx.draw_series(std::iter::once(
            EmptyElement::at(at) + Circle::new((0, 0), style::MARKER, colour),
        ))?,
        Some(v) => ctx.draw_series(std::iter::once(
            EmptyElement::at(at) + Polygon::new(v, colour),
        ))?,
    };
    Ok(())
}

/// The legend, in its own column right of the panel so that it never covers data.
fn legend<'a>(area: &DrawingArea<SVGBackend<'a>, Shift>, chart: &Chart) -> DrawResult<'a> {
    let x = 8;
    let mut y = 30;
    if let Some(t) = &chart.legend_title {
        area.draw(&Text::new(
            short(t),
            (x, y),
            font(style::TITLE_SIZE).pos(Pos::new(HPos::Left, VPos::Center)),
        ))?;
        y += 24;
    }
    let label = font(style::TEXT_SIZE).pos(Pos::new(HPos::Left, VPos::Center));
    for (i, g) in chart.groups.iter().enumerate() {
        let colour = style::colour(i);
        if chart.group_lines {
            area.draw(&PathElement::new(
                vec![(x, y), (x + 28, y)],
                colour.stroke_width(2),
            ))?;
        }
        let at = (x + 14, y);
        match style::shape(i).outline() {
            None => area.draw(&Circle::new(at, style::MARKER, colour.filled()))?,
            Some(v) => area.draw(&Polygon::new(
                v.into_iter()
                    .map(|(a, b)| (a + at.0, b + at.1))
                    .collect::<Vec<_>>(),
                colour.filled(),
            ))?,
        }
        area.draw(&Text::new(short(g), (x + 36, y), label.clone()))?;
        y += 22;
    }
    let neutral = chart.neutral_curve_label.iter();
    let guides = chart.guides.iter().map(|g| match g {
        Guide::Horizontal { label, .. } | Guide::Identity { label } => label,
    });
    for (i, text) in neutral.chain(guides).enumerate() {
        if i == 0 && !chart.groups.is_empty() {
            y += 8;
        }
        // The neutral curve (first, if any) is drawn 2 px wide, reference lines 1 px.
        let width = if i == 0 && chart.neutral_curve_label.is_some() {
            2
        } else {
            1
        };
        area.draw(&PathElement::new(
            vec![(x, y), (x + 28, y)],
            style::GUIDE.stroke_width(width),
        ))?;
        area.draw(&Text::new(short(text), (x + 36, y), label.clone()))?;
        y += 22;
    }
    Ok(())
}

/// A user's text (a name, a level, a unit) as the text of an SVG element: hidden characters
/// made visible ([`crate::report::visible`]), which also keeps out the control characters XML
/// does not allow; plotters escapes `<`, `&` and quotes itself.
fn svg_text(s: &str) -> String {
    crate::report::visible::visible(s).into_owned()
}

/// A label, as [`svg_text`], cut to [`MAX_LABEL_CHARS`] characters.
fn short(s: &str) -> String {
    let s = svg_text(s);
    if s.chars().count() <= MAX_LABEL_CHARS {
        s
    } else {
        let mut t: String = s.chars().take(MAX_LABEL_CHARS - 1).collect();
        t.push('…');
        t
    }
}

/// Ticks per axis that plotters is asked for; the step between ticks is about the range
/// divided by this.
const TICKS: f64 = 6.0;

/// Decimals that tell ticks apart on an axis over `range`: one more than the order of
/// magnitude of the tick step needs, at most [`MAX_DECIMALS`].
fn decimals(range: (f64, f64)) -> usize {
    let step = (range.1 - range.0) / TICKS;
    if !(step.is_finite() && step > 0.0) {
        return 0;
    }
    (1.0 - step.log10().floor()).clamp(0.0, MAX_DECIMALS as f64) as usize
}

/// Width of the band left of the panel: the axis title plus the longest tick label, at
/// about [`CHAR_WIDTH`] pixels a character.
fn y_label_width(range: (f64, f64), d: usize) -> u32 {
    let chars = [range.0, range.1]
        .iter()
        .map(|v| format!("{v:.d$}").len())
        .max()
        .unwrap_or(1);
    (34 + CHAR_WIDTH * chars as u32).min(160)
}

/// Mean advance of a tick-label character (digits of DejaVu Sans at the tick size).
const CHAR_WIDTH: u32 = 8;

/// Most decimals of a tick label; an axis finer than that is one covey does not meet.
const MAX_DECIMALS: usize = 12;

/// A tick label with `d` decimals, trailing zeros dropped, never "-0".
fn tick(v: f64, d: usize) -> String {
    let s = format!("{v:.d$}");
    let s = if s.contains('.') {
        s.trim_end_matches('0').trim_end_matches('.').to_string()
    } else {
        s
    };
    if s == "-0" {
        "0".to_string()
    } else {
        s
    }
}

/// The x and y ranges of everything drawn, padded.
fn ranges(chart: &Chart) -> ((f64, f64), (f64, f64)) {
    let mut xs: Vec<f64> = Vec::new();
    let mut ys: Vec<f64> = Vec::new();
    for p in &chart.points {
        xs.push(p.x);
        ys.push(p.y);
    }
    for c in &chart.curves {
        for &(x, y) in &c.points {
            xs.push(x);
            ys.push(y);
        }
    }
    for iv in &chart.intervals {
        xs.push(iv.x);
        ys.extend([iv.lower, iv.upper, iv.centre]);
    }
    for g in &chart.guides {
        if let Guide::Horizontal { y, .. } = g {
            ys.push(*y);
        }
    }
    let x = match &chart.categories {
        Some(c) => (-0.5, c.len().max(1) as f64 - 0.5),
        None => padded(&xs),
    };
    let mut y = padded(&ys);
    if chart.y_from_zero {
        y.0 = 0.0;
    }
    (x, y)
}

fn padded(v: &[f64]) -> (f64, f64) {
    let mut lo = f64::INFINITY;
    let mut hi = f64::NEG_INFINITY;
    for &x in v.iter().filter(|x| x.is_finite()) {
        lo = lo.min(x);
        hi = hi.max(x);
    }
    if lo > hi {
        return (0.0, 1.0);
    }
    let w = hi - lo;
    if w <= f64::EPSILON * lo.abs().max(1.0) {
        let d = (lo.abs() * 0.1).max(1.0);
        return (lo - d, hi + d);
    }
    (lo - PAD * w, hi + PAD * w)
}
