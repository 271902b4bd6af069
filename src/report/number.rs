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
        Format::Digits(sig) => digits(values, i32::from(sig)),
        Format::Statistic => values.iter().map(|v| fixed(*v, 2)).collect(),
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

/// Shortest text that reads back as the same double.
pub fn exact(v: Option<f64>) -> String {
    match v {
        Some(x) if x.is_finite() => {
            let s = format!("{x}");
            if s == "-0" {
                "0".into()
            } else {
                s
            }
        }
        _ => MISSING.to_string(),
    }
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

/// One number of decimals for the whole column, so that its values line up:
/// enough for its largest value to show `sig` significant digits, and for its
/// smallest non-zero value to show at least two.
/// Columns whose values are all very large or very small switch to
/// scientific notation.
fn digits(values: &[Option<f64>], sig: i32) -> Vec<String> {
    let mags: Vec<f64> = values
        .iter()
        .flatten()
        .filter(|x| x.is_finite() && **x != 0.0)
        .map(|x| x.abs())
        .collect();
    let Some(min) = mags.iter().copied().reduce(f64::min) else {
        return values.iter().map(|v| fixed(*v, 0)).collect();
    };
    let max = mags.iter().copied().fold(min, f64::max);
    if !(1e-4..1e10).contains(&max) {
        return values
            .iter()
            .map(|v| match v {
                Some(x) if x.is_finite() => scientific(*x, sig),
                _ => MISSING.to_string(),
            })
            .collect();
    }
    let lo = min.log10().floor() as i32;
    let hi = max.log10().floor() as i32;
    let wanted = (sig - 1 - hi).max(1 - lo);
    let cap = (MAX_SIGNIFICANT - 1 - hi).min(MAX_DECIMALS);
    let decimals = wanted.min(cap).max(0) as usize;
    values.iter().map(|v| fixed(*v, decimals)).collect()
}

fn scientific(x: f64, sig: i32) -> String {
    let prec = (sig - 1).max(0) as usize;
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

    #[test]
    fn negative_zero_loses_its_sign() {
        assert_eq!(fixed(Some(-0.0001), 2), "0.00");
        assert_eq!(exact(Some(-0.0)), "0");
    }

    #[test]
    fn counts_are_whole() {
        assert_eq!(
            format_column(&[Some(12.0), None], Format::Count),
            vec!["12", MISSING]
        );
    }
}
