//! Property tests over generated documents, and a no-panic test over arbitrary Markdown-ish text.

use proptest::prelude::*;

use super::*;

/// Prose lines, including Unicode, tabs and text that looks like covey's markers (but never a
/// marker line at a place where covey would read it as one).
const PROSE: &[&str] = &[
    "Some prose about the analysis.",
    "Grüße, ☃ and 統計\twith a tab",
    "\tindented by a tab",
    "a line with `code` and *emphasis* and [a link](http://example.com)",
    "see <!-- covey:output --> inline",
    "text <!-- covey:output-end --> inline",
    "  <!-- covey:output-end -->",
    "<!-- covey:outputs -->",
    "&lt;!-- covey:output --&gt;",
    "<!-- covey:provenance --> with more",
    "| a | b |",
    "~~struck~~ and https://example.com",
    "[^1]",
    "a value @[fit m n] here, and @[anova m \"x by y\" p].",
    "@[means m A mean] begins the line",
    "  @[means m A se] after spaces",
    "in a code span `@[fit m n]` and ``@[fit m p]``",
    "escaped @\\[fit m n] and unclosed @[fit m",
    "<wbr>@[fit m n] after a guard, x<wbr>@[fit m p] mid-line",
    "near <!-- covey:output --> @[fit m n] a marker",
    "| @[means m A mean] | b |",
    "*@[fit m sigma]* and [@[fit m n]](http://example.com) and ![@[fit m n]](i.png)",
    "a ` b @[fit m n] c",
    "<!-- covey:value-end --> text",
    "a <!-- covey:value @[fit m n] -->broken",
];

/// Lines for inside code blocks (none of them closes a fence).
const CODE: &[&str] = &[
    "load data.csv",
    "\tmodel y = group + x",
    "ü = 1 # ✓",
    "",
    "  indented",
    "``",
    "<!-- covey:output-end -->",
    "<!-- covey:output -->",
    "---",
    "@[fit m n]",
    "<!-- covey:value @[fit m n] -->1<!-- covey:value-end -->",
];

/// Output bodies (without markers, so split gives them back exactly).
const BODIES: &[&str] = &[
    "",
    "result\n",
    "| term | SS |\n|---|---|\n| x | 1.5 |\n",
    "```\nunclosed code block\n",
    "````text\nlong fence\n",
    "<div>\nhtml without end\n",
    "> quoted ✓\n> more\n",
    "- item\n\n  ```covey\n  nested\n  ```\n",
    "Grüße\t統計\n\n---\n",
];

/// Values shown for references, including awkward ones that must not break their region.
const VALUES: &[&str] = &[
    "1.5",
    "< .001",
    "—",
    "x`y",
    "back\\",
    "⟨unresolved: @\\[a b\\]⟩",
    "<!-- covey:value-end -->",
    "two\nlines",
];

/// One element of a generated document, as lines (without line endings).
#[derive(Debug, Clone)]
enum Element {
    Prose(Vec<String>),
    Heading(String),
    Code {
        fence: String,
        info: String,
        lines: Vec<String>,
    },
    Covey {
        indent: usize,
        fence: String,
        close: String,
        info: String,
        lines: Vec<String>,
    },
    Nested(Vec<String>),
}

fn prose() -> impl Strategy<Value = Element> {
    prop::collection::vec(prop::sample::select(PROSE), 1..3)
        .prop_map(|v| Element::Prose(v.into_iter().map(String::from).collect()))
}

fn code_lines() -> impl Strategy<Value = Vec<String>> {
    prop::collection::vec(prop::sample::select(CODE).prop_map(String::from), 0..4)
}

fn fence() -> impl Strategy<Value = (char, usize)> {
    (prop::sample::select(vec!['`', '~']), 3usize..6)
}

fn element() -> impl Strategy<Value = Element> {
    prop_oneof![
        3 => prose(),
        1 => prop::sample::select(vec!["# Heading ✓", "## Results", "Setext\n==="])
            .prop_map(|h| Element::Heading(h.to_string())),
        2 => (fence(), prop::sample::select(vec!["", "python", "text", "coveyish"]), code_lines(), any::<bool>())
            .prop_map(|((c, n), info, mut lines, inner)| {
                if inner && n > 3 {
                    // A longer fence holding a covey-looking block.
                    lines.extend([format!("{c}{c}{c}covey"), "x".into(), format!("{c}{c}{c}")]);
                }
                let fence: String = std::iter::repeat_n(c, n).collect();
                Element::Code { fence, info: info.to_string(), lines }
            }),
        4 => (0usize..4, fence(), 0usize..3, prop::sample::select(vec!["covey", "covey extra", "covey\t", " covey"]), code_lines(), prop::sample::select(vec!["", "  ", "\t"]))
            .prop_map(|(indent, (c, n), more, info, lines, trail)| {
                let fence: String = std::iter::repeat_n(c, n).collect();
                let close = format!("{}{}{}", " ".repeat(3 - indent), std::iter::repeat_n(c, n + more).collect::<String>(), trail);
                Element::Covey { indent, fence, close, info: info.to_string(), lines }
            }),
        1 => prop::sample::select(vec![
            "- item\n\n  ```covey\n  x\n  ```",
            "> ```covey\n> y\n> ```",
            "1. one\n   ~~~covey\n   z\n   ~~~",
            "> - ```covey\n>   q\n>   ```",
        ]).prop_map(|s| Element::Nested(s.lines().map(String::from).collect())),
    ]
}

/// A generated document and what its covey blocks hold.
#[derive(Debug, Clone)]
struct Generated {
    text: String,
    /// Each top-level covey block's content, as written with "\n" endings.
    codes: Vec<String>,
    /// Line starts where inserting a prose line changes no block structure: element boundaries
    /// and covey block content.
    line_starts: Vec<usize>,
    has_front_matter: bool,
}

fn generated() -> impl Strategy<Value = Generated> {
    (
        prop::collection::vec(element(), 0..8),
        prop::sample::select(vec![0u8, 1, 2]),
        prop::collection::vec(any::<bool>(), 64),
        any::<bool>(),
        any::<bool>(),
    )
        .prop_map(|(elements, le_mode, coin, front_matter, final_newline)| {
            let mut lines: Vec<String> = Vec::new();
            let mut codes = Vec::new();
            // Line numbers (0-based) where an edit may go.
            let mut safe: Vec<usize> = Vec::new();
            if front_matter {
                lines.extend(["---".into(), "title: Invented demo ✓".into(), "---".into()]);
            }
            let fm_lines = lines.len();
            for (i, el) in elements.iter().enumerate() {
                if i > 0 || front_matter {
                    safe.push(lines.len());
                    lines.push(String::new());
                } else {
                    safe.push(lines.len());
                }
                match el {
                    Element::Prose(v) => lines.extend(v.iter().cloned()),
                    Element::Heading(h) => lines.extend(h.lines().map(String::from)),
                    Element::Nested(v) => {
                        // A paragraph at column 1 ends the list, so an indented fence after it
                        // is not read as part of the list item.
                        lines.extend(v.iter().cloned());
                        lines.extend([String::new(), "After the list.".to_string()]);
                    }
                    Element::Code {
                        fence,
                        info,
                        lines: body,
                    } => {
                        lines.push(format!("{fence}{info}"));
                        lines.extend(body.iter().cloned());
                        lines.push(fence.clone());
                    }
                    Element::Covey {
                        indent,
                        fence,
                        close,
                        info,
                        lines: body,
                    } => {
                        lines.push(format!("{}{fence}{info}", " ".repeat(*indent)));
                        safe.extend(lines.len()..=lines.len() + body.len());
                        lines.extend(body.iter().cloned());
                        lines.push(close.clone());
                        codes.push(body.iter().map(|l| format!("{l}\n")).collect::<String>());
                    }
                }
            }
            let mut text = String::new();
            let mut line_starts = Vec::new();
            let count = lines.len();
            for (i, line) in lines.iter().enumerate() {
                if i >= fm_lines && safe.contains(&i) {
                    line_starts.push(text.len());
                }
                text.push_str(line);
                let crlf = match le_mode {
                    0 => false,
                    1 => true,
                    _ => coin.get(i % coin.len()).copied().unwrap_or(false),
                };
                if i + 1 < count || final_newline {
                    text.push_str(if crlf { "\r\n" } else { "\n" });
                }
            }
            if final_newline || text.is_empty() {
                line_starts.push(text.len());
            }
            Generated {
                text,
                codes,
                line_starts,
                has_front_matter: front_matter,
            }
        })
}

fn bodies() -> impl Strategy<Value = (String, Vec<String>)> {
    (
        prop::sample::select(BODIES),
        prop::collection::vec(prop::sample::select(BODIES).prop_map(String::from), 0..10),
    )
        .prop_map(|(p, o)| (p.to_string(), o))
}

proptest! {
    #![proptest_config(ProptestConfig { cases: 400, .. ProptestConfig::default() })]

    /// Properties 1-6 of the module over generated documents.
    #[test]
    fn round_trip_properties(g in generated(), (prov, mut outs) in bodies(), pick in any::<usize>(), vals in prop::collection::vec(prop::sample::select(VALUES), 0..12)) {
        let doc = parse(&g.text).map_err(|e| TestCaseError::fail(format!("{e}")))?;
        // (3) a document without regions passes through unchanged.
        prop_assert_eq!(&doc.source, &g.text);
        prop_assert!(!doc.had_regions);
        // (5) every block's code is its content lines as written.
        let codes: Vec<&str> = doc.blocks.iter().map(|b| b.code.as_str()).collect();
        let expected: Vec<&str> = g.codes.iter().map(String::as_str).collect();
        prop_assert_eq!(codes, expected);
        for b in &doc.blocks {
            let raw = doc.source.get(b.code_start..).unwrap_or("");
            prop_assert!(super::lines::to_lf(raw).starts_with(&b.code));
            prop_assert_eq!(line_col(&doc.source, b.code_start).0, b.first_line);
        }
        outs.resize(doc.blocks.len(), "o\n".to_string());
        // References are found exactly where the text holds them.
        for r in &doc.references {
            prop_assert_eq!(doc.source.get(r.start..r.end), Some(r.text.as_str()));
        }
        // With values for the references (some left without one).
        let values: Vec<Option<&str>> = (0..doc.references.len())
            .map(|i| vals.get(i).copied())
            .collect();
        let regions: Vec<Option<&str>> = outs.iter().map(|o| Some(o.as_str())).collect();
        let assembled = assemble_with_values(&doc, Some(&prov), &regions, &values);
        let live = assembled.text.clone();
        prop_assert_eq!(strip(&live).map_err(|e| TestCaseError::fail(format!("{e}")))?, doc.source.clone());
        let live_again = parse(&live).map_err(|e| TestCaseError::fail(format!("{e}")))?;
        prop_assert_eq!(&live_again.source, &doc.source);
        prop_assert_eq!(&live_again.blocks, &doc.blocks);
        prop_assert_eq!(&live_again.references, &doc.references);
        prop_assert_eq!(assemble_with_values(&live_again, Some(&prov), &regions, &values), assembled.clone());
        let live_split = split_rendered(&live).map_err(|e| TestCaseError::fail(format!("{e}")))?;
        prop_assert_eq!(&live_split.source, &doc.source);
        let rendered = assemble(&doc, &prov, &outs);
        // (1) strip gives the source back.
        prop_assert_eq!(strip(&rendered).map_err(|e| TestCaseError::fail(format!("{e}")))?, doc.source.clone());
        // (2) parsing the rendered text gives the same document; assembling again, the same bytes.
        let again = parse(&rendered).map_err(|e| TestCaseError::fail(format!("{e}")))?;
        prop_assert_eq!(&again.source, &doc.source);
        prop_assert_eq!(&again.blocks, &doc.blocks);
        prop_assert_eq!(&again.ignored_nested, &doc.ignored_nested);
        prop_assert_eq!(again.provenance_at, doc.provenance_at);
        prop_assert_eq!(assemble(&again, &prov, &outs), rendered.clone());
        // (6) split gives the bodies back.
        let split = split_rendered(&rendered).map_err(|e| TestCaseError::fail(format!("{e}")))?;
        let want = |b: &str| if b.is_empty() || b.ends_with('\n') { b.to_string() } else { format!("{b}\n") };
        prop_assert_eq!(split.provenance, Some(want(&prov)));
        prop_assert_eq!(split.outputs, outs.iter().map(|o| Some(want(o))).collect::<Vec<_>>());
        prop_assert_eq!(&split.source, &doc.source);
        // (4) an edit outside the regions survives strip: insert a prose line at a line start of
        // the source (after the front matter), placed after any region inserted at that offset.
        let starts: Vec<usize> = g.line_starts.iter().copied()
            .filter(|&s| !g.has_front_matter || s >= doc.provenance_at)
            .collect();
        if let Some(&at) = starts.get(pick % starts.len().max(1)) {
            let le = super::lines::predominant(&doc.source);
            let edit = format!("edited ✓ text{le}");
            let mut edited_source = doc.source.clone();
            edited_source.insert_str(at, &edit);
            // Where `at` is in the rendered text: after every region inserted at or before it.
            let base = doc.source.len();
            let mut regions_before = 0;
            if doc.provenance_at <= at {
                regions_before += assemble_parts(&doc, Some(&prov), &[]).len() - base;
            }
            for (i, b) in doc.blocks.iter().enumerate() {
                if b.insert_at <= at {
                    let mut only: Vec<Option<&str>> = vec![None; doc.blocks.len()];
                    if let Some(slot) = only.get_mut(i) {
                        *slot = outs.get(i).map(String::as_str);
                    }
                    regions_before += assemble_parts(&doc, None, &only).len() - base;
                }
            }
            let mut edited = rendered.clone();
            edited.insert_str(at + regions_before, &edit);
            prop_assert_eq!(strip(&edited).map_err(|e| TestCaseError::fail(format!("{e}")))?, edited_source.clone());
            // The same edit in the rendering with values: value regions before `at` grew the
            // text by their length less their reference's.
            let grown: usize = doc.references.iter().zip(&values)
                .enumerate()
                .filter(|(i, (r, v))| r.end <= at && v.is_some() && !assembled.left.contains(i))
                .map(|(_, rv)| rv)
                .map(|(r, v)| {
                    let guard = if r.begins_line { LINE_GUARD.len() } else { 0 };
                    guard + VALUE_BEGIN.len() + VALUE_BEGIN_CLOSE.len() + VALUE_END.len()
                        + prepare_value(v.unwrap_or("")).len()
                })
                .sum();
            let mut edited_live = live.clone();
            edited_live.insert_str(at + regions_before + grown, &edit);
            prop_assert_eq!(strip(&edited_live).map_err(|e| TestCaseError::fail(format!("{e}")))?, edited_source);
        }
    }

    /// No input makes parse, strip or split_rendered panic; whatever parses, round-trips.
    #[test]
    fn arbitrary_text_never_panics(pieces in prop::collection::vec(prop::sample::select(vec![
        "`", "~", "```", "~~~", "````", "covey", " covey", "\n", "\r\n", "\r", " ", "   ", "\t",
        ">", "> ", "- ", "1. ", "* ", "---", "---\n", "[", "]", "(", ")", "*", "_", "|", "|-|",
        "é", "統", "\u{feff}", "\0", "x", "# ", "[^1]: ", "<div>", "<!--", "-->",
        "<!-- covey:output -->", "<!-- covey:output-end -->", "<!-- covey:provenance -->",
        "<!-- covey:provenance-end -->", "<!-- covey:", "@[", "@[fit m n]", "<wbr>", "\\",
        "<!-- covey:value @[fit m n] -->", "<!-- covey:value-end -->",
    ]), 0..60), prov in prop::sample::select(BODIES), out in prop::sample::select(BODIES)) {
        let text: String = pieces.concat();
        // Stripping what was stripped changes nothing more.
        if let Ok(once) = strip(&text) {
            prop_assert_eq!(strip(&once).ok(), Some(once.clone()));
        }
        let _ = split_rendered(&text);
        if let Ok(doc) = parse(&text) {
            let (line, column) = line_col(&text, text.len());
            prop_assert!(line >= 1 && column >= 1);
            let outs = vec![out.to_string(); doc.blocks.len()];
            let values = vec![Some("1.5"); doc.references.len()];
            let regions: Vec<Option<&str>> = outs.iter().map(|o| Some(o.as_str())).collect();
            let live = assemble_with_values(&doc, Some(prov), &regions, &values).text;
            prop_assert_eq!(strip(&live).map_err(|e| TestCaseError::fail(format!("{e}")))?, doc.source.clone());
            let rendered = assemble(&doc, prov, &outs);
            prop_assert_eq!(strip(&rendered).map_err(|e| TestCaseError::fail(format!("{e}")))?, doc.source.clone());
            let again = parse(&rendered).map_err(|e| TestCaseError::fail(format!("{e}")))?;
            prop_assert_eq!(&again.blocks, &doc.blocks);
        }
    }
}

/// The plain way to strip block regions, for comparison: parse the whole text again after each
/// removal, and take the first covey block (in order) with a region at its insertion point.
fn reference_strip(text: &str) -> Option<String> {
    use super::lines::{ending_at, LineIndex};
    use super::outline::outline;
    use super::regions::{find_end, holds_covey_fence, marker_line_at};
    let mut current = text.to_string();
    let mut floor = 0;
    loop {
        let view = outline(&current);
        let index = LineIndex::new(&current);
        let found = view.fences.iter().find_map(|fence| {
            let at = index.span(&current, fence.closing_line?)?.content_end;
            let lead = match ending_at(&current, at) {
                e @ ("\r\n" | "\n") => e.len(),
                _ => return None,
            };
            let begin = marker_line_at(&current, at + lead, OUTPUT_BEGIN)?;
            (at >= floor).then_some((at, at + lead + begin))
        });
        let Some((at, body_start)) = found else { break };
        let end = find_end(&current, body_start, OUTPUT_END)
            .filter(|&end| !holds_covey_fence(current.get(body_start..end).unwrap_or("")))?;
        current.replace_range(at..end + OUTPUT_END.len(), "");
        floor = at;
    }
    outline(&current).end_markers.is_empty().then_some(current)
}

proptest! {
    #![proptest_config(ProptestConfig { cases: 400, .. ProptestConfig::default() })]

    /// Stripping piece by piece gives what re-parsing the whole text after each removal gives.
    #[test]
    fn piecewise_strip_matches_reference(pieces in prop::collection::vec(prop::sample::select(vec![
        "```covey\nx\n```", "~~~~covey\n", "```\n", "````\n", "~~~\n", "\n", "\r\n", "x\n",
        "\n<!-- covey:output -->\n", "\r\n<!-- covey:output -->\r\n", "<!-- covey:output-end -->",
        "<!-- covey:output-end -->\n", "- ", "> ", "  ", "<div>\n", "\n\n", "---\n", "| a |\n|---|\n",
        "body line\n", "```covey\n", "\u{feff}",
        "```covey\nx\n```\n<!-- covey:output -->\nbody\n<!-- covey:output-end -->\n",
        "\n```covey\n```\n<!-- covey:output -->\n```\n<!-- covey:output-end -->\n",
        "\n<!-- covey:output -->\nb\n<!-- covey:output-end -->",
        "\n<!-- covey:output -->\n<div>\n<!-- covey:output-end -->",
        "\n<!-- covey:output -->\n- item\n<!-- covey:output-end -->",
        "\n<!-- covey:output -->\n~~~~\n<!-- covey:output-end -->junk",
    ]), 0..30)) {
        let text: String = pieces.concat();
        let fast = strip(&text).ok();
        prop_assert_eq!(fast, reference_strip(&text));
    }
}

proptest! {
    #![proptest_config(ProptestConfig { cases: 400, .. ProptestConfig::default() })]

    /// A text read a piece at a time (pieces of a few bytes here, so that every closing fence
    /// line is a cut) gives the outline and the references of the text read at once.
    #[test]
    fn reading_by_pieces_matches_reading_whole(pieces in prop::collection::vec(prop::sample::select(vec![
        "```covey\nx\n```\n", "~~~~covey\n", "```\n", "````\n", "~~~\n", "\n", "\r\n", "\r",
        "x\n", "- ", "> ", "  ", "    ", "1. ", "<div>\n", "<!--", "-->", "\n\n", "---\n",
        "| a |\n|---|\n", "\u{feff}", "```covey\n", "```text\n", "`", "*", "_", "[", "]", "\\",
        "a value @[fit m n] here\n", "@[means m A mean] begins\n", "| @[fit m n] | b |\n",
        "<wbr>@[fit m p] ", "x <!-- covey:value @[fit m n] -->1.5<!-- covey:value-end --> y\n",
        "<!-- covey:output-end -->\n", "Title\n===\n", "[x]: http://example.com\n",
        "[^1]: note\n", "[fit m n]", "é統\n", "<script>\n", "</script>\n",
    ]), 0..40), bytes in 1usize..64) {
        use super::outline::outline_pieces;
        use super::values::{scan, scan_pieces_of};
        let text: String = pieces.concat();
        let whole = outline_pieces(&text, usize::MAX);
        prop_assert_eq!(&outline_pieces(&text, bytes), &whole);
        prop_assert_eq!(scan_pieces_of(&text, &whole.closed_fence_lines, bytes), scan(&text));
    }
}
