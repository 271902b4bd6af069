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
    let mean = sum(values.iter().copied()) / n as f64;
    // The centred sum corrects the mean by its own rounding error (the
    // "corrected two-pass" form of Chan, Golub & LeVeque 1983).
    let dev = sum(values.iter().map(|x| x - mean));
    let ss = sum(values.iter().map(|x| (x - mean) * (x - mean))) - dev * dev / n as f64;
    let sd = if n > 1 {
        (ss.max(0.0) / (n - 1) as f64).sqrt()
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
