//! Residual diagnostics of a solved fit (SPEC §6): the measures the criteria read and the
//! rows the report shows.

use std::collections::BTreeMap;

use crate::acceptance::{Measure, RunsMeasure};
use crate::model::Prepared;
use crate::report::DiagnosticRow;

use super::solve::Solved;

/// Diagnostics of one fit.
#[derive(Debug, Clone)]
pub struct Diagnostics {
    pub runs: RunsMeasure,
    pub normality_p: Measure,
    pub durbin_watson: Measure,
    pub lack_of_fit_p: Measure,
    pub max_cooks: Measure,
    pub standardized: Vec<Option<f64>>,
    pub leverage: Vec<Option<f64>>,
    pub cooks: Vec<Option<f64>>,
    pub aic: Option<f64>,
    pub aicc: Option<f64>,
    pub bic: Option<f64>,
    pub rows: Vec<DiagnosticRow>,
    pub json: BTreeMap<String, serde_json::Value>,
}

impl Default for Diagnostics {
    fn default() -> Self {
        let na = || Measure::NotApplicable("not computed".into());
        Diagnostics {
            runs: RunsMeasure::NotApplicable("not computed".into()),
            normality_p: na(),
            durbin_watson: na(),
            lack_of_fit_p: na(),
            max_cooks: na(),
            standardized: Vec::new(),
            leverage: Vec::new(),
            cooks: Vec::new(),
            aic: None,
            aicc: None,
            bic: None,
            rows: Vec::new(),
            json: BTreeMap::new(),
        }
    }
}

impl Diagnostics {
    pub fn to_json(&self) -> BTreeMap<String, serde_json::Value> {
        self.json.clone()
    }
}

/// Compute the diagnostics of a fit.
pub fn compute(_prep: &Prepared, _solved: &Solved) -> Diagnostics {
    Diagnostics::default()
}
