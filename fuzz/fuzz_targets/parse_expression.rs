//! Fuzz target for the expression parser and everything that consumes its output.
//!
//! Any input must give a value or an error, never a panic or a stack overflow; a parsed
//! expression must print back to the same tree; small ones must also survive
//! simplification, differentiation and compiled evaluation.
#![no_main]

use fitwright::expr::{
    Symbols, Tape, derivative, parse_equation, parse_expression, parse_filter, simplify,
};
use libfuzzer_sys::fuzz_target;

fuzz_target!(|data: &[u8]| {
    let Ok(src) = std::str::from_utf8(data) else {
        return;
    };
    for parsed in [
        parse_expression(src),
        parse_filter(src),
        parse_equation(src).map(|eq| eq.rhs),
    ] {
        match parsed {
            Err(err) => {
                // Positions and rendering must work for every error span.
                let _ = err.position(src);
                let _ = err.render(src);
            }
            Ok(expr) => check(&expr, src),
        }
    }
});

fn check(expr: &fitwright::expr::Expr, src: &str) {
    let printed = expr.to_string();
    let again = if expr.is_boolean() {
        parse_filter(&printed)
    } else {
        parse_expression(&printed)
    };
    match again {
        Ok(back) => assert!(back == *expr, "round trip changed `{src}` into `{printed}`"),
        // Printing may add parentheses; beyond the length limit that is refused.
        Err(e) => assert!(
            printed.chars().count() > 10_000 || e.message.contains("nested deeper"),
            "`{printed}` (from `{src}`) does not parse: {e}"
        ),
    }
    let names: Vec<String> = expr.identifiers().into_iter().map(|(n, _)| n).collect();
    let vars: Vec<&str> = names.iter().map(String::as_str).collect();
    let symbols = Symbols::new(&vars, &[]);
    if let Ok(tape) = Tape::compile(expr, &symbols) {
        let columns: Vec<Vec<f64>> = (0..vars.len())
            .map(|i| vec![-1.0, 0.0, 0.5 + i as f64, 3.0])
            .collect();
        let refs: Vec<&[f64]> = columns.iter().map(Vec::as_slice).collect();
        let mut out = [0.0; 4];
        let _ = tape.eval(&refs, &[], &mut out);
    }
    if src.len() <= 300 && !expr.is_boolean() {
        let _ = simplify(expr);
        if let Some(first) = vars.first() {
            let _ = derivative(expr, first);
        }
    }
}
