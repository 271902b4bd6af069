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

/// Upper-tail p-value P(F > f) of the F distribution.
pub fn f_upper_p(f: f64, df1: usize, df2: usize) -> f64 {
    match FisherSnedecor::new(df1 as f64, df2 as f64) {
        Ok(d) if f.is_finite() && f >= 0.0 => d.sf(f),
        _ => f64::NAN,
    }
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
