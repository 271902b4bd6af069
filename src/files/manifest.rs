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

/// The figures a manifest lists, or None when `bytes` is not covey's
/// manifest. Lines that do not name a plain file in the folder are skipped.
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
        let plain =
            !name.is_empty() && name != "." && name != ".." && !name.contains(['/', '\\', '\0']);
        if let (Some(digest), true) = (Digest::from_hex(hex), plain) {
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
    }
}
