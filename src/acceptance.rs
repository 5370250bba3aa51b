//! Acceptance (SPEC §7): every criterion of `[acceptance]` becomes one row — criterion, limit,
//! measured value, pass / fail / not applicable — and the rows decide the verdict.
//!
//! The run is **accepted** when every row passes and the fit converged, **rejected**
//! otherwise; a recipe without criteria is **not-judged** (SPEC §13), never accepted. A row
//! whose test does not apply counts as not met. These are the codes in `result.json`; people
//! read them as the wording of [`Verdict::wording`].

use serde::Serialize;

use crate::recipe::Acceptance;

/// Outcome of one criterion.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum Status {
    Pass,
    Fail,
    NotApplicable,
}

impl Status {
    pub fn text(self) -> &'static str {
        match self {
            Status::Pass => "pass",
            Status::Fail => "fail",
            Status::NotApplicable => "not applicable",
        }
    }
}

/// One row of the criteria table.
#[derive(Debug, Clone, Serialize)]
pub struct CriterionRow {
    /// The recipe key, e.g. `r_squared_min` or `parameters.B.max`.
    pub key: String,
    /// What is judged, for people: "R² (centred)".
    pub criterion: String,
    /// The limit with its comparison: "≥ 0.999".
    pub limit: String,
    pub limit_value: f64,
    /// The measured value as text ("0.99987"), or why there is none.
    pub measured: String,
    pub measured_value: Option<f64>,
    pub status: Status,
    pub note: Option<String>,
}

/// Verdict codes of `result.json` (SPEC §7, §13).
#[derive(Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord, Serialize, serde::Deserialize)]
#[serde(rename_all = "kebab-case")]
pub enum Verdict {
    Accepted,
    NotJudged,
    Rejected,
    Invalid,
}

impl Verdict {
    /// The code written to `result.json`.
    pub fn code(self) -> &'static str {
        match self {
            Verdict::Accepted => "accepted",
            Verdict::NotJudged => "not-judged",
            Verdict::Rejected => "rejected",
            Verdict::Invalid => "invalid",
        }
    }

    /// What a person reads (SPEC §7): acceptance of a calibration is a person's act.
    pub fn wording(self) -> &'static str {
        match self {
            Verdict::Accepted => "criteria met — awaiting review",
            Verdict::NotJudged => "not judged — no acceptance criteria",
            Verdict::Rejected => "criteria not met",
            Verdict::Invalid => "invalid input",
        }
    }

    /// Exit code of SPEC §10 for this verdict.
    pub fn exit_code(self) -> i32 {
        match self {
            Verdict::Accepted | Verdict::NotJudged => 0,
            Verdict::Rejected => 1,
            Verdict::Invalid => 2,
        }
    }
}

/// A measured figure, or the reason its test does not apply.
#[derive(Debug, Clone, PartialEq)]
pub enum Measure {
    Value(f64),
    NotApplicable(String),
}

/// The runs test as the criteria need it: its p-value and the smallest p-value the sign
/// counts could ever give (when that is above the limit, the test cannot fail: not applicable).
#[derive(Debug, Clone, PartialEq)]
pub enum RunsMeasure {
    Value { p: f64, min_attainable_p: f64 },
    NotApplicable(String),
}

/// A fitted parameter as the criteria need it.
#[derive(Debug, Clone)]
pub struct ParamMeasure {
    pub name: String,
    pub value: f64,
    /// `None` when it has none (fixed, or at an active bound).
    pub std_error: Option<f64>,
}

/// The previous accepted run's parameter values, for drift rows.
#[derive(Debug, Clone)]
pub struct Baseline {
    pub run_id: String,
    pub params: Vec<(String, f64)>,
}

/// The curve's value at a setting of the predictors, or why it cannot be computed.
pub type ValueAt<'a> = &'a dyn Fn(&[(String, f64)]) -> Result<f64, String>;

/// Everything the criteria are judged on.
pub struct Measures {
    pub n: usize,
    pub converged: bool,
    pub stop_reason: String,
    pub r_squared: f64,
    /// "R² (centred)" or "R² (uncentred, through the origin)".
    pub r_squared_label: String,
    pub adj_r_squared: f64,
    pub std_error: f64,
    /// "s" or "unweighted RMS residual (weighted fit)".
    pub std_error_label: String,
    pub max_abs_residual: f64,
    pub max_rel_residual: Measure,
    pub runs: RunsMeasure,
    pub normality_p: Measure,
    pub durbin_watson: Measure,
    pub lack_of_fit_p: Measure,
    pub max_cooks_distance: Measure,
    pub params: Vec<ParamMeasure>,
    /// `None` when there is no earlier accepted run.
    pub baseline: Option<Baseline>,
}

/// Format a number for the criteria table: up to 6 significant digits, no trailing noise.
pub fn fmt_num(v: f64) -> String {
    if !v.is_finite() {
        return format!("{v}");
    }
    if v == 0.0 {
        return "0".into();
    }
    let a = v.abs();
    if (1e-4..1e7).contains(&a) {
        let digits = (5 - a.log10().floor() as i32).clamp(0, 12) as usize;
        let s = format!("{v:.digits$}");
        if s.contains('.') {
            s.trim_end_matches('0').trim_end_matches('.').to_string()
        } else {
            s
        }
    } else {
        format!("{v:.5e}")
    }
}

fn row(
    key: &str,
    criterion: impl Into<String>,
    cmp: &str,
    limit: f64,
    m: &Measure,
    higher_ok: bool,
) -> CriterionRow {
    let (measured, value, status, note) = match m {
        Measure::Value(v) => {
            let ok = if higher_ok { *v >= limit } else { *v <= limit };
            (
                fmt_num(*v),
                Some(*v),
                if ok { Status::Pass } else { Status::Fail },
                None,
            )
        }
        Measure::NotApplicable(why) => (
            "—".to_string(),
            None,
            Status::NotApplicable,
            Some(why.clone()),
        ),
    };
    CriterionRow {
        key: key.to_string(),
        criterion: criterion.into(),
        limit: format!("{cmp} {}", fmt_num(limit)),
        limit_value: limit,
        measured,
        measured_value: value,
        status,
        note,
    }
}

/// R² as a measure: NaN stands for "not defined", when the total sum of squares is zero
/// (every response value equal, or their spread below the floating-point range), which no
/// limit can be judged against.
fn r_squared_measure(v: f64) -> Measure {
    if v.is_nan() {
        Measure::NotApplicable(
            "R² is not defined: the response does not vary (its total sum of squares is 0)".into(),
        )
    } else {
        Measure::Value(v)
    }
}

/// Judge the measures against the recipe's criteria: the rows in recipe order, then the verdict.
pub fn judge(acc: &Acceptance, m: &Measures) -> (Vec<CriterionRow>, Verdict) {
    let mut rows = Vec::new();
    for (key, limit) in &acc.global {
        let l = limit.value;
        let k = key.value.as_str();
        let r = match k {
            "r_squared_min" => row(
                k,
                m.r_squared_label.clone(),
                "≥",
                l,
                &r_squared_measure(m.r_squared),
                true,
            ),
            "adj_r_squared_min" => row(
                k,
                "adjusted R²",
                "≥",
                l,
                &r_squared_measure(m.adj_r_squared),
                true,
            ),
            "std_error_max" => row(
                k,
                m.std_error_label.clone(),
                "≤",
                l,
                &Measure::Value(m.std_error),
                false,
            ),
            "max_abs_residual" => row(
                k,
                "largest |residual|",
                "≤",
                l,
                &Measure::Value(m.max_abs_residual),
                false,
            ),
            "max_rel_residual" => row(
                k,
                "largest |residual / observed|",
                "≤",
                l,
                &m.max_rel_residual,
                false,
            ),
            "runs_p_min" => {
                let measure = match &m.runs {
                    RunsMeasure::Value {
                        p,
                        min_attainable_p,
                    } if *min_attainable_p > l => Measure::NotApplicable(format!(
                        "too few residuals of one sign: the smallest p-value these counts allow is {}, above the limit (p = {})",
                        fmt_num(*min_attainable_p),
                        fmt_num(*p)
                    )),
                    RunsMeasure::Value { p, .. } => Measure::Value(*p),
                    RunsMeasure::NotApplicable(why) => Measure::NotApplicable(why.clone()),
                };
                row(k, "runs test of residual signs, p", "≥", l, &measure, true)
            }
            "normality_p_min" => row(k, "Shapiro–Wilk normality, p", "≥", l, &m.normality_p, true),
            "durbin_watson_min" => row(k, "Durbin–Watson d", "≥", l, &m.durbin_watson, true),
            "durbin_watson_max" => row(k, "Durbin–Watson d", "≤", l, &m.durbin_watson, false),
            "lack_of_fit_p_min" => row(k, "lack-of-fit F-test, p", "≥", l, &m.lack_of_fit_p, true),
            "min_points" => row(k, "points used", "≥", l, &Measure::Value(m.n as f64), true),
            "max_cooks_distance" => row(
                k,
                "largest Cook's distance",
                "≤",
                l,
                &m.max_cooks_distance,
                false,
            ),
            _ => continue,
        };
        rows.push(r);
    }
    for (name, c) in &acc.parameters {
        let p = m.params.iter().find(|p| p.name == name.value);
        let value = p.map_or(
            Measure::NotApplicable(format!("`{}` is not a parameter of the model", name.value)),
            |p| Measure::Value(p.value),
        );
        if let Some(lo) = &c.min {
            rows.push(row(
                &format!("parameters.{}.min", name.value),
                name.value.clone(),
                "≥",
                lo.value,
                &value,
                true,
            ));
        }
        if let Some(hi) = &c.max {
            rows.push(row(
                &format!("parameters.{}.max", name.value),
                name.value.clone(),
                "≤",
                hi.value,
                &value,
                false,
            ));
        }
        if let Some(rse) = &c.rel_std_error_max {
            let measure = match p {
                Some(ParamMeasure {
                    value,
                    std_error: Some(se),
                    ..
                }) if *value != 0.0 => Measure::Value(se / value.abs()),
                Some(ParamMeasure {
                    std_error: Some(_), ..
                }) => Measure::NotApplicable("the value is zero".into()),
                Some(_) => {
                    Measure::NotApplicable("no standard error (fixed, or at a bound)".into())
                }
                None => Measure::NotApplicable(format!(
                    "`{}` is not a parameter of the model",
                    name.value
                )),
            };
            rows.push(row(
                &format!("parameters.{}.rel_std_error_max", name.value),
                format!("relative standard error of {}", name.value),
                "≤",
                rse.value,
                &measure,
                false,
            ));
        }
    }
    for (name, c) in &acc.drift {
        let current = m
            .params
            .iter()
            .find(|p| p.name == name.value)
            .map(|p| p.value);
        let previous = m.baseline.as_ref().and_then(|b| {
            b.params
                .iter()
                .find(|(n, _)| *n == name.value)
                .map(|(_, v)| (*v, b.run_id.clone()))
        });
        for (suffix, limit, relative) in [
            ("max_rel_change", &c.max_rel_change, true),
            ("max_abs_change", &c.max_abs_change, false),
        ] {
            let Some(limit) = limit else { continue };
            let key = format!("drift.{}.{suffix}", name.value);
            let what = if relative {
                format!(
                    "relative change of {} since the last run whose criteria were met",
                    name.value
                )
            } else {
                format!(
                    "change of {} since the last run whose criteria were met",
                    name.value
                )
            };
            let r = match (current, &previous) {
                (Some(now), Some((before, run))) => {
                    let change = if relative {
                        if *before == 0.0 {
                            f64::INFINITY
                        } else {
                            ((now - before) / before).abs()
                        }
                    } else {
                        (now - before).abs()
                    };
                    let mut r = row(&key, what, "≤", limit.value, &Measure::Value(change), false);
                    r.note = Some(format!(
                        "against run {run} ({} = {})",
                        name.value,
                        fmt_num(*before)
                    ));
                    r
                }
                (None, _) => row(
                    &key,
                    what,
                    "≤",
                    limit.value,
                    &Measure::NotApplicable(format!(
                        "`{}` is not a parameter of the model",
                        name.value
                    )),
                    false,
                ),
                (Some(_), None) => {
                    let mut r = row(&key, what, "≤", limit.value, &Measure::Value(0.0), false);
                    r.measured = "—".into();
                    r.measured_value = None;
                    r.note = Some(
                        "no earlier run whose criteria were met in the history: nothing to compare"
                            .into(),
                    );
                    r
                }
            };
            rows.push(r);
        }
    }
    // `points`, `back_calculated` and `drift_curve` need the curve and its uncertainty:
    // their rows come from `metrology::criteria`, appended after these.
    let verdict = verdict(!acc.is_empty(), m.converged, &rows);
    (rows, verdict)
}

/// The verdict of a set of rows (SPEC §7, §13): not judged without criteria, accepted when the
/// fit converged and every row passes, rejected otherwise.
pub fn verdict(has_criteria: bool, converged: bool, rows: &[CriterionRow]) -> Verdict {
    if !has_criteria {
        Verdict::NotJudged
    } else if converged && rows.iter().all(|r| r.status == Status::Pass) {
        Verdict::Accepted
    } else {
        Verdict::Rejected
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::recipe::{ParamCriteria, Spanned};

    fn sp<T>(v: T) -> Spanned<T> {
        Spanned::new(v, 0..0)
    }

    fn measures() -> Measures {
        Measures {
            n: 12,
            converged: true,
            stop_reason: "converged".into(),
            r_squared: 0.9995,
            r_squared_label: "R² (centred)".into(),
            adj_r_squared: 0.9994,
            std_error: 2.0,
            std_error_label: "s".into(),
            max_abs_residual: 3.5,
            max_rel_residual: Measure::Value(0.01),
            runs: RunsMeasure::Value {
                p: 0.2,
                min_attainable_p: 0.001,
            },
            normality_p: Measure::Value(0.4),
            durbin_watson: Measure::Value(1.9),
            lack_of_fit_p: Measure::NotApplicable("no replicate groups".into()),
            max_cooks_distance: Measure::Value(0.3),
            params: vec![ParamMeasure {
                name: "B".into(),
                value: 3950.0,
                std_error: Some(10.0),
            }],
            baseline: None,
        }
    }

    #[test]
    fn all_rows_pass_gives_accepted() {
        let mut acc = Acceptance::default();
        acc.global.push((sp("r_squared_min".into()), sp(0.999)));
        acc.parameters.push((
            sp("B".into()),
            ParamCriteria {
                min: Some(sp(3900.0)),
                max: Some(sp(4000.0)),
                rel_std_error_max: Some(sp(0.01)),
            },
        ));
        let (rows, verdict) = judge(&acc, &measures());
        assert_eq!(rows.len(), 4);
        assert!(rows.iter().all(|r| r.status == Status::Pass), "{rows:?}");
        assert_eq!(verdict, Verdict::Accepted);
    }

    #[test]
    fn undefined_r_squared_is_not_applicable_rather_than_nan() {
        let mut m = measures();
        m.r_squared = f64::NAN;
        m.adj_r_squared = f64::NAN;
        let mut acc = Acceptance::default();
        acc.global.push((sp("r_squared_min".into()), sp(0.9)));
        acc.global.push((sp("adj_r_squared_min".into()), sp(0.9)));
        let (rows, verdict) = judge(&acc, &m);
        for r in &rows {
            assert_eq!(r.status, Status::NotApplicable, "{r:?}");
            assert_eq!(r.measured, "—");
            assert!(
                r.note
                    .as_deref()
                    .is_some_and(|n| n.contains("does not vary"))
            );
        }
        assert_eq!(verdict, Verdict::Rejected);
    }

    #[test]
    fn not_applicable_row_counts_as_not_met() {
        let mut acc = Acceptance::default();
        acc.global.push((sp("lack_of_fit_p_min".into()), sp(0.05)));
        let (rows, verdict) = judge(&acc, &measures());
        assert_eq!(rows[0].status, Status::NotApplicable);
        assert_eq!(verdict, Verdict::Rejected);
    }

    #[test]
    fn runs_limit_unreachable_is_not_applicable() {
        let mut acc = Acceptance::default();
        acc.global.push((sp("runs_p_min".into()), sp(0.05)));
        let mut m = measures();
        m.runs = RunsMeasure::Value {
            p: 0.5,
            min_attainable_p: 0.2,
        };
        let (rows, _) = judge(&acc, &m);
        assert_eq!(rows[0].status, Status::NotApplicable);
    }

    #[test]
    fn non_converged_fit_is_rejected_even_when_rows_pass() {
        let mut acc = Acceptance::default();
        acc.global.push((sp("min_points".into()), sp(5.0)));
        let mut m = measures();
        m.converged = false;
        assert_eq!(judge(&acc, &m).1, Verdict::Rejected);
    }

    #[test]
    fn no_criteria_is_not_judged() {
        assert_eq!(
            judge(&Acceptance::default(), &measures()).1,
            Verdict::NotJudged
        );
    }

    #[test]
    fn drift_without_history_passes_with_a_note_and_fails_beyond_limit() {
        let mut acc = Acceptance::default();
        acc.drift.push((
            sp("B".into()),
            crate::recipe::DriftCriteria {
                max_rel_change: Some(sp(0.005)),
                max_abs_change: None,
            },
        ));
        let (rows, _) = judge(&acc, &measures());
        assert_eq!(rows[0].status, Status::Pass);
        assert!(
            rows[0]
                .note
                .as_deref()
                .unwrap_or("")
                .contains("no earlier run whose criteria were met")
        );
        let mut m = measures();
        m.baseline = Some(Baseline {
            run_id: "r1".into(),
            params: vec![("B".into(), 3900.0)],
        });
        let (rows, verdict) = judge(&acc, &m);
        assert_eq!(rows[0].status, Status::Fail, "50/3900 = 1.3 % > 0.5 %");
        assert_eq!(verdict, Verdict::Rejected);
    }

    #[test]
    fn number_format_is_compact() {
        assert_eq!(fmt_num(0.999512345), "0.999512");
        assert_eq!(fmt_num(3950.0), "3950");
        assert_eq!(fmt_num(1.5e-9), "1.50000e-9");
    }
}
