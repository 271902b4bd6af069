//! The loader as it was before it was rewritten for speed (on the csv crate's reader, one row
//! at a time), kept for tests only: the new loader must give the same data sets and the same
//! errors on any input (see `load_tests`).

use std::collections::{BTreeMap, HashMap};

use csv::{ByteRecord, ReaderBuilder};

use super::error::LoadError;
use super::exact::{self, ExactScan};
use super::number::{parse_trimmed, NumberParse, Suggestion};
use super::split::{quoting, Quoting};
use super::{Column, DataSet, ExactValues, LoadOptions, TextValues, Values};

/// The text column of the old loader: distinct texts and row codes.
#[derive(Debug, Default)]
struct RefText {
    texts: Vec<String>,
    codes: Vec<u32>,
}

impl RefText {
    fn with_capacity(rows: usize) -> Self {
        RefText {
            texts: Vec::new(),
            codes: Vec::with_capacity(rows),
        }
    }
    fn push_code(&mut self, code: u32) {
        self.codes.push(code);
    }
    fn add_text(&mut self, text: String) -> Option<u32> {
        let code = u32::try_from(self.texts.len())
            .ok()
            .filter(|c| *c != TextValues::MISSING)?;
        self.texts.push(text);
        Some(code)
    }
    fn set(&mut self, row: usize, code: u32) {
        if let Some(slot) = self.codes.get_mut(row) {
            *slot = code;
        }
    }
    fn finish(self) -> TextValues {
        let texts = self.texts;
        let cells: Vec<Option<String>> = self
            .codes
            .iter()
            .map(|c| usize::try_from(*c).ok().and_then(|c| texts.get(c)).cloned())
            .collect();
        cells.into()
    }
}

use super::MAX_LINE_BYTES;

const UTF8_BOM: &[u8] = b"\xEF\xBB\xBF";

/// Trims spaces and tabs from both ends of a cell.
fn trim_bytes(mut b: &[u8]) -> &[u8] {
    while let [b' ' | b'\t', rest @ ..] = b {
        b = rest;
    }
    while let [rest @ .., b' ' | b'\t'] = b {
        b = rest;
    }
    b
}

fn is_break(b: u8) -> bool {
    b == b'\n' || b == b'\r'
}

/// Refuses NUL bytes (a byte search at memchr speed; the line is worked out only on a find).
fn check_nul(body: &[u8]) -> Result<(), LoadError> {
    if body.contains(&0) {
        let at = body.iter().position(|b| *b == 0).unwrap_or(0);
        let line = 1 + body
            .get(..at)
            .map_or(0, |s| s.iter().filter(|b| **b == b'\n').count());
        return Err(LoadError::NulByte { line });
    }
    Ok(())
}

/// Refuses a record whose text may hold a line longer than [`MAX_LINE_BYTES`].
///
/// A record's raw text is at most twice its unquoted content (escaped quotes) plus three bytes
/// per field (two quotes and a delimiter) plus a CR LF; only when that bound exceeds the limit
/// are the raw bytes from `start` split into lines and measured, so normal files pay nothing.
fn check_record_length(
    body: &[u8],
    record: &ByteRecord,
    start: usize,
    first_line: usize,
) -> Result<(), LoadError> {
    let bound = record
        .as_slice()
        .len()
        .saturating_mul(2)
        .saturating_add(record.len().saturating_mul(3))
        .saturating_add(2);
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
fn check_open_quote(tail: &[u8], first_line: usize, delimiter: u8) -> Result<(), LoadError> {
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
struct Refused {
    line: usize,
    text: String,
    suggestion: Suggestion,
}

/// A column under construction. Columns start numeric and turn text at the first cell that is
/// not a number; the rows read before that are filled in by a second, partial pass.
#[derive(Debug)]
enum Builder {
    Numeric {
        values: Vec<f64>,
        refused: Option<Refused>,
        /// Whether the column needs exact residuals (see [`super::ExactValues`]).
        scan: ExactScan,
    },
    Text {
        values: RefText,
        /// Code of each distinct cell text seen so far (looked up, never iterated).
        seen: HashMap<Vec<u8>, u32, FnvBuild>,
        refill_upto: usize,
    },
}

/// The 64-bit FNV-1a hash (Fowler, Noll & Vo; as specified in the IETF draft
/// draft-eastlake-fnv): much cheaper than the standard library's keyed hash for the short cell
/// texts of a text column. The map it serves is only looked up, never iterated, so the hash
/// cannot reach any output.
#[derive(Default, Clone, Copy)]
struct Fnv(u64);

/// FNV-1a offset basis and prime for 64 bits.
const FNV_OFFSET: u64 = 0xcbf2_9ce4_8422_2325;
const FNV_PRIME: u64 = 0x0000_0100_0000_01b3;

impl std::hash::Hasher for Fnv {
    fn finish(&self) -> u64 {
        self.0
    }
    fn write(&mut self, bytes: &[u8]) {
        for &b in bytes {
            self.0 = (self.0 ^ u64::from(b)).wrapping_mul(FNV_PRIME);
        }
    }
}

/// Builds [`Fnv`] hashers.
#[derive(Default, Clone, Copy)]
struct FnvBuild;

impl std::hash::BuildHasher for FnvBuild {
    type Hasher = Fnv;
    fn build_hasher(&self) -> Fnv {
        Fnv(FNV_OFFSET)
    }
}

/// Text columns with at most this many distinct texts are looked up by comparing with each
/// (cheaper than hashing for a factor's few levels); beyond, by the hash map.
const LINEAR_LOOKUP_TEXTS: usize = 8;

/// Powers of ten a double holds exactly (10^0 to 10^22).
const EXACT_POWERS_OF_TEN: [f64; 23] = [
    1e0, 1e1, 1e2, 1e3, 1e4, 1e5, 1e6, 1e7, 1e8, 1e9, 1e10, 1e11, 1e12, 1e13, 1e14, 1e15, 1e16,
    1e17, 1e18, 1e19, 1e20, 1e21, 1e22,
];
/// Largest integer below which every integer is a double (2^53).
const EXACT_INTEGER_LIMIT: u64 = 1 << 53;

/// Fast path for a plain decimal cell (optional sign, digits, optional point, at least one
/// digit, no exponent) whose digits form an integer `m < 2^53` with at most 22 digits after
/// the point: the value is `m / 10^d` with both operands exact, so the one division is
/// correctly rounded and equals what `f64::from_str` returns (the "fast path" of Clinger
/// 1990, "How to read floating point numbers accurately", PLDI). `None` sends the cell to
/// the general parser. Also returns the number of digits.
fn fast_decimal(cell: &[u8]) -> Option<(f64, usize)> {
    let (negative, digits) = match cell {
        [b'-', rest @ ..] => (true, rest),
        [b'+', rest @ ..] => (false, rest),
        _ => (false, cell),
    };
    let mut m: u64 = 0;
    let mut seen_digit = false;
    let mut point = false;
    let mut frac = 0usize;
    let mut count = 0usize;
    for &b in digits {
        if b.is_ascii_digit() {
            count += 1;
            m = m * 10 + u64::from(b - b'0');
            if m >= EXACT_INTEGER_LIMIT {
                return None;
            }
            seen_digit = true;
            if point {
                frac += 1;
            }
        } else if b == b'.' && !point {
            point = true;
        } else {
            return None;
        }
    }
    if !seen_digit {
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

/// How each field of `record` was written (see [`super::split::quoting`]), from the text of
/// `body` where the record starts.
fn record_quoting(body: &[u8], record: &ByteRecord, delimiter: u8) -> Vec<Quoting> {
    let start = record
        .position()
        .and_then(|p| usize::try_from(p.byte()).ok())
        .unwrap_or(usize::MAX);
    // The reader may place a record just after a CR, at the LF that ends the line; line breaks
    // never begin a record.
    match body.get(start..) {
        Some(raw) => {
            let skip = raw
                .iter()
                .take_while(|b| matches!(b, b'\r' | b'\n'))
                .count();
            quoting(raw.get(skip..).unwrap_or_default(), delimiter)
        }
        None => Vec::new(),
    }
}

/// A field as a text value: a quoted one as written between its quotes, any other trimmed.
fn text_value<'a>(raw: &'a [u8], quoting: Option<&Quoting>) -> &'a [u8] {
    match quoting {
        Some(q) if q.quoted => raw
            .get(..raw.len().saturating_sub(q.trailing))
            .unwrap_or(raw),
        _ => trim_bytes(raw),
    }
}

impl Builder {
    fn push(
        &mut self,
        raw: &[u8],
        value: &[u8],
        markers: &[&[u8]],
        at: &Place<'_>,
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
                if let Some((v, digits)) = fast_decimal(cell) {
                    // The cell is ASCII, so the text check cannot fail; it is only needed
                    // when the exact scan can learn from the cell.
                    if scan.wants_plain(digits) {
                        scan.observe(cell_text(cell, at)?);
                    }
                    values.push(v);
                    return Ok(());
                }
                let text = cell_text(cell, at)?;
                match parse_trimmed(text) {
                    NumberParse::Number(v) => {
                        scan.observe(text);
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
                        let mut texts = RefText::with_capacity(values.capacity());
                        for _ in 0..done {
                            texts.push_code(TextValues::MISSING);
                        }
                        let mut seen = HashMap::with_hasher(FnvBuild);
                        let code = texts
                            .add_text(cell_text(value, at)?.to_owned())
                            .ok_or_else(|| LoadError::TooManyTexts {
                                line: at.line,
                                name: at.name.to_owned(),
                            })?;
                        seen.insert(value.to_vec(), code);
                        texts.push_code(code);
                        *self = Builder::Text {
                            values: texts,
                            seen,
                            refill_upto: done,
                        };
                    }
                }
            }
            Builder::Text { values, seen, .. } => {
                let code = if missing {
                    TextValues::MISSING
                } else {
                    intern(values, seen, value, at)?
                };
                values.push_code(code);
            }
        }
        Ok(())
    }
}

/// The code of a cell's text in a text column, adding the text when it is new (only new
/// texts are checked for UTF-8; a known one was checked when first seen).
fn intern(
    values: &mut RefText,
    seen: &mut HashMap<Vec<u8>, u32, FnvBuild>,
    cell: &[u8],
    at: &Place<'_>,
) -> Result<u32, LoadError> {
    if values.texts.len() <= LINEAR_LOOKUP_TEXTS {
        // A few distinct texts (a factor's levels): comparing beats hashing.
        if let Some(code) = values.texts.iter().position(|t| t.as_bytes() == cell) {
            return u32::try_from(code).map_err(|_| LoadError::TooManyTexts {
                line: at.line,
                name: at.name.to_owned(),
            });
        }
    } else if let Some(code) = seen.get(cell) {
        return Ok(*code);
    }
    let text = cell_text(cell, at)?;
    let code = values
        .add_text(text.to_owned())
        .ok_or_else(|| LoadError::TooManyTexts {
            line: at.line,
            name: at.name.to_owned(),
        })?;
    seen.insert(cell.to_vec(), code);
    Ok(code)
}

/// Turns the byte offsets where records start into 1-based line numbers.
///
/// The csv reader's own line count lags behind after a CR LF pair (the LF is consumed as the
/// start of the next record), so lines are counted here from the byte offsets, which are
/// exact. Offsets only grow, so each byte is counted once.
struct LineCounter<'a> {
    body: &'a [u8],
    pos: usize,
    line: usize,
}

impl<'a> LineCounter<'a> {
    fn new(body: &'a [u8]) -> Self {
        LineCounter {
            body,
            pos: 0,
            line: 1,
        }
    }

    /// The line of the first byte at or after `offset` that is not a line break (the reader
    /// skips line breaks before a record).
    fn line_at(&mut self, offset: u64) -> usize {
        let mut start = usize::try_from(offset)
            .unwrap_or(usize::MAX)
            .min(self.body.len());
        while self.body.get(start).is_some_and(|b| is_break(*b)) {
            start += 1;
        }
        if start < self.pos {
            self.pos = 0;
            self.line = 1;
        }
        let newlines = self
            .body
            .get(self.pos..start)
            .map_or(0, |s| s.iter().filter(|b| **b == b'\n').count());
        self.line += newlines;
        self.pos = start;
        self.line
    }

    /// The line of a record.
    fn record_line(&mut self, record: &ByteRecord) -> usize {
        match record.position() {
            Some(p) => self.line_at(p.byte()),
            None => self.line,
        }
    }
}

fn reader(body: &[u8], delimiter: u8) -> csv::Reader<&[u8]> {
    ReaderBuilder::new()
        .has_headers(false)
        .flexible(true)
        .delimiter(delimiter)
        .from_reader(body)
}

fn read_record(
    rdr: &mut csv::Reader<&[u8]>,
    record: &mut ByteRecord,
    lines: &mut LineCounter<'_>,
) -> Result<bool, LoadError> {
    rdr.read_byte_record(record)
        .map_err(|e| LoadError::Malformed {
            line: match e.position() {
                Some(p) => lines.line_at(p.byte()),
                None => lines.line,
            },
        })
}

/// Checks and trims the header names.
fn header_names(record: &ByteRecord, line: usize) -> Result<Vec<String>, LoadError> {
    let mut names = Vec::with_capacity(record.len());
    for (j, raw) in record.iter().enumerate() {
        let text = std::str::from_utf8(trim_bytes(raw)).map_err(|_| LoadError::NonUtf8 {
            line,
            column: j + 1,
            name: None,
        })?;
        names.push(text.to_owned());
    }
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

/// Column names, column builders, row line numbers and the header's line, as read by
/// [`read_rows`].
type Rows = (Vec<String>, Vec<Builder>, Vec<usize>, usize);

/// Reads the header and every data row. `last` follows the start of the latest record.
fn read_rows(
    body: &[u8],
    delimiter: u8,
    markers: &[&[u8]],
    last: &mut (usize, usize),
) -> Result<Rows, LoadError> {
    let mut rdr = reader(body, delimiter);
    let mut record = ByteRecord::new();
    let mut lines = LineCounter::new(body);
    if !read_record(&mut rdr, &mut record, &mut lines)? {
        return Err(LoadError::Empty);
    }
    let header_line = lines.record_line(&record);
    *last = (lines.pos, header_line);
    check_record_length(body, &record, lines.pos, header_line)?;
    let names = header_names(&record, header_line)?;
    let width = names.len();
    // Room for every row at once (one per line break, an upper bound), so that no column
    // grows by copying.
    let rows_bound = body.iter().filter(|b| **b == b'\n').count() + 1;
    let mut builders: Vec<Builder> = names
        .iter()
        .map(|_| Builder::Numeric {
            values: Vec::with_capacity(rows_bound),
            refused: None,
            scan: ExactScan::default(),
        })
        .collect();

    let mut row_numbers: Vec<usize> = Vec::with_capacity(rows_bound);
    while read_record(&mut rdr, &mut record, &mut lines)? {
        let line = lines.record_line(&record);
        *last = (lines.pos, line);
        check_record_length(body, &record, lines.pos, line)?;
        if record.len() != width {
            return Err(LoadError::RaggedRow {
                line,
                expected: width,
                found: record.len(),
            });
        }
        let quoting = record_quoting(body, &record, delimiter);
        for (j, ((raw, b), name)) in record.iter().zip(&mut builders).zip(&names).enumerate() {
            let at = Place {
                line,
                column: j + 1,
                name,
            };
            b.push(raw, text_value(raw, quoting.get(j)), markers, &at)?;
        }
        row_numbers.push(line);
    }
    if row_numbers.is_empty() {
        return Err(LoadError::NoDataRows { line: header_line });
    }

    Ok((names, builders, row_numbers, header_line))
}

/// Reads delimited text (a header row, then data rows) into typed columns.
///
/// A UTF-8 byte-order mark is skipped; cells are trimmed of spaces and tabs; empty cells and
/// declared markers are missing; blank lines are skipped. A column is numeric when every
/// non-missing cell is a plain number (see [`super::parse_number`]), an error when the only
/// other cells are number-like but refused, and text otherwise. A column with no values is
/// numeric (all missing).
pub(super) fn read_delimited(bytes: &[u8], opts: &LoadOptions) -> Result<DataSet, LoadError> {
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
    let markers: Vec<&[u8]> = opts
        .missing
        .iter()
        .map(|m| trim_bytes(m.as_bytes()))
        .filter(|m| !m.is_empty())
        .collect();

    // Where the latest record starts (byte offset, line), for the open-quote check.
    let mut last = (0usize, 1usize);
    let rows = read_rows(body, delimiter, &markers, &mut last);
    // A quote left open at the end of the file explains any other complaint about its record
    // (wrong field count, for one), so it is reported first.
    check_open_quote(body.get(last.0..).unwrap_or_default(), last.1, delimiter)?;
    let (names, mut builders, row_numbers, header_line) = rows?;

    // An unnamed column that holds a value comes first (see `load::unnamed_holding`).
    let held: Vec<usize> = names
        .iter()
        .zip(&builders)
        .enumerate()
        .filter(|(_, (n, b))| {
            n.is_empty()
                && match b {
                    Builder::Numeric {
                        values, refused, ..
                    } => refused.is_some() || values.iter().any(|v| !v.is_nan()),
                    Builder::Text { .. } => true,
                }
        })
        .map(|(j, _)| j)
        .collect();
    if !held.is_empty() {
        refill(body, delimiter, &markers, &mut builders)?;
        let mut first: Option<(usize, usize, String)> = None;
        for (j, b) in builders.into_iter().enumerate() {
            if !held.contains(&j) {
                continue;
            }
            let mut found: Vec<(usize, String)> = Vec::new();
            match b {
                Builder::Numeric {
                    values, refused, ..
                } => {
                    if let Some((r, v)) = values.iter().enumerate().find(|(_, v)| !v.is_nan()) {
                        found.push((row_numbers[r], super::format_number(*v)));
                    }
                    if let Some(r) = refused {
                        found.push((r.line, r.text));
                    }
                }
                Builder::Text { values, .. } => {
                    let values = values.finish();
                    let first = values
                        .iter()
                        .enumerate()
                        .find_map(|(r, t)| t.map(|t| (r, t.to_owned())));
                    if let Some((r, t)) = first {
                        found.push((row_numbers[r], t));
                    }
                }
            }
            for (line, text) in found {
                if first.as_ref().is_none_or(|f| (line, j) < (f.0, f.1)) {
                    first = Some((line, j, text));
                }
            }
        }
        let (line, column, text) = first.unwrap_or_default();
        return Err(LoadError::UnnamedColumnHolds {
            header: header_line,
            positions: held.iter().map(|j| j + 1).collect(),
            line,
            column: column + 1,
            text,
        });
    }

    // A numeric column holding refused number-like cells: report the earliest such cell.
    let refused = builders
        .iter()
        .enumerate()
        .filter_map(|(j, b)| match b {
            Builder::Numeric {
                refused: Some(r), ..
            } => Some((r.line, j, r)),
            _ => None,
        })
        .min_by_key(|(line, j, _)| (*line, *j));
    if let Some((line, j, r)) = refused {
        return Err(LoadError::RefusedNumber {
            line,
            column: j + 1,
            name: names.get(j).cloned().unwrap_or_default(),
            text: r.text.clone(),
            suggestion: r.suggestion,
        });
    }

    refill(body, delimiter, &markers, &mut builders)?;
    let offsets: Vec<Option<i64>> = builders
        .iter()
        .map(|b| match b {
            Builder::Numeric { scan, .. } => scan.wanted(),
            Builder::Text { .. } => None,
        })
        .collect();
    let mut exact = exact_pass(body, delimiter, &markers, &offsets, row_numbers.len())?;

    let columns = names
        .into_iter()
        .zip(builders)
        .enumerate()
        .map(|(j, (name, b))| Column {
            name,
            values: match b {
                Builder::Numeric { values, .. } => Values::Numeric(values.into()),
                Builder::Text { values, .. } => Values::Text(values.finish()),
            },
            exact: exact.get_mut(j).and_then(Option::take),
        })
        // What is left unnamed holds no value.
        .filter(|c| !c.name.is_empty())
        .collect();
    Ok(DataSet {
        name: opts.name.clone(),
        columns,
        row_numbers: row_numbers.as_slice().into(),
        rows_are: super::RowOrigin::FileLines,
        label: None,
    })
}

/// Second pass for columns that turned text after some numeric rows: puts the original cell
/// text of those rows back. Reads only as many rows as the latest switch needs.
fn refill(
    body: &[u8],
    delimiter: u8,
    markers: &[&[u8]],
    builders: &mut [Builder],
) -> Result<(), LoadError> {
    let upto = builders
        .iter()
        .map(|b| match b {
            Builder::Text { refill_upto, .. } => *refill_upto,
            Builder::Numeric { .. } => 0,
        })
        .max()
        .unwrap_or(0);
    if upto == 0 {
        return Ok(());
    }
    let mut rdr = reader(body, delimiter);
    let mut record = ByteRecord::new();
    let mut lines = LineCounter::new(body);
    // Skip the header.
    if !read_record(&mut rdr, &mut record, &mut lines)? {
        return Ok(());
    }
    for row in 0..upto {
        if !read_record(&mut rdr, &mut record, &mut lines)? {
            break;
        }
        let quoting = record_quoting(body, &record, delimiter);
        for (j, (raw, b)) in record.iter().zip(builders.iter_mut()).enumerate() {
            let Builder::Text {
                values,
                seen,
                refill_upto,
            } = b
            else {
                continue;
            };
            if row >= *refill_upto {
                continue;
            }
            if is_missing_cell(trim_bytes(raw), markers) {
                continue;
            }
            let cell = text_value(raw, quoting.get(j));
            if let Some(code) = seen.get(cell) {
                values.set(row, *code);
            } else if let Ok(text) = std::str::from_utf8(cell) {
                if let Some(code) = values.add_text(text.to_owned()) {
                    seen.insert(cell.to_vec(), code);
                    values.set(row, code);
                }
            }
        }
    }
    Ok(())
}

/// Third pass, only for columns whose first pass asked for an exact offset (`offsets[j]`):
/// each cell minus the offset by exact decimal subtraction (see [`super::ExactValues`]).
/// A column whose cells cannot all be done (which the first pass rules out) gets none.
fn exact_pass(
    body: &[u8],
    delimiter: u8,
    markers: &[&[u8]],
    offsets: &[Option<i64>],
    n_rows: usize,
) -> Result<Vec<Option<Box<ExactValues>>>, LoadError> {
    if offsets.iter().all(Option::is_none) {
        return Ok(Vec::new());
    }
    let mut residuals: Vec<Option<Vec<f64>>> = offsets
        .iter()
        .map(|o| o.map(|_| Vec::with_capacity(n_rows)))
        .collect();
    let mut rdr = reader(body, delimiter);
    let mut record = ByteRecord::new();
    let mut lines = LineCounter::new(body);
    // Skip the header.
    if read_record(&mut rdr, &mut record, &mut lines)? {
        for _ in 0..n_rows {
            if !read_record(&mut rdr, &mut record, &mut lines)? {
                break;
            }
            for ((raw, slot), offset) in record.iter().zip(residuals.iter_mut()).zip(offsets) {
                let (Some(res), Some(offset)) = (slot.as_mut(), offset) else {
                    continue;
                };
                let cell = trim_bytes(raw);
                let r = if is_missing_cell(cell, markers) {
                    Some(f64::NAN)
                } else {
                    std::str::from_utf8(cell)
                        .ok()
                        .and_then(|t| exact::residual(t, *offset))
                };
                match r {
                    Some(r) => res.push(r),
                    None => *slot = None,
                }
            }
        }
    }
    Ok(residuals
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
        .collect())
}
