//! Prints expressions back in the grammar with the fewest parentheses that keep
//! `parse(print(e)) == e` (structurally), plus a Unicode "math" style for explanations.

use std::fmt;

use super::ast::{AddOp, Expr, ExprKind, MulOp};

/// Binding strength of each construct, loosest first.
const OR: u8 = 1;
const AND: u8 = 2;
const NOT: u8 = 3;
const CMP: u8 = 4;
const SUM: u8 = 5;
const PRODUCT: u8 = 6;
const UNARY: u8 = 7;
const POW: u8 = 8;
const ATOM: u8 = 9;

fn precedence(e: &Expr) -> u8 {
    match &e.kind {
        ExprKind::Number(v) if *v < 0.0 => UNARY,
        ExprKind::Number(_) | ExprKind::Name(_) | ExprKind::Call { .. } => ATOM,
        ExprKind::Pow(..) => POW,
        ExprKind::Neg(_) => UNARY,
        ExprKind::Product { .. } => PRODUCT,
        ExprKind::Sum { .. } => SUM,
        ExprKind::Compare(..) => CMP,
        ExprKind::Not(_) => NOT,
        ExprKind::Logic { op, .. } => match op {
            super::ast::LogicOp::And => AND,
            super::ast::LogicOp::Or => OR,
        },
    }
}

/// Formats a number so that the lexer reads back exactly the same `f64`: the shortest
/// round-trip digits, in exponent form for very large or very small magnitudes.
pub fn format_number(v: f64) -> String {
    let a = v.abs();
    if a != 0.0 && !(1e-5..1e16).contains(&a) {
        format!("{v:e}")
    } else {
        format!("{v}")
    }
}

/// A number for reading: at most 10 significant digits (`0.003354016435`, not
/// `0.0033540164346805303`).
pub fn format_number_short(v: f64) -> String {
    let exact = format_number(v);
    let digits = exact
        .split(['e', 'E'])
        .next()
        .unwrap_or("")
        .chars()
        .filter(char::is_ascii_digit)
        .collect::<String>();
    if digits.trim_start_matches('0').len() <= 10 {
        return exact;
    }
    let rounded: f64 = format!("{v:.9e}").parse().unwrap_or(v);
    format_number(rounded)
}

#[derive(Clone, Copy)]
struct Style {
    math: bool,
}

impl Style {
    fn op<'a>(self, plain: &'a str, math: &'a str) -> &'a str {
        if self.math { math } else { plain }
    }
}

struct Printer<'a> {
    expr: &'a Expr,
    style: Style,
}

impl fmt::Display for Expr {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write_expr(f, self, Style { math: false })
    }
}

impl fmt::Display for Printer<'_> {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write_expr(f, self.expr, self.style)
    }
}

impl Expr {
    /// The expression in Unicode math style (`·`, `−`, `≤`, `π`) for reading, not parsing.
    pub fn to_math(&self) -> String {
        Printer {
            expr: self,
            style: Style { math: true },
        }
        .to_string()
    }
}

impl serde::Serialize for Expr {
    fn serialize<S: serde::Serializer>(&self, s: S) -> Result<S::Ok, S::Error> {
        s.serialize_str(&self.to_string())
    }
}

/// Writes `e`, in parentheses when its precedence is below `min`.
fn child(f: &mut fmt::Formatter<'_>, e: &Expr, min: u8, style: Style) -> fmt::Result {
    if precedence(e) < min {
        f.write_str("(")?;
        write_expr(f, e, style)?;
        f.write_str(")")
    } else {
        write_expr(f, e, style)
    }
}

fn write_expr(f: &mut fmt::Formatter<'_>, e: &Expr, style: Style) -> fmt::Result {
    match &e.kind {
        ExprKind::Number(v) => {
            if style.math {
                f.write_str(&format_number_short(*v).replace('-', "−"))
            } else {
                f.write_str(&format_number(*v))
            }
        }
        ExprKind::Name(n) => f.write_str(if style.math && n == "pi" { "π" } else { n }),
        ExprKind::Neg(a) => {
            f.write_str(style.op("-", "−"))?;
            child(f, a, UNARY, style)
        }
        ExprKind::Sum { first, rest } => {
            child(f, first, SUM + 1, style)?;
            for (op, term) in rest {
                f.write_str(match op {
                    AddOp::Add => " + ",
                    AddOp::Sub => style.op(" - ", " − "),
                })?;
                child(f, term, SUM + 1, style)?;
            }
            Ok(())
        }
        ExprKind::Product { first, rest } => {
            child(f, first, PRODUCT + 1, style)?;
            for (op, factor) in rest {
                f.write_str(match op {
                    MulOp::Mul => style.op("*", "·"),
                    MulOp::Div => "/",
                })?;
                child(f, factor, PRODUCT + 1, style)?;
            }
            Ok(())
        }
        ExprKind::Pow(base, exponent) => {
            child(f, base, ATOM, style)?;
            f.write_str("^")?;
            child(f, exponent, UNARY, style)
        }
        ExprKind::Call { func, args } => {
            write!(f, "{}(", func.name())?;
            for (i, a) in args.iter().enumerate() {
                if i > 0 {
                    f.write_str(", ")?;
                }
                write_expr(f, a, style)?;
            }
            f.write_str(")")
        }
        ExprKind::Compare(op, a, b) => {
            child(f, a, SUM, style)?;
            let sym = if style.math {
                match op.symbol() {
                    "<=" => "≤",
                    ">=" => "≥",
                    "!=" => "≠",
                    s => s,
                }
            } else {
                op.symbol()
            };
            write!(f, " {sym} ")?;
            child(f, b, SUM, style)
        }
        ExprKind::Not(a) => {
            f.write_str("!")?;
            child(f, a, NOT, style)
        }
        ExprKind::Logic { op, terms } => {
            let min = precedence(e) + 1;
            for (i, t) in terms.iter().enumerate() {
                if i > 0 {
                    write!(f, " {} ", op.symbol())?;
                }
                child(f, t, min, style)?;
            }
            Ok(())
        }
    }
}
