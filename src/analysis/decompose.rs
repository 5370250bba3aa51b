//! The separation `T(f(x; θ), x) = h₀(x) + Σⱼ gⱼ(θ)·hⱼ(x)` for one transform.
//!
//! 1. Substitute the model into the transform and expand (recording the conditions of
//!    the domain-restricted identities).
//! 2. Split every term into a parameter part and a data part; a factor holding both is
//!    the reason the transform fails. Terms without parameters form h₀.
//! 3. Collect terms with the same data part; move constant factors from g into h.
//! 4. Check the hⱼ for linear independence numerically at sample points, merging
//!    dependent ones.
//! 5. k < p: not identifiable; k > p: tied coefficients; k = p: the Jacobian of θ ↦ g at
//!    the start (or a test point) must be non-singular.

use nalgebra::{DMatrix, DVector, SymmetricEigen};

use super::backtransform::back_steps;
use super::conditions::Conditions;
use super::{BasisTerm, Linearization, Outcome, Prepared};
use crate::expr::Expr;
use crate::expr::deriv::derivative_node;
use crate::expr::simplify::{Mode, Simplifier, simplify_node};
use crate::expr::sym::{Node, cmp_nodes, split_coefficient, to_expr, to_node};

/// Default test values for parameters without a start (distinct, positive, not special).
const TEST_VALUES: [f64; 8] = [1.37, 0.73, 1.91, 0.46, 2.63, 1.12, 0.38, 1.58];

pub(super) fn linearize(m: &Prepared, t: &Expr) -> Outcome {
    if m.params.is_empty() {
        return Outcome::NotLinearizable {
            reason: "the model has no free parameters to fit".to_string(),
        };
    }
    for (name, _) in t.identifiers() {
        if name != m.response && !m.predictors.contains(&name) {
            return Outcome::NotLinearizable {
                reason: format!(
                    "the transform uses `{name}`, which is neither the response `{}` nor a predictor",
                    m.response
                ),
            };
        }
    }
    if !t.mentions(&m.response) {
        return Outcome::NotLinearizable {
            reason: format!("the transform does not use the response `{}`", m.response),
        };
    }
    let identity = matches!(&t.kind, crate::expr::ExprKind::Name(n) if *n == m.response);
    let after = if identity {
        String::new()
    } else {
        format!(" after the transform {}", t.to_math())
    };

    let composed = to_node(&t.substitute(&m.response, &m.rhs));
    let mut collapser = Simplifier::new(Mode::Collapse);
    let collapsed = collapser.run(&composed);
    let mut expander = Simplifier::new(Mode::Expand);
    let expanded = expander.run(&collapsed);
    let terms = match &expanded {
        Node::Add(ts) => ts.clone(),
        other => vec![other.clone()],
    };

    let mut canon = Simplifier::new(Mode::Canonical);
    let mut offset_terms = Vec::new();
    let mut groups: Vec<(Node, Vec<Node>)> = Vec::new();
    for term in &terms {
        let (coef, factors) = split_coefficient(term);
        let mut g = vec![Node::num(coef)];
        let mut h = Vec::new();
        let mut has_param = false;
        for f in factors {
            let p = f.contains_any(&m.params);
            let d = f.contains_any(&m.predictors);
            match (p, d) {
                (true, true) => {
                    return Outcome::NotLinearizable {
                        reason: mixing_reason(term, &f, m, &after),
                    };
                }
                (true, false) => {
                    has_param = true;
                    g.push(f);
                }
                (false, true) => h.push(f),
                (false, false) => g.push(f),
            }
        }
        if !has_param {
            offset_terms.push(term.clone());
            continue;
        }
        let h = canon.mul(h);
        let g = canon.mul(g);
        match groups
            .iter_mut()
            .find(|(key, _)| cmp_nodes(key, &h) == std::cmp::Ordering::Equal)
        {
            Some((_, gs)) => gs.push(g),
            None => groups.push((h, vec![g])),
        }
    }

    let mut basis: Vec<(Node, Node)> = Vec::new();
    for (h, gs) in groups {
        let g = canon.add(gs);
        if g.is_num(0.0) {
            continue;
        }
        basis.push(normalize(&mut canon, h, g));
    }
    // Constant basis function first, then the canonical order of the data parts.
    basis.sort_by(|a, b| {
        let ka = !a.0.symbols().is_empty();
        let kb = !b.0.symbols().is_empty();
        let strip = |n: &Node| {
            let (_, f) = split_coefficient(n);
            match f.len() {
                1 => f[0].clone(),
                _ => Node::Mul(f),
            }
        };
        ka.cmp(&kb)
            .then_with(|| cmp_nodes(&strip(&a.0), &strip(&b.0)))
            .then_with(|| cmp_nodes(&a.0, &b.0))
    });

    let mut notes = Vec::new();
    match independence(&basis, &m.predictors) {
        Independence::Independent => {}
        Independence::Unchecked => notes.push(
            "the basis functions could not be evaluated at sample points, so their linear independence was not checked numerically".to_string(),
        ),
        Independence::Dependent(merges) => {
            basis = merge_dependent(&mut canon, basis, &merges);
            notes.push(
                "some basis functions were linear combinations of others and were merged"
                    .to_string(),
            );
        }
    }

    let p = m.params.len();
    let k = basis.len();
    let test_point = test_point(&m.starts);
    let jacobian: Vec<Vec<Node>> = basis
        .iter()
        .map(|(_, g)| m.params.iter().map(|q| derivative_node(g, q)).collect())
        .collect();
    let g_at = evaluate_matrix(&jacobian, &m.params, &test_point).map(|g| equilibrated(&g));

    if k < p {
        return not_identifiable(m, &basis, g_at.as_ref(), k, &after);
    }
    if k > p {
        let hs: Vec<String> = basis.iter().map(|(h, _)| to_expr(h).to_math()).collect();
        let gs: Vec<String> = basis.iter().map(|(_, g)| to_expr(g).to_math()).collect();
        return Outcome::NotLinearizable {
            reason: format!(
                "{k} separate data functions ({}) for {p} parameters{after}; their coefficients ({}) are tied to each other, which a linear fit cannot impose",
                hs.join(", "),
                gs.join(", ")
            ),
        };
    }
    match g_at {
        Some(g) if smallest_singular_ratio(&g) > 1e-10 => {}
        Some(g) => return singular(m, &basis, &g, &after),
        None => notes.push(format!(
            "the coefficient map could not be evaluated at the test point ({}); its invertibility was not checked",
            point_text(&m.params, &test_point)
        )),
    }

    let mut conditions = Conditions::new(&m.params);
    let transform_node = simplify_node(&to_node(t));
    conditions.add_domain(&transform_node, "the transform");
    for c in collapser.conditions.iter().chain(&expander.conditions) {
        conditions.add(c.node.clone(), format!("used {}", c.rule));
    }
    let offset = (!offset_terms.is_empty()).then(|| canon.add(offset_terms));
    if let Some(h0) = &offset {
        conditions.add_domain(h0, "the offset h₀");
    }
    for (j, (h, g)) in basis.iter().enumerate() {
        conditions.add_domain(h, &format!("basis function h{}", subscript(j + 1)));
        conditions.add_domain(g, &format!("coefficient g{}", subscript(j + 1)));
    }
    let slope = derivative_node(&transform_node, &m.response);
    let weight = simplify_node(&Node::pow(slope.clone(), Node::num(-2.0)));
    if !identity && !conditions.implies_positive(&weight, &m.response, &m.predictors) {
        conditions.add(
            Node::Cmp(
                crate::expr::CmpOp::Gt,
                Box::new(weight.clone()),
                Box::new(Node::num(0.0)),
            ),
            format!(
                "delta-method weights need ∂T/∂{} = {} finite and non-zero",
                m.response,
                to_expr(&slope).to_math()
            ),
        );
    }

    let coefficient_names = coefficient_names(k, &m.params, &m.predictors, &m.response);
    let (steps, branch_notes) = back_steps(m, &basis, &coefficient_names);
    notes.extend(branch_notes);

    let linear = identity
        && basis
            .iter()
            .all(|(_, g)| matches!(g, Node::Sym(s) if m.params.contains(s)));
    let lin = Linearization {
        transform: t.clone(),
        identity,
        response: m.response.clone(),
        predictors: m.predictors.clone(),
        parameters: m.params.clone(),
        starts: m.starts.clone(),
        transformed_model: to_expr(&expanded),
        offset: offset.as_ref().map(to_expr),
        basis: basis
            .iter()
            .map(|(h, g)| BasisTerm {
                h: to_expr(h),
                g: to_expr(g),
            })
            .collect(),
        coefficient_names,
        back_transform: steps,
        coefficient_jacobian: jacobian
            .iter()
            .map(|row| row.iter().map(to_expr).collect())
            .collect(),
        conditions: conditions.into_vec(),
        weight_factor: to_expr(&weight),
        notes,
    };
    if linear {
        Outcome::Linear(Box::new(lin))
    } else {
        Outcome::Linearizable(Box::new(lin))
    }
}

/// Moves constant factors of g into h: `h = x, g = 2·a` becomes `h = 2·x, g = a`.
fn normalize(canon: &mut Simplifier, h: Node, g: Node) -> (Node, Node) {
    let Node::Mul(factors) = &g else {
        return (h, g);
    };
    let (constants, rest): (Vec<Node>, Vec<Node>) = factors
        .iter()
        .cloned()
        .partition(|f| f.symbols().is_empty());
    if constants.is_empty() {
        return (h, g);
    }
    let mut hs = constants;
    hs.push(h);
    (canon.mul(hs), canon.mul(rest))
}

pub(super) fn subscript(n: usize) -> String {
    const DIGITS: [char; 10] = ['₀', '₁', '₂', '₃', '₄', '₅', '₆', '₇', '₈', '₉'];
    n.to_string()
        .chars()
        .map(|c| c.to_digit(10).map_or(c, |d| DIGITS[d as usize]))
        .collect()
}

/// `c₁ … c_k`, primed if a model name is already taken.
fn coefficient_names(
    k: usize,
    params: &[String],
    predictors: &[String],
    response: &str,
) -> Vec<String> {
    let taken = |n: &str| params.iter().chain(predictors).any(|p| p == n) || n == response;
    (1..=k)
        .map(|j| {
            let mut name = format!("c{}", subscript(j));
            while taken(&name) {
                name.push('ʹ');
            }
            name
        })
        .collect()
}

/// The term's mixing factor, described: which parameters, which variables, and how.
fn mixing_reason(term: &Node, factor: &Node, m: &Prepared, after: &str) -> String {
    let ps: Vec<&str> = m
        .params
        .iter()
        .filter(|p| factor.contains(p))
        .map(String::as_str)
        .collect();
    let xs: Vec<&str> = m
        .predictors
        .iter()
        .filter(|x| factor.contains(x))
        .map(String::as_str)
        .collect();
    let how = match factor {
        Node::Call(f, _) => format!("inside {}(…)", f.name()),
        Node::Pow(b, e) => match e.as_num() {
            Some(-1.0) => "under 1/(…)".to_string(),
            Some(k) if k < 0.0 => format!("under 1/(…)^{}", -k),
            Some(k) => format!("under the power ^{k}"),
            None if e.contains_any(&m.params) && b.contains_any(&m.predictors) => {
                format!("in the power {}", to_expr(factor).to_math())
            }
            None => "in a power with a data-dependent exponent".to_string(),
        },
        Node::Add(_) => "in a sum that does not separate".to_string(),
        _ => "in a factor that does not separate".to_string(),
    };
    format!(
        "term {} mixes {} {} with {} {} {how}{after}",
        to_expr(term).to_math(),
        if ps.len() == 1 {
            "parameter"
        } else {
            "parameters"
        },
        and_list(&ps),
        if xs.len() == 1 {
            "variable"
        } else {
            "variables"
        },
        and_list(&xs),
    )
}

pub(super) fn and_list(items: &[&str]) -> String {
    match items {
        [] => String::new(),
        [one] => one.to_string(),
        [init @ .., last] => format!("{} and {last}", init.join(", ")),
    }
}

/// Start values where given, test values elsewhere.
pub(super) fn test_point(starts: &[Option<f64>]) -> Vec<f64> {
    starts
        .iter()
        .enumerate()
        .map(|(i, s)| s.unwrap_or(TEST_VALUES[i % TEST_VALUES.len()]))
        .collect()
}

fn point_text(params: &[String], values: &[f64]) -> String {
    params
        .iter()
        .zip(values)
        .map(|(p, v)| format!("{p} = {v}"))
        .collect::<Vec<_>>()
        .join(", ")
}

fn evaluate_matrix(rows: &[Vec<Node>], params: &[String], at: &[f64]) -> Option<DMatrix<f64>> {
    let lookup = |n: &str| params.iter().position(|p| p == n).map(|i| at[i]);
    let k = rows.len();
    let p = params.len();
    let mut g = DMatrix::zeros(k, p);
    for (j, row) in rows.iter().enumerate() {
        for (i, d) in row.iter().enumerate() {
            let v = d.eval(&lookup)?;
            if !v.is_finite() {
                return None;
            }
            g[(j, i)] = v;
        }
    }
    Some(g)
}

/// `G` with every row, then every column, scaled to unit Euclidean norm (zero ones left as
/// they are). Diagonal scaling changes neither the rank nor the null-space pattern, but it
/// removes the units of θ and of the coefficients from the singular-value ratio: the map
/// (1/b1, 1/(b1·b2)) at b1 = 500, b2 = 1e-4 has entries from 4e-6 to 2e5 and a raw ratio of
/// 2e-11, although its determinant is 0.8; scaled, its ratio is 1.0.
fn equilibrated(g: &DMatrix<f64>) -> DMatrix<f64> {
    let mut g = g.clone();
    for mut row in g.row_iter_mut() {
        let norm = row.norm();
        if norm > 0.0 && norm.is_finite() {
            row /= norm;
        }
    }
    for mut col in g.column_iter_mut() {
        let norm = col.norm();
        if norm > 0.0 && norm.is_finite() {
            col /= norm;
        }
    }
    g
}

fn smallest_singular_ratio(g: &DMatrix<f64>) -> f64 {
    let sv = g.clone().svd(false, false).singular_values;
    let max = sv.max();
    if max == 0.0 { 0.0 } else { sv.min() / max }
}

/// The parameters with a component in the null space of `G` (the directions in θ that
/// leave every coefficient unchanged).
fn null_space_parameters(g: &DMatrix<f64>, params: &[String]) -> Vec<String> {
    let gtg = g.transpose() * g;
    let eig = SymmetricEigen::new(gtg);
    let max = eig.eigenvalues.iter().fold(0.0f64, |a, v| a.max(v.abs()));
    let mut involved = vec![false; params.len()];
    for (i, &lambda) in eig.eigenvalues.iter().enumerate() {
        if lambda.abs() <= 1e-12 * max.max(1e-300) {
            let v = eig.eigenvectors.column(i);
            for (j, c) in v.iter().enumerate() {
                if c.abs() > 1e-6 {
                    involved[j] = true;
                }
            }
        }
    }
    params
        .iter()
        .zip(involved)
        .filter(|(_, inv)| *inv)
        .map(|(p, _)| p.clone())
        .collect()
}

fn combinations(basis: &[(Node, Node)], involved: &[String]) -> Vec<String> {
    basis
        .iter()
        .filter(|(_, g)| g.contains_any(involved))
        .map(|(_, g)| to_expr(g).to_math())
        .collect()
}

fn not_identifiable(
    m: &Prepared,
    basis: &[(Node, Node)],
    g: Option<&DMatrix<f64>>,
    k: usize,
    after: &str,
) -> Outcome {
    let p = m.params.len();
    let mut involved = g.map_or_else(Vec::new, |g| null_space_parameters(g, &m.params));
    if involved.is_empty() {
        involved = m.params.clone();
    }
    let combos = combinations(basis, &involved);
    let names: Vec<&str> = involved.iter().map(String::as_str).collect();
    let reason = format!(
        "{} appear only in combination{after} ({}): {k} coefficient{} for {p} parameters",
        and_list(&names),
        combos.join(", "),
        if k == 1 { "" } else { "s" },
    );
    Outcome::NotIdentifiable {
        parameters: involved,
        combinations: combos,
        reason,
    }
}

fn singular(m: &Prepared, basis: &[(Node, Node)], g: &DMatrix<f64>, after: &str) -> Outcome {
    let involved = null_space_parameters(g, &m.params);
    let involved = if involved.is_empty() {
        m.params.clone()
    } else {
        involved
    };
    let combos = combinations(basis, &involved);
    let names: Vec<&str> = involved.iter().map(String::as_str).collect();
    let reason = format!(
        "{} cannot be separated{after}: the coefficient map ({}) has a singular Jacobian at {}",
        and_list(&names),
        combos.join(", "),
        point_text(&m.params, &test_point(&m.starts)),
    );
    Outcome::NotIdentifiable {
        parameters: involved,
        combinations: combos,
        reason,
    }
}

enum Independence {
    Independent,
    /// For each dependent basis function j: (j, [(i, αᵢ)]) with hⱼ = Σ αᵢ·hᵢ over
    /// independent i.
    Dependent(Vec<(usize, Vec<(usize, f64)>)>),
    Unchecked,
}

/// Evaluates the basis at sample points (deterministic pseudo-random predictor values in
/// a few ranges, keeping the points where every hⱼ is finite) and finds the dependent ones
/// by least squares against the earlier independent ones (relative residual < 1e-9).
fn independence(basis: &[(Node, Node)], predictors: &[String]) -> Independence {
    let k = basis.len();
    if k <= 1 {
        return Independence::Independent;
    }
    let need = (3 * k).max(12);
    let mut rows: Vec<Vec<f64>> = Vec::new();
    let mut seed = 0x2545_f491_4f6c_dd1du64;
    let mut next = move || {
        // xorshift64*: a fixed, reproducible sequence.
        seed ^= seed >> 12;
        seed ^= seed << 25;
        seed ^= seed >> 27;
        (seed.wrapping_mul(0x2545_f491_4f6c_dd1d) >> 11) as f64 / (1u64 << 53) as f64
    };
    for (lo, hi) in [(0.5, 3.0), (-0.9, 0.9), (-3.0, -0.5), (3.0, 40.0)] {
        for _ in 0..need * 2 {
            if rows.len() >= need {
                break;
            }
            let point: Vec<f64> = predictors.iter().map(|_| lo + (hi - lo) * next()).collect();
            let lookup = |n: &str| predictors.iter().position(|p| p == n).map(|i| point[i]);
            let row: Option<Vec<f64>> = basis
                .iter()
                .map(|(h, _)| h.eval(&lookup).filter(|v| v.is_finite()))
                .collect();
            if let Some(row) = row {
                rows.push(row);
            }
        }
    }
    if rows.len() < need {
        return Independence::Unchecked;
    }
    // Each column against the span of the independent ones before it, by modified
    // Gram–Schmidt with one re-orthogonalization ("twice is enough": Giraud, Langou &
    // Rozložník 2005, from memory) on an orthonormal basis Q of those columns, with
    // R = QᵀH: the least-squares residual is what is left after the projection, and the
    // coefficients solve R·α = Qᵀh. O(rows·k²) in all, where a fresh SVD per column cost
    // O(rows·k³) (seconds for the ~250 basis terms of an expanded square).
    let mut q: Vec<DVector<f64>> = Vec::new();
    let mut r_cols: Vec<Vec<f64>> = Vec::new();
    let mut kept: Vec<usize> = Vec::new();
    let mut merges = Vec::new();
    for j in 0..k {
        let col = DVector::from_iterator(rows.len(), rows.iter().map(|r| r[j]));
        let norm = col.norm();
        if norm == 0.0 {
            merges.push((j, Vec::new()));
            continue;
        }
        let mut rest = col.clone();
        let mut coef = vec![0.0; q.len()];
        for _ in 0..2 {
            for (c, qi) in coef.iter_mut().zip(&q) {
                let d = qi.dot(&rest);
                rest.axpy(-d, qi, 1.0);
                *c += d;
            }
        }
        let left = rest.norm();
        if !q.is_empty() && left <= 1e-9 * norm {
            // α from R·α = Qᵀh (R upper triangular: column m of R is r_cols[m]).
            let mut alpha = coef;
            for m in (0..alpha.len()).rev() {
                let diag = r_cols[m][m];
                let v = alpha[m] / diag;
                alpha[m] = v;
                for (a, r) in alpha.iter_mut().zip(&r_cols[m]).take(m) {
                    *a -= v * r;
                }
            }
            merges.push((j, kept.iter().copied().zip(alpha).collect()));
        } else {
            coef.push(left);
            r_cols.push(coef);
            q.push(rest / left);
            kept.push(j);
        }
    }
    if merges.is_empty() {
        Independence::Independent
    } else {
        Independence::Dependent(merges)
    }
}

/// hⱼ = Σ αᵢ·hᵢ, so gⱼ·hⱼ = Σ (αᵢ·gⱼ)·hᵢ: add αᵢ·gⱼ to gᵢ and drop term j.
fn merge_dependent(
    canon: &mut Simplifier,
    basis: Vec<(Node, Node)>,
    merges: &[(usize, Vec<(usize, f64)>)],
) -> Vec<(Node, Node)> {
    let mut gs: Vec<Node> = basis.iter().map(|(_, g)| g.clone()).collect();
    for (j, alphas) in merges {
        for &(i, alpha) in alphas {
            let extra = canon.mul(vec![Node::num(alpha), gs[*j].clone()]);
            gs[i] = canon.add(vec![gs[i].clone(), extra]);
        }
    }
    basis
        .into_iter()
        .zip(gs)
        .enumerate()
        .filter(|(j, _)| !merges.iter().any(|(d, _)| d == j))
        .map(|(_, ((h, _), g))| (h, g))
        .filter(|(_, g)| !g.is_num(0.0))
        .collect()
}
