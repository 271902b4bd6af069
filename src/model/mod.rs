//! The linear-model engine: least-squares fits of a response on factors and numeric
//! covariates, with sums of squares of Type I, II and III, adjusted means, pairwise
//! comparisons, contrasts, slopes within groups, Johnson-Neyman regions and row diagnostics.
//!
//! The engine knows nothing of files or of covey's language: the caller builds a
//! [`ModelSpec`] from its data set and calls [`fit`]. All results are typed numbers.
//!
//! Numerics: the design columns, as the model writes them, are expanded in monomials of
//! centred, scaled covariates and factor indicators (`basis.rs`), so that no power or product
//! of a covariate far from zero is ever formed; the triangular factor R of [W | y] is
//! accumulated by Householder QR over fixed row chunks. Every sub-model (the fit, each
//! ANOVA row, each test) is a reduction of selected columns through that R (`graded.rs`),
//! and every sum of squares is read off the response's coordinates along the columns it
//! adds; the normal equations are never formed.

use std::sync::Arc;

pub use crate::data::Code;

pub use crate::data::RowLines;

mod anova;
mod basis;
mod cause;
mod design;
pub mod dist;
mod fit;
mod graded;
mod means;
mod pilot;
mod qr;
mod slopes;

#[cfg(test)]
mod tests;

use std::fmt;

pub use anova::compare;
pub use cause::AliasCause;
pub(crate) use design::UsedRows;
pub use fit::{
    fit, fit_owned, working_bytes, Fit, COEFFICIENT_DIGITS_NOTE, MODEL_MEMORY_BUDGET,
    RESPONSE_SPREAD_MAX, RESPONSE_SPREAD_MIN,
};
pub use pilot::{Pilot, PilotError};

/// One input variable, aligned with the response row by row.
#[derive(Debug, Clone, PartialEq)]
pub enum Var {
    /// A numeric column; NaN marks a missing value.
    Numeric {
        /// Variable name as the user wrote it.
        name: String,
        /// Values, one per row (shared: models on the same data hold one copy).
        values: Arc<Vec<f64>>,
    },
    /// A factor: integer codes into `levels` (declared order; the first is the reference).
    Factor {
        /// Variable name.
        name: String,
        /// Level code of each row ([`Code::MISSING`] for a missing value).
        codes: Arc<Vec<Code>>,
        /// Level labels in declared order.
        levels: Vec<String>,
    },
}

impl Var {
    /// The variable's name.
    pub fn name(&self) -> &str {
        match self {
            Var::Numeric { name, .. } | Var::Factor { name, .. } => name,
        }
    }
    fn len(&self) -> usize {
        match self {
            Var::Numeric { values, .. } => values.len(),
            Var::Factor { codes, .. } => codes.len(),
        }
    }
}

/// A transform applied to a numeric part of a term.
#[derive(Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord)]
pub enum Transform {
    /// x itself.
    Identity,
    /// x^k (k >= 1).
    Power(u32),
    /// Natural logarithm (x > 0).
    Log,
    /// Square root (x >= 0).
    Sqrt,
}

/// One part of a term: a variable and, for numeric variables, a transform.
#[derive(Debug, Clone, PartialEq)]
pub struct Part {
    /// Index into [`ModelSpec::vars`].
    pub var: usize,
    /// Transform (use `Identity` for factors).
    pub transform: Transform,
}

/// A model term: the product of its parts (`group`, `x^2`, `group by x`, ...).
#[derive(Debug, Clone, PartialEq)]
pub struct TermSpec {
    /// The parts in written order.
    pub parts: Vec<Part>,
}

/// Everything the engine needs to fit one model.
#[derive(Debug, Clone, PartialEq)]
pub struct ModelSpec {
    /// The response (must be numeric).
    pub response: Var,
    /// Variables the terms refer to.
    pub vars: Vec<Var>,
    /// Terms in written order.
    pub terms: Vec<TermSpec>,
    /// Whether the model has an intercept.
    pub intercept: bool,
    /// The data-file line of each row (for messages and diagnostics).
    pub row_numbers: RowLines,
    /// The response values are given relative to this offset (0 for plain values): the
    /// response is `response_offset + values[i]`. The engine adds the offset back to the
    /// intercept, adjusted means, fitted values and every other estimate on the response
    /// scale (differences, slopes, sums of squares and residuals do not change), so that
    /// large responses such as 1000000000000.4 keep the digits that differ between rows.
    /// In a model without an intercept the offset is folded into the values before fitting.
    pub response_offset: f64,
    /// Case weights (a [`Var::Numeric`], aligned with the response): weighted least squares,
    /// each row's squared residual counted `w` times. A row of weight 0 is left out of the
    /// fit (and of the residual df), a missing weight leaves its row out like any missing
    /// value, and a negative or infinite weight is an error.
    pub weights: Option<Var>,
}

/// Which kind of sums of squares an analysis-of-variance table holds.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum SsType {
    /// Sequential, in written term order.
    I,
    /// Each term after all terms that do not contain it.
    II,
    /// Each term after all others, factors in sum-to-zero coding.
    III,
}

/// Multiplicity adjustment for pairwise comparisons.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Adjust {
    /// Tukey-Kramer (studentized range).
    Tukey,
    /// Holm step-down (no simultaneous limits).
    Holm,
    /// Bonferroni.
    Bonferroni,
    /// Sidak.
    Sidak,
    /// Dunnett's many-to-one comparisons (only against a control).
    Dunnett,
    /// No adjustment.
    None,
}

/// The side of a comparison against a control.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Side {
    /// Two-sided.
    Both,
    /// One-sided: is each level above the control?
    Above,
    /// One-sided: is each level below the control?
    Below,
}

/// An adjusted mean of one cell of two factors.
#[derive(Debug, Clone, PartialEq)]
pub struct CellMean {
    /// Level of the first factor.
    pub first: String,
    /// Level of the second factor.
    pub second: String,
    /// Fitted rows in the cell.
    pub rows: usize,
    /// The mean (NaN when not estimable) with SE, df and limits.
    pub mean: f64,
    /// Standard error.
    pub se: f64,
    /// Degrees of freedom.
    pub df: usize,
    /// Lower confidence limit.
    pub lower: f64,
    /// Upper confidence limit.
    pub upper: f64,
    /// Why the mean is not estimable, when it is not.
    pub not_estimable: Option<String>,
}

/// Overall statistics of a fit.
#[derive(Debug, Clone, PartialEq)]
pub struct FitSummary {
    /// Rows used.
    pub n: usize,
    /// Rows dropped for missing values.
    pub dropped_missing: usize,
    /// Rows left out because their weight is 0.
    pub dropped_zero_weight: usize,
    /// Model degrees of freedom (estimated coefficients, less the intercept).
    pub df_model: usize,
    /// Residual degrees of freedom.
    pub df_residual: usize,
    /// Residual standard deviation.
    pub sigma: f64,
    /// Coefficient of determination.
    pub r_squared: f64,
    /// Adjusted R^2.
    pub adj_r_squared: f64,
    /// Overall F statistic (None for a model with no column besides the intercept).
    pub f: Option<f64>,
    /// Upper-tail p-value of `f`.
    pub p: Option<f64>,
    /// Akaike information criterion.
    pub aic: f64,
    /// Bayesian information criterion.
    pub bic: f64,
    /// Residual sum of squares.
    pub rss: f64,
    /// Total sum of squares (about the mean with an intercept, about 0 without).
    pub tss: f64,
}

/// One estimated coefficient.
#[derive(Debug, Clone, PartialEq)]
pub struct Coefficient {
    /// Coefficient name, e.g. `group = B by x`.
    pub name: String,
    /// Estimate.
    pub estimate: f64,
    /// Standard error.
    pub se: f64,
    /// t statistic.
    pub t: f64,
    /// Two-sided p-value.
    pub p: f64,
    /// Lower confidence limit.
    pub lower: f64,
    /// Upper confidence limit.
    pub upper: f64,
}

/// One row of an analysis-of-variance table.
#[derive(Debug, Clone, PartialEq)]
pub struct AnovaRow {
    /// Term name.
    pub term: String,
    /// Index of the term in the model.
    pub term_index: usize,
    /// Degrees of freedom.
    pub df: usize,
    /// Sum of squares.
    pub ss: f64,
    /// Mean square (NaN, undefined, when df = 0).
    pub ms: f64,
    /// F statistic (None when df = 0).
    pub f: Option<f64>,
    /// Upper-tail p-value (None when df = 0).
    pub p: Option<f64>,
    /// Partial eta squared, SS / (SS + RSS) (NaN, undefined, when df = 0).
    pub partial_eta_sq: f64,
}

/// A note attached to an analysis-of-variance table.
#[derive(Debug, Clone, PartialEq)]
pub enum Note {
    /// A Type III test of a term containing a factor compares groups where the named
    /// covariate is 0, because the model also has a term of that factor by the covariate.
    AtCovariateZero {
        /// Index of the tested term.
        term: usize,
        /// Name of the tested term.
        term_name: String,
        /// The covariate (part name, e.g. `x`).
        covariate: String,
    },
    /// A test of a covariate term that depends on where another covariate, or the covariate
    /// itself, is 0: the Type III test of `x` when `x by z` is in the model (its slope where
    /// z = 0), or the Type II or III test of `x` when `x^2` is (its slope where x = 0).
    AtOrigin {
        /// Index of the tested term.
        term: usize,
        /// Name of the tested term.
        term_name: String,
        /// "II" or "III".
        kind: &'static str,
        /// The covariate whose origin the test depends on (part name).
        covariate: String,
        /// The term of the model that makes it so.
        because: String,
    },
}

impl fmt::Display for Note {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            Note::AtCovariateZero { term_name, covariate, .. } => write!(
                f,
                "the Type III test of {term_name} compares groups where {covariate} = 0, because the model lets the effect depend on {covariate}; centre {covariate} or give adjusted means at chosen values to compare elsewhere", term_name = crate::report::markdown::code(term_name)
            ),
            Note::AtOrigin {
                term_name,
                kind,
                covariate,
                because,
                ..
            } => write!(
                f,
                "the Type {kind} test of {term_name} is of its effect where {covariate} = 0, because the model also has {because}; it changes when {covariate} is shifted, so centre {covariate} to test it at the mean of {covariate}",
                term_name = crate::report::markdown::code(term_name),
                because = crate::report::markdown::code(because),
            ),
        }
    }
}

/// An analysis-of-variance table.
#[derive(Debug, Clone, PartialEq)]
pub struct Anova {
    /// One row per term.
    pub rows: Vec<AnovaRow>,
    /// Residual degrees of freedom.
    pub residual_df: usize,
    /// Residual sum of squares.
    pub residual_ss: f64,
    /// Total degrees of freedom (n - 1 with an intercept, n without).
    pub total_df: usize,
    /// Total sum of squares.
    pub total_ss: f64,
    /// Notes on the interpretation of rows.
    pub notes: Vec<Note>,
}

/// The F test of a smaller model nested in a bigger one.
#[derive(Debug, Clone, PartialEq)]
pub struct Comparison {
    /// (residual df, RSS) of the smaller then the bigger model.
    pub rows: [(usize, f64); 2],
    /// Residual df of the smaller model (same as `rows[0].0`).
    pub small_df_residual: usize,
    /// RSS of the smaller model.
    pub small_rss: f64,
    /// Residual df of the bigger model.
    pub big_df_residual: usize,
    /// RSS of the bigger model.
    pub big_rss: f64,
    /// Difference in residual df.
    pub df: usize,
    /// Difference in RSS.
    pub ss: f64,
    /// F statistic.
    pub f: f64,
    /// Upper-tail p-value.
    pub p: f64,
    /// True when the first model named was the bigger one (the smaller model is always
    /// reported first).
    pub swapped: bool,
    /// Number of rows both models are fitted to.
    pub n: usize,
    /// The terms of the bigger model that the smaller one lacks, in the bigger model's order
    /// (`intercept` first when only the bigger has one); `None` when the smaller model's terms
    /// are not all among the bigger one's by name, and the nesting was found in the columns.
    pub added: Option<Vec<String>>,
}

/// An adjusted (least-squares) mean.
#[derive(Debug, Clone, PartialEq)]
pub struct AdjustedMean {
    /// Level label.
    pub level: String,
    /// Adjusted mean.
    pub mean: f64,
    /// Standard error.
    pub se: f64,
    /// Degrees of freedom (residual).
    pub df: usize,
    /// Lower confidence limit.
    pub lower: f64,
    /// Upper confidence limit.
    pub upper: f64,
    /// Why the mean is not estimable from this design, when it is not (the numbers are
    /// then NaN).
    pub not_estimable: Option<String>,
}

/// A pairwise comparison of adjusted means (first minus second).
#[derive(Debug, Clone, PartialEq)]
pub struct Pair {
    /// The level of the `within` factor the comparison is made in, if any.
    pub within: Option<String>,
    /// The error estimate of a p computed by numerical integration (Dunnett), else 0.
    pub p_error: f64,
    /// First level.
    pub first: String,
    /// Second level.
    pub second: String,
    /// Difference of adjusted means.
    pub estimate: f64,
    /// Standard error.
    pub se: f64,
    /// t statistic.
    pub t: f64,
    /// Degrees of freedom.
    pub df: usize,
    /// Adjusted p-value.
    pub p: f64,
    /// Lower limit (None for Holm, which has no simultaneous limits).
    pub lower: Option<f64>,
    /// Upper limit.
    pub upper: Option<f64>,
    /// Why the difference is not estimable from this design, when it is not (the numbers
    /// are then NaN).
    pub not_estimable: Option<String>,
}

/// A contrast of adjusted means.
#[derive(Debug, Clone, PartialEq)]
pub struct Contrast {
    /// Estimate.
    pub estimate: f64,
    /// Standard error.
    pub se: f64,
    /// t statistic.
    pub t: f64,
    /// Degrees of freedom.
    pub df: usize,
    /// Two-sided p-value.
    pub p: f64,
    /// Lower confidence limit.
    pub lower: f64,
    /// Upper confidence limit.
    pub upper: f64,
    /// Whether the weights sum to 0 (a caller may warn when they do not).
    pub weights_sum_to_zero: bool,
}

/// The slope of a covariate within one level of a factor.
#[derive(Debug, Clone, PartialEq)]
pub struct Slope {
    /// Level label.
    pub level: String,
    /// Slope.
    pub slope: f64,
    /// Standard error.
    pub se: f64,
    /// t statistic.
    pub t: f64,
    /// Degrees of freedom.
    pub df: usize,
    /// Two-sided p-value.
    pub p: f64,
    /// Lower confidence limit.
    pub lower: f64,
    /// Upper confidence limit.
    pub upper: f64,
    /// Why the slope is not estimable (its numbers are then NaN): the covariate takes a
    /// single value within the level, or the level's rows leave it undetermined.
    pub not_estimable: Option<String>,
}

/// Slopes within levels and the test that they are equal.
#[derive(Debug, Clone, PartialEq)]
pub struct Slopes {
    /// The covariate's name.
    pub covariate: String,
    /// One row per level.
    pub rows: Vec<Slope>,
    /// F statistic of the test of equal slopes.
    pub equality_f: f64,
    /// Numerator df.
    pub df1: usize,
    /// Denominator df.
    pub df2: usize,
    /// Upper-tail p-value.
    pub equality_p: f64,
    /// True when the model lacked the factor-by-covariate term and was refitted with it.
    pub refitted: bool,
    /// The other variables that share a term with the covariate, on which the slopes then
    /// depend: (name, whether it is a factor). The slopes are taken with covariates at their
    /// means and each level of a factor counted equally.
    pub depends_on: Vec<(String, bool)>,
}

/// The set of covariate values where a difference is significant.
#[derive(Debug, Clone, PartialEq)]
pub enum RegionKind {
    /// Significant for every value.
    Everywhere,
    /// Significant for no value.
    Nowhere,
    /// Significant below the bound.
    Below(f64),
    /// Significant above the bound.
    Above(f64),
    /// Significant strictly between the two bounds.
    Between(f64, f64),
    /// Significant below the first or above the second bound.
    Outside(f64, f64),
    /// The difference is not determined by the design (an empty cell, say): why.
    NotEstimable(String),
}

/// A Johnson-Neyman region for one pair of levels.
#[derive(Debug, Clone, PartialEq)]
pub struct Region {
    /// First level.
    pub first: String,
    /// Second level.
    pub second: String,
    /// The significant set.
    pub kind: RegionKind,
    /// The bounds, ascending (0, 1 or 2 of them).
    pub boundaries: Vec<f64>,
    /// True when the significant set lies between the bounds (or is everything).
    pub significant_inside: bool,
    /// The smaller boundary (for `Above`, the only one), if any.
    pub lower_bound: Option<f64>,
    /// The larger boundary (for `Below`, the only one), if any.
    pub upper_bound: Option<f64>,
    /// Where the two levels differ significantly, in words (bounds referred to by name).
    pub description: String,
    /// Smallest covariate value in the fitted rows.
    pub observed_min: f64,
    /// Largest covariate value in the fitted rows.
    pub observed_max: f64,
    /// True when the model was refitted with the factor-by-covariate term.
    pub refitted: bool,
}

/// What row diagnostics (NaN where undefined, e.g. studentized residuals at leverage 1, one
/// per fitted row in order; [`Fit::row_number`] gives each row's line in the data file) need
/// beside the rows' values.
///
/// No row values are kept: residuals, fitted values and leverages are computed from the
/// design when needed ([`Fit::residuals`], [`Fit::fitted_values`], [`Fit::leverages`]), a
/// block at a time. Cook's distance and the externally studentized residual are closed forms
/// of a row's residual and leverage and these scalars ([`Diagnostics::cook`],
/// [`Diagnostics::student`]), by the same expressions wherever they are evaluated, so to the
/// same bits.
#[derive(Debug, Clone, PartialEq)]
pub struct Diagnostics {
    /// Number of fitted rows.
    pub(crate) n: usize,
    /// Number of estimated coefficients (p in Cook's distance).
    pub(crate) rank: f64,
    /// Residual variance s^2.
    pub(crate) s2: f64,
    /// Residual sum of squares.
    pub(crate) rss: f64,
    /// Residual degrees of freedom.
    pub(crate) df_res: usize,
}

/// Something the user should know about a fit that does not stop it.
#[derive(Debug, Clone, PartialEq)]
pub enum ModelWarning {
    /// An interaction is in the model without one of the lower-order terms it contains.
    MarginalityBroken {
        /// Index of the interaction term.
        term: usize,
        /// Its name.
        term_name: String,
        /// The missing lower-order term.
        missing: String,
    },
    /// A numeric covariate takes few distinct integer values.
    FewDistinctValues {
        /// First term using it.
        term: usize,
        /// Variable name.
        variable: String,
        /// Number of distinct values.
        distinct: usize,
    },
    /// Rows were dropped for missing values.
    RowsDropped {
        /// How many.
        count: usize,
    },
    /// Columns were linear combinations of earlier ones and were left out.
    Aliased {
        /// Names of the aliased coefficients.
        names: Vec<String>,
        /// Terms they belong to (same order).
        terms: Vec<Option<usize>>,
        /// Why.
        cause: AliasCause,
    },
    /// The model fits the data exactly: the coefficients are exact, the residual SD and
    /// standard errors 0, and tests undefined.
    ExactFit,
    /// A level of a factor has no rows in the fitted data and is left out of this model.
    EmptyLevel {
        /// First term using the factor.
        term: usize,
        /// Factor name.
        factor: String,
        /// The level.
        level: String,
    },
}

impl fmt::Display for ModelWarning {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            ModelWarning::MarginalityBroken { term_name, missing, .. } => write!(
                f,
                "the term {term_name} is in the model without {missing}, which it contains; its test and coefficients then mix in that effect; add {missing} unless this is intended", missing = crate::report::markdown::code(missing), term_name = crate::report::markdown::code(term_name)
            ),
            ModelWarning::FewDistinctValues { variable, distinct, .. } => write!(
                f,
                "the covariate {variable} takes only {distinct} distinct whole-number values; if these are categories, declare it a factor", variable = crate::report::markdown::code(variable)
            ),
            ModelWarning::RowsDropped { count } => {
                write!(f, "{count} row(s) with a missing value in a variable of the model were left out")
            }
            ModelWarning::Aliased { names, cause, .. } => write!(
                f,
                "these coefficients cannot be estimated and were left out: {}; {cause}",
                names.join(", ")
            ),
            ModelWarning::ExactFit => write!(
                f,
                "the model fits the data exactly (the residual sum of squares is 0 to rounding): the coefficients are exact, the residual SD and the standard errors are 0, and t and F tests and their p-values are undefined; check that the response is not computed from the predictors"
            ),
            ModelWarning::EmptyLevel { factor, level, .. } => write!(
                f,
                "level {level} of factor {factor} has no rows in the fitted data and is left out of this model", factor = crate::report::markdown::code(factor), level = crate::report::markdown::code(level)
            ),
        }
    }
}

/// Why a model cannot be fitted or a result cannot be computed.
#[derive(Debug, Clone, PartialEq)]
pub enum ModelError {
    /// The response is a factor.
    ResponseNotNumeric,
    /// A variable's length differs from the response's.
    LengthMismatch {
        /// Variable name.
        variable: String,
        /// Rows of the response.
        expected: usize,
        /// Rows of the variable.
        found: usize,
    },
    /// `row_numbers` does not have one entry per row.
    RowNumbersMismatch {
        /// Rows of the response.
        expected: usize,
        /// Entries given.
        found: usize,
    },
    /// A part refers to a variable that does not exist.
    VarIndexOutOfRange {
        /// Term index.
        term: usize,
        /// The bad index.
        index: usize,
    },
    /// A term has no parts.
    EmptyTerm {
        /// Term index.
        term: usize,
    },
    /// A term uses the same part twice.
    RepeatedPart {
        /// Term index.
        term: usize,
    },
    /// A transform was applied to a factor.
    TransformOnFactor {
        /// Term index.
        term: usize,
    },
    /// x^0 was asked for.
    ZeroPower {
        /// Term index.
        term: usize,
    },
    /// The same term appears twice.
    DuplicateTerm {
        /// Index of the second occurrence.
        term: usize,
    },
    /// A factor code does not name a level.
    FactorCodeOutOfRange {
        /// Factor name.
        variable: String,
        /// Data-file line.
        row: usize,
    },
    /// An infinite value.
    NonFiniteValue {
        /// Variable name.
        variable: String,
        /// Data-file line.
        row: usize,
    },
    /// log of a value <= 0.
    LogOfNonPositive {
        /// Term index (None for a value given for adjusted means).
        term: Option<usize>,
        /// Variable name.
        variable: String,
        /// Data-file line (None for a given value).
        row: Option<usize>,
        /// The value.
        value: f64,
    },
    /// sqrt of a negative value.
    SqrtOfNegative {
        /// Term index (None for a value given for adjusted means).
        term: Option<usize>,
        /// Variable name.
        variable: String,
        /// Data-file line (None for a given value).
        row: Option<usize>,
        /// The value.
        value: f64,
    },
    /// The model has no columns at all.
    EmptyModel,
    /// A table of every pair of levels asked for a factor with more than
    /// [`MAX_PAIRED_LEVELS`] levels.
    TooManyPairs {
        /// Factor name.
        factor: String,
        /// Its levels.
        levels: usize,
    },
    /// Fitting the model would need more working memory than
    /// [`fit::MODEL_MEMORY_BUDGET`].
    TooLarge {
        /// Coefficients of the design.
        coefficients: usize,
        /// Working memory it would need, in MiB.
        megabytes: usize,
    },
    /// No row is left after dropping missing values.
    NoRows {
        /// Rows of the data.
        rows: usize,
        /// Each column the model uses (response first, then its variables in order) with the
        /// number of rows on which it is missing.
        lost: Vec<(String, usize)>,
        /// The weights column, if any, with the number of rows on which it is missing or 0.
        weights: Option<(String, usize)>,
    },
    /// The response is constant over the fitted rows.
    ResponseZeroVariance,
    /// The response's values spread over a range whose squares doubles cannot hold (see
    /// [`fit::RESPONSE_SPREAD_MIN`]).
    ResponseOutOfRange {
        /// Largest minus smallest response.
        width: f64,
    },
    /// A case weight is negative or infinite.
    BadWeight {
        /// The weights' column.
        variable: String,
        /// Line in the data file.
        row: usize,
        /// The weight.
        value: f64,
    },
    /// Robust (HC3) standard errors are undefined: a row has leverage 1.
    RobustLeverageOne {
        /// Line in the data file of the first such row.
        row: usize,
    },
    /// A comparison against a control names a level the factor does not have (with rows).
    UnknownControl {
        /// The factor.
        factor: String,
        /// The level given.
        level: String,
    },
    /// The factor `within` is the factor compared.
    WithinSameFactor {
        /// The factor.
        factor: String,
    },
    /// A covariate is constant over the fitted rows.
    CovariateZeroVariance {
        /// First term using it.
        term: usize,
        /// Variable name.
        variable: String,
    },
    /// A factor has fewer than two levels with rows.
    TooFewLevels {
        /// First term using it (None when asked for means etc.).
        term: Option<usize>,
        /// Factor name.
        factor: String,
        /// Levels with rows.
        levels: usize,
    },
    /// Fewer rows than coefficients.
    FewerRowsThanCoefficients {
        /// Rows used.
        rows: usize,
        /// Coefficients.
        coefficients: usize,
    },
    /// No residual degrees of freedom are left.
    ZeroResidualDf,
    /// A statistic needs an error variance and the data leave none (they are fitted
    /// exactly).
    PerfectFit,
    /// Type III asked for on a design with aliased columns.
    TypeIIIWithAliased {
        /// The aliased coefficients.
        aliased: Vec<String>,
        /// Why they are aliased.
        cause: Box<AliasCause>,
    },
    /// No variable of that name.
    UnknownVariable {
        /// The name.
        name: String,
    },
    /// The variable is numeric where a factor is needed.
    NotAFactor {
        /// The name.
        name: String,
        /// The model's factors, in the order they enter it, for the hint.
        factors: Vec<String>,
    },
    /// The factor is not in the model.
    FactorNotInModel {
        /// The name.
        factor: String,
    },
    /// A covariate given a value is not a numeric covariate of the model.
    CovariateNotInModel {
        /// The name.
        name: String,
    },
    /// The covariate of a slope is not a numeric covariate of the model.
    NoSuchCovariate {
        /// The name.
        name: String,
        /// The model's numeric covariates, in variable order, for the hint.
        covariates: Vec<String>,
    },
    /// The model has no numeric covariate.
    NoCovariate,
    /// Several covariates and none named.
    AmbiguousCovariate {
        /// The candidates.
        candidates: Vec<String>,
    },
    /// The covariate enters the model through a transform (slopes need it linear).
    NonlinearCovariate {
        /// The name.
        covariate: String,
    },
    /// A quantity is not estimable from this design (aliased columns).
    NotEstimable {
        /// What was asked for (a level or pair label).
        what: String,
        /// Why, in the user's terms.
        why: String,
    },
    /// Contrast weights do not match the number of levels.
    WeightsLength {
        /// Levels.
        expected: usize,
        /// Weights given.
        found: usize,
    },
    /// A confidence level or alpha outside (0, 1).
    BadLevel {
        /// The value.
        value: f64,
    },
    /// A level name is not a level of the factor.
    UnknownLevel {
        /// Factor.
        factor: String,
        /// Level.
        level: String,
    },
    /// Neither model is nested in the other.
    NotNested,
    /// The two models were fitted on different rows.
    DifferentRows,
    /// The two models of a comparison have different case weights.
    DifferentWeights,
    /// The two models have different responses.
    DifferentResponse,
    /// The two models have the same column space.
    SameColumnSpace,
}

/// From this estimate of working memory on (1 TiB, in MiB) a refused model is said to need
/// "far more" than the limit: the estimates saturate there, and the digits mean nothing.
const FAR_MORE_MIB: usize = 1 << 20;

impl fmt::Display for ModelError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        use ModelError as E;
        match self {
            E::ResponseNotNumeric => write!(f, "the response is a factor; a linear model needs a numeric response"),
            E::LengthMismatch { variable, expected, found } => write!(f, "variable {variable} has {found} rows but the response has {expected}; all columns must come from the same rows", variable = crate::report::markdown::code(variable)),
            E::RowNumbersMismatch { expected, found } => write!(f, "internal: {found} row numbers given for {expected} rows"),
            E::VarIndexOutOfRange { index, .. } => write!(f, "this term refers to variable number {index}, which does not exist"),
            E::EmptyTerm { .. } => write!(f, "this term has no variables"),
            E::RepeatedPart { .. } => write!(f, "this term uses the same variable twice; write a power such as x^2 instead"),
            E::TransformOnFactor { .. } => write!(f, "a power, log or sqrt cannot be applied to a factor"),
            E::ZeroPower { .. } => write!(f, "x^0 is the constant 1, which the intercept already is; remove the term"),
            E::DuplicateTerm { .. } => write!(f, "this term appears twice in the model; remove one"),
            E::FactorCodeOutOfRange { variable, row } => write!(f, "factor {variable} has an unknown level at line {row}", variable = crate::report::markdown::code(variable)),
            E::NonFiniteValue { variable, row } => write!(f, "{variable} is infinite at line {row}; correct the value or mark it missing", variable = crate::report::markdown::code(variable)),
            E::LogOfNonPositive { variable, row: Some(r), value, .. } => write!(f, "log({variable}) is undefined at line {r}, where {variable} = {value}; log needs positive values (shift the variable or drop the row)"),
            E::LogOfNonPositive { variable, row: None, value, .. } => write!(f, "log({variable}) is undefined at {variable} = {value}; give a positive value"),
            E::SqrtOfNegative { variable, row: Some(r), value, .. } => write!(f, "sqrt({variable}) is undefined at line {r}, where {variable} = {value}; sqrt needs values >= 0"),
            E::SqrtOfNegative { variable, row: None, value, .. } => write!(f, "sqrt({variable}) is undefined at {variable} = {value}; give a value >= 0"),
            E::EmptyModel => write!(f, "the model has no intercept and no terms; add a term or the intercept"),
            E::TooManyPairs { factor, levels } => write!(f, "{factor} has {levels} levels, which make {} pairs; a table of every pair is made for at most {MAX_PAIRED_LEVELS} levels ({} pairs); compare chosen levels instead (`between A and B` in `table regions` and in `report M differences`, or `table contrast`)", levels * levels.saturating_sub(1) / 2, MAX_PAIRED_LEVELS * (MAX_PAIRED_LEVELS - 1) / 2, factor = crate::report::markdown::code(factor)),
            E::TooLarge { coefficients, megabytes } => {
                // Past 1 TiB (where the estimates saturate) a number of MiB says nothing more.
                let limit = fit::MODEL_MEMORY_BUDGET >> 20;
                match *coefficients {
                    usize::MAX => write!(f, "the model has more coefficients than can be counted")?,
                    p => write!(f, "the model has {p} coefficients")?,
                }
                if *megabytes >= FAR_MORE_MIB {
                    write!(f, ", and fitting it would take far more working memory than covey's limit of {limit} MiB (over 1 TiB)")?;
                } else {
                    write!(f, ", and fitting it would take about {megabytes} MiB of working memory, more than covey's limit of {limit} MiB")?;
                }
                write!(f, "; use fewer terms, or factors with fewer levels (merge rare levels, or treat a many-level grouping as a covariate if it is one)")
            }
            E::NoRows { rows, lost, weights } => {
                let code = crate::report::markdown::code;
                let mut named: Vec<String> = lost
                    .iter()
                    .filter(|(_, k)| *k > 0)
                    .map(|(name, k)| format!("{} is missing on {k}", code(name)))
                    .collect();
                if let Some((name, k)) = weights.as_ref().filter(|(_, k)| *k > 0) {
                    named.push(format!("the weight {} is missing or 0 on {k}", code(name)));
                }
                write!(f, "no row has every value the model needs, so none is left to fit (of the {rows} rows, {})", named.join(", "))?;
                write!(f, "; a row is left out when any of its columns in the model is missing: fill in the values, or leave the emptiest columns out of the model")
            }
            E::BadWeight { variable, row, value } => write!(f, "the weight {variable} is {value} at line {row}; weights must be 0 or more (0 leaves a row out)", variable = crate::report::markdown::code(variable)),
            E::RobustLeverageOne { row } => write!(f, "robust (HC3) standard errors are undefined because the row at line {row} has leverage 1 (it alone determines a coefficient, such as the only row of a level); remove that row or leave out `robust`"),
            E::UnknownControl { factor, level } => write!(f, "{level} is not a level of {factor} with rows in the fitted data", factor = crate::report::markdown::code(factor), level = crate::report::markdown::code(level)),
            E::WithinSameFactor { factor } => write!(f, "`within` names the factor compared ({factor}); name another factor of the model", factor = crate::report::markdown::code(factor)),
            E::ResponseZeroVariance => write!(f, "the response has the same value in every fitted row, so there is nothing to explain"),
            E::ResponseOutOfRange { width } => write!(f, "the response's values spread over {width:.1e} (largest minus smallest), too {} for their sums of squares to be held as numbers (covey needs a spread between {:e} and {:e}); rescale the response, for example {} it by 1e{}", if *width > 1.0 { "wide" } else { "narrow" }, fit::RESPONSE_SPREAD_MIN, fit::RESPONSE_SPREAD_MAX, if *width > 1.0 { "divide" } else { "multiply" }, width.log10().round().abs()),
            E::CovariateZeroVariance { variable, .. } => write!(f, "covariate {variable} has the same value in every fitted row, so its effect cannot be estimated; remove it from the model", variable = crate::report::markdown::code(variable)),
            E::TooFewLevels { factor, levels, .. } => write!(f, "factor {factor} has {levels} level(s) with rows in the fitted data; at least two are needed", factor = crate::report::markdown::code(factor)),
            E::FewerRowsThanCoefficients { rows, coefficients } => write!(f, "the model has {coefficients} coefficients but only {rows} rows; use fewer terms or more data"),
            E::ZeroResidualDf => write!(f, "no residual degrees of freedom are left (as many independent coefficients as rows), so no error variance can be estimated; use fewer terms or more data"),
            E::PerfectFit => write!(f, "the data are fitted exactly (residual sum of squares 0 up to rounding), so there is no error variance for this test; check that the response is not computed from the predictors"),
            E::TypeIIIWithAliased { aliased, cause } => write!(f, "Type III sums of squares test each term against a full-rank design, but these coefficients are not estimable: {}, because {cause}; {}", aliased.join(", "), cause.remedy()),
            E::UnknownVariable { name } => write!(f, "there is no variable {name}", name = crate::report::markdown::code(name)),
            E::NotAFactor { name, factors } => match factors.as_slice() {
                [] => write!(f, "{name} is numeric, not a factor, and the model has no factor", name = crate::report::markdown::code(name)),
                some => write!(
                    f,
                    "{name} is numeric, not a factor; the model's factors: {}",
                    some.iter().map(|x| crate::report::markdown::code(x).to_string()).collect::<Vec<_>>().join(", "), name = crate::report::markdown::code(name)
                ),
            },
            E::FactorNotInModel { factor } => write!(f, "factor {factor} is not in this model; add it as a term first", factor = crate::report::markdown::code(factor)),
            E::CovariateNotInModel { name } => write!(f, "{name} is not a numeric covariate of this model, so it cannot be given a value", name = crate::report::markdown::code(name)),
            E::NoSuchCovariate { name, covariates } => match covariates.as_slice() {
                [] => write!(f, "{name} is not a covariate of this model, which has no numeric covariate", name = crate::report::markdown::code(name)),
                some => write!(
                    f,
                    "{name} is not a numeric covariate of this model; its covariates: {}",
                    some.iter().map(|x| crate::report::markdown::code(x).to_string()).collect::<Vec<_>>().join(", "), name = crate::report::markdown::code(name)
                ),
            },
            E::NoCovariate => write!(f, "the model has no numeric covariate"),
            E::AmbiguousCovariate { candidates } => write!(f, "the model has several covariates ({}); name the one you mean", candidates.join(", ")),
            E::NonlinearCovariate { covariate } => write!(f, "{covariate} enters the model through a power, log or sqrt, so it has no single slope; use it untransformed", covariate = crate::report::markdown::code(covariate)),
            E::NotEstimable { what, why } => write!(f, "{what} is not estimable from this design: {why}"),
            E::WeightsLength { expected, found } => write!(f, "{found} weights given but the factor has {expected} levels in this model; give one weight per level"),
            E::BadLevel { value } => write!(f, "{value} is not between 0 and 1"),
            E::UnknownLevel { factor, level } => write!(f, "{level} is not a level of {factor} in this model", factor = crate::report::markdown::code(factor), level = crate::report::markdown::code(level)),
            E::NotNested => write!(f, "neither model is nested in the other (each has columns that are not combinations of the other's columns); compare a model only with one that extends it"),
            E::DifferentWeights => write!(f, "the two models have different case weights (or only one has weights), so their residual sums of squares are not on one scale; give both the same `weights`"),
            E::DifferentRows => write!(f, "the two models were fitted on different rows (missing values differ); fit both on the same rows"),
            E::DifferentResponse => write!(f, "the two models have different responses, so their residual sums of squares cannot be compared"),
            E::SameColumnSpace => write!(f, "the two models have the same columns, so there is nothing to test"),
        }
    }
}

impl core::error::Error for ModelError {}

/// Most levels of a factor whose every pair of levels a table compares (`table differences`, `table
/// regions` without `between`): 200 levels make 19,900 pairs, already more than anyone reads,
/// and each costs a studentized-range quantile.
pub const MAX_PAIRED_LEVELS: usize = 200;

/// Refuses a table of every pair of a factor's `levels` levels past [`MAX_PAIRED_LEVELS`].
pub(crate) fn check_pairs(factor: &str, levels: usize) -> Result<(), ModelError> {
    if levels > MAX_PAIRED_LEVELS {
        return Err(ModelError::TooManyPairs {
            factor: factor.to_string(),
            levels,
        });
    }
    Ok(())
}

impl ModelError {
    /// The index of the term at fault, when one term is.
    pub fn term(&self) -> Option<usize> {
        use ModelError as E;
        match self {
            E::VarIndexOutOfRange { term, .. }
            | E::EmptyTerm { term }
            | E::RepeatedPart { term }
            | E::TransformOnFactor { term }
            | E::ZeroPower { term }
            | E::DuplicateTerm { term }
            | E::CovariateZeroVariance { term, .. } => Some(*term),
            E::LogOfNonPositive { term, .. }
            | E::SqrtOfNegative { term, .. }
            | E::TooFewLevels { term, .. } => *term,
            _ => None,
        }
    }
}

impl ModelWarning {
    /// The index of the term concerned, when there is one (for aliased columns: the first).
    pub fn term(&self) -> Option<usize> {
        match self {
            ModelWarning::MarginalityBroken { term, .. }
            | ModelWarning::FewDistinctValues { term, .. }
            | ModelWarning::EmptyLevel { term, .. } => Some(*term),
            ModelWarning::Aliased { terms, .. } => terms.iter().flatten().next().copied(),
            ModelWarning::RowsDropped { .. } | ModelWarning::ExactFit => None,
        }
    }
}
