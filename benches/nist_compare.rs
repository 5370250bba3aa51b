//! The 54 NIST StRD nonlinear fits (27 problems × 2 starts), timed per fit and printed as
//! tab-separated values for `scripts/bench/compare_reference.py`, which fits the same data
//! with the reference stack in the same run and compares times and certified-value agreement.
//!
//! Run: `cargo bench --bench nist_compare` (optionally `-- NAME` for problems whose name
//! contains NAME). Columns: problem, difficulty, start, median µs, min µs, max µs, repeats,
//! converged, then the fitted parameters (full precision, comma-separated). The fits use
//! `fit::lm` with the models of `tests/support/nist_models.rs` (value and exact Jacobian),
//! default options, no bounds — the same path as `benches/nist_fits.rs`, which prints the
//! human-readable table. Data: NIST ITL StRD "Nonlinear Regression", read in place from
//! `../shared/reference-data/nist-strd/` or `$FITWRIGHT_STRD_DIR`.

#[path = "../tests/support/mod.rs"]
mod support;

use std::hint::black_box;
use std::time::{Duration, Instant};

use fitwright::fit::lm::{self, LmOptions, Observations};
use support::nonlinear_cases::{NONLINEAR_CASES, prepare, start_values};

/// Time budget per fit, and repeat bounds.
const BUDGET: Duration = Duration::from_millis(150);
const MIN_REPS: usize = 5;
const MAX_REPS: usize = 5000;

fn main() {
    let Some(dir) = support::strd_data::strd_dir_or_skip("nist_compare benchmark") else {
        return;
    };
    let filter: Option<String> = std::env::args().skip(1).find(|a| !a.starts_with('-'));
    let options = LmOptions::default();
    println!("problem\tdifficulty\tstart\tmedian_us\tmin_us\tmax_us\treps\tconverged\tparams");
    for case in NONLINEAR_CASES {
        if filter.as_deref().is_some_and(|f| !case.name.contains(f)) {
            continue;
        }
        let prep = prepare(&dir, case.name);
        let obs = Observations {
            y: &prep.y,
            weights: None,
        };
        for start in [1, 2] {
            let theta0 = start_values(&prep.problem, start);
            let run = || lm::fit(&prep.model, &obs, &theta0, None, &options);
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
                    o.stop.converged(),
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
                prep.problem.difficulty,
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
