//! The algebraic form used by simplification, differentiation and the linearizability
//! analysis: n-ary sums and products, subtraction as a factor −1, division as a power −1,
//! `sqrt(u)` as `u^0.5`, `pow(a, b)` as `a^b`.
//!
//! [`to_node`] and [`to_expr`] convert to and from the syntax tree; [`to_expr`] prints
//! negative coefficients as subtraction and negative powers as division again.

use std::cmp::Ordering;

use super::ast::{AddOp, CmpOp, Expr, ExprKind, Func, LogicOp, MulOp};

#[derive(Clone, Debug, PartialEq)]
pub enum Node {
    Num(f64),
    /// A variable or parameter name.
    Sym(String),
    Pi,
    Add(Vec<Node>),
    Mul(Vec<Node>),
    Pow(Box<Node>, Box<Node>),
    /// Never `sqrt` or `pow`: those are `Pow`.
    Call(Func, Vec<Node>),
    Cmp(CmpOp, Box<Node>, Box<Node>),
    Logic(LogicOp, Vec<Node>),
    Not(Box<Node>),
}

impl Node {
    pub fn num(v: f64) -> Node {
        // One zero: -0.0 and 0.0 must sort and compare as the same constant.
        Node::Num(if v == 0.0 { 0.0 } else { v })
    }

    pub fn sym(name: &str) -> Node {
        Node::Sym(name.to_string())
    }

    pub fn pow(b: Node, e: Node) -> Node {
        Node::Pow(Box::new(b), Box::new(e))
    }

    pub fn as_num(&self) -> Option<f64> {
        match self {
            Node::Num(v) => Some(*v),
            _ => None,
        }
    }

    pub fn is_num(&self, v: f64) -> bool {
        self.as_num() == Some(v)
    }

    /// Whether the name occurs in the node.
    pub fn contains(&self, name: &str) -> bool {
        match self {
            Node::Sym(s) => s == name,
            Node::Num(_) | Node::Pi => false,
            _ => self.children().iter().any(|c| c.contains(name)),
        }
    }

    /// Whether any of the names occurs in the node.
    pub fn contains_any(&self, names: &[String]) -> bool {
        names.iter().any(|n| self.contains(n))
    }

    /// Every name used, each once, in first-appearance order.
    pub fn symbols(&self) -> Vec<String> {
        let mut out = Vec::new();
        self.collect_symbols(&mut out);
        out
    }

    fn collect_symbols(&self, out: &mut Vec<String>) {
        if let Node::Sym(s) = self {
            if !out.contains(s) {
                out.push(s.clone());
            }
            return;
        }
        for c in self.children() {
            c.collect_symbols(out);
        }
    }

    pub fn children(&self) -> Vec<&Node> {
        match self {
            Node::Num(_) | Node::Sym(_) | Node::Pi => Vec::new(),
            Node::Add(v) | Node::Mul(v) | Node::Call(_, v) | Node::Logic(_, v) => {
                v.iter().collect()
            }
            Node::Pow(a, b) | Node::Cmp(_, a, b) => vec![a, b],
            Node::Not(a) => vec![a],
        }
    }

    /// Evaluates with plain IEEE arithmetic (NaN/inf flow through); `None` for an unknown name.
    pub fn eval(&self, lookup: &dyn Fn(&str) -> Option<f64>) -> Option<f64> {
        Some(match self {
            Node::Num(v) => *v,
            Node::Pi => std::f64::consts::PI,
            Node::Sym(s) => lookup(s)?,
            Node::Add(v) => {
                let mut acc = 0.0;
                for t in v {
                    acc += t.eval(lookup)?;
                }
                acc
            }
            Node::Mul(v) => {
                let mut acc = 1.0;
                for t in v {
                    acc *= t.eval(lookup)?;
                }
                acc
            }
            Node::Pow(a, b) => {
                let (a, b) = (a.eval(lookup)?, b.eval(lookup)?);
                if b == -1.0 { 1.0 / a } else { a.powf(b) }
            }
            Node::Call(f, v) => {
                let a = v.first()?.eval(lookup)?;
                let b = match v.get(1) {
                    Some(b) => b.eval(lookup)?,
                    None => 0.0,
                };
                f.apply(a, b)
            }
            Node::Cmp(op, a, b) => f64::from(u8::from(op.apply(a.eval(lookup)?, b.eval(lookup)?))),
            Node::Logic(op, v) => {
                let stop = matches!(op, LogicOp::Or);
                let mut r = !stop;
                for t in v {
                    if (t.eval(lookup)? != 0.0) == stop {
                        r = stop;
                        break;
                    }
                }
                f64::from(u8::from(r))
            }
            Node::Not(a) => f64::from(u8::from(a.eval(lookup)? == 0.0)),
        })
    }

    fn rank(&self) -> u8 {
        match self {
            Node::Num(_) => 0,
            Node::Pi => 1,
            Node::Sym(_) => 2,
            Node::Pow(..) => 3,
            Node::Mul(_) => 4,
            Node::Add(_) => 5,
            Node::Call(..) => 6,
            Node::Cmp(..) => 7,
            Node::Not(_) => 8,
            Node::Logic(..) => 9,
        }
    }
}

/// A total order on nodes (the canonical order of sums and products): by kind, then by
/// content, lexicographically. Floats compare with `total_cmp`.
pub fn cmp_nodes(a: &Node, b: &Node) -> Ordering {
    let by_rank = a.rank().cmp(&b.rank());
    if by_rank != Ordering::Equal {
        return by_rank;
    }
    match (a, b) {
        (Node::Num(x), Node::Num(y)) => x.total_cmp(y),
        (Node::Sym(x), Node::Sym(y)) => x.cmp(y),
        (Node::Pow(a1, a2), Node::Pow(b1, b2)) => cmp_nodes(a1, b1).then_with(|| cmp_nodes(a2, b2)),
        (Node::Call(f, x), Node::Call(g, y)) => f.cmp(g).then_with(|| cmp_slices(x, y)),
        (Node::Cmp(o1, a1, a2), Node::Cmp(o2, b1, b2)) => (*o1 as u8)
            .cmp(&(*o2 as u8))
            .then_with(|| cmp_nodes(a1, b1))
            .then_with(|| cmp_nodes(a2, b2)),
        (Node::Logic(o1, x), Node::Logic(o2, y)) => {
            (*o1 as u8).cmp(&(*o2 as u8)).then_with(|| cmp_slices(x, y))
        }
        (Node::Add(x), Node::Add(y)) | (Node::Mul(x), Node::Mul(y)) => cmp_slices(x, y),
        (Node::Not(x), Node::Not(y)) => cmp_nodes(x, y),
        // Same rank means same variant; the remaining pairs are leaves (`Pi`).
        _ => Ordering::Equal,
    }
}

fn cmp_slices(x: &[Node], y: &[Node]) -> Ordering {
    for (a, b) in x.iter().zip(y) {
        let o = cmp_nodes(a, b);
        if o != Ordering::Equal {
            return o;
        }
    }
    x.len().cmp(&y.len())
}

/// Converts a syntax tree to the algebraic form, without simplifying.
pub fn to_node(e: &Expr) -> Node {
    match &e.kind {
        ExprKind::Number(v) => Node::num(*v),
        ExprKind::Name(n) if n == "pi" => Node::Pi,
        ExprKind::Name(n) => Node::Sym(n.clone()),
        ExprKind::Neg(a) => Node::Mul(vec![Node::num(-1.0), to_node(a)]),
        ExprKind::Sum { first, rest } => {
            let mut v = vec![to_node(first)];
            for (op, t) in rest {
                v.push(match op {
                    AddOp::Add => to_node(t),
                    AddOp::Sub => Node::Mul(vec![Node::num(-1.0), to_node(t)]),
                });
            }
            Node::Add(v)
        }
        ExprKind::Product { first, rest } => {
            let mut v = vec![to_node(first)];
            for (op, t) in rest {
                v.push(match op {
                    MulOp::Mul => to_node(t),
                    MulOp::Div => Node::pow(to_node(t), Node::num(-1.0)),
                });
            }
            Node::Mul(v)
        }
        ExprKind::Pow(a, b) => Node::pow(to_node(a), to_node(b)),
        ExprKind::Call { func, args } => {
            let mut v: Vec<Node> = args.iter().map(to_node).collect();
            match (func, v.len()) {
                (Func::Sqrt, 1) => Node::pow(v.remove(0), Node::num(0.5)),
                (Func::Pow, 2) => {
                    let b = v.remove(1);
                    Node::pow(v.remove(0), b)
                }
                _ => Node::Call(*func, v),
            }
        }
        ExprKind::Compare(op, a, b) => Node::Cmp(*op, Box::new(to_node(a)), Box::new(to_node(b))),
        ExprKind::Logic { op, terms } => Node::Logic(*op, terms.iter().map(to_node).collect()),
        ExprKind::Not(a) => Node::Not(Box::new(to_node(a))),
    }
}

/// Splits a product into its numeric coefficient and the remaining factors. When the
/// numbers multiply to ±inf (they were kept apart for that reason) they stay factors.
pub fn split_coefficient(n: &Node) -> (f64, Vec<Node>) {
    match n {
        Node::Num(v) => (*v, Vec::new()),
        Node::Mul(fs) => {
            let c: f64 = fs.iter().filter_map(Node::as_num).product();
            if !c.is_finite() {
                return (1.0, fs.clone());
            }
            (
                c,
                fs.iter()
                    .filter(|f| f.as_num().is_none())
                    .cloned()
                    .collect(),
            )
        }
        other => (1.0, vec![other.clone()]),
    }
}

/// The numeric coefficient of a term, as [`split_coefficient`] gives it, without copying
/// anything.
fn coefficient(n: &Node) -> f64 {
    match n {
        Node::Num(v) => *v,
        Node::Mul(fs) => {
            let c: f64 = fs.iter().filter_map(Node::as_num).product();
            if c.is_finite() { c } else { 1.0 }
        }
        _ => 1.0,
    }
}

/// [`split_coefficient`] by reference: printing walks every level of a tree, and copying
/// each level's factors made printing a deep tree quadratic (minutes for the derivative of a
/// depth-199 nest in a debug build).
fn split_coefficient_ref(n: &Node) -> (f64, Vec<&Node>) {
    match n {
        Node::Num(v) => (*v, Vec::new()),
        Node::Mul(fs) => {
            let c: f64 = fs.iter().filter_map(Node::as_num).product();
            if !c.is_finite() {
                return (1.0, fs.iter().collect());
            }
            (c, fs.iter().filter(|f| f.as_num().is_none()).collect())
        }
        other => (1.0, vec![other]),
    }
}

/// Converts the algebraic form back to a syntax tree that prints naturally:
/// `a - 2*b`, `a*b/(c*d)`, `sqrt(u)`, `1/x`.
pub fn to_expr(n: &Node) -> Expr {
    match n {
        Node::Num(v) => Expr::number(*v),
        Node::Pi => Expr::name("pi"),
        Node::Sym(s) => Expr::name(s),
        Node::Add(terms) => sum_expr(terms),
        Node::Mul(_) => {
            let (c, factors) = split_coefficient_ref(n);
            product_expr(c, &factors)
        }
        Node::Pow(b, e) => match e.as_num() {
            Some(k) if k < 0.0 => product_expr(1.0, &[n]),
            Some(0.5) => Expr::call(Func::Sqrt, vec![to_expr(b)]),
            _ => Expr::pow(to_expr(b), to_expr(e)),
        },
        Node::Call(f, args) => Expr::call(*f, args.iter().map(to_expr).collect()),
        Node::Cmp(op, a, b) => Expr::compare(*op, to_expr(a), to_expr(b)),
        Node::Logic(op, v) => Expr::logic(*op, v.iter().map(to_expr).collect()),
        Node::Not(a) => Expr::logical_not(to_expr(a)),
    }
}

fn is_negative_term(n: &Node) -> bool {
    coefficient(n) < 0.0
}

/// The syntax tree of `−n` for a term with a negative coefficient.
fn negated_expr(n: &Node) -> Expr {
    let (c, factors) = split_coefficient_ref(n);
    if factors.is_empty() {
        return Expr::number(-c);
    }
    product_expr(-c, &factors)
}

fn sum_expr(terms: &[Node]) -> Expr {
    let mut order: Vec<&Node> = terms.iter().collect();
    // Lead with a positive term when there is one: `ln(a) - b`, not `-b + ln(a)`.
    if let Some(i) = order.iter().position(|t| !is_negative_term(t))
        && i > 0
    {
        let t = order.remove(i);
        order.insert(0, t);
    }
    let Some((first, rest)) = order.split_first() else {
        return Expr::number(0.0);
    };
    let mut rest_exprs = Vec::new();
    for t in rest {
        if is_negative_term(t) {
            rest_exprs.push((AddOp::Sub, negated_expr(t)));
        } else {
            rest_exprs.push((AddOp::Add, to_expr(t)));
        }
    }
    if rest_exprs.is_empty() {
        return to_expr(first);
    }
    Expr::new(
        ExprKind::Sum {
            first: Box::new(to_expr(first)),
            rest: rest_exprs,
        },
        Default::default(),
    )
}

/// `c · Π numerator / Π denominator`, with the sign in front.
fn product_expr(c: f64, factors: &[&Node]) -> Expr {
    let mut num: Vec<Expr> = Vec::new();
    let mut den: Vec<Expr> = Vec::new();
    for f in factors {
        match f {
            Node::Pow(b, e) if e.as_num().is_some_and(|k| k < 0.0) => {
                let k = -e.as_num().unwrap_or(1.0);
                // As `to_expr` prints `b^k` for k > 0.
                den.push(if k == 1.0 {
                    to_expr(b)
                } else if k == 0.5 {
                    Expr::call(Func::Sqrt, vec![to_expr(b)])
                } else {
                    Expr::pow(to_expr(b), Expr::number(k))
                });
            }
            other => num.push(to_expr(other)),
        }
    }
    let magnitude = c.abs();
    if magnitude != 1.0 || num.is_empty() {
        num.insert(0, Expr::number(magnitude));
    }
    let mut e = chain_product(num, MulOp::Mul);
    if !den.is_empty() {
        let d = chain_product(den, MulOp::Mul);
        e = Expr::binary_product(e, MulOp::Div, d);
        // Keep the product flat: `a*b/c` is one chain.
        if let ExprKind::Product { first, rest } = &e.kind
            && let ExprKind::Product {
                first: inner_first,
                rest: inner_rest,
            } = &first.kind
        {
            let mut all = inner_rest.clone();
            all.extend(rest.iter().cloned());
            e = Expr::new(
                ExprKind::Product {
                    first: inner_first.clone(),
                    rest: all,
                },
                Default::default(),
            );
        }
    }
    if c < 0.0 {
        // `-b*x` rather than `-(b*x)`: the sign goes on the leading factor.
        return match e.kind {
            ExprKind::Product { first, rest } => Expr::new(
                ExprKind::Product {
                    first: Box::new(Expr::negate(*first)),
                    rest,
                },
                Default::default(),
            ),
            kind => Expr::negate(Expr::new(kind, Default::default())),
        };
    }
    e
}

fn chain_product(mut items: Vec<Expr>, op: MulOp) -> Expr {
    if items.len() == 1 {
        return items.remove(0);
    }
    let first = items.remove(0);
    Expr::new(
        ExprKind::Product {
            first: Box::new(first),
            rest: items.into_iter().map(|e| (op, e)).collect(),
        },
        Default::default(),
    )
}
