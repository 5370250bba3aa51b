//! Quantiles and tail probabilities of the t, F, χ² and standard normal
//! distributions, on top of `statrs`.
//!
//! `statrs` gives the distribution functions through the regularized
//! incomplete beta and gamma functions. Its quantile functions are not used:
//! its χ² inverse stops after a few bisection and Newton steps, and its
//! inverse incomplete beta loops without an iteration cap (it never returns
//! for the t distribution with infinite dof). Every quantile here is instead
//! found by Brent's method on the tail being asked for, after a bracketing
//! scan: on `cdf(x) − p` for a lower quantile and on `α − sf(x)` for an upper
//! one, which keeps relative accuracy in the far tails.
//!
//! Degrees of freedom may be non-integer; they must be positive and at most
//! [`MAX_DOF`] (the t distribution also accepts `+∞`, the normal limit).

use statrs::distribution::{ChiSquared, ContinuousCDF, FisherSnedecor, Normal, StudentsT};

use super::StatsError;
use super::roots::brent;

/// Largest finite degrees of freedom accepted. Up to 1e7 statrs' incomplete
/// beta and gamma functions agree with scipy to 4e-9 relative or better on
/// t, F and χ² critical values (measured); beyond, its incomplete beta drifts
/// (3e-4 for F(10⁸, 10⁸)) and its incomplete gamma iterates without a cap,
/// so larger values are refused rather than answered wrongly or slowly.
pub const MAX_DOF: f64 = 1e7;

/// Relative tolerance of the quantiles.
const QUANTILE_REL_TOL: f64 = 1e-15;

fn check_dof(name: &'static str, value: f64, allow_infinite: bool) -> Result<(), StatsError> {
    let ok = (value > 0.0 && value <= MAX_DOF) || (allow_infinite && value == f64::INFINITY);
    if ok {
        Ok(())
    } else {
        Err(StatsError::InvalidDof { name, value })
    }
}

fn check_prob(p: f64) -> Result<(), StatsError> {
    if p > 0.0 && p < 1.0 {
        Ok(())
    } else {
        Err(StatsError::InvalidProbability { value: p })
    }
}

fn check_x(x: f64) -> Result<(), StatsError> {
    if x.is_nan() {
        Err(StatsError::NonFinite {
            what: "argument",
            index: 0,
        })
    } else {
        Ok(())
    }
}

fn student(dof: f64) -> Result<StudentsT, StatsError> {
    check_dof("dof", dof, true)?;
    StudentsT::new(0.0, 1.0, dof).map_err(|_| StatsError::InvalidDof {
        name: "dof",
        value: dof,
    })
}

fn fisher(d1: f64, d2: f64) -> Result<FisherSnedecor, StatsError> {
    check_dof("dof numerator", d1, false)?;
    check_dof("dof denominator", d2, false)?;
    FisherSnedecor::new(d1, d2).map_err(|_| StatsError::InvalidDof {
        name: "dof",
        value: d1,
    })
}

fn chi_squared(dof: f64) -> Result<ChiSquared, StatsError> {
    check_dof("dof", dof, false)?;
    ChiSquared::new(dof).map_err(|_| StatsError::InvalidDof {
        name: "dof",
        value: dof,
    })
}

fn standard_normal() -> Normal {
    Normal::new(0.0, 1.0).expect("invariant: N(0, 1) has valid parameters")
}

/// Which tail a quantile is asked for.
#[derive(Clone, Copy)]
enum Tail {
    /// x with P(X ≤ x) = prob.
    Lower,
    /// x with P(X > x) = prob.
    Upper,
}

/// Quantile of `dist` for a distribution on the whole line
/// (`positive = false`, searched from 0) or on (0, ∞) (`positive = true`,
/// searched from 1).
fn solve_quantile<D: ContinuousCDF<f64, f64>>(
    dist: &D,
    prob: f64,
    tail: Tail,
    positive: bool,
) -> f64 {
    // h is increasing in x for both tails.
    let h = |x: f64| match tail {
        Tail::Lower => dist.cdf(x) - prob,
        Tail::Upper => prob - dist.sf(x),
    };
    let x0: f64 = if positive { 1.0 } else { 0.0 };
    // Expand a bracket around the start point: geometric on (0, ∞), additive
    // on the real line. 2000 doublings exceed any f64 range, so the loop ends.
    let (mut lo, mut hi) = (x0, x0);
    let mut step = if positive {
        2.0
    } else {
        x0.abs().max(1.0) * 1e-3
    };
    for _ in 0..2000 {
        if h(lo) <= 0.0 {
            break;
        }
        lo = if positive { lo / step } else { lo - step };
        if !positive {
            step *= 2.0;
        }
    }
    let mut step = if positive {
        2.0
    } else {
        x0.abs().max(1.0) * 1e-3
    };
    for _ in 0..2000 {
        if h(hi) >= 0.0 {
            break;
        }
        hi = if positive { hi * step } else { hi + step };
        if !positive {
            step *= 2.0;
        }
    }
    // A monotone h that changes sign on [lo, hi] always brackets: the
    // fallback is unreachable for p in (0, 1) but keeps this total.
    brent(h, lo, hi, QUANTILE_REL_TOL, f64::MIN_POSITIVE).unwrap_or(0.5 * (lo + hi))
}

/// Lower quantile of Student's t with `dof` degrees of freedom: the `t` with
/// `P(T ≤ t) = p`, `0 < p < 1`. Formula: inverse of
/// `P(T ≤ t) = 1 − ½·I_{ν/(ν+t²)}(ν/2, ½)` for t > 0 (Abramowitz & Stegun
/// 26.7.1, via statrs), solved by Brent's method.
pub fn t_quantile(p: f64, dof: f64) -> Result<f64, StatsError> {
    check_prob(p)?;
    let d = student(dof)?;
    Ok(if p > 0.5 {
        solve_quantile(&d, 1.0 - p, Tail::Upper, false)
    } else {
        solve_quantile(&d, p, Tail::Lower, false)
    })
}

/// Upper critical value of Student's t: the `t` with `P(T > t) = alpha`.
/// A two-sided interval at confidence `1 − α` uses `t_upper(α/2, ν)`.
pub fn t_upper(alpha: f64, dof: f64) -> Result<f64, StatsError> {
    check_prob(alpha)?;
    let d = student(dof)?;
    Ok(solve_quantile(&d, alpha, Tail::Upper, false))
}

/// `P(T ≤ t)` for Student's t (statrs, regularized incomplete beta).
pub fn t_cdf(t: f64, dof: f64) -> Result<f64, StatsError> {
    check_x(t)?;
    Ok(student(dof)?.cdf(t))
}

/// Upper tail `P(T > t)` for Student's t.
pub fn t_sf(t: f64, dof: f64) -> Result<f64, StatsError> {
    check_x(t)?;
    Ok(student(dof)?.sf(t))
}

/// Two-sided p-value `P(|T| ≥ |t|) = 2·P(T > |t|)`.
pub fn t_two_sided_p(t: f64, dof: f64) -> Result<f64, StatsError> {
    check_x(t)?;
    Ok((2.0 * student(dof)?.sf(t.abs())).min(1.0))
}

/// Lower quantile of the F distribution with `(d1, d2)` degrees of freedom:
/// `x` with `P(F ≤ x) = p`, where `P(F ≤ x) = I_{d1·x/(d1·x+d2)}(d1/2, d2/2)`
/// (Abramowitz & Stegun 26.6.2, via statrs), solved by Brent's method.
pub fn f_quantile(p: f64, d1: f64, d2: f64) -> Result<f64, StatsError> {
    check_prob(p)?;
    let d = fisher(d1, d2)?;
    Ok(if p > 0.5 {
        solve_quantile(&d, 1.0 - p, Tail::Upper, true)
    } else {
        solve_quantile(&d, p, Tail::Lower, true)
    })
}

/// Upper critical value of F: `x` with `P(F > x) = alpha`.
pub fn f_upper(alpha: f64, d1: f64, d2: f64) -> Result<f64, StatsError> {
    check_prob(alpha)?;
    let d = fisher(d1, d2)?;
    Ok(solve_quantile(&d, alpha, Tail::Upper, true))
}

/// `P(F ≤ x)`.
pub fn f_cdf(x: f64, d1: f64, d2: f64) -> Result<f64, StatsError> {
    check_x(x)?;
    Ok(fisher(d1, d2)?.cdf(x))
}

/// Upper tail `P(F > x)`: the p-value of an F ratio.
pub fn f_sf(x: f64, d1: f64, d2: f64) -> Result<f64, StatsError> {
    check_x(x)?;
    Ok(fisher(d1, d2)?.sf(x))
}

/// Lower quantile of χ² with `dof` degrees of freedom: `x` with
/// `P(X ≤ x) = p = P(dof/2, x/2)`, the regularized lower incomplete gamma
/// function (Abramowitz & Stegun 26.4.19, via statrs), solved by Brent's
/// method.
pub fn chi2_quantile(p: f64, dof: f64) -> Result<f64, StatsError> {
    check_prob(p)?;
    let d = chi_squared(dof)?;
    Ok(if p > 0.5 {
        solve_quantile(&d, 1.0 - p, Tail::Upper, true)
    } else {
        solve_quantile(&d, p, Tail::Lower, true)
    })
}

/// Upper critical value of χ²: `x` with `P(X > x) = alpha`.
pub fn chi2_upper(alpha: f64, dof: f64) -> Result<f64, StatsError> {
    check_prob(alpha)?;
    let d = chi_squared(dof)?;
    Ok(solve_quantile(&d, alpha, Tail::Upper, true))
}

/// `P(X ≤ x)` for χ².
pub fn chi2_cdf(x: f64, dof: f64) -> Result<f64, StatsError> {
    check_x(x)?;
    Ok(chi_squared(dof)?.cdf(x.max(0.0)))
}

/// Upper tail `P(X > x)` for χ²: the p-value of a goodness-of-fit χ².
pub fn chi2_sf(x: f64, dof: f64) -> Result<f64, StatsError> {
    check_x(x)?;
    Ok(chi_squared(dof)?.sf(x.max(0.0)))
}

/// Standard normal quantile `z` with `Φ(z) = p`, `Φ(z) = ½·erfc(−z/√2)`
/// (Abramowitz & Stegun 26.2.29, via statrs), solved by Brent's method.
pub fn normal_quantile(p: f64) -> Result<f64, StatsError> {
    check_prob(p)?;
    let d = standard_normal();
    Ok(if p > 0.5 {
        solve_quantile(&d, 1.0 - p, Tail::Upper, false)
    } else {
        solve_quantile(&d, p, Tail::Lower, false)
    })
}

/// Standard normal upper critical value: `z` with `1 − Φ(z) = alpha`.
pub fn normal_upper(alpha: f64) -> Result<f64, StatsError> {
    check_prob(alpha)?;
    let d = standard_normal();
    Ok(solve_quantile(&d, alpha, Tail::Upper, false))
}

/// Standard normal `Φ(z)`.
pub fn normal_cdf(z: f64) -> Result<f64, StatsError> {
    check_x(z)?;
    Ok(standard_normal().cdf(z))
}

/// Standard normal upper tail `1 − Φ(z)`, computed directly (no cancellation).
pub fn normal_sf(z: f64) -> Result<f64, StatsError> {
    check_x(z)?;
    Ok(standard_normal().sf(z))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn zero_or_negative_dof_is_an_error_not_a_panic() {
        assert!(matches!(
            t_quantile(0.975, 0.0),
            Err(StatsError::InvalidDof { .. })
        ));
        assert!(matches!(
            f_sf(2.0, 3.0, -1.0),
            Err(StatsError::InvalidDof { .. })
        ));
        assert!(matches!(
            chi2_quantile(0.5, f64::NAN),
            Err(StatsError::InvalidDof { .. })
        ));
        assert!(matches!(
            f_upper(0.05, f64::INFINITY, 3.0),
            Err(StatsError::InvalidDof { .. })
        ));
        assert!(matches!(
            chi2_upper(0.05, 2.0 * MAX_DOF),
            Err(StatsError::InvalidDof { .. })
        ));
        assert!(matches!(
            t_upper(0.05, 2.0 * MAX_DOF),
            Err(StatsError::InvalidDof { .. })
        ));
        assert!(t_upper(0.05, MAX_DOF).is_ok());
    }

    #[test]
    fn probabilities_outside_the_open_unit_interval_are_errors() {
        for p in [0.0, 1.0, -0.1, 1.5, f64::NAN] {
            assert!(matches!(
                t_quantile(p, 5.0),
                Err(StatsError::InvalidProbability { .. })
            ));
            assert!(matches!(
                normal_quantile(p),
                Err(StatsError::InvalidProbability { .. })
            ));
        }
    }

    #[test]
    fn t_with_infinite_dof_is_the_normal() {
        // Limit ν → ∞ of Student's t is N(0, 1) (standard result).
        let t = t_upper(0.025, f64::INFINITY).unwrap();
        let z = normal_upper(0.025).unwrap();
        assert!((t - z).abs() < 1e-12);
    }

    #[test]
    fn t_with_one_dof_is_cauchy() {
        // ν = 1 is the Cauchy distribution: quantile tan(π(p − ½)) (closed form).
        for p in [0.6, 0.9, 0.975, 0.999, 0.01] {
            let exact = (std::f64::consts::PI * (p - 0.5)).tan();
            let q = t_quantile(p, 1.0).unwrap();
            assert!(
                (q - exact).abs() <= 1e-12 * exact.abs(),
                "p={p}: {q} vs {exact}"
            );
        }
    }

    #[test]
    fn chi2_with_two_dof_is_exponential() {
        // χ²₂ is exponential with mean 2: upper quantile −2·ln α (closed form).
        for a in [0.5, 0.05, 1e-6, 1e-12] {
            let exact = -2.0 * f64::ln(a);
            let q = chi2_upper(a, 2.0).unwrap();
            assert!((q - exact).abs() <= 1e-13 * exact, "α={a}: {q} vs {exact}");
        }
    }

    #[test]
    fn quantile_and_tail_are_inverse() {
        let x = f_upper(0.01, 4.0, 17.0).unwrap();
        assert!((f_sf(x, 4.0, 17.0).unwrap() - 0.01).abs() < 1e-15);
        let x = chi2_quantile(0.001, 30.0).unwrap();
        assert!((chi2_cdf(x, 30.0).unwrap() - 0.001).abs() < 1e-16);
    }
}
