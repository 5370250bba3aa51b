//! Loading of a large delimited text file (SPEC §11, benchmark (a)): `data::load` of the
//! 1,000,000-row, 2-column CSV of `scripts/bench/make_data.py large`, without the fit.
//!
//! Run `python3 scripts/bench/make_data.py large`, then `cargo bench --bench data_load`
//! (or give another recipe as the first argument). Prints median, min and max wall time of
//! several loads (11, or `FITWRIGHT_BENCH_RUNS`; 1 under callgrind).

use std::hint::black_box;
use std::path::PathBuf;
use std::time::{Duration, Instant};

use fitwright::data::{load, mapped_columns};

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
    let wanted = mapped_columns(&recipe);
    let mut times: Vec<Duration> = Vec::new();
    let mut rows = 0;
    let runs: usize = std::env::var("FITWRIGHT_BENCH_RUNS")
        .ok()
        .and_then(|r| r.parse().ok())
        .unwrap_or(11)
        .max(1);
    for _ in 0..runs {
        let start = Instant::now();
        let ds = match load(&recipe, &wanted) {
            Ok(ds) => ds,
            Err(e) => {
                eprint!("{e}");
                std::process::exit(1);
            }
        };
        times.push(start.elapsed());
        rows = ds.len();
        black_box(ds);
    }
    times.sort();
    let ms = |d: Duration| d.as_secs_f64() * 1e3;
    println!(
        "data::load of {} ({rows} rows): median {:.1} ms, min {:.1} ms, max {:.1} ms ({} runs)",
        path.display(),
        ms(times[times.len() / 2]),
        ms(times[0]),
        ms(times[times.len() - 1]),
        times.len()
    );
}
