//! The 11 NIST StRD linear problems: design matrices built directly from the data, the fit
//! through `fit::linear`, the statistics through `fit::covariance`, scored by LRE against the
//! certified values (source: NIST ITL StRD, "Linear Least Squares Regression", files read in
//! place from the StRD folder).

use std::path::Path;

use fitwright::fit::covariance::{self, UncertaintyMode, UncertaintySettings};
use fitwright::fit::linear::fit_linear;
use fitwright::fit::strd::{Difficulty, lre};
use nalgebra::DMatrix;

use super::strd_data::load;

/// How the design matrix of a problem is built from its predictor columns.
#[derive(Debug, Clone, Copy)]
pub enum Design {
    /// 1, x, x², …, x^degree.
    Polynomial { degree: u32 },
    /// x only (regression through the origin).
    ThroughOrigin,
    /// 1, x₁, …, x_k (one column per predictor).
    MultipleLinear,
}

/// One problem with its required accuracy (issue 5: parameters LRE ≥ 7, standard deviations
/// LRE ≥ 6; residual SD held to the same 6).
#[derive(Debug, Clone, Copy)]
pub struct LinearCase {
    pub name: &'static str,
    pub design: Design,
    pub min_param_lre: f64,
    pub min_sd_lre: f64,
    pub min_residual_sd_lre: f64,
}

const fn case(name: &'static str, design: Design) -> LinearCase {
    LinearCase {
        name,
        design,
        min_param_lre: 7.0,
        min_sd_lre: 6.0,
        min_residual_sd_lre: 6.0,
    }
}

pub const LINEAR_CASES: [LinearCase; 11] = [
    case("Norris", Design::Polynomial { degree: 1 }),
    case("Pontius", Design::Polynomial { degree: 2 }),
    case("NoInt1", Design::ThroughOrigin),
    case("NoInt2", Design::ThroughOrigin),
    case("Filip", Design::Polynomial { degree: 10 }),
    case("Longley", Design::MultipleLinear),
    case("Wampler1", Design::Polynomial { degree: 5 }),
    case("Wampler2", Design::Polynomial { degree: 5 }),
    case("Wampler3", Design::Polynomial { degree: 5 }),
    case("Wampler4", Design::Polynomial { degree: 5 }),
    case("Wampler5", Design::Polynomial { degree: 5 }),
];

/// LREs of one linear problem.
#[derive(Debug, Clone)]
pub struct LinearResult {
    pub case: LinearCase,
    pub difficulty: Difficulty,
    pub param_lre: Vec<f64>,
    pub sd_lre: Vec<f64>,
    pub residual_sd_lre: f64,
    pub r_squared_lre: Option<f64>,
    pub condition: f64,
}

impl LinearResult {
    pub fn min_param(&self) -> f64 {
        self.param_lre.iter().copied().fold(f64::INFINITY, f64::min)
    }
    pub fn min_sd(&self) -> f64 {
        self.sd_lre.iter().copied().fold(f64::INFINITY, f64::min)
    }
}

fn design_matrix(design: Design, x: &[Vec<f64>]) -> DMatrix<f64> {
    let n = x[0].len();
    match design {
        Design::Polynomial { degree } => {
            DMatrix::from_fn(n, degree as usize + 1, |i, j| x[0][i].powi(j as i32))
        }
        Design::ThroughOrigin => DMatrix::from_fn(n, 1, |i, _| x[0][i]),
        Design::MultipleLinear => {
            DMatrix::from_fn(
                n,
                x.len() + 1,
                |i, j| if j == 0 { 1.0 } else { x[j - 1][i] },
            )
        }
    }
}

/// Fit one problem and score it.
pub fn run_linear(dir: &Path, case: LinearCase) -> LinearResult {
    let prob = load(dir, "linear", case.name);
    let design = design_matrix(case.design, &prob.x);
    let names: Vec<&str> = prob.parameters.iter().map(|p| p.name.as_str()).collect();
    assert_eq!(
        design.ncols(),
        names.len(),
        "{}: design columns vs certified parameters",
        case.name
    );
    let fit =
        fit_linear(&design, &prob.y, None, &names).unwrap_or_else(|e| panic!("{}: {e}", case.name));
    let p = names.len();
    let has_constant = !matches!(case.design, Design::ThroughOrigin);
    let stats = covariance::fit_statistics(
        &prob.y,
        None,
        &fit.fitted,
        p,
        has_constant,
        UncertaintyMode::Residuals,
    )
    .unwrap_or_else(|e| panic!("{}: {e}", case.name));
    assert_eq!(stats.dof, prob.dof, "{}: degrees of freedom", case.name);
    let unc = covariance::uncertainty_from_unscaled(
        &fit.unscaled_covariance,
        &fit.coefficients,
        &vec![true; p],
        prob.y.len(),
        fit.ssr,
        UncertaintySettings::default(),
    )
    .unwrap_or_else(|e| panic!("{}: {e}", case.name));
    let param_lre = fit
        .coefficients
        .iter()
        .zip(&prob.parameters)
        .map(|(b, c)| lre(*b, c.value, c.value_digits))
        .collect();
    let sd_lre = unc
        .std_errors
        .iter()
        .zip(&prob.parameters)
        .map(|(se, c)| lre(se.unwrap_or(f64::NAN), c.std_dev, c.std_dev_digits))
        .collect();
    let r_squared_lre = match (prob.r_squared, stats.r_squared) {
        (Some(c), Some(v)) => Some(lre(v, c, 15)),
        _ => None,
    };
    LinearResult {
        case,
        difficulty: prob.difficulty,
        param_lre,
        sd_lre,
        residual_sd_lre: lre(stats.residual_sd, prob.residual_sd, prob.residual_sd_digits),
        r_squared_lre,
        condition: fit.condition,
    }
}
