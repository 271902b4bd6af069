//! Independent checks of the numbers covey prints, on two invented documents:
//!
//! - `tests/reference/outside/`: an analysis of covariance with unequal groups, a second
//!   factor, an empty cell and case weights, checked by tests/reference/outside_check.py;
//! - `tests/reference/outside2/`: a factor-by-factor-by-covariate model, two covariates with
//!   their product, a weighted quadratic, transforms, models without intercept, means and
//!   differences at chosen values, by cell and within levels (every correction, plain and
//!   HC3, weighted HC3), Dunnett below and above a control, weighted slopes and their
//!   equality test, Johnson-Neyman regions, `check` of two-factor and two-covariate models,
//!   plans from pilot models and the power figures' numbers, and a weighted model with an
//!   empty cell, checked by tests/reference/outside2_check.py.
//!
//! Each script renders its document, recomputes every number of its tables by exact rational
//! least squares (Python's fractions) and, for distribution functions and the tests of
//! assumptions, scipy (version in reference.json: studentized_range, multivariate_t,
//! dunnett, shapiro, levene(center='median'), t, f, chi2, ncf), and writes each comparison
//! with its reference value and tolerance to the set's reference.json, with the sentences
//! (from the plans, the power figures' descriptions and the reporting sentences) whose
//! numbers it recomputed. These tests render the same documents and hold covey to those
//! tolerances (the scripts' headers say why each is what it is);
//! `cargo test --release --test outside -- --nocapture` prints the worst LRE of each quantity.

use covey::pipeline::{self, RunOptions};
use covey::world::MemoryWorld;
use serde_json::Value;
use std::collections::BTreeMap;
use std::sync::OnceLock;

const DIR: &str = concat!(env!("CARGO_MANIFEST_DIR"), "/tests/reference/");

fn read(set: &str, name: &str) -> String {
    std::fs::read_to_string(format!("{DIR}{set}/{name}"))
        .unwrap_or_else(|e| panic!("{set}/{name}: {e}"))
}

/// The checked document of `set` run on its data, in memory: run once per set and shared by
/// the tests that read it (each run takes a second or two, most of it in the lattice of
/// Dunnett's comparisons, `stats::mvt`), so the file takes one run of each set, not two.
fn run_document(set: &str) -> &'static pipeline::Run {
    static OUTSIDE: OnceLock<pipeline::Run> = OnceLock::new();
    static OUTSIDE2: OnceLock<pipeline::Run> = OnceLock::new();
    let cell = match set {
        "outside" => &OUTSIDE,
        "outside2" => &OUTSIDE2,
        _ => panic!("no set {set}"),
    };
    cell.get_or_init(|| run_set(set))
}

/// `set`'s document run on its data, in memory.
fn run_set(set: &str) -> pipeline::Run {
    let csv = format!("{set}.csv");
    let data = read(set, &csv);
    let world = MemoryWorld::new().with(&csv, data.into_bytes());
    let md = format!("{set}.md");
    pipeline::run(&read(set, &md), &md, &world, RunOptions::default())
        .unwrap_or_else(|u| panic!("document does not parse:\n{}", u.errors.join("\n")))
}

/// The `index`-th row of the table of `kind` that `statement` made.
fn cell<'a>(json: &'a Value, statement: &str, kind: &str, index: usize, key: &str) -> &'a Value {
    let table = json["outputs"]
        .as_array()
        .into_iter()
        .flatten()
        .find(|o| o["statement"] == statement && o["kind"] == kind)
        .unwrap_or_else(|| panic!("no {kind} table from `{statement}`"));
    &table["rows"][index][key]
}

/// Holds every number of `set`'s document to its reference and returns the worst LRE of each
/// quantity (printed).
fn check_set(set: &str, at_least: usize) -> BTreeMap<String, f64> {
    let reference: Value =
        serde_json::from_str(&read(set, "reference.json")).expect("reference.json");
    let run = run_document(set);
    assert!(run.errors.is_empty(), "{}", run.errors.join("\n"));
    let json = run.json();
    let checks = reference["checks"].as_array().expect("checks");
    assert!(
        checks.len() > at_least,
        "the reference holds {} checks",
        checks.len()
    );
    let mut worst: BTreeMap<String, f64> = BTreeMap::new();
    for c in checks {
        let s = |k: &str| c[k].as_str().unwrap_or_default().to_string();
        let index = c["row"].as_u64().unwrap_or(0) as usize;
        let quantity = s("quantity");
        let got = cell(&json, &s("statement"), &s("kind"), index, &s("column"));
        let at = format!("{quantity} (`{}`, row {index})", s("statement"));
        let Some(want) = c["reference"].as_f64() else {
            assert!(
                got.is_null(),
                "{at}: covey gives {got}, the value is not estimable"
            );
            continue;
        };
        let got = got
            .as_f64()
            .unwrap_or_else(|| panic!("{at}: covey gives {got}, reference {want}"));
        let tol = c["tolerance"].as_f64().unwrap_or(0.0);
        let err = match c["scale"].as_f64() {
            Some(scale) => (got - want).abs() / scale,
            None if c["absolute"].as_bool() == Some(true) => (got - want).abs(),
            None => (got - want).abs() / want.abs().max(f64::MIN_POSITIVE),
        };
        assert!(
            err <= tol,
            "{at}: covey {got}, reference {want} (error {err:e}, tolerance {tol:e})"
        );
        let lre = if err == 0.0 {
            15.0
        } else {
            (-err.log10()).min(15.0)
        };
        let w = worst.entry(quantity).or_insert(15.0);
        *w = w.min(lre);
    }
    // Sentences whose numbers the script recomputed (plans, figures' descriptions, reports).
    for t in reference["texts"].as_array().into_iter().flatten() {
        let text = t["text"].as_str().expect("text");
        assert!(
            run.rendered.contains(text),
            "{} ({}): the rendering lacks {text:?}",
            t["quantity"],
            t["source"]
        );
    }
    println!("{set}:\n| quantity | worst LRE |\n| :-- | --: |");
    for (q, v) in &worst {
        println!("| {q} | {v:.1} |");
    }
    worst
}

#[test]
fn every_number_agrees_with_exact_arithmetic_and_scipy() {
    check_set("outside", 500);
}

#[test]
fn every_number_of_the_second_set_agrees_with_exact_arithmetic_and_scipy() {
    check_set("outside2", 800);
}

/// The centred covariate of the document: its mean is rounding residue of the subtraction,
/// shown as 0.000 at the resolution of its values, and the same number (one computation of a
/// mean) in the adjusted means' caption and in a live reference.
#[test]
fn a_centred_covariate_shows_its_mean_as_zero() {
    let run = run_document("outside");
    let md = &run.rendered;
    assert!(md.contains("| all | 24 | 0 | 0.000 | 5.637 |"), "{md}");
    assert!(md.contains("with `xc` at its mean 0.000 "), "{md}");
    assert!(md.contains("The mean of `xc` is <!-- covey:value @[summary xc all mean] -->0.000<"));
    assert!(!md.contains("e-16") && !md.contains("e-17"), "{md}");
    // The last anova of `two` is the robust Type II one: its F of `g`, 5.9239 (checked against
    // exact arithmetic above), as its table rounds it.
    assert!(md.contains("@[anova two g f] -->5.92<"), "{md}");
    assert!(md.contains("| g | 3 | — | — | 5.92 | .007 | — |"), "{md}");
    let json = run.json();
    let summary = cell(&json, "table summary xc", "summary", 0, "mean")
        .as_f64()
        .unwrap();
    assert!(summary.abs() < 1e-14, "{summary}");
}

/// What the second set's numbers are of, where that is not the plain reading: tests that
/// depend on where a covariate is 0, slopes taken at other variables' values, and
/// coefficients of a factor that are per level rather than comparisons.
#[test]
fn the_second_set_says_what_its_numbers_are_of() {
    let run = run_document("outside2");
    let md = &run.rendered;
    for text in [
        // Type III of x beside x by z is the slope of x where z = 0 (checked above against
        // exact arithmetic on exactly that hypothesis)
        "*Note.* The Type III test of `x` is of its effect where z = 0, because the model also has `x by z`",
        // Type II and III of x beside x^2: the slope where x = 0
        "*Note.* The Type II test of `x` is of its effect where x = 0, because the model also has `x^2`",
        "*Note.* The Type III test of `x` is of its effect where x = 0, because the model also has `x^2`",
        // slopes that depend on another variable
        "*Note.* The slope of `x` depends on `h`, which shares a term with it: each slope is taken with each level of `h` counted equally",
        "*Note.* The slope of `x` depends on `z`, which shares a term with it: each slope is taken with `z` at its mean 4.859",
        // a factor first in a model without intercept
        "*Note.* `g` has a coefficient for every level, not a comparison with the reference level",
        // Johnson-Neyman for every pair with an empty cell: the pairs it cannot give are
        // shown and said (the whole table was once an error)
        "| a | c | — | — | not estimable from this design |",
        "*Note.* Not estimable from this design, its bounds shown as —: `a` - `c`: the cell g = c with h = q has no rows",
        // a weighted pilot's SD is that of a row of weight 1 (checked above: 3.344 exact)
        "its residual SD is 3.344 (the model is weighted: the SD of a row of weight 1)",
    ] {
        assert!(md.contains(text), "the rendering lacks {text:?}");
    }
    // Type II of x beside x by z tests x without x by z: no note.
    assert!(!md.contains("The Type II test of `x` is of its effect where z = 0"));
}
