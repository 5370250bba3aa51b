//! From a solved fit to what is written: the acceptance measures, `result.json`
//! ([`crate::result::ResultDoc`]) and the report context ([`crate::report::ReportContext`]).
//! Pure: nothing here touches the disk.

use std::collections::BTreeMap;

use crate::acceptance::{
    self, Baseline, CriterionRow, Measure, Measures, ParamMeasure, RunsMeasure, Verdict,
};
use crate::expr;
use crate::model::Prepared;
use crate::recipe::{ColumnRef, Recipe};
use crate::report::{self, format as fmt};
use crate::result::*;

use super::diagnostics::Diagnostics;
use super::solve::Solved;

/// The curve's value at a setting of the predictors (all predictors must be given).
pub fn value_at(prep: &Prepared, solved: &Solved, at: &[(String, f64)]) -> Result<f64, String> {
    let rhs = prep.model.rhs_with_fixed();
    for p in &prep.model.predictors {
        if !at.iter().any(|(k, _)| k == p) {
            return Err(format!("`at` does not give the predictor `{p}`"));
        }
    }
    let lookup = |name: &str| {
        at.iter()
            .find(|(k, _)| k == name)
            .map(|(_, v)| *v)
            .or_else(|| {
                solved
                    .names
                    .iter()
                    .position(|n| n == name)
                    .and_then(|i| solved.estimate.params.get(i).copied())
            })
    };
    expr::eval_recursive(&rhs, &lookup)
}

/// The figures the acceptance criteria are judged on.
pub fn judge(
    recipe: &Recipe,
    prep: &Prepared,
    solved: &Solved,
    diag: &Diagnostics,
    baseline: Option<Baseline>,
) -> (Vec<CriterionRow>, Verdict) {
    let st = &solved.statistics;
    let est = &solved.estimate;
    let y = prep.y();
    let weighted = prep.weights.is_some();
    let max_abs = est.residuals.iter().fold(0.0_f64, |m, e| m.max(e.abs()));
    let max_rel = if y.contains(&0.0) {
        Measure::NotApplicable("an observed value is zero".into())
    } else {
        Measure::Value(
            est.residuals
                .iter()
                .zip(y)
                .fold(0.0_f64, |m, (e, v)| m.max((e / v).abs())),
        )
    };
    let (std_error, label) = if weighted {
        (
            rms_residual(solved),
            "unweighted RMS residual √(Σe²/(n−p)) (weighted fit)".to_string(),
        )
    } else {
        (
            st.residual_sd,
            "standard error of the estimate s".to_string(),
        )
    };
    let params: Vec<ParamMeasure> = prep
        .model
        .parameters
        .iter()
        .map(|p| {
            let i = solved.names.iter().position(|n| *n == p.name);
            ParamMeasure {
                name: p.name.clone(),
                value: p
                    .fixed
                    .or_else(|| i.and_then(|i| est.params.get(i).copied()))
                    .unwrap_or(f64::NAN),
                std_error: i.and_then(|i| solved.uncertainty.std_errors.get(i).copied().flatten()),
            }
        })
        .collect();
    let m = Measures {
        n: st.n,
        converged: est.converged,
        stop_reason: est.stop_reason.clone(),
        r_squared: st.r_squared.unwrap_or(f64::NAN),
        r_squared_label: r2_label(solved),
        adj_r_squared: st.adjusted_r_squared.unwrap_or(f64::NAN),
        std_error,
        std_error_label: label,
        max_abs_residual: max_abs,
        max_rel_residual: max_rel,
        runs: diag.runs.clone(),
        normality_p: diag.normality_p.clone(),
        durbin_watson: diag.durbin_watson.clone(),
        lack_of_fit_p: diag.lack_of_fit_p.clone(),
        max_cooks_distance: diag.max_cooks.clone(),
        params,
        baseline,
    };
    acceptance::judge(&recipe.acceptance, &m)
}

fn r2_label(solved: &Solved) -> String {
    match solved.statistics.r_squared_kind {
        crate::fit::covariance::RSquaredKind::Centred => "R² (centred)".into(),
        crate::fit::covariance::RSquaredKind::Uncentred => {
            "R² (uncentred: no constant term)".into()
        }
    }
}

/// √(Σe²/(n−p)) — the unweighted RMS residual.
pub fn rms_residual(solved: &Solved) -> f64 {
    let dof = solved.statistics.dof.max(1) as f64;
    (solved.estimate.residuals.iter().map(|e| e * e).sum::<f64>() / dof).sqrt()
}

/// Range [min, max] of a column.
pub fn range(v: &[f64]) -> [f64; 2] {
    v.iter()
        .fold([f64::INFINITY, f64::NEG_INFINITY], |[lo, hi], x| {
            [lo.min(*x), hi.max(*x)]
        })
}

fn param_results(prep: &Prepared, solved: &Solved) -> Vec<ParamResult> {
    let u = &solved.uncertainty;
    prep.model
        .parameters
        .iter()
        .map(|p| {
            let i = solved.names.iter().position(|n| *n == p.name);
            let get = |v: &[Option<f64>]| i.and_then(|i| v.get(i).copied().flatten());
            let interval = i.and_then(|i| u.intervals.get(i).copied().flatten());
            ParamResult {
                name: p.name.clone(),
                value: p
                    .fixed
                    .or_else(|| i.and_then(|i| solved.estimate.params.get(i).copied()))
                    .unwrap_or(f64::NAN),
                std_error: get(&u.std_errors),
                rel_std_error: get(&u.rel_std_errors),
                ci_low: interval.map(|x| x.0),
                ci_high: interval.map(|x| x.1),
                fixed: p.fixed.is_some(),
                at_bound: i
                    .and_then(|i| solved.estimate.at_bound.get(i).copied())
                    .unwrap_or(false),
                unit: p.unit.clone(),
            }
        })
        .collect()
}

fn statistics_doc(solved: &Solved, diag: &Diagnostics) -> Statistics {
    let st = &solved.statistics;
    Statistics {
        n: st.n,
        p: st.p,
        dof: st.dof,
        ssr: st.ssr,
        r_squared: st.r_squared,
        r_squared_kind: match st.r_squared_kind {
            crate::fit::covariance::RSquaredKind::Centred => "centred".into(),
            crate::fit::covariance::RSquaredKind::Uncentred => "uncentred".into(),
        },
        adj_r_squared: st.adjusted_r_squared,
        std_error: st.residual_sd,
        rms_residual: rms_residual(solved),
        max_abs_residual: solved
            .estimate
            .residuals
            .iter()
            .fold(0.0_f64, |m, e| m.max(e.abs())),
        quantile: solved.uncertainty.quantile,
        unit_variance: solved.uncertainty.unit_variance,
        chi_square: st
            .chi_square
            .map(|c| [c.statistic, c.dof as f64, c.p_value]),
        aic: diag.aic,
        aicc: diag.aicc,
        bic: diag.bic,
    }
}

fn matrix_rows(m: &nalgebra::DMatrix<f64>) -> Vec<Vec<f64>> {
    (0..m.nrows())
        .map(|i| (0..m.ncols()).map(|j| m[(i, j)]).collect())
        .collect()
}

/// The rows the residual table of `result.json` lists: every row up to
/// [`RESIDUAL_ROWS_ALL`]; above, the [`RESIDUAL_ROWS_KEPT`] rows with the largest
/// |standardized residual| (a row without one ranks by |residual| / s), in row order.
fn residual_selection(
    solved: &Solved,
    diag: &Diagnostics,
) -> (Vec<usize>, Option<ResidualSelection>) {
    let residuals = &solved.estimate.residuals;
    let n = residuals.len();
    if n <= RESIDUAL_ROWS_ALL {
        return ((0..n).collect(), None);
    }
    let s = solved.statistics.residual_sd;
    let size = |i: usize| {
        let v = match diag.standardized.get(i).copied().flatten() {
            Some(r) => r.abs(),
            None => residuals.get(i).map_or(0.0, |e| (e / s).abs()),
        };
        if v.is_nan() { f64::INFINITY } else { v }
    };
    // Sizes are taken once, not twice per comparison: the same comparisons on the same
    // values, so the same rows.
    let sizes: Vec<f64> = (0..n).map(size).collect();
    let size = |i: usize| sizes.get(i).copied().unwrap_or(f64::INFINITY);
    let mut rows: Vec<usize> = (0..n).collect();
    let k = RESIDUAL_ROWS_KEPT.min(n);
    rows.select_nth_unstable_by(k - 1, |&a, &b| size(b).total_cmp(&size(a)));
    rows.truncate(k);
    rows.sort_unstable();
    let rule = format!(
        "the {k} rows with the largest |standardized residual| of {n} (every row is listed up to {RESIDUAL_ROWS_ALL} rows)"
    );
    (
        rows,
        Some(ResidualSelection {
            total: n,
            listed: k,
            rule,
        }),
    )
}

/// Everything a run decided, as `result.json`.
#[allow(clippy::too_many_arguments)]
pub fn result_doc(
    recipe: &Recipe,
    prep: &Prepared,
    solved: &Solved,
    diag: &Diagnostics,
    rows: &[CriterionRow],
    verdict: Verdict,
    run_id: &str,
    generated_at: &str,
    analysis: serde_json::Value,
    warnings: &[String],
    start_diag: Option<&Diagnostics>,
) -> ResultDoc {
    let x = prep.x();
    let y = prep.y();
    let (listed, residual_rows) = residual_selection(solved, diag);
    let residuals = listed
        .into_iter()
        .map(|i| ResidualRow {
            origin: prep.data.describe_row(i),
            x: x.iter()
                .map(|c| c.get(i).copied().unwrap_or(f64::NAN))
                .collect(),
            y: y.get(i).copied().unwrap_or(f64::NAN),
            fitted: solved.estimate.fitted.get(i).copied().unwrap_or(f64::NAN),
            residual: solved
                .estimate
                .residuals
                .get(i)
                .copied()
                .unwrap_or(f64::NAN),
            weight: prep
                .weights
                .as_ref()
                .and_then(|w| w.get(i).copied())
                .unwrap_or(1.0),
            standardized: diag.standardized.get(i).copied().flatten(),
            leverage: diag.leverage.get(i).copied(),
            cooks_distance: diag.cooks.get(i).copied().flatten(),
        })
        .collect();
    let mut ranges = BTreeMap::new();
    let mut moments = BTreeMap::new();
    for (name, col) in prep.model.predictors.iter().zip(&x) {
        ranges.insert(name.clone(), range(col));
        moments.insert(name.clone(), Moments::of(col));
    }
    ranges.insert(prep.model.response.clone(), range(y));
    let start_fit = solved.start.as_ref().map(|s| StartFit {
        label: "linearized start".into(),
        transform: s.estimate.transform.clone().unwrap_or_default(),
        parameters: param_results(prep, s),
        statistics: statistics_doc(s, start_diag.unwrap_or(&Diagnostics::default())),
        diagnostics: start_diag.map(|d| d.to_json()).unwrap_or_default(),
    });
    ResultDoc {
        schema_version: SCHEMA_VERSION,
        tool: ToolInfo {
            name: "fitwright".into(),
            version: env!("CARGO_PKG_VERSION").into(),
        },
        run_id: run_id.into(),
        generated_at: generated_at.into(),
        recipe: RecipeInfo {
            path: recipe.source.path.display().to_string(),
            absolute_path: std::path::absolute(&recipe.source.path)
                .map(|p| p.display().to_string())
                .unwrap_or_default(),
            sha256: recipe.sha256.clone(),
            name: recipe.name.value.clone(),
            title: recipe.display_title().to_string(),
        },
        channel: None,
        verdict: verdict.code().into(),
        verdict_wording: verdict.wording().into(),
        criteria: rows
            .iter()
            .map(|r| CriterionDoc {
                key: r.key.clone(),
                criterion: r.criterion.clone(),
                limit: r.limit.clone(),
                limit_value: r.limit_value,
                measured: r.measured.clone(),
                measured_value: r.measured_value,
                status: match r.status {
                    acceptance::Status::Pass => "pass",
                    acceptance::Status::Fail => "fail",
                    acceptance::Status::NotApplicable => "not-applicable",
                }
                .into(),
                note: r.note.clone(),
            })
            .collect(),
        data: DataInfo {
            files: prep
                .data
                .files
                .iter()
                .map(|f| DataFileInfo {
                    path: f.path.display().to_string(),
                    sha256: f.sha256.clone(),
                    rows: f.rows,
                })
                .collect(),
            rows_read: prep.rows_read,
            rows_used: prep.data.len(),
            rows_filtered: prep.rows_filtered,
            rows_skipped: prep.data.skipped.len(),
            units: recipe.data.units.clone(),
            ranges,
            weights: recipe.fit.weights.as_ref().map(|w| w.value.clone()),
            moments,
        },
        model: ModelInfo {
            equation: prep.model.equation.clone(),
            preset: prep.model.preset.clone(),
            response: prep.model.response.clone(),
            predictors: prep.model.predictors.clone(),
            parameters: prep
                .model
                .parameters
                .iter()
                .map(|p| ParamInfo {
                    name: p.name.clone(),
                    start: p.start,
                    min: p.min,
                    max: p.max,
                    fixed: p.fixed,
                    unit: p.unit.clone(),
                })
                .collect(),
        },
        analysis,
        fit: FitInfo {
            method_requested: recipe.fit.method.name().into(),
            method_used: solved.estimate.method_used.clone(),
            transform: solved.estimate.transform.clone(),
            converged: solved.estimate.converged,
            stop_reason: solved.estimate.stop_reason.clone(),
            iterations: solved.estimate.iterations,
            jacobian_evaluations: solved.estimate.jacobian_evals,
            uncertainty: match recipe.fit.uncertainty {
                crate::recipe::UncertaintyMode::Residuals => "residuals".into(),
                crate::recipe::UncertaintyMode::Weights => "weights".into(),
            },
            confidence: recipe.fit.confidence,
            covariance_method: "σ²(JᵀWJ)⁻¹ at the solution, J = ∂f/∂θ exact (symbolic)".into(),
        },
        parameters: param_results(prep, solved),
        start_fit,
        free_parameters: solved.names.clone(),
        covariance: matrix_rows(&solved.uncertainty.covariance),
        correlation: matrix_rows(&solved.uncertainty.correlation),
        statistics: statistics_doc(solved, diag),
        diagnostics: diag.to_json(),
        residuals,
        residual_rows,
        compare: Vec::new(),
        calibration: None,
        warnings: warnings.to_vec(),
        settings: settings(recipe),
        metrology: None,
        as_found: None,
    }
}

/// Every setting that influenced the numbers, for traceability.
pub fn settings(recipe: &Recipe) -> BTreeMap<String, String> {
    let f = &recipe.fit;
    let mut s = BTreeMap::new();
    s.insert("fit.method".into(), f.method.name().into());
    s.insert(
        "fit.transform".into(),
        match &f.transform {
            crate::recipe::TransformSpec::Auto => "auto".into(),
            crate::recipe::TransformSpec::None => "none".into(),
            crate::recipe::TransformSpec::Expr(t) => t.value.clone(),
        },
    );
    s.insert(
        "fit.weights".into(),
        f.weights
            .as_ref()
            .map_or("none".into(), |w| w.value.clone()),
    );
    s.insert("fit.confidence".into(), f.confidence.to_string());
    s.insert(
        "fit.uncertainty".into(),
        match f.uncertainty {
            crate::recipe::UncertaintyMode::Residuals => "residuals".into(),
            crate::recipe::UncertaintyMode::Weights => "weights".into(),
        },
    );
    s.insert("fit.tolerance".into(), f.tolerance.to_string());
    s.insert(
        "fit.linearized_weights".into(),
        if f.linearized_delta_weights {
            "delta".into()
        } else {
            "none".into()
        },
    );
    if let Some(w) = &recipe.data.where_ {
        s.insert("data.where".into(), w.value.clone());
    }
    s.insert(
        "data.missing".into(),
        format!("{:?}", recipe.data.missing).to_lowercase(),
    );
    s
}

fn column_text(c: &ColumnRef) -> String {
    match c {
        ColumnRef::Name(n) => n.clone(),
        ColumnRef::Index(i) => format!("#{i}"),
    }
}

fn opt(v: Option<f64>) -> String {
    v.map_or("—".into(), fmt::num)
}

/// An interval end at the decimal place of the standard error (GUM 7.2.6), or [`opt`].
fn rounded_like(v: Option<f64>, se: Option<f64>) -> String {
    match (v, se) {
        (Some(v), Some(se)) => fmt::value_with_uncertainty(v, se).0,
        (v, _) => opt(v),
    }
}

/// The report context of a run.
pub fn report_context(
    recipe: &Recipe,
    prep: &Prepared,
    solved: &Solved,
    diag: &Diagnostics,
    doc: &ResultDoc,
    verdict: Verdict,
    rows: &[CriterionRow],
) -> report::ReportContext {
    let code = match verdict {
        Verdict::Accepted => report::VerdictCode::Accepted,
        Verdict::Rejected => report::VerdictCode::Rejected,
        Verdict::NotJudged => report::VerdictCode::NotJudged,
        Verdict::Invalid => report::VerdictCode::Invalid,
    };
    let mut v = report::Verdict::new(code);
    let failed = rows
        .iter()
        .filter(|r| r.status != acceptance::Status::Pass)
        .count();
    v.detail = Some(if recipe.acceptance.is_empty() {
        "the recipe has no [acceptance] criteria".into()
    } else {
        format!(
            "{} of {} criteria met; the fit {}",
            rows.len() - failed,
            rows.len(),
            if solved.estimate.converged {
                "converged".to_string()
            } else {
                format!("did not converge ({})", solved.estimate.stop_reason)
            }
        )
    });
    let mut ctx = report::ReportContext::new(recipe.name.value.clone(), recipe.display_title(), v);
    ctx.notes = recipe.notes.clone().unwrap_or_default();
    ctx.criteria = rows
        .iter()
        .map(|r| report::CriterionRow {
            criterion: r.criterion.clone(),
            limit: r.limit.clone(),
            measured: r.measured.clone(),
            status: match r.status {
                acceptance::Status::Pass => report::CriterionStatus::Pass,
                acceptance::Status::Fail => report::CriterionStatus::Fail,
                acceptance::Status::NotApplicable => report::CriterionStatus::NotApplicable,
            },
            note: r.note.clone(),
        })
        .collect();
    // Data.
    ctx.data.files = doc
        .data
        .files
        .iter()
        .map(|f| report::DataFile {
            path: f.path.clone(),
            rows: f.rows as u64,
            sha256: f.sha256.clone(),
        })
        .collect();
    ctx.data.rows_read = prep.rows_read as u64;
    ctx.data.rows_used = prep.data.len() as u64;
    ctx.data.rows_filtered = prep.rows_filtered as u64;
    ctx.data.rows_skipped = prep.data.skipped.len() as u64;
    ctx.data.filter = recipe.data.where_.as_ref().map(|w| w.value.clone());
    ctx.data.skipped_detail = prep
        .data
        .skipped
        .iter()
        .map(|s| {
            format!(
                "line {} of {}: {} in `{}`",
                s.line,
                s.file.display(),
                s.reason,
                s.column
            )
        })
        .collect();
    let mapped = |var: &str| {
        recipe
            .data
            .columns
            .iter()
            .find(|(v, _)| v.value == var)
            .map(|(_, c)| column_text(&c.value))
            .unwrap_or_else(|| var.to_string())
    };
    ctx.data.variables = std::iter::once((&prep.model.response, "response"))
        .chain(prep.model.predictors.iter().map(|p| (p, "predictor")))
        .map(|(v, role)| report::VariableRow {
            variable: v.clone(),
            role: role.into(),
            column: mapped(v),
            unit: recipe.data.units.get(v).cloned(),
        })
        .collect();
    // Model.
    ctx.model.equation = format!("{} = {}", prep.model.response, prep.model.rhs);
    ctx.model.preset = prep.model.preset.clone();
    ctx.model.parameters = prep
        .model
        .parameters
        .iter()
        .map(|p| report::ModelParameter {
            name: p.name.clone(),
            start: p.start.map(fmt::num),
            min: p.min.map(fmt::num),
            max: p.max.map(fmt::num),
            fixed: p.fixed.map(fmt::num),
            unit: p.unit.clone(),
        })
        .collect();
    ctx.model.fit_settings = vec![
        report::KeyValue::new("method asked", recipe.fit.method.name()),
        report::KeyValue::new("method used", solved.estimate.method_used.clone()),
        report::KeyValue::new(
            "weights",
            recipe
                .fit
                .weights
                .as_ref()
                .map_or("none".to_string(), |w| w.value.clone()),
        ),
        report::KeyValue::new("uncertainty", doc.fit.uncertainty.clone()),
        report::KeyValue::new("confidence level", fmt::percent(recipe.fit.confidence, 3)),
        report::KeyValue::new("stopped because", solved.estimate.stop_reason.clone()),
    ];
    // Parameters.
    let table = |label: &str, s: &Solved, note: Option<String>| report::ParameterTable {
        label: label.into(),
        note,
        interval_label: format!(
            "{} confidence interval",
            fmt::percent(recipe.fit.confidence, 3)
        ),
        rows: param_results(prep, s)
            .iter()
            .map(|p| report::ParameterRow {
                name: p.name.clone(),
                // GUM 7.2.6: the value to the decimal place of its 2-digit standard error; full
                // precision is in the coefficient table.
                value: p.std_error.map_or_else(
                    || fmt::full(p.value),
                    |se| fmt::value_with_uncertainty(p.value, se).0,
                ),
                std_error: p.std_error.map_or_else(
                    || {
                        if p.fixed {
                            "fixed".into()
                        } else if p.at_bound {
                            "at bound".into()
                        } else {
                            "—".into()
                        }
                    },
                    fmt::uncertainty,
                ),
                rel_std_error: p.rel_std_error.map_or("—".into(), |r| fmt::percent(r, 3)),
                ci_low: rounded_like(p.ci_low, p.std_error),
                ci_high: rounded_like(p.ci_high, p.std_error),
                unit: p.unit.clone(),
                note: if p.fixed {
                    Some("held fixed".into())
                } else if p.at_bound {
                    Some("ended at a bound: no standard error".into())
                } else {
                    None
                },
            })
            .collect(),
    };
    if let Some(start) = &solved.start {
        ctx.parameter_tables.push(table(
            &format!("linearized start (transform {})", start.estimate.transform.as_deref().unwrap_or("?")),
            start,
            Some("from the linear fit of the transformed data, back-transformed; standard errors by the delta method (transformed-space covariance)".into()),
        ));
        ctx.differences = Some(difference_table(prep, start, solved, doc));
    }
    ctx.parameter_tables.push(table(
        if solved.start.is_some() {
            "refined fit (original space)"
        } else {
            "fitted parameters"
        },
        solved,
        Some(format!(
            "standard errors from {}",
            doc.fit.covariance_method
        )),
    ));
    // Statistics.
    let st = &doc.statistics;
    let mut stats = vec![
        report::StatRow::new("n", "observations n", st.n.to_string()),
        report::StatRow::new("p", "free parameters p", st.p.to_string()),
        report::StatRow::new("dof", "degrees of freedom n − p", st.dof.to_string()),
        report::StatRow::new("ssr", "residual sum of squares Σw·e²", fmt::num(st.ssr)),
        report::StatRow::new(
            "r_squared",
            r2_label(solved),
            st.r_squared.map_or("—".into(), |r| fmt::sig(r, 8)),
        ),
        report::StatRow::new(
            "adj_r_squared",
            "adjusted R²",
            st.adj_r_squared.map_or("—".into(), |r| fmt::sig(r, 8)),
        ),
        report::StatRow::new(
            "std_error",
            "standard error of the estimate s = √(SSR/(n−p))",
            fmt::num(st.std_error),
        ),
        report::StatRow::new(
            "max_abs_residual",
            "largest |residual|",
            fmt::num(st.max_abs_residual),
        ),
    ];
    if prep.weights.is_some() {
        stats.push(report::StatRow::new(
            "rms_residual",
            "unweighted RMS residual √(Σe²/(n−p))",
            fmt::num(st.rms_residual),
        ));
    }
    if let Some([chi, dof, p]) = st.chi_square {
        stats.push(report::StatRow::new(
            "chi_square",
            format!("χ² goodness of fit ({dof} dof)"),
            format!("{} (p = {})", fmt::num(chi), fmt::p_value(p)),
        ));
    }
    for (key, label, v) in [
        ("aic", "AIC", st.aic),
        ("aicc", "AICc", st.aicc),
        ("bic", "BIC", st.bic),
    ] {
        if let Some(v) = v {
            stats.push(report::StatRow::new(key, label, fmt::num(v)));
        }
    }
    ctx.statistics = stats;
    ctx.diagnostics = diag.rows.clone();
    ctx.warnings = doc.warnings.clone();
    ctx.signoff = recipe.report.signoff.clone();
    ctx.traceability = report::Traceability {
        run_id: doc.run_id.clone(),
        generated_at: doc.generated_at.clone(),
        time_from_source_date_epoch: false,
        recipe: report::HashedFile {
            path: doc.recipe.path.clone(),
            sha256: doc.recipe.sha256.clone(),
        },
        data_files: doc
            .data
            .files
            .iter()
            .map(|f| report::HashedFile {
                path: f.path.clone(),
                sha256: f.sha256.clone(),
            })
            .collect(),
        templates_sha256: String::new(),
        templates_source: String::new(),
        tool_version: format!("fitwright {}", env!("CARGO_PKG_VERSION")),
        settings: doc
            .settings
            .iter()
            .map(|(k, v)| report::KeyValue::new(k.clone(), v.clone()))
            .collect(),
    };
    ctx
}

/// Runs-test measure when the diagnostics are not computed.
pub fn no_runs(reason: &str) -> RunsMeasure {
    RunsMeasure::NotApplicable(reason.into())
}

/// The analysis as the report shows it.
pub fn analysis_summary(a: &crate::analysis::Analysis) -> report::AnalysisSummary {
    use crate::analysis::BackMethod;
    let lin = a.linearization();
    report::AnalysisSummary {
        outcome: a.outcome.label().to_string(),
        transform: lin.map(|l| {
            if l.identity {
                "none".to_string()
            } else {
                l.transform.to_math()
            }
        }),
        derivation: crate::analysis::explain_text(a)
            .lines()
            .filter(|l| !l.trim().is_empty())
            .map(|l| l.trim_end().to_string())
            .collect(),
        basis: lin.map_or_else(Vec::new, |l| {
            l.basis
                .iter()
                .enumerate()
                .map(|(j, b)| format!("h{} = {}", j + 1, b.h.to_math()))
                .collect()
        }),
        coefficient_map: lin.map_or_else(Vec::new, |l| {
            l.basis
                .iter()
                .zip(&l.coefficient_names)
                .map(|(b, c)| format!("{c} = {}", b.g.to_math()))
                .collect()
        }),
        back_transform: lin.map_or_else(Vec::new, |l| {
            l.back_transform
                .iter()
                .map(|s| match (&s.method, &s.formula) {
                    (BackMethod::Symbolic, Some(f)) => format!("{} = {}", s.parameter, f.to_math()),
                    _ => format!("{} by Newton's method from its start value", s.parameter),
                })
                .collect()
        }),
        conditions: lin.map_or_else(Vec::new, |l| {
            l.conditions
                .iter()
                .map(|c| report::ConditionRow {
                    condition: c.expr.to_math(),
                    applies_to: match c.scope {
                        crate::analysis::Scope::Data => "every data row".into(),
                        crate::analysis::Scope::Parameters => "the fitted parameters".into(),
                        crate::analysis::Scope::Mixed => {
                            "every row, with the fitted parameters".into()
                        }
                    },
                    result: c.reason.clone(),
                })
                .collect()
        }),
        remarks: lin.map_or_else(Vec::new, |l| l.notes.clone()),
    }
}

/// "R² 0.99790 · s 0.61 · runs p 0.0031" for one fit.
pub fn fit_line(st: &Statistics, diag: &BTreeMap<String, serde_json::Value>) -> String {
    let mut parts = vec![];
    if let Some(r2) = st.r_squared {
        parts.push(format!("R² {}", fmt::sig(r2, 6)));
    }
    parts.push(format!("s {}", fmt::num(st.std_error)));
    if let Some(p) = diag
        .get("runs")
        .and_then(|r| r.get("p"))
        .and_then(|p| p.as_f64())
    {
        parts.push(format!("runs p {}", fmt::p_value(p)));
    }
    if let Some(p) = diag
        .get("shapiro_wilk")
        .and_then(|r| r.get("p"))
        .and_then(|p| p.as_f64())
    {
        parts.push(format!("Shapiro–Wilk p {}", fmt::p_value(p)));
    }
    parts.join(" · ")
}

/// The linearization bias: the refined parameters against the linearized start.
fn difference_table(
    prep: &Prepared,
    start: &Solved,
    refined: &Solved,
    doc: &ResultDoc,
) -> report::DifferenceTable {
    let a = param_results(prep, start);
    let b = param_results(prep, refined);
    let rows = a
        .iter()
        .zip(&b)
        .filter(|(x, _)| !x.fixed)
        .map(|(x, y)| {
            let d = y.value - x.value;
            report::DifferenceRow {
                name: x.name.clone(),
                from: fmt::full(x.value),
                to: fmt::full(y.value),
                difference: fmt::num(d),
                relative: if y.value != 0.0 {
                    fmt::percent(d / y.value.abs(), 3)
                } else {
                    "—".into()
                },
                in_std_errors: y
                    .std_error
                    .filter(|se| *se > 0.0)
                    .map_or("—".into(), |se| fmt::sig(d / se, 3)),
            }
        })
        .collect();
    let start_line = doc
        .start_fit
        .as_ref()
        .map(|s| fit_line(&s.statistics, &s.diagnostics))
        .unwrap_or_default();
    report::DifferenceTable {
        from_label: "linearized start".into(),
        to_label: "refined".into(),
        note: Some(format!(
            "refined − linearized start: the bias of the linearized fit, also in units of the refined standard error. Linearized start: {start_line}; refined: {}",
            fit_line(&doc.statistics, &doc.diagnostics)
        )),
        rows,
    }
}

/// Detection and quantification limits of a straight-line calibration (ICH Q2(R1)):
/// LOD = 3.3·σ/b, LOQ = 10·σ/b, σ the unweighted residual SD of the line (or the standard
/// error of the intercept with `[limits] sigma = "intercept"`), b the slope; in predictor units.
#[derive(Debug, Clone, serde::Serialize)]
pub struct CalibrationFigures {
    pub lod: f64,
    pub loq: f64,
    pub sigma: f64,
    pub sigma_kind: String,
    pub slope: f64,
    pub unit: String,
}

impl CalibrationFigures {
    pub fn rows(&self) -> Vec<report::StatRow> {
        let note = Some(format!(
            "ICH Q2(R1): 3.3·σ/slope and 10·σ/slope with σ = {} ({}); they assume a linear, homoscedastic response near the limit",
            fmt::num(self.sigma),
            self.sigma_kind
        ));
        let u = if self.unit.is_empty() {
            String::new()
        } else {
            format!(" {}", self.unit)
        };
        let mut a = report::StatRow::new(
            "lod",
            "limit of detection (LOD)",
            format!("{}{u}", fmt::num(self.lod)),
        );
        a.note = note.clone();
        let mut b = report::StatRow::new(
            "loq",
            "limit of quantification (LOQ)",
            format!("{}{u}", fmt::num(self.loq)),
        );
        b.note = note;
        vec![a, b]
    }
}

/// LOD and LOQ when the model is a straight line `b0 + b1·x` in its one predictor.
pub fn calibration_figures(
    recipe: &Recipe,
    prep: &Prepared,
    solved: &Solved,
) -> Option<CalibrationFigures> {
    if prep.model.predictors.len() != 1
        || solved.names.len() != 2
        || solved.estimate.method_used != "linear"
    {
        return None;
    }
    let x = &prep.model.predictors[0];
    let rhs = prep.model.rhs_with_fixed();
    let slope_expr = expr::simplify(&expr::derivative(&rhs, x));
    if slope_expr.mentions(x) {
        return None;
    }
    let l = |n: &str| {
        solved
            .names
            .iter()
            .position(|p| p == n)
            .and_then(|i| solved.estimate.params.get(i).copied())
    };
    let slope = expr::eval_recursive(&slope_expr, &l).ok()?;
    let (sigma, kind) = match recipe.limits.sigma {
        crate::recipe::LimitsSigma::Residual => (
            rms_residual(solved),
            "unweighted residual SD of the line".to_string(),
        ),
        crate::recipe::LimitsSigma::Intercept => {
            // The intercept is the parameter whose basis function is the constant.
            let i = solved
                .names
                .iter()
                .position(|n| expr::simplify(&expr::derivative(&rhs, n)).to_string() == "1")?;
            (
                solved.uncertainty.std_errors.get(i).copied().flatten()?,
                "standard error of the intercept".to_string(),
            )
        }
    };
    let d = crate::stats::calibration::detection_limits(sigma, slope).ok()?;
    Some(CalibrationFigures {
        lod: d.lod,
        loq: d.loq,
        sigma,
        sigma_kind: kind,
        slope,
        unit: recipe.data.unit(x).to_string(),
    })
}
