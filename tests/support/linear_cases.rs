//! The 11 NIST StRD linear problems, each run as a fitwright recipe (`method = "linear"`,
//! the polynomial or multiple-linear equation written out) through `pipeline::compute`, and
//! scored by LRE against the certified values (source: NIST ITL StRD, "Linear Least Squares
//! Regression", files read in place from the StRD folder).

use std::path::Path;

use fitwright::fit::strd::{Difficulty, lre};

use super::strd_data::load;
use super::strd_recipe::{check_data_read_back, compute, write_recipe};

/// One problem with its required accuracy (issue 5: parameters LRE ≥ 7, standard deviations
/// LRE ≥ 6; the residual SD and R² held to the same 6).
#[derive(Debug, Clone, Copy)]
pub struct LinearCase {
    pub name: &'static str,
    pub min_param_lre: f64,
    pub min_sd_lre: f64,
    pub min_residual_sd_lre: f64,
    pub min_r_squared_lre: f64,
    /// NIST's convention: R² about the mean with a constant term, about zero without one
    /// (NoInt1, NoInt2).
    pub r_squared_kind: &'static str,
}

const fn case(name: &'static str, r_squared_kind: &'static str) -> LinearCase {
    LinearCase {
        name,
        min_param_lre: 7.0,
        min_sd_lre: 6.0,
        min_residual_sd_lre: 6.0,
        min_r_squared_lre: 6.0,
        r_squared_kind,
    }
}

pub const LINEAR_CASES: [LinearCase; 11] = [
    case("Norris", "centred"),
    case("Pontius", "centred"),
    case("NoInt1", "uncentred"),
    case("NoInt2", "uncentred"),
    case("Filip", "centred"),
    case("Longley", "centred"),
    case("Wampler1", "centred"),
    case("Wampler2", "centred"),
    case("Wampler3", "centred"),
    case("Wampler4", "centred"),
    case("Wampler5", "centred"),
];

/// LREs of one linear problem.
#[derive(Debug, Clone)]
pub struct LinearResult {
    pub case: LinearCase,
    pub difficulty: Difficulty,
    /// The recipe's equation.
    pub equation: String,
    /// `fit.method_used` of the result.
    pub method_used: String,
    pub r_squared_kind: String,
    pub param_lre: Vec<f64>,
    pub sd_lre: Vec<f64>,
    pub residual_sd_lre: f64,
    pub r_squared_lre: f64,
}

impl LinearResult {
    pub fn min_param(&self) -> f64 {
        self.param_lre.iter().copied().fold(f64::INFINITY, f64::min)
    }
    pub fn min_sd(&self) -> f64 {
        self.sd_lre.iter().copied().fold(f64::INFINITY, f64::min)
    }

    /// Every way this problem falls short of its case, as messages (empty when it passes).
    pub fn shortfalls(&self) -> Vec<String> {
        let c = &self.case;
        let mut out = Vec::new();
        let mut check = |what: &str, got: f64, need: f64| {
            if got < need || got.is_nan() {
                out.push(format!("{}: {what} LRE {got:.1} < {need}", c.name));
            }
        };
        check("parameter", self.min_param(), c.min_param_lre);
        check("standard deviation", self.min_sd(), c.min_sd_lre);
        check("residual SD", self.residual_sd_lre, c.min_residual_sd_lre);
        check("R²", self.r_squared_lre, c.min_r_squared_lre);
        if self.method_used != "linear" {
            out.push(format!(
                "{}: fitted by {}, not the linear method",
                c.name, self.method_used
            ));
        }
        if self.r_squared_kind != c.r_squared_kind {
            out.push(format!(
                "{}: R² {}, NIST certifies it {}",
                c.name, self.r_squared_kind, c.r_squared_kind
            ));
        }
        out
    }
}

/// Write the problem's recipe, run it, and score it.
pub fn run_linear(dir: &Path, case: LinearCase) -> LinearResult {
    let prob = load(dir, "linear", case.name);
    let recipe = write_recipe(&prob, 1, None);
    let doc = compute(&recipe).unwrap_or_else(|e| {
        panic!(
            "{}: the recipe `{}` does not run: {}",
            case.name, recipe.translated.equation, e.message
        )
    });
    check_data_read_back(&prob, &recipe, &doc);
    assert_eq!(
        doc.statistics.dof, prob.dof,
        "{}: degrees of freedom",
        case.name
    );
    let param_lre = doc
        .parameters
        .iter()
        .zip(&prob.parameters)
        .map(|(b, c)| lre(b.value, c.value, c.value_digits))
        .collect();
    let sd_lre = doc
        .parameters
        .iter()
        .zip(&prob.parameters)
        .map(|(b, c)| lre(b.std_error.unwrap_or(f64::NAN), c.std_dev, c.std_dev_digits))
        .collect();
    let certified_r2 = prob
        .r_squared
        .unwrap_or_else(|| panic!("{}: every linear StRD file certifies R²", case.name));
    LinearResult {
        case,
        difficulty: prob.difficulty,
        equation: recipe.translated.equation.clone(),
        method_used: doc.fit.method_used.clone(),
        r_squared_kind: doc.statistics.r_squared_kind.clone(),
        param_lre,
        sd_lre,
        residual_sd_lre: lre(
            doc.statistics.std_error,
            prob.residual_sd,
            prob.residual_sd_digits,
        ),
        r_squared_lre: lre(
            doc.statistics.r_squared.unwrap_or(f64::NAN),
            certified_r2,
            15,
        ),
    }
}
