//! PostgreSQL, the one place covey uses the network: `load database NAME query "..."` reads
//! the rows of one query through the synchronous `postgres` crate, over a connection whose
//! address the command line gives (`--database NAME=URL`). Nothing here is reached unless a
//! document asks for a database and the command line names it.
//!
//! The query runs in a read-only transaction, after the server has prepared it (which
//! refuses more than one statement) and said the type of each column: the integer, floating
//! point and `numeric` types are numbers, every other type is text. The values are read as
//! the server writes them as text, with `extra_float_digits = 3` so that a floating-point
//! value's text reads back as the same double.

use std::fmt;

use postgres::{Client, NoTls, SimpleQueryMessage};

use super::cells::{is_missing_text, ColumnBuilder, MixedColumn};
use super::{DataSet, RowLines, RowOrigin};

/// The addresses of databases given on the command line (`--database NAME=URL`), by the
/// logical name a document uses. Its `Debug` shows the names only: an address may hold a
/// password, and is never written anywhere.
#[derive(Clone, Default, PartialEq, Eq)]
pub struct Databases(Vec<(String, String)>);

impl Databases {
    /// The addresses, as (logical name, URL); a later one of the same name wins.
    pub fn new(list: Vec<(String, String)>) -> Databases {
        Databases(list)
    }

    /// The address given for `name`.
    pub fn url(&self, name: &str) -> Option<&str> {
        self.0
            .iter()
            .rev()
            .find(|(n, _)| n == name)
            .map(|(_, u)| u.as_str())
    }

    /// True when no database was given.
    pub fn is_empty(&self) -> bool {
        self.0.is_empty()
    }
}

impl fmt::Debug for Databases {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.debug_list()
            .entries(
                self.0
                    .iter()
                    .map(|(n, _)| format!("{n}=<address not shown>")),
            )
            .finish()
    }
}

/// Rows read from a database.
#[derive(Debug)]
pub struct DbRead {
    pub set: DataSet,
    /// Columns that held both numbers and texts, read as text.
    pub mixed: Vec<MixedColumn>,
}

/// Why a database could not be read. No variant holds the address or a password.
#[derive(Debug, Clone, PartialEq)]
pub enum DbError {
    /// The address given on the command line is not one the client understands.
    BadAddress(String),
    /// The server could not be reached, or refused the connection.
    Connect(String),
    /// The server refused the query, or failed while running it.
    Sql(String),
    /// Two result columns with one name.
    DuplicateColumn(String),
    /// A numeric column's text that is not a finite number: (column, row, text).
    NotFinite {
        column: String,
        row: usize,
        text: String,
    },
    /// The query gave no rows.
    NoRows,
    /// The query returns no rows at all (not a SELECT).
    NotAQuery,
}

/// Characters of an out-of-range value shown in its error; the rest are counted.
const SHOWN_DIGITS: usize = 24;

impl fmt::Display for DbError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            DbError::BadAddress(m) => write!(
                f,
                "the address given with --database is not a PostgreSQL connection address \
                 ({m}); write it as postgresql://USER@HOST:PORT/DATABASE"
            ),
            DbError::Connect(m) => write!(
                f,
                "cannot connect to the database ({m}); check that the server runs and that \
                 the address given with --database is right"
            ),
            DbError::Sql(m) => write!(f, "the database refused the query: {m}"),
            DbError::DuplicateColumn(c) => write!(
                f,
                "the result has two columns named {c}; give each column its own name with \
                 AS in the query",
                c = crate::report::markdown::code(c)
            ),
            // A `numeric` of many digits is finite but beyond a double's range: said as
            // such, its digits cut short.
            DbError::NotFinite { column, row, text }
                if text.bytes().any(|b| b.is_ascii_digit()) =>
            {
                let shown: String = text.chars().take(SHOWN_DIGITS).collect();
                let cut = text.chars().count() > SHOWN_DIGITS;
                write!(
                    f,
                    "column {column} holds {shown}{} in row {row} of the result, beyond the \
                     range of double-precision numbers (about 1.8e308 in size); rescale it in \
                     the query (change its units), filter it out or make it NULL",
                    if cut {
                        format!("… ({} characters)", text.chars().count())
                    } else {
                        String::new()
                    },
                    column = crate::report::markdown::code(column),
                    shown = crate::report::markdown::code(&shown)
                )
            }
            DbError::NotFinite { column, row, text } => write!(
                f,
                "column {column} holds {text} in row {row} of the result, which is not a \
                 finite number; filter it out in the query or make it NULL",
                column = crate::report::markdown::code(column),
                text = crate::report::markdown::code(text)
            ),
            DbError::NoRows => write!(
                f,
                "the query gave no rows; check its WHERE clause and the table it reads"
            ),
            DbError::NotAQuery => write!(
                f,
                "the statement returns no rows; covey runs one statement that reads rows, such \
                 as a SELECT"
            ),
        }
    }
}

impl core::error::Error for DbError {}

/// How long a connection attempt may take before it fails, when the address sets no limit.
const CONNECT_TIMEOUT_S: u64 = 10;

/// The words of a server error, without the address (the client's messages name neither the
/// address nor a password, and a server error only the database's own objects).
fn message(e: &postgres::Error) -> String {
    match e.as_db_error() {
        Some(db) => {
            let mut m = db.message().to_string();
            if let Some(postgres::error::ErrorPosition::Original(at)) = db.position() {
                m.push_str(&format!(" (at character {at} of the query)"));
            }
            m
        }
        None => e.to_string(),
    }
}

/// PostgreSQL types read as numbers: int2, int4, int8, oid, float4, float8, numeric.
fn is_numeric(t: &postgres::types::Type) -> bool {
    use postgres::types::Type;
    [
        Type::INT2,
        Type::INT4,
        Type::INT8,
        Type::OID,
        Type::FLOAT4,
        Type::FLOAT8,
        Type::NUMERIC,
    ]
    .contains(t)
}

/// Reads the rows of `query` from the database at `url` into a data set named `name`.
pub fn read_database(
    url: &str,
    query: &str,
    name: &str,
    markers: &[String],
) -> Result<DbRead, DbError> {
    let mut config: postgres::Config = url
        .parse()
        .map_err(|e: postgres::Error| DbError::BadAddress(e.to_string()))?;
    if config.get_connect_timeout().is_none() {
        config.connect_timeout(std::time::Duration::from_secs(CONNECT_TIMEOUT_S));
    }
    let mut client: Client = config
        .connect(NoTls)
        .map_err(|e| DbError::Connect(message(&e)))?;
    let mut tx = client
        .build_transaction()
        .read_only(true)
        .start()
        .map_err(|e| DbError::Connect(message(&e)))?;
    tx.batch_execute("SET LOCAL extra_float_digits = 3")
        .map_err(|e| DbError::Sql(message(&e)))?;
    // Preparing refuses a second statement and gives the columns' types.
    let prepared = tx.prepare(query).map_err(|e| DbError::Sql(message(&e)))?;
    let columns: Vec<(String, bool)> = prepared
        .columns()
        .iter()
        .map(|c| (c.name().to_string(), is_numeric(c.type_())))
        .collect();
    if columns.is_empty() {
        return Err(DbError::NotAQuery);
    }
    for (k, (n, _)) in columns.iter().enumerate() {
        if columns[..k].iter().any(|(m, _)| m == n) {
            return Err(DbError::DuplicateColumn(n.clone()));
        }
    }
    let messages = tx
        .simple_query(query)
        .map_err(|e| DbError::Sql(message(&e)))?;
    let mut builders: Vec<ColumnBuilder> = columns
        .iter()
        .map(|(n, _)| ColumnBuilder::new(n, 1024))
        .collect();
    let mut n = 0usize;
    for m in &messages {
        let SimpleQueryMessage::Row(row) = m else {
            continue;
        };
        n += 1;
        for (j, (b, (column, numeric))) in builders.iter_mut().zip(&columns).enumerate() {
            match row.get(j) {
                None => b.push_missing(),
                Some(text) if *numeric => match text.parse::<f64>() {
                    // A whole number beyond 2^53 that no double holds (an int8 identifier)
                    // keeps its digits, as text.
                    Ok(x) if x.is_finite() && !crate::data::number::holds_whole_number(text, x) => {
                        b.push_text(text)
                    }
                    Ok(x) if x.is_finite() => b.push_number(x),
                    _ => {
                        return Err(DbError::NotFinite {
                            column: column.clone(),
                            row: n,
                            text: text.to_string(),
                        })
                    }
                },
                Some(text) => {
                    if is_missing_text(text, markers) {
                        b.push_missing();
                    } else {
                        b.push_text(text);
                    }
                }
            }
        }
    }
    // Nothing was written; the read-only transaction ends here.
    let _ = tx.rollback();
    if n == 0 {
        return Err(DbError::NoRows);
    }
    let mut mixed = Vec::new();
    let mut cols = Vec::with_capacity(builders.len());
    for b in builders {
        let (c, m) = b.finish();
        cols.push(c);
        mixed.extend(m);
    }
    Ok(DbRead {
        set: DataSet {
            name: name.to_string(),
            columns: cols,
            row_numbers: (1..=n).collect::<RowLines>(),
            rows_are: RowOrigin::Result,
            label: None,
        },
        mixed,
    })
}

#[cfg(test)]
mod display_tests {
    use super::DbError;

    #[test]
    fn a_numeric_beyond_a_double_is_said_so_and_cut_short() {
        // 1e600 as PostgreSQL writes a numeric of that size: "1" and 600 zeros.
        let text = format!("1{}", "0".repeat(600));
        let m = DbError::NotFinite {
            column: "y".to_owned(),
            row: 1,
            text,
        }
        .to_string();
        assert!(
            m.contains("holds `100000000000000000000000`… (601 characters) in row 1 of the result, beyond the range of double-precision numbers"),
            "{m}"
        );
        let m = DbError::NotFinite {
            column: "y".to_owned(),
            row: 2,
            text: "NaN".to_owned(),
        }
        .to_string();
        assert!(
            m.contains("holds `NaN` in row 2 of the result, which is not a finite number"),
            "{m}"
        );
    }
}
