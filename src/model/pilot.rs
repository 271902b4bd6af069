//! What a fitted pilot model tells the plan of the next trial: its residual SD, and how much
//! of the variance left by its other terms its covariates explain (the squared partial
//! correlation of the response with the covariates, given the factors).

use std::fmt;

use super::fit::Fit;
use super::Var;

/// A pilot model's variance, split by its covariates.
#[derive(Debug, Clone, PartialEq)]
pub struct Pilot {
    /// Rows the model was fitted to.
    pub n: usize,
    /// Residual SD of the model.
    pub sigma: f64,
    /// Its residual degrees of freedom.
    pub df_residual: usize,
    /// Names of the covariate terms: terms made of numeric columns only.
    pub covariates: Vec<String>,
    /// Degrees of freedom of the covariate terms (estimated columns).
    pub covariate_df: usize,
    /// The fraction of the residual sum of squares of the model without its covariate terms
    /// that the covariate terms take up: (RSS without - RSS with) / RSS without. With one
    /// covariate this is the square of its partial correlation with the response.
    pub partial_r_squared: f64,
    /// With one covariate column, the sign of its coefficient (the sign of the partial
    /// correlation).
    pub sign: Option<f64>,
    /// Whether the model is weighted: its residual SD is then that of a row of weight 1.
    pub weighted: bool,
}

/// Why a model cannot serve as a pilot.
#[derive(Debug, Clone, PartialEq, Eq)]
pub enum PilotError {
    /// A term mixes a factor and a covariate: the covariate's slope differs by group, so
    /// there is no one correlation to plan with.
    SeparateSlopes { term: String },
}

impl fmt::Display for PilotError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            PilotError::SeparateSlopes { term } => write!(
                f,
                "the term {term} lets a covariate's slope differ by group, so the model gives no single correlation to plan with", term = crate::report::markdown::code(term)
            ),
        }
    }
}

impl core::error::Error for PilotError {}

impl Fit {
    /// The model read as a pilot: residual SD, and the covariates' share of the variance
    /// its factors leave. The covariate terms' sum of squares is the rise in RSS when they
    /// are dropped, read off the fit's triangular factor as for Type II sums of squares.
    pub fn pilot(&self) -> Result<Pilot, PilotError> {
        let spec = &self.spec;
        let e = &self.eng;
        let names = self.term_names();
        let mut kept_cols: Vec<usize> = if spec.intercept { vec![0] } else { Vec::new() };
        let mut covariate_cols = Vec::new();
        let mut covariates = Vec::new();
        for (t, term) in spec.terms.iter().enumerate() {
            let numeric = term
                .parts
                .iter()
                .filter(|p| matches!(spec.vars.get(p.var), Some(Var::Numeric { .. })))
                .count();
            let cols = e.term_cols.get(t).cloned().unwrap_or_default();
            let name = names.get(t).cloned().unwrap_or_default();
            if numeric == 0 {
                kept_cols.extend(cols);
            } else if numeric == term.parts.len() {
                covariate_cols.extend(cols);
                covariates.push(name);
            } else {
                return Err(PilotError::SeparateSlopes { term: name });
            }
        }
        let (covariate_df, covariate_ss) = e.extra_ss(&e.a, &kept_cols, &covariate_cols);
        let rss_without = self.rss + covariate_ss.max(0.0);
        let partial_r_squared = if covariate_df == 0 || rss_without <= 0.0 {
            0.0
        } else {
            (covariate_ss / rss_without).clamp(0.0, 1.0)
        };
        let sign = match covariate_cols.as_slice() {
            [c] if self.kept.contains(c) => {
                let col = e.cols.get(*c).map(|x| x.name.clone()).unwrap_or_default();
                self.coefficients(0.95)
                    .iter()
                    .find(|k| k.name == col)
                    .map(|k| if k.estimate < 0.0 { -1.0 } else { 1.0 })
            }
            _ => None,
        };
        Ok(Pilot {
            n: self.lay.used.len(),
            sigma: self.sigma,
            df_residual: self.df_res,
            covariates,
            covariate_df,
            partial_r_squared,
            sign,
            weighted: spec.weights.is_some(),
        })
    }
}
