//! Errors from loading data files and from making factors.

use std::fmt;

use super::number::Suggestion;

/// Why a data file could not be loaded. Lines are 1-based (the header is line 1), columns are
/// 1-based positions in the header.
#[derive(Debug, Clone, PartialEq)]
pub enum LoadError {
    /// The file holds nothing but whitespace (or a byte-order mark).
    Empty,
    /// The file starts with a UTF-16 byte-order mark.
    Utf16Bom,
    /// The delimiter cannot separate fields (a quote, a line break, or not ASCII).
    BadDelimiter {
        /// The delimiter byte that was asked for.
        delimiter: u8,
    },
    /// A NUL byte on this line.
    NulByte {
        /// Line holding the NUL byte.
        line: usize,
    },
    /// A physical line longer than `limit` bytes.
    LineTooLong {
        /// The long line.
        line: usize,
        /// The limit in bytes.
        limit: usize,
    },
    /// A quoted field that never closes.
    UnterminatedQuote {
        /// Line where the quoted field starts.
        line: usize,
    },
    /// A cell whose bytes are not UTF-8.
    NonUtf8 {
        /// Line where the row starts.
        line: usize,
        /// 1-based column position.
        column: usize,
        /// Column name, `None` for a header cell.
        name: Option<String>,
    },
    /// Header cells that are empty after trimming.
    EmptyColumnName {
        /// Line of the header.
        line: usize,
        /// 1-based positions of the empty names.
        positions: Vec<usize>,
    },
    /// Header cells that are empty above a column that holds a value. (A column with no name
    /// and no value, as a separator at the end of every line makes, is left out.)
    UnnamedColumnHolds {
        /// Line of the header.
        header: usize,
        /// 1-based positions of the unnamed columns that hold values.
        positions: Vec<usize>,
        /// Line of the first value in one of them.
        line: usize,
        /// 1-based position of that value's column.
        column: usize,
        /// That value as read.
        text: String,
    },
    /// A column name used more than once (names compare case-sensitively).
    DuplicateColumnName {
        /// Line of the header.
        line: usize,
        /// The repeated name.
        name: String,
        /// 1-based positions where it occurs.
        positions: Vec<usize>,
    },
    /// A header but no data rows.
    NoDataRows {
        /// Line of the header.
        line: usize,
    },
    /// A row whose field count differs from the header's.
    RaggedRow {
        /// Line where the row starts.
        line: usize,
        /// Number of header fields.
        expected: usize,
        /// Number of fields in the row.
        found: usize,
    },
    /// A number-like cell refused in a column whose other cells are numbers.
    RefusedNumber {
        /// Line where the row starts.
        line: usize,
        /// 1-based column position.
        column: usize,
        /// Column name.
        name: String,
        /// The cell text (trimmed).
        text: String,
        /// Why it is refused and what to do.
        suggestion: Suggestion,
    },
    /// A text column with more distinct cell texts than covey can number (about 4.3e9).
    TooManyTexts {
        /// Line where the row starts.
        line: usize,
        /// Column name.
        name: String,
    },
    /// The delimited-text reader failed on this line for another reason.
    Malformed {
        /// Line where the reader stopped.
        line: usize,
    },
}

/// Writes `[2, 5, 7]` as `2, 5 and 7`.
pub(crate) fn list_positions(positions: &[usize]) -> String {
    let mut out = String::new();
    let n = positions.len();
    for (i, p) in positions.iter().enumerate() {
        if i > 0 {
            out.push_str(if i + 1 == n { " and " } else { ", " });
        }
        out.push_str(&p.to_string());
    }
    out
}

impl fmt::Display for LoadError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            LoadError::Empty => write!(
                f,
                "the data file is empty; it needs a header row of column names and at least one data row"
            ),
            LoadError::Utf16Bom => write!(
                f,
                "the data file is encoded as UTF-16 (it starts with a UTF-16 byte-order mark); \
                 save it as UTF-8 (in a spreadsheet choose \"CSV UTF-8\") and load it again"
            ),
            LoadError::BadDelimiter { delimiter } => write!(
                f,
                "the delimiter {:?} cannot separate fields; choose an ASCII character other than \
                 the double quote and the line break (for example `,` or a tab)",
                char::from(*delimiter)
            ),
            LoadError::NulByte { line } => write!(
                f,
                "line {line} contains a NUL byte (code 0), so this is not UTF-8 text; if the file \
                 was saved as UTF-16, save it as UTF-8 instead"
            ),
            LoadError::LineTooLong { line, limit } => write!(
                f,
                "line {line} is longer than {limit} bytes, which covey refuses; check that this is a \
                 delimited text file with line breaks between rows"
            ),
            LoadError::UnterminatedQuote { line } => write!(
                f,
                "the quoted field that starts on line {line} is never closed; add the closing double \
                 quote (a quote inside a quoted field is written twice: \"\")"
            ),
            LoadError::NonUtf8 { line, column, name } => match name {
                // A column the header leaves unnamed (see `UnnamedColumnHolds`).
                Some(name) if name.is_empty() => write!(
                    f,
                    "line {line}, column {column} (no name in the header) holds bytes that are \
                     not valid UTF-8; save the file as UTF-8 and load it again"
                ),
                Some(name) => write!(
                    f,
                    "line {line}, column {column} ({name}) holds bytes that are not valid UTF-8; \
                     save the file as UTF-8 and load it again", name = crate::report::markdown::code(name)
                ),
                None => write!(
                    f,
                    "line {line}, column {column} of the header holds bytes that are not valid \
                     UTF-8; save the file as UTF-8 and load it again"
                ),
            },
            LoadError::EmptyColumnName { line, positions } => write!(
                f,
                "the header (line {line}) has an empty column name at column {}; give every column \
                 a name",
                list_positions(positions)
            ),
            LoadError::UnnamedColumnHolds {
                header,
                positions,
                line,
                column,
                text,
            } => write!(
                f,
                "the header (line {header}) gives no name to column {}, but line {line} holds \
                 {} in column {column}; give every column that holds values a name (a column \
                 with no name is left out only when none of its cells holds a value)",
                list_positions(positions),
                crate::report::markdown::code(text)
            ),
            LoadError::DuplicateColumnName {
                line,
                name,
                positions,
            } => write!(
                f,
                "the header (line {line}) uses the name {name} for columns {}; give every column \
                 a different name",
                list_positions(positions), name = crate::report::markdown::code(name)
            ),
            LoadError::NoDataRows { line } => write!(
                f,
                "the data file has a header (line {line}) but no data rows; add rows below the header"
            ),
            LoadError::RaggedRow {
                line,
                expected,
                found,
            } => write!(
                f,
                "line {line} has {found} fields but the header has {expected}; every row needs one \
                 field per column (look for a missing or extra delimiter, and quote fields that \
                 contain the delimiter)"
            ),
            LoadError::RefusedNumber {
                line,
                column,
                name,
                text,
                suggestion,
            } => write!(
                f,
                "line {line}, column {column} ({name}): {text} {} in a column of numbers; {}",
                suggestion.reason(),
                suggestion.advice(text), name = crate::report::markdown::code(name), text = crate::report::markdown::code(text)
            ),
            LoadError::TooManyTexts { line, name } => write!(
                f,
                "line {line}: column {name} has more distinct texts than covey can hold; \
                 split the file", name = crate::report::markdown::code(name)
            ),
            LoadError::Malformed { line } => write!(
                f,
                "line {line} could not be read as delimited text; check the quoting on that line"
            ),
        }
    }
}

impl core::error::Error for LoadError {}

/// Why a column could not be made into a factor.
#[derive(Debug, Clone, PartialEq)]
pub enum FactorError {
    /// A value occurs that is not among the declared levels.
    UndeclaredLevel {
        /// Column name.
        column: String,
        /// The value as text.
        value: String,
        /// 0-based data row of its first occurrence.
        row: usize,
        /// File line of that row, when known (see [`FactorError::locate`]).
        line: Option<usize>,
    },
    /// The same level declared twice (for a numeric column: two spellings of one number).
    DuplicateDeclaredLevel {
        /// Column name.
        column: String,
        /// The repeated level.
        level: String,
    },
    /// Fewer than two distinct levels occur.
    TooFewLevels {
        /// Column name.
        column: String,
        /// The levels that occur (none or one).
        found: Vec<String>,
    },
    /// More distinct levels than a factor may have ([`super::MAX_FACTOR_LEVELS`]).
    TooManyLevels {
        /// Column name.
        column: String,
        /// 0-based data row where the first level past the limit first occurs (`None` when
        /// the declared levels are too many).
        row: Option<usize>,
        /// File line of that row, when known (see [`FactorError::locate`]).
        line: Option<usize>,
    },
}

impl FactorError {
    /// Fills in the file line of the offending row from a data set's row numbers.
    pub fn locate(mut self, row_numbers: &super::RowLines) -> FactorError {
        match &mut self {
            FactorError::UndeclaredLevel { row, line, .. } => *line = row_numbers.get(*row),
            FactorError::TooManyLevels {
                row: Some(row),
                line,
                ..
            } => *line = row_numbers.get(*row),
            _ => {}
        }
        self
    }
}

impl fmt::Display for FactorError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            FactorError::UndeclaredLevel {
                column,
                value,
                row,
                line,
            } => {
                let place = match line {
                    Some(l) => format!("line {l}"),
                    None => format!("data row {}", row.saturating_add(1)),
                };
                write!(
                    f,
                    "column {column} holds {value} ({place}), which is not among the declared \
                     levels; add it to the levels or correct the data",
                    column = crate::report::markdown::code(column),
                    value = crate::report::markdown::code(value)
                )
            }
            FactorError::DuplicateDeclaredLevel { column, level } => write!(
                f,
                "the levels declared for {column} name {level} twice; list each level once",
                column = crate::report::markdown::code(column),
                level = crate::report::markdown::code(level)
            ),
            FactorError::TooFewLevels { column, found } => match found.first() {
                Some(only) => write!(
                    f,
                    "column {column} has only one level ({only}) among the rows used; a factor \
                     needs at least two",
                    column = crate::report::markdown::code(column),
                    only = crate::report::markdown::code(only)
                ),
                None => write!(
                    f,
                    "column {column} has no values (every row is missing); a factor needs at \
                     least two levels",
                    column = crate::report::markdown::code(column)
                ),
            },
            FactorError::TooManyLevels { column, row, line } => {
                let limit = super::MAX_FACTOR_LEVELS;
                match (row, line) {
                    (None, _) => write!(
                        f,
                        "the levels declared for {column} are more than a factor may have \
                         ({limit}); a grouping of so many levels is not a factor",
                        column = crate::report::markdown::code(column)
                    ),
                    (Some(row), line) => {
                        let place = match line {
                            Some(l) => format!("line {l}"),
                            None => format!("data row {}", row.saturating_add(1)),
                        };
                        write!(
                            f,
                            "column {column} has more than {limit} distinct values (value \
                             number {} first occurs at {place}), more than a factor may have as \
                             levels; a column of so many groups is an identifier or a \
                             measurement, not a factor",
                            limit + 1,
                            column = crate::report::markdown::code(column)
                        )
                    }
                }
            }
        }
    }
}

impl core::error::Error for FactorError {}
