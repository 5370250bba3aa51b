//! Wald–Wolfowitz runs test on the signs of residuals taken in a given order.
//!
//! A run is a maximal block of consecutive residuals with one sign. A curve
//! that misses the shape of the data leaves long blocks on one side, i.e. too
//! few runs, so the test is one-sided: `p = P(R ≤ r_observed)` under the null
//! hypothesis that every arrangement of the `n₊` positive and `n₋` negative
//! signs is equally likely.
//!
//! Sources (from memory): A. Wald & J. Wolfowitz, "On a test whether two
//! samples are from the same population", Ann. Math. Statist. 11 (1940)
//! 147–162, for the mean and variance; F. S. Swed & C. Eisenhart, "Tables for
//! testing randomness of grouping in a sequence of alternatives", Ann. Math.
//! Statist. 14 (1943) 66–87, for the exact distribution.

use super::distributions::normal_cdf;
use super::{NotApplicable, Outcome, StatsError, ensure_finite, ensure_len, in_key_order};

/// Largest sign count for which the exact distribution is used: the exact
/// distribution applies when both `n₊ ≤ 20` and `n₋ ≤ 20` (SPEC §13), the
/// range of the Swed & Eisenhart tables.
pub const EXACT_MAX_COUNT: usize = 20;

/// Largest `n₊ + n₋` accepted by [`runs_exact_cdf`]; `C(100, 50) ≈ 1.0e29`
/// and every partial count fit in a `u128`.
pub const EXACT_MAX_TOTAL: usize = 100;

/// How the p-value was obtained.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum RunsMethod {
    /// Exact distribution by counting arrangements (Swed & Eisenhart 1943).
    Exact,
    /// Normal approximation with continuity correction.
    NormalApproximation,
}

/// Result of a runs test.
#[derive(Debug, Clone, PartialEq)]
pub struct RunsTest {
    /// Number of positive residuals.
    pub n_pos: usize,
    /// Number of negative residuals.
    pub n_neg: usize,
    /// Number of zero residuals left out.
    pub n_zero: usize,
    /// Observed number of runs.
    pub runs: usize,
    /// Expected number of runs, `1 + 2·n₊·n₋/n`.
    pub expected_runs: f64,
    /// One-sided p-value `P(R ≤ runs)`.
    pub p_value: f64,
    /// How `p_value` was computed.
    pub method: RunsMethod,
    /// Continuity-corrected normal deviate `(runs + ½ − μ)/σ` behind the
    /// p-value of the normal approximation; `None` with the exact method.
    pub z: Option<f64>,
}

/// Runs test on `residuals` taken in ascending order of `order_key` (ties in
/// row order; SPEC §13 uses the predictor, or the fitted value with several
/// predictors). Zero residuals are dropped. Not applicable when either sign is
/// missing. See [`runs_test_in_order`].
pub fn runs_test(residuals: &[f64], order_key: &[f64]) -> Result<Outcome<RunsTest>, StatsError> {
    ensure_len("order key", order_key, residuals.len())?;
    ensure_finite("residuals", residuals)?;
    runs_test_in_order(&in_key_order(residuals, order_key)?)
}

/// Runs test on `residuals` in the order given.
///
/// Runs are counted over the nonzero residuals; `n = n₊ + n₋`. Mean and
/// variance of the number of runs R (Wald & Wolfowitz 1940):
/// `μ = 1 + 2n₊n₋/n`, `σ² = 2n₊n₋(2n₊n₋ − n) / (n²(n − 1))`.
/// p-value `P(R ≤ r)`: exact ([`runs_exact_cdf`]) when `n₊ ≤ 20` and
/// `n₋ ≤ 20`, else `Φ((r + ½ − μ)/σ)` (continuity correction ½).
pub fn runs_test_in_order(residuals: &[f64]) -> Result<Outcome<RunsTest>, StatsError> {
    ensure_finite("residuals", residuals)?;
    let mut n_pos = 0usize;
    let mut n_neg = 0usize;
    let mut runs = 0usize;
    let mut last: Option<bool> = None;
    for &e in residuals {
        if e == 0.0 {
            continue;
        }
        let positive = e > 0.0;
        if positive {
            n_pos += 1;
        } else {
            n_neg += 1;
        }
        if last != Some(positive) {
            runs += 1;
        }
        last = Some(positive);
    }
    let n_zero = residuals.len() - n_pos - n_neg;
    if n_pos == 0 || n_neg == 0 {
        return Ok(Outcome::NotApplicable(NotApplicable::OneSignOnly {
            n_pos,
            n_neg,
        }));
    }
    let (p_value, method) = runs_p_value(n_pos, n_neg, runs)?;
    let z = (method == RunsMethod::NormalApproximation).then(|| runs_z(n_pos, n_neg, runs));
    Ok(Outcome::Computed(RunsTest {
        n_pos,
        n_neg,
        n_zero,
        runs,
        expected_runs: expected_runs(n_pos, n_neg),
        p_value,
        method,
        z,
    }))
}

/// Expected number of runs `1 + 2·n₊·n₋/(n₊ + n₋)`.
pub fn expected_runs(n_pos: usize, n_neg: usize) -> f64 {
    let n = (n_pos + n_neg) as f64;
    if n == 0.0 {
        return 0.0;
    }
    1.0 + 2.0 * n_pos as f64 * n_neg as f64 / n
}

/// Variance of the number of runs, `2n₊n₋(2n₊n₋ − n) / (n²(n − 1))`.
pub fn runs_variance(n_pos: usize, n_neg: usize) -> f64 {
    let n = (n_pos + n_neg) as f64;
    if n < 2.0 {
        return 0.0;
    }
    let prod = 2.0 * n_pos as f64 * n_neg as f64;
    prod * (prod - n) / (n * n * (n - 1.0))
}

/// Continuity-corrected normal deviate `(runs + ½ − μ)/σ` (both counts
/// positive and not both 1, so that σ > 0).
fn runs_z(n_pos: usize, n_neg: usize, runs: usize) -> f64 {
    let mu = expected_runs(n_pos, n_neg);
    let sigma = runs_variance(n_pos, n_neg).sqrt();
    (runs as f64 + 0.5 - mu) / sigma
}

/// One-sided p-value `P(R ≤ runs)` and the method used, chosen as in
/// [`runs_test_in_order`]. Both counts must be positive and `runs` between
/// 2 and `2·min(n₊, n₋) + 1` (a count of runs that cannot occur is an error).
pub fn runs_p_value(
    n_pos: usize,
    n_neg: usize,
    runs: usize,
) -> Result<(f64, RunsMethod), StatsError> {
    if n_pos == 0 || n_neg == 0 {
        return Err(StatsError::InvalidArgument {
            what: "sign counts",
            reason: "both signs must occur".into(),
        });
    }
    let max_runs = 2 * n_pos.min(n_neg) + usize::from(n_pos != n_neg);
    if runs < 2 || runs > max_runs {
        return Err(StatsError::InvalidArgument {
            what: "runs",
            reason: format!("{runs} runs cannot occur with {n_pos} + and {n_neg} − signs"),
        });
    }
    if n_pos <= EXACT_MAX_COUNT && n_neg <= EXACT_MAX_COUNT {
        Ok((runs_exact_cdf(n_pos, n_neg, runs)?, RunsMethod::Exact))
    } else {
        let z = runs_z(n_pos, n_neg, runs);
        Ok((normal_cdf(z)?.min(1.0), RunsMethod::NormalApproximation))
    }
}

/// Smallest p-value the test can give with these sign counts: `P(R ≤ 2)`
/// (two runs is the fewest possible with both signs), by the same method
/// [`runs_p_value`] would use. `None` when a sign is missing. The acceptance
/// layer compares it with `runs_p_min`: when it is not below the limit, no
/// arrangement could ever fail the criterion and the test is "not
/// applicable" (SPEC §13). With the exact distribution it is
/// `2 / C(n₊ + n₋, n₊)`.
pub fn min_attainable_p(n_pos: usize, n_neg: usize) -> Option<f64> {
    if n_pos == 0 || n_neg == 0 {
        return None;
    }
    runs_p_value(n_pos, n_neg, 2).ok().map(|(p, _)| p)
}

/// Whether any arrangement of these sign counts can give a p-value below
/// `limit`, i.e. whether a `runs_p_min = limit` criterion can ever fail.
pub fn can_reach_limit(n_pos: usize, n_neg: usize, limit: f64) -> bool {
    min_attainable_p(n_pos, n_neg).is_some_and(|p| p < limit)
}

/// Binomial coefficient in exact integer arithmetic (0 when k > n).
fn choose(n: usize, k: usize) -> u128 {
    if k > n {
        return 0;
    }
    let k = k.min(n - k);
    let mut c: u128 = 1;
    for i in 0..k {
        // c·(n − i) is divisible by (i + 1): c = C(n, i) here.
        c = c * (n - i) as u128 / (i as u128 + 1);
    }
    c
}

/// Number of arrangements of `n1` and `n2` signs with exactly `r` runs
/// (Swed & Eisenhart 1943): with `r = 2k`, `2·C(n1−1, k−1)·C(n2−1, k−1)`;
/// with `r = 2k+1`, `C(n1−1, k−1)·C(n2−1, k) + C(n1−1, k)·C(n2−1, k−1)`.
fn arrangements_with_runs(n1: usize, n2: usize, r: usize) -> u128 {
    let k = r / 2;
    if k == 0 || n1 == 0 || n2 == 0 {
        return 0;
    }
    if r.is_multiple_of(2) {
        2 * choose(n1 - 1, k - 1) * choose(n2 - 1, k - 1)
    } else {
        choose(n1 - 1, k - 1) * choose(n2 - 1, k) + choose(n1 - 1, k) * choose(n2 - 1, k - 1)
    }
}

/// Exact `P(R ≤ r)` for `n1` signs of one kind and `n2` of the other: the
/// number of arrangements with at most `r` runs (integer sums of the
/// Swed–Eisenhart counts) over `C(n1 + n2, n1)`. Requires
/// `n1 + n2 ≤ EXACT_MAX_TOTAL` so that the counts are exact.
pub fn runs_exact_cdf(n1: usize, n2: usize, r: usize) -> Result<f64, StatsError> {
    if n1 + n2 > EXACT_MAX_TOTAL {
        return Err(StatsError::InvalidArgument {
            what: "sign counts",
            reason: format!(
                "exact runs distribution is limited to {EXACT_MAX_TOTAL} signs, got {}",
                n1 + n2
            ),
        });
    }
    let total = choose(n1 + n2, n1);
    let favourable: u128 = (2..=r).map(|k| arrangements_with_runs(n1, n2, k)).sum();
    Ok((favourable as f64 / total as f64).min(1.0))
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Count runs of every arrangement of n1 ones and n2 zeros by brute force.
    fn brute_force_cdf(n1: usize, n2: usize, r: usize) -> f64 {
        let n = n1 + n2;
        let (mut hit, mut all) = (0u64, 0u64);
        for mask in 0u32..(1 << n) {
            if mask.count_ones() as usize != n1 {
                continue;
            }
            all += 1;
            let runs = 1
                + (1..n)
                    .filter(|&i| ((mask >> i) & 1) != ((mask >> (i - 1)) & 1))
                    .count();
            if runs <= r {
                hit += 1;
            }
        }
        hit as f64 / all as f64
    }

    #[test]
    fn exact_distribution_matches_enumeration_of_all_arrangements() {
        for (n1, n2) in [(1, 1), (2, 3), (4, 4), (5, 7), (6, 3)] {
            for r in 2..=(n1 + n2) {
                let exact = runs_exact_cdf(n1, n2, r).unwrap();
                assert!(
                    (exact - brute_force_cdf(n1, n2, r)).abs() < 1e-15,
                    "{n1},{n2},{r}"
                );
            }
        }
    }

    #[test]
    fn counts_runs_in_predictor_order_with_ties_in_row_order() {
        // Row order signs: + − + −; ordered by key [3, 1, 2, 1]: rows 1, 3, 2, 0
        // give − − + +, two runs.
        let r = runs_test(&[1.0, -1.0, 2.0, -0.5], &[3.0, 1.0, 2.0, 1.0])
            .unwrap()
            .computed()
            .unwrap();
        assert_eq!((r.n_pos, r.n_neg, r.runs), (2, 2, 2));
        // 2 of the C(4,2) = 6 arrangements have two runs.
        assert!((r.p_value - 2.0 / 6.0).abs() < 1e-15);
        assert_eq!(r.method, RunsMethod::Exact);
    }

    #[test]
    fn zero_residuals_are_dropped_and_counted() {
        let r = runs_test_in_order(&[1.0, 0.0, 1.0, -1.0, 0.0, -2.0])
            .unwrap()
            .computed()
            .unwrap();
        assert_eq!((r.n_pos, r.n_neg, r.n_zero, r.runs), (2, 2, 2, 2));
    }

    #[test]
    fn a_single_sign_is_not_applicable() {
        let r = runs_test_in_order(&[1.0, 2.0, 0.0]).unwrap();
        assert_eq!(
            r.reason(),
            Some(&NotApplicable::OneSignOnly { n_pos: 2, n_neg: 0 })
        );
    }

    #[test]
    fn minimum_attainable_p_decides_whether_a_limit_can_be_reached() {
        // 2 + and 2 −: P(R ≤ 2) = 2/6, so a 0.05 limit can never fail.
        assert!((min_attainable_p(2, 2).unwrap() - 1.0 / 3.0).abs() < 1e-15);
        assert!(!can_reach_limit(2, 2, 0.05));
        // 5 + and 5 −: 2/252 ≈ 0.0079 < 0.05.
        assert!(can_reach_limit(5, 5, 0.05));
        assert_eq!(min_attainable_p(0, 4), None);
    }

    #[test]
    fn impossible_run_counts_are_errors() {
        assert!(runs_p_value(3, 3, 8).is_err());
        assert!(runs_p_value(3, 3, 1).is_err());
        assert!(runs_p_value(3, 4, 7).is_ok());
    }

    #[test]
    fn nan_residual_is_an_error() {
        assert!(matches!(
            runs_test_in_order(&[1.0, f64::NAN]),
            Err(StatsError::NonFinite { .. })
        ));
    }
}
