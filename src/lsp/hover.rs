//! Hover: what a name stands for. A model shows its formula, its data set and the rows it is
//! fitted to (counted from complete cases by the renderer's own data statements, not by fitting
//! it); a column its type, missing count and levels; a live reference the value the last
//! rendering on disk shows for it.

use lsp_types::{Hover, HoverContents, MarkupContent, MarkupKind};

use crate::document;
use crate::lang::{Span, StatementKind};
use crate::world::{FsWorld, World};

use super::analysis::{Analysis, State};
use super::data::{rows_used, DataCache, FileDigest, Lookup};
use super::names::{NameUse, Role};
use super::position::{Encoding, Lines};

/// Data files are read again for the rows a model uses only up to this size in all: beyond it
/// a hover would take noticeably long (the renderer reads about 300 MB/s).
pub const HOVER_READ_LIMIT: u64 = 16 << 20;

/// Levels a hover lists before it says how many more there are.
const LISTED_LEVELS: usize = 20;

/// What a hover shows, and over which words.
#[derive(Debug, Clone, PartialEq)]
pub struct Shown {
    /// The words hovered, in the text as given.
    pub span: Span,
    /// Markdown.
    pub text: String,
}

impl Shown {
    pub fn to_lsp(&self, a: &Analysis, enc: Encoding) -> Hover {
        Hover {
            contents: HoverContents::Markup(MarkupContent {
                kind: MarkupKind::Markdown,
                value: self.text.clone(),
            }),
            range: Some(Lines::new(&a.text).range(&a.text, self.span, enc)),
        }
    }
}

/// What to show for the place `at` (a byte offset in the text as given).
pub fn hover(a: &Analysis, data: &mut DataCache, at: usize) -> Option<Shown> {
    let doc = a.document.as_ref()?;
    let at_source = a.to_source(at);
    if a.block_at(at_source).is_none() {
        let r = doc
            .references
            .iter()
            .find(|r| r.start <= at_source && at_source < r.end)?;
        return Some(Shown {
            span: a.span_to_given(Span {
                start: r.start,
                end: r.end,
            }),
            text: reference_value(a, data, &r.text),
        });
    }
    if let Some((span, name)) = parameter_at(a.source(), at_source) {
        let value = a.params.get(&name)?;
        let text = match value {
            crate::lang::Literal::Number(_, t) => t.clone(),
            crate::lang::Literal::Text(t) => format!("\"{t}\""),
        };
        return Some(Shown {
            span: a.span_to_given(span),
            text: format!("**parameter `{name}`** = {text} (the document's default; `--set {name}=VALUE` changes it for a run)", text = crate::report::markdown::code(&text)),
        });
    }
    let u = a
        .uses
        .iter()
        .find(|u| u.span.start <= at_source && at_source <= u.span.end)?;
    let state = a.state_before(u.span.end, data);
    let text = match &u.role {
        Role::Model | Role::ModelDef => model_text(a, data, &state, &u.name)?,
        Role::Column => column_text(&state, None, &u.name)?,
        Role::ModelFactor | Role::ModelCovariate => {
            let ds = state.model(&u.context).and_then(|m| m.data_set);
            column_text(&state, ds, &u.name)?
        }
        Role::DataSet | Role::DataSetDef => data_set_text(&state, &u.name)?,
        Role::File => {
            let name = state
                .data_sets
                .iter()
                .rev()
                .find(|d| d.def == u.span || d.path == u.name)
                .map(|d| d.name.clone())?;
            data_set_text(&state, &name)?
        }
        Role::Level | Role::ModelLevel { .. } => level_text(&state, u)?,
        Role::Plan | Role::PlanDef => {
            let text = a.statements().find_map(|s| match &s.kind {
                StatementKind::Plan(decl) if decl.name.value == u.name => Some(s.text.clone()),
                _ => None,
            })?;
            format!(
                "**plan {}**: {text}",
                crate::report::markdown::code(&u.name),
                text = crate::report::markdown::code(&text)
            )
        }
        Role::ParamDef => {
            let v = a.params.get(&u.name)?;
            format!(
                "**parameter {}** = {}",
                crate::report::markdown::code(&u.name),
                crate::report::markdown::code(v.as_text())
            )
        }
    };
    Some(Shown {
        span: a.span_to_given(u.span),
        text,
    })
}

/// A `@NAME` at `at` in `source`: its span and name.
pub fn parameter_at(source: &str, at: usize) -> Option<(Span, String)> {
    let is_name = |c: char| c.is_alphanumeric() || c == '_' || c == '.';
    let at = super::position::floor_boundary(source, at);
    let start = source[..at]
        .char_indices()
        .rev()
        .take_while(|(_, c)| is_name(*c) || *c == '@')
        .last()
        .map_or(at, |(i, _)| i);
    let at_sign = source[start..at].rfind('@').map(|i| start + i)?;
    let end = source[at_sign + 1..]
        .char_indices()
        .find(|(_, c)| !is_name(*c))
        .map_or(source.len(), |(i, _)| at_sign + 1 + i);
    let name = &source[at_sign + 1..end];
    if name.is_empty() || at > end {
        return None;
    }
    Some((
        Span {
            start: at_sign,
            end,
        },
        name.to_string(),
    ))
}

fn model_text(a: &Analysis, data: &mut DataCache, state: &State, name: &str) -> Option<String> {
    let m = state.model(name)?;
    let formula = m
        .statement
        .text
        .split_once(':')
        .map_or(m.statement.text.as_str(), |(_, f)| f.trim());
    let ds = m.data_set.and_then(|i| state.data_sets.get(i));
    let mut text = format!(
        "**model {}**: {formula}",
        crate::report::markdown::code(&m.name),
        formula = crate::report::markdown::code(formula)
    );
    if let Some(ds) = ds {
        text.push_str(&format!(
            "\n\ndata set {} (\"{}\")",
            crate::report::markdown::code(&ds.name),
            ds.path
        ));
    }
    text.push_str(&format!("\n\n{}", rows_text(a, data, state, name)));
    Some(text)
}

/// "rows used: N of M" for a model, or why it is not counted.
fn rows_text(a: &Analysis, data: &mut DataCache, state: &State, name: &str) -> String {
    let Some(m) = state.model(name) else {
        return String::new();
    };
    let Some(vars) = &m.vars else {
        return "rows used: not known until its data are read".to_string();
    };
    let Some(folder) = a.folder() else {
        return String::new();
    };
    let before: Vec<&crate::lang::Statement> = a
        .statements()
        .take_while(|s| s.span.start < m.statement.span.start)
        .collect();
    // Every file the statements before it load is read again: only when each is read already
    // (so its size is known) and all together are small.
    let mut bytes = 0u64;
    let mut markers: Vec<String> = Vec::new();
    for stmt in &before {
        match &stmt.kind {
            StatementKind::Missing { markers: m } => markers = m.clone(),
            StatementKind::Load { path, clauses, .. } => {
                match data.lookup(folder, &path.value, clauses, &markers) {
                    Lookup::Ready(s) => bytes += s.bytes,
                    _ => return "rows used: not known until its data are read".to_string(),
                }
            }
            // The language server never connects to a database.
            StatementKind::LoadDatabase { .. } => {
                return "rows used: not known here for data from a database (`covey render` tells them)".to_string()
            }
            _ => {}
        }
    }
    if bytes > HOVER_READ_LIMIT {
        return format!(
            "rows used: not counted here for data over {} MiB (`covey render` tells them)",
            HOVER_READ_LIMIT >> 20
        );
    }
    let mut columns = vec![m.response.clone()];
    columns.extend(vars.iter().map(|v| v.name.clone()));
    match rows_used(folder, data.allow_outside(), &before, &columns) {
        Some((used, total)) if used == total => format!("rows used: all {total}"),
        Some((used, total)) => format!(
            "rows used: {used} of {total} ({} left out for a missing value)",
            total - used
        ),
        None => "rows used: not counted (a data statement before it fails)".to_string(),
    }
}

fn column_text(state: &State, data_set: Option<usize>, name: &str) -> Option<String> {
    let ds = match data_set {
        Some(i) => state.data_sets.get(i)?,
        None => state.current()?,
    };
    if ds.shape.is_none() {
        return Some(format!(
            "**column {name}** of data set {} (its file \"{}\" is not read yet, or cannot be read)",
            crate::report::markdown::code(&ds.name),
            ds.path,
            name = crate::report::markdown::code(name)
        ));
    }
    let kind = ds.kind_of(name)?;
    let mut text = format!(
        "**column {name}** of data set {}: {kind}",
        crate::report::markdown::code(&ds.name),
        name = crate::report::markdown::code(name)
    );
    if let Some(s) = ds.summary.as_ref() {
        if let Some(c) = s.column(name) {
            text.push_str(&format!(", {} missing of {} rows", c.missing, s.rows));
            if ds.filtered {
                text.push_str(" in the file");
            }
        }
    }
    if let Some(levels) = ds.levels(name) {
        let numeric_values = kind == "numeric";
        let shown: Vec<String> = levels
            .iter()
            .take(LISTED_LEVELS)
            .map(|l| crate::report::markdown::code(l).to_string())
            .collect();
        let more = levels.len().saturating_sub(LISTED_LEVELS);
        let what = if numeric_values {
            "distinct values"
        } else {
            "levels"
        };
        text.push_str(&format!(
            "\n\n{} {what}: {}{}",
            levels.len(),
            shown.join(", "),
            if more > 0 {
                format!(" and {more} more")
            } else {
                String::new()
            }
        ));
    }
    Some(text)
}

fn data_set_text(state: &State, name: &str) -> Option<String> {
    let ds = state.data_sets.iter().find(|d| d.name == name)?;
    let mut text = format!(
        "**data set {}** from \"{}\"",
        crate::report::markdown::code(&ds.name),
        ds.path
    );
    match &ds.summary {
        Some(s) => {
            let cols: Vec<String> = s
                .columns
                .iter()
                .map(|c| crate::report::markdown::code(&c.name).to_string())
                .collect();
            text.push_str(&format!(
                ": {} rows, {} columns ({})",
                s.rows,
                s.columns.len(),
                cols.join(", ")
            ));
        }
        None => text.push_str(" (not read)"),
    }
    Some(text)
}

fn level_text(state: &State, u: &NameUse) -> Option<String> {
    let ds = state.current()?;
    let line = ds
        .summary
        .as_ref()
        .and_then(|s| s.column(&u.context))
        .and_then(|c| c.levels.as_ref())
        .and_then(|l| l.iter().find(|(v, _)| *v == u.name))
        .map(|(_, line)| *line);
    Some(match line {
        Some(line) => format!(
            "**{}**: a value of {}, first on line {line} of \"{}\"",
            crate::report::markdown::code(&u.name),
            crate::report::markdown::code(&u.context),
            ds.path
        ),
        None => format!(
            "**{}**: not a value of {} in \"{}\"",
            crate::report::markdown::code(&u.name),
            crate::report::markdown::code(&u.context),
            ds.path
        ),
    })
}

/// The value the last rendering shows for a reference: the document's own value regions (when
/// it was rendered in place), else `NAME.rendered.md` beside it, read through the same confined
/// access as data files. The value is told as out of date when the rendering was made from
/// other covey blocks, or from other data than the files it records now hold.
fn reference_value(a: &Analysis, data: &mut DataCache, reference: &str) -> String {
    let find = |text: &str| {
        document::rendered_values(text)
            .into_iter()
            .find(|(r, _)| r == reference)
            .map(|(_, v)| v)
    };
    if let Some(v) = find(&a.text) {
        let (notes, more) = data_notes(a, data, &a.text, Vec::new());
        return format!(
            "{reference} = {v}\n\n(value in this document's last rendering in place{}){more}",
            joined(&notes),
            reference = crate::report::markdown::code(reference)
        );
    }
    let rendered = a.path.as_ref().and_then(|p| {
        let folder = p.parent()?;
        let file = crate::files::rendered_path(p, None)
            .file_name()?
            .to_string_lossy()
            .into_owned();
        let bytes = FsWorld::new(folder, false).read(&file).ok()?;
        Some((file, String::from_utf8_lossy(&bytes).into_owned()))
    });
    match rendered {
        Some((file, text)) => match find(&text) {
            Some(v) => {
                // The rendering is of other blocks when the document has been edited since:
                // its value may be out of date.
                let codes = |d: &document::Document| -> Vec<String> {
                    d.blocks.iter().map(|b| b.code.clone()).collect()
                };
                let same = match (&a.document, document::parse(&text)) {
                    (Some(now), Ok(then)) => codes(now) == codes(&then),
                    _ => false,
                };
                let mut notes = Vec::new();
                if !same {
                    notes.push("made before the covey blocks were last changed");
                }
                let (notes, more) = data_notes(a, data, &text, notes);
                format!(
                    "{reference} = {v}\n\n(value in the last rendering, \"{file}\"{}){more}",
                    joined(&notes),
                    reference = crate::report::markdown::code(reference)
                )
            }
            None => format!(
                "{reference}: not rendered yet (\"{file}\" does not show it)",
                reference = crate::report::markdown::code(reference)
            ),
        },
        None => format!(
            "{reference}: not rendered yet",
            reference = crate::report::markdown::code(reference)
        ),
    }
}

/// The notes of [`reference_value`] after the rendering's name: ", NOTE and NOTE: render again
/// for the current value", or nothing.
fn joined(notes: &[&str]) -> String {
    if notes.is_empty() {
        return String::new();
    }
    format!(
        ", {}: render again for the current value",
        notes.join(" and ")
    )
}

/// `notes`, with a note when the rendering `text` was made from other data than its files now
/// hold: a file the document loads whose rows in the rendering's provenance region lack the
/// file's current SHA-256. A file the region does not list, or that cannot be read, is not
/// compared; one larger than [`HOVER_READ_LIMIT`] and not read yet is said to be left
/// uncompared, in the paragraph returned beside the notes.
fn data_notes(
    a: &Analysis,
    data: &mut DataCache,
    text: &str,
    mut notes: Vec<&'static str>,
) -> (Vec<&'static str>, String) {
    let provenance = document::split_rendered(text)
        .ok()
        .and_then(|r| r.provenance);
    let (Some(provenance), Some(folder)) = (provenance, a.folder()) else {
        return (notes, String::new());
    };
    let mut changed = false;
    let mut too_large = false;
    for stmt in a.statements() {
        let StatementKind::Load { path, .. } = &stmt.kind else {
            continue;
        };
        // The rows of its file in the table of inputs: "| `PATH` |", or "| `PATH`, PART |".
        let cell = format!("| {}", crate::report::markdown::code_in_cell(&path.value));
        let rows: Vec<&str> = provenance
            .lines()
            .filter(|l| {
                l.strip_prefix(&cell)
                    .is_some_and(|rest| rest.starts_with(" |") || rest.starts_with(", "))
            })
            .collect();
        if rows.is_empty() {
            continue;
        }
        match data.digest(folder, &path.value, HOVER_READ_LIMIT) {
            FileDigest::Known(hex) => {
                if !rows
                    .iter()
                    .any(|r| r.contains(&crate::report::markdown::code(&hex).to_string()))
                {
                    changed = true;
                }
            }
            FileDigest::TooLarge => too_large = true,
            FileDigest::Unreadable => {}
        }
    }
    if changed {
        notes.push("made from other data than the files now hold");
        (notes, String::new())
    } else if too_large {
        let more = format!(
            "\n\n(data files over {} MiB are not compared with the rendering here: `covey check` tells whether it is current)",
            HOVER_READ_LIMIT >> 20
        );
        (notes, more)
    } else {
        (notes, String::new())
    }
}
