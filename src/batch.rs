//! Batch runs over many recipes (SPEC §10): in parallel, one failure never stopping the
//! others, a summary at the end, and the exit code decided from every outcome.
//!
//! The per-recipe work is a function handed in, so this module only schedules, collects and
//! summarises: the summary table, the JSON summary, JUnit XML and the `--shard K/N` split.

use std::io::IsTerminal;
use std::path::{Path, PathBuf};

use rayon::prelude::*;
use serde::Serialize;

use crate::acceptance::Verdict;
use crate::error::{Error, Result};

/// What one recipe (or one channel of a recipe) came to.
#[derive(Debug, Clone, Serialize)]
pub struct RunOutcome {
    pub recipe: PathBuf,
    /// Recipe name (empty when the recipe could not be read).
    pub name: String,
    #[serde(skip_serializing_if = "Option::is_none")]
    pub channel: Option<String>,
    pub verdict: Verdict,
    /// The verdict as people read it.
    pub wording: String,
    /// A few figures for the summary table, e.g. "R² 0.999987 · s 11.9".
    pub figures: String,
    /// Run folder written, if any.
    pub report_dir: Option<PathBuf>,
    /// Criteria not met, as "criterion: measured (limit)".
    pub failed: Vec<String>,
    /// The error message for an invalid recipe or a failed output.
    pub error: Option<String>,
    /// Exit code of this outcome (0, 1, 2 or 3).
    pub exit_code: i32,
    /// Wall time in seconds.
    pub seconds: f64,
}

impl RunOutcome {
    /// The outcome of a recipe that failed before producing a result.
    pub fn failed(recipe: &Path, name: &str, err: &Error, seconds: f64) -> RunOutcome {
        RunOutcome {
            recipe: recipe.to_path_buf(),
            name: name.to_string(),
            channel: None,
            verdict: Verdict::Invalid,
            wording: if err.exit_code() == 2 {
                Verdict::Invalid.wording().to_string()
            } else {
                "output or internal failure".to_string()
            },
            figures: String::new(),
            report_dir: None,
            failed: Vec::new(),
            error: Some(err.to_string()),
            exit_code: err.exit_code(),
            seconds,
        }
    }
}

/// Options of a batch.
#[derive(Debug, Clone, Default)]
pub struct BatchOptions {
    pub jobs: Option<usize>,
    pub quiet: bool,
    pub shard: Option<(usize, usize)>,
}

/// Parse `K/N` (1 ≤ K ≤ N).
pub fn parse_shard(text: &str) -> Result<(usize, usize)> {
    let bad = || {
        Error::usage(format!("`--shard {text}` is not of the form K/N"))
            .help("for example `--shard 2/4` runs the second of four shards")
    };
    let (k, n) = text.split_once('/').ok_or_else(bad)?;
    let k: usize = k.trim().parse().map_err(|_| bad())?;
    let n: usize = n.trim().parse().map_err(|_| bad())?;
    if n == 0 || k == 0 || k > n {
        return Err(
            Error::usage(format!("`--shard {text}`: K must be between 1 and N"))
                .help("shards are numbered 1 to N"),
        );
    }
    Ok((k, n))
}

/// Whether a recipe belongs to shard K of N: by a hash of its path as given, so the split is
/// the same on every machine and does not depend on the order of discovery.
pub fn in_shard(path: &Path, (k, n): (usize, usize)) -> bool {
    let digest = crate::hash::sha256_hex(path.to_string_lossy().replace('\\', "/").as_bytes());
    let v = u64::from_str_radix(&digest[..16], 16).unwrap_or(0);
    (v % n as u64) as usize == k - 1
}

/// Stack of each worker thread. The passes over an expression recurse once per level, and
/// the parser allows 200 levels; the derivatives of such a model (its Jacobian, compiled for
/// the fit) are deeper still. Measured in a debug build, a depth-199 nest of `sin(b*x + …)`
/// overflows the 2 MiB that threads get by default; 64 MiB leaves a wide margin and costs
/// only address space (stack pages are committed when touched).
const WORKER_STACK_BYTES: usize = 64 << 20;

/// Run `work` over every recipe and return all outcomes in input order. Recipes with the
/// same `group` key (the same report folder, hence the same history) run one after another in
/// input order, so that each run's drift criteria see the run before it; groups run in
/// parallel.
pub fn run_all<F, G>(
    recipes: &[PathBuf],
    options: &BatchOptions,
    group: G,
    work: F,
) -> Result<Vec<RunOutcome>>
where
    F: Fn(&Path) -> Vec<RunOutcome> + Sync,
    G: Fn(&Path) -> String,
{
    let selected: Vec<&PathBuf> = recipes
        .iter()
        .filter(|p| options.shard.is_none_or(|s| in_shard(p, s)))
        .collect();
    let mut groups: Vec<(String, Vec<(usize, &PathBuf)>)> = Vec::new();
    for (i, p) in selected.iter().enumerate() {
        let key = group(p);
        match groups.iter_mut().find(|(k, _)| *k == key) {
            Some((_, members)) => members.push((i, p)),
            None => groups.push((key, vec![(i, p)])),
        }
    }
    let show_bar = !options.quiet && std::io::stderr().is_terminal() && selected.len() > 1;
    let bar = if show_bar {
        let b = indicatif::ProgressBar::new(selected.len() as u64);
        if let Ok(style) =
            indicatif::ProgressStyle::with_template("{bar:30} {pos}/{len} recipes  {msg}")
        {
            b.set_style(style);
        }
        Some(b)
    } else {
        None
    };
    // No more workers than recipes or cores, whichever is more: a single large recipe still
    // uses every core inside its fit, diagnostics and plots (a pool of one thread ran a
    // million-row recipe's parallel parts one after the other), while more workers than both
    // would only wait, and idle workers spin for a while before they sleep (`--jobs 5000` on
    // one recipe kept two cores busy for minutes).
    let cores = std::thread::available_parallelism().map_or(1, |n| n.get());
    let wanted = options.jobs.filter(|&j| j > 0).unwrap_or(cores);
    let pool = rayon::ThreadPoolBuilder::new()
        .num_threads(wanted.min(selected.len().max(cores)).max(1))
        .stack_size(WORKER_STACK_BYTES)
        .build()
        .map_err(|e| Error::internal(format!("cannot start worker threads: {e}")))?;
    let mut outcomes: Vec<(usize, Vec<RunOutcome>)> = pool.install(|| {
        groups
            .par_iter()
            .flat_map_iter(|(_, members)| {
                members
                    .iter()
                    .map(|(i, p)| {
                        let out = work(p);
                        if let Some(b) = &bar {
                            b.set_message(p.display().to_string());
                            b.inc(1);
                        }
                        (*i, out)
                    })
                    .collect::<Vec<_>>()
            })
            .collect()
    });
    if let Some(b) = bar {
        b.finish_and_clear();
    }
    outcomes.sort_by_key(|(i, _)| *i);
    Ok(outcomes.into_iter().flat_map(|(_, o)| o).collect())
}

/// The batch exit code: the highest of all outcomes (SPEC §13).
pub fn exit_code(outcomes: &[RunOutcome]) -> i32 {
    outcomes.iter().map(|o| o.exit_code).max().unwrap_or(0)
}

/// The summary table printed at the end of `run`.
pub fn summary_table(outcomes: &[RunOutcome]) -> String {
    let label = |o: &RunOutcome| match &o.channel {
        Some(c) => format!("{} [{c}]", o.recipe.display()),
        None => o.recipe.display().to_string(),
    };
    let w0 = outcomes
        .iter()
        .map(|o| label(o).chars().count())
        .max()
        .unwrap_or(6)
        .max(6);
    let w1 = outcomes
        .iter()
        .map(|o| o.wording.chars().count())
        .max()
        .unwrap_or(7)
        .max(7);
    let w2 = outcomes
        .iter()
        .map(|o| o.figures.chars().count())
        .max()
        .unwrap_or(7)
        .max(7);
    let mut s = String::new();
    s.push_str(&format!(
        "{:<w0$}  {:<w1$}  {:<w2$}  report\n",
        "recipe", "verdict", "figures"
    ));
    for o in outcomes {
        let report = o
            .report_dir
            .as_ref()
            .map(|d| d.display().to_string())
            .unwrap_or_else(|| "—".into());
        s.push_str(&format!(
            "{:<w0$}  {:<w1$}  {:<w2$}  {report}\n",
            label(o),
            o.wording,
            o.figures
        ));
    }
    let count = |v: Verdict| outcomes.iter().filter(|o| o.verdict == v).count();
    // Output and internal failures carry the verdict `invalid` (no result) but are not
    // invalid recipes: count them apart, so the summary agrees with the exit code.
    let failed_outputs = outcomes.iter().filter(|o| o.exit_code >= 3).count();
    s.push_str(&format!(
        "{} result{}: {} criteria met (awaiting review), {} not met, {} not judged, {} invalid{}\n",
        outcomes.len(),
        if outcomes.len() == 1 { "" } else { "s" },
        count(Verdict::Accepted),
        count(Verdict::Rejected),
        count(Verdict::NotJudged),
        count(Verdict::Invalid) - failed_outputs.min(count(Verdict::Invalid)),
        if failed_outputs > 0 {
            format!(
                ", {failed_outputs} output or internal failure{}",
                if failed_outputs == 1 { "" } else { "s" }
            )
        } else {
            String::new()
        }
    ));
    if count(Verdict::NotJudged) > 0 {
        s.push_str("warning: recipes without [acceptance] criteria are not judged; add criteria to judge them\n");
    }
    s
}

/// The machine-readable summary of `run --json`.
pub fn json_summary(outcomes: &[RunOutcome]) -> String {
    #[derive(Serialize)]
    struct Summary<'a> {
        schema_version: u32,
        tool_version: &'a str,
        exit_code: i32,
        results: &'a [RunOutcome],
    }
    serde_json::to_string_pretty(&Summary {
        schema_version: 1,
        tool_version: env!("CARGO_PKG_VERSION"),
        exit_code: exit_code(outcomes),
        results: outcomes,
    })
    .unwrap_or_else(|e| format!("{{\"error\": \"summary does not serialize: {e}\"}}"))
}

fn xml_escape(s: &str) -> String {
    let mut out = String::with_capacity(s.len());
    for c in s.chars() {
        match c {
            '&' => out.push_str("&amp;"),
            '<' => out.push_str("&lt;"),
            '>' => out.push_str("&gt;"),
            '"' => out.push_str("&quot;"),
            '\'' => out.push_str("&apos;"),
            c if (c as u32) < 0x20 && !matches!(c, '\n' | '\t' | '\r') => out.push(' '),
            c => out.push(c),
        }
    }
    out
}

/// JUnit XML: one test case per recipe (or channel). Rejected runs are failures carrying the
/// criteria not met; invalid recipes and output failures are errors.
pub fn junit_xml(outcomes: &[RunOutcome]) -> String {
    let failures = outcomes
        .iter()
        .filter(|o| o.verdict == Verdict::Rejected)
        .count();
    let errors = outcomes.iter().filter(|o| o.exit_code >= 2).count();
    let total: f64 = outcomes.iter().map(|o| o.seconds).sum();
    let mut s = String::from("<?xml version=\"1.0\" encoding=\"UTF-8\"?>\n");
    s.push_str(&format!(
        "<testsuites name=\"fitwright\" tests=\"{}\" failures=\"{failures}\" errors=\"{errors}\" time=\"{total:.3}\">\n",
        outcomes.len()
    ));
    s.push_str(&format!(
        "  <testsuite name=\"calibrations\" tests=\"{}\" failures=\"{failures}\" errors=\"{errors}\" time=\"{total:.3}\">\n",
        outcomes.len()
    ));
    for o in outcomes {
        let name = match &o.channel {
            Some(c) => format!("{} [{c}]", o.name),
            None => o.name.clone(),
        };
        s.push_str(&format!(
            "    <testcase classname=\"{}\" name=\"{}\" time=\"{:.3}\"",
            xml_escape(&o.recipe.display().to_string()),
            xml_escape(&name),
            o.seconds
        ));
        if o.verdict == Verdict::Rejected {
            s.push_str(&format!(
                ">\n      <failure message=\"{}\" type=\"criteria\">",
                xml_escape(&o.wording)
            ));
            s.push_str(&xml_escape(&o.failed.join("\n")));
            s.push_str("</failure>\n    </testcase>\n");
        } else if o.exit_code >= 2 {
            s.push_str(&format!(
                ">\n      <error message=\"{}\" type=\"input\">",
                xml_escape(&o.wording)
            ));
            s.push_str(&xml_escape(o.error.as_deref().unwrap_or("")));
            s.push_str("</error>\n    </testcase>\n");
        } else if o.verdict == Verdict::NotJudged {
            s.push_str(">\n      <skipped message=\"no acceptance criteria\"/>\n    </testcase>\n");
        } else {
            s.push_str("/>\n");
        }
    }
    s.push_str("  </testsuite>\n</testsuites>\n");
    s
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn every_recipe_lands_in_exactly_one_shard() {
        let paths: Vec<PathBuf> = (0..200)
            .map(|i| PathBuf::from(format!("recipes/site-{i}/probe.toml")))
            .collect();
        for n in 1..=5 {
            for p in &paths {
                let hits = (1..=n).filter(|&k| in_shard(p, (k, n))).count();
                assert_eq!(hits, 1, "{} in {hits} of {n} shards", p.display());
            }
        }
    }

    fn outcome(verdict: Verdict) -> RunOutcome {
        RunOutcome {
            recipe: PathBuf::from("recipes/probe.toml"),
            name: "probe".into(),
            channel: None,
            verdict,
            wording: verdict.wording().into(),
            figures: "R² 0.9999".into(),
            report_dir: None,
            failed: if verdict == Verdict::Rejected {
                vec!["R² ≥ 0.9999: measured 0.99".into()]
            } else {
                Vec::new()
            },
            error: None,
            exit_code: verdict.exit_code(),
            seconds: 0.1,
        }
    }

    #[test]
    fn people_read_the_spec_wording_never_the_word_accepted() {
        // SPEC §7/§13: "criteria met — awaiting review", "criteria not met", "invalid input";
        // the codes stay in JSON only.
        let all = [
            outcome(Verdict::Accepted),
            outcome(Verdict::Rejected),
            outcome(Verdict::NotJudged),
            outcome(Verdict::Invalid),
        ];
        let table = summary_table(&all);
        let junit = junit_xml(&all);
        for text in [&table, &junit] {
            assert!(!text.to_lowercase().contains("accepted"), "{text}");
            assert!(!text.to_lowercase().contains("rejected"), "{text}");
        }
        assert!(table.contains("criteria met — awaiting review"));
        assert!(table.contains("criteria not met"));
        assert!(table.contains("invalid input"));
        assert!(junit.contains("message=\"criteria not met\""));
        assert!(
            json_summary(&all).contains("\"verdict\": \"accepted\""),
            "codes stay in JSON"
        );
    }

    #[test]
    fn shard_syntax_is_checked() {
        assert_eq!(parse_shard("2/4").ok(), Some((2, 4)));
        assert!(parse_shard("0/4").is_err());
        assert!(parse_shard("5/4").is_err());
        assert!(parse_shard("x").is_err());
    }
}
