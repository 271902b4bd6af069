//! Figures: every SVG of the figures fixture is well-formed XML, renders to an image that
//! is not blank, is the same byte for byte on a second run, gives each level its own marker
//! shape, and stays under 1 MB however many rows the data have.

use std::collections::{BTreeMap, BTreeSet};
use std::path::Path;

use covey::pipeline::{self, RunOptions};
use covey::plot::style;
use covey::world::{FsWorld, MemoryWorld};
use resvg::tiny_skia::{Pixmap, Transform};
use resvg::usvg::{self, roxmltree};

/// The largest SVG a figure may be, in bytes.
const MAX_SVG_BYTES: usize = 1 << 20;

/// Rows of the generated large data set.
const BIG_ROWS: usize = 200_000;

fn fixture_figures() -> Vec<(String, String)> {
    let dir = Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/fixtures");
    let text = std::fs::read_to_string(dir.join("figures.md")).unwrap_or_default();
    let world = FsWorld::new(&dir, false);
    let run = pipeline::run(&text, "figures.md", &world, RunOptions::default())
        .unwrap_or_else(|u| panic!("figures.md does not run:\n{}", u.errors.join("\n")));
    run.figures
}

/// Renders an SVG with resvg (the embedded font loaded, so text is drawn too) and returns
/// the number of pixels that are neither the page colour nor the panel colour: what the
/// axes, text and data paint.
fn painted_pixels(svg: &str) -> usize {
    let mut opt = usvg::Options::default();
    opt.fontdb_mut().load_font_data(style::FONT_BYTES.to_vec());
    let tree = usvg::Tree::from_str(svg, &opt).unwrap_or_else(|e| panic!("usvg: {e}"));
    let size = tree.size().to_int_size();
    let mut pixmap = Pixmap::new(size.width(), size.height()).expect("pixmap");
    resvg::render(&tree, Transform::default(), &mut pixmap.as_mut());
    let plain = |c: plotters::style::RGBColor| (c.0, c.1, c.2, 255u8);
    let (page, panel) = (plain(style::PAGE), plain(style::PANEL));
    pixmap
        .pixels()
        .iter()
        .map(|p| (p.red(), p.green(), p.blue(), p.alpha()))
        .filter(|p| *p != page && *p != panel)
        .count()
}

#[test]
fn every_fixture_figure_parses_and_is_not_blank() {
    let figures = fixture_figures();
    assert_eq!(figures.len(), 12, "the fixture draws twelve figures");
    for (path, svg) in &figures {
        roxmltree::Document::parse(svg).unwrap_or_else(|e| panic!("{path}: not XML: {e}"));
        let painted = painted_pixels(svg);
        // Axes, labels, legend and data together paint thousands of pixels; a figure
        // that lost its data or its text would fall far below this.
        assert!(painted > 3_000, "{path}: only {painted} pixels painted");
        assert!(svg.len() < MAX_SVG_BYTES, "{path}: {} bytes", svg.len());
    }
}

#[test]
fn figures_are_byte_identical_across_runs() {
    let a = fixture_figures();
    let b = fixture_figures();
    assert_eq!(a, b);
}

/// The marker signature of each palette colour: element name and the marker's vertices
/// relative to its first vertex (or the radius of a circle).
fn marker_shapes(svg: &str) -> BTreeMap<String, BTreeSet<String>> {
    let doc = roxmltree::Document::parse(svg).expect("XML");
    let palette: BTreeSet<String> = style::PALETTE
        .iter()
        .map(|c| format!("#{:02X}{:02X}{:02X}", c.0, c.1, c.2))
        .collect();
    let mut out: BTreeMap<String, BTreeSet<String>> = BTreeMap::new();
    for node in doc.descendants() {
        let Some(fill) = node.attribute("fill") else {
            continue;
        };
        let fill = fill.to_uppercase();
        if !palette.contains(&fill) {
            continue;
        }
        let sig = match node.tag_name().name() {
            "circle" => format!("circle r={}", node.attribute("r").unwrap_or("")),
            "polygon" => {
                let pts: Vec<(i64, i64)> = node
                    .attribute("points")
                    .unwrap_or("")
                    .split_whitespace()
                    .filter_map(|p| {
                        let (x, y) = p.split_once(',')?;
                        Some((x.parse::<f64>().ok()? as i64, y.parse::<f64>().ok()? as i64))
                    })
                    .collect();
                let (x0, y0) = pts.first().copied().unwrap_or((0, 0));
                let rel: Vec<String> = pts
                    .iter()
                    .map(|(x, y)| format!("{},{}", x - x0, y - y0))
                    .collect();
                format!("polygon {}", rel.join(" "))
            }
            "rect" => format!(
                "rect {}x{}",
                node.attribute("width").unwrap_or(""),
                node.attribute("height").unwrap_or("")
            ),
            _ => continue,
        };
        out.entry(fill).or_default().insert(sig);
    }
    out
}

/// Greyscale proxy: in the figures with four levels, each level's colour is drawn with
/// exactly one marker shape, and the four shapes differ.
#[test]
fn each_level_has_its_own_marker_shape() {
    let figures = fixture_figures();
    // block2-1 lines by oven, block2-7 quantiles by oven, block2-11 groups by oven.
    for name in ["block2-1.svg", "block2-7.svg", "block2-11.svg"] {
        let Some((_, svg)) = figures.iter().find(|(p, _)| p.ends_with(name)) else {
            panic!("no figure {name}");
        };
        let shapes = marker_shapes(svg);
        assert_eq!(
            shapes.len(),
            4,
            "{name}: four level colours, got {shapes:?}"
        );
        let mut all = BTreeSet::new();
        for (colour, s) in &shapes {
            assert_eq!(s.len(), 1, "{name}: colour {colour} has shapes {s:?}");
            all.extend(s.iter().cloned());
        }
        assert_eq!(all.len(), 4, "{name}: shapes are not distinct: {shapes:?}");
    }
}

/// A large invented data set, generated here: seven levels (so that every marker shape is
/// used), a covariate and a response from a fixed formula with a deterministic wobble.
fn big_csv() -> Vec<u8> {
    let mut s = String::from("g,x,y\n");
    for i in 0..BIG_ROWS {
        let g = i % 7;
        let x = (i as f64 * 0.618_033_988_749_894_8).fract() * 100.0;
        let wobble = ((i as f64) * 12.9898).sin() * 3.0;
        let y = 10.0 + 0.5 * x + g as f64 + wobble;
        s.push_str(&format!("L{g},{x:.4},{y:.4}\n"));
    }
    s.into_bytes()
}

#[test]
fn figures_stay_small_at_200k_rows() {
    let doc = "```covey\nload \"d.csv\"\nfactor g\nmodel m: y on g + x\nplot lines m\nplot residuals m\nplot quantiles m\nplot means m\nplot influence m\nplot groups m\n```\n";
    let world = MemoryWorld::new().with("d.csv", big_csv());
    let run = pipeline::run(doc, "doc.md", &world, RunOptions::default())
        .unwrap_or_else(|u| panic!("{}", u.errors.join("\n")));
    assert!(run.errors.is_empty(), "{}", run.errors.join("\n"));
    assert_eq!(run.figures.len(), 6);
    for (path, svg) in &run.figures {
        assert!(
            svg.len() < MAX_SVG_BYTES,
            "{path}: {} bytes at {BIG_ROWS} rows",
            svg.len()
        );
    }
    // The captions say that points were thinned.
    assert!(
        run.rendered.contains("points shown") && run.rendered.contains("consecutive rows"),
        "captions do not mention thinning:\n{}",
        run.rendered
    );
}

// ------------------------------------------------ many levels with long names

/// Invented data: `levels` varieties named `variety number 1`, `variety number 2`, ..., a
/// covariate and a response from a fixed formula with a deterministic wobble.
fn many_levels_csv(levels: usize) -> Vec<u8> {
    let mut s = String::from("variety,x,y\n");
    for i in 0..20 * levels {
        let g = i % levels;
        let x = (i as f64 * 0.618_033_988_749_894_8).fract() * 50.0;
        let y = 10.0 + 0.4 * x + 0.7 * g as f64 + (i as f64 * 12.9898).sin() * 2.0;
        s.push_str(&format!("variety number {},{x:.3},{y:.3}\n", g + 1));
    }
    s.into_bytes()
}

/// The figures of a document that draws every figure by `variety` of [`many_levels_csv`],
/// and the rendering (captions).
fn many_level_figures(levels: usize, kinds: &[&str]) -> (Vec<(String, String)>, String) {
    let mut doc =
        String::from("```covey\nload \"d.csv\"\nfactor variety\nmodel m: y on variety + x\n");
    for k in kinds {
        doc.push_str(&format!("plot {k} m for variety\n"));
    }
    doc.push_str("```\n");
    let world = MemoryWorld::new().with("d.csv", many_levels_csv(levels));
    let run = pipeline::run(&doc, "doc.md", &world, RunOptions::default())
        .unwrap_or_else(|u| panic!("{}", u.errors.join("\n")));
    assert!(run.errors.is_empty(), "{}", run.errors.join("\n"));
    assert_eq!(run.figures.len(), kinds.len());
    (run.figures, run.rendered)
}

/// A text element's box in the SVG, in pixels: what its attributes and its text make of it,
/// measured with covey's own [`covey::plot::chart::text_width`], as the layout measures it.
#[derive(Debug, Clone)]
struct TextBox {
    text: String,
    x0: f64,
    y0: f64,
    x1: f64,
    y1: f64,
}

fn text_boxes(svg: &str) -> (Vec<TextBox>, (f64, f64)) {
    let doc = roxmltree::Document::parse(svg).expect("XML");
    let root = doc.root_element();
    let num = |n: roxmltree::Node, a: &str| -> f64 {
        n.attribute(a)
            .and_then(|v| v.parse().ok())
            .unwrap_or_else(|| panic!("<{}> without a number {a}", n.tag_name().name()))
    };
    let size = (num(root, "width"), num(root, "height"));
    let mut out = Vec::new();
    for node in doc.descendants().filter(|n| n.has_tag_name("text")) {
        let text: String = node
            .descendants()
            .filter(|n| n.is_text())
            .filter_map(|n| n.text())
            .collect::<String>()
            // plotters puts the text on a line of its own.
            .trim_matches('\n')
            .to_string();
        let (x, y, em) = (num(node, "x"), num(node, "y"), num(node, "font-size"));
        // plotters writes its text size divided by 1.24 as the SVG's font-size.
        let w = covey::plot::chart::text_width(&text, em * 1.24);
        let (x0, x1) = match node.attribute("text-anchor") {
            Some("middle") => (x - w / 2.0, x + w / 2.0),
            Some("end") => (x - w, x),
            _ => (x, x + w),
        };
        let (y0, y1) = match node.attribute("dy") {
            Some("0.76em") => (y, y + em),
            Some("-0.5ex") => (y - em, y),
            _ => (y - em / 2.0, y + em / 2.0),
        };
        let corners = [(x0, y0), (x1, y0), (x0, y1), (x1, y1)];
        // rotate(A, cx, cy), A in 90, 180, 270: each corner turned about (cx, cy).
        let turned: Vec<(f64, f64)> = match node.attribute("transform") {
            None => corners.to_vec(),
            Some(t) => {
                let inner = t
                    .strip_prefix("rotate(")
                    .and_then(|t| t.strip_suffix(')'))
                    .unwrap_or_else(|| panic!("transform {t}"));
                let v: Vec<f64> = inner
                    .split(',')
                    .map(|p| p.trim().parse().expect("number"))
                    .collect();
                let (a, cx, cy) = (v[0].to_radians(), v[1], v[2]);
                corners
                    .iter()
                    .map(|&(px, py)| {
                        let (dx, dy) = (px - cx, py - cy);
                        (
                            cx + dx * a.cos() - dy * a.sin(),
                            cy + dx * a.sin() + dy * a.cos(),
                        )
                    })
                    .collect()
            }
        };
        let xs = turned.iter().map(|p| p.0);
        let ys = turned.iter().map(|p| p.1);
        out.push(TextBox {
            text,
            x0: xs.clone().fold(f64::INFINITY, f64::min),
            x1: xs.fold(f64::NEG_INFINITY, f64::max),
            y0: ys.clone().fold(f64::INFINITY, f64::min),
            y1: ys.fold(f64::NEG_INFINITY, f64::max),
        });
    }
    (out, size)
}

/// How many times `name` is written in full in `texts`: in one text element, or wrapped over
/// consecutive ones (joined by a space where the break was between words, directly where it
/// was inside a word).
fn written_in_full(name: &str, texts: &[TextBox]) -> usize {
    let mut count = 0;
    for start in 0..texts.len() {
        let mut joined = String::new();
        for t in texts.iter().skip(start).take(6) {
            let spaced = if joined.is_empty() {
                t.text.clone()
            } else {
                format!("{joined} {}", t.text)
            };
            let direct = format!("{joined}{}", t.text);
            if spaced == name || direct == name {
                count += 1;
                break;
            }
            if name.starts_with(&spaced) {
                joined = spaced;
            } else if name.starts_with(&direct) {
                joined = direct;
            } else {
                break;
            }
        }
    }
    count
}

/// Each marker's colour and shape: fill (or, for an open shape, stroke) colour from the
/// palette, and the element with its size or its vertices relative to the first one.
fn marker_encodings(svg: &str) -> BTreeSet<(String, String)> {
    let doc = roxmltree::Document::parse(svg).expect("XML");
    let palette: BTreeSet<String> = style::PALETTE
        .iter()
        .map(|c| format!("#{:02X}{:02X}{:02X}", c.0, c.1, c.2))
        .collect();
    let mut out = BTreeSet::new();
    for node in doc.descendants() {
        let fill = node.attribute("fill").unwrap_or("none").to_uppercase();
        let stroke = node.attribute("stroke").unwrap_or("none").to_uppercase();
        let (colour, open) = if palette.contains(&fill) {
            (fill, false)
        } else if fill == "NONE" && palette.contains(&stroke) {
            (stroke, true)
        } else {
            continue;
        };
        let points = |a: &str| -> Vec<(i64, i64)> {
            node.attribute(a)
                .unwrap_or("")
                .split_whitespace()
                .filter_map(|p| {
                    let (x, y) = p.split_once(',')?;
                    Some((x.parse::<f64>().ok()? as i64, y.parse::<f64>().ok()? as i64))
                })
                .collect()
        };
        let relative = |pts: &[(i64, i64)]| -> String {
            let (x0, y0) = pts.first().copied().unwrap_or((0, 0));
            pts.iter()
                .map(|(x, y)| format!("{},{}", x - x0, y - y0))
                .collect::<Vec<_>>()
                .join(" ")
        };
        let sig = match node.tag_name().name() {
            "circle" => format!("circle r={} open={open}", node.attribute("r").unwrap_or("")),
            "polygon" => format!("polygon {}", relative(&points("points"))),
            "polyline" if open => {
                let pts = points("points");
                // A marker's outline is closed and small; lines and intervals are not.
                let (xs, ys): (Vec<i64>, Vec<i64>) = pts.iter().copied().unzip();
                let span = |v: &[i64]| v.iter().max().unwrap_or(&0) - v.iter().min().unwrap_or(&0);
                if pts.len() < 4 || pts.first() != pts.last() || span(&xs) > 14 || span(&ys) > 14 {
                    continue;
                }
                format!("outline {}", relative(&pts))
            }
            _ => continue,
        };
        out.insert((colour, sig));
    }
    out
}

/// Twelve levels with long names: every level has its own colour and its own marker shape,
/// every name is written in full (in the legend, and on the axis of the figures of levels),
/// no text leaves the figure, and no two texts overlap.
#[test]
fn twelve_long_level_names_are_told_apart_in_full() {
    let kinds = ["lines", "means", "groups", "residuals"];
    let (figures, rendered) = many_level_figures(12, &kinds);
    assert!(!rendered.contains("repeat"), "no encoding repeats at 12");
    for ((path, svg), kind) in figures.iter().zip(kinds) {
        let encodings = marker_encodings(svg);
        let colours: BTreeSet<&String> = encodings.iter().map(|(c, _)| c).collect();
        let shapes: BTreeSet<&String> = encodings.iter().map(|(_, s)| s).collect();
        assert_eq!(colours.len(), 12, "{path}: colours {encodings:?}");
        assert_eq!(shapes.len(), 12, "{path}: shapes {encodings:?}");
        assert_eq!(
            encodings.len(),
            12,
            "{path}: a colour with two shapes: {encodings:?}"
        );

        let (texts, (w, h)) = text_boxes(svg);
        for t in &texts {
            assert!(!t.text.contains('…'), "{path}: cut label {:?}", t.text);
            assert!(
                t.x0 >= 0.0 && t.y0 >= 0.0 && t.x1 <= w && t.y1 <= h,
                "{path}: {t:?} leaves the {w} x {h} figure"
            );
        }
        for (i, a) in texts.iter().enumerate() {
            for b in texts.iter().skip(i + 1) {
                let apart = a.x1 <= b.x0 + 0.5
                    || b.x1 <= a.x0 + 0.5
                    || a.y1 <= b.y0 + 0.5
                    || b.y1 <= a.y0 + 0.5;
                assert!(apart, "{path}: {a:?} overlaps {b:?}");
            }
        }
        let on_axis = matches!(kind, "means" | "groups");
        for g in 1..=12 {
            let name = format!("variety number {g}");
            let want = if on_axis { 2 } else { 1 };
            assert_eq!(
                written_in_full(&name, &texts),
                want,
                "{path}: {name:?} in full"
            );
        }
    }
}

/// Beyond twelve levels the styles repeat: the caption says so, and each line is labelled at
/// its end (each level is named on the axis of the figures of levels), in full, with no
/// two texts overlapping.
#[test]
fn beyond_twelve_levels_lines_are_labelled_directly() {
    let kinds = ["lines", "means"];
    let (figures, rendered) = many_level_figures(14, &kinds);
    assert!(
        rendered.contains(
            "colours and marker shapes repeat after the 12th level, each line labelled at its end"
        ),
        "{rendered}"
    );
    assert!(
        rendered.contains("each level named on the axis"),
        "{rendered}"
    );
    for (path, svg) in &figures {
        let (texts, (w, h)) = text_boxes(svg);
        for (i, a) in texts.iter().enumerate() {
            assert!(
                a.x0 >= 0.0 && a.y0 >= 0.0 && a.x1 <= w && a.y1 <= h,
                "{path}: {a:?}"
            );
            for b in texts.iter().skip(i + 1) {
                let apart = a.x1 <= b.x0 + 0.5
                    || b.x1 <= a.x0 + 0.5
                    || a.y1 <= b.y0 + 0.5
                    || b.y1 <= a.y0 + 0.5;
                assert!(apart, "{path}: {a:?} overlaps {b:?}");
            }
        }
        for g in 1..=14 {
            let name = format!("variety number {g}");
            // The legend, and the line's end or the axis.
            assert_eq!(written_in_full(&name, &texts), 2, "{path}: {name:?}");
        }
    }
}

/// A scatter of points tells at most twelve levels apart: beyond, naming the factor is an
/// error that says what to do instead.
#[test]
fn points_by_more_than_twelve_levels_are_refused() {
    let doc = "```covey\nload \"d.csv\"\nfactor variety\nmodel m: y on variety + x\nplot residuals m for variety\n```\n";
    let world = MemoryWorld::new().with("d.csv", many_levels_csv(13));
    let run = pipeline::run(doc, "doc.md", &world, RunOptions::default())
        .unwrap_or_else(|u| panic!("{}", u.errors.join("\n")));
    let all = run.errors.join("\n");
    assert!(
        all.contains("13 levels") && all.contains("plot groups"),
        "{all}"
    );
}

/// A row of leverage 1 (the only row of its level) has a standardized residual and a Cook's
/// distance of 0/0: the quantile and influence figures leave it out and say so, instead of
/// drawing rounding noise divided by nearly zero.
#[test]
fn rows_of_leverage_one_are_left_out_and_said() {
    let mut csv = String::from("g,x,y\n");
    for i in 0..12 {
        let x = f64::from(i);
        let y = 3.0 + 0.5 * x + f64::from(i % 3) + (f64::from(i) * 1.7).sin();
        csv.push_str(&format!("{},{x},{y:.3}\n", ["a", "b"][i as usize % 2]));
    }
    csv.push_str("alone,4.5,9.25\n");
    let doc = "```covey\nload \"d.csv\"\nfactor g\nmodel m: y on g + x\nplot quantiles m\nplot influence m\n```\n";
    let world = MemoryWorld::new().with("d.csv", csv.into_bytes());
    let run = pipeline::run(doc, "doc.md", &world, RunOptions::default())
        .unwrap_or_else(|u| panic!("{}", u.errors.join("\n")));
    assert!(run.errors.is_empty(), "{}", run.errors.join("\n"));
    // However the Markdown escapes the parentheses.
    let plain = run.rendered.replace('\\', "");
    for what in [
        "standardized residual undefined",
        "Cook's distance undefined",
    ] {
        assert!(
            plain.contains(&format!("; 1 row with leverage 1 left out ({what})")),
            "{what}:\n{plain}"
        );
    }
    // The level `alone` (the third colour) has its marker in the legend and none in the panel.
    let third = style::PALETTE[2];
    let fill = format!("fill=\"#{:02X}{:02X}{:02X}\"", third.0, third.1, third.2);
    for (path, svg) in &run.figures {
        assert_eq!(
            svg.matches(&fill).count(),
            1,
            "{path}: the row of leverage 1 is drawn"
        );
    }
}
