//! Handler of `check M`: one table of assumption checks of a fitted model and, when some rows
//! stand out, a second table that lists them.
//!
//! Every check uses the rows the model was fitted to:
//! - normality of the residuals: the Shapiro-Wilk W with Royston's p-value
//!   ([`crate::stats::shapiro`]);
//! - equal residual spread across the levels of each factor: the Brown-Forsythe test
//!   (Levene's test on absolute deviations from the group medians, [`crate::stats::levene`]);
//! - equal slopes of each covariate across each factor whose interaction with it is not in the
//!   model: the F test of adding that interaction ([`Fit::slopes`]);
//! - balance of each covariate across each factor: the one-way analysis of variance of the
//!   covariate on the factor (the F of a model of the covariate on the factor, computed from
//!   the level means without fitting one);
//! - influence: leverage, Cook's distance and the externally studentized residual
//!   ([`Fit::diagnostics`]) against rules of thumb of common practice.

use super::{Outcome, Session};
use crate::diagnostic::Diagnostic;
use crate::lang::Spanned;
use crate::model::{self, Code, Diagnostics, Fit, ModelError, ModelSpec, UsedRows, Var};
use crate::report::markdown::code;
use crate::report::number::format_column;
use crate::report::{Cell, Column as Col, Format, Item, Table};
use crate::stats::{levene, shapiro, StatsError};

/// Significance level of every check. The 5% level is the convention readers expect; these
/// checks screen the model's assumptions rather than test a hypothesis of interest, so no
/// correction for the number of checks is made, and the table says that a large p is no proof.
/// `check M alpha A` sets another level.
const ALPHA: f64 = 0.05;

/// Confidence level handed to [`Fit::slopes`]; only the slopes' confidence limits depend on
/// it, and the check reads none of them.
const SLOPES_LEVEL: f64 = 0.95;

/// A row is listed when its leverage exceeds this multiple of the mean leverage p/n: the
/// 2p/n rule of Hoaglin & Welsch (1978, "The hat matrix in regression and ANOVA", The
/// American Statistician 32, 17-22).
const LEVERAGE_MULTIPLE: f64 = 2.0;

/// A row is listed when its Cook's distance exceeds this number divided by n: the 4/n rule of
/// thumb of common practice.
const COOK_NUMERATOR: f64 = 4.0;

/// A row is listed when its externally studentized residual is beyond this in absolute
/// value: about 1 in 370 rows of a well-specified normal model, so few false alarms in data
/// sets of ordinary size (common practice).
const STUDENTIZED_LIMIT: f64 = 3.0;

/// Most flagged rows the influence table lists: on large data sets the
/// thresholds flag thousands of rows, and a reader looks at the worst first.
/// The rows with the largest Cook's distance are listed, and a note says so.
const MAX_LISTED: usize = 50;

impl Session<'_> {
    pub(super) fn check(
        &mut self,
        model: &Spanned<String>,
        alpha: Option<&Spanned<f64>>,
    ) -> Outcome {
        let alpha = match alpha {
            None => ALPHA,
            Some(a) if a.value > 0.0 && a.value < 1.0 => a.value,
            Some(a) => {
                return Err(Diagnostic::new(a.span, "alpha must lie between 0 and 1")
                    .label("not a probability")
                    .help("write it as a proportion, e.g. `alpha 0.01`"))
            }
        };
        let m = self.model_entry(model)?;
        let fit = &m.fit;
        let spec = fit.spec();
        let diag = fit.diagnostics();
        let used = fit.used_rows();
        let factors = model_vars(spec, true);
        let covariates = model_vars(spec, false);
        let n = diag.len();

        let mut t = Table::new(
            "check",
            format!("Assumption checks of model {}", code(&m.name)),
            vec![
                Col::new("check", "check", Format::Text),
                // Count shows whole numbers without decimals and any other number with two,
                // as Statistic does: this column holds W and F statistics and, on the
                // influence row, a count of rows.
                Col::new("statistic", "statistic", Format::Count),
                Col::new("df", "df", Format::Text),
                Col::new("p", "p", Format::P),
                Col::new("verdict", "verdict", Format::Text),
            ],
        );
        // The checks that each pass over every row run side by side on large data; the
        // table is assembled in its fixed order afterwards.
        let big = n >= crate::parallel::BLOCK_ROWS;
        let ((normality, spread), (balance, influence)) = crate::parallel::join_if(
            big,
            || {
                crate::parallel::join_if(
                    big,
                    || normality_row(fit, n, &m.name, alpha),
                    || {
                        factors
                            .iter()
                            .map(|&f| spread_row(fit, f, used, alpha))
                            .collect::<Vec<_>>()
                    },
                )
            },
            || {
                crate::parallel::join_if(
                    big,
                    || {
                        factors
                            .iter()
                            .flat_map(|&f| covariates.iter().map(move |&x| (f, x)))
                            .map(|(f, x)| balance_row(spec, f, x, used, alpha))
                            .collect::<Vec<_>>()
                    },
                    || Influence::new(fit, diag, fit.n_coef()),
                )
            },
        );
        t.push(normality);
        for row in spread {
            t.push(row);
        }
        let known: Vec<&Fit> = self.models.iter().map(|m| &m.fit).collect();
        let mut have_interaction = Vec::new();
        for &f in &factors {
            for &x in &covariates {
                match slopes_row(fit, spec, f, x, &known, alpha) {
                    Some(row) => t.push(row),
                    None => have_interaction.push((f, x)),
                }
            }
        }
        for row in balance {
            t.push(row);
        }
        t.subject = Some(m.name.clone());
        t.push(influence.row());

        t.notes.push(format!(
            "Every check uses the {n} rows the model was fitted to and the {} level. A small p is evidence against an assumption; a large p does not show that it holds, least of all in small samples.",
            percent(alpha)
        ));
        if let Some(w) = fit.weights_name() {
            t.notes.push(format!(
                "The model is weighted by {}: every check here uses the weighted residuals, sqrt(w) times the residual, and the weighted leverages.",
                code(w)
            ));
        }
        t.notes.push(
            "df gives the degrees of freedom of an F test, numerator then denominator (for example \"2, 26\"; text in JSON); the other checks have none (— here, null in JSON).".into(),
        );
        for (f, x) in &have_interaction {
            t.notes.push(format!(
                "No equal-slopes check of {} across {}: the model already has their interaction, so each level has its own slope.",
                code(var_name(spec, *x)),
                code(var_name(spec, *f))
            ));
        }
        // The thresholds are told once: under the table of flagged rows when there is one.
        if influence.flagged == 0 {
            t.notes.push(influence.thresholds_note());
            Ok(vec![
                Item::Table(t),
                Item::Text(format!(
                    "No row of model {} is past an influence threshold.",
                    code(&m.name)
                )),
            ])
        } else {
            let mut listed = influence.table(m, diag);
            listed.subject = Some(m.name.clone());
            Ok(vec![Item::Table(t), Item::Table(listed)])
        }
    }
}

/// Whether variable `v` appears in a term of the model.
fn uses(spec: &ModelSpec, v: usize) -> bool {
    spec.terms
        .iter()
        .any(|t| t.parts.iter().any(|p| p.var == v))
}

/// The factors (`factors = true`) or the numeric covariates of the model's terms, in
/// variable order (the order they first appear in the model statement).
fn model_vars(spec: &ModelSpec, factors: bool) -> Vec<usize> {
    spec.vars
        .iter()
        .enumerate()
        .filter(|(v, var)| matches!(var, Var::Factor { .. }) == factors && uses(spec, *v))
        .map(|(v, _)| v)
        .collect()
}

fn var_name(spec: &ModelSpec, v: usize) -> &str {
    spec.vars.get(v).map_or("", Var::name)
}

/// The factor's codes and level labels, or empty ones for a numeric variable.
fn factor_parts(spec: &ModelSpec, f: usize) -> (&[Code], &[String]) {
    match spec.vars.get(f) {
        Some(Var::Factor { codes, levels, .. }) => (codes, levels),
        _ => (&[], &[]),
    }
}

/// ALPHA as a percentage ("5%").
fn percent(a: f64) -> String {
    // Rounded to 8 decimals first: 0.1 * 100 is 10.000000000000002 in binary.
    let p = format!("{:.8}", a * 100.0);
    format!("{}%", p.trim_end_matches('0').trim_end_matches('.'))
}

/// ALPHA as a p-value bound in the tables' style (".05").
fn bound(a: f64) -> String {
    let s = format!("{a}");
    s.strip_prefix('0').map_or(s.clone(), str::to_string)
}

/// A row of the check table.
fn row(check: String, statistic: Cell, df: Cell, p: Cell, verdict: String) -> Vec<Cell> {
    vec![check.into(), statistic, df, p, verdict.into()]
}

/// A row of the check table for a check that could not be made, saying why.
fn not_tested(check: &str, why: impl std::fmt::Display) -> Vec<Cell> {
    row(
        check.to_string(),
        Cell::Missing,
        Cell::Missing,
        Cell::Missing,
        format!("not tested: {why}"),
    )
}

/// "2, 26" for an F test's degrees of freedom.
fn df_text(df1: usize, df2: usize) -> Cell {
    Cell::Text(format!("{df1}, {df2}"))
}

/// The Shapiro-Wilk row. The checks read a model's residuals a block of rows at a time from
/// [`Fit::residuals`]: kept by the fit for a data set of moderate size, else computed again
/// from the design for each block, so that a large data set is not joined by a column of its
/// length.
fn normality_row(fit: &Fit, n: usize, model: &str, alpha: f64) -> Vec<Cell> {
    let check = "normality of residuals (Shapiro-Wilk)".to_string();
    let tested = shapiro::sample_size(n).and_then(|()| shapiro::shapiro_wilk(&fit.residuals(0..n)));
    match tested {
        Ok(sw) => {
            let verdict = if sw.p < alpha {
                format!(
                    "the residuals depart from a normal shape (p < {}): tests and limits are less exact, the more so in small groups; look at the normal quantile figure that plot quantiles {model} draws",
                    bound(alpha)
                )
            } else {
                format!(
                    "no evidence against normal residuals at the {} level",
                    percent(alpha)
                )
            };
            row(check, sw.w.into(), Cell::Missing, sw.p.into(), verdict)
        }
        Err(StatsError::SampleSizeOutOfRange { n, min, max }) if n > max => not_tested(
            &check,
            format!(
                "the Shapiro-Wilk p-value is calibrated for {min} to {max} residuals and this model has {n} (with so many, any test flags harmless departures); judge the shape from the normal quantile figure that plot quantiles {model} draws"
            ),
        ),
        Err(e) => not_tested(&check, e),
    }
}

fn spread_row(fit: &Fit, f: usize, used: &UsedRows, alpha: f64) -> Vec<Cell> {
    let spec = fit.spec();
    let name = var_name(spec, f);
    let check = format!("equal residual spread across {name} (Brown-Forsythe)");
    let (codes, levels) = factor_parts(spec, f);
    match residual_spread(codes, levels.len(), used, fit) {
        Ok(bf) => {
            let verdict = if bf.p < alpha {
                format!(
                    "the residual spread differs between levels of {name} (p < {}): adjusted means stay unbiased, but their SEs and tests, which pool one residual SD, are less trustworthy, most of all when group sizes differ",
                    bound(alpha)
                )
            } else {
                format!("no evidence that the residual spread differs between levels of {name}")
            };
            // The degrees of freedom are whole numbers stored as f64.
            let df = Cell::Text(format!("{:.0}, {:.0}", bf.df1, bf.df2));
            row(check, bf.f.into(), df, bf.p.into(), verdict)
        }
        Err(e) => not_tested(&check, e),
    }
}

/// The Brown-Forsythe test of the residuals grouped by the levels of the factor `codes` that
/// have rows, in level order. The groups are gathered one at a time, each sized by a count
/// first: on large data all of them together would be as long as the residuals.
fn residual_spread(
    codes: &[Code],
    nlevels: usize,
    used: &UsedRows,
    fit: &Fit,
) -> Result<levene::EqualVariance, StatsError> {
    let level_of = |i: usize| {
        codes
            .get(i)
            .and_then(|c| c.get())
            .and_then(|c| usize::try_from(c).ok())
            .filter(|&c| c < nlevels)
    };
    let mut counts = vec![0usize; nlevels];
    for c in used.iter().filter_map(level_of) {
        if let Some(k) = counts.get_mut(c) {
            *k += 1;
        }
    }
    let (levels, sizes): (Vec<usize>, Vec<usize>) = counts
        .iter()
        .enumerate()
        .filter(|(_, &k)| k > 0)
        .map(|(level, &k)| (level, k))
        .unzip();
    levene::brown_forsythe_each(&sizes, |g| {
        let Some(level) = levels.get(g).copied() else {
            return Vec::new();
        };
        // The group's residuals in row order, a block of rows at a time.
        let mut group = Vec::with_capacity(sizes.get(g).copied().unwrap_or(0));
        for at in crate::parallel::row_blocks(used.len()) {
            let block = fit.residuals(at.clone());
            group.extend(
                used.slice(at)
                    .iter()
                    .zip(block.iter())
                    .filter(|&(&i, _)| level_of(i) == Some(level))
                    .map(|(_, &e)| e),
            );
        }
        group
    })
}

/// The equal-slopes row of factor `f` and covariate `x`, or None when the model already has
/// their interaction.
fn slopes_row(
    fit: &Fit,
    spec: &ModelSpec,
    f: usize,
    x: usize,
    known: &[&Fit],
    alpha: f64,
) -> Option<Vec<Cell>> {
    let (fname, xname) = (var_name(spec, f), var_name(spec, x));
    let check = format!("equal slopes of {xname} across {fname}");
    let not_tested = |why: String| not_tested(&check, why);
    match fit.slopes_among(Some(xname), fname, SLOPES_LEVEL, known) {
        Ok(s) if !s.refitted => None,
        Ok(s) if s.df1 == 0 || !s.equality_f.is_finite() => Some(not_tested(format!(
            "the {fname} by {xname} term adds no estimable column to this design"
        ))),
        Ok(s) => {
            let verdict = if s.equality_p < alpha {
                format!(
                    "the slope of {xname} differs between levels of {fname} (p < {}): a single adjusted difference does not describe the groups; add {fname} by {xname} to the model and compare levels at chosen values of {xname}",
                    bound(alpha)
                )
            } else {
                format!("no evidence that the slope of {xname} differs between levels of {fname}")
            };
            Some(row(
                check,
                s.equality_f.into(),
                df_text(s.df1, s.df2),
                s.equality_p.into(),
                verdict,
            ))
        }
        Err(ModelError::NonlinearCovariate { .. }) => Some(not_tested(format!(
            "{xname} enters the model through a power, log or square root, so it has no single slope to compare"
        ))),
        Err(e) => Some(not_tested(e.to_string())),
    }
}

fn balance_row(spec: &ModelSpec, f: usize, x: usize, used: &UsedRows, alpha: f64) -> Vec<Cell> {
    let (fname, xname) = (var_name(spec, f), var_name(spec, x));
    let check = format!("balance of {xname} across {fname} (one-way ANOVA)");
    let not_tested = |why: String| not_tested(&check, why);
    match one_way_in(spec, f, x, used) {
        Ok((fv, df1, df2)) => {
            let p = model::dist::f_upper_p(fv, df1, df2);
            let verdict = if p < alpha {
                format!(
                    "warning sign: {xname} differs between levels of {fname} (p < {}): the treatment may have changed it, or the groups were not comparable at the start; adjusted means then rest on the straight-line model where the groups overlap little",
                    bound(alpha)
                )
            } else {
                format!("no evidence that {xname} differs between levels of {fname}")
            };
            row(check, fv.into(), df_text(df1, df2), p.into(), verdict)
        }
        Err(ModelError::PerfectFit) => not_tested(format!(
            "{xname} takes a single value within each level of {fname}, so the covariate and the groups cannot be told apart"
        )),
        Err(ModelError::ResponseZeroVariance) => not_tested(format!(
            "{xname} has the same value in every fitted row"
        )),
        Err(ModelError::TooFewLevels { levels, .. }) => not_tested(format!(
            "{fname} has {levels} level(s) with rows; at least two are needed"
        )),
        Err(e) => not_tested(e.to_string()),
    }
}

/// The one-way analysis of variance of covariate `x` of a model on its factor `f`, over the
/// model's rows `used`: (F, numerator df, denominator df). `check` and `require balance ... in
/// M` both test balance this way, so that the two agree.
pub(super) fn one_way_in(
    spec: &ModelSpec,
    f: usize,
    x: usize,
    used: &UsedRows,
) -> Result<(f64, usize, usize), ModelError> {
    let (codes, levels) = factor_parts(spec, f);
    let values: &[f64] = match spec.vars.get(x) {
        Some(Var::Numeric { values, .. }) => values,
        _ => &[],
    };
    one_way(values, codes, levels.len(), used)
}

/// The one-way analysis of variance of `values` on the factor `codes` over the rows `used`:
/// (F, numerator df, denominator df). The values are first taken about a centre near their
/// mean, so that group means far from 0 (a covariate near 10^6) keep the digits of their
/// differences; then group means by a corrected two-pass sum, and the between- and
/// within-level sums of squares about them; the same F as the Type II test of a model of the
/// covariate on the factor, without building one.
fn one_way(
    values: &[f64],
    codes: &[Code],
    nlevels: usize,
    used: &UsedRows,
) -> Result<(f64, usize, usize), ModelError> {
    let raw = |i: usize| -> Option<(usize, f64)> {
        let c = codes.get(i).and_then(|c| c.get())? as usize;
        let v = values.get(i).copied()?;
        (c < nlevels && v.is_finite()).then_some((c, v))
    };
    let (total, rows) = used
        .iter()
        .filter_map(raw)
        .fold((0.0, 0usize), |(s, k), (_, v)| (s + v, k + 1));
    let centre = if rows > 0 && (total / rows as f64).is_finite() {
        total / rows as f64
    } else {
        0.0
    };
    let cell = |i: usize| raw(i).map(|(c, v)| (c, v - centre));
    let mut count = vec![0usize; nlevels];
    let mut sum = vec![0.0; nlevels];
    for (c, v) in used.iter().filter_map(cell) {
        count[c] += 1;
        sum[c] += v;
    }
    let first: Vec<f64> = sum
        .iter()
        .zip(&count)
        .map(|(s, &n)| if n > 0 { s / n as f64 } else { 0.0 })
        .collect();
    let mut dev = vec![0.0; nlevels];
    for (c, v) in used.iter().filter_map(cell) {
        dev[c] += v - first[c];
    }
    let mean: Vec<f64> = (0..nlevels)
        .map(|c| {
            if count[c] > 0 {
                first[c] + dev[c] / count[c] as f64
            } else {
                0.0
            }
        })
        .collect();
    let n: usize = count.iter().sum();
    let groups = count.iter().filter(|&&k| k > 0).count();
    if groups < 2 {
        return Err(ModelError::TooFewLevels {
            term: None,
            factor: String::new(),
            levels: groups,
        });
    }
    if n <= groups {
        return Err(ModelError::ZeroResidualDf);
    }
    let grand = (0..nlevels).map(|c| count[c] as f64 * mean[c]).sum::<f64>() / n as f64;
    let between: f64 = (0..nlevels)
        .map(|c| count[c] as f64 * (mean[c] - grand) * (mean[c] - grand))
        .sum();
    let mut within = 0.0;
    for (c, v) in used.iter().filter_map(cell) {
        within += (v - mean[c]) * (v - mean[c]);
    }
    let total = between + within;
    if total <= 0.0 {
        return Err(ModelError::ResponseZeroVariance);
    }
    // The model engine's rule for a fit with nothing left to estimate the error from.
    if within <= 1e-24 * total {
        return Err(ModelError::PerfectFit);
    }
    let (df1, df2) = (groups - 1, n - groups);
    Ok(((between / df1 as f64) / (within / df2 as f64), df1, df2))
}

/// The rows past an influence threshold.
struct Influence {
    n: usize,
    coefficients: usize,
    leverage_limit: f64,
    cook_limit: f64,
    /// How many rows are past a threshold.
    flagged: usize,
    /// The at most [`MAX_LISTED`] of them with the largest Cook's distance, in fitted-row
    /// order: (position, leverage, Cook's distance, residual). Each block of rows keeps its
    /// own worst, and the worst of those are the worst of all, so only a few rows are held
    /// however many are flagged.
    listed: Vec<Flagged>,
    /// Rows with leverage 1 (their Cook's distance and studentized residual are 0/0): how
    /// many, and the first [`MAX_LISTED`] of them in row order.
    leverage_one: (usize, Vec<usize>),
}

/// A flagged row: (position in fitted-row order, leverage, Cook's distance, residual).
type Flagged = (usize, f64, f64, f64);

/// Keeps the [`MAX_LISTED`] rows of `rows` with the largest Cook's distance (NaN last, ties
/// in row order: a strict order, so the rows kept are the same however the rows were cut
/// into blocks), in row order.
fn worst(mut rows: Vec<Flagged>) -> Vec<Flagged> {
    if rows.len() > MAX_LISTED {
        rows.select_nth_unstable_by(MAX_LISTED - 1, |a, b| {
            b.2.partial_cmp(&a.2)
                .unwrap_or_else(|| a.2.is_nan().cmp(&b.2.is_nan()))
                .then(a.0.cmp(&b.0))
        });
        rows.truncate(MAX_LISTED);
    }
    rows.sort_unstable_by_key(|e| e.0);
    rows
}

impl Influence {
    fn new(fit: &Fit, d: &Diagnostics, coefficients: usize) -> Influence {
        let n = d.len();
        let nf = n.max(1) as f64;
        let leverage_limit = LEVERAGE_MULTIPLE * coefficients as f64 / nf;
        let cook_limit = COOK_NUMERATOR / nf;
        // NaN (undefined at leverage 1) compares false and flags nothing by itself. The
        // leverages are computed a block at a time; a block hands back its count of flagged
        // rows and its worst few.
        let flags = |rows: &std::ops::Range<usize>| -> (usize, Vec<Flagged>, Vec<usize>) {
            let leverage = fit.leverages(rows.clone());
            let residual = fit.residuals(rows.clone());
            let ones: Vec<usize> = rows
                .clone()
                .zip(leverage.iter())
                .filter(|(_, h)| **h == 1.0)
                .map(|(k, _)| k)
                .collect();
            let past: Vec<Flagged> = rows
                .clone()
                .zip(leverage.iter().copied())
                .zip(residual.iter())
                .map(|((k, h), &r)| (k, h, d.cook(r, h), r))
                .filter(|&(_, h, c, r)| {
                    h > leverage_limit
                        || c > cook_limit
                        || d.student(r, h).abs() > STUDENTIZED_LIMIT
                })
                .collect();
            (past.len(), worst(past), ones)
        };
        let blocks = crate::parallel::map(&crate::parallel::row_blocks(n), flags);
        let flagged = blocks.iter().map(|b| b.0).sum();
        let ones_count = blocks.iter().map(|b| b.2.len()).sum();
        let ones: Vec<usize> = blocks
            .iter()
            .flat_map(|b| b.2.iter().copied())
            .take(MAX_LISTED)
            .collect();
        let listed = worst(blocks.into_iter().flat_map(|b| b.1).collect());
        Influence {
            n,
            coefficients,
            leverage_limit,
            cook_limit,
            flagged,
            listed,
            leverage_one: (ones_count, ones),
        }
    }

    fn row(&self) -> Vec<Cell> {
        let k = self.flagged;
        let verdict = match k {
            0 => "no row is past a threshold".to_string(),
            1 => format!(
                "1 of {} rows is past a threshold (listed below): check it for a recording error, and refit without it to see how much the conclusions move",
                self.n
            ),
            _ => format!(
                "{k} of {} rows are past a threshold (listed below): check them for recording errors, and refit without them to see how much the conclusions move",
                self.n
            ),
        };
        row(
            "influential rows".to_string(),
            k.into(),
            Cell::Missing,
            Cell::Missing,
            verdict,
        )
    }

    fn thresholds_note(&self) -> String {
        let show = |v: f64| format_column(&[Some(v)], Format::Digits(3)).join("");
        format!(
            "A row counts as influential when its leverage is above 2p/n = {}, its Cook's distance above 4/n = {}, or its externally studentized residual beyond ±{STUDENTIZED_LIMIT} (p = {} coefficients, n = {} rows); these are rules of thumb of common practice, not tests.",
            show(self.leverage_limit),
            show(self.cook_limit),
            self.coefficients,
            self.n
        )
    }

    fn table(&self, m: &super::ModelEntry, d: &Diagnostics) -> Table {
        let (fit, model) = (&m.fit, m.name.as_str());
        let labelled = m.labels.is_some();
        let mut columns = vec![Col::new("row", "row", Format::Count)];
        if let Some(l) = &m.labels {
            // `label rows by`: each row's label beside its number.
            columns.push(Col::new("label", &l.name, Format::Text));
        }
        columns.extend([
            Col::new("leverage", "leverage", Format::Digits(3)),
            Col::new("cooks_distance", "Cook's distance", Format::Digits(3)),
            Col::new(
                "studentized_residual",
                "studentized residual",
                Format::Statistic,
            ),
        ]);
        let mut t = Table::new(
            "influence",
            format!("Rows of model {} past an influence threshold", code(model)),
            columns,
        );
        if self.flagged > self.listed.len() {
            t.notes.push(format!(
                "{} rows are past a threshold; the {MAX_LISTED} with the largest Cook's distance are listed.",
                self.flagged
            ));
        }
        for &(k, h, c, r) in &self.listed {
            let mut row = vec![fit.row_number(k).map_or(Cell::Missing, Cell::from)];
            if labelled {
                row.push(m.label(k).map_or(Cell::Missing, Cell::Text));
            }
            row.extend([h.into(), c.into(), d.student(r, h).into()]);
            t.push(row);
        }
        t.notes.push(format!(
            "{}; the studentized residual is externally studentized (the row's own residual left out of its SD).",
            m.rows_are.meaning(crate::report::markdown::escape)
        ));
        let (count, ones) = &self.leverage_one;
        if *count > 0 {
            let lines: Vec<String> = ones
                .iter()
                .filter_map(|&k| {
                    let n = fit.row_number(k)?;
                    Some(match m.label(k) {
                        Some(l) => format!("{n} ({})", crate::report::markdown::escape(&l)),
                        None => n.to_string(),
                    })
                })
                .collect();
            let more = count.saturating_sub(lines.len());
            t.notes.push(format!(
                "{} {}{} {} leverage 1: {} alone determines a coefficient (for instance as the only row of a level), so {} residual is 0 by construction and {} Cook's distance and studentized residual are undefined (—).",
                if *count == 1 { "Row" } else { "Rows" },
                lines.join(", "),
                if more > 0 { format!(" and {more} more") } else { String::new() },
                if *count == 1 { "has" } else { "have" },
                if *count == 1 { "it" } else { "each" },
                if *count == 1 { "its" } else { "their" },
                if *count == 1 { "its" } else { "their" },
            ));
        }
        t.notes.push(self.thresholds_note());
        t
    }
}

#[cfg(test)]
mod tests {
    use super::{worst, Flagged, MAX_LISTED};

    /// The worst rows kept block by block and then among the blocks' worst are the worst of
    /// all the rows at once, whatever the blocks, with ties (broken by row) and NaN (last).
    #[test]
    fn the_worst_of_each_block_give_the_worst_of_all() {
        // Cook's distances from a fixed linear congruential sequence, in 7 distinct values
        // so that ties abound, and every 13th row NaN.
        let mut state: u64 = 12345;
        let rows: Vec<Flagged> = (0..1000)
            .map(|k| {
                state = state.wrapping_mul(6364136223846793005).wrapping_add(1);
                let c = if k % 13 == 0 {
                    f64::NAN
                } else {
                    ((state >> 33) % 7) as f64
                };
                (k, 0.5, c, 1.0)
            })
            .collect();
        let all = worst(rows.clone());
        assert_eq!(all.len(), MAX_LISTED);
        assert!(all.windows(2).all(|w| w[0].0 < w[1].0), "in row order");
        // All of the largest value, 6, are kept before any smaller one.
        let sixes = rows.iter().filter(|r| r.2 == 6.0).count();
        assert_eq!(
            all.iter().filter(|r| r.2 == 6.0).count(),
            sixes.min(MAX_LISTED)
        );
        for block in [1, 7, 50, 51, 333, 1000] {
            let merged = worst(rows.chunks(block).flat_map(|b| worst(b.to_vec())).collect());
            let key = |v: &[Flagged]| v.iter().map(|r| (r.0, r.2.to_bits())).collect::<Vec<_>>();
            assert_eq!(key(&merged), key(&all), "blocks of {block}");
        }
    }
}
