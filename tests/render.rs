//! End to end: fixture documents under tests/fixtures are rendered and
//! compared with the expected renderings kept next to them
//! (`NAME.rendered.md`, and `NAME.errors.txt` for what goes to stderr).
//!
//! After an intended change of output, rewrite the expectations with
//! `COVEY_BLESS=1 cargo test --release --test render` and review the diff.

use std::path::{Path, PathBuf};

use covey::pipeline::{self, RunOptions};
use covey::world::FsWorld;

fn fixtures() -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/fixtures")
}

fn bless() -> bool {
    std::env::var_os("COVEY_BLESS").is_some()
}

/// Compares `actual` with the file at `path`, or rewrites it when blessing.
fn expect_file(path: &Path, actual: &str) {
    if bless() {
        std::fs::write(path, actual).unwrap_or_else(|e| panic!("{}: {e}", path.display()));
        return;
    }
    let expected = std::fs::read_to_string(path).unwrap_or_else(|e| {
        panic!(
            "{}: {e} (run with COVEY_BLESS=1 to create it)",
            path.display()
        )
    });
    if expected != actual {
        let (line, want, have) = first_difference(&expected, actual);
        panic!(
            "{} differs at line {line}:\n expected: {want:?}\n actual:   {have:?}\n(rerun with COVEY_BLESS=1 if the change is intended)",
            path.display()
        );
    }
}

fn first_difference<'a>(a: &'a str, b: &'a str) -> (usize, &'a str, &'a str) {
    let mut la = a.split('\n');
    let mut lb = b.split('\n');
    let mut n = 1;
    loop {
        match (la.next(), lb.next()) {
            (Some(x), Some(y)) if x == y => n += 1,
            (x, y) => return (n, x.unwrap_or("(end)"), y.unwrap_or("(end)")),
        }
    }
}

/// Renders one fixture like `covey render` would, without writing.
fn render_fixture(name: &str) {
    let dir = fixtures();
    let doc = dir.join(format!("{name}.md"));
    let text = std::fs::read_to_string(&doc).unwrap_or_else(|e| panic!("{}: {e}", doc.display()));
    let world = FsWorld::new(&dir, false);
    let opts = RunOptions {
        keep_going: name.contains("keep-going"),
        override_gates: name.contains("override"),
        params: Vec::new(),
        ..RunOptions::default()
    };
    let file = format!("{name}.md");
    match pipeline::run(&text, &file, &world, opts.clone()) {
        Ok(run) => {
            // covey's own messages (warnings, errors, notes, verdicts) show names in code
            // spans, never as escaped backticks; no fixture has a name with a backtick.
            assert!(
                !run.rendered.contains("\\`"),
                "an escaped backtick in {name}: {}",
                run.rendered
                    .lines()
                    .find(|l| l.contains("\\`"))
                    .unwrap_or_default()
            );
            expect_file(&dir.join(format!("{name}.rendered.md")), &run.rendered);
            // Figure files, beside the fixture at the paths the rendering links.
            for (path, svg) in &run.figures {
                let file = dir.join(path);
                if bless() {
                    if let Some(parent) = file.parent() {
                        std::fs::create_dir_all(parent)
                            .unwrap_or_else(|e| panic!("{}: {e}", parent.display()));
                    }
                }
                expect_file(&file, svg);
            }
            let errors_path = dir.join(format!("{name}.errors.txt"));
            if !run.errors.is_empty() || errors_path.exists() {
                expect_file(&errors_path, &run.errors.join("\n"));
            }
            // The round trip: stripping covey's regions gives the source back.
            assert_eq!(
                covey::document::strip(&run.rendered).as_deref(),
                Ok(text.as_str())
            );
            // Idempotence: rendering the rendering changes nothing.
            let again = pipeline::run(&run.rendered, &file, &world, opts).map(|r| r.rendered);
            assert_eq!(
                again.as_deref().ok(),
                Some(run.rendered.as_str()),
                "{name}: second render differs"
            );
        }
        Err(u) => expect_file(
            &dir.join(format!("{name}.errors.txt")),
            &u.errors.join("\n"),
        ),
    }
}

#[test]
fn data_statements() {
    render_fixture("basic");
    // The preview of `show` aligns numeric columns (plot, height_cm, yield_kg) to the right
    // and text to the left.
    let rendered = std::fs::read_to_string(fixtures().join("basic.rendered.md"))
        .unwrap_or_else(|e| panic!("{e}"));
    assert!(
        rendered.contains(
            "| line in file | plot | fertiliser | height_cm | yield_kg | site |\n\
             | --: | --: | :-- | --: | --: | :-- |\n"
        ),
        "{rendered}"
    );
}

#[test]
fn crlf_tilde_fences_and_front_matter() {
    render_fixture("crlf");
}

#[test]
fn every_model_table() {
    render_fixture("models");
}

#[test]
fn runtime_error_is_rendered_and_stops_the_rest() {
    render_fixture("runtime-error");
    // The blocks not run say which flag runs them: after a failed statement, `--keep-going`.
    let rendered = std::fs::read_to_string(fixtures().join("runtime-error.rendered.md"))
        .unwrap_or_else(|e| panic!("{e}"));
    assert!(
        rendered.contains("*Not run: an earlier block failed. Fix that error, or render with `--keep-going` to run the rest.*"),
        "{rendered}"
    );
    assert!(!rendered.contains("--override-gates"), "{rendered}");
}

#[test]
fn keep_going_runs_the_rest() {
    render_fixture("keep-going");
}

#[test]
fn figures() {
    render_fixture("figures");
}

#[test]
fn syntax_errors_are_all_reported() {
    render_fixture("syntax-error");
}

#[test]
fn model_errors_and_designs_with_holes() {
    render_fixture("model-errors-keep-going");
}

#[test]
fn undeclared_missing_marker_is_refused() {
    render_fixture("undeclared-marker");
}

/// The README's covey examples are real: they run, in order, as one
/// document against the worked documents' data, without any error.
#[test]
fn readme_examples_run() {
    let root = Path::new(env!("CARGO_MANIFEST_DIR"));
    let readme = std::fs::read_to_string(root.join("README.md")).unwrap_or_default();
    let world = FsWorld::new(&root.join("worked"), false);
    let run = pipeline::run(&readme, "README.md", &world, RunOptions::default())
        .unwrap_or_else(|u| panic!("README does not parse:\n{}", u.errors.join("\n")));
    assert!(
        run.errors.is_empty(),
        "README examples fail:\n{}",
        run.errors.join("\n")
    );
    assert!(
        run.document.blocks.len() >= 5,
        "README has too few covey examples"
    );
}

#[test]
fn assumption_checks() {
    render_fixture("checks");
}

#[test]
fn live_numbers() {
    render_fixture("live");
}

mod live {
    use covey::pipeline::{self, RunOptions};
    use covey::world::MemoryWorld;

    /// Invented data: two groups and a covariate.
    const FIRST: &str = "g,x,y\nA,1,2.0\nA,2,3.1\nA,3,3.9\nB,1,4.2\nB,2,5.1\nB,3,5.8\n";
    /// The same design with other responses (invented).
    const SECOND: &str = "g,x,y\nA,1,1.0\nA,2,1.4\nA,3,2.2\nB,1,1.1\nB,2,1.9\nB,3,2.4\n";

    const DOC: &str = "# Demo\n\n```covey\nload \"d.csv\"\nfactor g\nmodel m: y on g + x\ntable means m for g\n```\n\nThe mean of A is @[means m A mean] and `@[means m A mean]` is code.\n";

    fn render(doc: &str, data: &str) -> pipeline::Run {
        let world = MemoryWorld::new().with("d.csv", data);
        pipeline::run(doc, "doc.md", &world, RunOptions::default())
            .unwrap_or_else(|u| panic!("{}", u.errors.join("\n")))
    }

    /// The region shown for the first reference of a rendering.
    fn first_value(rendered: &str) -> &str {
        let begin = "<!-- covey:value @[means m A mean] -->";
        let start = rendered.find(begin).map_or(0, |i| i + begin.len());
        let rest = rendered.get(start..).unwrap_or("");
        rest.get(..rest.find("<!-- covey:value-end -->").unwrap_or(0))
            .unwrap_or("")
    }

    #[test]
    fn the_value_follows_the_data() {
        let one = render(DOC, FIRST);
        let two = render(DOC, SECOND);
        assert!(one.errors.is_empty(), "{}", one.errors.join("\n"));
        // Adjusted means at mean x = 2 equal the group means here: A's are 3.0 and 1.533...
        // (arithmetic by hand: (2.0 + 3.1 + 3.9) / 3 and (1.0 + 1.4 + 2.2) / 3).
        assert_eq!(first_value(&one.rendered), "3.000");
        assert_eq!(first_value(&two.rendered), "1.533");
        for run in [&one, &two] {
            assert_eq!(covey::document::strip(&run.rendered).as_deref(), Ok(DOC));
        }
    }

    #[test]
    fn a_reference_in_a_code_span_is_left_alone() {
        let run = render(DOC, FIRST);
        assert_eq!(run.document.references.len(), 1);
        assert!(
            run.rendered.contains(" and `@[means m A mean]` is code."),
            "{}",
            run.rendered
        );
    }

    #[test]
    fn an_unknown_reference_is_an_error_at_its_place() {
        let doc = DOC.replace("is code.", "is code.\nBut ünï @[means m Z mean] is not.");
        let run = render(&doc, FIRST);
        assert!(run.failed());
        assert_eq!(run.errors.len(), 1, "{}", run.errors.join("\n"));
        let error = run.errors.first().map_or("", String::as_str);
        // Line 11, column 9 (in characters: "But ünï " is 8 characters).
        assert!(
            error.starts_with("doc.md:11:9: error: the `means` table has no row `Z`"),
            "{error}"
        );
        assert!(error.contains("its rows are: A, B"), "{error}");
        assert!(
            run.rendered
                .contains("<!-- covey:value @[means m Z mean] -->⟨unresolved: @\\[means m Z mean\\]⟩<!-- covey:value-end -->"),
            "{}",
            run.rendered
        );
        // The position is the same when the text given holds regions already.
        let again = pipeline::run(
            &run.rendered,
            "doc.md",
            &MemoryWorld::new().with("d.csv", FIRST),
            RunOptions::default(),
        )
        .unwrap_or_else(|u| panic!("{}", u.errors.join("\n")));
        let error = again.errors.first().map_or("", String::as_str);
        assert!(
            error.contains("the `means` table has no row `Z`"),
            "{error}"
        );
        let line = run
            .rendered
            .lines()
            .position(|l| l.contains("@[means m Z mean]"));
        let (want_line, want_col) = (
            line.map_or(0, |l| l + 1),
            "But ünï <!-- covey:value ".chars().count() + 1,
        );
        assert!(
            error.starts_with(&format!("doc.md:{want_line}:{want_col}:")),
            "{error}"
        );
    }
}

#[test]
fn plans_and_power_figures() {
    render_fixture("plan");
}

#[test]
fn two_factors_control_robust_weights() {
    render_fixture("two-factors");
}
