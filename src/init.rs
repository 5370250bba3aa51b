//! `fitwright init NAME [--preset P] [--data FILE]`: a commented starter recipe that passes
//! `check`, with columns guessed from the data file's header.

use std::path::{Path, PathBuf};

use crate::error::{Error, Result};

/// The model a starter recipe begins with: equation, parameters with starts, variable names.
pub struct StarterModel {
    pub equation: String,
    pub parameters: Vec<(String, Option<f64>)>,
    pub response: String,
    pub predictors: Vec<String>,
    pub preset: Option<String>,
}

impl StarterModel {
    /// A straight line `y = b0 + b1 * x`.
    pub fn straight_line() -> StarterModel {
        StarterModel {
            equation: "y = b0 + b1 * x".into(),
            parameters: vec![("b0".into(), None), ("b1".into(), None)],
            response: "y".into(),
            predictors: vec!["x".into()],
            preset: None,
        }
    }
}

/// The starter model of a preset.
pub fn starter_from_preset(name: &str) -> Result<StarterModel> {
    let p = crate::analysis::presets::preset(name).ok_or_else(|| {
        let keys: Vec<&str> = crate::analysis::presets::presets()
            .iter()
            .map(|p| p.key)
            .collect();
        let err = Error::usage(format!("there is no preset `{name}`"));
        match crate::error::did_you_mean(name, keys.iter().copied()) {
            Some(s) => err.help(format!("{s} (`fitwright models` lists the presets)")),
            None => err.help("`fitwright models` lists the presets"),
        }
    })?;
    Ok(StarterModel {
        equation: p.equation.to_string(),
        parameters: p
            .parameters
            .iter()
            .map(|(n, s)| (n.to_string(), Some(*s)))
            .collect(),
        response: p.response.to_string(),
        predictors: p.predictors.iter().map(|s| s.to_string()).collect(),
        preset: Some(p.key.to_string()),
    })
}

/// Header names of a delimited data file: the first line that is not blank or a `#` comment,
/// split on the first of `,`, `;`, tab that occurs, else on whitespace.
pub fn guess_header(path: &Path) -> Result<(Vec<String>, Option<char>, bool)> {
    let bytes = std::fs::read(path).map_err(|e| {
        Error::usage(format!("cannot read the data file: {e}"))
            .in_file(path)
            .help("give an existing data file with --data")
    })?;
    let text =
        String::from_utf8_lossy(bytes.strip_prefix(b"\xEF\xBB\xBF").unwrap_or(&bytes)).into_owned();
    let line = text
        .lines()
        .map(str::trim)
        .find(|l| !l.is_empty() && !l.starts_with('#'))
        .ok_or_else(|| {
            Error::usage("the data file has no header line")
                .in_file(path)
                .help("give a data file whose first line names its columns")
        })?;
    let comments = text.lines().any(|l| l.trim_start().starts_with('#'));
    let delim = [',', ';', '\t'].into_iter().find(|d| line.contains(*d));
    let names: Vec<String> = match delim {
        Some(d) => line
            .split(d)
            .map(|s| s.trim().trim_matches('"').to_string())
            .collect(),
        None => line.split_whitespace().map(str::to_string).collect(),
    };
    Ok((names, delim, comments))
}

fn relative_to(path: &Path, base: &Path) -> PathBuf {
    let abs = |p: &Path| std::path::absolute(p).unwrap_or_else(|_| p.to_path_buf());
    let (p, b) = (abs(path), abs(base));
    let pc: Vec<_> = p.components().collect();
    let bc: Vec<_> = b.components().collect();
    let common = pc.iter().zip(&bc).take_while(|(a, b)| a == b).count();
    let mut out = PathBuf::new();
    for _ in common..bc.len() {
        out.push("..");
    }
    for c in pc.iter().skip(common) {
        out.push(c);
    }
    out
}

/// The text of a starter recipe.
pub fn starter_recipe(
    name: &str,
    model: &StarterModel,
    data: Option<(&Path, &[String], Option<char>, bool)>,
    recipe_dir: &Path,
) -> String {
    let mut s = String::new();
    s.push_str(
        "# Starter recipe written by `fitwright init`. Edit the lines marked TODO, then run\n",
    );
    s.push_str(&format!("#   fitwright check {name}.toml\n"));
    s.push_str(&format!("name = \"{name}\"\n"));
    s.push_str("title = \"TODO: instrument, quantity and calibration\"\n");
    s.push_str(
        "notes = \"\"\"\nTODO: what was calibrated, where and against which reference.\n\"\"\"\n\n",
    );
    s.push_str("[data]\n");
    let vars: Vec<&String> = std::iter::once(&model.response)
        .chain(model.predictors.iter())
        .collect();
    match data {
        Some((path, header, delim, comments)) => {
            let rel = relative_to(path, recipe_dir);
            s.push_str(&format!(
                "files = [{}]\n",
                toml_string(&rel.to_string_lossy().replace('\\', "/"))
            ));
            if delim == Some(';') {
                s.push_str("delimiter = \";\"\n");
            }
            if comments {
                s.push_str(
                    "comment = \"#\"                       # lines starting with # are ignored\n",
                );
            }
            // The model's predictors take the first columns and the response the next one:
            // the usual layout of an export (setting, then reading).
            let mut map = Vec::new();
            let order: Vec<&String> = model
                .predictors
                .iter()
                .chain(std::iter::once(&model.response))
                .collect();
            for (i, v) in order.iter().enumerate() {
                match header.get(i) {
                    Some(h) => map.push(format!("{v} = {}", toml_string(h))),
                    None => map.push(format!("{v} = {}", i + 1)),
                }
            }
            s.push_str(&format!(
                "columns = {{ {} }}   # model variable = column header (or 1-based position)\n",
                map.join(", ")
            ));
        }
        None => {
            s.push_str("files = [\"TODO/data-*.csv\"]        # globs, relative to this recipe\n");
            let map: Vec<String> = vars.iter().map(|v| format!("{v} = \"TODO\"")).collect();
            s.push_str(&format!("columns = {{ {} }}\n", map.join(", ")));
        }
    }
    let units: Vec<String> = vars.iter().map(|v| format!("{v} = \"\"")).collect();
    s.push_str(&format!(
        "units = {{ {} }}   # TODO: units of each variable\n",
        units.join(", ")
    ));
    s.push_str("# where = \"x >= 0\"                  # optional row filter\n\n");
    s.push_str("[model]\n");
    match &model.preset {
        Some(p) => s.push_str(&format!("preset = \"{p}\"   # {}\n", model.equation)),
        None => s.push_str(&format!("equation = {}\n", toml_string(&model.equation))),
    }
    s.push_str("[model.parameters]\n");
    for (p, start) in &model.parameters {
        match start {
            Some(v) => s.push_str(&format!("{p} = {{ start = {v} }}\n")),
            None => s.push_str(&format!("{p} = {{}}\n")),
        }
    }
    s.push_str("\n[fit]\nmethod = \"auto\"       # auto | linear | linearized | nonlinear\n");
    s.push_str("transform = \"auto\"\nweights = \"none\"\nconfidence = 0.95\n\n");
    s.push_str("[acceptance]           # TODO: the limits of your procedure\nr_squared_min = 0.999\nruns_p_min = 0.05\n\n");
    s.push_str("[report]\nformats = [\"html\", \"md\", \"json\"]\ndir = \"reports/{name}\"\n");
    s.push_str("signoff = [\"Performed by\", \"Reviewed by\", \"Approved by\"]\n");
    s
}

fn toml_string(s: &str) -> String {
    let mut out = String::from("\"");
    for c in s.chars() {
        match c {
            '"' => out.push_str("\\\""),
            '\\' => out.push_str("\\\\"),
            c if c.is_control() => out.push_str(&format!("\\u{:04X}", c as u32)),
            c => out.push(c),
        }
    }
    out.push('"');
    out
}

/// Write `NAME.toml` in `dir`, refusing to overwrite.
pub fn write_starter(
    dir: &Path,
    name: &str,
    model: &StarterModel,
    data: Option<&Path>,
) -> Result<PathBuf> {
    if !crate::recipe::valid_name(name) {
        return Err(Error::usage(format!("`{name}` is not a valid recipe name"))
            .help("use lower-case letters, digits, `.`, `_` and `-`, not starting with `.`"));
    }
    let target = dir.join(format!("{name}.toml"));
    if target.exists() {
        return Err(
            Error::usage(format!("`{}` already exists", target.display()))
                .help("choose another name or remove the file"),
        );
    }
    let header = match data {
        Some(p) => Some((p, guess_header(p)?)),
        None => None,
    };
    let text = starter_recipe(
        name,
        model,
        header
            .as_ref()
            .map(|(p, (h, d, c))| (*p, h.as_slice(), *d, *c)),
        dir,
    );
    crate::fsutil::write_atomic(&target, text.as_bytes())?;
    Ok(target)
}
