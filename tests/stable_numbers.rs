//! Stable numbers: shuffling the rows of a data file changes no number of
//! the rendering (JSON numbers compared at `SIG_DIGITS` significant digits)
//! except the row numbers of listings by line in the file; and rendering
//! twice gives the same bytes.

use covey::pipeline::{self, RunOptions};
use covey::world::MemoryWorld;
use serde_json::Value;
use std::path::Path;
use std::process::Command;

/// Significant digits compared: row order changes the floating-point
/// rounding of the QR sums in the last few bits only (about 1e-15 relative),
/// far below the 1e-9 this keeps.
const SIG_DIGITS: usize = 9;

/// Rows of the invented data set.
const N_ROWS: usize = 45;

/// Step of the permutation i -> (i * STEP + 7) mod N_ROWS; coprime with N_ROWS.
const STEP: usize = 17;

/// Invented data from a fixed linear congruential sequence: three groups,
/// a covariate, a second factor, and a response with one outlier.
fn invented_rows() -> Vec<String> {
    let mut state: u64 = 20_261_201;
    let mut next = || {
        state = state
            .wrapping_mul(6_364_136_223_846_793_005)
            .wrapping_add(1_442_695_040_888_963_407);
        ((state >> 33) as f64) / f64::from(1u32 << 31)
    };
    (0..N_ROWS)
        .map(|i| {
            let group = ["A", "B", "C"][i % 3];
            let site = ["north", "south"][(i / 3) % 2];
            let x = 2.0 + 8.0 * next();
            let bump = if i == 10 { 9.0 } else { 0.0 };
            let y = 5.0 + 1.5 * (i % 3) as f64 + 0.8 * x + next() - 0.5 + bump;
            format!("{group},{site},{x:.3},{y:.3}")
        })
        .collect()
}

fn csv(rows: &[String]) -> String {
    let mut text = "group,site,x,y\n".to_string();
    for r in rows {
        text.push_str(r);
        text.push('\n');
    }
    text
}

const DOC: &str = "# Stability\n\n```covey\nload \"d.csv\"\nfactor group levels A, B, C\nfactor site levels north, south\ntable summary y by group\nmodel m: y on group + x\nmodel s: y on group + x + group by x\nmodel w: y on group + site + group by site + x\ntable fit m\ntable coefficients m\ntable anova m type 1\ntable anova w type 3\ntable compare m, s\ntable means w for group\ntable differences m for group\ntable differences m for group correction holm\ntable slopes s of x for group\ntable contrast m for group weights 1, -0.5, -0.5\ntable regions s of x for group between A and C\ncheck m\n```\n";

/// The JSON with numbers rounded, `row` fields dropped, the inputs (whose
/// digests differ) left out, and rows of by-line listings sorted.
fn normalise(v: &Value) -> Value {
    match v {
        Value::Number(n) => match n.as_f64() {
            Some(x) => Value::String(format!("{x:.prec$e}", prec = SIG_DIGITS - 1)),
            None => v.clone(),
        },
        Value::Array(items) => Value::Array(items.iter().map(normalise).collect()),
        Value::Object(map) => {
            let mut out = serde_json::Map::new();
            for (k, val) in map {
                if k == "row" || k == "inputs" {
                    continue;
                }
                out.insert(k.clone(), normalise(val));
            }
            if out.get("kind").and_then(Value::as_str) == Some("influence") {
                if let Some(Value::Array(rows)) = out.get_mut("rows") {
                    rows.sort_by_key(|r| r.to_string());
                }
            }
            Value::Object(out)
        }
        _ => v.clone(),
    }
}

fn json_of(data: &str) -> Value {
    let world = MemoryWorld::new().with("d.csv", data);
    match pipeline::run(DOC, "doc.md", &world, RunOptions::default()) {
        Ok(run) => {
            assert!(run.errors.is_empty(), "{:?}", run.errors);
            run.json()
        }
        Err(e) => panic!("{:?}", e.errors),
    }
}

#[test]
fn shuffling_rows_changes_no_number() {
    let rows = invented_rows();
    let shuffled: Vec<String> = (0..N_ROWS)
        .map(|i| rows[(i * STEP + 7) % N_ROWS].clone())
        .collect();
    assert_ne!(rows, shuffled);
    let a = json_of(&csv(&rows));
    let b = json_of(&csv(&shuffled));
    // The influence listing is there (the outlier), so the masking is tested.
    assert!(a.to_string().contains("\"influence\""), "{a}");
    let (na, nb) = (normalise(&a), normalise(&b));
    if na != nb {
        let (sa, sb) = (
            serde_json::to_string_pretty(&na).unwrap_or_default(),
            serde_json::to_string_pretty(&nb).unwrap_or_default(),
        );
        let diff = sa
            .lines()
            .zip(sb.lines())
            .find(|(x, y)| x != y)
            .map(|(x, y)| format!("{x}\n{y}"));
        panic!("the numbers differ after shuffling the rows: {diff:?}");
    }
}

#[test]
fn repeated_renders_are_byte_identical() {
    let dir = Path::new(env!("CARGO_TARGET_TMPDIR")).join("stable-numbers");
    let _ = std::fs::remove_dir_all(&dir);
    std::fs::create_dir_all(&dir).unwrap_or_else(|e| panic!("{e}"));
    std::fs::write(dir.join("d.csv"), csv(&invented_rows())).unwrap_or_else(|e| panic!("{e}"));
    let doc = DOC.replace("check m\n", "check m\nplot lines m\nplot influence m\n");
    std::fs::write(dir.join("doc.md"), doc).unwrap_or_else(|e| panic!("{e}"));
    let names = [
        "doc.rendered.md",
        "doc.rendered.html",
        "out.json",
        "doc.figures/figure-1.svg",
    ];
    let mut runs = Vec::new();
    for _ in 0..2 {
        let out = Command::new(env!("CARGO_BIN_EXE_covey"))
            .args(["render", "--html", "--json", "out.json", "doc.md"])
            .current_dir(&dir)
            .output()
            .unwrap_or_else(|e| panic!("cannot run covey: {e}"));
        assert_eq!(
            out.status.code(),
            Some(0),
            "{}",
            String::from_utf8_lossy(&out.stderr)
        );
        let mut files: Vec<(String, Vec<u8>)> = Vec::new();
        for n in names {
            if let Ok(bytes) = std::fs::read(dir.join(n)) {
                files.push((n.to_string(), bytes));
            }
        }
        if let Ok(entries) = std::fs::read_dir(dir.join("doc.figures")) {
            let mut figs: Vec<_> = entries.filter_map(|e| e.ok().map(|e| e.path())).collect();
            figs.sort();
            for f in figs {
                files.push((
                    f.display().to_string(),
                    std::fs::read(&f).unwrap_or_default(),
                ));
            }
        }
        runs.push(files);
    }
    assert!(
        runs[0].len() >= 4,
        "{:?}",
        runs[0].iter().map(|f| &f.0).collect::<Vec<_>>()
    );
    assert!(runs[0] == runs[1], "two renders differ");
}
