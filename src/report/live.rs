//! Live numbers in prose: a reference `@[KIND MODEL ROW COLUMN]` names one value of a table the
//! document computes, and the rendering shows that value formatted as its table shows it.
//!
//! * KIND is a table's JSON kind (`fit`, `anova`, `means`, `differences`, ...).
//! * MODEL is what the table is about: the model's name, or for `summary` the column summarised.
//! * ROW names a row by its leading text columns (the term, the level; for `differences` and
//!   `regions` the two levels `first second`, after the level of the `within` factor if any). A table with a single row needs no ROW.
//! * COLUMN is a JSON column key (`p`, `mean`, `r_squared`, ...). A pair without COLUMN gives
//!   the difference with its confidence limits.
//!
//! Words are separated by spaces; a name with spaces is written in double quotes. When the
//! document computes several tables of the same kind and subject, the last one counts.

use std::collections::BTreeMap;
use std::fmt;

use super::markdown::{escape, formatted_column};
use super::number::MISSING;
use super::{Format, Item, Output, Table};

/// What a reference starts with.
pub const OPEN: &str = "@[";
/// What a reference ends with.
pub const CLOSE: &str = "]";

/// Largest number of tables a "no such table" message lists, so that it stays readable.
const LISTED_TABLES: usize = 8;

/// A reference's words: kind, subject, and what picks the value.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Parsed {
    /// The table's JSON kind.
    pub kind: String,
    /// The table's subject (model name, or summarised column).
    pub subject: String,
    /// The words after the subject: row key words, then maybe a column key.
    pub rest: Vec<String>,
}

/// Why a reference has no value.
#[derive(Debug, Clone, PartialEq, Eq)]
pub enum LiveError {
    /// The text between `@[` and `]` is not a reference.
    Syntax {
        /// What is wrong.
        problem: &'static str,
    },
    /// No table of this kind and subject was computed.
    NoTable {
        kind: String,
        subject: String,
        /// Tables the document does have, as "kind subject".
        known: Vec<String>,
    },
    /// The table has no row with this key.
    NoRow {
        kind: String,
        key: String,
        /// The table's row keys.
        rows: Vec<String>,
    },
    /// The table has no column with this key.
    NoColumn {
        kind: String,
        column: String,
        /// The table's value column keys.
        columns: Vec<String>,
    },
    /// A kind of an earlier version, renamed.
    Renamed {
        /// The old kind.
        old: &'static str,
        /// The kind that replaced it.
        new: &'static str,
    },
    /// The words after the subject do not fit the table's shape.
    Shape {
        kind: String,
        /// How many words name a row of this table.
        key_words: usize,
        /// Words given after the subject.
        given: usize,
    },
}

impl fmt::Display for LiveError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            LiveError::Syntax { problem } => write!(f, "this reference cannot be read: {problem}"),
            LiveError::NoTable { kind, subject, .. } => {
                write!(
                    f,
                    "the document computes no {kind} table for {subject}",
                    kind = crate::report::markdown::code(kind),
                    subject = crate::report::markdown::code(subject)
                )
            }
            LiveError::NoRow { kind, key, .. } => {
                write!(
                    f,
                    "the {kind} table has no row {key}",
                    key = crate::report::markdown::code(key),
                    kind = crate::report::markdown::code(kind)
                )
            }
            LiveError::NoColumn { kind, column, .. } => {
                write!(
                    f,
                    "the {kind} table has no column {column}",
                    column = crate::report::markdown::code(column),
                    kind = crate::report::markdown::code(kind)
                )
            }
            LiveError::Renamed { old, new } => {
                write!(
                    f,
                    "the table kind {old} is now called {new}",
                    new = crate::report::markdown::code(new),
                    old = crate::report::markdown::code(old)
                )
            }
            LiveError::Shape {
                kind,
                key_words,
                given,
            } => write!(
                f,
                "a {kind} reference names a row with {key_words} word{} and then a column, \
                 but {given} word{} follow the subject",
                if *key_words == 1 { "" } else { "s" },
                if *given == 1 { "" } else { "s" },
                kind = crate::report::markdown::code(kind)
            ),
        }
    }
}

impl core::error::Error for LiveError {}

impl LiveError {
    /// What the writer can do about it.
    pub fn help(&self) -> String {
        match self {
            LiveError::Syntax { .. } => "write `@[KIND MODEL ROW COLUMN]`, e.g. \
                `@[anova m group p]`; quote names with spaces; to show `@[` as text, write `@\\[`"
                .to_string(),
            LiveError::NoTable {
                kind,
                subject,
                known,
            } if !known.iter().any(|k| k.starts_with(&format!("{kind} ")))
                && statement_for(kind, subject).is_some() =>
            {
                let ask = format!(
                    "no statement asks for one: {}",
                    statement_for(kind, subject).unwrap_or_default()
                );
                if known.is_empty() {
                    format!("{ask}; the document computes no tables a reference could name")
                } else {
                    format!("{ask}; {}", listed(known))
                }
            }
            LiveError::NoTable { known, .. } => listed(known),
            LiveError::NoRow { rows, .. } => format!("its rows are: {}", rows.join(", ")),
            LiveError::NoColumn { columns, .. } => {
                format!("its columns are: {}", columns.join(", "))
            }
            LiveError::Renamed { new, .. } => format!("write `@[{new} ...]`"),
            LiveError::Shape { key_words: 0, .. } => {
                "write `@[KIND MODEL COLUMN]`: this table's row needs no name".to_string()
            }
            LiveError::Shape { key_words, .. } => format!(
                "write the {key_words} row word{} and then one column key",
                if *key_words == 1 { "" } else { "s" }
            ),
        }
    }
}

/// "tables in this document: ..." with at most [`LISTED_TABLES`] of them.
fn listed(known: &[String]) -> String {
    let more = if known.len() > LISTED_TABLES {
        ", ..."
    } else {
        ""
    };
    let list: Vec<&str> = known
        .iter()
        .take(LISTED_TABLES)
        .map(String::as_str)
        .collect();
    format!("tables in this document: {}{more}", list.join(", "))
}

/// The statement that computes a table of `kind` about `subject`, to add to a covey block, or
/// `None` for a kind no statement makes. FACTOR, X and the like are left for the writer.
pub fn statement_for(kind: &str, subject: &str) -> Option<String> {
    let m = crate::report::markdown::code(subject);
    let add = |s: String| format!("add `{s}` to a covey block");
    let name = if subject
        .chars()
        .all(|c| c.is_alphanumeric() || c == '_' || c == '.')
    {
        subject.to_string()
    } else {
        format!("\"{}\"", subject.replace('\\', "\\\\").replace('"', "\\\""))
    };
    Some(match kind {
        "summary" => add(format!("table summary {name} [by FACTOR]")),
        "fit" | "coefficients" | "anova" => add(format!("table {kind} {name}")),
        "compare" => add(format!("table compare {name}, OTHER")),
        "means" | "differences" | "slopes" => add(format!("table {kind} {name} for FACTOR")),
        "cell-means" => add(format!("table means {name} for A by B")),
        "slopes-equality" => add(format!("table slopes {name} for FACTOR")),
        "contrast" => add(format!(
            "table contrast {name} for FACTOR weights W1, W2, ..."
        )),
        "regions" => add(format!("table regions {name} of X for FACTOR")),
        "check" => add(format!("check {name}")),
        "influence" => format!(
            "`check {name}` lists the rows of model {m} past an influence threshold (when any is)"
        ),
        "plan" => add(format!("plan {name} for K groups ...")),
        _ => return None,
    })
}

/// Whether `c` may appear between `@[` and `]`: anything but brackets, angle brackets,
/// backticks, backslashes, pipes, asterisks and control characters, so that a reference holds
/// no Markdown or HTML syntax that its value region could change, and fits inside an HTML
/// comment. Inside a quoted name, brackets may appear too (see [`find_all`]).
pub fn is_reference_char(c: char) -> bool {
    !matches!(c, '[' | ']' | '<' | '>' | '`' | '\\' | '|' | '*') && !c.is_control()
}

/// The length of a reference's inside, `inner` being the text after its `@[`: up to the
/// first `]` outside double quotes, when every character before it may be in a reference
/// ([`is_reference_char`], or a bracket inside quotes). `None` when no such `]` ends it.
fn inside_length(inner: &str) -> Option<usize> {
    let mut quoted = false;
    for (i, c) in inner.char_indices() {
        match c {
            '"' => quoted = !quoted,
            ']' if !quoted => return Some(i),
            '[' | ']' if quoted => {}
            c if !is_reference_char(c) => return None,
            _ => {}
        }
    }
    None
}

/// Every reference in one run of prose text: (start, end) byte offsets of `@[...]`. A `]`
/// inside a quoted name does not end a reference.
pub fn find_all(text: &str) -> Vec<(usize, usize)> {
    let mut out = Vec::new();
    let mut from = 0;
    while let Some(found) = text.get(from..).and_then(|rest| rest.find(OPEN)) {
        let start = from + found;
        let inner_start = start + OPEN.len();
        let inner = text.get(inner_start..).unwrap_or("");
        match inside_length(inner).filter(|&len| len > 0) {
            Some(len) => {
                let end = inner_start + len + CLOSE.len();
                out.push((start, end));
                from = end;
            }
            None => from = inner_start,
        }
    }
    out
}

/// Split a reference `@[...]` into its words.
pub fn parse(reference: &str) -> Result<Parsed, LiveError> {
    let inner = reference
        .strip_prefix(OPEN)
        .and_then(|r| r.strip_suffix(CLOSE))
        .ok_or(LiveError::Syntax {
            problem: "it does not have the form `@[...]`",
        })?;
    let mut words = Vec::new();
    let mut chars = inner.chars().peekable();
    while let Some(&c) = chars.peek() {
        if c.is_whitespace() {
            chars.next();
            continue;
        }
        let mut word = String::new();
        if c == '"' {
            chars.next();
            let mut closed = false;
            for c in chars.by_ref() {
                if c == '"' {
                    closed = true;
                    break;
                }
                word.push(c);
            }
            if !closed {
                return Err(LiveError::Syntax {
                    problem: "a quoted name has no closing `\"`",
                });
            }
        } else {
            while let Some(&c) = chars.peek() {
                if c.is_whitespace() || c == '"' {
                    break;
                }
                word.push(c);
                chars.next();
            }
        }
        words.push(word);
    }
    let mut words = words.into_iter();
    let (Some(kind), Some(subject)) = (words.next(), words.next()) else {
        return Err(LiveError::Syntax {
            problem: "it needs at least a table kind and a model",
        });
    };
    let rest: Vec<String> = words.collect();
    if rest.is_empty() {
        return Err(LiveError::Syntax {
            problem: "it names a table but no value in it",
        });
    }
    Ok(Parsed {
        kind,
        subject,
        rest,
    })
}

/// The value a reference names, as the table's Markdown shows it (inline Markdown, one line).
/// For many references, make one [`Resolver`] and ask it for each.
pub fn resolve(reference: &str, outputs: &[Output]) -> Result<String, LiveError> {
    Resolver::new(outputs).resolve(reference)
}

/// What a reference that has no value shows: the reference itself, marked.
pub fn unresolved(reference: &str) -> String {
    format!("⟨unresolved: {}⟩", escape(reference))
}

/// Resolves the references of one document against its tables. Each table is found by its
/// kind and subject in a map made once, and each column's formatted cells and each table's row
/// keys are made the first time a reference needs them, so that resolving n references takes
/// time in proportion to n and the tables (not to n times the tables).
pub struct Resolver<'a> {
    outputs: &'a [Output],
    /// The last table of each (kind, subject), with its place among the document's tables.
    last: BTreeMap<(&'a str, &'a str), (usize, &'a Table)>,
    /// Formatted cells of (table, column), by the table's place in `tables`.
    columns: BTreeMap<(usize, usize), Vec<String>>,
    /// Row of each row key of a table (the first row with that key).
    rows: BTreeMap<usize, BTreeMap<Vec<String>, usize>>,
    /// The tables a "no such table" message lists, made when first needed.
    known: Option<Vec<String>>,
}

impl<'a> Resolver<'a> {
    pub fn new(outputs: &'a [Output]) -> Resolver<'a> {
        let tables = outputs
            .iter()
            .flat_map(|o| &o.items)
            .filter_map(|i| match i {
                Item::Table(t) => Some(t),
                _ => None,
            });
        let mut last = BTreeMap::new();
        for (place, t) in tables.enumerate() {
            if let Some(subject) = &t.subject {
                last.insert((t.kind, subject.as_str()), (place, t));
            }
        }
        Resolver {
            outputs,
            last,
            columns: BTreeMap::new(),
            rows: BTreeMap::new(),
            known: None,
        }
    }

    /// The value `reference` names, as [`resolve`] gives it.
    pub fn resolve(&mut self, reference: &str) -> Result<String, LiveError> {
        let parsed = parse(reference)?;
        if parsed.kind == "pairs" {
            return Err(LiveError::Renamed {
                old: "pairs",
                new: "differences",
            });
        }
        let (place, table) = self.find_table(&parsed)?;
        self.value(&parsed, place, table)
    }

    /// The last table of the reference's kind and subject, with its place.
    fn find_table(&mut self, parsed: &Parsed) -> Result<(usize, &'a Table), LiveError> {
        if let Some(found) = self
            .last
            .get(&(parsed.kind.as_str(), parsed.subject.as_str()))
        {
            return Ok(*found);
        }
        let known = self
            .known
            .get_or_insert_with(|| known_tables(self.outputs))
            .clone();
        Err(LiveError::NoTable {
            kind: parsed.kind.clone(),
            subject: parsed.subject.clone(),
            known,
        })
    }

    /// The value a parsed reference names in `table`.
    fn value(
        &mut self,
        parsed: &Parsed,
        place: usize,
        table: &'a Table,
    ) -> Result<String, LiveError> {
        let width = key_width(table);
        let rest = &parsed.rest;
        // Which row: by its key, or the only row when the reference names none.
        let (key, column): (&[String], Option<&String>) = if rest.len() == width + 1 {
            (rest.get(..width).unwrap_or(&[]), rest.get(width))
        } else if rest.len() == 1 && table.rows.len() == 1 {
            (&[], rest.first())
        } else if rest.len() == width && table.kind == "differences" {
            (rest.as_slice(), None)
        } else {
            return Err(LiveError::Shape {
                kind: table.kind.to_string(),
                key_words: width,
                given: rest.len(),
            });
        };
        let row = if key.is_empty() {
            table.rows.first().map(|_| 0)
        } else {
            self.rows
                .entry(place)
                .or_insert_with(|| {
                    let mut rows = BTreeMap::new();
                    for (i, r) in table.rows.iter().enumerate() {
                        rows.entry(row_key(table, r, width)).or_insert(i);
                    }
                    rows
                })
                .get(key)
                .copied()
        };
        let Some(row) = row else {
            return Err(LiveError::NoRow {
                kind: table.kind.to_string(),
                key: key.iter().map(|k| quote(k)).collect::<Vec<_>>().join(" "),
                rows: table
                    .rows
                    .iter()
                    .map(|r| {
                        row_key(table, r, width)
                            .iter()
                            .map(|k| quote(k))
                            .collect::<Vec<_>>()
                            .join(" ")
                    })
                    .collect(),
            });
        };
        let mut cell = |name: &str| -> Result<String, LiveError> {
            let j = table
                .columns
                .iter()
                .position(|c| c.key == name)
                .ok_or_else(|| LiveError::NoColumn {
                    kind: table.kind.to_string(),
                    column: name.to_string(),
                    columns: table
                        .columns
                        .iter()
                        .skip(width)
                        .map(|c| c.key.clone())
                        .collect(),
                })?;
            let text = self
                .columns
                .entry((place, j))
                .or_insert_with(|| formatted_column(table, j))
                .get(row)
                .cloned()
                .unwrap_or_else(|| MISSING.to_string());
            // A p-value carries its relation ("= .003", "< .001"), so that prose
            // reads "*p* @[...]" correctly whichever side of .001 it falls.
            let is_p = table.columns.get(j).is_some_and(|c| c.format == Format::P);
            Ok(
                if is_p && text != MISSING && !text.starts_with(['<', '>']) {
                    format!("= {text}")
                } else {
                    text
                },
            )
        };
        match column {
            Some(name) => cell(name),
            None => {
                // A pair: the difference with its limits.
                let estimate = cell("estimate")?;
                let (lower, upper) = (cell("lower")?, cell("upper")?);
                if lower == MISSING || upper == MISSING {
                    return Ok(estimate);
                }
                let level = table
                    .level
                    .map(|l| format!("{}% ", percent(l)))
                    .unwrap_or_default();
                Ok(format!("{estimate} ({level}limits {lower} to {upper})"))
            }
        }
    }
}

/// The tables of a document as "kind subject", each once, for a "no such table" message.
fn known_tables(outputs: &[Output]) -> Vec<String> {
    let mut known: Vec<String> = Vec::new();
    let mut seen = std::collections::BTreeSet::new();
    for o in outputs {
        for item in &o.items {
            if let Item::Table(t) = item {
                if let Some(s) = &t.subject {
                    let name = format!("{} {}", t.kind, quote(s));
                    if seen.insert(name.clone()) {
                        known.push(name);
                    }
                }
            }
        }
    }
    known
}

/// A name as a reference writes it: quoted when it holds a space or a quote.
pub(crate) fn quote(name: &str) -> String {
    if name.is_empty() || name.contains(char::is_whitespace) {
        format!("\"{name}\"")
    } else {
        name.to_string()
    }
}

/// The number of leading text columns: the words that name a row.
fn key_width(table: &Table) -> usize {
    table
        .columns
        .iter()
        .take_while(|c| c.format == Format::Text)
        .count()
}

/// The key of row `i`: its leading text cells.
fn row_key(table: &Table, row: &[super::Cell], width: usize) -> Vec<String> {
    (0..width.min(table.columns.len()))
        .map(|j| match row.get(j) {
            Some(super::Cell::Text(s)) => s.clone(),
            Some(super::Cell::Number(x)) => super::number::exact(Some(*x)),
            _ => MISSING.to_string(),
        })
        .collect()
}

/// A confidence level as a percentage, to four decimals at most ("95", "99.5").
fn percent(level: f64) -> String {
    let s = format!("{:.4}", level * 100.0);
    s.trim_end_matches('0').trim_end_matches('.').to_string()
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::report::{Cell, Column};

    fn outputs(t: Table) -> Vec<Output> {
        vec![Output {
            block: 1,
            line: 1,
            statement: String::new(),
            items: vec![Item::Table(t)],
        }]
    }

    fn anova() -> Table {
        let mut t = Table::new(
            "anova",
            "demo",
            vec![
                Column::new("term", "term", Format::Text),
                Column::new("f", "F", Format::Statistic),
                Column::new("p", "p", Format::P),
            ],
        );
        t.subject = Some("m".into());
        t.push(vec!["group".into(), 12.345.into(), 0.0031.into()]);
        t.push(vec!["x by y".into(), 1.0.into(), 0.00001.into()]);
        t.push(vec!["Residual".into(), Cell::Missing, Cell::Missing]);
        t
    }

    #[test]
    fn finds_references_in_text() {
        let text = "a @[x y z] b @[ ] @[] @[q\\r] @[ok one two] @[a [b] c]";
        let found: Vec<&str> = find_all(text)
            .iter()
            .filter_map(|&(s, e)| text.get(s..e))
            .collect();
        assert_eq!(found, vec!["@[x y z]", "@[ ]", "@[ok one two]"]);
    }

    #[test]
    fn a_bracket_in_a_quoted_name_does_not_end_the_reference() {
        let text = "a @[means m \"x]y\" mean] b @[means m \"[z]\" se] c";
        let found: Vec<&str> = find_all(text)
            .iter()
            .filter_map(|&(s, e)| text.get(s..e))
            .collect();
        assert_eq!(
            found,
            vec!["@[means m \"x]y\" mean]", "@[means m \"[z]\" se]"]
        );
        let p = parse("@[means m \"x]y\" mean]").unwrap_or_else(|e| panic!("{e}"));
        assert_eq!(p.rest, vec!["x]y", "mean"]);
    }

    #[test]
    fn words_and_quotes() {
        let p = parse("@[means \"my model\" \"level A\" mean]").unwrap_or_else(|e| panic!("{e}"));
        assert_eq!(p.kind, "means");
        assert_eq!(p.subject, "my model");
        assert_eq!(p.rest, vec!["level A", "mean"]);
        assert!(parse("@[means \"open]").is_err());
        assert!(parse("@[fit]").is_err());
        assert!(parse("@[fit m]").is_err());
    }

    #[test]
    fn values_are_formatted_as_in_the_table() {
        let out = outputs(anova());
        // p in APA style (Format::P), F with two decimals (Format::Statistic).
        assert_eq!(resolve("@[anova m group p]", &out).as_deref(), Ok("= .003"));
        assert_eq!(
            resolve("@[anova m \"x by y\" p]", &out).as_deref(),
            Ok("< .001")
        );
        assert_eq!(resolve("@[anova m group f]", &out).as_deref(), Ok("12.35"));
        assert_eq!(
            resolve("@[anova m Residual f]", &out).as_deref(),
            Ok(MISSING)
        );
    }

    #[test]
    fn unknown_names_are_errors() {
        let out = outputs(anova());
        assert!(matches!(
            resolve("@[anova other group p]", &out),
            Err(LiveError::NoTable { .. })
        ));
        assert!(matches!(
            resolve("@[anova m nothing p]", &out),
            Err(LiveError::NoRow { .. })
        ));
        assert!(matches!(
            resolve("@[anova m group q]", &out),
            Err(LiveError::NoColumn { .. })
        ));
        assert!(matches!(
            resolve("@[anova m p]", &out),
            Err(LiveError::Shape { .. })
        ));
    }

    #[test]
    fn the_last_table_wins() {
        let mut second = anova();
        if let Some(Some(cell)) = second.rows.first_mut().map(|r| r.get_mut(2)) {
            *cell = 0.5.into();
        }
        let mut out = outputs(anova());
        out.extend(outputs(second));
        assert_eq!(resolve("@[anova m group p]", &out).as_deref(), Ok("= .500"));
    }
}
