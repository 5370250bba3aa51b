//! Stored results fed back to `predict` and `verify`: truncated, from another schema, edited
//! by hand, and readings at the ends of the float range.

use super::*;

/// A case with one accepted run; returns the case and its result.json, relative.
fn stored() -> (Case, String) {
    let c = Recipe::line().case(LINE);
    c.run(&["run", "r.toml"]).expect_code(0);
    let run = run_folders(&c.path("out")).pop().expect("a run folder");
    let name = run
        .file_name()
        .and_then(|n| n.to_str())
        .expect("name")
        .to_string();
    (c, format!("out/{name}/result.json"))
}

fn edit(c: &Case, result: &str, f: impl FnOnce(&mut serde_json::Value)) -> &'static str {
    let mut doc: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(c.path(result)).expect("read"))
            .expect("json");
    f(&mut doc);
    c.file("edited.json", &doc.to_string());
    "edited.json"
}

#[test]
fn truncated_result_is_located_for_predict_and_verify() {
    let (c, result) = stored();
    let text = std::fs::read_to_string(c.path(&result)).expect("read");
    let cut: String = text.chars().take(300).collect();
    c.file("cut.json", &cut);
    let line = cut.lines().count();
    for cmd in ["predict", "verify"] {
        let mut args = vec![cmd, "cut.json"];
        if cmd == "predict" {
            args.extend(["--at", "x=1"]);
        }
        c.run(&args)
            .expect_code(2)
            .expect_contains(&[&format!("cut.json:{line}:"), "not a fitwright result.json"]);
    }
}

#[test]
fn result_of_another_schema_version_is_refused() {
    let (c, result) = stored();
    let edited = edit(&c, &result, |d| d["schema_version"] = 99.into());
    c.run(&["predict", edited, "--at", "x=1"])
        .expect_code(2)
        .expect_contains(&["schema version 99", "this fitwright reads version"]);
}

#[test]
fn hand_edited_equation_past_the_depth_limit_is_refused() {
    let (c, result) = stored();
    let deep = format!("y = a + b*{}x{}", "(".repeat(300), ")".repeat(300));
    let edited = edit(&c, &result, |d| d["model"]["equation"] = deep.into());
    c.run(&["predict", edited, "--at", "x=1"])
        .expect_code(2)
        .expect_contains(&[
            "the stored equation does not parse",
            "nested deeper than 200",
        ]);
}

#[test]
fn non_finite_setting_is_refused() {
    let (c, result) = stored();
    c.run(&["predict", &result, "--at", "x=nan"])
        .expect_code(2)
        .expect_contains(&["`--at x=nan`", "finite"]);
}

#[test]
fn unreachable_reading_is_named_briefly() {
    let (c, result) = stored();
    let out = c.run(&["predict", &result, "--inverse", "y=1e308"]);
    out.expect_code(2).expect_contains(&[
        "the curve does not reach y = 1e308 inside the calibrated range of x [0, 7]",
        "--extrapolate",
    ]);
    assert!(out.stderr.len() < 400, "{}", out.stderr);
}
