//! Plain numeric text read straight into its columns (SPEC §11): the common large file —
//! UTF-8 without a byte-order mark, no quote characters, no lines to skip, no label columns
//! (`by`, `groups`), every wanted cell a plain decimal number ([`super::fast_number`]) — goes
//! from its bytes to the final column vectors in two parallel passes, without the decoded
//! copy of the text, the record list and the row-major table of the grid path.
//!
//! It gives exactly the rows, values and lines that the grid path ([`super::text`], then
//! `table::extract`) gives for such a file, or nothing: for any other file, and at the first
//! cell that is not a plain number, [`read`] returns `None` and the caller reads the file
//! through the grid, which gives every message (file, line, column, what to do). The rules
//! that make the two agree are those of the grid path: records are the lines that are not
//! blank ([`super::fast_text::is_blank`]), the header and units row are the first records, cells are
//! split at the delimiter and scanned by [`super::fast_text::parse_row`], and a text with a quote,
//! a NUL or a `\r` not before `\n` is not plain ([`super::fast_text::is_plain`], and the NUL check of
//! [`super::decode`]).
//!
//! Pass 1 cuts the data lines into pieces of about [`PIECE_BYTES`] that end at a line end,
//! checks each piece (UTF-8, plain) and counts its lines. Each column is then allocated once
//! with one place per line, and pass 2 parses each piece into its own stretch of every
//! column, its rows packed at the stretch's start; blank lines (rare) leave places free at
//! the stretch's end, which are closed up afterwards.

use rayon::prelude::*;

use super::fast_text::{cut, fields, is_blank, line_at, parse_row};
use super::table::{ParsedFile, check_keys_apply, choose_columns, first_duplicate};
use super::{RowOrigin, Wanted};
use crate::recipe::{Format, Recipe};

/// Bytes per piece of the data lines: many more pieces than cores, so that a core busy with
/// the file's hash does not hold up the others.
const PIECE_BYTES: usize = 1 << 20;

/// The rows of one piece: how many, and the line (from the piece's first, 0-based) of each
/// when the piece has blank lines (`None`: row `j` is line `j`).
struct PieceRows {
    rows: usize,
    lines: Option<Vec<usize>>,
}

/// The wanted columns of a plain numeric text file, with `file` as the rows' file index; None
/// when the file or one of its cells is not of that kind (the grid path then reads it).
pub(super) fn read(
    recipe: &Recipe,
    path: &std::path::Path,
    bytes: &[u8],
    wanted: &[Wanted],
    file: usize,
) -> Option<ParsedFile> {
    let spec = &recipe.data;
    let format = spec.format.unwrap_or_else(|| Format::from_extension(path));
    let utf8 = spec
        .encoding
        .as_ref()
        .is_none_or(|e| e.value == encoding_rs::UTF_8);
    if format.is_spreadsheet()
        || format == Format::Whitespace
        || spec.by.is_some()
        || recipe.fit.groups.is_some()
        || spec.header_after.is_some()
        || spec.skip_rows > 0
        || spec.comment.is_some()
        || !utf8
        || encoding_rs::Encoding::for_bom(bytes).is_some()
    {
        return None;
    }
    check_keys_apply(recipe, path, format).ok()?;
    let delimiter = super::text::delimiter(spec, format);
    if !delimiter.is_ascii() || matches!(delimiter, b'"' | b'\r' | b'\n') {
        return None;
    }
    // The header and the units row: the first records.
    let head_records = if spec.header {
        1 + usize::from(spec.units_row)
    } else {
        0
    };
    let mut head: Vec<Vec<String>> = Vec::with_capacity(head_records);
    let (mut start, mut head_lines) = (0, 0);
    while head.len() < head_records {
        let rest = bytes.get(start..).filter(|r| !r.is_empty())?;
        let end = memchr::memchr(b'\n', rest).map_or(rest.len(), |i| i + 1);
        let piece = rest.get(..end)?;
        let line = std::str::from_utf8(piece).ok()?;
        if !is_plain_piece(piece) {
            return None;
        }
        if !is_blank(line, delimiter) {
            head.push(
                fields(line_at(line, 0), delimiter)
                    .map(|f| f.trim().to_string())
                    .collect(),
            );
        }
        start += end;
        head_lines += 1;
    }
    let mut head = head.into_iter();
    let header = head.next();
    let units = head.next();
    if header.as_deref().and_then(first_duplicate).is_some() {
        return None;
    }
    // Without a header the widest row is not known before reading; a column past the end of
    // every row leaves its cells unread, and the grid path then reports it.
    let width = header.as_ref().map_or(usize::MAX, Vec::len);
    let chosen = choose_columns(
        recipe,
        path,
        header.as_deref(),
        units.as_deref(),
        width,
        wanted,
    )
    .ok()?;
    let cols = &chosen.cols_idx;
    let last = *cols.iter().max()?;
    let mark = if spec.decimal_comma { b',' } else { b'.' };

    // Pass 1: the pieces, checked, and their line counts.
    let data = bytes.get(start..)?;
    let pieces = cut(data, data.len() / PIECE_BYTES + 1);
    let checked: Vec<(&str, usize)> = pieces
        .par_iter()
        .map(|r| {
            let piece = data.get(r.clone())?;
            let text = std::str::from_utf8(piece).ok()?;
            is_plain_piece(piece).then(|| (text, line_count(piece)))
        })
        .collect::<Option<Vec<_>>>()?;
    let lines: usize = checked.iter().map(|&(_, n)| n).sum();

    // Pass 2: every piece into its stretch of each column (allocated zeroed, so that its
    // pages are first touched by the thread that writes them).
    let mut columns: Vec<Vec<f64>> = cols
        .iter()
        .map(|_| crate::memory::zeroed_f64(lines))
        .collect();
    let mut stretches: Vec<Vec<&mut [f64]>> = checked
        .iter()
        .map(|_| Vec::with_capacity(cols.len()))
        .collect();
    for col in &mut columns {
        let mut rest: &mut [f64] = col;
        for (&(_, n), mine) in checked.iter().zip(&mut stretches) {
            let (stretch, tail) = rest.split_at_mut_checked(n)?;
            mine.push(stretch);
            rest = tail;
        }
    }
    let read: Vec<PieceRows> = checked
        .par_iter()
        .zip(stretches)
        .map(|(&(text, _), mut outs)| read_piece(text, delimiter, cols, last, mark, &mut outs))
        .collect::<Option<Vec<_>>>()?;
    let rows: usize = read.iter().map(|p| p.rows).sum();
    if rows == 0 {
        return None;
    }
    if rows < lines {
        for col in &mut columns {
            let (mut from, mut to) = (0, 0);
            for (&(_, n), p) in checked.iter().zip(&read) {
                col.copy_within(from..from + p.rows, to);
                from += n;
                to += p.rows;
            }
            col.truncate(rows);
        }
    }
    // The first row and first line (1-based) of each piece; each row's line in parallel,
    // written once into its place.
    let mut firsts = Vec::with_capacity(read.len());
    let (mut row, mut line) = (0, head_lines + 1);
    for (p, &(_, n)) in read.iter().zip(&checked) {
        firsts.push((row, line));
        row += p.rows;
        line += n;
    }
    let mut origins = crate::memory::with_capacity(rows);
    if rows == lines {
        // No blank line: row `i` is line `i` after the header.
        let first = head_lines + 1;
        origins.par_extend((0..rows).into_par_iter().map(|i| RowOrigin {
            file,
            line: first + i,
        }));
    } else {
        origins.par_extend((0..rows).into_par_iter().map(|i| {
            let c = firsts.partition_point(|&(r, _)| r <= i).saturating_sub(1);
            let (row0, line0) = firsts.get(c).copied().unwrap_or((0, 1));
            let j = i - row0;
            let within = read
                .get(c)
                .and_then(|p| p.lines.as_ref())
                .and_then(|l| l.get(j).copied())
                .unwrap_or(j);
            RowOrigin {
                file,
                line: line0 + within,
            }
        }));
    }
    Some(ParsedFile::numbers(chosen, columns, origins))
}

/// No quote character, no NUL, and no `\r` except before `\n`: the checks of
/// [`super::fast_text::is_plain`] and of the decoder's NUL test, on a piece that ends at a line end
/// (or at the end of the text).
fn is_plain_piece(bytes: &[u8]) -> bool {
    memchr::memchr3_iter(b'"', b'\r', 0, bytes)
        .all(|i| bytes.get(i) == Some(&b'\r') && bytes.get(i + 1) == Some(&b'\n'))
}

/// Lines of a piece: its line ends, plus a last line without one.
fn line_count(piece: &[u8]) -> usize {
    let ends = memchr::memchr_iter(b'\n', piece).count();
    ends + usize::from(piece.last().is_some_and(|&b| b != b'\n'))
}

/// Parse the records of one piece into `outs` (one stretch per column, a place per line),
/// packed from the start; None at the first wanted cell that is not a plain number or is
/// missing.
fn read_piece(
    text: &str,
    delimiter: u8,
    cols: &[usize],
    last: usize,
    mark: u8,
    outs: &mut [&mut [f64]],
) -> Option<PieceRows> {
    let bytes = text.as_bytes();
    let mut slots = vec![f64::NAN; cols.len()];
    let (mut at, mut line, mut rows) = (0, 0, 0);
    let mut lines: Option<Vec<usize>> = None;
    while at < bytes.len() {
        // Most lines start with a digit: only others need the blank test.
        let blank = match bytes.get(at) {
            Some(&b) if b.is_ascii_alphanumeric() && b != delimiter => false,
            _ => is_blank(line_at(text, at), delimiter),
        };
        let stop = if blank {
            lines.get_or_insert_with(|| (0..rows).collect());
            at
        } else {
            slots.fill(f64::NAN);
            let stop = parse_row(bytes, at, delimiter, cols, last, mark, &mut slots);
            for (out, &v) in outs.iter_mut().zip(&slots) {
                if v.is_nan() {
                    return None;
                }
                *out.get_mut(rows)? = v;
            }
            if let Some(l) = lines.as_mut() {
                l.push(line);
            }
            rows += 1;
            stop
        };
        at = match bytes.get(stop) {
            Some(b'\n') => stop + 1,
            None => stop,
            Some(_) => bytes
                .get(stop..)
                .and_then(|r| memchr::memchr(b'\n', r))
                .map_or(bytes.len(), |i| stop + i + 1),
        };
        line += 1;
    }
    Some(PieceRows { rows, lines })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn line_counts_include_a_last_line_without_its_end() {
        assert_eq!(line_count(b""), 0);
        assert_eq!(line_count(b"1,2\n"), 1);
        assert_eq!(line_count(b"1,2\n3,4"), 2);
        assert_eq!(line_count(b"\n\n"), 2);
    }

    #[test]
    fn quotes_nul_and_lone_carriage_returns_are_not_plain() {
        assert!(is_plain_piece(b"1,2\r\n3,4\n"));
        assert!(!is_plain_piece(b"1,\"2\"\n"));
        assert!(!is_plain_piece(b"1,2\0\n"));
        assert!(!is_plain_piece(b"1,2\r3,4\n"));
        assert!(!is_plain_piece(b"1,2\r"));
        assert!(crate::data::fast_text::is_plain("1,2\r\n3,4\n", b','));
    }

    /// A recipe reading `d.csv` with the given `[data]` lines and columns `x` and `y`.
    fn recipe(data: &str, columns: &str) -> Recipe {
        let text = format!(
            "name = \"plain-test\"\n\n[data]\nfiles = [\"d.csv\"]\n{data}\ncolumns = {columns}\n\n[model]\nequation = \"y = p*x\"\n[model.parameters]\np = {{ start = 1.0 }}\n"
        );
        crate::recipe::from_bytes(std::path::Path::new("r.toml"), text.into_bytes())
            .expect("a valid recipe")
    }

    fn wanted(recipe: &Recipe) -> Vec<Wanted> {
        crate::data::mapped_columns(recipe)
    }

    /// The columns (as bits), lines, header names and units of a read, to compare the two
    /// paths.
    type Summary = (
        Vec<Vec<u64>>,
        Vec<(usize, usize)>,
        Vec<String>,
        Vec<Option<String>>,
    );

    fn summary(p: &ParsedFile) -> Summary {
        (
            p.columns
                .iter()
                .map(|c| c.iter().map(|v| v.to_bits()).collect())
                .collect(),
            p.origins.iter().map(|o| (o.file, o.line)).collect(),
            p.chosen.header_names.clone(),
            p.chosen.units.clone(),
        )
    }

    /// What the grid path reads from the same bytes.
    fn by_grid(recipe: &Recipe, bytes: &[u8]) -> Option<ParsedFile> {
        let path = std::path::Path::new("d.csv");
        let grid = super::super::table::read_grid(recipe, path, bytes).ok()?;
        let w = wanted(recipe);
        super::super::table::extract(recipe, &grid, &w, false, 3).ok()
    }

    fn direct(recipe: &Recipe, bytes: &[u8]) -> Option<ParsedFile> {
        read(
            recipe,
            std::path::Path::new("d.csv"),
            bytes,
            &wanted(recipe),
            3,
        )
    }

    #[test]
    fn a_large_plain_file_is_read_directly_as_the_grid_reads_it() {
        // Several pieces, blank lines in some of them, CRLF line ends, a units row.
        let mut text = String::from("\n t , y \r\n[s],(mV)\n");
        for i in 0..300_000 {
            text.push_str(&format!("{}.{:03},-{}e-3\r\n", i / 7, i % 1000, i % 977));
            if i % 50_000 == 7 {
                text.push_str(" , \n\n");
            }
        }
        let r = recipe("units_row = true", "{ x = \"t\", y = \"y\" }");
        let fast = direct(&r, text.as_bytes()).expect("a plain file");
        let grid = by_grid(&r, text.as_bytes()).expect("a valid file");
        assert_eq!(fast.origins.len(), 300_000);
        assert_eq!(fast.origins.first().map(|o| o.line), Some(4));
        assert_eq!(summary(&fast), summary(&grid));
        assert_eq!(
            fast.chosen.units,
            [Some("s".to_string()), Some("mV".to_string())]
        );
        // One cell that is not a plain number: the grid path reads the file.
        let bad = text.replacen("5.005", "5.0x5", 1);
        assert!(direct(&r, bad.as_bytes()).is_none());
        let quoted = text.replacen("5.005", "\"5.005\"", 1);
        assert!(direct(&r, quoted.as_bytes()).is_none());
    }

    #[test]
    fn files_outside_the_plain_case_are_left_to_the_grid() {
        let r = recipe("", "{ x = \"t\", y = \"y\" }");
        for text in [
            "\u{feff}t,y\n1,2\n",
            "t,y\n1,2\0\n",
            "t,y\n1,nan\n",
            "t,y\n1\n",
            "t,t\n1,2\n",
            "t,y\n",
            "",
            "t,y\n1,2\r3,4\n",
        ] {
            assert!(direct(&r, text.as_bytes()).is_none(), "{text:?}");
        }
        assert!(direct(&r, b"t,y\n1,\xFF\n").is_none());
        assert!(
            direct(
                &recipe("skip_rows = 1", "{ x = \"t\", y = \"y\" }"),
                b"#\nt,y\n1,2\n"
            )
            .is_none()
        );
        assert!(direct(&r, b"t,y\n1,2\n").is_some());
    }

    proptest::proptest! {
        #![proptest_config(proptest::prelude::ProptestConfig { cases: 3_000, rng_seed: proptest::test_runner::RngSeed::Fixed(20_261_210), ..proptest::prelude::ProptestConfig::default() })]

        /// Whenever the direct read gives rows, the grid path gives the same rows, values
        /// (bit for bit), lines, names and units. Rows of plain numbers, blank lines, and in
        /// about half the cases one cell or line end that is not plain.
        #[test]
        fn the_direct_read_agrees_with_the_grid_path(
            rows in proptest::collection::vec(
                (
                    proptest::collection::vec(
                        proptest::sample::select(vec!["1", "-2.5", " 3 ", "7e-3", "0", ".5", "+4.", "25", "-0", "3.25", "1e5", "0.125"]),
                        2..4,
                    ),
                    proptest::sample::select(vec!["\n", "\n", "\r\n"]),
                    proptest::sample::select(vec!["", "", "", "", "", "\n", " , \n", "\t\n", "\u{a0}\n"]),
                ),
                0..12,
            ),
            defect in proptest::option::of((
                0usize..200,
                proptest::sample::select(vec!["x", "", "nan", "12,5", "\"2\"", "1e400", "\u{a0}", "\r", "\0", "1;2", "\n1"]),
            )),
            header in proptest::sample::select(vec!["a,b\n", "a;b\n", "\n a , b \n", "b,a,c\n", "a,b", "a,a\n"]),
            data in proptest::sample::select(vec!["", "", "header = false", "units_row = true", "decimal = \",\"", "delimiter = \";\""]),
        ) {
            let d = if data.contains("decimal") || data.contains("delimiter") { ";" } else { "," };
            let mut body: String = rows
                .iter()
                .map(|(cells, end, blank)| format!("{blank}{}{end}", cells.join(d)))
                .collect();
            if let Some((at, noise)) = defect {
                let at = body.char_indices().map(|(i, _)| i).nth(at % (body.chars().count() + 1)).unwrap_or(body.len());
                body.insert_str(at, noise);
            }
            let text = if data == "header = false" { body } else { format!("{header}{body}") };
            let columns = if data == "header = false" { "{ x = 1, y = 2 }" } else { "{ x = \"a\", y = \"b\" }" };
            let r = recipe(data, columns);
            if let Some(fast) = direct(&r, text.as_bytes()) {
                let grid = by_grid(&r, text.as_bytes());
                proptest::prop_assert!(grid.is_some(), "{:?}", text);
                if let Some(grid) = grid {
                    proptest::prop_assert_eq!(summary(&fast), summary(&grid), "{:?}", text);
                    proptest::prop_assert!(grid.skipped.is_empty() && grid.rejected.is_empty());
                }
            }
        }
    }
}
