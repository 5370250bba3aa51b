//! Golden test of a demo recipe's Markdown report, end to end: `fitwright run` on
//! `recipes/assay-std-curve.toml` with a fixed `SOURCE_DATE_EPOCH`, compared with
//! `tests/golden/assay-std-curve/expected/report.md` after normalisation (tool version,
//! template hash, and numbers rounded to 6 significant digits so that another CPU's last
//! bits do not matter). Refresh: `FITWRIGHT_BLESS=1 cargo test --test golden_demo`, then
//! review `git diff tests/golden/` (see tests/golden/README.md).

mod util;

use std::path::{Path, PathBuf};

/// Round every decimal number with more than 6 significant digits to 6.
fn round_numbers(text: &str) -> String {
    let mut out = String::with_capacity(text.len());
    let chars: Vec<char> = text.chars().collect();
    let mut i = 0;
    while i < chars.len() {
        let c = chars[i];
        let starts_number = c.is_ascii_digit()
            && (i == 0 || !(chars[i - 1].is_alphanumeric() || chars[i - 1] == '_'));
        if !starts_number {
            out.push(c);
            i += 1;
            continue;
        }
        let mut j = i;
        while j < chars.len() && (chars[j].is_ascii_digit() || chars[j] == '.') {
            j += 1;
        }
        let token: String = chars[i..j].iter().collect();
        let digits = token.chars().filter(|c| c.is_ascii_digit()).count();
        let hexlike = j < chars.len() && chars[j].is_ascii_alphabetic();
        match token.parse::<f64>() {
            Ok(v) if token.contains('.') && digits > 6 && !hexlike => {
                out.push_str(&format!("{:.5e}", v))
            }
            _ => out.push_str(&token),
        }
        i = j;
    }
    out
}

fn normalise(text: &str) -> String {
    let version = format!("fitwright {}", env!("CARGO_PKG_VERSION"));
    let mut out = String::new();
    for line in text.replace("\r\n", "\n").lines() {
        let line = line.replace(&version, "fitwright <version>");
        // The templates' hash changes with any template edit; the run id holds the inputs' hash.
        let line = if line.contains("emplate") && line.contains("SHA-256")
            || line.to_lowercase().contains("templates") && line.contains('`')
        {
            line.split('`')
                .enumerate()
                .map(|(k, p)| {
                    if k % 2 == 1 && p.len() == 64 {
                        "<templates-sha256>".to_string()
                    } else {
                        p.to_string()
                    }
                })
                .collect::<Vec<_>>()
                .join("`")
        } else {
            line
        };
        out.push_str(round_numbers(line.trim_end()).as_str());
        out.push('\n');
    }
    out.trim_end().to_string() + "\n"
}

fn only_run(dir: &Path) -> PathBuf {
    let runs: Vec<PathBuf> = std::fs::read_dir(dir)
        .expect("report dir")
        .filter_map(|e| e.ok())
        .map(|e| e.path())
        .filter(|p| p.is_dir())
        .collect();
    assert_eq!(runs.len(), 1, "one run folder in {}", dir.display());
    runs[0].clone()
}

#[test]
fn golden_markdown_report_of_the_assay_demo_recipe() {
    let root = util::repo_root();
    let out = tempfile::tempdir().expect("tempdir");
    let status = std::process::Command::new(env!("CARGO_BIN_EXE_fitwright"))
        .args([
            "run",
            "recipes/assay-std-curve.toml",
            "--no-history",
            "--quiet",
            "--format",
            "md",
            "--out",
        ])
        .arg(out.path())
        .current_dir(&root)
        .env("SOURCE_DATE_EPOCH", "1796000000")
        .output()
        .expect("run fitwright");
    assert_eq!(
        status.status.code(),
        Some(0),
        "{}",
        String::from_utf8_lossy(&status.stderr)
    );
    let run = only_run(&out.path().join("assay-std-curve"));
    let actual = normalise(&std::fs::read_to_string(run.join("report.md")).expect("report.md"));
    let expected_path = root.join("tests/golden/assay-std-curve/expected/report.md");
    if std::env::var_os("FITWRIGHT_BLESS").is_some_and(|v| v == "1") {
        std::fs::create_dir_all(expected_path.parent().expect("parent")).expect("mkdir");
        std::fs::write(&expected_path, &actual).expect("write expected");
        eprintln!("blessed {}", expected_path.display());
        return;
    }
    let expected = std::fs::read_to_string(&expected_path).unwrap_or_else(|e| {
        panic!(
            "cannot read {}: {e}\nCreate it with: FITWRIGHT_BLESS=1 cargo test --test golden_demo",
            expected_path.display()
        )
    });
    let expected = normalise(&expected);
    if actual != expected {
        let line = actual
            .lines()
            .zip(expected.lines())
            .position(|(a, b)| a != b)
            .unwrap_or(0);
        let dump = root.join("target/tmp/golden-assay-std-curve-report.md");
        let _ = std::fs::create_dir_all(dump.parent().expect("parent"));
        let _ = std::fs::write(&dump, &actual);
        panic!(
            "report.md of the assay demo differs from {} at line {}:\n expected: {}\n   actual: {}\nFull output: {}\nIf the change is intended: FITWRIGHT_BLESS=1 cargo test --test golden_demo, then review the diff.",
            expected_path.display(),
            line + 1,
            expected.lines().nth(line).unwrap_or("<end>"),
            actual.lines().nth(line).unwrap_or("<end>"),
            dump.display()
        );
    }
    for plot in [
        "fit",
        "residuals-conc",
        "residuals-fitted",
        "normal-probability",
    ] {
        assert!(
            run.join(format!("plots/{plot}.svg")).is_file(),
            "plots/{plot}.svg beside report.md"
        );
    }
}

#[test]
fn number_rounding_keeps_short_numbers_and_hashes() {
    assert_eq!(
        round_numbers("s = 0.0029163912 and n 16"),
        "s = 2.91639e-3 and n 16"
    );
    assert_eq!(
        round_numbers("sha 5fcdcbd9ed400323 R25"),
        "sha 5fcdcbd9ed400323 R25"
    );
}
