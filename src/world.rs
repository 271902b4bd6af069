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
    NotFound {
        path: String,
    },
    /// The path leads outside the document's folder. Whether anything exists there is never
    /// looked at, and where it leads is not said: a rendering shows only the path as written.
    Outside {
        path: String,
    },
    /// The path names something other than a regular file (a folder, a named pipe, a device,
    /// a socket), which is refused before it is opened: a pipe can block for ever and a device
    /// can be endless.
    NotRegular {
        path: String,
        /// What it is, e.g. "a named pipe (FIFO)".
        kind: &'static str,
    },
    Io {
        path: String,
        message: String,
    },
}

impl fmt::Display for WorldError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            WorldError::NotFound { path } => write!(
                f,
                "cannot find the data file \"{path}\" (paths are relative to the document's folder)"
            ),
            WorldError::Outside { path } => write!(
                f,
                "the data file \"{path}\" is outside the document's folder (symbolic links \
                 followed); move the file under the document's folder, or pass --allow-outside \
                 if this is intended"
            ),
            WorldError::NotRegular { path, kind } => write!(
                f,
                "\"{path}\" is {kind}, not a regular file; covey reads data only from regular \
                 files (save the data to a .csv or .tsv file and load that)"
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

/// A data file on disk, for a reader that must open it by its path (SQLite): where it
/// resolves, and the regular file there, already opened (so that its bytes can be
/// fingerprinted and its identity compared with what the reader opened).
pub struct LocalFile {
    /// The path, resolved within the document's folder (no link left in it).
    pub path: PathBuf,
    /// The file, opened for reading.
    pub file: std::fs::File,
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

    /// The file at `path` on disk, confined like [`World::read`], for a reader that opens it
    /// by its path. A world without files on disk has none.
    fn local(&self, path: &str) -> Result<LocalFile, WorldError> {
        Err(WorldError::Io {
            path: path.to_string(),
            message: "this kind of file can only be read from disk".into(),
        })
    }
}

/// Files on disk, confined to the document's folder unless allowed
/// otherwise.
pub struct FsWorld {
    root: PathBuf,
    allow_outside: bool,
}

/// Most symbolic links followed while resolving one path (as many as Linux follows).
const MAX_LINKS: usize = 40;

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
    ///
    /// Confined (without `--allow-outside`), the path is followed one name at a time from the
    /// document's folder, symbolic links by what they hold: the first step that leaves the
    /// folder (other than up through the folders that contain it) ends the search with
    /// [`WorldError::Outside`], before anything out there is looked at. So a file outside is
    /// refused the same way whether it exists or not.
    pub fn resolve(&self, path: &str) -> Result<PathBuf, WorldError> {
        if self.allow_outside {
            return self
                .root
                .join(path)
                .canonicalize()
                .map_err(|e| match e.kind() {
                    std::io::ErrorKind::NotFound => WorldError::NotFound {
                        path: path.to_string(),
                    },
                    _ => io_error(path, &e),
                });
        }
        let outside = || WorldError::Outside {
            path: path.to_string(),
        };
        let root = self.root.as_path();
        // Where the walk may be: in the folder, or in a folder that holds it.
        let allowed = |p: &Path| p.starts_with(root) || root.starts_with(p);
        let mut current = root.to_path_buf();
        let mut pending = steps(Path::new(path));
        let mut links = 0;
        while let Some(step) = pending.pop_front() {
            let Step::Name(name) = step else {
                step.apply(&mut current);
                continue;
            };
            let next = current.join(&name);
            if !allowed(&next) {
                return Err(outside());
            }
            match std::fs::symlink_metadata(&next) {
                Ok(m) if m.file_type().is_symlink() => {
                    links += 1;
                    if links > MAX_LINKS {
                        return Err(WorldError::Io {
                            path: path.to_string(),
                            message: "too many symbolic links".into(),
                        });
                    }
                    let target = std::fs::read_link(&next).map_err(|e| io_error(path, &e))?;
                    for part in steps(&target).into_iter().rev() {
                        pending.push_front(part);
                    }
                }
                Ok(_) => current = next,
                Err(e) if e.kind() == std::io::ErrorKind::NotFound => {
                    // Missing: the rest of the path, by its names alone, says whether it
                    // would have been inside.
                    current = next;
                    for rest in pending.drain(..) {
                        rest.apply(&mut current);
                    }
                    return Err(if current.starts_with(root) {
                        WorldError::NotFound {
                            path: path.to_string(),
                        }
                    } else {
                        outside()
                    });
                }
                Err(e) => return Err(io_error(path, &e)),
            }
        }
        if !current.starts_with(root) {
            return Err(outside());
        }
        Ok(current)
    }
}

/// One step of a path: to the root, up a folder, or into a name.
enum Step {
    Root,
    Up,
    Name(std::ffi::OsString),
}

impl Step {
    /// Takes the step by its name alone, as if no name were a link.
    fn apply(self, current: &mut PathBuf) {
        match self {
            Step::Root => *current = PathBuf::from("/"),
            Step::Up => {
                current.pop();
            }
            Step::Name(name) => current.push(name),
        }
    }
}

/// The steps of a path (`.` is none).
fn steps(path: &Path) -> std::collections::VecDeque<Step> {
    path.components()
        .filter_map(|c| match c {
            Component::Normal(s) => Some(Step::Name(s.to_os_string())),
            Component::ParentDir => Some(Step::Up),
            Component::RootDir => Some(Step::Root),
            Component::CurDir | Component::Prefix(_) => None,
        })
        .collect()
}

/// What a file that is not a regular file is, in words for a message.
fn kind_of(file_type: &std::fs::FileType) -> &'static str {
    #[cfg(unix)]
    {
        use std::os::unix::fs::FileTypeExt;
        if file_type.is_fifo() {
            return "a named pipe (FIFO)";
        }
        if file_type.is_char_device() {
            return "a character device";
        }
        if file_type.is_block_device() {
            return "a block device";
        }
        if file_type.is_socket() {
            return "a socket";
        }
    }
    if file_type.is_dir() {
        "a folder"
    } else {
        "not a file covey can read"
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
        let resolved = self.resolve(path)?;
        let meta = std::fs::metadata(&resolved).map_err(|e| io_error(path, &e))?;
        if !meta.is_file() {
            return Err(WorldError::NotRegular {
                path: path.to_string(),
                kind: kind_of(&meta.file_type()),
            });
        }
        Ok(Fingerprint {
            len: meta.len(),
            modified: meta.modified().ok(),
            resolved,
        })
    }

    /// The regular file `path` points to, opened for reading. Its type is checked before it is
    /// opened (a named pipe would block the open, a device never end), and again on the open
    /// file, which is opened without waiting (`O_NONBLOCK`) and, when confined, without
    /// following a link put in place meanwhile (`O_NOFOLLOW`).
    fn file(&self, path: &str) -> Result<(std::fs::File, u64), WorldError> {
        let resolved = self.resolve(path)?;
        let regular = |m: &std::fs::Metadata| -> Result<(), WorldError> {
            if m.is_file() {
                Ok(())
            } else {
                Err(WorldError::NotRegular {
                    path: path.to_string(),
                    kind: kind_of(&m.file_type()),
                })
            }
        };
        regular(&std::fs::metadata(&resolved).map_err(|e| io_error(path, &e))?)?;
        let file =
            open_without_waiting(&resolved, !self.allow_outside).map_err(|e| io_error(path, &e))?;
        let meta = file.metadata().map_err(|e| io_error(path, &e))?;
        regular(&meta)?;
        Ok((file, meta.len()))
    }
}

impl World for FsWorld {
    fn read(&self, path: &str) -> Result<Vec<u8>, WorldError> {
        let (file, len) = self.file(path)?;
        read_file(file, len).map_err(|e| io_error(path, &e))
    }

    fn open(&self, path: &str) -> Result<Opened, WorldError> {
        let (file, len) = self.file(path)?;
        Ok(Opened {
            reader: Box::new(file),
            len: Some(len),
        })
    }

    fn local(&self, path: &str) -> Result<LocalFile, WorldError> {
        let (file, _) = self.file(path)?;
        Ok(LocalFile {
            path: self.resolve(path)?,
            file,
        })
    }
}

/// True when `file` (open) is the file at `path` now: same device and inode. A reader that
/// opens a file by its path checks with this that it read the file that was confined.
pub fn same_file(file: &std::fs::File, path: &Path) -> bool {
    #[cfg(unix)]
    {
        use std::os::unix::fs::MetadataExt;
        match (file.metadata(), std::fs::symlink_metadata(path)) {
            (Ok(a), Ok(b)) => a.dev() == b.dev() && a.ino() == b.ino(),
            _ => false,
        }
    }
    #[cfg(not(unix))]
    {
        let _ = (file, path);
        true
    }
}

/// A read error on the file at `path`.
pub fn io_error(path: &str, e: &std::io::Error) -> WorldError {
    WorldError::Io {
        path: path.to_string(),
        message: e.to_string(),
    }
}

/// The bytes of the regular file at `path` (a document, a rendering, a figure: a file covey
/// reads that is not data). Anything else is refused before a byte is read, with what it is in
/// the error: the file is opened without waiting (`O_NONBLOCK`), so a named pipe does not block
/// the open, and checked on the open file, so a device put in its place cannot be read for ever.
pub fn read_regular(path: &Path) -> std::io::Result<Vec<u8>> {
    let mut file = open_without_waiting(path, false)?;
    let meta = file.metadata()?;
    if !meta.is_file() {
        return Err(std::io::Error::other(format!(
            "it is {}, not a regular file",
            kind_of(&meta.file_type())
        )));
    }
    let mut bytes = Vec::new();
    file.read_to_end(&mut bytes)?;
    Ok(bytes)
}

/// `path` opened for reading without waiting (`O_NONBLOCK`: a named pipe does not block the
/// open) and, with `nofollow`, without following a link in its last step (`O_NOFOLLOW`). The
/// caller checks the open file's type.
fn open_without_waiting(path: &Path, nofollow: bool) -> std::io::Result<std::fs::File> {
    let mut options = std::fs::OpenOptions::new();
    options.read(true);
    #[cfg(unix)]
    {
        use std::os::unix::fs::OpenOptionsExt;
        let mut flags = rustix::fs::OFlags::NONBLOCK;
        if nofollow {
            flags |= rustix::fs::OFlags::NOFOLLOW;
        }
        options.custom_flags(flags.bits() as i32);
    }
    #[cfg(not(unix))]
    let _ = nofollow;
    options.open(path)
}

/// Files at least this large are read in pieces side by side.
const PARALLEL_READ_BYTES: u64 = 1 << 22;

/// Size of the pieces a large file is read in.
const READ_PIECE_BYTES: usize = 1 << 21;

/// The bytes of a file. A large one is read in pieces on the thread pool, each into its own
/// share of one buffer, so that the kernel's copying and the mapping of fresh pages are split
/// between the cores; the bytes are the same as reading it in one go. A file that changes
/// size meanwhile is read again in one go.
fn read_file(mut file: std::fs::File, len: u64) -> std::io::Result<Vec<u8>> {
    use std::io::{Seek, SeekFrom};
    // The whole file again, in one go, from the same open file.
    let again = |file: &mut std::fs::File| -> std::io::Result<Vec<u8>> {
        file.seek(SeekFrom::Start(0))?;
        let mut bytes = Vec::new();
        file.read_to_end(&mut bytes)?;
        Ok(bytes)
    };
    #[cfg(unix)]
    {
        use rayon::prelude::*;
        use std::os::unix::fs::FileExt;

        if len < PARALLEL_READ_BYTES {
            let mut bytes = Vec::new();
            file.read_to_end(&mut bytes)?;
            return Ok(bytes);
        }
        let Ok(n) = usize::try_from(len) else {
            return again(&mut file);
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
            return again(&mut file);
        }
        Ok(bytes)
    }
    #[cfg(not(unix))]
    {
        let _ = len;
        again(&mut file)
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

    #[cfg(unix)]
    #[test]
    fn paths_are_followed_link_by_link_inside_the_folder() {
        use std::os::unix::fs::symlink;
        let base = std::env::temp_dir().join(format!("covey-resolve-{}", std::process::id()));
        let _ = std::fs::remove_dir_all(&base);
        let root = base.join("doc");
        std::fs::create_dir_all(root.join("data")).unwrap_or_else(|e| panic!("{e}"));
        std::fs::write(root.join("data/x.csv"), "a\n1\n").unwrap_or_else(|e| panic!("{e}"));
        std::fs::write(base.join("secret.csv"), "a\n1\n").unwrap_or_else(|e| panic!("{e}"));
        symlink("data", root.join("d")).unwrap_or_else(|e| panic!("{e}"));
        symlink("..", root.join("up")).unwrap_or_else(|e| panic!("{e}"));
        symlink(root.join("data/x.csv"), root.join("absolute.csv"))
            .unwrap_or_else(|e| panic!("{e}"));
        symlink("d/../data/x.csv", root.join("winding.csv")).unwrap_or_else(|e| panic!("{e}"));
        let world = FsWorld::new(&root, false);
        let real = root
            .join("data/x.csv")
            .canonicalize()
            .unwrap_or_else(|e| panic!("{e}"));
        for inside in [
            "data/x.csv",
            "d/x.csv",
            "absolute.csv",
            "winding.csv",
            "./d/./x.csv",
        ] {
            assert_eq!(world.resolve(inside).ok(), Some(real.clone()), "{inside}");
        }
        let absolute = real.display().to_string();
        assert_eq!(world.resolve(&absolute).ok(), Some(real.clone()));
        for outside in [
            "../secret.csv",
            "up/secret.csv",
            "up/missing.csv",
            "/etc/passwd",
        ] {
            assert!(
                matches!(world.resolve(outside), Err(WorldError::Outside { .. })),
                "{outside}"
            );
        }
        assert!(matches!(
            world.resolve("data/missing.csv"),
            Err(WorldError::NotFound { .. })
        ));
        // Allowed outside, a path resolves wherever it leads.
        let free = FsWorld::new(&root, true);
        assert!(free.resolve("up/secret.csv").is_ok());
        std::fs::remove_dir_all(&base).unwrap_or_else(|e| panic!("{e}"));
    }

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
            let file = std::fs::File::open(&path).unwrap_or_else(|e| panic!("{e}"));
            let read = read_file(file, len as u64).unwrap_or_else(|e| panic!("{e}"));
            assert_eq!(read, bytes, "{len}");
        }
        std::fs::remove_dir_all(&dir).unwrap();
    }
}
