//! Choosing and running the fit method of SPEC §5 for a prepared model, and computing the
//! statistics of the result in the original space of the model (SPEC §6).

use crate::error::{Error, Result};
use crate::estimate::{self, Estimate, TapeModel};
use crate::fit::covariance::{self, FitStatistics, ParameterUncertainty, UncertaintySettings};
use crate::model::Prepared;
use crate::recipe::{Method, Recipe, UncertaintyMode};

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
        covariance::fit_statistics(y, w, &est.fitted, p, est.has_constant, mode(recipe)).map_err(
            |e| {
                Error::input(format!("the fit statistics cannot be computed: {e}"))
                    .help("check the data for constant or degenerate columns")
            },
        )?;
    let settings = UncertaintySettings {
        mode: mode(recipe),
        confidence: recipe.fit.confidence,
    };
    let uncertainty = covariance::uncertainty_from_jacobian(&est.jacobian, w, &est.params, &est.at_bound, &names, est.ssr, settings).map_err(|e| {
        Error::input(format!("the parameter uncertainty cannot be computed: {e}"))
            .help("parameters that cannot be told apart on these data need more or different data, or one of them fixed")
    })?;
    let mut warnings = Vec::new();
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

/// Run the method the recipe asks for (SPEC §5) and assess the result.
pub fn solve(recipe: &Recipe, prep: &Prepared) -> Result<Solved> {
    let names = prep.model.free_names();
    let rhs = prep.model.rhs_with_fixed();
    let describe = |row: usize| prep.data.describe_row(row);
    let model = TapeModel::new(&rhs, &prep.model.predictors, prep.x(), &names, &describe)?;
    let linear = estimate::is_linear_in_parameters(&rhs, &names);
    let method = recipe.fit.method;
    match (method, linear) {
        (Method::Linear | Method::Auto, true) => {
            let est = estimate::fit_linear_model(prep, &model, &names)?;
            assess(recipe, prep, est, names)
        }
        (Method::Linear, false) => Err(recipe
            .error_at(recipe.fit.span.clone(), "`method = \"linear\"` needs a model that is linear in its parameters")
            .help("use method = \"auto\" (a transform may linearize it) or \"nonlinear\"")),
        (Method::Linearized, _) => Err(recipe
            .error_at(recipe.fit.span.clone(), "`method = \"linearized\"` needs the linearizability analysis, which this build does not include yet")
            .help("use method = \"auto\" or \"nonlinear\"")),
        (Method::Nonlinear | Method::Auto, _) => {
            let start = starts(recipe, prep)?;
            let est = estimate::fit_nonlinear(prep, &model, &start, recipe.fit.tolerance)?;
            assess(recipe, prep, est, names)
        }
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
