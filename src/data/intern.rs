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
    Some(super::swar::load_short(cell)? | ((cell.len() as u64) << 56))
}

/// Spreads a short key over all 64 bits: the two halves of its 128-bit product with
/// 2^64 / golden ratio, folded together (the "folded multiply" of fast non-cryptographic
/// hashes such as wyhash).
fn mix(key: u64) -> u64 {
    let p = u128::from(key) * 0x9E37_79B9_7F4A_7C15;
    (p as u64) ^ ((p >> 64) as u64)
}

/// Slots of the table of first-come short texts (see [`Index`]): a power of two, so that the
/// top bits of the mixed key pick a slot, and a few times the distinct texts of a typical
/// label column, so that most find a slot of their own.
const DIRECT_SLOTS: usize = 256;

/// A slot of the direct table that holds no text (no text has this code: see
/// [`TextValues::MISSING`]).
const EMPTY_SLOT: (u64, u32) = (0, TextValues::MISSING);

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
    /// Short texts by the top bits of their mixed key, the first added to each slot keeping
    /// it (empty until the first short text): found with one load and one comparison, the
    /// hash table searched only on a miss. The slots depend only on the order texts are
    /// added, and only make a search faster.
    direct: Vec<(u64, u32)>,
}

/// The direct-table slot of a mixed short key.
#[inline]
fn direct_slot(mixed: u64) -> usize {
    (mixed >> (u64::BITS - DIRECT_SLOTS.trailing_zeros())) as usize
}

impl Index {
    /// The code of `cell` among the texts of `values`, if it is one of them.
    #[inline]
    pub(super) fn find(&self, values: &TextValues, cell: &[u8]) -> Option<u32> {
        if let Some(key) = short_key(cell) {
            if self.short.len() <= LINEAR_LOOKUP_TEXTS {
                return self.few.iter().find(|e| e.0 == key).map(|e| e.1);
            }
            let mixed = mix(key);
            if let Some(&(k, code)) = self.direct.get(direct_slot(mixed)) {
                if k == key && code != TextValues::MISSING {
                    return Some(code);
                }
            }
            return self.short.find(mixed, |e| e.0 == key).map(|e| e.1);
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
                let mixed = mix(key);
                self.short.insert_unique(mixed, (key, code), |e| mix(e.0));
                if self.direct.is_empty() {
                    self.direct = vec![EMPTY_SLOT; DIRECT_SLOTS];
                }
                if let Some(slot) = self.direct.get_mut(direct_slot(mixed)) {
                    if slot.1 == TextValues::MISSING {
                        *slot = (key, code);
                    }
                }
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
