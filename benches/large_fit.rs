//! Load + fit alone on the large data set of benchmark (a) (SPEC §11): the phases that the
//! reference comparison times for pandas + scipy (`read_csv`, then `curve_fit` with its
//! covariance), timed the same way for fitwright, without diagnostics, plots or reports.
//!
//! - load: `model::prepare` — read and hash the CSV, check every cell, map the columns;
//! - fit: compile the model to its tape, Levenberg–Marquardt (`estimate::fit_nonlinear`)
//!   and the parameter covariance (`covariance::uncertainty_from_jacobian`).
//!
//! Run `python3 scripts/bench/make_data.py large`, then `cargo bench --bench large_fit` (or
//! give another recipe as the first argument). Prints median, min and max of several runs
//! (7, or `FITWRIGHT_BENCH_RUNS`) for each phase and for load + fit, in wall time and in the
//! process's CPU time (user + system over all threads, `getrusage`): on a shared machine the
//! CPU time moves far less than the wall time; and the minor page faults of each phase.

use std::hint::black_box;
use std::path::PathBuf;
use std::time::{Duration, Instant};

use fitwright::estimate::{self, TapeModel};
use fitwright::fit::covariance::{self, UncertaintySettings};

/// User + system CPU time of the whole process so far (every thread), and its minor page
/// faults (each first touch of a fresh 4 KiB page of memory).
fn cpu_time() -> (Duration, u64) {
    // SAFETY: getrusage writes one plain-data struct that we own.
    let mut u: libc::rusage = unsafe { std::mem::zeroed() };
    unsafe { libc::getrusage(libc::RUSAGE_SELF, &mut u) };
    let tv = |t: libc::timeval| Duration::new(t.tv_sec as u64, t.tv_usec as u32 * 1000);
    (tv(u.ru_utime) + tv(u.ru_stime), u.ru_minflt as u64)
}

fn main() {
    let path = std::env::args()
        .skip(1)
        .find(|a| !a.starts_with("--"))
        .map_or_else(
            || PathBuf::from("target/bench/large/decay.toml"),
            PathBuf::from,
        );
    if !path.exists() {
        println!(
            "skipped: {} not found; write it with `python3 scripts/bench/make_data.py large`",
            path.display()
        );
        return;
    }
    let recipe = match fitwright::recipe::load(&path) {
        Ok(r) => r,
        Err(e) => {
            eprint!("{e}");
            std::process::exit(1);
        }
    };
    let runs: usize = std::env::var("FITWRIGHT_BENCH_RUNS")
        .ok()
        .and_then(|r| r.parse().ok())
        .unwrap_or(7)
        .max(1);
    let (mut loads, mut fits, mut totals) = (Vec::new(), Vec::new(), Vec::new());
    let (mut load_cpu, mut fit_cpu) = (Vec::new(), Vec::new());
    let (mut load_faults, mut fit_faults) = (Vec::new(), Vec::new());
    let mut last = None;
    for _ in 0..runs {
        let (t0, c0) = (Instant::now(), cpu_time());
        let prep = match fitwright::model::prepare(&recipe) {
            Ok(p) => p,
            Err(e) => {
                eprint!("{e}");
                std::process::exit(1);
            }
        };
        let (t1, c1) = (Instant::now(), cpu_time());
        let describe = |row: usize| prep.data.describe_row(row);
        let names = prep.model.free_names();
        let model = TapeModel::new(
            &prep.model.rhs_with_fixed(),
            &prep.model.predictors,
            prep.x(),
            &names,
            &describe,
        )
        .expect("the recipe's model compiles");
        let start: Vec<f64> = prep.model.free().iter().filter_map(|p| p.start).collect();
        let est = estimate::fit_nonlinear(&prep, &model, &start, recipe.fit.tolerance)
            .expect("the fit starts");
        let u = covariance::uncertainty_from_jacobian(
            &est.jacobian,
            prep.weights.as_deref(),
            &est.params,
            &est.at_bound,
            &names,
            est.ssr,
            UncertaintySettings::default(),
        )
        .expect("the covariance exists");
        let (t2, c2) = (Instant::now(), cpu_time());
        load_cpu.push(c1.0 - c0.0);
        fit_cpu.push(c2.0 - c1.0);
        load_faults.push(c1.1 - c0.1);
        fit_faults.push(c2.1 - c1.1);
        loads.push(t1 - t0);
        fits.push(t2 - t1);
        totals.push(t2 - t0);
        last = Some((prep.data.len(), est.params.clone(), est.iterations, u));
        black_box(est);
    }
    let (rows, params, iterations, u) = last.expect("at least one run");
    let ms = |d: Duration| d.as_secs_f64() * 1e3;
    let line = |what: &str, v: &mut Vec<Duration>| {
        v.sort();
        println!(
            "{what:<11} median {:>7.1} ms, min {:>7.1} ms, max {:>7.1} ms",
            ms(v[v.len() / 2]),
            ms(v[0]),
            ms(v[v.len() - 1])
        );
    };
    println!(
        "{} ({rows} rows, {iterations} iterations, {runs} runs)",
        path.display()
    );
    line("load", &mut loads);
    line("fit", &mut fits);
    line("load + fit", &mut totals);
    line("load CPU", &mut load_cpu);
    line("fit CPU", &mut fit_cpu);
    let faults = |what: &str, v: &mut Vec<u64>| {
        v.sort();
        println!(
            "{what:<11} median {:>7}, min {:>7}, max {:>7} page faults",
            v[v.len() / 2],
            v[0],
            v[v.len() - 1]
        );
    };
    faults("load", &mut load_faults);
    faults("fit", &mut fit_faults);
    let shown: Vec<String> = params
        .iter()
        .zip(&u.std_errors)
        .map(|(v, se)| format!("{v:.15e} ± {:.3e}", se.unwrap_or(f64::NAN)))
        .collect();
    println!("parameters  {}", shown.join(", "));
}
