//! No dependency stays that no code uses: every crate Cargo.toml names is used by path
//! (`name::...`, also in `use name::...`) in the code that builds with it: the program's
//! sources for `[dependencies]`, the tests for `[dev-dependencies]`. (nalgebra, for one, holds
//! the robust Wald test's Cholesky solve in src/model/fit.rs.)

use std::path::{Path, PathBuf};

/// Every `.rs` file under `dir`, in a fixed order.
fn sources(dir: &Path) -> Vec<PathBuf> {
    let mut out = Vec::new();
    let mut entries: Vec<PathBuf> = std::fs::read_dir(dir)
        .unwrap_or_else(|e| panic!("{}: {e}", dir.display()))
        .filter_map(|e| e.ok().map(|e| e.path()))
        .collect();
    entries.sort();
    for p in entries {
        if p.is_dir() {
            out.extend(sources(&p));
        } else if p.extension().is_some_and(|x| x == "rs") {
            out.push(p);
        }
    }
    out
}

/// The crate names of the dependency tables of Cargo.toml, as (name, whether a
/// dev-dependency).
fn dependencies(manifest: &str) -> Vec<(String, bool)> {
    let mut out = Vec::new();
    let mut section: Option<bool> = None;
    for line in manifest.lines() {
        let line = line.trim();
        if line.starts_with('[') {
            section = if line == "[dev-dependencies]" {
                Some(true)
            } else if line == "[dependencies]" || line.ends_with(".dependencies]") {
                Some(false)
            } else {
                None
            };
            continue;
        }
        if let (Some(dev), Some((name, _))) = (section, line.split_once('=')) {
            let name = name.trim();
            if !name.is_empty() && !name.starts_with('#') {
                out.push((name.replace('-', "_"), dev));
            }
        }
    }
    out
}

/// Whether `text` names the crate by path, `name::`, not as the end of a longer name
/// (`pest::` is not found in `pest_derive::`, nor `csv::` in `my_csv::`).
fn uses(text: &str, name: &str) -> bool {
    let path = format!("{name}::");
    text.match_indices(&path).any(|(i, _)| {
        !text[..i]
            .chars()
            .next_back()
            .is_some_and(|c| c.is_alphanumeric() || c == '_')
    })
}

#[test]
fn every_dependency_is_used() {
    let root = Path::new(env!("CARGO_MANIFEST_DIR"));
    let manifest = std::fs::read_to_string(root.join("Cargo.toml"))
        .unwrap_or_else(|e| panic!("Cargo.toml: {e}"));
    let read_all = |dirs: &[&str]| -> String {
        dirs.iter()
            .flat_map(|d| sources(&root.join(d)))
            .map(|p| std::fs::read_to_string(&p).unwrap_or_else(|e| panic!("{}: {e}", p.display())))
            .collect::<Vec<_>>()
            .join("\n")
    };
    let program = read_all(&["src"]);
    let tests = read_all(&["tests"]);
    let deps = dependencies(&manifest);
    assert!(
        deps.iter().any(|(n, dev)| n == "nalgebra" && !dev),
        "the manifest was not read: {deps:?}"
    );
    let unused: Vec<&str> = deps
        .iter()
        .filter(|(name, dev)| !uses(if *dev { &tests } else { &program }, name))
        .map(|(name, _)| name.as_str())
        .collect();
    assert!(unused.is_empty(), "dependencies no code uses: {unused:?}");
}
