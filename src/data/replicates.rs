//! Replicates (SPEC §13, §15): group labels per row, and `average_replicates = true`, which
//! replaces each group by its (weighted) mean with the group's total weight.
//!
//! Formula. For a group g with rows i, weights wᵢ (1 when the recipe has none) and values vᵢ
//! of every column (response, predictors and any other column read):
//!
//! ```text
//! W_g = Σᵢ wᵢ                 (= n_g, the group size, without weights)
//! v̄_g = Σᵢ wᵢ·vᵢ / W_g
//! ```
//!
//! Why this fits the same curve: when the model value f is the same for every row of the group
//! (equal predictors), `Σᵢ wᵢ·(yᵢ − f)² = Σᵢ wᵢ·(yᵢ − ȳ_g)² + W_g·(ȳ_g − f)²`. The first sum
//! (the pure-error sum of squares) does not depend on the parameters, so the weighted fit of
//! the means with weights W_g has the same minimum as the fit of all rows (Draper & Smith,
//! *Applied Regression Analysis*, 3rd ed., §2.1 on pure error and lack of fit; from memory).
//! With wᵢ = 1/σᵢ², W_g = 1/σ²(ȳ_g), the variance of the weighted mean, so
//! `uncertainty = "weights"` stays valid. The fit of means has fewer degrees of freedom and no
//! pure error left: its residual statistics describe the means, not the single readings.
//! When predictors vary inside a group (measured set points), their weighted means are used.

use std::collections::HashMap;

use super::Dataset;
use super::number::number_label;
use crate::error::{Error, Result};

/// Replicate group labels, one per row: the `[fit] groups` column when the recipe has one,
/// else equal values of the predictors (SPEC §13), written as `20` or `20, 1.5` for two
/// predictors. Predictors missing from the dataset are left out.
pub fn replicate_labels(ds: &Dataset, predictors: &[&str]) -> Vec<String> {
    if let Some(g) = &ds.groups {
        return g.clone();
    }
    let cols: Vec<&[f64]> = predictors.iter().filter_map(|p| ds.column(p)).collect();
    (0..ds.len())
        .map(|i| {
            cols.iter()
                .filter_map(|c| c.get(i).map(|v| number_label(*v)))
                .collect::<Vec<_>>()
                .join(", ")
        })
        .collect()
}

/// Group means of a dataset (see the module documentation for the formula).
#[derive(Debug, Clone)]
pub struct Averaged {
    /// One row per group, groups in order of first appearance; each row keeps the origin of
    /// the group's first row, and [`Dataset::groups`] holds the group labels.
    pub data: Dataset,
    /// W_g, the weight of each mean.
    pub weights: Vec<f64>,
    /// n_g, the rows in each group.
    pub sizes: Vec<usize>,
    /// The rows of the input dataset in each group.
    pub members: Vec<Vec<usize>>,
}

/// Replace each replicate group by its weighted mean. `labels` has one label per row (from
/// [`replicate_labels`]); rows of different channels never share a group. `weights` are the
/// row weights, if any; they must be finite and positive.
pub fn average_replicates(
    ds: &Dataset,
    labels: &[String],
    weights: Option<&[f64]>,
) -> Result<Averaged> {
    let n = ds.len();
    if labels.len() != n || weights.is_some_and(|w| w.len() != n) {
        return Err(Error::internal(format!(
            "replicate averaging got {} labels and {} weights for {n} rows",
            labels.len(),
            weights.map_or(n, <[f64]>::len)
        )));
    }
    let weight = |i: usize| weights.and_then(|w| w.get(i).copied()).unwrap_or(1.0);
    if let Some(i) = (0..n).find(|&i| !(weight(i).is_finite() && weight(i) > 0.0)) {
        return Err(Error::input(format!(
            "replicate averaging needs positive weights, but the weight at {} is {}",
            ds.describe_row(i),
            weight(i)
        ))
        .help("every weight must be a positive number"));
    }
    let channel = |i: usize| {
        ds.channels
            .as_ref()
            .and_then(|c| c.get(i))
            .map(String::as_str)
    };
    let mut index: HashMap<(Option<&str>, &str), usize> = HashMap::new();
    let mut members: Vec<Vec<usize>> = Vec::new();
    for (i, label) in labels.iter().enumerate() {
        let key = (channel(i), label.as_str());
        let g = *index.entry(key).or_insert_with(|| {
            members.push(Vec::new());
            members.len() - 1
        });
        if let Some(m) = members.get_mut(g) {
            m.push(i);
        }
    }
    let totals: Vec<f64> = members
        .iter()
        .map(|rows| rows.iter().map(|&i| weight(i)).sum())
        .collect();
    let firsts: Vec<usize> = members.iter().filter_map(|m| m.first().copied()).collect();
    let mut data = ds.select(&firsts);
    // `select` keeps the first row's origin; the rows of each file are now the groups.
    data.columns = ds
        .columns
        .iter()
        .map(|col| {
            members
                .iter()
                .zip(&totals)
                .map(|(rows, total)| {
                    rows.iter()
                        .map(|&i| weight(i) * col.get(i).copied().unwrap_or(f64::NAN))
                        .sum::<f64>()
                        / total
                })
                .collect()
        })
        .collect();
    data.groups = Some(
        firsts
            .iter()
            .map(|&i| labels.get(i).cloned().unwrap_or_default())
            .collect(),
    );
    Ok(Averaged {
        data,
        sizes: members.iter().map(Vec::len).collect(),
        weights: totals,
        members,
    })
}

#[cfg(test)]
mod tests {
    use std::collections::BTreeMap;
    use std::path::PathBuf;

    use nalgebra::DMatrix;

    use super::*;
    use crate::data::{LoadedFile, RowOrigin};
    use crate::fit::linear::fit_linear;

    /// Three set points with three, two and three readings.
    fn dataset(x: &[f64], y: &[f64], groups: Option<&[&str]>) -> Dataset {
        Dataset {
            variables: vec!["x".into(), "y".into()],
            headers: vec!["setpoint".into(), "reading".into()],
            columns: vec![x.to_vec(), y.to_vec()],
            origins: (0..x.len())
                .map(|i| RowOrigin {
                    file: 0,
                    line: i + 2,
                })
                .collect(),
            files: vec![LoadedFile {
                path: PathBuf::from("reps.csv"),
                sha256: String::new(),
                rows: x.len(),
                sheet: None,
            }],
            skipped: Vec::new(),
            file_units: BTreeMap::new(),
            channels: None,
            groups: groups.map(|g| g.iter().map(|s| s.to_string()).collect()),
            rejected: Vec::new(),
        }
    }

    const X: [f64; 8] = [0.0, 0.0, 0.0, 10.0, 10.0, 20.0, 20.0, 20.0];
    const Y: [f64; 8] = [1.0, 1.1, 1.5, 3.0, 3.4, 5.2, 4.9, 5.2];

    #[test]
    fn equal_predictor_values_form_the_groups() {
        let ds = dataset(&X, &Y, None);
        let labels = replicate_labels(&ds, &["x"]);
        assert_eq!(labels, ["0", "0", "0", "10", "10", "20", "20", "20"]);
        let ds = dataset(&X, &Y, Some(&["a", "a", "b", "b", "c", "c", "d", "d"]));
        assert_eq!(replicate_labels(&ds, &["x"])[2], "b");
    }

    #[test]
    fn unweighted_means_have_the_group_sizes_as_weights() {
        let ds = dataset(&X, &Y, None);
        let labels = replicate_labels(&ds, &["x"]);
        let avg = average_replicates(&ds, &labels, None).expect("valid input");
        // By hand: (1.0 + 1.1 + 1.5)/3 = 1.2, (3.0 + 3.4)/2 = 3.2, (5.2 + 4.9 + 5.2)/3 = 5.1.
        let y = avg.data.column("y").expect("y column");
        for (got, want) in y.iter().zip([1.2, 3.2, 5.1]) {
            assert!((got - want).abs() < 1e-12, "{got} vs {want}");
        }
        assert_eq!(avg.data.column("x"), Some(&[0.0, 10.0, 20.0][..]));
        assert_eq!(avg.weights, [3.0, 2.0, 3.0]);
        assert_eq!(avg.sizes, [3, 2, 3]);
        assert_eq!(avg.members, [vec![0, 1, 2], vec![3, 4], vec![5, 6, 7]]);
        assert_eq!(
            avg.data.origins.iter().map(|o| o.line).collect::<Vec<_>>(),
            [2, 5, 7]
        );
        assert_eq!(avg.data.groups.as_deref().map(<[String]>::len), Some(3));
    }

    #[test]
    fn weighted_means_sum_the_weights() {
        let ds = dataset(&X, &Y, None);
        let labels = replicate_labels(&ds, &["x"]);
        let w = [1.0, 2.0, 1.0, 1.0, 3.0, 0.5, 0.5, 1.0];
        let avg = average_replicates(&ds, &labels, Some(&w)).expect("valid input");
        // By hand: (1.0 + 2.2 + 1.5)/4 = 1.175; (3.0 + 10.2)/4 = 3.3;
        // (2.6 + 2.45 + 5.2)/2 = 5.125.
        let y = avg.data.column("y").expect("y column");
        for (got, want) in y.iter().zip([1.175, 3.3, 5.125]) {
            assert!((got - want).abs() < 1e-12, "{got} vs {want}");
        }
        assert_eq!(avg.weights, [4.0, 4.0, 2.0]);
    }

    #[test]
    fn the_fit_of_the_means_equals_the_fit_of_all_rows() {
        // The decomposition in the module documentation: with predictors equal inside each
        // group, the weighted straight line through the means has the coefficients of the
        // line through all rows.
        let w = [1.0, 2.0, 1.0, 1.0, 3.0, 0.5, 0.5, 1.0];
        let design =
            |x: &[f64]| DMatrix::from_fn(x.len(), 2, |i, j| if j == 0 { 1.0 } else { x[i] });
        let all = fit_linear(&design(&X), &Y, Some(&w), &["a", "b"]).expect("full fit");
        let ds = dataset(&X, &Y, None);
        let labels = replicate_labels(&ds, &["x"]);
        let avg = average_replicates(&ds, &labels, Some(&w)).expect("valid input");
        let xm = avg.data.column("x").expect("x").to_vec();
        let ym = avg.data.column("y").expect("y").to_vec();
        let means =
            fit_linear(&design(&xm), &ym, Some(&avg.weights), &["a", "b"]).expect("fit of means");
        for (a, b) in all.coefficients.iter().zip(&means.coefficients) {
            assert!((a - b).abs() < 1e-12 * a.abs().max(1.0), "{a} vs {b}");
        }
    }

    #[test]
    fn rows_of_different_channels_never_share_a_group() {
        let mut ds = dataset(&X, &Y, None);
        ds.channels = Some(
            ["A", "B", "A", "A", "A", "A", "A", "A"]
                .map(String::from)
                .to_vec(),
        );
        let labels = replicate_labels(&ds, &["x"]);
        let avg = average_replicates(&ds, &labels, None).expect("valid input");
        assert_eq!(avg.sizes, [2, 1, 2, 3]);
        assert_eq!(
            avg.data.channels.as_deref(),
            Some(&["A", "B", "A", "A"].map(String::from)[..])
        );
    }

    #[test]
    fn non_positive_weights_are_refused() {
        let ds = dataset(&X, &Y, None);
        let labels = replicate_labels(&ds, &["x"]);
        let w = [1.0, 0.0, 1.0, 1.0, 1.0, 1.0, 1.0, 1.0];
        let err = average_replicates(&ds, &labels, Some(&w))
            .err()
            .map(|e| e.message.clone());
        assert!(err.is_some_and(|m| m.contains("line 3 of reps.csv")));
    }
}
