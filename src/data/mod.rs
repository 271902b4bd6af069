//! Data sets: delimited text loaded into typed columns (numbers, text, factors) with missing
//! values, plus the helpers messages need (closest column name, first non-number cell).

mod cells;
pub mod database;
mod error;
mod exact;
mod factor;
mod intern;
mod lines;
mod load;
mod number;
pub mod sheet;
mod split;
pub mod sqlite;
mod stream;
mod swar;

#[cfg(test)]
mod load_tests;
#[cfg(test)]
mod reference;
#[cfg(test)]
mod tests;

pub use cells::{ColumnBuilder, MixedColumn};
pub(crate) use error::list_positions;
pub use error::{FactorError, LoadError};
pub use factor::{
    make_factor, take_factor, unused_levels, Code, Factor, LevelOrder, MAX_FACTOR_LEVELS,
};
pub use lines::RowLines;
pub use load::{detect_separator, read_delimited, unnamed_columns, LoadOptions, MAX_LINE_BYTES};
pub use number::{beyond_limit, format_number, parse_number, NumberParse, Suggestion};
pub use stream::{stream_delimited, Streamed};

use std::sync::Arc;

use sha2::{Digest, Sha256};

/// A loaded table: named columns of equal length.
#[derive(Debug, Clone, PartialEq)]
pub struct DataSet {
    /// Name of the data set.
    pub name: String,
    /// Columns in file order.
    pub columns: Vec<Column>,
    /// For each data row, the 1-based file line where it starts (the header is line 1);
    /// kept through filtering. For a sheet of a workbook, the row of the sheet; for the
    /// result of a query, the row's position in it.
    pub row_numbers: RowLines,
    /// What `row_numbers` count.
    pub rows_are: RowOrigin,
    /// The column whose values name the rows (`label rows by COLUMN`), if any.
    pub label: Option<String>,
}

/// What the row numbers of a data set count, for the messages and tables that name a row.
#[derive(Debug, Clone, PartialEq, Eq, Default)]
pub enum RowOrigin {
    /// Lines of a delimited text file (the header is line 1).
    #[default]
    FileLines,
    /// Rows of the named sheet of a workbook, as the spreadsheet numbers them.
    Sheet(String),
    /// Positions in the rows a table or query gave (the first is 1).
    Result,
}

impl RowOrigin {
    /// Where row number `n` is, in words: "line 14", "row 14 of sheet `Week 6`", "row 14 of
    /// the result".
    pub fn place(&self, n: usize) -> String {
        match self {
            RowOrigin::FileLines => format!("line {n}"),
            RowOrigin::Sheet(sheet) => format!("row {n} of sheet \"{sheet}\""),
            RowOrigin::Result => format!("row {n} of the result"),
        }
    }

    /// What the numbers of a table's `row` column are, for its notes; `name` writes the
    /// sheet's name as the note's format needs it (escaped for Markdown, say).
    pub fn meaning(&self, name: impl Fn(&str) -> String) -> String {
        match self {
            RowOrigin::FileLines => {
                "row is the line in the data file (the header is line 1)".to_string()
            }
            RowOrigin::Sheet(sheet) => {
                format!(
                    "row is the row of sheet \"{}\" as the spreadsheet numbers it",
                    name(sheet)
                )
            }
            RowOrigin::Result => {
                "row is the position in the rows the table or query gave (the first is 1)"
                    .to_string()
            }
        }
    }

    /// What a row's number is, in words: "line in the file", "row in the sheet",
    /// "position in the result".
    pub fn number_words(&self) -> &'static str {
        match self {
            RowOrigin::FileLines => "line in the file",
            RowOrigin::Sheet(_) => "row in the sheet",
            RowOrigin::Result => "position in the result",
        }
    }

    /// The header of a preview's `row` column.
    pub fn header(&self) -> &'static str {
        match self {
            RowOrigin::FileLines => "line in file",
            RowOrigin::Sheet(_) => "row of sheet",
            RowOrigin::Result => "row of result",
        }
    }
}

/// A named column.
#[derive(Debug, Clone, PartialEq)]
pub struct Column {
    /// Column name (trimmed header cell).
    pub name: String,
    /// The cells.
    pub values: Values,
    /// For a numeric column whose cells carry more digits than their nearest doubles keep
    /// (see [`ExactValues`]): the cells as an exact offset plus small residuals. `None` for
    /// other columns; meaningful only while `values` is numeric.
    pub exact: Option<Box<ExactValues>>,
}

/// A numeric column's cells as `offset + residuals[i]`, where the offset is the integer part
/// of the first non-missing cell (an integer a double holds exactly) and each residual is
/// the cell's decimal text minus the offset, computed exactly and only then rounded to a
/// double. For cells such as 1000000000000.4 the residual (0.4) keeps the digits that the
/// nearest double of the whole value (1000000000000.4000244...) loses.
///
/// The loader keeps these when some cell has more than 7 significant digits and every cell
/// is a plain decimal (no exponent notation) and the offset is non-zero with magnitude
/// below 2^53.
#[derive(Debug, Clone, PartialEq)]
pub struct ExactValues {
    /// The integer part of the column's first non-missing value.
    pub offset: f64,
    /// Each cell minus `offset` (NaN for a missing cell), one per row.
    pub residuals: Vec<f64>,
}

/// The entries of `v` whose `keep` entry is true (entries beyond `keep` are dropped).
fn pick<T: Clone>(v: &[T], keep: &[bool]) -> Vec<T> {
    v.iter()
        .zip(keep)
        .filter(|(_, k)| **k)
        .map(|(x, _)| x.clone())
        .collect()
}

/// The cells of a column.
#[derive(Debug, Clone, PartialEq)]
pub enum Values {
    /// Numbers; `f64::NAN` marks a missing cell (no other NaN can be loaded). Shared with
    /// the models fitted to them, as the vector the loader filled (an `Arc<[f64]>` would
    /// need a copy of it: 8 bytes a row more at the end of a load).
    Numeric(Arc<Vec<f64>>),
    /// Text; a missing cell has no text.
    Text(TextValues),
    /// Group labels coded as levels.
    Factor(Factor),
}

/// The cells of a text column, each distinct text stored once: a row holds the code of its
/// text, or [`TextValues::MISSING`]. The distinct texts sit end to end in one string, so a
/// column of a million different labels costs its characters plus twelve bytes a row (an
/// end offset and a code), and a factor column of a million rows four bytes a row.
#[derive(Debug, Clone, Default)]
pub struct TextValues {
    /// The distinct texts, end to end.
    text: String,
    /// Where each distinct text ends in `text`; text `c` starts where text `c - 1` ends.
    ends: Vec<usize>,
    /// Per row: the code of its text, or [`TextValues::MISSING`].
    codes: Vec<u32>,
}

impl TextValues {
    /// The code of a missing cell.
    pub const MISSING: u32 = u32::MAX;

    /// Number of rows.
    pub fn len(&self) -> usize {
        self.codes.len()
    }

    /// True when there are no rows.
    pub fn is_empty(&self) -> bool {
        self.codes.is_empty()
    }

    /// The text of a row; `None` when missing or out of range.
    pub fn get(&self, row: usize) -> Option<&str> {
        self.text_of(*self.codes.get(row)?)
    }

    /// The cells in row order (`None` for a missing cell).
    pub fn iter(&self) -> impl Iterator<Item = Option<&str>> + '_ {
        self.codes.iter().map(|&c| self.text_of(c))
    }

    /// The first row whose text is not a plain number, with that text (see
    /// [`first_non_number`]).
    pub fn first_non_number(&self) -> Option<(usize, &str)> {
        first_non_number_in(self.iter())
    }

    /// The distinct texts that some row holds, in order of first appearance.
    pub fn present_texts(&self) -> Vec<&str> {
        let mut seen = vec![false; self.n_texts()];
        let mut out = Vec::new();
        for &c in &self.codes {
            if let Some(slot) = usize::try_from(c).ok().and_then(|i| seen.get_mut(i)) {
                if !*slot {
                    *slot = true;
                    out.extend(self.text_of(c));
                }
            }
        }
        out
    }

    /// The cells as owned strings (`None` for a missing cell).
    pub fn to_vec(&self) -> Vec<Option<String>> {
        self.iter().map(|c| c.map(str::to_owned)).collect()
    }

    /// The distinct text with this code; `None` for [`TextValues::MISSING`] or an unknown code.
    pub(crate) fn text_of(&self, code: u32) -> Option<&str> {
        let c = usize::try_from(code).ok()?;
        let end = *self.ends.get(c)?;
        let start = match c.checked_sub(1) {
            Some(p) => *self.ends.get(p)?,
            None => 0,
        };
        self.text.get(start..end)
    }

    /// The bytes of the distinct text with this code (see [`TextValues::text_of`]).
    pub(crate) fn bytes_of(&self, code: u32) -> Option<&[u8]> {
        let c = usize::try_from(code).ok()?;
        let end = *self.ends.get(c)?;
        let start = match c.checked_sub(1) {
            Some(p) => *self.ends.get(p)?,
            None => 0,
        };
        self.text.as_bytes().get(start..end)
    }

    /// Number of distinct texts.
    pub(crate) fn n_texts(&self) -> usize {
        self.ends.len()
    }

    /// An empty column with room for `rows` rows.
    pub(crate) fn with_capacity(rows: usize) -> Self {
        TextValues {
            text: String::new(),
            ends: Vec::new(),
            codes: Vec::with_capacity(rows),
        }
    }

    /// Empties the column, keeping its memory, with room for `rows` rows.
    pub(crate) fn clear(&mut self, rows: usize) {
        self.text.clear();
        self.ends.clear();
        self.codes.clear();
        self.codes.reserve(rows);
    }

    /// Appends a row by the code of its text; the caller keeps codes below
    /// [`TextValues::n_texts`] (or [`TextValues::MISSING`]).
    pub(crate) fn push_code(&mut self, code: u32) {
        self.codes.push(code);
    }

    /// Appends `n` missing rows.
    pub(crate) fn push_missing(&mut self, n: usize) {
        self.codes.extend(std::iter::repeat_n(Self::MISSING, n));
    }

    /// Appends rows by code, each mapped through `map` (missing rows stay missing; a code
    /// `map` does not hold turns missing).
    pub(crate) fn extend_mapped(&mut self, codes: &[u32], map: &[u32]) {
        self.codes.extend(codes.iter().map(|&c| {
            usize::try_from(c)
                .ok()
                .and_then(|c| map.get(c))
                .copied()
                .unwrap_or(Self::MISSING)
        }));
    }

    /// The row codes.
    pub(crate) fn codes(&self) -> &[u32] {
        &self.codes
    }

    /// The row codes, taken out: the column is left without rows.
    pub(crate) fn take_codes(&mut self) -> Vec<u32> {
        std::mem::take(&mut self.codes)
    }

    /// Adds a distinct text and returns its code, or `None` when no code is left.
    pub(crate) fn add_text(&mut self, text: &str) -> Option<u32> {
        let code = u32::try_from(self.ends.len())
            .ok()
            .filter(|c| *c != Self::MISSING)?;
        self.text.push_str(text);
        self.ends.push(self.text.len());
        Some(code)
    }

    /// Sets the text of an existing row (used when a column turns text after numeric rows).
    pub(crate) fn set(&mut self, row: usize, code: u32) {
        if let Some(slot) = self.codes.get_mut(row) {
            *slot = code;
        }
    }

    /// Gives back the room kept for rows and texts beyond those held.
    pub(crate) fn shrink_to_fit(&mut self) {
        self.text.shrink_to_fit();
        self.ends.shrink_to_fit();
        self.codes.shrink_to_fit();
    }

    /// Keeps the rows whose `keep` entry is true (rows beyond `keep` are dropped).
    fn filter(&self, keep: &[bool]) -> TextValues {
        TextValues {
            text: self.text.clone(),
            ends: self.ends.clone(),
            codes: pick(&self.codes, keep),
        }
    }
}

impl PartialEq for TextValues {
    /// Equal when the cells are, whatever the order of the stored texts.
    fn eq(&self, other: &Self) -> bool {
        self.len() == other.len() && self.iter().eq(other.iter())
    }
}

impl From<Vec<Option<String>>> for TextValues {
    fn from(cells: Vec<Option<String>>) -> Self {
        let mut out = TextValues::with_capacity(cells.len());
        let mut seen: std::collections::HashMap<String, u32> = std::collections::HashMap::new();
        for cell in cells {
            let code = match cell {
                None => Self::MISSING,
                Some(t) => match seen.get(&t) {
                    Some(c) => *c,
                    None => match out.add_text(&t) {
                        Some(c) => {
                            seen.insert(t, c);
                            c
                        }
                        None => Self::MISSING,
                    },
                },
            };
            out.push_code(code);
        }
        out
    }
}

impl Values {
    /// Number of rows.
    pub fn len(&self) -> usize {
        match self {
            Values::Numeric(v) => v.len(),
            Values::Text(v) => v.len(),
            Values::Factor(f) => f.len(),
        }
    }

    /// True when there are no rows.
    pub fn is_empty(&self) -> bool {
        self.len() == 0
    }

    /// Keeps the rows whose `keep` entry is true (rows beyond `keep` are dropped).
    fn filter(&self, keep: &[bool]) -> Values {
        match self {
            Values::Numeric(v) => Values::Numeric(pick(v, keep).into()),
            Values::Text(v) => Values::Text(v.filter(keep)),
            Values::Factor(f) => Values::Factor(Factor {
                codes: pick(&f.codes, keep).into(),
                levels: f.levels.clone(),
                order: f.order,
            }),
        }
    }
}

impl Column {
    /// Number of rows.
    pub fn len(&self) -> usize {
        self.values.len()
    }

    /// True when there are no rows.
    pub fn is_empty(&self) -> bool {
        self.values.is_empty()
    }

    /// Number of missing cells.
    pub fn missing_count(&self) -> usize {
        match &self.values {
            Values::Numeric(v) => v.iter().filter(|x| x.is_nan()).count(),
            Values::Text(v) => v
                .codes
                .iter()
                .filter(|c| **c == TextValues::MISSING)
                .count(),
            Values::Factor(f) => f.codes.iter().filter(|x| x.is_missing()).count(),
        }
    }

    /// `"numeric"`, `"text"` or `"factor"`.
    pub fn kind_name(&self) -> &'static str {
        match self.values {
            Values::Numeric(_) => "numeric",
            Values::Text(_) => "text",
            Values::Factor(_) => "factor",
        }
    }

    /// True when the cell is missing (rows out of range count as missing).
    pub fn is_missing(&self, row: usize) -> bool {
        match &self.values {
            Values::Numeric(v) => v.get(row).is_none_or(|x| x.is_nan()),
            Values::Text(v) => v.get(row).is_none(),
            Values::Factor(f) => f.level_of(row).is_none(),
        }
    }

    /// The cell as text: numbers in shortest round-trip form (see [`format_number`]), text as
    /// is, factors by level name; missing (or out of range) is the empty string.
    pub fn display_value(&self, row: usize) -> String {
        match &self.values {
            Values::Numeric(v) => v.get(row).map(|x| format_number(*x)).unwrap_or_default(),
            Values::Text(v) => v.get(row).map(str::to_owned).unwrap_or_default(),
            Values::Factor(f) => f.level_of(row).map(str::to_owned).unwrap_or_default(),
        }
    }
}

/// Edit distance between two strings in characters, counting an adjacent transposition as one
/// edit: the optimal-string-alignment variant of the Damerau-Levenshtein distance
/// (Levenshtein 1966; Damerau 1964, "A technique for computer detection and correction of
/// spelling errors", CACM 7(3)).
fn edit_distance(a: &[char], b: &[char]) -> usize {
    let w = b.len() + 1;
    // Three rolling rows: two back (for transpositions), previous, current.
    let mut two_back = vec![0usize; w];
    let mut prev: Vec<usize> = (0..w).collect();
    let mut cur = vec![0usize; w];
    for (i, ca) in a.iter().enumerate() {
        cur[0] = i + 1;
        for (j, cb) in b.iter().enumerate() {
            let cost = usize::from(ca != cb);
            let mut d = (prev[j] + cost).min(prev[j + 1] + 1).min(cur[j] + 1);
            if i > 0 && j > 0 && a.get(i - 1) == Some(cb) && b.get(j - 1) == Some(ca) {
                d = d.min(two_back[j - 1] + 1);
            }
            cur[j + 1] = d;
        }
        std::mem::swap(&mut two_back, &mut prev);
        std::mem::swap(&mut prev, &mut cur);
    }
    prev[b.len()]
}

/// One edit allowed per this many characters of the longer name in [`DataSet::closest_name`]:
/// enough for a slip or two in a typical name, not so loose that unrelated short names match.
const CHARS_PER_EDIT: usize = 3;

impl DataSet {
    /// Number of data rows.
    pub fn n_rows(&self) -> usize {
        self.row_numbers.len()
    }

    /// The column with exactly this name.
    pub fn column(&self, name: &str) -> Option<&Column> {
        self.columns.iter().find(|c| c.name == name)
    }

    /// The column with exactly this name, for changing (e.g. into a factor).
    pub fn column_mut(&mut self, name: &str) -> Option<&mut Column> {
        self.columns.iter_mut().find(|c| c.name == name)
    }

    /// The column name closest to `name`, for "did you mean" hints; `None` when nothing is
    /// close. Names compare case-insensitively by edit distance (see `edit_distance`); a name is
    /// close when three times the distance is at most the longer name's length plus one, and
    /// the distance is less than that length (so one-letter names never match each other).
    /// Ties go to the earlier column.
    pub fn closest_name(&self, name: &str) -> Option<&str> {
        let query: Vec<char> = name.to_lowercase().chars().collect();
        let mut best: Option<(usize, &str)> = None;
        for col in &self.columns {
            let cand: Vec<char> = col.name.to_lowercase().chars().collect();
            let d = edit_distance(&query, &cand);
            let longest = query.len().max(cand.len());
            let close = d * CHARS_PER_EDIT <= longest + 1 && d < longest;
            if close && best.is_none_or(|(bd, _)| d < bd) {
                best = Some((d, col.name.as_str()));
            }
        }
        best.map(|(_, n)| n)
    }

    /// The rows whose `keep` entry is true, row numbers kept in step. Rows beyond the end of
    /// `keep` are dropped.
    pub fn filter(&self, keep: &[bool]) -> DataSet {
        DataSet {
            name: self.name.clone(),
            columns: self
                .columns
                .iter()
                .map(|c| Column {
                    name: c.name.clone(),
                    values: c.values.filter(keep),
                    exact: c
                        .exact
                        .as_ref()
                        .filter(|_| matches!(c.values, Values::Numeric(_)))
                        .map(|e| {
                            Box::new(ExactValues {
                                offset: e.offset,
                                residuals: pick(&e.residuals, keep),
                            })
                        }),
                })
                .collect(),
            row_numbers: self
                .row_numbers
                .iter()
                .zip(keep)
                .filter(|(_, k)| **k)
                .map(|(r, _)| r)
                .collect(),
            rows_are: self.rows_are.clone(),
            label: self.label.clone(),
        }
    }

    /// The label of data row `row` (`label rows by`), when the data set has a label column
    /// and the row's cell is not missing.
    pub fn label_of(&self, row: usize) -> Option<String> {
        let col = self.column(self.label.as_deref()?)?;
        (!col.is_missing(row)).then(|| col.display_value(row))
    }

    /// Where data row `row` is, in words ("line 14", "row 14 of sheet \"Week 6\""), with its
    /// label when the rows are labelled.
    pub fn place_of(&self, row: usize) -> String {
        let n = self.row_numbers.get(row).unwrap_or(row + 1);
        let place = self.rows_are.place(n);
        match self.label_of(row) {
            Some(l) => format!("{place} ({l})"),
            None => place,
        }
    }

    /// Number of missing cells in `col` (same as [`Column::missing_count`]).
    pub fn missing_count(&self, col: &Column) -> usize {
        col.missing_count()
    }

    /// The file line of data row `row`, if it exists.
    pub fn line_of(&self, row: usize) -> Option<usize> {
        self.row_numbers.get(row)
    }

    /// [`make_factor`], with the file line filled into an undeclared-level error.
    pub fn factor(&self, col: &Column, levels: Option<&[String]>) -> Result<Factor, FactorError> {
        make_factor(col, levels).map_err(|e| e.locate(&self.row_numbers))
    }
}

/// The first cell that is present but not a plain number, as (0-based row, text), for
/// "column x is text: line 41 holds 'n/a'" messages (map the row through `row_numbers`).
pub fn first_non_number(values: &[Option<String>]) -> Option<(usize, &str)> {
    first_non_number_in(values.iter().map(Option::as_deref))
}

/// [`first_non_number`] over cells given in row order.
fn first_non_number_in<'a>(
    cells: impl Iterator<Item = Option<&'a str>>,
) -> Option<(usize, &'a str)> {
    cells.enumerate().find_map(|(i, v)| {
        let s = v?;
        match parse_number(s) {
            NumberParse::Number(_) => None,
            _ => Some((i, s)),
        }
    })
}

impl DataSet {
    /// A SHA-256 of the rows as covey read them, so that a change in the rows a table or a
    /// query gives shows in the provenance: the column names, then every cell row by row, a
    /// missing cell as the byte 0, a number as the byte 1 and its eight bytes (IEEE 754,
    /// little-endian), a text (or level) as the byte 2, its length in eight bytes and its
    /// UTF-8 bytes; each name as its length and bytes.
    pub fn rows_sha256(&self) -> String {
        let mut h = Sha256::new();
        let mut buf: Vec<u8> = Vec::with_capacity(1 << 16);
        let len = |n: usize| (n as u64).to_le_bytes();
        buf.extend_from_slice(&len(self.columns.len()));
        for c in &self.columns {
            buf.extend_from_slice(&len(c.name.len()));
            buf.extend_from_slice(c.name.as_bytes());
        }
        for row in 0..self.n_rows() {
            for c in &self.columns {
                let text = match &c.values {
                    Values::Numeric(v) => {
                        match v.get(row).copied().filter(|x| !x.is_nan()) {
                            Some(x) => {
                                buf.push(1);
                                buf.extend_from_slice(&x.to_bits().to_le_bytes());
                            }
                            None => buf.push(0),
                        }
                        continue;
                    }
                    Values::Text(t) => t.get(row),
                    Values::Factor(f) => f.level_of(row),
                };
                match text {
                    Some(t) => {
                        buf.push(2);
                        buf.extend_from_slice(&len(t.len()));
                        buf.extend_from_slice(t.as_bytes());
                    }
                    None => buf.push(0),
                }
            }
            if buf.len() >= 1 << 15 {
                h.update(&buf);
                buf.clear();
            }
        }
        h.update(&buf);
        hex(&h.finalize())
    }
}

/// SHA-256 (FIPS 180-4) of everything `reader` gives, as 64 lowercase hex digits.
pub fn sha256_reader(reader: &mut dyn std::io::Read) -> std::io::Result<String> {
    let mut h = Sha256::new();
    let mut buf = vec![0u8; 1 << 16];
    loop {
        let n = match reader.read(&mut buf) {
            Ok(0) => break,
            Ok(n) => n,
            Err(e) if e.kind() == std::io::ErrorKind::Interrupted => continue,
            Err(e) => return Err(e),
        };
        h.update(buf.get(..n).unwrap_or_default());
    }
    Ok(hex(&h.finalize()))
}

/// SHA-256 (FIPS 180-4) of the bytes, as 64 lowercase hex digits.
pub fn sha256_hex(bytes: &[u8]) -> String {
    hex(&Sha256::digest(bytes))
}

/// Bytes as lowercase hex digits, two per byte.
fn hex(bytes: &[u8]) -> String {
    const HEX: &[u8; 16] = b"0123456789abcdef";
    let mut out = String::with_capacity(2 * bytes.len());
    for &b in bytes {
        out.push(char::from(HEX[usize::from(b >> 4)]));
        out.push(char::from(HEX[usize::from(b & 0x0f)]));
    }
    out
}
