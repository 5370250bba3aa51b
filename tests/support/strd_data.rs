//! Locating and reading the NIST StRD files in place (never copied into the repository).
//!
//! Source: NIST ITL, Statistical Reference Datasets (StRD), "Linear Least Squares Regression"
//! and "Nonlinear Regression" collections, read from `../shared/reference-data/nist-strd/`
//! relative to the crate root, or from `$FITWRIGHT_STRD_DIR`.

use std::path::PathBuf;

use fitwright::fit::strd::{self, StrdProblem};

/// Where the StRD folder is, if present.
pub fn strd_dir() -> Option<PathBuf> {
    let dir = match std::env::var_os("FITWRIGHT_STRD_DIR") {
        Some(d) => PathBuf::from(d),
        None => {
            PathBuf::from(env!("CARGO_MANIFEST_DIR")).join("../shared/reference-data/nist-strd")
        }
    };
    dir.join("linear").is_dir().then_some(dir)
}

/// The StRD folder, or None after printing why the test is skipped.
pub fn strd_dir_or_skip(test: &str) -> Option<PathBuf> {
    let dir = strd_dir();
    if dir.is_none() {
        eprintln!(
            "SKIPPED {test}: NIST StRD reference data not found at ../shared/reference-data/nist-strd \
             (relative to the crate root) nor in $FITWRIGHT_STRD_DIR. Get the .dat files from the \
             NIST ITL Statistical Reference Datasets web pages (linear least squares and nonlinear \
             regression collections) and point FITWRIGHT_STRD_DIR at a folder holding linear/ and nonlinear/."
        );
    }
    dir
}

/// Read and parse `<dir>/<sub>/<name>.dat`.
pub fn load(dir: &std::path::Path, sub: &str, name: &str) -> StrdProblem {
    let path = dir.join(sub).join(format!("{name}.dat"));
    let text = std::fs::read_to_string(&path)
        .unwrap_or_else(|e| panic!("reading {}: {e}", path.display()));
    strd::parse(&text).unwrap_or_else(|e| panic!("parsing {}: {e}", path.display()))
}
