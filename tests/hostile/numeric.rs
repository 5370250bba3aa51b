//! Numerical edge cases: constant columns, values near the ends of the float range, large
//! offsets with small spread (catastrophic cancellation), collinear and nearly collinear
//! bases, and models that overflow, underflow or are undefined at the start values. Each
//! gives an accurate result or a clear message.

use super::*;

fn result_json(c: &Case) -> serde_json::Value {
    let runs = run_folders(&c.path("out"));
    assert_eq!(runs.len(), 1, "one run folder");
    serde_json::from_str(&std::fs::read_to_string(runs[0].join("result.json")).expect("read"))
        .expect("json")
}

fn param(doc: &serde_json::Value, name: &str) -> f64 {
    doc["parameters"]
        .as_array()
        .and_then(|ps| ps.iter().find(|p| p["name"] == name))
        .and_then(|p| p["value"].as_f64())
        .unwrap_or_else(|| panic!("no parameter {name}"))
}

#[test]
fn collinear_data_columns_name_the_parameters() {
    let r = Recipe::line().equation("y = a*x + b*z");
    let c = r.case("x,y,z\n1,2.1,2\n2,3.9,4\n3,6.2,6\n4,7.9,8\n5,10.1,10\n");
    refused(&c, &["linearly dependent", "(a)", "(b)"]);
}

/// The two-pass centred least-squares line (x̄, ȳ first, then Sxy/Sxx), with compensated
/// sums: the textbook way to avoid cancellation (Chan, Golub & LeVeque, "Algorithms for
/// computing the sample variance", 1983 — from memory). Reference for the test below.
fn centred_line(x: &[f64], y: &[f64]) -> (f64, f64) {
    fn sum(v: impl Iterator<Item = f64>) -> f64 {
        // Neumaier's compensated summation.
        let (mut s, mut c) = (0.0f64, 0.0f64);
        for x in v {
            let t = s + x;
            c += if s.abs() >= x.abs() {
                (s - t) + x
            } else {
                (x - t) + s
            };
            s = t;
        }
        s + c
    }
    let n = x.len() as f64;
    let mx = sum(x.iter().copied()) / n;
    let my = sum(y.iter().copied()) / n;
    let sxy = sum(x.iter().zip(y).map(|(a, b)| (a - mx) * (b - my)));
    let sxx = sum(x.iter().map(|a| (a - mx) * (a - mx)));
    let b = sxy / sxx;
    (my - b * mx, b)
}

#[test]
fn large_offset_with_small_spread_gives_the_centred_answer() {
    // Set points 1,000,000.000 … 1,000,000.019: offset 5·10⁷ times the spread.
    let mut text = String::from("x,y\n");
    let (mut xs, mut ys) = (Vec::new(), Vec::new());
    for i in 0..20 {
        let x = format!("{:.6}", 1e6 + i as f64 * 1e-3);
        let wiggle = [0.004, -0.007, 0.002, 0.009, -0.003][i % 5];
        let y = format!("{:.6}", 3.0 + 2.0 * (i as f64) + wiggle);
        text.push_str(&format!("{x},{y}\n"));
        xs.push(x.parse::<f64>().expect("x"));
        ys.push(y.parse::<f64>().expect("y"));
    }
    let c = Recipe::line().case(&text);
    c.run(&["run", "r.toml"]).expect_code(0);
    let doc = result_json(&c);
    let (a0, b0) = centred_line(&xs, &ys);
    let (a, b) = (param(&doc, "a"), param(&doc, "b"));
    assert!(((b - b0) / b0).abs() < 1e-9, "b = {b}, centred {b0}");
    assert!(((a - a0) / a0).abs() < 1e-9, "a = {a}, centred {a0}");
}

#[test]
fn model_undefined_at_the_start_values_names_the_row() {
    let r = Recipe::line()
        .equation("y = a*ln(x - b)")
        .params(&["a = { start = 1 }", "b = { start = 10 }"]);
    let c = r.case(LINE);
    refused(
        &c,
        &[
            "cannot be evaluated at the start values",
            "ln",
            "line 2 of d.csv",
            "start values",
        ],
    );
}

#[test]
fn exp_overflow_at_the_start_values_names_the_row() {
    let r = Recipe::line()
        .equation("y = a*exp(b*x) + c")
        .params(&[
            "a = { start = 1 }",
            "b = { start = 1 }",
            "c = { start = 0 }",
        ])
        .fit("method = \"nonlinear\"");
    let c = r.case("x,y\n100,1\n300,2\n500,3.1\n800,4\n1000,5.2\n");
    refused(&c, &["inf (overflow)", "exp(b*x)", "line 5 of d.csv"]);
}

#[test]
fn power_overflow_at_the_start_values_names_the_row() {
    let r = Recipe::line()
        .equation("y = a*x^b")
        .params(&["a = { start = 1 }", "b = { start = 400 }"])
        .fit("method = \"nonlinear\"");
    let c = r.case("x,y\n1,1\n10,2\n100,3.1\n1000,4\n");
    refused(&c, &["inf (overflow)", "x^b", "line 3 of d.csv"]);
}

#[test]
fn huge_start_values_of_a_linear_model_do_not_matter() {
    let r = Recipe::line().params(&["a = { start = 1e308 }", "b = { start = -1e308 }"]);
    let c = r.case(LINE);
    c.run(&["run", "r.toml"]).expect_code(0);
    let b = param(&result_json(&c), "b");
    assert!((b - 2.0).abs() < 0.01, "b = {b}");
}

#[test]
fn extreme_constant_weights_give_the_unweighted_fit() {
    let plain = Recipe::line().case(LINE);
    plain.run(&["run", "r.toml"]).expect_code(0);
    let (a0, b0) = (
        param(&result_json(&plain), "a"),
        param(&result_json(&plain), "b"),
    );
    for w in ["1e300", "1e-300"] {
        let c = Recipe::line().fit(&format!("weights = \"{w}\"")).case(LINE);
        c.run(&["run", "r.toml"]).expect_code(0);
        let doc = result_json(&c);
        // Relative weights: scaling them all changes nothing.
        assert!((param(&doc, "a") - a0).abs() < 1e-12, "weights {w}");
        assert!((param(&doc, "b") - b0).abs() < 1e-12, "weights {w}");
    }
}

#[test]
fn constant_response_makes_r_squared_not_applicable_not_nan() {
    let c = Recipe::line().case("x,y\n1,5\n2,5\n3,5\n4,5\n5,5\n");
    let out = c.run(&["run", "r.toml"]);
    out.expect_code(1)
        .expect_contains(&["n/a", "R² is not defined: the response does not vary"]);
    assert!(!out.stdout.contains("NaN"), "{}", out.stdout);
}

#[test]
fn constant_predictor_is_named_when_the_design_is_singular() {
    let c = Recipe::line().case("x,y\n3,5\n3,6\n3,7\n3,5\n3,5.5\n");
    refused(
        &c,
        &[
            "linearly dependent",
            "`x` has the same value (3) on every row",
        ],
    );
}

#[test]
fn exp_underflow_everywhere_at_the_start_is_a_clear_error() {
    let r = Recipe::line()
        .equation("y = a*exp(-b*x)")
        .params(&["a = { start = 1 }", "b = { start = 1000 }"])
        .fit("method = \"nonlinear\"");
    let c = r.case("x,y\n1,1\n2,0.6\n3,0.35\n4,0.2\n5,0.12\n");
    refused(
        &c,
        &[
            "does not change with any parameter at the start values",
            "underflow",
            "start",
        ],
    );
}

#[test]
fn nearly_collinear_basis_is_fitted_with_a_conditioning_warning() {
    // z differs from x by one part in 10¹¹: the two slopes are barely separable.
    let mut text = String::from("x,y,z\n");
    for i in 1..=12 {
        let x = i as f64;
        let z = x * (1.0 + if i % 2 == 0 { 1e-11 } else { -1e-11 });
        text.push_str(&format!(
            "{x},{},{z:.17e}\n",
            0.5 + 2.0 * x + 0.01 * (i % 3) as f64
        ));
    }
    let r = Recipe::line()
        .equation("y = a + b*x + c*z")
        .params(&["a = {}", "b = {}", "c = {}"]);
    let c = r.case(&text);
    let out = c.run(&["run", "r.toml"]);
    assert!(matches!(out.code, 0 | 1), "{out:?}");
    out.expect_contains(&["warning:", "condition number", "significant digits"]);
}

#[test]
fn overflow_in_a_linear_basis_is_a_clear_error() {
    let r = Recipe::line().equation("y = a + b*exp(x)");
    let c = r.case("x,y\n1,1\n10,2\n100,3\n1000,4\n");
    refused(
        &c,
        &["inf (overflow)", "exp(x)", "line 5 of d.csv", "help:"],
    );
}

#[test]
fn quadratic_at_a_large_offset_says_to_centre_the_predictor() {
    let mut text = String::from("x,y\n");
    for i in 0..20 {
        let d = i as f64 * 1e-3;
        text.push_str(&format!(
            "{:.6},{:.6}\n",
            1e6 + d,
            3.0 + 2.0 * d + 40.0 * d * d
        ));
    }
    let r = Recipe::line()
        .equation("y = a + b*x + c*x^2")
        .params(&["a = {}", "b = {}", "c = {}"]);
    let c = r.case(&text);
    refused(&c, &["linearly dependent", "x - 1000000"]);
}

#[test]
fn subnormal_predictors_that_cannot_be_scaled_are_named() {
    let c = Recipe::line().case("x,y\n1e-310,1\n2e-310,3\n3e-310,5\n4e-310,7.1\n");
    refused(&c, &["linearly dependent", "`x`", "subnormal"]);
}

#[test]
fn subnormal_responses_are_fitted_with_a_warning() {
    let c = Recipe::line().case("x,y\n1,4e-320\n2,5e-320\n3,7e-320\n4,8e-320\n5,9.5e-320\n");
    let out = c.run(&["run", "r.toml"]);
    out.expect_code(1).expect_contains(&[
        "warning: column `y` holds values below 2.2e-308 in magnitude (subnormal)",
    ]);
}

#[test]
fn values_near_the_top_of_the_float_range_give_a_clear_message() {
    let c = Recipe::line().case("x,y\n1,1e308\n2,1.5e308\n3,1.7e308\n4,1.1e308\n");
    refused(
        &c,
        &[
            "not finite",
            "line 2 of d.csv",
            "range of 64-bit floats",
            "unit",
        ],
    );
}
