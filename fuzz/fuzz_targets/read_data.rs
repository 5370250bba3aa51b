//! Fuzz target for the data reader: arbitrary bytes as a data file, read through the
//! loader, the `where` filter and the weights exactly as `check` and `run` read them.
//!
//! The first byte picks the file name (CSV, TSV, whitespace, workbook extensions) and a set
//! of `[data]` options (decimal comma, thousands, comment, units row, header marker, an
//! encoding, `missing = "skip"`, `by` channels); the rest is the file. Every input must give
//! a dataset or an error that renders, never a panic.
#![no_main]

use std::path::PathBuf;
use std::sync::OnceLock;

use fitwright::recipe::from_bytes;
use libfuzzer_sys::fuzz_target;

fn folder() -> &'static PathBuf {
    static DIR: OnceLock<PathBuf> = OnceLock::new();
    DIR.get_or_init(|| {
        let dir = std::env::temp_dir().join(format!("fitwright-fuzz-data-{}", std::process::id()));
        std::fs::create_dir_all(&dir).expect("fuzz scratch folder");
        dir
    })
}

const NAMES: [&str; 8] = [
    "d.csv", "d.tsv", "d.txt", "d.dat", "d.xlsx", "d.ods", "d.csv", "d.csv",
];

fn options(selector: u8) -> String {
    let mut o = String::new();
    if selector & 0x08 != 0 {
        o.push_str("decimal = \",\"\ndelimiter = \";\"\n");
    }
    if selector & 0x10 != 0 {
        o.push_str("comment = \"#\"\nunits_row = true\n");
    }
    if selector & 0x20 != 0 {
        o.push_str("missing = \"skip\"\nwhere = \"x > -1e300 && y == y\"\n");
    }
    if selector & 0x40 != 0 {
        o.push_str("header_after = \"[data]\"\nencoding = \"windows-1252\"\n");
    }
    o
}

fuzz_target!(|data: &[u8]| {
    let Some((&selector, body)) = data.split_first() else {
        return;
    };
    let name = NAMES[usize::from(selector & 0x07)];
    let dir = folder();
    let file = dir.join(name);
    if std::fs::write(&file, body).is_err() {
        return;
    }
    let spreadsheet = name.ends_with(".xlsx") || name.ends_with(".ods");
    let opts = if spreadsheet {
        String::new()
    } else {
        options(selector)
    };
    let by = selector & 0x80 != 0;
    let recipe_text = format!(
        "name = \"fuzz\"\n[data]\nfiles = [\"{name}\"]\ncolumns = {{ x = 1, y = 2 }}\n{opts}{}\
         [model]\nequation = \"y = a + b * x\"\n[model.parameters]\na = {{}}\nb = {{}}\n\
         [fit]\nweights = \"1 / (1 + x^2)\"\n",
        if by { "by = 3\n" } else { "" }
    );
    let recipe = match from_bytes(&dir.join("fuzz.toml"), recipe_text.into_bytes()) {
        Ok(r) => r,
        Err(e) => panic!("the fixed recipe must be valid: {e}"),
    };
    if by {
        match fitwright::model::prepare_channels(&recipe) {
            Ok(set) => {
                for (_, p) in set.channels {
                    if let Err(e) = p {
                        let _ = e.to_string();
                    }
                }
            }
            Err(e) => {
                let _ = e.to_string();
            }
        }
    } else if let Err(e) = fitwright::model::prepare(&recipe) {
        let _ = e.to_string();
    }
    let _ = std::fs::remove_file(&file);
});
