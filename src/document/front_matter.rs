//! The YAML front matter at the top of a document, as the HTML page needs it: where it ends,
//! and its `title`.
//!
//! covey does not interpret front matter otherwise: it is the author's, kept byte for byte in
//! the rendering. The title is read from the one form almost every front matter uses for it, a
//! top-level `title:` key on one line with a plain, single-quoted or double-quoted value. A
//! title written any other way (a block scalar, a value over several lines, a flow collection)
//! is not read, and the page falls back to the document's first heading, as it does for a
//! document without front matter.

use super::outline::front_matter_end;

/// The front matter of `text`, if it has one: its YAML (between the delimiter lines) and the
/// byte offset where the rest of the document starts.
pub fn front_matter(text: &str) -> Option<(&str, usize)> {
    let end = front_matter_end(text)?;
    let head = text.get(..end)?;
    // After the opening delimiter line, before the closing one.
    let open = head.find('\n')? + 1;
    let close = head
        .trim_end_matches(['\n', '\r'])
        .rfind('\n')
        .map_or(open, |i| i + 1);
    Some((head.get(open..close.max(open)).unwrap_or(""), end))
}

/// The value of the top-level `title` key of `yaml`, when it is written on one line as a plain,
/// single-quoted or double-quoted scalar and is not empty; `None` otherwise.
pub fn title(yaml: &str) -> Option<String> {
    let lines: Vec<&str> = yaml.lines().collect();
    let (at, line) = lines.iter().enumerate().find_map(|(k, l)| {
        let rest = l.strip_prefix("title")?;
        let value = rest.trim_start_matches([' ', '\t']).strip_prefix(':')?;
        // `title:x` is a key `title:x`, not the key `title`.
        (value.is_empty() || value.starts_with([' ', '\t', '\r'])).then_some((k, value))
    })?;
    // A plain value continued on an indented next line is a title over several lines.
    let continued = lines.get(at + 1).is_some_and(|next| {
        let t = next.trim_start_matches([' ', '\t']);
        t.len() < next.len() && !t.trim_end().is_empty() && !t.starts_with('#')
    });
    let value = line.trim_matches([' ', '\t', '\r']);
    let title = match value.chars().next()? {
        '"' => double_quoted(value)?,
        '\'' => single_quoted(value)?,
        // Block scalars, anchors, tags, aliases, flow collections and directives: not a
        // one-line plain scalar.
        '|' | '>' | '&' | '!' | '*' | '[' | '{' | '%' | '@' | '`' | '#' => return None,
        _ if continued => return None,
        _ => plain(value),
    };
    let title = title.trim().to_string();
    (!title.is_empty()).then_some(title)
}

/// A plain scalar: up to a comment (` #`), trailing blanks removed.
fn plain(value: &str) -> String {
    let end = value
        .char_indices()
        .find(|&(i, c)| c == '#' && value[..i].ends_with([' ', '\t']))
        .map_or(value.len(), |(i, _)| i);
    value.get(..end).unwrap_or(value).trim_end().to_string()
}

/// A single-quoted scalar on one line: `''` stands for `'`; anything after the closing quote
/// must be a comment.
fn single_quoted(value: &str) -> Option<String> {
    let mut out = String::new();
    let mut chars = value.char_indices().skip(1).peekable();
    while let Some((i, c)) = chars.next() {
        if c == '\'' {
            if chars.peek().is_some_and(|&(_, n)| n == '\'') {
                chars.next();
                out.push('\'');
                continue;
            }
            return rest_is_comment(value.get(i + 1..)?).then_some(out);
        }
        out.push(c);
    }
    None
}

/// A double-quoted scalar on one line, with YAML's escapes (`\"`, `\\`, `\n`, `\t`, `\xXX`,
/// `\uXXXX`, `\UXXXXXXXX` and the rest); anything after the closing quote must be a comment.
fn double_quoted(value: &str) -> Option<String> {
    let mut out = String::new();
    let mut chars = value.char_indices().skip(1);
    while let Some((i, c)) = chars.next() {
        match c {
            '"' => return rest_is_comment(value.get(i + 1..)?).then_some(out),
            '\\' => {
                let (_, e) = chars.next()?;
                let hex = |n: usize, chars: &mut dyn Iterator<Item = (usize, char)>| {
                    let digits: String = chars.take(n).map(|(_, c)| c).collect();
                    u32::from_str_radix(&digits, 16)
                        .ok()
                        .and_then(char::from_u32)
                };
                out.push(match e {
                    '0' => '\0',
                    'a' => '\u{7}',
                    'b' => '\u{8}',
                    't' | '\t' => '\t',
                    'n' => '\n',
                    'v' => '\u{b}',
                    'f' => '\u{c}',
                    'r' => '\r',
                    'e' => '\u{1b}',
                    ' ' => ' ',
                    '"' => '"',
                    '/' => '/',
                    '\\' => '\\',
                    'N' => '\u{85}',
                    '_' => '\u{a0}',
                    'L' => '\u{2028}',
                    'P' => '\u{2029}',
                    'x' => hex(2, &mut chars)?,
                    'u' => hex(4, &mut chars)?,
                    'U' => hex(8, &mut chars)?,
                    _ => return None,
                });
            }
            _ => out.push(c),
        }
    }
    None
}

/// Whether what follows a closing quote is nothing or a comment.
fn rest_is_comment(rest: &str) -> bool {
    let t = rest.trim_start_matches([' ', '\t', '\r']);
    t.is_empty() || (t.starts_with('#') && t.len() < rest.len())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn front_matter_is_found_with_its_yaml() {
        let text = "---\ntitle: Trial 7\nauthor: me\n---\n# Heading\n";
        let (yaml, end) = front_matter(text).expect("front matter");
        assert_eq!(yaml, "title: Trial 7\nauthor: me\n");
        assert_eq!(&text[end..], "# Heading\n");
        let crlf = "\u{feff}---\r\ntitle: x\r\n---\r\nrest";
        let (yaml, end) = front_matter(crlf).expect("front matter");
        assert_eq!((yaml, &crlf[end..]), ("title: x\r\n", "rest"));
        assert_eq!(front_matter("---\n---\nbody").map(|f| f.0), Some(""));
        assert!(front_matter("# No front matter\n---\n").is_none());
    }

    #[test]
    fn titles_in_their_one_line_forms() {
        let cases = [
            ("title: Oven trial 2026\n", Some("Oven trial 2026")),
            ("title:   spaced   # a comment\n", Some("spaced")),
            ("title: C# and F#\n", Some("C# and F#")),
            ("title: 'It''s: here' # c\n", Some("It's: here")),
            (
                "title: \"Tab\\there \\\"q\\\" \\u00e9\"\n",
                Some("Tab\there \"q\" é"),
            ),
            ("author: x\ntitle : late key\n", Some("late key")),
            ("title:\n", None),
            ("title: ''\n", None),
            ("title: |\n  block\n", None),
            ("title: >-\n  folded\n", None),
            ("title: first line\n  second line\n", None),
            ("title: [a, b]\n", None),
            ("title: \"unclosed\n", None),
            ("title: 'a' trailing\n", None),
            ("  title: nested\n", None),
            ("subtitle: no\n", None),
            ("title:x\n", None),
        ];
        for (yaml, want) in cases {
            assert_eq!(title(yaml).as_deref(), want, "{yaml:?}");
        }
    }
}
