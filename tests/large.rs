//! The large-n path (rows triangularised in blocks whose factors are merged, in parallel)
//! against a one-shot in-memory computation on 300,000 generated rows: a dense Householder QR
//! of the whole centred design matrix, written here independently of the engine (Golub & Van
//! Loan, *Matrix Computations*, 4th ed., algorithm 5.2.1), with pairwise sums; and the
//! coefficients against numpy in extended precision (tests/reference/large_longdouble.py).
//! Both to a relative 1e-12 (measured: under 1e-13 for both). Not timed;
//! tests/bench/run.sh does the timing.
//!
//! The data are invented: y = 10 + level effect + (0.8 + level slope) x + noise, with a
//! 4-level factor g and x uniform on [20, 80], from a fixed-seed generator.

use covey::model::{self, ModelSpec, Part, SsType, TermSpec, Transform, Var};

/// Rows generated: well above the engine's chunk of 4096 rows, so many chunks are merged.
const ROWS: usize = 300_000;
/// Agreement required between the two computations, relative to each value.
const REL_TOL: f64 = 1e-12;

/// The coefficients of y on g + x + g by x printed by tests/reference/large_longdouble.py
/// (numpy.longdouble, rounded to double), in the engine's order: intercept, g = B, C, D, x,
/// g = B, C, D by x.
const LONGDOUBLE: [f64; 8] = [
    9.990576668601285,
    1.5068912217809913,
    -0.7350498513413896,
    2.2442700385282497,
    0.8001308662615492,
    0.04989522907481144,
    -0.030321159899443208,
    0.02011866651451976,
];

/// A 64-bit linear congruential generator (Knuth's MMIX constants), top 53 bits as [0, 1).
struct Lcg(u64);

impl Lcg {
    fn next(&mut self) -> f64 {
        self.0 = self
            .0
            .wrapping_mul(6_364_136_223_846_793_005)
            .wrapping_add(1_442_695_040_888_963_407);
        (self.0 >> 11) as f64 / (1u64 << 53) as f64
    }
}

struct Data {
    y: Vec<f64>,
    x: Vec<f64>,
    g: Vec<u32>,
}

fn data() -> Data {
    let mut rng = Lcg(20_261_201);
    let effect = [0.0, 1.5, -0.75, 2.25];
    let slope = [0.0, 0.05, -0.03, 0.02];
    let mut d = Data {
        y: Vec::with_capacity(ROWS),
        x: Vec::with_capacity(ROWS),
        g: Vec::with_capacity(ROWS),
    };
    for i in 0..ROWS {
        let g = (i % 4) as u32;
        let x = 20.0 + 60.0 * rng.next();
        // Sum of four uniforms: a cheap bell-shaped noise with variance 1/3.
        let noise = (0..4).map(|_| rng.next()).sum::<f64>() - 2.0;
        d.y.push(10.0 + effect[g as usize] + (0.8 + slope[g as usize]) * x + 2.0 * noise);
        d.x.push(x);
        d.g.push(g);
    }
    d
}

/// The separate-slopes model y on g + x + g by x.
fn spec(d: &Data) -> ModelSpec {
    let part = |var| Part {
        var,
        transform: Transform::Identity,
    };
    ModelSpec {
        response: Var::Numeric {
            name: "y".into(),
            values: d.y.clone().into(),
        },
        vars: vec![
            Var::Factor {
                name: "g".into(),
                codes: std::sync::Arc::new(
                    d.g.iter().map(|&g| covey::data::Code::level(g)).collect(),
                ),
                levels: ["A", "B", "C", "D"].iter().map(|s| s.to_string()).collect(),
            },
            Var::Numeric {
                name: "x".into(),
                values: d.x.clone().into(),
            },
        ],
        terms: vec![
            TermSpec {
                parts: vec![part(0)],
            },
            TermSpec {
                parts: vec![part(1)],
            },
            TermSpec {
                parts: vec![part(0), part(1)],
            },
        ],
        intercept: true,
        row_numbers: (2..ROWS + 2).collect(),
        response_offset: 0.0,
        weights: None,
    }
}

/// Which columns of the full design: the intercept, g (3), x, g by x (3).
#[derive(Clone, Copy, PartialEq)]
enum Block {
    One,
    G,
    X,
    Gx,
}

/// The design columns of the chosen blocks, treatment (`effect = false`) or sum-to-zero coding.
fn design(d: &Data, blocks: &[Block], effect: bool) -> Vec<Vec<f64>> {
    let code = |g: u32, j: u32| -> f64 {
        if effect && g == 3 {
            -1.0
        } else if g == j {
            1.0
        } else {
            0.0
        }
    };
    let levels: Vec<u32> = if effect { vec![0, 1, 2] } else { vec![1, 2, 3] };
    let mut cols = Vec::new();
    for b in blocks {
        match b {
            Block::One => cols.push(vec![1.0; ROWS]),
            Block::X => cols.push(d.x.clone()),
            Block::G => {
                for &j in &levels {
                    cols.push(d.g.iter().map(|&g| code(g, j)).collect());
                }
            }
            Block::Gx => {
                for &j in &levels {
                    cols.push(
                        d.g.iter()
                            .zip(&d.x)
                            .map(|(&g, &x)| code(g, j) * x)
                            .collect(),
                    );
                }
            }
        }
    }
    cols
}

/// Dot product by pairwise summation (halves summed recursively down to 64 terms), whose
/// rounding error grows with log n rather than n (Higham, *Accuracy and Stability of
/// Numerical Algorithms*, 2nd ed., section 4.2): with 300,000 terms a plain running sum
/// would already lose about 1e-11.
fn pairwise_dot(a: &[f64], b: &[f64]) -> f64 {
    if a.len() <= 64 {
        return a.iter().zip(b).map(|(x, y)| x * y).sum();
    }
    let h = a.len() / 2;
    pairwise_dot(&a[..h], &b[..h]) + pairwise_dot(&a[h..], &b[h..])
}

/// Least squares by one Householder QR of the whole matrix, held in memory: (coefficients,
/// RSS from the residuals themselves). Every column but the constant is first centred on
/// its mean over all rows and scaled to unit root-mean-square, as the engine does with the
/// means of its first block, so that both solve equally well-conditioned problems and
/// differ only by how the rows are grouped; the coefficients are then mapped back to the
/// original columns (only the intercept changes under centring).
fn one_shot(cols: &[Vec<f64>], y: &[f64]) -> (Vec<f64>, f64) {
    let p = cols.len();
    let ones = vec![1.0; y.len()];
    let mean = |c: &[f64]| {
        let n = c.len() as f64;
        let first = pairwise_dot(c, &ones) / n;
        let dev: Vec<f64> = c.iter().map(|v| v - first).collect();
        first + pairwise_dot(&dev, &ones) / n
    };
    let constant: Vec<bool> = cols.iter().map(|c| c.iter().all(|v| *v == c[0])).collect();
    let centre: Vec<f64> = cols
        .iter()
        .zip(&constant)
        .map(|(c, &k)| if k { 0.0 } else { mean(c) })
        .collect();
    let scale: Vec<f64> = cols
        .iter()
        .zip(&centre)
        .zip(&constant)
        .map(|((c, m), &k)| {
            if k {
                1.0
            } else {
                let dev: Vec<f64> = c.iter().map(|v| v - m).collect();
                (pairwise_dot(&dev, &dev) / c.len() as f64).sqrt()
            }
        })
        .collect();
    let z: Vec<Vec<f64>> = cols
        .iter()
        .zip(centre.iter().zip(&scale))
        .map(|(c, (m, s))| c.iter().map(|v| (v - m) / s).collect())
        .collect();
    let mut a = z.clone();
    let mut b = y.to_vec();
    for k in 0..p {
        let norm = pairwise_dot(&a[k][k..], &a[k][k..]).sqrt();
        let alpha = if a[k][k] > 0.0 { -norm } else { norm };
        let mut v: Vec<f64> = a[k][k..].to_vec();
        v[0] -= alpha;
        let vv = pairwise_dot(&v, &v);
        for col in a.iter_mut().skip(k).chain(std::iter::once(&mut b)) {
            let s = pairwise_dot(&v, &col[k..]) * 2.0 / vv;
            for (c, vi) in col[k..].iter_mut().zip(&v) {
                *c -= s * vi;
            }
        }
    }
    let mut cz = vec![0.0; p];
    for i in (0..p).rev() {
        let s: f64 = (i + 1..p).map(|j| a[j][i] * cz[j]).sum();
        cz[i] = (b[i] - s) / a[i][i];
    }
    let res: Vec<f64> = (0..ROWS)
        .map(|r| y[r] - z.iter().zip(&cz).map(|(c, b)| c[r] * b).sum::<f64>())
        .collect();
    let rss = pairwise_dot(&res, &res);
    let mut coef: Vec<f64> = cz.iter().zip(&scale).map(|(c, s)| c / s).collect();
    if let Some(i) = constant.iter().position(|&k| k) {
        let shift: f64 = (0..p)
            .filter(|&j| !constant[j])
            .map(|j| coef[j] * centre[j])
            .sum();
        coef[i] -= shift;
    }
    (coef, rss)
}

fn rss(d: &Data, blocks: &[Block], effect: bool) -> f64 {
    one_shot(&design(d, blocks, effect), &d.y).1
}

fn close(what: &str, got: f64, want: f64) {
    let rel = (got - want).abs() / want.abs();
    assert!(
        rel <= REL_TOL,
        "{what}: chunked {got}, one-shot {want}, relative {rel:e}"
    );
}

#[test]
fn chunked_fit_matches_one_shot_qr() {
    use Block::*;
    let d = data();
    let fit = model::fit(&spec(&d)).expect("the generated model fits");

    let full = [One, G, X, Gx];
    let (coef, rss_full) = one_shot(&design(&d, &full, false), &d.y);
    let got = fit.coefficients(0.95);
    assert_eq!(got.len(), coef.len());
    for (c, want) in got.iter().zip(&coef) {
        close(&c.name, c.estimate, *want);
    }
    close("RSS", fit.rss(), rss_full);
    for (c, want) in got.iter().zip(LONGDOUBLE) {
        close(
            &format!("{} (extended precision)", c.name),
            c.estimate,
            want,
        );
    }

    let ss = |ty| -> Vec<f64> {
        fit.anova(ty)
            .expect("anova")
            .rows
            .iter()
            .map(|r| r.ss)
            .collect()
    };
    let r1 = rss(&d, &[One], false);
    let rg = rss(&d, &[One, G], false);
    let rx = rss(&d, &[One, X], false);
    let rgx = rss(&d, &[One, G, X], false);
    let type1 = [r1 - rg, rg - rgx, rgx - rss_full];
    let type2 = [rx - rgx, rg - rgx, rgx - rss_full];
    let type3 = [
        rss(&d, &[One, X, Gx], true) - rss_full,
        rss(&d, &[One, G, Gx], true) - rss_full,
        rss(&d, &[One, G, X], true) - rss_full,
    ];
    for (ty, want, name) in [
        (SsType::I, type1, "Type I"),
        (SsType::II, type2, "Type II"),
        (SsType::III, type3, "Type III"),
    ] {
        for (t, (g, w)) in ss(ty).iter().zip(&want).enumerate() {
            close(&format!("{name} SS of term {t}"), *g, *w);
        }
    }
}
