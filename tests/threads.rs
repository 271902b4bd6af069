//! Every output byte is the same whatever the number of threads (src/parallel.rs): a document
//! on enough rows to be split into many blocks (engine) and parts (loader) is rendered with
//! COVEY_THREADS = 1, 2 and 3, and the renderings, JSON and figures are compared byte for byte.
//! The data file is larger than the loader's window, so it is read as a stream; its
//! fingerprint in the rendering is checked against the file's.
//!
//! The data are invented: a 4-level factor, a covariate and a response from a fixed-seed
//! generator, with a few missing cells so that the rows used are not consecutive.

use std::path::{Path, PathBuf};
use std::process::Command;

/// Rows: many engine blocks (4096 rows each), loader parts (about 512 KiB each) and windows
/// (8 MiB each: the file is streamed), and blocks of the checks and figures (65,536 rows
/// each; the last one short).
const ROWS: usize = 360_000;

const DOC: &str = "# Threads\n\n*Invented data.*\n\n```covey
load \"d.csv\" as d
factor g levels A, B, C, D
model parallel: y on g + x
model separate: y on g + x + g by x
table anova parallel type 1
table anova separate type 3
table compare parallel, separate
table means parallel for g
table differences parallel for g
check parallel
plot lines parallel
plot residuals parallel
```
";

fn data() -> String {
    let mut state: u64 = 20_261_201;
    let mut next = move || {
        state = state
            .wrapping_mul(6_364_136_223_846_793_005)
            .wrapping_add(1_442_695_040_888_963_407);
        (state >> 11) as f64 / (1u64 << 53) as f64
    };
    let mut s = String::from("y,x,g,note\n");
    for i in 0..ROWS {
        let g = ["A", "B", "C", "D"][i % 4];
        let x = 20.0 + 60.0 * next();
        let y = 10.0 + (i % 4) as f64 + 0.8 * x + 4.0 * (next() - 0.5);
        if i % 997 == 5 {
            s.push_str(&format!(",{x:.3},{g},r{i}\n"));
        } else {
            s.push_str(&format!("{y:.3},{x:.3},{g},r{i}\n"));
        }
    }
    s
}

fn render(dir: &Path, threads: &str) -> Vec<(PathBuf, Vec<u8>)> {
    let out = dir.join(format!("out-{threads}"));
    let status = Command::new(env!("CARGO_BIN_EXE_covey"))
        .args(["render", "doc.md", "--out"])
        .arg(&out)
        .arg("--json")
        .arg(out.join("doc.json"))
        .env("COVEY_THREADS", threads)
        .current_dir(dir)
        .output()
        .unwrap_or_else(|e| panic!("cannot run covey: {e}"));
    assert!(
        status.status.success(),
        "render with {threads} threads: {}",
        String::from_utf8_lossy(&status.stderr)
    );
    let mut files = Vec::new();
    let mut stack = vec![out.clone()];
    while let Some(d) = stack.pop() {
        for e in std::fs::read_dir(&d).unwrap_or_else(|e| panic!("{e}")) {
            let p = e.unwrap_or_else(|e| panic!("{e}")).path();
            if p.is_dir() {
                stack.push(p);
            } else {
                let bytes = std::fs::read(&p).unwrap_or_else(|e| panic!("{e}"));
                let rel = p.strip_prefix(&out).map(Path::to_path_buf).unwrap_or(p);
                files.push((rel, bytes));
            }
        }
    }
    files.sort();
    files
}

#[test]
fn same_bytes_whatever_the_thread_count() {
    let dir = Path::new(env!("CARGO_TARGET_TMPDIR")).join("threads");
    let _ = std::fs::remove_dir_all(&dir);
    std::fs::create_dir_all(&dir).unwrap_or_else(|e| panic!("{e}"));
    let csv = data();
    assert!(
        csv.len() > 1 << 23,
        "larger than a window: {} bytes",
        csv.len()
    );
    std::fs::write(dir.join("d.csv"), &csv).unwrap_or_else(|e| panic!("{e}"));
    std::fs::write(dir.join("doc.md"), DOC).unwrap_or_else(|e| panic!("{e}"));
    let one = render(&dir, "1");
    assert!(one.len() >= 3, "a rendering, its JSON and figures: {one:?}");
    let sha = covey::data::sha256_hex(csv.as_bytes());
    let loaded = format!("{ROWS} rows, 4 columns (SHA-256 `{sha}`)");
    assert!(
        one.iter()
            .any(|(_, bytes)| String::from_utf8_lossy(bytes).contains(&loaded)),
        "the rendering states {loaded}"
    );
    for threads in ["2", "3"] {
        let other = render(&dir, threads);
        assert_eq!(
            one.iter().map(|f| &f.0).collect::<Vec<_>>(),
            other.iter().map(|f| &f.0).collect::<Vec<_>>(),
            "the same files with {threads} threads"
        );
        for ((name, a), (_, b)) in one.iter().zip(&other) {
            assert!(
                a == b,
                "{} differs between 1 and {threads} threads",
                name.display()
            );
        }
    }
}
