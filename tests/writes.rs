//! Files are sacred: every case of the review of covey's writes (issue 16),
//! on real files. The write rule (no output over a source, a data file, a
//! link, another output of the run, or a file covey did not write), safe
//! temporary files, the figures folder, no lost edits (a concurrent edit
//! made by the test itself), `--watch`, and quiet ends on closed or full
//! standard streams.

#![cfg(unix)]

use std::ops::ControlFlow;
use std::os::unix::fs::symlink;
use std::path::{Path, PathBuf};
use std::process::{Command, Stdio};
use std::time::{Duration, Instant};

use covey::files::{Batch, Expect, Fault};

/// A scratch folder under the target directory, fresh for each test.
fn scratch(name: &str) -> PathBuf {
    let dir = Path::new(env!("CARGO_TARGET_TMPDIR"))
        .join("writes")
        .join(name);
    let _ = std::fs::remove_dir_all(&dir);
    std::fs::create_dir_all(dir.join("data")).unwrap_or_else(|e| panic!("{e}"));
    dir
}

const DATA: &str = "unit,group,x,y\n1,A,1.5,10.2\n2,A,2.5,11.9\n3,B,1.0,12.8\n4,B,3.0,16.1\n5,C,2.0,15.0\n6,C,2.2,15.9\n";

/// A document with one table and one figure.
const DOC: &str = "# Test\n\n```covey\nload \"data/d.csv\"\nfactor group\ntable summary y by group\nmodel m: y on group + x\nplot lines m\n```\n\nMore prose.\n";

/// The same without a figure.
const PLAIN: &str =
    "# Plain\n\n```covey\nload \"data/d.csv\"\nfactor group\ntable summary y by group\n```\n";

fn write(path: &Path, text: &str) {
    if let Some(dir) = path.parent() {
        std::fs::create_dir_all(dir).unwrap_or_else(|e| panic!("{e}"));
    }
    std::fs::write(path, text).unwrap_or_else(|e| panic!("{}: {e}", path.display()));
}

fn read(path: &Path) -> String {
    std::fs::read_to_string(path).unwrap_or_else(|e| panic!("{}: {e}", path.display()))
}

fn is_link(path: &Path) -> bool {
    std::fs::symlink_metadata(path).is_ok_and(|m| m.file_type().is_symlink())
}

fn covey(dir: &Path, args: &[&str]) -> (i32, String) {
    let out = Command::new(env!("CARGO_BIN_EXE_covey"))
        .args(args)
        .current_dir(dir)
        .output()
        .unwrap_or_else(|e| panic!("cannot run covey: {e}"));
    (
        out.status.code().unwrap_or(-1),
        String::from_utf8_lossy(&out.stderr).into_owned(),
    )
}

fn setup(name: &str) -> PathBuf {
    let dir = scratch(name);
    write(&dir.join("data/d.csv"), DATA);
    write(&dir.join("doc.md"), DOC);
    dir
}

/// The names in a folder, sorted.
fn names(dir: &Path) -> Vec<String> {
    let mut out: Vec<String> = std::fs::read_dir(dir)
        .map(|d| {
            d.filter_map(|e| e.ok())
                .map(|e| e.file_name().to_string_lossy().into_owned())
                .collect()
        })
        .unwrap_or_default();
    out.sort();
    out
}

/// Asserts a refusal: exit 2, the path and the reason named, nothing written.
fn refused(code: i32, err: &str, path: &str, reason: &str) {
    assert_eq!(code, 2, "{err}");
    assert!(
        err.contains(&format!("{path}: covey will not write here: ")),
        "names {path}: {err}"
    );
    assert!(err.contains(reason), "says {reason:?}: {err}");
    assert!(err.contains("nothing was written"), "{err}");
}

// ---------------------------------------------------------------------------
// The write rule.

#[test]
fn json_never_replaces_the_document_or_its_data() {
    let dir = setup("json-over-inputs");
    let (code, err) = covey(&dir, &["render", "doc.md", "--json", "doc.md"]);
    refused(code, &err, "doc.md", "this is the document doc.md");
    assert!(err.contains("choose another --json path"), "{err}");
    assert_eq!(read(&dir.join("doc.md")), DOC);
    assert!(!dir.join("doc.rendered.md").exists(), "nothing written");
    assert!(!dir.join("doc.figures").exists(), "nothing written");

    let (code, err) = covey(&dir, &["render", "doc.md", "--json", "data/d.csv"]);
    refused(
        code,
        &err,
        "data/d.csv",
        "this is a data file that doc.md loads",
    );
    assert_eq!(read(&dir.join("data/d.csv")), DATA);

    // The same file under another name: a hard link and a path with `..`.
    std::fs::hard_link(dir.join("data/d.csv"), dir.join("alias.csv"))
        .unwrap_or_else(|e| panic!("{e}"));
    let (code, err) = covey(&dir, &["render", "doc.md", "--json", "alias.csv"]);
    refused(code, &err, "alias.csv", "data file that doc.md loads");
    let (code, err) = covey(&dir, &["render", "doc.md", "--json", "data/../doc.md"]);
    refused(code, &err, "data/../doc.md", "this is the document");
    // A data file that does not exist yet, asked for directly or through a
    // dangling link: writing there would make it the document's data.
    write(
        &dir.join("later.md"),
        "```covey\nload \"data/later.csv\"\n```\n",
    );
    write(
        &dir.join("linked.md"),
        "```covey\nload \"data/link.csv\"\n```\n",
    );
    symlink("../out.csv", dir.join("data/link.csv")).unwrap_or_else(|e| panic!("{e}"));
    let (code, err) = covey(&dir, &["render", "later.md", "--json", "data/later.csv"]);
    refused(
        code,
        &err,
        "data/later.csv",
        "data file that later.md loads",
    );
    let (code, err) = covey(&dir, &["render", "linked.md", "--json", "out.csv"]);
    refused(code, &err, "out.csv", "data file that linked.md loads");
    assert!(!dir.join("out.csv").exists() && !dir.join("data/later.csv").exists());
    // The rendering's path, claimed by the JSON export too.
    let (code, err) = covey(&dir, &["render", "doc.md", "--json", "doc.rendered.md"]);
    refused(
        code,
        &err,
        "doc.rendered.md",
        "but so would the rendering of doc.md",
    );
    assert_eq!(read(&dir.join("data/d.csv")), DATA);
    assert_eq!(read(&dir.join("doc.md")), DOC);
    assert!(!dir.join("doc.rendered.md").exists());
    // A figure's path or the list of figures, however spelled: the --json path is the one to
    // change (not "move that file out of the figures folder": there is no file yet).
    for json in [
        "doc.figures/block1-1.svg",
        "./doc.figures/../doc.figures/covey-figures.sha256",
    ] {
        let (code, err) = covey(&dir, &["render", "doc.md", "--json", json]);
        assert_eq!(code, 2, "{err}");
        assert!(
            err.contains("but so would the --json export of doc.md"),
            "{err}"
        );
        assert!(err.contains("choose another --json path"), "{err}");
        assert!(!err.contains("move that file"), "{err}");
        assert!(!dir.join("doc.figures").exists() && !dir.join("doc.rendered.md").exists());
    }
}

#[test]
fn in_place_with_json_on_the_document_writes_nothing() {
    let dir = setup("in-place-json");
    let (code, err) = covey(
        &dir,
        &["render", "--in-place", "--json", "doc.md", "doc.md"],
    );
    refused(code, &err, "doc.md", "this is the document doc.md");
    assert_eq!(read(&dir.join("doc.md")), DOC, "byte for byte");
    assert_eq!(names(&dir), ["data", "doc.md"]);
}

#[test]
fn no_output_is_written_through_a_link() {
    let dir = setup("links");
    let outside = scratch("links-outside");
    write(&outside.join("theirs.json"), "{\"theirs\": true}\n");
    write(&outside.join("theirs.md"), "not yours\n");
    symlink(outside.join("theirs.json"), dir.join("out.json")).unwrap_or_else(|e| panic!("{e}"));
    let (code, err) = covey(&dir, &["render", "doc.md", "--json", "out.json"]);
    refused(code, &err, "out.json", "this is a symbolic link");
    assert!(is_link(&dir.join("out.json")), "the link stays a link");
    assert_eq!(read(&outside.join("theirs.json")), "{\"theirs\": true}\n");

    // A link where the rendering goes, even one whose target is covey's kind of file.
    symlink(outside.join("theirs.md"), dir.join("doc.rendered.md"))
        .unwrap_or_else(|e| panic!("{e}"));
    let (code, err) = covey(&dir, &["render", "doc.md"]);
    refused(code, &err, "doc.rendered.md", "symbolic link");
    assert!(is_link(&dir.join("doc.rendered.md")));
    assert_eq!(read(&outside.join("theirs.md")), "not yours\n");
    // A dangling link is a link too.
    std::fs::remove_file(dir.join("doc.rendered.md")).unwrap_or_default();
    symlink(outside.join("nothing-yet.md"), dir.join("doc.rendered.md"))
        .unwrap_or_else(|e| panic!("{e}"));
    let (code, err) = covey(&dir, &["render", "doc.md"]);
    refused(code, &err, "doc.rendered.md", "symbolic link");
    assert!(!outside.join("nothing-yet.md").exists());
}

#[test]
fn in_place_never_turns_a_linked_document_into_a_copy() {
    let dir = setup("in-place-link");
    write(&dir.join("real/doc.md"), DOC);
    write(&dir.join("real/data/d.csv"), DATA);
    symlink("real/doc.md", dir.join("linked.md")).unwrap_or_else(|e| panic!("{e}"));
    let (code, err) = covey(&dir, &["render", "--in-place", "linked.md"]);
    refused(
        code,
        &err,
        "linked.md",
        "this document is a symbolic link (to real/doc.md); --in-place does not write through links",
    );
    assert!(is_link(&dir.join("linked.md")));
    assert_eq!(read(&dir.join("real/doc.md")), DOC);
    // Rendering the file itself in place works.
    let (code, err) = covey(&dir, &["render", "--in-place", "real/doc.md"]);
    assert_eq!(code, 0, "{err}");
    assert!(read(&dir.join("real/doc.md")).contains("<!-- covey:output -->"));
}

#[test]
fn html_in_place_is_the_rendered_page_and_never_the_users() {
    let dir = setup("html-in-place");
    write(&dir.join("doc.html"), "<p>my own report</p>\n");
    let (code, err) = covey(&dir, &["render", "--in-place", "--html", "doc.md"]);
    assert_eq!(code, 0, "{err}");
    assert_eq!(read(&dir.join("doc.html")), "<p>my own report</p>\n");
    let page = read(&dir.join("doc.rendered.html"));
    assert!(page.contains("<meta name=\"generator\" content=\"covey "));
    // A page of the user's at NAME.rendered.html is not replaced either.
    let other = setup("html-users-page");
    write(&other.join("doc.rendered.html"), "<p>mine</p>\n");
    let (code, err) = covey(&other, &["render", "--html", "doc.md"]);
    refused(
        code,
        &err,
        "doc.rendered.html",
        "a file is there that covey did not write (it is not a page covey made)",
    );
    assert_eq!(read(&other.join("doc.rendered.html")), "<p>mine</p>\n");
    assert!(
        !other.join("doc.rendered.md").exists(),
        "one refusal stops every write"
    );
}

#[test]
fn files_covey_did_not_write_are_refused_and_its_own_replaced() {
    let dir = setup("not-ours");
    write(&dir.join("doc.rendered.md"), "# My notes\n");
    let (code, err) = covey(&dir, &["render", "doc.md"]);
    refused(
        code,
        &err,
        "doc.rendered.md",
        "it holds no covey provenance region",
    );
    assert_eq!(read(&dir.join("doc.rendered.md")), "# My notes\n");
    std::fs::remove_file(dir.join("doc.rendered.md")).unwrap_or_default();

    write(&dir.join("results.json"), "{\"mine\": [1, 2]}\n");
    let (code, err) = covey(&dir, &["render", "doc.md", "--json", "results.json"]);
    refused(code, &err, "results.json", "not a JSON export of covey's");
    assert_eq!(read(&dir.join("results.json")), "{\"mine\": [1, 2]}\n");

    // A folder where a file would go.
    std::fs::create_dir_all(dir.join("folder.json")).unwrap_or_default();
    let (code, err) = covey(&dir, &["render", "doc.md", "--json", "folder.json"]);
    refused(code, &err, "folder.json", "this is a folder");

    // covey's own outputs are replaced when the results change, and left as
    // they are when they do not.
    let args = ["render", "--html", "doc.md", "--json", "mine.json"];
    let (code, err) = covey(&dir, &args);
    assert_eq!(code, 0, "{err}");
    let (code, err) = covey(&dir, &args);
    assert_eq!(code, 0, "{err}");
    write(&dir.join("data/d.csv"), &DATA.replace("16.1", "17.3"));
    let (code, err) = covey(&dir, &args);
    assert_eq!(code, 0, "{err}");
    for f in ["doc.rendered.md", "doc.rendered.html", "mine.json"] {
        assert!(read(&dir.join(f)).contains("17.3"), "{f} is new");
    }
}

#[test]
fn two_documents_of_one_name_cannot_share_an_out_folder() {
    let dir = scratch("same-name");
    for sub in ["a", "b"] {
        write(&dir.join(sub).join("data/d.csv"), DATA);
        write(&dir.join(sub).join("doc.md"), DOC);
    }
    let (code, err) = covey(&dir, &["render", "--out", "site", "a/doc.md", "b/doc.md"]);
    refused(
        code,
        &err,
        "site/doc.rendered.md",
        "documents with the same name need different --out folders",
    );
    // The figures folder is refused in one sentence, without runs of spaces left by a broken
    // line continuation in its message.
    assert!(
        err.contains("would go into this folder, but so would those of "),
        "{err}"
    );
    assert!(!err.contains("  "), "{err}");
    assert!(!dir.join("site").exists(), "nothing written: {err}");
    // The same document named twice is rendered once.
    let (code, err) = covey(&dir, &["render", "a/doc.md", "a/./doc.md"]);
    assert_eq!(code, 0, "{err}");
}

#[test]
fn a_name_too_long_for_the_temporary_suffix_still_works() {
    let dir = scratch("long-names");
    write(&dir.join("data/d.csv"), DATA);
    // The rendering's name is 247 bytes: 235 + ".rendered.md".
    let stem = "n".repeat(235);
    write(&dir.join(format!("{stem}.md")), PLAIN);
    let (code, err) = covey(&dir, &["render", &format!("{stem}.md")]);
    assert_eq!(code, 0, "{err}");
    assert!(dir.join(format!("{stem}.rendered.md")).exists());
    // In place, a document name of 255 bytes.
    let longest = format!("{}.md", "p".repeat(252));
    write(&dir.join(&longest), PLAIN);
    let (code, err) = covey(&dir, &["render", "--in-place", &longest]);
    assert_eq!(code, 0, "{err}");
    assert!(read(&dir.join(&longest)).contains("<!-- covey:output -->"));
    // A rendering whose name cannot exist is refused before anything runs into it.
    let too = format!("{}.md", "q".repeat(250));
    write(&dir.join(&too), PLAIN);
    let (code, err) = covey(&dir, &["render", &too]);
    assert_eq!(code, 2, "{err}");
    assert!(
        err.contains("the file name is 262 bytes long, and file systems allow 255: shorten the document's name"),
        "{err}"
    );
}

/// An --out folder whose path is longer than the system allows (each name short enough): the
/// refusal says what to do, and no folder of it is made.
#[test]
fn an_out_path_too_long_for_the_system_is_refused_with_what_to_do() {
    let dir = setup("path-too-long");
    let long = vec!["d".repeat(200); 25].join("/");
    let (code, err) = covey(&dir, &["render", "--out", &long, "doc.md"]);
    assert_eq!(code, 2, "{err}");
    assert!(
        err.contains("render into a folder with a shorter path"),
        "{err}"
    );
    assert!(err.contains("nothing was written"), "{err}");
    assert_eq!(names(&dir), ["data", "doc.md"]);
}

// ---------------------------------------------------------------------------
// The figures folder.

#[test]
fn figure_clean_up_removes_only_covey_figures() {
    let dir = setup("figures-clean-up");
    let two = DOC.replace("plot lines m\n", "plot lines m\nplot residuals m\n");
    write(&dir.join("doc.md"), &two);
    let (code, err) = covey(&dir, &["render", "doc.md"]);
    assert_eq!(code, 0, "{err}");
    let figs = dir.join("doc.figures");
    assert_eq!(
        names(&figs),
        ["block1-1.svg", "block1-2.svg", "covey-figures.sha256"]
    );
    write(&figs.join("block-diagram.svg"), "<svg>the user's</svg>");
    write(&figs.join("block9-9.svg"), "<svg>the user's too</svg>");
    write(&dir.join("doc.md"), DOC);
    let (code, err) = covey(&dir, &["render", "doc.md"]);
    assert_eq!(code, 0, "{err}");
    assert_eq!(
        names(&figs),
        [
            "block-diagram.svg",
            "block1-1.svg",
            "block9-9.svg",
            "covey-figures.sha256"
        ],
        "covey's block1-2.svg went; the user's files stay"
    );

    // A figure edited by hand is not covey's any more: not replaced...
    write(&figs.join("block1-1.svg"), "<svg>touched up</svg>");
    write(&dir.join("data/d.csv"), &DATA.replace("16.1", "17.3"));
    let (code, err) = covey(&dir, &["render", "doc.md"]);
    refused(
        code,
        &err,
        "doc.figures/block1-1.svg",
        "it is not listed with these bytes in the folder's covey-figures.sha256",
    );
    assert_eq!(read(&figs.join("block1-1.svg")), "<svg>touched up</svg>");
    // ... nor removed when no longer drawn.
    write(&dir.join("doc.md"), PLAIN);
    let (code, err) = covey(&dir, &["render", "doc.md"]);
    assert_eq!(code, 0, "{err}");
    assert_eq!(
        names(&figs),
        ["block-diagram.svg", "block1-1.svg", "block9-9.svg"],
        "the list of figures goes with covey's last figure"
    );
    // A user's file where covey would now draw is refused.
    write(&dir.join("doc.md"), DOC);
    let (code, err) = covey(&dir, &["render", "doc.md"]);
    refused(
        code,
        &err,
        "doc.figures/block1-1.svg",
        "covey did not write",
    );
}

/// A list of figures edited by hand (or by another program) to name a user's file with its
/// very bytes does not make that file covey's: covey lists, replaces and removes only names
/// it gives figures (`blockB-N.svg`).
#[test]
fn a_hand_edited_list_of_figures_never_gives_covey_a_users_file() {
    let dir = setup("figures-hand-edited");
    let (code, err) = covey(&dir, &["render", "doc.md"]);
    assert_eq!(code, 0, "{err}");
    let figs = dir.join("doc.figures");
    let list = figs.join("covey-figures.sha256");
    let users = ["notes.txt", "block1-1.svg.bak", "plot.svg", "block1-1.png"];
    let mut edited = read(&list);
    for name in users {
        let text = format!("the user's {name}");
        write(&figs.join(name), &text);
        edited.push_str(&format!(
            "{}  {name}\n",
            covey::files::Digest::of(text.as_bytes()).hex()
        ));
    }
    write(&list, &edited);
    // Drawing nothing now: covey's figure and list go, the user's files stay.
    write(&dir.join("doc.md"), PLAIN);
    let (code, err) = covey(&dir, &["render", "doc.md"]);
    assert_eq!(code, 0, "{err}");
    let mut want: Vec<&str> = users.to_vec();
    want.sort_unstable();
    assert_eq!(names(&figs), want);
    for name in users {
        assert_eq!(read(&figs.join(name)), format!("the user's {name}"));
    }
}

#[test]
fn an_emptied_figures_folder_goes() {
    let dir = setup("figures-gone");
    let (code, err) = covey(&dir, &["render", "doc.md"]);
    assert_eq!(code, 0, "{err}");
    write(&dir.join("doc.md"), PLAIN);
    let (code, err) = covey(&dir, &["render", "doc.md"]);
    assert_eq!(code, 0, "{err}");
    assert!(!dir.join("doc.figures").exists());
}

#[test]
fn a_linked_figures_folder_is_not_followed() {
    let dir = setup("figures-link");
    let elsewhere = scratch("figures-link-target");
    write(&elsewhere.join("block1-1.svg"), "<svg>not covey's</svg>");
    write(&elsewhere.join("block1-2.svg"), "<svg>nor this</svg>");
    symlink(&elsewhere, dir.join("doc.figures")).unwrap_or_else(|e| panic!("{e}"));
    let (code, err) = covey(&dir, &["render", "doc.md"]);
    refused(
        code,
        &err,
        "doc.figures",
        "the figures folder is a symbolic link",
    );
    assert!(!dir.join("doc.rendered.md").exists());
    // Without figures to draw, nothing is written or removed there either.
    write(&dir.join("doc.md"), PLAIN);
    let (code, err) = covey(&dir, &["render", "doc.md"]);
    assert_eq!(code, 0, "{err}");
    assert_eq!(names(&elsewhere), ["block1-1.svg", "block1-2.svg", "data"]);
    assert!(is_link(&dir.join("doc.figures")));
    // Even a manifest planted there names nothing covey removes through the link.
    let planted = format!(
        "{}\n{}  block1-1.svg\n",
        "# Figures written by covey, with the SHA-256 of each. covey replaces or removes only the files listed here, and only while they hold these bytes.",
        covey::files::Digest::of(b"<svg>not covey's</svg>").hex()
    );
    write(&elsewhere.join("covey-figures.sha256"), &planted);
    let (code, err) = covey(&dir, &["render", "doc.md"]);
    assert_eq!(code, 0, "{err}");
    assert!(elsewhere.join("block1-1.svg").exists());
}

// ---------------------------------------------------------------------------
// Temporary files and the all-or-nothing commit.

#[test]
fn a_planted_link_is_never_opened_for_writing() {
    let dir = scratch("planted");
    let outside = scratch("planted-outside");
    write(&outside.join("victim.txt"), "precious\n");
    let name = covey::files::temp::fresh_name().unwrap_or_else(|e| panic!("{e}"));
    symlink(outside.join("victim.txt"), dir.join(&name)).unwrap_or_else(|e| panic!("{e}"));
    assert!(covey::files::temp::open_exclusive(&dir.join(&name)).is_err());
    symlink(outside.join("absent.txt"), dir.join("dangling")).unwrap_or_else(|e| panic!("{e}"));
    assert!(covey::files::temp::open_exclusive(&dir.join("dangling")).is_err());
    assert_eq!(read(&outside.join("victim.txt")), "precious\n");
    assert!(!outside.join("absent.txt").exists());
    // Names are fresh each time: nothing to plant in advance.
    let again = covey::files::temp::fresh_name().unwrap_or_default();
    assert_ne!(name, again);
    assert_eq!(again.len(), 43);
}

#[test]
fn leftovers_of_a_killed_run_are_cleaned_and_nothing_else() {
    let dir = setup("leftovers");
    let temp = |n: usize| -> Vec<String> {
        (0..n)
            .map(|_| covey::files::temp::fresh_name().unwrap_or_default())
            .collect()
    };
    let left = temp(3);
    for n in &left {
        write(&dir.join(n), "half a rendering");
    }
    // Look-alikes of the user's, a link, and one held by a running covey (locked).
    let mut forged = left[0].clone().into_bytes();
    forged[8] = if forged[8] == b'a' { b'b' } else { b'a' };
    let forged = String::from_utf8(forged).unwrap_or_default();
    write(&dir.join(&forged), "the user's");
    write(&dir.join(".covey-notes.tmp"), "the user's");
    let linked = temp(1).remove(0);
    symlink("data/d.csv", dir.join(&linked)).unwrap_or_else(|e| panic!("{e}"));
    let busy = temp(1).remove(0);
    write(&dir.join(&busy), "in use");
    let held = std::fs::File::open(dir.join(&busy)).unwrap_or_else(|e| panic!("{e}"));
    rustix::fs::flock(&held, rustix::fs::FlockOperation::NonBlockingLockExclusive)
        .unwrap_or_else(|e| panic!("{e}"));
    // Leftovers younger than a second might be another run's, just created.
    std::thread::sleep(Duration::from_millis(1100));
    let (code, err) = covey(&dir, &["render", "doc.md"]);
    assert_eq!(code, 0, "{err}");
    assert!(
        err.contains("removed 3 temporary files left by an interrupted covey run"),
        "{err}"
    );
    for n in &left {
        assert!(!dir.join(n).exists(), "{n}");
    }
    for n in [&forged, ".covey-notes.tmp", &busy] {
        assert!(dir.join(n).exists(), "{n} stays");
    }
    assert!(is_link(&dir.join(&linked)), "a link is not covey's");
    assert_eq!(read(&dir.join("data/d.csv")), DATA);
    drop(held);
    // No temporary file of covey's own is left after a render.
    let mine: Vec<String> = names(&dir)
        .into_iter()
        .filter(|n| covey::files::temp::is_covey_temp(n) && *n != busy && *n != linked)
        .collect();
    assert!(mine.is_empty(), "{mine:?}");
}

#[test]
fn a_leftover_temporary_folder_is_cleaned_and_a_busy_one_is_not() {
    let dir = setup("leftover-folders");
    let name = || covey::files::temp::fresh_name().unwrap_or_default();
    let left = name();
    write(&dir.join(&left).join("new-0"), "half a figure");
    write(&dir.join(&left).join("old-1"), "a second name");
    let busy = name();
    write(&dir.join(&busy).join("new-0"), "in use");
    let held = std::fs::File::open(dir.join(&busy)).unwrap_or_else(|e| panic!("{e}"));
    rustix::fs::flock(&held, rustix::fs::FlockOperation::NonBlockingLockExclusive)
        .unwrap_or_else(|e| panic!("{e}"));
    std::thread::sleep(Duration::from_millis(1100));
    let (code, err) = covey(&dir, &["render", "doc.md"]);
    assert_eq!(code, 0, "{err}");
    assert!(
        err.contains("removed 2 temporary files left by an interrupted covey run"),
        "{err}"
    );
    assert!(!dir.join(&left).exists());
    assert_eq!(read(&dir.join(&busy).join("new-0")), "in use");
    drop(held);
}

#[test]
fn a_render_of_more_figures_than_open_files_allowed_is_written() {
    // Every figure used to wait in its own open temporary file: 100 figures
    // under a limit of 32 open files failed with "Too many open files".
    let dir = setup("open-files");
    let plots = "plot lines m\n".repeat(100);
    write(
        &dir.join("doc.md"),
        &format!("# Many figures\n\n```covey\nload \"data/d.csv\"\nfactor group\nmodel m: y on group + x\n{plots}```\n"),
    );
    let out = Command::new("sh")
        .args(["-c", "ulimit -n 32 && exec \"$0\" render doc.md"])
        .arg(env!("CARGO_BIN_EXE_covey"))
        .current_dir(&dir)
        .output()
        .unwrap_or_else(|e| panic!("cannot run covey: {e}"));
    let err = String::from_utf8_lossy(&out.stderr);
    assert_eq!(out.status.code(), Some(0), "{err}");
    let figures = names(&dir.join("doc.figures"));
    assert_eq!(figures.len(), 101, "100 figures and their list");
    let temps: Vec<String> = names(&dir)
        .into_iter()
        .chain(figures)
        .filter(|n| covey::files::temp::is_covey_temp(n))
        .collect();
    assert!(temps.is_empty(), "{temps:?}");
}

fn expect(p: &Path) -> Expect {
    Expect::current(p).unwrap_or_else(|e| panic!("{e}"))
}

#[test]
fn a_failure_during_the_renames_puts_everything_back() {
    for failing in 0..3 {
        let dir = scratch(&format!("rollback-{failing}"));
        let (a, b, c) = (dir.join("a.md"), dir.join("b.json"), dir.join("new.svg"));
        write(&a, "old a");
        write(&b, "old b");
        let mut batch = Batch::new();
        batch.write(a.clone(), "new a", expect(&a));
        batch.write(b.clone(), "new b", expect(&b));
        batch.write(c.clone(), "new c", expect(&c));
        let e = batch
            .commit_with(Some(Fault::Rename(failing)))
            .err()
            .unwrap_or_else(|| panic!("the injected failure is reported"));
        assert!(
            e.message
                .contains("every file of this run was put back as it was"),
            "{e}"
        );
        assert_eq!(read(&a), "old a", "failing at {failing}");
        assert_eq!(read(&b), "old b", "failing at {failing}");
        assert!(!c.exists(), "failing at {failing}");
        assert_eq!(names(&dir), ["a.md", "b.json", "data"], "no temporary file");
    }
}

/// A failed commit leaves nothing new behind: the folders it created for its files (a new
/// `--out` folder, several levels deep, and a figures folder) go again, whichever step failed.
#[test]
fn a_failed_commit_leaves_no_folder_it_created() {
    for failing in 0..3 {
        for stage in [false, true] {
            let dir = scratch(&format!("no-new-folder-{failing}-{stage}"));
            let a = dir.join("a.md");
            write(&a, "old a");
            let rendering = dir.join("out/deep/doc.rendered.md");
            let figure = dir.join("out/deep/doc.figures/block1-1.svg");
            let mut batch = Batch::new();
            batch.write(a.clone(), "new a", expect(&a));
            batch.write(rendering, "rendering", Expect::Absent);
            batch.write(figure, "<svg/>", Expect::Absent);
            let fault = if stage {
                Fault::Stage(failing)
            } else {
                Fault::Rename(failing)
            };
            let e = batch
                .commit_with(Some(fault))
                .err()
                .unwrap_or_else(|| panic!("the injected failure is reported"));
            let case = format!("failing at {failing}, staging {stage}: {e}");
            assert_eq!(read(&a), "old a", "{case}");
            assert_eq!(names(&dir), ["a.md", "data"], "{case}");
        }
    }
    // A folder that was there before stays, even when the commit leaves it empty.
    let dir = scratch("no-new-folder-kept");
    std::fs::create_dir_all(dir.join("out")).unwrap_or_else(|e| panic!("{e}"));
    let mut batch = Batch::new();
    batch.write(dir.join("out/x.md"), "x", Expect::Absent);
    assert!(batch.commit_with(Some(Fault::Rename(0))).is_err());
    assert_eq!(names(&dir), ["data", "out"]);
    assert!(names(&dir.join("out")).is_empty());
}

#[test]
fn a_file_changed_just_before_its_rename_stops_the_batch() {
    let dir = scratch("last-check");
    let (a, doc) = (dir.join("a.html"), dir.join("doc.md"));
    write(&a, "old page");
    write(&doc, "the document as read");
    let mut batch = Batch::new();
    batch.write(a.clone(), "new page", expect(&a));
    batch.write(doc.clone(), "the document rendered", expect(&doc));
    let doc2 = doc.clone();
    let mut edit = move || write(&doc2, "the document, edited meanwhile");
    let e = batch
        .commit_with(Some(Fault::BeforeRename(1, &mut edit)))
        .err()
        .unwrap_or_else(|| panic!("the change is noticed"));
    assert!(e.message.contains("changed while covey was working"), "{e}");
    assert_eq!(read(&doc), "the document, edited meanwhile");
    assert_eq!(read(&a), "old page", "the page written first is put back");
    assert_eq!(names(&dir), ["a.html", "data", "doc.md"]);
}

#[test]
fn a_new_file_never_replaces_one_that_appeared_meanwhile() {
    let dir = scratch("appeared");
    let target = dir.join("new.md");
    let mut batch = Batch::new();
    batch.write(target.clone(), "covey's", Expect::Absent);
    let t = target.clone();
    let mut appear = move || write(&t, "the user's");
    let e = batch
        .commit_with(Some(Fault::BeforeRename(0, &mut appear)))
        .err()
        .unwrap_or_else(|| panic!("refused"));
    assert!(e.message.contains("changed while covey was working"), "{e}");
    assert_eq!(read(&target), "the user's");
}

#[test]
fn replacing_keeps_the_files_permissions() {
    use std::os::unix::fs::PermissionsExt;
    let dir = setup("permissions");
    let (code, err) = covey(&dir, &["render", "--in-place", "doc.md"]);
    assert_eq!(code, 0, "{err}");
    let doc = dir.join("doc.md");
    std::fs::set_permissions(&doc, std::fs::Permissions::from_mode(0o640)).unwrap_or_default();
    write(&dir.join("data/d.csv"), &DATA.replace("16.1", "17.3"));
    let (code, err) = covey(&dir, &["render", "--in-place", "doc.md"]);
    assert_eq!(code, 0, "{err}");
    assert!(read(&doc).contains("17.3"));
    let mode = std::fs::metadata(&doc).map(|m| m.permissions().mode() & 0o777);
    assert_eq!(mode.ok(), Some(0o640));
}

// ---------------------------------------------------------------------------
// No lost edits.

#[test]
fn an_edit_saved_during_an_in_place_render_is_kept() {
    let dir = setup("concurrent-edit");
    let doc = dir.join("doc.md");
    let opts = covey::RenderOptions {
        in_place: true,
        html: true,
        ..Default::default()
    };
    // The render runs the document; then, before it writes, the user saves.
    let prepared = covey::prepare(std::slice::from_ref(&doc), &opts);
    let edited = DOC.replace("More prose.", "More prose, saved by the user meanwhile.");
    write(&doc, &edited);
    let report = prepared.commit();
    assert_eq!(report.verdict, covey::Verdict::Failed);
    let said = report.lines.join("\n");
    assert!(
        said.contains("doc.md: changed while covey was working")
            && said.contains("nothing was written"),
        "{said}"
    );
    assert_eq!(read(&doc), edited, "the edit is kept");
    assert!(
        !dir.join("doc.rendered.html").exists(),
        "nothing was written"
    );
    assert!(!dir.join("doc.figures").exists(), "nothing was written");
    // The next render takes the edit in.
    let report = covey::render(std::slice::from_ref(&doc), &opts);
    assert_eq!(report.verdict, covey::Verdict::Ok, "{:?}", report.lines);
    let now = read(&doc);
    assert!(now.contains("saved by the user meanwhile") && now.contains("<!-- covey:output -->"));
}

/// Runs `covey::watch` on `path` (a document or a folder) for `rounds`
/// looks, calling `during` with every line said; returns the lines.
fn watch(
    path: &Path,
    opts: &covey::RenderOptions,
    rounds: usize,
    mut during: impl FnMut(&str),
) -> Vec<String> {
    let mut heard = Vec::new();
    covey::watch(
        &[path.to_path_buf()],
        opts,
        Duration::from_millis(50),
        Some(rounds),
        &mut |line: &str| {
            heard.push(line.to_string());
            during(line);
            ControlFlow::Continue(())
        },
        &|| false,
    );
    heard
}

fn renders(heard: &[String]) -> usize {
    heard.iter().filter(|l| l.starts_with("rendered")).count()
}

#[test]
fn an_idle_watch_runs_nothing() {
    let dir = setup("watch-idle");
    let opts = covey::RenderOptions::default();
    let data = dir.join("data/d.csv");
    let mut touched = false;
    let heard = watch(&dir.join("doc.md"), &opts, 12, |line| {
        // Touching a file without changing it runs nothing either.
        if line.starts_with("rendered") && !touched {
            touched = true;
            let f = std::fs::File::options().append(true).open(&data);
            if let Ok(f) = f {
                let _ = f.set_modified(std::time::SystemTime::now() + Duration::from_secs(5));
            }
        }
    });
    assert_eq!(renders(&heard), 1, "{heard:?}");
    assert!(!heard.iter().any(|l| l.starts_with("changed")), "{heard:?}");
}

#[test]
fn an_in_place_watch_does_not_render_its_own_write_again() {
    let dir = setup("watch-in-place");
    let opts = covey::RenderOptions {
        in_place: true,
        ..Default::default()
    };
    let doc = dir.join("doc.md");
    let mut edited = false;
    let heard = watch(&doc, &opts, 16, |line| {
        if line.starts_with("rendered") && !edited {
            edited = true;
            // The user edits the document in place right after the render.
            let now = std::fs::read_to_string(&doc).unwrap_or_default();
            let _ = std::fs::write(&doc, now.replace("More prose.", "Edited prose."));
        }
    });
    assert_eq!(
        renders(&heard),
        2,
        "once, then once for the edit: {heard:?}"
    );
    let now = read(&doc);
    assert!(now.contains("Edited prose.") && now.contains("<!-- covey:output -->"));
}

#[test]
fn an_edit_saved_right_after_a_watch_render_is_rendered_next() {
    let dir = setup("watch-gap");
    let opts = covey::RenderOptions::default();
    let data = dir.join("data/d.csv");
    let mut saved = false;
    // The data change as soon as the first render is done, before the
    // watcher looks at anything: an old watcher took its fingerprints only
    // now and never rendered this change.
    let heard = watch(&dir.join("doc.md"), &opts, 10, |line| {
        if line.starts_with("rendered") && !saved {
            saved = true;
            let _ = std::fs::write(&data, DATA.replace("16.1", "18.4"));
        }
    });
    assert_eq!(renders(&heard), 2, "{heard:?}");
    assert!(read(&dir.join("doc.rendered.md")).contains("18.4"));
}

#[test]
fn a_watch_notices_data_that_appear() {
    let dir = setup("watch-appear");
    std::fs::remove_file(dir.join("data/d.csv")).unwrap_or_default();
    let opts = covey::RenderOptions::default();
    let data = dir.join("data/d.csv");
    let mut written = false;
    let heard = watch(&dir.join("doc.md"), &opts, 10, |line| {
        if line.starts_with("rendered with errors") && !written {
            written = true;
            let _ = std::fs::write(&data, DATA);
        }
    });
    assert!(
        heard
            .iter()
            .any(|l| l.starts_with("changed: ") && l.contains("d.csv")),
        "{heard:?}"
    );
    assert!(
        heard.iter().any(|l| l.starts_with("rendered: ")),
        "rendered without errors once the data are there: {heard:?}"
    );
}

#[test]
fn a_watched_folder_renders_a_new_document() {
    let dir = setup("watch-folder");
    let opts = covey::RenderOptions::default();
    let mut added = false;
    let heard = watch(&dir, &opts, 10, |line| {
        if line.starts_with("rendered") && !added {
            added = true;
            write(&dir.join("second.md"), PLAIN);
        }
    });
    assert!(
        heard
            .iter()
            .any(|l| l.starts_with("changed: ") && l.contains("second.md (new)")),
        "{heard:?}"
    );
    assert_eq!(
        renders(&heard),
        2,
        "the first document is not run again: {heard:?}"
    );
    assert!(dir.join("second.rendered.md").exists());
}

#[test]
fn a_watch_renders_once_a_refused_path_is_cleared() {
    let dir = setup("watch-refused");
    let mine = dir.join("doc.rendered.md");
    write(&mine, "# My notes\n");
    let opts = covey::RenderOptions::default();
    let mut moved = false;
    let heard = watch(&dir.join("doc.md"), &opts, 10, |line| {
        if line.starts_with("nothing was written") && !moved {
            moved = true;
            let _ = std::fs::rename(&mine, dir.join("notes.md"));
        }
    });
    assert!(moved, "{heard:?}");
    assert_eq!(renders(&heard), 1, "{heard:?}");
    assert!(read(&mine).contains("<!-- covey:provenance -->"));
    assert_eq!(read(&dir.join("notes.md")), "# My notes\n");
}

// ---------------------------------------------------------------------------
// Closed and full standard streams.

/// A stream whose reader is gone: writing to it fails with a broken pipe.
fn closed() -> Stdio {
    let (ours, theirs) = std::os::unix::net::UnixStream::pair().unwrap_or_else(|e| panic!("{e}"));
    drop(theirs);
    Stdio::from(std::os::fd::OwnedFd::from(ours))
}

fn full() -> Stdio {
    Stdio::from(
        std::fs::OpenOptions::new()
            .write(true)
            .open("/dev/full")
            .unwrap_or_else(|e| panic!("/dev/full: {e}")),
    )
}

fn status(dir: &Path, args: &[&str], stdout: Stdio, stderr: Stdio) -> (i32, String) {
    let out = Command::new(env!("CARGO_BIN_EXE_covey"))
        .args(args)
        .current_dir(dir)
        .stdout(stdout)
        .stderr(stderr)
        .output()
        .unwrap_or_else(|e| panic!("{e}"));
    (
        out.status.code().unwrap_or(-1),
        String::from_utf8_lossy(&out.stderr).into_owned(),
    )
}

#[test]
fn a_closed_or_full_stream_ends_quietly() {
    let dir = setup("streams");
    // `covey new p | true`: the work is done, the reader left: exit 0.
    let (code, err) = status(&dir, &["new", "p"], closed(), Stdio::piped());
    assert_eq!(code, 0, "{err}");
    assert!(!err.contains("panicked"), "{err}");
    assert!(dir.join("p/p.md").exists());
    // `covey new q >/dev/full`: the message is lost to a full disk: exit 2, said on stderr.
    let (code, err) = status(&dir, &["new", "q"], full(), Stdio::piped());
    assert_eq!(code, 2, "{err}");
    assert!(err.contains("cannot write to standard output"), "{err}");
    assert!(dir.join("q/q.md").exists());
    // Errors, warnings and verdicts with stderr closed or full keep their exit codes.
    let cases: [(&[&str], i32); 3] = [
        (&["render", "missing.md"], 2),
        (&["check", "doc.md"], 1),
        (&["render", "doc.md"], 0),
    ];
    for (args, want) in cases {
        let (code, _) = status(&dir, args, Stdio::null(), closed());
        assert_eq!(code, want, "{args:?} with stderr closed");
        let (code, _) = status(&dir, args, Stdio::null(), full());
        let want_full = if want == 0 || want == 1 { 2 } else { want };
        assert_eq!(code, want_full, "{args:?} with stderr full");
    }
    // `--help` into a closed pipe.
    let (code, _) = status(&dir, &["--help"], closed(), Stdio::null());
    assert_eq!(code, 0);
}

/// Waits for `child` to end (at most 30 s, a guard against a hang, not a
/// timing assertion); its exit code.
fn ended(child: &mut std::process::Child, what: &str) -> Option<i32> {
    let start = Instant::now();
    loop {
        match child.try_wait() {
            Ok(Some(s)) => return s.code(),
            _ if start.elapsed() > Duration::from_secs(30) => {
                let _ = child.kill();
                panic!("{what} did not end");
            }
            _ => std::thread::sleep(Duration::from_millis(50)),
        }
    }
}

#[test]
fn an_idle_watch_ends_when_its_stderr_closes() {
    use std::io::BufRead;
    // The reader leaves and nothing changes: the watcher used to go on until
    // the next change gave it something to say. It ends within a look, with
    // the code of its last render.
    let dir = setup("watch-idle-stderr");
    let mut child = Command::new(env!("CARGO_BIN_EXE_covey"))
        .args(["render", "--watch", "doc.md"])
        .current_dir(&dir)
        .stdout(Stdio::null())
        .stderr(Stdio::piped())
        .spawn()
        .unwrap_or_else(|e| panic!("{e}"));
    let Some(stderr) = child.stderr.take() else {
        panic!("no stderr");
    };
    let mut lines = std::io::BufReader::new(stderr).lines();
    let first = lines.next().and_then(Result::ok).unwrap_or_default();
    assert!(first.starts_with("rendered: "), "{first}");
    drop(lines);
    assert_eq!(ended(&mut child, "the idle watcher"), Some(0));
    // A watch told to be silent (`2>/dev/null`) goes on rendering.
    let mut child = Command::new(env!("CARGO_BIN_EXE_covey"))
        .args(["render", "--watch", "doc.md"])
        .current_dir(&dir)
        .stdout(Stdio::null())
        .stderr(Stdio::null())
        .spawn()
        .unwrap_or_else(|e| panic!("{e}"));
    std::fs::remove_file(dir.join("doc.rendered.md")).unwrap_or_else(|e| panic!("{e}"));
    write(&dir.join("data/d.csv"), &DATA.replace("16.1", "18.4"));
    let start = Instant::now();
    while !std::fs::read_to_string(dir.join("doc.rendered.md")).is_ok_and(|t| t.contains("18.4")) {
        assert!(
            start.elapsed() < Duration::from_secs(30),
            "the silent watcher did not render the change"
        );
        std::thread::sleep(Duration::from_millis(50));
    }
    assert!(matches!(child.try_wait(), Ok(None)), "still watching");
    let _ = child.kill();
    let _ = child.wait();
}

#[test]
fn a_watch_ends_quietly_when_its_stderr_closes() {
    use std::io::BufRead;
    let dir = setup("watch-stderr");
    let mut child = Command::new(env!("CARGO_BIN_EXE_covey"))
        .args(["render", "--watch", "doc.md"])
        .current_dir(&dir)
        .stdout(Stdio::null())
        .stderr(Stdio::piped())
        .spawn()
        .unwrap_or_else(|e| panic!("{e}"));
    let Some(stderr) = child.stderr.take() else {
        panic!("no stderr");
    };
    let mut lines = std::io::BufReader::new(stderr).lines();
    let first = lines.next().and_then(Result::ok).unwrap_or_default();
    assert!(first.starts_with("rendered: "), "{first}");
    drop(lines);
    // The next change makes the watcher speak into the closed pipe.
    write(&dir.join("data/d.csv"), &DATA.replace("16.1", "18.4"));
    let code = ended(&mut child, "the watcher");
    assert_eq!(code, Some(0), "a quiet end, not a panic (101)");
}

// ---------------------------------------------------------------------------
// Changes made between the run and the writes.

/// What the folders hold after `change` is made between `prepare` and `commit`: the report's
/// verdict and lines.
fn render_with_change(
    dir: &Path,
    opts: &covey::RenderOptions,
    change: impl FnOnce(),
) -> (covey::Verdict, String) {
    let doc = dir.join("doc.md");
    let prepared = covey::prepare(std::slice::from_ref(&doc), opts);
    change();
    let report = prepared.commit();
    (report.verdict, report.lines.join("\n"))
}

#[test]
fn a_figures_folder_replaced_by_a_file_meanwhile_is_left_alone() {
    let dir = setup("figures-became-a-file");
    let figures = dir.join("doc.figures");
    let opts = covey::RenderOptions::default();
    let (verdict, said) = render_with_change(&dir, &opts, || write(&figures, "mine\n"));
    assert_eq!(verdict, covey::Verdict::Failed, "{said}");
    assert_eq!(read(&figures), "mine\n", "{said}");
    assert!(!dir.join("doc.rendered.md").exists(), "{said}");
    assert_eq!(names(&dir), ["data", "doc.figures", "doc.md"], "{said}");
}

#[test]
fn a_figures_folder_replaced_by_a_link_meanwhile_is_not_followed() {
    let dir = setup("figures-became-a-link");
    let outside = scratch("figures-became-a-link-outside");
    let figures = dir.join("doc.figures");
    let opts = covey::RenderOptions::default();
    let (verdict, said) = render_with_change(&dir, &opts, || {
        symlink(&outside, &figures).unwrap_or_else(|e| panic!("{e}"));
    });
    assert_eq!(verdict, covey::Verdict::Failed, "{said}");
    assert_eq!(names(&outside), ["data"], "nothing written outside: {said}");
    assert!(is_link(&figures));
    assert!(!dir.join("doc.rendered.md").exists(), "{said}");
}

#[test]
fn a_document_deleted_during_its_render_is_not_brought_back() {
    // In place: the document the user deleted is not written again from the run's copy.
    let dir = setup("deleted-in-place");
    let opts = covey::RenderOptions {
        in_place: true,
        ..Default::default()
    };
    let doc = dir.join("doc.md");
    let (verdict, said) = render_with_change(&dir, &opts, || {
        std::fs::remove_file(&doc).unwrap_or_else(|e| panic!("{e}"));
    });
    assert_eq!(verdict, covey::Verdict::Failed, "{said}");
    assert!(!doc.exists(), "{said}");
    assert_eq!(names(&dir), ["data"], "{said}");
}

#[test]
fn a_figures_folder_replaced_by_a_link_just_before_a_rename_stops_the_batch() {
    // Between the staging of the new figures and the move of the second one into place, the
    // folder is moved aside and a link to a folder outside takes its name.
    let dir = scratch("last-check-folder");
    let outside = scratch("last-check-folder-outside");
    let figures = dir.join("doc.figures");
    let (a, b) = (figures.join("block1-1.svg"), figures.join("block1-2.svg"));
    let mut batch = Batch::new();
    batch.real_folder(figures.clone());
    batch.write(a.clone(), "<svg/>", expect(&a));
    batch.write(b.clone(), "<svg></svg>", expect(&b));
    let (figures2, outside2, aside) = (figures.clone(), outside.clone(), dir.join("aside"));
    let mut swap = move || {
        std::fs::rename(&figures2, &aside).unwrap_or_else(|e| panic!("{e}"));
        symlink(&outside2, &figures2).unwrap_or_else(|e| panic!("{e}"));
    };
    let e = batch
        .commit_with(Some(Fault::BeforeRename(1, &mut swap)))
        .err()
        .unwrap_or_else(|| panic!("the link is noticed"));
    assert!(e.message.contains("replaced by a link or a file"), "{e}");
    assert_eq!(names(&outside), ["data"], "nothing written outside: {e}");
    assert!(is_link(&figures));
}
