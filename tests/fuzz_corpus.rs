//! Replays the committed fuzz inputs (`fuzz/seeds/<target>/`, which also holds every input
//! that once crashed or hung a target) through the same checks the cargo-fuzz targets run,
//! so `cargo test` keeps them fixed without the fuzzing toolchain. See DEVELOPERS.md,
//! "Fuzzing", for running the targets themselves.

#[path = "../fuzz/checks/analyze_equation.rs"]
mod analyze_equation;
#[path = "../fuzz/checks/load_recipe.rs"]
mod load_recipe;
#[path = "../fuzz/checks/parse_expression.rs"]
mod parse_expression;
#[path = "../fuzz/checks/read_data.rs"]
mod read_data;

use std::path::PathBuf;

fn replay(target: &str, check: fn(&[u8])) {
    let dir = PathBuf::from(env!("CARGO_MANIFEST_DIR"))
        .join("fuzz/seeds")
        .join(target);
    let mut files: Vec<PathBuf> = std::fs::read_dir(&dir)
        .unwrap_or_else(|e| panic!("{}: {e}", dir.display()))
        .flatten()
        .map(|e| e.path())
        .filter(|p| p.is_file())
        .collect();
    files.sort();
    assert!(!files.is_empty(), "no inputs in {}", dir.display());
    for f in &files {
        let bytes = std::fs::read(f).expect("read input");
        // A panic names the input through the test's output.
        println!("{target}: {}", f.display());
        check(&bytes);
    }
}

#[test]
fn parse_expression_inputs() {
    replay("parse_expression", parse_expression::check);
}

#[test]
fn load_recipe_inputs() {
    replay("load_recipe", load_recipe::check);
}

#[test]
fn read_data_inputs() {
    replay("read_data", read_data::check);
}

#[test]
fn analyze_equation_inputs() {
    replay("analyze_equation", analyze_equation::check);
}
