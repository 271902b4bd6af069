//! Characters a reader cannot see, made visible.
//!
//! Names come from the user's data (column names, levels, file names) and may hold characters
//! that print as nothing, move the cursor, or reorder the text around them: control characters
//! (an ESC in a level name would also make a figure's SVG invalid XML), the bidirectional
//! embedding, override and isolate characters (which can make `B` read as `A` in a table), and
//! a few invisible separators. Every place covey shows a user's name, in Markdown, HTML, SVG or
//! a message on the terminal, writes each such character as its code point in angle brackets,
//! `<U+202E>`, and then escapes the result for its context. The JSON export keeps names exactly
//! as they are in the data (JSON escapes control characters itself).

use std::borrow::Cow;

/// Whether `c` is written as its code point (see the module documentation): the control
/// characters (C0, DEL, C1), the bidirectional formatting characters (U+061C, U+200E, U+200F,
/// U+202A to U+202E, U+2066 to U+2069), the line and paragraph separators (U+2028, U+2029), the
/// invisible zero-width space (U+200B), word joiner (U+2060) and byte-order mark (U+FEFF), and
/// U+FFFE and U+FFFF, which XML does not allow.
pub fn is_hidden(c: char) -> bool {
    c.is_control()
        || matches!(
            c,
            '\u{061C}'
                | '\u{200B}'
                | '\u{200E}'
                | '\u{200F}'
                | '\u{2028}'
                | '\u{2029}'
                | '\u{202A}'..='\u{202E}'
                | '\u{2060}'
                | '\u{2066}'..='\u{2069}'
                | '\u{FEFF}'
                | '\u{FFFE}'
                | '\u{FFFF}'
        )
}

/// `text` with every hidden character ([`is_hidden`]) written as `<U+XXXX>` (at least four hex
/// digits, upper case); borrowed when there is none.
///
/// ```
/// use covey::report::visible::visible;
/// assert_eq!(visible("A\u{1b}[31m"), "A<U+001B>[31m");
/// assert_eq!(visible("\u{202e}B"), "<U+202E>B");
/// assert_eq!(visible("plain"), "plain");
/// ```
pub fn visible(text: &str) -> Cow<'_, str> {
    visible_except(text, &[])
}

/// [`visible`], leaving the characters in `keep` as they are (a terminal message keeps its own
/// line breaks).
pub fn visible_except<'t>(text: &'t str, keep: &[char]) -> Cow<'t, str> {
    let shown = |c: char| is_hidden(c) && !keep.contains(&c);
    if !text.chars().any(shown) {
        return Cow::Borrowed(text);
    }
    let mut out = String::with_capacity(text.len() + 16);
    for c in text.chars() {
        if shown(c) {
            out.push_str(&format!("<U+{:04X}>", u32::from(c)));
        } else {
            out.push(c);
        }
    }
    Cow::Owned(out)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn hidden_characters_are_named() {
        assert_eq!(visible("a\tb\nc\rd"), "a<U+0009>b<U+000A>c<U+000D>d");
        assert_eq!(visible("\u{7f}\u{85}\u{9f}"), "<U+007F><U+0085><U+009F>");
        for c in [
            '\u{202A}', '\u{202E}', '\u{2066}', '\u{2069}', '\u{200F}', '\u{061C}',
        ] {
            assert_eq!(visible(&c.to_string()), format!("<U+{:04X}>", u32::from(c)));
        }
        assert_eq!(visible("\u{FFFF}\u{FEFF}"), "<U+FFFF><U+FEFF>");
        assert_eq!(visible_except("a\nb\u{1b}", &['\n']), "a\nb<U+001B>");
    }

    #[test]
    fn ordinary_text_is_borrowed() {
        // Letters of any script, joiners that scripts and emoji need, and symbols stay.
        for s in ["Zürich", "مرحبا", "नमस्ते", "👩\u{200D}🔬", "a|b <c> & \"d\""]
        {
            assert!(matches!(visible(s), Cow::Borrowed(_)), "{s}");
        }
    }
}
