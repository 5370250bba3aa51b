//! Finding recipe files: the paths given on the command line, folders walked for `*.toml`.

use std::path::{Path, PathBuf};

use crate::data::natural_cmp;
use crate::error::{Error, Result};

/// Expand command-line paths into recipe files. A file is taken as given; a folder is walked
/// recursively for `*.toml` (hidden folders and `target/` are skipped), in natural order.
pub fn collect(paths: &[PathBuf]) -> Result<Vec<PathBuf>> {
    let mut out = Vec::new();
    for p in paths {
        if p.is_file() {
            out.push(p.clone());
        } else if p.is_dir() {
            let mut found: Vec<PathBuf> = walkdir::WalkDir::new(p)
                .follow_links(true)
                .into_iter()
                .filter_entry(|e| e.depth() == 0 || !is_skipped_dir(e.path()))
                .filter_map(|e| e.ok())
                .filter(|e| {
                    e.file_type().is_file() && e.path().extension().is_some_and(|x| x == "toml")
                })
                .map(|e| e.into_path())
                .collect();
            if found.is_empty() {
                return Err(Error::usage(format!(
                    "no recipes (*.toml) found under `{}`",
                    p.display()
                ))
                .help("give a recipe file or a folder that holds recipes"));
            }
            found.sort_by(|a, b| natural_cmp(&a.to_string_lossy(), &b.to_string_lossy()));
            out.extend(found);
        } else {
            return Err(Error::usage(format!("`{}` does not exist", p.display()))
                .help("give a recipe file or a folder of recipes"));
        }
    }
    out.dedup();
    Ok(out)
}

fn is_skipped_dir(path: &Path) -> bool {
    path.file_name()
        .and_then(|n| n.to_str())
        .is_some_and(|n| n.starts_with('.') || n == "target")
}
