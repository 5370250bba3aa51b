//! Choosing and running the fit method of SPEC §5 for a prepared model, and computing the
//! statistics of the result in the original space of the model (SPEC §6).

use nalgebra::DMatrix;

use crate::analysis::{
    self, Analysis, FreeParameter, Linearization, ModelSpec, Outcome, TransformChoice,
};
use crate::error::{Error, Result};
use crate::estimate::{self, Estimate, TapeModel};
use crate::fit::covariance::{self, FitStatistics, ParameterUncertainty, UncertaintySettings};
use crate::model::Prepared;
use crate::recipe::{Method, Recipe, TransformSpec, UncertaintyMode};

/// A finished fit: the estimate, its statistics and its parameter uncertainty.
#[derive(Debug, Clone)]
pub struct Solved {
    pub estimate: Estimate,
    pub statistics: FitStatistics,
    pub uncertainty: ParameterUncertainty,
    /// Free parameter names, in the order of `estimate.params`.
    pub names: Vec<String>,
    /// The linearized start of an `auto` fit, with its own statistics.
    pub start: Option<Box<Solved>>,
    pub warnings: Vec<String>,
}

impl Solved {
    /// Every parameter (fixed ones included) in declaration order, with its value.
    pub fn all_values(&self, prep: &Prepared) -> Vec<(String, f64)> {
        prep.model
            .parameters
            .iter()
            .map(|p| {
                let v = match p.fixed {
                    Some(f) => f,
                    None => self
                        .names
                        .iter()
                        .position(|n| *n == p.name)
                        .and_then(|i| self.estimate.params.get(i).copied())
                        .unwrap_or(f64::NAN),
                };
                (p.name.clone(), v)
            })
            .collect()
    }
}

fn mode(recipe: &Recipe) -> covariance::UncertaintyMode {
    match recipe.fit.uncertainty {
        UncertaintyMode::Residuals => covariance::UncertaintyMode::Residuals,
        UncertaintyMode::Weights => covariance::UncertaintyMode::Weights,
    }
}

/// Statistics and uncertainty of an estimate, in the original space.
pub fn assess(
    recipe: &Recipe,
    prep: &Prepared,
    est: Estimate,
    names: Vec<String>,
) -> Result<Solved> {
    let y = prep.y();
    let w = prep.weights.as_deref();
    let p = names.len();
    let statistics =
        covariance::fit_statistics(y, w, &est.fitted, p, est.has_constant, mode(recipe))
            .map_err(|e| estimate::statistics_error(prep, e))?;
    let settings = UncertaintySettings {
        mode: mode(recipe),
        confidence: recipe.fit.confidence,
    };
    let uncertainty = covariance::uncertainty_from_jacobian(&est.jacobian, w, &est.params, &est.at_bound, &names, est.ssr, settings).map_err(|e| {
        Error::input(format!("the parameter uncertainty cannot be computed: {e}"))
            .help("parameters that cannot be told apart on these data need more or different data, or one of them fixed")
    })?;
    let mut warnings: Vec<String> = estimate::conditioning_warning(prep, uncertainty.condition)
        .into_iter()
        .collect();
    for (i, b) in est.at_bound.iter().enumerate() {
        if *b {
            warnings.push(format!(
                "parameter `{}` ended at a bound: it has no standard error, and the bound may be hiding a better fit",
                names.get(i).map_or("?", String::as_str)
            ));
        }
    }
    if !est.converged {
        warnings.push(format!("the fit did not converge: {}", est.stop_reason));
    }
    Ok(Solved {
        estimate: est,
        statistics,
        uncertainty,
        names,
        start: None,
        warnings,
    })
}

/// The linearizability analysis of the recipe's model under its transform (SPEC §4).
pub fn analyse(recipe: &Recipe, prep: &Prepared) -> Result<Analysis> {
    let model = &prep.model;
    let spec = ModelSpec {
        response: model.response.clone(),
        rhs: model.rhs.clone(),
        predictors: model.predictors.clone(),
        parameters: model
            .free()
            .iter()
            .map(|p| FreeParameter {
                name: p.name.clone(),
                start: p.start,
            })
            .collect(),
        fixed: model
            .parameters
            .iter()
            .filter_map(|p| p.fixed.map(|v| (p.name.clone(), v)))
            .collect(),
    };
    let choice = match &recipe.fit.transform {
        TransformSpec::Auto => TransformChoice::Auto,
        TransformSpec::None => TransformChoice::None,
        TransformSpec::Expr(t) => {
            let e = crate::expr::parse_expression(&t.value)
                .map_err(|e| crate::model::expr_error(recipe, t, e, "in `transform`"))?;
            let mut names: Vec<&str> = vec![model.response.as_str()];
            names.extend(model.predictors.iter().map(String::as_str));
            crate::expr::resolve(&e, &names, &[])
                .map_err(|e| crate::model::expr_error(recipe, t, e, "in `transform`"))?;
            if !e.mentions(&model.response) {
                return Err(recipe
                    .error_at(
                        t.span.clone(),
                        format!(
                            "the transform does not use the response `{}`",
                            model.response
                        ),
                    )
                    .help(format!(
                        "a transform is a function of the response, e.g. \"ln({})\"",
                        model.response
                    )));
            }
            TransformChoice::Given(e)
        }
    };
    Ok(analysis::analyze(&spec, &choice))
}

/// A model that is not identifiable cannot be fitted by any method (SPEC §13): exit 2.
pub fn refuse_unidentifiable(recipe: &Recipe, a: &Analysis) -> Result<()> {
    if let Outcome::NotIdentifiable {
        parameters,
        combinations,
        reason,
    } = &a.outcome
    {
        let span = recipe
            .model
            .equation
            .as_ref()
            .map_or(recipe.model.span.clone(), |e| e.span.clone());
        return Err(recipe
            .error_at(span, format!("the model is not identifiable: {reason}"))
            .note(format!(
                "{} appear only as {}",
                parameters.iter().map(|p| format!("`{p}`")).collect::<Vec<_>>().join(", "),
                combinations.join(", ")
            ))
            .help("write the model with one parameter per combination (e.g. `k = a*b`), or fix all but one of them"));
    }
    Ok(())
}

fn symbols_of(prep: &Prepared) -> (Vec<String>, Vec<&[f64]>) {
    (
        prep.data.variables.clone(),
        prep.data.columns.iter().map(Vec::as_slice).collect(),
    )
}

/// Rows where the data conditions of a linearization fail (with the condition as text).
pub fn violated_conditions(prep: &Prepared, lin: &Linearization) -> Vec<(String, Vec<usize>)> {
    let (vars, cols) = symbols_of(prep);
    let names: Vec<&str> = vars.iter().map(String::as_str).collect();
    let mut out = Vec::new();
    for c in lin.data_conditions() {
        match analysis::offending_rows(&c.expr, &names, &cols, &[], &[]) {
            Ok(rows) if rows.is_empty() => {}
            Ok(rows) => out.push((format!("{} ({})", c.expr, c.reason), rows)),
            Err(e) => out.push((
                format!("{} (cannot be evaluated: {})", c.expr, e.message),
                (0..prep.data.len()).collect(),
            )),
        }
    }
    out
}

/// `drop_invalid = true` with an explicit transform (SPEC §2, §13): the rows where the
/// transform's data conditions fail are left out of the fit, each listed in a warning. The
/// rows go before anything is fitted, so every later stage sees the same rows. Too few rows
/// left is an input error.
pub fn drop_invalid_rows(recipe: &Recipe, prep: &mut Prepared, analysis: &Analysis) -> Result<()> {
    let explicit = matches!(recipe.fit.transform, TransformSpec::Expr(_));
    if !explicit || !recipe.fit.drop_invalid || recipe.fit.method == Method::Nonlinear {
        return Ok(());
    }
    let Some(lin) = analysis
        .working()
        .first()
        .and_then(|c| c.outcome.linearization())
    else {
        return Ok(());
    };
    let broken = violated_conditions(prep, lin);
    let mut rows: Vec<usize> = broken.iter().flat_map(|(_, r)| r.iter().copied()).collect();
    rows.sort_unstable();
    rows.dedup();
    if rows.is_empty() {
        return Ok(());
    }
    let conditions: Vec<&str> = broken.iter().map(|(c, _)| c.as_str()).collect();
    let warning = format!(
        "{} row{} left out because the transform {} is undefined there (`drop_invalid = true`; {}): {}",
        rows.len(),
        if rows.len() == 1 { "" } else { "s" },
        lin.transform,
        conditions.join("; "),
        prep.data.describe_rows(&rows, 20)
    );
    let mut keep = vec![true; prep.data.len()];
    for &r in &rows {
        if let Some(k) = keep.get_mut(r) {
            *k = false;
        }
    }
    prep.data.retain(&keep);
    if let Some(w) = prep.weights.as_mut() {
        let mut i = 0;
        w.retain(|_| {
            let k = keep.get(i).copied().unwrap_or(true);
            i += 1;
            k
        });
    }
    let free = prep.model.free().len();
    if prep.data.len() < free + 1 {
        let span = match &recipe.fit.transform {
            TransformSpec::Expr(t) => t.span.clone(),
            _ => recipe.fit.span.clone(),
        };
        return Err(recipe
            .error_at(
                span,
                format!(
                    "after leaving out the rows where the transform {} is undefined, {} row{} remain for {free} free parameters",
                    lin.transform,
                    prep.data.len(),
                    if prep.data.len() == 1 { "" } else { "s" }
                ),
            )
            .help("fix the data, or use a transform that is defined on them"));
    }
    prep.warnings.push(warning);
    Ok(())
}

/// Evaluate a data-only expression (transform, basis function, weight factor) on every row.
fn eval_rows(prep: &Prepared, e: &crate::expr::Expr) -> std::result::Result<Vec<f64>, String> {
    let (vars, cols) = symbols_of(prep);
    let symbols = crate::expr::Symbols {
        variables: vars,
        parameters: Vec::new(),
    };
    let tape = crate::expr::Tape::compile(e, &symbols).map_err(|e| e.message)?;
    let mut out = vec![0.0; prep.data.len()];
    tape.eval(&cols, &[], &mut out).map_err(|err| {
        format!(
            "{} in `{}` at {}",
            err.message,
            err.subexpr,
            prep.data.describe_row(err.row)
        )
    })?;
    Ok(out)
}

/// The linear fit of the transformed data (SPEC §5 `linearized`), back-transformed; the
/// covariance of θ by the delta method Cov(θ) = G⁻¹·Cov(c)·G⁻ᵀ with Cov(c) from the
/// transformed-space residual variance (SPEC §13).
fn fit_linearized(
    recipe: &Recipe,
    prep: &Prepared,
    model: &TapeModel<'_>,
    lin: &Linearization,
    names: &[String],
) -> Result<Solved> {
    let fail = |what: String| {
        Error::input(format!(
            "the linearized fit with transform {} failed: {what}",
            lin.transform
        ))
        .help("choose another transform, or method = \"nonlinear\" with start values")
    };
    let z = eval_rows(prep, &lin.transform).map_err(fail)?;
    let offset = match &lin.offset {
        Some(h0) => eval_rows(prep, h0).map_err(fail)?,
        None => vec![0.0; z.len()],
    };
    let target: Vec<f64> = z.iter().zip(&offset).map(|(a, b)| a - b).collect();
    let n = target.len();
    let k = lin.basis.len();
    let mut design = DMatrix::zeros(n, k);
    for (j, term) in lin.basis.iter().enumerate() {
        let col = eval_rows(prep, &term.h).map_err(fail)?;
        for (i, v) in col.into_iter().enumerate() {
            design[(i, j)] = v;
        }
    }
    let weights: Option<Vec<f64>> = if recipe.fit.linearized_delta_weights && !lin.identity {
        let factor = eval_rows(prep, &lin.weight_factor).map_err(fail)?;
        let bad: Vec<usize> = factor
            .iter()
            .enumerate()
            .filter(|(_, f)| !(f.is_finite() && **f > 0.0))
            .map(|(i, _)| i)
            .collect();
        if !bad.is_empty() {
            return Err(fail(format!(
                "the delta-method weight 1/(∂T/∂y)² = {} is zero or undefined at {}",
                lin.weight_factor,
                prep.data.describe_rows(&bad, 6)
            )));
        }
        Some(match &prep.weights {
            Some(w) => w.iter().zip(&factor).map(|(a, b)| a * b).collect(),
            None => factor,
        })
    } else {
        prep.weights.clone()
    };
    let coef_names: Vec<String> = lin.basis.iter().map(|b| b.h.to_string()).collect();
    let fit = crate::fit::linear::fit_linear(&design, &target, weights.as_deref(), &coef_names)
        .map_err(|e| fail(e.to_string()))?;
    let theta = lin.back_transform_values(&fit.coefficients).map_err(fail)?;
    let fitted = model.values(&theta).map_err(|e| {
        fail(format!(
            "the back-transformed model cannot be evaluated: {e}"
        ))
    })?;
    let jacobian = model.jacobian_at(&theta).map_err(|e| {
        fail(format!(
            "the back-transformed model cannot be evaluated: {e}"
        ))
    })?;
    let y = prep.y();
    let residuals: Vec<f64> = y.iter().zip(&fitted).map(|(a, b)| a - b).collect();
    let ssr: f64 = residuals
        .iter()
        .enumerate()
        .map(|(i, e)| prep.weights.as_ref().map_or(1.0, |w| w[i]) * e * e)
        .sum();
    let est = Estimate {
        method_used: "linearized".into(),
        transform: Some(lin.transform.to_string()),
        params: theta.clone(),
        fitted,
        residuals,
        jacobian,
        ssr,
        at_bound: vec![false; theta.len()],
        iterations: 0,
        jacobian_evals: 0,
        converged: true,
        stop_reason: format!(
            "direct solution of the linear fit of {} (Householder QR), back-transformed",
            lin.transform
        ),
        has_constant: true,
    };
    let statistics = covariance::fit_statistics(
        y,
        prep.weights.as_deref(),
        &est.fitted,
        names.len(),
        true,
        mode(recipe),
    )
    .map_err(|e| fail(format!("statistics: {e}")))?;
    // Delta method: Cov(θ) = G⁻¹·(XᵀW′X)⁻¹·G⁻ᵀ · s²_transformed.
    let g = lin.coefficient_jacobian_at(&theta).map_err(fail)?;
    let g = DMatrix::from_fn(k, k, |r, c| {
        g.get(r)
            .and_then(|row| row.get(c))
            .copied()
            .unwrap_or(f64::NAN)
    });
    let g_inv = g
        .try_inverse()
        .ok_or_else(|| fail("the coefficient map is singular at the fitted parameters".into()))?;
    let unscaled = &g_inv * &fit.unscaled_covariance * g_inv.transpose();
    let settings = UncertaintySettings {
        mode: mode(recipe),
        confidence: recipe.fit.confidence,
    };
    let uncertainty = covariance::uncertainty_from_unscaled(
        &unscaled,
        &theta,
        &vec![true; k],
        n,
        fit.ssr,
        settings,
    )
    .map_err(|e| fail(e.to_string()))?;
    let mut warnings = Vec::new();
    if !recipe.fit.linearized_delta_weights && !lin.identity {
        warnings.push(format!(
            "the linearized fit uses no delta-method weights (`linearized_weights = \"none\"`): the transform {} changes the error structure, so its parameters are biased",
            lin.transform
        ));
    }
    Ok(Solved {
        estimate: est,
        statistics,
        uncertainty,
        names: names.to_vec(),
        start: None,
        warnings,
    })
}

/// Run the method the recipe asks for (SPEC §5) and assess the result.
pub fn solve(recipe: &Recipe, prep: &Prepared, analysis: &Analysis) -> Result<Solved> {
    refuse_unidentifiable(recipe, analysis)?;
    let names = prep.model.free_names();
    let rhs = prep.model.rhs_with_fixed();
    let describe = |row: usize| prep.data.describe_row(row);
    let model = TapeModel::new(&rhs, &prep.model.predictors, prep.x(), &names, &describe)?;
    let method = recipe.fit.method;
    if matches!(analysis.outcome, Outcome::Linear(_))
        && matches!(method, Method::Linear | Method::Auto)
    {
        let est = estimate::fit_linear_model(prep, &model, &names)?;
        return assess(recipe, prep, est, names);
    }
    if method == Method::Linear {
        return Err(recipe
            .error_at(
                recipe.fit.span.clone(),
                "`method = \"linear\"` needs a model that is linear in its parameters",
            )
            .help("use method = \"auto\" (a transform may linearize it) or \"nonlinear\""));
    }
    let mut warnings = Vec::new();
    // The usable linearization: the first working transform whose data conditions hold.
    let mut chosen: Option<&Linearization> = None;
    if method != Method::Nonlinear {
        let explicit = matches!(recipe.fit.transform, TransformSpec::Expr(_));
        for cand in analysis.working() {
            let Some(lin) = cand.outcome.linearization() else {
                continue;
            };
            if lin.identity && method == Method::Auto {
                continue;
            }
            let broken = violated_conditions(prep, lin);
            if broken.is_empty() {
                chosen = Some(lin);
                break;
            }
            let detail = broken
                .iter()
                .map(|(c, rows)| format!("{c} fails at {}", prep.data.describe_rows(rows, 6)))
                .collect::<Vec<_>>()
                .join("; ");
            if explicit && !recipe.fit.drop_invalid {
                let span = match &recipe.fit.transform {
                    TransformSpec::Expr(t) => t.span.clone(),
                    _ => recipe.fit.span.clone(),
                };
                return Err(recipe
                    .error_at(span, format!("the transform {} is undefined on some rows: {detail}", lin.transform))
                    .help("fix those rows, set `drop_invalid = true` in [fit] to leave them out, or use another transform"));
            }
            warnings.push(format!("transform {} skipped: {detail}", lin.transform));
        }
    }
    let solved = match (method, chosen) {
        (Method::Linearized, Some(lin)) => {
            let mut s = fit_linearized(recipe, prep, &model, lin, &names)?;
            s.warnings.splice(0..0, warnings);
            s.warnings.push("parameter standard errors of the linearized fit come from the delta method on the transformed-space covariance".into());
            return Ok(s);
        }
        (Method::Linearized, None) => {
            return Err(recipe
                .error_at(recipe.fit.span.clone(), format!("`method = \"linearized\"` needs a linearizable model: {}", analysis.outcome.label()))
                .note(analysis_reason(analysis))
                .help("run `fitwright explain` on the recipe to see which transforms were tried; use method = \"nonlinear\" with start values"));
        }
        (_, Some(lin)) => {
            // auto: the linearized fit gives the start, Levenberg–Marquardt refines it.
            let start = fit_linearized(recipe, prep, &model, lin, &names)?;
            let theta: Vec<f64> = start
                .estimate
                .params
                .iter()
                .zip(prep.model.free())
                .map(|(v, p)| {
                    v.clamp(
                        p.min.unwrap_or(f64::NEG_INFINITY),
                        p.max.unwrap_or(f64::INFINITY),
                    )
                })
                .collect();
            let est = estimate::fit_nonlinear(prep, &model, &theta, recipe.fit.tolerance)?;
            let mut s = assess(recipe, prep, est, names)?;
            s.estimate.method_used = "linearized+nonlinear".into();
            s.estimate.transform = start.estimate.transform.clone();
            warnings.extend(start.warnings.iter().cloned());
            s.start = Some(Box::new(start));
            s
        }
        (_, None) => {
            if method == Method::Auto {
                warnings.push(format!("no transform linearizes the model ({}); fitted by Levenberg–Marquardt from the recipe's start values", analysis_reason(analysis)));
            }
            let start = starts(recipe, prep)?;
            let est = estimate::fit_nonlinear(prep, &model, &start, recipe.fit.tolerance)?;
            assess(recipe, prep, est, names)?
        }
    };
    let mut solved = solved;
    solved.warnings.splice(0..0, warnings);
    Ok(solved)
}

fn analysis_reason(a: &Analysis) -> String {
    match &a.outcome {
        Outcome::NotLinearizable { reason } => reason.clone(),
        Outcome::NotIdentifiable { reason, .. } => reason.clone(),
        other => other.label().to_string(),
    }
}

/// The recipe's start values for the free parameters; every one is required.
pub fn starts(recipe: &Recipe, prep: &Prepared) -> Result<Vec<f64>> {
    let free = prep.model.free();
    let missing: Vec<&str> = free
        .iter()
        .filter(|p| p.start.is_none())
        .map(|p| p.name.as_str())
        .collect();
    if !missing.is_empty() {
        return Err(recipe
            .error_at(
                recipe.model.span.clone(),
                format!(
                    "the nonlinear fit needs start values for {}",
                    missing
                        .iter()
                        .map(|m| format!("`{m}`"))
                        .collect::<Vec<_>>()
                        .join(", ")
                ),
            )
            .help("give each a start in [model.parameters], e.g. `b = { start = 0.1 }`"));
    }
    Ok(free.iter().filter_map(|p| p.start).collect())
}
