//! How long the language server takes to check a document of 1,000 lines as the user types.
//!
//! Run with `tests/bench/lsp.sh` (one core) or `cargo bench --bench lsp_latency`. It writes an
//! invented data set (fixed seed) and a 1,000-line document into `target/bench/lsp/`, then
//! times, over many repetitions:
//!
//! * one check of the document with its data already read (what each pause in typing costs);
//! * the first check, which also reads the data file;
//! * the protocol's round trip: a `didChange` with the whole text through in-memory channels to
//!   the `publishDiagnostics` that answers it, with no debounce;
//! * a completion and a hover in the last block.
//!
//! It prints medians, 95th percentiles and maxima in milliseconds, as a Markdown table.

use std::path::{Path, PathBuf};
use std::time::{Duration, Instant};

use covey::lsp::{serve, Checker, Options};
use lsp_server::{Connection, Message, Notification, Request, RequestId};
use serde_json::json;

/// Lines of the document.
const LINES: usize = 1000;

/// Rows of the invented data set.
const ROWS: usize = 2000;

/// Timed repetitions of each measurement.
const RUNS: usize = 200;

/// A small linear congruential generator (Knuth's MMIX constants): invented data, the same on
/// every run.
struct Lcg(u64);

impl Lcg {
    fn next(&mut self) -> f64 {
        self.0 = self
            .0
            .wrapping_mul(6364136223846793005)
            .wrapping_add(1442695040888963407);
        (self.0 >> 11) as f64 / (1u64 << 53) as f64
    }
}

/// Invented data: a factor of four groups, a site code, two covariates, a response.
fn data() -> String {
    let mut r = Lcg(20_240_601);
    let mut out = String::from("group,site,dose,weight,response\n");
    for i in 0..ROWS {
        let g = ["control", "low", "medium", "high"][i % 4];
        let site = ["north", "south", "east"][(i / 4) % 3];
        let dose = 1.0 + (i % 4) as f64;
        let weight = 50.0 + 20.0 * r.next();
        let response = 10.0 + 2.0 * dose + 0.3 * weight + 3.0 * r.next();
        let response = if i % 97 == 0 {
            String::new()
        } else {
            format!("{response:.2}")
        };
        out.push_str(&format!("{g},{site},{dose},{weight:.2},{response}\n"));
    }
    out
}

/// A document of `LINES` lines: prose between blocks, each block loading, declaring, fitting
/// and asking for tables, and live references in the prose.
fn document() -> String {
    let mut lines: Vec<String> = vec![
        "# Invented trial, for timing the language server".to_string(),
        String::new(),
        "*The data are invented (tests/bench/lsp_latency.rs).*".to_string(),
        String::new(),
        "```covey".to_string(),
        "param alpha = 0.05".to_string(),
        "load \"data.csv\" as trial".to_string(),
        "factor group levels control, low, medium, high".to_string(),
        "factor site".to_string(),
        "```".to_string(),
    ];
    let mut k = 0;
    while lines.len() + 16 < LINES {
        k += 1;
        lines.push(String::new());
        lines.push(format!(
            "Model {k} gives *F* = @[anova m{k} group f] and *p* @[anova m{k} group p], \
             R² = @[fit m{k} r_squared]."
        ));
        lines.push(String::new());
        lines.push("```covey".to_string());
        lines.push(format!("model m{k}: response on group + weight"));
        lines.push(format!("table anova m{k} type 2"));
        lines.push(format!("table fit m{k}"));
        lines.push(format!("table means m{k} for group at weight = 60"));
        lines.push(format!("table pairs m{k} for group adjust holm level 0.99"));
        lines.push(format!("table slopes m{k} of weight for group"));
        lines.push("keep where site in (north, south, east) and dose >= 1".to_string());
        lines.push(format!("require equal slopes m{k} for group alpha @alpha"));
        lines.push(format!("report m{k} pairs group between low and high"));
        lines.push("```".to_string());
    }
    while lines.len() < LINES {
        lines.push("More prose that the server leaves alone.".to_string());
    }
    lines.join("\n") + "\n"
}

fn folder() -> PathBuf {
    let dir = Path::new(env!("CARGO_MANIFEST_DIR")).join("target/bench/lsp");
    std::fs::create_dir_all(&dir).unwrap_or_else(|e| panic!("{}: {e}", dir.display()));
    std::fs::write(dir.join("data.csv"), data()).unwrap_or_else(|e| panic!("{e}"));
    dir
}

/// (median, 95th percentile, maximum) in milliseconds.
fn summary(mut times: Vec<Duration>) -> (f64, f64, f64) {
    times.sort();
    let ms = |d: Duration| d.as_secs_f64() * 1000.0;
    let n = times.len();
    let at = |q: f64| {
        times
            .get(((n as f64 - 1.0) * q).round() as usize)
            .copied()
            .unwrap_or_default()
    };
    (ms(at(0.5)), ms(at(0.95)), ms(at(1.0)))
}

fn row(what: &str, times: Vec<Duration>) {
    let (median, p95, max) = summary(times);
    println!("| {what} | {median:.2} | {p95:.2} | {max:.2} |");
}

fn main() {
    let dir = folder();
    let path = dir.join("doc.md");
    let text = document();
    assert_eq!(text.lines().count(), LINES);
    // On disk too, to be read or rendered (`covey render target/bench/lsp/doc.md`).
    std::fs::write(&path, &text).unwrap_or_else(|e| panic!("{e}"));

    // The first check reads the data file.
    let mut first = Vec::new();
    for _ in 0..10 {
        let mut checker = Checker::new(false);
        let start = Instant::now();
        let a = checker.check(&text, &path);
        first.push(start.elapsed());
        assert!(a.problems.is_empty(), "{:?}", a.problems.first());
    }

    let mut checker = Checker::new(false);
    checker.check(&text, &path);
    let mut checks = Vec::new();
    for i in 0..RUNS {
        // A keystroke: one character more in the last block.
        let typed = text.replacen("table fit m1\n", &format!("table fit m1 # {i}\n"), 1);
        let start = Instant::now();
        let a = checker.check(&typed, &path);
        checks.push(start.elapsed());
        assert!(a.problems.is_empty());
    }

    // Completion after `for ` and a hover on a model, in the last block.
    let a = checker.check(&text, &path);
    let last_for = text.rfind("for group at").unwrap_or(0) + 4;
    let last_model = text.rfind("table fit m").unwrap_or(0) + 11;
    let mut completions = Vec::new();
    let mut hovers = Vec::new();
    for _ in 0..RUNS {
        let start = Instant::now();
        let c = checker.complete(&a, last_for);
        completions.push(start.elapsed());
        assert!(c.is_some_and(|c| !c.candidates.is_empty()));
        let start = Instant::now();
        let h = checker.hover(&a, last_model);
        hovers.push(start.elapsed());
        assert!(h.is_some());
    }

    // The round trip through the protocol.
    let (server, client) = Connection::memory();
    let options = Options {
        debounce: Duration::ZERO,
        ..Options::default()
    };
    let handle = std::thread::spawn(move || serve(&server, &options));
    let uri = format!("file://{}", path.display());
    let send = |m: Message| client.sender.send(m).unwrap_or_else(|e| panic!("{e}"));
    let wait_diagnostics = |version: i64| loop {
        match client.receiver.recv_timeout(Duration::from_secs(30)) {
            Ok(Message::Notification(n))
                if n.method == "textDocument/publishDiagnostics"
                    && n.params["version"].as_i64() == Some(version) =>
            {
                return n.params["diagnostics"].as_array().map_or(0, Vec::len)
            }
            Ok(_) => {}
            Err(e) => panic!("no diagnostics: {e}"),
        }
    };
    send(Message::Request(Request::new(
        RequestId::from(1),
        "initialize".into(),
        json!({"capabilities": {}}),
    )));
    send(Message::Notification(Notification::new(
        "initialized".into(),
        json!({}),
    )));
    send(Message::Notification(Notification::new(
        "textDocument/didOpen".into(),
        json!({"textDocument": {"uri": uri, "languageId": "markdown", "version": 1, "text": text}}),
    )));
    wait_diagnostics(1);
    let mut trips = Vec::new();
    for i in 0..RUNS {
        let version = 2 + i as i64;
        let typed = text.replacen("table fit m1\n", &format!("table fit m1 # {i}\n"), 1);
        let start = Instant::now();
        send(Message::Notification(Notification::new(
            "textDocument/didChange".into(),
            json!({"textDocument": {"uri": uri, "version": version}, "contentChanges": [{"text": typed}]}),
        )));
        let n = wait_diagnostics(version);
        trips.push(start.elapsed());
        assert_eq!(n, 0);
    }
    send(Message::Request(Request::new(
        RequestId::from(2),
        "shutdown".into(),
        serde_json::Value::Null,
    )));
    send(Message::Notification(Notification::new(
        "exit".into(),
        serde_json::Value::Null,
    )));
    let _ = handle.join();

    let words = covey::lsp::grammar::statement_words();
    let statements = text
        .lines()
        .filter(|l| {
            l.split_whitespace()
                .next()
                .is_some_and(|w| words.iter().any(|s| s == w))
        })
        .count();
    println!(
        "{LINES}-line document ({statements} statements, {} references), data {ROWS} rows; {RUNS} runs; times in ms",
        text.matches("@[").count()
    );
    println!();
    println!("| what | median | 95th percentile | maximum |");
    println!("| :-- | --: | --: | --: |");
    row("check after a keystroke (data already read)", checks);
    row("first check (reads the data file)", first);
    row("didChange to publishDiagnostics, no debounce", trips);
    row("completion in the last block", completions);
    row("hover on a model (rows used counted)", hovers);
}
