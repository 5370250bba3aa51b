//! Report rendering: turns one [`ReportContext`] into HTML, Markdown and SVG
//! plots, and writes a run folder atomically.
//!
//! This stage is pure rendering. It knows nothing about recipes, data or fits:
//! the pipeline fills a [`ReportContext`] with plain, already formatted text
//! (see [`format`] for the number style) and plots made with [`plot`], then
//! calls [`Templates::render_html`] / [`Templates::render_markdown`] and
//! [`write::write_run`]. The only I/O here is reading override templates
//! ([`Templates::load`]) and writing the run folder ([`write`]).
//!
//! Safety rules kept by this module (SPEC §8):
//! - every user string is escaped: minijinja HTML auto-escaping for
//!   `report.html.j2`, a Markdown escaper for `report.md.j2`;
//! - notes are Markdown rendered with pulldown-cmark; raw HTML in them is shown
//!   as text, never passed through; images and links become plain text so the
//!   HTML file never reaches the network;
//! - inline SVG can only come from [`plot`] (the [`Svg`] type has no public
//!   constructor), and plotters escapes the text it draws.

pub mod context;
pub mod format;
pub mod markdown;
pub mod plot;
pub mod templates;
pub mod write;

pub use context::*;
pub use plot::Svg;
pub use templates::Templates;

use std::fmt;
use std::path::PathBuf;

/// Result alias of the report stage.
pub type Result<T, E = ReportError> = std::result::Result<T, E>;

/// An error of the report stage: what went wrong and, where there is one, the
/// file it concerns.
#[derive(Debug)]
pub struct ReportError {
    kind: ReportErrorKind,
}

/// The kinds of [`ReportError`].
#[derive(Debug)]
#[non_exhaustive]
pub enum ReportErrorKind {
    /// A template does not compile. `file` is the override path or
    /// `built-in <name>`; `line` is 1-based.
    TemplateSyntax {
        file: String,
        line: Option<usize>,
        message: String,
    },
    /// A template compiled but failed while rendering (for example it names a
    /// context field that does not exist).
    TemplateRender {
        file: String,
        line: Option<usize>,
        message: String,
    },
    /// Reading or writing a file failed.
    Io {
        path: PathBuf,
        action: &'static str,
        source: std::io::Error,
    },
    /// The inputs of a plot cannot be drawn (mismatched lengths, no finite
    /// points) or plotters failed.
    Plot { plot: String, message: String },
    /// An argument given by the caller is not usable (a bad run id, a plot
    /// name that is not a safe file name, a time outside years 0–9999…).
    InvalidArgument { message: String },
    /// The run folder already exists; reports are never overwritten.
    RunExists { path: PathBuf },
}

impl ReportError {
    pub(crate) fn new(kind: ReportErrorKind) -> Self {
        ReportError { kind }
    }

    pub(crate) fn invalid(message: impl Into<String>) -> Self {
        Self::new(ReportErrorKind::InvalidArgument {
            message: message.into(),
        })
    }

    pub(crate) fn plot(plot: &str, message: impl Into<String>) -> Self {
        Self::new(ReportErrorKind::Plot {
            plot: plot.to_string(),
            message: message.into(),
        })
    }

    pub(crate) fn io(
        path: impl Into<PathBuf>,
        action: &'static str,
        source: std::io::Error,
    ) -> Self {
        Self::new(ReportErrorKind::Io {
            path: path.into(),
            action,
            source,
        })
    }

    /// What went wrong.
    pub fn kind(&self) -> &ReportErrorKind {
        &self.kind
    }
}

fn write_location(f: &mut fmt::Formatter<'_>, file: &str, line: Option<usize>) -> fmt::Result {
    match line {
        Some(line) => write!(f, "{file}:{line}"),
        None => write!(f, "{file}"),
    }
}

impl fmt::Display for ReportError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match &self.kind {
            ReportErrorKind::TemplateSyntax {
                file,
                line,
                message,
            } => {
                write_location(f, file, *line)?;
                write!(
                    f,
                    ": template syntax error: {message} (fix the template or remove it from the \
                     templates folder to use the built-in one)"
                )
            }
            ReportErrorKind::TemplateRender {
                file,
                line,
                message,
            } => {
                write_location(f, file, *line)?;
                write!(
                    f,
                    ": template failed while rendering: {message} (templates may only use the \
                     fields documented on ReportContext)"
                )
            }
            ReportErrorKind::Io {
                path,
                action,
                source,
            } => write!(f, "cannot {action} {}: {source}", path.display()),
            ReportErrorKind::Plot { plot, message } => {
                write!(f, "cannot draw the {plot} plot: {message}")
            }
            ReportErrorKind::InvalidArgument { message } => write!(f, "{message}"),
            ReportErrorKind::RunExists { path } => write!(
                f,
                "the run folder {} already exists; a report is never overwritten (remove it or \
                 change the output folder)",
                path.display()
            ),
        }
    }
}

impl std::error::Error for ReportError {
    fn source(&self) -> Option<&(dyn std::error::Error + 'static)> {
        match &self.kind {
            ReportErrorKind::Io { source, .. } => Some(source),
            _ => None,
        }
    }
}
