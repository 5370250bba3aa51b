//! The stages of one recipe, in order: load and check the recipe, prepare the model and its
//! data, fit, diagnose, judge, and write the run folder and the history line.

pub mod compare;
pub mod diagnostics;
pub mod metrology;
pub mod outputs;
pub mod plots;
pub mod solve;

use std::path::{Path, PathBuf};
use std::time::Instant;

use crate::acceptance::{Baseline, Status, Verdict};
use crate::batch::RunOutcome;
use crate::error::{Error, Result};
use crate::history::{self, HistoryLine, HistoryParam};
use crate::recipe::{self, Recipe, ReportFormat};
use crate::report;
use crate::result::ResultDoc;

/// What `check` found for a valid recipe.
#[derive(Debug)]
pub struct Checked {
    /// One line: name, rows and files (channels for a `by` recipe).
    pub summary: String,
    /// For a recipe with `[data] by`: each channel in natural order, with its own summary or
    /// error. Empty otherwise.
    pub channels: Vec<(String, Result<String>)>,
}

impl Checked {
    /// The channels that are invalid.
    pub fn invalid_channels(&self) -> impl Iterator<Item = (&str, &Error)> {
        self.channels
            .iter()
            .filter_map(|(c, r)| r.as_ref().err().map(|e| (c.as_str(), e)))
    }
}

/// Validate one prepared model: the analysis must not find it unidentifiable.
fn check_prepared(recipe: &Recipe, prep: &crate::model::Prepared) -> Result<String> {
    metrology::check_variables(recipe, &prep.model)?;
    let analysis = solve::analyse(recipe, prep)?;
    solve::refuse_unidentifiable(recipe, &analysis)?;
    Ok(rows_summary(prep))
}

/// Validate a recipe and its data; a one-line summary on success (and one per channel for a
/// recipe with `by`, where a channel with bad data is invalid on its own).
pub fn check(path: &Path) -> Result<Checked> {
    let recipe = recipe::load(path)?;
    report::Templates::load(recipe.report.templates.as_deref()).map_err(report_error)?;
    if recipe.data.by.is_some() {
        let set = crate::model::prepare_channels(&recipe)?;
        let files = set.files.len();
        let channels = set.channels;
        let invalid = channels.iter().filter(|(_, p)| p.is_err()).count();
        let summary = format!(
            "{}: {} channel{} from {files} file{}{}",
            recipe.name.value,
            channels.len(),
            if channels.len() == 1 { "" } else { "s" },
            if files == 1 { "" } else { "s" },
            if invalid > 0 {
                format!(", {invalid} invalid")
            } else {
                String::new()
            }
        );
        let channels = channels
            .into_iter()
            .map(|(c, p)| (c, p.and_then(|p| check_prepared(&recipe, &p))))
            .collect();
        return Ok(Checked { summary, channels });
    }
    let prep = crate::model::prepare(&recipe)?;
    Ok(Checked {
        summary: format!("{}: {}", recipe.name.value, check_prepared(&recipe, &prep)?),
        channels: Vec::new(),
    })
}

/// "19 rows from 2 files, 3 filtered out".
fn rows_summary(prep: &crate::model::Prepared) -> String {
    let ds = &prep.data;
    let filtered = if prep.rows_filtered > 0 {
        format!(", {} filtered out", prep.rows_filtered)
    } else {
        String::new()
    };
    format!(
        "{} rows from {} file{}{filtered}",
        ds.len(),
        ds.files.len(),
        if ds.files.len() == 1 { "" } else { "s" }
    )
}

/// Settings of a run that do not come from the recipe.
#[derive(Debug, Clone)]
pub struct RunSettings {
    /// `--out DIR`: reports go to `DIR/{name}` for every recipe.
    pub out: Option<PathBuf>,
    /// `--format`: overrides `[report] formats`.
    pub formats: Option<Vec<ReportFormat>>,
    /// Append to the history (false with `--no-history`).
    pub history: bool,
    /// Unix time of the run (from `SOURCE_DATE_EPOCH` when set).
    pub time: i64,
    pub time_from_epoch: bool,
    /// Print the full summary of each recipe (single-recipe runs).
    pub verbose: bool,
    /// Read the history only up to (not including) this run id — `verify` re-runs a past run
    /// against the history as it was then.
    pub history_before: Option<String>,
    /// `--as-found`: judge the new data against the last curve whose criteria were met before
    /// fitting (SPEC §14).
    pub as_found: bool,
}

/// Where a recipe's runs and history go (SPEC §13).
pub fn report_dir(recipe: &Recipe, settings: &RunSettings) -> PathBuf {
    match (&settings.out, &recipe.report.dir) {
        (Some(out), _) => out.join(&recipe.name.value),
        (None, Some(dir)) => crate::data::clean_path(dir),
        (None, None) => PathBuf::from("reports").join(&recipe.name.value),
    }
}

/// Everything a run computed, before anything is written.
pub struct Computed {
    pub recipe: Recipe,
    pub doc: ResultDoc,
    pub context: report::ReportContext,
    pub verdict: Verdict,
    pub rows: Vec<crate::acceptance::CriterionRow>,
    pub dir: PathBuf,
    pub history: Vec<HistoryLine>,
}

/// The SHA-256 of every input: recipe, data files, tool version.
pub fn inputs_hash(recipe_sha: &str, data: &[String]) -> String {
    let mut text = format!("fitwright {}\n{recipe_sha}\n", env!("CARGO_PKG_VERSION"));
    for d in data {
        text.push_str(d);
        text.push('\n');
    }
    crate::hash::sha256_hex(text.as_bytes())
}

fn report_error(e: report::ReportError) -> Error {
    if is_user_template_error(&e) {
        return Error::input(format!("the report template cannot be used: {e}"))
            .help("fix the template named above, or remove it from the templates folder to use the built-in one");
    }
    Error::output(format!("the report cannot be produced: {e}"))
        .help("fix the template or the output folder named above")
}

/// A template from the recipe's `[report] templates` folder (or the folder itself) is at
/// fault: the recipe's input, so the run is invalid (exit 2), not an output failure.
fn is_user_template_error(e: &report::ReportError) -> bool {
    use report::ReportErrorKind as K;
    match e.kind() {
        K::TemplateSyntax { file, .. } | K::TemplateRender { file, .. } => {
            !file.starts_with("built-in")
        }
        K::Io { action, .. } => action.contains("template"),
        _ => false,
    }
}

/// Load, fit, judge and render one recipe — everything except writing.
pub fn compute(path: &Path, settings: &RunSettings) -> Result<Computed> {
    let recipe = recipe::load(path)?;
    if recipe.data.by.is_some() {
        return Err(Error::usage(
            "this recipe has channels (`[data] by`): compute each with `compute_channels`",
        )
        .in_file(path)
        .help("run it with `fitwright run`"));
    }
    let prep = crate::model::prepare(&recipe)?;
    let dir = report_dir(&recipe, settings);
    compute_prepared(recipe, prep, dir, None, settings)
}

/// A file-name-safe form of a channel value.
pub fn channel_slug(value: &str) -> String {
    let s: String = value
        .chars()
        .map(|c| {
            if c.is_ascii_alphanumeric() || matches!(c, '.' | '_' | '-') {
                c
            } else {
                '_'
            }
        })
        .collect();
    if s.is_empty() { "_".into() } else { s }
}

/// Average replicate groups when `[fit] average_replicates = true`: the fit then sees one row
/// per group, each weighted by the summed weights of its members (see
/// `data::average_replicates`).
fn averaged(recipe: &Recipe, mut prep: crate::model::Prepared) -> Result<crate::model::Prepared> {
    if !recipe.fit.average_replicates {
        return Ok(prep);
    }
    let predictors: Vec<&str> = prep.model.predictors.iter().map(String::as_str).collect();
    let labels = crate::data::replicate_labels(&prep.data, &predictors);
    let avg = crate::data::average_replicates(&prep.data, &labels, prep.weights.as_deref())?;
    prep.warnings.push(format!("{} rows averaged into {} replicate group means (`average_replicates = true`), weighted by group size", prep.data.len(), avg.data.len()));
    prep.data = avg.data;
    prep.weights = Some(avg.weights);
    Ok(prep)
}

/// Fit, judge and render one prepared model (a whole recipe, or one channel of it).
pub fn compute_prepared(
    recipe: Recipe,
    prep: crate::model::Prepared,
    dir: PathBuf,
    channel: Option<String>,
    settings: &RunSettings,
) -> Result<Computed> {
    let prep = averaged(&recipe, prep)?;
    // Units from the file's units row fill in what the recipe leaves out (recipe units win).
    let mut recipe = recipe;
    for (var, unit) in &prep.data.file_units {
        recipe
            .data
            .units
            .entry(var.clone())
            .or_insert_with(|| unit.clone());
    }
    let analysis = solve::analyse(&recipe, &prep)?;
    let mut prep = prep;
    solve::drop_invalid_rows(&recipe, &mut prep, &analysis)?;
    let solved = solve::solve(&recipe, &prep, &analysis)?;
    let (mut history, mut warnings) = history::read(&dir.join("history.jsonl"))?;
    if let Some(before) = &settings.history_before
        && let Some(i) = history.iter().position(|h| h.run_id == *before)
    {
        history.truncate(i);
    }
    // The diagnostics and the plots only read the fit: on large data sets each takes a
    // noticeable share of the run, so they run side by side.
    let ((diag, start_diag), (plots, plot_warnings)) = rayon::join(
        || {
            let diag = diagnostics::compute(&recipe, &prep, &solved);
            let start_diag = solved
                .start
                .as_ref()
                .map(|s| diagnostics::compute(&recipe, &prep, s));
            (diag, start_diag)
        },
        || {
            let mut plot_warnings = Vec::new();
            let plots = plots::plots(&recipe, &prep, &solved, &history, &mut plot_warnings);
            (plots, plot_warnings)
        },
    );
    let baseline = history::last_accepted(&history, None).map(|h| Baseline {
        run_id: h.run_id.clone(),
        params: h
            .parameters
            .iter()
            .map(|(k, v)| (k.clone(), v.value))
            .collect(),
    });
    let (rows, _) = outputs::judge(&recipe, &prep, &solved, &diag, baseline);
    let metro = metrology::evaluate(
        &recipe,
        &prep,
        &solved,
        &history,
        settings.as_found,
        &dir.join("history.jsonl"),
    )?;
    let (rows, verdict) = metro.judge(&recipe, rows, solved.estimate.converged);
    let data_sha: Vec<String> = prep.data.files.iter().map(|f| f.sha256.clone()).collect();
    let hash = inputs_hash(&recipe.sha256, &data_sha);
    let mut run_id = report::write::run_id(settings.time, &hash)
        .map_err(|e| Error::internal(format!("run id: {e}")))?;
    // The same inputs run twice within one second: keep both runs, numbered.
    if dir.join(&run_id).exists() {
        let base = run_id.clone();
        let mut k = 2;
        while dir.join(format!("{base}-{k}")).exists() {
            k += 1;
        }
        run_id = format!("{base}-{k}");
    }
    let generated_at = report::write::utc_timestamp(settings.time)
        .map_err(|e| Error::internal(format!("time: {e}")))?;
    warnings.extend(prep.warnings.iter().cloned());
    warnings.extend(solved.warnings.iter().cloned());
    if recipe.acceptance.is_empty() {
        warnings.insert(
            0,
            "the recipe has no [acceptance] criteria: this run is not judged".into(),
        );
    }
    warnings.extend(plot_warnings);
    let mut doc = outputs::result_doc(
        &recipe,
        &prep,
        &solved,
        &diag,
        &rows,
        verdict,
        &run_id,
        &generated_at,
        serde_json::to_value(&analysis).unwrap_or_default(),
        &warnings,
        start_diag.as_ref(),
    );
    doc.channel = channel.clone();
    let comparisons = compare::compare(&recipe, &prep, &solved)?;
    doc.compare = comparisons
        .iter()
        .filter_map(|c| serde_json::to_value(c).ok())
        .collect();
    doc.calibration = outputs::calibration_figures(&recipe, &prep, &solved)
        .map(|c| serde_json::to_value(&c).unwrap_or_default());
    metro.fill_result(&recipe, &mut doc);
    let mut context = outputs::report_context(&recipe, &prep, &solved, &diag, &doc, verdict, &rows);
    metro.fill_context(&recipe, &doc, &mut context);
    context.analysis = Some(outputs::analysis_summary(&analysis));
    context.compare = compare::rows(&comparisons);
    if let Some(c) = outputs::calibration_figures(&recipe, &prep, &solved) {
        context.calibration_figures = c.rows();
    }
    if let Some(c) = &channel {
        context.title = format!("{} — channel {c}", context.title);
    }
    context.plots = plots;
    context.traceability.time_from_source_date_epoch = settings.time_from_epoch;
    Ok(Computed {
        recipe,
        doc,
        context,
        verdict,
        rows,
        dir,
        history,
    })
}

/// Write the run folder, then the history line.
pub fn write(c: &mut Computed, settings: &RunSettings) -> Result<PathBuf> {
    let templates =
        report::Templates::load(c.recipe.report.templates.as_deref()).map_err(report_error)?;
    templates.fill_traceability(&mut c.context.traceability);
    let formats: Vec<report::write::Format> = settings
        .formats
        .as_ref()
        .unwrap_or(&c.recipe.report.formats)
        .iter()
        .map(|f| match f {
            ReportFormat::Html => report::write::Format::Html,
            ReportFormat::Md => report::write::Format::Markdown,
            ReportFormat::Json => report::write::Format::Json,
        })
        .collect();
    let json = serde_json::to_string_pretty(&c.doc)
        .map_err(|e| Error::internal(format!("result.json does not serialize: {e}")))?;
    let files = report::write::render_run(&c.context, &templates, &formats, Some(&json))
        .map_err(report_error)?;
    let folder = report::write::write_run(&c.dir, &c.doc.run_id, &files).map_err(report_error)?;
    if settings.history {
        let line = HistoryLine {
            run_id: c.doc.run_id.clone(),
            time: c.doc.generated_at.clone(),
            channel: None,
            recipe_sha256: c.doc.recipe.sha256.clone(),
            data_sha256: c.doc.data.files.iter().map(|f| f.sha256.clone()).collect(),
            parameters: c
                .doc
                .parameters
                .iter()
                .map(|p| {
                    (
                        p.name.clone(),
                        HistoryParam {
                            value: p.value,
                            std_error: p.std_error,
                        },
                    )
                })
                .collect(),
            statistics: [
                ("n".to_string(), c.doc.statistics.n as f64),
                ("ssr".to_string(), c.doc.statistics.ssr),
                ("std_error".to_string(), c.doc.statistics.std_error),
            ]
            .into_iter()
            .chain(
                c.doc
                    .statistics
                    .r_squared
                    .map(|r| ("r_squared".to_string(), r)),
            )
            .collect(),
            verdict: c.doc.verdict.clone(),
            result: Some(format!("{}/result.json", c.doc.run_id)),
            supersedes: c.recipe.report.supersedes.clone(),
        };
        history::append(&c.dir.join("history.jsonl"), &line)?;
    }
    Ok(folder)
}

fn figures(doc: &ResultDoc) -> String {
    let mut parts = Vec::new();
    if let Some(r2) = doc.statistics.r_squared {
        parts.push(format!("R² {}", report::format::sig(r2, 6)));
    }
    parts.push(format!(
        "s {}",
        report::format::num(doc.statistics.std_error)
    ));
    parts.push(format!("n {}", doc.statistics.n));
    parts.join(" · ")
}

/// A plain-text summary of one run for the terminal.
pub fn summary_text(c: &Computed) -> String {
    let d = &c.doc;
    let mut s = format!("{} — {}\n", d.recipe.name, d.recipe.title);
    s.push_str(&format!("  verdict: {}\n", c.verdict.wording()));
    if let Some(af) = &d.as_found {
        s.push_str(&format!(
            "  as found (against run {}): {}\n",
            af.against_run, af.summary
        ));
    }
    s.push_str(&format!(
        "  model: {}   ({}; {})\n",
        d.model.equation, d.fit.method_used, d.fit.stop_reason
    ));
    for p in &d.parameters {
        let se = match (p.fixed, p.std_error) {
            (true, _) => "fixed".to_string(),
            (false, Some(se)) => format!("± {}", report::format::num(se)),
            (false, None) => "(no standard error)".to_string(),
        };
        s.push_str(&format!(
            "  {:>10} = {} {se}{}\n",
            p.name,
            report::format::full(p.value),
            p.unit
                .as_deref()
                .map(|u| format!(" {u}"))
                .unwrap_or_default()
        ));
    }
    match &d.start_fit {
        Some(st) => {
            s.push_str(&format!(
                "  linearized start ({}): {}\n",
                st.transform,
                outputs::fit_line(&st.statistics, &st.diagnostics)
            ));
            for p in &st.parameters {
                if !p.fixed {
                    s.push_str(&format!(
                        "  {:>10}   start {}\n",
                        p.name,
                        report::format::full(p.value)
                    ));
                }
            }
            s.push_str(&format!(
                "  refined fit (judged): {}\n",
                outputs::fit_line(&d.statistics, &d.diagnostics)
            ));
        }
        None => s.push_str(&format!(
            "  {}\n",
            outputs::fit_line(&d.statistics, &d.diagnostics)
        )),
    }
    for r in &c.rows {
        let mark = match r.status {
            Status::Pass => "pass",
            Status::Fail => "FAIL",
            Status::NotApplicable => "n/a ",
        };
        s.push_str(&format!(
            "  [{mark}] {} {} — measured {}{}\n",
            r.criterion,
            r.limit,
            r.measured,
            r.note
                .as_deref()
                .map(|n| format!(" ({n})"))
                .unwrap_or_default()
        ));
    }
    for c in &d.compare {
        let eq = c.get("equation").and_then(|v| v.as_str()).unwrap_or("?");
        let da = c
            .get("delta_aicc")
            .and_then(|v| v.as_f64())
            .map_or("—".into(), |v| report::format::sig(v, 3));
        let p = c.get("p_value").and_then(|v| v.as_f64()).map_or(
            "no F-test (not nested)".into(),
            |p| {
                let t = report::format::p_value(p);
                if t.starts_with('<') {
                    format!("nested F-test p {t}")
                } else {
                    format!("nested F-test p = {t}")
                }
            },
        );
        s.push_str(&format!("  compared with {eq}: ΔAICc {da}, {p}\n"));
    }
    if let Some(cal) = &d.calibration {
        let get = |k: &str| {
            cal.get(k)
                .and_then(|v| v.as_f64())
                .map_or("—".into(), report::format::num)
        };
        let unit = cal.get("unit").and_then(|v| v.as_str()).unwrap_or("");
        s.push_str(&format!(
            "  LOD {} {unit} · LOQ {} {unit} (ICH Q2: 3.3·σ/slope, 10·σ/slope)\n",
            get("lod"),
            get("loq")
        ));
    }
    for w in &d.warnings {
        s.push_str(&format!("  warning: {w}\n"));
    }
    s
}

/// Run one recipe end to end; an error becomes an invalid (or failed-output) outcome.
pub fn run_recipe(path: &Path, settings: &RunSettings) -> Vec<RunOutcome> {
    let start = Instant::now();
    let recipe = match recipe::load(path) {
        Ok(r) => r,
        Err(e) => {
            return vec![RunOutcome::failed(
                path,
                "",
                &e,
                start.elapsed().as_secs_f64(),
            )];
        }
    };
    let name = recipe.name.value.clone();
    if recipe.data.by.is_none() {
        let result = crate::model::prepare(&recipe).and_then(|prep| {
            let dir = report_dir(&recipe, settings);
            compute_prepared(recipe, prep, dir, None, settings)
        });
        return vec![finish_run(path, &name, None, result, settings, start)];
    }
    // One fit per channel; a channel with bad data is invalid without stopping the others.
    let set = match crate::model::prepare_channels(&recipe) {
        Ok(s) => s,
        Err(e) => {
            return vec![RunOutcome::failed(
                path,
                &name,
                &e,
                start.elapsed().as_secs_f64(),
            )];
        }
    };
    let base = report_dir(&recipe, settings);
    set.channels
        .into_iter()
        .map(|(channel, prep)| {
            let t = Instant::now();
            let dir = base.join(channel_slug(&channel));
            let result = prep.and_then(|p| {
                compute_prepared(recipe.clone(), p, dir, Some(channel.clone()), settings)
            });
            finish_run(path, &name, Some(channel), result, settings, t)
        })
        .collect()
}

/// Write a computed run and describe its outcome (or the error that stopped it).
fn finish_run(
    path: &Path,
    name: &str,
    channel: Option<String>,
    result: Result<Computed>,
    settings: &RunSettings,
    start: Instant,
) -> RunOutcome {
    let result = result.and_then(|mut c| {
        let folder = write(&mut c, settings)?;
        Ok((c, folder))
    });
    let seconds = start.elapsed().as_secs_f64();
    match result {
        Ok((c, folder)) => {
            if settings.verbose && channel.is_none() {
                print!("{}", summary_text(&c));
            }
            RunOutcome {
                recipe: path.to_path_buf(),
                name: c.doc.recipe.name.clone(),
                channel,
                verdict: c.verdict,
                wording: c.verdict.wording().into(),
                figures: figures(&c.doc),
                report_dir: Some(folder),
                failed: c
                    .rows
                    .iter()
                    .filter(|r| r.status != Status::Pass)
                    .map(|r| {
                        format!(
                            "{} {}: measured {}{}",
                            r.criterion,
                            r.limit,
                            r.measured,
                            r.note
                                .as_deref()
                                .map(|n| format!(" ({n})"))
                                .unwrap_or_default()
                        )
                    })
                    .collect(),
                error: None,
                exit_code: c.verdict.exit_code(),
                seconds,
            }
        }
        Err(e) => {
            let mut o = RunOutcome::failed(path, name, &e, seconds);
            o.channel = channel;
            o
        }
    }
}
