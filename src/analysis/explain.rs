//! `fitwright explain`: the analysis as readable plain text (Unicode math).

use std::fmt::Write;

use super::decompose::subscript;
use super::{Analysis, BackMethod, Linearization, Outcome, Scope};

/// The analysis as plain text: the model, every transform tried with its result, and for
/// the chosen one the linear model, basis, coefficient map, back-transform, conditions
/// and weights.
pub fn explain_text(a: &Analysis) -> String {
    let mut out = String::new();
    let w = &mut out;
    let _ = writeln!(w, "Model       {}", a.equation);
    let params: Vec<String> = a
        .parameters
        .iter()
        .map(|p| match p.start {
            Some(s) => format!("{} (start {s})", p.name),
            None => p.name.clone(),
        })
        .collect();
    let _ = writeln!(w, "Parameters  {}", params.join(", "));
    if !a.fixed.is_empty() {
        let fixed: Vec<String> = a.fixed.iter().map(|(n, v)| format!("{n} = {v}")).collect();
        let _ = writeln!(
            w,
            "Fixed       {} (substituted as constants)",
            fixed.join(", ")
        );
    }
    let _ = writeln!(w, "Transform   {}", a.choice);
    let _ = writeln!(w);
    let _ = writeln!(w, "Transforms tried, in order:");
    let width = a
        .candidates
        .iter()
        .map(|c| c.transform.chars().count())
        .max()
        .unwrap_or(0);
    for (i, c) in a.candidates.iter().enumerate() {
        let mark = if c.outcome.linearization().is_some() {
            "✓"
        } else {
            "✗"
        };
        let detail = match &c.outcome {
            Outcome::NotLinearizable { reason } | Outcome::NotIdentifiable { reason, .. } => {
                format!("{}: {reason}", c.outcome.label())
            }
            other => other.label().to_string(),
        };
        let chosen = if a.chosen == Some(i) {
            "   ← chosen"
        } else {
            ""
        };
        let name = if c.identity {
            format!("{} (none)", c.transform)
        } else {
            c.transform.clone()
        };
        let _ = writeln!(
            w,
            "  {mark} {name:<width$}  {detail}{chosen}",
            width = width + 7
        );
    }
    let _ = writeln!(w);
    match &a.outcome {
        Outcome::Linear(l) => {
            let _ = writeln!(
                w,
                "Result: linear in its parameters — an ordinary linear least-squares fit, no transform."
            );
            write_linearization(w, l);
        }
        Outcome::Linearizable(l) => {
            let working = a.working();
            let how = if l.identity {
                "with no transform (the coefficients are functions of the parameters)".to_string()
            } else {
                format!("with the transform {}", l.transform.to_math())
            };
            let _ = writeln!(w, "Result: linearizable {how}.");
            if working.len() > 1 {
                let others: Vec<&str> = working.iter().map(|c| c.transform.as_str()).collect();
                let _ = writeln!(
                    w,
                    "        Transforms that work: {} (the first is used).",
                    others.join(", ")
                );
            }
            write_linearization(w, l);
        }
        Outcome::NotIdentifiable { reason, .. } => {
            let _ = writeln!(w, "Result: not identifiable — {reason}.");
            let _ = writeln!(
                w,
                "        No fit can estimate these parameters separately; reparameterize the model or fix some of them."
            );
        }
        Outcome::NotLinearizable { reason } => {
            let _ = writeln!(w, "Result: not linearizable — {reason}.");
            let missing: Vec<&str> = a
                .parameters
                .iter()
                .filter(|p| p.start.is_none())
                .map(|p| p.name.as_str())
                .collect();
            if missing.is_empty() {
                let _ = writeln!(
                    w,
                    "        The fit is nonlinear (Levenberg–Marquardt) from the start values."
                );
            } else {
                let _ = writeln!(
                    w,
                    "        The fit is nonlinear (Levenberg–Marquardt) and needs start values for {}.",
                    missing.join(", ")
                );
            }
        }
    }
    out
}

fn write_linearization(w: &mut String, l: &Linearization) {
    let t = l.transform.to_math();
    let lhs = match &l.offset {
        Some(_) => format!("{t} − h₀"),
        None => t.clone(),
    };
    let rhs: Vec<String> = l
        .coefficient_names
        .iter()
        .enumerate()
        .map(|(j, c)| format!("{c}·h{}", subscript(j + 1)))
        .collect();
    let _ = writeln!(w);
    let _ = writeln!(w, "Linear model fitted:  {lhs} = {}", rhs.join(" + "));
    if let Some(h0) = &l.offset {
        let _ = writeln!(w, "  offset  h₀ = {}", h0.to_math());
    }
    let hs: Vec<String> = l
        .basis
        .iter()
        .enumerate()
        .map(|(j, b)| format!("h{} = {}", subscript(j + 1), b.h.to_math()))
        .collect();
    let width = hs.iter().map(|h| h.chars().count()).max().unwrap_or(0);
    let _ = writeln!(w, "Basis functions and coefficient map:");
    for (j, b) in l.basis.iter().enumerate() {
        let _ = writeln!(
            w,
            "  {:<width$}    {} = {}",
            hs[j],
            l.coefficient_names[j],
            b.g.to_math()
        );
    }
    let _ = writeln!(w, "Back-transform, in order:");
    for step in &l.back_transform {
        match (&step.method, &step.formula) {
            (BackMethod::Symbolic, Some(f)) => {
                let _ = writeln!(w, "  {} = {}", step.parameter, f.to_math());
            }
            _ => {
                let _ = writeln!(
                    w,
                    "  {} by Newton's method from its start value",
                    step.parameter
                );
            }
        }
    }
    let _ = writeln!(w, "Conditions:");
    if l.conditions.is_empty() {
        let _ = writeln!(w, "  (none)");
    }
    for (scope, label) in [
        (Scope::Data, "on every data row"),
        (Scope::Parameters, "on the fitted parameters"),
        (Scope::Mixed, "on every row, with the fitted parameters"),
    ] {
        for c in l.conditions.iter().filter(|c| c.scope == scope) {
            let _ = writeln!(w, "  {}  — {label}; {}", c.expr.to_math(), c.reason);
        }
    }
    if l.identity {
        let _ = writeln!(w, "Weights: as given (no transform).");
    } else {
        let _ = writeln!(
            w,
            "Weights of the transformed fit (delta method): w′ = w·{}   [= w/(∂T/∂{})²]",
            l.weight_factor.to_math(),
            l.response
        );
    }
    if !l.notes.is_empty() {
        let _ = writeln!(w, "Notes:");
        for n in &l.notes {
            let _ = writeln!(w, "  - {n}");
        }
    }
}
