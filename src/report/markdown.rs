//! Markdown for reports: notes rendered to safe HTML, notes made safe for a
//! Markdown report, and escaping of user text placed into Markdown.
//!
//! Notes are CommonMark (plus GFM tables and strikethrough) parsed with
//! pulldown-cmark. What is not passed through, in both outputs:
//! - raw HTML (blocks and inline tags) is shown as text;
//! - images are replaced by the text `[image: alt]`, so nothing is fetched;
//! - in HTML, links become their text followed by the target in parentheses,
//!   so the report holds no outbound (or `javascript:`) links;
//! - headings are shifted down two levels (`#` becomes `<h3>`), so notes
//!   cannot break the report's outline.

use pulldown_cmark::{CowStr, Event, HeadingLevel, Options, Parser, Tag, TagEnd};

fn parser_options() -> Options {
    Options::ENABLE_TABLES | Options::ENABLE_STRIKETHROUGH
}

fn shifted(level: HeadingLevel) -> HeadingLevel {
    match level {
        HeadingLevel::H1 => HeadingLevel::H3,
        HeadingLevel::H2 => HeadingLevel::H4,
        HeadingLevel::H3 => HeadingLevel::H5,
        _ => HeadingLevel::H6,
    }
}

/// State of the event filter of [`notes_to_html`].
#[derive(Default)]
struct LinkState {
    /// Destinations of the links we are inside, innermost last, with the
    /// text seen so far (to avoid repeating an autolink's URL).
    links: Vec<(String, String)>,
    /// Nesting depth inside images; their text becomes the alt text.
    image_depth: usize,
    image_alt: String,
}

impl LinkState {
    fn note_text(&mut self, text: &str) {
        if let Some((_, seen)) = self.links.last_mut() {
            seen.push_str(text);
        }
    }
}

/// Renders notes (Markdown) to an HTML fragment that contains no raw HTML
/// from the source, no images and no links (see the module docs).
pub fn notes_to_html(source: &str) -> String {
    let mut state = LinkState::default();
    let mut events: Vec<Event<'_>> = Vec::new();
    for event in Parser::new_ext(source, parser_options()) {
        if state.image_depth > 0 {
            match event {
                Event::Start(Tag::Image { .. }) => state.image_depth += 1,
                Event::End(TagEnd::Image) => {
                    state.image_depth -= 1;
                    if state.image_depth == 0 {
                        let alt = std::mem::take(&mut state.image_alt);
                        let text = format!("[image: {}]", alt.trim());
                        state.note_text(&text);
                        events.push(Event::Text(CowStr::from(text)));
                    }
                }
                Event::Text(t) | Event::Code(t) | Event::Html(t) | Event::InlineHtml(t) => {
                    state.image_alt.push_str(&t)
                }
                _ => {}
            }
            continue;
        }
        match event {
            Event::Html(t) | Event::InlineHtml(t) => {
                state.note_text(&t);
                events.push(Event::Text(t));
            }
            Event::Start(Tag::HtmlBlock) => events.push(Event::Start(Tag::Paragraph)),
            Event::End(TagEnd::HtmlBlock) => events.push(Event::End(TagEnd::Paragraph)),
            Event::Start(Tag::Heading { level, .. }) => events.push(Event::Start(Tag::Heading {
                level: shifted(level),
                id: None,
                classes: Vec::new(),
                attrs: Vec::new(),
            })),
            Event::End(TagEnd::Heading(level)) => {
                events.push(Event::End(TagEnd::Heading(shifted(level))))
            }
            Event::Start(Tag::Image { .. }) => state.image_depth = 1,
            Event::Start(Tag::Link { dest_url, .. }) => {
                state.links.push((dest_url.to_string(), String::new()));
            }
            Event::End(TagEnd::Link) => {
                if let Some((url, seen)) = state.links.pop() {
                    let target = url.strip_prefix("mailto:").unwrap_or(&url);
                    if !url.is_empty() && seen.trim() != target && seen.trim() != url {
                        let text = format!(" ({url})");
                        state.note_text(&text);
                        events.push(Event::Text(CowStr::from(text)));
                    }
                }
            }
            Event::Text(t) => {
                state.note_text(&t);
                events.push(Event::Text(t));
            }
            Event::Code(t) => {
                state.note_text(&t);
                events.push(Event::Code(t));
            }
            other => events.push(other),
        }
    }
    let mut html = String::new();
    pulldown_cmark::html::push_html(&mut html, events.into_iter());
    html
}

/// Whether a link target would run code when followed (`javascript:`,
/// `vbscript:`, `data:`), ignoring case and surrounding blanks.
fn is_script_url(url: &str) -> bool {
    let lower: String = url
        .trim()
        .chars()
        .filter(|c| !c.is_whitespace() && !c.is_control())
        .collect::<String>()
        .to_ascii_lowercase();
    ["javascript:", "vbscript:", "data:"]
        .iter()
        .any(|scheme| lower.starts_with(scheme))
}

/// Returns the notes as Markdown with raw HTML neutralised: every `<` and
/// `>` inside a raw-HTML span is written as an entity, so a Markdown viewer
/// shows the tag as text; images lose their `!` (they show as links) so a
/// viewer fetches nothing; links to `javascript:`, `vbscript:` or `data:`
/// lose their link syntax. Headings written with `#` gain two levels.
/// Everything else is left byte for byte.
pub fn notes_to_markdown(source: &str) -> String {
    // Raw-HTML spans to neutralise, and text to insert before given offsets.
    let mut html_ranges: Vec<std::ops::Range<usize>> = Vec::new();
    let mut inserts: Vec<(usize, &'static str)> = Vec::new();
    for (event, range) in Parser::new_ext(source, parser_options()).into_offset_iter() {
        let first = source.get(range.start..range.start + 1);
        match event {
            Event::Html(_) | Event::InlineHtml(_) => html_ranges.push(range),
            Event::Start(Tag::Image { .. }) if first == Some("!") => {
                inserts.push((range.start, "\\"));
            }
            Event::Start(Tag::Link { dest_url, .. })
                if is_script_url(&dest_url) && matches!(first, Some("[" | "<")) =>
            {
                inserts.push((range.start, "\\"));
            }
            Event::Start(Tag::Heading { .. }) if first == Some("#") => {
                inserts.push((range.start, "##"));
            }
            _ => {}
        }
    }
    html_ranges.sort_by_key(|r| (r.start, r.end));
    inserts.sort_by_key(|(at, _)| *at);
    let mut out = String::with_capacity(source.len() + 16);
    let mut inserts = inserts.into_iter().peekable();
    let mut ranges = html_ranges.into_iter().peekable();
    for (offset, ch) in source.char_indices() {
        while let Some((_, text)) = inserts.next_if(|(at, _)| *at <= offset) {
            out.push_str(text);
        }
        while ranges.next_if(|r| r.end <= offset).is_some() {}
        let in_html = ranges.peek().is_some_and(|r| r.contains(&offset));
        match ch {
            '<' if in_html => out.push_str("&lt;"),
            '>' if in_html => out.push_str("&gt;"),
            _ => out.push(ch),
        }
    }
    out
}

/// Escapes user text for inline Markdown (paragraphs, headings, table
/// cells): ASCII punctuation that Markdown or GFM give a meaning is
/// backslash-escaped (CommonMark 0.31 §2.4), and line breaks become spaces so
/// a value cannot end a table row.
pub fn escape_inline(text: &str) -> String {
    let mut out = String::with_capacity(text.len() + 8);
    for ch in text.chars() {
        match ch {
            '\\' | '`' | '*' | '_' | '[' | ']' | '<' | '>' | '|' | '#' | '~' | '&' | '!' => {
                out.push('\\');
                out.push(ch);
            }
            '\r' => {}
            '\n' => out.push(' '),
            _ => out.push(ch),
        }
    }
    out
}

/// The longest run of backticks in `text`.
fn longest_backtick_run(text: &str) -> usize {
    let mut longest = 0;
    let mut run = 0;
    for ch in text.chars() {
        if ch == '`' {
            run += 1;
            longest = longest.max(run);
        } else {
            run = 0;
        }
    }
    longest
}

/// User text as an inline code span (equations, file names), delimited by
/// more backticks than the text holds (CommonMark 0.31 §6.1). Not for table
/// cells: use [`code_cell`].
/// Empty text gives an empty string (an empty code span cannot be written).
pub fn code_span(text: &str) -> String {
    if text.is_empty() {
        return String::new();
    }
    let text: String = text
        .chars()
        .map(|c| if c == '\n' || c == '\r' { ' ' } else { c })
        .collect();
    let fence = "`".repeat(longest_backtick_run(&text) + 1);
    let pad = if text.starts_with('`') || text.ends_with('`') {
        " "
    } else {
        ""
    };
    format!("{fence}{pad}{text}{pad}{fence}")
}

/// A code span inside a GFM table cell: as [`code_span`], with `|` escaped
/// (GFM 0.29 §4.10 lets `\|` stand inside code spans in cells).
pub fn code_cell(text: &str) -> String {
    code_span(text).replace('|', "\\|")
}

/// User text as a fenced code block, fenced by more backticks than the text
/// holds (CommonMark 0.31 §4.5).
pub fn code_block(text: &str) -> String {
    let fence = "`".repeat(longest_backtick_run(text).max(2) + 1);
    format!("{fence}text\n{}\n{fence}", text.trim_end_matches('\n'))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn raw_html_in_notes_is_shown_as_text_in_html() {
        let html =
            notes_to_html("Hello <script>alert(1)</script>\n\n<div onclick=\"x\">block</div>\n");
        assert!(!html.contains("<script"), "{html}");
        assert!(!html.contains("<div"), "{html}");
        assert!(html.contains("&lt;script&gt;"), "{html}");
    }

    #[test]
    fn images_and_links_become_text_in_html() {
        let html = notes_to_html(
            "See ![probe photo](http://example.invalid/p.png) and [the procedure](https://example.invalid/cal) \
             or <https://example.invalid/x>, [bad](javascript:alert(1)).",
        );
        assert!(!html.contains("<img"), "{html}");
        assert!(!html.contains("<a "), "{html}");
        assert!(!html.contains("href"), "{html}");
        assert!(html.contains("[image: probe photo]"), "{html}");
        assert!(
            html.contains("the procedure (https://example.invalid/cal)"),
            "{html}"
        );
        // An autolink shows its URL once.
        assert!(html.contains("or https://example.invalid/x,"), "{html}");
        assert!(html.contains("bad (javascript:alert(1))"), "{html}");
    }

    #[test]
    fn note_headings_are_shifted_below_the_report_outline() {
        let html = notes_to_html("# Scope\n\ntext\n\n## Detail\n");
        assert!(html.contains("<h3>Scope</h3>"), "{html}");
        assert!(html.contains("<h4>Detail</h4>"), "{html}");
    }

    #[test]
    fn markdown_notes_neutralise_raw_html_and_images_only() {
        let md = notes_to_markdown(
            "# Scope\n\nUse `a<b` and <b>bold</b>.\n\n<script>x()</script>\n\n![p](http://e.invalid/p.png)\n",
        );
        assert!(md.starts_with("### Scope\n"), "{md}");
        assert!(md.contains("`a<b`"), "code spans stay: {md}");
        assert!(md.contains("&lt;b&gt;bold&lt;/b&gt;"), "{md}");
        assert!(md.contains("&lt;script&gt;x()&lt;/script&gt;"), "{md}");
        assert!(md.contains("\\![p](http://e.invalid/p.png)"), "{md}");
        let md_links = notes_to_markdown(
            "[ok](https://e.invalid/) [x](JavaScript:alert(1)) <javascript:alert(2)>",
        );
        assert_eq!(
            md_links,
            "[ok](https://e.invalid/) \\[x](JavaScript:alert(1)) \\<javascript:alert(2)>"
        );
        let html = viewer_html(&md_links).to_ascii_lowercase();
        assert!(html.contains("href=\"https://e.invalid/\""), "{html}");
        assert!(!html.contains("href=\"javascript"), "{html}");
        // The neutralised notes render to HTML without those elements.
        let html = notes_to_html(&md);
        assert!(!html.contains("<script") && !html.contains("<b>") && !html.contains("<img"));
    }

    /// Plain pulldown-cmark rendering, links kept, as a Markdown viewer would.
    fn viewer_html(md: &str) -> String {
        let mut html = String::new();
        pulldown_cmark::html::push_html(&mut html, Parser::new(md));
        html
    }

    #[test]
    fn inline_escape_keeps_text_literal_in_commonmark() {
        let text = "a|b *c* _d_ <img src=x> [l](u) `e` #1 & \\";
        let escaped = escape_inline(text);
        let html = notes_to_html(&escaped);
        assert_eq!(
            html.trim(),
            "<p>a|b *c* _d_ &lt;img src=x&gt; [l](u) `e` #1 &amp; \\</p>"
        );
        assert_eq!(escape_inline("two\nlines"), "two lines");
    }

    #[test]
    fn code_spans_survive_backticks_and_pipes() {
        assert_eq!(code_span("R = a*b"), "`R = a*b`");
        assert_eq!(code_span(""), "");
        assert_eq!(code_span("a`b"), "``a`b``");
        assert_eq!(code_span("`x"), "`` `x ``");
        assert_eq!(code_cell("a|b"), "`a\\|b`");
        assert_eq!(code_block("x\n```\ny"), "````text\nx\n```\ny\n````");
    }
}
