//! Report templates: the built-in `report.html.j2` and `report.md.j2`
//! (compiled into the binary from `report-templates/`), optional overrides
//! from a folder, and rendering of a [`ReportContext`].
//!
//! Templates are minijinja. They see only the [`ReportContext`] (its fields
//! are the top-level names) and these filters:
//! - `markdown` — notes Markdown to a safe HTML fragment (HTML templates);
//! - `notes_markdown` — notes Markdown made safe for a Markdown report;
//! - `code`, `code_cell`, `code_block` — text as a Markdown code span, a code
//!   span inside a table cell, or a fenced block (Markdown templates; in HTML
//!   templates they return plain text, which is then escaped).
//!
//! Escaping is automatic: templates whose name ends in `.html.j2` escape
//! every value for HTML, those ending in `.md.j2` escape every value for
//! Markdown ([`crate::report::markdown::escape_inline`]). Only filter results
//! made for the template's format and `| safe` bypass it; the built-in HTML
//! template uses `| safe` for plot SVG only, which [`crate::report::plot`]
//! alone can produce.
//!
//! Undefined names are errors (strict mode), so a misspelt field in an
//! override template fails loudly, naming the file and line, instead of
//! printing nothing. `none` prints as nothing.

use std::path::{Path, PathBuf};

use minijinja::{AutoEscape, Environment, Error, ErrorKind, State, UndefinedBehavior, Value};
use sha2::{Digest, Sha256};

use super::context::{ReportContext, Traceability};
use super::markdown;
use super::{ReportError, ReportErrorKind, Result};

/// Name of the HTML report template.
pub const HTML_TEMPLATE: &str = "report.html.j2";
/// Name of the Markdown report template.
pub const MARKDOWN_TEMPLATE: &str = "report.md.j2";

const BUILTIN: [(&str, &str); 2] = [
    (
        HTML_TEMPLATE,
        include_str!("../../report-templates/report.html.j2"),
    ),
    (
        MARKDOWN_TEMPLATE,
        include_str!("../../report-templates/report.md.j2"),
    ),
];

/// The auto-escape name used for Markdown templates.
const MARKDOWN_ESCAPE: AutoEscape = AutoEscape::Custom("markdown");

/// One loaded template and where it came from.
#[derive(Debug, Clone)]
struct Source {
    name: String,
    /// `built-in report.html.j2` or the override file's path.
    origin: String,
    overridden: bool,
    text: String,
}

/// A compiled set of report templates.
pub struct Templates {
    env: Environment<'static>,
    /// Sorted by name.
    sources: Vec<Source>,
    override_dir: Option<PathBuf>,
}

impl std::fmt::Debug for Templates {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.debug_struct("Templates")
            .field(
                "templates",
                &self.sources.iter().map(|s| &s.origin).collect::<Vec<_>>(),
            )
            .finish()
    }
}

fn auto_escape_for(name: &str) -> AutoEscape {
    let stem = name.strip_suffix(".j2").unwrap_or(name);
    if stem.ends_with(".html") || stem.ends_with(".htm") {
        AutoEscape::Html
    } else if stem.ends_with(".md") {
        MARKDOWN_ESCAPE
    } else {
        AutoEscape::None
    }
}

fn is_markdown(state: &State) -> bool {
    state.auto_escape() == MARKDOWN_ESCAPE
}

fn filter_markdown(state: &State, notes: String) -> std::result::Result<Value, Error> {
    if state.auto_escape() == AutoEscape::Html {
        Ok(Value::from_safe_string(markdown::notes_to_html(&notes)))
    } else {
        Err(Error::new(
            ErrorKind::InvalidOperation,
            "the markdown filter renders HTML; in a Markdown template use notes_markdown",
        ))
    }
}

fn filter_notes_markdown(state: &State, notes: String) -> std::result::Result<Value, Error> {
    if is_markdown(state) {
        Ok(Value::from_safe_string(
            markdown::notes_to_markdown(&notes).trim_end().to_string(),
        ))
    } else {
        Err(Error::new(
            ErrorKind::InvalidOperation,
            "the notes_markdown filter is for Markdown templates; in HTML use markdown",
        ))
    }
}

fn md_only(state: &State, text: String, f: fn(&str) -> String) -> Value {
    if is_markdown(state) {
        Value::from_safe_string(f(&text))
    } else {
        Value::from(text)
    }
}

fn build_env(sources: &[Source]) -> Result<Environment<'static>> {
    let mut env = Environment::new();
    env.set_auto_escape_callback(auto_escape_for);
    env.set_undefined_behavior(UndefinedBehavior::Strict);
    env.set_trim_blocks(true);
    env.set_lstrip_blocks(true);
    env.set_keep_trailing_newline(true);
    env.set_formatter(|out, state, value| {
        if value.is_none() {
            return Ok(());
        }
        if is_markdown(state) && !value.is_safe() {
            let text = match value.as_str() {
                Some(s) => markdown::escape_inline(s),
                None => markdown::escape_inline(&value.to_string()),
            };
            return out.write_str(&text).map_err(Error::from);
        }
        if is_markdown(state) {
            return out
                .write_str(value.as_str().unwrap_or_default())
                .map_err(Error::from);
        }
        minijinja::escape_formatter(out, state, value)
    });
    env.add_filter("markdown", filter_markdown);
    env.add_filter("notes_markdown", filter_notes_markdown);
    env.add_filter("code", |state: &State, text: String| {
        md_only(state, text, markdown::code_span)
    });
    env.add_filter("code_cell", |state: &State, text: String| {
        md_only(state, text, markdown::code_cell)
    });
    env.add_filter("code_block", |state: &State, text: String| {
        md_only(state, text, markdown::code_block)
    });
    for source in sources {
        env.add_template_owned(source.name.clone(), source.text.clone())
            .map_err(|e| {
                ReportError::new(ReportErrorKind::TemplateSyntax {
                    file: source.origin.clone(),
                    line: e.line(),
                    message: error_message(&e),
                })
            })?;
    }
    Ok(env)
}

/// The message of a minijinja error without its location (we print ours).
fn error_message(e: &Error) -> String {
    match e.detail() {
        Some(detail) => format!("{}: {detail}", e.kind()),
        None => e.kind().to_string(),
    }
}

impl Templates {
    /// The built-in templates.
    pub fn builtin() -> Result<Self> {
        Self::load(None)
    }

    /// The built-in templates, each replaced by the file of the same name in
    /// `dir` when there is one. Every `*.j2` file directly in `dir` is loaded
    /// (so overrides can `{% include %}` their own parts). A template that
    /// does not compile is an error naming its file and line.
    pub fn load(dir: Option<&Path>) -> Result<Self> {
        let mut sources: Vec<Source> = BUILTIN
            .iter()
            .map(|(name, text)| Source {
                name: (*name).to_string(),
                origin: format!("built-in {name}"),
                overridden: false,
                text: (*text).to_string(),
            })
            .collect();
        if let Some(dir) = dir {
            for (name, path) in override_files(dir)? {
                let text = std::fs::read_to_string(&path)
                    .map_err(|e| ReportError::io(&path, "read the template", e))?;
                let origin = path.display().to_string();
                match sources.iter_mut().find(|s| s.name == name) {
                    Some(existing) => {
                        existing.origin = origin;
                        existing.overridden = true;
                        existing.text = text;
                    }
                    None => sources.push(Source {
                        name,
                        origin,
                        overridden: true,
                        text,
                    }),
                }
            }
        }
        sources.sort_by(|a, b| a.name.cmp(&b.name));
        let env = build_env(&sources)?;
        Ok(Templates {
            env,
            sources,
            override_dir: dir.map(Path::to_path_buf),
        })
    }

    /// Hash of the templates in use, for the traceability section: the
    /// SHA-256 of the lines `<sha256 of the file>  <name>\n`, in name order —
    /// what `sha256sum *.j2 | sha256sum` prints in a folder holding exactly
    /// these files.
    pub fn sha256(&self) -> String {
        let mut listing = String::new();
        for (name, hash) in self.file_hashes() {
            listing.push_str(&format!("{hash}  {name}\n"));
        }
        hex(&Sha256::digest(listing.as_bytes()))
    }

    /// Each template's name and the SHA-256 of its text, in name order.
    pub fn file_hashes(&self) -> Vec<(String, String)> {
        self.sources
            .iter()
            .map(|s| (s.name.clone(), hex(&Sha256::digest(s.text.as_bytes()))))
            .collect()
    }

    /// Where the templates came from, for the traceability section:
    /// `built-in`, or `<dir> (overrides: a.j2, b.j2; rest built-in)`.
    pub fn source_label(&self) -> String {
        let overridden: Vec<&str> = self
            .sources
            .iter()
            .filter(|s| s.overridden)
            .map(|s| s.name.as_str())
            .collect();
        match (&self.override_dir, overridden.is_empty()) {
            (Some(dir), false) => format!(
                "{} (overrides: {}; rest built-in)",
                dir.display(),
                overridden.join(", ")
            ),
            _ => "built-in".to_string(),
        }
    }

    /// Sets the template fields of the traceability section
    /// (`templates_sha256`, `templates_source`) from these templates.
    pub fn fill_traceability(&self, traceability: &mut Traceability) {
        traceability.templates_sha256 = self.sha256();
        traceability.templates_source = self.source_label();
    }

    /// Renders `report.html.j2`.
    pub fn render_html(&self, ctx: &ReportContext) -> Result<String> {
        self.render(HTML_TEMPLATE, ctx)
    }

    /// Renders `report.md.j2`.
    pub fn render_markdown(&self, ctx: &ReportContext) -> Result<String> {
        self.render(MARKDOWN_TEMPLATE, ctx)
    }

    fn origin_of(&self, name: &str) -> String {
        self.sources
            .iter()
            .find(|s| s.name == name)
            .map(|s| s.origin.clone())
            .unwrap_or_else(|| name.to_string())
    }

    fn render(&self, name: &str, ctx: &ReportContext) -> Result<String> {
        let render_error = |e: Error| {
            let file = e
                .name()
                .map(|n| self.origin_of(n))
                .unwrap_or_else(|| self.origin_of(name));
            ReportError::new(ReportErrorKind::TemplateRender {
                file,
                line: e.line(),
                message: error_message(&e),
            })
        };
        let template = self.env.get_template(name).map_err(render_error)?;
        template
            .render(Value::from_serialize(ctx))
            .map_err(render_error)
    }
}

/// The `*.j2` files directly in `dir`, by name.
fn override_files(dir: &Path) -> Result<Vec<(String, PathBuf)>> {
    let entries =
        std::fs::read_dir(dir).map_err(|e| ReportError::io(dir, "read the templates folder", e))?;
    let mut files = Vec::new();
    for entry in entries {
        let entry = entry.map_err(|e| ReportError::io(dir, "read the templates folder", e))?;
        let path = entry.path();
        let Some(name) = path.file_name().and_then(|n| n.to_str()) else {
            continue;
        };
        if name.ends_with(".j2") && path.is_file() {
            files.push((name.to_string(), path.clone()));
        }
    }
    files.sort();
    Ok(files)
}

/// Lower-case hex of bytes.
pub(crate) fn hex(bytes: &[u8]) -> String {
    bytes.iter().map(|b| format!("{b:02x}")).collect()
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::report::context::{Verdict, VerdictCode};

    fn minimal() -> ReportContext {
        ReportContext::new("probe-x", "Probe X", Verdict::new(VerdictCode::NotJudged))
    }

    fn temp_dir(tag: &str) -> PathBuf {
        let dir =
            std::env::temp_dir().join(format!("fitwright-templates-{tag}-{}", std::process::id()));
        let _ = std::fs::remove_dir_all(&dir);
        std::fs::create_dir_all(&dir).expect("test invariant: temp dir is writable");
        dir
    }

    #[test]
    fn builtin_templates_compile_and_render_a_minimal_context() {
        let t = Templates::builtin().expect("built-in templates compile");
        let html = t.render_html(&minimal()).expect("html renders");
        let md = t.render_markdown(&minimal()).expect("md renders");
        assert!(html.contains("Probe X"));
        assert!(md.contains("Probe X"));
        assert_eq!(t.source_label(), "built-in");
        let mut ctx = minimal();
        t.fill_traceability(&mut ctx.traceability);
        assert_eq!(ctx.traceability.templates_sha256, t.sha256());
        assert_eq!(ctx.traceability.templates_source, "built-in");
    }

    #[test]
    fn override_syntax_error_names_the_file_and_line() {
        let dir = temp_dir("syntax");
        std::fs::write(
            dir.join(MARKDOWN_TEMPLATE),
            "# {{ title }}\n\n{% if x %}\nno end\n",
        )
        .expect("write");
        let err = Templates::load(Some(&dir)).expect_err("must not compile");
        let text = err.to_string();
        let path = dir.join(MARKDOWN_TEMPLATE).display().to_string();
        assert!(text.starts_with(&path), "{text}");
        assert!(
            matches!(err.kind(), ReportErrorKind::TemplateSyntax { line: Some(l), .. } if *l >= 3),
            "{text}"
        );
        let _ = std::fs::remove_dir_all(&dir);
    }

    #[test]
    fn override_replaces_builtin_and_changes_the_hash() {
        let dir = temp_dir("override");
        std::fs::write(
            dir.join(MARKDOWN_TEMPLATE),
            "custom {{ title }} {{ name }}\n",
        )
        .expect("write");
        let t = Templates::load(Some(&dir)).expect("compiles");
        assert_eq!(
            t.render_markdown(&minimal()).expect("renders"),
            "custom Probe X probe-x\n"
        );
        assert_ne!(t.sha256(), Templates::builtin().expect("builtin").sha256());
        assert!(t.source_label().contains("overrides: report.md.j2"));
        // The HTML template is still the built-in one.
        assert!(t.render_html(&minimal()).expect("html").contains("<html"));
        let _ = std::fs::remove_dir_all(&dir);
    }

    #[test]
    fn misspelt_field_in_override_fails_with_file_and_line() {
        let dir = temp_dir("strict");
        std::fs::write(dir.join(MARKDOWN_TEMPLATE), "ok\n{{ titel }}\n").expect("write");
        let t = Templates::load(Some(&dir)).expect("compiles");
        let err = t
            .render_markdown(&minimal())
            .expect_err("undefined is an error");
        assert!(
            matches!(
                err.kind(),
                ReportErrorKind::TemplateRender { line: Some(2), .. }
            ),
            "{err}"
        );
        let _ = std::fs::remove_dir_all(&dir);
    }

    #[test]
    fn missing_override_folder_is_a_clear_error() {
        let dir = std::env::temp_dir().join("fitwright-no-such-templates-folder");
        let err = Templates::load(Some(&dir)).expect_err("missing folder");
        assert!(
            err.to_string().contains("cannot read the templates folder"),
            "{err}"
        );
    }

    #[test]
    fn template_hash_matches_sha256sum_listing() {
        let t = Templates::builtin().expect("builtin");
        let mut listing = String::new();
        for (name, text) in BUILTIN
            .iter()
            .copied()
            .collect::<std::collections::BTreeMap<_, _>>()
        {
            listing.push_str(&format!(
                "{}  {name}\n",
                hex(&Sha256::digest(text.as_bytes()))
            ));
        }
        assert_eq!(t.sha256(), hex(&Sha256::digest(listing.as_bytes())));
        assert_eq!(t.sha256().len(), 64);
    }

    #[test]
    fn markdown_escaping_applies_to_every_printed_value() {
        let dir = temp_dir("mdescape");
        std::fs::write(
            dir.join(MARKDOWN_TEMPLATE),
            "{{ title }}|{{ title | code }}|{{ notes | notes_markdown }}\n",
        )
        .expect("write");
        let t = Templates::load(Some(&dir)).expect("compiles");
        let mut ctx = minimal();
        ctx.title = "a*b <x>".to_string();
        ctx.notes = "<i>n</i>".to_string();
        assert_eq!(
            t.render_markdown(&ctx).expect("renders"),
            "a\\*b \\<x\\>|`a*b <x>`|&lt;i&gt;n&lt;/i&gt;\n"
        );
        let _ = std::fs::remove_dir_all(&dir);
    }
}
