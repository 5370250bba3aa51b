//! The table read from one file before columns are chosen: header, optional units row and
//! data rows of cells, plus what is needed to point at a cell in a message — a line and
//! column of a text file, or a sheet and cell reference of a workbook.

use std::collections::BTreeMap;
use std::path::PathBuf;

use super::text::field_offset;
use crate::error::Error;
use crate::recipe::{Format, cell_name};
use crate::source::locate_in;

/// One cell. Text files give only `Text`; workbooks give typed cells.
#[derive(Debug, Clone, PartialEq)]
pub enum Cell {
    Text(String),
    Number(f64),
    Bool(bool),
    /// A spreadsheet error value such as `#DIV/0!`.
    Error(String),
    Empty,
}

impl Cell {
    pub fn is_blank(&self) -> bool {
        match self {
            Cell::Empty => true,
            Cell::Text(t) => t.trim().is_empty(),
            _ => false,
        }
    }
}

/// A data row.
#[derive(Debug, Clone)]
pub struct GridRow {
    /// 1-based line of a text file, or 1-based row number of a sheet.
    pub number: usize,
    /// Byte offset of the line's start (text files).
    pub offset: usize,
    pub cells: Vec<Cell>,
}

#[derive(Debug, Clone)]
pub struct Grid {
    /// Trimmed header names (`None` with `header = false`).
    pub header: Option<Vec<String>>,
    /// Trimmed cells of the units row (`units_row = true`).
    pub units: Option<Vec<String>>,
    pub rows: Vec<GridRow>,
    pub place: Place,
}

/// How to point at a cell of the grid in a message.
#[derive(Debug, Clone)]
pub enum Place {
    Text(TextPlace),
    Sheet(SheetPlace),
}

#[derive(Debug, Clone)]
pub struct TextPlace {
    pub path: PathBuf,
    /// The decoded file, quoted in messages.
    pub original: String,
    /// The same text with skipped and comment lines blanked (same offsets).
    pub blanked: String,
    pub format: Format,
    pub delimiter: u8,
    pub header_offset: Option<usize>,
    pub units_offset: Option<usize>,
}

#[derive(Debug, Clone)]
pub struct SheetPlace {
    pub path: PathBuf,
    pub sheet: String,
    /// Sheet column (from 0) of the grid's first column.
    pub first_col: u32,
    pub header_row: Option<u32>,
    pub units_row: Option<u32>,
    /// Formulas of cells that have no stored value, by (row, column) from 0.
    pub formulas: BTreeMap<(u32, u32), String>,
}

/// A row of the grid, for [`Place::locate`].
#[derive(Debug, Clone, Copy)]
pub enum RowAt<'a> {
    Header,
    Units,
    Data(&'a GridRow),
}

impl Place {
    pub fn path(&self) -> &std::path::Path {
        match self {
            Place::Text(t) => &t.path,
            Place::Sheet(s) => &s.path,
        }
    }

    /// The sheet name, for a workbook.
    pub fn sheet(&self) -> Option<&str> {
        match self {
            Place::Text(_) => None,
            Place::Sheet(s) => Some(&s.sheet),
        }
    }

    /// Attach the position of a cell (column `col` of the grid, from 0) to an error: the
    /// line, column and caret of a text file; the file plus `sheet "Run 3", cell B7` for a
    /// workbook, which has no line to quote.
    pub fn locate(&self, row: RowAt<'_>, col: usize, err: Error) -> Error {
        match self {
            Place::Text(t) => {
                let offset = match row {
                    RowAt::Header => t.header_offset,
                    RowAt::Units => t.units_offset,
                    RowAt::Data(r) => Some(r.offset),
                };
                match offset {
                    Some(o) => {
                        let (at, width) = field_offset(&t.blanked, o, t.format, t.delimiter, col);
                        err.at(locate_in(&t.path, &t.original, at..at + width))
                    }
                    None => err.in_file(&t.path),
                }
            }
            Place::Sheet(s) => {
                let r = match row {
                    RowAt::Header => s.header_row,
                    RowAt::Units => s.units_row,
                    RowAt::Data(r) => u32::try_from(r.number.saturating_sub(1)).ok(),
                };
                let c = s
                    .first_col
                    .saturating_add(u32::try_from(col).unwrap_or(u32::MAX));
                let err = err.in_file(&s.path);
                match r {
                    Some(r) => {
                        let err =
                            err.note(format!("sheet \"{}\", cell {}", s.sheet, cell_name(r, c)));
                        match s.formulas.get(&(r, c)) {
                            Some(f) => err.note(format!(
                                "the cell holds the formula `={}` but no stored result (the program that wrote the file did not calculate it); open and save the file in a spreadsheet program",
                                f.trim_start_matches('=')
                            )),
                            None => err,
                        }
                    }
                    None => err.note(format!("sheet \"{}\"", s.sheet)),
                }
            }
        }
    }
}
