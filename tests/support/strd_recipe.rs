//! A NIST StRD problem as a fitwright recipe: the data written to a CSV file, the model
//! equation translated from the file's header into the expression grammar, the starting
//! values of the file in `[model.parameters]`, and the fit run through the product's own
//! pipeline (`pipeline::compute`: recipe check, data loading, analysis, fit, statistics).
//!
//! Source of every number used here: NIST ITL, Statistical Reference Datasets (StRD), the
//! `.dat` files read in place from the StRD folder (see `strd_data`).

use std::fmt::Write as _;
use std::path::PathBuf;

use fitwright::fit::strd::{StrdKind, StrdProblem};
use fitwright::model::Prepared;
use fitwright::pipeline::{self, RunSettings};
use fitwright::result::ResultDoc;

/// The model of a problem in the expression grammar (docs/grammar.md).
#[derive(Debug, Clone, PartialEq)]
pub struct Translated {
    /// The recipe's `equation`.
    pub equation: String,
    /// The response variable: `y`, or `ln_y` for a model stated for log[y] (Nelson).
    pub response: String,
}

/// Translate the model printed in a StRD header into the expression grammar, mechanically:
/// the error term `+ e` is dropped, `**` becomes `^`, the brackets of `exp[…]` and
/// `arctan[…]` become parentheses, `arctan` is `atan`, the definition line `pi = 3.14…` is
/// dropped (the grammar's `pi` is π to double precision), `log[y]` (natural log, as the
/// certified values show) becomes the response `ln_y`, and a polynomial abbreviated with
/// `+ ... +` (Filip) is written out term by term.
pub fn translate(p: &StrdProblem) -> Translated {
    let text: Vec<&str> = p
        .model_text
        .lines()
        .map(str::trim)
        .filter(|l| !l.starts_with("pi ="))
        .collect();
    let text = text.join(" ");
    let (lhs, rhs) = text
        .split_once('=')
        .unwrap_or_else(|| panic!("{}: no `=` in the model {text:?}", p.name));
    let rhs = rhs.trim();
    let rhs = rhs
        .strip_suffix('e')
        .map(str::trim_end)
        .and_then(|r| r.strip_suffix('+'))
        .unwrap_or(rhs);
    let mut rhs = rhs
        .replace("**", "^")
        .replace('[', "(")
        .replace(']', ")")
        .replace("arctan", "atan");
    rhs = expand_ellipsis(&rhs);
    let rhs: String = rhs.split_whitespace().collect::<Vec<_>>().join(" ");
    let response = match lhs.trim() {
        "y" => "y".to_string(),
        "log[y]" => "ln_y".to_string(),
        other => panic!("{}: unexpected left-hand side {other:?}", p.name),
    };
    Translated {
        equation: format!("{response} = {rhs}"),
        response,
    }
}

/// `B2*(x^2) + ... + B9*(x^9)` → the terms for 3 to 8 in between, following the pattern of
/// the term before the ellipsis (its index written twice: parameter and power).
fn expand_ellipsis(rhs: &str) -> String {
    let terms: Vec<&str> = rhs.split('+').map(str::trim).collect();
    let Some(k) = terms.iter().position(|t| *t == "...") else {
        return rhs.to_string();
    };
    let index = |t: &str| -> u32 {
        let digits: String = t
            .chars()
            .skip(1)
            .take_while(|c| c.is_ascii_digit())
            .collect();
        digits
            .parse()
            .unwrap_or_else(|_| panic!("no index in {t:?}"))
    };
    let (before, after) = (terms[k - 1], terms[k + 1]);
    let (from, to) = (index(before), index(after));
    let mut out: Vec<String> = terms[..k].iter().map(|t| t.to_string()).collect();
    for j in from + 1..to {
        out.push(before.replace(&from.to_string(), &j.to_string()));
    }
    out.extend(terms[k + 1..].iter().map(|t| t.to_string()));
    out.join(" + ")
}

/// A recipe written to a temporary folder.
pub struct RecipeCase {
    pub dir: tempfile::TempDir,
    pub recipe: PathBuf,
    pub translated: Translated,
}

/// Write `data.csv` and `recipe.toml` for a problem; `start` is 1 or 2 for nonlinear
/// problems (ignored for linear ones), with `method = "linear"` or `"nonlinear"` by the
/// problem's kind. `bounds` adds `min`/`max` to each parameter.
pub fn write_recipe(p: &StrdProblem, start: usize, bounds: Option<&[(f64, f64)]>) -> RecipeCase {
    let method = match p.kind {
        StrdKind::Linear => "linear",
        StrdKind::Nonlinear => "nonlinear",
    };
    write_recipe_with(p, Some(start), bounds, method)
}

/// [`write_recipe`] with the method given, and no start values when `start` is None.
pub fn write_recipe_with(
    p: &StrdProblem,
    start: Option<usize>,
    bounds: Option<&[(f64, f64)]>,
    method: &str,
) -> RecipeCase {
    let dir = tempfile::tempdir().expect("temporary folder");
    let translated = translate(p);
    let csv = dir.path().join("data.csv");
    std::fs::write(&csv, csv_text(p, &translated)).expect("write the data file");
    let mut toml = String::new();
    let _ = writeln!(toml, "name = \"nist-{}\"", p.name.to_lowercase());
    let starting = start.map_or("no start values".to_string(), |s| format!("start {s}"));
    let _ = writeln!(toml, "title = \"NIST StRD {} ({starting})\"", p.name);
    let _ = writeln!(toml, "\n[data]\nfiles = [\"data.csv\"]\n");
    let _ = writeln!(toml, "[model]\nequation = \"{}\"", translated.equation);
    let _ = writeln!(toml, "[model.parameters]");
    for (j, c) in p.parameters.iter().enumerate() {
        let mut keys = Vec::new();
        if let (Some(s), Some(k)) = (c.starts, start) {
            keys.push(format!("start = {:?}", s[k - 1]));
        }
        if let Some((lo, hi)) = bounds.and_then(|b| b.get(j)) {
            keys.push(format!("min = {lo:?}"));
            keys.push(format!("max = {hi:?}"));
        }
        let _ = writeln!(toml, "{} = {{ {} }}", c.name, keys.join(", "));
    }
    let _ = writeln!(toml, "\n[fit]\nmethod = \"{method}\"");
    let _ = writeln!(toml, "\n[report]\nformats = [\"json\"]");
    let recipe = dir.path().join("recipe.toml");
    std::fs::write(&recipe, toml).expect("write the recipe");
    RecipeCase {
        dir,
        recipe,
        translated,
    }
}

/// The data as CSV: header from the file's `Data:` line, every value written with Rust's
/// shortest round-trip formatting, so the CSV reader (correctly rounded `str::parse`) reads
/// back the very doubles the StRD decimal strings denote. For a model of log[y], a column
/// `ln_y` = ln(y) computed here is added: the grammar's response is a data variable.
fn csv_text(p: &StrdProblem, t: &Translated) -> String {
    let mut s = p.column_names.join(",");
    if t.response == "ln_y" {
        s.push_str(",ln_y");
    }
    s.push('\n');
    for i in 0..p.y.len() {
        let mut row = vec![format!("{:?}", p.y[i])];
        row.extend(p.x.iter().map(|c| format!("{:?}", c[i])));
        if t.response == "ln_y" {
            row.push(format!("{:?}", p.y[i].ln()));
        }
        s.push_str(&row.join(","));
        s.push('\n');
    }
    s
}

/// Run a written recipe through `pipeline::compute` (nothing is written: no history, no
/// report folder).
pub fn compute(case: &RecipeCase) -> fitwright::Result<ResultDoc> {
    let settings = RunSettings {
        out: Some(case.dir.path().join("reports")),
        formats: None,
        history: false,
        time: 0,
        time_from_epoch: true,
        verbose: false,
        history_before: None,
        as_found: false,
    };
    pipeline::compute(&case.recipe, &settings).map(|c| c.doc)
}

/// The recipe loaded and its data prepared, as `pipeline::compute` does before fitting.
pub fn prepare(case: &RecipeCase) -> Prepared {
    let recipe = fitwright::recipe::load(&case.recipe)
        .unwrap_or_else(|e| panic!("{}: {}", case.recipe.display(), e.message));
    fitwright::model::prepare(&recipe)
        .unwrap_or_else(|e| panic!("{}: {}", case.recipe.display(), e.message))
}

/// The result's parameters are the file's, in its order, and every row of the result holds
/// exactly the doubles of the StRD file (the CSV round trip loses nothing).
pub fn check_data_read_back(p: &StrdProblem, case: &RecipeCase, doc: &ResultDoc) {
    let names: Vec<&str> = doc.parameters.iter().map(|q| q.name.as_str()).collect();
    let certified: Vec<&str> = p.parameters.iter().map(|q| q.name.as_str()).collect();
    assert_eq!(names, certified, "{}: parameters", p.name);
    assert_eq!(doc.residuals.len(), p.y.len(), "{}: rows", p.name);
    let columns: Vec<usize> = doc
        .model
        .predictors
        .iter()
        .map(|v| {
            p.column_names
                .iter()
                .position(|c| c == v)
                .and_then(|k| k.checked_sub(1))
                .unwrap_or_else(|| panic!("{}: predictor {v} is not a data column", p.name))
        })
        .collect();
    for (i, row) in doc.residuals.iter().enumerate() {
        let y = if case.translated.response == "ln_y" {
            p.y[i].ln()
        } else {
            p.y[i]
        };
        assert_eq!(
            row.y.to_bits(),
            y.to_bits(),
            "{}: response, row {i}",
            p.name
        );
        for (k, &c) in columns.iter().enumerate() {
            assert_eq!(
                row.x[k].to_bits(),
                p.x[c][i].to_bits(),
                "{}: predictor {}, row {i}",
                p.name,
                doc.model.predictors[k]
            );
        }
    }
}
