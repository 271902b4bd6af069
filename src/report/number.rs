//! Numbers rounded for reading.

use super::Format;

/// Largest number of decimals any column shows: beyond this a value is noise
/// for a reader, and JSON keeps the full value anyway.
const MAX_DECIMALS: i32 = 8;

/// Total significant digits the largest value of a column may show; keeps a
/// column with one tiny and one huge value from printing 15 digits.
const MAX_SIGNIFICANT: i32 = 10;

/// Formats every value of one column. Missing values (None or non-finite)
/// become an em dash.
pub fn format_column(values: &[Option<f64>], format: Format) -> Vec<String> {
    match format {
        Format::Digits(sig) | Format::Units(sig) => digits(values, i32::from(sig)),
        Format::Proportion(sig) => digits(values, i32::from(sig))
            .into_iter()
            .zip(values)
            .map(|(s, v)| match v {
                Some(x) => short_of_one(s, *x),
                None => s,
            })
            .collect(),
        Format::Statistic => values.iter().map(|v| statistic(*v)).collect(),
        Format::Count => values
            .iter()
            .map(|v| match v {
                Some(x) if x.is_finite() && x.fract() == 0.0 => fixed(Some(*x), 0),
                Some(x) if x.is_finite() => fixed(Some(*x), 2),
                _ => MISSING.to_string(),
            })
            .collect(),
        Format::P => values.iter().map(|v| p_value(*v)).collect(),
        Format::Exact | Format::Text => values.iter().map(|v| exact(*v)).collect(),
    }
}

/// Beyond this magnitude a test statistic is shown in scientific notation: two decimals of an
/// F of 1.3e20 would print 21 digits, nearly all of them noise.
const STATISTIC_SCIENTIFIC: f64 = 1e6;

/// A test statistic: two decimals, or three significant digits in scientific notation from
/// 1e6 up (an exact or nearly exact fit).
fn statistic(v: Option<f64>) -> String {
    match v {
        Some(x) if x.is_finite() && x.abs() >= STATISTIC_SCIENTIFIC => scientific(x, 3),
        _ => fixed(v, 2),
    }
}

/// `shown`, the text of `x` at its column's decimals; if that reads as 1 while x is below
/// 1, x with the fewest decimals that do not (at most 17, which always tell x from 1).
fn short_of_one(shown: String, x: f64) -> String {
    if x.is_nan() || x >= 1.0 || shown.parse::<f64>().ok() != Some(1.0) {
        return shown;
    }
    let from = shown.split('.').nth(1).map_or(0, str::len);
    (from..=17)
        .map(|d| fixed(Some(x), d))
        .find(|s| s.parse::<f64>().ok() != Some(1.0))
        .unwrap_or(shown)
}

/// What a missing or undefined number shows as.
pub const MISSING: &str = "—";

/// A p-value in APA 7th edition style: `.023`, `< .001`, and `> .999` at
/// the top, since a rounded p of 1 would claim certainty.
pub fn p_value(p: Option<f64>) -> String {
    match p {
        Some(p) if p.is_finite() && (0.0..=1.0).contains(&p) => {
            if p < 0.001 {
                "< .001".to_string()
            } else if p > 0.999 {
                "> .999".to_string()
            } else {
                let s = format!("{p:.3}");
                s.trim_start_matches('0').to_string()
            }
        }
        _ => MISSING.to_string(),
    }
}

/// From this magnitude up, and below [`EXACT_SMALL`], an exact number is written with an
/// exponent: Rust's plain form of 1e-300 is 300 zeros and a 1, of 1e300 a 301-digit integer.
/// The bounds are those of ECMAScript's Number-to-String (common practice), so every value an
/// analysis meets in practice keeps its plain form.
const EXACT_LARGE: f64 = 1e21;
/// See [`EXACT_LARGE`].
const EXACT_SMALL: f64 = 1e-6;

/// Shortest text that reads back as the same double: plain, or with an exponent (`1e-300`)
/// when the magnitude is below [`EXACT_SMALL`] or from [`EXACT_LARGE`] up.
pub fn exact(v: Option<f64>) -> String {
    match v {
        Some(x) if x.is_finite() => {
            let s = if x != 0.0 && !(EXACT_SMALL..EXACT_LARGE).contains(&x.abs()) {
                format!("{x:e}")
            } else {
                format!("{x}")
            };
            if s == "-0" {
                "0".into()
            } else {
                s
            }
        }
        _ => MISSING.to_string(),
    }
}

/// `x` with `decimals` decimals, or fewer where that would show more than
/// [`MAX_SE_SIGNIFICANT`] significant digits (a sixteenth could be an artefact of binary
/// storage).
pub fn fixed_within_significance(x: f64, decimals: usize) -> String {
    let hi = if x == 0.0 || !x.is_finite() {
        0
    } else {
        x.abs().log10().floor() as i32
    };
    let cap = (MAX_SE_SIGNIFICANT - 1 - hi).max(0) as usize;
    fixed(Some(x), decimals.min(cap))
}

fn fixed(v: Option<f64>, decimals: usize) -> String {
    match v {
        Some(x) if x.is_finite() => {
            let s = format!("{x:.decimals$}");
            // -0.00 reads as a sign that is not there.
            if s.starts_with('-') && s[1..].chars().all(|c| c == '0' || c == '.') {
                s[1..].to_string()
            } else {
                s
            }
        }
        _ => MISSING.to_string(),
    }
}

/// `value` shown with `sig` significant digits as a `Units` column would show it beside
/// `companions`, values in the same units (a covariate's mean beside its smallest and largest
/// value): on its own, unless it is rounding residue against them.
pub fn in_units(value: f64, companions: &[f64], sig: u8) -> String {
    let class: Vec<Option<f64>> = std::iter::once(value)
        .chain(companions.iter().copied())
        .map(Some)
        .collect();
    units_column(&[Some(value)], &class, sig).swap_remove(0)
}

/// A column of `Units` values: formatted on its own as `Digits` would format it, except that
/// a value below 10^-MAX_SIGNIFICANT of the largest of its class (every value in the same units
/// in the table) is rounding residue (the mean of a centred column, -2.961e-16 beside values
/// near 8): it neither asks for decimals nor sends the column to scientific notation, and a
/// column of nothing else takes the decimals of its class, so the residue reads 0.000.
pub fn units_column(values: &[Option<f64>], class: &[Option<f64>], sig: u8) -> Vec<String> {
    let sig = i32::from(sig);
    let Some(class_max) = largest(class) else {
        return digits(values, sig);
    };
    let floor = class_max * 10f64.powi(-MAX_SIGNIFICANT);
    let real = |v: &Option<f64>| v.is_some_and(|x| x.is_finite() && x.abs() >= floor);
    if values.iter().any(real) {
        return digits(values, sig);
    }
    let mut all = values.to_vec();
    all.extend(class.iter().filter(|v| real(v)));
    let mut f = digits(&all, sig);
    f.truncate(values.len());
    f
}

/// The largest magnitude of the finite non-zero values, if any.
fn largest(values: &[Option<f64>]) -> Option<f64> {
    values
        .iter()
        .flatten()
        .filter(|x| x.is_finite() && **x != 0.0)
        .map(|x| x.abs())
        .reduce(f64::max)
}

/// One number of decimals for the whole column, so that its values line up:
/// enough for its largest value to show `sig` significant digits, and for its
/// smallest non-zero value to show at least two. A value below 10^-MAX_SIGNIFICANT
/// of the largest would round to zero at any allowed number of decimals, so it does
/// not ask for more.
/// Columns whose values are all very large or very small switch to
/// scientific notation.
fn digits(values: &[Option<f64>], sig: i32) -> Vec<String> {
    let all = vec![true; values.len()];
    digits_asked(values, &all, sig)
}

/// [`digits`], where only the values marked in `asks` may ask for decimals for their two
/// significant digits (the largest value always asks for its `sig`).
fn digits_asked(values: &[Option<f64>], asks: &[bool], sig: i32) -> Vec<String> {
    digits_with_se(values, asks, &[], sig)
}

/// Most significant digits an estimate's column shows when its standard errors ask for more
/// than [`MAX_SIGNIFICANT`]: fifteen decimal digits always survive the round trip through a
/// double (IEEE 754-2008, 5.12.2), so a sixteenth could be an artefact of binary storage.
const MAX_SE_SIGNIFICANT: i32 = 15;

/// The number of decimals that put an estimate's last shown digit at the leading digit of
/// its standard error `se` (common practice: an estimate is rounded to its uncertainty, so
/// 12345.678901 with an SE of 4.6e-7 reads 12345.6789010, not 12345.67890 nor 12346); `None`
/// for a missing, zero or non-finite SE.
fn se_decimals(se: Option<f64>) -> Option<i32> {
    let s = se?;
    (s.is_finite() && s > 0.0).then(|| -(s.log10().floor() as i32))
}

/// [`digits_asked`], where moreover every row that asks (`asks`, the rows beyond one SE of
/// zero) with a standard error in `ses` (one per value; missing where there is none) asks
/// for the decimals that reach its SE's leading digit ([`se_decimals`]), up to
/// [`MAX_SE_SIGNIFICANT`] significant digits of the column's largest value. In scientific
/// notation each such value shows the significant digits that reach its SE.
fn digits_with_se(
    values: &[Option<f64>],
    asks: &[bool],
    ses: &[Option<f64>],
    sig: i32,
) -> Vec<String> {
    let Some(max) = largest(values) else {
        return values.iter().map(|v| fixed(*v, 0)).collect();
    };
    let floor = max * 10f64.powi(-MAX_SIGNIFICANT);
    let asking = || {
        values
            .iter()
            .zip(asks.iter().chain(std::iter::repeat(&true)))
            .zip(ses.iter().copied().chain(std::iter::repeat(None)))
            .filter(|((_, a), _)| **a)
            .map(|((v, _), s)| (*v, s))
    };
    let min = asking()
        .filter_map(|(v, _)| v)
        .map(|x| x.abs())
        .filter(|&m| m.is_finite() && m >= floor)
        .fold(max, f64::min);
    let by_se = asking()
        .filter(|(v, _)| v.is_some_and(f64::is_finite))
        .filter_map(|(_, s)| se_decimals(s))
        .max();
    if !(1e-4..1e10).contains(&max) {
        return values
            .iter()
            .zip(ses.iter().copied().chain(std::iter::repeat(None)))
            .map(|(v, s)| match v {
                Some(x) if x.is_finite() => {
                    // The digits from x's leading one down to its SE's.
                    let reach = match (se_decimals(s), *x != 0.0) {
                        (Some(d), true) => x.abs().log10().floor() as i32 + d + 1,
                        _ => sig,
                    };
                    scientific(*x, reach.clamp(sig, MAX_SE_SIGNIFICANT))
                }
                _ => MISSING.to_string(),
            })
            .collect();
    }
    let lo = min.log10().floor() as i32;
    let hi = max.log10().floor() as i32;
    let wanted = (sig - 1 - hi).max(1 - lo);
    let cap = (MAX_SIGNIFICANT - 1 - hi).min(MAX_DECIMALS);
    let mut decimals = wanted.min(cap).max(0);
    if let Some(d) = by_se {
        decimals = decimals.max(d.min(MAX_SE_SIGNIFICANT - 1 - hi));
    }
    values
        .iter()
        .map(|v| fixed(*v, decimals as usize))
        .collect()
}

/// An estimate's column (or its limits) with its standard errors `ses` (one per row): formatted
/// as [`digits`] would, except that a row whose estimate lies within one standard error of zero
/// (`noise`) asks for no decimals of its own: the digits of such a value are below its
/// uncertainty, and in a nearly exact fit (a standard error of 1e-10) they would ask for
/// every decimal allowed to show zeros. Every other row asks for the decimals that reach its
/// SE's leading digit, so that an estimate far larger than its SE (12345.678901 with an SE
/// of 1e-6) shows the digits its SE vouches for, and its limits differ where they differ.
/// The largest value always asks for `sig` digits.
pub fn estimate_column(
    values: &[Option<f64>],
    noise: &[bool],
    ses: &[Option<f64>],
    sig: u8,
) -> Vec<String> {
    let asks: Vec<bool> = noise.iter().map(|n| !n).collect();
    digits_with_se(values, &asks, ses, i32::from(sig))
}

fn scientific(x: f64, sig: i32) -> String {
    let prec = (sig - 1).max(0) as usize;
    // -0.0 would print as -0.000e0, a sign that is not there.
    let x = if x == 0.0 { 0.0 } else { x };
    format!("{x:.prec$e}")
}

#[cfg(test)]
mod tests {
    use super::*;

    // Expected strings follow the APA Publication Manual, 7th edition, section
    // 6.36 (p-values: no leading zero, exact to three decimals, < .001 below).
    #[test]
    fn p_values_follow_apa_style() {
        assert_eq!(p_value(Some(0.0234)), ".023");
        assert_eq!(p_value(Some(0.0004)), "< .001");
        assert_eq!(p_value(Some(0.001)), ".001");
        assert_eq!(p_value(Some(0.5)), ".500");
        assert_eq!(p_value(Some(0.9996)), "> .999");
        assert_eq!(p_value(None), MISSING);
        assert_eq!(p_value(Some(f64::NAN)), MISSING);
    }

    #[test]
    fn a_column_shares_its_decimals() {
        let v = [Some(40.383), Some(0.9541), Some(-2.5)];
        assert_eq!(digits(&v, 4), vec!["40.38", "0.95", "-2.50"]);
        let small = [Some(0.0123), Some(0.5)];
        assert_eq!(digits(&small, 3), vec!["0.012", "0.500"]);
    }

    #[test]
    fn huge_and_tiny_columns_go_scientific() {
        assert_eq!(digits(&[Some(1.5e12)], 3), vec!["1.50e12"]);
        assert_eq!(digits(&[Some(2.0e-7)], 3), vec!["2.00e-7"]);
    }

    /// The mean of `compute xc = x - mean(x)` is rounding residue: it shows as zero at the
    /// decimals of the values beside it, never as -2.961e-16.
    #[test]
    fn rounding_residue_shows_as_zero_beside_its_companions() {
        assert_eq!(in_units(-2.961e-16, &[-8.752, 8.817], 4), "0.000");
        assert_eq!(in_units(20.13456, &[10.31, 29.87], 4), "20.13");
        let class = [Some(-2.961e-16), Some(-8.752), Some(8.817)];
        assert_eq!(units_column(&[Some(-2.961e-16)], &class, 4), vec!["0.000"]);
        // A column of real values keeps its own decimals beside larger ones.
        let class = [Some(95.96), Some(102.6), Some(91.0)];
        assert_eq!(units_column(&[Some(95.96)], &class, 4), vec!["95.96"]);
        // (rounded as one column they would lose a digit: the reason each keeps its own)
        assert_eq!(digits(&class, 4), vec!["96.0", "102.6", "91.0"]);
        // A genuinely small value among its peers keeps two significant digits.
        assert_eq!(
            digits(&[Some(0.0123), Some(8.8)], 4),
            vec!["0.012", "8.800"]
        );
    }

    /// An F of 1.3e20 (a nearly exact fit) printed as 129999999934648074240.00 before.
    #[test]
    fn huge_statistics_go_scientific() {
        let f = format_column(
            &[Some(1.2999999993464807e20), Some(999_999.994), Some(-2.5e9)],
            Format::Statistic,
        );
        assert_eq!(f, vec!["1.30e20", "999999.99", "-2.50e9"]);
    }

    #[test]
    fn negative_zero_loses_its_sign() {
        assert_eq!(fixed(Some(-0.0001), 2), "0.00");
        assert_eq!(exact(Some(-0.0)), "0");
        assert_eq!(
            digits(&[Some(-0.0), Some(2.0e-7)], 3),
            vec!["0.00e0", "2.00e-7"]
        );
    }

    /// alpha 1e-300 in a plan's table printed 300 zeros before its 1.
    #[test]
    fn exact_values_far_from_one_take_an_exponent() {
        assert_eq!(exact(Some(1e-300)), "1e-300");
        assert_eq!(exact(Some(-2.5e300)), "-2.5e300");
        assert_eq!(exact(Some(1e21)), "1e21");
        assert_eq!(exact(Some(123_456_789_012.5)), "123456789012.5");
        assert_eq!(exact(Some(0.000_001)), "0.000001");
        assert_eq!(exact(Some(9.5e-7)), "9.5e-7");
        for v in [1e-300, 5e-324, 1.7976931348623157e308, 0.1 + 0.2, 9.5e-7] {
            assert_eq!(exact(Some(v)).parse::<f64>().ok(), Some(v), "{v}");
        }
    }

    /// A partial eta squared of 1 - 1.7e-8 printed 1.00 (common practice: a share below 1
    /// is not written as 1); an exact 1 and values far from 1 keep the column's decimals.
    #[test]
    fn proportions_below_one_never_read_as_one() {
        let v = [Some(1.0 - 1.7e-8), Some(0.25), Some(1.0), None];
        assert_eq!(
            format_column(&v, Format::Proportion(2)),
            vec!["0.99999998", "0.25", "1.00", MISSING]
        );
        assert_eq!(
            format_column(&[Some(0.9996)], Format::Proportion(3)),
            vec!["0.9996"]
        );
        assert_eq!(
            format_column(&[Some(1.0 - f64::EPSILON / 2.0)], Format::Proportion(3)),
            vec!["0.9999999999999999"]
        );
        assert_eq!(
            format_column(&[Some(0.99949)], Format::Proportion(3)),
            vec!["0.999"]
        );
    }

    #[test]
    fn counts_are_whole() {
        assert_eq!(
            format_column(&[Some(12.0), None], Format::Count),
            vec!["12", MISSING]
        );
    }
}
