//! Live references in prose, and the value regions covey renders in their place.
//!
//! A reference `@[...]` counts only where comrak reads it as plain text of a paragraph, heading,
//! table cell or link text: never in code spans, code blocks, HTML, link destinations, image
//! descriptions, front matter or covey's own regions. It must be written plainly (a backslash
//! escape such as `@\[` keeps it from being a reference) and on one line.
//!
//! In a rendering, each reference becomes a value region on the same line:
//! `"<!-- covey:value " REF " -->" VALUE "<!-- covey:value-end -->"`. A line whose content
//! starts with `<!--` would begin an HTML block (CommonMark 0.31, section 4.6, start condition
//! 2), so a region that would begin its line gets [`LINE_GUARD`] in front: an empty HTML element
//! that is not an HTML block start, and shows nothing. The guard is added when only whitespace
//! and guards precede the reference on its line, and stripping removes the one guard right before
//! a region when only whitespace and guards precede it; so a guard the user wrote survives.

use comrak::nodes::{AstNode, NodeValue};
use comrak::{parse_document, Arena};

use super::lines::LineIndex;
use super::outline::{blank_front_matter, front_matter_end, options};
use crate::report::live;

/// Begin of a value region's opening comment; the reference follows, then [`VALUE_BEGIN_CLOSE`].
pub const VALUE_BEGIN: &str = "<!-- covey:value ";
/// End of a value region's opening comment.
pub const VALUE_BEGIN_CLOSE: &str = " -->";
/// A value region's closing comment.
pub const VALUE_END: &str = "<!-- covey:value-end -->";
/// What goes before a value region that would begin its line (see the module documentation).
pub const LINE_GUARD: &str = "<wbr>";

/// A reference found in prose.
#[derive(Debug, Clone, PartialEq, Eq)]
pub(super) struct FoundReference {
    pub start: usize,
    pub end: usize,
    /// Whether only whitespace and guards precede it on its line.
    pub begins_line: bool,
    /// The first and last line (1-based) of the top-level block that holds it; (0, 0) when
    /// that is not known.
    pub block: (usize, usize),
}

/// A value region found in prose.
#[derive(Debug, Clone, PartialEq, Eq)]
pub(super) struct FoundRegion {
    /// Start of the region (of its guard, when it has one).
    pub start: usize,
    /// End of the closing comment.
    pub end: usize,
    /// Length of the guard removed with it (0 or [`LINE_GUARD`]'s length).
    pub guard: usize,
    /// The reference kept in the opening comment.
    pub reference: String,
}

/// What one comrak parse of a text found in its prose.
#[derive(Debug, Clone, Default, PartialEq, Eq)]
pub(super) struct Prose {
    pub references: Vec<FoundReference>,
    pub regions: Vec<FoundRegion>,
}

/// Find the references and value regions in the prose of a whole document.
pub(super) fn scan(text: &str) -> Prose {
    scan_text(text, true)
}

/// [`scan`] a piece at a time, so that comrak's tree is never built for the whole of a long
/// document. `cuts` are the text's lines (1-based, ascending) after which comrak has no block
/// open: the closing fence lines of its top-level fenced code blocks. The lines after such a
/// line read the same whether comrak starts there or at the top, with one exception: a link
/// reference or footnote definition anywhere in a document changes how brackets read
/// everywhere in it. A text that could hold one (any `]:` in it) is read whole.
pub(super) fn scan_by_pieces(text: &str, cuts: &[usize]) -> Prose {
    scan_pieces_of(text, cuts, super::outline::PIECE_BYTES)
}

/// [`scan_by_pieces`] with pieces of about `bytes` (small ones in tests).
pub(super) fn scan_pieces_of(text: &str, cuts: &[usize], bytes: usize) -> Prose {
    if cuts.is_empty() || text.len() <= bytes || text.contains("]:") {
        return scan(text);
    }
    let index = LineIndex::new(text);
    // Byte offsets where a piece may end (the start of the line after a cut), ascending.
    let ends: Vec<usize> = cuts
        .iter()
        .filter_map(|&line| index.span(text, line))
        .filter(|span| span.end > span.content_end)
        .map(|span| span.end)
        .collect();
    let mut out = Prose::default();
    let mut start = 0usize;
    while start < text.len() {
        // The last end within `bytes` of the start, or else the first after it, or the text's end.
        let next = ends.partition_point(|&e| e <= start.saturating_add(bytes));
        let end = next
            .checked_sub(1)
            .and_then(|i| ends.get(i))
            .filter(|&&e| e > start)
            .or_else(|| ends.get(next))
            .copied()
            .unwrap_or(text.len());
        let Some(piece) = text.get(start..end) else {
            return scan(text);
        };
        if start == 0 {
            let prose = scan(piece);
            out.references.extend(prose.references);
            out.regions.extend(prose.regions);
        } else if piece.contains(live::OPEN) || piece.contains(VALUE_BEGIN) {
            // An empty first line keeps comrak from reading the piece's first line as the
            // document's (a byte-order mark there would be dropped); offsets move back by it.
            let first_line = index.line_of(start);
            let prose = scan_piece(&format!("\n{piece}"));
            let at = |offset: usize| start + offset.saturating_sub(1);
            let line = |l: usize| if l == 0 { 0 } else { l + first_line - 2 };
            out.references
                .extend(prose.references.into_iter().map(|r| FoundReference {
                    start: at(r.start),
                    end: at(r.end),
                    begins_line: r.begins_line,
                    block: (line(r.block.0), line(r.block.1)),
                }));
            out.regions
                .extend(prose.regions.into_iter().map(|r| FoundRegion {
                    start: at(r.start),
                    end: at(r.end),
                    ..r
                }));
        }
        start = end;
    }
    out
}

/// [`scan`] of a piece of a document made of whole top-level blocks: no front matter is looked
/// for. Offsets and lines are the piece's own.
pub(super) fn scan_piece(text: &str) -> Prose {
    scan_text(text, false)
}

fn scan_text(text: &str, whole: bool) -> Prose {
    let prepared;
    let parsed = match front_matter_end(text).filter(|_| whole) {
        Some(end) => {
            prepared = blank_front_matter(text, end);
            prepared.as_str()
        }
        None => text,
    };
    // Cheap exit: no reference and no region can be in a text without "@[" or a value marker.
    if !text.contains(live::OPEN) && !text.contains(VALUE_BEGIN) {
        return Prose::default();
    }
    let arena = Arena::new();
    let options = options();
    let root = parse_document(&arena, parsed, &options);
    let index = LineIndex::new(text);
    let mut out = Prose::default();
    for node in root.descendants() {
        // Whether the block's first inline can begin a line: any paragraph or heading line can,
        // but of a table row only the first cell (when the row has no leading pipe).
        let begins = match node.data().value {
            NodeValue::Paragraph | NodeValue::Heading(_) => Some(true),
            NodeValue::TableCell => Some(node.previous_sibling().is_none()),
            _ => None,
        };
        if let Some(begins) = begins {
            scan_inlines(text, &index, node, begins, &mut out);
        }
    }
    // Each reference's top-level block, by its line.
    let blocks: Vec<(usize, usize)> = root
        .children()
        .map(|c| {
            let pos = c.data().sourcepos;
            (pos.start.line, pos.end.line)
        })
        .collect();
    for r in &mut out.references {
        let line = index.line_of(r.start);
        let k = blocks.partition_point(|&(first, _)| first <= line);
        if let Some(&(first, last)) = k.checked_sub(1).and_then(|k| blocks.get(k)) {
            if line <= last {
                r.block = (first, last);
            }
        }
    }
    out.references.sort_by_key(|r| r.start);
    out.regions.sort_by_key(|r| r.start);
    out
}

/// One Text node with where its literal starts in the text (when that could be confirmed).
struct Piece {
    /// Offset of the piece in the run's joined literal.
    at: usize,
    literal: String,
    raw: Option<usize>,
}

/// Scan the inline children of `parent`; `block` says the parent is a block whose lines the
/// children can begin.
fn scan_inlines<'a>(
    text: &str,
    index: &LineIndex,
    parent: &'a AstNode<'a>,
    block: bool,
    out: &mut Prose,
) {
    let mut run: Vec<Piece> = Vec::new();
    let mut joined = String::new();
    // Whether everything before the current run on its line is whitespace or guards.
    let mut line_open = block;
    let mut run_begins_line = block;
    let mut child = parent.first_child();
    while let Some(node) = child {
        let next = node.next_sibling();
        let data = node.data();
        if let NodeValue::Text(literal) = &data.value {
            if run.is_empty() {
                run_begins_line = line_open;
            }
            let raw = locate(
                text,
                index,
                data.sourcepos.start.line,
                data.sourcepos.start.column,
                literal,
            );
            run.push(Piece {
                at: joined.len(),
                literal: literal.to_string(),
                raw,
            });
            joined.push_str(literal);
            line_open = line_open && literal.chars().all(|c| c == ' ' || c == '\t');
            child = next;
            continue;
        }
        flush(text, &mut run, &mut joined, run_begins_line, out);
        match &data.value {
            NodeValue::SoftBreak | NodeValue::LineBreak => line_open = block,
            NodeValue::HtmlInline(html) => {
                if html.starts_with(VALUE_BEGIN) {
                    if let Some(end) = region_at(text, index, node, line_open, out) {
                        // The value is covey's: nothing in it is read as a reference.
                        line_open = false;
                        child = end.next_sibling();
                        continue;
                    }
                }
                line_open = line_open && html == LINE_GUARD;
            }
            NodeValue::Emph | NodeValue::Strong | NodeValue::Strikethrough | NodeValue::Link(_) => {
                scan_inlines(text, index, node, false, out);
                line_open = false;
            }
            _ => line_open = false,
        }
        child = next;
    }
    flush(text, &mut run, &mut joined, run_begins_line, out);
}

/// The references in a run of Text nodes, placed in the text; the run is emptied.
fn flush(
    text: &str,
    run: &mut Vec<Piece>,
    joined: &mut String,
    begins_line: bool,
    out: &mut Prose,
) {
    for (a, b) in live::find_all(joined) {
        // The last piece holding the offset; pieces ascend by `at`, so the search starts at
        // the last piece starting at or before it (and rarely has to step back).
        let piece_of = |offset: usize| {
            let upto = run.partition_point(|p| p.at <= offset);
            run.get(..upto)?
                .iter()
                .rev()
                .find(|p| offset < p.at + p.literal.len().max(1))
        };
        let (Some(first), Some(last)) = (piece_of(a), piece_of(b.saturating_sub(1))) else {
            continue;
        };
        let (Some(first_raw), Some(last_raw)) = (first.raw, last.raw) else {
            continue;
        };
        let start = first_raw + (a - first.at);
        let end = last_raw + (b - last.at);
        // The reference must be written in the text exactly as comrak read it.
        if text.get(start..end) != joined.get(a..b) {
            continue;
        }
        let before = joined.get(..a).unwrap_or("");
        out.references.push(FoundReference {
            start,
            end,
            begins_line: begins_line && before.chars().all(|c| c == ' ' || c == '\t'),
            block: (0, 0),
        });
    }
    run.clear();
    joined.clear();
}

/// A value region whose opening comment is `begin`, if its closing comment follows on the same
/// line among the same inlines: recorded in `out`, and its closing comment's node returned.
///
/// Another opening comment before the closing one spoils the region, and everything up to that
/// closing comment is passed over (its node is returned, no region recorded): a region found
/// inside would, once it gave back its reference, make the spoiled one whole, and stripping
/// would not give the same text twice.
fn region_at<'a>(
    text: &str,
    index: &LineIndex,
    begin: &'a AstNode<'a>,
    line_open: bool,
    out: &mut Prose,
) -> Option<&'a AstNode<'a>> {
    let data = begin.data();
    let NodeValue::HtmlInline(html) = &data.value else {
        return None;
    };
    let reference = html
        .strip_prefix(VALUE_BEGIN)
        .and_then(|r| r.strip_suffix(VALUE_BEGIN_CLOSE))?;
    if live::find_all(reference) != [(0, reference.len())] {
        return None;
    }
    let line = data.sourcepos.start.line;
    let start = locate(text, index, line, data.sourcepos.start.column, html)?;
    let mut node = begin.next_sibling();
    while let Some(n) = node {
        let d = n.data();
        match &d.value {
            NodeValue::SoftBreak | NodeValue::LineBreak => return None,
            NodeValue::HtmlInline(h) if h.starts_with(VALUE_BEGIN) => {
                return first_end_after(n);
            }
            NodeValue::HtmlInline(h) if h == VALUE_END => {
                let end = locate(
                    text,
                    index,
                    d.sourcepos.start.line,
                    d.sourcepos.start.column,
                    h,
                )?;
                if end < start || d.sourcepos.start.line != line {
                    return None;
                }
                // The guard right before the region is covey's when only whitespace and guards
                // precede it on the line.
                let guarded = line_open
                    && begin.previous_sibling().is_some_and(
                        |p| matches!(&p.data().value, NodeValue::HtmlInline(g) if g == LINE_GUARD),
                    )
                    && text.get(..start).is_some_and(|b| b.ends_with(LINE_GUARD));
                let guard = if guarded { LINE_GUARD.len() } else { 0 };
                out.regions.push(FoundRegion {
                    start: start - guard,
                    end: end + VALUE_END.len(),
                    guard,
                    reference: reference.to_string(),
                });
                return Some(n);
            }
            _ => {}
        }
        node = n.next_sibling();
    }
    None
}

/// The first closing comment after `node` among its siblings, before a line break.
fn first_end_after<'a>(node: &'a AstNode<'a>) -> Option<&'a AstNode<'a>> {
    let mut next = node.next_sibling();
    while let Some(n) = next {
        match &n.data().value {
            NodeValue::SoftBreak | NodeValue::LineBreak => return None,
            NodeValue::HtmlInline(h) if h == VALUE_END => return Some(n),
            _ => {}
        }
        next = n.next_sibling();
    }
    None
}

/// Where `literal`, which comrak says starts at 1-based `line` and `column`, starts in `text`:
/// comrak's column is tried first, then the occurrence of `literal` on that line nearest to it.
/// `None` when the line does not hold `literal` as written (an escape or entity in it).
fn locate(
    text: &str,
    index: &LineIndex,
    line: usize,
    column: usize,
    literal: &str,
) -> Option<usize> {
    let span = index.span(text, line)?;
    let guess = span.start + column.saturating_sub(1);
    if text.get(guess..).is_some_and(|r| r.starts_with(literal)) {
        return Some(guess);
    }
    let content = text.get(span.start..span.content_end)?;
    if literal.is_empty() {
        return None;
    }
    content
        .match_indices(literal)
        .map(|(i, _)| span.start + i)
        .min_by_key(|&at| at.abs_diff(guess))
}
