//! What each name in a statement stands for, read from the syntax tree the renderer runs: a
//! model being declared or used, a data set, a column, a factor or covariate of a model, a level
//! of a column. Hover, go to definition and completion all start here.

use crate::lang::{
    Condition, Expr, ExprKind, Gate, ReportRequest, Setting, Span, Spanned, Statement,
    StatementKind, TableRequest,
};

/// What a name in a statement stands for.
#[derive(Debug, Clone, PartialEq, Eq)]
pub enum Role {
    /// A model declared here.
    ModelDef,
    /// A model used.
    Model,
    /// A data set named here (by `load ... as NAME`, or by the file when no name is given).
    DataSetDef,
    /// A data set used.
    DataSet,
    /// A column of the current data set.
    Column,
    /// A factor of the model named in `context`.
    ModelFactor,
    /// A numeric covariate of the model named in `context`.
    ModelCovariate,
    /// A value of the column named in `context`.
    Level,
    /// A level of the factor named in `context` as the model (`model`) fitted it.
    ModelLevel { model: String },
    /// A parameter declared here.
    ParamDef,
    /// A plan declared here (`plan NAME ...`).
    PlanDef,
    /// A plan used (`plot power NAME`).
    Plan,
    /// The path of a data file.
    File,
}

/// One name of a statement, where it stands and what it stands for.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct NameUse {
    /// Where the name is written, in the document without covey's regions.
    pub span: Span,
    /// The name as the statement means it (quotes and escapes removed).
    pub name: String,
    pub role: Role,
    /// The model of a factor or covariate, the column of a level; empty otherwise.
    pub context: String,
}

fn push(out: &mut Vec<NameUse>, span: Span, name: &str, role: Role, context: &str) {
    out.push(NameUse {
        span,
        name: name.to_string(),
        role,
        context: context.to_string(),
    });
}

/// Two levels of a model's factor (`between A and B`).
fn push_levels(
    o: &mut Vec<NameUse>,
    model: &Spanned<String>,
    factor: &Spanned<String>,
    levels: [&Spanned<String>; 2],
) {
    for l in levels {
        let role = Role::ModelLevel {
            model: model.value.clone(),
        };
        push(o, l.span, &l.value, role, &factor.value);
    }
}

/// The names of a statement and their roles, in the order written.
pub fn uses_of(stmt: &Statement) -> Vec<NameUse> {
    let mut out = Vec::new();
    let o = &mut out;
    // A statement the language server does not know yet (one added to the grammar later) has
    // no named parts here; everything else about it (syntax errors, keywords) still works.
    #[allow(unreachable_patterns)]
    match &stmt.kind {
        StatementKind::Load { path, name, .. } => {
            push(o, path.span, &path.value, Role::File, "");
            if let Some(n) = name {
                push(o, n.span, &n.value, Role::DataSetDef, "");
            }
        }
        StatementKind::LoadDatabase { database, name, .. } => {
            // Named after the database when no `as` is given.
            let def = name.as_ref().unwrap_or(database);
            push(o, def.span, &def.value, Role::DataSetDef, "");
        }
        StatementKind::Compute { column, expr } => {
            push(o, column.span, &column.value, Role::Column, "");
            expr_uses(expr, o);
        }
        StatementKind::LabelRows { column } => {
            push(o, column.span, &column.value, Role::Column, "")
        }
        StatementKind::Use { name } => push(o, name.span, &name.value, Role::DataSet, ""),
        StatementKind::Show { name: Some(name) } => {
            push(o, name.span, &name.value, Role::DataSet, "")
        }
        StatementKind::Factor { column, levels } => {
            push(o, column.span, &column.value, Role::Column, "");
            for l in levels.iter().flatten() {
                push(o, l.span, &l.value, Role::Level, &column.value);
            }
        }
        StatementKind::Keep { condition } => condition_uses(condition, o),
        StatementKind::Model(decl) => {
            push(o, decl.name.span, &decl.name.value, Role::ModelDef, "");
            push(
                o,
                decl.response.span,
                &decl.response.value,
                Role::Column,
                "",
            );
            for t in &decl.terms {
                for p in &t.parts {
                    push(o, p.column.span, &p.column.value, Role::Column, "");
                }
            }
        }
        StatementKind::Table(request) => table_uses(request, o),
        StatementKind::Check { model, .. } => push(o, model.span, &model.value, Role::Model, ""),
        StatementKind::Plot {
            model,
            covariate,
            factor,
            by,
            ..
        } => {
            push(o, model.span, &model.value, Role::Model, "");
            if let Some(b) = by {
                push(o, b.span, &b.value, Role::ModelFactor, &model.value);
            }
            if let Some(c) = covariate {
                push(o, c.span, &c.value, Role::ModelCovariate, &model.value);
            }
            if let Some(named) = factor {
                push(o, named.span, &named.value, Role::ModelFactor, &model.value);
            }
        }
        StatementKind::Unit { column, .. } => push(o, column.span, &column.value, Role::Column, ""),
        StatementKind::Param { name, .. } => push(o, name.span, &name.value, Role::ParamDef, ""),
        StatementKind::Plan(decl) => {
            push(o, decl.name.span, &decl.name.value, Role::PlanDef, "");
            if let Some(m) = &decl.pilot {
                push(o, m.span, &m.value, Role::Model, "");
            }
        }
        StatementKind::PowerPlot { plan, .. } => push(o, plan.span, &plan.value, Role::Plan, ""),
        StatementKind::Require(gate) => match gate {
            Gate::EqualSlopes {
                model,
                factor,
                covariate,
                ..
            } => {
                push(o, model.span, &model.value, Role::Model, "");
                push(
                    o,
                    factor.span,
                    &factor.value,
                    Role::ModelFactor,
                    &model.value,
                );
                if let Some(c) = covariate {
                    push(o, c.span, &c.value, Role::ModelCovariate, &model.value);
                }
            }
            Gate::Normality { model, .. } => push(o, model.span, &model.value, Role::Model, ""),
            Gate::RowsPerLevel { factor, .. } => {
                push(o, factor.span, &factor.value, Role::Column, "")
            }
            Gate::Balance {
                covariate,
                factor,
                model: None,
                ..
            } => {
                push(o, covariate.span, &covariate.value, Role::Column, "");
                push(o, factor.span, &factor.value, Role::Column, "");
            }
            Gate::Balance {
                covariate,
                factor,
                model: Some(model),
                ..
            } => {
                push(
                    o,
                    covariate.span,
                    &covariate.value,
                    Role::ModelCovariate,
                    &model.value,
                );
                push(
                    o,
                    factor.span,
                    &factor.value,
                    Role::ModelFactor,
                    &model.value,
                );
                push(o, model.span, &model.value, Role::Model, "");
            }
            // A kind added to the language later: no named parts here yet.
            #[allow(unreachable_patterns)]
            _ => {}
        },
        StatementKind::Report(request) => match request {
            ReportRequest::Term { model, .. } => push(o, model.span, &model.value, Role::Model, ""),
            ReportRequest::Difference {
                model,
                factor,
                first,
                second,
                ..
            } => {
                push(o, model.span, &model.value, Role::Model, "");
                push(
                    o,
                    factor.span,
                    &factor.value,
                    Role::ModelFactor,
                    &model.value,
                );
                push_levels(o, model, factor, [first, second]);
            }
            // A kind added to the language later: no named parts here yet.
            #[allow(unreachable_patterns)]
            _ => {}
        },
        StatementKind::Missing { .. } | StatementKind::Show { name: None } => {}
        _ => {}
    }
    out
}

/// The columns an expression of `compute` reads.
fn expr_uses(e: &Expr, o: &mut Vec<NameUse>) {
    match &e.kind {
        ExprKind::Column(c) => push(o, e.span, c, Role::Column, ""),
        ExprKind::Aggregate(_, c) => push(o, c.span, &c.value, Role::Column, ""),
        ExprKind::Number(_) => {}
        ExprKind::Negate(x) | ExprKind::Call(_, x) => expr_uses(x, o),
        ExprKind::Binary(_, a, b) => {
            expr_uses(a, o);
            expr_uses(b, o);
        }
    }
}

fn condition_uses(c: &Condition, o: &mut Vec<NameUse>) {
    match c {
        Condition::Compare { column, value, .. } => {
            push(o, column.span, &column.value, Role::Column, "");
            push(
                o,
                value.span,
                value.value.as_text(),
                Role::Level,
                &column.value,
            );
        }
        Condition::In { column, values } => {
            push(o, column.span, &column.value, Role::Column, "");
            for v in values {
                push(o, v.span, v.value.as_text(), Role::Level, &column.value);
            }
        }
        Condition::Not(inner) => condition_uses(inner, o),
        Condition::And(parts) | Condition::Or(parts) => {
            for p in parts {
                condition_uses(p, o);
            }
        }
    }
}

fn table_uses(request: &TableRequest, o: &mut Vec<NameUse>) {
    let model_span =
        |o: &mut Vec<NameUse>, m: &Spanned<String>| push(o, m.span, &m.value, Role::Model, "");
    match request {
        TableRequest::Summary { column, by } => {
            push(o, column.span, &column.value, Role::Column, "");
            if let Some(b) = by {
                push(o, b.span, &b.value, Role::Column, "");
            }
        }
        TableRequest::Fit { model }
        | TableRequest::Coefficients { model, .. }
        | TableRequest::Anova { model, .. } => model_span(o, model),
        TableRequest::Compare { first, second } => {
            model_span(o, first);
            model_span(o, second);
        }
        TableRequest::Means {
            model,
            factor,
            at,
            by: second,
            ..
        }
        | TableRequest::Differences {
            model,
            factor,
            at,
            within: second,
            ..
        } => {
            model_span(o, model);
            if let Some(b) = second {
                push(o, b.span, &b.value, Role::ModelFactor, &model.value);
            }
            factor_and_settings(o, model, factor, at);
        }
        TableRequest::Contrast {
            model, factor, at, ..
        } => {
            model_span(o, model);
            factor_and_settings(o, model, factor, at);
        }
        TableRequest::Slopes {
            model,
            covariate,
            factor,
            ..
        } => {
            model_span(o, model);
            if let Some(c) = covariate {
                push(o, c.span, &c.value, Role::ModelCovariate, &model.value);
            }
            push(
                o,
                factor.span,
                &factor.value,
                Role::ModelFactor,
                &model.value,
            );
        }
        TableRequest::Regions {
            model,
            covariate,
            factor,
            between,
            ..
        } => {
            model_span(o, model);
            push(
                o,
                covariate.span,
                &covariate.value,
                Role::ModelCovariate,
                &model.value,
            );
            push(
                o,
                factor.span,
                &factor.value,
                Role::ModelFactor,
                &model.value,
            );
            if let Some((a, b)) = between {
                push_levels(o, model, factor, [a, b]);
            }
        }
        // A table added to the language later: no named parts here yet.
        #[allow(unreachable_patterns)]
        _ => {}
    }
}

/// The factor of a table about `model`'s adjusted means, and the covariates its `at` sets.
fn factor_and_settings(
    o: &mut Vec<NameUse>,
    model: &Spanned<String>,
    factor: &Spanned<String>,
    at: &[Setting],
) {
    push(
        o,
        factor.span,
        &factor.value,
        Role::ModelFactor,
        &model.value,
    );
    for s in at {
        push(
            o,
            s.column.span,
            &s.column.value,
            Role::ModelCovariate,
            &model.value,
        );
    }
}

/// The JSON kind of the tables a statement computes, with their subject (the model, the
/// summarised column, or the plan), as live references name them. A table statement's kind is its second
/// word (`table means ...` computes `means`), so a table added to the grammar is known here.
pub fn tables_of(stmt: &Statement) -> Vec<(String, String)> {
    match &stmt.kind {
        StatementKind::Table(request) => {
            let Some(word) = stmt.text.split_whitespace().nth(1) else {
                return Vec::new();
            };
            let subject = match request {
                TableRequest::Summary { column, .. } => column.value.clone(),
                other => other.model_name().to_string(),
            };
            // Cell means of two factors are a kind of their own.
            let word = match request {
                TableRequest::Means { by: Some(_), .. } => "cell-means",
                _ => word,
            };
            let mut out = vec![(word.to_string(), subject.clone())];
            if word == "slopes" {
                out.push(("slopes-equality".to_string(), subject));
            }
            out
        }
        StatementKind::Check { model, .. } => vec![
            ("check".to_string(), model.value.clone()),
            ("influence".to_string(), model.value.clone()),
        ],
        StatementKind::Plan(decl) => vec![("plan".to_string(), decl.name.value.clone())],
        _ => Vec::new(),
    }
}
