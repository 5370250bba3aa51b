//! Explicit transforms that the data break, and weights that are not positive finite numbers.

use super::*;

const EXP_DATA: &str = "x,y\n0,1\n1,-2\n2,4\n3,8\n4,16\n5,33\n";

fn exp_recipe(transform: &str) -> Recipe {
    Recipe::line()
        .equation("y = a*exp(b*x)")
        .fit(&format!("transform = \"{transform}\""))
}

#[test]
fn ln_of_a_negative_response_with_an_explicit_transform_names_the_row() {
    let r = exp_recipe("ln(y)");
    let c = r.case(EXP_DATA);
    refused(
        &c,
        &[
            &pos(&r.text(), "\"ln(y)\"", 0),
            "the transform ln(y) is undefined on some rows",
            "line 3 of d.csv",
            "drop_invalid = true",
        ],
    );
}

#[test]
fn reciprocal_transform_of_a_zero_response_names_the_row() {
    let r = Recipe::line()
        .equation("y = 1/(a + b*x)")
        .fit("transform = \"1/y\"");
    let c = r.case("x,y\n1,0.5\n2,0\n3,0.2\n4,0.15\n5,0.12\n");
    refused(&c, &[&pos(&r.text(), "\"1/y\"", 0), "line 3 of d.csv"]);
}

#[test]
fn square_root_transform_at_a_zero_response_is_refused_for_its_weights() {
    let r = Recipe::line()
        .equation("y = (a + b*x)^2")
        .fit("transform = \"sqrt(y)\"");
    let c = r.case("x,y\n0,0\n1,1.1\n2,3.9\n3,9.2\n4,15.8\n");
    refused(&c, &["sqrt", "line 2 of d.csv"]);
}

#[test]
fn transform_without_the_response_is_refused() {
    let r = exp_recipe("ln(x)");
    let c = r.case(EXP_DATA);
    refused(
        &c,
        &[
            &pos(&r.text(), "\"ln(x)\"", 0),
            "the transform does not use the response `y`",
        ],
    );
}

#[test]
fn transform_with_an_unknown_name_is_pointed_at() {
    let r = exp_recipe("ln(Y)");
    let c = r.case(EXP_DATA);
    refused(&c, &[&pos(&r.text(), "Y)", 0), "`Y`"]);
}

#[test]
fn transform_that_does_not_linearize_is_explained() {
    let r = Recipe::line()
        .equation("y = a*exp(b*x) + c")
        .params(&[
            "a = { start = 1 }",
            "b = { start = 0.5 }",
            "c = { start = 0 }",
        ])
        .fit("transform = \"ln(y)\"")
        .fit("method = \"linearized\"");
    let c = r.case("x,y\n0,2\n1,2.7\n2,3.9\n3,5.5\n4,8.2\n5,12.1\n");
    refused(&c, &["ln(y)"]);
}

fn weights_case(weights: &str) -> (Case, String) {
    let r = Recipe::line().fit(&format!("weights = \"{weights}\""));
    (r.case(LINE), r.text())
}

#[test]
fn negative_weights_are_refused_with_their_rows() {
    let (c, text) = weights_case("x - 3");
    refused(
        &c,
        &[
            &pos(&text, "\"x - 3\"", 0),
            "the weights are zero, negative or not finite at lines 2, 3, 4 and 5 of d.csv",
            "positive",
        ],
    );
}

#[test]
fn zero_weights_are_refused() {
    let (c, text) = weights_case("0*x");
    refused(
        &c,
        &[
            &pos(&text, "\"0*x\"", 0),
            "zero, negative or not finite",
            "and 2 more",
        ],
    );
}

#[test]
fn weights_dividing_by_zero_name_the_row() {
    let (c, text) = weights_case("1/x");
    refused(
        &c,
        &[
            &pos(&text, "\"1/x\"", 0),
            "cannot be evaluated at line 2 of d.csv",
            "division by zero",
        ],
    );
}

#[test]
fn weights_that_are_not_a_number_are_refused() {
    let (c, text) = weights_case("sqrt(x - 10)");
    refused(&c, &[&pos(&text, "\"sqrt(x - 10)\"", 0), "line 2 of d.csv"]);
}

#[test]
fn weights_overflowing_to_infinity_are_refused() {
    let (c, text) = weights_case("exp(1000*x)");
    refused(&c, &[&pos(&text, "\"exp(1000*x)\"", 0), "line 3 of d.csv"]);
}

#[test]
fn weights_from_a_missing_column_are_refused() {
    let (c, text) = weights_case("1/u^2");
    refused(&c, &[&pos(&text, "u^2", 0), "`u`"]);
}

#[test]
fn weights_column_with_text_is_located_in_the_data() {
    let r = Recipe::line().fit("weights = \"1/u^2\"");
    let c = r.case("x,y,u\n0,0.02,0.1\n1,1.98,0.1\n2,4.03,n/a\n3,5.97,0.1\n");
    refused(&c, &["d.csv:4:", "`n/a`", "column `u`"]);
}

#[test]
fn ln_of_a_negative_response_with_drop_invalid_leaves_the_row_out_and_says_so() {
    let r = exp_recipe("ln(y)").fit("drop_invalid = true");
    let c = r.case(EXP_DATA);
    let out = c.run(&["run", "r.toml"]);
    assert!(matches!(out.code, 0 | 1), "{out:?}");
    out.expect_contains(&[
        "warning: 1 row left out because the transform ln(y) is undefined there",
        "line 3 of d.csv",
        "· n 5",
    ]);
}
