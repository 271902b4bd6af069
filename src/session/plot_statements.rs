//! Handlers of `plot` and `unit`.

use super::{Outcome, Session};
use crate::diagnostic::Diagnostic;
use crate::lang::{PlotKind, Spanned};
use crate::model::{self, Var};
use crate::plot::{self, PlotError, Request};
use crate::report::markdown::code;
use crate::report::{Figure, Item};

/// The statement word of each figure kind, for messages.
pub(crate) fn kind_word(kind: PlotKind) -> &'static str {
    match kind {
        PlotKind::Lines => "lines",
        PlotKind::Residuals => "residuals",
        PlotKind::Quantiles => "quantiles",
        PlotKind::Means => "means",
        PlotKind::Influence => "influence",
        PlotKind::Groups => "groups",
        PlotKind::Interaction => "interaction",
    }
}

/// Names joined as `a`, `b` and `c`.
pub(crate) fn listing(names: &[&str]) -> String {
    let quoted: Vec<String> = names.iter().map(|n| code(n)).collect();
    match quoted.split_last() {
        None => String::new(),
        Some((last, [])) => last.clone(),
        Some((last, rest)) => format!("{} and {last}", rest.join(", ")),
    }
}

/// The figure names a factor that is not one of the model's.
pub(crate) fn not_a_factor(
    named: &Spanned<String>,
    model: &Spanned<String>,
    factors: &[&str],
) -> Diagnostic {
    let help = if factors.is_empty() {
        format!("model {} has no factor", code(&model.value))
    } else {
        format!("its factors are {}", listing(factors))
    };
    Diagnostic::new(
        named.span,
        format!(
            "{} is not a factor of model {}",
            code(&named.value),
            code(&model.value)
        ),
    )
    .label("not a factor of this model")
    .help(help)
}

/// A figure of a factor's levels asked of a model without one.
pub(crate) fn no_factor(model: &Spanned<String>, word: &str) -> Diagnostic {
    Diagnostic::new(
        model.span,
        format!("model {} has no factor", code(&model.value)),
    )
    .label("no factor")
    .help(format!(
        "`plot {word}` shows the levels of a factor of the model"
    ))
}

/// A figure that needs one factor, of a model with several, none named.
pub(crate) fn several_factors(model: &Spanned<String>, factors: &[&str]) -> Diagnostic {
    Diagnostic::new(
        model.span,
        format!("model {} has several factors", code(&model.value)),
    )
    .label("which factor?")
    .help(format!("name one with `for`: {}", listing(factors)))
}

impl Session<'_> {
    pub(super) fn plot(
        &mut self,
        kind: PlotKind,
        model: &Spanned<String>,
        covariate: Option<&Spanned<String>>,
        factor: Option<&Spanned<String>>,
        by: Option<&Spanned<String>>,
    ) -> Outcome {
        let entry = self.model_entry(model)?;
        let fit = &entry.fit;
        let spec = fit.spec();
        let word = kind_word(kind);
        let numeric: Vec<(usize, &str)> = spec
            .vars
            .iter()
            .enumerate()
            .filter(|(_, v)| matches!(v, Var::Numeric { .. }))
            .map(|(i, v)| (i, v.name()))
            .collect();
        let factors: Vec<(usize, &str)> = spec
            .vars
            .iter()
            .enumerate()
            .filter(|(_, v)| matches!(v, Var::Factor { .. }))
            .map(|(i, v)| (i, v.name()))
            .collect();
        let numeric_names: Vec<&str> = numeric.iter().map(|(_, n)| *n).collect();
        let factor_names: Vec<&str> = factors.iter().map(|(_, n)| *n).collect();

        let takes_covariate = matches!(kind, PlotKind::Lines | PlotKind::Residuals);
        let x = match covariate {
            Some(c) if !takes_covariate => {
                return Err(Diagnostic::new(
                    c.span,
                    format!("`plot {word}` does not take a covariate"),
                )
                .label("not used by this figure")
                .help("`of X` goes with `plot lines` and `plot residuals`"))
            }
            Some(c) => match numeric.iter().find(|(_, n)| *n == c.value) {
                Some(&(i, _)) => Some(i),
                None => {
                    let help = if numeric_names.is_empty() {
                        format!(
                            "model {} has no covariate",
                            crate::report::markdown::code(&model.value)
                        )
                    } else {
                        format!("its covariates are {}", listing(&numeric_names))
                    };
                    return Err(Diagnostic::new(
                        c.span,
                        format!(
                            "{} is not a covariate of model {}",
                            crate::report::markdown::code(&c.value),
                            crate::report::markdown::code(&model.value)
                        ),
                    )
                    .label("not a covariate of this model")
                    .help(help));
                }
            },
            None if kind == PlotKind::Lines => match numeric.as_slice() {
                [(i, _)] => Some(*i),
                [] => {
                    return Err(Diagnostic::new(
                        model.span,
                        format!(
                            "model {} has no covariate to draw lines along",
                            crate::report::markdown::code(&model.value)
                        ),
                    )
                    .label("no covariate")
                    .help("`plot groups` or `plot means` show a model of factors only"))
                }
                _ => {
                    return Err(Diagnostic::new(
                        model.span,
                        format!(
                            "model {} has several covariates",
                            crate::report::markdown::code(&model.value)
                        ),
                    )
                    .label("which covariate?")
                    .help(format!("name one with `of`: {}", listing(&numeric_names))))
                }
            },
            None => None,
        };
        let needs_factor = matches!(
            kind,
            PlotKind::Means | PlotKind::Groups | PlotKind::Interaction
        );
        let by_index = match (kind, by) {
            (PlotKind::Interaction, Some(b)) => match factors.iter().find(|(_, n)| *n == b.value) {
                Some(&(i, _)) => Some(i),
                None => {
                    return Err(Diagnostic::new(
                        b.span,
                        format!(
                            "{} is not a factor of model {}",
                            crate::report::markdown::code(&b.value),
                            crate::report::markdown::code(&model.value)
                        ),
                    )
                    .label("not a factor of this model")
                    .help(format!("its factors are {}", listing(&factor_names))))
                }
            },
            (PlotKind::Interaction, None) => {
                return Err(Diagnostic::new(
                    model.span,
                    "`plot interaction` needs two factors: `plot interaction M for A by B`",
                )
                .label("no second factor")
                .help(format!(
                    "name them with `for` and `by`: {}",
                    listing(&factor_names)
                )))
            }
            (_, Some(b)) => {
                return Err(
                    Diagnostic::new(b.span, format!("`plot {word}` does not take `by`"))
                        .label("not used by this figure")
                        .help("`by B` goes with `plot interaction M for A by B`"),
                )
            }
            (_, None) => None,
        };
        let too_many = |i: usize| match spec.vars.get(i) {
            Some(Var::Factor { levels, .. }) => levels.len() > plot::MAX_POINT_LEVELS,
            _ => false,
        };
        let f = match factor {
            Some(fa) => match factors.iter().find(|(_, n)| *n == fa.value) {
                Some(&(i, _)) => Some(i),
                None => return Err(not_a_factor(fa, model, &factor_names)),
            },
            None => match factors.as_slice() {
                // A figure that does not need a factor leaves out one with more levels
                // than it can tell apart, rather than fail.
                [(i, _)] if !needs_factor && kind != PlotKind::Lines && too_many(*i) => None,
                [(i, _)] => Some(*i),
                [] if needs_factor => return Err(no_factor(model, word)),
                [] => None,
                _ if needs_factor || kind == PlotKind::Lines => {
                    return Err(several_factors(model, &factor_names))
                }
                _ => None,
            },
        };
        let name_of = |i: Option<usize>| {
            i.and_then(|i| spec.vars.get(i))
                .map(|v| v.name().to_string())
        };
        let response_name = spec.response.name().to_string();
        let covariate_name = name_of(x);
        let req = Request {
            covariate: x,
            covariate_label: covariate_name.as_deref().map(|n| self.axis_label(n)),
            covariate_name,
            factor: f,
            factor_name: name_of(f),
            by_name: name_of(by_index),
            response_label: self.axis_label(&response_name),
            response_name,
        };
        let drawn = plot::draw(kind, fit, &req).map_err(|e| {
            let span = match (&e, covariate, factor) {
                (PlotError::NoCovariate, Some(c), _) => c.span,
                (PlotError::NoFactor, _, Some(fa)) => fa.span,
                (PlotError::Model(model::ModelError::WithinSameFactor { .. }), _, _) => {
                    by.map_or(model.span, |b| b.span)
                }
                _ => model.span,
            };
            Diagnostic::new(span, e.to_string()).label("cannot draw this")
        })?;
        Ok(vec![Item::Figure(Figure {
            file: String::new(),
            svg: drawn.svg,
            alt: drawn.alt,
            caption: drawn.caption,
        })])
    }

    pub(super) fn unit(&mut self, column: &Spanned<String>, unit: &Spanned<String>) -> Outcome {
        let set = self.current(column.span)?;
        super::data_statements::column_index(set, column)?;
        match self.units.iter_mut().find(|(c, _)| *c == column.value) {
            Some(slot) => slot.1 = unit.value.clone(),
            None => self.units.push((column.value.clone(), unit.value.clone())),
        }
        Ok(vec![Item::Text(format!(
            "Figures label {} in {}.",
            code(&column.value),
            code(&unit.value)
        ))])
    }
}
