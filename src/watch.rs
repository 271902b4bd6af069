//! `covey render --watch`: render, then render again each document whose
//! own text or data changed.
//!
//! The watcher learns what each document depends on from the render it just
//! did: the document and every data file it asked for, each with its stamp
//! (length, modification time, identity) taken before it was read and the
//! digest of the bytes read. Waiting costs a few `stat` calls per interval.
//! A file whose stamp changed is read and its digest compared with the one
//! the render saw, so a touched but unchanged file, or covey's own in-place
//! write, runs nothing; and since the stamps are from before the reading, an
//! edit saved while a render was going on is rendered next.

use std::ops::ControlFlow;
use std::path::{Path, PathBuf};
use std::time::Duration;

use crate::commands::{self, Content, RenderOptions, Report, Seen, Why};
use crate::files::Stamp;

/// Renders the documents named by `paths`, then waits and renders again
/// every document whose text or data changed, telling `say` each line of
/// what happened (a [`ControlFlow::Break`] from `say`, e.g. on a closed
/// stderr, ends the watch). Looks every `interval`, and first asks `gone`
/// whether anyone still hears `say` (true ends the watch, so that one whose
/// reader left does not wait for a change to find out). `rounds` bounds the
/// looks (None: until interrupted). Returns the report of the last render.
pub fn watch(
    paths: &[PathBuf],
    opts: &RenderOptions,
    interval: Duration,
    rounds: Option<usize>,
    say: &mut dyn FnMut(&str) -> ControlFlow<()>,
    gone: &dyn Fn() -> bool,
) -> Report {
    // What each document of the last renders read.
    let mut known: Vec<(PathBuf, Vec<Seen>)> = Vec::new();
    let mut docs = Vec::new();
    let mut last = Report {
        lines: Vec::new(),
        verdict: commands::Verdict::Ok,
    };
    let mut round = 0;
    let mut first = true;
    loop {
        if !first {
            if rounds.is_some_and(|r| round >= r) || gone() {
                return last;
            }
            round += 1;
            std::thread::sleep(interval);
        }
        let listed = match commands::unique_documents(paths) {
            Ok(d) => Some(d),
            Err(e) if first => {
                last = Report {
                    lines: vec![e.to_string()],
                    verdict: commands::Verdict::Failed,
                };
                if say(&e.to_string()).is_break() {
                    return last;
                }
                None
            }
            // A document gone for a moment (an editor saving by delete and
            // create) is looked for again at the next round.
            Err(_) => None,
        };
        if let Some(listed) = listed {
            docs = listed;
        }
        known.retain(|(d, _)| docs.contains(d));
        let mut due: Vec<PathBuf> = Vec::new();
        let mut changed: Vec<String> = Vec::new();
        for doc in &docs {
            match known.iter_mut().find(|(d, _)| d == doc) {
                Some((_, seen)) => {
                    let files = changes(seen);
                    if !files.is_empty() {
                        changed.extend(files.iter().map(|f| f.display().to_string()));
                        due.push(doc.clone());
                    }
                }
                None => {
                    if !first {
                        changed.push(format!("{} (new)", doc.display()));
                    }
                    due.push(doc.clone());
                }
            }
        }
        first = false;
        if due.is_empty() {
            continue;
        }
        if !changed.is_empty() {
            changed.dedup();
            if say(&format!("changed: {}", changed.join(", "))).is_break() {
                return last;
            }
        }
        let others: Vec<(PathBuf, PathBuf)> = known
            .iter()
            .filter(|(d, _)| !due.contains(d))
            .flat_map(|(d, seen)| {
                seen.iter()
                    .filter(|s| s.why == Why::Data)
                    .map(|s| (s.file.clone(), d.clone()))
            })
            .collect();
        let selected = |d: &Path| due.iter().any(|x| x == d);
        let (report, reads) =
            commands::prepare_documents(&docs, &selected, opts, &others).commit_and_read();
        for (doc, seen) in reads {
            match known.iter_mut().find(|(d, _)| *d == doc) {
                Some(entry) => entry.1 = seen,
                None => known.push((doc, seen)),
            }
        }
        last = report;
        for line in &last.lines {
            if say(line).is_break() {
                return last;
            }
        }
    }
}

/// The files of `seen` that changed since they were read; the stamps of
/// files found unchanged are brought up to date.
fn changes(seen: &mut [Seen]) -> Vec<PathBuf> {
    let mut out = Vec::new();
    for s in seen.iter_mut() {
        let stamp = Stamp::of(&s.file);
        if stamp.is_some() && stamp == s.stamp {
            continue;
        }
        let content = Content::of(&s.file);
        if content != Content::Unknown && content == s.content {
            s.stamp = stamp;
            continue;
        }
        out.push(s.file.clone());
    }
    out
}
