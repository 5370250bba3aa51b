//! Comparison of fitted models: the nested-model F-test and ΔAICc.
//!
//! Nested F-test (Draper & Smith, *Applied Regression Analysis*, 3rd ed.,
//! §6.1 "extra sum of squares" — from memory): the smaller model (SSR₀,
//! ν₀ = n − p₀ dof) is the larger one (SSR₁, ν₁ = n − p₁) with some
//! parameters fixed;
//! `F = [(SSR₀ − SSR₁)/(ν₀ − ν₁)] / [SSR₁/ν₁]`, `p = P(F_{ν₀−ν₁, ν₁} > F)`.
//! Valid only for truly nested models fitted to the same rows, weights and
//! response (SPEC §13 states how nesting is decided; that is the caller's job).
//!
//! Mandel's linearity test of calibration practice is the case straight line
//! (p₀ = 2) against quadratic (p₁ = 3): `F = (SSR_lin − SSR_quad)/s²_quad`
//! with 1 and n − 3 dof (J. Mandel, *The Statistical Analysis of Experimental
//! Data*, 1964; DIN 38402-51 — from memory). A small p says the curvature is
//! significant and the straight line is not adequate.

use super::distributions::f_sf;
use super::{NotApplicable, Outcome, StatsError};

/// Result of a nested-model F-test.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct NestedFTest {
    /// F ratio.
    pub f: f64,
    /// Numerator dof ν₀ − ν₁ (extra parameters of the larger model).
    pub dof_num: usize,
    /// Denominator dof ν₁.
    pub dof_den: usize,
    /// Upper-tail p-value.
    pub p_value: f64,
}

/// Relative amount by which the larger model's SSR may exceed the smaller
/// one's and still count as rounding (the difference is then taken as 0).
pub const SSR_ROUNDING_TOL: f64 = 1e-10;

/// Nested-model F-test from `(SSR, residual dof)` of the smaller and the
/// larger model. Requires `dof_small > dof_large ≥ 1`. An SSR of the larger
/// model above the smaller one's by more than rounding
/// ([`SSR_ROUNDING_TOL`] relative) is an error: the models do not nest. Not
/// applicable when the larger model fits exactly (`SSR₁ = 0`).
pub fn nested_f_test(
    ssr_small: f64,
    dof_small: usize,
    ssr_large: f64,
    dof_large: usize,
) -> Result<Outcome<NestedFTest>, StatsError> {
    for (what, v) in [
        ("SSR of the smaller model", ssr_small),
        ("SSR of the larger model", ssr_large),
    ] {
        if !(v.is_finite() && v >= 0.0) {
            return Err(StatsError::InvalidArgument {
                what,
                reason: format!("must be finite and non-negative, got {v}"),
            });
        }
    }
    if dof_large == 0 || dof_small <= dof_large {
        return Err(StatsError::InvalidArgument {
            what: "dof",
            reason: format!(
                "the smaller model needs more residual dof than the larger (got {dof_small} and {dof_large}), and the larger at least 1"
            ),
        });
    }
    let mut extra = ssr_small - ssr_large;
    if extra < 0.0 {
        if -extra <= SSR_ROUNDING_TOL * ssr_small.max(ssr_large) {
            extra = 0.0;
        } else {
            return Err(StatsError::InvalidArgument {
                what: "SSR",
                reason: format!(
                    "the larger model fits worse ({ssr_large}) than the smaller ({ssr_small}): not nested or not converged"
                ),
            });
        }
    }
    if ssr_large == 0.0 {
        return Ok(Outcome::NotApplicable(NotApplicable::ZeroDenominator {
            what: "the residual sum of squares of the larger model",
        }));
    }
    let dof_num = dof_small - dof_large;
    let f = (extra / dof_num as f64) / (ssr_large / dof_large as f64);
    let p_value = f_sf(f, dof_num as f64, dof_large as f64)?;
    Ok(Outcome::Computed(NestedFTest {
        f,
        dof_num,
        dof_den: dof_large,
        p_value,
    }))
}

/// ΔAICc of each candidate against the best (smallest) defined AICc:
/// `Δ_i = AICc_i − min_j AICc_j` (Burnham & Anderson 2002, §2.6 — from
/// memory); `None` where AICc is undefined, all `None` if none is defined.
/// Non-finite entries count as undefined.
pub fn delta_aicc(aicc: &[Option<f64>]) -> Vec<Option<f64>> {
    let best = aicc
        .iter()
        .flatten()
        .copied()
        .filter(|v| v.is_finite())
        .fold(None, |m: Option<f64>, v| Some(m.map_or(v, |m| m.min(v))));
    aicc.iter()
        .map(|a| match (a, best) {
            (Some(v), Some(b)) if v.is_finite() => Some(v - b),
            _ => None,
        })
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn extra_sum_of_squares_ratio_by_hand() {
        // SSR 30 on 10 dof vs 10 on 8 dof: F = (20/2)/(10/8) = 8 (by hand);
        // F(2, ν) has P(F > f) = (1 + 2f/ν)^(−ν/2) (closed form), here 3⁻⁴.
        let t = nested_f_test(30.0, 10, 10.0, 8)
            .unwrap()
            .computed()
            .unwrap();
        assert!((t.f - 8.0).abs() < 1e-12);
        assert_eq!((t.dof_num, t.dof_den), (2, 8));
        assert!((t.p_value - 3f64.powi(-4)).abs() < 1e-14);
    }

    #[test]
    fn a_larger_model_that_fits_worse_is_refused() {
        assert!(nested_f_test(10.0, 10, 12.0, 8).is_err());
        // Within rounding it counts as no improvement.
        let t = nested_f_test(10.0, 10, 10.0 + 1e-13, 8)
            .unwrap()
            .computed()
            .unwrap();
        assert_eq!(t.f, 0.0);
        assert!((t.p_value - 1.0).abs() < 1e-12);
    }

    #[test]
    fn dof_must_decrease() {
        assert!(nested_f_test(10.0, 8, 5.0, 8).is_err());
        assert!(nested_f_test(10.0, 3, 5.0, 0).is_err());
    }

    #[test]
    fn delta_aicc_is_relative_to_the_best_defined_value() {
        let d = delta_aicc(&[Some(12.0), None, Some(10.5), Some(f64::NAN)]);
        assert_eq!(d, vec![Some(1.5), None, Some(0.0), None]);
        assert_eq!(delta_aicc(&[None, None]), vec![None, None]);
    }
}
