//! cargo-fuzz entry point; the checks are in `fuzz/checks/parse_expression.rs`.
#![no_main]

#[path = "../checks/parse_expression.rs"]
mod checks;

libfuzzer_sys::fuzz_target!(|data: &[u8]| checks::check(data));
