//! Items as GitHub-flavoured Markdown.

use super::number::{format_column, MISSING};
use super::visible::visible;
use super::{Cell, Format, InputRecord, Item, Table};

/// The caution every rendered document carries.
pub const CAUTION: &str = "*Caution.* These results support, and do not replace, review by a \
qualified statistician. Decisions about health, clinical care or safety follow the applicable \
guidelines and local regulations.";

/// Escapes text for a Markdown paragraph (a sentence, a caption, alternative text): hidden
/// characters are made visible ([`super::visible`]), and a backslash goes only before what
/// GitHub-flavoured Markdown would otherwise read as syntax, so that `height_cm`, `(intercept)`
/// or `Shapiro-Wilk` stay as written in the raw text while a column called `<script>`, `*a*` or
/// `[x](y)` still shows as written and can never form raw HTML, emphasis, a link or a covey
/// marker:
///
/// - always: `` ` `` (code), `[` and `]` (links, images, footnotes; `@[` a live reference),
///   `$` (GitHub's mathematics);
/// - `\` before punctuation, white space or the end (where the text that follows could be
///   punctuation);
/// - `*`, `_` and `~` unless their run cannot open or close emphasis or strikethrough: `*` and
///   `~` between spaces, `_` between spaces or between letters or digits (`height_cm`);
/// - `<` where an HTML tag, comment or autolink could start (`<b`, `</`, `<!`, `<?`,
///   `<http:`, `<a@`), but not in `<U+202E>`;
/// - `&` where a character reference could start (`&amp;`, `&#32;`);
/// - at the start, what would begin a block if the text began a line: a heading's `#`, a
///   quote's `>`, a list's `-`, `+` or `1.`, a line of `=` or `-`; and a `^`, which after
///   the `[` of alternative text would make a footnote reference;
/// - a space at either end is written as a character reference (`&#32;`), which no reader
///   trims and which cannot keep a `**` around the text from opening or closing.
///
/// Each context a name can stand in has its own function here ([`escape`], [`cell`],
/// [`code`], [`code_in_cell`], [`destination`], [`message`]), so that what each one must
/// escape can be decided on its own.
///
/// ```
/// use covey::report::markdown::escape;
/// assert_eq!(escape("height_cm (intercept) Shapiro-Wilk"), "height_cm (intercept) Shapiro-Wilk");
/// assert_eq!(escape("<b>*x*</b> [y]"), r"\<b>\*x\*\</b> \[y\]");
/// assert_eq!(escape("<U+202E>evil"), "<U+202E>evil");
/// ```
pub fn escape(text: &str) -> String {
    inline(&visible(text), Place::Text, true, true)
}

/// Escapes text for a cell of a GitHub-flavoured table: as [`escape`], and `|`, the cell
/// separator, gets its backslash too. A cell is read as inline text only, so nothing at its
/// start can begin a block.
pub fn cell(text: &str) -> String {
    inline(&visible(text), Place::Cell, true, true)
}

/// A message of covey's own in plain text whose names stand in code spans (`` `name` ``, as
/// the model's warnings and notes write them) as Markdown: each code span through [`code`],
/// the words between through [`escape`]. A message whose backticks do not pair up is escaped
/// as text.
///
/// ```
/// use covey::report::markdown::message;
/// assert_eq!(message("the test of `a_b` compares *groups*"), r"the test of `a_b` compares \*groups\*");
/// ```
pub fn message(text: &str) -> String {
    let Some(pieces) = code_spans(text) else {
        return escape(text);
    };
    let last = pieces.len().saturating_sub(1);
    let mut out = String::with_capacity(text.len() + 8);
    for (k, piece) in pieces.iter().enumerate() {
        match piece {
            Piece::Words(w) => out.push_str(&inline(&visible(w), Place::Text, k == 0, k == last)),
            Piece::Code(c) => out.push_str(&code(c)),
        }
    }
    out
}

/// A stretch of a plain message: words, or the content of a code span.
enum Piece<'t> {
    Words(&'t str),
    Code(String),
}

/// The message cut at its code spans by CommonMark's rule (a run of backticks opens one and
/// the next run of the same length closes it; one space is stripped from both ends of a
/// content that has one at each and is not all spaces), or `None` when a run is left open.
fn code_spans(text: &str) -> Option<Vec<Piece<'_>>> {
    let bytes = text.as_bytes();
    let run_at = |i: usize| bytes[i..].iter().take_while(|&&b| b == b'`').count();
    let mut pieces = Vec::new();
    let (mut i, mut words) = (0, 0);
    while i < bytes.len() {
        if bytes[i] != b'`' {
            i += 1;
            continue;
        }
        let open = run_at(i);
        let mut j = i + open;
        let close = loop {
            if j >= bytes.len() {
                return None;
            }
            if bytes[j] == b'`' {
                let run = run_at(j);
                if run == open {
                    break j;
                }
                j += run;
            } else {
                j += 1;
            }
        };
        if words < i {
            pieces.push(Piece::Words(text.get(words..i)?));
        }
        let inner = text.get(i + open..close)?;
        let inner = match inner.strip_prefix(' ').and_then(|s| s.strip_suffix(' ')) {
            Some(s) if !inner.trim_matches(' ').is_empty() => s,
            _ => inner,
        };
        pieces.push(Piece::Code(inner.to_string()));
        i = close + open;
        words = i;
    }
    if words < bytes.len() {
        pieces.push(Piece::Words(text.get(words..)?));
    }
    Some(pieces)
}

/// Where escaped text stands.
#[derive(Clone, Copy, PartialEq, Eq)]
enum Place {
    /// In a paragraph (and possibly at the start of a line).
    Text,
    /// In a table cell.
    Cell,
}

/// The escaping of [`escape`] and [`cell`] for text already made visible. `start` and `end`
/// say whether the text's first and last characters are the first and last of what is
/// written (so that spaces there would be trimmed, and the start could begin a line); the
/// characters around the text are taken as unknown, so a delimiter next to them is escaped.
fn inline(text: &str, place: Place, start: bool, end: bool) -> String {
    let chars: Vec<char> = text.chars().collect();
    let n = chars.len();
    let at = |i: usize| chars.get(i).copied();
    let mut out = String::with_capacity(text.len() + 8);
    let mut i = 0;
    while i < n {
        let c = chars[i];
        // A run of one delimiter character, and the characters on either side of it.
        let run_end = (i..n).find(|&j| chars[j] != c).unwrap_or(n);
        let before = i.checked_sub(1).and_then(&at);
        let after = at(run_end);
        let escaped = match c {
            c if c.is_whitespace() && ((start && i == 0) || (end && i + 1 == n)) => {
                out.push_str(&format!("&#{};", u32::from(c)));
                i += 1;
                continue;
            }
            '`' | '[' | ']' | '$' => true,
            // Right after a `[` of the text around (alternative text), `^` would make a
            // footnote reference.
            '^' => start && i == 0,
            '|' => place == Place::Cell,
            // Before white space too: a space at the end becomes a character reference,
            // whose `&` a backslash would escape.
            '\\' => after_is(at(i + 1), |a| a.is_ascii_punctuation() || a.is_whitespace()),
            '*' | '~' | '_' => {
                let spaced = before == Some(' ') && after == Some(' ');
                let inside_word = c == '_'
                    && before.is_some_and(char::is_alphanumeric)
                    && after.is_some_and(char::is_alphanumeric);
                if spaced || inside_word {
                    out.extend(&chars[i..run_end]);
                } else {
                    for d in &chars[i..run_end] {
                        out.push('\\');
                        out.push(*d);
                    }
                }
                i = run_end;
                continue;
            }
            '<' => opens_html(&chars[i + 1..]),
            '&' => opens_reference(&chars[i + 1..]),
            _ => place == Place::Text && start && i == 0 && begins_block(&chars),
        };
        if escaped {
            out.push('\\');
        }
        out.push(c);
        // An ordered list's `1.` or `1)`: the delimiter after the digits is escaped instead.
        if place == Place::Text && start && i == 0 && c.is_ascii_digit() {
            let digits = chars.iter().take_while(|d| d.is_ascii_digit()).count();
            let mark = at(digits);
            if digits <= 9
                && matches!(mark, Some('.' | ')'))
                && after_is(at(digits + 1), |a| a == ' ')
            {
                out.extend(&chars[1..digits]);
                out.push('\\');
                out.extend(mark);
                i = digits + 1;
                continue;
            }
        }
        i += 1;
    }
    out
}

/// Whether `next`, the character after something, is missing (the text ends there, and what
/// follows is not known) or satisfies `test`.
fn after_is(next: Option<char>, test: impl Fn(char) -> bool) -> bool {
    next.is_none_or(test)
}

/// Whether the text's first character would begin a block if the text began a line: a
/// heading (`#` to `######` then a space or the end), a quote (`>`), a list item (`-` or `+`
/// then a space or the end), or a line of `=` or `-` alone (a heading's underline or a rule).
fn begins_block(chars: &[char]) -> bool {
    let Some(&first) = chars.first() else {
        return false;
    };
    let at = |i: usize| chars.get(i).copied();
    match first {
        '>' => true,
        '#' => {
            let run = chars.iter().take_while(|&&c| c == '#').count();
            run <= 6 && after_is(at(run), |a| a == ' ')
        }
        '-' | '+' | '=' => {
            let marker = first != '=' && after_is(at(1), |a| a == ' ');
            let line = first != '+' && chars.iter().all(|&c| c == first || c == ' ');
            marker || line
        }
        _ => false,
    }
}

/// Whether `<` followed by `rest` could start raw HTML (a tag, a closing tag, a comment, a
/// processing instruction, a declaration) or an autolink (`<scheme:...>`, `<local@...>`).
/// The text that follows the escaped text is unknown, so running out of characters counts
/// as could.
fn opens_html(rest: &[char]) -> bool {
    let Some(&first) = rest.first() else {
        return true;
    };
    if matches!(first, '/' | '!' | '?') {
        return true;
    }
    // An e-mail autolink: local part, then `@`.
    let local = rest
        .iter()
        .take_while(|c| c.is_ascii_alphanumeric() || ".!#$%&'*+/=?^_`{|}~-".contains(**c))
        .count();
    if local > 0 && matches!(rest.get(local), Some('@') | None) {
        return true;
    }
    if !first.is_ascii_alphabetic() {
        return false;
    }
    // A tag: its name, then a space, `>`, `/` or the end.
    let name = rest
        .iter()
        .take_while(|c| c.is_ascii_alphanumeric() || **c == '-')
        .count();
    if matches!(rest.get(name), None | Some(' ' | '>' | '/')) {
        return true;
    }
    // An autolink's scheme: 2 to 32 letters, digits, `+`, `.` or `-`, then `:`.
    let scheme = rest
        .iter()
        .take_while(|c| c.is_ascii_alphanumeric() || matches!(c, '+' | '.' | '-'))
        .count();
    (2..=32).contains(&scheme) && matches!(rest.get(scheme), Some(':') | None)
}

/// Whether `&` followed by `rest` could start a character reference (`&name;`, `&#123;`,
/// `&#x1F;`): letters, digits or `#` up to a `;` or the end of the text.
fn opens_reference(rest: &[char]) -> bool {
    let body = rest
        .iter()
        .take_while(|c| c.is_ascii_alphanumeric() || **c == '#')
        .count();
    body > 0 && matches!(rest.get(body), Some(';') | None)
}

/// Plain text from covey's own escaped Markdown, for the terminal: drops
/// the backslash before escaped punctuation and writes a space kept as a character
/// reference (`&#32;`) as the character.
pub fn plain(markdown: &str) -> String {
    let mut out = String::with_capacity(markdown.len());
    let mut rest = markdown;
    while let Some(c) = rest.chars().next() {
        let next = rest[c.len_utf8()..].chars().next();
        if c == '\\' && next.is_some_and(|n| n.is_ascii_punctuation()) {
            out.extend(next);
            rest = &rest[1 + next.map_or(0, char::len_utf8)..];
        } else if let Some((kept, after)) = kept_space(rest) {
            out.push(kept);
            rest = after;
        } else {
            out.push(c);
            rest = &rest[c.len_utf8()..];
        }
    }
    out
}

/// A decimal character reference for a white-space character at the start of `text` (as
/// [`inline`] writes one), and the text after it.
fn kept_space(text: &str) -> Option<(char, &str)> {
    let body = text.strip_prefix("&#")?;
    let digits = body.bytes().take_while(u8::is_ascii_digit).count();
    let after = body.get(digits..)?.strip_prefix(';')?;
    let c = char::from_u32(body.get(..digits)?.parse().ok()?)?;
    c.is_whitespace().then_some((c, after))
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
/// column): text escaped, numbers formatted by the column's [`Format`]. The limits of an
/// interval around an estimate show the decimals of the estimate's column, so that `98.30`
/// never stands beside limits `94.9` and `101.7` (common practice: limits are given to the
/// precision of their estimate, which its standard error sets).
pub fn formatted_column(t: &Table, j: usize) -> Vec<String> {
    let own = own_formatted_column(t, j);
    let Some(est) = estimate_of_limit(t, j) else {
        return own;
    };
    let decimals = |cells: &[String]| -> Option<usize> {
        cells.iter().try_fold(0, |most, s| {
            if s.contains(['e', 'E']) {
                return None;
            }
            Some(most.max(s.split_once('.').map_or(0, |(_, d)| d.len())))
        })
    };
    let (Some(wanted), Some(_)) = (decimals(&own_formatted_column(t, est)), decimals(&own)) else {
        return own;
    };
    let formatted = t
        .rows
        .iter()
        .map(|r| match r.get(j) {
            Some(Cell::Number(x)) => super::number::fixed_within_significance(*x, wanted),
            _ => MISSING.to_string(),
        })
        .collect();
    with_text_cells(t, j, formatted)
}

/// For a limit column (`lower` or `upper`) of an interval around an estimate (the `Digits`
/// column just before an `se` column, of the same format): the estimate's column.
fn estimate_of_limit(t: &Table, j: usize) -> Option<usize> {
    let se = t.columns.iter().position(|d| d.key == "se")?;
    let est = se.checked_sub(1)?;
    let format = t.columns.get(est)?.format;
    let c = t.columns.get(j)?;
    let is_limit = c.key == "lower" || c.key == "upper";
    (matches!(format, Format::Digits(_)) && is_limit && c.format == format).then_some(est)
}

/// [`formatted_column`] before the estimate and its limits are given one number of decimals.
fn own_formatted_column(t: &Table, j: usize) -> Vec<String> {
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
        let numbers = |j: usize| -> Vec<Option<f64>> {
            t.rows
                .iter()
                .map(|r| match r.get(j) {
                    Some(Cell::Number(x)) => Some(*x),
                    _ => None,
                })
                .collect()
        };
        let nums = numbers(j);
        // A column in the data's units shows rounding residue as zero beside its class.
        if let Format::Units(sig) = c.format {
            let mut class = Vec::new();
            for (k, d) in t.columns.iter().enumerate() {
                if d.format == Format::Units(sig) {
                    class.extend(numbers(k));
                }
            }
            let f = super::number::units_column(&nums, &class, sig);
            return with_text_cells(t, j, f);
        }
        // The two limits of an interval share one number of decimals: the column and its
        // partner are rounded as one. Beside an SE, a row whose estimate is within one SE
        // of zero asks for no decimals of its own, and every other row for the decimals that
        // reach its SE's leading digit (README, "Numbers as shown").
        let noise = noise_rows(t, j);
        let f = match (limit_partner(t, j), &c.format, &noise) {
            (Some(k), Format::Digits(sig), Some((noise, ses))) => {
                let mut both = nums.clone();
                both.extend(numbers(k));
                let twice: Vec<bool> = noise.iter().chain(noise.iter()).copied().collect();
                let ses_twice: Vec<Option<f64>> = ses.iter().chain(ses.iter()).copied().collect();
                let mut f = super::number::estimate_column(&both, &twice, &ses_twice, *sig);
                f.truncate(nums.len());
                f
            }
            (Some(k), _, _) => {
                let mut both = nums.clone();
                both.extend(numbers(k));
                let mut f = format_column(&both, c.format);
                f.truncate(nums.len());
                f
            }
            (None, Format::Digits(sig), Some((noise, ses))) => {
                super::number::estimate_column(&nums, noise, ses, *sig)
            }
            (None, _, _) => format_column(&nums, c.format),
        };
        with_text_cells(t, j, f)
    }
}

/// `formatted` with the text cells of column `j` (rare in a numeric column: a label row) put
/// back as their text.
fn with_text_cells(t: &Table, j: usize, mut formatted: Vec<String>) -> Vec<String> {
    for (i, r) in t.rows.iter().enumerate() {
        if let (Some(Cell::Text(s)), Some(slot)) = (r.get(j), formatted.get_mut(i)) {
            *slot = cell(s);
        }
    }
    formatted
}

/// The column holding the other limit of the interval whose limit column `j` holds (`lower`
/// and `upper`, `lower_bound` and `upper_bound`), when both have the same format.
/// For an estimate's column (the `Digits` column just before an `se` column) or one of its
/// limits (`lower...`, `upper...`): which rows have an estimate within one standard error of
/// zero, and each row's standard error. `None` for any other column, or a table without
/// standard errors.
type NoiseAndSe = (Vec<bool>, Vec<Option<f64>>);
fn noise_rows(t: &Table, j: usize) -> Option<NoiseAndSe> {
    let se = t.columns.iter().position(|d| d.key == "se")?;
    let est = se.checked_sub(1)?;
    if !matches!(t.columns.get(est)?.format, Format::Digits(_)) {
        return None;
    }
    let key = &t.columns.get(j)?.key;
    if j != est && !key.starts_with("lower") && !key.starts_with("upper") {
        return None;
    }
    Some(
        t.rows
            .iter()
            .map(|r| match (r.get(est), r.get(se)) {
                (Some(Cell::Number(e)), Some(Cell::Number(s))) => (
                    s.is_finite() && *s > 0.0 && e.abs() < *s,
                    Some(*s).filter(|s| s.is_finite() && e.is_finite()),
                ),
                _ => (false, None),
            })
            .unzip(),
    )
}

fn limit_partner(t: &Table, j: usize) -> Option<usize> {
    let c = t.columns.get(j)?;
    let other = match c.key.strip_prefix("lower") {
        Some(rest) => format!("upper{rest}"),
        None => format!("lower{}", c.key.strip_prefix("upper")?),
    };
    t.columns
        .iter()
        .position(|d| d.key == other && d.format == c.format)
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
                    self::message(message),
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

    /// Both limits of an interval share one number of decimals, whatever their sizes (the
    /// issue's case: -50.551 beside 211.9020); other columns keep their own.
    #[test]
    fn interval_limits_share_their_decimals() {
        let mut t = Table::new(
            "demo",
            "Demo",
            vec![
                Column::new("estimate", "estimate", Format::Digits(4)),
                Column::new("lower", "lower", Format::Digits(4)),
                Column::new("upper", "upper", Format::Digits(4)),
                Column::new("lower_bound", "lower bound", Format::Digits(4)),
                Column::new("upper_bound", "upper bound", Format::Digits(4)),
            ],
        );
        t.push(vec![
            80.0.into(),
            (-50.551).into(),
            211.902.into(),
            0.01234.into(),
            1234.5.into(),
        ]);
        t.push(vec![
            0.5.into(),
            1.0.into(),
            2.0.into(),
            0.02.into(),
            Cell::Missing,
        ]);
        let cols: Vec<Vec<String>> = (0..5).map(|j| formatted_column(&t, j)).collect();
        let decimals = |s: &str| s.split_once('.').map_or(0, |(_, d)| d.len());
        for (lower, upper) in [(1, 2), (3, 4)] {
            for (l, u) in cols[lower].iter().zip(&cols[upper]) {
                if u != MISSING {
                    assert_eq!(decimals(l), decimals(u), "{l} | {u}");
                }
            }
        }
        assert_eq!(cols[1], ["-50.6", "1.0"]);
        assert_eq!(cols[2], ["211.9", "2.0"]);
    }

    /// The limits of an interval show their estimate's decimals: a mean of 98.30 once stood
    /// beside limits 94.9 and 101.7, because the limits' largest value passed 100 and so
    /// asked for one decimal fewer.
    #[test]
    fn limits_show_the_decimals_of_their_estimate() {
        let mut t = Table::new(
            "means",
            "Means",
            vec![
                Column::new("level", "level", Format::Text),
                Column::new("mean", "mean", Format::Digits(4)),
                Column::new("se", "SE", Format::Digits(3)),
                Column::new("lower", "lower", Format::Digits(4)),
                Column::new("upper", "upper", Format::Digits(4)),
            ],
        );
        for (mean, lower, upper) in [(85.77, 82.27, 89.27), (98.30, 94.90, 101.70)] {
            t.push(vec![
                Cell::Text("a".into()),
                mean.into(),
                1.6.into(),
                lower.into(),
                upper.into(),
            ]);
        }
        assert_eq!(formatted_column(&t, 1), ["85.77", "98.30"]);
        assert_eq!(formatted_column(&t, 3), ["82.27", "94.90"]);
        assert_eq!(formatted_column(&t, 4), ["89.27", "101.70"]);
        // The SE is not part of the group.
        assert_eq!(formatted_column(&t, 2), ["1.60", "1.60"]);
    }

    #[test]
    fn escaping_defuses_markup_and_markers() {
        assert_eq!(escape("<script>"), "\\<script>");
        assert_eq!(cell("a|b"), "a\\|b");
        assert_eq!(escape("a|b"), "a|b");
        assert_eq!(escape("<!-- covey:output -->"), "\\<!-- covey:output -->");
    }

    /// Only what Markdown would misread gets a backslash (the property test in tests/names.rs
    /// reads every case back with comrak).
    #[test]
    fn escaping_leaves_ordinary_punctuation_alone() {
        for same in [
            "height_cm",
            "(intercept)",
            "Shapiro-Wilk",
            "maize+soy",
            "a * b",
            "x_1_2",
            "R&D lab",
            "back\\slash",
            "<U+202E>evil",
            "5 < 6 > 4",
            "1.5",
            "\"quoted\" & 'single'",
        ] {
            assert_eq!(escape(same), same, "{same}");
        }
        for (raw, escaped) in [
            ("*a*", "\\*a\\*"),
            ("_a_", "\\_a\\_"),
            ("a_ b", "a\\_ b"),
            ("~~x~~", "\\~\\~x\\~\\~"),
            ("`x`", "\\`x\\`"),
            ("[x](y)", "\\[x\\](y)"),
            ("@[means m a mean]", "@\\[means m a mean\\]"),
            ("<b>", "\\<b>"),
            ("</b", "\\</b"),
            ("<http://x>", "\\<http://x>"),
            ("<me@x.org>", "\\<me@x.org>"),
            ("&amp;", "\\&amp;"),
            ("&#35;", "\\&#35;"),
            ("R&D", "R\\&D"),
            ("a\\*", "a\\\\\\*"),
            ("end\\", "end\\\\"),
            ("$5", "\\$5"),
            ("# heading", "\\# heading"),
            ("#1 trial", "#1 trial"),
            ("> quote", "\\> quote"),
            ("- item", "\\- item"),
            ("-1", "-1"),
            ("+ item", "\\+ item"),
            ("1. item", "1\\. item"),
            ("2021) item", "2021\\) item"),
            ("===", "\\==="),
            (" a ", "&#32;a&#32;"),
        ] {
            assert_eq!(escape(raw), escaped, "{raw}");
        }
        // In a cell a line cannot begin, and `|` ends the cell.
        assert_eq!(cell("# 1 | 2"), "# 1 \\| 2");
        assert_eq!(plain(&escape(" *a* ")), " *a* ");
    }

    #[test]
    fn messages_keep_their_code_spans() {
        assert_eq!(
            message("term `grp by x` lacks `x_1`; see (1)"),
            "term `grp by x` lacks `x_1`; see (1)"
        );
        assert_eq!(
            message("level ``a`b`` is *new*"),
            "level ``a`b`` is \\*new\\*"
        );
        assert_eq!(message("an open ` tick"), "an open \\` tick");
    }

    #[test]
    fn code_spans_survive_backticks() {
        assert_eq!(code("a`b"), "``a`b``");
        assert_eq!(code("`x"), "`` `x ``");
    }

    fn estimate_table() -> Table {
        Table::new(
            "coefficients",
            "Demo",
            vec![
                Column::new("term", "term", Format::Text),
                Column::new("estimate", "estimate", Format::Digits(4)),
                Column::new("se", "SE", Format::Digits(3)),
                Column::new("lower", "lower", Format::Digits(4)),
                Column::new("upper", "upper", Format::Digits(4)),
            ],
        )
    }

    #[test]
    fn estimates_within_one_se_of_zero_ask_for_no_decimals() {
        // A coefficient of noise size (SE near 1e-10, values from memory of a nearly exact
        // fit) once made the column show eight decimals of zeros beside a well-measured one.
        let mut t = estimate_table();
        t.push(vec![
            "x".into(),
            3.0.into(),
            0.01.into(),
            2.98.into(),
            3.02.into(),
        ]);
        t.push(vec![
            "b".into(),
            (-5.8e-10).into(),
            6.2e-10.into(),
            (-1.9e-9).into(),
            7.4e-10.into(),
        ]);
        assert_eq!(formatted_column(&t, 1), ["3.000", "0.000"]);
        assert_eq!(formatted_column(&t, 3), ["2.980", "0.000"]);
        assert_eq!(formatted_column(&t, 4), ["3.020", "0.000"]);
        // An estimate beyond its SE still asks for its two significant digits; within it,
        // not.
        t.rows[1][1] = 0.00123.into();
        t.rows[1][2] = 0.0004.into();
        assert_eq!(formatted_column(&t, 1), ["3.0000", "0.0012"]);
        t.rows[1][2] = 0.01.into();
        assert_eq!(formatted_column(&t, 1), ["3.000", "0.001"]);
    }

    #[test]
    fn estimates_show_the_digits_their_standard_errors_vouch_for() {
        // A response near 12345.678901 measured to 1e-6 (invented): its intercept, a
        // difference of 2.5e-6 and the limits once read 12345.67890, 0.00000 and 12346 to
        // 12346; each now reaches its SE's leading digit (common practice: an estimate is
        // rounded to its uncertainty).
        let mut t = estimate_table();
        t.push(vec![
            "intercept".into(),
            12345.678901.into(),
            4.6e-7.into(),
            12345.6789.into(),
            12345.678902.into(),
        ]);
        t.push(vec![
            "b".into(),
            2.49e-6.into(),
            4.6e-7.into(),
            1.46e-6.into(),
            3.52e-6.into(),
        ]);
        assert_eq!(formatted_column(&t, 1), ["12345.6789010", "0.0000025"]);
        assert_eq!(formatted_column(&t, 3), ["12345.6789000", "0.0000015"]);
        assert_eq!(formatted_column(&t, 4), ["12345.6789020", "0.0000035"]);
        // A nearly exact fit whose residuals covey takes for real (not an exact fit, which
        // has SE 0) shows its estimate to its SE; its noise-size row asks for nothing.
        t.rows[0] = vec![
            "x".into(),
            3.0.into(),
            1.5e-10.into(),
            3.0.into(),
            3.0.into(),
        ];
        t.rows[1] = vec![
            "b".into(),
            (-5.8e-10).into(),
            6.2e-10.into(),
            (-1.9e-9).into(),
            7.4e-10.into(),
        ];
        assert_eq!(formatted_column(&t, 1), ["3.0000000000", "-0.0000000006"]);
        // No more than fifteen significant digits, what a double keeps.
        t.rows[0][1] = 123456789.0.into();
        assert_eq!(formatted_column(&t, 1)[0], "123456789.000000");
        // In scientific notation each value shows the digits down to its SE's.
        t.rows[0][1] = 1.234567e12.into();
        t.rows[0][2] = 10.0.into();
        assert_eq!(formatted_column(&t, 1)[0], "1.23456700000e12");
        // An SE of 0 (an exact fit) or a missing one leaves the column's own rule.
        t.rows[0] = vec!["x".into(), 3.0.into(), 0.0.into(), 3.0.into(), 3.0.into()];
        t.rows[1] = vec![
            "b".into(),
            2.5.into(),
            Cell::Missing,
            2.5.into(),
            2.5.into(),
        ];
        assert_eq!(formatted_column(&t, 1), ["3.000", "2.500"]);
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
