//! Building the design matrix term by term: validation of the input, the rows used,
//! factor levels present, coding of each factor part, and evaluation of columns.
//!
//! Coding rule ("contained terms", Chambers & Hastie, "Statistical Models in S", 1992,
//! section 2.4.1): a factor F in term T is coded by contrasts (levels but the first, or the
//! sum-to-zero contrasts for Type III) when T without F is an earlier term (for T = F alone:
//! when the model has an intercept, or has none but an earlier term is a factor alone);
//! otherwise by indicators of all its levels. For `a by b` with `a` but not `b` in the model,
//! this gives `b` contrasts and `a` indicators, so the columns span every cell.

use std::borrow::Cow;
use std::ops::Range;

use super::{ModelError, ModelSpec, ModelWarning, Transform, Var};

/// Which contrasts replace a contrast-coded factor.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(crate) enum Scheme {
    /// Indicators of every level but the first (treatment coding).
    Treatment,
    /// Level j: +1 for level j, -1 for the last level (sum-to-zero coding).
    Effect,
}

/// One factor of a column.
#[derive(Debug, Clone, PartialEq, Eq, PartialOrd, Ord)]
pub(crate) enum ColPart {
    /// A numeric variable through a transform.
    Numeric { var: usize, transform: Transform },
    /// 1 when the factor has `code`, else 0.
    Indicator { var: usize, code: u32 },
    /// 1 for `code`, -1 for `last`, else 0.
    Effect { var: usize, code: u32, last: u32 },
}

/// One design column.
#[derive(Debug, Clone, PartialEq)]
pub(crate) struct Column {
    /// Term index (None for the intercept).
    pub term: Option<usize>,
    /// Coefficient name.
    pub name: String,
    /// Product of these (empty = the constant 1).
    pub parts: Vec<ColPart>,
}

/// Levels of one factor that have rows in the fitted data.
#[derive(Debug, Clone, PartialEq)]
pub(crate) struct FactorLevels {
    pub var: usize,
    /// Codes with rows, in declared order.
    pub present: Vec<u32>,
}

/// The rows a model is fitted to, ascending, as indices into its variables. When every row
/// is used (the common case) no list is kept: at 8 bytes a row per model, it would weigh as
/// much as a column of the data.
#[derive(Debug, Clone, PartialEq, Eq)]
pub(crate) enum UsedRows {
    /// Every row, `0..n`.
    All(usize),
    /// These rows (some were left out).
    Listed(Vec<usize>),
}

impl UsedRows {
    /// Number of rows used.
    pub fn len(&self) -> usize {
        match self {
            UsedRows::All(n) => *n,
            UsedRows::Listed(v) => v.len(),
        }
    }

    /// True when no row is used.
    pub fn is_empty(&self) -> bool {
        self.len() == 0
    }

    /// The k-th row used, if there are more than k.
    pub fn get(&self, k: usize) -> Option<usize> {
        match self {
            UsedRows::All(n) => (k < *n).then_some(k),
            UsedRows::Listed(v) => v.get(k).copied(),
        }
    }

    /// The rows used, in order.
    pub fn iter(&self) -> UsedIter<'_> {
        match self {
            UsedRows::All(n) => UsedIter::All(0..*n),
            UsedRows::Listed(v) => UsedIter::Listed(v.iter()),
        }
    }

    /// Positions (into the rows used) of consecutive blocks of `size` rows, the last one
    /// possibly shorter.
    pub fn blocks(&self, size: usize) -> Vec<Range<usize>> {
        let n = self.len();
        let size = size.max(1);
        (0..n)
            .step_by(size)
            .map(|start| start..n.min(start.saturating_add(size)))
            .collect()
    }

    /// The rows used at positions `at` (cut at the end): borrowed from the list, or made for
    /// the block when every row is used.
    pub fn slice(&self, at: Range<usize>) -> Cow<'_, [usize]> {
        match self {
            UsedRows::All(n) => Cow::Owned((at.start.min(*n)..at.end.min(*n)).collect()),
            UsedRows::Listed(v) => {
                let end = at.end.min(v.len());
                Cow::Borrowed(v.get(at.start.min(end)..end).unwrap_or(&[]))
            }
        }
    }
}

/// The iterator of [`UsedRows::iter`].
pub(crate) enum UsedIter<'a> {
    All(Range<usize>),
    Listed(std::slice::Iter<'a, usize>),
}

impl Iterator for UsedIter<'_> {
    type Item = usize;

    fn next(&mut self) -> Option<usize> {
        match self {
            UsedIter::All(r) => r.next(),
            UsedIter::Listed(it) => it.next().copied(),
        }
    }

    fn size_hint(&self) -> (usize, Option<usize>) {
        match self {
            UsedIter::All(r) => r.size_hint(),
            UsedIter::Listed(it) => it.size_hint(),
        }
    }
}

impl ExactSizeIterator for UsedIter<'_> {}

/// Everything about the rows and variables that both coding schemes share.
#[derive(Debug, Clone)]
pub(crate) struct Layout {
    /// The rows used.
    pub used: UsedRows,
    /// Number of rows in the input.
    pub total_rows: usize,
    /// Rows left out because their weight is 0.
    pub zero_weight: usize,
    pub factors: Vec<FactorLevels>,
    pub warnings: Vec<ModelWarning>,
    /// Term names.
    pub term_names: Vec<String>,
}

/// Key of a part for set comparisons: (variable, transform).
pub(crate) type PartKey = (usize, Transform);

pub(crate) fn term_keys(spec: &ModelSpec, t: usize) -> Vec<PartKey> {
    let mut k: Vec<PartKey> = spec
        .terms
        .get(t)
        .map(|ts| {
            ts.parts
                .iter()
                .map(|p| (p.var, norm_transform(p.transform)))
                .collect()
        })
        .unwrap_or_default();
    k.sort();
    k
}

fn norm_transform(t: Transform) -> Transform {
    match t {
        Transform::Power(1) => Transform::Identity,
        other => other,
    }
}

/// Apply a transform (callers validate the domain first; out-of-domain gives NaN).
pub(crate) fn apply(t: Transform, x: f64) -> f64 {
    match t {
        Transform::Identity => x,
        Transform::Power(k) => x.powi(k.min(i32::MAX as u32) as i32),
        Transform::Log => {
            if x > 0.0 {
                x.ln()
            } else {
                f64::NAN
            }
        }
        Transform::Sqrt => {
            if x >= 0.0 {
                x.sqrt()
            } else {
                f64::NAN
            }
        }
    }
}

/// Name of a numeric part: `x`, `x^2`, `log(x)`, `sqrt(x)`.
pub(crate) fn part_name(name: &str, t: Transform) -> String {
    match norm_transform(t) {
        Transform::Identity => name.to_string(),
        Transform::Power(k) => format!("{name}^{k}"),
        Transform::Log => format!("log({name})"),
        Transform::Sqrt => format!("sqrt({name})"),
    }
}

pub(crate) fn var_name(spec: &ModelSpec, v: usize) -> String {
    spec.vars
        .get(v)
        .map(|x| x.name().to_string())
        .unwrap_or_default()
}

/// Name of a term from its parts in written order.
pub(crate) fn term_name(spec: &ModelSpec, t: usize) -> String {
    let Some(ts) = spec.terms.get(t) else {
        return String::new();
    };
    ts.parts
        .iter()
        .map(|p| match spec.vars.get(p.var) {
            Some(Var::Factor { name, .. }) => name.clone(),
            Some(Var::Numeric { name, .. }) => part_name(name, p.transform),
            None => String::new(),
        })
        .collect::<Vec<_>>()
        .join(" by ")
}

/// Name of a set of part keys (for marginality warnings), in the order of the term.
fn keys_name(spec: &ModelSpec, keys: &[PartKey]) -> String {
    keys.iter()
        .map(|&(v, t)| match spec.vars.get(v) {
            Some(Var::Factor { name, .. }) => name.clone(),
            Some(Var::Numeric { name, .. }) => part_name(name, t),
            None => String::new(),
        })
        .collect::<Vec<_>>()
        .join(" by ")
}

/// Validate the spec, choose the rows, and find the factor levels present.
pub(crate) fn layout(spec: &ModelSpec) -> Result<Layout, ModelError> {
    let y = match &spec.response {
        Var::Numeric { values, .. } => values,
        Var::Factor { .. } => return Err(ModelError::ResponseNotNumeric),
    };
    let n = y.len();
    if spec.row_numbers.len() != n {
        return Err(ModelError::RowNumbersMismatch {
            expected: n,
            found: spec.row_numbers.len(),
        });
    }
    if spec.terms.is_empty() && !spec.intercept {
        return Err(ModelError::EmptyModel);
    }
    let mut used_vars: Vec<usize> = Vec::new();
    for (ti, term) in spec.terms.iter().enumerate() {
        if term.parts.is_empty() {
            return Err(ModelError::EmptyTerm { term: ti });
        }
        let mut seen: Vec<usize> = Vec::new();
        for p in &term.parts {
            let v = spec.vars.get(p.var).ok_or(ModelError::VarIndexOutOfRange {
                term: ti,
                index: p.var,
            })?;
            match v {
                Var::Factor { .. } => {
                    if p.transform != Transform::Identity {
                        return Err(ModelError::TransformOnFactor { term: ti });
                    }
                }
                Var::Numeric { .. } => {
                    if p.transform == Transform::Power(0) {
                        return Err(ModelError::ZeroPower { term: ti });
                    }
                }
            }
            if v.len() != n {
                return Err(ModelError::LengthMismatch {
                    variable: v.name().to_string(),
                    expected: n,
                    found: v.len(),
                });
            }
            if seen.contains(&p.var) {
                return Err(ModelError::RepeatedPart { term: ti });
            }
            seen.push(p.var);
            if !used_vars.contains(&p.var) {
                used_vars.push(p.var);
            }
        }
        let keys = term_keys(spec, ti);
        if (0..ti).any(|u| term_keys(spec, u) == keys) {
            return Err(ModelError::DuplicateTerm { term: ti });
        }
    }
    used_vars.sort_unstable();
    let row_no = |i: usize| spec.row_numbers.get(i).unwrap_or(i);

    // Rows used: no list until a row is left out (see UsedRows). Blocks of rows are looked
    // at side by side, each giving its complete rows (None: all of them) or its first
    // error; the first block's error in row order is the first error.
    let blocks = crate::parallel::row_blocks(n);
    let parts = crate::parallel::map(&blocks, |at| -> Result<Option<Vec<usize>>, ModelError> {
        let mut listed: Option<Vec<usize>> = None;
        for i in at.clone() {
            let yi = y.get(i).copied().unwrap_or(f64::NAN);
            let keep = row_complete(spec, &used_vars, i, yi)?;
            match (&mut listed, keep) {
                (Some(v), true) => v.push(i),
                (None, false) => {
                    let mut v = Vec::with_capacity(at.len());
                    v.extend(at.start..i);
                    listed = Some(v);
                }
                _ => {}
            }
        }
        Ok(listed)
    });
    let mut listed: Option<Vec<usize>> = None;
    for (at, part) in blocks.iter().zip(parts) {
        match (part?, &mut listed) {
            (None, None) => {}
            (None, Some(v)) => v.extend(at.clone()),
            (Some(p), None) => {
                let mut v = Vec::with_capacity(n);
                v.extend(0..at.start);
                v.extend(p);
                listed = Some(v);
            }
            (Some(p), Some(v)) => v.extend(p),
        }
    }
    let used = match listed {
        None => UsedRows::All(n),
        Some(v) => UsedRows::Listed(v),
    };
    if used.is_empty() {
        return Err(ModelError::NoRows {
            rows: n,
            lost: lost_by_column(spec, &used_vars, y),
            weights: match &spec.weights {
                Some(Var::Numeric { name, values }) => Some((
                    name.clone(),
                    values.iter().filter(|w| w.is_nan() || **w == 0.0).count(),
                )),
                _ => None,
            },
        });
    }
    // Rows of weight 0 are counted apart from those with a missing value.
    let zero_weight = match &spec.weights {
        Some(Var::Numeric { values, .. }) => {
            if values.len() != n {
                return Err(ModelError::LengthMismatch {
                    variable: spec
                        .weights
                        .as_ref()
                        .map(|w| w.name().to_string())
                        .unwrap_or_default(),
                    expected: n,
                    found: values.len(),
                });
            }
            values.iter().filter(|w| **w == 0.0).count()
        }
        _ => 0,
    };
    let mut warnings = Vec::new();
    if used.len() + zero_weight < n {
        warnings.push(ModelWarning::RowsDropped {
            count: n - used.len() - zero_weight,
        });
    }

    // Transform domains.
    for (ti, term) in spec.terms.iter().enumerate() {
        for p in &term.parts {
            // Only the logarithm and the square root have a restricted domain.
            if !matches!(p.transform, Transform::Log | Transform::Sqrt) {
                continue;
            }
            if let Some(Var::Numeric { name, values }) = spec.vars.get(p.var) {
                for i in used.iter() {
                    let x = values.get(i).copied().unwrap_or(f64::NAN);
                    match p.transform {
                        Transform::Log if x <= 0.0 => {
                            return Err(ModelError::LogOfNonPositive {
                                term: Some(ti),
                                variable: name.clone(),
                                row: Some(row_no(i)),
                                value: x,
                            })
                        }
                        Transform::Sqrt if x < 0.0 => {
                            return Err(ModelError::SqrtOfNegative {
                                term: Some(ti),
                                variable: name.clone(),
                                row: Some(row_no(i)),
                                value: x,
                            })
                        }
                        _ => {}
                    }
                }
            }
        }
    }

    // Factor levels, covariate checks.
    let first_term = |v: usize| {
        spec.terms
            .iter()
            .position(|t| t.parts.iter().any(|p| p.var == v))
            .unwrap_or(0)
    };
    let mut factors = Vec::new();
    for &v in &used_vars {
        match spec.vars.get(v) {
            Some(Var::Factor {
                name,
                codes,
                levels,
            }) => {
                let mut has = vec![false; levels.len()];
                let mut missing = levels.len();
                for i in used.iter() {
                    if let Some(c) = codes.get(i).and_then(|c| c.get()) {
                        if let Some(h) = has.get_mut(c as usize).filter(|h| !**h) {
                            *h = true;
                            missing -= 1;
                            if missing == 0 {
                                break;
                            }
                        }
                    }
                }
                let present: Vec<u32> = (0..levels.len())
                    .filter(|&l| has[l])
                    .map(|l| l as u32)
                    .collect();
                for (l, lab) in levels.iter().enumerate() {
                    if !has[l] {
                        warnings.push(ModelWarning::EmptyLevel {
                            term: first_term(v),
                            factor: name.clone(),
                            level: lab.clone(),
                        });
                    }
                }
                if present.len() < 2 {
                    return Err(ModelError::TooFewLevels {
                        term: Some(first_term(v)),
                        factor: name.clone(),
                        levels: present.len(),
                    });
                }
                factors.push(FactorLevels { var: v, present });
            }
            Some(Var::Numeric { name, values }) => {
                let mut distinct: Vec<f64> = Vec::new();
                let mut all_int = true;
                for i in used.iter() {
                    let x = values.get(i).copied().unwrap_or(0.0);
                    if x.fract() != 0.0 {
                        all_int = false;
                    }
                    if distinct.len() <= 6 && !distinct.contains(&x) {
                        distinct.push(x);
                    }
                    // Seven distinct values (more than FEW_DISTINCT): neither check below can
                    // change any more.
                    if distinct.len() > 6 {
                        break;
                    }
                }
                if distinct.len() < 2 {
                    return Err(ModelError::CovariateZeroVariance {
                        term: first_term(v),
                        variable: name.clone(),
                    });
                }
                if all_int && distinct.len() <= FEW_DISTINCT {
                    warnings.push(ModelWarning::FewDistinctValues {
                        term: first_term(v),
                        variable: name.clone(),
                        distinct: distinct.len(),
                    });
                }
            }
            None => {}
        }
    }

    // Marginality: every non-empty strict subset of an interaction's parts should be a term.
    let all_keys: Vec<Vec<PartKey>> = (0..spec.terms.len()).map(|t| term_keys(spec, t)).collect();
    for (ti, keys) in all_keys.iter().enumerate() {
        let k = keys.len();
        if !(2..=MAX_MARGINALITY_PARTS).contains(&k) {
            continue;
        }
        // Visit subsets in order of size, then lexicographically, for deterministic output.
        let mut subsets: Vec<u32> = (1..(1u32 << k) - 1).collect();
        subsets.sort_by_key(|m| (m.count_ones(), *m));
        for mask in subsets {
            let sub: Vec<PartKey> = (0..k)
                .filter(|b| mask & (1 << b) != 0)
                .filter_map(|b| keys.get(b).copied())
                .collect();
            if !all_keys.contains(&sub) {
                // Name the missing term in the written order of the interaction.
                let written: Vec<PartKey> = spec.terms[ti]
                    .parts
                    .iter()
                    .map(|p| (p.var, norm_transform(p.transform)))
                    .filter(|pk| sub.contains(pk))
                    .collect();
                warnings.push(ModelWarning::MarginalityBroken {
                    term: ti,
                    term_name: term_name(spec, ti),
                    missing: keys_name(spec, &written),
                });
            }
        }
    }

    let term_names = (0..spec.terms.len()).map(|t| term_name(spec, t)).collect();
    Ok(Layout {
        used,
        total_rows: n,
        zero_weight,
        factors,
        warnings,
        term_names,
    })
}

/// Whether row `i`, with response `yi`, has a value in the response and in every variable of
/// `used_vars` (a row without one is left out); an infinite value, or a factor code without a
/// level, is an error.
/// For the error of a model with no complete row: each column the model uses (response and
/// its variables `used`) and the number of rows on which it is missing.
fn lost_by_column(spec: &ModelSpec, used: &[usize], y: &[f64]) -> Vec<(String, usize)> {
    let missing = |v: &Var| -> usize {
        match v {
            Var::Numeric { values, .. } => values.iter().filter(|x| x.is_nan()).count(),
            Var::Factor { codes, .. } => codes.iter().filter(|c| c.get().is_none()).count(),
        }
    };
    let mut out = vec![(
        spec.response.name().to_string(),
        y.iter().filter(|x| x.is_nan()).count(),
    )];
    out.extend(
        used.iter()
            .filter_map(|&v| spec.vars.get(v))
            .map(|v| (v.name().to_string(), missing(v))),
    );
    out
}

fn row_complete(
    spec: &ModelSpec,
    used_vars: &[usize],
    i: usize,
    yi: f64,
) -> Result<bool, ModelError> {
    let row_no = |i: usize| spec.row_numbers.get(i).unwrap_or(i);
    if let Some(Var::Numeric { name, values }) = &spec.weights {
        let w = values.get(i).copied().unwrap_or(f64::NAN);
        if w.is_nan() || w == 0.0 {
            return Ok(false);
        }
        if w < 0.0 || !w.is_finite() {
            return Err(ModelError::BadWeight {
                variable: name.clone(),
                row: row_no(i),
                value: w,
            });
        }
    }
    if yi.is_nan() {
        return Ok(false);
    }
    if !yi.is_finite() {
        return Err(ModelError::NonFiniteValue {
            variable: spec.response.name().to_string(),
            row: row_no(i),
        });
    }
    for &v in used_vars {
        match spec.vars.get(v) {
            Some(Var::Numeric { name, values }) => {
                let x = values.get(i).copied().unwrap_or(f64::NAN);
                if x.is_nan() {
                    return Ok(false);
                }
                if !x.is_finite() {
                    return Err(ModelError::NonFiniteValue {
                        variable: name.clone(),
                        row: row_no(i),
                    });
                }
            }
            Some(Var::Factor {
                name,
                codes,
                levels,
            }) => match codes.get(i).and_then(|c| c.get()) {
                None => return Ok(false),
                Some(c) => {
                    if c as usize >= levels.len() {
                        return Err(ModelError::FactorCodeOutOfRange {
                            variable: name.clone(),
                            row: row_no(i),
                        });
                    }
                }
            },
            None => {}
        }
    }
    Ok(true)
}

/// A covariate with at most this many distinct whole-number values draws a warning.
pub(crate) const FEW_DISTINCT: usize = 5;

/// Interactions with more parts than this are not checked for marginality (the number of
/// subsets grows as 2^parts).
const MAX_MARGINALITY_PARTS: usize = 8;

impl Layout {
    pub fn factor(&self, var: usize) -> Option<&FactorLevels> {
        self.factors.iter().find(|f| f.var == var)
    }
}

/// Whether the factor part `var` of term `t` is coded by contrasts.
fn contrast_coded(spec: &ModelSpec, t: usize, var: usize) -> bool {
    let rest: Vec<PartKey> = term_keys(spec, t)
        .into_iter()
        .filter(|k| k.0 != var)
        .collect();
    if rest.is_empty() {
        // A main effect: contrasts when the constant is already in the model, i.e. with an
        // intercept, or (without one) after an earlier factor main effect coded by indicators.
        let earlier_factor_main = (0..t).any(|u| {
            let k = term_keys(spec, u);
            k.len() == 1
                && k.iter()
                    .all(|p| matches!(spec.vars.get(p.0), Some(Var::Factor { .. })))
        });
        return spec.intercept || earlier_factor_main;
    }
    (0..t).any(|u| term_keys(spec, u) == rest)
}

/// For each term with a factor part: whether some factor part is coded by contrasts (its
/// coefficients compare levels with the reference level) and whether some is coded by
/// indicators of all its levels (one coefficient per level, no reference level).
pub(crate) fn factor_codings(spec: &ModelSpec) -> Vec<(usize, bool, bool)> {
    (0..spec.terms.len())
        .filter_map(|t| {
            let factors: Vec<usize> = term_keys(spec, t)
                .into_iter()
                .map(|k| k.0)
                .filter(|&v| matches!(spec.vars.get(v), Some(Var::Factor { .. })))
                .collect();
            if factors.is_empty() {
                return None;
            }
            let contrast = factors.iter().any(|&v| contrast_coded(spec, t, v));
            let indicator = factors.iter().any(|&v| !contrast_coded(spec, t, v));
            Some((t, contrast, indicator))
        })
        .collect()
}

/// The design columns (intercept first, then each term's columns) and, for each term, the
/// indices of its columns; or, when there would be more than `limit` of them, how many there
/// would be (at most `usize::MAX`), found before any is listed: an interaction of many
/// factors can have more columns than memory holds.
pub(crate) fn columns(
    spec: &ModelSpec,
    lay: &Layout,
    scheme: Scheme,
    limit: usize,
) -> Result<(Vec<Column>, Vec<Vec<usize>>), usize> {
    let mut cols = Vec::new();
    if spec.intercept {
        cols.push(Column {
            term: None,
            name: INTERCEPT.to_string(),
            parts: Vec::new(),
        });
    }
    let mut term_cols = Vec::new();
    for (ti, term) in spec.terms.iter().enumerate() {
        // Each part's alternatives: (column part, name piece).
        let mut choices: Vec<Vec<(ColPart, String)>> = Vec::new();
        for p in &term.parts {
            match spec.vars.get(p.var) {
                Some(Var::Numeric { name, .. }) => {
                    choices.push(vec![(
                        ColPart::Numeric {
                            var: p.var,
                            transform: p.transform,
                        },
                        part_name(name, p.transform),
                    )]);
                }
                Some(Var::Factor { name, levels, .. }) => {
                    let present = lay
                        .factor(p.var)
                        .map(|f| f.present.clone())
                        .unwrap_or_default();
                    let label = |c: u32| {
                        format!(
                            "{name} = {}",
                            levels.get(c as usize).cloned().unwrap_or_default()
                        )
                    };
                    let alts: Vec<(ColPart, String)> = if contrast_coded(spec, ti, p.var) {
                        match scheme {
                            Scheme::Treatment => present
                                .iter()
                                .skip(1)
                                .map(|&c| {
                                    (
                                        ColPart::Indicator {
                                            var: p.var,
                                            code: c,
                                        },
                                        label(c),
                                    )
                                })
                                .collect(),
                            Scheme::Effect => {
                                let last = present.last().copied().unwrap_or(0);
                                present
                                    .iter()
                                    .take(present.len().saturating_sub(1))
                                    .map(|&c| {
                                        (
                                            ColPart::Effect {
                                                var: p.var,
                                                code: c,
                                                last,
                                            },
                                            label(c),
                                        )
                                    })
                                    .collect()
                            }
                        }
                    } else {
                        present
                            .iter()
                            .map(|&c| {
                                (
                                    ColPart::Indicator {
                                        var: p.var,
                                        code: c,
                                    },
                                    label(c),
                                )
                            })
                            .collect()
                    };
                    choices.push(alts);
                }
                None => choices.push(Vec::new()),
            }
        }
        // Cartesian product, last part varying fastest (a2:b2, a2:b3, a3:b2, ...).
        let total = choices
            .iter()
            .try_fold(1usize, |all, c| all.checked_mul(c.len()))
            .unwrap_or(usize::MAX);
        let count = cols.len().saturating_add(total);
        if count > limit {
            return Err(count);
        }
        let mut idx = Vec::new();
        for k in 0..total {
            let mut picks: Vec<&(ColPart, String)> = Vec::with_capacity(choices.len());
            let mut rest = k;
            for ch in choices.iter().rev() {
                let len = ch.len().max(1);
                if let Some(c) = ch.get(rest % len) {
                    picks.push(c);
                }
                rest /= len;
            }
            picks.reverse();
            let parts: Vec<ColPart> = picks.iter().map(|c| c.0.clone()).collect();
            let names: Vec<String> = picks.iter().map(|c| c.1.clone()).collect();
            idx.push(cols.len());
            cols.push(Column {
                term: Some(ti),
                name: names.join(" by "),
                parts,
            });
        }
        term_cols.push(idx);
    }
    // A covariate of the user's may itself be called `intercept`: the constant then takes
    // another name, so that no two coefficients share a label (live references find rows by it).
    if spec.intercept && cols.iter().skip(1).any(|c| c.name == INTERCEPT) {
        if let Some(first) = cols.first_mut() {
            first.name = INTERCEPT_RENAMED.to_string();
        }
    }
    Ok((cols, term_cols))
}

/// The label of the constant column, in tables and JSON.
pub(crate) const INTERCEPT: &str = "intercept";

/// The constant column's label when a column of the model is itself named [`INTERCEPT`].
pub(crate) const INTERCEPT_RENAMED: &str = "constant";

/// Value of a column at data row i.
pub(crate) fn eval_row(spec: &ModelSpec, col: &Column, i: usize) -> f64 {
    let mut v = 1.0;
    for p in &col.parts {
        v *= match p {
            ColPart::Numeric { var, transform } => match spec.vars.get(*var) {
                Some(Var::Numeric { values, .. }) => {
                    apply(*transform, values.get(i).copied().unwrap_or(f64::NAN))
                }
                _ => f64::NAN,
            },
            ColPart::Indicator { var, code } => {
                f64::from(u8::from(factor_code(spec, *var, i) == Some(*code)))
            }
            ColPart::Effect { var, code, last } => {
                let c = factor_code(spec, *var, i);
                if c == Some(*code) {
                    1.0
                } else if c == Some(*last) {
                    -1.0
                } else {
                    0.0
                }
            }
        };
    }
    v
}

fn factor_code(spec: &ModelSpec, var: usize, i: usize) -> Option<u32> {
    match spec.vars.get(var) {
        Some(Var::Factor { codes, .. }) => codes.get(i).and_then(|c| c.get()),
        _ => None,
    }
}

/// A point at which to evaluate a design row for adjusted means and slopes: each factor is
/// a weight vector over its codes (one-hot for a fixed level, equal weights to average),
/// each numeric variable has a value.
pub(crate) struct Point {
    /// (var, weights indexed by code).
    pub factor_weights: Vec<(usize, Vec<f64>)>,
    /// (var, value).
    pub numeric: Vec<(usize, f64)>,
    /// When Some(var): differentiate with respect to this numeric variable (identity parts
    /// only; the caller rejects other transforms).
    pub derivative: Option<usize>,
}
