//! Durbin–Watson statistic of residuals taken in a given order.
//!
//! `d = Σ_{t=2..n} (e_t − e_{t−1})² / Σ_{t=1..n} e_t²` (J. Durbin &
//! G. S. Watson, "Testing for serial correlation in least squares regression
//! I", Biometrika 37 (1950) 409–428 — from memory). d ≈ 2 for uncorrelated
//! residuals, d < 2 for positive serial correlation (smooth runs of residuals,
//! the mark of a curve that misses the data's shape), d > 2 for alternating
//! signs; 0 ≤ d ≤ 4. With weights pass the Pearson residuals √w·e (SPEC §13).
//! No p-value is given: the bounds of the test depend on the design matrix,
//! and the acceptance layer compares d with the recipe's limits.

use super::{NotApplicable, Outcome, StatsError, ensure_finite, ensure_len, in_key_order};

/// Durbin–Watson `d` of `residuals` in the order given. Not applicable for
/// fewer than 2 residuals or when all residuals are zero.
pub fn durbin_watson(residuals: &[f64]) -> Result<Outcome<f64>, StatsError> {
    ensure_finite("residuals", residuals)?;
    if residuals.len() < 2 {
        return Ok(Outcome::NotApplicable(NotApplicable::TooFewObservations {
            n: residuals.len(),
            needed: 2,
        }));
    }
    let den: f64 = residuals.iter().map(|e| e * e).sum();
    if den == 0.0 {
        return Ok(Outcome::NotApplicable(NotApplicable::ZeroDenominator {
            what: "the residual sum of squares",
        }));
    }
    let num: f64 = residuals.windows(2).map(|w| (w[1] - w[0]).powi(2)).sum();
    Ok(Outcome::Computed(num / den))
}

/// Durbin–Watson `d` of `residuals` taken in ascending order of `order_key`
/// (ties in row order).
pub fn durbin_watson_ordered(
    residuals: &[f64],
    order_key: &[f64],
) -> Result<Outcome<f64>, StatsError> {
    ensure_len("order key", order_key, residuals.len())?;
    durbin_watson(&in_key_order(residuals, order_key)?)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn alternating_residuals_give_the_upper_bound_region() {
        // e = (1, −1, 1, −1): Σ(Δe)² = 3·4 = 12, Σe² = 4, d = 3 (by hand).
        let d = durbin_watson(&[1.0, -1.0, 1.0, -1.0])
            .unwrap()
            .computed()
            .unwrap();
        assert!((d - 3.0).abs() < 1e-15);
    }

    #[test]
    fn ordering_key_reorders_before_differencing() {
        // In key order the residuals are (1, 1, −1, −1): Σ(Δe)² = 4, Σe² = 4.
        let d = durbin_watson_ordered(&[1.0, -1.0, 1.0, -1.0], &[0.0, 2.0, 1.0, 3.0])
            .unwrap()
            .computed()
            .unwrap();
        assert!((d - 1.0).abs() < 1e-15);
    }

    #[test]
    fn all_zero_residuals_are_not_applicable() {
        assert!(matches!(
            durbin_watson(&[0.0, 0.0, 0.0]).unwrap(),
            Outcome::NotApplicable(NotApplicable::ZeroDenominator { .. })
        ));
        assert!(matches!(
            durbin_watson(&[1.0]).unwrap(),
            Outcome::NotApplicable(NotApplicable::TooFewObservations { .. })
        ));
    }
}
