//! The 27 NIST StRD nonlinear problems from both starting points (54 fits), each run as a
//! fitwright recipe (`method = "nonlinear"`, the model translated from the file's header, the
//! file's Start 1 or Start 2 as `start`) through `pipeline::compute`, and scored by LRE
//! against the certified values (source: NIST ITL StRD, "Nonlinear Regression", files read
//! in place from the StRD folder).

use std::path::Path;

use fitwright::fit::strd::{Difficulty, StrdProblem, lre};

use super::strd_data::load;
use super::strd_recipe::{check_data_read_back, compute, write_recipe};

/// Required accuracy of a passing fit (issue 5): every parameter LRE ≥ 6, every certified
/// standard deviation LRE ≥ 4.
pub const MIN_PARAM_LRE: f64 = 6.0;
pub const MIN_SD_LRE: f64 = 4.0;
/// At least this many of the 54 fits must pass (issue 5).
pub const MIN_PASSING_FITS: usize = 50;

/// What a fit is expected to do.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Expect {
    /// Parameter LRE ≥ 6 and SD LRE ≥ 4.
    Pass,
    /// Parameter LRE ≥ 6 asserted; the standard deviations fall short for the stated reason.
    ParamsOnly(&'static str),
    /// A known failure with its reason; the fit must then say that it did not converge
    /// (a wrong answer reported as converged is a regression). A fit listed here that starts
    /// passing is reported so the table can be updated.
    Fails(&'static str),
}

#[derive(Debug, Clone, Copy)]
pub struct NonlinearCase {
    pub name: &'static str,
    /// Expectations from start 1 and start 2.
    pub expect: [Expect; 2],
}

const fn pass(name: &'static str) -> NonlinearCase {
    NonlinearCase {
        name,
        expect: [Expect::Pass, Expect::Pass],
    }
}

const LANCZOS1_SD: &str = "certified RSS 1.4e-25: residuals of ~8e-14 sit at the rounding level of \
     model values near 1, so double-precision residuals carry only ~3 digits and s (hence every \
     SD) inherits that; the parameters themselves reach LRE ≥ 10";

/// Per-problem expectations, in the order of NIST's listing (lower, average, higher).
pub const NONLINEAR_CASES: [NonlinearCase; 27] = [
    pass("Misra1a"),
    pass("Chwirut2"),
    pass("Chwirut1"),
    pass("Lanczos3"),
    pass("Gauss1"),
    pass("Gauss2"),
    pass("DanWood"),
    pass("Misra1b"),
    pass("Kirby2"),
    pass("Hahn1"),
    pass("Nelson"),
    pass("MGH17"),
    NonlinearCase {
        name: "Lanczos1",
        // Start 2 passes since the final Gauss–Newton step (fit::lm, `refine`): SD LRE 4.3,
        // just above 4; start 1 ends at 3.2.
        expect: [Expect::ParamsOnly(LANCZOS1_SD), Expect::Pass],
    },
    pass("Lanczos2"),
    pass("Gauss3"),
    pass("Misra1c"),
    pass("Misra1d"),
    pass("Roszman1"),
    pass("ENSO"),
    pass("MGH09"),
    pass("Thurber"),
    pass("BoxBOD"),
    pass("Rat42"),
    NonlinearCase {
        name: "MGH10",
        expect: [
            Expect::Fails(
                "from start 1 (b2 = 4e5, b3 = 2.5e4) the first steps drive b1 from 2 towards \
                 1e-33 while exp(b2/(x+b3)) grows to compensate; the iterates then crawl back along \
                 that valley and reach the certified solution (LRE 10.9) only after 1553 Jacobian \
                 evaluations, beyond the 800 allowed by SPEC §13 (measured with the recipe's \
                 compiled model and lm::fit with the limit raised)",
            ),
            Expect::Pass,
        ],
    },
    pass("Eckerle4"),
    pass("Rat43"),
    pass("Bennett5"),
];

/// A certified value as printed in a StRD file that contradicts the same file's certified
/// residual sum of squares; scored against the corrected value, both shown in the table.
#[derive(Debug, Clone, Copy)]
pub struct Erratum {
    pub problem: &'static str,
    /// 0-based parameter index.
    pub param: usize,
    pub corrected: f64,
    pub note: &'static str,
}

/// Roszman1's b1 is printed as 1.20196866396E-0 in the copy read here. With the principal
/// branch of arctan (|arctan| < π/2), the file's own certified parameters reproduce its own
/// certified RSS only with b1 − 1 = 0.20196866396 (checked by
/// `roszman1_printed_b1_contradicts_the_certified_rss` in tests/strd_conformance.rs); the printed
/// value corresponds to an arctan taking values in (0, π) for these negative arguments.
pub const ERRATA: [Erratum; 1] = [Erratum {
    problem: "Roszman1",
    param: 0,
    corrected: 0.201_968_663_96,
    note: "b1 printed as 1.20196866396; with the principal branch of arctan the file's own \
           certified RSS is reproduced only by b1 − 1 = 0.20196866396, which is scored (NIST's \
           web page for Roszman1 gives 2.0196866396E-01, from memory)",
}];

pub fn erratum(problem: &str, param: usize) -> Option<&'static Erratum> {
    ERRATA
        .iter()
        .find(|e| e.problem == problem && e.param == param)
}

/// Outcome of one fit, scored.
#[derive(Debug, Clone)]
pub struct NonlinearResult {
    pub name: &'static str,
    pub start: usize,
    pub difficulty: Difficulty,
    /// The recipe's equation.
    pub equation: String,
    /// The stop reason's text, or the error that prevented a fit.
    pub stop: String,
    pub converged: bool,
    pub iterations: usize,
    pub jacobian_evals: usize,
    pub param_lre: Vec<f64>,
    /// LRE against the value as printed, where an erratum applies.
    pub printed_param_lre: Vec<Option<f64>>,
    /// Empty when the fit gave no standard errors.
    pub sd_lre: Vec<f64>,
    pub rss_lre: f64,
    pub residual_sd_lre: f64,
}

impl NonlinearResult {
    pub fn min_param(&self) -> f64 {
        self.param_lre
            .iter()
            .copied()
            .fold(f64::INFINITY, f64::min)
            .max(0.0)
    }
    pub fn min_sd(&self) -> f64 {
        if self.sd_lre.is_empty() {
            0.0
        } else {
            self.sd_lre.iter().copied().fold(f64::INFINITY, f64::min)
        }
    }
    pub fn params_pass(&self) -> bool {
        self.min_param() >= MIN_PARAM_LRE
    }
    pub fn passes(&self) -> bool {
        self.min_param() >= MIN_PARAM_LRE && self.min_sd() >= MIN_SD_LRE
    }
}

/// Load a nonlinear problem by name.
pub fn problem(dir: &Path, name: &str) -> StrdProblem {
    load(dir, "nonlinear", name)
}

/// Write the recipe of one problem and start, run it, and score it.
pub fn run_nonlinear(prob: &StrdProblem, name: &'static str, start: usize) -> NonlinearResult {
    let p = prob.parameters.len();
    let recipe = write_recipe(prob, start, None);
    let mut result = NonlinearResult {
        name,
        start,
        difficulty: prob.difficulty,
        equation: recipe.translated.equation.clone(),
        stop: String::new(),
        converged: false,
        iterations: 0,
        jacobian_evals: 0,
        param_lre: vec![0.0; p],
        printed_param_lre: vec![None; p],
        sd_lre: Vec::new(),
        rss_lre: 0.0,
        residual_sd_lre: 0.0,
    };
    let doc = match compute(&recipe) {
        Ok(d) => d,
        Err(e) => {
            result.stop = format!("error: {}", e.message);
            return result;
        }
    };
    check_data_read_back(prob, &recipe, &doc);
    result.stop = doc.fit.stop_reason.clone();
    result.converged = doc.fit.converged;
    result.iterations = doc.fit.iterations;
    result.jacobian_evals = doc.fit.jacobian_evaluations;
    for (j, (b, c)) in doc.parameters.iter().zip(&prob.parameters).enumerate() {
        let printed = lre(b.value, c.value, c.value_digits);
        match erratum(name, j) {
            Some(e) => {
                result.param_lre[j] = lre(b.value, e.corrected, c.value_digits);
                result.printed_param_lre[j] = Some(printed);
            }
            None => result.param_lre[j] = printed,
        }
    }
    if let Some(rss) = prob.residual_ss {
        result.rss_lre = lre(doc.statistics.ssr, rss, 11);
    }
    result.residual_sd_lre = lre(
        doc.statistics.std_error,
        prob.residual_sd,
        prob.residual_sd_digits,
    );
    if doc.parameters.iter().all(|b| b.std_error.is_some()) {
        result.sd_lre = doc
            .parameters
            .iter()
            .zip(&prob.parameters)
            .map(|(b, c)| lre(b.std_error.unwrap_or(f64::NAN), c.std_dev, c.std_dev_digits))
            .collect();
    }
    result
}

/// All 54 fits, in table order (start 1 then 2 for each problem).
pub fn run_all(dir: &Path) -> Vec<(NonlinearCase, NonlinearResult)> {
    let mut out = Vec::new();
    for case in NONLINEAR_CASES {
        let prob = problem(dir, case.name);
        for start in [1, 2] {
            out.push((case, run_nonlinear(&prob, case.name, start)));
        }
    }
    out
}
