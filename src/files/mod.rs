//! The disk side of rendering: which files are documents, where their
//! outputs go, which writes are allowed ([`plan`]), and writing them all or
//! none ([`Batch`]) through temporary files ([`temp`]).

use std::fs;
use std::io::Read;
use std::path::{Component, Path, PathBuf};

mod batch;
pub mod manifest;
pub mod plan;
pub mod temp;

pub use batch::{Batch, Committed, Expect, Fault};
pub use plan::{Plan, Refusal, Role};

/// The bytes of a file to write: held in memory, or already written to a
/// file in a temporary folder ([`temp::Staging`]) that is moved into place.
#[derive(Debug)]
pub enum NewBytes {
    Held(Vec<u8>),
    Staged { path: PathBuf, digest: Digest },
}

impl NewBytes {
    /// The SHA-256 of the bytes.
    pub fn digest(&self) -> Digest {
        match self {
            NewBytes::Held(bytes) => Digest::of(bytes),
            NewBytes::Staged { digest, .. } => *digest,
        }
    }
}

impl From<Vec<u8>> for NewBytes {
    fn from(bytes: Vec<u8>) -> NewBytes {
        NewBytes::Held(bytes)
    }
}

impl From<String> for NewBytes {
    fn from(text: String) -> NewBytes {
        NewBytes::Held(text.into_bytes())
    }
}

impl From<&str> for NewBytes {
    fn from(text: &str) -> NewBytes {
        NewBytes::Held(text.as_bytes().to_vec())
    }
}

/// The suffix of a rendered document: `trial.md` renders to
/// `trial.rendered.md`.
pub const RENDERED_SUFFIX: &str = ".rendered.md";

/// A problem with files or paths given on the command line.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct FileError {
    pub path: PathBuf,
    pub message: String,
}

impl std::fmt::Display for FileError {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        write!(f, "{}: {}", self.path.display(), self.message)
    }
}

/// The documents named by `paths`: files as given, and every `*.md` file
/// directly inside a folder (sorted by name), leaving out renderings.
pub fn documents(paths: &[PathBuf]) -> Result<Vec<PathBuf>, FileError> {
    let mut out = Vec::new();
    for p in paths {
        let meta = fs::metadata(p).map_err(|e| FileError {
            path: p.clone(),
            message: match e.kind() {
                std::io::ErrorKind::NotFound => match nearby_document(p) {
                    Some(near) => {
                        format!("no such file or folder; did you mean {}?", near.display())
                    }
                    None => "no such file or folder".into(),
                },
                _ => e.to_string(),
            },
        })?;
        if meta.is_dir() {
            let mut found: Vec<PathBuf> = fs::read_dir(p)
                .map_err(|e| FileError {
                    path: p.clone(),
                    message: e.to_string(),
                })?
                .filter_map(|e| e.ok().map(|e| e.path()))
                .filter(|f| is_source(f))
                .collect();
            found.sort();
            if found.is_empty() {
                return Err(FileError {
                    path: p.clone(),
                    message: "this folder holds no Markdown documents (*.md)".into(),
                });
            }
            out.extend(found);
        } else if p.to_string_lossy().ends_with(RENDERED_SUFFIX) {
            return Err(FileError {
                path: p.clone(),
                message: "this is a rendering, not a source document; render its source".into(),
            });
        } else {
            out.push(p.clone());
        }
    }
    Ok(out)
}

/// A document the user may have meant by a path that does not exist: the path with `.md`
/// added, the document `covey new` makes (`NAME/NAME.md` for `NAME.md` or `NAME`), or the
/// document of the folder whose name is closest to the one given (a misspelling).
fn nearby_document(p: &Path) -> Option<PathBuf> {
    let name = p.file_name()?.to_string_lossy().into_owned();
    let stem = name.strip_suffix(".md").unwrap_or(&name).to_string();
    let parent = p.parent().unwrap_or(Path::new(""));
    let candidates = [
        parent.join(format!("{stem}.md")),
        parent.join(&stem).join(format!("{stem}.md")),
    ];
    if let Some(c) = candidates.into_iter().find(|c| c.is_file()) {
        return Some(c);
    }
    let folder = if parent.as_os_str().is_empty() {
        Path::new(".")
    } else {
        parent
    };
    let names: Vec<String> = fs::read_dir(folder)
        .ok()?
        .filter_map(|e| e.ok().map(|e| e.path()))
        .filter(|f| is_source(f))
        .filter_map(|f| f.file_name().map(|n| n.to_string_lossy().into_owned()))
        .collect();
    let refs: Vec<&str> = names.iter().map(String::as_str).collect();
    let want = format!("{stem}.md");
    crate::diagnostic::closest(&want, &refs).map(|n| parent.join(n))
}

fn is_source(p: &Path) -> bool {
    let name = p
        .file_name()
        .map(|n| n.to_string_lossy().into_owned())
        .unwrap_or_default();
    p.is_file()
        && name.ends_with(".md")
        && !name.ends_with(RENDERED_SUFFIX)
        && !name.starts_with('.')
}

/// Where the rendering of `doc` goes: beside it, or in `out_dir`.
pub fn rendered_path(doc: &Path, out_dir: Option<&Path>) -> PathBuf {
    let name = doc
        .file_name()
        .map(|n| n.to_string_lossy().into_owned())
        .unwrap_or_default();
    let stem = name.strip_suffix(".md").unwrap_or(&name);
    let folder = match out_dir {
        Some(d) => d.to_path_buf(),
        None => doc.parent().map(Path::to_path_buf).unwrap_or_default(),
    };
    folder.join(format!("{stem}{RENDERED_SUFFIX}"))
}

/// The JSON or HTML file that goes with a rendering (`--json`, `--html`):
/// the rendering's path with another extension.
pub fn sibling(rendered: &Path, extension: &str) -> PathBuf {
    let name = rendered
        .file_name()
        .map(|n| n.to_string_lossy().into_owned())
        .unwrap_or_default();
    let stem = name.strip_suffix(".md").unwrap_or(&name);
    rendered.with_file_name(format!("{stem}.{extension}"))
}

/// The folder of a document's figures, beside its rendering in `folder`:
/// `trial.md` draws into `trial.figures/`.
pub fn figures_dir(folder: &Path, doc: &Path) -> PathBuf {
    let name = doc
        .file_name()
        .map(|n| n.to_string_lossy().into_owned())
        .unwrap_or_default();
    let stem = name.strip_suffix(".md").unwrap_or(&name);
    folder.join(format!("{stem}.figures"))
}

/// The SHA-256 of a file's bytes: what covey remembers of a file it read or
/// wrote, to tell later whether the file still holds those bytes.
#[derive(Clone, Copy, PartialEq, Eq, Hash, PartialOrd, Ord)]
pub struct Digest(pub [u8; 32]);

impl Digest {
    /// The digest of `bytes`.
    pub fn of(bytes: &[u8]) -> Digest {
        use sha2::Digest as _;
        Digest(sha2::Sha256::digest(bytes).into())
    }

    /// The digest of the file at `path` (read as a stream), or None when
    /// there is no file there.
    pub fn of_file(path: &Path) -> std::io::Result<Option<Digest>> {
        use sha2::Digest as _;
        let mut file = match fs::File::open(path) {
            Ok(f) => f,
            Err(e) if e.kind() == std::io::ErrorKind::NotFound => return Ok(None),
            Err(e) => return Err(e),
        };
        let mut hasher = sha2::Sha256::new();
        let mut buf = vec![0u8; 1 << 16];
        loop {
            let n = file.read(&mut buf)?;
            if n == 0 {
                break;
            }
            hasher.update(buf.get(..n).unwrap_or_default());
        }
        Ok(Some(Digest(hasher.finalize().into())))
    }

    /// 64 lowercase hex digits, as data files' digests are shown.
    pub fn hex(&self) -> String {
        self.0.iter().map(|b| format!("{b:02x}")).collect()
    }

    /// The digest written as 64 hex digits, if `text` is one.
    pub fn from_hex(text: &str) -> Option<Digest> {
        if text.len() != 64 || !text.is_ascii() {
            return None;
        }
        let mut out = [0u8; 32];
        for (i, byte) in out.iter_mut().enumerate() {
            *byte = u8::from_str_radix(text.get(2 * i..2 * i + 2)?, 16).ok()?;
        }
        Some(Digest(out))
    }
}

impl std::fmt::Debug for Digest {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        write!(f, "Digest({})", self.hex())
    }
}

/// What the file system says about a file without reading it: enough to
/// notice, cheaply, that it may have changed (its length, modification time
/// and identity). Equal stamps mean an unchanged file for `--watch`; a
/// different stamp is confirmed by reading the file.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct Stamp {
    len: u64,
    modified: Option<std::time::SystemTime>,
    /// The device and inode on Unix (a file replaced by a rename is another
    /// file even with the same length and time); zero elsewhere.
    identity: (u64, u64),
}

impl Stamp {
    /// The stamp of the file at `path` (after symlinks), or None when there
    /// is none.
    pub fn of(path: &Path) -> Option<Stamp> {
        let meta = fs::metadata(path).ok()?;
        Some(Stamp {
            len: meta.len(),
            modified: meta.modified().ok(),
            identity: identity(&meta),
        })
    }
}

#[cfg(unix)]
fn identity(meta: &fs::Metadata) -> (u64, u64) {
    use std::os::unix::fs::MetadataExt;
    (meta.dev(), meta.ino())
}

#[cfg(not(unix))]
fn identity(_: &fs::Metadata) -> (u64, u64) {
    (0, 0)
}

/// Where `path` is, as an absolute path whose folders are resolved (after
/// symlinks) as far as they exist; the last component is kept as written,
/// so a link at the end is not followed. Two outputs with the same location
/// are the same file.
pub fn location(path: &Path) -> PathBuf {
    let absolute = if path.is_absolute() {
        path.to_path_buf()
    } else {
        std::env::current_dir().unwrap_or_default().join(path)
    };
    let mut parts: Vec<Component> = absolute.components().collect();
    let Some(last) = parts.pop() else {
        return absolute;
    };
    // The longest existing folder, resolved; the rest as written (with `.`
    // and `..` worked out by hand, since those folders do not exist yet).
    let mut rest = Vec::new();
    loop {
        let folder: PathBuf = parts.iter().collect();
        if let Ok(resolved) = folder.canonicalize() {
            let mut out = resolved;
            for c in rest.into_iter().rev() {
                match c {
                    Component::ParentDir => {
                        out.pop();
                    }
                    Component::CurDir => {}
                    other => out.push(other.as_os_str()),
                }
            }
            match last {
                Component::ParentDir => {
                    out.pop();
                }
                Component::CurDir => {}
                other => out.push(other.as_os_str()),
            }
            return out;
        }
        match parts.pop() {
            Some(c) => rest.push(c),
            None => return absolute,
        }
    }
}

/// Where `path` leads: its [`location`], with symbolic links at the end
/// followed by hand, so that a dangling link leads to the file it would
/// create (a document asking for `data/x.csv`, a link to `../out.csv` that
/// does not exist yet, depends on `out.csv`).
pub fn target_of(path: &Path) -> PathBuf {
    let mut here = location(path);
    // As many links as the system itself would follow.
    for _ in 0..40 {
        let is_link = fs::symlink_metadata(&here).is_ok_and(|m| m.file_type().is_symlink());
        let Some(next) = is_link.then(|| fs::read_link(&here).ok()).flatten() else {
            break;
        };
        let folder = here.parent().map(Path::to_path_buf).unwrap_or_default();
        here = location(&folder.join(next));
    }
    here
}

/// True when `a` and `b` name the same file: the same location, the same
/// end of their links (existing or not), or the same file on disk through
/// hard links.
pub fn same_file(a: &Path, b: &Path) -> bool {
    if location(a) == location(b) || target_of(a) == target_of(b) {
        return true;
    }
    match (fs::metadata(a), fs::metadata(b)) {
        (Ok(x), Ok(y)) => identity(&x) != (0, 0) && identity(&x) == identity(&y),
        _ => false,
    }
}
#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn naming_rule() {
        assert_eq!(
            rendered_path(Path::new("w/trial.md"), None),
            PathBuf::from("w/trial.rendered.md")
        );
        assert_eq!(
            rendered_path(Path::new("w/trial.md"), Some(Path::new("out"))),
            PathBuf::from("out/trial.rendered.md")
        );
        assert_eq!(
            sibling(Path::new("out/trial.rendered.md"), "json"),
            PathBuf::from("out/trial.rendered.json")
        );
    }
}
