//! `[compare]` (SPEC §6, §13): each alternative model fitted on the same rows, weights and
//! response as the main one; ΔAICc always, and the nested-model F-test where nesting is
//! proved.
//!
//! Nesting is decided so (SPEC §13): the smaller model's parameters are a subset of the
//! larger's, and fixing each extra parameter of the larger model to 0 or 1 (every
//! combination) makes the two right-hand sides equal at 8 random points (predictors drawn
//! from the data's range, shared parameters near the fitted values; relative tolerance
//! 1e-9). The linear-versus-quadratic case is Mandel's linearity test of calibration practice.

use crate::error::Result;
use crate::expr::{self, Expr};
use crate::model::{Model, Parameter, Prepared, expr_error};
use crate::recipe::{Method, Recipe, Text};
use crate::report::{CompareRow, format as fmt};
use crate::stats::{self, Outcome};

use super::solve::{self, Solved};

/// One alternative model's fit and its comparison with the main model.
#[derive(Debug, Clone, serde::Serialize)]
pub struct Comparison {
    pub equation: String,
    pub parameters: Vec<(String, f64)>,
    pub ssr: f64,
    pub dof: usize,
    pub aicc: Option<f64>,
    pub delta_aicc: Option<f64>,
    /// "main ⊂ alternative", "alternative ⊂ main", or None.
    pub nesting: Option<String>,
    pub f: Option<f64>,
    pub p_value: Option<f64>,
    pub converged: bool,
    pub note: Option<String>,
}

fn parse_alternative(recipe: &Recipe, prep: &Prepared, text: &Text) -> Result<Model> {
    let eq = expr::parse_equation(&text.value)
        .map_err(|e| expr_error(recipe, text, e, "in a [compare] model"))?;
    if eq.response != prep.model.response {
        let span = text.inner_span(eq.response_span.start..eq.response_span.end);
        return Err(recipe
            .error_at(
                span,
                format!(
                    "a [compare] model must have the same response `{}`",
                    prep.model.response
                ),
            )
            .help("models are compared on the same response and rows"));
    }
    let mut predictors = Vec::new();
    let mut parameters: Vec<Parameter> = Vec::new();
    for (name, _) in eq.rhs.identifiers() {
        if name == "pi" || predictors.contains(&name) || parameters.iter().any(|p| p.name == name) {
            continue;
        }
        if prep.data.column(&name).is_some() {
            predictors.push(name);
        } else {
            let main = prep.model.parameters.iter().find(|p| p.name == name);
            parameters.push(Parameter {
                name: name.clone(),
                start: main.and_then(|p| p.start).or(Some(0.0)),
                min: main.and_then(|p| p.min),
                max: main.and_then(|p| p.max),
                fixed: main.and_then(|p| p.fixed),
                unit: main.and_then(|p| p.unit.clone()),
            });
        }
    }
    Ok(Model {
        equation: text.value.clone(),
        preset: None,
        response: eq.response,
        rhs: eq.rhs,
        predictors,
        parameters,
    })
}

/// Whether `small` is `large` with some of `large`'s parameters fixed to 0 or 1.
fn nests(small: &Model, large: &Model, prep: &Prepared, at: &[(String, f64)]) -> bool {
    let sp: Vec<&str> = small.parameters.iter().map(|p| p.name.as_str()).collect();
    let extra: Vec<&str> = large
        .parameters
        .iter()
        .map(|p| p.name.as_str())
        .filter(|p| !sp.contains(p))
        .collect();
    if extra.is_empty()
        || !sp
            .iter()
            .all(|p| large.parameters.iter().any(|q| q.name == *p))
        || extra.len() > 6
    {
        return false;
    }
    if !small
        .predictors
        .iter()
        .all(|p| large.predictors.contains(p))
    {
        return false;
    }
    let a = small.rhs_with_fixed();
    let b0 = large.rhs_with_fixed();
    let mut seed: u64 = 0x9e37_79b9_7f4a_7c15;
    let mut rand = move || {
        seed ^= seed << 13;
        seed ^= seed >> 7;
        seed ^= seed << 17;
        (seed >> 11) as f64 / (1u64 << 53) as f64
    };
    let ranges: Vec<(String, f64, f64)> = large
        .predictors
        .iter()
        .filter_map(|p| {
            prep.data
                .column(p)
                .map(|c| (p.clone(), super::outputs::range(c)))
        })
        .map(|(p, [lo, hi])| (p, lo, hi))
        .collect();
    (0..(1u32 << extra.len())).any(|mask| {
        let mut b = b0.clone();
        for (k, name) in extra.iter().enumerate() {
            b = b.substitute(name, &Expr::number(f64::from((mask >> k) & 1)));
        }
        (0..8).all(|_| {
            let mut values: Vec<(String, f64)> = ranges
                .iter()
                .map(|(p, lo, hi)| (p.clone(), lo + (hi - lo) * rand()))
                .collect();
            for (name, v) in at {
                values.push((name.clone(), v * (0.9 + 0.2 * rand())));
            }
            let l = |n: &str| values.iter().find(|(k, _)| k == n).map(|(_, v)| *v);
            match (expr::eval_recursive(&a, &l), expr::eval_recursive(&b, &l)) {
                (Ok(x), Ok(y)) => (x - y).abs() <= 1e-9 * x.abs().max(y.abs()).max(1e-300),
                _ => false,
            }
        })
    })
}

/// Fit every `[compare]` model and compare it with the main fit.
pub fn compare(recipe: &Recipe, prep: &Prepared, main: &Solved) -> Result<Vec<Comparison>> {
    let mut out = Vec::new();
    if recipe.compare.is_empty() {
        return Ok(out);
    }
    let main_ic = ic(recipe, main);
    let at: Vec<(String, f64)> = main
        .names
        .iter()
        .cloned()
        .zip(main.estimate.params.iter().copied())
        .collect();
    let mut alt_recipe = recipe.clone();
    alt_recipe.fit.method = Method::Auto;
    for text in &recipe.compare {
        let model = parse_alternative(recipe, prep, text)?;
        let alt_prep = Prepared {
            model: model.clone(),
            ..prep.clone()
        };
        let fitted = solve::analyse(&alt_recipe, &alt_prep)
            .and_then(|a| solve::solve(&alt_recipe, &alt_prep, &a));
        let solved = match fitted {
            Ok(s) => s,
            Err(e) => {
                out.push(Comparison {
                    equation: text.value.clone(),
                    parameters: Vec::new(),
                    ssr: f64::NAN,
                    dof: 0,
                    aicc: None,
                    delta_aicc: None,
                    nesting: None,
                    f: None,
                    p_value: None,
                    converged: false,
                    note: Some(format!("could not be fitted: {}", e.message)),
                });
                continue;
            }
        };
        let alt_ic = ic(recipe, &solved);
        let (small, large, label) = if nests(&prep.model, &model, prep, &at) {
            (
                main,
                &solved,
                Some("main model nested in this one".to_string()),
            )
        } else if nests(&model, &prep.model, prep, &at) {
            (
                &solved,
                main,
                Some("this model nested in the main one".to_string()),
            )
        } else {
            (main, &solved, None)
        };
        let (f, p) = match &label {
            Some(_) => match stats::nested::nested_f_test(
                small.statistics.ssr,
                small.statistics.dof,
                large.statistics.ssr,
                large.statistics.dof,
            ) {
                Ok(Outcome::Computed(t)) => (Some(t.f), Some(t.p_value)),
                _ => (None, None),
            },
            None => (None, None),
        };
        out.push(Comparison {
            equation: text.value.clone(),
            parameters: solved
                .names
                .iter()
                .cloned()
                .zip(solved.estimate.params.iter().copied())
                .collect(),
            ssr: solved.statistics.ssr,
            dof: solved.statistics.dof,
            aicc: alt_ic,
            delta_aicc: match (alt_ic, main_ic) {
                (Some(a), Some(m)) => Some(a - m),
                _ => None,
            },
            nesting: label,
            f,
            p_value: p,
            converged: solved.estimate.converged,
            note: if label_is_mandel(prep, &model) {
                Some("straight line against quadratic: Mandel's linearity test".into())
            } else {
                None
            },
        });
    }
    Ok(out)
}

fn label_is_mandel(prep: &Prepared, alt: &Model) -> bool {
    let is_poly = |m: &Model, degree: usize| {
        m.predictors.len() == 1 && m.parameters.len() == degree + 1 && {
            let x = &m.predictors[0];
            let d = (0..=degree).fold(m.rhs_with_fixed(), |e, _| {
                expr::simplify(&expr::derivative(&e, x))
            });
            let free: Vec<String> = m.parameters.iter().map(|p| p.name.clone()).collect();
            !d.mentions(x) && crate::estimate::is_linear_in_parameters(&m.rhs_with_fixed(), &free)
        }
    };
    (is_poly(&prep.model, 1) && is_poly(alt, 2)) || (is_poly(&prep.model, 2) && is_poly(alt, 1))
}

fn ic(recipe: &Recipe, s: &Solved) -> Option<f64> {
    let model = match recipe.fit.uncertainty {
        crate::recipe::UncertaintyMode::Weights => stats::information::VarianceModel::Known,
        crate::recipe::UncertaintyMode::Residuals => stats::information::VarianceModel::Estimated,
    };
    stats::information::information_criteria(s.statistics.ssr, s.statistics.n, s.names.len(), model)
        .ok()
        .and_then(|i| i.aicc)
}

/// The report rows of the comparisons.
pub fn rows(list: &[Comparison]) -> Vec<CompareRow> {
    list.iter()
        .map(|c| CompareRow {
            model: c.equation.clone(),
            parameters: c
                .parameters
                .iter()
                .map(|(n, v)| format!("{n} = {}", fmt::num(*v)))
                .collect::<Vec<_>>()
                .join(", "),
            ssr: if c.ssr.is_finite() {
                fmt::num(c.ssr)
            } else {
                "—".into()
            },
            aicc: c.aicc.map_or("—".into(), fmt::num),
            delta_aicc: c.delta_aicc.map_or("—".into(), |d| fmt::sig(d, 3)),
            f_test: match (c.f, &c.nesting) {
                (Some(f), Some(n)) => format!("F = {} ({n})", fmt::num(f)),
                _ => "not nested: no F-test".into(),
            },
            p_value: c.p_value.map_or("—".into(), fmt::p_value),
            note: c.note.clone(),
        })
        .collect()
}
