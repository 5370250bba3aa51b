//! Reading delimited text (csv, tsv, whitespace) into numeric columns.
//!
//! Each file is read once: bytes → SHA-256 → text (UTF-8, BOM removed) → records. Lines before
//! the header (`skip_rows`) and comment lines are blanked in place so that line numbers in
//! messages stay those of the file. Quoted fields follow RFC 4180 (via the `csv` crate).

use std::path::Path;

use super::files::MatchedFile;
use super::{Dataset, LoadedFile, RowOrigin, SkippedRow, Wanted};
use crate::error::{Error, Result, did_you_mean};
use crate::recipe::{ColumnRef, Format, Missing, Recipe};
use crate::source::locate_in;

/// Read every matched file and concatenate the wanted columns.
pub fn read_all(recipe: &Recipe, files: &[MatchedFile], wanted: &[Wanted]) -> Result<Dataset> {
    let mut ds = Dataset {
        variables: Vec::new(),
        headers: Vec::new(),
        columns: Vec::new(),
        origins: Vec::new(),
        files: Vec::new(),
        skipped: Vec::new(),
    };
    let mut first_header: Option<(Vec<String>, std::path::PathBuf)> = None;
    let mut present: Option<Vec<bool>> = None;
    for (fi, file) in files.iter().enumerate() {
        let bytes = std::fs::read(&file.path).map_err(|e| {
            Error::input(format!("cannot read data file: {e}"))
                .in_file(&file.path)
                .help("check that the file exists and is readable")
        })?;
        let sha256 = crate::hash::sha256_hex(&bytes);
        if let Some(expected) = &file.spec.sha256
            && *expected != sha256
        {
            return Err(recipe
                .error_at(file.spec.span.clone(), format!("data file `{}` does not match its pinned SHA-256", file.path.display()))
                .note(format!("pinned {expected}"))
                .note(format!("found  {sha256}"))
                .help("the file changed since it was pinned: restore it, or update `sha256` after review"));
        }
        let text = decode(&bytes, &file.path)?;
        let parsed = read_file(recipe, &file.path, &text, wanted)?;
        if first_header.is_none() {
            first_header = Some((parsed.header.clone(), file.path.clone()));
            ds.variables = parsed.variables.clone();
            ds.headers = parsed.header_names.clone();
            ds.columns = vec![Vec::new(); parsed.variables.len()];
            present = Some(parsed.present.clone());
        } else if present.as_ref() != Some(&parsed.present) {
            return Err(Error::input(format!(
                "data file `{}` does not have the same columns as `{}`",
                file.path.display(),
                first_header
                    .as_ref()
                    .map(|h| h.1.display().to_string())
                    .unwrap_or_default()
            ))
            .in_file(&file.path)
            .help("every file matched by [data] files must have the same columns"));
        }
        for (col, values) in ds.columns.iter_mut().zip(parsed.columns) {
            col.extend(values);
        }
        ds.origins.extend(
            parsed
                .lines
                .iter()
                .map(|&line| RowOrigin { file: fi, line }),
        );
        ds.skipped.extend(parsed.skipped);
        ds.files.push(LoadedFile {
            path: file.path.clone(),
            sha256,
            rows: parsed.lines.len(),
        });
    }
    Ok(ds)
}

/// Decode file bytes as UTF-8, removing a byte-order mark.
fn decode(bytes: &[u8], path: &Path) -> Result<String> {
    let body = bytes.strip_prefix(b"\xEF\xBB\xBF").unwrap_or(bytes);
    match std::str::from_utf8(body) {
        Ok(t) => Ok(t.to_string()),
        Err(e) => {
            let lossy = String::from_utf8_lossy(body);
            let at = e.valid_up_to();
            let loc = locate_in(path, &lossy, at..at + 1);
            Err(Error::input("the data file is not valid UTF-8 text")
                .at(loc)
                .help("save the file as UTF-8 (old exports in Windows-1252 show ° and Ω as single bytes)"))
        }
    }
}

struct ParsedFile {
    header: Vec<String>,
    header_names: Vec<String>,
    variables: Vec<String>,
    present: Vec<bool>,
    columns: Vec<Vec<f64>>,
    lines: Vec<usize>,
    skipped: Vec<SkippedRow>,
}

/// A record: its 1-based line, byte offset of its start, and its fields.
struct Record {
    line: usize,
    offset: usize,
    fields: Vec<String>,
}

fn blank_lines(text: &str, skip_rows: usize, comment: Option<&str>) -> String {
    let mut out = String::with_capacity(text.len());
    for (i, line) in text.split_inclusive('\n').enumerate() {
        let skip = i < skip_rows || comment.is_some_and(|c| line.trim_start().starts_with(c));
        if skip {
            // Keep byte offsets: replace the content by spaces, keep the line ending.
            let content = line.trim_end_matches(['\n', '\r']);
            out.extend(std::iter::repeat_n(' ', content.len()));
            out.push_str(&line[content.len()..]);
        } else {
            out.push_str(line);
        }
    }
    out
}

fn records(text: &str, format: Format, delimiter: u8, path: &Path) -> Result<Vec<Record>> {
    let mut out = Vec::new();
    match format {
        Format::Whitespace => {
            let mut offset = 0;
            for (i, line) in text.split_inclusive('\n').enumerate() {
                let fields: Vec<String> = line.split_whitespace().map(str::to_string).collect();
                if !fields.is_empty() {
                    out.push(Record {
                        line: i + 1,
                        offset,
                        fields,
                    });
                }
                offset += line.len();
            }
        }
        Format::Csv | Format::Tsv => {
            let mut reader = csv::ReaderBuilder::new()
                .has_headers(false)
                .flexible(true)
                .delimiter(delimiter)
                .from_reader(text.as_bytes());
            let mut rec = csv::StringRecord::new();
            loop {
                match reader.read_record(&mut rec) {
                    Ok(false) => break,
                    Ok(true) => {
                        if rec.iter().all(|f| f.trim().is_empty()) {
                            continue;
                        }
                        let pos = rec
                            .position()
                            .map_or((0, 0), |p| (p.line() as usize, p.byte() as usize));
                        out.push(Record {
                            line: pos.0,
                            offset: pos.1,
                            fields: rec.iter().map(str::to_string).collect(),
                        });
                    }
                    Err(e) => {
                        let (line, offset) = e
                            .position()
                            .map_or((0, 0), |p| (p.line() as usize, p.byte() as usize));
                        let mut err = Error::input(format!(
                            "the data file cannot be read as delimited text: {e}"
                        ));
                        err = if line > 0 {
                            err.at(locate_in(path, text, offset..offset + 1))
                        } else {
                            err.in_file(path)
                        };
                        return Err(err.help("check the quoting on this line (a field that opens a quote must close it)"));
                    }
                }
            }
        }
    }
    Ok(out)
}

/// Byte offset (within the line starting at `offset`) of field `index`, for carets.
fn field_offset(
    text: &str,
    offset: usize,
    format: Format,
    delimiter: u8,
    index: usize,
) -> (usize, usize) {
    let line = text.get(offset..).unwrap_or("");
    let line = &line[..line.find('\n').unwrap_or(line.len())];
    let line = line.trim_end_matches('\r');
    let mut spans = Vec::new();
    match format {
        Format::Whitespace => {
            let mut start = None;
            for (i, c) in line.char_indices() {
                match (c.is_whitespace(), start) {
                    (false, None) => start = Some(i),
                    (true, Some(s)) => {
                        spans.push((s, i));
                        start = None;
                    }
                    _ => {}
                }
            }
            if let Some(s) = start {
                spans.push((s, line.len()));
            }
        }
        _ => {
            let d = delimiter as char;
            let mut start = 0;
            let mut quoted = false;
            for (i, c) in line.char_indices() {
                if c == '"' {
                    quoted = !quoted;
                } else if c == d && !quoted {
                    spans.push((start, i));
                    start = i + 1;
                }
            }
            spans.push((start, line.len()));
        }
    }
    match spans.get(index) {
        Some(&(s, e)) => {
            let cell = &line[s..e];
            let lead = cell.len() - cell.trim_start().len();
            let width = cell.trim().len().max(1);
            (offset + s + lead, width)
        }
        None => (offset + line.len(), 1),
    }
}

enum Cell {
    Value(f64),
    Missing(&'static str),
    Bad,
}

fn parse_cell(raw: &str, decimal_comma: bool) -> Cell {
    let t = raw.trim();
    if t.is_empty() {
        return Cell::Missing("empty cell");
    }
    let owned;
    let s = if decimal_comma {
        if t.contains('.') {
            return Cell::Bad;
        }
        owned = t.replace(',', ".");
        owned.as_str()
    } else {
        t
    };
    match s.parse::<f64>() {
        Ok(v) if v.is_nan() => Cell::Missing("NaN"),
        Ok(v) if v.is_infinite() => Cell::Missing("infinite value"),
        Ok(v) => Cell::Value(v),
        Err(_) => Cell::Bad,
    }
}

fn read_file(
    recipe: &Recipe,
    path: &Path,
    original: &str,
    wanted: &[Wanted],
) -> Result<ParsedFile> {
    let spec = &recipe.data;
    let format = spec.format.unwrap_or_else(|| Format::from_extension(path));
    let delimiter = spec.delimiter.unwrap_or(match format {
        Format::Tsv => b'\t',
        _ if spec.decimal_comma => b';',
        _ => b',',
    });
    let text = blank_lines(original, spec.skip_rows, spec.comment.as_deref());
    let recs = records(&text, format, delimiter, path)?;
    let at = |offset: usize, width: usize| locate_in(path, original, offset..offset + width);
    let Some(first_rec) = recs.first() else {
        return Err(Error::input("the data file has no rows")
            .in_file(path)
            .help(if spec.skip_rows > 0 || spec.comment.is_some() {
                "the file is empty after `skip_rows` and comment lines; check both settings"
            } else {
                "check that this is the right file; it is empty"
            }));
    };
    let (header, data_recs): (Vec<String>, &[Record]) = if spec.header {
        let names: Vec<String> = first_rec
            .fields
            .iter()
            .map(|f| f.trim().to_string())
            .collect();
        for (i, n) in names.iter().enumerate() {
            if let Some(j) = names[..i].iter().position(|m| m == n) {
                let (o, w) = field_offset(&text, first_rec.offset, format, delimiter, i);
                return Err(Error::input(format!(
                    "the header names column `{n}` twice (columns {} and {})",
                    j + 1,
                    i + 1
                ))
                .at(at(o, w))
                .help("rename one of the columns so that every header name is unique"));
            }
        }
        (names, recs.get(1..).unwrap_or(&[]))
    } else {
        (Vec::new(), &recs[..])
    };
    if data_recs.is_empty() {
        return Err(Error::input(if spec.header {
            "the data file has a header but no data rows"
        } else {
            "the data file has no data rows"
        })
        .in_file(path)
        .help("check that this is the right file and that `skip_rows` and `header` are right"));
    }
    // Resolve wanted columns to field indices.
    let width = if spec.header {
        header.len()
    } else {
        data_recs.iter().map(|r| r.fields.len()).max().unwrap_or(0)
    };
    let mut indices: Vec<Option<usize>> = Vec::new();
    for w in wanted {
        let idx = match &w.column {
            ColumnRef::Index(i) => {
                if *i > width {
                    if w.optional {
                        None
                    } else {
                        let mut err = Error::input(format!(
                            "column {i} for `{}` does not exist: `{}` has {width} column{}",
                            w.variable,
                            path.display(),
                            if width == 1 { "" } else { "s" }
                        ));
                        err = match &w.span {
                            Some(s) => err.at(recipe.locate(s.clone())),
                            None => err.in_file(path),
                        };
                        return Err(err.help(
                            "column positions count from 1; check the delimiter and `format` too",
                        ));
                    }
                } else {
                    Some(i - 1)
                }
            }
            ColumnRef::Name(n) => match header.iter().position(|h| h == n) {
                Some(i) => Some(i),
                None if w.optional => None,
                None => {
                    let mut err = Error::input(format!(
                        "column `{n}` for `{}` is not in the header of `{}`",
                        w.variable,
                        path.display()
                    ));
                    err = match &w.span {
                        Some(s) => err.at(recipe.locate(s.clone())),
                        None => err.in_file(path),
                    };
                    let hint = match did_you_mean(n, header.iter().map(String::as_str)) {
                        Some(s) => format!("{s} (column names are case-sensitive)"),
                        None => {
                            let list = header
                                .iter()
                                .map(|h| format!("`{h}`"))
                                .collect::<Vec<_>>()
                                .join(", ");
                            if header.len() == 1
                                && (header[0].contains(';') || header[0].contains('\t'))
                            {
                                format!(
                                    "the header is {list}: set `delimiter` in [data] to the file's separator"
                                )
                            } else {
                                format!("the header has {list}")
                            }
                        }
                    };
                    return Err(err.help(hint));
                }
            },
        };
        indices.push(idx);
    }
    let present: Vec<bool> = indices.iter().map(Option::is_some).collect();
    let mut variables = Vec::new();
    let mut header_names = Vec::new();
    let mut cols_idx = Vec::new();
    for (w, idx) in wanted.iter().zip(&indices) {
        if let Some(i) = idx {
            variables.push(w.variable.clone());
            header_names.push(
                header
                    .get(*i)
                    .cloned()
                    .unwrap_or_else(|| format!("column {}", i + 1)),
            );
            cols_idx.push(*i);
        }
    }
    let mut columns: Vec<Vec<f64>> = vec![Vec::with_capacity(data_recs.len()); cols_idx.len()];
    let mut lines = Vec::with_capacity(data_recs.len());
    let mut skipped = Vec::new();
    let mut row_values = vec![0.0; cols_idx.len()];
    'rows: for rec in data_recs {
        for (k, &ci) in cols_idx.iter().enumerate() {
            let Some(raw) = rec.fields.get(ci) else {
                let (o, _) = field_offset(&text, rec.offset, format, delimiter, rec.fields.len());
                return Err(Error::input(format!(
                    "line {} has {} field{} but `{}` is column {}",
                    rec.line,
                    rec.fields.len(),
                    if rec.fields.len() == 1 { "" } else { "s" },
                    header_names[k],
                    ci + 1
                ))
                .at(at(o, 1))
                .help("a row is short: check for a missing value or a wrong delimiter"));
            };
            match parse_cell(raw, spec.decimal_comma) {
                Cell::Value(v) => row_values[k] = v,
                Cell::Missing(reason) => {
                    if spec.missing == Missing::Skip {
                        skipped.push(SkippedRow {
                            file: path.to_path_buf(),
                            line: rec.line,
                            column: header_names[k].clone(),
                            reason: reason.to_string(),
                        });
                        continue 'rows;
                    }
                    let (o, w) = field_offset(&text, rec.offset, format, delimiter, ci);
                    return Err(Error::input(format!("{reason} in column `{}`", header_names[k]))
                        .at(at(o, w))
                        .help("fill in the value, remove the row, or set `missing = \"skip\"` in [data] to skip such rows"));
                }
                Cell::Bad => {
                    let (o, w) = field_offset(&text, rec.offset, format, delimiter, ci);
                    let t = raw.trim();
                    let help = if spec.decimal_comma && t.contains('.') {
                        "with `decimal = \",\"` a \".\" is not allowed in a number; check the file's number format".to_string()
                    } else if !spec.decimal_comma
                        && t.contains(',')
                        && t.replace(',', ".").parse::<f64>().is_ok()
                    {
                        "the file seems to use a decimal comma: set `decimal = \",\"` in [data] (the delimiter is then \";\" unless set)".to_string()
                    } else {
                        format!(
                            "column `{}` must hold numbers only; fix or remove this cell",
                            header_names[k]
                        )
                    };
                    return Err(Error::input(format!(
                        "`{t}` in column `{}` is not a number",
                        header_names[k]
                    ))
                    .at(at(o, w))
                    .help(help));
                }
            }
        }
        for (col, v) in columns.iter_mut().zip(&row_values) {
            col.push(*v);
        }
        lines.push(rec.line);
    }
    Ok(ParsedFile {
        header,
        header_names,
        variables,
        present,
        columns,
        lines,
        skipped,
    })
}
