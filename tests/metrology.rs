//! Metrology records end to end (SPEC §14): recipes with standards, conditions, uncertainty
//! and decision rules run through the binary, and the stored results read back.
//!
//! The data are invented: a straight line y = 2 + 0.5·x with a fixed ±0.01 pattern of
//! deviations, so every expected number follows from the arithmetic stated beside it.

mod util;

use fitwright::result::ResultDoc;
use util::Case;

/// The fixed deviation pattern added to the line (invented).
const NOISE: [f64; 11] = [
    0.004, -0.006, 0.002, 0.008, -0.003, -0.007, 0.005, -0.001, 0.006, -0.009, 0.001,
];

fn data(shift: f64) -> String {
    let mut s = String::from("x,y\n");
    for (i, e) in NOISE.iter().enumerate() {
        let x = i as f64;
        s.push_str(&format!("{x},{:.6}\n", 2.0 + 0.5 * x + e + shift));
    }
    s
}

/// A recipe over `data.csv` with the given extra TOML.
fn recipe(extra: &str) -> String {
    format!(
        r#"name = "line-cal"
[data]
files = ["data.csv"]
columns = {{ x = "x", y = "y" }}
units = {{ x = "bar", y = "mA" }}
[model]
equation = "y = a + b * x"
[model.parameters]
a = {{}}
b = {{}}
[acceptance]
r_squared_min = 0.99
{extra}
[report]
formats = ["json", "md"]
dir = "out"
"#
    )
}

const RECORD: &str = r#"
[item]
description = "Pressure transmitter"
id = "PT-31"
[procedure]
id = "CAL-PR-002"
revision = "B"
[[standards]]
id = "REF-DWT-1"
certificate = "C-0412"
due = 2027-01-15
u = 0.002
applies_to = "x"
[conditions]
measured_on = 2026-11-28
ambient = { value = 21.3, min = 18.0, max = 25.0, unit = "°C" }
[uncertainty]
coverage_k = 2
components = [ { name = "readout", u = 0.05, applies_to = "y" } ]
"#;

fn result_of(case: &Case) -> ResultDoc {
    let out = case.path("out");
    let mut runs: Vec<_> = std::fs::read_dir(&out)
        .expect("out/")
        .filter_map(|e| e.ok())
        .map(|e| e.path())
        .filter(|p| p.join("result.json").is_file())
        .collect();
    runs.sort();
    let last = runs.last().expect("a run folder");
    ResultDoc::read(&last.join("result.json")).expect("result.json reads")
}

fn history_of(case: &Case) -> Vec<fitwright::history::HistoryLine> {
    fitwright::history::read(&case.path("out/history.jsonl"))
        .expect("history")
        .0
}

#[test]
fn expired_standard_makes_the_recipe_invalid_naming_it_and_both_dates() {
    let case = Case::new();
    let text = recipe(&RECORD.replace("due = 2027-01-15", "due = 2026-11-27"));
    case.file("r.toml", &text).file("data.csv", &data(0.0));
    let due_line = text
        .lines()
        .position(|l| l.starts_with("due ="))
        .expect("due line")
        + 1;
    for cmd in [["check", "r.toml"], ["run", "r.toml"]] {
        let out = case.run(&cmd);
        out.expect_code(2).expect_contains(&[
            "`REF-DWT-1` (certificate C-0412)",
            "due 2026-11-27, measured on 2026-11-28",
            &format!("r.toml:{due_line}:7"),
        ]);
    }
    assert!(
        !case.path("out").exists(),
        "an invalid recipe writes nothing"
    );
}

#[test]
fn component_applying_to_an_unknown_variable_is_an_input_error() {
    let case = Case::new();
    case.file(
        "r.toml",
        &recipe(&RECORD.replace("applies_to = \"y\"", "applies_to = \"Y\"")),
    )
    .file("data.csv", &data(0.0));
    case.run(&["check", "r.toml"])
        .expect_code(2)
        .expect_contains(&["names no variable of the model", "did you mean `y`?"]);
}

#[test]
fn condition_outside_its_limits_is_a_criterion_not_met() {
    let case = Case::new();
    case.file(
        "r.toml",
        &recipe(&RECORD.replace("value = 21.3", "value = 25.4")),
    )
    .file("data.csv", &data(0.0));
    case.run(&["run", "r.toml"]).expect_code(1);
    let doc = result_of(&case);
    let row = doc
        .criteria
        .iter()
        .find(|c| c.key == "conditions.ambient")
        .expect("ambient row");
    assert_eq!(row.status, "fail");
    assert_eq!(row.limit, "18 … 25 °C");
    assert_eq!(row.measured, "25.4 °C");
    assert_eq!(doc.verdict_wording, "criteria not met");
}

#[test]
fn as_found_against_a_deliberately_shifted_curve_sees_the_shift_at_every_point() {
    // Run 1 on the line; run 2 on the same data raised by 0.3 mA, with --as-found against
    // run 1's curve. Each as-found deviation is then 0.3 plus run 1's residual at that
    // point (arithmetic: y₂ − f₁(x) = y₁ + 0.3 − f₁(x)). Tolerance ±0.5 mA, U = 2·0.05 mA
    // (the readout; the standard's 0.002 bar goes in through the slope 0.5 mA/bar:
    // √(0.05² + 0.001²) = 0.05001) under the guard band: 0.3 + e ≤ 0.5 − U passes.
    let case = Case::new();
    let extra = format!(
        "{RECORD}[decision]\nrule = \"guard-band\"\ntolerance = 0.5\n[acceptance.drift_curve]\nmax_abs_change = 0.2\n"
    );
    case.file("r.toml", &recipe(&extra))
        .file("data.csv", &data(0.0));
    case.run(&["run", "r.toml"]).expect_code(0);
    let first = result_of(&case);
    assert!(first.as_found.is_none());
    case.file("data.csv", &data(0.3));
    std::thread::sleep(std::time::Duration::from_millis(1100));
    let out = case.run(&["run", "--as-found", "r.toml"]);
    let second = result_of(&case);
    assert_ne!(second.run_id, first.run_id);
    let af = second.as_found.as_ref().expect("as-found block");
    assert_eq!(af.against_run, first.run_id);
    assert_eq!(af.deviations.points.len(), 11);
    let slope = first.param("b").expect("b").value;
    let u_expected = 2.0 * (0.05f64.powi(2) + (slope * 0.002).powi(2)).sqrt();
    for (p, r) in af.deviations.points.iter().zip(&first.residuals) {
        let d = p.deviation.expect("read");
        assert!(
            (d - (0.3 + r.residual)).abs() < 1e-9,
            "{p:?} vs residual {}",
            r.residual
        );
        assert!((p.expanded - u_expected).abs() < 1e-12);
        assert_eq!(p.decision, fitwright::metrology::Decision::Pass);
    }
    assert!(af.within_tolerance);
    // The new curve is the old one raised by 0.3 (same noise, same x): the drift row sees it.
    let drift = second
        .criteria
        .iter()
        .find(|c| c.key == "drift_curve.max_abs_change")
        .expect("drift row");
    let gap = drift.measured_value.expect("measured");
    assert!((gap - 0.3).abs() < 1e-6, "curve change {gap}");
    assert_eq!(drift.status, "fail", "0.3 mA > 0.2 mA");
    out.expect_code(1);
}

#[test]
fn as_found_inside_the_tolerance_by_less_than_u_is_a_conditional_pass() {
    // Shift 0.45 mA: inside ±0.5 mA by 0.05 ± 0.01, less than U ≈ 0.1 mA (ILAC-G8 guard band).
    let case = Case::new();
    let extra = format!("{RECORD}[decision]\nrule = \"guard-band\"\ntolerance = 0.5\n");
    case.file("r.toml", &recipe(&extra))
        .file("data.csv", &data(0.0));
    case.run(&["run", "r.toml"]).expect_code(0);
    case.file("data.csv", &data(0.45));
    std::thread::sleep(std::time::Duration::from_millis(1100));
    case.run(&["run", "--as-found", "r.toml"]);
    let doc = result_of(&case);
    let af = doc.as_found.as_ref().expect("as-found block");
    assert!(
        af.deviations
            .points
            .iter()
            .all(|p| p.decision == fitwright::metrology::Decision::ConditionalPass),
        "{:?}",
        af.deviations.points
    );
    assert!(!af.within_tolerance);
    assert!(
        af.summary.starts_with("0 of 11 points pass"),
        "{}",
        af.summary
    );
}

#[test]
fn as_found_without_an_earlier_run_is_an_input_error() {
    let case = Case::new();
    let extra = format!("{RECORD}[decision]\ntolerance = 0.5\n");
    case.file("r.toml", &recipe(&extra))
        .file("data.csv", &data(0.0));
    case.run(&["run", "--as-found", "r.toml"])
        .expect_code(2)
        .expect_contains(&["needs an earlier run whose criteria were met"]);
}

#[test]
fn guard_band_turns_a_point_inside_by_less_than_u_into_a_criterion_not_met() {
    // At x = 5 the line gives 4.5 + the fitted offset; expect 4.5, tolerance 0.06 mA.
    // The deviation (a few thousandths) is inside ±0.06, but U ≈ 2·√(u_fit² + 0.05² +
    // (0.5·0.002)²) ≈ 0.1 mA exceeds the tolerance: simple acceptance passes, the guard band
    // (acceptance limit 0.06 − U < 0) cannot.
    let point = "[[acceptance.points]]\nat = { x = 5.0 }\nexpect = 4.5\ntolerance = 0.06\n";
    for (rule, status, code) in [("simple", "pass", 0), ("guard-band", "fail", 1)] {
        let case = Case::new();
        let extra = format!("{point}{RECORD}[decision]\nrule = \"{rule}\"\n");
        case.file("r.toml", &recipe(&extra))
            .file("data.csv", &data(0.0));
        case.run(&["run", "r.toml"]).expect_code(code);
        let doc = result_of(&case);
        let row = doc
            .criteria
            .iter()
            .find(|c| c.key == "points")
            .expect("point row");
        assert_eq!(row.status, status, "{rule}: {row:?}");
        let note = row.note.as_deref().unwrap_or("");
        if rule == "guard-band" {
            assert!(note.contains("conditional pass"), "{note}");
            assert!(row.limit_value < 0.0, "0.06 − U");
        }
    }
}

#[test]
fn tolerance_x_reads_the_point_through_the_inverse() {
    // expect y = 4.6 at x = 5 on a curve ≈ 2 + 0.5·x: the curve reads x ≈ 5.2 there, so the
    // deviation in x is ≈ 0.2 bar = 0.1 mA / 0.5 mA/bar (inverse of a straight line).
    let point = "[[acceptance.points]]\nat = { x = 5.0 }\nexpect = 4.6\ntolerance_x = 0.25\n";
    let case = Case::new();
    case.file("r.toml", &recipe(point))
        .file("data.csv", &data(0.0));
    case.run(&["run", "r.toml"]).expect_code(0);
    let doc = result_of(&case);
    let row = doc
        .criteria
        .iter()
        .find(|c| c.key == "points")
        .expect("point row");
    let a = doc.param("a").expect("a").value;
    let b = doc.param("b").expect("b").value;
    let expected = ((4.6 - a) / b - 5.0).abs();
    let got = row.measured_value.expect("measured");
    assert!((got - expected).abs() < 1e-9, "{got} vs {expected}");
    assert!((got - 0.2).abs() < 0.03);
    assert_eq!(row.status, "pass");
}

#[test]
fn stored_result_gives_predict_the_same_read_off_and_its_warnings() {
    use fitwright::metrology::warnings::{Reading, predict_warnings};
    use fitwright::metrology::{ModelCurve, read_off};
    let case = Case::new();
    case.file("r.toml", &recipe(RECORD))
        .file("data.csv", &data(0.0));
    case.run(&["run", "r.toml"]).expect_code(0);
    let doc = result_of(&case);
    let m = doc.metrology.as_ref().expect("metrology block");
    assert_eq!(m.report_id, format!("line-cal-{}", doc.run_id));
    assert_eq!(
        m.measured_on.map(|d| d.to_string()).as_deref(),
        Some("2026-11-28")
    );
    let curve = ModelCurve::from_result(&doc).expect("curve from the result");
    for stored in &m.read_offs {
        let again = read_off::inverse(&curve, stored.input, 1, &m.budget, false).expect("reads");
        assert_eq!(again.len(), 1);
        assert!((again[0].value - stored.value).abs() <= 1e-12 * stored.value.abs().max(1.0));
        assert!((again[0].expanded.expanded - stored.expanded.expanded).abs() < 1e-15);
    }
    // Inside the range, criteria met, nothing later: no warning.
    let history = history_of(&case);
    let at = [("x".to_string(), 4.0)];
    assert!(predict_warnings(&doc, &history, &Reading::At(&at)).is_empty());
    // Outside the range of x (0 … 10 bar).
    let far = [("x".to_string(), 12.0)];
    let w = predict_warnings(&doc, &history, &Reading::At(&far));
    assert_eq!(w.len(), 1);
    assert!(
        w[0].contains("outside the calibrated range [0, 10]"),
        "{w:?}"
    );
    // A later amendment supersedes it.
    case.file(
        "r.toml",
        &recipe(RECORD).replace(
            "[report]\n",
            &format!("[report]\nsupersedes = \"{}\"\n", m.report_id),
        ),
    );
    std::thread::sleep(std::time::Duration::from_millis(1100));
    case.run(&["run", "r.toml"]).expect_code(0);
    let w = predict_warnings(&doc, &history_of(&case), &Reading::Inverse(4.0));
    assert_eq!(w.len(), 1, "{w:?}");
    assert!(w[0].contains("superseded by the amended report"), "{w:?}");
}

#[test]
fn demo_recipe_probe_ref_cal_runs_as_the_readme_shows() {
    // scripts/demo_probe_ref_cal.sh: last year's calibration, then this year's with
    // --as-found (the README excerpt). The data are invented with a fixed seed
    // (scripts/make_probe_ref_data.py), so the as-found outcome is fixed: the probe's B drifted
    // from 3947 to 3953.5 K, which reads 0.08 °C low at −30 °C, inside ±0.1 °C by less than U.
    let out = tempfile::tempdir().expect("temporary folder");
    let root = util::repo_root();
    let status = std::process::Command::new("sh")
        .arg(root.join("scripts/demo_probe_ref_cal.sh"))
        .arg(out.path())
        .env("FITWRIGHT", env!("CARGO_BIN_EXE_fitwright"))
        .output()
        .expect("run the demo script");
    assert!(
        status.status.success(),
        "{}{}",
        String::from_utf8_lossy(&status.stdout),
        String::from_utf8_lossy(&status.stderr)
    );
    let dir = out.path().join("probe-ref-cal");
    let mut runs: Vec<_> = std::fs::read_dir(&dir)
        .expect("runs")
        .filter_map(|e| e.ok().map(|e| e.path()))
        .filter(|p| p.join("result.json").is_file())
        .collect();
    runs.sort();
    assert_eq!(runs.len(), 2);
    let doc = ResultDoc::read(&runs[1].join("result.json")).expect("this year's result");
    assert_eq!(doc.verdict, "accepted");
    let m = doc.metrology.as_ref().expect("record");
    assert_eq!(
        m.supersedes.as_deref(),
        Some("probe-ref-cal-20261127T140000Z-4c1d9e27")
    );
    assert_eq!(m.standards.len(), 1);
    assert_eq!(m.conditions.len(), 2);
    assert_eq!(m.budget.components.len(), 3, "standard, resolution, bath");
    assert_eq!(m.read_offs.len(), 5);
    let af = doc.as_found.as_ref().expect("as found");
    assert_eq!(
        af.summary,
        "18 of 19 points pass (18 pass, 1 conditional pass)"
    );
    let md = std::fs::read_to_string(runs[1].join("report.md")).expect("report.md");
    for section in [
        "## Calibration record",
        "## As found",
        "## As left",
        "## Measurement uncertainty of read-off values",
        "do not round",
        "**End of report**",
    ] {
        assert!(md.contains(section), "report.md lacks {section}");
    }
}

#[test]
fn back_calculated_standards_follow_ich_m10_fractions() {
    // An invented assay line A = 0.05 + 0.01·c at 0 (blank), 2, 5, 10, 20, 50, 100 ng/mL, one
    // standard per level, exact except the 10 ng/mL standard read 20 % high (A = 0.17
    // instead of 0.15). Back-calculated through the fitted line that one is ≈ +20 % (outside
    // ±15 %); the other five stay within a few percent: 5 of 6 = 83 % ≥ 75 % passes (ICH M10
    // criteria, from memory); raising min_fraction to 0.9 fails it.
    let csv = "c,A\n0,0.05\n2,0.07\n5,0.10\n10,0.17\n20,0.25\n50,0.55\n100,1.05\n";
    for (fraction, status) in [(0.75, "pass"), (0.9, "fail")] {
        let case = Case::new();
        let text = format!(
            r#"name = "assay"
[data]
files = ["data.csv"]
columns = {{ c = "c", A = "A" }}
units = {{ c = "ng/mL", A = "AU" }}
[model]
equation = "A = b0 + b1 * c"
[model.parameters]
b0 = {{}}
b1 = {{}}
[acceptance]
back_calculated = {{ within = 0.15, at_lowest = 0.20, min_fraction = {fraction} }}
[report]
formats = ["json"]
dir = "out"
"#
        );
        case.file("r.toml", &text).file("data.csv", csv);
        case.run(&["run", "r.toml"]);
        let doc = result_of(&case);
        let row = doc
            .criteria
            .iter()
            .find(|c| c.key == "back_calculated")
            .expect("row");
        assert_eq!(row.status, status, "{row:?}");
        assert_eq!(row.measured, "5 of 6 (83.3 %)");
        let note = row.note.as_deref().unwrap_or("");
        assert!(note.contains("10 ng/mL read back as"), "{note}");
        assert!(
            note.contains("1 blank or zero standard(s) left out"),
            "{note}"
        );
    }
}
