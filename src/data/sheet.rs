//! Workbooks (`.xlsx`, `.xlsm`, `.ods`) → a [`Grid`] of typed cells, read with `calamine`.
//!
//! The sheet is `[data] sheet` (default: the first), the cells are `[data] range` (default:
//! the used range of the sheet), and the header is the first non-empty row of those cells
//! (after `skip_rows` rows, or after the row that starts with the `header_after` marker).
//! Entirely empty rows are ignored, as blank lines of text files are.
//!
//! Values: formula cells give their stored result; dates and times give the workbook's serial
//! day number (days since 1899-12-30 plus the fraction of the day, the convention of both
//! formats for dates after 1900-02-28; `.xlsx` stores the serial itself, `.ods` stores an ISO
//! 8601 date that is converted to the same scale).

use std::collections::BTreeMap;
use std::io::Cursor;
use std::path::Path;

use calamine::{Data, Ods, Reader, Xlsx};

use super::grid::{Cell, Grid, GridRow, Place, SheetPlace};
use crate::error::{Error, Result, did_you_mean};
use crate::recipe::{CellRange, Format, Recipe};

/// Read the chosen sheet and cells of a workbook.
///
/// The workbook reader is third-party code over the file's bytes: a panic inside it (seen on
/// a malformed cell reference) is an input error naming the file, not a crash.
pub fn read_sheet(recipe: &Recipe, path: &Path, bytes: &[u8], format: Format) -> Result<Grid> {
    let kind = if format == Format::Ods {
        ".ods"
    } else {
        ".xlsx"
    };
    super::contain::contain(|| match format {
        Format::Ods => read_book::<Ods<Cursor<&[u8]>>>(recipe, path, bytes, kind),
        _ => read_book::<Xlsx<Cursor<&[u8]>>>(recipe, path, bytes, kind),
    })
    .unwrap_or_else(|why| {
        Err(Error::input(format!(
            "the data file cannot be read as an {kind} workbook: its content is malformed (the workbook reader stopped: {why})"
        ))
        .in_file(path)
        .help("open the file in the program that wrote it and save it again, or export the sheet as CSV"))
    })
}

fn read_book<'b, R>(recipe: &Recipe, path: &Path, bytes: &'b [u8], kind: &str) -> Result<Grid>
where
    R: Reader<Cursor<&'b [u8]>>,
    R::Error: std::fmt::Display,
{
    let spec = &recipe.data;
    let mut book = R::new(Cursor::new(bytes)).map_err(|e| {
        Error::input(format!("the data file cannot be read as an {kind} workbook: {e}"))
            .in_file(path)
            .help("check that the file is a workbook saved in that format (not .xls or a renamed text file); set `format` in [data] if the extension is wrong")
    })?;
    let names = book.sheet_names();
    let name = match &spec.sheet {
        Some(wanted) => {
            if !names.contains(&wanted.value) {
                let list = names
                    .iter()
                    .map(|n| format!("\"{n}\""))
                    .collect::<Vec<_>>()
                    .join(", ");
                let err = recipe
                    .error_at(
                        wanted.span.clone(),
                        format!("`{}` has no sheet \"{}\"", path.display(), wanted.value),
                    )
                    .note(format!("its sheets are {list}"));
                return Err(
                    match did_you_mean(&wanted.value, names.iter().map(String::as_str)) {
                        Some(m) => err.help(format!("{m} (sheet names are compared exactly)")),
                        None => err.help("write the sheet's name as shown on its tab"),
                    },
                );
            }
            wanted.value.clone()
        }
        None => names.first().cloned().ok_or_else(|| {
            Error::input("the workbook has no sheets")
                .in_file(path)
                .help("check that this is the right file")
        })?,
    };
    let values = book.worksheet_range(&name).map_err(|e| {
        Error::input(format!("sheet \"{name}\" cannot be read: {e}"))
            .in_file(path)
            .help("choose a worksheet (not a chart sheet) with `sheet` in [data]")
    })?;
    let (Some(used_start), Some(used_end)) = (values.start(), values.end()) else {
        return Err(Error::input(format!("sheet \"{name}\" is empty"))
            .in_file(path)
            .help("choose the sheet that holds the data with `sheet` in [data]"));
    };
    let used = CellRange {
        first_row: used_start.0,
        first_col: used_start.1,
        last_row: used_end.0,
        last_col: used_end.1,
    };
    let region = match &spec.range {
        None => used,
        Some(r) => {
            let v = r.value;
            if v.last_row < used.first_row
                || v.first_row > used.last_row
                || v.last_col < used.first_col
                || v.first_col > used.last_col
            {
                return Err(recipe
                    .error_at(
                        r.span.clone(),
                        format!(
                            "`range = \"{v}\"` lies outside the cells of sheet \"{name}\" in `{}`",
                            path.display()
                        ),
                    )
                    .note(format!("the sheet's cells span {used}"))
                    .help("choose a range that covers the header and the data rows"));
            }
            // Cells past the used range are empty; clipping keeps a generous range cheap.
            CellRange {
                last_row: v.last_row.min(used.last_row),
                last_col: v.last_col.min(used.last_col),
                ..v
            }
        }
    };
    let cell_at = |r: u32, c: u32| values.get_value((r, c)).map_or(Cell::Empty, convert);
    let row_cells = |r: u32| -> Vec<Cell> {
        (region.first_col..=region.last_col)
            .map(|c| cell_at(r, c))
            .collect()
    };
    let mut rows = region.first_row..=region.last_row;
    match &spec.header_after {
        Some(marker) => {
            let m = marker.value.trim();
            let found = rows.by_ref().any(|r| {
                row_cells(r)
                    .iter()
                    .find(|c| !c.is_blank())
                    .is_some_and(|c| matches!(c, Cell::Text(t) if t.trim().starts_with(m)))
            });
            if !found {
                return Err(Error::input(format!(
                    "the marker `{m}` of `header_after` is not in sheet \"{name}\""
                ))
                .in_file(path)
                .help("`header_after` skips to the row after the first row whose first cell starts with the marker; check its spelling and case"));
            }
        }
        None => {
            for _ in 0..spec.skip_rows {
                if rows.next().is_none() {
                    break;
                }
            }
        }
    }
    let mut rows = rows
        .map(|r| (r, row_cells(r)))
        .filter(|(_, cells)| !cells.iter().all(Cell::is_blank));
    let mut header = None;
    let mut header_row = None;
    let mut units = None;
    let mut units_row = None;
    if spec.header {
        let Some((r, cells)) = rows.next() else {
            return Err(
                Error::input(format!("sheet \"{name}\" has no rows in the chosen cells"))
                    .in_file(path)
                    .help("check `range`, `skip_rows` and `header_after` in [data]"),
            );
        };
        header_row = Some(r);
        header = Some(cells.iter().map(cell_text).collect());
        if spec.units_row {
            let Some((r, cells)) = rows.next() else {
                return Err(Error::input(format!(
                    "sheet \"{name}\" has a header but no units row"
                ))
                .in_file(path)
                .help("`units_row = true` reads the units from the row after the header; remove it if the sheet has none"));
            };
            units_row = Some(r);
            units = Some(cells.iter().map(cell_text).collect());
        }
    }
    let (rows, sheet_cells): (Vec<GridRow>, Vec<Vec<Cell>>) = rows
        .map(|(r, cells)| {
            (
                GridRow {
                    number: r as usize + 1,
                    offset: 0,
                },
                cells,
            )
        })
        .unzip();
    if rows.is_empty() && header.is_none() {
        return Err(
            Error::input(format!("sheet \"{name}\" has no rows in the chosen cells"))
                .in_file(path)
                .help("check `range`, `skip_rows` and `header_after` in [data]"),
        );
    }
    // Formulas of blank data cells, so that a formula nobody calculated is named as such.
    let mut formulas = BTreeMap::new();
    let empty: Vec<(u32, u32)> = rows
        .iter()
        .zip(&sheet_cells)
        .flat_map(|(row, cells)| {
            cells
                .iter()
                .enumerate()
                .filter(|(_, c)| c.is_blank())
                .map(move |(i, _)| (row.number as u32 - 1, region.first_col + i as u32))
        })
        .collect();
    if !empty.is_empty()
        && let Ok(f) = book.worksheet_formula(&name)
    {
        for pos in empty {
            if let Some(text) = f.get_value(pos).filter(|t| !t.is_empty()) {
                formulas.insert(pos, text.clone());
            }
        }
    }
    Ok(Grid {
        header,
        units,
        rows,
        sheet_cells,
        text: None,
        place: Place::Sheet(SheetPlace {
            path: path.to_path_buf(),
            sheet: name,
            first_col: region.first_col,
            header_row,
            units_row,
            formulas,
        }),
    })
}

/// A calamine value as a [`Cell`]; dates and times become serial day numbers.
fn convert(d: &Data) -> Cell {
    match d {
        Data::Int(i) => Cell::Number(*i as f64),
        Data::Float(f) => Cell::Number(*f),
        Data::String(s) if is_error_text(s) => Cell::Error(s.trim().to_string()),
        Data::String(s) => Cell::Text(s.clone()),
        Data::Bool(b) => Cell::Bool(*b),
        Data::DateTime(dt) => Cell::Number(dt.as_f64()),
        Data::DateTimeIso(s) => {
            iso_datetime_serial(s).map_or_else(|| Cell::Text(s.clone()), Cell::Number)
        }
        Data::DurationIso(s) => {
            iso_duration_days(s).map_or_else(|| Cell::Text(s.clone()), Cell::Number)
        }
        Data::Error(e) => Cell::Error(e.to_string()),
        Data::Empty => Cell::Empty,
    }
}

/// The text of a header or units cell.
pub fn cell_text(c: &Cell) -> String {
    match c {
        Cell::Text(t) => t.trim().to_string(),
        Cell::Number(v) => super::number::number_label(*v),
        Cell::Bool(b) => b.to_string(),
        Cell::Error(e) => e.clone(),
        Cell::Empty => String::new(),
    }
}

/// Error values as OpenDocument files store them: the text of the failed formula's result
/// (`#DIV/0!`, or `Err:502` in some programs).
fn is_error_text(s: &str) -> bool {
    const CODES: [&str; 8] = [
        "#DIV/0!", "#N/A", "#NAME?", "#NULL!", "#NUM!", "#REF!", "#VALUE!", "#DATA!",
    ];
    let t = s.trim();
    CODES.contains(&t)
        || t.strip_prefix("Err:")
            .is_some_and(|n| !n.is_empty() && n.bytes().all(|b| b.is_ascii_digit()))
}

/// Days from 1970-01-01 to a proleptic Gregorian date (H. Hinnant, "chrono-Compatible
/// Low-Level Date Algorithms", `days_from_civil`; from memory).
fn days_from_civil(y: i64, m: i64, d: i64) -> i64 {
    let y = if m <= 2 { y - 1 } else { y };
    let era = if y >= 0 { y } else { y - 399 } / 400;
    let yoe = y - era * 400;
    let mp = (m + 9) % 12;
    let doy = (153 * mp + 2) / 5 + d - 1;
    let doe = yoe * 365 + yoe / 4 - yoe / 100 + doy;
    era * 146_097 + doe - 719_468
}

/// `2026-11-28` or `2026-11-28T10:30:00[.5]` → serial days since 1899-12-30.
fn iso_datetime_serial(s: &str) -> Option<f64> {
    let s = s.trim().trim_end_matches('Z');
    let (date, time) = match s.split_once('T') {
        Some((d, t)) => (d, Some(t)),
        None => (s, None),
    };
    let mut parts = date.splitn(3, '-');
    let y: i64 = parts.next()?.parse().ok()?;
    let m: i64 = parts.next()?.parse().ok()?;
    let d: i64 = parts.next()?.parse().ok()?;
    if !(1..=12).contains(&m) || !(1..=31).contains(&d) {
        return None;
    }
    let days = days_from_civil(y, m, d) - days_from_civil(1899, 12, 30);
    let fraction = match time {
        None => 0.0,
        Some(t) => {
            let mut p = t.splitn(3, ':');
            let h: f64 = p.next()?.parse().ok()?;
            let mi: f64 = p.next()?.parse().ok()?;
            let sec: f64 = p.next().map_or(Some(0.0), |v| v.parse().ok())?;
            (h * 3600.0 + mi * 60.0 + sec) / 86_400.0
        }
    };
    Some(days as f64 + fraction)
}

/// `PT12H30M15.5S`, `P1DT2H`, `-PT1H` → days.
fn iso_duration_days(s: &str) -> Option<f64> {
    let s = s.trim();
    let (sign, s) = match s.strip_prefix('-') {
        Some(r) => (-1.0, r),
        None => (1.0, s),
    };
    let s = s.strip_prefix('P')?;
    let (date, time) = match s.split_once('T') {
        Some((d, t)) => (d, t),
        None => (s, ""),
    };
    let mut seconds = 0.0;
    let mut take = |part: &str, units: &[(char, f64)]| -> Option<()> {
        let mut number = String::new();
        for c in part.chars() {
            if c.is_ascii_digit() || c == '.' {
                number.push(c);
            } else {
                let factor = units.iter().find(|(u, _)| *u == c)?.1;
                seconds += number.parse::<f64>().ok()? * factor;
                number.clear();
            }
        }
        number.is_empty().then_some(())
    };
    take(date, &[('D', 86_400.0), ('W', 604_800.0)])?;
    take(time, &[('H', 3600.0), ('M', 60.0), ('S', 1.0)])?;
    Some(sign * seconds / 86_400.0)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn iso_dates_map_to_serial_days() {
        // Serial numbers of the 1900 date system: 1900-03-01 is 61, 2026-11-28 is 46354
        // (Python: (date(2026, 11, 28) - date(1899, 12, 30)).days).
        assert_eq!(iso_datetime_serial("1900-03-01"), Some(61.0));
        assert_eq!(iso_datetime_serial("2026-11-28"), Some(46354.0));
        assert_eq!(iso_datetime_serial("2026-11-28T18:00:00"), Some(46354.75));
        assert_eq!(iso_datetime_serial("2026-13-01"), None);
        assert_eq!(iso_datetime_serial("yesterday"), None);
    }

    #[test]
    fn iso_durations_map_to_days() {
        assert_eq!(iso_duration_days("PT12H00M00S"), Some(0.5));
        assert_eq!(iso_duration_days("P1DT6H"), Some(1.25));
        assert_eq!(iso_duration_days("-PT6H"), Some(-0.25));
        assert_eq!(iso_duration_days("P1Y"), None);
        assert_eq!(iso_duration_days("12:00"), None);
    }

    #[test]
    fn error_texts_of_opendocument_files_are_errors() {
        assert!(is_error_text("#DIV/0!"));
        assert!(is_error_text("Err:502"));
        assert!(!is_error_text("Err:"));
        assert!(!is_error_text("#3 probe"));
    }
}
