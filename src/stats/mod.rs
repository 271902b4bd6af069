//! Statistics beyond what the `statrs` crate provides: descriptive statistics of a sample
//! ([`describe`]), the studentized range distribution for Tukey-Kramer comparisons ([`tukey`]),
//! the Shapiro-Wilk test of normality ([`shapiro`]) and the Brown-Forsythe test of equal
//! variances ([`levene`]); the noncentral F distribution ([`ncf`]) and the power and sample
//! size of the F test of groups ([`power`]), for planning; the largest of correlated t
//! statistics ([`mvt`]), for comparisons with a control.

pub mod describe;
pub mod levene;
pub mod mvt;
pub mod ncf;
pub mod power;
pub mod shapiro;
pub mod tukey;

use std::fmt;

/// Why a test could not be computed.
#[derive(Debug, Clone, PartialEq)]
pub enum StatsError {
    /// The Shapiro-Wilk approximation used here holds for sample sizes from 3 to 5000 only.
    SampleSizeOutOfRange {
        /// Number of values given.
        n: usize,
        /// Smallest size allowed.
        min: usize,
        /// Largest size allowed.
        max: usize,
    },
    /// All values are equal, so the statistic is undefined.
    ZeroRange,
    /// A value is NaN or infinite.
    NonFinite,
    /// The test compares at least two groups; this many were given.
    TooFewGroups(usize),
    /// The group at this position (counting from 0) has no values.
    EmptyGroup(usize),
    /// Every value equals its group's median, so the within-group spread is zero; this also
    /// happens when no group has more than one value.
    ZeroWithinSpread,
}

impl fmt::Display for StatsError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            StatsError::SampleSizeOutOfRange { n, min, max } => write!(
                f,
                "sample size {n} is outside the range {min} to {max} for which the test is valid"
            ),
            StatsError::ZeroRange => write!(f, "all values are equal (zero range)"),
            StatsError::NonFinite => write!(f, "a value is missing or infinite"),
            StatsError::TooFewGroups(g) => {
                write!(f, "at least 2 groups are needed, {g} given")
            }
            StatsError::EmptyGroup(i) => write!(f, "group {} has no values", i + 1),
            StatsError::ZeroWithinSpread => write!(
                f,
                "the spread within groups is zero (every value equals its group median)"
            ),
        }
    }
}

impl core::error::Error for StatsError {}
