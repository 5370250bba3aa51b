//! Renders the NIST StRD conformance results as the Markdown of docs/conformance.md.

use std::fmt::Write as _;

use fitwright::fit::strd::Difficulty;

use super::linear_cases::LinearResult;
use super::nonlinear_cases::{
    ERRATA, Expect, MIN_PARAM_LRE, MIN_PASSING_FITS, MIN_SD_LRE, NonlinearCase, NonlinearResult,
};

/// The command that regenerates the file (also printed at its top).
pub const COMMAND: &str = "cargo test --test strd_conformance -- --ignored write_conformance_table";

/// The lowest value and where it occurs.
fn lowest<'a>(v: impl Iterator<Item = (f64, String)> + 'a) -> (f64, String) {
    v.fold((f64::INFINITY, String::new()), |a, b| {
        if b.0 < a.0 { b } else { a }
    })
}

fn one_line(s: &str) -> String {
    s.split_whitespace().collect::<Vec<_>>().join(" ")
}

/// The summary lines (also quoted in README.md's "Conformance" section).
pub fn summary(linear: &[LinearResult], nonlinear: &[(NonlinearCase, NonlinearResult)]) -> String {
    let mut w = String::new();
    let lin_ok = linear.iter().filter(|r| r.shortfalls().is_empty()).count();
    let lin_p = lowest(
        linear
            .iter()
            .map(|r| (r.min_param(), r.case.name.to_string())),
    );
    let lin_sd = lowest(linear.iter().map(|r| (r.min_sd(), r.case.name.to_string())));
    let lin_rsd = lowest(
        linear
            .iter()
            .map(|r| (r.residual_sd_lre, r.case.name.to_string())),
    );
    let _ = writeln!(
        w,
        "- Linear: {lin_ok} of {} problems with every parameter LRE ≥ 7, every standard deviation \
         LRE ≥ 6, residual SD and R² LRE ≥ 6; lowest parameter LRE {:.1} ({}), lowest SD LRE {:.1} \
         ({}), lowest residual SD LRE {:.1} ({}).",
        linear.len(),
        lin_p.0,
        lin_p.1,
        lin_sd.0,
        lin_sd.1,
        lin_rsd.0,
        lin_rsd.1
    );
    let passing: Vec<_> = nonlinear.iter().filter(|(_, r)| r.passes()).collect();
    let converged = nonlinear.iter().filter(|(_, r)| r.converged).count();
    let fit_name = |r: &NonlinearResult| format!("{} start {}", r.name, r.start);
    let pass_p = lowest(passing.iter().map(|(_, r)| (r.min_param(), fit_name(r))));
    let pass_sd = lowest(passing.iter().map(|(_, r)| (r.min_sd(), fit_name(r))));
    let all_p = lowest(nonlinear.iter().map(|(_, r)| (r.min_param(), fit_name(r))));
    let _ = writeln!(
        w,
        "- Nonlinear: {} of {} fits with every parameter LRE ≥ {MIN_PARAM_LRE} and every SD LRE ≥ \
         {MIN_SD_LRE} (required: {MIN_PASSING_FITS}); among them the lowest parameter LRE is {:.1} \
         ({}) and the lowest SD LRE {:.1} ({}). {converged} of {} fits converged; lowest parameter \
         LRE over all fits {:.1} ({}).",
        passing.len(),
        nonlinear.len(),
        pass_p.0,
        pass_p.1,
        pass_sd.0,
        pass_sd.1,
        nonlinear.len(),
        all_p.0,
        all_p.1
    );
    let la: Vec<_> = nonlinear
        .iter()
        .filter(|(_, r)| r.difficulty <= Difficulty::Average)
        .collect();
    let la_ok = la.iter().filter(|(_, r)| r.params_pass()).count();
    let la_p = lowest(la.iter().map(|(_, r)| (r.min_param(), fit_name(r))));
    let _ = writeln!(
        w,
        "- Lower and average difficulty: {la_ok} of {} fits (both starts) with parameter LRE ≥ \
         {MIN_PARAM_LRE}; lowest {:.1} ({}).",
        la.len(),
        la_p.0,
        la_p.1
    );
    let failures: Vec<String> = nonlinear
        .iter()
        .filter(|(_, r)| !r.passes())
        .map(|(c, r)| {
            let why = match c.expect[r.start - 1] {
                Expect::Fails(_) => "does not converge within the Jacobian limit",
                Expect::ParamsOnly(_) => "parameters pass, SDs limited by rounding",
                Expect::Pass => "unexpected",
            };
            format!("{} ({why})", fit_name(r))
        })
        .collect();
    let _ = writeln!(
        w,
        "- Not passing: {}.",
        if failures.is_empty() {
            "none".to_string()
        } else {
            failures.join("; ")
        }
    );
    for e in ERRATA {
        let _ = writeln!(w, "- Erratum, {}: {}.", e.problem, one_line(e.note));
    }
    w
}

pub fn render(linear: &[LinearResult], nonlinear: &[(NonlinearCase, NonlinearResult)]) -> String {
    let mut s = String::new();
    let w = &mut s;
    let _ = writeln!(w, "<!-- Generated; regenerate with: {COMMAND} -->");
    let _ = writeln!(w, "# NIST StRD conformance\n");
    let _ = writeln!(w, "Regenerate: `{COMMAND}`\n");
    let _ = writeln!(
        w,
        "Every problem is run as a fitwright recipe built by the test: the data written to a CSV \
         file, the model equation translated from the file's header into the expression grammar, \
         the parameters with the file's Start 1 or Start 2 as `start`, `method = \"linear\"` or \
         `\"nonlinear\"`, then `pipeline::compute` — the same recipe check, data loading, analysis, \
         tape-compiled model with exact symbolic Jacobian, fit and statistics as `fitwright run`. \
         The figures are read from the result document (`parameters[].value`, \
         `parameters[].std_error`, `statistics.std_error`, `statistics.r_squared`, \
         `statistics.ssr`). The default method `auto` is checked too: DanWood, Eckerle4 (both \
         `ln(y)`) and Misra1d (`1/y`), with no start values, get their start from the linearized \
         fit and meet the same thresholds after refinement \
         (`auto_fits_the_linearizable_problems_without_start_values`).\n"
    );
    let _ = writeln!(
        w,
        "Reference: NIST ITL Statistical Reference Datasets (StRD), the \"Linear Least Squares \
         Regression\" and \"Nonlinear Regression\" collections, read in place from \
         `../shared/reference-data/nist-strd/` (or `$FITWRIGHT_STRD_DIR`). Accuracy is the log \
         relative error LRE = −log₁₀(|estimate − certified| / |certified|) (McCullough, The American \
         Statistician, 1998), capped at the certified digits (15 linear, 11 nonlinear), 0 when off by \
         more than 100 %; for a certified value of 0 the absolute error is used. The thresholds are \
         asserted per problem by `cargo test --test strd_conformance` (tables in \
         `tests/support/linear_cases.rs` and `tests/support/nonlinear_cases.rs`).\n"
    );

    let _ = writeln!(w, "## Summary\n");
    let _ = writeln!(w, "{}", summary(linear, nonlinear));

    let _ = writeln!(
        w,
        "## Linear problems (`method = \"linear\"`: Householder QR on scaled columns)\n"
    );
    let _ = writeln!(
        w,
        "| Problem | Difficulty | p | Parameters LRE (min) | SDs LRE (min) | Residual SD LRE | R² LRE | R² |"
    );
    let _ = writeln!(w, "|---|---|---:|---:|---:|---:|---:|---|");
    for r in linear {
        let _ = writeln!(
            w,
            "| {} | {} | {} | {:.1} | {:.1} | {:.1} | {:.1} | {} |",
            r.case.name,
            r.difficulty,
            r.param_lre.len(),
            r.min_param(),
            r.min_sd(),
            r.residual_sd_lre,
            r.r_squared_lre,
            r.r_squared_kind
        );
    }

    let _ = writeln!(
        w,
        "\n## Nonlinear problems (`method = \"nonlinear\"`: Levenberg–Marquardt, default settings)\n"
    );
    let _ = writeln!(
        w,
        "| Problem | Difficulty | Start | Parameters LRE (min) | SDs LRE (min) | RSS LRE | Residual SD LRE | Iterations | Jacobians | Stop reason | Verdict |"
    );
    let _ = writeln!(w, "|---|---|---:|---:|---:|---:|---:|---:|---:|---|---|");
    for (case, r) in nonlinear {
        let verdict = match (r.passes(), case.expect[r.start - 1]) {
            (true, _) => "pass",
            (false, Expect::ParamsOnly(_)) if r.params_pass() => "parameters only (see notes)",
            (false, _) => "fail (see notes)",
        };
        let _ = writeln!(
            w,
            "| {} | {} | {} | {:.1} | {:.1} | {:.1} | {:.1} | {} | {} | {} | {} |",
            r.name,
            r.difficulty,
            r.start,
            r.min_param(),
            r.min_sd(),
            r.rss_lre,
            r.residual_sd_lre,
            r.iterations,
            r.jacobian_evals,
            r.stop,
            verdict
        );
    }

    let _ = writeln!(w, "\n## Failures and notes\n");
    for (case, r) in nonlinear {
        match case.expect[r.start - 1] {
            Expect::Fails(why) | Expect::ParamsOnly(why) if !r.passes() => {
                let _ = writeln!(w, "- **{} start {}**: {}.", r.name, r.start, one_line(why));
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
            one_line(e.note),
            printed.join(", ")
        );
    }
    let _ = writeln!(
        w,
        "- **Rat43 (degrees of freedom)**: the file prints 9 degrees of freedom for n = 15, p = 4; \
         its certified residual SD equals √(RSS/11), so n − p = 11 is used (checked by \
         `every_strd_file_parses_and_is_self_consistent` in tests/strd_files.rs)."
    );
    let _ = writeln!(
        w,
        "- **Nelson**: the model is stated for log[y] (natural logarithm, as the certified values \
         show); the recipe's response is a column `ln_y` = ln(y) that the test adds to the CSV, \
         since an equation's left-hand side is a data variable."
    );

    let _ = writeln!(w, "\n## The recipes' equations\n");
    let _ = writeln!(
        w,
        "Translated mechanically from each file's `Model:` block (`**` → `^`, `exp[…]` → \
         `exp(…)`, `arctan` → `atan`, the error term `+ e` dropped, Filip's `+ ... +` written \
         out; see `tests/support/strd_recipe.rs`).\n"
    );
    let _ = writeln!(w, "| Problem | Equation |");
    let _ = writeln!(w, "|---|---|");
    for r in linear {
        let _ = writeln!(w, "| {} | `{}` |", r.case.name, r.equation);
    }
    for (_, r) in nonlinear.iter().filter(|(_, r)| r.start == 1) {
        let _ = writeln!(w, "| {} | `{}` |", r.name, r.equation);
    }
    s
}
