//! Analysis-of-variance tables (sums of squares of Type I, II and III) and the F test of
//! nested models. Every RSS is read from a re-triangularisation of selected columns of the
//! fit's R_aug (see `Engine::sub_rss`).

use super::design::{self, term_keys};
use super::fit::{f_p, Fit};
use super::qr::{self, RAccumulator, ALIAS_TOL, CHUNK_ROWS};
use super::{Anova, AnovaRow, Comparison, ModelError, Note, SsType, Var};

impl Fit {
    /// The analysis-of-variance table of the given type.
    ///
    /// Type I: sequential in written order. Type II: each term after every term that does not
    /// contain it. Type III: each term after all others, factors in sum-to-zero coding;
    /// refused when the design has aliased columns (the hypotheses are then not those of the
    /// full-rank model).
    pub fn anova(&self, ty: SsType) -> Result<Anova, ModelError> {
        let e = &self.treat;
        let nterms = self.spec.terms.len();
        let base: Vec<usize> = if self.spec.intercept {
            vec![0]
        } else {
            Vec::new()
        };
        let mut rows = Vec::new();
        let mut notes = Vec::new();
        let push = |rows: &mut Vec<AnovaRow>, t: usize, df: usize, ss: f64| {
            let ss = if df == 0 { 0.0 } else { ss.max(0.0) };
            let ms = if df == 0 { 0.0 } else { ss / df as f64 };
            let (f, p) = if df == 0 {
                (None, None)
            } else {
                let f = ms / (self.rss / self.df_res as f64);
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
                partial_eta_sq: ss / (ss + self.rss),
            });
        };
        match ty {
            SsType::I => {
                let mut cols = base.clone();
                let (mut prev_rank, mut prev_rss) = e.sub_rss(&cols);
                for t in 0..nterms {
                    cols.extend(e.term_cols.get(t).into_iter().flatten().copied());
                    let (rank, rss) = e.sub_rss(&cols);
                    push(&mut rows, t, rank.saturating_sub(prev_rank), prev_rss - rss);
                    prev_rank = rank;
                    prev_rss = rss;
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
                    let (r0, s0) = e.sub_rss(&cols);
                    cols.extend(e.term_cols.get(t).into_iter().flatten().copied());
                    let (r1, s1) = e.sub_rss(&cols);
                    push(&mut rows, t, r1.saturating_sub(r0), s0 - s1);
                }
            }
            SsType::III => {
                let p = e.cols.len();
                if self.kept.len() < p {
                    let aliased = (0..p)
                        .filter(|c| !self.kept.contains(c))
                        .filter_map(|c| e.cols.get(c).map(|x| x.name.clone()))
                        .collect();
                    return Err(ModelError::TypeIIIWithAliased { aliased });
                }
                let ef = self.effect_engine()?;
                let all: Vec<usize> = (0..ef.cols.len()).collect();
                let (rank_full, rss_full) = ef.sub_rss(&all);
                if rank_full < ef.cols.len() {
                    return Err(ModelError::TypeIIIWithAliased {
                        aliased: Vec::new(),
                    });
                }
                for t in 0..nterms {
                    let mine = ef.term_cols.get(t).cloned().unwrap_or_default();
                    let cols: Vec<usize> =
                        all.iter().copied().filter(|c| !mine.contains(c)).collect();
                    let (r0, s0) = ef.sub_rss(&cols);
                    push(&mut rows, t, rank_full.saturating_sub(r0), s0 - rss_full);
                }
                notes = self.type3_notes();
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

/// F test of `small` against `big`, a model that contains it.
///
/// Both must be fitted on the same rows (same data-file lines) with the same response.
/// Nesting is accepted when small's terms are a subset of big's (by name; an intercept in
/// small needs one in big); otherwise it is checked numerically: the columns of small are
/// appended to big's in a joint triangularisation and must all come out aliased.
pub fn compare(small: &Fit, big: &Fit) -> Result<Comparison, ModelError> {
    if small.lay.used.len() != big.lay.used.len() || !fitted_lines(small).eq(fitted_lines(big)) {
        return Err(ModelError::DifferentRows);
    }
    if !same_response(small, big) {
        return Err(ModelError::DifferentResponse);
    }
    let by_names = (!small.spec.intercept || big.spec.intercept)
        && small
            .lay
            .term_names
            .iter()
            .all(|t| big.lay.term_names.contains(t));
    if !by_names && !nested_numerically(small, big) {
        return Err(ModelError::NotNested);
    }
    let df = small
        .df_res
        .checked_sub(big.df_res)
        .ok_or(ModelError::NotNested)?;
    if df == 0 {
        return Err(ModelError::SameColumnSpace);
    }
    let ss = (small.rss - big.rss).max(0.0);
    let f = (ss / df as f64) / (big.rss / big.df_res as f64);
    Ok(Comparison {
        rows: [(small.df_res, small.rss), (big.df_res, big.rss)],
        small_df_residual: small.df_res,
        small_rss: small.rss,
        big_df_residual: big.df_res,
        big_rss: big.rss,
        df,
        ss,
        f,
        p: f_p(f, df, big.df_res),
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

/// Joint triangularisation of [Z_big | Z_small] over the common rows (both in their own
/// centred, scaled coordinates, plus a constant column when big has an intercept, since the
/// centring of small's columns is a combination with it); small is nested when the rank
/// does not grow.
fn nested_numerically(small: &Fit, big: &Fit) -> bool {
    let eb = &big.treat;
    let es = &small.treat;
    let kb = big.kept.len();
    let ks = small.kept.len();
    let width = kb + ks;
    let mut acc = RAccumulator::new(width, CHUNK_ROWS);
    let mut row = vec![0.0; width];
    for (ib, is) in big.lay.used.iter().zip(small.lay.used.iter()) {
        for (k, &c) in big.kept.iter().enumerate() {
            row[k] = eb
                .cols
                .get(c)
                .map(|col| (design::eval_row(&big.spec, col, ib) - eb.centre[c]) / eb.scale[c])
                .unwrap_or(0.0);
        }
        for (k, &c) in small.kept.iter().enumerate() {
            let col = es.cols.get(c);
            let v = col
                .map(|col| design::eval_row(&small.spec, col, is))
                .unwrap_or(0.0);
            // Small's intercept stays the constant 1; its other columns are used raw when
            // big has no intercept (big cannot absorb small's centring constants then).
            let is_icpt = col.map(|c| c.parts.is_empty()).unwrap_or(false);
            row[kb + k] = if is_icpt {
                v
            } else if big.spec.intercept {
                (v - es.centre[c]) / es.scale[c]
            } else {
                v / es.scale[c]
            };
        }
        acc.push(&row);
    }
    let mut r = acc.finish();
    let t = qr::triangularize(&mut r, Some(ALIAS_TOL), false);
    t.kept.len() <= kb
}
