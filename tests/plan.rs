//! Planning: the noncentral F distribution against scipy, the power and sample-size solver
//! against a published table and against a Monte Carlo simulation of the test it plans.

use std::path::Path;

use covey::stats::ncf;
use covey::stats::power::{Design, PlanError};

/// Rows of a CSV file under tests/reference, as strings keyed by the header.
fn reference(name: &str) -> Vec<std::collections::BTreeMap<String, String>> {
    let path = Path::new(env!("CARGO_MANIFEST_DIR"))
        .join("tests/reference")
        .join(name);
    let mut reader =
        csv::Reader::from_path(&path).unwrap_or_else(|e| panic!("{}: {e}", path.display()));
    let header: Vec<String> = reader
        .headers()
        .unwrap_or_else(|e| panic!("{e}"))
        .iter()
        .map(str::to_string)
        .collect();
    reader
        .records()
        .map(|r| {
            let r = r.unwrap_or_else(|e| panic!("{e}"));
            header
                .iter()
                .cloned()
                .zip(r.iter().map(str::to_string))
                .collect()
        })
        .collect()
}

fn num(row: &std::collections::BTreeMap<String, String>, key: &str) -> f64 {
    row.get(key)
        .and_then(|v| v.parse().ok())
        .unwrap_or_else(|| panic!("no number `{key}` in {row:?}"))
}

/// The accuracy the issue asks of the noncentral F distribution function, absolute.
const CDF_ABS: f64 = 1e-10;

/// scipy 1.17.1, scipy.stats.ncf.cdf and .sf (Boost's noncentral beta), cross-checked in
/// the script against a direct Poisson-mixture sum of scipy.special.betainc to 1.2e-13:
/// tests/reference/ncf_reference.py, ncf_values.csv. 4,851 points over df1 1-20, df2
/// 2-10,000, noncentrality 0-400, from the 0.5% to the 99.5% point and at x = 0.01 and 50.
#[test]
fn noncentral_f_matches_scipy_to_1e_10() {
    let rows = reference("ncf_values.csv");
    assert!(rows.len() > 4000);
    let mut worst = (0.0f64, String::new());
    for row in &rows {
        let (d1, d2, lambda, x) = (
            num(row, "df1"),
            num(row, "df2"),
            num(row, "lambda"),
            num(row, "x"),
        );
        let (cdf, sf) = ncf::cdf_sf(x, d1, d2, lambda);
        for (got, want) in [(cdf, num(row, "cdf")), (sf, num(row, "sf"))] {
            let err = (got - want).abs();
            if err.is_nan() || err > worst.0 {
                worst = (
                    if err.is_nan() { f64::INFINITY } else { err },
                    format!("df1={d1} df2={d2} lambda={lambda} x={x}: {got} vs {want}"),
                );
            }
        }
    }
    println!(
        "largest absolute error of the noncentral F: {:.2e} at {}",
        worst.0, worst.1
    );
    assert!(worst.0 <= CDF_ABS, "{:.3e} at {}", worst.0, worst.1);
}

/// scipy 1.17.1, scipy.stats.f.isf(alpha, df1, df2): ncf_critical.csv.
#[test]
fn critical_values_match_scipy() {
    for row in reference("ncf_critical.csv") {
        let (alpha, d1, d2, want) = (
            num(&row, "alpha"),
            num(&row, "df1"),
            num(&row, "df2"),
            num(&row, "critical"),
        );
        let got = ncf::f_upper_point(alpha, d1, d2);
        assert!(
            (got - want).abs() <= 1e-11 * want,
            "F upper {alpha} point ({d1}, {d2}): {got} vs {want}"
        );
    }
}

/// scipy 1.17.1, scipy.stats.chi2.ppf(1 - level, df): chi2_lower.csv.
#[test]
fn chi_square_points_match_scipy() {
    for row in reference("chi2_lower.csv") {
        let (df, level, want) = (num(&row, "df"), num(&row, "level"), num(&row, "quantile"));
        let got = ncf::chi_square_lower_point(level, df);
        assert!(
            (got - want).abs() <= 1e-11 * want,
            "chi-square ({df}) lower {} point: {got} vs {want}",
            1.0 - level
        );
    }
}

fn equal(groups: u64, covariates: u64, r_squared: f64, alpha: f64) -> Design {
    Design {
        groups,
        covariates,
        r_squared,
        alpha,
        ratio: Vec::new(),
    }
}

/// J. Cohen, Statistical Power Analysis for the Behavioral Sciences, 2nd ed. (1988),
/// Table 8.4.4: the number per group for power .80 at alpha = .05, by u = K - 1 and f
/// (values from memory). Cohen computed his tables with an approximation to the noncentral
/// F (also from memory), so the exact smallest n may differ from his entries by one; here it
/// is his entry or one more.
#[test]
fn sample_sizes_match_cohens_table() {
    let table: [(u64, f64, u64); 12] = [
        (1, 0.10, 393),
        (1, 0.25, 64),
        (1, 0.40, 26),
        (2, 0.10, 322),
        (2, 0.25, 52),
        (2, 0.40, 21),
        (3, 0.10, 274),
        (3, 0.25, 45),
        (3, 0.40, 18),
        (4, 0.10, 240),
        (4, 0.25, 39),
        (4, 0.40, 16),
    ];
    for (u, f, printed) in table {
        let d = equal(u + 1, 0, 0.0, 0.05);
        let got = d.n_for_power(f, 0.80).unwrap_or_else(|e| panic!("{e}"));
        assert!(
            got.n == printed || got.n == printed + 1,
            "u = {u}, f = {f}: n = {} (power {:.4}), Cohen's table {printed}",
            got.n,
            got.power
        );
    }
}

/// scipy 1.17.1: power = ncf.sf(f.isf(alpha, df1, df2), df1, df2, lambda) for designs with
/// covariates, and the smallest n reaching a target found by stepping n with scipy:
/// tests/reference/ncf_reference.py, ncf_power.csv.
#[test]
fn the_solver_matches_scipy() {
    for row in reference("ncf_power.csv") {
        let d = equal(
            num(&row, "groups") as u64,
            num(&row, "covariates") as u64,
            num(&row, "r_squared"),
            num(&row, "alpha"),
        );
        let f = num(&row, "f");
        let n = num(&row, "n") as u64;
        let at = d.power(f, n).unwrap_or_else(|e| panic!("{e}"));
        assert!(
            (at.power - num(&row, "power")).abs() <= CDF_ABS,
            "{row:?}: power {}",
            at.power
        );
        if let Some(target) = row.get("target").and_then(|t| t.parse::<f64>().ok()) {
            let found = d.n_for_power(f, target).unwrap_or_else(|e| panic!("{e}"));
            assert_eq!(found.n, n, "{row:?}");
        }
    }
}

/// A fixed-seed generator for the simulation: SplitMix64 (G. Steele, D. Lea and C. Flood,
/// "Fast splittable pseudorandom number generators", OOPSLA 2014), normals by Box and
/// Muller (1958).
struct Rng(u64);

impl Rng {
    fn next_u64(&mut self) -> u64 {
        self.0 = self.0.wrapping_add(0x9E37_79B9_7F4A_7C15);
        let mut z = self.0;
        z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
        z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
        z ^ (z >> 31)
    }

    /// Uniform on (0, 1).
    fn uniform(&mut self) -> f64 {
        ((self.next_u64() >> 11) as f64 + 0.5) / (1u64 << 53) as f64
    }

    fn normal_pair(&mut self) -> (f64, f64) {
        let r = (-2.0 * self.uniform().ln()).sqrt();
        let t = 2.0 * std::f64::consts::PI * self.uniform();
        (r * t.cos(), r * t.sin())
    }
}

/// One simulated trial's F statistic for the groups, adjusted for the covariates (common
/// slopes), with group sizes `sizes`, group means `means`, covariate slopes `slopes` and
/// error SD `sd_error`.
///
/// The covariates are fixed, balanced and orthogonal: in a group of m subjects, subject i
/// has cos(2 pi i / m), sin(2 pi i / m), cos(4 pi i / m), ..., which sum to zero within every
/// group and are orthogonal to one another within it. The sums of squares then separate
/// exactly: the groups' sum of squares adjusted for the covariates is the plain between-group
/// one, and the error sum of squares is the within-group one less each covariate's pooled
/// within-group regression sum of squares, S_xy^2 / S_xx.
fn simulated_f(sizes: &[u64], means: &[f64], slopes: &[f64], sd_error: f64, rng: &mut Rng) -> f64 {
    let c = slopes.len();
    let total: u64 = sizes.iter().sum();
    let mut spare: Option<f64> = None;
    let mut group_sums = Vec::with_capacity(sizes.len());
    let mut within = 0.0;
    let mut sxy = vec![0.0; c];
    let mut sxx = vec![0.0; c];
    for (&m, &mu) in sizes.iter().zip(means) {
        let covariate = |j: usize, i: u64| {
            let harmonic = (j / 2 + 1) as f64;
            let angle = 2.0 * std::f64::consts::PI * harmonic * i as f64 / m as f64;
            if j % 2 == 0 {
                angle.cos()
            } else {
                angle.sin()
            }
        };
        let ys: Vec<f64> = (0..m)
            .map(|i| {
                let e = match spare.take() {
                    Some(z) => z,
                    None => {
                        let (a, b) = rng.normal_pair();
                        spare = Some(b);
                        a
                    }
                };
                mu + sd_error * e
                    + slopes
                        .iter()
                        .enumerate()
                        .map(|(j, b)| b * covariate(j, i))
                        .sum::<f64>()
            })
            .collect();
        let sum: f64 = ys.iter().sum();
        let mean = sum / m as f64;
        within += ys.iter().map(|y| (y - mean) * (y - mean)).sum::<f64>();
        for j in 0..c {
            for (i, y) in (0..m).zip(&ys) {
                let x = covariate(j, i);
                sxy[j] += x * (y - mean);
                sxx[j] += x * x;
            }
        }
        group_sums.push((m as f64, sum));
    }
    let grand = group_sums.iter().map(|g| g.1).sum::<f64>() / total as f64;
    let between: f64 = group_sums
        .iter()
        .map(|&(m, sum)| m * (sum / m - grand) * (sum / m - grand))
        .sum();
    let explained: f64 = sxy.iter().zip(&sxx).map(|(a, b)| a * a / b).sum();
    let k = sizes.len() as f64;
    let df2 = total as f64 - k - c as f64;
    (between / (k - 1.0)) / ((within - explained) / df2)
}

/// One setting of the simulation: a design, group means in units of the SD within groups
/// without covariates (so S = 1), and the number per group (per unit of the ratio).
struct Setting {
    design: Design,
    means: Vec<f64>,
    n: u64,
}

/// Trials simulated at each setting: the standard error of a rejection rate near 0.5 is
/// then 0.0035, and all settings together run in well under a second.
const TRIALS: usize = 20_000;

/// The solver's power against the rejection rate of the F test in simulated trials, within
/// three standard errors of the computed power, at settings with and without covariates,
/// equal and unequal groups, and at the n and f that the solver itself found.
#[test]
fn monte_carlo_rejection_rates_match_the_computed_power() {
    let mut settings = vec![
        Setting {
            design: equal(2, 0, 0.0, 0.05),
            means: vec![0.0, 0.8],
            n: 20,
        },
        Setting {
            design: equal(3, 1, 0.5, 0.05),
            means: vec![0.0, 0.3, 0.6],
            n: 12,
        },
        Setting {
            design: equal(4, 2, 0.6, 0.05),
            means: vec![0.0, 0.2, 0.2, 0.6],
            n: 9,
        },
        Setting {
            design: Design {
                groups: 3,
                covariates: 1,
                r_squared: 0.3,
                alpha: 0.05,
                ratio: vec![2, 1, 1],
            },
            means: vec![0.0, 0.5, 0.9],
            n: 7,
        },
        Setting {
            design: equal(5, 3, 0.7, 0.01),
            means: vec![0.0, 0.0, 0.3, 0.4, 0.5],
            n: 8,
        },
    ];
    // The solver's own answers: the smallest n for power 0.9, and the detectable effect.
    let solved = equal(3, 1, 0.45, 0.05);
    let means = vec![0.0, 0.35, 0.5];
    let f = covey::stats::power::effect_of_means(&means, &solved.shares(), 1.0);
    let n = solved
        .n_for_power(f, 0.9)
        .unwrap_or_else(|e| panic!("{e}"))
        .n;
    settings.push(Setting {
        design: solved.clone(),
        means,
        n,
    });
    let (f, _) = solved
        .detectable_f(10, 0.8)
        .unwrap_or_else(|e| panic!("{e}"));
    // Two extreme means and one midway have f = d / sqrt(6) for a distance d.
    let d = f * 6f64.sqrt();
    settings.push(Setting {
        design: solved,
        means: vec![0.0, d / 2.0, d],
        n: 10,
    });

    let mut rng = Rng(20261204);
    for s in &settings {
        let d = &s.design;
        let f = covey::stats::power::effect_of_means(&s.means, &d.shares(), 1.0);
        let computed = d.power(f, s.n).unwrap_or_else(|e| panic!("{e}"));
        let sizes = d.group_sizes(s.n);
        let c = d.covariates as usize;
        // Covariates explain R^2 of the unit variance within groups: equal slopes, with the
        // variance of each cos/sin pattern (1/2) taken into account; the error SD is what
        // remains.
        let slope = if c == 0 {
            0.0
        } else {
            (2.0 * d.r_squared / c as f64).sqrt()
        };
        let slopes = vec![slope; c];
        let sd_error = (1.0 - d.r_squared).sqrt();
        let rejected = (0..TRIALS)
            .filter(|_| {
                simulated_f(&sizes, &s.means, &slopes, sd_error, &mut rng) > computed.critical
            })
            .count();
        let rate = rejected as f64 / TRIALS as f64;
        let se = (computed.power * (1.0 - computed.power) / TRIALS as f64).sqrt();
        println!(
            "K={} C={} R2={} sizes={sizes:?} f={f:.4}: computed {:.4}, simulated {rate:.4} (SE {se:.4})",
            d.groups, d.covariates, d.r_squared, computed.power
        );
        assert!(
            (rate - computed.power).abs() <= 3.0 * se,
            "sizes {sizes:?}, f {f}: computed power {:.4}, simulated {rate:.4}",
            computed.power
        );
    }
}

#[test]
fn impossible_plans_say_why() {
    let d = equal(3, 0, 0.0, 0.05);
    assert_eq!(d.n_for_power(0.0, 0.8), Err(PlanError::NoEffect));
    assert!(matches!(
        d.power(0.2, 1),
        Err(PlanError::TooFew { n: 1, least: 2 })
    ));
}

// ---- the statements: `plan` and `plot power` in documents.

mod statements {
    use std::path::Path;

    use covey::pipeline::{self, RunOptions};
    use covey::world::{FsWorld, MemoryWorld};
    use serde_json::Value;

    /// Invented data: three groups of four, a covariate x and a response y.
    const DATA: &str = "g,x,y\nA,1,2.0\nA,2,3.1\nA,3,3.9\nA,4,5.2\nB,1,4.2\nB,2,5.1\nB,3,5.8\nB,4,7.1\nC,1,3.0\nC,2,3.8\nC,3,5.3\nC,4,5.9\n";

    /// The document's first block: data and three models to plan from.
    const SETUP: &str = "# Plans\n\n```covey\nload \"d.csv\"\nfactor g\nmodel par: y on g + x\nmodel sep: y on g + x + g by x\nmodel one: y on g\n```\n\n";

    fn run(doc: &str) -> pipeline::Run {
        let world = MemoryWorld::new().with("d.csv", DATA);
        pipeline::run(doc, "doc.md", &world, RunOptions::default())
            .unwrap_or_else(|u| panic!("{}", u.errors.join("\n")))
    }

    /// Every table of kind `plan` in a run's JSON, by statement.
    fn plans(run: &pipeline::Run) -> Vec<(String, serde_json::Map<String, Value>)> {
        run.json()["outputs"]
            .as_array()
            .into_iter()
            .flatten()
            .filter(|o| o["kind"] == "plan")
            .filter_map(|o| {
                let row = o["rows"].get(0)?.as_object()?.clone();
                Some((o["statement"].as_str()?.to_string(), row))
            })
            .collect()
    }

    /// Each bad statement fails with its message, at the line and column of the words that
    /// caused it.
    #[test]
    fn bad_plans_are_errors_at_their_words() {
        let cases: [(&str, &str, &str); 27] = [
            (
                "plan p for 2.5 groups effect f 0.3 power 0.8",
                "2.5",
                "the number of groups must be a whole number from 2 to 1000",
            ),
            (
                "plan p for 3 groups in ratio 2:1 effect f 0.3 power 0.8",
                "2:1",
                "the ratio has 2 parts, but the plan has 3 groups",
            ),
            (
                "plan p for 3 groups in ratio 2:0:1 effect f 0.3 power 0.8",
                "2:0:1",
                "each part of a ratio must be a whole number from 1",
            ),
            (
                "plan p for 3 groups effect means 1, 2 sd 1 power 0.8",
                "1, 2",
                "2 means are given, but the plan has 3 groups",
            ),
            (
                "plan p for 3 groups effect means 1, 2, 3 power 0.8",
                "1, 2, 3",
                "the means need the SD within groups",
            ),
            (
                "plan p for 3 groups effect means 1, 2, 3 sd 0 power 0.8",
                "0 power",
                "an SD must be above 0",
            ),
            (
                "plan p for 3 groups with 1 covariate effect f 0.3 power 0.8",
                "1 covariate",
                "does not say how much of the variance the covariates explain",
            ),
            (
                "plan p for 3 groups with 0 covariates explaining 0.3 effect f 0.3 power 0.8",
                "0.3",
                "with no covariates there is nothing to explain the variance",
            ),
            (
                "plan p for 3 groups with 1 covariate explaining 1 effect f 0.3 power 0.8",
                "1 effect",
                "must be at least 0 and below 1",
            ),
            (
                "plan p for 3 groups effect f 0.3 power 0.03",
                "0.03",
                "a target power must lie above alpha (0.05) and below 1",
            ),
            (
                "plan p for 3 groups effect f 0.3 alpha 1.5 power 0.8",
                "1.5",
                "alpha must lie between 0 and 1",
            ),
            (
                "plan p for 3 groups effect f 0 power 0.8",
                "0 power",
                "the effect is zero",
            ),
            (
                "plan p for 3 groups effect means 5, 5, 5 sd 1 power 0.8",
                "5, 5, 5",
                "the effect is zero",
            ),
            (
                "plan p for 3 groups with 2 covariates explaining 0.2 effect f 0.3 n 1",
                "1\u{0}",
                "the number per group must be a whole number from 2",
            ),
            (
                "plan p for 2 groups effect f 0.000001 power 0.9",
                "0.9",
                "even 10000000 per group give a power of only",
            ),
            (
                "plan p for 3 groups effect f 0.3 power 0.8 from nosuch",
                "nosuch",
                "there is no model called `nosuch`",
            ),
            (
                "plan p for 3 groups with 1 covariate effect f 0.3 power 0.8 from sep",
                "sep",
                "lets a covariate's slope differ by group",
            ),
            (
                "plan p for 3 groups with 2 covariates effect f 0.3 power 0.8 from par",
                "2 covariates",
                "the plan has 2 covariates, but model `par` has 1 covariate column (x)",
            ),
            (
                "plan p for 3 groups with 1 covariate effect f 0.3 power 0.8 from one",
                "1 covariate",
                "model `one` has no covariate to take the correlation from",
            ),
            (
                "plan p for 3 groups effect f 0.3 power 0.8 from par upper 0.3",
                "0.3\u{0}",
                "the level of the upper limit must lie between 0.5 and 1",
            ),
            (
                "plot power nosuch",
                "nosuch",
                "there is no plan called `nosuch`",
            ),
            (
                "plan q for 3 groups effect f 0.3 power 0.8\nplot power q by f 0.1, 0, 0.3",
                "0.1, 0, 0.3",
                "each effect size f must be above 0",
            ),
            // An effect size beyond any trial: f given, f from means far apart for their SD
            // (means 1e300 apart made f infinite, and the plan showed no f and no λ beside a
            // power of 1), and a power figure's line.
            (
                "plan p for 3 groups effect f 1e9 power 0.8",
                "1e9",
                "an effect size f must be from 0 to 1000000",
            ),
            (
                "plan p for 3 groups effect means 1, 1, 1e300 sd 1 power 0.8",
                "1, 1, 1e300",
                "these means make an effect size f above the 1000000 a plan takes",
            ),
            (
                "plan p for 3 groups effect means 1, 2, 3 sd 1e-300 n 5",
                "1, 2, 3",
                "these means make an effect size f of 8.165e299, above the 1000000 a plan takes",
            ),
            (
                "plan q for 3 groups effect f 0.3 power 0.8\nplot power q by f 0.1, 2e6",
                "0.1, 2e6",
                "each effect size f must be above 0 and at most 1000000",
            ),
            (
                "plan q for 3 groups effect f 0.3 power 0.8\nplot power q by r2 0, 1",
                "0, 1",
                "each R² must be at least 0 and below 1",
            ),
        ];
        for (statement, at, message) in cases {
            let doc = format!("{SETUP}```covey\n{statement}\n```\n");
            let r = run(&doc);
            let error = r.errors.first().map_or("", String::as_str);
            // The failing statement is the last line of the block.
            let last = statement.lines().last().unwrap_or("");
            let line = SETUP.lines().count() + 1 + statement.lines().count();
            // `at` is the first place of its words in the line; a NUL marks the line's end.
            let line_end = format!("{last}\u{0}");
            let col = line_end
                .find(at)
                .map(|i| line_end.get(..i).unwrap_or("").chars().count() + 1)
                .unwrap_or(0);
            let head = format!("doc.md:{line}:{col}: error: ");
            assert!(
                error.starts_with(&head) && error.contains(message),
                "{statement}\nexpected {head}... {message}\ngot {error}"
            );
        }
    }

    /// Values far from the usual: an alpha of 1e-300 printed 300 zeros in the table and read
    /// "alpha 0" in the note; an f of 1e-9 in a figure's legend 0.000000001; an R² of
    /// 0.9999999 read "R² 1" in a legend (a value refused as input) and a level of 0.999999
    /// "upper 100%".
    #[test]
    fn extreme_values_are_written_as_what_they_are() {
        let doc = format!(
            "{SETUP}```covey\nplan a for 3 groups effect f 0.25 alpha 1e-300 power 0.8\nplan b for 3 groups with 1 covariate explaining 0.5 effect f 0.25 n 5\nplot power b by r2 0.9999999, 0.5\nplot power b by f 1e-9, 0.25\nplan c for 3 groups with 1 covariate effect means 1, 2, 3 n 5 from par upper 0.999999\n```\n"
        );
        let r = run(&doc);
        assert!(r.errors.is_empty(), "{}", r.errors.join("\n"));
        let md = &r.rendered;
        assert!(md.contains("| 1e-300 |"), "{md}");
        assert!(!md.contains("0.0000000000000000"), "{md}");
        assert!(md.contains("at alpha 1e-300."), "{md}");
        assert!(md.contains("With R² 0.9999999 the power"), "{md}");
        assert!(!md.contains("R² 1 "), "{md}");
        assert!(md.contains("With effect f 1e-9 it does not reach"), "{md}");
        assert!(md.contains("upper 99.9999% confidence limit"), "{md}");
    }

    /// A pilot with one residual degree of freedom: the plan works, the warning says so in the
    /// singular, and when the upper limit of its SD changes nothing the warning says "still"
    /// (it said "needs 2 per group instead of 2" and "the power is above 0.999 instead of
    /// above 0.999").
    #[test]
    fn a_pilot_with_one_residual_degree_of_freedom() {
        let data = "g,x,y\na,1,2\na,2,3.1\nb,1,4\nb,2,5.2\nc,3,7\n";
        let doc = "# Tiny\n\n```covey\nload \"d.csv\"\nfactor g\nmodel m: y on g + x\nplan a for 3 groups with 1 covariate effect means 1, 2, 3 power 0.8 from m\nplan c for 3 groups with 1 covariate effect means 1, 2, 3 n 5 from m\n```\n";
        let world = MemoryWorld::new().with("d.csv", data);
        let r = pipeline::run(doc, "doc.md", &world, RunOptions::default())
            .unwrap_or_else(|u| panic!("{}", u.errors.join("\n")));
        assert!(r.errors.is_empty(), "{}", r.errors.join("\n"));
        let md = &r.rendered;
        assert!(
            md.contains("(5 rows, 1 residual degree of freedom)"),
            "{md}"
        );
        assert!(
            md.contains("leaves only 1 residual degree of freedom,"),
            "{md}"
        );
        assert!(
            md.contains("with it the plan still needs 2 per group."),
            "{md}"
        );
        assert!(
            md.contains("with it the power is still above 0.999."),
            "{md}"
        );
        assert!(!md.contains(" instead of 2."), "{md}");
    }

    #[test]
    fn a_power_figure_has_at_most_twelve_lines_and_a_sensible_axis() {
        let doc = format!(
            "{SETUP}```covey\nplan q for 3 groups effect f 0.3 power 0.8\nplot power q by f 0.1, 0.15, 0.2, 0.25, 0.3, 0.35, 0.4, 0.45, 0.5, 0.55, 0.6, 0.65, 0.7\n```\n"
        );
        let error = run(&doc).errors.join("\n");
        // One line per colour-and-shape pair (`plot::style::STYLES`).
        assert!(error.contains("at most 12 lines"), "{error}");
        let doc = format!(
            "{SETUP}```covey\nplan q for 3 groups effect f 0.3 power 0.8\nplot power q to 2\n```\n"
        );
        let error = run(&doc).errors.join("\n");
        assert!(
            error.contains("the largest number per group must be a whole number from 3"),
            "{error}"
        );
    }

    /// The note under a plan solved for n gives the power at n and at n - 1 on their own
    /// sides of the target: with f = 0.001 and four groups, 3542872 per group falls short of
    /// power 0.9 by 7e-8 and once read "0.900" like the 3542873 that reaches it.
    #[test]
    fn the_power_one_short_reads_below_the_target() {
        let doc = "# Plans\n\n```covey\nplan b for 4 groups effect f 0.001 power 0.9\n```\n";
        let r = run(doc);
        assert!(r.errors.is_empty(), "{}", r.errors.join("\n"));
        let found = plans(&r);
        // scipy.stats.ncf.sf(scipy.stats.f.isf(0.05, 3, N - 4), 3, N - 4, N * 1e-6) with
        // N = 4 * 3542873: 0.9000000175499323; with N = 4 * 3542872: 0.8999999284828434.
        let row = &found[0].1;
        assert_eq!(row["n_per_group"].as_f64(), Some(3_542_873.0));
        let power = row["power"].as_f64().unwrap_or(f64::NAN);
        assert!((power - 0.900_000_017_549_932_3).abs() < 1e-10, "{power}");
        let note = "with it the power is 0.900 (with 3542872, 0.8999999).";
        assert!(r.rendered.contains(note), "{}", r.rendered);
    }

    /// The three forms agree with the solver, every column is there, and the live numbers
    /// show what the table shows.
    #[test]
    fn the_three_forms_and_their_live_numbers() {
        let doc = format!(
            "{SETUP}```covey\nplan size for 3 groups with 1 covariate explaining 0.5 effect f 0.25 power 0.9\nplan power for 3 groups in ratio 2:1:1 effect means 10, 11, 12 sd 2 alpha 0.01 n 15\nplan reach for 3 groups with 1 covariate explaining 0.5 effect detectable sd 2 n 20 power 0.8\n```\n\nWe need @[plan size n_per_group] per group ({{@[plan size total_n]}} in all) for power @[plan size power]; groups of @[plan power group_sizes]; f = @[plan reach effect_f].\n"
        );
        let r = run(&doc);
        assert!(r.errors.is_empty(), "{}", r.errors.join("\n"));
        let found = plans(&r);
        assert_eq!(found.len(), 3);
        let keys: Vec<&str> = found[0].1.keys().map(String::as_str).collect();
        assert_eq!(
            keys,
            [
                "groups",
                "covariates",
                "r_squared",
                "sd",
                "effect_f",
                "alpha",
                "n_per_group",
                "total_n",
                "df1",
                "df2",
                "lambda",
                "power",
                "group_sizes"
            ]
        );
        let num = |i: usize, k: &str| found[i].1[k].as_f64().unwrap_or(f64::NAN);
        // 3 groups, R² = 0.5, f = 0.25, power 0.9 (scipy by the same definition: see
        // ncf_reference.py; checked value by value in the_solver_matches_scipy).
        let d = covey::stats::power::Design {
            groups: 3,
            covariates: 1,
            r_squared: 0.5,
            alpha: 0.05,
            ratio: Vec::new(),
        };
        let p = d.n_for_power(0.25, 0.9).unwrap_or_else(|e| panic!("{e}"));
        assert_eq!(num(0, "n_per_group") as u64, p.n);
        assert_eq!(num(0, "total_n") as u64, 3 * p.n);
        assert_eq!(num(0, "df2") as u64, 3 * p.n - 4);
        assert!((num(0, "lambda") - 3.0 * p.n as f64 * 0.0625 / 0.5).abs() < 1e-12);
        assert!(found[0].1["sd"].is_null());
        // Unequal groups: 30, 15, 15, and f from the weighted means (mean 10.75; variance
        // 0.5 * 0.5625 + 0.25 * 0.0625 + 0.25 * 1.5625 = 0.6875, by hand).
        assert_eq!(found[1].1["group_sizes"], "30, 15, 15");
        assert!((num(1, "effect_f") - 0.6875f64.sqrt() / 2.0).abs() < 1e-12);
        assert_eq!(num(1, "total_n"), 60.0);
        // The detectable effect reaches the power asked for.
        assert!((num(2, "power") - 0.8).abs() < 1e-9);
        // Live numbers.
        let shown = format!("<!-- covey:value @[plan size n_per_group] -->{}<!--", p.n);
        assert!(r.rendered.contains(&shown), "{}", r.rendered);
        assert!(r
            .rendered
            .contains("<!-- covey:value @[plan power group_sizes] -->30, 15, 15<!--"));
    }

    /// Plans from the pilot of the worked document against numpy and scipy:
    /// tests/reference/ncf_reference.py, plan_pilot.csv.
    #[test]
    fn plans_from_a_pilot_match_numpy() {
        let root = Path::new(env!("CARGO_MANIFEST_DIR"));
        let doc = "# Pilot\n\n```covey\nload \"data/beet-pilot.csv\"\nfactor coating levels uncoated, \"coat-A\", \"coat-B\"\nmodel ancova: roots_t_ha on coating + previous_t_ha\nplan adjusted for 3 groups with 1 covariate effect means 70, 71.5, 73 power 0.9 from ancova\nplan unadjusted for 3 groups effect means 70, 71.5, 73 power 0.9 from ancova\nplan cautious for 3 groups with 1 covariate effect means 70, 71.5, 73 power 0.9 from ancova upper 0.8\n```\n";
        let world = FsWorld::new(&root.join("worked"), false);
        let r = pipeline::run(doc, "pilot.md", &world, RunOptions::default())
            .unwrap_or_else(|u| panic!("{}", u.errors.join("\n")));
        assert!(r.errors.is_empty(), "{}", r.errors.join("\n"));
        // The small pilot is warned about (twice: the cautious plan already heeds it).
        assert_eq!(
            r.warnings
                .iter()
                .filter(|w| w.contains("upper 80% confidence limit"))
                .count(),
            2,
            "{:?}",
            r.warnings
        );
        let found = plans(&r);
        for want in super::reference("plan_pilot.csv") {
            let name = want["plan"].clone();
            let got = found
                .iter()
                .find(|(s, _)| s.starts_with(&format!("plan {name} ")))
                .map(|(_, row)| row)
                .unwrap_or_else(|| panic!("no plan {name}"));
            let g = |k: &str| got[k].as_f64().unwrap_or(f64::NAN);
            let rel = |a: f64, b: f64| (a - b).abs() <= 1e-9 * b.abs();
            let covariates = g("covariates");
            let r2 = super::num(&want, "r_squared");
            assert!(
                rel(g("sd"), super::num(&want, "sd")),
                "{name}: sd {}",
                g("sd")
            );
            assert!(
                rel(g("effect_f"), super::num(&want, "effect_f")),
                "{name}: f"
            );
            if covariates > 0.0 {
                assert!(rel(g("r_squared"), r2), "{name}: r2 {}", g("r_squared"));
            } else {
                assert_eq!(g("r_squared"), 0.0);
            }
            assert_eq!(g("n_per_group"), super::num(&want, "n_per_group"), "{name}");
            assert!(
                (g("power") - super::num(&want, "power")).abs() < 1e-9,
                "{name}"
            );
        }
    }

    fn painted_pixels(svg: &str) -> usize {
        use resvg::tiny_skia::{Pixmap, Transform};
        use resvg::usvg;
        let mut opt = usvg::Options::default();
        opt.fontdb_mut()
            .load_font_data(covey::plot::style::FONT_BYTES.to_vec());
        let tree = usvg::Tree::from_str(svg, &opt).unwrap_or_else(|e| panic!("usvg: {e}"));
        let size = tree.size().to_int_size();
        let mut pixmap = Pixmap::new(size.width(), size.height()).expect("pixmap");
        resvg::render(&tree, Transform::default(), &mut pixmap.as_mut());
        let plain = |c: plotters::style::RGBColor| (c.0, c.1, c.2, 255u8);
        let (page, panel) = (
            plain(covey::plot::style::PAGE),
            plain(covey::plot::style::PANEL),
        );
        pixmap
            .pixels()
            .iter()
            .map(|p| (p.red(), p.green(), p.blue(), p.alpha()))
            .filter(|p| *p != page && *p != panel)
            .count()
    }

    /// The power figure: well-formed, painted, the same on every run, one marker shape per
    /// line in that line's colour, and the target marked.
    #[test]
    fn the_power_figure() {
        let doc = format!(
            "{SETUP}```covey\nplan q for 3 groups with 1 covariate explaining 0.5 effect f 0.25 power 0.9\nplot power q\nplot power q by f 0.15, 0.25, 0.35 to 120\n```\n"
        );
        let a = run(&doc);
        let b = run(&doc);
        assert!(a.errors.is_empty(), "{}", a.errors.join("\n"));
        assert_eq!(a.figures, b.figures);
        assert_eq!(a.figures.len(), 2);
        for (path, svg) in &a.figures {
            resvg::usvg::roxmltree::Document::parse(svg)
                .unwrap_or_else(|e| panic!("{path}: not XML: {e}"));
            assert!(painted_pixels(svg) > 3_000, "{path}");
            assert!(svg.contains("target 0.9"), "{path}");
            assert!(svg.contains("plan: n = "), "{path}");
        }
        // Each line's markers are polygons (or circles) filled with its colour; the shapes
        // differ from line to line.
        let (_, svg) = &a.figures[1];
        let doc = resvg::usvg::roxmltree::Document::parse(svg).expect("XML");
        let mut shapes = Vec::new();
        for (i, c) in covey::plot::style::PALETTE.iter().take(3).enumerate() {
            let fill = format!("#{:02X}{:02X}{:02X}", c.0, c.1, c.2);
            let kinds: std::collections::BTreeSet<String> = doc
                .descendants()
                .filter(|n| n.attribute("fill") == Some(fill.as_str()))
                .map(|n| {
                    let points = n.attribute("points").unwrap_or("");
                    format!("{}:{}", n.tag_name().name(), points.split(' ').count())
                })
                .collect();
            assert!(!kinds.is_empty(), "line {i} has no markers");
            shapes.push(kinds);
        }
        assert!(shapes[0] != shapes[1] && shapes[1] != shapes[2] && shapes[0] != shapes[2]);
        let legend = a.rendered.contains("one line per effect size f");
        assert!(legend);
    }
}
