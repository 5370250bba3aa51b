//! The recipe file itself: empty, encodings, control characters, duplicate keys, deep TOML
//! nesting, numbers out of range, names that would escape the report folder.

use super::*;

fn raw_case(bytes: &[u8]) -> Case {
    let c = Case::new();
    c.bytes("r.toml", bytes).file("d.csv", LINE);
    c
}

#[test]
fn empty_recipe_has_no_name() {
    let c = raw_case(b"");
    refused(&c, &["r.toml", "the recipe has no `name`", "help:"]);
}

#[test]
fn recipe_of_comments_and_blank_lines_has_no_name() {
    let c = raw_case(b"# a recipe to be written\n\n   \n# later\n");
    refused(&c, &["r.toml", "the recipe has no `name`"]);
}

#[test]
fn recipe_with_a_utf8_byte_order_mark_runs() {
    let mut bytes = vec![0xef, 0xbb, 0xbf];
    bytes.extend(Recipe::line().text().as_bytes());
    let c = raw_case(&bytes);
    c.run(&["run", "r.toml"])
        .expect_code(0)
        .expect_contains(&["criteria met"]);
    assert_eq!(run_folders(&c.path("out")).len(), 1);
}

#[test]
fn positions_after_a_byte_order_mark_count_from_the_first_character() {
    let text = Recipe::line().fit("confidense = 0.95").text();
    let mut bytes = vec![0xef, 0xbb, 0xbf];
    bytes.extend(text.as_bytes());
    let c = raw_case(&bytes);
    refused(
        &c,
        &[&pos(&text, "confidense", 0), "unknown key `confidense`"],
    );
}

#[test]
fn invalid_utf8_is_located() {
    let text = Recipe::line()
        .text()
        .replace("name = \"hostile\"", "name = \"h\u{1}\"");
    let bytes: Vec<u8> = text
        .bytes()
        .map(|b| if b == 1 { 0xff } else { b })
        .collect();
    let c = raw_case(&bytes);
    refused(
        &c,
        &[
            "r.toml:1:10",
            "the recipe is not valid UTF-8",
            "save the recipe as UTF-8",
        ],
    );
}

#[test]
fn nul_byte_is_a_toml_error_and_is_not_printed_raw() {
    let text = Recipe::line()
        .text()
        .replace("name = \"hostile\"", "name = \"hostile\"\0");
    let c = raw_case(text.as_bytes());
    let out = refused(&c, &["r.toml:1:17", "the recipe is not valid TOML"]);
    assert_printable(&out);
}

#[test]
fn escape_sequences_in_a_key_are_not_sent_to_the_terminal() {
    let text = Recipe::line()
        .fit("\"\\u001b[2J\\u001b]0;pwned\\u0007\" = 1")
        .text();
    let c = raw_case(text.as_bytes());
    let out = refused(
        &c,
        &["unknown key", "in [fit]", &pos(&text, "\"\\u001b", 0)],
    );
    assert_printable(&out);
    assert!(out.stderr.contains("\\u{1b}[2J"), "{}", out.stderr);
}

#[test]
fn duplicate_key_is_a_toml_error_at_the_second_one() {
    let text = Recipe::line()
        .params(&["a = {}", "b = {}", "a = { start = 2 }"])
        .text();
    let c = raw_case(text.as_bytes());
    refused(&c, &[&pos(&text, "a = { start", 0), "duplicate key"]);
}

#[test]
fn duplicate_table_is_a_toml_error() {
    let text = format!("{}[fit]\nconfidence = 0.9\n", Recipe::line().text());
    let c = raw_case(text.as_bytes());
    let second = text.rfind("[fit]").expect("second table");
    let line = text[..second].matches('\n').count() + 1;
    refused(&c, &[&format!("r.toml:{line}:"), "not valid TOML"]);
}

#[test]
fn arrays_nested_10000_deep_are_refused_without_overflowing_the_stack() {
    let deep = format!("{}{}", "[".repeat(10_000), "]".repeat(10_000));
    let text = format!("{}\n[compare]\nmodels = {deep}\n", Recipe::line().text());
    let c = raw_case(text.as_bytes());
    let out = refused(&c, &[&pos(&text, "models = [", 0)[..9], "not valid TOML"]);
    assert!(
        out.stderr.len() < 2_000,
        "{} bytes of message",
        out.stderr.len()
    );
}

#[test]
fn inline_tables_nested_10000_deep_are_refused() {
    let deep = format!("{}1{}", "{ a = ".repeat(10_000), " }".repeat(10_000));
    let text = Recipe::line()
        .params(&["a = {}", &format!("b = {deep}")])
        .text();
    let c = raw_case(text.as_bytes());
    refused(&c, &["r.toml:", "not valid TOML"]);
}

#[test]
fn integer_beyond_64_bits_is_refused() {
    let text = Recipe::line()
        .fit("confidence = 99999999999999999999")
        .text();
    let c = raw_case(text.as_bytes());
    refused(&c, &[&pos(&text, "99999", 0), "cannot be represented"]);
}

#[test]
fn start_value_beyond_the_float_range_is_refused() {
    let text = Recipe::line()
        .equation("y = a*exp(b*x)")
        .params(&["a = { start = 1e309 }", "b = { start = 0.1 }"])
        .text();
    let c = raw_case(text.as_bytes());
    refused(
        &c,
        &[
            &pos(&text, "1e309", 0),
            "`start` in [model.parameters.a] must be a finite number",
        ],
    );
}

#[test]
fn nan_bound_is_refused() {
    let text = Recipe::line()
        .params(&["a = { min = nan }", "b = {}"])
        .text();
    let c = raw_case(text.as_bytes());
    refused(&c, &[&pos(&text, "nan", 0), "must be a finite number"]);
}

#[test]
fn crlf_line_endings_keep_positions() {
    let text = Recipe::line()
        .fit("methd = \"linear\"")
        .text()
        .replace('\n', "\r\n");
    let c = raw_case(text.as_bytes());
    refused(
        &c,
        &[
            &pos(&text, "methd", 0),
            "unknown key `methd`",
            "did you mean `method`?",
        ],
    );
}

#[test]
fn a_folder_without_recipes_is_a_usage_error() {
    let c = Case::new();
    c.file("recipes/readme.txt", "no recipes here\n");
    c.run(&["run", "recipes"])
        .expect_code(2)
        .expect_contains(&["no recipes (*.toml) found under `recipes`"]);
    assert_nothing_written(&c);
}

#[test]
fn a_recipe_that_is_not_there_is_a_usage_error() {
    let c = Case::new();
    c.run(&["check", "nowhere.toml"])
        .expect_code(2)
        .expect_contains(&["`nowhere.toml` does not exist"]);
}

#[test]
fn names_that_would_leave_the_report_folder_are_refused() {
    for name in ["..", ".", ".hidden"] {
        let text = Recipe::line().name(name).text();
        let c = raw_case(text.as_bytes());
        c.run(&["run", "r.toml", "--out", "runs"])
            .expect_code(2)
            .expect_contains(&["r.toml:1:8", &format!("the name `{name}` is not allowed")]);
        assert_nothing_written(&c);
    }
}
