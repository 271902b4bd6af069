//! Items as GitHub-flavoured Markdown.

use super::number::{format_column, MISSING};
use super::{Cell, Format, InputRecord, Item, Table};

/// The caution every rendered document carries.
pub const CAUTION: &str = "*Caution.* These results support, and do not replace, review by a \
qualified statistician. Decisions about health, clinical care or safety follow the applicable \
guidelines and local regulations.";

/// Escapes text for a Markdown paragraph or table cell: every ASCII
/// punctuation character that Markdown or HTML could read as syntax gets a
/// backslash, and line breaks become spaces, so a column called
/// `<script>` or `a|b` shows as written and can never form a covey marker.
pub fn escape(text: &str) -> String {
    let mut out = String::with_capacity(text.len() + 8);
    for c in text.chars() {
        match c {
            '\\' | '`' | '*' | '_' | '{' | '}' | '[' | ']' | '<' | '>' | '(' | ')' | '#' | '+'
            | '-' | '!' | '|' | '&' | '~' | '"' | '$' => {
                out.push('\\');
                out.push(c);
            }
            '\r' | '\n' => out.push(' '),
            c if c.is_control() => out.push('\u{fffd}'),
            c => out.push(c),
        }
    }
    out
}

/// Plain text from covey's own escaped Markdown, for the terminal: drops
/// the backslash before escaped punctuation.
pub fn plain(markdown: &str) -> String {
    let mut out = String::with_capacity(markdown.len());
    let mut chars = markdown.chars().peekable();
    while let Some(c) = chars.next() {
        if c == '\\' {
            if let Some(&n) = chars.peek() {
                if n.is_ascii_punctuation() {
                    out.push(n);
                    chars.next();
                    continue;
                }
            }
        }
        out.push(c);
    }
    out
}

/// Inline code for a name the user wrote (a column, a level, a file): the
/// fence is longer than any backtick run inside, so any name survives.
pub fn code(text: &str) -> String {
    let clean: String = text
        .chars()
        .map(|c| if c.is_control() { ' ' } else { c })
        .collect();
    let longest = longest_run(&clean, '`');
    let fence = "`".repeat(longest + 1);
    let pad = if clean.starts_with('`') || clean.ends_with('`') || clean.is_empty() {
        " "
    } else {
        ""
    };
    format!("{fence}{pad}{clean}{pad}{fence}")
}

fn longest_run(text: &str, ch: char) -> usize {
    let (mut best, mut run) = (0, 0);
    for c in text.chars() {
        if c == ch {
            run += 1;
            best = best.max(run);
        } else {
            run = 0;
        }
    }
    best
}

/// The cells of column `j` of a table as its Markdown shows them (empty when there is no such
/// column): text escaped, numbers formatted by the column's [`Format`].
pub fn formatted_column(t: &Table, j: usize) -> Vec<String> {
    let Some(c) = t.columns.get(j) else {
        return Vec::new();
    };
    let cells = t.rows.iter().map(|r| r.get(j).unwrap_or(&Cell::Missing));
    if c.format == Format::Text {
        cells
            .map(|cell| match cell {
                Cell::Text(s) => escape(s),
                Cell::Number(x) => super::number::exact(Some(*x)),
                Cell::Missing => MISSING.to_string(),
            })
            .collect()
    } else {
        // Text cells in a numeric column (rare: a label row) keep their text.
        let nums: Vec<Option<f64>> = t
            .rows
            .iter()
            .map(|r| match r.get(j) {
                Some(Cell::Number(x)) => Some(*x),
                _ => None,
            })
            .collect();
        let mut f = format_column(&nums, c.format);
        for (i, r) in t.rows.iter().enumerate() {
            if let (Some(Cell::Text(s)), Some(slot)) = (r.get(j), f.get_mut(i)) {
                *slot = escape(s);
            }
        }
        f
    }
}

/// A table with its caption and notes. Numbers are right-aligned, text
/// left-aligned.
pub fn table(t: &Table) -> String {
    let cols: Vec<Vec<String>> = (0..t.columns.len())
        .map(|j| formatted_column(t, j))
        .collect();
    let mut out = String::new();
    out.push_str(&format!("**{}**\n\n", t.caption));
    out.push('|');
    for c in &t.columns {
        out.push_str(&format!(" {} |", escape(&c.header)));
    }
    out.push_str("\n|");
    for c in &t.columns {
        out.push_str(if c.format == Format::Text {
            " :-- |"
        } else {
            " --: |"
        });
    }
    out.push('\n');
    for i in 0..t.rows.len() {
        out.push('|');
        for col in &cols {
            out.push_str(&format!(
                " {} |",
                col.get(i).map_or(MISSING, String::as_str)
            ));
        }
        out.push('\n');
    }
    for n in &t.notes {
        out.push_str(&format!("\n*Note.* {n}\n"));
    }
    out
}

/// The body of a block's output region: every item of every statement.
pub fn block_body<'a>(items: impl IntoIterator<Item = &'a Item>) -> String {
    let mut out = String::from("\n");
    for item in items {
        match item {
            Item::Table(t) => out.push_str(&table(t)),
            Item::Text(s) => out.push_str(&format!("{s}\n")),
            Item::Warning(s) => out.push_str(&format!("**Warning:** {s}\n")),
            Item::GateFailed(s) => out.push_str(&format!("> **STOP.** {s}\n")),
            Item::Figure(f) => out.push_str(&format!(
                "**{}**\n\n![{}]({})\n",
                escape(&f.caption),
                escape(&f.alt),
                f.file
            )),
            Item::Error { message, snippet } => {
                let fence = "`".repeat(longest_run(snippet, '`').max(2) + 1);
                out.push_str(&format!(
                    "**Error:** {}\n\n{fence}text\n{}{}{fence}\n",
                    escape(message),
                    snippet,
                    if snippet.ends_with('\n') { "" } else { "\n" }
                ));
            }
        }
        out.push('\n');
    }
    out
}

/// The body of the provenance region at the top of a rendered document.
pub fn provenance(
    version: &str,
    document: &str,
    inputs: &[InputRecord],
    notices: &[String],
) -> String {
    let mut out = String::new();
    out.push_str(&format!(
        "\n**Rendered by covey {version}** from {}. Everything between covey's markers is \
         generated and is replaced at the next render.\n\n",
        code(document)
    ));
    for n in notices {
        out.push_str(&format!("{n}\n\n"));
    }
    if inputs.is_empty() {
        out.push_str("No data files were read.\n\n");
    } else {
        out.push_str("| input | rows | columns | SHA-256 |\n| :-- | --: | --: | :-- |\n");
        for i in inputs {
            out.push_str(&format!(
                "| {} | {} | {} | `{}` |\n",
                code(&i.path),
                i.rows,
                i.columns,
                i.sha256
            ));
        }
        out.push('\n');
    }
    out.push_str(CAUTION);
    out.push_str("\n\n");
    out
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::report::Column;

    #[test]
    fn escaping_defuses_markup_and_markers() {
        assert_eq!(escape("<script>"), "\\<script\\>");
        assert_eq!(escape("a|b"), "a\\|b");
        assert!(!escape("<!-- covey:output -->").contains("<!--"));
    }

    #[test]
    fn code_spans_survive_backticks() {
        assert_eq!(code("a`b"), "``a`b``");
        assert_eq!(code("`x"), "`` `x ``");
    }

    #[test]
    fn tables_align_numbers_right() {
        let mut t = Table::new(
            "summary",
            "Demo",
            vec![
                Column::new("level", "level", Format::Text),
                Column::new("mean", "mean", Format::Digits(4)),
            ],
        );
        t.push(vec!["A".into(), 1.5.into()]);
        t.push(vec!["B".into(), 12.25.into()]);
        let md = table(&t);
        assert!(md.contains("| :-- | --: |"), "{md}");
        assert!(md.contains("| A | 1.50 |"), "{md}");
        assert!(md.contains("| B | 12.25 |"), "{md}");
    }
}
