//! The language server (`covey lsp`). The protocol tests drive `covey::lsp::serve` through
//! in-memory channels with real protocol messages (initialize, didOpen, didChange, completion,
//! hover, definition, documentSymbol, shutdown, exit) and assert the replies; one test starts the
//! binary and talks to it over pipes. The other tests hold the server to the renderer: every
//! syntax error at the renderer's place in its words, every error the server finds also found by
//! the renderer in the same words, and the live-reference kinds as the renderer writes them.

use std::io::{BufRead, BufReader, Read, Write};
use std::path::{Path, PathBuf};
use std::process::{Command, Stdio};
use std::thread::JoinHandle;
use std::time::Duration;

use covey::lsp::analysis::Severity;
use covey::lsp::{serve, Checker, Ending, Options};
use covey::pipeline::{self, RunOptions};
use covey::world::FsWorld;
use lsp_server::{Connection, Message, Notification, Request, RequestId};
use serde_json::{json, Value};

fn root() -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR"))
}

/// A fresh folder under the target directory holding the invented rations data.
fn workspace(name: &str) -> PathBuf {
    let dir = Path::new(env!("CARGO_TARGET_TMPDIR"))
        .join("lsp")
        .join(name);
    let _ = std::fs::remove_dir_all(&dir);
    std::fs::create_dir_all(dir.join("data")).unwrap_or_else(|e| panic!("{e}"));
    std::fs::copy(
        root().join("worked/data/rations.csv"),
        dir.join("data/rations.csv"),
    )
    .unwrap_or_else(|e| panic!("{e}"));
    dir
}

fn uri(path: &Path) -> String {
    format!("file://{}", path.display())
}

/// How long a test waits for a message before it fails.
const PATIENCE: Duration = Duration::from_secs(20);

/// A client talking to a server on a thread, through in-memory channels.
struct Client {
    conn: Connection,
    server: Option<JoinHandle<Result<Ending, String>>>,
    next: i32,
    /// Notifications received while waiting for something else.
    notes: Vec<Notification>,
}

impl Client {
    fn start(options: Options) -> Client {
        let (server_end, client_end) = Connection::memory();
        let server = std::thread::spawn(move || serve(&server_end, &options));
        Client {
            conn: client_end,
            server: Some(server),
            next: 1,
            notes: Vec::new(),
        }
    }

    /// Starts a server and goes through `initialize` and `initialized`; returns the client and
    /// the server's answer to `initialize`.
    fn initialized(options: Options, capabilities: Value) -> (Client, Value) {
        let mut c = Client::start(options);
        let init = c.request(
            "initialize",
            json!({"processId": null, "rootUri": null, "capabilities": capabilities}),
        );
        c.notify("initialized", json!({}));
        (c, init)
    }

    fn send(&self, m: Message) {
        self.conn.sender.send(m).unwrap_or_else(|e| panic!("{e}"));
    }

    fn notify(&self, method: &str, params: Value) {
        self.send(Message::Notification(Notification::new(
            method.to_string(),
            params,
        )));
    }

    /// Sends a request and waits for its answer: `Ok(result)` or `Err(error)`.
    fn call(&mut self, method: &str, params: Value) -> Result<Value, Value> {
        let id = self.next;
        self.next += 1;
        self.send(Message::Request(Request::new(
            RequestId::from(id),
            method.to_string(),
            params,
        )));
        loop {
            let m = self
                .conn
                .receiver
                .recv_timeout(PATIENCE)
                .unwrap_or_else(|e| panic!("no answer to {method}: {e}"));
            match m {
                Message::Response(r) if r.id == RequestId::from(id) => {
                    return r
                        .response_result
                        .map_err(|e| serde_json::to_value(e).unwrap_or(Value::Null));
                }
                Message::Notification(n) => self.notes.push(n),
                other => panic!("unexpected {other:?}"),
            }
        }
    }

    fn request(&mut self, method: &str, params: Value) -> Value {
        self.call(method, params)
            .unwrap_or_else(|e| panic!("{method} failed: {e}"))
    }

    /// The next diagnostics published for `uri`.
    fn diagnostics(&mut self, uri: &str) -> (Option<i64>, Vec<Value>) {
        loop {
            let found = self.notes.iter().position(|n| {
                n.method == "textDocument/publishDiagnostics" && n.params["uri"] == uri
            });
            if let Some(i) = found {
                let n = self.notes.remove(i);
                let list = n.params["diagnostics"]
                    .as_array()
                    .cloned()
                    .unwrap_or_default();
                return (n.params["version"].as_i64(), list);
            }
            let m = self
                .conn
                .receiver
                .recv_timeout(PATIENCE)
                .unwrap_or_else(|e| panic!("no diagnostics for {uri}: {e}"));
            match m {
                Message::Notification(n) => self.notes.push(n),
                other => panic!("unexpected {other:?}"),
            }
        }
    }

    /// The diagnostics of `version` of `uri`, skipping any published for other versions.
    fn diagnostics_of(&mut self, uri: &str, version: i64) -> Vec<Value> {
        loop {
            let (v, list) = self.diagnostics(uri);
            if v == Some(version) {
                return list;
            }
        }
    }

    /// The first diagnostics published for `uri` that `done` accepts (a data file is read on
    /// a thread of its own, so the first check of a document may come before its data).
    fn diagnostics_until(&mut self, uri: &str, done: impl Fn(&[Value]) -> bool) -> Vec<Value> {
        loop {
            let (_, list) = self.diagnostics(uri);
            if done(&list) {
                return list;
            }
        }
    }

    fn open(&mut self, uri: &str, text: &str) {
        self.notify(
            "textDocument/didOpen",
            json!({"textDocument": {"uri": uri, "languageId": "markdown", "version": 1, "text": text}}),
        );
    }

    fn at(&mut self, method: &str, uri: &str, line: u32, character: u32) -> Value {
        self.request(
            method,
            json!({"textDocument": {"uri": uri}, "position": {"line": line, "character": character}}),
        )
    }

    /// `shutdown`, then `exit`; returns how the server says the session ended.
    fn shutdown(mut self) -> Ending {
        assert_eq!(self.request("shutdown", Value::Null), Value::Null);
        self.notify("exit", Value::Null);
        self.join()
    }

    fn join(&mut self) -> Ending {
        let server = self.server.take().unwrap_or_else(|| panic!("joined twice"));
        server
            .join()
            .unwrap_or_else(|_| panic!("the server panicked"))
            .unwrap_or_else(|e| panic!("the server failed: {e}"))
    }
}

/// The (0-based line, UTF-16 character) of the first `needle` in `text`, plus `skip` characters.
fn pos(text: &str, needle: &str, skip: usize) -> (u32, u32) {
    let at = text
        .find(needle)
        .unwrap_or_else(|| panic!("{needle:?} not in text"));
    let before = &text[..at];
    let line = before.matches('\n').count();
    let col = before
        .rsplit('\n')
        .next()
        .unwrap_or("")
        .encode_utf16()
        .count()
        + skip;
    (line as u32, col as u32)
}

fn labels(completion: &Value) -> Vec<String> {
    let items = completion
        .as_array()
        .or_else(|| completion["items"].as_array())
        .cloned()
        .unwrap_or_default();
    items
        .iter()
        .map(|i| i["textEdit"]["newText"].as_str().unwrap_or("").to_string())
        .collect()
}

const DOC: &str = "# Rations\n\n*Invented data (see worked/data/make_data.py).*\n\n```covey\nload \"data/rations.csv\" as pens\nfactor ration levels barley, maize, \"maize+soy\"\nmodel parallel: final_kg on ration + start_kg\ntable anova parallel\ntable means parallel for ration\n```\n\nThe effect: *F* = @[anova parallel ration f].\n";

#[test]
fn a_session_answers_real_protocol_messages() {
    let dir = workspace("session");
    let doc_path = dir.join("doc.md");
    std::fs::write(&doc_path, DOC).unwrap_or_else(|e| panic!("{e}"));
    let u = uri(&doc_path);
    let (mut c, init) = Client::initialized(Options::default(), json!({}));
    let caps = &init["capabilities"];
    assert_eq!(caps["positionEncoding"], "utf-16");
    assert_eq!(caps["hoverProvider"], true);
    assert_eq!(caps["definitionProvider"], true);
    assert_eq!(caps["documentSymbolProvider"], true);
    assert_eq!(caps["textDocumentSync"]["change"], 2, "incremental sync");
    assert_eq!(init["serverInfo"]["name"], "covey");

    // A clean document: no problems.
    c.open(&u, DOC);
    let diags = c.diagnostics_of(&u, 1);
    assert!(diags.is_empty(), "{diags:?}");

    // Misspell a column: one edit of a range, then the diagnostics of version 2.
    let (line, ch) = pos(DOC, "start_kg\n", 0);
    c.notify(
        "textDocument/didChange",
        json!({"textDocument": {"uri": u, "version": 2}, "contentChanges": [
            {"range": {"start": {"line": line, "character": ch}, "end": {"line": line, "character": ch + 5}}, "text": "strat"}
        ]}),
    );
    let diags = c.diagnostics_of(&u, 2);
    assert_eq!(diags.len(), 1, "{diags:?}");
    let d = &diags[0];
    assert_eq!(d["severity"], 1);
    assert_eq!(d["source"], "covey");
    assert_eq!(
        d["message"],
        "data set `pens` has no column `strat_kg`\nhelp: did you mean `start_kg`?"
    );
    assert_eq!(d["range"]["start"], json!({"line": line, "character": ch}));
    assert_eq!(
        d["range"]["end"],
        json!({"line": line, "character": ch + 8})
    );

    // A syntax error, with the whole text sent again.
    let broken = DOC.replace("table anova parallel", "table anova parallel type 4");
    c.notify(
        "textDocument/didChange",
        json!({"textDocument": {"uri": u, "version": 3}, "contentChanges": [{"text": broken}]}),
    );
    let diags = c.diagnostics_of(&u, 3);
    let (line, ch) = pos(&broken, "4\n", 0);
    assert_eq!(diags.len(), 1, "{diags:?}");
    assert_eq!(diags[0]["message"], "expected 1, 2 or 3, found `4`");
    assert_eq!(
        diags[0]["range"]["start"],
        json!({"line": line, "character": ch})
    );
    c.notify(
        "textDocument/didChange",
        json!({"textDocument": {"uri": u, "version": 4}, "contentChanges": [{"text": DOC}]}),
    );
    assert!(c.diagnostics_of(&u, 4).is_empty());

    // Completion: the clause words after a factor, in the grammar's order.
    let (line, ch) = pos(DOC, "for ration\n", 10);
    let edit = DOC.replace("for ration\n", "for ration \n");
    c.notify(
        "textDocument/didChange",
        json!({"textDocument": {"uri": u, "version": 5}, "contentChanges": [{"text": edit}]}),
    );
    let got = labels(&c.at("textDocument/completion", &u, line, ch + 1));
    assert_eq!(got, ["by", "at", "robust", "level"]);
    // The factors of the model after `for`.
    let got = labels(&c.at("textDocument/completion", &u, line, ch - 6));
    assert_eq!(got, ["ration"]);
    // Statement words at the start of a line.
    let (line, _) = pos(&edit, "table anova", 0);
    let got = labels(&c.at("textDocument/completion", &u, line, 0));
    for w in ["load", "model", "table", "require", "report"] {
        assert!(got.contains(&w.to_string()), "{got:?}");
    }
    // Nothing outside covey blocks and references.
    let (line, _) = pos(&edit, "# Rations", 0);
    assert_eq!(c.at("textDocument/completion", &u, line, 3), Value::Null);

    // Hover on the model: its formula, data set and rows used (one pen has no final weight).
    let (line, ch) = pos(&edit, "anova parallel", 7);
    let h = c.at("textDocument/hover", &u, line, ch);
    let text = h["contents"]["value"].as_str().unwrap_or("").to_string();
    assert!(text.contains("`final_kg on ration + start_kg`"), "{text}");
    assert!(text.contains("data set `pens`"), "{text}");
    assert!(text.contains("rows used: 29 of 30"), "{text}");
    // On a column: type, missing count, levels.
    let (line, ch) = pos(&edit, "on ration", 4);
    let h = c.at("textDocument/hover", &u, line, ch);
    let text = h["contents"]["value"].as_str().unwrap_or("").to_string();
    assert!(text.contains("factor, 0 missing of 30 rows"), "{text}");
    assert!(text.contains("`barley`, `maize`, `maize+soy`"), "{text}");
    // On a reference not rendered yet.
    let (line, ch) = pos(&edit, "@[anova", 3);
    let h = c.at("textDocument/hover", &u, line, ch);
    assert!(
        h["contents"]["value"]
            .as_str()
            .is_some_and(|t| t.contains("not rendered yet")),
        "{h}"
    );

    // Go to definition: from a use of the model to its declaration.
    let (line, ch) = pos(&edit, "means parallel", 7);
    let def = c.at("textDocument/definition", &u, line, ch);
    let (dl, dc) = pos(&edit, "parallel:", 0);
    assert_eq!(def["uri"], u);
    assert_eq!(def["range"]["start"], json!({"line": dl, "character": dc}));
    assert_eq!(
        def["range"]["end"],
        json!({"line": dl, "character": dc + 8})
    );

    // Symbols: the block, and in it the data set, the model and the tables.
    let symbols = c.request(
        "textDocument/documentSymbol",
        json!({"textDocument": {"uri": u}}),
    );
    let block = &symbols[0];
    assert_eq!(block["name"], "covey block 1");
    let names: Vec<&str> = block["children"]
        .as_array()
        .map(|a| a.iter().filter_map(|s| s["name"].as_str()).collect())
        .unwrap_or_default();
    assert_eq!(
        names,
        [
            "pens",
            "parallel",
            "table anova parallel",
            "table means parallel for ration"
        ]
    );

    c.notify("textDocument/didClose", json!({"textDocument": {"uri": u}}));
    // Closing clears the document's diagnostics (published without a version).
    let mut closed = c.diagnostics(&u);
    while closed.0.is_some() {
        closed = c.diagnostics(&u);
    }
    assert!(closed.1.is_empty());
    assert_eq!(c.shutdown(), Ending::Clean);
}

#[test]
fn bad_requests_get_errors_and_the_session_goes_on() {
    let mut c = Client::start(Options::default());
    // Before `initialize`.
    let e = c
        .call("textDocument/hover", json!({}))
        .err()
        .unwrap_or_else(|| panic!("answered before initialize"));
    assert_eq!(e["code"], -32002);
    c.request("initialize", json!({"capabilities": {}}));
    c.notify("initialized", json!({}));
    // Parameters that are not a place in a document.
    let e = c
        .call("textDocument/completion", json!({"nonsense": true}))
        .err()
        .unwrap_or_else(|| panic!("accepted nonsense"));
    assert_eq!(e["code"], -32602);
    // A method it does not answer.
    let e = c
        .call("workspace/symbol", json!({"query": ""}))
        .err()
        .unwrap_or_else(|| panic!("answered an unknown method"));
    assert_eq!(e["code"], -32601);
    // A second `initialize` is a request out of place (InvalidRequest, as the protocol
    // says), not an unknown method, and the session goes on.
    let e = c
        .call("initialize", json!({"capabilities": {}}))
        .err()
        .unwrap_or_else(|| panic!("answered a second initialize"));
    assert_eq!(e["code"], -32600, "{e}");
    // A document it never saw, and notifications it cannot read, are no failure.
    c.notify("textDocument/didChange", json!({"bogus": 1}));
    c.notify("textDocument/didOpen", json!([1, 2, 3]));
    let v = c.at("textDocument/hover", "file:///nowhere/x.md", 0, 0);
    assert_eq!(v, Value::Null);
    // After `shutdown`, requests are refused until `exit`.
    assert_eq!(c.request("shutdown", Value::Null), Value::Null);
    let e = c
        .call("textDocument/hover", json!({}))
        .err()
        .unwrap_or_else(|| panic!("answered after shutdown"));
    assert_eq!(e["code"], -32600);
    c.notify("exit", Value::Null);
    assert_eq!(c.join(), Ending::Clean);
}

#[test]
fn exit_without_shutdown_is_told_apart() {
    let (mut c, _) = Client::initialized(Options::default(), json!({}));
    c.notify("exit", Value::Null);
    assert_eq!(c.join(), Ending::ExitWithoutShutdown);
}

#[test]
fn utf8_positions_when_the_editor_offers_them() {
    let dir = workspace("utf8");
    // A name that is not a bare word is quoted.
    let text =
        "# Für\n\n```covey\nload \"data/rations.csv\" as pens\ntable summary \"fïnal_kg\"\n```\n";
    let path = dir.join("doc.md");
    let u = uri(&path);
    let (mut c, init) = Client::initialized(
        Options::default(),
        json!({"general": {"positionEncodings": ["utf-8", "utf-16"]}}),
    );
    assert_eq!(init["capabilities"]["positionEncoding"], "utf-8");
    c.open(&u, text);
    let diags = c.diagnostics_until(&u, |d| !d.is_empty());
    assert_eq!(diags.len(), 1, "{diags:?}");
    // `"fïnal_kg"` starts at byte 14 of its line and is 11 bytes long.
    assert_eq!(diags[0]["range"]["start"]["character"], 14);
    assert_eq!(diags[0]["range"]["end"]["character"], 25);
    assert_eq!(c.shutdown(), Ending::Clean);
}

#[test]
fn typing_is_debounced_and_the_last_version_is_checked() {
    let dir = workspace("debounce");
    let path = dir.join("doc.md");
    let u = uri(&path);
    let options = Options {
        // Long enough that a busy machine does not pause between two keystrokes for as long.
        debounce: Duration::from_millis(1000),
        ..Options::default()
    };
    let (mut c, _) = Client::initialized(options, json!({}));
    c.open(&u, DOC);
    assert!(c.diagnostics_of(&u, 1).is_empty());
    // Five keystrokes in quick succession: one check, of the last.
    let mut text = DOC.to_string();
    for (i, letter) in "xyzzy".chars().enumerate() {
        text = text.replace("table anova", &format!("table anova{letter}"));
        c.notify(
            "textDocument/didChange",
            json!({"textDocument": {"uri": u, "version": 2 + i}, "contentChanges": [{"text": text}]}),
        );
    }
    // Skip what was published for the first version (before and after its data came in).
    let (mut version, mut diags) = c.diagnostics(&u);
    while version == Some(1) {
        (version, diags) = c.diagnostics(&u);
    }
    // No version between the first and the last was checked.
    assert_eq!(version, Some(6));
    assert_eq!(diags.len(), 1, "{diags:?}");
    assert_eq!(c.shutdown(), Ending::Clean);
}

#[test]
fn data_files_stay_in_the_folder_and_changes_are_seen() {
    let dir = workspace("confined");
    let inner = dir.join("doc");
    std::fs::create_dir_all(&inner).unwrap_or_else(|e| panic!("{e}"));
    let path = inner.join("doc.md");
    let u = uri(&path);
    let text =
        "```covey\nload \"../data/rations.csv\" as pens\ntable summary final_kg by ration\n```\n";
    // Without the setting, a file outside the document's folder is refused, in the renderer's
    // words; nothing else is checked for it.
    let (mut c, _) = Client::initialized(Options::default(), json!({}));
    c.open(&u, text);
    let (_, diags) = c.diagnostics(&u);
    assert_eq!(diags.len(), 1, "{diags:?}");
    let message = diags[0]["message"].as_str().unwrap_or("");
    assert!(
        message.contains("outside the document's folder"),
        "{message}"
    );
    assert_eq!(c.shutdown(), Ending::Clean);

    // With it, the file is read; `ration` is text until declared a factor.
    let options = Options {
        allow_outside: true,
        ..Options::default()
    };
    let (mut c, _) = Client::initialized(options, json!({}));
    c.open(&u, text);
    let diags = c.diagnostics_until(&u, |d| !d.is_empty());
    assert_eq!(diags.len(), 1, "{diags:?}");
    assert_eq!(
        diags[0]["message"],
        "`ration` is not a factor\nhelp: declare it first: `factor ration`"
    );
    // The data file changes on disk (a column renamed); a save brings a check with the new file.
    let csv = std::fs::read_to_string(dir.join("data/rations.csv")).unwrap_or_default();
    std::fs::write(
        dir.join("data/rations.csv"),
        csv.replacen("final_kg", "end_kg", 1) + "\n",
    )
    .unwrap_or_else(|e| panic!("{e}"));
    c.notify("textDocument/didSave", json!({"textDocument": {"uri": u}}));
    let renamed = |d: &[Value]| {
        d.iter().any(|d| {
            d["message"]
                .as_str()
                .is_some_and(|m| m.contains("no column `final_kg`"))
        })
    };
    let diags = c.diagnostics_until(&u, renamed);
    assert!(renamed(&diags));
    assert_eq!(c.shutdown(), Ending::Clean);
}

/// Every file under `dir` with its bytes, in order.
fn snapshot(dir: &Path) -> Vec<(PathBuf, Vec<u8>)> {
    let mut out = Vec::new();
    let mut stack = vec![dir.to_path_buf()];
    while let Some(d) = stack.pop() {
        let Ok(entries) = std::fs::read_dir(&d) else {
            continue;
        };
        for e in entries.flatten() {
            let p = e.path();
            if p.is_dir() {
                stack.push(p);
            } else {
                out.push((p.clone(), std::fs::read(&p).unwrap_or_default()));
            }
        }
    }
    out.sort();
    out
}

#[test]
fn a_session_writes_no_file() {
    let dir = workspace("no-writes");
    let path = dir.join("doc.md");
    std::fs::write(&path, DOC).unwrap_or_else(|e| panic!("{e}"));
    let before = snapshot(&dir);
    let u = uri(&path);
    let (mut c, _) = Client::initialized(Options::default(), json!({}));
    c.open(&u, DOC);
    c.diagnostics(&u);
    for (needle, skip) in [
        ("parallel:", 2),
        ("on ration", 4),
        ("@[anova", 3),
        ("pens", 1),
    ] {
        let (line, ch) = pos(DOC, needle, skip);
        for method in [
            "textDocument/hover",
            "textDocument/completion",
            "textDocument/definition",
        ] {
            c.at(method, &u, line, ch);
        }
    }
    c.notify("textDocument/didSave", json!({"textDocument": {"uri": u}}));
    c.diagnostics(&u);
    assert_eq!(c.shutdown(), Ending::Clean);
    assert_eq!(snapshot(&dir), before);
}

/// A reference value shown from the last rendering on disk.
#[test]
fn hover_shows_the_value_of_the_last_rendering() {
    let dir = workspace("rendered");
    let path = dir.join("doc.md");
    std::fs::write(&path, DOC).unwrap_or_else(|e| panic!("{e}"));
    let report = covey::render(
        std::slice::from_ref(&path),
        &covey::RenderOptions::default(),
    );
    assert_eq!(report.verdict, covey::Verdict::Ok, "{:?}", report.lines);
    let rendered = std::fs::read_to_string(dir.join("doc.rendered.md")).unwrap_or_default();
    let value = covey::document::rendered_values(&rendered)
        .into_iter()
        .find(|(r, _)| r == "@[anova parallel ration f]")
        .map(|(_, v)| v)
        .unwrap_or_else(|| panic!("no value in the rendering"));
    let mut checker = Checker::new(false);
    let a = checker.check(DOC, &path);
    let at = DOC.find("@[anova").unwrap_or(0) + 4;
    let shown = checker.hover(&a, at).unwrap_or_else(|| panic!("no hover"));
    assert!(shown.text.contains(&format!("= {value}")), "{}", shown.text);
    assert!(shown.text.contains("doc.rendered.md"), "{}", shown.text);
    assert!(!shown.text.contains("render again"), "{}", shown.text);
    // Edited since the rendering: the value on disk is told as from an earlier version of the
    // blocks (through the protocol).
    let edited = DOC.replace("on ration + start_kg", "on ration");
    let u = uri(&path);
    let (mut c, _) = Client::initialized(Options::default(), json!({}));
    c.open(&u, &edited);
    c.diagnostics(&u);
    let (line, ch) = pos(&edited, "@[anova", 4);
    let hover = c.at("textDocument/hover", &u, line, ch);
    let told = hover["contents"]["value"].as_str().unwrap_or("");
    assert!(told.contains(&format!("= {value}")), "{told}");
    assert!(
        told.contains("made before the covey blocks were last changed: render again"),
        "{told}"
    );
    assert_eq!(c.shutdown(), Ending::Clean);
    // Rendered in place, the document holds its own values.
    let text = render_in_place(&path);
    let a = checker.check(&text, &path);
    assert!(a.problems.is_empty(), "{:?}", a.problems);
    let at = text.find("@[anova").unwrap_or(0) + 4;
    // The reference inside the value region's opening comment is the same reference.
    let shown = checker.hover(&a, at);
    let shown = shown.unwrap_or_else(|| panic!("no hover in place"));
    assert!(shown.text.contains(&format!("= {value}")), "{}", shown.text);
}

/// A rendering made before a data file changed shows its value with a note, told by the
/// SHA-256 in its provenance region; rendering again makes the note go.
#[test]
fn hover_tells_a_rendering_made_from_other_data() {
    let dir = workspace("rendered-data");
    let path = dir.join("doc.md");
    std::fs::write(&path, DOC).unwrap_or_else(|e| panic!("{e}"));
    let render = || {
        let report = covey::render(
            std::slice::from_ref(&path),
            &covey::RenderOptions::default(),
        );
        assert_eq!(report.verdict, covey::Verdict::Ok, "{:?}", report.lines);
    };
    render();
    let u = uri(&path);
    let (mut c, _) = Client::initialized(Options::default(), json!({}));
    c.open(&u, DOC);
    c.diagnostics(&u);
    let (line, ch) = pos(DOC, "@[anova", 4);
    let mut hover = || {
        let h = c.at("textDocument/hover", &u, line, ch);
        h["contents"]["value"].as_str().unwrap_or("").to_string()
    };
    let told = hover();
    assert!(told.contains("doc.rendered.md"), "{told}");
    assert!(!told.contains("render again"), "{told}");
    // One row more in the data file (its first row again): the rendering is of other data.
    let csv = dir.join("data/rations.csv");
    let text = std::fs::read_to_string(&csv).unwrap_or_default();
    let first_row = text.lines().nth(1).unwrap_or_default().to_string();
    std::fs::write(&csv, format!("{text}{first_row}\n")).unwrap_or_else(|e| panic!("{e}"));
    let told = hover();
    assert!(
        told.contains(
            "made from other data than the files now hold: render again for the current value"
        ),
        "{told}"
    );
    assert!(!told.contains("covey blocks"), "{told}");
    // Rendered again from the file as it is now: no note.
    render();
    let told = hover();
    assert!(!told.contains("render again"), "{told}");
    assert_eq!(c.shutdown(), Ending::Clean);
    // Rendered in place, the document's own provenance region is compared.
    let text = render_in_place(&path);
    let at = text.find("@[anova").unwrap_or(0) + 4;
    let mut checker = Checker::new(false);
    let a = checker.check(&text, &path);
    let shown = checker.hover(&a, at).unwrap_or_else(|| panic!("no hover"));
    assert!(shown.text.contains("rendering in place)"), "{}", shown.text);
    std::fs::write(&csv, without_last_line(&csv)).unwrap_or_else(|e| panic!("{e}"));
    let shown = checker.hover(&a, at).unwrap_or_else(|| panic!("no hover"));
    assert!(
        shown
            .text
            .contains("made from other data than the files now hold"),
        "{}",
        shown.text
    );
}

/// The data file less its last line.
fn without_last_line(csv: &Path) -> String {
    let text = std::fs::read_to_string(csv).unwrap_or_default();
    let body = text.strip_suffix('\n').unwrap_or(&text);
    format!(
        "{}\n",
        body.rsplit_once('\n').map_or(body, |(head, _)| head)
    )
}

/// The first line of each renderer error: (line, column, message), or (line, 0, message) for a
/// problem given as `file: line L, column C: ...`.
fn renderer_errors(errors: &[String], file: &str) -> Vec<(usize, usize, String)> {
    let mut out = Vec::new();
    for e in errors {
        let head = e.lines().next().unwrap_or("");
        if let Some(rest) = head.strip_prefix(&format!("{file}:")) {
            let mut parts = rest.splitn(3, ':');
            let line = parts.next().and_then(|l| l.trim().parse().ok());
            let col = parts.next().and_then(|c| c.trim().parse().ok());
            let msg = parts.next().unwrap_or("").trim();
            if let (Some(l), Some(c)) = (line, col) {
                let msg = msg.strip_prefix("error: ").unwrap_or(msg);
                out.push((l, c, msg.to_string()));
                continue;
            }
            // `doc.md: line L, column C: message` (the document's own structure).
            let rest = rest.trim();
            if let Some(r) = rest.strip_prefix("line ") {
                let mut it = r.splitn(2, ", column ");
                let l = it.next().and_then(|l| l.parse().ok());
                let tail = it.next().unwrap_or("");
                let (c, msg) = tail.split_once(": ").unwrap_or(("0", tail));
                if let (Some(l), Ok(c)) = (l, c.parse()) {
                    out.push((l, c, msg.to_string()));
                }
            }
        }
    }
    out
}

/// The server's problems as (1-based line, 1-based column in characters, message, severity).
fn server_problems(
    text: &str,
    folder: &Path,
    allow_outside: bool,
) -> Vec<(usize, usize, String, Severity)> {
    let mut checker = Checker::new(allow_outside);
    let a = checker.check(text, &folder.join("doc.md"));
    a.problems
        .iter()
        .map(|p| {
            let (l, c) = covey::document::line_col(text, p.span.start);
            (l, c, p.message.clone(), p.severity)
        })
        .collect()
}

/// Runs `text` as `covey render --keep-going` would, in `folder`.
fn render_errors(text: &str, folder: &Path) -> Vec<(usize, usize, String)> {
    let world = FsWorld::new(folder, false);
    let opts = RunOptions {
        keep_going: true,
        ..RunOptions::default()
    };
    match pipeline::run(text, "doc.md", &world, opts) {
        Ok(run) => renderer_errors(&run.errors, "doc.md"),
        Err(u) => renderer_errors(&u.errors, "doc.md"),
    }
}

/// Holds the server to the renderer on one document: every error the server finds, the
/// renderer finds at the same line and column in the same words (the column was not compared
/// before, and eleven bad inputs differed: a load's failure at the path instead of its `sheet`,
/// `query` or `decimal`, a slopes table's factor error at the covariate; and the renderer put a
/// contrast's covariate-named-as-factor at the weights and a regions table's unknown level at
/// the covariate); when the renderer cannot run the
/// document (its Markdown, parameters or syntax are broken), the server reports each of its
/// errors at the same line and column. Returns how many renderer errors the server found too.
fn agree(name: &str, text: &str, folder: &Path) -> (usize, usize) {
    let rendered = render_errors(text, folder);
    let served = server_problems(text, folder, false);
    let world = FsWorld::new(folder, false);
    let unrunnable = pipeline::run(text, "doc.md", &world, RunOptions::default()).is_err();
    for (l, c, m, s) in &served {
        if *s == Severity::Error {
            assert!(
                rendered
                    .iter()
                    .any(|(rl, rc, rm)| rl == l && (rc == c || *rc == 0) && rm == m),
                "{name}: the server reports at {l}:{c} `{m}`, the renderer does not:\n{rendered:?}"
            );
        }
    }
    if unrunnable {
        for (l, c, m) in &rendered {
            assert!(
                served
                    .iter()
                    .any(|(sl, sc, sm, _)| sl == l && sc == c && sm == m),
                "{name}: the renderer reports {l}:{c} `{m}`, the server does not:\n{served:?}"
            );
        }
    }
    let mut found = 0;
    for (l, c, m) in &rendered {
        if served.iter().any(|(sl, _, sm, _)| sl == l && sm == m) {
            found += 1;
        } else {
            println!("{name}: only the renderer finds {l}:{c} {m}");
        }
    }
    (found, rendered.len())
}

/// A block whose fence is never closed, holding a syntax error and an unknown column: the
/// renderer runs nothing and says only that the fence is missing; the server used to report
/// the block's errors as well (it checks the block as if closed, for completion). Now both say
/// the same one thing at the same place.
#[test]
fn an_unclosed_fence_is_the_only_error_for_both() {
    let dir = Path::new(env!("CARGO_TARGET_TMPDIR")).join("lsp-unclosed");
    let _ = std::fs::remove_dir_all(&dir);
    std::fs::create_dir_all(&dir).unwrap_or_else(|e| panic!("{e}"));
    std::fs::write(dir.join("d.csv"), "g,x,y\nA,1,2\nB,2,3\nA,3,5\nB,4,4\n")
        .unwrap_or_else(|e| panic!("{e}"));
    let text = "# Case\n\nProse.\n\n  ```covey\nload \"d.csv\"\nfactor nosuch\nmodel m y on g\n\nMore prose.\n";
    let rendered = render_errors(text, &dir);
    assert_eq!(rendered.len(), 1, "{rendered:?}");
    let (l, c, m) = &rendered[0];
    assert_eq!((*l, *c), (5, 3), "{rendered:?}");
    assert!(m.starts_with("this covey block is never closed; "), "{m}");
    let served = server_problems(text, &dir, false);
    assert_eq!(served.len(), 1, "{served:?}");
    let (sl, sc, sm, s) = &served[0];
    assert_eq!((sl, sc, sm, *s), (l, c, m, Severity::Error));
    // Completion still reads the block as if it were closed.
    let mut checker = Checker::new(false);
    let a = checker.check(text, &dir.join("doc.md"));
    assert_eq!(a.blocks.len(), 1);
}

#[test]
fn the_server_and_the_renderer_agree_on_every_bad_input() {
    let scratch = Path::new(env!("CARGO_TARGET_TMPDIR")).join("lsp-bad");
    let mut cases: Vec<PathBuf> = std::fs::read_dir(root().join("tests/bad"))
        .unwrap_or_else(|e| panic!("{e}"))
        .filter_map(|e| e.ok().map(|e| e.path()))
        .filter(|p| p.is_dir())
        .collect();
    cases.sort();
    assert!(cases.len() >= 40);
    let (mut found, mut total) = (0, 0);
    for case in &cases {
        let name = case
            .file_name()
            .map(|n| n.to_string_lossy().into_owned())
            .unwrap_or_default();
        // A copy, with the file outside the folder that the confinement case needs.
        let outer = scratch.join(&name);
        let work = outer.join("work");
        let _ = std::fs::remove_dir_all(&outer);
        std::fs::create_dir_all(&work).unwrap_or_else(|e| panic!("{e}"));
        for e in std::fs::read_dir(case).into_iter().flatten().flatten() {
            let _ = std::fs::copy(e.path(), work.join(e.file_name()));
        }
        std::fs::write(outer.join("x.csv"), "g,y\nA,1\nB,2\n").unwrap_or_else(|e| panic!("{e}"));
        if work.join("GENERATE-LONG-LINE").exists() {
            let mut data = b"group,y\nA,".to_vec();
            data.extend(std::iter::repeat_n(b'1', (1 << 20) + 16));
            data.extend_from_slice(b"\nB,2\n");
            std::fs::write(work.join("d.csv"), data).unwrap_or_else(|e| panic!("{e}"));
        }
        let text = std::fs::read_to_string(work.join("doc.md")).unwrap_or_default();
        let (f, t) = agree(&name, &text, &work);
        found += f;
        total += t;
    }
    // The server finds most of the renderer's errors without computing anything (the rest are
    // found only by fitting: a constant response, too few rows, a log of a negative value).
    println!("the server finds {found} of the renderer's {total} errors in tests/bad");
    assert!(found * 10 >= total * 8, "{found} of {total}");
}

/// A plan's numbers: the server used to check only that a pilot model exists, so a plan of 1.5
/// groups, an effect f of two million, a power below alpha or a number per group below what the
/// design needs was an error only when rendered. Now it reads the statement with the
/// renderer's own reader (`PlanInputs::read`, and the power figure's `power_lines` and
/// `axis_end`), so it finds every one of case 96's sixteen errors, at the renderer's line and
/// column, in its words.
#[test]
fn the_server_finds_every_plan_number_the_renderer_refuses() {
    let dir = root().join("tests/bad/96-plan-numbers");
    let text = std::fs::read_to_string(dir.join("doc.md")).unwrap_or_else(|e| panic!("{e}"));
    let rendered = render_errors(&text, &dir);
    assert_eq!(rendered.len(), 16, "{rendered:?}");
    let served = server_problems(&text, &dir, false);
    for (l, c, m) in &rendered {
        assert!(
            served
                .iter()
                .any(|(sl, sc, sm, s)| (sl, sc, sm, *s) == (l, c, m, Severity::Error)),
            "the renderer reports {l}:{c} `{m}`, the server does not:\n{served:?}"
        );
    }
    assert_eq!(served.len(), rendered.len(), "{served:?}");
    let (found, total) = agree("96-plan-numbers", &text, &dir);
    assert_eq!(found, total);
}

/// A covey block in a list, below a block whose output an in-place render puts in the file: the
/// renderer said the warning's line in the text without covey's regions (line 10 of a file
/// where the fence stands on a later line), the server the line as the editor shows it. Both now
/// say the line the user sees, before and after the render.
#[test]
fn the_nested_block_warning_has_one_line_after_an_in_place_render() {
    let dir = Path::new(env!("CARGO_TARGET_TMPDIR")).join("lsp-nested-shift");
    let _ = std::fs::remove_dir_all(&dir);
    std::fs::create_dir_all(&dir).unwrap_or_else(|e| panic!("{e}"));
    // Invented data.
    std::fs::write(dir.join("d.csv"), "g,y\nA,1\nB,2\nA,3\nB,5\n")
        .unwrap_or_else(|e| panic!("{e}"));
    let text =
        "# t\n\n```covey\nload \"d.csv\"\nshow\n```\n\n- item\n\n  ```covey\n  show\n  ```\n";
    let world = FsWorld::new(&dir, false);
    let first = pipeline::run(text, "doc.md", &world, RunOptions::default())
        .unwrap_or_else(|u| panic!("{}", u.errors.join("\n")));
    let words = covey::pipeline::NESTED_BLOCK;
    assert_eq!(first.warnings, vec![format!("doc.md:10: warning: {words}")]);
    let rendered = first.rendered;
    let fence = rendered
        .lines()
        .position(|l| l == "  ```covey")
        .map(|i| i + 1)
        .unwrap_or_else(|| panic!("{rendered}"));
    assert!(
        fence > 10,
        "the render put nothing above the nested block:\n{rendered}"
    );
    let again = pipeline::run(&rendered, "doc.md", &world, RunOptions::default())
        .unwrap_or_else(|u| panic!("{}", u.errors.join("\n")));
    assert_eq!(
        again.warnings,
        vec![format!("doc.md:{fence}: warning: {words}")]
    );
    let served = server_problems(&rendered, &dir, false);
    assert_eq!(
        served,
        vec![(fence, 3, words.to_string(), Severity::Warning)],
        "{rendered}"
    );
}

#[test]
fn documents_that_render_cleanly_have_no_errors() {
    // The worked documents, the fixtures that render without error, and README's examples.
    let mut docs: Vec<(PathBuf, PathBuf)> = Vec::new();
    for dir in ["worked", "tests/fixtures"] {
        for e in std::fs::read_dir(root().join(dir))
            .into_iter()
            .flatten()
            .flatten()
        {
            let p = e.path();
            let name = p
                .file_name()
                .map(|n| n.to_string_lossy().into_owned())
                .unwrap_or_default();
            if name.ends_with(".md") && !name.ends_with(".rendered.md") {
                docs.push((p.clone(), root().join(dir)));
            }
        }
    }
    docs.push((root().join("README.md"), root().join("worked")));
    docs.sort();
    let mut checked = 0;
    for (doc, folder) in docs {
        let text = std::fs::read_to_string(&doc).unwrap_or_default();
        let world = FsWorld::new(&folder, false);
        let clean = pipeline::run(&text, "doc.md", &world, RunOptions::default())
            .is_ok_and(|r| r.errors.is_empty());
        let served = server_problems(&text, &folder, false);
        let errors: Vec<_> = served.iter().filter(|p| p.3 == Severity::Error).collect();
        if clean {
            assert!(errors.is_empty(), "{}: {errors:?}", doc.display());
            checked += 1;
        } else {
            agree(&doc.display().to_string(), &text, &folder);
        }
    }
    assert!(checked >= 10, "{checked}");
}

#[test]
fn live_reference_kinds_are_the_renderers() {
    // README's examples compute every kind of table (and `check` lists influential rows in
    // the fixture of checks).
    let mut seen: Vec<(String, Vec<String>)> = Vec::new();
    for (doc, folder) in [
        (root().join("README.md"), root().join("worked")),
        (
            root().join("tests/fixtures/checks.md"),
            root().join("tests/fixtures"),
        ),
    ] {
        let text = std::fs::read_to_string(&doc).unwrap_or_default();
        let world = FsWorld::new(&folder, false);
        let run = pipeline::run(&text, "doc.md", &world, RunOptions::default())
            .unwrap_or_else(|u| panic!("{:?}", u.errors));
        for o in run.json()["outputs"].as_array().into_iter().flatten() {
            let kind = o["kind"].as_str().unwrap_or("").to_string();
            let columns: Vec<String> = o["columns"]
                .as_array()
                .into_iter()
                .flatten()
                .filter_map(|c| c.as_str().map(str::to_string))
                .collect();
            if !seen.iter().any(|(k, _)| *k == kind) {
                seen.push((kind, columns));
            }
        }
    }
    for k in covey::lsp::references::KINDS {
        let Some((_, columns)) = seen.iter().find(|(kind, _)| kind == k.kind) else {
            panic!("no table of kind `{}` was computed", k.kind);
        };
        if k.kind != "preview" {
            assert_eq!(columns, &k.columns.to_vec(), "{}", k.kind);
        }
    }
    for (kind, _) in &seen {
        assert!(
            covey::lsp::references::kind(kind).is_some(),
            "the renderer writes kind `{kind}`, which the server does not know"
        );
    }
}

/// One message as the protocol frames it on a byte stream.
fn frame(v: &Value) -> Vec<u8> {
    let body = v.to_string();
    format!("Content-Length: {}\r\n\r\n{body}", body.len()).into_bytes()
}

/// Reads one framed message.
fn read_frame(r: &mut impl BufRead) -> Value {
    let mut len = 0usize;
    loop {
        let mut line = String::new();
        r.read_line(&mut line).unwrap_or_else(|e| panic!("{e}"));
        assert!(!line.is_empty(), "the server closed its output");
        let line = line.trim_end();
        if line.is_empty() {
            break;
        }
        if let Some(v) = line.strip_prefix("Content-Length: ") {
            len = v.parse().unwrap_or(0);
        }
    }
    let mut body = vec![0u8; len];
    r.read_exact(&mut body).unwrap_or_else(|e| panic!("{e}"));
    serde_json::from_slice(&body).unwrap_or_else(|e| panic!("{e}"))
}

#[test]
fn the_binary_speaks_the_protocol_over_pipes() {
    let dir = workspace("binary");
    let path = dir.join("doc.md");
    let text = DOC.replace("table anova parallel", "table anova paralel");
    let u = uri(&path);
    let mut child = Command::new(env!("CARGO_BIN_EXE_covey"))
        .args(["lsp", "--stdio"])
        .current_dir(&dir)
        .stdin(Stdio::piped())
        .stdout(Stdio::piped())
        .stderr(Stdio::piped())
        .spawn()
        .unwrap_or_else(|e| panic!("cannot start covey lsp: {e}"));
    let mut input = child.stdin.take().unwrap_or_else(|| panic!("no stdin"));
    let mut output = BufReader::new(child.stdout.take().unwrap_or_else(|| panic!("no stdout")));
    let mut send = |v: Value| {
        input
            .write_all(&frame(&v))
            .unwrap_or_else(|e| panic!("{e}"));
        input.flush().unwrap_or_else(|e| panic!("{e}"));
    };
    send(
        json!({"jsonrpc": "2.0", "id": 1, "method": "initialize", "params": {"capabilities": {}}}),
    );
    let init = read_frame(&mut output);
    assert_eq!(init["id"], 1);
    assert_eq!(init["result"]["serverInfo"]["name"], "covey");
    send(json!({"jsonrpc": "2.0", "method": "initialized", "params": {}}));
    send(
        json!({"jsonrpc": "2.0", "method": "textDocument/didOpen", "params": {"textDocument": {"uri": u, "languageId": "markdown", "version": 1, "text": text}}}),
    );
    // The first check, then (once the data file is read on its thread) the check with the data.
    for _ in 0..2 {
        let diags = read_frame(&mut output);
        assert_eq!(diags["method"], "textDocument/publishDiagnostics");
        assert_eq!(
            diags["params"]["diagnostics"][0]["message"],
            "there is no model called `paralel`\nhelp: did you mean `parallel`?"
        );
    }
    let (line, ch) = pos(&text, "on ration", 4);
    send(
        json!({"jsonrpc": "2.0", "id": 2, "method": "textDocument/hover", "params": {"textDocument": {"uri": u}, "position": {"line": line, "character": ch}}}),
    );
    let hover = read_frame(&mut output);
    assert_eq!(hover["id"], 2);
    assert!(
        hover["result"]["contents"]["value"]
            .as_str()
            .is_some_and(|t| t.starts_with("**column `ration`**")),
        "{hover}"
    );
    send(json!({"jsonrpc": "2.0", "id": 3, "method": "shutdown"}));
    let down = read_frame(&mut output);
    assert_eq!(down["id"], 3);
    assert_eq!(down["result"], Value::Null);
    send(json!({"jsonrpc": "2.0", "method": "exit"}));
    drop(input);
    let status = child.wait().unwrap_or_else(|e| panic!("{e}"));
    let mut err = String::new();
    if let Some(mut e) = child.stderr.take() {
        let _ = e.read_to_string(&mut err);
    }
    assert_eq!(status.code(), Some(0), "stderr: {err}");
    assert!(err.is_empty(), "stderr: {err}");
}

#[test]
fn the_binary_ends_cleanly_when_the_editor_goes_away() {
    // The editor's end of the pipes closes without `exit`: an error on stderr, no panic.
    let mut child = Command::new(env!("CARGO_BIN_EXE_covey"))
        .arg("lsp")
        .stdin(Stdio::piped())
        .stdout(Stdio::piped())
        .stderr(Stdio::piped())
        .spawn()
        .unwrap_or_else(|e| panic!("cannot start covey lsp: {e}"));
    let mut input = child.stdin.take().unwrap_or_else(|| panic!("no stdin"));
    input
        .write_all(&frame(&json!({"jsonrpc": "2.0", "id": 1, "method": "initialize", "params": {"capabilities": {}}})))
        .unwrap_or_else(|e| panic!("{e}"));
    input
        .write_all(b"Content-Length: 5\r\n\r\n{bad}")
        .unwrap_or_else(|e| panic!("{e}"));
    drop(input);
    let out = child.wait_with_output().unwrap_or_else(|e| panic!("{e}"));
    let err = String::from_utf8_lossy(&out.stderr);
    assert_eq!(out.status.code(), Some(2), "stderr: {err}");
    assert!(err.starts_with("covey lsp: "), "stderr: {err}");
    assert!(!err.contains("panicked"), "stderr: {err}");
}

/// What completion offers at the end of `text` (a document in `dir`), or at its `|` when it
/// has one.
fn completions_at_end(checker: &mut Checker, dir: &Path, text: &str) -> Vec<String> {
    let at = text.find('|').unwrap_or(text.len());
    let text = text.replacen('|', "", 1);
    let a = checker.check(&text, &dir.join("doc.md"));
    checker
        .complete(&a, at)
        .map(|c| c.candidates.into_iter().map(|c| c.insert).collect())
        .unwrap_or_default()
}

#[test]
fn completion_follows_the_grammar_and_the_data() {
    let dir = workspace("completion");
    let mut checker = Checker::new(false);
    let head = "```covey\nparam alpha = 0.05\nload \"data/rations.csv\" as pens\nfactor ration levels barley, maize, \"maize+soy\"\nmodel m: final_kg on ration + start_kg\ntable means m for ration\n";
    let at_end = |checker: &mut Checker, line: &str| {
        // The block being written has no closing fence yet.
        completions_at_end(checker, &dir, &format!("{head}{line}"))
    };
    assert_eq!(at_end(&mut checker, "table means m for "), ["ration"]);
    assert_eq!(at_end(&mut checker, "table slopes m of "), ["start_kg"]);
    assert_eq!(
        at_end(&mut checker, "keep where ration == "),
        ["barley", "maize", "\"maize+soy\""]
    );
    assert_eq!(
        at_end(&mut checker, "keep where ration in (barley, "),
        ["barley", "maize", "\"maize+soy\""]
    );
    assert_eq!(
        at_end(
            &mut checker,
            "table regions m of start_kg for ration between barley and \"maize+"
        ),
        ["barley", "maize", "\"maize+soy\""]
    );
    assert_eq!(
        at_end(&mut checker, "plot "),
        [
            "lines",
            "residuals",
            "quantiles",
            "means",
            "influence",
            "groups",
            "interaction",
            "power"
        ]
    );
    assert_eq!(
        at_end(&mut checker, "table differences m for ration correction "),
        ["tukey", "holm", "bonferroni", "sidak", "dunnett", "none"]
    );
    assert_eq!(at_end(&mut checker, "use "), ["pens"]);
    assert_eq!(at_end(&mut checker, "check "), ["m"]);
    assert_eq!(
        at_end(&mut checker, "table summary "),
        ["pen", "ration", "start_kg", "final_kg"]
    );
    assert_eq!(
        at_end(&mut checker, "require normality m alpha @"),
        ["@alpha"]
    );
    // A new name is not completed.
    assert!(at_end(&mut checker, "model ").is_empty());
    // Inside a comment, nothing.
    assert!(at_end(&mut checker, "table means m # for ").is_empty());

    // Live references in prose.
    let doc = format!("{head}```\n\nThe means: @[");
    let kinds = completions_at_end(&mut checker, &dir, &doc);
    assert!(kinds.contains(&"means".to_string()), "{kinds:?}");
    assert!(!kinds.contains(&"columns".to_string()), "{kinds:?}");
    assert_eq!(
        completions_at_end(&mut checker, &dir, &format!("{doc}means ")),
        ["m"]
    );
    // A reference quotes only names with spaces.
    let rows = completions_at_end(&mut checker, &dir, &format!("{doc}means m "));
    assert_eq!(rows[..3], ["barley", "maize", "maize+soy"]);
    assert_eq!(
        completions_at_end(&mut checker, &dir, &format!("{doc}means m barley ")),
        ["mean", "se", "df", "lower", "upper"]
    );
    // Not in code, where `@[` is no reference.
    let in_code = format!("{head}```\n\nIn code: `@[means |` and on.\n");
    assert!(completions_at_end(&mut checker, &dir, &in_code).is_empty());
    let in_prose = format!("{head}```\n\nIn prose: @[means |] and on.\n");
    assert_eq!(completions_at_end(&mut checker, &dir, &in_prose), ["m"]);
    assert!(completions_at_end(
        &mut checker,
        &dir,
        &format!("{head}```\n\n```text\n@[means ")
    )
    .is_empty());
}

#[test]
fn definitions_and_hovers_find_what_names_stand_for() {
    let dir = workspace("navigation");
    let mut checker = Checker::new(false);
    let text = "```covey\nparam alpha = 0.05\nload \"data/rations.csv\" as pens\nload \"data/rations.csv\"\nuse pens\nfactor ration\nmodel m: final_kg on ration + start_kg\nrequire equal slopes m for ration alpha @alpha\ntable fit m\nuse rations\n```\n\nR² = @[fit m r_squared].\n";
    let a = checker.check(text, &dir.join("doc.md"));
    assert!(a.problems.is_empty(), "{:?}", a.problems);
    let def = |checker: &mut Checker, needle: &str, skip: usize| {
        let at = text.find(needle).unwrap_or_else(|| panic!("{needle}")) + skip;
        checker.definition(&a, at).map(|s| &text[s.start..s.end])
    };
    let at_of = |needle: &str| text.find(needle).unwrap_or(0);
    // A model, from a statement and from a live reference.
    let d = checker.definition(&a, at_of("fit m\n") + 4);
    assert_eq!(d.map(|s| s.start), Some(at_of("m: final_kg")));
    let d = checker.definition(&a, at_of("@[fit m") + 7);
    assert_eq!(d.map(|s| s.start), Some(at_of("m: final_kg")));
    // A data set named by `as`, and one named after its file.
    assert_eq!(def(&mut checker, "use pens", 5), Some("pens"));
    assert_eq!(
        def(&mut checker, "use rations", 5),
        Some("\"data/rations.csv\"")
    );
    let d = checker.definition(&a, at_of("use rations") + 5);
    assert_eq!(
        d.map(|s| s.start),
        Some(at_of("load \"data/rations.csv\"\n") + 5)
    );
    // A parameter.
    assert_eq!(def(&mut checker, "@alpha", 2), Some("alpha"));
    let shown = checker
        .hover(&a, at_of("@alpha") + 1)
        .unwrap_or_else(|| panic!("no hover"));
    assert!(shown.text.contains("`0.05`"), "{}", shown.text);
    // A data set.
    let shown = checker
        .hover(&a, at_of("use pens") + 5)
        .unwrap_or_else(|| panic!("no hover"));
    assert!(shown.text.contains("30 rows, 4 columns"), "{}", shown.text);
    // A level in a condition, and a column's type as it stands (before and after `factor`).
    let shown = checker
        .hover(&a, at_of("model m: final_kg") + 10)
        .unwrap_or_else(|| panic!("no hover"));
    assert!(
        shown.text.contains("numeric, 1 missing of 30 rows"),
        "{}",
        shown.text
    );
    let shown = checker
        .hover(&a, at_of("for ration") + 5)
        .unwrap_or_else(|| panic!("no hover"));
    assert!(shown.text.contains(": factor"), "{}", shown.text);
}

#[test]
fn plans_are_named_defined_and_offered() {
    let dir = workspace("plans");
    let mut checker = Checker::new(false);
    let text = "```covey\nload \"data/rations.csv\" as pens\nfactor ration\nmodel m: final_kg on ration + start_kg\nplan next for 3 groups with 1 covariate effect f 0.25 power 0.9 from m\nplot power next\n```\n\nPlots: @[plan next n_per_group].\n";
    let a = checker.check(text, &dir.join("doc.md"));
    assert!(a.problems.is_empty(), "{:?}", a.problems);
    let at_of = |needle: &str| text.find(needle).unwrap_or_else(|| panic!("{needle}"));
    let declared = at_of("next for");
    // From the figure and from a live reference to the plan's declaration.
    let d = checker.definition(&a, at_of("power next") + 7);
    assert_eq!(d.map(|s| s.start), Some(declared));
    let d = checker.definition(&a, at_of("@[plan next") + 8);
    assert_eq!(d.map(|s| s.start), Some(declared));
    // The pilot model is a model like any other.
    let d = checker.definition(&a, at_of("from m") + 5);
    assert_eq!(d.map(|s| s.start), Some(at_of("m: final_kg")));
    let shown = checker
        .hover(&a, at_of("power next") + 7)
        .unwrap_or_else(|| panic!("no hover"));
    assert!(shown.text.contains("for 3 groups"), "{}", shown.text);
    // The plan's name after `plot power`, and its JSON columns in a reference.
    let head = "```covey\nplan next for 3 groups effect f 0.25 power 0.9\n";
    assert_eq!(
        completions_at_end(&mut checker, &dir, &format!("{head}plot power ")),
        ["next"]
    );
    let prose = format!("{head}```\n\nn = @[plan next n_per");
    assert!(completions_at_end(&mut checker, &dir, &prose).contains(&"n_per_group".to_string()));
}

/// One statement per line that `covey render --keep-going` refuses, none of them needing a fit to
/// find out; the data are the invented rations.
const REFUSED: &str = "# Statements the renderer refuses

```covey
load \"data/rations.csv\" as pens
factor ration levels barley, maize, \"maize+soy\"
model p: final_kg on ration + start_kg
model q: final_kg on start_kg
model r2: ration on start_kg
model r3: final_kg on log(ration)
model r4: final_kg on pen + weight
table summary final_kg by start_kg
table summary ration
table means p for start_kg
table means q for ration
table means p for ration at pen = 3
table differences q for ration correction holm
table contrast p for start_kg weights 1, -1
table slopes q for ration
table slopes p of ration for ration
table regions p of start_kg for ration between barley and oats
table coefficients p level 95
plot means q
plot lines p of final_kg
plot groups p for start_kg
plot quantiles p of start_kg
require equal slopes q for ration
require 3 rows per start_kg
require balance ration by ration
require normality p alpha 2
report p differences ration between barley and oats
unit weight \"kg\"
keep where ration < maize
keep where start_kg == heavy
keep where start_kg in (light, 2)
show nothing
use nothing
check r
table fit r
table compare p, r
plot power nothing
```
";

#[test]
fn the_server_finds_what_the_renderer_refuses_without_fitting() {
    let dir = workspace("refused");
    let (found, total) = agree("refused", REFUSED, &dir);
    // Every statement after the first three is refused, each for one reason.
    let statements = REFUSED
        .lines()
        .filter(|l| !l.is_empty() && !l.starts_with(['#', '`']))
        .count();
    assert_eq!(total, statements - 4, "the renderer's errors");
    assert_eq!(found, total, "the server finds each of them");
}

/// The data sources of issue 19: completion offers a load's clauses and the columns that
/// `compute` makes; a workbook and a SQLite file are read for their columns (the server reads
/// files, never a database), and `load database` is checked without connecting.
#[test]
fn completion_knows_sources_and_computed_columns_without_a_database() {
    let dir = workspace("sources");
    for f in ["rations.xlsx", "rations.sqlite"] {
        std::fs::copy(
            root().join("tests/fixtures/sources").join(f),
            dir.join("data").join(f),
        )
        .unwrap_or_else(|e| panic!("{e}"));
    }
    let mut checker = Checker::new(false);
    let at_end = |checker: &mut Checker, text: &str| {
        completions_at_end(checker, &dir, &format!("```covey\n{text}"))
    };
    let clauses = at_end(&mut checker, "load \"data/rations.xlsx\" ");
    for want in ["sheet", "table", "query", "separator", "decimal", "as"] {
        assert!(clauses.contains(&want.to_string()), "{want}: {clauses:?}");
    }
    assert_eq!(
        at_end(&mut checker, "load \"data/rations.csv\" separator "),
        ["tab"]
    );
    let load = at_end(&mut checker, "load ");
    assert!(load.contains(&"database".to_string()), "{load:?}");
    // Columns of a sheet, of a SQLite table, and the one `compute` makes.
    let head = "load \"data/rations.xlsx\" sheet \"Week 6\" as pens\ncompute start_c = start_kg - mean(start_kg)\n";
    assert_eq!(
        at_end(&mut checker, &format!("{head}table summary ")),
        ["pen", "ration", "start_kg", "final_kg", "start_c"]
    );
    assert_eq!(
        at_end(&mut checker, &format!("{head}label rows by ")),
        ["pen", "ration", "start_kg", "final_kg", "start_c"]
    );
    let head = "load \"data/rations.sqlite\" table pens\n";
    assert_eq!(
        at_end(&mut checker, &format!("{head}compute r = final_kg / ")),
        [
            "pen", "ration", "start_kg", "final_kg", "log10", "log", "exp", "sqrt", "abs", "mean",
            "sd"
        ]
    );
    // Checks as you type: a computed name that exists, a column that does not, an unknown
    // column in an aggregate, and a transformed response of a text column.
    let text = "```covey\nload \"data/rations.csv\" as pens\ncompute start_kg = 1\ncompute a = nope + 1\ncompute b = mean(nope)\nmodel m: log(pen) on start_kg\n```\n";
    let a = checker.check(text, &dir.join("doc.md"));
    let messages: Vec<String> = a.problems.iter().map(|p| p.message.clone()).collect();
    assert!(
        messages
            .iter()
            .any(|m| m.contains("already has a column `start_kg`")),
        "{messages:?}"
    );
    assert_eq!(
        messages
            .iter()
            .filter(|m| m.contains("no column `nope`"))
            .count(),
        2,
        "{messages:?}"
    );
    agree("sources", text, &dir);

    // A database the server does not know: no error, no connection (the address given to
    // the renderer is never the server's), and the columns after it are not guessed at.
    let text = "```covey\nload database lab query \"SELECT 1 AS y\" as d\ncompute z = y + 1\ntable summary z\n```\n";
    let started = std::time::Instant::now();
    let a = checker.check(text, &dir.join("doc.md"));
    assert!(
        a.problems.is_empty(),
        "{:?}",
        a.problems.iter().map(|p| &p.message).collect::<Vec<_>>()
    );
    assert!(started.elapsed() < Duration::from_secs(5));
    assert_eq!(
        at_end(
            &mut checker,
            "load database lab query \"SELECT 1\" as d\nuse "
        ),
        ["d"]
    );
}

/// Bytes written by the server, kept for the test to read.
#[derive(Clone, Default)]
struct Written(std::sync::Arc<std::sync::Mutex<Vec<u8>>>);

impl Write for Written {
    fn write(&mut self, b: &[u8]) -> std::io::Result<usize> {
        if let Ok(mut v) = self.0.lock() {
            v.extend_from_slice(b);
        }
        Ok(b.len())
    }
    fn flush(&mut self) -> std::io::Result<()> {
        Ok(())
    }
}

#[test]
fn no_bytes_from_the_editor_end_the_session() {
    // Through the server's own framing, in memory: a body that is not JSON, JSON that is not a
    // message (with and without a request's id), a header block without a length, one whose
    // length is not a number, and one that claims a length far beyond memory at the very end;
    // each is answered or passed over, and the session goes on to a clean end.
    let dir = workspace("framing");
    let u = uri(&dir.join("doc.md"));
    let mut input = Vec::new();
    input.extend(frame(
        &json!({"jsonrpc": "2.0", "id": 1, "method": "initialize", "params": {"capabilities": {}}}),
    ));
    input.extend(b"Content-Length: 5\r\n\r\n{bad}");
    input.extend(frame(&json!({"jsonrpc": "2.0"})));
    input.extend(frame(&json!([1, 2, 3])));
    input.extend(frame(&json!({"jsonrpc": "2.0", "id": 7, "method": 5})));
    input.extend(b"Content-Type: x\r\n\r\n");
    input.extend(b"Content-Length: many\r\n\r\n");
    input.extend(b"\r\n");
    input.extend(b"Content-Length: 2\r\n\r\n\xff\xfe");
    input.extend(frame(
        &json!({"jsonrpc": "2.0", "method": "textDocument/didOpen", "params": {"textDocument": {"uri": u, "languageId": "markdown", "version": 1, "text": DOC}}}),
    ));
    // A header in bare line feeds is read too.
    let hover = json!({"jsonrpc": "2.0", "id": 2, "method": "textDocument/hover", "params": {"textDocument": {"uri": u}, "position": {"line": 6, "character": 9}}}).to_string();
    input.extend(format!("Content-Length: {}\n\n{hover}", hover.len()).into_bytes());
    input.extend(frame(
        &json!({"jsonrpc": "2.0", "id": 3, "method": "shutdown"}),
    ));
    input.extend(frame(&json!({"jsonrpc": "2.0", "method": "exit"})));
    input.extend(b"Content-Length: 99999999999999\r\n\r\n{");
    let written = Written::default();
    let (connection, threads) =
        covey::lsp::transport::connect(std::io::Cursor::new(input), written.clone());
    let ending = serve(&connection, &Options::default());
    drop(connection);
    threads.join_writer();
    assert_eq!(ending, Ok(Ending::Clean));
    let bytes = written.0.lock().map(|v| v.clone()).unwrap_or_default();
    let mut r = BufReader::new(&bytes[..]);
    let mut answers = Vec::new();
    while !r.fill_buf().map(<[u8]>::is_empty).unwrap_or(true) {
        let m = read_frame(&mut r);
        if m.get("id").is_some() {
            answers.push(m);
        }
    }
    // The reply to the unreadable request is written by the reading thread: it may come
    // before the reply to `initialize`.
    answers.sort_by_key(|m| m["id"].as_i64());
    let ids: Vec<&Value> = answers.iter().map(|m| &m["id"]).collect();
    assert_eq!(
        ids,
        [&json!(1), &json!(2), &json!(3), &json!(7)],
        "{answers:?}"
    );
    assert_eq!(answers[3]["error"]["code"], -32600, "{answers:?}");
    assert!(
        answers[1]["result"]["contents"]["value"]
            .as_str()
            .is_some_and(|t| t.starts_with("**column `ration`**")),
        "{answers:?}"
    );
}

#[test]
fn influence_references_offer_the_models_and_the_label_column() {
    // `check` computes an influence table only when some row is past a threshold, so the
    // server counts it as a table that may be computed; with `label rows by` before the model
    // the renderer writes a `label` column beside each row's number.
    let folder = root().join("tests/fixtures");
    let source = std::fs::read_to_string(folder.join("checks.md")).unwrap_or_default();
    let labelled = source.replacen("model main:", "label rows by pen\nmodel main:", 1);
    assert_ne!(labelled, source);
    let world = FsWorld::new(&folder, false);
    let run = pipeline::run(&labelled, "doc.md", &world, RunOptions::default())
        .unwrap_or_else(|u| panic!("{:?}", u.errors));
    let columns: Vec<Value> = run.json()["outputs"]
        .as_array()
        .into_iter()
        .flatten()
        .find(|o| o["kind"] == "influence")
        .and_then(|o| o["columns"].as_array().cloned())
        .unwrap_or_default();
    assert_eq!(columns.get(1), Some(&json!("label")), "{columns:?}");

    let text = format!(
        "{labelled}\n```covey\ntable summary strat_kg\n```\n\nA: @[influence \nB: @[influence main \nC: @[influence line \n"
    );
    let u = uri(&folder.join("influence-labels.md"));
    let (mut c, _) = Client::initialized(Options::default(), json!({}));
    c.open(&u, &text);
    // Once the data are read, the misspelt column is found.
    c.diagnostics_until(&u, |d| {
        d.iter().any(|p| {
            p["message"]
                .as_str()
                .is_some_and(|m| m.contains("strat_kg"))
        })
    });
    let (line, ch) = pos(&text, "A: @[influence ", 15);
    let models = labels(&c.at("textDocument/completion", &u, line, ch));
    assert!(models.contains(&"main".to_string()), "{models:?}");
    let (line, ch) = pos(&text, "B: @[influence main ", 20);
    let main = labels(&c.at("textDocument/completion", &u, line, ch));
    assert!(main.contains(&"label".to_string()), "{main:?}");
    assert!(main.contains(&"leverage".to_string()), "{main:?}");
    // `line` is declared after `label rows by` too; a model of another data set would not be.
    let (line, ch) = pos(&text, "C: @[influence line ", 20);
    let other = labels(&c.at("textDocument/completion", &u, line, ch));
    assert!(other.contains(&"label".to_string()), "{other:?}");
    assert_eq!(c.shutdown(), Ending::Clean);

    // Without `label rows by`, no `label` column.
    let text = format!("{source}\n@[influence main \n");
    let u = uri(&folder.join("influence-plain.md"));
    let (mut c, _) = Client::initialized(Options::default(), json!({}));
    c.open(&u, &text);
    c.diagnostics(&u);
    let (line, ch) = pos(&text, "@[influence main ", 17);
    let plain = labels(&c.at("textDocument/completion", &u, line, ch));
    assert!(plain.contains(&"leverage".to_string()), "{plain:?}");
    assert!(!plain.contains(&"label".to_string()), "{plain:?}");
    assert_eq!(c.shutdown(), Ending::Clean);
}

/// Renders the document at `path` in place and gives its text afterwards.
fn render_in_place(path: &std::path::Path) -> String {
    let in_place = covey::RenderOptions {
        in_place: true,
        ..covey::RenderOptions::default()
    };
    let report = covey::render(&[path.to_path_buf()], &in_place);
    assert_eq!(report.verdict, covey::Verdict::Ok, "{:?}", report.lines);
    std::fs::read_to_string(path).unwrap_or_default()
}

/// Found by an adversarial review of the server. A lone CR ends a line for the protocol and for
/// the renderer, but the server counted lines at LF only: the renderer's error at 6:13 of a
/// lone-CR document came as line 0, character 37, drawn at the end of the first line, and
/// every later one was a line early. A covey block in a list or a block quote, which the
/// renderer warns is not run, drew nothing in the editor. Completion inside a quoted text
/// (`load "d|`) offered the keyword `database` in place of the quote and the letters after it.
#[test]
fn lone_carriage_returns_nested_blocks_and_quoted_texts() {
    let dir = workspace("review");
    std::fs::write(dir.join("d.csv"), "g,x,y\na,1,2\nb,2,3\na,3,4\nb,4,6\n")
        .unwrap_or_else(|e| panic!("{e}"));
    let (mut client, _) = Client::initialized(Options::default(), json!({}));

    // Lone CRs, then CRLF, an astral character and a combining mark before the error.
    let text = "# t\r\rSome text\r\r```covey\rload \"d.csv\"\rbogus here\r```\r";
    let doc = uri(&dir.join("cr.md"));
    client.open(&doc, text);
    let problems = client.diagnostics_of(&doc, 1);
    let rendered = render_errors(text, &dir);
    // One error for each line a lone CR ends in the block, at that line's end.
    let places: Vec<(usize, usize)> = rendered.iter().map(|(l, c, _)| (*l, *c)).collect();
    assert_eq!(places, vec![(6, 13), (7, 11)], "{rendered:?}");
    assert_eq!(problems.len(), 2, "{problems:?}");
    for ((l, c, m), p) in rendered.iter().zip(&problems) {
        assert_eq!(
            p["range"]["start"],
            json!({"line": l - 1, "character": c - 1}),
            "{problems:?}"
        );
        assert_eq!(p["message"].as_str(), Some(m.as_str()));
    }

    let text = "# t\r\n\r\n\u{1F600}e\u{301} text\r\n\r\n```covey\r\nload \"d.csv\" # \u{1F600}\rbogus\r\n```\r\n";
    let doc = uri(&dir.join("mixed.md"));
    client.open(&doc, text);
    let problems = client.diagnostics_of(&doc, 1);
    let rendered = render_errors(text, &dir);
    assert!(!rendered.is_empty());
    // The lines as the protocol splits them, and the renderer's column (in characters) in
    // UTF-16 units.
    let lines: Vec<&str> = text.split("\r\n").flat_map(|l| l.split('\r')).collect();
    assert_eq!(lines.len(), 9);
    for (l, c, m) in &rendered {
        let character: usize = lines[l - 1].chars().take(c - 1).map(char::len_utf16).sum();
        assert!(
            problems.iter().any(|p| p["range"]["start"]
                == json!({"line": l - 1, "character": character})
                && p["message"].as_str() == Some(m.as_str())),
            "the renderer's {l}:{c} {m} is not at {}:{character} in {problems:?}",
            l - 1
        );
    }
    assert!(
        rendered.iter().any(|(l, c, _)| (*l, *c) == (6, 17)),
        "{rendered:?}"
    );
    // The line after a lone CR is a line of its own, and the closing fence is no statement
    // (split at LF only, `bogus` went with the line before and the fence was read as a
    // statement: "does not start with a statement (found ```)").
    assert_eq!(rendered.len(), 2, "{rendered:?}");
    assert!(
        rendered
            .iter()
            .any(|(l, c, m)| (*l, *c) == (7, 1) && m.contains("(found `bogus`)")),
        "{rendered:?}"
    );

    // A covey block in a list item and in a block quote: a warning at its fence.
    let text =
        "# t\n\n- item\n\n  ```covey\n  load \"d.csv\"\n  ```\n\n> ```covey\n> bogus\n> ```\n";
    let doc = uri(&dir.join("nested.md"));
    client.open(&doc, text);
    let problems = client.diagnostics_of(&doc, 1);
    let warned: Vec<(Value, Value, Value)> = problems
        .iter()
        .map(|p| {
            (
                p["range"]["start"].clone(),
                p["severity"].clone(),
                p["message"].clone(),
            )
        })
        .collect();
    let words = covey::pipeline::NESTED_BLOCK;
    assert_eq!(
        warned,
        vec![
            (json!({"line": 4, "character": 2}), json!(2), json!(words)),
            (json!({"line": 8, "character": 2}), json!(2), json!(words)),
        ]
    );
    let world = FsWorld::new(&dir, false);
    let run = pipeline::run(text, "doc.md", &world, RunOptions::default())
        .unwrap_or_else(|u| panic!("{}", u.errors.join("\n")));
    assert_eq!(
        run.warnings,
        vec![
            format!("doc.md:5: warning: {words}"),
            format!("doc.md:9: warning: {words}")
        ]
    );

    // Inside a quoted text only quoted candidates; after it, the clauses.
    let text = "# t\n\n```covey\nload \"d.csv\"\nfactor g levels \"a\", \"b\"\nmodel m: y on nosuch\n```\n";
    let doc = uri(&dir.join("quoted.md"));
    client.open(&doc, text);
    // The data file is read once the column is known missing.
    client.diagnostics_until(&doc, |d| !d.is_empty());
    for (line, character) in [(3, 6), (3, 7), (3, 11)] {
        let got = labels(&client.at("textDocument/completion", &doc, line, character));
        assert!(got.is_empty(), "{line}:{character} {got:?}");
    }
    let got = labels(&client.at("textDocument/completion", &doc, 3, 5));
    assert_eq!(got, vec!["database"]);
    let got = labels(&client.at("textDocument/completion", &doc, 4, 17));
    assert_eq!(got, vec!["a", "b"]);
    assert_eq!(client.shutdown(), Ending::Clean);
}
