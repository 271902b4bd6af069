//! The figures of `plot`, built from a fitted model: what each one shows, in numbers,
//! before [`super::chart`] draws it.

use statrs::distribution::{ContinuousCDF, Normal};

use std::ops::Range;

use super::chart::{Chart, Curve, Guide, Interval, Point};
use super::{style, Drawn, PlotError, Request};
use crate::data::Code;
use crate::model::{Fit, Transform, UsedRows, Var};

/// Most markers one figure draws. Beyond it the points are thinned deterministically (and
/// the caption says how), which keeps every SVG well under 1 MB at any number of rows.
pub const MAX_POINTS: usize = 3000;

/// Number of steps along the covariate at which a curved fitted line (from `x^2`, `log(x)`,
/// `sqrt(x)` terms) is evaluated. The SVG backend rounds vertices to whole pixels, so many
/// short steps look jagged; this many keeps the curve smooth at 720 pixels wide. A line
/// straight in the covariate needs only its two ends.
const CURVE_STEPS: usize = 24;

/// Confidence level of the intervals of adjusted means.
const MEANS_LEVEL: f64 = 0.95;

/// Width of the band (in level spacings) over which the points of one level are spread.
const JITTER_WIDTH: f64 = 0.5;

/// Half-length of the level-mean bar of the groups figure, in level spacings.
const MEAN_BAR: f64 = 0.3;

/// Fractional part of the golden ratio: the additive (Weyl) sequence frac(i * phi) spreads
/// points evenly with no random state (Weyl 1916, "Über die Gleichverteilung von Zahlen
/// mod. Eins", Math. Annalen 77).
const GOLDEN: f64 = 0.618_033_988_749_894_8;

/// The rows of the fit, with what every figure needs of them.
struct Rows<'a> {
    /// Index of each fitted row in the model's variables.
    index: &'a UsedRows,
}

impl<'a> Rows<'a> {
    /// The fitted rows of a model, in the order of its diagnostics.
    fn of(fit: &'a Fit) -> Rows<'a> {
        Rows {
            index: fit.used_rows(),
        }
    }

    fn response(&self, fit: &Fit) -> Vec<f64> {
        let values: &[f64] = match &fit.spec().response {
            Var::Numeric { values, .. } => values,
            Var::Factor { .. } => &[],
        };
        self.index
            .iter()
            .map(|i| values.get(i).copied().unwrap_or(f64::NAN))
            .collect()
    }
}

/// The levels of the factor that occur among the fitted rows (declared order), and the
/// group of each fitted row: its position among those levels; all rows are group 0 when
/// there is no factor.
struct Groups<'a> {
    labels: Vec<String>,
    codes: Vec<u32>,
    /// The fitted rows.
    rows: &'a UsedRows,
    /// The factor's code of each data row; `None` without a factor (every row in group 0).
    of_data_row: Option<&'a [Code]>,
    /// The group of each level code, [`NO_GROUP`] for a level no fitted row has. Looked up
    /// row by row as needed: a group per row held would cost two bytes a row per figure.
    position: Vec<u16>,
}

/// `Groups::position` entry of a level in no group.
const NO_GROUP: u16 = u16::MAX;

impl<'a> Groups<'a> {
    /// Refuses more levels than a figure of lines or of levels along the axis can name.
    fn checked(self, req: &Request) -> Result<Groups<'a>, PlotError> {
        if self.labels.len() > super::MAX_LEVELS {
            return Err(PlotError::TooManyLevels {
                factor: req.factor_name.clone().unwrap_or_default(),
                levels: self.labels.len(),
            });
        }
        Ok(self)
    }

    /// Refuses more levels than a scatter of points tells apart: points scattered over the
    /// panel can be told apart only by colour and shape, and there are
    /// [`style::STYLES`] of those.
    fn checked_points(self, req: &Request) -> Result<Groups<'a>, PlotError> {
        if self.labels.len() > super::MAX_POINT_LEVELS {
            return Err(PlotError::TooManyPointLevels {
                factor: req.factor_name.clone().unwrap_or_default(),
                levels: self.labels.len(),
            });
        }
        Ok(self)
    }

    fn of(fit: &'a Fit, rows: &Rows<'a>, factor: Option<usize>) -> Groups<'a> {
        let Some(Var::Factor { codes, levels, .. }) = factor.and_then(|v| fit.spec().vars.get(v))
        else {
            return Groups {
                labels: Vec::new(),
                codes: Vec::new(),
                rows: rows.index,
                of_data_row: None,
                position: Vec::new(),
            };
        };
        let code_of = |i: usize| codes.get(i).and_then(|c| c.get());
        let blocks = crate::parallel::row_blocks(rows.index.len());
        let present_in = |at: &Range<usize>| {
            let mut present = vec![false; levels.len()];
            for c in at.clone().filter_map(|k| code_of(rows.index.get(k)?)) {
                if let Some(p) = present.get_mut(c as usize) {
                    *p = true;
                }
            }
            present
        };
        let mut present = vec![false; levels.len()];
        for block in crate::parallel::map(&blocks, present_in) {
            for (p, b) in present.iter_mut().zip(block) {
                *p |= b;
            }
        }
        let kept: Vec<u32> = (0..levels.len() as u32)
            .filter(|c| present.get(*c as usize).copied().unwrap_or(false))
            .collect();
        let labels = kept
            .iter()
            .map(|c| levels.get(*c as usize).cloned().unwrap_or_default())
            .collect();
        // Position of each code among the kept levels.
        let mut position = vec![NO_GROUP; levels.len()];
        for (k, &c) in kept.iter().enumerate() {
            if let (Some(p), Ok(k)) = (position.get_mut(c as usize), u16::try_from(k)) {
                *p = k;
            }
        }
        Groups {
            labels,
            codes: kept,
            rows: rows.index,
            of_data_row: Some(codes.as_slice()),
            position,
        }
    }

    /// The group of the k-th fitted row (None for none).
    fn group(&self, k: usize) -> Option<usize> {
        let row = self.rows.get(k)?;
        let Some(codes) = self.of_data_row else {
            return Some(0);
        };
        let code = codes.get(row)?.get()?;
        self.position
            .get(usize::try_from(code).ok()?)
            .filter(|&&g| g != NO_GROUP)
            .map(|&g| usize::from(g))
    }

    /// The group of each fitted row (None for none), in row order.
    fn rows(&self) -> impl Iterator<Item = Option<usize>> + '_ {
        (0..self.rows.len()).map(|k| self.group(k))
    }

    /// Legend entries: the level labels, or one entry for all observations.
    fn legend(&self) -> Vec<String> {
        if self.labels.is_empty() {
            vec!["observations".to_string()]
        } else {
            self.labels.clone()
        }
    }
}

/// Keeps every k-th point of each group, in row order, when there are more than
/// [`MAX_POINTS`]; returns k (1 = all kept). Counting within groups keeps every level in
/// view even when the levels recur in a fixed pattern down the rows.
fn thin(points: &mut Vec<Point>) -> usize {
    let n = points.len();
    if n <= MAX_POINTS {
        return 1;
    }
    let k = n.div_ceil(MAX_POINTS);
    let mut seen: Vec<usize> = Vec::new();
    points.retain(|p| every_kth(&mut seen, p.group, k));
    k
}

/// Whether the next point of `group` is one of every `step`-th of it, counting it in
/// `seen` (points of each group so far).
fn every_kth(seen: &mut Vec<usize>, group: usize, step: usize) -> bool {
    if seen.len() <= group {
        seen.resize(group + 1, 0);
    }
    match seen.get_mut(group) {
        Some(c) => {
            let keep = *c % step == 0;
            *c += 1;
            keep
        }
        None => false,
    }
}

/// The points `candidates(positions)` yields for the fitted rows at `positions`, taken over
/// all `n_rows` of them and thinned exactly as [`thin`] would thin them, without holding
/// them all. The rows are taken in fixed blocks, side by side: once to count each group's
/// points (and their range of x), then again to keep every k-th of each group, each block
/// starting from the counts of the blocks before it; so the points kept do not depend on
/// the number of threads.
fn thinned<I, F>(n_rows: usize, candidates: F) -> Thinned
where
    I: Iterator<Item = Point>,
    F: Fn(Range<usize>) -> I + Sync,
{
    let blocks = crate::parallel::row_blocks(n_rows);
    let tallies: Vec<Vec<Tally>> = crate::parallel::map(&blocks, |b| {
        let mut t: Vec<Tally> = Vec::new();
        for p in candidates(b.clone()) {
            if t.len() <= p.group {
                t.resize(p.group + 1, Tally::EMPTY);
            }
            if let Some(g) = t.get_mut(p.group) {
                g.count += 1;
                g.lo = g.lo.min(p.x);
                g.hi = g.hi.max(p.x);
            }
        }
        t
    });
    // Each block's starting count in every group: the counts of the blocks before it.
    let mut starts: Vec<Vec<usize>> = Vec::with_capacity(blocks.len());
    let mut whole: Vec<Tally> = Vec::new();
    for t in &tallies {
        starts.push(whole.iter().map(|w| w.count).collect());
        if whole.len() < t.len() {
            whole.resize(t.len(), Tally::EMPTY);
        }
        for (w, g) in whole.iter_mut().zip(t) {
            w.count += g.count;
            w.lo = w.lo.min(g.lo);
            w.hi = w.hi.max(g.hi);
        }
    }
    let total: usize = whole.iter().map(|w| w.count).sum();
    let step = if total <= MAX_POINTS {
        1
    } else {
        total.div_ceil(MAX_POINTS)
    };
    let jobs: Vec<(Range<usize>, Vec<usize>)> = blocks.into_iter().zip(starts).collect();
    let kept: Vec<Vec<Point>> = crate::parallel::map(&jobs, |(b, start)| {
        let mut seen = start.clone();
        candidates(b.clone())
            .filter(|p| every_kth(&mut seen, p.group, step))
            .collect()
    });
    Thinned {
        points: kept.concat(),
        step,
        total,
        ranges: whole.iter().map(|w| (w.lo, w.hi)).collect(),
    }
}

/// What [`thinned`] returns.
struct Thinned {
    /// The points kept.
    points: Vec<Point>,
    /// Every how many points of a group one is kept (1 = all).
    step: usize,
    /// Number of candidate points.
    total: usize,
    /// Per group, the smallest and largest x of all its candidates (infinite bounds the
    /// wrong way round for a group without any).
    ranges: Vec<(f64, f64)>,
}

/// One group's points within a block of rows: how many, and their range of x.
#[derive(Debug, Clone, Copy)]
struct Tally {
    count: usize,
    lo: f64,
    hi: f64,
}

impl Tally {
    const EMPTY: Tally = Tally {
        count: 0,
        lo: f64::INFINITY,
        hi: f64::NEG_INFINITY,
    };
}

/// Values of a numeric variable of the fit (empty for a factor or an unknown index).
fn var_values(fit: &Fit, var: Option<usize>) -> &[f64] {
    match var.and_then(|v| fit.spec().vars.get(v)) {
        Some(Var::Numeric { values, .. }) => values,
        _ => &[],
    }
}

/// The response values of the fit.
fn response_values(fit: &Fit) -> &[f64] {
    match &fit.spec().response {
        Var::Numeric { values, .. } => values,
        Var::Factor { .. } => &[],
    }
}

/// Caption and alt-text wording for thinned points.
fn thinned_note(k: usize, n: usize) -> String {
    if k <= 1 {
        String::new()
    } else {
        format!(" (every {} of {} points shown)", ordinal(k), thousands(n))
    }
}

fn ordinal(k: usize) -> String {
    let suffix = match (k % 10, k % 100) {
        (1, r) if r != 11 => "st",
        (2, r) if r != 12 => "nd",
        (3, r) if r != 13 => "rd",
        _ => "th",
    };
    format!("{k}{suffix}")
}

fn thousands(n: usize) -> String {
    let s = n.to_string();
    let mut out = String::new();
    for (i, ch) in s.chars().enumerate() {
        if i > 0 && (s.len() - i) % 3 == 0 {
            out.push(',');
        }
        out.push(ch);
    }
    out
}

/// What a figure says about rows whose value is undefined and so not drawn.
struct LeftOut {
    /// A sentence for the alternative text (empty when none).
    sentence: String,
    /// A clause for the caption (empty when none).
    clause: String,
}

/// [`LeftOut`] for `count` rows whose `what` is 0/0: rows of leverage 1, or every row when
/// the fit is `exact` (no residual variance).
fn undefined_note(count: usize, what: &str, exact: bool) -> LeftOut {
    let (rows, verb) = match count {
        0 => {
            return LeftOut {
                sentence: String::new(),
                clause: String::new(),
            }
        }
        _ if exact => {
            return LeftOut {
                sentence: format!(
                    " The fit is exact (residual standard deviation 0), so every {what} is undefined (0/0) and none is drawn."
                ),
                clause: format!("; none drawn: the fit is exact, so every {what} is undefined"),
            }
        }
        1 => ("1 row".to_string(), "has"),
        k => (format!("{} rows", thousands(k)), "have"),
    };
    LeftOut {
        sentence: format!(
            " {rows} with leverage 1 (such as the only row of a level) {verb} an undefined {what} (0/0) and {} not drawn.",
            if count == 1 { "is" } else { "are" }
        ),
        clause: format!("; {rows} with leverage 1 left out ({what} undefined)"),
    }
}

/// How the levels of a figure with more of them than distinct styles are told apart.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
enum Named {
    /// Each line is labelled at its right end.
    AtLineEnds,
    /// Each level stands at its own place along the axis, which names it.
    OnTheAxis,
}

/// The sentence for a caption (and the alternative text) when there are more levels than
/// distinct styles: that colours and shapes repeat, and how each level is named instead.
fn repeat_note(levels: usize, named: Named) -> String {
    if levels <= style::STYLES {
        return String::new();
    }
    let how = match named {
        Named::AtLineEnds => "each line is labelled with its level at its right end",
        Named::OnTheAxis => "each level is named on the axis",
    };
    format!(
        " Colours and marker shapes repeat after the {}th level; {how}.",
        style::STYLES
    )
}

/// [`repeat_note`] as a clause at the end of a caption.
fn repeat_clause(levels: usize, named: Named) -> String {
    if levels <= style::STYLES {
        return String::new();
    }
    let how = match named {
        Named::AtLineEnds => "each line labelled at its end",
        Named::OnTheAxis => "each level named on the axis",
    };
    format!(
        "; colours and marker shapes repeat after the {}th level, {how}",
        style::STYLES
    )
}

fn by_factor(req: &Request) -> String {
    match &req.factor_name {
        Some(f) => format!(" by {f}"),
        None => String::new(),
    }
}

/// ", one marker shape per F" when points are told apart by a factor.
fn marked_by(req: &Request) -> String {
    match &req.factor_name {
        Some(f) => format!(", one marker shape and colour per {f}"),
        None => String::new(),
    }
}

/// Whether the model's prediction is a straight line in variable `x`: every term part on
/// `x` is `x` itself, and no term holds `x` twice.
fn straight_in(fit: &Fit, x: usize) -> bool {
    fit.spec().terms.iter().all(|t| {
        let on_x: Vec<_> = t.parts.iter().filter(|p| p.var == x).collect();
        on_x.len() <= 1 && on_x.iter().all(|p| p.transform == Transform::Identity)
    })
}

/// The prediction of the model at covariate `x` = `value`, other covariates at their means,
/// factor `factor` at level `code` (or averaged) and other factors averaged with equal weights:
/// the adjusted-means convention, evaluated along the covariate.
fn predict(fit: &Fit, x: &str, value: f64, factor: Option<(usize, u32)>) -> Result<f64, PlotError> {
    let numeric = fit
        .covariate_values(&[(x.to_string(), value)])
        .map_err(PlotError::Model)?;
    let pt = match factor {
        Some((v, c)) => fit.point(v, Some(c), numeric, None),
        None => fit.point(usize::MAX, None, numeric, None),
    };
    let row = fit.row_at(&pt);
    fit.linear(&row)
        .map(|(m, _)| m)
        .map_err(|_| PlotError::NotEstimable {
            what: format!("the fitted value at {x} = {value}"),
        })
}

/// Whether some term of the model holds both `factor` and `x` (separate slopes).
fn separate_slopes(fit: &Fit, factor: usize, x: usize) -> bool {
    fit.spec()
        .terms
        .iter()
        .any(|t| t.parts.iter().any(|p| p.var == factor) && t.parts.iter().any(|p| p.var == x))
}

/// `plot lines`: the data with the fitted line of each level.
pub fn lines(fit: &Fit, req: &Request) -> Result<Drawn, PlotError> {
    let xv = req.covariate.ok_or(PlotError::NoCovariate)?;
    let x_name = fit
        .spec()
        .vars
        .get(xv)
        .map(|v| v.name().to_string())
        .unwrap_or_default();
    let rows = Rows::of(fit);
    let (xs, ys) = (var_values(fit, Some(xv)), response_values(fit));
    let groups = Groups::of(fit, &rows, req.factor).checked(req)?;
    let candidates = |at: Range<usize>| {
        at.filter_map(|k| {
            let i = rows.index.get(k)?;
            let group = groups.group(k)?;
            let (x, y) = (
                xs.get(i).copied().unwrap_or(f64::NAN),
                ys.get(i).copied().unwrap_or(f64::NAN),
            );
            (x.is_finite() && y.is_finite()).then_some(Point { group, x, y })
        })
    };
    let nlines = groups.legend().len();
    let Thinned {
        points,
        step: k,
        total: n,
        ranges: range,
    } = thinned(rows.index.len(), candidates);
    let mut curves = Vec::new();
    let steps = if straight_in(fit, xv) { 1 } else { CURVE_STEPS };
    for g in 0..nlines {
        let (lo, hi) = range
            .get(g)
            .copied()
            .unwrap_or((f64::INFINITY, f64::NEG_INFINITY));
        if lo > hi {
            continue;
        }
        let level = match (req.factor, groups.codes.get(g)) {
            (Some(v), Some(c)) => Some((v, *c)),
            _ => None,
        };
        let mut line = Vec::with_capacity(steps + 1);
        for s in 0..=steps {
            let x = lo + (hi - lo) * s as f64 / steps as f64;
            line.push((x, predict(fit, &x_name, x, level)?));
        }
        curves.push(Curve {
            group: Some(g),
            points: line,
        });
    }
    let note = thinned_note(k, n);
    let (what, shape) = match req.factor {
        Some(f) => {
            let fname = req.factor_name.clone().unwrap_or_default();
            let shape = if separate_slopes(fit, f, xv) {
                "separate slopes"
            } else {
                "parallel lines"
            };
            (
                format!(", with one fitted line per {fname}"),
                format!(" ({shape})"),
            )
        }
        None => (", with the fitted line".to_string(), String::new()),
    };
    let others = if fit.covariate_means().len() > 1 {
        "; other covariates at their means"
    } else {
        ""
    };
    let alt = format!(
        "Scatter of {} against {}{}{}{}{}. {} the observed range of {}{}{}.{}",
        req.response_name,
        x_name,
        by_factor(req),
        what,
        shape,
        note,
        if req.factor.is_some() {
            "Each line spans"
        } else {
            "The line spans"
        },
        x_name,
        if req.factor.is_some() {
            " in its group"
        } else {
            ""
        },
        others,
        repeat_note(groups.labels.len(), Named::AtLineEnds),
    );
    let caption = format!(
        "{} against {}{}, fitted lines{}{}",
        req.response_name,
        x_name,
        by_factor(req),
        note,
        repeat_clause(groups.labels.len(), Named::AtLineEnds)
    );
    let chart = Chart {
        x_label: req.covariate_label.clone().unwrap_or_default(),
        y_label: req.response_label.clone(),
        legend_title: req.factor_name.clone(),
        groups: if req.factor.is_some() {
            groups.legend()
        } else {
            vec!["data and fit".to_string()]
        },
        points,
        curves,
        group_lines: true,
        ..Chart::default()
    };
    Ok(Drawn {
        svg: super::chart::render(&chart)?,
        alt,
        caption,
    })
}

/// `plot residuals`: residuals against fitted values (or against covariate X), zero line.
pub fn residuals(fit: &Fit, req: &Request) -> Result<Drawn, PlotError> {
    let rows = Rows::of(fit);
    let groups = Groups::of(fit, &rows, req.factor).checked_points(req)?;
    let covariate = var_values(fit, req.covariate);
    let (rows, groups) = (&rows, &groups);
    // Each block's residuals (and fitted values) are computed as the block is read.
    let candidates = |at: Range<usize>| {
        let fitted = match req.covariate {
            Some(_) => std::borrow::Cow::Borrowed(&[][..]),
            None => fit.fitted_values(at.clone()),
        };
        let residuals = fit.residuals(at.clone());
        let start = at.start;
        let covariate = &covariate;
        at.filter_map(move |k| {
            let i = rows.index.get(k)?;
            let group = groups.group(k)?;
            let x = match req.covariate {
                Some(_) => covariate.get(i).copied(),
                None => fitted.get(k - start).copied(),
            }
            .unwrap_or(f64::NAN);
            let y = residuals.get(k - start).copied()?;
            (x.is_finite() && y.is_finite()).then_some(Point { group, x, y })
        })
    };
    let Thinned {
        points,
        step: k,
        total: n,
        ..
    } = thinned(rows.index.len(), candidates);
    let note = thinned_note(k, n);
    let against = match &req.covariate_name {
        Some(x) => x.clone(),
        None => "fitted values".to_string(),
    };
    // A weighted model's residuals are the weighted ones, sqrt(w) times the residual.
    let weighted = if fit.is_weighted() { "weighted " } else { "" };
    let alt = format!(
        "Scatter of the {weighted}residuals of {} against {}{}, with a horizontal line at zero{}.",
        req.response_name,
        against,
        marked_by(req),
        note,
    );
    let caption = format!(
        "{}esiduals against {against}{note}",
        if weighted.is_empty() {
            "R"
        } else {
            "Weighted r"
        }
    );
    let chart = Chart {
        x_label: match &req.covariate_label {
            Some(l) => l.clone(),
            None => format!("fitted {}", req.response_label),
        },
        y_label: format!("{weighted}residual of {}", req.response_label),
        legend_title: req.factor_name.clone(),
        groups: groups.legend(),
        points,
        guides: vec![Guide::Horizontal {
            y: 0.0,
            label: "zero".to_string(),
        }],
        ..Chart::default()
    };
    Ok(Drawn {
        svg: super::chart::render(&chart)?,
        alt,
        caption,
    })
}

/// `plot quantiles`: normal quantile plot of standardized residuals with the y = x line.
/// Standardized (internally studentized) residual r = e / (s sqrt(1 - h)); theoretical
/// quantiles at Blom's plotting positions (i - 3/8) / (n + 1/4) (Blom 1958, "Statistical
/// Estimates and Transformed Beta-Variables", Wiley).
pub fn quantiles(fit: &Fit, req: &Request) -> Result<Drawn, PlotError> {
    let d = fit.diagnostics();
    let rows = Rows::of(fit);
    let groups = Groups::of(fit, &rows, req.factor).checked_points(req)?;
    let mut r: Vec<(f64, usize)> = Vec::new();
    let (residuals, leverage) = (fit.residuals(0..d.len()), fit.leverages(0..d.len()));
    // A row of leverage 1 has a standardized residual of 0/0: it is left out and counted.
    let mut undefined = 0usize;
    for ((e, h), g) in residuals.iter().zip(leverage.iter()).zip(groups.rows()) {
        if let Some(g) = g {
            let v = d.standardized(*e, *h);
            if v.is_finite() {
                r.push((v, g));
            } else {
                undefined += 1;
            }
        }
    }
    let exact = fit.summary().sigma <= 0.0;
    let left_out = undefined_note(undefined, "standardized residual", exact);
    r.sort_by(|a, b| a.0.total_cmp(&b.0).then(a.1.cmp(&b.1)));
    let n = r.len();
    let normal = Normal::new(0.0, 1.0).map_err(|_| PlotError::NothingToDraw)?;
    let nf = n as f64;
    let mut points: Vec<Point> = r
        .iter()
        .enumerate()
        .map(|(i, (v, g))| Point {
            group: *g,
            x: normal.inverse_cdf((i as f64 + 1.0 - 0.375) / (nf + 0.25)),
            y: *v,
        })
        .collect();
    let k = thin(&mut points);
    let note = thinned_note(k, n);
    let alt = format!(
        "Normal quantile plot of the standardized residuals of {} against normal quantiles at Blom's plotting positions{}, with the line y = x{}.{}",
        req.response_name,
        marked_by(req),
        note,
        left_out.sentence
    );
    let weighted = if fit.is_weighted() { "weighted " } else { "" };
    let caption = format!(
        "Normal quantiles of standardized {weighted}residuals{note}{}",
        left_out.clause
    );
    let chart = Chart {
        x_label: "normal quantile (Blom)".to_string(),
        y_label: format!("standardized {weighted}residual"),
        legend_title: req.factor_name.clone(),
        groups: groups.legend(),
        points,
        guides: vec![Guide::Identity {
            label: "y = x".to_string(),
        }],
        ..Chart::default()
    };
    Ok(Drawn {
        svg: super::chart::render(&chart)?,
        alt,
        caption,
    })
}

/// `plot means`: adjusted means with their confidence intervals per level.
pub fn means(fit: &Fit, req: &Request) -> Result<Drawn, PlotError> {
    let fname = req.factor_name.clone().ok_or(PlotError::NoFactor)?;
    let at: Vec<(String, f64)> = Vec::new();
    let means = fit
        .means(&fname, &at, MEANS_LEVEL)
        .map_err(PlotError::Model)?;
    let labels: Vec<String> = means.iter().map(|m| m.level.clone()).collect();
    if labels.len() > super::MAX_LEVELS {
        return Err(PlotError::TooManyLevels {
            factor: fname,
            levels: labels.len(),
        });
    }
    let intervals = means
        .iter()
        .enumerate()
        .map(|(i, m)| Interval {
            group: i,
            x: i as f64,
            centre: m.mean,
            lower: m.lower,
            upper: m.upper,
        })
        .collect();
    let adjusted = at_means(fit);
    let others = if fit.has_other_factors(&fname) {
        ", other factors averaged with equal weights"
    } else {
        ""
    };
    let alt = format!(
        "Adjusted means of {} for each {} with 95% confidence intervals{}{}.{}",
        req.response_name,
        fname,
        adjusted,
        others,
        repeat_note(labels.len(), Named::OnTheAxis)
    );
    let caption = format!(
        "Adjusted means of {} by {fname}, 95% intervals{}",
        req.response_name,
        repeat_clause(labels.len(), Named::OnTheAxis)
    );
    let chart = Chart {
        x_label: fname.clone(),
        y_label: format!("adjusted mean of {}", req.response_label),
        legend_title: Some(fname),
        groups: labels.clone(),
        categories: Some(labels),
        intervals,
        ..Chart::default()
    };
    Ok(Drawn {
        svg: super::chart::render(&chart)?,
        alt,
        caption,
    })
}

/// `plot interaction M for A by B`: the adjusted mean of every cell of A and B with its 95%
/// interval, A's levels along the axis and one line (colour and marker shape) per level of B,
/// each group's intervals set a little apart so that they do not hide each other. A cell
/// whose mean the design does not determine is left out, and the caption says so.
pub fn interaction(fit: &Fit, req: &Request) -> Result<Drawn, PlotError> {
    let fname = req.factor_name.clone().ok_or(PlotError::NoFactor)?;
    let bname = req.by_name.clone().ok_or(PlotError::NoFactor)?;
    let cells = fit
        .cell_means(&fname, &bname, &[], MEANS_LEVEL)
        .map_err(PlotError::Model)?;
    let mut a_levels: Vec<String> = Vec::new();
    let mut b_levels: Vec<String> = Vec::new();
    for c in &cells {
        if !a_levels.contains(&c.first) {
            a_levels.push(c.first.clone());
        }
        if !b_levels.contains(&c.second) {
            b_levels.push(c.second.clone());
        }
    }
    for (name, k) in [(&fname, a_levels.len()), (&bname, b_levels.len())] {
        if k > super::MAX_LEVELS {
            return Err(PlotError::TooManyLevels {
                factor: name.clone(),
                levels: k,
            });
        }
    }
    let g = b_levels.len().max(1) as f64;
    // Dodge: the groups' intervals spread over a fifth of the space between categories.
    let dodge = |j: usize| (j as f64 - (g - 1.0) / 2.0) * (0.2 / g.max(2.0));
    let mut intervals = Vec::new();
    let mut curves = Vec::new();
    let mut missing = 0;
    for (j, b) in b_levels.iter().enumerate() {
        let mut line = Vec::new();
        for (i, a) in a_levels.iter().enumerate() {
            let Some(c) = cells.iter().find(|c| &c.first == a && &c.second == b) else {
                continue;
            };
            if c.not_estimable.is_some() || !c.mean.is_finite() {
                missing += 1;
                continue;
            }
            let x = i as f64 + dodge(j);
            intervals.push(Interval {
                group: j,
                x,
                centre: c.mean,
                lower: c.lower,
                upper: c.upper,
            });
            line.push((x, c.mean));
        }
        if line.len() > 1 {
            curves.push(Curve {
                group: Some(j),
                points: line,
            });
        }
    }
    if intervals.is_empty() {
        return Err(PlotError::NothingToDraw);
    }
    let adjusted = at_means(fit);
    let gaps = match missing {
        0 => String::new(),
        1 => " One cell's mean is not estimable from this design and is left out.".to_string(),
        k => format!(" {k} cells' means are not estimable from this design and are left out."),
    };
    let alt = format!(
        "Adjusted means of {} for each combination of {} (along the axis) and {} (one line and marker shape per level) with 95% confidence intervals{}.{}{}",
        req.response_name,
        fname,
        bname,
        adjusted,
        gaps,
        repeat_note(b_levels.len(), Named::AtLineEnds)
    );
    let caption = format!(
        "Adjusted means of {} by {fname} and {bname}, 95% intervals{}",
        req.response_name,
        repeat_clause(b_levels.len(), Named::AtLineEnds)
    );
    let chart = Chart {
        x_label: fname,
        y_label: format!("adjusted mean of {}", req.response_label),
        legend_title: Some(bname),
        groups: b_levels,
        categories: Some(a_levels),
        intervals,
        curves,
        group_lines: true,
        ..Chart::default()
    };
    Ok(Drawn {
        svg: super::chart::render(&chart)?,
        alt,
        caption,
    })
}

/// `plot influence`: Cook's distance by data-file row, with the 4/n line. Beyond
/// [`MAX_POINTS`] rows, the rows are cut into that many consecutive runs and the largest
/// distance of each run is drawn, so that no influential row disappears.
pub fn influence(fit: &Fit, req: &Request) -> Result<Drawn, PlotError> {
    let d = fit.diagnostics();
    let (residuals, leverage) = (fit.residuals(0..d.len()), fit.leverages(0..d.len()));
    let rows = Rows::of(fit);
    let groups = Groups::of(fit, &rows, req.factor).checked_points(req)?;
    let mut points = Vec::new();
    let lines = &fit.spec().row_numbers;
    let row_line = |i: usize| lines.get(i).unwrap_or(i);
    // A row of leverage 1 has a Cook's distance of 0/0: it is left out and counted.
    let mut undefined = 0usize;
    for ((r, c), g) in rows
        .index
        .iter()
        .map(row_line)
        .zip(d.cooks_distances(&residuals, &leverage))
        .zip(groups.rows())
    {
        match (g, c.is_finite()) {
            (Some(g), true) => points.push(Point {
                group: g,
                x: r as f64,
                y: c,
            }),
            (Some(_), false) => undefined += 1,
            (None, _) => {}
        }
    }
    let left_out = undefined_note(undefined, "Cook's distance", fit.summary().sigma <= 0.0);
    let n = d.len();
    let shown = points.len();
    let note = if shown > MAX_POINTS {
        let run = shown.div_ceil(MAX_POINTS);
        let mut kept = Vec::with_capacity(MAX_POINTS);
        for chunk in points.chunks(run) {
            if let Some(p) = chunk.iter().max_by(|a, b| a.y.total_cmp(&b.y)) {
                kept.push(*p);
            }
        }
        points = kept;
        format!(
            " (largest of each run of {run} consecutive rows shown, {} rows)",
            thousands(shown)
        )
    } else {
        String::new()
    };
    let threshold = if n > 0 { 4.0 / n as f64 } else { 0.0 };
    let above = d
        .cooks_distances(&residuals, &leverage)
        .filter(|c| c.is_finite() && *c > threshold)
        .count();
    let alt = format!(
        "Cook's distance of each observation of {} by row number in the data file{}, with a horizontal line at 4/n = {}; rows above it: {} of {}{}.{}",
        req.response_name,
        marked_by(req),
        short_number(threshold),
        above,
        n,
        note,
        left_out.sentence
    );
    let caption = format!("Cook's distance by row{note}{}", left_out.clause);
    let chart = Chart {
        x_label: "row in data file".to_string(),
        y_label: "Cook's distance".to_string(),
        legend_title: req.factor_name.clone(),
        groups: groups.legend(),
        points,
        y_from_zero: true,
        guides: vec![Guide::Horizontal {
            y: threshold,
            label: format!("4/n = {}", short_number(threshold)),
        }],
        ..Chart::default()
    };
    Ok(Drawn {
        svg: super::chart::render(&chart)?,
        alt,
        caption,
    })
}

/// A number with three significant digits, for labels.
fn short_number(v: f64) -> String {
    if v == 0.0 || !v.is_finite() {
        return format!("{v}");
    }
    if v.abs() < 1e-3 {
        return format!("{v:.2e}");
    }
    let digits = (2 - v.abs().log10().floor() as i32).max(0) as usize;
    format!("{v:.digits$}")
}

/// `plot groups`: the raw response by level, spread sideways by a fixed low-discrepancy
/// sequence, with each level's raw mean as a bar.
pub fn groups(fit: &Fit, req: &Request) -> Result<Drawn, PlotError> {
    let fname = req.factor_name.clone().ok_or(PlotError::NoFactor)?;
    let rows = Rows::of(fit);
    let ys = rows.response(fit);
    let groups = Groups::of(fit, &rows, req.factor).checked(req)?;
    let k = groups.labels.len();
    let mut count = vec![0usize; k];
    let mut sum = vec![0.0; k];
    let mut points = Vec::new();
    for (y, g) in ys.iter().zip(groups.rows()) {
        let (Some(g), true) = (g, y.is_finite()) else {
            continue;
        };
        let (Some(c), Some(s)) = (count.get_mut(g), sum.get_mut(g)) else {
            continue;
        };
        let offset = ((*c as f64 + 1.0) * GOLDEN).fract() - 0.5;
        *c += 1;
        *s += y;
        points.push(Point {
            group: g,
            x: g as f64 + offset * JITTER_WIDTH,
            y: *y,
        });
    }
    let n = points.len();
    let curves = count
        .iter()
        .zip(&sum)
        .enumerate()
        .filter(|(_, (c, _))| **c > 0)
        .map(|(g, (c, s))| {
            let m = s / *c as f64;
            Curve {
                group: None,
                points: vec![(g as f64 - MEAN_BAR, m), (g as f64 + MEAN_BAR, m)],
            }
        })
        .collect();
    let kk = thin(&mut points);
    let note = thinned_note(kk, n);
    let alt = format!(
        "Dot plot of {} for each {}, points spread sideways by a fixed sequence, with a bar at each level's raw mean{}.{}",
        req.response_name,
        fname,
        note,
        repeat_note(k, Named::OnTheAxis)
    );
    let caption = format!(
        "{} by {fname}{note}{}",
        req.response_name,
        repeat_clause(k, Named::OnTheAxis)
    );
    let chart = Chart {
        x_label: fname.clone(),
        y_label: req.response_label.clone(),
        legend_title: Some(fname),
        groups: groups.labels.clone(),
        categories: Some(groups.labels),
        points,
        curves,
        neutral_curve_label: Some("level mean".to_string()),
        ..Chart::default()
    };
    Ok(Drawn {
        svg: super::chart::render(&chart)?,
        alt,
        caption,
    })
}

/// The caption's words for where adjusted means hold the covariates (", with x at its
/// mean"), or nothing for a model without covariates.
fn at_means(fit: &Fit) -> String {
    let covs: Vec<String> = fit.covariate_means().into_iter().map(|(n, _)| n).collect();
    match covs.len() {
        0 => String::new(),
        1 => format!(", with {} at its mean", covs.join(", ")),
        _ => format!(", with {} at their means", covs.join(", ")),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Invented points over several blocks: three groups in an irregular pattern, with rows
    /// that yield no point.
    fn point_at(k: usize) -> Option<Point> {
        let h = k.wrapping_mul(2_654_435_761) % 97;
        (h % 11 != 0).then_some(Point {
            group: h % 3,
            x: (k % 1000) as f64 * 0.5 - h as f64,
            y: h as f64,
        })
    }

    #[test]
    fn block_thinning_keeps_the_points_of_one_pass_thinning() {
        for n in [0, 10, 2_999, 70_000, 3 * crate::parallel::BLOCK_ROWS + 17] {
            let mut all: Vec<Point> = (0..n).filter_map(point_at).collect();
            let total = all.len();
            let mut ranges = vec![(f64::INFINITY, f64::NEG_INFINITY); 3];
            for p in &all {
                let r = &mut ranges[p.group];
                *r = (r.0.min(p.x), r.1.max(p.x));
            }
            let step = thin(&mut all);
            let t = thinned(n, |at: Range<usize>| at.filter_map(point_at));
            assert_eq!(t.points, all, "n = {n}");
            assert_eq!((t.step, t.total), (step, total), "n = {n}");
            // Groups after the last one with a point have no entry.
            let mut got = t.ranges.clone();
            got.resize(3, (f64::INFINITY, f64::NEG_INFINITY));
            assert_eq!(got, ranges, "n = {n}");
        }
    }
}
