//! `result.json` (SPEC §8): everything `predict`, `verify` and `index` need, with a
//! `schema_version`. The layout is documented field by field here and in DEVELOPERS.md;
//! a change that removes or renames a field, or changes what one holds, raises
//! [`SCHEMA_VERSION`].
//!
//! Versions:
//! - 1: `residuals` lists every row.
//! - 2: `residuals` lists every row up to [`RESIDUAL_ROWS_ALL`] rows, and for larger data
//!   sets only the [`RESIDUAL_ROWS_KEPT`] rows with the largest |standardized residual|
//!   (a million-row run wrote a 340 MB result.json); `residual_rows` says which rows are
//!   listed, and `data.moments` keeps the per-predictor n, mean and Sxx that `predict`
//!   needs (Fieller's interval) without the rows. Version 1 files are still read: their
//!   full residual table gives the same moments.

use std::collections::BTreeMap;

use serde::{Deserialize, Serialize};

/// Version of the layout below.
pub const SCHEMA_VERSION: u32 = 2;

/// Oldest version [`ResultDoc::read`] accepts (see the module docs).
pub const OLDEST_READABLE_VERSION: u32 = 1;

/// Up to this many rows, `residuals` lists every row.
pub const RESIDUAL_ROWS_ALL: usize = 10_000;

/// Rows listed in `residuals` for larger data sets.
pub const RESIDUAL_ROWS_KEPT: usize = 1_000;

#[derive(Debug, Clone, Serialize, Deserialize)]
pub struct ResultDoc {
    pub schema_version: u32,
    pub tool: ToolInfo,
    /// `YYYYMMDDTHHMMSSZ-xxxxxxxx` (UTC time and the first 8 hex digits of the inputs' hash).
    pub run_id: String,
    /// UTC time of the run, `YYYY-MM-DDTHH:MM:SSZ` (from `SOURCE_DATE_EPOCH` when set).
    pub generated_at: String,
    pub recipe: RecipeInfo,
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub channel: Option<String>,
    /// `accepted`, `rejected` or `not-judged` (SPEC §7).
    pub verdict: String,
    /// The verdict as people read it ("criteria met — awaiting review", …).
    pub verdict_wording: String,
    pub criteria: Vec<CriterionDoc>,
    pub data: DataInfo,
    pub model: ModelInfo,
    /// The linearizability analysis (see `analysis` module), as data.
    pub analysis: serde_json::Value,
    pub fit: FitInfo,
    /// The final parameters (all of them, fixed ones included, in declaration order).
    pub parameters: Vec<ParamResult>,
    /// The linearized start of an `auto` fit, kept to show the linearization bias.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub start_fit: Option<StartFit>,
    /// Covariance of the free parameters, in the order of `free_parameters`.
    pub free_parameters: Vec<String>,
    pub covariance: Vec<Vec<f64>>,
    pub correlation: Vec<Vec<f64>>,
    pub statistics: Statistics,
    pub diagnostics: BTreeMap<String, serde_json::Value>,
    /// Row table: every row, or for more than [`RESIDUAL_ROWS_ALL`] rows a selection (see
    /// `residual_rows`), in row order.
    pub residuals: Vec<ResidualRow>,
    /// Which rows `residuals` lists (version 2; absent in version 1, where it is every row).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub residual_rows: Option<ResidualSelection>,
    #[serde(default)]
    pub compare: Vec<serde_json::Value>,
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub calibration: Option<serde_json::Value>,
    pub warnings: Vec<String>,
    /// Every setting that influenced the numbers.
    pub settings: BTreeMap<String, String>,
    /// The calibration record of SPEC §14 (report id, dates, item, procedure, standards,
    /// conditions, uncertainty budget, decision rule); absent in results of older versions.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub metrology: Option<MetrologyDoc>,
    /// `run --as-found`: the new data judged against the last curve that met its criteria,
    /// before the new fit.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub as_found: Option<AsFoundDoc>,
}

/// The calibration record of a run (SPEC §14).
#[derive(Debug, Clone, Serialize, Deserialize)]
pub struct MetrologyDoc {
    /// `<name>-<run id>`, unique per report.
    pub report_id: String,
    /// The report id this one amends and replaces (`[report] supersedes`).
    pub supersedes: Option<String>,
    /// Date of issue: the UTC date of the run.
    pub issued_on: Option<crate::metrology::Date>,
    /// `[conditions] measured_on`.
    pub measured_on: Option<crate::metrology::Date>,
    pub item: Option<crate::metrology::record::Item>,
    pub procedure: Option<crate::metrology::record::Procedure>,
    pub standards: Vec<crate::metrology::record::Standard>,
    pub conditions: Vec<crate::metrology::record::Condition>,
    /// Components (the standards that state `u`, then `[uncertainty] components`) and the
    /// coverage rule: what `predict` combines with the fit uncertainty.
    pub budget: crate::metrology::Budget,
    pub decision_rule: crate::metrology::DecisionRule,
    /// `[decision] tolerance` / `tolerance_x`, the tolerance of every calibration point.
    pub tolerance: Option<ToleranceDoc>,
    /// Values read off the curve across the calibrated range with their budgets (inverse:
    /// the predictor from one new reading).
    pub read_offs: Vec<crate::metrology::ReadOff>,
    /// The calibration points against the new curve (with `[decision] tolerance`).
    pub as_left: Option<crate::metrology::as_found::Deviations>,
    /// Why read-offs could not be computed, if they could not (e.g. several predictors).
    pub read_off_note: Option<String>,
}

/// A tolerance and the variable it is in.
#[derive(Debug, Clone, Serialize, Deserialize)]
pub struct ToleranceDoc {
    pub tolerance: crate::metrology::Tolerance,
    pub axis: crate::metrology::Axis,
    /// As a procedure writes it, e.g. "±(0.05 % of reading + 0.02 % of full scale 100 °C)".
    pub text: String,
}

/// The as-found judgement of `run --as-found`.
#[derive(Debug, Clone, Serialize, Deserialize)]
pub struct AsFoundDoc {
    /// The run whose curve the new data were judged against.
    pub against_run: String,
    pub against_time: String,
    /// Whether every point passed under the decision rule.
    pub within_tolerance: bool,
    /// "18 of 19 points pass (18 pass, 1 conditional pass)".
    pub summary: String,
    pub deviations: crate::metrology::as_found::Deviations,
}

#[derive(Debug, Clone, Serialize, Deserialize)]
pub struct ToolInfo {
    pub name: String,
    pub version: String,
}

#[derive(Debug, Clone, Serialize, Deserialize)]
pub struct RecipeInfo {
    /// Path of the recipe as it was run (relative to the working directory of the run).
    pub path: String,
    /// Absolute path at the time of the run, for `verify` from another folder.
    pub absolute_path: String,
    pub sha256: String,
    pub name: String,
    pub title: String,
}

#[derive(Debug, Clone, Serialize, Deserialize)]
pub struct CriterionDoc {
    pub key: String,
    pub criterion: String,
    pub limit: String,
    pub limit_value: f64,
    pub measured: String,
    pub measured_value: Option<f64>,
    /// `pass`, `fail` or `not-applicable`.
    pub status: String,
    pub note: Option<String>,
}

#[derive(Debug, Clone, Serialize, Deserialize)]
pub struct DataFileInfo {
    pub path: String,
    pub sha256: String,
    pub rows: usize,
}

#[derive(Debug, Clone, Serialize, Deserialize)]
pub struct DataInfo {
    pub files: Vec<DataFileInfo>,
    pub rows_read: usize,
    pub rows_used: usize,
    pub rows_filtered: usize,
    pub rows_skipped: usize,
    pub units: BTreeMap<String, String>,
    /// Calibrated range of each predictor: [min, max] over the rows used.
    pub ranges: BTreeMap<String, [f64; 2]>,
    /// The weights expression, if any.
    pub weights: Option<String>,
    /// Per predictor: n, mean and Sxx of the rows used (version 2; empty in version 1).
    #[serde(default, skip_serializing_if = "BTreeMap::is_empty")]
    pub moments: BTreeMap<String, Moments>,
}

/// n, mean and `Sxx = Σ(x − x̄)²` of a predictor over the rows used.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct Moments {
    pub n: usize,
    pub mean: f64,
    pub sxx: f64,
}

impl Moments {
    /// Two passes (mean, then squared deviations) for accuracy on offset data.
    pub fn of(x: &[f64]) -> Moments {
        let n = x.len();
        let mean = if n == 0 {
            f64::NAN
        } else {
            x.iter().sum::<f64>() / n as f64
        };
        let sxx = x.iter().map(|v| (v - mean) * (v - mean)).sum();
        Moments { n, mean, sxx }
    }
}

/// Which rows the `residuals` table of a large run lists.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct ResidualSelection {
    /// Rows used by the fit.
    pub total: usize,
    /// Rows listed.
    pub listed: usize,
    /// How they were chosen, in words.
    pub rule: String,
}

#[derive(Debug, Clone, Serialize, Deserialize)]
pub struct ParamInfo {
    pub name: String,
    pub start: Option<f64>,
    pub min: Option<f64>,
    pub max: Option<f64>,
    pub fixed: Option<f64>,
    pub unit: Option<String>,
}

#[derive(Debug, Clone, Serialize, Deserialize)]
pub struct ModelInfo {
    pub equation: String,
    pub preset: Option<String>,
    pub response: String,
    pub predictors: Vec<String>,
    pub parameters: Vec<ParamInfo>,
}

#[derive(Debug, Clone, Serialize, Deserialize)]
pub struct FitInfo {
    /// As the recipe asked (`auto`, `linear`, `linearized`, `nonlinear`).
    pub method_requested: String,
    /// What was run: `linear`, `linearized`, `nonlinear`, or `linearized+nonlinear`.
    pub method_used: String,
    /// The transform of the linearized fit, if one was used.
    pub transform: Option<String>,
    pub converged: bool,
    pub stop_reason: String,
    pub iterations: usize,
    pub jacobian_evaluations: usize,
    /// `residuals` or `weights`.
    pub uncertainty: String,
    pub confidence: f64,
    /// How parameter standard errors were obtained (e.g. "s²(JᵀWJ)⁻¹ at the solution").
    pub covariance_method: String,
}

#[derive(Debug, Clone, Serialize, Deserialize)]
pub struct ParamResult {
    pub name: String,
    pub value: f64,
    pub std_error: Option<f64>,
    pub rel_std_error: Option<f64>,
    pub ci_low: Option<f64>,
    pub ci_high: Option<f64>,
    pub fixed: bool,
    pub at_bound: bool,
    pub unit: Option<String>,
}

#[derive(Debug, Clone, Serialize, Deserialize)]
pub struct StartFit {
    pub label: String,
    pub transform: String,
    pub parameters: Vec<ParamResult>,
    /// Statistics of the start parameters in the original space.
    pub statistics: Statistics,
    pub diagnostics: BTreeMap<String, serde_json::Value>,
}

#[derive(Debug, Clone, Serialize, Deserialize)]
pub struct Statistics {
    pub n: usize,
    pub p: usize,
    pub dof: usize,
    /// Σw·e² in the original space.
    pub ssr: f64,
    pub r_squared: Option<f64>,
    /// `centred` or `uncentred`.
    pub r_squared_kind: String,
    pub adj_r_squared: Option<f64>,
    /// s = √(Σw·e²/(n−p)).
    pub std_error: f64,
    /// √(Σe²/(n−p)), the figure `std_error_max` compares for weighted fits.
    pub rms_residual: f64,
    pub max_abs_residual: f64,
    /// t (or z) quantile of the intervals.
    pub quantile: f64,
    /// σ² of a unit-weight observation (s² or 1).
    pub unit_variance: f64,
    pub chi_square: Option<[f64; 3]>,
    pub aic: Option<f64>,
    pub aicc: Option<f64>,
    pub bic: Option<f64>,
}

#[derive(Debug, Clone, Serialize, Deserialize)]
pub struct ResidualRow {
    /// `file:line` of the row.
    pub origin: String,
    pub x: Vec<f64>,
    pub y: f64,
    pub fitted: f64,
    pub residual: f64,
    pub weight: f64,
    pub standardized: Option<f64>,
    pub leverage: Option<f64>,
    pub cooks_distance: Option<f64>,
}

impl ResultDoc {
    /// Read a `result.json`, checking its schema version.
    pub fn read(path: &std::path::Path) -> crate::Result<ResultDoc> {
        let text = std::fs::read_to_string(path).map_err(|e| {
            crate::Error::input(format!("cannot read the result: {e}"))
                .in_file(path)
                .help("give the path of a result.json written by `fitwright run`")
        })?;
        let doc: ResultDoc = serde_json::from_str(&text).map_err(|e| {
            crate::Error::input(format!("not a fitwright result.json: {e}"))
                .at(crate::source::locate_in(
                    path,
                    &text,
                    line_offset(&text, e.line(), e.column())
                        ..line_offset(&text, e.line(), e.column()) + 1,
                ))
                .help("give the path of a result.json written by `fitwright run`")
        })?;
        if !(OLDEST_READABLE_VERSION..=SCHEMA_VERSION).contains(&doc.schema_version) {
            return Err(crate::Error::input(format!(
                "result.json has schema version {}, this fitwright reads versions {OLDEST_READABLE_VERSION} to {SCHEMA_VERSION}",
                doc.schema_version
            ))
            .in_file(path)
            .help("use the fitwright version named in the result's `tool.version`"));
        }
        Ok(doc)
    }

    /// n, mean and Sxx of a predictor: from `data.moments`, or for a version 1 file (whose
    /// `residuals` list every row) from the residual table.
    pub fn moments(&self, predictor: &str) -> Option<Moments> {
        if let Some(m) = self.data.moments.get(predictor) {
            return Some(*m);
        }
        if self.residual_rows.is_some() {
            return None;
        }
        let k = self.model.predictors.iter().position(|p| p == predictor)?;
        let x: Vec<f64> = self
            .residuals
            .iter()
            .filter_map(|r| r.x.get(k).copied())
            .collect();
        Some(Moments::of(&x))
    }

    /// Value of a parameter by name.
    pub fn param(&self, name: &str) -> Option<&ParamResult> {
        self.parameters.iter().find(|p| p.name == name)
    }
}

fn line_offset(text: &str, line: usize, column: usize) -> usize {
    let mut offset = 0;
    for (i, l) in text.split_inclusive('\n').enumerate() {
        if i + 1 == line {
            return offset + column.saturating_sub(1).min(l.len());
        }
        offset += l.len();
    }
    text.len()
}
