//! The Shapiro-Wilk W test of normality (Shapiro & Wilk 1965, Biometrika 52, 591-611), with
//! Royston's approximations for the coefficients and for the p-value: Royston (1992, Statistics
//! and Computing 2, 117-119) and Royston (1995, Applied Statistics 44, 547-551, algorithm AS R94).
//! Written for this crate from the published formulas.
//!
//! Coefficients: with `m_i = Φ^-1((i - 3/8) / (n + 1/4))` and `u = 1/sqrt(n)`, the largest one or
//! two coefficients come from polynomials in `u`; the others are `m_i / sqrt(φ)`, with `φ` chosen
//! so that the coefficients have unit sum of squares. `W = (Σ a_i x_(i))² / Σ (x_i - mean)²`.
//!
//! p-value: for `n = 3` the exact distribution, `P(W <= w) = (6/π)(asin(sqrt w) - asin(sqrt 3/4))`;
//! for `4 <= n <= 11`, `-ln(γ - ln(1 - W))` is treated as normal; for `n >= 12`, `ln(1 - W)` is
//! treated as normal; means and standard deviations are Royston's polynomials in `n` or `ln n`.

use std::f64::consts::{FRAC_1_SQRT_2, PI, SQRT_2};

use statrs::function::erf::{erfc, erfc_inv};

use super::StatsError;

/// Smallest sample size for which the test is defined.
pub const MIN_N: usize = 3;
/// Largest sample size for which Royston's approximation was fitted (Royston 1995).
pub const MAX_N: usize = 5000;

/// Polynomial in `u = 1/sqrt(n)` added to `m_n / sqrt(Σ m²)` for the largest coefficient
/// (Royston 1992), lowest power first.
const C1: [f64; 6] = [0.0, 0.221_157, -0.147_981, -2.071_19, 4.434_685, -2.706_056];
/// The same for the second largest coefficient, used when `n > 5`.
const C2: [f64; 6] = [
    0.0, 0.042_981, -0.293_762, -1.752_461, 5.682_633, -3.582_633,
];
/// `γ(n) = G[0] + G[1] n`, the bound in the small-sample transform `-ln(γ - ln(1 - W))`.
const G: [f64; 2] = [-2.273, 0.459];
/// Mean of the transformed W for `4 <= n <= 11`, a cubic in `n`.
const C3: [f64; 4] = [0.544, -0.399_78, 0.025_054, -6.714e-4];
/// Log of the standard deviation for `4 <= n <= 11`, a cubic in `n`.
const C4: [f64; 4] = [1.3822, -0.778_57, 0.062_767, -0.002_032_2];
/// Mean of `ln(1 - W)` for `n >= 12`, a cubic in `ln n`.
const C5: [f64; 4] = [-1.5861, -0.310_82, -0.083_751, 0.003_891_5];
/// Log of the standard deviation of `ln(1 - W)` for `n >= 12`, a quadratic in `ln n`.
const C6: [f64; 3] = [-0.4803, -0.082_676, 0.003_030_2];

/// Result of the Shapiro-Wilk test.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct ShapiroWilk {
    /// The W statistic, in (0, 1].
    pub w: f64,
    /// Royston's approximate p-value (small W means evidence against normality).
    pub p: f64,
}

/// Polynomial `c[0] + c[1] x + c[2] x² + ...` by Horner's rule.
fn poly(c: &[f64], x: f64) -> f64 {
    c.iter().rev().fold(0.0, |acc, &ci| acc * x + ci)
}

/// Standard normal quantile.
fn norm_quantile(p: f64) -> f64 {
    -SQRT_2 * erfc_inv(2.0 * p)
}

/// Standard normal upper-tail probability.
fn norm_sf(z: f64) -> f64 {
    0.5 * erfc(z * FRAC_1_SQRT_2)
}

/// The positive half of the coefficients, largest first: `a_n, a_(n-1), ...` (length `n / 2`).
/// The coefficient of `x_(i)` is minus that of `x_(n+1-i)`; the middle value of an odd sample
/// has coefficient 0.
fn coefficients(n: usize) -> Vec<f64> {
    let half = n / 2;
    if n == 3 {
        return vec![FRAC_1_SQRT_2];
    }
    let nf = n as f64;
    // m[j] = m_(n-j) > 0, j = 0..half (the largest expected normal order statistics).
    let m: Vec<f64> = (1..=half)
        .map(|i| -norm_quantile((i as f64 - 0.375) / (nf + 0.25)))
        .collect();
    let mm = 2.0 * m.iter().map(|v| v * v).sum::<f64>();
    let u = 1.0 / nf.sqrt();
    let m0 = m.first().copied().unwrap_or(0.0);
    let a0 = m0 / mm.sqrt() + poly(&C1, u);
    if n > 5 {
        let m1 = m.get(1).copied().unwrap_or(0.0);
        let a1 = m1 / mm.sqrt() + poly(&C2, u);
        let phi = (mm - 2.0 * m0 * m0 - 2.0 * m1 * m1) / (1.0 - 2.0 * a0 * a0 - 2.0 * a1 * a1);
        let s = phi.sqrt();
        let mut a = vec![a0, a1];
        a.extend(m.iter().skip(2).map(|v| v / s));
        a
    } else {
        let phi = (mm - 2.0 * m0 * m0) / (1.0 - 2.0 * a0 * a0);
        let s = phi.sqrt();
        let mut a = vec![a0];
        a.extend(m.iter().skip(1).map(|v| v / s));
        a
    }
}

/// Royston's p-value for a W statistic from a sample of size `n` (`3 <= n <= 5000`).
fn p_value(w: f64, n: usize) -> f64 {
    let nf = n as f64;
    if n == 3 {
        // Exact: P(W <= w) = (6/π)(asin(sqrt w) - π/3) for 3/4 <= w <= 1.
        let p = 6.0 / PI * (w.sqrt().asin() - PI / 3.0);
        return p.clamp(0.0, 1.0);
    }
    let y = (1.0 - w).ln();
    let z = if n <= 11 {
        let gamma = poly(&G, nf);
        if y >= gamma {
            // W is below the range covered by the transform: the p-value is negligible.
            return 0.0;
        }
        let y2 = -(gamma - y).ln();
        (y2 - poly(&C3, nf)) / poly(&C4, nf).exp()
    } else {
        let ln_n = nf.ln();
        (y - poly(&C5, ln_n)) / poly(&C6, ln_n).exp()
    };
    norm_sf(z).clamp(0.0, 1.0)
}

/// Whether a sample of `n` values is one the test is calibrated for (`3 <= n <= 5000`):
/// [`StatsError::SampleSizeOutOfRange`] otherwise.
pub fn sample_size(n: usize) -> Result<(), StatsError> {
    if (MIN_N..=MAX_N).contains(&n) {
        Ok(())
    } else {
        Err(StatsError::SampleSizeOutOfRange {
            n,
            min: MIN_N,
            max: MAX_N,
        })
    }
}

/// Shapiro-Wilk test of normality of the values `x` (order does not matter).
///
/// Errors: [`StatsError::SampleSizeOutOfRange`] unless `3 <= n <= 5000`,
/// [`StatsError::NonFinite`] for a NaN or infinite value, [`StatsError::ZeroRange`] when all values
/// are equal.
pub fn shapiro_wilk(x: &[f64]) -> Result<ShapiroWilk, StatsError> {
    let n = x.len();
    sample_size(n)?;
    if x.iter().any(|v| !v.is_finite()) {
        return Err(StatsError::NonFinite);
    }
    let mut s = x.to_vec();
    s.sort_by(f64::total_cmp);
    let lowest = s.first().copied().unwrap_or(0.0);
    let highest = s.last().copied().unwrap_or(0.0);
    if highest <= lowest {
        return Err(StatsError::ZeroRange);
    }
    let mean = s.iter().sum::<f64>() / n as f64;
    let ss: f64 = s.iter().map(|v| (v - mean) * (v - mean)).sum();
    if !(ss > 0.0 && ss.is_finite()) {
        return Err(StatsError::ZeroRange);
    }
    let a = coefficients(n);
    let numerator: f64 = a
        .iter()
        .zip(s.iter().rev().zip(s.iter()))
        .map(|(ai, (hi, lo))| ai * (hi - lo))
        .sum();
    let w = (numerator * numerator / ss).min(1.0);
    Ok(ShapiroWilk {
        w,
        p: p_value(w, n),
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Allowed difference in W from scipy. The two differ by up to 2e-10 (measured), a
    /// difference in the normal quantiles or the order of operations, not in the method.
    const SCIPY_W_TOL: f64 = 1e-8;
    /// Allowed relative difference in p from scipy. At n = 5000, 1 - W is only 4e-4, so a W
    /// difference of 2e-10 moves ln(1 - W) by 5e-7 and p by 1.2e-6 relative (the largest
    /// measured); elsewhere the differences are below 2e-8.
    const SCIPY_P_REL_TOL: f64 = 1e-5;

    /// 64-bit linear congruential generator (Knuth's MMIX constants), uniforms in [0, 1); the
    /// same generator is in tests/reference/stats_reference.py.
    fn lcg_uniforms(seed: u64, n: usize) -> Vec<f64> {
        let mut state = seed;
        (0..n)
            .map(|_| {
                state = state
                    .wrapping_mul(6_364_136_223_846_793_005)
                    .wrapping_add(1_442_695_040_888_963_407);
                (state >> 11) as f64 / (1u64 << 53) as f64
            })
            .collect()
    }

    /// Sum of 12 uniforms minus 6: close to a standard normal, and pure arithmetic, so Python
    /// produces the same numbers.
    fn approx_normal(seed: u64, n: usize) -> Vec<f64> {
        lcg_uniforms(seed, 12 * n)
            .chunks(12)
            .map(|c| c.iter().sum::<f64>() - 6.0)
            .collect()
    }

    fn check(x: &[f64], w: f64, p: f64) {
        let got = shapiro_wilk(x);
        assert!(got.is_ok(), "n = {}: {got:?}", x.len());
        if let Ok(r) = got {
            assert!(
                (r.w - w).abs() <= SCIPY_W_TOL,
                "n = {}: W {} vs {w}",
                x.len(),
                r.w
            );
            assert!(
                ((r.p - p) / p).abs() <= SCIPY_P_REL_TOL,
                "n = {}: p {} vs {p}",
                x.len(),
                r.p
            );
        }
    }

    #[test]
    fn small_samples_match_scipy() {
        // Source: scipy.stats.shapiro (stats_reference.py, "n3" .. "n11").
        check(
            &[1.0, 2.0, 4.0],
            0.964_285_714_285_714_2,
            0.636_886_845_028_968_9,
        );
        check(
            &[2.1, 3.4, 1.9, 5.6],
            0.876_031_834_148_113_3,
            0.321_964_802_033_592,
        );
        check(
            &[148.0, 154.0, 158.0, 160.0, 161.0],
            0.902_280_458_173_252_8,
            0.422_617_786_209_574_7,
        );
        check(
            &[6.5, 7.1, 5.9, 8.3, 6.8, 7.7, 6.0, 9.9, 7.2, 6.6, 7.0],
            0.883_470_672_675_303_9,
            0.115_130_120_539_730_54,
        );
    }

    #[test]
    fn generated_samples_match_scipy() {
        // Source: scipy.stats.shapiro on approx_normal(seed = n, n) (stats_reference.py).
        let cases = [
            (20, 0.961_996_820_069_483_5, 0.584_469_019_103_901_9),
            (50, 0.980_419_935_371_418_7, 0.569_805_811_878_973_7),
            (200, 0.993_349_586_815_540_3, 0.507_236_805_846_574_2),
            (1000, 0.998_586_812_026_744_3, 0.612_185_380_168_778_2),
            (5000, 0.999_586_291_672_317_8, 0.382_244_500_349_740_56),
        ];
        for (n, w, p) in cases {
            check(&approx_normal(n as u64, n), w, p);
        }
    }

    #[test]
    fn skewed_samples_have_small_p() {
        // Source: scipy.stats.shapiro on cubes of lcg_uniforms(7 + n, n) (stats_reference.py).
        let cases = [
            (30, 0.807_706_726_989_401, 9.088_425_485_006_068e-5),
            (100, 0.808_151_559_670_994_5, 4.440_899_834_250_56e-10),
        ];
        for (n, w, p) in cases {
            let x: Vec<f64> = lcg_uniforms(7 + n as u64, n)
                .iter()
                .map(|u| u * u * u)
                .collect();
            check(&x, w, p);
        }
    }

    #[test]
    fn exact_distribution_for_three() {
        // For n = 3 the distribution of W is exact (Shapiro & Wilk 1965):
        // P(W <= w) = (6/π)(asin(sqrt w) - π/3). Its 5% point is sin²(π/3 + 0.05 π/6).
        let w5 = (PI / 3.0 + 0.05 * PI / 6.0).sin().powi(2);
        assert!((p_value(w5, 3) - 0.05).abs() < 1e-12);
        assert_eq!(p_value(0.75, 3), 0.0);
        assert!((p_value(1.0, 3) - 1.0).abs() < 1e-12);
    }

    #[test]
    fn handbook_percentage_points() {
        // Shapiro & Wilk (1965, Biometrika 52, 591-611), table of percentage points of W,
        // 1% and 5% columns — from memory. Royston's approximation is not the method behind
        // that table (whose points came partly from sampling experiments), so p at a tabled
        // point is checked against a band of about -35% to +50% around the nominal level
        // (measured: 0.038 to 0.052 at the 5% points, 0.0066 to 0.011 at the 1% points), and
        // the 1% point must give the smaller p.
        let five = [(3, 0.767), (5, 0.762), (10, 0.842), (20, 0.905)];
        let one = [(3, 0.753), (5, 0.686), (10, 0.781), (20, 0.868)];
        for ((n, w5), (n1, w1)) in five.into_iter().zip(one) {
            let p5 = p_value(w5, n);
            let p1 = p_value(w1, n1);
            assert!((0.033..=0.075).contains(&p5), "n = {n}: p at 5% point {p5}");
            assert!(
                (0.005..=0.015).contains(&p1),
                "n = {n1}: p at 1% point {p1}"
            );
            assert!(p1 < p5);
        }
    }

    #[test]
    fn p_is_monotone_in_w() {
        for n in [4, 7, 11, 12, 30, 400, 5000] {
            let mut last = 0.0;
            for i in 0..200 {
                let w = 0.8 + 0.001 * f64::from(i);
                let p = p_value(w, n);
                assert!(p >= last, "n = {n}, W = {w}");
                last = p;
            }
        }
    }

    #[test]
    fn errors() {
        assert_eq!(
            shapiro_wilk(&[1.0, 2.0]),
            Err(StatsError::SampleSizeOutOfRange {
                n: 2,
                min: 3,
                max: 5000
            })
        );
        assert!(matches!(
            shapiro_wilk(&vec![0.5; 5001]),
            Err(StatsError::SampleSizeOutOfRange { n: 5001, .. })
        ));
        assert_eq!(shapiro_wilk(&[3.0; 10]), Err(StatsError::ZeroRange));
        assert_eq!(
            shapiro_wilk(&[1.0, f64::NAN, 2.0]),
            Err(StatsError::NonFinite)
        );
        assert_eq!(
            shapiro_wilk(&[1.0, f64::INFINITY, 2.0]),
            Err(StatsError::NonFinite)
        );
    }

    #[test]
    fn order_and_location_scale_do_not_matter() {
        let x = approx_normal(3, 25);
        let mut y: Vec<f64> = x.iter().rev().map(|v| 1e6 + 3.0 * v).collect();
        y.swap(0, 7);
        if let (Ok(a), Ok(b)) = (shapiro_wilk(&x), shapiro_wilk(&y)) {
            assert!((a.w - b.w).abs() < 1e-9);
        } else {
            panic!("unexpected error");
        }
    }
}
