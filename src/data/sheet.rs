//! Spreadsheets (`.xlsx`, `.xlsm`, `.xls`, `.ods`) read with the calamine crate from the
//! bytes of the file, one sheet at a time.
//!
//! The first non-empty row of the sheet names the columns; every later row that is not
//! wholly empty is a data row, numbered as the spreadsheet numbers its rows. Number cells
//! are numbers, text cells text (a text equal to a declared missing-value marker, or blank,
//! is missing), booleans the texts `TRUE` and `FALSE`, dates and times ISO 8601 texts. An
//! error cell (`#DIV/0!`, `#N/A`, ...) is an error naming the sheet and the cell, unless its
//! text is a declared marker. Merged cells in the table are refused: a merged cell holds its
//! value in its first cell only, so the cells it covers would read as missing.

use std::fmt;
use std::io::Cursor;

use calamine::{open_workbook_from_rs, Data, Dimensions, Ods, Range, Reader, Xls, Xlsx};

use super::cells::{is_missing_text, ColumnBuilder, MixedColumn};
use super::{DataSet, RowLines, RowOrigin};

/// The kinds of workbook covey reads, by the file's extension.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum WorkbookKind {
    /// Office Open XML (`.xlsx`, and `.xlsm`, whose macros are never run).
    Xlsx,
    /// The older binary format (`.xls`).
    Xls,
    /// OpenDocument (`.ods`).
    Ods,
}

impl WorkbookKind {
    /// The kind of workbook a file name says, if any (by its extension, in any case).
    pub fn of_path(path: &str) -> Option<WorkbookKind> {
        let lower = path.to_lowercase();
        if lower.ends_with(".xlsx") || lower.ends_with(".xlsm") {
            Some(WorkbookKind::Xlsx)
        } else if lower.ends_with(".xls") {
            Some(WorkbookKind::Xls)
        } else if lower.ends_with(".ods") {
            Some(WorkbookKind::Ods)
        } else {
            None
        }
    }

    fn extension(self) -> &'static str {
        match self {
            WorkbookKind::Xlsx => ".xlsx",
            WorkbookKind::Xls => ".xls",
            WorkbookKind::Ods => ".ods",
        }
    }
}

/// A sheet read into a data set.
#[derive(Debug)]
pub struct SheetRead {
    pub set: DataSet,
    /// The sheet read (the first, unless one was named).
    pub sheet: String,
    /// Columns that held both numbers and texts, read as text.
    pub mixed: Vec<MixedColumn>,
    /// Columns in which dates or times were written as ISO 8601 texts.
    pub dates: Vec<String>,
}

/// Why a workbook or sheet could not be read.
#[derive(Debug, Clone, PartialEq)]
pub enum SheetError {
    /// The workbook is encrypted with a password.
    Password,
    /// The bytes are not a workbook of the kind the extension says (or it is damaged).
    Damaged { kind: WorkbookKind, detail: String },
    /// The workbook has no sheets.
    NoSheets,
    /// No sheet has this name.
    UnknownSheet { name: String, sheets: Vec<String> },
    /// The sheet holds no cell with a value.
    EmptySheet { sheet: String },
    /// The sheet has a header row but no data rows.
    HeaderOnly { sheet: String, row: u32 },
    /// Header cells that are blank above a column that holds values.
    BlankHeader { sheet: String, cells: Vec<String> },
    /// A merged region in the table: its cells as a range such as `B1:C1`.
    Merged {
        sheet: String,
        range: String,
        header: bool,
    },
    /// Two columns with one name.
    DuplicateHeader {
        sheet: String,
        name: String,
        cells: Vec<String>,
    },
    /// An error cell whose text is not a declared missing-value marker.
    ErrorCell {
        sheet: String,
        cell: String,
        text: String,
    },
}

impl fmt::Display for SheetError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            SheetError::Password => write!(
                f,
                "the workbook is protected with a password (it is encrypted); covey cannot read \
                 it: save a copy without a password and load that"
            ),
            SheetError::Damaged { kind, detail } => write!(
                f,
                "the file cannot be read as a {} workbook ({detail}); it may be damaged, or be \
                 another kind of file under this name: open it in the spreadsheet program and \
                 save it again",
                kind.extension()
            ),
            SheetError::NoSheets => write!(f, "the workbook has no sheets"),
            SheetError::UnknownSheet { name, sheets } => write!(
                f,
                "the workbook has no sheet \"{name}\"; its sheets are {}",
                sheets
                    .iter()
                    .map(|s| format!("\"{s}\""))
                    .collect::<Vec<_>>()
                    .join(", ")
            ),
            SheetError::EmptySheet { sheet } => write!(
                f,
                "sheet \"{sheet}\" is empty; it needs a row of column names and at least one \
                 data row"
            ),
            SheetError::HeaderOnly { sheet, row } => write!(
                f,
                "sheet \"{sheet}\" has a header (row {row}) but no data rows; add rows below \
                 the header"
            ),
            SheetError::BlankHeader { sheet, cells } => write!(
                f,
                "sheet \"{sheet}\": the header cell {} is blank above a column that holds \
                 values; give every column a name in the first non-empty row (a cell merged \
                 across columns leaves the cells it covers blank: unmerge it)",
                cells.join(", ")
            ),
            SheetError::Merged {
                sheet,
                range,
                header,
            } => {
                if *header {
                    write!(
                        f,
                        "sheet \"{sheet}\": the header cells {range} are merged; give each \
                         column a name of its own in its own cell (unmerge them)"
                    )
                } else {
                    write!(
                        f,
                        "sheet \"{sheet}\": the cells {range} are merged, so all but the first \
                         would read as missing; unmerge them and write the value in every cell"
                    )
                }
            }
            SheetError::DuplicateHeader { sheet, name, cells } => write!(
                f,
                "sheet \"{sheet}\": the header uses the name {name} in cells {}; give every \
                 column a different name",
                cells.join(", "),
                name = crate::report::markdown::code(name)
            ),
            SheetError::ErrorCell { sheet, cell, text } => write!(
                f,
                "sheet \"{sheet}\", cell {cell} holds the error {text}; correct the formula, or \
                 if it marks a missing value declare it with `missing \"{text}\"` before the load"
            ),
        }
    }
}

impl core::error::Error for SheetError {}

/// The letters of a 0-based column index, as spreadsheets name columns (A, ..., Z, AA, ...).
pub fn column_letters(mut col: u32) -> String {
    let mut out = Vec::new();
    loop {
        out.push(b'A' + (col % 26) as u8);
        if col < 26 {
            break;
        }
        col = col / 26 - 1;
    }
    out.reverse();
    String::from_utf8(out).unwrap_or_default()
}

/// A cell's name (`D14`) from its 0-based row and column.
pub fn cell_name(row: u32, col: u32) -> String {
    format!("{}{}", column_letters(col), u64::from(row) + 1)
}

/// A merged region's name (`B1:C1`).
fn range_name(d: &Dimensions) -> String {
    format!(
        "{}:{}",
        cell_name(d.start.0, d.start.1),
        cell_name(d.end.0, d.end.1)
    )
}

/// An open workbook of any kind covey reads.
enum Book<'a> {
    Xlsx(Xlsx<Cursor<&'a [u8]>>),
    Xls(Xls<Cursor<&'a [u8]>>),
    Ods(Ods<Cursor<&'a [u8]>>),
}

/// The first bytes of a Compound File (the container of `.xls` files and of encrypted
/// Office Open XML files).
const CFB_MAGIC: [u8; 8] = [0xD0, 0xCF, 0x11, 0xE0, 0xA1, 0xB1, 0x1A, 0xE1];

fn open(bytes: &[u8], kind: WorkbookKind) -> Result<Book<'_>, SheetError> {
    // An encrypted .xlsx or .ods is a Compound File holding the encrypted package, not a zip.
    if kind != WorkbookKind::Xls && bytes.starts_with(&CFB_MAGIC) {
        return Err(SheetError::Password);
    }
    let damaged = |detail: String| SheetError::Damaged { kind, detail };
    let rs = Cursor::new(bytes);
    match kind {
        WorkbookKind::Xlsx => open_workbook_from_rs::<Xlsx<_>, _>(rs)
            .map(Book::Xlsx)
            .map_err(|e| damaged(e.to_string())),
        WorkbookKind::Xls => match open_workbook_from_rs::<Xls<_>, _>(rs) {
            Ok(b) => Ok(Book::Xls(b)),
            Err(calamine::XlsError::Password) => Err(SheetError::Password),
            Err(e) => Err(damaged(e.to_string())),
        },
        WorkbookKind::Ods => match open_workbook_from_rs::<Ods<_>, _>(rs) {
            Ok(b) => Ok(Book::Ods(b)),
            Err(calamine::OdsError::Password) => Err(SheetError::Password),
            Err(e) => Err(damaged(e.to_string())),
        },
    }
}

impl Book<'_> {
    fn sheet_names(&self) -> Vec<String> {
        match self {
            Book::Xlsx(b) => b.sheet_names(),
            Book::Xls(b) => b.sheet_names(),
            Book::Ods(b) => b.sheet_names(),
        }
    }

    fn range(&mut self, name: &str) -> Result<Range<Data>, String> {
        match self {
            Book::Xlsx(b) => b.worksheet_range(name).map_err(|e| e.to_string()),
            Book::Xls(b) => b.worksheet_range(name).map_err(|e| e.to_string()),
            Book::Ods(b) => b.worksheet_range(name).map_err(|e| e.to_string()),
        }
    }

    /// The merged regions of a sheet (none known for `.ods`, whose merged cells calamine
    /// reads as blank cells: a blank header cell is refused all the same).
    fn merged(&mut self, name: &str) -> Result<Vec<Dimensions>, String> {
        match self {
            Book::Xlsx(b) => match b.worksheet_merge_cells(name) {
                Some(r) => r.map_err(|e| e.to_string()),
                None => Ok(Vec::new()),
            },
            Book::Xls(b) => Ok(b.worksheet_merge_cells(name).unwrap_or_default()),
            Book::Ods(_) => Ok(Vec::new()),
        }
    }
}

/// An ISO 8601 text of a spreadsheet date or time: `2024-05-17`, `2024-05-17T08:30:00`, or
/// a time of day alone as `08:30:00` (serial values below 1); durations as `PT1H30M0S`.
fn iso_text(d: &calamine::ExcelDateTime) -> String {
    if d.is_duration() {
        let total_ms = (d.as_f64() * 86_400_000.0).round();
        let negative = total_ms < 0.0;
        let ms = total_ms.abs() as u64;
        let (h, m, s, milli) = (ms / 3_600_000, ms / 60_000 % 60, ms / 1000 % 60, ms % 1000);
        let sign = if negative { "-" } else { "" };
        return if milli > 0 {
            format!("{sign}PT{h}H{m}M{s}.{milli:03}S")
        } else {
            format!("{sign}PT{h}H{m}M{s}S")
        };
    }
    let (y, mo, day, h, mi, s, milli) = d.to_ymd_hms_milli();
    let time = if milli > 0 {
        format!("{h:02}:{mi:02}:{s:02}.{milli:03}")
    } else {
        format!("{h:02}:{mi:02}:{s:02}")
    };
    let v = d.as_f64();
    if (0.0..1.0).contains(&v) {
        time
    } else if h == 0 && mi == 0 && s == 0 && milli == 0 {
        format!("{y:04}-{mo:02}-{day:02}")
    } else {
        format!("{y:04}-{mo:02}-{day:02}T{time}")
    }
}

/// A header cell's text, or `None` when it is blank.
fn header_text(cell: &Data) -> Option<String> {
    let text = match cell {
        Data::Empty => return None,
        Data::String(s) => s.trim_matches(|c| c == ' ' || c == '\t').to_string(),
        Data::Float(x) => super::format_number(*x),
        Data::Int(i) => i.to_string(),
        Data::Bool(b) => if *b { "TRUE" } else { "FALSE" }.to_string(),
        Data::DateTime(d) => iso_text(d),
        Data::DateTimeIso(s) | Data::DurationIso(s) => s.clone(),
        Data::Error(e) => e.to_string(),
    };
    (!text.is_empty()).then_some(text)
}

fn is_blank(cell: &Data) -> bool {
    match cell {
        Data::Empty => true,
        Data::String(s) => s.trim_matches(|c| c == ' ' || c == '\t').is_empty(),
        _ => false,
    }
}

/// Reads one sheet (`sheet`, or the first) of a workbook's bytes into a data set named
/// `name`; `markers` are the declared missing-value markers.
pub fn read_workbook(
    bytes: &[u8],
    kind: WorkbookKind,
    sheet: Option<&str>,
    name: &str,
    markers: &[String],
) -> Result<SheetRead, SheetError> {
    let mut book = open(bytes, kind)?;
    let sheets = book.sheet_names();
    let sheet = match sheet {
        Some(s) => sheets
            .iter()
            .find(|n| n.as_str() == s)
            .cloned()
            .ok_or_else(|| SheetError::UnknownSheet {
                name: s.to_string(),
                sheets: sheets.clone(),
            })?,
        None => sheets.first().cloned().ok_or(SheetError::NoSheets)?,
    };
    let damaged = |detail: String| SheetError::Damaged { kind, detail };
    let range = book.range(&sheet).map_err(damaged)?;
    let merged = book.merged(&sheet).map_err(damaged)?;
    let (Some(start), Some(_)) = (range.start(), range.end()) else {
        return Err(SheetError::EmptySheet { sheet });
    };
    let mut rows = range
        .rows()
        .enumerate()
        .map(|(i, r)| (start.0 + i as u32, r));
    // The header: the first row with a value.
    let Some((header_row, header)) = rows.find(|(_, r)| !r.iter().all(is_blank)) else {
        return Err(SheetError::EmptySheet { sheet });
    };
    let data: Vec<(u32, &[Data])> = rows.filter(|(_, r)| !r.iter().all(is_blank)).collect();
    // A merged region within the table (the header row or below) is refused.
    if let Some(m) = merged
        .iter()
        .filter(|m| m.end.0 >= header_row && m.start != m.end)
        .min_by_key(|m| (m.start.0, m.start.1))
    {
        return Err(SheetError::Merged {
            sheet,
            range: range_name(m),
            header: m.start.0 <= header_row,
        });
    }
    // Columns: named header cells, and blank ones above values (an error).
    let mut columns: Vec<(usize, String)> = Vec::new();
    let mut blank = Vec::new();
    for (j, cell) in header.iter().enumerate() {
        let col = start.1 + j as u32;
        if let Data::Error(e) = cell {
            return Err(SheetError::ErrorCell {
                sheet,
                cell: cell_name(header_row, col),
                text: e.to_string(),
            });
        }
        match header_text(cell) {
            Some(t) => columns.push((j, t)),
            None => {
                if data
                    .iter()
                    .any(|(_, r)| r.get(j).is_some_and(|c| !is_blank(c)))
                {
                    blank.push(cell_name(header_row, col));
                }
            }
        }
    }
    if !blank.is_empty() {
        return Err(SheetError::BlankHeader {
            sheet,
            cells: blank,
        });
    }
    for (k, (_, n)) in columns.iter().enumerate() {
        let same: Vec<String> = columns
            .iter()
            .filter(|(_, m)| m == n)
            .map(|(j, _)| cell_name(header_row, start.1 + *j as u32))
            .collect();
        if same.len() > 1 && columns.iter().position(|(_, m)| m == n) == Some(k) {
            return Err(SheetError::DuplicateHeader {
                sheet,
                name: n.clone(),
                cells: same,
            });
        }
    }
    if data.is_empty() {
        return Err(SheetError::HeaderOnly {
            sheet,
            row: header_row + 1,
        });
    }
    let mut builders: Vec<ColumnBuilder> = columns
        .iter()
        .map(|(_, n)| ColumnBuilder::new(n, data.len()))
        .collect();
    let mut dates: Vec<bool> = vec![false; columns.len()];
    for (r, row) in &data {
        for (k, (j, _)) in columns.iter().enumerate() {
            let (Some(b), Some(is_date)) = (builders.get_mut(k), dates.get_mut(k)) else {
                continue;
            };
            match row.get(*j).unwrap_or(&Data::Empty) {
                Data::Empty => b.push_missing(),
                Data::Float(x) => b.push_number(*x),
                // Whole numbers beyond 2^53 are rounded to the nearest double, as a
                // delimited-text reader would read them.
                Data::Int(i) => b.push_number(*i as f64),
                Data::String(s) => {
                    if is_missing_text(s, markers) {
                        b.push_missing();
                    } else {
                        b.push_text(s);
                    }
                }
                Data::Bool(v) => b.push_text(if *v { "TRUE" } else { "FALSE" }),
                Data::DateTime(d) => {
                    *is_date = true;
                    b.push_text(&iso_text(d));
                }
                Data::DateTimeIso(s) | Data::DurationIso(s) => {
                    *is_date = true;
                    b.push_text(s);
                }
                Data::Error(e) => {
                    let text = e.to_string();
                    if markers.iter().any(|m| m.trim() == text) {
                        b.push_missing();
                    } else {
                        return Err(SheetError::ErrorCell {
                            sheet,
                            cell: cell_name(*r, start.1 + *j as u32),
                            text,
                        });
                    }
                }
            }
        }
    }
    let mut mixed = Vec::new();
    let mut cols = Vec::with_capacity(builders.len());
    for b in builders {
        let (c, m) = b.finish();
        cols.push(c);
        mixed.extend(m);
    }
    let dates = columns
        .iter()
        .zip(&dates)
        .filter(|(_, d)| **d)
        .map(|((_, n), _)| n.clone())
        .collect();
    let row_numbers: RowLines = data.iter().map(|(r, _)| *r as usize + 1).collect();
    Ok(SheetRead {
        set: DataSet {
            name: name.to_string(),
            columns: cols,
            row_numbers,
            rows_are: RowOrigin::Sheet(sheet.clone()),
            label: None,
        },
        sheet,
        mixed,
        dates,
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn columns_are_lettered_as_spreadsheets_letter_them() {
        assert_eq!(column_letters(0), "A");
        assert_eq!(column_letters(25), "Z");
        assert_eq!(column_letters(26), "AA");
        assert_eq!(column_letters(27), "AB");
        assert_eq!(column_letters(701), "ZZ");
        assert_eq!(column_letters(702), "AAA");
        assert_eq!(cell_name(13, 3), "D14");
    }

    #[test]
    fn garbage_is_a_damaged_workbook_and_an_encrypted_one_says_password() {
        for kind in [WorkbookKind::Xlsx, WorkbookKind::Xls, WorkbookKind::Ods] {
            let e = read_workbook(b"not a workbook at all", kind, None, "x", &[]);
            assert!(
                matches!(e, Err(SheetError::Damaged { .. })),
                "{kind:?}: {e:?}"
            );
        }
        let mut cfb = CFB_MAGIC.to_vec();
        cfb.extend([0u8; 504]);
        let e = read_workbook(&cfb, WorkbookKind::Xlsx, None, "x", &[]);
        assert!(matches!(e, Err(SheetError::Password)), "{e:?}");
    }
}
