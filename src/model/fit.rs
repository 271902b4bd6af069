//! Fitting: the design columns as the model writes them are expanded in centred monomials
//! (`basis.rs`), whose triangular factor R of [W | y'] is accumulated in one pass of blocked
//! Householder triangularisation over fixed blocks of rows, block factors merged in a fixed
//! order. Every sub-model (the fit itself, the ANOVA tables, the tests) is a reduction of
//! selected columns through that factor (`graded.rs`); coefficients of the model as written
//! are recovered from the reduced fit. Row diagnostics are a second pass, made only when
//! something asks for them.

use std::borrow::Cow;
use std::ops::Range;
use std::sync::{Arc, OnceLock};

use super::basis::Basis;
use super::design::{self, Column, Layout, Scheme, UsedRows};
use super::graded::{self, Graded};
use rayon::prelude::*;

use super::qr::{self, Mat, CHUNK_ROWS};
use super::{Coefficient, Diagnostics, FitSummary, ModelError, ModelSpec, ModelWarning, Var};

/// A fit is an exact fit when RSS <= PERFECT_FIT_REL * TSS: the residuals are then rounding
/// noise (their norm is below 1e-12 of the response's spread). Its coefficients are exact,
/// the residual SD is 0, and tests are undefined (0/0).
const PERFECT_FIT_REL: f64 = 1e-24;

/// A linear function of the coefficients is declared not estimable when its component
/// along a direction the data do not determine exceeds this fraction of its norm (both are
/// well scaled in the centred monomials, where rounding leaves about 1e-13).
const ESTIMABLE_TOL: f64 = 1e-8;

/// A leverage within this of 1 is 1: rows with leverage exactly 1 (the only row of its level)
/// come out of the arithmetic as 1 - 1e-16 or so, and a genuine leverage of 1 - 1e-10 would
/// need some 10^10 rows weighing on one coefficient together with that one row.
pub(crate) const LEVERAGE_ONE_TOL: f64 = 1e-10;

/// The coefficients of the model as written are recovered from the centred fit; when that
/// recovery can keep fewer significant digits than this (the covariate lies far from 0
/// compared with its spread), the coefficients table says so.
pub const COEFFICIENT_DIGITS_NOTE: f64 = 10.0;

/// Coefficients of the model as written whose recovery from the centred fit keeps fewer
/// than this many digits (an intercept of 1 under responses of 10^6, as in NIST's Wampler
/// sets) are refined by one step with residuals in double-double arithmetic. The step costs
/// a pass over the rows, so it is taken only then; models with well-placed covariates, the
/// common case, never take it.
const REFINE_BELOW_DIGITS: f64 = 13.0;

/// The refinement is kept only when the residuals y - X b are computed to better than this
/// fraction of the response (double-double carries about 32 digits, so it cannot resolve a
/// residual when the terms x^k b_k exceed the response by 2^40 or more).
const REFINE_MAX_RATIO: f64 = 1.0995116e12; // 2^40

/// Rows, scalars and the triangular factor of the monomials, with the codings of the model.
#[derive(Debug, Clone)]
pub(crate) struct Engine {
    pub basis: Basis,
    /// Treatment-coded design columns, and each term's columns.
    pub cols: Vec<Column>,
    pub term_cols: Vec<Vec<usize>>,
    /// X = W A for the treatment columns (A in units of the scaled monomials).
    pub a: Mat,
    /// The sum-to-zero coding of the same model (Type III), same monomials.
    pub ecols: Vec<Column>,
    pub eterm_cols: Vec<Vec<usize>>,
    pub ea: Mat,
    pub y_centre: f64,
    pub y_scale: f64,
    /// The response offset ([`ModelSpec::response_offset`]) added back to estimates on the
    /// response scale; 0 without an intercept (the offset is folded into the values then).
    pub y_offset: f64,
    /// R of [W' | y'], (q+1) x (q+1).
    pub r_aug: Mat,
}

impl Engine {
    /// The least-squares fit of the response on the columns `cols` of the coding `a`.
    pub fn graded(&self, a: &Mat, cols: &[usize]) -> Graded {
        graded::graded(&self.r_aug, a, cols)
    }

    /// (df, sum of squares in the response's units) that the columns `extra` add to the
    /// columns `base`, in coding `a`.
    pub fn extra_ss(&self, a: &Mat, base: &[usize], extra: &[usize]) -> (usize, f64) {
        let mut cols: Vec<usize> = base.to_vec();
        cols.extend(extra.iter().copied().filter(|c| !base.contains(c)));
        let g = self.graded(a, &cols);
        let (df, ss) = g.ss_of(extra);
        let added: Vec<usize> = extra
            .iter()
            .copied()
            .filter(|c| !base.contains(c))
            .collect();
        let df = if added.is_empty() { 0 } else { df };
        (df, ss * self.y_scale * self.y_scale)
    }
}

/// A fitted linear model.
#[derive(Debug, Clone)]
pub struct Fit {
    pub(crate) spec: ModelSpec,
    pub(crate) lay: Layout,
    pub(crate) eng: Engine,
    /// The fit on every treatment-coded column.
    pub(crate) g: Graded,
    /// Coefficients of the reduced columns (y' units).
    pub(crate) beta: Vec<f64>,
    /// The fitted y' as a combination of the scaled monomials.
    pub(crate) gamma: Vec<f64>,
    /// T^-1: coefficients of the kept design columns = y_scale * minv * beta (plus the
    /// centre on the intercept).
    pub(crate) minv: Mat,
    /// Row diagnostics, computed on first use (a pass over every row) and shared by the
    /// checks and figures that read them.
    pub(crate) diag: OnceLock<Diagnostics>,
    /// Fitted values, residuals and leverages of a fit of at most [`HELD_ROWS`] rows,
    /// computed together on first use.
    pub(crate) held: OnceLock<HeldRows>,
    /// Kept (non-aliased) design columns of the treatment coding.
    pub(crate) kept: Vec<usize>,
    pub(crate) rss: f64,
    pub(crate) tss: f64,
    pub(crate) df_res: usize,
    pub(crate) sigma: f64,
    /// The model fits the data exactly (residual sum of squares 0 to rounding).
    pub(crate) exact: bool,
    /// Mean of each numeric variable of the model over the fitted rows: (var, mean).
    pub(crate) cov_means: Vec<(usize, f64)>,
    /// Coefficients of the model as written after one step of refinement, when their
    /// recovery asked for it and the step could be trusted (made on first use).
    pub(crate) refined: OnceLock<Option<Vec<f64>>>,
    /// The triangular factor F (k x k) of the HC3 meat sum_i u_i u_i' e_i^2 / (1 - h_i)^2 in
    /// the fit's orthonormal coordinates, F'F = the meat: the QR factor of the rows
    /// u_i' |e_i| / (1 - h_i), made on first use; Err: the data-file line of a row with
    /// leverage 1.
    pub(crate) hc3: OnceLock<Result<Arc<Mat>, usize>>,
    /// Set in the robust view of a fit ([`Fit::robust`]): the k x k matrix F with
    /// F'F = the HC3 meat, so that the robust covariance of two functions with
    /// coordinates t1, t2 is (F t1) . (F t2).
    pub(crate) robust: Option<Arc<Mat>>,
    /// Warnings about this fit.
    pub warnings: Vec<ModelWarning>,
}

/// Fit a linear model by least squares.
///
/// A response offset ([`ModelSpec::response_offset`]) stays outside the arithmetic in a
/// model with an intercept (the intercept absorbs it, so the engine works on the small
/// values and adds the offset back to estimates); without an intercept it is folded into
/// the values first.
pub fn fit(spec: &ModelSpec) -> Result<Fit, ModelError> {
    fit_owned(spec.clone())
}

/// [`fit`] taking the spec by value, so that the fit keeps it without a copy of the data.
pub fn fit_owned(spec: ModelSpec) -> Result<Fit, ModelError> {
    if !spec.response_offset.is_finite() {
        return Err(ModelError::NonFiniteValue {
            variable: spec.response.name().to_string(),
            row: spec.row_numbers.first().unwrap_or(1),
        });
    }
    if !spec.intercept && spec.response_offset != 0.0 {
        return fit_spec(fold_offset(spec));
    }
    fit_spec(spec)
}

/// The spec with its response offset added to the response values (offset 0 after).
fn fold_offset(mut spec: ModelSpec) -> ModelSpec {
    let offset = spec.response_offset;
    if let Var::Numeric { values, .. } = &mut spec.response {
        *values = Arc::new(values.iter().map(|v| v + offset).collect());
        spec.response_offset = 0.0;
    }
    spec
}

/// The inverse of an upper-triangular matrix with a non-zero diagonal.
fn invert_upper(t: &Mat) -> Mat {
    let k = t.cols;
    let mut m = Mat::zeros(k, k);
    for c in 0..k {
        let mut e = vec![0.0; k];
        e[c] = 1.0;
        let x = qr::solve_upper(t, &e);
        for (i, xi) in x.iter().enumerate() {
            m.set(i, c, *xi);
        }
    }
    m
}

/// [`fit`] once the offset is settled (0, or kept apart in a model with an intercept).
fn fit_spec(spec: ModelSpec) -> Result<Fit, ModelError> {
    let lay = design::layout(&spec)?;
    let n = lay.used.len();
    let (tcols, tterms) = design::columns(&spec, &lay, Scheme::Treatment, MAX_COLUMNS)
        .map_err(|p| too_many_columns(p, n))?;
    let p = tcols.len();
    if p == 0 {
        return Err(ModelError::EmptyModel);
    }
    if n < p {
        return Err(ModelError::FewerRowsThanCoefficients {
            rows: n,
            coefficients: p,
        });
    }
    let y: &[f64] = match &spec.response {
        Var::Numeric { values, .. } => values,
        Var::Factor { .. } => return Err(ModelError::ResponseNotNumeric),
    };
    let (ecols, eterms) = design::columns(&spec, &lay, Scheme::Effect, MAX_COLUMNS)
        .map_err(|p| too_many_columns(p, n))?;
    let eng = build_engine(&spec, &lay, y, (tcols, tterms), (ecols, eterms))?;
    let all: Vec<usize> = (0..p).collect();
    let g = eng.graded(&eng.a, &all);
    let kept = g.kept.clone();
    let rank = kept.len();
    let beta = qr::solve_upper(&g.r, &g.qy);
    let q = eng.basis.monos.len();
    let mut gamma = vec![0.0; q];
    for (b, v) in beta.iter().zip(&g.v) {
        for (gm, vm) in gamma.iter_mut().zip(v) {
            *gm += b * vm;
        }
    }
    let minv = invert_upper(&g.t);
    let ys2 = eng.y_scale * eng.y_scale;
    let mut rss = g.rss * ys2;

    let mut warnings = lay.warnings.clone();
    if !g.aliased.is_empty() {
        let mut aliased = g.aliased.clone();
        aliased.sort_unstable();
        warnings.push(ModelWarning::Aliased {
            names: aliased
                .iter()
                .filter_map(|&c| eng.cols.get(c).map(|x| x.name.clone()))
                .collect(),
            terms: aliased
                .iter()
                .map(|&c| eng.cols.get(c).and_then(|x| x.term))
                .collect(),
            cause: super::cause::alias_cause(&spec, &lay, &eng.cols, &aliased),
        });
    }

    let base: Vec<usize> = if spec.intercept { vec![0] } else { Vec::new() };
    let tss = eng.graded(&eng.a, &base).rss * ys2;
    if eng.y_scale == 0.0 {
        return Err(ModelError::ResponseZeroVariance);
    }
    let df_res = n - rank;
    if df_res == 0 {
        return Err(ModelError::ZeroResidualDf);
    }
    if !rss.is_finite() {
        return Err(ModelError::NonFiniteValue {
            variable: spec.response.name().to_string(),
            row: spec.row_numbers.first().unwrap_or(1),
        });
    }
    let exact = rss <= PERFECT_FIT_REL * tss;
    if exact {
        rss = 0.0;
        warnings.push(ModelWarning::ExactFit);
    }
    let sigma = (rss / df_res as f64).sqrt();

    let mut cov_means = Vec::new();
    for (v, var) in spec.vars.iter().enumerate() {
        if let Var::Numeric { values, .. } = var {
            if spec
                .terms
                .iter()
                .any(|t| t.parts.iter().any(|q| q.var == v))
            {
                let mean = match &lay.used {
                    UsedRows::All(n) => mean_of(values.get(..*n).unwrap_or(&[])),
                    UsedRows::Listed(rows) => {
                        let x: Vec<f64> = rows
                            .iter()
                            .map(|&i| values.get(i).copied().unwrap_or(0.0))
                            .collect();
                        mean_of(&x)
                    }
                };
                cov_means.push((v, mean));
            }
        }
    }

    Ok(Fit {
        spec,
        lay,
        eng,
        g,
        beta,
        gamma,
        minv,
        diag: OnceLock::new(),
        held: OnceLock::new(),
        kept,
        rss,
        tss,
        df_res,
        sigma,
        exact,
        cov_means,
        refined: OnceLock::new(),
        hc3: OnceLock::new(),
        robust: None,
        warnings,
    })
}

/// The value of `cell`, made by `make` if it has none yet. Unlike `OnceLock::get_or_init`, no
/// thread waits while another one makes it: `make` runs work on the thread pool, and a pool
/// thread that waited for it could be the very thread that work is queued on, which would
/// then never run (a deadlock). Two threads may both make the value; each makes the same, and
/// the first one stored is kept.
fn made_once<T>(cell: &OnceLock<T>, make: impl FnOnce() -> T) -> &T {
    if let Some(v) = cell.get() {
        return v;
    }
    let v = make();
    cell.get_or_init(|| v)
}

/// Spreads whose square (and its inverse) is safely a normal double: computed the plain way.
const SQUARES_SAFE: f64 = 1e-150;

/// Narrowest and widest range (largest minus smallest) of a response whose sums of squares
/// covey can hold as doubles: its squared spread times the rows stays within the normal
/// doubles (about 1e-308 to 1e308) with room to spare.
pub const RESPONSE_SPREAD_MIN: f64 = 1e-145;
/// See [`RESPONSE_SPREAD_MIN`].
pub const RESPONSE_SPREAD_MAX: f64 = 1e145;

/// The root mean square of `x` about `c`, in units of the largest deviation so that no
/// square overflows or underflows; 0 for no values or no spread.
fn root_mean_square(x: &[f64], c: f64) -> f64 {
    let big = x.iter().fold(0.0_f64, |m, v| m.max((v - c).abs()));
    if !(big > 0.0 && big.is_finite()) || x.is_empty() {
        return 0.0;
    }
    let ss = qr::sum_of(x, |v| {
        let d = (v - c) / big;
        d * d
    });
    big * (ss / x.len() as f64).sqrt()
}

/// What one block of rows gives the fit: the response's smallest and largest value, and the
/// block's triangular factor.
type BlockPart = ((f64, f64), Mat);

/// Blocks of rows factored side by side before their factors are merged into the running one.
const FACTORED_AT_ONCE: usize = 8;

/// Most working memory a fit may need, in bytes ([`working_bytes`]): 1 GiB, a share a
/// laptop can spare, and room for designs of about 1,900 coefficients. A model needing more
/// is refused before anything is allocated.
pub const MODEL_MEMORY_BUDGET: usize = 1 << 30;

/// The most working memory the factorisation of `p` columns on `n` rows can take, in bytes,
/// whatever the number of threads: [`FACTORED_AT_ONCE`] blocks of rows being factored (each
/// its rows under as many rows of zeros as it has columns, the response included), their
/// factors waiting to be merged, and three more square factors (the running one, a merge's
/// stacked pair and its result).
pub fn working_bytes(p: usize, n: usize) -> usize {
    let width = p.saturating_add(1);
    let rows = n.min(CHUNK_ROWS);
    let block = width.saturating_mul(width.saturating_add(rows));
    let square = width.saturating_mul(width);
    let matrices = block
        .saturating_mul(FACTORED_AT_ONCE)
        .saturating_add(square.saturating_mul(FACTORED_AT_ONCE + 4));
    matrices.saturating_mul(std::mem::size_of::<f64>())
}

/// More design columns than this can never be fitted within [`MODEL_MEMORY_BUDGET`]: their two
/// codings alone, `2 p²` doubles, would exceed it. The columns are counted before they are
/// listed, and a model with more is refused then.
const MAX_COLUMNS: usize = 8192;

/// The error for a model of `p` design columns (more than [`MAX_COLUMNS`]) on `n` rows.
fn too_many_columns(p: usize, n: usize) -> ModelError {
    within_budget(p, p, n)
        .err()
        .unwrap_or(ModelError::TooLarge {
            coefficients: p,
            megabytes: MODEL_MEMORY_BUDGET >> 20,
        })
}

/// Refuses a fit whose factorisation of `q` monomials on `n` rows, with the two codings of
/// `p` design columns in those monomials, would take more than [`MODEL_MEMORY_BUDGET`].
fn within_budget(p: usize, q: usize, n: usize) -> Result<(), ModelError> {
    let codings = q
        .saturating_mul(p)
        .saturating_mul(2 * std::mem::size_of::<f64>());
    let needed = working_bytes(q, n).saturating_add(codings);
    if needed > MODEL_MEMORY_BUDGET {
        return Err(ModelError::TooLarge {
            coefficients: p,
            megabytes: needed.div_ceil(1 << 20),
        });
    }
    Ok(())
}

/// Centre and scale of the bases and monomials from the first block of rows, then the
/// triangular factor of [W' | y'] in one pass over fixed blocks of [`CHUNK_ROWS`] rows,
/// computed in parallel and merged in block order (see [`crate::parallel`]) by
/// re-triangularising the block factors two at a time. The response's smallest and largest
/// values, for the checks that it is not constant and that its sums of squares can be held,
/// are taken along.
pub(crate) fn build_engine(
    spec: &ModelSpec,
    lay: &Layout,
    y: &[f64],
    treatment: (Vec<Column>, Vec<Vec<usize>>),
    effect: (Vec<Column>, Vec<Vec<usize>>),
) -> Result<Engine, ModelError> {
    let (cols, term_cols) = treatment;
    let (ecols, eterm_cols) = effect;
    let n = lay.used.len() as f64;
    // Every design column needs at least one monomial of its own: refuse a model far too
    // large before its monomials are even listed, and check again once they are.
    let p = cols.len().max(ecols.len());
    within_budget(p, p, lay.used.len())?;
    let blocks = lay.used.blocks(CHUNK_ROWS);

    // Centres and scales from the first block of rows (every row when there are at most
    // CHUNK_ROWS of them): any centre within the data's range takes the offset out of a
    // covariate, and it saves a pass over the rows.
    let first = lay.used.slice(blocks.first().cloned().unwrap_or(0..0));
    let mut basis = Basis::new(spec, lay, &[&cols, &ecols], &first);
    let q = basis.monos.len();
    within_budget(p, q, lay.used.len())?;
    // Unweighted: the centres and scales only condition the columns, and a weight must not
    // move the response's centre out of the data's range.
    let lead_block = Block::fill(spec, &basis, y, &first, 0.0, 1.0, None);
    let lead = lead_block.moments();
    let n_lead = lead.count.max(1.0);
    // Powers of two, so that scaling changes no digit of a monomial (the scaled columns
    // span exactly the space of the monomials).
    for (j, s) in basis.scale.iter_mut().enumerate() {
        let rms = (lead.m2[j] / n_lead + lead.mean[j] * lead.mean[j]).sqrt();
        *s = if rms > 0.0 && rms.is_finite() {
            2f64.powi(rms.log2().round().clamp(-1000.0, 1000.0) as i32)
        } else {
            1.0
        };
    }
    let (ym, ym2) = (lead.mean[q], lead.m2[q]);
    let (yc, ysc) = if spec.intercept {
        (ym, (ym2 / n_lead).sqrt())
    } else {
        (0.0, (ym2 / n_lead + ym * ym).sqrt())
    };
    let y_centre = if yc.is_finite() { yc } else { 0.0 };
    // Squares of values far from 1 overflow or underflow; such a response's spread is taken
    // in units of its largest deviation instead (the same number where both work).
    let ysc = if (SQUARES_SAFE..=1.0 / SQUARES_SAFE).contains(&ysc) {
        ysc
    } else {
        root_mean_square(lead_block.column(q), y_centre)
    };
    let y_scale = if ysc > 0.0 && ysc.is_finite() {
        ysc
    } else {
        1.0
    };
    let a = basis.matrix(lay, &cols);
    let ea = basis.matrix(lay, &ecols);
    if let Some(j) = (0..a.cols).find(|&j| !qr::all_finite(a.col(j))) {
        // A power of the centre overflows: so does the column at the rows near it.
        return Err(ModelError::NonFiniteValue {
            variable: cols.get(j).map(|c| c.name.clone()).unwrap_or_default(),
            row: first_overflow(spec, lay, &cols, j),
        });
    }

    // One pass: the triangular factor of each block, merged in block order, with the
    // response's range for the checks below. Blocks are factored [`FACTORED_AT_ONCE`] at a
    // time and folded in before the next ones, so that the factors waiting to be merged take
    // memory independent of the number of rows; the merges happen in the same order either
    // way.
    let mut y_range = (f64::INFINITY, f64::NEG_INFINITY);
    let mut r_aug = Mat::zeros(q + 1, q + 1);
    for (b, batch) in blocks.chunks(FACTORED_AT_ONCE).enumerate() {
        let partial: Vec<Result<BlockPart, ModelError>> = crate::parallel::map(batch, |at| {
            let rows = lay.used.slice(at.clone());
            let mut block =
                Block::fill(spec, &basis, y, &rows, y_centre, y_scale, weights_of(spec));
            block.check_finite(spec, &basis, &rows)?;
            let range = range_of(y, &rows);
            Ok((range, qr::block_factor(&mut block.a)))
        });
        for (k, part) in partial.into_iter().enumerate() {
            let (range, f) = part?;
            y_range = (y_range.0.min(range.0), y_range.1.max(range.1));
            r_aug = if b == 0 && k == 0 {
                f
            } else {
                qr::merge_factors(&r_aug, &f)
            };
        }
    }
    // Constant when the smallest and largest response are equal: whatever the scale, unlike
    // a sum of squares, which is 0 for values near 1e-200 and infinite near 1e200.
    let width = y_range.1 - y_range.0;
    if n == 0.0 || width.is_nan() || width <= 0.0 {
        return Err(ModelError::ResponseZeroVariance);
    }
    // Sums of squares of the response must be numbers: its spread squared, times the rows
    // and some room, must neither overflow nor fall below the normal doubles.
    if !(RESPONSE_SPREAD_MIN..=RESPONSE_SPREAD_MAX).contains(&width) {
        return Err(ModelError::ResponseOutOfRange { width });
    }
    let y_offset = if spec.intercept {
        spec.response_offset
    } else {
        0.0
    };
    Ok(Engine {
        basis,
        cols,
        term_cols,
        a,
        ecols,
        eterm_cols,
        ea,
        y_centre,
        y_scale,
        y_offset,
        r_aug,
    })
}

/// a + b as an unevaluated sum (hi, lo) with hi = fl(a + b) (Knuth's TwoSum).
fn two_sum(a: f64, b: f64) -> (f64, f64) {
    let s = a + b;
    let bb = s - a;
    (s, (a - (s - bb)) + (b - bb))
}

/// The sum of two double-double numbers.
fn dd_add(a: (f64, f64), b: (f64, f64)) -> (f64, f64) {
    let (s, e) = two_sum(a.0, b.0);
    let e = e + a.1 + b.1;
    let h = s + e;
    (h, e - (h - s))
}

/// A double-double number times a double (the product's rounding error from a fused
/// multiply-add).
fn dd_mul(a: (f64, f64), b: f64) -> (f64, f64) {
    let p = a.0 * b;
    let e = a.0.mul_add(b, -p) + a.1 * b;
    let h = p + e;
    (h, e - (h - p))
}

/// Design column `c` as written at data row `i`, in double-double (factor parts are 0 or
/// +-1; powers are products carried in double-double).
fn column_dd(spec: &ModelSpec, c: &Column, i: usize) -> (f64, f64) {
    let mut v = (1.0, 0.0);
    for p in &c.parts {
        match p {
            design::ColPart::Numeric { var, transform } => {
                let x = match spec.vars.get(*var) {
                    Some(Var::Numeric { values, .. }) => values.get(i).copied().unwrap_or(f64::NAN),
                    _ => f64::NAN,
                };
                let k = match transform {
                    super::Transform::Power(k) => *k,
                    _ => 1,
                };
                for _ in 0..k {
                    v = dd_mul(v, x);
                }
            }
            _ => {
                let f = design::eval_row(
                    spec,
                    &Column {
                        term: None,
                        name: String::new(),
                        parts: vec![p.clone()],
                    },
                    i,
                );
                v = (v.0 * f, v.1 * f);
            }
        }
    }
    v
}

/// The data-file line of the first used row where design column `j`, as written, is not
/// finite (the first used row when none is).
fn first_overflow(spec: &ModelSpec, lay: &Layout, cols: &[Column], j: usize) -> usize {
    let row_no = |i: usize| spec.row_numbers.get(i).unwrap_or(i);
    let first = lay.used.get(0).unwrap_or(0);
    let Some(c) = cols.get(j) else {
        return row_no(first);
    };
    lay.used
        .iter()
        .find(|&i| !design::eval_row(spec, c, i).is_finite())
        .map_or(row_no(first), row_no)
}

/// The scaled monomials and the response at a block of rows, column-major, below as many
/// rows of zeros as there are columns (see [`qr::block_factor`]).
struct Block {
    a: Mat,
    /// Rows of zeros above the data.
    top: usize,
}

impl Block {
    /// The block of `rows`, the response as (y - y_centre) / y_scale; with case weights, each
    /// row (monomials and response) times the square root of its weight, so that least
    /// squares on the block is weighted least squares on the rows.
    fn fill(
        spec: &ModelSpec,
        basis: &Basis,
        y: &[f64],
        rows: &[usize],
        y_centre: f64,
        y_scale: f64,
        weights: Option<&[f64]>,
    ) -> Block {
        let q = basis.monos.len();
        let width = q + 1;
        let m = rows.len();
        let ld = width + m;
        let mut a = Mat::zeros(ld, width);
        basis.fill(spec, rows, &mut a, width);
        let inv = 1.0 / y_scale;
        if let Some(col) = a.data.get_mut(q * ld + width..(q + 1) * ld) {
            for (o, &i) in col.iter_mut().zip(rows) {
                *o = (y.get(i).copied().unwrap_or(f64::NAN) - y_centre) * inv;
            }
        }
        if let Some(w) = weights {
            let roots: Vec<f64> = rows
                .iter()
                .map(|&i| w.get(i).copied().unwrap_or(f64::NAN).sqrt())
                .collect();
            for j in 0..width {
                if let Some(col) = a.data.get_mut(j * ld + width..(j + 1) * ld) {
                    for (o, r) in col.iter_mut().zip(&roots) {
                        *o *= r;
                    }
                }
            }
        }
        Block { a, top: width }
    }

    /// Column j's values at the block's rows.
    fn column(&self, j: usize) -> &[f64] {
        self.a.col(j).get(self.top..).unwrap_or(&[])
    }

    /// The first non-finite value in row order (a product or power overflowed; the inputs
    /// themselves were checked in the layout), as an error naming the column and the row.
    fn check_finite(
        &self,
        spec: &ModelSpec,
        basis: &Basis,
        rows: &[usize],
    ) -> Result<(), ModelError> {
        let width = self.a.cols;
        let bad = |j: usize| !qr::all_finite(self.column(j));
        if !(0..width).any(bad) {
            return Ok(());
        }
        for (r, &i) in rows.iter().enumerate() {
            let first =
                (0..width).find(|&j| self.column(j).get(r).is_some_and(|v: &f64| !v.is_finite()));
            if let Some(j) = first {
                let variable = basis
                    .names
                    .get(j)
                    .cloned()
                    .unwrap_or_else(|| spec.response.name().to_string());
                return Err(ModelError::NonFiniteValue {
                    variable,
                    row: spec.row_numbers.get(i).unwrap_or(i),
                });
            }
        }
        Ok(())
    }

    /// Mean ([`mean_of`]) and centred sum of squares of each column over the block.
    fn moments(&self) -> Moments {
        let width = self.a.cols;
        let mut out = Moments::empty(width);
        for j in 0..width {
            let x = self.column(j);
            let k = x.len() as f64;
            let mean = mean_of(x);
            out.mean[j] = mean;
            out.m2[j] = qr::sum_of(x, |v| (v - mean) * (v - mean));
            out.count = k;
        }
        out
    }
}

/// The smallest and largest of `y` at `rows`.
fn range_of(y: &[f64], rows: &[usize]) -> (f64, f64) {
    rows.iter()
        .filter_map(|&r| y.get(r))
        .fold((f64::INFINITY, f64::NEG_INFINITY), |(lo, hi), &v| {
            (lo.min(v), hi.max(v))
        })
}

/// The case weights of a weighted model, row by row (None without weights).
pub(crate) fn weights_of(spec: &ModelSpec) -> Option<&[f64]> {
    match &spec.weights {
        Some(Var::Numeric { values, .. }) => Some(values.as_slice()),
        _ => None,
    }
}

/// The mean of a covariate over the fitted rows, by covey's one mean (the same number
/// `table summary` and `compute`'s `mean(X)` give on those rows); 0 for no values.
fn mean_of(x: &[f64]) -> f64 {
    if x.is_empty() {
        return 0.0;
    }
    crate::stats::describe::mean(x)
}

/// Count, means and centred sums of squares of a set of columns.
struct Moments {
    count: f64,
    mean: Vec<f64>,
    m2: Vec<f64>,
}

impl Moments {
    fn empty(width: usize) -> Moments {
        Moments {
            count: 0.0,
            mean: vec![0.0; width],
            m2: vec![0.0; width],
        }
    }
}

// The t and F functions live in `dist`, the one place they are defined.
pub(crate) use super::dist::{f_upper_p as f_p, t_quantile, t_two_sided_p as t_p};

pub(crate) fn check_level(level: f64) -> Result<(), ModelError> {
    if level > 0.0 && level < 1.0 {
        Ok(())
    } else {
        Err(ModelError::BadLevel { value: level })
    }
}

impl Fit {
    /// Half the log-likelihood's share from case weights: the sum of ln w over the fitted
    /// rows (0 without weights).
    pub(crate) fn sum_log_weights(&self) -> f64 {
        match weights_of(&self.spec) {
            Some(w) => self
                .lay
                .used
                .iter()
                .map(|i| w.get(i).copied().unwrap_or(1.0).ln())
                .sum(),
            None => 0.0,
        }
    }

    /// Whether the fit has case weights.
    pub fn is_weighted(&self) -> bool {
        self.spec.weights.is_some()
    }

    /// The name of the weights' column, if any.
    pub fn weights_name(&self) -> Option<&str> {
        self.spec.weights.as_ref().map(|w| w.name())
    }

    /// Whether this is the robust (HC3) view of a fit.
    pub fn is_robust(&self) -> bool {
        self.robust.is_some()
    }

    /// The factor of the HC3 meat (see [`Fit::hc3`]): each fixed block of rows factored on
    /// its own, the factors merged in block order; the rows of leverage near 1
    /// ([`NEAR_ONE`]) come last, in row order, with 1 - h and the residual taken from the
    /// other rows ([`RowPass::near_one`]). A factor of the rows, rather than the sum of their
    /// outer products and its square root, keeps the small directions of the meat when one
    /// row's term is many orders of magnitude larger than the others'.
    fn hc3_factor(&self) -> Result<Arc<Mat>, ModelError> {
        let made = made_once(&self.hc3, || {
            let blocks = self.lay.used.blocks(CHUNK_ROWS);
            let pass = RowPass::new(self);
            let parts =
                crate::parallel::map(&blocks, |at| pass.meat(&self.lay.used.slice(at.clone())));
            let k = self.kept.len();
            let mut total = Mat::zeros(k, k);
            let mut near = Vec::new();
            for (b, (f, rows)) in parts.into_iter().enumerate() {
                total = if b == 0 {
                    f
                } else {
                    qr::merge_factors(&total, &f)
                };
                near.extend(rows);
            }
            if !near.is_empty() {
                let sums = crate::parallel::map(&blocks, |at| {
                    pass.near_one(&self.lay.used.slice(at.clone()), &near)
                });
                let mut s1 = vec![0.0; near.len()];
                let mut s2 = vec![0.0; near.len()];
                for (a, b) in sums {
                    for (t, v) in s1.iter_mut().zip(a) {
                        *t += v;
                    }
                    for (t, v) in s2.iter_mut().zip(b) {
                        *t += v;
                    }
                }
                let mut a = Mat::zeros(k + near.len(), k);
                for (t, (r, (s1, s2))) in near.iter().zip(s1.iter().zip(&s2)).enumerate() {
                    // sum_(j != i) h_ij^2 = h_i (1 - h_i) and sum_(j != i) h_ij e_j = -h_i e_i
                    // (P is idempotent and annihilates e): no difference of near-equal terms.
                    let one_h = s1 / r.h;
                    if one_h.is_nan() || one_h <= LEVERAGE_ONE_TOL {
                        return Err(self.spec.row_numbers.get(r.row).unwrap_or(r.row));
                    }
                    // The deleted residual e_i / (1 - h_i) = -S2 / S1, in the response's units.
                    let d = (s2 / s1 * self.eng.y_scale).abs();
                    for (c, u) in r.u.iter().enumerate() {
                        a.set(k + t, c, u * d);
                    }
                }
                total = qr::merge_factors(&total, &qr::block_factor(&mut a));
            }
            Ok(Arc::new(total))
        });
        made.clone()
            .map_err(|row| ModelError::RobustLeverageOne { row })
    }

    /// The same fit whose standard errors, tests and limits use the heteroscedasticity-
    /// consistent covariance HC3 of MacKinnon & White (1985, "Some heteroskedasticity-
    /// consistent covariance matrix estimators with improved finite sample properties",
    /// Journal of Econometrics 29): (X'X)^-1 X' diag(e_i^2 / (1 - h_i)^2) X (X'X)^-1, with
    /// weighted residuals and leverages in a weighted fit. Estimates do not change; t and F
    /// keep the residual df. The sandwich is formed in the fit's orthonormal coordinates
    /// u_i = R^-T V' w_i, so it keeps the accuracy of the centred fit.
    pub fn robust(&self) -> Result<Fit, ModelError> {
        let f = self.hc3_factor()?;
        let mut out = self.clone();
        out.robust = Some(f);
        Ok(out)
    }

    /// The vector w with Cov(l1, l2) = w1 . w2 from a function's coordinates t = R^-T s:
    /// sigma t, or F t in the robust view.
    pub(crate) fn spread(&self, t: Vec<f64>) -> Vec<f64> {
        match &self.robust {
            None => t.into_iter().map(|v| v * self.sigma).collect(),
            Some(f) => (0..f.rows)
                .map(|r| {
                    (0..f.cols)
                        .map(|c| f.get(r, c) * t.get(c).copied().unwrap_or(0.0))
                        .sum()
                })
                .collect(),
        }
    }

    /// The robust (HC3) Wald test that the coordinates of the response along the columns
    /// `extra` of the sub-fit `sub` are 0: (F statistic, df). The hypothesis space D is the
    /// part of those columns orthogonal to the sub-fit's earlier columns; its coordinates
    /// in the full fit's orthonormal basis are E = F_full' S_sub with F = R_w V R^-1 (R_w
    /// the monomials' triangular factor), and the statistic g' (E' M E)^-1 g / d with
    /// g = D'y and M = F'F the HC3 meat (Wald 1943; White 1980, Econometrica 48).
    pub(crate) fn robust_wald(
        &self,
        sub: &Graded,
        extra: &[usize],
    ) -> Result<(f64, usize), ModelError> {
        let f = self.hc3_factor()?;
        let e = &self.eng;
        let q = e.basis.monos.len();
        let orth = |g: &Graded| -> Mat {
            // R_w V R^-1, q x k, column by column.
            let k = g.kept.len();
            let mut y = Mat::zeros(q, k);
            for (c, v) in g.v.iter().enumerate() {
                for i in 0..q {
                    let s: f64 = (i..q)
                        .map(|m| e.r_aug.get(i, m) * v.get(m).copied().unwrap_or(0.0))
                        .sum();
                    y.set(i, c, s);
                }
            }
            let mut z = Mat::zeros(q, k);
            for c in 0..k {
                let d = g.r.get(c, c);
                for i in 0..q {
                    let mut s = y.get(i, c);
                    for j in 0..c {
                        s -= z.get(i, j) * g.r.get(j, c);
                    }
                    z.set(i, c, if d != 0.0 { s / d } else { 0.0 });
                }
            }
            z
        };
        let full = orth(&self.g);
        let part = orth(sub);
        let pos: Vec<usize> = sub
            .kept
            .iter()
            .enumerate()
            .filter(|(_, c)| extra.contains(c))
            .map(|(i, _)| i)
            .collect();
        let d = pos.len();
        if d == 0 {
            return Ok((f64::NAN, 0));
        }
        let k = self.kept.len();
        // E (k x d) and g (d).
        let mut em = nalgebra::DMatrix::<f64>::zeros(k, d);
        for (a, &p) in pos.iter().enumerate() {
            for r in 0..k {
                let s: f64 = (0..q).map(|i| full.get(i, r) * part.get(i, p)).sum();
                em[(r, a)] = s;
            }
        }
        let g = nalgebra::DVector::from_iterator(
            d,
            pos.iter()
                .map(|&p| sub.qy.get(p).copied().unwrap_or(0.0) * e.y_scale),
        );
        // E' M E = (F E)' (F E).
        let fm = nalgebra::DMatrix::from_fn(k, k, |i, j| f.get(i, j));
        let fe = fm * &em;
        let v = fe.transpose() * &fe;
        let stat = match v.clone().cholesky() {
            Some(ch) => {
                let x = ch.solve(&g);
                g.dot(&x) / d as f64
            }
            None => f64::NAN,
        };
        Ok((stat, d))
    }

    /// Estimate and standard error of a linear function of the fit given by its values on the
    /// scaled monomials (a row of [`Fit::row_at`], or a combination of such rows). Err(())
    /// when it is not estimable.
    pub(crate) fn linear(&self, l: &[f64]) -> Result<(f64, f64), ()> {
        let (est, w) = self.linear_parts(l)?;
        Ok((est, w.iter().map(|v| v * v).sum::<f64>().sqrt()))
    }

    /// Estimate of the function `l` (see [`Fit::linear`]) and the vector
    /// w = sigma R^-T (V' l), so that Cov(l1, l2) = w1 . w2. Everything is evaluated in the
    /// centred, scaled monomials, so no cancellation against large column means or powers
    /// happens. Err(()) when `l` has a component along a direction the data do not determine
    /// (not estimable).
    pub(crate) fn linear_parts(&self, l: &[f64]) -> Result<(f64, Vec<f64>), ()> {
        if !self.estimable(l) {
            return Err(());
        }
        let e = &self.eng;
        let l0 = e
            .basis
            .constant
            .map(|c| l.get(c).copied().unwrap_or(0.0) * e.basis.scale[c])
            .unwrap_or(0.0);
        let fitted: f64 = l.iter().zip(&self.gamma).map(|(a, b)| a * b).sum();
        // The offset goes on last, so the small part keeps its digits until then.
        let est = l0 * e.y_offset + (l0 * e.y_centre + e.y_scale * fitted);
        let s: Vec<f64> = self
            .g
            .v
            .iter()
            .map(|v| v.iter().zip(l).map(|(a, b)| a * b).sum())
            .collect();
        let w = self.spread(qr::solve_upper_transpose(&self.g.r, &s));
        Ok((est, w))
    }

    /// Whether the function `l` (values on the scaled monomials) is determined by the data:
    /// it has no component along a direction that vanishes on every row.
    pub(crate) fn estimable(&self, l: &[f64]) -> bool {
        let norm: f64 = l.iter().map(|v| v * v).sum::<f64>().sqrt();
        self.g.null.iter().all(|z| {
            let nz: f64 = z.iter().map(|v| v * v).sum::<f64>().sqrt();
            let d: f64 = z.iter().zip(l).map(|(a, b)| a * b).sum();
            d.abs() <= ESTIMABLE_TOL * norm * nz
        })
    }

    /// Overall statistics of the fit.
    pub fn summary(&self) -> FitSummary {
        let n = self.lay.used.len();
        let rank = self.kept.len();
        let icpt = usize::from(self.spec.intercept);
        let df_model = rank.saturating_sub(icpt);
        let r2 = 1.0 - self.rss / self.tss;
        let nf = n as f64;
        let adj = 1.0 - (1.0 - r2) * (n - icpt) as f64 / self.df_res as f64;
        let (f, p) = if df_model > 0 && !self.exact {
            let f = ((self.tss - self.rss) / df_model as f64) / (self.rss / self.df_res as f64);
            (Some(f), Some(f_p(f, df_model, self.df_res)))
        } else {
            (None, None)
        };
        // With case weights, the rows' variances are sigma^2 / w, which adds half the sum of
        // the log weights to the log-likelihood.
        let loglik = -nf / 2.0 * ((2.0 * std::f64::consts::PI).ln() + (self.rss / nf).ln() + 1.0)
            + 0.5 * self.sum_log_weights();
        let k = (rank + 1) as f64;
        FitSummary {
            n,
            dropped_missing: self.lay.total_rows - n - self.lay.zero_weight,
            dropped_zero_weight: self.lay.zero_weight,
            df_model,
            df_residual: self.df_res,
            sigma: self.sigma,
            r_squared: r2,
            adj_r_squared: adj,
            f,
            p,
            aic: -2.0 * loglik + 2.0 * k,
            bic: -2.0 * loglik + nf.ln() * k,
            rss: self.rss,
            tss: self.tss,
        }
    }

    /// Whether the model fits the data exactly (residual sum of squares 0 to rounding): its
    /// coefficients are exact, standard errors 0, and tests undefined.
    pub fn is_exact(&self) -> bool {
        self.exact
    }

    /// The kept coefficients of the model as written: (estimate, the vector w with
    /// se = |w|, and a bound on the size of the numbers the estimate was recovered from).
    fn written_coefficients(&self) -> Vec<(usize, f64, Vec<f64>, f64)> {
        let e = &self.eng;
        let k = self.kept.len();
        let mut out = Vec::with_capacity(k);
        for (i, &c) in self.kept.iter().enumerate() {
            let row: Vec<f64> = (0..k).map(|j| self.minv.get(i, j)).collect();
            let mut est: f64 = row.iter().zip(&self.beta).map(|(a, b)| a * b).sum();
            let mut size: f64 = row.iter().zip(&self.beta).map(|(a, b)| (a * b).abs()).sum();
            est *= e.y_scale;
            size *= e.y_scale;
            let is_intercept = self.spec.intercept && c == 0;
            if is_intercept {
                est = e.y_offset + (e.y_centre + est);
                size += e.y_centre.abs() + e.y_offset.abs();
            }
            let w = self.spread(qr::solve_upper_transpose(&self.g.r, &row));
            out.push((c, est, w, size));
        }
        out
    }

    /// The coefficients of the model as written after one step of iterative refinement
    /// (Björck 1967, "Iterative refinement of linear least squares solutions I", BIT 7, in
    /// the corrected semi-normal form of Björck's "Numerical Methods for Least Squares
    /// Problems", 1996, section 2.5): residuals r = y - X b from the columns as written,
    /// accumulated in double-double arithmetic (Dekker 1971, "A floating-point technique for
    /// extending the available precision", Numer. Math. 18), then the correction from
    /// R'R d = V'W'r. Taken only when some coefficient's recovery loses digits
    /// ([`REFINE_BELOW_DIGITS`]) and every covariate enters through powers; None otherwise,
    /// or when the terms of X b are too large beside the response for double-double to
    /// resolve the residual.
    fn refined_coefficients(&self) -> Option<&Vec<f64>> {
        made_once(&self.refined, || self.refine()).as_ref()
    }

    fn refine(&self) -> Option<Vec<f64>> {
        let base = self.written_coefficients();
        let loses = base.iter().any(|(_, est, _, size)| {
            *size > 0.0 && *size / est.abs() * 4.0 * f64::EPSILON > 10f64.powf(-REFINE_BELOW_DIGITS)
        });
        if !loses {
            return None;
        }
        let cols: Vec<&Column> = self
            .kept
            .iter()
            .filter_map(|&c| self.eng.cols.get(c))
            .collect();
        let polynomial = cols.iter().all(|c| {
            c.parts.iter().all(|p| {
                !matches!(
                    p,
                    design::ColPart::Numeric {
                        transform: super::Transform::Log | super::Transform::Sqrt,
                        ..
                    }
                )
            })
        });
        if !polynomial {
            return None;
        }
        let b: Vec<f64> = base.iter().map(|x| x.1).collect();
        let y: &[f64] = match &self.spec.response {
            Var::Numeric { values, .. } => values,
            Var::Factor { .. } => return None,
        };
        let q = self.eng.basis.monos.len();
        let offset = self.spec.response_offset;
        let blocks = self.lay.used.blocks(CHUNK_ROWS);
        // Per block: W'r, the largest |x_j b_j| sum and the largest |y|.
        let parts = crate::parallel::map(&blocks, |at| {
            let rows = self.lay.used.slice(at.clone());
            let m = rows.len();
            let mut w = Mat::zeros(m, q);
            self.eng.basis.fill(&self.spec, &rows, &mut w, 0);
            let mut g = vec![(0.0, 0.0); q];
            let (mut terms_max, mut y_max) = (0.0f64, 0.0f64);
            for (r, &i) in rows.iter().enumerate() {
                let yi = y.get(i).copied().unwrap_or(f64::NAN);
                let mut acc = two_sum(offset, yi);
                y_max = y_max.max(acc.0.abs());
                let mut terms = 0.0;
                for (c, bj) in cols.iter().zip(&b) {
                    let x = column_dd(&self.spec, c, i);
                    let t = dd_mul(x, *bj);
                    terms += t.0.abs();
                    acc = dd_add(acc, (-t.0, -t.1));
                }
                // Weighted least squares: the gradient is W'(w r).
                if let Some(wt) = weights_of(&self.spec) {
                    acc = dd_mul(acc, wt.get(i).copied().unwrap_or(1.0));
                }
                terms_max = terms_max.max(terms);
                // W'r in double-double too: it is the small gradient left by the large
                // residuals of an imperfect fit.
                for (gm, col) in g.iter_mut().zip(w.data.chunks_exact(m)) {
                    *gm = dd_add(*gm, dd_mul(acc, col[r]));
                }
            }
            (g, terms_max, y_max)
        });
        let mut gdd = vec![(0.0, 0.0); q];
        let (mut terms_max, mut y_max) = (0.0f64, 0.0f64);
        for (gb, t, ym) in parts {
            for (a, v) in gdd.iter_mut().zip(gb) {
                *a = dd_add(*a, v);
            }
            terms_max = terms_max.max(t);
            y_max = y_max.max(ym);
        }
        let g: Vec<f64> = gdd.iter().map(|v| v.0 + v.1).collect();
        let resolved = terms_max <= REFINE_MAX_RATIO * y_max;
        if !resolved || !g.iter().all(|v| v.is_finite()) {
            return None;
        }
        let s: Vec<f64> = self
            .g
            .v
            .iter()
            .map(|v| v.iter().zip(&g).map(|(a, c)| a * c).sum())
            .collect();
        let z = qr::solve_upper_transpose(&self.g.r, &s);
        let dv = qr::solve_upper(&self.g.r, &z);
        let k = self.kept.len();
        Some(
            (0..k)
                .map(|i| {
                    let d: f64 = (0..k).map(|j| self.minv.get(i, j) * dv[j]).sum();
                    b[i] + d
                })
                .collect(),
        )
    }

    /// Estimated coefficients with t tests and confidence limits at `level` (e.g. 0.95).
    /// Aliased coefficients are omitted. An invalid level gives NaN limits; an exact fit has
    /// standard errors 0 and undefined t and p.
    pub fn coefficients(&self, level: f64) -> Vec<Coefficient> {
        let tq = if level > 0.0 && level < 1.0 {
            t_quantile(0.5 + level / 2.0, self.df_res)
        } else {
            f64::NAN
        };
        let refined = self.refined_coefficients();
        self.written_coefficients()
            .into_iter()
            .enumerate()
            .map(|(i, (c, est, w, _))| {
                let est = refined.and_then(|b| b.get(i).copied()).unwrap_or(est);
                let se = w.iter().map(|v| v * v).sum::<f64>().sqrt();
                let t = if self.exact { f64::NAN } else { est / se };
                Coefficient {
                    name: self
                        .eng
                        .cols
                        .get(c)
                        .map(|x| x.name.clone())
                        .unwrap_or_default(),
                    estimate: est,
                    se,
                    t,
                    p: if self.exact {
                        f64::NAN
                    } else {
                        t_p(t, self.df_res)
                    },
                    lower: est - tq * se,
                    upper: est + tq * se,
                }
            })
            .collect()
    }

    /// The coefficients whose recovery from the centred fit keeps fewer than
    /// [`COEFFICIENT_DIGITS_NOTE`] significant digits, with the digits it keeps: the
    /// estimate is a sum of terms as large as the bound, so rounding at 1e-16 of them is
    /// carried into it (the tests and every other result are not affected).
    pub fn coefficient_digits(&self) -> Vec<(String, f64)> {
        if self.refined_coefficients().is_some() {
            return Vec::new();
        }
        self.written_coefficients()
            .into_iter()
            .filter_map(|(c, est, _, size)| {
                let digits = if size == 0.0 {
                    f64::INFINITY
                } else if est == 0.0 {
                    0.0
                } else {
                    -(size / est.abs() * 4.0 * f64::EPSILON).log10()
                };
                let name = self.eng.cols.get(c).map(|x| x.name.clone())?;
                (digits < COEFFICIENT_DIGITS_NOTE).then_some((name, digits.max(0.0)))
            })
            .collect()
    }
    /// Warnings about this fit (also the public field `warnings`).
    pub fn warnings(&self) -> &[ModelWarning] {
        &self.warnings
    }

    /// Whether the model has a factor other than `factor` (adjusted means then average over
    /// its levels).
    pub fn has_other_factors(&self, factor: &str) -> bool {
        self.lay
            .factors
            .iter()
            .any(|f| design::var_name(&self.spec, f.var) != factor)
    }

    /// The names of the model's factors other than `factor`, in the order they enter it.
    pub fn other_factors(&self, factor: &str) -> Vec<String> {
        self.lay
            .factors
            .iter()
            .map(|f| design::var_name(&self.spec, f.var))
            .filter(|n| n != factor)
            .collect()
    }

    /// Each numeric covariate of the model (variable name) with its mean over the fitted
    /// rows, in variable order: the values adjusted means use by default.
    pub fn covariate_means(&self) -> Vec<(String, f64)> {
        self.cov_means
            .iter()
            .map(|&(v, m)| (design::var_name(&self.spec, v), m))
            .collect()
    }

    /// The smallest and largest value of each numeric covariate over the fitted rows, in the
    /// order of [`Fit::covariate_means`]: the resolution its mean is shown at.
    pub fn covariate_ranges(&self) -> Vec<(f64, f64)> {
        self.cov_means
            .iter()
            .map(|&(v, _)| match self.spec.vars.get(v) {
                Some(Var::Numeric { values, .. }) => {
                    let at = |i: usize| values.get(i).copied().unwrap_or(f64::NAN);
                    let fold = |(lo, hi): (f64, f64), x: f64| (lo.min(x), hi.max(x));
                    let start = (f64::INFINITY, f64::NEG_INFINITY);
                    match &self.lay.used {
                        UsedRows::All(n) => (0..*n).map(at).fold(start, fold),
                        UsedRows::Listed(rows) => rows.iter().map(|&i| at(i)).fold(start, fold),
                    }
                }
                _ => (f64::NAN, f64::NAN),
            })
            .collect()
    }

    /// Names of the terms in written order.
    pub fn term_names(&self) -> Vec<String> {
        self.lay.term_names.clone()
    }

    /// How the coefficients of the factor terms read: (whether some compare levels with
    /// a reference level, the terms that have one coefficient per level of a factor). A term
    /// has one per level when nothing earlier in the model holds the constant it would be
    /// compared with: a factor first in a model without intercept, or `g by x` without `x`.
    pub fn factor_coding(&self) -> (bool, Vec<String>) {
        let names = self.term_names();
        let codings = design::factor_codings(&self.spec);
        let contrast = codings.iter().any(|c| c.1);
        let per_level = codings
            .iter()
            .filter(|c| c.2)
            .filter_map(|c| names.get(c.0).cloned())
            .collect();
        (contrast, per_level)
    }

    /// Number of estimated (non-aliased) coefficients.
    pub fn n_coef(&self) -> usize {
        self.kept.len()
    }

    /// Names of all design columns, aliased ones included, in design order.
    pub fn column_names(&self) -> Vec<String> {
        self.eng.cols.iter().map(|c| c.name.clone()).collect()
    }

    /// Residual degrees of freedom.
    pub fn df_residual(&self) -> usize {
        self.df_res
    }

    /// Residual sum of squares.
    pub fn rss(&self) -> f64 {
        self.rss
    }

    /// The data-file line of the k-th fitted row (in the order of [`Fit::diagnostics`]).
    pub fn row_number(&self, k: usize) -> Option<usize> {
        let i = self.lay.used.get(k)?;
        Some(self.spec.row_numbers.get(i).unwrap_or(i))
    }

    /// Indices (into the spec's variables) of the rows the model was fitted to, in order.
    pub(crate) fn used_rows(&self) -> &UsedRows {
        &self.lay.used
    }

    /// The spec this model was fitted from (in a model without an intercept, with its
    /// response offset folded into the response values).
    pub fn spec(&self) -> &ModelSpec {
        &self.spec
    }

    /// The scalars that row diagnostics need. The row values themselves (residuals, fitted
    /// values, leverages: [`Fit::residuals`], [`Fit::fitted_values`], [`Fit::leverages`])
    /// are computed from the design by whoever needs them, a block at a time, rather than
    /// held for every row. Leverage h_i = |R^-T z_i|^2; Cook's distance
    /// e^2 h / (p s^2 (1-h)^2); externally studentized residual e / (s_(i) sqrt(1-h)) with
    /// s_(i)^2 = (RSS - e^2/(1-h)) / (df - 1) (Belsley, Kuh & Welsch, "Regression
    /// Diagnostics", 1980, chapter 2).
    pub fn diagnostics(&self) -> &Diagnostics {
        self.diag.get_or_init(|| Diagnostics {
            n: self.lay.used.len(),
            rank: self.kept.len() as f64,
            s2: self.sigma * self.sigma,
            rss: self.rss,
            df_res: self.df_res,
        })
    }

    /// Residuals of the fitted rows at positions `at` (in fitted-row order; cut at the last
    /// row). Each row's value depends on that row alone, so it is the same to the bit
    /// whatever range it is asked for in.
    pub fn residuals(&self, at: Range<usize>) -> Cow<'_, [f64]> {
        self.row_values(at, RowValue::Residual)
    }

    /// Fitted values of the fitted rows at positions `at`, as [`Fit::residuals`].
    pub fn fitted_values(&self, at: Range<usize>) -> Cow<'_, [f64]> {
        self.row_values(at, RowValue::Fitted)
    }

    /// Leverages (hat values) of the fitted rows at positions `at`, as [`Fit::residuals`].
    pub fn leverages(&self, at: Range<usize>) -> Cow<'_, [f64]> {
        self.row_values(at, RowValue::Leverage)
    }

    /// One value per fitted row at positions `at`. Up to [`HELD_ROWS`] rows, all three kinds
    /// are computed in one pass on first use and kept; beyond, each call computes its own.
    fn row_values(&self, at: Range<usize>, what: RowValue) -> Cow<'_, [f64]> {
        let n = self.lay.used.len();
        let at = at.start.min(n)..at.end.min(n);
        if n <= HELD_ROWS {
            let held = made_once(&self.held, || {
                let mut h = HeldRows {
                    fitted: vec![0.0; n],
                    residuals: vec![0.0; n],
                    leverage: vec![0.0; n],
                };
                self.pass_over(
                    0..n,
                    Outputs {
                        fitted: Some(&mut h.fitted),
                        residual: Some(&mut h.residuals),
                        leverage: Some(&mut h.leverage),
                    },
                );
                h
            });
            let all = match what {
                RowValue::Fitted => &held.fitted,
                RowValue::Residual => &held.residuals,
                RowValue::Leverage => &held.leverage,
            };
            return Cow::Borrowed(all.get(at).unwrap_or_default());
        }
        Cow::Owned(self.computed_values(at, what))
    }

    /// [`Fit::row_values`] computed for these rows alone, whatever the fit's size.
    pub(crate) fn computed_values(&self, at: Range<usize>, what: RowValue) -> Vec<f64> {
        let n = self.lay.used.len();
        let at = at.start.min(n)..at.end.min(n);
        let mut out = vec![0.0; at.len()];
        let outputs = match what {
            RowValue::Fitted => Outputs {
                fitted: Some(&mut out),
                residual: None,
                leverage: None,
            },
            RowValue::Residual => Outputs {
                fitted: None,
                residual: Some(&mut out),
                leverage: None,
            },
            RowValue::Leverage => Outputs {
                fitted: None,
                residual: None,
                leverage: Some(&mut out),
            },
        };
        self.pass_over(at, outputs);
        out
    }

    /// Fills `out` (each as long as `at`) for the fitted rows at positions `at`, in blocks of
    /// [`CHUNK_ROWS`] (in parallel beyond one block).
    fn pass_over(&self, at: Range<usize>, out: Outputs<'_>) {
        let pass = RowPass::new(self);
        if at.len() <= CHUNK_ROWS {
            // One block: on this thread, without starting the pool.
            pass.fill(&self.lay.used.slice(at), out);
            return;
        }
        fn chunks(o: Option<&mut [f64]>) -> impl Iterator<Item = Option<&mut [f64]>> {
            o.into_iter()
                .flat_map(|v| v.chunks_mut(CHUNK_ROWS))
                .map(Some)
        }
        let (mut f, mut r, mut h) = (
            chunks(out.fitted),
            chunks(out.residual),
            chunks(out.leverage),
        );
        let blocks: Vec<(usize, Outputs<'_>)> = (0..at.len().div_ceil(CHUNK_ROWS))
            .map(|i| {
                let o = Outputs {
                    fitted: f.next().flatten(),
                    residual: r.next().flatten(),
                    leverage: h.next().flatten(),
                };
                (i, o)
            })
            .collect();
        blocks.into_par_iter().for_each(|(i, o)| {
            let start = at.start + i * CHUNK_ROWS;
            let end = (start + CHUNK_ROWS).min(at.end);
            pass.fill(&self.lay.used.slice(start..end), o);
        });
    }
}

/// Rows up to which a fit keeps its fitted values, residuals and leverages once computed (24
/// bytes a row, 48 MiB at most); a larger fit computes them again, a block at a time, for
/// whoever asks, so that no column of the data set's length is added to it.
pub(crate) const HELD_ROWS: usize = 1 << 21;

/// The row values a fit of at most [`HELD_ROWS`] rows keeps.
#[derive(Debug, Clone)]
pub(crate) struct HeldRows {
    fitted: Vec<f64>,
    residuals: Vec<f64>,
    leverage: Vec<f64>,
}

/// Where a pass over fitted rows writes: each kind asked for, one value per row.
struct Outputs<'a> {
    fitted: Option<&'a mut [f64]>,
    residual: Option<&'a mut [f64]>,
    leverage: Option<&'a mut [f64]>,
}

/// Which value a pass over fitted rows computes.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(crate) enum RowValue {
    Fitted,
    Residual,
    Leverage,
}

/// What a pass over fitted rows needs, gathered once: the fit and the response.
struct RowPass<'a> {
    fit: &'a Fit,
    y: &'a [f64],
}

impl<'a> RowPass<'a> {
    fn new(fit: &'a Fit) -> RowPass<'a> {
        let y: &[f64] = match &fit.spec.response {
            Var::Numeric { values, .. } => values,
            Var::Factor { .. } => &[],
        };
        RowPass { fit, y }
    }

    /// The values asked for in `out` for each of `rows` (data rows).
    fn fill(&self, rows: &[usize], out: Outputs<'_>) {
        let fit = self.fit;
        let e = &fit.eng;
        let q = e.basis.monos.len();
        let weights = weights_of(&fit.spec);
        let block = Block::fill(
            &fit.spec, &e.basis, self.y, rows, e.y_centre, e.y_scale, weights,
        );
        if out.fitted.is_some() || out.residual.is_some() {
            // Fitted values in the scaled coordinates, monomial by monomial.
            let mut fz = vec![0.0; rows.len()];
            for (j, g) in fit.gamma.iter().enumerate() {
                if *g != 0.0 {
                    for (f, z) in fz.iter_mut().zip(block.column(j)) {
                        *f += g * z;
                    }
                }
            }
            if let Some(res) = out.residual {
                for (o, (f, yz)) in res.iter_mut().zip(fz.iter().zip(block.column(q))) {
                    *o = (yz - f) * e.y_scale;
                }
            }
            if let Some(fitted) = out.fitted {
                // A weighted block holds sqrt(w) times the fitted value (weights are > 0 on
                // fitted rows); the residuals stay weighted, sqrt(w) (y - fitted).
                if let Some(w) = weights {
                    for (f, &i) in fz.iter_mut().zip(rows) {
                        *f /= w.get(i).copied().unwrap_or(1.0).sqrt();
                    }
                }
                for (o, f) in fitted.iter_mut().zip(&fz) {
                    *o = e.y_offset + (e.y_centre + f * e.y_scale);
                }
            }
        }
        if let Some(lev) = out.leverage {
            let k = fit.kept.len();
            let m = rows.len();
            let u = self.coordinates(&block, m);
            lev.fill(0.0);
            for i in 0..k {
                for (h, p) in lev.iter_mut().zip(&u.data[i * m..(i + 1) * m]) {
                    *h += p * p;
                }
            }
            for h in lev.iter_mut() {
                if (1.0 - *h).abs() <= LEVERAGE_ONE_TOL {
                    *h = 1.0;
                }
            }
        }
    }

    /// u_i = R^-T V' w_i for every row of the block at once (m x k, column-major): the rows'
    /// coordinates along the fit's orthonormal columns (leverage h_i = |u_i|^2). The reduced
    /// columns at the rows, then forward substitution over whole columns, each u_i
    /// overwriting its column.
    fn coordinates(&self, block: &Block, m: usize) -> Mat {
        let fit = self.fit;
        let k = fit.kept.len();
        {
            let mut u = Mat::zeros(m, k);
            for (i, v) in fit.g.v.iter().enumerate() {
                let col = &mut u.data[i * m..(i + 1) * m];
                for (j, vj) in v.iter().enumerate() {
                    if *vj != 0.0 {
                        for (o, z) in col.iter_mut().zip(block.column(j)) {
                            *o += vj * z;
                        }
                    }
                }
            }
            let r = &fit.g.r;
            for i in 0..k {
                let (done, rest) = u.data.split_at_mut(i * m);
                let Some(ui) = rest.get_mut(..m) else { break };
                for kk in 0..i {
                    let rki = r.get(kk, i);
                    if rki != 0.0 {
                        for (z, p) in ui.iter_mut().zip(&done[kk * m..(kk + 1) * m]) {
                            *z -= rki * p;
                        }
                    }
                }
                let d = r.get(i, i);
                for z in ui.iter_mut() {
                    *z = if d != 0.0 { *z / d } else { 0.0 };
                }
            }
            u
        }
    }

    /// The factor F of the HC3 meat of the block's rows, F'F = sum_i u_i u_i' e_i^2 /
    /// (1 - h_i)^2 (k x k, e_i the weighted residual in the response's units), leaving out the rows of leverage above
    /// 1 - [`NEAR_ONE`], which are returned with their coordinates instead: there both
    /// 1 - h_i and e_i are differences of near-equal numbers, each good to only about
    /// 1e-16 / (1 - h_i) of itself.
    fn meat(&self, rows: &[usize]) -> (Mat, Vec<NearOne>) {
        let k = self.fit.kept.len();
        let m = rows.len();
        let (u, res) = self.coordinates_and_residuals(rows);
        let y_scale = self.fit.eng.y_scale;
        // k leading rows of zeros (see qr::block_factor), then one row a data row.
        let mut a = Mat::zeros(k + m, k);
        let mut near = Vec::new();
        for (r, &i) in rows.iter().enumerate() {
            let h: f64 = (0..k).map(|c| u.data[c * m + r] * u.data[c * m + r]).sum();
            let one_h = 1.0 - h;
            if one_h < NEAR_ONE {
                near.push(NearOne {
                    row: i,
                    h,
                    u: (0..k).map(|c| u.data[c * m + r]).collect(),
                });
                continue;
            }
            let d = (res[r] * y_scale / one_h).abs();
            for c in 0..k {
                a.set(k + r, c, u.data[c * m + r] * d);
            }
        }
        (qr::block_factor(&mut a), near)
    }

    /// For each row i of `near`, over the block's other rows j: (sum h_ij^2, sum h_ij e_j),
    /// h_ij = u_i . u_j the weighted projection's entry and e_j the residual in the scaled
    /// response's units. Both sums are of terms that do not cancel at a leverage near 1; an
    /// error d in the fitted values moves the second by only (1 - h_i) x_i'd.
    fn near_one(&self, rows: &[usize], near: &[NearOne]) -> (Vec<f64>, Vec<f64>) {
        let m = rows.len();
        let (u, res) = self.coordinates_and_residuals(rows);
        let mut s1 = vec![0.0; near.len()];
        let mut s2 = vec![0.0; near.len()];
        for (t, n) in near.iter().enumerate() {
            for (r, (&j, e)) in rows.iter().zip(&res).enumerate() {
                if j == n.row {
                    continue;
                }
                let hij: f64 =
                    n.u.iter()
                        .enumerate()
                        .map(|(c, ui)| ui * u.data[c * m + r])
                        .sum();
                s1[t] += hij * hij;
                s2[t] += hij * e;
            }
        }
        (s1, s2)
    }

    /// The rows' coordinates along the fit's orthonormal columns (m x k, column-major) and
    /// their weighted residuals in the scaled response's units.
    fn coordinates_and_residuals(&self, rows: &[usize]) -> (Mat, Vec<f64>) {
        let fit = self.fit;
        let e = &fit.eng;
        let q = e.basis.monos.len();
        let block = Block::fill(
            &fit.spec,
            &e.basis,
            self.y,
            rows,
            e.y_centre,
            e.y_scale,
            weights_of(&fit.spec),
        );
        let mut res: Vec<f64> = block.column(q).to_vec();
        for (j, g) in fit.gamma.iter().enumerate() {
            if *g != 0.0 {
                for (o, z) in res.iter_mut().zip(block.column(j)) {
                    *o -= g * z;
                }
            }
        }
        (self.coordinates(&block, rows.len()), res)
    }
}

/// A row whose leverage is within this of 1 has its HC3 weight e_i^2 / (1 - h_i)^2 computed
/// from the other rows (a second pass over the data): computed directly it keeps only about
/// 16 + log10(1 - h_i) digits, 13 here. At most k / (1 - NEAR_ONE) rows can be so near 1,
/// since the leverages sum to k.
const NEAR_ONE: f64 = 1e-3;

/// A row of leverage near 1, set aside by [`RowPass::meat`]: its data row, leverage as
/// computed, and coordinates u_i.
struct NearOne {
    row: usize,
    h: f64,
    u: Vec<f64>,
}

impl Diagnostics {
    /// Number of fitted rows.
    pub fn len(&self) -> usize {
        self.n
    }

    /// True when there are no rows.
    pub fn is_empty(&self) -> bool {
        self.n == 0
    }

    /// Cook's distance of each row, in order, given the rows' residuals and leverages.
    pub fn cooks_distances<'a>(
        &'a self,
        residuals: &'a [f64],
        leverage: &'a [f64],
    ) -> impl Iterator<Item = f64> + 'a {
        residuals
            .iter()
            .zip(leverage)
            .map(|(&r, &h)| self.cook(r, h))
    }

    /// Cook's distance e^2 h / (p s^2 (1-h)^2) of a row with residual `r` and leverage `h`;
    /// NaN (undefined, 0/0) at leverage 1 and in an exact fit.
    pub fn cook(&self, r: f64, h: f64) -> f64 {
        let one_h = 1.0 - h;
        if one_h > LEVERAGE_ONE_TOL && self.s2 > 0.0 {
            r * r * h / (self.rank * self.s2 * one_h * one_h)
        } else {
            f64::NAN
        }
    }

    /// Standardized (internally studentized) residual e / (s sqrt(1-h)) of a row with
    /// residual `r` and leverage `h`; NaN at leverage 1, where it is 0/0 (within
    /// [`LEVERAGE_ONE_TOL`], since such a row's 1 - h comes out of the arithmetic as about
    /// 1e-16 and its residual as rounding noise), and in an exact fit (s = 0).
    pub fn standardized(&self, r: f64, h: f64) -> f64 {
        let one_h = 1.0 - h;
        if one_h > LEVERAGE_ONE_TOL && self.s2 > 0.0 {
            r / (self.s2.sqrt() * one_h.sqrt())
        } else {
            f64::NAN
        }
    }

    /// Externally studentized residual e / (s_(i) sqrt(1-h)), s_(i)^2 = (RSS - e^2/(1-h)) /
    /// (df - 1), of a row with residual `r` and leverage `h`; NaN where s_(i) is undefined
    /// and at leverage 1 (0/0).
    pub fn student(&self, r: f64, h: f64) -> f64 {
        let one_h = 1.0 - h;
        if one_h > LEVERAGE_ONE_TOL && self.df_res > 1 {
            let s2i = (self.rss - r * r / one_h) / (self.df_res - 1) as f64;
            if s2i > 0.0 {
                r / (s2i.sqrt() * one_h.sqrt())
            } else {
                f64::NAN
            }
        } else {
            f64::NAN
        }
    }
}
