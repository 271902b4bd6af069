//! Completion. In a covey block, the parser says what may come next on the line (see
//! [`super::grammar`]): its words are offered as they are, and for a name or a value the server
//! finds what the statement would make of it by finishing the line the way the grammar allows
//! and reading the statement's syntax tree: a model, a data set, a column, a level of a column.
//! In a live reference `@[...]`, the words are the tables the document computes and their JSON
//! columns.

use lsp_types::{
    CompletionItem, CompletionItemKind, CompletionResponse, CompletionTextEdit, TextEdit,
};

use crate::lang::{self, Params, Span, StatementKind, TableRequest};
use crate::session::data_statements::quote_name;

use super::analysis::{Analysis, State};
use super::data::DataCache;
use super::grammar::{next_tokens, Token};
use super::names::{uses_of, NameUse, Role};
use super::position::{Encoding, Lines};
use super::references::{self, in_reference, Subject};

/// What kind of thing a candidate is.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum What {
    Keyword,
    Model,
    DataSet,
    Column,
    Level,
    Parameter,
    TableKind,
    JsonColumn,
    Plan,
}

/// One thing that may be written at the cursor.
#[derive(Debug, Clone, PartialEq)]
pub struct Candidate {
    /// What the list shows.
    pub label: String,
    /// What is written in place of the word at the cursor.
    pub insert: String,
    pub what: What,
    /// A line about it (a column's type, a model's formula).
    pub detail: Option<String>,
}

/// Everything that may be written at a place, replacing the word there.
#[derive(Debug, Clone, PartialEq)]
pub struct Completion {
    /// The word being written (empty at its start), in the text as given.
    pub replace: Span,
    pub candidates: Vec<Candidate>,
}

impl Completion {
    /// The protocol's answer: the candidates in the order given, each replacing the word.
    pub fn to_lsp(&self, a: &Analysis, enc: Encoding) -> CompletionResponse {
        let lines = Lines::new(&a.text);
        let range = lines.range(&a.text, self.replace, enc);
        let items = self
            .candidates
            .iter()
            .enumerate()
            .map(|(i, c)| CompletionItem {
                label: c.label.clone(),
                kind: Some(match c.what {
                    What::Keyword => CompletionItemKind::KEYWORD,
                    What::Model => CompletionItemKind::FUNCTION,
                    What::Plan => CompletionItemKind::CONSTANT,
                    What::DataSet => CompletionItemKind::STRUCT,
                    What::Column => CompletionItemKind::FIELD,
                    What::Level => CompletionItemKind::ENUM_MEMBER,
                    What::Parameter => CompletionItemKind::CONSTANT,
                    What::TableKind => CompletionItemKind::CLASS,
                    What::JsonColumn => CompletionItemKind::PROPERTY,
                }),
                detail: c.detail.clone(),
                sort_text: Some(format!("{i:04}")),
                filter_text: Some(c.insert.clone()),
                text_edit: Some(CompletionTextEdit::Edit(TextEdit {
                    range,
                    new_text: c.insert.clone(),
                })),
                ..CompletionItem::default()
            })
            .collect();
        CompletionResponse::Array(items)
    }
}

/// What may be written at `at` (a byte offset in the text as given); `None` outside covey blocks
/// and live references.
pub fn complete(a: &Analysis, data: &mut DataCache, at: usize) -> Option<Completion> {
    let doc = a.document.as_ref()?;
    let source = doc.source.as_str();
    let at = super::position::floor_boundary(&a.text, at);
    let at_source = a.to_source(at);
    let line_start = source[..at_source].rfind('\n').map_or(0, |i| i + 1);
    let line_end = source[at_source..]
        .find('\n')
        .map_or(source.len(), |i| at_source + i);
    let line = source.get(line_start..line_end)?;
    let col = at_source - line_start;
    let (candidates, word_start) = if a.block_at(at_source).is_some() {
        in_block(a, data, line, col, line_start)?
    } else {
        in_prose(a, source, line_start, line, col)?
    };
    Some(Completion {
        replace: Span {
            start: a.to_given(line_start + word_start),
            end: at,
        },
        candidates,
    })
}

/// The start (in `prefix`) of the word being written at its end: a name, a parameter after its
/// `@`, or a quoted text not closed yet.
fn word_start(prefix: &str) -> usize {
    // Inside an open quote: from the quote.
    let mut open: Option<usize> = None;
    let mut escaped = false;
    for (i, c) in prefix.char_indices() {
        if open.is_some() {
            if escaped {
                escaped = false;
            } else if c == '\\' {
                escaped = true;
            } else if c == '"' {
                open = None;
            }
        } else if c == '"' {
            open = Some(i);
        } else if c == '#' {
            // A comment: nothing to complete.
            return prefix.len();
        }
    }
    if let Some(i) = open {
        return i;
    }
    let start = prefix
        .char_indices()
        .rev()
        .take_while(|(_, c)| c.is_alphanumeric() || *c == '_' || *c == '.')
        .last()
        .map_or(prefix.len(), |(i, _)| i);
    if prefix[..start].ends_with('@') {
        start - 1
    } else {
        start
    }
}

fn in_block(
    a: &Analysis,
    data: &mut DataCache,
    line: &str,
    col: usize,
    line_start: usize,
) -> Option<(Vec<Candidate>, usize)> {
    let prefix = line.get(..col)?;
    let start = word_start(prefix);
    let before = &prefix[..start];
    let tokens = next_tokens(before)?;
    let state = a.state_before(line_start, data);
    let mut out: Vec<Candidate> = Vec::new();
    let mut words: Vec<Candidate> = Vec::new();
    for t in &tokens {
        match t {
            Token::Word(w) => words.push(Candidate {
                label: w.clone(),
                insert: w.clone(),
                what: What::Keyword,
                detail: None,
            }),
            Token::Slot("param_ref") => {
                for (name, value) in &a.params {
                    out.push(Candidate {
                        label: format!("@{name}"),
                        insert: format!("@{name}"),
                        what: What::Parameter,
                        detail: Some(format!("parameter = {}", value.as_text())),
                    });
                }
            }
            Token::Slot(slot) => {
                let role = probe(before, slot, &a.params);
                names_for(&state, slot, role.as_ref(), &mut out);
            }
            Token::Punct(_) => {}
        }
    }
    out.extend(words);
    // Inside a quoted text being written a keyword does not fit: `database`, offered after
    // `load "`, replaced the opening quote and the letters after it. A name (a level, a
    // column) replaces the quote with itself, quoted when it must be.
    if prefix[start..].starts_with('"') {
        out.retain(|c| c.what != What::Keyword);
    }
    let mut seen: Vec<String> = Vec::new();
    out.retain(|c| {
        let new = !seen.contains(&c.insert);
        seen.push(c.insert.clone());
        new
    });
    Some((out, start))
}

/// Text that stands for what a token asks for, to finish a line; `None` for a parameter (the
/// line's parameters may not be declared).
fn filler(t: &Token) -> Option<String> {
    match t {
        Token::Word(w) => Some(w.clone()),
        Token::Slot("ident" | "name" | "value") => Some("covey_fill".to_string()),
        Token::Slot("string") => Some("\"f\"".to_string()),
        Token::Slot("number" | "integer") => Some("1".to_string()),
        Token::Punct(p) => Some(p.clone()),
        Token::Slot(_) => None,
    }
}

/// Text that stands for a name or value while the line is finished to learn its role.
const PROBE: &str = "covey_probe";

/// What a name or value written after `prefix` would stand for: the line is finished the way
/// the grammar allows (the first thing it accepts each time, as the parser says) and parsed,
/// and the role of the probe is read from the statement. `None` when no finished line is found
/// within a few words.
fn probe(prefix: &str, slot: &str, params: &Params) -> Option<NameUse> {
    let probe = match slot {
        "string" => format!("\"{PROBE}\""),
        "ident" | "name" | "value" => PROBE.to_string(),
        _ => return None,
    };
    let at = prefix.len();
    let mut line = format!("{prefix}{probe}");
    // Enough for the longest run of required words after a name in the grammar.
    for _ in 0..12 {
        match lang::parse_line_with(&line, 0, 1, params) {
            Ok(Some(stmt)) => {
                return uses_of(&stmt)
                    .into_iter()
                    .find(|u| u.span.start <= at && at + probe.len() <= u.span.end);
            }
            Ok(None) => return None,
            Err(_) => {
                let spaced = format!("{line} ");
                let tokens = next_tokens(&spaced)?;
                let fills: Vec<String> = tokens.iter().filter_map(filler).collect();
                // A word that finishes the line at once; else a closing bracket, a word, a name
                // or a value, and only then a separator (`,`, `+`), which would only make a list
                // longer.
                let rank = |f: &String| match f.as_str() {
                    ")" => 0,
                    f if f.starts_with(|c: char| c.is_alphanumeric() || c == '"') => 1,
                    _ => 2,
                };
                let finished = fills.iter().find(|f| {
                    matches!(
                        lang::parse_line_with(&format!("{spaced}{f}"), 0, 1, params),
                        Ok(Some(_))
                    )
                });
                let fill = finished.or_else(|| fills.iter().min_by_key(|f| rank(f)))?;
                line = format!("{spaced}{fill}");
            }
        }
    }
    None
}

fn names_for(state: &State, slot: &str, role: Option<&NameUse>, out: &mut Vec<Candidate>) {
    let (role, context) = match role {
        Some(u) => (u.role.clone(), u.context.as_str()),
        // The line cannot be finished yet: go by the kind of slot.
        None => match slot {
            "ident" => (Role::Model, ""),
            "name" => (Role::Column, ""),
            _ => return,
        },
    };
    match role {
        Role::Model => {
            for m in &state.models {
                out.push(Candidate {
                    label: m.name.clone(),
                    insert: m.name.clone(),
                    what: What::Model,
                    detail: Some(m.statement.text.clone()),
                });
            }
        }
        Role::DataSet => {
            for d in &state.data_sets {
                out.push(Candidate {
                    label: d.name.clone(),
                    insert: d.name.clone(),
                    what: What::DataSet,
                    detail: Some(format!("data set from \"{}\"", d.path)),
                });
            }
        }
        Role::Column | Role::ModelFactor | Role::ModelCovariate => {
            // A model's factor or covariate: the model's own, from its data set.
            let model = state.model(context).filter(|_| role != Role::Column);
            let wanted: Option<Vec<&str>> = model.and_then(|m| m.vars.as_ref()).map(|vars| {
                vars.iter()
                    .filter(|v| v.factor == (role == Role::ModelFactor))
                    .map(|v| v.name.as_str())
                    .collect()
            });
            let ds = match model.and_then(|m| m.data_set) {
                Some(i) => state.data_sets.get(i),
                None => state.current(),
            };
            let Some(ds) = ds else {
                return;
            };
            let Some(shape) = &ds.shape else {
                return;
            };
            for c in &shape.columns {
                if wanted
                    .as_ref()
                    .is_some_and(|w| !w.contains(&c.name.as_str()))
                {
                    continue;
                }
                let missing = ds
                    .summary
                    .as_ref()
                    .and_then(|s| s.column(&c.name))
                    .map_or(0, |s| s.missing);
                out.push(Candidate {
                    label: c.name.clone(),
                    insert: quote_name(&c.name),
                    what: What::Column,
                    detail: Some(format!(
                        "{} column of `{}`, {missing} missing",
                        c.kind_name(),
                        ds.name
                    )),
                });
            }
        }
        Role::Level | Role::ModelLevel { .. } => {
            let from_model = match &role {
                Role::ModelLevel { model } => state
                    .model(model)
                    .and_then(|m| m.vars.as_ref())
                    .and_then(|v| v.iter().find(|v| v.name == context && v.factor))
                    .map(|v| v.levels.clone()),
                _ => None,
            };
            let levels = from_model
                .or_else(|| state.current().and_then(|d| d.levels(context)))
                .unwrap_or_default();
            for l in levels {
                out.push(Candidate {
                    insert: quote_value(&l),
                    label: l,
                    what: What::Level,
                    detail: Some(format!("a value of `{context}`")),
                });
            }
        }
        Role::Plan => {
            for (name, text) in &state.plans {
                out.push(Candidate {
                    label: name.clone(),
                    insert: name.clone(),
                    what: What::Plan,
                    detail: Some(text.clone()),
                });
            }
        }
        Role::ModelDef | Role::DataSetDef | Role::ParamDef | Role::PlanDef | Role::File => {}
    }
}

/// A value as a statement must write it: a bare word or number as it is, anything else quoted.
pub fn quote_value(v: &str) -> String {
    let number = matches!(
        crate::data::parse_number(v),
        crate::data::NumberParse::Number(_)
    ) && v
        .chars()
        .all(|c| c.is_ascii_digit() || matches!(c, '.' | '-' | 'e' | 'E' | '+'));
    if number {
        v.to_string()
    } else {
        quote_name(v)
    }
}

fn in_prose(
    a: &Analysis,
    source: &str,
    line_start: usize,
    line: &str,
    col: usize,
) -> Option<(Vec<Candidate>, usize)> {
    let r = in_reference(line, col)?;
    // Only in prose, as the renderer reads it (not in code, HTML or a link's address): finished
    // at the cursor with a word and `]`, the reference must be one the document reader finds.
    let at = line_start + col;
    let closed = format!(
        "{}x{}{}",
        source.get(..at)?,
        crate::report::live::CLOSE,
        source.get(at..)?
    );
    let doc = crate::document::parse(&closed).ok()?;
    let end = at + 1 + crate::report::live::CLOSE.len();
    if !doc
        .references
        .iter()
        .any(|found| found.start == line_start + r.open && found.end == end)
    {
        return None;
    }
    let mut out = Vec::new();
    let kind = r.words.first().and_then(|k| references::kind(k));
    match r.words.len() {
        0 => {
            for k in references::nameable() {
                out.push(Candidate {
                    label: k.kind.to_string(),
                    insert: k.kind.to_string(),
                    what: What::TableKind,
                    detail: Some(k.columns.join(", ")),
                });
            }
        }
        1 => {
            let k = kind?;
            let mut seen = Vec::new();
            // `maybe_tables` holds every table a statement computes, those computed only
            // sometimes (influence) too.
            for (tk, subject) in &a.maybe_tables {
                if *tk == k.kind && !seen.contains(subject) {
                    seen.push(subject.clone());
                    out.push(Candidate {
                        label: subject.clone(),
                        insert: references::quote(subject),
                        what: match k.subject {
                            Subject::Column => What::Column,
                            Subject::Plan => What::Plan,
                            Subject::Model | Subject::None => What::Model,
                        },
                        detail: None,
                    });
                }
            }
        }
        n => {
            let k = kind?;
            let subject = r.words.get(1)?;
            let given = n - 2;
            if given < k.key_words {
                for key in row_keys(a, k.kind, subject) {
                    out.push(Candidate {
                        insert: references::quote(&key),
                        label: key,
                        what: What::Level,
                        detail: None,
                    });
                }
            }
            if given == k.key_words || given == 0 {
                let labelled = a.end.model(subject).is_some_and(|m| m.labels.is_some());
                for c in references::columns(k, labelled)
                    .into_iter()
                    .skip(k.key_words)
                {
                    out.push(Candidate {
                        label: c.to_string(),
                        insert: c.to_string(),
                        what: What::JsonColumn,
                        detail: Some(format!("column of the `{}` table", k.kind)),
                    });
                }
            }
        }
    }
    Some((out, r.word_start))
}

/// Words that name rows of a table, where the statement that computes it tells them: the levels
/// of the factor of `means`, `pairs`, `slopes` and `regions`, the models of `compare`.
fn row_keys(a: &Analysis, kind: &str, subject: &str) -> Vec<String> {
    let mut out: Vec<String> = Vec::new();
    for stmt in a.statements() {
        let StatementKind::Table(request) = &stmt.kind else {
            continue;
        };
        if stmt.text.split_whitespace().nth(1) != Some(kind) {
            continue;
        }
        let factor = match request {
            TableRequest::Means { model, factor, .. }
            | TableRequest::Differences { model, factor, .. }
            | TableRequest::Slopes { model, factor, .. }
            | TableRequest::Regions { model, factor, .. }
                if model.value == subject =>
            {
                Some(&factor.value)
            }
            TableRequest::Compare { first, second } if first.value == subject => {
                out.push(first.value.clone());
                out.push(second.value.clone());
                None
            }
            _ => None,
        };
        if let Some(f) = factor {
            let levels = a
                .end
                .model(subject)
                .and_then(|m| m.vars.as_ref())
                .and_then(|v| v.iter().find(|v| v.name == *f))
                .map(|v| v.levels.clone())
                .unwrap_or_default();
            for l in levels {
                if !out.contains(&l) {
                    out.push(l);
                }
            }
        }
    }
    out
}
