//! Data loading (SPEC §2 `[data]`, §13): delimited text files matched by globs, read into
//! numeric columns for the model's variables, with every row's origin kept for messages and
//! every file's SHA-256 kept for traceability.

mod files;
mod table;

use std::path::PathBuf;

use crate::error::Result;
use crate::recipe::{ColumnRef, Recipe};

pub use files::{clean_path, expand_files, natural_cmp};

/// A column the pipeline wants: the variable name it will have, and where to find it.
#[derive(Debug, Clone)]
pub struct Wanted {
    pub variable: String,
    pub column: ColumnRef,
    /// Span in the recipe of the mapping (for errors), if the recipe names the column.
    pub span: Option<std::ops::Range<usize>>,
    /// A column that may be absent (an identifier of a filter that might be a parameter); an
    /// absent optional column is left out instead of being an error.
    pub optional: bool,
}

/// One loaded data file.
#[derive(Debug, Clone, serde::Serialize)]
pub struct LoadedFile {
    /// Path as shown to the user.
    pub path: PathBuf,
    /// SHA-256 of the file's bytes.
    pub sha256: String,
    /// Data rows read from it (before any filter).
    pub rows: usize,
}

/// Where a row came from.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct RowOrigin {
    /// Index into [`Dataset::files`].
    pub file: usize,
    /// 1-based line number in that file.
    pub line: usize,
}

/// A row left out because of an empty, NaN or infinite cell (`missing = "skip"`).
#[derive(Debug, Clone, serde::Serialize)]
pub struct SkippedRow {
    pub file: PathBuf,
    pub line: usize,
    pub column: String,
    pub reason: String,
}

/// Numeric columns for the model's variables.
#[derive(Debug, Clone)]
pub struct Dataset {
    /// Variable names, in the order of [`Dataset::columns`].
    pub variables: Vec<String>,
    /// Header names the variables were read from (or `column N`).
    pub headers: Vec<String>,
    pub columns: Vec<Vec<f64>>,
    pub origins: Vec<RowOrigin>,
    pub files: Vec<LoadedFile>,
    pub skipped: Vec<SkippedRow>,
}

impl Dataset {
    pub fn len(&self) -> usize {
        self.origins.len()
    }

    pub fn is_empty(&self) -> bool {
        self.origins.is_empty()
    }

    /// The column of a variable.
    pub fn column(&self, variable: &str) -> Option<&[f64]> {
        let i = self.variables.iter().position(|v| v == variable)?;
        self.columns.get(i).map(Vec::as_slice)
    }

    /// "line 14 of demo-data/a7.csv" for a row.
    pub fn describe_row(&self, row: usize) -> String {
        match self.origins.get(row) {
            Some(o) => match self.files.get(o.file) {
                Some(f) => format!("line {} of {}", o.line, f.path.display()),
                None => format!("row {}", row + 1),
            },
            None => format!("row {}", row + 1),
        }
    }

    /// "lines 4 and 9 of a.csv; line 2 of b.csv" for a set of rows (at most `limit` listed).
    pub fn describe_rows(&self, rows: &[usize], limit: usize) -> String {
        let mut groups: Vec<(usize, Vec<usize>)> = Vec::new();
        for &r in rows.iter().take(limit) {
            let Some(o) = self.origins.get(r) else {
                continue;
            };
            match groups.iter_mut().find(|(f, _)| *f == o.file) {
                Some((_, lines)) => lines.push(o.line),
                None => groups.push((o.file, vec![o.line])),
            }
        }
        let mut parts = Vec::new();
        for (f, lines) in groups {
            let path = self
                .files
                .get(f)
                .map(|f| f.path.display().to_string())
                .unwrap_or_default();
            let list = join_and(&lines.iter().map(|l| l.to_string()).collect::<Vec<_>>());
            let word = if lines.len() == 1 { "line" } else { "lines" };
            parts.push(format!("{word} {list} of {path}"));
        }
        let mut text = parts.join("; ");
        if rows.len() > limit {
            text.push_str(&format!(" and {} more", rows.len() - limit));
        }
        text
    }

    /// Keep only the rows where `keep` is true.
    pub fn retain(&mut self, keep: &[bool]) {
        for col in &mut self.columns {
            let mut i = 0;
            col.retain(|_| {
                let k = keep.get(i).copied().unwrap_or(true);
                i += 1;
                k
            });
        }
        let mut i = 0;
        self.origins.retain(|_| {
            let k = keep.get(i).copied().unwrap_or(true);
            i += 1;
            k
        });
    }
}

/// "1, 2 and 3".
pub fn join_and(items: &[String]) -> String {
    match items {
        [] => String::new(),
        [one] => one.clone(),
        [init @ .., last] => format!("{} and {last}", init.join(", ")),
    }
}

/// Load the wanted columns of every file the recipe's `[data] files` match.
pub fn load(recipe: &Recipe, wanted: &[Wanted]) -> Result<Dataset> {
    let paths = expand_files(recipe)?;
    table::read_all(recipe, &paths, wanted)
}

/// The columns the recipe maps explicitly in `[data] columns`.
pub fn mapped_columns(recipe: &Recipe) -> Vec<Wanted> {
    recipe
        .data
        .columns
        .iter()
        .map(|(var, col)| Wanted {
            variable: var.value.clone(),
            column: col.value.clone(),
            span: Some(col.span.clone()),
            optional: false,
        })
        .collect()
}
