//! `fitwright check` on broken recipes and data: every case exits 2, names the file, line
//! and column, says what is wrong, and never panics.

mod util;
use util::Case;

/// A valid recipe over `d.csv`; tests replace parts of it.
const RECIPE: &str = r#"name = "probe-t1"
title = "Test probe"

[data]
files = ["d.csv"]
columns = { T = "temp_c", R = "resistance_ohm" }

[model]
equation = "R = a * exp(b * T)"
[model.parameters]
a = { start = 1 }
b = { start = 0.1 }

[fit]
confidence = 0.95
"#;

const DATA: &str = "temp_c,resistance_ohm\n0,10.0\n10,12.1\n20,14.9\n30,18.2\n";

fn case(recipe: &str, data: &str) -> Case {
    let c = Case::new();
    c.file("r.toml", recipe).file("d.csv", data);
    c
}

fn check_fails(c: &Case, fragments: &[&str]) {
    c.run(&["check", "r.toml"])
        .expect_code(2)
        .expect_contains(fragments);
}

#[test]
fn valid_recipe_passes() {
    case(RECIPE, DATA)
        .run(&["check", "r.toml"])
        .expect_code(0)
        .expect_contains(&["ok", "probe-t1: 4 rows from 1 file"]);
}

#[test]
fn unknown_key_gets_a_did_you_mean() {
    let r = RECIPE.replace("confidence = 0.95", "confidense = 0.95");
    check_fails(
        &case(&r, DATA),
        &[
            "r.toml:15:1",
            "unknown key `confidense` in [fit]",
            "did you mean `confidence`?",
        ],
    );
}

#[test]
fn unknown_top_level_section_is_named() {
    let r = format!("{RECIPE}\n[reprot]\nformats = [\"html\"]\n");
    check_fails(
        &case(&r, DATA),
        &[
            "r.toml:17:2",
            "unknown key `reprot`",
            "did you mean `report`?",
        ],
    );
}

#[test]
fn unknown_key_in_parameter_table() {
    let r = RECIPE.replace("a = { start = 1 }", "a = { strat = 1 }");
    check_fails(
        &case(&r, DATA),
        &[
            "r.toml:11:7",
            "unknown key `strat` in [model.parameters.a]",
            "did you mean `start`?",
        ],
    );
}

#[test]
fn wrong_type_is_named_with_expected_type() {
    let r = RECIPE.replace("confidence = 0.95", "confidence = \"high\"");
    check_fails(
        &case(&r, DATA),
        &[
            "r.toml:15:14",
            "`confidence` in [fit] must be a number, found a string",
        ],
    );
}

#[test]
fn confidence_outside_open_unit_interval() {
    let r = RECIPE.replace("confidence = 0.95", "confidence = 1.0");
    check_fails(
        &case(&r, DATA),
        &["r.toml:15:14", "strictly between 0 and 1"],
    );
}

#[test]
fn start_below_min_is_refused() {
    let r = RECIPE.replace("a = { start = 1 }", "a = { start = 1, min = 2 }");
    check_fails(
        &case(&r, DATA),
        &["r.toml:11:15", "start of `a` is below its `min`"],
    );
}

#[test]
fn bad_name_pattern() {
    let r = RECIPE.replace("name = \"probe-t1\"", "name = \"Probe T1\"");
    check_fails(
        &case(&r, DATA),
        &[
            "r.toml:1:8",
            "the name `Probe T1` is not allowed",
            "lower-case",
        ],
    );
}

#[test]
fn unknown_report_format() {
    let r = format!("{RECIPE}\n[report]\nformats = [\"html\", \"pdf\"]\n");
    check_fails(
        &case(&r, DATA),
        &[
            "r.toml:18:20",
            "`formats` in [report] cannot be \"pdf\"",
            "html, md, json",
        ],
    );
}

#[test]
fn unknown_method_gets_suggestion() {
    let r = RECIPE.replace("confidence = 0.95", "method = \"nonlinaer\"");
    check_fails(
        &case(&r, DATA),
        &["r.toml:15:10", "did you mean `nonlinear`?"],
    );
}

#[test]
fn equation_and_preset_together() {
    let r = RECIPE.replace(
        "[model.parameters]",
        "preset = \"exponential\"\n[model.parameters]",
    );
    check_fails(
        &case(&r, DATA),
        &["r.toml:10:10", "both `equation` and `preset`"],
    );
}

#[test]
fn toml_syntax_error_points_at_the_line() {
    let r = RECIPE.replace("title = \"Test probe\"", "title = \"Test probe");
    check_fails(&case(&r, DATA), &["r.toml:2:", "not valid TOML"]);
}

#[test]
fn missing_data_file() {
    let r = RECIPE.replace("files = [\"d.csv\"]", "files = [\"missing.csv\"]");
    check_fails(
        &case(&r, DATA),
        &["r.toml:5:10", "data file `", "missing.csv` does not exist"],
    );
}

#[test]
fn glob_matching_nothing() {
    let r = RECIPE.replace("files = [\"d.csv\"]", "files = [\"runs/*.csv\"]");
    check_fails(
        &case(&r, DATA),
        &["r.toml:5:10", "`runs/*.csv` matches no file"],
    );
}

#[test]
fn missing_column_suggests_case_mismatch() {
    let r = RECIPE.replace("T = \"temp_c\"", "T = \"Temp_C\"");
    check_fails(
        &case(&r, DATA),
        &[
            "r.toml:6:17",
            "column `Temp_C` for `T` is not in the header",
            "did you mean `temp_c`?",
            "case-sensitive",
        ],
    );
}

#[test]
fn column_index_past_the_end() {
    let r = RECIPE.replace("T = \"temp_c\"", "T = 5");
    check_fails(
        &case(&r, DATA),
        &[
            "r.toml:6:17",
            "column 5 for `T` does not exist",
            "has 2 columns",
        ],
    );
}

#[test]
fn column_index_zero() {
    let r = RECIPE.replace("T = \"temp_c\"", "T = 0");
    check_fails(
        &case(&r, DATA),
        &["r.toml:6:17", "column positions count from 1"],
    );
}

#[test]
fn non_numeric_cell_names_line_and_column() {
    let data = "temp_c,resistance_ohm\n0,10.0\n10,twelve\n20,14.9\n";
    check_fails(
        &case(RECIPE, data),
        &[
            "d.csv:3:4",
            "`twelve` in column `resistance_ohm` is not a number",
        ],
    );
}

#[test]
fn decimal_comma_file_without_decimal_setting() {
    let r = RECIPE.replace(
        "files = [\"d.csv\"]",
        "files = [\"d.csv\"]\ndelimiter = \";\"",
    );
    let data = "temp_c;resistance_ohm\n0;10,0\n10;12,1\n";
    check_fails(
        &case(&r, data),
        &[
            "d.csv:2:3",
            "`10,0` in column `resistance_ohm` is not a number",
            "decimal = \",\"",
        ],
    );
}

#[test]
fn decimal_comma_file_with_decimal_setting_is_valid() {
    let r = RECIPE.replace(
        "files = [\"d.csv\"]",
        "files = [\"d.csv\"]\ndecimal = \",\"",
    );
    let data = "temp_c;resistance_ohm\n0;10,0\n10;12,1\n20;14,9\n";
    case(&r, data)
        .run(&["check", "r.toml"])
        .expect_code(0)
        .expect_contains(&["3 rows"]);
}

#[test]
fn point_in_decimal_comma_file_is_an_error() {
    let r = RECIPE.replace(
        "files = [\"d.csv\"]",
        "files = [\"d.csv\"]\ndecimal = \",\"",
    );
    let data = "temp_c;resistance_ohm\n0;10,0\n10;12.1\n";
    check_fails(
        &case(&r, data),
        &["d.csv:3:4", "`12.1`", "\".\" is not allowed"],
    );
}

#[test]
fn bom_and_crlf_file_is_valid() {
    let c = Case::new();
    c.file("r.toml", RECIPE);
    c.bytes(
        "d.csv",
        b"\xEF\xBB\xBFtemp_c,resistance_ohm\r\n0,10.0\r\n10,12.1\r\n20,14.9\r\n",
    );
    c.run(&["check", "r.toml"])
        .expect_code(0)
        .expect_contains(&["3 rows"]);
}

#[test]
fn empty_file() {
    check_fails(&case(RECIPE, ""), &["d.csv", "the data file has no rows"]);
}

#[test]
fn header_only_file() {
    check_fails(
        &case(RECIPE, "temp_c,resistance_ohm\n"),
        &["d.csv", "a header but no data rows"],
    );
}

#[test]
fn nan_cell_is_an_error_by_default() {
    let data = "temp_c,resistance_ohm\n0,10.0\n10,NaN\n";
    check_fails(
        &case(RECIPE, data),
        &[
            "d.csv:3:4",
            "NaN in column `resistance_ohm`",
            "missing = \"skip\"",
        ],
    );
}

#[test]
fn infinite_cell_is_an_error() {
    let data = "temp_c,resistance_ohm\n0,10.0\n10,inf\n";
    check_fails(
        &case(RECIPE, data),
        &["d.csv:3:4", "infinite value in column `resistance_ohm`"],
    );
}

#[test]
fn empty_cell_is_an_error() {
    let data = "temp_c,resistance_ohm\n0,10.0\n10,\n20,14.9\n";
    check_fails(
        &case(RECIPE, data),
        &["d.csv:3:4", "empty cell in column `resistance_ohm`"],
    );
}

#[test]
fn missing_skip_skips_rows() {
    let r = RECIPE.replace(
        "files = [\"d.csv\"]",
        "files = [\"d.csv\"]\nmissing = \"skip\"",
    );
    let data = "temp_c,resistance_ohm\n0,10.0\n10,\n20,14.9\n30,nan\n40,22.3\n";
    case(&r, data)
        .run(&["check", "r.toml"])
        .expect_code(0)
        .expect_contains(&["3 rows"]);
}

#[test]
fn short_row_is_named() {
    let data = "temp_c,resistance_ohm\n0,10.0\n10\n";
    check_fails(&case(RECIPE, data), &["d.csv:3:3", "line 3 has 1 field"]);
}

#[test]
fn duplicate_header_names() {
    let data = "temp_c,temp_c\n0,10.0\n";
    check_fails(
        &case(RECIPE, data),
        &["d.csv:1:8", "names column `temp_c` twice"],
    );
}

#[test]
fn files_with_different_columns() {
    let r = RECIPE.replace("files = [\"d.csv\"]", "files = [\"d*.csv\"]");
    let c = case(&r, DATA);
    c.file("d2.csv", "temp_c,ohms\n0,1\n");
    check_fails(
        &c,
        &[
            "d2.csv",
            "column `resistance_ohm` for `R` is not in the header",
        ],
    );
}

#[test]
fn glob_files_concatenate_in_natural_order() {
    let r = RECIPE.replace("files = [\"d.csv\"]", "files = [\"runs/m*.csv\"]");
    let c = case(&r, DATA);
    c.file("runs/m2.csv", "temp_c,resistance_ohm\n0,1\n");
    c.file("runs/m10.csv", "temp_c,resistance_ohm\n0,1\n1,2\n");
    c.run(&["check", "r.toml"])
        .expect_code(0)
        .expect_contains(&["3 rows from 2 files"]);
}

#[test]
fn skip_rows_and_comments_keep_line_numbers() {
    let r = RECIPE.replace(
        "files = [\"d.csv\"]",
        "files = [\"d.csv\"]\nskip_rows = 2\ncomment = \"#\"",
    );
    let data = "Bench B2 export\nprobe T1\ntemp_c,resistance_ohm\n# bath settled\n0,10.0\n10,x\n";
    check_fails(&case(&r, data), &["d.csv:6:4", "`x` in column"]);
}

#[test]
fn whitespace_format_by_extension() {
    let r = RECIPE.replace("files = [\"d.csv\"]", "files = [\"d.dat\"]");
    let c = case(&r, DATA);
    c.file(
        "d.dat",
        "temp_c   resistance_ohm\n0   10.0\n10  12.1\n20\t14.9\n",
    );
    c.run(&["check", "r.toml"])
        .expect_code(0)
        .expect_contains(&["3 rows"]);
}

#[test]
fn quoted_fields_follow_rfc_4180() {
    let data = "\"temp_c\",\"resistance_ohm\"\n\"0\",\"10.0\"\n\"10\",\"12.1\"\n\"20\",\"14.9\"\n";
    case(RECIPE, data)
        .run(&["check", "r.toml"])
        .expect_code(0)
        .expect_contains(&["3 rows"]);
}

#[test]
fn pinned_file_hash_mismatch() {
    let r = RECIPE.replace(
        "files = [\"d.csv\"]",
        "files = [{ path = \"d.csv\", sha256 = \"0000000000000000000000000000000000000000000000000000000000000000\" }]",
    );
    check_fails(
        &case(&r, DATA),
        &["r.toml:5:10", "does not match its pinned SHA-256"],
    );
}

#[test]
fn missing_name() {
    let r = RECIPE.replace("name = \"probe-t1\"\n", "");
    check_fails(&case(&r, DATA), &["r.toml", "the recipe has no `name`"]);
}

#[test]
fn missing_recipe_path_is_a_usage_error() {
    Case::new()
        .run(&["check", "nowhere.toml"])
        .expect_code(2)
        .expect_contains(&["`nowhere.toml` does not exist"]);
}

#[test]
fn fixed_parameter_with_start() {
    let r = RECIPE.replace("b = { start = 0.1 }", "b = { fixed = 0.1, start = 0.2 }");
    check_fails(&case(&r, DATA), &["r.toml:12:28", "parameter `b` is fixed"]);
}

#[test]
fn one_bad_recipe_does_not_hide_the_others() {
    let c = case(RECIPE, DATA);
    c.file(
        "r2.toml",
        &RECIPE
            .replace("probe-t1", "probe-t2")
            .replace("d.csv", "nothing.csv"),
    );
    let out = c.run(&["check", "."]);
    out.expect_code(2).expect_contains(&[
        "ok       ./r.toml",
        "invalid  ./r2.toml",
        "r2.toml:5:10",
    ]);
}

#[test]
fn where_filter_removes_rows_and_check_counts_them() {
    let r = RECIPE.replace(
        "files = [\"d.csv\"]",
        "files = [\"d.csv\"]\nwhere = \"T >= 10 && R < 20\"",
    );
    let data = "temp_c,resistance_ohm\n0,10.0\n10,12.1\n20,14.9\n30,18.2\n40,22.3\n";
    case(&r, data)
        .run(&["check", "r.toml"])
        .expect_code(0)
        .expect_contains(&["3 rows from 1 file, 2 filtered out"]);
}

#[test]
fn unknown_name_in_where_points_at_it() {
    let r = RECIPE.replace(
        "files = [\"d.csv\"]",
        "files = [\"d.csv\"]\nwhere = \"t >= 10\"",
    );
    check_fails(
        &case(&r, DATA),
        &["r.toml:6:10", "unknown name `t`", "did you mean `T`?"],
    );
}

#[test]
fn comparison_in_an_equation_is_refused() {
    let r = RECIPE.replace("R = a * exp(b * T)", "R = a * exp(b * T) > 1");
    check_fails(&case(&r, DATA), &["r.toml:9:", "in the equation"]);
}

#[test]
fn unknown_parameter_in_equation_gets_suggestion() {
    let r = RECIPE.replace("R = a * exp(b * T)", "R = a * exp(B * T)");
    check_fails(
        &case(&r, DATA),
        &["r.toml:9:25", "unknown name `B`", "did you mean `b`?"],
    );
}

#[test]
fn declared_parameter_not_used_is_an_error() {
    let r = RECIPE.replace(
        "b = { start = 0.1 }",
        "b = { start = 0.1 }\nc = { start = 1 }",
    );
    check_fails(
        &case(&r, DATA),
        &[
            "r.toml:13:1",
            "parameter `c` is declared but the equation does not use it",
        ],
    );
}

#[test]
fn not_identifiable_model_is_refused_with_the_combination() {
    let r = RECIPE.replace("R = a * exp(b * T)", "R = a * b * exp(T)");
    check_fails(&case(&r, DATA), &["r.toml:9:12", "not identifiable", "a·b"]);
}

#[test]
fn weights_that_are_not_positive_are_refused_with_rows() {
    let r = RECIPE.replace(
        "confidence = 0.95",
        "confidence = 0.95\nweights = \"T - 10\"",
    );
    check_fails(
        &case(&r, DATA),
        &[
            "r.toml:16:11",
            "zero, negative or not finite",
            "lines 2 and 3 of",
        ],
    );
}
