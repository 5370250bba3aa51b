//! The plots of a run (SPEC §8): data with the fitted curve and its bands, residuals against
//! each predictor and against fitted values, the normal probability plot of the residuals,
//! and the parameter trend over the history.

use crate::estimate::TapeModel;
use crate::fit::covariance::NewReading;
use crate::history::HistoryLine;
use crate::model::Prepared;
use crate::recipe::Recipe;
use crate::report::plot::{
    self, AxisLabel, Band, FitPlot, NormalPlot, RenderedPlot, ResidualPlot, TrendPlot, TrendPoint,
};
use crate::report::{Plot, format as fmt};

use super::solve::Solved;

/// Samples of the fitted curve along the first predictor.
const CURVE_SAMPLES: usize = 200;

fn axis(recipe: &Recipe, var: &str) -> AxisLabel {
    let unit = recipe.data.unit(var);
    AxisLabel::new(var, if unit.is_empty() { None } else { Some(unit) })
}

fn push(
    out: &mut Vec<Plot>,
    warnings: &mut Vec<String>,
    name: &str,
    title: String,
    caption: Option<String>,
    r: Result<RenderedPlot, crate::report::ReportError>,
) {
    match r {
        Ok(p) => {
            let caption = match (caption, p.drawing_note()) {
                (Some(c), Some(n)) => Some(format!("{c}. {n}")),
                (c, n) => c.or(n),
            };
            out.push(Plot {
                name: name.into(),
                title,
                caption,
                svg: p.svg,
            });
        }
        Err(e) => warnings.push(format!("plot `{name}` could not be drawn: {e}")),
    }
}

/// All plots of a run; a plot that cannot be drawn becomes a warning.
pub fn plots(
    recipe: &Recipe,
    prep: &Prepared,
    solved: &Solved,
    history: &[HistoryLine],
    warnings: &mut Vec<String>,
) -> Vec<Plot> {
    let mut out = Vec::new();
    // The normal probability plot sorts every residual: it is drawn beside the others.
    let (normal, ()) = rayon::join(
        || normal_plot(prep, solved),
        || curve_and_residual_plots(recipe, prep, solved, &mut out, warnings),
    );
    push(
        &mut out,
        warnings,
        "normal-probability",
        "Normal probability plot of residuals".into(),
        None,
        normal,
    );
    if !history.is_empty() {
        for (i, name) in solved.names.iter().enumerate() {
            let mut runs: Vec<TrendPoint> = history
                .iter()
                .filter_map(|h| {
                    h.parameters.get(name).map(|p| TrendPoint {
                        label: h.time.get(5..16).map_or_else(
                            || h.run_id.chars().take(8).collect(),
                            |t| t.replace('T', " "),
                        ),
                        value: p.value,
                        std_error: p.std_error,
                        current: false,
                    })
                })
                .collect();
            runs.push(TrendPoint {
                label: "this run".into(),
                value: solved.estimate.params.get(i).copied().unwrap_or(f64::NAN),
                std_error: solved.uncertainty.std_errors.get(i).copied().flatten(),
                current: true,
            });
            let limits = recipe
                .acceptance
                .parameters
                .iter()
                .find(|(n, _)| n.value == *name)
                .map(|(_, c)| {
                    (
                        c.min.as_ref().map(|v| v.value),
                        c.max.as_ref().map(|v| v.value),
                    )
                });
            let input = TrendPlot {
                runs: &runs,
                y_axis: AxisLabel::new(
                    name.clone(),
                    prep.model
                        .parameters
                        .iter()
                        .find(|p| p.name == *name)
                        .and_then(|p| p.unit.as_deref()),
                ),
                min: limits.and_then(|l| l.0),
                max: limits.and_then(|l| l.1),
            };
            push(
                &mut out,
                warnings,
                &format!("trend-{}", slug(name)),
                format!("{name} over the history"),
                Some("value ± one standard error per run; limits of the recipe where given".into()),
                plot::trend_plot(&input),
            );
        }
    }
    out
}

/// The data with the fitted curve and its bands, and the residuals against each predictor and
/// against the fitted values.
fn curve_and_residual_plots(
    recipe: &Recipe,
    prep: &Prepared,
    solved: &Solved,
    out: &mut Vec<Plot>,
    warnings: &mut Vec<String>,
) {
    let y = prep.y();
    let x = prep.x();
    let resp = &prep.model.response;
    let level = fmt::percent(recipe.fit.confidence, 3);
    if let (Some(x0), 1) = (x.first(), x.len()) {
        let [lo, hi] = super::outputs::range(x0);
        let curve_x: Vec<f64> = (0..CURVE_SAMPLES)
            .map(|i| lo + (hi - lo) * i as f64 / (CURVE_SAMPLES - 1) as f64)
            .collect();
        let rhs = prep.model.rhs_with_fixed();
        let describe = |i: usize| format!("curve point {}", i + 1);
        let curve = TapeModel::new(
            &rhs,
            &prep.model.predictors,
            vec![&curve_x],
            &solved.names,
            &describe,
        )
        .ok()
        .and_then(|m| {
            Some((
                m.values(&solved.estimate.params).ok()?,
                m.jacobian_at(&solved.estimate.params).ok()?,
            ))
        });
        match curve {
            Some((curve_y, jac)) => {
                let mut conf = (Vec::new(), Vec::new());
                let mut pred = (Vec::new(), Vec::new());
                let weight_at = new_reading_weight(recipe, prep);
                let unweighted = prep.weights.is_none() || weight_at.is_some();
                for (i, fy) in curve_y.iter().enumerate() {
                    let g: Vec<f64> = (0..jac.ncols()).map(|j| jac[(i, j)]).collect();
                    let w0 = match &weight_at {
                        None => Some(1.0).filter(|_| prep.weights.is_none()),
                        Some(f) => f(curve_x[i], *fy),
                    };
                    let reading = w0.map(|weight| NewReading { weight, count: 1 });
                    if let Ok(b) = solved.uncertainty.band(&g, *fy, reading) {
                        conf.0.push(b.confidence.0);
                        conf.1.push(b.confidence.1);
                        if let Some(p) = b.prediction {
                            pred.0.push(p.0);
                            pred.1.push(p.1);
                        }
                    }
                }
                let conf_label = format!("{level} confidence band (pointwise)");
                let pred_label = format!("{level} prediction band, one new reading");
                let ok_conf = conf.0.len() == curve_x.len();
                let ok_pred = pred.0.len() == curve_x.len();
                let input = FitPlot {
                    x: x0,
                    y,
                    curve_x: &curve_x,
                    curve_y: &curve_y,
                    confidence: ok_conf.then_some(Band { lower: &conf.0, upper: &conf.1, label: &conf_label }),
                    prediction: ok_pred.then_some(Band { lower: &pred.0, upper: &pred.1, label: &pred_label }),
                    x_axis: axis(recipe, &prep.model.predictors[0]),
                    y_axis: axis(recipe, resp),
                };
                let mut caption = "bands are pointwise, from the linear approximation at the solution".to_string();
                if !unweighted {
                    caption.push_str("; no prediction band: the weights use columns other than the predictor and the response, so the variance of a new reading is not known");
                } else if prep.weights.is_some() {
                    caption.push_str("; the prediction band weights a new reading by the weights expression at the curve");
                }
                push(out, warnings, "fit", format!("Data and fitted curve of {resp}"), Some(caption), plot::fit_plot(&input));
            }
            None => warnings.push("the fitted curve could not be evaluated across the calibrated range; the data plot is left out".into()),
        }
    }
    let res = &solved.estimate.residuals;
    for (name, col) in prep.model.predictors.iter().zip(&x) {
        let input = ResidualPlot {
            x: col,
            residuals: res,
            x_axis: axis(recipe, name),
            y_axis: AxisLabel::new(
                format!("residual of {resp}"),
                Some(recipe.data.unit(resp)).filter(|u| !u.is_empty()),
            ),
        };
        push(
            out,
            warnings,
            &format!("residuals-{}", slug(name)),
            format!("Residuals against {name}"),
            None,
            plot::residual_plot(&input),
        );
    }
    let fitted = &solved.estimate.fitted;
    let input = ResidualPlot {
        x: fitted,
        residuals: res,
        x_axis: AxisLabel::new(
            format!("fitted {resp}"),
            Some(recipe.data.unit(resp)).filter(|u| !u.is_empty()),
        ),
        y_axis: AxisLabel::new(
            format!("residual of {resp}"),
            Some(recipe.data.unit(resp)).filter(|u| !u.is_empty()),
        ),
    };
    push(
        out,
        warnings,
        "residuals-fitted",
        "Residuals against fitted values".into(),
        None,
        plot::residual_plot(&input),
    );
}

/// The normal probability plot of the (Pearson) residuals.
fn normal_plot(
    prep: &Prepared,
    solved: &Solved,
) -> Result<RenderedPlot, crate::report::ReportError> {
    let res = &solved.estimate.residuals;
    let pearson: std::borrow::Cow<'_, [f64]> = match &prep.weights {
        Some(w) => res.iter().zip(w).map(|(e, w)| e * w.sqrt()).collect(),
        None => res.as_slice().into(),
    };
    let input = NormalPlot {
        residuals: &pearson,
        y_axis: AxisLabel::new(
            if prep.weights.is_some() {
                "Pearson residual √w·e"
            } else {
                "residual"
            },
            None,
        ),
    };
    plot::normal_probability_plot(&input)
}

/// The weight of a new reading at (x₀, ŷ₀), when the weights expression uses only the
/// predictor and the response (SPEC §13); `None` when it uses other columns.
#[allow(clippy::type_complexity)]
fn new_reading_weight<'a>(
    recipe: &'a Recipe,
    prep: &'a Prepared,
) -> Option<Box<dyn Fn(f64, f64) -> Option<f64> + 'a>> {
    let text = recipe.fit.weights.as_ref()?;
    let e = crate::expr::parse_expression(&text.value).ok()?;
    let x = prep.model.predictors.first()?.clone();
    let y = prep.model.response.clone();
    if e.identifiers()
        .iter()
        .any(|(n, _)| *n != x && *n != y && n != "pi")
    {
        return None;
    }
    Some(Box::new(move |x0: f64, y0: f64| {
        let l = |n: &str| {
            if n == x {
                Some(x0)
            } else if n == y {
                Some(y0)
            } else {
                None
            }
        };
        crate::expr::eval_recursive(&e, &l)
            .ok()
            .filter(|w| w.is_finite() && *w > 0.0)
    }))
}

/// A plot-file-safe form of a variable name.
fn slug(name: &str) -> String {
    let s: String = name
        .chars()
        .map(|c| {
            if c.is_ascii_alphanumeric() {
                c.to_ascii_lowercase()
            } else {
                '-'
            }
        })
        .collect();
    if s.trim_matches('-').is_empty() {
        "var".into()
    } else {
        s
    }
}
