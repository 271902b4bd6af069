//! NIST StRD certified values, reached through the whole pipeline: a covey document loads
//! each data set, fits the model, and the numbers are read back from the JSON export.
//!
//! Source of the data and the certified values: NIST Statistical Reference Datasets.
//! One-way analysis of variance (SiRstv, SmLs01-09, AtmWtAg), as shipped in the scipy
//! wheel's test data, converted by tests/reference/nist_convert.py; linear regression
//! (Norris, Pontius, NoInt1, NoInt2, Filip, Longley, Wampler1-5), written by
//! tests/reference/nist_linear.py, which reproduces every certified value by exact
//! rational least squares on the data. Both write the CSV and JSON files of
//! tests/reference/nist/.
//!
//! Accuracy is the log relative error, LRE = -log10(|computed - certified| / |certified|)
//! (the absolute error for a certified 0), capped at 15: roughly the number of correct
//! significant digits (McCullough 1998, "Assessing the reliability of statistical
//! software: Part I", The American Statistician 52(4)).
//!
//! `cargo test --release --test nist -- --nocapture` prints the table; with
//! `COVEY_WRITE_LRE=1` it is also written as Markdown to tests/reference/nist/lre-table.md.

use std::fmt::Write as _;
use std::path::{Path, PathBuf};

use covey::pipeline::{self, RunOptions};
use covey::world::MemoryWorld;
use serde_json::Value;

/// LRE cap: a double carries about 15.95 digits, so agreement beyond 15 is not measurable.
const LRE_CAP: f64 = 15.0;
/// Minimum LRE on every data set: 9 correct digits is the usual bar for a reliable
/// least-squares engine on the NIST sets of average and higher difficulty.
const MIN_LRE: f64 = 9.0;
/// Minimum LRE on the data sets NIST rates "lower" difficulty, which carry no numerical
/// trap: anything below 12 digits there would point at a careless algorithm. Also asked of
/// the "average" regression sets (lines through the origin, the exact fits Wampler 1-2).
const MIN_LRE_LOWER: f64 = 12.0;
/// Minimum LRE on Filip, a degree-10 polynomial whose raw design has a condition number
/// near 1.8e15: 7 digits is what the certified values let a double-precision engine
/// reach with care.
const MIN_LRE_FILIP: f64 = 7.0;

/// The floor a data set must reach.
fn floor(name: &str, difficulty: &str) -> f64 {
    match (name, difficulty) {
        ("Filip", _) => MIN_LRE_FILIP,
        (_, "lower") => MIN_LRE_LOWER,
        (n, "average") if !n.starts_with("SmLs") && n != "AtmWtAg" => MIN_LRE_LOWER,
        _ => MIN_LRE,
    }
}

/// The one-way analysis-of-variance sets (columns `group,y`).
const ANOVA_SETS: [&str; 11] = [
    "SiRstv", "SmLs01", "SmLs02", "SmLs03", "SmLs04", "SmLs05", "SmLs06", "SmLs07", "SmLs08",
    "SmLs09", "AtmWtAg",
];

fn nist_dir() -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/reference/nist")
}

/// The data file's bytes and the certified values of one data set.
fn fixture(name: &str) -> (Vec<u8>, Value) {
    let dir = nist_dir();
    let csv_path = dir.join(format!("{name}.csv"));
    let json_path = dir.join(format!("{name}.json"));
    let csv = std::fs::read(&csv_path).unwrap_or_else(|e| panic!("{}: {e}", csv_path.display()));
    let json = std::fs::read_to_string(&json_path)
        .unwrap_or_else(|e| panic!("{}: {e}", json_path.display()));
    let cert =
        serde_json::from_str(&json).unwrap_or_else(|e| panic!("{}: {e}", json_path.display()));
    (csv, cert)
}

/// Log relative error of `got` against `cert`, capped at [`LRE_CAP`]; 0 for a missing or
/// non-finite result.
fn lre(got: Option<f64>, cert: f64) -> f64 {
    let Some(got) = got.filter(|g| g.is_finite()) else {
        return 0.0;
    };
    if got == cert {
        return LRE_CAP;
    }
    let err = if cert == 0.0 {
        (got - cert).abs()
    } else {
        (got - cert).abs() / cert.abs()
    };
    (-err.log10()).clamp(0.0, LRE_CAP)
}

/// Runs a covey document whose one block holds `statements`, with `file` in memory.
fn run(file: &str, csv: Vec<u8>, statements: &[&str]) -> Value {
    let doc = format!("# NIST check\n\n```covey\n{}\n```\n", statements.join("\n"));
    let world = MemoryWorld::new().with(file, csv);
    let run = pipeline::run(&doc, "nist.md", &world, RunOptions::default())
        .unwrap_or_else(|u| panic!("{file}: document does not run: {:?}", u.errors));
    assert!(!run.failed(), "{file}: {:?}", run.errors);
    run.json()
}

/// The rows of the first exported table of this kind.
fn table<'a>(json: &'a Value, kind: &str) -> &'a [Value] {
    json["outputs"]
        .as_array()
        .and_then(|o| o.iter().find(|t| t["kind"] == kind))
        .and_then(|t| t["rows"].as_array())
        .map(Vec::as_slice)
        .unwrap_or_else(|| panic!("no `{kind}` table in {json}"))
}

/// Column `key` of the row whose column `by` is `label`.
fn cell(rows: &[Value], by: &str, label: &str, key: &str) -> Option<f64> {
    rows.iter().find(|r| r[by] == label)?[key].as_f64()
}

/// One data set's result: (name, difficulty, [(certified key, LRE)]).
struct Measured {
    name: String,
    difficulty: String,
    lres: Vec<(String, f64)>,
}

impl Measured {
    fn minimum(&self) -> (f64, &str) {
        self.lres
            .iter()
            .fold((f64::INFINITY, ""), |(m, k), (key, l)| {
                if *l < m {
                    (*l, key.as_str())
                } else {
                    (m, k)
                }
            })
    }
}

/// Compares each (certified key, computed value) with the certified values.
fn measure(name: &str, cert: &Value, computed: &[(&str, Option<f64>)]) -> Measured {
    let lres = computed
        .iter()
        .map(|(key, got)| {
            let c = cert[*key]
                .as_f64()
                .unwrap_or_else(|| panic!("{name}: no certified `{key}`"));
            (key.to_string(), lre(*got, c))
        })
        .collect();
    Measured {
        name: name.to_string(),
        difficulty: cert["difficulty"].as_str().unwrap_or("?").to_string(),
        lres,
    }
}

fn anova_set(name: &str) -> Measured {
    let (csv, cert) = fixture(name);
    let file = format!("{name}.csv");
    let load = format!("load \"{file}\"");
    let json = run(
        &file,
        csv,
        &[
            &load,
            "factor group",
            "model m: y on group",
            "table anova m",
            "table fit m",
        ],
    );
    let a = table(&json, "anova");
    let f = table(&json, "fit");
    let g = |key: &str| cell(a, "term", "group", key);
    let w = |key: &str| cell(a, "term", "residual", key);
    let fit = |key: &str| f.first().and_then(|r| r[key].as_f64());
    measure(
        name,
        &cert,
        &[
            ("between_df", g("df")),
            ("between_ss", g("ss")),
            ("between_ms", g("ms")),
            ("within_df", w("df")),
            ("within_ss", w("ss")),
            ("within_ms", w("ms")),
            ("f", g("f")),
            ("r_squared", fit("r_squared")),
            ("residual_sd", fit("sigma")),
        ],
    )
}

/// The linear-regression sets: data `x...,y`, the model and the certified values in the
/// JSON written by tests/reference/nist_linear.py (which reproduces every certified value by
/// exact rational least squares on the data, so a transcription error cannot pass).
const REGRESSION_SETS: [&str; 11] = [
    "Norris", "Pontius", "NoInt1", "NoInt2", "Filip", "Longley", "Wampler1", "Wampler2",
    "Wampler3", "Wampler4", "Wampler5",
];

fn regression_set(name: &str) -> Measured {
    let (csv, cert) = fixture(name);
    let file = format!("{name}.csv");
    let load = format!("load \"{file}\"");
    let model = format!("model n: {}", cert["model"].as_str().unwrap_or("?"));
    let json = run(
        &file,
        csv,
        &[
            &load,
            &model,
            "table coefficients n",
            "table anova n type 1",
            "table fit n",
        ],
    );
    let c = table(&json, "coefficients");
    let a = table(&json, "anova");
    let f = table(&json, "fit");
    let fit = |key: &str| f.first().and_then(|r| r[key].as_f64());
    let mut computed: Vec<(String, Option<f64>, f64)> = Vec::new();
    for (j, k) in cert["coefficients"]
        .as_array()
        .into_iter()
        .flatten()
        .enumerate()
    {
        let term = k["term"].as_str().unwrap_or("?");
        for (key, label) in [("estimate", "B"), ("se", "SD(B")] {
            let close = if label == "B" { "" } else { ")" };
            computed.push((
                format!("{label}{j}{close}"),
                cell(c, "term", term, key),
                k[key].as_f64().unwrap_or(f64::NAN),
            ));
        }
    }
    let regression_ss: f64 = a
        .iter()
        .filter(|r| r["term"] != "residual" && r["term"] != "total")
        .filter_map(|r| r["ss"].as_f64())
        .sum();
    let mut more = vec![
        ("residual_sd", fit("sigma")),
        ("r_squared", fit("r_squared")),
        ("regression_ss", Some(regression_ss)),
        ("residual_ss", cell(a, "term", "residual", "ss")),
        ("residual_ms", cell(a, "term", "residual", "ms")),
        ("regression_df", fit("df_model")),
        ("residual_df", fit("df_residual")),
    ];
    if !cert["f"].is_null() {
        more.push(("f", fit("f")));
    }
    for (key, got) in more {
        computed.push((
            key.to_string(),
            got,
            cert[key]
                .as_f64()
                .unwrap_or_else(|| panic!("{name}: no certified `{key}`")),
        ));
    }
    let mut lres: Vec<(String, f64)> = computed
        .into_iter()
        .map(|(k, got, c)| (k, lre(got, c)))
        .collect();
    if cert["f"].is_null() {
        // An exact fit: NIST certifies F as infinite; covey says the test is undefined.
        let undefined = f
            .first()
            .is_some_and(|r| r["f"].is_null() && r["p"].is_null());
        let said = !table(&json, "coefficients").is_empty()
            && json["outputs"]
                .as_array()
                .into_iter()
                .flatten()
                .filter(|t| t["kind"] == "coefficients")
                .any(|t| {
                    t["notes"].as_array().into_iter().flatten().any(|n| {
                        n.as_str()
                            .is_some_and(|s| s.contains("fits the data exactly"))
                    })
                });
        lres.push((
            "F undefined, said".to_string(),
            if undefined && said { LRE_CAP } else { 0.0 },
        ));
    }
    Measured {
        name: name.to_string(),
        difficulty: cert["difficulty"].as_str().unwrap_or("?").to_string(),
        lres,
    }
}

/// The table as Markdown (also what the test prints).
fn markdown(results: &[Measured]) -> String {
    let mut out = String::from(
        "| data set | difficulty | minimum LRE | quantity with the minimum |\n\
         |---|---|---:|---|\n",
    );
    for m in results {
        let (l, key) = m.minimum();
        let _ = writeln!(out, "| {} | {} | {l:.1} | `{key}` |", m.name, m.difficulty);
    }
    out
}

#[test]
fn nist_certified_values() {
    let mut results: Vec<Measured> = ANOVA_SETS.iter().map(|n| anova_set(n)).collect();
    results.extend(REGRESSION_SETS.iter().map(|n| regression_set(n)));
    let text = markdown(&results);
    println!("NIST StRD, log relative error (digits) of covey's results:\n{text}");
    if std::env::var("COVEY_WRITE_LRE").as_deref() == Ok("1") {
        let path = nist_dir().join("lre-table.md");
        std::fs::write(&path, &text).unwrap_or_else(|e| panic!("{}: {e}", path.display()));
    }
    let failures: Vec<String> = results
        .iter()
        .filter_map(|m| {
            let (l, key) = m.minimum();
            let floor = floor(&m.name, &m.difficulty);
            (l < floor).then(|| format!("{}: LRE {l:.2} on `{key}` (needs {floor})", m.name))
        })
        .collect();
    assert!(failures.is_empty(), "{}\n{text}", failures.join("\n"));
}
