//! No panic on a failed write or read: covey's source (outside its tests)
//! calls no `unwrap` or `expect`, which would turn an I/O error (a closed
//! pipe, a full disk, a file that vanished) into a panic, and none of the
//! `print!` family, which panics when its stream is closed or full; nor does
//! it panic by hand. Output goes through `writeln!` with the error handled.

use std::path::{Path, PathBuf};

/// Text that panics on an error, or panics outright.
const FORBIDDEN: &[&str] = &[
    ".unwrap()",
    ".expect(",
    "println!",
    "print!(",
    "eprintln!",
    "eprint!(",
    "panic!(",
    "unreachable!(",
    "todo!(",
    "unimplemented!(",
    "dbg!(",
];

fn rust_files(dir: &Path, out: &mut Vec<PathBuf>) {
    let entries = std::fs::read_dir(dir).unwrap_or_else(|e| panic!("{}: {e}", dir.display()));
    for entry in entries {
        let path = entry.unwrap_or_else(|e| panic!("{e}")).path();
        if path.is_dir() {
            rust_files(&path, out);
        } else if path.extension().is_some_and(|x| x == "rs") {
            out.push(path);
        }
    }
}

/// The files that are test modules (`#[cfg(test)] mod NAME;`), which may
/// unwrap as tests do.
fn test_modules(files: &[PathBuf]) -> Vec<PathBuf> {
    let mut out = Vec::new();
    for file in files {
        let text = std::fs::read_to_string(file).unwrap_or_default();
        let lines: Vec<&str> = text.lines().map(str::trim).collect();
        for pair in lines.windows(2) {
            let [attr, decl] = pair else { continue };
            let Some(name) = decl.strip_prefix("mod ").and_then(|d| d.strip_suffix(';')) else {
                continue;
            };
            if *attr != "#[cfg(test)]" {
                continue;
            }
            // Beside a mod.rs or lib.rs; in the folder of the same name otherwise.
            let stem = file
                .file_stem()
                .and_then(|s| s.to_str())
                .unwrap_or_default();
            let folder = match stem {
                "mod" | "lib" | "main" => file.parent().map(Path::to_path_buf),
                _ => file.parent().map(|p| p.join(stem)),
            }
            .unwrap_or_default();
            out.push(folder.join(format!("{name}.rs")));
            out.push(folder.join(name).join("mod.rs"));
        }
    }
    out
}

/// The lines of `text` before its inline test module (`#[cfg(test)]` then
/// `mod tests {`), which by covey's convention closes a file.
fn before_tests(text: &str) -> Vec<(usize, &str)> {
    let lines: Vec<&str> = text.lines().collect();
    let end = lines
        .windows(2)
        .position(|w| w[0].trim() == "#[cfg(test)]" && w[1].trim_start().starts_with("mod "))
        .unwrap_or(lines.len());
    lines[..end]
        .iter()
        .enumerate()
        .map(|(i, l)| (i + 1, *l))
        .collect()
}

#[test]
fn src_never_unwraps_or_prints_with_a_panic() {
    let root = Path::new(env!("CARGO_MANIFEST_DIR"));
    let mut files = Vec::new();
    rust_files(&root.join("src"), &mut files);
    files.sort();
    assert!(files.len() > 20, "the scan found the sources");
    let tests = test_modules(&files);
    assert!(
        tests.iter().any(|t| t.ends_with("document/tests.rs")),
        "test modules are recognised: {tests:?}"
    );
    let mut found = Vec::new();
    for file in files.iter().filter(|f| !tests.contains(f)) {
        let text = std::fs::read_to_string(file).unwrap_or_default();
        for (no, line) in before_tests(&text) {
            let code = line.trim_start();
            if code.starts_with("//") {
                continue;
            }
            for bad in FORBIDDEN {
                if code.contains(bad) {
                    found.push(format!(
                        "{}:{no}: {bad} in `{}`",
                        file.strip_prefix(root).unwrap_or(file).display(),
                        code.trim()
                    ));
                }
            }
        }
    }
    assert!(
        found.is_empty(),
        "a panic waiting for an error:\n{}",
        found.join("\n")
    );
}

/// The scan can fail: it finds what it forbids.
#[test]
fn the_scan_sees_what_it_forbids() {
    let text = "fn f() {\n    let x = std::fs::read(p).unwrap();\n    println!(\"{x:?}\");\n}\n#[cfg(test)]\nmod tests {\n    fn g() { h().unwrap(); }\n}\n";
    let hits: Vec<usize> = before_tests(text)
        .into_iter()
        .filter(|(_, l)| FORBIDDEN.iter().any(|b| l.contains(b)))
        .map(|(n, _)| n)
        .collect();
    assert_eq!(hits, [2, 3]);
}
