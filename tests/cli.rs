//! The command line: output modes, naming, staleness checks, JSON export,
//! exit codes, path confinement and the all-or-nothing write.

use std::path::{Path, PathBuf};
use std::process::Command;

/// A scratch folder under the target directory, fresh for each test.
fn scratch(name: &str) -> PathBuf {
    let dir = Path::new(env!("CARGO_TARGET_TMPDIR")).join(name);
    let _ = std::fs::remove_dir_all(&dir);
    std::fs::create_dir_all(dir.join("data")).unwrap_or_else(|e| panic!("{e}"));
    dir
}

const DATA: &str = "unit,group,x,y\n1,A,1.5,10.2\n2,A,2.5,11.9\n3,B,1.0,12.8\n4,B,3.0,16.1\n5,C,2.0,15.0\n6,C,2.2,15.9\n";

const DOC: &str = "# Test\n\nProse stays.\n\n```covey\nload \"data/d.csv\"\nfactor group\ntable summary y by group\n```\n\nMore prose.\n";

fn write(path: &Path, text: &str) {
    std::fs::write(path, text).unwrap_or_else(|e| panic!("{}: {e}", path.display()));
}

fn read(path: &Path) -> String {
    std::fs::read_to_string(path).unwrap_or_else(|e| panic!("{}: {e}", path.display()))
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

#[test]
fn default_mode_leaves_the_source_alone() {
    let dir = setup("default-mode");
    let (code, err) = covey(&dir, &["render", "doc.md"]);
    assert_eq!(code, 0, "{err}");
    assert_eq!(read(&dir.join("doc.md")), DOC);
    let rendered = read(&dir.join("doc.rendered.md"));
    assert!(
        rendered.contains("**Summary of `y` by `group`**"),
        "{rendered}"
    );
    // Rendering twice gives the same bytes.
    let (code, _) = covey(&dir, &["render", "doc.md"]);
    assert_eq!(code, 0);
    assert_eq!(read(&dir.join("doc.rendered.md")), rendered);
}

#[test]
fn out_folder_holds_the_rendering() {
    let dir = setup("out-folder");
    let (code, err) = covey(&dir, &["render", "--out", "site", "doc.md"]);
    assert_eq!(code, 0, "{err}");
    assert!(dir.join("site/doc.rendered.md").exists());
    assert!(!dir.join("doc.rendered.md").exists());
    let (code, err) = covey(&dir, &["check", "--out", "site", "doc.md"]);
    assert_eq!(code, 0, "{err}");
}

#[test]
fn in_place_keeps_every_user_byte() {
    let dir = setup("in-place");
    let (code, err) = covey(&dir, &["render", "--in-place", "doc.md"]);
    assert_eq!(code, 0, "{err}");
    let once = read(&dir.join("doc.md"));
    assert!(once.contains("<!-- covey:output -->"));
    assert_eq!(covey::document::strip(&once).as_deref(), Ok(DOC));
    // A user's edit outside the markers survives the next render.
    let edited = once.replace("More prose.", "More prose, edited by a colleague.");
    write(&dir.join("doc.md"), &edited);
    let (code, _) = covey(&dir, &["render", "--in-place", "doc.md"]);
    assert_eq!(code, 0);
    let twice = read(&dir.join("doc.md"));
    assert!(twice.contains("edited by a colleague"));
    assert_eq!(
        twice, edited,
        "re-rendering an unchanged analysis changes nothing"
    );
    let (code, err) = covey(&dir, &["check", "doc.md"]);
    assert_eq!(code, 0, "{err}");
}

#[test]
fn check_notices_changed_data_and_changed_text() {
    let dir = setup("check-stale");
    let (code, err) = covey(&dir, &["check", "."]);
    assert_eq!(code, 1, "never rendered is stale: {err}");
    assert!(err.contains("never been rendered"), "{err}");
    covey(&dir, &["render", "."]);
    let (code, err) = covey(&dir, &["check", "."]);
    assert_eq!(code, 0, "{err}");
    // The data change between two renders: check must notice.
    write(&dir.join("data/d.csv"), &DATA.replace("16.1", "17.3"));
    let (code, err) = covey(&dir, &["check", "."]);
    assert_eq!(code, 1, "{err}");
    assert!(err.contains("stale: ./doc.md"), "{err}");
    assert!(err.contains("the inputs changed"), "{err}");
    assert!(err.contains("output of block 1 differs"), "{err}");
    assert!(err.contains("first difference at line"), "{err}");
    // The document's own text changes.
    covey(&dir, &["render", "."]);
    write(
        &dir.join("doc.md"),
        &DOC.replace("Prose stays.", "Prose changed."),
    );
    let (code, err) = covey(&dir, &["check", "doc.md"]);
    assert_eq!(code, 1, "{err}");
    assert!(err.contains("the document's own text changed"), "{err}");
}

#[test]
fn json_export_follows_the_schema() {
    let dir = setup("json");
    let (code, err) = covey(&dir, &["render", "--json", "out.json", "doc.md"]);
    assert_eq!(code, 0, "{err}");
    let v: serde_json::Value =
        serde_json::from_str(&read(&dir.join("out.json"))).unwrap_or_default();
    let inputs = v["inputs"].as_array().cloned().unwrap_or_default();
    assert_eq!(inputs.len(), 1);
    assert_eq!(inputs[0]["path"], "data/d.csv");
    assert_eq!(inputs[0]["rows"], 6);
    assert_eq!(inputs[0]["sha256"].as_str().map(str::len), Some(64));
    let summary = v["outputs"]
        .as_array()
        .and_then(|o| o.iter().find(|t| t["kind"] == "summary").cloned())
        .unwrap_or_default();
    assert_eq!(summary["block"], 1);
    assert_eq!(summary["line"], 8, "line of the statement in the document");
    assert_eq!(summary["statement"], "table summary y by group");
    let cols: Vec<&str> = summary["columns"]
        .as_array()
        .map(|c| c.iter().filter_map(|x| x.as_str()).collect())
        .unwrap_or_default();
    assert_eq!(
        cols,
        ["level", "n", "missing", "mean", "sd", "se", "min", "median", "max"]
    );
    let a = &summary["rows"][0];
    assert_eq!(a["level"], "A");
    assert_eq!(a["n"], 2.0);
    // Full precision, shortest round trip: (10.2 + 11.9) / 2 in doubles.
    assert_eq!(a["mean"].as_f64(), Some((10.2f64 + 11.9) / 2.0));
    assert_eq!(a["mean"].to_string(), "11.05");
}

#[test]
fn exit_codes() {
    let dir = setup("exit-codes");
    assert_eq!(covey(&dir, &["render", "doc.md"]).0, 0);
    assert_eq!(covey(&dir, &["render", "nothing-here.md"]).0, 2);
    assert_eq!(covey(&dir, &["frobnicate"]).0, 2, "usage error");
    write(&dir.join("bad.md"), "```covey\nload data.csv\n```\n");
    let (code, err) = covey(&dir, &["render", "bad.md"]);
    assert_eq!(code, 2);
    assert!(
        err.contains("bad.md:2:6: error: expected the data file's path in double quotes"),
        "{err}"
    );
    assert!(
        !dir.join("bad.rendered.md").exists(),
        "a syntax error writes nothing"
    );
    write(
        &dir.join("typo.md"),
        "```covey\nload \"data/d.csv\"\ntable summary yy\n```\n",
    );
    let (code, err) = covey(&dir, &["render", "typo.md"]);
    assert_eq!(code, 2);
    assert!(
        err.contains("typo.md:3:15: error: data set `d` has no column `yy`"),
        "{err}"
    );
    assert!(err.contains("did you mean `y`?"), "{err}");
    let rendered = read(&dir.join("typo.rendered.md"));
    assert!(
        rendered.contains("**Error:**"),
        "the error is rendered under its block"
    );
}

#[test]
fn loads_outside_the_document_folder_are_refused() {
    let dir = setup("confinement");
    let inner = dir.join("docs");
    std::fs::create_dir_all(&inner).unwrap_or_default();
    write(
        &inner.join("up.md"),
        "```covey\nload \"../data/d.csv\"\n```\n",
    );
    let (code, err) = covey(&dir, &["render", "docs/up.md"]);
    assert_eq!(code, 2);
    assert!(err.contains("outside the document's folder"), "{err}");
    let (code, err) = covey(&dir, &["render", "--allow-outside", "docs/up.md"]);
    assert_eq!(code, 0, "{err}");

    let abs = dir.join("data/d.csv");
    write(
        &inner.join("abs.md"),
        &format!("```covey\nload \"{}\"\n```\n", abs.display()),
    );
    let (code, err) = covey(&dir, &["render", "docs/abs.md"]);
    assert_eq!(code, 2);
    assert!(err.contains("outside the document's folder"), "{err}");

    #[cfg(unix)]
    {
        let link = inner.join("sneaky.csv");
        let _ = std::os::unix::fs::symlink(&abs, &link);
        write(
            &inner.join("link.md"),
            "```covey\nload \"sneaky.csv\"\n```\n",
        );
        let (code, err) = covey(&dir, &["render", "docs/link.md"]);
        assert_eq!(code, 2);
        assert!(err.contains("outside the document's folder"), "{err}");
    }
}

#[test]
fn a_failed_write_leaves_previous_files_intact() {
    let dir = scratch("atomic");
    let a = dir.join("a.md");
    let b = dir.join("b.json");
    write(&a, "old a");
    write(&b, "old b");
    use covey::files::{Batch, Expect, Fault};
    let mut batch = Batch::new();
    let expect = |p: &Path| Expect::current(p).unwrap_or_else(|e| panic!("{e}"));
    batch.write(a.clone(), "new a", expect(&a));
    batch.write(b.clone(), "new b", expect(&b));
    assert!(batch.commit_with(Some(Fault::Stage(1))).is_err());
    assert_eq!(read(&a), "old a");
    assert_eq!(read(&b), "old b");
    let leftovers: Vec<_> = std::fs::read_dir(&dir)
        .map(|d| d.filter_map(|e| e.ok()).map(|e| e.file_name()).collect())
        .unwrap_or_default();
    assert_eq!(
        leftovers.len(),
        3,
        "no temporary file is left behind: {leftovers:?}"
    );
}

/// A procedure document with parameters and gates, on the worked batches.
fn procedure(name: &str) -> PathBuf {
    let dir = scratch(name);
    let worked = Path::new(env!("CARGO_MANIFEST_DIR")).join("worked");
    for f in ["batch-2026-11.csv", "batch-2026-12.csv"] {
        std::fs::copy(worked.join("data").join(f), dir.join("data").join(f)).unwrap_or_default();
    }
    std::fs::copy(worked.join("batch-procedure.md"), dir.join("proc.md")).unwrap_or_default();
    dir
}

#[test]
fn parameters_are_overridden_and_recorded() {
    let dir = procedure("params");
    let (code, err) = covey(&dir, &["render", "proc.md"]);
    assert_eq!(code, 0, "{err}");
    let nov = read(&dir.join("proc.rendered.md"));
    assert!(
        nov.contains("`batch` = `\"data/batch-2026-11.csv\"` (the document's default)"),
        "{nov}"
    );
    let (code, err) = covey(
        &dir,
        &[
            "render",
            "proc.md",
            "--set",
            "alpha=0.01",
            "--set",
            "min_plants=12",
        ],
    );
    assert_eq!(code, 0, "{err}");
    let set = read(&dir.join("proc.rendered.md"));
    assert!(set.contains("`alpha` = `0.01` (set with --set)"), "{set}");
    assert!(set.contains("(alpha 0.01)"), "{set}");
    // The parameter's own statement says the value in force and where it came from.
    assert!(
        set.contains(
            "Parameter `alpha` is `0.01` in this run (set with `--set`; the document's default is `0.05`)."
        ),
        "{set}"
    );
    // check with the same settings is current; without them it is stale.
    assert_eq!(
        covey(
            &dir,
            &[
                "check",
                "proc.md",
                "--set",
                "alpha=0.01",
                "--set",
                "min_plants=12"
            ]
        )
        .0,
        0
    );
    // Without them, check names each parameter that differs and the `--set` to give, and
    // does not blame the data.
    let (code, err) = covey(&dir, &["check", "proc.md", "--set", "min_plants=12"]);
    assert_eq!(code, 1, "{err}");
    assert!(
        err.contains(
            "parameter `alpha` differs: the rendering was made with `0.01` (set with --set), \
             this check uses `0.05` (the document's default); to check the rendering as it was \
             made, give `covey check` the same `--set alpha=0.01`"
        ),
        "{err}"
    );
    assert!(!err.contains("min_plants"), "{err}");
    assert!(!err.contains("the inputs changed"), "{err}");
    // A value set at the check but not at the render: leave it out.
    let (code, err) = covey(&dir, &["render", "proc.md"]);
    assert_eq!(code, 0, "{err}");
    let (code, err) = covey(
        &dir,
        &["check", "proc.md", "--set", "batch=data/batch-2026-12.csv"],
    );
    assert_eq!(code, 1, "{err}");
    assert!(
        err.contains(
            "the rendering was made with `\"data/batch-2026-11.csv\"` (the document's default)"
        ) && err.contains("leave `--set batch` out"),
        "{err}"
    );
    assert!(
        err.contains("the inputs changed"),
        "a different file is read: {err}"
    );
    // A parameter the document does not declare is a usage error.
    let (code, err) = covey(&dir, &["render", "proc.md", "--set", "nope=1"]);
    assert_eq!(code, 2);
    assert!(err.contains("declares no parameter `nope`"), "{err}");
}

#[test]
fn a_failed_gate_stops_the_run_unless_overridden() {
    let dir = procedure("gates");
    let dec = "batch=data/batch-2026-12.csv";
    let (code, err) = covey(&dir, &["render", "proc.md", "--set", dec]);
    assert_eq!(code, 1, "a failed gate exits 1: {err}");
    assert!(err.contains("Gate failed: equal slopes"), "{err}");
    let stopped = read(&dir.join("proc.rendered.md"));
    assert!(
        stopped.contains("> **STOP.** Gate failed: equal slopes"),
        "{stopped}"
    );
    // The advice under the blocks not run names the flag that runs them past a gate, and not
    // `--keep-going`, which runs past failed statements only.
    assert!(
        stopped.contains("*Not run: a gate above did not hold.")
            && stopped.contains("`--override-gates` to run the rest"),
        "later blocks do not run: {stopped}"
    );
    assert!(!stopped.contains("--keep-going"), "{stopped}");
    let (code, err) = covey(
        &dir,
        &["render", "proc.md", "--set", dec, "--override-gates"],
    );
    assert_eq!(code, 0, "{err}");
    let forced = read(&dir.join("proc.rendered.md"));
    let top = forced
        .split("<!-- covey:provenance-end -->")
        .next()
        .unwrap_or_default();
    assert!(
        top.contains("**STOP: this report was rendered past a failed gate**"),
        "{top}"
    );
    assert!(forced.contains("The effect of `blend`"), "later blocks ran");
}

#[test]
fn unknown_and_repeated_parameters_are_errors() {
    let dir = setup("param-errors");
    write(&dir.join("a.md"), "```covey\nload @where\n```\n");
    let (code, err) = covey(&dir, &["render", "a.md"]);
    assert_eq!(code, 2);
    assert!(
        err.contains("a.md:2:6: error: there is no parameter `where`"),
        "{err}"
    );
    write(
        &dir.join("b.md"),
        "```covey\nparam x = 1\nparam x = 2\n```\n",
    );
    let (code, err) = covey(&dir, &["render", "b.md"]);
    assert_eq!(code, 2);
    assert!(
        err.contains("b.md:3:7: error: parameter `x` is declared twice"),
        "{err}"
    );
}

#[test]
fn a_rendering_is_not_rendered_again() {
    let dir = setup("no-double");
    assert_eq!(covey(&dir, &["render", "doc.md"]).0, 0);
    let (code, err) = covey(&dir, &["render", "doc.rendered.md"]);
    assert_eq!(code, 2);
    assert!(err.contains("this is a rendering"), "{err}");
    assert!(!dir.join("doc.rendered.rendered.md").exists());
}

/// `-`, which commonly means standard output, is refused as `--json`, `--out` and a `covey new`
/// name instead of becoming a file or folder named `-` (which `rm -` and the like then trip
/// over); nothing is written.
#[test]
fn a_dash_is_not_taken_for_a_file_name() {
    let dir = setup("dash");
    for args in [
        &["render", "--json", "-", "doc.md"][..],
        &["render", "--out", "-", "doc.md"],
        &["check", "--out", "-", "doc.md"],
        &["new", "--", "-"],
        &["new", "--", "-study"],
    ] {
        let (code, err) = covey(&dir, args);
        assert_eq!(code, 2, "{args:?}: {err}");
        assert!(
            err.contains("not to standard output") || err.contains("begins with a letter"),
            "{args:?}: {err}"
        );
        assert!(
            !dir.join("-").exists() && !dir.join("-study").exists(),
            "{args:?}"
        );
        assert!(!dir.join("doc.rendered.md").exists(), "{args:?}");
    }
    // A file named `-` is still a path the user can give, written as one.
    let (code, err) = covey(&dir, &["render", "--json", "./-", "doc.md"]);
    assert_eq!(code, 0, "{err}");
    assert!(read(&dir.join("-")).contains("\"outputs\""));
}

#[test]
fn covey_new_writes_a_running_starter() {
    let dir = scratch("starter");
    let (code, err) = covey(&dir, &["new", "first-study"]);
    assert_eq!(code, 0, "{err}");
    let doc = dir.join("first-study/first-study.md");
    assert!(doc.exists() && dir.join("first-study/data/example.csv").exists());
    // The starter's own prose carries the whole caution (README, "Caution"), not a part of it.
    let prose = read(&doc).split_whitespace().collect::<Vec<_>>().join(" ");
    assert!(
        prose.contains(
            "*Caution.* These results support, and do not replace, review by a qualified \
             statistician. Decisions about health, clinical care or safety follow the applicable \
             guidelines and local regulations."
        ),
        "{prose}"
    );
    let (code, err) = covey(&dir, &["render", "first-study/first-study.md"]);
    assert_eq!(code, 0, "the starter renders: {err}");
    let rendered = read(&dir.join("first-study/first-study.rendered.md"));
    assert!(rendered.contains("Gate passed: equal slopes"), "{rendered}");
    // Never overwrites.
    let (code, err) = covey(&dir, &["new", "first-study"]);
    assert_eq!(code, 2);
    assert!(err.contains("already exists"), "{err}");
}

#[test]
fn watch_renders_again_when_data_change() {
    let dir = setup("watch");
    let data = dir.join("data/d.csv");
    let changer = std::thread::spawn(move || {
        std::thread::sleep(std::time::Duration::from_millis(300));
        std::fs::write(&data, DATA.replace("16.1", "18.4")).unwrap_or_default();
    });
    let mut heard = Vec::new();
    let opts = covey::RenderOptions::default();
    let report = covey::watch(
        &[dir.join("doc.md")],
        &opts,
        std::time::Duration::from_millis(100),
        Some(12),
        &mut |line: &str| {
            heard.push(line.to_string());
            std::ops::ControlFlow::Continue(())
        },
        &|| false,
    );
    let _ = changer.join();
    assert_eq!(report.verdict, covey::Verdict::Ok);
    assert!(
        heard
            .iter()
            .any(|l| l.starts_with("changed: ") && l.contains("d.csv")),
        "{heard:?}"
    );
    assert!(
        heard.iter().filter(|l| l.starts_with("rendered:")).count() >= 2,
        "{heard:?}"
    );
    assert!(
        read(&dir.join("doc.rendered.md")).contains("18.4")
            || read(&dir.join("doc.rendered.md")).contains("17.25")
    );
}

#[test]
fn figures_are_written_and_stale_ones_removed() {
    let dir = setup("figures");
    let with_two = DOC.replace(
        "table summary y by group\n",
        "table summary y by group\nmodel m: y on group + x\nplot lines m\nplot residuals m\n",
    );
    write(&dir.join("doc.md"), &with_two);
    let (code, err) = covey(&dir, &["render", "doc.md"]);
    assert_eq!(code, 0, "{err}");
    assert!(dir.join("doc.figures/block1-1.svg").exists());
    assert!(dir.join("doc.figures/block1-2.svg").exists());
    assert!(read(&dir.join("doc.rendered.md")).contains("](doc.figures/block1-2.svg)"));
    write(&dir.join("doc.figures/notes.txt"), "the user's own file");
    write(
        &dir.join("doc.md"),
        &with_two.replace("plot residuals m\n", ""),
    );
    let (code, err) = covey(&dir, &["render", "doc.md"]);
    assert_eq!(code, 0, "{err}");
    assert!(dir.join("doc.figures/block1-1.svg").exists());
    assert!(
        !dir.join("doc.figures/block1-2.svg").exists(),
        "a figure no longer drawn is removed"
    );
    assert!(
        dir.join("doc.figures/notes.txt").exists(),
        "other files are left alone"
    );
    // check compares the figures too.
    assert_eq!(covey(&dir, &["check", "doc.md"]).0, 0);
    write(&dir.join("doc.figures/block1-1.svg"), "<svg/>");
    let (code, err) = covey(&dir, &["check", "doc.md"]);
    assert_eq!(code, 1);
    assert!(
        err.contains("figure doc.figures/block1-1.svg differs"),
        "{err}"
    );
}

#[test]
fn check_compares_the_figure_list_too() {
    let dir = setup("figure-list");
    write(
        &dir.join("doc.md"),
        &DOC.replace(
            "table summary y by group\n",
            "table summary y by group\nmodel m: y on group + x\nplot lines m\n",
        ),
    );
    let (code, err) = covey(&dir, &["render", "doc.md"]);
    assert_eq!(code, 0, "{err}");
    assert_eq!(covey(&dir, &["check", "doc.md"]).0, 0);
    let list = dir.join("doc.figures/covey-figures.sha256");
    let written = read(&list);
    let stale = |dir: &Path, what: &str| {
        let (code, err) = covey(dir, &["check", "doc.md"]);
        assert_eq!(code, 1, "{err}");
        assert!(err.contains("stale: doc.md"), "{err}");
        assert!(
            err.contains(&format!(
                "figure list doc.figures/covey-figures.sha256 {what}"
            )),
            "{err}"
        );
    };
    // Junk appended, a line edited, the list removed: each is not what a render writes.
    write(&list, &format!("{written}junk\n"));
    stale(&dir, "differs");
    write(&list, &written.replacen("block1-1.svg", "block1-9.svg", 1));
    stale(&dir, "differs");
    std::fs::remove_file(&list).unwrap();
    stale(&dir, "is missing");
    // A render puts it right again.
    assert_eq!(covey(&dir, &["render", "doc.md"]).0, 0);
    assert_eq!(read(&list), written);
    assert_eq!(covey(&dir, &["check", "doc.md"]).0, 0);
    // A document that no longer draws figures: a render removes covey's list,
    // so one put back is stale.
    write(&dir.join("doc.md"), DOC);
    assert_eq!(covey(&dir, &["render", "doc.md"]).0, 0);
    assert!(!list.exists());
    assert_eq!(covey(&dir, &["check", "doc.md"]).0, 0);
    std::fs::create_dir_all(dir.join("doc.figures")).unwrap();
    write(&list, &written);
    stale(&dir, "is left from an earlier rendering");
}

#[test]
fn redefining_a_model_is_said() {
    let dir = setup("redefine");
    write(
        &dir.join("m.md"),
        "```covey\nload \"data/d.csv\"\nfactor group\nmodel m: y on group\nmodel m: y on group + x\n```\n",
    );
    let (code, err) = covey(&dir, &["render", "m.md"]);
    assert_eq!(code, 0, "{err}");
    assert!(
        err.contains("m.md:5: warning: This replaces the earlier model `m`"),
        "{err}"
    );
}

/// `--out` naming a regular file used to give one "Not a directory" line per output path; now
/// one line names it and says it must be a folder, and nothing is written.
#[test]
fn render_out_that_is_a_file_is_refused_in_one_line() {
    let dir = setup("out-is-a-file");
    write(&dir.join("second.md"), DOC);
    write(&dir.join("notes.txt"), "mine\n");
    let (code, err) = covey(
        &dir,
        &["render", "doc.md", "second.md", "--out", "notes.txt"],
    );
    assert_eq!(code, 2, "{err}");
    assert_eq!(err.lines().count(), 1, "{err}");
    assert!(
        err.starts_with("notes.txt: --out must be a folder for the renderings, and this is a file"),
        "{err}"
    );
    assert!(err.contains("nothing was written"), "{err}");
    assert!(!err.contains("Not a directory"), "{err}");
    // A folder under the file is refused the same way, naming the file.
    let (code, err) = covey(&dir, &["render", "doc.md", "--out", "notes.txt/out"]);
    assert_eq!(code, 2, "{err}");
    assert_eq!(err.lines().count(), 1, "{err}");
    assert!(
        err.contains(
            "notes.txt/out: --out must be a folder for the renderings, but notes.txt is a file"
        ),
        "{err}"
    );
    assert_eq!(read(&dir.join("notes.txt")), "mine\n");
    assert!(!dir.join("doc.rendered.md").exists() && !dir.join("second.rendered.md").exists());
}

/// `check --out` naming a file said, for each document, "cannot read its rendering
/// notes.txt/doc.rendered.md: Not a directory"; naming a missing folder, that each document
/// "has never been rendered" (exit 1), which hides a misspelt folder. Both are now one line in
/// `render --out`'s words, exit 2.
#[test]
fn check_out_that_is_not_a_folder_is_refused_in_one_line() {
    let dir = setup("check-out-not-a-folder");
    write(&dir.join("second.md"), DOC);
    write(&dir.join("notes.txt"), "mine\n");
    let cases = [
        (
            "notes.txt",
            "notes.txt: --out must be a folder of renderings, and this is a file; ",
        ),
        (
            "notes.txt/out",
            "notes.txt/out: --out must be a folder of renderings, but notes.txt is a file; ",
        ),
        (
            "missing",
            "missing: --out must be a folder of renderings, and there is no such folder; ",
        ),
        (
            "missing/out",
            "missing/out: --out must be a folder of renderings, and there is no such folder; ",
        ),
    ];
    for (out, want) in cases {
        let (code, err) = covey(&dir, &["check", "doc.md", "second.md", "--out", out]);
        assert_eq!(code, 2, "{out}: {err}");
        assert_eq!(err.lines().count(), 1, "{out}: {err}");
        assert!(err.starts_with(want), "{out}: {err}");
        assert!(
            err.trim_end()
                .ends_with("name the folder the renderings were written to; nothing was checked"),
            "{out}: {err}"
        );
    }
    assert_eq!(read(&dir.join("notes.txt")), "mine\n");
    assert!(!dir.join("missing").exists());
    // A folder that exists is checked as before.
    let (code, err) = covey(&dir, &["render", "doc.md", "--out", "out"]);
    assert_eq!(code, 0, "{err}");
    let (code, err) = covey(&dir, &["check", "doc.md", "--out", "out"]);
    assert_eq!(code, 0, "{err}");
}

/// A rendering edited by hand so that it holds a byte that is not UTF-8 where covey wrote a
/// replacement character (U+FFFD, here a level of the data): `check` read the rendering with
/// replacement characters and said `current`; the bytes differ, so it is stale.
#[test]
fn check_finds_a_rendering_that_is_not_utf8_stale() {
    let dir = scratch("check-not-utf8");
    write(&dir.join("data/d.csv"), &DATA.replace(",A,", ",A\u{FFFD},"));
    write(&dir.join("doc.md"), DOC);
    let (code, err) = covey(&dir, &["render", "doc.md"]);
    assert_eq!(code, 0, "{err}");
    let (code, err) = covey(&dir, &["check", "doc.md"]);
    assert_eq!(code, 0, "{err}");
    let path = dir.join("doc.rendered.md");
    let mut bytes = std::fs::read(&path).unwrap_or_else(|e| panic!("{e}"));
    let region = bytes
        .windows(12)
        .position(|w| w == b"covey:output")
        .unwrap_or_else(|| panic!("no output region"));
    let at = region
        + bytes[region..]
            .windows(3)
            .position(|w| w == "\u{FFFD}".as_bytes())
            .unwrap_or_else(|| panic!("no U+FFFD in the output"));
    bytes.splice(at..at + 3, [0xFF]);
    std::fs::write(&path, &bytes).unwrap_or_else(|e| panic!("{e}"));
    let (code, err) = covey(&dir, &["check", "doc.md"]);
    assert_eq!(code, 1, "{err}");
    assert!(err.starts_with("stale: doc.md (doc.rendered.md)"), "{err}");
    assert!(
        err.contains(&format!(
            "the rendering is not valid UTF-8 (first bad byte at offset {at})"
        )),
        "{err}"
    );
}

#[test]
fn a_document_that_is_not_there_names_the_one_meant() {
    let dir = scratch("nearby-document");
    let (code, err) = covey(&dir, &["new", "trial"]);
    assert_eq!(code, 0, "{err}");
    // `covey new trial` writes trial/trial.md: the name alone, the name with .md beside the
    // folder, the path without .md, and a misspelt name each point at it.
    for (given, meant) in [
        ("trial.md", "trial/trial.md"),
        ("trial/trial", "trial/trial.md"),
        ("trial/trail.md", "trial/trial.md"),
    ] {
        let (code, err) = covey(&dir, &["render", given]);
        assert_eq!(code, 2, "{given}: {err}");
        assert!(
            err.contains(&format!(
                "{given}: no such file or folder; did you mean {meant}?"
            )),
            "{given}: {err}"
        );
    }
    let (_, err) = covey(&dir, &["render", "trial/zzzzzzzz.md"]);
    assert!(
        err.contains("trial/zzzzzzzz.md: no such file or folder\n"),
        "{err}"
    );
    assert!(!dir.join("trial/trial.rendered.md").exists());
}
