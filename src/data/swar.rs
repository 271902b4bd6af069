//! Eight bytes at a time in one `u64` ("SIMD within a register"): loading a short cell as an
//! integer, and reading a short decimal cell without a branch per digit.
//!
//! Bytes are loaded little-endian, so a text's first byte is the word's lowest byte.

/// Eight ASCII zeros.
const ZEROS: u64 = 0x3030_3030_3030_3030;
/// Eight decimal points.
const POINTS: u64 = 0x2E2E_2E2E_2E2E_2E2E;
/// The top bit of every byte.
const HIGH: u64 = 0x8080_8080_8080_8080;
/// The low seven bits of every byte.
const LOW7: u64 = 0x7F7F_7F7F_7F7F_7F7F;

/// A text of at most 8 bytes as an integer, byte `i` at bits `8i..8i + 8`, the bytes above
/// its length zero; `None` for a longer text. Read as two overlapping loads whose common
/// bytes agree, so the only branches are on the length.
#[inline]
pub(super) fn load_short(b: &[u8]) -> Option<u64> {
    let n = b.len();
    let word = match n {
        0 => 0,
        1 => u64::from(*b.first()?),
        2 | 3 => {
            let lo = u64::from(u16::from_le_bytes(b.get(..2)?.try_into().ok()?));
            let hi = u64::from(u16::from_le_bytes(b.get(n - 2..)?.try_into().ok()?));
            lo | (hi << (8 * (n - 2)))
        }
        4..=7 => {
            let lo = u64::from(u32::from_le_bytes(b.get(..4)?.try_into().ok()?));
            let hi = u64::from(u32::from_le_bytes(b.get(n - 4..)?.try_into().ok()?));
            lo | (hi << (8 * (n - 4)))
        }
        8 => u64::from_le_bytes(b.try_into().ok()?),
        _ => return None,
    };
    Some(word)
}

/// The top bit of each byte of `x` that is zero, and no other bit (the exact zero-byte test
/// of Warren, *Hacker's Delight*, 2nd ed., section 6-1).
#[inline]
fn zero_bytes(x: u64) -> u64 {
    !(((x & LOW7).wrapping_add(LOW7)) | x | LOW7)
}

/// Whether all eight bytes are ASCII digits (the test of the standard library's decimal
/// parser, `core::num::dec2flt`: a byte above `9` overflows its top bit when 0x46 is
/// added, one below `0` sets it when 0x30 is taken away).
#[inline]
fn all_digits(w: u64) -> bool {
    (w.wrapping_add(0x4646_4646_4646_4646) | w.wrapping_sub(ZEROS)) & HIGH == 0
}

/// The value of eight ASCII digits, the first (lowest) byte most significant: neighbouring
/// digits are paired, then pairs of pairs, by multiplications whose partial products do not
/// overlap (as in `core::num::dec2flt`, after Lemire's fast_float).
#[inline]
fn eight_digits(w: u64) -> u64 {
    const MASK: u64 = 0x0000_00FF_0000_00FF;
    const MUL1: u64 = 0x000F_4240_0000_0064; // 10^6 << 32 | 100
    const MUL2: u64 = 0x0000_2710_0000_0001; // 10^4 << 32 | 1
    let v = w.wrapping_sub(ZEROS);
    let v = v.wrapping_mul(10).wrapping_add(v >> 8);
    let v1 = (v & MASK).wrapping_mul(MUL1);
    let v2 = ((v >> 16) & MASK).wrapping_mul(MUL2);
    u64::from((v1.wrapping_add(v2) >> 32) as u32)
}

/// A plain decimal cell of at most 8 bytes after an optional sign (digits with at most one
/// point, at least one digit, no exponent), as `(m, fraction digits, digits)`, where the
/// value is `m / 10^fraction digits`; `None` for anything else, which the caller reads the
/// long way. `m` has at most eight digits, so it is below 2^53.
///
/// The text is right-aligned in a word of ASCII zeros (leading zeros change nothing), the
/// point found by a zero-byte test and squeezed out by shifting the bytes before it up one,
/// then all eight bytes are checked to be digits and read at once.
#[inline]
pub(super) fn short_decimal(text: &[u8]) -> Option<(u64, usize, usize)> {
    let n = text.len();
    if n == 0 {
        return None;
    }
    let pad = 8usize.checked_sub(n)?;
    let w = (load_short(text)? << (8 * pad)) | ZEROS.checked_shr(8 * n as u32).unwrap_or(0);
    let point = zero_bytes(w ^ POINTS);
    let (w, frac, digits) = match point.count_ones() {
        0 => (w, 0, n),
        1 => {
            // Byte q holds the point; bytes q + 1..8 are the fraction digits.
            let q = (point.trailing_zeros() / 8) as usize;
            let below = (1u64 << (8 * q)) - 1;
            let above = u64::MAX.checked_shl(8 * (q as u32 + 1)).unwrap_or(0);
            let squeezed = ((w & below) << 8) | (w & above) | u64::from(b'0');
            (squeezed, 7 - q, n - 1)
        }
        _ => return None,
    };
    if digits == 0 || !all_digits(w) {
        return None;
    }
    Some((eight_digits(w), frac, digits))
}

#[cfg(test)]
mod tests {
    use super::*;

    /// The digits of a text read one at a time, for comparison.
    fn slow(text: &[u8]) -> Option<(u64, usize, usize)> {
        let mut m = 0u64;
        let (mut frac, mut digits, mut seen_point) = (0, 0, false);
        for &b in text {
            match b {
                b'0'..=b'9' => {
                    m = m * 10 + u64::from(b - b'0');
                    digits += 1;
                    if seen_point {
                        frac += 1;
                    }
                }
                b'.' if !seen_point => seen_point = true,
                _ => return None,
            }
        }
        (digits > 0 && text.len() <= 8).then_some((m, frac, digits))
    }

    #[test]
    fn load_short_puts_byte_i_at_bits_8i() {
        for n in 0..=8 {
            let text: Vec<u8> = (1..=n as u8).collect();
            let want = text
                .iter()
                .enumerate()
                .fold(0u64, |k, (i, &b)| k | (u64::from(b) << (8 * i)));
            assert_eq!(load_short(&text), Some(want), "length {n}");
        }
        assert_eq!(load_short(b"123456789"), None);
    }

    #[test]
    fn short_decimal_agrees_with_digit_by_digit_reading() {
        // Every text of up to four bytes over an alphabet of digits, point and near misses
        // (the bytes next to '0', '9' and '.'), and longer texts built from them.
        let alphabet = b"0159./:-+e \x00\xff";
        let mut texts: Vec<Vec<u8>> = vec![Vec::new()];
        for _ in 0..4 {
            let longer: Vec<Vec<u8>> = texts
                .iter()
                .filter(|t| t.len() == texts.last().map_or(0, Vec::len))
                .flat_map(|t| {
                    alphabet.iter().map(move |&b| {
                        let mut t = t.clone();
                        t.push(b);
                        t
                    })
                })
                .collect();
            texts.extend(longer);
        }
        for t in texts.clone() {
            for tail in [&b"9999"[..], b".125", b"0.5", b"12345", b"00000.0"] {
                let mut long = t.clone();
                long.extend_from_slice(tail);
                texts.push(long);
            }
        }
        for t in &texts {
            assert_eq!(
                short_decimal(t),
                slow(t),
                "{:?}",
                String::from_utf8_lossy(t)
            );
        }
        assert_eq!(short_decimal(b"99999999"), Some((99_999_999, 0, 8)));
        assert_eq!(short_decimal(b".1234567"), Some((1_234_567, 7, 7)));
        assert_eq!(short_decimal(b"1234567."), Some((1_234_567, 0, 7)));
        assert_eq!(short_decimal(b"33.919"), Some((33_919, 3, 5)));
    }
}
