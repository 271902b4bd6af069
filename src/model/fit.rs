//! Fitting: column centres and scales from the first block of rows, then one pass of
//! blocked Householder triangularisation of the augmented, centred and scaled design
//! [Z | y'], block factors merged in a fixed order; coefficients, covariances and every
//! sub-model RSS come from that triangular factor. Row diagnostics are a second pass, made
//! only when something asks for them.

use std::borrow::Cow;
use std::ops::Range;
use std::sync::{Arc, OnceLock};

use super::design::{self, Column, Layout, Scheme, UsedRows};
use rayon::prelude::*;

use super::qr::{self, Mat, ALIAS_TOL, CHUNK_ROWS};
use super::{Coefficient, Diagnostics, FitSummary, ModelError, ModelSpec, ModelWarning, Var};

/// A fit is a perfect fit when RSS <= PERFECT_FIT_REL * TSS: the residuals are then rounding
/// noise (their norm is below 1e-12 of the response's spread), so sigma and every test are
/// meaningless.
const PERFECT_FIT_REL: f64 = 1e-24;

/// A linear function of the coefficients is declared not estimable when its component
/// along the null space of the design exceeds this fraction of its norm (rounding in the
/// null-space vectors is near 1e-12 for well-scaled designs).
const ESTIMABLE_TOL: f64 = 1e-8;

/// The triangular factor of one coding of the design, with the centring and scaling used.
#[derive(Debug, Clone)]
pub(crate) struct Engine {
    pub cols: Vec<Column>,
    pub term_cols: Vec<Vec<usize>>,
    /// Centre of each design column (0 for the intercept and without an intercept).
    pub centre: Vec<f64>,
    /// Scale of each design column.
    pub scale: Vec<f64>,
    pub y_centre: f64,
    pub y_scale: f64,
    /// The response offset ([`ModelSpec::response_offset`]) added back to estimates on the
    /// response scale; 0 without an intercept (the offset is folded into the values then).
    pub y_offset: f64,
    /// R of [Z | y'], (p+1) x (p+1).
    pub r_aug: Mat,
}

impl Engine {
    /// (rank, RSS in the response's units) of the sub-model made of the given design
    /// columns: a re-triangularisation of those columns of R_aug plus its last column.
    pub fn sub_rss(&self, cols: &[usize]) -> (usize, f64) {
        let p = self.cols.len();
        let mut sel: Vec<usize> = cols.iter().copied().filter(|&c| c < p).collect();
        sel.sort_unstable();
        sel.dedup();
        sel.push(p);
        let mut a = self.r_aug.select_cols(&sel);
        let t = qr::triangularize(&mut a, Some(ALIAS_TOL), true);
        let k = t.kept.len();
        let d = if k > 0 { t.r.get(k - 1, k - 1) } else { 0.0 };
        (k.saturating_sub(1), d * d * self.y_scale * self.y_scale)
    }
}

/// A fitted linear model.
#[derive(Debug, Clone)]
pub struct Fit {
    pub(crate) spec: ModelSpec,
    pub(crate) lay: Layout,
    pub(crate) treat: Engine,
    /// The effect-coded engine, used only by Type III sums of squares: built on first use,
    /// since it costs a pass over every row.
    pub(crate) effect: OnceLock<Result<Engine, ModelError>>,
    /// Row diagnostics, computed on first use (a pass over every row) and shared by the
    /// checks and figures that read them.
    pub(crate) diag: OnceLock<Diagnostics>,
    /// Fitted values, residuals and leverages of a fit of at most [`HELD_ROWS`] rows,
    /// computed together on first use.
    pub(crate) held: OnceLock<HeldRows>,
    /// Kept (non-aliased) design columns of the treatment coding.
    pub(crate) kept: Vec<usize>,
    /// R of the kept columns (rank x rank).
    pub(crate) r: Mat,
    /// Coefficients of the kept columns in the centred, scaled coordinates.
    pub(crate) bz: Vec<f64>,
    /// Null-space vectors of the design in scaled coordinates (one per aliased column).
    pub(crate) null: Vec<Vec<f64>>,
    pub(crate) rss: f64,
    pub(crate) tss: f64,
    pub(crate) df_res: usize,
    pub(crate) sigma: f64,
    /// Mean of each numeric variable of the model over the fitted rows: (var, mean).
    pub(crate) cov_means: Vec<(usize, f64)>,
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

/// [`fit`] once the offset is settled (0, or kept apart in a model with an intercept).
fn fit_spec(spec: ModelSpec) -> Result<Fit, ModelError> {
    let lay = design::layout(&spec)?;
    let n = lay.used.len();
    let (tcols, tterms) = design::columns(&spec, &lay, Scheme::Treatment);
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
    let treat = build_engine(&spec, &lay, y, tcols, tterms)?;

    // Rank: triangularise with skipping of aliased columns, response last.
    let mut a = treat.r_aug.clone();
    let tri = qr::triangularize(&mut a, Some(ALIAS_TOL), true);
    let kept: Vec<usize> = tri.kept.iter().copied().filter(|&c| c < p).collect();
    let rank = kept.len();
    let rr = tri.r.get(rank, rank);
    let rss = rr * rr * treat.y_scale * treat.y_scale;
    let mut r = Mat::zeros(rank, rank);
    let mut qy = vec![0.0; rank];
    for (c, q) in qy.iter_mut().enumerate() {
        for i in 0..=c {
            r.set(i, c, tri.r.get(i, c));
        }
        *q = tri.r.get(c, rank);
    }
    let bz = qr::solve_upper(&r, &qy);

    let mut warnings = lay.warnings.clone();
    let aliased: Vec<usize> = (0..p).filter(|c| !kept.contains(c)).collect();
    let mut null = Vec::new();
    if !aliased.is_empty() {
        warnings.push(ModelWarning::Aliased {
            names: aliased
                .iter()
                .filter_map(|&c| treat.cols.get(c).map(|x| x.name.clone()))
                .collect(),
            terms: aliased
                .iter()
                .map(|&c| treat.cols.get(c).and_then(|x| x.term))
                .collect(),
        });
        for &c in &aliased {
            // Coefficients of column c on the kept columns: least squares within R_aug.
            let mut sel = kept.clone();
            sel.push(c);
            let mut m = treat.r_aug.select_cols(&sel);
            let t = qr::triangularize(&mut m, None, false);
            let w: Vec<f64> = (0..rank).map(|i| t.r.get(i, rank)).collect();
            let mut rk = Mat::zeros(rank, rank);
            for j in 0..rank {
                for i in 0..=j {
                    rk.set(i, j, t.r.get(i, j));
                }
            }
            let coef = qr::solve_upper(&rk, &w);
            let mut v = vec![0.0; p];
            v[c] = 1.0;
            for (k, &kc) in kept.iter().enumerate() {
                v[kc] = -coef[k];
            }
            null.push(v);
        }
    }

    let tss = {
        let base: Vec<usize> = if spec.intercept { vec![0] } else { Vec::new() };
        treat.sub_rss(&base).1
    };
    if treat_y_constant(&treat) {
        return Err(ModelError::ResponseZeroVariance);
    }
    let df_res = n - rank;
    if df_res == 0 {
        return Err(ModelError::ZeroResidualDf);
    }
    if rss.is_nan() || rss <= PERFECT_FIT_REL * tss {
        return Err(ModelError::PerfectFit);
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
        treat,
        effect: OnceLock::new(),
        diag: OnceLock::new(),
        held: OnceLock::new(),
        kept,
        r,
        bz,
        null,
        rss,
        tss,
        df_res,
        sigma,
        cov_means,
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

impl Fit {
    /// The effect-coded engine (sum-to-zero coding of factors, for Type III), built on first
    /// use from the kept spec and layout.
    pub(crate) fn effect_engine(&self) -> Result<&Engine, ModelError> {
        made_once(&self.effect, || {
            let y: &[f64] = match &self.spec.response {
                Var::Numeric { values, .. } => values,
                Var::Factor { .. } => return Err(ModelError::ResponseNotNumeric),
            };
            let (ecols, eterms) = design::columns(&self.spec, &self.lay, Scheme::Effect);
            let derived = super::recode::effect_from_treatment(
                &self.spec,
                &self.lay,
                &self.treat,
                ecols.clone(),
                eterms.clone(),
                self.lay.used.len(),
            );
            match derived {
                Some(e) => Ok(e),
                None => build_engine(&self.spec, &self.lay, y, ecols, eterms),
            }
        })
        .as_ref()
        .map_err(Clone::clone)
    }
}

fn treat_y_constant(e: &Engine) -> bool {
    e.y_scale == 0.0
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

/// The most working memory a fit of `p` design columns on `n` rows can take, in bytes,
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

/// Centre and scale every column by its mean and spread over the first block of rows, then
/// triangularise [Z | y'] in one pass over fixed blocks of [`CHUNK_ROWS`] rows, computed in
/// parallel and merged in block order (see [`crate::parallel`]) by re-triangularising the
/// block factors two at a time. The response's smallest and largest values, for the checks that
/// it is not constant and that its sums of squares can be held, are taken along.
pub(crate) fn build_engine(
    spec: &ModelSpec,
    lay: &Layout,
    y: &[f64],
    cols: Vec<Column>,
    term_cols: Vec<Vec<usize>>,
) -> Result<Engine, ModelError> {
    let p = cols.len();
    let n = lay.used.len() as f64;
    let needed = working_bytes(p, lay.used.len());
    if needed > MODEL_MEMORY_BUDGET {
        return Err(ModelError::TooLarge {
            coefficients: p,
            megabytes: needed.div_ceil(1 << 20),
        });
    }
    let blocks = lay.used.blocks(CHUNK_ROWS);

    // Centre and scale of each column, from the first block of rows (every row when there
    // are at most CHUNK_ROWS of them): any centre within the data's range takes the offset
    // out of a column well enough for the factorisation (the intercept absorbs the rest),
    // and it saves a pass over the rows.
    let first = lay.used.slice(blocks.first().cloned().unwrap_or(0..0));
    let lead_block = Block::fill(spec, &cols, y, &first);
    let lead = lead_block.moments();
    let n_lead = lead.count.max(1.0);
    let mut centre = vec![0.0; p + 1];
    let mut scale = vec![1.0; p + 1];
    for j in 0..=p {
        let is_intercept = spec.intercept && j == 0;
        if is_intercept {
            continue;
        }
        let (mean, m2) = (lead.mean[j], lead.m2[j]);
        let (c, s) = if spec.intercept {
            (mean, (m2 / n_lead).sqrt())
        } else {
            (0.0, (m2 / n_lead + mean * mean).sqrt())
        };
        // Squares of values far from 1 overflow or underflow; such a column's spread is
        // taken in units of its largest deviation instead (the same number where both work).
        let s = if (SQUARES_SAFE..=1.0 / SQUARES_SAFE).contains(&s) {
            s
        } else {
            root_mean_square(lead_block.column(j), if spec.intercept { c } else { 0.0 })
        };
        centre[j] = if c.is_finite() { c } else { 0.0 };
        scale[j] = if s > 0.0 && s.is_finite() { s } else { 1.0 };
    }

    // One pass: the triangular factor of each block, merged in block order, with the
    // response's moments for the zero-variance check. Blocks are factored
    // [`FACTORED_AT_ONCE`] at a time and folded in before the next ones, so that the factors
    // waiting to be merged take memory independent of the number of rows; the merges happen
    // in the same order either way.
    let mut y_range = (f64::INFINITY, f64::NEG_INFINITY);
    let mut r_aug = Mat::zeros(p + 1, p + 1);
    for (b, batch) in blocks.chunks(FACTORED_AT_ONCE).enumerate() {
        let partial: Vec<Result<BlockPart, ModelError>> = crate::parallel::map(batch, |at| {
            let rows = lay.used.slice(at.clone());
            let mut block = Block::fill(spec, &cols, y, &rows);
            block.check_finite(spec, &cols, &rows)?;
            let range = block.column_range(p);
            block.standardise(&centre, &scale);
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
    let y_centre = centre[p];
    let y_scale = scale[p];
    let y_offset = if spec.intercept {
        spec.response_offset
    } else {
        0.0
    };
    centre.truncate(p);
    scale.truncate(p);
    Ok(Engine {
        cols,
        term_cols,
        centre,
        scale,
        y_centre,
        y_scale,
        y_offset,
        r_aug,
    })
}

/// The design columns and the response at a block of rows, column-major, below as many
/// rows of zeros as there are columns (see [`qr::block_factor`]).
struct Block {
    a: Mat,
    /// Rows of zeros above the data.
    top: usize,
}

impl Block {
    fn fill(spec: &ModelSpec, cols: &[Column], y: &[f64], rows: &[usize]) -> Block {
        let width = cols.len() + 1;
        let m = rows.len();
        let ld = width + m;
        let mut a = Mat::zeros(ld, width);
        for (j, col) in a.data.chunks_exact_mut(ld).enumerate() {
            let data = &mut col[width..];
            match cols.get(j) {
                Some(c) => design::eval_block(spec, c, rows, data),
                None => {
                    for (o, &i) in data.iter_mut().zip(rows) {
                        *o = y.get(i).copied().unwrap_or(f64::NAN);
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
        cols: &[Column],
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
                let variable = cols
                    .get(j)
                    .map(|c| c.name.clone())
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

    /// Replaces the first `k` columns Z by U = Z R^-1, i.e. u = R^-T z for every row
    /// (forward substitution on whole columns; zero pivots give 0, as in
    /// [`qr::solve_upper_transpose`]).
    fn solve_transpose_in_place(&mut self, r: &Mat, k: usize) {
        let (ld, top) = (self.a.rows, self.top);
        for i in 0..k.min(r.cols) {
            let (done, rest) = self.a.data.split_at_mut(i * ld);
            let Some(zi) = rest.get_mut(top..ld) else {
                return;
            };
            for kk in 0..i {
                let rki = r.get(kk, i);
                let Some(uk) = done.get(kk * ld + top..(kk + 1) * ld) else {
                    continue;
                };
                for (z, u) in zi.iter_mut().zip(uk) {
                    *z -= rki * u;
                }
            }
            let d = r.get(i, i);
            for z in zi.iter_mut() {
                *z = if d != 0.0 { *z / d } else { 0.0 };
            }
        }
    }

    /// The smallest and largest value of column `j` over the block.
    fn column_range(&self, j: usize) -> (f64, f64) {
        self.column(j)
            .iter()
            .fold((f64::INFINITY, f64::NEG_INFINITY), |(lo, hi), &v| {
                (lo.min(v), hi.max(v))
            })
    }

    /// Centre and scale every column in place.
    fn standardise(&mut self, centre: &[f64], scale: &[f64]) {
        let (ld, top) = (self.a.rows, self.top);
        for (j, col) in self.a.data.chunks_exact_mut(ld).enumerate() {
            // One division for the column, not one per value.
            let (c, inv) = (centre[j], 1.0 / scale[j]);
            for v in col.iter_mut().skip(top) {
                *v = (*v - c) * inv;
            }
        }
    }
}

/// The sum over the count, corrected once by the mean of the deviations from it (which
/// recovers the rounding of the first sum); 0 for no values.
fn mean_of(x: &[f64]) -> f64 {
    if x.is_empty() {
        return 0.0;
    }
    let k = x.len() as f64;
    let first = qr::sum_of(x, |v| v) / k;
    first + qr::sum_of(x, |v| v - first) / k
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
    /// Estimate and standard error of L'b, where `l` holds one weight per design column
    /// (treatment coding, original units). Err(()) when L is not estimable.
    pub(crate) fn linear(&self, l: &[f64]) -> Result<(f64, f64), ()> {
        let (est, w) = self.linear_parts(l)?;
        Ok((est, w.iter().map(|v| v * v).sum::<f64>().sqrt()))
    }

    /// Estimate of L'b and the vector w = sigma R^-T (T'L), so that
    /// Cov(L1'b, L2'b) = w1 . w2. The function is evaluated in the centred and scaled
    /// coordinates (T maps them to original units), so no cancellation against large
    /// column means happens. Err(()) when L has a component along the design's null space
    /// (not estimable).
    pub(crate) fn linear_parts(&self, l: &[f64]) -> Result<(f64, Vec<f64>), ()> {
        self.linear_checked(l, true)
    }

    /// As [`Fit::linear_parts`]; `check = false` skips the estimability check (used for the
    /// coefficients of the reduced design, which are reported as such).
    fn linear_checked(&self, l: &[f64], check: bool) -> Result<(f64, Vec<f64>), ()> {
        let p = self.treat.cols.len();
        let e = &self.treat;
        let l0 = if self.spec.intercept {
            l.first().copied().unwrap_or(0.0)
        } else {
            0.0
        };
        let mut lz = vec![0.0; p];
        for (j, z) in lz.iter_mut().enumerate() {
            let lj = l.get(j).copied().unwrap_or(0.0);
            *z = if self.spec.intercept && j == 0 {
                lj
            } else {
                (lj - l0 * e.centre[j]) / e.scale[j]
            };
        }
        let norm: f64 = lz.iter().map(|v| v * v).sum::<f64>().sqrt();
        for nv in self.null.iter().filter(|_| check) {
            let nn: f64 = nv.iter().map(|v| v * v).sum::<f64>().sqrt();
            let d: f64 = nv.iter().zip(&lz).map(|(a, b)| a * b).sum();
            if d.abs() > ESTIMABLE_TOL * norm * nn {
                return Err(());
            }
        }
        let lk: Vec<f64> = self.kept.iter().map(|&c| lz[c]).collect();
        // The offset goes on last, so the small part keeps its digits until then.
        let est = l0 * e.y_offset
            + (l0 * e.y_centre
                + e.y_scale * lk.iter().zip(&self.bz).map(|(a, b)| a * b).sum::<f64>());
        let w = qr::solve_upper_transpose(&self.r, &lk)
            .into_iter()
            .map(|v| v * self.sigma)
            .collect();
        Ok((est, w))
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
        let (f, p) = if df_model > 0 {
            let f = ((self.tss - self.rss) / df_model as f64) / (self.rss / self.df_res as f64);
            (Some(f), Some(f_p(f, df_model, self.df_res)))
        } else {
            (None, None)
        };
        let loglik = -nf / 2.0 * ((2.0 * std::f64::consts::PI).ln() + (self.rss / nf).ln() + 1.0);
        let k = (rank + 1) as f64;
        FitSummary {
            n,
            dropped_missing: self.lay.total_rows - n,
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

    /// Estimated coefficients with t tests and confidence limits at `level` (e.g. 0.95).
    /// Aliased coefficients are omitted. An invalid level gives NaN limits.
    pub fn coefficients(&self, level: f64) -> Vec<Coefficient> {
        let p = self.treat.cols.len();
        let tq = if level > 0.0 && level < 1.0 {
            t_quantile(0.5 + level / 2.0, self.df_res)
        } else {
            f64::NAN
        };
        let mut out = Vec::new();
        for &c in &self.kept {
            let mut l = vec![0.0; p];
            l[c] = 1.0;
            let Ok((est, w)) = self.linear_checked(&l, false) else {
                continue;
            };
            let se = w.iter().map(|v| v * v).sum::<f64>().sqrt();
            let t = est / se;
            out.push(Coefficient {
                name: self
                    .treat
                    .cols
                    .get(c)
                    .map(|x| x.name.clone())
                    .unwrap_or_default(),
                estimate: est,
                se,
                t,
                p: t_p(t, self.df_res),
                lower: est - tq * se,
                upper: est + tq * se,
            });
        }
        out
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

    /// Each numeric covariate of the model (variable name) with its mean over the fitted
    /// rows, in variable order: the values adjusted means use by default.
    pub fn covariate_means(&self) -> Vec<(String, f64)> {
        self.cov_means
            .iter()
            .map(|&(v, m)| (design::var_name(&self.spec, v), m))
            .collect()
    }

    /// Names of the terms in written order.
    pub fn term_names(&self) -> Vec<String> {
        self.lay.term_names.clone()
    }

    /// Number of estimated (non-aliased) coefficients.
    pub fn n_coef(&self) -> usize {
        self.kept.len()
    }

    /// Names of all design columns, aliased ones included, in design order.
    pub fn column_names(&self) -> Vec<String> {
        self.treat.cols.iter().map(|c| c.name.clone()).collect()
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

/// What a pass over fitted rows needs, gathered once: the kept design columns with their
/// centres and scales (the response's last), and the response.
struct RowPass<'a> {
    fit: &'a Fit,
    y: &'a [f64],
    cols: Vec<Column>,
    centre: Vec<f64>,
    scale: Vec<f64>,
}

impl<'a> RowPass<'a> {
    fn new(fit: &'a Fit) -> RowPass<'a> {
        let e = &fit.treat;
        let y: &[f64] = match &fit.spec.response {
            Var::Numeric { values, .. } => values,
            Var::Factor { .. } => &[],
        };
        let cols = fit
            .kept
            .iter()
            .filter_map(|&c| e.cols.get(c).cloned())
            .collect();
        let mut centre: Vec<f64> = fit.kept.iter().map(|&c| e.centre[c]).collect();
        let mut scale: Vec<f64> = fit.kept.iter().map(|&c| e.scale[c]).collect();
        centre.push(e.y_centre);
        scale.push(e.y_scale);
        RowPass {
            fit,
            y,
            cols,
            centre,
            scale,
        }
    }

    /// The values asked for in `out` for each of `rows` (data rows).
    fn fill(&self, rows: &[usize], out: Outputs<'_>) {
        let fit = self.fit;
        let e = &fit.treat;
        let k = self.cols.len();
        let mut block = Block::fill(&fit.spec, &self.cols, self.y, rows);
        block.standardise(&self.centre, &self.scale);
        if out.fitted.is_some() || out.residual.is_some() {
            // Fitted values in the scaled coordinates, column by column.
            let mut fz = vec![0.0; rows.len()];
            for (j, b) in fit.bz.iter().enumerate() {
                for (f, z) in fz.iter_mut().zip(block.column(j)) {
                    *f += b * z;
                }
            }
            if let Some(res) = out.residual {
                for (o, (f, yz)) in res.iter_mut().zip(fz.iter().zip(block.column(k))) {
                    *o = (yz - f) * e.y_scale;
                }
            }
            if let Some(fitted) = out.fitted {
                for (o, f) in fitted.iter_mut().zip(&fz) {
                    *o = e.y_offset + (e.y_centre + f * e.y_scale);
                }
            }
        }
        if let Some(lev) = out.leverage {
            // u = R^-T z for every row at once: forward substitution over whole columns,
            // each u_i overwriting z_i (it needs only z_i and the u before it).
            block.solve_transpose_in_place(&fit.r, k);
            lev.fill(0.0);
            for i in 0..k {
                for (h, u) in lev.iter_mut().zip(block.column(i)) {
                    *h += u * u;
                }
            }
        }
    }
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
    /// NaN at leverage 1.
    pub fn cook(&self, r: f64, h: f64) -> f64 {
        let one_h = 1.0 - h;
        if one_h > 0.0 {
            r * r * h / (self.rank * self.s2 * one_h * one_h)
        } else {
            f64::NAN
        }
    }

    /// Externally studentized residual e / (s_(i) sqrt(1-h)), s_(i)^2 = (RSS - e^2/(1-h)) /
    /// (df - 1), of a row with residual `r` and leverage `h`; NaN where s_(i) is undefined.
    pub fn student(&self, r: f64, h: f64) -> f64 {
        let one_h = 1.0 - h;
        if one_h > 0.0 && self.df_res > 1 {
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
