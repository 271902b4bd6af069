//! Columns from typed cells: what a workbook or a database hands over cell by cell (a
//! number, a text, nothing), put into the same columns the delimited-text reader makes.
//!
//! A column whose every present cell is a number is numeric. A text equal to a declared
//! missing-value marker (or empty, or only spaces and tabs) is missing. A column that holds
//! both numbers and texts is text, its numbers written in their shortest round-trip form,
//! and [`ColumnBuilder::finish`] says which cell made it text, so that the load can say so.

use super::intern::Index;
use super::number::format_number;
use super::{Column, TextValues, Values};

/// One column under construction.
#[derive(Debug)]
pub struct ColumnBuilder {
    name: String,
    values: Building,
    /// The first number and the first text seen: (row, cell text).
    first_number: Option<usize>,
    first_text: Option<(usize, String)>,
    rows: usize,
}

#[derive(Debug)]
enum Building {
    Numeric(Vec<f64>),
    Text { values: TextValues, index: Index },
}

/// A column that held both numbers and texts, and was read as text.
#[derive(Debug, Clone, PartialEq)]
pub struct MixedColumn {
    /// The column's name.
    pub column: String,
    /// The row (0-based, in the data set) of its first text cell, and that text.
    pub row: usize,
    pub text: String,
}

/// Whether `text` counts as missing: empty after trimming spaces and tabs, or a declared
/// marker (compared trimmed, as the delimited-text reader compares them).
pub fn is_missing_text(text: &str, markers: &[String]) -> bool {
    let t = super::number::trim_str(text);
    t.is_empty() || markers.iter().any(|m| super::number::trim_str(m) == t)
}

impl ColumnBuilder {
    /// An empty column named `name`, with room for `rows` rows.
    pub fn new(name: &str, rows: usize) -> ColumnBuilder {
        ColumnBuilder {
            name: name.to_string(),
            values: Building::Numeric(Vec::with_capacity(rows)),
            first_number: None,
            first_text: None,
            rows: 0,
        }
    }

    /// Appends a missing cell.
    pub fn push_missing(&mut self) {
        match &mut self.values {
            Building::Numeric(v) => v.push(f64::NAN),
            Building::Text { values, .. } => values.push_missing(1),
        }
        self.rows += 1;
    }

    /// Appends a number (a non-finite one is the caller's to refuse; it is kept missing).
    pub fn push_number(&mut self, x: f64) {
        if self.first_number.is_none() && x.is_finite() {
            self.first_number = Some(self.rows);
        }
        match &mut self.values {
            Building::Numeric(v) => v.push(if x.is_finite() { x } else { f64::NAN }),
            Building::Text { values, index } => {
                let text = format_number(x);
                let code = intern(values, index, &text);
                values.push_code(code);
            }
        }
        self.rows += 1;
    }

    /// Appends a text cell (the caller has already decided it is not missing).
    pub fn push_text(&mut self, text: &str) {
        if self.first_text.is_none() {
            self.first_text = Some((self.rows, text.to_string()));
        }
        if let Building::Numeric(v) = &mut self.values {
            // The column turns text: the numbers so far become their texts.
            let mut values = TextValues::with_capacity(v.capacity());
            let mut index = Index::default();
            for &x in v.iter() {
                if x.is_nan() {
                    values.push_missing(1);
                } else {
                    let code = intern(&mut values, &mut index, &format_number(x));
                    values.push_code(code);
                }
            }
            self.values = Building::Text { values, index };
        }
        if let Building::Text { values, index } = &mut self.values {
            let code = intern(values, index, text);
            values.push_code(code);
        }
        self.rows += 1;
    }

    /// Number of rows so far.
    pub fn len(&self) -> usize {
        self.rows
    }

    /// True when no row was added.
    pub fn is_empty(&self) -> bool {
        self.rows == 0
    }

    /// The finished column, and when it held both numbers and texts, its first text.
    pub fn finish(self) -> (Column, Option<MixedColumn>) {
        let mixed = match (&self.values, self.first_number, self.first_text) {
            (Building::Text { .. }, Some(_), Some((row, text))) => Some(MixedColumn {
                column: self.name.clone(),
                row,
                text,
            }),
            _ => None,
        };
        let values = match self.values {
            Building::Numeric(v) => Values::Numeric(v.into()),
            Building::Text { mut values, .. } => {
                values.shrink_to_fit();
                Values::Text(values)
            }
        };
        (
            Column {
                name: self.name,
                values,
                exact: None,
            },
            mixed,
        )
    }
}

/// The code of `text` among `values`' texts, added when new. A column with more distinct
/// texts than codes (about 4.3e9, more than any source here can hold) gets missing cells.
fn intern(values: &mut TextValues, index: &mut Index, text: &str) -> u32 {
    match index.find(values, text.as_bytes()) {
        Some(c) => c,
        None => index.add(values, text).unwrap_or(TextValues::MISSING),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn numbers_then_text_make_a_text_column_that_says_so() {
        let mut b = ColumnBuilder::new("x", 4);
        b.push_number(1.5);
        b.push_missing();
        b.push_text("n/a");
        b.push_number(2.0);
        let (col, mixed) = b.finish();
        let Values::Text(t) = &col.values else {
            panic!("not text: {col:?}");
        };
        assert_eq!(
            t.to_vec(),
            vec![
                Some("1.5".to_string()),
                None,
                Some("n/a".to_string()),
                Some("2".to_string())
            ]
        );
        assert_eq!(
            mixed,
            Some(MixedColumn {
                column: "x".into(),
                row: 2,
                text: "n/a".into()
            })
        );
    }

    #[test]
    fn numbers_alone_stay_numeric_and_markers_are_missing() {
        let mut b = ColumnBuilder::new("y", 2);
        b.push_number(3.0);
        b.push_missing();
        let (col, mixed) = b.finish();
        assert!(matches!(&col.values, Values::Numeric(v) if v[0] == 3.0 && v[1].is_nan()));
        assert!(mixed.is_none());
        assert!(is_missing_text(" NA ", &["NA".into()]));
        assert!(is_missing_text("  ", &[]));
        assert!(!is_missing_text("NA", &[]));
    }
}
