//! Symbolic linearizability analysis (SPEC §4 and §13 "Linearizability"): whether a
//! linear least-squares fit of transformed data can estimate a model's parameters, and
//! everything that fit needs — basis functions, coefficient map, back-transform, domain
//! conditions and delta-method weights — or, if not, a reason a user can act on.
//!
//! For a model `y = f(x; θ)` with p free parameters and a transform `T(y, x)`, the model is
//! linearizable by T when the expanded `T(f(x; θ), x)` separates as
//! `h₀(x) + Σⱼ gⱼ(θ)·hⱼ(x)` with k = p linearly independent data functions hⱼ and an
//! invertible coefficient map θ ↦ g (non-singular Jacobian at the start or a test point).

mod backtransform;
mod conditions;
mod decompose;
mod explain;
pub mod presets;

#[cfg(test)]
mod tests;

use serde::Serialize;

use crate::expr::Expr;

pub use conditions::{Condition, Scope, offending_rows};
pub use explain::explain_text;
pub use presets::{Preset, preset, presets};

/// A free parameter and its optional start value.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct FreeParameter {
    pub name: String,
    pub start: Option<f64>,
}

/// The model as the recipe gives it.
#[derive(Clone, Debug)]
pub struct ModelSpec {
    pub response: String,
    pub rhs: Expr,
    /// The data variables of the right-hand side.
    pub predictors: Vec<String>,
    pub parameters: Vec<FreeParameter>,
    /// Parameters held at a value; substituted as constants.
    pub fixed: Vec<(String, f64)>,
}

impl ModelSpec {
    pub fn new(
        response: &str,
        rhs: Expr,
        predictors: &[&str],
        parameters: &[(&str, Option<f64>)],
    ) -> ModelSpec {
        ModelSpec {
            response: response.to_string(),
            rhs,
            predictors: predictors.iter().map(|s| s.to_string()).collect(),
            parameters: parameters
                .iter()
                .map(|(n, s)| FreeParameter {
                    name: n.to_string(),
                    start: *s,
                })
                .collect(),
            fixed: Vec::new(),
        }
    }

    pub fn with_fixed(mut self, name: &str, value: f64) -> ModelSpec {
        self.fixed.push((name.to_string(), value));
        self
    }
}

/// `[fit] transform`.
#[derive(Clone, Debug)]
pub enum TransformChoice {
    /// Try none, ln(y), 1/y, sqrt(y), y², 1/sqrt(y), x/y (one predictor), in that order.
    Auto,
    None,
    /// An expression in the response (and predictors).
    Given(Expr),
}

/// The whole analysis: every transform tried, and the outcome that counts.
#[derive(Clone, Debug, Serialize)]
pub struct Analysis {
    pub equation: String,
    pub choice: String,
    pub parameters: Vec<FreeParameter>,
    pub fixed: Vec<(String, f64)>,
    /// Every transform tried, in order.
    pub candidates: Vec<Candidate>,
    /// Index into `candidates` of the transform chosen (the first that works), if any.
    pub chosen: Option<usize>,
    /// Linear, linearizable (the chosen transform), not identifiable, or not linearizable.
    pub outcome: Outcome,
}

impl Analysis {
    /// The chosen linearization, when the model is linear or linearizable.
    pub fn linearization(&self) -> Option<&Linearization> {
        self.outcome.linearization()
    }

    /// The transforms that work, in search order.
    pub fn working(&self) -> Vec<&Candidate> {
        self.candidates
            .iter()
            .filter(|c| c.outcome.linearization().is_some())
            .collect()
    }
}

#[derive(Clone, Debug, Serialize)]
pub struct Candidate {
    /// The transform as text (the response itself for none).
    pub transform: String,
    /// Whether this is "none" (the identity transform).
    pub identity: bool,
    pub outcome: Outcome,
}

#[derive(Clone, Debug, Serialize)]
#[serde(tag = "kind", rename_all = "snake_case")]
pub enum Outcome {
    /// `y = h₀ + Σ θⱼ·hⱼ` as written: ordinary linear least squares.
    Linear(Box<Linearization>),
    /// Linear in g(θ) after the transform.
    Linearizable(Box<Linearization>),
    /// Some parameters appear only in combination (k < p, or a singular coefficient map).
    NotIdentifiable {
        parameters: Vec<String>,
        combinations: Vec<String>,
        reason: String,
    },
    NotLinearizable {
        reason: String,
    },
}

impl Outcome {
    pub fn linearization(&self) -> Option<&Linearization> {
        match self {
            Outcome::Linear(l) | Outcome::Linearizable(l) => Some(l),
            _ => None,
        }
    }

    /// A short label: "linear", "linearizable", "not identifiable", "not linearizable".
    pub fn label(&self) -> &'static str {
        match self {
            Outcome::Linear(_) => "linear in its parameters",
            Outcome::Linearizable(_) => "linearizable",
            Outcome::NotIdentifiable { .. } => "not identifiable",
            Outcome::NotLinearizable { .. } => "not linearizable",
        }
    }
}

/// One basis function and its coefficient function: the term `g(θ)·h(x)`.
#[derive(Clone, Debug, Serialize)]
pub struct BasisTerm {
    pub h: Expr,
    pub g: Expr,
}

#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum BackMethod {
    /// A closed formula in the coefficients and earlier parameters.
    Symbolic,
    /// Solved numerically (Newton from the start values) together with the other
    /// Newton parameters.
    Newton,
}

/// How one parameter is recovered from the fitted coefficients.
#[derive(Clone, Debug, Serialize)]
pub struct BackStep {
    pub parameter: String,
    pub method: BackMethod,
    /// For `Symbolic`: the parameter in terms of the coefficients (`c₁`, …) and the
    /// parameters of earlier steps.
    pub formula: Option<Expr>,
    /// For a locally invertible step (s ↦ 1/s²): which branch is taken and why.
    pub branch: Option<String>,
    /// For `Symbolic`: the index j of the equation `gⱼ(θ) = cⱼ` it solves.
    pub equation: Option<usize>,
}

/// Everything a linearized fit needs.
#[derive(Clone, Debug, Serialize)]
pub struct Linearization {
    /// `T(y, x)`; the response itself for "none".
    pub transform: Expr,
    pub identity: bool,
    pub response: String,
    pub predictors: Vec<String>,
    /// Free parameters in parameter-vector order, with their starts.
    pub parameters: Vec<String>,
    pub starts: Vec<Option<f64>>,
    /// `T(f(x; θ), x)` expanded.
    pub transformed_model: Expr,
    /// `h₀(x)`, the part free of parameters (subtracted before the fit).
    pub offset: Option<Expr>,
    pub basis: Vec<BasisTerm>,
    /// Names of the fitted coefficients in formulas: `c₁ … c_k`.
    pub coefficient_names: Vec<String>,
    pub back_transform: Vec<BackStep>,
    /// `∂gⱼ/∂θᵢ`, row j, column i (for the delta-method covariance `G⁻¹·Cov(c)·G⁻ᵀ`).
    pub coefficient_jacobian: Vec<Vec<Expr>>,
    pub conditions: Vec<Condition>,
    /// `1/(∂T/∂y)²`: the factor on the weights of the transformed fit, `w′ = w·factor`.
    pub weight_factor: Expr,
    pub notes: Vec<String>,
}

impl Linearization {
    /// The conditions on data rows (response and predictors).
    pub fn data_conditions(&self) -> impl Iterator<Item = &Condition> {
        self.conditions.iter().filter(|c| c.scope == Scope::Data)
    }

    /// The conditions on the fitted parameters (alone, or together with the data).
    pub fn parameter_conditions(&self) -> impl Iterator<Item = &Condition> {
        self.conditions.iter().filter(|c| c.scope != Scope::Data)
    }
}

/// The prepared model shared by the analysis stages: fixed values substituted.
pub(crate) struct Prepared {
    pub response: String,
    pub rhs: Expr,
    pub predictors: Vec<String>,
    pub params: Vec<String>,
    pub starts: Vec<Option<f64>>,
}

/// Analyses `model` under `choice` (SPEC §4). Never fails: problems are outcomes.
pub fn analyze(model: &ModelSpec, choice: &TransformChoice) -> Analysis {
    let mut rhs = model.rhs.clone();
    for (name, value) in &model.fixed {
        rhs = rhs.substitute(name, &Expr::number(*value));
    }
    let prepared = Prepared {
        response: model.response.clone(),
        rhs,
        predictors: model.predictors.clone(),
        params: model.parameters.iter().map(|p| p.name.clone()).collect(),
        starts: model.parameters.iter().map(|p| p.start).collect(),
    };
    let transforms = match choice {
        TransformChoice::Auto => auto_transforms(&model.response, &model.predictors),
        TransformChoice::None => vec![Expr::name(&model.response)],
        TransformChoice::Given(t) => vec![t.clone()],
    };
    let candidates: Vec<Candidate> = transforms
        .iter()
        .map(|t| Candidate {
            transform: t.to_string(),
            identity: matches!(&t.kind, crate::expr::ExprKind::Name(n) if *n == model.response),
            outcome: decompose::linearize(&prepared, t),
        })
        .collect();
    let unidentifiable = candidates
        .iter()
        .position(|c| matches!(c.outcome, Outcome::NotIdentifiable { .. }));
    let working = candidates
        .iter()
        .position(|c| c.outcome.linearization().is_some());
    let (chosen, outcome) = match (unidentifiable, working) {
        // Parameters that appear only in combination under one transform do so under
        // every transform: the model itself cannot separate them (SPEC §13).
        (Some(i), _) => (None, candidates[i].outcome.clone()),
        (None, Some(i)) => (Some(i), candidates[i].outcome.clone()),
        (None, None) => (None, not_linearizable_summary(&candidates)),
    };
    Analysis {
        equation: format!("{} = {}", model.response, model.rhs),
        choice: match choice {
            TransformChoice::Auto => "auto".to_string(),
            TransformChoice::None => "none".to_string(),
            TransformChoice::Given(t) => t.to_string(),
        },
        parameters: model.parameters.clone(),
        fixed: model.fixed.clone(),
        candidates,
        chosen,
        outcome,
    }
}

/// The search order of SPEC §4: none, ln(y), 1/y, sqrt(y), y², 1/sqrt(y), and x/y for a
/// single predictor (built directly, so any response or predictor name works).
fn auto_transforms(response: &str, predictors: &[String]) -> Vec<Expr> {
    use crate::expr::{Func, MulOp};
    let y = || Expr::name(response);
    let one = || Expr::number(1.0);
    let mut out = vec![
        y(),
        Expr::call(Func::Ln, vec![y()]),
        Expr::binary_product(one(), MulOp::Div, y()),
        Expr::call(Func::Sqrt, vec![y()]),
        Expr::pow(y(), Expr::number(2.0)),
        Expr::binary_product(one(), MulOp::Div, Expr::call(Func::Sqrt, vec![y()])),
    ];
    if let [x] = predictors {
        out.push(Expr::binary_product(Expr::name(x), MulOp::Div, y()));
    }
    out
}

fn not_linearizable_summary(candidates: &[Candidate]) -> Outcome {
    let reasons: Vec<String> = candidates
        .iter()
        .filter_map(|c| match &c.outcome {
            Outcome::NotLinearizable { reason } => Some(reason.clone()),
            _ => None,
        })
        .collect();
    let reason = match reasons.as_slice() {
        [] => "no transform was tried".to_string(),
        [one] => one.clone(),
        [first, ..] => format!(
            "{first}; none of the {} transforms tried separates the parameters from the data",
            candidates.len()
        ),
    };
    Outcome::NotLinearizable { reason }
}
