//! The expression engine: parsing with spans, printing, name resolution, compiled
//! evaluation over columns, exact derivatives and simplification (SPEC §3).
//!
//! ```
//! use fitwright::expr::{parse_equation, derivative, Symbols, Tape};
//! let eq = parse_equation("y = a*exp(b*x)").unwrap();
//! assert_eq!(derivative(&eq.rhs, "b").to_string(), "a*x*exp(b*x)");
//! let tape = Tape::compile(&eq.rhs, &Symbols::new(&["x"], &["a", "b"])).unwrap();
//! let mut out = [0.0; 2];
//! tape.eval(&[&[0.0, 1.0]], &[2.0, 0.5], &mut out).unwrap();
//! assert_eq!(out[0], 2.0);
//! ```

pub mod ast;
pub mod deriv;
pub mod error;
pub mod exp;
pub mod lexer;
pub mod parser;
pub mod print;
pub mod recursive;
pub mod resolve;
pub mod simplify;
pub mod sym;
pub mod tape;

#[cfg(test)]
mod tests;

pub use ast::{AddOp, CmpOp, Expr, ExprKind, Func, LogicOp, MulOp, Span};
pub use deriv::{derivative, jacobian};
pub use error::{EvalError, ExprError, MAX_DEPTH, MAX_SOURCE_CHARS};
pub use parser::{Equation, parse_equation, parse_expression, parse_filter};
pub use recursive::eval_recursive;
pub use resolve::resolve;
pub use tape::{MultiTape, Symbols, Tape, TapeScratch};

/// The canonical form of `expr` (value-preserving rules only; see [`simplify`] module docs).
pub fn simplify(expr: &Expr) -> Expr {
    sym::to_expr(&simplify::simplify_node(&sym::to_node(expr)))
}
