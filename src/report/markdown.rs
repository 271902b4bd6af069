//! Items as GitHub-flavoured Markdown.

use super::number::{format_column, MISSING};
use super::visible::visible;
use super::{Cell, Format, InputRecord, Item, Table};

/// The caution every rendered document carries.
pub const CAUTION: &str = "*Caution.* These results support, and do not replace, review by a \
qualified statistician. Decisions about health, clinical care or safety follow the applicable \
guidelines and local regulations.";

/// Escapes text for a Markdown paragraph (a sentence, a caption, alternative text): hidden
/// characters are made visible ([`super::visible`]), and every ASCII punctuation character
/// that Markdown or HTML could read as syntax gets a backslash, so a column called `<script>`
/// shows as written and can never form raw HTML, a link or a covey marker.
///
/// Each context a name can stand in has its own function here ([`escape`], [`cell`],
/// [`code`], [`code_in_cell`], [`destination`]), so that what each one must escape can be
/// decided on its own.
pub fn escape(text: &str) -> String {
    let text = visible(text);
    let mut out = String::with_capacity(text.len() + 8);
    for c in text.chars() {
        match c {
            '\\' | '`' | '*' | '_' | '{' | '}' | '[' | ']' | '<' | '>' | '(' | ')' | '#' | '+'
            | '-' | '!' | '|' | '&' | '~' | '"' | '$' => {
                out.push('\\');
                out.push(c);
            }
            c => out.push(c),
        }
    }
    out
}

/// Escapes text for a cell of a GitHub-flavoured table: as [`escape`], which also gives `|`,
/// the cell separator, its backslash.
pub fn cell(text: &str) -> String {
    escape(text)
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

/// Inline code for a name the user wrote (a column, a level, a file) in a paragraph: hidden
/// characters made visible, a fence longer than any backtick run inside, and padding where
/// CommonMark would otherwise eat a backtick or a space at either end, so any name shows
/// exactly as written.
pub fn code(text: &str) -> String {
    let clean = visible(text);
    let longest = longest_run(&clean, '`');
    let fence = "`".repeat(longest + 1);
    // CommonMark strips one space from both ends of a code span that begins and ends with one
    // (unless it is all spaces); a space of padding on each side keeps the name's own.
    let spaced = clean.starts_with(' ') && clean.ends_with(' ') && clean.trim() != "";
    let pad = if clean.starts_with('`') || clean.ends_with('`') || clean.is_empty() || spaced {
        " "
    } else {
        ""
    };
    format!("{fence}{pad}{clean}{pad}{fence}")
}

/// A name in a table cell, in code style where that can show it exactly: a GitHub table takes
/// `\|` inside a code span as a `|` of the span (every other `|` ends the cell). A name with
/// a backslash right before a `|` cannot be written so (the backslash would be taken with the
/// pipe), and is escaped as text instead ([`cell`]).
pub fn code_in_cell(text: &str) -> String {
    let clean = visible(text);
    if clean.contains("\\|") {
        return cell(&clean);
    }
    code(&clean).replace('|', "\\|")
}

/// Characters a link destination keeps as they are: ASCII letters and digits, `-`, `.`, `_`,
/// `~` (unreserved in URLs) and `/`, which separates the folder from the file.
const DESTINATION_KEEPS: &percent_encoding::AsciiSet = &percent_encoding::NON_ALPHANUMERIC
    .remove(b'-')
    .remove(b'.')
    .remove(b'_')
    .remove(b'~')
    .remove(b'/');

/// A relative file path as the destination of a Markdown link or image: every other byte of
/// its UTF-8 is percent-encoded, so a space, parentheses, `<`, `#`, `%`, `:` or a non-ASCII
/// letter in a document's name can neither end the destination early nor make it a fragment,
/// a query or an address with a scheme. A reader decoding it gets the path back.
///
/// ```
/// use covey::report::markdown::destination;
/// assert_eq!(
///     destination("my doc (2) #1 é.figures/block1-1.svg"),
///     "my%20doc%20%282%29%20%231%20%C3%A9.figures/block1-1.svg"
/// );
/// ```
pub fn destination(path: &str) -> String {
    percent_encoding::utf8_percent_encode(path, DESTINATION_KEEPS).to_string()
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
            .map(|value| match value {
                Cell::Text(s) => cell(s),
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
                *slot = cell(s);
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
        out.push_str(&format!(" {} |", cell(&c.header)));
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
                destination(&f.file)
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
        let with_rows = inputs.iter().any(|i| i.rows_sha256.is_some() || i.database);
        if with_rows {
            out.push_str(
                "| input | rows | columns | SHA-256 | rows SHA-256 |\n| :-- | --: | --: | :-- | :-- |\n",
            );
        } else {
            out.push_str("| input | rows | columns | SHA-256 |\n| :-- | --: | --: | :-- |\n");
        }
        for i in inputs {
            let mut name = if i.database {
                format!("database {}", code_in_cell(&i.path))
            } else {
                code_in_cell(&i.path)
            };
            if let Some(part) = &i.part {
                name.push_str(", ");
                name.push_str(&code_in_cell(part));
            }
            let (file, rows) = match (i.database, &i.rows_sha256) {
                (true, _) => ("—".to_string(), format!("`{}`", i.sha256)),
                (false, Some(r)) => (format!("`{}`", i.sha256), format!("`{r}`")),
                (false, None) => (format!("`{}`", i.sha256), "—".to_string()),
            };
            if with_rows {
                out.push_str(&format!(
                    "| {name} | {} | {} | {file} | {rows} |\n",
                    i.rows, i.columns
                ));
            } else {
                out.push_str(&format!(
                    "| {name} | {} | {} | {file} |\n",
                    i.rows, i.columns
                ));
            }
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
