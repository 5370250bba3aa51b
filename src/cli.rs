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
        #[arg(long, value_name = "N")]
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
        #[arg(long)]
        quiet: bool,
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
            Ok(summary) => {
                let mut out = stdout.lock();
                let _ = writeln!(out, "ok       {}  {summary}", path.display());
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
    let outcomes = crate::batch::run_all(&recipes, &options, |p| {
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
