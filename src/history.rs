//! The run history of a recipe (SPEC §9): `<report.dir>/history.jsonl`, one JSON line per run.
//!
//! Lines are only ever appended: the file is opened in append mode, locked exclusively
//! (`File::lock`) so that two processes appending at once cannot interleave, and each line is
//! written with one `write_all` of the complete line including its newline, then synced. A
//! line that does not parse (a torn write from a crash of an older version, a hand edit) is
//! skipped with a warning, never rewritten.

use std::collections::BTreeMap;
use std::io::Write;
use std::path::Path;

use serde::{Deserialize, Serialize};

use crate::error::{Error, Result};

/// A parameter as the history records it.
#[derive(Debug, Clone, Serialize, Deserialize, PartialEq)]
pub struct HistoryParam {
    pub value: f64,
    pub std_error: Option<f64>,
}

/// One line of `history.jsonl`.
#[derive(Debug, Clone, Serialize, Deserialize, PartialEq)]
pub struct HistoryLine {
    pub run_id: String,
    /// UTC time of the run, `YYYY-MM-DDTHH:MM:SSZ`.
    pub time: String,
    /// Channel (for `by = …` recipes), else absent.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub channel: Option<String>,
    pub recipe_sha256: String,
    pub data_sha256: Vec<String>,
    pub parameters: BTreeMap<String, HistoryParam>,
    pub statistics: BTreeMap<String, f64>,
    /// Verdict code (`accepted`, `rejected`, `not-judged`).
    pub verdict: String,
    /// Where the run's `result.json` is, relative to the history file's folder.
    #[serde(default)]
    pub result: Option<String>,
    /// The report id this run's report amends and replaces (`[report] supersedes`).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub supersedes: Option<String>,
}

/// Append one line, holding an exclusive lock while writing.
pub fn append(path: &Path, line: &HistoryLine) -> Result<()> {
    let mut text = serde_json::to_string(line)
        .map_err(|e| Error::internal(format!("history line does not serialize: {e}")))?;
    text.push('\n');
    if let Some(dir) = path.parent() {
        std::fs::create_dir_all(dir).map_err(|e| out_err(path, &e))?;
    }
    let mut file = std::fs::OpenOptions::new()
        .create(true)
        .append(true)
        .open(path)
        .map_err(|e| out_err(path, &e))?;
    file.lock().map_err(|e| out_err(path, &e))?;
    let result = file
        .write_all(text.as_bytes())
        .and_then(|_| file.sync_data());
    let _ = file.unlock();
    result.map_err(|e| out_err(path, &e))
}

fn out_err(path: &Path, e: &std::io::Error) -> Error {
    Error::output(format!("cannot append to the history: {e}"))
        .in_file(path)
        .help("check that the report folder is writable (or run with --no-history)")
}

/// The history's place cannot be read: a file where a folder of the path must be (`--out`
/// naming a file), a folder where the history must be, or no permission. All concern the
/// output location, so they are output failures (exit 3), named plainly.
fn unreadable(path: &Path, e: &std::io::Error) -> Error {
    let blocking_file = path
        .ancestors()
        .skip(1)
        .find(|a| !a.as_os_str().is_empty() && a.exists() && !a.is_dir());
    if let Some(file) = blocking_file {
        return Error::output(format!(
            "the report folder cannot be used: `{}` is a file, not a folder",
            file.display()
        ))
        .help("give a folder to --out or [report] dir, or move the file away");
    }
    if path.is_dir() {
        return Error::output("the history is a folder, not a file")
            .in_file(path)
            .help("history.jsonl must be a file; move the folder away");
    }
    Error::output(format!("cannot read the history: {e}"))
        .in_file(path)
        .help("check the permissions of the report folder and its history.jsonl")
}

/// Every readable line of a history file, oldest first, plus warnings for unreadable lines.
/// A missing file is an empty history.
pub fn read(path: &Path) -> Result<(Vec<HistoryLine>, Vec<String>)> {
    let text = match std::fs::read_to_string(path) {
        Ok(t) => t,
        Err(e) if e.kind() == std::io::ErrorKind::NotFound => return Ok((Vec::new(), Vec::new())),
        Err(e) => return Err(unreadable(path, &e)),
    };
    let mut lines = Vec::new();
    let mut warnings = Vec::new();
    for (i, l) in text.lines().enumerate() {
        if l.trim().is_empty() {
            continue;
        }
        match serde_json::from_str::<HistoryLine>(l) {
            Ok(h) => lines.push(h),
            Err(e) => warnings.push(format!(
                "{}:{}: history line skipped, it does not parse ({e})",
                path.display(),
                i + 1
            )),
        }
    }
    Ok((lines, warnings))
}

/// The last accepted line (of a channel, when given).
pub fn last_accepted<'a>(
    lines: &'a [HistoryLine],
    channel: Option<&str>,
) -> Option<&'a HistoryLine> {
    lines
        .iter()
        .rev()
        .find(|l| l.verdict == "accepted" && l.channel.as_deref() == channel)
}

#[cfg(test)]
mod tests {
    use super::*;

    fn line(id: &str, verdict: &str) -> HistoryLine {
        HistoryLine {
            run_id: id.into(),
            time: "2026-11-28T10:00:00Z".into(),
            channel: None,
            recipe_sha256: "ab".into(),
            data_sha256: vec!["cd".into()],
            parameters: [(
                "B".to_string(),
                HistoryParam {
                    value: 3950.0,
                    std_error: Some(2.0),
                },
            )]
            .into(),
            statistics: [("r_squared".to_string(), 0.9999)].into(),
            verdict: verdict.into(),
            result: None,
            supersedes: None,
        }
    }

    #[test]
    fn append_then_read_keeps_order_and_finds_last_accepted() {
        let dir = tempfile::tempdir().expect("tempdir");
        let p = dir.path().join("h/history.jsonl");
        append(&p, &line("r1", "accepted")).expect("append");
        append(&p, &line("r2", "accepted")).expect("append");
        append(&p, &line("r3", "rejected")).expect("append");
        let (lines, warnings) = read(&p).expect("read");
        assert!(warnings.is_empty());
        assert_eq!(
            lines.iter().map(|l| l.run_id.as_str()).collect::<Vec<_>>(),
            ["r1", "r2", "r3"]
        );
        assert_eq!(
            last_accepted(&lines, None).map(|l| l.run_id.as_str()),
            Some("r2")
        );
    }

    #[test]
    fn torn_line_is_skipped_with_a_warning_not_removed() {
        let dir = tempfile::tempdir().expect("tempdir");
        let p = dir.path().join("history.jsonl");
        append(&p, &line("r1", "accepted")).expect("append");
        std::fs::OpenOptions::new()
            .append(true)
            .open(&p)
            .and_then(|mut f| f.write_all(b"{\"run_id\": \"r2\", \"ti"))
            .expect("torn");
        std::fs::OpenOptions::new()
            .append(true)
            .open(&p)
            .and_then(|mut f| f.write_all(b"\n"))
            .expect("newline");
        append(&p, &line("r3", "accepted")).expect("append");
        let (lines, warnings) = read(&p).expect("read");
        assert_eq!(lines.len(), 2);
        assert_eq!(warnings.len(), 1);
        assert!(std::fs::read_to_string(&p).expect("read").contains("\"ti"));
    }
}
