//! Places in a document: byte offsets (covey's spans) and the protocol's line and character,
//! counted in UTF-16 code units unless the editor agreed to UTF-8 bytes. Every conversion is
//! total: a place past a line's end or the document's end is taken as that end.

use lsp_types::{Position, Range};

use crate::lang::Span;

/// How the protocol counts characters within a line.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Encoding {
    Utf16,
    Utf8,
}

/// The start of each line of a text. A line ends at "\r\n", "\n" or a lone "\r", as the
/// protocol says and as the renderer counts lines: a document with lone CRs, which the renderer
/// refuses at the first one, had every line after it reported on line 0 at a character far past
/// its end, which the editor drew at the end of the first line.
#[derive(Debug, Clone)]
pub struct Lines {
    starts: Vec<usize>,
}

impl Lines {
    pub fn new(text: &str) -> Lines {
        let bytes = text.as_bytes();
        let mut starts = vec![0];
        starts.extend(
            memchr::memchr2_iter(b'\n', b'\r', bytes)
                .filter(|&i| bytes[i] == b'\n' || bytes.get(i + 1) != Some(&b'\n'))
                .map(|i| i + 1),
        );
        Lines { starts }
    }

    /// The 0-based line holding byte `offset`.
    pub fn line_of(&self, offset: usize) -> usize {
        self.starts
            .partition_point(|&s| s <= offset)
            .saturating_sub(1)
    }

    /// Byte range of line `line` without its line ending (empty past the end).
    pub fn line_span(&self, text: &str, line: usize) -> (usize, usize) {
        let Some(&start) = self.starts.get(line) else {
            return (text.len(), text.len());
        };
        // The next line's start less its line ending: "\n", "\r", or "\r\n".
        let mut end = self.starts.get(line + 1).map_or(text.len(), |n| n - 1);
        if end > start
            && text.as_bytes().get(end) == Some(&b'\n')
            && text.as_bytes().get(end - 1) == Some(&b'\r')
        {
            end -= 1;
        }
        (start.min(text.len()), end.min(text.len()))
    }

    /// The byte offset of a protocol position.
    pub fn offset(&self, text: &str, pos: Position, enc: Encoding) -> usize {
        let line = usize::try_from(pos.line).unwrap_or(usize::MAX);
        let (start, end) = self.line_span(text, line);
        let want = usize::try_from(pos.character).unwrap_or(usize::MAX);
        let content = text.get(start..end).unwrap_or("");
        let mut units = 0usize;
        for (i, c) in content.char_indices() {
            if units >= want {
                return start + i;
            }
            units += match enc {
                Encoding::Utf16 => c.len_utf16(),
                Encoding::Utf8 => c.len_utf8(),
            };
        }
        end
    }

    /// The protocol position of byte `offset` (inside a character: its start).
    pub fn position(&self, text: &str, offset: usize, enc: Encoding) -> Position {
        let offset = floor_boundary(text, offset.min(text.len()));
        let line = self.line_of(offset);
        let start = self.starts.get(line).copied().unwrap_or(0).min(offset);
        let before = text.get(start..offset).unwrap_or("");
        let character = match enc {
            Encoding::Utf16 => before.chars().map(char::len_utf16).sum::<usize>(),
            Encoding::Utf8 => before.len(),
        };
        Position {
            line: u32::try_from(line).unwrap_or(u32::MAX),
            character: u32::try_from(character).unwrap_or(u32::MAX),
        }
    }

    /// The protocol range of a span.
    pub fn range(&self, text: &str, span: Span, enc: Encoding) -> Range {
        Range {
            start: self.position(text, span.start, enc),
            end: self.position(text, span.end.max(span.start), enc),
        }
    }
}

/// The largest char boundary at or before `i`.
pub fn floor_boundary(s: &str, mut i: usize) -> usize {
    i = i.min(s.len());
    while i > 0 && !s.is_char_boundary(i) {
        i -= 1;
    }
    i
}

/// Applies one change of `textDocument/didChange` to `text`: the whole text when it has no
/// range, else the range replaced.
pub fn apply_change(text: &mut String, range: Option<Range>, new: &str, enc: Encoding) {
    match range {
        None => *text = new.to_string(),
        Some(r) => {
            let lines = Lines::new(text);
            let start = lines.offset(text, r.start, enc);
            let end = lines.offset(text, r.end, enc).max(start);
            text.replace_range(start..end, new);
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn positions_round_trip_in_both_encodings() {
        let text = "ab\r\nµ😀x\n\nlast";
        let lines = Lines::new(text);
        for enc in [Encoding::Utf16, Encoding::Utf8] {
            for (offset, _) in text.char_indices() {
                let p = lines.position(text, offset, enc);
                let back = lines.offset(text, p, enc);
                // A line ending maps to the end of its line's content.
                if !text[offset..].starts_with(['\r', '\n']) {
                    assert_eq!(back, offset, "{enc:?} {offset}");
                }
            }
        }
        let x = text.find('x').unwrap_or(0);
        assert_eq!(
            lines.position(text, x, Encoding::Utf16),
            Position::new(1, 3)
        );
        assert_eq!(lines.position(text, x, Encoding::Utf8), Position::new(1, 6));
        // Past the end of a line or of the text: the end.
        assert_eq!(lines.offset(text, Position::new(0, 99), Encoding::Utf16), 2);
        assert_eq!(
            lines.offset(text, Position::new(99, 0), Encoding::Utf16),
            text.len()
        );
    }

    /// A lone CR ends a line, as the protocol and the renderer say; CRLF is one ending.
    #[test]
    fn a_lone_carriage_return_ends_a_line() {
        let text = "a\rbc\r\nd\n\re";
        let lines = Lines::new(text);
        let e = text.find('e').unwrap_or(0);
        assert_eq!(
            lines.position(text, e, Encoding::Utf16),
            Position::new(4, 0)
        );
        let c = text.find('c').unwrap_or(0);
        assert_eq!(
            lines.position(text, c, Encoding::Utf16),
            Position::new(1, 1)
        );
        assert_eq!(lines.line_span(text, 1), (2, 4));
        assert_eq!(lines.line_span(text, 3), (8, 8));
        assert_eq!(lines.offset(text, Position::new(0, 9), Encoding::Utf16), 1);
        assert_eq!(lines.offset(text, Position::new(3, 0), Encoding::Utf16), 8);
        for (offset, _) in text.char_indices() {
            let (l, c) = crate::document::line_col(text, offset);
            let p = lines.position(text, offset, Encoding::Utf16);
            assert_eq!(
                (p.line as usize + 1, p.character as usize + 1),
                (l, c),
                "{offset}"
            );
        }
    }

    #[test]
    fn changes_apply_by_range() {
        let mut t = "load \"a.csv\"\nmodel m: y on x\n".to_string();
        let r = Range::new(Position::new(1, 6), Position::new(1, 7));
        apply_change(&mut t, Some(r), "fit", Encoding::Utf16);
        assert_eq!(t, "load \"a.csv\"\nmodel fit: y on x\n");
        // A range ending inside a character or past the end is taken to the character's start
        // or the end; nothing panics.
        let r = Range::new(Position::new(0, 900), Position::new(7, 2));
        apply_change(&mut t, Some(r), "!", Encoding::Utf16);
        assert_eq!(t, "load \"a.csv\"!");
    }
}
