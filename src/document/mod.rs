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
//! Every byte that is not inside such a region belongs to the user and passes through unchanged:
//! [`strip`] of an [`assemble`]d document gives back the source byte for byte.

mod lines;
mod outline;
mod regions;

#[cfg(test)]
mod proptests;
#[cfg(test)]
mod tests;

use std::fmt;

pub use lines::line_col;
use lines::{ending_at, predominant, to_lf, LineIndex};
use regions::{strip_regions, Kind, Stripped};

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
    /// bytes), ascending: maps a source offset back to the text as given.
    pub removed: Vec<(usize, usize)>,
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
                "line {line}, column {column}: this covey block is never closed; add a closing \
                 fence `{fence}` on a line of its own after the block's last line"
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
    let stripped = strip_regions(text)?;
    document_of(text, stripped)
}

/// Remove every covey region: the source again, byte for byte.
pub fn strip(text: &str) -> Result<String, DocumentError> {
    strip_regions(text).map(|s| s.text)
}

/// What a rendered document holds: its source, and the bodies of its regions.
pub fn split_rendered(text: &str) -> Result<Rendered, DocumentError> {
    let stripped = strip_regions(text)?;
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
    let doc = document_of(text, stripped)?;
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
fn document_of(original: &str, stripped: Stripped) -> Result<Document, DocumentError> {
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

    Ok(Document {
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
    let source = &doc.source;
    let mut inserts: Vec<(usize, String)> = Vec::new();
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
        inserts.push((at, region));
    }
    for (block, body) in doc.blocks.iter().zip(outputs) {
        if let Some(body) = body {
            let le = block.line_ending;
            let region = format!(
                "{le}{OUTPUT_BEGIN}{le}{}{OUTPUT_END}",
                prepare_body(body, le)
            );
            inserts.push((block.insert_at, region));
        }
    }
    // Stable sort: the provenance region stays first at an equal offset.
    inserts.sort_by_key(|(at, _)| *at);

    let extra: usize = inserts.iter().map(|(_, r)| r.len()).sum();
    let mut out = String::with_capacity(source.len() + extra);
    let mut last = 0usize;
    for (at, region) in &inserts {
        // Offsets come from `parse`; one that does not fit (a hand-made Document) is skipped.
        if let Some(piece) = source.get(last..*at) {
            out.push_str(piece);
            out.push_str(region);
            last = *at;
        }
    }
    out.push_str(source.get(last..).unwrap_or(""));
    out
}
