//! Time per fit for each NIST StRD problem through the product's fit path (median, min and
//! max over repeated fits), plus heap allocations per fit.
//!
//! Each problem is written as the recipe of the conformance test (tests/support/strd_recipe.rs),
//! loaded and its data prepared once, and its model compiled once to the tape the pipeline
//! uses (`estimate::TapeModel`: value and exact symbolic Jacobian in one pass). Only the fit is
//! timed: `estimate::fit_linear_model` (Householder QR) for the linear problems,
//! `estimate::fit_nonlinear` (Levenberg–Marquardt from the file's Start 1 or Start 2) for the
//! nonlinear ones — no file I/O, statistics, diagnostics or report writing.
//!
//! Run: `cargo bench --bench nist_fits` (optionally `-- NAME` to run problems whose name
//! contains NAME; `FITWRIGHT_BENCH_REPS=N` for a fixed count, e.g. under callgrind). Target (SPEC §11): median under 50 µs for lower-difficulty nonlinear fits.
//! Data: NIST ITL StRD, read in place from `../shared/reference-data/nist-strd/` or
//! `$FITWRIGHT_STRD_DIR`.

#[path = "../tests/support/mod.rs"]
mod support;

use std::alloc::{GlobalAlloc, Layout, System};
use std::hint::black_box;
use std::sync::atomic::{AtomicUsize, Ordering};
use std::time::{Duration, Instant};

use fitwright::estimate::{self, TapeModel};
use fitwright::fit::strd::{Difficulty, StrdProblem};
use fitwright::model::Prepared;
use support::linear_cases::LINEAR_CASES;
use support::nonlinear_cases::NONLINEAR_CASES;
use support::strd_data::load;
use support::strd_recipe::{prepare, write_recipe};

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

/// `FITWRIGHT_BENCH_REPS=N`: exactly N timed repetitions per fit instead of the time budget,
/// so that instruction counts (callgrind) compare between builds.
fn fixed_reps() -> Option<usize> {
    std::env::var("FITWRIGHT_BENCH_REPS").ok()?.parse().ok()
}

fn us(d: Duration) -> f64 {
    d.as_secs_f64() * 1e6
}

/// Median, min and max of repeated runs of `fit`, and the allocations of one run.
struct Timing {
    median: f64,
    min: f64,
    max: f64,
    reps: usize,
    allocs: usize,
}

fn time<T>(mut fit: impl FnMut() -> T) -> Timing {
    let before = ALLOCS.load(Ordering::Relaxed);
    black_box(fit());
    let allocs = ALLOCS.load(Ordering::Relaxed) - before;
    let mut times = Vec::new();
    let t_all = Instant::now();
    let fixed = fixed_reps();
    while match fixed {
        Some(n) => times.len() < n,
        None => times.len() < MAX_REPS && (times.len() < MIN_REPS || t_all.elapsed() < BUDGET),
    } {
        let t = Instant::now();
        black_box(fit());
        times.push(t.elapsed());
    }
    times.sort_unstable();
    Timing {
        median: us(times[times.len() / 2]),
        min: us(times[0]),
        max: us(times[times.len() - 1]),
        reps: times.len(),
        allocs,
    }
}

/// The recipe's model compiled as `pipeline::solve` compiles it, and the time that took.
fn compile<'a>(prep: &'a Prepared, describe: &'a dyn Fn(usize) -> String) -> (TapeModel<'a>, f64) {
    let t = Instant::now();
    let model = TapeModel::new(
        &prep.model.rhs_with_fixed(),
        &prep.model.predictors,
        prep.x(),
        &prep.model.free_names(),
        describe,
    )
    .expect("the recipe's model compiles");
    (model, us(t.elapsed()))
}

fn header(first: &str) {
    println!(
        "{:<9} {:<8} {:>5} {:>10} {:>10} {:>10} {:>6} {:>6} {:>7} {:>11}  {first}",
        "problem",
        "level",
        "start",
        "median µs",
        "min µs",
        "max µs",
        "reps",
        "iters",
        "allocs",
        "compile µs"
    );
}

fn main() {
    let Some(dir) = support::strd_data::strd_dir_or_skip("nist_fits benchmark") else {
        return;
    };
    let filter: Option<String> = std::env::args().skip(1).find(|a| !a.starts_with('-'));
    let wanted = |name: &str| filter.as_deref().is_none_or(|f| name.contains(f));

    println!("Linear problems (method = \"linear\": estimate::fit_linear_model)\n");
    header("");
    for case in LINEAR_CASES.iter().filter(|c| wanted(c.name)) {
        let prob = load(&dir, "linear", case.name);
        let recipe = write_recipe(&prob, 1, None);
        let prep = prepare(&recipe);
        let describe = |row: usize| prep.data.describe_row(row);
        let (model, compile_us) = compile(&prep, &describe);
        let names = prep.model.free_names();
        let t = time(|| estimate::fit_linear_model(&prep, &model, &names).ok());
        row(&prob, "-", &t, 0, compile_us, "");
    }

    println!(
        "\nNonlinear problems (method = \"nonlinear\": estimate::fit_nonlinear, Levenberg–Marquardt)\n"
    );
    header("stop");
    let mut lower_medians = Vec::new();
    for case in NONLINEAR_CASES.iter().filter(|c| wanted(c.name)) {
        let prob = load(&dir, "nonlinear", case.name);
        for start in [1, 2] {
            let recipe = write_recipe(&prob, start, None);
            let prep = prepare(&recipe);
            let tolerance = fitwright::recipe::load(&recipe.recipe)
                .expect("the recipe loads")
                .fit
                .tolerance;
            let describe = |row: usize| prep.data.describe_row(row);
            let (model, compile_us) = compile(&prep, &describe);
            let theta0: Vec<f64> = prep.model.free().iter().filter_map(|p| p.start).collect();
            let fit = || estimate::fit_nonlinear(&prep, &model, &theta0, tolerance);
            let (iters, stop) = match fit() {
                Ok(e) if e.converged => (e.iterations, "converged"),
                Ok(e) => (e.iterations, "not converged"),
                Err(_) => (0, "error"),
            };
            let t = time(|| fit().ok());
            if prob.difficulty == Difficulty::Lower {
                lower_medians.push((case.name, start, t.median));
            }
            row(&prob, &start.to_string(), &t, iters, compile_us, stop);
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

fn row(prob: &StrdProblem, start: &str, t: &Timing, iters: usize, compile_us: f64, stop: &str) {
    println!(
        "{:<9} {:<8} {:>5} {:>10.1} {:>10.1} {:>10.1} {:>6} {:>6} {:>7} {:>11.0}  {stop}",
        prob.name,
        prob.difficulty.to_string(),
        start,
        t.median,
        t.min,
        t.max,
        t.reps,
        iters,
        t.allocs,
        compile_us
    );
}
