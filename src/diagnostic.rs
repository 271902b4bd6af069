//! Errors and warnings that point at the place in the Markdown document the
//! user wrote, laid out with codespan-reporting (plain ASCII, no colour, so
//! that the text is the same on a terminal and inside a rendered document).

use codespan_reporting::diagnostic::{Diagnostic as CsDiagnostic, Label};
use codespan_reporting::files::SimpleFile;
use codespan_reporting::term::{self, termcolor::NoColor, Chars, Config};

use crate::lang::Span;
use crate::report::visible::{is_hidden, visible_except};

/// A problem at a place in a document: what is wrong and what to do.
#[derive(Debug, Clone, PartialEq)]
pub struct Diagnostic {
    pub span: Span,
    /// What is wrong, in plain words.
    pub message: String,
    /// A short label under the caret.
    pub label: String,
    /// What to do about it.
    pub help: Option<String>,
}

impl Diagnostic {
    pub fn new(span: Span, message: impl Into<String>) -> Diagnostic {
        Diagnostic {
            span,
            message: message.into(),
            label: String::new(),
            help: None,
        }
    }

    pub fn label(mut self, label: impl Into<String>) -> Diagnostic {
        self.label = label.into();
        self
    }

    pub fn help(mut self, help: impl Into<String>) -> Diagnostic {
        self.help = Some(help.into());
        self
    }
}

/// 1-based line and column (in characters) of a byte offset.
pub fn line_col(source: &str, offset: usize) -> (usize, usize) {
    let offset = floor_char_boundary(source, offset.min(source.len()));
    let before = &source[..offset];
    let line = before.bytes().filter(|b| *b == b'\n').count() + 1;
    let line_start = before.rfind('\n').map_or(0, |i| i + 1);
    (line, before[line_start..].chars().count() + 1)
}

/// `text` with every lone carriage return turned into a line feed: the same bytes at the same
/// offsets, with its lines where Markdown, the language server and the user's editor see them
/// (a lone CR ends a line there), for [`Source`] to count.
pub fn lone_cr_as_lf(text: &str) -> std::borrow::Cow<'_, str> {
    let bytes = text.as_bytes();
    let lone = |i: usize| bytes[i] == b'\r' && bytes.get(i + 1) != Some(&b'\n');
    if !memchr::memchr_iter(b'\r', bytes).any(lone) {
        return std::borrow::Cow::Borrowed(text);
    }
    let mut out = String::with_capacity(text.len());
    let mut from = 0;
    for i in memchr::memchr_iter(b'\r', bytes).filter(|&i| lone(i)) {
        out.push_str(&text[from..i]);
        out.push('\n');
        from = i + 1;
    }
    out.push_str(&text[from..]);
    std::borrow::Cow::Owned(out)
}

/// [`line_col`] for many offsets of one text, the line starts found once.
struct Lines<'t> {
    source: &'t str,
    /// Byte offset where each line starts, ascending.
    starts: Vec<usize>,
}

impl<'t> Lines<'t> {
    fn new(source: &'t str) -> Lines<'t> {
        let mut starts = vec![0];
        starts.extend(memchr::memchr_iter(b'\n', source.as_bytes()).map(|i| i + 1));
        Lines { source, starts }
    }

    /// 1-based line and column (in characters) of a byte offset, as [`line_col`] gives them.
    fn line_col(&self, offset: usize) -> (usize, usize) {
        let offset = floor_char_boundary(self.source, offset.min(self.source.len()));
        let line = self.starts.partition_point(|&s| s <= offset).max(1);
        let start = self.starts.get(line - 1).copied().unwrap_or(0).min(offset);
        let column = self
            .source
            .get(start..offset)
            .map_or(0, |s| s.chars().count())
            + 1;
        (line, column)
    }
}

fn floor_char_boundary(s: &str, mut i: usize) -> usize {
    while i > 0 && !s.is_char_boundary(i) {
        i -= 1;
    }
    i
}

/// `file:line:column: message` followed by the source line with a caret and
/// the help, as one block of text. For several diagnostics of one text, make a
/// [`Source`] once.
pub fn render(file_name: &str, source: &str, d: &Diagnostic) -> String {
    Source::new(file_name, source).render(d)
}

/// A text that diagnostics point into, with its lines found once, so that
/// rendering many diagnostics takes time in proportion to their number, not
/// to their number times the text.
pub struct Source<'t> {
    name: &'t str,
    file: SimpleFile<&'t str, &'t str>,
    lines: Lines<'t>,
}

impl<'t> Source<'t> {
    pub fn new(name: &'t str, text: &'t str) -> Source<'t> {
        Source {
            name,
            file: SimpleFile::new(name, text),
            lines: Lines::new(text),
        }
    }

    /// 1-based line and column (in characters) of a byte offset of the text.
    pub fn line_col(&self, offset: usize) -> (usize, usize) {
        self.lines.line_col(offset)
    }

    /// The diagnostic laid out as [`render`] lays it out.
    pub fn render(&self, d: &Diagnostic) -> String {
        let source = self.lines.source;
        let file_name = self.name;
        let start = floor_char_boundary(source, d.span.start.min(source.len()));
        let end = floor_char_boundary(source, d.span.end.min(source.len())).max(start);
        let mut diag = CsDiagnostic::error()
            .with_message(&d.message)
            .with_labels(vec![Label::primary((), start..end).with_message(&d.label)]);
        if let Some(h) = &d.help {
            diag = diag.with_notes(vec![format!("help: {h}")]);
        }
        let config = Config {
            chars: Chars::ascii(),
            ..Config::default()
        };
        let mut out = NoColor::new(Vec::new());
        let (line, col) = self.lines.line_col(start);
        let head = format!("{file_name}:{line}:{col}: error: {}\n", d.message);
        if let Some(snippet) = self.window_snippet(d, start, end, line, col) {
            return visible_except(&head, &['\n', '\t']).into_owned() + &snippet;
        }
        let text = match term::emit(&mut out, &config, &self.file, &diag) {
            Ok(()) => {
                // codespan repeats the message on its first line; the head
                // above already says it with the position.
                let body = String::from_utf8_lossy(out.get_ref());
                let snippet = body.split_once('\n').map_or("", |(_, rest)| rest);
                head + snippet.trim_end() + "\n"
            }
            Err(_) => head,
        };
        // Names from data files and the document's own lines may hold control or bidirectional
        // characters; on a terminal (and in the rendering's error block) they are shown by
        // their code points, never obeyed.
        visible_except(&text, &['\n', '\t']).into_owned()
    }
}

/// The closest of `candidates` to `name` by edit distance (letters left out, added, changed or
/// two neighbours swapped, each one edit), if close enough to be a likely typo: at most one
/// edit per three letters. A tie goes to the candidate that starts with the same letter
/// (`tabel` is `table`, not `label`), then to the earlier one.
pub fn closest<'a>(name: &str, candidates: &[&'a str]) -> Option<&'a str> {
    let lower = name.to_lowercase();
    let first = lower.chars().next();
    candidates
        .iter()
        .map(|c| (edit_distance(&lower, &c.to_lowercase()), *c))
        .filter(|(d, c)| *d <= (c.chars().count().max(name.chars().count()) / 3).max(1))
        .min_by_key(|(d, c)| (*d, c.to_lowercase().chars().next() != first))
        .map(|(_, c)| c)
}

/// The optimal string alignment distance: Levenshtein's edits plus the swap of two neighbouring
/// letters, the commonest slip in typing (`laod`, `alpah`).
fn edit_distance(a: &str, b: &str) -> usize {
    let a: Vec<char> = a.chars().collect();
    let b: Vec<char> = b.chars().collect();
    // rows[i][j]: the distance between a[..i] and b[..j].
    let mut rows: Vec<Vec<usize>> = (0..=a.len())
        .map(|i| (0..=b.len()).map(|j| if i == 0 { j } else { i }).collect())
        .collect();
    for i in 1..=a.len() {
        for j in 1..=b.len() {
            let cost = usize::from(a[i - 1] != b[j - 1]);
            let mut d = (rows[i - 1][j - 1] + cost)
                .min(rows[i - 1][j] + 1)
                .min(rows[i][j - 1] + 1);
            if i > 1 && j > 1 && a[i - 1] == b[j - 2] && a[i - 2] == b[j - 1] {
                d = d.min(rows[i - 2][j - 2] + 1);
            }
            rows[i][j] = d;
        }
    }
    rows[a.len()][b.len()]
}

/// Lines longer than this many bytes are shown in part, around the place a diagnostic points
/// at: a line of a megabyte is not repeated whole on the terminal or in the rendering.
const SHOWN_LINE_BYTES: usize = 200;

/// A window of one long line, as a file of one line that codespan lays out: its line and
/// column are those of the place in the whole text.
struct Window {
    name: String,
    text: String,
    line: usize,
    column: usize,
}

impl<'a> codespan_reporting::files::Files<'a> for Window {
    type FileId = ();
    type Name = &'a str;
    type Source = &'a str;

    fn name(&'a self, (): ()) -> Result<&'a str, codespan_reporting::files::Error> {
        Ok(&self.name)
    }

    fn source(&'a self, (): ()) -> Result<&'a str, codespan_reporting::files::Error> {
        Ok(&self.text)
    }

    fn line_index(&'a self, (): (), _: usize) -> Result<usize, codespan_reporting::files::Error> {
        Ok(0)
    }

    fn line_number(&'a self, (): (), _: usize) -> Result<usize, codespan_reporting::files::Error> {
        Ok(self.line)
    }

    fn column_number(
        &'a self,
        (): (),
        _: usize,
        _: usize,
    ) -> Result<usize, codespan_reporting::files::Error> {
        Ok(self.column)
    }

    fn line_range(
        &'a self,
        (): (),
        _: usize,
    ) -> Result<std::ops::Range<usize>, codespan_reporting::files::Error> {
        Ok(0..self.text.len())
    }
}

impl Source<'_> {
    /// For a line longer than [`SHOWN_LINE_BYTES`], or one holding a hidden character
    /// ([`is_hidden`]), the snippet that [`Source::render`] writes under the head: codespan's
    /// layout of the line as it is shown, at the line and column of the whole text. A long line
    /// is cut to a window around the span (`…` where it is cut, a tab shown as one space); a
    /// hidden character is shown as its code point, `<U+0007>`, before the layout, so that the
    /// carets stand under the characters shown (laid out first and made visible after, each
    /// hidden character moved them one column or none against eight). `None` for a short line
    /// of visible characters, which codespan lays out from the text itself.
    fn window_snippet(
        &self,
        d: &Diagnostic,
        start: usize,
        end: usize,
        line: usize,
        col: usize,
    ) -> Option<String> {
        let source = self.lines.source;
        let line_start = self.lines.starts.get(line - 1).copied().unwrap_or(0);
        let line_end = source
            .get(start..)
            .and_then(|rest| rest.find('\n'))
            .map_or(source.len(), |i| start + i);
        let line_end = if source.get(..line_end)?.ends_with('\r') {
            line_end - 1
        } else {
            line_end
        };
        let long = line_end.saturating_sub(line_start) > SHOWN_LINE_BYTES;
        let hidden = || {
            source
                .get(line_start..line_end)
                .is_some_and(|l| l.chars().any(|c| c != '\t' && is_hidden(c)))
        };
        if !long && !hidden() {
            return None;
        }
        let (from, to, tab) = if long {
            let from = floor_char_boundary(source, start.saturating_sub(SHOWN_LINE_BYTES / 4))
                .max(line_start);
            let to =
                floor_char_boundary(source, (from + SHOWN_LINE_BYTES).min(line_end)).max(start);
            (from, to, " ")
        } else {
            (line_start, line_end.max(start), "\t")
        };
        let lead = if from > line_start { "…" } else { "" };
        let tail = if to < line_end { "…" } else { "" };
        let window = Window {
            name: visible_except(self.name, &[]).into_owned(),
            text: format!("{lead}{}{tail}", shown(source.get(from..to)?, tab)),
            line,
            column: col,
        };
        let shift =
            |at: usize| lead.len() + source.get(from..at).map_or(0, |s| shown(s, tab).len());
        let (a, b) = (shift(start), shift(end.min(to)));
        let mut diag = CsDiagnostic::error()
            .with_message(&d.message)
            .with_labels(vec![Label::primary((), a..b).with_message(&d.label)]);
        if let Some(h) = &d.help {
            diag = diag.with_notes(vec![format!("help: {h}")]);
        }
        let config = Config {
            chars: Chars::ascii(),
            ..Config::default()
        };
        let mut out = NoColor::new(Vec::new());
        term::emit(&mut out, &config, &window, &diag).ok()?;
        let body = String::from_utf8_lossy(out.get_ref());
        let snippet = body.split_once('\n').map_or("", |(_, rest)| rest);
        // The label and the help may still name hidden characters; the line is shown already.
        Some(visible_except(snippet.trim_end(), &['\n', '\t']).into_owned() + "\n")
    }
}

/// `text` as a source line is shown: each hidden character ([`is_hidden`]) as its code point,
/// each tab as `tab`.
fn shown(text: &str, tab: &str) -> String {
    let mut out = String::with_capacity(text.len());
    for c in text.chars() {
        if c == '\t' {
            out.push_str(tab);
        } else if is_hidden(c) {
            out.push_str(&format!("<U+{:04X}>", u32::from(c)));
        } else {
            out.push(c);
        }
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn a_long_line_is_shown_as_a_window_around_the_caret() {
        // 300 letters before and after the place, a window of 200 bytes shown; 漢 is two
        // columns wide on a terminal, so the carets stand one column further right for each
        // before them (the snippet laid out by hand counted it as one and missed the word).
        let line = format!("{}漢漢 bad{}", "a".repeat(300), "b".repeat(300));
        let src = format!("# T\n\n```covey\n{line}\n```\n");
        let at = src.find(" bad").unwrap_or(0) + 1;
        let d = Diagnostic::new(
            Span {
                start: at,
                end: at + 3,
            },
            "not a statement",
        )
        .label("this word")
        .help("delete it");
        let text = render("doc.md", &src, &d);
        let window = format!("…{}漢漢 bad{}…", "a".repeat(43), "b".repeat(147));
        let want = format!(
            "doc.md:4:304: error: not a statement\n  --> doc.md:4:304\n  |\n4 | {window}\n  | {}^^^ \
             this word\n  |\n  = help: delete it\n",
            " ".repeat(1 + 43 + 4 + 1)
        );
        assert_eq!(text, want);
    }

    /// The text of the shown source line from the first caret on: the line row above the caret
    /// row, walked in terminal columns (two for a CJK ideograph, tabs to stops of four as
    /// codespan expands them, one for anything else).
    fn under_caret(text: &str) -> String {
        let rows: Vec<&str> = text.lines().collect();
        let at = rows
            .iter()
            .position(|r| r.contains('^'))
            .unwrap_or_else(|| panic!("no caret: {text}"));
        let caret = rows[at].find('^').unwrap_or(0);
        let line = rows[at - 1];
        let (mut column, mut rest) = (0, "");
        for (i, c) in line.char_indices() {
            if column >= caret {
                rest = &line[i..];
                break;
            }
            column += match c {
                '\t' => 4 - column % 4,
                '\u{4E00}'..='\u{9FFF}' => 2,
                _ => 1,
            };
        }
        rest.to_string()
    }

    #[test]
    fn the_caret_stands_under_the_shown_character() {
        // Hidden characters (control, bidirectional, zero-width, byte-order mark) are shown as
        // their code points, eight columns or more where the terminal would have used one or
        // none; tabs and wide characters beside them; short lines and long ones (a window).
        for c in [
            '\u{1}', '\u{1b}', '\u{7f}', '\u{85}', '\u{200B}', '\u{202E}', '\u{FEFF}',
        ] {
            let lines = [
                format!("table \"{c}{c}\" nosuch x"),
                format!("\t{c}漢\t{c} nosuch x"),
                format!(
                    "{}{c}漢 \"{c}\" nosuch {}",
                    "a".repeat(300),
                    "b".repeat(300)
                ),
                format!("{c}{} nosuch {c}", "a".repeat(300)),
            ];
            for line in lines {
                let src = format!("# T\n\n```covey\n{line}\n```\n");
                let at = src.find("nosuch").unwrap_or(0);
                let d = Diagnostic::new(
                    Span {
                        start: at,
                        end: at + 6,
                    },
                    "not a word",
                )
                .label("here");
                let text = render("doc.md", &src, &d);
                let (row, col) = line_col(&src, at);
                assert!(
                    text.starts_with(&format!("doc.md:{row}:{col}: error: not a word\n")),
                    "{text}"
                );
                assert!(!text.chars().any(|c| c != '\n' && is_hidden(c)), "{text}");
                assert!(under_caret(&text).starts_with("nosuch"), "{c:?}: {text}");
                assert!(text.contains("^^^^^^ here"), "{text}");
            }
        }
    }

    #[test]
    fn a_lone_carriage_return_is_counted_as_a_line_ending() {
        assert_eq!(lone_cr_as_lf("a\r\nb\rc\r"), "a\r\nb\nc\n");
        assert!(matches!(
            lone_cr_as_lf("a\r\nb\n"),
            std::borrow::Cow::Borrowed(_)
        ));
        let text = "x\ry\r\nz";
        let lf = lone_cr_as_lf(text);
        assert_eq!(
            Source::new("d.md", &lf).line_col(text.find('z').unwrap_or(0)),
            (3, 1)
        );
    }

    #[test]
    fn closest_counts_a_swap_as_one_edit() {
        assert_eq!(edit_distance("laod", "load"), 1);
        assert_eq!(edit_distance("alpah", "alpha"), 1);
        assert_eq!(edit_distance("kitten", "sitting"), 3);
        assert_eq!(closest("tabel", &["label", "table"]), Some("table"));
        assert_eq!(closest("laod", &["load", "label"]), Some("load"));
        assert_eq!(closest("zzzz", &["load"]), None);
    }

    #[test]
    fn lines_agree_with_line_col() {
        let src = "ab\né\n\nxyz";
        let lines = Lines::new(src);
        for at in 0..=src.len() + 2 {
            assert_eq!(lines.line_col(at), line_col(src, at), "{at}");
        }
    }

    #[test]
    fn points_at_line_and_column() {
        let src = "# Title\n\n```covey\nload \"x.csv\" az y\n```\n";
        let at = src.find("az").unwrap_or(0);
        let d = Diagnostic::new(
            Span {
                start: at,
                end: at + 2,
            },
            "expected `as`",
        )
        .help("write `as NAME`");
        let text = render("doc.md", src, &d);
        assert!(
            text.starts_with("doc.md:4:14: error: expected `as`"),
            "{text}"
        );
        assert!(text.contains("^^"), "{text}");
        assert!(text.contains("help: write `as NAME`"), "{text}");
    }
}
