//! Names that cannot break output: documents, data files, columns and levels whose names hold
//! Markdown, HTML and URL syntax, control characters and bidirectional overrides are rendered
//! by the release binary, and the rendering is read back the way readers read it: the
//! Markdown with comrak, the figures with an XML parser (usvg), the page as HTML text.
//!
//! The data are invented for these tests.

use std::path::{Path, PathBuf};
use std::process::Command;

use comrak::nodes::{AstNode, NodeValue};
use comrak::{parse_document, Arena, Options};
use covey::report::visible::is_hidden;

/// A scratch folder under the target directory, fresh for each test.
fn scratch(name: &str) -> PathBuf {
    let dir = Path::new(env!("CARGO_TARGET_TMPDIR"))
        .join("names")
        .join(name);
    let _ = std::fs::remove_dir_all(&dir);
    std::fs::create_dir_all(&dir).unwrap_or_else(|e| panic!("{}: {e}", dir.display()));
    dir
}

fn read(path: &Path) -> String {
    std::fs::read_to_string(path).unwrap_or_else(|e| panic!("{}: {e}", path.display()))
}

fn covey(dir: &Path, args: &[&str]) -> (i32, String) {
    let out = Command::new(env!("CARGO_BIN_EXE_covey"))
        .args(args)
        .current_dir(dir)
        .output()
        .unwrap_or_else(|e| panic!("cannot run covey: {e}"));
    (
        out.status.code().unwrap_or(-1),
        String::from_utf8_lossy(&out.stderr).into_owned(),
    )
}

/// Invented data: two groups, a covariate and a response.
fn data(levels: &[&str]) -> String {
    let mut s = String::from("group,x,y\n");
    for i in 0..24 {
        let k = i % levels.len();
        let level = levels.get(k).copied().unwrap_or("A").replace('"', "\"\"");
        let x = 1.0 + (i as f64) * 0.37 % 5.0;
        let y = 3.0 + 0.8 * x + k as f64 + ((i * 7) % 5) as f64 * 0.21;
        s.push_str(&format!("\"{level}\",{x:.3},{y:.3}\n"));
    }
    s
}

/// comrak's options as covey reads documents (tables on).
fn options() -> Options<'static> {
    let mut o = Options::default();
    o.extension.table = true;
    o
}

/// The text a node shows: its text and code descendants.
fn text_of<'a>(node: &'a AstNode<'a>) -> String {
    let mut s = String::new();
    for d in node.descendants() {
        match &d.data().value {
            NodeValue::Text(t) => s.push_str(t),
            NodeValue::Code(c) => s.push_str(&c.literal),
            _ => {}
        }
    }
    s
}

/// The image addresses of a Markdown text, as comrak reads them.
fn images(markdown: &str) -> Vec<String> {
    let arena = Arena::new();
    let root = parse_document(&arena, markdown, &options());
    root.descendants()
        .filter_map(|n| match &n.data().value {
            NodeValue::Image(link) => Some(link.url.clone()),
            _ => None,
        })
        .collect()
}

/// Every raw HTML node of a Markdown text that is not one of covey's markers.
fn raw_html(markdown: &str) -> Vec<String> {
    let arena = Arena::new();
    let root = parse_document(&arena, markdown, &options());
    root.descendants()
        .filter_map(|n| match &n.data().value {
            NodeValue::HtmlBlock(b) if !b.literal.starts_with("<!-- covey:") => {
                Some(b.literal.clone())
            }
            NodeValue::HtmlInline(h) if !h.starts_with("<!-- covey:") => Some(h.clone()),
            _ => None,
        })
        .collect()
}

/// The cells of every row of the first table of a Markdown text, as comrak reads them.
fn first_table(markdown: &str) -> Vec<Vec<String>> {
    let arena = Arena::new();
    let root = parse_document(&arena, markdown, &options());
    let Some(table) = root
        .descendants()
        .find(|n| matches!(n.data().value, NodeValue::Table(_)))
    else {
        return Vec::new();
    };
    table
        .children()
        .map(|row| row.children().map(text_of).collect())
        .collect()
}

/// Characters a reader could not see, left in a text (line breaks and tabs of the text's
/// own layout aside).
fn hidden_left(text: &str) -> Vec<String> {
    text.chars()
        .filter(|&c| is_hidden(c) && c != '\n' && c != '\t')
        .map(|c| format!("U+{:04X}", u32::from(c)))
        .collect()
}

/// Decodes %XX escapes (what a browser does to a relative address before asking the file
/// system for it).
fn percent_decoded(url: &str) -> String {
    percent_encoding::percent_decode_str(url)
        .decode_utf8()
        .map(|s| s.into_owned())
        .unwrap_or_else(|e| panic!("{url}: {e}"))
}

const FIGURE_DOC: &str = "# Names\n\n\
    Prose with an outside image: ![logo](https://example.com/logo.png).\n\n\
    ```covey\n\
    load \"DATA\" as d\n\
    factor group\n\
    model m: y on group + x\n\
    plot lines m\n\
    plot groups m\n\
    ```\n";

#[test]
fn figure_links_survive_any_document_name() {
    let names = [
        "my doc (v2) #1 %20 é",
        "https:evil.example",
        "javascript:alert(1)",
        "<b>bold",
        "a](b) [c",
        "tab\tand\u{1b}esc",
        "back\\slash",
        "日本語 レポート",
    ];
    let data_file = "d|<b>.csv";
    for (k, name) in names.iter().enumerate() {
        let dir = scratch(&format!("doc-{k}"));
        std::fs::write(dir.join(data_file), data(&["A", "B"])).unwrap_or_else(|e| panic!("{e}"));
        let doc = format!("{name}.md");
        std::fs::write(dir.join(&doc), FIGURE_DOC.replace("DATA", data_file))
            .unwrap_or_else(|e| panic!("{e}"));
        let (code, err) = covey(&dir, &["render", "--html", &doc]);
        assert_eq!(code, 0, "{name:?}: {err}");
        let md = read(&dir.join(format!("{name}.rendered.md")));

        // Both figures are images in the Markdown as comrak reads it, and their addresses,
        // decoded, are the files covey wrote.
        let figures: Vec<String> = images(&md)
            .into_iter()
            .filter(|u| !u.starts_with("https://example.com"))
            .collect();
        assert_eq!(figures.len(), 2, "{name:?}: images {figures:?}\n{md}");
        for (i, url) in figures.iter().enumerate() {
            assert!(
                !url.contains(':') && !url.starts_with('/'),
                "{name:?}: {url} is not a relative address"
            );
            let path = percent_decoded(url);
            assert_eq!(path, format!("{name}.figures/block1-{}.svg", i + 1));
            assert!(dir.join(&path).is_file(), "{name:?}: {path} is missing");
        }
        // No raw HTML but covey's markers, whatever the names hold.
        assert_eq!(raw_html(&md), Vec::<String>::new(), "{name:?}");
        // The provenance table keeps its four cells, the data file's name in the first.
        let rows = first_table(&md);
        assert_eq!(
            rows.get(1).map(Vec::len),
            Some(4),
            "{name:?}: provenance rows {rows:?}"
        );
        assert_eq!(
            rows.get(1).and_then(|r| r.first()).map(String::as_str),
            Some(data_file)
        );
        assert_eq!(hidden_left(&md), Vec::<String>::new(), "{name:?}");

        // The page holds both figures inline, no image element, and the outside image as a
        // link to it.
        let html = read(&dir.join(format!("{name}.rendered.html")));
        assert_eq!(html.matches("<svg").count(), 2, "{name:?}");
        assert!(
            !html.contains("<img"),
            "{name:?}: an image element:\n{html}"
        );
        assert!(
            html.contains("<a href=\"https://example.com/logo.png\">logo</a>"),
            "{name:?}"
        );
        assert!(
            html.contains("img-src data:;"),
            "{name:?}: the policy allows outside images"
        );
        assert_eq!(hidden_left(&html), Vec::<String>::new(), "{name:?}");
    }
}

#[test]
fn user_strings_are_escaped_for_every_context() {
    let dir = scratch("levels");
    let levels = [
        "esc\u{1b}[31mred",
        "\u{202e}evil",
        "iso\u{2066}late\u{2069}",
        "a|b",
        "<b>bold</b>",
        "`tick`",
        "back\\|slash",
        "new\nline",
    ];
    let csv = data(&levels).replacen("group,x,y", "group,x,\"<i>y</i>|\"", 1);
    std::fs::write(dir.join("d.csv"), csv).unwrap_or_else(|e| panic!("{e}"));
    let doc = "# Levels\n\n```covey\nload \"d.csv\" as d\nfactor group\nshow d\n\
               table summary \"<i>y</i>|\" by group\n\
               model m: \"<i>y</i>|\" on group + x\ntable means m for group\n\
               check m\nplot lines m\nplot groups m\n```\n";
    std::fs::write(dir.join("doc.md"), doc).unwrap_or_else(|e| panic!("{e}"));
    let (code, err) = covey(&dir, &["render", "--html", "doc.md"]);
    assert_eq!(code, 0, "{err}");
    // Warnings on the terminal show the names visibly too.
    assert_eq!(hidden_left(&err), Vec::<String>::new(), "{err}");

    let md = read(&dir.join("doc.rendered.md"));
    let html = read(&dir.join("doc.rendered.html"));
    let svgs: Vec<String> = (1..=2)
        .map(|i| read(&dir.join(format!("doc.figures/block1-{i}.svg"))))
        .collect();
    for (what, text) in [("markdown", &md), ("html", &html)]
        .into_iter()
        .chain(svgs.iter().map(|s| ("svg", s)))
    {
        assert_eq!(hidden_left(text), Vec::<String>::new(), "{what}");
        assert!(text.contains("U+001B"), "{what}: ESC not shown");
        assert!(text.contains("U+202E"), "{what}: U+202E not shown");
    }
    // Every figure is well-formed XML (an ESC would not be).
    for svg in &svgs {
        let opt = resvg::usvg::Options::default();
        if let Err(e) = resvg::usvg::Tree::from_str(svg, &opt) {
            panic!("an SVG does not parse: {e}");
        }
    }
    assert_eq!(raw_html(&md), Vec::<String>::new());
    // The summary table: a row per level, each with as many cells as the header, the level
    // names shown as written (hidden characters by their code points).
    let summary = md
        .split("**Summary of")
        .nth(1)
        .unwrap_or_else(|| panic!("no summary table:\n{md}"));
    let rows = first_table(summary);
    assert_eq!(rows.len(), 1 + levels.len(), "{rows:?}");
    let width = rows.first().map_or(0, Vec::len);
    assert!(rows.iter().all(|r| r.len() == width), "{rows:?}");
    let shown: Vec<&str> = rows
        .iter()
        .skip(1)
        .filter_map(|r| r.first().map(String::as_str))
        .collect();
    assert_eq!(
        shown,
        vec![
            "esc<U+001B>[31mred",
            "<U+202E>evil",
            "iso<U+2066>late<U+2069>",
            "a|b",
            "<b>bold</b>",
            "`tick`",
            "back\\|slash",
            "new<U+000A>line",
        ]
    );
    // In the page, markup in names is text, never elements.
    let lower = html.to_ascii_lowercase();
    assert!(!lower.contains("<b>") && !lower.contains("<i>"), "{html}");
    assert!(html.contains("&lt;b&gt;bold&lt;/b&gt;"));
    // The JSON export keeps the names exactly.
    let (code, err) = covey(&dir, &["render", "--json", "out.json", "doc.md"]);
    assert_eq!(code, 0, "{err}");
    let json = read(&dir.join("out.json"));
    assert!(json.contains("esc\\u001b[31mred"), "{json}");
    assert!(json.contains("\u{202e}evil"));
}

#[test]
fn terminal_messages_show_hidden_characters_in_names() {
    // A document whose name holds a right-to-left override and an escape: what covey prints
    // about it names it visibly, and no character a terminal would obey or hide gets through.
    let dir = scratch("terminal");
    let name = "trial\u{202e}dm.\u{1b}[2J.md";
    std::fs::write(dir.join(name), "# Trial\n\n```covey\nparam a = 1\n```\n")
        .unwrap_or_else(|e| panic!("{e}"));
    let (code, stderr) = covey(&dir, &["render", name]);
    assert_eq!(code, 0, "{stderr}");
    assert!(
        stderr.contains("trial<U+202E>dm.<U+001B>[2J.md"),
        "{stderr}"
    );
    assert!(
        hidden_left(&stderr).is_empty(),
        "{:?}",
        hidden_left(&stderr)
    );
}
