//! Source text of a user file and the mapping from byte offsets to lines and columns.

use std::ops::Range;
use std::path::{Path, PathBuf};

/// A user file held in memory so that errors can quote it.
#[derive(Debug, Clone)]
pub struct SourceFile {
    /// The path as the user would recognise it (as given, or relative to the working directory).
    pub path: PathBuf,
    /// The full text (UTF-8; a BOM is already removed).
    pub text: String,
}

/// A position in a user file, ready to be printed.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Location {
    pub path: PathBuf,
    /// 1-based line number.
    pub line: usize,
    /// 1-based column, counted in characters.
    pub column: usize,
    /// Width of the marked region in characters (at least 1).
    pub width: usize,
    /// The text of the line, without its line ending.
    pub line_text: String,
}

impl SourceFile {
    pub fn new(path: impl Into<PathBuf>, text: impl Into<String>) -> Self {
        SourceFile {
            path: path.into(),
            text: text.into(),
        }
    }

    /// The location of a byte range. Offsets past the end are clamped; a range that spans
    /// several lines is marked up to the end of its first line.
    pub fn locate(&self, span: Range<usize>) -> Location {
        locate_in(&self.path, &self.text, span)
    }
}

/// The location of `span` inside `text` (see [`SourceFile::locate`]).
pub fn locate_in(path: &Path, text: &str, span: Range<usize>) -> Location {
    let start = floor_char_boundary(text, span.start.min(text.len()));
    let end = floor_char_boundary(text, span.end.clamp(start, text.len()));
    let line_start = text[..start].rfind('\n').map_or(0, |i| i + 1);
    let line_end = text[start..].find('\n').map_or(text.len(), |i| start + i);
    let line = text[..start].matches('\n').count() + 1;
    let line_text = text[line_start..line_end]
        .trim_end_matches('\r')
        .to_string();
    let column = text[line_start..start].chars().count() + 1;
    let marked_end = end.min(line_end);
    let width = text[start..marked_end.max(start)].chars().count().max(1);
    Location {
        path: path.to_path_buf(),
        line,
        column,
        width,
        line_text,
    }
}

fn floor_char_boundary(text: &str, mut i: usize) -> usize {
    while i > 0 && !text.is_char_boundary(i) {
        i -= 1;
    }
    i
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn locate_counts_lines_and_characters() {
        let text = "a = 1\r\nβeta = \"x\"\n";
        let loc = locate_in(Path::new("r.toml"), text, 15..18);
        assert_eq!((loc.line, loc.column, loc.width), (2, 8, 3));
        assert_eq!(loc.line_text, "βeta = \"x\"");
    }

    #[test]
    fn locate_clamps_out_of_range_offsets() {
        let loc = locate_in(Path::new("r.toml"), "abc", 10..20);
        assert_eq!((loc.line, loc.column, loc.width), (1, 4, 1));
    }
}
