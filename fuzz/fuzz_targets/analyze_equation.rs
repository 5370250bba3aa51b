//! cargo-fuzz entry point; the checks are in `fuzz/checks/analyze_equation.rs`.
#![no_main]

#[path = "../checks/analyze_equation.rs"]
mod checks;

libfuzzer_sys::fuzz_target!(|data: &[u8]| checks::check(data));
