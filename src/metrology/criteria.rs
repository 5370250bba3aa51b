//! The criteria rows of SPEC §14 (appended after those of [`crate::acceptance::judge`]):
//! `[[acceptance.points]]` with tolerance forms, uncertainty and the decision rule,
//! `back_calculated` (ICH M10), `[acceptance.drift_curve]`, the limits of `[conditions]`, and
//! the calibration points against `[decision] tolerance` (as left).

use crate::acceptance::{CriterionRow, Status, ValueAt, fmt_num};
use crate::recipe::{DriftCurveSpec, PointCheck};

use super::as_found::{self, CalPoint, Deviations};
use super::assay::{self, BackCalcRule};
use super::curve::{self, Curve};
use super::decision::{self, Decision, DecisionRule};
use super::read_off::Budget;
use super::record::Condition;
use super::tolerance::Axis;

/// What the rows are judged on.
pub struct Inputs<'a> {
    /// The new curve, when the model has one predictor.
    pub curve: Option<&'a dyn Curve>,
    /// Why there is no curve (e.g. "the model has 2 predictors").
    pub no_curve: &'a str,
    /// The model's value at a setting of every predictor (for points without a curve).
    pub value_at: ValueAt<'a>,
    pub budget: &'a Budget,
    pub rule: DecisionRule,
    pub response_unit: &'a str,
    pub predictor_unit: &'a str,
    /// The calibration points (reference x, indication y) of the data.
    pub points: &'a [CalPoint],
    /// The curve of the last run that met its criteria, with its run id.
    pub previous: Option<(&'a dyn Curve, &'a str)>,
}

fn with_unit(v: f64, unit: &str) -> String {
    if unit.is_empty() {
        fmt_num(v)
    } else {
        format!("{} {unit}", fmt_num(v))
    }
}

fn not_applicable(
    key: &str,
    criterion: String,
    limit: String,
    limit_value: f64,
    why: String,
) -> CriterionRow {
    CriterionRow {
        key: key.into(),
        criterion,
        limit,
        limit_value,
        measured: "—".into(),
        measured_value: None,
        status: Status::NotApplicable,
        note: Some(why),
    }
}

fn status(met: bool) -> Status {
    if met { Status::Pass } else { Status::Fail }
}

/// The limit column: "≤ 60" (simple) or "≤ 48.3 (60 − U)" (guard band).
fn limit_text(tolerance: f64, accept: f64, rule: DecisionRule, unit: &str) -> String {
    match rule {
        DecisionRule::Simple => format!("≤ {}", with_unit(tolerance, unit)),
        DecisionRule::GuardBand => {
            format!("≤ {} ({} − U)", with_unit(accept, unit), fmt_num(tolerance))
        }
    }
}

/// One row per `[[acceptance.points]]` entry.
pub fn point_rows(points: &[PointCheck], inp: &Inputs<'_>) -> Vec<CriterionRow> {
    points.iter().map(|p| point_row(p, inp)).collect()
}

fn at_text(p: &PointCheck) -> String {
    p.at.iter()
        .map(|(k, v)| format!("{k} = {}", fmt_num(*v)))
        .collect::<Vec<_>>()
        .join(", ")
}

fn point_row(p: &PointCheck, inp: &Inputs<'_>) -> CriterionRow {
    let at = at_text(p);
    match p.axis {
        Axis::Response => {
            let criterion = format!("|curve − {}| at {at}", fmt_num(p.expect));
            let value = match inp.curve {
                Some(c) => match p.at.iter().find(|(k, _)| k == c.predictor()) {
                    Some((_, x)) => c.value(*x).map(|v| (v, Some((c, *x)))),
                    None => Err(format!(
                        "`at` does not give the predictor `{}`",
                        c.predictor()
                    )),
                },
                None => (inp.value_at)(&p.at).map(|v| (v, None)),
            };
            let (value, curve_at) = match value {
                Ok(v) => v,
                Err(why) => {
                    return not_applicable(
                        "points",
                        criterion,
                        format!("≤ {}", p.tolerance.describe(inp.response_unit)),
                        p.tolerance.abs,
                        why,
                    );
                }
            };
            let deviation = value - p.expect;
            let tl = p.tolerance.limit(value);
            let u = match curve_at {
                Some((c, x)) => {
                    as_found::deviation_uncertainty(c, x, Axis::Response, inp.budget, true)
                        .map(|e| (e, !(c.range().0..=c.range().1).contains(&x)))
                }
                None => Err(inp.no_curve.to_string()),
            };
            judged_row(
                "points",
                criterion,
                deviation,
                tl,
                u,
                p,
                inp,
                inp.response_unit,
                format!("curve gives {}", fmt_num(value)),
            )
        }
        Axis::Predictor => {
            let Some(c) = inp.curve else {
                return not_applicable(
                    "points",
                    format!("|x read at {} − setting| at {at}", fmt_num(p.expect)),
                    format!("≤ {}", p.tolerance.describe(inp.predictor_unit)),
                    p.tolerance.abs,
                    format!(
                        "`tolerance_x` reads through the inverse of the curve: {}",
                        inp.no_curve
                    ),
                );
            };
            let var = c.predictor().to_string();
            let criterion = format!(
                "|{var} read at {} = {} − {}|",
                c.response(),
                fmt_num(p.expect),
                p.at.iter()
                    .find(|(k, _)| *k == var)
                    .map_or("?".into(), |(_, v)| fmt_num(*v))
            );
            let Some((_, x_set)) = p.at.iter().find(|(k, _)| *k == var) else {
                return not_applicable(
                    "points",
                    criterion,
                    "—".into(),
                    0.0,
                    format!("`at` does not give the predictor `{var}`"),
                );
            };
            let (lo, hi) = curve::widened(c.range(), 0.5);
            let Some(x_read) =
                curve::inverse_near(c, p.expect, *x_set, lo.min(*x_set), hi.max(*x_set))
            else {
                return not_applicable(
                    "points",
                    criterion,
                    format!("≤ {}", p.tolerance.describe(inp.predictor_unit)),
                    p.tolerance.abs,
                    format!(
                        "the curve does not reach {} = {} near {var} = {}",
                        c.response(),
                        fmt_num(p.expect),
                        fmt_num(*x_set)
                    ),
                );
            };
            let deviation = x_read - x_set;
            let tl = p.tolerance.limit(x_read);
            let u = as_found::deviation_uncertainty(c, x_read, Axis::Predictor, inp.budget, true)
                .map(|e| (e, !(c.range().0..=c.range().1).contains(&x_read)));
            judged_row(
                "points",
                criterion,
                deviation,
                tl,
                u,
                p,
                inp,
                inp.predictor_unit,
                format!("the curve reads {var} = {}", fmt_num(x_read)),
            )
        }
    }
}

#[allow(clippy::too_many_arguments)]
fn judged_row(
    key: &str,
    criterion: String,
    deviation: f64,
    tl: f64,
    u: Result<(super::Expanded, bool), String>,
    p: &PointCheck,
    inp: &Inputs<'_>,
    unit: &str,
    reading: String,
) -> CriterionRow {
    let tolerance_text = p.tolerance.describe(unit);
    let (expanded, extrapolated, u_note) = match u {
        Ok((e, outside)) => (Some(e), outside, None),
        Err(why) => (None, false, Some(why)),
    };
    if expanded.is_none() && inp.rule == DecisionRule::GuardBand {
        return not_applicable(
            key,
            criterion,
            format!("≤ {tolerance_text} − U"),
            tl,
            format!(
                "the guard-band rule needs the expanded uncertainty U, which is not available: {}",
                u_note.unwrap_or_default()
            ),
        );
    }
    let u_value = expanded.map_or(0.0, |e| e.expanded);
    let accept = decision::acceptance_limit(tl, u_value, inp.rule);
    let d = decision::decide(deviation, tl, u_value, inp.rule);
    let mut note = match &expanded {
        Some(e) => {
            let (v, uu) = crate::report::format::value_with_uncertainty(deviation, e.expanded);
            format!(
                "{reading}; deviation {v} ± {uu} (U, {}); tolerance {tolerance_text}",
                e.describe()
            )
        }
        None => format!(
            "{reading}; tolerance {tolerance_text}; no uncertainty: {}",
            u_note.unwrap_or_default()
        ),
    };
    if inp.rule == DecisionRule::GuardBand || d != Decision::Pass {
        note.push_str(&format!("; {}", d.label()));
    }
    if inp.rule == DecisionRule::GuardBand && accept < 0.0 {
        note.push_str("; U exceeds the tolerance, so no value can pass the guard band");
    }
    if extrapolated {
        note.push_str("; outside the calibrated range (extrapolated)");
    }
    CriterionRow {
        key: key.into(),
        criterion,
        limit: limit_text(tl, accept, inp.rule, ""),
        limit_value: accept,
        measured: fmt_num(deviation.abs()),
        measured_value: Some(deviation.abs()),
        status: status(d.met()),
        note: Some(note),
    }
}

/// `back_calculated` (ICH M10): one row for the fraction of standards that read back within
/// their limits.
pub fn back_calculated_row(rule: &BackCalcRule, inp: &Inputs<'_>) -> CriterionRow {
    let criterion = format!(
        "standards back-calculated within ±{} % (±{} % at the lowest level), ICH M10",
        fmt_num(rule.within * 100.0),
        fmt_num(rule.at_lowest * 100.0)
    );
    let limit = format!("≥ {} % of standards", fmt_num(rule.min_fraction * 100.0));
    let Some(c) = inp.curve else {
        return not_applicable(
            "back_calculated",
            criterion,
            limit,
            rule.min_fraction,
            inp.no_curve.to_string(),
        );
    };
    let out = assay::back_calculate(c, inp.points, *rule);
    if out.standards.is_empty() {
        return not_applicable(
            "back_calculated",
            criterion,
            limit,
            rule.min_fraction,
            "no standard with a non-zero nominal value".into(),
        );
    }
    let mut notes = Vec::new();
    let failing: Vec<String> = out
        .standards
        .iter()
        .filter(|s| !s.passes)
        .map(|s| match (s.back, s.relative_error) {
            (Some(b), Some(e)) => format!(
                "{} read back as {} ({}{} %, {})",
                with_unit(s.nominal, inp.predictor_unit),
                fmt_num(b),
                if e >= 0.0 { "+" } else { "" },
                crate::report::format::sig(e * 100.0, 3),
                s.origin
            ),
            _ => format!(
                "{} does not read back ({})",
                with_unit(s.nominal, inp.predictor_unit),
                s.origin
            ),
        })
        .collect();
    if !failing.is_empty() {
        notes.push(format!("outside: {}", failing.join("; ")));
    }
    if out.excluded > 0 {
        notes.push(format!(
            "{} blank or zero standard(s) left out",
            out.excluded
        ));
    }
    notes.push(format!("{} concentration levels", out.levels));
    CriterionRow {
        key: "back_calculated".into(),
        criterion,
        limit,
        limit_value: rule.min_fraction,
        measured: format!(
            "{} of {} ({} %)",
            out.passed,
            out.standards.len(),
            crate::report::format::sig(out.fraction * 100.0, 3)
        ),
        measured_value: Some(out.fraction),
        status: status(out.passes),
        note: Some(notes.join("; ")),
    }
}

/// `[acceptance.drift_curve]`: the largest |new − previous| over the calibrated range.
pub fn drift_curve_row(spec: &DriftCurveSpec, inp: &Inputs<'_>) -> CriterionRow {
    let limit_value = spec.max_abs_change.value;
    let Some(c) = inp.curve else {
        return not_applicable(
            "drift_curve.max_abs_change",
            "largest change of the curve over the calibrated range".into(),
            format!("≤ {}", fmt_num(limit_value)),
            limit_value,
            inp.no_curve.to_string(),
        );
    };
    let (what, unit) = match spec.axis {
        Axis::Response => (format!("|Δ{}|", c.response()), inp.response_unit),
        Axis::Predictor => (
            format!("|Δ{}| read through the previous curve", c.predictor()),
            inp.predictor_unit,
        ),
    };
    let criterion = format!(
        "largest change of the curve {what} over the calibrated range since the last run whose criteria were met"
    );
    let limit = format!("≤ {}", with_unit(limit_value, unit));
    let Some((old, run)) = inp.previous else {
        return CriterionRow {
            key: "drift_curve.max_abs_change".into(),
            criterion,
            limit,
            limit_value,
            measured: "—".into(),
            measured_value: None,
            status: Status::Pass,
            note: Some(
                "no earlier run whose criteria were met in the history: nothing to compare".into(),
            ),
        };
    };
    match as_found::curve_change(c, old, c.range(), spec.axis) {
        Ok(change) => CriterionRow {
            key: "drift_curve.max_abs_change".into(),
            criterion,
            limit,
            limit_value,
            measured: fmt_num(change.max_abs),
            measured_value: Some(change.max_abs),
            status: status(change.max_abs <= limit_value),
            note: Some(format!(
                "largest at {} = {}, against run {run} ({} points over the calibrated range)",
                c.predictor(),
                fmt_num(change.at),
                change.samples
            )),
        },
        Err(why) => not_applicable(
            "drift_curve.max_abs_change",
            criterion,
            limit,
            limit_value,
            why,
        ),
    }
}

/// One row per condition with limits: the value must lie within [min, max].
pub fn condition_rows(conditions: &[Condition]) -> Vec<CriterionRow> {
    conditions
        .iter()
        .filter_map(|c| {
            let within = c.within()?;
            let unit = c.unit.as_deref().unwrap_or("");
            let limit = match (c.min, c.max) {
                (Some(lo), Some(hi)) => format!("{} … {}", fmt_num(lo), with_unit(hi, unit)),
                (Some(lo), None) => format!("≥ {}", with_unit(lo, unit)),
                (None, Some(hi)) => format!("≤ {}", with_unit(hi, unit)),
                (None, None) => return None,
            };
            Some(CriterionRow {
                key: format!("conditions.{}", c.name),
                criterion: format!("{} during the measurement ([conditions])", c.name),
                limit,
                limit_value: c.max.or(c.min).unwrap_or(f64::NAN),
                measured: with_unit(c.value, unit),
                measured_value: Some(c.value),
                status: status(within),
                note: None,
            })
        })
        .collect()
}

/// `[decision] tolerance`: every calibration point against the new curve (as left).
pub fn as_left_row(dev: &Deviations, unit: &str) -> CriterionRow {
    let n = dev.points.len();
    let passed = dev.passed();
    let mut note = format!("{}; decision rule {}", dev.tally(), dev.rule.name());
    if let Some(w) = dev.worst()
        && let Some(d) = w.deviation
    {
        note.push_str(&format!(
            "; largest relative to its limit: {} (deviation {}, limit ±{}, U {}, {})",
            w.origin,
            fmt_num(d),
            fmt_num(w.limit),
            fmt_num(w.expanded),
            w.decision.label()
        ));
    }
    CriterionRow {
        key: "decision.tolerance".into(),
        criterion: format!(
            "calibration points within the tolerance {} against the new curve (as left)",
            dev.tolerance.describe(unit)
        ),
        limit: format!("all {n} points"),
        limit_value: n as f64,
        measured: format!("{passed} of {n}"),
        measured_value: Some(passed as f64),
        status: status(dev.all_pass()),
        note: Some(note),
    }
}
