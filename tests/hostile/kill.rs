//! SIGKILL at any moment of a run leaves whole history lines and no half report: complete
//! run folders only, temporary `.…tmp` folders ignored, and the next run works.

use std::time::{Duration, Instant};

use super::*;

#[test]
fn kill_at_any_moment_leaves_whole_history_lines_and_no_half_report() {
    let c = Recipe::line().case("");
    super::data::write_large_line(&c.path("d.csv"), 30_000);
    // One complete run: its duration and its file list.
    let t0 = Instant::now();
    c.run(&["run", "r.toml"]).expect_code(0);
    let full = t0.elapsed();
    let complete = run_folders(&c.path("out"));
    assert_eq!(complete.len(), 1);
    let expected_files = files_of(&complete[0]);
    assert!(expected_files.len() >= 4, "{expected_files:?}");

    // Kill at spread-out moments, denser towards the end, where the files are written.
    let fractions = [0.1, 0.5, 0.8, 0.9, 0.95, 0.98, 1.0, 1.03];
    let mut killed = 0;
    for (i, f) in fractions.iter().enumerate() {
        let mut child = std::process::Command::new(env!("CARGO_BIN_EXE_fitwright"))
            .args(["run", "r.toml", "--quiet"])
            .current_dir(c.dir.path())
            .stdout(std::process::Stdio::null())
            .stderr(std::process::Stdio::null())
            .spawn()
            .expect("spawn");
        std::thread::sleep(full.mul_f64(*f) + Duration::from_millis(7 * i as u64));
        if child.try_wait().expect("wait").is_none() {
            killed += 1;
        }
        let _ = child.kill();
        let _ = child.wait();
        check_consistent(&c.path("out"), &expected_files);
    }
    println!(
        "{killed} of {} runs were killed before they finished",
        fractions.len()
    );
    assert!(killed > 0, "no run was killed: the test tested nothing");
    // After all that, a run still works and sees every earlier complete run, and the index
    // lists exactly the complete runs (temporary folders of killed runs are not runs).
    let before = run_folders(&c.path("out")).len();
    c.run(&["run", "r.toml"]).expect_code(0);
    let runs = run_folders(&c.path("out")).len();
    assert_eq!(runs, before + 1);
    check_consistent(&c.path("out"), &expected_files);
    c.run(&["index", "out"])
        .expect_code(0)
        .expect_contains(&[&format!("({runs} runs)")]);
}

/// The files of a run folder, relative (`report.html`, `plots/fit.svg`, …).
fn files_of(run: &Path) -> Vec<PathBuf> {
    tree(run)
        .into_iter()
        .filter(|p| run.join(p).is_file())
        .collect()
}

/// Every history line is whole JSON ending in a newline and names a complete run folder;
/// every run folder is complete: it holds every file of the first run (later runs add the
/// history trend plots), its result.json parses and its report.html is closed.
fn check_consistent(out: &Path, expected_files: &[PathBuf]) {
    for run in run_folders(out) {
        let files = files_of(&run);
        for f in expected_files {
            assert!(
                files.contains(f),
                "half report in {}: no {}",
                run.display(),
                f.display()
            );
        }
        let json = std::fs::read_to_string(run.join("result.json")).expect("result.json");
        serde_json::from_str::<serde_json::Value>(&json).expect("whole result.json");
        let html = std::fs::read_to_string(run.join("report.html")).expect("report.html");
        assert!(
            html.trim_end().ends_with("</html>"),
            "torn report.html in {}",
            run.display()
        );
    }
    let history = std::fs::read_to_string(out.join("history.jsonl")).expect("history");
    assert!(history.ends_with('\n'), "torn last line: {history:?}");
    for line in history.lines() {
        let v: serde_json::Value = serde_json::from_str(line).expect("a whole JSON line");
        let id = v["run_id"].as_str().expect("run id");
        assert!(
            out.join(id).join("result.json").is_file(),
            "history names {id}, which has no complete run folder"
        );
    }
}
