//! Output locations that cannot be written: a file where a folder must be, a read-only
//! folder, a location no one may write, a full disk (a file size limit), a closed or full
//! standard output. Each is an output failure (exit 3) that leaves no half report and no
//! history line; leftover temporary folders of a crashed run are cleaned up.

use std::process::Command;

use super::*;

#[test]
fn read_only_report_folder_is_an_output_error() {
    use std::os::unix::fs::PermissionsExt;
    let c = Recipe::line().case(LINE);
    let dir = c.path("out");
    std::fs::create_dir_all(&dir).expect("mkdir");
    std::fs::set_permissions(&dir, std::fs::Permissions::from_mode(0o555)).expect("chmod");
    // Root (and CAP_DAC_OVERRIDE) write through permission bits: the folder is not read-only
    // for such a process, and the cases below (a location no one may write, a file size
    // limit) cover the failure instead.
    let probe = dir.join("probe");
    if std::fs::write(&probe, b"").is_ok() {
        let _ = std::fs::remove_file(&probe);
        let _ = std::fs::set_permissions(&dir, std::fs::Permissions::from_mode(0o755));
        println!(
            "skipped: this process writes through permission bits (root?), so a read-only \
             folder cannot be made with chmod; see unwritable_location_is_an_output_error"
        );
        return;
    }
    let out = c.run(&["run", "r.toml"]);
    let _ = std::fs::set_permissions(&dir, std::fs::Permissions::from_mode(0o755));
    out.expect_code(3).expect_contains(&["Permission denied"]);
    assert_nothing_written(&c);
}

#[test]
fn unwritable_location_is_an_output_error() {
    // No process, root included, may create a folder at the top of /proc.
    let c = Recipe::line().case(LINE);
    c.run(&["run", "r.toml", "--out", "/proc/fitwright-hostile"])
        .expect_code(3)
        .expect_contains(&["cannot create the report folder /proc/fitwright-hostile/hostile"]);
    assert_nothing_written(&c);
}

/// Run the binary under a file size limit of 0 (with SIGXFSZ ignored, so writes fail with
/// EFBIG as on a full disk), stdout and stderr being pipes, which the limit does not cover.
fn run_with_no_file_space(c: &Case, args: &[&str]) -> Outcome {
    let out = Command::new("sh")
        .arg("-c")
        .arg("ulimit -f 0 && trap '' XFSZ && exec \"$0\" \"$@\"")
        .arg(env!("CARGO_BIN_EXE_fitwright"))
        .args(args)
        .current_dir(c.dir.path())
        .output()
        .expect("run under sh");
    Outcome {
        code: out.status.code().unwrap_or(-1),
        stdout: String::from_utf8_lossy(&out.stdout).into_owned(),
        stderr: String::from_utf8_lossy(&out.stderr).into_owned(),
    }
}

#[test]
fn full_disk_leaves_no_half_report_and_no_history_line() {
    let c = Recipe::line().case(LINE);
    run_with_no_file_space(&c, &["run", "r.toml"])
        .expect_code(3)
        .expect_contains(&["File too large", "0 invalid, 1 output or internal failure"]);
    assert_nothing_written(&c);
    // A later run with space writes a complete run and one history line.
    c.run(&["run", "r.toml"]).expect_code(0);
    assert_eq!(run_folders(&c.path("out")).len(), 1);
    let history = std::fs::read_to_string(c.path("out/history.jsonl")).expect("history");
    assert_eq!(history.lines().count(), 1);
}

#[test]
fn full_disk_behind_the_junit_file_is_an_output_error() {
    let c = Recipe::line().case(LINE);
    c.file("junit", "");
    std::fs::remove_file(c.path("junit")).expect("rm");
    std::fs::create_dir(c.path("junit")).expect("mkdir");
    c.run(&["run", "r.toml", "--junit", "junit"])
        .expect_code(3)
        .expect_contains(&["junit"]);
}

#[test]
fn full_standard_output_is_an_output_error_not_a_panic() {
    let c = Recipe::line().case(LINE);
    let full = std::fs::OpenOptions::new()
        .write(true)
        .open("/dev/full")
        .expect("/dev/full");
    let out = Command::new(env!("CARGO_BIN_EXE_fitwright"))
        .args(["run", "r.toml"])
        .current_dir(c.dir.path())
        .stdout(std::process::Stdio::from(full))
        .output()
        .expect("run");
    let stderr = String::from_utf8_lossy(&out.stderr);
    assert!(!stderr.contains("panicked"), "{stderr}");
    assert_eq!(out.status.code(), Some(3), "{stderr}");
    assert!(
        stderr.contains("cannot write to standard output"),
        "{stderr}"
    );
}

#[test]
fn history_that_is_a_folder_is_an_output_error() {
    let c = Recipe::line().case(LINE);
    std::fs::create_dir_all(c.path("out/history.jsonl")).expect("mkdir");
    c.run(&["run", "r.toml"])
        .expect_code(3)
        .expect_contains(&["history", "is a folder"]);
    assert!(run_folders(&c.path("out")).is_empty());
}

#[test]
fn out_pointing_at_a_file_is_an_output_error() {
    let c = Recipe::line().case(LINE);
    c.file("taken", "a file, not a folder\n");
    c.run(&["run", "r.toml", "--out", "taken"])
        .expect_code(3)
        .expect_contains(&[
            "`taken` is a file, not a folder",
            "0 invalid, 1 output or internal failure",
        ]);
    assert_nothing_written(&c);
    assert_eq!(
        std::fs::read_to_string(c.path("taken")).expect("still there"),
        "a file, not a folder\n"
    );
}

#[test]
fn report_dir_inside_a_file_is_an_output_error() {
    let r = Recipe::line().report("formats = [\"json\"]");
    let text = r.text().replace("dir = \"out\"", "dir = \"taken/{name}\"");
    let c = Case::new();
    c.file("r.toml", &text)
        .file("d.csv", LINE)
        .file("taken", "x\n");
    c.run(&["run", "r.toml"])
        .expect_code(3)
        .expect_contains(&["`taken` is a file, not a folder"]);
    assert_nothing_written(&c);
}

#[test]
fn stale_temporary_run_folders_are_ignored_and_cleaned() {
    let c = Recipe::line().case(LINE);
    let stale = c.path("out/.20200101T000000Z-deadbeef.tmp");
    let fresh = c.path("out/.20200101T000001Z-cafef00d.tmp");
    for d in [&stale, &fresh] {
        std::fs::create_dir_all(d.join("plots")).expect("mkdir");
        std::fs::write(d.join("report.html"), "<html>half").expect("write");
    }
    // A crash two hours ago left `stale`; `fresh` may belong to a run still writing.
    let two_hours_ago = std::time::SystemTime::now() - std::time::Duration::from_secs(7200);
    std::fs::File::open(&stale)
        .and_then(|f| f.set_modified(two_hours_ago))
        .expect("age the stale folder");
    c.run(&["run", "r.toml"]).expect_code(0);
    assert!(
        !stale.exists(),
        "a temporary folder older than an hour is removed"
    );
    assert!(
        fresh.exists(),
        "a recent one is left to the run that may own it"
    );
    assert_eq!(run_folders(&c.path("out")).len(), 1);
}
