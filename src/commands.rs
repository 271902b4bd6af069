//! `covey render` and `covey check`: documents on disk in, files and a
//! report out.

use std::path::{Path, PathBuf};

use crate::files::{self, Batch};
use crate::pipeline::{self, Run, RunOptions};
use crate::report::json;
use crate::world::FsWorld;

/// Options of `covey render`.
#[derive(Debug, Clone, Default)]
pub struct RenderOptions {
    /// Write the outputs into the source documents, between covey's markers.
    pub in_place: bool,
    /// Folder for the rendered documents (default: beside each source).
    pub out_dir: Option<PathBuf>,
    /// Also write every table as JSON to this file (one document only).
    pub json: Option<PathBuf>,
    /// Run the remaining blocks after a failing statement.
    pub keep_going: bool,
    /// Allow `load` to read files outside the document's folder.
    pub allow_outside: bool,
    /// Also write a self-contained HTML page beside each rendering.
    pub html: bool,
    /// Render past a failed gate, marking it at the top of the document.
    pub override_gates: bool,
    /// Parameter values (`--set NAME=VALUE`).
    pub params: Vec<(String, String)>,
}

/// Options of `covey check`.
#[derive(Debug, Clone, Default)]
pub struct CheckOptions {
    /// Where the renderings were written, if not beside their sources.
    pub out_dir: Option<PathBuf>,
    pub allow_outside: bool,
    /// Parameter values the renderings were made with (`--set NAME=VALUE`).
    pub params: Vec<(String, String)>,
    /// The renderings were made past failed gates.
    pub override_gates: bool,
}

/// How a command ended, which decides the exit code.
#[derive(Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord)]
pub enum Verdict {
    /// Everything rendered, or every rendering is current.
    Ok,
    /// A rendering is out of date.
    Stale,
    /// An error: bad input, a failing statement, a file that cannot be written.
    Failed,
}

/// What a command has to say (for stderr) and how it ended.
#[derive(Debug, Clone)]
pub struct Report {
    pub lines: Vec<String>,
    pub verdict: Verdict,
}

impl Report {
    fn new() -> Report {
        Report {
            lines: Vec::new(),
            verdict: Verdict::Ok,
        }
    }

    fn fail(&mut self, line: impl Into<String>) {
        self.lines.push(line.into());
        self.verdict = self.verdict.max(Verdict::Failed);
    }
}

fn display_name(doc: &Path) -> String {
    doc.file_name()
        .map(|n| n.to_string_lossy().into_owned())
        .unwrap_or_default()
}

/// Runs one document from disk.
fn run_file(doc: &Path, opts: RunOptions, allow_outside: bool) -> Result<Run, Vec<String>> {
    let bytes =
        std::fs::read(doc).map_err(|e| vec![format!("{}: cannot read: {e}", doc.display())])?;
    let text = String::from_utf8(bytes).map_err(|e| {
        vec![format!(
            "{}: the document is not valid UTF-8 (first bad byte at offset {}); save it as UTF-8",
            doc.display(),
            e.utf8_error().valid_up_to()
        )]
    })?;
    let folder = doc
        .parent()
        .filter(|p| !p.as_os_str().is_empty())
        .unwrap_or(Path::new("."));
    let world = FsWorld::new(folder, allow_outside);
    pipeline::run(&text, &display_name(doc), &world, opts).map_err(|u| u.errors)
}

/// Renders every document named by `paths` (files, or folders of `*.md`).
/// Each document's rendering is written atomically; a document that cannot
/// run (broken syntax) writes nothing. Returns what to tell the user.
pub fn render(paths: &[PathBuf], opts: &RenderOptions) -> Report {
    let mut report = Report::new();
    let docs = match files::documents(paths) {
        Ok(d) => d,
        Err(e) => {
            report.fail(e.to_string());
            return report;
        }
    };
    if opts.json.is_some() && docs.len() != 1 {
        report.fail(format!(
            "--json writes the tables of one document, but {} documents were given; render them one at a time",
            docs.len()
        ));
        return report;
    }
    for doc in &docs {
        let run_opts = RunOptions {
            keep_going: opts.keep_going,
            override_gates: opts.override_gates,
            params: opts.params.clone(),
        };
        let run = match run_file(doc, run_opts, opts.allow_outside) {
            Ok(r) => r,
            Err(errors) => {
                for e in errors {
                    report.fail(e);
                }
                report.fail(format!(
                    "{}: not rendered; nothing was written",
                    doc.display()
                ));
                continue;
            }
        };
        report.lines.extend(run.warnings.iter().cloned());
        let target = if opts.in_place {
            doc.clone()
        } else {
            files::rendered_path(doc, opts.out_dir.as_deref())
        };
        if !opts.in_place && same_file(&target, doc) {
            report.fail(format!(
                "{}: the rendering would overwrite the source; choose another --out folder",
                doc.display()
            ));
            continue;
        }
        let mut batch = Batch::new();
        batch.add(target.clone(), run.rendered.clone());
        let folder = target.parent().map(Path::to_path_buf).unwrap_or_default();
        for (rel, svg) in &run.figures {
            batch.add(folder.join(rel), svg.clone());
        }
        if opts.html {
            let title = display_name(doc);
            batch.add(
                files::sibling(&target, "html"),
                crate::report::html::page(&title, &run.rendered, &run.figures),
            );
        }
        if let Some(j) = &opts.json {
            batch.add(j.clone(), json::to_text(&run.json()));
        }
        if let Err(e) = batch.commit() {
            report.fail(e.to_string());
            continue;
        }
        remove_stale_figures(&folder, doc, &run.figures);
        for e in &run.errors {
            report.fail(e.clone());
        }
        if !run.gates_failed.is_empty() && !opts.override_gates {
            // A failed gate is the procedure's own "no": exit 1, like a
            // stale rendering, unless an error already says 2.
            report.verdict = report.verdict.max(Verdict::Stale);
        }
        report.lines.push(format!(
            "{}: {} -> {}",
            if run.failed() {
                "rendered with errors"
            } else {
                "rendered"
            },
            doc.display(),
            target.display()
        ));
    }
    report
}

/// Removes figure files of an earlier render that this one no longer
/// draws. Only files named as covey names figures (`blockB-K.svg`) in the
/// document's own figures folder are touched.
fn remove_stale_figures(folder: &Path, doc: &Path, figures: &[(String, String)]) {
    let stem = display_name(doc);
    let stem = stem.strip_suffix(".md").unwrap_or(&stem);
    let dir_name = format!("{stem}.figures");
    let Ok(entries) = std::fs::read_dir(folder.join(&dir_name)) else {
        return;
    };
    for entry in entries.flatten() {
        let name = entry.file_name().to_string_lossy().into_owned();
        let ours = name.starts_with("block") && name.ends_with(".svg");
        let rel = format!("{dir_name}/{name}");
        if ours && !figures.iter().any(|(f, _)| *f == rel) {
            let _ = std::fs::remove_file(entry.path());
        }
    }
}

fn same_file(a: &Path, b: &Path) -> bool {
    match (a.canonicalize(), b.canonicalize()) {
        (Ok(x), Ok(y)) => x == y,
        _ => a == b,
    }
}

/// Checks that the rendering of every document named by `paths` is current:
/// re-runs each one and compares the result with the rendering on disk.
pub fn check(paths: &[PathBuf], opts: &CheckOptions) -> Report {
    let mut report = Report::new();
    let docs = match files::documents(paths) {
        Ok(d) => d,
        Err(e) => {
            report.fail(e.to_string());
            return report;
        }
    };
    for doc in &docs {
        let run_opts = RunOptions {
            keep_going: false,
            override_gates: opts.override_gates,
            params: opts.params.clone(),
        };
        let run = match run_file(doc, run_opts, opts.allow_outside) {
            Ok(r) => r,
            Err(errors) => {
                for e in errors {
                    report.fail(e);
                }
                continue;
            }
        };
        if run.failed() {
            for e in &run.errors {
                report.fail(e.clone());
            }
            continue;
        }
        let separate = files::rendered_path(doc, opts.out_dir.as_deref());
        let target = if separate.exists() || !run.document.had_regions {
            separate
        } else {
            doc.clone()
        };
        let on_disk = match std::fs::read(&target) {
            Ok(b) => String::from_utf8_lossy(&b).into_owned(),
            Err(_) => {
                report.lines.push(format!(
                    "stale: {} has never been rendered (no {})",
                    doc.display(),
                    target.display()
                ));
                report.verdict = report.verdict.max(Verdict::Stale);
                continue;
            }
        };
        let folder = target.parent().map(Path::to_path_buf).unwrap_or_default();
        let mut figure_problems = Vec::new();
        for (rel, svg) in &run.figures {
            match std::fs::read(folder.join(rel)) {
                Ok(b) if b == svg.as_bytes() => {}
                Ok(_) => figure_problems.push(format!("figure {rel} differs")),
                Err(_) => figure_problems.push(format!("figure {rel} is missing")),
            }
        }
        let diff = match (differences(&run, &on_disk), figure_problems.is_empty()) {
            (None, true) => None,
            (None, false) => Some(figure_problems),
            (Some(mut d), _) => {
                d.extend(figure_problems);
                Some(d)
            }
        };
        match diff {
            None => report.lines.push(format!("current: {}", doc.display())),
            Some(details) => {
                report
                    .lines
                    .push(format!("stale: {} ({})", doc.display(), target.display()));
                report
                    .lines
                    .extend(details.into_iter().map(|d| format!("  {d}")));
                report.verdict = report.verdict.max(Verdict::Stale);
            }
        }
    }
    report
}

/// What differs between a fresh run and the rendering on disk, or None
/// when they are byte-identical.
fn differences(run: &Run, on_disk: &str) -> Option<Vec<String>> {
    if run.rendered == on_disk {
        return None;
    }
    let mut out = Vec::new();
    match crate::document::split_rendered(on_disk) {
        Ok(old) => {
            if old.source != run.document.source {
                out.push("the document's own text changed since it was rendered".to_string());
            }
            let fresh = crate::document::split_rendered(&run.rendered).ok();
            if let Some(fresh) = &fresh {
                if old.provenance != fresh.provenance {
                    out.push("the inputs changed (a data file's contents or row count, or covey's version)".into());
                    // Name each input whose current digest the old provenance lacks.
                    let old_text = old.provenance.as_deref().unwrap_or("");
                    for input in run.inputs.iter().filter(|i| !old_text.contains(&i.sha256)) {
                        out.push(format!(
                            "changed input: {} (SHA-256 now {})",
                            input.path, input.sha256
                        ));
                    }
                }
                let n = old.outputs.len().max(fresh.outputs.len());
                let changed: Vec<String> = (0..n)
                    .filter(|i| old.outputs.get(*i) != fresh.outputs.get(*i))
                    .map(|i| (i + 1).to_string())
                    .collect();
                if !changed.is_empty() {
                    out.push(format!("output of block {} differs", changed.join(", ")));
                }
            }
        }
        Err(e) => out.push(format!("the rendering on disk is damaged: {e}")),
    }
    let (line, want, have) = first_difference(&run.rendered, on_disk);
    out.push(format!("first difference at line {line}:"));
    out.push(format!("    expected: {want}"));
    out.push(format!("    on disk:  {have}"));
    Some(out)
}

fn first_difference(a: &str, b: &str) -> (usize, String, String) {
    let mut la = a.split('\n');
    let mut lb = b.split('\n');
    let mut line = 1;
    loop {
        match (la.next(), lb.next()) {
            (Some(x), Some(y)) if x == y => line += 1,
            (x, y) => {
                let show = |s: Option<&str>| match s {
                    Some(s) => format!("{:?}", s.chars().take(120).collect::<String>()),
                    None => "(end of file)".to_string(),
                };
                return (line, show(x), show(y));
            }
        }
    }
}

/// The files a render depends on: the documents and every data file they
/// read, with a fingerprint of each (length and modification time).
fn watched(
    paths: &[PathBuf],
    opts: &RenderOptions,
) -> Vec<(PathBuf, Option<(u64, std::time::SystemTime)>)> {
    let mut files: Vec<PathBuf> = files::documents(paths).unwrap_or_default();
    let docs = files.clone();
    for doc in &docs {
        let run_opts = RunOptions {
            keep_going: true,
            override_gates: true,
            params: opts.params.clone(),
        };
        if let Ok(run) = run_file(doc, run_opts, opts.allow_outside) {
            let folder = doc.parent().map(Path::to_path_buf).unwrap_or_default();
            files.extend(run.inputs.iter().map(|i| folder.join(&i.path)));
        }
    }
    files
        .into_iter()
        .map(|f| {
            let stamp = std::fs::metadata(&f)
                .ok()
                .and_then(|m| Some((m.len(), m.modified().ok()?)));
            (f, stamp)
        })
        .collect()
}

/// `covey render --watch`: renders, then re-renders whenever a document or
/// a data file it loads changes, telling `say` what changed. Polls every
/// `interval`; `rounds` bounds the polls (None: until interrupted).
pub fn watch(
    paths: &[PathBuf],
    opts: &RenderOptions,
    interval: std::time::Duration,
    rounds: Option<usize>,
    say: &mut dyn FnMut(&str),
) -> Report {
    let mut last = render(paths, opts);
    for line in &last.lines {
        say(line);
    }
    let mut seen = watched(paths, opts);
    let mut round = 0;
    while rounds.is_none_or(|r| round < r) {
        round += 1;
        std::thread::sleep(interval);
        let now = watched(paths, opts);
        let changed: Vec<String> = now
            .iter()
            .filter(|(f, stamp)| seen.iter().find(|(g, _)| g == f).map(|(_, s)| s) != Some(stamp))
            .map(|(f, _)| f.display().to_string())
            .collect();
        if changed.is_empty() {
            continue;
        }
        say(&format!("changed: {}", changed.join(", ")));
        last = render(paths, opts);
        for line in &last.lines {
            say(line);
        }
        // Rendering wrote files; take the fingerprints after it.
        seen = watched(paths, opts);
    }
    last
}
