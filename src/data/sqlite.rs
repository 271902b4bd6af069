//! SQLite files, read with rusqlite and the SQLite built into it (nothing is needed on the
//! machine).
//!
//! The file is opened read-only, without following a link at its last step, and without
//! reading its name as a URI; extension loading stays off (rusqlite is built without the
//! feature that could turn it on, and SQLite starts with it off), no database can be
//! attached (the limit of attached databases is 0), `query_only` is set, and the schema is
//! not trusted to run functions with side effects. What runs is one statement that SQLite
//! itself says is read-only (`sqlite3_stmt_readonly`) and that returns rows: `ATTACH`,
//! `PRAGMA` writes, `INSERT` and a second statement are refused before anything runs.
//! NULL is missing; INTEGER and REAL values are numbers, TEXT is text (a declared marker,
//! or a blank text, is missing), and a column that holds both is text.

use std::fmt;
use std::path::Path;

use rusqlite::types::ValueRef;
use rusqlite::{Connection, OpenFlags};

use super::cells::{is_missing_text, ColumnBuilder, MixedColumn};
use super::{DataSet, RowLines, RowOrigin};

/// What to read from a SQLite file.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum SqlSource<'a> {
    /// Every row of a table (or view), in the order SQLite gives them.
    Table(&'a str),
    /// The rows of one read-only statement.
    Query(&'a str),
}

/// Rows read from a SQLite file.
#[derive(Debug)]
pub struct SqlRead {
    pub set: DataSet,
    /// Columns that held both numbers and texts, read as text.
    pub mixed: Vec<MixedColumn>,
    /// The statement that ran.
    pub query: String,
    /// The SHA-256 of the file, taken while the read held its lock on it.
    pub file_sha256: String,
}

/// Why a SQLite file could not be read.
#[derive(Debug, Clone, PartialEq)]
pub enum SqlError {
    /// The file could not be opened, or is not a SQLite database.
    Open(String),
    /// No table or view of this name.
    UnknownTable { name: String, tables: Vec<String> },
    /// More than one statement.
    MultipleStatements,
    /// A statement that could change the database or the connection.
    NotReadOnly,
    /// A statement that returns no rows (`ATTACH`, `BEGIN`, a `PRAGMA` that sets).
    NotAQuery,
    /// SQLite refused the statement or failed while running it.
    Sql(String),
    /// Two result columns with one name.
    DuplicateColumn(String),
    /// A binary value: (column, 1-based row of the result).
    Blob { column: String, row: usize },
    /// A REAL that is not a finite number (SQLite keeps infinities): (column, 1-based row of
    /// the result, the value as text).
    NotFinite {
        column: String,
        row: usize,
        text: String,
    },
    /// The statement gave no rows.
    NoRows,
    /// The table or view of `table NAME` has no rows.
    EmptyTable(String),
    /// The file could not be read for its fingerprint.
    Fingerprint(String),
}

impl fmt::Display for SqlError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            SqlError::Open(m) => write!(
                f,
                "cannot read the file as a SQLite database ({m}); check that it is one, and \
                 that no program holds it locked"
            ),
            SqlError::UnknownTable { name, tables } => {
                if tables.is_empty() {
                    write!(f, "the database has no table \"{name}\" (it has no tables)")
                } else {
                    write!(
                        f,
                        "the database has no table \"{name}\"; its tables and views are {}",
                        tables.join(", ")
                    )
                }
            }
            SqlError::MultipleStatements => write!(
                f,
                "the query holds more than one statement; covey runs one statement that reads, \
                 such as a single SELECT"
            ),
            SqlError::NotReadOnly => write!(
                f,
                "the statement could change the database or the connection; covey runs only \
                 statements that read (SELECT, WITH ... SELECT)"
            ),
            SqlError::NotAQuery => write!(
                f,
                "the statement returns no rows (ATTACH, BEGIN and settings are refused); covey \
                 runs one statement that reads rows, such as a SELECT"
            ),
            SqlError::Sql(m) if m == "not authorized" => write!(
                f,
                "SQLite refused the query: not authorized (covey's read-only connection refuses \
                 loading extensions and whatever could change the file); read the rows with \
                 a plain SELECT"
            ),
            SqlError::Sql(m) => write!(f, "SQLite refused the query: {m}"),
            SqlError::DuplicateColumn(c) => write!(
                f,
                "the result has two columns named {c}; give each column its own name with \
                 AS in the query",
                c = crate::report::markdown::code(c)
            ),
            SqlError::Blob { column, row } => write!(
                f,
                "column {column} holds binary data (a BLOB) in row {row} of the result; \
                 select numbers or text",
                column = crate::report::markdown::code(column)
            ),
            SqlError::NotFinite { column, row, text } => write!(
                f,
                "column {column} holds {text} in row {row} of the result, which is not a \
                 finite number; filter it out in the query or make it NULL",
                column = crate::report::markdown::code(column),
                text = crate::report::markdown::code(text)
            ),
            SqlError::EmptyTable(t) => write!(
                f,
                "the table {t} has no rows; check that it is the table the data went into",
                t = crate::report::markdown::code(t)
            ),
            SqlError::NoRows => write!(
                f,
                "the query gave no rows; check its WHERE clause and the table it reads"
            ),
            SqlError::Fingerprint(m) => write!(f, "cannot read the file's bytes: {m}"),
        }
    }
}

impl core::error::Error for SqlError {}

/// How long a read waits for a program that is writing the file to finish, in milliseconds.
const BUSY_WAIT_MS: u64 = 5000;

/// The statement a `table` reads: every column of every row, the name quoted.
pub fn table_query(table: &str) -> String {
    format!("SELECT * FROM \"{}\"", table.replace('"', "\"\""))
}

fn open_error(e: &rusqlite::Error) -> SqlError {
    SqlError::Open(e.to_string())
}

/// Opens `path` (already confined and resolved to a regular file) read-only.
fn open(path: &Path) -> Result<Connection, SqlError> {
    let flags = OpenFlags::SQLITE_OPEN_READ_ONLY
        | OpenFlags::SQLITE_OPEN_NO_MUTEX
        | OpenFlags::SQLITE_OPEN_NOFOLLOW;
    let conn = Connection::open_with_flags(path, flags).map_err(|e| open_error(&e))?;
    conn.set_limit(rusqlite::limits::Limit::SQLITE_LIMIT_ATTACHED, 0)
        .map_err(|e| open_error(&e))?;
    use rusqlite::config::DbConfig;
    for (setting, on) in [
        (DbConfig::SQLITE_DBCONFIG_DEFENSIVE, true),
        (DbConfig::SQLITE_DBCONFIG_TRUSTED_SCHEMA, false),
        (DbConfig::SQLITE_DBCONFIG_ENABLE_TRIGGER, false),
    ] {
        conn.set_db_config(setting, on)
            .map_err(|e| open_error(&e))?;
    }
    conn.pragma_update(None, "query_only", true)
        .map_err(|e| open_error(&e))?;
    conn.busy_timeout(std::time::Duration::from_millis(BUSY_WAIT_MS))
        .map_err(|e| open_error(&e))?;
    Ok(conn)
}

/// The tables and views of the database, by name.
fn tables(conn: &Connection) -> Result<Vec<String>, SqlError> {
    let mut stmt = conn
        .prepare("SELECT name FROM sqlite_schema WHERE type IN ('table', 'view') ORDER BY name")
        .map_err(|e| open_error(&e))?;
    let names = stmt
        .query_map([], |r| r.get::<_, String>(0))
        .map_err(|e| open_error(&e))?
        .collect::<Result<Vec<String>, _>>()
        .map_err(|e| open_error(&e))?;
    Ok(names)
}

/// Reads `source` from the SQLite file at `path` into a data set named `name`. `fingerprint`
/// gives the SHA-256 of the file; it is called while the read holds SQLite's shared lock, so
/// that no writer changes the file between its fingerprint and the rows read.
pub fn read_sqlite(
    path: &Path,
    source: SqlSource<'_>,
    name: &str,
    markers: &[String],
    fingerprint: impl FnOnce() -> Result<String, String>,
) -> Result<SqlRead, SqlError> {
    let conn = open(path)?;
    // A read transaction holds the shared lock from its first read to its end.
    conn.execute_batch("BEGIN").map_err(|e| open_error(&e))?;
    let known = tables(&conn)?;
    let file_sha256 = fingerprint().map_err(SqlError::Fingerprint)?;
    let query = match source {
        SqlSource::Table(t) => {
            if !known.iter().any(|k| k == t) {
                return Err(SqlError::UnknownTable {
                    name: t.to_string(),
                    tables: known,
                });
            }
            table_query(t)
        }
        SqlSource::Query(q) => q.to_string(),
    };
    let mut stmt = match conn.prepare(&query) {
        Ok(s) => s,
        Err(rusqlite::Error::MultipleStatement) => return Err(SqlError::MultipleStatements),
        Err(e) => return Err(SqlError::Sql(e.to_string())),
    };
    if !stmt.readonly() {
        return Err(SqlError::NotReadOnly);
    }
    let names: Vec<String> = stmt.column_names().iter().map(|s| s.to_string()).collect();
    if names.is_empty() {
        return Err(SqlError::NotAQuery);
    }
    for (k, n) in names.iter().enumerate() {
        if names[..k].contains(n) {
            return Err(SqlError::DuplicateColumn(n.clone()));
        }
    }
    let mut builders: Vec<ColumnBuilder> =
        names.iter().map(|n| ColumnBuilder::new(n, 1024)).collect();
    let mut rows = stmt.query([]).map_err(|e| SqlError::Sql(e.to_string()))?;
    let mut n = 0usize;
    while let Some(row) = rows.next().map_err(|e| SqlError::Sql(e.to_string()))? {
        n += 1;
        for (j, b) in builders.iter_mut().enumerate() {
            match row.get_ref(j).map_err(|e| SqlError::Sql(e.to_string()))? {
                ValueRef::Null => b.push_missing(),
                // Beyond 2^53 a whole number may have no double (an identifier, most likely):
                // kept as its digits (text), so its column's other large values keep theirs.
                ValueRef::Integer(i) if i.unsigned_abs() > 1 << 53 => b.push_text(&i.to_string()),
                ValueRef::Integer(i) => b.push_number(i as f64),
                ValueRef::Real(x) if !x.is_finite() => {
                    return Err(SqlError::NotFinite {
                        column: names.get(j).cloned().unwrap_or_default(),
                        row: n,
                        text: if x > 0.0 {
                            "Inf"
                        } else if x < 0.0 {
                            "-Inf"
                        } else {
                            "NaN"
                        }
                        .to_string(),
                    })
                }
                ValueRef::Real(x) => b.push_number(x),
                ValueRef::Text(t) => {
                    let t = String::from_utf8_lossy(t);
                    if is_missing_text(&t, markers) {
                        b.push_missing();
                    } else {
                        b.push_text(&t);
                    }
                }
                ValueRef::Blob(_) => {
                    return Err(SqlError::Blob {
                        column: names.get(j).cloned().unwrap_or_default(),
                        row: n,
                    })
                }
            }
        }
    }
    drop(rows);
    drop(stmt);
    // Nothing was written; ending the read transaction releases the lock.
    let _ = conn.execute_batch("COMMIT");
    if n == 0 {
        return Err(match source {
            SqlSource::Table(t) => SqlError::EmptyTable(t.to_string()),
            SqlSource::Query(_) => SqlError::NoRows,
        });
    }
    let mut mixed = Vec::new();
    let mut columns = Vec::with_capacity(builders.len());
    for b in builders {
        let (c, m) = b.finish();
        columns.push(c);
        mixed.extend(m);
    }
    Ok(SqlRead {
        set: DataSet {
            name: name.to_string(),
            columns,
            row_numbers: (1..=n).collect::<RowLines>(),
            rows_are: RowOrigin::Result,
            label: None,
        },
        mixed,
        query,
        file_sha256,
    })
}
