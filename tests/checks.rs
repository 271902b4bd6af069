//! The `check M` statement: its numbers against an independent computation with numpy and
//! scipy (tests/reference/check_reference.py) on the invented fixture data
//! tests/fixtures/data/pens.csv, the case of more than 5000 residuals, and the rows that the
//! influence table lists.

use covey::pipeline::{self, RunOptions};
use covey::world::MemoryWorld;
use serde_json::Value;

/// The invented fixture data (see tests/fixtures/data/README.txt).
const PENS: &[u8] = include_bytes!("fixtures/data/pens.csv");

const HEAD: &str = "```covey\nmissing \"NA\"\nload \"data/pens.csv\" as pens\nfactor diet levels control, low, high\nfactor barn levels east, west\n";

/// Allowed relative difference from numpy/scipy for the F statistics and their p-values.
/// covey's residuals (Householder QR) and numpy's (lstsq, SVD) agree to about 1e-13
/// relative; the statistics built on them inherit that, and 1e-8 leaves room for the F
/// distribution's tail in two libraries.
const REL_TOL: f64 = 1e-8;
/// Allowed difference in W from scipy: both implement Royston's algorithm; the Shapiro-Wilk
/// unit tests measured differences up to 2e-10.
const W_TOL: f64 = 1e-8;
/// Allowed relative difference in the Shapiro-Wilk p from scipy (measured below 2e-8 at
/// this sample size in the Shapiro-Wilk unit tests).
const SW_P_REL_TOL: f64 = 1e-6;

// Printed by `python3 tests/reference/check_reference.py` (numpy 2.4, scipy 1.17) for
// model main: final_kg on diet + barn + start_kg, n = 35 rows, p = 5 coefficients.
// scipy.stats.shapiro on the numpy lstsq residuals: W, p
const SHAPIRO: [f64; 2] = [0.9362950066037731, 0.04319829638614258];
// scipy.stats.levene(center='median'), residuals by diet: F, df1, df2, p
const SPREAD_DIET: [f64; 4] = [0.7683558856143877, 2.0, 32.0, 0.47214130826365924];
// scipy.stats.levene(center='median'), residuals by barn: F, df1, df2, p
const SPREAD_BARN: [f64; 4] = [0.5880169480084252, 1.0, 33.0, 0.4486384199035232];
// numpy lstsq with and without the diet-by-start_kg columns: F, df1, df2, scipy.stats.f.sf
const SLOPES_DIET: [f64; 4] = [1.297809701051181, 2.0, 28.0, 0.2890566340849791];
// numpy lstsq with and without the barn-by-start_kg column: F, df1, df2, scipy.stats.f.sf
const SLOPES_BARN: [f64; 4] = [0.5844197459439561, 1.0, 29.0, 0.45076125120302957];
// scipy.stats.f_oneway of start_kg on diet: F, df1, df2, p
const BALANCE_DIET: [f64; 4] = [6.638303635201317, 2.0, 32.0, 0.0038763022495767957];
// scipy.stats.f_oneway of start_kg on barn: F, df1, df2, p
const BALANCE_BARN: [f64; 4] = [0.019101245053151385, 1.0, 33.0, 0.890916537185702];
// data-file line of each fitted row (line 9 has a missing final_kg)
const LINES: [usize; 35] = [
    2, 3, 4, 5, 6, 7, 8, 10, 11, 12, 13, 14, 15, 16, 17, 18, 19, 20, 21, 22, 23, 24, 25, 26, 27,
    28, 29, 30, 31, 32, 33, 34, 35, 36, 37,
];
// diagonal of X (X'X)^-1 X' (numpy)
const LEVERAGE: [f64; 35] = [
    0.10813783350432699,
    0.11008271789301152,
    0.26467337061279206,
    0.12182740734095816,
    0.11476627088018004,
    0.15994624618467085,
    0.112577145196173,
    0.14230772782473686,
    0.11869448504662787,
    0.11869448504662787,
    0.16196010612434966,
    0.14359132953452627,
    0.11363205337828096,
    0.10356124601757233,
    0.13977995919763178,
    0.20484373896736327,
    0.09829234313590215,
    0.14158990780896172,
    0.13363609391328943,
    0.10428077785826972,
    0.142989018438961,
    0.11026468959368683,
    0.12295053724290164,
    0.1291247442313684,
    0.11816705451279667,
    0.14188545673750355,
    0.09801262466168646,
    0.10500742398052436,
    0.2753716167743465,
    0.27719527568986885,
    0.1370422328880938,
    0.16888806574714205,
    0.1624674501987702,
    0.1370422328880938,
    0.15671633094795911,
];
// Cook's distance by definition: squared change of the fitted values when row i is left
// out (numpy lstsq refit), divided by p s^2
const COOK: [f64; 35] = [
    0.003817887497449637,
    0.04496410209718211,
    0.00028828026329939707,
    0.033616836486407176,
    4.5278881375769104e-05,
    0.12547341199563755,
    0.013108906621427092,
    0.007551224922966318,
    0.0002843797692739272,
    0.014889201125239183,
    0.014313021874882322,
    0.001630723403856571,
    0.014908276806801228,
    0.0016712425996629745,
    0.022552559154020015,
    0.0230216855260023,
    0.01870709262792896,
    0.007929077375458742,
    0.10885379619090374,
    0.27124318575342443,
    0.028782360857913445,
    0.00036044646250814934,
    0.015405240646938814,
    0.0014460029759612934,
    0.0005499035946129996,
    0.0009498297800666577,
    0.002662789935538996,
    0.006386703471144411,
    0.03538149982461289,
    0.31926419842017223,
    0.01395592710962151,
    0.001706977146653515,
    0.0029392900893322462,
    0.012204666461574074,
    0.04721273464235414,
];
// e_i / (s_(i) sqrt(1 - h_i)), s_(i) from the numpy lstsq fit without row i
const STUDENTIZED: [f64; 35] = [
    0.3911447992168875,
    -1.3675467974494069,
    -0.062222125089128395,
    -1.1047681570892134,
    0.04108711994196926,
    1.8916031749234687,
    0.7128845293330218,
    -0.47080056491570055,
    -0.10104088184949318,
    0.7378114350964324,
    -0.6020248087669596,
    0.21699125199436564,
    -0.7570833065511091,
    0.26474574691316805,
    -0.8286776465782244,
    -0.6621637124495865,
    0.9240618137840355,
    -0.48396362613875815,
    -1.9660963939778608,
    4.290618020416467,
    -0.9265379811038619,
    -0.1185935932548385,
    0.7355605091164575,
    -0.21728735192011384,
    0.14088351446802228,
    -0.16670858108057654,
    0.3448575431548352,
    0.5152767113640868,
    0.6760916487011307,
    -2.1614815718031704,
    -0.6565598343273896,
    -0.20163769812413218,
    -0.2709638388243044,
    0.613413401934839,
    1.1323413311370674,
];
// lines the script finds past a threshold (leverage > 2p/n, Cook > 4/n, |studentized| > 3)
const FLAGGED: [usize; 3] = [7, 22, 32];

/// Runs a document whose data file is `data/pens.csv` (or the given bytes) and returns its
/// JSON export.
fn run(doc: &str, data: &[u8]) -> (Value, String) {
    let world = MemoryWorld::new().with("data/pens.csv", data.to_vec());
    let run = pipeline::run(doc, "checks.md", &world, RunOptions::default())
        .unwrap_or_else(|u| panic!("document does not parse:\n{}", u.errors.join("\n")));
    assert!(run.errors.is_empty(), "{}", run.errors.join("\n"));
    (run.json(), run.rendered)
}

/// The `nth` output of the given kind.
fn output<'a>(json: &'a Value, kind: &str, nth: usize) -> &'a Value {
    json["outputs"]
        .as_array()
        .into_iter()
        .flatten()
        .filter(|o| o["kind"] == kind)
        .nth(nth)
        .unwrap_or_else(|| panic!("no output {nth} of kind {kind}"))
}

fn rows(table: &Value) -> &[Value] {
    table["rows"].as_array().map_or(&[], Vec::as_slice)
}

/// The row of the check table whose `check` starts with `label`.
fn check_row<'a>(table: &'a Value, label: &str) -> &'a Value {
    rows(table)
        .iter()
        .find(|r| r["check"].as_str().is_some_and(|c| c.starts_with(label)))
        .unwrap_or_else(|| panic!("no check row {label:?} in {table}"))
}

fn num(v: &Value) -> f64 {
    v.as_f64().unwrap_or_else(|| panic!("not a number: {v}"))
}

fn close_rel(actual: f64, expected: f64, tol: f64, what: &str) {
    assert!(
        ((actual - expected) / expected).abs() <= tol,
        "{what}: {actual} vs {expected}"
    );
}

/// An F-test row: statistic, "df1, df2", p.
fn assert_f_row(r: &Value, reference: [f64; 4], what: &str) {
    close_rel(num(&r["statistic"]), reference[0], REL_TOL, what);
    assert_eq!(
        r["df"],
        format!("{}, {}", reference[1], reference[2]),
        "{what}: df"
    );
    close_rel(num(&r["p"]), reference[3], REL_TOL, what);
}

fn main_check() -> Value {
    let doc = format!("{HEAD}model main: final_kg on diet + barn + start_kg\ncheck main\n```\n");
    run(&doc, PENS).0
}

#[test]
fn columns_are_the_documented_ones() {
    let json = main_check();
    let t = output(&json, "check", 0);
    assert_eq!(
        t["columns"],
        serde_json::json!(["check", "statistic", "df", "p", "verdict"])
    );
    let inf = output(&json, "influence", 0);
    assert_eq!(
        inf["columns"],
        serde_json::json!(["row", "leverage", "cooks_distance", "studentized_residual"])
    );
    // normality, spread x 2 factors, slopes x 2 pairs, balance x 2 pairs, influence
    assert_eq!(rows(t).len(), 8, "{t}");
}

#[test]
fn checks_match_numpy_and_scipy() {
    let json = main_check();
    let t = output(&json, "check", 0);

    let sw = check_row(t, "normality of residuals");
    assert!((num(&sw["statistic"]) - SHAPIRO[0]).abs() <= W_TOL, "{sw}");
    close_rel(num(&sw["p"]), SHAPIRO[1], SW_P_REL_TOL, "Shapiro-Wilk p");
    assert!(sw["df"].is_null());
    // p = .043 < .05 (scipy): the verdict says the shape departs from normal.
    assert!(
        sw["verdict"].as_str().is_some_and(|v| v.contains("depart")),
        "{sw}"
    );

    assert_f_row(
        check_row(t, "equal residual spread across diet"),
        SPREAD_DIET,
        "Brown-Forsythe by diet",
    );
    assert_f_row(
        check_row(t, "equal residual spread across barn"),
        SPREAD_BARN,
        "Brown-Forsythe by barn",
    );
    assert_f_row(
        check_row(t, "equal slopes of start_kg across diet"),
        SLOPES_DIET,
        "equal slopes across diet",
    );
    assert_f_row(
        check_row(t, "equal slopes of start_kg across barn"),
        SLOPES_BARN,
        "equal slopes across barn",
    );
    let diet = check_row(t, "balance of start_kg across diet");
    assert_f_row(diet, BALANCE_DIET, "balance across diet");
    // p = .004 (scipy f_oneway): the warning sign.
    assert!(
        diet["verdict"]
            .as_str()
            .is_some_and(|v| v.starts_with("warning sign")),
        "{diet}"
    );
    let barn = check_row(t, "balance of start_kg across barn");
    assert_f_row(barn, BALANCE_BARN, "balance across barn");
    assert!(
        barn["verdict"]
            .as_str()
            .is_some_and(|v| v.starts_with("no evidence")),
        "{barn}"
    );
}

#[test]
fn flagged_rows_are_exactly_those_past_the_thresholds() {
    let json = main_check();
    let (n, p) = (LINES.len() as f64, 5.0);
    // The thresholds applied here to the numpy values, independently of the script's list.
    let past: Vec<usize> = (0..LINES.len())
        .filter(|&k| LEVERAGE[k] > 2.0 * p / n || COOK[k] > 4.0 / n || STUDENTIZED[k].abs() > 3.0)
        .map(|k| LINES[k])
        .collect();
    assert_eq!(past, FLAGGED);
    // No value lies so close to a threshold that rounding could move it across.
    for k in 0..LINES.len() {
        for (v, limit) in [
            (LEVERAGE[k], 2.0 * p / n),
            (COOK[k], 4.0 / n),
            (STUDENTIZED[k].abs(), 3.0),
        ] {
            assert!(((v - limit) / limit).abs() > 1e-6, "line {}", LINES[k]);
        }
    }

    let inf = output(&json, "influence", 0);
    let listed: Vec<usize> = rows(inf).iter().map(|r| num(&r["row"]) as usize).collect();
    assert_eq!(listed, past);
    for r in rows(inf) {
        let line = num(&r["row"]) as usize;
        let k = LINES.iter().position(|&l| l == line).unwrap_or(usize::MAX);
        assert!(k < LINES.len(), "line {line} is not a fitted row");
        close_rel(num(&r["leverage"]), LEVERAGE[k], REL_TOL, "leverage");
        close_rel(
            num(&r["cooks_distance"]),
            COOK[k],
            REL_TOL,
            "Cook's distance",
        );
        close_rel(
            num(&r["studentized_residual"]),
            STUDENTIZED[k],
            REL_TOL,
            "studentized residual",
        );
    }
    let count = check_row(output(&json, "check", 0), "influential rows");
    assert_eq!(num(&count["statistic"]), past.len() as f64);
    assert!(count["p"].is_null() && count["df"].is_null());
    let note = inf["notes"].to_string();
    assert!(
        note.contains("2p/n = 0.286") && note.contains("4/n = 0.114"),
        "{note}"
    );
}

/// 64-bit linear congruential generator (Knuth's MMIX constants): uniforms in [0, 1).
fn uniforms(seed: u64) -> impl FnMut() -> f64 {
    let mut state = seed;
    move || {
        state = state
            .wrapping_mul(6_364_136_223_846_793_005)
            .wrapping_add(1_442_695_040_888_963_407);
        (state >> 11) as f64 / (1u64 << 53) as f64
    }
}

#[test]
fn more_than_5000_residuals_are_not_tested_for_normality() {
    const ROWS: usize = 5200;
    let mut u = uniforms(7);
    let mut csv = String::from("pen,diet,barn,start_kg,final_kg\n");
    let diets = ["control", "low", "high"];
    for i in 0..ROWS {
        let diet = diets[i % 3];
        let barn = if i % 2 == 0 { "east" } else { "west" };
        let start = 15.0 + 10.0 * u();
        let noise: f64 = (0..12).map(|_| u()).sum::<f64>() - 6.0;
        let final_kg = 10.0 + (i % 3) as f64 + start + noise;
        csv.push_str(&format!("{i},{diet},{barn},{start:.2},{final_kg:.2}\n"));
    }
    let doc = format!("{HEAD}model big: final_kg on diet + barn + start_kg\ncheck big\n```\n");
    let (json, _) = run(&doc, csv.as_bytes());
    let t = output(&json, "check", 0);
    let sw = check_row(t, "normality of residuals");
    assert!(sw["statistic"].is_null() && sw["p"].is_null(), "{sw}");
    let verdict = sw["verdict"].as_str().unwrap_or_default();
    assert!(verdict.starts_with("not tested"), "{verdict}");
    assert!(
        verdict.contains("5000") && verdict.contains(&ROWS.to_string()),
        "{verdict}"
    );
    assert!(verdict.contains("plot quantiles big"), "{verdict}");
    // The other checks still run.
    assert!(check_row(t, "equal residual spread across diet")["p"].is_number());
}

#[test]
fn an_interaction_in_the_model_leaves_out_its_slopes_row() {
    let doc = format!(
        "{HEAD}model separate: final_kg on diet + start_kg + diet by start_kg\ncheck separate\n```\n"
    );
    let (json, _) = run(&doc, PENS);
    let t = output(&json, "check", 0);
    assert!(
        !rows(t).iter().any(|r| r["check"]
            .as_str()
            .is_some_and(|c| c.starts_with("equal slopes"))),
        "{t}"
    );
    assert!(t["notes"]
        .to_string()
        .contains("already has their interaction"));
    // Balance is a property of the data, not of the model: same as for model main.
    assert_f_row(
        check_row(t, "balance of start_kg across diet"),
        BALANCE_DIET,
        "balance across diet",
    );
}

#[test]
fn a_transformed_covariate_has_no_slopes_test() {
    let doc = format!("{HEAD}model curved: final_kg on diet + log(start_kg)\ncheck curved\n```\n");
    let (json, _) = run(&doc, PENS);
    let r = check_row(
        output(&json, "check", 0),
        "equal slopes of start_kg across diet",
    );
    assert!(r["statistic"].is_null() && r["p"].is_null(), "{r}");
    assert!(
        r["verdict"]
            .as_str()
            .is_some_and(|v| v.starts_with("not tested")),
        "{r}"
    );
}

#[test]
fn no_flagged_row_gives_a_sentence_and_no_table() {
    // y = 1 + 2x plus an alternating +-1: no leverage above 2p/n = 0.2 (the largest is
    // 1/20 + 90.25/665 = 0.186), no Cook's distance near 4/n, no large residual.
    let mut csv = String::from("pen,diet,barn,start_kg,final_kg\n");
    for i in 1..=20 {
        let diet = ["control", "low", "high"][i % 3];
        let (barn, e) = if i % 2 == 0 {
            ("east", 1.0)
        } else {
            ("west", -1.0)
        };
        csv.push_str(&format!(
            "{i},{diet},{barn},{i},{}\n",
            1.0 + 2.0 * i as f64 + e
        ));
    }
    let doc = format!("{HEAD}model line: final_kg on start_kg\ncheck line\n```\n");
    let (json, rendered) = run(&doc, csv.as_bytes());
    let t = output(&json, "check", 0);
    // Without a factor: normality and influence only.
    assert_eq!(rows(t).len(), 2, "{t}");
    assert_eq!(num(&check_row(t, "influential rows")["statistic"]), 0.0);
    assert!(!json["outputs"]
        .as_array()
        .into_iter()
        .flatten()
        .any(|o| o["kind"] == "influence"));
    assert!(
        rendered.contains("No row of model `line` is past an influence threshold."),
        "{rendered}"
    );
}

/// `require balance ... in M` uses the rows of model M, as the balance row of `check M` does,
/// and gives scipy's F and p on them; without a model it uses the rows of the data set that
/// have both values, and says how many (here one more: line 9 lacks only the response).
#[test]
fn the_balance_gate_on_a_model_uses_the_rows_of_check() {
    let doc = format!(
        "{HEAD}model main: final_kg on diet + barn + start_kg\n\
         require balance start_kg by barn in main\n\
         require balance start_kg by barn\n\
         check main\n\
         table anova main\n```\n"
    );
    let (json, rendered) = run(&doc, PENS);
    let check = output(&json, "check", 0);
    assert_f_row(
        check_row(check, "balance of start_kg across barn"),
        BALANCE_BARN,
        "check",
    );
    // scipy.stats.f_oneway of start_kg on barn over the model's 35 rows (BALANCE_BARN),
    // to the two decimals and three of p that the gate's sentence shows.
    assert!(
        rendered.contains(
            "Gate passed: balance of `start_kg` across `barn` (one-way ANOVA on the 35 rows \
             model `main` is fitted to): F(1, 33) = 0.02, p = .891 (alpha 0.05)."
        ),
        "{rendered}"
    );
    assert!(
        rendered.contains(
            "Gate passed: balance of `start_kg` across `barn` (one-way ANOVA on the 36 rows of \
             the data set with both values): F(1, 34)"
        ),
        "{rendered}"
    );
    let note = check["notes"][0].as_str().unwrap_or_default();
    assert!(
        note.contains("the 35 rows the model was fitted to"),
        "{note}"
    );
    // Every table of tests of a model states its n.
    let anova = output(&json, "anova", 0);
    assert!(
        anova["notes"]
            .as_array()
            .into_iter()
            .flatten()
            .any(|n| n == "n = 35: the rows model `main` is fitted to."),
        "{anova}"
    );
}

/// A factor or covariate that is not the named model's is an error that says so.
#[test]
fn the_balance_gate_names_a_model_variable() {
    let doc = format!(
        "{HEAD}model small: final_kg on diet\nrequire balance start_kg by diet in small\n```\n"
    );
    let world = MemoryWorld::new().with("data/pens.csv", PENS.to_vec());
    let run = pipeline::run(&doc, "checks.md", &world, RunOptions::default())
        .unwrap_or_else(|u| panic!("{}", u.errors.join("\n")));
    let errors = run.errors.join("\n");
    assert!(
        errors.contains("`start_kg` is not a numeric covariate of model `small`"),
        "{errors}"
    );
}
