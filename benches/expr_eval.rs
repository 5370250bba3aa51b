//! Compiled tape vs the recursive reference evaluator: a 3-parameter model and its
//! Jacobian over 1,000,000 points.
//!
//! Run with `cargo bench --bench expr_eval`. Prints median, min and max wall time of
//! several runs for each evaluator, and the ratio of the medians.

use std::hint::black_box;
use std::time::{Duration, Instant};

use fitwright::expr::{MultiTape, Symbols, eval_recursive, parse_equation};

const N: usize = 1_000_000;
const MODEL: &str = "R = a*exp(b*(1/(T + 273.15) - 1/298.15)) + c*T";

fn stats(mut times: Vec<Duration>) -> (Duration, Duration, Duration) {
    times.sort();
    (times[times.len() / 2], times[0], times[times.len() - 1])
}

fn show(label: &str, times: &[Duration]) -> Duration {
    let (median, min, max) = stats(times.to_vec());
    println!(
        "{label:<34} median {:>9.2} ms   min {:>9.2} ms   max {:>9.2} ms   ({} runs)",
        median.as_secs_f64() * 1e3,
        min.as_secs_f64() * 1e3,
        max.as_secs_f64() * 1e3,
        times.len()
    );
    median
}

fn main() {
    let eq = parse_equation(MODEL).expect("the benchmark model parses");
    let symbols = Symbols::new(&["T"], &["a", "b", "c"]);
    let tape = MultiTape::model_and_jacobian(&eq.rhs, &symbols).expect("compiles");
    let exprs = tape.exprs().to_vec();
    let params = [10_000.0, 3_900.0, 0.5];
    // Temperatures from -40 °C to 125 °C.
    let t: Vec<f64> = (0..N)
        .map(|i| -40.0 + 165.0 * i as f64 / N as f64)
        .collect();

    println!("model: {MODEL}");
    for (i, e) in exprs.iter().enumerate() {
        println!("  output {i}: {e}");
    }
    println!("{N} points, model + 3 Jacobian columns per point\n");

    let mut outs = vec![vec![0.0; N]; exprs.len()];
    let mut tape_times = Vec::new();
    for _ in 0..9 {
        let mut refs: Vec<&mut [f64]> = outs.iter_mut().map(|v| v.as_mut_slice()).collect();
        let start = Instant::now();
        tape.eval(&[&t], &params, &mut refs)
            .expect("no domain error");
        tape_times.push(start.elapsed());
        black_box(&outs);
    }

    let mut rec = vec![vec![0.0; N]; exprs.len()];
    let mut rec_times = Vec::new();
    for _ in 0..3 {
        let start = Instant::now();
        for (i, &ti) in t.iter().enumerate() {
            let lookup = |n: &str| match n {
                "T" => Some(ti),
                "a" => Some(params[0]),
                "b" => Some(params[1]),
                "c" => Some(params[2]),
                _ => None,
            };
            for (k, e) in exprs.iter().enumerate() {
                rec[k][i] = eval_recursive(e, &lookup).expect("no domain error");
            }
        }
        rec_times.push(start.elapsed());
        black_box(&rec);
    }

    let worst = outs
        .iter()
        .zip(&rec)
        .flat_map(|(a, b)| a.iter().zip(b))
        .map(|(x, y)| (x - y).abs() / y.abs().max(1e-300))
        .fold(0.0f64, f64::max);

    let tape_median = show("tape (model + Jacobian)", &tape_times);
    let rec_median = show("recursive (model + Jacobian)", &rec_times);
    println!(
        "\nratio recursive/tape (medians): {:.1}x   (largest relative difference {worst:.1e})",
        rec_median.as_secs_f64() / tape_median.as_secs_f64()
    );
}
