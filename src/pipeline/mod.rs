//! The stages of one recipe, in order: load and check the recipe, prepare the model and its
//! data, fit, diagnose, judge, and write the run folder and the history line.

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

/// Validate a recipe and its data; a one-line summary on success.
pub fn check(path: &Path) -> Result<String> {
    let recipe = recipe::load(path)?;
    let prep = crate::model::prepare(&recipe)?;
    metrology::check_variables(&recipe, &prep.model)?;
    let ds = &prep.data;
    let filtered = if prep.rows_filtered > 0 {
        format!(", {} filtered out", prep.rows_filtered)
    } else {
        String::new()
    };
    Ok(format!(
        "{}: {} rows from {} file{}{filtered}",
        recipe.name.value,
        ds.len(),
        ds.files.len(),
        if ds.files.len() == 1 { "" } else { "s" }
    ))
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
    Error::output(format!("the report cannot be produced: {e}"))
        .help("fix the template or the output folder named above")
}

/// Load, fit, judge and render one recipe — everything except writing.
pub fn compute(path: &Path, settings: &RunSettings) -> Result<Computed> {
    let recipe = recipe::load(path)?;
    let prep = crate::model::prepare(&recipe)?;
    let solved = solve::solve(&recipe, &prep)?;
    let diag = diagnostics::compute(&prep, &solved);
    let dir = report_dir(&recipe, settings);
    let (mut history, mut warnings) = history::read(&dir.join("history.jsonl"))?;
    if let Some(before) = &settings.history_before
        && let Some(i) = history.iter().position(|h| h.run_id == *before)
    {
        history.truncate(i);
    }
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
    let run_id = report::write::run_id(settings.time, &hash)
        .map_err(|e| Error::internal(format!("run id: {e}")))?;
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
    let mut plot_warnings = Vec::new();
    let plots = plots::plots(&recipe, &prep, &solved, &history, &mut plot_warnings);
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
        serde_json::Value::Null,
        &warnings,
    );
    metro.fill_result(&recipe, &mut doc);
    let mut context = outputs::report_context(&recipe, &prep, &solved, &diag, &doc, verdict, &rows);
    metro.fill_context(&recipe, &doc, &mut context);
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
    s.push_str(&format!("  {}\n", figures(d)));
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
    for w in &d.warnings {
        s.push_str(&format!("  warning: {w}\n"));
    }
    s
}

/// Run one recipe end to end; an error becomes an invalid (or failed-output) outcome.
pub fn run_recipe(path: &Path, settings: &RunSettings) -> Vec<RunOutcome> {
    let start = Instant::now();
    let result = compute(path, settings).and_then(|mut c| {
        let folder = write(&mut c, settings)?;
        Ok((c, folder))
    });
    let seconds = start.elapsed().as_secs_f64();
    match result {
        Ok((c, folder)) => {
            if settings.verbose {
                print!("{}", summary_text(&c));
            }
            vec![RunOutcome {
                recipe: path.to_path_buf(),
                name: c.doc.recipe.name.clone(),
                channel: None,
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
            }]
        }
        Err(e) => {
            let name = recipe::load(path).map(|r| r.name.value).unwrap_or_default();
            vec![RunOutcome::failed(path, &name, &e, seconds)]
        }
    }
}
