//! Slopes of a covariate within the levels of a factor, the test of equal slopes, and
//! Johnson-Neyman regions of significance (Johnson & Neyman 1936, "Tests of certain linear
//! hypotheses and their application to some educational problems", Statistical Research
//! Memoirs 1; general form: Potthoff 1964, "On the Johnson-Neyman technique and some
//! extensions thereof", Psychometrika 29).

use std::sync::Arc;

use super::cause::covariate_within_levels;
use super::design::term_keys;
use super::fit::{check_level, f_p, fit_owned, t_p, t_quantile, Fit};
use super::qr;
use super::{
    AliasCause, ModelError, ModelSpec, Part, Region, RegionKind, Slope, Slopes, TermSpec,
    Transform, Var,
};

/// When |A| (the x^2 coefficient of the Johnson-Neyman quadratic) is below this fraction of
/// the size of its two parts, the quadratic is treated as linear: A is then the difference
/// of two nearly equal numbers and its sign is rounding noise.
const QUADRATIC_DEGENERATE: f64 = 1e-12;

impl Fit {
    /// The numeric covariate meant by `covariate` (None: the only one), checked to enter
    /// the model untransformed.
    fn slope_covariate(&self, covariate: Option<&str>) -> Result<usize, ModelError> {
        let v = match covariate {
            Some(name) => self
                .cov_means
                .iter()
                .map(|(v, _)| *v)
                .find(|v| self.spec.vars.get(*v).map(|x| x.name()) == Some(name))
                .ok_or_else(|| ModelError::NoSuchCovariate {
                    name: name.to_string(),
                    covariates: self.covariate_means().into_iter().map(|(n, _)| n).collect(),
                })?,
            None => match self.cov_means.as_slice() {
                [] => return Err(ModelError::NoCovariate),
                [(v, _)] => *v,
                many => {
                    return Err(ModelError::AmbiguousCovariate {
                        candidates: many
                            .iter()
                            .map(|(v, _)| super::design::var_name(&self.spec, *v))
                            .collect(),
                    })
                }
            },
        };
        let nonlinear = self
            .spec
            .terms
            .iter()
            .flat_map(|t| t.parts.iter())
            .any(|p| {
                p.var == v && !matches!(p.transform, Transform::Identity | Transform::Power(1))
            });
        if nonlinear {
            return Err(ModelError::NonlinearCovariate {
                covariate: super::design::var_name(&self.spec, v),
            });
        }
        Ok(v)
    }

    /// This fit if it has the factor-by-covariate term; else one of `known` that is this
    /// model with that term appended (same data, terms in the same order), so no new pass
    /// over the rows is made; else a refit with the term appended.
    fn with_interaction<'a>(
        &'a self,
        f: usize,
        x: usize,
        known: &[&'a Fit],
    ) -> Result<Refit<'a>, ModelError> {
        let mut want = vec![(f, Transform::Identity), (x, Transform::Identity)];
        want.sort();
        if (0..self.spec.terms.len()).any(|t| term_keys(&self.spec, t) == want) {
            return Ok(Refit::Same(self));
        }
        let term = TermSpec {
            parts: vec![
                Part {
                    var: f,
                    transform: Transform::Identity,
                },
                Part {
                    var: x,
                    transform: Transform::Identity,
                },
            ],
        };
        if let Some(k) = known
            .iter()
            .find(|k| extends_by(&k.spec, &self.spec, &term))
        {
            return Ok(Refit::Known(k));
        }
        let mut spec = self.spec.clone();
        spec.terms.push(term);
        Ok(Refit::New(Box::new(fit_owned(spec)?)))
    }

    /// Slope of the covariate within each level of `factor`, from a model with the
    /// factor-by-covariate term (refitted with it when absent), and the F test that the
    /// slopes shown are equal (see [`Fit::equal_slopes_f`]).
    pub fn slopes(
        &self,
        covariate: Option<&str>,
        factor: &str,
        level: f64,
    ) -> Result<Slopes, ModelError> {
        self.slopes_among(covariate, factor, level, &[])
    }

    /// [`Fit::slopes`], taking the model with the interaction from `known` when one of
    /// them is exactly that model (the session passes its fitted models).
    pub fn slopes_among(
        &self,
        covariate: Option<&str>,
        factor: &str,
        level: f64,
        known: &[&Fit],
    ) -> Result<Slopes, ModelError> {
        check_level(level)?;
        let f = self.model_factor(factor)?;
        let x = self.slope_covariate(covariate)?;
        let refit = self.with_interaction(f, x, known)?;
        let refitted = !matches!(refit, Refit::Same(_));
        let m: &Fit = refit.fit();
        let numeric = m.covariate_values(&[])?;
        let levels = match m.spec.vars.get(f) {
            Some(Var::Factor { levels, .. }) => levels.clone(),
            _ => Vec::new(),
        };
        let present = m
            .lay
            .factor(f)
            .map(|x| x.present.clone())
            .unwrap_or_default();
        let df = m.df_res;
        let tq = t_quantile(0.5 + level / 2.0, df);
        let mut rows = Vec::new();
        let mut slope_rows = Vec::new();
        let mut first_missing: Option<ModelError> = None;
        for &c in &present {
            let lab = levels.get(c as usize).cloned().unwrap_or_default();
            let pt = m.point(f, Some(c), numeric.clone(), Some(x));
            let l = m.row_at(&pt);
            // A level whose slope the design does not determine (the covariate takes one
            // value there) is shown as such, as adjusted means are, and the others stand.
            let Ok((s, se)) = m.linear(&l) else {
                let why = slope_why_not(m, f, x, c);
                if first_missing.is_none() {
                    first_missing = Some(ModelError::NotEstimable {
                        what: format!("the slope within {factor} = {lab}"),
                        why: why.clone(),
                    });
                }
                rows.push(Slope {
                    level: lab,
                    slope: f64::NAN,
                    se: f64::NAN,
                    t: f64::NAN,
                    df,
                    p: f64::NAN,
                    lower: f64::NAN,
                    upper: f64::NAN,
                    not_estimable: Some(why),
                });
                continue;
            };
            let t = if m.exact { f64::NAN } else { s / se };
            rows.push(Slope {
                level: lab,
                slope: s,
                se,
                t,
                df,
                p: t_p(t, df),
                lower: s - tq * se,
                upper: s + tq * se,
                not_estimable: None,
            });
            slope_rows.push(l);
        }
        if slope_rows.is_empty() {
            if let Some(e) = first_missing {
                return Err(e);
            }
        }
        let mut depends_on: Vec<(String, bool)> = Vec::new();
        for term in m
            .spec
            .terms
            .iter()
            .filter(|t| t.parts.iter().any(|p| p.var == x))
        {
            for p in term.parts.iter().filter(|p| p.var != x && p.var != f) {
                let name = super::design::var_name(&m.spec, p.var);
                let factor = matches!(m.spec.vars.get(p.var), Some(Var::Factor { .. }));
                if !depends_on.iter().any(|(n, _)| *n == name) {
                    depends_on.push((name, factor));
                }
            }
        }
        let (df1, ef) = m.equal_slopes_f(&slope_rows);
        let (ef, ep) = if df1 > 0 && !m.exact {
            (ef, f_p(ef, df1, df))
        } else {
            (f64::NAN, f64::NAN)
        };
        Ok(Slopes {
            covariate: super::design::var_name(&m.spec, x),
            rows,
            equality_f: ef,
            df1,
            df2: df,
            equality_p: ep,
            refitted,
            depends_on,
        })
    }

    /// The F test that the slopes `rows` (their functions on the fit's columns, one per
    /// level) are all equal: the Wald statistic of the differences from the first,
    /// (L b)' (L V L')^-1 (L b) / q with V the covariance of the coefficients (s^2 times the
    /// inverse of the cross-products), q the rank of L V L'; and q. When no other term holds
    /// the factor and the covariate together this is the extra-sum-of-squares F of the
    /// factor-by-covariate term. When one does (`g by h by x`), the slopes shown average over
    /// the other factor's levels, and this tests those, where the term's extra sum of
    /// squares would test the slopes at the other factor's reference level only.
    fn equal_slopes_f(&self, rows: &[Vec<f64>]) -> (usize, f64) {
        let Some((first, rest)) = rows.split_first() else {
            return (0, f64::NAN);
        };
        let mut est = Vec::new();
        let mut ws: Vec<Vec<f64>> = Vec::new();
        for r in rest {
            let l: Vec<f64> = r.iter().zip(first).map(|(a, b)| a - b).collect();
            match self.linear_parts(&l) {
                Ok((e, w)) => {
                    est.push(e);
                    ws.push(w);
                }
                Err(()) => return (0, f64::NAN),
            }
        }
        let len = ws.first().map_or(0, Vec::len);
        // Cov(l_i, l_j) = w_i . w_j: with W = [w_1 ... w_q] = Q R, L V L' = R'R.
        let mut a = qr::Mat::zeros(len, ws.len());
        for (j, w) in ws.iter().enumerate() {
            for (i, v) in w.iter().enumerate() {
                a.set(i, j, *v);
            }
        }
        let tri = qr::triangularize(&mut a, Some(qr::ALIAS_TOL), false);
        let q = tri.kept.len();
        if q == 0 {
            return (0, f64::NAN);
        }
        let kept: Vec<f64> = tri.kept.iter().map(|&j| est[j]).collect();
        let u = qr::solve_upper_transpose(&tri.r, &kept);
        (q, u.iter().map(|v| v * v).sum::<f64>() / q as f64)
    }

    /// Johnson-Neyman regions: for each pair of levels of `factor` (or the given pair), the
    /// covariate values where the difference of the two fitted lines is significant at
    /// `alpha` (two-sided t test with the residual df), from a model with the
    /// factor-by-covariate term. Solves d(x)^2 = t^2 Var(d(x)), a quadratic in x.
    pub fn regions(
        &self,
        covariate: &str,
        factor: &str,
        between: Option<(&str, &str)>,
        alpha: f64,
    ) -> Result<Vec<Region>, ModelError> {
        check_level(alpha)?;
        let f = self.model_factor(factor)?;
        let x = self.slope_covariate(Some(covariate))?;
        if between.is_none() {
            let levels = self.lay.factor(f).map_or(0, |x| x.present.len());
            super::check_pairs(factor, levels)?;
        }
        let refit = self.with_interaction(f, x, &[])?;
        let refitted = !matches!(refit, Refit::Same(_));
        let m: &Fit = refit.fit();
        let numeric = m.covariate_values(&[])?;
        let levels = match m.spec.vars.get(f) {
            Some(Var::Factor { levels, .. }) => levels.clone(),
            _ => Vec::new(),
        };
        let present = m
            .lay
            .factor(f)
            .map(|x| x.present.clone())
            .unwrap_or_default();
        let label = |c: u32| levels.get(c as usize).cloned().unwrap_or_default();
        let find = |name: &str| {
            present
                .iter()
                .copied()
                .find(|&c| label(c) == name)
                .ok_or_else(|| ModelError::UnknownLevel {
                    factor: factor.to_string(),
                    level: name.to_string(),
                })
        };
        let pairs: Vec<(u32, u32)> = match between {
            Some((a, b)) => vec![(find(a)?, find(b)?)],
            None => {
                let mut v = Vec::new();
                for (i, &a) in present.iter().enumerate() {
                    for &b in present.iter().skip(i + 1) {
                        v.push((a, b));
                    }
                }
                v
            }
        };
        // Covariate centre and spread over the fitted rows (for conditioning) and range.
        let xs: Vec<f64> = match m.spec.vars.get(x) {
            Some(Var::Numeric { values, .. }) => m
                .lay
                .used
                .iter()
                .filter_map(|i| values.get(i).copied())
                .collect(),
            _ => Vec::new(),
        };
        let x0 = numeric
            .iter()
            .find(|(v, _)| *v == x)
            .map(|(_, a)| *a)
            .unwrap_or(0.0);
        let sd = {
            let ss: f64 = xs.iter().map(|v| (v - x0) * (v - x0)).sum();
            let s = (ss / xs.len().max(1) as f64).sqrt();
            if s > 0.0 && s.is_finite() {
                s
            } else {
                1.0
            }
        };
        let (mut lo, mut hi) = (f64::INFINITY, f64::NEG_INFINITY);
        for &v in &xs {
            lo = lo.min(v);
            hi = hi.max(v);
        }
        let t = t_quantile(1.0 - alpha / 2.0, m.df_res);
        let t2 = t * t;
        let mut out = Vec::new();
        for (a, b) in pairs {
            let what = || ModelError::NotEstimable {
                what: format!("the difference {} - {}", label(a), label(b)),
                why: m.why_not(f, &[a, b]),
            };
            let diff = |deriv: Option<usize>| {
                let ra = m.row_at(&m.point(f, Some(a), numeric.clone(), deriv));
                let rb = m.row_at(&m.point(f, Some(b), numeric.clone(), deriv));
                ra.iter().zip(&rb).map(|(p, q)| p - q).collect::<Vec<f64>>()
            };
            let parts = m
                .linear_parts(&diff(None))
                .and_then(|a| Ok((a, m.linear_parts(&diff(Some(x)))?)));
            let ((ea, wa), (eb, wb)) = match parts {
                Ok(p) => p,
                // Every pair: the others are still shown, as `table differences` does.
                Err(()) if between.is_none() => {
                    out.push(Region {
                        first: label(a),
                        second: label(b),
                        kind: RegionKind::NotEstimable(m.why_not(f, &[a, b])),
                        boundaries: Vec::new(),
                        significant_inside: false,
                        lower_bound: None,
                        upper_bound: None,
                        description: "not estimable from this design".to_string(),
                        observed_min: lo,
                        observed_max: hi,
                        refitted,
                    });
                    continue;
                }
                Err(()) => return Err(what()),
            };
            // d(x0 + sd u) = ea + (eb sd) u; Var = |wa + u sd wb|^2.
            let bb = eb * sd;
            let wbs: Vec<f64> = wb.iter().map(|v| v * sd).collect();
            let dot = |p: &[f64], q: &[f64]| p.iter().zip(q).map(|(a, b)| a * b).sum::<f64>();
            let qa = bb * bb - t2 * dot(&wbs, &wbs);
            let qh = ea * bb - t2 * dot(&wa, &wbs);
            let qc = ea * ea - t2 * dot(&wa, &wa);
            let scale_a = bb * bb + t2 * dot(&wbs, &wbs);
            let to_x = |u: f64| x0 + sd * u;
            let kind = if qa.abs() <= QUADRATIC_DEGENERATE * scale_a {
                if qh > 0.0 {
                    RegionKind::Above(to_x(-qc / (2.0 * qh)))
                } else if qh < 0.0 {
                    RegionKind::Below(to_x(-qc / (2.0 * qh)))
                } else if qc > 0.0 {
                    RegionKind::Everywhere
                } else {
                    RegionKind::Nowhere
                }
            } else {
                let disc = qh * qh - qa * qc;
                if disc.is_nan() || disc <= 0.0 {
                    if qa > 0.0 {
                        RegionKind::Everywhere
                    } else {
                        RegionKind::Nowhere
                    }
                } else {
                    // Stable roots of qa u^2 + 2 qh u + qc = 0.
                    let q = -(qh + qh.signum() * disc.sqrt());
                    let q = if q == 0.0 { -disc.sqrt() } else { q };
                    let (r1, r2) = (q / qa, qc / q);
                    let (u1, u2) = if r1 <= r2 { (r1, r2) } else { (r2, r1) };
                    if qa > 0.0 {
                        RegionKind::Outside(to_x(u1), to_x(u2))
                    } else {
                        RegionKind::Between(to_x(u1), to_x(u2))
                    }
                }
            };
            let xname = super::design::var_name(&m.spec, x);
            let (lower_bound, upper_bound, description) = match kind {
                RegionKind::Everywhere => (None, None, format!("for every value of {xname}")),
                RegionKind::Nowhere => (None, None, format!("for no value of {xname}")),
                RegionKind::Below(v) => (
                    None,
                    Some(v),
                    format!("where {xname} is below the upper bound"),
                ),
                RegionKind::Above(v) => (
                    Some(v),
                    None,
                    format!("where {xname} is above the lower bound"),
                ),
                RegionKind::Between(p, q) => (
                    Some(p),
                    Some(q),
                    format!("where {xname} is between the bounds"),
                ),
                RegionKind::Outside(p, q) => (
                    Some(p),
                    Some(q),
                    format!("where {xname} is below the lower or above the upper bound"),
                ),
                RegionKind::NotEstimable(_) => (None, None, String::new()),
            };
            let (boundaries, inside) = match kind {
                RegionKind::Everywhere => (Vec::new(), true),
                RegionKind::Nowhere => (Vec::new(), false),
                RegionKind::Below(v) | RegionKind::Above(v) => (vec![v], false),
                RegionKind::Between(p, q) => (vec![p, q], true),
                RegionKind::Outside(p, q) => (vec![p, q], false),
                RegionKind::NotEstimable(_) => (Vec::new(), false),
            };
            out.push(Region {
                first: label(a),
                second: label(b),
                kind,
                boundaries,
                significant_inside: inside,
                lower_bound,
                upper_bound,
                description,
                observed_min: lo,
                observed_max: hi,
                refitted,
            });
        }
        Ok(out)
    }
}

/// The model the slopes are read from.
enum Refit<'a> {
    /// The model itself (it has the interaction).
    Same(&'a Fit),
    /// An already fitted model that is this one plus the interaction.
    Known(&'a Fit),
    /// A new fit with the interaction appended.
    New(Box<Fit>),
}

impl Refit<'_> {
    fn fit(&self) -> &Fit {
        match self {
            Refit::Same(f) | Refit::Known(f) => f,
            Refit::New(f) => f,
        }
    }
}

/// Whether `big` is `base` with `term` appended: the same variables, values (bit for bit, so
/// missing values compare equal), rows, response and intercept, and base's terms then `term`.
fn extends_by(big: &ModelSpec, base: &ModelSpec, term: &TermSpec) -> bool {
    big.terms.len() == base.terms.len() + 1
        && big.terms.last() == Some(term)
        && big.terms.iter().zip(&base.terms).all(|(a, b)| a == b)
        && big.intercept == base.intercept
        && big.response_offset.to_bits() == base.response_offset.to_bits()
        && big.row_numbers == base.row_numbers
        && same_var(&big.response, &base.response)
        && big.vars.len() == base.vars.len()
        && big.vars.iter().zip(&base.vars).all(|(a, b)| same_var(a, b))
        // An unweighted model is not the weighted one with a term more (`check` of a weighted
        // model once took its equal-slopes F from an unweighted model of the same terms).
        && match (&big.weights, &base.weights) {
            (None, None) => true,
            (Some(a), Some(b)) => same_var(a, b),
            _ => false,
        }
}

fn same_var(a: &Var, b: &Var) -> bool {
    match (a, b) {
        (
            Var::Numeric {
                name: na,
                values: va,
            },
            Var::Numeric {
                name: nb,
                values: vb,
            },
        ) => {
            na == nb
                && (Arc::ptr_eq(va, vb)
                    || (va.len() == vb.len()
                        && va
                            .iter()
                            .zip(vb.iter())
                            .all(|(x, y)| x.to_bits() == y.to_bits())))
        }
        (
            Var::Factor {
                name: na,
                codes: ca,
                levels: la,
            },
            Var::Factor {
                name: nb,
                codes: cb,
                levels: lb,
            },
        ) => na == nb && (Arc::ptr_eq(ca, cb) || ca == cb) && la == lb,
        _ => false,
    }
}

/// Why the slope of covariate `x` within level `c` of factor `f` cannot be estimated. When the
/// covariate takes a single value within that level, the words are those of the fit's warning
/// about the columns it left out, so the two messages explain it alike; otherwise the reason a
/// mean there is not estimable (an empty cell).
fn slope_why_not(m: &Fit, f: usize, x: usize, c: u32) -> String {
    let Some(within) = covariate_within_levels(&m.spec, &m.lay, x, f) else {
        return m.why_not(f, &[c]);
    };
    let Some((first, true)) = within.first.get(c as usize).copied().flatten() else {
        return m.why_not(f, &[c]);
    };
    let (xname, fname) = (within.covariate, within.factor);
    let fitted = m.warnings.iter().find_map(|w| match w {
        super::ModelWarning::Aliased {
            cause:
                cause @ AliasCause::ConstantWithin {
                    covariate, factor, ..
                },
            ..
        } if covariate == xname && factor == fname => Some(cause.to_string()),
        _ => None,
    });
    fitted.unwrap_or_else(|| {
        AliasCause::ConstantWithin {
            covariate: xname.to_string(),
            factor: fname.to_string(),
            levels: vec![(
                within.levels.get(c as usize).cloned().unwrap_or_default(),
                first,
            )],
            more: 0,
            every: false,
            terms: Vec::new(),
        }
        .to_string()
    })
}
