//! The protocol: one loop that takes the editor's messages in order, keeps the open documents,
//! checks a document once the editor has been quiet for a moment after a change (debounced),
//! and answers requests from the last check. Data files are read on a thread of their own.

use std::collections::BTreeMap;
use std::path::PathBuf;
use std::sync::Arc;
use std::time::{Duration, Instant};

use crossbeam_channel::{select, Receiver};
use lsp_server::{Connection, ErrorCode, Message, Notification, Request, Response};
use lsp_types::{
    CompletionOptions, Diagnostic as LspDiagnostic, DiagnosticSeverity,
    DidChangeTextDocumentParams, DidCloseTextDocumentParams, DidOpenTextDocumentParams,
    DocumentSymbolParams, HoverProviderCapability, InitializeParams, OneOf, PositionEncodingKind,
    PublishDiagnosticsParams, ServerCapabilities, TextDocumentPositionParams,
    TextDocumentSyncCapability, TextDocumentSyncKind, TextDocumentSyncOptions,
    TextDocumentSyncSaveOptions, Uri,
};
use serde_json::Value;

use super::analysis::{analyze, Analysis, Severity};
use super::data::{self, DataCache, Done};
use super::position::{apply_change, Encoding, Lines};
use super::{complete, hover, navigate};

/// How the server behaves.
#[derive(Debug, Clone)]
pub struct Options {
    /// Let `load` read files outside the document's folder (as `covey render --allow-outside`).
    pub allow_outside: bool,
    /// How long the editor must be quiet after a change before the document is checked.
    pub debounce: Duration,
}

impl Default for Options {
    fn default() -> Options {
        Options {
            allow_outside: false,
            debounce: Duration::from_millis(DEBOUNCE_MS),
        }
    }
}

/// Quiet time after a keystroke before a check: long enough that typing a word does not check
/// every letter, short enough to feel immediate (common practice for editors is 100-300 ms).
pub const DEBOUNCE_MS: u64 = 150;

/// How a session with the editor ended.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Ending {
    /// `shutdown`, then `exit`: the editor closed the session as the protocol says.
    Clean,
    /// `exit` without `shutdown` first.
    ExitWithoutShutdown,
}

/// An open document.
struct Doc {
    uri: Uri,
    text: String,
    version: i32,
    path: Option<PathBuf>,
    /// The last check, when it is of the current text.
    analysis: Option<Arc<Analysis>>,
    /// When to check it next.
    due: Option<Instant>,
}

struct Server<'c> {
    connection: &'c Connection,
    docs: BTreeMap<String, Doc>,
    cache: DataCache,
    encoding: Encoding,
    options: Options,
    shutting_down: bool,
}

/// Runs the language server on `connection` until the editor ends the session. Returns how it
/// ended, or why it could not go on (the connection closed, or was never set up).
pub fn serve(connection: &Connection, options: &Options) -> Result<Ending, String> {
    let (jobs_in, jobs_out) = crossbeam_channel::unbounded();
    let (done_in, done_out) = crossbeam_channel::unbounded::<Done>();
    let allow = options.allow_outside;
    // Files are read on a thread of their own; it ends when the server drops its end.
    let reader = std::thread::Builder::new().name("covey-lsp-data".to_string());
    std::thread::Builder::spawn(reader, move || data::reader(jobs_out, done_in, allow))
        .map_err(|e| format!("cannot start the thread that reads data files: {e}"))?;
    let mut server = Server {
        connection,
        docs: BTreeMap::new(),
        cache: DataCache::with_reader(options.allow_outside, jobs_in),
        encoding: Encoding::Utf16,
        options: options.clone(),
        shutting_down: false,
    };
    server.initialize()?;
    server.run(&done_out)
}

impl Server<'_> {
    fn send(&self, m: impl Into<Message>) -> Result<(), String> {
        self.connection
            .sender
            .send(m.into())
            .map_err(|_| "the editor's side of the connection is closed".to_string())
    }

    /// Waits for `initialize`, answers it with what the server offers, and goes on (the
    /// `initialized` notification that follows is taken by the main loop).
    fn initialize(&mut self) -> Result<(), String> {
        loop {
            let msg =
                self.connection.receiver.recv().map_err(|_| {
                    "the editor closed the connection before initializing".to_string()
                })?;
            match msg {
                Message::Request(req) if req.method == "initialize" => {
                    let params: Option<InitializeParams> = serde_json::from_value(req.params).ok();
                    let utf8 = params
                        .as_ref()
                        .and_then(|p| p.capabilities.general.as_ref())
                        .and_then(|g| g.position_encodings.as_ref())
                        .is_some_and(|e| e.contains(&PositionEncodingKind::UTF8));
                    self.encoding = if utf8 {
                        Encoding::Utf8
                    } else {
                        Encoding::Utf16
                    };
                    let result = serde_json::json!({
                        "capabilities": capabilities(self.encoding),
                        "serverInfo": {"name": "covey", "version": env!("CARGO_PKG_VERSION")},
                    });
                    return self.send(Response::new_ok(req.id, result));
                }
                Message::Request(req) => self.send(Response::new_err(
                    req.id,
                    ErrorCode::ServerNotInitialized as i32,
                    "the server is not initialized yet".to_string(),
                ))?,
                Message::Notification(n) if n.method == "exit" => {
                    return Err("the editor ended the session before initializing".to_string())
                }
                _ => {}
            }
        }
    }

    fn run(&mut self, done: &Receiver<Done>) -> Result<Ending, String> {
        loop {
            let wait = self.next_due().map_or(Duration::from_secs(3600), |d| {
                d.saturating_duration_since(Instant::now())
            });
            select! {
                recv(self.connection.receiver) -> msg => {
                    let msg = msg.map_err(|_| {
                        "the editor closed the connection without ending the session".to_string()
                    })?;
                    // Data files read meanwhile count for the answer.
                    while let Ok(d) = done.try_recv() {
                        self.take_in(d);
                    }
                    if let Some(ending) = self.handle(msg)? {
                        return Ok(ending);
                    }
                }
                recv(done) -> d => {
                    if let Ok(d) = d {
                        self.take_in(d);
                    }
                }
                default(wait) => {}
            }
            self.publish_due()?;
        }
    }

    /// Takes in a data file read on the reader thread: every document checked while it was
    /// being read is checked again.
    fn take_in(&mut self, d: Done) {
        if self.cache.finish(d) {
            let now = Instant::now();
            for doc in self.docs.values_mut() {
                if doc.analysis.as_ref().is_some_and(|a| a.pending) {
                    doc.analysis = None;
                    doc.due = Some(now);
                }
            }
        }
    }

    fn next_due(&self) -> Option<Instant> {
        self.docs.values().filter_map(|d| d.due).min()
    }

    /// Checks and publishes every document whose quiet time is over.
    fn publish_due(&mut self) -> Result<(), String> {
        let now = Instant::now();
        let due: Vec<String> = self
            .docs
            .iter()
            .filter(|(_, d)| d.due.is_some_and(|t| t <= now))
            .map(|(k, _)| k.clone())
            .collect();
        for key in due {
            if let Some(doc) = self.docs.get_mut(&key) {
                doc.due = None;
            }
            self.publish(&key)?;
        }
        Ok(())
    }

    /// The check of a document's current text (made now if there is none).
    fn analysis(&mut self, key: &str) -> Option<Arc<Analysis>> {
        let doc = self.docs.get_mut(key)?;
        if doc.analysis.is_none() {
            doc.analysis = Some(Arc::new(analyze(
                &doc.text,
                doc.path.as_deref(),
                &mut self.cache,
            )));
        }
        doc.analysis.clone()
    }

    fn publish(&mut self, key: &str) -> Result<(), String> {
        let Some(a) = self.analysis(key) else {
            return Ok(());
        };
        let Some(doc) = self.docs.get(key) else {
            return Ok(());
        };
        let lines = Lines::new(&a.text);
        let diagnostics = a
            .problems
            .iter()
            .map(|p| LspDiagnostic {
                range: lines.range(&a.text, p.span, self.encoding),
                severity: Some(match p.severity {
                    Severity::Error => DiagnosticSeverity::ERROR,
                    Severity::Warning => DiagnosticSeverity::WARNING,
                }),
                source: Some("covey".to_string()),
                message: match &p.help {
                    Some(h) => format!("{}\nhelp: {h}", p.message),
                    None => p.message.clone(),
                },
                ..LspDiagnostic::default()
            })
            .collect();
        let params = PublishDiagnosticsParams {
            uri: doc.uri.clone(),
            diagnostics,
            version: Some(doc.version),
        };
        self.send(Notification::new(
            "textDocument/publishDiagnostics".to_string(),
            params,
        ))
    }

    /// Takes one message; `Some` when the session is over.
    fn handle(&mut self, msg: Message) -> Result<Option<Ending>, String> {
        match msg {
            Message::Request(req) => {
                if self.shutting_down {
                    self.send(Response::new_err(
                        req.id,
                        ErrorCode::InvalidRequest as i32,
                        "the server is shutting down".to_string(),
                    ))?;
                } else if req.method == "shutdown" {
                    self.shutting_down = true;
                    self.send(Response::new_ok(req.id, Value::Null))?;
                } else {
                    let response = self.request(req);
                    self.send(response)?;
                }
                Ok(None)
            }
            Message::Notification(n) => {
                if n.method == "exit" {
                    return Ok(Some(if self.shutting_down {
                        Ending::Clean
                    } else {
                        Ending::ExitWithoutShutdown
                    }));
                }
                self.notification(n)?;
                Ok(None)
            }
            Message::Response(_) => Ok(None),
        }
    }

    fn notification(&mut self, n: Notification) -> Result<(), String> {
        match n.method.as_str() {
            "textDocument/didOpen" => {
                let Ok(p) = serde_json::from_value::<DidOpenTextDocumentParams>(n.params) else {
                    return Ok(());
                };
                let key = p.text_document.uri.as_str().to_string();
                let path = file_path(&p.text_document.uri);
                self.docs.insert(
                    key.clone(),
                    Doc {
                        uri: p.text_document.uri,
                        text: p.text_document.text,
                        version: p.text_document.version,
                        path,
                        analysis: None,
                        due: None,
                    },
                );
                // A document just opened is checked at once.
                self.publish(&key)?;
            }
            "textDocument/didChange" => {
                let Ok(p) = serde_json::from_value::<DidChangeTextDocumentParams>(n.params) else {
                    return Ok(());
                };
                let due = Instant::now() + self.options.debounce;
                let encoding = self.encoding;
                if let Some(doc) = self.docs.get_mut(p.text_document.uri.as_str()) {
                    for change in &p.content_changes {
                        apply_change(&mut doc.text, change.range, &change.text, encoding);
                    }
                    doc.version = p.text_document.version;
                    doc.analysis = None;
                    doc.due = Some(due);
                }
            }
            "textDocument/didSave" | "workspace/didChangeWatchedFiles" => {
                // Data files may have changed with the save: check again soon.
                let due = Instant::now() + self.options.debounce;
                for doc in self.docs.values_mut() {
                    doc.analysis = None;
                    doc.due = Some(due);
                }
            }
            "textDocument/didClose" => {
                let Ok(p) = serde_json::from_value::<DidCloseTextDocumentParams>(n.params) else {
                    return Ok(());
                };
                if let Some(doc) = self.docs.remove(p.text_document.uri.as_str()) {
                    // The editor forgets a closed document's problems only when told.
                    let params = PublishDiagnosticsParams {
                        uri: doc.uri,
                        diagnostics: Vec::new(),
                        version: None,
                    };
                    self.send(Notification::new(
                        "textDocument/publishDiagnostics".to_string(),
                        params,
                    ))?;
                }
            }
            _ => {}
        }
        Ok(())
    }

    /// Answers one request; an error reply for a request it cannot read or does not know.
    fn request(&mut self, req: Request) -> Response {
        let id = req.id.clone();
        let result = match req.method.as_str() {
            "textDocument/completion" => self.with_position(req, |s, key, at| {
                let a = s.analysis(key)?;
                let c = complete::complete(&a, &mut s.cache, at)?;
                Some(c.to_lsp(&a, s.encoding))
            }),
            "textDocument/hover" => self.with_position(req, |s, key, at| {
                let a = s.analysis(key)?;
                let h = hover::hover(&a, &mut s.cache, at)?;
                Some(h.to_lsp(&a, s.encoding))
            }),
            "textDocument/definition" => self.with_position(req, |s, key, at| {
                let a = s.analysis(key)?;
                let uri = s.docs.get(key)?.uri.clone();
                let span = navigate::definition(&a, &mut s.cache, at)?;
                let lines = Lines::new(&a.text);
                Some(lsp_types::Location {
                    uri,
                    range: lines.range(&a.text, span, s.encoding),
                })
            }),
            "textDocument/documentSymbol" => {
                match serde_json::from_value::<DocumentSymbolParams>(req.params) {
                    Ok(p) => {
                        let key = p.text_document.uri.as_str().to_string();
                        let symbols = self
                            .analysis(&key)
                            .map(|a| navigate::symbols(&a, self.encoding))
                            .unwrap_or_default();
                        Ok(serde_json::to_value(symbols).unwrap_or(Value::Null))
                    }
                    Err(e) => Err(invalid(&e)),
                }
            }
            // The protocol allows one `initialize` a session: a second is a request out of
            // place, not an unknown method.
            "initialize" => Err((
                ErrorCode::InvalidRequest as i32,
                "the server is already initialized; `initialize` is sent once a session"
                    .to_string(),
            )),
            other => Err((
                ErrorCode::MethodNotFound as i32,
                format!("covey's language server does not answer `{other}`"),
            )),
        };
        match result {
            Ok(value) => Response::new_ok(id, value),
            Err((code, message)) => Response::new_err(id, code, message),
        }
    }

    /// Answers a request about a place in a document with `f`, given the document's key and
    /// the place as a byte offset; `null` when `f` has nothing to say.
    fn with_position<T: serde::Serialize>(
        &mut self,
        req: Request,
        f: impl FnOnce(&mut Self, &str, usize) -> Option<T>,
    ) -> Result<Value, (i32, String)> {
        // Every request about a place holds these two fields (and others, left aside).
        let p: TextDocumentPositionParams =
            serde_json::from_value(req.params).map_err(|e| invalid(&e))?;
        let key = p.text_document.uri.as_str().to_string();
        let Some(doc) = self.docs.get(&key) else {
            return Ok(Value::Null);
        };
        let at = Lines::new(&doc.text).offset(&doc.text, p.position, self.encoding);
        Ok(f(self, &key, at)
            .and_then(|v| serde_json::to_value(v).ok())
            .unwrap_or(Value::Null))
    }
}

fn invalid(e: &serde_json::Error) -> (i32, String) {
    (
        ErrorCode::InvalidParams as i32,
        format!("the request's parameters cannot be read: {e}"),
    )
}

/// What the server offers, told in its answer to `initialize`.
fn capabilities(encoding: Encoding) -> ServerCapabilities {
    ServerCapabilities {
        position_encoding: Some(match encoding {
            Encoding::Utf8 => PositionEncodingKind::UTF8,
            Encoding::Utf16 => PositionEncodingKind::UTF16,
        }),
        text_document_sync: Some(TextDocumentSyncCapability::Options(
            TextDocumentSyncOptions {
                open_close: Some(true),
                change: Some(TextDocumentSyncKind::INCREMENTAL),
                save: Some(TextDocumentSyncSaveOptions::Supported(true)),
                ..TextDocumentSyncOptions::default()
            },
        )),
        completion_provider: Some(CompletionOptions {
            trigger_characters: Some(vec!["@".into(), "[".into(), "\"".into()]),
            ..CompletionOptions::default()
        }),
        hover_provider: Some(HoverProviderCapability::Simple(true)),
        definition_provider: Some(OneOf::Left(true)),
        document_symbol_provider: Some(OneOf::Left(true)),
        ..ServerCapabilities::default()
    }
}

/// The path of a `file:` URI; `None` for any other (an unsaved buffer has no folder, so its data
/// files are not read).
pub fn file_path(uri: &Uri) -> Option<PathBuf> {
    if !uri
        .scheme()
        .is_some_and(|s| s.as_str().eq_ignore_ascii_case("file"))
    {
        return None;
    }
    let decoded = uri.path().as_estr().decode().into_string().ok()?;
    let path = decoded.as_ref();
    // `file:///C:/x` on Windows: the drive follows the first slash.
    let b = path.as_bytes();
    let path = if b.len() >= 3 && b[0] == b'/' && b[2] == b':' && b[1].is_ascii_alphabetic() {
        &path[1..]
    } else {
        path
    };
    Some(PathBuf::from(path))
}
