//! The metrology stage of a run (SPEC §14), between judging and writing: the curve of the new
//! fit and of the last run whose criteria were met, the §14 criteria rows, the as-found and
//! as-left judgements, and the read-offs with their budgets. The computations are in
//! [`crate::metrology`]; this module only gathers their inputs from the run and puts their
//! outputs into `result.json` and the report context.

use crate::acceptance::{self, CriterionRow, Verdict};
use crate::error::{Error, Result, did_you_mean};
use crate::history::HistoryLine;
use crate::metrology::as_found::{self, CalPoint, Deviations};
use crate::metrology::criteria::{self, Inputs};
use crate::metrology::read_off::{self, Budget, ReadOff};
use crate::metrology::{Curve, CurveSpec, Date, ModelCurve, report_id};
use crate::model::{Model, Prepared};
use crate::recipe::Recipe;
use crate::result::{AsFoundDoc, MetrologyDoc, ResultDoc, ToleranceDoc};

use super::solve::Solved;

/// Number of points across the calibrated range at which read-offs are tabulated.
pub const READ_OFF_POINTS: usize = 5;

/// What the metrology stage computed for one run.
pub struct Metrology {
    pub curve: Option<ModelCurve>,
    /// Why there is no curve.
    pub no_curve: String,
    /// The last run whose criteria were met: its curve, run id and time.
    pub previous: Option<(ModelCurve, String, String)>,
    pub budget: Budget,
    /// The calibration points, built only when a tolerance, back-calculation or as-found check
    /// judges them (empty otherwise).
    pub points: Vec<CalPoint>,
    /// Rows appended after those of `acceptance::judge`.
    pub rows: Vec<CriterionRow>,
    pub as_found: Option<AsFoundDoc>,
    pub as_left: Option<Deviations>,
    pub read_offs: Vec<ReadOff>,
    pub read_off_note: Option<String>,
}

/// Every `applies_to` of the recipe must name the response or a predictor of the model.
pub fn check_variables(recipe: &Recipe, model: &Model) -> Result<()> {
    let mut known: Vec<&str> = vec![model.response.as_str()];
    known.extend(model.predictors.iter().map(String::as_str));
    for (name, span) in recipe.metrology.variables() {
        if !known.contains(&name) {
            let err = recipe.error_at(
                span,
                format!(
                    "`applies_to = \"{name}\"` names no variable of the model (its variables are {})",
                    known.iter().map(|k| format!("`{k}`")).collect::<Vec<_>>().join(", ")
                ),
            );
            return Err(match did_you_mean(name, known.iter().copied()) {
                Some(m) => err.help(m),
                None => err.help("an uncertainty is in the unit of the response or of the predictor: name one of them"),
            });
        }
    }
    Ok(())
}

/// `<file name>:<line>` of a row.
fn short_origin(prep: &Prepared, row: usize) -> String {
    let data = &prep.data;
    match data
        .origins
        .get(row)
        .and_then(|o| Some((data.files.get(o.file)?, o.line)))
    {
        Some((f, line)) => format!(
            "{}:{line}",
            f.path.file_name().map_or_else(
                || f.path.display().to_string(),
                |n| n.to_string_lossy().into_owned()
            )
        ),
        None => format!("row {}", row + 1),
    }
}

fn new_curve(
    recipe: &Recipe,
    prep: &Prepared,
    solved: &Solved,
) -> std::result::Result<ModelCurve, String> {
    let [predictor] = prep.model.predictors.as_slice() else {
        return Err(format!(
            "read-offs, tolerances in predictor units and curve comparisons need a model of one predictor; this one has {}",
            prep.model.predictors.len()
        ));
    };
    let x = prep.data.column(predictor).unwrap_or(&[]);
    let [lo, hi] = super::outputs::range(x);
    ModelCurve::new(CurveSpec {
        response: &prep.model.response,
        predictor,
        rhs: &prep.model.rhs_with_fixed(),
        names: &solved.names,
        values: &solved.estimate.params,
        uncertainty: Some(solved.uncertainty.clone()),
        weights: recipe.fit.weights.as_ref().map(|w| w.value.as_str()),
        range: (lo, hi),
    })
}

/// The curve of a history line: the recipe's equation with the line's parameter values.
fn history_curve(
    prep: &Prepared,
    line: &HistoryLine,
    range: (f64, f64),
) -> std::result::Result<ModelCurve, String> {
    let [predictor] = prep.model.predictors.as_slice() else {
        return Err("the model has more than one predictor".into());
    };
    let names: Vec<String> = prep
        .model
        .parameters
        .iter()
        .map(|p| p.name.clone())
        .collect();
    let values: Vec<f64> = names
        .iter()
        .map(|n| {
            line.parameters.get(n).map(|p| p.value).ok_or_else(|| {
                format!(
                    "run {} has no value of `{n}` (was the model changed since?)",
                    line.run_id
                )
            })
        })
        .collect::<std::result::Result<_, _>>()?;
    ModelCurve::new(CurveSpec {
        response: &prep.model.response,
        predictor,
        rhs: &prep.model.rhs,
        names: &names,
        values: &values,
        uncertainty: None,
        weights: None,
        range,
    })
}

/// Run the metrology stage. `as_found` is `run --as-found`; `history` is the recipe's history
/// as of this run.
pub fn evaluate(
    recipe: &Recipe,
    prep: &Prepared,
    solved: &Solved,
    history: &[HistoryLine],
    as_found: bool,
    history_path: &std::path::Path,
) -> Result<Metrology> {
    check_variables(recipe, &prep.model)?;
    let spec = &recipe.metrology;
    let acc = &recipe.acceptance;
    let budget = spec.budget();
    let (curve, no_curve) = match new_curve(recipe, prep, solved) {
        Ok(c) => (Some(c), String::new()),
        Err(why) => (None, why),
    };
    // The points are judged only by a tolerance, back-calculation or an as-found check;
    // building them (each with its file:line label) for every row of a large data set
    // otherwise costs a string per row for nothing.
    let needs_points =
        as_found || spec.decision.tolerance.is_some() || acc.back_calculated.is_some();
    let points: Vec<CalPoint> = match prep.model.predictors.as_slice() {
        [p] if needs_points => {
            let x = prep.data.column(p).unwrap_or(&[]);
            x.iter()
                .zip(prep.y())
                .enumerate()
                .map(|(i, (x, y))| CalPoint {
                    origin: short_origin(prep, i),
                    x: *x,
                    y: *y,
                })
                .collect()
        }
        _ => Vec::new(),
    };
    let last = crate::history::last_accepted(history, None);
    let previous = match (&curve, last) {
        (Some(c), Some(line)) => match history_curve(prep, line, c.range()) {
            Ok(old) => Some((old, line.run_id.clone(), line.time.clone())),
            Err(why) if as_found || acc.drift_curve.is_some() => {
                return Err(Error::input(format!("the curve of the last run whose criteria were met cannot be rebuilt: {why}"))
                    .in_file(history_path)
                    .help("as-found and curve drift compare with that run; keep the model's parameters unchanged, or run once without them"));
            }
            Err(_) => None,
        },
        _ => None,
    };
    let response_unit = recipe.data.unit(&prep.model.response).to_string();
    let predictor_unit = prep
        .model
        .predictors
        .first()
        .map_or(String::new(), |p| recipe.data.unit(p).to_string());
    let value = |at: &[(String, f64)]| super::outputs::value_at(prep, solved, at);
    let inputs = Inputs {
        curve: curve.as_ref().map(|c| c as &dyn Curve),
        no_curve: &no_curve,
        value_at: &value,
        budget: &budget,
        rule: spec.decision.rule,
        response_unit: &response_unit,
        predictor_unit: &predictor_unit,
        points: &points,
        previous: previous
            .as_ref()
            .map(|(c, id, _)| (c as &dyn Curve, id.as_str())),
    };
    let mut rows = criteria::point_rows(&acc.points, &inputs);
    if let Some(rule) = &acc.back_calculated {
        rows.push(criteria::back_calculated_row(&rule.value, &inputs));
    }
    if let Some(d) = &acc.drift_curve {
        rows.push(criteria::drift_curve_row(d, &inputs));
    }
    rows.extend(criteria::condition_rows(
        &spec
            .conditions
            .iter()
            .map(|c| c.condition.clone())
            .collect::<Vec<_>>(),
    ));
    let unit_of = |axis| match axis {
        crate::metrology::Axis::Response => response_unit.as_str(),
        crate::metrology::Axis::Predictor => predictor_unit.as_str(),
    };
    let as_left = match (&spec.decision.tolerance, &curve) {
        (Some((tol, axis)), Some(c)) => {
            let d =
                as_found::deviations(c, &points, *tol, *axis, spec.decision.rule, &budget, true);
            rows.push(criteria::as_left_row(&d, unit_of(*axis)));
            Some(d)
        }
        _ => None,
    };
    let as_found_doc = if as_found {
        let Some((tol, axis)) = &spec.decision.tolerance else {
            let message = "`--as-found` judges each point against `[decision] tolerance`, which this recipe does not give";
            let err = if spec.decision.span.is_empty() {
                Error::input(message).in_file(&recipe.source.path)
            } else {
                recipe.error_at(spec.decision.span.clone(), message)
            };
            return Err(err
                .help("add `tolerance = …` (response units) or `tolerance_x = …` (predictor units) to [decision]: the tolerance of every calibration point"));
        };
        let Some((old, run, time)) = &previous else {
            return Err(Error::input(match &curve {
                Some(_) => "`--as-found` needs an earlier run whose criteria were met in the history, and there is none".to_string(),
                None => format!("`--as-found` needs the curve of one predictor: {no_curve}"),
            })
            .in_file(history_path)
            .help("the first calibration of an instrument has no as-found state: run without `--as-found`"));
        };
        let d = as_found::deviations(
            old,
            &points,
            *tol,
            *axis,
            spec.decision.rule,
            &budget,
            false,
        );
        let n = d.points.len();
        Some(AsFoundDoc {
            against_run: run.clone(),
            against_time: time.clone(),
            within_tolerance: d.all_pass(),
            summary: format!("{} of {n} points pass ({})", d.passed(), d.tally()),
            deviations: d,
        })
    } else {
        None
    };
    let (read_offs, read_off_note) = match &curve {
        Some(c) => read_offs_across(c, &budget),
        None => (Vec::new(), Some(no_curve.clone())),
    };
    Ok(Metrology {
        curve,
        no_curve,
        previous,
        budget,
        points,
        rows,
        as_found: as_found_doc,
        as_left,
        read_offs,
        read_off_note,
    })
}

/// Inverse read-offs (the predictor from one new reading) at [`READ_OFF_POINTS`] points
/// evenly across the calibrated range.
fn read_offs_across(c: &ModelCurve, budget: &Budget) -> (Vec<ReadOff>, Option<String>) {
    let (lo, hi) = c.range();
    let mut out = Vec::new();
    let mut note = None;
    for i in 0..READ_OFF_POINTS {
        let x = lo + (hi - lo) * i as f64 / (READ_OFF_POINTS - 1) as f64;
        let r = c
            .value(x)
            .and_then(|y| read_off::inverse_at(c, y, x, 1, budget));
        match r {
            Ok(r) => out.push(r),
            Err(why) => {
                note.get_or_insert(why);
            }
        }
    }
    (out, note)
}

impl Metrology {
    /// The rows of `acceptance::judge` followed by these, and the verdict of them all.
    pub fn judge(
        &self,
        recipe: &Recipe,
        rows: Vec<CriterionRow>,
        converged: bool,
    ) -> (Vec<CriterionRow>, Verdict) {
        let mut all = rows;
        all.extend(self.rows.iter().cloned());
        let has_criteria = !recipe.acceptance.is_empty() || !self.rows.is_empty();
        let verdict = acceptance::verdict(has_criteria, converged, &all);
        (all, verdict)
    }

    /// The `metrology` and `as_found` blocks of `result.json`.
    pub fn fill_result(&self, recipe: &Recipe, doc: &mut ResultDoc) {
        let spec = &recipe.metrology;
        let unit = |axis| match axis {
            crate::metrology::Axis::Response => recipe.data.unit(&doc.model.response).to_string(),
            crate::metrology::Axis::Predictor => doc
                .model
                .predictors
                .first()
                .map_or(String::new(), |p| recipe.data.unit(p).to_string()),
        };
        doc.metrology = Some(MetrologyDoc {
            report_id: report_id(&recipe.name.value, &doc.run_id),
            supersedes: recipe.report.supersedes.clone(),
            issued_on: Date::parse(&doc.generated_at),
            measured_on: spec.measured_on.as_ref().map(|d| d.value),
            item: spec.item.clone(),
            procedure: spec.procedure.clone(),
            standards: spec.standards.iter().map(|s| s.standard.clone()).collect(),
            conditions: spec
                .conditions
                .iter()
                .map(|c| c.condition.clone())
                .collect(),
            budget: self.budget.clone(),
            decision_rule: spec.decision.rule,
            tolerance: spec.decision.tolerance.map(|(t, axis)| ToleranceDoc {
                text: t.describe(&unit(axis)),
                tolerance: t,
                axis,
            }),
            read_offs: self.read_offs.clone(),
            as_left: self.as_left.clone(),
            read_off_note: self.read_off_note.clone(),
        });
        doc.as_found = self.as_found.clone();
    }
}

fn with_unit(text: String, unit: &str) -> String {
    if unit.is_empty() {
        text
    } else {
        format!("{text} {unit}")
    }
}

fn deviation_table(
    d: &Deviations,
    against: String,
    note: &str,
    response: (&str, &str),
    predictor: (&str, &str),
) -> crate::report::DeviationTable {
    use crate::acceptance::fmt_num;
    use crate::report::format;
    let (reference_label, indicated_label, unit) = match d.axis {
        crate::metrology::Axis::Response => (
            format!("{} of the curve", response.0),
            format!("{} measured", response.0),
            response.1,
        ),
        crate::metrology::Axis::Predictor => (
            format!("{} reference", predictor.0),
            format!("{} read through the curve", predictor.0),
            predictor.1,
        ),
    };
    let label = |l: String| {
        if unit.is_empty() {
            l
        } else {
            format!("{l} ({unit})")
        }
    };
    crate::report::DeviationTable {
        against,
        tolerance: d.tolerance.describe(unit),
        rule: d.rule.name().into(),
        summary: format!(
            "{} of {} points pass ({})",
            d.passed(),
            d.points.len(),
            d.tally()
        ),
        within: d.all_pass(),
        note: Some(note.to_string()),
        reference_label: label(reference_label),
        indicated_label: label(indicated_label),
        rows: d
            .points
            .iter()
            .map(|p| {
                let (deviation, expanded) = match p.deviation {
                    Some(dev) if p.expanded > 0.0 => {
                        format::value_with_uncertainty(dev, p.expanded)
                    }
                    Some(dev) => (fmt_num(dev), fmt_num(p.expanded)),
                    None => ("—".into(), "—".into()),
                };
                crate::report::DeviationRow {
                    origin: p.origin.clone(),
                    reference: fmt_num(p.reference),
                    indicated: match p.indicated {
                        Some(v) if p.expanded > 0.0 => {
                            format::value_with_uncertainty(v, p.expanded).0
                        }
                        Some(v) => fmt_num(v),
                        None => "—".into(),
                    },
                    deviation,
                    limit: if p.limit.is_finite() {
                        format!("±{}", fmt_num(p.limit))
                    } else {
                        "—".into()
                    },
                    expanded,
                    decision: match &p.note {
                        Some(n) => format!("{} ({n})", p.decision.label()),
                        None => p.decision.label().into(),
                    },
                    decision_code: p.decision.label().replace(' ', "-"),
                }
            })
            .collect(),
    }
}

fn uncertainty_section(
    m: &Metrology,
    response: (&str, &str),
    predictor: (&str, &str),
) -> Option<crate::report::UncertaintySection> {
    use crate::acceptance::fmt_num;
    use crate::report::format;
    let unit_of = |var: &str| {
        if var == response.0 {
            response.1
        } else if var == predictor.0 {
            predictor.1
        } else {
            ""
        }
    };
    let mid = m.read_offs.get(m.read_offs.len() / 2)?;
    let result_unit = unit_of(&mid.read);
    let budget = mid
        .contributions
        .iter()
        .map(|c| crate::report::BudgetRow {
            component: c.name.clone(),
            u: with_unit(format::sig(c.u, 3), unit_of(&c.applies_to))
                + &format!(" ({})", c.applies_to),
            sensitivity: format::sig(c.sensitivity, 4),
            contribution: with_unit(format::sig(c.contribution, 3), result_unit),
            dof: c.dof.map_or("∞".into(), |d| fmt_num(d.floor())),
        })
        .collect();
    let (v, u) = format::value_with_uncertainty(mid.value, mid.expanded.expanded);
    let mut notes = vec![format!(
        "Read-offs are inverse: {} from the mean of m = 1 new reading of {}. The fit component is the prediction standard error √(gᵀCg + s²/(m·w₀)) at that point times the sensitivity 1/slope; it holds the new reading's scatter about the curve, so repeatability is not listed again. Components in {} enter through the same sensitivity, components in {} directly (JCGM 100:2008 5.1.2). Uncertainties are rounded to 2 significant digits and values to the same decimal place (JCGM 100:2008 7.2.6).",
        mid.read, mid.given, mid.given, mid.read
    )];
    if m.budget.components.is_empty() {
        notes.push("The recipe lists no other components ([uncertainty] components, u of [[standards]]): these figures are the fit's contribution alone.".into());
    }
    if let Some(n) = &m.read_off_note {
        notes.push(n.clone());
    }
    Some(crate::report::UncertaintySection {
        coverage: m.budget.coverage.describe(),
        budget_point: format!(
            "{} read from one new reading {} = {} at {} = {} (mid-range)",
            mid.read,
            mid.given,
            with_unit(fmt_num(mid.input), unit_of(&mid.given)),
            mid.read,
            with_unit(fmt_num(mid.value), result_unit)
        ),
        budget,
        combined: with_unit(format::sig(mid.expanded.u_c, 3), result_unit),
        expanded: format!(
            "{} = {v} ± {} (U, {})",
            mid.read,
            with_unit(u, result_unit),
            mid.expanded.describe()
        ),
        range: m
            .read_offs
            .iter()
            .map(|r| {
                let (v, u) = format::value_with_uncertainty(r.value, r.expanded.expanded);
                crate::report::ReadOffRow {
                    given: format!(
                        "{} = {}",
                        r.given,
                        with_unit(fmt_num(r.input), unit_of(&r.given))
                    ),
                    value: format!("{} = {v} ± {}", r.read, with_unit(u.clone(), result_unit)),
                    u_c: format::uncertainty(r.expanded.u_c),
                    k: match r.expanded.nu_eff {
                        Some(nu) if nu < 1e6 => {
                            format!("{} (ν_eff = {})", r.expanded.k_text(), nu.floor() as i64)
                        }
                        _ => r.expanded.k_text(),
                    },
                    expanded: u,
                }
            })
            .collect(),
        notes,
    })
}

impl Metrology {
    /// The §14 parts of the report context: record, decision rule, calibration record,
    /// as-found and as-left tables, uncertainty, coefficients.
    pub fn fill_context(
        &self,
        recipe: &Recipe,
        doc: &ResultDoc,
        ctx: &mut crate::report::ReportContext,
    ) {
        use crate::report::{
            CalibrationRecord, CoefficientRow, KeyValue, MeasurementCondition, ReportRecord,
            StandardRow,
        };
        let spec = &recipe.metrology;
        let response = (
            doc.model.response.as_str(),
            recipe.data.unit(&doc.model.response),
        );
        let predictor_name = doc.model.predictors.first().map_or("", String::as_str);
        let predictor = (predictor_name, recipe.data.unit(predictor_name));
        ctx.record = ReportRecord {
            report_id: report_id(&recipe.name.value, &doc.run_id),
            issued_on: Date::parse(&doc.generated_at)
                .map_or_else(|| doc.generated_at.clone(), |d| d.to_string()),
            measured_on: spec.measured_on.as_ref().map(|d| d.value.to_string()),
            supersedes: recipe.report.supersedes.clone(),
        };
        let has_tolerances =
            !recipe.acceptance.points.is_empty() || spec.decision.tolerance.is_some();
        if has_tolerances || !spec.is_empty() {
            ctx.decision_rule = Some(spec.decision.rule.describe().to_string());
        }
        let mut record = CalibrationRecord::default();
        if let Some(item) = &spec.item {
            record.item = [
                ("Description", &item.description),
                ("Asset or serial number", &item.id),
            ]
            .into_iter()
            .filter_map(|(k, v)| Some(KeyValue::new(k, v.clone()?)))
            .collect();
        }
        if let Some(p) = &spec.procedure {
            record.procedure = [("Procedure", &p.id), ("Revision", &p.revision)]
                .into_iter()
                .filter_map(|(k, v)| Some(KeyValue::new(k, v.clone()?)))
                .collect();
        }
        record.standards = spec
            .standards
            .iter()
            .map(|s| {
                let st = &s.standard;
                StandardRow {
                    id: st.id.clone(),
                    certificate: st.certificate.clone().unwrap_or_else(|| "—".into()),
                    due: st.due.map_or("—".into(), |d| d.to_string()),
                    uncertainty: match (&st.u, &st.applies_to) {
                        (Some(u), Some(v)) => {
                            let unit = if v == response.0 {
                                response.1
                            } else {
                                predictor.1
                            };
                            format!(
                                "u = {} ({v})",
                                with_unit(crate::acceptance::fmt_num(*u), unit)
                            )
                        }
                        _ => "—".into(),
                    },
                    status: match (st.due, &spec.measured_on) {
                        (Some(_), Some(m)) => {
                            format!("current on the measurement date {}", m.value)
                        }
                        _ => "no due date given".into(),
                    },
                }
            })
            .collect();
        record.conditions = spec
            .conditions
            .iter()
            .map(|c| {
                let c = &c.condition;
                let unit = c.unit.as_deref().unwrap_or("");
                let f = crate::acceptance::fmt_num;
                MeasurementCondition {
                    name: c.name.clone(),
                    value: with_unit(f(c.value), unit),
                    limits: match (c.min, c.max) {
                        (Some(lo), Some(hi)) => format!("{} … {}", f(lo), with_unit(f(hi), unit)),
                        (Some(lo), None) => format!("≥ {}", with_unit(f(lo), unit)),
                        (None, Some(hi)) => format!("≤ {}", with_unit(f(hi), unit)),
                        (None, None) => "—".into(),
                    },
                    status: match c.within() {
                        Some(true) => "within limits".into(),
                        Some(false) => "outside limits".into(),
                        None => "no limits".into(),
                    },
                }
            })
            .collect();
        if !(record.item.is_empty()
            && record.procedure.is_empty()
            && record.standards.is_empty()
            && record.conditions.is_empty())
        {
            ctx.calibration = Some(record);
        }
        if let Some(af) = &doc.as_found {
            let date = Date::parse(&af.against_time)
                .map_or_else(|| af.against_time.clone(), |d| d.to_string());
            ctx.as_found = Some(deviation_table(
                &af.deviations,
                format!(
                    "the curve of run {} ({date}), the last whose criteria were met",
                    af.against_run
                ),
                "Before adjustment: each point of the new data against the previous curve. U of a deviation is that of the listed components through the previous curve's slope (that curve is what the instrument used).",
                response,
                predictor,
            ));
        }
        if let Some(al) = &self.as_left {
            ctx.as_left = Some(deviation_table(
                al,
                "the new curve (as left)".into(),
                "After the fit: each calibration point against the new curve. U of a deviation combines the new curve's fit uncertainty with the listed components.",
                response,
                predictor,
            ));
        }
        ctx.uncertainty = uncertainty_section(self, response, predictor);
        ctx.coefficients = doc
            .parameters
            .iter()
            .map(|p| CoefficientRow {
                name: p.name.clone(),
                value: crate::report::format::full(p.value),
                unit: p.unit.clone(),
            })
            .collect();
    }
}
