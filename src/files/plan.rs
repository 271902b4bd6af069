//! The write rule: before anything is written, every output of the run is
//! planned, and covey refuses (writing nothing at all) any output path that
//!
//! - is a source document of the run (other than the document itself,
//!   rendered `--in-place`), or a data file a document of the run loads;
//! - is claimed by another output of the same run (two documents of the
//!   same name rendered into one `--out` folder, `--json` on the rendering);
//! - is a symbolic link, or lies in a figures folder that is one: covey
//!   writes nothing through a link, so nothing lands outside the folder;
//! - is a folder or a special file, or holds a file covey did not write.
//!   covey knows its own files by their content: a rendering by its
//!   provenance region, an HTML page by its generator line, a JSON export by
//!   its shape, a figure by the figures folder's manifest ([`super::manifest`])
//!   listing it with its current bytes. A file that already holds exactly the
//!   new bytes is no loss and is left as it is;
//! - has a name longer than file systems allow (255 bytes).
//!
//! What passes becomes a [`Batch`] whose every write expects what was found
//! (nothing, or those bytes), so a file that changes between the plan and
//! the write is not overwritten either.

use std::collections::{HashMap, HashSet};
use std::fs;
use std::path::{Path, PathBuf};

use super::batch::{Batch, Expect};
use super::{location, manifest, same_file, Digest, NewBytes};

/// The longest file name (in bytes) that common file systems allow.
pub const NAME_MAX: usize = 255;

/// What an output is; it says how covey knows an earlier file at its path as
/// its own.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Role {
    /// `NAME.rendered.md`.
    Rendering,
    /// The source document itself, rendered `--in-place`.
    Source,
    /// `NAME.rendered.html` (`--html`).
    Html,
    /// The `--json` file.
    Json,
    /// A figure in `NAME.figures/`.
    Figure,
    /// The figures folder's list of covey's figures.
    Manifest,
}

impl Role {
    fn what(self) -> &'static str {
        match self {
            Role::Rendering => "the rendering",
            Role::Source => "the document rendered in place",
            Role::Html => "the HTML page",
            Role::Json => "the --json export",
            Role::Figure => "a figure",
            Role::Manifest => "the list of figures",
        }
    }

    /// What to do instead of writing to a path that is not free.
    fn instead(self) -> &'static str {
        match self {
            Role::Json => "choose another --json path",
            Role::Rendering | Role::Html => {
                "move that file away, or render into another folder with --out"
            }
            Role::Source => "render without --in-place",
            Role::Figure | Role::Manifest => "move that file out of the figures folder",
        }
    }
}

/// An output covey will not write, and why.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Refusal {
    pub path: PathBuf,
    pub reason: String,
}

impl std::fmt::Display for Refusal {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        write!(
            f,
            "{}: covey will not write here: {}",
            self.path.display(),
            self.reason
        )
    }
}

struct Output {
    path: PathBuf,
    bytes: NewBytes,
    role: Role,
    doc: PathBuf,
}

struct FigureSet {
    dir: PathBuf,
    doc: PathBuf,
    figures: Vec<(PathBuf, NewBytes)>,
}

/// Every output of a run, with what the run read, to be checked together.
#[derive(Default)]
pub struct Plan {
    outputs: Vec<Output>,
    claims: Vec<(PathBuf, PathBuf)>,
    sources: Vec<(PathBuf, Option<Digest>)>,
    inputs: Vec<(PathBuf, PathBuf)>,
    figure_sets: Vec<FigureSet>,
}

impl Plan {
    pub fn new() -> Plan {
        Plan::default()
    }

    /// A document of the run, with the digest of its bytes as read (None
    /// for a document not read this time).
    pub fn source(&mut self, doc: &Path, read: Option<Digest>) {
        self.sources.push((doc.to_path_buf(), read));
    }

    /// A data file that `doc` loads (or tried to).
    pub fn input(&mut self, file: &Path, doc: &Path) {
        self.inputs.push((file.to_path_buf(), doc.to_path_buf()));
    }

    /// A path that `doc` writes, though not in this run (`--watch` renders
    /// only the documents that changed): no other output may take it.
    pub fn claim(&mut self, path: &Path, doc: &Path) {
        self.claims.push((path.to_path_buf(), doc.to_path_buf()));
    }

    /// An output of `doc`.
    pub fn output(&mut self, path: PathBuf, bytes: impl Into<NewBytes>, role: Role, doc: &Path) {
        self.outputs.push(Output {
            path,
            bytes: bytes.into(),
            role,
            doc: doc.to_path_buf(),
        });
    }

    /// The figures of `doc`, each a path inside `dir` with its bytes (none,
    /// when the document draws none: earlier figures of covey's are removed).
    pub fn figures(&mut self, dir: PathBuf, doc: &Path, figures: Vec<(PathBuf, NewBytes)>) {
        self.figure_sets.push(FigureSet {
            dir,
            doc: doc.to_path_buf(),
            figures,
        });
    }

    /// Applies the write rule to every output: the batch that writes them,
    /// or every refusal.
    pub fn check(self) -> Result<Batch, Vec<Refusal>> {
        let Plan {
            mut outputs,
            claims,
            sources,
            inputs,
            figure_sets,
        } = self;
        let mut refusals = Vec::new();
        let mut removals: Vec<(PathBuf, Digest)> = Vec::new();
        let mut empty_folders = Vec::new();
        // Figures folders, which must still be real folders (not links) when covey writes.
        let mut real_folders = Vec::new();
        // Each figures folder's earlier list of covey's figures.
        let mut listed: Vec<(PathBuf, Vec<(String, Digest)>)> = Vec::new();

        // Figures folders taken: (location, whose).
        let mut folders: Vec<(PathBuf, PathBuf)> = claims
            .iter()
            .map(|(path, doc)| (location(path), doc.clone()))
            .collect();
        for set in figure_sets {
            if !set.figures.is_empty() {
                let here = location(&set.dir);
                if let Some((_, other)) = folders.iter().find(|(p, d)| *p == here && *d != set.doc)
                {
                    refusals.push(Refusal {
                        path: set.dir.clone(),
                        reason: format!(
                            "the figures of {} would go into this folder, but so would those of \
                             {}: documents with the same name need different --out folders; \
                             render them one folder at a time",
                            set.doc.display(),
                            other.display()
                        ),
                    });
                    continue;
                }
                folders.push((here, set.doc.clone()));
            }
            let dir_meta = fs::symlink_metadata(&set.dir).ok();
            let writes = !set.figures.is_empty();
            let refuse = |reason: String| Refusal {
                path: set.dir.clone(),
                reason,
            };
            match &dir_meta {
                Some(m) if m.file_type().is_symlink() => {
                    // Not followed, written through, or cleaned.
                    if writes {
                        refusals.push(refuse(format!(
                            "the figures folder is a symbolic link{}; covey writes figures only \
                             into a real folder beside the rendering, never through a link: \
                             replace the link by a folder",
                            link_target(&set.dir)
                        )));
                    }
                    continue;
                }
                Some(m) if !m.is_dir() => {
                    if writes {
                        refusals.push(refuse(
                            "this is where the figures folder goes, but it is not a folder: \
                             move it away"
                                .into(),
                        ));
                    }
                    continue;
                }
                _ => {}
            }
            real_folders.push(set.dir.clone());
            if writes && name_len(&set.dir) > NAME_MAX {
                refusals.push(refuse(too_long(&set.dir, "shorten the document's name")));
                continue;
            }
            let manifest_path = set.dir.join(manifest::FILE_NAME);
            let old = regular_file(&manifest_path)
                .and_then(|bytes| manifest::parse(&bytes).map(|list| (list, Digest::of(&bytes))));
            let mut new_list = Vec::with_capacity(set.figures.len());
            for (path, bytes) in set.figures {
                let name = path
                    .file_name()
                    .map(|n| n.to_string_lossy().into_owned())
                    .unwrap_or_default();
                if path.parent() != Some(set.dir.as_path()) {
                    refusals.push(Refusal {
                        path: path.clone(),
                        reason: "a figure outside its document's figures folder (please report \
                                 this)"
                            .into(),
                    });
                    continue;
                }
                new_list.push((name, bytes.digest()));
                outputs.push(Output {
                    path,
                    bytes,
                    role: Role::Figure,
                    doc: set.doc.clone(),
                });
            }
            if let Some((old_list, _)) = &old {
                let new_names: HashSet<&str> = new_list.iter().map(|(n, _)| n.as_str()).collect();
                for (name, digest) in old_list {
                    if !new_names.contains(name.as_str()) {
                        removals.push((set.dir.join(name), *digest));
                    }
                }
            }
            if writes {
                outputs.push(Output {
                    path: manifest_path,
                    bytes: manifest::text(&new_list).into(),
                    role: Role::Manifest,
                    doc: set.doc.clone(),
                });
            } else if let Some((_, digest)) = &old {
                removals.push((manifest_path, *digest));
                empty_folders.push(set.dir.clone());
            }
            if let Some((old_list, _)) = old {
                listed.push((set.dir, old_list));
            }
        }

        // The document written in place goes last (see `Batch`).
        outputs.sort_by_key(|o| o.role == Role::Source);
        // Every path taken so far: location -> (what it is, whose). A map, not a list: a long
        // document has tens of thousands of figures, and each is looked up.
        let mut taken: HashMap<PathBuf, (String, PathBuf, Option<Role>)> = HashMap::new();
        for (path, doc) in claims {
            let what = format!("an output of {}", doc.display());
            taken.entry(location(&path)).or_insert((what, doc, None));
        }
        let mut batch = Batch::new();
        for out in outputs {
            let here = location(&out.path);
            let mine = format!("{} of {}", out.role.what(), out.doc.display());
            let refuse = |reason: String| Refusal {
                path: out.path.clone(),
                reason,
            };
            if name_len(&out.path) > NAME_MAX {
                let hint = match out.role {
                    Role::Json => "choose a shorter --json name",
                    _ => "shorten the document's name",
                };
                refusals.push(refuse(too_long(&out.path, hint)));
                continue;
            }
            if let Some((other, whose, role)) = taken.get(&here) {
                let hint = if *whose == out.doc {
                    // The --json path is the one the user chose: that is the one to change.
                    if *role == Some(Role::Json) {
                        Role::Json.instead()
                    } else {
                        out.role.instead()
                    }
                } else {
                    "documents with the same name need different --out folders; render them \
                     one folder at a time"
                };
                refusals.push(refuse(format!(
                    "{mine} would go here, but so would {other}: {hint}"
                )));
                continue;
            }
            if let Some((src, _)) = sources.iter().find(|(src, _)| {
                same_file(&out.path, src) && !(out.role == Role::Source && location(src) == here)
            }) {
                refusals.push(refuse(format!(
                    "this is the document {}; {} must not replace it: {}",
                    src.display(),
                    out.role.what(),
                    out.role.instead()
                )));
                continue;
            }
            if let Some((_, doc)) = inputs.iter().find(|(file, _)| same_file(&out.path, file)) {
                refusals.push(refuse(format!(
                    "this is a data file that {} loads; covey never writes over its inputs: {}",
                    doc.display(),
                    out.role.instead()
                )));
                continue;
            }
            // Taken from here on, even if refused below: the path is this
            // output's, and no other output of the run may have it.
            taken.insert(
                here.clone(),
                (mine.clone(), out.doc.clone(), Some(out.role)),
            );
            let meta = match fs::symlink_metadata(&out.path) {
                Ok(m) => Some(m),
                Err(e) if e.kind() == std::io::ErrorKind::NotFound => None,
                Err(e) => {
                    // A path longer than the system allows (4096 bytes on Linux, 1024 on
                    // macOS; the error kind that says so is newer than covey's oldest Rust).
                    let hint = if location(&out.path).as_os_str().len() >= 1024 {
                        format!(
                            "the path is {} bytes long: render into a folder with a shorter path",
                            out.path.as_os_str().len()
                        )
                    } else {
                        out.role.instead().to_string()
                    };
                    refusals.push(refuse(format!("cannot look at it: {e}; {hint}")));
                    continue;
                }
            };
            let expect = match meta {
                None => Expect::Absent,
                Some(m) if m.file_type().is_symlink() => {
                    refusals.push(refuse(if out.role == Role::Source {
                        format!(
                            "this document is a symbolic link{}; --in-place does not write \
                             through links, and would not turn the link into a copy: render the \
                             file it points to, or render without --in-place",
                            link_target(&out.path)
                        )
                    } else {
                        format!(
                            "this is a symbolic link{}; covey writes no output through a link \
                             (it could lead outside the folder): remove the link, or {}",
                            link_target(&out.path),
                            out.role.instead()
                        )
                    }));
                    continue;
                }
                Some(m) if !m.is_file() => {
                    let what = if m.is_dir() {
                        "a folder"
                    } else {
                        "a special file, not a regular one"
                    };
                    refusals.push(refuse(format!(
                        "this is {what}, where {mine} would go: {}",
                        out.role.instead()
                    )));
                    continue;
                }
                Some(_) if out.role == Role::Source => {
                    // The document as read: an edit since then stops the write.
                    match sources.iter().find(|(src, _)| location(src) == here) {
                        Some((_, Some(read))) => Expect::Content(*read),
                        _ => {
                            refusals.push(refuse(
                                "the document was not read in this run (please report this)".into(),
                            ));
                            continue;
                        }
                    }
                }
                Some(_) => {
                    let Ok(bytes) = fs::read(&out.path) else {
                        refusals.push(refuse("cannot read the file there".into()));
                        continue;
                    };
                    let digest = Digest::of(&bytes);
                    let same = match &out.bytes {
                        NewBytes::Held(new) => *new == bytes,
                        NewBytes::Staged { digest: new, .. } => *new == digest,
                    };
                    if !same && !ours(out.role, &out.path, &bytes, digest, &listed) {
                        refusals.push(refuse(format!(
                            "a file is there that covey did not write ({}); covey never \
                             replaces a file it did not write: {}",
                            not_ours(out.role),
                            out.role.instead()
                        )));
                        continue;
                    }
                    Expect::Content(digest)
                }
            };
            batch.write(out.path, out.bytes, expect);
        }
        if !refusals.is_empty() {
            refusals.dedup();
            return Err(refusals);
        }
        for (path, digest) in removals {
            let read = sources.iter().any(|(s, _)| same_file(&path, s))
                || inputs.iter().any(|(f, _)| same_file(&path, f));
            if !read {
                batch.remove(path, digest);
            }
        }
        for folder in empty_folders {
            batch.remove_folder_if_empty(folder);
        }
        for folder in real_folders {
            batch.real_folder(folder);
        }
        Ok(batch)
    }
}

/// True when `bytes`, found at `path`, are an earlier output of covey's of
/// this role.
fn ours(
    role: Role,
    path: &Path,
    bytes: &[u8],
    digest: Digest,
    listed: &[(PathBuf, Vec<(String, Digest)>)],
) -> bool {
    match role {
        Role::Rendering => std::str::from_utf8(bytes).is_ok_and(|text| {
            crate::document::split_rendered(text).is_ok_and(|r| r.provenance.is_some())
        }),
        Role::Html => {
            let head = bytes.get(..bytes.len().min(4096)).unwrap_or_default();
            String::from_utf8_lossy(head).contains("<meta name=\"generator\" content=\"covey ")
        }
        Role::Json => is_covey_json(bytes),
        Role::Figure => {
            let name = path
                .file_name()
                .map(|n| n.to_string_lossy().into_owned())
                .unwrap_or_default();
            listed.iter().any(|(dir, list)| {
                Some(dir.as_path()) == path.parent()
                    && list.iter().any(|(n, d)| *n == name && *d == digest)
            })
        }
        Role::Manifest => manifest::parse(bytes).is_some(),
        Role::Source => false,
    }
}

fn not_ours(role: Role) -> String {
    match role {
        Role::Rendering => "it holds no covey provenance region".into(),
        Role::Html => "it is not a page covey made".into(),
        Role::Json => "it is not a JSON export of covey's".into(),
        Role::Figure => format!(
            "it is not listed with these bytes in the folder's {}",
            manifest::FILE_NAME
        ),
        Role::Manifest => "it is not covey's list of figures".into(),
        Role::Source => "it is not the document".into(),
    }
}

/// covey's JSON export: an object of exactly `inputs` and `outputs`, both
/// lists.
fn is_covey_json(bytes: &[u8]) -> bool {
    match serde_json::from_slice::<serde_json::Value>(bytes) {
        Ok(serde_json::Value::Object(map)) => {
            map.len() == 2
                && map.get("inputs").is_some_and(|v| v.is_array())
                && map.get("outputs").is_some_and(|v| v.is_array())
        }
        _ => false,
    }
}

/// The bytes of the regular file at `path` (not a link), if there is one.
fn regular_file(path: &Path) -> Option<Vec<u8>> {
    let meta = fs::symlink_metadata(path).ok()?;
    if !meta.file_type().is_file() {
        return None;
    }
    fs::read(path).ok()
}

fn name_len(path: &Path) -> usize {
    path.file_name().map_or(0, |n| n.as_encoded_bytes().len())
}

fn too_long(path: &Path, hint: &str) -> String {
    format!(
        "the file name is {} bytes long, and file systems allow {NAME_MAX}: {hint}",
        name_len(path)
    )
}

/// ` (to TARGET)` for a symbolic link, for messages.
fn link_target(path: &Path) -> String {
    fs::read_link(path)
        .map(|t| format!(" (to {})", t.display()))
        .unwrap_or_default()
}
