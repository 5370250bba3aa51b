//! A hand-built report context for an invented job: cold-room thermistor
//! probe C3, beta model. All values are invented demo values (no fit is run
//! here); the report tests check rendering only.

use fitwright::report::format::{fixed, full, num, p_value, percent, sig, value_with_uncertainty};
use fitwright::report::plot::{
    self, AxisLabel, Band, FitPlot, LinearizedPlot, NormalPlot, ResidualPlot, TrendPlot, TrendPoint,
};
use fitwright::report::{
    AnalysisSummary, CompareRow, ConditionRow, CriterionRow, CriterionStatus, DataFile,
    DataSummary, DiagnosticRow, DifferenceRow, DifferenceTable, HashedFile, KeyValue,
    ModelParameter, ModelSummary, ParameterRow, ParameterTable, ReportContext, StatRow,
    Traceability, VariableRow, Verdict, VerdictCode,
};

/// `SOURCE_DATE_EPOCH` of the demo: 2026-11-28T10:15:00Z.
pub const DEMO_EPOCH: i64 = 1_795_860_900;
/// Invented hash of the demo inputs.
pub const DEMO_INPUT_HASH: &str =
    "3f9a61c2d4b07e85aa10c4e2f7d93b6158e0a4c7b2d91f36e85c07a4d2b9f1e0";

const R25: f64 = 10_012.4;
const B: f64 = 3_921.6;

fn beta_model(t: f64) -> f64 {
    R25 * (B * (1.0 / (t + 273.15) - 1.0 / 298.15)).exp()
}

/// Deterministic invented scatter in [-1, 1].
fn wobble(i: usize) -> f64 {
    (((i * 37 + 11) % 23) as f64 / 11.0) - 1.0
}

pub struct DemoSeries {
    pub t: Vec<f64>,
    pub r: Vec<f64>,
    pub fitted: Vec<f64>,
    pub residuals: Vec<f64>,
    pub curve_t: Vec<f64>,
    pub curve_r: Vec<f64>,
    pub conf_lo: Vec<f64>,
    pub conf_hi: Vec<f64>,
    pub pred_lo: Vec<f64>,
    pub pred_hi: Vec<f64>,
}

pub fn demo_series() -> DemoSeries {
    let t: Vec<f64> = (0..25).map(|i| -20.0 + 2.5 * i as f64).collect();
    let fitted: Vec<f64> = t.iter().map(|t| beta_model(*t)).collect();
    let r: Vec<f64> = fitted
        .iter()
        .enumerate()
        .map(|(i, f)| f + 9.0 * wobble(i) + 0.0006 * f * wobble(i + 5))
        .collect();
    let residuals: Vec<f64> = r.iter().zip(&fitted).map(|(a, b)| a - b).collect();
    let curve_t: Vec<f64> = (0..=120).map(|i| -20.0 + 0.5 * i as f64).collect();
    let curve_r: Vec<f64> = curve_t.iter().map(|t| beta_model(*t)).collect();
    let half_conf = |t: f64, r: f64| 4.0 + 0.0004 * r * (1.0 + ((t - 10.0) / 30.0).powi(2));
    let half_pred = |t: f64, r: f64| 14.0 + 0.0012 * r + half_conf(t, r);
    let conf_lo = curve_t
        .iter()
        .zip(&curve_r)
        .map(|(t, r)| r - half_conf(*t, *r))
        .collect();
    let conf_hi = curve_t
        .iter()
        .zip(&curve_r)
        .map(|(t, r)| r + half_conf(*t, *r))
        .collect();
    let pred_lo = curve_t
        .iter()
        .zip(&curve_r)
        .map(|(t, r)| r - half_pred(*t, *r))
        .collect();
    let pred_hi = curve_t
        .iter()
        .zip(&curve_r)
        .map(|(t, r)| r + half_pred(*t, *r))
        .collect();
    DemoSeries {
        t,
        r,
        fitted,
        residuals,
        curve_t,
        curve_r,
        conf_lo,
        conf_hi,
        pred_lo,
        pred_hi,
    }
}

fn criterion(
    name: &str,
    limit: &str,
    measured: &str,
    status: CriterionStatus,
    note: Option<&str>,
) -> CriterionRow {
    CriterionRow {
        criterion: name.to_string(),
        limit: limit.to_string(),
        measured: measured.to_string(),
        status,
        note: note.map(str::to_string),
    }
}

fn param_row(
    name: &str,
    value: f64,
    se: f64,
    t95: f64,
    unit: Option<&str>,
    note: Option<&str>,
) -> ParameterRow {
    let (v, u) = value_with_uncertainty(value, se);
    let (lo, _) = value_with_uncertainty(value - t95 * se, se);
    let (hi, _) = value_with_uncertainty(value + t95 * se, se);
    ParameterRow {
        name: name.to_string(),
        value: v,
        std_error: u,
        rel_std_error: percent(se / value, 2),
        ci_low: lo,
        ci_high: hi,
        unit: unit.map(str::to_string),
        note: note.map(str::to_string),
    }
}

fn stat(key: &str, label: &str, value: String, note: Option<&str>) -> StatRow {
    let mut row = StatRow::new(key, label, value);
    row.note = note.map(str::to_string);
    row
}

/// The demo context, with its five kinds of plot drawn from the invented
/// series.
pub fn demo_context() -> ReportContext {
    let s = demo_series();
    let mut ctx = ReportContext::new(
        "probe-c3",
        "Cold-room probe C3, beta-model calibration",
        Verdict {
            code: VerdictCode::Accepted,
            detail: Some("All 8 criteria met; the refinement converged (relative reduction of SSR below 1e-12).".to_string()),
        },
    );
    ctx.notes = "Quarterly re-calibration of the **cold-room probe C3** against the reference \
thermometer in the stirred bath.\n\n\
- bath stability better than 0.01 K over each setpoint\n\
- readings at 25 setpoints from −20 °C to 40 °C\n\n\
Procedure: see `CAL-TH-004` rev. C."
        .to_string();
    ctx.criteria = vec![
        criterion(
            "R²",
            "≥ 0.999",
            &sig(0.999_963, 6),
            CriterionStatus::Pass,
            None,
        ),
        criterion(
            "Standard error of the estimate s",
            "≤ 25 Ω",
            "13 Ω",
            CriterionStatus::Pass,
            None,
        ),
        criterion(
            "Largest |residual|",
            "≤ 60 Ω",
            &format!("{} Ω", sig(31.74, 3)),
            CriterionStatus::Pass,
            None,
        ),
        criterion(
            "Runs test p (residual signs in T order)",
            "≥ 0.05",
            &p_value(0.2143),
            CriterionStatus::Pass,
            Some("exact (Swed–Eisenhart)"),
        ),
        criterion(
            "B within limits",
            "3800 … 4000 K",
            "3922 K",
            CriterionStatus::Pass,
            None,
        ),
        criterion(
            "B relative standard error",
            "≤ 1 %",
            &percent(0.0013, 2),
            CriterionStatus::Pass,
            None,
        ),
        criterion(
            "B drift against the last accepted run",
            "≤ 0.5 %",
            &percent(0.0031, 2),
            CriterionStatus::Pass,
            Some("last accepted: 20260829T091200Z-71c0e2aa"),
        ),
        criterion(
            "Reading at T = 25 °C",
            "10000 ± 50 Ω",
            "10012 Ω",
            CriterionStatus::Pass,
            None,
        ),
    ];
    ctx.data = DataSummary {
        files: vec![
            DataFile {
                path: "../demo-data/probes/c3-2026q4-1.csv".into(),
                rows: 13,
                sha256: "8d0c5e1f3a2b47c69e18d7a0b5f4c3e2d1a09b8c7d6e5f4a3b2c1d0e9f8a7b6c".into(),
            },
            DataFile {
                path: "../demo-data/probes/c3-2026q4-2.csv".into(),
                rows: 14,
                sha256: "1a2b3c4d5e6f708192a3b4c5d6e7f8091a2b3c4d5e6f708192a3b4c5d6e7f809".into(),
            },
        ],
        rows_read: 27,
        rows_used: 25,
        rows_filtered: 2,
        rows_skipped: 0,
        filter: Some("T >= -20 && T <= 40".into()),
        skipped_detail: vec![],
        variables: vec![
            VariableRow {
                variable: "R".into(),
                role: "response".into(),
                column: "resistance_ohm".into(),
                unit: Some("Ω".into()),
            },
            VariableRow {
                variable: "T".into(),
                role: "predictor".into(),
                column: "temp_c".into(),
                unit: Some("°C".into()),
            },
        ],
    };
    ctx.model = ModelSummary {
        equation: "R = R25 * exp(B * (1/(T + 273.15) - 1/298.15))".into(),
        preset: None,
        parameters: vec![
            ModelParameter {
                name: "R25".into(),
                start: None,
                min: Some("0".into()),
                max: None,
                fixed: None,
                unit: Some("Ω".into()),
            },
            ModelParameter {
                name: "B".into(),
                start: Some("3900".into()),
                min: None,
                max: None,
                fixed: None,
                unit: Some("K".into()),
            },
        ],
        fit_settings: vec![
            KeyValue::new(
                "Method",
                "auto: linearized start, refined by Levenberg–Marquardt",
            ),
            KeyValue::new("Weights", "none"),
            KeyValue::new("Uncertainty", "residuals (covariance scaled by s²)"),
            KeyValue::new("Confidence level", "0.95"),
        ],
    };
    ctx.analysis = Some(AnalysisSummary {
        outcome: "Linearizable by ln(R)".into(),
        transform: Some("ln(R)".into()),
        derivation: vec![
            "ln(R) = ln(R25 * exp(B * (1/(T + 273.15) - 1/298.15)))".into(),
            "ln(R) = ln(R25) + B * (1/(T + 273.15) - 1/298.15)".into(),
        ],
        basis: vec!["h0 = 1".into(), "h1 = 1/(T + 273.15) - 1/298.15".into()],
        coefficient_map: vec!["c0 = ln(R25)".into(), "c1 = B".into()],
        back_transform: vec!["R25 = exp(c0)".into(), "B = c1".into()],
        conditions: vec![
            ConditionRow { condition: "R > 0".into(), applies_to: "data".into(), result: "holds for all 25 rows".into() },
            ConditionRow { condition: "R25 > 0".into(), applies_to: "parameters".into(), result: "holds at the result".into() },
        ],
        remarks: vec!["Delta-method weights w′ = w·R² make the linear fit approximate the original error structure.".into()],
    });
    ctx.parameter_tables = vec![
        ParameterTable {
            label: "Linearized start".into(),
            note: Some("Linear fit of ln(R); standard errors by the delta method from the transformed-space covariance.".into()),
            interval_label: "95 % confidence interval".into(),
            rows: vec![
                param_row("R25", 10_009.87, 4.12, 2.069, Some("Ω"), Some("interval back-transformed from c0 (asymmetric)")),
                param_row("B", 3_924.31, 5.37, 2.069, Some("K"), None),
            ],
        },
        ParameterTable {
            label: "Refined (original space)".into(),
            note: Some("Levenberg–Marquardt from the linearized start; t-based intervals, 23 degrees of freedom.".into()),
            interval_label: "95 % confidence interval".into(),
            rows: vec![
                param_row("R25", R25, 3.86, 2.069, Some("Ω"), None),
                param_row("B", B, 5.11, 2.069, Some("K"), None),
            ],
        },
    ];
    ctx.differences = Some(DifferenceTable {
        from_label: "linearized".into(),
        to_label: "refined".into(),
        note: Some("The linearization bias: small against the standard errors here.".into()),
        rows: vec![
            DifferenceRow {
                name: "R25".into(),
                from: fixed(10_009.87, 2),
                to: fixed(R25, 2),
                difference: fixed(R25 - 10_009.87, 2),
                relative: percent((R25 - 10_009.87) / R25, 2),
                in_std_errors: fixed((R25 - 10_009.87) / 3.86, 2),
            },
            DifferenceRow {
                name: "B".into(),
                from: fixed(3_924.31, 2),
                to: fixed(B, 2),
                difference: fixed(B - 3_924.31, 2),
                relative: percent((B - 3_924.31) / B, 2),
                in_std_errors: fixed((B - 3_924.31) / 5.11, 2),
            },
        ],
    });
    ctx.statistics = vec![
        stat("n", "Rows n", "25".into(), None),
        stat("p", "Free parameters p", "2".into(), None),
        stat("dof", "Degrees of freedom n − p", "23".into(), None),
        stat("ssr", "SSR", num(3_912.6), Some("Ω²")),
        stat("r_squared", "R² (centred)", sig(0.999_963, 6), None),
        stat("adj_r_squared", "Adjusted R²", sig(0.999_961, 6), None),
        stat(
            "s",
            "Standard error of the estimate s",
            num(13.043),
            Some("Ω"),
        ),
        stat("aicc", "AICc", num(132.81), None),
        stat("bic", "BIC", num(134.37), None),
    ];
    ctx.calibration_figures = vec![];
    ctx.diagnostics = vec![
        DiagnosticRow {
            test: "Runs test (residual signs in T order)".into(),
            statistic: "11 runs".into(),
            p_value: p_value(0.2143),
            conclusion: "no excess of long runs".into(),
            note: Some("exact, 12 + / 13 −".into()),
        },
        DiagnosticRow {
            test: "Durbin–Watson".into(),
            statistic: fixed(1.87, 2),
            p_value: "—".into(),
            conclusion: "no sign of serial correlation".into(),
            note: None,
        },
        DiagnosticRow {
            test: "Shapiro–Wilk (Pearson residuals)".into(),
            statistic: format!("W = {}", fixed(0.9613, 4)),
            p_value: p_value(0.4468),
            conclusion: "consistent with normal residuals".into(),
            note: Some("Royston's algorithm".into()),
        },
        DiagnosticRow {
            test: "Largest Cook's distance".into(),
            statistic: fixed(0.31, 2),
            p_value: "—".into(),
            conclusion: "row 25 (T = 40 °C); flagged, not dropped".into(),
            note: None,
        },
    ];
    ctx.compare = vec![CompareRow {
        model: "R = R25 * exp(B * (1/(T + 273.15) - 1/298.15) + C * (1/(T + 273.15) - 1/298.15)^2)"
            .into(),
        parameters: "3".into(),
        ssr: num(3_655.2),
        aicc: num(133.98),
        delta_aicc: fixed(1.17, 2),
        f_test: "F(1, 22) = 1.55".into(),
        p_value: p_value(0.2263),
        note: Some("the quadratic term is not needed".into()),
    }];
    ctx.plots = demo_plots(&s);
    ctx.warnings = vec![
        "Row 25 (T = 40 °C) has the largest Cook's distance (0.31); it is flagged, not dropped."
            .into(),
    ];
    ctx.traceability = Traceability {
        run_id: fitwright::report::write::run_id(DEMO_EPOCH, DEMO_INPUT_HASH)
            .expect("demo run id is valid"),
        generated_at: fitwright::report::write::utc_timestamp(DEMO_EPOCH)
            .expect("demo time is valid"),
        time_from_source_date_epoch: true,
        recipe: HashedFile {
            path: "recipes/probe-c3.toml".into(),
            sha256: "c0ffee00d15ea5e0ba5eba11dec0ded0feedface0ddba11cafef00d5ca1ab1e0".into(),
        },
        data_files: vec![
            HashedFile {
                path: "../demo-data/probes/c3-2026q4-1.csv".into(),
                sha256: "8d0c5e1f3a2b47c69e18d7a0b5f4c3e2d1a09b8c7d6e5f4a3b2c1d0e9f8a7b6c".into(),
            },
            HashedFile {
                path: "../demo-data/probes/c3-2026q4-2.csv".into(),
                sha256: "1a2b3c4d5e6f708192a3b4c5d6e7f8091a2b3c4d5e6f708192a3b4c5d6e7f809".into(),
            },
        ],
        templates_sha256: fitwright::report::Templates::builtin()
            .expect("built-in templates compile")
            .sha256(),
        templates_source: "built-in".into(),
        tool_version: format!("fitwright {}", env!("CARGO_PKG_VERSION")),
        settings: vec![
            KeyValue::new("fit.method", "auto"),
            KeyValue::new("fit.transform", "auto → ln(R)"),
            KeyValue::new("fit.weights", "none"),
            KeyValue::new("fit.confidence", "0.95"),
            KeyValue::new("fit.lm.tolerance", full(1e-12)),
        ],
    };
    ctx.signoff = vec![
        "Performed by".into(),
        "Reviewed by".into(),
        "Approved by".into(),
    ];
    ctx
}

fn demo_plots(s: &DemoSeries) -> Vec<fitwright::report::Plot> {
    let t_axis = AxisLabel::new("T", Some("°C"));
    let r_axis = AxisLabel::new("R", Some("Ω"));
    let fit = plot::fit_plot(&FitPlot {
        x: &s.t,
        y: &s.r,
        curve_x: &s.curve_t,
        curve_y: &s.curve_r,
        confidence: Some(Band {
            lower: &s.conf_lo,
            upper: &s.conf_hi,
            label: "95 % confidence band",
        }),
        prediction: Some(Band {
            lower: &s.pred_lo,
            upper: &s.pred_hi,
            label: "95 % prediction band",
        }),
        x_axis: t_axis.clone(),
        y_axis: r_axis.clone(),
    })
    .expect("demo fit plot draws")
    .into_plot(
        "fit",
        "Data, fitted curve and bands",
        Some("Bands are pointwise, from the linear approximation at the estimate."),
    )
    .expect("valid name");
    let res_t = plot::residual_plot(&ResidualPlot {
        x: &s.t,
        residuals: &s.residuals,
        x_axis: t_axis.clone(),
        y_axis: AxisLabel::new("residual R − R̂", Some("Ω")),
    })
    .expect("demo residual plot draws")
    .into_plot("residuals-t", "Residuals against T", None)
    .expect("valid name");
    let res_fit = plot::residual_plot(&ResidualPlot {
        x: &s.fitted,
        residuals: &s.residuals,
        x_axis: AxisLabel::new("fitted R̂", Some("Ω")),
        y_axis: AxisLabel::new("residual R − R̂", Some("Ω")),
    })
    .expect("demo residual plot draws")
    .into_plot(
        "residuals-fitted",
        "Residuals against the fitted value",
        None,
    )
    .expect("valid name");
    let normal = plot::normal_probability_plot(&NormalPlot {
        residuals: &s.residuals,
        y_axis: AxisLabel::new("residual", Some("Ω")),
    })
    .expect("demo normal plot draws")
    .into_plot(
        "normal",
        "Normal probability plot of residuals",
        Some("Blom plotting positions; the line passes through the quartiles."),
    )
    .expect("valid name");
    let lx: Vec<f64> =
        s.t.iter()
            .map(|t| 1.0 / (t + 273.15) - 1.0 / 298.15)
            .collect();
    let ly: Vec<f64> = s.r.iter().map(|r| r.ln()).collect();
    let line_x = vec![
        lx.iter().copied().fold(f64::INFINITY, f64::min),
        lx.iter().copied().fold(f64::NEG_INFINITY, f64::max),
    ];
    let line_y: Vec<f64> = line_x.iter().map(|x| R25.ln() + B * x).collect();
    let linear = plot::linearized_plot(&LinearizedPlot {
        x: &lx,
        y: &ly,
        line_x: &line_x,
        line_y: &line_y,
        x_axis: AxisLabel::new("1/(T + 273.15) − 1/298.15", Some("1/K")),
        y_axis: AxisLabel::new("ln(R)", None),
    })
    .expect("demo linearized plot draws")
    .into_plot(
        "linearized",
        "Linearized view: ln(R) against the basis",
        None,
    )
    .expect("valid name");
    let runs = [
        ("2025-11-27", 3_909.2, Some(5.8), false),
        ("2026-02-26", 3_913.0, Some(6.1), false),
        ("2026-05-28", 3_915.7, Some(5.5), false),
        ("2026-08-29", 3_909.5, Some(5.2), false),
        ("2026-11-28", B, Some(5.11), true),
    ]
    .map(|(label, value, std_error, current)| TrendPoint {
        label: label.into(),
        value,
        std_error,
        current,
    });
    let trend = plot::trend_plot(&TrendPlot {
        runs: &runs,
        y_axis: AxisLabel::new("B", Some("K")),
        min: Some(3_800.0),
        max: Some(4_000.0),
    })
    .expect("demo trend plot draws")
    .into_plot(
        "trend-b",
        "B over the history of this recipe",
        Some("Value ± 1 standard error per run; dashed lines are the acceptance limits."),
    )
    .expect("valid name");
    vec![fit, res_t, res_fit, normal, linear, trend]
}

/// Strings that must never become markup.
pub const XSS_SCRIPT: &str = "<script>alert('title')</script>";
pub const XSS_IMG: &str = "\"><img src=x onerror=alert(1)>";

/// The demo context with hostile text in every kind of user string, and a
/// rejected verdict with a failed and a not-applicable row.
pub fn hostile_context() -> ReportContext {
    let mut ctx = demo_context();
    ctx.title = format!("Probe {XSS_SCRIPT} {XSS_IMG}");
    ctx.notes = format!(
        "Notes with {XSS_SCRIPT} inline and an attribute break {XSS_IMG}.\n\n\
<script>alert('block')</script>\n\n\
<img src=\"http://example.invalid/track.png\" onerror=\"alert(2)\">\n\n\
![photo](https://example.invalid/p.png) and [link](javascript:alert(3)) and <https://example.invalid/>.\n"
    );
    ctx.verdict = Verdict {
        code: VerdictCode::Rejected,
        detail: Some(format!("detail {XSS_IMG}")),
    };
    ctx.criteria[1].status = CriterionStatus::Fail;
    ctx.criteria[1].measured = "27 Ω".into();
    ctx.criteria[3].status = CriterionStatus::NotApplicable;
    ctx.criteria[3].measured = "—".into();
    ctx.criteria[3].note = Some(format!("too few residuals of one sign {XSS_SCRIPT}"));
    ctx.data.files[0].path = format!("../data/{XSS_IMG}.csv");
    ctx.model.equation = format!("R = a * x {XSS_SCRIPT}");
    ctx.warnings.push(format!("warning {XSS_SCRIPT} {XSS_IMG}"));
    ctx.signoff.push(format!("Role {XSS_IMG}"));
    ctx
}
