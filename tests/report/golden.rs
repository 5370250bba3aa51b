//! Golden test of the Markdown report: `tests/golden/<case>/expected/report.md`
//! compared after normalisation. Refresh with `FITWRIGHT_BLESS=1 cargo test
//! --test report golden` and review the diff (see tests/golden/README.md).

use std::path::PathBuf;

use crate::demo::demo_context;
use fitwright::report::write::{Format, render_run};
use fitwright::report::{ReportContext, Templates};

/// Makes the comparison insensitive to what may change without the report
/// changing: line endings, trailing blanks, the tool version and the hash of
/// the templates (which changes with any template edit, HTML included).
fn normalise(text: &str, ctx: &ReportContext) -> String {
    let mut out = text.replace("\r\n", "\n");
    if !ctx.traceability.tool_version.is_empty() {
        out = out.replace(&ctx.traceability.tool_version, "fitwright <version>");
    }
    if !ctx.traceability.templates_sha256.is_empty() {
        out = out.replace(&ctx.traceability.templates_sha256, "<templates-sha256>");
    }
    let mut lines: Vec<&str> = out.lines().map(str::trim_end).collect();
    while lines.last() == Some(&"") {
        lines.pop();
    }
    let mut joined = lines.join("\n");
    joined.push('\n');
    joined
}

fn case_dir(case: &str) -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR"))
        .join("tests/golden")
        .join(case)
}

pub fn check_golden(case: &str, ctx: &ReportContext) {
    let templates = Templates::builtin().expect("built-in templates compile");
    let files = render_run(ctx, &templates, &[Format::Markdown], None).expect("renders");
    let md = String::from_utf8(files.get("report.md").expect("report.md").to_vec()).expect("utf-8");
    // Every plot the report references is written beside it.
    for plot in &ctx.plots {
        let path = format!("plots/{}.svg", plot.name);
        assert!(
            md.contains(&format!("]({path})")),
            "report.md references {path}"
        );
        assert!(
            files.get(&path).is_some(),
            "{path} written beside report.md"
        );
    }
    let actual = normalise(&md, ctx);
    let expected_path = case_dir(case).join("expected/report.md");
    if std::env::var_os("FITWRIGHT_BLESS").is_some_and(|v| v == "1") {
        std::fs::create_dir_all(expected_path.parent().expect("has a parent"))
            .expect("create expected/");
        std::fs::write(&expected_path, &actual).expect("write expected");
        eprintln!("blessed {}", expected_path.display());
        return;
    }
    let expected = std::fs::read_to_string(&expected_path).unwrap_or_else(|e| {
        panic!(
            "cannot read {}: {e}\nCreate it with: FITWRIGHT_BLESS=1 cargo test --test report golden",
            expected_path.display()
        )
    });
    let expected = normalise(&expected, ctx);
    if actual != expected {
        let actual_path =
            PathBuf::from(env!("CARGO_TARGET_TMPDIR")).join(format!("golden-{case}-report.md"));
        let _ = std::fs::write(&actual_path, &actual);
        let line = actual
            .lines()
            .zip(expected.lines())
            .position(|(a, e)| a != e)
            .unwrap_or_else(|| actual.lines().count().min(expected.lines().count()));
        panic!(
            "report.md of case {case} differs from {} at line {}:\n  expected: {:?}\n  actual:   {:?}\n\
             Full output: {}\nIf the change is intended: FITWRIGHT_BLESS=1 cargo test --test report golden, then review the diff.",
            expected_path.display(),
            line + 1,
            expected.lines().nth(line).unwrap_or("<end of file>"),
            actual.lines().nth(line).unwrap_or("<end of file>"),
            actual_path.display()
        );
    }
}

#[test]
fn golden_markdown_report_of_the_thermistor_probe() {
    check_golden("thermistor-probe", &demo_context());
}

#[test]
fn normalisation_only_touches_version_hash_and_whitespace() {
    let ctx = demo_context();
    let text = format!(
        "a  \r\nb {} c {}\n\n\n",
        ctx.traceability.tool_version, ctx.traceability.templates_sha256
    );
    assert_eq!(
        normalise(&text, &ctx),
        "a\nb fitwright <version> c <templates-sha256>\n"
    );
}
