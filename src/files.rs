//! The disk side of rendering: which files are documents, where their
//! renderings go, and writing them atomically.

use std::fs;
use std::io::Write;
use std::path::{Path, PathBuf};

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
                std::io::ErrorKind::NotFound => "no such file or folder".into(),
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

/// Files to write together: every file is first written to a temporary file
/// in its own folder, and only when all are written are they renamed into
/// place. An error before the renames leaves every existing file as it was.
#[derive(Default)]
pub struct Batch {
    files: Vec<(PathBuf, Vec<u8>)>,
}

impl Batch {
    pub fn new() -> Batch {
        Batch::default()
    }

    pub fn add(&mut self, path: PathBuf, bytes: impl Into<Vec<u8>>) {
        self.files.push((path, bytes.into()));
    }

    /// Writes every file; `fail_after` injects a failure after that many
    /// temporary files (for tests of the all-or-nothing promise). A file whose
    /// current content is already the new bytes is left untouched (so an
    /// unchanged rendering keeps its modification time and costs no disk
    /// flush); the others are written to temporary files and flushed to disk
    /// side by side on the thread pool, then renamed in order.
    pub fn commit_with(self, fail_after: Option<usize>) -> Result<(), FileError> {
        let cleanup = |staged: &[(PathBuf, PathBuf)]| {
            for (tmp, _) in staged {
                let _ = fs::remove_file(tmp);
            }
        };
        let mut todo: Vec<(&PathBuf, &Vec<u8>)> = Vec::new();
        for (i, (path, bytes)) in self.files.iter().enumerate() {
            if fail_after == Some(i) {
                return Err(FileError {
                    path: path.clone(),
                    message: "injected failure before writing (test hook)".into(),
                });
            }
            if fs::read(path).is_ok_and(|old| old == *bytes) {
                continue;
            }
            if let Some(dir) = path.parent().filter(|d| !d.as_os_str().is_empty()) {
                if let Err(e) = fs::create_dir_all(dir) {
                    return Err(FileError {
                        path: dir.to_path_buf(),
                        message: format!("cannot create the folder: {e}"),
                    });
                }
            }
            todo.push((path, bytes));
        }
        let written: Vec<Result<(PathBuf, PathBuf), FileError>> =
            crate::parallel::map(&todo, |(path, bytes)| {
                let tmp = temp_name(path);
                match write_synced(&tmp, bytes) {
                    Ok(()) => Ok((tmp, (*path).clone())),
                    Err(e) => {
                        let _ = fs::remove_file(&tmp);
                        Err(FileError {
                            path: (*path).clone(),
                            message: format!("cannot write: {e}"),
                        })
                    }
                }
            });
        let staged: Vec<(PathBuf, PathBuf)> = written
            .iter()
            .filter_map(|w| w.as_ref().ok().cloned())
            .collect();
        if let Some(Err(e)) = written.into_iter().find(Result::is_err) {
            cleanup(&staged);
            return Err(e);
        }
        for (tmp, path) in &staged {
            if let Err(e) = fs::rename(tmp, path) {
                cleanup(&staged);
                return Err(FileError {
                    path: path.clone(),
                    message: format!("cannot move the new file into place: {e}"),
                });
            }
        }
        Ok(())
    }

    pub fn commit(self) -> Result<(), FileError> {
        self.commit_with(None)
    }
}

fn temp_name(path: &Path) -> PathBuf {
    let name = path
        .file_name()
        .map(|n| n.to_string_lossy().into_owned())
        .unwrap_or_default();
    path.with_file_name(format!(".{name}.covey-{}.tmp", std::process::id()))
}

fn write_synced(path: &Path, bytes: &[u8]) -> std::io::Result<()> {
    let mut f = fs::File::create(path)?;
    f.write_all(bytes)?;
    f.sync_all()
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
