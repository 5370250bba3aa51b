//! Residual diagnostics of a solved fit (SPEC §6): the measures the criteria read and the
//! rows the report shows.

use std::collections::BTreeMap;

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
    pub leverage: Vec<Option<f64>>,
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

/// Replicate groups: rows with identical predictor values (bit for bit) share a label.
pub fn replicate_groups(x: &[&[f64]], n: usize) -> Vec<usize> {
    let mut keys: Vec<Vec<u64>> = Vec::new();
    (0..n)
        .map(|i| {
            let key: Vec<u64> = x
                .iter()
                .map(|c| c.get(i).copied().unwrap_or(f64::NAN).to_bits())
                .collect();
            match keys.iter().position(|k| *k == key) {
                Some(g) => g,
                None => {
                    keys.push(key);
                    keys.len() - 1
                }
            }
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
    let key: Vec<f64> = if x.len() == 1 {
        x[0].to_vec()
    } else {
        est.fitted.clone()
    };
    let order_label = if x.len() == 1 {
        format!("in ascending order of {}", prep.model.predictors[0])
    } else {
        "in ascending order of the fitted values".to_string()
    };
    let p = solved.names.len();
    // Runs test.
    match stats::runs::runs_test(&pearson, &key) {
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
    match stats::durbin_watson::durbin_watson_ordered(&pearson, &key) {
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
    // Leverage, standardized residuals, Cook's distance.
    let mut a = est.jacobian.clone();
    if let Some(w) = w {
        for i in 0..a.nrows() {
            let sw = w.get(i).copied().unwrap_or(1.0).sqrt();
            for j in 0..a.ncols() {
                a[(i, j)] *= sw;
            }
        }
    }
    let free_cols: Vec<usize> = (0..a.ncols())
        .filter(|j| !est.at_bound.get(*j).copied().unwrap_or(false))
        .collect();
    let a = a.select_columns(&free_cols);
    match stats::influence::influence(&a, &est.residuals, w, solved.statistics.residual_sd) {
        Ok(inf) => {
            d.leverage = inf.leverage.iter().map(|h| Some(*h)).collect();
            d.standardized = inf.standardized.clone();
            d.cooks = inf.cooks_distance.clone();
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
        }
        Err(e) => d.max_cooks = Measure::NotApplicable(e.to_string()),
    }
    // Lack of fit: replicate groups of equal predictor values.
    // Replicate groups: the `[fit] groups` column when given, else equal predictor values.
    let labels = match &prep.data.groups {
        Some(g) => {
            let mut names: Vec<&String> = Vec::new();
            g.iter()
                .map(|l| match names.iter().position(|m| *m == l) {
                    Some(i) => i,
                    None => {
                        names.push(l);
                        names.len() - 1
                    }
                })
                .collect()
        }
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
