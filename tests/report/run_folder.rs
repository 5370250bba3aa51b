//! Run folders: determinism, atomic writing, format selection.

use std::fs;
use std::path::Path;

use crate::demo::{DEMO_EPOCH, DEMO_INPUT_HASH, demo_context, hostile_context};
use fitwright::report::write::{Format, RunFiles, render_run, run_id, write_run};
use fitwright::report::{ReportErrorKind, Templates};

const RESULT_JSON: &str = "{\"schema_version\": 1}\n";

fn all_formats() -> [Format; 3] {
    [Format::Json, Format::Html, Format::Markdown]
}

fn listing(dir: &Path) -> Vec<(String, Vec<u8>)> {
    let mut out = Vec::new();
    let mut stack = vec![dir.to_path_buf()];
    while let Some(d) = stack.pop() {
        for entry in fs::read_dir(&d).expect("readable") {
            let path = entry.expect("entry").path();
            if path.is_dir() {
                stack.push(path);
            } else {
                let rel = path
                    .strip_prefix(dir)
                    .expect("inside")
                    .to_string_lossy()
                    .to_string();
                out.push((rel, fs::read(&path).expect("readable")));
            }
        }
    }
    out.sort();
    out
}

#[test]
fn rendering_twice_gives_identical_bytes() {
    let templates = Templates::builtin().expect("built-in templates compile");
    // Contexts built twice from scratch, plots included.
    let a = render_run(
        &demo_context(),
        &templates,
        &all_formats(),
        Some(RESULT_JSON),
    )
    .expect("renders");
    let b = render_run(
        &demo_context(),
        &templates,
        &all_formats(),
        Some(RESULT_JSON),
    )
    .expect("renders");
    assert_eq!(a, b);
    let names: Vec<&str> = a.files().iter().map(|(p, _)| p.as_str()).collect();
    assert_eq!(
        names,
        [
            "report.html",
            "report.md",
            "plots/fit.svg",
            "plots/residuals-t.svg",
            "plots/residuals-fitted.svg",
            "plots/normal.svg",
            "plots/linearized.svg",
            "plots/trend-b.svg",
            "result.json"
        ]
    );
}

#[test]
fn two_runs_with_the_same_inputs_write_byte_identical_folders() {
    let templates = Templates::builtin().expect("built-in templates compile");
    let id = run_id(DEMO_EPOCH, DEMO_INPUT_HASH).expect("valid");
    assert_eq!(id, "20261128T101500Z-3f9a61c2");
    let one = tempfile::tempdir().expect("temp dir");
    let two = tempfile::tempdir().expect("temp dir");
    for dir in [one.path(), two.path()] {
        let files = render_run(
            &demo_context(),
            &templates,
            &all_formats(),
            Some(RESULT_JSON),
        )
        .expect("renders");
        write_run(dir, &id, &files).expect("writes");
    }
    let a = listing(&one.path().join(&id));
    let b = listing(&two.path().join(&id));
    assert_eq!(a.len(), 9);
    assert_eq!(a, b);
}

#[test]
fn a_written_run_leaves_no_temporary_folder_and_is_never_overwritten() {
    let templates = Templates::builtin().expect("built-in templates compile");
    let dir = tempfile::tempdir().expect("temp dir");
    let files = render_run(&demo_context(), &templates, &[Format::Html], None).expect("renders");
    let target = write_run(dir.path(), "20261128T101500Z-3f9a61c2", &files).expect("writes");
    let entries: Vec<String> = fs::read_dir(dir.path())
        .expect("readable")
        .map(|e| e.expect("entry").file_name().to_string_lossy().to_string())
        .collect();
    assert_eq!(entries, ["20261128T101500Z-3f9a61c2"]);
    assert!(target.join("report.html").is_file());
    assert!(
        !target.join("report.md").exists(),
        "only the selected format"
    );
    let err = write_run(dir.path(), "20261128T101500Z-3f9a61c2", &files).expect_err("exists");
    assert!(
        matches!(err.kind(), ReportErrorKind::RunExists { .. }),
        "{err}"
    );
    assert!(!dir.path().join(".20261128T101500Z-3f9a61c2.tmp").exists());
}

#[test]
fn a_failed_write_leaves_no_half_report() {
    let dir = tempfile::tempdir().expect("temp dir");
    let mut files = RunFiles::default();
    files
        .add("report.html", b"<p>complete</p>".to_vec())
        .expect("valid path");
    // "plots" is written as a file, so "plots/fit.svg" cannot be created.
    files
        .add("plots", b"not a folder".to_vec())
        .expect("valid path");
    files
        .add("plots/fit.svg", b"<svg/>".to_vec())
        .expect("valid path");
    let err = write_run(dir.path(), "20261128T101500Z-3f9a61c2", &files).expect_err("must fail");
    assert!(matches!(err.kind(), ReportErrorKind::Io { .. }), "{err}");
    let entries: Vec<_> = fs::read_dir(dir.path()).expect("readable").collect();
    assert!(entries.is_empty(), "nothing left behind: {entries:?}");
}

#[test]
fn a_stale_temporary_folder_from_a_crash_is_replaced() {
    let dir = tempfile::tempdir().expect("temp dir");
    let stale = dir.path().join(".20261128T101500Z-3f9a61c2.tmp");
    fs::create_dir_all(stale.join("plots")).expect("create");
    fs::write(stale.join("report.html"), "half").expect("write");
    let mut files = RunFiles::default();
    files
        .add("report.md", b"# whole\n".to_vec())
        .expect("valid path");
    let target = write_run(dir.path(), "20261128T101500Z-3f9a61c2", &files).expect("writes");
    assert_eq!(
        listing(&target),
        [("report.md".to_string(), b"# whole\n".to_vec())]
    );
    assert!(!stale.exists());
}

#[test]
fn json_format_needs_the_result_document_and_bad_run_ids_are_refused() {
    let templates = Templates::builtin().expect("built-in templates compile");
    let err = render_run(&demo_context(), &templates, &[Format::Json], None).expect_err("no json");
    assert!(err.to_string().contains("no result document"), "{err}");
    let dir = tempfile::tempdir().expect("temp dir");
    for bad in ["", "../x", ".hidden", "a/b"] {
        assert!(
            write_run(dir.path(), bad, &RunFiles::default()).is_err(),
            "{bad:?}"
        );
    }
    assert_eq!(Format::parse("md"), Some(Format::Markdown));
    assert_eq!(Format::parse("pdf"), None);
}

#[test]
fn markdown_report_has_no_raw_html_from_user_text() {
    let templates = Templates::builtin().expect("built-in templates compile");
    let md = templates
        .render_markdown(&hostile_context())
        .expect("renders");
    // Hostile text appears only escaped (`\<`) or inside code, so a
    // CommonMark renderer makes no element of it.
    assert!(md.contains("\\<script\\>"), "escaped in text");
    let mut html = String::new();
    pulldown_cmark::html::push_html(
        &mut html,
        pulldown_cmark::Parser::new_ext(&md, pulldown_cmark::Options::ENABLE_TABLES),
    );
    assert!(!html.contains("<script"), "{html}");
    // The only images are the report's own plots, beside it.
    let images = html.matches("<img").count();
    let own = html.matches("<img src=\"plots/").count();
    assert_eq!((images, own), (6, 6), "{html}");
}

/// Writes the demo runs to `$FITWRIGHT_SAMPLE_OUT` for looking at them in a
/// browser (`FITWRIGHT_SAMPLE_OUT=/tmp/fw-sample cargo test --test report sample`);
/// without the variable it writes into a temporary folder.
#[test]
fn sample_reports_write_completely() {
    let templates = Templates::builtin().expect("built-in templates compile");
    let keep = std::env::var_os("FITWRIGHT_SAMPLE_OUT");
    let temp = tempfile::tempdir().expect("temp dir");
    let out = keep.as_ref().map(Path::new).unwrap_or(temp.path());
    for (name, ctx) in [("demo", demo_context()), ("hostile", hostile_context())] {
        let files =
            render_run(&ctx, &templates, &all_formats(), Some(RESULT_JSON)).expect("renders");
        let dir = out.join(name);
        let _ = fs::remove_dir_all(dir.join(&ctx.traceability.run_id));
        let target = write_run(&dir, &ctx.traceability.run_id, &files).expect("writes");
        assert_eq!(listing(&target).len(), files.files().len());
    }
}
