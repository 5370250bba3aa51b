//! The 54 NIST StRD nonlinear fits (27 problems × 2 starts), timed per fit and printed as
//! tab-separated values for `scripts/bench/compare_reference.py`, which fits the same data
//! with the reference stack in the same run and compares times and certified-value agreement.
//!
//! Run: `cargo bench --bench nist_compare` (optionally `-- NAME` for problems whose name
//! contains NAME). Columns: problem, difficulty, start, median µs, min µs, max µs, repeats,
//! converged, then the fitted parameters (full precision, comma-separated). Each problem is
//! the recipe the conformance test builds (`tests/support/strd_recipe.rs`), compiled once to
//! the tape (value and exact Jacobian) and fitted by `estimate::fit_nonlinear` with the
//! recipe's settings — the same path as `benches/nist_fits.rs`, which prints the
//! human-readable table. Data: NIST ITL StRD "Nonlinear Regression", read in place from
//! `../shared/reference-data/nist-strd/` or `$FITWRIGHT_STRD_DIR`.

#[path = "../tests/support/mod.rs"]
mod support;

use std::hint::black_box;
use std::time::{Duration, Instant};

use fitwright::estimate::{self, TapeModel};
use support::nonlinear_cases::NONLINEAR_CASES;
use support::strd_data::load;
use support::strd_recipe::{prepare, write_recipe};

/// Time budget per fit, and repeat bounds.
const BUDGET: Duration = Duration::from_millis(150);
const MIN_REPS: usize = 5;
const MAX_REPS: usize = 5000;

fn main() {
    let Some(dir) = support::strd_data::strd_dir_or_skip("nist_compare benchmark") else {
        return;
    };
    let filter: Option<String> = std::env::args().skip(1).find(|a| !a.starts_with('-'));
    println!("problem\tdifficulty\tstart\tmedian_us\tmin_us\tmax_us\treps\tconverged\tparams");
    for case in NONLINEAR_CASES {
        if filter.as_deref().is_some_and(|f| !case.name.contains(f)) {
            continue;
        }
        let prob = load(&dir, "nonlinear", case.name);
        for start in [1, 2] {
            let recipe = write_recipe(&prob, start, None);
            let prep = prepare(&recipe);
            let describe = |row: usize| prep.data.describe_row(row);
            let names = prep.model.free_names();
            let rhs = prep.model.rhs_with_fixed();
            let model = TapeModel::new(&rhs, &prep.model.predictors, prep.x(), &names, &describe)
                .expect("the model compiles");
            let theta0: Vec<f64> = prep.model.free().iter().filter_map(|p| p.start).collect();
            let run = || estimate::fit_nonlinear(&prep, &model, &theta0, 1e-12);
            let first = run();
            let mut times = Vec::new();
            let t_all = Instant::now();
            while times.len() < MAX_REPS && (times.len() < MIN_REPS || t_all.elapsed() < BUDGET) {
                let t = Instant::now();
                let out = run();
                times.push(t.elapsed());
                black_box(out.ok());
            }
            times.sort_unstable();
            let us = |d: Duration| d.as_secs_f64() * 1e6;
            let (converged, params) = match &first {
                Ok(o) => (
                    o.converged,
                    o.params
                        .iter()
                        .map(|v| format!("{v:.17e}"))
                        .collect::<Vec<_>>()
                        .join(","),
                ),
                Err(_) => (false, String::new()),
            };
            println!(
                "{}\t{}\t{}\t{:.2}\t{:.2}\t{:.2}\t{}\t{}\t{}",
                case.name,
                prob.difficulty,
                start,
                us(times[times.len() / 2]),
                us(times[0]),
                us(times[times.len() - 1]),
                times.len(),
                converged,
                params
            );
        }
    }
}
