//! The hostile-input corpus: broken recipes, data files, equations, transforms, weights,
//! templates and output paths fed to the `fitwright` binary, one module per area.
//!
//! Every case asserts the exit code and the key words of the message, with `file:line:col`
//! where a position is known; a refused recipe must also leave no report folder and no
//! history line behind. Large inputs are generated here at test time, never committed.
//! The data are invented (a pressure transducer read in kPa and mV, and variants).

#[path = "../util/mod.rs"]
mod util;

mod data;
mod equation;
mod kill;
mod numeric;
mod output;
mod recipe_file;
mod templates;
mod transform_weights;

use std::path::{Path, PathBuf};

use util::{Case, Outcome};

/// A straight line read well by every method (invented transducer readings).
pub const LINE: &str = "x,y\n0,0.02\n1,1.98\n2,4.03\n3,5.97\n4,8.01\n5,10.02\n6,11.96\n7,14.03\n";

/// A recipe over `d.csv` (columns `x`, `y`), built from parts; each setter replaces a part.
#[derive(Clone)]
pub struct Recipe {
    pub name: String,
    pub data: Vec<String>,
    pub equation: String,
    pub params: Vec<String>,
    pub fit: Vec<String>,
    pub acceptance: Vec<String>,
    pub report: Vec<String>,
}

impl Recipe {
    /// `y = a + b*x`, judged on R² ≥ 0.9, reports and history under `out/`.
    pub fn line() -> Recipe {
        Recipe {
            name: "hostile".into(),
            data: Vec::new(),
            equation: "y = a + b*x".into(),
            params: vec!["a = {}".into(), "b = {}".into()],
            fit: Vec::new(),
            acceptance: vec!["r_squared_min = 0.9".into()],
            report: Vec::new(),
        }
    }

    pub fn name(mut self, name: &str) -> Recipe {
        self.name = name.into();
        self
    }

    /// Extra `[data]` lines.
    pub fn data(mut self, line: &str) -> Recipe {
        self.data.push(line.into());
        self
    }

    pub fn equation(mut self, eq: &str) -> Recipe {
        self.equation = eq.into();
        self
    }

    pub fn params(mut self, lines: &[&str]) -> Recipe {
        self.params = lines.iter().map(|s| s.to_string()).collect();
        self
    }

    /// Extra `[fit]` lines.
    pub fn fit(mut self, line: &str) -> Recipe {
        self.fit.push(line.into());
        self
    }

    /// Extra `[report]` lines.
    pub fn report(mut self, line: &str) -> Recipe {
        self.report.push(line.into());
        self
    }

    pub fn text(&self) -> String {
        let mut s = format!(
            "name = \"{}\"\n[data]\nfiles = [\"d.csv\"]\ncolumns = {{ x = \"x\", y = \"y\" }}\n",
            self.name
        );
        for l in &self.data {
            s.push_str(l);
            s.push('\n');
        }
        s.push_str(&format!(
            "[model]\nequation = \"{}\"\n[model.parameters]\n",
            self.equation
        ));
        for l in &self.params {
            s.push_str(l);
            s.push('\n');
        }
        s.push_str("[fit]\n");
        for l in &self.fit {
            s.push_str(l);
            s.push('\n');
        }
        s.push_str("[acceptance]\n");
        for l in &self.acceptance {
            s.push_str(l);
            s.push('\n');
        }
        s.push_str("[report]\ndir = \"out\"\n");
        for l in &self.report {
            s.push_str(l);
            s.push('\n');
        }
        s
    }

    /// A case folder holding this recipe as `r.toml` and `data` as `d.csv`.
    pub fn case(&self, data: &str) -> Case {
        let c = Case::new();
        c.file("r.toml", &self.text()).file("d.csv", data);
        c
    }
}

/// `r.toml:L:C` of the first occurrence of `needle` in `text` (1-based line and column,
/// columns in characters), plus `offset` characters.
pub fn pos(text: &str, needle: &str, offset: usize) -> String {
    pos_in("r.toml", text, needle, offset)
}

/// `file:L:C` of the first occurrence of `needle` in `text`, plus `offset` characters.
pub fn pos_in(file: &str, text: &str, needle: &str, offset: usize) -> String {
    let at = text
        .find(needle)
        .unwrap_or_else(|| panic!("{needle:?} not in the text"));
    let before = &text[..at];
    let line = before.matches('\n').count() + 1;
    let line_start = before.rfind('\n').map_or(0, |i| i + 1);
    let column = text[line_start..at].chars().count() + 1 + offset;
    format!("{file}:{line}:{column}")
}

/// Every file and folder under `dir`, relative, sorted (hidden ones included).
pub fn tree(dir: &Path) -> Vec<PathBuf> {
    fn walk(root: &Path, dir: &Path, out: &mut Vec<PathBuf>) {
        let Ok(rd) = std::fs::read_dir(dir) else {
            return;
        };
        for e in rd.flatten() {
            let p = e.path();
            out.push(p.strip_prefix(root).unwrap_or(&p).to_path_buf());
            if p.is_dir() {
                walk(root, &p, out);
            }
        }
    }
    let mut out = Vec::new();
    walk(dir, dir, &mut out);
    out.sort();
    out
}

/// No history file, run folder (`YYYYMMDDTHHMMSSZ-…`), temporary run folder or report file
/// anywhere under the case folder.
pub fn assert_nothing_written(c: &Case) {
    let left: Vec<PathBuf> = tree(c.dir.path())
        .into_iter()
        .filter(|p| {
            let name = p.file_name().and_then(|n| n.to_str()).unwrap_or("");
            name == "history.jsonl"
                || name == "result.json"
                || (name.starts_with("report.") && !name.ends_with(".j2"))
                || name.ends_with(".tmp")
                || is_run_id(name.trim_start_matches('.'))
        })
        .collect();
    assert!(left.is_empty(), "left behind: {left:?}");
}

/// `20261201T120000Z-0123abcd`, optionally with a `-2` style suffix.
pub fn is_run_id(name: &str) -> bool {
    let b = name.as_bytes();
    b.len() >= 25
        && b[..8].iter().all(u8::is_ascii_digit)
        && b[8] == b'T'
        && b[9..15].iter().all(u8::is_ascii_digit)
        && b[15] == b'Z'
        && b[16] == b'-'
        && b[17..25].iter().all(u8::is_ascii_hexdigit)
}

/// The run folders under `dir` (complete ones only: hidden temporary folders are not runs).
pub fn run_folders(dir: &Path) -> Vec<PathBuf> {
    let mut v: Vec<PathBuf> = std::fs::read_dir(dir)
        .map(|rd| {
            rd.flatten()
                .map(|e| e.path())
                .filter(|p| {
                    p.is_dir()
                        && p.file_name()
                            .and_then(|n| n.to_str())
                            .is_some_and(is_run_id)
                })
                .collect()
        })
        .unwrap_or_default();
    v.sort();
    v
}

/// Run `fitwright run r.toml` and assert a refusal: exit 2, the fragments, nothing written.
pub fn refused(c: &Case, fragments: &[&str]) -> Outcome {
    let out = c.run(&["run", "r.toml"]);
    out.expect_code(2).expect_contains(fragments);
    assert_nothing_written(c);
    out
}

/// stderr holds no raw control character other than newlines.
pub fn assert_printable(out: &Outcome) {
    let bad: Vec<char> = out
        .stderr
        .chars()
        .filter(|c| c.is_control() && *c != '\n')
        .collect();
    assert!(
        bad.is_empty(),
        "raw control characters {bad:?} in:\n{}",
        out.stderr
    );
}
