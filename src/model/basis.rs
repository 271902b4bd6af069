//! The centred basis the engine fits in: every design column, as the model writes it, is a
//! fixed linear combination of *monomials*, products of factor indicators and powers of
//! centred, scaled covariates.
//!
//! A covariate x enters through a base t(x) (x itself, log x or sqrt x) written as
//! t(x) = t(x0) + s u, where x0 is a centre inside the data and s a power of two near its
//! spread; u is computed from x - x0 (exact for x near x0, by Sterbenz's lemma), so it keeps
//! every digit in which the rows differ. Then x^k = sum_i C(k, i) x0^(k-i) s^i u^i exactly,
//! and a column such as `g by x^2` is a combination of the monomials I_g, I_g u and I_g u^2.
//! Factor parts are written in one canonical coding, indicators of every present level but
//! the first, so that the treatment and the sum-to-zero codings of the same model share one
//! set of monomials and one pass over the rows.
//!
//! The design X as written is then X = W A for the monomial columns W (well conditioned:
//! their values are of order 1 whatever the covariates' origins) and a small matrix A of
//! exact expansion coefficients. Sums of squares, tests and fitted values depend on the
//! column space only, which W A gives without ever forming a power of a large number
//! (see `graded.rs` for how sub-models are reduced). This is the usual advice for polynomial
//! regression (centre before taking powers: Bradley & Srivastava 1979, "Correlation in
//! polynomial regression", The American Statistician 33), carried out so that the model
//! stays the one the user wrote.

use std::collections::BTreeMap;

use super::design::{ColPart, Column, Layout, Point};
use super::qr::Mat;
use super::{Code, ModelSpec, Transform, Var};

/// How a covariate enters a base.
#[derive(Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord)]
pub(crate) enum Kind {
    /// x itself (and its powers).
    Poly,
    /// The natural logarithm of x.
    Log,
    /// The square root of x.
    Sqrt,
}

impl Kind {
    fn of(t: Transform) -> (Kind, u32) {
        match t {
            Transform::Identity => (Kind::Poly, 1),
            Transform::Power(k) => (Kind::Poly, k.max(1)),
            Transform::Log => (Kind::Log, 1),
            Transform::Sqrt => (Kind::Sqrt, 1),
        }
    }
}

/// One centred base: u = (t(x) - t(x0)) / scale.
#[derive(Debug, Clone, PartialEq)]
pub(crate) struct Base {
    pub var: usize,
    pub kind: Kind,
    /// The centre, in the covariate's own units.
    pub x0: f64,
    /// t(x0).
    pub t0: f64,
    /// A power of two near the spread of t(x), so that dividing by it is exact.
    pub scale: f64,
}

impl Base {
    /// The centred, scaled value at x, computed from x - x0 so that no digit of the
    /// difference is lost: log(x) - log(x0) = log1p((x - x0) / x0) and
    /// sqrt(x) - sqrt(x0) = (x - x0) / (sqrt(x) + sqrt(x0)).
    #[inline]
    pub fn u(&self, x: f64) -> f64 {
        let d = match self.kind {
            Kind::Poly => x - self.x0,
            Kind::Log => ((x - self.x0) / self.x0).ln_1p(),
            Kind::Sqrt => {
                if self.x0 > 0.0 {
                    (x - self.x0) / (x.sqrt() + self.t0)
                } else {
                    x.sqrt()
                }
            }
        };
        d / self.scale
    }

    /// du/dx at x.
    fn du(&self, x: f64) -> f64 {
        match self.kind {
            Kind::Poly => 1.0 / self.scale,
            Kind::Log => 1.0 / (x * self.scale),
            Kind::Sqrt => 0.5 / (x.sqrt() * self.scale),
        }
    }
}

/// A monomial: the product of the indicators of `pattern` (factor, level code; never a
/// factor's first present level) and the powers of the centred bases in `powers`
/// (base index, exponent >= 1). Both lists are sorted.
#[derive(Debug, Clone, PartialEq, Eq, PartialOrd, Ord)]
pub(crate) struct Mono {
    pub pattern: Vec<(usize, u32)>,
    pub powers: Vec<(usize, u32)>,
}

impl Mono {
    fn degree(&self) -> u32 {
        self.powers.iter().map(|p| p.1).sum()
    }
}

/// The monomials of a model and the expansion of each design column in them.
#[derive(Debug, Clone)]
pub(crate) struct Basis {
    pub bases: Vec<Base>,
    pub monos: Vec<Mono>,
    /// Root mean square of each monomial over the first block of rows (1 until measured);
    /// the fit works with the monomials divided by it.
    pub scale: Vec<f64>,
    /// The name of the design column each monomial first came from (for messages).
    pub names: Vec<String>,
    /// The constant monomial, when there is one.
    pub constant: Option<usize>,
}

/// A combination of keys with coefficients, kept sorted (deterministic).
type Combo<K> = BTreeMap<K, f64>;

fn product<K: Ord + Clone>(a: &Combo<Vec<K>>, b: &Combo<Vec<K>>) -> Combo<Vec<K>> {
    let mut out: Combo<Vec<K>> = BTreeMap::new();
    for (ka, ca) in a {
        for (kb, cb) in b {
            let mut k = ka.clone();
            k.extend(kb.iter().cloned());
            k.sort();
            *out.entry(k).or_insert(0.0) += ca * cb;
        }
    }
    out.retain(|_, c| *c != 0.0);
    out
}

fn unit<K: Ord>() -> Combo<Vec<K>> {
    let mut m = BTreeMap::new();
    m.insert(Vec::new(), 1.0);
    m
}

/// Binomial coefficient as a float (exact for the degrees a model can have).
fn binomial(k: u32, i: u32) -> f64 {
    let mut c = 1.0;
    for j in 0..i {
        c = c * f64::from(k - j) / f64::from(j + 1);
    }
    c
}

impl Basis {
    /// The bases the columns need, centred and scaled on `first` (the first block of rows
    /// used), and the monomials of every column of every coding in `codings`, lowest degree
    /// first within a column, in order of first appearance.
    pub fn new(spec: &ModelSpec, lay: &Layout, codings: &[&[Column]], first: &[usize]) -> Basis {
        let mut bases: Vec<Base> = Vec::new();
        for cols in codings {
            for c in cols.iter() {
                for p in &c.parts {
                    if let ColPart::Numeric { var, transform } = p {
                        let (kind, _) = Kind::of(*transform);
                        if !bases.iter().any(|b| b.var == *var && b.kind == kind) {
                            bases.push(make_base(spec, *var, kind, first));
                        }
                    }
                }
            }
        }
        let mut basis = Basis {
            bases,
            monos: Vec::new(),
            scale: Vec::new(),
            names: Vec::new(),
            constant: None,
        };
        for cols in codings {
            for c in cols.iter() {
                let mut terms: Vec<(Mono, f64)> = basis.expand(lay, c);
                terms.sort_by(|a, b| (a.0.degree(), &a.0).cmp(&(b.0.degree(), &b.0)));
                for (m, _) in terms {
                    if !basis.monos.contains(&m) {
                        if m.pattern.is_empty() && m.powers.is_empty() {
                            basis.constant = Some(basis.monos.len());
                        }
                        basis.monos.push(m);
                        basis.names.push(c.name.clone());
                    }
                }
            }
        }
        basis.scale = vec![1.0; basis.monos.len()];
        basis
    }

    /// The expansion of column `c` in monomials (raw, unscaled coefficients).
    pub fn expand(&self, lay: &Layout, c: &Column) -> Vec<(Mono, f64)> {
        let mut pat: Combo<Vec<(usize, u32)>> = unit();
        let mut pow: Combo<Vec<(usize, u32)>> = unit();
        for p in &c.parts {
            match p {
                ColPart::Indicator { var, code } => {
                    pat = product(&pat, &indicator(lay, *var, *code));
                }
                ColPart::Effect { var, code, last } => {
                    let mut e = indicator(lay, *var, *code);
                    for (k, v) in indicator(lay, *var, *last) {
                        *e.entry(k).or_insert(0.0) -= v;
                    }
                    e.retain(|_, v| *v != 0.0);
                    pat = product(&pat, &e);
                }
                ColPart::Numeric { var, transform } => {
                    let (kind, k) = Kind::of(*transform);
                    let Some(bi) = self
                        .bases
                        .iter()
                        .position(|b| b.var == *var && b.kind == kind)
                    else {
                        continue;
                    };
                    let b = &self.bases[bi];
                    let mut e: Combo<Vec<(usize, u32)>> = BTreeMap::new();
                    for i in 0..=k {
                        let coef = binomial(k, i)
                            * b.t0.powi((k - i).min(i32::MAX as u32) as i32)
                            * b.scale.powi(i.min(i32::MAX as u32) as i32);
                        if coef != 0.0 {
                            let key = if i == 0 { Vec::new() } else { vec![(bi, i)] };
                            e.insert(key, coef);
                        }
                    }
                    pow = product(&pow, &e);
                }
            }
        }
        let mut out = Vec::new();
        for (pk, pc) in &pat {
            for (wk, wc) in &pow {
                let c = pc * wc;
                if c != 0.0 {
                    out.push((
                        Mono {
                            pattern: pk.clone(),
                            powers: wk.clone(),
                        },
                        c,
                    ));
                }
            }
        }
        out
    }

    /// The matrix A (monomials x columns) with X = W A, in units of the scaled monomials
    /// (row m multiplied by the monomial's scale).
    pub fn matrix(&self, lay: &Layout, cols: &[Column]) -> Mat {
        let q = self.monos.len();
        let mut a = Mat::zeros(q, cols.len());
        for (j, c) in cols.iter().enumerate() {
            for (m, coef) in self.expand(lay, c) {
                if let Some(i) = self.monos.iter().position(|x| *x == m) {
                    let s = self.scale.get(i).copied().unwrap_or(1.0);
                    a.set(i, j, coef * s);
                }
            }
        }
        a
    }

    /// Fills columns 0..q of `a`, from row `top` down, with the scaled monomials at the data
    /// rows `rows`.
    pub fn fill(&self, spec: &ModelSpec, rows: &[usize], a: &mut Mat, top: usize) {
        let ld = a.rows;
        let m = rows.len();
        let consecutive = match (rows.first(), rows.last()) {
            (Some(&f), Some(&l)) => l - f + 1 == m,
            _ => true,
        };
        let first = rows.first().copied().unwrap_or(0);
        // Each base's u at the block's rows.
        let us: Vec<Vec<f64>> = self
            .bases
            .iter()
            .map(|b| {
                let xs: &[f64] = match spec.vars.get(b.var) {
                    Some(Var::Numeric { values, .. }) => values,
                    _ => &[],
                };
                if consecutive {
                    match xs.get(first..first + m) {
                        Some(s) => s.iter().map(|&x| b.u(x)).collect(),
                        None => vec![f64::NAN; m],
                    }
                } else {
                    rows.iter()
                        .map(|&i| b.u(xs.get(i).copied().unwrap_or(f64::NAN)))
                        .collect()
                }
            })
            .collect();
        for (j, mono) in self.monos.iter().enumerate() {
            let inv = 1.0 / self.scale.get(j).copied().unwrap_or(1.0);
            let Some(out) = a.data.get_mut(j * ld + top..j * ld + top + m) else {
                continue;
            };
            out.fill(inv);
            for &(var, code) in &mono.pattern {
                let codes: &[Code] = match spec.vars.get(var) {
                    Some(Var::Factor { codes, .. }) => codes,
                    _ => &[],
                };
                let want = Code::level(code);
                if consecutive {
                    match codes.get(first..first + m) {
                        Some(cs) => {
                            for (o, &c) in out.iter_mut().zip(cs) {
                                *o *= f64::from(u8::from(c == want));
                            }
                        }
                        None => out.fill(0.0),
                    }
                } else {
                    for (o, &i) in out.iter_mut().zip(rows) {
                        *o *= f64::from(u8::from(codes.get(i) == Some(&want)));
                    }
                }
            }
            for &(b, e) in &mono.powers {
                let Some(u) = us.get(b) else { continue };
                if e == 1 {
                    for (o, &v) in out.iter_mut().zip(u) {
                        *o *= v;
                    }
                } else {
                    let e = e.min(i32::MAX as u32) as i32;
                    for (o, &v) in out.iter_mut().zip(u) {
                        *o *= v.powi(e);
                    }
                }
            }
        }
    }

    /// The scaled monomials at a point (factors as weights over their levels, covariates at
    /// values), or their derivative with respect to `pt.derivative`.
    pub fn at_point(&self, pt: &Point) -> Vec<f64> {
        let us: Vec<(f64, f64)> = self
            .bases
            .iter()
            .map(|b| {
                let x = pt
                    .numeric
                    .iter()
                    .find(|(v, _)| *v == b.var)
                    .map(|(_, x)| *x)
                    .unwrap_or(f64::NAN);
                (b.u(x), b.du(x))
            })
            .collect();
        self.monos
            .iter()
            .enumerate()
            .map(|(j, mono)| {
                let mut v = 1.0 / self.scale.get(j).copied().unwrap_or(1.0);
                for &(var, code) in &mono.pattern {
                    v *= pt
                        .factor_weights
                        .iter()
                        .find(|(w, _)| *w == var)
                        .and_then(|(_, ws)| ws.get(code as usize).copied())
                        .unwrap_or(0.0);
                }
                let mut differentiated = pt.derivative.is_none();
                for &(b, e) in &mono.powers {
                    let (u, du) = us.get(b).copied().unwrap_or((f64::NAN, f64::NAN));
                    let e = e.min(i32::MAX as u32) as i32;
                    let on_var = self.bases.get(b).map(|x| x.var) == pt.derivative;
                    if on_var {
                        differentiated = true;
                        v *= f64::from(e) * u.powi(e - 1) * du;
                    } else {
                        v *= u.powi(e);
                    }
                }
                if differentiated {
                    v
                } else {
                    0.0
                }
            })
            .collect()
    }
}

/// The canonical expansion of the indicator of level `code` of factor `var`: itself, or for
/// the first present level, 1 minus the indicators of the others.
fn indicator(lay: &Layout, var: usize, code: u32) -> Combo<Vec<(usize, u32)>> {
    let present: &[u32] = lay.factor(var).map(|f| f.present.as_slice()).unwrap_or(&[]);
    let mut m = BTreeMap::new();
    if present.first() == Some(&code) {
        m.insert(Vec::new(), 1.0);
        for &c in present.iter().skip(1) {
            m.insert(vec![(var, c)], -1.0);
        }
    } else {
        m.insert(vec![(var, code)], 1.0);
    }
    m
}

/// A base for variable `var`: its centre is the mean over the rows `first` (any value among
/// the data takes the offset out), its scale the power of two nearest the root mean square
/// of the centred values there.
fn make_base(spec: &ModelSpec, var: usize, kind: Kind, first: &[usize]) -> Base {
    let xs: Vec<f64> = match spec.vars.get(var) {
        Some(Var::Numeric { values, .. }) => first
            .iter()
            .filter_map(|&i| values.get(i).copied())
            .filter(|x| x.is_finite())
            .collect(),
        _ => Vec::new(),
    };
    let k = xs.len().max(1) as f64;
    let mean = xs.iter().sum::<f64>() / k;
    let mean = mean + xs.iter().map(|x| x - mean).sum::<f64>() / k;
    let x0 = if mean.is_finite() { mean } else { 0.0 };
    let t0 = match kind {
        Kind::Poly => x0,
        Kind::Log => x0.ln(),
        Kind::Sqrt => x0.max(0.0).sqrt(),
    };
    let mut base = Base {
        var,
        kind,
        x0,
        t0,
        scale: 1.0,
    };
    let ms = xs.iter().map(|&x| base.u(x).powi(2)).sum::<f64>() / k;
    let rms = ms.sqrt();
    if rms > 0.0 && rms.is_finite() {
        base.scale = 2f64.powi(rms.log2().round().clamp(-1000.0, 1000.0) as i32);
    }
    base
}
