//! Step two of recipe loading: validate the raw tree against the schema of SPEC §2/§13 and
//! build the checked [`Recipe`]. Types, ranges and names are checked here; the data files
//! and expressions are checked by the stages that use them.

use std::collections::BTreeMap;
use std::path::{Path, PathBuf};

use super::raw::{Node, RawRecipe, Value};
use super::section::{Section, is_identifier};
use super::*;
use crate::error::{Error, Result, did_you_mean};

const ROOT_KEYS: &[&str] = &[
    "name",
    "title",
    "notes",
    "data",
    "model",
    "fit",
    "acceptance",
    "compare",
    "limits",
    "report",
    "item",
    "procedure",
    "standards",
    "conditions",
    "uncertainty",
    "decision",
];
const DATA_KEYS: &[&str] = &[
    "files",
    "format",
    "delimiter",
    "decimal",
    "comment",
    "header",
    "skip_rows",
    "columns",
    "where",
    "units",
    "missing",
    "sheet",
    "range",
    "encoding",
    "header_after",
    "units_row",
    "thousands",
    "by",
];
const MODEL_KEYS: &[&str] = &["equation", "preset", "parameters"];
const PARAM_KEYS: &[&str] = &["start", "min", "max", "fixed", "unit"];
const FIT_KEYS: &[&str] = &[
    "method",
    "transform",
    "weights",
    "confidence",
    "uncertainty",
    "drop_invalid",
    "linearized_weights",
    "groups",
    "average_replicates",
    "tolerance",
];
const PARAM_CRITERIA_KEYS: &[&str] = &["min", "max", "rel_std_error_max"];
const DRIFT_KEYS: &[&str] = &["max_rel_change", "max_abs_change"];
const POINT_KEYS: &[&str] = &["at", "expect", "tolerance", "tolerance_x"];
const BACK_CALC_KEYS: &[&str] = &["within", "at_lowest", "min_fraction"];
const DRIFT_CURVE_KEYS: &[&str] = &["max_abs_change", "axis"];
const COMPARE_KEYS: &[&str] = &["models"];
const LIMITS_KEYS: &[&str] = &["sigma"];
const REPORT_KEYS: &[&str] = &["formats", "dir", "signoff", "templates", "supersedes"];

/// Validate a raw recipe and build the checked [`Recipe`].
pub fn check_recipe(raw: RawRecipe, sha256: String) -> Result<Recipe> {
    let source = raw.source.clone();
    let src: &SourceFile = &source;
    let whole = 0..src.text.len();
    let mut root = Section::new(src, "the recipe", whole.clone(), raw.root, ROOT_KEYS)?;
    let dir = source
        .path
        .parent()
        .map(Path::to_path_buf)
        .unwrap_or_default();

    let name = root.string("name")?.ok_or_else(|| {
        Error::input("the recipe has no `name`")
            .in_file(&source.path)
            .help("add a line such as `name = \"probe-a7\"` at the top; it names the output folder")
    })?;
    if !super::valid_name(&name.value) {
        return Err(root
            .error(name.span.clone(), format!("the name `{}` is not allowed", name.value))
            .help("use lower-case letters, digits, `.`, `_` and `-` only, not starting with `.` (it names the output folder)"));
    }
    let title = root.string("title")?.map(|s| s.value);
    let notes = root.string("notes")?.map(|s| s.value);

    let data_section = root.table("data", DATA_KEYS)?.ok_or_else(|| {
        Error::input("the recipe has no [data] section")
            .in_file(&source.path)
            .help("add [data] with `files` and `columns`")
    })?;
    let data = check_data(data_section, &dir)?;
    let model_section = root.table("model", MODEL_KEYS)?.ok_or_else(|| {
        Error::input("the recipe has no [model] section")
            .in_file(&source.path)
            .help("add [model] with an `equation` (or a `preset`) and its [model.parameters]")
    })?;
    let model = check_model(model_section)?;
    let fit = match root.table("fit", FIT_KEYS)? {
        Some(s) => check_fit(s)?,
        None => default_fit(),
    };
    let acceptance = match root.open_table("acceptance")? {
        Some(s) => check_acceptance(s)?,
        None => Acceptance::default(),
    };
    let compare = match root.table("compare", COMPARE_KEYS)? {
        Some(mut s) => s.strings("models")?.unwrap_or_default(),
        None => Vec::new(),
    };
    let limits = match root.table("limits", LIMITS_KEYS)? {
        Some(mut s) => {
            let sigma = match s.string("sigma")? {
                None => LimitsSigma::Residual,
                Some(v) => match v.value.as_str() {
                    "residual" => LimitsSigma::Residual,
                    "intercept" => LimitsSigma::Intercept,
                    other => {
                        return Err(choice_error(
                            &s,
                            v.span,
                            "sigma",
                            other,
                            &["residual", "intercept"],
                        ));
                    }
                },
            };
            LimitsSpec { sigma }
        }
        None => LimitsSpec {
            sigma: LimitsSigma::Residual,
        },
    };
    let report = match root.table("report", REPORT_KEYS)? {
        Some(s) => check_report(s, &dir, &name.value)?,
        None => ReportSpec {
            formats: vec![ReportFormat::Html, ReportFormat::Md, ReportFormat::Json],
            dir: None,
            signoff: default_signoff(),
            templates: None,
            supersedes: None,
        },
    };
    let metrology = super::metrology::check(&mut root)?;

    Ok(Recipe {
        source: source.clone(),
        dir,
        sha256,
        name,
        title,
        notes,
        data,
        model,
        fit,
        acceptance,
        compare,
        limits,
        report,
        metrology,
    })
}

fn choice_error(
    s: &Section<'_>,
    span: std::ops::Range<usize>,
    key: &str,
    got: &str,
    allowed: &[&str],
) -> Error {
    let err = s.error(span, format!("`{key}` in {} cannot be \"{got}\"", s.label));
    match did_you_mean(got, allowed.iter().copied()) {
        Some(m) => err.help(format!("{m} (one of: {})", allowed.join(", "))),
        None => err.help(format!("use one of: {}", allowed.join(", "))),
    }
}

fn check_data(mut s: Section<'_>, dir: &Path) -> Result<DataSpec> {
    let key_spans = s.key_spans();
    let (files_span, items) = s.list("files")?.ok_or_else(|| {
        s.error(s.span.clone(), "[data] has no `files`")
            .help("add `files = [\"data/*.csv\"]` (paths relative to the recipe)")
    })?;
    if items.is_empty() {
        return Err(s
            .error(files_span, "[data] `files` is empty")
            .help("list at least one data file or glob pattern"));
    }
    let mut files = Vec::new();
    for node in items {
        files.push(check_file_entry(&s, node, dir)?);
    }
    let format =
        match s.string("format")? {
            None => None,
            Some(f) => Some(Format::parse(&f.value).ok_or_else(|| {
                choice_error(&s, f.span.clone(), "format", &f.value, &Format::NAMES)
            })?),
        };
    let delimiter = match s.string("delimiter")? {
        None => None,
        Some(d) => {
            let value = if d.value == "\\t" {
                "\t"
            } else {
                d.value.as_str()
            };
            let &[byte] = value.as_bytes() else {
                return Err(s
                    .error(d.span, "`delimiter` must be a single ASCII character")
                    .help("for example \";\" or \"\\t\""));
            };
            if !byte.is_ascii() {
                return Err(s
                    .error(d.span, "`delimiter` must be a single ASCII character")
                    .help("for example \";\" or \"\\t\""));
            }
            Some(byte)
        }
    };
    let decimal_comma = match s.string("decimal")? {
        None => false,
        Some(d) => match d.value.as_str() {
            "." => false,
            "," => true,
            other => return Err(choice_error(&s, d.span, "decimal", other, &[".", ","])),
        },
    };
    let thousands = match s.string("thousands")? {
        None => None,
        Some(t) => {
            let c = match t.value.as_str() {
                "." => '.',
                "," => ',',
                " " => ' ',
                "'" => '\'',
                other => {
                    return Err(choice_error(
                        &s,
                        t.span,
                        "thousands",
                        other,
                        &[".", ",", " ", "'"],
                    ));
                }
            };
            if c == if decimal_comma { ',' } else { '.' } {
                return Err(s
                    .error(
                        t.span,
                        format!("`thousands = \"{c}\"` is also the decimal separator"),
                    )
                    .help(if decimal_comma {
                        "with `decimal = \",\"` the thousands separator is usually \".\" or \" \""
                    } else {
                        "with the default `decimal = \".\"` the thousands separator is usually \",\"; for 1.234,5 set `decimal = \",\"` too"
                    }));
            }
            Some(c)
        }
    };
    if decimal_comma && delimiter == Some(b',') {
        return Err(s
            .error(s.span.clone(), "`decimal = \",\"` cannot be used with `delimiter = \",\"`")
            .help("files with a decimal comma are usually separated by \";\": set `delimiter = \";\"`"));
    }
    let comment = match s.string("comment")? {
        Some(c) if c.value.is_empty() => {
            return Err(s
                .error(c.span, "`comment` must not be empty")
                .help("for example \"#\""));
        }
        c => c.map(|c| c.value),
    };
    let header = s.boolean("header")?.is_none_or(|b| b.value);
    let skip = s.count("skip_rows")?;
    let header_after = s.string("header_after")?;
    if let Some(h) = &header_after {
        if h.value.trim().is_empty() {
            return Err(s
                .error(h.span.clone(), "`header_after` must not be empty")
                .help("give the text that starts the line before the header, e.g. \"Data:\""));
        }
        if let Some(k) = &skip {
            return Err(s
                .error(k.span.clone(), "`skip_rows` and `header_after` cannot be used together")
                .help("keep `header_after` to skip to the line after the marker, or `skip_rows` for a fixed count"));
        }
    }
    let skip_rows = skip.map_or(0, |c| c.value);
    let units_row = match s.boolean("units_row")? {
        Some(u) if u.value && !header => {
            return Err(s
                .error(u.span, "`units_row = true` needs a header row, but `header = false`")
                .help("the units row is the row after the header; remove `units_row` or set `header = true`"));
        }
        u => u.is_some_and(|u| u.value),
    };
    let encoding = match s.string("encoding")? {
        None => None,
        Some(e) => Some(Spanned::new(check_encoding(&s, &e)?, e.span)),
    };
    let sheet = match s.string("sheet")? {
        Some(sh) if sh.value.is_empty() => {
            return Err(s
                .error(sh.span, "`sheet` must not be empty")
                .help("give the sheet's name as shown on its tab, e.g. \"Run 3\""));
        }
        sh => sh,
    };
    let range = match s.string("range")? {
        None => None,
        Some(r) => match CellRange::parse(&r.value) {
            Some(c) => Some(Spanned::new(c, r.span)),
            None => {
                return Err(s
                    .error(r.span, format!("`range = \"{}\"` is not a cell range", r.value))
                    .help("write the top-left and bottom-right cells, e.g. \"A5:D40\" (at most XFD1048576)"));
            }
        },
    };
    let by = match s.take("by") {
        None => None,
        Some((k, node)) => Some(Spanned::new(column_ref(&s, &k.name, &node)?, node.span)),
    };
    let mut columns = Vec::new();
    if let Some(table) = s.open_table("columns")? {
        for (k, node) in table.into_entries() {
            if !is_identifier(&k.name) {
                return Err(s
                    .error(k.span, format!("`{}` is not a valid variable name", k.name))
                    .help("variable names start with a letter or `_` and contain letters, digits and `_`"));
            }
            let col = column_ref(&s, &k.name, &node)?;
            columns.push((Spanned::new(k.name, k.span), Spanned::new(col, node.span)));
        }
    }
    if !header
        && let Some(col) = by
            .as_ref()
            .filter(|b| matches!(b.value, ColumnRef::Name(_)))
    {
        return Err(s
            .error(
                col.span.clone(),
                "`by` names a header column, but `header = false`",
            )
            .help("without a header row, choose the column by 1-based position, e.g. `by = 1`"));
    }
    if !header
        && let Some((var, col)) = columns
            .iter()
            .find(|(_, c)| matches!(c.value, ColumnRef::Name(_)))
    {
        return Err(s
            .error(
                col.span.clone(),
                format!(
                    "`{}` names a header column, but `header = false`",
                    var.value
                ),
            )
            .help("without a header row, choose columns by 1-based position, e.g. `T = 1`"));
    }
    let where_ = s.text("where")?;
    let mut units = BTreeMap::new();
    if let Some(table) = s.open_table("units")? {
        for (k, node) in table.into_entries() {
            match node.value {
                Value::Str(u) => {
                    units.insert(k.name, u);
                }
                ref v => {
                    return Err(s
                        .error(
                            node.span.clone(),
                            format!(
                                "unit of `{}` must be a string, found {}",
                                k.name,
                                v.type_name()
                            ),
                        )
                        .help("for example `T = \"°C\"`"));
                }
            }
        }
    }
    let missing = match s.string("missing")? {
        None => Missing::Error,
        Some(m) => match m.value.as_str() {
            "error" => Missing::Error,
            "skip" => Missing::Skip,
            other => {
                return Err(choice_error(
                    &s,
                    m.span,
                    "missing",
                    other,
                    &["error", "skip"],
                ));
            }
        },
    };
    let spec = DataSpec {
        files,
        files_span,
        format,
        delimiter,
        decimal_comma,
        thousands,
        comment,
        header,
        skip_rows,
        header_after,
        units_row,
        encoding,
        sheet,
        range,
        by,
        columns,
        where_,
        units,
        missing,
        key_spans,
    };
    if let Some(f) = spec.format {
        let misplaced = if f.is_spreadsheet() {
            spec.text_only_keys()
        } else {
            spec.sheet_only_keys()
        };
        if let Some(key) = misplaced.first()
            && let Some(span) = spec.key_span(key)
        {
            return Err(s
                .error(
                    span,
                    format!("`{key}` does not apply to `format = \"{}\"`", f.name()),
                )
                .help(misplaced_key_help(key)));
        }
    }
    Ok(spec)
}

/// How to fix a `[data]` key given for the wrong kind of file.
pub fn misplaced_key_help(key: &str) -> &'static str {
    match key {
        "sheet" | "range" => {
            "`sheet` and `range` select cells of an .xlsx or .ods workbook; remove them for text files"
        }
        "encoding" => "a workbook stores its text as Unicode; remove `encoding`",
        _ => {
            "a workbook stores typed numbers, so delimiters and number formats do not apply; remove the key"
        }
    }
}

/// WHATWG encoding labels offered in "did you mean" hints.
const COMMON_ENCODINGS: &[&str] = &[
    "utf-8",
    "utf-16le",
    "utf-16be",
    "windows-1252",
    "latin1",
    "iso-8859-1",
    "iso-8859-15",
    "windows-1250",
    "windows-1251",
    "windows-1253",
    "shift_jis",
    "gbk",
    "koi8-r",
];

/// An encoding label of the WHATWG Encoding Standard (https://encoding.spec.whatwg.org/),
/// looked up with `encoding_rs`.
fn check_encoding(
    s: &Section<'_>,
    label: &Spanned<String>,
) -> Result<&'static encoding_rs::Encoding> {
    match encoding_rs::Encoding::for_label(label.value.trim().as_bytes()) {
        // The "replacement" encoding decodes everything to U+FFFD: never what a data file needs.
        Some(e) if e != encoding_rs::REPLACEMENT => Ok(e),
        _ => {
            let err = s.error(
                label.span.clone(),
                format!(
                    "`encoding = \"{}\"` is not a known text encoding",
                    label.value
                ),
            );
            let list = "e.g. \"windows-1252\" (also called \"latin1\"), \"iso-8859-15\", \"utf-16le\" — a WHATWG Encoding Standard label";
            Err(
                match did_you_mean(&label.value, COMMON_ENCODINGS.iter().copied()) {
                    Some(m) => err.help(format!("{m} ({list})")),
                    None => err.help(format!("use an encoding label, {list}")),
                },
            )
        }
    }
}

/// A column chosen by header name (a non-empty string) or by 1-based position.
fn column_ref(s: &Section<'_>, key: &str, node: &Node) -> Result<ColumnRef> {
    match node.value {
        Value::Str(ref c) if !c.is_empty() => Ok(ColumnRef::Name(c.clone())),
        Value::Int(i) if i >= 1 => usize::try_from(i).map(ColumnRef::Index).map_err(|_| {
            s.error(node.span.clone(), "this column position is too large")
                .help("write the 1-based position of the column")
        }),
        Value::Int(_) => Err(s
            .error(node.span.clone(), "column positions count from 1")
            .help(format!(
                "write the 1-based position of the column, e.g. `{key} = 1`"
            ))),
        ref v => Err(s
            .error(
                node.span.clone(),
                format!(
                    "column of `{key}` must be a header name or a 1-based position, found {}",
                    v.type_name()
                ),
            )
            .help(format!("for example `{key} = \"temp_c\"` or `{key} = 1`"))),
    }
}

fn check_file_entry(s: &Section<'_>, node: Node, dir: &Path) -> Result<FileSpec> {
    match node.value {
        Value::Str(p) if !p.trim().is_empty() => Ok(FileSpec {
            resolved: resolve(dir, &p),
            pattern: p,
            sha256: None,
            span: node.span,
        }),
        Value::Table(entries) => {
            let mut t = Section::new(
                s.source,
                "a pinned file of [data] files",
                node.span.clone(),
                entries,
                &["path", "sha256"],
            )?;
            let path = t.string("path")?.ok_or_else(|| {
                t.error(node.span.clone(), "a pinned file needs `path`")
                    .help("write `{ path = \"data/a.csv\", sha256 = \"…\" }`")
            })?;
            let sha = t.string("sha256")?.ok_or_else(|| {
                t.error(node.span.clone(), "a pinned file needs `sha256`")
                    .help("add the file's SHA-256 (`sha256sum FILE` prints it)")
            })?;
            let hex = sha.value.to_ascii_lowercase();
            if hex.len() != 64 || !hex.chars().all(|c| c.is_ascii_hexdigit()) {
                return Err(t
                    .error(sha.span, "`sha256` must be 64 hexadecimal digits")
                    .help("copy the digest printed by `sha256sum FILE`"));
            }
            Ok(FileSpec {
                resolved: resolve(dir, &path.value),
                pattern: path.value,
                sha256: Some(hex),
                span: node.span,
            })
        }
        ref v => Err(s
            .error(
                node.span.clone(),
                format!(
                    "each entry of `files` must be a path or glob, found {}",
                    v.type_name()
                ),
            )
            .help("for example `files = [\"data/a7-*.csv\"]`")),
    }
}

fn resolve(dir: &Path, p: &str) -> PathBuf {
    let path = Path::new(p);
    if path.is_absolute() {
        path.to_path_buf()
    } else {
        dir.join(path)
    }
}

fn check_model(mut s: Section<'_>) -> Result<ModelSpec> {
    let span = s.span.clone();
    let equation = s.text("equation")?;
    let preset = s.string("preset")?;
    match (&equation, &preset) {
        (Some(_), Some(p)) => {
            return Err(s
                .error(p.span.clone(), "[model] has both `equation` and `preset`")
                .help("keep one: a preset is a ready-made equation"));
        }
        (None, None) => {
            return Err(s
                .error(span, "[model] has neither `equation` nor `preset`")
                .help("add `equation = \"y = a * exp(b * x)\"` or `preset = \"exponential\"` (`fitwright models` lists presets)"));
        }
        (Some(e), None) if e.value.trim().is_empty() => {
            return Err(s
                .error(e.span.clone(), "the equation is empty")
                .help("write `response = expression`"));
        }
        _ => {}
    }
    let mut parameters = Vec::new();
    if let Some(table) = s.open_table("parameters")? {
        let source = table.source;
        for (k, node) in table.into_entries() {
            if !is_identifier(&k.name) {
                return Err(Error::input(format!("`{}` is not a valid parameter name", k.name))
                    .at(source.locate(k.span))
                    .help("parameter names start with a letter or `_` and contain letters, digits and `_`"));
            }
            let label = format!("[model.parameters.{}]", k.name);
            let entries = match node.value {
                Value::Table(e) => e,
                ref v => {
                    return Err(Error::input(format!(
                        "parameter `{}` must be a table, found {}",
                        k.name,
                        v.type_name()
                    ))
                    .at(source.locate(node.span.clone()))
                    .help(format!("write `{} = {{ start = 1.0 }}`", k.name)));
                }
            };
            let mut p = Section::new(source, label, node.span.clone(), entries, PARAM_KEYS)?;
            let start = p.number("start")?;
            let min = p.number("min")?;
            let max = p.number("max")?;
            let fixed = p.number("fixed")?;
            let unit = p.string("unit")?.map(|u| u.value);
            if let Some(f) = &fixed
                && let Some(other) = [&start, &min, &max].into_iter().flatten().next()
            {
                return Err(p
                    .error(
                        other.span.clone(),
                        format!(
                            "parameter `{}` is fixed, so it takes no start or bounds",
                            k.name
                        ),
                    )
                    .help(format!(
                        "remove this, or remove `fixed = {}` to fit it",
                        f.value
                    )));
            }
            if let (Some(lo), Some(hi)) = (&min, &max)
                && lo.value >= hi.value
            {
                return Err(p
                    .error(
                        hi.span.clone(),
                        format!(
                            "`max` of `{}` must be greater than its `min` ({})",
                            k.name, lo.value
                        ),
                    )
                    .help("swap or correct the bounds"));
            }
            if let Some(st) = &start {
                if let Some(lo) = &min
                    && st.value < lo.value
                {
                    return Err(p
                        .error(
                            st.span.clone(),
                            format!("start of `{}` is below its `min` ({})", k.name, lo.value),
                        )
                        .help("choose a start within [min, max]"));
                }
                if let Some(hi) = &max
                    && st.value > hi.value
                {
                    return Err(p
                        .error(
                            st.span.clone(),
                            format!("start of `{}` is above its `max` ({})", k.name, hi.value),
                        )
                        .help("choose a start within [min, max]"));
                }
            }
            parameters.push(ParamSpec {
                name: Spanned::new(k.name, k.span),
                start: start.map(|v| v.value),
                min: min.map(|v| v.value),
                max: max.map(|v| v.value),
                fixed: fixed.map(|v| v.value),
                unit,
            });
        }
    }
    Ok(ModelSpec {
        equation,
        preset,
        parameters,
        span,
    })
}

fn default_fit() -> FitSpec {
    FitSpec {
        method: Method::Auto,
        transform: TransformSpec::Auto,
        weights: None,
        confidence: 0.95,
        uncertainty: UncertaintyMode::Residuals,
        drop_invalid: false,
        linearized_delta_weights: true,
        groups: None,
        average_replicates: false,
        tolerance: 1e-12,
        span: 0..0,
    }
}

fn check_fit(mut s: Section<'_>) -> Result<FitSpec> {
    let mut fit = default_fit();
    fit.span = s.span.clone();
    if let Some(m) = s.string("method")? {
        fit.method = match m.value.as_str() {
            "auto" => Method::Auto,
            "linear" => Method::Linear,
            "linearized" => Method::Linearized,
            "nonlinear" => Method::Nonlinear,
            other => return Err(choice_error(&s, m.span, "method", other, &Method::NAMES)),
        };
    }
    if let Some(t) = s.text("transform")? {
        fit.transform = match t.value.trim() {
            "auto" => TransformSpec::Auto,
            "none" => TransformSpec::None,
            "" => {
                return Err(s
                    .error(t.span, "`transform` is empty")
                    .help("write \"auto\", \"none\" or an expression such as \"ln(y)\""));
            }
            _ => TransformSpec::Expr(t),
        };
    }
    if let Some(w) = s.text("weights")? {
        fit.weights = match w.value.trim() {
            "none" => None,
            "" => {
                return Err(s
                    .error(w.span, "`weights` is empty")
                    .help("write \"none\" or an expression such as \"1/u^2\""));
            }
            _ => Some(w),
        };
    }
    if let Some(c) = s.number("confidence")? {
        if !(c.value > 0.0 && c.value < 1.0) {
            return Err(s
                .error(
                    c.span,
                    format!(
                        "`confidence` must lie strictly between 0 and 1, found {}",
                        c.value
                    ),
                )
                .help("for 95 % intervals write `confidence = 0.95`"));
        }
        fit.confidence = c.value;
    }
    if let Some(u) = s.string("uncertainty")? {
        fit.uncertainty = match u.value.as_str() {
            "residuals" => UncertaintyMode::Residuals,
            "weights" => UncertaintyMode::Weights,
            other => {
                return Err(choice_error(
                    &s,
                    u.span,
                    "uncertainty",
                    other,
                    &["residuals", "weights"],
                ));
            }
        };
    }
    if let Some(d) = s.boolean("drop_invalid")? {
        fit.drop_invalid = d.value;
    }
    if let Some(l) = s.string("linearized_weights")? {
        fit.linearized_delta_weights = match l.value.as_str() {
            "delta" => true,
            "none" => false,
            other => {
                return Err(choice_error(
                    &s,
                    l.span,
                    "linearized_weights",
                    other,
                    &["delta", "none"],
                ));
            }
        };
    }
    fit.groups = s.string("groups")?;
    if let Some(a) = s.boolean("average_replicates")? {
        fit.average_replicates = a.value;
    }
    if let Some(t) = s.number("tolerance")? {
        if !(t.value > 0.0 && t.value < 1e-2) {
            return Err(s
                .error(
                    t.span,
                    "`tolerance` must be a small positive number below 0.01",
                )
                .help("the default 1e-12 suits almost every calibration"));
        }
        fit.tolerance = t.value;
    }
    if fit.uncertainty == UncertaintyMode::Weights && fit.weights.is_none() {
        return Err(s
            .error(s.span.clone(), "`uncertainty = \"weights\"` needs `weights`")
            .help("give the weights as 1/σ² of the known standard uncertainties, e.g. `weights = \"1/u^2\"`"));
    }
    Ok(fit)
}

fn check_acceptance(s: Section<'_>) -> Result<Acceptance> {
    let mut acc = Acceptance::default();
    let source = s.source;
    let mut allowed: Vec<&str> = Acceptance::GLOBAL_KEYS.to_vec();
    allowed.extend([
        "parameters",
        "drift",
        "points",
        "back_calculated",
        "drift_curve",
    ]);
    let label = s.label.clone();
    let span = s.span.clone();
    let s = Section::new(source, label, span, s.into_entries(), &allowed)?;
    for (k, node) in s.into_entries() {
        match k.name.as_str() {
            "parameters" | "drift" => {
                let Value::Table(entries) = node.value else {
                    return Err(Error::input(format!(
                        "[acceptance] `{}` must be a table of parameters",
                        k.name
                    ))
                    .at(source.locate(node.span))
                    .help(format!("write [acceptance.{}.NAME] sections", k.name)));
                };
                for (pk, pnode) in entries {
                    let label = format!("[acceptance.{}.{}]", k.name, pk.name);
                    let Value::Table(pentries) = pnode.value else {
                        return Err(Error::input(format!("{label} must be a table"))
                            .at(source.locate(pnode.span))
                            .help("write `min = …`, `max = …` under it"));
                    };
                    let keys = if k.name == "parameters" {
                        PARAM_CRITERIA_KEYS
                    } else {
                        DRIFT_KEYS
                    };
                    let mut t = Section::new(source, label, pnode.span.clone(), pentries, keys)?;
                    let name = Spanned::new(pk.name, pk.span);
                    if k.name == "parameters" {
                        let c = ParamCriteria {
                            min: t.number("min")?,
                            max: t.number("max")?,
                            rel_std_error_max: t.number("rel_std_error_max")?,
                        };
                        if let (Some(lo), Some(hi)) = (&c.min, &c.max)
                            && lo.value > hi.value
                        {
                            return Err(t
                                .error(hi.span.clone(), "`max` is below `min`")
                                .help("swap or correct the limits"));
                        }
                        acc.parameters.push((name, c));
                    } else {
                        let c = DriftCriteria {
                            max_rel_change: non_negative(&mut t, "max_rel_change")?,
                            max_abs_change: non_negative(&mut t, "max_abs_change")?,
                        };
                        acc.drift.push((name, c));
                    }
                }
            }
            "points" => {
                let items = match node.value {
                    Value::Array(items) => items,
                    _ => {
                        return Err(Error::input(
                            "[acceptance] `points` must be an array of tables",
                        )
                        .at(source.locate(node.span))
                        .help("write each point as a [[acceptance.points]] section"));
                    }
                };
                for item in items {
                    let Value::Table(entries) = item.value else {
                        return Err(
                            Error::input("each of [[acceptance.points]] must be a table")
                                .at(source.locate(item.span))
                                .help("give `at`, `expect` and `tolerance`"),
                        );
                    };
                    let mut t = Section::new(
                        source,
                        "[[acceptance.points]]",
                        item.span.clone(),
                        entries,
                        POINT_KEYS,
                    )?;
                    let mut at = Vec::new();
                    let at_table = t.open_table("at")?.ok_or_else(|| {
                        t.error(item.span.clone(), "a point needs `at`")
                            .help("for example `at = { T = 25.0 }`")
                    })?;
                    for (vk, vnode) in at_table.into_entries() {
                        let v = match vnode.value {
                            Value::Float(f) if f.is_finite() => f,
                            Value::Int(i) => i as f64,
                            ref v => {
                                return Err(Error::input(format!(
                                    "`at.{}` must be a finite number, found {}",
                                    vk.name,
                                    v.type_name()
                                ))
                                .at(source.locate(vnode.span.clone()))
                                .help("for example `at = { T = 25.0 }`"));
                            }
                        };
                        at.push((vk.name, v));
                    }
                    let expect = t.number("expect")?.ok_or_else(|| {
                        t.error(item.span.clone(), "a point needs `expect`")
                            .help("the value the curve must give at `at`")
                    })?;
                    let (tolerance, axis) =
                        super::metrology::tolerance_pair(&mut t, "[[acceptance.points]]")?
                            .ok_or_else(|| {
                                t.error(item.span.clone(), "a point needs `tolerance` or `tolerance_x`")
                                    .help("`tolerance`: the largest allowed |curve − expect| in response units; `tolerance_x`: the same read through the inverse, in predictor units")
                            })?;
                    acc.points.push(PointCheck {
                        at,
                        expect: expect.value,
                        tolerance,
                        axis,
                        span: item.span,
                    });
                }
            }
            "back_calculated" => {
                let Value::Table(entries) = node.value else {
                    return Err(Error::input("[acceptance] `back_calculated` must be a table")
                        .at(source.locate(node.span))
                        .help("write `back_calculated = { within = 0.15, at_lowest = 0.20, min_fraction = 0.75 }`"));
                };
                let mut t = Section::new(
                    source,
                    "[acceptance] back_calculated",
                    node.span.clone(),
                    entries,
                    BACK_CALC_KEYS,
                )?;
                let mut rule = crate::metrology::assay::BackCalcRule::default();
                for (key, slot) in [
                    ("within", &mut rule.within),
                    ("at_lowest", &mut rule.at_lowest),
                    ("min_fraction", &mut rule.min_fraction),
                ] {
                    if let Some(v) = t.number(key)? {
                        if !(v.value > 0.0 && v.value <= 1.0) {
                            return Err(t
                                .error(
                                    v.span,
                                    format!(
                                        "`{key}` must be a fraction in (0, 1], found {}",
                                        v.value
                                    ),
                                )
                                .help("fractions: 0.15 is ±15 %, 0.75 is 75 % of the standards"));
                        }
                        *slot = v.value;
                    }
                }
                acc.back_calculated = Some(Spanned::new(rule, node.span));
            }
            "drift_curve" => {
                let Value::Table(entries) = node.value else {
                    return Err(Error::input("[acceptance] `drift_curve` must be a table")
                        .at(source.locate(node.span))
                        .help("write [acceptance.drift_curve] with `max_abs_change = …`"));
                };
                let mut t = Section::new(
                    source,
                    "[acceptance.drift_curve]",
                    node.span.clone(),
                    entries,
                    DRIFT_CURVE_KEYS,
                )?;
                let max = non_negative(&mut t, "max_abs_change")?.ok_or_else(|| {
                    t.error(node.span.clone(), "[acceptance.drift_curve] needs `max_abs_change`")
                        .help("the largest allowed |new curve − previous curve| over the calibrated range")
                })?;
                let axis = match t.string("axis")? {
                    None => crate::metrology::Axis::Response,
                    Some(a) => match a.value.as_str() {
                        "response" => crate::metrology::Axis::Response,
                        "predictor" => crate::metrology::Axis::Predictor,
                        other => {
                            return Err(choice_error(
                                &t,
                                a.span,
                                "axis",
                                other,
                                &["response", "predictor"],
                            ));
                        }
                    },
                };
                acc.drift_curve = Some(DriftCurveSpec {
                    max_abs_change: max,
                    axis,
                    span: node.span,
                });
            }
            _ => {
                let v = match node.value {
                    Value::Float(f) if f.is_finite() => f,
                    Value::Int(i) => i as f64,
                    ref v => {
                        return Err(Error::input(format!(
                            "[acceptance] `{}` must be a finite number, found {}",
                            k.name,
                            v.type_name()
                        ))
                        .at(source.locate(node.span.clone()))
                        .help("write the limit as a number, e.g. `r_squared_min = 0.999`"));
                    }
                };
                if k.name == "min_points" && (v < 1.0 || v.fract() != 0.0) {
                    return Err(Error::input("`min_points` must be a positive whole number")
                        .at(source.locate(node.span))
                        .help("for example `min_points = 8`"));
                }
                if matches!(
                    k.name.as_str(),
                    "r_squared_min"
                        | "adj_r_squared_min"
                        | "runs_p_min"
                        | "normality_p_min"
                        | "lack_of_fit_p_min"
                ) && !(0.0..=1.0).contains(&v)
                {
                    return Err(Error::input(format!(
                        "`{}` must lie between 0 and 1, found {v}",
                        k.name
                    ))
                    .at(source.locate(node.span))
                    .help("R² and p-values are fractions, e.g. 0.999 or 0.05"));
                }
                acc.global
                    .push((Spanned::new(k.name, k.span), Spanned::new(v, node.span)));
            }
        }
    }
    Ok(acc)
}

fn non_negative(t: &mut Section<'_>, key: &str) -> Result<Option<Spanned<f64>>> {
    let v = t.number(key)?;
    if let Some(n) = &v
        && n.value < 0.0
    {
        return Err(t
            .error(n.span.clone(), format!("`{key}` must not be negative"))
            .help("a tolerance or change limit is a magnitude"));
    }
    Ok(v)
}

fn default_signoff() -> Vec<String> {
    vec![
        "Performed by".into(),
        "Reviewed by".into(),
        "Approved by".into(),
    ]
}

fn check_report(mut s: Section<'_>, dir: &Path, name: &str) -> Result<ReportSpec> {
    let formats = match s.strings("formats")? {
        None => vec![ReportFormat::Html, ReportFormat::Md, ReportFormat::Json],
        Some(list) => {
            let mut out = Vec::new();
            for f in list {
                let fmt = ReportFormat::parse(&f.value).ok_or_else(|| {
                    choice_error(
                        &s,
                        f.span.clone(),
                        "formats",
                        &f.value,
                        &ReportFormat::NAMES,
                    )
                })?;
                if !out.contains(&fmt) {
                    out.push(fmt);
                }
            }
            if out.is_empty() {
                return Err(s
                    .error(s.span.clone(), "`formats` is empty")
                    .help("list at least one of html, md, json"));
            }
            out.sort();
            out
        }
    };
    let out_dir = s
        .string("dir")?
        .map(|d| resolve(dir, &d.value.replace("{name}", name)));
    let signoff = match s.strings("signoff")? {
        None => default_signoff(),
        Some(list) => list.into_iter().map(|t| t.value).collect(),
    };
    let templates = s.string("templates")?.map(|t| resolve(dir, &t.value));
    let supersedes = match s.string("supersedes")? {
        Some(v) if v.value.trim().is_empty() => {
            return Err(s
                .error(v.span, "`supersedes` is empty")
                .help("give the report id of the report this one amends, e.g. \"probe-a7-20261128T101500Z-1a2b3c4d\""));
        }
        v => v.map(|v| v.value),
    };
    Ok(ReportSpec {
        formats,
        dir: out_dir,
        signoff,
        templates,
        supersedes,
    })
}
