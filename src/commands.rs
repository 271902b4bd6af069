//! `covey render` and `covey check`: documents on disk in, files and a
//! report out.

use std::path::{Path, PathBuf};
use std::sync::Mutex;

use crate::files::temp::Staging;
use crate::files::{self, Batch, Digest, NewBytes, Plan, Role, Stamp};
use crate::pipeline::{self, Run, RunOptions};
use crate::report::json;
use crate::world::{FsWorld, LocalFile, Opened, World, WorldError};

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
    /// Database addresses (`--database NAME=URL`), for `load database`.
    pub databases: crate::data::database::Databases,
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
    /// Database addresses (`--database NAME=URL`): a document's database loads run again
    /// and their rows' SHA-256 is compared with the rendering's.
    pub databases: crate::data::database::Databases,
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

/// What a file held when a run read it, for `--watch` to tell whether it
/// changed since.
#[derive(Debug, Clone)]
pub(crate) struct Seen {
    pub file: PathBuf,
    pub why: Why,
    /// Taken before the file was read, so that a change made while the run
    /// went on shows as a different stamp.
    pub stamp: Option<Stamp>,
    pub content: Content,
}

/// Why a run depends on a file.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(crate) enum Why {
    /// The document itself.
    Document,
    /// A data file it loads (or tried to).
    Data,
    /// A path its outputs could not be written to.
    Refused,
}

/// What a file held.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(crate) enum Content {
    /// No file there.
    Missing,
    /// These bytes.
    Bytes(Digest),
    /// Something covey did not read through (a special file, a file it could
    /// not read or load).
    Unknown,
}

impl Content {
    /// What the file at `path` holds now; a regular file is read.
    pub fn of(path: &Path) -> Content {
        match std::fs::metadata(path) {
            Err(_) => Content::Missing,
            Ok(m) if !m.is_file() => Content::Unknown,
            Ok(_) => match Digest::of_file(path) {
                Ok(Some(d)) => Content::Bytes(d),
                Ok(None) => Content::Missing,
                Err(_) => Content::Unknown,
            },
        }
    }
}

/// The file system, as the session sees it, noting every data file the
/// document asks for (with its stamp before it is read).
struct Recorder {
    world: FsWorld,
    folder: PathBuf,
    asked: Mutex<Vec<(String, Seen)>>,
}

impl Recorder {
    fn note(&self, path: &str) {
        let Ok(mut asked) = self.asked.lock() else {
            return;
        };
        if asked.iter().any(|(p, _)| p == path) {
            return;
        }
        let file = files::target_of(&self.folder.join(path));
        let stamp = Stamp::of(&file);
        let content = if stamp.is_some() {
            Content::Unknown
        } else {
            Content::Missing
        };
        asked.push((
            path.to_string(),
            Seen {
                file,
                why: Why::Data,
                stamp,
                content,
            },
        ));
    }
}

impl World for Recorder {
    fn read(&self, path: &str) -> Result<Vec<u8>, WorldError> {
        self.note(path);
        self.world.read(path)
    }

    fn open(&self, path: &str) -> Result<Opened, WorldError> {
        self.note(path);
        self.world.open(path)
    }

    fn local(&self, path: &str) -> Result<LocalFile, WorldError> {
        self.note(path);
        self.world.local(path)
    }
}

/// One document run from disk.
struct Ran {
    /// The document's bytes as read.
    read: Option<Digest>,
    /// What the run read: the document first, then every data file it asked
    /// for (a file it loaded with the digest of the bytes it loaded).
    seen: Vec<Seen>,
    outcome: Result<Run, Vec<String>>,
}

/// Runs one document from disk, giving each figure to `figure` as it is drawn.
fn run_file(
    doc: &Path,
    opts: RunOptions,
    allow_outside: bool,
    figure: &mut dyn FnMut(&str, String),
) -> Ran {
    let stamp = Stamp::of(doc);
    let bytes = match crate::world::read_regular(doc) {
        Ok(b) => b,
        Err(e) => {
            return Ran {
                read: None,
                seen: vec![Seen {
                    file: doc.to_path_buf(),
                    why: Why::Document,
                    stamp,
                    content: Content::of(doc),
                }],
                outcome: Err(vec![format!("{}: cannot read: {e}", doc.display())]),
            }
        }
    };
    let read = Digest::of(&bytes);
    let mut seen = vec![Seen {
        file: doc.to_path_buf(),
        why: Why::Document,
        stamp,
        content: Content::Bytes(read),
    }];
    let text = match String::from_utf8(bytes) {
        Ok(t) => t,
        Err(e) => {
            return Ran {
                read: Some(read),
                seen,
                outcome: Err(vec![format!(
                    "{}: the document is not valid UTF-8 (first bad byte at offset {}); save it as UTF-8",
                    doc.display(),
                    e.utf8_error().valid_up_to()
                )]),
            }
        }
    };
    let folder = doc
        .parent()
        .filter(|p| !p.as_os_str().is_empty())
        .unwrap_or(Path::new("."));
    let world = Recorder {
        world: FsWorld::new(folder, allow_outside),
        folder: folder.to_path_buf(),
        asked: Mutex::new(Vec::new()),
    };
    let outcome =
        pipeline::run_with(&text, &display_name(doc), &world, opts, figure).map_err(|u| u.errors);
    let asked = world.asked.into_inner().unwrap_or_default();
    for (path, mut s) in asked {
        // A file loaded is known by the digest of the bytes loaded.
        let loaded = outcome
            .as_ref()
            .ok()
            .and_then(|run| run.inputs.iter().find(|i| i.path == path))
            .and_then(|i| Digest::from_hex(&i.sha256));
        if let Some(d) = loaded {
            s.content = Content::Bytes(d);
        }
        seen.push(s);
    }
    Ran {
        read: Some(read),
        seen,
        outcome,
    }
}

/// Where the outputs of a document go.
struct Targets {
    /// The rendering (the document itself, in place).
    rendering: PathBuf,
    /// The folder of the rendering.
    folder: PathBuf,
    html: Option<PathBuf>,
    figures: PathBuf,
}

impl Targets {
    fn of(doc: &Path, opts: &RenderOptions) -> Targets {
        let separate = files::rendered_path(doc, opts.out_dir.as_deref());
        let folder = separate.parent().map(Path::to_path_buf).unwrap_or_default();
        Targets {
            rendering: if opts.in_place {
                doc.to_path_buf()
            } else {
                separate.clone()
            },
            // Beside the rendering, or beside the document in place; always
            // NAME.rendered.html, never the user's own NAME.html.
            html: opts.html.then(|| files::sibling(&separate, "html")),
            figures: files::figures_dir(&folder, doc),
            folder,
        }
    }

    fn claim(&self, plan: &mut Plan, doc: &Path, opts: &RenderOptions) {
        plan.claim(&self.rendering, doc);
        if let Some(h) = &self.html {
            plan.claim(h, doc);
        }
        plan.claim(&self.figures, doc);
        if let Some(j) = &opts.json {
            plan.claim(j, doc);
        }
    }
}

/// A render with every document run and every output planned and checked
/// against the write rule, before anything is written: [`Prepared::commit`]
/// writes it. [`render`] is the two steps at once; between them, nothing of
/// the user's is held open or locked.
pub struct Prepared {
    report: Report,
    batch: Option<Batch>,
    /// The temporary folders that hold the figures drawn, removed (with what is
    /// left in them) once the batch is written or refused.
    stagings: Vec<Staging>,
    /// What to say once the files are written.
    done: Vec<String>,
    /// What each document run read, and for one rendered in place, the
    /// digest of the bytes it is to hold.
    reads: Vec<(PathBuf, Vec<Seen>, Option<Digest>)>,
}

impl Prepared {
    /// A render that stops before running anything.
    fn failed(line: String) -> Prepared {
        let mut report = Report::new();
        report.fail(line);
        Prepared {
            report,
            batch: None,
            stagings: Vec::new(),
            done: Vec::new(),
            reads: Vec::new(),
        }
    }

    /// Writes the files of the render, all or none; returns what to tell the
    /// user.
    pub fn commit(self) -> Report {
        self.commit_and_read().0
    }

    /// [`Prepared::commit`], and what each document read, as it is now on
    /// disk for what covey wrote itself (`--watch`).
    pub(crate) fn commit_and_read(self) -> (Report, Vec<(PathBuf, Vec<Seen>)>) {
        let Prepared {
            mut report,
            batch,
            stagings,
            done,
            reads,
        } = self;
        let mut written = false;
        if let Some(batch) = batch {
            match batch.commit() {
                Ok(c) => {
                    written = true;
                    report.lines.extend(done);
                    if c.leftovers > 0 {
                        report.lines.push(format!(
                            "removed {} temporary file{} left by an interrupted covey run",
                            c.leftovers,
                            if c.leftovers == 1 { "" } else { "s" }
                        ));
                    }
                }
                Err(e) => report.fail(e.to_string()),
            }
        }
        drop(stagings);
        let reads = reads
            .into_iter()
            .map(|(doc, mut seen, in_place)| {
                if let (true, Some(d), Some(first)) = (written, in_place, seen.first_mut()) {
                    // covey's own write: known by its bytes, its stamp is new.
                    first.content = Content::Bytes(d);
                    first.stamp = None;
                }
                (doc, seen)
            })
            .collect();
        (report, reads)
    }
}

/// The documents named by `paths`, each once.
pub(crate) fn unique_documents(paths: &[PathBuf]) -> Result<Vec<PathBuf>, files::FileError> {
    let mut docs = files::documents(paths)?;
    let mut places = Vec::new();
    docs.retain(|d| {
        let here = files::location(d);
        let new = !places.contains(&here);
        places.push(here);
        new
    });
    Ok(docs)
}

/// Renders every document named by `paths` (files, or folders of `*.md`).
/// Every document runs first; then every output of the run is checked
/// against the write rule (see [`files::plan`]) and written all or none.
/// A document that cannot run (broken syntax) writes nothing. Returns what
/// to tell the user.
pub fn render(paths: &[PathBuf], opts: &RenderOptions) -> Report {
    prepare(paths, opts).commit()
}

/// The first half of [`render`]: everything but the writing.
pub fn prepare(paths: &[PathBuf], opts: &RenderOptions) -> Prepared {
    let docs = match unique_documents(paths) {
        Ok(d) => d,
        Err(e) => return Prepared::failed(e.to_string()),
    };
    if opts.json.is_some() && docs.len() != 1 {
        return Prepared::failed(format!(
            "--json writes the tables of one document, but {} documents were given; render them one at a time",
            docs.len()
        ));
    }
    if let Some(out) = &opts.out_dir {
        if let Err(line) = render_out_folder(out) {
            return Prepared::failed(line);
        }
    }
    prepare_documents(&docs, &|_| true, opts, &[])
}

/// What is wrong with an `--out` folder.
enum OutProblem {
    /// It is a file (or other non-folder).
    IsFile,
    /// It lies under this file.
    UnderFile(PathBuf),
    /// Nothing is there.
    Missing,
}

/// Looks at an `--out` before anything runs, so that a wrong one is refused with one line
/// naming it rather than every output path under it failing on its own with the system's
/// "Not a directory".
fn out_folder(out: &Path) -> Result<(), OutProblem> {
    for at in out.ancestors().filter(|a| !a.as_os_str().is_empty()) {
        match std::fs::metadata(at) {
            Ok(m) if m.is_dir() && at == out => return Ok(()),
            Ok(m) if m.is_dir() => return Err(OutProblem::Missing),
            Ok(_) if at == out => return Err(OutProblem::IsFile),
            Ok(_) => return Err(OutProblem::UnderFile(at.to_path_buf())),
            Err(e)
                if matches!(
                    e.kind(),
                    std::io::ErrorKind::NotFound | std::io::ErrorKind::NotADirectory
                ) =>
            {
                continue
            }
            // Unreadable, say: whoever reads or writes there says what is wrong.
            Err(_) => return Ok(()),
        }
    }
    Err(OutProblem::Missing)
}

/// `render`'s line for an `--out` that is, or lies under, a file; a folder that does not
/// exist yet is made when the renderings are written.
fn render_out_folder(out: &Path) -> Result<(), String> {
    let tail = "name a folder (one that does not exist yet is made); nothing was written";
    match out_folder(out) {
        Ok(()) | Err(OutProblem::Missing) => Ok(()),
        Err(OutProblem::IsFile) => Err(format!(
            "{}: --out must be a folder for the renderings, and this is a file; {tail}",
            out.display()
        )),
        Err(OutProblem::UnderFile(at)) => Err(format!(
            "{}: --out must be a folder for the renderings, but {} is a file; {tail}",
            out.display(),
            at.display()
        )),
    }
}

/// `check`'s line for an `--out` that is not a folder, in the words of `render`'s: there is
/// nothing to compare with, which is a mistake in the command, not a stale rendering.
fn check_out_folder(out: &Path) -> Result<(), String> {
    let tail = "name the folder the renderings were written to; nothing was checked";
    match out_folder(out) {
        Ok(()) => Ok(()),
        Err(OutProblem::IsFile) => Err(format!(
            "{}: --out must be a folder of renderings, and this is a file; {tail}",
            out.display()
        )),
        Err(OutProblem::UnderFile(at)) => Err(format!(
            "{}: --out must be a folder of renderings, but {} is a file; {tail}",
            out.display(),
            at.display()
        )),
        Err(OutProblem::Missing) => Err(format!(
            "{}: --out must be a folder of renderings, and there is no such folder; {tail}",
            out.display()
        )),
    }
}

/// Runs the documents of `docs` that `selected` picks and plans their
/// outputs; the others' outputs are claimed, and `known_inputs` (data file,
/// document) are data files of documents not run this time.
pub(crate) fn prepare_documents(
    docs: &[PathBuf],
    selected: &dyn Fn(&Path) -> bool,
    opts: &RenderOptions,
    known_inputs: &[(PathBuf, PathBuf)],
) -> Prepared {
    let mut report = Report::new();
    let mut plan = Plan::new();
    let mut done = Vec::new();
    let mut reads = Vec::new();
    let mut stagings = Vec::new();
    for (file, doc) in known_inputs {
        plan.input(file, doc);
    }
    for doc in docs {
        let targets = Targets::of(doc, opts);
        if !selected(doc) {
            plan.source(doc, None);
            targets.claim(&mut plan, doc, opts);
            continue;
        }
        let run_opts = RunOptions {
            keep_going: opts.keep_going,
            override_gates: opts.override_gates,
            params: opts.params.clone(),
            databases: opts.databases.clone(),
        };
        // Each figure waits on disk as soon as it is drawn, in a temporary folder beside the
        // rendering (the folder it is moved from into the figures folder), rather than in
        // memory. The HTML page holds the figures themselves, so with --html they are held;
        // so they are when the folder does not exist yet or takes no temporary folder.
        let staging = if opts.html {
            None
        } else {
            Staging::create(&targets.folder).ok()
        };
        let mut drawn: Vec<(String, NewBytes)> = Vec::new();
        let mut held: Vec<(String, String)> = Vec::new();
        let Ran {
            read,
            seen,
            outcome,
        } = run_file(
            doc,
            run_opts,
            opts.allow_outside,
            &mut |path, svg| match &staging {
                Some(s) => drawn.push((path.to_string(), stage_figure(s, drawn.len(), svg))),
                None => held.push((path.to_string(), svg)),
            },
        );
        stagings.extend(staging);
        plan.source(doc, read);
        for s in seen.iter().filter(|s| s.why == Why::Data) {
            plan.input(&s.file, doc);
        }
        let run = match outcome {
            Ok(r) => r,
            Err(errors) => {
                for e in errors {
                    report.fail(e);
                }
                report.fail(format!(
                    "{}: not rendered; nothing was written",
                    doc.display()
                ));
                targets.claim(&mut plan, doc, opts);
                reads.push((doc.clone(), seen, None));
                continue;
            }
        };
        report.lines.extend(run.warnings.iter().cloned());
        for e in &run.errors {
            report.fail(e.clone());
        }
        if !run.gates_failed.is_empty() && !opts.override_gates {
            // A failed gate is the procedure's own "no": exit 1, like a
            // stale rendering, unless an error already says 2.
            report.verdict = report.verdict.max(Verdict::Stale);
        }
        let role = if opts.in_place {
            Role::Source
        } else {
            Role::Rendering
        };
        // The rendering and the figures move into the plan: a long document's outputs are
        // held once, not copied. The rendering is planned first, so that a path it shares with
        // another output is reported as the rendering's.
        let page = targets.html.as_ref().map(|html| {
            let page = crate::report::html::page(&display_name(doc), &run.rendered, &held);
            (html.clone(), page)
        });
        let exported = opts
            .json
            .as_ref()
            .map(|j| (j.clone(), json::to_text(&run.json())));
        let in_place = opts.in_place.then(|| Digest::of(run.rendered.as_bytes()));
        let failed = run.failed();
        plan.output(targets.rendering.clone(), run.rendered, role, doc);
        if let Some((path, page)) = page {
            plan.output(path, page, Role::Html, doc);
        }
        if let Some((path, text)) = exported {
            plan.output(path, text, Role::Json, doc);
        }
        // Only one of the two holds figures, so they stay in the order drawn.
        let figures = drawn
            .into_iter()
            .chain(held.into_iter().map(|(rel, svg)| (rel, svg.into())))
            .map(|(rel, bytes)| (targets.folder.join(rel), bytes))
            .collect();
        plan.figures(targets.figures.clone(), doc, figures);
        done.push(format!(
            "{}: {} -> {}",
            if failed {
                "rendered with errors"
            } else {
                "rendered"
            },
            doc.display(),
            targets.rendering.display()
        ));
        reads.push((doc.clone(), seen, in_place));
    }
    let batch = match plan.check() {
        Ok(b) => Some(b),
        Err(refusals) => {
            // `--watch` renders again when a refused path is cleared, too.
            for (_, seen, _) in &mut reads {
                seen.extend(refusals.iter().map(|r| Seen {
                    file: r.path.clone(),
                    why: Why::Refused,
                    stamp: Stamp::of(&r.path),
                    content: Content::of(&r.path),
                }));
            }
            for r in refusals {
                report.fail(r.to_string());
            }
            report.fail("nothing was written: see above for the paths covey will not write to, and what to do");
            None
        }
    };
    Prepared {
        report,
        batch,
        stagings,
        done,
        reads,
    }
}

/// The figure `svg`, the `n`-th of its document, written into the temporary folder `staging`;
/// held in memory when it cannot be written there (the batch then says why, if it cannot write
/// it either).
fn stage_figure(staging: &Staging, n: usize, svg: String) -> NewBytes {
    use std::io::Write as _;
    let digest = Digest::of(svg.as_bytes());
    match staging.file(&format!("figure-{n}")) {
        Ok((path, mut file)) => match file.write_all(svg.as_bytes()) {
            Ok(()) => NewBytes::Staged { path, digest },
            Err(_) => {
                let _ = std::fs::remove_file(&path);
                svg.into()
            }
        },
        Err(_) => svg.into(),
    }
}

/// Checks that the rendering of every document named by `paths` is current:
/// re-runs each one and compares the result with the rendering on disk.
pub fn check(paths: &[PathBuf], opts: &CheckOptions) -> Report {
    let mut report = Report::new();
    if let Some(out) = &opts.out_dir {
        if let Err(line) = check_out_folder(out) {
            report.fail(line);
            return report;
        }
    }
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
            databases: opts.databases.clone(),
        };
        let mut figures = Vec::new();
        let outcome = run_file(doc, run_opts, opts.allow_outside, &mut |path, svg| {
            figures.push((path.to_string(), svg));
        })
        .outcome;
        let run = match outcome {
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
        let on_disk = match crate::world::read_regular(&target) {
            // Bytes that are not UTF-8 (an edit by hand) differ from any rendering; read with
            // replacement characters, they could have compared equal to one.
            Ok(b) => match String::from_utf8(b) {
                Ok(text) => text,
                Err(e) => {
                    report
                        .lines
                        .push(format!("stale: {} ({})", doc.display(), target.display()));
                    report.lines.push(format!(
                        "  the rendering is not valid UTF-8 (first bad byte at offset {}), so \
                         it is not what covey wrote; render again",
                        e.utf8_error().valid_up_to()
                    ));
                    report.verdict = report.verdict.max(Verdict::Stale);
                    continue;
                }
            },
            Err(e) if e.kind() != std::io::ErrorKind::NotFound => {
                report.fail(format!(
                    "{}: cannot read its rendering {}: {e}",
                    doc.display(),
                    target.display()
                ));
                continue;
            }
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
        for (rel, svg) in &figures {
            match crate::world::read_regular(&folder.join(rel)) {
                Ok(b) if b == svg.as_bytes() => {}
                Ok(_) => figure_problems.push(format!("figure {rel} differs")),
                Err(e) if e.kind() == std::io::ErrorKind::NotFound => {
                    figure_problems.push(format!("figure {rel} is missing"));
                }
                Err(e) => figure_problems.push(format!("figure {rel} cannot be read: {e}")),
            }
        }
        figure_problems.extend(manifest_problem(&folder, doc, &figures));
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

/// What is wrong with the figures folder's list of covey's figures
/// ([`files::manifest`]), or None when it holds exactly what a fresh render
/// would leave there: the list of `figures` when there are any, and no list
/// of covey's when there are none (a render removes it).
fn manifest_problem(folder: &Path, doc: &Path, figures: &[(String, String)]) -> Option<String> {
    let path = files::figures_dir(Path::new(""), doc).join(files::manifest::FILE_NAME);
    let on_disk = crate::world::read_regular(&folder.join(&path));
    let rel = path.display();
    if figures.is_empty() {
        return match on_disk {
            Ok(b) if files::manifest::parse(&b).is_some() => Some(format!(
                "figure list {rel} is left from an earlier rendering that drew figures"
            )),
            _ => None,
        };
    }
    let listed: Vec<(String, Digest)> = figures
        .iter()
        .map(|(path, svg)| {
            let name = Path::new(path)
                .file_name()
                .map(|n| n.to_string_lossy().into_owned())
                .unwrap_or_default();
            (name, Digest::of(svg.as_bytes()))
        })
        .collect();
    match on_disk {
        Ok(b) if b == files::manifest::text(&listed).as_bytes() => None,
        Ok(_) => Some(format!("figure list {rel} differs")),
        Err(e) if e.kind() == std::io::ErrorKind::NotFound => {
            Some(format!("figure list {rel} is missing"))
        }
        Err(e) => Some(format!("figure list {rel} cannot be read: {e}")),
    }
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
                let (old_params, old_rest) = split_parameters(old.provenance.as_deref());
                let (new_params, new_rest) = split_parameters(fresh.provenance.as_deref());
                out.extend(parameter_differences(&old_params, &new_params));
                if old_rest != new_rest {
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

/// Start of the provenance line that lists the parameters (`pipeline::declared_parameters`).
const PARAMETERS_LINE: &str = "Parameters: ";

/// The end of each parameter's entry in that line: where its value came from.
const PARAMETER_SOURCES: [&str; 2] = [" (set with --set)", " (the document's default)"];

/// A provenance region as its parameters, each `(name, value as shown, where it came from)`,
/// and its other lines.
fn split_parameters(provenance: Option<&str>) -> (Vec<(String, String, String)>, Vec<&str>) {
    let mut params = Vec::new();
    let mut rest = Vec::new();
    for line in provenance.unwrap_or("").lines() {
        let Some(list) = line.strip_prefix(PARAMETERS_LINE) else {
            rest.push(line);
            continue;
        };
        let mut list = list.strip_suffix('.').unwrap_or(list);
        // Each entry is "`NAME` = `VALUE` (SOURCE)", entries joined by "; ". A parameter's
        // name is a bare word, so the first " = " ends it.
        while !list.is_empty() {
            let Some((at, source)) = PARAMETER_SOURCES
                .iter()
                .filter_map(|s| list.find(s).map(|i| (i, *s)))
                .min()
            else {
                rest.push(line);
                break;
            };
            let entry = list.get(..at).unwrap_or("");
            let (name, value) = entry.split_once(" = ").unwrap_or((entry, ""));
            let from = source.trim_start_matches(" (").trim_end_matches(')');
            params.push((unticked(name), unticked(value), from.to_string()));
            list = list.get(at + source.len()..).unwrap_or("");
            list = list.strip_prefix("; ").unwrap_or(list);
        }
    }
    (params, rest)
}

/// The text of a Markdown code span as `report::markdown::code` writes it.
fn unticked(span: &str) -> String {
    let ticks = span.len() - span.trim_start_matches('`').len();
    let inner = span
        .get(ticks..span.len().saturating_sub(ticks))
        .unwrap_or(span);
    if ticks > 1 {
        inner
            .strip_prefix(' ')
            .and_then(|i| i.strip_suffix(' '))
            .unwrap_or(inner)
            .to_string()
    } else {
        inner.to_string()
    }
}

/// A sentence for each parameter whose value in the rendering differs from this check's: which
/// value the rendering was made with and the `--set` that checks it as it was made.
fn parameter_differences(
    old: &[(String, String, String)],
    fresh: &[(String, String, String)],
) -> Vec<String> {
    let mut out = Vec::new();
    for (name, value, from) in old {
        let Some((_, now, now_from)) = fresh.iter().find(|(n, _, _)| n == name) else {
            continue;
        };
        if now == value {
            continue;
        }
        // A text parameter is shown quoted; `--set` takes it bare.
        let bare = value
            .strip_prefix('"')
            .and_then(|v| v.strip_suffix('"'))
            .unwrap_or(value);
        let arg = format!("{name}={bare}");
        let safe = arg
            .chars()
            .all(|c| c.is_alphanumeric() || "=._-+/:,@%".contains(c));
        let arg = if safe {
            arg
        } else {
            format!("'{}'", arg.replace('\'', "'\\''"))
        };
        let how = if from
            == PARAMETER_SOURCES[1]
                .trim_start_matches(" (")
                .trim_end_matches(')')
        {
            format!("leave `--set {name}` out")
        } else {
            format!("give `covey check` the same `--set {arg}`")
        };
        out.push(format!(
            "parameter `{name}` differs: the rendering was made with `{value}` ({from}), this check uses `{now}` ({now_from}); to check the rendering as it was made, {how}"
        ));
    }
    out
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
