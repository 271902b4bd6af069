//! Descriptive statistics of one sample.

/// Mean, spread and order statistics of a sample; NaN where undefined
/// (an empty sample, or SD of a single value).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Description {
    pub mean: f64,
    pub sd: f64,
    pub se: f64,
    pub min: f64,
    pub median: f64,
    pub max: f64,
}

/// Sums with Neumaier's compensated summation (Neumaier 1974, ZAMM 54,
/// 39-51), so that long columns of similar values keep their digits.
pub fn sum(values: impl IntoIterator<Item = f64>) -> f64 {
    let (mut s, mut c) = (0.0f64, 0.0f64);
    for x in values {
        let t = s + x;
        if s.abs() >= x.abs() {
            c += (s - t) + x;
        } else {
            c += (x - t) + s;
        }
        s = t;
    }
    s + c
}

/// The mean of `values` (NaN for none): the compensated sum over the count, corrected once by
/// the mean of the deviations from it, which recovers the rounding of the first division. This
/// is covey's one mean: `table summary`, `mean(X)` in `compute`, and a model's covariate means
/// (adjusted means, "at its mean" in captions) all come from it, so they agree to the last bit
/// on the same values.
///
/// The values are summed after scaling by a power of two (exact), so that a column near 1e300
/// does not overflow its sum.
pub fn mean(values: &[f64]) -> f64 {
    if values.is_empty() {
        return f64::NAN;
    }
    let (up, down) = scale_of(values);
    let k = values.len() as f64;
    let first = sum(values.iter().map(|x| x * up)) / k;
    (first + sum(values.iter().map(|x| x * up - first)) / k) * down
}

/// A power of two that brings the largest magnitude of `values` near 1, and its inverse; (1, 1)
/// when there is nothing to scale. Both are exact, so a scaled computation gives the same bits
/// as an unscaled one wherever the latter neither overflows nor underflows.
fn scale_of(values: &[f64]) -> (f64, f64) {
    let max = values
        .iter()
        .filter(|x| x.is_finite())
        .fold(0.0f64, |m, x| m.max(x.abs()));
    if max == 0.0 || !max.is_finite() {
        return (1.0, 1.0);
    }
    let e = (max.log2().floor() as i32).clamp(-1000, 1000);
    (2f64.powi(-e), 2f64.powi(e))
}

/// Describes `values` (no NaN expected; the caller drops missing values).
/// Sorts `values` in place for the median. The SD uses the n - 1 divisor
/// and a second pass over centred values, never the one-pass sum of
/// squares, which loses every digit when the mean is large against the
/// spread.
pub fn describe(values: &mut [f64]) -> Description {
    let n = values.len();
    if n == 0 {
        return Description {
            mean: f64::NAN,
            sd: f64::NAN,
            se: f64::NAN,
            min: f64::NAN,
            median: f64::NAN,
            max: f64::NAN,
        };
    }
    let mean = mean(values);
    // The centred sum corrects the sum of squares by the mean's remaining rounding error (the
    // "corrected two-pass" form of Chan, Golub & LeVeque 1983). The deviations are squared
    // after scaling by a power of two, so that values near 1e-300 (whose squares underflow)
    // or 1e300 (whose squares overflow) keep their SD.
    let (up, down) = scale_of(values);
    let m = mean * up;
    let dev = sum(values.iter().map(|x| x * up - m));
    let ss = sum(values.iter().map(|x| (x * up - m) * (x * up - m))) - dev * dev / n as f64;
    let sd = if n > 1 {
        (ss.max(0.0) / (n - 1) as f64).sqrt() * down
    } else {
        f64::NAN
    };
    values.sort_by(f64::total_cmp);
    let median = if n % 2 == 1 {
        values[n / 2]
    } else {
        (values[n / 2 - 1] + values[n / 2]) / 2.0
    };
    Description {
        mean,
        sd,
        se: sd / (n as f64).sqrt(),
        min: values[0],
        median,
        max: values[n - 1],
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Expected values computed with numpy 2.4 (np.mean, np.std(ddof=1),
    /// np.median) on the same numbers.
    #[test]
    fn matches_numpy() {
        let mut v = [4.2, 5.1, 3.9, 6.0, 5.5, 4.8, 5.2];
        let d = describe(&mut v);
        assert!((d.mean - 4.957142857142857).abs() < 1e-13);
        assert!((d.sd - 0.7276838664721168).abs() < 1e-13);
        assert!((d.median - 5.1).abs() < 1e-15);
        assert_eq!((d.min, d.max), (3.9, 6.0));
    }

    /// Values near 1e-300 and 1e300, whose squares under- and overflow: the SD of k * 1e-300,
    /// k = 1..12, is sqrt(13) * 1e-300 (exact: the variance of 1..12 is 13), and the mean of
    /// two values of 1.5e308 is 1.5e308. Before, both SDs showed as 0 and that mean as
    /// infinite.
    #[test]
    fn extreme_magnitudes_keep_their_sd() {
        for scale in [1e-300, 1e300] {
            let mut v: Vec<f64> = (1..=12).map(|k| k as f64 * scale).collect();
            let d = describe(&mut v);
            let want = 13f64.sqrt() * scale;
            assert!(((d.sd - want) / want).abs() < 1e-14, "{scale}: {}", d.sd);
            assert!(((d.mean - 6.5 * scale) / (6.5 * scale)).abs() < 1e-15);
        }
        assert_eq!(mean(&[1.5e308, 1.5e308]), 1.5e308);
    }

    /// A large mean against a tiny spread, where the one-pass formula fails:
    /// values 1e9 + {1, 2, 3, 4}; SD is exactly sqrt(5/3).
    #[test]
    fn keeps_digits_with_a_large_mean() {
        let mut v = [1e9 + 1.0, 1e9 + 2.0, 1e9 + 3.0, 1e9 + 4.0];
        let d = describe(&mut v);
        assert!((d.sd - (5.0f64 / 3.0).sqrt()).abs() < 1e-12);
        assert_eq!(d.median, 1e9 + 2.5);
    }
}
