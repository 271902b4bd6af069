//! Unit tests of the document module: edge cases and every error.

use super::*;

fn doc(text: &str) -> Document {
    match parse(text) {
        Ok(d) => d,
        Err(e) => panic!("parse failed: {e}"),
    }
}

fn err(text: &str) -> DocumentError {
    match parse(text) {
        Ok(d) => panic!("expected an error, got {d:?}"),
        Err(e) => e,
    }
}

fn outs(bodies: &[&str]) -> Vec<String> {
    bodies.iter().map(|s| s.to_string()).collect()
}

/// Render, then check strip, re-parse and split give everything back.
fn round_trip(text: &str, prov: &str, bodies: &[&str]) -> String {
    let d = doc(text);
    let rendered = assemble(&d, prov, &outs(bodies));
    assert_eq!(strip(&rendered).as_deref(), Ok(d.source.as_str()));
    let again = doc(&rendered);
    assert_eq!(again.source, d.source);
    assert_eq!(again.blocks, d.blocks);
    assert!(again.had_regions);
    assert_eq!(assemble(&again, prov, &outs(bodies)), rendered);
    rendered
}

#[test]
fn simple_block_and_region_layout() {
    let text = "# Title\n\n```covey\nload x\n```\nafter\n";
    let d = doc(text);
    assert_eq!(d.source, text);
    assert_eq!(d.blocks.len(), 1);
    let b = &d.blocks[0];
    assert_eq!((b.index, b.fence_line, b.first_line), (1, 3, 4));
    assert_eq!(b.code, "load x\n");
    assert_eq!(&text[b.code_start..b.code_start + 6], "load x");
    assert_eq!(&text[b.insert_at..], "\nafter\n");
    let r = round_trip(text, "made by covey\n", &["result\n"]);
    assert_eq!(
        r,
        "<!-- covey:provenance -->\nmade by covey\n<!-- covey:provenance-end -->\n# Title\n\n\
         ```covey\nload x\n```\n<!-- covey:output -->\nresult\n<!-- covey:output-end -->\nafter\n"
    );
}

#[test]
fn crlf_document_uses_crlf_in_regions() {
    let text = "a\r\n\r\n```covey\r\nx = 1\r\n```\r\nb\r\n";
    let d = doc(text);
    assert_eq!(d.blocks[0].code, "x = 1\n");
    assert_eq!(d.blocks[0].line_ending, "\r\n");
    let r = round_trip(text, "p\n", &["line 1\nline 2\n"]);
    assert!(r.starts_with("<!-- covey:provenance -->\r\np\r\n<!-- covey:provenance-end -->\r\n"));
    assert!(r.contains(
        "```\r\n<!-- covey:output -->\r\nline 1\r\nline 2\r\n<!-- covey:output-end -->\r\nb"
    ));
    let split = split_rendered(&r).unwrap_or_else(|e| panic!("{e}"));
    assert_eq!(split.outputs, vec![Some("line 1\nline 2\n".to_string())]);
    assert_eq!(split.provenance.as_deref(), Some("p\n"));
}

#[test]
fn fence_at_end_of_file_without_newline() {
    let text = "x\r\n\r\n```covey\r\nq\r\n```";
    let d = doc(text);
    assert_eq!(d.blocks[0].insert_at, text.len());
    // No line ending on the fence line: the document's predominant one is used.
    assert_eq!(d.blocks[0].line_ending, "\r\n");
    let r = round_trip(text, "", &["o\n"]);
    assert!(r.ends_with("```\r\n<!-- covey:output -->\r\no\r\n<!-- covey:output-end -->"));
    let lf = doc("```covey\nq\n```");
    assert_eq!(lf.blocks[0].line_ending, "\n");
    round_trip("```covey\nq\n```", "p", &["o"]);
}

#[test]
fn empty_block_and_blocks_back_to_back_at_start() {
    let text = "```covey\n```\n~~~~ covey extra words\n\tfit\n~~~~~\n";
    let d = doc(text);
    assert_eq!(d.blocks.len(), 2);
    assert_eq!(d.blocks[0].code, "");
    assert_eq!(d.blocks[0].fence_line, 1);
    assert_eq!(d.blocks[0].code_start, 9);
    assert_eq!(d.blocks[1].code, "\tfit\n");
    assert_eq!(d.blocks[1].fence_line, 3);
    assert_eq!(d.provenance_at, 0);
    round_trip(text, "p\n", &["one\n", "two\n"]);
    round_trip(text, "p\n", &["", ""]);
}

#[test]
fn indented_fences_keep_content_as_written() {
    let text = "   ```covey\n   a\n b\n  ```\n";
    let d = doc(text);
    assert_eq!(d.blocks[0].code, "   a\n b\n");
    round_trip(text, "p\n", &["o\n"]);
}

#[test]
fn info_word_must_be_exactly_covey() {
    let text = "```coveys\n```\n```py covey\n```\n``` covey\nx\n```\n```{covey}\n```\n";
    let d = doc(text);
    assert_eq!(d.blocks.len(), 1);
    assert_eq!(d.blocks[0].fence_line, 5);
}

#[test]
fn nested_blocks_are_reported_not_used() {
    let text = "- item\n\n  ```covey\n  x\n  ```\n\n> ```covey\n> y\n> ```\n\n[^n]: note\n\n    ```covey\n    z\n    ```\n\n[^n]\n";
    let d = doc(text);
    assert!(d.blocks.is_empty());
    assert_eq!(d.ignored_nested, vec![3, 7, 13]);
}

#[test]
fn fence_inside_longer_fence_is_code() {
    let text = "````md\n```covey\nx\n```\n````\n";
    let d = doc(text);
    assert!(d.blocks.is_empty());
    assert!(d.ignored_nested.is_empty());
}

#[test]
fn front_matter_puts_provenance_after_delimiter() {
    let text = "---\ntitle: A\n---\n\n```covey\nx\n```\n";
    let d = doc(text);
    assert_eq!(d.provenance_at, "---\ntitle: A\n---\n".len());
    let r = round_trip(text, "p\n", &["o\n"]);
    assert!(r.starts_with("---\ntitle: A\n---\n<!-- covey:provenance -->\np\n"));
    let crlf = "---\r\ntitle: A\r\n---\r\n\r\ntext\r\n";
    assert_eq!(doc(crlf).provenance_at, "---\r\ntitle: A\r\n---\r\n".len());
    round_trip(crlf, "p\n", &[]);
    let no_blank = "---\na: 1\n---\ntext\n";
    assert_eq!(doc(no_blank).provenance_at, 13);
    let at_eof = "---\na: 1\n---";
    assert_eq!(doc(at_eof).provenance_at, at_eof.len());
    round_trip(at_eof, "p", &[]);
}

#[test]
fn byte_order_mark_stays_first() {
    let text = "\u{feff}```covey\nx\n```\n";
    let d = doc(text);
    assert_eq!(d.provenance_at, 3);
    assert_eq!(d.blocks.len(), 1);
    let r = round_trip(text, "p\n", &["o\n"]);
    assert!(r.starts_with("\u{feff}<!-- covey:provenance -->"));
}

#[test]
fn lone_carriage_returns_are_line_endings() {
    let text = "a\r```covey\rx\r```\rb";
    let d = doc(text);
    assert_eq!(d.blocks.len(), 1);
    assert_eq!(d.blocks[0].code, "x\n");
    assert_eq!(d.blocks[0].first_line, 3);
    assert_eq!(d.blocks[0].line_ending, "\n");
    round_trip(text, "p\n", &["o\n"]);
}

#[test]
fn tabs_and_unicode_pass_through() {
    let text = "Grüße\t☃ 統計\n\n```covey\n\tmodel ü = x\t# ✓\n```\n\ttext\n";
    let d = doc(text);
    assert_eq!(d.blocks[0].code, "\tmodel ü = x\t# ✓\n");
    assert_eq!(d.blocks[0].first_line, 4);
    round_trip(text, "prov ✓\n", &["| a | b |\n|---|---|\n| ü | 1 |\n"]);
}

#[test]
fn unclosed_fence_is_an_error_with_position() {
    let e = err("text\n\n  ~~~~covey\nx\n");
    assert_eq!((e.line(), e.column()), (3, 3));
    assert!(matches!(&e, DocumentError::UnclosedFence { fence, .. } if fence == "~~~~"));
    assert!(e
        .to_string()
        .contains("add a line holding only ~~~~ (the closing fence)"));
    // strip does not care about fences.
    assert_eq!(strip("```covey\nx\n").as_deref(), Ok("```covey\nx\n"));
}

#[test]
fn unclosed_fence_position_is_in_the_given_text() {
    let text =
        "```covey\na\n```\n<!-- covey:output -->\nold\n<!-- covey:output-end -->\n\n```covey\nb\n";
    let e = err(text);
    assert_eq!((e.line(), e.column()), (8, 1));
}

#[test]
fn missing_end_marker() {
    let text = "```covey\nx\n```\n<!-- covey:output -->\nold\n\n```covey\ny\n```\n<!-- covey:output -->\nz\n<!-- covey:output-end -->\n";
    let e = err(text);
    assert!(matches!(
        e,
        DocumentError::MissingEndMarker {
            line: 4,
            column: 1,
            ..
        }
    ));
    assert!(e.to_string().contains("delete the marker line"));
    assert!(strip(text).is_err());
    // Running into the next block, which has no region yet, is the same error.
    let e = err("```covey\nx\n```\n<!-- covey:output -->\nold\n```covey\ny\n```\n");
    assert!(matches!(e, DocumentError::MissingEndMarker { line: 4, .. }));
    // And so is the end of the document.
    let e = err("x\n<!-- covey:provenance-end -->\n");
    assert!(matches!(e, DocumentError::EndWithoutBegin { line: 2, .. }));
    let e = err("<!-- covey:provenance -->\nx\n```covey\n```\n");
    assert!(matches!(e, DocumentError::MissingEndMarker { line: 1, .. }));
}

#[test]
fn end_marker_without_begin() {
    // The begin marker line was deleted.
    let text = "```covey\nx\n```\nold output\n<!-- covey:output-end -->\nmore\n";
    let e = err(text);
    assert!(matches!(
        e,
        DocumentError::EndWithoutBegin {
            line: 5,
            column: 1,
            ..
        }
    ));
    assert!(e.to_string().contains("delete this marker line"));
    // A blank line between the fence and the region: the region is not at its place.
    let text = "```covey\nx\n```\n\n<!-- covey:output -->\nold\n<!-- covey:output-end -->\n";
    assert!(matches!(
        err(text),
        DocumentError::EndWithoutBegin { line: 7, .. }
    ));
    // After a table.
    let text = "```covey\nx\n```\n| a |\n|---|\n| 1 |\n<!-- covey:output-end -->\n";
    assert!(matches!(
        err(text),
        DocumentError::EndWithoutBegin { line: 7, .. }
    ));
}

#[test]
fn marker_like_text_elsewhere_is_user_text() {
    let text = "<!-- covey:output -->\n\n    <!-- covey:output-end -->\n\n```text\n<!-- covey:output-end -->\n```\n\n- <!-- covey:provenance-end -->\n\nsee `<!-- covey:output -->` here\n\n<!-- covey:outputs -->\n\n```covey\nx\n```\n\n<!-- covey:output -->\nuser text\n";
    let d = doc(text);
    assert_eq!(d.source, text);
    assert!(!d.had_regions);
    round_trip(text, "p\n", &["o\n"]);
}

#[test]
fn bodies_cannot_hold_markers() {
    let d = doc("```covey\nx\n```\n");
    let r = assemble(
        &d,
        "<!-- covey:provenance-end -->\n",
        &outs(&["a <!-- covey:output-end -->\n"]),
    );
    let s = split_rendered(&r).unwrap_or_else(|e| panic!("{e}"));
    assert_eq!(
        s.provenance.as_deref(),
        Some("&lt;!-- covey:provenance-end -->\n")
    );
    assert_eq!(
        s.outputs,
        vec![Some("a &lt;!-- covey:output-end -->\n".to_string())]
    );
    assert_eq!(s.source, d.source);
}

#[test]
fn confusing_bodies_do_not_confuse_strip() {
    let text = "```covey\na\n```\n\n```covey\nb\n```\ntail\n";
    let bodies = ["```\nunclosed code\n", "<div>\n", "````\n"];
    let r = round_trip(text, "~~~\n", &bodies[..2]);
    let s = split_rendered(&r).unwrap_or_else(|e| panic!("{e}"));
    assert_eq!(
        s.outputs,
        vec![Some(bodies[0].to_string()), Some(bodies[1].to_string())]
    );
    round_trip(text, "<pre>\n", &bodies[1..]);
}

#[test]
fn missing_outputs_and_split() {
    let text = "```covey\na\n```\n```covey\nb\n```\n";
    let d = doc(text);
    let r = assemble_parts(&d, None, &[None, Some("two\n")]);
    let s = split_rendered(&r).unwrap_or_else(|e| panic!("{e}"));
    assert_eq!(s.provenance, None);
    assert_eq!(s.outputs, vec![None, Some("two\n".to_string())]);
    assert_eq!(s.source, text);
    // Fewer outputs than blocks: the rest get no region.
    let r = assemble(&d, "p\n", &outs(&["one\n"]));
    let s = split_rendered(&r).unwrap_or_else(|e| panic!("{e}"));
    assert_eq!(s.outputs, vec![Some("one\n".to_string()), None]);
}

#[test]
fn a_body_is_given_a_final_line_ending() {
    let d = doc("```covey\na\n```\n");
    let r = assemble(&d, "p", &outs(&["no newline"]));
    assert!(r.contains("no newline\n<!-- covey:output-end -->"));
}

#[test]
fn line_col_counts_characters_and_all_line_endings() {
    let t = "ab\r\ncü\rd\ne";
    assert_eq!(line_col(t, 0), (1, 1));
    assert_eq!(line_col(t, 2), (1, 3));
    assert_eq!(line_col(t, 3), (1, 4)); // the "\n" of "\r\n"
    assert_eq!(line_col(t, 4), (2, 1));
    assert_eq!(line_col(t, 7), (2, 3));
    assert_eq!(line_col(t, 8), (3, 1));
    assert_eq!(line_col(t, 6), (2, 2)); // inside 'ü': moved back to its start
    assert_eq!(line_col(t, 999), (4, 2));
    assert_eq!(line_col("", 5), (1, 1));
}

#[test]
fn empty_and_tiny_inputs() {
    for t in [
        "",
        "\n",
        "\r\n",
        "```",
        "```covey",
        "---",
        "---\n---\n",
        "<!-- covey:output -->",
    ] {
        let _ = parse(t);
        let _ = strip(t);
        let _ = split_rendered(t);
    }
    let d = doc("");
    assert_eq!(
        assemble(&d, "p\n", &[]),
        "<!-- covey:provenance -->\np\n<!-- covey:provenance-end -->\n"
    );
    round_trip("", "p\n", &[]);
}

#[test]
fn stacked_regions_are_all_removed() {
    let text = "```covey\na\n```\n";
    // Two regions in a row at one fence (not something assemble writes): both are covey's.
    let twice = "```covey\na\n```\n<!-- covey:output -->\nr\n<!-- covey:output-end -->\n<!-- covey:output -->\no\n<!-- covey:output-end -->\n";
    assert_eq!(strip(twice).as_deref(), Ok(text));
    let s = split_rendered(twice).unwrap_or_else(|e| panic!("{e}"));
    assert_eq!(s.outputs, vec![Some("r\n".to_string())]);
}

#[test]
fn hand_made_document_does_not_panic() {
    let d = Document {
        source: "é".to_string(),
        blocks: vec![Block {
            index: 1,
            code: String::new(),
            code_start: 99,
            first_line: 1,
            fence_line: 1,
            insert_at: 1,
            line_ending: "\n",
        }],
        provenance_at: 77,
        ignored_nested: vec![],
        removed: vec![],
        had_regions: false,
        references: vec![Reference {
            text: "@[a b c]".to_string(),
            start: 1,
            end: 0,
            line: 1,
            column: 1,
            begins_line: true,
            block: (1, 1),
        }],
    };
    assert_eq!(assemble(&d, "p", &outs(&["o"])), "é");
    let _ = assemble_with_values(&d, None, &[], &[Some("v")]);
}

/// Pathological inputs must parse quickly (comrak is linear on these; the limit is generous for
/// debug builds on a shared machine).
#[test]
fn adversarial_inputs_finish_quickly() {
    const LIMIT: std::time::Duration = std::time::Duration::from_secs(5);
    let n = 10_000;
    let inputs = [
        "[".repeat(n) + &"]".repeat(n),
        "[a](".repeat(n / 4),
        "`".repeat(n),
        "` ``".repeat(n / 4),
        ">".repeat(n) + " ```covey\nx\n",
        "- ".repeat(n / 2) + "```covey\n",
        (0..n / 10)
            .map(|i| " ".repeat(i % 40) + "- x\n")
            .collect::<String>(),
        "*_".repeat(n / 2),
        "<!-- covey:output -->\n".repeat(n / 20),
        "```covey\n```\n\n<!-- covey:output -->\n<!-- covey:output-end -->\n".repeat(n / 60),
        "|a".repeat(n / 2) + "\n" + &"|-".repeat(n / 2) + "\n",
    ];
    for input in &inputs {
        let start = std::time::Instant::now();
        let _ = parse(input);
        let _ = split_rendered(input);
        assert!(
            start.elapsed() < LIMIT,
            "slow on input starting {:?}",
            input.get(..20)
        );
    }
    // Many real regions: each is removed with a fresh parse.
    let text = "```covey\nx\n```\n\n".repeat(200);
    let d = doc(&text);
    let bodies: Vec<String> = (0..200).map(|i| format!("out {i}\n")).collect();
    let r = assemble(&d, "p\n", &bodies);
    let start = std::time::Instant::now();
    assert_eq!(strip(&r).as_deref(), Ok(text.as_str()));
    assert!(start.elapsed() < LIMIT);
}

#[test]
fn front_matter_with_mixed_line_endings_ends_at_its_own_delimiter() {
    // comrak's own option would take the later "---\r\n" line as the end of the front matter.
    let text = "---\na: 1\n---\n\n```covey\n---\r\n```\n";
    let d = doc(text);
    assert_eq!(d.provenance_at, 13);
    assert_eq!(d.blocks.len(), 1);
    assert_eq!(d.blocks[0].code, "---\n");
    // Fences inside front matter are not blocks.
    let text = "---\n```covey\n---\nbody\n";
    let d = doc(text);
    assert!(d.blocks.is_empty());
    assert_eq!(d.provenance_at, 17);
    // Not front matter: no closing delimiter, or not at the very top.
    assert_eq!(doc("---\na\n").provenance_at, 0);
    assert_eq!(doc("\n---\na\n---\n").provenance_at, 0);
}

#[test]
fn byte_order_mark_only() {
    round_trip("\u{feff}", "", &[]);
    round_trip("\u{feff}", "p\n", &[]);
    round_trip("\u{feff}---\na\n---", "p\n", &[]);
}

/// A body must not hold a top-level fence whose info word is `covey`: it would read as the next
/// covey block, and the region as one without an end marker. (Echo code under another info word.)
#[test]
fn a_body_with_a_covey_fence_is_refused_on_reading() {
    let d = doc("```covey\na\n```\n");
    let r = assemble(&d, "p\n", &outs(&["```covey\necho\n```\n"]));
    let e = parse(&r);
    assert!(
        matches!(e, Err(DocumentError::MissingEndMarker { line: 7, .. })),
        "{e:?}"
    );
    let r = assemble(&d, "p\n", &outs(&["```text\necho\n```\n"]));
    assert_eq!(strip(&r).as_deref(), Ok(d.source.as_str()));
}

#[test]
fn text_after_an_end_marker_stays_and_is_read_again() {
    // The user typed after the end marker: their text stays, and the fence line is then
    // "```tail", which does not close the block.
    let r = "```covey\na\n```\n<!-- covey:output -->\no\n<!-- covey:output-end -->tail\n";
    assert_eq!(strip(r).as_deref(), Ok("```covey\na\n```tail\n"));
    assert!(matches!(
        parse(r),
        Err(DocumentError::UnclosedFence { line: 1, .. })
    ));
}

#[test]
fn many_marker_lines_in_user_text_are_cheap() {
    const LIMIT: std::time::Duration = std::time::Duration::from_secs(5);
    let text = "x\n<!-- covey:output -->\n".repeat(5000) + "```text\n```\n<!-- covey:output -->\n";
    let start = std::time::Instant::now();
    assert_eq!(strip(&text).as_deref(), Ok(text.as_str()));
    let fences = "```covey\n```\n\n```\n<!-- covey:output -->\n".repeat(2000);
    let _ = strip(&fences);
    assert!(start.elapsed() < LIMIT);
}

/// Render with one value per reference, then check strip, re-parse and re-render.
fn values_round_trip(text: &str, values: &[&str]) -> String {
    let d = doc(text);
    let vals: Vec<Option<&str>> = values.iter().map(|v| Some(*v)).collect();
    let bodies = vec![Some("o\n"); d.blocks.len()];
    let rendered = assemble_with_values(&d, Some("p\n"), &bodies, &vals).text;
    assert_eq!(
        strip(&rendered).as_deref(),
        Ok(d.source.as_str()),
        "{rendered}"
    );
    let again = doc(&rendered);
    assert_eq!(again.source, d.source);
    assert_eq!(again.references, d.references);
    assert_eq!(again.blocks, d.blocks);
    assert_eq!(
        assemble_with_values(&again, Some("p\n"), &bodies, &vals).text,
        rendered
    );
    let split = split_rendered(&rendered).unwrap_or_else(|e| panic!("{e}"));
    assert_eq!(split.source, d.source);
    rendered
}

fn reference_texts(d: &Document) -> Vec<&str> {
    d.references.iter().map(|r| r.text.as_str()).collect()
}

#[test]
fn references_are_found_in_prose_only() {
    let text = "# Head @[fit m n]\n\nSome @[anova m x p] and `@[anova m x p]` code, @\\[a b c] \
                escaped, <span title=\"@[q r s]\">html</span>, [l](https://e.com/@[x]), \
                ![@[fit m n]](i.png), *@[fit m sigma]*.\n\n```text\n@[fit m n]\n```\n\n    \
                @[fit m n]\n\n<div>\n@[fit m n]\n</div>\n\n| a |\n|---|\n| @[means m A mean] |\n";
    let d = doc(text);
    assert_eq!(
        reference_texts(&d),
        vec![
            "@[fit m n]",
            "@[anova m x p]",
            "@[fit m sigma]",
            "@[means m A mean]"
        ]
    );
    for r in &d.references {
        assert_eq!(text.get(r.start..r.end), Some(r.text.as_str()));
        assert_eq!(line_col(text, r.start), (r.line, r.column));
    }
    values_round_trip(text, &["1", "2", "3", "4"]);
}

#[test]
fn references_after_tabs_unicode_and_a_byte_order_mark() {
    let text = "\u{feff}Grüße\t統計 @[fit m n] x\r\n\r\n- \titem ✓ @[fit m sigma]\r\n";
    let d = doc(text);
    assert_eq!(reference_texts(&d), vec!["@[fit m n]", "@[fit m sigma]"]);
    let first = &d.references[0];
    // The byte-order mark counts as a character, as in every message's column.
    assert_eq!((first.line, first.column), (1, 11));
    values_round_trip(text, &["12", "0.5"]);
}

#[test]
fn a_region_that_begins_a_line_gets_a_guard() {
    let text = "Text\n@[fit m n] first on a line\n\n- @[fit m sigma]\n\n> @[fit m p]\n\nA\n===\n\n@[a b c]\n===\n";
    let d = doc(text);
    let begins: Vec<bool> = d.references.iter().map(|r| r.begins_line).collect();
    assert_eq!(begins, vec![true, true, true, true]);
    let r = values_round_trip(text, &["1", "2", "3", "4"]);
    assert!(r.contains("Text\n<wbr><!-- covey:value @[fit m n] -->1<!-- covey:value-end --> first"));
    // The rendered line is still a paragraph line: no HTML block starts there.
    let again = doc(&r);
    assert_eq!(again.references.len(), 4);
}

#[test]
fn a_guard_the_user_wrote_survives() {
    let text = "<wbr>@[fit m n] and x<wbr>@[fit m p] and\n<wbr> <wbr>@[fit m sigma]\n";
    let d = doc(text);
    let begins: Vec<bool> = d.references.iter().map(|r| r.begins_line).collect();
    assert_eq!(begins, vec![true, false, true]);
    values_round_trip(text, &["1", "2", "3"]);
}

#[test]
fn awkward_values_cannot_break_their_region() {
    // One backtick: no code span, unless a value closed it.
    let text = "a ` b @[fit m n] c and @[fit m p] \\\n";
    let r = values_round_trip(text, &["x`y\nz", "back\\"]);
    assert!(r.contains("-->xˋy z<!-- covey:value-end -->"), "{r}");
    assert!(r.contains("-->back\\ <!-- covey:value-end -->"), "{r}");
    let marker = "<!-- covey:output -->";
    values_round_trip("q @[fit m n]\n", &[marker]);
}

#[test]
fn damaged_value_regions_stay_as_written() {
    // A region split over two lines, or without its end, is not covey's any more.
    for text in [
        "a <!-- covey:value @[fit m n] -->1\n<!-- covey:value-end --> b\n",
        "a <!-- covey:value @[fit m n] -->1 b\n",
        "a <!-- covey:value not a ref -->1<!-- covey:value-end --> b\n",
        "`<!-- covey:value @[fit m n] -->1<!-- covey:value-end -->`\n",
    ] {
        let d = doc(text);
        assert_eq!(d.source, text);
        assert!(d.references.is_empty(), "{text}");
    }
    // One opened inside another spoils both, so stripping twice changes nothing more.
    let nested = "[<!-- covey:value @[fit m n] --><!-- covey:value @[fit m n] --><!-- covey:value-end --><!-- covey:value-end -->\n";
    assert_eq!(strip(nested).as_deref(), Ok(nested));
    // A whole one in prose is a region: it gives back its reference.
    let text = "a <!-- covey:value @[fit m n] -->1<!-- covey:value-end --> b\n";
    assert_eq!(strip(text).as_deref(), Ok("a @[fit m n] b\n"));
}

#[test]
fn value_regions_and_block_regions_together() {
    let text = "Before @[fit m n].\n\n```covey\nx\n```\nAfter @[fit m p] and @[fit m q].\n";
    let r = values_round_trip(text, &["1", "22", "333"]);
    let d = doc(&r);
    // Offsets in the source map back to the text given: the block's code, and each reference's
    // copy in its opening comment.
    assert_eq!(d.blocks[0].code, "x\n");
    let shift = |at: usize| {
        at + d
            .removed
            .iter()
            .filter(|(pos, _)| *pos <= at)
            .map(|(_, len)| len)
            .sum::<usize>()
    };
    for reference in &d.references {
        let at = shift(reference.start);
        assert_eq!(
            r.get(at..at + reference.text.len()),
            Some(reference.text.as_str())
        );
    }
}

#[test]
fn a_value_that_would_close_open_html_is_left_out() {
    let text = "`<!-- covey:@[fit m n] and @[fit m p]\n\nNext paragraph @[fit m q].\n";
    let d = doc(text);
    assert_eq!(d.references.len(), 3);
    let a = assemble_with_values(&d, None, &[], &[Some("1"), Some("2"), Some("3")]);
    // Each region's `-->` would end the comment left open before it; the next paragraph is
    // clear of it.
    assert_eq!(a.left, vec![0, 1]);
    assert_eq!(strip(&a.text).as_deref(), Ok(text));
    assert!(a
        .text
        .contains("Next paragraph <!-- covey:value @[fit m q] -->3<!--"));
}

#[test]
fn value_regions_read_back_block_by_block_as_in_the_whole_document() {
    // Each top-level block holding a value region is read on its own: a byte-order mark that
    // starts such a block mid-document, HTML left open, an escape before a reference, and a
    // reference whose block follows another without a blank line all read as in the whole.
    for text in [
        "\n\n\u{feff}<!-- covey:value @[fit m n] --><!-- covey:\n@[fit m n]``",
        "# Head @[fit m n]\ntext @[fit m n]\n- item @[fit m n]\n\n> quote\n@[fit m n]\n",
        "\\@[fit m n] and <!-- open @[fit m n]\n\n| a |\n| - |\n| @[fit m n] |\n",
    ] {
        let d = doc(text);
        assert!(!d.references.is_empty(), "{text:?}");
        assert!(d.references.iter().all(|r| r.block.0 > 0), "{text:?}");
        let values = vec![Some("1.5"); d.references.len()];
        let live = assemble_with_values(&d, None, &[], &values).text;
        assert_eq!(
            strip(&live).ok().as_deref(),
            Some(d.source.as_str()),
            "{text:?}"
        );
    }
}
