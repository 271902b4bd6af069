//! The interpreter: runs statements in document order against one shared
//! state (data sets, models) and returns typed results.
//!
//! Each statement kind has one handler. Handlers return [`Item`]s or a
//! [`Diagnostic`] that points at the words in the document that caused it.

mod check_statements;
pub(crate) mod data_statements;
pub(crate) mod derived;
pub(crate) mod model_statements;
pub(crate) mod plan_statements;
pub(crate) use plan_statements::unknown_plan;
pub(crate) mod plot_statements;
pub(crate) mod procedure_statements;

use std::cell::RefCell;
use std::sync::Arc;

use crate::data::DataSet;
pub(crate) use crate::diagnostic::closest;
use crate::diagnostic::Diagnostic;
use crate::lang::{Span, Spanned, Statement, StatementKind, TableRequest};
use crate::model::Fit;
use crate::report::{InputRecord, Item};
use crate::world::World;

/// A fitted model as the session keeps it.
pub struct ModelEntry {
    pub name: String,
    pub data_set: String,
    pub fit: Fit,
    /// The scale of a transformed response ("log" for `log(y)`), which its results are on.
    pub scale: Option<&'static str>,
    /// What the row numbers of its data set count (file lines, rows of a sheet, ...).
    pub rows_are: crate::data::RowOrigin,
    /// The label column of its data set (`label rows by`) as it was when fitted: the label
    /// of fitted row k is its value at the data-set row the fit used.
    pub labels: Option<crate::data::Column>,
}

impl ModelEntry {
    /// The label of the model's fitted row `k`, if its rows are labelled.
    pub fn label(&self, k: usize) -> Option<String> {
        let i = self.fit.used_rows().get(k)?;
        let col = self.labels.as_ref()?;
        (!col.is_missing(i)).then(|| col.display_value(i))
    }
}

/// The state shared by every block of one document.
pub struct Session<'w> {
    world: &'w dyn World,
    data_sets: Vec<DataSet>,
    current: Option<usize>,
    missing_markers: Vec<String>,
    /// Every file a `load` read or tried to read, and the cell text it refused as an
    /// undeclared missing-value marker, if that is why it failed: a `missing` statement
    /// after it says it comes too late.
    loads: Vec<(String, Option<String>)>,
    models: Vec<ModelEntry>,
    inputs: Vec<InputRecord>,
    /// Units declared with `unit COLUMN "TEXT"`, for axis labels.
    units: Vec<(String, String)>,
    /// Plans made with `plan`, for `plot power`.
    plans: Vec<plan_statements::PlanEntry>,
    /// Database addresses from the command line, for `load database`.
    databases: crate::data::database::Databases,
    /// Columns of the data sets as models hold them, one shared copy each, made on first use
    /// and forgotten by every statement that changes a data set (factor codes need none: a
    /// factor's codes are shared as they are).
    shared: RefCell<SharedColumns>,
}

/// Shared copies of data-set columns, by (data set, column).
#[derive(Default)]
struct SharedColumns {
    /// The exact-offset residuals of numeric columns (the values themselves are shared as
    /// the data set holds them).
    residuals: Vec<Shared<(usize, usize), f64>>,
}

/// One shared copy and its key.
type Shared<K, T> = (K, Arc<Vec<T>>);

/// The copy under `key` in `list`, made from `data` the first time it is asked for.
fn share<K: PartialEq, T: Clone>(list: &mut Vec<Shared<K, T>>, key: K, data: &[T]) -> Arc<Vec<T>> {
    if let Some((_, v)) = list.iter().find(|(k, _)| *k == key) {
        return Arc::clone(v);
    }
    let v = Arc::new(data.to_vec());
    list.push((key, Arc::clone(&v)));
    v
}

type Outcome = Result<Vec<Item>, Diagnostic>;

impl<'w> Session<'w> {
    /// A fresh session that reads its data files through `world`.
    pub fn new(world: &'w dyn World) -> Session<'w> {
        Session {
            world,
            data_sets: Vec::new(),
            current: None,
            missing_markers: Vec::new(),
            loads: Vec::new(),
            models: Vec::new(),
            inputs: Vec::new(),
            units: Vec::new(),
            plans: Vec::new(),
            databases: Default::default(),
            shared: RefCell::default(),
        }
    }

    /// Gives the session the database addresses of the command line (`--database`).
    pub fn set_databases(&mut self, databases: crate::data::database::Databases) {
        self.databases = databases;
    }

    /// Every data file read so far, in order of first reading.
    pub fn inputs(&self) -> &[InputRecord] {
        &self.inputs
    }

    /// The data set statements act on now (the last loaded or used), as it stands.
    pub fn current_data_set(&self) -> Option<&DataSet> {
        self.current.and_then(|i| self.data_sets.get(i))
    }

    /// Runs one statement and returns what it produced.
    pub fn run(&mut self, stmt: &Statement) -> Outcome {
        if matches!(
            stmt.kind,
            StatementKind::Load { .. }
                | StatementKind::LoadDatabase { .. }
                | StatementKind::Compute { .. }
                | StatementKind::LabelRows { .. }
                | StatementKind::Missing { .. }
                | StatementKind::Factor { .. }
                | StatementKind::Keep { .. }
        ) {
            *self.shared.borrow_mut() = SharedColumns::default();
        }
        let items = self.run_statement(stmt)?;
        Ok(self.on_scale(stmt, items))
    }

    /// The results of a model with a transformed response say the scale they are on, in
    /// every table's caption and every figure's caption.
    fn on_scale(&self, stmt: &Statement, mut items: Vec<Item>) -> Vec<Item> {
        let model = match &stmt.kind {
            StatementKind::Table(TableRequest::Summary { .. }) => return items,
            StatementKind::Table(t) => t.model_name(),
            StatementKind::Plot { model, .. } | StatementKind::Check { model, .. } => &model.value,
            _ => return items,
        };
        let Some(scale) = self
            .models
            .iter()
            .find(|m| m.name == model)
            .and_then(|m| m.scale)
        else {
            return items;
        };
        for it in &mut items {
            match it {
                Item::Table(t) => t.caption.push_str(&format!(", on the {scale} scale")),
                Item::Figure(f) => {
                    f.caption.push_str(&format!(", on the {scale} scale"));
                    f.alt
                        .push_str(&format!(" The response is on the {scale} scale."));
                }
                _ => {}
            }
        }
        items
    }

    fn run_statement(&mut self, stmt: &Statement) -> Outcome {
        match &stmt.kind {
            StatementKind::Load {
                path,
                name,
                clauses,
            } => self.load(path, name.as_ref(), clauses),
            StatementKind::LoadDatabase {
                database,
                query,
                name,
            } => self.load_database(database, query, name.as_ref()),
            StatementKind::Compute { column, expr } => self.compute(column, expr, stmt.span),
            StatementKind::LabelRows { column } => self.label_rows(column),
            StatementKind::Missing { markers } => self.missing(markers),
            StatementKind::Use { name } => self.use_data_set(name),
            StatementKind::Factor { column, levels } => self.factor(column, levels.as_deref()),
            StatementKind::Keep { condition } => self.keep(condition, stmt.span),
            StatementKind::Show { name } => self.show(name.as_ref(), stmt.span),
            StatementKind::Model(decl) => self.model(decl, stmt.span),
            StatementKind::Check { model, alpha } => self.check(model, alpha.as_ref()),
            StatementKind::Plot {
                kind,
                model,
                covariate,
                factor,
                by,
            } => self.plot(
                *kind,
                model,
                covariate.as_ref(),
                factor.as_ref(),
                by.as_ref(),
            ),
            StatementKind::Unit { column, unit } => self.unit(column, unit),
            StatementKind::Param {
                name,
                value,
                default,
            } => self.param(name, value, default),
            StatementKind::Require(gate) => self.require(gate),
            StatementKind::Report(request) => self.report(request),
            StatementKind::Plan(decl) => self.plan(decl),
            StatementKind::PowerPlot { plan, lines, to } => {
                self.power_plot(plan, lines.as_ref(), to.as_ref())
            }
            StatementKind::Table(request) => match request {
                TableRequest::Summary { column, by } => {
                    self.summary(column, by.as_ref(), stmt.span)
                }
                other => {
                    let mut items = self.model_table(other)?;
                    let subject = other.model_name().to_string();
                    let rows = self
                        .models
                        .iter()
                        .find(|m| m.name == subject)
                        .map(|m| m.fit.used_rows().len());
                    for it in &mut items {
                        if let Item::Table(t) = it {
                            t.subject = Some(subject.clone());
                            // Every table of tests and limits says on how many rows they
                            // rest; `fit` and `compare` have a column for it.
                            if let (Some(n), false) = (rows, matches!(t.kind, "fit" | "compare")) {
                                t.notes.push(format!(
                                    "n = {n}: the rows model {} is fitted to.",
                                    crate::report::markdown::code(&subject)
                                ));
                            }
                        }
                    }
                    Ok(items)
                }
            },
        }
    }

    /// The current data set, or an error at `span` when none was loaded.
    fn current(&self, span: Span) -> Result<&DataSet, Diagnostic> {
        self.current
            .and_then(|i| self.data_sets.get(i))
            .ok_or_else(|| no_data_set(span))
    }

    fn current_mut(&mut self, span: Span) -> Result<&mut DataSet, Diagnostic> {
        let i = self.current.ok_or_else(|| no_data_set(span))?;
        self.data_sets
            .get_mut(i)
            .ok_or_else(|| Diagnostic::new(span, "no data set is loaded yet"))
    }

    /// The shared exact-offset residuals of column `c` of data set `set`.
    fn shared_residuals(&self, set: usize, c: usize, residuals: &[f64]) -> Arc<Vec<f64>> {
        share(&mut self.shared.borrow_mut().residuals, (set, c), residuals)
    }

    /// The unit declared for a column, if any.
    pub fn unit_of(&self, column: &str) -> Option<&str> {
        self.units
            .iter()
            .find(|(c, _)| c == column)
            .map(|(_, u)| u.as_str())
    }

    /// An axis label: the column name, with its unit in brackets when one
    /// was declared.
    pub fn axis_label(&self, column: &str) -> String {
        match self.unit_of(column) {
            Some(u) => format!("{column} ({u})"),
            None => column.to_string(),
        }
    }

    fn model_entry(&self, name: &Spanned<String>) -> Result<&ModelEntry, Diagnostic> {
        self.models
            .iter()
            .find(|m| m.name == name.value)
            .ok_or_else(|| {
                let known: Vec<&str> = self.models.iter().map(|m| m.name.as_str()).collect();
                unknown_model(name, &known)
            })
    }
}

/// The error for a statement that needs data before any is loaded.
pub(crate) fn no_data_set(span: Span) -> Diagnostic {
    Diagnostic::new(span, "no data set is loaded yet")
        .label("needs data")
        .help("load a file first, for example `load \"data.csv\"`")
}

/// The error for a model that is not declared; `known` are the models declared so far.
pub(crate) fn unknown_model(name: &Spanned<String>, known: &[&str]) -> Diagnostic {
    let help = match closest(&name.value, known) {
        Some(c) => format!("did you mean {c}?", c = crate::report::markdown::code(c)),
        None if known.is_empty() => "declare it first with `model NAME: RESPONSE on TERMS`".into(),
        None => format!("the models so far are {}", known.join(", ")),
    };
    Diagnostic::new(
        name.span,
        format!(
            "there is no model called {}",
            crate::report::markdown::code(&name.value)
        ),
    )
    .label("unknown model")
    .help(help)
}
