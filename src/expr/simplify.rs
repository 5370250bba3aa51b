//! Simplification to a canonical form.
//!
//! Always: constant folding (only where the result is finite), neutral and absorbing
//! elements, flattening and sorting of sums and products, collecting like terms
//! (`2·x + 3·x = 5·x`) and like factors (`x·x² = x³`), integer powers of products
//! (`(a·b)² = a²·b²`), `(u^a)^b = u^(a·b)` where it holds for every `u`, `sqrt(u) = u^(1/2)`,
//! `exp(ln u) = u`, `ln(exp u) = u`, `exp(k·ln u) = u^k`, `(exp u)^k = exp(k·u)`.
//! These hold wherever the input is defined (they may only extend the domain, as `x/x = 1`).
//!
//! [`Mode::Expand`] adds the rewrites of SPEC §4 and §13 used by the linearizability
//! analysis: products expanded over sums, integer powers 2–4 of sums expanded,
//! `exp(u+v) = exp u · exp v`, and the domain-restricted identities, each of which records
//! the condition it needs: `ln(a·b) = ln a + ln b` (a > 0, b > 0), `ln(a^b) = b·ln a`
//! (a > 0), `(a·b)^c = a^c·b^c` for non-integer c (a ≥ 0, b ≥ 0), `(u^a)^b = u^(a·b)`
//! for even a and non-integer b (u ≥ 0, the `(u²)^(1/2) = u` case). Conditions that are
//! provably true (`exp(u) > 0`, `x² ≥ 0`) are not recorded. A sum in a denominator is
//! never split. (The identities are standard algebra, from memory.)

use std::cmp::Ordering;

use super::ast::{CmpOp, Func};
use super::recursive::check_call;
use super::sym::{Node, cmp_nodes, split_coefficient};

/// Which rewrites the simplifier may use.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Mode {
    /// Value-preserving rewrites only; no expansion.
    Canonical,
    /// Also the domain-restricted identities, recording conditions, but no expansion:
    /// run before [`Mode::Expand`] so that `sqrt((a + b·x)^2)` collapses to `a + b·x`
    /// before the square is multiplied out.
    Collapse,
    /// Also expand and apply the domain-restricted identities, recording conditions.
    Expand,
}

/// A condition an identity needs, e.g. `R25 > 0` for `ln(R25·u) = ln R25 + ln u`.
#[derive(Clone, Debug, PartialEq)]
pub struct Condition {
    /// A comparison node such as `Cmp(Gt, u, 0)`.
    pub node: Node,
    /// The identity that needed it, e.g. `ln(a·b) = ln a + ln b`.
    pub rule: &'static str,
}

/// Largest number of terms a product may expand into; beyond it the product is kept.
const MAX_EXPANDED_TERMS: usize = 256;

pub struct Simplifier {
    mode: Mode,
    pub conditions: Vec<Condition>,
}

/// Simplifies with the value-preserving rules ([`Mode::Canonical`]).
pub fn simplify_node(n: &Node) -> Node {
    Simplifier::new(Mode::Canonical).run(n)
}

impl Simplifier {
    pub fn new(mode: Mode) -> Simplifier {
        Simplifier {
            mode,
            conditions: Vec::new(),
        }
    }

    fn expanding(&self) -> bool {
        self.mode == Mode::Expand
    }

    fn restricted(&self) -> bool {
        self.mode != Mode::Canonical
    }

    /// Simplifies until the form no longer changes (at most a few passes).
    pub fn run(&mut self, n: &Node) -> Node {
        let mut current = self.simplify(n);
        for _ in 0..4 {
            let next = self.simplify(&current);
            if next == current {
                break;
            }
            current = next;
        }
        current
    }

    fn simplify(&mut self, n: &Node) -> Node {
        match n {
            Node::Num(v) => Node::num(*v),
            Node::Sym(_) | Node::Pi => n.clone(),
            Node::Add(ts) => {
                let ts = ts.iter().map(|t| self.simplify(t)).collect();
                self.add(ts)
            }
            Node::Mul(fs) => {
                let fs = fs.iter().map(|f| self.simplify(f)).collect();
                self.mul(fs)
            }
            Node::Pow(b, e) => {
                let (b, e) = (self.simplify(b), self.simplify(e));
                self.pow(b, e)
            }
            Node::Call(f, args) => {
                let args = args.iter().map(|a| self.simplify(a)).collect();
                self.call(*f, args)
            }
            Node::Cmp(op, a, b) => {
                let (a, b) = (self.simplify(a), self.simplify(b));
                match (a.as_num(), b.as_num()) {
                    (Some(x), Some(y)) => Node::num(f64::from(u8::from(op.apply(x, y)))),
                    _ => Node::Cmp(*op, Box::new(a), Box::new(b)),
                }
            }
            Node::Logic(op, ts) => Node::Logic(*op, ts.iter().map(|t| self.simplify(t)).collect()),
            Node::Not(a) => {
                let a = self.simplify(a);
                match a.as_num() {
                    Some(x) => Node::num(f64::from(u8::from(x == 0.0))),
                    None => Node::Not(Box::new(a)),
                }
            }
        }
    }

    /// The canonical sum of already simplified terms.
    pub fn add(&mut self, terms: Vec<Node>) -> Node {
        let mut flat = Vec::with_capacity(terms.len());
        for t in terms {
            match t {
                Node::Add(inner) => flat.extend(inner),
                other => flat.push(other),
            }
        }
        let mut constants = Vec::new();
        let mut keyed: Vec<(Node, f64)> = Vec::with_capacity(flat.len());
        for t in flat {
            let (c, mut factors) = into_coefficient(t);
            match factors.len() {
                0 => constants.push(c),
                1 => keyed.push((factors.remove(0), c)),
                _ => keyed.push((Node::Mul(factors), c)),
            }
        }
        keyed.sort_by(|a, b| cmp_nodes(&a.0, &b.0));
        let mut out: Vec<Node> = Vec::new();
        let mut i = 0;
        while i < keyed.len() {
            let mut c = keyed[i].1;
            let mut j = i + 1;
            while j < keyed.len() && cmp_nodes(&keyed[j].0, &keyed[i].0) == Ordering::Equal {
                c += keyed[j].1;
                j += 1;
            }
            if c != 0.0 {
                out.push(scale(keyed[i].0.clone(), c));
            }
            i = j;
        }
        let constant: f64 = constants.iter().sum();
        if constant.is_finite() {
            if constant != 0.0 {
                out.push(Node::num(constant));
            }
        } else {
            // Folding overflowed: keep the constants apart rather than produce inf.
            out.extend(constants.into_iter().map(Node::num));
        }
        match out.len() {
            0 => Node::num(0.0),
            1 => out.remove(0),
            _ => Node::Add(out),
        }
    }

    /// The canonical product of already simplified factors.
    pub fn mul(&mut self, factors: Vec<Node>) -> Node {
        let mut flat = Vec::with_capacity(factors.len());
        for f in factors {
            match f {
                Node::Mul(inner) => flat.extend(inner),
                other => flat.push(other),
            }
        }
        let mut numbers = Vec::new();
        let mut pairs: Vec<(Node, Node)> = Vec::with_capacity(flat.len());
        for f in flat {
            match f {
                Node::Num(v) => numbers.push(v),
                Node::Pow(b, e) => pairs.push((*b, *e)),
                other => pairs.push((other, Node::num(1.0))),
            }
        }
        let mut coef: f64 = numbers.iter().product();
        if coef == 0.0 {
            return Node::num(0.0);
        }
        pairs.sort_by(|a, b| cmp_nodes(&a.0, &b.0));
        let mut merged: Vec<(Node, Node)> = Vec::with_capacity(pairs.len());
        for (b, e) in pairs {
            match merged.last_mut() {
                Some(last) if cmp_nodes(&last.0, &b) == Ordering::Equal => {
                    let sum = self.add(vec![last.1.clone(), e]);
                    last.1 = sum;
                }
                _ => merged.push((b, e)),
            }
        }
        let mut out = Vec::with_capacity(merged.len());
        let mut refold = false;
        for (b, e) in merged {
            match self.pow(b, e) {
                Node::Num(v) => {
                    numbers.push(v);
                    coef *= v;
                }
                f @ Node::Mul(_) => {
                    refold = true;
                    out.push(f);
                }
                f => out.push(f),
            }
        }
        if refold {
            if coef.is_finite() {
                out.push(Node::num(coef));
            } else {
                out.extend(numbers.into_iter().map(Node::num));
            }
            return self.mul(out);
        }
        if coef == 0.0 {
            return Node::num(0.0);
        }
        if self.expanding()
            && coef.is_finite()
            && out.iter().any(|f| matches!(f, Node::Add(_)))
            && let Some(expanded) = self.distribute(coef, &out)
        {
            return expanded;
        }
        out.sort_by(cmp_factors);
        if !coef.is_finite() {
            // Folding overflowed: keep the numbers apart rather than produce inf.
            let mut all: Vec<Node> = numbers.into_iter().map(Node::num).collect();
            all.extend(out);
            return Node::Mul(all);
        }
        if out.is_empty() {
            return Node::num(coef);
        }
        if coef != 1.0 {
            out.insert(0, Node::num(coef));
        }
        if out.len() == 1 {
            out.remove(0)
        } else {
            Node::Mul(out)
        }
    }

    /// Expands `coef · Π factors` over the sums among the factors; `None` when the
    /// result would exceed [`MAX_EXPANDED_TERMS`] terms.
    fn distribute(&mut self, coef: f64, factors: &[Node]) -> Option<Node> {
        let mut products: Vec<Vec<Node>> = vec![vec![Node::num(coef)]];
        for f in factors {
            match f {
                Node::Add(terms) => {
                    if products.len() * terms.len() > MAX_EXPANDED_TERMS {
                        return None;
                    }
                    let mut next = Vec::with_capacity(products.len() * terms.len());
                    for p in &products {
                        for t in terms {
                            let mut q = p.clone();
                            q.push(t.clone());
                            next.push(q);
                        }
                    }
                    products = next;
                }
                other => products.iter_mut().for_each(|p| p.push(other.clone())),
            }
        }
        let terms = products.into_iter().map(|p| self.mul(p)).collect();
        Some(self.add(terms))
    }

    /// The canonical power of an already simplified base and exponent.
    pub fn pow(&mut self, b: Node, e: Node) -> Node {
        if e.is_num(0.0) || b.is_num(1.0) {
            return Node::num(1.0);
        }
        if e.is_num(1.0) {
            return b;
        }
        if let (Some(x), Some(y)) = (b.as_num(), e.as_num()) {
            return match fold_pow(x, y) {
                Some(v) => Node::num(v),
                None => Node::pow(b, e),
            };
        }
        if b.is_num(0.0) && e.as_num().is_some_and(|k| k > 0.0) {
            return Node::num(0.0);
        }
        let e_int = e.as_num().filter(|k| k.fract() == 0.0);
        match b {
            Node::Pow(u, a) => {
                let safe = e_int.is_some() || a.as_num().is_some_and(|k| !is_even_integer(k));
                if safe || self.restricted() {
                    if !safe {
                        let negative = match (a.as_num(), e.as_num()) {
                            (Some(x), Some(y)) => x * y < 0.0,
                            _ => true,
                        };
                        self.require(&u, !negative, "(u^a)^b = u^(a·b)");
                    }
                    let exponent = self.mul(vec![*a, e]);
                    return self.pow(*u, exponent);
                }
                Node::pow(Node::Pow(u, a), e)
            }
            Node::Mul(fs) => {
                if e_int.is_some() {
                    let powered = fs.into_iter().map(|f| self.pow(f, e.clone())).collect();
                    return self.mul(powered);
                }
                let (c, rest) = split_coefficient(&Node::Mul(fs.clone()));
                if self.restricted() && c > 0.0 {
                    let negative = e.as_num().is_none_or(|k| k < 0.0);
                    let mut powered = vec![self.pow(Node::num(c), e.clone())];
                    for f in rest {
                        self.require(&f, !negative, "(a·b)^c = a^c·b^c");
                        powered.push(self.pow(f, e.clone()));
                    }
                    return self.mul(powered);
                }
                Node::pow(Node::Mul(fs), e)
            }
            Node::Call(Func::Exp, mut args) if args.len() == 1 => {
                let u = args.remove(0);
                let scaled = self.mul(vec![u, e]);
                self.call(Func::Exp, vec![scaled])
            }
            Node::Add(ts) if self.expanding() && matches!(e_int, Some(2.0..=4.0)) => {
                let n = e_int.map_or(2, |k| k as usize);
                let copies = vec![Node::Add(ts); n];
                match self.distribute(1.0, &copies) {
                    Some(expanded) => expanded,
                    None => Node::pow(copies[0].clone(), e),
                }
            }
            b => Node::pow(b, e),
        }
    }

    /// The canonical call of a function on already simplified arguments.
    pub fn call(&mut self, f: Func, mut args: Vec<Node>) -> Node {
        if let Some(a) = args.first().and_then(Node::as_num)
            && (args.len() == 1 || args.get(1).and_then(Node::as_num).is_some())
        {
            let b = args.get(1).and_then(Node::as_num).unwrap_or(0.0);
            if let Ok(v) = check_call(f, a, b)
                && v.is_finite()
            {
                return Node::num(v);
            }
        }
        if f == Func::Sqrt && args.len() == 1 {
            return self.pow(args.remove(0), Node::num(0.5));
        }
        if f == Func::Pow && args.len() == 2 {
            let e = args.remove(1);
            return self.pow(args.remove(0), e);
        }
        if args.len() != 1 {
            return Node::Call(f, args);
        }
        let u = args.remove(0);
        match (f, u) {
            (Func::Exp, Node::Call(Func::Ln, mut inner)) if inner.len() == 1 => inner.remove(0),
            (Func::Ln, Node::Call(Func::Exp, mut inner)) if inner.len() == 1 => inner.remove(0),
            (Func::Log10 | Func::Log2, Node::Call(Func::Exp, mut inner)) if inner.len() == 1 => {
                let scale = 1.0 / log_base(f);
                self.mul(vec![inner.remove(0), Node::num(scale)])
            }
            (Func::Exp, Node::Mul(fs)) if fs.iter().any(is_ln) => {
                // exp(k·ln u) = u^k: ln already requires u > 0.
                let mut base = None;
                let mut rest = Vec::with_capacity(fs.len());
                for factor in fs {
                    match factor {
                        Node::Call(Func::Ln, mut a) if base.is_none() && a.len() == 1 => {
                            base = Some(a.remove(0));
                        }
                        other => rest.push(other),
                    }
                }
                let k = self.mul(rest);
                match base {
                    Some(u) => self.pow(u, k),
                    None => Node::Call(Func::Exp, vec![k]),
                }
            }
            (Func::Exp, Node::Add(ts)) if self.expanding() => {
                let factors = ts
                    .into_iter()
                    .map(|t| self.call(Func::Exp, vec![t]))
                    .collect();
                self.mul(factors)
            }
            (Func::Abs, Node::Call(Func::Abs, inner)) => Node::Call(Func::Abs, inner),
            (Func::Abs, u) if sign(&u) != Sign::Unknown => u,
            (Func::Ln | Func::Log10 | Func::Log2, Node::Pow(b, k))
                if self.restricted() || sign(&b) == Sign::Positive =>
            {
                self.require(&b, false, "ln(a^b) = b·ln a");
                let log = self.call(f, vec![*b]);
                self.mul(vec![*k, log])
            }
            (Func::Ln | Func::Log10 | Func::Log2, Node::Mul(fs)) if self.restricted() => {
                let (c, rest) = split_coefficient(&Node::Mul(fs.clone()));
                if c <= 0.0 {
                    return Node::Call(f, vec![Node::Mul(fs)]);
                }
                let mut terms = vec![self.call(f, vec![Node::num(c)])];
                for factor in rest {
                    // ln(u^k) = k·ln(u) below requires u > 0, which implies u^k > 0.
                    if !matches!(factor, Node::Pow(..)) {
                        self.require(&factor, false, "ln(a·b) = ln a + ln b");
                    }
                    terms.push(self.call(f, vec![factor]));
                }
                self.add(terms)
            }
            (f, u) => Node::Call(f, vec![u]),
        }
    }

    /// Records `n > 0` (or `n ≥ 0` when `non_negative`) unless it is provably true.
    fn require(&mut self, n: &Node, non_negative: bool, rule: &'static str) {
        let s = sign(n);
        if s == Sign::Positive || (non_negative && s == Sign::NonNegative) {
            return;
        }
        let op = if non_negative { CmpOp::Ge } else { CmpOp::Gt };
        let node = Node::Cmp(op, Box::new(n.clone()), Box::new(Node::num(0.0)));
        if !self.conditions.iter().any(|c| c.node == node) {
            self.conditions.push(Condition { node, rule });
        }
    }
}

/// [`split_coefficient`] without copying the factors.
fn into_coefficient(n: Node) -> (f64, Vec<Node>) {
    match n {
        Node::Num(v) => (v, Vec::new()),
        Node::Mul(fs) => {
            let c: f64 = fs.iter().filter_map(Node::as_num).product();
            if !c.is_finite() {
                return (1.0, fs);
            }
            (c, fs.into_iter().filter(|f| f.as_num().is_none()).collect())
        }
        other => (1.0, vec![other]),
    }
}

fn is_ln(n: &Node) -> bool {
    matches!(n, Node::Call(Func::Ln, a) if a.len() == 1)
}

fn log_base(f: Func) -> f64 {
    match f {
        Func::Log10 => std::f64::consts::LN_10,
        Func::Log2 => std::f64::consts::LN_2,
        _ => 1.0,
    }
}

fn scale(key: Node, c: f64) -> Node {
    if c == 1.0 {
        return key;
    }
    match key {
        Node::Mul(mut fs) => {
            fs.insert(0, Node::num(c));
            Node::Mul(fs)
        }
        k => Node::Mul(vec![Node::num(c), k]),
    }
}

/// Orders factors by base, then exponent, so `x` and `x^2` sit together.
fn cmp_factors(a: &Node, b: &Node) -> Ordering {
    let (ab, ae) = base_exponent(a);
    let (bb, be) = base_exponent(b);
    cmp_nodes(ab, bb).then_with(|| cmp_nodes(ae, be))
}

fn base_exponent(n: &Node) -> (&Node, &Node) {
    const ONE: &Node = &Node::Num(1.0);
    match n {
        Node::Pow(b, e) => (b, e),
        other => (other, ONE),
    }
}

fn fold_pow(x: f64, y: f64) -> Option<f64> {
    if (x < 0.0 && y.fract() != 0.0) || (x == 0.0 && y < 0.0) {
        return None;
    }
    let v = x.powf(y);
    v.is_finite().then_some(v)
}

fn is_even_integer(k: f64) -> bool {
    k.fract() == 0.0 && (k / 2.0).fract() == 0.0
}

/// What can be proved about the sign of a node without knowing its symbols.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Sign {
    Positive,
    NonNegative,
    Unknown,
}

pub fn sign(n: &Node) -> Sign {
    match n {
        Node::Num(v) if *v > 0.0 => Sign::Positive,
        Node::Num(v) if *v == 0.0 => Sign::NonNegative,
        Node::Pi => Sign::Positive,
        Node::Call(Func::Exp | Func::Cosh, _) => Sign::Positive,
        Node::Call(Func::Abs, _) => Sign::NonNegative,
        Node::Pow(b, e) => match (sign(b), e.as_num()) {
            (Sign::Positive, _) => Sign::Positive,
            (_, Some(k)) if is_even_integer(k) => Sign::NonNegative,
            // A non-integer power is only defined for a non-negative base.
            (Sign::NonNegative, _) => Sign::NonNegative,
            (_, Some(k)) if k.fract() != 0.0 => Sign::NonNegative,
            _ => Sign::Unknown,
        },
        Node::Mul(v) | Node::Add(v) => {
            let signs: Vec<Sign> = v.iter().map(sign).collect();
            if signs.iter().all(|s| *s == Sign::Positive) {
                Sign::Positive
            } else if signs.iter().all(|s| *s != Sign::Unknown) {
                if matches!(n, Node::Add(_)) && signs.contains(&Sign::Positive) {
                    Sign::Positive
                } else {
                    Sign::NonNegative
                }
            } else {
                Sign::Unknown
            }
        }
        _ => Sign::Unknown,
    }
}
