//! Override templates that do not compile, fail while rendering, or are not there: the
//! recipe is refused before anything is written, by `run` and by `check`.

use super::*;

fn template_case(files: &[(&str, &[u8])]) -> (Case, String) {
    let r = Recipe::line().report("templates = \"tpl\"");
    let c = r.case(LINE);
    for (name, bytes) in files {
        c.bytes(&format!("tpl/{name}"), bytes);
    }
    (c, r.text())
}

#[test]
fn html_template_with_a_syntax_error_is_refused_by_run_and_check() {
    let broken = include_bytes!("../fixtures/hostile/broken-template/report.html.j2");
    let (c, _) = template_case(&[("report.html.j2", broken)]);
    let fragments = ["tpl/report.html.j2:5", "template syntax error", "built-in"];
    refused(&c, &fragments);
    c.run(&["check", "r.toml"])
        .expect_code(2)
        .expect_contains(&fragments);
}

#[test]
fn markdown_template_naming_an_unknown_field_is_refused_and_writes_nothing() {
    let (c, _) = template_case(&[("report.md.j2", b"# {{ title }}\n\n{{ verdict_colour }}\n")]);
    refused(
        &c,
        &[
            "tpl/report.md.j2:3",
            "template failed while rendering",
            "undefined",
        ],
    );
}

#[test]
fn missing_templates_folder_is_refused_by_check() {
    let (c, _) = template_case(&[]);
    let fragments = ["tpl", "templates folder"];
    c.run(&["check", "r.toml"])
        .expect_code(2)
        .expect_contains(&fragments);
    refused(&c, &fragments);
}

#[test]
fn template_that_is_not_utf8_is_refused() {
    let (c, _) = template_case(&[("report.html.j2", b"<p>\xff\xfe {{ title }}</p>\n")]);
    refused(&c, &["tpl", "report.html.j2"]);
}
