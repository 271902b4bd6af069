//! Comparisons with a control (Dunnett), robust (HC3) inference and weighted least squares
//! against independent computations: tests/reference/comparisons.py writes the invented data
//! under tests/reference/comparisons/ and the reference values in reference.json (scipy's
//! Dunnett test, exact integrals of the product-form correlations, scipy's multivariate t
//! distribution, numpy's HC3 sandwich and weighted least squares, and exact rational
//! arithmetic for a covariate near 10^6). Dunnett's published table (values from memory) is
//! checked in the same script against the exact integral, and here against covey.

use covey::pipeline::{self, RunOptions};
use covey::world::MemoryWorld;
use serde_json::Value;

const DIR: &str = concat!(env!("CARGO_MANIFEST_DIR"), "/tests/reference/comparisons/");

/// covey states every Dunnett p within 1e-5; the exact integral is good to 1e-10.
const DUNNETT_P_TOL: f64 = 1e-5;
/// scipy's own Dunnett p comes from its randomised multivariate t integration, whose error
/// is of the order of 1e-5 too: the two agree to the sum of both errors.
const SCIPY_P_TOL: f64 = 4e-5;
/// Simultaneous limits: the critical value is solved on covey's integration rule, whose
/// probability error of 1e-5 moves it by about 1e-5 / density (density of the maximum
/// statistic near its 95% point, about 0.1): a relative 2e-4 covers it.
const LIMIT_REL_TOL: f64 = 2e-4;
/// scipy's simultaneous limits come from its own critical value, solved on its randomised
/// integration: they agree with the exact ones (and covey's) to about 1e-3 relative.
const SCIPY_LIMIT_REL_TOL: f64 = 2e-3;
/// HC3 and weighted fits against numpy: both in double precision on well-conditioned
/// designs, so 1e-10 relative leaves room for rounding only.
const REL_TOL: f64 = 1e-10;

fn reference() -> Value {
    let text = std::fs::read_to_string(format!("{DIR}reference.json"))
        .unwrap_or_else(|e| panic!("reading reference.json: {e}"));
    serde_json::from_str(&text).unwrap_or_else(|e| panic!("reference.json: {e}"))
}

/// Renders `body` (covey statements) with the data file `file` loaded as `d`.
fn run(file: &str, body: &str) -> Value {
    let bytes = std::fs::read(format!("{DIR}{file}")).unwrap_or_else(|e| panic!("{file}: {e}"));
    let world = MemoryWorld::new().with(file, bytes);
    let doc = format!("```covey\nload \"{file}\" as d\n{body}\n```\n");
    let run = pipeline::run(&doc, "comparisons.md", &world, RunOptions::default())
        .unwrap_or_else(|u| panic!("document does not parse:\n{}", u.errors.join("\n")));
    assert!(run.errors.is_empty(), "{}", run.errors.join("\n"));
    run.json()
}

fn outputs<'a>(json: &'a Value, kind: &str) -> Vec<&'a Value> {
    json["outputs"]
        .as_array()
        .into_iter()
        .flatten()
        .filter(|o| o["kind"] == kind)
        .collect()
}

fn rows(table: &Value) -> &[Value] {
    table["rows"].as_array().map_or(&[], Vec::as_slice)
}

fn num(v: &Value) -> f64 {
    v.as_f64().unwrap_or(f64::NAN)
}

fn nums(v: &Value) -> Vec<f64> {
    v.as_array().into_iter().flatten().map(num).collect()
}

thread_local! {
    /// The largest relative (close) and absolute (near) differences seen by this test's
    /// thread, printed by `report` (`cargo test --release --test comparisons -- --nocapture`).
    static WORST: std::cell::Cell<(f64, f64)> = const { std::cell::Cell::new((0.0, 0.0)) };
}

fn close(what: &str, got: f64, want: f64, rel: f64) {
    let err = (got - want).abs() / want.abs().max(1e-300);
    WORST.with(|w| w.set((w.get().0.max(err), w.get().1)));
    assert!(
        err <= rel,
        "{what}: covey {got}, reference {want} (relative {err:e})"
    );
}

fn near(what: &str, got: f64, want: f64, abs: f64) {
    let err = (got - want).abs();
    WORST.with(|w| w.set((w.get().0, w.get().1.max(err))));
    assert!(
        err <= abs,
        "{what}: covey {got}, reference {want} (difference {err:e})"
    );
}

/// Prints the worst differences of the test that calls it.
fn report(test: &str) {
    let (rel, abs) = WORST.with(|w| w.get());
    eprintln!("{test}: worst relative difference {rel:.1e}, worst absolute difference {abs:.1e}");
}

#[test]
fn dunnett_one_way_against_scipy_and_the_exact_integral() {
    let r = reference();
    let json = run(
        "oneway.csv",
        "factor group levels ctrl, t1, t2, t3\nmodel m: y on group\n\
         table differences m for group versus ctrl\n\
         table differences m for group versus ctrl above",
    );
    let tables = outputs(&json, "differences");
    let mut worst_exact: f64 = 0.0;
    for (table, side) in tables.iter().zip(["both", "above"]) {
        let want = &r["oneway"][side];
        let crit = num(&want["exact_critical"]);
        for (i, row) in rows(table).iter().enumerate() {
            let what = format!("{side} {}", row["first"]);
            close(
                &format!("{what} estimate"),
                num(&row["estimate"]),
                num(&want["estimate"][i]),
                1e-12,
            );
            close(
                &format!("{what} se"),
                num(&row["se"]),
                num(&want["se"][i]),
                1e-12,
            );
            worst_exact = worst_exact.max((num(&row["p"]) - num(&want["exact_p"][i])).abs());
            near(
                &format!("{what} p (exact)"),
                num(&row["p"]),
                num(&want["exact_p"][i]),
                DUNNETT_P_TOL,
            );
            near(
                &format!("{what} p (scipy)"),
                num(&row["p"]),
                num(&want["scipy_p"][i]),
                SCIPY_P_TOL,
            );
            let est = num(&row["estimate"]);
            let se = num(&row["se"]);
            let lower = num(&row["lower"]);
            close(
                &format!("{what} lower (exact)"),
                lower,
                est - crit * se,
                LIMIT_REL_TOL,
            );
            close(
                &format!("{what} lower (scipy)"),
                lower,
                num(&want["scipy_lower"][i]),
                SCIPY_LIMIT_REL_TOL,
            );
            if side == "both" {
                let upper = num(&row["upper"]);
                close(
                    &format!("{what} upper (scipy)"),
                    upper,
                    num(&want["scipy_upper"][i]),
                    SCIPY_LIMIT_REL_TOL,
                );
                close(
                    &format!("{what} upper (exact)"),
                    upper,
                    est + crit * se,
                    LIMIT_REL_TOL,
                );
            } else {
                assert!(row["upper"].is_null(), "one-sided above: no upper limit");
            }
        }
    }
    eprintln!("one-way Dunnett p against the exact integral: worst difference {worst_exact:.1e}");
    report("dunnett_one_way_against_scipy_and_the_exact_integral");
}

#[test]
fn dunnett_ancova_against_scipy_multivariate_t() {
    let r = reference();
    let a = &r["ancova"];
    let json = run(
        "ancova.csv",
        "factor group levels ctrl, a, b, c\nmodel m: y on group + x\n\
         table differences m for group versus ctrl\n\
         table differences m for group versus ctrl above",
    );
    let tables = outputs(&json, "differences");
    let crit = num(&a["critical_both"]);
    for (table, key) in tables.iter().zip(["p_both", "p_above"]) {
        for (i, row) in rows(table).iter().enumerate() {
            let what = format!("{key} {}", row["first"]);
            close(&format!("{what} t"), num(&row["t"]), num(&a["t"][i]), 1e-10);
            near(&what, num(&row["p"]), num(&a[key][i]), SCIPY_P_TOL);
            if key == "p_both" {
                let (est, se) = (num(&row["estimate"]), num(&row["se"]));
                close(
                    &format!("{what} limit"),
                    num(&row["upper"]),
                    est + crit * se,
                    LIMIT_REL_TOL,
                );
            }
        }
    }
    report("dunnett_ancova_against_scipy_multivariate_t");
}

#[test]
fn dunnett_critical_values_match_the_published_table() {
    // Dunnett (1955), "A multiple comparison procedure for comparing several treatments
    // with a control", JASA 50, Tables 1a (one-sided) and 1b (two-sided), alpha = .05,
    // equal groups: values FROM MEMORY, two decimals (tests/reference/comparisons.py checks
    // each against the exact integral). covey's critical value, from k + 1 groups of equal
    // size n, must round to the table's value.
    let r = reference();
    for entry in r["table"].as_array().into_iter().flatten() {
        let k = entry["k"].as_u64().unwrap_or(0) as usize;
        let two = entry["two_sided"].as_bool().unwrap_or(true);
        let df = entry["df"].as_u64().map_or(f64::INFINITY, |d| d as f64);
        let corr: Vec<Vec<f64>> = (0..k)
            .map(|i| (0..k).map(|j| if i == j { 1.0 } else { 0.5 }).collect())
            .collect();
        let mut dist = covey::stats::mvt::MaxT::new(&corr, df, two);
        let (c, _) = dist.quantile(0.95);
        let table = num(&entry["table"]);
        near(
            &format!("k {k} df {df} two-sided {two} (table)"),
            c,
            table,
            0.005 + 1e-9,
        );
        near(
            &format!("k {k} df {df} two-sided {two} (exact)"),
            c,
            num(&entry["exact"]),
            2e-4,
        );
    }
    report("dunnett_critical_values_match_the_published_table");
}

/// The statements of the HC3 checks: every robust table the reference has a value for.
const HC3_BODY: &str = "factor g levels g1, g2, g3\nfactor h levels h1, h2\n\
    model m: y on g + h + g by h + x\n\
    table coefficients m robust\ntable means m for g robust\n\
    table anova m robust\ntable anova m type 3 robust";

fn check_hc3(file: &str, want: &Value, exact_only: bool) {
    let json = run(file, HC3_BODY);
    let coef = outputs(&json, "coefficients");
    let se: Vec<f64> = rows(coef[0]).iter().map(|r| num(&r["se"])).collect();
    if exact_only {
        for (i, (g, w)) in se.iter().zip(nums(&want["exact_coef_se"])).enumerate() {
            close(&format!("{file} exact coefficient {i} se"), *g, w, REL_TOL);
        }
        return;
    }
    for (i, (g, w)) in se.iter().zip(nums(&want["coef_se"])).enumerate() {
        close(&format!("{file} coefficient {i} se"), *g, w, REL_TOL);
    }
    let means = outputs(&json, "means");
    for (i, row) in rows(means[0]).iter().enumerate() {
        close(
            &format!("{file} mean {i}"),
            num(&row["mean"]),
            num(&want["means"][i][0]),
            REL_TOL,
        );
        close(
            &format!("{file} mean {i} se"),
            num(&row["se"]),
            num(&want["means"][i][1]),
            REL_TOL,
        );
    }
    let anova = outputs(&json, "anova");
    for (table, key) in anova.iter().zip(["type2_f", "type3_f"]) {
        for row in rows(table).iter().take(4) {
            let term = row["term"].as_str().unwrap_or("");
            close(
                &format!("{file} {key} {term}"),
                num(&row["f"]),
                num(&want[key][term]),
                REL_TOL,
            );
        }
    }
}

#[test]
fn hc3_against_numpy_on_random_unbalanced_designs() {
    let r = reference();
    for (i, want) in r["hc3"].as_array().into_iter().flatten().enumerate() {
        check_hc3(&format!("hc3-{i}.csv"), want, false);
    }
    report("hc3_against_numpy_on_random_unbalanced_designs");
}

#[test]
fn hc3_with_a_covariate_near_a_million_against_exact_arithmetic() {
    check_hc3("hc3-offset.csv", &reference()["hc3_offset"], true);
    report("hc3_with_a_covariate_near_a_million_against_exact_arithmetic");
}

const WLS_BODY: &str = "factor g levels g1, g2, g3\n\
    model w: y on g + x weights w\n\
    table fit w\ntable coefficients w\ntable means w for g\ntable anova w\ncheck w";

#[test]
fn weighted_least_squares_against_numpy() {
    let r = reference();
    for (i, want) in r["wls"].as_array().into_iter().flatten().enumerate() {
        let file = format!("wls-{i}.csv");
        let json = run(&file, WLS_BODY);
        let fit = &rows(outputs(&json, "fit")[0])[0];
        assert_eq!(
            num(&fit["n"]),
            num(&want["n"]),
            "{file}: rows of weight 0 are left out"
        );
        assert_eq!(num(&fit["df_residual"]), num(&want["df"]), "{file} df");
        close(
            &format!("{file} sigma"),
            num(&fit["sigma"]),
            num(&want["sigma"]),
            REL_TOL,
        );
        close(
            &format!("{file} R2"),
            num(&fit["r_squared"]),
            num(&want["r_squared"]),
            REL_TOL,
        );
        let coef = outputs(&json, "coefficients");
        for (k, row) in rows(coef[0]).iter().enumerate() {
            close(
                &format!("{file} coef {k}"),
                num(&row["estimate"]),
                num(&want["coef"][k]),
                REL_TOL,
            );
            close(
                &format!("{file} se {k}"),
                num(&row["se"]),
                num(&want["se"][k]),
                REL_TOL,
            );
        }
        for (k, row) in rows(outputs(&json, "means")[0]).iter().enumerate() {
            close(
                &format!("{file} mean {k}"),
                num(&row["mean"]),
                num(&want["means"][k][0]),
                REL_TOL,
            );
            close(
                &format!("{file} mean se {k}"),
                num(&row["se"]),
                num(&want["means"][k][1]),
                REL_TOL,
            );
        }
        let g = &rows(outputs(&json, "anova")[0])[0];
        close(
            &format!("{file} F of g"),
            num(&g["f"]),
            num(&want["f_g"]),
            REL_TOL,
        );
        let check = &rows(outputs(&json, "check")[0])[0];
        // Shapiro-Wilk on the weighted residuals: scipy's and covey's W agree to 1e-8
        // (tests/checks.rs).
        near(
            &format!("{file} W"),
            num(&check["statistic"]),
            num(&want["shapiro_w"]),
            1e-8,
        );
    }
    report("weighted_least_squares_against_numpy");
}

#[test]
fn weighted_least_squares_with_a_covariate_near_a_million_against_exact_arithmetic() {
    let want = &reference()["wls_offset"]["exact"];
    let json = run("wls-offset.csv", WLS_BODY);
    let coef = outputs(&json, "coefficients");
    for (k, row) in rows(coef[0]).iter().enumerate() {
        close(
            &format!("coef {k}"),
            num(&row["estimate"]),
            num(&want["coef"][k]),
            REL_TOL,
        );
        close(
            &format!("se {k}"),
            num(&row["se"]),
            num(&want["se"][k]),
            REL_TOL,
        );
    }
    let fit = &rows(outputs(&json, "fit")[0])[0];
    let rss = num(&fit["sigma"]).powi(2) * num(&fit["df_residual"]);
    close("weighted RSS", rss, num(&want["rss"]), REL_TOL);
    report("weighted_least_squares_with_a_covariate_near_a_million_against_exact_arithmetic");
}

#[test]
fn weights_that_cannot_be_weights_are_errors_at_the_row() {
    let world = MemoryWorld::new().with(
        "d.csv",
        b"g,x,y,w\na,1,2,1\na,2,3,-1\nb,1,4,1\nb,2,6,2\nb,3,7,1\n".to_vec(),
    );
    let doc = "```covey\nload \"d.csv\"\nfactor g\nmodel m: y on g + x weights w\n```\n";
    let run = pipeline::run(doc, "w.md", &world, RunOptions::default())
        .unwrap_or_else(|u| panic!("{:?}", u.errors));
    let all = run.errors.join("\n");
    assert!(
        all.contains("line 3") && all.contains("weights must be 0 or more"),
        "{all}"
    );
}

/// The errors of the new clauses, each at its words with what to do.
#[test]
fn misused_clauses_are_errors_that_say_what_to_do() {
    // Invented data: three groups, one of them a single row.
    let data = b"g,h,x,y,w\na,p,1,2.0,1\na,q,2,3.1,2\na,p,3,3.9,1\nb,q,1,4.2,1\nb,p,2,5.1,3\nb,q,3,5.8,1\nc,p,2,7.0,1\n".to_vec();
    let cases = [
        (
            "table differences m for g correction dunnett",
            "name the control with `versus`",
        ),
        (
            "table differences m for g versus a correction tukey",
            "for all pairs",
        ),
        (
            "table differences m for g versus z",
            "`z` is not a level of `g`",
        ),
        (
            "table differences m for g within g",
            "names the factor compared",
        ),
        ("table coefficients m robust", "leverage 1"),
        ("table compare m, w", "different case weights"),
        ("check m alpha 2", "alpha must lie between 0 and 1"),
        ("plot interaction m for g", "needs two factors"),
        ("plot means m for g by h", "does not take `by`"),
        (
            "report m differences g between a and b correction dunnett",
            "needs `versus`",
        ),
    ];
    for (statement, expected) in cases {
        let world = MemoryWorld::new().with("d.csv", data.clone());
        let doc = format!(
            "```covey\nload \"d.csv\"\nfactor g\nfactor h\nmodel m: y on g + h + x\nmodel w: y on g + h + x weights w\n{statement}\n```\n"
        );
        let run = pipeline::run(&doc, "e.md", &world, RunOptions::default())
            .unwrap_or_else(|u| panic!("{:?}", u.errors));
        let all = run.errors.join("\n");
        assert!(all.contains(expected), "{statement}: {all}");
        assert!(
            all.contains("e.md:7:"),
            "{statement}: the error points at its line: {all}"
        );
    }
}

/// Renders `body` with the invented data `csv` (written inline) loaded as `d`, keeping the
/// rendered Markdown.
fn run_inline(csv: &str, body: &str) -> (Value, String) {
    let world = MemoryWorld::new().with("d.csv", csv);
    let doc = format!("```covey\nload \"d.csv\" as d\n{body}\n```\n");
    let run = pipeline::run(&doc, "edges.md", &world, RunOptions::default())
        .unwrap_or_else(|u| panic!("document does not parse:\n{}", u.errors.join("\n")));
    assert!(run.errors.is_empty(), "{}", run.errors.join("\n"));
    (run.json(), run.rendered)
}

/// Invented: three groups, the covariate taking one value (5) in group c.
const ONE_VALUE_LEVEL: &str =
    "g,x,y\na,1,3.1\na,2,5\na,3,7.2\nb,1,4\nb,2,6.3\nb,4,10\nc,5,13\nc,5,13.4\n";

#[test]
fn slopes_where_a_level_has_one_covariate_value() {
    // The slope within c is not determined; the table once failed as a whole. Exact
    // rational least squares (Python fractions) of y on g + x + g by x without the c slope:
    // slopes 41/20 and 277/140, s^2 = 107/2100, Var(slope a) = s^2 / 2, and the F of the
    // equal-slopes test 15/107 on 1 and 3 df.
    let (json, md) = run_inline(
        ONE_VALUE_LEVEL,
        "factor g levels a, b, c\nmodel m: y on g + x\ntable slopes m of x for g",
    );
    let t = outputs(&json, "slopes")[0];
    let r = rows(t);
    close("slope a (exact)", num(&r[0]["slope"]), 41.0 / 20.0, 1e-13);
    close("slope b (exact)", num(&r[1]["slope"]), 277.0 / 140.0, 1e-13);
    close(
        "SE of slope a (exact)",
        num(&r[0]["se"]),
        (107.0 / 2100.0 / 2.0_f64).sqrt(),
        1e-13,
    );
    assert!(r[2]["slope"].is_null() && r[2]["se"].is_null(), "{}", r[2]);
    assert!(md.contains("| c | — | — | — | 3 | — | — | — |"), "{md}");
    assert!(
        md.contains("left out of the test that the slopes are equal: `c`"),
        "{md}"
    );
    // The reason is the one the model's own warning gives for such a level.
    assert!(
        md.contains("the covariate `x` takes a single value within one level of `g`: `c` at 5"),
        "{md}"
    );
    let eq = rows(outputs(&json, "slopes-equality")[0]);
    close(
        "equal-slopes F (exact)",
        num(&eq[0]["f"]),
        15.0 / 107.0,
        1e-12,
    );
    assert_eq!(num(&eq[0]["df1"]), 1.0);
    report("slopes_where_a_level_has_one_covariate_value");
}

#[test]
fn one_comparison_with_a_control_is_the_t_test() {
    // Two groups: Dunnett's one comparison is the t test. Exact difference 1 with variance
    // 41/2250 on 3 df; scipy.stats.t.sf(7.407971974871922, 3) = 0.002544264532944186 (the
    // lattice once gave an error of up to 1e-5 here), lower limit above the control
    // 1 - scipy.stats.t.ppf(0.95, 3) * SE = 0.6823201487823514.
    let csv = ONE_VALUE_LEVEL
        .lines()
        .take(7)
        .collect::<Vec<_>>()
        .join("\n");
    let (json, _) = run_inline(
        &csv,
        "factor g levels a, b\nmodel m: y on g + x\ntable differences m for g versus a above",
    );
    let r = rows(outputs(&json, "differences")[0]);
    close("difference (exact)", num(&r[0]["estimate"]), 1.0, 1e-13);
    close(
        "p (scipy t)",
        num(&r[0]["p"]),
        0.002_544_264_532_944_186,
        1e-9,
    );
    close(
        "lower limit (scipy t)",
        num(&r[0]["lower"]),
        0.682_320_148_782_351_4,
        1e-10,
    );
    report("one_comparison_with_a_control_is_the_t_test");
}

#[test]
fn an_exact_fit_gives_dunnett_limits_at_the_estimates() {
    // y = 1 + 2x + (0, 1, 2) by group exactly (invented): every SE is 0, so the limits are
    // the estimates (as Tukey's are) and p is undefined; a two-sided table says nothing of
    // one side, where it once said that each limit was an upper bound.
    let csv = "g,x,y\na,1,3\na,2,5\na,3,7\nb,1,4\nb,2,6\nb,4,10\nc,5,13\n";
    let (json, md) = run_inline(
        csv,
        "factor g levels a, b, c\nmodel m: y on g + x\ntable differences m for g versus a\ntable differences m for g versus c below",
    );
    let tables = outputs(&json, "differences");
    let two = rows(tables[0]);
    assert_eq!(num(&two[0]["lower"]), num(&two[0]["estimate"]));
    assert_eq!(num(&two[1]["upper"]), num(&two[1]["estimate"]));
    near("b - a (exact)", num(&two[0]["estimate"]), 1.0, 1e-12);
    assert!(two[0]["p"].is_null(), "{}", two[0]);
    let below = rows(tables[1]);
    assert!(below[0]["lower"].is_null(), "{}", below[0]);
    near("a - c (exact)", num(&below[0]["upper"]), -2.0, 1e-12);
    assert_eq!(
        md.matches("One-sided: each limit is an upper bound")
            .count(),
        1,
        "{md}"
    );
}

/// Robust standard errors when one row's leverage is 1 - 1.2e-10 (a covariate value far
/// from the others; in a weighted fit, the only row of a level of real weight), against
/// exact rational arithmetic (tests/reference/hc3_leverage.py, Python fractions). 1 - h and
/// the residual of such a row are computed from the other rows, without the cancellation
/// of 1 - h and y - fitted, and the meat is factored from its rows, so the standard errors
/// keep 10 digits or more (LRE printed: 11.5 at the time of writing; it was 5.0 when 1 - h
/// and the residual were differences and the meat's square root came from its eigenvalues).
#[test]
fn hc3_at_a_leverage_near_one_against_exact_arithmetic() {
    let text = std::fs::read_to_string(format!("{DIR}hc3-leverage.json"))
        .unwrap_or_else(|e| panic!("hc3-leverage.json: {e}"));
    let r: Value = serde_json::from_str(&text).unwrap_or_else(|e| panic!("{e}"));
    let mut worst = f64::INFINITY;
    for (file, key, weights) in [
        ("hc3-leverage.csv", "unweighted", ""),
        ("hc3-leverage-w.csv", "weighted", " weights w"),
    ] {
        let json = run(
            file,
            &format!(
                "factor g levels g1, g2, g3\nmodel m: y on g + x{weights}\n\
                 table coefficients m robust"
            ),
        );
        let coef = outputs(&json, "coefficients");
        for (i, (row, want)) in rows(coef[0]).iter().zip(nums(&r[key]["se"])).enumerate() {
            let got = num(&row["se"]);
            let lre = -((got - want).abs() / want).log10();
            worst = worst.min(lre);
            close(&format!("{key} coefficient {i} se"), got, want, 1e-10);
        }
    }
    eprintln!("robust SE at leverage 1 - 1.2e-10: worst LRE {worst:.1} (exact rationals)");
}
