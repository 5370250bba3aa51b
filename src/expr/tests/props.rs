//! Property tests over randomly generated expressions:
//! - printing then parsing gives back the same tree (expressions and filters);
//! - the compiled tape gives bit-for-bit the values of the reference recursive evaluator,
//!   and the same first failing row when a domain error occurs;
//! - the symbolic derivative matches a central finite difference;
//! - the expanding simplifier preserves values wherever the conditions it recorded hold.

use proptest::prelude::*;

use crate::expr::simplify::{Mode, Simplifier};
use crate::expr::sym::{Node, to_node};
use crate::expr::*;

fn name(n: &'static str) -> Expr {
    Expr::name(n)
}

/// Non-negative finite numbers of every magnitude (the parser never makes a negative literal).
fn any_number() -> impl Strategy<Value = f64> {
    prop_oneof![
        (0u32..40).prop_map(|k| f64::from(k) / 4.0),
        (proptest::num::f64::POSITIVE
            | proptest::num::f64::NORMAL
            | proptest::num::f64::SUBNORMAL
            | proptest::num::f64::ZERO)
            .prop_filter("finite", |v| v.is_finite() && *v >= 0.0),
    ]
}

fn add_op() -> impl Strategy<Value = AddOp> {
    prop_oneof![Just(AddOp::Add), Just(AddOp::Sub)]
}

fn mul_op() -> impl Strategy<Value = MulOp> {
    prop_oneof![Just(MulOp::Mul), Just(MulOp::Div)]
}

fn sum(first: Expr, rest: Vec<(AddOp, Expr)>) -> Expr {
    Expr::new(
        ExprKind::Sum {
            first: Box::new(first),
            rest,
        },
        Span::default(),
    )
}

fn product(first: Expr, rest: Vec<(MulOp, Expr)>) -> Expr {
    Expr::new(
        ExprKind::Product {
            first: Box::new(first),
            rest,
        },
        Span::default(),
    )
}

const ONE_ARG: [Func; 15] = [
    Func::Exp,
    Func::Ln,
    Func::Log10,
    Func::Log2,
    Func::Sqrt,
    Func::Abs,
    Func::Sin,
    Func::Cos,
    Func::Tan,
    Func::Asin,
    Func::Acos,
    Func::Atan,
    Func::Sinh,
    Func::Cosh,
    Func::Tanh,
];
const TWO_ARGS: [Func; 4] = [Func::Atan2, Func::Pow, Func::Min, Func::Max];

/// Arithmetic trees over the variables x, y and parameters a, b, built from `leaf`.
fn arith(leaf: BoxedStrategy<Expr>) -> BoxedStrategy<Expr> {
    leaf.prop_recursive(5, 40, 4, |inner| {
        prop_oneof![
            (
                inner.clone(),
                prop::collection::vec((add_op(), inner.clone()), 1..4)
            )
                .prop_map(|(f, r)| sum(f, r)),
            (
                inner.clone(),
                prop::collection::vec((mul_op(), inner.clone()), 1..4)
            )
                .prop_map(|(f, r)| product(f, r)),
            inner.clone().prop_map(Expr::negate),
            (inner.clone(), inner.clone()).prop_map(|(a, b)| Expr::pow(a, b)),
            (prop::sample::select(&ONE_ARG[..]), inner.clone())
                .prop_map(|(f, a)| Expr::call(f, vec![a])),
            (prop::sample::select(&TWO_ARGS[..]), inner.clone(), inner)
                .prop_map(|(f, a, b)| Expr::call(f, vec![a, b])),
        ]
    })
    .boxed()
}

fn names() -> impl Strategy<Value = Expr> {
    prop_oneof![
        Just(name("x")),
        Just(name("y")),
        Just(name("a")),
        Just(name("b")),
        Just(name("pi"))
    ]
}

fn print_leaf() -> BoxedStrategy<Expr> {
    prop_oneof![any_number().prop_map(Expr::number), names()].boxed()
}

/// Small constants only, and no literal integer or 0.5 exponents (the tape computes those
/// with `x*x`, `1/x`, `sqrt`, which may differ from `powf` in the last bit).
fn eval_leaf() -> BoxedStrategy<Expr> {
    prop_oneof![
        prop::sample::select(&[0.25, 0.75, 1.5, 2.5, 3.25][..]).prop_map(Expr::number),
        names(),
    ]
    .boxed()
}

fn cmp_op() -> impl Strategy<Value = CmpOp> {
    prop::sample::select(
        &[
            CmpOp::Lt,
            CmpOp::Le,
            CmpOp::Gt,
            CmpOp::Ge,
            CmpOp::Eq,
            CmpOp::Ne,
        ][..],
    )
}

fn filter(leaf: BoxedStrategy<Expr>) -> BoxedStrategy<Expr> {
    let a = arith(leaf);
    let cmp = (cmp_op(), a.clone(), a).prop_map(|(op, l, r)| Expr::compare(op, l, r));
    cmp.prop_recursive(4, 24, 4, |inner| {
        prop_oneof![
            inner.clone().prop_map(Expr::logical_not),
            (
                prop_oneof![Just(LogicOp::And), Just(LogicOp::Or)],
                prop::collection::vec(inner, 2..4)
            )
                .prop_map(|(op, terms)| Expr::logic(op, terms)),
        ]
    })
    .boxed()
}

const ROWS: usize = 40;

/// Data rows: x and y over [-3, 3] including 0 and ±1, so domain errors do happen.
fn columns() -> impl Strategy<Value = (Vec<f64>, Vec<f64>)> {
    let value = prop_oneof![(-12i32..=12).prop_map(|k| f64::from(k) / 4.0), -3.0f64..3.0];
    (
        prop::collection::vec(value.clone(), ROWS),
        prop::collection::vec(value, ROWS),
    )
}

fn lookup_row<'a>(
    x: &'a [f64],
    y: &'a [f64],
    p: &'a [f64],
    row: usize,
) -> impl Fn(&str) -> Option<f64> + 'a {
    move |n: &str| match n {
        "x" => Some(x[row]),
        "y" => Some(y[row]),
        "a" => Some(p[0]),
        "b" => Some(p[1]),
        _ => None,
    }
}

/// Central difference of `e` along `var` at the point, with its own consistency check:
/// `None` when the function is not smooth enough there for h = 1e-5·max(1, |v|) (the
/// estimates at h and h/2 disagree by more than 1e-7 relative) or undefined nearby.
/// Truncation error ≈ h²·f‴/6 ≈ 2e-11·f‴, rounding ≈ ε·|f|/h ≈ 2e-11·|f|.
fn central_difference(e: &Expr, var: &str, at: &dyn Fn(&str) -> Option<f64>) -> Option<f64> {
    let v0 = at(var)?;
    let f = |v: f64| {
        let l = |n: &str| if n == var { Some(v) } else { at(n) };
        eval_recursive(e, &l).ok()
    };
    let h = 1e-5 * v0.abs().max(1.0);
    let d1 = (f(v0 + h)? - f(v0 - h)?) / (2.0 * h);
    let d2 = (f(v0 + h / 2.0)? - f(v0 - h / 2.0)?) / h;
    let scale = d1.abs().max(1.0);
    ((d1 - d2).abs() <= 1e-7 * scale).then_some(d2)
}

// A fixed seed: CI sees the same 512 cases every run, so a pass is reproducible and a
// failure is a change in the code, not in the draw (run with PROPTEST_CASES / another seed
// locally to explore further).
proptest! {
    #![proptest_config(ProptestConfig { cases: 512, max_global_rejects: 20_000, rng_seed: proptest::test_runner::RngSeed::Fixed(20_261_201), ..ProptestConfig::default() })]

    #[test]
    fn print_then_parse_gives_the_same_expression(e in arith(print_leaf())) {
        let text = e.to_string();
        let back = parse_expression(&text);
        prop_assert!(back.is_ok(), "{text}: {:?}", back.err());
        prop_assert_eq!(back.unwrap(), e, "{}", text);
    }

    #[test]
    fn print_then_parse_gives_the_same_filter(e in filter(print_leaf())) {
        let text = e.to_string();
        let back = parse_filter(&text);
        prop_assert!(back.is_ok(), "{text}: {:?}", back.err());
        prop_assert_eq!(back.unwrap(), e, "{}", text);
    }

    #[test]
    fn tape_matches_the_recursive_evaluator(
        e in arith(eval_leaf()),
        e2 in arith(eval_leaf()),
        (x, y) in columns(),
        p in prop::collection::vec(-2.0f64..2.0, 2),
    ) {
        let symbols = Symbols::new(&["x", "y"], &["a", "b"]);
        // Compiled together, so shared sub-expressions are exercised too.
        let tape = MultiTape::compile(&[e.clone(), e2.clone()], &symbols).unwrap();
        let mut o1 = vec![0.0; ROWS];
        let mut o2 = vec![0.0; ROWS];
        let result = tape.eval(&[&x, &y], &p, &mut [&mut o1, &mut o2]);
        let mut first_error = None;
        for row in 0..ROWS {
            let l = lookup_row(&x, &y, &p, row);
            let r1 = eval_recursive(&e, &l);
            let r2 = eval_recursive(&e2, &l);
            match (r1, r2) {
                (Ok(v1), Ok(v2)) => {
                    if result.is_ok() {
                        prop_assert_eq!(o1[row].to_bits(), v1.to_bits(), "row {} of {}", row, e);
                        prop_assert_eq!(o2[row].to_bits(), v2.to_bits(), "row {} of {}", row, e2);
                    }
                }
                _ => {
                    first_error = Some(row);
                    break;
                }
            }
        }
        match (result, first_error) {
            (Ok(()), None) => {}
            (Err(err), Some(row)) => prop_assert_eq!(err.row, row, "{} / {}", e, e2),
            (r, f) => prop_assert!(false, "tape {:?} vs reference first error {:?} for {} / {}", r, f, e, e2),
        }
    }

    #[test]
    fn filter_tape_matches_the_recursive_evaluator(f in filter(eval_leaf()), (x, y) in columns()) {
        let tape = Tape::compile(&f, &Symbols::new(&["x", "y"], &["a", "b"])).unwrap();
        let p = [0.5, -1.25];
        let mask = tape.eval_mask(&[&x, &y], &p);
        let mut reference = Vec::new();
        for row in 0..ROWS {
            match eval_recursive(&f, &lookup_row(&x, &y, &p, row)) {
                Ok(v) => reference.push(v != 0.0),
                Err(_) => {
                    let err = mask.as_ref().expect_err("the tape must fail too");
                    prop_assert_eq!(err.row, row);
                    return Ok(());
                }
            }
        }
        prop_assert_eq!(mask.unwrap(), reference);
    }

    #[test]
    fn derivative_matches_a_central_finite_difference(
        e in arith(eval_leaf()),
        points in prop::collection::vec((0.3f64..2.5, 0.3f64..2.5, -1.5f64..1.5, 0.3f64..2.0), 8),
    ) {
        let mut compared = 0;
        for var in ["x", "a"] {
            let d = derivative(&e, var);
            for &(x, y, a, b) in &points {
                let at = |n: &str| match n {
                    "x" => Some(x),
                    "y" => Some(y),
                    "a" => Some(a),
                    "b" => Some(b),
                    _ => None,
                };
                let (Ok(_), Some(fd)) = (eval_recursive(&e, &at), central_difference(&e, var, &at)) else {
                    continue;
                };
                let Ok(sym) = eval_recursive(&d, &at) else {
                    // Defined and smooth, yet the derivative fails: only where the
                    // derivative formula has a removable singularity (|u| at u = 0 ...).
                    continue;
                };
                compared += 1;
                // Relative tolerance 1e-6 of max(1, |f'|): well above the difference
                // quotient's own error (see `central_difference`).
                prop_assert!(
                    (sym - fd).abs() <= 1e-6 * sym.abs().max(1.0),
                    "d/d{} of {} = {} gives {} but the finite difference is {} at x={} y={} a={} b={}",
                    var, e, d, sym, fd, x, y, a, b
                );
            }
        }
        prop_assume!(compared > 0);
    }

    #[test]
    fn expanding_preserves_values_where_its_conditions_hold(
        e in arith(eval_leaf()),
        points in prop::collection::vec((0.3f64..2.5, 0.3f64..2.5, 0.3f64..2.0, 0.3f64..2.0), 6),
    ) {
        let mut s = Simplifier::new(Mode::Expand);
        let expanded = s.run(&to_node(&e));
        let mut compared = 0;
        for &(x, y, a, b) in &points {
            let at = |n: &str| match n {
                "x" => Some(x),
                "y" => Some(y),
                "a" => Some(a),
                "b" => Some(b),
                _ => None,
            };
            let Ok(v) = eval_recursive(&e, &at) else { continue };
            if !s.conditions.iter().all(|c| c.node.eval(&at) == Some(1.0)) {
                continue;
            }
            let w = expanded.eval(&at);
            let Some(w) = w.filter(|w| w.is_finite()) else { continue };
            compared += 1;
            prop_assert!(
                (v - w).abs() <= 1e-7 * v.abs().max(1.0),
                "{} = {} but expanded {:?} = {}", e, v, crate::expr::sym::to_expr(&expanded).to_string(), w
            );
        }
        prop_assume!(compared > 0);
    }
}

#[test]
fn node_eval_agrees_with_the_expression_on_a_sample() {
    let e = parse_expression("a*exp(-b*x) + c/(1 + x^2)").unwrap();
    let at = |n: &str| match n {
        "x" => Some(0.7),
        "a" => Some(2.0),
        "b" => Some(0.3),
        "c" => Some(-1.0),
        _ => None,
    };
    let n: Node = to_node(&e);
    let want = 2.0 * (-0.3f64 * 0.7).exp() - 1.0 / 1.49;
    assert!((n.eval(&at).unwrap() - want).abs() < 1e-15);
    assert!((eval_recursive(&e, &at).unwrap() - want).abs() < 1e-15);
}
