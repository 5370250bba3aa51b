//! Errors of the expression engine: syntax and name errors point into the source,
//! evaluation errors name the row and the sub-expression.

use std::fmt;

use super::ast::Span;

/// Longest accepted expression source, in characters (SPEC §13).
pub const MAX_SOURCE_CHARS: usize = 10_000;
/// Deepest accepted nesting of parentheses and calls (SPEC §13). Chains of `^` and of
/// prefix `-`/`!` count one level per operator, since each nests the tree one level.
pub const MAX_DEPTH: usize = 200;

/// A syntax, type or name error in an expression, with the byte span it concerns.
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct ExprError {
    pub span: Span,
    pub message: String,
    pub help: Option<String>,
}

impl ExprError {
    pub fn new(span: Span, message: impl Into<String>) -> ExprError {
        ExprError {
            span,
            message: message.into(),
            help: None,
        }
    }

    pub fn with_help(mut self, help: impl Into<String>) -> ExprError {
        self.help = Some(help.into());
        self
    }

    /// 1-based line and column (in characters) of the span start, and the width of the
    /// span in characters (at least 1, so a caret is always drawn).
    pub fn position(&self, src: &str) -> (usize, usize, usize) {
        let start = floor_char_boundary(src, self.span.start);
        let end = floor_char_boundary(src, self.span.end.max(start));
        let before = &src[..start];
        let line = before.matches('\n').count() + 1;
        let line_start = before.rfind('\n').map_or(0, |i| i + 1);
        let column = src[line_start..start].chars().count() + 1;
        let width = src[start..end].chars().count().max(1);
        (line, column, width)
    }

    /// The message with the source line and carets under the span:
    /// ```text
    /// error: unknown name `B0`
    ///   1:5 | a + B0*x
    ///       |     ^^
    ///   help: did you mean `b0`?
    /// ```
    pub fn render(&self, src: &str) -> String {
        let (line, column, width) = self.position(src);
        let text = src.lines().nth(line - 1).unwrap_or("");
        let gutter = format!("{line}:{column}");
        let pad = " ".repeat(gutter.len());
        let mut out = format!(
            "error: {}\n  {gutter} | {text}\n  {pad} | {}{}\n",
            self.message,
            " ".repeat(column - 1),
            "^".repeat(width)
        );
        if let Some(help) = &self.help {
            out.push_str(&format!("  help: {help}\n"));
        }
        out
    }
}

fn floor_char_boundary(s: &str, mut i: usize) -> usize {
    i = i.min(s.len());
    while !s.is_char_boundary(i) {
        i -= 1;
    }
    i
}

impl fmt::Display for ExprError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(f, "{}", self.message)?;
        if let Some(help) = &self.help {
            write!(f, " (help: {help})")?;
        }
        Ok(())
    }
}

impl std::error::Error for ExprError {}

/// A domain error found while evaluating over columns: the 0-based row (index into the
/// columns), what went wrong, and the printed sub-expression where it happened.
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct EvalError {
    pub row: usize,
    pub message: String,
    pub subexpr: String,
}

impl fmt::Display for EvalError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        if self.subexpr.is_empty() {
            write!(f, "row {}: {}", self.row, self.message)
        } else {
            write!(
                f,
                "row {}: {} in `{}`",
                self.row, self.message, self.subexpr
            )
        }
    }
}

impl std::error::Error for EvalError {}
