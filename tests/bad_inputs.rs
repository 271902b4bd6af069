//! The corpus of bad inputs in `tests/bad/`: each case is rendered by the
//! release binary in a copy of its folder, and its exit code and messages
//! are compared with the case's `expected.txt` (see `tests/bad/README.txt`).

use std::path::{Path, PathBuf};
use std::process::Command;

/// The corpus folder.
fn corpus() -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR"))
        .join("tests")
        .join("bad")
}

/// Size of the generated over-long line: past covey's 1 MiB line limit.
const LONG_LINE_BYTES: usize = (1 << 20) + 16;

fn read_bytes(path: &Path) -> Vec<u8> {
    std::fs::read(path).unwrap_or_else(|e| panic!("{}: {e}", path.display()))
}

/// Copies the files of `from` (one level, as the cases are flat) into `to`.
fn copy_case(from: &Path, to: &Path) {
    std::fs::create_dir_all(to).unwrap_or_else(|e| panic!("{}: {e}", to.display()));
    let entries = std::fs::read_dir(from).unwrap_or_else(|e| panic!("{}: {e}", from.display()));
    for entry in entries {
        let entry = entry.unwrap_or_else(|e| panic!("{e}"));
        let path = entry.path();
        assert!(path.is_file(), "cases hold files only: {}", path.display());
        std::fs::write(to.join(entry.file_name()), read_bytes(&path))
            .unwrap_or_else(|e| panic!("{}: {e}", to.display()));
    }
}

/// The expected exit code and stderr substrings of a case.
fn expected(case: &Path) -> (i32, Vec<String>) {
    let text = String::from_utf8(read_bytes(&case.join("expected.txt")))
        .unwrap_or_else(|e| panic!("{}: {e}", case.display()));
    let mut lines = text.lines();
    let code = lines
        .next()
        .and_then(|l| l.trim().parse().ok())
        .unwrap_or_else(|| panic!("{}: first line must be an exit code", case.display()));
    let subs = lines
        .filter(|l| !l.is_empty())
        .map(str::to_string)
        .collect();
    (code, subs)
}

/// Runs one case; returns a description of what went wrong, if anything.
fn run_case(case: &Path, scratch_root: &Path) -> Option<String> {
    let name = case.file_name()?.to_string_lossy().into_owned();
    let (code, subs) = expected(case);
    // The copy lives in `<root>/<name>/work`; `<root>/<name>/x.csv` is a
    // real file outside the document's folder, for the confinement case.
    let outer = scratch_root.join(&name);
    let _ = std::fs::remove_dir_all(&outer);
    let work = outer.join("work");
    copy_case(case, &work);
    std::fs::write(outer.join("x.csv"), "g,y\nA,1\nB,2\n").unwrap_or_else(|e| panic!("{e}"));
    if work.join("GENERATE-LONG-LINE").exists() {
        let mut data = b"group,y\nA,".to_vec();
        data.extend(std::iter::repeat_n(b'1', LONG_LINE_BYTES));
        data.extend_from_slice(b"\nB,2\n");
        std::fs::write(work.join("d.csv"), data).unwrap_or_else(|e| panic!("{e}"));
    }
    let source_before = read_bytes(&case.join("doc.md"));
    // `args.txt`: more arguments for the command line (a `--database` address, say).
    let extra: Vec<String> = std::fs::read_to_string(work.join("args.txt"))
        .map(|t| t.split_whitespace().map(str::to_string).collect())
        .unwrap_or_default();
    let out = Command::new(env!("CARGO_BIN_EXE_covey"))
        .args(["render", "doc.md"])
        .args(&extra)
        .current_dir(&work)
        .output()
        .unwrap_or_else(|e| panic!("cannot run covey: {e}"));
    let stderr = String::from_utf8_lossy(&out.stderr);
    let mut problems = Vec::new();
    if out.status.code() != Some(code) {
        problems.push(format!(
            "exit code {:?}, expected {code}",
            out.status.code()
        ));
    }
    for s in &subs {
        if !stderr.contains(s.as_str()) {
            problems.push(format!("stderr lacks {s:?}"));
        }
    }
    if read_bytes(&work.join("doc.md")) != source_before {
        problems.push("the copied doc.md was modified".to_string());
    }
    if read_bytes(&case.join("doc.md")) != source_before {
        problems.push("the corpus doc.md was modified".to_string());
    }
    if problems.is_empty() {
        None
    } else {
        Some(format!(
            "{name}: {}\n--- stderr ---\n{stderr}",
            problems.join("; ")
        ))
    }
}

#[test]
fn every_bad_input_gets_its_message_and_exit_code() {
    let root = Path::new(env!("CARGO_TARGET_TMPDIR")).join("bad-inputs");
    let mut cases: Vec<PathBuf> = std::fs::read_dir(corpus())
        .unwrap_or_else(|e| panic!("{e}"))
        .filter_map(|e| e.ok().map(|e| e.path()))
        .filter(|p| p.is_dir())
        .collect();
    cases.sort();
    assert!(cases.len() >= 40, "only {} cases", cases.len());
    let failures: Vec<String> = cases.iter().filter_map(|c| run_case(c, &root)).collect();
    assert!(failures.is_empty(), "{}", failures.join("\n\n"));
}
