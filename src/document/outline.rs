//! What comrak sees in a text: the top-level covey fences, covey-looking fences nested in other
//! blocks, stray end markers, and where the front matter ends.
//!
//! Only comrak's line numbers are used (never its columns), so the byte offsets computed from
//! them do not depend on how comrak counts tabs, a byte-order mark or multi-byte characters.

use comrak::nodes::NodeValue;
use comrak::{parse_document, Arena, Options};

use super::lines::{next_line_start, LineIndex};
use super::{OUTPUT_END, PROVENANCE_END};

/// The front matter delimiter covey accepts (YAML style).
pub(super) const FRONT_MATTER_DELIMITER: &str = "---";

/// The info word that makes a fenced code block a covey block.
const COVEY_INFO: &str = "covey";

/// A top-level fenced code block whose info string's first word is `covey`.
#[derive(Debug, Clone, PartialEq, Eq)]
pub(super) struct CoveyFence {
    /// 1-based line of the opening fence.
    pub fence_line: usize,
    /// 1-based line of the closing fence; `None` when the block runs to the end of the text.
    pub closing_line: Option<usize>,
    /// The opening fence as written, e.g. "```" or "~~~~" (for messages).
    pub fence: String,
    /// 1-based byte column where comrak says the opening fence starts.
    pub fence_column: usize,
}

/// What one comrak parse of a text found.
#[derive(Debug, Clone, Default, PartialEq, Eq)]
pub(super) struct Outline {
    /// Top-level covey fences, in document order.
    pub fences: Vec<CoveyFence>,
    /// Lines of covey-looking fences inside lists, block quotes, footnotes and the like.
    pub nested: Vec<usize>,
    /// Closing fence lines of all top-level fenced code blocks (covey or not): after such a line
    /// comrak has no block open.
    pub closed_fence_lines: Vec<usize>,
    /// Lines of top-level HTML blocks that begin with one of covey's end markers.
    pub end_markers: Vec<usize>,
    /// Where the provenance region goes: right after the front matter's closing delimiter line
    /// (with its line ending), or after a leading byte-order mark, or 0.
    pub provenance_at: usize,
}

/// comrak options that match what readers of the document see: GitHub-flavoured Markdown
/// (tables, strikethrough, task lists, autolinks, footnotes). Front matter is found by
/// [`front_matter_end`] and blanked before parsing.
pub(super) fn options() -> Options<'static> {
    let mut options = Options::default();
    options.extension.table = true;
    options.extension.strikethrough = true;
    options.extension.tasklist = true;
    options.extension.autolink = true;
    options.extension.footnotes = true;
    options
}

/// Whether an info string marks a covey block: its first word is exactly `covey`.
fn is_covey_info(info: &str) -> bool {
    info.split_whitespace().next() == Some(COVEY_INFO)
}

/// About how many bytes of a long text comrak reads at a time (see [`outline`]): its tree takes
/// about six times the bytes it reads, so a long document is never read whole.
pub(super) const PIECE_BYTES: usize = 1 << 20;

/// Read a whole document with comrak and collect what the document module needs.
///
/// A long document is read a piece at a time. After the closing fence line of a top-level
/// fenced code block comrak has no block open, so the lines after it are read the same way
/// whether comrak starts there or at the top: a piece of about [`PIECE_BYTES`] is read, what it
/// says up to its last such line is kept, and the next piece starts on the line after (a piece
/// without one is read again twice as long). The outline is that of the whole text read at
/// once; only comrak's tree is never built for more than a piece.
pub(super) fn outline(text: &str) -> Outline {
    outline_pieces(text, PIECE_BYTES)
}

/// [`outline`] with pieces of about `bytes` (small ones in tests).
pub(super) fn outline_pieces(text: &str, bytes: usize) -> Outline {
    let front_matter = front_matter_end(text);
    let mut out = Outline {
        provenance_at: front_matter.unwrap_or_else(|| bom_len(text)),
        ..Outline::default()
    };
    let mut pos = 0usize;
    // Lines of the text before `pos`.
    let mut lines_before = 0usize;
    let mut size = bytes.max(1);
    while pos < text.len() || pos == 0 {
        let mut reach = pos.saturating_add(size);
        if pos == 0 {
            // The first piece holds the whole front matter.
            reach = reach.max(front_matter.unwrap_or(0));
        }
        let end = if reach >= text.len() {
            text.len()
        } else {
            next_line_start(text, reach)
        };
        let Some(piece) = text.get(pos..end) else {
            break;
        };
        let view = if pos == 0 {
            outline_of(piece, Start::Document(front_matter))
        } else {
            outline_of(piece, Start::Fresh)
        };
        let last = end == text.len();
        // The last top-level closing fence line of the piece: nothing is open after it.
        let cut = if last {
            None
        } else {
            let index = LineIndex::new(piece);
            view.closed_fence_lines
                .iter()
                .filter_map(|&line| Some((line, index.span(piece, line)?)))
                .filter(|(_, span)| span.end > span.content_end)
                .max_by_key(|(line, _)| *line)
        };
        if !last && cut.is_none() {
            size = size.saturating_mul(2);
            continue;
        }
        let keep = cut.map_or(usize::MAX, |(line, _)| line);
        let shift = |line: usize| line + lines_before;
        out.fences.extend(
            view.fences
                .into_iter()
                .filter(|f| f.fence_line <= keep)
                .map(|f| CoveyFence {
                    fence_line: shift(f.fence_line),
                    closing_line: f.closing_line.map(shift),
                    ..f
                }),
        );
        out.nested.extend(
            view.nested
                .iter()
                .filter(|&&l| l <= keep)
                .map(|&l| shift(l)),
        );
        out.closed_fence_lines.extend(
            view.closed_fence_lines
                .iter()
                .filter(|&&l| l <= keep)
                .map(|&l| shift(l)),
        );
        out.end_markers.extend(
            view.end_markers
                .iter()
                .filter(|&&l| l <= keep)
                .map(|&l| shift(l)),
        );
        match cut {
            Some((line, span)) => {
                pos += span.end;
                lines_before += line;
                size = bytes.max(1);
            }
            None => break,
        }
    }
    out
}

/// Where comrak starts reading a text.
#[derive(Clone, Copy)]
enum Start {
    /// At the top of the document, whose front matter (of the whole document) ends there.
    Document(Option<usize>),
    /// Where comrak has no block open (see [`outline_part`]).
    Fresh,
}

/// Like [`outline`], for a piece of a document that starts where comrak has no block open (the
/// line after a top-level closing fence, or the line after a begin marker): no front matter and
/// no byte-order mark are looked for. Line numbers count from the piece's first line.
pub(super) fn outline_part(text: &str) -> Outline {
    outline_of(text, Start::Fresh)
}

/// One comrak read of `text`. Lines count from the text's first line; `provenance_at` is left
/// to the caller.
fn outline_of(text: &str, start: Start) -> Outline {
    let (whole, front_matter) = match start {
        Start::Document(front_matter) => (true, front_matter),
        Start::Fresh => (false, None),
    };
    let prepared;
    // An empty first line keeps comrak from reading a piece's first line as the document's
    // first (front matter, byte-order mark); `shift` undoes it in the line numbers.
    let (parsed, shift) = match (whole, front_matter) {
        (false, _) => {
            prepared = format!("\n{text}");
            (prepared.as_str(), 1)
        }
        (true, Some(end)) => {
            prepared = blank_front_matter(text, end);
            (prepared.as_str(), 0)
        }
        (true, None) => (text, 0),
    };
    let arena = Arena::new();
    let options = options();
    let root = parse_document(&arena, parsed, &options);
    let index = LineIndex::new(text);
    let mut out = Outline::default();

    for node in root.descendants() {
        let data = node.data();
        let top_level = node.parent().is_some_and(|p| p.same_node(root));
        match &data.value {
            NodeValue::CodeBlock(block) if block.fenced => {
                let fence_line = data.sourcepos.start.line.saturating_sub(shift);
                let end_line = data.sourcepos.end.line.saturating_sub(shift);
                let closing_line = Some(end_line).filter(|&l| block.closed && l > fence_line);
                if top_level {
                    out.closed_fence_lines.extend(closing_line);
                }
                if is_covey_info(&block.info) {
                    if top_level {
                        let fence_char = if block.fence_char == b'~' { '~' } else { '`' };
                        out.fences.push(CoveyFence {
                            fence_line,
                            closing_line,
                            fence: std::iter::repeat_n(fence_char, block.fence_length.max(3))
                                .collect(),
                            fence_column: data.sourcepos.start.column,
                        });
                    } else {
                        out.nested.push(fence_line);
                    }
                }
            }
            NodeValue::HtmlBlock(html) if top_level => {
                let line = data.sourcepos.start.line.saturating_sub(shift);
                let starts_line = index
                    .span(text, line)
                    .and_then(|span| text.get(span.start..span.content_end))
                    .is_some_and(|line| {
                        line.starts_with(OUTPUT_END) || line.starts_with(PROVENANCE_END)
                    });
                if starts_line
                    && (html.literal.starts_with(OUTPUT_END)
                        || html.literal.starts_with(PROVENANCE_END))
                {
                    out.end_markers.push(line);
                }
            }
            _ => {}
        }
    }
    out
}

/// Where the provenance region goes in `text`: right after the front matter's closing
/// delimiter line, or after a leading byte-order mark, or 0.
pub(super) fn provenance_point(text: &str) -> usize {
    front_matter_end(text).unwrap_or_else(|| bom_len(text))
}

/// Length of a leading UTF-8 byte-order mark (comrak skips one), or 0.
fn bom_len(text: &str) -> usize {
    if text.starts_with('\u{feff}') {
        '\u{feff}'.len_utf8()
    } else {
        0
    }
}

/// Front matter: after an optional byte-order mark, a line `---`, then anything, up to the
/// first later line that is exactly `---` (ending in "\n", "\r\n" or the end of the text).
/// Returns the offset right after that closing line, with its line ending.
///
/// This is what comrak's own front matter option accepts when the document's line endings are
/// consistent. comrak (0.59) looks for a closing "\n---\r\n" anywhere before it looks for
/// "\n---\n", so with mixed line endings it can take a `---` line far down the document (say, in
/// a code block) as the end of the front matter; covey finds the front matter itself instead.
pub(super) fn front_matter_end(text: &str) -> Option<usize> {
    let start = bom_len(text);
    let rest = text.get(start..)?;
    let after_open = rest.strip_prefix(FRONT_MATTER_DELIMITER)?;
    if !(after_open.starts_with('\n') || after_open.starts_with("\r\n")) {
        return None;
    }
    let index = LineIndex::new(text);
    let mut line = 2;
    while let Some(span) = index.span(text, line) {
        if span.start >= text.len() {
            return None;
        }
        let content = text.get(span.start..span.content_end)?;
        let ending = text.get(span.content_end..span.end)?;
        let after_lf = text.get(..span.start).is_some_and(|b| b.ends_with('\n'));
        if content == FRONT_MATTER_DELIMITER && after_lf && ending != "\r" {
            return Some(span.end);
        }
        line += 1;
    }
    None
}

/// `text` with the front matter's lines emptied (their line endings kept), so comrak numbers
/// the lines as in `text` but sees nothing in the front matter.
pub(super) fn blank_front_matter(text: &str, end: usize) -> String {
    let head = text.get(..end).unwrap_or("");
    let mut out: String = head.chars().filter(|&c| c == '\n' || c == '\r').collect();
    out.push_str(text.get(end..).unwrap_or(""));
    out
}
