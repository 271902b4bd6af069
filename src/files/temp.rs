//! Temporary files: where covey puts a file's new bytes before moving them
//! into place, and where it keeps a replaced file until the whole batch is in.
//!
//! A batch writes its files for one folder into a temporary folder there
//! ([`Staging`]), so that the final renames stay on one file system: the new
//! files and the second names of the replaced ones, however many, under one
//! open file and one lock, so a render of many figures never runs out of open
//! files. Its name is `.covey-` followed by 24 random hex digits from the
//! operating system, 8 check digits and `.tmp` (43 bytes whatever the
//! target's name, so a long but legal name still works). Nobody can predict
//! the name, so nobody can plant a link there in advance; the folder is
//! created exclusively (creating a folder never follows a link), and so is
//! every file in it (`O_CREAT | O_EXCL`, plus `O_NOFOLLOW` on Unix), so even a
//! link that is there is never followed. The check digits (the start of the
//! SHA-256 of the random part) make covey's own temporary names
//! recognisable: a user's file does not carry them by accident.
//!
//! While covey uses a temporary folder it holds an advisory lock on it. A run
//! that was killed leaves it unlocked, and the next render that writes into
//! that folder removes it ([`clean_leftovers`]), as it removes a temporary
//! file of that name left by an earlier version of covey; those of a run
//! still going on are locked and left alone.

use std::fs::{self, File, OpenOptions};
use std::io;
use std::path::{Path, PathBuf};
use std::time::{Duration, SystemTime};

use super::Digest;

const PREFIX: &str = ".covey-";
const SUFFIX: &str = ".tmp";
/// Hex digits of randomness in a name (96 bits).
const RANDOM_DIGITS: usize = 24;
/// Hex digits of the check on the random part.
const CHECK_DIGITS: usize = 8;
/// What the check digits are computed over, besides the random part, so that
/// they belong to covey alone.
const CHECK_DOMAIN: &[u8] = b"covey temporary file ";

/// A leftover younger than this is left alone even when unlocked: another
/// covey may have created it a moment ago and not yet taken its lock.
/// (Without advisory locks, a day: no render takes that long.)
#[cfg(unix)]
const LEFTOVER_MIN_AGE: Duration = Duration::from_secs(1);
#[cfg(not(unix))]
const LEFTOVER_MIN_AGE: Duration = Duration::from_secs(86_400);

/// A fresh temporary name: 24 random hex digits from the operating system and
/// their check digits.
pub fn fresh_name() -> io::Result<String> {
    let mut random = [0u8; RANDOM_DIGITS / 2];
    getrandom::fill(&mut random)
        .map_err(|e| io::Error::other(format!("no random numbers from the system: {e}")))?;
    let random: String = random.iter().map(|b| format!("{b:02x}")).collect();
    Ok(format!("{PREFIX}{random}{}{SUFFIX}", check(&random)))
}

fn check(random: &str) -> String {
    let mut text = CHECK_DOMAIN.to_vec();
    text.extend_from_slice(random.as_bytes());
    Digest::of(&text).hex()[..CHECK_DIGITS].to_string()
}

/// True when `name` is the name of one of covey's temporary files: the
/// pattern and its check digits.
pub fn is_covey_temp(name: &str) -> bool {
    let Some(middle) = name
        .strip_prefix(PREFIX)
        .and_then(|n| n.strip_suffix(SUFFIX))
    else {
        return false;
    };
    if middle.len() != RANDOM_DIGITS + CHECK_DIGITS
        || !middle
            .bytes()
            .all(|b| b.is_ascii_digit() || (b'a'..=b'f').contains(&b))
    {
        return false;
    }
    let (random, digits) = middle.split_at(RANDOM_DIGITS);
    check(random) == digits
}

/// Creates the file at `path`, which must not exist (not even as a link,
/// dangling or not), for writing.
pub fn open_exclusive(path: &Path) -> io::Result<File> {
    let mut options = OpenOptions::new();
    options.write(true).create_new(true);
    #[cfg(unix)]
    {
        use std::os::unix::fs::OpenOptionsExt;
        options.custom_flags(no_follow());
    }
    options.open(path)
}

/// A temporary folder in a target folder, for new files on their way there:
/// created exclusively under a fresh temporary name, locked, and removed with
/// what it holds when dropped. Files in it are created exclusively too, never
/// through a link.
pub struct Staging {
    pub path: PathBuf,
    /// Left in place when dropped (see [`Staging::finish`]).
    keep: bool,
    /// The folder itself, open and locked.
    _lock: File,
}

impl Staging {
    /// A new temporary folder in `folder`, created and locked.
    pub fn create(folder: &Path) -> io::Result<Staging> {
        let mut last = None;
        for _ in 0..8 {
            let path = folder.join(fresh_name()?);
            // Creating a folder never follows a link, and fails if the name is taken.
            match fs::create_dir(&path) {
                Ok(()) => {
                    let locked = open_nofollow(&path).and_then(|f| try_lock(&f).map(|()| f));
                    return match locked {
                        Ok(lock) => Ok(Staging {
                            path,
                            keep: false,
                            _lock: lock,
                        }),
                        Err(e) => {
                            let _ = fs::remove_dir(&path);
                            Err(io::Error::other(format!(
                                "cannot lock {}: {e}",
                                path.display()
                            )))
                        }
                    };
                }
                Err(e) if e.kind() == io::ErrorKind::AlreadyExists => last = Some(e),
                Err(e) => return Err(e),
            }
        }
        Err(last.unwrap_or_else(|| io::Error::other("no free temporary name")))
    }

    /// A new file called `name` in the folder, created and opened for writing.
    pub fn file(&self, name: &str) -> io::Result<(PathBuf, File)> {
        let path = self.path.join(name);
        let file = open_exclusive(&path)?;
        Ok((path, file))
    }

    /// A second name `name` in the folder for the file at `target` (a hard
    /// link), so that the file can be put back if its batch fails. None when
    /// no hard link can be made there.
    pub fn keep(&self, target: &Path, name: &str) -> io::Result<Option<PathBuf>> {
        let path = self.path.join(name);
        match fs::hard_link(target, &path) {
            Ok(()) => Ok(Some(path)),
            Err(e) if e.kind() == io::ErrorKind::AlreadyExists => Err(e),
            // No hard links here (some network and FAT file systems): the
            // caller keeps the old bytes itself.
            Err(_) => Ok(None),
        }
    }

    /// Removes the folder with what it holds, unless `keep` is true (it then
    /// holds a file that could not be put back: the message says where).
    pub fn finish(mut self, keep: bool) {
        self.keep = keep;
    }
}

impl Drop for Staging {
    fn drop(&mut self) {
        if !self.keep {
            empty_and_remove(&self.path);
        }
    }
}

/// Removes the files in the folder at `path` (never following a link, never
/// going into a folder), then the folder if that left it empty. Returns how
/// many files were removed.
fn empty_and_remove(path: &Path) -> usize {
    let mut removed = 0;
    if let Ok(entries) = fs::read_dir(path) {
        for entry in entries.flatten() {
            let is_dir = entry.file_type().is_ok_and(|t| t.is_dir());
            if !is_dir && fs::remove_file(entry.path()).is_ok() {
                removed += 1;
            }
        }
    }
    let _ = fs::remove_dir(path);
    removed
}

/// Takes an exclusive advisory lock on `file` without waiting (released when
/// the file is closed); an error when another process holds one.
#[cfg(unix)]
fn try_lock(file: &File) -> io::Result<()> {
    rustix::fs::flock(file, rustix::fs::FlockOperation::NonBlockingLockExclusive)
        .map_err(io::Error::from)
}

/// Without advisory locks, a leftover is told from a file in use by its age
/// alone (see [`LEFTOVER_MIN_AGE`]).
#[cfg(not(unix))]
fn try_lock(_: &File) -> io::Result<()> {
    Ok(())
}

/// `O_NOFOLLOW | O_CLOEXEC`: opening fails on a symbolic link.
#[cfg(unix)]
fn no_follow() -> i32 {
    let flags = rustix::fs::OFlags::NOFOLLOW | rustix::fs::OFlags::CLOEXEC;
    i32::try_from(flags.bits()).unwrap_or(0)
}

/// Opens `path` for reading, refusing a link.
pub fn open_nofollow(path: &Path) -> io::Result<File> {
    let mut options = OpenOptions::new();
    options.read(true);
    #[cfg(unix)]
    {
        use std::os::unix::fs::OpenOptionsExt;
        options.custom_flags(no_follow());
    }
    options.open(path)
}

/// Removes the temporary files that an interrupted covey run left in
/// `folder`: regular files and folders (never links) with covey's temporary
/// names and valid check digits, that no running covey holds locked, at least
/// a second old; a folder goes with the files in it. Returns how many files
/// were removed (a folder counts as its files, or as one when empty).
pub fn clean_leftovers(folder: &Path) -> usize {
    let Ok(entries) = fs::read_dir(folder) else {
        return 0;
    };
    let mut removed = 0;
    for entry in entries.flatten() {
        let name = entry.file_name();
        if !name.to_str().is_some_and(is_covey_temp) {
            continue;
        }
        let path = entry.path();
        let Ok(meta) = fs::symlink_metadata(&path) else {
            continue;
        };
        let kind = meta.file_type();
        if !(kind.is_file() || kind.is_dir()) || changed_within(&meta, LEFTOVER_MIN_AGE) {
            continue;
        }
        let Ok(file) = open_nofollow(&path) else {
            continue;
        };
        if try_lock(&file).is_err() {
            continue;
        }
        if kind.is_dir() {
            removed += empty_and_remove(&path).max(1);
        } else if fs::remove_file(&path).is_ok() {
            removed += 1;
        }
    }
    removed
}

/// True when the file's status changed less than `age` ago (its creation or
/// its last link, on Unix the inode change time).
fn changed_within(meta: &fs::Metadata, age: Duration) -> bool {
    #[cfg(unix)]
    let changed = {
        use std::os::unix::fs::MetadataExt;
        let secs = u64::try_from(meta.ctime()).unwrap_or(0);
        let nanos = u32::try_from(meta.ctime_nsec()).unwrap_or(0);
        SystemTime::UNIX_EPOCH.checked_add(Duration::new(secs, nanos))
    };
    #[cfg(not(unix))]
    let changed = meta.modified().ok();
    match changed.map(|t| SystemTime::now().duration_since(t)) {
        Some(Ok(elapsed)) => elapsed < age,
        // A time in the future: someone's clock is off; leave it alone.
        Some(Err(_)) => true,
        None => false,
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn names_are_fresh_short_and_recognised() {
        let a = fresh_name().unwrap_or_default();
        let b = fresh_name().unwrap_or_default();
        assert_ne!(a, b);
        assert_eq!(a.len(), 43);
        assert!(is_covey_temp(&a) && is_covey_temp(&b));
        // One digit changed breaks the check.
        let mut bad = a.clone().into_bytes();
        bad[10] = if bad[10] == b'0' { b'1' } else { b'0' };
        assert!(!is_covey_temp(&String::from_utf8(bad).unwrap_or_default()));
        assert!(!is_covey_temp(".covey-notes.tmp"));
        assert!(!is_covey_temp("block1-1.svg"));
    }
}
