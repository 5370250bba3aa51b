//! The HTML report parsed with a real HTML5 parser (scraper / html5ever).

use scraper::{ElementRef, Html, Selector};

use crate::demo::{XSS_IMG, XSS_SCRIPT, demo_context, hostile_context};
use fitwright::report::Templates;

fn sel(css: &str) -> Selector {
    Selector::parse(css).expect("test invariant: selector is valid CSS")
}

fn render(ctx: &fitwright::report::ReportContext) -> Html {
    let templates = Templates::builtin().expect("built-in templates compile");
    let html = templates.render_html(ctx).expect("html renders");
    Html::parse_document(&html)
}

fn text(el: ElementRef<'_>) -> String {
    el.text().collect::<String>().trim().to_string()
}

#[test]
fn sections_appear_in_spec_order() {
    let doc = render(&demo_context());
    let ids: Vec<String> = doc
        .select(&sel("main > section"))
        .filter_map(|s| s.value().id().map(str::to_string))
        .collect();
    assert_eq!(
        ids,
        [
            "notes",
            "verdict",
            "data",
            "model",
            "parameters",
            "statistics",
            "plots",
            "warnings",
            "traceability",
            "signoff",
            "caution"
        ]
    );
    // The title comes before every section.
    let h1 = doc
        .select(&sel("main > header h1"))
        .next()
        .expect("title heading");
    assert_eq!(text(h1), "Cold-room probe C3, beta-model calibration");
}

#[test]
fn criteria_table_cells_equal_the_context_values() {
    let ctx = hostile_context();
    let doc = render(&ctx);
    let rows: Vec<ElementRef<'_>> = doc
        .select(&sel("#verdict table.criteria tbody tr"))
        .collect();
    assert_eq!(rows.len(), ctx.criteria.len());
    let td = sel("td");
    for (row, expected) in rows.iter().zip(&ctx.criteria) {
        let cells: Vec<String> = row.select(&td).map(text).collect();
        assert_eq!(
            cells,
            [
                expected.criterion.clone(),
                expected.limit.clone(),
                expected.measured.clone(),
                expected.status.label().to_string(),
                expected.note.clone().unwrap_or_default(),
            ]
        );
        let class = row.value().attr("class").unwrap_or_default();
        assert_eq!(class, format!("row-{}", expected.status.code()));
    }
    let verdict = doc
        .select(&sel("#verdict .verdict-wording"))
        .next()
        .expect("verdict wording");
    assert_eq!(text(verdict), "criteria not met");
}

#[test]
fn verdict_wording_follows_the_code() {
    use fitwright::report::{Verdict, VerdictCode};
    for (code, wording) in [
        (VerdictCode::Accepted, "criteria met — awaiting review"),
        (VerdictCode::Rejected, "criteria not met"),
        (
            VerdictCode::NotJudged,
            "not judged — no acceptance criteria",
        ),
        (VerdictCode::Invalid, "invalid input"),
    ] {
        let mut ctx = demo_context();
        ctx.verdict = Verdict::new(code);
        let doc = render(&ctx);
        let shown = doc
            .select(&sel("#verdict .verdict-wording"))
            .next()
            .expect("wording");
        assert_eq!(text(shown), wording);
        let top = doc
            .select(&sel("header .notice"))
            .any(|n| text(n).starts_with("Not judged"));
        assert_eq!(
            top,
            code == VerdictCode::NotJudged,
            "not-judged notice at the top"
        );
    }
}

#[test]
fn hostile_title_and_notes_yield_no_script_or_img_element() {
    let ctx = hostile_context();
    let doc = render(&ctx);
    for tag in [
        "script", "img", "iframe", "object", "embed", "link", "a", "base", "form",
    ] {
        assert_eq!(doc.select(&sel(tag)).count(), 0, "no <{tag}> element");
    }
    for el in doc
        .root_element()
        .descendants()
        .filter_map(ElementRef::wrap)
    {
        for (name, _) in el.value().attrs() {
            assert!(
                !name.starts_with("on"),
                "event attribute {name} on <{}>",
                el.value().name()
            );
        }
    }
    // The hostile strings are shown, as text.
    let h1 = doc.select(&sel("h1")).next().expect("title");
    assert_eq!(text(h1), format!("Probe {XSS_SCRIPT} {XSS_IMG}"));
    let notes = doc.select(&sel("#notes")).next().expect("notes");
    let notes_text = text(notes);
    assert!(notes_text.contains(XSS_SCRIPT), "{notes_text}");
    assert!(
        notes_text.contains("<script>alert('block')</script>"),
        "{notes_text}"
    );
    assert!(notes_text.contains("[image: photo]"), "{notes_text}");
    let title = doc.select(&sel("head > title")).next().expect("head title");
    assert!(text(title).contains(XSS_SCRIPT));
}

#[test]
fn notes_markdown_is_rendered() {
    let doc = render(&demo_context());
    assert_eq!(doc.select(&sel("#notes strong")).count(), 1);
    assert_eq!(doc.select(&sel("#notes ul li")).count(), 2);
    let code = doc.select(&sel("#notes code")).next().expect("code span");
    assert_eq!(text(code), "CAL-TH-004");
}

#[test]
fn plots_are_inline_svg_with_titles() {
    let ctx = demo_context();
    let doc = render(&ctx);
    let figures: Vec<ElementRef<'_>> = doc.select(&sel("#plots figure.plot")).collect();
    assert_eq!(figures.len(), ctx.plots.len());
    for (figure, plot) in figures.iter().zip(&ctx.plots) {
        assert_eq!(
            figure.value().id(),
            Some(format!("plot-{}", plot.name).as_str())
        );
        let svg = figure.select(&sel("svg")).next().expect("inline svg");
        let title = svg.select(&sel("title")).next().expect("svg title");
        assert_eq!(text(title), plot.title);
        assert!(svg.select(&sel("text")).count() > 5, "axis text drawn");
    }
}

#[test]
fn report_is_self_contained() {
    let templates = Templates::builtin().expect("built-in templates compile");
    let html = templates.render_html(&hostile_context()).expect("renders");
    let doc = Html::parse_document(&html);
    for el in doc
        .root_element()
        .descendants()
        .filter_map(ElementRef::wrap)
    {
        for attr in [
            "src",
            "href",
            "xlink:href",
            "action",
            "srcset",
            "poster",
            "data",
        ] {
            if let Some(value) = el.value().attr(attr) {
                let v = value.trim().to_ascii_lowercase();
                assert!(
                    !(v.starts_with("http:") || v.starts_with("https:") || v.starts_with("//")),
                    "external URL in {attr} of <{}>: {value}",
                    el.value().name()
                );
            }
        }
    }
    let style: String = doc
        .select(&sel("style"))
        .map(|s| s.text().collect::<String>())
        .collect();
    assert!(!style.contains("url("), "no fetched resources in CSS");
    assert!(!style.contains("@import"), "no imported CSS");
    assert_eq!(doc.select(&sel("head > style")).count(), 1, "inline CSS");
    assert!(style.contains("@media print"), "print stylesheet");
}

#[test]
fn signoff_block_has_name_signature_and_date_per_role() {
    let ctx = demo_context();
    let doc = render(&ctx);
    let roles: Vec<ElementRef<'_>> = doc.select(&sel("#signoff .signoff-role")).collect();
    assert_eq!(roles.len(), ctx.signoff.len());
    for (role, name) in roles.iter().zip(&ctx.signoff) {
        let label = role.select(&sel(".role")).next().expect("role label");
        assert_eq!(&text(label), name);
        let fields: Vec<String> = role
            .select(&sel(".signoff-field .label"))
            .map(text)
            .collect();
        assert_eq!(fields, ["Name", "Signature", "Date"]);
    }
}

#[test]
fn caution_is_the_spec_text_in_full() {
    let doc = render(&demo_context());
    let caution = doc.select(&sel("#caution p")).next().expect("caution");
    // SPEC §12, verbatim.
    assert_eq!(
        text(caution),
        "Calibration results can feed decisions about safety, health and legal metrology. The \
         report is an aid to a qualified person's review; acceptance by this tool does not \
         replace the laboratory's documented procedure, its accreditation requirements (for \
         example ISO/IEC 17025) or local regulations, which prevail."
    );
}

#[test]
fn parameter_tables_and_differences_are_all_shown() {
    let ctx = demo_context();
    let doc = render(&ctx);
    let tables: Vec<ElementRef<'_>> = doc.select(&sel("#parameters table.parameters")).collect();
    assert_eq!(tables.len(), 2);
    let headings: Vec<String> = doc.select(&sel("#parameters h3")).map(text).collect();
    assert_eq!(
        headings,
        [
            "Linearized start",
            "Refined (original space)",
            "Differences: refined − linearized"
        ]
    );
    let first_row: Vec<String> = tables[1]
        .select(&sel("tbody tr"))
        .next()
        .expect("row")
        .select(&sel("td"))
        .map(text)
        .collect();
    let row = &ctx.parameter_tables[1].rows[0];
    assert_eq!(
        first_row[..7],
        [
            row.name.clone(),
            row.value.clone(),
            row.std_error.clone(),
            row.rel_std_error.clone(),
            row.ci_low.clone(),
            row.ci_high.clone(),
            row.unit.clone().unwrap_or_default()
        ]
    );
    assert_eq!(
        doc.select(&sel("#parameters table.differences tbody tr"))
            .count(),
        2
    );
}
