//! Reading cell text as numbers, spotting near-misses, and writing numbers back as text.

use std::fmt;

/// What a cell's text is when read as a number.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum NumberParse {
    /// A plain finite decimal number.
    Number(f64),
    /// Not a number in any sense (a label, a date, a word).
    NotNumber,
    /// Looks like a number (or a missing-value marker) but is refused; the suggestion says why.
    Suspicious(Suggestion),
}

/// Why a number-like cell is refused, and what the user can do about it.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Suggestion {
    /// A comma used as decimal separator, as in `3,5` or `1.234,5`.
    DecimalComma,
    /// Digits grouped by thousands separators, as in `1,234.5`, `1 234` or `1'234`.
    ThousandsSeparator,
    /// A single comma followed by three digits, as in `1,234`: a thousands separator or a decimal comma.
    AmbiguousComma,
    /// Not-a-number or infinity written as text, as in `NaN`, `Inf`, `-infinity`.
    NonFiniteText,
    /// A common missing-value marker that was not declared, as in `NA`, `N/A`, `.`, `-`.
    MissingMarker,
    /// A number outside the range of double precision, as in `1e400`.
    OutOfRange,
    /// A point in a cell of a file whose decimals are marked by a comma (`decimal ","`), as
    /// in `1.234,5` or `3.5`: a thousands separator, or a decimal point by mistake.
    PointWithDecimalComma,
    /// Digits grouped by spaces or apostrophes where decimals are marked by a comma, as in
    /// `1 234,5`.
    ThousandsWithDecimalComma,
    /// A number whose sign is the typographic minus (U+2212), as word processors write it:
    /// `−3`.
    TypographicMinus,
}

impl Suggestion {
    /// A short phrase saying what is wrong with the cell (completes "'3,5' ...").
    pub fn reason(self) -> &'static str {
        match self {
            Suggestion::DecimalComma => "uses a comma as decimal separator",
            Suggestion::ThousandsSeparator => "contains thousands separators",
            Suggestion::AmbiguousComma => {
                "has a comma that is either a thousands separator or a decimal comma"
            }
            Suggestion::NonFiniteText => "is not-a-number or infinity written as text",
            Suggestion::MissingMarker => "looks like a missing-value marker",
            Suggestion::OutOfRange => {
                "is outside the range of double-precision numbers (about 1.8e308 in size)"
            }
            Suggestion::PointWithDecimalComma => {
                "has a point, but this file marks decimals with a comma (decimal \",\")"
            }
            Suggestion::ThousandsWithDecimalComma => "contains thousands separators",
            Suggestion::TypographicMinus => "starts with a typographic minus sign (U+2212)",
        }
    }

    /// What to do, given the offending cell text (used inside the advice for markers).
    pub fn advice(self, text: &str) -> String {
        match self {
            Suggestion::DecimalComma => {
                "if the file marks decimals with a comma, load it with decimal \",\"; covey \
                 never guesses this, nor thousands separators"
                    .to_owned()
            }
            Suggestion::ThousandsSeparator => {
                "remove thousands separators (1234.5, not 1,234.5 or 1 234.5)".to_owned()
            }
            Suggestion::AmbiguousComma => {
                "remove thousands separators (1234, not 1,234) or, if the comma marks decimals, \
                 load the file with decimal \",\" (covey never guesses which it is)"
                    .to_owned()
            }
            Suggestion::NonFiniteText | Suggestion::MissingMarker => format!(
                "write missing values as an empty cell or declare the marker with `missing \"{text}\"` \
                 before `load`"
            ),
            Suggestion::PointWithDecimalComma => {
                "write decimals with a comma (3,5) and no thousands separators (1234,5, not \
                 1.234,5); covey never guesses a thousands separator"
                    .to_owned()
            }
            Suggestion::ThousandsWithDecimalComma => {
                "remove thousands separators (1234,5, not 1 234,5)".to_owned()
            }
            Suggestion::TypographicMinus => {
                "write the minus as the hyphen-minus of the keyboard (-3), as a word processor \
                 or a copied table may have replaced it"
                    .to_owned()
            }
            Suggestion::OutOfRange => {
                "check the value, or rescale the column (for example change its units) so every \
                 value is smaller than about 1e308"
                    .to_owned()
            }
        }
    }
}

impl fmt::Display for Suggestion {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(self.reason())
    }
}

/// Cell texts that are common missing-value markers (compared without regard to case).
const MISSING_LIKE: [&str; 9] = [
    "na", "n/a", "#n/a", "null", "none", "missing", ".", "-", "?",
];

/// Characters other than the comma and the point that people use to group thousands:
/// space, no-break space, narrow no-break space, apostrophe, and the underscore of
/// programming languages (`1_000`).
const GROUP_SPACES: [char; 5] = [' ', '\u{a0}', '\u{202f}', '\'', '_'];

/// Trims spaces and tabs (the only padding covey removes from cells).
pub(crate) fn trim_str(text: &str) -> &str {
    text.trim_matches(|c| c == ' ' || c == '\t')
}

/// Reads `text` (trimmed of spaces and tabs) as a plain decimal number.
///
/// Accepted: optional sign, digits with an optional point (`.5` and `5.` included), optional
/// exponent (`1e-3`, `2E+4`), with a finite value. Refused with a [`Suggestion`]: decimal commas,
/// thousands separators (underscores too), a typographic minus, `NaN`/`Inf`/`infinity` text, common missing markers such as `NA`, and
/// values beyond the `f64` range. Everything else is [`NumberParse::NotNumber`].
pub fn parse_number(text: &str) -> NumberParse {
    parse_trimmed(trim_str(text))
}

/// A cell that reports a value beyond a limit rather than the value, such as `<0.5` (below a
/// limit of detection) or `>2000` (above the top of a measuring range): the sign, `true` for
/// below (`<`, `<=`, `≤`), and the limit. `None` for anything else.
pub fn beyond_limit(text: &str) -> Option<(bool, f64)> {
    let t = trim_str(text);
    let (below, rest) = [
        ("<=", true),
        ("≤", true),
        ("<", true),
        (">=", false),
        ("≥", false),
        (">", false),
    ]
    .iter()
    .find_map(|(p, below)| t.strip_prefix(p).map(|rest| (*below, rest)))?;
    match parse_number(rest) {
        NumberParse::Number(limit) => Some((below, limit)),
        _ => None,
    }
}

/// [`parse_number`] for text that is already trimmed.
///
/// The plain-number grammar is exactly that of Rust's `f64::from_str` (documented in the
/// standard library: sign, digits, optional point and exponent) minus its `inf`/`infinity`/`nan`
/// words, so std's parser does the work and the non-finite results are sorted out afterwards.
pub(crate) fn parse_trimmed(t: &str) -> NumberParse {
    if t.is_empty() {
        return NumberParse::NotNumber;
    }
    match t.parse::<f64>() {
        // A long identifier: neighbouring whole numbers would read as one.
        Ok(v) if v.is_finite() && !holds_whole_number(t, v) => NumberParse::NotNumber,
        Ok(v) if v.is_finite() => NumberParse::Number(v),
        Ok(_) => {
            // Either a word (inf, nan, infinity) or a numeral whose value overflowed.
            if t.bytes()
                .any(|b| b.is_ascii_alphabetic() && b != b'e' && b != b'E')
            {
                NumberParse::Suspicious(Suggestion::NonFiniteText)
            } else {
                NumberParse::Suspicious(Suggestion::OutOfRange)
            }
        }
        Err(_) => classify_near_miss(t),
    }
}

/// Whether `v`, read from `t`, is that number exactly when `t` is a whole number written
/// without a point or an exponent (as identifiers are: sample codes, ear tags, serial
/// numbers). Beyond 2^53 a double holds only some whole numbers, and two different codes
/// would read as one number, so such a cell is text and keeps its digits. Any other text is
/// held as its nearest double, as a measurement is.
pub(crate) fn holds_whole_number(t: &str, v: f64) -> bool {
    let digits = t.strip_prefix(['+', '-']).unwrap_or(t);
    if v.abs() < WHOLE_EXACT || digits.is_empty() || !digits.bytes().all(|b| b.is_ascii_digit()) {
        return true;
    }
    // A double of 2^53 or more is a whole number; compared exactly in 128 bits (a text of
    // more digits than i128 holds is beyond any double's exact whole numbers here).
    match t.trim_start_matches('+').parse::<i128>() {
        Ok(n) => v as i128 == n && (n as f64) == v,
        Err(_) => false,
    }
}

/// 2^53: every whole number of smaller magnitude is a double; above it, only some are.
pub(crate) const WHOLE_EXACT: f64 = 9_007_199_254_740_992.0;

/// [`parse_trimmed`] for a file whose decimals are marked by a comma (`decimal ","`): `3,5`
/// is 3.5. A point anywhere in a number-like cell is refused (it is a thousands separator or
/// a slip, and covey does not guess which), and so are other thousands separators.
pub(crate) fn parse_decimal_comma(t: &str) -> NumberParse {
    if t.contains('.') {
        let swapped: String = t
            .chars()
            .map(|c| match c {
                '.' => ',',
                ',' => '.',
                c => c,
            })
            .collect();
        return match (parse_trimmed(t), parse_trimmed(&swapped)) {
            (NumberParse::NotNumber, NumberParse::NotNumber) => NumberParse::NotNumber,
            _ => NumberParse::Suspicious(Suggestion::PointWithDecimalComma),
        };
    }
    if !t.contains(',') {
        return parse_trimmed(t);
    }
    match parse_trimmed(&t.replace(',', ".")) {
        NumberParse::Suspicious(Suggestion::ThousandsSeparator | Suggestion::DecimalComma) => {
            NumberParse::Suspicious(Suggestion::ThousandsWithDecimalComma)
        }
        other => other,
    }
}

/// Decides whether text that std refused is nevertheless number-like.
fn classify_near_miss(t: &str) -> NumberParse {
    if MISSING_LIKE.iter().any(|m| t.eq_ignore_ascii_case(m)) {
        return NumberParse::Suspicious(Suggestion::MissingMarker);
    }
    if let Some(rest) = t.strip_prefix('\u{2212}') {
        return match parse_trimmed(rest) {
            NumberParse::NotNumber => NumberParse::NotNumber,
            _ => NumberParse::Suspicious(Suggestion::TypographicMinus),
        };
    }
    let body = t
        .strip_prefix('+')
        .or_else(|| t.strip_prefix('-'))
        .unwrap_or(t);
    let allowed = |c: char| c.is_ascii_digit() || c == ',' || c == '.' || GROUP_SPACES.contains(&c);
    if body.is_empty() || !body.chars().all(allowed) || !body.chars().any(|c| c.is_ascii_digit()) {
        return NumberParse::NotNumber;
    }
    let found = match (body.rfind(','), body.rfind('.')) {
        (Some(c), Some(p)) if p > c => {
            // 1,234.5: point for decimals, commas (or spaces) grouping.
            let (int, frac) = split_at_sep(body, p);
            (all_digits(frac) && grouped(int, &[','])).then_some(Suggestion::ThousandsSeparator)
        }
        (Some(c), Some(_)) => {
            // 1.234,5: comma for decimals, points (or spaces) grouping.
            let (int, frac) = split_at_sep(body, c);
            (all_digits(frac)
                && !frac.is_empty()
                && (grouped(int, &['.']) || grouped(int, &GROUP_SPACES)))
            .then_some(Suggestion::DecimalComma)
        }
        (Some(c), None) => {
            let (int, frac) = split_at_sep(body, c);
            if !all_digits(frac) || frac.is_empty() {
                None
            } else if int.contains(',') {
                grouped(body, &[',']).then_some(Suggestion::ThousandsSeparator)
            } else if all_digits(int) {
                let could_group = (1..=3).contains(&int.len()) && !int.starts_with('0');
                if could_group && frac.len() == 3 {
                    Some(Suggestion::AmbiguousComma)
                } else {
                    Some(Suggestion::DecimalComma)
                }
            } else {
                grouped(int, &GROUP_SPACES).then_some(Suggestion::DecimalComma)
            }
        }
        (None, Some(p)) => {
            if body.matches('.').count() > 1 {
                grouped(body, &['.']).then_some(Suggestion::ThousandsSeparator)
            } else {
                let (int, frac) = split_at_sep(body, p);
                (all_digits(frac) && grouped(int, &GROUP_SPACES))
                    .then_some(Suggestion::ThousandsSeparator)
            }
        }
        (None, None) => grouped(body, &GROUP_SPACES).then_some(Suggestion::ThousandsSeparator),
    };
    match found {
        Some(s) => NumberParse::Suspicious(s),
        None => NumberParse::NotNumber,
    }
}

/// Splits `s` around the one-byte separator at byte index `at` (a ',' or '.').
fn split_at_sep(s: &str, at: usize) -> (&str, &str) {
    (
        s.get(..at).unwrap_or(""),
        s.get(at.saturating_add(1)..).unwrap_or(""),
    )
}

fn all_digits(s: &str) -> bool {
    s.bytes().all(|b| b.is_ascii_digit())
}

/// True when `s` is digits in groups split by one of `seps`: the first group 1 to 3 digits,
/// every later group exactly 3 digits, and at least two groups.
fn grouped(s: &str, seps: &[char]) -> bool {
    let mut groups = s.split(|c| seps.contains(&c));
    let Some(first) = groups.next() else {
        return false;
    };
    if first.is_empty() || first.len() > 3 || !all_digits(first) {
        return false;
    }
    let mut more = 0usize;
    for g in groups {
        if g.len() != 3 || !all_digits(g) {
            return false;
        }
        more += 1;
    }
    more > 0
}

/// Magnitudes from this size up are written in exponent form (`1e16`, not 17 digits).
const PLAIN_MAX: f64 = 1e16;
/// Magnitudes below this size are written in exponent form (`1e-5`, not `0.00001`).
const PLAIN_MIN: f64 = 1e-5;

/// Writes a number in its shortest round-trip form: `1`, `2.5`, `-0.125`, `1e300`, `1.5e-7`.
///
/// Rust's float formatting prints the shortest digit string that reads back to the same value
/// (the Grisu/Ryu approach); exponent form is used outside [`PLAIN_MIN`, `PLAIN_MAX`).
/// Negative zero is written `0`; a missing value (NaN) is the empty string.
pub fn format_number(v: f64) -> String {
    if v.is_nan() {
        return String::new();
    }
    if v == 0.0 {
        return "0".to_owned();
    }
    let a = v.abs();
    if (PLAIN_MIN..PLAIN_MAX).contains(&a) {
        format!("{v}")
    } else {
        format!("{v:e}")
    }
}
