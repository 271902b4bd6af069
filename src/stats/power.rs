//! Power and sample size of the F test that compares K groups in a one-factor design with C
//! covariates: the computation behind `plan`.
//!
//! With group sizes n_i (N in all), Cohen's effect size f (the SD of the group means about
//! their mean, weighted by group size, over the SD within groups without covariates), and
//! covariates that explain a fraction R^2 of the variance within groups:
//!
//! ```text
//! df1 = K - 1,   df2 = N - K - C,   lambda = N f^2 / (1 - R^2),
//! power = P(F'(df1, df2, lambda) > F(1 - alpha; df1, df2))
//! ```
//!
//! (J. Cohen, Statistical Power Analysis for the Behavioral Sciences, 2nd ed., 1988,
//! chapter 8, for f and lambda = N f^2; the covariates shrink the error variance by the
//! factor 1 - R^2, which treats them as balanced across the groups.) The power rises with
//! the number per group and with lambda, so the smallest number per group reaching a
//! target power, and the smallest f detected with it, are found by search.

use std::fmt;

use super::ncf;

/// Most subjects per group (per unit of the allocation ratio) that a search tries before
/// it says the target cannot be reached: ten million, far beyond any trial.
pub const MAX_PER_GROUP: u64 = 10_000_000;

/// A power this close to 1 is shown as it is when the noncentrality lies beyond what the
/// distribution function computes: the power there exceeds the power at the largest
/// noncentrality computed, so it lies between that and 1.
const CERTAIN: f64 = 1e-12;

/// Smallest size of any group: with fewer than two in a group there is no variation
/// within it to speak of.
const MIN_GROUP: u64 = 2;

/// A one-factor design: how many groups, covariates and how they are allotted.
#[derive(Debug, Clone, PartialEq)]
pub struct Design {
    /// Number of groups K (at least 2).
    pub groups: u64,
    /// Number of covariates C.
    pub covariates: u64,
    /// Fraction of the variance within groups that the covariates explain, in [0, 1).
    pub r_squared: f64,
    /// Significance level of the test, in (0, 1).
    pub alpha: f64,
    /// Relative group sizes (whole numbers, one per group); empty for equal groups. With a
    /// ratio, "n" counts per unit of it: ratio 2:1:1 and n = 10 make groups of 20, 10, 10.
    pub ratio: Vec<u64>,
}

/// The power of one design at one size, with the quantities behind it.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Power {
    /// Number per group (per unit of the ratio).
    pub n: u64,
    /// Total number N.
    pub total: u64,
    pub df1: u64,
    pub df2: u64,
    /// Noncentrality lambda = N f^2 / (1 - R^2).
    pub lambda: f64,
    /// Critical value of F at the design's alpha.
    pub critical: f64,
    /// P(F' > critical).
    pub power: f64,
}

/// Why a plan has no answer.
#[derive(Debug, Clone, PartialEq)]
pub enum PlanError {
    /// The effect is zero: every size has power alpha.
    NoEffect,
    /// No size up to [`MAX_PER_GROUP`] reaches the target power.
    Unreachable { target: f64, power_at_max: f64 },
    /// The number per group leaves no degrees of freedom for error.
    TooFew { n: u64, least: u64 },
    /// The target power is not above alpha (which any test reaches with no effect) or not
    /// below 1.
    TargetOutOfRange { target: f64, alpha: f64 },
    /// No effect size reaches the target with this many (the noncentrality needed exceeds
    /// what the search tries).
    NoDetectableEffect { target: f64 },
    /// The noncentrality lies beyond what the distribution function computes, and the power
    /// there is not yet indistinguishable from 1.
    BeyondRange { lambda: f64 },
}

impl fmt::Display for PlanError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            PlanError::NoEffect => {
                write!(f, "the effect is zero, so no number of subjects can detect it")
            }
            PlanError::Unreachable {
                target,
                power_at_max,
            } => write!(
                f,
                "even {MAX_PER_GROUP} per group give a power of only {power_at_max:.3}, short of {target}"
            ),
            PlanError::TooFew { n, least } => write!(
                f,
                "{n} per group leave no degrees of freedom for error; the design needs at least {least}"
            ),
            PlanError::TargetOutOfRange { target, alpha } => write!(
                f,
                "a target power of {target} is not between the test's level ({alpha}) and 1"
            ),
            PlanError::NoDetectableEffect { target } => write!(
                f,
                "no effect size reaches a power of {target} with this design"
            ),
            PlanError::BeyondRange { lambda } => write!(
                f,
                "the noncentrality {lambda:e} lies beyond the {:e} up to which covey computes the noncentral F",
                ncf::MAX_NONCENTRALITY
            ),
        }
    }
}

impl core::error::Error for PlanError {}

impl Design {
    /// Units of allocation: the sum of the ratio, or the number of groups.
    pub fn units(&self) -> u64 {
        if self.ratio.is_empty() {
            self.groups
        } else {
            self.ratio.iter().sum()
        }
    }

    /// The size of each group with `n` per group (per unit of the ratio).
    pub fn group_sizes(&self, n: u64) -> Vec<u64> {
        if self.ratio.is_empty() {
            vec![n; self.groups as usize]
        } else {
            self.ratio.iter().map(|r| r.saturating_mul(n)).collect()
        }
    }

    /// Each group's share of the total (equal shares without a ratio).
    pub fn shares(&self) -> Vec<f64> {
        let units = self.units() as f64;
        if self.ratio.is_empty() {
            vec![1.0 / self.groups as f64; self.groups as usize]
        } else {
            self.ratio.iter().map(|&r| r as f64 / units).collect()
        }
    }

    /// The smallest number per group (per unit of the ratio) the design allows: every group
    /// has at least [`MIN_GROUP`] and at least one degree of freedom is left for error.
    pub fn least_n(&self) -> u64 {
        let smallest_share = self.ratio.iter().copied().min().unwrap_or(1).max(1);
        let mut n = MIN_GROUP.div_ceil(smallest_share);
        // N - K - C >= 1.
        let needed = self.groups + self.covariates + 1;
        n = n.max(needed.div_ceil(self.units().max(1)));
        n
    }

    /// The power with `n` per group (per unit of the ratio) at effect size `f`.
    pub fn power(&self, f: f64, n: u64) -> Result<Power, PlanError> {
        let least = self.least_n();
        if n < least {
            return Err(PlanError::TooFew { n, least });
        }
        let total = n.saturating_mul(self.units());
        let df1 = self.groups - 1;
        let df2 = total - self.groups - self.covariates;
        let critical = ncf::f_upper_point(self.alpha, df1 as f64, df2 as f64);
        let lambda = total as f64 * f * f / (1.0 - self.r_squared);
        let power = if lambda > ncf::MAX_NONCENTRALITY || lambda.is_nan() {
            // The power rises with lambda: the power at the largest computed one bounds it.
            let bound = ncf::sf(critical, df1 as f64, df2 as f64, ncf::MAX_NONCENTRALITY);
            if bound >= 1.0 - CERTAIN {
                bound
            } else {
                return Err(PlanError::BeyondRange { lambda });
            }
        } else {
            ncf::sf(critical, df1 as f64, df2 as f64, lambda)
        };
        Ok(Power {
            n,
            total,
            df1,
            df2,
            lambda,
            critical,
            power,
        })
    }

    /// The smallest number per group (per unit of the ratio) whose power at effect `f`
    /// reaches `target`, with that power. The power rises with n, so the search doubles n
    /// until the target is passed and then halves the bracket.
    pub fn n_for_power(&self, f: f64, target: f64) -> Result<Power, PlanError> {
        if !(target > self.alpha && target < 1.0) {
            return Err(PlanError::TargetOutOfRange {
                target,
                alpha: self.alpha,
            });
        }
        if f == 0.0 || f.is_nan() {
            return Err(PlanError::NoEffect);
        }
        let mut lo = self.least_n();
        let first = self.power(f, lo)?;
        if first.power >= target {
            return Ok(first);
        }
        // Invariant: power(lo) < target <= power(hi).
        let mut hi = lo;
        let found = loop {
            let next = hi.saturating_mul(2).min(MAX_PER_GROUP);
            let p = self.power(f, next)?;
            if p.power >= target {
                hi = next;
                break p;
            }
            if next >= MAX_PER_GROUP {
                return Err(PlanError::Unreachable {
                    target,
                    power_at_max: p.power,
                });
            }
            lo = next;
            hi = next;
        };
        let mut best = found;
        while hi - lo > 1 {
            let mid = lo + (hi - lo) / 2;
            let p = self.power(f, mid)?;
            if p.power >= target {
                hi = mid;
                best = p;
            } else {
                lo = mid;
            }
        }
        Ok(best)
    }

    /// The smallest effect size f detected with power `target` with `n` per group (per
    /// unit of the ratio): the noncentrality reaching the target, turned back into f.
    pub fn detectable_f(&self, n: u64, target: f64) -> Result<(f64, Power), PlanError> {
        if !(target > self.alpha && target < 1.0) {
            return Err(PlanError::TargetOutOfRange {
                target,
                alpha: self.alpha,
            });
        }
        let at_zero = self.power(0.0, n)?;
        let lambda = ncf::noncentrality_for_power(
            target,
            at_zero.critical,
            at_zero.df1 as f64,
            at_zero.df2 as f64,
            ncf::MAX_NONCENTRALITY,
        );
        if !lambda.is_finite() {
            return Err(PlanError::NoDetectableEffect { target });
        }
        let f = (lambda * (1.0 - self.r_squared) / at_zero.total as f64).sqrt();
        let p = self.power(f, n)?;
        Ok((f, p))
    }
}

/// Cohen's f of group means: their SD about the mean (each weighted by its group's share)
/// over the SD within groups. With equal shares the divisor is K.
pub fn effect_of_means(means: &[f64], shares: &[f64], sd: f64) -> f64 {
    let mean: f64 = means.iter().zip(shares).map(|(m, w)| m * w).sum();
    let var: f64 = means
        .iter()
        .zip(shares)
        .map(|(m, w)| w * (m - mean) * (m - mean))
        .sum();
    var.sqrt() / sd
}

#[cfg(test)]
mod tests {
    use super::*;

    fn design(k: u64, c: u64, r2: f64) -> Design {
        Design {
            groups: k,
            covariates: c,
            r_squared: r2,
            alpha: 0.05,
            ratio: Vec::new(),
        }
    }

    #[test]
    fn effect_of_means_uses_divisor_k() {
        // Means 1, 2, 3: SD about 2 with divisor 3 is sqrt(2/3).
        let f = effect_of_means(&[1.0, 2.0, 3.0], &[1.0 / 3.0; 3], 2.0);
        assert!((f - (2.0f64 / 3.0).sqrt() / 2.0).abs() < 1e-15);
    }

    #[test]
    fn the_least_n_leaves_error_degrees_of_freedom() {
        assert_eq!(design(2, 0, 0.0).least_n(), 2);
        // 2 groups and 3 covariates: N - 5 >= 1 needs N >= 6, so 3 per group.
        assert_eq!(design(2, 3, 0.5).least_n(), 3);
        let mut d = design(3, 0, 0.0);
        d.ratio = vec![2, 1, 1];
        assert_eq!(d.least_n(), 2);
        assert_eq!(d.group_sizes(5), vec![10, 5, 5]);
        assert!(matches!(
            design(2, 3, 0.5).power(0.3, 2),
            Err(PlanError::TooFew { least: 3, .. })
        ));
    }

    #[test]
    fn the_found_n_is_the_smallest() {
        let d = design(3, 1, 0.4);
        let p = d.n_for_power(0.25, 0.9).unwrap_or_else(|e| panic!("{e}"));
        assert!(p.power >= 0.9);
        let below = d.power(0.25, p.n - 1).unwrap_or_else(|e| panic!("{e}"));
        assert!(below.power < 0.9);
    }

    #[test]
    fn the_detectable_effect_gives_the_target_power() {
        let d = design(4, 2, 0.3);
        let (f, p) = d.detectable_f(25, 0.8).unwrap_or_else(|e| panic!("{e}"));
        assert!(f > 0.0);
        assert!((p.power - 0.8).abs() < 1e-9, "{}", p.power);
    }

    #[test]
    fn a_huge_noncentrality_gives_power_one_not_a_hang() {
        let d = design(3, 1, 0.999_999_9);
        let p = d.power(1.0, 1_000_000).unwrap_or_else(|e| panic!("{e}"));
        assert!(p.power > 1.0 - 1e-12 && p.lambda > ncf::MAX_NONCENTRALITY);
        let p = d.power(f64::INFINITY, 10).unwrap_or_else(|e| panic!("{e}"));
        assert!(p.power > 1.0 - 1e-12);
    }

    #[test]
    fn impossible_plans_are_errors() {
        let d = design(2, 0, 0.0);
        assert_eq!(d.n_for_power(0.0, 0.8), Err(PlanError::NoEffect));
        assert!(matches!(
            d.n_for_power(0.3, 0.04),
            Err(PlanError::TargetOutOfRange { .. })
        ));
        assert!(matches!(
            d.n_for_power(1e-5, 0.8),
            Err(PlanError::Unreachable { .. })
        ));
    }
}
