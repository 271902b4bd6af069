//! Exact decimal offsets for numeric columns whose cells carry more digits than their
//! nearest doubles keep where it matters: large values that differ only in their last
//! digits, such as 1000000000000.4 and 1000000000000.3.
//!
//! Reading such a cell straight into a double keeps the value to about 16 significant
//! digits, but the differences between cells (what sums of squares are made of) lose the
//! digits the large common part takes up. The loader therefore keeps, for such a column, the
//! integer part of its first value as an offset and each cell minus that offset, computed by
//! exact decimal subtraction on the cell's digit string and only then rounded to a double.

/// A column keeps exact residuals when some cell needs more than this many significant
/// decimal digits (from the first to the last non-zero digit). Rounding a cell to a double
/// moves it by up to 2^-53 (1.1e-16) of its size; with 8 or more written digits that
/// exceeds 1e-9 of the unit of the last written digit, so differences between cells at
/// that digit (what sums of squares are made of) would keep fewer than the 9 correct digits
/// covey is tested to deliver on the NIST StRD sets. With 7 or fewer the double suffices.
pub(crate) const EXACT_MIN_DIGITS: usize = 7;

/// Offsets must be integers a double holds exactly: |offset| < 2^53.
const MAX_EXACT_INTEGER: u64 = 1 << 53;

/// A plain decimal cell split into its parts (no exponent).
#[derive(Debug, Clone, Copy)]
struct Plain<'a> {
    negative: bool,
    /// Digits before the point (may be empty or hold leading zeros).
    int: &'a [u8],
    /// Digits after the point (may be empty).
    frac: &'a [u8],
}

/// Splits text of the plain-number grammar (optional sign, digits with an optional point);
/// `None` for anything else, exponent notation included.
fn split_plain(text: &str) -> Option<Plain<'_>> {
    let b = text.as_bytes();
    let (negative, body) = match b {
        [b'-', rest @ ..] => (true, rest),
        [b'+', rest @ ..] => (false, rest),
        _ => (false, b),
    };
    let (int, frac) = match body.iter().position(|c| *c == b'.') {
        Some(p) => (body.get(..p)?, body.get(p + 1..)?),
        None => (body, &[][..]),
    };
    let digits = |s: &[u8]| s.iter().all(u8::is_ascii_digit);
    if !digits(int) || !digits(frac) || (int.is_empty() && frac.is_empty()) {
        return None;
    }
    Some(Plain {
        negative,
        int,
        frac,
    })
}

/// Number of significant digits of a plain decimal: from its first to its last non-zero
/// digit (0 for zero).
fn significant_digits(p: &Plain<'_>) -> usize {
    let all = || p.int.iter().chain(p.frac);
    let total = p.int.len() + p.frac.len();
    let lead = all().take_while(|c| **c == b'0').count();
    if lead == total {
        return 0;
    }
    let trail = p
        .frac
        .iter()
        .rev()
        .chain(p.int.iter().rev())
        .take_while(|c| **c == b'0')
        .count();
    total - lead - trail
}

/// The integer part of a plain decimal as a signed integer, when its magnitude is below
/// 2^53 (so a double holds it exactly).
fn integer_part(p: &Plain<'_>) -> Option<i64> {
    let digits: &[u8] = {
        let lead = p.int.iter().take_while(|c| **c == b'0').count();
        p.int.get(lead..)?
    };
    // 2^53 has 16 digits; anything longer is out of range.
    if digits.len() > 16 {
        return None;
    }
    let mut m: u64 = 0;
    for d in digits {
        m = m.checked_mul(10)?.checked_add(u64::from(d - b'0'))?;
    }
    if m >= MAX_EXACT_INTEGER {
        return None;
    }
    let m = i64::try_from(m).ok()?;
    Some(if p.negative { -m } else { m })
}

/// What the first pass learns about a numeric column: whether an exact offset is wanted.
#[derive(Debug, Clone, Default)]
pub(crate) struct ExactScan {
    /// Integer part of the first non-missing cell (`Some(None)` when it cannot be an
    /// offset), `None` before any cell.
    first: Option<Option<i64>>,
    /// Some cell has more than [`EXACT_MIN_DIGITS`] significant digits.
    long: bool,
    /// Some cell is not a plain decimal (exponent notation).
    not_plain: bool,
}

impl ExactScan {
    /// Takes note of a non-missing cell that parsed as a number.
    pub(crate) fn observe(&mut self, text: &str) {
        if self.not_plain {
            return;
        }
        let Some(p) = split_plain(text) else {
            self.not_plain = true;
            return;
        };
        if self.first.is_none() {
            self.first = Some(integer_part(&p));
        }
        if !self.long && significant_digits(&p) > EXACT_MIN_DIGITS {
            self.long = true;
        }
    }

    /// Takes note of the cells `later` has seen, as if they had been observed here after
    /// the cells seen so far.
    pub(crate) fn then(&mut self, later: &ExactScan) {
        if self.not_plain {
            return;
        }
        if self.first.is_none() {
            self.first = later.first;
        }
        self.long |= later.long;
        self.not_plain = later.not_plain;
    }

    /// Whether [`ExactScan::observe`] could learn anything from a plain decimal cell with
    /// `digits` digits in all (a bound on its significant digits): only from the first cell,
    /// or from a long one while no cell has been long or non-plain yet.
    pub(crate) fn wants_plain(&self, digits: usize) -> bool {
        self.first.is_none() || (!self.not_plain && !self.long && digits > EXACT_MIN_DIGITS)
    }

    /// The offset to use, when the column should keep exact residuals: some cell is long,
    /// every cell is a plain decimal, and the first cell's integer part is a usable,
    /// non-zero offset (a zero offset would gain nothing).
    pub(crate) fn wanted(&self) -> Option<i64> {
        if !self.long || self.not_plain {
            return None;
        }
        self.first.flatten().filter(|o| *o != 0)
    }
}

/// Digits of a non-negative integer, most significant first (at least one digit).
fn int_digits(mut m: u64) -> Vec<u8> {
    let mut d = Vec::new();
    loop {
        d.push(u8::try_from(m % 10).unwrap_or(0));
        m /= 10;
        if m == 0 {
            break;
        }
    }
    d.reverse();
    d
}

/// `cell - offset` for a plain decimal cell, by exact decimal arithmetic on the digit
/// strings, rounded once to the nearest double. `None` when the cell is not a plain decimal
/// or the result is not finite.
pub(crate) fn residual(text: &str, offset: i64) -> Option<f64> {
    let p = split_plain(text)?;
    let scale = p.frac.len();
    // Magnitudes as digit vectors (value 0..=9 per entry) with `scale` fraction digits.
    let a: Vec<u8> = p.int.iter().chain(p.frac).map(|c| c - b'0').collect();
    let mut b = int_digits(offset.unsigned_abs());
    b.resize(b.len() + scale, 0);
    let width = a.len().max(b.len()) + 1;
    let pad = |v: Vec<u8>| -> Vec<u8> {
        let mut out = vec![0u8; width - v.len()];
        out.extend(v);
        out
    };
    let (a, b) = (pad(a), pad(b));
    let offset_negative = offset < 0;
    // cell - offset = sa*A - sb*B.
    let (negative, digits) = if p.negative != offset_negative {
        // Opposite signs: the magnitudes add, the cell's sign wins.
        (p.negative, add(&a, &b))
    } else if a >= b {
        (p.negative, sub(&a, &b))
    } else {
        (!p.negative, sub(&b, &a))
    };
    let split = digits.len().saturating_sub(scale);
    let mut s = String::with_capacity(digits.len() + 2);
    if negative {
        s.push('-');
    }
    let to_char = |d: &u8| char::from(b'0' + d);
    s.extend(digits.get(..split).unwrap_or_default().iter().map(to_char));
    if s.len() == usize::from(negative) {
        s.push('0');
    }
    if scale > 0 {
        s.push('.');
        s.extend(digits.get(split..).unwrap_or_default().iter().map(to_char));
    }
    s.parse::<f64>().ok().filter(|v| v.is_finite())
}

/// Sum of two equally long digit vectors whose top digit is 0 (so no carry leaves them).
fn add(a: &[u8], b: &[u8]) -> Vec<u8> {
    let mut out = vec![0u8; a.len()];
    let mut carry = 0u8;
    for ((o, x), y) in out.iter_mut().zip(a).zip(b).rev() {
        let s = x + y + carry;
        *o = s % 10;
        carry = s / 10;
    }
    out
}

/// Difference `a - b` of two equally long digit vectors with a >= b.
fn sub(a: &[u8], b: &[u8]) -> Vec<u8> {
    let mut out = vec![0u8; a.len()];
    let mut borrow = 0u8;
    for ((o, x), y) in out.iter_mut().zip(a).zip(b).rev() {
        let need = y + borrow;
        if *x >= need {
            *o = x - need;
            borrow = 0;
        } else {
            *o = x + 10 - need;
            borrow = 1;
        }
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    fn scan(cells: &[&str]) -> Option<i64> {
        let mut s = ExactScan::default();
        for c in cells {
            s.observe(c);
        }
        s.wanted()
    }

    #[test]
    fn significant_digits_count_from_first_to_last_non_zero_digit() {
        let sig = |t: &str| split_plain(t).map(|p| significant_digits(&p));
        assert_eq!(sig("1000000000000.4"), Some(14));
        assert_eq!(sig("-0.00120"), Some(2));
        assert_eq!(sig("1000"), Some(1));
        assert_eq!(sig("0"), Some(0));
        assert_eq!(sig(".5"), Some(1));
        assert_eq!(sig("5."), Some(1));
        assert_eq!(sig("1e5"), None);
    }

    #[test]
    fn scan_wants_an_offset_only_for_long_plain_cells() {
        assert_eq!(
            scan(&["1000000000000.4", "1000000000000.3"]),
            Some(1_000_000_000_000)
        );
        assert_eq!(scan(&["-1000000000000.4"]), Some(-1_000_000_000_000));
        assert_eq!(scan(&["1000000.4", "1000000.3"]), Some(1_000_000));
        // Short cells: the doubles keep enough digits.
        assert_eq!(scan(&["100000.4", "100000.3"]), None);
        // Exponent notation anywhere: no exact residuals.
        assert_eq!(scan(&["1000000000000.4", "1e12"]), None);
        // First value's integer part is 0: nothing to gain.
        assert_eq!(scan(&["0.5", "0.1234567890123456"]), None);
        // Integer part beyond 2^53: no exact offset.
        assert_eq!(scan(&["90071992547409930.5"]), None);
        assert_eq!(scan(&["9007199254740991.5"]), Some(9_007_199_254_740_991));
    }

    #[test]
    fn residuals_are_exact_decimal_differences() {
        let parse = |t: &str| t.parse::<f64>().ok();
        let o = 1_000_000_000_000;
        assert_eq!(residual("1000000000000.4", o), parse("0.4"));
        assert_eq!(residual("999999999999.9", o), parse("-0.1"));
        assert_eq!(residual("-1000000000000.4", o), parse("-2000000000000.4"));
        assert_eq!(residual("1000000000000", o), Some(0.0));
        assert_eq!(residual("+1000000000001.25", o), parse("1.25"));
        assert_eq!(residual("0.000001", o), parse("-999999999999.999999"));
        assert_eq!(residual("-5.3", -7), parse("1.7"));
        assert_eq!(residual("-7.3", -7), parse("-0.3"));
        assert_eq!(residual(".5", 3), parse("-2.5"));
        assert_eq!(residual("1e3", 3), None);
    }
}
