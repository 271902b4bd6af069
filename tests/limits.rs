//! Bounded resources and the smaller cases of "files are sacred", each run by the release
//! binary: special files (a named pipe, a device) refused at their line and column without
//! being opened for reading, and as a document, a rendering or a figure; an error on a huge
//! line shown in part; a factor past the level limit, a model past the memory budget and
//! a table of too many pairs refused where they are written; the thread count capped and a bad
//! value refused; many live references; quoted spaces kept (also in a file large enough to be
//! read as a stream); a `]` in a quoted name; a refused outside load that says nothing of what
//! lies outside; responses near 1e±200.
//!
//! No test here asserts a time (speed is measured in tests/bench/); a run that would hang is
//! killed after [`TIMEOUT`] and fails.
//!
//! The data are invented for these tests.

use std::path::{Path, PathBuf};
use std::process::{Command, Stdio};
use std::time::{Duration, Instant};

/// How long one run of covey may take before it counts as hanging.
const TIMEOUT: Duration = Duration::from_secs(120);

/// A scratch folder under the target directory, fresh for each test: `<root>/work` is the
/// document's folder, `<root>` holds files outside it.
fn scratch(name: &str) -> PathBuf {
    let root = Path::new(env!("CARGO_TARGET_TMPDIR"))
        .join("limits")
        .join(name);
    let _ = std::fs::remove_dir_all(&root);
    let dir = root.join("work");
    std::fs::create_dir_all(&dir).unwrap_or_else(|e| panic!("{}: {e}", dir.display()));
    dir
}

fn write(path: &Path, text: &str) {
    std::fs::write(path, text).unwrap_or_else(|e| panic!("{}: {e}", path.display()));
}

fn read(path: &Path) -> String {
    std::fs::read_to_string(path).unwrap_or_else(|e| panic!("{}: {e}", path.display()))
}

/// Runs covey in `dir` with `env` set; (exit code, stderr). Killed after [`TIMEOUT`].
fn covey_env(dir: &Path, args: &[&str], env: &[(&str, &str)]) -> (i32, String) {
    let mut cmd = Command::new(env!("CARGO_BIN_EXE_covey"));
    cmd.args(args)
        .current_dir(dir)
        .stdin(Stdio::null())
        .stdout(Stdio::null())
        .stderr(Stdio::piped());
    for (k, v) in env {
        cmd.env(k, v);
    }
    let mut child = cmd
        .spawn()
        .unwrap_or_else(|e| panic!("cannot run covey: {e}"));
    // Read stderr meanwhile, so that a long report never fills the pipe and stalls covey.
    let mut stderr = child.stderr.take();
    let reader = std::thread::spawn(move || {
        let mut text = Vec::new();
        if let Some(s) = stderr.as_mut() {
            let _ = std::io::Read::read_to_end(s, &mut text);
        }
        text
    });
    let started = Instant::now();
    let status = loop {
        match child.try_wait() {
            Ok(Some(status)) => break status,
            Ok(None) if started.elapsed() > TIMEOUT => {
                let _ = child.kill();
                let _ = child.wait();
                panic!("covey {args:?} did not finish in {TIMEOUT:?}");
            }
            Ok(None) => std::thread::sleep(Duration::from_millis(20)),
            Err(e) => panic!("{e}"),
        }
    };
    let stderr = reader.join().unwrap_or_default();
    (
        status.code().unwrap_or(-1),
        String::from_utf8_lossy(&stderr).into_owned(),
    )
}

fn covey(dir: &Path, args: &[&str]) -> (i32, String) {
    covey_env(dir, args, &[])
}

/// A document whose one block holds `statements`.
fn doc(statements: &str) -> String {
    format!("# Limits\n\n```covey\n{statements}\n```\n")
}

/// Invented rows `group,x,y` with `levels` groups named `L0`, `L1`, ...
fn grouped(rows: usize, levels: usize) -> String {
    let mut s = String::from("group,x,y\n");
    for i in 0..rows {
        let x = (i % 17) as f64 * 0.5;
        let y = 2.0 + 0.3 * x + (i % 7) as f64 * 0.11;
        s.push_str(&format!("L{},{x},{y:.3}\n", i % levels.max(1)));
    }
    s
}

#[cfg(unix)]
fn mkfifo(path: &Path) {
    use rustix::fs::{mknodat, FileType, Mode, CWD};
    mknodat(CWD, path, FileType::Fifo, Mode::from_raw_mode(0o600), 0)
        .unwrap_or_else(|e| panic!("mkfifo {}: {e}", path.display()));
}

#[cfg(unix)]
#[test]
fn a_named_pipe_is_refused_without_blocking() {
    let dir = scratch("fifo");
    mkfifo(&dir.join("pipe.csv"));
    write(&dir.join("doc.md"), &doc("load \"pipe.csv\""));
    let (code, err) = covey(&dir, &["render", "doc.md"]);
    assert_eq!(code, 2, "{err}");
    assert!(
        err.contains("doc.md:4:6: error: \"pipe.csv\" is a named pipe (FIFO), not a regular file"),
        "{err}"
    );
    // Through a symbolic link in the folder, too.
    std::os::unix::fs::symlink("pipe.csv", dir.join("link.csv")).unwrap_or_else(|e| panic!("{e}"));
    write(&dir.join("doc.md"), &doc("load \"link.csv\""));
    let (code, err) = covey(&dir, &["render", "doc.md"]);
    assert_eq!(code, 2, "{err}");
    assert!(err.contains("is a named pipe (FIFO)"), "{err}");
}

#[cfg(unix)]
#[test]
fn a_device_is_refused_before_it_is_read() {
    let dir = scratch("device");
    std::os::unix::fs::symlink("/dev/zero", dir.join("zero.csv")).unwrap_or_else(|e| panic!("{e}"));
    write(&dir.join("doc.md"), &doc("load \"zero.csv\""));
    // Confined, the link leads outside the folder.
    let (code, err) = covey(&dir, &["render", "doc.md"]);
    assert_eq!(code, 2, "{err}");
    assert!(err.contains("is outside the document's folder"), "{err}");
    // Allowed outside, the device is still not a data file: refused, not read for ever.
    let (code, err) = covey(&dir, &["render", "--allow-outside", "doc.md"]);
    assert_eq!(code, 2, "{err}");
    assert!(
        err.contains("doc.md:4:6: error: \"zero.csv\" is a character device, not a regular file"),
        "{err}"
    );
    write(&dir.join("doc.md"), &doc("load \"/dev/urandom\""));
    let (code, err) = covey(&dir, &["render", "--allow-outside", "doc.md"]);
    assert_eq!(code, 2, "{err}");
    assert!(err.contains("is a character device"), "{err}");
    // A folder named like a data file.
    std::fs::create_dir_all(dir.join("folder.csv")).unwrap_or_else(|e| panic!("{e}"));
    write(&dir.join("doc.md"), &doc("load \"folder.csv\""));
    let (code, err) = covey(&dir, &["render", "doc.md"]);
    assert_eq!(code, 2, "{err}");
    assert!(err.contains("\"folder.csv\" is a folder"), "{err}");
}

/// The files covey reads that are not data (the document, its rendering, its figures, for
/// `covey check`) are refused in the same way when they are not regular files: a document
/// that is a named pipe or a device used to block, or be read for ever.
#[cfg(unix)]
#[test]
fn a_document_rendering_or_figure_that_is_not_a_file_is_refused() {
    let dir = scratch("special-document");
    mkfifo(&dir.join("pipe.md"));
    for command in ["render", "check"] {
        let (code, err) = covey(&dir, &[command, "pipe.md"]);
        assert_eq!(code, 2, "{command}: {err}");
        assert!(
            err.contains("pipe.md: cannot read: it is a named pipe (FIFO), not a regular file"),
            "{command}: {err}"
        );
    }
    let (code, err) = covey(&dir, &["render", "/dev/zero"]);
    assert_eq!(code, 2, "{err}");
    assert!(
        err.contains("it is a character device, not a regular file"),
        "{err}"
    );
    // A rendering that is a named pipe: check says so instead of waiting on it.
    write(&dir.join("data.csv"), &grouped(40, 2));
    write(
        &dir.join("doc.md"),
        &doc("load \"data.csv\"\nfactor group\nmodel m: y on group + x\nplot residuals m"),
    );
    let (code, err) = covey(&dir, &["render", "doc.md"]);
    assert_eq!(code, 0, "{err}");
    let figure = std::fs::read_dir(dir.join("doc.figures"))
        .unwrap_or_else(|e| panic!("{e}"))
        .filter_map(Result::ok)
        .map(|e| e.path())
        .find(|p| p.extension().is_some_and(|x| x == "svg"))
        .unwrap_or_else(|| panic!("no figure written"));
    std::fs::remove_file(&figure).unwrap_or_else(|e| panic!("{e}"));
    mkfifo(&figure);
    let (code, err) = covey(&dir, &["check", "doc.md"]);
    assert_eq!(code, 1, "{err}");
    std::fs::remove_file(&figure).unwrap_or_else(|e| panic!("{e}"));
    std::fs::remove_file(dir.join("doc.rendered.md")).unwrap_or_else(|e| panic!("{e}"));
    mkfifo(&dir.join("doc.rendered.md"));
    let (code, err) = covey(&dir, &["check", "doc.md"]);
    assert_eq!(code, 2, "{err}");
    assert!(
        err.contains("cannot read its rendering doc.rendered.md: it is a named pipe (FIFO)"),
        "{err}"
    );
}

/// An error on a very long line shows a window of the line around the place it points at,
/// and quotes an unexpected word only in part: a line of 100,000 brackets (a syntax error) or
/// a statement followed by 100,000 spaces (a runtime error, also shown in the rendering) is
/// not repeated whole on stderr.
#[test]
fn an_error_on_a_huge_line_shows_a_window_of_it() {
    let dir = scratch("huge-line");
    write(&dir.join("doc.md"), &doc(&"(".repeat(100_000)));
    let (code, err) = covey(&dir, &["render", "doc.md"]);
    assert_eq!(code, 2, "{err}");
    assert!(
        err.contains("doc.md:4:1: error: this line does not start"),
        "{err}"
    );
    assert!(
        err.contains("(found `((((((((((((((((((((((((((((((((((((((((…`)"),
        "{err}"
    );
    assert!(
        err.contains("\n4 | (((") && err.contains("  | ^^^^"),
        "{err}"
    );
    assert!(err.len() < 2_000, "{} bytes on stderr", err.len());
    write(&dir.join("d.csv"), &grouped(20, 2));
    let long = format!("table fit nosuch{}", " ".repeat(100_000));
    write(
        &dir.join("doc.md"),
        &doc(&format!(
            "load \"d.csv\"\nfactor group\nmodel m: y on group + x\n{long}"
        )),
    );
    let (code, err) = covey(&dir, &["render", "doc.md"]);
    assert_eq!(code, 2, "{err}");
    assert!(
        err.contains("doc.md:7:11: error: there is no model called `nosuch`"),
        "{err}"
    );
    assert!(
        err.contains("\n7 | table fit nosuch") && err.contains("…\n"),
        "{err}"
    );
    assert!(
        err.contains("\n  |           ^^^^^^ unknown model\n"),
        "{err}"
    );
    assert!(err.len() < 2_000, "{} bytes on stderr", err.len());
    let rendered = read(&dir.join("doc.rendered.md"));
    assert!(
        rendered.len() < 2 * long.len() + 3_000,
        "{} bytes",
        rendered.len()
    );
}

#[test]
fn an_outside_load_says_nothing_of_what_is_there() {
    let dir = scratch("outside");
    let outer = dir.parent().unwrap_or(&dir).to_path_buf();
    write(&outer.join("secret.csv"), &grouped(10, 2));
    let mut messages = Vec::new();
    for (k, path) in ["../secret.csv", "../missing.csv"].iter().enumerate() {
        write(&dir.join("doc.md"), &doc(&format!("load \"{path}\"")));
        let (code, err) = covey(&dir, &["render", "doc.md"]);
        assert_eq!(code, 2, "{err}");
        let rendered = read(&dir.join("doc.rendered.md"));
        let absolute = outer.display().to_string();
        assert!(!rendered.contains(&absolute), "{k}: {rendered}");
        assert!(!err.contains(&absolute), "{k}: {err}");
        messages.push(err.lines().next().unwrap_or("").replace(path, "PATH"));
    }
    // The same words whether the outside file exists or not.
    assert_eq!(messages.first(), messages.get(1));
    // A link in the folder to a missing outside file is refused the same way.
    #[cfg(unix)]
    {
        std::os::unix::fs::symlink("../missing.csv", dir.join("link.csv"))
            .unwrap_or_else(|e| panic!("{e}"));
        write(&dir.join("doc.md"), &doc("load \"link.csv\""));
        let (code, err) = covey(&dir, &["render", "doc.md"]);
        assert_eq!(code, 2, "{err}");
        assert!(err.contains("is outside the document's folder"), "{err}");
    }
}

#[test]
fn a_factor_past_the_level_limit_is_refused_at_its_statement() {
    let dir = scratch("levels");
    let levels = covey::data::MAX_FACTOR_LEVELS + 1;
    write(&dir.join("d.csv"), &grouped(2 * levels, levels));
    write(
        &dir.join("doc.md"),
        &doc("load \"d.csv\"\nfactor group\nmodel m: y on group + x"),
    );
    let (code, err) = covey(&dir, &["render", "doc.md"]);
    assert_eq!(code, 2, "{err}");
    assert!(
        err.contains("doc.md:5:8: error: column `group` has more than 10000 distinct values"),
        "{err}"
    );
    assert!(err.contains("first occurs at line 10002"), "{err}");
}

#[test]
fn a_model_past_the_memory_budget_is_refused_before_it_is_fitted() {
    let dir = scratch("budget");
    // 3,000 levels: within the factor limit, but a design of 3,001 columns needs more working
    // memory than the budget.
    write(&dir.join("d.csv"), &grouped(6000, 3000));
    write(
        &dir.join("doc.md"),
        &doc("load \"d.csv\"\nfactor group\nmodel m: y on group + x"),
    );
    let (code, err) = covey(&dir, &["render", "doc.md"]);
    assert_eq!(code, 2, "{err}");
    assert!(
        err.contains(
            "doc.md:6:1: error: the model has 3001 coefficients, and fitting it would take about"
        ),
        "{err}"
    );
    assert!(covey::model::working_bytes(3001, 6000) > covey::model::MODEL_MEMORY_BUDGET);
    assert!(covey::model::working_bytes(1800, 6000) < covey::model::MODEL_MEMORY_BUDGET);
}

/// An interaction of many factors has as many columns as the product of their levels less
/// one: eight factors of 12 levels make 11⁸ + 1 ≈ 214 million. The columns are counted before
/// they are listed, so the model is refused at its line at once; it used to list them and run
/// out of memory (tens of GB) before the budget was looked at.
#[test]
fn an_interaction_of_many_factors_is_refused_before_its_columns_are_listed() {
    let dir = scratch("budget-interaction");
    let names = ["a", "b", "c", "d", "e", "f", "g", "h"];
    let mut csv = format!("{},y\n", names.join(","));
    for i in 0..3000usize {
        let levels: Vec<String> = (0..names.len())
            .map(|k| format!("l{}", (i / (k + 1) + k * i) % 12))
            .collect();
        csv.push_str(&format!(
            "{},{}\n",
            levels.join(","),
            (i % 13) as f64 * 0.25
        ));
    }
    write(&dir.join("d.csv"), &csv);
    let factors: String = names.iter().map(|n| format!("factor {n}\n")).collect();
    write(
        &dir.join("doc.md"),
        &doc(&format!(
            "load \"d.csv\"\n{factors}model m: y on {}",
            names.join(" by ")
        )),
    );
    let (code, err) = covey(&dir, &["render", "doc.md"]);
    assert_eq!(code, 2, "{err}");
    assert!(err.contains("doc.md:13:1: error: the model has "), "{err}");
    // The estimate is at its ceiling (it was printed as "about 17592186044416 MiB"): past
    // 1 TiB the message says "far more" and gives no number of MiB.
    assert!(
        err.contains(
            "fitting it would take far more working memory than covey's limit of 1024 MiB \
             (over 1 TiB)"
        ),
        "{err}"
    );
    assert!(!err.contains("about "), "{err}");
}

#[test]
fn a_table_of_too_many_pairs_is_refused() {
    let dir = scratch("pairs");
    write(&dir.join("d.csv"), &grouped(1206, 201));
    write(
        &dir.join("doc.md"),
        &doc("load \"d.csv\"\nfactor group\nmodel m: y on group + x\ntable means m for group\ntable differences m for group"),
    );
    let (code, err) = covey(&dir, &["render", "doc.md"]);
    assert_eq!(code, 2, "{err}");
    assert!(
        err.contains("doc.md:8:25: error: `group` has 201 levels, which make 20100 pairs"),
        "{err}"
    );
    // The means of all 201 levels were given.
    let rendered = read(&dir.join("doc.rendered.md"));
    assert!(rendered.contains("| L200 |"), "{rendered}");
}

#[test]
fn the_thread_count_is_capped_and_a_bad_one_refused() {
    let dir = scratch("threads");
    write(&dir.join("d.csv"), &grouped(30, 3));
    write(
        &dir.join("doc.md"),
        &doc("load \"d.csv\"\nfactor group\nmodel m: y on group + x\ntable means m for group"),
    );
    let mut renderings = Vec::new();
    for threads in ["1", "10000", "0", ""] {
        let (code, err) = covey_env(&dir, &["render", "doc.md"], &[("COVEY_THREADS", threads)]);
        assert_eq!(code, 0, "{threads}: {err}");
        renderings.push(read(&dir.join("doc.rendered.md")));
    }
    assert!(renderings.windows(2).all(|w| w[0] == w[1]));
    for bad in ["abc", "-1", "1.5", "2 threads"] {
        let (code, err) = covey_env(&dir, &["render", "doc.md"], &[("COVEY_THREADS", bad)]);
        assert_eq!(code, 2, "{bad}: {err}");
        assert!(
            err.contains("COVEY_THREADS=") && err.contains("is not a number of threads"),
            "{bad}: {err}"
        );
    }
}

#[test]
fn many_live_references_resolve_and_read_back() {
    let dir = scratch("references");
    write(&dir.join("d.csv"), &grouped(30, 3));
    let n = 20_000;
    let mut text = doc("load \"d.csv\"\nfactor group\nmodel m: y on group + x\ntable fit m");
    // Half in one paragraph, half in paragraphs of their own.
    text.push('\n');
    for _ in 0..n / 2 {
        text.push_str("R² is @[fit m r_squared]. ");
    }
    text.push_str("\n\n");
    for _ in 0..n / 2 {
        text.push_str("R² is @[fit m r_squared].\n\n");
    }
    write(&dir.join("doc.md"), &text);
    let (code, err) = covey(&dir, &["render", "doc.md"]);
    assert_eq!(code, 0, "{err}");
    let rendered = read(&dir.join("doc.rendered.md"));
    assert_eq!(
        rendered.matches("<!-- covey:value-end -->").count(),
        n,
        "not every reference has its value"
    );
    // As many references to a table the document does not compute: each an error at its own
    // line and column.
    let mut bad = doc("load \"d.csv\"\nfactor group\nmodel m: y on group + x\ntable fit m");
    bad.push('\n');
    for _ in 0..n / 2 {
        bad.push_str("R² is @[fit nope r_squared].\n\n");
    }
    write(&dir.join("bad.md"), &bad);
    let (code, err) = covey(&dir, &["render", "bad.md"]);
    assert_eq!(code, 2, "{}", err.lines().next().unwrap_or(""));
    assert_eq!(
        err.matches("error: the document computes no `fit` table for `nope`")
            .count(),
        n / 2
    );
    assert!(err.contains(&format!("bad.md:{}:7: error", 10 + 2 * (n / 2 - 1))));
    // Rendering the rendering in place gives it back unchanged.
    write(
        &dir.join("again.md"),
        &rendered.replace("`doc.md`", "`again.md`"),
    );
    let (code, err) = covey(&dir, &["render", "--in-place", "again.md"]);
    assert_eq!(code, 0, "{err}");
    assert_eq!(
        read(&dir.join("again.md")),
        rendered.replace("`doc.md`", "`again.md`")
    );
}

#[test]
fn a_bracket_in_a_quoted_name_stays_in_the_reference() {
    let dir = scratch("bracket");
    write(
        &dir.join("d.csv"),
        "group,x,y\na]b,1,2\na]b,2,3.1\na]b,3,4.2\nc,1,5\nc,2,6.3\nc,3,6.9\n",
    );
    let mut text = String::from("# Bracket\n\nMean: @[means m \"a]b\" mean].\n\n");
    text.push_str(&doc(
        "load \"d.csv\"\nfactor group\nmodel m: y on group + x\ntable means m for group",
    ));
    write(&dir.join("doc.md"), &text);
    let (code, err) = covey(&dir, &["render", "doc.md"]);
    assert_eq!(code, 0, "{err}");
    let rendered = read(&dir.join("doc.rendered.md"));
    assert!(
        rendered.contains(
            "Mean: <!-- covey:value @[means m \"a]b\" mean] -->3.100<!-- covey:value-end -->."
        ),
        "{rendered}"
    );
}

/// Rows whose group is written `" a "`, `"a"`, ` a ` or `"b"`, padded with a text column so
/// that the file has at least `bytes` bytes.
fn spaced_levels(bytes: usize) -> String {
    let mut s = String::from("group,x,y,note\n");
    let pad = "p".repeat(64);
    let mut i = 0usize;
    while s.len() < bytes || i < 40 {
        let group = ["\" a \"", "\"a\"", " a ", "\"b\""][i % 4];
        let x = (i % 13) as f64;
        let y = 1.0 + 0.5 * x + (i % 4) as f64 + (i % 5) as f64 * 0.1;
        s.push_str(&format!("{group},{x},{y:.2},{pad}{i}\n"));
        i += 1;
    }
    s
}

#[test]
fn quoted_spaces_make_their_own_level_in_small_and_streamed_files() {
    // 9 MiB is past the size from which a file is read as a stream (8 MiB).
    for (name, bytes) in [("small", 0), ("streamed", 9 << 20)] {
        let dir = scratch(&format!("spaces-{name}"));
        write(&dir.join("d.csv"), &spaced_levels(bytes));
        write(&dir.join("doc.md"), &doc("load \"d.csv\"\nfactor group"));
        let (code, err) = covey(&dir, &["render", "doc.md"]);
        assert_eq!(code, 0, "{name}: {err}");
        let rendered = read(&dir.join("doc.rendered.md"));
        // `" a "` and `"a"` are two levels; the unquoted ` a ` is trimmed to `a`.
        assert!(
            rendered.contains("`group` is a factor with 3 levels: `  a  ` (reference), `a`, `b`"),
            "{name}: {}",
            rendered
                .lines()
                .find(|l| l.contains("is a factor"))
                .unwrap_or("")
        );
    }
}

#[test]
fn responses_near_the_ends_of_the_doubles_are_not_called_constant() {
    let dir = scratch("scale");
    for (k, scale) in ["1e200", "1e-200"].iter().enumerate() {
        let mut csv = String::from("group,x,y\n");
        for i in 0..20 {
            let y = 3.0 + 0.5 * (i % 7) as f64 + (i % 2) as f64 + (i % 3) as f64 * 0.1;
            csv.push_str(&format!(
                "{},{},{y}{}\n",
                ["A", "B"][i % 2],
                i % 7,
                &scale[1..]
            ));
        }
        write(&dir.join("d.csv"), &csv);
        write(
            &dir.join("doc.md"),
            &doc("load \"d.csv\"\nfactor group\nmodel m: y on group + x"),
        );
        let (code, err) = covey(&dir, &["render", "doc.md"]);
        assert_eq!(code, 2, "{k}: {err}");
        assert!(!err.contains("same value"), "{k}: {err}");
        assert!(
            err.contains("too wide for their sums of squares")
                || err.contains("too narrow for their sums of squares"),
            "{k}: {err}"
        );
    }
}
