//! Handlers of `model` and of the tables computed from fitted models.

use std::sync::Arc;

use super::data_statements::{column_index, numeric_values, quote_name};
use super::{ModelEntry, Outcome, Session};
use crate::data::Values;
use crate::diagnostic::Diagnostic;
use crate::lang::{
    AdjustMethod, ModelDecl, Setting, Span, Spanned, SsKind, TableRequest, TransformDecl,
};
use crate::model::{self, Adjust, ModelSpec, Part, SsType, TermSpec, Transform, Var};
use crate::report::markdown::code;
use crate::report::{Cell, Column as Col, Format, Item, Table};

/// Confidence level when a statement gives none.
const DEFAULT_LEVEL: f64 = 0.95;
/// Significance level of regions of significance when none is given.
const DEFAULT_ALPHA: f64 = 0.05;

impl Session<'_> {
    pub(super) fn model(&mut self, decl: &ModelDecl, span: Span) -> Outcome {
        let set = self.current(span)?;
        let si = self.current.unwrap_or(0);
        let ridx = column_index(set, &decl.response)?;
        let plain = numeric_values(set, ridx, &decl.response)?;
        // A transformed response (`log(y)`) is fitted on its scale; long cells (e.g.
        // 1000000000000.4) come with exact residuals about an offset.
        let transformed = super::derived::transformed_name(decl.response_transform, &decl.response.value);
        let (response, response_offset) = match (&transformed, set.columns.get(ridx).and_then(|c| c.exact.as_deref())) {
            (Some(_), _) => (
                Arc::new(super::derived::transformed_response(set, decl.response_transform, &decl.response)?),
                0.0,
            ),
            (None, Some(e)) => (self.shared_residuals(si, ridx, &e.residuals), e.offset),
            (None, None) => (Arc::clone(plain), 0.0),
        };
        let response_name = transformed
            .as_ref()
            .map_or_else(|| decl.response.value.clone(), |(n, _)| n.clone());
        let mut vars: Vec<Var> = Vec::new();
        let mut var_names: Vec<String> = Vec::new();
        let mut terms = Vec::new();
        for term in &decl.terms {
            let mut parts = Vec::new();
            for part in &term.parts {
                let ci = column_index(set, &part.column)?;
                let col = &set.columns[ci];
                let var = match var_names.iter().position(|n| *n == col.name) {
                    Some(v) => v,
                    None => {
                        let v = match &col.values {
                            Values::Numeric(x) => Var::Numeric {
                                name: col.name.clone(),
                                values: Arc::clone(x),
                            },
                            Values::Factor(f) => Var::Factor {
                                name: col.name.clone(),
                                codes: Arc::clone(&f.codes),
                                levels: f.levels.clone(),
                            },
                            Values::Text(_) => {
                                return Err(numeric_values(set, ci, &part.column).err().unwrap_or_else(|| {
                                    Diagnostic::new(part.column.span, "this column is text")
                                })
                                .help(format!(
                                    "declare it a factor with `factor {}` if it names groups, or fix its values if it should be numeric",
                                    quote_name(&col.name)
                                )))
                            }
                        };
                        vars.push(v);
                        var_names.push(col.name.clone());
                        vars.len() - 1
                    }
                };
                let is_factor = matches!(vars[var], Var::Factor { .. });
                if is_factor && part.transform != TransformDecl::None {
                    return Err(Diagnostic::new(
                        part.span,
                        format!(
                            "`{}` is a factor; it cannot be transformed",
                            part.column.value
                        ),
                    )
                    .label("transform of a factor"));
                }
                parts.push(Part {
                    var,
                    transform: match part.transform {
                        TransformDecl::None => Transform::Identity,
                        TransformDecl::Power(p) => Transform::Power(p),
                        TransformDecl::Log => Transform::Log,
                        TransformDecl::Sqrt => Transform::Sqrt,
                    },
                });
            }
            terms.push(TermSpec { parts });
        }
        let spec = ModelSpec {
            response: Var::Numeric {
                name: response_name.clone(),
                values: response,
            },
            vars,
            terms,
            intercept: decl.intercept,
            row_numbers: set.row_numbers.clone(),
            response_offset,
        };
        let term_span =
            |i: Option<usize>| i.and_then(|i| decl.terms.get(i)).map_or(span, |t| t.span);
        let fit = model::fit_owned(spec).map_err(|e| {
            Diagnostic::new(term_span(e.term()), e.to_string()).label("in this model")
        })?;
        let s = fit.summary();
        let mut items = vec![Item::Text(format!(
            "Model {}: {} on {}{}, fitted to {} rows{}.",
            code(&decl.name.value),
            code(&response_name),
            fit.term_names()
                .iter()
                .map(|t| code(t))
                .collect::<Vec<_>>()
                .join(" + "),
            if decl.intercept {
                ""
            } else {
                " (without intercept)"
            },
            s.n,
            match s.dropped_missing {
                0 => String::new(),
                1 => " (1 row with a missing value left out)".to_string(),
                k => format!(" ({k} rows with a missing value left out)"),
            }
        ))];
        // Rows left out are told in the sentence above, not as a warning.
        for w in fit
            .warnings()
            .iter()
            .filter(|w| !matches!(w, model::ModelWarning::RowsDropped { .. }))
        {
            items.push(Item::Warning(sentence(&w.to_string())));
        }
        let data_set = set.name.clone();
        if let Some((_, scale)) = &transformed {
            items.push(Item::Text(format!(
                "Its response is {}: its estimates, means, differences, residuals and figures are on the {scale} scale.",
                code(&response_name)
            )));
        }
        let entry = ModelEntry {
            name: decl.name.value.clone(),
            data_set,
            scale: transformed.map(|(_, s)| s),
            rows_are: set.rows_are.clone(),
            labels: set.label.as_deref().and_then(|l| set.column(l)).cloned(),
            fit,
        };
        match self.models.iter().position(|m| m.name == entry.name) {
            Some(i) => {
                items.push(Item::Warning(format!(
                    "This replaces the earlier model {}; tables from here on use the new one.",
                    code(&entry.name)
                )));
                self.models[i] = entry;
            }
            None => self.models.push(entry),
        }
        Ok(items)
    }

    pub(super) fn model_table(&mut self, request: &TableRequest) -> Outcome {
        let fail = |s: Span| {
            move |e: model::ModelError| {
                Diagnostic::new(s, e.to_string()).label("cannot compute this")
            }
        };
        match request {
            TableRequest::Summary { .. } => Ok(Vec::new()),
            TableRequest::Fit { model } => {
                let m = self.model_entry(model)?;
                Ok(vec![Item::Table(fit_table(m))])
            }
            TableRequest::Coefficients { model, level } => {
                let m = self.model_entry(model)?;
                let level = confidence(level.as_ref())?;
                let rows = m.fit.coefficients(level);
                let mut t = Table::new(
                    "coefficients",
                    format!(
                        "Coefficients of model {} ({}% confidence limits)",
                        code(&m.name),
                        pct(level)
                    ),
                    vec![
                        Col::new("term", "term", Format::Text),
                        Col::new("estimate", "estimate", Format::Digits(4)),
                        Col::new("se", "SE", Format::Digits(3)),
                        Col::new("t", "t", Format::Statistic),
                        Col::new("p", "p", Format::P),
                        Col::new("lower", "lower", Format::Digits(4)),
                        Col::new("upper", "upper", Format::Digits(4)),
                    ],
                );
                for c in rows {
                    t.push(vec![
                        c.name.into(),
                        c.estimate.into(),
                        c.se.into(),
                        c.t.into(),
                        c.p.into(),
                        c.lower.into(),
                        c.upper.into(),
                    ]);
                }
                t.notes.push("A factor's coefficients compare each level with the reference level (the first).".into());
                if m.fit.is_exact() {
                    t.notes.push("The model fits the data exactly: the standard errors are 0 and t and p are undefined.".into());
                }
                let loose = m.fit.coefficient_digits();
                if !loose.is_empty() {
                    let worst = loose.iter().map(|(_, d)| *d).fold(f64::INFINITY, f64::min);
                    t.notes.push(format!(
                        "These are the coefficients of the model as written, recovered from a fit in centred covariates. Because a covariate lies far from 0 compared with its spread, {} {} determined by the data to only about {} significant digits; the sums of squares, tests, fitted values and adjusted means come from the centred fit and keep their full accuracy.",
                        loose.iter().map(|(n, _)| code(n)).collect::<Vec<_>>().join(", "),
                        if loose.len() == 1 { "is" } else { "are" },
                        worst.floor().max(0.0)
                    ));
                }
                Ok(vec![Item::Table(t)])
            }
            TableRequest::Anova { model, kind } => {
                let m = self.model_entry(model)?;
                let a = m.fit.anova(ss_type(*kind)).map_err(fail(model.span))?;
                let what = match kind {
                    SsKind::Sequential => "Type I (sequential, in the order written)",
                    SsKind::Partial => "Type II (each term after all terms that do not contain it)",
                    SsKind::Marginal => "Type III (each term after all others, sum-to-zero coding)",
                };
                let mut t = Table::new(
                    "anova",
                    format!(
                        "Analysis of variance of model {}: {what} sums of squares",
                        code(&m.name)
                    ),
                    vec![
                        Col::new("term", "term", Format::Text),
                        Col::new("df", "df", Format::Count),
                        Col::new("ss", "sum of squares", Format::Digits(4)),
                        Col::new("ms", "mean square", Format::Digits(4)),
                        Col::new("f", "F", Format::Statistic),
                        Col::new("p", "p", Format::P),
                        Col::new("partial_eta_sq", "partial eta squared", Format::Digits(2)),
                    ],
                );
                for r in &a.rows {
                    t.push(vec![
                        r.term.clone().into(),
                        r.df.into(),
                        r.ss.into(),
                        r.ms.into(),
                        r.f.into(),
                        r.p.into(),
                        r.partial_eta_sq.into(),
                    ]);
                }
                t.push(vec![
                    "residual".into(),
                    a.residual_df.into(),
                    a.residual_ss.into(),
                    (a.residual_ss / a.residual_df as f64).into(),
                    Cell::Missing,
                    Cell::Missing,
                    Cell::Missing,
                ]);
                t.push(vec![
                    "total".into(),
                    a.total_df.into(),
                    a.total_ss.into(),
                    Cell::Missing,
                    Cell::Missing,
                    Cell::Missing,
                    Cell::Missing,
                ]);
                for n in &a.notes {
                    t.notes.push(sentence(&n.to_string()));
                }
                Ok(vec![Item::Table(t)])
            }
            TableRequest::Compare { first, second } => {
                let a = self.model_entry(first)?;
                let b = self.model_entry(second)?;
                let c = model::compare(&a.fit, &b.fit).map_err(fail(Span {
                    start: first.span.start,
                    end: second.span.end,
                }))?;
                // The smaller model comes first, whichever order they were named in.
                let (a, b) = if c.swapped { (b, a) } else { (a, b) };
                let mut t = Table::new(
                    "compare",
                    format!(
                        "Comparison of nested models {} and {} (extra sum of squares F test)",
                        code(&a.name),
                        code(&b.name)
                    ),
                    vec![
                        Col::new("model", "model", Format::Text),
                        Col::new("df_residual", "residual df", Format::Count),
                        Col::new("rss", "residual SS", Format::Digits(4)),
                        Col::new("df", "df", Format::Count),
                        Col::new("ss", "extra SS", Format::Digits(4)),
                        Col::new("f", "F", Format::Statistic),
                        Col::new("p", "p", Format::P),
                    ],
                );
                t.push(vec![
                    a.name.as_str().into(),
                    c.small_df_residual.into(),
                    c.small_rss.into(),
                    Cell::Missing,
                    Cell::Missing,
                    Cell::Missing,
                    Cell::Missing,
                ]);
                t.push(vec![
                    b.name.as_str().into(),
                    c.big_df_residual.into(),
                    c.big_rss.into(),
                    c.df.into(),
                    c.ss.into(),
                    c.f.into(),
                    c.p.into(),
                ]);
                Ok(vec![Item::Table(t)])
            }
            TableRequest::Means {
                model,
                factor,
                at,
                level,
            } => {
                let m = self.model_entry(model)?;
                let level = confidence(level.as_ref())?;
                let at = settings(at);
                let rows = m
                    .fit
                    .means(&factor.value, &at, level)
                    .map_err(fail(factor.span))?;
                let mut t = Table::new(
                    "means",
                    format!(
                        "Adjusted means of {} in model {}{} ({}% confidence limits)",
                        code(&factor.value),
                        code(&m.name),
                        at_text(&m.fit, &at),
                        pct(level)
                    ),
                    vec![
                        Col::new("level", "level", Format::Text),
                        Col::new("mean", "adjusted mean", Format::Digits(4)),
                        Col::new("se", "SE", Format::Digits(3)),
                        Col::new("df", "df", Format::Count),
                        Col::new("lower", "lower", Format::Digits(4)),
                        Col::new("upper", "upper", Format::Digits(4)),
                    ],
                );
                let mut not_estimable: Vec<String> = Vec::new();
                for r in rows {
                    if let Some(why) = &r.not_estimable {
                        not_estimable.push(format!(
                            "{}: {}",
                            code(&r.level),
                            crate::report::markdown::escape(why)
                        ));
                    }
                    t.push(vec![
                        r.level.into(),
                        r.mean.into(),
                        r.se.into(),
                        r.df.into(),
                        r.lower.into(),
                        r.upper.into(),
                    ]);
                }
                if m.fit.has_other_factors(&factor.value) {
                    t.notes.push(
                        "Averaged over the levels of the other factors with equal weights.".into(),
                    );
                }
                if !not_estimable.is_empty() {
                    t.notes.push(format!(
                        "Not estimable from this design, shown as —: {}.",
                        not_estimable.join("; ")
                    ));
                }
                Ok(vec![Item::Table(t)])
            }
            TableRequest::Pairs {
                model,
                factor,
                at,
                adjust,
                level,
            } => {
                let m = self.model_entry(model)?;
                let level = confidence(level.as_ref())?;
                let at = settings(at);
                let method = adjustment(*adjust);
                let rows = m
                    .fit
                    .pairs(&factor.value, &at, method, level)
                    .map_err(fail(factor.span))?;
                let how = match adjust {
                    AdjustMethod::Tukey => "Tukey-Kramer adjusted p and simultaneous limits",
                    AdjustMethod::Holm => {
                        "Holm step-down adjusted p; no simultaneous limits exist for this method"
                    }
                    AdjustMethod::Bonferroni => "Bonferroni adjusted p and simultaneous limits",
                    AdjustMethod::Sidak => "Sidak adjusted p and simultaneous limits",
                    AdjustMethod::None => "unadjusted p and limits, one comparison at a time",
                };
                let mut t = Table::new(
                    "pairs",
                    format!(
                        "Pairwise differences of adjusted means of {} in model {}{}: {how} ({}%)",
                        code(&factor.value),
                        code(&m.name),
                        at_text(&m.fit, &at),
                        pct(level)
                    ),
                    vec![
                        Col::new("first", "first", Format::Text),
                        Col::new("second", "second", Format::Text),
                        Col::new("estimate", "difference", Format::Digits(4)),
                        Col::new("se", "SE", Format::Digits(3)),
                        Col::new("t", "t", Format::Statistic),
                        Col::new("df", "df", Format::Count),
                        Col::new("p", "p", Format::P),
                        Col::new("lower", "lower", Format::Digits(4)),
                        Col::new("upper", "upper", Format::Digits(4)),
                    ],
                );
                t.level = Some(level);
                let mut not_estimable: Vec<String> = Vec::new();
                for r in rows {
                    if let Some(why) = &r.not_estimable {
                        not_estimable.push(format!(
                            "{} - {}: {}",
                            code(&r.first),
                            code(&r.second),
                            crate::report::markdown::escape(why)
                        ));
                    }
                    t.push(vec![
                        r.first.into(),
                        r.second.into(),
                        r.estimate.into(),
                        r.se.into(),
                        r.t.into(),
                        r.df.into(),
                        r.p.into(),
                        r.lower.into(),
                        r.upper.into(),
                    ]);
                }
                t.notes.push("difference = first - second.".into());
                if !not_estimable.is_empty() {
                    t.notes.push(format!(
                        "Not estimable from this design, shown as — and left out of the multiplicity adjustment: {}.",
                        not_estimable.join("; ")
                    ));
                }
                Ok(vec![Item::Table(t)])
            }
            TableRequest::Slopes {
                model,
                covariate,
                factor,
                level,
            } => {
                let m = self.model_entry(model)?;
                let known: Vec<&crate::model::Fit> = self.models.iter().map(|e| &e.fit).collect();
                let level = confidence(level.as_ref())?;
                let s = m
                    .fit
                    .slopes_among(
                        covariate.as_ref().map(|c| c.value.as_str()),
                        &factor.value,
                        level,
                        &known,
                    )
                    .map_err(fail(covariate.as_ref().map_or(factor.span, |c| c.span)))?;
                let mut t = Table::new(
                    "slopes",
                    format!(
                        "Slope of {} within each level of {} in model {} ({}% confidence limits)",
                        code(&s.covariate),
                        code(&factor.value),
                        code(&m.name),
                        pct(level)
                    ),
                    vec![
                        Col::new("level", "level", Format::Text),
                        Col::new("slope", "slope", Format::Digits(4)),
                        Col::new("se", "SE", Format::Digits(3)),
                        Col::new("t", "t", Format::Statistic),
                        Col::new("df", "df", Format::Count),
                        Col::new("p", "p", Format::P),
                        Col::new("lower", "lower", Format::Digits(4)),
                        Col::new("upper", "upper", Format::Digits(4)),
                    ],
                );
                for r in &s.rows {
                    t.push(vec![
                        r.level.clone().into(),
                        r.slope.into(),
                        r.se.into(),
                        r.t.into(),
                        r.df.into(),
                        r.p.into(),
                        r.lower.into(),
                        r.upper.into(),
                    ]);
                }
                if s.refitted {
                    t.notes.push(format!(
                        "Model {} has no {} by {} term; these slopes come from the same model with that term added.",
                        code(&m.name),
                        code(&factor.value),
                        code(&s.covariate)
                    ));
                }
                let mut eq = Table::new(
                    "slopes-equality",
                    format!("Test that the slopes of {} are equal across {} (homogeneity of regression slopes)", code(&s.covariate), code(&factor.value)),
                    vec![
                        Col::new("f", "F", Format::Statistic),
                        Col::new("df1", "df1", Format::Count),
                        Col::new("df2", "df2", Format::Count),
                        Col::new("p", "p", Format::P),
                    ],
                );
                eq.push(vec![
                    s.equality_f.into(),
                    s.df1.into(),
                    s.df2.into(),
                    s.equality_p.into(),
                ]);
                Ok(vec![Item::Table(t), Item::Table(eq)])
            }
            TableRequest::Contrast {
                model,
                factor,
                weights,
                at,
                level,
            } => {
                let m = self.model_entry(model)?;
                let level = confidence(level.as_ref())?;
                let at = settings(at);
                let c = m
                    .fit
                    .contrast(&factor.value, &weights.value, &at, level)
                    .map_err(fail(weights.span))?;
                let mut t = Table::new(
                    "contrast",
                    format!(
                        "Contrast of adjusted means of {} in model {} with weights {} ({}% confidence limits)",
                        code(&factor.value),
                        code(&m.name),
                        weights.value.iter().map(|w| format!("{w}")).collect::<Vec<_>>().join(", "),
                        pct(level)
                    ),
                    vec![
                        Col::new("estimate", "estimate", Format::Digits(4)),
                        Col::new("se", "SE", Format::Digits(3)),
                        Col::new("t", "t", Format::Statistic),
                        Col::new("df", "df", Format::Count),
                        Col::new("p", "p", Format::P),
                        Col::new("lower", "lower", Format::Digits(4)),
                        Col::new("upper", "upper", Format::Digits(4)),
                    ],
                );
                t.push(vec![
                    c.estimate.into(),
                    c.se.into(),
                    c.t.into(),
                    c.df.into(),
                    c.p.into(),
                    c.lower.into(),
                    c.upper.into(),
                ]);
                let mut items = vec![Item::Table(t)];
                if (weights.value.iter().sum::<f64>()).abs() > 1e-9 {
                    items.push(Item::Warning("The weights do not sum to zero, so this is not a contrast between levels but a weighted sum of adjusted means.".into()));
                }
                Ok(items)
            }
            TableRequest::Regions {
                model,
                covariate,
                factor,
                between,
                alpha,
            } => {
                let m = self.model_entry(model)?;
                let alpha = match alpha {
                    Some(a) if a.value > 0.0 && a.value < 1.0 => a.value,
                    Some(a) => {
                        return Err(Diagnostic::new(a.span, "alpha must lie between 0 and 1")
                            .label("not a probability"))
                    }
                    None => DEFAULT_ALPHA,
                };
                let pair = between
                    .as_ref()
                    .map(|(a, b)| (a.value.as_str(), b.value.as_str()));
                let rows = m
                    .fit
                    .regions(&covariate.value, &factor.value, pair, alpha)
                    .map_err(fail(covariate.span))?;
                let mut t = Table::new(
                    "regions",
                    format!(
                        "Regions of significance (Johnson-Neyman) of {} for {} in model {} at alpha = {alpha}",
                        code(&covariate.value),
                        code(&factor.value),
                        code(&m.name)
                    ),
                    vec![
                        Col::new("first", "first", Format::Text),
                        Col::new("second", "second", Format::Text),
                        Col::new("lower_bound", "lower bound", Format::Digits(4)),
                        Col::new("upper_bound", "upper bound", Format::Digits(4)),
                        Col::new("significant", "the levels differ", Format::Text),
                        Col::new("observed_min", "observed min", Format::Digits(4)),
                        Col::new("observed_max", "observed max", Format::Digits(4)),
                    ],
                );
                for r in rows {
                    t.push(vec![
                        r.first.into(),
                        r.second.into(),
                        r.lower_bound.into(),
                        r.upper_bound.into(),
                        r.description.into(),
                        r.observed_min.into(),
                        r.observed_max.into(),
                    ]);
                }
                Ok(vec![Item::Table(t)])
            }
        }
    }
}

/// The engine's sums of squares for the kind the statement names.
pub(super) fn ss_type(kind: SsKind) -> SsType {
    match kind {
        SsKind::Sequential => SsType::I,
        SsKind::Partial => SsType::II,
        SsKind::Marginal => SsType::III,
    }
}

/// The engine's adjustment for the one the statement names.
pub(super) fn adjustment(a: AdjustMethod) -> Adjust {
    match a {
        AdjustMethod::Tukey => Adjust::Tukey,
        AdjustMethod::Holm => Adjust::Holm,
        AdjustMethod::Bonferroni => Adjust::Bonferroni,
        AdjustMethod::Sidak => Adjust::Sidak,
        AdjustMethod::None => Adjust::None,
    }
}

fn fit_table(m: &ModelEntry) -> Table {
    let s = m.fit.summary();
    let mut t = Table::new(
        "fit",
        format!("Fit of model {}", code(&m.name)),
        vec![
            Col::new("n", "n", Format::Count),
            Col::new("df_model", "model df", Format::Count),
            Col::new("df_residual", "residual df", Format::Count),
            Col::new("sigma", "residual SD", Format::Digits(4)),
            Col::new("r_squared", "R squared", Format::Digits(3)),
            Col::new("adj_r_squared", "adjusted R squared", Format::Digits(3)),
            Col::new("f", "F", Format::Statistic),
            Col::new("p", "p", Format::P),
            Col::new("aic", "AIC", Format::Digits(5)),
            Col::new("bic", "BIC", Format::Digits(5)),
        ],
    );
    t.push(vec![
        s.n.into(),
        s.df_model.into(),
        s.df_residual.into(),
        s.sigma.into(),
        s.r_squared.into(),
        s.adj_r_squared.into(),
        s.f.into(),
        s.p.into(),
        s.aic.into(),
        s.bic.into(),
    ]);
    t.notes.push("AIC and BIC use the Gaussian maximum likelihood with the residual variance counted as a parameter.".into());
    t
}

/// A message of the model engine as a Markdown sentence: escaped, with a
/// capital letter and a full stop.
fn sentence(text: &str) -> String {
    let mut chars = text.trim().chars();
    let mut out: String = match chars.next() {
        Some(c) => c.to_uppercase().chain(chars).collect(),
        None => String::new(),
    };
    if !out.ends_with('.') {
        out.push('.');
    }
    crate::report::markdown::escape(&out)
}

pub(crate) fn confidence(level: Option<&Spanned<f64>>) -> Result<f64, Diagnostic> {
    match level {
        None => Ok(DEFAULT_LEVEL),
        Some(l) if l.value > 0.0 && l.value < 1.0 => Ok(l.value),
        Some(l) => Err(
            Diagnostic::new(l.span, "a confidence level lies between 0 and 1")
                .label("not a level")
                .help("write it as a proportion, e.g. `level 0.99`"),
        ),
    }
}

fn pct(level: f64) -> String {
    let p = level * 100.0;
    let s = format!("{p:.4}");
    s.trim_end_matches('0').trim_end_matches('.').to_string()
}

fn settings(at: &[Setting]) -> Vec<(String, f64)> {
    at.iter()
        .map(|s| (s.column.value.clone(), s.value))
        .collect()
}

fn at_text(fit: &model::Fit, at: &[(String, f64)]) -> String {
    let covs = fit.covariate_means();
    if covs.is_empty() {
        return String::new();
    }
    let parts: Vec<String> = covs
        .iter()
        .map(|(name, mean)| match at.iter().find(|(n, _)| n == name) {
            Some((_, v)) => format!("{} = {v}", code(name)),
            None => format!(
                "{} at its mean {}",
                code(name),
                crate::report::number::format_column(&[Some(*mean)], Format::Digits(4)).join("")
            ),
        })
        .collect();
    format!(", with {}", parts.join(", "))
}
