//! The one door through which a render reads data files.
//!
//! The session never touches the file system itself: it asks a [`World`].
//! Path confinement lives here, and tests run whole documents against a
//! [`MemoryWorld`].

use std::collections::BTreeMap;
use std::fmt;
use std::io::Read;
use std::path::{Component, Path, PathBuf};

/// Why a data file could not be read.
#[derive(Debug, Clone, PartialEq, Eq)]
pub enum WorldError {
    NotFound { path: String },
    Outside { path: String, resolved: String },
    Io { path: String, message: String },
}

impl fmt::Display for WorldError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            WorldError::NotFound { path } => write!(
                f,
                "cannot find the data file \"{path}\" (paths are relative to the document's folder)"
            ),
            WorldError::Outside { path, resolved } => write!(
                f,
                "the data file \"{path}\" resolves to {resolved}, outside the document's folder; \
                 move the file under the document's folder, or pass --allow-outside if this is intended"
            ),
            WorldError::Io { path, message } => write!(f, "cannot read \"{path}\": {message}"),
        }
    }
}

/// A data file opened for reading, with its length when known.
pub struct Opened {
    /// The file's bytes, from the first.
    pub reader: Box<dyn Read + Send>,
    /// Its length in bytes.
    pub len: Option<u64>,
}

/// Reads the data files that a document names.
pub trait World {
    /// The bytes of the file at `path`, as written in the document
    /// (relative to the document's folder).
    fn read(&self, path: &str) -> Result<Vec<u8>, WorldError>;

    /// The file at `path` opened to be read as a stream. By default, its bytes as
    /// [`World::read`] gives them.
    fn open(&self, path: &str) -> Result<Opened, WorldError> {
        let bytes = self.read(path)?;
        let len = u64::try_from(bytes.len()).ok();
        Ok(Opened {
            reader: Box::new(std::io::Cursor::new(bytes)),
            len,
        })
    }
}

/// Files on disk, confined to the document's folder unless allowed
/// otherwise.
pub struct FsWorld {
    root: PathBuf,
    allow_outside: bool,
}

impl FsWorld {
    /// A world rooted at `folder` (the document's folder).
    pub fn new(folder: &Path, allow_outside: bool) -> FsWorld {
        let root = folder
            .canonicalize()
            .unwrap_or_else(|_| folder.to_path_buf());
        FsWorld {
            root,
            allow_outside,
        }
    }

    /// Where `path` points, after symlinks, if it exists.
    pub fn resolve(&self, path: &str) -> Result<PathBuf, WorldError> {
        let joined = self.root.join(path);
        let resolved = joined.canonicalize().map_err(|e| match e.kind() {
            std::io::ErrorKind::NotFound => WorldError::NotFound {
                path: path.to_string(),
            },
            _ => WorldError::Io {
                path: path.to_string(),
                message: e.to_string(),
            },
        })?;
        if !self.allow_outside && !resolved.starts_with(&self.root) {
            return Err(WorldError::Outside {
                path: path.to_string(),
                resolved: resolved.display().to_string(),
            });
        }
        Ok(resolved)
    }
}

/// What tells one version of a data file from another without reading it: where it resolves,
/// its length and its modification time.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Fingerprint {
    pub resolved: PathBuf,
    pub len: u64,
    pub modified: Option<std::time::SystemTime>,
}

impl FsWorld {
    /// The fingerprint of the file at `path`, confined like [`World::read`]: a cache of what
    /// was read from the file stays valid while this stays the same.
    pub fn fingerprint(&self, path: &str) -> Result<Fingerprint, WorldError> {
        let resolved = self.file(path)?;
        let meta = std::fs::metadata(&resolved).map_err(|e| io_error(path, &e))?;
        Ok(Fingerprint {
            len: meta.len(),
            modified: meta.modified().ok(),
            resolved,
        })
    }

    /// Where `path` points, if that is a file.
    fn file(&self, path: &str) -> Result<PathBuf, WorldError> {
        let resolved = self.resolve(path)?;
        if resolved.is_dir() {
            return Err(WorldError::Io {
                path: path.to_string(),
                message: "it is a folder, not a file".into(),
            });
        }
        Ok(resolved)
    }
}

impl World for FsWorld {
    fn read(&self, path: &str) -> Result<Vec<u8>, WorldError> {
        read_file(&self.file(path)?).map_err(|e| io_error(path, &e))
    }

    fn open(&self, path: &str) -> Result<Opened, WorldError> {
        let file = std::fs::File::open(self.file(path)?).map_err(|e| io_error(path, &e))?;
        let len = file.metadata().ok().map(|m| m.len());
        Ok(Opened {
            reader: Box::new(file),
            len,
        })
    }
}

/// A read error on the file at `path`.
pub fn io_error(path: &str, e: &std::io::Error) -> WorldError {
    WorldError::Io {
        path: path.to_string(),
        message: e.to_string(),
    }
}

/// Files at least this large are read in pieces side by side.
const PARALLEL_READ_BYTES: u64 = 1 << 22;

/// Size of the pieces a large file is read in.
const READ_PIECE_BYTES: usize = 1 << 21;

/// The bytes of a file. A large one is read in pieces on the thread pool, each into its own
/// share of one buffer, so that the kernel's copying and the mapping of fresh pages are split
/// between the cores; the bytes are the same as reading it in one go. A file that changes
/// size meanwhile is read again in one go.
fn read_file(path: &Path) -> std::io::Result<Vec<u8>> {
    #[cfg(unix)]
    {
        use rayon::prelude::*;
        use std::os::unix::fs::FileExt;

        let mut file = std::fs::File::open(path)?;
        let len = file.metadata()?.len();
        if len < PARALLEL_READ_BYTES {
            let mut bytes = Vec::new();
            file.read_to_end(&mut bytes)?;
            return Ok(bytes);
        }
        let Ok(n) = usize::try_from(len) else {
            return std::fs::read(path);
        };
        let mut bytes = vec![0u8; n];
        let read = bytes
            .par_chunks_mut(READ_PIECE_BYTES)
            .enumerate()
            .try_for_each(|(i, piece)| {
                let at = (i as u64).saturating_mul(READ_PIECE_BYTES as u64);
                file.read_exact_at(piece, at)
            });
        // A short read means the file shrank; a byte past the end, that it grew.
        let mut probe = [0u8; 1];
        if read.is_err() || file.read_at(&mut probe, len)? != 0 {
            return std::fs::read(path);
        }
        Ok(bytes)
    }
    #[cfg(not(unix))]
    {
        std::fs::read(path)
    }
}

/// Files held in memory, for tests. Paths are normalised the way a file
/// system would (`a/../b.csv` is `b.csv`); a path leaving the root is
/// refused like on disk.
#[derive(Default)]
pub struct MemoryWorld {
    files: BTreeMap<String, Vec<u8>>,
}

impl MemoryWorld {
    pub fn new() -> MemoryWorld {
        MemoryWorld::default()
    }

    pub fn with(mut self, path: &str, bytes: impl Into<Vec<u8>>) -> MemoryWorld {
        self.files
            .insert(normalise(path).unwrap_or_default(), bytes.into());
        self
    }
}

fn normalise(path: &str) -> Option<String> {
    let mut parts: Vec<String> = Vec::new();
    for c in Path::new(path).components() {
        match c {
            Component::Normal(s) => parts.push(s.to_string_lossy().into_owned()),
            Component::ParentDir => {
                parts.pop()?;
            }
            Component::CurDir => {}
            Component::RootDir | Component::Prefix(_) => return None,
        }
    }
    Some(parts.join("/"))
}

impl World for MemoryWorld {
    fn read(&self, path: &str) -> Result<Vec<u8>, WorldError> {
        let key = normalise(path).ok_or_else(|| WorldError::Outside {
            path: path.to_string(),
            resolved: path.to_string(),
        })?;
        self.files
            .get(&key)
            .cloned()
            .ok_or_else(|| WorldError::NotFound {
                path: path.to_string(),
            })
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn a_large_file_read_in_pieces_has_the_same_bytes() {
        let dir = std::env::temp_dir().join(format!("covey-world-{}", std::process::id()));
        std::fs::create_dir_all(&dir).unwrap();
        // Sizes around the piece size and the threshold; the bytes are arbitrary.
        for len in [
            1000,
            PARALLEL_READ_BYTES as usize,
            PARALLEL_READ_BYTES as usize + READ_PIECE_BYTES + 17,
        ] {
            let bytes: Vec<u8> = (0..len).map(|i| (i * 31 % 251) as u8).collect();
            let path = dir.join(format!("f{len}.bin"));
            std::fs::write(&path, &bytes).unwrap();
            assert_eq!(read_file(&path).unwrap(), bytes, "{len}");
        }
        std::fs::remove_dir_all(&dir).unwrap();
    }
}
