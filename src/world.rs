//! The one door through which a render reads data files.
//!
//! The session never touches the file system itself: it asks a [`World`].
//! Path confinement lives here, and tests run whole documents against a
//! [`MemoryWorld`].

use std::collections::BTreeMap;
use std::fmt;
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

/// Reads the data files that a document names.
pub trait World {
    /// The bytes of the file at `path`, as written in the document
    /// (relative to the document's folder).
    fn read(&self, path: &str) -> Result<Vec<u8>, WorldError>;
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

impl World for FsWorld {
    fn read(&self, path: &str) -> Result<Vec<u8>, WorldError> {
        let resolved = self.resolve(path)?;
        if resolved.is_dir() {
            return Err(WorldError::Io {
                path: path.to_string(),
                message: "it is a folder, not a file".into(),
            });
        }
        std::fs::read(&resolved).map_err(|e| WorldError::Io {
            path: path.to_string(),
            message: e.to_string(),
        })
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
