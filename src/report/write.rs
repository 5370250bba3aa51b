//! Run folders: the run id, the file set of a run, and writing it so that a
//! failure never leaves a half report.
//!
//! Layout (SPEC §8): `<dir>/<run-id>/` holding `report.html`, `report.md`
//! with `plots/<name>.svg` beside it, and `result.json`, each present when its
//! format was selected.
//!
//! Atomicity: [`write_run`] writes every file into `<dir>/.<run-id>.tmp/`,
//! flushes each to disk, then renames that folder to `<dir>/<run-id>` in one
//! `rename` (atomic on one file system, POSIX `rename(2)`), and flushes
//! `<dir>`. Readers therefore see either no run folder or a complete one. On
//! an error the temporary folder is removed; after a crash it may remain as
//! a hidden `.<run-id>.tmp` (never mistaken for a report, and removed by the
//! next write into the same folder once it is an hour old, or at once by the
//! next write of the same run id). An existing run folder is never
//! overwritten.

use std::fs;
use std::io::Write;
use std::path::{Path, PathBuf};

use super::context::ReportContext;
use super::plot::check_plot_name;
use super::templates::Templates;
use super::{ReportError, ReportErrorKind, Result};

/// A report format of `[report] formats` / `--format`.
#[derive(Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord, Hash)]
pub enum Format {
    /// `report.html`, self-contained.
    Html,
    /// `report.md` and `plots/*.svg`.
    Markdown,
    /// `result.json`.
    Json,
}

impl Format {
    /// Parses a format name: `html`, `md` (or `markdown`), `json`.
    pub fn parse(name: &str) -> Option<Format> {
        match name {
            "html" => Some(Format::Html),
            "md" | "markdown" => Some(Format::Markdown),
            "json" => Some(Format::Json),
            _ => None,
        }
    }

    /// The name used in recipes and on the command line.
    pub fn name(self) -> &'static str {
        match self {
            Format::Html => "html",
            Format::Markdown => "md",
            Format::Json => "json",
        }
    }
}

/// The files of one run: relative path (with `/` separators) and bytes, in
/// the order written.
#[derive(Debug, Clone, Default, PartialEq, Eq)]
pub struct RunFiles {
    files: Vec<(String, Vec<u8>)>,
}

impl RunFiles {
    /// The files, relative path and content.
    pub fn files(&self) -> &[(String, Vec<u8>)] {
        &self.files
    }

    /// The content of one file, by relative path.
    pub fn get(&self, path: &str) -> Option<&[u8]> {
        self.files
            .iter()
            .find(|(p, _)| p == path)
            .map(|(_, c)| c.as_slice())
    }

    /// Adds a file. The path must be relative, `/`-separated, made of
    /// `[A-Za-z0-9._-]` components that do not start with `.`.
    pub fn add(&mut self, path: &str, content: Vec<u8>) -> Result<()> {
        check_relative_path(path)?;
        if self.get(path).is_some() {
            return Err(ReportError::invalid(format!(
                "the run would hold {path} twice"
            )));
        }
        self.files.push((path.to_string(), content));
        Ok(())
    }
}

fn check_relative_path(path: &str) -> Result<()> {
    let ok = !path.is_empty()
        && path.split('/').all(|part| {
            !part.is_empty()
                && !part.starts_with('.')
                && part
                    .bytes()
                    .all(|b| b.is_ascii_alphanumeric() || matches!(b, b'.' | b'_' | b'-'))
        });
    if ok {
        Ok(())
    } else {
        Err(ReportError::invalid(format!(
            "{path:?} is not a safe relative path for a run file"
        )))
    }
}

/// Renders the selected formats of a run into a [`RunFiles`]:
/// `report.html`, `report.md` plus `plots/<name>.svg` for each plot, and
/// `result.json` from `result_json` (the pipeline's result document,
/// required when [`Format::Json`] is selected). Formats are written in the
/// order html, md, json whatever the order given.
pub fn render_run(
    ctx: &ReportContext,
    templates: &Templates,
    formats: &[Format],
    result_json: Option<&str>,
) -> Result<RunFiles> {
    let mut formats = formats.to_vec();
    formats.sort();
    formats.dedup();
    let mut files = RunFiles::default();
    for format in formats {
        match format {
            Format::Html => files.add("report.html", templates.render_html(ctx)?.into_bytes())?,
            Format::Markdown => {
                files.add("report.md", templates.render_markdown(ctx)?.into_bytes())?;
                for plot in &ctx.plots {
                    check_plot_name(&plot.name)?;
                    files.add(
                        &format!("plots/{}.svg", plot.name),
                        plot.svg.as_str().as_bytes().to_vec(),
                    )?;
                }
            }
            Format::Json => {
                let json = result_json.ok_or_else(|| {
                    ReportError::invalid(
                        "the json format was selected but no result document was given",
                    )
                })?;
                files.add("result.json", json.as_bytes().to_vec())?;
            }
        }
    }
    Ok(files)
}

/// Checks a run id can be a folder name: `[A-Za-z0-9_-]+`, at most 64 bytes.
fn check_run_id(run_id: &str) -> Result<()> {
    let ok = !run_id.is_empty()
        && run_id.len() <= 64
        && run_id
            .bytes()
            .all(|b| b.is_ascii_alphanumeric() || matches!(b, b'_' | b'-'));
    if ok {
        Ok(())
    } else {
        Err(ReportError::invalid(format!(
            "run id {run_id:?} is not usable as a folder name"
        )))
    }
}

fn write_file_synced(path: &Path, content: &[u8]) -> Result<()> {
    let mut file = fs::File::create(path).map_err(|e| ReportError::io(path, "create", e))?;
    file.write_all(content)
        .map_err(|e| ReportError::io(path, "write", e))?;
    file.sync_all()
        .map_err(|e| ReportError::io(path, "flush to disk", e))
}

fn fill_dir(tmp: &Path, files: &RunFiles) -> Result<()> {
    for (relative, content) in files.files() {
        let path = relative
            .split('/')
            .fold(tmp.to_path_buf(), |acc, part| acc.join(part));
        if let Some(parent) = path.parent() {
            fs::create_dir_all(parent)
                .map_err(|e| ReportError::io(parent, "create the folder", e))?;
        }
        write_file_synced(&path, content)?;
    }
    Ok(())
}

/// Flushes a folder's entries (the rename) to disk where the platform allows.
fn sync_dir(dir: &Path) -> Result<()> {
    #[cfg(unix)]
    {
        let handle = fs::File::open(dir).map_err(|e| ReportError::io(dir, "open", e))?;
        handle
            .sync_all()
            .map_err(|e| ReportError::io(dir, "flush to disk", e))?;
    }
    #[cfg(not(unix))]
    let _ = dir;
    Ok(())
}

/// Age after which a temporary run folder is taken to be left by a crashed or killed run:
/// writing a run takes seconds, so an hour leaves a wide margin for a run that is still
/// writing in another process (common practice for stale lock and temporary files).
const STALE_TEMPORARY_SECS: u64 = 3600;

/// Removes `.<run-id>.tmp` folders in `dir` older than [`STALE_TEMPORARY_SECS`] (best
/// effort: a folder that cannot be removed is left; readers ignore hidden folders anyway).
fn remove_stale_temporaries(dir: &Path) {
    let Ok(entries) = fs::read_dir(dir) else {
        return;
    };
    for entry in entries.flatten() {
        let name = entry.file_name();
        let Some(id) = name
            .to_str()
            .and_then(|n| n.strip_prefix('.'))
            .and_then(|n| n.strip_suffix(".tmp"))
        else {
            continue;
        };
        let stale = entry
            .metadata()
            .ok()
            .filter(|m| m.is_dir())
            .and_then(|m| m.modified().ok())
            .and_then(|t| t.elapsed().ok())
            .is_some_and(|age| age.as_secs() > STALE_TEMPORARY_SECS);
        if stale && check_run_id(id).is_ok() {
            let _ = fs::remove_dir_all(entry.path());
        }
    }
}

/// Writes a run into `<dir>/<run_id>/` atomically (see the module docs) and
/// returns the run folder. `dir` is created when missing.
pub fn write_run(dir: &Path, run_id: &str, files: &RunFiles) -> Result<PathBuf> {
    check_run_id(run_id)?;
    fs::create_dir_all(dir).map_err(|e| ReportError::io(dir, "create the report folder", e))?;
    let target = dir.join(run_id);
    if target.exists() {
        return Err(ReportError::new(ReportErrorKind::RunExists {
            path: target,
        }));
    }
    remove_stale_temporaries(dir);
    let tmp = dir.join(format!(".{run_id}.tmp"));
    if tmp.exists() {
        // Left by a crashed earlier write of this same run id.
        fs::remove_dir_all(&tmp)
            .map_err(|e| ReportError::io(&tmp, "remove the stale temporary folder", e))?;
    }
    fs::create_dir(&tmp).map_err(|e| ReportError::io(&tmp, "create the temporary folder", e))?;
    let result = fill_dir(&tmp, files)
        .and_then(|()| sync_dir(&tmp))
        .and_then(|()| {
            if target.exists() {
                return Err(ReportError::new(ReportErrorKind::RunExists {
                    path: target.clone(),
                }));
            }
            fs::rename(&tmp, &target)
                .map_err(|e| ReportError::io(&target, "rename the finished run folder to", e))
        })
        .and_then(|()| sync_dir(dir));
    match result {
        Ok(()) => Ok(target),
        Err(e) => {
            // Best effort: the error that matters is the one returned.
            let _ = fs::remove_dir_all(&tmp);
            Err(e)
        }
    }
}

/// Civil date (year, month 1–12, day 1–31) of a day count since 1970-01-01,
/// proleptic Gregorian calendar.
///
/// Algorithm `civil_from_days` of H. Hinnant, "chrono-Compatible Low-Level
/// Date Algorithms" (2013), from memory: shift the epoch to 0000-03-01 so
/// leap days end each 400-year era, then split into era, year of era, day of
/// year and month with March = 0.
pub fn civil_from_days(days: i64) -> (i64, u32, u32) {
    let z = days + 719_468;
    let era = z.div_euclid(146_097);
    let doe = z.rem_euclid(146_097); // [0, 146096]
    let yoe = (doe - doe / 1460 + doe / 36_524 - doe / 146_096) / 365; // [0, 399]
    let doy = doe - (365 * yoe + yoe / 4 - yoe / 100); // [0, 365]
    let mp = (5 * doy + 2) / 153; // [0, 11], March = 0
    let day = (doy - (153 * mp + 2) / 5 + 1) as u32; // [1, 31]
    let month = if mp < 10 { mp + 3 } else { mp - 9 } as u32; // [1, 12]
    let year = yoe + era * 400 + i64::from(month <= 2);
    (year, month, day)
}

/// Broken-down UTC time of a unix time, years 0–9999 only.
fn utc_parts(unix_seconds: i64) -> Result<(i64, u32, u32, i64, i64, i64)> {
    let days = unix_seconds.div_euclid(86_400);
    let secs = unix_seconds.rem_euclid(86_400);
    let (year, month, day) = civil_from_days(days);
    if !(0..=9999).contains(&year) {
        return Err(ReportError::invalid(format!(
            "time {unix_seconds} (unix seconds) is outside the years 0–9999"
        )));
    }
    Ok((year, month, day, secs / 3600, secs % 3600 / 60, secs % 60))
}

/// UTC time as ISO 8601, `2026-11-28T10:15:00Z`.
pub fn utc_timestamp(unix_seconds: i64) -> Result<String> {
    let (y, mo, d, h, mi, s) = utc_parts(unix_seconds)?;
    Ok(format!("{y:04}-{mo:02}-{d:02}T{h:02}:{mi:02}:{s:02}Z"))
}

/// The run id of SPEC §8: UTC time `YYYYMMDDTHHMMSSZ`, `-`, and the first 8
/// hex digits (lower-case) of the inputs' hash. `unix_seconds` is
/// `SOURCE_DATE_EPOCH` when set, otherwise the current time.
pub fn run_id(unix_seconds: i64, hash_hex: &str) -> Result<String> {
    let prefix: String = hash_hex.chars().take(8).collect();
    if prefix.len() < 8 || !prefix.chars().all(|c| c.is_ascii_hexdigit()) {
        return Err(ReportError::invalid(format!(
            "the inputs' hash must start with 8 hex digits, got {hash_hex:?}"
        )));
    }
    let (y, mo, d, h, mi, s) = utc_parts(unix_seconds)?;
    Ok(format!(
        "{y:04}{mo:02}{d:02}T{h:02}{mi:02}{s:02}Z-{}",
        prefix.to_ascii_lowercase()
    ))
}

/// Parses a `SOURCE_DATE_EPOCH` value: a decimal integer of seconds since
/// 1970-01-01T00:00:00Z (reproducible-builds.org specification), surrounding
/// whitespace allowed.
pub fn parse_source_date_epoch(value: &str) -> Result<i64> {
    let text = value.trim();
    if text.is_empty() || !text.bytes().all(|b| b.is_ascii_digit()) {
        return Err(ReportError::invalid(format!(
            "SOURCE_DATE_EPOCH must be a whole number of seconds since 1970-01-01 UTC, got {value:?}"
        )));
    }
    text.parse::<i64>()
        .map_err(|_| ReportError::invalid(format!("SOURCE_DATE_EPOCH {value:?} is too large")))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn run_id_from_known_unix_times() {
        // Expected values printed by GNU coreutils:
        //   date -u -d @N +%Y%m%dT%H%M%SZ
        assert_eq!(
            run_id(0, "ABCDEF0123").ok().as_deref(),
            Some("19700101T000000Z-abcdef01")
        );
        assert_eq!(
            run_id(951_782_400, "0123456789").ok().as_deref(),
            Some("20000229T000000Z-01234567")
        );
        assert_eq!(
            run_id(1_795_860_900, "deadbeefcafe").ok().as_deref(),
            Some("20261128T101500Z-deadbeef")
        );
        assert_eq!(
            run_id(4_102_444_799, "ffffffff").ok().as_deref(),
            Some("20991231T235959Z-ffffffff")
        );
        assert_eq!(
            run_id(-1, "00000000").ok().as_deref(),
            Some("19691231T235959Z-00000000")
        );
    }

    #[test]
    fn run_id_refuses_short_or_non_hex_hash_and_far_times() {
        assert!(run_id(0, "abc").is_err());
        assert!(run_id(0, "abcdefgh").is_err());
        assert!(run_id(i64::MAX / 2, "abcdef01").is_err());
    }

    #[test]
    fn civil_from_days_matches_known_dates() {
        // Day numbers printed by `date -u -d YYYY-MM-DD +%s` divided by 86400.
        assert_eq!(civil_from_days(0), (1970, 1, 1));
        assert_eq!(civil_from_days(11_016), (2000, 2, 29));
        assert_eq!(civil_from_days(11_017), (2000, 3, 1));
        assert_eq!(civil_from_days(-719_468), (0, 3, 1));
        assert_eq!(civil_from_days(47_541), (2100, 3, 1));
        assert_eq!(
            civil_from_days(47_540),
            (2100, 2, 28),
            "2100 is not a leap year"
        );
    }

    #[test]
    fn civil_from_days_is_consecutive_over_four_centuries() {
        let mut previous = civil_from_days(-1);
        for day in 0..146_097 {
            let (y, m, d) = civil_from_days(day);
            let (py, pm, pd) = previous;
            let next_day = y == py && m == pm && d == pd + 1;
            let next_month = y == py && m == pm + 1 && d == 1 && pd >= 28;
            let next_year = y == py + 1 && m == 1 && d == 1 && pm == 12 && pd == 31;
            assert!(
                next_day || next_month || next_year,
                "{previous:?} -> {:?}",
                (y, m, d)
            );
            previous = (y, m, d);
        }
    }

    #[test]
    fn timestamps_and_source_date_epoch() {
        assert_eq!(
            utc_timestamp(1_795_860_900).ok().as_deref(),
            Some("2026-11-28T10:15:00Z")
        );
        assert_eq!(
            parse_source_date_epoch(" 1795860900\n").ok(),
            Some(1_795_860_900)
        );
        assert!(parse_source_date_epoch("-5").is_err());
        assert!(parse_source_date_epoch("12.5").is_err());
        assert!(parse_source_date_epoch("").is_err());
        assert!(parse_source_date_epoch("99999999999999999999999").is_err());
    }

    #[test]
    fn run_files_refuse_unsafe_paths() {
        let mut files = RunFiles::default();
        assert!(files.add("../x", vec![]).is_err());
        assert!(files.add("/abs", vec![]).is_err());
        assert!(files.add("plots/.hidden", vec![]).is_err());
        assert!(files.add("plots//x.svg", vec![]).is_err());
        assert!(files.add("plots/fit.svg", vec![1]).is_ok());
        assert!(
            files.add("plots/fit.svg", vec![2]).is_err(),
            "no duplicates"
        );
    }
}
