//! Behaviour of parsing, printing, simplification, derivatives and evaluation on
//! hand-picked cases (expected values worked out by hand).

use crate::expr::simplify::{Mode, Simplifier};
use crate::expr::sym::{to_expr, to_node};
use crate::expr::*;

fn p(src: &str) -> Expr {
    parse_expression(src).unwrap_or_else(|e| panic!("{}: {}", &src[..src.len().min(80)], e.message))
}

fn printed(src: &str) -> String {
    p(src).to_string()
}

#[test]
fn power_binds_tighter_than_unary_minus_and_is_right_associative() {
    assert_eq!(
        p("-x^2"),
        Expr::negate(Expr::pow(Expr::name("x"), Expr::number(2.0)))
    );
    assert_eq!(
        p("a^b^c"),
        Expr::pow(Expr::name("a"), Expr::pow(Expr::name("b"), Expr::name("c")))
    );
    assert_eq!(
        p("2^-x"),
        Expr::pow(Expr::number(2.0), Expr::negate(Expr::name("x")))
    );
    assert_eq!(printed("(-x)^2"), "(-x)^2");
    assert_eq!(printed("(a^b)^c"), "(a^b)^c");
}

#[test]
fn printer_uses_minimal_parentheses() {
    for (src, want) in [
        ("((a + b)) * c", "(a + b)*c"),
        ("a - (b - c)", "a - (b - c)"),
        ("(a - b) - c", "(a - b) - c"),
        ("a - b - c", "a - b - c"),
        ("a / (b * c)", "a/(b*c)"),
        ("-(a*b)", "-(a*b)"),
        ("exp(-(x))", "exp(-x)"),
        ("a^(b*c)", "a^(b*c)"),
        ("2.5e-7 * x", "2.5e-7*x"),
        ("1e20", "1e20"),
        ("0.001", "0.001"),
    ] {
        assert_eq!(printed(src), want, "{src}");
        assert_eq!(p(want), p(src), "round trip of {src}");
    }
    let f = parse_filter("!(T < 0) && (R > 1 || R < -1)").unwrap();
    assert_eq!(f.to_string(), "!T < 0 && (R > 1 || R < -1)");
    assert_eq!(parse_filter(&f.to_string()).unwrap(), f);
}

#[test]
fn flat_chains_stay_flat_and_long_ones_do_not_overflow_the_stack() {
    let src = vec!["x"; 2_400].join(" + ");
    let e = p(&src);
    let ExprKind::Sum { rest, .. } = &e.kind else {
        panic!("not a sum")
    };
    assert_eq!(rest.len(), 2_399);
    // Every pass over the tree must cope with it.
    assert_eq!(simplify(&e).to_string(), "2400*x");
    assert_eq!(derivative(&e, "x").to_string(), "2400");
    let tape = Tape::compile(&e, &Symbols::new(&["x"], &[])).unwrap();
    let mut out = [0.0; 3];
    tape.eval(&[&[1.0, 2.0, 0.5]], &[], &mut out).unwrap();
    assert_eq!(out, [2400.0, 4800.0, 1200.0]);
    let product = vec!["x"; 4_000].join("/");
    assert!(parse_expression(&product).is_ok());
}

#[test]
fn identifiers_in_first_appearance_order_without_pi() {
    let eq = parse_equation("R = R25*exp(B*(1/(T + 273.15) - 1/298.15)) + pi*B").unwrap();
    let ids: Vec<String> = eq.rhs.identifiers().into_iter().map(|(n, _)| n).collect();
    assert_eq!(ids, ["R25", "B", "T"]);
    let (_, span) = &eq.rhs.identifiers()[1];
    assert_eq!(
        &"R = R25*exp(B*(1/(T + 273.15) - 1/298.15)) + pi*B"[span.start..span.end],
        "B"
    );
    assert_eq!(eq.response, "R");
    assert_eq!(eq.response_span, Span::new(0, 1));
}

#[test]
fn unicode_identifiers_are_accepted() {
    let e = p("Ω0 * (1 + α*ΔT)");
    let ids: Vec<String> = e.identifiers().into_iter().map(|(n, _)| n).collect();
    assert_eq!(ids, ["Ω0", "α", "ΔT"]);
}

#[test]
fn resolve_suggests_the_closest_name_and_lists_the_known_ones() {
    let src = "b0 + B0*x";
    let err = resolve(&p(src), &["x"], &["b0", "b1"]).unwrap_err();
    assert_eq!(err.message, "unknown name `B0`");
    assert_eq!(
        err.help.as_deref(),
        Some("did you mean `b0`? parameters are `b0`, `b1`; variables are `x`")
    );
    assert_eq!(err.span, Span::new(5, 7));
}

#[test]
fn resolve_refuses_an_unused_parameter_and_accepts_pi() {
    let err = resolve(&p("a + b*x"), &["x"], &["a", "b", "c"]).unwrap_err();
    assert_eq!(
        err.message,
        "parameter `c` is declared but the expression does not use it"
    );
    assert!(resolve(&p("a*sin(2*pi*x)"), &["x"], &["a"]).is_ok());
    let err = resolve(&p("a*x"), &["x"], &["a", "pi"]).unwrap_err();
    assert!(err.message.contains("reserved"), "{}", err.message);
    let err = resolve(&p("a*x"), &["x"], &["a", "x"]).unwrap_err();
    assert!(err.message.contains("both a data variable and a parameter"));
}

fn canon(src: &str) -> String {
    simplify(&p(src)).to_string()
}

#[test]
fn simplifier_folds_constants_and_removes_neutral_elements() {
    assert_eq!(canon("0 + x*1"), "x");
    assert_eq!(canon("2*3 + x^1 - 0*y"), "x + 6");
    assert_eq!(canon("x^0 + 1/298.15*298.15"), "2");
    assert_eq!(canon("ln(exp(a*x))"), "a*x");
    assert_eq!(canon("exp(ln(x))"), "x");
    assert_eq!(canon("sqrt(x)*sqrt(x)"), "x");
    assert_eq!(canon("(x^3)^2"), "x^6");
    // Not applied without a condition: (x²)^(1/2) = |x|, not x.
    assert_eq!(canon("(x^2)^0.5"), "sqrt(x^2)");
    assert_eq!(canon("exp(2*ln(x))"), "x^2");
}

#[test]
fn simplifier_sorts_and_collects_like_terms() {
    assert_eq!(canon("b*x + a + x*b"), "a + 2*b*x");
    assert_eq!(canon("x*y*x/y"), "x^2");
    assert_eq!(canon("3*x - x - 2*x"), "0");
    assert_eq!(canon("a*b - b*a"), "0");
    assert_eq!(canon("x + y"), canon("y + x"));
    assert_eq!(canon("(2*x)^2"), "4*x^2");
    assert_eq!(canon("1/(a*b)"), "1/(a*b)");
}

fn expand(src: &str) -> (String, Vec<String>) {
    let mut s = Simplifier::new(Mode::Expand);
    let n = s.run(&to_node(&p(src)));
    let conds = s
        .conditions
        .iter()
        .map(|c| format!("{} [{}]", to_expr(&c.node), c.rule))
        .collect();
    (to_expr(&n).to_string(), conds)
}

#[test]
fn expand_mode_applies_the_log_identities_and_records_their_conditions() {
    let (e, conds) = expand("ln(a*x^b)");
    assert_eq!(e, "b*ln(x) + ln(a)");
    assert_eq!(
        conds,
        ["a > 0 [ln(a·b) = ln a + ln b]", "x > 0 [ln(a^b) = b·ln a]"]
    );
    // exp(u) > 0 always: no condition for it.
    let (e, conds) = expand("ln(R25*exp(B*(1/(T + 273.15) - 1/298.15)))");
    assert_eq!(e, "B/(T + 273.15) - 0.0033540164346805303*B + ln(R25)");
    assert_eq!(conds, ["R25 > 0 [ln(a·b) = ln a + ln b]"]);
    let (e, conds) = expand("(x^2)^0.5");
    assert_eq!(e, "x");
    assert_eq!(conds, ["x >= 0 [(u^a)^b = u^(a·b)]"]);
}

#[test]
fn expand_mode_expands_products_and_small_powers_of_sums_but_not_denominators() {
    assert_eq!(expand("(x - m)^2").0, "m^2 + x^2 - 2*m*x");
    assert_eq!(expand("a*(1 + x)").0, "a + a*x");
    assert_eq!(expand("x/(a + x)").0, "x/(a + x)");
    assert_eq!(expand("exp(a + b*x)").0, "exp(a)*exp(b*x)");
    assert_eq!(expand("(x + 1)^5").0, "(x + 1)^5");
}

#[test]
fn derivatives_of_common_models() {
    let d = |src: &str, x: &str| derivative(&p(src), x).to_string();
    assert_eq!(d("a*exp(b*x)", "b"), "a*x*exp(b*x)");
    assert_eq!(d("a*exp(b*x)", "a"), "exp(b*x)");
    assert_eq!(d("a + b*x + c*x^2", "x"), "b + 2*c*x");
    assert_eq!(d("a*x^b", "b"), "a*x^b*ln(x)");
    assert_eq!(d("Vmax*S/(Km + S)", "Km"), "-S*Vmax/(Km + S)^2");
    assert_eq!(d("ln(x)", "x"), "1/x");
    assert_eq!(d("sqrt(x)", "x"), "0.5/sqrt(x)");
    assert_eq!(d("a*x", "y"), "0");
    assert_eq!(d("x^x", "x"), "x^x*(ln(x) + 1)");
}

#[test]
fn tape_evaluates_columns_and_matches_hand_values() {
    let e = p("a*exp(-b*x) + c");
    let tape = Tape::compile(&e, &Symbols::new(&["x"], &["a", "b", "c"])).unwrap();
    let x = [0.0, 1.0, 2.0];
    let mut out = [0.0; 3];
    tape.eval(&[&x], &[2.0, 0.5, 1.0], &mut out).unwrap();
    let want = [
        3.0,
        2.0 * (-0.5f64).exp() + 1.0,
        2.0 * (-1.0f64).exp() + 1.0,
    ];
    assert_eq!(out, want);
}

#[test]
fn tape_covers_more_rows_than_one_chunk() {
    let e = p("x^2 - y");
    let tape = Tape::compile(&e, &Symbols::new(&["x", "y"], &[])).unwrap();
    let n = tape::CHUNK * 2 + 17;
    let x: Vec<f64> = (0..n).map(|i| i as f64).collect();
    let y: Vec<f64> = (0..n).map(|i| (i % 7) as f64).collect();
    let mut out = vec![0.0; n];
    tape.eval(&[&x, &y], &[], &mut out).unwrap();
    for i in 0..n {
        assert_eq!(out[i], x[i] * x[i] - y[i], "row {i}");
    }
}

#[test]
fn tape_split_across_threads_gives_the_same_values_and_the_first_bad_row() {
    // 300,017 rows: well above the row count from which blocks run in parallel.
    let n = 300_017;
    let x: Vec<f64> = (0..n).map(|i| 1.0 + i as f64 * 1e-3).collect();
    let e = p("a*exp(-b*x) + c*ln(x)");
    let symbols = Symbols::new(&["x"], &["a", "b", "c"]);
    let tape = MultiTape::model_and_jacobian(&e, &symbols).unwrap();
    let params = [2.0, 0.3, 0.5];
    let mut outs = vec![vec![0.0; n]; 4];
    let mut refs: Vec<&mut [f64]> = outs.iter_mut().map(|o| o.as_mut_slice()).collect();
    tape.eval(&[&x], &params, &mut refs).unwrap();
    // The same rows in slices below the parallel threshold, one chunk at a time.
    for lo in (0..n).step_by(tape::CHUNK) {
        let hi = (lo + tape::CHUNK).min(n);
        let mut small = vec![vec![0.0; hi - lo]; 4];
        let mut refs: Vec<&mut [f64]> = small.iter_mut().map(|o| o.as_mut_slice()).collect();
        tape.eval(&[&x[lo..hi]], &params, &mut refs).unwrap();
        for k in 0..4 {
            assert_eq!(
                &outs[k][lo..hi],
                small[k].as_slice(),
                "output {k}, rows {lo}..{hi}"
            );
        }
    }
    // Bad rows in two blocks: the earlier one is reported, with its row in the whole input.
    let mut bad = x.clone();
    bad[250_000] = -1.0;
    bad[170_001] = 0.0;
    let e = eval_err("ln(x)", &["x"], &[&bad], &[], &[]);
    assert_eq!((e.row, e.subexpr.as_str()), (170_001, "ln(x)"));
}

fn eval_err(
    src: &str,
    vars: &[&str],
    cols: &[&[f64]],
    params: &[&str],
    values: &[f64],
) -> EvalError {
    let tape = Tape::compile(&p(src), &Symbols::new(vars, params)).unwrap();
    let mut out = vec![0.0; cols[0].len()];
    tape.eval(cols, values, &mut out).unwrap_err()
}

#[test]
fn tape_reports_domain_errors_with_row_and_subexpression() {
    let e = eval_err(
        "a + b*ln(x - 1)",
        &["x"],
        &[&[3.0, 2.5, 2.0, 0.5, 1.0]],
        &["a", "b"],
        &[1.0, 1.0],
    );
    assert_eq!(e.row, 3);
    assert_eq!(e.message, "ln of a non-positive number (-0.5)");
    assert_eq!(e.subexpr, "ln(x - 1)");
    let e = eval_err("1/(x - 2) + 1", &["x"], &[&[1.0, 2.0]], &[], &[]);
    assert_eq!(
        (e.row, e.message.as_str(), e.subexpr.as_str()),
        (1, "division by zero", "x - 2")
    );
    let e = eval_err("sqrt(x)", &["x"], &[&[1.0, 4.0, -1.0]], &[], &[]);
    assert_eq!((e.row, e.subexpr.as_str()), (2, "sqrt(x)"));
    assert_eq!(e.message, "sqrt of a negative number (-1)");
    let e = eval_err("asin(x/2)", &["x"], &[&[1.0, 3.0]], &[], &[]);
    assert_eq!((e.row, e.subexpr.as_str()), (1, "asin(x/2)"));
    let e = eval_err("exp(x)*2", &["x"], &[&[1.0, 800.0]], &[], &[]);
    assert_eq!((e.row, e.subexpr.as_str()), (1, "exp(x)"));
    // A bad value hidden by min() is still reported.
    let e = eval_err("min(ln(x), 5)", &["x"], &[&[1.0, -1.0]], &[], &[]);
    assert_eq!((e.row, e.subexpr.as_str()), (1, "ln(x)"));
    // A parameter-only sub-expression fails on the first row.
    let e = eval_err("ln(a)*x", &["x"], &[&[1.0, 2.0]], &["a"], &[-1.0]);
    assert_eq!((e.row, e.subexpr.as_str()), (0, "ln(a)"));
}

#[test]
fn tape_finds_non_finite_values_that_a_later_operation_turns_finite() {
    // Only outputs and the operands of operations that can absorb a non-finite value are
    // checked (tape::may_absorb); each of these hides an infinity or NaN from the output.
    for (src, sub) in [
        ("exp(-1/(x - 2))", "x - 2"),
        ("atan(1/(x - 2)) + 1", "x - 2"),
        ("3/(1/(x - 2))", "x - 2"),
        ("exp(-(ln(x - 2))^2)", "ln(x - 2)"),
        ("tanh(5*sqrt(x - 3))", "sqrt(x - 3)"),
        ("(x + 1)^(-ln(x - 2))", "ln(x - 2)"),
    ] {
        let e = eval_err(src, &["x"], &[&[4.0, 2.0, 5.0]], &[], &[]);
        assert_eq!((e.row, e.subexpr.as_str()), (1, sub), "{src}");
    }
    // The same through the sums, products and functions that keep it non-finite.
    let e = eval_err("2*sin(ln(x - 2)) + x", &["x"], &[&[4.0, 2.0]], &[], &[]);
    assert_eq!((e.row, e.subexpr.as_str()), (1, "ln(x - 2)"));
}

#[test]
fn filters_short_circuit_like_the_reference_evaluator() {
    let f = parse_filter("x > 0 && ln(x) > 1 || x == -5").unwrap();
    let tape = Tape::compile(&f, &Symbols::new(&["x"], &[])).unwrap();
    let mask = tape
        .eval_mask(&[&[-1.0, 1.0, 10.0, -5.0, 0.0]], &[])
        .unwrap();
    assert_eq!(mask, [false, false, true, true, false]);
    let f = parse_filter("ln(x) > 1").unwrap();
    let tape = Tape::compile(&f, &Symbols::new(&["x"], &[])).unwrap();
    let err = tape.eval_mask(&[&[10.0, -1.0]], &[]).unwrap_err();
    assert_eq!((err.row, err.subexpr.as_str()), (1, "ln(x)"));
}

#[test]
fn multi_tape_shares_subexpressions_between_model_and_jacobian() {
    let e = p("a*exp(-b*x) + c");
    let symbols = Symbols::new(&["x"], &["a", "b", "c"]);
    let mt = MultiTape::model_and_jacobian(&e, &symbols).unwrap();
    let shown: Vec<String> = mt.exprs().iter().map(|e| e.to_string()).collect();
    assert_eq!(
        shown,
        ["c + a*exp(-b*x)", "exp(-b*x)", "-a*x*exp(-b*x)", "1"]
    );
    let x = [0.0, 1.0, 3.0];
    let mut outs = vec![vec![0.0; 3]; 4];
    let mut refs: Vec<&mut [f64]> = outs.iter_mut().map(|v| v.as_mut_slice()).collect();
    mt.eval(&[&x], &[2.0, 0.5, 1.0], &mut refs).unwrap();
    for (i, &xi) in x.iter().enumerate() {
        let ex = (-0.5 * xi).exp();
        assert!((outs[0][i] - (2.0 * ex + 1.0)).abs() < 1e-15);
        assert!((outs[1][i] - ex).abs() < 1e-15);
        assert!((outs[2][i] + 2.0 * xi * ex).abs() < 1e-15);
        assert_eq!(outs[3][i], 1.0);
    }
    // exp(-b*x) is computed once: 5 per-row instructions (b*x... ) rather than 8.
    let separate: usize = mt
        .exprs()
        .iter()
        .map(|e| Tape::compile(e, &symbols).unwrap().len())
        .sum();
    let shared = MultiTape::model_and_jacobian(&e, &symbols)
        .unwrap()
        .program_len();
    assert!(shared < separate, "shared {shared} vs separate {separate}");
}

#[test]
fn eval_recursive_checks_domains() {
    let e = p("ln(x)");
    let lookup = |n: &str| (n == "x").then_some(-2.0);
    assert_eq!(
        eval_recursive(&e, &lookup).unwrap_err(),
        "ln of a non-positive number (-2) in `ln(x)`"
    );
    let lookup = |n: &str| (n == "x").then_some(1.0);
    assert_eq!(
        eval_recursive(&p("2*pi*x"), &lookup).unwrap(),
        2.0 * std::f64::consts::PI
    );
}

/// The deepest inputs the parser accepts, each pushed through every pass, on a normal
/// 2 MiB test thread in a debug build: none may exhaust the stack.
#[test]
fn deepest_accepted_inputs_survive_every_pass() {
    let nested_calls = format!("{}x{}", "sin(x + ".repeat(199), ")".repeat(199));
    let nested_mixed = format!("{}x{}", "(x*(1 + ".repeat(100), "))".repeat(100));
    let nested_powers = format!("{}x{}", "(1 + x^".repeat(100), ")".repeat(100));
    let nested_signs = format!("{}x{}", "-(".repeat(100), ")".repeat(100));
    // A sum and a product per parenthesis: the deepest tree per nesting level.
    let nested_chains = format!("{}x{}", "x + 2*(".repeat(200), ")".repeat(200));
    for src in [
        nested_calls,
        nested_mixed,
        nested_powers,
        nested_signs,
        nested_chains,
    ] {
        let e = parse_expression(&src).expect("accepted");
        assert_eq!(parse_expression(&e.to_string()).unwrap(), e);
        assert!(resolve(&e, &["x"], &[]).is_ok());
        let d = derivative(&e, "x");
        let s = simplify(&e);
        let mut expand = Simplifier::new(Mode::Expand);
        let _ = expand.run(&to_node(&e));
        let lookup = |n: &str| (n == "x").then_some(0.3);
        let direct = eval_recursive(&e, &lookup);
        let simplified = eval_recursive(&s, &lookup);
        if let (Ok(a), Ok(b)) = (&direct, &simplified) {
            assert!((a - b).abs() <= 1e-9 * a.abs().max(1.0), "{a} vs {b}");
        }
        let symbols = Symbols::new(&["x"], &[]);
        let tape = MultiTape::compile(&[e.clone(), d], &symbols).unwrap();
        let mut v = [0.0];
        let mut dv = [0.0];
        let r = tape.eval(&[&[0.3]], &[], &mut [&mut v, &mut dv]);
        if let Ok(a) = direct {
            r.unwrap();
            assert!((v[0] - a).abs() <= 1e-12 * a.abs().max(1.0));
        }
    }
}

#[test]
fn deepest_accepted_filter_survives_evaluation_and_printing() {
    let src = format!(
        "{}x > 0{}",
        "(x < 1 || y > 2 && !(".repeat(66),
        "))".repeat(66)
    );
    let f = parse_filter(&src).expect("accepted");
    assert_eq!(parse_filter(&f.to_string()).unwrap(), f);
    let tape = Tape::compile(&f, &Symbols::new(&["x", "y"], &[])).unwrap();
    let mask = tape
        .eval_mask(&[&[0.5, 2.0, 3.0], &[0.0, 3.0, 1.0]], &[])
        .unwrap();
    let reference: Vec<bool> = [(0.5, 0.0), (2.0, 3.0), (3.0, 1.0)]
        .iter()
        .map(|&(x, y)| {
            let l = |n: &str| match n {
                "x" => Some(x),
                "y" => Some(y),
                _ => None,
            };
            eval_recursive(&f, &l).unwrap() != 0.0
        })
        .collect();
    assert_eq!(mask, reference);
}

#[test]
fn collapse_mode_cancels_a_root_of_a_square_before_anything_is_expanded() {
    let mut s = Simplifier::new(Mode::Collapse);
    let n = s.run(&to_node(&p("sqrt((a + b*x)^2)")));
    assert_eq!(to_expr(&n).to_string(), "a + b*x");
    let conds: Vec<String> = s
        .conditions
        .iter()
        .map(|c| to_expr(&c.node).to_string())
        .collect();
    assert_eq!(conds, ["a + b*x >= 0"]);
    // Expanding first would have lost it: the square becomes a sum under the root.
    assert_eq!(
        expand("sqrt((a + b*x)^2)").0,
        "sqrt(a^2 + 2*a*b*x + b^2*x^2)"
    );
}

#[test]
fn constant_folding_that_would_overflow_keeps_the_numbers() {
    // Folding 1e200·1e200 or 1e308 + 1e308 gives inf, which is not a number of the
    // grammar and would hide the overflow: the constants stay apart.
    assert_eq!(canon("1e200*1e200*x"), "1e200*1e200*x");
    assert_eq!(canon("x + 1e308 + 1e308"), "x + 1e308 + 1e308");
    assert_eq!(canon("x + 1e300 + 1e300"), "x + 2e300");
    for src in ["1e200*1e200*x", "x + 1e308 + 1e308"] {
        assert!(parse_expression(&canon(src)).is_ok());
    }
}

#[test]
fn reused_scratch_gives_the_values_of_a_fresh_evaluation() {
    // One scratch passed to tapes of different sizes, over different row counts (one row,
    // several chunks, a few rows) and after a domain error: every result is the fresh one.
    let small = MultiTape::compile(&[p("a*x + 1")], &Symbols::new(&["x"], &["a"])).unwrap();
    let large = MultiTape::model_and_jacobian(
        &p("a*exp(-b*x)/(1 + c*x^2) + sqrt(x + b)"),
        &Symbols::new(&["x"], &["a", "b", "c"]),
    )
    .unwrap();
    let mut scratch = TapeScratch::default();
    let check = |tape: &MultiTape, scratch: &mut TapeScratch, x: &[f64], params: &[f64]| {
        let k = tape.exprs().len();
        let mut a = vec![vec![0.0; x.len()]; k];
        let mut b = a.clone();
        let mut ra: Vec<&mut [f64]> = a.iter_mut().map(|v| v.as_mut_slice()).collect();
        let mut rb: Vec<&mut [f64]> = b.iter_mut().map(|v| v.as_mut_slice()).collect();
        let fresh = tape.eval(&[x], params, &mut ra);
        let reused = tape.eval_in(scratch, &[x], params, &mut rb);
        assert_eq!(fresh.is_ok(), reused.is_ok());
        let bits = |v: &[Vec<f64>]| -> Vec<Vec<u64>> {
            v.iter()
                .map(|c| c.iter().map(|x| x.to_bits()).collect())
                .collect()
        };
        assert_eq!(bits(&a), bits(&b));
    };
    let many: Vec<f64> = (0..tape::CHUNK * 2 + 5).map(|i| i as f64 * 0.01).collect();
    check(&large, &mut scratch, &many, &[2.0, 0.5, 0.1]);
    check(&small, &mut scratch, &[3.0], &[1.5]);
    check(&large, &mut scratch, &[-4.0, 1.0], &[2.0, 0.5, 0.1]);
    check(&large, &mut scratch, &[0.0, 1.0, 2.0], &[1.0, 0.25, 0.3]);
    check(&small, &mut scratch, &many, &[-0.5]);
}

#[test]
fn kept_data_only_values_give_the_values_of_a_fresh_evaluation() {
    // A fixed-columns scratch keeps x^2, x^3, ln(x) and cos(2*pi*x/12) from the first call
    // and reuses them. Different parameters, another tape, other columns, several chunks and
    // a domain error in a data-only value (ln of 0 or of a negative x) in between: every
    // result and every error is that of a fresh evaluation, call after call.
    let vars = Symbols::new(&["x"], &["a", "b", "c"]);
    let rational = MultiTape::model_and_jacobian(
        &p("(a + b*x + c*x^2 + x^3) / (1 + a*x + b*x^3) + ln(x)*c"),
        &vars,
    )
    .unwrap();
    let periodic =
        MultiTape::model_and_jacobian(&p("a + b*cos(2*pi*x/12) + c*sin(2*pi*x/b)"), &vars).unwrap();
    // Here ln(x) (of the derivative by b) and x^2 come after values whose registers are free
    // again by then: a kept value must not share one of them.
    let late = MultiTape::model_and_jacobian(&p("b*exp(-(c*x)^2) + a*x^b"), &vars).unwrap();
    let late_too = MultiTape::model_and_jacobian(&p("exp(-c*x)/(1 + a*x)^2 + x^b"), &vars).unwrap();
    let check = |tape: &MultiTape, scratch: &mut TapeScratch, x: &[f64], params: &[f64]| {
        let k = tape.exprs().len();
        let mut a = vec![vec![0.0; x.len()]; k];
        let mut b = a.clone();
        let mut ra: Vec<&mut [f64]> = a.iter_mut().map(|v| v.as_mut_slice()).collect();
        let mut rb: Vec<&mut [f64]> = b.iter_mut().map(|v| v.as_mut_slice()).collect();
        let fresh = tape.eval(&[x], params, &mut ra);
        let kept = tape.eval_in(scratch, &[x], params, &mut rb);
        assert_eq!(fresh, kept);
        let bits = |v: &[Vec<f64>]| -> Vec<Vec<u64>> {
            v.iter()
                .map(|c| c.iter().map(|x| x.to_bits()).collect())
                .collect()
        };
        assert_eq!(bits(&a), bits(&b));
        fresh.is_ok()
    };
    let x: Vec<f64> = (1..=37).map(|i| f64::from(i) * 0.37).collect();
    let bad: Vec<f64> = (0..9).map(|i| f64::from(i) - 2.0).collect();
    let many: Vec<f64> = (1..=tape::CHUNK + 9).map(|i| i as f64 * 0.01).collect();
    let mut scratch = TapeScratch::for_fixed_columns();
    for tape in [&rational, &periodic, &late, &late_too] {
        for params in [[1.0, 0.5, 0.25], [2.0, -0.1, 3.0], [f64::NAN, 0.5, 1.0]] {
            check(tape, &mut scratch, &x, &params);
        }
    }
    // ln(x) of x ≤ 0 is a domain error on every call, not only the one that computed it.
    assert!(!check(&rational, &mut scratch, &bad, &[1.0, 0.5, 0.25]));
    assert!(!check(&rational, &mut scratch, &bad, &[2.0, 0.5, 0.25]));
    check(&rational, &mut scratch, &many, &[1.0, 0.5, 0.25]);
    check(&rational, &mut scratch, &x, &[1.5, 0.5, 0.25]);
    check(&periodic, &mut scratch, &x, &[1.5, 0.5, 0.25]);
    check(&rational, &mut scratch, &x, &[1.5, 0.7, 0.25]);
}
