//! The list of figures covey wrote into a figures folder.
//!
//! `NAME.figures/covey-figures.sha256` names each figure file of the last
//! render with the SHA-256 of its bytes, one `DIGEST  FILE` line each after a
//! header line. It is how covey knows its own figures: a figure file is
//! replaced or removed only while it is listed there and still holds the
//! listed bytes. Any other file in the folder (a user's `block-diagram.svg`,
//! a figure edited by hand) is never touched.

use super::Digest;

/// The manifest's file name inside a figures folder.
pub const FILE_NAME: &str = "covey-figures.sha256";

/// The first line, which marks the file as covey's.
const HEADER: &str = "# Figures written by covey, with the SHA-256 of each. covey replaces or \
                      removes only the files listed here, and only while they hold these bytes.";

/// The manifest listing `figures` (file name, digest), in their order.
pub fn text(figures: &[(String, Digest)]) -> String {
    let mut out = String::from(HEADER);
    out.push('\n');
    for (name, digest) in figures {
        out.push_str(&digest.hex());
        out.push_str("  ");
        out.push_str(name);
        out.push('\n');
    }
    out
}

/// True when `name` is a name covey gives a figure, `blockB-N.svg` (B and N
/// written in digits): the only files a manifest can list. A manifest edited
/// by hand, or by another program, to list a user's file (`notes.txt`,
/// `../doc.md`) never makes covey replace or remove that file.
pub fn is_figure_name(name: &str) -> bool {
    let digits = |s: &str| !s.is_empty() && s.bytes().all(|b| b.is_ascii_digit());
    name.strip_prefix("block")
        .and_then(|n| n.strip_suffix(".svg"))
        .and_then(|n| n.split_once('-'))
        .is_some_and(|(b, n)| digits(b) && digits(n))
}

/// The figures a manifest lists, or None when `bytes` is not covey's
/// manifest. Lines that do not name a figure of covey's ([`is_figure_name`])
/// are skipped.
pub fn parse(bytes: &[u8]) -> Option<Vec<(String, Digest)>> {
    let text = std::str::from_utf8(bytes).ok()?;
    let mut lines = text.lines();
    if lines.next()? != HEADER {
        return None;
    }
    let mut out = Vec::new();
    for line in lines {
        let Some((hex, name)) = line.split_once("  ") else {
            continue;
        };
        if let (Some(digest), true) = (Digest::from_hex(hex), is_figure_name(name)) {
            out.push((name.to_string(), digest));
        }
    }
    Some(out)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn round_trip_and_strangers() {
        let figures = vec![
            ("block1-1.svg".to_string(), Digest::of(b"one")),
            ("block2-1.svg".to_string(), Digest::of(b"two")),
        ];
        assert_eq!(parse(text(&figures).as_bytes()), Some(figures));
        assert_eq!(parse(b"block1-1.svg\n"), None, "not covey's");
        let sneaky = format!(
            "{HEADER}\n{}  ../outside.svg\n{}  /etc/x\n",
            Digest::of(b"x").hex(),
            Digest::of(b"y").hex()
        );
        assert_eq!(parse(sneaky.as_bytes()), Some(Vec::new()));
        let users = format!(
            "{HEADER}\n{d}  notes.txt\n{d}  block1-1.svg.bak\n{d}  block-1.svg\n{d}               blockA-1.svg\n{d}  block1-.svg\n{d}  block1-2.SVG\n{d}  {FILE_NAME}\n{d}  block12-30.svg\n",
            d = Digest::of(b"x").hex()
        );
        assert_eq!(
            parse(users.as_bytes()),
            Some(vec![("block12-30.svg".to_string(), Digest::of(b"x"))])
        );
    }
}
