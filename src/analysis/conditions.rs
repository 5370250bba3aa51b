//! Domain conditions of a linearization: what the data rows and the fitted parameters
//! must satisfy for the transform, the basis functions and the identities used to hold.

use serde::Serialize;

use crate::expr::simplify::{Sign, sign};
use crate::expr::sym::{Node, to_expr};
use crate::expr::{CmpOp, Expr, ExprError, Func, LogicOp, Symbols, Tape};

/// What a condition constrains.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum Scope {
    /// Only the response and predictors: checked against every row before the fit.
    Data,
    /// Only parameters: checked against the fitted values.
    Parameters,
    /// Both: checked against every row with the fitted values.
    Mixed,
}

/// A condition as a filter expression (e.g. `R > 0`) with why it is needed.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct Condition {
    pub expr: Expr,
    pub reason: String,
    pub scope: Scope,
}

/// Collects conditions, skipping duplicates and those provably true.
pub(crate) struct Conditions<'a> {
    params: &'a [String],
    pub list: Vec<(Node, Condition)>,
}

impl<'a> Conditions<'a> {
    pub fn new(params: &'a [String]) -> Conditions<'a> {
        Conditions {
            params,
            list: Vec::new(),
        }
    }

    pub fn add(&mut self, node: Node, reason: String) {
        if node.eval(&|_| None) == Some(1.0) {
            return;
        }
        if self.list.iter().any(|(n, _)| *n == node) {
            return;
        }
        let symbols = node.symbols();
        let has_params = symbols.iter().any(|s| self.params.contains(s));
        let has_data = symbols.iter().any(|s| !self.params.contains(s));
        let scope = match (has_params, has_data) {
            (true, true) => Scope::Mixed,
            (true, false) => Scope::Parameters,
            _ => Scope::Data,
        };
        let condition = Condition {
            expr: to_expr(&node),
            reason,
            scope,
        };
        self.list.push((node, condition));
    }

    /// The conditions under which every function in `n` is defined, with `place`
    /// (e.g. "the transform") naming where they come from.
    pub fn add_domain(&mut self, n: &Node, place: &str) {
        for (cond, sub) in domain(n) {
            let reason = format!("domain of {} in {place}", to_expr(&sub).to_math());
            self.add(cond, reason);
        }
    }

    /// Whether the data conditions collected so far already imply `n > 0`, judged on a
    /// grid of sample values of the response and predictors (−2 … 10, including 0 and ±1):
    /// at every grid point where they all hold, `n` is finite and positive. Used to leave
    /// out a weight condition that repeats the transform's domain (y² > 0 after y > 0).
    pub fn implies_positive(&self, n: &Node, response: &str, predictors: &[String]) -> bool {
        const GRID: [f64; 8] = [-2.0, -1.0, -0.5, 0.0, 0.5, 1.0, 2.0, 10.0];
        let mut names = vec![response.to_string()];
        names.extend(predictors.iter().take(3).cloned());
        let data: Vec<&Node> = self
            .list
            .iter()
            .filter(|(_, c)| c.scope == Scope::Data)
            .map(|(node, _)| node)
            .collect();
        let points = GRID.len().pow(names.len() as u32);
        for index in 0..points {
            let mut rest = index;
            let values: Vec<f64> = names
                .iter()
                .map(|_| {
                    let v = GRID[rest % GRID.len()];
                    rest /= GRID.len();
                    v
                })
                .collect();
            let lookup = |s: &str| names.iter().position(|m| m == s).map(|i| values[i]);
            let holds = data.iter().all(|c| c.eval(&lookup) == Some(1.0));
            if holds && !n.eval(&lookup).is_some_and(|v| v.is_finite() && v > 0.0) {
                return false;
            }
        }
        true
    }

    pub fn into_vec(self) -> Vec<Condition> {
        self.list.into_iter().map(|(_, c)| c).collect()
    }
}

fn cmp(op: CmpOp, a: &Node, b: f64) -> Node {
    Node::Cmp(op, Box::new(a.clone()), Box::new(Node::num(b)))
}

/// Each condition a function in `n` needs, with the sub-expression that needs it:
/// `ln`, `log10`, `log2` need a positive argument; a negative power a non-zero base;
/// a non-integer power a non-negative base (positive when the power is negative or not a
/// constant); `asin`, `acos` an argument in [-1, 1]. Provably true ones are skipped.
pub(crate) fn domain(n: &Node) -> Vec<(Node, Node)> {
    let mut out = Vec::new();
    collect_domain(n, &mut out);
    out
}

fn collect_domain(n: &Node, out: &mut Vec<(Node, Node)>) {
    for c in n.children() {
        collect_domain(c, out);
    }
    let mut push = |cond: Node| {
        if !out.iter().any(|(c, _)| *c == cond) {
            out.push((cond, n.clone()));
        }
    };
    match n {
        Node::Call(Func::Ln | Func::Log10 | Func::Log2, args) => {
            if let Some(u) = args.first()
                && sign(u) != Sign::Positive
            {
                push(cmp(CmpOp::Gt, u, 0.0));
            }
        }
        Node::Call(Func::Asin | Func::Acos, args) => {
            if let Some(u) = args.first() {
                push(Node::Logic(
                    LogicOp::And,
                    vec![cmp(CmpOp::Ge, u, -1.0), cmp(CmpOp::Le, u, 1.0)],
                ));
            }
        }
        Node::Pow(b, e) => {
            let s = sign(b);
            match e.as_num() {
                Some(k) if k.fract() == 0.0 && k < 0.0 => {
                    if s != Sign::Positive {
                        push(cmp(CmpOp::Ne, b, 0.0));
                    }
                }
                Some(k) if k.fract() == 0.0 => {}
                Some(k) if k > 0.0 => {
                    if s == Sign::Unknown {
                        push(cmp(CmpOp::Ge, b, 0.0));
                    }
                }
                _ => {
                    if s != Sign::Positive {
                        push(cmp(CmpOp::Gt, b, 0.0));
                    }
                }
            }
        }
        _ => {}
    }
}

/// The rows (0-based) where `condition` does not hold or cannot be evaluated.
/// `variables` names the `columns`; `parameters` and `values` give fitted parameters for
/// conditions that involve them (empty for data-only conditions).
pub fn offending_rows(
    condition: &Expr,
    variables: &[&str],
    columns: &[&[f64]],
    parameters: &[&str],
    values: &[f64],
) -> Result<Vec<usize>, ExprError> {
    let tape = Tape::compile(condition, &Symbols::new(variables, parameters))?;
    let rows = columns.first().map_or(0, |c| c.len());
    let mut out = vec![0.0; rows];
    tape.eval_unchecked(columns, values, &mut out)
        .map_err(|e| ExprError::new(condition.span, e.message))?;
    Ok(out
        .iter()
        .enumerate()
        .filter(|(_, v)| **v != 1.0)
        .map(|(i, _)| i)
        .collect())
}
