//! Adjusted (least-squares) means, their pairwise comparisons and contrasts
//! (Searle, Speed & Milliken 1980, "Population marginal means in the linear model",
//! The American Statistician 34). Tukey-Kramer limits: Kramer 1956, Biometrics 12;
//! Holm 1979, Scand. J. Statistics 6; Sidak 1967, JASA 62.

use super::cause::{cell_name, empty_cells};
use super::design::{self, Point};
use super::fit::{check_level, t_p, t_quantile, Fit};
use super::{Adjust, AdjustedMean, Contrast, ModelError, Pair, Transform, Var};
use crate::stats::tukey::{ptukey_upper, qtukey};

/// Weights whose sum is within this of 0 (relative to the sum of their absolute values)
/// count as summing to zero; typed decimals like 1/3 do not add up exactly.
const WEIGHT_SUM_TOL: f64 = 1e-9;

/// A level's label, code and row (see [`Fit::row_at`]).
type LevelRow = (String, u32, Vec<f64>);

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
        let levels = match self.spec.vars.get(v) {
            Some(Var::Factor { levels, .. }) => levels.clone(),
            _ => Vec::new(),
        };
        let present = self
            .lay
            .factor(v)
            .map(|f| f.present.clone())
            .unwrap_or_default();
        if present.len() < 2 {
            return Err(ModelError::TooFewLevels {
                term: None,
                factor: factor.to_string(),
                levels: present.len(),
            });
        }
        Ok((
            v,
            present
                .iter()
                .map(|&c| {
                    let pt = self.point(v, Some(c), numeric.clone(), None);
                    (
                        levels.get(c as usize).cloned().unwrap_or_default(),
                        c,
                        self.row_at(&pt),
                    )
                })
                .collect(),
        ))
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
    /// order) with the chosen multiplicity adjustment. A difference the design does not
    /// determine comes with NaN numbers and the reason, and is not counted among the
    /// comparisons the adjustment is for.
    pub fn pairs(
        &self,
        factor: &str,
        at: &[(String, f64)],
        adjust: Adjust,
        level: f64,
    ) -> Result<Vec<Pair>, ModelError> {
        check_level(level)?;
        let (v, rows) = self.level_rows(factor, at)?;
        let k = rows.len();
        super::check_pairs(factor, k)?;
        let m = k * k.saturating_sub(1) / 2;
        let df = self.df_res;
        let alpha = 1.0 - level;
        let mut out = Vec::with_capacity(m);
        let mut raw = Vec::with_capacity(m);
        for i in 0..k {
            for j in (i + 1)..k {
                let (Some((li, ci, ri)), Some((lj, cj, rj))) = (rows.get(i), rows.get(j)) else {
                    continue;
                };
                let d: Vec<f64> = ri.iter().zip(rj).map(|(a, b)| a - b).collect();
                let Ok((est, se)) = self.linear(&d) else {
                    out.push(Pair {
                        first: li.clone(),
                        second: lj.clone(),
                        estimate: f64::NAN,
                        se: f64::NAN,
                        t: f64::NAN,
                        df,
                        p: f64::NAN,
                        lower: None,
                        upper: None,
                        not_estimable: Some(self.why_not(v, &[*ci, *cj])),
                    });
                    raw.push(f64::NAN);
                    continue;
                };
                let t = if self.exact { f64::NAN } else { est / se };
                let p = t_p(t, df);
                raw.push(p);
                out.push(Pair {
                    first: li.clone(),
                    second: lj.clone(),
                    estimate: est,
                    se,
                    t,
                    df,
                    p,
                    lower: None,
                    upper: None,
                    not_estimable: None,
                });
            }
        }
        // The adjustment is for the comparisons that can be made.
        let mf = out
            .iter()
            .filter(|q| q.not_estimable.is_none())
            .count()
            .max(1) as f64;
        let half_width = |crit: f64, se: f64| crit * se;
        let mut out_na: Vec<Pair> = Vec::new();
        let mut slots: Vec<Option<usize>> = Vec::with_capacity(out.len());
        let mut kept: Vec<Pair> = Vec::new();
        let mut kept_raw: Vec<f64> = Vec::new();
        for (q, r) in out.into_iter().zip(raw) {
            if q.not_estimable.is_some() {
                slots.push(None);
                out_na.push(q);
            } else {
                slots.push(Some(kept.len()));
                kept.push(q);
                kept_raw.push(r);
            }
        }
        let (mut out, raw) = (kept, kept_raw);
        // The studentized range is over the levels the estimable differences compare.
        let mut compared: Vec<&str> = Vec::new();
        for q in &out {
            for l in [q.first.as_str(), q.second.as_str()] {
                if !compared.contains(&l) {
                    compared.push(l);
                }
            }
        }
        let k = compared.len().max(2);
        match adjust {
            Adjust::None => {
                let c = t_quantile(1.0 - alpha / 2.0, df);
                for q in &mut out {
                    q.lower = Some(q.estimate - half_width(c, q.se));
                    q.upper = Some(q.estimate + half_width(c, q.se));
                }
            }
            Adjust::Bonferroni => {
                let c = t_quantile(1.0 - alpha / (2.0 * mf), df);
                for q in &mut out {
                    q.p = (q.p * mf).min(1.0);
                    q.lower = Some(q.estimate - half_width(c, q.se));
                    q.upper = Some(q.estimate + half_width(c, q.se));
                }
            }
            Adjust::Sidak => {
                let c = t_quantile(1.0 - (1.0 - level.powf(1.0 / mf)) / 2.0, df);
                for q in &mut out {
                    // 1 - (1 - p)^m, computed without cancellation for small p.
                    q.p = (-((mf) * (-q.p).ln_1p()).exp_m1()).clamp(0.0, 1.0);
                    q.lower = Some(q.estimate - half_width(c, q.se));
                    q.upper = Some(q.estimate + half_width(c, q.se));
                }
            }
            Adjust::Holm => {
                let mut order: Vec<usize> = (0..out.len()).collect();
                order.sort_by(|&a, &b| raw[a].total_cmp(&raw[b]).then(a.cmp(&b)));
                let mut running: f64 = 0.0;
                for (rank, &idx) in order.iter().enumerate() {
                    let adj = ((mf - rank as f64) * raw[idx]).min(1.0);
                    running = running.max(adj);
                    if let Some(q) = out.get_mut(idx) {
                        q.p = running;
                    }
                }
            }
            Adjust::Tukey => {
                let c = qtukey(level, k, df as f64) / std::f64::consts::SQRT_2;
                for q in &mut out {
                    q.p = ptukey_upper(q.t.abs() * std::f64::consts::SQRT_2, k, df as f64)
                        .clamp(0.0, 1.0);
                    q.lower = Some(q.estimate - half_width(c, q.se));
                    q.upper = Some(q.estimate + half_width(c, q.se));
                }
            }
        }
        let mut done: Vec<Option<Pair>> = out.into_iter().map(Some).collect();
        let mut na = out_na.into_iter();
        Ok(slots
            .into_iter()
            .filter_map(|s| match s {
                Some(i) => done.get_mut(i).and_then(Option::take),
                None => na.next(),
            })
            .collect())
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
