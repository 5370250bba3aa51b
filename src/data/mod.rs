//! Data loading (SPEC §2 `[data]`, §13, §15): text files and workbooks matched by globs, read
//! into numeric columns for the model's variables, with every row's origin kept for messages
//! and every file's SHA-256 kept for traceability. Channels (`by`) and replicate groups are
//! per-row labels; [`split_by`] and [`average_replicates`] are pure functions over a
//! [`Dataset`].

mod buffer;
mod channels;
mod contain;
mod decode;
mod fast_number;
mod fast_text;
mod files;
mod grid;
pub mod number;
mod plain;
mod replicates;
mod sheet;
mod table;
mod text;

use std::collections::BTreeMap;
use std::path::PathBuf;

use crate::error::{Error, Result};
use crate::recipe::{ColumnRef, Recipe};

pub use channels::{Channel, split_by};
pub use files::{clean_path, expand_files, natural_cmp};
pub use replicates::{Averaged, average_replicates, replicate_labels};

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
    /// The sheet read, for a workbook.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub sheet: Option<String>,
}

/// Where a row came from.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct RowOrigin {
    /// Index into [`Dataset::files`].
    pub file: usize,
    /// 1-based line number in that file (the row number for a workbook).
    pub line: usize,
}

/// A row set aside because of a bad cell, when reading goes on past bad cells (recipes with
/// `by`: the row's channel is reported invalid, the other channels are not affected).
#[derive(Debug, Clone)]
pub struct RejectedRow {
    /// Index into [`Dataset::files`].
    pub file: usize,
    /// 1-based line (or workbook row).
    pub line: usize,
    /// The row's `by` value, when it could be read.
    pub channel: Option<String>,
    pub error: Error,
}

/// A row left out because of an empty, NaN or infinite cell (`missing = "skip"`).
#[derive(Debug, Clone, serde::Serialize)]
pub struct SkippedRow {
    pub file: PathBuf,
    pub line: usize,
    pub column: String,
    pub reason: String,
    /// The row's `by` value, when the recipe has `by` and it could be read.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub channel: Option<String>,
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
    /// Units read from the files' units row (`units_row = true`), by variable; the recipe's
    /// `units` win over them (see [`Dataset::unit`]).
    pub file_units: BTreeMap<String, String>,
    /// The `by` value of each row, when the recipe has `by`.
    pub channels: Option<Vec<String>>,
    /// The replicate group label of each row, when `[fit] groups` names a column.
    pub groups: Option<Vec<String>>,
    /// Rows set aside with their errors (lenient reading only; see [`load_lenient`]).
    pub rejected: Vec<RejectedRow>,
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

    /// The unit of a variable: the recipe's `units`, else the file's units row, else "".
    pub fn unit<'a>(
        &'a self,
        recipe_units: &'a BTreeMap<String, String>,
        variable: &str,
    ) -> &'a str {
        recipe_units
            .get(variable)
            .or_else(|| self.file_units.get(variable))
            .map_or("", String::as_str)
    }

    /// The file name (without folders) a row came from: the `source` of SPEC §15, for the
    /// report's row tables.
    pub fn source_name(&self, row: usize) -> Option<&str> {
        let o = self.origins.get(row)?;
        let f = self.files.get(o.file)?;
        f.path.file_name().and_then(|n| n.to_str())
    }

    /// "line 14 of demo-data/a7.csv" for a row ("row 14 of x.xlsx (sheet "Run 3")" for a
    /// workbook).
    pub fn describe_row(&self, row: usize) -> String {
        match self.origins.get(row) {
            Some(o) => match self.files.get(o.file) {
                Some(f) => match &f.sheet {
                    Some(s) => format!("row {} of {} (sheet \"{s}\")", o.line, f.path.display()),
                    None => format!("line {} of {}", o.line, f.path.display()),
                },
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
            let sheet = self.files.get(f).and_then(|f| f.sheet.as_deref());
            let word = match (sheet.is_some(), lines.len() == 1) {
                (false, true) => "line",
                (false, false) => "lines",
                (true, true) => "row",
                (true, false) => "rows",
            };
            match sheet {
                Some(s) => parts.push(format!("{word} {list} of {path} (sheet \"{s}\")")),
                None => parts.push(format!("{word} {list} of {path}")),
            }
        }
        let mut text = parts.join("; ");
        if rows.len() > limit {
            text.push_str(&format!(" and {} more", rows.len() - limit));
        }
        text
    }

    /// Keep only the rows where `keep` is true (rows past the end of `keep` are kept).
    pub fn retain(&mut self, keep: &[bool]) {
        fn filter<T>(v: &mut Vec<T>, keep: &[bool]) {
            let mut i = 0;
            v.retain(|_| {
                let k = keep.get(i).copied().unwrap_or(true);
                i += 1;
                k
            });
        }
        for col in &mut self.columns {
            filter(col, keep);
        }
        filter(&mut self.origins, keep);
        if let Some(c) = self.channels.as_mut() {
            filter(c, keep);
        }
        if let Some(g) = self.groups.as_mut() {
            filter(g, keep);
        }
    }
}

impl Dataset {
    /// The given rows, in that order. Files that contribute no row are left out (origins
    /// re-indexed, row counts recounted); skipped and rejected rows of the remaining files are
    /// kept.
    pub fn select(&self, rows: &[usize]) -> Dataset {
        let mut file_map: Vec<Option<usize>> = vec![None; self.files.len()];
        let mut files: Vec<LoadedFile> = Vec::new();
        let mut origins = Vec::with_capacity(rows.len());
        for &r in rows {
            let Some(o) = self.origins.get(r) else {
                continue;
            };
            let Some(slot) = file_map.get_mut(o.file) else {
                continue;
            };
            let fi = match *slot {
                Some(fi) => fi,
                None => {
                    let Some(f) = self.files.get(o.file) else {
                        continue;
                    };
                    files.push(LoadedFile {
                        rows: 0,
                        ..f.clone()
                    });
                    *slot = Some(files.len() - 1);
                    files.len() - 1
                }
            };
            if let Some(f) = files.get_mut(fi) {
                f.rows += 1;
            }
            origins.push(RowOrigin {
                file: fi,
                line: o.line,
            });
        }
        let pick = |v: &Vec<String>| -> Vec<String> {
            rows.iter().filter_map(|&r| v.get(r).cloned()).collect()
        };
        let kept_file = |path: &PathBuf| files.iter().any(|f| &f.path == path);
        Dataset {
            variables: self.variables.clone(),
            headers: self.headers.clone(),
            columns: self
                .columns
                .iter()
                .map(|c| rows.iter().filter_map(|&r| c.get(r).copied()).collect())
                .collect(),
            origins,
            skipped: self
                .skipped
                .iter()
                .filter(|s| kept_file(&s.file))
                .cloned()
                .collect(),
            rejected: self
                .rejected
                .iter()
                .filter_map(|r| {
                    let fi = (*file_map.get(r.file)?)?;
                    Some(RejectedRow {
                        file: fi,
                        ..r.clone()
                    })
                })
                .collect(),
            file_units: self.file_units.clone(),
            channels: self.channels.as_ref().map(pick),
            groups: self.groups.as_ref().map(pick),
            files,
        }
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

/// Load the wanted columns of every file the recipe's `[data] files` match; the first bad
/// cell is an error.
pub fn load(recipe: &Recipe, wanted: &[Wanted]) -> Result<Dataset> {
    let paths = expand_files(recipe)?;
    table::read_all(recipe, &paths, wanted, false)
}

/// Like [`load`], but a row with a bad cell is set aside in [`Dataset::rejected`] (with its
/// `by` value) and reading goes on; errors about a whole file (missing columns, a wrong
/// sheet, a hash mismatch, a row without a `by` value) still stop it. For recipes with `by`,
/// followed by [`split_by`].
pub fn load_lenient(recipe: &Recipe, wanted: &[Wanted]) -> Result<Dataset> {
    let paths = expand_files(recipe)?;
    table::read_all(recipe, &paths, wanted, true)
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
