//! Files → numeric columns.
//!
//! Each file is read once: bytes → SHA-256 (checked against a pinned hash) → a [`Grid`] (text
//! decoded and split by [`super::text`], or a workbook sheet read by [`super::sheet`]) → the
//! wanted columns as numbers, the `by` and `groups` columns as labels, the units row as units.
//! The numbers of a text grid are parsed up front in parallel (`parse_ahead`); the row loop
//! keeps the order of messages and skipped rows.
//!
//! A plain numeric text skips the grid: [`super::plain`] reads it straight into its columns,
//! or declines (any file or cell outside that case), and the file is then read as above.
//!
//! A bad cell normally stops the load at once. In lenient mode (recipes with `by`, where one
//! channel must not stop the others) the row is set aside with its error and its channel, and
//! reading goes on; only errors about a whole file still stop it.

use std::collections::BTreeMap;
use std::ops::Range;
use std::path::{Path, PathBuf};

use super::files::MatchedFile;
use super::grid::{CellRef, Grid, GridRow, Place, RowAt};
use super::number::{NumberFormat, Parsed, bad_number_help, number_label, parse_number};
use super::{Dataset, LoadedFile, RejectedRow, RowOrigin, SkippedRow, Wanted};
use crate::error::{Error, Result, did_you_mean};
use crate::recipe::check::misplaced_key_help;
use crate::recipe::{ColumnRef, Format, Missing, Recipe};

/// Read every matched file and concatenate the wanted columns.
pub fn read_all(
    recipe: &Recipe,
    files: &[MatchedFile],
    wanted: &[Wanted],
    lenient: bool,
) -> Result<Dataset> {
    let spec = &recipe.data;
    let mut ds = Dataset {
        variables: Vec::new(),
        headers: Vec::new(),
        columns: Vec::new(),
        origins: Vec::new(),
        files: Vec::new(),
        skipped: Vec::new(),
        file_units: BTreeMap::new(),
        channels: spec.by.as_ref().map(|_| Vec::new()),
        groups: recipe.fit.groups.as_ref().map(|_| Vec::new()),
        rejected: Vec::new(),
    };
    let mut first: Option<(PathBuf, Vec<bool>)> = None;
    let mut units: Vec<Option<String>> = Vec::new();
    for (fi, file) in files.iter().enumerate() {
        let bytes = super::buffer::read_file(&file.path).map_err(|e| {
            Error::input(format!("cannot read data file: {e}"))
                .in_file(&file.path)
                .help("check that the file exists and is readable")
        })?;
        // The hash is computed on one core while the file is read on the others; its
        // mismatch is still reported before anything the reading found. A plain numeric text
        // is read straight into its columns; any other file, or any cell that is not a plain
        // number, goes through the grid (and gives the grid's messages).
        let (sha256, read) = rayon::join(
            || crate::hash::sha256_hex(&bytes),
            || match super::plain::read(recipe, &file.path, &bytes, wanted, fi) {
                Some(parsed) => Read::Plain(parsed),
                None => Read::Grid(read_grid(recipe, &file.path, &bytes)),
            },
        );
        if let Some(expected) = &file.spec.sha256
            && *expected != sha256
        {
            return Err(recipe
                .error_at(file.spec.span.clone(), format!("data file `{}` does not match its pinned SHA-256", file.path.display()))
                .note(format!("pinned {expected}"))
                .note(format!("found  {sha256}"))
                .help("the file changed since it was pinned: restore it, or update `sha256` after review"));
        }
        // The bytes of a file read without its grid are kept for the one message that
        // needs the grid (below).
        let (parsed, grid, bytes) = match read {
            Read::Plain(parsed) => (parsed, None, Some(bytes)),
            Read::Grid(grid) => {
                // The decoded text is kept in the grid for messages; the bytes are not
                // needed any more.
                drop(bytes);
                let grid = grid?;
                (
                    extract(recipe, &grid, wanted, lenient, fi)?,
                    Some(grid),
                    None,
                )
            }
        };
        let chosen = &parsed.chosen;
        match &first {
            None => {
                first = Some((file.path.clone(), chosen.present.clone()));
                ds.variables = chosen.variables.clone();
                ds.headers = chosen.header_names.clone();
                ds.columns = vec![Vec::new(); chosen.variables.len()];
                units = chosen.units.clone();
            }
            Some((first_path, present)) => {
                if *present != chosen.present {
                    return Err(Error::input(format!(
                        "data file `{}` does not have the same columns as `{}`",
                        file.path.display(),
                        first_path.display()
                    ))
                    .in_file(&file.path)
                    .help("every file matched by [data] files must have the same columns"));
                }
                for (k, (have, new)) in units.iter_mut().zip(&chosen.units).enumerate() {
                    match (have.as_deref(), new.as_deref()) {
                        (Some(a), Some(b)) if a != b => {
                            let column = ds.headers.get(k).cloned().unwrap_or_default();
                            let col = chosen.cols_idx.get(k).copied().unwrap_or(0);
                            let err = Error::input(format!(
                                "the units row gives `{column}` in {b}, but `{}` gives {a}",
                                first_path.display()
                            ))
                            .help("files read together must use the same units; convert one export or read them with separate recipes");
                            // A file read without its grid: the grid is made for the message.
                            let grid = match grid {
                                Some(g) => g,
                                None => read_grid(
                                    recipe,
                                    &file.path,
                                    bytes.as_deref().unwrap_or_default(),
                                )?,
                            };
                            return Err(grid.place.locate(RowAt::Units, col, err));
                        }
                        (None, Some(_)) => *have = new.clone(),
                        _ => {}
                    }
                }
            }
        }
        let rows = parsed.origins.len();
        // The first file's columns become the data set's as they are (no copy).
        for (col, values) in ds.columns.iter_mut().zip(parsed.columns) {
            if col.is_empty() {
                *col = values;
            } else {
                col.extend(values);
            }
        }
        if ds.origins.is_empty() {
            ds.origins = parsed.origins;
        } else {
            ds.origins.extend(parsed.origins);
        }
        if let (Some(all), Some(these)) = (ds.channels.as_mut(), parsed.channels) {
            all.extend(these);
        }
        if let (Some(all), Some(these)) = (ds.groups.as_mut(), parsed.groups) {
            all.extend(these);
        }
        ds.skipped.extend(parsed.skipped);
        ds.rejected.extend(
            parsed
                .rejected
                .into_iter()
                .map(|(line, channel, error)| RejectedRow {
                    file: fi,
                    line,
                    channel,
                    error,
                }),
        );
        ds.files.push(LoadedFile {
            path: file.path.clone(),
            sha256,
            rows,
            sheet: grid
                .as_ref()
                .and_then(|g| g.place.sheet())
                .map(str::to_string),
        });
    }
    ds.file_units = ds
        .variables
        .iter()
        .zip(units)
        .filter_map(|(v, u)| u.map(|u| (v.clone(), u)))
        .collect();
    Ok(ds)
}

/// One file as read: straight into columns, or as a grid.
enum Read {
    Plain(ParsedFile),
    Grid(Result<Grid>),
}

/// The grid of one file: a workbook sheet, or decoded text split into records.
pub(super) fn read_grid(recipe: &Recipe, path: &Path, bytes: &[u8]) -> Result<Grid> {
    let spec = &recipe.data;
    let format = spec.format.unwrap_or_else(|| Format::from_extension(path));
    check_keys_apply(recipe, path, format)?;
    if format.is_spreadsheet() {
        super::sheet::read_sheet(recipe, path, bytes, format)
    } else {
        let text = super::decode::decode(bytes, path, spec.encoding.as_ref().map(|e| e.value))?;
        super::text::read_text(spec, path, text, format)
    }
}

/// Keys for the other kind of file are an error at the key, naming the file.
pub(super) fn check_keys_apply(recipe: &Recipe, path: &Path, format: Format) -> Result<()> {
    let spec = &recipe.data;
    let (misplaced, kind) = if format.is_spreadsheet() {
        (spec.text_only_keys(), "a workbook")
    } else {
        (spec.sheet_only_keys(), "a text file")
    };
    if let Some(key) = misplaced.first()
        && let Some(span) = spec.key_span(key)
    {
        return Err(recipe
            .error_at(
                span,
                format!("`{key}` does not apply to `{}`, {kind}", path.display()),
            )
            .help(misplaced_key_help(key)));
    }
    if format == Format::Whitespace
        && spec.thousands == Some(' ')
        && let Some(span) = spec.key_span("thousands")
    {
        return Err(recipe
            .error_at(
                span,
                format!(
                    "`thousands = \" \"` cannot be used for `{}`: its fields are separated by spaces",
                    path.display()
                ),
            )
            .help("set `format = \"csv\"` with the file's `delimiter`, or remove `thousands`"));
    }
    Ok(())
}

/// The rows read from one file, with the columns they were read from.
pub(super) struct ParsedFile {
    pub chosen: Chosen,
    pub columns: Vec<Vec<f64>>,
    /// The file (its index in the data set) and line of each row.
    pub origins: Vec<RowOrigin>,
    pub channels: Option<Vec<String>>,
    pub groups: Option<Vec<String>>,
    pub skipped: Vec<SkippedRow>,
    /// (line, channel, error) of rows set aside in lenient mode.
    pub rejected: Vec<(usize, Option<String>, Error)>,
}

impl ParsedFile {
    /// Rows read as numbers only: no channels, groups, skipped or rejected rows.
    pub(super) fn numbers(chosen: Chosen, columns: Vec<Vec<f64>>, origins: Vec<RowOrigin>) -> Self {
        ParsedFile {
            chosen,
            columns,
            origins,
            channels: None,
            groups: None,
            skipped: Vec::new(),
            rejected: Vec::new(),
        }
    }
}

/// What is wrong with one cell.
enum Problem {
    Missing(&'static str),
    Bad { message: String, help: String },
}

/// A column read as labels (`by`, `groups`).
struct LabelColumn {
    key: &'static str,
    index: usize,
    /// Numbers written in different ways (`20`, `20.0`) name the same label.
    numeric_labels: bool,
}

/// The first header name that repeats an earlier one (empty names aside): the columns
/// (from 0) of its first and second use.
pub(super) fn first_duplicate(header: &[String]) -> Option<(usize, usize)> {
    // First column of each name, by hash: a search of the columns before each one took
    // minutes on an export with 100,000 columns.
    let mut seen: std::collections::HashMap<&str, usize> = std::collections::HashMap::new();
    for (i, n) in header.iter().enumerate() {
        if n.is_empty() {
            continue;
        }
        if let Some(&j) = seen.get(n.as_str()) {
            return Some((j, i));
        }
        seen.insert(n, i);
    }
    None
}

/// Choose the wanted columns of a grid and read its rows.
pub(super) fn extract(
    recipe: &Recipe,
    grid: &Grid,
    wanted: &[Wanted],
    lenient: bool,
    file: usize,
) -> Result<ParsedFile> {
    let spec = &recipe.data;
    let place = &grid.place;
    let path = place.path();
    let header: &[String] = grid.header.as_deref().unwrap_or(&[]);
    if let Some((j, i)) = first_duplicate(header) {
        let n = header.get(i).map_or("", String::as_str);
        return Err(place.locate(
            RowAt::Header,
            i,
            Error::input(format!(
                "the header names column `{n}` twice (columns {} and {})",
                j + 1,
                i + 1
            ))
            .help("rename one of the columns so that every header name is unique"),
        ));
    }
    if grid.rows.is_empty() {
        let what = match place.sheet() {
            Some(s) => format!("sheet \"{s}\" has a header but no data rows"),
            None => "the data file has a header but no data rows".to_string(),
        };
        return Err(Error::input(what).in_file(path).help(
            "check that this is the right file and that `skip_rows`, `header_after` and `header` are right",
        ));
    }
    let width = if grid.header.is_some() {
        header.len()
    } else {
        (0..grid.rows.len())
            .map(|i| grid.width(i))
            .max()
            .unwrap_or(0)
    };
    let chosen = choose_columns(
        recipe,
        path,
        grid.header.as_deref(),
        grid.units.as_deref(),
        width,
        wanted,
    )?;
    let (cols_idx, header_names) = (&chosen.cols_idx, &chosen.header_names);
    let (by, groups) = (&chosen.by, &chosen.groups);
    let fmt = NumberFormat {
        decimal_comma: spec.decimal_comma,
        thousands: spec.thousands,
    };
    let is_sheet = place.sheet().is_some();
    let n = grid.rows.len();
    let ahead: Vec<f64> = if is_sheet {
        Vec::new()
    } else {
        parse_ahead(grid, cols_idx, fmt)
    };
    let per_row = cols_idx.len();
    // Every wanted cell a plain number and no label columns (the common large file): the row
    // loop below would take every row and every value as parsed, so the columns are the
    // parsed values themselves, read column by column.
    if by.is_none()
        && groups.is_none()
        && !is_sheet
        && per_row > 0
        && ahead.len() == n * per_row
        && ahead.iter().all(|v| !v.is_nan())
    {
        let columns = (0..per_row)
            .map(|k| ahead.iter().skip(k).step_by(per_row).copied().collect())
            .collect();
        let origins = grid
            .rows
            .iter()
            .map(|r| RowOrigin {
                file,
                line: r.number,
            })
            .collect();
        return Ok(ParsedFile::numbers(chosen, columns, origins));
    }
    let mut columns: Vec<Vec<f64>> = vec![Vec::with_capacity(n); cols_idx.len()];
    let mut origins = Vec::with_capacity(n);
    let mut channels = by.as_ref().map(|_| Vec::with_capacity(n));
    let mut group_labels = groups.as_ref().map(|_| Vec::with_capacity(n));
    let mut skipped = Vec::new();
    let mut rejected = Vec::new();
    let mut row_values = vec![0.0; cols_idx.len()];
    let skip = |row: &GridRow, column: &str, reason: &str, channel: Option<&String>| SkippedRow {
        file: path.to_path_buf(),
        line: row.number,
        column: column.to_string(),
        reason: reason.to_string(),
        channel: channel.cloned(),
    };
    'rows: for (ri, row) in grid.rows.iter().enumerate() {
        // The channel first: a bad cell is reported under its channel.
        let channel = match &by {
            None => None,
            Some(b) => match label_cell(grid, ri, b, fmt) {
                Ok(l) => Some(l),
                Err(Problem::Missing(reason)) if spec.missing == Missing::Skip => {
                    skipped.push(skip(row, &column_name(header, b.index), reason, None));
                    continue 'rows;
                }
                Err(p) => {
                    // Without a channel the row belongs to no fit: an error for the file.
                    return Err(problem_error(
                        place,
                        row,
                        b.index,
                        &column_name(header, b.index),
                        p,
                        true,
                    ));
                }
            },
        };
        let mut fail = |err: Error| -> Result<()> {
            if lenient {
                rejected.push((row.number, channel.clone(), err));
                Ok(())
            } else {
                Err(err)
            }
        };
        let group = match &groups {
            None => None,
            Some(g) => match label_cell(grid, ri, g, fmt) {
                Ok(l) => Some(l),
                Err(Problem::Missing(reason)) if spec.missing == Missing::Skip => {
                    skipped.push(skip(
                        row,
                        &column_name(header, g.index),
                        reason,
                        channel.as_ref(),
                    ));
                    continue 'rows;
                }
                Err(p) => {
                    fail(problem_error(
                        place,
                        row,
                        g.index,
                        &column_name(header, g.index),
                        p,
                        false,
                    ))?;
                    continue 'rows;
                }
            },
        };
        for (k, &ci) in cols_idx.iter().enumerate() {
            if let Some(v) = ahead.get(ri * per_row + k).copied().filter(|v| !v.is_nan()) {
                if let Some(slot) = row_values.get_mut(k) {
                    *slot = v;
                }
                continue;
            }
            let name = header_names.get(k).map_or("", String::as_str);
            let cell =
                match grid.cell(ri, ci) {
                    Some(c) => c,
                    None if is_sheet => CellRef::Empty,
                    None => {
                        let count = grid.width(ri);
                        fail(place.locate(
                        RowAt::Data(row),
                        count,
                        Error::input(format!(
                            "line {} has {count} field{} but `{name}` is column {}",
                            row.number,
                            if count == 1 { "" } else { "s" },
                            ci + 1
                        ))
                        .help("a row is short: check for a missing value or a wrong delimiter"),
                    ))?;
                        continue 'rows;
                    }
                };
            match number_cell(cell, is_sheet, fmt, name) {
                Ok(v) => {
                    if let Some(slot) = row_values.get_mut(k) {
                        *slot = v;
                    }
                }
                Err(Problem::Missing(reason)) if spec.missing == Missing::Skip => {
                    skipped.push(skip(row, name, reason, channel.as_ref()));
                    continue 'rows;
                }
                Err(p) => {
                    fail(problem_error(place, row, ci, name, p, false))?;
                    continue 'rows;
                }
            }
        }
        for (col, v) in columns.iter_mut().zip(&row_values) {
            col.push(*v);
        }
        origins.push(RowOrigin {
            file,
            line: row.number,
        });
        if let (Some(all), Some(c)) = (channels.as_mut(), channel) {
            all.push(c);
        }
        if let (Some(all), Some(g)) = (group_labels.as_mut(), group) {
            all.push(g);
        }
    }
    Ok(ParsedFile {
        chosen,
        columns,
        origins,
        channels,
        groups: group_labels,
        skipped,
        rejected,
    })
}

/// The columns chosen from a grid: the wanted ones that are present, and the label columns.
pub(super) struct Chosen {
    pub header_names: Vec<String>,
    /// Grid column of each variable.
    pub cols_idx: Vec<usize>,
    pub variables: Vec<String>,
    pub present: Vec<bool>,
    /// Units from the units row, one per variable.
    pub units: Vec<Option<String>>,
    by: Option<LabelColumn>,
    groups: Option<LabelColumn>,
}

/// Find the wanted columns, the `by` column and the `groups` column of a grid with the given
/// header (`grid_header`, None with `header = false`), units row and width (the header's,
/// or the widest row's without a header).
pub(super) fn choose_columns(
    recipe: &Recipe,
    path: &Path,
    grid_header: Option<&[String]>,
    units_row: Option<&[String]>,
    width: usize,
    wanted: &[Wanted],
) -> Result<Chosen> {
    let spec = &recipe.data;
    let header: &[String] = grid_header.unwrap_or(&[]);
    let mut indices: Vec<Option<usize>> = Vec::new();
    for w in wanted {
        let idx = find_column(
            recipe,
            path,
            header,
            width,
            &w.column,
            &w.variable,
            w.span.clone(),
        );
        indices.push(match idx {
            Ok(i) => Some(i),
            Err(_) if w.optional => None,
            Err(e) => return Err(e),
        });
    }
    let by = match &spec.by {
        Some(b) => Some(LabelColumn {
            key: "by",
            index: find_column(
                recipe,
                path,
                header,
                width,
                &b.value,
                "by",
                Some(b.span.clone()),
            )?,
            numeric_labels: false,
        }),
        None => None,
    };
    let groups = match &recipe.fit.groups {
        Some(g) => {
            // A model variable names its mapped column; anything else is a header name.
            let column = spec
                .columns
                .iter()
                .find(|(v, _)| v.value == g.value)
                .map_or_else(
                    || ColumnRef::Name(g.value.clone()),
                    |(_, c)| c.value.clone(),
                );
            if grid_header.is_none() && matches!(column, ColumnRef::Name(_)) {
                return Err(recipe
                    .error_at(
                        g.span.clone(),
                        format!(
                            "`groups = \"{}\"` names a header column, but `header = false`",
                            g.value
                        ),
                    )
                    .help("without a header row, name a variable mapped in [data] columns"));
            }
            Some(LabelColumn {
                key: "groups",
                index: find_column(
                    recipe,
                    path,
                    header,
                    width,
                    &column,
                    "groups",
                    Some(g.span.clone()),
                )?,
                numeric_labels: true,
            })
        }
        None => None,
    };
    let present: Vec<bool> = indices.iter().map(Option::is_some).collect();
    let mut variables = Vec::new();
    let mut header_names = Vec::new();
    let mut cols_idx = Vec::new();
    let mut units = Vec::new();
    for (w, idx) in wanted.iter().zip(&indices) {
        if let Some(i) = idx {
            variables.push(w.variable.clone());
            header_names.push(
                header
                    .get(*i)
                    .filter(|h| !h.is_empty())
                    .cloned()
                    .unwrap_or_else(|| format!("column {}", i + 1)),
            );
            cols_idx.push(*i);
            units.push(
                units_row
                    .and_then(|u| u.get(*i))
                    .map(|u| unit_text(u))
                    .filter(|u| !u.is_empty()),
            );
        }
    }
    Ok(Chosen {
        header_names,
        cols_idx,
        variables,
        present,
        units,
        by,
        groups,
    })
}

/// Columns `cols` of a text grid parsed up front, in parallel blocks for large files, row
/// major (`cols.len()` values per row): the value of every cell that holds a plain number,
/// NaN for anything else (short rows, empty, NaN or bad cells), which the row loop then reads
/// cell by cell as before, in row order, so errors and skipped rows are exactly those of a
/// sequential read.
fn parse_ahead(grid: &Grid, cols: &[usize], fmt: NumberFormat) -> Vec<f64> {
    use rayon::prelude::*;
    if let Some((text, delimiter)) = grid.split_text() {
        return super::fast_text::parse_columns(text, &grid.rows, delimiter, cols, fmt);
    }
    (0..grid.rows.len())
        .into_par_iter()
        .with_min_len(16_384)
        .flat_map_iter(|ri| {
            cols.iter().map(move |&ci| match grid.cell(ri, ci) {
                Some(CellRef::Text(t)) => match parse_number(t, fmt) {
                    Parsed::Value(v) => v,
                    _ => f64::NAN,
                },
                _ => f64::NAN,
            })
        })
        .collect()
}

fn column_name(header: &[String], index: usize) -> String {
    header
        .get(index)
        .filter(|h| !h.is_empty())
        .cloned()
        .unwrap_or_else(|| format!("column {}", index + 1))
}

/// A unit as written in a units row, without one pair of surrounding brackets: `[°C]`,
/// `(Ω)` and `°C` all give `°C`.
fn unit_text(raw: &str) -> String {
    let t = raw.trim();
    for (open, close) in [('[', ']'), ('(', ')')] {
        if let Some(inner) = t.strip_prefix(open).and_then(|r| r.strip_suffix(close)) {
            return inner.trim().to_string();
        }
    }
    t.to_string()
}

/// The error for a cell problem, at the cell.
fn problem_error(
    place: &Place,
    row: &GridRow,
    col: usize,
    name: &str,
    p: Problem,
    label: bool,
) -> Error {
    let err = match p {
        Problem::Missing(reason) => Error::input(format!("{reason} in column `{name}`")).help(if label {
            "every row needs a value in this column: fill it in, remove the row, or set `missing = \"skip\"` in [data] to skip such rows"
        } else {
            "fill in the value, remove the row, or set `missing = \"skip\"` in [data] to skip such rows"
        }),
        Problem::Bad { message, help } => Error::input(message).help(help),
    };
    place.locate(RowAt::Data(row), col, err)
}

/// A numeric cell.
fn number_cell(
    cell: CellRef<'_>,
    is_sheet: bool,
    fmt: NumberFormat,
    name: &str,
) -> Result<f64, Problem> {
    match cell {
        CellRef::Number(v) if v.is_nan() => Err(Problem::Missing("NaN")),
        CellRef::Number(v) if v.is_infinite() => Err(Problem::Missing("infinite value")),
        CellRef::Number(v) => Ok(v),
        CellRef::Empty => Err(Problem::Missing("empty cell")),
        CellRef::Text(t) if is_sheet => {
            if t.trim().is_empty() {
                return Err(Problem::Missing("empty cell"));
            }
            let looks_numeric = [false, true].iter().any(|&decimal_comma| {
                matches!(
                    parse_number(
                        t,
                        NumberFormat {
                            decimal_comma,
                            thousands: None
                        }
                    ),
                    Parsed::Value(_)
                )
            });
            Err(Problem::Bad {
                message: format!("text `{}` in column `{name}` is not a number", t.trim()),
                help: if looks_numeric {
                    "the cell holds a number stored as text; convert the column to numbers in the workbook".to_string()
                } else {
                    format!("column `{name}` must hold numbers only; fix or remove this cell")
                },
            })
        }
        CellRef::Text(t) => match parse_number(t, fmt) {
            Parsed::Value(v) => Ok(v),
            Parsed::Missing(reason) => Err(Problem::Missing(reason)),
            Parsed::Bad => Err(Problem::Bad {
                message: format!("`{}` in column `{name}` is not a number", t.trim()),
                help: bad_number_help(t, fmt).unwrap_or_else(|| {
                    format!("column `{name}` must hold numbers only; fix or remove this cell")
                }),
            }),
        },
        CellRef::Bool(b) => Err(Problem::Bad {
            message: format!("the true/false cell `{b}` in column `{name}` is not a number"),
            help: format!("column `{name}` must hold numbers only; fix or remove this cell"),
        }),
        CellRef::Error(e) => Err(Problem::Bad {
            message: format!("error value `{e}` in column `{name}`"),
            help: "the cell's formula failed in the workbook; fix it there, or remove the row"
                .to_string(),
        }),
    }
}

/// A label cell (`by`, `groups`): text as written (trimmed), numbers in their shortest form.
fn label_cell(
    grid: &Grid,
    row: usize,
    col: &LabelColumn,
    fmt: NumberFormat,
) -> Result<String, Problem> {
    let name = column_name(grid.header.as_deref().unwrap_or(&[]), col.index);
    match grid.cell(row, col.index).unwrap_or(CellRef::Empty) {
        CellRef::Text(t) if t.trim().is_empty() => Err(Problem::Missing("empty cell")),
        CellRef::Text(t) => Ok(match parse_number(t, fmt) {
            Parsed::Value(v) if col.numeric_labels => number_label(v),
            _ => t.trim().to_string(),
        }),
        CellRef::Number(v) if v.is_finite() => Ok(number_label(v)),
        CellRef::Number(_) => Err(Problem::Missing("NaN or infinite value")),
        CellRef::Bool(b) => Ok(b.to_string()),
        CellRef::Empty => Err(Problem::Missing("empty cell")),
        CellRef::Error(e) => Err(Problem::Bad {
            message: format!("error value `{e}` in the `{}` column `{name}`", col.key),
            help: "the cell's formula failed in the workbook; fix it there, or remove the row"
                .to_string(),
        }),
    }
}

/// The 0-based index of a column, or an error at the recipe span naming what is there.
fn find_column(
    recipe: &Recipe,
    path: &Path,
    header: &[String],
    width: usize,
    column: &ColumnRef,
    what: &str,
    span: Option<Range<usize>>,
) -> Result<usize> {
    let locate = |err: Error| match &span {
        Some(s) => err.at(recipe.locate(s.clone())),
        None => err.in_file(path),
    };
    match column {
        ColumnRef::Index(i) => {
            if *i > width || *i == 0 {
                Err(locate(Error::input(format!(
                    "column {i} for `{what}` does not exist: `{}` has {width} column{}",
                    path.display(),
                    if width == 1 { "" } else { "s" }
                )))
                .help("column positions count from 1; check the delimiter and `format` too"))
            } else {
                Ok(i - 1)
            }
        }
        ColumnRef::Name(n) => match header.iter().position(|h| h == n) {
            Some(i) => Ok(i),
            None => {
                let err = locate(Error::input(format!(
                    "column `{n}` for `{what}` is not in the header of `{}`",
                    path.display()
                )));
                let named: Vec<&String> = header.iter().filter(|h| !h.is_empty()).collect();
                let hint = match did_you_mean(n, named.iter().map(|h| h.as_str())) {
                    Some(s) => format!("{s} (column names are case-sensitive)"),
                    None => {
                        let list = named
                            .iter()
                            .map(|h| format!("`{h}`"))
                            .collect::<Vec<_>>()
                            .join(", ");
                        if let [only] = named.as_slice()
                            && (only.contains(';') || only.contains('\t'))
                        {
                            format!(
                                "the header is {list}: set `delimiter` in [data] to the file's separator"
                            )
                        } else if is_workbook(recipe, path) {
                            format!(
                                "the header has {list}; in a workbook, the header is the first row of `range` (or the row after `header_after`)"
                            )
                        } else {
                            format!("the header has {list}")
                        }
                    }
                };
                Err(err.help(hint))
            }
        },
    }
}

fn is_workbook(recipe: &Recipe, path: &Path) -> bool {
    recipe
        .data
        .format
        .unwrap_or_else(|| Format::from_extension(path))
        .is_spreadsheet()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn units_lose_one_pair_of_brackets() {
        assert_eq!(unit_text(" [°C] "), "°C");
        assert_eq!(unit_text("(Ω)"), "Ω");
        assert_eq!(unit_text("mV/V"), "mV/V");
        assert_eq!(unit_text("[]"), "");
    }
}
