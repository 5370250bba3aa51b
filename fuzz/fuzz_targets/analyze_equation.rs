//! Fuzz target for the symbolic engine on whole equations: parse `y = f(…)`, take up to
//! three of its names as parameters (with start values) and the rest as predictors, then
//! simplify, differentiate and run the linearizability analysis under `auto` and under an
//! explicit `ln(y)`.
//!
//! Any panic or stack overflow is a crash. Inputs are capped at 600 bytes, enough for
//! 200-level nesting, which the parser allows.
#![no_main]

use fitwright::analysis::{ModelSpec, TransformChoice, analyze, explain_text};
use fitwright::expr::{Expr, Func, derivative, jacobian, parse_equation, simplify};
use libfuzzer_sys::fuzz_target;

fuzz_target!(|data: &[u8]| {
    if data.len() > 600 {
        return;
    }
    let Ok(src) = std::str::from_utf8(data) else {
        return;
    };
    let Ok(eq) = parse_equation(src) else {
        return;
    };
    if eq.rhs.mentions(&eq.response) {
        // The response on the right-hand side is refused before the analysis.
        return;
    }
    let mut names: Vec<String> = Vec::new();
    for (n, _) in eq.rhs.identifiers() {
        if n != "pi" && !names.contains(&n) {
            names.push(n);
        }
    }
    // Up to three parameters, keeping at least one predictor when there are two names.
    let k = if names.len() <= 1 {
        names.len()
    } else {
        (names.len() - 1).min(3)
    };
    let (params, predictors) = names.split_at(k);
    let predictors: Vec<&str> = predictors.iter().map(String::as_str).collect();
    let starts = [1.5, -0.5, 2.0];
    let parameters: Vec<(&str, Option<f64>)> = params
        .iter()
        .zip(starts)
        .map(|(p, s)| (p.as_str(), Some(s)))
        .collect();
    let _ = simplify(&eq.rhs);
    let param_names: Vec<&str> = params.iter().map(String::as_str).collect();
    let _ = jacobian(&eq.rhs, &param_names);
    if let Some(x) = predictors.first() {
        let _ = derivative(&eq.rhs, x);
    }
    let spec = ModelSpec::new(&eq.response, eq.rhs.clone(), &predictors, &parameters);
    for choice in [
        TransformChoice::Auto,
        TransformChoice::Given(Expr::call(Func::Ln, vec![Expr::name(&eq.response)])),
    ] {
        let a = analyze(&spec, &choice);
        let _ = explain_text(&a);
        let _ = serde_json::to_string(&a);
    }
});
