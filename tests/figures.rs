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
