//! Handlers of the data statements: load, missing, use, factor, keep, show,
//! and the summary table.

use std::sync::Arc;

use super::{Outcome, Session};
use std::io::Read;

use crate::data::sheet::WorkbookKind;
use crate::data::{self, Column, DataSet, LevelOrder, LoadOptions, MixedColumn, Streamed, Values};
use crate::diagnostic::Diagnostic;
use crate::lang::{CompareOp, Condition, Literal, LoadClauses, Span, Spanned};
use crate::report::markdown::code;
use crate::report::{Cell, Column as Col, Format, InputRecord, Item, Table};
use crate::world::{io_error, Opened, WorldError};

/// Rows that `show` lists.
const PREVIEW_ROWS: usize = 8;

/// Files above this size are fingerprinted on another thread while they are read.
const LARGE_FILE_BYTES: usize = 1 << 20;

/// A file's data set and fingerprint from its bytes. The fingerprint of a large file is
/// taken on another thread meanwhile (a small one is not worth waking the pool for).
fn read_whole(bytes: &[u8], opts: &LoadOptions) -> (Result<DataSet, data::LoadError>, String) {
    if bytes.len() > LARGE_FILE_BYTES {
        rayon::join(
            || data::read_delimited(bytes, opts),
            || data::sha256_hex(bytes),
        )
    } else {
        (data::read_delimited(bytes, opts), data::sha256_hex(bytes))
    }
}

impl Session<'_> {
    /// `load "FILE" ...`: delimited text, a sheet of a workbook, or a table or query of a
    /// SQLite file, by the file's extension.
    pub(super) fn load(
        &mut self,
        path: &Spanned<String>,
        name: Option<&Spanned<String>>,
        clauses: &LoadClauses,
    ) -> Outcome {
        let Some(kind) = FileKind::of(&path.value) else {
            // What is wrong with the file itself (missing, outside the folder, a device) is
            // said first, as for a file of a known kind.
            self.world
                .open(&path.value)
                .map_err(|e| Diagnostic::new(path.span, e.to_string()).label("this file"))?;
            return Err(Diagnostic::new(
                path.span,
                format!(
                    "covey reads delimited text (.csv, .txt, .tsv, .tab), workbooks (.xlsx, .xlsm, .xls, .ods) and SQLite files (.sqlite, .sqlite3, .db), not \"{}\"",
                    path.value
                ),
            )
            .label("unknown kind of file")
            .help("save the data in one of these kinds of file, or rename it if it is one"));
        };
        kind.check_clauses(&path.value, clauses)?;
        let set_name = match name {
            Some(n) => n.value.clone(),
            None => default_name(&path.value),
        };
        let loaded = match kind {
            FileKind::Delimited(delimiter) => {
                self.load_delimited(path, &set_name, delimiter, clauses)?
            }
            FileKind::Workbook(kind) => self.load_workbook(path, &set_name, kind, clauses)?,
            FileKind::Sqlite => self.load_sqlite(path, &set_name, clauses)?,
        };
        Ok(self.install(loaded))
    }

    /// `load database NAME query "SQL"`: the rows of a PostgreSQL query, over the connection
    /// the command line gives for NAME.
    pub(super) fn load_database(
        &mut self,
        database: &Spanned<String>,
        query: &Spanned<String>,
        name: Option<&Spanned<String>>,
    ) -> Outcome {
        let Some(url) = self.databases.url(&database.value) else {
            return Err(Diagnostic::new(
                database.span,
                format!(
                    "no address was given for database {}",
                    crate::report::markdown::code(&database.value)
                ),
            )
            .label("which database?")
            .help(format!(
                "give its address on the command line: covey render --database {}=postgresql://USER@HOST/DATABASE ... (the address is never written into the document or its rendering)",
                database.value
            )));
        };
        let set_name = name.map_or_else(|| database.value.clone(), |n| n.value.clone());
        let read =
            data::database::read_database(url, &query.value, &set_name, &self.missing_markers)
                .map_err(|e| {
                    let span = match e {
                        data::database::DbError::BadAddress(_)
                        | data::database::DbError::Connect(_) => database.span,
                        _ => query.span,
                    };
                    Diagnostic::new(
                        span,
                        format!(
                            "database {}: {e}",
                            crate::report::markdown::code(&database.value)
                        ),
                    )
                    .label("while reading this database")
                })?;
        let rows_sha = read.set.rows_sha256();
        let record = InputRecord {
            path: database.value.clone(),
            sha256: rows_sha.clone(),
            rows: read.set.n_rows(),
            columns: read.set.columns.len(),
            part: Some(format!("query \"{}\"", query.value)),
            rows_sha256: None,
            database: true,
        };
        let sentence = format!(
            "Loaded the rows of a query on database {} as data set {}: {} rows, {} columns (rows SHA-256 {}).",
            code(&database.value),
            code(&set_name),
            read.set.n_rows(),
            read.set.columns.len(),
            crate::report::markdown::code(&rows_sha)
        );
        let notes = mixed_notes(&read.set, &read.mixed);
        Ok(self.install(Loaded {
            set: read.set,
            record,
            sentence,
            notes,
        }))
    }

    /// Keeps a loaded data set (in place of one of the same name) as the current one, and
    /// records its input; the load's output.
    fn install(&mut self, loaded: Loaded) -> Vec<Item> {
        let Loaded {
            set,
            record,
            sentence,
            notes,
        } = loaded;
        if !self.inputs.contains(&record) {
            self.inputs.push(record);
        }
        let mut items = vec![Item::Text(sentence)];
        items.extend(notes);
        items.push(Item::Table(columns_table(&set, "Columns read")));
        if let Some(i) = self.data_sets.iter().position(|d| d.name == set.name) {
            self.data_sets[i] = set;
            self.current = Some(i);
        } else {
            self.data_sets.push(set);
            self.current = Some(self.data_sets.len() - 1);
        }
        items
    }

    fn load_delimited(
        &mut self,
        path: &Spanned<String>,
        set_name: &str,
        default: u8,
        clauses: &LoadClauses,
    ) -> Result<Loaded, Diagnostic> {
        let world_error =
            |e: WorldError| Diagnostic::new(path.span, e.to_string()).label("this file");
        let given = clauses.separator.as_ref().map(separator_byte).transpose()?;
        let decimal_comma = match &clauses.decimal {
            None => false,
            Some(d) if d.value == "," => true,
            Some(d) if d.value == "." => false,
            Some(d) => {
                return Err(Diagnostic::new(
                    d.span,
                    format!(
                        "`decimal \"{}\"`: decimals are marked by a point or a comma",
                        d.value
                    ),
                )
                .label("not a decimal mark")
                .help("write decimal \",\" for 3,5 or decimal \".\" for 3.5"))
            }
        };
        let opened = self.world.open(&path.value).map_err(world_error)?;
        let Opened { mut reader, len } = opened;
        // Without a separator, a .csv file whose header is one field holding semicolons,
        // tabs or vertical bars is read with that separator, and the output says so.
        let mut detected = None;
        let mut head = Vec::new();
        if given.is_none() && default == b',' {
            read_head(&mut *reader, &mut head)
                .map_err(|e| world_error(io_error(&path.value, &e)))?;
            detected = data::detect_separator(&head);
        }
        let delimiter = given.or(detected).unwrap_or(default);
        let opts = LoadOptions {
            name: set_name.to_string(),
            delimiter,
            missing: self.missing_markers.clone(),
            decimal_comma,
        };
        let mut reader: Box<dyn std::io::Read + Send> =
            Box::new(std::io::Cursor::new(head).chain(reader));
        // A large file is read as a stream; a small one, or one the stream reader hands
        // back, whole.
        let streamed = data::stream_delimited(&mut *reader, len, &opts)
            .map_err(|e| world_error(io_error(&path.value, &e)))?;
        drop(reader);
        // The stream reader hands back any file with an unnamed column, so only a file read
        // whole can have had one left out.
        let whole = |bytes: &[u8]| {
            let (set, sha) = read_whole(bytes, &opts);
            let unnamed = match &set {
                Ok(_) => data::unnamed_columns(bytes, delimiter),
                Err(_) => Vec::new(),
            };
            (set, sha, unnamed)
        };
        let (set, sha, unnamed) = match streamed {
            Streamed::Read { set, sha256 } => (Ok(set), sha256, Vec::new()),
            Streamed::Whole(bytes) => whole(&bytes),
            Streamed::Again => whole(&self.world.read(&path.value).map_err(world_error)?),
        };
        let refused = match &set {
            Err(data::LoadError::RefusedNumber {
                text,
                suggestion: data::Suggestion::MissingMarker | data::Suggestion::NonFiniteText,
                ..
            }) => Some(text.clone()),
            _ => None,
        };
        self.loads.push((path.value.clone(), refused));
        let set = set.map_err(|e| {
            let d = Diagnostic::new(path.span, format!("in \"{}\": {e}", path.value))
                .label("while reading this file");
            match load_help(&e, &path.value, clauses, delimiter, decimal_comma) {
                Some(h) => d.help(h),
                None => d,
            }
        })?;
        let record = InputRecord {
            path: path.value.clone(),
            sha256: sha.clone(),
            rows: set.n_rows(),
            columns: set.columns.len(),
            ..InputRecord::default()
        };
        let mut sentence = format!(
            "Loaded {} as data set {}: {} rows, {} columns (SHA-256 {}).",
            code(&path.value),
            code(set_name),
            set.n_rows(),
            set.columns.len(),
            crate::report::markdown::code(&sha)
        );
        if let Some(d) = detected {
            sentence.push_str(&format!(
                " Its header holds no comma but {}, so its fields are read as separated by {} (write `separator {}` to say so, or `separator \",\"` for one column).",
                separator_words(d),
                separator_words(d),
                separator_clause(d)
            ));
        }
        if decimal_comma {
            sentence.push_str(" Decimals are read with a comma (3,5 is 3.5).");
        }
        if !unnamed.is_empty() {
            let one = unnamed.len() == 1;
            sentence.push_str(&format!(
                " Column{} {} of the file {} no name in the header and no value in any row (as when every line ends with a separator), so {} left out.",
                if one { "" } else { "s" },
                data::list_positions(&unnamed),
                if one { "has" } else { "have" },
                if one { "it is" } else { "they are" },
            ));
        }
        Ok(Loaded {
            set,
            record,
            sentence,
            notes: Vec::new(),
        })
    }

    fn load_workbook(
        &mut self,
        path: &Spanned<String>,
        set_name: &str,
        kind: WorkbookKind,
        clauses: &LoadClauses,
    ) -> Result<Loaded, Diagnostic> {
        let bytes = self
            .world
            .read(&path.value)
            .map_err(|e| Diagnostic::new(path.span, e.to_string()).label("this file"))?;
        let sha = data::sha256_hex(&bytes);
        let sheet = clauses.sheet.as_ref();
        let read = data::sheet::read_workbook(
            &bytes,
            kind,
            sheet.map(|s| s.value.as_str()),
            set_name,
            &self.missing_markers,
        )
        .map_err(|e| {
            let span = match (&e, sheet) {
                (data::sheet::SheetError::UnknownSheet { .. }, Some(s)) => s.span,
                _ => path.span,
            };
            Diagnostic::new(span, format!("in \"{}\": {e}", path.value))
                .label("while reading this workbook")
        })?;
        let part = format!("sheet \"{}\"", read.sheet);
        let record = InputRecord {
            path: path.value.clone(),
            sha256: sha.clone(),
            rows: read.set.n_rows(),
            columns: read.set.columns.len(),
            part: Some(part.clone()),
            ..InputRecord::default()
        };
        let sentence = format!(
            "Loaded {}, sheet {}, as data set {}: {} rows, {} columns (SHA-256 {}); rows are named by the sheet's own row numbers.",
            code(&path.value),
            code(&read.sheet),
            code(set_name),
            read.set.n_rows(),
            read.set.columns.len(),
            crate::report::markdown::code(&sha)
        );
        let mut notes = mixed_notes(&read.set, &read.mixed);
        if !read.dates.is_empty() {
            let list: Vec<String> = read.dates.iter().map(|c| code(c)).collect();
            notes.push(Item::Text(format!(
                "Dates and times in {} are read as ISO 8601 text (such as 2024-05-17, or 2024-05-17T08:30:00), one level per distinct value.",
                list.join(", ")
            )));
        }
        Ok(Loaded {
            set: read.set,
            record,
            sentence,
            notes,
        })
    }

    fn load_sqlite(
        &mut self,
        path: &Spanned<String>,
        set_name: &str,
        clauses: &LoadClauses,
    ) -> Result<Loaded, Diagnostic> {
        let (source, at) = match (&clauses.table, &clauses.query) {
            (Some(table), None) => (data::sqlite::SqlSource::Table(&table.value), table.span),
            (None, Some(q)) => (data::sqlite::SqlSource::Query(&q.value), q.span),
            _ => {
                return Err(Diagnostic::new(
                    path.span,
                    "a SQLite file is read by a table or by a query, one of the two",
                )
                .label("which rows?")
                .help(format!(
                    "write load \"{}\" table NAME, or load \"{}\" query \"SELECT ...\"",
                    path.value, path.value
                )))
            }
        };
        let local = self
            .world
            .local(&path.value)
            .map_err(|e| Diagnostic::new(path.span, e.to_string()).label("this file"))?;
        let fingerprint = || -> Result<String, String> {
            // The file SQLite opened by its path must be the one confined and opened here.
            if !crate::world::same_file(&local.file, &local.path) {
                return Err("the file was replaced while it was being read; load it again".into());
            }
            let mut file = &local.file;
            data::sha256_reader(&mut file).map_err(|e| e.to_string())
        };
        let read = data::sqlite::read_sqlite(
            &local.path,
            source,
            set_name,
            &self.missing_markers,
            fingerprint,
        )
        .map_err(|e| {
            let span = match e {
                data::sqlite::SqlError::Open(_) | data::sqlite::SqlError::Fingerprint(_) => {
                    path.span
                }
                _ => at,
            };
            Diagnostic::new(span, format!("in \"{}\": {e}", path.value))
                .label("while reading this database file")
        })?;
        let rows_sha = read.set.rows_sha256();
        let part = match source {
            data::sqlite::SqlSource::Table(t) => format!("table {}", quote_name(t)),
            data::sqlite::SqlSource::Query(q) => format!("query \"{q}\""),
        };
        let record = InputRecord {
            path: path.value.clone(),
            sha256: read.file_sha256.clone(),
            rows: read.set.n_rows(),
            columns: read.set.columns.len(),
            part: Some(part.clone()),
            rows_sha256: Some(rows_sha.clone()),
            database: false,
        };
        let sentence = format!(
            "Loaded {}, {}, as data set {}: {} rows, {} columns (file SHA-256 {}, rows SHA-256 {}).",
            code(&path.value),
            code(&part),
            code(set_name),
            read.set.n_rows(),
            read.set.columns.len(),
            crate::report::markdown::code(&read.file_sha256),
            crate::report::markdown::code(&rows_sha)
        );
        let notes = mixed_notes(&read.set, &read.mixed);
        Ok(Loaded {
            set: read.set,
            record,
            sentence,
            notes,
        })
    }

    pub(super) fn missing(&mut self, markers: &[String]) -> Outcome {
        self.missing_markers = markers.to_vec();
        let list: Vec<String> = markers.iter().map(|m| code(m)).collect();
        let mut items = vec![Item::Text(format!(
            "From here on, empty cells and {} count as missing values in loaded files.",
            list.join(", ")
        ))];
        // A marker that a file loaded above refused, or holds as text: this statement comes
        // after the `load` it was meant for, and changes nothing there.
        for m in markers {
            let refused = self
                .loads
                .iter()
                .find(|(_, t)| t.as_deref() == Some(m.as_str()));
            let held = || {
                self.data_sets.iter().find_map(|d| {
                    d.columns
                        .iter()
                        .find(|c| match &c.values {
                            Values::Text(t) => t.present_texts().contains(&m.as_str()),
                            Values::Factor(f) => f.levels.contains(m),
                            Values::Numeric(_) => false,
                        })
                        .map(|c| (d.name.as_str(), c.name.as_str()))
                })
            };
            let why = match (refused, held()) {
                (Some((path, _)), _) => format!(
                    "{} above stopped at {}",
                    code(&format!("load \"{path}\"")),
                    code(m)
                ),
                (None, Some((set, column))) => format!(
                    "data set {}, loaded above, holds {} as text in column {}",
                    code(set),
                    code(m),
                    code(column)
                ),
                (None, None) => continue,
            };
            items.push(Item::Warning(format!(
                "{why}: `missing` applies only to files loaded after it, so give it before `load`."
            )));
        }
        Ok(items)
    }

    pub(super) fn use_data_set(&mut self, name: &Spanned<String>) -> Outcome {
        match self.data_sets.iter().position(|d| d.name == name.value) {
            Some(i) => {
                self.current = Some(i);
                let d = &self.data_sets[i];
                Ok(vec![Item::Text(format!(
                    "Now using data set {} ({} rows).",
                    code(&d.name),
                    d.n_rows()
                ))])
            }
            None => {
                let known: Vec<&str> = self.data_sets.iter().map(|d| d.name.as_str()).collect();
                Err(unknown_data_set(name, &known))
            }
        }
    }

    pub(super) fn factor(
        &mut self,
        column: &Spanned<String>,
        levels: Option<&[Spanned<String>]>,
    ) -> Outcome {
        let set = self.current_mut(column.span)?;
        let idx = column_index(set, column)?;
        let declared: Option<Vec<String>> =
            levels.map(|l| l.iter().map(|s| s.value.clone()).collect());
        if let Some(decl) = levels {
            for (i, a) in decl.iter().enumerate() {
                if decl[..i].iter().any(|b| b.value == a.value) {
                    return Err(Diagnostic::new(
                        a.span,
                        format!(
                            "level {} is listed twice",
                            crate::report::markdown::code(&a.value)
                        ),
                    )
                    .label("repeated")
                    .help("list each level once"));
                }
            }
        }
        // The factor takes the place of the column, and may take its row codes with it.
        let factor = data::take_factor(&mut set.columns[idx], declared.as_deref())
            .map_err(|e| e.locate(&set.row_numbers))
            .map_err(|e| factor_error(column, levels, &e))?;
        let unused: Vec<String> = data::unused_levels(&factor)
            .iter()
            .map(|s| s.to_string())
            .collect();
        let order = factor.order;
        let listed: Vec<String> = factor
            .levels
            .iter()
            .enumerate()
            .map(|(i, l)| {
                if i == 0 {
                    format!("{} (reference)", code(l))
                } else {
                    code(l)
                }
            })
            .collect();
        let n_levels = factor.levels.len();
        set.columns[idx].values = Values::Factor(factor);
        let mut items = vec![Item::Text(format!(
            "{} is a factor with {n_levels} levels: {}{}.",
            code(&column.value),
            listed.join(", "),
            match order {
                LevelOrder::FirstAppearance => {
                    " (in order of first appearance; fix the order with `levels`)"
                }
                LevelOrder::Declared => "",
            }
        ))];
        for u in unused {
            items.push(Item::Warning(format!(
                "Level {} is declared but no row has it.",
                code(&u)
            )));
        }
        Ok(items)
    }

    pub(super) fn keep(&mut self, condition: &Condition, span: Span) -> Outcome {
        let set = self.current(span)?;
        // Checked once for the whole data set before any row: a value of the wrong type,
        // or one that no row can hold, is an error rather than a filter that quietly keeps
        // no rows (or all of them).
        check_condition(set, condition)?;
        let mut keep = vec![true; set.n_rows()];
        let mut missing = vec![false; set.n_rows()];
        for (row, slot) in keep.iter_mut().enumerate() {
            *slot = eval(set, condition, row, &mut missing[row])?;
        }
        let before = set.n_rows();
        let filtered = set.filter(&keep);
        let after = filtered.n_rows();
        let n_missing = keep
            .iter()
            .zip(&missing)
            .filter(|(k, m)| !**k && **m)
            .count();
        let name = filtered.name.clone();
        let set = self.current_mut(span)?;
        *set = filtered;
        let mut text = format!(
            "Kept {after} of {before} rows of {}; dropped {}.",
            code(&name),
            before - after
        );
        if n_missing > 0 {
            text.push_str(&format!(
                " Of the dropped rows, {n_missing} had a missing value in a column of the condition."
            ));
        }
        let mut items = vec![Item::Text(text)];
        if after == 0 {
            items.push(Item::Warning("No rows are left.".into()));
        }
        Ok(items)
    }

    pub(super) fn show(&mut self, name: Option<&Spanned<String>>, span: Span) -> Outcome {
        let set = match name {
            Some(n) => self
                .data_sets
                .iter()
                .find(|d| d.name == n.value)
                .ok_or_else(|| {
                    Diagnostic::new(
                        n.span,
                        format!(
                            "there is no data set called {}",
                            crate::report::markdown::code(&n.value)
                        ),
                    )
                    .label("unknown data set")
                })?,
            None => self.current(span)?,
        };
        let mut preview = Table::new(
            "preview",
            format!(
                "First {} of {} rows of {}",
                set.n_rows().min(PREVIEW_ROWS),
                set.n_rows(),
                code(&set.name)
            ),
            std::iter::once(Col::new("row", set.rows_are.header(), Format::Count))
                .chain(
                    set.columns
                        .iter()
                        // Numbers as the file's values show them, right-aligned as numbers
                        // (a numeric format holding text cells keeps their text).
                        .map(|c| {
                            let format = match c.values {
                                Values::Numeric(_) => Format::Exact,
                                _ => Format::Text,
                            };
                            Col::new(&c.name, &c.name, format)
                        }),
                )
                .collect(),
        );
        if let Some(l) = &set.label {
            preview
                .notes
                .push(format!("Rows are named by {}.", code(l)));
        }
        for row in 0..set.n_rows().min(PREVIEW_ROWS) {
            let mut cells = vec![Cell::from(set.row_numbers.get(row).unwrap_or(0))];
            for c in &set.columns {
                cells.push(if c.is_missing(row) {
                    Cell::Missing
                } else {
                    Cell::Text(c.display_value(row))
                });
            }
            preview.push(cells);
        }
        Ok(vec![
            Item::Table(columns_table(set, "Columns")),
            Item::Table(preview),
        ])
    }

    pub(super) fn summary(
        &mut self,
        column: &Spanned<String>,
        by: Option<&Spanned<String>>,
        span: Span,
    ) -> Outcome {
        let set = self.current(span)?;
        let idx = column_index(set, column)?;
        let values = numeric_values(set, idx, column)?;
        let mut t = Table::new(
            "summary",
            match by {
                Some(b) => format!("Summary of {} by {}", code(&column.value), code(&b.value)),
                None => format!("Summary of {}", code(&column.value)),
            },
            vec![
                Col::new("level", "level", Format::Text),
                Col::new("n", "n", Format::Count),
                Col::new("missing", "missing", Format::Count),
                Col::new("mean", "mean", Format::Units(4)),
                Col::new("sd", "SD", Format::Digits(4)),
                Col::new("se", "SE", Format::Digits(4)),
                Col::new("min", "min", Format::Units(4)),
                Col::new("median", "median", Format::Units(4)),
                Col::new("max", "max", Format::Units(4)),
            ],
        );
        // Live references in prose name a summary by its column.
        t.subject = Some(column.value.clone());
        match by {
            None => t.push(summary_row("all", values.iter().copied())),
            Some(b) => {
                let f = factor_column(set, b)?;
                for (li, level) in f.levels.iter().enumerate() {
                    let vals = f
                        .codes
                        .iter()
                        .zip(values.iter())
                        .filter(|(c, _)| c.get() == Some(li as u32))
                        .map(|(_, v)| *v);
                    t.push(summary_row(level, vals));
                }
                let no_level = f.codes.iter().filter(|c| c.is_missing()).count();
                if no_level > 0 {
                    t.notes.push(format!(
                        "{no_level} rows with a missing {} are not in any level.",
                        code(&b.value)
                    ));
                }
            }
        }
        t.notes
            .push("SD uses the n - 1 divisor; SE = SD / sqrt(n).".into());
        Ok(vec![Item::Table(t)])
    }
}

/// A data set read by a load, with its record for the provenance and what the load says.
struct Loaded {
    set: DataSet,
    record: InputRecord,
    sentence: String,
    /// Said after the first sentence (columns read as text, dates).
    notes: Vec<Item>,
}

/// The kinds of data file, by extension.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
enum FileKind {
    /// Delimited text, with its default separator.
    Delimited(u8),
    Workbook(WorkbookKind),
    Sqlite,
}

impl FileKind {
    fn of(path: &str) -> Option<FileKind> {
        let lower = path.to_lowercase();
        let ends = |exts: &[&str]| exts.iter().any(|e| lower.ends_with(e));
        if ends(&[".tsv", ".tab"]) {
            Some(FileKind::Delimited(b'\t'))
        } else if ends(&[".csv", ".txt"]) {
            Some(FileKind::Delimited(b','))
        } else if ends(&[".sqlite", ".sqlite3", ".db", ".db3"]) {
            Some(FileKind::Sqlite)
        } else {
            WorkbookKind::of_path(path).map(FileKind::Workbook)
        }
    }

    fn name(self) -> &'static str {
        match self {
            FileKind::Delimited(_) => "delimited text",
            FileKind::Workbook(_) => "a workbook",
            FileKind::Sqlite => "a SQLite file",
        }
    }

    /// Refuses a clause that does not go with this kind of file, at the clause.
    fn check_clauses(self, path: &str, c: &LoadClauses) -> Result<(), Diagnostic> {
        let wrong = |clause: &Spanned<String>, word: &str, goes_with: &str| {
            Diagnostic::new(
                clause.span,
                format!(
                    "{word} is for {goes_with}, and \"{path}\" is {}",
                    self.name(),
                    word = crate::report::markdown::code(word)
                ),
            )
            .label("not for this kind of file")
        };
        let delimited = matches!(self, FileKind::Delimited(_));
        let workbook = matches!(self, FileKind::Workbook(_));
        let sqlite = self == FileKind::Sqlite;
        let checks = [
            (
                &c.sheet,
                "sheet",
                workbook,
                "workbooks (.xlsx, .xlsm, .xls, .ods)",
            ),
            (&c.table, "table", sqlite, "SQLite files"),
            (
                &c.query,
                "query",
                sqlite,
                "SQLite files (and `load database`)",
            ),
            (
                &c.separator,
                "separator",
                delimited,
                "delimited text (.csv, .txt, .tsv, .tab)",
            ),
            (
                &c.decimal,
                "decimal",
                delimited,
                "delimited text (.csv, .txt, .tsv, .tab)",
            ),
        ];
        for (clause, word, fits, goes_with) in checks {
            if let (Some(cl), false) = (clause, fits) {
                return Err(wrong(cl, word, goes_with));
            }
        }
        if let (Some(_), Some(q)) = (&c.table, &c.query) {
            return Err(Diagnostic::new(q.span, "give a table or a query, not both")
                .label("one of the two"));
        }
        Ok(())
    }
}

/// Most bytes read to find the end of a delimited file's header line for
/// [`data::detect_separator`]: as long as the longest line covey reads.
const HEAD_BYTES: usize = data::MAX_LINE_BYTES;

/// Reads the first bytes of `reader` into `head`, up to and including the first line break
/// (or [`HEAD_BYTES`], or the end of the file).
fn read_head(reader: &mut (dyn std::io::Read + Send), head: &mut Vec<u8>) -> std::io::Result<()> {
    let mut buf = [0u8; 8192];
    while head.len() < HEAD_BYTES {
        let n = match reader.read(&mut buf) {
            Ok(n) => n,
            Err(e) if e.kind() == std::io::ErrorKind::Interrupted => continue,
            Err(e) => return Err(e),
        };
        let Some(read) = buf.get(..n) else { break };
        if read.is_empty() {
            break;
        }
        head.extend_from_slice(read);
        if memchr::memchr2(b'\n', b'\r', read).is_some() {
            break;
        }
    }
    Ok(())
}

/// The byte of a `separator` clause: one ASCII character other than the double quote and a
/// line break (`tab` is the tab).
/// What to write after a load of delimited text failed, where the message's own advice
/// cannot say it exactly: the load with `decimal ","` for a decimal comma, and where the
/// decimal commas must be when commas also separate the fields.
fn load_help(
    e: &data::LoadError,
    path: &str,
    clauses: &LoadClauses,
    delimiter: u8,
    decimal_comma: bool,
) -> Option<String> {
    match e {
        data::LoadError::RefusedNumber {
            suggestion: data::Suggestion::DecimalComma | data::Suggestion::AmbiguousComma,
            ..
        } if !decimal_comma => {
            let separator = match (&clauses.separator, delimiter) {
                (None, _) => String::new(),
                (Some(_), b'\t') => " separator tab".to_owned(),
                (Some(_), b) => format!(" separator \"{}\"", char::from(b)),
            };
            let quoted = if delimiter == b',' {
                " (the quotes around such a number keep its comma inside its field)"
            } else {
                ""
            };
            Some(format!(
                "if the file marks decimals with a comma, write: load \"{path}\"{separator} decimal \",\"{quoted}"
            ))
        }
        data::LoadError::RaggedRow { .. } if decimal_comma && delimiter == b',' => Some(
            "with decimal \",\" in a file whose fields are separated by commas, every number with a decimal comma must be in quotes (\"1,5\"); or save the file with semicolons between fields and write separator \";\""
                .to_owned(),
        ),
        _ => None,
    }
}

fn separator_byte(s: &Spanned<String>) -> Result<u8, Diagnostic> {
    match s.value.as_bytes() {
        [b] if b.is_ascii() && *b != b'"' && *b != b'\n' && *b != b'\r' => Ok(*b),
        _ => Err(Diagnostic::new(
            s.span,
            format!("`separator \"{}\"`: a separator is one character", s.value),
        )
        .label("not a separator")
        .help("write separator \";\", separator \"|\", separator \",\" or separator tab")),
    }
}

/// A separator in words, for the load's sentence.
fn separator_words(b: u8) -> &'static str {
    match b {
        b';' => "semicolons",
        b'\t' => "tabs",
        _ => "vertical bars",
    }
}

/// The clause that names a separator.
fn separator_clause(b: u8) -> &'static str {
    match b {
        b';' => "\";\"",
        b'\t' => "tab",
        _ => "\"|\"",
    }
}

/// What a load says about columns that held both numbers and text.
fn mixed_notes(set: &DataSet, mixed: &[MixedColumn]) -> Vec<Item> {
    mixed
        .iter()
        .map(|m| {
            // A number stored as text (a SQLite column without a numeric type, a sheet's
            // cell formatted as text) is no missing-value marker: say how to store it.
            let advice = match data::parse_number(&m.text) {
                data::NumberParse::Number(_) => "that text is a number stored as text: store the column's values as numbers (number cells in a sheet; numeric values in a database, or a `CAST(... AS REAL)` in the query).".to_owned(),
                _ => format!(
                    "if that text marks a missing value, declare it with `missing \"{}\"` before the load.",
                    m.text.replace('\\', "\\\\").replace('"', "\\\"")
                ),
            };
            Item::Warning(format!(
                "Column {} holds numbers and text ({} holds \"{}\"), so it is read as text; {advice}",
                code(&m.column),
                crate::report::markdown::escape(&set.place_of(m.row)),
                crate::report::markdown::escape(&m.text),
            ))
        })
        .collect()
}

/// The error for `use NAME` of a data set that is not loaded; `known` are those loaded so far.
pub(crate) fn unknown_data_set(name: &Spanned<String>, known: &[&str]) -> Diagnostic {
    let help = match super::closest(&name.value, known) {
        Some(c) => format!("did you mean {c}?", c = crate::report::markdown::code(c)),
        None if known.is_empty() => "load a file first: `load \"FILE\" as NAME`".into(),
        None => format!("the data sets so far are {}", known.join(", ")),
    };
    Diagnostic::new(
        name.span,
        format!(
            "there is no data set called {}",
            crate::report::markdown::code(&name.value)
        ),
    )
    .label("unknown data set")
    .help(help)
}

/// The error for a column that cannot be made the factor a `factor` statement declares: at its
/// levels when it lists them, else at the column.
pub(crate) fn factor_error(
    column: &Spanned<String>,
    levels: Option<&[Spanned<String>]>,
    e: &data::FactorError,
) -> Diagnostic {
    let span = levels
        .and_then(|l| {
            let (first, last) = (l.first()?, l.last()?);
            Some(Span {
                start: first.span.start,
                end: last.span.end,
            })
        })
        .unwrap_or(column.span);
    // A declared level that is a slip for the value the data hold (`hihg` for `high`): point at
    // it and name the value, rather than leave the user to compare the two lists.
    if let (data::FactorError::UndeclaredLevel { value, .. }, Some(levels)) = (e, levels) {
        let names: Vec<&str> = levels.iter().map(|l| l.value.as_str()).collect();
        if let Some(near) = super::closest(value, &names) {
            if let Some(level) = levels.iter().find(|l| l.value == near) {
                return Diagnostic::new(level.span, e.to_string())
                    .label("close to the value in the data")
                    .help(format!(
                        "the declared level {} is close to {}, which the data hold: if it is a \
                         misspelling, write {} in the levels",
                        crate::report::markdown::code(near),
                        crate::report::markdown::code(value),
                        crate::report::markdown::code(&quote_name(value))
                    ));
            }
        }
    }
    Diagnostic::new(span, e.to_string()).label("in this factor")
}

/// The name a data set gets from its file: the file stem.
pub(crate) fn default_name(path: &str) -> String {
    let file = path.rsplit(['/', '\\']).next().unwrap_or(path);
    let stem = file.rsplit_once('.').map_or(file, |(s, _)| s);
    if stem.is_empty() {
        "data".into()
    } else {
        stem.to_string()
    }
}

/// A column name as it must be written in a statement.
pub(crate) fn quote_name(name: &str) -> String {
    // Bare exactly when the grammar reads it as one name (letters of any script).
    let bare = crate::lang::parser::is_whole(crate::lang::parser::Rule::ident, name);
    if bare {
        name.to_string()
    } else {
        format!("\"{}\"", name.replace('\\', "\\\\").replace('"', "\\\""))
    }
}

/// The index of a column, or an error that suggests the closest name.
pub(crate) fn column_index(set: &DataSet, column: &Spanned<String>) -> Result<usize, Diagnostic> {
    set.columns
        .iter()
        .position(|c| c.name == column.value)
        .ok_or_else(|| {
            let mut d = Diagnostic::new(
                column.span,
                format!(
                    "data set {} has no column {}",
                    crate::report::markdown::code(&set.name),
                    crate::report::markdown::code(&column.value)
                ),
            )
            .label("unknown column");
            // An unquoted word that starts a name with spaces: the name, quoted.
            if let Some(q) = super::derived::quoted_suggestion(set, &column.value) {
                return d.help(format!(
                    "a column name with spaces is written in double quotes: did you mean {q}?"
                ));
            }
            d = match set.closest_name(&column.value) {
                Some(c) => d.help(format!(
                    "did you mean {c}?",
                    c = crate::report::markdown::code(c)
                )),
                None => {
                    let names: Vec<&str> = set.columns.iter().map(|c| c.name.as_str()).collect();
                    d.help(format!("its columns are {}", names.join(", ")))
                }
            };
            d
        })
}

/// A factor column of the data set, or an error that says how to declare it.
pub(crate) fn factor_column<'a>(
    set: &'a DataSet,
    column: &Spanned<String>,
) -> Result<&'a crate::data::Factor, Diagnostic> {
    let i = column_index(set, column)?;
    match &set.columns[i].values {
        Values::Factor(f) => Ok(f),
        _ => Err(Diagnostic::new(
            column.span,
            format!(
                "{} is not a factor",
                crate::report::markdown::code(&column.value)
            ),
        )
        .label("not a factor")
        .help(format!(
            "declare it first: `factor {}`",
            quote_name(&column.value)
        ))),
    }
}

/// The values of a numeric column (NaN = missing), or an error that says
/// why the column is not numeric and which row shows it.
pub(crate) fn numeric_values<'a>(
    set: &'a DataSet,
    idx: usize,
    column: &Spanned<String>,
) -> Result<&'a Arc<Vec<f64>>, Diagnostic> {
    let col: &Column = &set.columns[idx];
    match &col.values {
        Values::Numeric(v) => Ok(v),
        Values::Factor(_) => Err(Diagnostic::new(
            column.span,
            format!(
                "{} is a factor, not a numeric column",
                crate::report::markdown::code(&column.value)
            ),
        )
        .label("needs numbers")),
        Values::Text(t) => {
            let mut d = Diagnostic::new(
                column.span,
                format!(
                    "{} is a text column, not a numeric one",
                    crate::report::markdown::code(&column.value)
                ),
            )
            .label("needs numbers");
            if let Some((row, text)) = t.first_non_number() {
                let place = match set.rows_are {
                    data::RowOrigin::FileLines => format!(
                        "line {} of the file",
                        set.row_numbers.get(row).unwrap_or(row + 2)
                    ),
                    _ => set.place_of(row),
                };
                d = d.help(match data::beyond_limit(text) {
                    Some(_) => limit_advice(&column.value, &place, t.iter()),
                    None => format!(
                        "{place} holds {}, which is not a number; fix it, or declare it as a missing-value marker with `missing \"{text}\"` before `load`",
                        code(text)
                    ),
                });
            }
            Err(d)
        }
    }
}

/// Distinct limit texts named in full in the advice on `<0.5`-style cells; more are counted.
const LIMIT_TEXTS_SHOWN: usize = 6;

/// The advice for a numeric column that holds cells such as `<0.5` or `>2000` (`cells`, in row
/// order; the first such is at `place`): values reported as beyond a limit of detection or of
/// a measuring range, which covey will not turn into numbers by itself.
fn limit_advice<'a>(
    column: &str,
    place: &str,
    cells: impl Iterator<Item = Option<&'a str>>,
) -> String {
    let mut texts: Vec<&str> = Vec::new();
    let mut count = 0usize;
    for text in cells.flatten() {
        if data::beyond_limit(text).is_some() {
            count += 1;
            if !texts.contains(&text) {
                texts.push(text);
            }
        }
    }
    let Some((&first, _)) = texts.split_first() else {
        return String::new();
    };
    let (below, limit) = data::beyond_limit(first).unwrap_or((true, f64::NAN));
    let what = if below {
        format!(
            "a value below a limit of detection ({})",
            data::format_number(limit)
        )
    } else {
        format!(
            "a value above a limit (such as the top of a measuring range, {})",
            data::format_number(limit)
        )
    };
    let markers = texts
        .iter()
        .take(LIMIT_TEXTS_SHOWN)
        .map(|t| format!("\"{}\"", t.replace('\\', "\\\\").replace('"', "\\\"")))
        .collect::<Vec<_>>()
        .join(", ");
    let more = texts.len().saturating_sub(LIMIT_TEXTS_SHOWN);
    let more = if more > 0 {
        format!(" (and the {more} other such texts)")
    } else {
        String::new()
    };
    let cells = if count == 1 {
        "it is the only such cell".to_string()
    } else {
        format!("{} has {count} such cells", code(column))
    };
    format!(
        "{place} holds {}, {what}, not a measured value; {cells}. covey does not choose a number \
         for such a value: either declare these cells missing with `missing {markers}`{more} \
         before `load` (their rows are then left out wherever {} is used), or write in the data \
         file the number each stands for (for example the limit itself, or half of it) and say \
         in the document which you chose",
        code(first),
        code(column)
    )
}

fn summary_row(level: &str, values: impl Iterator<Item = f64>) -> Vec<crate::report::Cell> {
    let all: Vec<f64> = values.collect();
    let mut v: Vec<f64> = all.iter().copied().filter(|x| !x.is_nan()).collect();
    let missing = all.len() - v.len();
    let s = crate::stats::describe::describe(&mut v);
    vec![
        level.into(),
        v.len().into(),
        missing.into(),
        s.mean.into(),
        s.sd.into(),
        s.se.into(),
        s.min.into(),
        s.median.into(),
        s.max.into(),
    ]
}

/// The column types and missing counts of a data set.
/// Rows from which a data set's columns are counted side by side.
const PARALLEL_COUNT_ROWS: usize = 1 << 16;

fn columns_table(set: &DataSet, caption: &str) -> Table {
    let mut t = Table::new(
        "columns",
        format!("{caption} of {}", code(&set.name)),
        vec![
            Col::new("column", "column", Format::Text),
            Col::new("type", "type", Format::Text),
            Col::new("missing", "missing", Format::Count),
            Col::new("levels", "levels", Format::Text),
        ],
    );
    // Counting the missing cells is a pass over every cell: on the pool for a large set.
    let missing: Vec<usize> = if set.n_rows() >= PARALLEL_COUNT_ROWS {
        crate::parallel::map(&set.columns, Column::missing_count)
    } else {
        set.columns.iter().map(Column::missing_count).collect()
    };
    for (c, missing) in set.columns.iter().zip(missing) {
        let levels = match &c.values {
            Values::Factor(f) => Cell::Text(f.levels.join(", ")),
            _ => Cell::Missing,
        };
        t.push(vec![
            c.name.as_str().into(),
            c.kind_name().into(),
            missing.into(),
            levels,
        ]);
    }
    t
}

/// Checks a `keep where` condition against the data set before it is evaluated: every column
/// exists; a numeric column is compared with numbers; a text or factor column is compared
/// with `==`, `!=` or `in` only, and with values it can hold (a factor's levels, the texts
/// in a text column's rows).
fn check_condition(set: &DataSet, c: &Condition) -> Result<(), Diagnostic> {
    match c {
        Condition::And(parts) | Condition::Or(parts) => {
            parts.iter().try_for_each(|p| check_condition(set, p))
        }
        Condition::Not(inner) => check_condition(set, inner),
        Condition::Compare { column, op, value } => {
            let idx = column_index(set, column)?;
            let col = &set.columns[idx];
            if matches!(col.values, Values::Numeric(_)) {
                if matches!(value.value, Literal::Text(_)) {
                    return Err(text_for_number(column, &value.value, value.span, false));
                }
                return Ok(());
            }
            if !matches!(op, CompareOp::Eq | CompareOp::Ne) {
                return Err(order_on_text(column, value.span));
            }
            known_value(set, col, column, value)
        }
        Condition::In { column, values } => {
            let idx = column_index(set, column)?;
            let col = &set.columns[idx];
            for v in values {
                if matches!(col.values, Values::Numeric(_)) {
                    if matches!(v.value, Literal::Text(_)) {
                        return Err(text_for_number(column, &v.value, v.span, true));
                    }
                } else {
                    known_value(set, col, column, v)?;
                }
            }
            Ok(())
        }
    }
}

/// The error of a text or factor column compared by order (`site < "north"`). The language
/// server gives the same.
pub(crate) fn order_on_text(column: &Spanned<String>, span: Span) -> Diagnostic {
    Diagnostic::new(
        span,
        format!(
            "{} holds text or levels, which can only be tested with ==, != or in",
            crate::report::markdown::code(&column.value)
        ),
    )
    .label("order comparison on text")
}

/// The error of a numeric column compared with text (`yield_kg > "abc"`); `listed` for a
/// value of `in (...)`. The language server gives the same.
pub(crate) fn text_for_number(
    column: &Spanned<String>,
    value: &Literal,
    span: Span,
    listed: bool,
) -> Diagnostic {
    let what = if listed {
        "its values are numbers"
    } else {
        "it is compared with a number"
    };
    let d = Diagnostic::new(
        span,
        format!(
            "{} is numeric, so {what}",
            crate::report::markdown::code(&column.value)
        ),
    )
    .label("not a number");
    match crate::data::parse_number(value.as_text()) {
        crate::data::NumberParse::Number(_) => d.help(format!(
            "write the number without quotes: {}",
            value.as_text()
        )),
        _ => d.help(format!(
            "compare {} with a number, or test a text column instead",
            crate::report::markdown::code(&column.value)
        )),
    }
}

/// A text or factor column compared with a value: the value must be one of the factor's
/// levels, or a text some row of the column holds.
fn known_value(
    set: &DataSet,
    col: &Column,
    column: &Spanned<String>,
    value: &Spanned<Literal>,
) -> Result<(), Diagnostic> {
    let v = value.value.as_text();
    let (values, factor): (Vec<&str>, bool) = match &col.values {
        Values::Factor(f) => (f.levels.iter().map(String::as_str).collect(), true),
        Values::Text(t) => (t.present_texts(), false),
        Values::Numeric(_) => return Ok(()),
    };
    if values.contains(&v) {
        return Ok(());
    }
    Err(unknown_value(
        &set.name,
        &column.value,
        v,
        value.span,
        &values,
        factor,
    ))
}

/// The error of a comparison with a value that a text or factor column does not hold: it
/// names the values it can hold, and suggests one that differs only in case (or is close).
/// The language server gives the same.
pub(crate) fn unknown_value(
    set_name: &str,
    column: &str,
    value: &str,
    span: Span,
    values: &[&str],
    factor: bool,
) -> Diagnostic {
    /// Values listed in full up to this many.
    const LISTED: usize = 20;
    let message = if factor {
        format!(
            "{value} is not a level of factor {column}",
            column = crate::report::markdown::code(column),
            value = crate::report::markdown::code(value)
        )
    } else {
        format!(
            "no row of data set {set_name} has {value} in {column}",
            column = crate::report::markdown::code(column),
            set_name = crate::report::markdown::code(set_name),
            value = crate::report::markdown::code(value)
        )
    };
    let quoted: Vec<String> = values
        .iter()
        .take(LISTED)
        .map(|v| crate::report::markdown::code(v).to_string())
        .collect();
    let mut list = quoted.join(", ");
    if values.len() > LISTED {
        list.push_str(&format!(" and {} more", values.len() - LISTED));
    }
    let kind = if factor { "levels" } else { "values" };
    let known = if values.is_empty() {
        format!(
            "{column} holds no {kind} here",
            column = crate::report::markdown::code(column)
        )
    } else {
        format!("its {kind} are {list}")
    };
    let lower = value.to_lowercase();
    let suggestion = values
        .iter()
        .find(|c| c.to_lowercase() == lower)
        .copied()
        .or_else(|| super::closest(value, values));
    let help = match suggestion {
        Some(s) => {
            format!(
                "did you mean {s}? Values are compared exactly, case included; {known}",
                s = crate::report::markdown::code(s)
            )
        }
        None => format!("{known}; values are compared exactly, case included"),
    };
    Diagnostic::new(span, message)
        .label(if factor {
            "not a level"
        } else {
            "no row has this"
        })
        .help(help)
}

/// Evaluates a `keep where` condition on one row. A comparison with a
/// missing cell is false, and `missing` records that it happened.
fn eval(set: &DataSet, c: &Condition, row: usize, missing: &mut bool) -> Result<bool, Diagnostic> {
    Ok(match c {
        Condition::And(parts) => {
            let mut all = true;
            for p in parts {
                all &= eval(set, p, row, missing)?;
            }
            all
        }
        Condition::Or(parts) => {
            let mut any = false;
            for p in parts {
                any |= eval(set, p, row, missing)?;
            }
            any
        }
        Condition::Not(inner) => !eval(set, inner, row, missing)?,
        Condition::Compare { column, op, value } => {
            let idx = column_index(set, column)?;
            match cell_value(&set.columns[idx], row) {
                None => {
                    *missing = true;
                    false
                }
                // [`check_condition`] has refused text for a number and an order on text.
                Some(CellValue::Number(x)) => match &value.value {
                    Literal::Number(v, _) => compare_numbers(x, *op, *v),
                    Literal::Text(_) => false,
                },
                Some(CellValue::Text(s)) => match op {
                    CompareOp::Eq => s == value.value.as_text(),
                    CompareOp::Ne => s != value.value.as_text(),
                    _ => false,
                },
            }
        }
        Condition::In { column, values } => {
            let idx = column_index(set, column)?;
            match cell_value(&set.columns[idx], row) {
                None => {
                    *missing = true;
                    false
                }
                Some(CellValue::Number(x)) => values
                    .iter()
                    .any(|v| matches!(v.value, Literal::Number(n, _) if n == x)),
                Some(CellValue::Text(s)) => values.iter().any(|v| s == v.value.as_text()),
            }
        }
    })
}

enum CellValue<'a> {
    Number(f64),
    Text(&'a str),
}

fn cell_value(col: &Column, row: usize) -> Option<CellValue<'_>> {
    match &col.values {
        Values::Numeric(v) => v
            .get(row)
            .copied()
            .filter(|x| !x.is_nan())
            .map(CellValue::Number),
        Values::Text(t) => t.get(row).map(CellValue::Text),
        Values::Factor(f) => f
            .codes
            .get(row)
            .and_then(|c| c.get())
            .and_then(|c| f.levels.get(c as usize))
            .map(|s| CellValue::Text(s.as_str())),
    }
}

fn compare_numbers(x: f64, op: CompareOp, v: f64) -> bool {
    match op {
        CompareOp::Eq => x == v,
        CompareOp::Ne => x != v,
        CompareOp::Lt => x < v,
        CompareOp::Le => x <= v,
        CompareOp::Gt => x > v,
        CompareOp::Ge => x >= v,
    }
}
