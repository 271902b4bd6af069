//! Finding and removing covey's own regions in a rendered document.
//!
//! A block region is recognised only directly at a covey block's insertion point (the end of its
//! closing fence line: a line ending, then the begin marker on a line of its own); the provenance
//! region only at the provenance insertion point. Because a region's content can change how
//! comrak reads everything after it, regions are removed one at a time, in document order, and
//! the text after a removed region is parsed again without it. A region can only change how
//! later text is read, so each step's view of the text before the region is the final one.
//! (`proptests::reference_strip` does this literally, re-parsing the whole text after each
//! removal; `strip_regions` gets the same result parsing each piece of the text about once.)

use super::lines::{ending_at, next_line_start, LineIndex};
use super::outline::{outline, outline_part, provenance_point, Outline, FRONT_MATTER_DELIMITER};
use super::{
    DocumentError, MARKER_PREFIX, OUTPUT_BEGIN, OUTPUT_END, PROVENANCE_BEGIN, PROVENANCE_END,
};

/// Which kind of region was removed.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(super) enum Kind {
    Provenance,
    Output,
    /// A value region in prose (see `values`); each is two removals, before and after its
    /// reference.
    Value,
}

/// One removed region.
#[derive(Debug, Clone)]
pub(super) struct Removal {
    pub kind: Kind,
    /// Offset in the stripped text where the region was.
    pub at: usize,
    /// Length in bytes of the region.
    pub len: usize,
    /// The region's body as written (its own line endings).
    pub body: String,
}

/// A text with every covey region removed, and what was removed.
#[derive(Debug, Clone)]
pub(super) struct Stripped {
    pub text: String,
    pub removals: Vec<Removal>,
    /// comrak's view of the stripped text.
    pub outline: Outline,
}

impl Stripped {
    /// The offset in the original (unstripped) text of offset `pos` of the stripped text.
    pub(super) fn to_original(&self, pos: usize) -> usize {
        pos + self
            .removals
            .iter()
            .filter(|r| r.at <= pos)
            .map(|r| r.len)
            .sum::<usize>()
    }
}

/// If `text` at `at` holds `marker` followed by a line ending, the length of both.
pub(super) fn marker_line_at(text: &str, at: usize, marker: &str) -> Option<usize> {
    let rest = text.get(at..)?;
    let after = rest.strip_prefix(marker)?;
    let ending = if after.starts_with("\r\n") {
        2
    } else if after.starts_with('\n') {
        1
    } else {
        return None;
    };
    Some(marker.len() + ending)
}

/// The offset of the line that starts with `end`, searching line by line from `from` (a line
/// start). The search stops without result at the end of the text or at a line that starts with
/// any other covey marker.
pub(super) fn find_end(text: &str, from: usize, end: &str) -> Option<usize> {
    let mut line = from;
    while line < text.len() {
        let rest = text.get(line..)?;
        if rest.starts_with(end) {
            return Some(line);
        }
        if rest.starts_with(MARKER_PREFIX) {
            return None;
        }
        line = next_line_start(text, line);
    }
    None
}

/// Whether a piece of text (starting where comrak has no block open) holds a top-level covey
/// fence: a region's body must not, or the region would run past the next covey block.
pub(super) fn holds_covey_fence(piece: &str) -> bool {
    !outline_part(piece).fences.is_empty()
}

/// The next place at or after `from` where a block region could start: the offset of a line
/// ending ("\r\n" or "\n") that is followed by the begin marker on a line of its own. Returns
/// the offset and the length of that line ending.
fn next_candidate(text: &str, from: usize) -> Option<(usize, usize)> {
    let mut search = from;
    loop {
        let found = search + text.get(search..)?.find(OUTPUT_BEGIN)?;
        let before = text.get(..found).unwrap_or("");
        let lead = if before.ends_with("\r\n") {
            2
        } else if before.ends_with('\n') {
            1
        } else {
            0
        };
        if lead > 0
            && found - lead >= from
            && marker_line_at(text, found, OUTPUT_BEGIN).is_some()
            && looks_like_closing_fence(line_before(text, found - lead))
        {
            return Some((found - lead, lead));
        }
        search = found + OUTPUT_BEGIN.len();
    }
}

/// The text of the line that ends at byte `end` (its line ending excluded).
fn line_before(text: &str, end: usize) -> &str {
    let head = text.get(..end).unwrap_or("");
    let start = head.rfind(['\n', '\r']).map_or(0, |i| i + 1);
    head.get(start..).unwrap_or("")
}

/// Whether a line could be a closing code fence at the top level (CommonMark: up to three
/// spaces, three or more backticks or tildes, then only spaces or tabs). A cheap test that lets
/// most marker-like user text through without a parse; comrak has the last word.
fn looks_like_closing_fence(line: &str) -> bool {
    let indent = line.len() - line.trim_start_matches(' ').len();
    let rest = line.trim_start_matches(' ');
    let Some(fence_char) = rest.chars().next().filter(|c| *c == '`' || *c == '~') else {
        return false;
    };
    let after = rest.trim_start_matches(fence_char);
    indent <= 3 && rest.len() - after.len() >= 3 && after.chars().all(|c| c == ' ' || c == '\t')
}

/// What a piece of text (parsed from a point where comrak has no block open, or from the start
/// of the document when `document_start`) says about a candidate region at its end: whether the
/// piece ends with the closing fence line of a top-level covey block (ending right at that line's
/// content end), and the latest line start inside the piece where comrak has no block open (after
/// a top-level closing fence line), if any.
fn examine_piece(piece: &str, document_start: bool) -> (bool, Option<usize>) {
    let view = if document_start {
        outline(piece)
    } else {
        outline_part(piece)
    };
    let index = LineIndex::new(piece);
    let closes = view.fences.iter().any(|fence| {
        fence
            .closing_line
            .and_then(|line| index.span(piece, line))
            .is_some_and(|span| span.content_end == piece.len())
    });
    let fresh = view
        .closed_fence_lines
        .iter()
        .filter_map(|&line| index.span(piece, line))
        .filter(|span| span.end > span.content_end && span.end <= piece.len())
        .map(|span| span.end)
        .max();
    (closes, fresh)
}

/// Remove every covey region from `text`.
///
/// Rather than parsing the whole remainder again after each removal, the text is parsed piece by
/// piece: from a point where comrak has no block open up to the next place a region could start.
/// comrak decides whether a line closes a fence from the lines up to it, so the piece's parse
/// agrees with a parse of the whole text there; and after a top-level closing fence line nothing
/// is open, so the next piece starts fresh. This keeps stripping linear in the text's length.
///
/// Errors: a recognised begin marker without its end marker, and an end marker (a top-level HTML
/// block starting with one) that belongs to no region.
pub(super) fn strip_regions(text: &str) -> Result<Stripped, DocumentError> {
    let mut current = text.to_string();
    let mut removals: Vec<Removal> = Vec::new();
    let mut removed = 0usize;

    // The provenance region, at the top.
    let at = provenance_point(&current);
    if let Some(begin_len) = marker_line_at(&current, at, PROVENANCE_BEGIN) {
        let body_start = at + begin_len;
        let end = find_end(&current, body_start, PROVENANCE_END)
            .filter(|&end| !holds_covey_fence(current.get(body_start..end).unwrap_or("")));
        let Some(end) = end else {
            let (line, column) = super::line_col(text, at);
            return Err(DocumentError::MissingEndMarker {
                line,
                column,
                begin: PROVENANCE_BEGIN,
                end: PROVENANCE_END,
            });
        };
        let after = end + PROVENANCE_END.len();
        // The marker line's own ending is part of the region; a lone "\r" is not covey's.
        let region_end = match ending_at(&current, after) {
            e @ ("\r\n" | "\n") => after + e.len(),
            _ => after,
        };
        // A document that is only front matter, with no line ending after the closing
        // delimiter, gets its region as `LE begin LE BODY end` (see `assemble_parts`): the
        // line ending before the begin marker is then covey's too.
        let mut at = at;
        if region_end == current.len() && region_end == after {
            let before = current.get(..at).unwrap_or("");
            for ending in ["\r\n", "\n"] {
                if let Some(rest) = before.strip_suffix(ending) {
                    if rest.ends_with(FRONT_MATTER_DELIMITER) {
                        at -= ending.len();
                    }
                    break;
                }
            }
        }
        let body = current.get(body_start..end).unwrap_or("").to_string();
        removals.push(Removal {
            kind: Kind::Provenance,
            at,
            len: region_end - at,
            body,
        });
        removed += region_end - at;
        current.replace_range(at..region_end, "");
    }

    // Block regions, in document order.
    // A line start where comrak has no block open.
    let mut fresh = 0usize;
    // Where to look for the next candidate: never inside the front matter.
    let mut search = provenance_point(&current);
    // Where the last region was removed.
    let mut last_at: Option<usize> = None;
    while let Some((at, lead)) = next_candidate(&current, search) {
        // Once all regions at the last removal point are gone, the fence line's own line ending
        // follows it, and after that nothing is open. If the user wrote something right after
        // the end marker instead, the fence line has changed: parse it again from `fresh`.
        if let Some(prev) = last_at.filter(|&prev| prev != at) {
            let ending = ending_at(&current, prev);
            if !ending.is_empty() && prev + ending.len() > fresh {
                fresh = prev + ending.len();
            }
        }
        // A second region right where one was just removed sits at the same fence.
        let real = last_at == Some(at) || {
            let (closes, later_fresh) = current
                .get(fresh..at)
                .filter(|_| fresh <= at)
                .map_or((false, None), |piece| examine_piece(piece, fresh == 0));
            if !closes {
                // Not covey's: start the next piece after the last closed fence seen.
                if let Some(offset) = later_fresh {
                    fresh += offset;
                }
            }
            closes
        };
        if !real {
            search = at + lead;
            continue;
        }
        let marker_at = at + lead;
        let body_start = marker_at + marker_line_at(&current, marker_at, OUTPUT_BEGIN).unwrap_or(0);
        let end = find_end(&current, body_start, OUTPUT_END)
            .filter(|&end| !holds_covey_fence(current.get(body_start..end).unwrap_or("")));
        let Some(end) = end else {
            let (line, column) = super::line_col(text, marker_at + removed);
            return Err(DocumentError::MissingEndMarker {
                line,
                column,
                begin: OUTPUT_BEGIN,
                end: OUTPUT_END,
            });
        };
        let region_end = end + OUTPUT_END.len();
        let body = current.get(body_start..end).unwrap_or("").to_string();
        removals.push(Removal {
            kind: Kind::Output,
            at,
            len: region_end - at,
            body,
        });
        removed += region_end - at;
        current.replace_range(at..region_end, "");
        search = at;
        last_at = Some(at);
    }

    let view = outline(&current);
    let stripped = Stripped {
        text: current,
        removals,
        outline: view,
    };
    // An end marker left over belongs to no region.
    if let Some(&line) = stripped.outline.end_markers.first() {
        let index = LineIndex::new(&stripped.text);
        let pos = index.start(line).unwrap_or(0);
        let marker = if stripped
            .text
            .get(pos..)
            .is_some_and(|rest| rest.starts_with(PROVENANCE_END))
        {
            PROVENANCE_END
        } else {
            OUTPUT_END
        };
        let (line, column) = super::line_col(text, stripped.to_original(pos));
        return Err(DocumentError::EndWithoutBegin {
            line,
            column,
            marker,
        });
    }
    Ok(stripped)
}
