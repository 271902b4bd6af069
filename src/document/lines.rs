//! Line bookkeeping shared by the document module.
//!
//! Lines are split the way CommonMark splits them (and so the way comrak numbers them): a line
//! ends at "\r\n", at "\n", or at a lone "\r". Every function here works on byte offsets and never
//! panics: offsets out of range or inside a character are clamped.

/// The byte range of one line: `start..content_end` is its text, `content_end..end` its line
/// ending (empty for a last line without one).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(super) struct LineSpan {
    pub start: usize,
    pub content_end: usize,
    pub end: usize,
}

/// Start offsets of every line of a text, for turning comrak's 1-based line numbers into byte
/// offsets.
#[derive(Debug, Clone)]
pub(super) struct LineIndex {
    /// `starts[i]` is the byte offset where line `i + 1` starts. After a final line ending the
    /// offset `text.len()` is included, so an insertion point at the very end has a line too.
    starts: Vec<usize>,
    len: usize,
}

impl LineIndex {
    /// Index the lines of `text`.
    pub(super) fn new(text: &str) -> Self {
        let bytes = text.as_bytes();
        let mut starts = vec![0];
        let mut i = 0;
        while i < bytes.len() {
            match bytes.get(i) {
                Some(b'\n') => starts.push(i + 1),
                Some(b'\r') => {
                    if bytes.get(i + 1) == Some(&b'\n') {
                        i += 1;
                    }
                    starts.push(i + 1);
                }
                _ => {}
            }
            i += 1;
        }
        LineIndex {
            starts,
            len: text.len(),
        }
    }

    /// Byte offset where 1-based `line` starts, if the text has that line.
    pub(super) fn start(&self, line: usize) -> Option<usize> {
        line.checked_sub(1)
            .and_then(|i| self.starts.get(i))
            .copied()
    }

    /// The span of 1-based `line`, if the text has that line.
    pub(super) fn span(&self, text: &str, line: usize) -> Option<LineSpan> {
        let start = self.start(line)?;
        let end = self.starts.get(line).copied().unwrap_or(self.len);
        let body = text.get(start..end)?;
        let ending = ending_len(body);
        Some(LineSpan {
            start,
            content_end: end - ending,
            end,
        })
    }

    /// 1-based number of the line holding byte `offset`.
    pub(super) fn line_of(&self, offset: usize) -> usize {
        // `starts` is sorted; the line is the number of starts at or before the offset.
        self.starts.partition_point(|&s| s <= offset).max(1)
    }
}

/// Length in bytes of the line ending that `line` (one line, with its ending) ends with.
fn ending_len(line: &str) -> usize {
    if line.ends_with("\r\n") {
        2
    } else if line.ends_with('\n') || line.ends_with('\r') {
        1
    } else {
        0
    }
}

/// The line ending that starts at byte `offset` of `text`: "\r\n", "\n", "\r", or "" when none
/// does.
pub(super) fn ending_at(text: &str, offset: usize) -> &'static str {
    let rest = text.get(offset..).unwrap_or("");
    if rest.starts_with("\r\n") {
        "\r\n"
    } else if rest.starts_with('\n') {
        "\n"
    } else if rest.starts_with('\r') {
        "\r"
    } else {
        ""
    }
}

/// Byte offset of the start of the line after the one holding `offset` (or `text.len()`).
pub(super) fn next_line_start(text: &str, offset: usize) -> usize {
    let bytes = text.as_bytes();
    let mut i = offset;
    while let Some(&b) = bytes.get(i) {
        if b == b'\n' {
            return i + 1;
        }
        if b == b'\r' {
            return if bytes.get(i + 1) == Some(&b'\n') {
                i + 2
            } else {
                i + 1
            };
        }
        i += 1;
    }
    text.len()
}

/// The document's predominant line ending: "\r\n" when more lines end with "\r\n" than with a
/// bare "\n", otherwise "\n" (also for a text with no line ending at all).
pub(super) fn predominant(text: &str) -> &'static str {
    let crlf = text.matches("\r\n").count();
    let lf = text.matches('\n').count().saturating_sub(crlf);
    if crlf > lf {
        "\r\n"
    } else {
        "\n"
    }
}

/// `text` with every line ending ("\r\n" or a lone "\r") turned into "\n".
pub(super) fn to_lf(text: &str) -> String {
    text.replace("\r\n", "\n").replace('\r', "\n")
}

/// 1-based line and column of byte `offset` in `text`, the column counted in characters.
///
/// Lines end at "\r\n", "\n" or a lone "\r", as in CommonMark. An offset past the end is taken as
/// the end; an offset inside a character is moved back to that character's start.
pub fn line_col(text: &str, offset: usize) -> (usize, usize) {
    Positions::new(text).at(offset)
}

/// [`line_col`] for many offsets of one text: the lines are indexed once, and offsets given in
/// increasing order count the characters of each line once in all, so that finding the
/// positions of n offsets takes time linear in the text and n (not n times the text).
pub(super) struct Positions<'t> {
    text: &'t str,
    index: LineIndex,
    /// The last offset asked for, with its line and column.
    last: Option<(usize, usize, usize)>,
}

impl<'t> Positions<'t> {
    pub(super) fn new(text: &'t str) -> Self {
        Positions {
            text,
            index: LineIndex::new(text),
            last: None,
        }
    }

    /// 1-based line and column (in characters) of byte `offset`, as [`line_col`] gives them.
    pub(super) fn at(&mut self, offset: usize) -> (usize, usize) {
        let text = self.text;
        let mut offset = offset.min(text.len());
        while offset > 0 && !text.is_char_boundary(offset) {
            offset -= 1;
        }
        let line = self.index.line_of(offset);
        let start = self.index.start(line).unwrap_or(0).min(offset);
        // Count on from the last offset when it lies on this line, before this one.
        let (from, counted) = match self.last {
            Some((at, l, column)) if l == line && at <= offset && at >= start => (at, column - 1),
            _ => (start, 0),
        };
        let column = counted + text.get(from..offset).map_or(0, |s| s.chars().count()) + 1;
        self.last = Some((offset, line, column));
        (line, column)
    }
}
