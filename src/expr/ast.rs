//! The expression syntax tree: what the parser produces and the printer reads back.
//!
//! Chains of `+ -`, of `* /` and of `&&` / `||` are stored flat (one node with a list of
//! operands), so a 5,000-term sum is one node, not 5,000 nested ones. Every other node
//! opens a nesting level that the parser counts against the depth limit, which bounds the
//! depth of every tree the parser returns and so the recursion of every pass over it.

use std::fmt;

/// Byte offsets `start..end` into the expression source.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq, Hash, serde::Serialize)]
pub struct Span {
    pub start: usize,
    pub end: usize,
}

impl Span {
    pub fn new(start: usize, end: usize) -> Span {
        Span { start, end }
    }

    /// The smallest span covering both.
    pub fn to(self, other: Span) -> Span {
        Span::new(self.start.min(other.start), self.end.max(other.end))
    }
}

/// An expression node. Equality is structural and ignores spans.
#[derive(Clone, Debug)]
pub struct Expr {
    pub kind: ExprKind,
    pub span: Span,
}

impl PartialEq for Expr {
    fn eq(&self, other: &Expr) -> bool {
        self.kind == other.kind
    }
}

#[derive(Clone, Debug, PartialEq)]
pub enum ExprKind {
    /// A literal; the parser only produces non-negative finite values.
    Number(f64),
    /// A data variable, a parameter, or the constant `pi`.
    Name(String),
    /// Unary minus.
    Neg(Box<Expr>),
    /// `first (± term)*`, at least one `rest` entry.
    Sum {
        first: Box<Expr>,
        rest: Vec<(AddOp, Expr)>,
    },
    /// `first (*|/ factor)*`, at least one `rest` entry.
    Product {
        first: Box<Expr>,
        rest: Vec<(MulOp, Expr)>,
    },
    /// `base ^ exponent` (right-associative).
    Pow(Box<Expr>, Box<Expr>),
    Call {
        func: Func,
        args: Vec<Expr>,
    },
    /// Filters only: `a < b` and friends (non-associative).
    Compare(CmpOp, Box<Expr>, Box<Expr>),
    /// Filters only: `a && b && …` or `a || b || …`, at least two terms.
    Logic {
        op: LogicOp,
        terms: Vec<Expr>,
    },
    /// Filters only: `!a`.
    Not(Box<Expr>),
}

#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash)]
pub enum AddOp {
    Add,
    Sub,
}

#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash)]
pub enum MulOp {
    Mul,
    Div,
}

#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash)]
pub enum CmpOp {
    Lt,
    Le,
    Gt,
    Ge,
    Eq,
    Ne,
}

impl CmpOp {
    pub fn symbol(self) -> &'static str {
        match self {
            CmpOp::Lt => "<",
            CmpOp::Le => "<=",
            CmpOp::Gt => ">",
            CmpOp::Ge => ">=",
            CmpOp::Eq => "==",
            CmpOp::Ne => "!=",
        }
    }

    pub fn apply(self, a: f64, b: f64) -> bool {
        match self {
            CmpOp::Lt => a < b,
            CmpOp::Le => a <= b,
            CmpOp::Gt => a > b,
            CmpOp::Ge => a >= b,
            CmpOp::Eq => a == b,
            CmpOp::Ne => a != b,
        }
    }
}

#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash)]
pub enum LogicOp {
    And,
    Or,
}

impl LogicOp {
    pub fn symbol(self) -> &'static str {
        match self {
            LogicOp::And => "&&",
            LogicOp::Or => "||",
        }
    }
}

/// The built-in functions of SPEC §3.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash, PartialOrd, Ord)]
pub enum Func {
    Exp,
    Ln,
    Log10,
    Log2,
    Sqrt,
    Abs,
    Sin,
    Cos,
    Tan,
    Asin,
    Acos,
    Atan,
    Atan2,
    Sinh,
    Cosh,
    Tanh,
    Pow,
    Min,
    Max,
}

impl Func {
    pub const ALL: [Func; 19] = [
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
        Func::Atan2,
        Func::Sinh,
        Func::Cosh,
        Func::Tanh,
        Func::Pow,
        Func::Min,
        Func::Max,
    ];

    pub fn name(self) -> &'static str {
        match self {
            Func::Exp => "exp",
            Func::Ln => "ln",
            Func::Log10 => "log10",
            Func::Log2 => "log2",
            Func::Sqrt => "sqrt",
            Func::Abs => "abs",
            Func::Sin => "sin",
            Func::Cos => "cos",
            Func::Tan => "tan",
            Func::Asin => "asin",
            Func::Acos => "acos",
            Func::Atan => "atan",
            Func::Atan2 => "atan2",
            Func::Sinh => "sinh",
            Func::Cosh => "cosh",
            Func::Tanh => "tanh",
            Func::Pow => "pow",
            Func::Min => "min",
            Func::Max => "max",
        }
    }

    pub fn from_name(name: &str) -> Option<Func> {
        Func::ALL.iter().copied().find(|f| f.name() == name)
    }

    pub fn arity(self) -> usize {
        match self {
            Func::Atan2 | Func::Pow | Func::Min | Func::Max => 2,
            _ => 1,
        }
    }

    /// Plain IEEE evaluation (no domain checks; NaN and ±inf flow through).
    /// `min`/`max` propagate NaN, unlike `f64::min`, so a bad argument is never hidden; `exp`
    /// is the engine's own ([`super::exp`]), the same bits as the tape's on every machine.
    pub fn apply(self, a: f64, b: f64) -> f64 {
        match self {
            Func::Exp => super::exp::exp(a),
            Func::Ln => a.ln(),
            Func::Log10 => a.log10(),
            Func::Log2 => a.log2(),
            Func::Sqrt => a.sqrt(),
            Func::Abs => a.abs(),
            Func::Sin => a.sin(),
            Func::Cos => a.cos(),
            Func::Tan => a.tan(),
            Func::Asin => a.asin(),
            Func::Acos => a.acos(),
            Func::Atan => a.atan(),
            Func::Atan2 => a.atan2(b),
            Func::Sinh => a.sinh(),
            Func::Cosh => a.cosh(),
            Func::Tanh => a.tanh(),
            Func::Pow => a.powf(b),
            Func::Min => {
                if a.is_nan() || b.is_nan() {
                    f64::NAN
                } else {
                    a.min(b)
                }
            }
            Func::Max => {
                if a.is_nan() || b.is_nan() {
                    f64::NAN
                } else {
                    a.max(b)
                }
            }
        }
    }
}

impl fmt::Display for Func {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(self.name())
    }
}

/// Builders for expressions made by code (derivatives, transforms, conditions).
/// They carry an empty span.
impl Expr {
    pub fn new(kind: ExprKind, span: Span) -> Expr {
        Expr { kind, span }
    }

    fn synth(kind: ExprKind) -> Expr {
        Expr::new(kind, Span::default())
    }

    /// A number; a negative value becomes `Neg(Number)` so the tree is what the parser
    /// would have produced from its printed form.
    pub fn number(value: f64) -> Expr {
        if value < 0.0 {
            Expr::negate(Expr::synth(ExprKind::Number(-value)))
        } else {
            Expr::synth(ExprKind::Number(value))
        }
    }

    pub fn name(name: &str) -> Expr {
        Expr::synth(ExprKind::Name(name.to_string()))
    }

    pub fn negate(inner: Expr) -> Expr {
        Expr::synth(ExprKind::Neg(Box::new(inner)))
    }

    pub fn binary_sum(a: Expr, op: AddOp, b: Expr) -> Expr {
        Expr::synth(ExprKind::Sum {
            first: Box::new(a),
            rest: vec![(op, b)],
        })
    }

    pub fn binary_product(a: Expr, op: MulOp, b: Expr) -> Expr {
        Expr::synth(ExprKind::Product {
            first: Box::new(a),
            rest: vec![(op, b)],
        })
    }

    pub fn pow(base: Expr, exponent: Expr) -> Expr {
        Expr::synth(ExprKind::Pow(Box::new(base), Box::new(exponent)))
    }

    pub fn call(func: Func, args: Vec<Expr>) -> Expr {
        Expr::synth(ExprKind::Call { func, args })
    }

    pub fn compare(op: CmpOp, a: Expr, b: Expr) -> Expr {
        Expr::synth(ExprKind::Compare(op, Box::new(a), Box::new(b)))
    }

    pub fn logic(op: LogicOp, terms: Vec<Expr>) -> Expr {
        Expr::synth(ExprKind::Logic { op, terms })
    }

    pub fn logical_not(inner: Expr) -> Expr {
        Expr::synth(ExprKind::Not(Box::new(inner)))
    }

    /// The names this expression uses (variables and parameters, not `pi`), each once,
    /// in order of first appearance, with the span of that first appearance.
    pub fn identifiers(&self) -> Vec<(String, Span)> {
        let mut out: Vec<(String, Span)> = Vec::new();
        self.visit(&mut |e| {
            if let ExprKind::Name(n) = &e.kind
                && n != "pi"
                && !out.iter().any(|(m, _)| m == n)
            {
                out.push((n.clone(), e.span));
            }
        });
        out
    }

    /// Whether the name occurs anywhere in the expression.
    pub fn mentions(&self, name: &str) -> bool {
        let mut found = false;
        self.visit(&mut |e| {
            if matches!(&e.kind, ExprKind::Name(n) if n == name) {
                found = true;
            }
        });
        found
    }

    /// Calls `f` on every node, parents before children, left to right.
    pub fn visit(&self, f: &mut dyn FnMut(&Expr)) {
        f(self);
        for child in self.children() {
            child.visit(f);
        }
    }

    /// The direct sub-expressions, left to right.
    pub fn children(&self) -> Vec<&Expr> {
        match &self.kind {
            ExprKind::Number(_) | ExprKind::Name(_) => Vec::new(),
            ExprKind::Neg(a) | ExprKind::Not(a) => vec![a],
            ExprKind::Sum { first, rest } => {
                let mut v: Vec<&Expr> = vec![first];
                v.extend(rest.iter().map(|(_, e)| e));
                v
            }
            ExprKind::Product { first, rest } => {
                let mut v: Vec<&Expr> = vec![first];
                v.extend(rest.iter().map(|(_, e)| e));
                v
            }
            ExprKind::Pow(a, b) | ExprKind::Compare(_, a, b) => vec![a, b],
            ExprKind::Call { args, .. } => args.iter().collect(),
            ExprKind::Logic { terms, .. } => terms.iter().collect(),
        }
    }

    /// True for comparisons and logical operators (the filter-only constructs).
    pub fn is_boolean(&self) -> bool {
        matches!(
            self.kind,
            ExprKind::Compare(..) | ExprKind::Logic { .. } | ExprKind::Not(_)
        )
    }

    /// Replaces every occurrence of the name `name` by `with`.
    pub fn substitute(&self, name: &str, with: &Expr) -> Expr {
        let kind = match &self.kind {
            ExprKind::Name(n) if n == name => return with.clone(),
            ExprKind::Number(_) | ExprKind::Name(_) => self.kind.clone(),
            ExprKind::Neg(a) => ExprKind::Neg(Box::new(a.substitute(name, with))),
            ExprKind::Not(a) => ExprKind::Not(Box::new(a.substitute(name, with))),
            ExprKind::Sum { first, rest } => ExprKind::Sum {
                first: Box::new(first.substitute(name, with)),
                rest: rest
                    .iter()
                    .map(|(op, e)| (*op, e.substitute(name, with)))
                    .collect(),
            },
            ExprKind::Product { first, rest } => ExprKind::Product {
                first: Box::new(first.substitute(name, with)),
                rest: rest
                    .iter()
                    .map(|(op, e)| (*op, e.substitute(name, with)))
                    .collect(),
            },
            ExprKind::Pow(a, b) => ExprKind::Pow(
                Box::new(a.substitute(name, with)),
                Box::new(b.substitute(name, with)),
            ),
            ExprKind::Compare(op, a, b) => ExprKind::Compare(
                *op,
                Box::new(a.substitute(name, with)),
                Box::new(b.substitute(name, with)),
            ),
            ExprKind::Call { func, args } => ExprKind::Call {
                func: *func,
                args: args.iter().map(|a| a.substitute(name, with)).collect(),
            },
            ExprKind::Logic { op, terms } => ExprKind::Logic {
                op: *op,
                terms: terms.iter().map(|t| t.substitute(name, with)).collect(),
            },
        };
        Expr::new(kind, self.span)
    }
}
