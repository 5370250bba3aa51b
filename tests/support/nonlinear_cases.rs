//! The 27 NIST StRD nonlinear problems from both starting points (54 fits): the fit through
//! `fit::lm` with the hand-coded models of `nist_models`, the standard deviations through
//! `fit::covariance`, scored by LRE against the certified values (source: NIST ITL StRD,
//! "Nonlinear Regression", files read in place from the StRD folder).

use std::path::Path;

use fitwright::fit::covariance::{self, UncertaintySettings};
use fitwright::fit::lm::{self, LmOptions, Observations};
use fitwright::fit::strd::{Difficulty, StrdProblem, lre};

use super::nist_models::NistModel;
use super::strd_data::load;

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
        expect: [
            Expect::ParamsOnly(LANCZOS1_SD),
            Expect::ParamsOnly(LANCZOS1_SD),
        ],
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
                "from start 1 (b2 = 4e5, b3 = 2.5e4) the first steps drive b1 towards 1e-48 while \
                 exp(b2/(x+b3)) grows to compensate; the iterates then crawl back along that \
                 valley and reach the certified solution (LRE 11) only after about 1550 Jacobian \
                 evaluations, beyond the 800 allowed by SPEC §13 (measured by raising the limit)",
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
/// `roszman1_printed_b1_contradicts_the_certified_rss` in tests/strd_nonlinear.rs); the printed
/// value corresponds to an arctan taking values in (0, π) for these negative arguments.
pub const ERRATA: [Erratum; 1] = [Erratum {
    problem: "Roszman1",
    param: 0,
    corrected: 0.201_968_663_96,
    note: "b1 printed as 1.20196866396; with the principal branch of arctan the file's own \
           certified RSS is reproduced only by b1 − 1 = 0.20196866396, which is scored",
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
    pub n_params: usize,
    /// The stop reason's text, or the error that prevented a fit.
    pub stop: String,
    pub converged: bool,
    pub iterations: usize,
    pub jacobian_evals: usize,
    pub function_evals: usize,
    pub param_lre: Vec<f64>,
    /// LRE against the value as printed, where an erratum applies.
    pub printed_param_lre: Vec<Option<f64>>,
    /// Empty when the covariance could not be computed.
    pub sd_lre: Vec<f64>,
    pub rss_lre: f64,
    pub residual_sd_lre: f64,
    /// Why the covariance failed, if it did.
    pub covariance_error: Option<String>,
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

/// A problem ready to fit: parsed file, model and response.
pub struct Prepared {
    pub problem: StrdProblem,
    pub model: NistModel,
    pub y: Vec<f64>,
}

pub fn prepare(dir: &Path, name: &'static str) -> Prepared {
    let problem = load(dir, "nonlinear", name);
    let model = NistModel::new(name, &problem.x);
    let y = model.response(&problem.y);
    Prepared { problem, model, y }
}

/// Start values 1 or 2 of a problem.
pub fn start_values(problem: &StrdProblem, start: usize) -> Vec<f64> {
    problem
        .parameters
        .iter()
        .map(|p| p.starts.expect("nonlinear StRD files give two starts")[start - 1])
        .collect()
}

/// Fit one problem from one start and score it.
pub fn run_nonlinear(prep: &Prepared, name: &'static str, start: usize) -> NonlinearResult {
    let prob = &prep.problem;
    let p = prob.parameters.len();
    assert_eq!(
        lm::Model::n_params(&prep.model),
        p,
        "{name}: model vs certified parameters"
    );
    let theta0 = start_values(prob, start);
    let obs = Observations {
        y: &prep.y,
        weights: None,
    };
    let mut result = NonlinearResult {
        name,
        start,
        difficulty: prob.difficulty,
        n_params: p,
        stop: String::new(),
        converged: false,
        iterations: 0,
        jacobian_evals: 0,
        function_evals: 0,
        param_lre: vec![0.0; p],
        printed_param_lre: vec![None; p],
        sd_lre: Vec::new(),
        rss_lre: 0.0,
        residual_sd_lre: 0.0,
        covariance_error: None,
    };
    let out = match lm::fit(&prep.model, &obs, &theta0, None, &LmOptions::default()) {
        Ok(o) => o,
        Err(e) => {
            result.stop = format!("error: {e}");
            return result;
        }
    };
    result.stop = out.stop.to_string();
    result.converged = out.stop.converged();
    result.iterations = out.iterations;
    result.jacobian_evals = out.jacobian_evals;
    result.function_evals = out.function_evals;
    for (j, (b, c)) in out.params.iter().zip(&prob.parameters).enumerate() {
        let printed = lre(*b, c.value, c.value_digits);
        match erratum(name, j) {
            Some(e) => {
                result.param_lre[j] = lre(*b, e.corrected, c.value_digits);
                result.printed_param_lre[j] = Some(printed);
            }
            None => result.param_lre[j] = printed,
        }
    }
    if let Some(rss) = prob.residual_ss {
        result.rss_lre = lre(out.ssr, rss, 11);
    }
    let n = prep.y.len();
    result.residual_sd_lre = lre(
        (out.ssr / (n - p) as f64).sqrt(),
        prob.residual_sd,
        prob.residual_sd_digits,
    );
    let names: Vec<&str> = prob.parameters.iter().map(|c| c.name.as_str()).collect();
    match covariance::uncertainty_from_jacobian(
        &out.jacobian,
        None,
        &out.params,
        &out.at_bound,
        &names,
        out.ssr,
        UncertaintySettings::default(),
    ) {
        Ok(u) => {
            result.sd_lre = u
                .std_errors
                .iter()
                .zip(&prob.parameters)
                .map(|(se, c)| lre(se.unwrap_or(f64::NAN), c.std_dev, c.std_dev_digits))
                .collect();
        }
        Err(e) => result.covariance_error = Some(e.to_string()),
    }
    result
}

/// All 54 fits, in table order (start 1 then 2 for each problem).
pub fn run_all(dir: &Path) -> Vec<(NonlinearCase, NonlinearResult)> {
    let mut out = Vec::new();
    for case in NONLINEAR_CASES {
        let prep = prepare(dir, case.name);
        for start in [1, 2] {
            out.push((case, run_nonlinear(&prep, case.name, start)));
        }
    }
    out
}
