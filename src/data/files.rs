//! Expanding `[data] files` globs into an ordered list of existing files.

use std::cmp::Ordering;
use std::path::{Component, Path, PathBuf};

use crate::error::Result;
use crate::recipe::{FileSpec, Recipe};

/// A file to read, with the recipe entry it came from.
#[derive(Debug, Clone)]
pub struct MatchedFile {
    pub path: PathBuf,
    pub spec: FileSpec,
}

/// Expand every entry of `[data] files`. Matches of one pattern are sorted naturally
/// (`a7-2` before `a7-10`); the entries keep recipe order. A pattern matching nothing, or a
/// path that does not exist, is an error at that entry.
pub fn expand_files(recipe: &Recipe) -> Result<Vec<MatchedFile>> {
    let mut out: Vec<MatchedFile> = Vec::new();
    // Files already taken, by hash: a search of `out` for each match took most of a minute
    // for a glob over 20,000 exports.
    let mut taken: std::collections::HashSet<PathBuf> = std::collections::HashSet::new();
    for spec in &recipe.data.files {
        let pattern = spec.resolved.to_string_lossy().to_string();
        let is_glob = spec.sha256.is_none() && pattern.contains(['*', '?', '[']);
        let mut matches: Vec<PathBuf> = if is_glob {
            let paths = glob::glob(&pattern).map_err(|e| {
                recipe
                    .error_at(
                        spec.span.clone(),
                        format!("`{}` is not a valid glob pattern: {}", spec.pattern, e.msg),
                    )
                    .help("use `*` for any characters and `?` for one; brackets need a closing `]`")
            })?;
            paths
                .filter_map(|p| p.ok())
                .filter(|p| p.is_file())
                .collect()
        } else if spec.resolved.is_file() {
            vec![spec.resolved.clone()]
        } else {
            let what = if spec.resolved.is_dir() {
                "is a folder, not a file"
            } else if spec.resolved.exists() {
                // A device or a pipe: never read (it may not end, as /dev/zero).
                "is not a regular file (a device or a pipe?)"
            } else {
                "does not exist"
            };
            return Err(recipe
                .error_at(
                    spec.span.clone(),
                    format!(
                        "data file `{}` {what}",
                        clean_path(&spec.resolved).display()
                    ),
                )
                .help(
                    "paths in [data] files are relative to the recipe's folder; check the name",
                ));
        };
        if matches.is_empty() {
            return Err(recipe
                .error_at(
                    spec.span.clone(),
                    format!("`{}` matches no file", spec.pattern),
                )
                .note(format!(
                    "looked for `{}`",
                    clean_path(&spec.resolved).display()
                ))
                .help(
                    "paths in [data] files are relative to the recipe's folder; check the pattern",
                ));
        }
        matches.sort_by(|a, b| natural_cmp(&a.to_string_lossy(), &b.to_string_lossy()));
        for m in matches {
            let path = clean_path(&m);
            if taken.insert(path.clone()) {
                out.push(MatchedFile {
                    path,
                    spec: spec.clone(),
                });
            }
        }
    }
    Ok(out)
}

/// Remove `.` and `x/..` components lexically, so paths read as the user expects.
pub fn clean_path(path: &Path) -> PathBuf {
    let mut out: Vec<Component<'_>> = Vec::new();
    for c in path.components() {
        match c {
            Component::CurDir => {}
            Component::ParentDir => match out.last() {
                Some(Component::Normal(_)) => {
                    out.pop();
                }
                Some(Component::RootDir | Component::Prefix(_)) => {}
                _ => out.push(c),
            },
            _ => out.push(c),
        }
    }
    if out.is_empty() {
        PathBuf::from(".")
    } else {
        out.iter().collect()
    }
}

/// Natural order: runs of digits compare by value, the rest character by character.
pub fn natural_cmp(a: &str, b: &str) -> Ordering {
    let (mut a, mut b) = (a, b);
    loop {
        match (a.chars().next(), b.chars().next()) {
            (None, None) => return Ordering::Equal,
            (None, Some(_)) => return Ordering::Less,
            (Some(_), None) => return Ordering::Greater,
            (Some(x), Some(y)) if x.is_ascii_digit() && y.is_ascii_digit() => {
                let na = a.len() - a.trim_start_matches(|c: char| c.is_ascii_digit()).len();
                let nb = b.len() - b.trim_start_matches(|c: char| c.is_ascii_digit()).len();
                let (da, db) = (
                    a[..na].trim_start_matches('0'),
                    b[..nb].trim_start_matches('0'),
                );
                let ord = da
                    .len()
                    .cmp(&db.len())
                    .then_with(|| da.cmp(db))
                    .then_with(|| na.cmp(&nb));
                if ord != Ordering::Equal {
                    return ord;
                }
                a = &a[na..];
                b = &b[nb..];
            }
            (Some(x), Some(y)) => {
                if x != y {
                    return x.cmp(&y);
                }
                a = &a[x.len_utf8()..];
                b = &b[y.len_utf8()..];
            }
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn natural_order_puts_2_before_10() {
        let mut v = vec!["a7-10.csv", "a7-2.csv", "a7-1.csv", "b.csv"];
        v.sort_by(|a, b| natural_cmp(a, b));
        assert_eq!(v, ["a7-1.csv", "a7-2.csv", "a7-10.csv", "b.csv"]);
    }

    #[test]
    fn clean_path_removes_parent_components() {
        assert_eq!(
            clean_path(Path::new("recipes/../demo-data/./a.csv")),
            PathBuf::from("demo-data/a.csv")
        );
        assert_eq!(
            clean_path(Path::new("../x/a.csv")),
            PathBuf::from("../x/a.csv")
        );
    }
}
