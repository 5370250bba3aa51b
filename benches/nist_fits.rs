//! Time per Levenberg–Marquardt fit for each NIST StRD nonlinear problem and start
//! (median, min, max over repeated fits), plus heap allocations per fit.
//!
//! Run: `cargo bench --bench nist_fits` (optionally `-- NAME` to run problems whose name
//! contains NAME). Target (SPEC §11): median under 50 µs for lower-difficulty problems.
//! Data: NIST ITL StRD "Nonlinear Regression", read in place from
//! `../shared/reference-data/nist-strd/` or `$FITWRIGHT_STRD_DIR`.

#[path = "../tests/support/mod.rs"]
mod support;

use std::alloc::{GlobalAlloc, Layout, System};
use std::hint::black_box;
use std::sync::atomic::{AtomicUsize, Ordering};
use std::time::{Duration, Instant};

use fitwright::fit::lm::{self, LmOptions, Observations};
use fitwright::fit::strd::Difficulty;
use support::nonlinear_cases::{NONLINEAR_CASES, prepare, start_values};

/// Counts allocations so the report can show they do not grow with the iteration count.
struct Counting;
static ALLOCS: AtomicUsize = AtomicUsize::new(0);

unsafe impl GlobalAlloc for Counting {
    unsafe fn alloc(&self, layout: Layout) -> *mut u8 {
        ALLOCS.fetch_add(1, Ordering::Relaxed);
        // SAFETY: forwarded unchanged to the system allocator.
        unsafe { System.alloc(layout) }
    }
    unsafe fn dealloc(&self, ptr: *mut u8, layout: Layout) {
        // SAFETY: forwarded unchanged to the system allocator.
        unsafe { System.dealloc(ptr, layout) }
    }
}

#[global_allocator]
static GLOBAL: Counting = Counting;

const BUDGET: Duration = Duration::from_millis(200);
const MAX_REPS: usize = 2000;
const MIN_REPS: usize = 5;
const TARGET_US: f64 = 50.0;

fn main() {
    let Some(dir) = support::strd_data::strd_dir_or_skip("nist_fits benchmark") else {
        return;
    };
    let filter: Option<String> = std::env::args().skip(1).find(|a| !a.starts_with('-'));
    let options = LmOptions::default();
    println!(
        "{:<9} {:<8} {:>5} {:>11} {:>11} {:>11} {:>6} {:>6} {:>7}  stop",
        "problem", "level", "start", "median µs", "min µs", "max µs", "reps", "iters", "allocs"
    );
    let mut lower_medians = Vec::new();
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
            let before = ALLOCS.load(Ordering::Relaxed);
            let first = run();
            let allocs = ALLOCS.load(Ordering::Relaxed) - before;
            let (iters, stop) = match &first {
                Ok(o) => (
                    o.iterations,
                    if o.stop.converged() {
                        "converged"
                    } else {
                        "not converged"
                    },
                ),
                Err(_) => (0, "error"),
            };
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
            let median = us(times[times.len() / 2]);
            if prep.problem.difficulty == Difficulty::Lower {
                lower_medians.push((case.name, start, median));
            }
            println!(
                "{:<9} {:<8} {:>5} {:>11.1} {:>11.1} {:>11.1} {:>6} {:>6} {:>7}  {}",
                case.name,
                prep.problem.difficulty.to_string(),
                start,
                median,
                us(times[0]),
                us(times[times.len() - 1]),
                times.len(),
                iters,
                allocs,
                stop
            );
        }
    }
    if !lower_medians.is_empty() {
        let over: Vec<String> = lower_medians
            .iter()
            .filter(|(_, _, m)| *m > TARGET_US)
            .map(|(n, s, m)| format!("{n} start {s} ({m:.0} µs)"))
            .collect();
        println!(
            "\nlower difficulty: {} of {} fits with median under the {TARGET_US} µs target{}",
            lower_medians.len() - over.len(),
            lower_medians.len(),
            if over.is_empty() {
                String::new()
            } else {
                format!("; over: {}", over.join(", "))
            }
        );
    }
}
