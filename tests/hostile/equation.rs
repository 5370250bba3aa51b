//! Equations at and past the limits of SPEC §3: nesting, length, prefix and power chains,
//! depth-200 trees through the simplifier, the derivatives and the fit (on the batch's worker
//! threads), and malformed equations.

use super::*;

fn eq_case(eq: &str) -> (Case, String) {
    let r = Recipe::line().equation(eq);
    (r.case(LINE), r.text())
}

#[test]
fn ten_thousand_levels_of_parentheses_are_refused_at_level_201() {
    let eq = format!("y = a + b*{}x{}", "(".repeat(10_000), ")".repeat(10_000));
    let (c, text) = eq_case(&eq);
    let out = refused(
        &c,
        &[
            &pos(&text, "((", 200),
            "nested deeper than 200 levels",
            "flatten",
        ],
    );
    assert!(
        out.stderr.len() < 2_000,
        "{} bytes of message",
        out.stderr.len()
    );
}

#[test]
fn hundred_thousand_character_equation_is_refused_with_a_short_message() {
    let eq = format!("y = a + b*x{}", "+x".repeat(50_000));
    let (c, text) = eq_case(&eq);
    let out = refused(
        &c,
        &[
            &pos(&text, "y = a", 10_000),
            "the expression is 100011 characters long; the limit is 10000",
        ],
    );
    assert!(
        out.stderr.len() < 2_000,
        "{} bytes of message",
        out.stderr.len()
    );
}

#[test]
fn three_hundred_prefix_minus_signs_are_too_deep() {
    let eq = format!("y = a + b*{}x", "-".repeat(300));
    let (c, _) = eq_case(&eq);
    refused(&c, &["r.toml:6:", "nested deeper than 200 levels"]);
}

#[test]
fn power_chain_of_three_hundred_is_too_deep() {
    let eq = format!("y = a + b*{}x", "x^".repeat(300));
    let (c, _) = eq_case(&eq);
    refused(&c, &["r.toml:6:", "nested deeper than 200 levels"]);
}

/// Depth 199 is allowed: the simplifier, the derivatives, the analysis and the fit all walk
/// it, on a worker thread of the batch.
#[test]
fn depth_199_parentheses_run() {
    let eq = format!("y = a + b*{}x{}", "(".repeat(199), ")".repeat(199));
    let (c, _) = eq_case(&eq);
    c.run(&["run", "r.toml"])
        .expect_code(0)
        .expect_contains(&["criteria met"]);
}

#[test]
fn depth_199_nested_functions_run() {
    let eq = format!("y = a + b*{}x{}", "abs(".repeat(199), ")".repeat(199));
    let (c, _) = eq_case(&eq);
    c.run(&["run", "r.toml"])
        .expect_code(0)
        .expect_contains(&["criteria met"]);
}

#[test]
fn depth_150_nested_sines_with_a_parameter_inside_run_without_overflow() {
    // Every level multiplies the chain rule: ∂/∂b reaches through 150 sines.
    let inner = format!("{}b*x{}", "sin(".repeat(150), ")".repeat(150));
    let r = Recipe::line()
        .equation(&format!("y = a + {inner}"))
        .params(&["a = { start = 0 }", "b = { start = 0.1 }"])
        .fit("method = \"nonlinear\"");
    let c = r.case(LINE);
    let out = c.run(&["run", "r.toml"]);
    assert!(matches!(out.code, 0 | 1), "{out:?}");
    out.expect_contains(&["b = "]);
}

#[test]
fn sixty_nested_exponentials_of_a_parameter_run_without_overflow() {
    let mut inner = "x".to_string();
    for _ in 0..60 {
        inner = format!("exp(b*{inner})");
    }
    let r = Recipe::line()
        .equation(&format!("y = a + {inner}"))
        .params(&["a = { start = 1 }", "b = { start = 0.01 }"])
        .fit("method = \"nonlinear\"");
    let c = r.case(LINE);
    let out = c.run(&["run", "r.toml"]);
    assert!(matches!(out.code, 0..=2), "{out:?}");
    assert!(!out.stderr.contains("overflow") || out.code == 2);
}

#[test]
fn unknown_function_is_pointed_at() {
    let (c, text) = eq_case("y = a + b*foo(x)");
    refused(&c, &[&pos(&text, "foo", 0), "foo"]);
}

#[test]
fn comparison_in_an_equation_is_refused() {
    let (c, text) = eq_case("y = a + b*x == 2");
    refused(
        &c,
        &[
            &pos(&text, "a + b*x ==", 0),
            "comparisons",
            "only allowed in filters",
        ],
    );
}

#[test]
fn nul_character_escaped_into_an_equation_is_refused() {
    let (c, text) = eq_case("y = a + b*x\\u0000");
    let out = refused(&c, &[&pos(&text, "\"y = a", 0), "in the equation"]);
    assert_printable(&out);
}

#[test]
fn response_on_both_sides_is_refused() {
    let (c, text) = eq_case("y = a + b*y");
    refused(
        &c,
        &[
            &pos(&text, "b*y", 2),
            "the response `y` also appears on the right side",
        ],
    );
}

#[test]
fn empty_equation_is_refused() {
    let (c, _) = eq_case("");
    refused(&c, &["r.toml:6:", "equation"]);
}

#[test]
fn equation_without_a_right_hand_side_is_refused() {
    let (c, text) = eq_case("y = ");
    refused(
        &c,
        &[
            &pos(&text, "\"y = ", 5),
            "the equation has nothing after `=`",
        ],
    );
}

#[test]
fn two_equals_signs_are_refused() {
    let (c, text) = eq_case("y = a = b*x");
    refused(&c, &[&pos(&text, "= b", 0), "`=`"]);
}
