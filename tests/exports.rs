//! Real instrument exports (SPEC §15): workbooks, encodings, marker lines, units rows,
//! thousands separators, pinned files, channels and replicate groups.
//!
//! The fixtures under `tests/fixtures/exports/` were written by openpyxl, XlsxWriter, odfpy
//! and the Python codecs (`python3 scripts/make_export_fixtures.py`); `expected.json` holds
//! the values the script wrote and `SHA256SUMS` the digests Python's hashlib computed, so
//! these tests compare what fitwright reads with what those libraries wrote.

mod util;

use std::path::PathBuf;

use fitwright::data::{self, Dataset};
use util::{Case, repo_root};

fn fixture_path(name: &str) -> PathBuf {
    repo_root().join("tests/fixtures/exports").join(name)
}

fn fixture(name: &str) -> Vec<u8> {
    std::fs::read(fixture_path(name)).expect("fixture file (scripts/make_export_fixtures.py)")
}

/// A column of `expected.json`.
fn expected(key: &str) -> Vec<f64> {
    let text = std::fs::read_to_string(fixture_path("expected.json")).expect("expected.json");
    let v: serde_json::Value = serde_json::from_str(&text).expect("expected.json is JSON");
    v[key]
        .as_array()
        .expect("an array")
        .iter()
        .map(|x| x.as_f64().expect("a number"))
        .collect()
}

/// The hashlib digest of a fixture, from `SHA256SUMS`.
fn hashlib_sha256(name: &str) -> String {
    let sums = std::fs::read_to_string(fixture_path("SHA256SUMS")).expect("SHA256SUMS");
    sums.lines()
        .find_map(|l| l.strip_suffix(name).map(|h| h.trim().to_string()))
        .expect("fixture listed in SHA256SUMS")
}

/// A recipe whose `[data]` holds `data` (from line 3 on) and `columns`.
fn recipe(data: &str, columns: &str) -> String {
    format!(
        "name = \"export-t1\"\n[data]\n{data}\ncolumns = {columns}\n\n[model]\nequation = \"R = a + b * T\"\n[model.parameters]\na = {{ start = 1 }}\nb = {{ start = 1 }}\n"
    )
}

const TR: &str = "{ T = \"setpoint_c\", R = \"reading_ohm\" }";

/// A case folder with the recipe and copies of fixtures (under their own names).
fn case(recipe_text: &str, fixtures: &[&str]) -> Case {
    let c = Case::new();
    c.file("r.toml", recipe_text);
    for f in fixtures {
        c.bytes(f, &fixture(f));
    }
    c
}

fn check_ok(c: &Case, fragments: &[&str]) {
    c.run(&["check", "r.toml"])
        .expect_code(0)
        .expect_contains(fragments);
}

fn check_fails(c: &Case, fragments: &[&str]) {
    c.run(&["check", "r.toml"])
        .expect_code(2)
        .expect_contains(fragments);
}

/// Load the recipe's mapped columns through the library.
fn load(c: &Case) -> Dataset {
    let r = fitwright::recipe::load(&c.path("r.toml")).expect("valid recipe");
    data::load(&r, &data::mapped_columns(&r)).unwrap_or_else(|e| panic!("data load failed:\n{e}"))
}

fn assert_close(got: &[f64], want: &[f64], tol: f64) {
    assert_eq!(got.len(), want.len(), "{got:?} vs {want:?}");
    for (g, w) in got.iter().zip(want) {
        assert!(
            (g - w).abs() <= tol * w.abs().max(1.0),
            "{got:?} vs {want:?}"
        );
    }
}

// ---------------------------------------------------------------- workbooks

#[test]
fn xlsx_first_sheet_is_read_by_default() {
    let c = case(&recipe("files = [\"run3.xlsx\"]", TR), &["run3.xlsx"]);
    check_ok(&c, &["export-t1: 8 rows from 1 file"]);
    let ds = load(&c);
    assert_eq!(ds.column("T"), Some(&expected("setpoint_c")[..]));
    assert_eq!(ds.column("R"), Some(&expected("reading_ohm")[..]));
    assert_eq!(ds.files[0].sheet.as_deref(), Some("Plain"));
    let row = ds.describe_row(0);
    assert!(
        row.starts_with("row 2 of ") && row.ends_with("run3.xlsx (sheet \"Plain\")"),
        "{row}"
    );
}

#[test]
fn xlsx_sheet_and_range_skip_a_preamble_and_read_dates_as_serial_days() {
    let c = case(
        &recipe(
            "files = [\"run3.xlsx\"]\nsheet = \"Run 3\"\nrange = \"A5:D13\"",
            "{ T = \"setpoint_c\", R = \"reading_ohm\", t = \"logged_at\" }",
        ),
        &["run3.xlsx"],
    );
    check_ok(&c, &["8 rows from 1 file"]);
    let ds = load(&c);
    assert_eq!(ds.column("R"), Some(&expected("reading_ohm")[..]));
    // Serial days of the 1900 date system, as computed by Python's datetime in the script.
    assert_close(
        ds.column("t").expect("t"),
        &expected("logged_at_serial"),
        1e-12,
    );
    assert_eq!(ds.origins[0].line, 6);
}

#[test]
fn xlsx_header_after_a_marker_row() {
    let c = case(
        &recipe(
            "files = [\"run3.xlsx\"]\nsheet = \"Run 3\"\nrange = \"A1:D13\"\nheader_after = \"Data:\"",
            TR,
        ),
        &["run3.xlsx"],
    );
    check_ok(&c, &["8 rows from 1 file"]);
}

#[test]
fn text_below_the_table_is_named_when_the_range_takes_the_whole_sheet() {
    let c = case(
        &recipe(
            "files = [\"run3.xlsx\"]\nsheet = \"Run 3\"\nheader_after = \"Data:\"",
            TR,
        ),
        &["run3.xlsx"],
    );
    check_fails(
        &c,
        &[
            "run3.xlsx: text `Checked by: —` in column `setpoint_c` is not a number",
            "sheet \"Run 3\", cell A15",
        ],
    );
}

#[test]
fn xlsx_formula_results_are_read_as_values() {
    let c = case(
        &recipe(
            "files = [\"formulas.xlsx\"]",
            "{ T = \"setpoint_c\", R = \"reading_kohm\" }",
        ),
        &["formulas.xlsx"],
    );
    let ds = load(&c);
    assert_close(ds.column("R").expect("R"), &expected("reading_kohm"), 1e-15);
}

#[test]
fn formula_without_a_stored_result_is_named() {
    let c = case(
        &recipe(
            "files = [\"nocache.xlsx\"]",
            "{ T = \"setpoint_c\", R = \"reading_kohm\" }",
        ),
        &["nocache.xlsx"],
    );
    check_fails(
        &c,
        &[
            "nocache.xlsx: empty cell in column `reading_kohm`",
            "sheet \"Calc\", cell C2",
            "formula `=B2/1000` but no stored result",
        ],
    );
}

#[test]
fn wrong_sheet_lists_the_sheets_with_a_did_you_mean() {
    let c = case(
        &recipe("files = [\"run3.xlsx\"]\nsheet = \"run 3\"", TR),
        &["run3.xlsx"],
    );
    check_fails(
        &c,
        &[
            "r.toml:4:9",
            "`run3.xlsx` has no sheet \"run 3\"",
            "its sheets are \"Plain\", \"Run 3\", \"Error cell\", \"Text cell\"",
            "did you mean `Run 3`?",
        ],
    );
}

#[test]
fn range_outside_the_sheet_is_an_error_at_the_key() {
    let c = case(
        &recipe("files = [\"run3.xlsx\"]\nrange = \"H50:J60\"", TR),
        &["run3.xlsx"],
    );
    check_fails(
        &c,
        &[
            "r.toml:4:9",
            "`range = \"H50:J60\"` lies outside the cells of sheet \"Plain\"",
            "the sheet's cells span A1:B9",
        ],
    );
}

#[test]
fn malformed_range_is_a_recipe_error() {
    let c = case(
        &recipe("files = [\"run3.xlsx\"]\nrange = \"A5-D40\"", TR),
        &["run3.xlsx"],
    );
    check_fails(&c, &["r.toml:4:9", "is not a cell range", "A5:D40"]);
}

#[test]
fn error_cell_names_file_sheet_cell_and_value() {
    let c = case(
        &recipe("files = [\"run3.xlsx\"]\nsheet = \"Error cell\"", TR),
        &["run3.xlsx"],
    );
    check_fails(
        &c,
        &[
            "error: run3.xlsx: error value `#DIV/0!` in column `reading_ohm`",
            "sheet \"Error cell\", cell B4",
        ],
    );
}

#[test]
fn text_cell_in_a_numeric_column_names_cell_and_value() {
    let c = case(
        &recipe("files = [\"run3.xlsx\"]\nsheet = \"Text cell\"", TR),
        &["run3.xlsx"],
    );
    check_fails(
        &c,
        &[
            "run3.xlsx: text `OVL` in column `reading_ohm` is not a number",
            "sheet \"Text cell\", cell B7",
        ],
    );
}

#[test]
fn number_stored_as_text_gets_its_own_hint() {
    let c = case(
        &recipe(
            "files = [\"run3.xlsx\"]\nsheet = \"Text cell\"\nrange = \"A8:B9\"\nheader = false",
            "{ T = 1, R = 2 }",
        ),
        &["run3.xlsx"],
    );
    check_fails(
        &c,
        &[
            "text `119,4` in column `column 2` is not a number",
            "cell B8",
            "a number stored as text",
        ],
    );
}

#[test]
fn ods_numbers_dates_and_formula_results() {
    let c = case(
        &recipe(
            "files = [\"run3.ods\"]",
            "{ T = \"setpoint_c\", R = \"reading_ohm\", t = \"logged_at\", k = \"reading_kohm\" }",
        ),
        &["run3.ods"],
    );
    check_ok(&c, &["8 rows from 1 file"]);
    let ds = load(&c);
    assert_eq!(ds.column("T"), Some(&expected("setpoint_c")[..]));
    assert_eq!(ds.column("R"), Some(&expected("reading_ohm")[..]));
    // .ods stores ISO dates; they are read on the serial-day scale of .xlsx (to the second).
    assert_close(
        ds.column("t").expect("t"),
        &expected("logged_at_serial"),
        1e-9,
    );
    assert_close(ds.column("k").expect("k"), &expected("reading_kohm"), 1e-15);
}

#[test]
fn ods_error_and_text_cells_are_named() {
    let c = case(
        &recipe("files = [\"run3.ods\"]\nsheet = \"Error cell\"", TR),
        &["run3.ods"],
    );
    check_fails(
        &c,
        &[
            "run3.ods: error value `#DIV/0!`",
            "sheet \"Error cell\", cell B5",
        ],
    );
    let c = case(
        &recipe("files = [\"run3.ods\"]\nsheet = \"Text cell\"", TR),
        &["run3.ods"],
    );
    check_fails(
        &c,
        &["run3.ods: text `n/a` in column `reading_ohm`", "cell B6"],
    );
}

#[test]
fn workbook_keys_on_a_text_file_are_errors_at_the_key() {
    let c = case(
        &recipe("files = [\"mixed-decimal.csv\"]\nrange = \"A1:B9\"", TR),
        &["mixed-decimal.csv"],
    );
    check_fails(
        &c,
        &[
            "r.toml:4:1",
            "`range` does not apply to `mixed-decimal.csv`, a text file",
        ],
    );
}

#[test]
fn text_keys_on_a_workbook_are_errors_at_the_key() {
    let c = case(
        &recipe("files = [\"run3.xlsx\"]\ndecimal = \",\"", TR),
        &["run3.xlsx"],
    );
    check_fails(
        &c,
        &[
            "r.toml:4:1",
            "`decimal` does not apply to `run3.xlsx`, a workbook",
        ],
    );
    // With an explicit format the recipe check finds it before any file is read.
    let c = case(
        &recipe(
            "files = [\"missing.bin\"]\nformat = \"xlsx\"\nencoding = \"latin1\"",
            TR,
        ),
        &[],
    );
    check_fails(
        &c,
        &[
            "r.toml:5:1",
            "`encoding` does not apply to `format = \"xlsx\"`",
        ],
    );
}

#[test]
fn a_text_file_is_not_a_workbook() {
    let c = Case::new();
    c.file("r.toml", &recipe("files = [\"d.xlsx\"]", TR))
        .file("d.xlsx", "setpoint_c,reading_ohm\n1,2\n");
    check_fails(&c, &["d.xlsx", "cannot be read as an .xlsx workbook"]);
}

// ---------------------------------------------------------------- numbers

#[test]
fn mixed_decimal_separators_are_an_error_at_the_cell() {
    let c = case(
        &recipe("files = [\"mixed-decimal.csv\"]\ndecimal = \",\"", TR),
        &["mixed-decimal.csv"],
    );
    check_fails(
        &c,
        &[
            "mixed-decimal.csv:5:4",
            "`115.5408` in column `reading_ohm` is not a number",
            "unless `thousands = \".\"`",
        ],
    );
}

#[test]
fn thousands_separators_are_removed() {
    let c = case(
        &recipe(
            "files = [\"thousands.csv\"]\ndecimal = \",\"\nthousands = \".\"",
            "{ T = \"setpoint_c\", R = \"reading_mohm\" }",
        ),
        &["thousands.csv"],
    );
    check_ok(&c, &["8 rows"]);
    assert_close(
        load(&c).column("R").expect("R"),
        &expected("reading_mohm"),
        1e-15,
    );
}

#[test]
fn thousands_equal_to_the_decimal_mark_is_a_recipe_error() {
    let c = case(
        &recipe(
            "files = [\"thousands.csv\"]\ndecimal = \",\"\nthousands = \",\"",
            TR,
        ),
        &["thousands.csv"],
    );
    check_fails(
        &c,
        &[
            "r.toml:5:13",
            "`thousands = \",\"` is also the decimal separator",
        ],
    );
}

// ---------------------------------------------------------------- encodings

const LEGACY: &str = "files = [\"legacy-1252.csv\"]\nencoding = \"windows-1252\"\ndecimal = \",\"\nheader_after = \"Data:\"\nunits_row = true";

#[test]
fn windows_1252_export_with_preamble_and_units_row() {
    let c = case(
        &recipe(LEGACY, "{ T = \"setpoint\", R = \"reading\" }"),
        &["legacy-1252.csv"],
    );
    check_ok(&c, &["8 rows from 1 file"]);
    let ds = load(&c);
    assert_eq!(ds.column("T"), Some(&expected("setpoint_c")[..]));
    assert_eq!(ds.column("R"), Some(&expected("reading_ohm")[..]));
    assert_eq!(ds.file_units.get("T").map(String::as_str), Some("°C"));
    assert_eq!(ds.file_units.get("R").map(String::as_str), Some("Ohm"));
    // Line numbers are those of the file: preamble (4 lines), header, units, then data.
    assert_eq!(ds.origins[0].line, 7);
}

#[test]
fn recipe_units_win_over_the_units_row() {
    let c = case(
        &recipe(
            &format!("{LEGACY}\nunits = {{ R = \"Ω\" }}"),
            "{ T = \"setpoint\", R = \"reading\" }",
        ),
        &["legacy-1252.csv"],
    );
    let r = fitwright::recipe::load(&c.path("r.toml")).expect("valid recipe");
    let ds = load(&c);
    assert_eq!(ds.unit(&r.data.units, "R"), "Ω");
    assert_eq!(ds.unit(&r.data.units, "T"), "°C");
}

#[test]
fn windows_1252_without_encoding_is_refused_with_a_hint() {
    let c = case(
        &recipe(
            "files = [\"legacy-1252.csv\"]\ndecimal = \",\"\nheader_after = \"Data:\"",
            "{ T = \"setpoint\", R = \"reading\" }",
        ),
        &["legacy-1252.csv"],
    );
    // Line 2, "Probe: PX-4, 100 Ohm at 0 °C": the ° byte is the 27th character.
    check_fails(
        &c,
        &[
            "legacy-1252.csv:2:27",
            "not valid UTF-8",
            "encoding = \"windows-1252\"",
        ],
    );
}

#[test]
fn windows_1253_export_has_omega() {
    let c = case(
        &recipe(
            "files = [\"legacy-1253.csv\"]\nencoding = \"windows-1253\"\ndecimal = \",\"\nheader_after = \"Data:\"\nunits_row = true",
            "{ T = \"setpoint\", R = \"reading\" }",
        ),
        &["legacy-1253.csv"],
    );
    let ds = load(&c);
    assert_eq!(ds.file_units.get("R").map(String::as_str), Some("Ω"));
    assert_eq!(ds.column("R"), Some(&expected("reading_ohm")[..]));
}

#[test]
fn utf16_files_with_a_bom_are_read() {
    for (file, fmt) in [("utf16le.csv", ""), ("utf16be.tsv", "")] {
        let c = case(
            &recipe(&format!("files = [\"{file}\"]{fmt}\nunits_row = true"), TR),
            &[file],
        );
        check_ok(&c, &["8 rows from 1 file"]);
        let ds = load(&c);
        assert_eq!(ds.column("R"), Some(&expected("reading_ohm")[..]), "{file}");
        assert_eq!(ds.file_units.get("R").map(String::as_str), Some("Ω"));
        assert_eq!(ds.file_units.get("T").map(String::as_str), Some("°C"));
    }
}

#[test]
fn unknown_encoding_label_gets_a_hint() {
    let c = case(
        &recipe(
            "files = [\"legacy-1252.csv\"]\nencoding = \"windows-1252x\"",
            TR,
        ),
        &["legacy-1252.csv"],
    );
    check_fails(
        &c,
        &[
            "r.toml:4:12",
            "is not a known text encoding",
            "did you mean `windows-1252`?",
        ],
    );
}

// ---------------------------------------------------------------- marker and units rows

#[test]
fn missing_marker_names_file_and_marker() {
    let c = case(
        &recipe(
            "files = [\"legacy-1252.csv\"]\nencoding = \"latin1\"\nheader_after = \"Messwerte:\"",
            TR,
        ),
        &["legacy-1252.csv"],
    );
    check_fails(
        &c,
        &["legacy-1252.csv: the marker `Messwerte:` of `header_after` is not in the data file"],
    );
}

#[test]
fn header_after_and_skip_rows_conflict() {
    let c = case(
        &recipe(
            "files = [\"legacy-1252.csv\"]\nskip_rows = 4\nheader_after = \"Data:\"",
            TR,
        ),
        &["legacy-1252.csv"],
    );
    check_fails(
        &c,
        &[
            "r.toml:4:13",
            "`skip_rows` and `header_after` cannot be used together",
        ],
    );
}

#[test]
fn units_row_needs_a_header() {
    let c = case(
        &recipe(
            "files = [\"utf16le.csv\"]\nheader = false\nunits_row = true",
            "{ T = 1, R = 2 }",
        ),
        &["utf16le.csv"],
    );
    check_fails(
        &c,
        &["r.toml:5:13", "`units_row = true` needs a header row"],
    );
}

#[test]
fn files_with_different_units_are_refused() {
    let c = Case::new();
    c.file(
        "r.toml",
        &recipe("files = [\"a*.csv\"]\nunits_row = true", TR),
    )
    .file("a1.csv", "setpoint_c,reading_ohm\n°C,Ω\n0,100\n10,103.9\n")
    .file(
        "a2.csv",
        "setpoint_c,reading_ohm\nK,Ω\n273.15,100\n283.15,103.9\n",
    );
    check_fails(
        &c,
        &[
            "a2.csv:2:1",
            "the units row gives `setpoint_c` in K, but `a1.csv` gives °C",
        ],
    );
}

// ---------------------------------------------------------------- pinned files, source

#[test]
fn pinned_workbook_matches_the_hashlib_digest() {
    let sha = hashlib_sha256("run3.xlsx");
    let c = case(
        &recipe(
            &format!("files = [{{ path = \"run3.xlsx\", sha256 = \"{sha}\" }}]"),
            TR,
        ),
        &["run3.xlsx"],
    );
    check_ok(&c, &["8 rows from 1 file"]);
    assert_eq!(load(&c).files[0].sha256, sha);
}

#[test]
fn pinned_workbook_with_a_changed_digest_is_refused() {
    let mut sha = hashlib_sha256("run3.xlsx");
    let last = if sha.ends_with('0') { "1" } else { "0" };
    sha.replace_range(63.., last);
    let c = case(
        &recipe(
            &format!("files = [{{ path = \"run3.xlsx\", sha256 = \"{sha}\" }}]"),
            TR,
        ),
        &["run3.xlsx"],
    );
    check_fails(
        &c,
        &[
            "r.toml:3:10",
            "data file `run3.xlsx` does not match its pinned SHA-256",
            &format!("pinned {sha}"),
        ],
    );
}

#[test]
fn each_row_knows_its_source_file() {
    let c = Case::new();
    c.file("r.toml", &recipe("files = [\"b*.csv\"]", TR))
        .file("b10.csv", "setpoint_c,reading_ohm\n20,107.8\n")
        .file("b2.csv", "setpoint_c,reading_ohm\n0,100\n10,103.9\n");
    let ds = load(&c);
    let sources: Vec<_> = (0..ds.len()).map(|i| ds.source_name(i)).collect();
    assert_eq!(sources, [Some("b2.csv"), Some("b2.csv"), Some("b10.csv")]);
}

// ---------------------------------------------------------------- channels

const CHANNELS: &str = "files = [\"channels.xlsx\"]\nby = \"channel\"";

#[test]
fn check_reports_each_channel_and_a_bad_one_does_not_stop_the_others() {
    let c = case(&recipe(CHANNELS, TR), &["channels.xlsx"]);
    let out = c.run(&["check", "r.toml"]);
    out.expect_code(2).expect_contains(&[
        "export-t1: 3 channels from 1 file, 1 invalid",
        "channel CH1: ok, 4 rows from 1 file",
        "channel CH2: invalid",
        "channel CH10: ok, 4 rows from 1 file",
        "channels.xlsx: text `OVL` in column `reading_ohm`",
        "sheet \"Export\", cell C9",
        "in channel `CH2` of `by`",
    ]);
    // Natural order: CH2 before CH10.
    let pos = |s: &str| out.stdout.find(s).expect("listed");
    assert!(
        pos("channel CH1:") < pos("channel CH2:") && pos("channel CH2:") < pos("channel CH10:")
    );
}

#[test]
fn split_by_gives_each_channel_its_rows() {
    let c = case(&recipe(CHANNELS, TR), &["channels.xlsx"]);
    let r = fitwright::recipe::load(&c.path("r.toml")).expect("valid recipe");
    let ds = data::load_lenient(&r, &data::mapped_columns(&r)).expect("file-level valid");
    let split = data::split_by(&ds);
    let names: Vec<&str> = split.iter().map(|c| c.value.as_str()).collect();
    assert_eq!(names, ["CH1", "CH2", "CH10"]);
    let ch10 = split[2].data.as_ref().expect("CH10 is valid");
    assert_eq!(ch10.column("T"), Some(&[-20.0, 0.0, 20.0, 40.0][..]));
    // CH10 is the first of each block of three rows, from row 2.
    assert_eq!(
        ch10.origins.iter().map(|o| o.line).collect::<Vec<_>>(),
        [2, 5, 8, 11]
    );
    assert!(split[1].data.is_err());
    // Strict loading stops at the first bad cell instead.
    assert!(data::load(&r, &data::mapped_columns(&r)).is_err());
}

#[test]
fn a_missing_by_column_gets_a_did_you_mean() {
    let c = case(
        &recipe("files = [\"channels.xlsx\"]\nby = \"Channel\"", TR),
        &["channels.xlsx"],
    );
    check_fails(
        &c,
        &[
            "r.toml:4:6",
            "column `Channel` for `by` is not in the header",
            "did you mean `channel`?",
        ],
    );
}

#[test]
fn a_row_without_a_channel_is_an_error_for_the_file() {
    let c = Case::new();
    c.file("r.toml", &recipe("files = [\"d.csv\"]\nby = \"probe\"", TR))
        .file(
            "d.csv",
            "probe,setpoint_c,reading_ohm\n7,0,100\n7,10,103.9\n,20,107.8\n12,0,100.1\n12,10,104\n",
        );
    check_fails(&c, &["d.csv:4:1", "empty cell in column `probe`"]);
}

#[test]
fn numeric_channel_ids_are_channels_too() {
    let c = Case::new();
    c.file("r.toml", &recipe("files = [\"d.csv\"]\nby = 1", TR))
        .file(
            "d.csv",
            "probe,setpoint_c,reading_ohm\n12,0,100.1\n7,0,100\n7,10,103.9\n12,10,104\n7,20,107.8\n12,20,107.9\n",
        );
    check_ok(
        &c,
        &[
            "2 channels from 1 file",
            "channel 7: ok, 3 rows",
            "channel 12: ok, 3 rows",
        ],
    );
}

// ---------------------------------------------------------------- replicate groups

#[test]
fn text_group_labels_are_loaded_and_averaged() {
    let c = Case::new();
    c.file(
        "r.toml",
        &format!(
            "{}\n[fit]\ngroups = \"point\"\n",
            recipe("files = [\"d.csv\"]", TR)
        ),
    )
    .file(
        "d.csv",
        "point,setpoint_c,reading_ohm\nlow,0,100.0\nlow,0,100.2\nmid,50,119.4\nmid,50,119.6\nmid,50,119.5\n",
    );
    check_ok(&c, &["5 rows from 1 file"]);
    let ds = load(&c);
    let groups = ds.groups.clone().expect("groups loaded");
    assert_eq!(groups, ["low", "low", "mid", "mid", "mid"]);
    let avg = data::average_replicates(&ds, &groups, None).expect("averaged");
    // By hand: (100.0 + 100.2)/2 = 100.1; (119.4 + 119.6 + 119.5)/3 = 119.5.
    assert_close(avg.data.column("R").expect("R"), &[100.1, 119.5], 1e-14);
    assert_eq!(avg.weights, [2.0, 3.0]);
}

#[test]
fn numeric_group_labels_compare_by_value() {
    let c = Case::new();
    c.file(
        "r.toml",
        &format!(
            "{}\n[fit]\ngroups = \"T\"\n",
            recipe("files = [\"d.csv\"]", TR)
        ),
    )
    .file(
        "d.csv",
        "setpoint_c,reading_ohm\n20,107.8\n20.0,107.9\n2e1,107.7\n40,115.5\n",
    );
    let ds = load(&c);
    assert_eq!(
        ds.groups.as_deref(),
        Some(&["20", "20", "20", "40"].map(String::from)[..])
    );
}

#[test]
fn a_missing_groups_column_is_named_at_the_key() {
    let c = Case::new();
    c.file(
        "r.toml",
        &format!(
            "{}\n[fit]\ngroups = \"setpiont\"\n",
            recipe("files = [\"d.csv\"]", TR)
        ),
    )
    .file(
        "d.csv",
        "setpoint,setpoint_c,reading_ohm\n1,0,100\n1,0,100.1\n",
    );
    check_fails(
        &c,
        &[
            "r.toml:13:10",
            "column `setpiont` for `groups` is not in the header",
            "did you mean `setpoint`?",
        ],
    );
}

// ---------------------------------------------------------------- demo data

#[test]
fn demo_logger_export_gives_sixteen_channels_with_ch07_invalid() {
    let xlsx = repo_root().join("demo-data/logger/tl16-bath-2026-11-27.xlsx");
    let c = Case::new();
    c.file(
        "r.toml",
        &recipe(
            &format!(
                "files = [{:?}]\nsheet = \"Export\"\nby = \"channel\"",
                xlsx.display().to_string()
            ),
            "{ T = \"bath_c\", R = \"reading_ohm\" }",
        ),
    );
    let out = c.run(&["check", "r.toml"]);
    out.expect_code(2).expect_contains(&[
        "16 channels from 1 file, 1 invalid",
        "channel CH07: invalid",
        "text `OVL` in column `reading_ohm`",
        "in channel `CH07` of `by`",
    ]);
    // Seven set points, three replicates: 21 rows for every other channel.
    assert_eq!(out.stdout.matches(": ok, 21 rows from 1 file").count(), 15);
}

#[test]
fn demo_windows_1252_recipe_reads_its_units_row() {
    let path = repo_root().join("recipes/probe-th-b3.toml");
    let r = fitwright::recipe::load(&path).expect("valid demo recipe");
    let ds = data::load(&r, &data::mapped_columns(&r)).expect("demo data load");
    assert_eq!(ds.len(), 21);
    assert_eq!(ds.unit(&r.data.units, "T"), "°C");
    assert_eq!(ds.unit(&r.data.units, "R"), "kOhm");
    // The first data line follows a 7-line preamble, the header and the units row.
    assert_eq!(ds.origins[0].line, 10);
}

// ---------------------------------------------------------------- recipe keys

#[test]
fn new_data_keys_are_type_checked_and_misspellings_suggested() {
    let c = case(
        &recipe("files = [\"utf16le.csv\"]\nheader_afer = \"Data:\"", TR),
        &["utf16le.csv"],
    );
    check_fails(
        &c,
        &[
            "r.toml:4:1",
            "unknown key `header_afer` in [data]",
            "did you mean `header_after`?",
        ],
    );
    let c = case(
        &recipe("files = [\"utf16le.csv\"]\nunits_row = \"yes\"", TR),
        &["utf16le.csv"],
    );
    check_fails(
        &c,
        &["r.toml:4:13", "must be true or false, found a string"],
    );
    let c = case(
        &recipe("files = [\"utf16le.csv\"]\nby = true", TR),
        &["utf16le.csv"],
    );
    check_fails(
        &c,
        &[
            "r.toml:4:6",
            "column of `by` must be a header name or a 1-based position",
        ],
    );
    let c = case(
        &recipe("files = [\"utf16le.csv\"]\nthousands = \"_\"", TR),
        &["utf16le.csv"],
    );
    check_fails(
        &c,
        &["r.toml:4:13", "`thousands` in [data] cannot be \"_\""],
    );
    let c = case(
        &recipe("files = [\"utf16le.csv\"]\nformat = \"xls\"", TR),
        &["utf16le.csv"],
    );
    check_fails(&c, &["r.toml:4:10", "did you mean `xlsx`?"]);
}
