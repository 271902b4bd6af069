//! Adjusted (least-squares) means, their pairwise comparisons and contrasts
//! (Searle, Speed & Milliken 1980, "Population marginal means in the linear model",
//! The American Statistician 34). Tukey-Kramer limits: Kramer 1956, Biometrics 12;
//! Holm 1979, Scand. J. Statistics 6; Sidak 1967, JASA 62.

use super::cause::{cell_name, empty_cells};
use super::design::{self, Point};
use super::fit::{check_level, t_p, t_quantile, Fit};
use super::{Adjust, AdjustedMean, CellMean, Contrast, ModelError, Pair, Side, Transform, Var};
use crate::stats::mvt::MaxT;
use crate::stats::tukey::{ptukey_upper, qtukey};

/// Weights whose sum is within this of 0 (relative to the sum of their absolute values)
/// count as summing to zero; typed decimals like 1/3 do not add up exactly.
const WEIGHT_SUM_TOL: f64 = 1e-9;

/// A level's label, code and row (see [`Fit::row_at`]).
type LevelRow = (String, u32, Vec<f64>);

/// The reason a difference inside one level of another factor is not estimable.
const UNDETERMINED_CELL: &str =
    "a cell it compares has no rows, and the model lets the effect differ between cells";

/// The p of a t statistic: two-sided, or the upper (above) or lower (below) tail.
fn one_p(t: f64, df: usize, side: Side) -> f64 {
    let two = t_p(t, df);
    match side {
        Side::Both => two,
        Side::Above if t > 0.0 => two / 2.0,
        Side::Above => 1.0 - two / 2.0,
        Side::Below if t < 0.0 => two / 2.0,
        Side::Below => 1.0 - two / 2.0,
    }
}

/// Holds factor `v` of a point at level `code` (weight 1 there, 0 elsewhere).
fn fix_level(pt: &mut Point, v: usize, code: u32) {
    for (fv, w) in pt.factor_weights.iter_mut() {
        if *fv == v {
            for (c, x) in w.iter_mut().enumerate() {
                *x = if c == code as usize { 1.0 } else { 0.0 };
            }
        }
    }
}

/// Empty cells named at most in the reason a mean or difference is not estimable.
const MAX_CELLS_SHOWN: usize = 4;

/// The reason a quantity is not estimable when no empty cell explains it.
pub(crate) const UNDETERMINED: &str =
    "it depends on coefficients that these data do not determine (aliased columns)";

impl Fit {
    /// The variable index of a factor of the model, or the reason it is not one.
    pub(crate) fn model_factor(&self, factor: &str) -> Result<usize, ModelError> {
        let v = self
            .spec
            .vars
            .iter()
            .position(|x| x.name() == factor)
            .ok_or_else(|| ModelError::UnknownVariable {
                name: factor.to_string(),
            })?;
        match self.spec.vars.get(v) {
            Some(Var::Factor { .. }) => {}
            _ => {
                return Err(ModelError::NotAFactor {
                    name: factor.to_string(),
                    factors: self.other_factors(""),
                })
            }
        }
        if self.lay.factor(v).is_none() {
            return Err(ModelError::FactorNotInModel {
                factor: factor.to_string(),
            });
        }
        Ok(v)
    }

    /// Numeric values for a point: the given values, else the means over the fitted rows.
    /// Checks that every given name is a covariate of the model and that its transforms are
    /// defined there.
    pub(crate) fn covariate_values(
        &self,
        at: &[(String, f64)],
    ) -> Result<Vec<(usize, f64)>, ModelError> {
        for (name, _) in at {
            let known = self
                .cov_means
                .iter()
                .any(|(v, _)| self.spec.vars.get(*v).map(|x| x.name()) == Some(name.as_str()));
            if !known {
                return Err(ModelError::CovariateNotInModel { name: name.clone() });
            }
        }
        let mut out = Vec::new();
        for &(v, m) in &self.cov_means {
            let name = design::var_name(&self.spec, v);
            let x = at
                .iter()
                .rev()
                .find(|(n, _)| *n == name)
                .map(|(_, x)| *x)
                .unwrap_or(m);
            for (ti, t) in self.spec.terms.iter().enumerate() {
                for p in t.parts.iter().filter(|p| p.var == v) {
                    match p.transform {
                        Transform::Log if x.is_nan() || x <= 0.0 => {
                            return Err(ModelError::LogOfNonPositive {
                                term: Some(ti),
                                variable: name,
                                row: None,
                                value: x,
                            })
                        }
                        Transform::Sqrt if x.is_nan() || x < 0.0 => {
                            return Err(ModelError::SqrtOfNegative {
                                term: Some(ti),
                                variable: name,
                                row: None,
                                value: x,
                            })
                        }
                        _ => {}
                    }
                }
            }
            out.push((v, x));
        }
        Ok(out)
    }

    /// A point with factor `focal` at level `code` (or averaged when None), other factors
    /// averaged with equal weights over their levels in the model.
    pub(crate) fn point(
        &self,
        focal: usize,
        code: Option<u32>,
        numeric: Vec<(usize, f64)>,
        derivative: Option<usize>,
    ) -> Point {
        let mut factor_weights = Vec::new();
        for f in &self.lay.factors {
            let nlev = match self.spec.vars.get(f.var) {
                Some(Var::Factor { levels, .. }) => levels.len(),
                _ => 0,
            };
            let mut w = vec![0.0; nlev];
            match code {
                Some(c) if f.var == focal => {
                    if let Some(x) = w.get_mut(c as usize) {
                        *x = 1.0;
                    }
                }
                _ => {
                    let k = f.present.len() as f64;
                    for &c in &f.present {
                        if let Some(x) = w.get_mut(c as usize) {
                            *x = 1.0 / k;
                        }
                    }
                }
            }
            factor_weights.push((f.var, w));
        }
        Point {
            factor_weights,
            numeric,
            derivative,
        }
    }

    /// The model's value at a point as a linear function of the fit: its row in the fit's
    /// own coordinates (the centred, scaled monomials), for [`Fit::linear`]. Rows of
    /// several points combine linearly (differences, contrasts).
    pub(crate) fn row_at(&self, pt: &Point) -> Vec<f64> {
        self.eng.basis.at_point(pt)
    }

    /// Why adjusted means of `levels` of factor `f` (or their differences) are not
    /// estimable: the cells of `f` with a factor it shares a term with that have no rows,
    /// or aliased columns in general.
    pub(crate) fn why_not(&self, f: usize, levels: &[u32]) -> String {
        let mut named: Vec<String> = Vec::new();
        for term in &self.spec.terms {
            let factors: Vec<usize> = term
                .parts
                .iter()
                .map(|p| p.var)
                .filter(|&v| matches!(self.spec.vars.get(v), Some(Var::Factor { .. })))
                .collect();
            let Some(pos) = factors.iter().position(|&v| v == f) else {
                continue;
            };
            if factors.len() < 2 {
                continue;
            }
            for cell in empty_cells(&self.spec, &self.lay, &factors) {
                if cell.get(pos).is_some_and(|c| levels.contains(c)) {
                    let name = cell_name(&self.spec, &factors, &cell);
                    if !named.contains(&name) {
                        named.push(name);
                    }
                }
            }
        }
        match named.len() {
            0 => UNDETERMINED.to_string(),
            1 => format!(
                "the cell {} has no rows, and the model lets the effect of {} differ between cells",
                named[0],
                design::var_name(&self.spec, f)
            ),
            k => {
                let shown: Vec<String> = named.iter().take(MAX_CELLS_SHOWN).cloned().collect();
                let more = k.saturating_sub(MAX_CELLS_SHOWN);
                format!(
                    "the cells {}{} have no rows, and the model lets the effect of {} differ between cells",
                    shown.join(", "),
                    if more > 0 { format!(" (and {more} more)") } else { String::new() },
                    design::var_name(&self.spec, f)
                )
            }
        }
    }

    /// Level labels, codes and rows (see [`Fit::row_at`]) for the adjusted mean of each level
    /// of `factor`.
    fn level_rows(
        &self,
        factor: &str,
        at: &[(String, f64)],
    ) -> Result<(usize, Vec<LevelRow>), ModelError> {
        let v = self.model_factor(factor)?;
        let numeric = self.covariate_values(at)?;
        Ok((v, self.rows_of_levels(v, &numeric, &[])?))
    }

    /// Adjusted means of each level of `factor` (levels with rows, declared order), other
    /// factors averaged with equal weights, covariates at `at` or at their means. A level
    /// whose mean the design does not determine (an empty cell it averages over) comes with
    /// NaN numbers and the reason.
    pub fn means(
        &self,
        factor: &str,
        at: &[(String, f64)],
        level: f64,
    ) -> Result<Vec<AdjustedMean>, ModelError> {
        check_level(level)?;
        let (v, rows) = self.level_rows(factor, at)?;
        let tq = t_quantile(0.5 + level / 2.0, self.df_res);
        Ok(rows
            .into_iter()
            .map(|(lab, code, l)| match self.linear(&l) {
                Ok((m, se)) => AdjustedMean {
                    level: lab,
                    mean: m,
                    se,
                    df: self.df_res,
                    lower: m - tq * se,
                    upper: m + tq * se,
                    not_estimable: None,
                },
                Err(()) => AdjustedMean {
                    level: lab,
                    mean: f64::NAN,
                    se: f64::NAN,
                    df: self.df_res,
                    lower: f64::NAN,
                    upper: f64::NAN,
                    not_estimable: Some(self.why_not(v, &[code])),
                },
            })
            .collect())
    }

    /// Every pairwise difference of adjusted means (first minus second, levels i < j in
    /// order) with the chosen multiplicity adjustment: [`Fit::differences`] without `within`
    /// or a control.
    pub fn pairs(
        &self,
        factor: &str,
        at: &[(String, f64)],
        adjust: Adjust,
        level: f64,
    ) -> Result<Vec<Pair>, ModelError> {
        self.differences(factor, None, at, adjust, None, level)
    }

    /// Differences of adjusted means of `factor`: every pair (first minus second, levels
    /// i < j in order), or with `versus` every other level minus the control. With `within`,
    /// the levels of `factor` are compared inside each level of that factor (cell means),
    /// and the adjustment is made within each level. A difference the design does not
    /// determine comes with NaN numbers and the reason, and is not counted among the
    /// comparisons the adjustment is for.
    pub fn differences(
        &self,
        factor: &str,
        within: Option<&str>,
        at: &[(String, f64)],
        adjust: Adjust,
        versus: Option<(&str, Side)>,
        level: f64,
    ) -> Result<Vec<Pair>, ModelError> {
        check_level(level)?;
        let v = self.model_factor(factor)?;
        let numeric = self.covariate_values(at)?;
        let groups: Vec<Option<(String, usize, u32)>> = match within {
            None => vec![None],
            Some(b) => {
                let bv = self.model_factor(b)?;
                if bv == v {
                    return Err(ModelError::WithinSameFactor {
                        factor: factor.to_string(),
                    });
                }
                let labels = match self.spec.vars.get(bv) {
                    Some(Var::Factor { levels, .. }) => levels.clone(),
                    _ => Vec::new(),
                };
                self.lay
                    .factor(bv)
                    .map(|f| f.present.clone())
                    .unwrap_or_default()
                    .into_iter()
                    .map(|c| Some((labels.get(c as usize).cloned().unwrap_or_default(), bv, c)))
                    .collect()
            }
        };
        let mut out = Vec::new();
        for g in groups {
            let fixed: Vec<(usize, u32)> = g.iter().map(|(_, bv, c)| (*bv, *c)).collect();
            let rows = self.rows_of_levels(v, &numeric, &fixed)?;
            let family: Vec<(usize, usize)> = match versus {
                None => {
                    super::check_pairs(factor, rows.len())?;
                    (0..rows.len())
                        .flat_map(|i| ((i + 1)..rows.len()).map(move |j| (i, j)))
                        .collect()
                }
                Some((control, _)) => {
                    let c = rows.iter().position(|r| r.0 == control).ok_or_else(|| {
                        ModelError::UnknownControl {
                            factor: factor.to_string(),
                            level: control.to_string(),
                        }
                    })?;
                    (0..rows.len())
                        .filter(|&j| j != c)
                        .map(|j| (j, c))
                        .collect()
                }
            };
            let side = versus.map_or(Side::Both, |(_, s)| s);
            let mut part = self.family(v, &rows, &family, adjust, side, level, &fixed);
            for p in &mut part {
                p.within = g.as_ref().map(|x| x.0.clone());
            }
            out.extend(part);
        }
        Ok(out)
    }

    /// Adjusted cell means of every combination of the levels of `first` and `second`
    /// (levels with rows, declared order, `second` varying fastest), other factors averaged
    /// with equal weights, covariates at `at` or at their means; with the number of fitted
    /// rows in each cell.
    pub fn cell_means(
        &self,
        first: &str,
        second: &str,
        at: &[(String, f64)],
        level: f64,
    ) -> Result<Vec<CellMean>, ModelError> {
        check_level(level)?;
        let a = self.model_factor(first)?;
        let b = self.model_factor(second)?;
        if a == b {
            return Err(ModelError::WithinSameFactor {
                factor: first.to_string(),
            });
        }
        let numeric = self.covariate_values(at)?;
        let tq = t_quantile(0.5 + level / 2.0, self.df_res);
        let (la, ca) = self.labels_present(a);
        let (lb, cb) = self.labels_present(b);
        let codes = |v: usize| match self.spec.vars.get(v) {
            Some(Var::Factor { codes, .. }) => Some(codes.clone()),
            _ => None,
        };
        let (Some(codes_a), Some(codes_b)) = (codes(a), codes(b)) else {
            return Ok(Vec::new());
        };
        let mut counts = vec![0usize; la.len() * lb.len()];
        for i in self.lay.used.iter() {
            let (Some(x), Some(y)) = (
                codes_a.get(i).and_then(|c| c.get()),
                codes_b.get(i).and_then(|c| c.get()),
            ) else {
                continue;
            };
            if let Some(n) = counts.get_mut(x as usize * lb.len() + y as usize) {
                *n += 1;
            }
        }
        let mut out = Vec::new();
        for &x in &ca {
            for &y in &cb {
                let mut pt = self.point(a, Some(x), numeric.clone(), None);
                fix_level(&mut pt, b, y);
                let l = self.row_at(&pt);
                let rows = counts
                    .get(x as usize * lb.len() + y as usize)
                    .copied()
                    .unwrap_or(0);
                let name = |v: &[String], c: u32| v.get(c as usize).cloned().unwrap_or_default();
                out.push(match self.linear(&l) {
                    Ok((m, se)) => CellMean {
                        first: name(&la, x),
                        second: name(&lb, y),
                        rows,
                        mean: m,
                        se,
                        df: self.df_res,
                        lower: m - tq * se,
                        upper: m + tq * se,
                        not_estimable: None,
                    },
                    Err(()) => CellMean {
                        first: name(&la, x),
                        second: name(&lb, y),
                        rows,
                        mean: f64::NAN,
                        se: f64::NAN,
                        df: self.df_res,
                        lower: f64::NAN,
                        upper: f64::NAN,
                        not_estimable: Some(self.why_not(a, &[x])),
                    },
                });
            }
        }
        Ok(out)
    }

    /// A factor's level labels and the codes of its levels with rows.
    fn labels_present(&self, v: usize) -> (Vec<String>, Vec<u32>) {
        let labels = match self.spec.vars.get(v) {
            Some(Var::Factor { levels, .. }) => levels.clone(),
            _ => Vec::new(),
        };
        let present = self
            .lay
            .factor(v)
            .map(|f| f.present.clone())
            .unwrap_or_default();
        (labels, present)
    }

    /// Level rows (see [`Fit::row_at`]) of factor `v` with the factors in `fixed` held at
    /// their levels.
    fn rows_of_levels(
        &self,
        v: usize,
        numeric: &[(usize, f64)],
        fixed: &[(usize, u32)],
    ) -> Result<Vec<LevelRow>, ModelError> {
        let (labels, present) = self.labels_present(v);
        if present.len() < 2 {
            return Err(ModelError::TooFewLevels {
                term: None,
                factor: design::var_name(&self.spec, v),
                levels: present.len(),
            });
        }
        Ok(present
            .iter()
            .map(|&c| {
                let mut pt = self.point(v, Some(c), numeric.to_vec(), None);
                for &(fv, fc) in fixed {
                    fix_level(&mut pt, fv, fc);
                }
                (
                    labels.get(c as usize).cloned().unwrap_or_default(),
                    c,
                    self.row_at(&pt),
                )
            })
            .collect())
    }

    /// The differences rows[i] - rows[j] for each (i, j) of `family`, adjusted together.
    #[allow(clippy::too_many_arguments)]
    fn family(
        &self,
        v: usize,
        rows: &[LevelRow],
        family: &[(usize, usize)],
        adjust: Adjust,
        side: Side,
        level: f64,
        fixed: &[(usize, u32)],
    ) -> Vec<Pair> {
        let df = self.df_res;
        let alpha = 1.0 - level;
        let mut out: Vec<Pair> = Vec::with_capacity(family.len());
        let mut spreads: Vec<Option<Vec<f64>>> = Vec::with_capacity(family.len());
        for &(i, j) in family {
            let (Some((li, ci, ri)), Some((lj, cj, rj))) = (rows.get(i), rows.get(j)) else {
                continue;
            };
            let d: Vec<f64> = ri.iter().zip(rj).map(|(a, b)| a - b).collect();
            let mut pair = Pair {
                within: None,
                p_error: 0.0,
                first: li.clone(),
                second: lj.clone(),
                estimate: f64::NAN,
                se: f64::NAN,
                t: f64::NAN,
                df,
                p: f64::NAN,
                lower: None,
                upper: None,
                not_estimable: None,
            };
            match self.linear_parts(&d) {
                Ok((est, w)) => {
                    let se = w.iter().map(|x| x * x).sum::<f64>().sqrt();
                    let t = if self.exact { f64::NAN } else { est / se };
                    pair.estimate = est;
                    pair.se = se;
                    pair.t = t;
                    pair.p = one_p(t, df, side);
                    spreads.push(Some(w));
                }
                Err(()) => {
                    let why = if fixed.is_empty() {
                        self.why_not(v, &[*ci, *cj])
                    } else {
                        UNDETERMINED_CELL.to_string()
                    };
                    pair.not_estimable = Some(why);
                    spreads.push(None);
                }
            }
            out.push(pair);
        }
        // The adjustment is for the comparisons that can be made.
        let made: Vec<usize> = (0..out.len())
            .filter(|&i| out[i].not_estimable.is_none())
            .collect();
        let mf = made.len().max(1) as f64;
        let sides = if side == Side::Both { 2.0 } else { 1.0 };
        let set_limits = |q: &mut Pair, crit: f64| {
            let h = crit * q.se;
            q.lower = (side != Side::Below).then_some(q.estimate - h);
            q.upper = (side != Side::Above).then_some(q.estimate + h);
        };
        match adjust {
            Adjust::None => {
                let c = t_quantile(1.0 - alpha / sides, df);
                for &i in &made {
                    set_limits(&mut out[i], c);
                }
            }
            Adjust::Bonferroni => {
                let c = t_quantile(1.0 - alpha / (sides * mf), df);
                for &i in &made {
                    out[i].p = (out[i].p * mf).min(1.0);
                    set_limits(&mut out[i], c);
                }
            }
            Adjust::Sidak => {
                let c = t_quantile(1.0 - (1.0 - level.powf(1.0 / mf)) / sides, df);
                for &i in &made {
                    // 1 - (1 - p)^m, computed without cancellation for small p.
                    out[i].p = (-(mf * (-out[i].p).ln_1p()).exp_m1()).clamp(0.0, 1.0);
                    set_limits(&mut out[i], c);
                }
            }
            Adjust::Holm => {
                let mut order: Vec<usize> = made.clone();
                order.sort_by(|&a, &b| out[a].p.total_cmp(&out[b].p).then(a.cmp(&b)));
                let mut running: f64 = 0.0;
                for (rank, &idx) in order.iter().enumerate() {
                    let adj = ((mf - rank as f64) * out[idx].p).min(1.0);
                    running = running.max(adj);
                    out[idx].p = running;
                }
            }
            Adjust::Tukey => {
                // The studentized range is over the levels the estimable differences compare.
                let mut compared: Vec<&str> = Vec::new();
                for &i in &made {
                    for l in [out[i].first.as_str(), out[i].second.as_str()] {
                        if !compared.contains(&l) {
                            compared.push(l);
                        }
                    }
                }
                let k = compared.len().max(2);
                let c = qtukey(level, k, df as f64) / std::f64::consts::SQRT_2;
                for &i in &made {
                    let q = &mut out[i];
                    q.p = ptukey_upper(q.t.abs() * std::f64::consts::SQRT_2, k, df as f64)
                        .clamp(0.0, 1.0);
                    set_limits(q, c);
                }
            }
            Adjust::Dunnett => {
                let ws: Vec<&Vec<f64>> = made
                    .iter()
                    .filter_map(|&i| spreads.get(i).and_then(|s| s.as_ref()))
                    .collect();
                let defined = ws.iter().all(|w| w.iter().any(|x| *x != 0.0))
                    && made.iter().all(|&i| out[i].t.is_finite());
                if made.is_empty() {
                    return out;
                }
                if !defined {
                    // An exact fit: every SE is 0, so the correlations are 0/0 but the
                    // simultaneous limits are the estimates themselves, as with the other
                    // corrections (c times an SE of 0); p stays undefined.
                    if made.iter().all(|&i| out[i].se == 0.0) {
                        for &i in &made {
                            set_limits(&mut out[i], 0.0);
                        }
                    }
                    return out;
                }
                let norm = |w: &Vec<f64>| w.iter().map(|x| x * x).sum::<f64>().sqrt();
                let corr: Vec<Vec<f64>> = ws
                    .iter()
                    .map(|a| {
                        ws.iter()
                            .map(|b| {
                                a.iter().zip(b.iter()).map(|(x, y)| x * y).sum::<f64>()
                                    / (norm(a) * norm(b))
                            })
                            .collect()
                    })
                    .collect();
                let mut dist = MaxT::new(&corr, df as f64, side == Side::Both);
                let (c, _) = dist.quantile(level);
                for &i in &made {
                    let q = &mut out[i];
                    let signed = if side == Side::Below { -q.t } else { q.t };
                    let e = dist.p_value(signed);
                    q.p = e.value;
                    q.p_error = e.error;
                    set_limits(q, c);
                }
            }
        }
        out
    }
    /// A contrast sum_i w_i * mean_i of the adjusted means of `factor` (one weight per level
    /// with rows, in declared order).
    pub fn contrast(
        &self,
        factor: &str,
        weights: &[f64],
        at: &[(String, f64)],
        level: f64,
    ) -> Result<Contrast, ModelError> {
        check_level(level)?;
        let (v, rows) = self.level_rows(factor, at)?;
        if weights.len() != rows.len() {
            return Err(ModelError::WeightsLength {
                expected: rows.len(),
                found: weights.len(),
            });
        }
        let q = self.eng.basis.monos.len();
        let mut l = vec![0.0; q];
        for ((_, _, r), w) in rows.iter().zip(weights) {
            for (a, b) in l.iter_mut().zip(r) {
                *a += w * b;
            }
        }
        let (est, se) = self.linear(&l).map_err(|_| {
            let used: Vec<u32> = rows
                .iter()
                .zip(weights)
                .filter(|(_, w)| **w != 0.0)
                .map(|((_, c, _), _)| *c)
                .collect();
            ModelError::NotEstimable {
                what: format!("this contrast of {factor}"),
                why: self.why_not(v, &used),
            }
        })?;
        let t = if self.exact { f64::NAN } else { est / se };
        let tq = t_quantile(0.5 + level / 2.0, self.df_res);
        let sum: f64 = weights.iter().sum();
        let abs: f64 = weights.iter().map(|w| w.abs()).sum();
        Ok(Contrast {
            estimate: est,
            se,
            t,
            df: self.df_res,
            p: t_p(t, self.df_res),
            lower: est - tq * se,
            upper: est + tq * se,
            weights_sum_to_zero: sum.abs() <= WEIGHT_SUM_TOL * abs.max(f64::MIN_POSITIVE),
        })
    }
}
