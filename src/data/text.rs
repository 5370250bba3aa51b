//! Delimited text (csv, tsv, whitespace) → a [`Grid`] of text cells.
//!
//! Lines before the header (`skip_rows`, or up to and including the `header_after` marker)
//! and comment lines are blanked in place, so that line numbers and columns in messages stay
//! those of the file. Quoted fields follow RFC 4180 (via the `csv` crate); a text without
//! quote characters is split by [`super::fast_text`], which gives the same records faster.

use std::path::Path;

use super::fast_text;
use super::grid::{Grid, GridRow, Place, TextCells, TextPlace, TextRows};
use crate::error::{Error, Result};
use crate::recipe::{DataSpec, Format};
use crate::source::locate_in;

/// The records of a text: their fields, and for each its 1-based line and the byte offset of
/// its start.
struct Records {
    cells: TextCells,
    at: Vec<(usize, usize)>,
}

/// Split decoded text into a header, an optional units row and data rows.
pub fn read_text(spec: &DataSpec, path: &Path, original: String, format: Format) -> Result<Grid> {
    let delimiter = delimiter(spec, format);
    let skip = match &spec.header_after {
        Some(marker) => marker_line(&original, &marker.value).ok_or_else(|| {
            Error::input(format!(
                "the marker `{}` of `header_after` is not in the data file",
                marker.value.trim()
            ))
            .in_file(path)
            .help("`header_after` skips to the line after the first line that starts with the marker; check its spelling and case against the file")
        })? + 1,
        None => spec.skip_rows,
    };
    let blanked = blank_lines(&original, skip, spec.comment.as_deref());
    let source = blanked.as_deref().unwrap_or(&original);
    // Without quote characters the records are the lines: found in parallel, their fields
    // not copied. Otherwise the csv reader handles the quoting.
    let (at, cells) = if format != Format::Whitespace && fast_text::is_plain(source, delimiter) {
        (fast_text::records(source, delimiter), None)
    } else {
        let recs = records(source, format, delimiter, path)?;
        (recs.at, Some(recs.cells))
    };
    let what_skips = if spec.header_after.is_some() {
        "after the `header_after` marker"
    } else if spec.skip_rows > 0 || spec.comment.is_some() {
        "after `skip_rows` and comment lines"
    } else {
        ""
    };
    let trimmed = |record: usize| -> Vec<String> {
        match &cells {
            Some(cells) => cells.fields(record).map(|f| f.trim().to_string()).collect(),
            None => at.get(record).map_or_else(Vec::new, |&(_, offset)| {
                fast_text::fields(fast_text::line_at(source, offset), delimiter)
                    .map(|f| f.trim().to_string())
                    .collect()
            }),
        }
    };
    let mut header = None;
    let mut header_offset = None;
    let mut units = None;
    let mut units_offset = None;
    let mut first = 0;
    if spec.header {
        let Some(&(_, offset)) = at.first() else {
            return Err(no_rows(path, what_skips));
        };
        header_offset = Some(offset);
        header = Some(trimmed(0));
        first = 1;
        if spec.units_row {
            let Some(&(_, offset)) = at.get(1) else {
                return Err(Error::input("the data file has a header but no units row")
                    .in_file(path)
                    .help("`units_row = true` reads the units from the row after the header; remove it if the file has none"));
            };
            units_offset = Some(offset);
            units = Some(trimmed(1));
            first = 2;
        }
    }
    // The record list becomes the rows in place (same layout; no second 16 bytes per row).
    let rows: Vec<GridRow> = at
        .into_iter()
        .skip(first)
        .map(|(number, offset)| GridRow { number, offset })
        .collect();
    if rows.is_empty() && header.is_none() {
        return Err(no_rows(path, what_skips));
    }
    Ok(Grid {
        header,
        units,
        rows,
        sheet_cells: Vec::new(),
        text: Some(match cells {
            Some(cells) => TextRows::Copied { cells, first },
            None => TextRows::Split { delimiter },
        }),
        place: Place::Text(TextPlace {
            path: path.to_path_buf(),
            original,
            blanked,
            format,
            delimiter,
            header_offset,
            units_offset,
        }),
    })
}

/// The field delimiter of a text file: the recipe's, else a tab for tsv, `;` with a decimal
/// comma, `,` otherwise.
pub fn delimiter(spec: &DataSpec, format: Format) -> u8 {
    spec.delimiter.unwrap_or(match format {
        Format::Tsv => b'\t',
        _ if spec.decimal_comma => b';',
        _ => b',',
    })
}

fn no_rows(path: &Path, what_skips: &str) -> Error {
    Error::input("the data file has no rows")
        .in_file(path)
        .help(if what_skips.is_empty() {
            "check that this is the right file; it is empty".to_string()
        } else {
            format!("the file is empty {what_skips}; check those settings")
        })
}

/// The 0-based index of the first line that starts with `marker` (both trimmed).
pub fn marker_line(text: &str, marker: &str) -> Option<usize> {
    let marker = marker.trim();
    text.split_inclusive('\n')
        .position(|line| line.trim().starts_with(marker))
}

/// The text with the first `skip_rows` lines and the comment lines replaced by spaces (line
/// endings kept, so offsets stay those of the file); `None` when there is nothing to blank.
fn blank_lines(text: &str, skip_rows: usize, comment: Option<&str>) -> Option<String> {
    if skip_rows == 0 && comment.is_none() {
        return None;
    }
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
    Some(out)
}

/// Split the text into records in one pass; the fields go into one flat buffer.
fn records(text: &str, format: Format, delimiter: u8, path: &Path) -> Result<Records> {
    let mut out = Records {
        cells: TextCells::new(),
        at: Vec::new(),
    };
    if format == Format::Whitespace {
        let mut offset = 0;
        for (i, line) in text.split_inclusive('\n').enumerate() {
            let mut fields = line.split_whitespace().peekable();
            if fields.peek().is_some() {
                out.cells.push(fields);
                out.at.push((i + 1, offset));
            }
            offset += line.len();
        }
        return Ok(out);
    }
    let mut reader = csv::ReaderBuilder::new()
        .has_headers(false)
        .flexible(true)
        .delimiter(delimiter)
        .from_reader(text.as_bytes());
    let mut rec = csv::StringRecord::new();
    // Line numbers are counted here from the byte offsets: after a CRLF the reader reports a
    // record as starting at the `\n`, one byte early.
    let (mut counted_to, mut line) = (0, 1);
    loop {
        match reader.read_record(&mut rec) {
            Ok(false) => break,
            Ok(true) => {
                if rec.iter().all(|f| f.trim().is_empty()) {
                    continue;
                }
                let mut offset = rec.position().map_or(0, |p| p.byte() as usize);
                while text
                    .as_bytes()
                    .get(offset)
                    .is_some_and(|b| matches!(b, b'\r' | b'\n'))
                {
                    offset += 1;
                }
                line += text
                    .as_bytes()
                    .get(counted_to..offset)
                    .map_or(0, |t| t.iter().filter(|&&b| b == b'\n').count());
                counted_to = offset;
                out.cells.push(rec.iter());
                out.at.push((line, offset));
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
                return Err(err.help(
                    "check the quoting on this line (a field that opens a quote must close it)",
                ));
            }
        }
    }
    Ok(out)
}

/// Byte offset and width of field `index` of the line starting at `offset`, for carets; the
/// end of the line when the line is shorter.
pub fn field_offset(
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
    if format == Format::Whitespace {
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
    } else {
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

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn marker_is_found_on_trimmed_lines() {
        let text = "Logger export\n  Data:  \nT;R\n";
        assert_eq!(marker_line(text, "Data:"), Some(1));
        assert_eq!(marker_line(text, " Data: "), Some(1));
        assert_eq!(marker_line(text, "data:"), None);
    }

    #[test]
    fn records_after_crlf_start_on_their_own_line() {
        let text = "T;R\r\n1;2\r\n\r\n3;x\r\n";
        let recs = records(text, Format::Csv, b';', Path::new("d.csv")).expect("valid csv");
        assert_eq!(recs.at, [(1, 0), (2, 5), (4, 12)]);
        assert_eq!(recs.cells.fields(2).collect::<Vec<_>>(), ["3", "x"]);
        assert_eq!(recs.cells.width(1), 2);
        assert_eq!(field_offset(text, 12, Format::Csv, b';', 1), (14, 1));
    }

    /// The records and fields of the line splitter, for comparison with the csv reader.
    fn split_records(text: &str, delimiter: u8) -> Vec<(usize, usize, Vec<String>)> {
        fast_text::records(text, delimiter)
            .into_iter()
            .map(|(line, offset)| {
                let fields = fast_text::fields(fast_text::line_at(text, offset), delimiter)
                    .map(str::to_string)
                    .collect();
                (line, offset, fields)
            })
            .collect()
    }

    fn csv_records(text: &str, delimiter: u8) -> Vec<(usize, usize, Vec<String>)> {
        let recs = records(text, Format::Csv, delimiter, Path::new("d.csv")).expect("valid csv");
        recs.at
            .iter()
            .enumerate()
            .map(|(i, &(line, offset))| {
                let fields = recs.cells.fields(i).map(str::to_string).collect();
                (line, offset, fields)
            })
            .collect()
    }

    #[test]
    fn the_line_splitter_gives_the_records_of_the_csv_reader() {
        for text in [
            "T;R\r\n1;2\r\n\r\n3;x\r\n",
            "t,y\n\n\n1,2\n ,\n,,\n\t\n3,4,5\n6",
            "a\tb\n 1 \t 2 \n\u{a0}\t\n",
            "",
            "\n\n",
            "x",
            "1,2\r\n3,4\r\n",
            "°C,Ω\n20,1e3\n",
            "no final line end",
        ] {
            let d = if text.contains('\t') {
                b'\t'
            } else if text.contains(';') {
                b';'
            } else {
                b','
            };
            assert!(fast_text::is_plain(text, d), "{text:?}");
            assert_eq!(split_records(text, d), csv_records(text, d), "{text:?}");
        }
    }

    proptest::proptest! {
        #![proptest_config(proptest::prelude::ProptestConfig { cases: 2_000, rng_seed: proptest::test_runner::RngSeed::Fixed(20_261_210), ..proptest::prelude::ProptestConfig::default() })]

        #[test]
        fn line_splitter_agrees_with_the_csv_reader(
            parts in proptest::collection::vec(
                proptest::sample::select(vec!["1", "-2.5", ",", ";", " ", "\t", "\n", "\r\n", "x", "\u{a0}", "é", ""]),
                0..40,
            ),
            d in proptest::sample::select(vec![b',', b';', b'x', b'\t', b' ']),
        ) {
            let text = parts.concat();
            proptest::prop_assert!(fast_text::is_plain(&text, d));
            proptest::prop_assert_eq!(split_records(&text, d), csv_records(&text, d), "{:?}", text);
        }
    }

    #[test]
    fn blanking_keeps_offsets_and_line_endings() {
        let text = "skip me\r\n# note\nT,R\n";
        let out = blank_lines(text, 1, Some("#")).expect("lines to blank");
        assert_eq!(out.len(), text.len());
        assert_eq!(out, "       \r\n      \nT,R\n");
        assert_eq!(blank_lines(text, 0, None), None);
    }
}
