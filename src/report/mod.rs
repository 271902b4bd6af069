//! Results as typed values, and their views: Markdown, JSON (and HTML).
//!
//! A statement produces [`Item`]s. A [`Table`] holds numbers with the meaning
//! of each column; only the renderers here turn them into text, and no
//! renderer computes a number.

pub mod html;
pub mod json;
pub mod live;
pub mod markdown;
pub mod number;
pub mod visible;

/// How the numbers of one column are shown in Markdown. JSON always carries
/// full precision.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Format {
    /// Text as it is.
    Text,
    /// Whole numbers (counts, degrees of freedom).
    Count,
    /// Decimals chosen per column so that values show about this many
    /// significant digits.
    Digits(u8),
    /// Values in the data's own units (a mean, a minimum, a median): decimals chosen as for
    /// `Digits`, except that a value that is rounding residue beside the table's other `Units`
    /// values shows as zero at their decimals (the mean of a centred column reads 0.000, not
    /// -2.961e-16).
    Units(u8),
    /// A share of variation that is at most 1 (R squared, partial eta squared): decimals as
    /// for `Digits`, and more for a value below 1 that they would round to 1, which would
    /// claim that the model explains everything (1 - 1.7e-8 reads 0.999999983, not 1.00).
    Proportion(u8),
    /// Test statistics (t, F, W): two decimals, as reporting style guides
    /// ask.
    Statistic,
    /// p-values in APA 7th edition style: three decimals, no leading zero,
    /// "< .001" below that.
    P,
    /// A number shown exactly as stored (shortest round-trip form), for data
    /// values.
    Exact,
}

/// One column of a table.
#[derive(Debug, Clone, PartialEq)]
pub struct Column {
    /// The JSON name (stable, documented in the README).
    pub key: String,
    /// The Markdown header.
    pub header: String,
    pub format: Format,
}

impl Column {
    pub fn new(key: &str, header: &str, format: Format) -> Column {
        Column {
            key: key.to_string(),
            header: header.to_string(),
            format,
        }
    }
}

/// A table cell.
#[derive(Debug, Clone, PartialEq)]
pub enum Cell {
    Text(String),
    Number(f64),
    Missing,
}

impl From<f64> for Cell {
    fn from(v: f64) -> Cell {
        if v.is_finite() {
            Cell::Number(v)
        } else {
            Cell::Missing
        }
    }
}

impl From<usize> for Cell {
    fn from(v: usize) -> Cell {
        Cell::Number(v as f64)
    }
}

impl From<Option<f64>> for Cell {
    fn from(v: Option<f64>) -> Cell {
        v.map_or(Cell::Missing, Cell::from)
    }
}

impl From<&str> for Cell {
    fn from(v: &str) -> Cell {
        Cell::Text(v.to_string())
    }
}

impl From<String> for Cell {
    fn from(v: String) -> Cell {
        Cell::Text(v)
    }
}

/// A computed table: its JSON kind, a caption that says what it is, typed
/// columns and rows, and notes to read it by.
#[derive(Debug, Clone, PartialEq)]
pub struct Table {
    pub kind: &'static str,
    pub caption: String,
    pub columns: Vec<Column>,
    pub rows: Vec<Vec<Cell>>,
    pub notes: Vec<String>,
    /// The model (or data set) the table describes, when it has one; live
    /// references in prose find tables by it.
    pub subject: Option<String>,
    /// The confidence level of the table's limits, when it has limits; live references to
    /// pairs say it.
    pub level: Option<f64>,
}

impl Table {
    pub fn new(kind: &'static str, caption: impl Into<String>, columns: Vec<Column>) -> Table {
        Table {
            kind,
            caption: caption.into(),
            columns,
            rows: Vec::new(),
            notes: Vec::new(),
            subject: None,
            level: None,
        }
    }

    pub fn push(&mut self, row: Vec<Cell>) {
        debug_assert_eq!(row.len(), self.columns.len());
        self.rows.push(row);
    }
}

/// What one statement produced, in order.
#[derive(Debug, Clone, PartialEq)]
pub enum Item {
    Table(Table),
    /// A sentence of plain information ("Kept 28 of 30 rows.").
    Text(String),
    /// Something the reader must weigh before trusting the numbers.
    Warning(String),
    /// An error, already laid out with file, line, column and caret.
    Error {
        message: String,
        snippet: String,
    },
    /// A figure, drawn as SVG.
    Figure(Figure),
    /// A gate of the procedure that did not hold.
    GateFailed(String),
}

/// A figure: its SVG text and the words that describe it.
#[derive(Debug, Clone, PartialEq)]
pub struct Figure {
    /// Where the rendering links it, relative to the rendered document
    /// (set by the pipeline: `NAME.figures/blockB-K.svg`), as a path (the Markdown link is
    /// percent-encoded from it).
    pub file: String,
    /// The SVG text; the pipeline moves it to the run's figures.
    pub svg: String,
    /// Alternative text: what the figure shows, for readers who cannot see it.
    pub alt: String,
    /// The caption shown above it.
    pub caption: String,
}

/// The results of one statement.
#[derive(Debug, Clone, PartialEq)]
pub struct Output {
    /// 1-based block number.
    pub block: usize,
    /// 1-based line of the statement in the Markdown document.
    pub line: usize,
    pub statement: String,
    pub items: Vec<Item>,
}

/// An input file (or database) as the provenance section lists it.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct InputRecord {
    /// The path as written in the document (relative to its folder); for a database, its
    /// logical name.
    pub path: String,
    /// The SHA-256 of the file's bytes; for a database, of the rows read.
    pub sha256: String,
    pub rows: usize,
    pub columns: usize,
    /// What was read of it: `sheet "Week 6"`, `table measurements`, `query "SELECT ..."`.
    pub part: Option<String>,
    /// A SHA-256 of the rows a table or query gave, as covey read them
    /// ([`crate::data::DataSet::rows_sha256`]).
    pub rows_sha256: Option<String>,
    /// The input is a database named on the command line, not a file (its address is never
    /// recorded).
    pub database: bool,
}
