//! Writing a run's files all or nothing.
//!
//! A [`Batch`] holds every file a run writes, each with what its path must
//! hold when covey replaces it ([`Expect`]). Committing it:
//!
//! 1. removes covey's own temporary files left in those folders by an
//!    interrupted run;
//! 2. reads every target: a file that already holds the new bytes is left as
//!    it is; any other must hold what was expected (nothing, or the bytes
//!    covey read or checked earlier), or nothing at all is written;
//! 3. writes every new file into a temporary folder in its target's folder
//!    ([`temp::Staging`], one for each folder written into) and flushes it to
//!    disk (side by side on the thread pool), keeping the replaced file's
//!    permissions. No file stays open: however many files a batch writes, it
//!    holds one open file (the lock) for each folder;
//! 4. moves them into place in the order they were added. Before each
//!    replacement it gives the old file a second name in the temporary folder
//!    (a hard link) and checks once more that it still holds the expected
//!    bytes; a new file is placed
//!    with a link that fails if the name was taken meanwhile, so it never
//!    replaces anything. If any step fails, the files already moved are put
//!    back (the old ones from their second names, the new ones removed), so
//!    new and old files are never left mixed;
//! 5. only then removes the temporary folders with the second names, and the
//!    files the batch was asked to remove (each only while it holds the bytes
//!    given).
//!
//! The batch holds the new files' bytes, never the old ones': a target is
//! compared with the new bytes and hashed as it is read, a piece at a time.
//!
//! The file whose loss would hurt most (the document itself, in place) is
//! added last: it is replaced last, right after its final check, and never
//! has to be put back.

use std::fs;
use std::io::{self, Write};
use std::path::{Path, PathBuf};

use super::temp::{self, Staging};
use super::{Digest, FileError, NewBytes};

/// What a path must hold for covey to write there.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Expect {
    /// Nothing: the file is created and never replaces anything.
    Absent,
    /// A file with these bytes (their SHA-256): the file covey read, or the
    /// earlier output it checked as its own.
    Content(Digest),
}

impl Expect {
    /// What the file at `path` holds now.
    pub fn current(path: &Path) -> io::Result<Expect> {
        Ok(match Digest::of_file(path)? {
            Some(d) => Expect::Content(d),
            None => Expect::Absent,
        })
    }
}

/// A failure injected into a commit, for tests of the all-or-nothing promise.
/// Indexes count the files that change (unchanged files are skipped).
pub enum Fault<'a> {
    /// Writing the temporary file of the i-th changed file fails.
    Stage(usize),
    /// Moving the i-th changed file into place fails.
    Rename(usize),
    /// Runs just before the i-th changed file is moved into place (after
    /// the earlier ones were), as another program might.
    BeforeRename(usize, &'a mut dyn FnMut()),
}

/// What a commit did.
#[derive(Debug, Clone, Default, PartialEq, Eq)]
pub struct Committed {
    /// Files written (new or replaced).
    pub written: usize,
    /// Files removed because the batch asked so.
    pub removed: usize,
    /// Temporary files of an interrupted covey run removed.
    pub leftovers: usize,
}

struct Planned {
    path: PathBuf,
    bytes: NewBytes,
    expect: Expect,
}

/// Files to write together, all or none (see the module's description).
#[derive(Default)]
pub struct Batch {
    writes: Vec<Planned>,
    removals: Vec<(PathBuf, Digest)>,
    empty_folders: Vec<PathBuf>,
    /// Folders that must be real folders, not links nor files, whenever covey writes or
    /// removes a file in them (figures folders: one replaced by a link after the plan was
    /// checked would lead the writes outside).
    real_folders: Vec<PathBuf>,
}

/// A file that changes, as found before anything is written.
struct Pending<'a> {
    planned: &'a Planned,
    /// The file there now, if any: its digest and permissions.
    old: Option<(Digest, fs::Permissions)>,
}

/// A new file written in a temporary folder: its path there and its identity.
struct Ready {
    path: PathBuf,
    identity: (u64, u64),
}

/// A file moved into place, and how to undo it.
enum Done<'a> {
    Replaced {
        path: &'a Path,
        /// The old file under its second name, or its bytes where no hard
        /// link could be made.
        kept: Result<PathBuf, Vec<u8>>,
    },
    Created {
        path: &'a Path,
        /// The new file's identity, so that undoing removes only that file.
        identity: (u64, u64),
    },
}

/// The temporary folder of each folder a batch writes into.
struct Stagings<'a>(Vec<(&'a Path, Staging)>);

impl<'a> Stagings<'a> {
    fn of(&self, path: &Path) -> io::Result<&Staging> {
        let folder = folder_of(path);
        self.0
            .iter()
            .find(|(f, _)| *f == folder)
            .map(|(_, s)| s)
            .ok_or_else(|| io::Error::other("no temporary folder here (please report this)"))
    }

    /// Removes every temporary folder, unless `keep` is true (one holds a file
    /// that could not be put back).
    fn finish(self, keep: bool) {
        for (_, s) in self.0 {
            s.finish(keep);
        }
    }
}

impl Batch {
    pub fn new() -> Batch {
        Batch::default()
    }

    /// Adds a file to write at `path`, which must hold what `expect` says.
    pub fn write(&mut self, path: PathBuf, bytes: impl Into<NewBytes>, expect: Expect) {
        self.writes.push(Planned {
            path,
            bytes: bytes.into(),
            expect,
        });
    }

    /// Asks to remove the file at `path` once everything is written, if it
    /// still holds the bytes whose digest is given.
    pub fn remove(&mut self, path: PathBuf, digest: Digest) {
        self.removals.push((path, digest));
    }

    /// Asks to remove the folder at `path` at the end, if it is then empty.
    pub fn remove_folder_if_empty(&mut self, path: PathBuf) {
        self.empty_folders.push(path);
    }

    /// Asks that the folder at `path` be a real folder (when it exists) each time a file in it
    /// is written or removed.
    pub fn real_folder(&mut self, path: PathBuf) {
        self.real_folders.push(path);
    }

    /// An error when a folder that must be real and holds `path` is now a link or a file.
    fn still_real(&self, path: &Path) -> Result<(), FileError> {
        for folder in self.real_folders.iter().filter(|f| path.starts_with(f)) {
            match fs::symlink_metadata(folder) {
                Ok(m) if !m.is_dir() => {
                    return Err(FileError {
                        path: folder.clone(),
                        message: "the figures folder was replaced by a link or a file while \
                                  covey was working, and covey never writes through a link \
                                  nor over a file it did not write; render again"
                            .into(),
                    })
                }
                _ => {}
            }
        }
        Ok(())
    }

    /// [`place`], once the folders that must be real still are.
    fn checked_place<'a>(
        &self,
        p: &'a Pending,
        stagings: &Stagings,
        i: usize,
        new: Ready,
    ) -> io::Result<Done<'a>> {
        self.still_real(&p.planned.path)
            .map_err(|e| io::Error::other(e.message))?;
        place(p, stagings, i, new)
    }

    /// Writes every file, or none.
    pub fn commit(self) -> Result<Committed, FileError> {
        self.commit_with(None)
    }

    /// [`Batch::commit`] with a failure injected (for tests).
    pub fn commit_with(self, mut fault: Option<Fault>) -> Result<Committed, FileError> {
        let mut done = Committed::default();
        let mut folders: Vec<&Path> = self
            .writes
            .iter()
            .map(|w| folder_of(&w.path))
            .chain(self.removals.iter().map(|(p, _)| folder_of(p)))
            .collect();
        folders.sort();
        folders.dedup();
        for folder in &folders {
            self.still_real(folder).map_err(nothing_written)?;
        }
        for folder in &folders {
            done.leftovers += temp::clean_leftovers(folder);
        }

        // What changes, and whether each target holds what it should.
        let mut pending = Vec::new();
        for planned in &self.writes {
            let old = match read_target(&planned.path, planned.bytes.digest())? {
                Target::Same => continue,
                Target::Absent => None,
                Target::Other(digest, perms) => Some((digest, perms)),
            };
            let found = old.as_ref().map(|(d, _)| *d);
            expected(&planned.path, planned.expect, found)?;
            pending.push(Pending { planned, old });
        }
        let mut stagings = Stagings(Vec::new());
        // The folders this commit creates: a failed commit removes them again, so that it
        // leaves nothing new behind (not even an empty figures or --out folder).
        let mut made = Vec::new();
        for p in &pending {
            let folder = folder_of(&p.planned.path);
            if stagings.0.iter().any(|(f, _)| *f == folder) {
                continue;
            }
            let staging = make_folders(folder, &mut made)
                .map_err(|e| cannot_write_in(folder, e))
                .and_then(|()| self.still_real(folder))
                .and_then(|()| Staging::create(folder).map_err(|e| cannot_write_in(folder, e)));
            match staging {
                Ok(s) => stagings.0.push((folder, s)),
                Err(e) => {
                    stagings.finish(false);
                    unmake(&made);
                    return Err(nothing_written(e));
                }
            }
        }

        // Every new file written and flushed to disk before any is moved.
        let stage_fault = match fault {
            Some(Fault::Stage(i)) => Some(i),
            _ => None,
        };
        let indexed: Vec<(usize, &Pending)> = pending.iter().enumerate().collect();
        let staged: Vec<Result<Ready, FileError>> = crate::parallel::map(&indexed, |(i, p)| {
            if stage_fault == Some(*i) {
                return Err(FileError {
                    path: p.planned.path.clone(),
                    message: "injected failure while writing (test hook)".into(),
                });
            }
            stagings
                .of(&p.planned.path)
                .and_then(|s| stage(s, *i, p))
                .map_err(|e| FileError {
                    path: p.planned.path.clone(),
                    message: format!("cannot write: {e}"),
                })
        });
        let mut news = Vec::with_capacity(staged.len());
        for s in staged {
            match s {
                Ok(n) => news.push(n),
                Err(e) => {
                    stagings.finish(false);
                    unmake(&made);
                    return Err(nothing_written(e));
                }
            }
        }

        // Into place, in order; on any failure, everything back.
        let mut journal: Vec<Done> = Vec::with_capacity(pending.len());
        for (i, (p, new)) in pending.iter().zip(news).enumerate() {
            let placed = match &mut fault {
                Some(Fault::Rename(k)) if *k == i => Err(io::Error::other(
                    "injected failure while moving (test hook)",
                )),
                Some(Fault::BeforeRename(k, hook)) if *k == i => {
                    hook();
                    self.checked_place(p, &stagings, i, new)
                }
                _ => self.checked_place(p, &stagings, i, new),
            };
            match placed {
                Ok(d) => journal.push(d),
                Err(e) => {
                    let problems = undo(journal, &stagings);
                    stagings.finish(!problems.is_empty());
                    // A folder still holding a file that could not be put back stays.
                    unmake(&made);
                    let mut message = e.to_string();
                    if problems.is_empty() {
                        message.push_str("; every file of this run was put back as it was");
                    } else {
                        message.push_str("; ");
                        message.push_str(&problems.join("; "));
                    }
                    return Err(FileError {
                        path: p.planned.path.clone(),
                        message,
                    });
                }
            }
        }
        done.written = journal.len();
        drop(journal);
        stagings.finish(false);
        for folder in &folders {
            sync_folder(folder);
        }

        for (path, digest) in &self.removals {
            let ours = self.still_real(path).is_ok()
                && fs::symlink_metadata(path).is_ok_and(|m| m.file_type().is_file())
                && Digest::of_file(path).ok().flatten() == Some(*digest);
            if ours && fs::remove_file(path).is_ok() {
                done.removed += 1;
            }
        }
        for folder in &self.empty_folders {
            // Fails, as it should, unless the folder is empty.
            let _ = fs::remove_dir(folder);
        }
        Ok(done)
    }
}

fn folder_of(path: &Path) -> &Path {
    match path.parent() {
        Some(p) if !p.as_os_str().is_empty() => p,
        _ => Path::new("."),
    }
}

/// What a target holds, as found before anything is written.
enum Target {
    /// No file.
    Absent,
    /// Exactly the new bytes: nothing to write.
    Same,
    /// Other bytes (their digest), and the file's permissions.
    Other(Digest, fs::Permissions),
}

/// The file at `path` now, compared with the new bytes (their digest): an
/// error when it is a link, a folder or another special file, which covey
/// never replaces. The file is read a piece at a time, not held.
fn read_target(path: &Path, new: Digest) -> Result<Target, FileError> {
    let fail = |message: String| FileError {
        path: path.to_path_buf(),
        message,
    };
    let meta = match fs::symlink_metadata(path) {
        Ok(m) => m,
        Err(e) if e.kind() == io::ErrorKind::NotFound => return Ok(Target::Absent),
        Err(e) => return Err(fail(format!("cannot read: {e}"))),
    };
    if meta.file_type().is_symlink() {
        return Err(fail(
            "is a symbolic link; covey writes no file through a link; nothing was written".into(),
        ));
    }
    if !meta.file_type().is_file() {
        return Err(fail(
            "is not a regular file; covey does not replace it; nothing was written".into(),
        ));
    }
    match Digest::of_file(path) {
        Ok(Some(d)) if d == new => Ok(Target::Same),
        Ok(Some(d)) => Ok(Target::Other(d, meta.permissions())),
        Ok(None) => Ok(Target::Absent),
        Err(e) => Err(fail(format!("cannot read: {e}"))),
    }
}

/// Whether a target that holds `found` may be replaced as `expect` says.
fn expected(path: &Path, expect: Expect, found: Option<Digest>) -> Result<(), FileError> {
    let message = match (expect, found) {
        (Expect::Absent, None) => return Ok(()),
        (Expect::Content(want), Some(have)) if want == have => return Ok(()),
        (Expect::Absent, Some(_)) => {
            "appeared while covey was working; nothing was written; render again, and covey \
             will then say whether it may replace it"
        }
        (Expect::Content(_), _) => {
            "changed while covey was working (it no longer holds what covey read or checked at \
             the start); nothing was written, so that change is kept; render again"
        }
    };
    Err(FileError {
        path: path.to_path_buf(),
        message: message.into(),
    })
}

/// The new bytes of the `i`-th changed file, `p`, in the temporary folder
/// beside it (or where they were staged already), flushed to disk and closed.
fn stage(staging: &Staging, i: usize, p: &Pending) -> io::Result<Ready> {
    let (path, mut file, held) = match &p.planned.bytes {
        NewBytes::Held(bytes) => {
            let (path, file) = staging.file(&format!("new-{i}"))?;
            (path, file, Some(bytes))
        }
        NewBytes::Staged { path, .. } => (path.clone(), temp::open_nofollow(path)?, None),
    };
    let written = (|| {
        if let Some((_, perms)) = &p.old {
            file.set_permissions(perms.clone())?;
        }
        if let Some(bytes) = held {
            file.write_all(bytes)?;
        }
        file.sync_all()?;
        file.metadata()
    })();
    match written {
        Ok(meta) => Ok(Ready {
            path,
            identity: super::identity(&meta),
        }),
        Err(e) => {
            if held.is_some() {
                let _ = fs::remove_file(&path);
            }
            Err(e)
        }
    }
}

/// Moves the new file `new` of the `i`-th changed file, `p`, into place.
fn place<'a>(p: &'a Pending, stagings: &Stagings, i: usize, new: Ready) -> io::Result<Done<'a>> {
    let path = p.planned.path.as_path();
    let changed = || {
        io::Error::other(format!(
            "{} changed while covey was working; nothing was written, so that change is kept; \
             render again",
            path.display()
        ))
    };
    match &p.old {
        Some((digest, _)) => {
            // The old file kept under a second name, or as bytes.
            let kept = stagings
                .of(path)
                .and_then(|s| s.keep(path, &format!("old-{i}")))
                .and_then(|k| match k {
                    Some(k) => Ok(Ok(k)),
                    None => fs::read(path).map(Err),
                });
            let kept = match kept {
                Ok(k) => k,
                Err(e) => {
                    let _ = fs::remove_file(&new.path);
                    return Err(e);
                }
            };
            // The last check: the file about to be replaced still holds what
            // was read at the start.
            let now = match &kept {
                Ok(k) => Digest::of_file(k),
                Err(bytes) => Ok(Some(Digest::of(bytes))),
            };
            if !matches!(now, Ok(Some(d)) if d == *digest) {
                if let Ok(k) = &kept {
                    let _ = fs::remove_file(k);
                }
                let _ = fs::remove_file(&new.path);
                return Err(changed());
            }
            if let Err(e) = fs::rename(&new.path, path) {
                if let Ok(k) = &kept {
                    let _ = fs::remove_file(k);
                }
                let _ = fs::remove_file(&new.path);
                return Err(io::Error::new(
                    e.kind(),
                    format!("cannot move the new file into place: {e}"),
                ));
            }
            Ok(Done::Replaced { path, kept })
        }
        None => {
            let created = Done::Created {
                path,
                identity: new.identity,
            };
            // A hard link fails when the name is taken: a new file never
            // replaces one that appeared meanwhile.
            match fs::hard_link(&new.path, path) {
                Ok(()) => {
                    let _ = fs::remove_file(&new.path);
                    Ok(created)
                }
                Err(e) if e.kind() == io::ErrorKind::AlreadyExists => {
                    let _ = fs::remove_file(&new.path);
                    Err(changed())
                }
                // No hard links on this file system: check, then rename.
                Err(_) => {
                    if fs::symlink_metadata(path).is_ok() {
                        let _ = fs::remove_file(&new.path);
                        return Err(changed());
                    }
                    if let Err(e) = fs::rename(&new.path, path) {
                        let _ = fs::remove_file(&new.path);
                        return Err(io::Error::new(
                            e.kind(),
                            format!("cannot move the new file into place: {e}"),
                        ));
                    }
                    Ok(created)
                }
            }
        }
    }
}

/// Puts back every file moved into place, last first. Returns what could
/// not be put back, in words.
fn undo(journal: Vec<Done>, stagings: &Stagings) -> Vec<String> {
    let mut problems = Vec::new();
    for (n, d) in journal.into_iter().rev().enumerate() {
        match d {
            Done::Replaced {
                path,
                kept: Ok(old),
            } => {
                if let Err(e) = fs::rename(&old, path) {
                    problems.push(format!(
                        "could not put back {} ({e}); its earlier content is in {}: move it \
                         elsewhere before rendering again",
                        path.display(),
                        old.display()
                    ));
                }
            }
            Done::Replaced {
                path,
                kept: Err(bytes),
            } => {
                let restored = stagings
                    .of(path)
                    .and_then(|s| s.file(&format!("back-{n}")))
                    .and_then(|(back, mut file)| {
                        file.write_all(&bytes)?;
                        file.sync_all()?;
                        fs::rename(&back, path)
                    });
                if let Err(e) = restored {
                    problems.push(format!("could not put back {} ({e})", path.display()));
                }
            }
            Done::Created { path, identity } => {
                // Only the file covey placed, not one put there since.
                let ours =
                    fs::symlink_metadata(path).is_ok_and(|m| super::identity(&m) == identity);
                if ours {
                    if let Err(e) = fs::remove_file(path) {
                        problems.push(format!("could not remove {} ({e})", path.display()));
                    }
                }
            }
        }
    }
    problems
}

/// Creates `folder` and the folders above it that do not exist, adding each one created to
/// `made` (outermost first).
fn make_folders(folder: &Path, made: &mut Vec<PathBuf>) -> io::Result<()> {
    let mut missing = Vec::new();
    let mut here = folder;
    while !here.as_os_str().is_empty() && fs::symlink_metadata(here).is_err() {
        missing.push(here);
        match here.parent() {
            Some(up) => here = up,
            None => break,
        }
    }
    for f in missing.into_iter().rev() {
        match fs::create_dir(f) {
            Ok(()) => made.push(f.to_path_buf()),
            Err(e) if e.kind() == io::ErrorKind::AlreadyExists => {}
            Err(e) => return Err(e),
        }
    }
    // An error when something on the way is not a folder.
    fs::create_dir_all(folder)
}

/// Removes the folders a failed commit created, innermost first, each only while empty.
fn unmake(made: &[PathBuf]) {
    for f in made.iter().rev() {
        let _ = fs::remove_dir(f);
    }
}

fn nothing_written(mut e: FileError) -> FileError {
    e.message.push_str("; nothing was written");
    e
}

/// Flushes a folder's entries (the renames) to disk, where the system
/// allows it.
fn sync_folder(folder: &Path) {
    #[cfg(unix)]
    if let Ok(f) = fs::File::open(folder) {
        let _ = f.sync_all();
    }
    #[cfg(not(unix))]
    let _ = folder;
}

/// The error of a folder that covey could not create or write in.
fn cannot_write_in(folder: &Path, e: io::Error) -> FileError {
    FileError {
        path: folder.to_path_buf(),
        message: format!("cannot write in this folder: {e}"),
    }
}
