//! A data file that changes between two renders: `covey check` reports the
//! document stale (exit 1) and names the changed input; after re-rendering,
//! the provenance carries the new SHA-256.

use sha2::{Digest, Sha256};
use std::path::{Path, PathBuf};
use std::process::Command;

/// Invented data, before and after one value is corrected.
const BEFORE: &str =
    "group,x,y\nA,1.0,3.1\nA,2.0,4.9\nA,3.0,7.2\nB,1.5,5.0\nB,2.5,7.1\nB,3.5,8.8\n";
const AFTER: &str = "group,x,y\nA,1.0,3.1\nA,2.0,4.9\nA,3.0,7.4\nB,1.5,5.0\nB,2.5,7.1\nB,3.5,8.8\n";
/// A second input that does not change.
const OTHER: &str = "group,x,y\nA,1,2\nB,2,3\nA,3,5\nB,4,4\n";

const DOC: &str = "# Data change\n\n```covey\nload \"data/other.csv\"\nload \"data/d.csv\"\nfactor group\nmodel m: y on group + x\ntable coefficients m\n```\n";

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

fn sha256_hex(text: &str) -> String {
    Sha256::digest(text.as_bytes())
        .iter()
        .map(|b| format!("{b:02x}"))
        .collect()
}

fn setup() -> PathBuf {
    let dir = Path::new(env!("CARGO_TARGET_TMPDIR")).join("data-change");
    let _ = std::fs::remove_dir_all(&dir);
    std::fs::create_dir_all(dir.join("data")).unwrap_or_else(|e| panic!("{e}"));
    std::fs::write(dir.join("data/d.csv"), BEFORE).unwrap_or_else(|e| panic!("{e}"));
    std::fs::write(dir.join("data/other.csv"), OTHER).unwrap_or_else(|e| panic!("{e}"));
    std::fs::write(dir.join("doc.md"), DOC).unwrap_or_else(|e| panic!("{e}"));
    dir
}

#[test]
fn a_changed_data_file_makes_the_rendering_stale_and_is_named() {
    let dir = setup();
    let rendered = dir.join("doc.rendered.md");
    assert_eq!(covey(&dir, &["render", "doc.md"]).0, 0);
    let first = std::fs::read_to_string(&rendered).unwrap_or_default();
    assert!(first.contains(&sha256_hex(BEFORE)), "{first}");
    assert_eq!(covey(&dir, &["check", "doc.md"]).0, 0);

    std::fs::write(dir.join("data/d.csv"), AFTER).unwrap_or_else(|e| panic!("{e}"));
    let (code, out) = covey(&dir, &["check", "doc.md"]);
    assert_eq!(code, 1, "{out}");
    assert!(out.contains("stale: doc.md"), "{out}");
    assert!(out.contains("the inputs changed"), "{out}");
    let new_sha = sha256_hex(AFTER);
    assert!(
        out.contains(&format!(
            "changed input: data/d.csv (SHA-256 now {new_sha})"
        )),
        "{out}"
    );
    assert!(!out.contains("changed input: data/other.csv"), "{out}");
    // check writes nothing.
    assert_eq!(
        std::fs::read_to_string(&rendered).unwrap_or_default(),
        first
    );

    assert_eq!(covey(&dir, &["render", "doc.md"]).0, 0);
    let second = std::fs::read_to_string(&rendered).unwrap_or_default();
    assert!(second.contains(&new_sha), "{second}");
    assert!(!second.contains(&sha256_hex(BEFORE)), "{second}");
    assert!(second.contains(&sha256_hex(OTHER)), "{second}");
    assert_eq!(covey(&dir, &["check", "doc.md"]).0, 0);
}
