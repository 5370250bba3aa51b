//! The one user-facing error type: what went wrong, where, and how to fix it.
//!
//! Every message names the file, line and column when a position is known, quotes the
//! line with a caret under the offending text, and ends with a hint. The kind decides the
//! exit code (SPEC §10): input and usage errors exit 2, output and internal failures exit 3.

use std::fmt;
use std::path::{Path, PathBuf};

use crate::source::Location;

/// What class of failure an [`Error`] is; decides the exit code.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[non_exhaustive]
pub enum ErrorKind {
    /// The recipe, a data file or an expression is wrong: the user must change an input.
    Input,
    /// The command line is wrong.
    Usage,
    /// An output could not be written (disk full, permissions, a path that is a file…).
    Output,
    /// A broken invariant inside fitwright: a bug, never the user's fault.
    Internal,
}

impl ErrorKind {
    /// Exit code of SPEC §10: 2 for invalid input or usage, 3 for output or internal failures.
    pub fn exit_code(self) -> i32 {
        match self {
            ErrorKind::Input | ErrorKind::Usage => 2,
            ErrorKind::Output | ErrorKind::Internal => 3,
        }
    }
}

/// A user-facing error (boxed, so that `Result`s stay small).
#[derive(Debug, Clone)]
pub struct Error {
    inner: Box<ErrorData>,
}

/// The contents of an [`Error`].
#[derive(Debug, Clone)]
pub struct ErrorData {
    pub kind: ErrorKind,
    /// One sentence: what is wrong.
    pub message: String,
    /// Where, when a position is known.
    pub location: Option<Location>,
    /// A file the error concerns when no position inside it is known.
    pub file: Option<PathBuf>,
    /// How to fix it.
    pub help: Option<String>,
    /// Further facts (e.g. which rows are affected).
    pub notes: Vec<String>,
}

/// Result alias used across the crate.
pub type Result<T, E = Error> = std::result::Result<T, E>;

impl Error {
    pub fn new(kind: ErrorKind, message: impl Into<String>) -> Self {
        Error {
            inner: Box::new(ErrorData {
                kind,
                message: message.into(),
                location: None,
                file: None,
                help: None,
                notes: Vec::new(),
            }),
        }
    }

    /// An input error (exit 2).
    pub fn input(message: impl Into<String>) -> Self {
        Error::new(ErrorKind::Input, message)
    }

    /// A usage error (exit 2).
    pub fn usage(message: impl Into<String>) -> Self {
        Error::new(ErrorKind::Usage, message)
    }

    /// An output failure (exit 3).
    pub fn output(message: impl Into<String>) -> Self {
        Error::new(ErrorKind::Output, message)
    }

    /// A broken invariant (exit 3).
    pub fn internal(message: impl Into<String>) -> Self {
        Error::new(ErrorKind::Internal, message)
    }

    pub fn at(mut self, location: Location) -> Self {
        self.inner.location = Some(location);
        self
    }

    pub fn in_file(mut self, path: impl AsRef<Path>) -> Self {
        self.inner.file = Some(path.as_ref().to_path_buf());
        self
    }

    pub fn help(mut self, help: impl Into<String>) -> Self {
        self.inner.help = Some(help.into());
        self
    }

    pub fn note(mut self, note: impl Into<String>) -> Self {
        self.inner.notes.push(note.into());
        self
    }

    pub fn exit_code(&self) -> i32 {
        self.kind.exit_code()
    }

    /// `file:line:col` (or just the file) of this error, when known.
    pub fn position(&self) -> Option<String> {
        match (&self.location, &self.file) {
            (Some(l), _) => Some(format!("{}:{}:{}", l.path.display(), l.line, l.column)),
            (None, Some(f)) => Some(f.display().to_string()),
            (None, None) => None,
        }
    }
}

impl std::ops::Deref for Error {
    type Target = ErrorData;
    fn deref(&self) -> &ErrorData {
        &self.inner
    }
}

/// Longest message, note or help printed, in characters; the rest is cut with `…` (a cell
/// or a key can hold megabytes of text, which a message must not repeat).
const MAX_TEXT_CHARS: usize = 500;
/// Widest quoted source line, in characters; longer lines show a window around the caret.
const MAX_LINE_CHARS: usize = 120;

/// User text made safe to print on a terminal: control characters (a NUL, an escape
/// sequence, a newline inside a cell) are shown escaped, as `\u{1b}` or `\n`, never
/// sent raw; the text is cut at [`MAX_TEXT_CHARS`].
fn printable(text: &str) -> String {
    let mut out = String::new();
    for (i, c) in text.chars().enumerate() {
        if i == MAX_TEXT_CHARS {
            out.push('…');
            break;
        }
        if c.is_control() {
            out.extend(c.escape_default());
        } else {
            out.push(c);
        }
    }
    out
}

/// The quoted line and the caret's (column, width), both 0-based in characters of the
/// returned text: control characters become one `�` each (so the caret stays aligned, a tab
/// one space), and a line longer than [`MAX_LINE_CHARS`] is cut to a window around the
/// caret with `…` at the cut ends.
fn quoted_line(l: &Location) -> (String, usize, usize) {
    let chars: Vec<char> = l
        .line_text
        .chars()
        .map(|c| match c {
            '\t' => ' ',
            c if c.is_control() => '\u{fffd}',
            c => c,
        })
        .collect();
    let column = l.column.saturating_sub(1).min(chars.len());
    let width = l.width.max(1);
    if chars.len() <= MAX_LINE_CHARS {
        return (chars.into_iter().collect(), column, width);
    }
    let start = column.saturating_sub(MAX_LINE_CHARS / 3);
    let end = (start + MAX_LINE_CHARS).min(chars.len());
    let mut shown = String::new();
    let mut caret = column - start;
    if start > 0 {
        shown.push('…');
        caret += 1;
    }
    shown.extend(chars.get(start..end).unwrap_or_default());
    if end < chars.len() {
        shown.push('…');
    }
    let width = width.min(end.saturating_sub(column)).max(1);
    (shown, caret, width)
}

impl fmt::Display for Error {
    /// ```text
    /// error: recipes/probe.toml:12:1: unknown key `confidense` in [fit]
    ///    12 | confidense = 0.95
    ///       | ^^^^^^^^^^
    ///   help: did you mean `confidence`?
    /// ```
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        let label = match self.kind {
            ErrorKind::Internal => "internal error",
            _ => "error",
        };
        let message = printable(&self.message);
        match self.position() {
            Some(p) => writeln!(f, "{label}: {}: {message}", printable(&p))?,
            None => writeln!(f, "{label}: {message}")?,
        }
        if let Some(l) = &self.location {
            let number = l.line.to_string();
            let pad = " ".repeat(number.len());
            let (shown, column, width) = quoted_line(l);
            writeln!(f, "  {number} | {shown}")?;
            let before = " ".repeat(column);
            writeln!(f, "  {pad} | {before}{}", "^".repeat(width))?;
        }
        for n in &self.notes {
            writeln!(f, "  note: {}", printable(n))?;
        }
        if let Some(h) = &self.help {
            writeln!(f, "  help: {}", printable(h))?;
        }
        if self.kind == ErrorKind::Internal {
            writeln!(
                f,
                "  this is a defect in fitwright, not in your input; please report it with the recipe"
            )?;
        }
        Ok(())
    }
}

impl std::error::Error for Error {}

/// "did you mean `x`?" for the closest candidate, when it is close enough to be a likely typo.
pub fn did_you_mean<'a>(
    word: &str,
    candidates: impl IntoIterator<Item = &'a str>,
) -> Option<String> {
    closest(word, candidates).map(|c| format!("did you mean `{c}`?"))
}

/// The candidate nearest to `word` (case-insensitive Jaro–Winkler ≥ 0.8, or a case-only
/// difference), if any.
pub fn closest<'a>(word: &str, candidates: impl IntoIterator<Item = &'a str>) -> Option<&'a str> {
    let lower = word.to_lowercase();
    let mut best: Option<(&str, f64)> = None;
    for c in candidates {
        let score = if c.to_lowercase() == lower {
            2.0
        } else {
            strsim::jaro_winkler(&lower, &c.to_lowercase())
        };
        if score >= 0.8 && best.is_none_or(|(_, s)| score > s) {
            best = Some((c, score));
        }
    }
    best.map(|(c, _)| c)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn suggestion_finds_near_miss_and_case_mismatch() {
        assert_eq!(
            closest("confidense", ["confidence", "method"]),
            Some("confidence")
        );
        assert_eq!(closest("Temp_C", ["temp_c", "resistance"]), Some("temp_c"));
        assert_eq!(closest("zzz", ["confidence", "method"]), None);
    }

    fn at(line_text: &str, column: usize, width: usize) -> Error {
        Error::input("bad").at(Location {
            path: PathBuf::from("r.toml"),
            line: 7,
            column,
            width,
            line_text: line_text.to_string(),
        })
    }

    #[test]
    fn control_characters_are_never_printed_raw() {
        let e = at("name = \"h\u{0}\u{1b}[31m\"", 10, 1)
            .note("cell `3\n4` has\u{7} a bell")
            .help("key `\u{1b}]0;title\u{7}`");
        let text = e.to_string();
        assert!(
            !text.chars().any(|c| c.is_control() && c != '\n'),
            "{text:?}"
        );
        assert!(text.contains("name = \"h\u{fffd}\u{fffd}[31m\""), "{text}");
        assert!(text.contains("cell `3\\n4` has\\u{7} a bell"), "{text}");
        // The caret stays under the tenth character.
        assert!(text.contains("\n    |          ^\n"), "{text}");
    }

    #[test]
    fn long_lines_are_cut_to_a_window_around_the_caret() {
        let line = format!("equation = \"{}\"", "x+".repeat(50_000));
        let e = at(&line, 90_000, 5);
        let text = e.to_string();
        assert!(text.len() < 1_000, "{} bytes", text.len());
        let lines: Vec<&str> = text.lines().collect();
        let quoted = lines[1].trim_start_matches("  7 | ");
        let caret = lines[2].trim_start_matches("    | ");
        assert!(quoted.starts_with('…') && quoted.ends_with('…'), "{quoted}");
        // The caret points at character 90,000 of the line: the same character in the window.
        let shown: Vec<char> = quoted.chars().collect();
        let col = caret.find('^').expect("caret");
        assert_eq!(shown[col], line.chars().nth(89_999).expect("in line"));
        assert_eq!(caret.trim().len(), 5);
        // A long message is cut too.
        let long = Error::input("y".repeat(10_000)).to_string();
        assert!(long.chars().count() < 600 && long.contains('…'));
    }

    #[test]
    fn exit_codes_follow_the_spec() {
        assert_eq!(Error::input("x").exit_code(), 2);
        assert_eq!(Error::usage("x").exit_code(), 2);
        assert_eq!(Error::output("x").exit_code(), 3);
        assert_eq!(Error::internal("x").exit_code(), 3);
    }
}
