//! The Brown-Forsythe test of equal variances: Levene's test computed on absolute deviations from
//! the group medians (Brown & Forsythe 1974, Journal of the American Statistical Association 69,
//! 364-367). The statistic is the one-way analysis-of-variance F of `z_ij = |x_ij - median_i|`:
//!
//! ```text
//! F = [(N - g) / (g - 1)] * Σ n_i (zbar_i - zbar)² / Σ Σ (z_ij - zbar_i)²
//! ```
//!
//! with `g - 1` and `N - g` degrees of freedom, and an upper-tail p-value from the F distribution.

use super::StatsError;

/// Result of a test of equal variances.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct EqualVariance {
    /// The F statistic.
    pub f: f64,
    /// Numerator degrees of freedom (number of groups - 1).
    pub df1: f64,
    /// Denominator degrees of freedom (number of values - number of groups).
    pub df2: f64,
    /// Upper-tail p-value of `f` in the F distribution with `df1` and `df2` degrees of freedom.
    pub p: f64,
}

/// Median of a slice of finite values (mean of the two middle values for even sizes; NaN if
/// empty, which the caller rules out), found by selection, which reorders the slice.
fn median_in_place(s: &mut [f64]) -> f64 {
    let n = s.len();
    if n == 0 {
        return f64::NAN;
    }
    let (below, &mut upper, _) = s.select_nth_unstable_by(n / 2, f64::total_cmp);
    if n % 2 == 1 {
        upper
    } else {
        // The lower middle value is the largest of those below the upper one.
        let lower = below
            .iter()
            .copied()
            .max_by(f64::total_cmp)
            .unwrap_or(upper);
        0.5 * (lower + upper)
    }
}

/// Brown-Forsythe test that the groups have equal variances.
///
/// Errors: [`StatsError::TooFewGroups`] for fewer than 2 groups, [`StatsError::EmptyGroup`] for a
/// group with no values, [`StatsError::NonFinite`] for a NaN or infinite value, and
/// [`StatsError::ZeroWithinSpread`] when every value equals its group median.
pub fn brown_forsythe(groups: &[&[f64]]) -> Result<EqualVariance, StatsError> {
    brown_forsythe_owned(groups.iter().map(|x| x.to_vec()).collect())
}

/// [`brown_forsythe`] on groups it may reorder and overwrite (no copy of the values is made).
pub fn brown_forsythe_owned(groups: Vec<Vec<f64>>) -> Result<EqualVariance, StatsError> {
    let sizes: Vec<usize> = groups.iter().map(Vec::len).collect();
    let mut groups = groups.into_iter();
    brown_forsythe_each(&sizes, |_| groups.next().unwrap_or_default())
}

/// [`brown_forsythe`] on groups handed over one at a time: `group(i)` gives group `i` (of
/// `sizes[i]` values), called once for each in order, and the group is dropped once its
/// share of the sums is taken. So only one group is held at a time, which matters when the
/// groups together are as long as a large data set. The same numbers as [`brown_forsythe`]:
/// the sums run in the same order.
pub fn brown_forsythe_each(
    sizes: &[usize],
    mut group: impl FnMut(usize) -> Vec<f64>,
) -> Result<EqualVariance, StatsError> {
    let g = sizes.len();
    if g < 2 {
        return Err(StatsError::TooFewGroups(g));
    }
    if let Some(i) = sizes.iter().position(|&n| n == 0) {
        return Err(StatsError::EmptyGroup(i));
    }
    // Per group: its size, the mean of its deviations and their sum of squares about it; the
    // deviations of every group summed in group order for the grand mean.
    let mut parts: Vec<(usize, f64, f64)> = Vec::with_capacity(g);
    let mut grand_sum = -0.0;
    for i in 0..g {
        let mut x = group(i);
        if x.is_empty() {
            return Err(StatsError::EmptyGroup(i));
        }
        if x.iter().any(|v| !v.is_finite()) {
            return Err(StatsError::NonFinite);
        }
        let med = median_in_place(&mut x);
        for v in x.iter_mut() {
            *v = (*v - med).abs();
        }
        let z = x;
        let mean = z.iter().sum::<f64>() / z.len() as f64;
        grand_sum = z.iter().fold(grand_sum, |a, &b| a + b);
        let within = z.iter().map(|v| (v - mean) * (v - mean)).sum::<f64>();
        parts.push((z.len(), mean, within));
    }
    let n_total: usize = parts.iter().map(|p| p.0).sum();
    let grand = grand_sum / n_total as f64;
    let between: f64 = parts
        .iter()
        .map(|&(n, m, _)| n as f64 * (m - grand) * (m - grand))
        .sum();
    let within: f64 = parts.iter().map(|p| p.2).sum();
    if !(within > 0.0 && within.is_finite()) || n_total <= g {
        return Err(StatsError::ZeroWithinSpread);
    }
    let df1 = (g - 1) as f64;
    let df2 = (n_total - g) as f64;
    let f = (between / df1) / (within / df2);
    // Both degrees of freedom are at least 1 here, so the distribution always exists.
    Ok(EqualVariance {
        f,
        df1,
        df2,
        p: crate::model::dist::f_upper_p(f, g - 1, n_total - g),
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Allowed relative difference from scipy: both compute the same closed form, so only
    /// rounding and the F distribution's tail separate them (largest measured: 1e-13).
    const SCIPY_REL_TOL: f64 = 1e-10;

    /// Same generator as tests/reference/stats_reference.py (see the Shapiro-Wilk tests).
    fn approx_normal(seed: u64, n: usize) -> Vec<f64> {
        let mut state = seed;
        (0..n)
            .map(|_| {
                (0..12)
                    .map(|_| {
                        state = state
                            .wrapping_mul(6_364_136_223_846_793_005)
                            .wrapping_add(1_442_695_040_888_963_407);
                        (state >> 11) as f64 / (1u64 << 53) as f64
                    })
                    .sum::<f64>()
                    - 6.0
            })
            .collect()
    }

    fn close(a: f64, b: f64) -> bool {
        ((a - b) / b).abs() <= SCIPY_REL_TOL
    }

    fn check(groups: &[&[f64]], f: f64, df1: f64, df2: f64, p: f64) {
        let r = brown_forsythe(groups);
        assert!(r.is_ok(), "{r:?}");
        if let Ok(r) = r {
            assert!(close(r.f, f), "F {} vs {f}", r.f);
            assert_eq!((r.df1, r.df2), (df1, df2));
            assert!(close(r.p, p), "p {} vs {p}", r.p);
        }
    }

    #[test]
    fn matches_scipy() {
        // Source: scipy.stats.levene(..., center='median') (stats_reference.py).
        check(
            &[
                &[8.1, 9.4, 7.7, 10.2, 8.8],
                &[12.0, 6.3, 9.9, 14.1, 5.2, 11.0],
                &[9.0, 9.3, 8.7, 9.1],
            ],
            4.772_655_557_038_236,
            2.0,
            12.0,
            0.029_851_823_022_011_25,
        );
        check(
            &[&[1.0, 2.0, 3.0, 4.0, 10.0], &[2.0, 2.5, 3.0, 3.5]],
            1.447_843_979_244_945_6,
            1.0,
            7.0,
            0.267_984_987_865_151_5,
        );
        let a = approx_normal(11, 9);
        let b: Vec<f64> = approx_normal(12, 12).iter().map(|v| 2.0 * v).collect();
        let c = approx_normal(13, 7);
        let d: Vec<f64> = approx_normal(14, 10)
            .iter()
            .map(|v| 0.5 * v + 3.0)
            .collect();
        check(
            &[&a, &b, &c, &d],
            11.042_187_003_168_362,
            3.0,
            34.0,
            3.262_565_846_888_507e-5,
        );
    }

    /// The worked example of the NIST/SEMATECH e-Handbook of Statistical Methods, section 1.3.5.10
    /// "Levene Test for Equality of Variances": gear diameters (data set GEAR.DAT), ten batches of
    /// ten, tested with the median-centred statistic. The handbook prints W = 1.705910 with 9 and 90
    /// degrees of freedom against a 5% critical value F(0.95; 9, 90) = 1.985594, so equal variances
    /// are not rejected. covey gives 1.7059177, 7.7e-6 above the printed value; scipy 1.17.1
    /// (`stats.levene(*batches, center='median')`) gives 1.705917693000894 for the same data,
    /// agreeing with covey to 1e-10, so the handbook's last digits are taken to reflect the
    /// precision of the program that produced it, and the tolerance against it is 1e-5.
    #[test]
    fn matches_the_nist_handbook_gear_example() {
        let batches: [[f64; 10]; 10] = [
            [
                1.006, 0.996, 0.998, 1.000, 0.992, 0.993, 1.002, 0.999, 0.994, 1.000,
            ],
            [
                0.998, 1.006, 1.000, 1.002, 0.997, 0.998, 0.996, 1.000, 1.006, 0.988,
            ],
            [
                0.991, 0.987, 0.997, 0.999, 0.995, 0.994, 1.000, 0.999, 0.996, 0.996,
            ],
            [
                1.005, 1.002, 0.994, 1.000, 0.995, 0.994, 0.998, 0.996, 1.002, 0.996,
            ],
            [
                0.998, 0.998, 0.982, 0.990, 1.002, 0.984, 0.996, 0.993, 0.980, 0.996,
            ],
            [
                1.009, 1.013, 1.009, 0.997, 0.988, 1.002, 0.995, 0.998, 0.981, 0.996,
            ],
            [
                0.990, 1.004, 0.996, 1.001, 0.998, 1.000, 1.018, 1.010, 0.996, 1.002,
            ],
            [
                0.998, 1.000, 1.006, 1.000, 1.002, 0.996, 0.998, 0.996, 1.002, 1.006,
            ],
            [
                1.002, 0.998, 0.996, 0.995, 0.996, 1.004, 1.004, 0.998, 0.999, 0.991,
            ],
            [
                0.991, 0.995, 0.984, 0.994, 0.997, 0.997, 0.991, 0.998, 1.004, 0.997,
            ],
        ];
        let groups: Vec<&[f64]> = batches.iter().map(|b| b.as_slice()).collect();
        let r = brown_forsythe(&groups);
        assert!(r.is_ok(), "{r:?}");
        if let Ok(r) = r {
            assert!((r.f - 1.705_910).abs() <= 1e-5, "W = {}", r.f);
            assert!(close(r.f, 1.705_917_693_000_894), "W = {}", r.f);
            assert!(close(r.p, 0.099_082_975_552_204_81), "p = {}", r.p);
            assert_eq!((r.df1, r.df2), (9.0, 90.0));
            assert!(r.f < crate::model::dist::f_quantile(0.95, 9, 90));
            assert!((crate::model::dist::f_quantile(0.95, 9, 90) - 1.985_594).abs() <= 1e-6);
        }
    }

    /// The statistic computed with every group's deviations held at once, as the test was
    /// first written: the one-at-a-time sums must give the same bits.
    fn all_groups_at_once(groups: &[&[f64]]) -> (f64, f64) {
        let deviations: Vec<Vec<f64>> = groups
            .iter()
            .map(|x| {
                let mut x = x.to_vec();
                let med = median_in_place(&mut x);
                x.iter().map(|v| (v - med).abs()).collect()
            })
            .collect();
        let n_total: usize = deviations.iter().map(Vec::len).sum();
        let means: Vec<f64> = deviations
            .iter()
            .map(|z| z.iter().sum::<f64>() / z.len() as f64)
            .collect();
        let grand = deviations.iter().flatten().sum::<f64>() / n_total as f64;
        let between: f64 = deviations
            .iter()
            .zip(&means)
            .map(|(z, m)| z.len() as f64 * (m - grand) * (m - grand))
            .sum();
        let within: f64 = deviations
            .iter()
            .zip(&means)
            .map(|(z, m)| z.iter().map(|v| (v - m) * (v - m)).sum::<f64>())
            .sum();
        (between, within)
    }

    #[test]
    fn one_group_at_a_time_gives_the_same_bits() {
        let (a, b, c) = (
            approx_normal(3, 101),
            approx_normal(4, 250),
            approx_normal(5, 64),
        );
        let groups: [&[f64]; 3] = [&a, &b, &c];
        let (between, within) = all_groups_at_once(&groups);
        let want = (between / 2.0) / (within / (415.0 - 3.0));
        let got = brown_forsythe(&groups).map(|r| r.f.to_bits());
        assert_eq!(got, Ok(want.to_bits()));
    }

    #[test]
    fn equal_spreads_give_f_zero() {
        // Deviations from the medians have the same mean in both groups: F = 0, p = 1.
        let r = brown_forsythe(&[&[1.0, 2.0, 3.0], &[11.0, 12.0, 13.0]]);
        assert!(matches!(r, Ok(EqualVariance { f, p, .. }) if f == 0.0 && p == 1.0));
    }

    #[test]
    fn errors() {
        let one: &[f64] = &[1.0, 2.0];
        let empty: &[f64] = &[];
        assert_eq!(brown_forsythe(&[]), Err(StatsError::TooFewGroups(0)));
        assert_eq!(brown_forsythe(&[one]), Err(StatsError::TooFewGroups(1)));
        assert_eq!(
            brown_forsythe(&[one, empty]),
            Err(StatsError::EmptyGroup(1))
        );
        assert_eq!(
            brown_forsythe(&[one, &[1.0, f64::NAN]]),
            Err(StatsError::NonFinite)
        );
        // Every value equal to its group median.
        assert_eq!(
            brown_forsythe(&[&[4.0, 4.0], &[7.0, 7.0, 7.0]]),
            Err(StatsError::ZeroWithinSpread)
        );
        // One value per group: no within-group degrees of freedom.
        assert_eq!(
            brown_forsythe(&[&[1.0], &[5.0]]),
            Err(StatsError::ZeroWithinSpread)
        );
    }
}
