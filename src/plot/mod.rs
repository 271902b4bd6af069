//! Figures of fitted models, drawn as SVG with plotters: the data with fitted lines,
//! residuals, normal quantiles, adjusted means, influence and the raw data by level; and
//! the power curves of a plan ([`power`]).
//!
//! Every figure has the same width and look ([`style`]), a legend beside the panel whose
//! long names wrap, one colour and one marker shape per level (up to [`style::STYLES`]
//! levels), and is byte-for-byte the same on every run: no
//! random state, no hash-map order, the font embedded. At most
//! [`figures::MAX_POINTS`] markers are drawn; beyond that, points are thinned
//! deterministically and the caption says so.

pub mod chart;
pub mod figures;
pub mod power;
pub mod style;

use std::fmt;

use crate::lang::PlotKind;
use crate::model::{Fit, ModelError};

/// Most levels a figure of lines or of levels along the axis shows. Up to
/// [`style::STYLES`] levels each have their own colour and marker shape; beyond that the
/// styles repeat, and each line is labelled at its end, or each level stands at its own
/// place on the axis, which names it.
pub const MAX_LEVELS: usize = 14;

/// Most levels a scatter of points (residuals, quantiles, influence) tells apart: points
/// spread over the panel are told apart by colour and marker shape alone, so no more levels
/// than there are styles.
pub const MAX_POINT_LEVELS: usize = style::STYLES;

/// What a figure is asked for, with names already resolved against the model.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct Request {
    /// Index of the covariate (`of X`) in the model's variables.
    pub covariate: Option<usize>,
    pub covariate_name: Option<String>,
    /// Axis label of the covariate (name with unit).
    pub covariate_label: Option<String>,
    /// Index of the factor (`for F`) in the model's variables.
    pub factor: Option<usize>,
    pub factor_name: Option<String>,
    /// The second factor of an interaction figure (`by B`).
    pub by_name: Option<String>,
    pub response_name: String,
    /// Axis label of the response (name with unit).
    pub response_label: String,
}

/// A drawn figure: SVG text, alternative text and caption.
#[derive(Debug, Clone, PartialEq)]
pub struct Drawn {
    pub svg: String,
    pub alt: String,
    pub caption: String,
}

/// Why a figure could not be drawn.
#[derive(Debug, Clone, PartialEq)]
pub enum PlotError {
    /// The figure needs a covariate and none was given or found.
    NoCovariate,
    /// The figure needs a factor and none was given or found.
    NoFactor,
    /// The model could not compute what the figure shows.
    Model(ModelError),
    /// A prediction is not estimable (aliased columns).
    NotEstimable { what: String },
    /// The embedded font could not be read.
    Font,
    /// The drawing backend failed (its message).
    Drawing(String),
    /// There is nothing to draw.
    NothingToDraw,
    /// The factor has more levels than a figure can tell apart.
    TooManyLevels { factor: String, levels: usize },
    /// The factor has more levels than a scatter of points can tell apart.
    TooManyPointLevels { factor: String, levels: usize },
}

impl fmt::Display for PlotError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            PlotError::NoCovariate => write!(f, "this figure needs a covariate"),
            PlotError::NoFactor => write!(f, "this figure needs a factor"),
            PlotError::Model(e) => write!(f, "{e}"),
            PlotError::NotEstimable { what } => write!(f, "{what} is not estimable"),
            PlotError::Font => write!(f, "the embedded font could not be read"),
            PlotError::Drawing(m) => write!(f, "drawing failed: {m}"),
            PlotError::NothingToDraw => write!(f, "there is nothing to draw"),
            PlotError::TooManyLevels { factor, levels } => write!(
                f,
                "{factor} has {levels} levels; a figure tells at most {MAX_LEVELS} apart", factor = crate::report::markdown::code(factor)
            ),
            PlotError::TooManyPointLevels { factor, levels } => write!(
                f,
                "`{factor}` has {levels} levels; points are told apart by {MAX_POINT_LEVELS} colours and marker shapes at most: leave out `for {factor}` (all points alike), or draw `plot groups` (each level at its own place)"
            ),
        }
    }
}

impl core::error::Error for PlotError {}

/// Draws the figure `kind` of `fit`.
pub fn draw(kind: PlotKind, fit: &Fit, req: &Request) -> Result<Drawn, PlotError> {
    match kind {
        PlotKind::Lines => figures::lines(fit, req),
        PlotKind::Residuals => figures::residuals(fit, req),
        PlotKind::Quantiles => figures::quantiles(fit, req),
        PlotKind::Means => figures::means(fit, req),
        PlotKind::Influence => figures::influence(fit, req),
        PlotKind::Groups => figures::groups(fit, req),
        PlotKind::Interaction => figures::interaction(fit, req),
    }
}
