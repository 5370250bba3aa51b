//! Recipes: one TOML file per calibration job (SPEC §2, §13).
//!
//! Loading happens in two steps, as in the rest of the pipeline: [`raw`] reads the TOML into a
//! tree that keeps every span, and [`check`] validates that tree against the schema and builds
//! the checked [`Recipe`] below, with paths resolved relative to the recipe file. Nothing after
//! this module sees TOML.

pub mod check;
pub mod metrology;
pub mod raw;
mod section;

use std::collections::BTreeMap;
use std::ops::Range;
use std::path::{Path, PathBuf};
use std::sync::Arc;

use crate::error::{Error, Result};
use crate::source::{Location, SourceFile};

pub use check::check_recipe;

/// A value together with the byte span it was read from in the recipe.
#[derive(Debug, Clone, PartialEq)]
pub struct Spanned<T> {
    pub value: T,
    pub span: Range<usize>,
}

impl<T> Spanned<T> {
    pub fn new(value: T, span: Range<usize>) -> Self {
        Spanned { value, span }
    }
}

/// A string value whose content can be located character by character (for carets inside
/// equations): `content_start` is the byte offset of the first character of the decoded
/// string in the recipe, when the TOML string had no escapes; `None` otherwise.
#[derive(Debug, Clone, PartialEq)]
pub struct Text {
    pub value: String,
    pub span: Range<usize>,
    pub content_start: Option<usize>,
}

impl Text {
    /// The recipe span of a byte range inside the string's content (the whole string when
    /// the content cannot be mapped exactly).
    pub fn inner_span(&self, inner: Range<usize>) -> Range<usize> {
        match self.content_start {
            Some(start) => start + inner.start..start + inner.end.max(inner.start),
            None => self.span.clone(),
        }
    }
}

/// A checked recipe.
#[derive(Debug, Clone)]
pub struct Recipe {
    /// The recipe file, kept for error messages and hashing.
    pub source: Arc<SourceFile>,
    /// Folder of the recipe; relative paths inside it resolve against this.
    pub dir: PathBuf,
    /// SHA-256 of the recipe file's bytes, lower-case hex.
    pub sha256: String,
    pub name: Spanned<String>,
    pub title: Option<String>,
    pub notes: Option<String>,
    pub data: DataSpec,
    pub model: ModelSpec,
    pub fit: FitSpec,
    pub acceptance: Acceptance,
    pub compare: Vec<Text>,
    pub limits: LimitsSpec,
    pub report: ReportSpec,
    /// `[item]`, `[procedure]`, `[[standards]]`, `[conditions]`, `[uncertainty]`,
    /// `[decision]` (SPEC §14).
    pub metrology: metrology::MetrologySpec,
}

impl Recipe {
    /// The location of a recipe span, for errors that point back into the recipe.
    pub fn locate(&self, span: Range<usize>) -> Location {
        self.source.locate(span)
    }

    /// An input error at a span of this recipe.
    pub fn error_at(&self, span: Range<usize>, message: impl Into<String>) -> Error {
        Error::input(message).at(self.locate(span))
    }

    /// The title, or the name when no title is given.
    pub fn display_title(&self) -> &str {
        self.title.as_deref().unwrap_or(&self.name.value)
    }
}

/// Layout of a data file: delimited text, or a spreadsheet workbook.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Format {
    Csv,
    Tsv,
    Whitespace,
    /// Office Open XML workbook (`.xlsx`, `.xlsm`).
    Xlsx,
    /// OpenDocument spreadsheet (`.ods`).
    Ods,
}

impl Format {
    pub const NAMES: [&'static str; 5] = ["csv", "tsv", "whitespace", "xlsx", "ods"];

    pub fn parse(name: &str) -> Option<Format> {
        match name {
            "csv" => Some(Format::Csv),
            "tsv" => Some(Format::Tsv),
            "whitespace" => Some(Format::Whitespace),
            "xlsx" => Some(Format::Xlsx),
            "ods" => Some(Format::Ods),
            _ => None,
        }
    }

    pub fn name(self) -> &'static str {
        match self {
            Format::Csv => "csv",
            Format::Tsv => "tsv",
            Format::Whitespace => "whitespace",
            Format::Xlsx => "xlsx",
            Format::Ods => "ods",
        }
    }

    /// Workbooks are read cell by cell; the others as text.
    pub fn is_spreadsheet(self) -> bool {
        matches!(self, Format::Xlsx | Format::Ods)
    }

    /// The format implied by a file extension: `.tsv` tab-separated, `.txt`/`.dat` whitespace,
    /// `.xlsx`/`.xlsm` and `.ods` workbooks, anything else comma-separated.
    pub fn from_extension(path: &Path) -> Format {
        match path
            .extension()
            .and_then(|e| e.to_str())
            .map(|e| e.to_ascii_lowercase())
            .as_deref()
        {
            Some("tsv" | "tab") => Format::Tsv,
            Some("txt" | "dat") => Format::Whitespace,
            Some("xlsx" | "xlsm") => Format::Xlsx,
            Some("ods") => Format::Ods,
            _ => Format::Csv,
        }
    }
}

/// A rectangle of spreadsheet cells, `A5:D40`; rows and columns count from 0 (`A1` = (0, 0)).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct CellRange {
    pub first_row: u32,
    pub first_col: u32,
    pub last_row: u32,
    pub last_col: u32,
}

impl CellRange {
    /// The largest sheet the workbook formats allow: 1,048,576 rows and 16,384 columns (`XFD`).
    pub const MAX_ROWS: u32 = 1_048_576;
    pub const MAX_COLS: u32 = 16_384;

    /// Parse `A5:D40` (letters case-insensitive). `None` when it is not two cell names
    /// inside the sheet limits, top-left first.
    pub fn parse(text: &str) -> Option<CellRange> {
        let (a, b) = text.trim().split_once(':')?;
        let (r0, c0) = parse_cell_name(a.trim())?;
        let (r1, c1) = parse_cell_name(b.trim())?;
        (r0 <= r1 && c0 <= c1).then_some(CellRange {
            first_row: r0,
            first_col: c0,
            last_row: r1,
            last_col: c1,
        })
    }

    pub fn contains(&self, row: u32, col: u32) -> bool {
        (self.first_row..=self.last_row).contains(&row)
            && (self.first_col..=self.last_col).contains(&col)
    }
}

impl std::fmt::Display for CellRange {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        write!(
            f,
            "{}:{}",
            cell_name(self.first_row, self.first_col),
            cell_name(self.last_row, self.last_col)
        )
    }
}

/// `B7` for row 6, column 1 (both from 0).
pub fn cell_name(row: u32, col: u32) -> String {
    format!("{}{}", column_letters(col), u64::from(row) + 1)
}

/// `A`, `B`, …, `Z`, `AA`, … for columns 0, 1, …, 25, 26, … (bijective base 26).
pub fn column_letters(col: u32) -> String {
    let mut n = u64::from(col) + 1;
    let mut out = Vec::new();
    while n > 0 {
        let rem = ((n - 1) % 26) as u8;
        out.push(char::from(b'A' + rem));
        n = (n - 1) / 26;
    }
    out.iter().rev().collect()
}

/// `B7` → (6, 1); `None` outside the sheet limits or when malformed.
pub fn parse_cell_name(name: &str) -> Option<(u32, u32)> {
    let letters = name.len()
        - name
            .trim_start_matches(|c: char| c.is_ascii_alphabetic())
            .len();
    let (l, digits) = name.split_at(letters);
    if l.is_empty()
        || l.len() > 3
        || digits.is_empty()
        || !digits.bytes().all(|b| b.is_ascii_digit())
    {
        return None;
    }
    let mut col: u32 = 0;
    for b in l.bytes() {
        col = col * 26 + u32::from(b.to_ascii_uppercase() - b'A') + 1;
    }
    let row: u32 = digits.parse().ok()?;
    if row == 0 || row > CellRange::MAX_ROWS || col > CellRange::MAX_COLS {
        return None;
    }
    Some((row - 1, col - 1))
}

/// One entry of `[data] files`: a glob pattern, or a single file pinned by its hash.
#[derive(Debug, Clone)]
pub struct FileSpec {
    /// As written in the recipe.
    pub pattern: String,
    /// Resolved against the recipe's folder.
    pub resolved: PathBuf,
    /// Expected SHA-256 for a pinned file (`{ path = "…", sha256 = "…" }`).
    pub sha256: Option<String>,
    pub span: Range<usize>,
}

/// A data column chosen by header name or by 1-based position.
#[derive(Debug, Clone, PartialEq, Eq)]
pub enum ColumnRef {
    Name(String),
    Index(usize),
}

impl std::fmt::Display for ColumnRef {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        match self {
            ColumnRef::Name(n) => write!(f, "`{n}`"),
            ColumnRef::Index(i) => write!(f, "column {i}"),
        }
    }
}

/// What to do with empty, NaN or infinite cells (SPEC §13).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Missing {
    /// Such a cell is an input error (default).
    Error,
    /// The row is skipped and listed in the report.
    Skip,
}

/// `[data]` keys that describe text and mean nothing in a workbook, whose cells are typed.
pub const TEXT_ONLY_KEYS: [&str; 5] = ["delimiter", "decimal", "thousands", "comment", "encoding"];
/// `[data]` keys that select cells of a workbook.
pub const SHEET_ONLY_KEYS: [&str; 2] = ["sheet", "range"];

/// `[data]`.
#[derive(Debug, Clone)]
pub struct DataSpec {
    pub files: Vec<FileSpec>,
    pub files_span: Range<usize>,
    pub format: Option<Format>,
    pub delimiter: Option<u8>,
    pub decimal_comma: bool,
    /// Thousands separator (`.`, `,`, ` ` or `'`), removed from numbers in text files.
    pub thousands: Option<char>,
    pub comment: Option<String>,
    pub header: bool,
    pub skip_rows: usize,
    /// Skip to the line after the first line starting with this marker (instead of
    /// `skip_rows`).
    pub header_after: Option<Spanned<String>>,
    /// The row after the header holds the units of the columns.
    pub units_row: bool,
    /// Text encoding of text files when there is no byte-order mark (default UTF-8).
    pub encoding: Option<Spanned<&'static encoding_rs::Encoding>>,
    /// Spreadsheet sheet by name (default: the first sheet).
    pub sheet: Option<Spanned<String>>,
    /// Spreadsheet cell range (default: the used range of the sheet).
    pub range: Option<Spanned<CellRange>>,
    /// The column that names the channel of each row (one fit per channel).
    pub by: Option<Spanned<ColumnRef>>,
    /// Model variable → column, in recipe order.
    pub columns: Vec<(Spanned<String>, Spanned<ColumnRef>)>,
    pub where_: Option<Text>,
    pub units: BTreeMap<String, String>,
    pub missing: Missing,
    /// Every key written in `[data]` with the span of `key = value`, for errors only loading
    /// can detect (a `range` given for a CSV file found by a glob).
    pub key_spans: Vec<(String, Range<usize>)>,
}

impl DataSpec {
    /// The unit of a variable, or "" when none is given.
    pub fn unit(&self, var: &str) -> &str {
        self.units.get(var).map_or("", String::as_str)
    }

    /// The span of `key = value` in `[data]`, when the key is written.
    pub fn key_span(&self, key: &str) -> Option<Range<usize>> {
        self.key_spans
            .iter()
            .find(|(k, _)| k == key)
            .map(|(_, s)| s.clone())
    }

    /// The keys that only apply to text files, as written in this recipe.
    pub fn text_only_keys(&self) -> Vec<&str> {
        TEXT_ONLY_KEYS
            .iter()
            .copied()
            .filter(|k| self.key_span(k).is_some())
            .collect()
    }

    /// The keys that only apply to spreadsheets, as written in this recipe.
    pub fn sheet_only_keys(&self) -> Vec<&str> {
        SHEET_ONLY_KEYS
            .iter()
            .copied()
            .filter(|k| self.key_span(k).is_some())
            .collect()
    }
}

/// One entry of `[model.parameters]`.
#[derive(Debug, Clone)]
pub struct ParamSpec {
    pub name: Spanned<String>,
    pub start: Option<f64>,
    pub min: Option<f64>,
    pub max: Option<f64>,
    pub fixed: Option<f64>,
    pub unit: Option<String>,
}

/// `[model]`: the equation (typed, or from a preset) and its parameters.
#[derive(Debug, Clone)]
pub struct ModelSpec {
    pub equation: Option<Text>,
    pub preset: Option<Spanned<String>>,
    pub parameters: Vec<ParamSpec>,
    /// Span of the `[model]` table, for errors about the model as a whole.
    pub span: Range<usize>,
}

/// `[fit] method` (SPEC §5).
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize)]
#[serde(rename_all = "lowercase")]
pub enum Method {
    Auto,
    Linear,
    Linearized,
    Nonlinear,
}

impl Method {
    pub const NAMES: [&'static str; 4] = ["auto", "linear", "linearized", "nonlinear"];
    pub fn name(self) -> &'static str {
        match self {
            Method::Auto => "auto",
            Method::Linear => "linear",
            Method::Linearized => "linearized",
            Method::Nonlinear => "nonlinear",
        }
    }
}

/// `[fit] transform`.
#[derive(Debug, Clone, PartialEq)]
pub enum TransformSpec {
    Auto,
    None,
    Expr(Text),
}

/// `[fit] uncertainty` (SPEC §2).
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize)]
#[serde(rename_all = "lowercase")]
pub enum UncertaintyMode {
    /// Weights are relative; the covariance is scaled by s².
    Residuals,
    /// Weights are 1/σ² of known σ; the covariance is not scaled; a χ² test is reported.
    Weights,
}

/// `[fit]`.
#[derive(Debug, Clone)]
pub struct FitSpec {
    pub method: Method,
    pub transform: TransformSpec,
    pub weights: Option<Text>,
    pub confidence: f64,
    pub uncertainty: UncertaintyMode,
    pub drop_invalid: bool,
    /// Delta-method weights for the linearized fit (`linearized_weights = "delta"`, default)
    /// or the plain unweighted transformed fit (`"none"`).
    pub linearized_delta_weights: bool,
    pub groups: Option<Spanned<String>>,
    pub average_replicates: bool,
    /// Relative tolerance of the Levenberg–Marquardt stop rules (SPEC §13), default 1e-12.
    pub tolerance: f64,
    pub span: Range<usize>,
}

/// Per-parameter criteria under `[acceptance.parameters.<name>]`.
#[derive(Debug, Clone, Default)]
pub struct ParamCriteria {
    pub min: Option<Spanned<f64>>,
    pub max: Option<Spanned<f64>>,
    pub rel_std_error_max: Option<Spanned<f64>>,
}

/// Drift criteria under `[acceptance.drift.<name>]` (SPEC §9).
#[derive(Debug, Clone, Default)]
pub struct DriftCriteria {
    pub max_rel_change: Option<Spanned<f64>>,
    pub max_abs_change: Option<Spanned<f64>>,
}

/// One `[[acceptance.points]]` entry: a reading the curve must reproduce.
#[derive(Debug, Clone)]
pub struct PointCheck {
    pub at: Vec<(String, f64)>,
    pub expect: f64,
    /// `tolerance` (a number or the `{ rel, fs, full_scale, abs, combine }` form).
    pub tolerance: crate::metrology::Tolerance,
    /// `Response` for `tolerance`, `Predictor` for `tolerance_x` (read through the inverse).
    pub axis: crate::metrology::Axis,
    pub span: Range<usize>,
}

/// `[acceptance.drift_curve]`: the largest change of the curve over the calibrated range
/// since the last run that met its criteria (SPEC §14).
#[derive(Debug, Clone)]
pub struct DriftCurveSpec {
    pub max_abs_change: Spanned<f64>,
    /// `axis = "response"` (default) or `"predictor"`: the unit of `max_abs_change`.
    pub axis: crate::metrology::Axis,
    pub span: Range<usize>,
}

/// `[acceptance]` (SPEC §7). Each present key becomes one criteria row.
#[derive(Debug, Clone, Default)]
pub struct Acceptance {
    /// Global criteria in recipe order: (key, limit).
    pub global: Vec<(Spanned<String>, Spanned<f64>)>,
    pub parameters: Vec<(Spanned<String>, ParamCriteria)>,
    pub drift: Vec<(Spanned<String>, DriftCriteria)>,
    pub points: Vec<PointCheck>,
    /// `back_calculated = { within, at_lowest, min_fraction }` (ICH M10).
    pub back_calculated: Option<Spanned<crate::metrology::assay::BackCalcRule>>,
    pub drift_curve: Option<DriftCurveSpec>,
}

impl Acceptance {
    /// The global keys SPEC §7 defines.
    pub const GLOBAL_KEYS: [&'static str; 12] = [
        "r_squared_min",
        "adj_r_squared_min",
        "std_error_max",
        "max_abs_residual",
        "max_rel_residual",
        "runs_p_min",
        "normality_p_min",
        "durbin_watson_min",
        "durbin_watson_max",
        "lack_of_fit_p_min",
        "min_points",
        "max_cooks_distance",
    ];

    pub fn is_empty(&self) -> bool {
        self.global.is_empty()
            && self.parameters.is_empty()
            && self.drift.is_empty()
            && self.points.is_empty()
            && self.back_calculated.is_none()
            && self.drift_curve.is_none()
    }
}

/// `[limits]`: detection and quantification limits of straight-line calibrations (SPEC §13).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum LimitsSigma {
    /// The residual standard deviation of the line (default).
    Residual,
    /// The standard error of the intercept.
    Intercept,
}

#[derive(Debug, Clone)]
pub struct LimitsSpec {
    pub sigma: LimitsSigma,
}

/// Output formats of a run (SPEC §8).
#[derive(Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord, serde::Serialize)]
#[serde(rename_all = "lowercase")]
pub enum ReportFormat {
    Html,
    Md,
    Json,
}

impl ReportFormat {
    pub const NAMES: [&'static str; 3] = ["html", "md", "json"];
    pub fn parse(name: &str) -> Option<ReportFormat> {
        match name {
            "html" => Some(ReportFormat::Html),
            "md" => Some(ReportFormat::Md),
            "json" => Some(ReportFormat::Json),
            _ => None,
        }
    }
}

/// `[report]`.
#[derive(Debug, Clone)]
pub struct ReportSpec {
    pub formats: Vec<ReportFormat>,
    /// The output folder with `{name}` expanded, resolved against the recipe's folder; `None`
    /// means the default `reports/{name}` under the working directory (SPEC §13).
    pub dir: Option<PathBuf>,
    pub signoff: Vec<String>,
    pub templates: Option<PathBuf>,
    /// The report id this report amends and replaces (SPEC §14).
    pub supersedes: Option<String>,
}

/// Whether `name` may name a recipe: `[a-z0-9._-]+` (SPEC §2), not starting with `.`. The
/// name becomes a folder under the report folder, so `.` and `..` would put runs and history
/// beside or above it, and any other leading dot would hide them.
pub fn valid_name(name: &str) -> bool {
    !name.is_empty()
        && !name.starts_with('.')
        && name
            .chars()
            .all(|c| c.is_ascii_lowercase() || c.is_ascii_digit() || matches!(c, '.' | '_' | '-'))
}

/// Read and check one recipe file.
pub fn load(path: &Path) -> Result<Recipe> {
    let bytes = std::fs::read(path).map_err(|e| {
        Error::input(format!("cannot read the recipe: {e}"))
            .in_file(path)
            .help("check the path; recipes are TOML files")
    })?;
    from_bytes(path, bytes)
}

/// Check the bytes of a recipe as if read from `path` (which only names the file in messages
/// and anchors relative paths; nothing is read from disk). A UTF-8 byte-order mark is
/// skipped; the hash covers every byte, the mark included.
pub fn from_bytes(path: &Path, bytes: Vec<u8>) -> Result<Recipe> {
    let sha256 = crate::hash::sha256_hex(&bytes);
    let text = match String::from_utf8(bytes) {
        Ok(t) => t,
        Err(e) => {
            let offset = e.utf8_error().valid_up_to();
            let lossy = String::from_utf8_lossy(e.as_bytes()).into_owned();
            let source = SourceFile::new(path, lossy);
            return Err(Error::input("the recipe is not valid UTF-8")
                .at(source.locate(offset..offset + 1))
                .help("save the recipe as UTF-8"));
        }
    };
    let text = text
        .strip_prefix('\u{feff}')
        .map(str::to_string)
        .unwrap_or(text);
    let source = Arc::new(SourceFile::new(path, text));
    let raw = raw::RawRecipe::parse(source)?;
    check_recipe(raw, sha256)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn cell_ranges_parse_and_print() {
        let r = CellRange::parse("A5:D40").expect("valid range");
        assert_eq!(
            (r.first_row, r.first_col, r.last_row, r.last_col),
            (4, 0, 39, 3)
        );
        assert_eq!(r.to_string(), "A5:D40");
        assert_eq!(
            CellRange::parse(" b2 : aa10 ").map(|r| r.to_string()),
            Some("B2:AA10".into())
        );
        assert_eq!(
            CellRange::parse("A1:XFD1048576").map(|r| r.last_col),
            Some(16_383)
        );
    }

    #[test]
    fn malformed_or_reversed_ranges_are_refused() {
        for bad in [
            "A5",
            "D40:A5",
            "A0:B2",
            "A1:XFE2",
            "A1:B1048577",
            "5A:D4",
            "A1:B2:C3",
            "",
        ] {
            assert_eq!(CellRange::parse(bad), None, "{bad}");
        }
    }

    #[test]
    fn column_letters_are_bijective_base_26() {
        assert_eq!(column_letters(0), "A");
        assert_eq!(column_letters(25), "Z");
        assert_eq!(column_letters(26), "AA");
        assert_eq!(column_letters(701), "ZZ");
        assert_eq!(column_letters(702), "AAA");
        assert_eq!(cell_name(6, 1), "B7");
        assert_eq!(parse_cell_name("ZZ1"), Some((0, 701)));
    }
}
