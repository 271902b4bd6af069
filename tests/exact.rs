//! covey against exact rational least squares, through the whole pipeline (a document loads
//! the data, fits the model, prints the tables; the numbers are read from the JSON export).
//!
//! Source of the expected values: tests/reference/exact_lm.py computes every sum of
//! squares, F, coefficient, adjusted mean and difference with Python's `fractions` from
//! the data as covey reads them (every value is a double exactly), rounding once at the end;
//! p-values are scipy.stats applied to the exact statistics. The cases are invented data:
//! - `exact/offsets.json` (tests/reference/offsets.py): the same designs (a cubic in one
//!   covariate, a cubic map-coordinate trend with a treatment factor, separate quadratic
//!   slopes, a product of two covariates with a factor-by-covariate term) with the
//!   covariates moved to 0, 1e3, 1e4, ..., 1e10;
//! - `exact/random.json` (tests/reference/random_designs.py, seeded): random designs of 1-3
//!   factors and 1-3 covariates with powers, products and offsets.
//!
//! Accuracy is the log relative error, LRE = -log10(|computed - exact| / |exact|), capped at
//! 15 (McCullough 1998, "Assessing the reliability of statistical software: Part I", The
//! American Statistician 52). `cargo test --release --test exact -- --nocapture` prints the
//! worst LRE per quantity.

use std::collections::BTreeMap;
use std::fmt::Write as _;
use std::path::Path;

use covey::pipeline::{self, RunOptions};
use covey::world::MemoryWorld;
use serde_json::Value;

/// LRE cap: a double carries about 15.95 digits.
const LRE_CAP: f64 = 15.0;
/// Every sum of squares, F, p, adjusted mean, difference and standard error must agree with
/// the exact value to this many digits, wherever the covariates' origin lies.
const MIN_LRE: f64 = 10.0;
/// Coefficients of the model as written must reach this, unless the coefficients table
/// says they are determined to fewer digits (then to one digit less than it says).
const MIN_LRE_COEFFICIENT: f64 = 10.0;

fn lre(got: Option<f64>, exact: f64) -> f64 {
    let Some(got) = got.filter(|g| g.is_finite()) else {
        return 0.0;
    };
    if got == exact {
        return LRE_CAP;
    }
    let err = if exact == 0.0 {
        (got - exact).abs()
    } else {
        (got - exact).abs() / exact.abs()
    };
    (-err.log10()).clamp(0.0, LRE_CAP)
}

fn cases(file: &str) -> Vec<Value> {
    let path = Path::new(env!("CARGO_MANIFEST_DIR"))
        .join("tests/reference/exact")
        .join(file);
    let text = std::fs::read_to_string(&path).unwrap_or_else(|e| panic!("{}: {e}", path.display()));
    let v: Value =
        serde_json::from_str(&text).unwrap_or_else(|e| panic!("{}: {e}", path.display()));
    v["cases"].as_array().cloned().unwrap_or_default()
}

/// The tables of a case's document, by the statement that printed them.
fn run(case: &Value) -> BTreeMap<String, Value> {
    let statements: Vec<&str> = case["statements"]
        .as_array()
        .map(|a| a.iter().filter_map(Value::as_str).collect())
        .unwrap_or_default();
    let doc = format!("# exact\n\n```covey\n{}\n```\n", statements.join("\n"));
    let csv = case["csv"].as_str().unwrap_or_default().as_bytes().to_vec();
    let world = MemoryWorld::new().with("data.csv", csv);
    let name = case["name"].as_str().unwrap_or("?");
    let run = pipeline::run(&doc, "exact.md", &world, RunOptions::default())
        .unwrap_or_else(|u| panic!("{name}: document does not run: {:?}", u.errors));
    assert!(!run.failed(), "{name}: {:?}", run.errors);
    let mut out = BTreeMap::new();
    for o in run.json()["outputs"].as_array().into_iter().flatten() {
        if let Some(s) = o["statement"].as_str() {
            out.entry(s.to_string()).or_insert_with(|| o.clone());
        }
        if let Some(k) = o["kind"].as_str() {
            out.entry(format!("kind:{k}")).or_insert_with(|| o.clone());
        }
    }
    out
}

/// The worst LRE met per quantity, with where.
#[derive(Default)]
struct Worst {
    by_quantity: BTreeMap<String, (f64, String)>,
    failures: Vec<String>,
}

impl Worst {
    fn note(&mut self, quantity: &str, got: Option<f64>, exact: f64, floor: f64, at: &str) {
        let l = lre(got, exact);
        let e = self
            .by_quantity
            .entry(quantity.to_string())
            .or_insert((f64::INFINITY, String::new()));
        if l < e.0 {
            *e = (l, at.to_string());
        }
        if l < floor {
            self.failures.push(format!(
                "{at}: {quantity} = {got:?}, exact {exact:e} (LRE {l:.1} < {floor})"
            ));
        }
    }

    fn table(&self) -> String {
        let mut s = String::from("| quantity | worst LRE | where |\n|---|---:|---|\n");
        for (q, (l, at)) in &self.by_quantity {
            let _ = writeln!(s, "| {q} | {l:.1} | {at} |");
        }
        s
    }
}

fn rows(table: &Value) -> Vec<Value> {
    table["rows"].as_array().cloned().unwrap_or_default()
}

fn num(cell: &Value) -> Option<f64> {
    cell.as_f64()
}

/// The significant digits the coefficients table says each named coefficient keeps.
fn promised_digits(table: &Value) -> BTreeMap<String, f64> {
    let mut out = BTreeMap::new();
    for n in table["notes"].as_array().into_iter().flatten() {
        let Some(text) = n.as_str() else { continue };
        let Some(at) = text.find("to only about ") else {
            continue;
        };
        let digits: f64 = text[at + 14..]
            .split_whitespace()
            .next()
            .and_then(|d| d.parse().ok())
            .unwrap_or(0.0);
        for name in text[..at].split('`').skip(1).step_by(2) {
            out.insert(name.to_string(), digits);
        }
    }
    out
}

fn check_case(case: &Value, worst: &mut Worst) {
    let name = case["name"].as_str().unwrap_or("?").to_string();
    let tables = run(case);
    let expected = case["expected"].as_object().cloned().unwrap_or_default();
    for (statement, want) in &expected {
        let Some(t) = tables.get(statement) else {
            worst
                .failures
                .push(format!("{name}: no table for `{statement}`"));
            continue;
        };
        let got = rows(t);
        let at = |what: &str| format!("{name}, {what}");
        if statement.starts_with("table fit") {
            let r = got.first().cloned().unwrap_or(Value::Null);
            worst.note(
                "residual SD",
                num(&r["sigma"]),
                num(&want["sigma"]).unwrap_or(f64::NAN),
                MIN_LRE,
                &at("fit"),
            );
            assert_eq!(
                num(&r["df_residual"]),
                num(&want["df_residual"]),
                "{name}: residual df"
            );
            // The residual sum of squares is in every ANOVA table.
            if let Some(a) = tables.get("table anova m type 1") {
                let res = rows(a).into_iter().find(|r| r["term"] == "residual");
                worst.note(
                    "residual SS",
                    res.and_then(|r| num(&r["ss"])),
                    num(&want["rss"]).unwrap_or(f64::NAN),
                    MIN_LRE,
                    &at("residual"),
                );
            }
        } else if let Some(kind) = statement.strip_prefix("table anova m type ") {
            for w in want.as_array().into_iter().flatten() {
                let term = w["term"].as_str().unwrap_or("?");
                let r = got.iter().find(|r| r["term"] == term).cloned();
                let Some(r) = r else {
                    worst
                        .failures
                        .push(format!("{name}: no Type {kind} row `{term}`"));
                    continue;
                };
                assert_eq!(
                    num(&r["df"]),
                    num(&w["df"]),
                    "{name}: Type {kind} df of {term}"
                );
                let where_ = at(&format!("Type {kind} `{term}`"));
                let ss = num(&w["ss"]).unwrap_or(f64::NAN);
                worst.note(
                    &format!("Type {kind} SS"),
                    num(&r["ss"]),
                    ss,
                    MIN_LRE,
                    &where_,
                );
                if let Some(f) = num(&w["f"]) {
                    worst.note(&format!("Type {kind} F"), num(&r["f"]), f, MIN_LRE, &where_);
                    let p = num(&w["p"]).unwrap_or(f64::NAN);
                    worst.note(&format!("Type {kind} p"), num(&r["p"]), p, MIN_LRE, &where_);
                } else {
                    assert!(r["f"].is_null() && r["ms"].is_null(), "{where_}: 0 df");
                }
            }
        } else if statement.starts_with("table coefficients") {
            let promised = promised_digits(t);
            for w in want.as_array().into_iter().flatten() {
                let term = w["term"].as_str().unwrap_or("?");
                let r = got.iter().find(|r| r["term"] == term).cloned();
                let floor = promised
                    .get(term)
                    .map_or(MIN_LRE_COEFFICIENT, |d| (d - 1.0).max(0.0));
                let where_ = at(&format!("coefficient `{term}`"));
                let r = r.unwrap_or(Value::Null);
                let quantity = if promised.contains_key(term) {
                    "coefficient (noted)"
                } else {
                    "coefficient"
                };
                worst.note(
                    quantity,
                    num(&r["estimate"]),
                    num(&w["estimate"]).unwrap_or(f64::NAN),
                    floor,
                    &where_,
                );
                worst.note(
                    "coefficient SE",
                    num(&r["se"]),
                    num(&w["se"]).unwrap_or(f64::NAN),
                    MIN_LRE,
                    &where_,
                );
            }
        } else if statement.starts_with("table means") {
            for w in want.as_array().into_iter().flatten() {
                let level = w["level"].as_str().unwrap_or("?");
                let r = got.iter().find(|r| r["level"] == level).cloned();
                let r = r.unwrap_or(Value::Null);
                let where_ = at(&format!("mean of `{level}`"));
                for (key, q) in [("mean", "adjusted mean"), ("se", "adjusted mean SE")] {
                    worst.note(
                        q,
                        num(&r[key]),
                        num(&w[key]).unwrap_or(f64::NAN),
                        MIN_LRE,
                        &where_,
                    );
                }
            }
        } else if statement.starts_with("table differences") {
            for w in want.as_array().into_iter().flatten() {
                let (a, b) = (&w["first"], &w["second"]);
                let r = got
                    .iter()
                    .find(|r| r["first"] == *a && r["second"] == *b)
                    .cloned()
                    .unwrap_or(Value::Null);
                let where_ = at(&format!("difference {a} - {b}"));
                for (key, q) in [
                    ("estimate", "difference"),
                    ("se", "difference SE"),
                    ("t", "difference t"),
                    ("p", "difference p"),
                ] {
                    worst.note(
                        q,
                        num(&r[key]),
                        num(&w[key]).unwrap_or(f64::NAN),
                        MIN_LRE,
                        &where_,
                    );
                }
            }
        }
    }
}

fn check_all(file: &str, title: &str) {
    let all = cases(file);
    assert!(!all.is_empty(), "{file}: no cases");
    let mut worst = Worst::default();
    for case in &all {
        check_case(case, &mut worst);
    }
    println!(
        "{title}: {} cases, worst log relative error per quantity:\n{}",
        all.len(),
        worst.table()
    );
    assert!(
        worst.failures.is_empty(),
        "{} failures:\n{}\n{}",
        worst.failures.len(),
        worst.failures.join("\n"),
        worst.table()
    );
}

/// The same designs at covariate offsets 0, 1e3, ..., 1e10: every sum of squares, F, p,
/// adjusted mean and difference to 10 digits or better at every offset.
#[test]
fn covariates_far_from_zero() {
    check_all("offsets.json", "Designs at covariate offsets 0 to 1e10");
}

/// A seeded random sample of designs (1-3 factors, 1-3 covariates at offsets from 0 to
/// 1e10, powers, products, factor-by-covariate and factor-by-factor terms): every quantity
/// to 10 digits or better, the worst per quantity printed.
#[test]
fn random_designs() {
    check_all("random.json", "Random designs");
}

/// A row alone in its level has leverage 1: the influence table shows its Cook's distance and
/// studentized residual as undefined (`null`) and a note names the row. (Invented data.)
#[test]
fn leverage_one_is_undefined_and_named() {
    let mut csv = String::from("g,x,y\n");
    let ys = [
        3.1, 4.0, 5.2, 5.9, 7.1, 3.9, 5.1, 6.0, 7.2, 7.8, 4.4, 5.6, 6.3, 7.7, 8.5,
    ];
    for (i, y) in ys.iter().enumerate() {
        let g = ["A", "B", "C"][i % 3];
        csv.push_str(&format!("{g},{},{y}\n", 1 + i / 3));
    }
    csv.push_str("D,3,9.5\n");
    let case = serde_json::json!({
        "name": "leverage one",
        "csv": csv,
        "statements": ["load \"data.csv\"", "factor g", "model m: y on g + x", "check m"],
    });
    let tables = run(&case);
    let influence = tables.get("kind:influence").cloned().unwrap_or(Value::Null);
    let row = rows(&influence)
        .into_iter()
        .find(|r| r["row"].as_f64() == Some(17.0))
        .unwrap_or_else(|| panic!("row 17 is listed: {influence}"));
    assert_eq!(row["leverage"].as_f64(), Some(1.0));
    assert!(row["cooks_distance"].is_null() && row["studentized_residual"].is_null());
    let named = influence["notes"]
        .as_array()
        .into_iter()
        .flatten()
        .filter_map(Value::as_str)
        .any(|n| n.starts_with("Row 17 has leverage 1"));
    assert!(named, "{influence}");
}
