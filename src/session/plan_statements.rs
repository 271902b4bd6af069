//! Handlers of `plan` and `plot power`: the power and sample size of the next trial, from
//! assumptions written in the document or from a pilot model fitted in it.

use super::{closest, Outcome, Session};
use crate::diagnostic::Diagnostic;
use crate::lang::{PlanDecl, PlanEffect, PowerLines, Span, Spanned};
use crate::model::Pilot;
use crate::plot::power::{self as power_figure, PowerCurves, PowerLine};
use crate::plot::style::STYLES;
use crate::report::markdown::code;
use crate::report::{Cell, Column as Col, Figure, Format, Item, Table};
use crate::stats::ncf;
use crate::stats::power::{effect_of_means, Design, PlanError, Power, MAX_PER_GROUP};

/// Significance level when a plan gives none.
const DEFAULT_ALPHA: f64 = 0.05;
/// Most groups a plan takes: far more than any trial compares.
const MAX_GROUPS: u64 = 1000;
/// Most covariates a plan takes.
const MAX_COVARIATES: u64 = 1000;
/// Largest entry of an allocation ratio.
const MAX_RATIO: u64 = 1000;

/// Largest effect size f a plan takes: Cohen calls 0.4 a large effect, so a million is far
/// beyond any trial, and the bound keeps N f² finite (means 1e300 apart made f infinite, and
/// the table showed no f and no λ beside a power of 1).
const MAX_EFFECT: f64 = 1e6;

/// Confidence level of the upper limit of a pilot's SD that a small-pilot warning offers:
/// planning with the one-sided upper 80% limit gives at least the intended power in about
/// 80% of pilots (R. H. Browne, "On the use of a pilot sample for sample size
/// determination", Statistics in Medicine 14 (1995) 1933-1940; from memory).
const PILOT_LEVEL: f64 = 0.8;

/// A pilot is small when the upper [`PILOT_LEVEL`] limit of its SD exceeds the estimate by
/// more than this fraction (about 47 residual degrees of freedom or fewer): the sample size
/// grows with the square of the SD, so 10% more SD needs about 21% more subjects.
const SMALL_PILOT_EXCESS: f64 = 0.10;

/// A power figure's default axis runs on to where its lines reach the target power, but
/// not past this many times the plan's own number per group: a line that needs far more
/// (a tiny effect) would squash every other line against the axis.
const REACH_SPAN: u64 = 20;

/// Most points along each line of a power figure; beyond this many numbers per group the
/// line is drawn through evenly spread ones.
const FIGURE_POINTS: u64 = 400;

/// A plan as the session keeps it, for `plot power`.
#[derive(Debug, Clone, PartialEq)]
pub struct PlanEntry {
    pub name: String,
    pub design: Design,
    /// The effect size: given, from means, or found.
    pub f: f64,
    /// The number per group (per unit of the ratio): given or found.
    pub n: u64,
    pub power: f64,
    /// The target power of a plan that has one (not of `n N` alone).
    pub target: Option<f64>,
}

/// What a pilot model gives a plan.
pub(crate) struct PilotUse {
    name: String,
    info: Pilot,
    /// The residual SD used: the estimate, or its upper confidence limit.
    sigma: f64,
    /// The level of that limit, when one is used.
    level: Option<f64>,
    /// The SD within groups without covariates: sigma / sqrt(1 - r²).
    sd_without: f64,
}

impl PilotUse {
    /// The one-sided upper `level` confidence limit of the pilot's residual SD:
    /// sigma sqrt(df / q), q the lower 1 - level point of chi-square with df degrees of
    /// freedom.
    fn upper_limit(&self, level: f64) -> f64 {
        let df = self.info.df_residual as f64;
        self.info.sigma * (df / ncf::chi_square_lower_point(level, df)).sqrt()
    }
}

/// A number shown in a sentence: four significant digits, trailing zeros dropped.
fn short(v: f64) -> String {
    significant(v, 4)
}

/// A value in a figure's legend: three significant digits, as the plan's table shows R²
/// and f.
fn label(v: f64) -> String {
    significant(v, 3)
}

/// Below this magnitude, and from [`SENTENCE_LARGE`] up, a number in a sentence or legend is
/// written with an exponent: plain, 1e-9 was "0.000000001" and 1e-15 rounded to "0".
const SENTENCE_SMALL: f64 = 1e-4;
/// See [`SENTENCE_SMALL`]: 1e300 printed 301 digits.
const SENTENCE_LARGE: f64 = 1e9;

/// `v` with `sig` significant digits, trailing zeros dropped; with an exponent (`6e18`,
/// `2.5e-7`) outside [[`SENTENCE_SMALL`], [`SENTENCE_LARGE`]).
fn significant(v: f64, sig: i32) -> String {
    if !v.is_finite() {
        return "—".to_string();
    }
    if v == 0.0 {
        return "0".to_string();
    }
    let trim = |s: String| {
        if s.contains('.') {
            s.trim_end_matches('0').trim_end_matches('.').to_string()
        } else {
            s
        }
    };
    if !(SENTENCE_SMALL..SENTENCE_LARGE).contains(&v.abs()) {
        let prec = (sig - 1).max(0) as usize;
        let s = format!("{v:.prec$e}");
        let (mantissa, exponent) = s.split_once('e').unwrap_or((&s, "0"));
        return format!("{}e{exponent}", trim(mantissa.to_string()));
    }
    let decimals = (sig - 1 - v.abs().log10().floor() as i32).clamp(0, 12) as usize;
    trim(format!("{v:.decimals$}"))
}

/// `v` as [`significant`] shows it, with more digits if rounding would make it read as
/// `bound`, a value it is not (an R² of 0.99999 is no "1", a level of 0.999999 no "100%").
fn short_of(v: f64, bound: f64, sig: i32) -> String {
    let mut s = significant(v, sig);
    let mut sig = sig;
    while v != bound && sig < 17 && s.parse::<f64>().ok() == Some(bound) {
        sig += 1;
        s = significant(v, sig);
    }
    s
}

/// A power shown in a sentence: three decimals, and never a rounded 1, which would claim
/// certainty.
fn power_text(p: f64) -> String {
    if p > 0.9995 {
        "above 0.999".to_string()
    } else {
        format!("{p:.3}")
    }
}

/// A power shown beside the target power `target` it was solved for: as [`power_text`],
/// with more decimals (up to twelve) where three would put it on the wrong side of the
/// target: 0.89999993, one row short of power 0.9, reads 0.8999999, not 0.900, which would
/// say that it reaches the target.
fn power_against(p: f64, target: f64) -> String {
    if !p.is_finite() {
        return power_text(p);
    }
    let reaches = p >= target;
    if p > 0.9995 && target <= 0.999 {
        return power_text(p);
    }
    for decimals in 3..=12usize {
        let s = format!("{p:.decimals$}");
        if s.parse::<f64>().is_ok_and(|v| (v >= target) == reaches) {
            return s;
        }
    }
    format!("{p:.12}")
}

/// A whole number written as a number, within bounds.
fn whole(v: &Spanned<f64>, what: &str, min: u64, max: u64) -> Result<u64, Diagnostic> {
    let x = v.value;
    if x.fract() != 0.0 || x < min as f64 || x > max as f64 {
        return Err(Diagnostic::new(
            v.span,
            format!("{what} must be a whole number from {min} to {max}"),
        )
        .label("not allowed here"));
    }
    Ok(x as u64)
}

/// A probability strictly between 0 and 1 (alpha, a power, a confidence level).
fn open_unit(v: &Spanned<f64>, what: &str, low: f64) -> Result<f64, Diagnostic> {
    if !(v.value > low && v.value < 1.0) {
        return Err(
            Diagnostic::new(v.span, format!("{what} must lie between {low} and 1"))
                .label("out of range"),
        );
    }
    Ok(v.value)
}

/// The level of `upper L`, the one-sided confidence limit of a pilot's SD to plan with.
pub(crate) fn pilot_level(upper: Option<&Spanned<f64>>) -> Result<Option<f64>, Diagnostic> {
    upper
        .map(|u| open_unit(u, "the level of the upper limit", 0.5))
        .transpose()
}

/// The word of a count: "1 covariate", "2 covariates".
fn count(n: u64, one: &str, many: &str) -> String {
    if n == 1 {
        format!("1 {one}")
    } else {
        format!("{n} {many}")
    }
}

fn plan_error(span: Span, e: &PlanError) -> Diagnostic {
    let help = match e {
        PlanError::NoEffect => "a plan needs an effect to detect: means that differ, or f above 0",
        PlanError::Unreachable { .. } => {
            "the effect is too small to detect with any realistic trial; check the SD and the means"
        }
        PlanError::TooFew { .. } => "give a larger number per group",
        PlanError::TargetOutOfRange { .. } => "a target power such as 0.8 or 0.9 is usual",
        PlanError::NoDetectableEffect { .. } => "give a larger number per group or a lower power",
        PlanError::BeyondRange { .. } => "check the R², which is very close to 1, and the effect",
    };
    Diagnostic::new(span, e.to_string())
        .label("cannot plan this")
        .help(help)
}

/// A `plan` statement read and checked, all but the solving.
pub(crate) struct PlanInputs {
    design: Design,
    /// The pilot model as read; `None` without one, or when its fit is not known.
    pilot: Option<PilotUse>,
    r_squared_from_pilot: bool,
    sd_written: Option<f64>,
    /// The SD within groups without covariates: as written, or the pilot's.
    sd: Option<f64>,
    /// The effect size given or made from the means; `None` for a detectable effect, or for
    /// means whose SD is a pilot's that is not known.
    f_given: Option<f64>,
    /// Where an error about the effect points.
    effect_span: Span,
    target: Option<(f64, Span)>,
    n: Option<(u64, Span)>,
}

/// What reads the pilot model of `from M [upper L]` for [`PlanInputs::read`]: the session's
/// fitted model, or (in the language server, which fits nothing) `Ok(None)` after the checks
/// it can make.
pub(crate) type PilotReader<'a> =
    dyn FnMut(&Spanned<String>, Option<&Spanned<f64>>) -> Result<Option<PilotUse>, Diagnostic> + 'a;

impl PlanInputs {
    /// The plan's design: groups, ratio, covariates, R² and alpha.
    pub(crate) fn design(&self) -> &Design {
        &self.design
    }

    /// The effect size given or made from the means, when known without solving.
    pub(crate) fn effect(&self) -> Option<f64> {
        self.f_given
    }

    /// Every check of a `plan` statement short of solving it, in the renderer's order, so
    /// that the renderer and the language server give the same first error at the same place
    /// in the same words. A pilot whose fit is not known (`pilot` gives `Ok(None)` for a
    /// named model) leaves out what depends on it: its R² and its SD, and so the effect of
    /// means given without an SD.
    pub(crate) fn read(
        decl: &PlanDecl,
        pilot: &mut PilotReader<'_>,
    ) -> Result<PlanInputs, Diagnostic> {
        let groups = whole(&decl.groups, "the number of groups", 2, MAX_GROUPS)?;
        let ratio = match &decl.ratio {
            None => Vec::new(),
            Some(r) => {
                if r.value.len() as u64 != groups {
                    return Err(Diagnostic::new(
                        r.span,
                        format!(
                            "the ratio has {} parts, but the plan has {groups} groups",
                            r.value.len()
                        ),
                    )
                    .label("one part per group")
                    .help(
                        "write one relative size per group, such as `in ratio 2:1:1` for 3 groups",
                    ));
                }
                r.value
                    .iter()
                    .map(|&v| {
                        whole(
                            &Spanned {
                                value: v,
                                span: r.span,
                            },
                            "each part of a ratio",
                            1,
                            MAX_RATIO,
                        )
                    })
                    .collect::<Result<Vec<u64>, _>>()?
            }
        };
        let covariates = decl
            .covariates
            .as_ref()
            .map(|c| whole(c, "the number of covariates", 0, MAX_COVARIATES))
            .transpose()?
            .unwrap_or(0);
        let alpha = match &decl.alpha {
            Some(a) => open_unit(a, "alpha", 0.0)?,
            None => DEFAULT_ALPHA,
        };
        let pilot = match &decl.pilot {
            Some(m) => pilot(m, decl.upper.as_ref())?,
            None => None,
        };

        // R²: as written, or the pilot's squared partial correlation.
        let (r_squared, r_squared_from_pilot) = match (&decl.r_squared, covariates, &pilot) {
            (Some(r), 0, _) if r.value != 0.0 => {
                return Err(Diagnostic::new(
                    r.span,
                    "with no covariates there is nothing to explain the variance",
                )
                .label("needs covariates")
                .help("write `with 1 covariate explaining R2`, or leave `explaining` out"))
            }
            (Some(r), _, _) => {
                if !(r.value >= 0.0 && r.value < 1.0) {
                    return Err(Diagnostic::new(
                        r.span,
                        "the share of variance the covariates explain must be at least 0 and below 1",
                    )
                    .label("out of range"));
                }
                (r.value, false)
            }
            (None, 0, _) => (0.0, false),
            (None, c, Some(p)) => {
                let span = decl.covariates.as_ref().map_or(decl.name.span, |s| s.span);
                if p.info.covariate_df == 0 {
                    return Err(Diagnostic::new(
                        span,
                        format!(
                            "model {} has no covariate to take the correlation from",
                            crate::report::markdown::code(&p.name)
                        ),
                    )
                    .label("no R² in the pilot")
                    .help(
                        "write `explaining R2` with the share of variance the covariates explain",
                    ));
                }
                if p.info.covariate_df as u64 != c {
                    return Err(Diagnostic::new(
                        span,
                        format!(
                            "the plan has {}, but model {} has {} ({})",
                            count(c, "covariate", "covariates"),
                            crate::report::markdown::code(&p.name),
                            count(
                                p.info.covariate_df as u64,
                                "covariate column",
                                "covariate columns"
                            ),
                            p.info.covariates.join(", ")
                        ),
                    )
                    .label("does not match the pilot")
                    .help(format!(
                        "write `with {} covariates`, or give `explaining R2` yourself",
                        p.info.covariate_df
                    )));
                }
                if p.info.partial_r_squared >= 1.0 {
                    return Err(Diagnostic::new(
                        span,
                        format!(
                            "the covariates of model {} explain all of its variance",
                            crate::report::markdown::code(&p.name)
                        ),
                    )
                    .label("no error variance left"));
                }
                (p.info.partial_r_squared, true)
            }
            // A pilot whose fit is not known: its R² is not known either.
            (None, _, None) if decl.pilot.is_some() => (0.0, false),
            (None, _, None) => {
                let span = decl.covariates.as_ref().map_or(decl.name.span, |s| s.span);
                return Err(Diagnostic::new(
                    span,
                    "the plan does not say how much of the variance the covariates explain",
                )
                .label("R² needed")
                .help("add `explaining R2` (such as `with 1 covariate explaining 0.4`), or take it from a fitted pilot with `from MODEL`"));
            }
        };

        // The SD within groups without covariates: as written, or from the pilot.
        let sd_written = match &decl.effect {
            PlanEffect::Means { sd, .. } | PlanEffect::Detectable { sd } => sd.clone(),
            PlanEffect::F(_) => None,
        };
        if let Some(s) = &sd_written {
            if s.value <= 0.0 {
                return Err(Diagnostic::new(s.span, "an SD must be above 0").label("out of range"));
            }
        }
        let sd_written = sd_written.map(|s| s.value);
        let sd = sd_written.or(pilot.as_ref().map(|p| p.sd_without));

        let design = Design {
            groups,
            covariates,
            r_squared,
            alpha,
            ratio,
        };
        let shares = design.shares();
        let (f_given, effect_span) = match &decl.effect {
            PlanEffect::F(v) => {
                if !(0.0..=MAX_EFFECT).contains(&v.value) {
                    return Err(Diagnostic::new(
                        v.span,
                        format!("an effect size f must be from 0 to {}", short(MAX_EFFECT)),
                    )
                    .label("out of range")
                    .help("Cohen calls f = 0.1 small, 0.25 medium and 0.4 large"));
                }
                (Some(v.value), v.span)
            }
            PlanEffect::Means { means, .. } => {
                if means.value.len() as u64 != groups {
                    return Err(Diagnostic::new(
                        means.span,
                        format!(
                            "{} means are given, but the plan has {groups} groups",
                            means.value.len()
                        ),
                    )
                    .label("one mean per group"));
                }
                let Some(s) = sd else {
                    if decl.pilot.is_some() {
                        // The SD of a pilot whose fit is not known.
                        return Ok(PlanInputs {
                            design,
                            pilot,
                            r_squared_from_pilot,
                            sd_written,
                            sd,
                            f_given: None,
                            effect_span: means.span,
                            target: None,
                            n: None,
                        });
                    }
                    return Err(Diagnostic::new(
                        means.span,
                        "the means need the SD within groups to become an effect size",
                    )
                    .label("SD needed")
                    .help("add `sd S` after the means, or take the SD from a fitted pilot with `from MODEL`"));
                };
                let f = effect_of_means(&means.value, &shares, s);
                if f.is_nan() || f > MAX_EFFECT {
                    return Err(Diagnostic::new(
                        means.span,
                        format!(
                            "these means make an effect size f {}above the {} a plan takes",
                            if f.is_finite() {
                                format!("of {}, ", short(f))
                            } else {
                                String::new()
                            },
                            short(MAX_EFFECT)
                        ),
                    )
                    .label("too far apart for the SD")
                    .help(format!(
                        "the SD within groups is {}: check that the means and the SD are in the same units",
                        short(s)
                    )));
                }
                (Some(f), means.span)
            }
            PlanEffect::Detectable { .. } => {
                (None, decl.power.as_ref().map_or(decl.name.span, |p| p.span))
            }
        };

        let target = decl
            .power
            .as_ref()
            .map(|p| {
                if !(p.value > design.alpha && p.value < 1.0) {
                    return Err(Diagnostic::new(
                        p.span,
                        format!(
                            "a target power must lie above alpha ({}) and below 1",
                            short(design.alpha)
                        ),
                    )
                    .label("out of range")
                    .help("a target power such as 0.8 or 0.9 is usual"));
                }
                Ok((p.value, p.span))
            })
            .transpose()?;
        let n = decl
            .n
            .as_ref()
            .map(|n| {
                whole(n, "the number per group", design.least_n(), MAX_PER_GROUP)
                    .map(|v| (v, n.span))
            })
            .transpose()?;
        Ok(PlanInputs {
            design,
            pilot,
            r_squared_from_pilot,
            sd_written,
            sd,
            f_given,
            effect_span,
            target,
            n,
        })
    }
}

impl Session<'_> {
    pub(super) fn plan(&mut self, decl: &PlanDecl) -> Outcome {
        let PlanInputs {
            design,
            pilot,
            r_squared_from_pilot,
            sd_written,
            sd,
            f_given,
            effect_span,
            target,
            n,
        } = PlanInputs::read(decl, &mut |m, upper| self.pilot_use(m, upper).map(Some))?;
        let (f, result) = solve(&design, f_given, n, target, decl.name.span, effect_span)?;
        let target = target.map(|(t, _)| t);

        let mut items = Vec::new();
        let mut t = plan_table(decl, &design, f, sd, &result);
        t.notes.extend(input_notes(
            decl,
            &design,
            sd,
            pilot.as_ref(),
            r_squared_from_pilot,
            f,
        ));
        t.notes.push(result_note(decl, &design, f, sd, &result));
        t.notes.push(computation_note(&design, &result));
        t.notes.push(CAUTION.to_string());
        t.subject = Some(decl.name.value.clone());
        items.push(Item::Table(t));

        // A small pilot: offer the upper confidence limit of its SD, with what it changes.
        let sd_from_pilot = sd_written.is_none() && !matches!(decl.effect, PlanEffect::F(_));
        if let (Some(p), true) = (&pilot, sd_from_pilot) {
            if p.level.is_none() {
                if let Some(w) = small_pilot_warning(p, decl, &design, f, &result) {
                    items.push(Item::Warning(w));
                }
            }
        }

        let entry = PlanEntry {
            name: decl.name.value.clone(),
            design,
            f,
            n: result.n,
            power: result.power,
            target,
        };
        match self.plans.iter().position(|p| p.name == entry.name) {
            Some(i) => {
                items.push(Item::Warning(format!(
                    "This replaces the earlier plan {}; figures and references from here on use the new one.",
                    code(&entry.name)
                )));
                self.plans[i] = entry;
            }
            None => self.plans.push(entry),
        }
        Ok(items)
    }

    /// The pilot model named by `from M [upper L]`, read for planning.
    fn pilot_use(
        &self,
        model: &Spanned<String>,
        upper: Option<&Spanned<f64>>,
    ) -> Result<PilotUse, Diagnostic> {
        let entry = self.model_entry(model)?;
        let info = entry.fit.pilot().map_err(|e| {
            Diagnostic::new(model.span, e.to_string())
                .label("not a pilot for a plan")
                .help("plan from the model with parallel slopes (without the group-by-covariate term)")
        })?;
        if info.df_residual == 0 || !info.sigma.is_finite() {
            return Err(Diagnostic::new(
                model.span,
                format!(
                    "model {} has no residual degrees of freedom, so no SD",
                    crate::report::markdown::code(&model.value)
                ),
            )
            .label("no SD in the pilot"));
        }
        let level = pilot_level(upper)?;
        let mut p = PilotUse {
            name: model.value.clone(),
            sigma: info.sigma,
            sd_without: 0.0,
            level,
            info,
        };
        if let Some(l) = level {
            p.sigma = p.upper_limit(l);
        }
        p.sd_without = p.sigma / (1.0 - p.info.partial_r_squared).sqrt();
        Ok(p)
    }

    pub(super) fn power_plot(
        &mut self,
        plan: &Spanned<String>,
        lines: Option<&PowerLines>,
        to: Option<&Spanned<f64>>,
    ) -> Outcome {
        let entry = self.plan_entry(plan)?;
        let d = &entry.design;
        let (specs, legend) = power_lines(d, entry.f, lines, plan)?;
        let low = least_on_axis(&specs);
        // Where each line reaches the target (the plan's target, or its power at its n).
        let mark = entry.target.unwrap_or(entry.power);
        let reach: Vec<Option<u64>> = specs
            .iter()
            .map(|(_, ds, f)| ds.n_for_power(*f, mark).ok().map(|p| p.n))
            .collect();
        let high = match to {
            Some(t) => axis_end(t, low)?,
            None => {
                let mut h = entry.n.saturating_mul(2);
                for r in reach.iter().flatten() {
                    if *r <= entry.n.saturating_mul(REACH_SPAN) {
                        h = h.max(r + r.div_ceil(4));
                    }
                }
                h.max(low + 8)
            }
        };
        let step = (high - low).div_ceil(FIGURE_POINTS).max(1);
        let mut ns: Vec<u64> = (low..=high).step_by(step as usize).collect();
        if ns.last() != Some(&high) {
            ns.push(high);
        }
        let mut drawn_lines = Vec::new();
        for (label, ds, f) in &specs {
            let points = ns
                .iter()
                .map(|&n| {
                    ds.power(*f, n)
                        .map(|p| (n as f64, p.power))
                        .map_err(|e| plan_error(plan.span, &e))
                })
                .collect::<Result<Vec<_>, _>>()?;
            drawn_lines.push(PowerLine {
                label: label.clone(),
                points,
            });
        }
        let per = if d.ratio.is_empty() {
            "number per group"
        } else {
            "number per unit of the ratio"
        };
        let target = Some((
            mark,
            match entry.target {
                Some(p) => format!("target {}", short(p)),
                None => format!("power {}", power_text(entry.power)),
            },
        ));
        let plan_n = (entry.n >= low && entry.n <= high)
            .then(|| (entry.n as f64, format!("plan: n = {}", entry.n)));
        let what = if legend == "R²" {
            "one line per R² of the covariates"
        } else {
            "one line per effect size f"
        };
        let unit = if d.ratio.is_empty() {
            "per group"
        } else {
            "per unit of the ratio"
        };
        let goal = match entry.target {
            Some(t) => short(t),
            None => power_text(mark),
        };
        let reached: Vec<String> = specs
            .iter()
            .zip(&reach)
            .map(|((label, _, _), r)| match r {
                Some(n) => format!("With {legend} {label} the power reaches {goal} at {n} {unit}."),
                None => format!("With {legend} {label} it does not reach {goal}."),
            })
            .collect();
        let alt = format!(
            "Power of the F test of {} groups at alpha {} against the {per} from {low} to {high}, {what}. {}",
            d.groups,
            short(d.alpha),
            reached.join(" "),
        );
        let curves = PowerCurves {
            lines: drawn_lines,
            legend_title: legend,
            x_label: per.to_string(),
            target,
            plan_n,
            caption: format!("Power against the {per}, plan {}: {what}", entry.name),
            alt,
        };
        let drawn = power_figure::draw(&curves)
            .map_err(|e| Diagnostic::new(plan.span, e.to_string()).label("cannot draw this"))?;
        Ok(vec![Item::Figure(Figure {
            file: String::new(),
            svg: drawn.svg,
            alt: drawn.alt,
            caption: drawn.caption,
        })])
    }

    fn plan_entry(&self, name: &Spanned<String>) -> Result<&PlanEntry, Diagnostic> {
        self.plans
            .iter()
            .find(|p| p.name == name.value)
            .ok_or_else(|| {
                let known: Vec<&str> = self.plans.iter().map(|p| p.name.as_str()).collect();
                unknown_plan(name, &known)
            })
    }
}

/// The lines of a power figure, each a label, a design and an effect size, and the legend's
/// title.
pub(crate) type PowerSpecs = (Vec<(String, Design, f64)>, String);

/// The lines of `plot power` for a plan of design `d` and effect size `f`, with the
/// renderer's errors for values out of range and too many lines (none depends on `f`).
pub(crate) fn power_lines(
    d: &Design,
    f: f64,
    lines: Option<&PowerLines>,
    plan: &Spanned<String>,
) -> Result<PowerSpecs, Diagnostic> {
    // The lines: (label, design, f).
    let mut specs: Vec<(String, Design, f64)> = Vec::new();
    let (legend, values_span) = match lines {
        Some(PowerLines::Effects(v)) => {
            for &f in &v.value {
                if !(f > 0.0 && f <= MAX_EFFECT) {
                    return Err(Diagnostic::new(
                        v.span,
                        format!(
                            "each effect size f must be above 0 and at most {}",
                            short(MAX_EFFECT)
                        ),
                    )
                    .label("out of range"));
                }
                specs.push((label(f), d.clone(), f));
            }
            ("effect f".to_string(), Some(v.span))
        }
        Some(PowerLines::RSquared(v)) => {
            for &r in &v.value {
                if !(0.0..1.0).contains(&r) {
                    return Err(
                        Diagnostic::new(v.span, "each R² must be at least 0 and below 1")
                            .label("out of range"),
                    );
                }
                specs.push(r_squared_line(d, r, f));
            }
            ("R²".to_string(), Some(v.span))
        }
        None if d.covariates > 0 => {
            specs.push(r_squared_line(d, 0.0, f));
            specs.push(r_squared_line(d, d.r_squared, f));
            ("R²".to_string(), None)
        }
        None => {
            specs.push((label(f), d.clone(), f));
            ("effect f".to_string(), None)
        }
    };
    if specs.len() > STYLES {
        return Err(Diagnostic::new(
            values_span.unwrap_or(plan.span),
            format!("a power figure draws at most {STYLES} lines"),
        )
        .label("too many lines"));
    }
    Ok((specs, legend))
}

/// The smallest number per group on a power figure's axis: the most any of its lines needs.
pub(crate) fn least_on_axis(specs: &[(String, Design, f64)]) -> u64 {
    specs.iter().map(|s| s.1.least_n()).max().unwrap_or(2)
}

/// The axis's end given by `to N`: above its start `low`.
pub(crate) fn axis_end(to: &Spanned<f64>, low: u64) -> Result<u64, Diagnostic> {
    whole(to, "the largest number per group", low + 1, MAX_PER_GROUP)
}

/// The error for a plan not made before `plot power` names it (the renderer's and the
/// language server's words).
pub(crate) fn unknown_plan(name: &Spanned<String>, known: &[&str]) -> Diagnostic {
    let help = match closest(&name.value, known) {
        Some(c) => format!("did you mean {c}?", c = crate::report::markdown::code(c)),
        None if known.is_empty() => {
            "make one first with `plan NAME for K groups ... effect ...`".into()
        }
        None => format!("the plans so far are {}", known.join(", ")),
    };
    Diagnostic::new(
        name.span,
        format!(
            "there is no plan called {}",
            crate::report::markdown::code(&name.value)
        ),
    )
    .label("unknown plan")
    .help(help)
}

/// A line of the power figure at R² = `r`: without covariates at 0 (the analysis that
/// leaves them out), with the plan's covariates (at least one) otherwise.
fn r_squared_line(d: &Design, r: f64, f: f64) -> (String, Design, f64) {
    let mut line = d.clone();
    line.r_squared = r;
    if r == 0.0 {
        line.covariates = 0;
        ("0 (no covariate)".to_string(), line, f)
    } else {
        line.covariates = d.covariates.max(1);
        (short_of(r, 1.0, 3), line, f)
    }
}

/// Solves the plan: the number per group, the power, or the detectable effect.
fn solve(
    design: &Design,
    f: Option<f64>,
    n: Option<(u64, Span)>,
    target: Option<(f64, Span)>,
    name: Span,
    effect_span: Span,
) -> Result<(f64, Power), Diagnostic> {
    match (f, n, target) {
        (Some(f), None, Some((t, span))) => {
            let span = if f == 0.0 { effect_span } else { span };
            design
                .n_for_power(f, t)
                .map(|p| (f, p))
                .map_err(|e| plan_error(span, &e))
        }
        (Some(f), Some((n, span)), None) => design
            .power(f, n)
            .map(|p| (f, p))
            .map_err(|e| plan_error(span, &e)),
        (None, Some((n, _)), Some((t, span))) => design
            .detectable_f(n, t)
            .map_err(|e| plan_error(span, &e)),
        _ => Err(Diagnostic::new(
            name,
            "internal error: the plan's parts are not where the grammar puts them (please report this)",
        )),
    }
}

/// The plan's table: every input and the result, one row.
fn plan_table(decl: &PlanDecl, d: &Design, f: f64, sd: Option<f64>, r: &Power) -> Table {
    let caption = match (&decl.effect, &decl.n, &decl.power) {
        (PlanEffect::Detectable { .. }, Some(n), Some(p)) => format!(
            "Plan {}: the smallest effect detected with power {} and {} per {}",
            code(&decl.name.value),
            short(p.value),
            short(n.value),
            if d.ratio.is_empty() {
                "group"
            } else {
                "unit of the ratio"
            }
        ),
        (_, None, Some(p)) => format!(
            "Plan {}: the number per {} for power {}",
            code(&decl.name.value),
            if d.ratio.is_empty() {
                "group"
            } else {
                "unit of the ratio"
            },
            short(p.value)
        ),
        (_, Some(n), _) => format!(
            "Plan {}: the power with {} per {}",
            code(&decl.name.value),
            short(n.value),
            if d.ratio.is_empty() {
                "group"
            } else {
                "unit of the ratio"
            }
        ),
        _ => format!("Plan {}", code(&decl.name.value)),
    };
    let mut t = Table::new(
        "plan",
        caption,
        vec![
            Col::new("groups", "groups", Format::Count),
            Col::new("covariates", "covariates", Format::Count),
            Col::new("r_squared", "R²", Format::Proportion(3)),
            Col::new("sd", "SD", Format::Digits(4)),
            Col::new("effect_f", "f", Format::Digits(3)),
            Col::new("alpha", "alpha", Format::Exact),
            Col::new("n_per_group", "n per group", Format::Count),
            Col::new("total_n", "N", Format::Count),
            Col::new("df1", "df1", Format::Count),
            Col::new("df2", "df2", Format::Count),
            Col::new("lambda", "λ", Format::Digits(4)),
            Col::new("power", "power", Format::Digits(3)),
            Col::new("group_sizes", "group sizes", Format::Text),
        ],
    );
    let sizes: Vec<String> = d.group_sizes(r.n).iter().map(u64::to_string).collect();
    t.push(vec![
        Cell::Number(d.groups as f64),
        Cell::Number(d.covariates as f64),
        Cell::from(d.r_squared),
        Cell::from(sd),
        Cell::from(f),
        Cell::from(d.alpha),
        Cell::Number(r.n as f64),
        Cell::Number(r.total as f64),
        Cell::Number(r.df1 as f64),
        Cell::Number(r.df2 as f64),
        Cell::from(r.lambda),
        Cell::from(r.power),
        Cell::Text(sizes.join(", ")),
    ]);
    t
}

/// Where the SD, R² and effect come from.
fn input_notes(
    decl: &PlanDecl,
    d: &Design,
    sd: Option<f64>,
    pilot: Option<&PilotUse>,
    r_squared_from_pilot: bool,
    f: f64,
) -> Vec<String> {
    let mut notes = Vec::new();
    if let Some(p) = pilot {
        let r = p.info.partial_r_squared.sqrt() * p.info.sign.unwrap_or(1.0);
        let covs: Vec<String> = p.info.covariates.iter().map(|c| code(c)).collect();
        let correlation = match (p.info.covariate_df, p.info.sign) {
            (0, _) => "it has no covariate".to_string(),
            (1, Some(_)) => format!(
                "the partial correlation of the response with {} given its other terms is r = {} (r² = {})",
                covs.join(", "),
                short_of(r, r.signum(), 4),
                short_of(p.info.partial_r_squared, 1.0, 4)
            ),
            _ => format!(
                "its covariates {} explain r² = {} of the variance its other terms leave",
                covs.join(", "),
                short_of(p.info.partial_r_squared, 1.0, 4)
            ),
        };
        let weight_one = if p.info.weighted {
            " (the model is weighted: the SD of a row of weight 1)"
        } else {
            ""
        };
        let sigma = match p.level {
            Some(l) => format!(
                "its residual SD is {}{weight_one}, planned with its one-sided upper {}% confidence limit {}",
                short(p.info.sigma),
                short_of(l * 100.0, 100.0, 4),
                short(p.sigma)
            ),
            None => format!("its residual SD is {}{weight_one}", short(p.info.sigma)),
        };
        let mut uses = Vec::new();
        let sd_used = !matches!(decl.effect, PlanEffect::F(_))
            && !matches!(
                &decl.effect,
                PlanEffect::Means { sd: Some(_), .. } | PlanEffect::Detectable { sd: Some(_) }
            );
        if sd_used {
            uses.push(format!(
                "the SD within groups without covariates, {} / √(1 − r²) = {}",
                short(p.sigma),
                short(p.sd_without)
            ));
        }
        if r_squared_from_pilot {
            uses.push(format!("R² = r² = {}", short_of(d.r_squared, 1.0, 4)));
        }
        let uses = if uses.is_empty() {
            "The plan takes nothing from it: its own values are written in the statement."
                .to_string()
        } else {
            format!("The plan takes {} from it.", uses.join(", and "))
        };
        notes.push(format!(
            "Pilot: model {} ({}, {}): {sigma}; {correlation}. {uses}",
            code(&p.name),
            count(p.info.n as u64, "row", "rows"),
            count(
                p.info.df_residual as u64,
                "residual degree of freedom",
                "residual degrees of freedom"
            )
        ));
    }
    match &decl.effect {
        PlanEffect::Means { means, .. } => {
            let listed: Vec<String> = means.value.iter().map(|m| short(*m)).collect();
            notes.push(format!(
                "f = {}: the SD of the means {} about their {}, over the SD within groups without covariates, {}.",
                short(f),
                listed.join(", "),
                if d.ratio.is_empty() {
                    "mean (divisor K)".to_string()
                } else {
                    let r: Vec<String> = d.ratio.iter().map(u64::to_string).collect();
                    format!("weighted mean, each weighted by its group's share of the ratio {}", r.join(":"))
                },
                sd.map_or_else(|| "—".to_string(), short)
            ));
        }
        PlanEffect::F(_) => notes.push(format!(
            "f = {} is Cohen's effect size: the SD of the group means over the SD within groups without covariates.",
            short(f)
        )),
        PlanEffect::Detectable { .. } => {}
    }
    notes
}

/// The result in words: the n found and its power, the power, or the detectable effect.
fn result_note(decl: &PlanDecl, d: &Design, f: f64, sd: Option<f64>, r: &Power) -> String {
    let per = if d.ratio.is_empty() {
        "per group"
    } else {
        "per unit of the ratio"
    };
    match (&decl.effect, &decl.power, &decl.n) {
        (PlanEffect::Detectable { .. }, Some(p), _) => {
            let mut s = format!(
                "f = {} is the smallest effect size detected with power {} with {} {per}.",
                short(f),
                short(p.value),
                r.n
            );
            if let Some(sd) = sd {
                s.push_str(&format!(
                    " With the SD within groups {}, that is an SD of the group means of {}",
                    short(sd),
                    short(f * sd)
                ));
                if d.ratio.is_empty() {
                    s.push_str(&format!(
                        ": two means {} apart{}",
                        short(f * sd * (2.0 * d.groups as f64).sqrt()),
                        if d.groups > 2 {
                            " with the others midway"
                        } else {
                            ""
                        }
                    ));
                }
                s.push('.');
            }
            s
        }
        (_, Some(p), None) => {
            let mut s = format!(
                "n is the smallest whole number {per} that reaches power {}; with it the power is {}",
                short(p.value),
                power_against(r.power, p.value)
            );
            let design_ok = r.n > d.least_n();
            if design_ok {
                if let Ok(below) = d.power(f, r.n - 1) {
                    s.push_str(&format!(
                        " (with {}, {})",
                        r.n - 1,
                        power_against(below.power, p.value)
                    ));
                }
            }
            s.push('.');
            s
        }
        _ => format!("With {} {per} the power is {}.", r.n, power_text(r.power)),
    }
}

/// How the power was computed, with the numbers.
fn computation_note(d: &Design, r: &Power) -> String {
    format!(
        "Power of the F test of the groups: the noncentral F distribution with df1 = K − 1 = {}, df2 = N − K − C = {} and noncentrality λ = N f² / (1 − R²) = {}, beyond the critical F = {} at alpha {}.",
        r.df1,
        r.df2,
        short(r.lambda),
        short(r.critical),
        short(d.alpha)
    )
}

/// The caution every plan carries.
const CAUTION: &str = "A plan is only as good as its assumptions: the SD within groups and the share of it the covariates explain are estimates or guesses, and a larger SD or a weaker correlation than assumed leaves less power. The computation treats the covariates as balanced across the groups, as randomization makes them on average; in a small trial their chance imbalance makes the power a little lower.";

/// The warning for a small pilot whose SD the plan uses: its upper confidence limit, and
/// the plan that limit would give.
fn small_pilot_warning(
    p: &PilotUse,
    decl: &PlanDecl,
    d: &Design,
    f: f64,
    result: &Power,
) -> Option<String> {
    let upper = p.upper_limit(PILOT_LEVEL);
    let excess = upper / p.sigma - 1.0;
    if excess.is_nan() || excess <= SMALL_PILOT_EXCESS {
        return None;
    }
    // Every effect size here is a difference over the SD, so the larger SD shrinks it by
    // the same factor.
    let f_upper = f * p.sigma / upper;
    let per = if d.ratio.is_empty() {
        "per group"
    } else {
        "per unit of the ratio"
    };
    let consequence = match (&decl.effect, &decl.power, &decl.n) {
        (PlanEffect::Detectable { .. }, _, _) => format!(
            "with it the smallest detectable SD of the group means is {} instead of {}",
            short(f * p.sd_without * upper / p.sigma),
            short(f * p.sd_without)
        ),
        (_, Some(goal), None) => match d.n_for_power(f_upper, goal.value) {
            Ok(u) if u.n == result.n => format!("with it the plan still needs {} {per}", u.n),
            Ok(u) => format!(
                "with it the plan needs {} {per} instead of {}",
                u.n, result.n
            ),
            Err(_) => "with it no realistic trial reaches the target power".to_string(),
        },
        _ => match d.power(f_upper, result.n) {
            Ok(u) if power_text(u.power) == power_text(result.power) => {
                format!("with it the power is still {}", power_text(u.power))
            }
            Ok(u) => format!(
                "with it the power is {} instead of {}",
                power_text(u.power),
                power_text(result.power)
            ),
            Err(_) => "with it no power can be computed for this design".to_string(),
        },
    };
    Some(format!(
        "The pilot model {} leaves only {}, so its SD is uncertain: the one-sided upper {}% confidence limit of its residual SD is {}, {}% above the estimate {}. Planning with that limit is the conservative choice (Browne 1995): write {}; {consequence}.",
        code(&p.name),
        count(
            p.info.df_residual as u64,
            "residual degree of freedom",
            "residual degrees of freedom"
        ),
        short(PILOT_LEVEL * 100.0),
        short(upper),
        short((excess * 100.0).round()),
        short(p.sigma),
        code(&format!("from {} upper {}", p.name, short(PILOT_LEVEL))),
    ))
}
