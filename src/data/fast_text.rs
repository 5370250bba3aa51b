//! Delimited text without quote characters, split without the csv reader (SPEC §11).
//!
//! Such a text has one record per line and fields between delimiters, so the records can be
//! found by a search for line ends, in parallel over chunks that end at a line end, and the
//! fields of a record found again from its line whenever they are wanted: nothing is copied
//! per cell. [`is_plain`] decides when this gives exactly the records of the csv reader of
//! [`super::text`] (RFC 4180 with `\r`, `\n` or `\r\n` ending a record); any other text goes
//! through that reader.

use rayon::prelude::*;

use super::fast_number::{parse_plain, scan_plain};
use super::grid::GridRow;
use super::number::NumberFormat;

/// Texts shorter than this are split on one thread.
const PARALLEL_BYTES: usize = 1 << 20;

/// Rows per task when numbers are parsed in parallel.
const ROWS_PER_TASK: usize = 16_384;

/// Whether lines and delimiters alone give the records of the csv reader: an ASCII delimiter
/// other than a quote or a line end, no quote character anywhere, no `\r` except before `\n`
/// (a lone `\r` also ends a csv record), and no byte-order mark left at the start (the reader
/// would drop it).
pub fn is_plain(text: &str, delimiter: u8) -> bool {
    if !delimiter.is_ascii() || matches!(delimiter, b'"' | b'\r' | b'\n') {
        return false;
    }
    if text.starts_with('\u{feff}') {
        return false;
    }
    // Quotes and carriage returns in one search over the bytes.
    let bytes = text.as_bytes();
    memchr::memchr2_iter(b'"', b'\r', bytes)
        .all(|i| bytes.get(i) == Some(&b'\r') && bytes.get(i + 1) == Some(&b'\n'))
}

/// The 1-based line and byte offset of every record of a plain text: every line that holds
/// more than blanks and delimiters (a record of empty fields is dropped by the csv path too).
pub fn records(text: &str, delimiter: u8) -> Vec<(usize, usize)> {
    let parts = chunks(text);
    let found: Vec<(usize, Vec<(usize, usize)>)> = parts
        .into_par_iter()
        .map(|range| chunk_records(text, range, delimiter))
        .collect();
    // Each chunk's records copied to their place in one list, the chunks side by side (the
    // first line number of each chunk known from the line counts before it).
    let total = found.iter().map(|(_, r)| r.len()).sum();
    let mut out = vec![(0, 0); total];
    let mut jobs = Vec::with_capacity(found.len());
    let (mut rest, mut line) = (&mut out[..], 1);
    for (lines, recs) in &found {
        let (mine, tail) = rest.split_at_mut(recs.len());
        jobs.push((mine, line, recs));
        rest = tail;
        line += lines;
    }
    jobs.into_par_iter().for_each(|(dest, first, recs)| {
        for (d, &(l, offset)) in dest.iter_mut().zip(recs.iter()) {
            *d = (first + l, offset);
        }
    });
    out
}

/// Byte ranges covering `text`, each but the last ending just after a `\n`: one per thread
/// and a few more, so that a busy core does not hold up the others.
fn chunks(text: &str) -> Vec<std::ops::Range<usize>> {
    let n = if text.len() < PARALLEL_BYTES {
        1
    } else {
        rayon::current_num_threads().max(1) * 4
    };
    cut(text.as_bytes(), n)
}

/// At most `n` byte ranges covering `bytes`, each but the last ending just after a `\n`, of
/// about equal length.
pub fn cut(bytes: &[u8], n: usize) -> Vec<std::ops::Range<usize>> {
    let len = bytes.len();
    let mut out = Vec::with_capacity(n);
    let mut start = 0;
    for k in 1..n {
        let target = (len / n * k).max(start);
        let Some(nl) = bytes
            .get(target..)
            .and_then(|b| b.iter().position(|&c| c == b'\n'))
        else {
            break;
        };
        let end = target + nl + 1;
        out.push(start..end);
        start = end;
    }
    out.push(start..len);
    out
}

/// The records of one chunk, by line index within it, and the number of lines it has.
fn chunk_records(
    text: &str,
    range: std::ops::Range<usize>,
    delimiter: u8,
) -> (usize, Vec<(usize, usize)>) {
    let base = range.start;
    let part = text.get(range).unwrap_or("");
    let bytes = part.as_bytes();
    let mut recs = Vec::with_capacity(part.len() / 16 + 1);
    let mut lines = 0;
    let mut start = 0;
    let ends = memchr::memchr_iter(b'\n', bytes).map(|i| i + 1);
    for end in ends.chain((!part.is_empty() && !part.ends_with('\n')).then_some(part.len())) {
        // Most lines start with a digit or letter: only others need the blank test.
        let blank = match bytes.get(start) {
            Some(&b) if b.is_ascii_alphanumeric() && b != delimiter => false,
            _ => part
                .get(start..end)
                .is_none_or(|line| is_blank(line, delimiter)),
        };
        if !blank {
            recs.push((lines, base + start));
        }
        start = end;
        lines += 1;
    }
    (lines, recs)
}

/// A line whose fields are all empty after `str::trim`.
pub fn is_blank(line: &str, delimiter: u8) -> bool {
    let d = char::from(delimiter);
    line.chars().all(|c| c == d || c.is_whitespace())
}

/// The line that starts at `offset`, without its line end.
pub fn line_at(text: &str, offset: usize) -> &str {
    let rest = text.get(offset..).unwrap_or("");
    let line = rest.split('\n').next().unwrap_or("");
    line.strip_suffix('\r').unwrap_or(line)
}

/// The fields of a line of a plain text.
pub fn fields(line: &str, delimiter: u8) -> std::str::Split<'_, char> {
    line.split(char::from(delimiter))
}

/// Columns `cols` of every row, parsed by [`parse_plain`] in parallel, in one pass over each
/// line: row-major, `cols.len()` values per row, NaN where the row is short or the cell is
/// not a plain number (the caller reads those cells again with the exact parser).
pub fn parse_columns(
    text: &str,
    rows: &[GridRow],
    delimiter: u8,
    cols: &[usize],
    fmt: NumberFormat,
) -> Vec<f64> {
    let k = cols.len();
    let mut out = vec![f64::NAN; rows.len() * k];
    let Some(&last) = cols.iter().max() else {
        return out;
    };
    let mark = if fmt.decimal_comma { b',' } else { b'.' };
    let bytes = text.as_bytes();
    out.par_chunks_mut(k * ROWS_PER_TASK)
        .zip(rows.par_chunks(ROWS_PER_TASK))
        .for_each(|(values, rows)| {
            for (row, slots) in rows.iter().zip(values.chunks_mut(k)) {
                parse_row(bytes, row.offset, delimiter, cols, last, mark, slots);
            }
        });
    out
}

/// The wanted cells of the line at `offset` into `slots` (left NaN when not plain numbers);
/// the index in `bytes` where the scan stopped: the line end (or the end of `bytes`), or the
/// start of the field after the last wanted one.
pub fn parse_row(
    bytes: &[u8],
    offset: usize,
    delimiter: u8,
    cols: &[usize],
    last: usize,
    mark: u8,
    slots: &mut [f64],
) -> usize {
    // A wanted cell is scanned as a number in one pass unless the delimiter could be part
    // of one (a digit, sign, mark, exponent or blank); then its end is found first.
    let scan = !(delimiter.is_ascii_digit()
        || matches!(
            delimiter,
            b'+' | b'-' | b'e' | b'E' | b' ' | b'\t' | b'\x0b' | b'\x0c'
        )
        || delimiter == mark);
    let mut start = offset;
    for field in 0..=last {
        let rest = bytes.get(start..).unwrap_or(&[]);
        let wanted = cols.contains(&field);
        let (value, len) = if wanted && scan {
            let (value, n) = scan_plain(rest, mark);
            match rest.get(n) {
                None | Some(b'\n') => (value, n),
                Some(&c) if c == delimiter => (value, n),
                Some(_) => (None, n + field_len(rest.get(n..).unwrap_or(&[]), delimiter)),
            }
        } else {
            let len = field_len(rest, delimiter);
            let value = if wanted {
                // A `\r` before the line end is trimmed with the cell's blanks.
                parse_plain(rest.get(..len).unwrap_or(&[]), mark)
            } else {
                None
            };
            (value, len)
        };
        if let Some(v) = value {
            for (slot, _) in slots.iter_mut().zip(cols).filter(|(_, c)| **c == field) {
                *slot = v;
            }
        }
        match rest.get(len) {
            Some(&c) if c == delimiter => start += len + 1,
            _ => return start + len,
        }
    }
    start
}

/// Length of the cell at the start of `s`: up to the delimiter or the line end.
fn field_len(s: &[u8], delimiter: u8) -> usize {
    memchr::memchr2(delimiter, b'\n', s).unwrap_or(s.len())
}

#[cfg(test)]
mod tests {
    use super::*;

    fn row(offset: usize) -> GridRow {
        GridRow { number: 0, offset }
    }

    #[test]
    fn quotes_lone_carriage_returns_and_marks_need_the_csv_reader() {
        assert!(is_plain("T,R\r\n1,2\r\n", b','));
        assert!(is_plain("", b','));
        assert!(!is_plain("T,R\n\"1\",2\n", b','));
        assert!(!is_plain("T,R\r1,2\r", b','));
        assert!(!is_plain("T,R\r\n1,2\r", b','));
        assert!(!is_plain("\u{feff}T,R\n", b','));
        assert!(!is_plain("T\"R\n", b'"'));
    }

    #[test]
    fn records_skip_blank_lines_and_count_every_line() {
        let text = "T;R\r\n1;2\r\n\r\n ; \n3;x\r\n\u{a0}\n4;5";
        assert_eq!(records(text, b';'), [(1, 0), (2, 5), (5, 16), (7, 24)]);
        assert_eq!(line_at(text, 16), "3;x");
        assert_eq!(
            fields(line_at(text, 5), b';').collect::<Vec<_>>(),
            ["1", "2"]
        );
        assert_eq!(line_at(text, 24), "4;5");
        assert_eq!(line_at(text, 99), "");
        // A letter as delimiter: a line of delimiters is still blank.
        assert_eq!(records("x x\n1x2", b'x'), [(2, 4)]);
    }

    #[test]
    fn chunks_end_at_line_ends_and_cover_the_text() {
        let text: String = (0..300_000).map(|i| format!("{i},{}\n", i * 7)).collect();
        let parts = chunks(&text);
        assert!(parts.len() > 1);
        assert_eq!(parts.first().map(|r| r.start), Some(0));
        assert_eq!(parts.last().map(|r| r.end), Some(text.len()));
        for w in parts.windows(2) {
            if let [a, b] = w {
                assert_eq!(a.end, b.start);
                assert_eq!(text.as_bytes().get(a.end - 1), Some(&b'\n'));
            }
        }
        let recs = records(&text, b',');
        assert_eq!(recs.len(), 300_000);
        assert_eq!(recs.get(123_456).map(|r| r.0), Some(123_457));
        let offset = recs.get(123_456).map_or(0, |r| r.1);
        assert_eq!(line_at(&text, offset), "123456,864192");
    }

    proptest::proptest! {
        #![proptest_config(proptest::prelude::ProptestConfig { cases: 3_000, rng_seed: proptest::test_runner::RngSeed::Fixed(20_261_210), ..proptest::prelude::ProptestConfig::default() })]

        /// Every value of the one-pass scan is the value of the exact parser on the cell as
        /// the row's fields give it, whatever the delimiter and decimal mark.
        #[test]
        fn scanned_cells_have_the_values_of_the_exact_parser(
            parts in proptest::collection::vec(
                proptest::sample::select(vec!["1", "25", "0", "-", "+", ".", ",", ";", "e", "E", " ", "\t", "\n", "\r\n", "x", "7e-3"]),
                0..60,
            ),
            d in proptest::sample::select(vec![b',', b';', b'\t', b' ', b'e', b'1', b'.', b'x']),
            decimal_comma in proptest::bool::ANY,
        ) {
            let text = parts.concat();
            proptest::prop_assume!(is_plain(&text, d));
            let fmt = NumberFormat { decimal_comma, thousands: None };
            let rows: Vec<GridRow> = records(&text, d).into_iter().map(|(_, o)| row(o)).collect();
            let cols = [0, 1, 2, 1];
            let got = parse_columns(&text, &rows, d, &cols, fmt);
            for (r, values) in rows.iter().zip(got.chunks(cols.len())) {
                for (&c, v) in cols.iter().zip(values) {
                    let cell = fields(line_at(&text, r.offset), d).nth(c);
                    let exact = cell.map(|t| crate::data::number::parse_number(t, fmt));
                    if !v.is_nan() {
                        proptest::prop_assert_eq!(
                            exact,
                            Some(crate::data::number::Parsed::Value(*v)),
                            "{:?} row at {} column {}", text, r.offset, c
                        );
                        proptest::prop_assert!(exact.is_some_and(|e| matches!(e, crate::data::number::Parsed::Value(x) if x.to_bits() == v.to_bits())));
                    }
                }
            }
        }
    }

    #[test]
    fn parsed_columns_leave_what_is_not_plain_to_the_exact_parser() {
        let text = "1.5, 2 ,x\r\n7\n,-3e2,\n";
        let rows = [row(0), row(11), row(13)];
        let fmt = NumberFormat::default();
        let got = parse_columns(text, &rows, b',', &[1, 0, 1], fmt);
        let bits: Vec<u64> = got.iter().map(|v| v.to_bits()).collect();
        let want: Vec<u64> = [
            2.0,
            1.5,
            2.0,
            f64::NAN,
            7.0,
            f64::NAN,
            -300.0,
            f64::NAN,
            -300.0,
        ]
        .iter()
        .map(|v| v.to_bits())
        .collect();
        assert_eq!(bits, want);
        let comma = NumberFormat {
            decimal_comma: true,
            thousands: None,
        };
        let got = parse_columns("1,5;2\n", &[row(0)], b';', &[0], comma);
        assert_eq!(got, [1.5]);
    }
}
