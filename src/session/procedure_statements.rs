//! Handlers of the statements that make a document a procedure: `param`,
//! the gates of `require`, and the reporting sentences of `report`.

use std::sync::Arc;

use super::data_statements::{column_index, factor_column, numeric_values};
use super::model_statements::{factor_named, Role};
use super::{Outcome, Session};
use crate::diagnostic::Diagnostic;
use crate::lang::{Correction, Gate, Literal, ReportRequest, Spanned, SsKind};
use crate::model::{self, ModelSpec, Part, SsType, TermSpec, Transform, Var};
use crate::report::markdown::code;
use crate::report::number::p_value;
use crate::report::Item;

/// Significance level of a gate that gives none: the conventional 5%.
const DEFAULT_GATE_ALPHA: f64 = 0.05;

impl Session<'_> {
    pub(super) fn param(
        &mut self,
        name: &Spanned<String>,
        value: &Literal,
        default: &Literal,
    ) -> Outcome {
        let shown = |v: &Literal| match v {
            Literal::Number(_, text) => text.clone(),
            Literal::Text(t) => format!("\"{t}\""),
        };
        let (now, written) = (shown(value), shown(default));
        let from = if now == written {
            String::new()
        } else {
            format!(
                " (set with `--set`; the document's default is {})",
                code(&written)
            )
        };
        Ok(vec![Item::Text(format!(
            "Parameter {} is {} in this run{from}.",
            code(&name.value),
            code(&now)
        ))])
    }

    pub(super) fn require(&mut self, gate: &Gate) -> Outcome {
        let alpha_of = |a: &Option<Spanned<f64>>| -> Result<f64, Diagnostic> {
            match a {
                None => Ok(DEFAULT_GATE_ALPHA),
                Some(a) if a.value > 0.0 && a.value < 1.0 => Ok(a.value),
                Some(a) => Err(Diagnostic::new(a.span, "alpha must lie between 0 and 1")
                    .label("not a probability")),
            }
        };
        let (passed, what) = match gate {
            Gate::EqualSlopes {
                model,
                factor,
                covariate,
                alpha,
            } => {
                let alpha = alpha_of(alpha)?;
                let m = self.model_entry(model)?;
                self.named_in_model(m, Role::Factor, [factor])?;
                self.named_in_model(m, Role::Covariate, covariate)?;
                let known: Vec<&crate::model::Fit> = self.models.iter().map(|e| &e.fit).collect();
                let s = m
                    .fit
                    .slopes_among(
                        covariate.as_ref().map(|c| c.value.as_str()),
                        &factor.value,
                        0.95,
                        &known,
                    )
                    .map_err(|e| {
                        // At the words the error is about: `of X` unless it is about `for F`.
                        let at = match covariate {
                            Some(c) if factor_named(&e) != Some(factor.value.as_str()) => c.span,
                            _ => factor.span,
                        };
                        Diagnostic::new(at, e.to_string()).label("cannot test this")
                    })?;
                (
                    s.equality_p >= alpha,
                    format!(
                        "equal slopes of {} across {} in model {} (on the {} rows it is fitted to): F({}, {}) = {:.2}, p {} (alpha {alpha})",
                        code(&s.covariate),
                        code(&factor.value),
                        code(&m.name),
                        m.fit.used_rows().len(),
                        s.df1,
                        s.df2,
                        s.equality_f,
                        p_phrase(Some(s.equality_p))
                    ),
                )
            }
            Gate::Normality { model, alpha } => {
                let alpha = alpha_of(alpha)?;
                let m = self.model_entry(model)?;
                let n = m.fit.diagnostics().len();
                let sw = crate::stats::shapiro::sample_size(n)
                    .and_then(|()| crate::stats::shapiro::shapiro_wilk(&m.fit.residuals(0..n)))
                    .map_err(|e| {
                        Diagnostic::new(model.span, e.to_string()).label("cannot test this")
                    })?;
                (
                    sw.p >= alpha,
                    format!(
                        "normal residuals in model {} (its {n} rows): Shapiro-Wilk W = {:.3}, p {} (alpha {alpha})",
                        code(&m.name),
                        sw.w,
                        p_phrase(Some(sw.p))
                    ),
                )
            }
            Gate::RowsPerLevel { min, factor } => {
                let set = self.current(factor.span)?;
                let f = factor_column(set, factor)?;
                let counts = f.counts();
                let short: Vec<String> = f
                    .levels
                    .iter()
                    .zip(&counts)
                    .filter(|(_, c)| (**c as f64) < min.value)
                    .map(|(l, c)| format!("{} has {c}", code(l)))
                    .collect();
                let fewest = counts.iter().copied().min().unwrap_or(0);
                (
                    short.is_empty(),
                    if short.is_empty() {
                        format!(
                            "at least {} rows per level of {} (the fewest: {fewest})",
                            min.value,
                            code(&factor.value)
                        )
                    } else {
                        format!(
                            "at least {} rows per level of {}: {}",
                            min.value,
                            code(&factor.value),
                            short.join(", ")
                        )
                    },
                )
            }
            Gate::Balance {
                covariate,
                factor,
                model: Some(model),
                alpha,
            } => {
                // On the model's rows, by the same computation as the balance rows of `check`.
                let alpha = alpha_of(alpha)?;
                let m = self.model_entry(model)?;
                let spec = m.fit.spec();
                let var = |name: &str| spec.vars.iter().position(|v| v.name() == name);
                let f = match var(&factor.value).and_then(|i| spec.vars.get(i).map(|v| (i, v))) {
                    Some((i, Var::Factor { .. })) => i,
                    _ => return Err(balance_not_in_model(factor, &m.name, true)),
                };
                let x = match var(&covariate.value).and_then(|i| spec.vars.get(i).map(|v| (i, v))) {
                    Some((i, Var::Numeric { .. })) => i,
                    _ => return Err(balance_not_in_model(covariate, &m.name, false)),
                };
                let used = m.fit.used_rows();
                let (fv, df1, df2) = super::check_statements::one_way_in(spec, f, x, used)
                    .map_err(|e| {
                        Diagnostic::new(covariate.span, e.to_string()).label("cannot test this")
                    })?;
                let p = model::dist::f_upper_p(fv, df1, df2);
                (
                    p >= alpha,
                    format!(
                        "balance of {} across {} (one-way ANOVA on the {} rows model {} is fitted to): F({df1}, {df2}) = {fv:.2}, p {} (alpha {alpha})",
                        code(&covariate.value),
                        code(&factor.value),
                        used.len(),
                        code(&m.name),
                        p_phrase(Some(p))
                    ),
                )
            }
            Gate::Balance {
                covariate,
                factor,
                model: None,
                alpha,
            } => {
                let alpha = alpha_of(alpha)?;
                let set = self.current(factor.span)?;
                let ci = column_index(set, covariate)?;
                let x = Arc::clone(numeric_values(set, ci, covariate)?);
                let f = factor_column(set, factor)?;
                let spec = ModelSpec {
                    response: Var::Numeric {
                        name: covariate.value.clone(),
                        values: x,
                    },
                    vars: vec![Var::Factor {
                        name: factor.value.clone(),
                        codes: Arc::clone(&f.codes),
                        levels: f.levels.clone(),
                    }],
                    terms: vec![TermSpec {
                        parts: vec![Part {
                            var: 0,
                            transform: Transform::Identity,
                        }],
                    }],
                    intercept: true,
                    row_numbers: set.row_numbers.clone(),
                    response_offset: 0.0,
                    weights: None,
                };
                let fit = model::fit(&spec).map_err(|e| {
                    Diagnostic::new(covariate.span, e.to_string()).label("cannot test this")
                })?;
                let a = fit.anova(SsType::II).map_err(|e| {
                    Diagnostic::new(covariate.span, e.to_string()).label("cannot test this")
                })?;
                let row = a
                    .rows
                    .first()
                    .ok_or_else(|| Diagnostic::new(covariate.span, "no test row"))?;
                let p = row.p.unwrap_or(f64::NAN);
                (
                    p >= alpha,
                    format!(
                        "balance of {} across {} (one-way ANOVA on the {} rows of the data set with both values): F({}, {}) = {:.2}, p {} (alpha {alpha})",
                        code(&covariate.value),
                        code(&factor.value),
                        fit.used_rows().len(),
                        row.df,
                        a.residual_df,
                        row.f.unwrap_or(f64::NAN),
                        p_phrase(Some(p))
                    ),
                )
            }
        };
        Ok(vec![if passed {
            Item::Text(format!("Gate passed: {what}."))
        } else {
            Item::GateFailed(format!("Gate failed: {what}."))
        }])
    }

    pub(super) fn report(&mut self, request: &ReportRequest) -> Outcome {
        match request {
            ReportRequest::Term { model, term, kind } => {
                let m = self.model_entry(model)?;
                let a = m
                    .fit
                    .anova(super::model_statements::ss_type(*kind))
                    .map_err(|e| {
                        Diagnostic::new(model.span, e.to_string()).label("cannot compute this")
                    })?;
                let row = a
                    .rows
                    .iter()
                    .find(|r| r.term == term.value)
                    .ok_or_else(|| {
                        let names: Vec<&str> = a.rows.iter().map(|r| r.term.as_str()).collect();
                        Diagnostic::new(
                            term.span,
                            format!(
                                "model {} has no term {}",
                                crate::report::markdown::code(&m.name),
                                crate::report::markdown::code(&term.value)
                            ),
                        )
                        .label("unknown term")
                        .help(format!("its terms are {}", names.join(", ")))
                    })?;
                let type_name = match kind {
                    SsKind::Sequential => "Type I",
                    SsKind::Partial => "Type II",
                    SsKind::Marginal => "Type III",
                };
                Ok(vec![Item::Text(format!(
                    "The effect of {} in model {} ({type_name} sums of squares): *F*({}, {}) = {:.2}, *p* {}, partial eta squared = {}.",
                    code(&term.value),
                    code(&m.name),
                    row.df,
                    a.residual_df,
                    row.f.unwrap_or(f64::NAN),
                    p_phrase(row.p),
                    no_leading_zero(row.partial_eta_sq, 2)
                ))])
            }
            ReportRequest::Difference {
                model,
                factor,
                first,
                second,
                correction,
            } => {
                let m = self.model_entry(model)?;
                self.named_in_model(m, Role::Factor, [factor])?;
                let adjust = correction.as_ref().map_or(Correction::Tukey, |c| c.value);
                if let (Some(c), Correction::Dunnett) = (correction, adjust) {
                    return Err(Diagnostic::new(
                        c.span,
                        "`correction dunnett` compares levels with a control; it needs `versus`",
                    )
                    .label("no control named")
                    .help(format!(
                        "ask for `table differences {} for {} versus CONTROL` and refer to its rows",
                        m.name, factor.value
                    )));
                }
                let method = super::model_statements::adjustment(adjust);
                let pairs = m.fit.pairs(&factor.value, &[], method, 0.95).map_err(|e| {
                    Diagnostic::new(factor.span, e.to_string()).label("cannot compute this")
                })?;
                let (pair, flip) = pairs
                    .iter()
                    .find_map(|p| {
                        if p.first == first.value && p.second == second.value {
                            Some((p, false))
                        } else if p.first == second.value && p.second == first.value {
                            Some((p, true))
                        } else {
                            None
                        }
                    })
                    .ok_or_else(|| {
                        let mut levels: Vec<String> = Vec::new();
                        for p in &pairs {
                            for l in [&p.first, &p.second] {
                                if !levels.contains(l) {
                                    levels.push(l.clone());
                                }
                            }
                        }
                        unknown_pair(first, second, &factor.value, &m.name, &levels)
                    })?;
                let sign = if flip { -1.0 } else { 1.0 };
                let limits = match (pair.lower, pair.upper) {
                    (Some(lo), Some(hi)) => {
                        let (lo, hi) = if flip { (-hi, -lo) } else { (lo, hi) };
                        format!(", 95% CI [{:.2}, {:.2}]", lo, hi)
                    }
                    _ => String::new(),
                };
                let how = match adjust {
                    Correction::Tukey => "Tukey-Kramer adjusted",
                    Correction::Holm => "Holm adjusted",
                    Correction::Bonferroni => "Bonferroni adjusted",
                    Correction::Sidak => "Sidak adjusted",
                    Correction::Dunnett => "Dunnett adjusted",
                    Correction::None => "unadjusted",
                };
                Ok(vec![Item::Text(format!(
                    "Adjusted means of {} minus {} in model {}: difference = {:.2}{limits}, *t*({}) = {:.2}, *p* {} ({how}).",
                    code(&first.value),
                    code(&second.value),
                    code(&m.name),
                    sign * pair.estimate,
                    pair.df,
                    sign * pair.t,
                    p_phrase(Some(pair.p))
                ))])
            }
        }
    }
}

/// The error of `report M differences F between A and B` when A and B are not two levels of
/// F with rows in model M (whose levels of F are `levels`), at the first that is not one. The
/// language server gives the same.
pub(crate) fn unknown_pair(
    first: &Spanned<String>,
    second: &Spanned<String>,
    factor: &str,
    model: &str,
    levels: &[String],
) -> Diagnostic {
    let at = [first, second]
        .into_iter()
        .find(|l| !levels.contains(&l.value))
        .unwrap_or(second);
    let listed: Vec<String> = levels.iter().map(|l| code(l)).collect();
    Diagnostic::new(
        at.span,
        format!(
            "{} and {} are not two levels of {} in model {}",
            code(&first.value),
            code(&second.value),
            code(factor),
            code(model)
        ),
    )
    .label(if first.value == second.value {
        "the same level twice"
    } else {
        "not a level here"
    })
    .help(format!(
        "name two different levels of {}; its levels in model {}: {}",
        code(factor),
        code(model),
        listed.join(", ")
    ))
}

/// The error of `require balance X by F in M` when F is not a factor (`factor`) or X not a
/// numeric covariate of model M. The language server gives the same.
pub(crate) fn balance_not_in_model(
    name: &Spanned<String>,
    model: &str,
    factor: bool,
) -> Diagnostic {
    let what = if factor {
        "a factor"
    } else {
        "a numeric covariate"
    };
    Diagnostic::new(
        name.span,
        format!(
            "{} is not {what} of model {model}",
            crate::report::markdown::code(&name.value),
            model = crate::report::markdown::code(model)
        ),
    )
    .label("not in the model")
    .help(format!(
        "name {what} of model `{model}`, or leave out `in {model}` to test on the rows of the \
         current data set"
    ))
}

/// "= .023" or "< .001", as a p-value stands in a sentence.
fn p_phrase(p: Option<f64>) -> String {
    let s = p_value(p);
    if s.starts_with('<') || s.starts_with('>') {
        s
    } else {
        format!("= {s}")
    }
}

/// A proportion without its leading zero (APA style for values that cannot
/// exceed 1), e.g. `.37`.
fn no_leading_zero(x: f64, decimals: usize) -> String {
    if !x.is_finite() {
        return crate::report::number::MISSING.into();
    }
    let s = format!("{x:.decimals$}");
    s.strip_prefix('0').map(str::to_string).unwrap_or(s)
}
