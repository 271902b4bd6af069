//! Finding a cell's text among the distinct texts a text column already holds, so that a
//! repeated text costs a code and no copy.

use hashbrown::HashTable;

use super::TextValues;

/// Columns with at most this many distinct texts are searched by comparing with each
/// (cheaper than hashing for a factor's few levels); beyond, through the hash table.
const LINEAR_LOOKUP_TEXTS: usize = 8;

/// FNV-1a offset basis and prime for 64 bits.
const FNV_OFFSET: u64 = 0xcbf2_9ce4_8422_2325;
const FNV_PRIME: u64 = 0x0000_0100_0000_01b3;

/// The 64-bit FNV-1a hash (Fowler, Noll & Vo; as specified in the IETF draft
/// draft-eastlake-fnv): much cheaper than the standard library's keyed hash for the short
/// cell texts of a text column. The table it serves is only looked up, never iterated, so
/// the hash cannot reach any output.
fn fnv1a(bytes: &[u8]) -> u64 {
    bytes.iter().fold(FNV_OFFSET, |h, &b| {
        (h ^ u64::from(b)).wrapping_mul(FNV_PRIME)
    })
}

/// The hash of the text with code `code` in `values`.
fn hash_of(values: &TextValues, code: u32) -> u64 {
    fnv1a(values.bytes_of(code).unwrap_or_default())
}

/// Texts of at most this many bytes are looked up by their bytes read as one integer (with
/// the length in the top byte), which needs neither a byte-wise hash nor a comparison call.
const SHORT_TEXT: usize = 7;

/// A short text's bytes and length as one integer; `None` for a longer text. Distinct texts
/// give distinct keys.
fn short_key(cell: &[u8]) -> Option<u64> {
    if cell.len() > SHORT_TEXT {
        return None;
    }
    let mut key = (cell.len() as u64) << 56;
    for (i, &b) in cell.iter().enumerate() {
        key |= u64::from(b) << (8 * i);
    }
    Some(key)
}

/// Spreads a short key over all 64 bits: the two halves of its 128-bit product with
/// 2^64 / golden ratio, folded together (the "folded multiply" of fast non-cryptographic
/// hashes such as wyhash).
fn mix(key: u64) -> u64 {
    let p = u128::from(key) * 0x9E37_79B9_7F4A_7C15;
    (p as u64) ^ ((p >> 64) as u64)
}

/// An index over the distinct texts of one [`TextValues`]: each text's code, found by the
/// text's bytes. The texts stay in the [`TextValues`], which every call takes along (always
/// the same one).
#[derive(Debug, Default)]
pub(super) struct Index {
    /// Short texts: (key, code).
    short: HashTable<(u64, u32)>,
    /// The first [`LINEAR_LOOKUP_TEXTS`] short texts, searched in order while there are no
    /// more.
    few: Vec<(u64, u32)>,
    /// Longer texts, by code.
    long: HashTable<u32>,
}

impl Index {
    /// The code of `cell` among the texts of `values`, if it is one of them.
    #[inline]
    pub(super) fn find(&self, values: &TextValues, cell: &[u8]) -> Option<u32> {
        if let Some(key) = short_key(cell) {
            if self.short.len() <= LINEAR_LOOKUP_TEXTS {
                return self.few.iter().find(|e| e.0 == key).map(|e| e.1);
            }
            return self.short.find(mix(key), |e| e.0 == key).map(|e| e.1);
        }
        self.long
            .find(fnv1a(cell), |&c| values.bytes_of(c) == Some(cell))
            .copied()
    }

    /// Adds a text that [`Index::find`] did not find; its code, or `None` when no code is left.
    pub(super) fn add(&mut self, values: &mut TextValues, text: &str) -> Option<u32> {
        let code = values.add_text(text)?;
        let bytes = text.as_bytes();
        match short_key(bytes) {
            Some(key) => {
                self.short
                    .insert_unique(mix(key), (key, code), |e| mix(e.0));
                if self.few.len() < LINEAR_LOOKUP_TEXTS {
                    self.few.push((key, code));
                }
            }
            None => {
                let values = &*values;
                self.long
                    .insert_unique(fnv1a(bytes), code, |&c| hash_of(values, c));
            }
        }
        Some(code)
    }
}
