//! Nothing escapes: covey's source never spawns a program and never opens a
//! network connection. This reads every `.rs` file under `src/` and the
//! manifest and fails on any process-spawning or network API.

use std::path::{Path, PathBuf};

/// Text that would mean running another program or using the network.
const FORBIDDEN: &[&str] = &[
    "std::process",
    "process::Command",
    "Command::new",
    "Stdio",
    ".spawn(",
    "os::unix::process",
    "std::net",
    "TcpStream",
    "TcpListener",
    "UdpSocket",
    "UnixStream",
    "reqwest",
    "ureq",
    "hyper::",
    "curl::",
    "tokio::net",
];

/// The two uses of `std::process` that neither spawn nor connect: the exit
/// status of `main` and the process id in a unit test's scratch folder. They are
/// removed (exactly these texts) before the scan.
const HARMLESS: &[&str] = &["std::process::ExitCode", "std::process::id()"];

/// Network client crates that must not appear among the dependencies.
const NETWORK_CRATES: &[&str] = &[
    "reqwest",
    "ureq",
    "hyper",
    "curl",
    "isahc",
    "surf",
    "attohttpc",
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

#[test]
fn src_never_spawns_or_connects() {
    let root = Path::new(env!("CARGO_MANIFEST_DIR"));
    let mut files = Vec::new();
    rust_files(&root.join("src"), &mut files);
    files.sort();
    assert!(files.len() > 10, "found only {} source files", files.len());
    let mut hits = Vec::new();
    for file in &files {
        let text =
            std::fs::read_to_string(file).unwrap_or_else(|e| panic!("{}: {e}", file.display()));
        for (i, line) in text.lines().enumerate() {
            let mut cleaned = line.to_string();
            for ok in HARMLESS {
                cleaned = cleaned.replace(ok, "");
            }
            // `use std::process::ExitCode;` also appears as a bare import path.
            cleaned = cleaned.replace("use std::process::{ExitCode}", "");
            for bad in FORBIDDEN {
                if cleaned.contains(bad) {
                    hits.push(format!("{}:{}: {bad}: {line}", file.display(), i + 1));
                }
            }
        }
    }
    assert!(hits.is_empty(), "{}", hits.join("\n"));
}

#[test]
fn no_network_crate_is_a_dependency() {
    let manifest =
        std::fs::read_to_string(Path::new(env!("CARGO_MANIFEST_DIR")).join("Cargo.toml"))
            .unwrap_or_else(|e| panic!("{e}"));
    for line in manifest.lines() {
        let name = line.split('=').next().unwrap_or("").trim();
        assert!(
            !NETWORK_CRATES.contains(&name),
            "network crate in Cargo.toml: {line}"
        );
    }
}
