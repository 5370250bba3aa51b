//! Writing files so that a crash never leaves a half-written one: write a temporary file in
//! the same folder, sync it, then rename it over the target (rename is atomic on POSIX).

use std::io::Write;
use std::path::Path;

use crate::error::{Error, Result};

/// Write `bytes` to `path` atomically.
pub fn write_atomic(path: &Path, bytes: &[u8]) -> Result<()> {
    let dir = path
        .parent()
        .filter(|d| !d.as_os_str().is_empty())
        .unwrap_or(Path::new("."));
    let name = path
        .file_name()
        .map(|n| n.to_string_lossy().to_string())
        .unwrap_or_else(|| "out".into());
    let tmp = dir.join(format!(".{name}.tmp-{}", std::process::id()));
    let fail = |e: std::io::Error| {
        let _ = std::fs::remove_file(&tmp);
        Error::output(format!("cannot write `{}`: {e}", path.display()))
            .help("check that the folder exists and is writable")
    };
    let mut f = std::fs::File::create(&tmp).map_err(fail)?;
    f.write_all(bytes)
        .and_then(|_| f.sync_all())
        .map_err(fail)?;
    std::fs::rename(&tmp, path).map_err(fail)
}
