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
    };
    let file = format!("{name}.md");
    match pipeline::run(&text, &file, &world, opts.clone()) {
        Ok(run) => {
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
