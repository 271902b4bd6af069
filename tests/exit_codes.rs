//! Exit codes through the binary: 0 success, 1 stale or failed gate,
//! 2 usage or input error (README, "Exit codes").

use std::path::{Path, PathBuf};
use std::process::Command;

/// Invented data: two groups, a covariate and a response.
const DATA: &str = "group,x,y\nA,1.0,3.1\nA,2.0,4.9\nA,3.0,7.2\nB,1.5,5.0\nB,2.5,7.1\nB,3.5,8.8\n";

fn scratch(name: &str) -> PathBuf {
    let dir = Path::new(env!("CARGO_TARGET_TMPDIR"))
        .join("exit-codes")
        .join(name);
    let _ = std::fs::remove_dir_all(&dir);
    std::fs::create_dir_all(&dir).unwrap_or_else(|e| panic!("{e}"));
    std::fs::write(dir.join("d.csv"), DATA).unwrap_or_else(|e| panic!("{e}"));
    dir
}

fn doc(dir: &Path, body: &str) {
    let text = format!("# Exit codes\n\n```covey\n{body}\n```\n");
    std::fs::write(dir.join("doc.md"), text).unwrap_or_else(|e| panic!("{e}"));
}

fn covey(dir: &Path, args: &[&str]) -> (i32, String) {
    let out = Command::new(env!("CARGO_BIN_EXE_covey"))
        .args(args)
        .current_dir(dir)
        .output()
        .unwrap_or_else(|e| panic!("cannot run covey: {e}"));
    let mut text = String::from_utf8_lossy(&out.stdout).into_owned();
    text.push_str(&String::from_utf8_lossy(&out.stderr));
    (out.status.code().unwrap_or(-1), text)
}

#[test]
fn zero_for_a_good_render_and_a_current_check() {
    let dir = scratch("zero");
    doc(
        &dir,
        "load \"d.csv\"\nfactor group\nmodel m: y on group + x\ntable fit m",
    );
    assert_eq!(covey(&dir, &["render", "doc.md"]).0, 0);
    let (code, out) = covey(&dir, &["check", "doc.md"]);
    assert_eq!(code, 0, "{out}");
    assert!(out.contains("current: doc.md"), "{out}");
}

#[test]
fn one_for_a_never_rendered_or_stale_document() {
    let dir = scratch("one-stale");
    doc(&dir, "load \"d.csv\"\ntable summary y");
    let (code, out) = covey(&dir, &["check", "doc.md"]);
    assert_eq!(code, 1, "{out}");
    assert!(out.contains("has never been rendered"), "{out}");
    assert_eq!(covey(&dir, &["render", "doc.md"]).0, 0);
    doc(&dir, "load \"d.csv\"\ntable summary x");
    let (code, out) = covey(&dir, &["check", "doc.md"]);
    assert_eq!(code, 1, "{out}");
    assert!(out.contains("stale: doc.md"), "{out}");
    assert!(out.contains("the document's own text changed"), "{out}");
}

#[test]
fn one_for_a_failed_gate_and_zero_when_overridden() {
    let dir = scratch("one-gate");
    doc(
        &dir,
        "load \"d.csv\"\nfactor group\nrequire 10 rows per group\ntable summary y by group",
    );
    let (code, out) = covey(&dir, &["render", "doc.md"]);
    assert_eq!(code, 1, "{out}");
    let (code, out) = covey(&dir, &["render", "--override-gates", "doc.md"]);
    assert!(code == 0 || code == 1, "{out}");
    let rendered = std::fs::read_to_string(dir.join("doc.rendered.md")).unwrap_or_default();
    assert!(rendered.contains("STOP"), "{rendered}");
}

#[test]
fn two_for_usage_and_input_errors() {
    let dir = scratch("two");
    doc(&dir, "load \"d.csv\"\ntable summary y");
    let cases: &[&[&str]] = &[
        &["render", "--no-such-flag", "doc.md"],
        &["frobnicate", "doc.md"],
        &["render"],
        &["render", "missing.md"],
        &["render", "--set", "nosuch=1", "doc.md"],
    ];
    for args in cases {
        let (code, out) = covey(&dir, args);
        assert_eq!(code, 2, "{args:?}: {out}");
    }
    // An input error: a data file with a ragged row.
    std::fs::write(dir.join("d.csv"), "group,x,y\nA,1\n").unwrap_or_else(|e| panic!("{e}"));
    let (code, out) = covey(&dir, &["render", "doc.md"]);
    assert_eq!(code, 2, "{out}");
    assert!(out.contains("doc.md:4:6: error"), "{out}");
    // A syntax error: nothing is written.
    let dir = scratch("two-syntax");
    doc(&dir, "load d.csv");
    let (code, out) = covey(&dir, &["render", "doc.md"]);
    assert_eq!(code, 2, "{out}");
    assert!(!dir.join("doc.rendered.md").exists());
}
