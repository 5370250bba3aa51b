//! The validation report as Markdown and as a self-contained HTML page (print stylesheet with
//! "page x of y"). Every value is escaped; nothing here reads or writes files.

use super::{Case, Suite, Validation};
use crate::report::markdown::escape_inline;

fn lre_text(v: f64) -> String {
    format!("{v:.1}")
}

fn opt_lre(v: Option<f64>) -> String {
    v.map_or("—".into(), lre_text)
}

fn verdict(v: &Validation) -> &'static str {
    if v.met() {
        "validation criteria met — awaiting review"
    } else {
        "validation criteria not met"
    }
}

const INTRO: &str = "This report records the validation of the calculations of fitwright before use \
(ISO/IEC 17025:2017, 7.11.2). Each problem is fitted with the engine a recipe uses: the equation is \
parsed and compiled with exact derivatives, problems linear in their parameters are solved by \
Householder QR on scaled columns, the others by Levenberg–Marquardt. Accuracy is the log relative \
error LRE = −log10(|estimate − reference| / |reference|) (McCullough, The American Statistician, \
1998), capped at the reference's significant digits (15 for the exact problems), 0 when the \
estimate is off by more than 100 %. Exact problems are generated from formulas with known \
parameters: polynomial and power-law data with dyadic coefficients on binary grids are exact in \
floating point; exponential data are rounded once. The NIST StRD problems are the official files \
of NIST ITL's Statistical Reference Datasets, read in place.";

fn rows_of(v: &Validation, suite: Suite) -> Vec<&Case> {
    v.cases.iter().filter(|c| c.suite == suite).collect()
}

fn case_label(c: &Case) -> String {
    match c.start {
        Some(s) => format!("{} (start {s})", c.name),
        None => c.name.clone(),
    }
}

/// The Markdown report.
pub fn markdown(v: &Validation) -> String {
    let e = escape_inline;
    let mut s = String::from("# fitwright software validation report\n\n");
    s.push_str(&format!(
        "- Tool: {}\n- Platform: {}\n- Generated (UTC): {}\n- NIST StRD folder: {}\n\n",
        e(&v.tool),
        e(&v.platform),
        e(&v.generated_at),
        v.strd_dir
            .as_deref()
            .map_or("not given (exact problems only)".to_string(), |d| format!(
                "`{}`",
                d.replace('`', "'")
            ))
    ));
    s.push_str(&format!(
        "**{}**\n\n{}\n\n## Acceptance criteria\n\n",
        verdict(v),
        e(INTRO)
    ));
    s.push_str("| Criterion | Measured | Met |\n| --- | --- | --- |\n");
    for c in &v.criteria {
        s.push_str(&format!(
            "| {} | {} | {} |\n",
            e(&c.text),
            e(&c.measured),
            if c.met { "yes" } else { "no" }
        ));
    }
    for suite in [Suite::Exact, Suite::StrdLinear, Suite::StrdNonlinear] {
        let rows = rows_of(v, suite);
        if rows.is_empty() {
            continue;
        }
        s.push_str(&format!("\n## {}\n\n", suite.title()));
        s.push_str("| Problem | Difficulty | n | p | Parameters LRE (min) | SDs LRE (min) | Residual SD | Stop | Meets |\n| --- | --- | ---: | ---: | ---: | ---: | ---: | --- | --- |\n");
        for c in &rows {
            let resid = match (c.suite, c.residual_sd, c.residual_sd_lre) {
                (Suite::Exact, Some(sd), _) => format!("{sd:.1e}"),
                (_, _, Some(l)) => format!("LRE {}", lre_text(l)),
                _ => "—".into(),
            };
            s.push_str(&format!(
                "| {} | {} | {} | {} | {} | {} | {} | {} | {} |\n",
                e(&case_label(c)),
                c.difficulty.map_or("—".into(), |d| d.to_string()),
                c.n,
                c.p,
                if c.param_lre.is_empty() {
                    "—".into()
                } else {
                    lre_text(c.min_param())
                },
                opt_lre(c.min_sd()),
                resid,
                e(&c.stop),
                if c.meets { "yes" } else { "no" }
            ));
        }
        let notes: Vec<String> = rows
            .iter()
            .flat_map(|c| {
                c.notes
                    .iter()
                    .map(move |n| format!("- {}: {}", e(&case_label(c)), e(n)))
            })
            .collect();
        if !notes.is_empty() {
            s.push_str("\nNotes:\n\n");
            s.push_str(&notes.join("\n"));
            s.push('\n');
        }
        s.push_str("\nEquations fitted:\n\n");
        let mut seen: Vec<&str> = Vec::new();
        for c in &rows {
            if !seen.contains(&c.name.as_str()) {
                seen.push(&c.name);
                s.push_str(&format!(
                    "- {}: `{}`\n",
                    e(&c.name),
                    c.equation.replace('`', "'")
                ));
            }
        }
    }
    s.push_str("\n## Sign-off\n\n| Role | Name | Signature | Date |\n| --- | --- | --- | --- |\n| Validated by | | | |\n| Approved by | | | |\n");
    s.push_str(&format!(
        "\n## Caution\n\n> {}\n\n---\n\n**End of validation report**\n",
        e(crate::CAUTION)
    ));
    s
}

fn h(text: &str) -> String {
    let mut out = String::with_capacity(text.len());
    for ch in text.chars() {
        match ch {
            '&' => out.push_str("&amp;"),
            '<' => out.push_str("&lt;"),
            '>' => out.push_str("&gt;"),
            '"' => out.push_str("&quot;"),
            '\'' => out.push_str("&#39;"),
            c => out.push(c),
        }
    }
    out
}

const STYLE: &str = "body{font:15px/1.5 \"Noto Sans\",\"DejaVu Sans\",Arial,sans-serif;color:#1f2328;margin:0;background:#f6f4ef}\
main{max-width:62rem;margin:2rem auto;padding:2rem 2.5rem;background:#fff;border:1px solid #d9d3c8}\
h1,h2{font-family:\"Noto Serif\",\"DejaVu Serif\",Georgia,serif}h2{border-top:2px solid #1f2328;padding-top:.6rem;margin-top:2rem}\
table{border-collapse:collapse;width:100%;font-size:.85rem;margin:.5rem 0 1rem}th,td{padding:.25rem .45rem;border-bottom:1px solid #ebe7df;text-align:left;vertical-align:top}\
td.num{text-align:right;font-variant-numeric:tabular-nums}code{font-family:\"DejaVu Sans Mono\",monospace;font-size:.85em}\
.met{color:#22603f;font-weight:600}.notmet{color:#9a2f1f;font-weight:600}.verdict{font-size:1.25rem;font-weight:600;padding:.6rem .9rem;border-left:6px solid}\
.verdict.met{background:#e5f0e9}.verdict.notmet{background:#f8e7e2}.small{font-size:.85rem;color:#50575f}\
.caution{border:1.5px solid #1f2328;padding:.8rem 1rem;margin-top:2rem}footer{text-align:center;margin-top:1.5rem;border-top:1px solid #d9d3c8;padding-top:.4rem}\
@page{margin:16mm 15mm 18mm;@bottom-left{content:\"fitwright software validation report\";font:8pt sans-serif;color:#50575f}@bottom-right{content:\"page \" counter(page) \" of \" counter(pages);font:8pt sans-serif;color:#50575f}}\
@media print{body{background:#fff}main{margin:0;padding:0;border:0;max-width:none}tr{break-inside:avoid}h2{break-after:avoid}}";

/// The HTML report (self-contained).
pub fn html(v: &Validation) -> String {
    let mut s = format!(
        "<!DOCTYPE html>\n<html lang=\"en\">\n<head>\n<meta charset=\"utf-8\">\n<title>fitwright software validation report</title>\n<style>{STYLE}</style>\n</head>\n<body>\n<main>\n<h1>fitwright software validation report</h1>\n<table class=\"ident\"><tbody><tr><th>Tool</th><td>{}</td></tr><tr><th>Platform</th><td>{}</td></tr><tr><th>Generated (UTC)</th><td>{}</td></tr><tr><th>NIST StRD folder</th><td>{}</td></tr></tbody></table>\n",
        h(&v.tool),
        h(&v.platform),
        h(&v.generated_at),
        v.strd_dir
            .as_deref()
            .map_or("not given (exact problems only)".to_string(), |d| format!(
                "<code>{}</code>",
                h(d)
            ))
    );
    s.push_str(&format!(
        "<p class=\"verdict {}\">{}</p>\n<p>{}</p>\n<h2>Acceptance criteria</h2>\n<table class=\"criteria\"><thead><tr><th>Criterion</th><th>Measured</th><th>Met</th></tr></thead><tbody>\n",
        if v.met() { "met" } else { "notmet" },
        verdict(v),
        h(INTRO)
    ));
    for c in &v.criteria {
        s.push_str(&format!(
            "<tr><td>{}</td><td>{}</td><td class=\"{}\">{}</td></tr>\n",
            h(&c.text),
            h(&c.measured),
            if c.met { "met" } else { "notmet" },
            if c.met { "yes" } else { "no" }
        ));
    }
    s.push_str("</tbody></table>\n");
    for suite in [Suite::Exact, Suite::StrdLinear, Suite::StrdNonlinear] {
        let rows = rows_of(v, suite);
        if rows.is_empty() {
            continue;
        }
        s.push_str(&format!(
            "<h2>{}</h2>\n<table class=\"lre\"><thead><tr><th>Problem</th><th>Difficulty</th><th>n</th><th>p</th><th>Parameters LRE (min)</th><th>SDs LRE (min)</th><th>Residual SD</th><th>Stop</th><th>Meets</th></tr></thead><tbody>\n",
            h(suite.title())
        ));
        for c in &rows {
            let resid = match (c.suite, c.residual_sd, c.residual_sd_lre) {
                (Suite::Exact, Some(sd), _) => format!("{sd:.1e}"),
                (_, _, Some(l)) => format!("LRE {}", lre_text(l)),
                _ => "—".into(),
            };
            s.push_str(&format!(
                "<tr><td title=\"{}\">{}</td><td>{}</td><td class=\"num\">{}</td><td class=\"num\">{}</td><td class=\"num\">{}</td><td class=\"num\">{}</td><td class=\"num\">{}</td><td class=\"small\">{}</td><td class=\"{}\">{}</td></tr>\n",
                h(&c.equation),
                h(&case_label(c)),
                c.difficulty.map_or("—".into(), |d| d.to_string()),
                c.n,
                c.p,
                if c.param_lre.is_empty() { "—".into() } else { lre_text(c.min_param()) },
                opt_lre(c.min_sd()),
                h(&resid),
                h(&c.stop),
                if c.meets { "met" } else { "notmet" },
                if c.meets { "yes" } else { "no" }
            ));
        }
        s.push_str("</tbody></table>\n");
        let notes: Vec<String> = rows
            .iter()
            .flat_map(|c| {
                c.notes.iter().map(move |n| {
                    format!("<li><strong>{}</strong>: {}</li>", h(&case_label(c)), h(n))
                })
            })
            .collect();
        if !notes.is_empty() {
            s.push_str(&format!("<ul class=\"small\">{}</ul>\n", notes.join("\n")));
        }
        let mut seen: Vec<&str> = Vec::new();
        s.push_str("<p class=\"small\"><strong>Equations fitted</strong></p><ul class=\"small\">");
        for c in &rows {
            if !seen.contains(&c.name.as_str()) {
                seen.push(&c.name);
                s.push_str(&format!(
                    "<li>{}: <code>{}</code></li>",
                    h(&c.name),
                    h(&c.equation)
                ));
            }
        }
        s.push_str("</ul>\n");
    }
    s.push_str("<h2>Sign-off</h2>\n<table><thead><tr><th>Role</th><th>Name</th><th>Signature</th><th>Date</th></tr></thead><tbody><tr><td>Validated by</td><td></td><td></td><td></td></tr><tr><td>Approved by</td><td></td><td></td><td></td></tr></tbody></table>\n");
    s.push_str(&format!(
        "<div class=\"caution\"><strong>Caution.</strong> {}</div>\n<footer><strong>End of validation report</strong> · {}</footer>\n</main>\n</body>\n</html>\n",
        h(crate::CAUTION),
        h(&v.tool)
    ));
    s
}
