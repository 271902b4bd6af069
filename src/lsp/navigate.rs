//! Go to definition (models, data sets, parameters) and the outline of a document (its blocks,
//! and in each the data sets, parameters, models and tables it declares).

use lsp_types::{DocumentSymbol, SymbolKind};

use crate::lang::{Span, Statement, StatementKind};
use crate::report::live;

use super::analysis::Analysis;
use super::data::DataCache;
use super::hover::parameter_at;
use super::names::Role;
use super::position::{Encoding, Lines};

/// Where the name at `at` (a byte offset in the text as given) is declared, in the text as
/// given: a model at its `model` statement, a data set at its `load`, a parameter at its `param`.
pub fn definition(a: &Analysis, data: &mut DataCache, at: usize) -> Option<Span> {
    let doc = a.document.as_ref()?;
    let at_source = a.to_source(at);
    let source_span = if a.block_at(at_source).is_some() {
        if let Some((_, name)) = parameter_at(a.source(), at_source) {
            a.param_defs
                .iter()
                .find(|(n, _)| *n == name)
                .map(|(_, s)| *s)?
        } else {
            let u = a
                .uses
                .iter()
                .find(|u| u.span.start <= at_source && at_source <= u.span.end)?;
            match &u.role {
                Role::Model | Role::ModelDef => model_def(a, data, &u.name, u.span)?,
                Role::DataSet | Role::DataSetDef => {
                    let state = a.state_before(u.span.end, data);
                    state.data_sets.iter().find(|d| d.name == u.name)?.def
                }
                Role::ParamDef | Role::PlanDef => u.span,
                Role::Plan => plan_def(a, &u.name)?,
                _ => return None,
            }
        }
    } else {
        // The model of a live reference.
        let r = doc
            .references
            .iter()
            .find(|r| r.start <= at_source && at_source < r.end)?;
        let parsed = live::parse(&r.text).ok()?;
        if parsed.kind == "plan" {
            return Some(a.span_to_given(plan_def(a, &parsed.subject)?));
        }
        model_def(
            a,
            data,
            &parsed.subject,
            Span {
                start: r.end,
                end: r.end,
            },
        )?
    };
    Some(a.span_to_given(source_span))
}

/// The declaration of model `name` in force at `used` (the last before it), else the first.
fn model_def(a: &Analysis, data: &mut DataCache, name: &str, used: Span) -> Option<Span> {
    let state = a.state_before(used.end, data);
    if let Some(m) = state.model(name) {
        return Some(m.def);
    }
    a.statements().find_map(|s| match &s.kind {
        StatementKind::Model(decl) if decl.name.value == name => Some(decl.name.span),
        _ => None,
    })
}

/// Where the plan `name` is declared.
fn plan_def(a: &Analysis, name: &str) -> Option<Span> {
    a.statements().find_map(|s| match &s.kind {
        StatementKind::Plan(decl) if decl.name.value == name => Some(decl.name.span),
        _ => None,
    })
}

/// The outline: one symbol per covey block, holding its data sets, parameters, models and
/// tables.
#[allow(deprecated)] // `DocumentSymbol::deprecated` must be given; it is `None`.
pub fn symbols(a: &Analysis, enc: Encoding) -> Vec<DocumentSymbol> {
    let lines = Lines::new(&a.text);
    let range = |s: Span| lines.range(&a.text, a.span_to_given(s), enc);
    a.blocks
        .iter()
        .map(|b| {
            let children: Vec<DocumentSymbol> = b
                .statements
                .iter()
                .filter_map(|s| {
                    let (name, kind, selection, detail) = statement_symbol(s)?;
                    Some(DocumentSymbol {
                        name,
                        detail,
                        kind,
                        tags: None,
                        deprecated: None,
                        range: range(s.span),
                        selection_range: range(selection),
                        children: None,
                    })
                })
                .collect();
            let whole = range(b.whole);
            DocumentSymbol {
                name: format!("covey block {}", b.index),
                detail: Some(format!("{} statements", b.statements.len())),
                kind: SymbolKind::MODULE,
                tags: None,
                deprecated: None,
                range: whole,
                selection_range: lsp_types::Range::new(whole.start, whole.start),
                children: Some(children),
            }
        })
        .collect()
}

/// A statement's symbol: name, kind, the words to select, and a detail.
fn statement_symbol(s: &Statement) -> Option<(String, SymbolKind, Span, Option<String>)> {
    match &s.kind {
        StatementKind::Model(decl) => Some((
            decl.name.value.clone(),
            SymbolKind::FUNCTION,
            decl.name.span,
            Some(s.text.clone()),
        )),
        StatementKind::Table(_) | StatementKind::Check { .. } => {
            Some((s.text.clone(), SymbolKind::STRUCT, s.span, None))
        }
        StatementKind::Load { path, name, .. } => {
            let (label, span) = match name {
                Some(n) => (n.value.clone(), n.span),
                None => (
                    crate::session::data_statements::default_name(&path.value),
                    path.span,
                ),
            };
            Some((
                label,
                SymbolKind::VARIABLE,
                span,
                Some(format!("data set from \"{}\"", path.value)),
            ))
        }
        StatementKind::Plan(decl) => Some((
            decl.name.value.clone(),
            SymbolKind::OBJECT,
            decl.name.span,
            Some(s.text.clone()),
        )),
        StatementKind::Param { name, .. } => Some((
            name.value.clone(),
            SymbolKind::CONSTANT,
            name.span,
            Some(s.text.clone()),
        )),
        _ => None,
    }
}
