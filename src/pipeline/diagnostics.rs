//! Residual diagnostics of a solved fit (SPEC §6): the measures the criteria read and the
//! rows the report shows.

use std::collections::{BTreeMap, HashMap};

use crate::acceptance::{Measure, RunsMeasure};
use crate::model::Prepared;
use crate::recipe::{Recipe, UncertaintyMode};
use crate::report::{DiagnosticRow, format as fmt};
use crate::stats::{self, Outcome};

use super::solve::Solved;

/// Diagnostics of one fit.
#[derive(Debug, Clone)]
pub struct Diagnostics {
    pub runs: RunsMeasure,
    pub normality_p: Measure,
    pub durbin_watson: Measure,
    pub lack_of_fit_p: Measure,
    pub max_cooks: Measure,
    pub standardized: Vec<Option<f64>>,
    /// Leverage per row (every row has one when the influence figures were computed).
    pub leverage: Vec<f64>,
    pub cooks: Vec<Option<f64>>,
    pub aic: Option<f64>,
    pub aicc: Option<f64>,
    pub bic: Option<f64>,
    pub rows: Vec<DiagnosticRow>,
    pub json: BTreeMap<String, serde_json::Value>,
}

impl Default for Diagnostics {
    fn default() -> Self {
        let na = || Measure::NotApplicable("not computed".into());
        Diagnostics {
            runs: RunsMeasure::NotApplicable("not computed".into()),
            normality_p: na(),
            durbin_watson: na(),
            lack_of_fit_p: na(),
            max_cooks: na(),
            standardized: Vec::new(),
            leverage: Vec::new(),
            cooks: Vec::new(),
            aic: None,
            aicc: None,
            bic: None,
            rows: Vec::new(),
            json: BTreeMap::new(),
        }
    }
}

impl Diagnostics {
    pub fn to_json(&self) -> BTreeMap<String, serde_json::Value> {
        self.json.clone()
    }
}

/// Replicate groups: rows with identical predictor values (bit for bit) share a label;
/// labels are numbered in order of first appearance. Rows are ordered by a stable sort of
/// their values (linear for data already in order, n·log n otherwise), so large data sets
/// with few replicates need neither a quadratic search nor a hash table of every row.
pub fn replicate_groups(x: &[&[f64]], n: usize) -> Vec<usize> {
    let bits = |i: usize, c: &[f64]| c.get(i).copied().unwrap_or(f64::NAN).to_bits();
    let cmp = |a: usize, b: usize| {
        x.iter()
            .map(|c| bits(a, c).cmp(&bits(b, c)))
            .find(|o| o.is_ne())
            .unwrap_or(std::cmp::Ordering::Equal)
    };
    let mut order: Vec<usize> = (0..n).collect();
    order.sort_by(|&a, &b| cmp(a, b));
    // The stable sort keeps row order among equal values: a run's first row is the group's
    // first appearance.
    let mut first = vec![0usize; n];
    let mut run_start = 0;
    for k in 0..order.len() {
        if k == 0 || cmp(order[k - 1], order[k]).is_ne() {
            run_start = order[k];
        }
        first[order[k]] = run_start;
    }
    let mut ids = vec![0usize; n];
    let mut next = 0;
    for i in 0..n {
        let f = first[i];
        ids[i] = if f == i {
            next += 1;
            next - 1
        } else {
            // f < i: its label is already set.
            ids[f]
        };
    }
    ids
}

/// Labels to group numbers, in order of first appearance.
fn label_groups(labels: &[String]) -> Vec<usize> {
    let mut ids: HashMap<&str, usize> = HashMap::new();
    labels
        .iter()
        .map(|l| {
            let next = ids.len();
            *ids.entry(l.as_str()).or_insert(next)
        })
        .collect()
}

fn na_text(n: &stats::NotApplicable) -> String {
    n.to_string()
}

/// Compute the diagnostics of a fit (SPEC §6, §13): on Pearson residuals √w·e, in ascending
/// order of the predictor (by fitted value with several predictors; ties by row order).
pub fn compute(recipe: &Recipe, prep: &Prepared, solved: &Solved) -> Diagnostics {
    let mut d = Diagnostics::default();
    let est = &solved.estimate;
    let n = est.residuals.len();
    let w = prep.weights.as_deref();
    let pearson: Vec<f64> = est
        .residuals
        .iter()
        .enumerate()
        .map(|(i, e)| e * w.map_or(1.0, |w| w[i].sqrt()))
        .collect();
    let x = prep.x();
    let key: &[f64] = if x.len() == 1 { x[0] } else { &est.fitted };
    let order_label = if x.len() == 1 {
        format!("in ascending order of {}", prep.model.predictors[0])
    } else {
        "in ascending order of the fitted values".to_string()
    };
    let p = solved.names.len();
    // Runs test.
    match stats::runs::runs_test(&pearson, key) {
        Ok(Outcome::Computed(r)) => {
            let min_p = stats::runs::min_attainable_p(r.n_pos, r.n_neg).unwrap_or(1.0);
            d.runs = RunsMeasure::Value {
                p: r.p_value,
                min_attainable_p: min_p,
            };
            let method = match r.method {
                stats::runs::RunsMethod::Exact => "exact (Swed & Eisenhart)",
                _ => "normal approximation with continuity correction",
            };
            d.rows.push(DiagnosticRow {
                test: "runs test of residual signs (one-sided: too few runs)".into(),
                statistic: format!(
                    "{} runs ({} +, {} −; {} expected)",
                    r.runs,
                    r.n_pos,
                    r.n_neg,
                    fmt::num(r.expected_runs)
                ),
                p_value: fmt::p_value(r.p_value),
                conclusion: if r.p_value < 0.05 {
                    "too few runs: residuals cluster on one side of the curve".into()
                } else {
                    "no sign of clustering".into()
                },
                note: Some(format!("{order_label}; {method}")),
            });
            d.json.insert("runs".into(), serde_json::json!({"runs": r.runs, "n_pos": r.n_pos, "n_neg": r.n_neg, "expected": r.expected_runs, "p": r.p_value, "min_attainable_p": min_p, "method": method}));
        }
        Ok(Outcome::NotApplicable(why)) => {
            d.runs = RunsMeasure::NotApplicable(na_text(&why));
            d.rows.push(na_row("runs test of residual signs", &why));
        }
        Err(e) => d.runs = RunsMeasure::NotApplicable(e.to_string()),
    }
    // Durbin–Watson.
    match stats::durbin_watson::durbin_watson_ordered(&pearson, key) {
        Ok(Outcome::Computed(v)) => {
            d.durbin_watson = Measure::Value(v);
            d.rows.push(DiagnosticRow {
                test: "Durbin–Watson d".into(),
                statistic: fmt::num(v),
                p_value: "—".into(),
                conclusion: if v < 1.0 {
                    "strong positive serial correlation of residuals".into()
                } else if v > 3.0 {
                    "strong negative serial correlation".into()
                } else {
                    "no strong serial correlation (d near 2)".into()
                },
                note: Some(order_label.clone()),
            });
            d.json.insert("durbin_watson".into(), serde_json::json!(v));
        }
        Ok(Outcome::NotApplicable(why)) => d.durbin_watson = Measure::NotApplicable(na_text(&why)),
        Err(e) => d.durbin_watson = Measure::NotApplicable(e.to_string()),
    }
    // Shapiro–Wilk.
    match stats::normality::shapiro_wilk(&pearson) {
        Ok(Outcome::Computed(sw)) => {
            d.normality_p = Measure::Value(sw.p_value);
            d.rows.push(DiagnosticRow {
                test: "Shapiro–Wilk normality of residuals".into(),
                statistic: format!("W = {}", fmt::sig(sw.w, 5)),
                p_value: fmt::p_value(sw.p_value),
                conclusion: if sw.p_value < 0.05 {
                    "residuals depart from a normal distribution".into()
                } else {
                    "consistent with normal residuals".into()
                },
                note: Some("Royston (1995), algorithm AS R94".into()),
            });
            d.json.insert(
                "shapiro_wilk".into(),
                serde_json::json!({"w": sw.w, "p": sw.p_value}),
            );
        }
        Ok(Outcome::NotApplicable(why)) => {
            d.normality_p = Measure::NotApplicable(na_text(&why));
            d.rows
                .push(na_row("Shapiro–Wilk normality of residuals", &why));
        }
        Err(e) => d.normality_p = Measure::NotApplicable(e.to_string()),
    }
    // Leverage, standardized residuals, Cook's distance of the weighted design W½·J of the
    // free columns, passed as J's columns and the weights: for large n the design is never
    // copied (each n × p copy of a million rows is 24 MB).
    let jac = &est.jacobian;
    let rows = jac.nrows();
    let free_cols: Vec<&[f64]> = (0..jac.ncols())
        .filter(|j| !est.at_bound.get(*j).copied().unwrap_or(false))
        .filter_map(|j| jac.as_slice().get(j * rows..(j + 1) * rows))
        .collect();
    let influence = stats::influence::influence_of_columns(
        &free_cols,
        &est.residuals,
        w,
        solved.statistics.residual_sd,
    );
    match influence {
        Ok(inf) => {
            let (imax, cmax) = inf
                .cooks_distance
                .iter()
                .enumerate()
                .filter_map(|(i, c)| c.map(|c| (i, c)))
                .fold((None, f64::NEG_INFINITY), |(bi, bc), (i, c)| {
                    if c > bc { (Some(i), c) } else { (bi, bc) }
                });
            match imax {
                Some(i) => {
                    d.max_cooks = Measure::Value(cmax);
                    let flagged: Vec<usize> = inf
                        .cooks_distance
                        .iter()
                        .enumerate()
                        .filter(|(_, c)| c.is_some_and(|c| c > 4.0 / n as f64))
                        .map(|(i, _)| i)
                        .collect();
                    d.rows.push(DiagnosticRow {
                        test: "largest Cook's distance".into(),
                        statistic: fmt::num(cmax),
                        p_value: "—".into(),
                        conclusion: format!("at {}", prep.data.describe_row(i)),
                        note: Some(if flagged.is_empty() {
                            "no point above 4/n".to_string()
                        } else {
                            format!(
                                "above 4/n (flagged, never dropped): {}",
                                prep.data.describe_rows(&flagged, 6)
                            )
                        }),
                    });
                    let big_h: Vec<usize> = inf
                        .leverage
                        .iter()
                        .enumerate()
                        .filter(|(_, h)| **h > 2.0 * p as f64 / n as f64)
                        .map(|(i, _)| i)
                        .collect();
                    if !big_h.is_empty() {
                        d.rows.push(DiagnosticRow {
                            test: "high leverage (h > 2p/n)".into(),
                            statistic: format!("{} point(s)", big_h.len()),
                            p_value: "—".into(),
                            conclusion: prep.data.describe_rows(&big_h, 6),
                            note: Some("flagged, never dropped".into()),
                        });
                    }
                }
                None => d.max_cooks = Measure::NotApplicable("every point has leverage 1".into()),
            }
            d.json
                .insert("max_cooks_distance".into(), serde_json::json!(cmax));
            d.leverage = inf.leverage;
            d.standardized = inf.standardized;
            d.cooks = inf.cooks_distance;
        }
        Err(e) => d.max_cooks = Measure::NotApplicable(e.to_string()),
    }
    // Lack of fit: replicate groups of equal predictor values.
    // Replicate groups: the `[fit] groups` column when given, else equal predictor values.
    let labels = match &prep.data.groups {
        Some(g) => label_groups(g),
        None => replicate_groups(&x, n),
    };
    match stats::lack_of_fit::lack_of_fit(
        prep.y(),
        &est.fitted,
        w,
        stats::lack_of_fit::Groups::Labels(&labels),
        p,
    ) {
        Ok(Outcome::Computed(l)) => {
            d.lack_of_fit_p = Measure::Value(l.p_value);
            d.rows.push(DiagnosticRow {
                test: "lack-of-fit F-test (pure error from replicates)".into(),
                statistic: format!(
                    "F = {} ({}, {} dof; {} groups)",
                    fmt::num(l.f),
                    l.dof_lack_of_fit,
                    l.dof_pure_error,
                    l.groups
                ),
                p_value: fmt::p_value(l.p_value),
                conclusion: if l.p_value < 0.05 {
                    "the model misses systematic structure beyond the replicate scatter".into()
                } else {
                    "no significant lack of fit".into()
                },
                note: None,
            });
            d.json.insert("lack_of_fit".into(), serde_json::json!({"f": l.f, "dof_lack_of_fit": l.dof_lack_of_fit, "dof_pure_error": l.dof_pure_error, "groups": l.groups, "p": l.p_value}));
        }
        Ok(Outcome::NotApplicable(why)) => {
            d.lack_of_fit_p = Measure::NotApplicable(na_text(&why));
            d.rows.push(na_row("lack-of-fit F-test", &why));
        }
        Err(e) => d.lack_of_fit_p = Measure::NotApplicable(e.to_string()),
    }
    // Information criteria.
    let model = match recipe.fit.uncertainty {
        UncertaintyMode::Weights => stats::information::VarianceModel::Known,
        UncertaintyMode::Residuals => stats::information::VarianceModel::Estimated,
    };
    if let Ok(ic) = stats::information::information_criteria(solved.statistics.ssr, n, p, model) {
        d.aic = Some(ic.aic);
        d.aicc = ic.aicc;
        d.bic = Some(ic.bic);
        d.json.insert(
            "information".into(),
            serde_json::json!({"k": ic.k, "aic": ic.aic, "aicc": ic.aicc, "bic": ic.bic}),
        );
    }
    d
}

fn na_row(test: &str, why: &stats::NotApplicable) -> DiagnosticRow {
    DiagnosticRow {
        test: test.into(),
        statistic: "—".into(),
        p_value: "—".into(),
        conclusion: "not applicable".into(),
        note: Some(na_text(why)),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn replicate_groups_number_equal_predictor_rows_in_order_of_first_appearance() {
        let t = [20.0, 25.0, 20.0, 30.0, 25.0, 20.0];
        let rh = [40.0, 40.0, 40.0, 40.0, 50.0, 40.0];
        assert_eq!(replicate_groups(&[&t], 6), [0, 1, 0, 2, 1, 0]);
        // With two predictors a row is a replicate only when both agree.
        assert_eq!(replicate_groups(&[&t, &rh], 6), [0, 1, 0, 2, 3, 0]);
        // Unsorted values with a NaN (bit patterns compare, so NaN groups with itself).
        let u = [3.0, f64::NAN, -1.0, 3.0, f64::NAN, 0.0, -0.0];
        assert_eq!(replicate_groups(&[&u], 7), [0, 1, 2, 0, 1, 3, 4]);
    }

    #[test]
    fn group_labels_number_in_order_of_first_appearance() {
        let labels: Vec<String> = ["b", "a", "b", "c"].iter().map(|s| s.to_string()).collect();
        assert_eq!(label_groups(&labels), [0, 1, 0, 2]);
    }
}
