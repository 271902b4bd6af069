//! The data files a document loads, as the language server knows them: each file's columns, their
//! types, missing counts and distinct values, read by the renderer's own `load` through the
//! renderer's own confined file access ([`FsWorld`]), and kept while the file's fingerprint
//! (where it resolves, its length, its modification time) stays the same. A file is read on
//! another thread, so a keystroke never waits for it; the check that asked for it runs again
//! when it is in.

use std::collections::{BTreeMap, BTreeSet};
use std::path::{Path, PathBuf};
use std::sync::Arc;

use crossbeam_channel::{Receiver, Sender};

use crate::data::{format_number, Column, DataSet, Values};
use crate::diagnostic::Diagnostic;
use crate::lang::{LoadClauses, Span, Spanned, Statement, StatementKind};
use crate::session::Session;
use crate::world::{Fingerprint, FsWorld};

/// Distinct values kept per column; a column with more (an identifier, a measurement) is
/// described by its count alone, which bounds the memory a large file takes here.
pub const MAX_LEVELS: usize = 1000;

/// Distinct values a numeric column may have for its values to be offered as levels (numeric
/// codes such as 1, 2, 3 often name groups).
pub const MAX_NUMERIC_LEVELS: usize = 50;

/// A column as read from its file.
#[derive(Debug, Clone, PartialEq)]
pub struct ColumnSummary {
    pub name: String,
    /// Whether every non-missing cell is a number.
    pub numeric: bool,
    /// Missing cells.
    pub missing: usize,
    /// The distinct values in order of first appearance, each with the file line where it first
    /// appears; `None` when there are more than [`MAX_LEVELS`] (or, for a numeric column, more
    /// than [`MAX_NUMERIC_LEVELS`]).
    pub levels: Option<Vec<(String, usize)>>,
    /// How many distinct values the column has, when counted (up to the limits above).
    pub distinct: Option<usize>,
}

/// A data file as read.
#[derive(Debug, Clone, PartialEq)]
pub struct Summary {
    /// Data rows.
    pub rows: usize,
    /// Columns in file order.
    pub columns: Vec<ColumnSummary>,
    /// The file's length in bytes.
    pub bytes: u64,
}

impl Summary {
    /// The column called `name`.
    pub fn column(&self, name: &str) -> Option<&ColumnSummary> {
        self.columns.iter().find(|c| c.name == name)
    }

    /// A data set of no rows with these columns (numbers or text), for the renderer's own
    /// checks of names and types.
    pub fn shape(&self, name: &str) -> DataSet {
        DataSet {
            name: name.to_string(),
            columns: self
                .columns
                .iter()
                .map(|c| Column {
                    name: c.name.clone(),
                    values: if c.numeric {
                        Values::Numeric(Arc::new(Vec::new()))
                    } else {
                        Values::Text(Default::default())
                    },
                    exact: None,
                })
                .collect(),
            row_numbers: crate::data::RowLines::from(&[][..]),
            rows_are: Default::default(),
            label: None,
        }
    }
}

/// Why a data file could not be read: the renderer's message for it.
#[derive(Debug, Clone, PartialEq)]
pub struct Failure {
    pub message: String,
    pub label: String,
    pub help: Option<String>,
    /// The clause the renderer puts the error at, in the order of [`clause_key`]; `None` for
    /// the path. (The server put every failure at the path: an unknown sheet, a refused query
    /// or a decimal comma with a comma separator were a clause away from the renderer's place.)
    pub clause: Option<usize>,
}

impl Failure {
    fn of(d: Diagnostic) -> Failure {
        Failure {
            clause: clause_at(d.span),
            message: d.message,
            label: d.label,
            help: d.help,
        }
    }
}

/// The span standing for clause `i` in the load that [`read`] runs: an empty span at `i + 1`,
/// told apart from the path's empty span at 0.
fn clause_span(i: usize) -> Span {
    Span {
        start: i + 1,
        end: i + 1,
    }
}

/// Which clause a span of [`read`]'s load stands for.
fn clause_at(span: Span) -> Option<usize> {
    (span.start == span.end && (1..=5).contains(&span.start)).then(|| span.start - 1)
}

/// What the server knows of a data file now.
#[derive(Debug, Clone)]
pub enum Lookup {
    Ready(Arc<Summary>),
    /// Being read; the check runs again when it is in.
    Pending,
    Failed(Arc<Failure>),
}

/// A data file as a document's `load` names it: the document's folder, the path as written and
/// the missing-value markers in force (they decide the column types).
#[derive(Debug, Clone, PartialEq, Eq, PartialOrd, Ord)]
pub struct Key {
    pub folder: PathBuf,
    pub path: String,
    pub markers: Vec<String>,
    /// The load's clauses: sheet, table, query, separator, decimal (they decide what is read).
    pub clauses: [Option<String>; 5],
}

/// The values of a load's clauses, as a [`Key`] holds them.
pub fn clause_key(c: &LoadClauses) -> [Option<String>; 5] {
    let v = |s: &Option<Spanned<String>>| s.as_ref().map(|s| s.value.clone());
    [
        v(&c.sheet),
        v(&c.table),
        v(&c.query),
        v(&c.separator),
        v(&c.decimal),
    ]
}

/// The clauses of a [`Key`], as a load statement holds them.
fn clauses_of(k: &[Option<String>; 5]) -> LoadClauses {
    let v = |i: usize| {
        k.get(i).cloned().flatten().map(|value| Spanned {
            value,
            span: clause_span(i),
        })
    };
    LoadClauses {
        sheet: v(0),
        table: v(1),
        query: v(2),
        separator: v(3),
        decimal: v(4),
    }
}

#[derive(Debug, Clone)]
enum Entry {
    Loading(Fingerprint),
    Done(Fingerprint, Lookup),
}

/// A file to read, and what came of it.
pub struct Job {
    pub key: Key,
    pub fingerprint: Fingerprint,
}

/// The result of a [`Job`].
pub struct Done {
    pub key: Key,
    pub fingerprint: Fingerprint,
    pub lookup: Lookup,
}

/// The data files of every open document, by [`Key`].
pub struct DataCache {
    allow_outside: bool,
    entries: BTreeMap<Key, Entry>,
    /// Where files to read go; `None` reads them at once, on the caller's thread.
    jobs: Option<Sender<Job>>,
    /// The SHA-256 of each data file a hover compared with a rendering's provenance, by
    /// document folder and path as written, kept while the file's fingerprint stays the same.
    digests: BTreeMap<(PathBuf, String), (Fingerprint, String)>,
}

/// What a hover knows of a data file's SHA-256.
#[derive(Debug, Clone, PartialEq)]
pub enum FileDigest {
    /// In hex, as a rendering's provenance region writes it.
    Known(String),
    /// Not read: the file is larger than the hover reads.
    TooLarge,
    /// Not readable (the document's diagnostics say why).
    Unreadable,
}

impl DataCache {
    /// A cache that reads files on the caller's thread, when first asked (for tests and the
    /// benchmark).
    pub fn immediate(allow_outside: bool) -> DataCache {
        DataCache {
            allow_outside,
            entries: BTreeMap::new(),
            jobs: None,
            digests: BTreeMap::new(),
        }
    }

    /// A cache that sends files to read to `jobs` (see [`reader`]).
    pub fn with_reader(allow_outside: bool, jobs: Sender<Job>) -> DataCache {
        DataCache {
            allow_outside,
            entries: BTreeMap::new(),
            jobs: Some(jobs),
            digests: BTreeMap::new(),
        }
    }

    /// Whether `load` may read outside the document's folder.
    pub fn allow_outside(&self) -> bool {
        self.allow_outside
    }

    /// What is known of the file that a document in `folder` loads as `path` with `markers`:
    /// read, being read, or not readable (with the renderer's message). A file whose
    /// fingerprint changed since it was read is read again.
    pub fn lookup(
        &mut self,
        folder: &Path,
        path: &str,
        clauses: &LoadClauses,
        markers: &[String],
    ) -> Lookup {
        let world = FsWorld::new(folder, self.allow_outside);
        let fingerprint = match world.fingerprint(path) {
            Ok(f) => f,
            Err(e) => {
                return Lookup::Failed(Arc::new(Failure {
                    message: e.to_string(),
                    label: "this file".to_string(),
                    help: None,
                    clause: None,
                }))
            }
        };
        let key = Key {
            folder: folder.to_path_buf(),
            path: path.to_string(),
            markers: markers.to_vec(),
            clauses: clause_key(clauses),
        };
        match self.entries.get(&key) {
            Some(Entry::Done(f, lookup)) if *f == fingerprint => return lookup.clone(),
            Some(Entry::Loading(f)) if *f == fingerprint => return Lookup::Pending,
            _ => {}
        }
        match &self.jobs {
            Some(jobs) => {
                let job = Job {
                    key: key.clone(),
                    fingerprint: fingerprint.clone(),
                };
                if jobs.send(job).is_err() {
                    return Lookup::Pending;
                }
                self.entries.insert(key, Entry::Loading(fingerprint));
                Lookup::Pending
            }
            None => {
                let lookup = read(&key, self.allow_outside, fingerprint.len);
                self.entries
                    .insert(key, Entry::Done(fingerprint, lookup.clone()));
                lookup
            }
        }
    }

    /// The SHA-256 of the file that a document in `folder` loads as `path`, read through the
    /// same confined access as its data and kept while its fingerprint stays the same. A file
    /// not known yet is read only up to `limit` bytes.
    pub fn digest(&mut self, folder: &Path, path: &str, limit: u64) -> FileDigest {
        let world = FsWorld::new(folder, self.allow_outside);
        let Ok(fingerprint) = world.fingerprint(path) else {
            return FileDigest::Unreadable;
        };
        let key = (folder.to_path_buf(), path.to_string());
        if let Some((f, hex)) = self.digests.get(&key) {
            if *f == fingerprint {
                return FileDigest::Known(hex.clone());
            }
        }
        if fingerprint.len > limit {
            return FileDigest::TooLarge;
        }
        match crate::world::World::read(&world, path) {
            Ok(bytes) => {
                let hex = crate::files::Digest::of(&bytes).hex();
                self.digests.insert(key, (fingerprint, hex.clone()));
                FileDigest::Known(hex)
            }
            Err(_) => FileDigest::Unreadable,
        }
    }

    /// Takes in a file read on the reader thread; false when it was superseded meanwhile.
    pub fn finish(&mut self, done: Done) -> bool {
        match self.entries.get(&done.key) {
            Some(Entry::Loading(f)) if *f == done.fingerprint => {
                self.entries
                    .insert(done.key, Entry::Done(done.fingerprint, done.lookup));
                true
            }
            _ => false,
        }
    }
}

/// Reads the files sent to `jobs` one after the other and sends each result to `done`, until
/// either channel closes. Run it on a thread of its own.
pub fn reader(jobs: Receiver<Job>, done: Sender<Done>, allow_outside: bool) {
    for job in jobs {
        let lookup = read(&job.key, allow_outside, job.fingerprint.len);
        let result = Done {
            key: job.key,
            fingerprint: job.fingerprint,
            lookup,
        };
        if done.send(result).is_err() {
            break;
        }
    }
}

/// Reads a data file (of `bytes` bytes) with the renderer's own statements (`missing`, then
/// `load`) and sums up its columns.
fn read(key: &Key, allow_outside: bool, bytes: u64) -> Lookup {
    let world = FsWorld::new(&key.folder, allow_outside);
    let mut session = Session::new(&world);
    let statement = |kind| Statement {
        kind,
        span: Span::default(),
        line: 0,
        text: String::new(),
    };
    if !key.markers.is_empty() {
        let missing = statement(StatementKind::Missing {
            markers: key.markers.clone(),
        });
        if let Err(d) = session.run(&missing) {
            return Lookup::Failed(Arc::new(Failure::of(d)));
        }
    }
    let load = statement(StatementKind::Load {
        path: Spanned {
            value: key.path.clone(),
            span: Span::default(),
        },
        name: None,
        clauses: clauses_of(&key.clauses),
    });
    if let Err(d) = session.run(&load) {
        return Lookup::Failed(Arc::new(Failure::of(d)));
    }
    let Some(set) = session.current_data_set() else {
        return Lookup::Pending;
    };
    Lookup::Ready(Arc::new(summarize(set, bytes)))
}

/// The columns of a loaded data set, summed up.
pub fn summarize(set: &DataSet, bytes: u64) -> Summary {
    Summary {
        rows: set.n_rows(),
        bytes,
        columns: set
            .columns
            .iter()
            .map(|c| {
                let (levels, distinct) = distinct_values(set, c);
                ColumnSummary {
                    name: c.name.clone(),
                    numeric: matches!(c.values, Values::Numeric(_)),
                    missing: c.missing_count(),
                    levels,
                    distinct,
                }
            })
            .collect(),
    }
}

/// The distinct values of a column in order of first appearance, named as a factor made from
/// the column names its levels (numbers by their shortest text), with the file line of each
/// first appearance; and their count. Both `None` past the limits.
fn distinct_values(set: &DataSet, c: &Column) -> (Option<Vec<(String, usize)>>, Option<usize>) {
    let limit = match c.values {
        Values::Numeric(_) => MAX_NUMERIC_LEVELS,
        _ => MAX_LEVELS,
    };
    let mut seen: BTreeSet<String> = BTreeSet::new();
    let mut out: Vec<(String, usize)> = Vec::new();
    for row in 0..c.len() {
        if c.is_missing(row) {
            continue;
        }
        let text = match &c.values {
            // Adding 0.0 makes -0 and 0 one value, as a factor does.
            Values::Numeric(v) => match v.get(row) {
                Some(x) => format_number(*x + 0.0),
                None => continue,
            },
            _ => c.display_value(row),
        };
        if seen.contains(&text) {
            continue;
        }
        if out.len() == limit {
            return (None, None);
        }
        seen.insert(text.clone());
        out.push((text, set.row_numbers.get(row).unwrap_or(row + 2)));
    }
    let n = out.len();
    (Some(out), Some(n))
}

/// Rows of the data set that the statements before a model leave, and of those the rows with no
/// missing value in any column the model uses: the rows it is fitted to. The data statements
/// (`missing`, `load`, `use`, `factor`, `keep`) are run by the renderer's own session, on the
/// files as they are on disk; no model is fitted. `None` when one of them fails.
pub fn rows_used(
    folder: &Path,
    allow_outside: bool,
    before: &[&Statement],
    columns: &[String],
) -> Option<(usize, usize)> {
    let world = FsWorld::new(folder, allow_outside);
    let mut session = Session::new(&world);
    for stmt in before {
        let data = matches!(
            stmt.kind,
            StatementKind::Missing { .. }
                | StatementKind::Load { .. }
                | StatementKind::Compute { .. }
                | StatementKind::LabelRows { .. }
                | StatementKind::Use { .. }
                | StatementKind::Factor { .. }
                | StatementKind::Keep { .. }
        );
        if data {
            session.run(stmt).ok()?;
        }
    }
    let set = session.current_data_set()?;
    let cols: Vec<&Column> = columns
        .iter()
        .map(|n| set.column(n))
        .collect::<Option<Vec<_>>>()?;
    let total = set.n_rows();
    let used = (0..total)
        .filter(|&r| cols.iter().all(|c| !c.is_missing(r)))
        .count();
    Some((used, total))
}
