//! Bounded fuzzing with proptest: arbitrary and covey-shaped document text
//! through the whole pipeline, arbitrary lines through the parser, and
//! arbitrary bytes through the delimited-file reader. Every case must end
//! without a panic and within `CASE_LIMIT`; inputs are capped at about
//! `MAX_INPUT` bytes, which bounds memory too.

use covey::data::{read_delimited, LoadOptions};
use covey::lang::parse_line;
use covey::pipeline::{self, RunOptions};
use covey::world::MemoryWorld;
use proptest::prelude::*;
use std::time::{Duration, Instant};

/// Generous per-case time limit: a 10 kB input takes milliseconds in
/// release, so one second only trips on runaway (super-linear) behaviour.
const CASE_LIMIT: Duration = Duration::from_secs(1);

/// Size cap of a generated input, in bytes (about 10 kB).
const MAX_INPUT: usize = 10_000;

/// Invented data for the documents to load.
const DATA: &str = "g,x,y,z\nA,1.5,2.0,1\nA,2.5,2.9,2\nA,3.1,3.8,3\nB,1.0,3.1,1\nB,3.0,4.4,2\nB,2.2,4.0,2\nC,2.0,5.2,3\nC,2.4,5.0,1\nC,0.9,4.1,2\n";

fn world() -> MemoryWorld {
    MemoryWorld::new()
        .with("d.csv", DATA)
        .with("t.tsv", DATA.replace(',', "\t"))
}

/// Words of the covey language and near misses, to reach deep into the grammar.
const WORDS: &[&str] = &[
    "load",
    "\"d.csv\"",
    "\"t.tsv\"",
    "as",
    "d",
    "missing",
    "\"NA\"",
    "use",
    "factor",
    "g",
    "levels",
    "A",
    "B",
    "C",
    "keep",
    "where",
    "x",
    ">",
    "<=",
    "==",
    "!=",
    "in",
    "(",
    ")",
    "and",
    "or",
    "not",
    "show",
    "model",
    "m",
    "n",
    ":",
    "y",
    "on",
    "+",
    "by",
    "x^2",
    "x^3",
    "x^9",
    "log(x)",
    "sqrt(x)",
    "log(",
    "without",
    "intercept",
    "table",
    "summary",
    "fit",
    "coefficients",
    "anova",
    "type",
    "1",
    "2",
    "3",
    "compare",
    "m,",
    "means",
    "for",
    "at",
    "=",
    "pairs",
    "differences",
    "correction",
    "versus",
    "within",
    "robust",
    "dunnett",
    "adjust",
    "tukey",
    "holm",
    "sidak",
    "none",
    "slopes",
    "of",
    "contrast",
    "weights",
    "1,",
    "-1",
    "0.5",
    "regions",
    "between",
    "alpha",
    "0.05",
    "level",
    "0.99",
    "check",
    "plot",
    "lines",
    "residuals",
    "quantiles",
    "influence",
    "groups",
    "unit",
    "\"kg\"",
    "param",
    "@p",
    "@q",
    "require",
    "equal",
    "rows",
    "per",
    "balance",
    "normality",
    "report",
    "term",
    "#",
    "\"",
    "\\",
    "~",
    "1e400",
    "-0",
    "NaN",
    "z",
    "é",
    "\t",
];

/// A covey-shaped line: words of the language in random order.
fn covey_line() -> impl Strategy<Value = String> {
    prop::collection::vec(prop::sample::select(WORDS), 0..12).prop_map(|w| w.join(" "))
}

/// Plausible statements, so that models really get fitted.
const STATEMENTS: &[&str] = &[
    "load \"d.csv\"",
    "factor g levels A, B, C",
    "factor g",
    "factor z",
    "model m: y on g + x",
    "model n: y on g + x + g by x",
    "model m: y on x^2 + log(x) without intercept",
    "keep where x > 1 and not g in (C)",
    "table anova m type 3",
    "table differences m for g correction holm",
    "table slopes n of x for g",
    "table regions n of x for g between A and C",
    "table means m for g at x = 2",
    "table compare m, n",
    "check m",
    "plot lines m",
    "require 2 rows per g",
    "param p = 0.5",
    "report m term g",
];

fn document() -> impl Strategy<Value = String> {
    let line = prop_oneof![
        3 => prop::sample::select(STATEMENTS).prop_map(str::to_string),
        2 => covey_line(),
        1 => "\\PC{0,40}",
    ];
    let block = prop::collection::vec(line, 0..10).prop_map(|ls| ls.join("\n"));
    let piece = prop_oneof![
        block.prop_map(|b| format!("```covey\n{b}\n```")),
        Just("<!-- covey:output -->".to_string()),
        Just("<!-- covey:output-end -->".to_string()),
        Just("<!-- covey:provenance -->".to_string()),
        Just("```covey".to_string()),
        "\\PC{0,60}",
    ];
    prop::collection::vec(piece, 0..8).prop_map(|ps| {
        let mut text = ps.join("\n");
        // Cap the size at a character boundary.
        while text.len() > MAX_INPUT {
            text.pop();
        }
        text
    })
}

/// Delimited-file bytes: mostly CSV-shaped, sometimes anything.
fn delimited_bytes() -> impl Strategy<Value = Vec<u8>> {
    let cell = prop_oneof![
        Just(b"1.5".to_vec()),
        Just(b"-2e3".to_vec()),
        Just(b"A".to_vec()),
        Just(b"\"q,\"\"x\"".to_vec()),
        Just(b"\"".to_vec()),
        Just(b"".to_vec()),
        Just(b"NA".to_vec()),
        Just(b"1,234".to_vec()),
        Just(b"\xef\xbb\xbf".to_vec()),
        Just(b"\xff\xfe".to_vec()),
        Just(b"\0".to_vec()),
        Just(b"\r\n".to_vec()),
        prop::collection::vec(any::<u8>(), 0..8),
    ];
    let sep = prop_oneof![
        Just(b",".to_vec()),
        Just(b"\n".to_vec()),
        Just(b"\t".to_vec())
    ];
    let shaped = prop::collection::vec((cell, sep), 0..400).prop_map(|parts| {
        let mut out = Vec::new();
        for (c, s) in parts {
            out.extend(c);
            out.extend(s);
        }
        out.truncate(MAX_INPUT);
        out
    });
    prop_oneof![shaped, prop::collection::vec(any::<u8>(), 0..MAX_INPUT)]
}

fn timed<T>(what: &str, f: impl FnOnce() -> T) -> T {
    let start = Instant::now();
    let out = f();
    let took = start.elapsed();
    assert!(took < CASE_LIMIT, "{what} took {took:?}");
    out
}

proptest! {
    #![proptest_config(ProptestConfig { cases: 800, failure_persistence: None, ..ProptestConfig::default() })]

    #[test]
    fn documents_never_panic(text in document()) {
        let w = world();
        let _ = timed("pipeline::run", || pipeline::run(&text, "fuzz.md", &w, RunOptions::default()));
    }

    #[test]
    fn documents_with_options_never_panic(text in document(), set in "[a-z@=0-9.\"]{0,12}") {
        let w = world();
        let opts = RunOptions {
            keep_going: true,
            override_gates: true,
            params: vec![("p".to_string(), set)],
            ..RunOptions::default()
        };
        let _ = timed("pipeline::run", || pipeline::run(&text, "fuzz.md", &w, opts));
    }
}

proptest! {
    #![proptest_config(ProptestConfig { cases: 6000, failure_persistence: None, ..ProptestConfig::default() })]

    #[test]
    fn lines_never_panic(line in prop_oneof![covey_line(), "\\PC{0,200}", ".{0,200}"]) {
        let _ = timed("parse_line", || parse_line(&line, 0, 1));
    }

    #[test]
    fn long_lines_never_panic(line in prop::collection::vec(prop::sample::select(WORDS), 0..2000)) {
        let mut text = line.join(" ");
        text.truncate(text.char_indices().map(|(i, _)| i).take_while(|i| *i <= MAX_INPUT).last().unwrap_or(0));
        let _ = timed("parse_line", || parse_line(&text, 17, 3));
    }
}

proptest! {
    #![proptest_config(ProptestConfig { cases: 3000, failure_persistence: None, ..ProptestConfig::default() })]

    #[test]
    fn bytes_never_panic(bytes in delimited_bytes(), tab in any::<bool>(), marker in any::<bool>()) {
        let opts = LoadOptions {
            name: "fuzz".to_string(),
            delimiter: if tab { b'\t' } else { b',' },
            missing: if marker { vec!["NA".to_string(), String::new()] } else { Vec::new() },
            // Decimal commas go with another separator, as in files that use them.
            decimal_comma: tab,
        };
        let _ = timed("read_delimited", || read_delimited(&bytes, &opts));
    }
}

/// A folder holding the documents' data files, for the language server (which reads them from
/// disk, confined to the document's folder, as the renderer does).
fn lsp_folder() -> &'static std::path::Path {
    static DIR: std::sync::OnceLock<std::path::PathBuf> = std::sync::OnceLock::new();
    DIR.get_or_init(|| {
        let dir = std::path::Path::new(env!("CARGO_TARGET_TMPDIR")).join("fuzz-lsp");
        std::fs::create_dir_all(&dir).unwrap_or_else(|e| panic!("{e}"));
        std::fs::write(dir.join("d.csv"), DATA).unwrap_or_else(|e| panic!("{e}"));
        std::fs::write(dir.join("t.tsv"), DATA.replace(',', "\t"))
            .unwrap_or_else(|e| panic!("{e}"));
        dir
    })
}

/// A protocol message as the language server's tests send it.
fn lsp_message(method: &str, id: Option<i32>, params: serde_json::Value) -> lsp_server::Message {
    match id {
        Some(id) => lsp_server::Message::Request(lsp_server::Request::new(
            id.into(),
            method.to_string(),
            params,
        )),
        None => lsp_server::Message::Notification(lsp_server::Notification::new(
            method.to_string(),
            params,
        )),
    }
}

proptest! {
    #![proptest_config(ProptestConfig { cases: 400, failure_persistence: None, ..ProptestConfig::default() })]

    /// The language server on the same documents: a check, then completion, hover and
    /// definition at places spread over the text (byte offsets, some inside characters).
    #[test]
    fn documents_never_panic_the_language_server(text in document(), places in prop::collection::vec(any::<prop::sample::Index>(), 0..8)) {
        let path = lsp_folder().join("fuzz.md");
        let mut checker = covey::lsp::Checker::new(false);
        let a = timed("lsp check", || checker.check(&text, &path));
        for place in places {
            let at = place.index(text.len() + 1);
            timed("lsp completion", || checker.complete(&a, at));
            timed("lsp hover", || checker.hover(&a, at));
            timed("lsp definition", || checker.definition(&a, at));
        }
    }
}

proptest! {
    #![proptest_config(ProptestConfig { cases: 60, failure_persistence: None, ..ProptestConfig::default() })]

    /// Whole sessions: a generated document opened, edited at arbitrary places (past the ends of
    /// lines and of the text too) with arbitrary text, and asked about arbitrary places; every
    /// request is answered and the session ends cleanly.
    #[test]
    fn sessions_never_panic_the_language_server(
        text in document(),
        edits in prop::collection::vec((0u32..40, 0u32..90, 0u32..40, 0u32..90, prop_oneof![covey_line(), "\\PC{0,30}"]), 0..6),
        asks in prop::collection::vec((0u32..40, 0u32..90), 0..6),
    ) {
        use serde_json::json;
        let (server, client) = lsp_server::Connection::memory();
        let options = covey::lsp::Options { debounce: Duration::ZERO, ..covey::lsp::Options::default() };
        let handle = std::thread::spawn(move || covey::lsp::serve(&server, &options));
        let uri = format!("file://{}", lsp_folder().join("fuzz.md").display());
        let send = |m| client.sender.send(m).unwrap_or_else(|e| panic!("{e}"));
        send(lsp_message("initialize", Some(0), json!({"capabilities": {}})));
        send(lsp_message("initialized", None, json!({})));
        send(lsp_message("textDocument/didOpen", None, json!({"textDocument": {"uri": uri, "languageId": "markdown", "version": 1, "text": text}})));
        for (i, (l1, c1, l2, c2, new)) in edits.iter().enumerate() {
            let (start, end) = if (l1, c1) <= (l2, c2) { ((l1, c1), (l2, c2)) } else { ((l2, c2), (l1, c1)) };
            send(lsp_message("textDocument/didChange", None, json!({"textDocument": {"uri": uri, "version": 2 + i},
                "contentChanges": [{"range": {"start": {"line": start.0, "character": start.1}, "end": {"line": end.0, "character": end.1}}, "text": new}]})));
        }
        let mut id = 1;
        for (line, character) in &asks {
            for method in ["textDocument/completion", "textDocument/hover", "textDocument/definition", "textDocument/documentSymbol"] {
                send(lsp_message(method, Some(id), json!({"textDocument": {"uri": uri}, "position": {"line": line, "character": character}})));
                id += 1;
            }
        }
        send(lsp_message("shutdown", Some(id), serde_json::Value::Null));
        send(lsp_message("exit", None, serde_json::Value::Null));
        let ending = handle.join().unwrap_or_else(|_| panic!("the server panicked"));
        prop_assert_eq!(ending, Ok(covey::lsp::Ending::Clean));
        // One answer per request (the first is `initialize`'s), none an error.
        let answers: Vec<lsp_server::Response> = client.receiver.try_iter().filter_map(|m| match m {
            lsp_server::Message::Response(r) => Some(r),
            _ => None,
        }).collect();
        prop_assert_eq!(answers.len(), id as usize + 1);
        prop_assert!(answers.iter().all(|r| r.response_result.is_ok()));
    }
}

/// Regression (found by `lines_never_panic`): a line starting with a
/// multi-byte space such as U+00A0 or U+2009 sliced the line inside the
/// character when the syntax error quoted the offending word.
#[test]
fn a_line_starting_with_a_wide_space_is_an_error_not_a_panic() {
    for line in [
        "\u{a0}0",
        "\u{2009}&x",
        "load\u{a0}\"d.csv\"",
        "model m:\u{3000}y on x",
    ] {
        assert!(parse_line(line, 0, 1).is_err(), "{line:?}");
    }
    let doc = "```covey\n\u{a0}load \"d.csv\"\n```\n";
    let run = pipeline::run(doc, "fuzz.md", &world(), RunOptions::default());
    assert!(run.is_err());
}
