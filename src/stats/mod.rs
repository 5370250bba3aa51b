//! Statistics of a finished fit: distributions, residual diagnostics, model
//! comparison and calibration figures (SPEC §6, §13 "Statistics, precisely").
//!
//! Every function here is pure: it maps slices and matrices to numbers, does no
//! I/O and knows nothing of recipes or fits. Bad input (mismatched lengths,
//! NaN, a dof that is not positive) is a [`StatsError`], never a panic. A test
//! that cannot be carried out on valid input (too few points, no replicates,
//! zero range) returns [`Outcome::NotApplicable`] with a [`NotApplicable`]
//! reason, which the acceptance layer shows as "not applicable".

pub mod calibration;
pub mod distributions;
pub mod durbin_watson;
pub mod influence;
pub mod information;
pub mod lack_of_fit;
pub mod nested;
pub mod normality;
pub mod roots;
pub mod runs;
pub mod sort;

use std::fmt;

/// Invalid input to a statistics function: a caller bug or bad data that the
/// earlier stages should have refused.
#[derive(Debug, Clone, PartialEq)]
#[non_exhaustive]
pub enum StatsError {
    /// A degrees-of-freedom argument was not positive or above
    /// [`distributions::MAX_DOF`].
    InvalidDof { name: &'static str, value: f64 },
    /// A probability argument was outside the open interval (0, 1).
    InvalidProbability { value: f64 },
    /// Two inputs that must have one entry per observation differ in length.
    LengthMismatch {
        what: &'static str,
        expected: usize,
        found: usize,
    },
    /// An input holds NaN or an infinity.
    NonFinite { what: &'static str, index: usize },
    /// A scalar argument is outside its documented domain.
    InvalidArgument { what: &'static str, reason: String },
    /// The design matrix does not have full column rank.
    RankDeficient { rank: usize, columns: usize },
}

impl fmt::Display for StatsError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            StatsError::InvalidDof { name, value } => write!(
                f,
                "degrees of freedom `{name}` must be positive and at most {:e}, got {value}",
                distributions::MAX_DOF
            ),
            StatsError::InvalidProbability { value } => {
                write!(
                    f,
                    "probability must lie strictly between 0 and 1, got {value}"
                )
            }
            StatsError::LengthMismatch {
                what,
                expected,
                found,
            } => write!(
                f,
                "`{what}` has {found} entries but {expected} were expected (one per observation)"
            ),
            StatsError::NonFinite { what, index } => {
                write!(f, "`{what}` holds a NaN or infinite value at index {index}")
            }
            StatsError::InvalidArgument { what, reason } => write!(f, "`{what}`: {reason}"),
            StatsError::RankDeficient { rank, columns } => write!(
                f,
                "the design matrix has rank {rank} but {columns} columns; parameters are not all identifiable"
            ),
        }
    }
}

impl std::error::Error for StatsError {}

/// Why a test could not be carried out on otherwise valid input.
#[derive(Debug, Clone, PartialEq)]
#[non_exhaustive]
pub enum NotApplicable {
    /// Too few observations for the statistic (`needed` at least).
    TooFewObservations { n: usize, needed: usize },
    /// Too many observations for the approximation used (`limit` at most).
    TooManyObservations { n: usize, limit: usize },
    /// All values are equal, so the statistic is undefined.
    ZeroRange,
    /// All nonzero residuals have one sign: there is no runs distribution.
    OneSignOnly { n_pos: usize, n_neg: usize },
    /// Lack of fit needs more groups than parameters (c > p).
    TooFewGroups { groups: usize, params: usize },
    /// Lack of fit needs at least one group with replicates (n > c).
    NoReplicates { n: usize, groups: usize },
    /// The denominator sum of squares of an F ratio is zero.
    ZeroDenominator { what: &'static str },
}

impl fmt::Display for NotApplicable {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            NotApplicable::TooFewObservations { n, needed } => {
                write!(f, "{n} observations, at least {needed} needed")
            }
            NotApplicable::TooManyObservations { n, limit } => {
                write!(f, "{n} observations, the method covers at most {limit}")
            }
            NotApplicable::ZeroRange => write!(f, "all values are equal (zero range)"),
            NotApplicable::OneSignOnly { n_pos, n_neg } => write!(
                f,
                "{n_pos} positive and {n_neg} negative residuals: both signs are needed"
            ),
            NotApplicable::TooFewGroups { groups, params } => write!(
                f,
                "{groups} distinct predictor groups, more than {params} (the parameter count) needed"
            ),
            NotApplicable::NoReplicates { n, groups } => write!(
                f,
                "{n} observations in {groups} groups: no replicate readings to estimate pure error"
            ),
            NotApplicable::ZeroDenominator { what } => write!(f, "{what} is zero"),
        }
    }
}

/// A test result, or the reason it does not apply.
#[derive(Debug, Clone, PartialEq)]
pub enum Outcome<T> {
    /// The statistic was computed.
    Computed(T),
    /// The statistic does not apply to this data.
    NotApplicable(NotApplicable),
}

impl<T> Outcome<T> {
    /// The computed value, if any.
    pub fn computed(self) -> Option<T> {
        match self {
            Outcome::Computed(v) => Some(v),
            Outcome::NotApplicable(_) => None,
        }
    }

    /// The reason the test does not apply, if it does not.
    pub fn reason(&self) -> Option<&NotApplicable> {
        match self {
            Outcome::Computed(_) => None,
            Outcome::NotApplicable(r) => Some(r),
        }
    }
}

/// Check that every entry of `values` is finite.
pub(crate) fn ensure_finite(what: &'static str, values: &[f64]) -> Result<(), StatsError> {
    match values.iter().position(|v| !v.is_finite()) {
        Some(index) => Err(StatsError::NonFinite { what, index }),
        None => Ok(()),
    }
}

/// Check that `values` has `expected` entries.
pub(crate) fn ensure_len(
    what: &'static str,
    values: &[f64],
    expected: usize,
) -> Result<(), StatsError> {
    if values.len() == expected {
        Ok(())
    } else {
        Err(StatsError::LengthMismatch {
            what,
            expected,
            found: values.len(),
        })
    }
}

/// Row indices sorted by ascending `key`, ties kept in row order (a stable
/// sort). NaN keys are an error.
pub fn order_by_key(key: &[f64]) -> Result<Vec<usize>, StatsError> {
    ensure_finite("order key", key)?;
    let mut idx: Vec<usize> = (0..key.len()).collect();
    // Stable sort: equal keys keep their row order, as SPEC §13 requires.
    idx.sort_by(|&a, &b| key[a].total_cmp(&key[b]));
    Ok(idx)
}

/// `values` taken in ascending order of `key` (ties in row order), as [`order_by_key`] gives
/// it; borrowed as they are when the key is already in order (data recorded in order of the
/// predictor, the common case), so no index or copy of a million rows is made. NaN keys are
/// an error; `values` and `key` have the same length (checked by the callers).
pub fn in_key_order<'a>(
    values: &'a [f64],
    key: &[f64],
) -> Result<std::borrow::Cow<'a, [f64]>, StatsError> {
    ensure_finite("order key", key)?;
    // Non-decreasing keys: the stable sort would leave every row where it is.
    if key.is_sorted_by(|a, b| a.total_cmp(b).is_le()) {
        return Ok(values.into());
    }
    let order = order_by_key(key)?;
    Ok(order
        .iter()
        .filter_map(|&i| values.get(i).copied())
        .collect::<Vec<f64>>()
        .into())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn values_in_key_order_match_the_stable_order_and_borrow_when_in_order() {
        let values = [10.0, 20.0, 30.0, 40.0, 50.0];
        // Ties (2.0 twice) keep their row order.
        let shuffled = in_key_order(&values, &[3.0, 2.0, 5.0, 2.0, 1.0]).expect("finite keys");
        assert_eq!(&*shuffled, &[50.0, 20.0, 40.0, 10.0, 30.0]);
        assert!(matches!(shuffled, std::borrow::Cow::Owned(_)));
        let sorted = in_key_order(&values, &[1.0, 2.0, 2.0, 3.0, 9.0]).expect("finite keys");
        assert_eq!(&*sorted, &values);
        assert!(matches!(sorted, std::borrow::Cow::Borrowed(_)));
        assert_eq!(
            in_key_order(&values, &[1.0, f64::NAN, 2.0, 3.0, 4.0]),
            Err(StatsError::NonFinite {
                what: "order key",
                index: 1
            })
        );
    }
}
