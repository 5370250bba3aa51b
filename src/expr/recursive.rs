//! The reference evaluator: a plain walk over the tree for one point, with every domain
//! check. The column evaluator ([`super::tape`]) is tested against it and uses it to name
//! the sub-expression behind a non-finite value.
//!
//! Booleans are 1.0 (true) and 0.0 (false); `&&` and `||` short-circuit, so
//! `x > 0 && ln(x) > 1` is simply false where `x <= 0`.

use super::ast::{AddOp, Expr, ExprKind, Func, LogicOp, MulOp};

/// A domain error with the printed sub-expression where it happened.
#[derive(Clone, Debug, PartialEq)]
pub struct DomainError {
    pub message: String,
    pub subexpr: String,
}

/// Evaluates `expr` at one point; `lookup` gives the value of each variable and parameter
/// (`pi` is built in). A domain error names the failing sub-expression.
pub fn eval_recursive(expr: &Expr, lookup: &dyn Fn(&str) -> Option<f64>) -> Result<f64, String> {
    eval_checked(expr, lookup).map_err(|e| format!("{} in `{}`", e.message, e.subexpr))
}

/// Like [`eval_recursive`] but keeps the message and the sub-expression apart.
pub fn eval_checked(expr: &Expr, lookup: &dyn Fn(&str) -> Option<f64>) -> Result<f64, DomainError> {
    let fail = |message: String| DomainError {
        message,
        subexpr: expr.to_string(),
    };
    let ev = |e: &Expr| eval_checked(e, lookup);
    let value = match &expr.kind {
        ExprKind::Number(v) => *v,
        ExprKind::Name(n) => match lookup(n) {
            Some(v) if v.is_finite() => v,
            Some(v) => return Err(fail(format!("the value of `{n}` is {v}"))),
            None if n == "pi" => std::f64::consts::PI,
            None => return Err(fail(format!("no value for `{n}`"))),
        },
        ExprKind::Neg(a) => -ev(a)?,
        ExprKind::Sum { first, rest } => {
            let mut acc = ev(first)?;
            for (op, t) in rest {
                let v = ev(t)?;
                acc = match op {
                    AddOp::Add => acc + v,
                    AddOp::Sub => acc - v,
                };
            }
            acc
        }
        ExprKind::Product { first, rest } => {
            let mut acc = ev(first)?;
            for (op, t) in rest {
                let v = ev(t)?;
                acc = match op {
                    MulOp::Mul => acc * v,
                    MulOp::Div => {
                        if v == 0.0 {
                            return Err(DomainError {
                                message: "division by zero".to_string(),
                                subexpr: t.to_string(),
                            });
                        }
                        acc / v
                    }
                };
            }
            acc
        }
        ExprKind::Pow(a, b) => power(ev(a)?, ev(b)?).map_err(fail)?,
        ExprKind::Call { func, args } => {
            let a = match args.first() {
                Some(a) => ev(a)?,
                None => return Err(fail("missing argument".to_string())),
            };
            let b = match args.get(1) {
                Some(b) => ev(b)?,
                None => 0.0,
            };
            check_call(*func, a, b).map_err(fail)?
        }
        ExprKind::Compare(op, a, b) => f64::from(u8::from(op.apply(ev(a)?, ev(b)?))),
        ExprKind::Not(a) => f64::from(u8::from(ev(a)? == 0.0)),
        ExprKind::Logic { op, terms } => {
            let stop = matches!(op, LogicOp::Or);
            let mut result = !stop;
            for t in terms {
                if (ev(t)? != 0.0) == stop {
                    result = stop;
                    break;
                }
            }
            f64::from(u8::from(result))
        }
    };
    if value.is_finite() {
        Ok(value)
    } else {
        Err(fail(format!("the result is {value} (overflow)")))
    }
}

fn power(a: f64, b: f64) -> Result<f64, String> {
    if a < 0.0 && b.fract() != 0.0 {
        return Err(format!(
            "a negative base ({a}) to a non-integer power ({b})"
        ));
    }
    if a == 0.0 && b < 0.0 {
        return Err("zero to a negative power (division by zero)".to_string());
    }
    Ok(a.powf(b))
}

/// Applies `func` with its domain checks (`b` is the second argument, when there is one).
pub fn check_call(func: Func, a: f64, b: f64) -> Result<f64, String> {
    match func {
        Func::Ln | Func::Log10 | Func::Log2 if a <= 0.0 => {
            Err(format!("{} of a non-positive number ({a})", func.name()))
        }
        Func::Sqrt if a < 0.0 => Err(format!("sqrt of a negative number ({a})")),
        Func::Asin | Func::Acos if !(-1.0..=1.0).contains(&a) => {
            Err(format!("{} of a number outside [-1, 1] ({a})", func.name()))
        }
        Func::Pow => power(a, b),
        _ => Ok(func.apply(a, b)),
    }
}
