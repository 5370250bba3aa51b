//! cargo-fuzz entry point; the checks are in `fuzz/checks/load_recipe.rs`.
#![no_main]

#[path = "../checks/load_recipe.rs"]
mod checks;

libfuzzer_sys::fuzz_target!(|data: &[u8]| checks::check(data));
