//! `fitwright verify RESULT.json`: re-hash the recorded inputs, re-run the recipe as it was
//! run, and say whether the inputs are unchanged and the numbers reproduce.

use std::path::{Path, PathBuf};

use crate::error::Result;
use crate::pipeline::{self, RunSettings};
use crate::result::ResultDoc;

/// Relative tolerance for a number to count as reproduced. The same binary on the same
/// inputs reproduces bit for bit; the tolerance leaves room for another CPU's libm (common
/// practice; no published source).
pub const REPRODUCE_RTOL: f64 = 1e-9;

/// The findings of a verification.
#[derive(Debug, Clone, Default)]
pub struct Findings {
    /// What was checked and matched.
    pub matched: Vec<String>,
    /// What differs.
    pub differences: Vec<String>,
}

fn close(a: f64, b: f64) -> bool {
    a == b || (a - b).abs() <= REPRODUCE_RTOL * a.abs().max(b.abs()) || (a.is_nan() && b.is_nan())
}

fn compare_opt(name: &str, a: Option<f64>, b: Option<f64>, f: &mut Findings) {
    match (a, b) {
        (Some(x), Some(y)) if close(x, y) => {}
        (None, None) => {}
        (x, y) => f
            .differences
            .push(format!("{name}: recorded {x:?}, now {y:?}")),
    }
}

/// The recipe a result was made from: its recorded absolute path when it exists, else the
/// path relative to the working directory.
fn recipe_path(doc: &ResultDoc) -> PathBuf {
    let abs = PathBuf::from(&doc.recipe.absolute_path);
    if !doc.recipe.absolute_path.is_empty() && abs.is_file() {
        abs
    } else {
        PathBuf::from(&doc.recipe.path)
    }
}

/// Verify a stored result.
pub fn verify(result: &Path) -> Result<Findings> {
    let doc = ResultDoc::read(result)?;
    let mut f = Findings::default();
    let path = recipe_path(&doc);
    let bytes = std::fs::read(&path).map_err(|e| {
        crate::Error::input(format!("the recipe of this result cannot be read: {e}"))
            .in_file(&path)
            .help("verify needs the recipe and data files where the run found them")
    })?;
    let sha = crate::hash::sha256_hex(&bytes);
    if sha == doc.recipe.sha256 {
        f.matched.push(format!(
            "recipe {} unchanged (sha256 {})",
            path.display(),
            &sha[..12]
        ));
    } else {
        f.differences.push(format!(
            "recipe {} changed: recorded sha256 {}, now {}",
            path.display(),
            doc.recipe.sha256,
            sha
        ));
    }
    // The run's time is in its id; re-run as of then, against the history as it was then.
    let time = run_time(&doc.generated_at).unwrap_or(0);
    // The history the run read sits beside its folder: <dir>/<run-id>/result.json. When <dir> is
    // named after the recipe (always so with `--out`), point the re-run at it.
    let recorded_dir = result.parent().and_then(Path::parent);
    let out = recorded_dir
        .filter(|d| d.file_name().is_some_and(|n| n == doc.recipe.name.as_str()))
        .and_then(Path::parent)
        .map(Path::to_path_buf);
    let settings = RunSettings {
        out,
        formats: None,
        history: false,
        time,
        time_from_epoch: true,
        verbose: false,
        history_before: Some(doc.run_id.clone()),
        as_found: doc.as_found.is_some(),
    };
    let mut c = match pipeline::compute(&path, &settings) {
        Ok(c) => c,
        Err(e) => {
            f.differences
                .push(format!("the recipe no longer runs: {}", e.message));
            return Ok(f);
        }
    };
    // Same output folder as recorded (the result sits in <dir>/<run-id>/result.json).
    if let Some(dir) = result.parent().and_then(Path::parent) {
        c.dir = dir.to_path_buf();
    }
    let now = &c.doc;
    if now.data.files.len() != doc.data.files.len() {
        f.differences.push(format!(
            "{} data files recorded, {} found now",
            doc.data.files.len(),
            now.data.files.len()
        ));
    }
    for (a, b) in doc.data.files.iter().zip(&now.data.files) {
        if a.sha256 == b.sha256 {
            f.matched.push(format!(
                "data {} unchanged (sha256 {})",
                b.path,
                &b.sha256[..12]
            ));
        } else {
            f.differences.push(format!(
                "data {} changed: recorded sha256 {}, now {}",
                b.path, a.sha256, b.sha256
            ));
        }
    }
    let mut numbers = 0;
    for (a, b) in doc.parameters.iter().zip(&now.parameters) {
        numbers += 2;
        if a.name != b.name || !close(a.value, b.value) {
            f.differences.push(format!(
                "parameter {}: recorded {}, now {} = {}",
                a.name, a.value, b.name, b.value
            ));
        }
        compare_opt(
            &format!("standard error of {}", a.name),
            a.std_error,
            b.std_error,
            &mut f,
        );
    }
    numbers += 4;
    if !close(doc.statistics.ssr, now.statistics.ssr) {
        f.differences.push(format!(
            "SSR: recorded {}, now {}",
            doc.statistics.ssr, now.statistics.ssr
        ));
    }
    compare_opt(
        "R²",
        doc.statistics.r_squared,
        now.statistics.r_squared,
        &mut f,
    );
    if !close(doc.statistics.std_error, now.statistics.std_error) {
        f.differences.push(format!(
            "s: recorded {}, now {}",
            doc.statistics.std_error, now.statistics.std_error
        ));
    }
    if doc.statistics.n != now.statistics.n {
        f.differences.push(format!(
            "n: recorded {}, now {}",
            doc.statistics.n, now.statistics.n
        ));
    }
    for (a, b) in doc.criteria.iter().zip(&now.criteria) {
        if a.status != b.status || a.measured != b.measured {
            f.differences.push(format!(
                "criterion {} {}: recorded {} ({}), now {} ({})",
                a.criterion, a.limit, a.measured, a.status, b.measured, b.status
            ));
        }
    }
    if doc.verdict == now.verdict {
        f.matched.push(format!(
            "{numbers} figures and the verdict ({}) reproduce",
            doc.verdict_wording
        ));
    } else {
        f.differences.push(format!(
            "verdict: recorded {}, now {}",
            doc.verdict, now.verdict
        ));
    }
    Ok(f)
}

/// Seconds since 1970 of `YYYY-MM-DDTHH:MM:SSZ`.
fn run_time(text: &str) -> Option<i64> {
    let b = text.as_bytes();
    if b.len() != 20 {
        return None;
    }
    let num = |r: std::ops::Range<usize>| text.get(r)?.parse::<i64>().ok();
    let (y, mo, d) = (num(0..4)?, num(5..7)?, num(8..10)?);
    let (h, mi, s) = (num(11..13)?, num(14..16)?, num(17..19)?);
    // Days from civil (Howard Hinnant's algorithm, public domain).
    let y2 = if mo <= 2 { y - 1 } else { y };
    let era = y2.div_euclid(400);
    let yoe = y2 - era * 400;
    let doy = (153 * (mo + if mo > 2 { -3 } else { 9 }) + 2) / 5 + d - 1;
    let doe = yoe * 365 + yoe / 4 - yoe / 100 + doy;
    let days = era * 146097 + doe - 719468;
    Some(days * 86400 + h * 3600 + mi * 60 + s)
}

#[cfg(test)]
mod tests {
    #[test]
    fn run_time_inverts_the_report_timestamp() {
        // 2026-12-01T20:23:20Z = 1796156600 s (GNU coreutils: date -u -d @1796156600).
        assert_eq!(super::run_time("2026-12-01T20:23:20Z"), Some(1_796_156_600));
        assert_eq!(
            crate::report::write::utc_timestamp(1_796_156_600)
                .ok()
                .as_deref(),
            Some("2026-12-01T20:23:20Z")
        );
    }
}
