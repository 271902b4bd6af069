//! `covey new NAME`: a starter procedure document with a small invented
//! data set, so that a new user has a running analysis in one command.

use std::path::{Path, PathBuf};

use crate::files::{Batch, Expect, FileError};

const DOCUMENT: &str = include_str!("procedure.md");
const DATA: &str = include_str!("example.csv");

/// Writes `NAME/NAME.md` and `NAME/data/example.csv` under `parent`.
/// Refuses when the folder exists, so nothing of the user's is overwritten.
/// Returns the document's path.
pub fn create(parent: &Path, name: &str) -> Result<PathBuf, FileError> {
    let valid = name.starts_with(|c: char| c.is_ascii_alphanumeric())
        && name
            .chars()
            .all(|c| c.is_ascii_alphanumeric() || c == '-' || c == '_');
    if !valid {
        return Err(FileError {
            path: PathBuf::from(name),
            message: "a name for `covey new` begins with a letter or a digit and uses letters, \
                      digits, `-` and `_` only"
                .into(),
        });
    }
    let folder = parent.join(name);
    if folder.exists() {
        return Err(FileError {
            path: folder,
            message: "already exists; choose another name (covey new never overwrites)".into(),
        });
    }
    let doc = folder.join(format!("{name}.md"));
    // Both files are new: the batch never replaces a file that appears
    // there meanwhile.
    let mut batch = Batch::new();
    batch.write(doc.clone(), DOCUMENT.replace("NAME", name), Expect::Absent);
    batch.write(
        folder.join("data").join("example.csv"),
        DATA,
        Expect::Absent,
    );
    batch.commit()?;
    Ok(doc)
}
