//! The symbolic engine at the limits of SPEC §3: the Jacobian of depth-199 nests (compiled to
//! a tape, as every fit does), and the linearizability analysis of a sum that expands to
//! hundreds of basis terms under the y² transform (an input the fuzzer found).
//!
//! Run with `cargo bench --bench symbolic_limits`. Prints the wall time of each case; there is
//! no target, the numbers show that the worst accepted inputs stay bounded.

use std::time::Instant;

use fitwright::analysis::{ModelSpec, TransformChoice, analyze};
use fitwright::expr::{MultiTape, Symbols, parse_equation};

fn main() {
    for level in ["(", "sin(x*", "sin(b*x + ", "ln(1 + b*", "1/(1 + b*"] {
        let src = format!("y = a + b*{}x{}", level.repeat(199), ")".repeat(199));
        let eq = parse_equation(&src).expect("within the limits");
        let symbols = Symbols::new(&["x"], &["a", "b"]);
        let start = Instant::now();
        let tape = MultiTape::model_and_jacobian(&eq.rhs, &symbols).expect("compiles");
        println!(
            "Jacobian and tape of `{level}` × 199: {:>9.1} ms ({} outputs)",
            start.elapsed().as_secs_f64() * 1e3,
            tape.exprs().len()
        );
    }
    // Found by the analyze_equation fuzz target (fuzz/seeds/analyze_equation/slow-y2).
    let src = include_str!("../fuzz/seeds/analyze_equation/slow-y2");
    let eq = parse_equation(src.trim()).expect("parses");
    let mut names: Vec<String> = Vec::new();
    for (n, _) in eq.rhs.identifiers() {
        if !names.contains(&n) {
            names.push(n);
        }
    }
    let (params, predictors) = names.split_at(3);
    let predictors: Vec<&str> = predictors.iter().map(String::as_str).collect();
    let params: Vec<(&str, Option<f64>)> = params.iter().map(|p| (p.as_str(), Some(1.5))).collect();
    let model = ModelSpec::new(&eq.response, eq.rhs.clone(), &predictors, &params);
    let start = Instant::now();
    let a = analyze(&model, &TransformChoice::Auto);
    println!(
        "analysis of the fuzzer's slow sum: {:>9.1} ms ({})",
        start.elapsed().as_secs_f64() * 1e3,
        a.outcome.label()
    );
}
