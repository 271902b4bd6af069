//! Live references `@[KIND MODEL ROW COLUMN]` in prose: the tables they may name, the checks that
//! need no computed table, and where in a reference the cursor stands.

pub(crate) use crate::report::live::quote;
use crate::report::live::{self, LiveError};

/// What a table's live references name as their subject.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Subject {
    /// A model.
    Model,
    /// A summarised column.
    Column,
    /// A plan (`plan NAME ...`).
    Plan,
    /// Nothing: the table cannot be named by a reference.
    None,
}

/// A JSON kind of table, as README's table of kinds lists it.
#[derive(Debug, Clone, Copy)]
pub struct Kind {
    pub kind: &'static str,
    pub subject: Subject,
    /// Leading text columns: the words that name a row.
    pub key_words: usize,
    /// The JSON column keys, in order.
    pub columns: &'static [&'static str],
}

/// Every JSON kind of table and its columns. `tests/lsp.rs` renders a document that computes
/// every kind and checks this list against the JSON the renderer writes, so the two cannot drift
/// apart unnoticed.
pub const KINDS: &[Kind] = &[
    Kind {
        kind: "columns",
        subject: Subject::None,
        key_words: 2,
        columns: &["column", "type", "missing", "levels"],
    },
    Kind {
        kind: "preview",
        subject: Subject::None,
        key_words: 0,
        columns: &["row"],
    },
    Kind {
        kind: "summary",
        subject: Subject::Column,
        key_words: 1,
        columns: &[
            "level", "n", "missing", "mean", "sd", "se", "min", "median", "max",
        ],
    },
    Kind {
        kind: "fit",
        subject: Subject::Model,
        key_words: 0,
        columns: &[
            "n",
            "df_model",
            "df_residual",
            "sigma",
            "r_squared",
            "adj_r_squared",
            "f",
            "p",
            "aic",
            "bic",
        ],
    },
    Kind {
        kind: "coefficients",
        subject: Subject::Model,
        key_words: 1,
        columns: &["term", "estimate", "se", "t", "p", "lower", "upper"],
    },
    Kind {
        kind: "anova",
        subject: Subject::Model,
        key_words: 1,
        columns: &["term", "df", "ss", "ms", "f", "p", "partial_eta_sq"],
    },
    Kind {
        kind: "compare",
        subject: Subject::Model,
        key_words: 3,
        columns: &[
            "smaller",
            "larger",
            "terms_added",
            "n",
            "rss_smaller",
            "rss_larger",
            "extra_ss",
            "f",
            "df1",
            "df2",
            "p",
        ],
    },
    Kind {
        kind: "means",
        subject: Subject::Model,
        key_words: 1,
        columns: &["level", "mean", "se", "df", "lower", "upper"],
    },
    Kind {
        kind: "differences",
        subject: Subject::Model,
        // Three with `within B`, whose level comes first.
        key_words: 2,
        columns: &[
            "first", "second", "estimate", "se", "t", "df", "p", "lower", "upper",
        ],
    },
    Kind {
        kind: "cell-means",
        subject: Subject::Model,
        key_words: 2,
        columns: &["level", "by", "rows", "mean", "se", "df", "lower", "upper"],
    },
    Kind {
        kind: "slopes",
        subject: Subject::Model,
        key_words: 1,
        columns: &["level", "slope", "se", "t", "df", "p", "lower", "upper"],
    },
    Kind {
        kind: "slopes-equality",
        subject: Subject::Model,
        key_words: 0,
        columns: &["f", "df1", "df2", "p"],
    },
    Kind {
        kind: "contrast",
        subject: Subject::Model,
        key_words: 0,
        columns: &["estimate", "se", "t", "df", "p", "lower", "upper"],
    },
    Kind {
        kind: "regions",
        subject: Subject::Model,
        key_words: 2,
        columns: &[
            "first",
            "second",
            "lower_bound",
            "upper_bound",
            "significant",
            "observed_min",
            "observed_max",
        ],
    },
    Kind {
        kind: "check",
        subject: Subject::Model,
        key_words: 1,
        columns: &["check", "statistic", "df", "p", "verdict"],
    },
    Kind {
        kind: "plan",
        subject: Subject::Plan,
        key_words: 0,
        columns: &[
            "groups",
            "covariates",
            "r_squared",
            "sd",
            "effect_f",
            "alpha",
            "n_per_group",
            "total_n",
            "df1",
            "df2",
            "lambda",
            "power",
            "group_sizes",
        ],
    },
    Kind {
        kind: "influence",
        subject: Subject::Model,
        key_words: 0,
        columns: &["row", "leverage", "cooks_distance", "studentized_residual"],
    },
];

/// The JSON columns of a table of kind `k`; an influence table of a model whose rows are
/// labelled (`label rows by`) has the label beside each row's number, as the renderer writes it.
pub fn columns(k: &Kind, labelled: bool) -> Vec<&'static str> {
    let mut out = k.columns.to_vec();
    if k.kind == "influence" && labelled {
        out.insert(1, "label");
    }
    out
}

/// The kind called `name`.
pub fn kind(name: &str) -> Option<&'static Kind> {
    KINDS.iter().find(|k| k.kind == name)
}

/// The kinds a reference can name (those with a subject).
pub fn nameable() -> impl Iterator<Item = &'static Kind> {
    KINDS.iter().filter(|k| k.subject != Subject::None)
}

/// What is wrong with a reference that can be told without computing a table: its form, a
/// table the document never computes (`tables` lists the (kind, subject) pairs its statements
/// compute; `maybe` those they may compute), or words that cannot name a value of its kind. The
/// errors are the renderer's own.
pub fn check(
    reference: &str,
    tables: &[(String, String)],
    maybe: &[(String, String)],
) -> Result<(), LiveError> {
    let parsed = live::parse(reference)?;
    if parsed.kind == "pairs" {
        return Err(LiveError::Renamed {
            old: "pairs",
            new: "differences",
        });
    }
    let computed = |list: &[(String, String)]| {
        list.iter()
            .any(|(k, s)| *k == parsed.kind && *s == parsed.subject)
    };
    if !computed(tables) {
        if computed(maybe) {
            return Ok(());
        }
        let mut known: Vec<String> = Vec::new();
        for (k, s) in tables {
            let name = format!("{k} {}", quote(s));
            if !known.contains(&name) {
                known.push(name);
            }
        }
        return Err(LiveError::NoTable {
            kind: parsed.kind,
            subject: parsed.subject,
            known,
        });
    }
    let Some(k) = kind(&parsed.kind) else {
        return Ok(());
    };
    let rest = &parsed.rest;
    let width = k.key_words;
    let column = if k.kind == "differences" && (width..=width + 2).contains(&rest.len()) {
        // A table of differences `within B` has a third key word, the level of B, which
        // only the computed table tells from a column: check the column only when the
        // words leave no doubt.
        rest.get(width + 2)
    } else if rest.len() == width + 1 {
        rest.get(width)
    } else if rest.len() == 1 {
        // A table of one row needs no row words; how many rows it has is known only once
        // it is computed.
        None
    } else {
        return Err(LiveError::Shape {
            kind: k.kind.to_string(),
            key_words: width,
            given: rest.len(),
        });
    };
    match column {
        Some(c) if !k.columns.contains(&c.as_str()) => Err(LiveError::NoColumn {
            kind: k.kind.to_string(),
            column: c.clone(),
            columns: k
                .columns
                .iter()
                .skip(width)
                .map(|s| s.to_string())
                .collect(),
        }),
        _ => Ok(()),
    }
}

/// Where the cursor stands in a reference being written: the words before it, and the start of
/// the word it is in (a byte offset within `line`).
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct InReference {
    /// Where its `@[` stands in the line.
    pub open: usize,
    pub words: Vec<String>,
    pub word_start: usize,
}

/// The reference the cursor (`at`, a byte offset in `line`) stands in on a line of prose: after
/// an `@[` with no `]` between it and the cursor. A reference need not be finished to be
/// completed.
pub fn in_reference(line: &str, at: usize) -> Option<InReference> {
    let before = line.get(..at)?;
    let open = before.rfind(live::OPEN)?;
    let inner = &before[open + live::OPEN.len()..];
    if inner.contains(live::CLOSE) || !inner.chars().all(live::is_reference_char) {
        return None;
    }
    // Words as `live::parse` splits them: runs of non-space, or quoted text.
    let mut words = Vec::new();
    let mut word_start = open + live::OPEN.len();
    let mut chars = inner.char_indices().peekable();
    let base = open + live::OPEN.len();
    while let Some(&(i, c)) = chars.peek() {
        if c.is_whitespace() {
            chars.next();
            word_start = base + i + c.len_utf8();
            continue;
        }
        word_start = base + i;
        let mut word = String::new();
        let mut finished = false;
        if c == '"' {
            chars.next();
            for (_, c) in chars.by_ref() {
                if c == '"' {
                    finished = true;
                    break;
                }
                word.push(c);
            }
        } else {
            while let Some(&(_, c)) = chars.peek() {
                if c.is_whitespace() {
                    finished = true;
                    break;
                }
                word.push(c);
                chars.next();
            }
        }
        if finished {
            words.push(word);
            // The word ended before the cursor: the next one starts after the spaces.
            word_start = at;
        } else {
            break;
        }
    }
    Some(InReference {
        open,
        words,
        word_start,
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn words_before_the_cursor() {
        let line = "F = @[anova parallel ration f";
        let r = in_reference(line, line.len()).unwrap_or_else(|| panic!("no reference"));
        assert_eq!(r.words, ["anova", "parallel", "ration"]);
        assert_eq!(&line[r.word_start..], "f");
        let line = "see @[means \"my model\" ";
        let r = in_reference(line, line.len()).unwrap_or_else(|| panic!("no reference"));
        assert_eq!(r.words, ["means", "my model"]);
        assert_eq!(r.word_start, line.len());
        assert_eq!(in_reference("done @[fit m p] and ", 20), None);
    }

    #[test]
    fn checks_without_tables() {
        let tables = vec![("anova".to_string(), "m".to_string())];
        assert!(check("@[anova m g p]", &tables, &[]).is_ok());
        let e = check("@[anova m g pp]", &tables, &[]).err();
        assert!(matches!(e, Some(LiveError::NoColumn { .. })), "{e:?}");
        let e = check("@[means m g mean]", &tables, &[]).err();
        assert!(matches!(e, Some(LiveError::NoTable { .. })), "{e:?}");
        let e = check("@[anova m a b c]", &tables, &[]).err();
        assert!(matches!(e, Some(LiveError::Shape { .. })), "{e:?}");
        let e = check("@[anova]", &tables, &[]).err();
        assert!(matches!(e, Some(LiveError::Syntax { .. })), "{e:?}");
    }
}
