//! The calibration-record parts of a report (SPEC §14) on a hand-built context: the demo
//! context plus invented record, as-found, uncertainty and coefficient values.

use scraper::{Html, Selector};

use crate::demo::demo_context;
use fitwright::report::{
    BudgetRow, CalibrationRecord, CoefficientRow, DeviationRow, DeviationTable, KeyValue,
    MeasurementCondition, ReadOffRow, ReportContext, ReportRecord, StandardRow, Templates,
    UncertaintySection,
};

/// The demo context as a calibration record (all values invented).
pub fn record_context() -> ReportContext {
    let mut ctx = demo_context();
    ctx.record = ReportRecord {
        report_id: "probe-c3-20261128T101500Z-3f9a61c2".into(),
        issued_on: "2026-11-28".into(),
        measured_on: Some("2026-11-27".into()),
        supersedes: Some("probe-c3-20261127T160200Z-0b1c2d3e".into()),
    };
    ctx.decision_rule = Some("guard band w = U (ILAC-G8:09/2019 4.2.2)".into());
    ctx.calibration = Some(CalibrationRecord {
        item: vec![KeyValue::new("Asset or serial number", "CR-C3")],
        procedure: vec![
            KeyValue::new("Procedure", "CAL-TH-004"),
            KeyValue::new("Revision", "C"),
        ],
        standards: vec![StandardRow {
            id: "REF-PRT-2".into(),
            certificate: "C-2291".into(),
            due: "2027-03-01".into(),
            uncertainty: "u = 0.01 °C (T)".into(),
            status: "current on the measurement date 2026-11-27".into(),
        }],
        conditions: vec![MeasurementCondition {
            name: "ambient".into(),
            value: "21.3 °C".into(),
            limits: "18 … 25 °C".into(),
            status: "within limits".into(),
        }],
    });
    let row = |origin: &str, dev: &str, decision: &str| DeviationRow {
        origin: origin.into(),
        reference: "10.000".into(),
        indicated: "10.031".into(),
        deviation: dev.into(),
        limit: "±0.05".into(),
        expanded: "0.021".into(),
        decision: decision.into(),
        decision_code: decision.replace(' ', "-"),
    };
    ctx.as_found = Some(DeviationTable {
        against: "the curve of run 20261028T090000Z-aa11bb22 (2026-10-28)".into(),
        tolerance: "±0.05 °C".into(),
        rule: "guard-band".into(),
        summary: "1 of 2 points pass (1 pass, 1 conditional pass)".into(),
        within: false,
        note: Some("U from the listed components".into()),
        reference_label: "T reference (°C)".into(),
        indicated_label: "T read through the curve (°C)".into(),
        rows: vec![
            row("c3.csv:4", "0.011", "pass"),
            row("c3.csv:5", "0.041", "conditional pass"),
        ],
    });
    ctx.uncertainty = Some(UncertaintySection {
        coverage: "k = 2".into(),
        budget_point: "T read from R = 15843 Ω at T = 15 °C".into(),
        budget: vec![BudgetRow {
            component: "calibration curve (fit)".into(),
            u: "9.1 Ω (R)".into(),
            sensitivity: "-0.0023".into(),
            contribution: "0.021 °C".into(),
            dof: "23".into(),
        }],
        combined: "0.021 °C".into(),
        expanded: "T = 15.000 ± 0.042 °C (U, k = 2)".into(),
        range: vec![ReadOffRow {
            given: "R = 15843 Ω".into(),
            value: "T = 15.000 ± 0.042 °C".into(),
            u_c: "0.021".into(),
            k: "2".into(),
            expanded: "0.042".into(),
        }],
        notes: vec!["Read-offs are inverse.".into()],
    });
    ctx.coefficients = vec![CoefficientRow {
        name: "B".into(),
        value: "3921.6000000000004".into(),
        unit: Some("K".into()),
    }];
    ctx
}

fn html(ctx: &ReportContext) -> (String, Html) {
    let templates = Templates::builtin().expect("built-in templates compile");
    let text = templates.render_html(ctx).expect("renders");
    let doc = Html::parse_document(&text);
    (text, doc)
}

fn sel(css: &str) -> Selector {
    Selector::parse(css).expect("test invariant: valid selector")
}

#[test]
fn record_sections_sit_between_verdict_and_data_and_uncertainty_after_parameters() {
    let (_, doc) = html(&record_context());
    let ids: Vec<String> = doc
        .select(&sel("main > section"))
        .filter_map(|s| s.value().id().map(str::to_string))
        .collect();
    assert_eq!(
        ids,
        [
            "notes",
            "verdict",
            "record",
            "as-found",
            "data",
            "model",
            "parameters",
            "uncertainty",
            "statistics",
            "plots",
            "warnings",
            "traceability",
            "signoff",
            "caution"
        ]
    );
}

#[test]
fn print_shows_report_id_page_x_of_y_and_the_end_mark() {
    let ctx = record_context();
    let (text, doc) = html(&ctx);
    assert!(text.contains(r#"content: "page " counter(page) " of " counter(pages)"#));
    assert!(text.contains(&format!(r#"content: "Report {}""#, ctx.record.report_id)));
    let end = doc.select(&sel("footer.end")).next().expect("end mark");
    let end_text: String = end.text().collect();
    assert!(end_text.starts_with("End of report"), "{end_text}");
    assert!(end_text.contains(&ctx.record.report_id));
    let amend = doc
        .select(&sel("header .notice.amend"))
        .next()
        .expect("amendment notice");
    assert!(
        amend
            .text()
            .collect::<String>()
            .contains("probe-c3-20261127T160200Z-0b1c2d3e")
    );
}

#[test]
fn coefficient_table_keeps_full_precision_and_says_do_not_round() {
    let (_, doc) = html(&record_context());
    let heading: String = doc
        .select(&sel("#parameters h3"))
        .map(|h| h.text().collect::<String>())
        .find(|t| t.contains("Coefficients"))
        .expect("coefficient heading");
    assert!(heading.contains("do not round"), "{heading}");
    let cell: String = doc
        .select(&sel("table.coefficients td.num"))
        .next()
        .expect("value cell")
        .text()
        .collect();
    assert_eq!(cell, "3921.6000000000004");
}

#[test]
fn decision_rule_is_printed_beside_the_verdict() {
    let (_, doc) = html(&record_context());
    let rule: Vec<String> = doc
        .select(&sel("#verdict .decision-rule"))
        .map(|p| p.text().collect())
        .collect();
    assert!(rule.iter().any(|r| r.contains("ILAC-G8")), "{rule:?}");
    assert!(rule.iter().any(|r| r.starts_with("As found")), "{rule:?}");
}

#[test]
fn golden_markdown_of_the_calibration_record() {
    crate::golden::check_golden("calibration-record", &record_context());
}
