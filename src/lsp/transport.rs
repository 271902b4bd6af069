//! The protocol's framing over a byte stream (`Content-Length` headers, then a JSON message),
//! read so that no input ends the session: a message that is not JSON, or not a message, is
//! answered (a request whose id can be read gets an error reply) or noted on standard error, and
//! the next one is read. lsp-server's own stdio reader stops at the first such message, and sizes
//! its buffer from the header before reading, so a header claiming a huge length would abort.

use std::io::{self, BufRead, Read, Write};
use std::thread::JoinHandle;

use crossbeam_channel::{Receiver, Sender};
use lsp_server::{Connection, ErrorCode, Message, RequestId, Response};
use serde_json::Value;

/// The threads that read and write the stream.
pub struct Threads {
    reader: JoinHandle<()>,
    writer: JoinHandle<()>,
}

impl Threads {
    /// Waits for the writer to have written every answer (it stops once the connection is
    /// dropped). The reader is not waited for: after an error it may still be blocked reading.
    pub fn join_writer(self) {
        let _ = self.writer.join();
        drop(self.reader);
    }
}

/// A connection whose messages are read from `input` and written to `output`, each on a thread
/// of its own.
pub fn connect(
    input: impl BufRead + Send + 'static,
    output: impl Write + Send + 'static,
) -> (Connection, Threads) {
    let (to_writer, writer_in) = crossbeam_channel::unbounded::<Message>();
    let (to_server, server_in) = crossbeam_channel::unbounded::<Message>();
    let replies = to_writer.clone();
    let reader = std::thread::spawn(move || read_all(input, &to_server, &replies));
    let writer = std::thread::spawn(move || write_all(output, &writer_in));
    (
        Connection {
            sender: to_writer,
            receiver: server_in,
        },
        Threads { reader, writer },
    )
}

fn write_all(mut output: impl Write, messages: &Receiver<Message>) {
    for m in messages {
        if m.write(&mut output).is_err() {
            return;
        }
    }
}

/// Reads messages until the stream ends or `exit` comes; what cannot be read is answered or
/// noted, and reading goes on.
fn read_all(mut input: impl BufRead, server: &Sender<Message>, replies: &Sender<Message>) {
    loop {
        let body = match read_frame(&mut input) {
            Ok(Some(body)) => body,
            Ok(None) => return,
            Err(e) => {
                note(format_args!(
                    "a message's header cannot be read ({e}); it is skipped"
                ));
                continue;
            }
        };
        let Some(msg) = message(&body, replies) else {
            continue;
        };
        let exit = matches!(&msg, Message::Notification(n) if n.method == "exit");
        if server.send(msg).is_err() || exit {
            return;
        }
    }
}

/// The message in `body`; `None` (after answering or noting it) when it is not one.
fn message(body: &[u8], replies: &Sender<Message>) -> Option<Message> {
    let value: Value = match serde_json::from_slice(body) {
        Ok(v) => v,
        Err(e) => {
            note(format_args!("a message is not JSON ({e}); it is skipped"));
            return None;
        }
    };
    match serde_json::from_value::<Message>(value.clone()) {
        Ok(m) => Some(m),
        Err(e) => {
            let id = match value.get("id") {
                Some(Value::Number(n)) => n
                    .as_i64()
                    .and_then(|n| i32::try_from(n).ok())
                    .map(RequestId::from),
                Some(Value::String(s)) => Some(RequestId::from(s.clone())),
                _ => None,
            };
            match id {
                // A request the server cannot take still gets an answer, so the editor does
                // not wait for one.
                Some(id) if value.get("method").is_some() => {
                    let _ = replies.send(Message::Response(Response::new_err(
                        id,
                        ErrorCode::InvalidRequest as i32,
                        format!("the request cannot be read: {e}"),
                    )));
                }
                _ => note(format_args!(
                    "a message cannot be read ({e}); it is skipped"
                )),
            }
            None
        }
    }
}

/// One frame's body; `Ok(None)` at the end of the stream; an error for a header block without
/// a readable `Content-Length` (the block is consumed, so reading can go on).
fn read_frame(input: &mut impl BufRead) -> io::Result<Option<Vec<u8>>> {
    let mut length: Option<Result<u64, String>> = None;
    let mut any = false;
    loop {
        let mut line = Vec::new();
        if input.read_until(b'\n', &mut line)? == 0 {
            return Ok(None);
        }
        let text = String::from_utf8_lossy(&line);
        let text = text.trim_end_matches(['\r', '\n']);
        if text.is_empty() {
            if any {
                break;
            }
            // Blank lines between messages are passed over.
            continue;
        }
        any = true;
        if let Some((name, value)) = text.split_once(':') {
            if name.trim().eq_ignore_ascii_case("content-length") {
                length = Some(
                    value
                        .trim()
                        .parse::<u64>()
                        .map_err(|_| format!("`Content-Length` is not a length: {text:?}")),
                );
            }
        }
    }
    let length = match length {
        Some(Ok(n)) => n,
        Some(Err(e)) => return Err(io::Error::new(io::ErrorKind::InvalidData, e)),
        None => {
            return Err(io::Error::new(
                io::ErrorKind::InvalidData,
                "no `Content-Length`".to_string(),
            ))
        }
    };
    // Read as the bytes come, never sized from the header alone.
    let mut body = Vec::new();
    input.by_ref().take(length).read_to_end(&mut body)?;
    if (body.len() as u64) < length {
        return Ok(None);
    }
    Ok(Some(body))
}

/// A line on standard error about a message that was skipped; a closed or full stderr is
/// no reason to end the session, so a failed write is let go.
fn note(what: std::fmt::Arguments) {
    let _ = writeln!(io::stderr().lock(), "covey lsp: {what}");
}
