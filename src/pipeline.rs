//! One document from text to rendered text, with no file system in sight:
//! split the Markdown, parse every block, run the statements in one
//! session, and lay the results out under their blocks.

use crate::diagnostic::{self, Diagnostic};
use crate::document::{self, Document};
use crate::lang::{self, Span, Spanned, Statement};
use crate::report::{json, live, markdown, InputRecord, Item, Output};
use crate::session::Session;
use crate::world::World;

/// The warning for a covey block inside a list, block quote or footnote, which is not run (the
/// renderer's and the language server's words).
pub const NESTED_BLOCK: &str =
    "a covey block inside a list or quote is not run; move it to the top level";

/// How a run behaves on errors.
#[derive(Debug, Clone, Default)]
pub struct RunOptions {
    /// Run the remaining blocks after a statement fails.
    pub keep_going: bool,
    /// Run on past a failed gate, marking it at the top of the document.
    pub override_gates: bool,
    /// Parameter values set on the command line (`--set NAME=VALUE`).
    pub params: Vec<(String, String)>,
    /// Database addresses from the command line (`--database NAME=URL`).
    pub databases: crate::data::database::Databases,
}

/// The result of running a document.
#[derive(Debug, Clone)]
pub struct Run {
    /// The rendered document: the source with covey's regions filled in.
    pub rendered: String,
    /// Every statement's results, in document order (the JSON export is made from them).
    pub outputs: Vec<Output>,
    /// Every error, laid out for a terminal (file:line:column, caret).
    pub errors: Vec<String>,
    /// Warnings for the terminal.
    pub warnings: Vec<String>,
    /// The input files read, for provenance.
    pub inputs: Vec<InputRecord>,
    /// Figure files as (path relative to the rendered document, SVG text); empty from
    /// [`run_with`], which hands each to its caller as it is drawn.
    pub figures: Vec<(String, String)>,
    /// The gates that did not hold, as sentences.
    pub gates_failed: Vec<String>,
    /// The parsed document (the source without regions, and its blocks).
    pub document: Document,
}

impl Run {
    /// The JSON export of every table. Made when asked for, not with every run: as a tree of
    /// values it takes several times the memory of the tables it holds.
    pub fn json(&self) -> serde_json::Value {
        json::document(&self.inputs, &self.outputs)
    }

    /// True when a statement failed.
    pub fn failed(&self) -> bool {
        !self.errors.is_empty()
    }
}

/// A document that cannot be run at all (its Markdown or its syntax is
/// broken). Nothing is written for it.
#[derive(Debug, Clone)]
pub struct Unrunnable {
    /// Every problem, laid out for a terminal.
    pub errors: Vec<String>,
}

/// Runs the document `text`, whose file is called `file_name` in messages,
/// reading data through `world`. Returns the rendered text, or every error
/// that keeps the document from running.
pub fn run(
    text: &str,
    file_name: &str,
    world: &dyn World,
    opts: RunOptions,
) -> Result<Run, Unrunnable> {
    let mut figures = Vec::new();
    let mut run = run_with(text, file_name, world, opts, &mut |path, svg| {
        figures.push((path.to_string(), svg));
    })?;
    run.figures = figures;
    Ok(run)
}

/// [`run`], giving each figure to `figure` as it is drawn (its path relative to the rendered
/// document, its SVG text) instead of holding them all: a long document draws thousands.
pub fn run_with(
    text: &str,
    file_name: &str,
    world: &dyn World,
    opts: RunOptions,
    figure: &mut dyn FnMut(&str, String),
) -> Result<Run, Unrunnable> {
    let doc = document::parse(text).map_err(|e| Unrunnable {
        errors: vec![for_terminal(format!("{file_name}: {e}"))],
    })?;
    let shift = Shift::new(&doc);
    // The text as given and the source without regions, each indexed once for all messages
    // and line numbers, so that a document of many statements or errors costs no more than
    // its length.
    // A lone carriage return ends a line for Markdown and for the editor, so messages count it
    // as one too.
    let given_lines = diagnostic::lone_cr_as_lf(text);
    let source_lines = diagnostic::lone_cr_as_lf(&doc.source);
    let given = diagnostic::Source::new(file_name, &given_lines);
    let source = diagnostic::Source::new(file_name, &source_lines);
    let show = |d: &Diagnostic| {
        let mut d = d.clone();
        d.span = shift.span(d.span);
        given.render(&d)
    };

    // Parameters first, wherever they stand: `@NAME` may be used in any
    // block, and `--set` overrides the declared defaults.
    let mut errors = Vec::new();
    let (params, param_notes) = match parameters(&doc, &opts.params) {
        Ok(p) => p,
        Err(d) => {
            return Err(Unrunnable {
                errors: d.iter().map(&show).collect(),
            })
        }
    };
    let unknown: Vec<&str> = opts
        .params
        .iter()
        .map(|(n, _)| n.as_str())
        .filter(|n| !params.contains_key(*n))
        .collect();
    if !unknown.is_empty() {
        return Err(Unrunnable {
            errors: unknown
                .iter()
                .map(|n| {
                    let declared: Vec<&str> = params.keys().map(String::as_str).collect();
                    let what = match crate::diagnostic::closest(n, &declared) {
                        Some(near) => format!("did you mean `--set {near}=...`?"),
                        None => format!("declare it with `param {n} = VALUE`"),
                    };
                    for_terminal(format!("{file_name}: --set {n}=...: the document declares no parameter `{n}` ({what})"))
                })
                .collect(),
        });
    }

    // Parse every block first: a syntax error anywhere stops the render
    // before anything runs or is written.
    let mut blocks: Vec<Vec<Statement>> = Vec::with_capacity(doc.blocks.len());
    for block in &doc.blocks {
        match lang::parse_block_with(block_lines(&doc.source, block), &params) {
            Ok(s) => blocks.push(s),
            Err(errs) => {
                for e in errs {
                    let d = Diagnostic::new(e.span, e.message).label("here");
                    errors.push(show(&traced_to_set(d, &doc.source, &doc, &opts.params)));
                }
                blocks.push(Vec::new());
            }
        }
    }
    if !errors.is_empty() {
        return Err(Unrunnable { errors });
    }

    let mut session = Session::new(world);
    session.set_databases(opts.databases.clone());
    let mut outputs: Vec<Output> = Vec::new();
    let mut bodies = Vec::with_capacity(blocks.len());
    // Why the blocks after this point are not run, once something stopped the run: the advice
    // under each names the flag that runs them.
    let mut stopped: Option<Stop> = None;
    let mut gates_failed = Vec::new();
    let mut warnings = Vec::new();
    let stem = file_name.strip_suffix(".md").unwrap_or(file_name);
    // What the statements compute, kept (as names only) for checking live references should a
    // failure stop the run.
    let (tables, maybe) = computed_tables(&blocks);
    // Each block's statements go once they have run: a long document's syntax trees are not
    // held to the end.
    for (bi, statements) in blocks.into_iter().enumerate() {
        let mut figure_count = 0;
        if let Some(stop) = stopped {
            bodies.push(Body::NotRun(stop));
            continue;
        }
        let first = outputs.len();
        for stmt in statements {
            let items = match session.run(&stmt) {
                Ok(mut items) => {
                    for it in &items {
                        if let Item::GateFailed(g) = it {
                            gates_failed.push(format!("block {}: {}", bi + 1, markdown::plain(g)));
                            let (line, _) = given.line_col(shift.offset(stmt.span.start));
                            warnings.push(for_terminal(format!(
                                "{file_name}:{line}: {}",
                                markdown::plain(g)
                            )));
                            if !opts.override_gates {
                                stopped = Some(Stop::Gate);
                            }
                        }
                    }
                    for it in &mut items {
                        if let Item::Figure(f) = it {
                            figure_count += 1;
                            f.file = format!("{stem}.figures/block{}-{figure_count}.svg", bi + 1);
                            // The SVG text goes to the caller; the item keeps what the
                            // Markdown shows (caption, alternative text, link).
                            figure(&f.file, std::mem::take(&mut f.svg));
                        }
                    }
                    items
                }
                Err(d) => {
                    let d = traced_to_set(d, &doc.source, &doc, &opts.params);
                    let shown = show(&d);
                    errors.push(shown.clone());
                    // The rendered copy points into the source without
                    // covey's regions, so that outputs depend only on the
                    // source and re-rendering in place changes nothing.
                    let snippet = source.render(&d);
                    if !opts.keep_going {
                        stopped = Some(Stop::Error);
                    }
                    vec![Item::Error {
                        message: d.message.clone(),
                        snippet,
                    }]
                }
            };
            for it in &items {
                if let Item::Warning(w) = it {
                    let (line, _) = given.line_col(shift.offset(stmt.span.start));
                    warnings.push(for_terminal(format!(
                        "{file_name}:{line}: warning: {}",
                        markdown::plain(w)
                    )));
                }
            }
            outputs.push(Output {
                block: bi + 1,
                line: source.line_col(stmt.span.start).0,
                statement: stmt.text,
                items,
            });
            if stopped.is_some() {
                break;
            }
        }
        bodies.push(Body::Ran(first..outputs.len()));
    }
    // At the line in the text as given: an in-place render puts regions above it (it was the
    // line in the text without them, so the renderer and the server told different lines).
    for fence in nested_fences(&doc) {
        let (line, _) = given.line_col(shift.offset(fence.start));
        warnings.push(for_terminal(format!(
            "{file_name}:{line}: warning: {NESTED_BLOCK}"
        )));
    }

    let inputs = session.inputs().to_vec();
    let mut notices = Vec::new();
    if !gates_failed.is_empty() && opts.override_gates {
        notices.push(format!(
            "> **STOP: this report was rendered past a failed gate** (--override-gates). {}",
            gates_failed
                .iter()
                .map(|g| markdown::message(g))
                .collect::<Vec<_>>()
                .join(" ")
        ));
    }
    notices.extend(param_notes);
    let provenance = markdown::provenance(env!("CARGO_PKG_VERSION"), file_name, &inputs, &notices);
    // Live references in prose: resolved once every block has run, against every table of the
    // document (the last of its kind and subject counts).
    let mut values = Vec::with_capacity(doc.references.len());
    let mut resolver = live::Resolver::new(&outputs);
    // After a failure stopped the run, a table a reference needs may simply not have been
    // computed; the reference is still checked against what the statements would compute
    // (its form, its kind, a table no statement computes, its words), as the language server
    // checks it.
    for reference in &doc.references {
        let resolved = resolver.resolve(&reference.text);
        let resolved = match resolved {
            Err(_) if stopped.is_some() => {
                crate::lsp::references::check(&reference.text, &tables, &maybe)
                    .map(|()| live::unresolved(&reference.text))
            }
            other => other,
        };
        match resolved {
            Ok(value) => values.push(value),
            Err(e) => {
                let span = Span {
                    start: reference.start,
                    end: reference.end,
                };
                errors.push(show(
                    &Diagnostic::new(span, e.to_string())
                        .label("this reference")
                        .help(e.help()),
                ));
                values.push(live::unresolved(&reference.text));
            }
        }
    }
    let values: Vec<Option<&str>> = values.iter().map(|v| Some(v.as_str())).collect();
    // Each block's output region is laid out only as it goes into the rendering.
    let region = |i: usize| {
        bodies.get(i).map(|body| match body {
            Body::NotRun(stop) => format!("\n*Not run: {}*\n\n", stop.advice()).into(),
            Body::Ran(range) => markdown::block_body(
                outputs
                    .get(range.clone())
                    .unwrap_or_default()
                    .iter()
                    .flat_map(|o| &o.items),
            )
            .into(),
        })
    };
    let assembled = document::assemble_made(&doc, Some(&provenance), &region, &values);
    for &i in &assembled.left {
        if let Some(reference) = doc.references.get(i) {
            let span = Span {
                start: reference.start,
                end: reference.end,
            };
            errors.push(show(
                &Diagnostic::new(span, "covey cannot show this value here")
                    .label("left as written")
                    .help(
                        "HTML before it in this paragraph is left open (an unclosed `<!--` or \
                         tag), and the value's marker would close it; close that HTML, or \
                         start a new paragraph",
                    ),
            ));
        }
    }
    let rendered = assembled.text;
    Ok(Run {
        rendered,
        outputs,
        errors,
        warnings,
        inputs,
        figures: Vec::new(),
        gates_failed,
        document: doc,
    })
}

/// What goes under a block: the outputs of its statements (a range of the run's outputs), or why
/// it was not run.
enum Body {
    Ran(std::ops::Range<usize>),
    NotRun(Stop),
}

/// A table's kind and subject, as a live reference names it.
type Table = (String, String);

/// The (kind, subject) of every table the statements compute, and of those they may compute
/// (`check` lists influential rows only when there are some), for checking live references
/// that a stopped run left unresolved.
fn computed_tables(blocks: &[Vec<Statement>]) -> (Vec<Table>, Vec<Table>) {
    let mut tables = Vec::new();
    let mut maybe = Vec::new();
    for stmt in blocks.iter().flatten() {
        for (kind, subject) in crate::lsp::names::tables_of(stmt) {
            if kind != "influence" {
                tables.push((kind.clone(), subject.clone()));
            }
            maybe.push((kind, subject));
        }
    }
    (tables, maybe)
}

/// What stopped a run before its last block.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
enum Stop {
    /// A `require` gate did not hold (`--override-gates` renders past it).
    Gate,
    /// A statement failed (`--keep-going` runs the rest).
    Error,
}

impl Stop {
    /// The sentence under each block that was not run: what stopped the run and the flag that
    /// runs the rest.
    fn advice(self) -> &'static str {
        match self {
            Stop::Gate => {
                "a gate above did not hold. Look into what it reports, or render with \
                 `--override-gates` to run the rest (the rendering then says so at the top)."
            }
            Stop::Error => {
                "an earlier block failed. Fix that error, or render with `--keep-going` to run \
                 the rest."
            }
        }
    }
}

/// The document's parameters with their values in force, and a sentence for
/// the provenance region listing them. A parameter declared twice is an
/// error at its second declaration.
fn parameters(
    doc: &Document,
    set: &[(String, String)],
) -> Result<(lang::Params, Vec<String>), Vec<Diagnostic>> {
    let (params, notes, errors) = declared_parameters(doc, set);
    if errors.is_empty() {
        Ok((params, notes))
    } else {
        Err(errors)
    }
}

/// The document's parameters (the first declaration of each, with `set` applied), the
/// provenance sentence listing them, and an error at every second declaration. [`run`] stops at
/// those errors; the language server goes on to parse the blocks with the parameters found.
pub fn declared_parameters(
    doc: &Document,
    set: &[(String, String)],
) -> (lang::Params, Vec<String>, Vec<Diagnostic>) {
    let mut params = lang::Params::new();
    let mut shown = Vec::new();
    let mut errors = Vec::new();
    for (name, value) in declarations(doc) {
        if params.contains_key(&name.value) {
            errors.push(
                Diagnostic::new(
                    name.span,
                    format!(
                        "parameter {} is declared twice",
                        crate::report::markdown::code(&name.value)
                    ),
                )
                .label("declared again")
                .help("declare each parameter once"),
            );
            continue;
        }
        let (value, from) = match set.iter().rev().find(|(n, _)| *n == name.value) {
            Some((_, v)) => (
                match v.parse::<f64>() {
                    Ok(x) if x.is_finite() => lang::Literal::Number(x, v.clone()),
                    _ => lang::Literal::Text(v.clone()),
                },
                "set with --set",
            ),
            None => (value, "the document's default"),
        };
        shown.push(format!(
            "{} = {} ({from})",
            markdown::code(&name.value),
            markdown::code(&literal_text(&value))
        ));
        params.insert(name.value, value);
    }
    let notes = if shown.is_empty() {
        Vec::new()
    } else {
        vec![format!("Parameters: {}.", shown.join("; "))]
    };
    (params, notes, errors)
}

/// Every `param NAME = VALUE` of the document, in order, as written (a name declared twice
/// comes twice).
fn declarations(doc: &Document) -> Vec<(Spanned<String>, lang::Literal)> {
    let mut out = Vec::new();
    for block in &doc.blocks {
        for (line, offset, no) in block_lines(&doc.source, block) {
            if !line.trim_start().starts_with("param") {
                continue;
            }
            if let Ok(Some(Statement {
                kind:
                    lang::StatementKind::Param {
                        name,
                        default: value,
                        ..
                    },
                ..
            })) = lang::parse_line(line, offset, no)
            {
                out.push((name, value));
            }
        }
    }
    out
}

/// A parameter's value as a document would write it: a number as given, a text quoted.
fn literal_text(value: &lang::Literal) -> String {
    match value {
        lang::Literal::Number(_, t) => t.clone(),
        lang::Literal::Text(t) => format!("\"{t}\""),
    }
}

/// An error at a use `@NAME` of a parameter given on the command line (`set`) is about the
/// value given there, not about anything written in the document: the message says so, with
/// the value, and the help says which value to give `--set` instead (the document's own
/// value is one that works when the error does not come from it).
fn traced_to_set(
    d: Diagnostic,
    source: &str,
    doc: &Document,
    set: &[(String, String)],
) -> Diagnostic {
    let Some(name) = source
        .get(d.span.start..d.span.end)
        .and_then(|t| t.strip_prefix('@'))
    else {
        return d;
    };
    let Some((_, given)) = set.iter().rev().find(|(n, _)| n == name) else {
        return d;
    };
    let default = declarations(doc)
        .into_iter()
        .find(|(n, _)| n.value == name)
        .map(|(_, v)| literal_text(&v));
    let what = d
        .help
        .as_deref()
        .map_or(String::new(), |h| format!(" ({h})"));
    let instead = match default.filter(|v| v != given) {
        Some(v) => format!(
            "run again with `--set {name}=` and a value that fits here, as the message says{what}, for example the document's own value {}, or leave out `--set {name}`",
            markdown::code(&v)
        ),
        None => format!("run again with `--set {name}=` and a value that fits here, as the message says{what}"),
    };
    Diagnostic {
        message: format!(
            "{} (the value of `@{name}` here, {}, comes from {} on the command line, not from the document)",
            d.message,
            markdown::code(given),
            markdown::code(&format!("--set {name}={given}"))
        ),
        label: "value given with --set".to_string(),
        help: Some(instead),
        ..d
    }
}

/// The lines of a block as (text, document offset, line number), read from
/// the source so that offsets are exact whatever the fence indentation.
pub fn block_lines<'a>(source: &'a str, block: &document::Block) -> Vec<(&'a str, usize, usize)> {
    let n = block.code.split_terminator('\n').count();
    let mut out = Vec::with_capacity(n);
    let mut offset = block.code_start;
    for i in 0..n {
        let Some(rest) = source.get(offset..) else {
            break;
        };
        // A line ends where comrak ends it, which `block.code` counts: at LF, or at a lone CR.
        // A lone CR stays in its line's text, for the parser to refuse it there; split at LF
        // only, the line after it was taken with it, and the closing fence was read as the
        // block's last statement ("does not start with a statement (found ```)").
        let bytes = rest.as_bytes();
        let end = memchr::memchr2_iter(b'\n', b'\r', bytes)
            .find(|&e| bytes[e] == b'\n' || bytes.get(e + 1) != Some(&b'\n'))
            .unwrap_or(rest.len());
        let line = if bytes.get(end) == Some(&b'\r') {
            &rest[..=end]
        } else {
            rest[..end].strip_suffix('\r').unwrap_or(&rest[..end])
        };
        out.push((line, offset, block.first_line + i));
        offset += end + 1;
    }
    out
}

/// A message for the terminal: a file name or a name from the data could hold control or
/// bidirectional characters, which are shown by their code points, never obeyed.
fn for_terminal(message: String) -> String {
    crate::report::visible::visible_except(&message, &['\n', '\t']).into_owned()
}

/// The byte offset where 1-based line `line` of `text` starts (the end when there is none); a
/// lone CR ends a line, as for messages.
pub(crate) fn line_start(text: &str, line: usize) -> usize {
    if line <= 1 {
        return 0;
    }
    let text = &*diagnostic::lone_cr_as_lf(text);
    text.match_indices('\n')
        .nth(line - 2)
        .map_or(text.len(), |(i, _)| i + 1)
}

/// The fence of each covey block in a list, quote or footnote that is not run, from its
/// first backtick or tilde to the end of its line, in the source without regions: where the
/// renderer's and the server's warnings point.
pub(crate) fn nested_fences(doc: &Document) -> Vec<Span> {
    doc.ignored_nested
        .iter()
        .map(|&line| {
            let start = line_start(&doc.source, line).min(doc.source.len());
            let rest = &doc.source[start..];
            let end = start + rest.find(['\n', '\r']).unwrap_or(rest.len());
            let fence = rest[..end - start]
                .find(['`', '~'])
                .map_or(start, |i| start + i);
            Span { start: fence, end }
        })
        .collect()
}

/// Maps offsets in the source without regions to offsets in the text as
/// given (which may hold regions from an earlier in-place render), so that
/// messages point at the lines the user sees in the file.
#[derive(Debug, Clone, Default)]
pub(crate) struct Shift {
    /// (offset in the source, bytes of regions inserted there and before), ascending: running
    /// totals, so that an offset is mapped by one binary search.
    inserts: Vec<(usize, usize)>,
}

impl Shift {
    pub(crate) fn new(doc: &Document) -> Shift {
        let mut total = 0usize;
        Shift {
            inserts: doc
                .removed
                .iter()
                .map(|&(pos, len)| {
                    total += len;
                    (pos, total)
                })
                .collect(),
        }
    }

    pub(crate) fn offset(&self, at: usize) -> usize {
        let n = self.inserts.partition_point(|(pos, _)| *pos <= at);
        let before = n
            .checked_sub(1)
            .and_then(|i| self.inserts.get(i))
            .map_or(0, |(_, total)| *total);
        at + before
    }

    pub(crate) fn span(&self, s: Span) -> Span {
        Span {
            start: self.offset(s.start),
            end: self.offset(s.end.max(s.start)),
        }
    }
}
