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
/// Distance between the baselines of wrapped lines of a label, in pixels: the text size
/// ([`style::TEXT_SIZE`], about 12 pixels to the em in the SVG) with a little leading.
const LINE: i32 = 16;
/// Distance between the lines of a wrapped legend title ([`style::TITLE_SIZE`]).
const TITLE_LINE: i32 = 18;
/// Widest the legend column grows to give long level names a line each; beyond it, names
/// wrap. Never narrower than [`style::LEGEND_WIDTH`].
const LEGEND_MAX: u32 = 250;
/// Left edge of legend text, from the legend column's left (marker and line sample first).
const LEGEND_TEXT_X: i32 = 44;
/// Room kept right of legend text, in pixels.
const LEGEND_PAD: i32 = 8;
/// Least horizontal gap between neighbouring category labels, in pixels.
const LABEL_GAP: f64 = 8.0;
/// Most lines a category label wraps to before the labels are turned instead.
const MAX_FLAT_LINES: usize = 3;
/// Widest a direct label at the end of a line grows before it wraps, in pixels.
const DIRECT_MAX: f64 = 150.0;
/// Least height of the panel, in pixels: long turned labels or a long legend make the
/// figure taller rather than the panel flatter.
const MIN_PANEL: u32 = 260;
/// Height of the band under the panel when category labels take one line (tick labels or
/// categories, then the axis title), in pixels.
const X_AREA: u32 = 52;
/// Margins above and below the panel, in pixels.
const MARGIN_TOP: u32 = 18;
const MARGIN_BOTTOM: u32 = 10;
/// Margin right of the panel, in pixels (before any direct labels).
const MARGIN_RIGHT: u32 = 14;

/// Draws `chart` as an SVG document [`style::WIDTH`] pixels wide and [`style::HEIGHT`] high,
/// or higher when its legend, its turned category labels or its direct labels need the room:
/// no label is ever cut.
pub fn render(chart: &Chart) -> Result<String, PlotError> {
    if !style::font_ready() {
        return Err(PlotError::Font);
    }
    let layout = Layout::of(chart);
    let mut svg = String::new();
    {
        let root =
            SVGBackend::with_string(&mut svg, (style::WIDTH, layout.height)).into_drawing_area();
        draw(&root, chart, &layout).map_err(|e| PlotError::Drawing(e.to_string()))?;
        root.present()
            .map_err(|e| PlotError::Drawing(e.to_string()))?;
    }
    // The text grew by doubling; a document with many figures holds them all until written.
    svg.shrink_to_fit();
    Ok(svg)
}

/// Width in pixels of `text` at plotters' text size `size` in the embedded font, as plotters
/// lays it out (the sum of the glyphs' advances and kerning). Every wrapping and placing of
/// labels uses it; it is a little wider than the text drawn in the SVG (plotters scales the
/// font by its full height, the SVG by its em), so the room it leaves is never too small.
pub fn text_width(text: &str, size: f64) -> f64 {
    if text.is_empty() || !style::font_ready() {
        return 0.0;
    }
    (style::FONT, size)
        .into_font()
        .box_size(text)
        .map(|(w, _)| f64::from(w))
        // Only a font that failed to load has no size; then a wide guess per character.
        .unwrap_or(text.chars().count() as f64 * size)
}

/// `text` broken into lines no wider than `width` pixels at size `size`: between words where
/// it can, inside a word only when the word alone is wider. The lines joined give back the
/// text, less the spaces at the breaks.
pub fn wrap(text: &str, width: f64, size: f64) -> Vec<String> {
    let mut lines: Vec<String> = Vec::new();
    let mut line = String::new();
    for word in text.split(' ') {
        let joined = if line.is_empty() {
            word.to_string()
        } else {
            format!("{line} {word}")
        };
        if text_width(&joined, size) <= width {
            line = joined;
            continue;
        }
        if !line.is_empty() {
            lines.push(std::mem::take(&mut line));
        }
        // The word alone: broken inside when it does not fit a line by itself.
        for ch in word.chars() {
            let mut longer = line.clone();
            longer.push(ch);
            if !line.is_empty() && text_width(&longer, size) > width {
                lines.push(std::mem::replace(&mut line, ch.to_string()));
            } else {
                line = longer;
            }
        }
    }
    if !line.is_empty() || lines.is_empty() {
        lines.push(line);
    }
    lines
}

/// How the labels of a categorical axis stand.
#[derive(Debug, Clone, PartialEq)]
enum Categories {
    /// Level, each wrapped to the lines given, centred under its place.
    Flat(Vec<Vec<String>>),
    /// Turned a quarter turn, reading upwards, one line each, ending under their place.
    Turned(Vec<String>),
}

impl Categories {
    /// Height of the band the labels take under the panel, axis title included.
    fn band(&self) -> u32 {
        match self {
            Categories::Flat(l) => {
                let lines = l.iter().map(Vec::len).max().unwrap_or(1).max(1);
                X_AREA + LINE as u32 * (lines as u32 - 1)
            }
            Categories::Turned(l) => {
                let longest = l
                    .iter()
                    .map(|t| text_width(t, style::TEXT_SIZE))
                    .fold(0.0, f64::max);
                (X_AREA - LINE as u32 + longest.ceil() as u32).max(X_AREA)
            }
        }
    }
}

/// One legend entry or direct label: its wrapped text lines.
type Entry = Vec<String>;

/// Where things go, decided before anything is drawn, so that the figure can be made as high
/// as its labels need.
#[derive(Debug, Clone, PartialEq)]
struct Layout {
    height: u32,
    legend_width: u32,
    title: Vec<String>,
    groups: Vec<Entry>,
    others: Vec<Entry>,
    categories: Option<Categories>,
    /// Direct labels at the ends of lines (more groups than styles): each group's wrapped
    /// label, and the width of the gutter right of the panel that holds them.
    direct: Option<(Vec<Entry>, u32)>,
    y_area: u32,
}

impl Layout {
    fn of(chart: &Chart) -> Layout {
        let size = style::TEXT_SIZE;
        let labels: Vec<String> = chart.groups.iter().map(|g| svg_text(g)).collect();
        let others: Vec<String> = chart
            .neutral_curve_label
            .iter()
            .chain(chart.guides.iter().map(|g| match g {
                Guide::Horizontal { label, .. } | Guide::Identity { label } => label,
            }))
            .map(|t| svg_text(t))
            .collect();
        let title = chart.legend_title.as_deref().map(svg_text);
        let natural = labels
            .iter()
            .chain(&others)
            .map(|t| text_width(t, size) + f64::from(LEGEND_TEXT_X + LEGEND_PAD))
            .chain(
                title
                    .iter()
                    .map(|t| text_width(t, style::TITLE_SIZE) + 8.0 + f64::from(LEGEND_PAD)),
            )
            .fold(0.0, f64::max);
        let legend_width = (natural.ceil() as u32).clamp(style::LEGEND_WIDTH, LEGEND_MAX);
        let text_room = f64::from(legend_width) - f64::from(LEGEND_TEXT_X + LEGEND_PAD);
        let groups: Vec<Entry> = labels.iter().map(|t| wrap(t, text_room, size)).collect();
        let others: Vec<Entry> = others.iter().map(|t| wrap(t, text_room, size)).collect();
        let title = title
            .map(|t| {
                let room = f64::from(legend_width) - 8.0 - f64::from(LEGEND_PAD);
                wrap(&t, room, style::TITLE_SIZE)
            })
            .unwrap_or_default();

        let direct = (chart.groups.len() > style::STYLES && chart.group_lines).then(|| {
            let widest = labels
                .iter()
                .map(|t| text_width(t, size))
                .fold(0.0, f64::max)
                .min(DIRECT_MAX);
            let wrapped: Vec<Entry> = labels.iter().map(|t| wrap(t, widest, size)).collect();
            (wrapped, widest.ceil() as u32 + 12)
        });

        let (_, y_range) = ranges(chart);
        let y_area = y_label_width(y_range, decimals(y_range));
        let plot_width = style::WIDTH.saturating_sub(legend_width);
        let right = MARGIN_RIGHT + direct.as_ref().map_or(0, |d| d.1);
        let panel = f64::from(plot_width.saturating_sub(10 + right + y_area));
        let categories = chart.categories.as_ref().map(|c| category_layout(c, panel));

        // Heights: the legend's, the panel's least with the bands around it, and the panel
        // the direct labels need stacked.
        let mut legend_bottom = 30;
        if !title.is_empty() {
            legend_bottom += 24 + TITLE_LINE * (title.len() as i32 - 1);
        }
        for e in &groups {
            legend_bottom += 22 + LINE * (e.len() as i32 - 1);
        }
        if !groups.is_empty() && !others.is_empty() {
            legend_bottom += 8;
        }
        for e in &others {
            legend_bottom += 22 + LINE * (e.len() as i32 - 1);
        }
        let band = categories.as_ref().map_or(X_AREA, Categories::band);
        let direct_stack = direct.as_ref().map_or(0, |(d, _)| {
            d.iter().map(|e| LINE * e.len() as i32 + 2).sum::<i32>()
        });
        let least_panel = MIN_PANEL.max(direct_stack.max(0) as u32);
        let height = style::HEIGHT
            .max(legend_bottom.max(0) as u32)
            .max(MARGIN_TOP + MARGIN_BOTTOM + band + least_panel);
        Layout {
            height,
            legend_width,
            title,
            groups,
            others,
            categories,
            direct,
            y_area,
        }
    }
}

/// How `labels` stand under a panel `panel` pixels wide, one place each: on one line when
/// each fits its place, wrapped when every word fits and no label takes more than
/// [`MAX_FLAT_LINES`] lines, turned otherwise.
fn category_layout(labels: &[String], panel: f64) -> Categories {
    let size = style::TEXT_SIZE;
    let room = panel / labels.len().max(1) as f64 - LABEL_GAP;
    let texts: Vec<String> = labels.iter().map(|l| svg_text(l)).collect();
    let wrapped: Vec<Vec<String>> = texts.iter().map(|t| wrap(t, room, size)).collect();
    let words_fit = texts.iter().all(|t| {
        t.split(' ')
            .all(|w| w.is_empty() || text_width(w, size) <= room)
    });
    if words_fit && wrapped.iter().all(|l| l.len() <= MAX_FLAT_LINES) {
        Categories::Flat(wrapped)
    } else {
        Categories::Turned(texts)
    }
}

type DrawResult<'a> =
    Result<(), DrawingAreaErrorKind<<SVGBackend<'a> as DrawingBackend>::ErrorType>>;

fn font(size: f64) -> TextStyle<'static> {
    (style::FONT, size).into_font().color(&style::INK)
}

fn draw<'a>(
    root: &DrawingArea<SVGBackend<'a>, Shift>,
    chart: &Chart,
    layout: &Layout,
) -> DrawResult<'a> {
    root.fill(&style::PAGE)?;
    let split = style::WIDTH.saturating_sub(layout.legend_width);
    let (plot_area, legend_area) = root.split_horizontally(split);
    let (x_range, y_range) = ranges(chart);
    let x_decimals = decimals(x_range);
    let y_decimals = decimals(y_range);
    let band = layout.categories.as_ref().map_or(X_AREA, Categories::band);
    let gutter = layout.direct.as_ref().map_or(0, |d| d.1);

    let mut ctx = ChartBuilder::on(&plot_area)
        .margin_top(MARGIN_TOP)
        .margin_left(10)
        .margin_right(MARGIN_RIGHT + gutter)
        .margin_bottom(MARGIN_BOTTOM)
        .x_label_area_size(band)
        .y_label_area_size(layout.y_area)
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

    match &layout.categories {
        Some(Categories::Flat(labels)) => {
            for (i, lines) in labels.iter().enumerate() {
                let (px, py) = ctx.backend_coord(&(i as f64, y_range.0));
                let style = font(style::TEXT_SIZE).pos(Pos::new(HPos::Center, VPos::Top));
                for (k, line) in lines.iter().enumerate() {
                    let y = py + 8 + LINE * k as i32;
                    root.draw(&Text::new(line.clone(), (px, y), style.clone()))?;
                }
            }
        }
        Some(Categories::Turned(labels)) => {
            for (i, label) in labels.iter().enumerate() {
                let (px, py) = ctx.backend_coord(&(i as f64, y_range.0));
                let style = font(style::TEXT_SIZE)
                    .transform(FontTransform::Rotate270)
                    .pos(Pos::new(HPos::Right, VPos::Center));
                root.draw(&Text::new(label.clone(), (px, py + 8), style))?;
            }
        }
        None => {}
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
            draw_marker(root, &ctx, (x, y), g)?;
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
        draw_marker(root, &ctx, (iv.x, iv.centre), iv.group)?;
    }
    if let Some((labels, _)) = &layout.direct {
        direct_labels(root, &ctx, chart, labels, (x_range.1, y_range))?;
    }
    legend(&legend_area, chart, layout)
}

/// Each group's label at the right end of its line, in the gutter right of the panel, joined
/// to the line's end by a thin stroke in the group's colour; labels that would overlap are
/// moved apart, keeping their order from top to bottom.
fn direct_labels<'a>(
    root: &DrawingArea<SVGBackend<'a>, Shift>,
    ctx: &Ctx<'a, '_>,
    chart: &Chart,
    labels: &[Entry],
    (x_end, y_range): (f64, (f64, f64)),
) -> DrawResult<'a> {
    // The rightmost point of each group, in pixels.
    let mut ends: Vec<(usize, (i32, i32))> = Vec::new();
    for g in 0..chart.groups.len() {
        let curve_points = chart
            .curves
            .iter()
            .filter(|c| c.group == Some(g))
            .flat_map(|c| c.points.iter().copied());
        let interval_points = chart
            .intervals
            .iter()
            .filter(|iv| iv.group == g)
            .map(|iv| (iv.x, iv.centre));
        let end = curve_points
            .chain(interval_points)
            .filter(|(x, y)| x.is_finite() && y.is_finite())
            .max_by(|a, b| a.0.total_cmp(&b.0));
        if let Some(p) = end {
            ends.push((g, ctx.backend_coord(&p)));
        }
    }
    ends.sort_by_key(|&(g, (_, y))| (y, g));
    let (right, top) = ctx.backend_coord(&(x_end, y_range.1));
    let (_, bottom) = ctx.backend_coord(&(x_end, y_range.0));
    let height = |g: usize| LINE * labels.get(g).map_or(1, Vec::len) as i32;
    // The first line's middle of each label: each below the one before, then pulled up from
    // the bottom where the stack runs past the panel.
    let mut at: Vec<i32> = Vec::with_capacity(ends.len());
    let mut next = top + LINE / 2;
    for &(g, (_, y)) in &ends {
        let y = y.max(next);
        at.push(y);
        next = y + height(g) + 2;
    }
    let mut limit = bottom - LINE / 2;
    for (k, &(g, _)) in ends.iter().enumerate().rev() {
        if let Some(y) = at.get_mut(k) {
            let last_line = *y + height(g) - LINE;
            if last_line > limit {
                *y -= last_line - limit;
            }
            limit = *y - 2 - LINE;
        }
    }
    let text_x = right + 12;
    let style = font(style::TEXT_SIZE).pos(Pos::new(HPos::Left, VPos::Center));
    for (&(g, (px, py)), &y) in ends.iter().zip(&at) {
        root.draw(&PathElement::new(
            vec![(px, py), (right + 2, py), (text_x - 3, y)],
            style::colour(g).stroke_width(1),
        ))?;
        for (k, line) in labels.get(g).into_iter().flatten().enumerate() {
            root.draw(&Text::new(
                line.clone(),
                (text_x, y + LINE * k as i32),
                style.clone(),
            ))?;
        }
    }
    Ok(())
}

type Ctx<'a, 'b> = ChartContext<'b, SVGBackend<'a>, Cartesian2d<RangedCoordf64, RangedCoordf64>>;

/// The marker of `group` at data point `at`, drawn on the whole figure (`root`) so that a
/// marker at the panel's edge is not cut.
fn draw_marker<'a>(
    root: &DrawingArea<SVGBackend<'a>, Shift>,
    ctx: &Ctx<'a, '_>,
    at: (f64, f64),
    group: usize,
) -> DrawResult<'a> {
    marker(root, ctx.backend_coord(&at), group)
}

/// The marker of `group` centred at backend pixel `at`, drawn on `area`: filled, or an
/// outline for the open shapes.
fn marker<'a>(
    area: &DrawingArea<SVGBackend<'a>, Shift>,
    at: (i32, i32),
    group: usize,
) -> DrawResult<'a> {
    let shape = style::shape(group);
    let colour = style::colour(group);
    let (fill, outline) = (colour.filled(), colour.stroke_width(style::OPEN_STROKE));
    let (ox, oy) = area.get_base_pixel();
    let local = (at.0 - ox, at.1 - oy);
    let placed = |v: Vec<(i32, i32)>| -> Vec<(i32, i32)> {
        v.into_iter()
            .map(|(a, b)| (a + local.0, b + local.1))
            .collect()
    };
    match (shape.outline(), shape.is_open()) {
        (None, false) => area.draw(&Circle::new(local, style::MARKER, fill)),
        (None, true) => area.draw(&Circle::new(local, style::MARKER, outline)),
        (Some(v), false) => area.draw(&Polygon::new(placed(v), fill)),
        (Some(v), true) => {
            let mut closed = placed(v);
            if let Some(&first) = closed.first() {
                closed.push(first);
            }
            area.draw(&PathElement::new(closed, outline))
        }
    }
}

/// The legend, in its own column right of the panel so that it never covers data; long
/// names wrap onto further lines ([`Layout`]).
fn legend<'a>(
    area: &DrawingArea<SVGBackend<'a>, Shift>,
    chart: &Chart,
    layout: &Layout,
) -> DrawResult<'a> {
    let x = 8;
    let mut y = 30;
    if !layout.title.is_empty() {
        let style = font(style::TITLE_SIZE).pos(Pos::new(HPos::Left, VPos::Center));
        for (k, line) in layout.title.iter().enumerate() {
            area.draw(&Text::new(
                line.clone(),
                (x, y + TITLE_LINE * k as i32),
                style.clone(),
            ))?;
        }
        y += 24 + TITLE_LINE * (layout.title.len() as i32 - 1);
    }
    let label = font(style::TEXT_SIZE).pos(Pos::new(HPos::Left, VPos::Center));
    let (ox, oy) = area.get_base_pixel();
    for (i, lines) in layout.groups.iter().enumerate() {
        if chart.group_lines {
            area.draw(&PathElement::new(
                vec![(x, y), (x + 28, y)],
                style::colour(i).stroke_width(2),
            ))?;
        }
        marker(area, (ox + x + 14, oy + y), i)?;
        for (k, line) in lines.iter().enumerate() {
            area.draw(&Text::new(
                line.clone(),
                (LEGEND_TEXT_X, y + LINE * k as i32),
                label.clone(),
            ))?;
        }
        y += 22 + LINE * (lines.len() as i32 - 1);
    }
    for (i, lines) in layout.others.iter().enumerate() {
        if i == 0 && !layout.groups.is_empty() {
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
        for (k, line) in lines.iter().enumerate() {
            area.draw(&Text::new(
                line.clone(),
                (LEGEND_TEXT_X, y + LINE * k as i32),
                label.clone(),
            ))?;
        }
        y += 22 + LINE * (lines.len() as i32 - 1);
    }
    Ok(())
}

/// A user's text (a name, a level, a unit) as the text of an SVG element: hidden characters
/// made visible ([`crate::report::visible`]), which also keeps out the control characters XML
/// does not allow; plotters escapes `<`, `&` and quotes itself.
fn svg_text(s: &str) -> String {
    crate::report::visible::visible(s).into_owned()
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

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn wrapping_keeps_every_character_and_the_width() {
        let size = style::TEXT_SIZE;
        for (text, width) in [
            ("variety number 10", 80.0),
            ("variety number 10", 500.0),
            ("averyveryverylongwordwithoutanyspace and more", 60.0),
            ("", 40.0),
            ("a  b", 5.0),
        ] {
            let lines = wrap(text, width, size);
            let joined: String = lines.concat().replace(' ', "");
            assert_eq!(joined, text.replace(' ', ""), "{text:?} at {width}");
            for l in &lines {
                // A line is wider than asked only when it is one character.
                assert!(
                    text_width(l, size) <= width || l.chars().count() == 1,
                    "{l:?} of {text:?} at {width}"
                );
            }
        }
        assert_eq!(
            wrap("variety number 10", 500.0, size),
            ["variety number 10"]
        );
        assert_eq!(
            wrap("variety number 10", 80.0, size),
            ["variety", "number 10"]
        );
    }

    #[test]
    fn category_labels_stand_flat_wrap_or_turn() {
        let names = |n: usize, f: &dyn Fn(usize) -> String| (1..=n).map(f).collect::<Vec<_>>();
        let short = names(4, &|i| format!("L{i}"));
        assert!(
            matches!(category_layout(&short, 400.0), Categories::Flat(l) if l.iter().all(|x| x.len() == 1))
        );
        // Room for either word, not for both on one line.
        let two_words = names(4, &|i| format!("site number{i}"));
        let room = text_width("number4", style::TEXT_SIZE) + 2.0;
        let panel = 4.0 * (room + LABEL_GAP);
        assert!(
            matches!(category_layout(&two_words, panel), Categories::Flat(l) if l.iter().all(|x| x.len() == 2))
        );
        let long = names(12, &|i| format!("variety number {i}"));
        assert!(matches!(
            category_layout(&long, 400.0),
            Categories::Turned(_)
        ));
    }
}
