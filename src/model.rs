//! The model of a recipe resolved against its data (SPEC §3, §13): the equation parsed, each
//! identifier bound to a parameter or a data column, the rows filtered by `where`, the
//! weights evaluated. What comes out is everything the analysis and the fit need.

use crate::data::{self, Dataset, Wanted};
use crate::error::{Error, Result, did_you_mean};
use crate::expr::{self, Expr, ExprError, Symbols, Tape};
use crate::recipe::{ColumnRef, Recipe, Text};

/// A parameter of the model, as declared (or given by a preset).
#[derive(Debug, Clone, serde::Serialize)]
pub struct Parameter {
    pub name: String,
    pub start: Option<f64>,
    pub min: Option<f64>,
    pub max: Option<f64>,
    pub fixed: Option<f64>,
    pub unit: Option<String>,
}

/// The model: `response = rhs(predictors; parameters)`.
#[derive(Debug, Clone)]
pub struct Model {
    /// The equation as written (or the preset's).
    pub equation: String,
    pub preset: Option<String>,
    pub response: String,
    pub rhs: Expr,
    /// Data variables on the right-hand side, in order of first appearance.
    pub predictors: Vec<String>,
    /// All declared parameters, in declaration order (fixed ones included).
    pub parameters: Vec<Parameter>,
}

impl Model {
    /// Parameters that are fitted (not fixed), in declaration order.
    pub fn free(&self) -> Vec<&Parameter> {
        self.parameters
            .iter()
            .filter(|p| p.fixed.is_none())
            .collect()
    }

    pub fn free_names(&self) -> Vec<String> {
        self.free().iter().map(|p| p.name.clone()).collect()
    }

    /// The right-hand side with fixed parameters replaced by their values.
    pub fn rhs_with_fixed(&self) -> Expr {
        let mut e = self.rhs.clone();
        for p in &self.parameters {
            if let Some(v) = p.fixed {
                let value = if v < 0.0 {
                    Expr::negate(Expr::number(-v))
                } else {
                    Expr::number(v)
                };
                e = e.substitute(&p.name, &value);
            }
        }
        e
    }
}

/// A recipe's model with its data, ready for analysis and fitting.
#[derive(Debug, Clone)]
pub struct Prepared {
    pub model: Model,
    /// Rows after the `where` filter; columns: the response, the predictors, then any other
    /// column the filter or the weights used.
    pub data: Dataset,
    /// Rows read before the filter.
    pub rows_read: usize,
    /// Rows removed by `where`.
    pub rows_filtered: usize,
    /// The weights, one per row, when `[fit] weights` is given.
    pub weights: Option<Vec<f64>>,
    pub warnings: Vec<String>,
}

impl Prepared {
    pub fn y(&self) -> &[f64] {
        self.data.column(&self.model.response).unwrap_or(&[])
    }

    /// Predictor columns in [`Model::predictors`] order.
    pub fn x(&self) -> Vec<&[f64]> {
        self.model
            .predictors
            .iter()
            .map(|p| self.data.column(p).unwrap_or(&[]))
            .collect()
    }
}

/// An [`ExprError`] inside a recipe string, as a user-facing error pointing at the token.
pub fn expr_error(recipe: &Recipe, text: &Text, e: ExprError, what: &str) -> Error {
    let span = text.inner_span(e.span.start..e.span.end);
    let err = recipe.error_at(span, format!("{what}: {}", e.message));
    match e.help {
        Some(h) => err.help(h),
        None => err.help("see docs/grammar.md for the expression grammar"),
    }
}

/// The equation of the recipe: typed, or the preset's.
fn equation_text(recipe: &Recipe) -> Result<(Text, Option<String>, Vec<Parameter>)> {
    if let Some(eq) = &recipe.model.equation {
        return Ok((eq.clone(), None, Vec::new()));
    }
    let Some(preset_name) = &recipe.model.preset else {
        return Err(recipe.error_at(
            recipe.model.span.clone(),
            "[model] has neither `equation` nor `preset`",
        ));
    };
    let preset = crate::analysis::presets::preset(&preset_name.value).ok_or_else(|| {
        let names: Vec<&str> = crate::analysis::presets::presets()
            .iter()
            .map(|p| p.key)
            .collect();
        let err = recipe.error_at(
            preset_name.span.clone(),
            format!("there is no preset `{}`", preset_name.value),
        );
        match did_you_mean(&preset_name.value, names.iter().copied()) {
            Some(s) => err.help(format!("{s} (`fitwright models` lists the presets)")),
            None => err.help("`fitwright models` lists the presets"),
        }
    })?;
    let text = Text {
        value: preset.equation.to_string(),
        span: preset_name.span.clone(),
        content_start: None,
    };
    let params = preset
        .parameters
        .iter()
        .map(|(name, start)| Parameter {
            name: name.to_string(),
            start: Some(*start),
            min: None,
            max: None,
            fixed: None,
            unit: None,
        })
        .collect();
    Ok((text, Some(preset.key.to_string()), params))
}

/// Parse the model and bind it to the recipe's parameters; data binding comes in [`prepare`].
pub fn parse_model(recipe: &Recipe) -> Result<(Model, Text)> {
    let (text, preset, preset_params) = equation_text(recipe)?;
    let eq = expr::parse_equation(&text.value)
        .map_err(|e| expr_error(recipe, &text, e, "in the equation"))?;
    // Parameters: the recipe's declarations; with a preset, the preset's list with the
    // recipe's settings laid over it.
    let mut parameters: Vec<Parameter> = preset_params;
    for p in &recipe.model.parameters {
        let declared = Parameter {
            name: p.name.value.clone(),
            start: p.start,
            min: p.min,
            max: p.max,
            fixed: p.fixed,
            unit: p.unit.clone(),
        };
        if preset.is_some() {
            match parameters.iter_mut().find(|q| q.name == declared.name) {
                Some(q) => {
                    q.fixed = declared.fixed;
                    q.start = if declared.fixed.is_some() {
                        None
                    } else {
                        declared.start.or(q.start)
                    };
                    q.min = declared.min;
                    q.max = declared.max;
                    q.unit = declared.unit;
                }
                None => {
                    let names: Vec<&str> = parameters.iter().map(|q| q.name.as_str()).collect();
                    let err = recipe.error_at(
                        p.name.span.clone(),
                        format!("the preset has no parameter `{}`", declared.name),
                    );
                    return Err(match did_you_mean(&declared.name, names.iter().copied()) {
                        Some(s) => err.help(s),
                        None => err.help(format!("its parameters are {}", names.join(", "))),
                    });
                }
            }
        } else {
            parameters.push(declared);
        }
    }
    if eq.response == "pi" || parameters.iter().any(|p| p.name == eq.response) {
        let span = text.inner_span(eq.response_span.start..eq.response_span.end);
        return Err(recipe
            .error_at(
                span,
                format!("the response `{}` must be a data variable", eq.response),
            )
            .help("write the measured quantity on the left of `=`, e.g. `R = R25 * exp(…)`"));
    }
    let mut predictors = Vec::new();
    for (name, span) in eq.rhs.identifiers() {
        if name == "pi" || parameters.iter().any(|p| p.name == name) || predictors.contains(&name) {
            continue;
        }
        if name == eq.response {
            let span = text.inner_span(span.start..span.end);
            return Err(recipe
                .error_at(span, format!("the response `{name}` also appears on the right-hand side"))
                .help("an equation gives the response as a function of predictors and parameters only"));
        }
        predictors.push(name);
    }
    for p in &parameters {
        if !eq.rhs.mentions(&p.name) {
            // A misspelt parameter shows up as an unused declaration plus an unknown name:
            // point at the misspelling, which is what the user must fix.
            let typo = eq.rhs.identifiers().into_iter().find(|(n, _)| {
                predictors.contains(n) && crate::error::closest(n, [p.name.as_str()]).is_some()
            });
            if let Some((name, at)) = typo {
                let span = text.inner_span(at.start..at.end);
                return Err(recipe
                    .error_at(span, format!("unknown name `{name}` in the equation"))
                    .help(format!(
                        "did you mean `{}`? it is declared in [model.parameters] but not used (names are case-sensitive)",
                        p.name
                    )));
            }
            let span = recipe
                .model
                .parameters
                .iter()
                .find(|q| q.name.value == p.name)
                .map(|q| q.name.span.clone())
                .unwrap_or_else(|| text.span.clone());
            return Err(recipe
                .error_at(
                    span,
                    format!(
                        "parameter `{}` is declared but the equation does not use it",
                        p.name
                    ),
                )
                .help("remove it from [model.parameters], or use it in the equation"));
        }
    }
    let model = Model {
        equation: text.value.clone(),
        preset,
        response: eq.response,
        rhs: eq.rhs,
        predictors,
        parameters,
    };
    Ok((model, text))
}

/// What [`prepare`] needs before the data are read: the model, the parsed filter and weights,
/// and the columns to load.
struct Plan<'r> {
    model: Model,
    eq_text: Text,
    filter: Option<(&'r Text, Expr)>,
    weights: Option<(&'r Text, Expr)>,
    wanted: Vec<Wanted>,
}

/// Parse the model, load the data it needs, filter the rows and evaluate the weights.
pub fn prepare(recipe: &Recipe) -> Result<Prepared> {
    let plan = plan(recipe)?;
    let ds = data::load(recipe, &plan.wanted)?;
    finish(recipe, &plan, ds)
}

/// The channels of a recipe with `[data] by`, prepared one by one.
#[derive(Debug, Clone)]
pub struct ChannelSet {
    /// Every file read (with its hash), whatever channel its rows belong to.
    pub files: Vec<data::LoadedFile>,
    /// Each channel in natural order of its `by` value, prepared or with its own error.
    pub channels: Vec<(String, Result<Prepared>)>,
}

/// [`prepare`] for a recipe with `[data] by`: the data are read once, leniently, and split
/// into channels ([`data::split_by`]); each channel is prepared on its own, so a channel with
/// bad cells, or too few rows after the filter, is an error for that channel only (with a
/// note naming the channel). Errors that concern every channel (the recipe, the model, a
/// file, a missing column) are returned as the outer error.
pub fn prepare_channels(recipe: &Recipe) -> Result<ChannelSet> {
    let plan = plan(recipe)?;
    let ds = data::load_lenient(recipe, &plan.wanted)?;
    check_variables(recipe, &plan, &ds)?;
    let channels = data::split_by(&ds)
        .into_iter()
        .map(|c| {
            let prepared = c.data.and_then(|d| finish(recipe, &plan, d)).map_err(|e| {
                e.note(format!(
                    "in channel `{}` of `by`; the other channels are not affected",
                    c.value
                ))
            });
            (c.value, prepared)
        })
        .collect();
    Ok(ChannelSet {
        files: ds.files,
        channels,
    })
}

fn plan(recipe: &Recipe) -> Result<Plan<'_>> {
    let (model, eq_text) = parse_model(recipe)?;
    let filter = match &recipe.data.where_ {
        Some(t) => Some((
            t,
            expr::parse_filter(&t.value).map_err(|e| expr_error(recipe, t, e, "in `where`"))?,
        )),
        None => None,
    };
    let weights = match &recipe.fit.weights {
        Some(t) => Some((
            t,
            expr::parse_expression(&t.value)
                .map_err(|e| expr_error(recipe, t, e, "in `weights`"))?,
        )),
        None => None,
    };
    // Columns: the recipe's map, then same-named columns for the model's variables and for the
    // identifiers of the filter and the weights.
    let mut wanted = data::mapped_columns(recipe);
    let want = |name: &str, optional: bool, wanted: &mut Vec<Wanted>| {
        if name != "pi"
            && !wanted.iter().any(|w| w.variable == name)
            && !model.parameters.iter().any(|p| p.name == name)
        {
            wanted.push(Wanted {
                variable: name.to_string(),
                column: ColumnRef::Name(name.to_string()),
                span: None,
                optional,
            });
        }
    };
    want(&model.response, true, &mut wanted);
    for p in &model.predictors {
        want(p, true, &mut wanted);
    }
    for (_, e) in filter.iter().chain(weights.iter()) {
        for (name, _) in e.identifiers() {
            want(&name, true, &mut wanted);
        }
    }
    // `[fit] groups` and `[data] by` are read by the data layer as labels (text allowed).
    Ok(Plan {
        model,
        eq_text,
        filter,
        weights,
        wanted,
    })
}

/// Every model variable must have been found in the data.
fn check_variables(recipe: &Recipe, plan: &Plan<'_>, ds: &Dataset) -> Result<()> {
    let (model, eq_text, wanted) = (&plan.model, &plan.eq_text, &plan.wanted);
    let columns_list = || ds_columns_hint(recipe, &ds_variables(wanted));
    // Every model variable must have been found.
    let params: Vec<&str> = model.parameters.iter().map(|p| p.name.as_str()).collect();
    for (name, span) in std::iter::once((model.response.clone(), None))
        .chain(model.predictors.iter().map(|p| (p.clone(), Some(()))))
    {
        if ds.column(&name).is_none() {
            let ident_span = if span.is_none() {
                Some(expr::Span::new(0, model.response.len()))
            } else {
                model
                    .rhs
                    .identifiers()
                    .into_iter()
                    .find(|(n, _)| *n == name)
                    .map(|(_, s)| s)
            };
            let at =
                ident_span.map_or(eq_text.span.clone(), |s| eq_text.inner_span(s.start..s.end));
            let mut candidates: Vec<&str> = params.clone();
            candidates.extend(ds.variables.iter().map(String::as_str));
            let err = recipe.error_at(at, format!("unknown name `{name}` in the equation"));
            let mut help = did_you_mean(&name, candidates.iter().copied()).unwrap_or_default();
            if !help.is_empty() {
                help.push(' ');
            }
            help.push_str(&format!(
                "parameters are {}; {}",
                if params.is_empty() {
                    "none".to_string()
                } else {
                    params
                        .iter()
                        .map(|p| format!("`{p}`"))
                        .collect::<Vec<_>>()
                        .join(", ")
                },
                columns_list()
            ));
            return Err(err.help(help));
        }
    }
    Ok(())
}

/// Filter the rows, evaluate the weights and check the row count.
fn finish(recipe: &Recipe, plan: &Plan<'_>, mut ds: Dataset) -> Result<Prepared> {
    check_variables(recipe, plan, &ds)?;
    let (model, filter, weights) = (plan.model.clone(), &plan.filter, &plan.weights);
    let rows_read = ds.len();
    let mut warnings = Vec::new();
    // The filter.
    let mut rows_filtered = 0;
    if let Some((t, e)) = &filter {
        let vars: Vec<&str> = ds.variables.iter().map(String::as_str).collect();
        expr::resolve(e, &vars, &[]).map_err(|err| expr_error(recipe, t, err, "in `where`"))?;
        let symbols = Symbols {
            variables: ds.variables.clone(),
            parameters: Vec::new(),
        };
        let tape =
            Tape::compile(e, &symbols).map_err(|err| expr_error(recipe, t, err, "in `where`"))?;
        let cols: Vec<&[f64]> = ds.columns.iter().map(Vec::as_slice).collect();
        let keep = tape.eval_mask(&cols, &[]).map_err(|err| {
            recipe
                .error_at(
                    t.span.clone(),
                    format!(
                        "`where` cannot be evaluated at {}: {} in `{}`",
                        ds.describe_row(err.row),
                        err.message,
                        err.subexpr
                    ),
                )
                .help("guard the filter against that value, or fix the data")
        })?;
        rows_filtered = keep.iter().filter(|k| !**k).count();
        ds.retain(&keep);
        if ds.is_empty() {
            return Err(recipe
                .error_at(
                    t.span.clone(),
                    format!("`where` removes every one of the {rows_read} rows"),
                )
                .help("check the filter's comparisons and the units of the columns"));
        }
    }
    // The weights.
    let weight_values = match &weights {
        None => None,
        Some((t, e)) => {
            let vars: Vec<&str> = ds.variables.iter().map(String::as_str).collect();
            expr::resolve(e, &vars, &[])
                .map_err(|err| expr_error(recipe, t, err, "in `weights`"))?;
            let symbols = Symbols {
                variables: ds.variables.clone(),
                parameters: Vec::new(),
            };
            let tape = Tape::compile(e, &symbols)
                .map_err(|err| expr_error(recipe, t, err, "in `weights`"))?;
            let cols: Vec<&[f64]> = ds.columns.iter().map(Vec::as_slice).collect();
            let mut w = vec![0.0; ds.len()];
            tape.eval(&cols, &[], &mut w).map_err(|err| {
                recipe
                    .error_at(
                        t.span.clone(),
                        format!(
                            "the weights cannot be evaluated at {}: {} in `{}`",
                            ds.describe_row(err.row),
                            err.message,
                            err.subexpr
                        ),
                    )
                    .help("weights must be finite and positive on every row")
            })?;
            let bad: Vec<usize> = w
                .iter()
                .enumerate()
                .filter(|(_, v)| !(v.is_finite() && **v > 0.0))
                .map(|(i, _)| i)
                .collect();
            if !bad.is_empty() {
                return Err(recipe
                    .error_at(t.span.clone(), format!("the weights are zero, negative or not finite at {}", ds.describe_rows(&bad, 6)))
                    .help("every weight must be a positive number (for 1/u² weights, every u must be non-zero)"));
            }
            Some(w)
        }
    };
    let free = model.free().len();
    if ds.len() < free + 1 {
        return Err(Error::input(format!(
            "the fit needs at least {} rows for {free} free parameter{}, but {} remain{}",
            free + 1,
            if free == 1 { "" } else { "s" },
            ds.len(),
            if rows_filtered > 0 {
                format!(" after `where` removed {rows_filtered}")
            } else {
                String::new()
            }
        ))
        .at(recipe.locate(recipe.data.files_span.clone()))
        .help("add measurements, loosen the filter, or fix some parameters"));
    }
    if !ds.skipped.is_empty() {
        warnings.push(format!(
            "{} row(s) skipped for empty, NaN or infinite cells (`missing = \"skip\"`)",
            ds.skipped.len()
        ));
    }
    // Subnormal numbers (0 < |v| < 2.2e-308) keep fewer significant digits, and their
    // squares and products underflow to 0: sums of squares, R² and scaling lose them.
    for var in std::iter::once(&model.response).chain(&model.predictors) {
        if ds
            .column(var)
            .is_some_and(|c| c.iter().any(|v| v.is_subnormal()))
        {
            warnings.push(format!(
                "column `{var}` holds values below {:.1e} in magnitude (subnormal), which keep \
                 fewer significant digits and whose squares underflow to 0; express it in a \
                 smaller unit, so that its numbers are larger",
                f64::MIN_POSITIVE
            ));
        }
    }
    Ok(Prepared {
        model,
        data: ds,
        rows_read,
        rows_filtered,
        weights: weight_values,
        warnings,
    })
}

fn ds_variables(wanted: &[Wanted]) -> Vec<String> {
    wanted.iter().map(|w| w.variable.clone()).collect()
}

fn ds_columns_hint(recipe: &Recipe, _vars: &[String]) -> String {
    let mapped: Vec<String> = recipe
        .data
        .columns
        .iter()
        .map(|(v, _)| format!("`{}`", v.value))
        .collect();
    if mapped.is_empty() {
        "map data columns to variables in [data] columns".to_string()
    } else {
        format!(
            "data variables are {} (add others in [data] columns)",
            mapped.join(", ")
        )
    }
}
