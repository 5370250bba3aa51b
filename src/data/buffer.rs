//! The loader's large buffers (SPEC §11): the file's bytes and the columns of a large file,
//! each allocated once at its final size, with the kernel advised to back it with 2 MiB
//! pages (Linux transparent huge pages, `madvise(MADV_HUGEPAGE)`).
//!
//! Every fresh 4 KiB page costs a page fault at its first write: the 1,000,000-row benchmark
//! file touches about 50 MB (bytes, two columns, the rows' origins), some 12,500 faults,
//! which took about a third of the load's CPU time on the 2-core benchmark machine. With the
//! advice the 2 MiB-aligned parts of such a buffer fault once per 2 MiB. The advice changes
//! no value and no behaviour; where the kernel does not take it (another system, huge pages
//! switched off) it is ignored.

use std::io::Read;
use std::path::Path;

/// Buffers from this size on get the advice (smaller ones would hold few whole 2 MiB pages).
const ADVISE_FROM: usize = 4 << 20;

/// `n` zeros, advised.
pub fn zeroed_f64(n: usize) -> Vec<f64> {
    // Zeroed memory comes from `calloc`: fresh pages, not written before they are used.
    let mut v = vec![0.0; n];
    advise(v.as_mut_ptr().cast(), n * std::mem::size_of::<f64>());
    v
}

/// An empty vector with room for `n` values, advised.
pub fn with_capacity<T>(n: usize) -> Vec<T> {
    let mut v: Vec<T> = Vec::with_capacity(n);
    advise(
        v.as_mut_ptr().cast(),
        v.capacity() * std::mem::size_of::<T>(),
    );
    v
}

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

/// Advise 2 MiB pages for the whole 2 MiB pages inside `bytes` bytes at `ptr`.
#[cfg(target_os = "linux")]
fn advise(ptr: *mut u8, bytes: usize) {
    const HUGE: usize = 2 << 20;
    if bytes < ADVISE_FROM {
        return;
    }
    let start = (ptr as usize).next_multiple_of(HUGE);
    let end = (ptr as usize).saturating_add(bytes) / HUGE * HUGE;
    if end > start {
        // SAFETY: [start, end) lies inside the allocation of `bytes` bytes at `ptr`, which the
        // caller owns; MADV_HUGEPAGE only tells the kernel how to back those pages and never
        // changes their contents. Its result is ignored: without it the pages are 4 KiB.
        unsafe {
            libc::madvise(start as *mut libc::c_void, end - start, libc::MADV_HUGEPAGE);
        }
    }
}

#[cfg(not(target_os = "linux"))]
fn advise(_ptr: *mut u8, _bytes: usize) {}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn advised_buffers_hold_what_plain_ones_do() {
        let n = ADVISE_FROM; // 32 MiB of f64, advised.
        let z = zeroed_f64(n);
        assert!(z.len() == n && z.iter().all(|&v| v.to_bits() == 0));
        let mut v: Vec<u64> = with_capacity(n);
        v.extend(0..n as u64);
        assert_eq!(v.get(n - 1), Some(&(n as u64 - 1)));
        let dir = tempfile::tempdir().expect("a temporary folder");
        let path = dir.path().join("d.csv");
        let text: Vec<u8> = (0..ADVISE_FROM + 12_345).map(|i| (i % 251) as u8).collect();
        std::fs::write(&path, &text).expect("written");
        assert_eq!(read_file(&path).ok(), Some(text));
        std::fs::write(&path, b"").expect("written");
        assert_eq!(read_file(&path).ok(), Some(Vec::new()));
        assert!(read_file(&dir.path().join("missing.csv")).is_err());
    }
}
