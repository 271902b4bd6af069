//! The t and F distributions behind every p-value and confidence limit
//! (statrs), with the conventions covey uses: two-sided t p-values, upper
//! F tail, NaN for arguments outside the domain.

use statrs::distribution::{ContinuousCDF, FisherSnedecor, StudentsT};

/// Two-sided p-value of a t statistic with `df` degrees of freedom.
pub fn t_two_sided_p(t: f64, df: usize) -> f64 {
    match StudentsT::new(0.0, 1.0, df as f64) {
        Ok(d) if t.is_finite() => (2.0 * d.sf(t.abs())).min(1.0),
        _ => f64::NAN,
    }
}

/// The quantile t(q; df): P(T <= t) = q.
pub fn t_quantile(q: f64, df: usize) -> f64 {
    if !(0.0..=1.0).contains(&q) {
        return f64::NAN;
    }
    match StudentsT::new(0.0, 1.0, df as f64) {
        Ok(d) => d.inverse_cdf(q),
        Err(_) => f64::NAN,
    }
}

/// Upper-tail p-value P(F > f) of the F distribution: the incomplete beta function
/// I_y(df2/2, df1/2) at y = df2 / (df1 f + df2), evaluated directly on the small side (covey's
/// own, also behind the noncentral F), so that a huge F (a nearly exact fit) keeps its p of
/// 1e-79 instead of the 0 that statrs's F distribution gives there.
pub fn f_upper_p(f: f64, df1: usize, df2: usize) -> f64 {
    if !(f.is_finite() && f >= 0.0) || df1 == 0 || df2 == 0 {
        return f64::NAN;
    }
    let (d1, d2) = (df1 as f64, df2 as f64);
    let s = d1 * f + d2;
    crate::stats::ncf::beta_reg_pair(d1 / 2.0, d2 / 2.0, d1 * f / s, d2 / s).1
}

/// The quantile F(q; df1, df2): P(F <= x) = q.
pub fn f_quantile(q: f64, df1: usize, df2: usize) -> f64 {
    if !(0.0..=1.0).contains(&q) {
        return f64::NAN;
    }
    match FisherSnedecor::new(df1 as f64, df2 as f64) {
        Ok(d) => d.inverse_cdf(q),
        Err(_) => f64::NAN,
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Values of scipy.stats.f.sf (scipy 1.17.1). The first, a nearly exact fit's F, came out 0
    /// from statrs.
    #[test]
    fn f_upper_tail_matches_scipy_far_out() {
        let cases = [
            (1.2999999993464807e20, 3, 8, 4.35714592257557e-79),
            (3.38, 3, 19, 0.03970732064134734),
            (0.5, 2, 5, 0.6339381452606089),
            (1e4, 3, 100, 9.465477096595581e-124),
            (0.0, 2, 5, 1.0),
            (250.0, 1, 1, 0.04020981366648045),
            (2.0, 1, 100_000, 0.157302320349165),
        ];
        for (f, d1, d2, want) in cases {
            let got = f_upper_p(f, d1, d2);
            assert!(
                ((got - want) / want).abs() < 1e-12,
                "F {f} ({d1}, {d2}): {got} vs {want}"
            );
        }
        assert!(f_upper_p(f64::NAN, 2, 5).is_nan());
        assert!(f_upper_p(1.0, 2, 0).is_nan());
    }
}
