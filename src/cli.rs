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
