//! Least squares on a subset of the design columns, X_S = W A_S, from the triangular factor
//! of the monomials [W | y] and the expansion matrix A (see `basis.rs`).
//!
//! Columns are taken in the order given. Each column's expansion is first reduced against
//! the columns before it *in the space of monomial coefficients* (Gaussian elimination with
//! partial pivoting on the small matrix A, no data involved): what two columns share, such
//! as the large u-part of x^2 and of x when x lies far from zero, cancels there exactly or
//! to rounding of the coefficients, never to rounding of data-sized sums. Only the reduced
//! column, whose largest coefficient is 1, is mapped into the row space of the data through
//! R and triangularised by Householder reflections (Golub & Van Loan, "Matrix
//! Computations", algorithm 5.2.1). The sums of squares of a set of columns are read off the
//! response's coordinates along them, not as a difference of two residual sums of squares.
//!
//! A reduced column whose image through R lies within `ALIAS_TOL` of the span of the kept
//! ones is aliased by the data (an empty cell, a covariate that is a combination of others);
//! its direction in coefficient space is kept as a null direction, which decides
//! estimability.

use super::qr::{Mat, ALIAS_TOL};

/// A reduced coefficient is taken for rounding noise, and set to 0, when it is within this
/// many times the bound on the rounding error the reduction accumulated in it (each step
/// adds at most the unit roundoff of the numbers it combines).
const NOISE: f64 = 16.0;

/// Unit roundoff of a double.
const EPS: f64 = f64::EPSILON / 2.0;

/// The least-squares fit of y' on the columns given.
#[derive(Debug, Clone)]
pub(crate) struct Graded {
    /// Design columns kept, in the order processed.
    pub kept: Vec<usize>,
    /// Design columns left out: combinations of the ones before them, as functions whatever
    /// the data, or on the data rows only.
    pub aliased: Vec<usize>,
    /// Upper-triangular factor (k x k, non-negative diagonal) of the reduced columns.
    pub r: Mat,
    /// The response's coordinates along the kept reduced columns.
    pub qy: Vec<f64>,
    /// Residual sum of squares of y'.
    pub rss: f64,
    /// The reduced columns (one coefficient vector over the monomials each).
    pub v: Vec<Vec<f64>>,
    /// Upper-triangular k x k: kept column j = sum_i t[i][j] v_i on the data.
    pub t: Mat,
    /// Directions in monomial space that vanish on every data row (one per column aliased
    /// by the data).
    pub null: Vec<Vec<f64>>,
}

struct Reduced {
    pivot: usize,
    v: Vec<f64>,
    /// Index among the kept columns, or None for one aliased by the data...
    kept: Option<usize>,
    /// ...whose reduced column equals these coordinates on the kept ones on the data.
    d: Vec<f64>,
}

fn norm(x: &[f64]) -> f64 {
    x.iter().map(|v| v * v).sum::<f64>().sqrt()
}

/// Least squares of the last column of `r_aug` ((q+1) x (q+1): the factor of [W' | y']) on
/// the columns `cols` of X = W A, in that order.
pub(crate) fn graded(r_aug: &Mat, a: &Mat, cols: &[usize]) -> Graded {
    let q = a.rows;
    let n1 = q + 1;
    let mut y: Vec<f64> = (0..n1).map(|i| r_aug.get(i, q)).collect();
    let mut reduced: Vec<Reduced> = Vec::new();
    let mut refl: Vec<(usize, Vec<f64>, f64)> = Vec::new();
    let mut rcols: Vec<Vec<f64>> = Vec::new();
    let mut tcols: Vec<Vec<f64>> = Vec::new();
    let mut kept = Vec::new();
    let mut aliased = Vec::new();
    let mut vs = Vec::new();
    let mut null = Vec::new();
    for &j in cols {
        if j >= a.cols {
            continue;
        }
        let aj = a.col(j);
        let mut v = aj.to_vec();
        let mut err: Vec<f64> = aj.iter().map(|x| x.abs() * EPS).collect();
        let mut coefs: Vec<(usize, f64)> = Vec::new();
        for (bi, b) in reduced.iter().enumerate() {
            let t = v[b.pivot];
            if t == 0.0 {
                continue;
            }
            for ((vm, em), bm) in v.iter_mut().zip(err.iter_mut()).zip(&b.v) {
                if *bm != 0.0 {
                    let d = t * bm;
                    *em += (d.abs() + vm.abs()) * EPS;
                    *vm -= d;
                }
            }
            v[b.pivot] = 0.0;
            coefs.push((bi, t));
        }
        let mut pivot = None;
        let mut best = 0.0;
        for (m, (vm, em)) in v.iter_mut().zip(&err).enumerate() {
            if vm.abs() <= NOISE * em || !vm.is_finite() {
                *vm = 0.0;
            } else if vm.abs() > best {
                best = vm.abs();
                pivot = Some(m);
            }
        }
        let Some(pivot) = pivot else {
            aliased.push(j);
            continue;
        };
        let piv = v[pivot];
        for vm in v.iter_mut() {
            *vm /= piv;
        }
        // The reduced column's image in the row space: R v, then the reflections so far.
        let mut w = vec![0.0; n1];
        for (m, &vm) in v.iter().enumerate() {
            if vm != 0.0 {
                for (i, wi) in w.iter_mut().enumerate().take(m + 1) {
                    *wi += r_aug.get(i, m) * vm;
                }
            }
        }
        for (row, hv, vtv) in &refl {
            apply(&mut w, *row, hv, *vtv);
        }
        let k = rcols.len();
        let total = norm(&w);
        let below = norm(&w[k.min(n1)..]);
        if total == 0.0 || below <= ALIAS_TOL * total || !below.is_finite() || k >= n1 {
            // Coordinates on the kept columns: R_k d = w[..k].
            let mut d = vec![0.0; k];
            for i in (0..k).rev() {
                let mut s = w[i];
                for (c, dc) in d.iter().enumerate().skip(i + 1) {
                    s -= rcols[c][i] * dc;
                }
                let dia = rcols[i][i];
                d[i] = if dia != 0.0 { s / dia } else { 0.0 };
            }
            let mut z = v.clone();
            for (i, di) in d.iter().enumerate() {
                for (zm, vm) in z.iter_mut().zip(&vs_at(&reduced, i)) {
                    *zm -= di * vm;
                }
            }
            null.push(z);
            reduced.push(Reduced {
                pivot,
                v,
                kept: None,
                d,
            });
            aliased.push(j);
            continue;
        }
        // Householder reflection zeroing w below row k.
        let x0 = w[k];
        let alpha = if x0 >= 0.0 { -below } else { below };
        let vtv = 2.0 * below * (below + x0.abs());
        let mut hv = w[k..].to_vec();
        hv[0] = x0 - alpha;
        apply(&mut y, k, &hv, vtv);
        w[k] = alpha;
        for wi in w.iter_mut().skip(k + 1) {
            *wi = 0.0;
        }
        refl.push((k, hv, vtv));
        rcols.push(w[..=k].to_vec());
        let mut tc = vec![0.0; k + 1];
        tc[k] = piv;
        for (bi, t) in coefs {
            let b = &reduced[bi];
            match b.kept {
                Some(i) => tc[i] += t,
                None => {
                    for (i, di) in b.d.iter().enumerate() {
                        tc[i] += t * di;
                    }
                }
            }
        }
        tcols.push(tc);
        vs.push(v.clone());
        reduced.push(Reduced {
            pivot,
            v,
            kept: Some(k),
            d: Vec::new(),
        });
        kept.push(j);
    }
    let k = rcols.len();
    let mut r = Mat::zeros(k, k);
    let mut t = Mat::zeros(k, k);
    for (c, (rc, tc)) in rcols.iter().zip(&tcols).enumerate() {
        for (i, ri) in rc.iter().enumerate().take(c + 1) {
            r.set(i, c, *ri);
            t.set(i, c, tc.get(i).copied().unwrap_or(0.0));
        }
    }
    let mut qy: Vec<f64> = y.iter().take(k).copied().collect();
    for (i, qi) in qy.iter_mut().enumerate() {
        if r.get(i, i) < 0.0 {
            for c in i..k {
                let x = r.get(i, c);
                r.set(i, c, -x);
            }
            *qi = -*qi;
        }
    }
    let rss = y.iter().skip(k).map(|v| v * v).sum();
    Graded {
        kept,
        aliased,
        r,
        qy,
        rss,
        v: vs,
        t,
        null,
    }
}

/// The reduced vector of the i-th kept column.
fn vs_at(reduced: &[Reduced], i: usize) -> Vec<f64> {
    reduced
        .iter()
        .find(|b| b.kept == Some(i))
        .map(|b| b.v.clone())
        .unwrap_or_default()
}

/// z <- (I - 2 h h' / vtv) z on rows row.. (h holds the reflection from row `row` down).
fn apply(z: &mut [f64], row: usize, h: &[f64], vtv: f64) {
    if vtv == 0.0 || !vtv.is_finite() {
        return;
    }
    let Some(zs) = z.get_mut(row..) else { return };
    let f = 2.0 * h.iter().zip(zs.iter()).map(|(a, b)| a * b).sum::<f64>() / vtv;
    for (zi, hi) in zs.iter_mut().zip(h) {
        *zi -= f * hi;
    }
}

impl Graded {
    /// (df, sum of squares in y' units) of the kept columns among `cols`.
    pub fn ss_of(&self, cols: &[usize]) -> (usize, f64) {
        let mut df = 0;
        let mut ss = 0.0;
        for (i, c) in self.kept.iter().enumerate() {
            if cols.contains(c) {
                df += 1;
                ss += self.qy[i] * self.qy[i];
            }
        }
        (df, ss)
    }
}
