//! Derived columns and row labels: `compute NAME = EXPRESSION`, `label rows by COLUMN`, and
//! the transformed response of a model (`model m: log(y) on ...`).
//!
//! An expression is evaluated a whole column at a time. A row with a missing value in any
//! column the expression reads gives a missing result. Any other row whose result (or a
//! step on the way to it) is not a finite number is a domain error (the log of a value at
//! most 0, a division by zero, the square root of a negative value, a power with no real
//! value, a value too large for a double): the statement fails, naming the first such row
//! and how many rows are affected.

use std::sync::Arc;

use super::data_statements::{column_index, numeric_values, quote_name};
use super::{Outcome, Session};
use crate::data::{Column, DataSet, Values};
use crate::diagnostic::Diagnostic;
use crate::lang::{Aggregate, BinaryOp, Expr, ExprKind, Function, Span, Spanned, TransformDecl};
use crate::report::markdown::{code, escape};
use crate::report::Item;

/// Why a row's value is not a number.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
enum Fault {
    LogOfNonPositive,
    SqrtOfNegative,
    DivideByZero,
    NoRealPower,
    TooLarge,
}

impl Fault {
    fn words(self) -> &'static str {
        match self {
            Fault::LogOfNonPositive => "the logarithm of a value that is 0 or less",
            Fault::SqrtOfNegative => "the square root of a negative value",
            Fault::DivideByZero => "a division by zero",
            Fault::NoRealPower => "a power with no real value (a negative number to a fractional power, or 0 to a negative power)",
            Fault::TooLarge => "a value too large for a double (beyond about 1.8e308)",
        }
    }
}

/// A column being evaluated: its values (NaN where missing or faulty).
type Values64 = Vec<f64>;

/// The evaluation of one expression over the rows of a data set.
struct Eval<'a> {
    set: &'a DataSet,
    n: usize,
    /// Rows where an input column is missing: their result is missing.
    missing: Vec<bool>,
    /// The first fault of each row, if any.
    faults: Vec<Option<Fault>>,
}

impl Eval<'_> {
    /// Marks the rows where `v` is not finite (and no input is missing) with `fault`.
    fn mark(&mut self, v: &[f64], fault: impl Fn(usize) -> Fault) {
        for (i, x) in v.iter().enumerate() {
            if !x.is_finite() && !self.missing.get(i).copied().unwrap_or(true) {
                if let Some(slot) = self.faults.get_mut(i) {
                    if slot.is_none() {
                        *slot = Some(fault(i));
                    }
                }
            }
        }
    }

    fn column(&self, name: &str, span: Span) -> Result<&Arc<Vec<f64>>, Diagnostic> {
        let column = Spanned {
            value: name.to_string(),
            span,
        };
        let i = column_index(self.set, &column)?;
        numeric_values(self.set, i, &column)
    }

    fn eval(&mut self, e: &Expr) -> Result<Values64, Diagnostic> {
        let n = self.n;
        Ok(match &e.kind {
            ExprKind::Number(x) => vec![*x; n],
            ExprKind::Column(name) => self.column(name, e.span)?.to_vec(),
            ExprKind::Aggregate(a, column) => {
                let values = self.column(&column.value, column.span)?;
                let mut present: Vec<f64> =
                    values.iter().copied().filter(|x| !x.is_nan()).collect();
                let d = crate::stats::describe::describe(&mut present);
                let (x, what) = match a {
                    Aggregate::Mean => (d.mean, "mean"),
                    Aggregate::Sd => (d.sd, "SD"),
                };
                if !x.is_finite() {
                    return Err(Diagnostic::new(
                        e.span,
                        format!(
                            "the {what} of {} is undefined: it has {} value{}",
                            crate::report::markdown::code(&column.value),
                            present.len(),
                            if present.len() == 1 { "" } else { "s" }
                        ),
                    )
                    .label("undefined"));
                }
                vec![x; n]
            }
            ExprKind::Negate(inner) => self.eval(inner)?.into_iter().map(|x| -x).collect(),
            ExprKind::Call(f, arg) => {
                let a = self.eval(arg)?;
                let out: Vec<f64> = a
                    .iter()
                    .map(|&x| match f {
                        Function::Log => x.ln(),
                        Function::Log10 => x.log10(),
                        Function::Exp => x.exp(),
                        Function::Sqrt => x.sqrt(),
                        Function::Abs => x.abs(),
                    })
                    .collect();
                let f = *f;
                self.mark(&out, |i| match f {
                    Function::Log | Function::Log10 if a.get(i).is_some_and(|x| *x <= 0.0) => {
                        Fault::LogOfNonPositive
                    }
                    Function::Sqrt if a.get(i).is_some_and(|x| *x < 0.0) => Fault::SqrtOfNegative,
                    _ => Fault::TooLarge,
                });
                out
            }
            ExprKind::Binary(op, l, r) => {
                let a = self.eval(l)?;
                let b = self.eval(r)?;
                let out: Vec<f64> = a
                    .iter()
                    .zip(&b)
                    .map(|(&x, &y)| match op {
                        BinaryOp::Add => x + y,
                        BinaryOp::Subtract => x - y,
                        BinaryOp::Multiply => x * y,
                        BinaryOp::Divide => x / y,
                        BinaryOp::Power => x.powf(y),
                    })
                    .collect();
                let op = *op;
                self.mark(&out, |i| {
                    let (x, y) = (
                        a.get(i).copied().unwrap_or(0.0),
                        b.get(i).copied().unwrap_or(0.0),
                    );
                    match op {
                        BinaryOp::Divide if y == 0.0 => Fault::DivideByZero,
                        BinaryOp::Power
                            if (x < 0.0 && y.fract() != 0.0) || (x == 0.0 && y < 0.0) =>
                        {
                            Fault::NoRealPower
                        }
                        _ => Fault::TooLarge,
                    }
                });
                out
            }
        })
    }
}

/// The columns an expression reads, in the order written.
fn inputs(e: &Expr, out: &mut Vec<(String, Span)>) {
    match &e.kind {
        ExprKind::Column(c) => out.push((c.clone(), e.span)),
        ExprKind::Number(_) | ExprKind::Aggregate(..) => {}
        ExprKind::Negate(x) | ExprKind::Call(_, x) => inputs(x, out),
        ExprKind::Binary(_, a, b) => {
            inputs(a, out);
            inputs(b, out);
        }
    }
}

/// Checks that every column `expr` reads (its aggregates' too) is a numeric column of `set`,
/// without computing anything: the language server's check as you type, on a data set
/// whose columns it knows by name and type only.
pub(crate) fn check(set: &DataSet, expr: &Expr) -> Result<(), Diagnostic> {
    let (name, span) = match &expr.kind {
        ExprKind::Number(_) => return Ok(()),
        ExprKind::Negate(x) | ExprKind::Call(_, x) => return check(set, x),
        ExprKind::Binary(_, a, b) => {
            check(set, a)?;
            return check(set, b);
        }
        ExprKind::Column(c) => (c.clone(), expr.span),
        ExprKind::Aggregate(_, c) => (c.value.clone(), c.span),
    };
    let column = Spanned { value: name, span };
    let i = column_index(set, &column)?;
    numeric_values(set, i, &column).map(|_| ())
}

/// The quoted name of a column whose name starts with `word` followed by a space, if any.
pub(crate) fn quoted_suggestion(set: &DataSet, word: &str) -> Option<String> {
    set.columns
        .iter()
        .find(|c| {
            c.name
                .strip_prefix(word)
                .is_some_and(|rest| rest.starts_with(' '))
        })
        .map(|c| quote_name(&c.name))
}

/// The values of `expr` over the rows of `set`, or an error at the expression naming the
/// first row of a domain error and how many rows have one.
pub(crate) fn evaluate(set: &DataSet, expr: &Expr) -> Result<Vec<f64>, Diagnostic> {
    let n = set.n_rows();
    let mut reads = Vec::new();
    inputs(expr, &mut reads);
    let mut missing = vec![false; n];
    for (name, span) in &reads {
        let column = Spanned {
            value: name.clone(),
            span: *span,
        };
        let i = column_index(set, &column)?;
        let values = numeric_values(set, i, &column)?;
        for (m, x) in missing.iter_mut().zip(values.iter()) {
            *m |= x.is_nan();
        }
    }
    let mut ev = Eval {
        set,
        n,
        missing,
        faults: vec![None; n],
    };
    let mut out = ev.eval(expr)?;
    let count = ev.faults.iter().filter(|f| f.is_some()).count();
    if let Some((row, fault)) = ev
        .faults
        .iter()
        .enumerate()
        .find_map(|(i, f)| f.map(|f| (i, f)))
    {
        return Err(Diagnostic::new(
            expr.span,
            format!(
                "this gives {} at {}{}",
                fault.words(),
                set.place_of(row),
                if count == 1 {
                    " (the only row where it fails)".to_string()
                } else {
                    format!(", and fails on {count} rows in all")
                }
            ),
        )
        .label("not a number on these rows")
        .help("correct those values, keep only rows where it is defined (`keep where ...`), or change the expression"));
    }
    for (x, m) in out.iter_mut().zip(&ev.missing) {
        if *m {
            *x = f64::NAN;
        }
    }
    Ok(out)
}

impl Session<'_> {
    /// `compute NAME = EXPRESSION`.
    pub(super) fn compute(&mut self, column: &Spanned<String>, expr: &Expr, span: Span) -> Outcome {
        let set = self.current(span)?;
        if set.column(&column.value).is_some() {
            return Err(Diagnostic::new(
                column.span,
                format!("data set {} already has a column {}", crate::report::markdown::code(&set.name), crate::report::markdown::code(&column.value)),
            )
            .label("already a column")
            .help("give the new column a name of its own; a column read from the file is never overwritten"));
        }
        let values = evaluate(set, expr)?;
        let missing = values.iter().filter(|x| x.is_nan()).count();
        let name = set.name.clone();
        let set = self.current_mut(span)?;
        set.columns.push(Column {
            name: column.value.clone(),
            values: Values::Numeric(Arc::new(values)),
            exact: None,
        });
        let mut text = format!(
            "Computed {} in data set {}",
            code(&column.value),
            code(&name)
        );
        text.push_str(&match missing {
            0 => ".".to_string(),
            1 => " (1 row missing, where an input is missing).".to_string(),
            k => format!(" ({k} rows missing, where an input is missing)."),
        });
        Ok(vec![Item::Text(text)])
    }

    /// `label rows by COLUMN`.
    pub(super) fn label_rows(&mut self, column: &Spanned<String>) -> Outcome {
        let set = self.current_mut(column.span)?;
        let i = column_index(set, column)?;
        let col = &set.columns[i];
        let missing = col.missing_count();
        set.label = Some(col.name.clone());
        let mut items = vec![Item::Text(format!(
            "Rows of data set {} are named by {} in influence tables, previews and figure captions, beside their {}.",
            code(&set.name),
            code(&column.value),
            escape(set.rows_are.number_words())
        ))];
        if let Some(w) = repeated_labels(set, i) {
            items.push(Item::Warning(w));
        }
        if missing > 0 {
            items.push(Item::Warning(format!(
                "{missing} row{} of {} {} no value: {} named by {} {} alone.",
                if missing == 1 { "" } else { "s" },
                code(&column.value),
                if missing == 1 { "has" } else { "have" },
                if missing == 1 { "it is" } else { "they are" },
                if missing == 1 { "its" } else { "their" },
                escape(set.rows_are.number_words())
            )));
        }
        Ok(items)
    }
}

/// Places listed in full in the warning of repeated labels; the rest are counted.
const LISTED_PLACES: usize = 5;

/// The warning when labels of column `i` name more than one row: the label that repeats
/// first (at the earliest row that repeats an earlier row's label), every place it names,
/// and how many labels repeat. Rows are then told apart by their numbers beside the label.
fn repeated_labels(set: &DataSet, i: usize) -> Option<String> {
    let col = set.columns.get(i)?;
    let mut first_row: std::collections::HashMap<String, usize> = std::collections::HashMap::new();
    // The earliest repeat: the row of the label's first use.
    let mut first_repeat: Option<usize> = None;
    let mut repeats: std::collections::HashMap<usize, usize> = std::collections::HashMap::new();
    for row in 0..col.len() {
        if col.is_missing(row) {
            continue;
        }
        match first_row.entry(col.display_value(row)) {
            std::collections::hash_map::Entry::Occupied(e) => {
                let first = *e.get();
                first_repeat.get_or_insert(first);
                *repeats.entry(first).or_insert(1) += 1;
            }
            std::collections::hash_map::Entry::Vacant(e) => {
                e.insert(row);
            }
        }
    }
    let first = first_repeat?;
    let label = col.display_value(first);
    let rows: Vec<usize> = (0..col.len())
        .filter(|&r| !col.is_missing(r) && col.display_value(r) == label)
        .collect();
    let numbers: Vec<usize> = rows
        .iter()
        .map(|&r| set.row_numbers.get(r).unwrap_or(r + 1))
        .collect();
    let shown: Vec<String> = numbers
        .iter()
        .take(LISTED_PLACES)
        .map(usize::to_string)
        .collect();
    let mut list = match shown.split_last() {
        Some((last, [])) => last.clone(),
        Some((last, rest)) if numbers.len() <= LISTED_PLACES => {
            format!("{} and {last}", rest.join(", "))
        }
        _ => shown.join(", "),
    };
    if numbers.len() > LISTED_PLACES {
        list.push_str(&format!(" and {} more", numbers.len() - LISTED_PLACES));
    }
    let places = match &set.rows_are {
        crate::data::RowOrigin::FileLines => format!("lines {list}"),
        crate::data::RowOrigin::Sheet(sheet) => {
            format!("rows {list} of sheet \"{}\"", escape(sheet))
        }
        crate::data::RowOrigin::Result => format!("rows {list} of the result"),
    };
    let others = repeats.len() - 1;
    let more = match others {
        0 => String::new(),
        1 => " (and one other label names more than one row)".to_owned(),
        k => format!(" (and {k} other labels name more than one row each)"),
    };
    Some(format!(
        "Labels of {1} repeat: {0} names {2} rows, on {places}{more}; a row whose label repeats is told apart only by its {3}.",
        code(&label),
        code(&col.name),
        rows.len(),
        escape(set.rows_are.number_words())
    ))
}

/// The name of a transformed response as models show it (`log(yield_kg)`), and the scale its
/// results are on ("log", "square-root").
pub(crate) fn transformed_name(t: TransformDecl, column: &str) -> Option<(String, &'static str)> {
    match t {
        TransformDecl::Log => Some((format!("log({column})"), "log")),
        TransformDecl::Sqrt => Some((format!("sqrt({column})"), "square-root")),
        _ => None,
    }
}

/// The values of a model's transformed response, or an error at it naming the first row out
/// of the transform's domain and how many there are.
pub(crate) fn transformed_response(
    set: &DataSet,
    t: TransformDecl,
    column: &Spanned<String>,
) -> Result<Vec<f64>, Diagnostic> {
    let f = match t {
        TransformDecl::Sqrt => Function::Sqrt,
        _ => Function::Log,
    };
    let expr = Expr {
        kind: ExprKind::Call(
            f,
            Box::new(Expr {
                kind: ExprKind::Column(column.value.clone()),
                span: column.span,
            }),
        ),
        span: column.span,
    };
    evaluate(set, &expr)
}
