//! Properties of whole renders over generated documents: real covey blocks
//! among prose with CRLF and LF, tabs, Unicode, nested and tilde fences,
//! live references in prose and code spans, and text that looks like
//! covey's own markers.

use covey::pipeline::{self, RunOptions};
use covey::world::MemoryWorld;
use proptest::prelude::*;

const DATA: &str = "g,x,y\nA,1.5,2.0\nA,2.5,2.9\nB,1.0,3.1\nB,3.0,4.4\nC,2.0,5.2\nC,2.4,5.0\n";

fn world() -> MemoryWorld {
    MemoryWorld::new().with("d.csv", DATA)
}

/// Pieces a document is made of; each ends without a line ending.
fn piece() -> impl Strategy<Value = String> {
    prop_oneof![
        Just("# Heading ✓".to_string()),
        Just("Plain prose with *emphasis* and `code`.".to_string()),
        Just("\tindented with a tab, ünïcödé, 漢字, 🙂".to_string()),
        Just("<!-- covey:output -->".to_string()),
        Just("<!-- covey:output-end -->".to_string()),
        Just("<!-- covey:provenance -->".to_string()),
        Just("```python\nprint(1)\n```".to_string()),
        Just("~~~~\n```covey\nnot a block: inside another fence\n```\n~~~~".to_string()),
        Just("> ```covey\n> table summary y\n> ```".to_string()),
        Just("- a list item\n  ```covey\n  table summary y\n  ```".to_string()),
        Just("```covey\ntable summary y by g\n```".to_string()),
        Just("~~~ covey\ntable summary x   # comment\n~~~".to_string()),
        Just("````covey\n\ttable summary y\n````".to_string()),
        Just("| a | b |\n|---|---|\n| 1 | 2 |".to_string()),
        Just(String::new()),
        Just(
            "Live: n = @[fit m n], R squared @[fit m r_squared] and `@[fit m n]` in code."
                .to_string()
        ),
        Just("@[fit m sigma] begins a line, *@[coefficients m x p]* in emphasis".to_string()),
        Just("| term | p |\n|---|---|\n| x | @[coefficients m x p] |".to_string()),
        "[a-zA-Z0-9 .,;:!?()-]{0,40}",
    ]
}

/// A document: a first block that loads the data, then pieces, joined with
/// a random mix of line endings, with or without a final line ending.
fn document() -> impl Strategy<Value = String> {
    (
        prop::collection::vec((piece(), any::<bool>()), 0..12),
        any::<bool>(),
        any::<bool>(),
    )
        .prop_map(|(pieces, crlf_first, final_newline)| {
            let mut doc = String::new();
            let first = "```covey\nload \"d.csv\"\nfactor g\nmodel m: y on g + x\ntable fit m\ntable coefficients m\n```";
            let mut parts = vec![(first.to_string(), crlf_first)];
            parts.extend(pieces);
            for (i, (p, crlf)) in parts.iter().enumerate() {
                let le = if *crlf { "\r\n" } else { "\n" };
                doc.push_str(&p.replace('\n', le));
                if i + 1 < parts.len() || final_newline {
                    doc.push_str(le);
                    doc.push_str(le);
                }
            }
            doc
        })
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(256))]

    #[test]
    fn strip_gives_back_the_source_and_rendering_is_idempotent(doc in document()) {
        let w = world();
        let run = match pipeline::run(&doc, "doc.md", &w, RunOptions::default()) {
            Ok(run) => run,
            // Only covey's own marker text (a stray end marker, say) may make
            // a document unrunnable; that is an error, never a panic.
            Err(u) => {
                prop_assert!(doc.contains("<!-- covey:"), "unrunnable: {:?}", u.errors);
                return Ok(());
            }
        };
        prop_assert!(run.errors.is_empty(), "{:?}", run.errors);
        prop_assert_eq!(covey::document::strip(&run.rendered).ok(), Some(doc.clone()));
        let again = pipeline::run(&run.rendered, "doc.md", &w, RunOptions::default());
        prop_assert_eq!(again.map(|r| r.rendered).ok(), Some(run.rendered.clone()));
        let third = pipeline::run(&doc, "doc.md", &w, RunOptions::default());
        prop_assert_eq!(third.map(|r| r.json()).ok(), Some(run.json()));
    }

    #[test]
    fn edits_outside_the_regions_survive(doc in document(), note in "[a-z]{1,12}") {
        let w = world();
        let Ok(run) = pipeline::run(&doc, "doc.md", &w, RunOptions::default()) else {
            return Ok(());
        };
        // The user appends a paragraph to the rendered (in-place) document.
        let edited = format!("{}\n\nA colleague's note: {note}.\n", run.rendered);
        let rerun = pipeline::run(&edited, "doc.md", &w, RunOptions::default());
        let Ok(rerun) = rerun else {
            return Err(TestCaseError::fail("an edited rendering must still run"));
        };
        let note_line = format!("A colleague's note: {note}.");
        prop_assert!(rerun.rendered.contains(&note_line));
        prop_assert_eq!(
            covey::document::strip(&rerun.rendered).ok(),
            covey::document::strip(&edited).ok()
        );
    }
}
