//! Renders the NIST StRD conformance results as the Markdown of docs/conformance.md.

use std::fmt::Write as _;
use std::path::Path;

use fitwright::fit::strd::Difficulty;

use super::linear_cases::{LINEAR_CASES, run_linear};
use super::nonlinear_cases::{
    ERRATA, Expect, MIN_PARAM_LRE, MIN_PASSING_FITS, MIN_SD_LRE, run_all,
};

/// The command that regenerates the file (also printed at its top).
pub const COMMAND: &str = "cargo test --test strd_conformance -- --ignored write_conformance_table";

fn min(v: impl Iterator<Item = f64>) -> f64 {
    v.fold(f64::INFINITY, f64::min)
}

pub fn render(dir: &Path) -> String {
    let linear: Vec<_> = LINEAR_CASES.iter().map(|c| run_linear(dir, *c)).collect();
    let nonlinear = run_all(dir);
    let mut s = String::new();
    let w = &mut s;
    let _ = writeln!(w, "<!-- Generated; regenerate with: {COMMAND} -->");
    let _ = writeln!(w, "# NIST StRD conformance\n");
    let _ = writeln!(w, "Regenerate: `{COMMAND}`\n");
    let _ = writeln!(
        w,
        "Reference: NIST ITL Statistical Reference Datasets (StRD), the \"Linear Least Squares \
         Regression\" and \"Nonlinear Regression\" collections, read in place from \
         `../shared/reference-data/nist-strd/` (or `$FITWRIGHT_STRD_DIR`). Accuracy is the log \
         relative error LRE = −log₁₀(|estimate − certified| / |certified|) (McCullough, The American \
         Statistician, 1998), capped at the certified digits (15 linear, 11 nonlinear), 0 when off by \
         more than 100 %; for a certified value of 0 the absolute error is used. The asserted \
         thresholds live in `tests/support/linear_cases.rs` and `tests/support/nonlinear_cases.rs`; \
         `cargo test --test strd_linear --test strd_nonlinear` checks them.\n"
    );

    // Summary.
    let lin_ok = linear
        .iter()
        .filter(|r| r.min_param() >= r.case.min_param_lre && r.min_sd() >= r.case.min_sd_lre)
        .count();
    let lin_min_p = linear
        .iter()
        .map(|r| (r.min_param(), r.case.name))
        .fold((f64::INFINITY, ""), |a, b| if b.0 < a.0 { b } else { a });
    let lin_min_sd = linear
        .iter()
        .map(|r| (r.min_sd(), r.case.name))
        .fold((f64::INFINITY, ""), |a, b| if b.0 < a.0 { b } else { a });
    let passing = nonlinear.iter().filter(|(_, r)| r.passes()).count();
    let la: Vec<_> = nonlinear
        .iter()
        .filter(|(_, r)| r.difficulty <= Difficulty::Average)
        .collect();
    let la_ok = la.iter().filter(|(_, r)| r.params_pass()).count();
    let converged = nonlinear.iter().filter(|(_, r)| r.converged).count();
    let pass_min_p = min(nonlinear
        .iter()
        .filter(|(_, r)| r.passes())
        .map(|(_, r)| r.min_param()));
    let pass_min_sd = min(nonlinear
        .iter()
        .filter(|(_, r)| r.passes())
        .map(|(_, r)| r.min_sd()));
    let _ = writeln!(w, "## Summary\n");
    let _ = writeln!(
        w,
        "- Linear: {lin_ok} of {} problems with every parameter LRE ≥ 7 and every standard deviation \
         LRE ≥ 6; lowest parameter LRE {:.1} ({}), lowest SD LRE {:.1} ({}).",
        linear.len(),
        lin_min_p.0,
        lin_min_p.1,
        lin_min_sd.0,
        lin_min_sd.1
    );
    let _ = writeln!(
        w,
        "- Nonlinear: {passing} of {} fits with every parameter LRE ≥ {MIN_PARAM_LRE} and every SD \
         LRE ≥ {MIN_SD_LRE} (required: {MIN_PASSING_FITS}); lowest LREs among them: parameters \
         {pass_min_p:.1}, SDs {pass_min_sd:.1}. {converged} of {} fits converged.",
        nonlinear.len(),
        nonlinear.len()
    );
    let _ = writeln!(
        w,
        "- Lower and average difficulty: {la_ok} of {} fits (both starts) with parameter LRE ≥ \
         {MIN_PARAM_LRE}.\n",
        la.len()
    );

    let _ = writeln!(
        w,
        "## Linear problems (Householder QR on scaled columns, `fit::linear`)\n"
    );
    let _ = writeln!(
        w,
        "| Problem | Difficulty | p | Parameters LRE (min) | SDs LRE (min) | Residual SD LRE | R² LRE | Condition (scaled) |"
    );
    let _ = writeln!(w, "|---|---|---:|---:|---:|---:|---:|---:|");
    for r in &linear {
        let _ = writeln!(
            w,
            "| {} | {} | {} | {:.1} | {:.1} | {:.1} | {} | {:.2e} |",
            r.case.name,
            r.difficulty,
            r.param_lre.len(),
            r.min_param(),
            r.min_sd(),
            r.residual_sd_lre,
            r.r_squared_lre
                .map_or("–".to_string(), |v| format!("{v:.1}")),
            r.condition
        );
    }

    let _ = writeln!(
        w,
        "\n## Nonlinear problems (Levenberg–Marquardt, `fit::lm`, default options)\n"
    );
    let _ = writeln!(
        w,
        "| Problem | Difficulty | Start | Parameters LRE (min) | SDs LRE (min) | RSS LRE | Residual SD LRE | Iterations | Jacobians | Model evaluations | Stop reason | Verdict |"
    );
    let _ = writeln!(
        w,
        "|---|---|---:|---:|---:|---:|---:|---:|---:|---:|---|---|"
    );
    for (case, r) in &nonlinear {
        let verdict = match (r.passes(), case.expect[r.start - 1]) {
            (true, _) => "pass",
            (false, Expect::ParamsOnly(_)) if r.params_pass() => "parameters only (see notes)",
            (false, _) => "fail (see notes)",
        };
        let _ = writeln!(
            w,
            "| {} | {} | {} | {:.1} | {:.1} | {:.1} | {:.1} | {} | {} | {} | {} | {} |",
            r.name,
            r.difficulty,
            r.start,
            r.min_param(),
            r.min_sd(),
            r.rss_lre,
            r.residual_sd_lre,
            r.iterations,
            r.jacobian_evals,
            r.function_evals,
            r.stop,
            verdict
        );
    }

    let _ = writeln!(w, "\n## Failures and notes\n");
    for (case, r) in &nonlinear {
        match case.expect[r.start - 1] {
            Expect::Fails(why) | Expect::ParamsOnly(why) if !r.passes() => {
                let _ = writeln!(
                    w,
                    "- **{} start {}**: {}.",
                    r.name,
                    r.start,
                    why.split_whitespace().collect::<Vec<_>>().join(" ")
                );
            }
            _ => {}
        }
    }
    for e in ERRATA {
        let printed: Vec<String> = nonlinear
            .iter()
            .filter(|(_, r)| r.name == e.problem)
            .filter_map(|(_, r)| {
                r.printed_param_lre
                    .get(e.param)
                    .copied()
                    .flatten()
                    .map(|v| format!("start {}: {v:.1}", r.start))
            })
            .collect();
        let _ = writeln!(
            w,
            "- **{} (erratum)**: {}. LRE against the printed value: {}. Checked by \
             `roszman1_printed_b1_contradicts_the_certified_rss`.",
            e.problem,
            e.note.split_whitespace().collect::<Vec<_>>().join(" "),
            printed.join(", ")
        );
    }
    let _ = writeln!(
        w,
        "- **Rat43 (degrees of freedom)**: the file prints 9 degrees of freedom for n = 15, p = 4; \
         its certified residual SD equals √(RSS/11), so n − p = 11 is used (checked by \
         `every_strd_file_parses_and_is_self_consistent`)."
    );
    s
}
