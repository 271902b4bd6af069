//! Why columns are aliased or a quantity is not estimable, in the user's terms: the
//! combinations of factor levels that have no rows, or columns that are combinations of the
//! model's other columns.

use std::collections::BTreeSet;
use std::fmt;

use super::design::{ColPart, Column, Layout};
use super::{ModelSpec, Var};

/// Empty cells listed by name at most; more are counted.
const MAX_CELLS_NAMED: usize = 6;

/// Why some coefficients cannot be estimated.
#[derive(Debug, Clone, PartialEq)]
pub enum AliasCause {
    /// Combinations of factor levels that have no rows in the fitted data.
    EmptyCells {
        /// The cells, e.g. `a = a3 with b = b2`.
        cells: Vec<String>,
        /// How many more empty cells there are than those named.
        more: usize,
        /// The interaction term whose coefficients need them.
        term: String,
    },
    /// A covariate takes a single value within some levels of a factor (on the fitted rows):
    /// within every level, it carries nothing the factor does not; within some, its slope
    /// there cannot be estimated.
    ConstantWithin {
        /// The covariate.
        covariate: String,
        /// The factor.
        factor: String,
        /// The levels within which it is constant, each with that value (at most
        /// `MAX_CELLS_NAMED`).
        levels: Vec<(String, f64)>,
        /// How many more such levels there are than those named.
        more: usize,
        /// Whether it is constant within every level of the factor that has rows.
        every: bool,
        /// The terms of the columns left out.
        terms: Vec<String>,
    },
    /// The columns are combinations of the model's other columns whatever the data (for
    /// instance the same term written twice in another form) or on these rows (a covariate
    /// constant within the levels of a factor, a multiple of another covariate).
    Combination {
        /// The terms of the columns left out.
        terms: Vec<String>,
    },
}

impl AliasCause {
    /// The cells as a phrase: "a = a3 with b = b2, a = a1 with b = b3 (and 2 more)".
    fn cells_text(cells: &[String], more: usize) -> String {
        let mut s = cells.join(", ");
        if more > 0 {
            s.push_str(&format!(" (and {more} more)"));
        }
        s
    }

    /// The remedy, as advice.
    pub fn remedy(&self) -> String {
        match self {
            AliasCause::EmptyCells { term, .. } => {
                format!("use Type I or II, or remove the interaction {term}", term = crate::report::markdown::code(term))
            }
            AliasCause::ConstantWithin {
                covariate,
                factor,
                every: true,
                ..
            } => format!(
                "leave {} out of the model (within the levels of {} it adds nothing), or measure it \
                 so that it varies within the groups",
                crate::report::markdown::code(covariate),
                crate::report::markdown::code(factor)
            ),
            AliasCause::ConstantWithin { terms, .. } => format!(
                "remove {} so that one slope serves every level, or leave out the rows of those \
                 levels",
                terms
                    .iter()
                    .map(|t| crate::report::markdown::code(t))
                    .collect::<Vec<_>>()
                    .join(" and ")
            ),
            AliasCause::Combination { terms } => format!(
                "remove {} (or the term it repeats), or use Type I or II",
                terms
                    .iter()
                    .map(|t| crate::report::markdown::code(t))
                    .collect::<Vec<_>>()
                    .join(" or ")
            ),
        }
    }
}

impl fmt::Display for AliasCause {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            AliasCause::EmptyCells { cells, more, .. } => write!(
                f,
                "these combinations of levels have no rows: {}",
                AliasCause::cells_text(cells, *more)
            ),
            AliasCause::ConstantWithin {
                covariate,
                factor,
                levels,
                more,
                every,
                ..
            } => {
                let code = crate::report::markdown::code;
                let named: Vec<String> = levels
                    .iter()
                    .map(|(l, x)| format!("{} at {}", code(l), crate::data::format_number(*x)))
                    .collect();
                let mut list = named.join(", ");
                if *more > 0 {
                    list.push_str(&format!(" (and {more} more)"));
                }
                if *every {
                    write!(
                        f,
                        "the covariate {} takes a single value within each level of {} ({list}), so its column is a combination of the columns of {}",
                        code(covariate),
                        code(factor),
                        code(factor)
                    )
                } else {
                    write!(
                        f,
                        "the covariate {} takes a single value within {} of {}: {list}, so no slope of {} can be estimated there",
                        code(covariate),
                        if levels.len() + more == 1 { "one level" } else { "some levels" },
                        code(factor),
                        code(covariate)
                    )
                }
            }
            AliasCause::Combination { .. } => write!(
                f,
                "their columns are combinations of the model's other columns (for instance a covariate that is constant within the levels of a factor, or a multiple of another covariate)"
            ),
        }
    }
}

/// The factor variables of a column, in order.
fn factors_of(c: &Column) -> Vec<usize> {
    c.parts
        .iter()
        .filter_map(|p| match p {
            ColPart::Indicator { var, .. } | ColPart::Effect { var, .. } => Some(*var),
            ColPart::Numeric { .. } => None,
        })
        .collect()
}

/// The combinations of present levels of `factors` that have no fitted rows, as level codes.
pub(crate) fn empty_cells(spec: &ModelSpec, lay: &Layout, factors: &[usize]) -> Vec<Vec<u32>> {
    let codes: Vec<&[crate::data::Code]> = factors
        .iter()
        .map(|&v| match spec.vars.get(v) {
            Some(Var::Factor { codes, .. }) => codes.as_slice(),
            _ => &[],
        })
        .collect();
    let mut seen: BTreeSet<Vec<u32>> = BTreeSet::new();
    for i in lay.used.iter() {
        let key: Option<Vec<u32>> = codes
            .iter()
            .map(|c| c.get(i).and_then(|x| x.get()))
            .collect();
        if let Some(k) = key {
            seen.insert(k);
        }
    }
    let present: Vec<Vec<u32>> = factors
        .iter()
        .map(|&v| lay.factor(v).map(|f| f.present.clone()).unwrap_or_default())
        .collect();
    let total: usize = present.iter().map(Vec::len).product();
    let mut out = Vec::new();
    for mut k in 0..total {
        let mut cell = Vec::with_capacity(factors.len());
        for p in present.iter().rev() {
            let len = p.len().max(1);
            cell.push(p.get(k % len).copied().unwrap_or(0));
            k /= len;
        }
        cell.reverse();
        if !seen.contains(&cell) {
            out.push(cell);
        }
    }
    out
}

/// A cell by name: `a = a3 with b = b2`.
pub(crate) fn cell_name(spec: &ModelSpec, factors: &[usize], cell: &[u32]) -> String {
    factors
        .iter()
        .zip(cell)
        .map(|(&v, &c)| match spec.vars.get(v) {
            Some(Var::Factor { name, levels, .. }) => format!(
                "{name} = {}",
                levels.get(c as usize).cloned().unwrap_or_default()
            ),
            _ => String::new(),
        })
        .collect::<Vec<_>>()
        .join(" with ")
}

/// Why the design columns `aliased` (indices into `cols`) cannot be estimated.
pub(crate) fn alias_cause(
    spec: &ModelSpec,
    lay: &Layout,
    cols: &[Column],
    aliased: &[usize],
) -> AliasCause {
    for &c in aliased {
        let Some(col) = cols.get(c) else { continue };
        let factors = factors_of(col);
        if factors.len() < 2 {
            continue;
        }
        let empty = empty_cells(spec, lay, &factors);
        if !empty.is_empty() {
            let term = col
                .term
                .and_then(|t| lay.term_names.get(t).cloned())
                .unwrap_or_default();
            return AliasCause::EmptyCells {
                cells: empty
                    .iter()
                    .take(MAX_CELLS_NAMED)
                    .map(|cell| cell_name(spec, &factors, cell))
                    .collect(),
                more: empty.len().saturating_sub(MAX_CELLS_NAMED),
                term,
            };
        }
    }
    let mut terms: Vec<String> = Vec::new();
    for &c in aliased {
        if let Some(t) = cols
            .get(c)
            .and_then(|x| x.term)
            .and_then(|t| lay.term_names.get(t))
        {
            if !terms.contains(t) {
                terms.push(t.clone());
            }
        }
    }
    constant_within(spec, lay, cols, aliased, &terms).unwrap_or(AliasCause::Combination { terms })
}

/// A covariate and a factor of a model, and how the covariate varies within each level of the
/// factor over the rows the fit uses.
pub(crate) struct WithinLevels<'a> {
    pub covariate: &'a str,
    pub factor: &'a str,
    /// The factor's levels, in declared order.
    pub levels: &'a [String],
    /// Per level code: the covariate's first value among the rows used at that level and
    /// whether every other such row has the same value; `None` where no row used is there.
    pub first: Vec<Option<(f64, bool)>>,
}

/// How covariate `x` varies within each level of factor `f` (indices into the spec's
/// variables); `None` when `x` is not a covariate or `f` not a factor. Both the warning about
/// aliased columns and the reason a slope within a level is not estimable read it, so the two
/// explain a covariate constant within a level alike.
pub(crate) fn covariate_within_levels<'a>(
    spec: &'a ModelSpec,
    lay: &Layout,
    x: usize,
    f: usize,
) -> Option<WithinLevels<'a>> {
    let (
        Some(Var::Numeric {
            name: covariate,
            values,
        }),
        Some(Var::Factor {
            name: factor,
            codes,
            levels,
        }),
    ) = (spec.vars.get(x), spec.vars.get(f))
    else {
        return None;
    };
    let mut first: Vec<Option<(f64, bool)>> = vec![None; levels.len()];
    for i in lay.used.iter() {
        let (Some(code), Some(&v)) = (codes.get(i).and_then(|k| k.get()), values.get(i)) else {
            continue;
        };
        if let Some(slot) = first.get_mut(code as usize) {
            match slot {
                None => *slot = Some((v, true)),
                Some((v0, same)) => *same = *same && *v0 == v,
            }
        }
    }
    Some(WithinLevels {
        covariate,
        factor,
        levels,
        first,
    })
}

/// A covariate constant within levels of a factor that explains the aliased columns: a
/// column that is covariate times factor levels, with the covariate constant within one of
/// those levels; or the covariate alone, constant within every level of a factor.
fn constant_within(
    spec: &ModelSpec,
    lay: &Layout,
    cols: &[Column],
    aliased: &[usize],
    terms: &[String],
) -> Option<AliasCause> {
    for &c in aliased {
        let col = cols.get(c)?;
        let covariates: Vec<usize> = col
            .parts
            .iter()
            .filter_map(|p| match p {
                ColPart::Numeric { var, .. } => Some(*var),
                _ => None,
            })
            .collect();
        let [x] = covariates.as_slice() else { continue };
        let own = factors_of(col);
        // In an interaction, the factors of the column; alone, every factor of the model.
        let candidates: Vec<usize> = if own.is_empty() {
            lay.factors.iter().map(|f| f.var).collect()
        } else {
            own
        };
        for fv in candidates {
            let Some(within) = covariate_within_levels(spec, lay, *x, fv) else {
                continue;
            };
            let present = lay
                .factor(fv)
                .map(|f| f.present.clone())
                .unwrap_or_default();
            let constant: Vec<(String, f64)> = present
                .iter()
                .filter_map(|&k| match within.first.get(k as usize).copied().flatten() {
                    Some((v, true)) => Some((within.levels.get(k as usize)?.clone(), v)),
                    _ => None,
                })
                .collect();
            let every = !present.is_empty() && constant.len() == present.len();
            let fits = if col.parts.len() == 1 {
                every
            } else {
                !constant.is_empty()
            };
            if fits {
                return Some(AliasCause::ConstantWithin {
                    covariate: within.covariate.to_string(),
                    factor: within.factor.to_string(),
                    more: constant.len().saturating_sub(MAX_CELLS_NAMED),
                    levels: constant.into_iter().take(MAX_CELLS_NAMED).collect(),
                    every,
                    terms: terms.to_vec(),
                });
            }
        }
    }
    None
}
