//! The loader's file buffer (SPEC §11): the file's bytes read into one buffer of its final
//! size, advised to use 2 MiB pages ([`crate::memory`]); the columns of a large file come
//! from [`crate::memory::zeroed_f64`] and [`crate::memory::with_capacity`].

use std::io::Read;
use std::path::Path;

use crate::memory::advise;

/// The bytes of a file, read into one advised buffer of the file's size (as `std::fs::read`;
/// a file that grows or shrinks while it is read gives the bytes read).
pub fn read_file(path: &Path) -> std::io::Result<Vec<u8>> {
    let mut file = std::fs::File::open(path)?;
    let size = file
        .metadata()
        .ok()
        .and_then(|m| usize::try_from(m.len()).ok())
        .unwrap_or(0);
    let mut bytes = vec![0u8; size];
    advise(bytes.as_mut_ptr(), size);
    let mut filled = 0;
    while let Some(rest) = bytes.get_mut(filled..).filter(|r| !r.is_empty()) {
        match file.read(rest) {
            Ok(0) => break,
            Ok(n) => filled += n,
            Err(e) if e.kind() == std::io::ErrorKind::Interrupted => {}
            Err(e) => return Err(e),
        }
    }
    bytes.truncate(filled);
    file.read_to_end(&mut bytes)?;
    Ok(bytes)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn a_file_is_read_whole_into_its_buffer() {
        let dir = tempfile::tempdir().expect("a temporary folder");
        let path = dir.path().join("d.csv");
        let text: Vec<u8> = (0..crate::memory::ADVISE_FROM + 12_345)
            .map(|i| (i % 251) as u8)
            .collect();
        std::fs::write(&path, &text).expect("written");
        assert_eq!(read_file(&path).ok(), Some(text));
        std::fs::write(&path, b"").expect("written");
        assert_eq!(read_file(&path).ok(), Some(Vec::new()));
        assert!(read_file(&dir.path().join("missing.csv")).is_err());
    }
}
