//! Splitting delimited text into records and fields, by the rules of the csv crate's reader
//! (csv-core, configured as covey always used it: double quote for quoting, `""` for a
//! literal quote inside a quoted field, no escape character, no comments, and any of CR, LF
//! or CR LF ending a record; line breaks before a record are skipped).
//!
//! A record whose fields open no quoted field (the usual case) is split here, over the
//! file's bytes, without copying: the delimiters, line breaks and quotes of 64 bytes at a
//! time are found at once as a bit mask, and each field is the run between two of them. A
//! record with a quoted field goes to csv-core, which copies its fields out with the quotes
//! removed. [`chunk_starts`] finds record boundaries far apart, so that parts of a file can
//! be split independently.

use csv_core::{ReadRecordResult, Reader, ReaderBuilder};

/// Marks a span whose bytes are in a side buffer (fields copied out of a quoted record)
/// rather than in the text; no text is near 2^63 bytes long.
const SIDE: usize = 1 << (usize::BITS - 1);

/// Marks (on a span's start) a field that was quoted: as a text value it keeps the spaces
/// and tabs between its quotes, which an unquoted field's value is trimmed of.
const QUOTED: usize = 1 << (usize::BITS - 2);

/// The offset bits of a span end.
const OFFSET: usize = !(SIDE | QUOTED);

/// The bytes of a field span: in `body`, or in `side` when marked [`SIDE`].
#[inline]
pub(super) fn span_bytes<'a>(body: &'a [u8], side: &'a [u8], span: (usize, usize)) -> &'a [u8] {
    let (a, b) = span;
    let bytes = if a & SIDE == 0 {
        body.get(a..b)
    } else {
        side.get(a & OFFSET..b & OFFSET)
    };
    bytes.unwrap_or_default()
}

/// Whether the field of a span was quoted (see [`QUOTED`]).
#[inline]
pub(super) fn span_quoted(span: (usize, usize)) -> bool {
    span.0 & QUOTED != 0
}

/// Length of a field span.
#[inline]
pub(super) fn span_len(span: (usize, usize)) -> usize {
    (span.1 & OFFSET).saturating_sub(span.0 & OFFSET)
}

/// How one field of a record was written, for its text value: quoted (its first byte a
/// quote), and how many spaces and tabs end it after its closing quote (csv-core keeps any
/// bytes between the closing quote and the delimiter as part of the field; those spaces are
/// not the value's).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(super) struct Quoting {
    pub quoted: bool,
    pub trailing: usize,
}

/// How each field of the record at the start of `raw` was written (see [`Quoting`]), by the
/// csv reader's rules: a quote opens a quoted field only as the field's first byte; inside,
/// `""` is a quote and a quote alone closes the field; after it, anything up to the delimiter
/// or the line break continues the field unquoted. The record ends at a CR or LF outside
/// quotes, or at the end of `raw`.
pub(super) fn quoting(raw: &[u8], delimiter: u8) -> Vec<Quoting> {
    let mut out = Vec::new();
    let mut i = 0;
    loop {
        let quoted = raw.get(i) == Some(&b'"');
        let mut trailing = 0;
        if quoted {
            i += 1;
            loop {
                match raw.get(i) {
                    None => {
                        out.push(Quoting { quoted, trailing });
                        return out;
                    }
                    Some(b'"') if raw.get(i + 1) == Some(&b'"') => i += 2,
                    Some(b'"') => {
                        i += 1;
                        break;
                    }
                    Some(_) => i += 1,
                }
            }
        }
        loop {
            match raw.get(i) {
                Some(&b) if b == delimiter => {
                    out.push(Quoting { quoted, trailing });
                    i += 1;
                    break;
                }
                None | Some(b'\r' | b'\n') => {
                    out.push(Quoting { quoted, trailing });
                    return out;
                }
                Some(b' ' | b'\t') => {
                    trailing += 1;
                    i += 1;
                }
                Some(_) => {
                    trailing = 0;
                    i += 1;
                }
            }
        }
    }
}

/// Reads the records of `body[pos..end]`, one at a time.
pub(super) struct Splitter<'a> {
    body: &'a [u8],
    pos: usize,
    end: usize,
    /// 1-based line of the byte at `pos` (lines are counted by LF bytes).
    line: usize,
    delimiter: u8,
    /// Where the special bytes lie near `pos`.
    specials: Specials,
    /// For records with a quoted field; made on first use.
    core: Option<Reader>,
    /// csv-core's field ends, for a quoted record.
    ends: Vec<usize>,
}

/// The bytes that end an unquoted run (the delimiter, CR, LF and the double quote) in
/// `body[block..block + 64]`, one bit per byte (bit i for byte `block + i`); bits below the
/// reader's position may be stale.
#[derive(Debug, Clone, Copy)]
struct Specials {
    block: usize,
    mask: u64,
    delimiter: u8,
}

/// Multiplying a word whose bytes are each 0 or 1 by this gathers them into its top byte in
/// order (byte i to bit 56 + i): each pair (byte i, factor byte 7 - i) lands on a different
/// power of two, so nothing carries.
const GATHER: u64 = 0x0102_0408_1020_4080;

impl Specials {
    fn new(delimiter: u8) -> Self {
        Specials {
            block: usize::MAX,
            mask: 0,
            delimiter,
        }
    }

    /// The mask of 64 bytes. Written as byte-wise comparisons into flags, which the compiler
    /// turns into vector compares, then gathered eight flags at a time.
    #[inline]
    fn mask_of(&self, bytes: &[u8; 64]) -> u64 {
        let d = self.delimiter;
        let mut flags = [0u8; 64];
        for (f, &b) in flags.iter_mut().zip(bytes) {
            *f = u8::from(b == d)
                | u8::from(b == b'\n')
                | u8::from(b == b'\r')
                | u8::from(b == b'"');
        }
        let mut mask = 0u64;
        for (i, w) in flags.chunks_exact(8).enumerate() {
            let mut word = [0u8; 8];
            word.copy_from_slice(w);
            mask |= (u64::from_le_bytes(word).wrapping_mul(GATHER) >> 56) << (8 * i);
        }
        mask
    }

    /// Loads the mask of `body[block..end]` (at most 64 bytes).
    #[inline]
    fn load(&mut self, body: &[u8], block: usize, end: usize) {
        let full = body
            .get(block..block.saturating_add(64))
            .filter(|_| block.saturating_add(64) <= end)
            .and_then(|b| <&[u8; 64]>::try_from(b).ok());
        self.mask = match full {
            Some(bytes) => self.mask_of(bytes),
            None => {
                let tail = body.get(block..end).unwrap_or_default();
                let mut bytes = [0u8; 64];
                for (d, s) in bytes.iter_mut().zip(tail) {
                    *d = *s;
                }
                // The padding is not part of the text (and a NUL delimiter would match it).
                let valid = match tail.len() {
                    n @ 0..=63 => (1u64 << n) - 1,
                    _ => u64::MAX,
                };
                self.mask_of(&bytes) & valid
            }
        };
        self.block = block;
    }

    /// The first special byte in `body[pos..end]`.
    #[inline(always)]
    fn next_from(&mut self, body: &[u8], pos: usize, end: usize) -> Option<usize> {
        match pos.checked_sub(self.block) {
            Some(d) if d < 64 => self.mask &= u64::MAX << d,
            _ => {
                if pos >= end {
                    return None;
                }
                self.load(body, pos, end);
            }
        }
        loop {
            if self.mask != 0 {
                return Some(self.block + self.mask.trailing_zeros() as usize);
            }
            let next = self.block + 64;
            if next >= end {
                return None;
            }
            self.load(body, next, end);
        }
    }
}

/// Where a record starts.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(super) struct RecordStart {
    /// Byte offset of the record's first byte.
    pub offset: usize,
    /// Line of that byte.
    pub line: usize,
}

/// The fields of one record (reused from record to record).
#[derive(Debug, Default)]
pub(super) struct Fields {
    spans: Vec<(usize, usize)>,
    side: Vec<u8>,
}

impl Fields {
    /// Number of fields.
    pub(super) fn len(&self) -> usize {
        self.spans.len()
    }

    /// Total length of the fields' contents, quotes and delimiters excluded.
    pub(super) fn content_len(&self) -> usize {
        self.spans.iter().map(|s| span_len(*s)).sum()
    }

    /// Field `j` of the record read from `body` (empty when out of range), and whether it was
    /// quoted.
    #[inline]
    pub(super) fn get_quoted<'a>(&'a self, body: &'a [u8], j: usize) -> (&'a [u8], bool) {
        match self.spans.get(j) {
            Some(s) => (span_bytes(body, &self.side, *s), span_quoted(*s)),
            None => (&[], false),
        }
    }

    /// The fields in order.
    pub(super) fn iter<'a>(&'a self, body: &'a [u8]) -> impl Iterator<Item = &'a [u8]> + 'a {
        self.spans
            .iter()
            .map(move |s| span_bytes(body, &self.side, *s))
    }
}

impl<'a> Splitter<'a> {
    /// A splitter over `body[start..end]`, where `start` is a record boundary on `line`.
    pub(super) fn new(
        body: &'a [u8],
        start: usize,
        end: usize,
        line: usize,
        delimiter: u8,
    ) -> Self {
        let end = end.min(body.len());
        Splitter {
            body,
            pos: start.min(end),
            end,
            line,
            delimiter,
            specials: Specials::new(delimiter),
            core: None,
            ends: Vec::new(),
        }
    }

    /// Byte offset of the next unread byte.
    pub(super) fn pos(&self) -> usize {
        self.pos
    }

    /// Line of the next unread byte.
    pub(super) fn line(&self) -> usize {
        self.line
    }

    /// Reads the next record into `fields`; `None` at the end.
    pub(super) fn next_record(&mut self, fields: &mut Fields) -> Option<RecordStart> {
        fields.spans.clear();
        fields.side.clear();
        self.split_record(&mut fields.spans, &mut fields.side)
    }

    /// Reads the next record, appending its field spans to `spans` (fields copied out of a
    /// quoted record go to the end of `side`, see [`span_bytes`]); `None` at the end.
    #[inline(always)]
    pub(super) fn split_record(
        &mut self,
        spans: &mut Vec<(usize, usize)>,
        side: &mut Vec<u8>,
    ) -> Option<RecordStart> {
        let body = self.body;
        let end = self.end;
        let mut pos = self.pos;
        // Line breaks before a record are skipped.
        loop {
            match body.get(pos).filter(|_| pos < end) {
                Some(b'\n') => self.line += 1,
                Some(b'\r') => {}
                Some(_) => break,
                None => {
                    self.pos = pos;
                    return None;
                }
            }
            pos += 1;
        }
        let start = RecordStart {
            offset: pos,
            line: self.line,
        };
        let first = spans.len();
        let mut field_start = pos;
        loop {
            let Some((at, b)) = self
                .specials
                .next_from(body, pos, end)
                .and_then(|at| Some((at, *body.get(at)?)))
            else {
                // The last record of the text, without a line break.
                spans.push((field_start, end));
                pos = end;
                break;
            };
            if b == self.delimiter {
                spans.push((field_start, at));
                pos = at + 1;
                field_start = pos;
            } else if b == b'\n' || b == b'\r' {
                spans.push((field_start, at));
                pos = at + 1;
                if b == b'\n' {
                    self.line += 1;
                }
                break;
            } else if at == field_start {
                // A quote opening a quoted field: csv-core reads the whole record.
                spans.truncate(first);
                self.pos = start.offset;
                self.quoted_record(spans, side);
                return Some(start);
            } else {
                // A quote inside an unquoted field is an ordinary byte.
                pos = at + 1;
            }
        }
        self.pos = pos;
        Some(start)
    }

    /// Reads the record at `self.pos` with csv-core.
    fn quoted_record(&mut self, spans: &mut Vec<(usize, usize)>, side: &mut Vec<u8>) {
        let body = self.body;
        let start = self.pos;
        let delimiter = self.delimiter;
        let core = self.core.get_or_insert_with(|| {
            ReaderBuilder::new()
                .delimiter(delimiter)
                .quote(b'"')
                .double_quote(true)
                .build()
        });
        core.reset();
        let base = side.len();
        // Room to start with: the record is at least as long as its unquoted text.
        side.resize(base + 256, 0);
        if self.ends.is_empty() {
            self.ends.resize(16, 0);
        }
        let (mut nout, mut nends) = (0usize, 0usize);
        loop {
            let input = body.get(self.pos..self.end).unwrap_or_default();
            let out = side.get_mut(base + nout..).unwrap_or_default();
            let ends = self.ends.get_mut(nends..).unwrap_or_default();
            let (res, i, o, e) = core.read_record(input, out, ends);
            self.pos += i;
            nout += o;
            nends += e;
            match res {
                // At the end of the text an empty input tells csv-core to finish the record.
                ReadRecordResult::InputEmpty => {}
                ReadRecordResult::OutputFull => {
                    let n = side.len().saturating_sub(base).max(256).saturating_mul(2);
                    side.resize(base + n, 0);
                }
                ReadRecordResult::OutputEndsFull => {
                    let n = self.ends.len().saturating_mul(2);
                    self.ends.resize(n, 0);
                }
                ReadRecordResult::Record | ReadRecordResult::End => break,
            }
        }
        side.truncate(base + nout);
        let raw = body.get(start..self.pos).unwrap_or_default();
        self.line += raw.iter().filter(|b| **b == b'\n').count();
        let ends = self.ends.get(..nends).unwrap_or_default();
        // The fields' quoting, when the record's text agrees with csv-core on their number.
        let quoting = quoting(raw, self.delimiter);
        let quoting = quoting
            .get(..ends.len())
            .filter(|_| quoting.len() == ends.len());
        let mut from = base;
        for (k, &to) in ends.iter().enumerate() {
            let to = base + to;
            let span = match quoting.and_then(|q| q.get(k)) {
                Some(q) if q.quoted => (
                    from | SIDE | QUOTED,
                    to.saturating_sub(q.trailing).max(from) | SIDE,
                ),
                _ => (from | SIDE, to | SIDE),
            };
            spans.push(span);
            from = to;
        }
    }
}

/// Record boundaries in `body[from..]` about `chunk` bytes apart, `from` first: each is just
/// after an LF that ends a record (not one inside a quoted field). The boundaries depend only
/// on the text, so the parts they make do too.
///
/// Only double quotes can hide a line break, so between them the search is a byte search. A
/// quote opens a quoted field when it is a field's first byte (the text's start, or after
/// the delimiter, a CR or an LF); inside, the next quote closes the field unless another
/// follows it (`""`, a literal quote). A quote elsewhere is an ordinary byte. A quoted field
/// left open runs to the end of the text, so no boundary follows it.
pub(super) fn chunk_starts(body: &[u8], from: usize, delimiter: u8, chunk: usize) -> Vec<usize> {
    let mut starts = vec![from];
    let chunk = chunk.max(1);
    // `pos` is never inside a quoted field.
    let mut pos = from;
    loop {
        let target = pos.saturating_add(chunk);
        if target >= body.len() {
            return starts;
        }
        // Walk the quotes before the target.
        while let Some(q) = find(body, pos, target, b'"') {
            match skip_quote(body, q, delimiter) {
                Some(after) => pos = after,
                None => return starts,
            }
            if pos >= target {
                break;
            }
        }
        pos = pos.max(target);
        // The first LF from here that is not inside a quoted field.
        let boundary = loop {
            let Some(nl) = find(body, pos, body.len(), b'\n') else {
                return starts;
            };
            match find(body, pos, nl, b'"') {
                None => break nl + 1,
                Some(q) => match skip_quote(body, q, delimiter) {
                    Some(after) => pos = after,
                    None => return starts,
                },
            }
        };
        if boundary >= body.len() {
            return starts;
        }
        starts.push(boundary);
        pos = boundary;
    }
}

/// Where the text after the quote at `q` is outside any quoted field again: just after the
/// quote when it is an ordinary byte, after the closing quote when it opens a quoted field,
/// `None` when that field never closes.
fn skip_quote(body: &[u8], q: usize, delimiter: u8) -> Option<usize> {
    let opens = match q.checked_sub(1).and_then(|p| body.get(p)) {
        None => true,
        Some(&b) => b == delimiter || b == b'\r' || b == b'\n',
    };
    if !opens {
        return Some(q + 1);
    }
    let mut p = q + 1;
    loop {
        let c = find(body, p, body.len(), b'"')?;
        if body.get(c + 1) == Some(&b'"') {
            p = c + 2;
        } else {
            return Some(c + 1);
        }
    }
}

/// Position of the first `byte` in `body[from..to]`.
fn find(body: &[u8], from: usize, to: usize, byte: u8) -> Option<usize> {
    let hay = body.get(from..to.min(body.len()))?;
    memchr::memchr(byte, hay).map(|i| from + i)
}

#[cfg(test)]
mod quoting_tests {
    use super::*;

    fn fields(text: &[u8]) -> Vec<(Vec<u8>, bool)> {
        let mut split = Splitter::new(text, 0, text.len(), 1, b',');
        let mut f = Fields::default();
        split.next_record(&mut f);
        (0..f.len())
            .map(|j| {
                let (b, q) = f.get_quoted(text, j);
                (b.to_vec(), q)
            })
            .collect()
    }

    #[test]
    fn quoted_fields_are_marked_and_keep_their_inner_spaces() {
        assert_eq!(
            fields(b"\" a \",b, \"c\" ,\"d\"\"e\"\n"),
            vec![
                (b" a ".to_vec(), true),
                (b"b".to_vec(), false),
                // A quote after a space does not open a quoted field.
                (b" \"c\" ".to_vec(), false),
                (b"d\"e".to_vec(), true),
            ]
        );
        // Spaces after the closing quote are not the value's; other bytes there are.
        assert_eq!(
            fields(b"\"a\"  ,\"b\"x \t\n"),
            vec![(b"a".to_vec(), true), (b"bx".to_vec(), true)]
        );
        // An unquoted record is not marked.
        assert_eq!(
            fields(b" a ,b\n"),
            vec![(b" a ".to_vec(), false), (b"b".to_vec(), false)]
        );
    }

    #[test]
    fn quoting_of_odd_records() {
        let q = |quoted, trailing| Quoting { quoted, trailing };
        assert_eq!(quoting(b"", b','), vec![q(false, 0)]);
        assert_eq!(quoting(b"\"open", b','), vec![q(true, 0)]);
        assert_eq!(quoting(b"\"a\" \r\nnext", b','), vec![q(true, 1)]);
        assert_eq!(quoting(b"\"a,b\",\"\"", b','), vec![q(true, 0), q(true, 0)]);
    }
}
