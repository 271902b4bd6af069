//! Reading delimited text (CSV, TSV) into typed columns.
//!
//! The header is read first; the data rows after it are cut at record boundaries into parts
//! of about [`PART_BYTES`], which are split into fields (see [`super::split`]) and typed on
//! all threads of the current rayon pool, then merged in file order. Two more passes run
//! only when needed: one puts back the text of cells read as numbers in a column that
//! turned out to be text, one computes exact residuals (see [`super::ExactValues`]).
//!
//! [`Sink`] holds the whole columns while parts are merged into them, so that a file can also
//! be taken a window at a time (see [`super::stream`]).

use std::collections::BTreeMap;
use std::sync::Mutex;

use super::error::LoadError;
use super::exact::{self, ExactScan};
use super::intern::Index;
use super::lines::LinesBuilder;
use super::number::{parse_decimal_comma, parse_trimmed, NumberParse, Suggestion};
use super::split::{
    chunk_starts, span_bytes, span_len, span_quoted, Fields, RecordStart, Splitter,
};
use super::swar;
use super::{Column, DataSet, ExactValues, TextValues, Values};

/// Longest physical line accepted, in bytes. Real data rows are far shorter; a longer line
/// almost always means a wrong delimiter, a missing line break, or a file that is not text.
pub const MAX_LINE_BYTES: usize = 1 << 20;

pub(super) const UTF8_BOM: &[u8] = b"\xEF\xBB\xBF";

/// Size of the parts the data rows are cut into: large enough that a part's fixed costs (a
/// thread hand-off, merging its distinct texts) are small against splitting it, small enough
/// that a batch of parts is a small share of a large file's memory and keeps two or more
/// threads busy.
pub(super) const PART_BYTES: usize = 1 << 19;

/// Parts read at once before they are merged: the memory a load needs beyond its columns is
/// about this many parts' worth of columns.
const BATCH_PARTS: usize = 4;

/// How to read a delimited file.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct LoadOptions {
    /// Name of the data set (shown in output and messages).
    pub name: String,
    /// Field delimiter: `b','` for CSV, `b'\t'` for TSV.
    pub delimiter: u8,
    /// Cell texts that mean "missing", besides the empty cell (compared after trimming).
    pub missing: Vec<String>,
    /// Decimals are marked by a comma (`3,5`), and a point in a number is refused.
    pub decimal_comma: bool,
}

impl Default for LoadOptions {
    fn default() -> Self {
        LoadOptions {
            name: String::new(),
            delimiter: b',',
            missing: Vec::new(),
            decimal_comma: false,
        }
    }
}

/// The separator a comma-separated file really uses, when its header is a single field
/// holding semicolons, tabs or vertical bars (outside quotes) and no comma: the one of those
/// that occurs most often (a tie goes to the semicolon, then the tab). `None` when the header
/// has a comma, none of these, or no line break within `head` (the file's first bytes).
pub fn detect_separator(head: &[u8]) -> Option<u8> {
    let head = head.strip_prefix(UTF8_BOM).unwrap_or(head);
    let end = memchr::memchr2(b'\n', b'\r', head)?;
    let line = head.get(..end)?;
    let mut counts = [0usize; 3];
    let mut quoted = false;
    for &b in line {
        match b {
            b'"' => quoted = !quoted,
            _ if quoted => {}
            b',' => return None,
            b';' => counts[0] += 1,
            b'\t' => counts[1] += 1,
            b'|' => counts[2] += 1,
            _ => {}
        }
    }
    let best = (0..3).max_by_key(|&i| (counts[i], std::cmp::Reverse(i)))?;
    (counts[best] > 0).then(|| [b';', b'\t', b'|'][best])
}

/// A cell written with a decimal comma as the same cell with a point, in `buf`, for the fast
/// number reader; `None` (read it the slow way) when it holds a point or is long.
#[inline(always)]
fn comma_to_point<'b>(cell: &[u8], buf: &'b mut [u8; 24]) -> Option<&'b [u8]> {
    let out = buf.get_mut(..cell.len())?;
    for (o, &b) in out.iter_mut().zip(cell) {
        *o = match b {
            b'.' => return None,
            b',' => b'.',
            b => b,
        };
    }
    Some(out)
}

/// Trims spaces and tabs from both ends of a cell.
#[inline]
fn trim_bytes(mut b: &[u8]) -> &[u8] {
    while let [b' ' | b'\t', rest @ ..] = b {
        b = rest;
    }
    while let [rest @ .., b' ' | b'\t'] = b {
        b = rest;
    }
    b
}

/// A cell as a text value: a quoted cell as written between its quotes (so `" a "` and `"a"`
/// are two values), any other trimmed. Whether a cell is missing or a number is always
/// decided on the trimmed cell.
#[inline]
pub(super) fn text_value(raw: &[u8], quoted: bool) -> &[u8] {
    if quoted {
        raw
    } else {
        trim_bytes(raw)
    }
}

pub(super) fn is_break(b: u8) -> bool {
    b == b'\n' || b == b'\r'
}

/// Refuses NUL bytes (a byte search at memchr speed; the line is worked out only on a find).
fn check_nul(body: &[u8]) -> Result<(), LoadError> {
    if let Some(at) = memchr::memchr(0, body) {
        let line = 1 + body
            .get(..at)
            .map_or(0, |s| s.iter().filter(|b| **b == b'\n').count());
        return Err(LoadError::NulByte { line });
    }
    Ok(())
}

/// The most bytes a record's raw text can span given its fields' contents and count (see
/// [`check_record_length`]).
#[inline]
fn record_bound(content: usize, n_fields: usize) -> usize {
    content
        .saturating_mul(2)
        .saturating_add(n_fields.saturating_mul(3))
        .saturating_add(2)
}

/// Refuses a record whose text may hold a line longer than [`MAX_LINE_BYTES`].
///
/// A record's raw text is at most twice its unquoted content (`content` bytes, escaped
/// quotes) plus three bytes per field (two quotes and a delimiter) plus a CR LF; only when
/// that bound exceeds the limit are the raw bytes from `start` split into lines and
/// measured, so normal files pay nothing.
fn check_record_length(
    body: &[u8],
    content: usize,
    n_fields: usize,
    start: usize,
    first_line: usize,
) -> Result<(), LoadError> {
    let bound = record_bound(content, n_fields);
    if bound <= MAX_LINE_BYTES {
        return Ok(());
    }
    let end = start.saturating_add(bound).min(body.len());
    let region = body.get(start..end).unwrap_or_default();
    for (i, text) in region.split(|b| *b == b'\n').enumerate() {
        // A bare CR also ends a line for the reader, so only a run without either is too long.
        if text.len() > MAX_LINE_BYTES
            && text
                .split(|b| *b == b'\r')
                .any(|p| p.len() > MAX_LINE_BYTES)
        {
            return Err(LoadError::LineTooLong {
                line: first_line.saturating_add(i),
                limit: MAX_LINE_BYTES,
            });
        }
    }
    Ok(())
}

/// Finds a quoted field left open at the end of the file (the csv reader silently takes the
/// rest of the file into it). An open quote swallows everything after it, so it can only be in
/// the last record: `tail` is the text from that record's first byte, `first_line` its line.
///
/// The quote states follow the csv crate's reader: a quote opens a quoted field only as the
/// first byte of a field; inside, `""` is a literal quote; after the closing quote, a delimiter
/// or line break ends the field and anything else continues it unquoted.
pub(super) fn check_open_quote(
    tail: &[u8],
    first_line: usize,
    delimiter: u8,
) -> Result<(), LoadError> {
    #[derive(Clone, Copy)]
    enum S {
        FieldStart,
        Unquoted,
        Quoted,
        QuoteInQuoted,
    }
    let mut state = S::FieldStart;
    let mut line = first_line;
    let mut quote_line = first_line;
    for &b in tail {
        if b == b'\n' {
            line += 1;
        }
        state = match state {
            S::FieldStart | S::Unquoted if b == delimiter || is_break(b) => S::FieldStart,
            S::FieldStart if b == b'"' => {
                quote_line = line;
                S::Quoted
            }
            S::FieldStart | S::Unquoted => S::Unquoted,
            S::Quoted if b == b'"' => S::QuoteInQuoted,
            S::Quoted => S::Quoted,
            S::QuoteInQuoted if b == b'"' => S::Quoted,
            S::QuoteInQuoted if b == delimiter || is_break(b) => S::FieldStart,
            S::QuoteInQuoted => S::Unquoted,
        };
    }
    if matches!(state, S::Quoted) {
        return Err(LoadError::UnterminatedQuote { line: quote_line });
    }
    Ok(())
}

/// The first refused number-like cell of a column that is otherwise numeric.
#[derive(Debug)]
pub(super) struct Refused {
    line: usize,
    text: String,
    suggestion: Suggestion,
}

/// Powers of ten a double holds exactly (10^0 to 10^22).
const EXACT_POWERS_OF_TEN: [f64; 23] = [
    1e0, 1e1, 1e2, 1e3, 1e4, 1e5, 1e6, 1e7, 1e8, 1e9, 1e10, 1e11, 1e12, 1e13, 1e14, 1e15, 1e16,
    1e17, 1e18, 1e19, 1e20, 1e21, 1e22,
];
/// Largest integer below which every integer is a double (2^53).
const EXACT_INTEGER_LIMIT: u64 = 1 << 53;

/// Longest cell (sign excluded) that [`fast_decimal`] reads: its digits then form an
/// integer below 10^19, which a `u64` holds without overflow.
const FAST_DECIMAL_BYTES: usize = 19;

/// 2^52 as an `f64`: its bits with any integer below 2^52 in the low bits are 2^52 plus
/// that integer, exactly.
const TWO_52: f64 = 4_503_599_627_370_496.0;

/// `m as f64` for `m < 2^52`, exactly, by writing `m` into the mantissa of 2^52 and taking
/// 2^52 away (both steps exact). The same value as the conversion instruction, which, in
/// the typing loop, the compiler left waiting on the previous cell's division (the
/// instruction keeps the upper bits of its target register); the bit move does not.
#[inline(always)]
fn small_to_f64(m: u64) -> f64 {
    debug_assert!(m < 1 << 52);
    f64::from_bits(TWO_52.to_bits() | m) - TWO_52
}

/// Fast path for a plain decimal cell (optional sign, digits, optional point, at least one
/// digit, no exponent) whose digits form an integer `m < 2^53` with at most 22 digits after
/// the point: the value is `m / 10^d` with both operands exact, so the one division is
/// correctly rounded and equals what `f64::from_str` returns (the "fast path" of Clinger
/// 1990, "How to read floating point numbers accurately", PLDI). `None` sends the cell to
/// the general parser. Also returns the number of digits. Cells of at most 8 bytes after
/// the sign are read eight bytes at once (see [`swar::short_decimal`]).
// Inlined into the typing loops, which call it once per numeric cell.
#[inline(always)]
fn fast_decimal(cell: &[u8]) -> Option<(f64, usize)> {
    let (negative, text) = match cell {
        [b'-', rest @ ..] => (true, rest),
        [b'+', rest @ ..] => (false, rest),
        _ => (false, cell),
    };
    if let Some((m, frac, count)) = swar::short_decimal(text) {
        // m < 10^8 < 2^52, so the conversion is exact.
        let v = small_to_f64(m) / *EXACT_POWERS_OF_TEN.get(frac)?;
        return Some((if negative { -v } else { v }, count));
    }
    if text.len() > FAST_DECIMAL_BYTES {
        return None;
    }
    let mut m: u64 = 0;
    let mut rest = text;
    while let [d @ b'0'..=b'9', tail @ ..] = rest {
        m = m * 10 + u64::from(d - b'0');
        rest = tail;
    }
    let int_digits = text.len() - rest.len();
    let mut frac = 0usize;
    if let [b'.', tail @ ..] = rest {
        rest = tail;
        while let [d @ b'0'..=b'9', tail @ ..] = rest {
            m = m * 10 + u64::from(d - b'0');
            rest = tail;
            frac += 1;
        }
    }
    let count = int_digits + frac;
    if !rest.is_empty() || count == 0 || m >= EXACT_INTEGER_LIMIT {
        return None;
    }
    // m < 2^53, so the conversion is exact.
    let v = m as f64 / *EXACT_POWERS_OF_TEN.get(frac)?;
    Some((if negative { -v } else { v }, count))
}

/// Where a cell sits, for messages.
struct Place<'a> {
    line: usize,
    column: usize,
    name: &'a str,
}

fn is_missing_cell(cell: &[u8], markers: &[&[u8]]) -> bool {
    cell.is_empty() || markers.contains(&cell)
}

fn cell_text<'a>(cell: &'a [u8], at: &Place<'_>) -> Result<&'a str, LoadError> {
    std::str::from_utf8(cell).map_err(|_| LoadError::NonUtf8 {
        line: at.line,
        column: at.column,
        name: Some(at.name.to_owned()),
    })
}

/// A column of one part of the file under construction. Columns start numeric and turn text
/// at the first cell that is not a number; the cells read before that are put back later
/// (see [`refill`]).
#[derive(Debug)]
enum Builder {
    Numeric {
        values: Vec<f64>,
        refused: Option<Refused>,
        /// Whether the column needs exact residuals (see [`super::ExactValues`]).
        scan: ExactScan,
    },
    Text {
        values: TextValues,
        index: Index,
        /// Rows before this one still lack their text.
        refill_upto: usize,
    },
}

impl Builder {
    /// A numeric column with room for `rows` rows, in `values` (emptied).
    fn numeric(mut values: Vec<f64>, rows: usize) -> Self {
        values.clear();
        values.reserve(rows);
        Builder::Numeric {
            values,
            refused: None,
            scan: ExactScan::default(),
        }
    }

    /// A text column with room for `rows` rows, in `values` (emptied).
    fn text(mut values: TextValues, rows: usize) -> Self {
        values.clear(rows);
        Builder::Text {
            values,
            index: Index::default(),
            refill_upto: 0,
        }
    }

    /// Types column `j` (named `name`) of the first `limit` rows of a block; on a bad cell, its
    /// row in the block and the error.
    ///
    /// Runs of ordinary cells (plain short numbers the exact scan has nothing to learn from,
    /// in a numeric column; texts already seen, in a text column) are typed in a loop of
    /// their own, which needs no [`Place`] and no match on the column's kind per cell; any
    /// other cell goes through [`Builder::push`].
    fn push_cells(
        &mut self,
        block: &BlockCells<'_>,
        j: usize,
        limit: usize,
        markers: &[&[u8]],
        name: &str,
        decimal_comma: bool,
    ) -> Result<(), (usize, LoadError)> {
        let mut r = 0;
        let mut buf = [0u8; 24];
        // Markers are compared only when there are any.
        let marked = |cell: &[u8]| !markers.is_empty() && markers.contains(&cell);
        loop {
            match self {
                Builder::Numeric { values, scan, .. } => {
                    while r < limit {
                        let raw = trim_bytes(block.cell(r, j));
                        let cell = if decimal_comma {
                            match comma_to_point(raw, &mut buf) {
                                Some(c) => c,
                                None => break,
                            }
                        } else {
                            raw
                        };
                        let Some((v, digits)) = fast_decimal(cell) else {
                            break;
                        };
                        if scan.wants_plain(digits) || marked(raw) {
                            break;
                        }
                        values.push(v);
                        r += 1;
                    }
                }
                Builder::Text { values, index, .. } => {
                    while r < limit {
                        let (raw, quoted) = block.cell_quoted(r, j);
                        let cell = trim_bytes(raw);
                        if cell.is_empty() || marked(cell) {
                            break;
                        }
                        let Some(code) = index.find(values, text_value(raw, quoted)) else {
                            break;
                        };
                        values.push_code(code);
                        r += 1;
                    }
                }
            }
            if r >= limit {
                return Ok(());
            }
            let at = Place {
                line: block.starts.get(r).map_or(0, |s| s.line),
                column: j + 1,
                name,
            };
            let (raw, quoted) = block.cell_quoted(r, j);
            self.push(raw, quoted, markers, &at, decimal_comma)
                .map_err(|e| (r, e))?;
            r += 1;
        }
    }

    #[inline]
    fn push(
        &mut self,
        raw: &[u8],
        quoted: bool,
        markers: &[&[u8]],
        at: &Place<'_>,
        decimal_comma: bool,
    ) -> Result<(), LoadError> {
        let cell = trim_bytes(raw);
        let missing = is_missing_cell(cell, markers);
        match self {
            Builder::Numeric {
                values,
                refused,
                scan,
            } => {
                if missing {
                    values.push(f64::NAN);
                    return Ok(());
                }
                let mut buf = [0u8; 24];
                let point = if decimal_comma {
                    comma_to_point(cell, &mut buf)
                } else {
                    Some(cell)
                };
                if let Some((v, digits, c)) = point
                    .and_then(|c| Some((fast_decimal(c)?, c)))
                    .map(|((v, d), c)| (v, d, c))
                {
                    // The cell is ASCII, so the text check cannot fail; it is only needed
                    // when the exact scan can learn from the cell.
                    if scan.wants_plain(digits) {
                        scan.observe(cell_text(c, at)?);
                    }
                    values.push(v);
                    return Ok(());
                }
                let text = cell_text(cell, at)?;
                let parsed = if decimal_comma {
                    parse_decimal_comma(text)
                } else {
                    parse_trimmed(text)
                };
                match parsed {
                    NumberParse::Number(v) => {
                        if decimal_comma {
                            scan.observe(&text.replace(',', "."));
                        } else {
                            scan.observe(text);
                        }
                        values.push(v);
                    }
                    NumberParse::Suspicious(suggestion) => {
                        if refused.is_none() {
                            *refused = Some(Refused {
                                line: at.line,
                                text: text.to_owned(),
                                suggestion,
                            });
                        }
                        values.push(f64::NAN);
                    }
                    NumberParse::NotNumber => {
                        let done = values.len();
                        let mut texts = TextValues::with_capacity(values.capacity());
                        texts.push_missing(done);
                        let mut index = Index::default();
                        let code = index
                            .add(&mut texts, cell_text(text_value(raw, quoted), at)?)
                            .ok_or_else(|| too_many_texts(at))?;
                        texts.push_code(code);
                        *self = Builder::Text {
                            values: texts,
                            index,
                            refill_upto: done,
                        };
                    }
                }
            }
            Builder::Text { values, index, .. } => {
                let code = if missing {
                    TextValues::MISSING
                } else {
                    let value = text_value(raw, quoted);
                    match index.find(values, value) {
                        Some(code) => code,
                        // Only new texts are checked for UTF-8; a known one was checked
                        // when first seen.
                        None => index
                            .add(values, cell_text(value, at)?)
                            .ok_or_else(|| too_many_texts(at))?,
                    }
                };
                values.push_code(code);
            }
        }
        Ok(())
    }
}

fn too_many_texts(at: &Place<'_>) -> LoadError {
    LoadError::TooManyTexts {
        line: at.line,
        name: at.name.to_owned(),
    }
}

/// Checks and trims the header names.
fn header_names(fields: &Fields, body: &[u8], line: usize) -> Result<Vec<String>, LoadError> {
    let mut names = Vec::with_capacity(fields.len());
    for (j, raw) in fields.iter(body).enumerate() {
        let text = std::str::from_utf8(trim_bytes(raw)).map_err(|_| LoadError::NonUtf8 {
            line,
            column: j + 1,
            name: None,
        })?;
        names.push(text.to_owned());
    }
    // A column with no name is kept for now: it is left out if it turns out to hold no value
    // (a line ending with the separator), and refused if it holds one (see
    // [`unnamed_holding`]). A header that names no column at all is refused here.
    if names.iter().all(String::is_empty) {
        return Err(LoadError::EmptyColumnName {
            line,
            positions: (1..=names.len()).collect(),
        });
    }
    let mut seen: BTreeMap<&str, Vec<usize>> = BTreeMap::new();
    for (j, n) in names.iter().enumerate().filter(|(_, n)| !n.is_empty()) {
        seen.entry(n.as_str()).or_default().push(j + 1);
    }
    // Report the first name (in header order) that repeats.
    for n in &names {
        if let Some(positions) = seen.get(n.as_str()).filter(|p| p.len() > 1) {
            return Err(LoadError::DuplicateColumnName {
                line,
                name: n.clone(),
                positions: positions.clone(),
            });
        }
    }
    Ok(names)
}

/// One part of the data rows: a run of whole records.
#[derive(Debug, Clone)]
pub(super) struct Part {
    /// Byte range in the body it was cut from.
    pub(super) start: usize,
    end: usize,
    /// Line of `start`.
    pub(super) line: usize,
    /// Line breaks in the part plus one: a bound on its records.
    rows_bound: usize,
    /// Data rows before the part (known once the parts before it are merged).
    first_row: usize,
    /// Data rows in the part (known once it is read).
    n_rows: usize,
}

/// A part as read: its columns and the line of each row.
struct PartRows {
    columns: Vec<Builder>,
    lines: Vec<usize>,
    /// The part's scratch, for the next part.
    scratch: Scratch,
    /// The latest record read.
    last: Option<RecordStart>,
}

/// Buffers a part is read into, handed from part to part so that each batch of parts after
/// the first reuses the memory of the one before rather than having fresh pages mapped and
/// cleared by the kernel. Their contents are cleared before use.
#[derive(Debug, Default)]
struct Buffers {
    numbers: Vec<Vec<f64>>,
    texts: Vec<TextValues>,
    lines: Vec<usize>,
    scratch: Scratch,
}

/// A part's working space for splitting: the field spans, copied-out quoted fields and
/// record starts of one block.
#[derive(Debug, Default)]
struct Scratch {
    spans: Vec<(usize, usize)>,
    side: Vec<u8>,
    starts: Vec<RecordStart>,
}

impl Buffers {
    /// The buffers of a part that has been merged, for another part.
    fn recycle(rows: PartRows) -> Self {
        let mut b = Buffers {
            lines: rows.lines,
            scratch: rows.scratch,
            ..Buffers::default()
        };
        for c in rows.columns {
            match c {
                Builder::Numeric { values, .. } => b.numbers.push(values),
                Builder::Text { values, .. } => b.texts.push(values),
            }
        }
        b
    }
}

/// The cells of a block of records as split: row `r`'s fields are `spans[r * width..]`.
struct BlockCells<'a> {
    body: &'a [u8],
    side: &'a [u8],
    spans: &'a [(usize, usize)],
    width: usize,
    starts: &'a [RecordStart],
}

impl BlockCells<'_> {
    /// The bytes of row `r`, column `j` (empty when out of range).
    #[inline(always)]
    fn cell(&self, r: usize, j: usize) -> &[u8] {
        self.cell_quoted(r, j).0
    }

    /// The bytes of row `r`, column `j` (empty when out of range), and whether the cell was
    /// quoted.
    #[inline(always)]
    fn cell_quoted(&self, r: usize, j: usize) -> (&[u8], bool) {
        match self.spans.get(r * self.width + j) {
            Some(span) => (span_bytes(self.body, self.side, *span), span_quoted(*span)),
            None => (&[], false),
        }
    }
}

/// Why a part could not be read, and the record where that showed.
struct PartError {
    error: LoadError,
    at: RecordStart,
}

/// Records split at a time within a part before their cells are typed column by column:
/// their field spans then stay in the core's cache.
const BLOCK_ROWS: usize = 4096;

/// Reads the records of one part. Columns listed in `text` start as text (an earlier part
/// has shown them to be text), the others numeric.
///
/// Records are split a block at a time, then each column's cells of the block are typed in
/// one run. The error reported is the one reading row by row would meet first: the earliest
/// row with a bad record or cell, and in that row a bad record before a bad cell, and the
/// leftmost bad cell.
// The reader's settings travel as they are; a struct for them would only be unpacked here.
#[allow(clippy::too_many_arguments)]
fn read_part(
    body: &[u8],
    part: &Part,
    delimiter: u8,
    markers: &[&[u8]],
    names: &[String],
    text: &[bool],
    buffers: Buffers,
    decimal_comma: bool,
) -> Result<PartRows, PartError> {
    let Buffers {
        mut numbers,
        mut texts,
        mut lines,
        scratch,
    } = buffers;
    let width = names.len();
    let rows = part.rows_bound;
    let mut columns: Vec<Builder> = text
        .iter()
        .map(|&t| {
            if t {
                Builder::text(texts.pop().unwrap_or_default(), rows)
            } else {
                Builder::numeric(numbers.pop().unwrap_or_default(), rows)
            }
        })
        .collect();
    lines.clear();
    lines.reserve(rows);
    let mut split = Splitter::new(body, part.start, part.end, part.line, delimiter);
    let block_rows = BLOCK_ROWS.min(rows);
    let Scratch {
        mut spans,
        mut side,
        mut starts,
    } = scratch;
    spans.reserve(block_rows.saturating_mul(width));
    starts.reserve(block_rows);
    let mut last = None;
    loop {
        spans.clear();
        side.clear();
        starts.clear();
        // A bad record ends the part; the cells before it are still typed, since one of them
        // may be bad too (and come first).
        let mut bad_record = None;
        while starts.len() < BLOCK_ROWS {
            let before = spans.len();
            let Some(at) = split.split_record(&mut spans, &mut side) else {
                break;
            };
            last = Some(at);
            let n = spans.len() - before;
            // The record's bytes bound its fields' contents, so a short record needs no sum.
            let raw = split.pos().saturating_sub(at.offset);
            let content = if record_bound(raw, n) <= MAX_LINE_BYTES {
                raw
            } else {
                let fields = spans.get(before..).unwrap_or_default();
                fields.iter().map(|s| span_len(*s)).sum()
            };
            let checked =
                check_record_length(body, content, n, at.offset, at.line).and_then(|()| {
                    if n == width {
                        return Ok(());
                    }
                    Err(LoadError::RaggedRow {
                        line: at.line,
                        expected: width,
                        found: n,
                    })
                });
            if let Err(error) = checked {
                spans.truncate(before);
                bad_record = Some(PartError { error, at });
                break;
            }
            starts.push(at);
        }
        if starts.is_empty() && bad_record.is_none() {
            break;
        }
        // The earliest bad cell: (row in the block, error).
        let mut bad_cell: Option<(usize, LoadError)> = None;
        let block = BlockCells {
            body,
            side: &side,
            spans: &spans,
            width,
            starts: &starts,
        };
        for (j, (b, name)) in columns.iter_mut().zip(names).enumerate() {
            let limit = bad_cell.as_ref().map_or(starts.len(), |(r, _)| *r);
            if let Err(e) = b.push_cells(&block, j, limit, markers, name, decimal_comma) {
                bad_cell = Some(e);
            }
        }
        if let Some((r, error)) = bad_cell {
            let at = starts.get(r).copied().unwrap_or(RecordStart {
                offset: part.start,
                line: part.line,
            });
            return Err(PartError { error, at });
        }
        if let Some(e) = bad_record {
            return Err(e);
        }
        lines.extend(starts.iter().map(|s| s.line));
    }
    Ok(PartRows {
        columns,
        lines,
        scratch: Scratch {
            spans,
            side,
            starts,
        },
        last,
    })
}

/// A whole column, put together from the parts in file order.
pub(super) enum Merged {
    Numeric {
        values: Vec<f64>,
        refused: Option<Refused>,
        scan: ExactScan,
    },
    Text {
        values: TextValues,
        index: Index,
    },
}

/// Rows of a part whose text a text column still lacks: rows `0..rows` of part `part`, in
/// column `column`.
#[derive(Debug, Clone, Copy)]
pub(super) struct Refill {
    part: usize,
    column: usize,
    rows: usize,
}

/// Appends the texts of a part's text column to a whole text column: each distinct text of
/// the part is found or added once, then the rows' codes are translated.
fn append_texts(
    values: &mut TextValues,
    index: &mut Index,
    part: &TextValues,
    lines: &[usize],
    name: &str,
) -> Result<(), LoadError> {
    let mut map = Vec::with_capacity(part.n_texts());
    for code in 0..part.n_texts() {
        let text = u32::try_from(code)
            .ok()
            .and_then(|c| part.text_of(c))
            .unwrap_or_default();
        let global = match index.find(values, text.as_bytes()) {
            Some(g) => g,
            None => index.add(values, text).ok_or_else(|| {
                // The row where the text first occurs.
                let row = part
                    .codes()
                    .iter()
                    .position(|c| usize::try_from(*c).ok() == Some(code));
                LoadError::TooManyTexts {
                    line: row.and_then(|r| lines.get(r)).copied().unwrap_or(0),
                    name: name.to_owned(),
                }
            })?,
        };
        map.push(global);
    }
    values.extend_mapped(part.codes(), &map);
    Ok(())
}

/// Column names, whole columns, row line numbers, the parts and the rows that need their
/// text put back, as read by [`read_rows`].
struct Rows {
    names: Vec<String>,
    columns: Vec<Merged>,
    row_numbers: LinesBuilder,
    parts: Vec<Part>,
    refills: Vec<Refill>,
    /// Where the data rows start (byte offset, line).
    data: (usize, usize),
    /// Line of the header.
    header_line: usize,
}

/// Reads and checks the header record of `body`: the column names, and where the data rows
/// start (byte offset, line). `last` is set to the header's start.
pub(super) fn read_header(
    body: &[u8],
    delimiter: u8,
    last: &mut RecordStart,
) -> Result<(Vec<String>, (usize, usize)), LoadError> {
    let mut split = Splitter::new(body, 0, body.len(), 1, delimiter);
    let mut fields = Fields::default();
    let Some(header) = split.next_record(&mut fields) else {
        return Err(LoadError::Empty);
    };
    *last = header;
    check_record_length(
        body,
        fields.content_len(),
        fields.len(),
        header.offset,
        header.line,
    )?;
    let names = header_names(&fields, body, header.line)?;
    Ok((names, (split.pos(), split.line())))
}

/// The parts of `body[from..]`, whose first line is `line`: cut at record boundaries about
/// `part_bytes` apart (see [`chunk_starts`]), each with its line and a bound on its rows.
pub(super) fn parts_of(
    body: &[u8],
    from: usize,
    line: usize,
    delimiter: u8,
    part_bytes: usize,
) -> Vec<Part> {
    let starts = chunk_starts(body, from, delimiter, part_bytes);
    let ranges: Vec<(usize, usize)> = starts
        .iter()
        .zip(starts.iter().skip(1).chain([&body.len()]))
        .map(|(a, b)| (*a, *b))
        .collect();
    let breaks: Vec<usize> = crate::parallel::map(&ranges, |(a, b)| {
        count_lf(body.get(*a..*b).unwrap_or_default())
    });
    let mut parts = Vec::with_capacity(ranges.len());
    let mut line = line;
    for ((start, end), n) in ranges.into_iter().zip(breaks) {
        parts.push(Part {
            start,
            end,
            line,
            rows_bound: n + 1,
            first_row: 0,
            n_rows: 0,
        });
        line += n;
    }
    parts
}

/// Reads the header and every data row. `last` follows the start of the latest record.
///
/// The data rows are cut into parts of about `part_bytes` (at record boundaries, so that
/// the parts depend on the text alone), read in parallel a batch of [`BATCH_PARTS`] at a
/// time, and merged in file order; the result is the same for any number of threads.
fn read_rows(
    body: &[u8],
    delimiter: u8,
    markers: &[&[u8]],
    part_bytes: usize,
    last: &mut RecordStart,
    decimal_comma: bool,
) -> Result<Rows, LoadError> {
    let (names, data) = read_header(body, delimiter, last)?;
    let header_line = last.line;
    let parts = parts_of(body, data.0, data.1, delimiter, part_bytes);
    // Room for every row at once (one per line break, an upper bound), so that no column
    // grows by copying.
    let rows_bound: usize = parts.iter().map(|p| p.rows_bound).sum();
    let mut sink = Sink::new(names, rows_bound);
    sink.take(body, parts, delimiter, markers, last, decimal_comma)?;
    if sink.row_numbers.is_empty() {
        return Err(LoadError::NoDataRows { line: header_line });
    }
    let Sink {
        names,
        columns,
        row_numbers,
        parts,
        refills,
        ..
    } = sink;
    Ok(Rows {
        names,
        columns,
        row_numbers,
        parts,
        refills,
        data,
        header_line,
    })
}

/// The whole columns as parts are merged into them in file order, with what merging has
/// learned: the parts so far, the rows that need their text put back, and the buffers of
/// the batch merged last.
pub(super) struct Sink {
    pub(super) names: Vec<String>,
    pub(super) columns: Vec<Merged>,
    pub(super) row_numbers: LinesBuilder,
    /// Every part taken so far. Their byte ranges are in the body each was taken from.
    parts: Vec<Part>,
    pub(super) refills: Vec<Refill>,
    spare: Vec<Buffers>,
    /// Rows to keep room for in each column (a bound, or an estimate that may be passed).
    rows_bound: usize,
}

impl Sink {
    pub(super) fn new(names: Vec<String>, rows_bound: usize) -> Sink {
        let columns = names
            .iter()
            .map(|_| Merged::Numeric {
                values: Vec::with_capacity(rows_bound),
                refused: None,
                scan: ExactScan::default(),
            })
            .collect();
        Sink {
            names,
            columns,
            row_numbers: LinesBuilder::default(),
            parts: Vec::new(),
            refills: Vec::new(),
            spare: Vec::with_capacity(BATCH_PARTS),
            rows_bound,
        }
    }

    /// Reads `new_parts` (byte ranges of `body`) in parallel a batch of [`BATCH_PARTS`] at a
    /// time and merges them after the parts taken before. `last` follows the start of the
    /// latest record (in `body`).
    pub(super) fn take(
        &mut self,
        body: &[u8],
        new_parts: Vec<Part>,
        delimiter: u8,
        markers: &[&[u8]],
        last: &mut RecordStart,
        decimal_comma: bool,
    ) -> Result<(), LoadError> {
        let mut first = self.parts.len();
        self.parts.extend(new_parts);
        let Sink {
            names,
            columns,
            row_numbers,
            parts,
            refills,
            spare,
            rows_bound,
        } = self;
        while first < parts.len() {
            let upto = first.saturating_add(BATCH_PARTS).min(parts.len());
            let text: Vec<bool> = columns
                .iter()
                .map(|c| matches!(c, Merged::Text { .. }))
                .collect();
            let batch = parts.get(first..upto).unwrap_or_default();
            let jobs: Vec<(&Part, Mutex<Buffers>)> = batch
                .iter()
                .map(|p| (p, Mutex::new(spare.pop().unwrap_or_default())))
                .collect();
            let read: Vec<Result<PartRows, PartError>> = crate::parallel::map(&jobs, |(p, b)| {
                // The lock is never contended (one job per part); a poisoned one gives fresh
                // buffers.
                let buffers = b.lock().map(|mut b| std::mem::take(&mut *b));
                read_part(
                    body,
                    p,
                    delimiter,
                    markers,
                    names,
                    &text,
                    buffers.unwrap_or_default(),
                    decimal_comma,
                )
            });
            drop(jobs);
            // The parts read, up to the first that failed.
            let mut batch_rows: Vec<(usize, PartRows)> = Vec::with_capacity(read.len());
            let mut failed = None;
            for (k, result) in (first..upto).zip(read) {
                match result {
                    Ok(rows) => batch_rows.push((k, rows)),
                    Err(e) => {
                        failed = Some(e);
                        break;
                    }
                }
            }
            let mut done = row_numbers.len();
            for (k, rows) in &batch_rows {
                if let Some(p) = parts.get_mut(*k) {
                    p.first_row = done;
                    p.n_rows = rows.lines.len();
                }
                done += rows.lines.len();
            }
            let merged = merge_batch(
                columns,
                row_numbers,
                &mut batch_rows,
                names,
                parts,
                *rows_bound,
            );
            match merged {
                Ok(more) => refills.extend(more),
                Err((k, error)) => {
                    // The latest record read is the last of the parts up to the one that
                    // failed.
                    if let Some(at) = batch_rows
                        .iter()
                        .take_while(|(i, _)| *i <= k)
                        .filter_map(|(_, rows)| rows.last)
                        .last()
                    {
                        *last = at;
                    }
                    return Err(error);
                }
            }
            for (_, rows) in batch_rows {
                if let Some(at) = rows.last {
                    *last = at;
                }
                spare.push(Buffers::recycle(rows));
            }
            if let Some(e) = failed {
                *last = e.at;
                return Err(e.error);
            }
            first = upto;
        }
        Ok(())
    }
}

/// Rows of a batch below which its columns are merged on this thread: waking the pool costs
/// more than merging so few.
const PARALLEL_MERGE_ROWS: usize = 1 << 14;

/// Appends the columns of a batch of parts (each with its index) to the whole columns, one
/// column per task: a column's parts go in file order, and the columns are independent. The
/// parts' lines go to `row_numbers` meanwhile (unless a column fails). On failure, the
/// earliest error in (part, column) order with its part; else the rows that need their text
/// put back.
fn merge_batch(
    columns: &mut [Merged],
    row_numbers: &mut LinesBuilder,
    batch: &mut [(usize, PartRows)],
    names: &[String],
    parts: &[Part],
    rows_bound: usize,
) -> Result<Vec<Refill>, (usize, LoadError)> {
    use rayon::prelude::*;
    let n_rows: usize = batch.iter().map(|(_, rows)| rows.lines.len()).sum();
    // Column j of every part, in part order, beside each part's index and lines.
    let mut per_column: Vec<Vec<&mut Builder>> = columns.iter().map(|_| Vec::new()).collect();
    let mut lines: Vec<(usize, &[usize])> = Vec::with_capacity(batch.len());
    for (k, rows) in batch.iter_mut() {
        lines.push((*k, &rows.lines));
        for (slot, b) in per_column.iter_mut().zip(rows.columns.iter_mut()) {
            slot.push(b);
        }
    }
    let merge_one =
        |(j, ((whole, builders), name)): (usize, ((&mut Merged, Vec<&mut Builder>), &String))| {
            let mut refills = Vec::new();
            for (&(k, part_lines), b) in lines.iter().zip(builders) {
                let done = parts.get(k).map_or(0, |p| p.first_row);
                merge_column(
                    whole,
                    b,
                    part_lines,
                    name,
                    (k, j),
                    (done, rows_bound),
                    parts,
                    &mut refills,
                )
                .map_err(|e| (k, j, e))?;
            }
            Ok(refills)
        };
    let append_lines = |row_numbers: &mut LinesBuilder| {
        for (_, part_lines) in &lines {
            row_numbers.extend(part_lines);
        }
    };
    let results: Vec<Result<Vec<Refill>, (usize, usize, LoadError)>> =
        if n_rows >= PARALLEL_MERGE_ROWS {
            let (results, ()) = rayon::join(
                || {
                    columns
                        .par_iter_mut()
                        .zip(per_column.into_par_iter())
                        .zip(names.par_iter())
                        .enumerate()
                        .map(merge_one)
                        .collect()
                },
                || append_lines(row_numbers),
            );
            results
        } else {
            append_lines(row_numbers);
            columns
                .iter_mut()
                .zip(per_column)
                .zip(names)
                .enumerate()
                .map(merge_one)
                .collect()
        };
    let mut refills = Vec::new();
    let mut first_error: Option<(usize, usize, LoadError)> = None;
    for result in results {
        match result {
            Ok(r) => refills.extend(r),
            Err(e) => {
                if first_error.as_ref().is_none_or(|f| (e.0, e.1) < (f.0, f.1)) {
                    first_error = Some(e);
                }
            }
        }
    }
    match first_error {
        Some((k, _, error)) => Err((k, error)),
        None => Ok(refills),
    }
}

/// Appends column `at.1` of part `at.0` to its whole column; `rows` is (rows before the part,
/// room to keep for the column). Notes in `refills` which rows will need their text put back.
#[allow(clippy::too_many_arguments)]
fn merge_column(
    whole: &mut Merged,
    part: &mut Builder,
    lines: &[usize],
    name: &str,
    at: (usize, usize),
    rows: (usize, usize),
    parts: &[Part],
    refills: &mut Vec<Refill>,
) -> Result<(), LoadError> {
    let (k, column) = at;
    let (done, room) = rows;
    match (whole, part) {
        (
            Merged::Numeric {
                values,
                refused,
                scan,
            },
            Builder::Numeric {
                values: v,
                refused: r,
                scan: s,
            },
        ) => {
            values.extend_from_slice(v);
            if refused.is_none() {
                *refused = r.take();
            }
            scan.then(s);
        }
        (Merged::Text { values, .. }, Builder::Numeric { values: v, .. }) => {
            values.push_missing(v.len());
            if !v.is_empty() {
                refills.push(Refill {
                    part: k,
                    column,
                    rows: v.len(),
                });
            }
        }
        (
            Merged::Text { values, index },
            Builder::Text {
                values: v,
                refill_upto,
                ..
            },
        ) => {
            append_texts(values, index, v, lines, name)?;
            if *refill_upto > 0 {
                refills.push(Refill {
                    part: k,
                    column,
                    rows: *refill_upto,
                });
            }
        }
        (
            whole @ Merged::Numeric { .. },
            Builder::Text {
                values: v,
                refill_upto,
                ..
            },
        ) => {
            // The column turns text: every earlier row needs its text.
            let mut values = TextValues::with_capacity(room);
            let mut index = Index::default();
            values.push_missing(done);
            append_texts(&mut values, &mut index, v, lines, name)?;
            refills.extend(
                parts
                    .iter()
                    .enumerate()
                    .take(k)
                    .filter(|(_, p)| p.n_rows > 0)
                    .map(|(i, p)| Refill {
                        part: i,
                        column,
                        rows: p.n_rows,
                    }),
            );
            if *refill_upto > 0 {
                refills.push(Refill {
                    part: k,
                    column,
                    rows: *refill_upto,
                });
            }
            *whole = Merged::Text { values, index };
        }
    }
    Ok(())
}

/// Number of line feeds in `bytes`, eight bytes at a time: the exact zero-byte test of
/// Warren, *Hacker's Delight*, 2nd ed., section 6-1, on each word XOR a word of line feeds
/// sets the top bit of exactly the bytes that were line feeds.
pub(super) fn count_lf(bytes: &[u8]) -> usize {
    const LF: u64 = 0x0A0A_0A0A_0A0A_0A0A;
    const LOW7: u64 = 0x7F7F_7F7F_7F7F_7F7F;
    let words = bytes.chunks_exact(8);
    let tail = words.remainder().iter().filter(|b| **b == b'\n').count();
    let full: u64 = words
        .map(|w| {
            let mut word = [0u8; 8];
            word.copy_from_slice(w);
            let x = u64::from_le_bytes(word) ^ LF;
            u64::from((!(((x & LOW7).wrapping_add(LOW7)) | x | LOW7)).count_ones())
        })
        .sum();
    usize::try_from(full)
        .unwrap_or(usize::MAX)
        .saturating_add(tail)
}

/// Reads delimited text (a header row, then data rows) into typed columns.
///
/// A UTF-8 byte-order mark is skipped; cells are trimmed of spaces and tabs; empty cells and
/// declared markers are missing; blank lines are skipped. A column is numeric when every
/// non-missing cell is a plain number (see [`super::parse_number`]), an error when the only
/// other cells are number-like but refused, and text otherwise. A column with no values is
/// numeric (all missing).
///
/// Large files are read in parts on the threads of the current rayon pool (the command line
/// sizes it from `COVEY_THREADS`); the parts depend on the text alone and are put together
/// in file order, so the result does not depend on the number of threads.
///
/// ```
/// use covey::data::{read_delimited, LoadOptions, Values};
///
/// let set = read_delimited(b"y,g\n1.5,a\n2,b\n", &LoadOptions::default()).unwrap();
/// assert_eq!(set.row_numbers.to_vec(), vec![2, 3]);
/// assert!(matches!(&set.columns[0].values, Values::Numeric(v) if **v == [1.5, 2.0]));
/// ```
pub fn read_delimited(bytes: &[u8], opts: &LoadOptions) -> Result<DataSet, LoadError> {
    read_in_parts(bytes, opts, PART_BYTES)
}

/// [`read_delimited`] with parts of about `part_bytes` bytes.
pub(super) fn read_in_parts(
    bytes: &[u8],
    opts: &LoadOptions,
    part_bytes: usize,
) -> Result<DataSet, LoadError> {
    let delimiter = opts.delimiter;
    if delimiter == b'"' || is_break(delimiter) || !delimiter.is_ascii() {
        return Err(LoadError::BadDelimiter { delimiter });
    }
    if bytes.starts_with(&[0xFF, 0xFE]) || bytes.starts_with(&[0xFE, 0xFF]) {
        return Err(LoadError::Utf16Bom);
    }
    let body = bytes.strip_prefix(UTF8_BOM).unwrap_or(bytes);
    if body.iter().all(|b| b.is_ascii_whitespace()) {
        return Err(LoadError::Empty);
    }
    check_nul(body)?;
    let markers = marker_bytes(opts);

    // Where the latest record starts, for the open-quote check.
    let mut last = RecordStart { offset: 0, line: 1 };
    let rows = read_rows(
        body,
        delimiter,
        &markers,
        part_bytes,
        &mut last,
        opts.decimal_comma,
    );
    // A quote left open at the end of the file explains any other complaint about its record
    // (wrong field count, for one), so it is reported first.
    let tail = body.get(last.offset..).unwrap_or_default();
    if memchr::memchr(b'"', tail).is_some() {
        check_open_quote(tail, last.line, delimiter)?;
    }
    let Rows {
        names,
        mut columns,
        row_numbers,
        parts,
        refills,
        data,
        header_line,
    } = rows?;

    // A column the header leaves unnamed that holds a value is the error to report: its
    // values (refused ones included) are not what the user meant to load.
    let held = unnamed_holding(&names, &columns);
    if held.is_empty() {
        if let Some(e) = refused_error(&columns, &names) {
            return Err(e);
        }
    }

    refill(body, delimiter, &markers, &mut columns, &parts, &refills);
    if !held.is_empty() {
        return Err(unnamed_error(header_line, &held, &columns, &row_numbers));
    }
    let offsets: Vec<Option<i64>> = columns
        .iter()
        .map(|c| match c {
            Merged::Numeric { scan, .. } => scan.wanted(),
            Merged::Text { .. } => None,
        })
        .collect();
    let mut exact = exact_pass(
        body,
        data,
        (delimiter, opts.decimal_comma),
        &markers,
        &offsets,
        row_numbers.len(),
    );

    let mut columns = finish_columns(names, columns);
    for (c, e) in columns.iter_mut().zip(exact.iter_mut()) {
        c.exact = e.take();
    }
    // What is left unnamed holds no value: a separator at the end of every line, say.
    columns.retain(|c| !c.name.is_empty());
    Ok(DataSet {
        name: opts.name.clone(),
        columns,
        row_numbers: row_numbers.finish(),
        rows_are: super::RowOrigin::FileLines,
        label: None,
    })
}

/// The declared missing-value markers, trimmed, as bytes (empty ones dropped).
pub(super) fn marker_bytes(opts: &LoadOptions) -> Vec<&[u8]> {
    opts.missing
        .iter()
        .map(|m| trim_bytes(m.as_bytes()))
        .filter(|m| !m.is_empty())
        .collect()
}

/// The error for a numeric column holding refused number-like cells: the earliest such cell.
pub(super) fn refused_error(columns: &[Merged], names: &[String]) -> Option<LoadError> {
    let (line, j, r) = columns
        .iter()
        .enumerate()
        .filter_map(|(j, c)| match c {
            Merged::Numeric {
                refused: Some(r), ..
            } => Some((r.line, j, r)),
            _ => None,
        })
        .min_by_key(|(line, j, _)| (*line, *j))?;
    Some(LoadError::RefusedNumber {
        line,
        column: j + 1,
        name: names.get(j).cloned().unwrap_or_default(),
        text: r.text.clone(),
        suggestion: r.suggestion,
    })
}

/// The 0-based positions of the columns the header leaves unnamed that hold a value (a
/// number, a text, or a refused number-like cell).
pub(super) fn unnamed_holding(names: &[String], columns: &[Merged]) -> Vec<usize> {
    names
        .iter()
        .zip(columns)
        .enumerate()
        .filter(|(_, (n, c))| {
            n.is_empty()
                && match c {
                    Merged::Numeric {
                        values, refused, ..
                    } => refused.is_some() || values.iter().any(|v| !v.is_nan()),
                    // A column turns text only at a cell that is a text.
                    Merged::Text { .. } => true,
                }
        })
        .map(|(j, _)| j)
        .collect()
}

/// The error for the unnamed columns `held` (see [`unnamed_holding`]) that hold values,
/// naming the earliest value in them. Text columns must have been refilled.
fn unnamed_error(
    header: usize,
    held: &[usize],
    columns: &[Merged],
    row_numbers: &LinesBuilder,
) -> LoadError {
    let line_of = |r: usize| row_numbers.get(r).unwrap_or(header + r + 1);
    let first = held
        .iter()
        .filter_map(|&j| {
            let (line, text) = match columns.get(j)? {
                Merged::Numeric {
                    values, refused, ..
                } => {
                    let number = values
                        .iter()
                        .enumerate()
                        .find(|(_, v)| !v.is_nan())
                        .map(|(r, v)| (line_of(r), super::format_number(*v)));
                    let refused = refused.as_ref().map(|r| (r.line, r.text.clone()));
                    match (number, refused) {
                        (Some(a), Some(b)) => Some(if b.0 < a.0 { b } else { a }),
                        (a, b) => a.or(b),
                    }?
                }
                Merged::Text { values, .. } => values
                    .iter()
                    .enumerate()
                    .find_map(|(r, t)| t.map(|t| (line_of(r), t.to_owned())))?,
            };
            Some((line, j, text))
        })
        .min_by_key(|(line, j, _)| (*line, *j));
    let (line, j, text) =
        first.unwrap_or((header, held.first().copied().unwrap_or(0), String::new()));
    LoadError::UnnamedColumnHolds {
        header,
        positions: held.iter().map(|j| j + 1).collect(),
        line,
        column: j + 1,
        text,
    }
}

/// The 1-based positions of the columns that the header of delimited text `bytes` leaves
/// unnamed: after a load that succeeded, the columns it left out as holding no value.
pub fn unnamed_columns(bytes: &[u8], delimiter: u8) -> Vec<usize> {
    let body = bytes.strip_prefix(UTF8_BOM).unwrap_or(bytes);
    let mut last = RecordStart { offset: 0, line: 1 };
    match read_header(body, delimiter, &mut last) {
        Ok((names, _)) => names
            .iter()
            .enumerate()
            .filter(|(_, n)| n.is_empty())
            .map(|(j, _)| j + 1)
            .collect(),
        Err(_) => Vec::new(),
    }
}

/// True when some numeric column asks for exact residuals (see [`exact_pass`]).
pub(super) fn wants_exact(columns: &[Merged]) -> bool {
    columns
        .iter()
        .any(|c| matches!(c, Merged::Numeric { scan, .. } if scan.wanted().is_some()))
}

/// The named whole columns as a data set's columns (without exact residuals).
pub(super) fn finish_columns(names: Vec<String>, columns: Vec<Merged>) -> Vec<Column> {
    let finish = |(name, c): (String, Merged)| Column {
        name,
        values: match c {
            // Shared as it is with the models that use it: no copy.
            Merged::Numeric { values, .. } => Values::Numeric(values.into()),
            Merged::Text { mut values, .. } => {
                values.shrink_to_fit();
                Values::Text(values)
            }
        },
        exact: None,
    };
    names.into_iter().zip(columns).map(finish).collect()
}

/// Puts back the cell text of the rows that were read as numbers in a column that turned
/// out to be text (`refills`), part by part, reading each part only as far as needed.
fn refill(
    body: &[u8],
    delimiter: u8,
    markers: &[&[u8]],
    columns: &mut [Merged],
    parts: &[Part],
    refills: &[Refill],
) {
    // Part -> (column, rows), in part order.
    let mut by_part: BTreeMap<usize, Vec<(usize, usize)>> = BTreeMap::new();
    for r in refills {
        by_part.entry(r.part).or_default().push((r.column, r.rows));
    }
    let mut fields = Fields::default();
    for (k, wanted) in by_part {
        let Some(part) = parts.get(k) else {
            continue;
        };
        let upto = wanted.iter().map(|(_, rows)| *rows).max().unwrap_or(0);
        let mut split = Splitter::new(body, part.start, part.end, part.line, delimiter);
        for row in 0..upto {
            if split.next_record(&mut fields).is_none() {
                break;
            }
            for &(j, rows) in &wanted {
                let Some(Merged::Text { values, index }) = columns.get_mut(j) else {
                    continue;
                };
                if row >= rows {
                    continue;
                }
                let (raw, quoted) = fields.get_quoted(body, j);
                if is_missing_cell(trim_bytes(raw), markers) {
                    continue;
                }
                let value = text_value(raw, quoted);
                let code = match index.find(values, value) {
                    Some(code) => Some(code),
                    None => std::str::from_utf8(value)
                        .ok()
                        .and_then(|text| index.add(values, text)),
                };
                if let Some(code) = code {
                    values.set(part.first_row + row, code);
                }
            }
        }
    }
}

/// Third pass, only for columns whose first pass asked for an exact offset (`offsets[j]`):
/// each cell minus the offset by exact decimal subtraction (see [`super::ExactValues`]).
/// A column whose cells cannot all be done (which the first pass rules out) gets none.
/// `data` is where the data rows start (byte offset, line).
fn exact_pass(
    body: &[u8],
    data: (usize, usize),
    (delimiter, decimal_comma): (u8, bool),
    markers: &[&[u8]],
    offsets: &[Option<i64>],
    n_rows: usize,
) -> Vec<Option<Box<ExactValues>>> {
    if offsets.iter().all(Option::is_none) {
        return Vec::new();
    }
    let mut residuals: Vec<Option<Vec<f64>>> = offsets
        .iter()
        .map(|o| o.map(|_| Vec::with_capacity(n_rows)))
        .collect();
    let mut split = Splitter::new(body, data.0, body.len(), data.1, delimiter);
    let mut fields = Fields::default();
    for _ in 0..n_rows {
        if split.next_record(&mut fields).is_none() {
            break;
        }
        for ((raw, slot), offset) in fields.iter(body).zip(residuals.iter_mut()).zip(offsets) {
            let (Some(res), Some(offset)) = (slot.as_mut(), offset) else {
                continue;
            };
            let cell = trim_bytes(raw);
            let r = if is_missing_cell(cell, markers) {
                Some(f64::NAN)
            } else {
                std::str::from_utf8(cell).ok().and_then(|t| {
                    if decimal_comma {
                        exact::residual(&t.replace(',', "."), *offset)
                    } else {
                        exact::residual(t, *offset)
                    }
                })
            };
            match r {
                Some(r) => res.push(r),
                None => *slot = None,
            }
        }
    }
    residuals
        .into_iter()
        .zip(offsets)
        .map(|(r, o)| match (r, o) {
            (Some(residuals), Some(o)) if residuals.len() == n_rows => {
                // |o| < 2^53, so the conversion is exact.
                Some(Box::new(ExactValues {
                    offset: *o as f64,
                    residuals,
                }))
            }
            _ => None,
        })
        .collect()
}

#[cfg(test)]
mod tests {
    use proptest::prelude::*;

    use super::small_to_f64;

    #[test]
    fn small_to_f64_at_the_ends() {
        for m in [0, 1, 2, 99_999_999, (1 << 52) - 1, (1 << 52) - 2, 1 << 51] {
            assert_eq!(small_to_f64(m).to_bits(), (m as f64).to_bits(), "{m}");
        }
    }

    proptest! {
        #[test]
        fn small_to_f64_is_the_conversion(m in 0u64..(1 << 52)) {
            prop_assert_eq!(small_to_f64(m).to_bits(), (m as f64).to_bits());
        }
    }
}
