//! Writes docs/conformance.md, the LRE table of every NIST StRD problem (source: NIST ITL,
//! Statistical Reference Datasets, read in place). Run on demand:
//! `cargo test --test strd_conformance -- --ignored write_conformance_table`.
//! The thresholds themselves are asserted by tests/strd_linear.rs and tests/strd_nonlinear.rs.

mod support;

use support::conformance_table::{COMMAND, render};
use support::strd_data::strd_dir_or_skip;

#[test]
#[ignore = "writes docs/conformance.md; run on demand"]
fn write_conformance_table() {
    let Some(dir) = strd_dir_or_skip("write_conformance_table") else {
        return;
    };
    let text = render(&dir);
    let path = std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("docs/conformance.md");
    std::fs::create_dir_all(path.parent().expect("docs/ has a parent")).expect("create docs/");
    std::fs::write(&path, &text).expect("write docs/conformance.md");
    println!("wrote {}", path.display());
}

#[test]
fn table_states_its_command_and_every_problem() {
    let Some(dir) = strd_dir_or_skip("table_states_its_command_and_every_problem") else {
        return;
    };
    let text = render(&dir);
    assert!(text.lines().next().is_some_and(|l| l.contains(COMMAND)));
    // 11 linear rows + 54 nonlinear rows.
    let rows = text
        .lines()
        .filter(|l| l.starts_with("| ") && !l.starts_with("| Problem"))
        .count();
    assert_eq!(rows, 11 + 54);
}
