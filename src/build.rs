//! The build script: tells the browser tests of `tests/html.rs` whether a browser is there.
//!
//! Rust's test harness decides that a test is ignored when the test is compiled, not while it
//! runs, so a test cannot ignore itself on finding no browser. This script looks for the
//! browser when the tests are built and, when there is none, sets the cfg `no_browser`, under
//! which the browser tests carry `#[ignore = "..."]` with the reason: `cargo test` then reports
//! them as ignored, with that reason, instead of as passed. Under CI (the `CI` variable set)
//! the cfg is never set, so there a missing browser fails the tests, as CI must install one.
//!
//! Cargo runs this again when the browser appears or goes (the browser file, or the folder it
//! would be in, changes) or when `CI` changes.

use std::io::Write;
use std::path::Path;

/// Where the browser tests expect the browser (`CHROMIUM` in `tests/html.rs`).
const BROWSER: &str = "/usr/bin/chromium";

fn main() -> std::io::Result<()> {
    let mut out = std::io::stdout().lock();
    writeln!(out, "cargo::rustc-check-cfg=cfg(no_browser)")?;
    writeln!(out, "cargo::rerun-if-env-changed=CI")?;
    let browser = Path::new(BROWSER);
    if browser.exists() {
        writeln!(out, "cargo::rerun-if-changed={BROWSER}")?;
    } else {
        // The folder changes when a file is added to it.
        if let Some(folder) = browser.parent().filter(|f| f.is_dir()) {
            writeln!(out, "cargo::rerun-if-changed={}", folder.display())?;
        }
        if std::env::var_os("CI").is_none() {
            writeln!(out, "cargo::rustc-cfg=no_browser")?;
        }
    }
    Ok(())
}
