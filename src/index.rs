//! `fitwright index DIR`: one HTML page listing every result under a folder — the latest
//! verdict of each recipe (and channel), a link to its report, the verdicts of earlier runs,
//! and a small trend of each parameter over the runs.

use std::collections::BTreeMap;
use std::path::{Path, PathBuf};

use crate::error::{Error, Result};
use crate::result::ResultDoc;

/// One stored run.
struct Entry {
    doc: ResultDoc,
    /// Folder of the run, relative to the index.
    rel: PathBuf,
}

fn escape(s: &str) -> String {
    let mut o = String::with_capacity(s.len());
    for c in s.chars() {
        match c {
            '&' => o.push_str("&amp;"),
            '<' => o.push_str("&lt;"),
            '>' => o.push_str("&gt;"),
            '"' => o.push_str("&quot;"),
            '\'' => o.push_str("&#39;"),
            c => o.push(c),
        }
    }
    o
}

/// Every `result.json` under `dir` (hidden folders, such as unfinished `.<run-id>.tmp`
/// folders, are skipped), with the ones that do not parse as warnings.
fn collect(dir: &Path) -> (Vec<Entry>, Vec<String>) {
    let mut entries = Vec::new();
    let mut warnings = Vec::new();
    for e in walkdir::WalkDir::new(dir)
        .into_iter()
        .filter_entry(|e| e.depth() == 0 || !e.file_name().to_string_lossy().starts_with('.'))
        .filter_map(|e| e.ok())
        .filter(|e| e.file_type().is_file() && e.file_name() == "result.json")
    {
        match ResultDoc::read(e.path()) {
            Ok(doc) => {
                let rel = e
                    .path()
                    .parent()
                    .and_then(|p| p.strip_prefix(dir).ok())
                    .map(Path::to_path_buf)
                    .unwrap_or_default();
                entries.push(Entry { doc, rel });
            }
            Err(err) => warnings.push(format!("{}: skipped ({})", e.path().display(), err.message)),
        }
    }
    (entries, warnings)
}

fn sparkline(values: &[f64]) -> String {
    let finite: Vec<f64> = values.iter().copied().filter(|v| v.is_finite()).collect();
    if finite.len() < 2 {
        return String::new();
    }
    let (lo, hi) = finite
        .iter()
        .fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), v| {
            (a.min(*v), b.max(*v))
        });
    let (w, h) = (120.0, 24.0);
    let span = if hi > lo { hi - lo } else { 1.0 };
    let pts: Vec<String> = finite
        .iter()
        .enumerate()
        .map(|(i, v)| {
            format!(
                "{:.1},{:.1}",
                i as f64 * w / (finite.len() - 1) as f64,
                h - 2.0 - (v - lo) / span * (h - 4.0)
            )
        })
        .collect();
    format!(
        "<svg class=\"spark\" width=\"{w}\" height=\"{h}\" viewBox=\"0 0 {w} {h}\" role=\"img\"><polyline fill=\"none\" stroke=\"#2f5d62\" stroke-width=\"1.5\" points=\"{}\"/></svg>",
        pts.join(" ")
    )
}

/// The index page of a folder of results.
pub fn render(dir: &Path) -> Result<(String, usize)> {
    if !dir.is_dir() {
        return Err(Error::usage(format!("`{}` is not a folder", dir.display()))
            .help("give the folder that holds the reports, e.g. `fitwright index reports`"));
    }
    let (entries, warnings) = collect(dir);
    let mut groups: BTreeMap<(String, String), Vec<&Entry>> = BTreeMap::new();
    for e in &entries {
        groups
            .entry((
                e.doc.recipe.name.clone(),
                e.doc.channel.clone().unwrap_or_default(),
            ))
            .or_default()
            .push(e);
    }
    let mut rows = String::new();
    for ((name, channel), mut runs) in groups {
        runs.sort_by(|a, b| a.doc.run_id.cmp(&b.doc.run_id));
        let Some(latest) = runs.last() else { continue };
        let d = &latest.doc;
        let link = latest.rel.join("report.html");
        let link_text = link.to_string_lossy().replace('\\', "/");
        let has_html = dir.join(&link).is_file();
        let history: String = runs
            .iter()
            .map(|r| {
                format!(
                    "<span class=\"dot {}\" title=\"{} — {}\"></span>",
                    escape(&r.doc.verdict),
                    escape(&r.doc.run_id),
                    escape(&r.doc.verdict_wording)
                )
            })
            .collect();
        let trends: String = d
            .parameters
            .iter()
            .filter(|p| !p.fixed)
            .map(|p| {
                let values: Vec<f64> = runs
                    .iter()
                    .filter_map(|r| r.doc.param(&p.name).map(|q| q.value))
                    .collect();
                format!(
                    "<div class=\"trend\"><span>{}</span> {}</div>",
                    escape(&p.name),
                    sparkline(&values)
                )
            })
            .collect();
        let r2 = d
            .statistics
            .r_squared
            .map_or("—".into(), |v| crate::report::format::sig(v, 6));
        rows.push_str(&format!(
            "<tr><td>{}{}</td><td>{}</td><td class=\"verdict {}\">{}</td><td>{}</td><td>R² {} · s {}</td><td>{}</td><td>{}</td></tr>\n",
            escape(&name),
            if channel.is_empty() { String::new() } else { format!(" <span class=\"channel\">[{}]</span>", escape(&channel)) },
            escape(&d.recipe.title),
            escape(&d.verdict),
            escape(&d.verdict_wording),
            if has_html { format!("<a href=\"{}\">{}</a>", escape(&link_text), escape(&d.run_id)) } else { escape(&d.run_id) },
            r2,
            crate::report::format::num(d.statistics.std_error),
            history,
            trends
        ));
    }
    let warn: String = warnings
        .iter()
        .map(|w| format!("<li>{}</li>", escape(w)))
        .collect();
    let html = format!(
        r#"<!DOCTYPE html>
<html lang="en"><head><meta charset="utf-8"><title>Calibration results — {title}</title>
<style>
body {{ font-family: "DejaVu Sans", "Helvetica Neue", Arial, sans-serif; margin: 2rem auto; max-width: 72rem; color: #1d2424; }}
h1 {{ font-family: Georgia, "DejaVu Serif", serif; font-weight: 600; }}
table {{ border-collapse: collapse; width: 100%; font-size: 0.9rem; }}
th, td {{ text-align: left; padding: 0.4rem 0.6rem; border-bottom: 1px solid #d7dcdc; vertical-align: top; }}
th {{ font-size: 0.75rem; text-transform: uppercase; letter-spacing: 0.04em; color: #4f5b5b; }}
.verdict.accepted {{ color: #1f6b3a; }} .verdict.rejected {{ color: #9b2c1f; font-weight: 600; }} .verdict.not-judged {{ color: #7a5b00; }}
.dot {{ display: inline-block; width: 0.7rem; height: 0.7rem; margin-right: 2px; border-radius: 2px; background: #b9c2c2; }}
.dot.accepted {{ background: #3f8f5a; }} .dot.rejected {{ background: #c0503f; }} .dot.not-judged {{ background: #d6b24a; }}
.trend {{ white-space: nowrap; font-size: 0.8rem; }} .trend span {{ display: inline-block; min-width: 3rem; }}
.channel {{ color: #4f5b5b; }} .note {{ color: #4f5b5b; font-size: 0.85rem; }}
</style></head><body>
<h1>Calibration results</h1>
<p class="note">{count} run(s) of {groups} calibration(s) under <code>{title}</code>; the latest run of each is shown. "criteria met — awaiting review" means every acceptance criterion passed: acceptance of a calibration is a person's act (sign-off in each report).</p>
<table><thead><tr><th>Recipe</th><th>Title</th><th>Latest verdict</th><th>Report</th><th>Figures</th><th>Runs (oldest → newest)</th><th>Parameter trend</th></tr></thead>
<tbody>
{rows}</tbody></table>
{warn_block}
<p class="note">{caution}</p>
</body></html>
"#,
        title = escape(&dir.display().to_string()),
        count = entries.len(),
        groups = rows.matches("<tr>").count(),
        rows = rows,
        warn_block = if warn.is_empty() {
            String::new()
        } else {
            format!("<h2>Skipped</h2><ul>{warn}</ul>")
        },
        caution = escape(crate::CAUTION),
    );
    Ok((html, entries.len()))
}

/// Write `DIR/index.html`.
pub fn write(dir: &Path) -> Result<(PathBuf, usize)> {
    let (html, n) = render(dir)?;
    let path = dir.join("index.html");
    crate::fsutil::write_atomic(&path, html.as_bytes())?;
    Ok((path, n))
}
