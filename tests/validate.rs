//! `fitwright validate`: the software validation report (SPEC §14, ISO/IEC 17025 §7.11.2).
//! Sources: the exact problems' generating parameters (exact by construction); the NIST ITL
//! StRD files read in place; and docs/conformance.md, the LRE table the project's hand-coded
//! StRD models produce (tests/strd_conformance.rs), which validate — fitting the same files
//! through equations parsed by the expression engine — must reproduce.

mod support;
mod util;

use fitwright::validate::{self, Suite};
use support::strd_data::strd_dir_or_skip;
use util::Case;

#[test]
fn validate_without_strd_writes_html_and_markdown_with_exact_problems_at_lre_10() {
    let case = Case::new();
    let out = case.run(&["validate", "--out", "val"]);
    out.expect_code(0)
        .expect_contains(&["exact problems: every parameter LRE ≥ 10", "wrote"]);
    let md = std::fs::read_to_string(case.path("val/validation.md")).expect("markdown");
    let html = std::fs::read_to_string(case.path("val/validation.html")).expect("html");
    assert!(md.contains("not given (exact problems only)"));
    assert!(md.contains("**End of validation report**"));
    assert!(md.contains(&format!("fitwright {}", env!("CARGO_PKG_VERSION"))));
    assert!(
        md.contains(std::env::consts::ARCH.replace('_', "\\_").as_str()),
        "platform named"
    );
    let doc = scraper::Html::parse_document(&html);
    let sel = scraper::Selector::parse("table.lre tbody tr").expect("selector");
    assert_eq!(doc.select(&sel).count(), validate::problems::EXACT.len());
    assert!(
        html.contains(r#"content:"page " counter(page) " of " counter(pages)"#),
        "page x of y in print"
    );
    assert!(html.contains("End of validation report"));
    for c in validate::exact_cases() {
        assert!(c.min_param() >= 10.0, "{}: {:?}", c.name, c.param_lre);
    }
}

#[test]
fn a_folder_that_is_not_strd_is_a_usage_error() {
    let case = Case::new();
    case.file("empty/readme.txt", "nothing");
    case.run(&["validate", "--strd", "empty", "--out", "val"])
        .expect_code(2)
        .expect_contains(&["is not a NIST StRD folder"]);
    assert!(!case.path("val").exists());
}

/// (problem, start or 0 for linear) → (min parameter LRE, min SD LRE) from docs/conformance.md.
fn conformance_table() -> Vec<(String, usize, f64, f64)> {
    let path = std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("docs/conformance.md");
    let text = std::fs::read_to_string(path).expect("docs/conformance.md");
    let mut rows = Vec::new();
    let mut section = "";
    for line in text.lines() {
        if line.starts_with("## Linear") {
            section = "linear";
        } else if line.starts_with("## Nonlinear") {
            section = "nonlinear";
        } else if line.starts_with("## ") {
            section = "";
        }
        let cells: Vec<&str> = line.split('|').map(str::trim).collect();
        if section.is_empty()
            || cells.len() < 6
            || cells[1] == "Problem"
            || cells[1].starts_with("---")
        {
            continue;
        }
        let num = |s: &str| s.parse::<f64>().ok();
        match section {
            // | Problem | Difficulty | p | Parameters LRE | SDs LRE | …
            "linear" => {
                if let (Some(a), Some(b)) = (num(cells[4]), num(cells[5])) {
                    rows.push((cells[1].to_string(), 0, a, b));
                }
            }
            // | Problem | Difficulty | Start | Parameters LRE | SDs LRE | …
            _ => {
                if let (Ok(start), Some(a), Some(b)) =
                    (cells[3].parse::<usize>(), num(cells[4]), num(cells[5]))
                {
                    rows.push((cells[1].to_string(), start, a, b));
                }
            }
        }
    }
    rows
}

#[test]
fn validate_reproduces_the_lre_table_of_the_strd_files() {
    let Some(dir) = strd_dir_or_skip("validate_reproduces_the_lre_table_of_the_strd_files") else {
        return;
    };
    let v = validate::validate(Some(&dir), "2026-11-28T10:15:00Z".into()).expect("validates");
    assert!(
        v.met(),
        "{:?}",
        v.criteria.iter().filter(|c| !c.met).collect::<Vec<_>>()
    );
    let table = conformance_table();
    assert_eq!(table.len(), 11 + 54, "docs/conformance.md rows");
    let mut differences = Vec::new();
    for (name, start, param, sd) in &table {
        let case = v
            .cases
            .iter()
            .find(|c| c.suite != Suite::Exact && c.name == *name && c.start.unwrap_or(0) == *start)
            .unwrap_or_else(|| panic!("{name} start {start} missing from the validation"));
        // Both tables print one decimal; a fit through the expression engine may round the
        // last bits differently, so allow 0.3 (LRE is logarithmic: a factor of 2 in the error).
        if (case.min_param() - param).abs() > 0.3
            || case.min_sd().is_some_and(|s| (s - sd).abs() > 0.3)
        {
            differences.push(format!(
                "{name} start {start}: parameters {:.1} vs {param}, SDs {:?} vs {sd}",
                case.min_param(),
                case.min_sd()
            ));
        }
    }
    assert!(differences.is_empty(), "{}", differences.join("\n"));
}
