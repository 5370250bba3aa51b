//! cargo-fuzz entry point; the checks are in `fuzz/checks/read_data.rs`.
#![no_main]

#[path = "../checks/read_data.rs"]
mod checks;

libfuzzer_sys::fuzz_target!(|data: &[u8]| checks::check(data));
