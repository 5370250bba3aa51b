//! `fitwright run`, `verify` and `init` end to end: exit codes of mixed batches, the files of
//! a run folder, reproducible output, the HTML report against result.json, escaping of user
//! text, JUnit output, shards, history and drift.

mod util;
use std::path::Path;

use util::{Case, Outcome};

/// A straight-line calibration whose criteria pass (invented test data).
fn line_recipe(name: &str, extra: &str) -> String {
    format!(
        r#"name = "{name}"
title = "Line {name}"
[data]
files = ["line.csv"]
columns = {{ x = "x", y = "y" }}
units = {{ x = "kPa", y = "mV" }}
[model]
equation = "y = b0 + b1 * x"
[model.parameters]
b0 = {{}}
b1 = {{}}
[acceptance]
r_squared_min = 0.99
{extra}
[report]
dir = "out/{{name}}"
"#
    )
}

const LINE_DATA: &str = "x,y\n0,0.02\n1,1.98\n2,4.03\n3,5.97\n4,8.01\n5,10.02\n6,11.96\n7,14.03\n";

fn line_case() -> Case {
    let c = Case::new();
    c.file("line.csv", LINE_DATA);
    c
}

fn run_with_epoch(c: &Case, args: &[&str], epoch: &str) -> Outcome {
    let out = std::process::Command::new(env!("CARGO_BIN_EXE_fitwright"))
        .args(args)
        .current_dir(c.dir.path())
        .env("SOURCE_DATE_EPOCH", epoch)
        .output()
        .expect("run fitwright");
    Outcome {
        code: out.status.code().unwrap_or(-1),
        stdout: String::from_utf8_lossy(&out.stdout).into_owned(),
        stderr: String::from_utf8_lossy(&out.stderr).into_owned(),
    }
}

fn run_folders(dir: &Path) -> Vec<std::path::PathBuf> {
    let mut v: Vec<_> = std::fs::read_dir(dir)
        .map(|rd| {
            rd.filter_map(|e| e.ok())
                .map(|e| e.path())
                .filter(|p| p.is_dir())
                .collect()
        })
        .unwrap_or_default();
    v.sort();
    v
}

fn read_json(path: &Path) -> serde_json::Value {
    serde_json::from_str(&std::fs::read_to_string(path).expect("read json")).expect("parse json")
}

#[test]
fn accepted_run_writes_reports_result_and_history() {
    let c = line_case();
    c.file("r.toml", &line_recipe("line-a", ""));
    c.run(&["run", "r.toml"])
        .expect_code(0)
        .expect_contains(&["criteria met — awaiting review", "b1 = "]);
    let runs = run_folders(&c.path("out/line-a"));
    assert_eq!(runs.len(), 1, "one run folder");
    for f in ["report.html", "report.md", "result.json", "plots/fit.svg"] {
        assert!(runs[0].join(f).is_file(), "{f} missing");
    }
    let doc = read_json(&runs[0].join("result.json"));
    assert_eq!(doc["schema_version"], 2);
    assert_eq!(doc["verdict"], "accepted");
    let history = std::fs::read_to_string(c.path("out/line-a/history.jsonl")).expect("history");
    assert_eq!(history.lines().count(), 1);
}

#[test]
fn rejected_recipe_exits_1_and_names_the_failed_criterion() {
    let c = line_case();
    c.file("r.toml", &line_recipe("line-b", "max_abs_residual = 0.001"));
    c.run(&["run", "r.toml"])
        .expect_code(1)
        .expect_contains(&["criteria not met", "[FAIL] largest |residual|"]);
}

#[test]
fn mixed_batch_exits_with_the_highest_code_and_runs_every_recipe() {
    let c = line_case();
    c.file(
        "recipes/a.toml",
        &line_recipe("good", "").replace("line.csv", "../line.csv"),
    );
    c.file(
        "recipes/b.toml",
        &line_recipe("bad-fit", "max_abs_residual = 0.001").replace("line.csv", "../line.csv"),
    );
    c.file(
        "recipes/c.toml",
        &line_recipe("broken", "").replace("line.csv", "../missing.csv"),
    );
    let out = c.run(&["run", "recipes"]);
    out.expect_code(2).expect_contains(&[
        "1 criteria met",
        "1 not met",
        "1 invalid",
        "missing.csv` does not exist",
    ]);
    assert_eq!(run_folders(&c.path("recipes/out/good")).len(), 1);
    assert_eq!(run_folders(&c.path("recipes/out/bad-fit")).len(), 1);
    assert!(
        !c.path("recipes/out/broken").exists(),
        "an invalid recipe writes nothing"
    );
}

#[test]
fn invalid_recipe_leaves_no_report_folder_and_no_history_line() {
    let c = line_case();
    c.file(
        "r.toml",
        &line_recipe("line-c", "").replace("b1 * x", "b1 * X"),
    );
    c.run(&["run", "r.toml"])
        .expect_code(2)
        .expect_contains(&["unknown name `X`", "r.toml:8:27"]);
    assert!(!c.path("out").exists());
}

#[test]
fn same_inputs_and_source_date_epoch_give_byte_identical_files() {
    let c = line_case();
    c.file("r.toml", &line_recipe("line-d", ""));
    run_with_epoch(&c, &["run", "r.toml", "--out", "first"], "1796000000").expect_code(0);
    run_with_epoch(&c, &["run", "r.toml", "--out", "second"], "1796000000").expect_code(0);
    let a = run_folders(&c.path("first/line-d"));
    let b = run_folders(&c.path("second/line-d"));
    assert_eq!(a.len(), 1);
    assert_eq!(a[0].file_name(), b[0].file_name(), "same run id");
    for f in [
        "report.html",
        "report.md",
        "result.json",
        "plots/fit.svg",
        "plots/residuals-x.svg",
    ] {
        let x = std::fs::read(a[0].join(f)).expect("first");
        let y = std::fs::read(b[0].join(f)).expect("second");
        assert!(x == y, "{f} differs between identical runs");
    }
}

#[test]
fn html_criteria_table_matches_result_json() {
    let c = line_case();
    c.file(
        "r.toml",
        &line_recipe("line-e", "max_abs_residual = 0.05\nmin_points = 5"),
    );
    c.run(&["run", "r.toml"]).expect_code(0);
    let run = &run_folders(&c.path("out/line-e"))[0];
    let doc = read_json(&run.join("result.json"));
    let html = std::fs::read_to_string(run.join("report.html")).expect("html");
    let page = scraper::Html::parse_document(&html);
    let row_sel = scraper::Selector::parse("table tr").expect("selector");
    let cell_sel = scraper::Selector::parse("td").expect("selector");
    let rows: Vec<Vec<String>> = page
        .select(&row_sel)
        .map(|r| {
            r.select(&cell_sel)
                .map(|c| c.text().collect::<String>().trim().to_string())
                .collect()
        })
        .filter(|cells: &Vec<String>| !cells.is_empty())
        .collect();
    let criteria = doc["criteria"].as_array().expect("criteria");
    assert_eq!(criteria.len(), 3);
    for crit in criteria {
        let name = crit["criterion"].as_str().expect("criterion");
        let measured = crit["measured"].as_str().expect("measured");
        let limit = crit["limit"].as_str().expect("limit");
        assert!(
            rows.iter()
                .any(|r| r.first().map(String::as_str) == Some(name)
                    && r.iter().any(|c| c == measured)
                    && r.iter().any(|c| c == limit)),
            "criterion {name} ({limit}, {measured}) not found in the HTML table rows {rows:?}"
        );
    }
}

#[test]
fn hostile_title_and_notes_produce_no_script_or_img_element() {
    let c = line_case();
    let recipe = line_recipe("line-f", "").replace(
        "title = \"Line line-f\"",
        "title = \"<script>alert(1)</script>\"\nnotes = \"\"\"\"><img src=x onerror=alert(2)> and <script>alert(3)</script>\"\"\"",
    );
    c.file("r.toml", &recipe);
    c.run(&["run", "r.toml"]).expect_code(0);
    let run = &run_folders(&c.path("out/line-f"))[0];
    let html = std::fs::read_to_string(run.join("report.html")).expect("html");
    let page = scraper::Html::parse_document(&html);
    for tag in ["script", "img"] {
        let sel = scraper::Selector::parse(tag).expect("selector");
        assert_eq!(
            page.select(&sel).count(),
            0,
            "a <{tag}> element made it into the report"
        );
    }
    let h1 = scraper::Selector::parse("h1").expect("selector");
    let title: String = page.select(&h1).flat_map(|e| e.text()).collect();
    assert!(
        title.contains("<script>alert(1)</script>"),
        "the title is shown as text, got {title:?}"
    );
}

#[test]
fn junit_has_one_case_per_recipe_with_failures_and_errors() {
    let c = line_case();
    c.file(
        "recipes/a.toml",
        &line_recipe("good", "").replace("line.csv", "../line.csv"),
    );
    c.file(
        "recipes/b.toml",
        &line_recipe("bad-fit", "max_abs_residual = 0.001").replace("line.csv", "../line.csv"),
    );
    c.file(
        "recipes/c.toml",
        &line_recipe("broken", "").replace("line.csv", "../missing.csv"),
    );
    c.run(&["run", "recipes", "--junit", "junit.xml", "--quiet"])
        .expect_code(2);
    let xml = std::fs::read_to_string(c.path("junit.xml")).expect("junit");
    let mut reader = quick_xml::Reader::from_str(&xml);
    let (mut cases, mut failures, mut errors) = (0, 0, 0);
    loop {
        match reader.read_event() {
            Ok(quick_xml::events::Event::Start(e) | quick_xml::events::Event::Empty(e)) => {
                match e.name().as_ref() {
                    b"testcase" => cases += 1,
                    b"failure" => failures += 1,
                    b"error" => errors += 1,
                    _ => {}
                }
            }
            Ok(quick_xml::events::Event::Eof) => break,
            Ok(_) => {}
            Err(e) => panic!("JUnit output is not well-formed XML: {e}"),
        }
    }
    assert_eq!((cases, failures, errors), (3, 1, 1));
    assert!(
        xml.contains("largest |residual|"),
        "the failure carries the failed criterion"
    );
}

#[test]
fn shards_partition_the_recipes() {
    let c = line_case();
    for i in 0..9 {
        c.file(
            &format!("recipes/r{i}.toml"),
            &line_recipe(&format!("r{i}"), "").replace("line.csv", "../line.csv"),
        );
    }
    let mut seen: Vec<String> = Vec::new();
    for k in 1..=3 {
        let out = c.run(&[
            "run",
            "recipes",
            "--json",
            "--no-history",
            "--shard",
            &format!("{k}/3"),
        ]);
        out.expect_code(0);
        let v: serde_json::Value = serde_json::from_str(&out.stdout).expect("json summary");
        for r in v["results"].as_array().expect("results") {
            seen.push(r["name"].as_str().expect("name").to_string());
        }
    }
    seen.sort();
    let want: Vec<String> = (0..9).map(|i| format!("r{i}")).collect();
    assert_eq!(seen, want, "every recipe in exactly one shard");
}

#[test]
fn no_history_flag_writes_no_history() {
    let c = line_case();
    c.file("r.toml", &line_recipe("line-g", ""));
    c.run(&["run", "r.toml", "--no-history"]).expect_code(0);
    assert!(!c.path("out/line-g/history.jsonl").exists());
}

#[test]
fn drift_passes_against_itself_and_fails_against_a_shifted_history() {
    let c = line_case();
    c.file(
        "r.toml",
        &line_recipe("line-h", "[acceptance.drift.b1]\nmax_rel_change = 0.001"),
    );
    run_with_epoch(&c, &["run", "r.toml"], "1796000000")
        .expect_code(0)
        .expect_contains(&["no earlier run whose criteria were met"]);
    run_with_epoch(&c, &["run", "r.toml"], "1796000100")
        .expect_code(0)
        .expect_contains(&["[pass] relative change of b1"]);
    // The slope of the new data is 10 % higher: the drift criterion fails.
    let steeper: String = std::iter::once("x,y".to_string())
        .chain((0..8).map(|i| format!("{i},{}", 2.2 * i as f64 + 0.01)))
        .collect::<Vec<_>>()
        .join("\n");
    c.file("line.csv", &steeper);
    run_with_epoch(&c, &["run", "r.toml"], "1796000200")
        .expect_code(1)
        .expect_contains(&["[FAIL] relative change of b1"]);
}

#[test]
fn concurrent_runs_append_whole_history_lines() {
    let c = line_case();
    c.file("r.toml", &line_recipe("line-i", ""));
    let exe = env!("CARGO_BIN_EXE_fitwright");
    let children: Vec<_> = (0..6)
        .map(|i| {
            std::process::Command::new(exe)
                .args(["run", "r.toml", "--quiet"])
                .current_dir(c.dir.path())
                .env("SOURCE_DATE_EPOCH", (1796000000 + i).to_string())
                .stdout(std::process::Stdio::null())
                .spawn()
                .expect("spawn")
        })
        .collect();
    for mut ch in children {
        assert!(ch.wait().expect("wait").success());
    }
    let text = std::fs::read_to_string(c.path("out/line-i/history.jsonl")).expect("history");
    let lines: Vec<&str> = text.lines().collect();
    assert_eq!(lines.len(), 6, "one line per run");
    for l in lines {
        let v: serde_json::Value = serde_json::from_str(l).expect("every line is whole JSON");
        assert_eq!(v["verdict"], "accepted");
    }
}

#[test]
fn verify_passes_on_unchanged_inputs_and_fails_on_tampered_data() {
    let c = line_case();
    c.file("r.toml", &line_recipe("line-j", ""));
    c.run(&["run", "r.toml"]).expect_code(0);
    let run = &run_folders(&c.path("out/line-j"))[0];
    let result = run.join("result.json");
    let result = result.to_str().expect("utf-8 path");
    c.run(&["verify", result])
        .expect_code(0)
        .expect_contains(&["inputs are unchanged and the results reproduce"]);
    c.file("line.csv", &LINE_DATA.replace("4,8.01", "4,8.21"));
    c.run(&["verify", result]).expect_code(1).expect_contains(&[
        "DIFFERS  data",
        "line.csv changed",
        "parameter b1",
    ]);
}

#[test]
fn init_writes_a_recipe_that_passes_check() {
    let c = line_case();
    c.run(&["init", "bench-7", "--data", "line.csv"])
        .expect_code(0);
    c.run(&["check", "bench-7.toml"])
        .expect_code(0)
        .expect_contains(&["bench-7: 8 rows"]);
    c.run(&["init", "bench-7"])
        .expect_code(2)
        .expect_contains(&["already exists"]);
}

#[test]
fn predict_forward_then_inverse_round_trips_within_1e_9() {
    let c = Case::new();
    // A saturation curve (nonlinear in x) so the inverse is a real root search.
    let data: String = std::iter::once("s,i".to_string())
        .chain(
            [0.1, 0.2, 0.4, 0.7, 1.0, 1.5, 2.0, 3.0, 5.0, 8.0]
                .iter()
                .enumerate()
                .map(|(k, s)| {
                    let wiggle = [
                        0.05, -0.04, 0.03, -0.06, 0.02, 0.04, -0.03, 0.05, -0.02, 0.01,
                    ][k];
                    format!("{s},{}", 40.0 * s / (0.8 + s) + wiggle)
                }),
        )
        .collect::<Vec<_>>()
        .join("\n");
    c.file("sat.csv", &data);
    c.file(
        "r.toml",
        "name = \"sat\"\n[data]\nfiles = [\"sat.csv\"]\n[model]\nequation = \"i = Imax * s / (K + s)\"\n[model.parameters]\nImax = { start = 30 }\nK = { start = 1 }\n[report]\ndir = \"out/{name}\"\n",
    );
    c.run(&["run", "r.toml"]).expect_code(0);
    let run = &run_folders(&c.path("out/sat"))[0];
    let result = run.join("result.json");
    let result = result.to_str().expect("path");
    for s0 in [0.15, 1.234567, 6.5] {
        let fwd = c.run(&["predict", result, "--at", &format!("s={s0}"), "--json"]);
        fwd.expect_code(0);
        let v: serde_json::Value = serde_json::from_str(&fwd.stdout).expect("json");
        let y = v["forward"][0]["value"].as_f64().expect("value");
        let inv = c.run(&[
            "predict",
            result,
            "--inverse",
            &format!("i={y:.17}"),
            "--json",
        ]);
        inv.expect_code(0);
        let v: serde_json::Value = serde_json::from_str(&inv.stdout).expect("json");
        let roots = v["inverse"][0]["roots"].as_array().expect("roots");
        assert_eq!(roots.len(), 1);
        let back = roots[0].as_f64().expect("root");
        assert!(
            ((back - s0) / s0).abs() < 1e-9,
            "s = {s0} → i = {y} → s = {back}"
        );
    }
    c.run(&["predict", result, "--at", "s=20"])
        .expect_code(2)
        .expect_contains(&["outside the calibrated range", "--extrapolate"]);
    c.run(&["predict", result, "--at", "s=20", "--extrapolate"])
        .expect_code(0)
        .expect_contains(&["extrapolated"]);
}

#[test]
fn sixteen_channel_export_gives_sixteen_results_with_one_invalid_channel() {
    let out = tempfile::tempdir().expect("tempdir");
    let o = std::process::Command::new(env!("CARGO_BIN_EXE_fitwright"))
        .args([
            "run",
            "examples/logger-tl16.toml",
            "--json",
            "--no-history",
            "--out",
        ])
        .arg(out.path())
        .current_dir(util::repo_root())
        .output()
        .expect("run");
    assert_eq!(
        o.status.code(),
        Some(2),
        "{}",
        String::from_utf8_lossy(&o.stderr)
    );
    let v: serde_json::Value = serde_json::from_slice(&o.stdout).expect("json summary");
    let results = v["results"].as_array().expect("results");
    assert_eq!(results.len(), 16, "one result per channel");
    let invalid: Vec<&str> = results
        .iter()
        .filter(|r| r["verdict"] == "invalid")
        .filter_map(|r| r["channel"].as_str())
        .collect();
    assert_eq!(
        invalid,
        ["CH07"],
        "only the channel with the overload cell is invalid"
    );
    assert!(
        results
            .iter()
            .filter(|r| r["verdict"] == "accepted")
            .count()
            == 15
    );
    assert!(
        out.path().join("logger-tl16/CH01").is_dir()
            && !out.path().join("logger-tl16/CH07").exists()
    );
}

#[test]
fn large_run_lists_the_largest_residuals_and_keeps_what_fieller_needs() {
    // 12,000 rows of a straight line with a deterministic ripple (invented data); rows 5000
    // and 9000 carry large outliers that the residual selection must list.
    let n = 12_000;
    let x: Vec<f64> = (0..n).map(|i| i as f64 * 0.01).collect();
    let mut data = String::from("x,y\n");
    for (i, xi) in x.iter().enumerate() {
        let ripple = 0.01 * ((i * 7919) % 101) as f64 / 101.0 - 0.005;
        let outlier = if i == 5000 || i == 9000 { 0.5 } else { 0.0 };
        data.push_str(&format!("{xi},{}\n", 1.0 + 2.0 * xi + ripple + outlier));
    }
    let c = Case::new();
    c.file("line.csv", &data);
    c.file("r.toml", &line_recipe("big", ""));
    c.run(&["run", "r.toml"]).expect_code(0);
    let run = &run_folders(&c.path("out/big"))[0];
    let doc = read_json(&run.join("result.json"));
    let rows = doc["residuals"].as_array().expect("residual table");
    assert_eq!(rows.len(), fitwright::result::RESIDUAL_ROWS_KEPT);
    assert_eq!(doc["residual_rows"]["total"], n);
    assert_eq!(doc["residual_rows"]["listed"], rows.len());
    let listed: Vec<&str> = rows.iter().filter_map(|r| r["origin"].as_str()).collect();
    assert!(
        listed.contains(&"line 5002 of line.csv"),
        "{:?}",
        &listed[..5]
    );
    assert!(listed.contains(&"line 9002 of line.csv"));
    // Closed forms for x = 0.01·i, i = 0..n−1: mean 0.01·(n−1)/2, Sxx = 0.01²·n(n²−1)/12.
    let nf = n as f64;
    let m = &doc["data"]["moments"]["x"];
    assert_eq!(m["n"], n);
    let mean = m["mean"].as_f64().expect("mean");
    let sxx = m["sxx"].as_f64().expect("sxx");
    assert!((mean - 0.01 * (nf - 1.0) / 2.0).abs() < 1e-9);
    assert!((sxx / (1e-4 * nf * (nf * nf - 1.0) / 12.0) - 1.0).abs() < 1e-12);
    // Fieller's interval from the stored moments equals the one from every calibration x.
    let param = |name: &str| {
        doc["parameters"]
            .as_array()
            .and_then(|ps| ps.iter().find(|p| p["name"] == name))
            .and_then(|p| p["value"].as_f64())
            .expect("parameter")
    };
    let s = doc["statistics"]["std_error"].as_f64().expect("s");
    let line =
        fitwright::stats::calibration::StraightLine::from_fit(param("b0"), param("b1"), s, &x)
            .expect("line");
    let fe = fitwright::stats::calibration::fieller(&line, 100.0, 1, 0.95).expect("fieller");
    let fitwright::stats::calibration::FiellerSet::Bounded { lower, upper } = fe.set else {
        panic!("bounded interval expected, got {:?}", fe.set);
    };
    let result = run.join("result.json");
    let out = c.run(&[
        "predict",
        result.to_str().expect("path"),
        "--inverse",
        "y=100",
        "--json",
    ]);
    out.expect_code(0);
    let v: serde_json::Value = serde_json::from_str(&out.stdout).expect("json");
    let text = v["inverse"][0]["fieller"]
        .as_str()
        .expect("fieller interval");
    let bounds: Vec<f64> = text
        .trim_matches(['[', ']'])
        .split(", ")
        .map(|t| t.parse().expect("number"))
        .collect();
    assert_eq!(bounds.len(), 2, "{text}");
    assert!(
        (bounds[0] - lower).abs() <= 1e-4 * lower.abs(),
        "{text} vs {lower}"
    );
    assert!(
        (bounds[1] - upper).abs() <= 1e-4 * upper.abs(),
        "{text} vs {upper}"
    );
}

#[test]
fn version_1_results_still_give_fieller_intervals_from_their_residual_table() {
    let c = line_case();
    c.file("r.toml", &line_recipe("old", ""));
    c.run(&["run", "r.toml"]).expect_code(0);
    let run = &run_folders(&c.path("out/old"))[0];
    let path = run.join("result.json");
    let predict = |c: &Case| {
        let out = c.run(&[
            "predict",
            path.to_str().expect("path"),
            "--inverse",
            "y=7",
            "--json",
        ]);
        out.expect_code(0);
        let v: serde_json::Value = serde_json::from_str(&out.stdout).expect("json");
        v["inverse"][0]["fieller"].clone()
    };
    let now = predict(&c);
    assert!(now.is_string(), "a straight line gives Fieller's interval");
    // The same result as version 1 wrote it: no moments, every row in `residuals`.
    let mut doc = read_json(&path);
    doc["schema_version"] = 1.into();
    doc["data"].as_object_mut().expect("data").remove("moments");
    std::fs::write(&path, serde_json::to_string(&doc).expect("json")).expect("write");
    assert_eq!(predict(&c), now);
}
