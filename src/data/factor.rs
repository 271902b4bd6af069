//! Factors: columns of group labels coded as level indices.

use std::collections::BTreeMap;
use std::sync::Arc;

use super::error::FactorError;
use super::number::{format_number, parse_number, NumberParse};
use super::{Column, Values};

/// One row's level index in a factor, or missing: four bytes a row, where an `Option<u32>`
/// takes eight. No factor has `u32::MAX` levels (making one stops at [`Code::MAX_LEVELS`]),
/// so that value can mean missing.
#[derive(Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord, Hash)]
pub struct Code(u32);

impl Code {
    /// The code of a missing value.
    pub const MISSING: Code = Code(u32::MAX);

    /// Most levels a factor can have.
    pub const MAX_LEVELS: u32 = u32::MAX;

    /// The code of level `level` (missing for `u32::MAX`, which no level has).
    #[inline]
    pub const fn level(level: u32) -> Code {
        Code(level)
    }

    /// True for the code of a missing value.
    #[inline]
    pub const fn is_missing(self) -> bool {
        self.0 == u32::MAX
    }

    /// The level index, `None` when missing.
    #[inline]
    pub const fn get(self) -> Option<u32> {
        if self.0 == u32::MAX {
            None
        } else {
            Some(self.0)
        }
    }
}

impl From<Option<u32>> for Code {
    #[inline]
    fn from(level: Option<u32>) -> Code {
        level.map_or(Code::MISSING, Code)
    }
}

/// A column of group labels: each row holds the index of its level, or missing.
#[derive(Debug, Clone, PartialEq)]
pub struct Factor {
    /// Level code per row, shared with the models fitted to it (a copy per model would cost
    /// 4 bytes a row each).
    pub codes: Arc<Vec<Code>>,
    /// Level names in level order; the first is the reference level.
    pub levels: Vec<String>,
    /// Where the level order came from.
    pub order: LevelOrder,
}

/// Where a factor's level order came from.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum LevelOrder {
    /// The order the user declared.
    Declared,
    /// The order in which levels first appear in the data.
    FirstAppearance,
}

impl Factor {
    /// Number of rows.
    pub fn len(&self) -> usize {
        self.codes.len()
    }

    /// True when the factor has no rows.
    pub fn is_empty(&self) -> bool {
        self.codes.is_empty()
    }

    /// The level name of a row, `None` when missing or out of range.
    pub fn level_of(&self, row: usize) -> Option<&str> {
        let code = self.codes.get(row)?.get()?;
        self.levels
            .get(usize::try_from(code).ok()?)
            .map(String::as_str)
    }

    /// Number of rows at each level, in level order.
    pub fn counts(&self) -> Vec<usize> {
        let count = |codes: &[Code]| {
            let mut counts = vec![0usize; self.levels.len()];
            for code in codes.iter().filter_map(|c| c.get()) {
                if let Some(c) = usize::try_from(code).ok().and_then(|i| counts.get_mut(i)) {
                    *c += 1;
                }
            }
            counts
        };
        let blocks = crate::parallel::row_blocks(self.codes.len());
        let mut counts = vec![0usize; self.levels.len()];
        for block in crate::parallel::map(&blocks, |at| {
            count(self.codes.get(at.clone()).unwrap_or(&[]))
        }) {
            for (c, b) in counts.iter_mut().zip(block) {
                *c += b;
            }
        }
        counts
    }
}

/// Levels that are declared but never occur, in level order (the caller warns about them).
pub fn unused_levels(f: &Factor) -> Vec<&str> {
    f.counts()
        .iter()
        .zip(&f.levels)
        .filter(|(n, _)| **n == 0)
        .map(|(_, l)| l.as_str())
        .collect()
}

/// Most levels a factor may have. A factor's levels become columns of a model's design, its
/// tables have a row per level (a row per pair of levels for pairwise comparisons), and no
/// real grouping of an experiment comes near; a column with more distinct values is an
/// identifier or a measurement. The limit keeps every later step within bounds.
pub const MAX_FACTOR_LEVELS: usize = 10_000;

/// The code of the level after `levels` levels, if a factor may have it.
fn level_code(levels: usize) -> Option<u32> {
    u32::try_from(levels)
        .ok()
        .filter(|&c| (c as usize) < MAX_FACTOR_LEVELS && c < Code::MAX_LEVELS)
}

/// A lookup key for one cell value: text as itself, numbers by their bits (-0 made 0).
#[derive(Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord)]
enum Key<'a> {
    Text(&'a str),
    Num(u64),
}

fn num_key(v: f64) -> u64 {
    // Adding 0.0 turns -0.0 into +0.0, so both zeros are one level.
    (v + 0.0).to_bits()
}

/// Makes a factor from a column.
///
/// Without `levels`, levels are the distinct values in order of first appearance; numeric values
/// become levels named by their shortest text (`1`, `2.5`). With `levels`, the order is the
/// declared one: text cells match a level exactly, numeric cells match a level that reads as the
/// same number, and factor columns are re-levelled by name. A value that occurs but is not
/// declared is an error naming it and its first row; declared levels that never occur are kept
/// (see [`unused_levels`]). Fewer than two distinct levels occurring is an error.
pub fn make_factor(col: &Column, levels: Option<&[String]>) -> Result<Factor, FactorError> {
    let column = || col.name.clone();
    let (declared, order) = match levels {
        Some(d) => (Some(d), LevelOrder::Declared),
        None => (None, LevelOrder::FirstAppearance),
    };
    let (mut names, mut map) = declared_levels(col, declared)?;

    let n = col.len();
    if let Values::Text(t) = &col.values {
        if blocked(t) {
            let memo = text_levels(t, &mut map, &mut names, declared.is_some(), column)?;
            let codes = apply_levels(t.codes(), &memo);
            return finish(codes, names, order, column);
        }
    }
    let mut codes: Vec<Code> = Vec::with_capacity(n);
    // A text column already codes its distinct texts: each is looked up once, the first time
    // a row has it, and later rows reuse the answer (the same codes and the same first
    // error as looking every row up).
    let text_codes = match &col.values {
        Values::Text(t) => Some((t, t.codes())),
        _ => None,
    };
    let mut memo: Vec<Option<u32>> = match text_codes {
        Some((t, _)) => vec![None; t.n_texts()],
        None => Vec::new(),
    };
    for row in 0..n {
        if let Some((_, row_codes)) = text_codes {
            let tc = row_codes
                .get(row)
                .copied()
                .unwrap_or(super::TextValues::MISSING);
            if tc == super::TextValues::MISSING {
                codes.push(Code::MISSING);
                continue;
            }
            if let Some(Some(level)) = usize::try_from(tc).ok().and_then(|i| memo.get(i)) {
                codes.push(Code::level(*level));
                continue;
            }
        }
        let key = match &col.values {
            Values::Numeric(v) => v
                .get(row)
                .copied()
                .filter(|x| !x.is_nan())
                .map(|x| Key::Num(num_key(x))),
            Values::Text(v) => v.get(row).map(Key::Text),
            Values::Factor(f) => f.level_of(row).map(Key::Text),
        };
        let Some(key) = key else {
            codes.push(Code::MISSING);
            continue;
        };
        let code = match map.get(&key) {
            Some(c) => *c,
            None => {
                let text = match key {
                    Key::Text(s) => s.to_owned(),
                    Key::Num(bits) => format_number(f64::from_bits(bits)),
                };
                if declared.is_some() {
                    return Err(FactorError::UndeclaredLevel {
                        column: column(),
                        value: text,
                        row,
                        line: None,
                    });
                }
                let c = level_code(names.len()).ok_or_else(|| FactorError::TooManyLevels {
                    column: column(),
                    row: Some(row),
                    line: None,
                })?;
                map.insert(key, c);
                names.push(text);
                c
            }
        };
        if let Some((_, row_codes)) = text_codes {
            let slot = row_codes
                .get(row)
                .and_then(|&tc| usize::try_from(tc).ok())
                .and_then(|i| memo.get_mut(i));
            if let Some(m) = slot {
                *m = Some(code);
            }
        }
        codes.push(Code::level(code));
    }

    finish(codes, names, order, column)
}

/// The declared levels of a factor of `col`, in order, with the key each cell matches them by;
/// empty when none are declared.
fn declared_levels<'a>(
    col: &Column,
    declared: Option<&'a [String]>,
) -> Result<Levels<'a>, FactorError> {
    let column = || col.name.clone();
    let mut names: Vec<String> = Vec::new();
    let mut map: BTreeMap<Key<'a>, u32> = BTreeMap::new();
    if let Some(d) = declared {
        for level in d {
            let key = match &col.values {
                Values::Numeric(_) => match parse_number(level) {
                    NumberParse::Number(x) => Some(Key::Num(num_key(x))),
                    _ => None,
                },
                Values::Text(_) | Values::Factor(_) => Some(Key::Text(level.as_str())),
            };
            let code = level_code(names.len()).ok_or_else(|| FactorError::TooManyLevels {
                column: column(),
                row: None,
                line: None,
            })?;
            if names.iter().any(|n| n == level) {
                return Err(FactorError::DuplicateDeclaredLevel {
                    column: column(),
                    level: level.clone(),
                });
            }
            if let Some(k) = key {
                if map.insert(k, code).is_some() {
                    return Err(FactorError::DuplicateDeclaredLevel {
                        column: column(),
                        level: level.clone(),
                    });
                }
            }
            names.push(level.clone());
        }
    }
    Ok((names, map))
}

/// Level names in order, with the key of each cell value that has a level.
type Levels<'a> = (Vec<String>, BTreeMap<Key<'a>, u32>);

/// Most distinct texts for [`text_levels`], whose blocks each keep a table this long.
const BLOCKED_TEXTS: usize = 1 << 12;

/// True for a text column that [`text_levels`] codes: large, with few distinct texts.
fn blocked(t: &super::TextValues) -> bool {
    t.len() >= crate::parallel::BLOCK_ROWS && t.n_texts() <= BLOCKED_TEXTS
}

/// The level of each distinct text of a large text column with few of them (`None` for a
/// text no row has), giving the same levels as the one-row-at-a-time loop of [`make_factor`]
/// (and the same first error), computed in fixed blocks of rows on the thread pool: first the
/// first row of each distinct text, then each text's level in the order the texts first
/// appear. [`apply_levels`] then gives every row's code.
fn text_levels<'a>(
    t: &'a super::TextValues,
    map: &mut BTreeMap<Key<'a>, u32>,
    names: &mut Vec<String>,
    declared: bool,
    column: impl Fn() -> String,
) -> Result<Vec<Option<u32>>, FactorError> {
    let row_codes = t.codes();
    let n_texts = t.n_texts();
    let index = |tc: u32| usize::try_from(tc).ok().filter(|&i| i < n_texts);
    let blocks = crate::parallel::row_blocks(row_codes.len());
    let firsts = crate::parallel::map(&blocks, |at| {
        let mut first = vec![usize::MAX; n_texts];
        let cells = row_codes.get(at.clone()).unwrap_or(&[]);
        for (row, &tc) in (at.start..).zip(cells) {
            if let Some(f) = index(tc).and_then(|i| first.get_mut(i)) {
                *f = (*f).min(row);
            }
        }
        first
    });
    let mut first = vec![usize::MAX; n_texts];
    for block in &firsts {
        for (f, &b) in first.iter_mut().zip(block) {
            *f = (*f).min(b);
        }
    }
    let mut by_appearance: Vec<(usize, u32)> = (0..)
        .zip(&first)
        .filter(|&(_, &row)| row != usize::MAX)
        .map(|(tc, &row)| (row, tc))
        .collect();
    by_appearance.sort_unstable();
    let mut memo: Vec<Option<u32>> = vec![None; n_texts];
    for (row, tc) in by_appearance {
        let Some(text) = t.text_of(tc) else { continue };
        let code = match map.get(&Key::Text(text)) {
            Some(&c) => c,
            None if declared => {
                return Err(FactorError::UndeclaredLevel {
                    column: column(),
                    value: text.to_owned(),
                    row,
                    line: None,
                })
            }
            None => {
                let c = level_code(names.len()).ok_or_else(|| FactorError::TooManyLevels {
                    column: column(),
                    row: Some(row),
                    line: None,
                })?;
                map.insert(Key::Text(text), c);
                names.push(text.to_owned());
                c
            }
        };
        if let Some(m) = index(tc).and_then(|i| memo.get_mut(i)) {
            *m = Some(code);
        }
    }
    Ok(memo)
}

/// The level code of a row whose text has code `tc`, given each text's level.
fn level_of_text(memo: &[Option<u32>], tc: u32) -> Code {
    usize::try_from(tc)
        .ok()
        .and_then(|i| memo.get(i).copied().flatten())
        .into()
}

/// The level codes of rows with text codes `row_codes`, given each text's level (see
/// [`text_levels`]), in blocks on the thread pool.
fn apply_levels(row_codes: &[u32], memo: &[Option<u32>]) -> Vec<Code> {
    use rayon::prelude::*;
    let mut codes: Vec<Code> = vec![Code::MISSING; row_codes.len()];
    codes
        .par_chunks_mut(crate::parallel::BLOCK_ROWS)
        .zip(row_codes.par_chunks(crate::parallel::BLOCK_ROWS))
        .for_each(|(out, cells)| {
            for (o, &tc) in out.iter_mut().zip(cells) {
                *o = level_of_text(memo, tc);
            }
        });
    codes
}

/// [`make_factor`] for a caller that puts the factor in the column's place: a large text
/// column with few distinct texts gives up its row codes, turned into level codes where they
/// lie, so that its four bytes a row are not joined by four more while both exist (the column
/// is left without rows). On an error the column is as it was.
pub fn take_factor(col: &mut Column, levels: Option<&[String]>) -> Result<Factor, FactorError> {
    use rayon::prelude::*;
    let Values::Text(t) = &col.values else {
        return make_factor(col, levels);
    };
    if !blocked(t) {
        return make_factor(col, levels);
    }
    let column = || col.name.clone();
    let (mut names, mut map) = declared_levels(col, levels)?;
    let memo = text_levels(t, &mut map, &mut names, levels.is_some(), column)?;
    // Every occurring text has a level here, so the levels occurring are the texts' levels.
    let mut occurring: Vec<u32> = memo.iter().flatten().copied().collect();
    occurring.sort_unstable();
    occurring.dedup();
    if occurring.len() < 2 {
        return Err(FactorError::TooFewLevels {
            column: column(),
            found: occurring
                .iter()
                .filter_map(|&c| names.get(usize::try_from(c).ok()?).cloned())
                .collect(),
        });
    }
    let order = if levels.is_some() {
        LevelOrder::Declared
    } else {
        LevelOrder::FirstAppearance
    };
    let mut codes = match &mut col.values {
        Values::Text(t) => t.take_codes(),
        _ => Vec::new(),
    };
    codes
        .par_chunks_mut(crate::parallel::BLOCK_ROWS)
        .for_each(|cells| {
            for c in cells {
                *c = level_of_text(&memo, *c).0;
            }
        });
    // Collecting a vector's own items, mapped to a type of the same size, reuses its memory.
    let codes: Vec<Code> = codes.into_iter().map(Code::level).collect();
    Ok(Factor {
        codes: Arc::new(codes),
        levels: names,
        order,
    })
}

/// The factor of the codes, or the error of one with fewer than two levels occurring.
fn finish(
    codes: Vec<Code>,
    names: Vec<String>,
    order: LevelOrder,
    column: impl Fn() -> String,
) -> Result<Factor, FactorError> {
    let factor = Factor {
        // Shared as it is: no copy.
        codes: Arc::new(codes),
        levels: names,
        order,
    };
    let occurring: Vec<String> = factor
        .counts()
        .iter()
        .zip(&factor.levels)
        .filter(|(c, _)| **c > 0)
        .map(|(_, l)| l.clone())
        .take(2)
        .collect();
    if occurring.len() < 2 {
        return Err(FactorError::TooFewLevels {
            column: column(),
            found: occurring,
        });
    }
    Ok(factor)
}
