//! The noncentral F distribution (which statrs lacks), with the central F and chi-square
//! quantiles that planning needs, all to near double precision.
//!
//! The distribution function is the Poisson mixture of regularized incomplete beta functions
//!
//! ```text
//! P(F' <= x) = sum_j  e^(-mu) mu^j / j!  I_y(df1/2 + j, df2/2),   mu = lambda/2,
//!              y = df1 x / (df1 x + df2)
//! ```
//!
//! summed outward from the Poisson mode in both directions, as in Algorithm AS 310
//! (R. Chattamvelli and R. Shanmugam, "Computing the non-central beta distribution
//! function", Applied Statistics 46 (1997) 146-156): one incomplete beta function is
//! evaluated at the mode, and its neighbours follow from the recurrence
//! `I_y(a + 1, b) = I_y(a, b) - y^a (1 - y)^b / (a B(a, b))`. The sum stops when the Poisson
//! weight not yet visited, which bounds the error because every `I_y` lies in [0, 1], falls
//! below [`TAIL`]; the bound on the weight left beyond term j is the geometric one,
//! `p_(j+1) / (1 - mu / (j + 2))` above the mode and `p_j (j / mu) / (1 - j / mu)` below it.
//! Terms and weights are carried as logarithms, so that none underflows on the way.
//!
//! The incomplete beta function is the classical continued fraction (Abramowitz and Stegun,
//! Handbook of Mathematical Functions, 26.5.8), evaluated by the modified Lentz method
//! (W. H. Press et al., Numerical Recipes, 3rd ed., section 6.4), with its prefactor `x^a (1 - x)^b / B(a, b)` written without the cancellation of large
//! log-gamma values: for large parameters through Stirling's series with the difference of
//! the correction terms (as in Didonato and Morris, "Algorithm 708: significant digit
//! computation of the incomplete beta function ratios", ACM TOMS 18 (1992) 360-373), so
//! that df2 in the tens of thousands loses no digits.
//!
//! Checked in tests/plan.rs against scipy's noncentral F (tests/reference/ncf_reference.py)
//! to 1e-10 absolute over df1 1-20, df2 2-10,000 and noncentrality 0-400.

use statrs::function::gamma::{gamma_lr, ln_gamma};

/// Poisson weight left unvisited, at which the mixture sum stops. Each term lies in [0, 1],
/// so this bounds the truncation error on each side; it is far below the 1e-10 the CDF is
/// held to, and costs only a few terms more than a looser bound.
const TAIL: f64 = 1e-17;

/// Largest noncentrality computed. The sum visits about 20 sqrt(lambda / 2) terms, so this
/// bounds the work of one value at about 150,000 terms; beyond it the distribution function
/// is NaN, and callers that only need a bound use the power at this noncentrality, which the
/// power at any larger one exceeds.
pub const MAX_NONCENTRALITY: f64 = 1e8;

/// Relative change at which the continued fraction has converged: the spacing of doubles.
const CF_EPS: f64 = 1e-16;

/// Most terms of the continued fraction. It needs about the square root of the larger
/// parameter (about 3,000 at df2 = 2 x 10^7); beyond that the value is returned as it stands.
const CF_MAX_TERMS: usize = 200_000;

/// Parameters from which Stirling's series with seven correction terms is accurate to
/// 1e-17 (its first omitted term, 3617 / (122400 x^15), is below 3e-17 at 10).
const STIRLING_FROM: f64 = 10.0;

/// ln(2 pi) / 2.
const HALF_LN_2PI: f64 = 0.918_938_533_204_672_8;

/// The correction of Stirling's series: ln Gamma(x) - [(x - 1/2) ln x - x + ln(2 pi)/2], for
/// x >= [`STIRLING_FROM`] (Abramowitz and Stegun 6.1.41).
fn stirling_correction(x: f64) -> f64 {
    let r = 1.0 / x;
    let r2 = r * r;
    r * (1.0 / 12.0
        + r2 * (-1.0 / 360.0
            + r2 * (1.0 / 1260.0
                + r2 * (-1.0 / 1680.0
                    + r2 * (1.0 / 1188.0 + r2 * (-691.0 / 360_360.0 + r2 * (1.0 / 156.0)))))))
}

/// ln of the prefactor `x^a y^b / B(a, b)` of the incomplete beta function, where y = 1 - x
/// is passed separately so that it keeps its own digits.
fn ln_prefactor(a: f64, b: f64, x: f64, y: f64) -> f64 {
    let (small, large) = (a.min(b), a.max(b));
    if small >= STIRLING_FROM {
        // ln B(a, b) = ln(2 pi)/2 - ln(a + b)/2 + (a - 1/2) ln(a/(a+b)) + (b - 1/2) ln(b/(a+b))
        //              + w(a) + w(b) - w(a + b); the x^a y^b part joins the logarithms, which
        // leaves a ln(1 + d/a) + b ln(1 - d/b) with d = x b - y a: small near the mode, where
        // the value matters, and free of cancellation.
        let d = x * b - y * a;
        let omega = stirling_correction(a) + stirling_correction(b) - stirling_correction(a + b);
        a * (d / a).ln_1p() + b * (-d / b).ln_1p() + 0.5 * (a * b / (a + b)).ln()
            - HALF_LN_2PI
            - omega
    } else if large >= STIRLING_FROM {
        // Only the large parameter's log-gamma values are large; their difference comes from
        // Stirling's series. With s the small parameter (paired with xs) and l the large one
        // (paired with xl): ln B = ln Gamma(s) + (l - 1/2) ln(l/(s+l)) - s ln(s+l) + s
        //                          + w(l) - w(s + l).
        let (s, l, xs, xl) = if a < b { (a, b, x, y) } else { (b, a, y, x) };
        let d = xl * s - xs * l;
        s * (xs * (s + l)).ln() - s - ln_gamma(s) + l * (d / l).ln_1p() + 0.5 * (l / (s + l)).ln()
            - stirling_correction(l)
            + stirling_correction(s + l)
    } else {
        a * x.ln() + b * y.ln() - (ln_gamma(a) + ln_gamma(b) - ln_gamma(a + b))
    }
}

/// The continued fraction of I_x(a, b) (Numerical Recipes, 3rd ed., `betacf`), for
/// x < (a + 1) / (a + b + 2), where it converges quickly: I_x(a, b) = prefactor * cf / a.
fn beta_fraction(a: f64, b: f64, x: f64) -> f64 {
    let tiny = f64::MIN_POSITIVE / f64::EPSILON;
    let guard = |v: f64| if v.abs() < tiny { tiny } else { v };
    let (qab, qap, qam) = (a + b, a + 1.0, a - 1.0);
    let mut c = 1.0;
    let mut d = 1.0 / guard(1.0 - qab * x / qap);
    let mut h = d;
    for m in 1..=CF_MAX_TERMS {
        let m = m as f64;
        let m2 = 2.0 * m;
        let aa = m * (b - m) * x / ((qam + m2) * (a + m2));
        d = 1.0 / guard(1.0 + aa * d);
        c = guard(1.0 + aa / c);
        h *= d * c;
        let aa = -(a + m) * (qab + m) * x / ((a + m2) * (qap + m2));
        d = 1.0 / guard(1.0 + aa * d);
        c = guard(1.0 + aa / c);
        let step = d * c;
        h *= step;
        if (step - 1.0).abs() <= CF_EPS {
            break;
        }
    }
    h
}

/// The regularized incomplete beta function and its complement, (I_x(a, b), 1 - I_x(a, b)),
/// each computed without subtracting from 1 where it is the small one. `y` is 1 - x, given
/// by the caller with its own digits.
pub fn beta_reg_pair(a: f64, b: f64, x: f64, y: f64) -> (f64, f64) {
    if !(a > 0.0 && b > 0.0) || x.is_nan() || y.is_nan() {
        return (f64::NAN, f64::NAN);
    }
    if x <= 0.0 {
        return (0.0, 1.0);
    }
    if y <= 0.0 {
        return (1.0, 0.0);
    }
    if x < (a + 1.0) / (a + b + 2.0) {
        let p = (ln_prefactor(a, b, x, y).exp() * beta_fraction(a, b, x) / a).clamp(0.0, 1.0);
        (p, 1.0 - p)
    } else {
        let q = (ln_prefactor(b, a, y, x).exp() * beta_fraction(b, a, y) / b).clamp(0.0, 1.0);
        (1.0 - q, q)
    }
}

/// The pair (P(F' <= x), P(F' > x)) of the noncentral F distribution with `df1` and `df2`
/// degrees of freedom and noncentrality `lambda` (0 for the central F). NaN for parameters
/// outside the domain (degrees of freedom not positive, negative noncentrality) and for a
/// noncentrality above [`MAX_NONCENTRALITY`].
pub fn cdf_sf(x: f64, df1: f64, df2: f64, lambda: f64) -> (f64, f64) {
    if !(df1 > 0.0 && df2 > 0.0 && (0.0..=MAX_NONCENTRALITY).contains(&lambda)) || x.is_nan() {
        return (f64::NAN, f64::NAN);
    }
    if x <= 0.0 {
        return (0.0, 1.0);
    }
    if x == f64::INFINITY {
        return (1.0, 0.0);
    }
    let (a, b) = (df1 / 2.0, df2 / 2.0);
    let den = df1 * x + df2;
    let (y, yc) = (df1 * x / den, df2 / den);
    let mu = lambda / 2.0;
    if mu == 0.0 {
        return beta_reg_pair(a, b, y, yc);
    }
    let ln_mu = mu.ln();
    let (ln_y, ln_yc) = (y.ln(), yc.ln());
    // Start at the mode of the Poisson weights.
    let k = mu.floor();
    let ln_p_k = -mu + k * ln_mu - ln_gamma(k + 1.0);
    let (i_k, q_k) = beta_reg_pair(a + k, b, y, yc);
    // ln of t_j = y^(a+j) (1-y)^b / ((a+j) B(a+j, b)), the step from I(a+j) to I(a+j+1).
    let ln_t_k = ln_term(a + k, b, y, yc, ln_y, ln_yc);

    let mut cdf = 0.0;
    let mut sf = 0.0;
    // Upward from the mode: I falls by t_j at each step and its complement rises.
    let (mut i, mut q, mut ln_p, mut ln_t) = (i_k, q_k, ln_p_k, ln_t_k);
    let mut j = k;
    loop {
        let p = ln_p.exp();
        cdf += p * i;
        sf += p * q;
        let t = ln_t.exp();
        i = (i - t).max(0.0);
        q = (q + t).min(1.0);
        ln_t += ln_y + ((a + b + j) / (a + j + 1.0)).ln();
        ln_p += ln_mu - (j + 1.0).ln();
        j += 1.0;
        // Weight of every term from j on: at most p_j / (1 - mu / (j + 1)).
        if j + 1.0 > mu && ln_p.exp() / (1.0 - mu / (j + 1.0)) < TAIL {
            break;
        }
    }
    // Downward from the mode: I rises by t_(j-1) at each step.
    let (mut i, mut q, mut ln_p, mut ln_t) = (i_k, q_k, ln_p_k, ln_t_k);
    let mut j = k;
    while j >= 1.0 {
        // Weight of every term below j: at most p_j (j / mu) / (1 - j / mu).
        if j < mu && ln_p.exp() * (j / mu) / (1.0 - j / mu) < TAIL {
            break;
        }
        ln_t -= ln_y + ((a + b + j - 1.0) / (a + j)).ln();
        ln_p += j.ln() - ln_mu;
        j -= 1.0;
        let t = ln_t.exp();
        i = (i + t).min(1.0);
        q = (q - t).max(0.0);
        let p = ln_p.exp();
        cdf += p * i;
        sf += p * q;
    }
    (cdf.clamp(0.0, 1.0), sf.clamp(0.0, 1.0))
}

/// ln of y^a (1-y)^b / (a B(a, b)).
fn ln_term(a: f64, b: f64, y: f64, yc: f64, ln_y: f64, ln_yc: f64) -> f64 {
    // The prefactor's careful form where a parameter is large; the plain one otherwise
    // keeps the logarithms already taken.
    if a.max(b) >= STIRLING_FROM {
        ln_prefactor(a, b, y, yc) - a.ln()
    } else {
        a * ln_y + b * ln_yc - (ln_gamma(a) + ln_gamma(b) - ln_gamma(a + b)) - a.ln()
    }
}

/// P(F' <= x) of the noncentral F distribution.
pub fn cdf(x: f64, df1: f64, df2: f64, lambda: f64) -> f64 {
    cdf_sf(x, df1, df2, lambda).0
}

/// P(F' > x) of the noncentral F distribution: the power of an F test whose critical value
/// is x when the noncentrality is `lambda`.
pub fn sf(x: f64, df1: f64, df2: f64, lambda: f64) -> f64 {
    cdf_sf(x, df1, df2, lambda).1
}

/// Most steps of a root search; each halves the bracket at worst, so this is far more than
/// the 60-odd that a bracket of doubles needs.
const SEARCH_STEPS: usize = 400;

/// The upper `alpha` point of the central F distribution: the x with P(F > x) = alpha, the
/// critical value of an F test at level alpha. NaN outside 0 < alpha < 1 or for degrees of
/// freedom that are not positive.
///
/// Safeguarded Newton steps on ln x (the derivative of P(F > x) in ln x is minus the beta
/// prefactor), falling back to bisection of the bracket; converged when the bracket or the
/// step is below a few units in the last place.
pub fn f_upper_point(alpha: f64, df1: f64, df2: f64) -> f64 {
    if !(alpha > 0.0 && alpha < 1.0 && df1 > 0.0 && df2 > 0.0) {
        return f64::NAN;
    }
    let (a, b) = (df1 / 2.0, df2 / 2.0);
    // h(s) = P(F > e^s) - alpha falls as s rises.
    let eval = |s: f64| {
        let x = s.exp();
        let den = df1 * x + df2;
        let (y, yc) = (df1 * x / den, df2 / den);
        let (_, q) = beta_reg_pair(a, b, y, yc);
        let slope = -ln_prefactor(a, b, y, yc).exp();
        (q - alpha, slope)
    };
    let (mut lo, mut hi) = (-1.0, 1.0);
    let mut steps = 0;
    while eval(lo).0 < 0.0 && steps < SEARCH_STEPS {
        lo = 2.0 * lo - 1.0;
        steps += 1;
    }
    while eval(hi).0 > 0.0 && steps < SEARCH_STEPS {
        hi = 2.0 * hi + 1.0;
        steps += 1;
    }
    let mut s = 0.5 * (lo + hi);
    for _ in 0..SEARCH_STEPS {
        let (h, slope) = eval(s);
        if h == 0.0 {
            break;
        }
        if h > 0.0 {
            lo = s;
        } else {
            hi = s;
        }
        let newton = s - h / slope;
        let next = if slope < 0.0 && newton > lo && newton < hi {
            newton
        } else {
            0.5 * (lo + hi)
        };
        let done = (next - s).abs() <= 4.0 * f64::EPSILON * s.abs().max(1.0)
            || (hi - lo) <= 4.0 * f64::EPSILON * s.abs().max(1.0);
        s = next;
        if done {
            break;
        }
    }
    s.exp()
}

/// The noncentrality at which an F test with critical value `critical` has power `power`:
/// the lambda with P(F'(df1, df2, lambda) > critical) = power. NaN when `power` is not above
/// the power at lambda = 0 (the test's level) or not below 1, or when no lambda up to
/// `max_lambda` reaches it.
///
/// The power rises with lambda, so the root is bracketed by doubling and found by bisection
/// to a relative 1e-13.
pub fn noncentrality_for_power(
    power: f64,
    critical: f64,
    df1: f64,
    df2: f64,
    max_lambda: f64,
) -> f64 {
    let at = |lambda: f64| sf(critical, df1, df2, lambda);
    if !(power < 1.0 && power > at(0.0)) {
        return f64::NAN;
    }
    let (mut lo, mut hi) = (0.0, 1.0);
    while at(hi) < power {
        lo = hi;
        hi *= 2.0;
        if hi > max_lambda {
            return f64::NAN;
        }
    }
    for _ in 0..SEARCH_STEPS {
        let mid = 0.5 * (lo + hi);
        if at(mid) < power {
            lo = mid;
        } else {
            hi = mid;
        }
        if hi - lo <= LAMBDA_REL * hi {
            break;
        }
    }
    hi
}

/// Relative width at which the noncentrality search stops: the power then moves by far
/// less than the 1e-10 its distribution function is held to.
const LAMBDA_REL: f64 = 1e-13;

/// The lower `1 - level` point of the chi-square distribution with `df` degrees of freedom,
/// q with P(X <= q) = 1 - level: the divisor of the one-sided upper confidence limit of a
/// standard deviation, sigma sqrt(df / q). NaN outside 0 < level < 1 or for df <= 0.
///
/// Bisection on ln q of the regularized lower incomplete gamma function P(df/2, q/2)
/// (statrs), to a relative 1e-14.
pub fn chi_square_lower_point(level: f64, df: f64) -> f64 {
    if !(level > 0.0 && level < 1.0 && df > 0.0) {
        return f64::NAN;
    }
    let target = 1.0 - level;
    let below = |s: f64| gamma_lr(df / 2.0, s.exp() / 2.0) < target;
    let (mut lo, mut hi) = (df.ln() - 1.0, df.ln() + 1.0);
    let mut steps = 0;
    while !below(lo) && steps < SEARCH_STEPS {
        lo -= 2.0 * (hi - lo);
        steps += 1;
    }
    while below(hi) && steps < SEARCH_STEPS {
        hi += 2.0 * (hi - lo);
        steps += 1;
    }
    for _ in 0..SEARCH_STEPS {
        let mid = 0.5 * (lo + hi);
        if below(mid) {
            lo = mid;
        } else {
            hi = mid;
        }
        if hi - lo <= 1e-14 {
            break;
        }
    }
    (0.5 * (lo + hi)).exp()
}

#[cfg(test)]
mod tests {
    use super::*;

    /// I_x(a, 1) = x^a and I_x(1, b) = 1 - (1 - x)^b: closed forms of the incomplete beta.
    #[test]
    fn incomplete_beta_closed_forms() {
        for &(a, x) in &[(0.5, 0.3), (3.0, 0.9), (250.0, 0.995), (12.5, 0.7)] {
            let (p, q) = beta_reg_pair(a, 1.0, x, 1.0 - x);
            assert!((p - x.powf(a)).abs() < 1e-14, "a={a} x={x}: {p}");
            assert!((p + q - 1.0).abs() < 1e-15);
        }
        for &(b, x) in &[(0.5, 0.3), (5000.0, 1e-4), (40.0, 0.01)] {
            let (p, _) = beta_reg_pair(1.0, b, x, 1.0 - x);
            let want = -(b * (-x).ln_1p()).exp_m1();
            assert!((p - want).abs() < 1e-14, "b={b} x={x}: {p} vs {want}");
        }
    }

    /// The three forms of the prefactor agree where their domains meet.
    #[test]
    fn prefactor_forms_agree() {
        for &(a, b, x) in &[(10.0, 10.0, 0.4), (10.0, 30.0, 0.2), (9.99, 10.0, 0.5)] {
            let y = 1.0 - x;
            let plain =
                a * f64::ln(x) + b * f64::ln(y) - (ln_gamma(a) + ln_gamma(b) - ln_gamma(a + b));
            assert!((ln_prefactor(a, b, x, y) - plain).abs() < 1e-12);
        }
    }

    #[test]
    fn outside_the_domain_is_nan_not_a_panic() {
        assert!(cdf(1.0, 0.0, 5.0, 1.0).is_nan());
        assert!(cdf(1.0, 2.0, 5.0, -1.0).is_nan());
        assert!(cdf(1.0, 2.0, 5.0, 2.0 * MAX_NONCENTRALITY).is_nan());
        assert!(cdf(1.0, 2.0, 5.0, f64::INFINITY).is_nan());
        assert!(f_upper_point(0.0, 2.0, 5.0).is_nan());
        assert!(f_upper_point(1.0, 2.0, 5.0).is_nan());
        assert!(chi_square_lower_point(0.8, 0.0).is_nan());
        assert_eq!(cdf_sf(0.0, 2.0, 5.0, 3.0), (0.0, 1.0));
        assert_eq!(cdf_sf(f64::INFINITY, 2.0, 5.0, 3.0), (1.0, 0.0));
    }
}
