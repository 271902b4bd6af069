//! Analyses as Markdown documents: finding covey blocks, and covey's own output regions.
//!
//! An analysis is a Markdown document. Every fenced code block at the top level of the document
//! (a direct child of the document, not inside a list, block quote or footnote) whose info
//! string's first word is exactly `covey` is a covey block. The document is parsed with comrak
//! (CommonMark plus the GitHub extensions readers see: tables, strikethrough, task lists,
//! autolinks, footnotes; and `---` front matter).
//!
//! covey writes its results into the document as regions framed by HTML comments, so they stay
//! invisible when the Markdown is shown:
//!
//! * after each covey block, at the end of its closing fence line:
//!   `LE "<!-- covey:output -->" LE BODY "<!-- covey:output-end -->"`, followed by the fence
//!   line's own line ending;
//! * at the top (after any front matter): `"<!-- covey:provenance -->" LE BODY
//!   "<!-- covey:provenance-end -->" LE`.
//!
//! * in prose, in place of each live reference `@[...]` (see [`values`] and
//!   [`crate::report::live`]): `"<!-- covey:value " REF " -->" VALUE "<!-- covey:value-end -->"`,
//!   with `<wbr>` in front when it would begin its line.
//!
//! Every byte that is not inside such a region belongs to the user and passes through unchanged:
//! [`strip`] of an [`assemble`]d document gives back the source byte for byte (a value region
//! gives back its reference).

pub mod front_matter;
mod lines;
mod outline;
mod regions;
pub mod values;

#[cfg(test)]
mod proptests;
#[cfg(test)]
mod tests;

use std::borrow::Cow;
use std::collections::BTreeSet;
use std::fmt;

pub use lines::line_col;
use lines::{ending_at, predominant, to_lf, LineIndex, Positions};
use regions::{strip_regions, Kind, Removal, Stripped};
pub use values::{LINE_GUARD, VALUE_BEGIN, VALUE_BEGIN_CLOSE, VALUE_END};

/// Begin marker of a block's output region.
pub const OUTPUT_BEGIN: &str = "<!-- covey:output -->";
/// End marker of a block's output region.
pub const OUTPUT_END: &str = "<!-- covey:output-end -->";
/// Begin marker of the provenance region.
pub const PROVENANCE_BEGIN: &str = "<!-- covey:provenance -->";
/// End marker of the provenance region.
pub const PROVENANCE_END: &str = "<!-- covey:provenance-end -->";
/// What every covey marker starts with; a region body never contains it.
pub const MARKER_PREFIX: &str = "<!-- covey:";
/// What [`MARKER_PREFIX`] becomes inside a body, so that a body can never hold a marker.
const MARKER_PREFIX_ESCAPED: &str = "&lt;!-- covey:";

/// One covey block of a document.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Block {
    /// 1-based position among the document's covey blocks.
    pub index: usize,
    /// The block's content lines as written (indentation included), each ending in "\n": the
    /// document's own line endings are normalised to "\n".
    pub code: String,
    /// Byte offset in the source of the first content line (of the closing fence line when the
    /// block is empty).
    pub code_start: usize,
    /// 1-based line number in the source of the first content line.
    pub first_line: usize,
    /// 1-based line number in the source of the opening fence.
    pub fence_line: usize,
    /// Byte offset in the source where the block's output region goes: the end of the closing
    /// fence line's content, before its line ending.
    pub insert_at: usize,
    /// The line ending used inside the block's region: that of the closing fence line, or the
    /// document's predominant one when the fence line has none (or a lone "\r").
    pub line_ending: &'static str,
}

/// A live reference `@[...]` in the prose of the source.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Reference {
    /// The reference as written, `@[` to `]`.
    pub text: String,
    /// Byte offset in the source where it starts.
    pub start: usize,
    /// Byte offset in the source just after its `]`.
    pub end: usize,
    /// 1-based line in the source.
    pub line: usize,
    /// 1-based column (in characters) in the source.
    pub column: usize,
    /// Whether only whitespace (and `<wbr>` guards) precede it on its line: its value region then
    /// gets a guard, so that the line does not begin with an HTML comment.
    pub begins_line: bool,
    /// The first and last line (1-based) of the top-level block that holds it, whose text alone
    /// decides how its value region reads back; (0, 0) when not known.
    pub block: (usize, usize),
}

/// A parsed analysis: the user's source (covey's regions removed) and its covey blocks.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Document {
    /// The text with every covey region removed.
    pub source: String,
    /// The covey blocks, in document order.
    pub blocks: Vec<Block>,
    /// Byte offset in the source where the provenance region goes: 0, or after a leading
    /// byte-order mark, or right after the front matter's closing delimiter line.
    pub provenance_at: usize,
    /// 1-based lines of covey-looking fences that are not at the top level (inside a list, block
    /// quote or footnote); they are not blocks, and the caller may warn about them.
    pub ignored_nested: Vec<usize>,
    /// Whether the text held any covey region.
    pub had_regions: bool,
    /// The regions that were removed, as (offset in the source, length in
    /// bytes), ascending: maps a source offset back to the text as given. A value region is two
    /// entries, before and after its reference, so that an offset inside the reference maps to
    /// the copy kept in the region's opening comment.
    pub removed: Vec<(usize, usize)>,
    /// The live references in the source's prose, in document order.
    pub references: Vec<Reference>,
}

/// What a rendered document holds, for staleness checks.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Rendered {
    /// The source: the text with every covey region removed.
    pub source: String,
    /// The provenance region's body with "\n" line endings, `None` when there is none.
    pub provenance: Option<String>,
    /// For each covey block of the source, its region's body with "\n" line endings, `None`
    /// when the block has no region.
    pub outputs: Vec<Option<String>>,
}

/// A problem with the document's structure, with the 1-based line and column (in characters) in
/// the text that was given.
#[derive(Debug, Clone, PartialEq, Eq)]
pub enum DocumentError {
    /// A covey block whose fence is never closed.
    UnclosedFence {
        /// Line of the opening fence.
        line: usize,
        /// Column of the opening fence.
        column: usize,
        /// The opening fence as written, e.g. "```".
        fence: String,
    },
    /// A begin marker with no end marker before the next covey block or the end of the document.
    MissingEndMarker {
        /// Line of the begin marker.
        line: usize,
        /// Column of the begin marker.
        column: usize,
        /// The begin marker.
        begin: &'static str,
        /// The end marker that is missing.
        end: &'static str,
    },
    /// An end marker that closes no region.
    EndWithoutBegin {
        /// Line of the end marker.
        line: usize,
        /// Column of the end marker.
        column: usize,
        /// The end marker.
        marker: &'static str,
    },
}

impl DocumentError {
    /// 1-based line of the problem.
    pub fn line(&self) -> usize {
        match self {
            DocumentError::UnclosedFence { line, .. }
            | DocumentError::MissingEndMarker { line, .. }
            | DocumentError::EndWithoutBegin { line, .. } => *line,
        }
    }

    /// 1-based column (in characters) of the problem.
    pub fn column(&self) -> usize {
        match self {
            DocumentError::UnclosedFence { column, .. }
            | DocumentError::MissingEndMarker { column, .. }
            | DocumentError::EndWithoutBegin { column, .. } => *column,
        }
    }
}

impl fmt::Display for DocumentError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            DocumentError::UnclosedFence {
                line,
                column,
                fence,
            } => write!(
                f,
                "line {line}, column {column}: this covey block is never closed; add a line holding \
                 only {fence} (the closing fence) after the block's last line"
            ),
            DocumentError::MissingEndMarker {
                line,
                column,
                begin,
                end,
            } => write!(
                f,
                "line {line}, column {column}: covey's marker `{begin}` has no end marker `{end}` \
                 before the next covey block or the end of the document; delete the marker line \
                 (covey writes the region again), or restore the end marker"
            ),
            DocumentError::EndWithoutBegin {
                line,
                column,
                marker,
            } => write!(
                f,
                "line {line}, column {column}: covey's end marker `{marker}` closes no region (a \
                 region starts on the line right after a covey block's closing fence, or at the \
                 top of the document); delete this marker line, or restore the begin marker in \
                 its place"
            ),
        }
    }
}

impl core::error::Error for DocumentError {}

/// Parse an analysis: remove covey's regions, then find the covey blocks in what remains.
///
/// Errors: a covey block that is never closed, and damaged regions (see [`DocumentError`]).
pub fn parse(text: &str) -> Result<Document, DocumentError> {
    let (stripped, references) = strip_all(text, true)?;
    document_of(text, stripped, references)
}

/// Remove every covey region: the source again, byte for byte.
pub fn strip(text: &str) -> Result<String, DocumentError> {
    strip_all(text, false).map(|(s, _)| s.text)
}

/// Remove the block and provenance regions, then the value regions in the prose that remains;
/// with `want_references`, also find the references of the result.
fn strip_all(
    text: &str,
    want_references: bool,
) -> Result<(Stripped, Vec<values::FoundReference>), DocumentError> {
    let mut stripped = strip_regions(text)?;
    let prose = values::scan_by_pieces(&stripped.text, &stripped.outline.closed_fence_lines);
    if prose.regions.is_empty() {
        return Ok((stripped, prose.references));
    }
    // Each value region gives back its reference. Value regions sit inside lines of prose, so
    // line numbers (all the outline keeps) do not change; offsets after a region move back.
    let old = std::mem::take(&mut stripped.text);
    let mut text_out = String::with_capacity(old.len());
    let mut value_removals = Vec::new();
    // (offset in `old` where a region starts, bytes it shrank by)
    let mut shrinks: Vec<(usize, usize)> = Vec::new();
    let mut last = 0usize;
    let mut shrunk = 0usize;
    for region in &prose.regions {
        let Some(piece) = old.get(last..region.start).filter(|_| region.start >= last) else {
            continue;
        };
        text_out.push_str(piece);
        let len = region.end - region.start;
        let prefix = region.guard + VALUE_BEGIN.len();
        let Some(suffix) = len.checked_sub(prefix + region.reference.len()) else {
            continue;
        };
        let at = region.start - shrunk;
        value_removals.push(Removal {
            kind: Kind::Value,
            at,
            len: prefix,
            body: String::new(),
        });
        value_removals.push(Removal {
            kind: Kind::Value,
            at: at + region.reference.len(),
            len: suffix,
            body: String::new(),
        });
        text_out.push_str(&region.reference);
        shrunk += len - region.reference.len();
        shrinks.push((region.start, len - region.reference.len()));
        last = region.end;
    }
    text_out.push_str(old.get(last..).unwrap_or(""));
    // `shrinks` ascends by start; with its running totals, each removal finds what the
    // regions before it took away by a binary search.
    let mut total = 0usize;
    let shrunk_by: Vec<(usize, usize)> = shrinks
        .iter()
        .map(|&(start, by)| {
            total += by;
            (start, total)
        })
        .collect();
    for removal in &mut stripped.removals {
        let n = shrunk_by.partition_point(|(start, _)| *start < removal.at);
        let before = n
            .checked_sub(1)
            .and_then(|i| shrunk_by.get(i))
            .map_or(0, |(_, t)| *t);
        removal.at = removal.at.saturating_sub(before);
    }
    stripped.removals.extend(value_removals);
    stripped.removals.sort_by_key(|r| r.at);
    stripped.text = text_out;
    let references = if want_references {
        // Value regions sit within lines of prose: the outline's lines are still the text's.
        values::scan_by_pieces(&stripped.text, &stripped.outline.closed_fence_lines).references
    } else {
        Vec::new()
    };
    Ok((stripped, references))
}

/// The values a rendering shows in place of its live references, as (reference as written,
/// value as rendered), in document order.
pub fn rendered_values(text: &str) -> Vec<(String, String)> {
    values::scan(text)
        .regions
        .into_iter()
        .filter_map(|r| {
            let from =
                r.start + r.guard + VALUE_BEGIN.len() + r.reference.len() + VALUE_BEGIN_CLOSE.len();
            let to = r.end.checked_sub(VALUE_END.len())?;
            let value = text.get(from..to)?.to_string();
            Some((r.reference, value))
        })
        .collect()
}

/// What a rendered document holds: its source, and the bodies of its regions.
pub fn split_rendered(text: &str) -> Result<Rendered, DocumentError> {
    let (stripped, references) = strip_all(text, true)?;
    let provenance = stripped
        .removals
        .iter()
        .find(|r| r.kind == Kind::Provenance)
        .map(|r| to_lf(&r.body));
    let outputs_at: Vec<(usize, String)> = stripped
        .removals
        .iter()
        .filter(|r| r.kind == Kind::Output)
        .map(|r| (r.at, to_lf(&r.body)))
        .collect();
    let doc = document_of(text, stripped, references)?;
    let outputs = doc
        .blocks
        .iter()
        .map(|b| {
            outputs_at
                .iter()
                .find(|(at, _)| *at == b.insert_at)
                .map(|(_, body)| body.clone())
        })
        .collect();
    Ok(Rendered {
        source: doc.source,
        provenance,
        outputs,
    })
}

/// Build the [`Document`] of a stripped text; `original` is the text given, for error positions.
fn document_of(
    original: &str,
    stripped: Stripped,
    references: Vec<values::FoundReference>,
) -> Result<Document, DocumentError> {
    let source = &stripped.text;
    let outline = &stripped.outline;
    if let Some(fence) = outline.fences.iter().find(|f| f.closing_line.is_none()) {
        let index = LineIndex::new(source);
        let start = index.start(fence.fence_line).unwrap_or(0);
        let pos = start + fence.fence_column.saturating_sub(1);
        let (line, column) = line_col(original, stripped.to_original(pos));
        return Err(DocumentError::UnclosedFence {
            line,
            column,
            fence: fence.fence.clone(),
        });
    }

    let index = LineIndex::new(source);
    let default_ending = predominant(source);
    let blocks = outline
        .fences
        .iter()
        .filter_map(|fence| {
            let closing = index.span(source, fence.closing_line?)?;
            let code_start = index.start(fence.fence_line + 1)?.min(closing.start);
            let code = to_lf(source.get(code_start..closing.start)?);
            let line_ending = match ending_at(source, closing.content_end) {
                "\r\n" => "\r\n",
                "\n" => "\n",
                _ => default_ending,
            };
            Some((
                code,
                code_start,
                fence.fence_line,
                closing.content_end,
                line_ending,
            ))
        })
        .enumerate()
        .map(
            |(i, (code, code_start, fence_line, insert_at, line_ending))| Block {
                index: i + 1,
                code,
                code_start,
                first_line: fence_line + 1,
                fence_line,
                insert_at,
                line_ending,
            },
        )
        .collect();

    // References come in document order, so their positions are found in one pass.
    let mut positions = Positions::new(source);
    let references = references
        .into_iter()
        .filter_map(|r| {
            let text = source.get(r.start..r.end)?.to_string();
            let (line, column) = positions.at(r.start);
            Some(Reference {
                text,
                start: r.start,
                end: r.end,
                line,
                column,
                begins_line: r.begins_line,
                block: r.block,
            })
        })
        .collect();
    Ok(Document {
        references,
        had_regions: !stripped.removals.is_empty(),
        removed: stripped.removals.iter().map(|r| (r.at, r.len)).collect(),
        provenance_at: outline.provenance_at,
        ignored_nested: outline.nested.clone(),
        blocks,
        source: stripped.text,
    })
}

/// A caller's body made ready for a region: line endings normalised, markers defused (every
/// "<!-- covey:" becomes "&lt;!-- covey:"), a final line ending added to a non-empty body, and
/// "\n" turned into `ending`.
fn prepare_body(body: &str, ending: &str) -> String {
    let mut body = to_lf(body).replace(MARKER_PREFIX, MARKER_PREFIX_ESCAPED);
    if !body.is_empty() && !body.ends_with('\n') {
        body.push('\n');
    }
    if ending == "\n" {
        body
    } else {
        body.replace('\n', ending)
    }
}

/// The line ending that ends just before byte `at` of `text`, or "".
fn ending_before(text: &str, at: usize) -> &'static str {
    let before = text.get(..at).unwrap_or("");
    if before.ends_with("\r\n") {
        "\r\n"
    } else if before.ends_with('\n') {
        "\n"
    } else if before.ends_with('\r') {
        "\r"
    } else {
        ""
    }
}

/// Render a document: its source with the provenance region at the top and, for each block,
/// `outputs[i]` as block `i + 1`'s region body. A block without an entry in `outputs` gets no
/// region.
///
/// A body is Markdown with "\n" line endings. It must not hold a top-level fenced block whose
/// info word is `covey`: reading the document back would take it for the next covey block and
/// report the region's end marker missing (show code under another info word, e.g. `text`).
pub fn assemble(doc: &Document, provenance: &str, outputs: &[String]) -> String {
    let outputs: Vec<Option<&str>> = outputs.iter().map(|s| Some(s.as_str())).collect();
    assemble_parts(doc, Some(provenance), &outputs)
}

/// Like [`assemble`], with each region optional: `None` leaves that region out.
pub fn assemble_parts(
    doc: &Document,
    provenance: Option<&str>,
    outputs: &[Option<&str>],
) -> String {
    let body = |i: usize| outputs.get(i).copied().flatten().map(Cow::Borrowed);
    assemble_unchecked(doc, provenance, &body, &[])
}

/// A value made ready for a value region: one line, markers defused, no backtick (a backtick
/// could close a code span opened before the region and swallow its end marker; it becomes
/// U+02CB, which looks alike), and no odd run of backslashes at the end (it would escape the
/// end marker's `<`).
fn prepare_value(value: &str) -> String {
    let mut v = to_lf(value)
        .replace('\n', " ")
        .replace(MARKER_PREFIX, MARKER_PREFIX_ESCAPED)
        .replace('`', "\u{2cb}");
    let trailing = v.len() - v.trim_end_matches('\\').len();
    if trailing % 2 == 1 {
        v.push(' ');
    }
    v
}

/// A rendering with values, and the references whose value could not be shown.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Assembled {
    /// The rendered text.
    pub text: String,
    /// Indices into `Document::references` of references that had a value but stay as written:
    /// HTML left open before them in their paragraph (an unclosed `<!--`, say) would be closed
    /// by their region's comment, and the region would not read back.
    pub left: Vec<usize>,
}

/// Like [`assemble_parts`], and each reference `doc.references[i]` with a value `values[i]`
/// becomes a value region showing it; a reference without one stays as written.
///
/// A value is inline Markdown on one line (covey's values are numbers, or text escaped with
/// [`crate::report::markdown::escape`]). Every region is checked to read back as written; one
/// that does not is left out (see [`Assembled::left`]), so stripping always gives the source.
pub fn assemble_with_values(
    doc: &Document,
    provenance: Option<&str>,
    outputs: &[Option<&str>],
    values: &[Option<&str>],
) -> Assembled {
    let body = |i: usize| outputs.get(i).copied().flatten().map(Cow::Borrowed);
    assemble_made(doc, provenance, &body, values)
}

/// [`assemble_with_values`] with block `i + 1`'s region body made by `outputs(i)` only as it
/// is written, so that a long document's outputs are not held twice over (as bodies, and in
/// the rendering).
pub fn assemble_made<'o>(
    doc: &Document,
    provenance: Option<&str>,
    outputs: &dyn Fn(usize) -> Option<Cow<'o, str>>,
    values: &[Option<&str>],
) -> Assembled {
    let (settled, left) = settle(doc, values);
    Assembled {
        text: assemble_unchecked(doc, provenance, outputs, &settled),
        left,
    }
}

/// The value region of a reference.
fn value_region(reference: &Reference, value: &str) -> String {
    let guard = if reference.begins_line {
        LINE_GUARD
    } else {
        ""
    };
    format!(
        "{guard}{VALUE_BEGIN}{}{VALUE_BEGIN_CLOSE}{}{VALUE_END}",
        reference.text,
        prepare_value(value)
    )
}

/// The values that read back as regions where they were put, and the indices of those left out.
///
/// Text before a reference can be completed by its region (an unclosed `<!--` before it in the
/// paragraph takes the region's `-->` as its end); such a region would not read back. The value
/// regions alone are put into the source and read back with comrak; the first region not found
/// where it was put loses its value, until all are found. (Block regions do not matter here: they
/// are removed before value regions are looked for.)
fn settle<'v>(doc: &Document, values: &[Option<&'v str>]) -> (Vec<Option<&'v str>>, Vec<usize>) {
    let mut settled: Vec<Option<&str>> =
        values.iter().take(doc.references.len()).copied().collect();
    let mut left = Vec::new();
    loop {
        let mut expected: Vec<(usize, usize, usize)> = Vec::new();
        let mut grown = 0usize;
        for (i, (reference, value)) in doc.references.iter().zip(&settled).enumerate() {
            if let Some(value) = value {
                let len = value_region(reference, value).len();
                let start = reference.start + grown;
                expected.push((i, start, start + len));
                grown = (grown + len).saturating_sub(reference.end.saturating_sub(reference.start));
            }
        }
        if expected.is_empty() {
            break;
        }
        let text = assemble_unchecked(doc, None, &|_| None, &settled);
        let found = regions_found(&text, doc, &settled);
        let put: BTreeSet<(usize, usize)> = expected.iter().map(|&(_, s, e)| (s, e)).collect();
        let missing = expected
            .iter()
            .find(|(_, start, end)| !found.contains(&(*start, *end)))
            .map(|(i, _, _)| *i);
        // A region found where none was put: blame the last region put before it.
        let extra = || {
            let (at, _) = found.iter().find(|f| !put.contains(f))?;
            expected
                .iter()
                .rev()
                .find(|(_, start, _)| start < at)
                .or(expected.first())
                .map(|(i, _, _)| *i)
        };
        let Some(bad) = missing.or_else(extra) else {
            break;
        };
        if let Some(slot) = settled.get_mut(bad) {
            *slot = None;
        }
        left.push(bad);
    }
    left.sort_unstable();
    (settled, left)
}

/// The value regions that `text` (the source with value regions only) reads back as, by
/// (start, end). Only the top-level blocks holding a region can read differently, and only
/// within themselves: a region sits inside one line of a paragraph, heading or table, and
/// what could change how it reads (HTML left open before it, an escape) is in the same block.
/// So those blocks are read one at a time, each with comrak, and a long document never holds
/// comrak's tree of all its prose; a region whose block is not known sends the whole text to
/// be read at once.
fn regions_found(text: &str, doc: &Document, values: &[Option<&str>]) -> BTreeSet<(usize, usize)> {
    let whole = || {
        values::scan(text)
            .regions
            .iter()
            .map(|r| (r.start, r.end))
            .collect()
    };
    let mut blocks: Vec<(usize, usize)> = Vec::new();
    for (reference, value) in doc.references.iter().zip(values) {
        if value.is_none() {
            continue;
        }
        if reference.block.0 == 0 {
            return whole();
        }
        if blocks.last() != Some(&reference.block) {
            blocks.push(reference.block);
        }
    }
    // Value regions sit within lines, so the text has the source's lines.
    let index = LineIndex::new(text);
    let mut found = BTreeSet::new();
    for (first, last) in blocks {
        let (Some(start), Some(end)) = (index.start(first), index.span(text, last).map(|s| s.end))
        else {
            return whole();
        };
        let Some(piece) = text.get(start..end) else {
            return whole();
        };
        // An empty first line keeps comrak from reading the block's first line as the
        // document's (a byte-order mark there would be dropped); offsets are shifted back.
        let prefixed = format!("\n{piece}");
        found.extend(
            values::scan_piece(&prefixed)
                .regions
                .iter()
                .filter_map(|r| {
                    Some((
                        start + r.start.checked_sub(1)?,
                        start + r.end.checked_sub(1)?,
                    ))
                }),
        );
    }
    found
}

/// [`assemble_with_values`] without the check that value regions read back.
fn assemble_unchecked<'o>(
    doc: &Document,
    provenance: Option<&str>,
    outputs: &dyn Fn(usize) -> Option<Cow<'o, str>>,
    values: &[Option<&str>],
) -> String {
    let source = &doc.source;
    /// What goes in at one place; each region's text is made only when it is written, so that
    /// the outputs are not held twice over.
    enum Put<'d> {
        Provenance(String),
        /// A block and its number, from 0.
        Output(&'d Block, usize),
        Value(&'d Reference, &'d str),
    }
    // (offset, bytes of the source replaced, what is put there)
    let mut inserts: Vec<(usize, usize, Put<'_>)> = Vec::new();
    if let Some(body) = provenance {
        let le = predominant(source);
        let body = prepare_body(body, le);
        let at = doc.provenance_at;
        // Front matter that ends the document without a line ending: the region cannot start a
        // line of its own, so it brings its line ending along in front instead.
        let ends_front_matter = source
            .get(..at)
            .is_some_and(|b| b.ends_with(outline::FRONT_MATTER_DELIMITER));
        let region = if at > 0
            && at == source.len()
            && ends_front_matter
            && ending_before(source, at).is_empty()
        {
            format!("{le}{PROVENANCE_BEGIN}{le}{body}{PROVENANCE_END}")
        } else {
            format!("{PROVENANCE_BEGIN}{le}{body}{PROVENANCE_END}{le}")
        };
        inserts.push((at, 0, Put::Provenance(region)));
    }
    for (i, block) in doc.blocks.iter().enumerate() {
        inserts.push((block.insert_at, 0, Put::Output(block, i)));
    }
    for (reference, value) in doc.references.iter().zip(values) {
        if let Some(value) = value {
            inserts.push((
                reference.start,
                reference.end.saturating_sub(reference.start),
                Put::Value(reference, value),
            ));
        }
    }
    // Stable sort: the provenance region stays first at an equal offset.
    inserts.sort_by_key(|(at, _, _)| *at);

    let extra: usize = inserts
        .iter()
        .map(|(_, _, put)| match put {
            Put::Provenance(r) => r.len(),
            // The bodies are made later; the text grows as they are written.
            Put::Output(..) => OUTPUT_BEGIN.len() + OUTPUT_END.len() + 4,
            Put::Value(_, value) => value.len() + VALUE_BEGIN.len() + VALUE_END.len() + 32,
        })
        .sum();
    let mut out = String::with_capacity(source.len() + extra);
    let mut last = 0usize;
    for (at, replaced, put) in &inserts {
        // Offsets come from `parse`; one that does not fit (a hand-made Document) is skipped.
        if let Some(piece) = source.get(last..*at) {
            out.push_str(piece);
            match put {
                Put::Provenance(region) => out.push_str(region),
                Put::Output(block, i) => {
                    if let Some(body) = outputs(*i) {
                        let le = block.line_ending;
                        out.push_str(le);
                        out.push_str(OUTPUT_BEGIN);
                        out.push_str(le);
                        out.push_str(&prepare_body(&body, le));
                        out.push_str(OUTPUT_END);
                    }
                }
                Put::Value(reference, value) => out.push_str(&value_region(reference, value)),
            }
            last = *at + replaced;
        }
    }
    out.push_str(source.get(last..).unwrap_or(""));
    out
}
