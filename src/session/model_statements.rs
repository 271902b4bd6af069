//! Handlers of `model` and of the tables computed from fitted models.

use std::sync::Arc;

use super::data_statements::{column_index, numeric_values, quote_name};
use super::{ModelEntry, Outcome, Session};
use crate::data::Values;
use crate::diagnostic::Diagnostic;
use crate::lang::{
    Correction, ModelDecl, Setting, Side, Span, Spanned, SsKind, TableRequest, TransformDecl,
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
        let plain = numeric_values(set, ridx, &decl.response).map_err(|d| {
            // A factor before `on`: the response and a term in each other's places, or an
            // outcome that is a category, which a linear model does not fit.
            let is_factor = matches!(
                set.columns.get(ridx).map(|c| &c.values),
                Some(Values::Factor(_))
            );
            if is_factor {
                d.help(
                    "the response (before `on`) is the measured outcome, a number per row; a factor that groups the rows goes among the terms after `on`; an outcome that is a category (yes/no, a grade) is not one a linear model fits: covey fits only numeric responses",
                )
            } else {
                d
            }
        })?;
        // A transformed response (`log(y)`) is fitted on its scale; long cells (e.g.
        // 1000000000000.4) come with exact residuals about an offset.
        let transformed =
            super::derived::transformed_name(decl.response_transform, &decl.response.value);
        let (response, response_offset) = match (
            &transformed,
            set.columns.get(ridx).and_then(|c| c.exact.as_deref()),
        ) {
            (Some(_), _) => (
                Arc::new(super::derived::transformed_response(
                    set,
                    decl.response_transform,
                    &decl.response,
                )?),
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
                            "{} is a factor; it cannot be transformed",
                            crate::report::markdown::code(&part.column.value)
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
        let weights = match &decl.weights {
            Some(w) => {
                let wi = column_index(set, w)?;
                let values = numeric_values(set, wi, w).map_err(|d| {
                    d.help("case weights are a numeric column of numbers 0 or more")
                })?;
                Some(Var::Numeric {
                    name: set.columns[wi].name.clone(),
                    values: Arc::clone(values),
                })
            }
            None => None,
        };
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
            weights,
        };
        let term_span =
            |i: Option<usize>| i.and_then(|i| decl.terms.get(i)).map_or(span, |t| t.span);
        let fit = model::fit_owned(spec).map_err(|e| {
            let at = match (&e, &decl.weights) {
                (model::ModelError::BadWeight { .. }, Some(w)) => w.span,
                _ => term_span(e.term()),
            };
            Diagnostic::new(at, e.to_string()).label("in this model")
        })?;
        let s = fit.summary();
        let weighting = match fit.weights_name() {
            Some(w) => format!(
                ", weighted by {} (weighted least squares){}",
                code(w),
                match s.dropped_zero_weight {
                    0 => String::new(),
                    1 => "; 1 row of weight 0 left out of the fit and of its degrees of freedom"
                        .to_string(),
                    k => format!(
                        "; {k} rows of weight 0 left out of the fit and of its degrees of freedom"
                    ),
                }
            ),
            None => String::new(),
        };
        let missing_what = if fit.is_weighted() {
            "a missing value or weight"
        } else {
            "a missing value"
        };
        let mut items = vec![Item::Text(format!(
            "Model {}: {} on {}{}{weighting}, fitted to {} rows{}.",
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
                1 => format!(" (1 row with {missing_what} left out)"),
                k => format!(" ({k} rows with {missing_what} left out)"),
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

    /// An error at the first of `names` (factors, or covariates as `role` says, that a
    /// statement asks model `m` about) that is a column of the model's data set but no
    /// variable of the model: the engine knows only the model's own variables, and "there is
    /// no variable" would be untrue of a column the user can see in the data. Every statement
    /// that names a factor or covariate of a model calls this before the engine. Names that
    /// are not columns either are left to the engine.
    pub(super) fn named_in_model<'n>(
        &self,
        m: &ModelEntry,
        role: Role,
        names: impl IntoIterator<Item = &'n Spanned<String>>,
    ) -> Result<(), Diagnostic> {
        let Some(set) = self.data_sets.iter().find(|d| d.name == m.data_set) else {
            return Ok(());
        };
        for name in names {
            if m.fit.spec.vars.iter().any(|v| v.name() == name.value) {
                continue;
            }
            let Some(column) = set.columns.iter().find(|c| c.name == name.value) else {
                continue;
            };
            let names = match role {
                Role::Factor => m.fit.other_factors(""),
                Role::Covariate => m
                    .fit
                    .covariate_means()
                    .into_iter()
                    .map(|(n, _)| n)
                    .collect(),
            };
            return Err(column_not_in_model(
                name.span,
                &name.value,
                &column.values,
                &m.name,
                role,
                &names,
            ));
        }
        Ok(())
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
            TableRequest::Coefficients {
                model,
                level,
                robust,
            } => {
                let m = self.model_entry(model)?;
                let level = confidence(level.as_ref())?;
                let fit = view(&m.fit, *robust, model.span)?;
                let rows = fit.coefficients(level);
                let mut t = Table::new(
                    "coefficients",
                    format!(
                        "Coefficients of model {} ({}% confidence limits{})",
                        code(&m.name),
                        pct(level),
                        robust_words(*robust)
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
                let (contrast, per_level) = m.fit.factor_coding();
                if !per_level.is_empty() {
                    let terms: Vec<String> = per_level.iter().map(|n| code(n)).collect();
                    t.notes.push(format!(
                        "{} {} a coefficient for every level, not a comparison with the reference level: each is that level's own value (its intercept, or its slope), since no earlier term holds what it would be compared with.",
                        terms.join(", "),
                        if terms.len() == 1 { "has" } else { "have" }
                    ));
                }
                if contrast {
                    t.notes.push(if per_level.is_empty() {
                        "A factor's coefficients compare each level with the reference level (the first).".into()
                    } else {
                        "The other factor coefficients compare each level with the reference level (the first).".into()
                    });
                }
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
            TableRequest::Anova {
                model,
                kind,
                robust,
            } => {
                let m = self.model_entry(model)?;
                let fit = view(&m.fit, *robust, model.span)?;
                let a = fit.anova(ss_type(*kind)).map_err(fail(model.span))?;
                let what = match kind {
                    SsKind::Sequential => "Type I (sequential, in the order written)",
                    SsKind::Partial => "Type II (each term after all terms that do not contain it)",
                    SsKind::Marginal => "Type III (each term after all others, sum-to-zero coding)",
                };
                let mut t = Table::new(
                    "anova",
                    if *robust {
                        format!(
                            "Robust tests of the terms of model {}: HC3 Wald F tests of the {what} hypotheses, with the residual df",
                            code(&m.name)
                        )
                    } else {
                        format!(
                            "Analysis of variance of model {}: {what} sums of squares",
                            code(&m.name)
                        )
                    },
                    vec![
                        Col::new("term", "term", Format::Text),
                        Col::new("df", "df", Format::Count),
                        Col::new("ss", "sum of squares", Format::Digits(4)),
                        Col::new("ms", "mean square", Format::Digits(4)),
                        Col::new("f", "F", Format::Statistic),
                        Col::new("p", "p", Format::P),
                        Col::new(
                            "partial_eta_sq",
                            "partial eta squared",
                            Format::Proportion(2),
                        ),
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
                if *robust {
                    t.notes.push("Each F is a Wald statistic divided by its df, from the HC3 covariance (MacKinnon and White 1985), which stays valid when the residual spread differs between rows; it uses no sums of squares, so their columns are empty on the term rows.".into());
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
                        "What model {} adds to model {} (nested models, F test of the extra sum of squares)",
                        code(&b.name),
                        code(&a.name)
                    ),
                    vec![
                        Col::new("smaller", "smaller", Format::Text),
                        Col::new("larger", "larger", Format::Text),
                        Col::new("terms_added", "terms added", Format::Text),
                        Col::new("n", "n", Format::Count),
                        Col::new("rss_smaller", "RSS smaller", Format::Digits(4)),
                        Col::new("rss_larger", "RSS larger", Format::Digits(4)),
                        Col::new("extra_ss", "extra SS", Format::Digits(4)),
                        Col::new("f", "F", Format::Statistic),
                        Col::new("df1", "df1", Format::Count),
                        Col::new("df2", "df2", Format::Count),
                        Col::new("p", "p", Format::P),
                    ],
                );
                t.push(vec![
                    a.name.as_str().into(),
                    b.name.as_str().into(),
                    match &c.added {
                        Some(terms) => terms.join(" + ").into(),
                        None => Cell::Missing,
                    },
                    c.n.into(),
                    c.small_rss.into(),
                    c.big_rss.into(),
                    c.ss.into(),
                    c.f.into(),
                    c.df.into(),
                    c.big_df_residual.into(),
                    c.p.into(),
                ]);
                t.notes.push(
                    "RSS is the residual sum of squares of each model; extra SS is what the larger model takes off it, and F = (extra SS / df1) / (RSS larger / df2), with df1 the number of columns the larger model adds and df2 its residual degrees of freedom.".into(),
                );
                if c.added.is_none() {
                    t.notes.push(format!(
                        "The terms of {} are not all among those of {} by name; the columns of {} lie in the space of the columns of {}, which makes the two nested.",
                        code(&a.name),
                        code(&b.name),
                        code(&a.name),
                        code(&b.name)
                    ));
                }
                Ok(vec![Item::Table(t)])
            }
            TableRequest::Means {
                model,
                factor,
                by,
                at,
                level,
                robust,
            } => {
                let m = self.model_entry(model)?;
                self.named_in_model(m, Role::Factor, std::iter::once(factor).chain(by))?;
                let level = confidence(level.as_ref())?;
                let at = settings(at);
                let fit = view(&m.fit, *robust, model.span)?;
                if let Some(by) = by {
                    return cell_means_table(m, &fit, factor, by, &at, level, *robust);
                }
                let rows = fit
                    .means(&factor.value, &at, level)
                    .map_err(fail(factor.span))?;
                let mut t = Table::new(
                    "means",
                    format!(
                        "Adjusted means of {} in model {}{} ({}% confidence limits{})",
                        code(&factor.value),
                        code(&m.name),
                        at_text(&m.fit, &at),
                        pct(level),
                        robust_words(*robust)
                    ),
                    [Col::new("level", "level", Format::Text)]
                        .into_iter()
                        .chain(adjusted_mean_columns())
                        .collect(),
                );
                let mut not_estimable: Vec<String> = Vec::new();
                for r in rows {
                    if let Some(why) = &r.not_estimable {
                        not_estimable.push(format!(
                            "{}: {}",
                            code(&r.level),
                            crate::report::markdown::message(why)
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
                if let Some(n) = equal_weight_note(&m.fit, &[factor.value.as_str()], "these means")
                {
                    t.notes.push(n);
                }
                if !not_estimable.is_empty() {
                    t.notes.push(format!(
                        "Not estimable from this design, shown as —: {}.",
                        not_estimable.join("; ")
                    ));
                }
                Ok(vec![Item::Table(t)])
            }
            TableRequest::Differences {
                model,
                factor,
                within,
                at,
                correction,
                level,
                versus,
                robust,
            } => {
                let m = self.model_entry(model)?;
                self.named_in_model(m, Role::Factor, std::iter::once(factor).chain(within))?;
                let level = confidence(level.as_ref())?;
                let at = settings(at);
                let fit = view(&m.fit, *robust, model.span)?;
                let method = match (correction, versus) {
                    (None, None) => Correction::Tukey,
                    (None, Some(_)) => Correction::Dunnett,
                    (Some(c), None) if c.value == Correction::Dunnett => {
                        return Err(Diagnostic::new(
                            c.span,
                            "`correction dunnett` compares every level with a control; name the control with `versus`",
                        )
                        .label("no control named")
                        .help(format!(
                            "write `table differences {} for {} versus LEVEL`",
                            m.name, factor.value
                        )))
                    }
                    (Some(c), Some(_)) if c.value == Correction::Tukey => {
                        return Err(Diagnostic::new(
                            c.span,
                            "Tukey-Kramer's correction is for all pairs of levels; against a control use `dunnett` (the default with `versus`), or holm, bonferroni, sidak or none",
                        )
                        .label("not for comparisons with a control"))
                    }
                    (Some(c), _) => c.value,
                };
                let side = versus.as_ref().map_or(Side::Both, |v| v.side);
                let rows = fit
                    .differences(
                        &factor.value,
                        within.as_ref().map(|w| w.value.as_str()),
                        &at,
                        adjustment(method),
                        versus
                            .as_ref()
                            .map(|v| (v.control.value.as_str(), engine_side(v.side))),
                        level,
                    )
                    .map_err(|e| {
                        let at = match (&e, versus, within) {
                            (model::ModelError::UnknownControl { .. }, Some(v), _) => {
                                v.control.span
                            }
                            (model::ModelError::WithinSameFactor { .. }, _, Some(w)) => w.span,
                            (_, _, Some(w)) if factor_named(&e) == Some(w.value.as_str()) => w.span,
                            _ => factor.span,
                        };
                        Diagnostic::new(at, e.to_string()).label("cannot compute this")
                    })?;
                let how = match method {
                    Correction::Tukey => {
                        "Tukey-Kramer adjusted p and simultaneous limits".to_string()
                    }
                    Correction::Holm => {
                        "Holm step-down adjusted p; no simultaneous limits exist for this method"
                            .to_string()
                    }
                    Correction::Bonferroni => {
                        "Bonferroni adjusted p and simultaneous limits".to_string()
                    }
                    Correction::Sidak => "Sidak adjusted p and simultaneous limits".to_string(),
                    Correction::Dunnett => "Dunnett adjusted p and simultaneous limits".to_string(),
                    Correction::None => {
                        "unadjusted p and limits, one comparison at a time".to_string()
                    }
                };
                let sided = match side {
                    Side::Both => "",
                    Side::Above => ", one-sided: above the control",
                    Side::Below => ", one-sided: below the control",
                };
                let subject = match versus {
                    Some(v) => format!(
                        "Differences of adjusted means of {} from the control {}",
                        code(&factor.value),
                        code(&v.control.value)
                    ),
                    None => format!("Differences of adjusted means of {}", code(&factor.value)),
                };
                let inside = match within {
                    Some(w) => format!(" within each level of {}", code(&w.value)),
                    None => String::new(),
                };
                let mut cols = Vec::new();
                if let Some(w) = within {
                    cols.push(Col::new("within", &w.value, Format::Text));
                }
                cols.extend([
                    Col::new("first", "first", Format::Text),
                    Col::new("second", "second", Format::Text),
                    Col::new("estimate", "difference", Format::Digits(4)),
                    Col::new("se", "SE", Format::Digits(3)),
                    Col::new("t", "t", Format::Statistic),
                    Col::new("df", "df", Format::Count),
                    Col::new("p", "p", Format::P),
                    Col::new("lower", "lower", Format::Digits(4)),
                    Col::new("upper", "upper", Format::Digits(4)),
                ]);
                let mut t = Table::new(
                    "differences",
                    format!(
                        "{subject}{inside} in model {}{}: {how}{sided} ({}%{})",
                        code(&m.name),
                        at_text(&m.fit, &at),
                        pct(level),
                        robust_words(*robust)
                    ),
                    cols,
                );
                t.level = Some(level);
                let mut not_estimable: Vec<String> = Vec::new();
                let mut worst_error: f64 = 0.0;
                let mut unbounded = false;
                for r in rows {
                    if let Some(why) = &r.not_estimable {
                        not_estimable.push(format!(
                            "{}{} - {}: {}",
                            r.within
                                .as_ref()
                                .map_or(String::new(), |w| format!("in {}, ", code(w))),
                            code(&r.first),
                            code(&r.second),
                            crate::report::markdown::message(why)
                        ));
                    }
                    worst_error = worst_error.max(r.p_error);
                    unbounded |= r.not_estimable.is_none()
                        && side != Side::Both
                        && method != Correction::Holm
                        && (r.lower.is_none() || r.upper.is_none());
                    let mut row: Vec<Cell> = Vec::new();
                    if let Some(w) = r.within {
                        row.push(w.into());
                    }
                    row.extend([
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
                    t.push(row);
                }
                t.notes.push(match versus {
                    Some(v) => format!(
                        "Each row is one level's adjusted mean minus that of the control, {}.",
                        code(&v.control.value)
                    ),
                    None => {
                        "Each row is the adjusted mean of the first level minus that of the second."
                            .into()
                    }
                });
                let mut held: Vec<&str> = vec![factor.value.as_str()];
                if let Some(w) = within {
                    held.push(w.value.as_str());
                }
                if let Some(n) = equal_weight_note(&m.fit, &held, "the means compared") {
                    t.notes.push(n);
                }
                if let Some(w) = within {
                    t.notes.push(format!(
                        "The levels of {} are compared inside each level of {}, and the correction counts only the comparisons made inside that level.",
                        code(&factor.value),
                        code(&w.value)
                    ));
                }
                if method == Correction::Dunnett {
                    let fmt = |x: f64| {
                        crate::report::number::format_column(&[Some(x)], Format::Digits(1)).join("")
                    };
                    let accuracy = if worst_error <= DUNNETT_P_BOUND {
                        format!(
                            "every p is within {} of its exact value (largest error estimate here: {})",
                            fmt(DUNNETT_P_BOUND),
                            fmt(worst_error)
                        )
                    } else {
                        format!(
                            "the integration stopped at its largest rule with an error estimate of {} on some p, above the {} it aims at",
                            fmt(worst_error),
                            fmt(DUNNETT_P_BOUND)
                        )
                    };
                    t.notes.push(format!(
                        "Dunnett's p and limits come from the joint (multivariate t) distribution of the comparisons' t statistics, with the correlations this design gives them, integrated by Genz and Bretz's randomised lattice method with a fixed seed; {accuracy}."
                    ));
                }
                if unbounded {
                    t.notes.push(match side {
                        Side::Above => "One-sided: each limit is a lower bound; the upper side is unbounded (shown as —).".to_string(),
                        _ => "One-sided: each limit is an upper bound; the lower side is unbounded (shown as —).".to_string(),
                    });
                }
                if !not_estimable.is_empty() {
                    t.notes.push(format!(
                        "Not estimable from this design, shown as — and left out of the correction: {}.",
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
                self.named_in_model(m, Role::Factor, [factor])?;
                self.named_in_model(m, Role::Covariate, covariate)?;
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
                    .map_err(|e| {
                        // At the words the error is about: `for F` when F is not a factor.
                        let about_factor = factor_named(&e) == Some(factor.value.as_str());
                        let at = match covariate {
                            Some(c) if !about_factor => c.span,
                            _ => factor.span,
                        };
                        let d = fail(at)(e);
                        // `of arm for baseline`: the two names in each other's places.
                        match covariate {
                            Some(c)
                                if about_factor
                                    && m.fit.other_factors("").contains(&c.value) =>
                            {
                                d.help(format!(
                                    "`of` names the covariate and `for` the factor: write `table slopes {} of {} for {}`",
                                    m.name, factor.value, c.value
                                ))
                            }
                            _ => d,
                        }
                    })?;
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
                let missing: Vec<String> = s
                    .rows
                    .iter()
                    .filter_map(|r| {
                        r.not_estimable
                            .as_ref()
                            .map(|why| format!("{}: {why}", code(&r.level)))
                    })
                    .collect();
                if !missing.is_empty() {
                    t.notes.push(format!(
                        "Not estimable from this design, shown as — and left out of the test that the slopes are equal: {}.",
                        missing.join("; ")
                    ));
                }
                if s.refitted {
                    t.notes.push(format!(
                        "Model {} has no {} by {} term; these slopes come from the same model with that term added.",
                        code(&m.name),
                        code(&factor.value),
                        code(&s.covariate)
                    ));
                }
                if !s.depends_on.is_empty() {
                    let means: Vec<(String, f64)> = m.fit.covariate_means();
                    let ranges = m.fit.covariate_ranges();
                    let names: Vec<String> = s.depends_on.iter().map(|(n, _)| code(n)).collect();
                    let how: Vec<String> = s
                        .depends_on
                        .iter()
                        .map(|(n, factor)| {
                            let at = means.iter().zip(&ranges).find(|((c, _), _)| c == n);
                            match (factor, at) {
                                (false, Some(((_, mean), (lo, hi)))) => format!(
                                    "{} at its mean {}",
                                    code(n),
                                    crate::report::number::in_units(*mean, &[*lo, *hi], 4)
                                ),
                                _ => format!("each level of {} counted equally", code(n)),
                            }
                        })
                        .collect();
                    t.notes.push(format!(
                        "The slope of {} depends on {}, which {} a term with it: each slope is taken with {}, and the test compares these slopes.",
                        code(&s.covariate),
                        names.join(" and "),
                        if names.len() == 1 { "shares" } else { "share" },
                        how.join(" and ")
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
                robust,
            } => {
                let m = self.model_entry(model)?;
                self.named_in_model(m, Role::Factor, [factor])?;
                let level = confidence(level.as_ref())?;
                let at = settings(at);
                let fit = view(&m.fit, *robust, model.span)?;
                // An error about the factor at its words (a covariate named as the factor was
                // marked at the weights); any other at the weights.
                let c = fit
                    .contrast(&factor.value, &weights.value, &at, level)
                    .map_err(|e| {
                        let about_factor = factor_named(&e) == Some(factor.value.as_str());
                        fail(if about_factor {
                            factor.span
                        } else {
                            weights.span
                        })(e)
                    })?;
                let mut t = Table::new(
                    "contrast",
                    format!(
                        "Contrast of adjusted means of {} in model {} with weights {} ({}% confidence limits{})",
                        code(&factor.value),
                        code(&m.name),
                        weights.value.iter().map(|w| format!("{w}")).collect::<Vec<_>>().join(", "),
                        pct(level),
                        robust_words(*robust)
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
                self.named_in_model(m, Role::Factor, [factor])?;
                self.named_in_model(m, Role::Covariate, [covariate])?;
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
                    .map_err(|e| {
                        let about_factor = factor_named(&e) == Some(factor.value.as_str());
                        // A level of `between` that is not the factor's, at its words (it was
                        // marked at the covariate).
                        let level = match &e {
                            model::ModelError::UnknownLevel { level, .. } => between
                                .as_ref()
                                .and_then(|(a, b)| [a, b].into_iter().find(|x| x.value == *level)),
                            _ => None,
                        };
                        fail(match level {
                            Some(l) => l.span,
                            None if about_factor => factor.span,
                            None => covariate.span,
                        })(e)
                    })?;
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
                let not_estimable: Vec<String> = rows
                    .iter()
                    .filter_map(|r| match &r.kind {
                        model::RegionKind::NotEstimable(why) => {
                            Some(format!("{} - {}: {why}", code(&r.first), code(&r.second)))
                        }
                        _ => None,
                    })
                    .collect();
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
                if !not_estimable.is_empty() {
                    t.notes.push(format!(
                        "Not estimable from this design, its bounds shown as —: {}.",
                        not_estimable.join("; ")
                    ));
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

/// The engine's adjustment for the correction the statement names.
pub(super) fn adjustment(a: Correction) -> Adjust {
    match a {
        Correction::Tukey => Adjust::Tukey,
        Correction::Holm => Adjust::Holm,
        Correction::Bonferroni => Adjust::Bonferroni,
        Correction::Sidak => Adjust::Sidak,
        Correction::Dunnett => Adjust::Dunnett,
        Correction::None => Adjust::None,
    }
}

/// The engine's side of a comparison with a control.
fn engine_side(s: Side) -> model::Side {
    match s {
        Side::Both => model::Side::Both,
        Side::Above => model::Side::Above,
        Side::Below => model::Side::Below,
    }
}

/// The bound on the error of every Dunnett p that the tables state: the integration aims at
/// [`crate::stats::mvt::TARGET_ERROR`], ten times smaller.
const DUNNETT_P_BOUND: f64 = 1e-5;

/// The fit itself, or its robust (HC3) view.
fn view(
    fit: &model::Fit,
    robust: bool,
    span: Span,
) -> Result<std::borrow::Cow<'_, model::Fit>, Diagnostic> {
    if robust {
        fit.robust()
            .map(std::borrow::Cow::Owned)
            .map_err(|e| Diagnostic::new(span, e.to_string()).label("cannot compute this"))
    } else {
        Ok(std::borrow::Cow::Borrowed(fit))
    }
}

/// The factor an error of the engine is about, when it is about a factor (so that the
/// message can point at the words that named it).
pub(super) fn factor_named(e: &model::ModelError) -> Option<&str> {
    match e {
        model::ModelError::UnknownVariable { name }
        | model::ModelError::NotAFactor { name, .. } => Some(name),
        model::ModelError::FactorNotInModel { factor } => Some(factor),
        _ => None,
    }
}

/// What a caption adds for robust standard errors.
fn robust_words(robust: bool) -> &'static str {
    if robust {
        "; robust HC3 standard errors, t with the residual df"
    } else {
        ""
    }
}

/// The note that names the factors whose levels count equally in adjusted means, when the
/// model has factors besides those held at a level (`held`).
fn equal_weight_note(fit: &model::Fit, held: &[&str], what: &str) -> Option<String> {
    let others: Vec<String> = fit
        .other_factors("")
        .into_iter()
        .filter(|f| !held.contains(&f.as_str()))
        .collect();
    match others.as_slice() {
        [] => None,
        [one] => Some(format!(
            "Each level of {} counts equally in {what}, whatever its number of rows.",
            code(one)
        )),
        many => Some(format!(
            "Each level of {} counts equally in {what}, whatever its number of rows.",
            many.iter()
                .map(|f| code(f))
                .collect::<Vec<_>>()
                .join(" and of ")
        )),
    }
}

/// `table means M for A by B`: the adjusted mean of every cell of A and B.
fn cell_means_table(
    m: &ModelEntry,
    fit: &model::Fit,
    factor: &Spanned<String>,
    by: &Spanned<String>,
    at: &[(String, f64)],
    level: f64,
    robust: bool,
) -> Outcome {
    let rows = fit
        .cell_means(&factor.value, &by.value, at, level)
        .map_err(|e| {
            let at = if factor_named(&e) == Some(by.value.as_str()) {
                by.span
            } else {
                factor.span
            };
            Diagnostic::new(at, e.to_string()).label("cannot compute this")
        })?;
    let mut t = Table::new(
        "cell-means",
        format!(
            "Adjusted means of each combination of {} and {} in model {}{} ({}% confidence limits{})",
            code(&factor.value),
            code(&by.value),
            code(&m.name),
            at_text(&m.fit, at),
            pct(level),
            robust_words(robust)
        ),
        [
            Col::new("level", &factor.value, Format::Text),
            Col::new("by", &by.value, Format::Text),
            Col::new("rows", "rows", Format::Count),
        ]
        .into_iter()
        .chain(adjusted_mean_columns())
        .collect(),
    );
    let mut empty: Vec<String> = Vec::new();
    let mut not_estimable: Vec<String> = Vec::new();
    for r in rows {
        let cell = format!("{} × {}", code(&r.first), code(&r.second));
        match (&r.not_estimable, r.rows) {
            (Some(why), _) => {
                not_estimable.push(format!("{cell}: {}", crate::report::markdown::message(why)))
            }
            (None, 0) => empty.push(cell),
            _ => {}
        }
        t.push(vec![
            r.first.into(),
            r.second.into(),
            r.rows.into(),
            r.mean.into(),
            r.se.into(),
            r.df.into(),
            r.lower.into(),
            r.upper.into(),
        ]);
    }
    if let Some(n) = equal_weight_note(
        &m.fit,
        &[factor.value.as_str(), by.value.as_str()],
        "these means",
    ) {
        t.notes.push(n);
    }
    if !empty.is_empty() {
        t.notes.push(format!(
            "No rows in {}: the mean{} there come{} from the model alone, which assumes the effects of the two factors add up.",
            empty.join(", "),
            if empty.len() == 1 { "" } else { "s" },
            if empty.len() == 1 { "s" } else { "" }
        ));
    }
    if !not_estimable.is_empty() {
        t.notes.push(format!(
            "Not estimable from this design (a cell without rows in a model that lets the two factors interact), shown as —: {}.",
            not_estimable.join("; ")
        ));
    }
    Ok(vec![Item::Table(t)])
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
            Col::new("r_squared", "R squared", Format::Proportion(3)),
            Col::new("adj_r_squared", "adjusted R squared", Format::Proportion(3)),
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
    crate::report::markdown::message(&out)
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

/// The columns of an adjusted mean with its limits, after the columns that name it.
fn adjusted_mean_columns() -> [Col; 5] {
    [
        Col::new("mean", "adjusted mean", Format::Digits(4)),
        Col::new("se", "SE", Format::Digits(3)),
        Col::new("df", "df", Format::Count),
        Col::new("lower", "lower", Format::Digits(4)),
        Col::new("upper", "upper", Format::Digits(4)),
    ]
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
    let ranges = fit.covariate_ranges();
    let parts: Vec<String> = covs
        .iter()
        .zip(ranges)
        .map(
            |((name, mean), (lo, hi))| match at.iter().find(|(n, _)| n == name) {
                Some((_, v)) => format!("{} = {v}", code(name)),
                // At the resolution of the covariate's own values, as `table summary` shows it.
                None => format!(
                    "{} at its mean {}",
                    code(name),
                    crate::report::number::in_units(*mean, &[lo, hi], 4)
                ),
            },
        )
        .collect();
    format!(", with {}", parts.join(", "))
}

/// What a statement names in a model: a factor (`for F`, `by F`, `within F`) or a numeric
/// covariate (`of X`).
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub(crate) enum Role {
    /// A factor of the model.
    Factor,
    /// A numeric covariate of the model.
    Covariate,
}

/// The error for a statement that names, as a factor or covariate (`role`), a column `name`
/// of the data (holding `values`) that is no variable of model `model`, whose factors or
/// covariates (as `role` says) are `names` (shared with the language server).
pub(crate) fn column_not_in_model(
    span: Span,
    name: &str,
    values: &Values,
    model: &str,
    role: Role,
    names: &[String],
) -> Diagnostic {
    let what = match values {
        Values::Factor(_) => "a factor of the data",
        Values::Text(_) => "a text column of the data (not declared a factor)",
        Values::Numeric(_) => "a numeric column of the data",
    };
    let (one, many, none) = match role {
        Role::Factor => ("factor", "factors", "which has no factor"),
        Role::Covariate => ("covariate", "covariates", "which has no numeric covariate"),
    };
    let listed = match names {
        [] => none.to_string(),
        [only] => format!("whose only {one} is {}", code(only)),
        some => format!(
            "whose {many} are {}",
            some.iter().map(|f| code(f)).collect::<Vec<_>>().join(", ")
        ),
    };
    let d = Diagnostic::new(
        span,
        format!(
            "{} is {what} but not in model {}, {listed}",
            code(name),
            code(model)
        ),
    )
    .label("not in this model");
    match (role, values) {
        (Role::Factor, Values::Numeric(_)) => d,
        (Role::Factor, Values::Factor(_)) => d.help(format!(
            "add {} to the terms of model {} to compare its levels, or name one of its factors",
            code(name),
            code(model)
        )),
        (Role::Factor, Values::Text(_)) => d.help(format!(
            "declare it a factor (`factor {} levels ...`) and add it to the terms of model {}",
            quote_name(name),
            code(model)
        )),
        (Role::Covariate, Values::Numeric(_)) => d.help(format!(
            "add {} to the terms of model {} to see its slopes, or name one of its covariates",
            code(name),
            code(model)
        )),
        (Role::Covariate, _) => d.help(format!("name one of the {many} of model {}", code(model))),
    }
}
