//! The data-file line of each row.

use std::sync::Arc;

/// The data-file line of each row of a data set or of a model's variables. Lines that follow one another (a
/// file without blank lines or line breaks in quotes, not filtered: the common case) are kept
/// as the first line and their number instead of 8 bytes a row; any others as a list shared
/// between the data set and the models that use it. Made from the lines by `From` or `collect`, which pick
/// the form, so equal lines are always held alike.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct RowLines(Lines);

/// The two forms of [`RowLines`].
#[derive(Debug, Clone, PartialEq, Eq)]
enum Lines {
    /// Lines `first`, `first + 1`, ..., `len` of them.
    Run { first: usize, len: usize },
    /// Any other lines.
    Listed(Arc<[usize]>),
}

impl RowLines {
    /// Number of rows.
    pub fn len(&self) -> usize {
        match &self.0 {
            Lines::Run { len, .. } => *len,
            Lines::Listed(v) => v.len(),
        }
    }

    /// True when there are no rows.
    pub fn is_empty(&self) -> bool {
        self.len() == 0
    }

    /// The line of row `row`, if there is such a row.
    pub fn get(&self, row: usize) -> Option<usize> {
        match &self.0 {
            Lines::Run { first, len } => first.checked_add(row).filter(|_| row < *len),
            Lines::Listed(v) => v.get(row).copied(),
        }
    }

    /// The line of the first row, if any.
    pub fn first(&self) -> Option<usize> {
        self.get(0)
    }
}

impl From<&[usize]> for RowLines {
    fn from(lines: &[usize]) -> RowLines {
        let first = lines.first().copied().unwrap_or(0);
        let run = lines
            .iter()
            .enumerate()
            .all(|(k, &l)| first.checked_add(k) == Some(l));
        RowLines(if run {
            Lines::Run {
                first,
                len: lines.len(),
            }
        } else {
            Lines::Listed(lines.into())
        })
    }
}

impl FromIterator<usize> for RowLines {
    fn from_iter<I: IntoIterator<Item = usize>>(lines: I) -> RowLines {
        let lines: Vec<usize> = lines.into_iter().collect();
        RowLines::from(lines.as_slice())
    }
}

impl RowLines {
    /// The line of the last row, if any.
    pub fn last(&self) -> Option<usize> {
        self.len().checked_sub(1).and_then(|r| self.get(r))
    }

    /// Every row's line, in order.
    pub fn iter(&self) -> impl Iterator<Item = usize> + '_ {
        (0..self.len()).filter_map(|r| self.get(r))
    }

    /// Every row's line, as a list.
    pub fn to_vec(&self) -> Vec<usize> {
        self.iter().collect()
    }
}

/// [`RowLines`] made by appending the lines of consecutive parts of a file: no list is
/// kept while the lines follow one another.
#[derive(Debug, Default)]
pub(crate) enum LinesBuilder {
    /// No line yet.
    #[default]
    Empty,
    /// Lines `first`, `first + 1`, ..., `len` of them.
    Run { first: usize, len: usize },
    /// The lines so far, once they stopped following one another.
    Listed(Vec<usize>),
}

impl LinesBuilder {
    /// Number of lines so far.
    pub fn len(&self) -> usize {
        match self {
            LinesBuilder::Empty => 0,
            LinesBuilder::Run { len, .. } => *len,
            LinesBuilder::Listed(v) => v.len(),
        }
    }

    /// True when no line was added.
    pub fn is_empty(&self) -> bool {
        self.len() == 0
    }

    /// The line of row `row` (`None` past the end).
    pub fn get(&self, row: usize) -> Option<usize> {
        match self {
            LinesBuilder::Empty => None,
            LinesBuilder::Run { first, len } => (row < *len).then(|| first + row),
            LinesBuilder::Listed(v) => v.get(row).copied(),
        }
    }

    /// Appends lines.
    pub fn extend(&mut self, lines: &[usize]) {
        let (first, len) = match (&mut *self, lines.first()) {
            (LinesBuilder::Listed(v), _) => {
                v.extend_from_slice(lines);
                return;
            }
            (LinesBuilder::Run { first, len }, _) => (*first, *len),
            (LinesBuilder::Empty, Some(&l)) => (l, 0),
            (LinesBuilder::Empty, None) => return,
        };
        let runs_on = (len..)
            .zip(lines)
            .all(|(k, &l)| first.checked_add(k) == Some(l));
        *self = if runs_on {
            LinesBuilder::Run {
                first,
                len: len + lines.len(),
            }
        } else {
            let mut v: Vec<usize> = (first..first + len).collect();
            v.extend_from_slice(lines);
            LinesBuilder::Listed(v)
        };
    }

    /// The lines added.
    pub fn finish(self) -> RowLines {
        match self {
            LinesBuilder::Empty => RowLines::from(&[][..]),
            LinesBuilder::Run { first, len } => RowLines(Lines::Run { first, len }),
            LinesBuilder::Listed(v) => RowLines::from(v.as_slice()),
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use proptest::prelude::*;

    fn built(parts: &[&[usize]]) -> RowLines {
        let mut b = LinesBuilder::default();
        for p in parts {
            b.extend(p);
        }
        b.finish()
    }

    #[test]
    fn runs_stay_runs_and_breaks_list() {
        let run = built(&[&[2, 3], &[], &[4, 5, 6]]);
        assert_eq!(run, RowLines(Lines::Run { first: 2, len: 5 }));
        assert_eq!((run.last(), run.to_vec()), (Some(6), vec![2, 3, 4, 5, 6]));
        // A break inside a part, and one between parts.
        assert_eq!(built(&[&[2, 3, 5], &[6]]).to_vec(), vec![2, 3, 5, 6]);
        assert_eq!(built(&[&[2, 3], &[5, 6]]).to_vec(), vec![2, 3, 5, 6]);
        assert_eq!(built(&[]), RowLines::from(&[][..]));
    }

    proptest! {
        /// Any lines cut into any parts give what `From` gives for all of them at once.
        #[test]
        fn parts_build_what_the_whole_gives(
            steps in proptest::collection::vec(prop_oneof![4 => Just(1usize), 1 => 2usize..4], 0..60),
            cuts in proptest::collection::vec(0usize..60, 0..6),
        ) {
            let all: Vec<usize> = steps.iter().scan(1usize, |l, s| { *l += s; Some(*l) }).collect();
            let mut at: Vec<usize> = cuts.into_iter().map(|c| c.min(all.len())).collect();
            at.sort_unstable();
            let mut parts: Vec<&[usize]> = Vec::new();
            let mut from = 0;
            for c in at.into_iter().chain([all.len()]) {
                parts.push(&all[from..c]);
                from = c;
            }
            let b = built(&parts);
            prop_assert_eq!(&b, &RowLines::from(all.as_slice()));
            prop_assert_eq!(b.len(), all.len());
        }
    }
}
