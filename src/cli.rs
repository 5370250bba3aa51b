//! The command line (SPEC §10): argument parsing and one function per command. Every error is
//! printed once, here, and mapped to its exit code.

use std::io::Write;
use std::path::PathBuf;

use clap::{Parser, Subcommand};

use crate::error::{Error, Result};

#[derive(Parser, Debug)]
#[command(
    name = "fitwright",
    version,
    about = "Calibration fits from reviewed TOML recipes"
)]
struct Cli {
    #[command(subcommand)]
    command: Command,
}

#[derive(Subcommand, Debug)]
enum Command {
    /// Validate recipes and their data without fitting or writing anything.
    Check {
        /// Recipe files or folders (walked for *.toml). Default: recipes/
        paths: Vec<PathBuf>,
    },
    /// Fit, judge and report recipes (files, or folders walked for *.toml).
    Run {
        /// Recipe files or folders. Default: recipes/
        paths: Vec<PathBuf>,
        /// Write reports to DIR/{name} instead of each recipe's [report] dir.
        #[arg(long, value_name = "DIR")]
        out: Option<PathBuf>,
        /// Output formats, comma-separated (html, md, json); overrides [report] formats.
        #[arg(long, value_delimiter = ',')]
        format: Option<Vec<String>>,
        /// Recipes run at once (default: one per core).
        #[arg(long, short = 'j', value_name = "N")]
        jobs: Option<usize>,
        /// Print the summary as JSON on stdout.
        #[arg(long)]
        json: bool,
        /// Write a JUnit XML file, one test case per recipe.
        #[arg(long, value_name = "FILE")]
        junit: Option<PathBuf>,
        /// Do not append to the history.
        #[arg(long)]
        no_history: bool,
        /// Before fitting, judge the new data against the last curve whose criteria were met
        /// (as found), then fit and judge as usual (as left).
        #[arg(long)]
        as_found: bool,
        /// Run only shard K of N (a deterministic split by recipe path).
        #[arg(long, value_name = "K/N")]
        shard: Option<String>,
        /// No progress bar and no per-recipe details.
        #[arg(long, short = 'q')]
        quiet: bool,
    },
    /// Show the linearizability analysis of a recipe's model and the fit plan.
    Explain {
        recipe: PathBuf,
        /// Print the analysis as JSON.
        #[arg(long)]
        json: bool,
    },
    /// List the built-in model presets with their equations.
    Models,
    /// Read values off a stored calibration, with confidence and prediction intervals.
    Predict {
        /// A result.json written by `fitwright run`.
        result: PathBuf,
        /// Predictor setting(s) NAME=VALUE[,NAME=VALUE]; repeat for several points. With
        /// --inverse: the other predictors' values.
        #[arg(long, value_name = "X=V")]
        at: Vec<String>,
        /// A measured response RESPONSE=VALUE (the mean of --replicates readings): solve for
        /// the predictor.
        #[arg(long, value_name = "Y=V")]
        inverse: Vec<String>,
        /// Number of readings averaged in a new measurement (default 1).
        #[arg(long, default_value_t = 1)]
        replicates: u32,
        /// Confidence level of the intervals (default: the recipe's).
        #[arg(long)]
        level: Option<f64>,
        /// Allow settings and readings outside the calibrated range.
        #[arg(long)]
        extrapolate: bool,
        /// Print the predictions as JSON.
        #[arg(long)]
        json: bool,
    },
    /// Write an HTML index of every result under a folder (DIR/index.html).
    Index {
        /// A folder of reports, e.g. reports/
        dir: PathBuf,
    },
    /// Re-hash a stored result's inputs, re-run it, and say whether it reproduces.
    Verify {
        /// A result.json written by `fitwright run`.
        result: PathBuf,
    },
    /// Write the software validation report (exact problems, and the NIST StRD files when
    /// given) as HTML and Markdown.
    Validate {
        /// A folder holding the NIST StRD collections (linear/ and nonlinear/ .dat files).
        #[arg(long, value_name = "DIR")]
        strd: Option<PathBuf>,
        /// Output folder (default: validation/).
        #[arg(long, value_name = "DIR", default_value = "validation")]
        out: PathBuf,
    },
    /// Write a commented starter recipe NAME.toml in the current folder.
    Init {
        /// Recipe name ([a-z0-9._-]+); also the file name.
        name: String,
        /// Start from a built-in model (see `fitwright models`).
        #[arg(long)]
        preset: Option<String>,
        /// A data file whose header gives the columns.
        #[arg(long)]
        data: Option<PathBuf>,
    },
}

/// Entry point of the binary; returns the process exit code.
pub fn main() -> i32 {
    let cli = match Cli::try_parse() {
        Ok(c) => c,
        Err(e) => {
            let code = if e.use_stderr() { 2 } else { 0 };
            let _ = e.print();
            return code;
        }
    };
    let result = match cli.command {
        Command::Check { paths } => check(&default_paths(paths)),
        Command::Run {
            paths,
            out,
            format,
            jobs,
            json,
            junit,
            no_history,
            as_found,
            shard,
            quiet,
        } => run(RunArgs {
            paths: default_paths(paths),
            out,
            format,
            jobs,
            json,
            junit,
            no_history,
            as_found,
            shard,
            quiet,
        }),
        Command::Verify { result } => verify(&result),
        Command::Index { dir } => crate::index::write(&dir).map(|(path, n)| {
            println!("wrote {} ({n} runs)", path.display());
            0
        }),
        Command::Predict {
            result,
            at,
            inverse,
            replicates,
            level,
            extrapolate,
            json,
        } => predict(&result, &at, &inverse, replicates, level, extrapolate, json),
        Command::Explain { recipe, json } => explain(&recipe, json),
        Command::Models => models(),
        Command::Validate { strd, out } => validate(strd.as_deref(), &out),
        Command::Init { name, preset, data } => init(&name, preset.as_deref(), data.as_deref()),
    };
    match result {
        Ok(code) => code,
        Err(e) => {
            eprint!("{e}");
            e.exit_code()
        }
    }
}

fn default_paths(paths: Vec<PathBuf>) -> Vec<PathBuf> {
    if paths.is_empty() {
        vec![PathBuf::from("recipes")]
    } else {
        paths
    }
}

/// `fitwright check`: one line per recipe, the full message for each invalid one.
fn check(paths: &[PathBuf]) -> Result<i32> {
    let recipes = crate::recipes::collect(paths)?;
    let mut worst = 0;
    let stdout = std::io::stdout();
    for path in &recipes {
        match crate::pipeline::check(path) {
            Ok(checked) => {
                let bad = checked.invalid_channels().count() > 0;
                {
                    let mut out = stdout.lock();
                    let status = if bad { "invalid " } else { "ok      " };
                    let _ = writeln!(out, "{status} {}  {}", path.display(), checked.summary);
                    for (channel, result) in &checked.channels {
                        let _ = match result {
                            Ok(s) => writeln!(out, "           channel {channel}: ok, {s}"),
                            Err(_) => writeln!(out, "           channel {channel}: invalid"),
                        };
                    }
                }
                for (_, e) in checked.invalid_channels() {
                    eprint!("{e}");
                    worst = worst.max(e.exit_code());
                }
            }
            Err(e) => {
                {
                    let mut out = stdout.lock();
                    let _ = writeln!(out, "invalid  {}", path.display());
                }
                eprint!("{e}");
                worst = worst.max(e.exit_code());
            }
        }
    }
    Ok(worst)
}

/// Print an error the way the command line does (used by tests of messages).
pub fn render_error(e: &Error) -> String {
    e.to_string()
}

/// `fitwright init`.
fn init(name: &str, preset: Option<&str>, data: Option<&std::path::Path>) -> Result<i32> {
    let model = match preset {
        None => crate::init::StarterModel::straight_line(),
        Some(p) => crate::init::starter_from_preset(p)?,
    };
    let path = crate::init::write_starter(std::path::Path::new("."), name, &model, data)?;
    println!(
        "wrote {}; edit the TODO lines, then run `fitwright check {}`",
        path.display(),
        path.display()
    );
    Ok(0)
}

struct RunArgs {
    paths: Vec<PathBuf>,
    out: Option<PathBuf>,
    format: Option<Vec<String>>,
    jobs: Option<usize>,
    json: bool,
    junit: Option<PathBuf>,
    no_history: bool,
    as_found: bool,
    shard: Option<String>,
    quiet: bool,
}

/// The time of a run: `SOURCE_DATE_EPOCH` when set (reproducible output), else now.
fn run_time() -> Result<(i64, bool)> {
    match std::env::var("SOURCE_DATE_EPOCH") {
        Ok(v) => crate::report::write::parse_source_date_epoch(&v)
            .map(|t| (t, true))
            .map_err(|e| {
                Error::usage(format!("SOURCE_DATE_EPOCH: {e}"))
                    .help("set it to whole seconds since 1970-01-01 UTC, or unset it")
            }),
        Err(_) => {
            let now = std::time::SystemTime::now()
                .duration_since(std::time::UNIX_EPOCH)
                .map_err(|e| Error::internal(format!("the clock is before 1970: {e}")))?;
            Ok((now.as_secs() as i64, false))
        }
    }
}

/// `fitwright run`.
fn run(args: RunArgs) -> Result<i32> {
    let recipes = crate::recipes::collect(&args.paths)?;
    let formats = match &args.format {
        None => None,
        Some(list) => {
            let mut out = Vec::new();
            for f in list {
                out.push(crate::recipe::ReportFormat::parse(f.trim()).ok_or_else(|| {
                    Error::usage(format!("`--format {f}` is not a report format"))
                        .help("use html, md and/or json, comma-separated")
                })?);
            }
            Some(out)
        }
    };
    let shard = args
        .shard
        .as_deref()
        .map(crate::batch::parse_shard)
        .transpose()?;
    let (time, from_epoch) = run_time()?;
    let settings = crate::pipeline::RunSettings {
        out: args.out.clone(),
        formats,
        history: !args.no_history,
        time,
        time_from_epoch: from_epoch,
        verbose: recipes.len() == 1 && !args.quiet && !args.json,
        history_before: None,
        as_found: args.as_found,
    };
    let options = crate::batch::BatchOptions {
        jobs: args.jobs,
        quiet: args.quiet || args.json,
        shard,
    };
    // Recipes sharing a report folder share a history: they run in order, one at a time.
    let group = |p: &std::path::Path| match crate::recipe::load(p) {
        Ok(r) => crate::pipeline::report_dir(&r, &settings)
            .display()
            .to_string(),
        Err(_) => p.display().to_string(),
    };
    let outcomes = crate::batch::run_all(&recipes, &options, group, |p| {
        crate::pipeline::run_recipe(p, &settings)
    })?;
    for o in &outcomes {
        if let Some(e) = &o.error {
            eprint!("{e}");
        }
    }
    if args.json {
        println!("{}", crate::batch::json_summary(&outcomes));
    } else {
        print!("{}", crate::batch::summary_table(&outcomes));
    }
    if let Some(path) = &args.junit {
        crate::fsutil::write_atomic(path, crate::batch::junit_xml(&outcomes).as_bytes())?;
    }
    Ok(crate::batch::exit_code(&outcomes))
}

/// `fitwright verify`: exit 0 when inputs are unchanged and results reproduce, else 1.
fn verify(result: &std::path::Path) -> Result<i32> {
    let f = crate::verify::verify(result)?;
    for m in &f.matched {
        println!("ok       {m}");
    }
    for d in &f.differences {
        println!("DIFFERS  {d}");
    }
    if f.differences.is_empty() {
        println!("verified: the inputs are unchanged and the results reproduce");
        Ok(0)
    } else {
        println!("not verified: {} difference(s)", f.differences.len());
        Ok(1)
    }
}

/// `fitwright explain`: exit 0 whatever the outcome (its job is to analyse).
fn explain(path: &std::path::Path, json: bool) -> Result<i32> {
    let recipe = crate::recipe::load(path)?;
    let prep = crate::model::prepare(&recipe)?;
    let analysis = crate::pipeline::solve::analyse(&recipe, &prep)?;
    if json {
        let text = serde_json::to_string_pretty(&analysis)
            .map_err(|e| Error::internal(format!("analysis does not serialize: {e}")))?;
        println!("{text}");
        return Ok(0);
    }
    print!("{}", crate::analysis::explain_text(&analysis));
    let mut lines = Vec::new();
    for cand in analysis.working() {
        if let Some(lin) = cand.outcome.linearization() {
            for (cond, rows) in crate::pipeline::solve::violated_conditions(&prep, lin) {
                lines.push(format!(
                    "  {} needs {cond}: fails at {}",
                    cand.transform,
                    prep.data.describe_rows(&rows, 8)
                ));
            }
        }
    }
    println!();
    println!(
        "Data ({} rows from {} file(s)):",
        prep.data.len(),
        prep.data.files.len()
    );
    if lines.is_empty() {
        println!("  every condition of the working transforms holds on every row");
    } else {
        for l in lines {
            println!("{l}");
        }
    }
    println!();
    println!(
        "Plan for `fitwright run` (method = \"{}\"):",
        recipe.fit.method.name()
    );
    let plan = match (&analysis.outcome, recipe.fit.method) {
        (crate::analysis::Outcome::NotIdentifiable { .. }, _) => {
            "refused: the model is not identifiable (exit 2)".to_string()
        }
        (
            crate::analysis::Outcome::Linear(_),
            crate::recipe::Method::Auto | crate::recipe::Method::Linear,
        ) => "weighted linear least squares (Householder QR), no transform".to_string(),
        (_, crate::recipe::Method::Nonlinear) => {
            "Levenberg–Marquardt from the recipe's start values".to_string()
        }
        (crate::analysis::Outcome::Linearizable(l), crate::recipe::Method::Linearized) => format!(
            "linear fit of {} with {} weights, back-transformed",
            l.transform,
            if recipe.fit.linearized_delta_weights {
                "delta-method"
            } else {
                "no"
            }
        ),
        (crate::analysis::Outcome::Linearizable(l), _) => format!(
            "linear fit of {} as the start, then Levenberg–Marquardt in the original space; both are reported",
            l.transform
        ),
        _ => {
            "Levenberg–Marquardt from the recipe's start values (no transform linearizes the model)"
                .to_string()
        }
    };
    println!("  {plan}");
    Ok(0)
}

/// `fitwright models`.
fn models() -> Result<i32> {
    let presets = crate::analysis::presets();
    let w = presets.iter().map(|p| p.key.len()).max().unwrap_or(10);
    for p in presets {
        let params: Vec<String> = p
            .parameters
            .iter()
            .map(|(n, s)| format!("{n} (start {s})"))
            .collect();
        println!("{:<w$}  {}", p.key, p.name);
        println!("{:<w$}  {}", "", p.equation);
        println!(
            "{:<w$}  parameters: {}; {}",
            "",
            params.join(", "),
            p.description
        );
        println!();
    }
    println!(
        "Use one with `[model] preset = \"KEY\"`; its variables and parameters keep the names shown."
    );
    Ok(0)
}

/// `fitwright predict`.
fn predict(
    result: &std::path::Path,
    at: &[String],
    inverse: &[String],
    replicates: u32,
    level: Option<f64>,
    extrapolate: bool,
    json: bool,
) -> Result<i32> {
    use crate::predict::{Curve, parse_assignments};
    use crate::report::format::num;
    let curve = Curve::load(result)?;
    let level = level.unwrap_or(curve.doc.fit.confidence);
    if !(level > 0.0 && level < 1.0) {
        return Err(
            Error::usage(format!("--level {level} must lie strictly between 0 and 1"))
                .help("for example --level 0.95"),
        );
    }
    if replicates == 0 {
        return Err(
            Error::usage("--replicates must be at least 1").help("the number of readings averaged")
        );
    }
    if at.is_empty() && inverse.is_empty() {
        return Err(Error::usage("nothing to predict").help(
            "give --at X=VALUE for a forward prediction or --inverse Y=VALUE for an inverse one",
        ));
    }
    let unit = |v: &str| {
        curve
            .doc
            .data
            .units
            .get(v)
            .map(|u| format!(" {u}"))
            .unwrap_or_default()
    };
    // Warnings of SPEC §14: not accepted, superseded (by the history beside the result's run
    // folder), outside the calibrated range.
    let history = result
        .parent()
        .and_then(std::path::Path::parent)
        .map(|d| {
            crate::history::read(&d.join("history.jsonl"))
                .map(|(h, _)| h)
                .unwrap_or_default()
        })
        .unwrap_or_default();
    let mut warnings: Vec<String> = Vec::new();
    for w in crate::metrology::warnings::predict_warnings(
        &curve.doc,
        &history,
        &crate::metrology::warnings::Reading::At(&[]),
    ) {
        if !warnings.contains(&w) {
            warnings.push(w);
        }
    }
    // Expanded uncertainty (GUM) of each read-off, for one-predictor curves.
    let gum = crate::metrology::ModelCurve::from_result(&curve.doc)
        .ok()
        .map(|c| {
            let budget = curve
                .doc
                .metrology
                .as_ref()
                .map(|m| m.budget.clone())
                .unwrap_or_default();
            (c, budget)
        });
    let mut forwards = Vec::new();
    let mut inverses = Vec::new();
    let mut read_offs: Vec<crate::metrology::ReadOff> = Vec::new();
    if inverse.is_empty() {
        for a in at {
            let point = parse_assignments(a, "--at")?;
            let outside = curve.outside_range(&point);
            if !outside.is_empty() {
                if !extrapolate {
                    return Err(Error::usage(outside.join("; ")).help("readings off a calibration are valid inside its calibrated range; --extrapolate predicts beyond it, at your own risk"));
                }
                warnings.extend(outside.into_iter().map(|o| format!("{o} (extrapolated)")));
            }
            let f = curve.forward(&point, level, replicates)?;
            if let (Some((c, budget)), [(_, x)]) = (&gum, point.as_slice())
                && let Ok(r) =
                    crate::metrology::read_off::forward(c, *x, Some(replicates), budget, true)
            {
                read_offs.push(r);
            }
            forwards.push(f);
        }
    } else {
        let given = match at {
            [] => Vec::new(),
            [one] => parse_assignments(one, "--at")?,
            _ => {
                return Err(
                    Error::usage("with --inverse, give the other predictors in one --at")
                        .help("e.g. --at P=1.0,H=40"),
                );
            }
        };
        for inv in inverse {
            let a = parse_assignments(inv, "--inverse")?;
            let [(name, value)] = a.as_slice() else {
                return Err(
                    Error::usage(format!("`--inverse {inv}`: give one RESPONSE=VALUE"))
                        .help("repeat --inverse for several readings"),
                );
            };
            let inv = curve.inverse(name, *value, &given, level, replicates, extrapolate)?;
            if let Some((c, budget)) = &gum
                && let Ok(list) =
                    crate::metrology::read_off::inverse(c, *value, replicates, budget, true)
            {
                read_offs.extend(list);
            }
            inverses.push(inv);
        }
    }
    if json {
        let v = serde_json::json!({"result": result.display().to_string(), "run_id": curve.doc.run_id, "verdict": curve.doc.verdict, "warnings": warnings, "forward": forwards, "inverse": inverses, "uncertainty": read_offs});
        println!(
            "{}",
            serde_json::to_string_pretty(&v).map_err(|e| Error::internal(e.to_string()))?
        );
        return Ok(0);
    }
    println!(
        "calibration {} run {} — {}",
        curve.doc.recipe.name, curve.doc.run_id, curve.doc.verdict_wording
    );
    for w in &warnings {
        println!("warning: {w}");
    }
    let pct = crate::report::format::percent(level, 3);
    let resp = &curve.doc.model.response;
    for f in &forwards {
        let at_text: Vec<String> =
            f.at.iter()
                .map(|(k, v)| format!("{k} = {v}{}", unit(k)))
                .collect();
        println!(
            "{}:  {resp} = {}{}",
            at_text.join(", "),
            num(f.value),
            unit(resp)
        );
        println!(
            "    {pct} confidence interval of the curve  [{}, {}]",
            num(f.confidence.0),
            num(f.confidence.1)
        );
        match f.prediction {
            Some((lo, hi)) => println!(
                "    {pct} prediction interval, mean of {} new reading(s)  [{}, {}]",
                f.replicates,
                num(lo),
                num(hi)
            ),
            None => println!(
                "    {}",
                f.note.as_deref().unwrap_or("no prediction interval")
            ),
        }
    }
    for i in &inverses {
        println!(
            "{resp} = {}{} (mean of {} reading(s)):",
            i.reading,
            unit(resp),
            i.replicates
        );
        for (root, iv) in i.roots.iter().zip(&i.intervals) {
            let band = iv.map_or("not bounded inside the range".to_string(), |(a, b)| {
                format!("[{}, {}]", num(a), num(b))
            });
            println!(
                "    {} = {}{}   {pct} interval from the prediction band {band}",
                i.solve_for,
                num(*root),
                unit(&i.solve_for)
            );
        }
        if let Some(fl) = &i.fieller {
            println!("    Fieller's {pct} interval (straight line) {fl}");
        }
        for n in &i.notes {
            println!("    note: {n}");
        }
    }
    if !read_offs.is_empty() {
        println!("measurement uncertainty (JCGM 100:2008; fit and the recipe's components):");
        for r in &read_offs {
            println!("    {}", r.statement(unit(&r.read).trim_start()));
        }
    }
    Ok(0)
}

/// `fitwright validate`: exit 0 when every validation criterion is met, else 1.
fn validate(strd: Option<&std::path::Path>, out: &std::path::Path) -> Result<i32> {
    let (time, _) = run_time()?;
    let generated_at = crate::report::write::utc_timestamp(time)
        .map_err(|e| Error::internal(format!("time: {e}")))?;
    let v = crate::validate::validate(strd, generated_at)?;
    for c in &v.criteria {
        println!(
            "{}  {} — {}",
            if c.met { "met    " } else { "NOT MET" },
            c.text,
            c.measured
        );
    }
    for path in crate::validate::write(&v, out)? {
        println!("wrote {}", path.display());
    }
    if v.met() {
        println!("validation criteria met — awaiting review");
        Ok(0)
    } else {
        println!("validation criteria not met");
        Ok(1)
    }
}
