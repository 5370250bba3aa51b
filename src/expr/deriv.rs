//! Exact symbolic derivatives (the Jacobian of every fit), simplified.
//!
//! Rules (standard calculus, from memory): sum, product and chain rules;
//! d(u^v) = v·u^(v−1)·u′ for constant v, u^v·ln(u)·v′ for constant u, and
//! u^v·(v′·ln u + v·u′/u) otherwise; d ln u = u′/u; d log10 u = u′/(u·ln 10);
//! d|u| = u′·u/|u|; d tan u = u′/cos²u; d asin u = u′/√(1−u²); d acos u = −u′/√(1−u²);
//! d atan u = u′/(1+u²); d atan2(a, b) = (b·a′ − a·b′)/(a² + b²); d tanh u = u′/cosh²u;
//! min(a, b) = (a + b − |a − b|)/2 and max(a, b) = (a + b + |a − b|)/2 (undefined where
//! a = b). Comparisons are piecewise constant: derivative 0.

use super::ast::{Expr, Func};
use super::simplify::{Mode, Simplifier};
use super::sym::{Node, to_expr, to_node};

/// The derivative of `expr` with respect to the variable or parameter `name`, simplified.
pub fn derivative(expr: &Expr, name: &str) -> Expr {
    to_expr(&derivative_node(&to_node(expr), name))
}

/// The derivative in the algebraic form, simplified with the value-preserving rules.
pub fn derivative_node(n: &Node, name: &str) -> Node {
    let mut s = Simplifier::new(Mode::Canonical);
    let n = s.run(n);
    let d = diff(&mut s, &n, name);
    s.run(&d)
}

/// The derivatives of `expr` with respect to each parameter, in order.
pub fn jacobian(expr: &Expr, parameters: &[&str]) -> Vec<Expr> {
    let mut s = Simplifier::new(Mode::Canonical);
    let n = s.run(&to_node(expr));
    parameters
        .iter()
        .map(|p| {
            let d = diff(&mut s, &n, p);
            to_expr(&s.run(&d))
        })
        .collect()
}

fn num(v: f64) -> Node {
    Node::num(v)
}

fn diff(s: &mut Simplifier, n: &Node, x: &str) -> Node {
    if !n.contains(x) {
        return num(0.0);
    }
    match n {
        Node::Num(_) | Node::Pi => num(0.0),
        Node::Sym(_) => num(1.0),
        Node::Add(ts) => {
            let ds = ts.iter().map(|t| diff(s, t, x)).collect();
            s.add(ds)
        }
        Node::Mul(fs) => {
            let mut terms = Vec::new();
            for (i, f) in fs.iter().enumerate() {
                if !f.contains(x) {
                    continue;
                }
                let mut factors: Vec<Node> = fs.clone();
                factors[i] = diff(s, f, x);
                terms.push(s.mul(factors));
            }
            s.add(terms)
        }
        Node::Pow(u, v) => {
            let du = diff(s, u, x);
            let dv = diff(s, v, x);
            let power = Node::pow((**u).clone(), (**v).clone());
            if !v.contains(x) {
                let e = s.add(vec![(**v).clone(), num(-1.0)]);
                let p = s.pow((**u).clone(), e);
                s.mul(vec![(**v).clone(), p, du])
            } else if !u.contains(x) {
                let ln = s.call(Func::Ln, vec![(**u).clone()]);
                s.mul(vec![power, ln, dv])
            } else {
                let ln = s.call(Func::Ln, vec![(**u).clone()]);
                let a = s.mul(vec![dv, ln]);
                let inv = s.pow((**u).clone(), num(-1.0));
                let b = s.mul(vec![(**v).clone(), du, inv]);
                let inner = s.add(vec![a, b]);
                s.mul(vec![power, inner])
            }
        }
        Node::Call(f, args) => diff_call(s, *f, args, x),
        // Comparisons and logic are piecewise constant.
        Node::Cmp(..) | Node::Logic(..) | Node::Not(_) => num(0.0),
    }
}

fn diff_call(s: &mut Simplifier, f: Func, args: &[Node], x: &str) -> Node {
    let (Some(u), b) = (args.first(), args.get(1)) else {
        return num(0.0);
    };
    let du = diff(s, u, x);
    let call = |s: &mut Simplifier, g: Func, a: &Node| s.call(g, vec![a.clone()]);
    let one_minus_sq = |s: &mut Simplifier| {
        let sq = s.pow(u.clone(), num(2.0));
        let neg = s.mul(vec![num(-1.0), sq]);
        s.add(vec![num(1.0), neg])
    };
    let outer = match f {
        Func::Exp => call(s, Func::Exp, u),
        Func::Ln => s.pow(u.clone(), num(-1.0)),
        Func::Log10 | Func::Log2 => {
            let base = if f == Func::Log10 {
                std::f64::consts::LN_10
            } else {
                std::f64::consts::LN_2
            };
            let inv = s.pow(u.clone(), num(-1.0));
            s.mul(vec![num(1.0 / base), inv])
        }
        Func::Sqrt => {
            let p = s.pow(u.clone(), num(-0.5));
            s.mul(vec![num(0.5), p])
        }
        Func::Abs => {
            let a = call(s, Func::Abs, u);
            let inv = s.pow(a, num(-1.0));
            s.mul(vec![u.clone(), inv])
        }
        Func::Sin => call(s, Func::Cos, u),
        Func::Cos => {
            let sin = call(s, Func::Sin, u);
            s.mul(vec![num(-1.0), sin])
        }
        Func::Tan => {
            let cos = call(s, Func::Cos, u);
            s.pow(cos, num(-2.0))
        }
        Func::Asin | Func::Acos => {
            let inner = one_minus_sq(s);
            let r = s.pow(inner, num(-0.5));
            if f == Func::Asin {
                r
            } else {
                s.mul(vec![num(-1.0), r])
            }
        }
        Func::Atan => {
            let sq = s.pow(u.clone(), num(2.0));
            let d = s.add(vec![num(1.0), sq]);
            s.pow(d, num(-1.0))
        }
        Func::Sinh => call(s, Func::Cosh, u),
        Func::Cosh => call(s, Func::Sinh, u),
        Func::Tanh => {
            let c = call(s, Func::Cosh, u);
            s.pow(c, num(-2.0))
        }
        Func::Atan2 | Func::Pow | Func::Min | Func::Max => {
            let Some(b) = b else { return num(0.0) };
            return diff_binary(s, f, u, b, &du, x);
        }
    };
    s.mul(vec![outer, du])
}

fn diff_binary(s: &mut Simplifier, f: Func, a: &Node, b: &Node, da: &Node, x: &str) -> Node {
    let db = diff(s, b, x);
    match f {
        Func::Atan2 => {
            let t1 = s.mul(vec![b.clone(), da.clone()]);
            let t2 = s.mul(vec![num(-1.0), a.clone(), db]);
            let numer = s.add(vec![t1, t2]);
            let a2 = s.pow(a.clone(), num(2.0));
            let b2 = s.pow(b.clone(), num(2.0));
            let den = s.add(vec![a2, b2]);
            let inv = s.pow(den, num(-1.0));
            s.mul(vec![numer, inv])
        }
        Func::Pow => diff(s, &Node::pow(a.clone(), b.clone()), x),
        _ => {
            // min/max = (a + b ∓ |a − b|)/2, so the derivative is
            // (a′ + b′)/2 ∓ (a − b)(a′ − b′)/(2|a − b|).
            let sign = if f == Func::Min { -0.5 } else { 0.5 };
            let mean = s.add(vec![da.clone(), db.clone()]);
            let half = s.mul(vec![num(0.5), mean]);
            let neg_db = s.mul(vec![num(-1.0), db]);
            let diff_d = s.add(vec![da.clone(), neg_db]);
            if diff_d.is_num(0.0) {
                return half;
            }
            let neg_b = s.mul(vec![num(-1.0), b.clone()]);
            let gap = s.add(vec![a.clone(), neg_b]);
            let abs = s.call(Func::Abs, vec![gap.clone()]);
            let inv = s.pow(abs, num(-1.0));
            let corr = s.mul(vec![num(sign), gap, diff_d, inv]);
            s.add(vec![half, corr])
        }
    }
}
