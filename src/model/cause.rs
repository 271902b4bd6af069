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
                format!("use Type I or II, or remove the interaction `{term}`")
            }
            AliasCause::Combination { terms } => format!(
                "remove {} (or the term it repeats), or use Type I or II",
                terms
                    .iter()
                    .map(|t| format!("`{t}`"))
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
    AliasCause::Combination { terms }
}
