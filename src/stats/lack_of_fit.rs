//! Lack-of-fit F-test against pure error from replicate readings.
//!
//! Rows are grouped by equal predictor values (or by labels the caller
//! gives, e.g. from a `[fit] groups` column). With c groups, n rows and p
//! parameters (Draper & Smith, *Applied Regression Analysis*, 3rd ed., §2.1 —
//! from memory; SPEC §13):
//! - `SS_pe = Σ_groups Σ_i w_i (y_i − ȳ_g)²`, `ȳ_g = Σw·y/Σw` the weighted
//!   group mean (plain mean without weights), `n − c` dof;
//! - `SS_lof = SSR − SS_pe` with `SSR = Σ w (y − ŷ)²`, `c − p` dof;
//! - `F = [SS_lof/(c − p)] / [SS_pe/(n − c)]`, `p = P(F_{c−p, n−c} > F)`.
//!
//! Needs c > p and n > c; a zero pure error (identical replicates) makes F
//! undefined and the test not applicable.

use super::distributions::f_sf;
use super::{NotApplicable, Outcome, StatsError, ensure_finite, ensure_len, order_by_key};

/// How rows are grouped into replicate sets.
#[derive(Debug, Clone, Copy)]
pub enum Groups<'a> {
    /// Rows with exactly equal predictor values form a group.
    EqualValues(&'a [f64]),
    /// Rows with equal labels form a group (caller-given grouping).
    Labels(&'a [usize]),
}

/// Result of the lack-of-fit test.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct LackOfFit {
    /// Number of groups c.
    pub groups: usize,
    /// Pure-error sum of squares.
    pub ss_pure_error: f64,
    /// Lack-of-fit sum of squares `SSR − SS_pe`.
    pub ss_lack_of_fit: f64,
    /// Numerator dof `c − p`.
    pub dof_lack_of_fit: usize,
    /// Denominator dof `n − c`.
    pub dof_pure_error: usize,
    /// F ratio.
    pub f: f64,
    /// Upper-tail p-value.
    pub p_value: f64,
}

/// Group index per row, groups numbered in order of first appearance.
fn group_ids(groups: Groups<'_>, n: usize) -> Result<(Vec<usize>, usize), StatsError> {
    let mut ids = vec![0usize; n];
    let mut count = 0usize;
    match groups {
        Groups::EqualValues(x) => {
            ensure_len("group values", x, n)?;
            let order = order_by_key(x)?;
            let mut prev: Option<f64> = None;
            for &i in &order {
                let xi = x.get(i).copied().unwrap_or(f64::NAN);
                if prev != Some(xi) {
                    count += 1;
                }
                prev = Some(xi);
                if let Some(slot) = ids.get_mut(i) {
                    *slot = count - 1;
                }
            }
        }
        Groups::Labels(labels) => {
            if labels.len() != n {
                return Err(StatsError::LengthMismatch {
                    what: "group labels",
                    expected: n,
                    found: labels.len(),
                });
            }
            // Labels already numbered in order of first appearance (0, 1, 0, 2, …) are the
            // ids: no lookup per row.
            let mut next = 0usize;
            let dense = labels.iter().all(|&l| {
                if l == next {
                    next += 1;
                }
                l < next
            });
            if dense {
                ids.copy_from_slice(labels);
                count = next;
            } else {
                let mut seen = std::collections::HashMap::new();
                for (slot, label) in ids.iter_mut().zip(labels) {
                    let next = seen.len();
                    *slot = *seen.entry(*label).or_insert(next);
                }
                count = seen.len();
            }
        }
    }
    Ok((ids, count))
}

/// Lack-of-fit F-test for observations `y`, fitted values `fitted`, optional
/// weights, the grouping, and `p` fitted parameters.
pub fn lack_of_fit(
    y: &[f64],
    fitted: &[f64],
    weights: Option<&[f64]>,
    groups: Groups<'_>,
    p: usize,
) -> Result<Outcome<LackOfFit>, StatsError> {
    let n = y.len();
    ensure_finite("y", y)?;
    ensure_len("fitted", fitted, n)?;
    ensure_finite("fitted", fitted)?;
    let ones;
    let w = match weights {
        Some(w) => {
            ensure_len("weights", w, n)?;
            ensure_finite("weights", w)?;
            if let Some(i) = w.iter().position(|&v| v <= 0.0) {
                return Err(StatsError::InvalidArgument {
                    what: "weights",
                    reason: format!("weight at index {i} is not positive"),
                });
            }
            w
        }
        None => {
            ones = vec![1.0; n];
            &ones[..]
        }
    };
    let (ids, c) = group_ids(groups, n)?;
    if c <= p {
        return Ok(Outcome::NotApplicable(NotApplicable::TooFewGroups {
            groups: c,
            params: p,
        }));
    }
    if n <= c {
        return Ok(Outcome::NotApplicable(NotApplicable::NoReplicates {
            n,
            groups: c,
        }));
    }
    // Weighted group means.
    let mut sw = vec![0.0; c];
    let mut swy = vec![0.0; c];
    for ((&g, &yi), &wi) in ids.iter().zip(y).zip(w) {
        if let (Some(a), Some(b)) = (sw.get_mut(g), swy.get_mut(g)) {
            *a += wi;
            *b += wi * yi;
        }
    }
    let mut ss_pe = 0.0;
    let mut ssr = 0.0;
    for (((&g, &yi), &wi), &fi) in ids.iter().zip(y).zip(w).zip(fitted) {
        let mean = match (swy.get(g), sw.get(g)) {
            (Some(a), Some(b)) => a / b,
            _ => yi,
        };
        ss_pe += wi * (yi - mean).powi(2);
        ssr += wi * (yi - fi).powi(2);
    }
    if ss_pe <= 0.0 {
        return Ok(Outcome::NotApplicable(NotApplicable::ZeroDenominator {
            what: "the pure-error sum of squares",
        }));
    }
    // SSR ≥ SS_pe holds for any fitted values constant within groups; with
    // caller labels it may fail by rounding, hence the clamp.
    let ss_lof = (ssr - ss_pe).max(0.0);
    let dof_lof = c - p;
    let dof_pe = n - c;
    let f = (ss_lof / dof_lof as f64) / (ss_pe / dof_pe as f64);
    let p_value = f_sf(f, dof_lof as f64, dof_pe as f64)?;
    Ok(Outcome::Computed(LackOfFit {
        groups: c,
        ss_pure_error: ss_pe,
        ss_lack_of_fit: ss_lof,
        dof_lack_of_fit: dof_lof,
        dof_pure_error: dof_pe,
        f,
        p_value,
    }))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn hand_worked_two_group_example() {
        // x = (1, 1, 2, 2, 3), y = (1, 3, 2, 4, 5), fitted by a constant p = 1
        // at ŷ = 3. Groups: {1,3}, {2,4}, {5}: SS_pe = 2 + 2 = 4 (dof 2),
        // SSR = 4+0+1+1+4 = 10, SS_lof = 6 (dof 2), F = 3/2 = 1.5 (by hand).
        let x = [1.0, 1.0, 2.0, 2.0, 3.0];
        let y = [1.0, 3.0, 2.0, 4.0, 5.0];
        let r = lack_of_fit(&y, &[3.0; 5], None, Groups::EqualValues(&x), 1)
            .unwrap()
            .computed()
            .unwrap();
        assert_eq!((r.groups, r.dof_lack_of_fit, r.dof_pure_error), (3, 2, 2));
        assert!((r.ss_pure_error - 4.0).abs() < 1e-12);
        assert!((r.f - 1.5).abs() < 1e-12);
        // F(2, 2) has P(F > f) = 1/(1 + f) (closed form for 2, 2 dof).
        assert!((r.p_value - 0.4).abs() < 1e-12);
    }

    #[test]
    fn labels_group_like_equal_values() {
        let y = [1.0, 3.0, 2.0, 4.0, 5.0];
        let by_label = lack_of_fit(&y, &[3.0; 5], None, Groups::Labels(&[7, 7, 2, 2, 9]), 1)
            .unwrap()
            .computed()
            .unwrap();
        assert!((by_label.f - 1.5).abs() < 1e-12);
        // Labels already numbered by first appearance take the fast path, same result.
        let dense = lack_of_fit(&y, &[3.0; 5], None, Groups::Labels(&[0, 0, 1, 1, 2]), 1)
            .unwrap()
            .computed()
            .unwrap();
        assert_eq!(dense, by_label);
    }

    #[test]
    fn weighted_pure_error_is_about_the_weighted_group_mean() {
        // Group {y=0 (w=1), y=3 (w=2)}: ȳ_w = 2, SS_pe = 1·4 + 2·1 = 6 (by hand).
        let r = lack_of_fit(
            &[0.0, 3.0, 5.0, 9.0],
            &[2.0, 2.0, 5.0, 9.0],
            Some(&[1.0, 2.0, 1.0, 1.0]),
            Groups::EqualValues(&[0.0, 0.0, 1.0, 2.0]),
            2,
        )
        .unwrap()
        .computed()
        .unwrap();
        assert!((r.ss_pure_error - 6.0).abs() < 1e-12);
        assert!(r.ss_lack_of_fit.abs() < 1e-12);
    }

    #[test]
    fn without_replicates_or_enough_groups_it_is_not_applicable() {
        let y = [1.0, 2.0, 3.0];
        assert_eq!(
            lack_of_fit(&y, &y, None, Groups::EqualValues(&[1.0, 2.0, 3.0]), 2)
                .unwrap()
                .reason(),
            Some(&NotApplicable::NoReplicates { n: 3, groups: 3 })
        );
        assert_eq!(
            lack_of_fit(&y, &y, None, Groups::EqualValues(&[1.0, 1.0, 3.0]), 2)
                .unwrap()
                .reason(),
            Some(&NotApplicable::TooFewGroups {
                groups: 2,
                params: 2
            })
        );
    }
}
