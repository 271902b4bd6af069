//! Analysis-of-variance tables (sums of squares of Type I, II and III) and the F test of
//! nested models. Every RSS is read from a re-triangularisation of selected columns of the
//! fit's R_aug (see `Engine::sub_rss`).

use super::cause::alias_cause;
use super::design::{self, term_keys};
use super::fit::{f_p, Fit};
use super::qr::{Mat, RAccumulator, CHUNK_ROWS};
use super::{Anova, AnovaRow, Comparison, ModelError, Note, SsType, Transform, Var};

impl Fit {
    /// The analysis-of-variance table of the given type.
    ///
    /// Type I: sequential in written order. Type II: each term after every term that does not
    /// contain it. Type III: each term after all others, factors in sum-to-zero coding;
    /// refused when the design has aliased columns (the hypotheses are then not those of the
    /// full-rank model). Each sum of squares is the response's squared length along the
    /// columns the term adds (see `graded.rs`), not a difference of two residual sums.
    pub fn anova(&self, ty: SsType) -> Result<Anova, ModelError> {
        let e = &self.eng;
        let nterms = self.spec.terms.len();
        let base: Vec<usize> = if self.spec.intercept {
            vec![0]
        } else {
            Vec::new()
        };
        let mut rows = Vec::new();
        let mut notes = Vec::new();
        let ms_res = self.rss / self.df_res as f64;
        let robust = self.robust.is_some();
        // In the robust view each row is the HC3 Wald test of the same hypothesis, on the
        // same df; its statistic replaces the F of sums of squares, which it does not use.
        let wald =
            |g: &super::graded::Graded, extra: &[usize]| -> Result<Option<f64>, ModelError> {
                if robust {
                    Ok(Some(self.robust_wald(g, extra)?.0))
                } else {
                    Ok(None)
                }
            };
        let push = |rows: &mut Vec<AnovaRow>, t: usize, df: usize, ss: f64, w: Option<f64>| {
            if let Some(f) = w {
                let ok = df > 0 && !self.exact && f.is_finite();
                rows.push(AnovaRow {
                    term: self.lay.term_names.get(t).cloned().unwrap_or_default(),
                    term_index: t,
                    df,
                    ss: f64::NAN,
                    ms: f64::NAN,
                    f: ok.then_some(f),
                    p: ok.then(|| f_p(f, df, self.df_res)),
                    partial_eta_sq: f64::NAN,
                });
                return;
            }
            // 0 df: the term adds nothing; its mean square, F, p and effect size are 0/0.
            let ss = if df == 0 { 0.0 } else { ss.max(0.0) };
            let ms = if df == 0 { f64::NAN } else { ss / df as f64 };
            let (f, p) = if df == 0 || self.exact {
                (None, None)
            } else {
                let f = ms / ms_res;
                (Some(f), Some(f_p(f, df, self.df_res)))
            };
            rows.push(AnovaRow {
                term: self.lay.term_names.get(t).cloned().unwrap_or_default(),
                term_index: t,
                df,
                ss,
                ms,
                f,
                p,
                partial_eta_sq: if df == 0 {
                    f64::NAN
                } else {
                    ss / (ss + self.rss)
                },
            });
        };
        let ys2 = e.y_scale * e.y_scale;
        match ty {
            SsType::I => {
                // The fit itself processed the columns in written order.
                for t in 0..nterms {
                    let mine = e.term_cols.get(t).cloned().unwrap_or_default();
                    let (df, ss) = self.g.ss_of(&mine);
                    let w = wald(&self.g, &mine)?;
                    push(&mut rows, t, df, ss * ys2, w);
                }
            }
            SsType::II => {
                let keys: Vec<_> = (0..nterms).map(|t| term_keys(&self.spec, t)).collect();
                let contains = |u: usize, t: usize| {
                    keys[u].len() > keys[t].len() && keys[t].iter().all(|k| keys[u].contains(k))
                };
                for t in 0..nterms {
                    let mut cols = base.clone();
                    for u in (0..nterms).filter(|&u| u != t && !contains(u, t)) {
                        cols.extend(e.term_cols.get(u).into_iter().flatten().copied());
                    }
                    let mine = e.term_cols.get(t).cloned().unwrap_or_default();
                    let (df, ss) = e.extra_ss(&e.a, &cols, &mine);
                    let w = if robust {
                        let mut all = cols.clone();
                        all.extend(mine.iter().copied().filter(|c| !cols.contains(c)));
                        wald(&e.graded(&e.a, &all), &mine)?
                    } else {
                        None
                    };
                    push(&mut rows, t, df, ss, w);
                }
                notes = self.origin_notes("II");
            }
            SsType::III => {
                let refuse = |cols: &[super::design::Column], mut aliased: Vec<usize>| {
                    aliased.sort_unstable();
                    ModelError::TypeIIIWithAliased {
                        aliased: aliased
                            .iter()
                            .filter_map(|&c| cols.get(c).map(|x| x.name.clone()))
                            .collect(),
                        cause: Box::new(alias_cause(&self.spec, &self.lay, cols, &aliased)),
                    }
                };
                if !self.g.aliased.is_empty() {
                    return Err(refuse(&e.cols, self.g.aliased.clone()));
                }
                let all: Vec<usize> = (0..e.ecols.len()).collect();
                let full = e.graded(&e.ea, &all);
                if !full.aliased.is_empty() {
                    return Err(refuse(&e.ecols, full.aliased.clone()));
                }
                for t in 0..nterms {
                    let mine = e.eterm_cols.get(t).cloned().unwrap_or_default();
                    let others: Vec<usize> =
                        all.iter().copied().filter(|c| !mine.contains(c)).collect();
                    let (df, ss) = e.extra_ss(&e.ea, &others, &mine);
                    let w = if robust {
                        let mut all = others.clone();
                        all.extend(mine.iter().copied());
                        wald(&e.graded(&e.ea, &all), &mine)?
                    } else {
                        None
                    };
                    push(&mut rows, t, df, ss, w);
                }
                notes = self.type3_notes();
                notes.extend(self.origin_notes("III"));
            }
        }
        let n = self.lay.used.len();
        Ok(Anova {
            rows,
            residual_df: self.df_res,
            residual_ss: self.rss,
            total_df: n - usize::from(self.spec.intercept),
            total_ss: self.tss,
            notes,
        })
    }

    /// Notes for Type III tests of terms with a factor that also appear multiplied by a
    /// covariate: those tests compare groups at covariate = 0.
    fn type3_notes(&self) -> Vec<Note> {
        let spec = &self.spec;
        let nterms = spec.terms.len();
        let keys: Vec<_> = (0..nterms).map(|t| term_keys(spec, t)).collect();
        let mut notes = Vec::new();
        for t in 0..nterms {
            let has_factor = keys[t]
                .iter()
                .any(|k| matches!(spec.vars.get(k.0), Some(Var::Factor { .. })));
            if !has_factor {
                continue;
            }
            let mut covs: Vec<String> = Vec::new();
            for u in 0..nterms {
                if u == t
                    || keys[u].len() <= keys[t].len()
                    || !keys[t].iter().all(|k| keys[u].contains(k))
                {
                    continue;
                }
                for k in keys[u].iter().filter(|k| !keys[t].contains(k)) {
                    if let Some(Var::Numeric { name, .. }) = spec.vars.get(k.0) {
                        let nm = design::part_name(name, k.1);
                        if !covs.contains(&nm) {
                            covs.push(nm);
                        }
                    }
                }
            }
            for c in covs {
                notes.push(Note::AtCovariateZero {
                    term: t,
                    term_name: self.lay.term_names.get(t).cloned().unwrap_or_default(),
                    covariate: c,
                });
            }
        }
        notes
    }
}

impl Fit {
    /// Notes for tests of covariate terms that depend on an origin: in Type III, a term of
    /// covariates only inside a bigger term with a further covariate (`x` with `x by z`:
    /// the slope of x where z = 0); in Types II and III, a term whose covariate also enters
    /// a later term as a higher power with the same other parts (`x` with `x^2`, `g by x`
    /// with `g by x^2`: the slope where x = 0), which neither type takes out first.
    fn origin_notes(&self, kind: &'static str) -> Vec<Note> {
        let spec = &self.spec;
        let nterms = spec.terms.len();
        let keys: Vec<_> = (0..nterms).map(|t| term_keys(spec, t)).collect();
        let numeric = |v: usize| matches!(spec.vars.get(v), Some(Var::Numeric { .. }));
        let part = |k: &(usize, Transform)| match spec.vars.get(k.0) {
            Some(Var::Numeric { name, .. }) => design::part_name(name, k.1),
            _ => String::new(),
        };
        let names = &self.lay.term_names;
        let mut notes = Vec::new();
        for t in 0..nterms {
            let mut seen: Vec<String> = Vec::new();
            let mut note = |covariate: String, u: usize| {
                if !seen.contains(&covariate) {
                    seen.push(covariate.clone());
                    notes.push(Note::AtOrigin {
                        term: t,
                        term_name: names.get(t).cloned().unwrap_or_default(),
                        kind,
                        covariate,
                        because: names.get(u).cloned().unwrap_or_default(),
                    });
                }
            };
            for u in (0..nterms).filter(|&u| u != t) {
                // x inside x by z (Type III only: Type II tests x without x by z).
                if kind == "III"
                    && keys[t].iter().all(|k| numeric(k.0))
                    && keys[u].len() > keys[t].len()
                    && keys[t].iter().all(|k| keys[u].contains(k))
                {
                    for k in keys[u].iter().filter(|k| !keys[t].contains(k)) {
                        if numeric(k.0) {
                            note(part(k), u);
                        }
                    }
                }
                // x with x^2: the same other parts, the covariate to a higher power.
                for k in &keys[t] {
                    let lower = match k.1 {
                        Transform::Identity => 1,
                        Transform::Power(p) => p,
                        _ => continue,
                    };
                    let higher = keys[u]
                        .iter()
                        .any(|h| h.0 == k.0 && matches!(h.1, Transform::Power(q) if q > lower));
                    let rest_t: Vec<_> = keys[t].iter().filter(|x| x.0 != k.0).collect();
                    let rest_u: Vec<_> = keys[u].iter().filter(|x| x.0 != k.0).collect();
                    if higher && rest_t == rest_u && keys[u].len() == keys[t].len() {
                        note(part(&(k.0, Transform::Identity)), u);
                    }
                }
            }
        }
        notes
    }
}

/// F test of the smaller of two models against the bigger one, which contains it; the
/// two may be given in either order ([`Comparison::swapped`] says which was first).
///
/// Both must be fitted on the same rows (same data-file lines) with the same response.
/// Nesting is accepted when one model's terms are a subset of the other's (by name; an
/// intercept in the smaller needs one in the bigger); otherwise it is checked numerically:
/// the smaller model's columns, after the bigger one's, must all come out aliased.
pub fn compare(first: &Fit, second: &Fit) -> Result<Comparison, ModelError> {
    if first.lay.used.len() != second.lay.used.len()
        || !fitted_lines(first).eq(fitted_lines(second))
    {
        return Err(ModelError::DifferentRows);
    }
    if !same_response(first, second) {
        return Err(ModelError::DifferentResponse);
    }
    let weights = |f: &Fit| match &f.spec.weights {
        Some(Var::Numeric { values, .. }) => Some(
            f.lay
                .used
                .iter()
                .map(|i| values.get(i).copied().unwrap_or(f64::NAN).to_bits())
                .collect::<Vec<u64>>(),
        ),
        _ => None,
    };
    if weights(first) != weights(second) {
        return Err(ModelError::DifferentWeights);
    }
    let by_names = |small: &Fit, big: &Fit| {
        (!small.spec.intercept || big.spec.intercept)
            && small
                .lay
                .term_names
                .iter()
                .all(|t| big.lay.term_names.contains(t))
    };
    // The model with more residual df is the candidate smaller one.
    let (small, big, swapped) = if first.df_res >= second.df_res {
        (first, second, false)
    } else {
        (second, first, true)
    };
    let named = by_names(small, big);
    if !named && !nested_numerically(small, big) {
        return Err(ModelError::NotNested);
    }
    let added = named.then(|| {
        let intercept = (big.spec.intercept && !small.spec.intercept)
            .then(|| super::design::INTERCEPT.to_string());
        intercept
            .into_iter()
            .chain(
                big.lay
                    .term_names
                    .iter()
                    .filter(|t| !small.lay.term_names.contains(t))
                    .cloned(),
            )
            .collect()
    });
    let df = small.df_res - big.df_res;
    if df == 0 {
        return Err(ModelError::SameColumnSpace);
    }
    let ss = (small.rss - big.rss).max(0.0);
    let f = (ss / df as f64) / (big.rss / big.df_res as f64);
    let (f, p) = if big.exact {
        (f64::NAN, f64::NAN)
    } else {
        (f, f_p(f, df, big.df_res))
    };
    Ok(Comparison {
        rows: [(small.df_res, small.rss), (big.df_res, big.rss)],
        small_df_residual: small.df_res,
        small_rss: small.rss,
        big_df_residual: big.df_res,
        big_rss: big.rss,
        df,
        ss,
        f,
        p,
        swapped,
        n: big.lay.used.len(),
        added,
    })
}

/// The data-file lines of the fitted rows.
fn fitted_lines(f: &Fit) -> impl Iterator<Item = usize> + '_ {
    let rows = &f.spec.row_numbers;
    f.lay.used.iter().map(move |i| rows.get(i).unwrap_or(i))
}

/// The response values of the fitted rows as bit patterns, with `add` added first.
fn response_used(f: &Fit, add: f64) -> impl Iterator<Item = u64> + '_ {
    let values: &[f64] = match &f.spec.response {
        Var::Numeric { values, .. } => values,
        Var::Factor { .. } => &[],
    };
    f.lay
        .used
        .iter()
        .map(move |i| (values.get(i).copied().unwrap_or(f64::NAN) + add).to_bits())
}

/// Whether two fits have the same response over their fitted rows: the same values when
/// their response offsets agree, else the same values once each offset is added (as a
/// model without an intercept folds it in).
fn same_response(a: &Fit, b: &Fit) -> bool {
    let (oa, ob) = (a.spec.response_offset, b.spec.response_offset);
    if oa.to_bits() == ob.to_bits() {
        response_used(a, 0.0).eq(response_used(b, 0.0))
    } else {
        response_used(a, oa).eq(response_used(b, ob))
    }
}

/// Whether `small`'s columns lie in the span of `big`'s on the fitted rows: the triangular
/// factor of both models' monomials side by side over the common rows, then `big`'s columns
/// followed by `small`'s through it (see `graded.rs`); small is nested when every one of
/// its columns comes out aliased.
fn nested_numerically(small: &Fit, big: &Fit) -> bool {
    let (eb, es) = (&big.eng, &small.eng);
    let (qb, qs) = (eb.basis.monos.len(), es.basis.monos.len());
    let width = qb + qs + 1;
    let mut acc = RAccumulator::new(width, CHUNK_ROWS);
    let n = big.lay.used.len();
    for at in big.lay.used.blocks(CHUNK_ROWS) {
        let rows_b = big.lay.used.slice(at.clone());
        let rows_s = small.lay.used.slice(at.clone());
        let m = rows_b.len();
        let mut a = Mat::zeros(m, qb);
        eb.basis.fill(&big.spec, &rows_b, &mut a, 0);
        let mut b = Mat::zeros(m, qs);
        es.basis.fill(&small.spec, &rows_s, &mut b, 0);
        let mut row = vec![0.0; width];
        for i in 0..m {
            for (j, x) in row.iter_mut().enumerate().take(qb) {
                *x = a.get(i, j);
            }
            for j in 0..qs {
                row[qb + j] = b.get(i, j);
            }
            acc.push(&row);
        }
    }
    if n == 0 {
        return false;
    }
    let r = acc.finish();
    let (pb, ps) = (eb.a.cols, es.a.cols);
    let mut joint = Mat::zeros(qb + qs, pb + ps);
    for j in 0..pb {
        for i in 0..qb {
            joint.set(i, j, eb.a.get(i, j));
        }
    }
    for j in 0..ps {
        for i in 0..qs {
            joint.set(qb + i, pb + j, es.a.get(i, j));
        }
    }
    let cols: Vec<usize> = (0..pb + ps).collect();
    let g = super::graded::graded(&r, &joint, &cols);
    (pb..pb + ps).all(|c| g.aliased.contains(&c))
}
