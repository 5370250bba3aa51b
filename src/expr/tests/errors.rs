//! Error messages and their positions for malformed input: line, column and width in
//! characters, as an editor would show them.

use crate::expr::*;

/// (line, column, width) of the error for `src`, checking the message too.
fn at(result: Result<Equation, ExprError>, src: &str, message: &str) -> (usize, usize, usize) {
    let err = result.expect_err(src);
    assert!(
        err.message.contains(message),
        "{src}: message `{}` lacks `{message}`",
        err.message
    );
    err.position(src)
}

fn eq(src: &str, message: &str) -> (usize, usize, usize) {
    at(parse_equation(src), src, message)
}

#[test]
fn missing_operand_after_plus_points_at_the_end() {
    assert_eq!(eq("y = a + ", "ends too early"), (1, 9, 1));
}

#[test]
fn doubled_operator_points_at_the_second_one() {
    assert_eq!(eq("y = a + * b", "found `*`"), (1, 9, 1));
}

#[test]
fn unclosed_parenthesis_points_where_the_close_was_expected() {
    let src = "y = a*exp(b*(x + 1)";
    let err = parse_equation(src).unwrap_err();
    assert_eq!(err.message, "expected `)`, found the end of the expression");
    assert_eq!(err.help.as_deref(), Some("the `(` at byte 9 is not closed"));
    assert_eq!(err.position(src), (1, 20, 1));
}

#[test]
fn unmatched_close_parenthesis() {
    assert_eq!(eq("y = a + b)", "unmatched `)`"), (1, 10, 1));
}

#[test]
fn unknown_function_with_suggestion() {
    let src = "y = a*lg(x)";
    let err = parse_equation(src).unwrap_err();
    assert_eq!(err.message, "unknown function `lg`");
    assert_eq!(err.help.as_deref(), Some("did you mean `ln`?"));
    assert_eq!(err.position(src), (1, 7, 2));
}

#[test]
fn wrong_number_of_arguments_spans_the_call() {
    assert_eq!(
        eq("y = atan2(x) + b", "`atan2` takes 2 arguments, found 1"),
        (1, 5, 8)
    );
}

#[test]
fn number_glued_to_a_name() {
    let src = "y = 2x + b";
    let err = parse_equation(src).unwrap_err();
    assert_eq!(err.message, "malformed number");
    assert_eq!(
        err.help.as_deref(),
        Some("write the product with `*`, e.g. `2*x`")
    );
    assert_eq!(err.position(src), (1, 5, 2));
}

#[test]
fn exponent_without_digits() {
    assert_eq!(
        eq("y = 1.5e + x", "exponent of this number has no digits"),
        (1, 5, 4)
    );
}

#[test]
fn double_star_is_not_a_power() {
    assert_eq!(eq("y = x**2", "`**` is not an operator"), (1, 6, 2));
}

#[test]
fn comparison_in_an_equation_spans_the_comparison() {
    assert_eq!(eq("y = a + (x > 2)", "only allowed in filters"), (1, 10, 5));
}

#[test]
fn missing_equals_spans_everything() {
    assert_eq!(eq("a + b*x", "an equation needs `=`"), (1, 1, 7));
}

#[test]
fn left_side_must_be_one_name() {
    assert_eq!(eq("y + 1 = a*x", "single name"), (1, 1, 5));
}

#[test]
fn second_equals_sign() {
    assert_eq!(eq("y = a = b", "`=` is not allowed here"), (1, 7, 1));
}

#[test]
fn response_on_both_sides() {
    assert_eq!(
        eq("y = a*y + b", "also appears on the right side"),
        (1, 7, 1)
    );
}

#[test]
fn function_name_without_call() {
    assert_eq!(eq("y = exp + x", "`exp` is a function"), (1, 5, 3));
}

#[test]
fn unexpected_character_counts_columns_in_characters() {
    // `Ω` is two bytes; the column of `#` is still 9 characters in.
    assert_eq!(eq("y = Ω*x #2", "unexpected character `#`"), (1, 9, 1));
}

#[test]
fn two_names_without_operator() {
    assert_eq!(eq("y = a b", "after a complete expression"), (1, 7, 1));
}

#[test]
fn positions_on_a_later_line() {
    let src = "y = a +\n    b*\n    )";
    assert_eq!(eq(src, "found `)`"), (3, 5, 1));
}

#[test]
fn chained_comparison_in_a_filter() {
    let src = "0 < T < 5";
    let err = parse_filter(src).unwrap_err();
    assert_eq!(err.message, "comparisons do not chain");
    assert_eq!(err.position(src), (1, 7, 1));
}

#[test]
fn filter_must_be_a_condition() {
    let src = "T + 1";
    let err = parse_filter(src).unwrap_err();
    assert_eq!(err.message, "expected a condition, found a number");
    assert_eq!(err.position(src), (1, 1, 5));
    let src = "T > 1 && R";
    let err = parse_filter(src).unwrap_err();
    assert_eq!(err.position(src), (1, 10, 1));
}

#[test]
fn single_ampersand_suggests_double() {
    let src = "T > 1 & R < 2";
    let err = parse_filter(src).unwrap_err();
    assert_eq!(err.message, "`&` alone is not an operator");
    assert_eq!(err.position(src), (1, 7, 1));
}

#[test]
fn render_draws_the_line_and_carets() {
    let src = "y = b0 + B0*x";
    let eq = parse_equation(src).unwrap();
    let err = resolve(&eq.rhs, &["x"], &["b0", "b1"]).unwrap_err();
    assert_eq!(
        err.render(src),
        "error: unknown name `B0`\n  1:10 | y = b0 + B0*x\n       |          ^^\n  help: did you mean `b0`? parameters are `b0`, `b1`; variables are `x`\n"
    );
}

#[test]
fn ten_thousand_levels_of_nesting_get_the_depth_error() {
    let src = format!("y = {}x{}", "(".repeat(10_000), ")".repeat(10_000));
    let err = parse_equation(&src).unwrap_err();
    assert_eq!(
        err.message,
        "the expression is nested deeper than 200 levels"
    );
    // The 201st `(` is the first one too deep.
    assert_eq!(err.position(&src), (1, 4 + 201, 1));
    let calls = format!("{}x{}", "exp(".repeat(2_000), ")".repeat(2_000));
    assert!(
        parse_expression(&calls)
            .unwrap_err()
            .message
            .contains("nested deeper")
    );
}

#[test]
fn depth_limit_is_exactly_200() {
    let ok = format!("{}x{}", "(".repeat(200), ")".repeat(200));
    assert!(parse_expression(&ok).is_ok());
    let too_deep = format!("{}x{}", "(".repeat(201), ")".repeat(201));
    assert!(parse_expression(&too_deep).is_err());
    let ok_calls = format!("{}x{}", "sin(".repeat(200), ")".repeat(200));
    assert!(parse_expression(&ok_calls).is_ok());
    let deep_calls = format!("{}x{}", "sin(".repeat(201), ")".repeat(201));
    assert!(parse_expression(&deep_calls).is_err());
}

#[test]
fn chains_of_powers_and_signs_count_against_the_depth() {
    let powers = vec!["x"; 1_000].join("^");
    assert!(
        parse_expression(&powers)
            .unwrap_err()
            .message
            .contains("nested deeper")
    );
    let signs = format!("{}x", "-".repeat(3_000));
    assert!(
        parse_expression(&signs)
            .unwrap_err()
            .message
            .contains("nested deeper")
    );
    let bangs = format!("{}(x > 1)", "!".repeat(3_000));
    assert!(
        parse_filter(&bangs)
            .unwrap_err()
            .message
            .contains("nested deeper")
    );
}

#[test]
fn too_long_source_is_refused() {
    let src = format!("y = {}", vec!["x"; 5_001].join("+"));
    let err = parse_equation(&src).unwrap_err();
    assert_eq!(
        err.message,
        "the expression is 10005 characters long; the limit is 10000"
    );
    assert_eq!(err.position(&src), (1, 10_001, 5));
}

#[test]
fn empty_input() {
    assert_eq!(
        parse_expression("  ").unwrap_err().message,
        "the expression is empty"
    );
    assert_eq!(eq("y =", "nothing after `=`"), (1, 4, 1));
}
