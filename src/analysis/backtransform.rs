//! Back-transform: the parameters θ from the fitted coefficients c, by solving
//! `gⱼ(θ) = cⱼ`.
//!
//! Symbolically where possible (SPEC §4): repeatedly take an equation in which exactly one
//! parameter is still unknown and isolate it by applying inverse operations (subtract the
//! other terms, divide by the other factors, take the root, `ln` for `exp`, `exp` for
//! `ln`, …). The parameters left over are solved together by Newton's method from their
//! start values. An even power (s ↦ 1/s²) is only locally invertible: the branch with the
//! sign of the start value is taken (positive without one), SPEC §13.

use nalgebra::{DMatrix, DVector};

use super::decompose::test_point;
use super::{BackMethod, BackStep, Linearization, Prepared};
use crate::expr::simplify::{Mode, Simplifier};
use crate::expr::sym::{Node, to_expr};
use crate::expr::{Func, eval_recursive};

/// The steps in solving order, and notes about branches.
pub(super) fn back_steps(
    m: &Prepared,
    basis: &[(Node, Node)],
    coefficient_names: &[String],
) -> (Vec<BackStep>, Vec<String>) {
    let mut s = Simplifier::new(Mode::Canonical);
    let mut solved: Vec<String> = Vec::new();
    let mut used = vec![false; basis.len()];
    let mut steps = Vec::new();
    let mut notes = Vec::new();
    loop {
        let mut progress = false;
        for (j, (_, g)) in basis.iter().enumerate() {
            if used[j] {
                continue;
            }
            let unknown: Vec<&String> = m
                .params
                .iter()
                .filter(|p| g.contains(p) && !solved.contains(p))
                .collect();
            let [target] = unknown.as_slice() else {
                continue;
            };
            let target = (*target).clone();
            let start = m
                .params
                .iter()
                .position(|p| *p == target)
                .and_then(|i| m.starts[i]);
            let mut branch = None;
            let rhs = Node::Sym(coefficient_names[j].clone());
            let Some(formula) = isolate(&mut s, g, &target, rhs, start, &mut branch) else {
                continue;
            };
            let formula = s.run(&formula);
            if let Some(b) = &branch {
                notes.push(b.clone());
            }
            steps.push(BackStep {
                parameter: target.clone(),
                method: BackMethod::Symbolic,
                formula: Some(to_expr(&formula)),
                branch,
                equation: Some(j),
            });
            solved.push(target);
            used[j] = true;
            progress = true;
        }
        if !progress {
            break;
        }
    }
    for p in &m.params {
        if !solved.contains(p) {
            steps.push(BackStep {
                parameter: p.clone(),
                method: BackMethod::Newton,
                formula: None,
                branch: None,
                equation: None,
            });
        }
    }
    if steps.iter().any(|st| st.method == BackMethod::Newton) {
        notes.push(format!(
            "{} solved numerically (Newton from the start values)",
            steps
                .iter()
                .filter(|st| st.method == BackMethod::Newton)
                .map(|st| st.parameter.as_str())
                .collect::<Vec<_>>()
                .join(", ")
        ));
    }
    (steps, notes)
}

/// Solves `lhs = rhs` for `target`, where `target` occurs in `lhs`; `None` when the
/// inverse operations run out (the target occurs twice in a sum, or under a function
/// without an inverse here).
fn isolate(
    s: &mut Simplifier,
    lhs: &Node,
    target: &str,
    rhs: Node,
    start: Option<f64>,
    branch: &mut Option<String>,
) -> Option<Node> {
    let minus = |s: &mut Simplifier, n: Node| s.mul(vec![Node::num(-1.0), n]);
    match lhs {
        Node::Sym(n) if n == target => Some(rhs),
        Node::Add(terms) => {
            let (with, without): (Vec<&Node>, Vec<&Node>) =
                terms.iter().partition(|t| t.contains(target));
            let [only] = with.as_slice() else {
                return None;
            };
            let mut parts = vec![rhs];
            for t in without {
                parts.push(minus(s, t.clone()));
            }
            let rhs = s.add(parts);
            isolate(s, only, target, rhs, start, branch)
        }
        Node::Mul(factors) => {
            let (with, without): (Vec<&Node>, Vec<&Node>) =
                factors.iter().partition(|f| f.contains(target));
            let [only] = with.as_slice() else {
                return None;
            };
            let mut parts = vec![rhs];
            for f in without {
                parts.push(s.pow(f.clone(), Node::num(-1.0)));
            }
            let rhs = s.mul(parts);
            isolate(s, only, target, rhs, start, branch)
        }
        Node::Pow(b, e) if b.contains(target) && !e.contains(target) => {
            let inv = s.pow(e.as_ref().clone(), Node::num(-1.0));
            let root = s.pow(rhs, inv);
            let even = e
                .as_num()
                .is_some_and(|k| k.fract() == 0.0 && (k / 2.0).fract() == 0.0);
            let rhs = if even {
                let negative = matches!(b.as_ref(), Node::Sym(n) if n == target)
                    && start.is_some_and(|v| v < 0.0);
                let power = to_expr(&Node::pow(Node::sym(target), e.as_ref().clone())).to_math();
                *branch = Some(format!(
                    "{target} ↦ {power} is only locally invertible: the {} branch is taken ({}); the other sign fits equally",
                    if negative { "negative" } else { "positive" },
                    if start.is_some() {
                        "the sign of the start value"
                    } else {
                        "no start value given"
                    }
                ));
                if negative { minus(s, root) } else { root }
            } else {
                root
            };
            isolate(s, b, target, rhs, start, branch)
        }
        Node::Pow(b, e) if e.contains(target) && !b.contains(target) => {
            let ln_rhs = s.call(Func::Ln, vec![rhs]);
            let ln_b = s.call(Func::Ln, vec![b.as_ref().clone()]);
            let inv = s.pow(ln_b, Node::num(-1.0));
            let rhs = s.mul(vec![ln_rhs, inv]);
            isolate(s, e, target, rhs, start, branch)
        }
        Node::Call(f, args) if args.len() == 1 => {
            let inverse = match f {
                Func::Exp => s.call(Func::Ln, vec![rhs]),
                Func::Ln => s.call(Func::Exp, vec![rhs]),
                Func::Log10 => s.pow(Node::num(10.0), rhs),
                Func::Log2 => s.pow(Node::num(2.0), rhs),
                _ => return None,
            };
            isolate(s, &args[0], target, inverse, start, branch)
        }
        _ => None,
    }
}

fn lookup<'a>(names: &'a [String], values: &'a [f64]) -> impl Fn(&str) -> Option<f64> + 'a {
    move |n: &str| names.iter().position(|p| p == n).map(|i| values[i])
}

impl Linearization {
    /// The coefficients `gⱼ(θ)`.
    pub fn coefficients(&self, theta: &[f64]) -> Result<Vec<f64>, String> {
        let l = lookup(&self.parameters, theta);
        self.basis
            .iter()
            .map(|b| eval_recursive(&b.g, &l))
            .collect()
    }

    /// `G = ∂g/∂θ` at θ: row j, column i is `∂gⱼ/∂θᵢ` (delta method:
    /// `Cov(θ) = G⁻¹·Cov(c)·G⁻ᵀ`, SPEC §13).
    pub fn coefficient_jacobian_at(&self, theta: &[f64]) -> Result<Vec<Vec<f64>>, String> {
        let l = lookup(&self.parameters, theta);
        self.coefficient_jacobian
            .iter()
            .map(|row| row.iter().map(|d| eval_recursive(d, &l)).collect())
            .collect()
    }

    /// θ from fitted coefficients `c`: the symbolic formulas in order, then Newton from
    /// the start values for the rest (test values where a start is missing).
    pub fn back_transform_values(&self, c: &[f64]) -> Result<Vec<f64>, String> {
        if c.len() != self.basis.len() {
            return Err(format!(
                "expected {} coefficients, got {}",
                self.basis.len(),
                c.len()
            ));
        }
        let mut names: Vec<String> = self.coefficient_names.clone();
        let mut values: Vec<f64> = c.to_vec();
        let mut theta: Vec<Option<f64>> = vec![None; self.parameters.len()];
        let index = |p: &str| self.parameters.iter().position(|q| q == p);
        for step in &self.back_transform {
            let Some(formula) = &step.formula else {
                continue;
            };
            let v = eval_recursive(formula, &lookup(&names, &values))
                .map_err(|e| format!("back-transform of {}: {e}", step.parameter))?;
            names.push(step.parameter.clone());
            values.push(v);
            if let Some(i) = index(&step.parameter) {
                theta[i] = Some(v);
            }
        }
        let unknown: Vec<usize> = (0..theta.len()).filter(|&i| theta[i].is_none()).collect();
        if !unknown.is_empty() {
            let used: Vec<usize> = self
                .back_transform
                .iter()
                .filter_map(|st| st.equation)
                .collect();
            let equations: Vec<usize> = (0..self.basis.len())
                .filter(|j| !used.contains(j))
                .collect();
            self.newton(c, &mut theta, &unknown, &equations)?;
        }
        theta
            .into_iter()
            .enumerate()
            .map(|(i, v)| v.ok_or_else(|| format!("{} was not recovered", self.parameters[i])))
            .collect()
    }

    /// Damped Newton on `gⱼ(θ) = cⱼ` (j in `equations`) for the `unknown` parameters.
    /// Stops when the residual is below 1e-13·(1 + max|c|) or the step below 1e-15 relative.
    fn newton(
        &self,
        c: &[f64],
        theta: &mut [Option<f64>],
        unknown: &[usize],
        equations: &[usize],
    ) -> Result<(), String> {
        if unknown.len() != equations.len() {
            return Err("internal error: Newton needs as many equations as unknowns".to_string());
        }
        let fallback = test_point(&self.starts);
        let mut x: Vec<f64> = theta
            .iter()
            .enumerate()
            .map(|(i, v)| v.unwrap_or(fallback[i]))
            .collect();
        let scale = 1.0 + equations.iter().map(|&j| c[j].abs()).fold(0.0, f64::max);
        let residual = |x: &[f64]| -> Result<DVector<f64>, String> {
            let l = lookup(&self.parameters, x);
            let mut r = DVector::zeros(equations.len());
            for (row, &j) in equations.iter().enumerate() {
                r[row] = eval_recursive(&self.basis[j].g, &l)? - c[j];
            }
            Ok(r)
        };
        let mut r = residual(&x)?;
        for _ in 0..100 {
            if r.amax() <= 1e-13 * scale {
                break;
            }
            let mut jac = DMatrix::zeros(equations.len(), unknown.len());
            {
                let l = lookup(&self.parameters, &x);
                for (row, &j) in equations.iter().enumerate() {
                    for (col, &i) in unknown.iter().enumerate() {
                        jac[(row, col)] = eval_recursive(&self.coefficient_jacobian[j][i], &l)?;
                    }
                }
            }
            let step = jac.lu().solve(&(-&r)).ok_or_else(|| {
                "Newton back-transform: singular coefficient Jacobian".to_string()
            })?;
            let mut lambda = 1.0;
            let mut accepted = false;
            while lambda > 1e-6 {
                let mut trial = x.clone();
                for (col, &i) in unknown.iter().enumerate() {
                    trial[i] += lambda * step[col];
                }
                if let Ok(rt) = residual(&trial)
                    && rt.iter().all(|v| v.is_finite())
                    && rt.norm() < r.norm()
                {
                    x = trial;
                    r = rt;
                    accepted = true;
                    break;
                }
                lambda /= 2.0;
            }
            let size = unknown.iter().map(|&i| x[i].abs()).fold(0.0, f64::max);
            if !accepted || lambda * step.amax() <= 1e-15 * (1.0 + size) {
                break;
            }
        }
        if r.amax() > 1e-9 * scale {
            return Err(format!(
                "Newton back-transform did not converge (residual {:.3e})",
                r.amax()
            ));
        }
        for &i in unknown {
            theta[i] = Some(x[i]);
        }
        Ok(())
    }
}
