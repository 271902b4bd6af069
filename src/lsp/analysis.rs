//! One check of a document: its covey blocks parsed exactly as `covey render` parses them (the
//! same document reader, parameters and line parser, so every syntax error has the renderer's
//! place and words), then a walk through its statements in order that knows the data sets,
//! their columns and levels, and the models, without reading a row or fitting anything.

use std::path::{Path, PathBuf};
use std::sync::Arc;

use crate::data::{Code, DataSet, Factor, FactorError, LevelOrder, Values};
use crate::diagnostic::Diagnostic;
use crate::document::{self, Document, DocumentError};
use crate::lang::{
    self, CompareOp, Condition, Gate, Literal, ModelDecl, Params, PlanDecl, PowerLines,
    ReportRequest, Span, Spanned, Statement, StatementKind, TableRequest, TransformDecl,
};
use crate::model::ModelError;
use crate::pipeline::{self, line_start, Shift};
use crate::session::data_statements::{
    column_index, default_name, factor_column, factor_error, numeric_values, order_on_text,
    quote_name, text_for_number, unknown_data_set, unknown_value,
};
use crate::session::model_statements::{column_not_in_model, confidence, Role};
use crate::session::plan_statements::{
    axis_end, least_on_axis, pilot_level, power_lines, PlanInputs,
};
use crate::session::plot_statements::{
    kind_word, listing, no_factor, not_a_factor, several_factors,
};
use crate::session::procedure_statements::{balance_not_in_model, unknown_pair};
use crate::session::{closest, no_data_set, unknown_model, unknown_plan};
use crate::stats::power::Design;

use super::data::{DataCache, Lookup, Summary};
use super::names::{tables_of, uses_of, NameUse};
use super::references;

/// How much a problem matters.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Severity {
    /// The renderer would stop here.
    Error,
    /// Worth a look: the renderer warns, or goes on with a likely slip.
    Warning,
}

/// A problem at a place in the document as the editor holds it.
#[derive(Debug, Clone, PartialEq)]
pub struct Problem {
    /// Byte range in the text as given.
    pub span: Span,
    pub severity: Severity,
    pub message: String,
    pub help: Option<String>,
}

/// A covey block and the statements of its lines that parse.
#[derive(Debug, Clone)]
pub struct Block {
    /// 1-based, among the document's covey blocks.
    pub index: usize,
    /// Its content lines, in the document without covey's regions.
    pub code: Span,
    /// Its opening fence's line start and closing fence line's end (regions removed).
    pub whole: Span,
    pub statements: Vec<Statement>,
}

/// A model as declared, with what the data tell about its terms.
#[derive(Debug, Clone)]
pub struct ModelState {
    pub name: String,
    /// The name in the `model` statement.
    pub def: Span,
    pub statement: Statement,
    /// Index into [`State::data_sets`] of the data set it is fitted to.
    pub data_set: Option<usize>,
    pub response: String,
    /// The columns of its terms, each once, in order; `None` while the data are not known.
    pub vars: Option<Vec<ModelVar>>,
    /// The column that names its rows (`label rows by` before it), when known: its influence
    /// table has a `label` column then.
    pub labels: Option<String>,
}

/// A column a model uses.
#[derive(Debug, Clone)]
pub struct ModelVar {
    pub name: String,
    pub factor: bool,
    /// Entered through a power, log or sqrt somewhere in the model.
    pub transformed: bool,
    /// The levels, for a factor.
    pub levels: Vec<String>,
}

/// A data set as the statements so far have left it.
#[derive(Debug, Clone)]
pub struct DataSetState {
    pub name: String,
    /// Where it is named: the `as NAME`, else the file path.
    pub def: Span,
    pub path: String,
    /// The file's columns, when read.
    pub summary: Option<Arc<Summary>>,
    /// Its columns as they stand (factors declared), with no rows: the renderer's own checks of
    /// names and types run on it.
    pub shape: Option<DataSet>,
    /// Whether `keep` dropped rows: values seen in the file may be gone.
    pub filtered: bool,
}

impl DataSetState {
    /// The values of a column as they stand: a factor's levels, else the file's distinct
    /// values (when counted).
    pub fn levels(&self, column: &str) -> Option<Vec<String>> {
        if let Some(Values::Factor(f)) = self
            .shape
            .as_ref()
            .and_then(|s| s.column(column))
            .map(|c| &c.values)
        {
            return Some(f.levels.clone());
        }
        let c = self.summary.as_ref()?.column(column)?;
        Some(c.levels.as_ref()?.iter().map(|(l, _)| l.clone()).collect())
    }

    /// `"numeric"`, `"text"` or `"factor"`: the column's type as it stands.
    pub fn kind_of(&self, column: &str) -> Option<&'static str> {
        Some(self.shape.as_ref()?.column(column)?.kind_name())
    }
}

/// What the statements before a point have declared.
#[derive(Debug, Clone, Default)]
pub struct State {
    pub data_sets: Vec<DataSetState>,
    pub current: Option<usize>,
    pub markers: Vec<String>,
    pub models: Vec<ModelState>,
    /// The plans declared so far: (name, the statement as written).
    pub plans: Vec<(String, String)>,
}

impl State {
    pub fn current(&self) -> Option<&DataSetState> {
        self.data_sets.get(self.current?)
    }

    pub fn model(&self, name: &str) -> Option<&ModelState> {
        self.models.iter().find(|m| m.name == name)
    }
}

/// A document as last checked.
#[derive(Debug, Clone)]
pub struct Analysis {
    /// The text as the editor holds it.
    pub text: String,
    /// The document's own path, when it is a file.
    pub path: Option<PathBuf>,
    /// The document without covey's regions, when its Markdown could be read.
    pub document: Option<Document>,
    /// From offsets in the document without regions to offsets in the text as given, as the
    /// renderer maps its messages.
    shift: Shift,
    pub params: Params,
    /// Where each parameter is declared (first declaration).
    pub param_defs: Vec<(String, Span)>,
    pub blocks: Vec<Block>,
    /// Every problem found, in document order.
    pub problems: Vec<Problem>,
    /// Every name of every statement, with its role.
    pub uses: Vec<NameUse>,
    /// The tables the statements compute, as (kind, subject), and those they may compute.
    pub tables: Vec<(String, String)>,
    pub maybe_tables: Vec<(String, String)>,
    /// The state after the last statement.
    pub end: State,
    /// Whether a data file it needs is still being read.
    pub pending: bool,
}

impl Analysis {
    /// The document's folder, where its data files are found.
    pub fn folder(&self) -> Option<&Path> {
        self.path.as_deref().and_then(Path::parent)
    }

    /// An offset in the document without regions, in the text as given.
    pub fn to_given(&self, at: usize) -> usize {
        self.shift.offset(at)
    }

    /// An offset in the text as given, in the document without regions (an offset inside a
    /// region is taken to the region's place; one inside a character, to its start).
    pub fn to_source(&self, at: usize) -> usize {
        let at = super::position::floor_boundary(&self.text, at);
        let Some(doc) = &self.document else {
            return at;
        };
        let mut shift = 0usize;
        for (pos, len) in &doc.removed {
            let given_start = pos + shift;
            if at < given_start {
                break;
            }
            if at < given_start + len {
                return *pos;
            }
            shift += len;
        }
        super::position::floor_boundary(&doc.source, at.saturating_sub(shift))
    }

    /// A span of the document without regions, in the text as given.
    pub fn span_to_given(&self, s: Span) -> Span {
        self.shift.span(s)
    }

    /// The source (the document without regions), or the text as given.
    pub fn source(&self) -> &str {
        self.document
            .as_ref()
            .map_or(self.text.as_str(), |d| d.source.as_str())
    }

    /// Every statement in document order.
    pub fn statements(&self) -> impl Iterator<Item = &Statement> {
        self.blocks.iter().flat_map(|b| b.statements.iter())
    }

    /// The block whose content holds `at` (an offset in the source).
    pub fn block_at(&self, at: usize) -> Option<&Block> {
        self.blocks
            .iter()
            .find(|b| b.code.start <= at && at <= b.code.end)
    }

    /// What the statements before `at` (an offset in the source) have declared.
    pub fn state_before(&self, at: usize, data: &mut DataCache) -> State {
        let mut walk = Walk::new(data, self.folder());
        for stmt in self.statements().take_while(|s| s.span.start < at) {
            walk.statement(stmt);
        }
        walk.state
    }
}

/// Checks `text`, a Markdown document at `path` (when it is a file). Data files come from
/// `data`; one not read yet leaves the checks that need it out, and sets
/// [`Analysis::pending`].
pub fn analyze(text: &str, path: Option<&Path>, data: &mut DataCache) -> Analysis {
    let mut a = Analysis {
        text: text.to_string(),
        path: path.map(Path::to_path_buf),
        document: None,
        shift: Shift::default(),
        params: Params::new(),
        param_defs: Vec::new(),
        blocks: Vec::new(),
        problems: Vec::new(),
        uses: Vec::new(),
        tables: Vec::new(),
        maybe_tables: Vec::new(),
        end: State::default(),
        pending: false,
    };
    let mut unclosed = false;
    let doc = match document::parse(text) {
        Ok(d) => d,
        Err(e) => {
            let at = offset_of(text, e.line(), e.column());
            let line_end = text[at..].find(['\n', '\r']).map_or(text.len(), |i| at + i);
            let message = e.to_string();
            // The renderer says where before what; the editor shows where.
            let prefix = format!("line {}, column {}: ", e.line(), e.column());
            a.problems.push(Problem {
                span: Span {
                    start: at,
                    end: line_end,
                },
                severity: Severity::Error,
                message: message
                    .strip_prefix(&prefix)
                    .unwrap_or(&message)
                    .to_string(),
                help: None,
            });
            // A block being written has no closing fence yet: it is completed, hovered and
            // navigated as if closed at the end of the document; but, like the renderer, which
            // runs nothing then, the server reports only the missing fence.
            unclosed = matches!(e, DocumentError::UnclosedFence { .. });
            let closed = match &e {
                DocumentError::UnclosedFence { fence, .. } => {
                    document::parse(&format!("{text}\n{fence}\n")).ok()
                }
                _ => None,
            };
            match closed {
                Some(d) => d,
                None => return a,
            }
        }
    };
    let (params, _, param_errors) = pipeline::declared_parameters(&doc, &[]);
    let mut source_problems: Vec<(Diagnostic, Severity)> = param_errors
        .into_iter()
        .map(|d| (d, Severity::Error))
        .collect();
    for block in &doc.blocks {
        let lines = pipeline::block_lines(&doc.source, block);
        let mut statements = Vec::new();
        for (line, offset, number) in lines {
            match lang::parse_line_with(line, offset, number, &params) {
                Ok(Some(s)) => {
                    if let StatementKind::Param { name, .. } = &s.kind {
                        if !a.param_defs.iter().any(|(n, _)| *n == name.value) {
                            a.param_defs.push((name.value.clone(), name.span));
                        }
                    }
                    statements.push(s);
                }
                Ok(None) => {}
                Err(e) => source_problems.push((
                    Diagnostic::new(e.span, e.message).label("here"),
                    Severity::Error,
                )),
            }
        }
        let fence_start = line_start(&doc.source, block.fence_line);
        a.blocks.push(Block {
            index: block.index,
            code: Span {
                start: block.code_start,
                end: block.insert_at,
            },
            whole: Span {
                start: fence_start,
                end: block.insert_at,
            },
            statements,
        });
    }
    a.params = params;

    let folder = path.and_then(Path::parent);
    let mut walk = Walk::new(data, folder);
    // A line that does not parse may declare a model or a data set: with one, names that are
    // not found are not errors of their own (the renderer runs nothing until the syntax is
    // right).
    walk.broken = !source_problems.is_empty();
    for stmt in a.blocks.iter().flat_map(|b| b.statements.iter()) {
        walk.statement(stmt);
        a.uses.extend(uses_of(stmt));
        // `check` lists influential rows in a table of their own only when there are some.
        for (kind, subject) in tables_of(stmt) {
            if kind != "influence" {
                a.tables.push((kind.clone(), subject.clone()));
            }
            a.maybe_tables.push((kind, subject));
        }
    }
    a.pending = walk.pending;
    let walk_broken = walk.broken;
    source_problems.extend(walk.problems);
    a.end = walk.state;

    for r in &doc.references {
        let checked = references::check(&r.text, &a.tables, &a.maybe_tables);
        if walk_broken && matches!(checked, Err(crate::report::live::LiveError::NoTable { .. })) {
            continue;
        }
        if let Err(e) = checked {
            let help = e.help();
            source_problems.push((
                Diagnostic::new(
                    Span {
                        start: r.start,
                        end: r.end,
                    },
                    e.to_string(),
                )
                .label("this reference")
                .help(help),
                Severity::Error,
            ));
        }
    }
    a.shift = Shift::new(&doc);
    // A covey block in a list or a block quote is not run: the renderer warns, and so does the
    // server, at its opening fence (it used to say nothing, so the block looked checked).
    let nested: Vec<Problem> = pipeline::nested_fences(&doc)
        .into_iter()
        .map(|fence| Problem {
            span: a.span_to_given(fence),
            severity: Severity::Warning,
            message: pipeline::NESTED_BLOCK.to_string(),
            help: None,
        })
        .collect();
    a.document = Some(doc);
    let mut problems: Vec<Problem> = source_problems
        .into_iter()
        .map(|(d, severity)| Problem {
            span: a.span_to_given(d.span),
            severity,
            message: d.message,
            help: d.help,
        })
        .collect();
    if unclosed {
        problems.clear();
    } else {
        problems.extend(nested);
    }
    problems.append(&mut a.problems);
    problems.sort_by_key(|p| (p.span.start, p.span.end));
    a.problems = problems;
    a
}

/// Clause `i` of a load in the order of [`super::data::clause_key`]: sheet, table, query,
/// separator, decimal.
fn load_clause(c: &crate::lang::LoadClauses, i: usize) -> Option<&Spanned<String>> {
    [&c.sheet, &c.table, &c.query, &c.separator, &c.decimal]
        .get(i)
        .and_then(|c| c.as_ref())
}

/// The byte offset of a 1-based line and column (in characters) of `text`, its lines ended as
/// the renderer ends them (a lone CR ends one too).
fn offset_of(text: &str, line: usize, column: usize) -> usize {
    let text = &*crate::diagnostic::lone_cr_as_lf(text);
    let start = line_start(text, line);
    let rest = &text[start..];
    let line_text = rest.split('\n').next().unwrap_or("");
    start
        + line_text
            .char_indices()
            .nth(column.saturating_sub(1))
            .map_or(line_text.len(), |(i, _)| i)
}

/// A walk through the statements in document order, as the renderer's session runs them,
/// keeping only what names and types need.
struct Walk<'c> {
    data: &'c mut DataCache,
    folder: Option<PathBuf>,
    state: State,
    problems: Vec<(Diagnostic, Severity)>,
    pending: bool,
    /// Some line does not parse: unknown names may be declared there.
    broken: bool,
    /// The design and effect size of each plan read so far without an error, for the checks
    /// of `plot power` (the effect is 0 where only solving tells it; no check reads it).
    designs: Vec<(String, Option<(Design, f64)>)>,
}

impl<'c> Walk<'c> {
    fn new(data: &'c mut DataCache, folder: Option<&Path>) -> Walk<'c> {
        Walk {
            data,
            folder: folder.map(Path::to_path_buf),
            state: State::default(),
            problems: Vec::new(),
            pending: false,
            broken: false,
            designs: Vec::new(),
        }
    }

    fn error(&mut self, d: Diagnostic) {
        self.problems.push((d, Severity::Error));
    }

    fn warning(&mut self, d: Diagnostic) {
        self.problems.push((d, Severity::Warning));
    }

    /// The current data set's shape, or `None` (with the renderer's error when there is no
    /// data set at all; nothing when its file is not read).
    fn shape(&mut self, span: Span) -> Option<DataSet> {
        match self.state.current() {
            Some(d) => d.shape.clone(),
            None if self.broken => None,
            None => {
                self.error(no_data_set(span));
                None
            }
        }
    }

    fn column(&mut self, set: &DataSet, column: &Spanned<String>) -> Option<usize> {
        match column_index(set, column) {
            Ok(i) => Some(i),
            Err(d) => {
                self.error(d);
                None
            }
        }
    }

    /// The renderer's error for a model that is not declared (so far).
    fn model(&mut self, name: &Spanned<String>) -> Option<ModelState> {
        if let Some(m) = self.state.model(&name.value) {
            return Some(m.clone());
        }
        if self.broken {
            return None;
        }
        let known: Vec<&str> = self.state.models.iter().map(|m| m.name.as_str()).collect();
        let d = unknown_model(name, &known);
        self.error(d);
        None
    }

    /// Walks one statement. Like the renderer, it reports the first error a statement has.
    fn statement(&mut self, stmt: &Statement) {
        let before = self.problems.len();
        self.statement_checks(stmt);
        let mut seen_error = false;
        let mut i = before;
        while i < self.problems.len() {
            let error = self.problems[i].1 == Severity::Error;
            if error && seen_error {
                self.problems.remove(i);
            } else {
                seen_error |= error;
                i += 1;
            }
        }
    }

    fn statement_checks(&mut self, stmt: &Statement) {
        // A statement the server does not know yet (added to the grammar later) is only parsed.
        #[allow(unreachable_patterns)]
        match &stmt.kind {
            StatementKind::Load {
                path,
                name,
                clauses,
            } => self.load(path, name.as_ref(), clauses),
            StatementKind::LoadDatabase { database, name, .. } => {
                self.load_database(database, name.as_ref())
            }
            StatementKind::Compute { column, expr } => self.compute(column, expr, stmt.span),
            StatementKind::LabelRows { column } => {
                if let Some(set) = self.shape(column.span) {
                    if let Some(i) = self.column(&set, column) {
                        let name = set.columns[i].name.clone();
                        if let Some(shape) = self
                            .state
                            .current
                            .and_then(|c| self.state.data_sets.get_mut(c))
                            .and_then(|d| d.shape.as_mut())
                        {
                            shape.label = Some(name);
                        }
                    }
                }
            }
            StatementKind::Missing { markers } => self.state.markers = markers.clone(),
            StatementKind::Use { name } => self.use_data_set(name, true),
            StatementKind::Show { name: Some(name) } => self.use_data_set(name, false),
            StatementKind::Show { name: None } => {
                self.shape(stmt.span);
            }
            StatementKind::Factor { column, levels } => self.factor(column, levels.as_deref()),
            StatementKind::Keep { condition } => {
                if let Some(set) = self.shape(stmt.span) {
                    self.condition(&set, condition);
                }
                if let Some(i) = self.state.current {
                    if let Some(d) = self.state.data_sets.get_mut(i) {
                        d.filtered = true;
                    }
                }
            }
            StatementKind::Model(decl) => self.model_statement(stmt, decl),
            StatementKind::Table(request) => self.table(request, stmt.span),
            StatementKind::Check { model, .. } => {
                self.model(model);
            }
            StatementKind::Plot {
                kind,
                model,
                covariate,
                factor,
                ..
            } => {
                if let Some(m) = self.model(model) {
                    self.plot(*kind, &m, model, covariate.as_ref(), factor.as_ref());
                }
            }
            StatementKind::Unit { column, .. } => {
                if let Some(set) = self.shape(column.span) {
                    self.column(&set, column);
                }
            }
            StatementKind::Param { .. } => {}
            StatementKind::Plan(decl) => self.plan(decl, stmt),
            StatementKind::PowerPlot { plan, lines, to } => {
                self.power_plot(plan, lines.as_ref(), to.as_ref())
            }
            StatementKind::Require(gate) => self.gate(gate),
            StatementKind::Report(request) => self.report(request),
            _ => {}
        }
    }

    /// `plan`: the renderer's checks that need no fitting and no solving, through the
    /// renderer's own reader of the statement; a pilot model is only looked up (its fit,
    /// and what the plan takes from it, are not known).
    fn plan(&mut self, decl: &PlanDecl, stmt: &Statement) {
        let (broken, known): (bool, Vec<String>) = (
            self.broken,
            self.state.models.iter().map(|m| m.name.clone()).collect(),
        );
        let mut pilot = |m: &Spanned<String>, upper: Option<&Spanned<f64>>| {
            if !broken && !known.contains(&m.value) {
                let names: Vec<&str> = known.iter().map(String::as_str).collect();
                return Err(unknown_model(m, &names));
            }
            pilot_level(upper).map(|_| None)
        };
        let design = match PlanInputs::read(decl, &mut pilot) {
            Ok(inputs) => Some((inputs.design().clone(), inputs.effect().unwrap_or(0.0))),
            Err(d) => {
                self.error(d);
                None
            }
        };
        let plans = &mut self.state.plans;
        plans.retain(|(n, _)| *n != decl.name.value);
        plans.push((decl.name.value.clone(), stmt.text.clone()));
        self.designs.retain(|(n, _)| *n != decl.name.value);
        self.designs.push((decl.name.value.clone(), design));
    }

    /// `plot power`: a plan not made before (the renderer's error), then the renderer's checks
    /// of the lines and the axis when the plan's design is known.
    fn power_plot(
        &mut self,
        plan: &Spanned<String>,
        lines: Option<&PowerLines>,
        to: Option<&Spanned<f64>>,
    ) {
        let plans = &self.state.plans;
        if !plans.iter().any(|(n, _)| *n == plan.value) {
            if !self.broken {
                let known: Vec<&str> = plans.iter().map(|(n, _)| n.as_str()).collect();
                let d = unknown_plan(plan, &known);
                self.error(d);
            }
            return;
        }
        let Some((design, f)) = self
            .designs
            .iter()
            .find(|(n, _)| *n == plan.value)
            .and_then(|(_, d)| d.clone())
        else {
            return;
        };
        let checked = power_lines(&design, f, lines, plan)
            .and_then(|(specs, _)| to.map(|t| axis_end(t, least_on_axis(&specs))).transpose());
        if let Err(d) = checked {
            self.error(d);
        }
    }

    /// `load database`: a data set whose columns the server does not know, since it never
    /// connects to a database.
    fn load_database(&mut self, database: &Spanned<String>, name: Option<&Spanned<String>>) {
        let def = name.unwrap_or(database);
        let state = DataSetState {
            shape: None,
            summary: None,
            name: def.value.clone(),
            def: def.span,
            path: format!("database {}", database.value),
            filtered: false,
        };
        self.define(state);
    }

    /// `compute NAME = EXPRESSION`: the renderer's errors for the columns it reads, and a new
    /// numeric column in the current data set's shape.
    fn compute(&mut self, column: &Spanned<String>, expr: &crate::lang::Expr, span: Span) {
        let Some(mut set) = self.shape(span) else {
            return;
        };
        if set.column(&column.value).is_some() {
            self.error(
                Diagnostic::new(
                    column.span,
                    format!("data set {} already has a column {}", crate::report::markdown::code(&set.name), crate::report::markdown::code(&column.value)),
                )
                .label("already a column")
                .help("give the new column a name of its own; a column read from the file is never overwritten"),
            );
            return;
        }
        if let Err(d) = crate::session::derived::check(&set, expr) {
            self.error(d);
            return;
        }
        set.columns.push(crate::data::Column {
            name: column.value.clone(),
            values: Values::Numeric(Arc::new(Vec::new())),
            exact: None,
        });
        if let Some(i) = self.state.current {
            if let Some(d) = self.state.data_sets.get_mut(i) {
                d.shape = Some(set);
            }
        }
    }

    fn load(
        &mut self,
        path: &Spanned<String>,
        name: Option<&Spanned<String>>,
        clauses: &crate::lang::LoadClauses,
    ) {
        let set_name = name.map_or_else(|| default_name(&path.value), |n| n.value.clone());
        let summary = match &self.folder {
            None => None,
            Some(folder) => {
                match self
                    .data
                    .lookup(folder, &path.value, clauses, &self.state.markers)
                {
                    Lookup::Ready(s) => Some(s),
                    Lookup::Pending => {
                        self.pending = true;
                        None
                    }
                    Lookup::Failed(f) => {
                        // At the clause the renderer puts it at (`sheet`, `query`, ...), or the
                        // path.
                        let at = f
                            .clause
                            .and_then(|i| load_clause(clauses, i))
                            .map_or(path.span, |c| c.span);
                        let mut d = Diagnostic::new(at, f.message.clone()).label(f.label.clone());
                        if let Some(h) = &f.help {
                            d = d.help(h.clone());
                        }
                        self.error(d);
                        None
                    }
                }
            }
        };
        let state = DataSetState {
            shape: summary.as_ref().map(|s| s.shape(&set_name)),
            summary,
            name: set_name,
            def: name.map_or(path.span, |n| n.span),
            path: path.value.clone(),
            filtered: false,
        };
        self.define(state);
    }

    /// A data set loaded: it replaces one of its name, and is the current one.
    fn define(&mut self, state: DataSetState) {
        match self
            .state
            .data_sets
            .iter()
            .position(|d| d.name == state.name)
        {
            Some(i) => {
                self.state.data_sets[i] = state;
                self.state.current = Some(i);
            }
            None => {
                self.state.data_sets.push(state);
                self.state.current = Some(self.state.data_sets.len() - 1);
            }
        }
    }

    fn use_data_set(&mut self, name: &Spanned<String>, switch: bool) {
        match self
            .state
            .data_sets
            .iter()
            .position(|d| d.name == name.value)
        {
            Some(i) => {
                if switch {
                    self.state.current = Some(i);
                }
            }
            None if self.broken => {}
            None => {
                let known: Vec<&str> = self
                    .state
                    .data_sets
                    .iter()
                    .map(|d| d.name.as_str())
                    .collect();
                let mut d = unknown_data_set(name, &known);
                // `show` says no more than that.
                if !switch {
                    d.help = None;
                }
                self.error(d);
            }
        }
    }

    fn factor(&mut self, column: &Spanned<String>, levels: Option<&[Spanned<String>]>) {
        let Some(set) = self.shape(column.span) else {
            return;
        };
        let Some(idx) = self.column(&set, column) else {
            return;
        };
        if let Some(decl) = levels {
            for (i, a) in decl.iter().enumerate() {
                if decl[..i].iter().any(|b| b.value == a.value) {
                    self.error(
                        Diagnostic::new(
                            a.span,
                            format!(
                                "level {} is listed twice",
                                crate::report::markdown::code(&a.value)
                            ),
                        )
                        .label("repeated")
                        .help("list each level once"),
                    );
                    return;
                }
            }
        }
        let Some((filtered, summary)) = self
            .state
            .current()
            .map(|d| (d.filtered, d.summary.clone()))
        else {
            return;
        };
        let found: Option<Vec<(String, usize)>> = match set.columns.get(idx).map(|c| &c.values) {
            Some(Values::Factor(f)) => Some(f.levels.iter().map(|l| (l.clone(), 0)).collect()),
            _ => summary
                .as_ref()
                .and_then(|s| s.column(&column.value))
                .and_then(|c| c.levels.clone()),
        };
        let numeric = matches!(
            set.columns.get(idx).map(|c| &c.values),
            Some(Values::Numeric(_))
        );
        let same = |level: &str, value: &str| {
            if numeric {
                matches!(
                    (crate::data::parse_number(level), crate::data::parse_number(value)),
                    (crate::data::NumberParse::Number(a), crate::data::NumberParse::Number(b)) if a == b
                )
            } else {
                level == value
            }
        };
        let new_levels: Vec<String> = match (levels, &found) {
            (Some(decl), Some(found)) => {
                // After `keep`, values of the file may be gone: only what is there counts.
                if !filtered {
                    if let Some((value, line)) = found
                        .iter()
                        .find(|(v, _)| !decl.iter().any(|l| same(&l.value, v)))
                    {
                        let e = FactorError::UndeclaredLevel {
                            column: column.value.clone(),
                            value: value.clone(),
                            row: 0,
                            line: Some(*line).filter(|l| *l > 0),
                        };
                        self.error(factor_error(column, levels, &e));
                    } else {
                        for l in decl {
                            if !found.iter().any(|(v, _)| same(&l.value, v)) {
                                self.warning(
                                    Diagnostic::new(
                                        l.span,
                                        format!(
                                            "Level {} is declared but no row has it.",
                                            crate::report::markdown::code(&l.value)
                                        ),
                                    )
                                    .label("no row has it"),
                                );
                            }
                        }
                    }
                }
                decl.iter().map(|l| l.value.clone()).collect()
            }
            (Some(decl), None) => decl.iter().map(|l| l.value.clone()).collect(),
            (None, Some(found)) => {
                if found.len() < 2 && !filtered {
                    let e = FactorError::TooFewLevels {
                        column: column.value.clone(),
                        found: found.iter().map(|(v, _)| v.clone()).collect(),
                    };
                    self.error(factor_error(column, levels, &e));
                }
                found.iter().map(|(v, _)| v.clone()).collect()
            }
            (None, None) => Vec::new(),
        };
        if let Some(i) = self.state.current {
            if let Some(shape) = self
                .state
                .data_sets
                .get_mut(i)
                .and_then(|d| d.shape.as_mut())
            {
                if let Some(c) = shape.columns.get_mut(idx) {
                    c.values = Values::Factor(Factor {
                        codes: Arc::new(Vec::<Code>::new()),
                        levels: new_levels,
                        order: if levels.is_some() {
                            LevelOrder::Declared
                        } else {
                            LevelOrder::FirstAppearance
                        },
                    });
                }
            }
        }
    }

    fn condition(&mut self, set: &DataSet, c: &Condition) {
        match c {
            Condition::And(parts) | Condition::Or(parts) => {
                for p in parts {
                    self.condition(set, p);
                }
            }
            Condition::Not(inner) => self.condition(set, inner),
            Condition::Compare { column, op, value } => {
                let Some(idx) = self.column(set, column) else {
                    return;
                };
                let numeric = matches!(set.columns[idx].values, Values::Numeric(_));
                if numeric {
                    if matches!(value.value, Literal::Text(_)) {
                        self.error(text_for_number(column, &value.value, value.span, false));
                    }
                } else if !matches!(op, CompareOp::Eq | CompareOp::Ne) {
                    self.error(order_on_text(column, value.span));
                } else {
                    self.known_value(column, &value.value, value.span);
                }
            }
            Condition::In { column, values } => {
                let Some(idx) = self.column(set, column) else {
                    return;
                };
                let numeric = matches!(set.columns[idx].values, Values::Numeric(_));
                for v in values {
                    if numeric {
                        if matches!(v.value, Literal::Text(_)) {
                            self.error(text_for_number(column, &v.value, v.span, true));
                        }
                    } else {
                        self.known_value(column, &v.value, v.span);
                    }
                }
            }
        }
    }

    /// An error when a text or factor column cannot hold `value`: not one of the factor's
    /// levels, or a text no row of the file has; as the renderer gives it (a `keep where`
    /// with it would keep no row, or every row).
    fn known_value(&mut self, column: &Spanned<String>, value: &Literal, span: Span) {
        let Some(ds) = self.state.current() else {
            return;
        };
        let Some(levels) = ds.levels(&column.value) else {
            return;
        };
        let v = value.as_text();
        if levels.iter().any(|l| l == v) {
            return;
        }
        let factor = ds.kind_of(&column.value) == Some("factor");
        let names: Vec<&str> = levels.iter().map(String::as_str).collect();
        let d = unknown_value(&ds.name, &column.value, v, span, &names, factor);
        self.error(d);
    }

    fn model_statement(&mut self, stmt: &Statement, decl: &ModelDecl) {
        let set = self.shape(stmt.span);
        let mut vars: Option<Vec<ModelVar>> = None;
        if let Some(set) = &set {
            let mut ok = true;
            let mut list: Vec<ModelVar> = Vec::new();
            if let Some(ri) = self.column(set, &decl.response) {
                if let Err(d) = numeric_values(set, ri, &decl.response) {
                    self.error(d);
                }
            }
            for term in &decl.terms {
                for part in &term.parts {
                    let Some(ci) = self.column(set, &part.column) else {
                        ok = false;
                        continue;
                    };
                    let col = &set.columns[ci];
                    let (factor, levels) = match &col.values {
                        Values::Numeric(_) => (false, Vec::new()),
                        Values::Factor(f) => (true, f.levels.clone()),
                        Values::Text(_) => {
                            let d = numeric_values(set, ci, &part.column)
                                .err()
                                .unwrap_or_else(|| {
                                    Diagnostic::new(part.column.span, "this column is text")
                                })
                                .help(format!(
                                    "declare it a factor with `factor {}` if it names groups, or fix its values if it should be numeric",
                                    quote_name(&col.name)
                                ));
                            self.error(d);
                            ok = false;
                            continue;
                        }
                    };
                    if factor && part.transform != TransformDecl::None {
                        self.error(
                            Diagnostic::new(
                                part.span,
                                format!(
                                    "{} is a factor; it cannot be transformed",
                                    crate::report::markdown::code(&part.column.value)
                                ),
                            )
                            .label("transform of a factor"),
                        );
                    }
                    let transformed = part.transform != TransformDecl::None;
                    match list.iter_mut().find(|v| v.name == col.name) {
                        Some(v) => v.transformed |= transformed,
                        None => list.push(ModelVar {
                            name: col.name.clone(),
                            factor,
                            transformed,
                            levels,
                        }),
                    }
                }
            }
            if ok {
                vars = Some(list);
            }
        }
        let entry = ModelState {
            name: decl.name.value.clone(),
            def: decl.name.span,
            statement: stmt.clone(),
            data_set: self.state.current,
            response: decl.response.value.clone(),
            vars,
            labels: self
                .state
                .current()
                .and_then(|d| d.shape.as_ref())
                .and_then(|s| s.label.clone()),
        };
        match self.state.models.iter().position(|m| m.name == entry.name) {
            Some(i) => {
                self.warning(
                    Diagnostic::new(
                        decl.name.span,
                        format!(
                            "This replaces the earlier model {}; tables from here on use the new one.",
                            crate::report::markdown::code(&entry.name)
                        ),
                    )
                    .label("declared again"),
                );
                self.state.models[i] = entry;
            }
            None => self.state.models.push(entry),
        }
    }

    /// The renderer's error when `factor` is not a factor of model `m`, at the factor's own
    /// words, where the renderer puts it (also its error for a column of the data that is not in
    /// the model, which every statement checks first).
    fn model_factor(&mut self, m: &ModelState, factor: &Spanned<String>, label: &str) -> bool {
        let span = factor.span;
        let factor = factor.value.as_str();
        let Some(vars) = &m.vars else {
            return true;
        };
        let e = match vars.iter().find(|v| v.name == factor) {
            None => {
                let column = m
                    .data_set
                    .and_then(|i| self.state.data_sets.get(i))
                    .and_then(|d| d.shape.as_ref())
                    .and_then(|d| d.columns.iter().find(|c| c.name == factor));
                if let Some(c) = column {
                    let factors: Vec<String> = vars
                        .iter()
                        .filter(|v| v.factor)
                        .map(|v| v.name.clone())
                        .collect();
                    let d = column_not_in_model(
                        span,
                        factor,
                        &c.values,
                        &m.name,
                        Role::Factor,
                        &factors,
                    );
                    self.error(d);
                    return false;
                }
                ModelError::UnknownVariable {
                    name: factor.to_string(),
                }
            }
            Some(v) if !v.factor => ModelError::NotAFactor {
                name: factor.to_string(),
                factors: vars
                    .iter()
                    .filter(|v| v.factor)
                    .map(|v| v.name.clone())
                    .collect(),
            },
            Some(_) => return true,
        };
        self.error(Diagnostic::new(span, e.to_string()).label(label));
        false
    }

    /// The renderer's error when the covariate of a slope (named, or the only one) is not a
    /// linear numeric covariate of `m`.
    fn slope_covariate(
        &mut self,
        m: &ModelState,
        covariate: Option<&str>,
        span: Span,
        label: &str,
    ) {
        let Some(vars) = &m.vars else {
            return;
        };
        let numeric: Vec<&ModelVar> = vars.iter().filter(|v| !v.factor).collect();
        let chosen = match covariate {
            Some(name) => match numeric.iter().find(|v| v.name == name) {
                Some(v) => *v,
                None => {
                    let covariates: Vec<String> = numeric.iter().map(|v| v.name.clone()).collect();
                    let column = m
                        .data_set
                        .and_then(|i| self.state.data_sets.get(i))
                        .and_then(|d| d.shape.as_ref())
                        .and_then(|d| d.columns.iter().find(|c| c.name == name));
                    let d = match column {
                        // A column of the data that is no variable of the model, as the renderer
                        // says it before it asks the engine.
                        Some(c) if !vars.iter().any(|v| v.name == name) => column_not_in_model(
                            span,
                            name,
                            &c.values,
                            &m.name,
                            Role::Covariate,
                            &covariates,
                        ),
                        _ => {
                            let e = ModelError::NoSuchCovariate {
                                name: name.to_string(),
                                covariates,
                            };
                            Diagnostic::new(span, e.to_string()).label(label)
                        }
                    };
                    self.error(d);
                    return;
                }
            },
            None => match numeric.as_slice() {
                [one] => *one,
                [] => {
                    self.error(
                        Diagnostic::new(span, ModelError::NoCovariate.to_string()).label(label),
                    );
                    return;
                }
                many => {
                    let e = ModelError::AmbiguousCovariate {
                        candidates: many.iter().map(|v| v.name.clone()).collect(),
                    };
                    self.error(Diagnostic::new(span, e.to_string()).label(label));
                    return;
                }
            },
        };
        if chosen.transformed {
            let e = ModelError::NonlinearCovariate {
                covariate: chosen.name.clone(),
            };
            self.error(Diagnostic::new(span, e.to_string()).label(label));
        }
    }

    /// The renderer's error for a value given to something that is not a numeric covariate of
    /// `m` (`at X = VALUE`).
    fn settings(&mut self, m: &ModelState, at: &[lang::Setting], span: Span) {
        let Some(vars) = &m.vars else {
            return;
        };
        for s in at {
            if !vars.iter().any(|v| !v.factor && v.name == s.column.value) {
                let e = ModelError::CovariateNotInModel {
                    name: s.column.value.clone(),
                };
                self.error(Diagnostic::new(span, e.to_string()).label("cannot compute this"));
                return;
            }
        }
    }

    /// Levels that are not levels of a model's factor.
    fn model_levels(
        &mut self,
        m: &ModelState,
        factor: &str,
        wanted: &[&Spanned<String>],
        span: Option<Span>,
    ) {
        let Some(levels) = m
            .vars
            .as_ref()
            .and_then(|v| v.iter().find(|v| v.name == factor && v.factor))
            .map(|v| &v.levels)
        else {
            return;
        };
        for w in wanted {
            if !levels.contains(&w.value) {
                let e = ModelError::UnknownLevel {
                    factor: factor.to_string(),
                    level: w.value.clone(),
                };
                let names: Vec<&str> = levels.iter().map(String::as_str).collect();
                let help = match closest(&w.value, &names) {
                    Some(c) => format!("did you mean {c}?", c = crate::report::markdown::code(c)),
                    None => format!("its levels are {}", listing(&names)),
                };
                self.error(
                    Diagnostic::new(span.unwrap_or(w.span), e.to_string())
                        .label("unknown level")
                        .help(help),
                );
            }
        }
    }

    fn confidence(&mut self, level: Option<&Spanned<f64>>) {
        if let Err(d) = confidence(level) {
            self.error(d);
        }
    }

    fn table(&mut self, request: &TableRequest, span: Span) {
        match request {
            TableRequest::Summary { column, by } => {
                let Some(set) = self.shape(span) else {
                    return;
                };
                if let Some(i) = self.column(&set, column) {
                    if let Err(d) = numeric_values(&set, i, column) {
                        self.error(d);
                    }
                }
                if let Some(b) = by {
                    if let Err(d) = factor_column(&set, b) {
                        self.error(d);
                    }
                }
            }
            TableRequest::Fit { model } | TableRequest::Anova { model, .. } => {
                self.model(model);
            }
            TableRequest::Coefficients { model, level, .. } => {
                let known = self.model(model).is_some();
                if known {
                    self.confidence(level.as_ref());
                }
            }
            TableRequest::Compare { first, second } => {
                let known = self.model(first).is_some();
                if known {
                    self.model(second);
                }
            }
            TableRequest::Means {
                model,
                factor,
                at,
                level,
                ..
            }
            | TableRequest::Differences {
                model,
                factor,
                at,
                level,
                ..
            }
            | TableRequest::Contrast {
                model,
                factor,
                at,
                level,
                ..
            } => {
                let Some(m) = self.model(model) else {
                    return;
                };
                self.confidence(level.as_ref());
                if self.model_factor(&m, factor, "cannot compute this") {
                    if let TableRequest::Means { by: Some(by), .. } = request {
                        // `by` names a second factor of the model, checked as the first.
                        if !self.model_factor(&m, by, "cannot compute this") {
                            return;
                        }
                    }
                    self.settings(&m, at, factor.span);
                }
            }
            TableRequest::Slopes {
                model,
                covariate,
                factor,
                level,
            } => {
                let Some(m) = self.model(model) else {
                    return;
                };
                self.confidence(level.as_ref());
                let span = covariate.as_ref().map_or(factor.span, |c| c.span);
                // An error about the factor is at its words, as the renderer puts it (it was at
                // the covariate's: `of group for x` marked `group` for "`x` is not a factor").
                if self.model_factor(&m, factor, "cannot compute this") {
                    let c = covariate.as_ref().map(|c| c.value.as_str());
                    self.slope_covariate(&m, c, span, "cannot compute this");
                }
            }
            TableRequest::Regions {
                model,
                covariate,
                factor,
                between,
                ..
            } => {
                let Some(m) = self.model(model) else {
                    return;
                };
                if self.model_factor(&m, factor, "cannot compute this") {
                    self.slope_covariate(
                        &m,
                        Some(&covariate.value),
                        covariate.span,
                        "cannot compute this",
                    );
                    if let Some((a, b)) = between {
                        self.model_levels(&m, &factor.value, &[a, b], None);
                    }
                }
            }
            // A kind added to the language later: nothing to check here yet.
            #[allow(unreachable_patterns)]
            _ => {}
        }
    }

    fn plot(
        &mut self,
        kind: lang::PlotKind,
        m: &ModelState,
        model: &Spanned<String>,
        covariate: Option<&Spanned<String>>,
        factor: Option<&Spanned<String>>,
    ) {
        use lang::PlotKind;
        let Some(vars) = &m.vars else {
            return;
        };
        let numeric: Vec<&str> = vars
            .iter()
            .filter(|v| !v.factor)
            .map(|v| v.name.as_str())
            .collect();
        let factors: Vec<&str> = vars
            .iter()
            .filter(|v| v.factor)
            .map(|v| v.name.as_str())
            .collect();
        let word = kind_word(kind);
        let takes_covariate = matches!(kind, PlotKind::Lines | PlotKind::Residuals);
        match covariate {
            Some(c) if !takes_covariate => {
                self.error(
                    Diagnostic::new(c.span, format!("`plot {word}` does not take a covariate"))
                        .label("not used by this figure")
                        .help("`of X` goes with `plot lines` and `plot residuals`"),
                );
                return;
            }
            Some(c) if !numeric.contains(&c.value.as_str()) => {
                let help = if numeric.is_empty() {
                    format!(
                        "model {} has no covariate",
                        crate::report::markdown::code(&model.value)
                    )
                } else {
                    format!("its covariates are {}", listing(&numeric))
                };
                self.error(
                    Diagnostic::new(
                        c.span,
                        format!(
                            "{} is not a covariate of model {}",
                            crate::report::markdown::code(&c.value),
                            crate::report::markdown::code(&model.value)
                        ),
                    )
                    .label("not a covariate of this model")
                    .help(help),
                );
                return;
            }
            None if kind == PlotKind::Lines && numeric.is_empty() => {
                self.error(
                    Diagnostic::new(
                        model.span,
                        format!(
                            "model {} has no covariate to draw lines along",
                            crate::report::markdown::code(&model.value)
                        ),
                    )
                    .label("no covariate")
                    .help("`plot groups` or `plot means` show a model of factors only"),
                );
                return;
            }
            None if kind == PlotKind::Lines && numeric.len() > 1 => {
                self.error(
                    Diagnostic::new(
                        model.span,
                        format!(
                            "model {} has several covariates",
                            crate::report::markdown::code(&model.value)
                        ),
                    )
                    .label("which covariate?")
                    .help(format!("name one with `of`: {}", listing(&numeric))),
                );
                return;
            }
            _ => {}
        }
        let needs_factor = matches!(kind, PlotKind::Means | PlotKind::Groups);
        match factor {
            Some(named) if !factors.contains(&named.value.as_str()) => {
                self.error(not_a_factor(named, model, &factors));
            }
            None if needs_factor && factors.is_empty() => {
                self.error(no_factor(model, word));
            }
            None if (needs_factor || kind == PlotKind::Lines) && factors.len() > 1 => {
                self.error(several_factors(model, &factors));
            }
            _ => {}
        }
    }

    fn alpha(&mut self, alpha: Option<&Spanned<f64>>) -> bool {
        match alpha {
            Some(a) if !(a.value > 0.0 && a.value < 1.0) => {
                self.error(
                    Diagnostic::new(a.span, "alpha must lie between 0 and 1")
                        .label("not a probability"),
                );
                false
            }
            _ => true,
        }
    }

    fn gate(&mut self, gate: &Gate) {
        match gate {
            Gate::EqualSlopes {
                model,
                factor,
                covariate,
                alpha,
            } => {
                if !self.alpha(alpha.as_ref()) {
                    return;
                }
                let Some(m) = self.model(model) else {
                    return;
                };
                if self.model_factor(&m, factor, "cannot test this") {
                    let c = covariate.as_ref().map(|c| c.value.as_str());
                    let at = covariate.as_ref().map_or(factor.span, |c| c.span);
                    self.slope_covariate(&m, c, at, "cannot test this");
                }
            }
            Gate::Normality { model, alpha } => {
                let in_range = self.alpha(alpha.as_ref());
                if in_range {
                    self.model(model);
                }
            }
            Gate::RowsPerLevel { factor, .. } => {
                if let Some(set) = self.shape(factor.span) {
                    if let Err(d) = factor_column(&set, factor) {
                        self.error(d);
                    }
                }
            }
            Gate::Balance {
                covariate,
                factor,
                model: Some(model),
                alpha,
            } => {
                if !self.alpha(alpha.as_ref()) {
                    return;
                }
                let Some(m) = self.model(model) else {
                    return;
                };
                let Some(vars) = &m.vars else {
                    return;
                };
                let has = |name: &str, factor: bool| {
                    vars.iter().any(|v| v.name == name && v.factor == factor)
                };
                if !has(&factor.value, true) {
                    self.error(balance_not_in_model(factor, &m.name, true));
                } else if !has(&covariate.value, false) {
                    self.error(balance_not_in_model(covariate, &m.name, false));
                }
            }
            Gate::Balance {
                covariate,
                factor,
                model: None,
                alpha,
            } => {
                if !self.alpha(alpha.as_ref()) {
                    return;
                }
                let Some(set) = self.shape(factor.span) else {
                    return;
                };
                let Some(ci) = self.column(&set, covariate) else {
                    return;
                };
                if let Err(d) = numeric_values(&set, ci, covariate) {
                    self.error(d);
                    return;
                }
                if let Err(d) = factor_column(&set, factor) {
                    self.error(d);
                }
            }
            // A kind added to the language later: nothing to check here yet.
            #[allow(unreachable_patterns)]
            _ => {}
        }
    }

    fn report(&mut self, request: &ReportRequest) {
        match request {
            ReportRequest::Term { model, .. } => {
                self.model(model);
            }
            ReportRequest::Difference {
                model,
                factor,
                first,
                second,
                ..
            } => {
                let Some(m) = self.model(model) else {
                    return;
                };
                if !self.model_factor(&m, factor, "cannot compute this") {
                    return;
                }
                let Some(levels) = m
                    .vars
                    .as_ref()
                    .and_then(|v| v.iter().find(|v| v.name == factor.value))
                    .map(|v| v.levels.clone())
                else {
                    return;
                };
                let known = |s: &Spanned<String>| levels.contains(&s.value);
                if !known(first) || !known(second) || first.value == second.value {
                    self.error(unknown_pair(first, second, &factor.value, &m.name, &levels));
                }
            }
            // A kind added to the language later: nothing to check here yet.
            #[allow(unreachable_patterns)]
            _ => {}
        }
    }
}
