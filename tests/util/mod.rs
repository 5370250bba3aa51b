//! Test helpers: a temporary folder with files, and a runner for the `fitwright` binary.
#![allow(dead_code)]

use std::path::{Path, PathBuf};
use std::process::Command;

/// A temporary folder holding a recipe and its data.
pub struct Case {
    pub dir: tempfile::TempDir,
}

/// The outcome of one command.
#[derive(Debug)]
pub struct Outcome {
    pub code: i32,
    pub stdout: String,
    pub stderr: String,
}

impl Outcome {
    /// stdout and stderr together.
    pub fn all(&self) -> String {
        format!("{}{}", self.stdout, self.stderr)
    }

    /// Assert the exit code and that nothing panicked, printing both streams on failure.
    pub fn expect_code(&self, code: i32) -> &Self {
        assert!(
            !self.stderr.contains("panicked"),
            "fitwright panicked:\n{}",
            self.stderr
        );
        assert_eq!(
            self.code, code,
            "unexpected exit code\nstdout:\n{}\nstderr:\n{}",
            self.stdout, self.stderr
        );
        self
    }

    /// Assert that the output contains every fragment.
    pub fn expect_contains(&self, fragments: &[&str]) -> &Self {
        let all = self.all();
        for f in fragments {
            assert!(all.contains(f), "missing {f:?} in output:\n{all}");
        }
        self
    }
}

impl Case {
    pub fn new() -> Case {
        Case {
            dir: tempfile::tempdir().expect("temporary folder"),
        }
    }

    pub fn path(&self, rel: &str) -> PathBuf {
        self.dir.path().join(rel)
    }

    /// Write a text file (folders created as needed).
    pub fn file(&self, rel: &str, text: &str) -> &Self {
        self.bytes(rel, text.as_bytes())
    }

    pub fn bytes(&self, rel: &str, bytes: &[u8]) -> &Self {
        let p = self.path(rel);
        if let Some(parent) = p.parent() {
            std::fs::create_dir_all(parent).expect("create folder");
        }
        std::fs::write(&p, bytes).expect("write file");
        self
    }

    /// Run `fitwright ARGS` in the case folder.
    pub fn run(&self, args: &[&str]) -> Outcome {
        run_in(self.dir.path(), args)
    }
}

/// Run the binary in a folder.
pub fn run_in(dir: &Path, args: &[&str]) -> Outcome {
    let out = Command::new(env!("CARGO_BIN_EXE_fitwright"))
        .args(args)
        .current_dir(dir)
        .env_remove("SOURCE_DATE_EPOCH")
        .output()
        .expect("run fitwright");
    Outcome {
        code: out.status.code().unwrap_or(-1),
        stdout: String::from_utf8_lossy(&out.stdout).into_owned(),
        stderr: String::from_utf8_lossy(&out.stderr).into_owned(),
    }
}

/// The repository root (for demo recipes).
pub fn repo_root() -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR"))
}
