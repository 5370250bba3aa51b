//! The table read from one file before columns are chosen: header, optional units row and
//! data rows of cells, plus what is needed to point at a cell in a message — a line and
//! column of a text file, or a sheet and cell reference of a workbook.

use std::collections::BTreeMap;
use std::path::PathBuf;

use super::fast_text;
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

/// A cell as [`Grid::cell`] lends it: text borrowed from the grid.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum CellRef<'a> {
    Text(&'a str),
    Number(f64),
    Bool(bool),
    Error(&'a str),
    Empty,
}

impl Cell {
    pub fn as_ref(&self) -> CellRef<'_> {
        match self {
            Cell::Text(t) => CellRef::Text(t),
            Cell::Number(v) => CellRef::Number(*v),
            Cell::Bool(b) => CellRef::Bool(*b),
            Cell::Error(e) => CellRef::Error(e),
            Cell::Empty => CellRef::Empty,
        }
    }
}

/// A data row: where it is. Its cells are in [`Grid::text`] (text files) or
/// [`Grid::sheet_cells`] (workbooks); read them with [`Grid::cell`]. Plain data, so a
/// million-row grid is 16 MB, dropped at once.
#[derive(Debug, Clone, Copy)]
pub struct GridRow {
    /// 1-based line of a text file, or 1-based row number of a sheet.
    pub number: usize,
    /// Byte offset of the line's start (text files).
    pub offset: usize,
}

#[derive(Debug, Clone)]
pub struct Grid {
    /// Trimmed header names (`None` with `header = false`).
    pub header: Option<Vec<String>>,
    /// Trimmed cells of the units row (`units_row = true`).
    pub units: Option<Vec<String>>,
    pub rows: Vec<GridRow>,
    /// The cells of a text file: data row `i` is record `first + i`.
    pub text: Option<TextRows>,
    /// The cells of a workbook's data rows, row by row (empty for a text file).
    pub sheet_cells: Vec<Vec<Cell>>,
    pub place: Place,
}

/// The records of a text file, stored flat: one buffer holding the text of every field and
/// the end of each field, so a million rows take a few large buffers instead of a string
/// per cell and a vector per row.
#[derive(Debug, Clone, Default)]
pub struct TextCells {
    text: String,
    /// End in `text` of each field.
    ends: Vec<usize>,
    /// Index in `ends` of each record's first field, plus one entry past the last record.
    starts: Vec<usize>,
}

impl TextCells {
    pub fn new() -> TextCells {
        TextCells {
            starts: vec![0],
            ..TextCells::default()
        }
    }

    /// Append one record.
    pub fn push<'a>(&mut self, fields: impl IntoIterator<Item = &'a str>) {
        for f in fields {
            self.text.push_str(f);
            self.ends.push(self.text.len());
        }
        self.starts.push(self.ends.len());
    }

    /// Number of fields of a record (0 past the end).
    pub fn width(&self, record: usize) -> usize {
        match (self.starts.get(record), self.starts.get(record + 1)) {
            (Some(a), Some(b)) => b - a,
            _ => 0,
        }
    }

    /// Field `i` of a record.
    pub fn field(&self, record: usize, i: usize) -> Option<&str> {
        if i >= self.width(record) {
            return None;
        }
        let k = self.starts.get(record)? + i;
        let end = *self.ends.get(k)?;
        let start = if k == 0 { 0 } else { *self.ends.get(k - 1)? };
        self.text.get(start..end)
    }

    /// Every field of a record.
    pub fn fields(&self, record: usize) -> impl Iterator<Item = &str> {
        (0..self.width(record)).filter_map(move |i| self.field(record, i))
    }
}

/// The cells of a text grid.
#[derive(Debug, Clone)]
pub enum TextRows {
    /// Fields as the csv reader gave them (quoted fields differ from their text); data row
    /// `i` is record `first + i`.
    Copied { cells: TextCells, first: usize },
    /// A text without quote characters ([`fast_text::is_plain`]): the fields of a row are
    /// split again from its line (at [`GridRow::offset`]) when asked for.
    Split { delimiter: u8 },
}

impl Grid {
    /// Cell `col` of data row `row` (`None` past the end of a short row).
    pub fn cell(&self, row: usize, col: usize) -> Option<CellRef<'_>> {
        match &self.text {
            Some(TextRows::Copied { cells, first }) => {
                cells.field(first + row, col).map(CellRef::Text)
            }
            Some(TextRows::Split { delimiter }) => {
                let line = fast_text::line_at(self.place.text()?, self.rows.get(row)?.offset);
                fast_text::fields(line, *delimiter)
                    .nth(col)
                    .map(CellRef::Text)
            }
            None => self.sheet_cells.get(row)?.get(col).map(Cell::as_ref),
        }
    }

    /// Number of cells of data row `row`.
    pub fn width(&self, row: usize) -> usize {
        match &self.text {
            Some(TextRows::Copied { cells, first }) => cells.width(first + row),
            Some(TextRows::Split { delimiter }) => match (self.place.text(), self.rows.get(row)) {
                (Some(text), Some(r)) => {
                    fast_text::fields(fast_text::line_at(text, r.offset), *delimiter).count()
                }
                _ => 0,
            },
            None => self.sheet_cells.get(row).map_or(0, Vec::len),
        }
    }

    /// The text and delimiter of a grid read by [`fast_text`].
    pub fn split_text(&self) -> Option<(&str, u8)> {
        match &self.text {
            Some(TextRows::Split { delimiter }) => Some((self.place.text()?, *delimiter)),
            _ => None,
        }
    }
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
    /// The same text with skipped and comment lines blanked (same offsets); `None` when no
    /// line was blanked, so that the file is not held twice.
    pub blanked: Option<String>,
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

    /// The text the records were read from (skipped and comment lines blanked), for a text
    /// file.
    pub fn text(&self) -> Option<&str> {
        match self {
            Place::Text(t) => Some(t.blanked.as_deref().unwrap_or(&t.original)),
            Place::Sheet(_) => None,
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
                        let (at, width) = field_offset(
                            t.blanked.as_deref().unwrap_or(&t.original),
                            o,
                            t.format,
                            t.delimiter,
                            col,
                        );
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
