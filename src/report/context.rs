//! The report context: the one value templates see.
//!
//! [`ReportContext`] holds everything SPEC §8 puts in a report, as plain,
//! already formatted text (fill number cells with [`crate::report::format`] so
//! every report uses one number style). Templates get it serialised with
//! serde; the field names below are the names templates use
//! (`{{ verdict.wording }}`, `{% for row in criteria %}`…).
//!
//! Conventions:
//! - `Option` fields are `none` in templates when absent; empty lists mean
//!   "nothing to show" and templates leave the section or table out;
//! - every string is user text: templates escape it (HTML auto-escape, a
//!   Markdown escaper) — none of it may contain markup;
//! - lists keep the order the pipeline gives (no maps, so output is
//!   deterministic).
//!
//! The verdict wording and the status labels are derived from their codes
//! when serialised, so a code and its wording can never disagree.

use serde::Serialize;
use serde::ser::SerializeStruct;

use super::plot::Svg;

/// Version of the context layout, given to templates as `context_version` so
/// an override template can check it was written for this layout.
pub const CONTEXT_VERSION: u32 = 1;

/// The caution of SPEC §12, shown in full in every report.
pub const CAUTION: &str = "Calibration results can feed decisions about safety, health and legal \
metrology. The report is an aid to a qualified person's review; acceptance by this tool does not \
replace the laboratory's documented procedure, its accreditation requirements (for example \
ISO/IEC 17025) or local regulations, which prevail.";

/// Everything a report template may use. See the module docs for the
/// conventions; [`ReportContext::new`] gives an otherwise empty context.
#[derive(Debug, Clone, Serialize)]
pub struct ReportContext {
    /// [`CONTEXT_VERSION`].
    pub context_version: u32,
    /// Recipe `title` (falls back to the name when the recipe has none).
    pub title: String,
    /// Recipe `name` (`[a-z0-9._-]+`), also the output folder name.
    pub name: String,
    /// Recipe `notes`: Markdown source. Templates render it with the
    /// `markdown` filter (HTML) or `notes_markdown` (Markdown); raw HTML in it
    /// is shown as text.
    pub notes: String,
    /// Verdict code and its wording (SPEC §7, §13).
    pub verdict: Verdict,
    /// One row per acceptance criterion, in recipe order (SPEC §7).
    pub criteria: Vec<CriterionRow>,
    /// Data files and row counts.
    pub data: DataSummary,
    /// The model as the recipe gives it.
    pub model: ModelSummary,
    /// The linearizability analysis (SPEC §4), when one was made.
    pub analysis: Option<AnalysisSummary>,
    /// Parameter tables, one per fit, in the order fitted (e.g. "linearized
    /// start", then "refined (original space)").
    pub parameter_tables: Vec<ParameterTable>,
    /// Differences between two fits' parameters (the linearization bias),
    /// when `auto` refined a linearized start.
    pub differences: Option<DifferenceTable>,
    /// Fit statistics (n, p, SSR, R², s, AICc…), labelled, in display order.
    pub statistics: Vec<StatRow>,
    /// Residual diagnostics (runs test, Durbin–Watson, Shapiro–Wilk,
    /// lack of fit, leverage/Cook's distance flags…).
    pub diagnostics: Vec<DiagnosticRow>,
    /// Alternative models of `[compare]` against the main one.
    pub compare: Vec<CompareRow>,
    /// Calibration figures of straight-line calibrations (LOD, LOQ…), with
    /// their assumptions in `note`.
    pub calibration_figures: Vec<StatRow>,
    /// Plots in display order.
    pub plots: Vec<Plot>,
    /// Warnings for the reviewer, one sentence each.
    pub warnings: Vec<String>,
    /// What an auditor needs to trace the numbers.
    pub traceability: Traceability,
    /// Sign-off roles (`[report] signoff`), e.g. "Performed by".
    pub signoff: Vec<String>,
    /// The caution of SPEC §12; [`ReportContext::new`] sets [`CAUTION`].
    pub caution: String,
    /// The report as a calibration record: its id, dates and the report it amends
    /// (SPEC §14). Empty strings in a context that is not from a run.
    pub record: ReportRecord,
    /// The decision rule in words, printed beside the verdict (SPEC §14, ILAC-G8).
    pub decision_rule: Option<String>,
    /// Item, procedure, reference standards and conditions, when the recipe gives any.
    pub calibration: Option<CalibrationRecord>,
    /// `run --as-found`: the new data against the last curve whose criteria were met.
    pub as_found: Option<DeviationTable>,
    /// The calibration points against the new curve (`[decision] tolerance`, as left).
    pub as_left: Option<DeviationTable>,
    /// The uncertainty of values read off the curve: a budget and read-offs across the
    /// calibrated range (JCGM 100:2008).
    pub uncertainty: Option<UncertaintySection>,
    /// The fitted parameters at full precision for loading into instruments: the shortest
    /// text that reads back to the same number ("do not round").
    pub coefficients: Vec<CoefficientRow>,
}

impl ReportContext {
    /// A context with the given identity and verdict, the §12 caution, and
    /// every other field empty.
    pub fn new(name: impl Into<String>, title: impl Into<String>, verdict: Verdict) -> Self {
        ReportContext {
            context_version: CONTEXT_VERSION,
            title: title.into(),
            name: name.into(),
            notes: String::new(),
            verdict,
            criteria: Vec::new(),
            data: DataSummary::default(),
            model: ModelSummary::default(),
            analysis: None,
            parameter_tables: Vec::new(),
            differences: None,
            statistics: Vec::new(),
            diagnostics: Vec::new(),
            compare: Vec::new(),
            calibration_figures: Vec::new(),
            plots: Vec::new(),
            warnings: Vec::new(),
            traceability: Traceability::default(),
            signoff: Vec::new(),
            caution: CAUTION.to_string(),
            record: ReportRecord::default(),
            decision_rule: None,
            calibration: None,
            as_found: None,
            as_left: None,
            uncertainty: None,
            coefficients: Vec::new(),
        }
    }
}

/// The identity of a report as a calibration record (SPEC §14).
#[derive(Debug, Clone, Default, Serialize)]
pub struct ReportRecord {
    /// `<name>-<run id>`, unique per report.
    pub report_id: String,
    /// Date of issue, `YYYY-MM-DD` (the UTC date of the run).
    pub issued_on: String,
    /// Date of the measurements (`[conditions] measured_on`), when given.
    pub measured_on: Option<String>,
    /// The report id this report amends and replaces (`[report] supersedes`).
    pub supersedes: Option<String>,
}

/// Item, procedure, standards and conditions of a calibration (SPEC §14).
#[derive(Debug, Clone, Default, Serialize)]
pub struct CalibrationRecord {
    /// `[item]`: e.g. "Description" / "Cold-room probe", "Asset or serial" / "CR-A7".
    pub item: Vec<KeyValue>,
    /// `[procedure]`: "Procedure" / "CAL-TH-004", "Revision" / "C".
    pub procedure: Vec<KeyValue>,
    /// `[[standards]]`, in recipe order.
    pub standards: Vec<StandardRow>,
    /// `[conditions]` quantities, in recipe order.
    pub conditions: Vec<MeasurementCondition>,
}

/// A reference standard used.
#[derive(Debug, Clone, Serialize)]
pub struct StandardRow {
    /// Asset number.
    pub id: String,
    /// Certificate number, or "—".
    pub certificate: String,
    /// Due date `YYYY-MM-DD`, or "—".
    pub due: String,
    /// Standard uncertainty with its variable, e.g. "0.010 in T", or "—".
    pub uncertainty: String,
    /// e.g. "current on the measurement date".
    pub status: String,
}

/// A condition quantity during the measurement.
#[derive(Debug, Clone, Serialize)]
pub struct MeasurementCondition {
    /// Its name in the recipe, e.g. "ambient".
    pub name: String,
    /// The value with its unit, e.g. "21.3 °C".
    pub value: String,
    /// The limits, e.g. "18 … 25 °C", or "—".
    pub limits: String,
    /// "within limits", "outside limits" or "no limits".
    pub status: String,
}

/// Calibration points judged against a curve (as found or as left).
#[derive(Debug, Clone, Serialize)]
pub struct DeviationTable {
    /// What the points were judged against, e.g. "the curve of run 2026…Z-1a2b3c4d
    /// (2026-10-28), the last whose criteria were met".
    pub against: String,
    /// The tolerance as a procedure writes it, e.g. "±0.05 °C".
    pub tolerance: String,
    /// The decision rule's name, e.g. "guard-band".
    pub rule: String,
    /// "18 of 19 points pass (18 pass, 1 conditional pass)".
    pub summary: String,
    /// Whether every point passes.
    pub within: bool,
    /// How U of a deviation was obtained.
    pub note: Option<String>,
    /// Column headings of the reference and indicated values, e.g. "T reference (°C)".
    pub reference_label: String,
    pub indicated_label: String,
    /// One row per point.
    pub rows: Vec<DeviationRow>,
}

/// One point against a curve.
#[derive(Debug, Clone, Serialize)]
pub struct DeviationRow {
    /// `file:line`.
    pub origin: String,
    /// The reference value of the compared quantity.
    pub reference: String,
    /// The indicated value.
    pub indicated: String,
    /// indicated − reference, rounded to the place of U.
    pub deviation: String,
    /// The tolerance at this point, "±…".
    pub limit: String,
    /// Expanded uncertainty U of the deviation.
    pub expanded: String,
    /// "pass", "conditional pass", "conditional fail", "fail".
    pub decision: String,
    /// `pass`, `conditional-pass`, `conditional-fail`, `fail` (for styling).
    pub decision_code: String,
}

/// The measurement uncertainty of read-off values.
#[derive(Debug, Clone, Default, Serialize)]
pub struct UncertaintySection {
    /// How k is chosen, e.g. "k = 2 (coverage probability approximately 95 % …)".
    pub coverage: String,
    /// Where the budget below is evaluated, e.g. "T read from one new reading
    /// R = 15843 Ω at T = 15 °C (mid-range)".
    pub budget_point: String,
    /// One row per component, the fit first.
    pub budget: Vec<BudgetRow>,
    /// u_c with its unit, e.g. "0.0104 °C".
    pub combined: String,
    /// The statement of the result, e.g. "U = 0.021 °C (k = 2, coverage probability
    /// approximately 95 %)".
    pub expanded: String,
    /// Read-offs across the calibrated range.
    pub range: Vec<ReadOffRow>,
    /// Remarks (how the fit component was obtained; why something is missing).
    pub notes: Vec<String>,
}

/// One line of an uncertainty budget.
#[derive(Debug, Clone, Serialize)]
pub struct BudgetRow {
    /// The component, e.g. "reference standard REF-PRT-2 (certificate C-2291)".
    pub component: String,
    /// Its standard uncertainty with the variable it is in, e.g. "0.010 (T)".
    pub u: String,
    /// Sensitivity coefficient c, e.g. "1" or "-0.0023".
    pub sensitivity: String,
    /// |c|·u in the unit of the result.
    pub contribution: String,
    /// Degrees of freedom, "∞" for none given.
    pub dof: String,
}

/// A value read off the curve with its expanded uncertainty.
#[derive(Debug, Clone, Serialize)]
pub struct ReadOffRow {
    /// The given value, e.g. "R = 15843 Ω".
    pub given: String,
    /// The value read off, GUM-rounded, e.g. "T = 15.000 ± 0.021 °C".
    pub value: String,
    /// u_c.
    pub u_c: String,
    /// The coverage factor and ν_eff, e.g. "2" or "2.13 (ν_eff = 20)".
    pub k: String,
    /// U.
    pub expanded: String,
}

/// A fitted parameter at full precision.
#[derive(Debug, Clone, Serialize)]
pub struct CoefficientRow {
    /// Parameter name.
    pub name: String,
    /// The shortest text that reads back to the same `f64` (`report::format::full`).
    pub value: String,
    /// Unit, when given.
    pub unit: Option<String>,
}

/// The verdict codes of `result.json` (SPEC §7, §13).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum VerdictCode {
    /// Every criterion passed and the fit converged.
    Accepted,
    /// A criterion failed or was not applicable, or the fit did not converge.
    Rejected,
    /// The recipe has no acceptance criteria.
    NotJudged,
    /// The input was invalid.
    Invalid,
}

impl VerdictCode {
    /// The code as written in `result.json`.
    pub fn code(self) -> &'static str {
        match self {
            VerdictCode::Accepted => "accepted",
            VerdictCode::Rejected => "rejected",
            VerdictCode::NotJudged => "not-judged",
            VerdictCode::Invalid => "invalid",
        }
    }

    /// The wording shown to people: acceptance of a calibration is a person's
    /// act, so "accepted" reads "criteria met — awaiting review" (SPEC §7).
    pub fn wording(self) -> &'static str {
        match self {
            VerdictCode::Accepted => "criteria met — awaiting review",
            VerdictCode::Rejected => "criteria not met",
            VerdictCode::NotJudged => "not judged — no acceptance criteria",
            VerdictCode::Invalid => "invalid input",
        }
    }
}

/// The verdict of a run. Serialised as `{ code, wording, detail }`, the
/// wording derived from the code.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Verdict {
    /// The code.
    pub code: VerdictCode,
    /// An optional sentence, e.g. "2 of 9 criteria not met; the fit converged".
    pub detail: Option<String>,
}

impl Verdict {
    /// A verdict without detail.
    pub fn new(code: VerdictCode) -> Self {
        Verdict { code, detail: None }
    }
}

impl Serialize for Verdict {
    fn serialize<S: serde::Serializer>(&self, serializer: S) -> Result<S::Ok, S::Error> {
        let mut s = serializer.serialize_struct("Verdict", 3)?;
        s.serialize_field("code", self.code.code())?;
        s.serialize_field("wording", self.code.wording())?;
        s.serialize_field("detail", &self.detail)?;
        s.end()
    }
}

/// Outcome of one acceptance criterion.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum CriterionStatus {
    /// The measured value is within the limit.
    Pass,
    /// The measured value is outside the limit.
    Fail,
    /// The test does not apply (the reason goes in the row's note); counts as
    /// not met (SPEC §13).
    NotApplicable,
}

impl CriterionStatus {
    /// Machine code: `pass`, `fail`, `not-applicable`.
    pub fn code(self) -> &'static str {
        match self {
            CriterionStatus::Pass => "pass",
            CriterionStatus::Fail => "fail",
            CriterionStatus::NotApplicable => "not-applicable",
        }
    }

    /// Label shown in reports.
    pub fn label(self) -> &'static str {
        match self {
            CriterionStatus::Pass => "pass",
            CriterionStatus::Fail => "fail",
            CriterionStatus::NotApplicable => "not applicable",
        }
    }
}

impl Serialize for CriterionStatus {
    /// Serialised as `{ code, label }`.
    fn serialize<S: serde::Serializer>(&self, serializer: S) -> Result<S::Ok, S::Error> {
        let mut s = serializer.serialize_struct("CriterionStatus", 2)?;
        s.serialize_field("code", self.code())?;
        s.serialize_field("label", self.label())?;
        s.end()
    }
}

/// One row of the criteria table: criterion, limit, measured value, status.
#[derive(Debug, Clone, Serialize)]
pub struct CriterionRow {
    /// What is judged, e.g. "R²" or "B: relative standard error".
    pub criterion: String,
    /// The limit as text, e.g. "≥ 0.999" or "3800 … 4000".
    pub limit: String,
    /// The measured value as text, or "—" when not applicable.
    pub measured: String,
    /// Pass, fail or not applicable.
    pub status: CriterionStatus,
    /// Reason for "not applicable", or a label such as "unweighted RMS
    /// residual" (SPEC §13).
    pub note: Option<String>,
}

/// Data files and row accounting (SPEC §8 data summary).
#[derive(Debug, Clone, Default, Serialize)]
pub struct DataSummary {
    /// The matched files in the order they were read.
    pub files: Vec<DataFile>,
    /// Rows read from all files.
    pub rows_read: u64,
    /// Rows the fit used.
    pub rows_used: u64,
    /// Rows removed by the `where` filter.
    pub rows_filtered: u64,
    /// Rows skipped (missing values with `missing = "skip"`, undefined
    /// transform with `drop_invalid = true`).
    pub rows_skipped: u64,
    /// The `where` filter, when the recipe has one.
    pub filter: Option<String>,
    /// Which rows were skipped and why, e.g. "rows 14, 15 (file a7-2.csv): empty cell".
    pub skipped_detail: Vec<String>,
    /// Model variables with their column and unit (the column and units maps).
    pub variables: Vec<VariableRow>,
}

/// One data file with its hash.
#[derive(Debug, Clone, Serialize)]
pub struct DataFile {
    /// Path as shown to the reader (relative to the recipe).
    pub path: String,
    /// Data rows read from this file.
    pub rows: u64,
    /// SHA-256 of the file bytes, lower-case hex.
    pub sha256: String,
}

/// A model variable mapped to a data column.
#[derive(Debug, Clone, Serialize)]
pub struct VariableRow {
    /// Variable name in the equation.
    pub variable: String,
    /// "response" or "predictor".
    pub role: String,
    /// Column name (or `#3` for a 1-based index).
    pub column: String,
    /// Unit, when the recipe gives one.
    pub unit: Option<String>,
}

/// The model as the recipe states it.
#[derive(Debug, Clone, Default, Serialize)]
pub struct ModelSummary {
    /// The equation, printed back from the parsed expression.
    pub equation: String,
    /// The preset name, when the model came from a preset.
    pub preset: Option<String>,
    /// Declared parameters with their starts, bounds or fixed values.
    pub parameters: Vec<ModelParameter>,
    /// Fit settings worth showing beside the model (method, weights,
    /// uncertainty, confidence level), labelled.
    pub fit_settings: Vec<KeyValue>,
}

/// A declared parameter (`[model.parameters]`).
#[derive(Debug, Clone, Serialize)]
pub struct ModelParameter {
    /// Parameter name.
    pub name: String,
    /// Start value as text, when given.
    pub start: Option<String>,
    /// Lower bound as text, when given.
    pub min: Option<String>,
    /// Upper bound as text, when given.
    pub max: Option<String>,
    /// Fixed value as text, when the parameter is a constant of the model.
    pub fixed: Option<String>,
    /// Unit, when given.
    pub unit: Option<String>,
}

/// A labelled value: fit settings, traceability settings.
#[derive(Debug, Clone, Serialize)]
pub struct KeyValue {
    /// Label or key as shown.
    pub key: String,
    /// Value as text.
    pub value: String,
}

impl KeyValue {
    /// A key/value pair.
    pub fn new(key: impl Into<String>, value: impl Into<String>) -> Self {
        KeyValue {
            key: key.into(),
            value: value.into(),
        }
    }
}

/// The linearizability analysis (SPEC §4) as text.
#[derive(Debug, Clone, Default, Serialize)]
pub struct AnalysisSummary {
    /// The outcome in words, e.g. "linearizable by ln(R)" or "not
    /// linearizable: …".
    pub outcome: String,
    /// The transform used, e.g. `ln(R)`; none for a linear model.
    pub transform: Option<String>,
    /// Derivation lines, each an equation step, e.g.
    /// `ln(R) = ln(R25) + B·(1/(T + 273.15) − 1/298.15)`.
    pub derivation: Vec<String>,
    /// Basis functions of the data, `h₀ … hₖ`, as `name = expression` text.
    pub basis: Vec<String>,
    /// Coefficient map `cⱼ = gⱼ(θ)`.
    pub coefficient_map: Vec<String>,
    /// Back-transform formulas `θ = …`.
    pub back_transform: Vec<String>,
    /// Domain conditions and how they were checked.
    pub conditions: Vec<ConditionRow>,
    /// Other transforms tried and why they did not work, or other remarks.
    pub remarks: Vec<String>,
}

/// A domain condition of the linearization and its check.
#[derive(Debug, Clone, Serialize)]
pub struct ConditionRow {
    /// The condition, e.g. `R > 0`.
    pub condition: String,
    /// What it constrains: "data" or "parameters".
    pub applies_to: String,
    /// The result of the check, e.g. "holds for all 41 rows".
    pub result: String,
}

/// Parameter estimates of one fit.
#[derive(Debug, Clone, Serialize)]
pub struct ParameterTable {
    /// Which fit, e.g. "linearized start" or "refined (original space)".
    pub label: String,
    /// How the uncertainties were obtained, e.g. "standard errors by the
    /// delta method from the transformed-space covariance".
    pub note: Option<String>,
    /// Heading of the interval columns, e.g. "95 % confidence interval".
    pub interval_label: String,
    /// One row per parameter.
    pub rows: Vec<ParameterRow>,
}

/// One parameter estimate.
#[derive(Debug, Clone, Serialize)]
pub struct ParameterRow {
    /// Parameter name.
    pub name: String,
    /// Estimate as text.
    pub value: String,
    /// Standard error as text (or "—" at an active bound / for fixed).
    pub std_error: String,
    /// Relative standard error as text, e.g. "0.29 %".
    pub rel_std_error: String,
    /// Lower end of the confidence interval as text.
    pub ci_low: String,
    /// Upper end of the confidence interval as text.
    pub ci_high: String,
    /// Unit, when given.
    pub unit: Option<String>,
    /// Remarks, e.g. "fixed", "at lower bound: no standard error".
    pub note: Option<String>,
}

/// Differences between two parameter sets (the linearization bias).
#[derive(Debug, Clone, Serialize)]
pub struct DifferenceTable {
    /// Heading of the first set, e.g. "linearized start".
    pub from_label: String,
    /// Heading of the second set, e.g. "refined".
    pub to_label: String,
    /// Remarks shown under the table.
    pub note: Option<String>,
    /// One row per parameter.
    pub rows: Vec<DifferenceRow>,
}

/// One parameter in both fits.
#[derive(Debug, Clone, Serialize)]
pub struct DifferenceRow {
    /// Parameter name.
    pub name: String,
    /// Value in the first fit.
    pub from: String,
    /// Value in the second fit.
    pub to: String,
    /// `to − from` as text.
    pub difference: String,
    /// The difference relative to `to`, as text.
    pub relative: String,
    /// The difference in standard errors of the second fit, as text.
    pub in_std_errors: String,
}

/// A labelled figure: statistics, calibration figures.
#[derive(Debug, Clone, Serialize)]
pub struct StatRow {
    /// Stable machine key, e.g. `r_squared` (usable in override templates).
    pub key: String,
    /// Label shown, e.g. "R² (centred)".
    pub label: String,
    /// Value as text.
    pub value: String,
    /// Remarks, e.g. "unweighted RMS residual" or an assumption.
    pub note: Option<String>,
}

impl StatRow {
    /// A row without note.
    pub fn new(key: impl Into<String>, label: impl Into<String>, value: impl Into<String>) -> Self {
        StatRow {
            key: key.into(),
            label: label.into(),
            value: value.into(),
            note: None,
        }
    }
}

/// One residual diagnostic.
#[derive(Debug, Clone, Serialize)]
pub struct DiagnosticRow {
    /// Test name, e.g. "Runs test (residual signs in T order)".
    pub test: String,
    /// Statistic as text, e.g. "R = 9 runs".
    pub statistic: String,
    /// p-value as text, or "—".
    pub p_value: String,
    /// Reading of the result in words.
    pub conclusion: String,
    /// Remarks (method, "exact", "normal approximation"…).
    pub note: Option<String>,
}

/// An alternative model of `[compare]` against the main one.
#[derive(Debug, Clone, Serialize)]
pub struct CompareRow {
    /// The alternative equation.
    pub model: String,
    /// Free parameters.
    pub parameters: String,
    /// SSR of the alternative as text.
    pub ssr: String,
    /// AICc as text (or "not defined").
    pub aicc: String,
    /// AICc of the alternative minus that of the main model.
    pub delta_aicc: String,
    /// Nested F-test as text, or "not nested".
    pub f_test: String,
    /// p-value of the F-test, or "—".
    pub p_value: String,
    /// Conclusion or remarks.
    pub note: Option<String>,
}

/// One plot, drawn by [`crate::report::plot`].
#[derive(Debug, Clone, Serialize)]
pub struct Plot {
    /// File stem for `plots/<name>.svg` beside `report.md`; `[a-z0-9_-]+`.
    pub name: String,
    /// Heading of the figure.
    pub title: String,
    /// Caption: what is drawn and how (e.g. "bands pointwise, linear
    /// approximation").
    pub caption: Option<String>,
    /// The drawing.
    pub svg: Svg,
}

/// Everything needed to trace the report to its inputs.
#[derive(Debug, Clone, Default, Serialize)]
pub struct Traceability {
    /// Run id, `YYYYMMDDTHHMMSSZ-xxxxxxxx` (see `write::run_id`).
    pub run_id: String,
    /// Generation time, ISO 8601 UTC (see `write::utc_timestamp`).
    pub generated_at: String,
    /// Whether the time came from `SOURCE_DATE_EPOCH`.
    pub time_from_source_date_epoch: bool,
    /// Recipe file path and hash.
    pub recipe: HashedFile,
    /// Each data file and its hash.
    pub data_files: Vec<HashedFile>,
    /// Hash of the templates used (`Templates::sha256`).
    pub templates_sha256: String,
    /// Where the templates came from: "built-in" or the override folder.
    pub templates_source: String,
    /// Tool name and version, e.g. "fitwright 0.1.0".
    pub tool_version: String,
    /// Settings that influence the numbers, key/value, in a stable order.
    pub settings: Vec<KeyValue>,
}

/// A file path with its SHA-256.
#[derive(Debug, Clone, Default, Serialize)]
pub struct HashedFile {
    /// Path as shown to the reader.
    pub path: String,
    /// SHA-256, lower-case hex.
    pub sha256: String,
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn verdict_serialises_code_with_its_spec_wording() {
        let cases = [
            (
                VerdictCode::Accepted,
                "accepted",
                "criteria met — awaiting review",
            ),
            (VerdictCode::Rejected, "rejected", "criteria not met"),
            (
                VerdictCode::NotJudged,
                "not-judged",
                "not judged — no acceptance criteria",
            ),
            (VerdictCode::Invalid, "invalid", "invalid input"),
        ];
        for (code, text, wording) in cases {
            let json = serde_json::to_value(Verdict::new(code)).ok();
            let json = json.as_ref();
            assert_eq!(json.and_then(|v| v["code"].as_str()), Some(text));
            assert_eq!(json.and_then(|v| v["wording"].as_str()), Some(wording));
        }
    }

    #[test]
    fn criterion_status_serialises_code_and_label() {
        let json = serde_json::to_value(CriterionStatus::NotApplicable).ok();
        assert_eq!(
            json.as_ref().and_then(|v| v["code"].as_str()),
            Some("not-applicable")
        );
        assert_eq!(
            json.as_ref().and_then(|v| v["label"].as_str()),
            Some("not applicable")
        );
    }

    #[test]
    fn new_context_carries_the_spec_caution_in_full() {
        let ctx = ReportContext::new("probe-x", "Probe X", Verdict::new(VerdictCode::NotJudged));
        assert!(
            ctx.caution
                .starts_with("Calibration results can feed decisions")
        );
        assert!(
            ctx.caution
                .ends_with("or local regulations, which prevail.")
        );
        assert!(ctx.caution.contains("ISO/IEC 17025"));
    }
}
