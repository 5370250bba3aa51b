//! Name resolution: every identifier must be a data variable, a parameter or `pi`, and
//! every declared parameter must be used.

use super::ast::{Expr, Func, Span};
use super::error::ExprError;

/// Checks the names of `expr` against the data variables and the declared parameters.
///
/// Errors: an unknown name (with the closest known name as a suggestion and the lists of
/// parameters and variables), a name declared as both, a reserved name (`pi` or a
/// function) used as a parameter, and a declared parameter the expression never uses.
pub fn resolve(expr: &Expr, variables: &[&str], parameters: &[&str]) -> Result<(), ExprError> {
    let used = expr.identifiers();
    let span_of = |name: &str| {
        used.iter()
            .find(|(n, _)| n == name)
            .map_or(expr.span, |(_, s)| *s)
    };
    for p in parameters {
        if *p == "pi" || Func::from_name(p).is_some() {
            return Err(ExprError::new(
                span_of(p),
                format!("`{p}` is reserved and cannot name a parameter"),
            )
            .with_help(
                "`pi` is the constant π and the function names are reserved; rename the parameter",
            ));
        }
        if variables.contains(p) {
            return Err(ExprError::new(
                span_of(p),
                format!("`{p}` is both a data variable and a parameter"),
            )
            .with_help("rename the parameter or the column mapping"));
        }
    }
    for (name, span) in &used {
        if variables.contains(&name.as_str()) || parameters.contains(&name.as_str()) {
            continue;
        }
        return Err(unknown_name(name, *span, variables, parameters));
    }
    for p in parameters {
        if !used.iter().any(|(n, _)| n == p) {
            return Err(ExprError::new(
                expr.span,
                format!("parameter `{p}` is declared but the expression does not use it"),
            )
            .with_help("remove it from [model.parameters] or use it in the equation"));
        }
    }
    Ok(())
}

/// "unknown name `B0`" with the closest known name and the lists of known names.
pub fn unknown_name(name: &str, span: Span, variables: &[&str], parameters: &[&str]) -> ExprError {
    let mut all: Vec<&str> = parameters.to_vec();
    all.extend_from_slice(variables);
    let mut help = match closest(name, &all) {
        Some(best) => format!("did you mean `{best}`? "),
        None => String::new(),
    };
    help.push_str(&format!(
        "parameters are {}; variables are {}",
        quoted_list(parameters),
        quoted_list(variables)
    ));
    ExprError::new(span, format!("unknown name `{name}`")).with_help(help)
}

fn quoted_list(names: &[&str]) -> String {
    if names.is_empty() {
        return "(none)".to_string();
    }
    names
        .iter()
        .map(|n| format!("`{n}`"))
        .collect::<Vec<_>>()
        .join(", ")
}

/// The candidate closest to `name`: an exact match ignoring case first, otherwise the
/// smallest Damerau–Levenshtein distance, if it is at most a third of the name length
/// (at least 1). Ties go to the earlier candidate.
pub fn closest<'a>(name: &str, candidates: &[&'a str]) -> Option<&'a str> {
    let lower = name.to_lowercase();
    if let Some(c) = candidates.iter().find(|c| c.to_lowercase() == lower) {
        return Some(c);
    }
    let limit = (name.chars().count() / 3).max(1);
    candidates
        .iter()
        .map(|c| (strsim::damerau_levenshtein(&lower, &c.to_lowercase()), *c))
        .filter(|(d, _)| *d <= limit)
        .min_by_key(|(d, _)| *d)
        .map(|(_, c)| c)
}
