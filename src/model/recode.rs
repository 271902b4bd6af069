//! The effect-coded engine (sum-to-zero contrasts, for Type III sums of squares) derived from
//! the treatment-coded one, without a pass over the rows.
//!
//! Both codings span the same column space: a factor is contrast-coded exactly when the rest
//! of its term is in the model (the contained-terms rule of [`super::design`]), and then
//! `I_j - I_last` is a combination of the treatment columns `I_2, ..., I_L` and that rest. So
//! the effect design is E = T M for a fixed p x p matrix M. M is a property of the columns as
//! functions of the variables, not of the data, so it is found by least squares on a small
//! grid of points (every combination of the present factor levels, a few values of each
//! numeric variable) and accepted only when T has full rank on the grid and reproduces E
//! there to rounding. Then, with the treatment engine's centred and scaled columns
//! Z_t = T A^-1 (A holds the centres and scales), the effect engine's columns are
//! Z_e = Z_t G for a small matrix G, and its triangular factor is that of R_t G.
//!
//! When any condition fails (no intercept, a grid too large, a rank or residual check), the
//! caller falls back to building the effect engine from the rows.

use super::design::{self, Column, Layout, Point};
use super::fit::Engine;
use super::qr::{self, Mat, ALIAS_TOL};
use super::{ModelSpec, Var};

/// Most grid points tried; beyond this the rows are read again instead.
const MAX_GRID: usize = 4096;

/// The grid's reproduction of E must be this close, relative to E's norm on the grid (a
/// real identity leaves rounding of order 1e-15; a coding bug leaves order 1).
const IDENTITY_TOL: f64 = 1e-9;

/// The effect-coded engine for the columns `cols` (and their terms), from the treatment
/// engine `t`, or None when it cannot be derived safely.
pub(crate) fn effect_from_treatment(
    spec: &ModelSpec,
    lay: &Layout,
    t: &Engine,
    cols: Vec<Column>,
    term_cols: Vec<Vec<usize>>,
    n: usize,
) -> Option<Engine> {
    let p = t.cols.len();
    let intercept_first = |c: &[Column]| c.first().is_some_and(|c| c.parts.is_empty());
    if !spec.intercept || cols.len() != p || !intercept_first(&t.cols) || !intercept_first(&cols) {
        return None;
    }
    let points = grid(spec, lay, &t.cols, &cols)?;
    let m = coding_map(&t.cols, &cols, &points)?;

    // W = A M: E = Z_t W, where column 0 of Z_t is the constant and A maps Z_t to T.
    let mut w = Mat::zeros(p, p);
    for j in 0..p {
        for k in 0..p {
            let a_kk = if k == 0 { 1.0 } else { t.scale[k] };
            let mut v = a_kk * m.get(k, j);
            if k == 0 {
                v += (1..p).map(|i| t.centre[i] * m.get(i, j)).sum::<f64>();
            }
            w.set(k, j, v);
        }
    }
    // Effect column j's centre is W[0][j] (the constant's share), its scale the root mean
    // square of the rest over every row, |R_t w'_j| / sqrt(n), since |Z_t v| = |R_t v|.
    let mut centre = vec![0.0; p];
    let mut scale = vec![1.0; p];
    let mut g = Mat::zeros(p, p);
    g.set(0, 0, 1.0);
    let nf = n.max(1) as f64;
    for j in 1..p {
        centre[j] = w.get(0, j);
        let rest: Vec<f64> = (0..p)
            .map(|k| if k == 0 { 0.0 } else { w.get(k, j) })
            .collect();
        let norm = (0..p)
            .map(|i| {
                let s: f64 = (i..p).map(|k| t.r_aug.get(i, k) * rest[k]).sum();
                s * s
            })
            .sum::<f64>()
            .sqrt();
        let s = norm / nf.sqrt();
        scale[j] = if s > 0.0 && s.is_finite() { s } else { 1.0 };
        for (k, r) in rest.iter().enumerate() {
            g.set(k, j, r / scale[j]);
        }
    }
    // R_aug_e: the factor of [Z_t G | y'] = [Z_t | y'] blockdiag(G, 1).
    let mut a = Mat::zeros(p + 1, p + 1);
    for i in 0..=p {
        for j in 0..p {
            let v: f64 = (i..p).map(|k| t.r_aug.get(i, k) * g.get(k, j)).sum();
            a.set(i, j, v);
        }
        a.set(i, p, t.r_aug.get(i, p));
    }
    let r_aug = qr::block_factor(&mut a);
    if r_aug.data.iter().any(|v| !v.is_finite()) {
        return None;
    }
    Some(Engine {
        cols,
        term_cols,
        centre,
        scale,
        y_centre: t.y_centre,
        y_scale: t.y_scale,
        y_offset: t.y_offset,
        r_aug,
    })
}

/// Every combination of the present levels of each factor with a few values (1, 2, ...) of
/// each numeric variable: one more value than the variable has distinct forms among the
/// columns, so that the columns' functions of it are told apart. None when too large.
fn grid(spec: &ModelSpec, lay: &Layout, a: &[Column], b: &[Column]) -> Option<Vec<Point>> {
    let mut numeric: Vec<(usize, usize)> = Vec::new();
    for (v, var) in spec.vars.iter().enumerate() {
        if let Var::Numeric { .. } = var {
            let mut forms: Vec<Vec<design::ColPart>> = Vec::new();
            for c in a.iter().chain(b) {
                let mut f: Vec<design::ColPart> = c
                    .parts
                    .iter()
                    .filter(|p| matches!(p, design::ColPart::Numeric { var, .. } if *var == v))
                    .cloned()
                    .collect();
                f.sort();
                if !forms.contains(&f) {
                    forms.push(f);
                }
            }
            if forms.len() > 1 {
                numeric.push((v, forms.len() + 1));
            }
        }
    }
    let factors: Vec<(usize, usize, Vec<u32>)> = lay
        .factors
        .iter()
        .filter_map(|f| match spec.vars.get(f.var) {
            Some(Var::Factor { levels, .. }) => Some((f.var, levels.len(), f.present.clone())),
            _ => None,
        })
        .collect();
    let size = factors
        .iter()
        .map(|f| f.2.len().max(1))
        .chain(numeric.iter().map(|n| n.1))
        .try_fold(1usize, |acc, k| acc.checked_mul(k))?;
    if size > MAX_GRID {
        return None;
    }
    let mut points = Vec::with_capacity(size);
    for mut idx in 0..size {
        let mut factor_weights = Vec::new();
        for (var, nlevels, present) in &factors {
            let k = present.len().max(1);
            let code = present.get(idx % k).copied().unwrap_or(0);
            idx /= k;
            let mut wts = vec![0.0; *nlevels];
            if let Some(x) = wts.get_mut(code as usize) {
                *x = 1.0;
            }
            factor_weights.push((*var, wts));
        }
        let mut values = Vec::new();
        for &(var, k) in &numeric {
            values.push((var, 1.0 + (idx % k) as f64));
            idx /= k;
        }
        // Variables with a single form (only as a constant) still need a value.
        for (v, var) in spec.vars.iter().enumerate() {
            if matches!(var, Var::Numeric { .. }) && !values.iter().any(|(w, _)| *w == v) {
                values.push((v, 1.0));
            }
        }
        points.push(Point {
            factor_weights,
            numeric: values,
            derivative: None,
        });
    }
    Some(points)
}

/// M with E = T M on the grid, or None when T is rank-deficient there or does not reproduce
/// E (so the identity cannot be trusted).
fn coding_map(t: &[Column], e: &[Column], points: &[Point]) -> Option<Mat> {
    let p = t.len();
    let g = points.len();
    if g <= p {
        return None;
    }
    let eval = |cols: &[Column]| {
        let mut m = Mat::zeros(g, cols.len());
        for (j, c) in cols.iter().enumerate() {
            for (i, pt) in points.iter().enumerate() {
                m.set(i, j, design::eval_point(c, pt));
            }
        }
        m
    };
    let tm = eval(t);
    let em = eval(e);
    if tm.data.iter().chain(&em.data).any(|v| !v.is_finite()) {
        return None;
    }
    let mut rank_check = tm.clone();
    if qr::triangularize(&mut rank_check, Some(ALIAS_TOL), false)
        .kept
        .len()
        < p
    {
        return None;
    }
    let mut m = Mat::zeros(p, p);
    for j in 0..p {
        let mut aug = Mat::zeros(g, p + 1);
        aug.data[..g * p].copy_from_slice(&tm.data);
        aug.data[g * p..].copy_from_slice(em.col(j));
        let tri = qr::triangularize(&mut aug, None, false);
        let rhs: Vec<f64> = (0..p).map(|i| tri.r.get(i, p)).collect();
        let mut rt = Mat::zeros(p, p);
        for c in 0..p {
            for i in 0..=c {
                rt.set(i, c, tri.r.get(i, c));
            }
        }
        let coef = qr::solve_upper(&rt, &rhs);
        let resid = tri.r.get(p, p).abs();
        let norm = em.col(j).iter().map(|v| v * v).sum::<f64>().sqrt();
        if resid.is_nan() || resid > IDENTITY_TOL * norm.max(1.0) {
            return None;
        }
        for (i, c) in coef.iter().enumerate() {
            m.set(i, j, *c);
        }
    }
    Some(m)
}
