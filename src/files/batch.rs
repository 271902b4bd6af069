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
//! 3. writes every new file to a temporary file in its target's folder and
//!    flushes it to disk (side by side on the thread pool), keeping the
//!    replaced file's permissions;
//! 4. moves them into place in the order they were added. Before each
//!    replacement it gives the old file a second name (a hard link) and checks
//!    once more that it still holds the expected bytes; a new file is placed
//!    with a link that fails if the name was taken meanwhile, so it never
//!    replaces anything. If any step fails, the files already moved are put
//!    back (the old ones from their second names, the new ones removed), so
//!    new and old files are never left mixed;
//! 5. only then removes the second names, and the files the batch was asked
//!    to remove (each only while it holds the bytes given).
//!
//! The file whose loss would hurt most (the document itself, in place) is
//! added last: it is replaced last, right after its final check, and never
//! has to be put back.

use std::fs;
use std::io::{self, Write};
use std::path::{Path, PathBuf};

use super::temp::{self, Temp};
use super::{Digest, FileError};

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
    bytes: Vec<u8>,
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
    /// The file there now, if any: its digest, bytes and permissions.
    old: Option<(Digest, Vec<u8>, fs::Permissions)>,
}

/// A file moved into place, and how to undo it.
enum Done<'a> {
    Replaced {
        path: &'a Path,
        /// The old file under its second name, or its bytes where no hard
        /// link could be made.
        kept: Result<Temp, &'a [u8]>,
    },
    Created {
        path: &'a Path,
        new: Temp,
    },
}

impl Batch {
    pub fn new() -> Batch {
        Batch::default()
    }

    /// Adds a file to write at `path`, which must hold what `expect` says.
    pub fn write(&mut self, path: PathBuf, bytes: impl Into<Vec<u8>>, expect: Expect) {
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
    fn checked_place<'a>(&self, p: &'a Pending, new: Temp) -> io::Result<Done<'a>> {
        match self.still_real(&p.planned.path) {
            Ok(()) => place(p, new),
            Err(e) => {
                discard(vec![new]);
                Err(io::Error::other(e.message))
            }
        }
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
            let old = read_target(&planned.path)?;
            if old
                .as_ref()
                .is_some_and(|(_, bytes, _)| *bytes == planned.bytes)
            {
                continue;
            }
            let found = old.as_ref().map(|(d, _, _)| *d);
            expected(&planned.path, planned.expect, found)?;
            pending.push(Pending { planned, old });
        }
        for p in &pending {
            let folder = folder_of(&p.planned.path);
            fs::create_dir_all(folder).map_err(|e| FileError {
                path: folder.to_path_buf(),
                message: format!("cannot create the folder: {e}"),
            })?;
            self.still_real(folder).map_err(nothing_written)?;
        }

        // Every new file written and flushed to disk before any is moved.
        let stage_fault = match fault {
            Some(Fault::Stage(i)) => Some(i),
            _ => None,
        };
        let indexed: Vec<(usize, &Pending)> = pending.iter().enumerate().collect();
        let staged: Vec<Result<Temp, FileError>> = crate::parallel::map(&indexed, |(i, p)| {
            if stage_fault == Some(*i) {
                return Err(FileError {
                    path: p.planned.path.clone(),
                    message: "injected failure while writing (test hook)".into(),
                });
            }
            stage(p).map_err(|e| FileError {
                path: p.planned.path.clone(),
                message: format!("cannot write: {e}"),
            })
        });
        let mut temps = Vec::with_capacity(staged.len());
        let mut failed = None;
        for s in staged {
            match s {
                Ok(t) => temps.push(t),
                Err(e) => failed = failed.or(Some(e)),
            }
        }
        if let Some(e) = failed {
            discard(temps);
            return Err(nothing_written(e));
        }

        // Into place, in order; on any failure, everything back.
        let mut journal: Vec<Done> = Vec::with_capacity(pending.len());
        let mut temps = temps.into_iter();
        for (i, p) in pending.iter().enumerate() {
            let Some(new) = temps.next() else { break };
            let placed = match &mut fault {
                Some(Fault::Rename(k)) if *k == i => {
                    discard(vec![new]);
                    Err(io::Error::other(
                        "injected failure while moving (test hook)",
                    ))
                }
                Some(Fault::BeforeRename(k, hook)) if *k == i => {
                    hook();
                    self.checked_place(p, new)
                }
                _ => self.checked_place(p, new),
            };
            match placed {
                Ok(d) => journal.push(d),
                Err(e) => {
                    let problems = undo(journal);
                    discard(temps.collect());
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
        for d in journal {
            if let Done::Replaced { kept: Ok(old), .. } = d {
                let _ = fs::remove_file(&old.path);
            }
        }
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

/// The file at `path` now: None when there is none; an error when it is a
/// link, a folder or another special file, which covey never replaces.
fn read_target(path: &Path) -> Result<Option<(Digest, Vec<u8>, fs::Permissions)>, FileError> {
    let fail = |message: String| FileError {
        path: path.to_path_buf(),
        message,
    };
    let meta = match fs::symlink_metadata(path) {
        Ok(m) => m,
        Err(e) if e.kind() == io::ErrorKind::NotFound => return Ok(None),
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
    let bytes = fs::read(path).map_err(|e| fail(format!("cannot read: {e}")))?;
    Ok(Some((Digest::of(&bytes), bytes, meta.permissions())))
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

/// The new bytes of `p` in a temporary file beside it, flushed to disk.
fn stage(p: &Pending) -> io::Result<Temp> {
    let mut t = temp::create(folder_of(&p.planned.path))?;
    let written = (|| {
        if let Some((_, _, perms)) = &p.old {
            t.file.set_permissions(perms.clone())?;
        }
        t.file.write_all(&p.planned.bytes)?;
        t.file.sync_all()
    })();
    match written {
        Ok(()) => Ok(t),
        Err(e) => {
            let _ = fs::remove_file(&t.path);
            Err(e)
        }
    }
}

/// Moves the new file `new` into place at `p`.
fn place<'a>(p: &'a Pending, new: Temp) -> io::Result<Done<'a>> {
    let path = p.planned.path.as_path();
    let changed = || {
        io::Error::other(format!(
            "{} changed while covey was working; nothing was written, so that change is kept; \
             render again",
            path.display()
        ))
    };
    match &p.old {
        Some((digest, bytes, _)) => {
            let kept = match temp::keep(path) {
                Ok(k) => k,
                Err(e) => {
                    let _ = fs::remove_file(&new.path);
                    return Err(e);
                }
            };
            // The last check: the file about to be replaced still holds what
            // was read at the start.
            let now = Digest::of_file(kept.as_ref().map_or(path, |k| k.path.as_path()));
            if !matches!(now, Ok(Some(d)) if d == *digest) {
                if let Some(k) = &kept {
                    let _ = fs::remove_file(&k.path);
                }
                let _ = fs::remove_file(&new.path);
                return Err(changed());
            }
            if let Err(e) = fs::rename(&new.path, path) {
                if let Some(k) = &kept {
                    let _ = fs::remove_file(&k.path);
                }
                let _ = fs::remove_file(&new.path);
                return Err(io::Error::new(
                    e.kind(),
                    format!("cannot move the new file into place: {e}"),
                ));
            }
            Ok(Done::Replaced {
                path,
                kept: kept.ok_or(bytes.as_slice()),
            })
        }
        None => {
            // A hard link fails when the name is taken: a new file never
            // replaces one that appeared meanwhile.
            match fs::hard_link(&new.path, path) {
                Ok(()) => {
                    let _ = fs::remove_file(&new.path);
                    Ok(Done::Created { path, new })
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
                    Ok(Done::Created { path, new })
                }
            }
        }
    }
}

/// Puts back every file moved into place, last first. Returns what could
/// not be put back, in words.
fn undo(journal: Vec<Done>) -> Vec<String> {
    let mut problems = Vec::new();
    for d in journal.into_iter().rev() {
        match d {
            Done::Replaced {
                path,
                kept: Ok(old),
            } => {
                if let Err(e) = fs::rename(&old.path, path) {
                    problems.push(format!(
                        "could not put back {} ({e}); its earlier content is in {}: move it \
                         elsewhere before rendering again",
                        path.display(),
                        old.path.display()
                    ));
                }
            }
            Done::Replaced {
                path,
                kept: Err(bytes),
            } => {
                let restored = temp::create(folder_of(path)).and_then(|mut t| {
                    t.file.write_all(bytes)?;
                    t.file.sync_all()?;
                    fs::rename(&t.path, path)
                });
                if let Err(e) = restored {
                    problems.push(format!("could not put back {} ({e})", path.display()));
                }
            }
            Done::Created { path, new } => {
                // Only the file covey placed, not one put there since.
                let ours = match (new.file.metadata(), fs::symlink_metadata(path)) {
                    (Ok(a), Ok(b)) => super::identity(&a) == super::identity(&b),
                    _ => false,
                };
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

fn discard(temps: Vec<Temp>) {
    for t in temps {
        let _ = fs::remove_file(&t.path);
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
