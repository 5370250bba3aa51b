//! Large buffers backed by 2 MiB pages where the system offers them (Linux transparent huge
//! pages, `madvise(MADV_HUGEPAGE)`), for the loader's file bytes and columns and the solver's
//! n-row buffers on large data sets (SPEC §11).
//!
//! Every fresh 4 KiB page costs a page fault at its first write: the 1,000,000-row benchmark
//! touches some 50 MB loading (bytes, two columns, the rows' origins) and as much fitting (the
//! Jacobians, residuals and trial values), a fault per 512 values, which took a third of the
//! load's and a fifth of the fit's CPU time on the 2-core benchmark machine. With the advice
//! the 2 MiB-aligned parts of such a buffer fault once per 2 MiB. The advice changes no value
//! and no behaviour; where the kernel does not take it (another system, huge pages switched
//! off) it is ignored.

/// Buffers from this size on get the advice (smaller ones would hold few whole 2 MiB pages).
pub(crate) const ADVISE_FROM: usize = 4 << 20;

/// `n` zeros, advised.
pub(crate) fn zeroed_f64(n: usize) -> Vec<f64> {
    // Zeroed memory comes from `calloc`: fresh pages, not written before they are used.
    let mut v = vec![0.0; n];
    advise(v.as_mut_ptr().cast(), n * std::mem::size_of::<f64>());
    v
}

/// An empty vector with room for `n` values, advised.
pub(crate) fn with_capacity<T>(n: usize) -> Vec<T> {
    let mut v: Vec<T> = Vec::with_capacity(n);
    advise(
        v.as_mut_ptr().cast(),
        v.capacity() * std::mem::size_of::<T>(),
    );
    v
}

/// Advise 2 MiB pages for the whole 2 MiB pages inside `bytes` bytes at `ptr`.
#[cfg(target_os = "linux")]
pub(crate) fn advise(ptr: *mut u8, bytes: usize) {
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
pub(crate) fn advise(_ptr: *mut u8, _bytes: usize) {}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn advised_buffers_hold_what_plain_ones_do() {
        let n = ADVISE_FROM; // 32 MiB of f64, advised.
        let mut z = zeroed_f64(n);
        assert!(z.len() == n && z.iter().all(|&v| v.to_bits() == 0));
        z.iter_mut().enumerate().for_each(|(i, x)| *x = i as f64);
        assert!(z.iter().enumerate().all(|(i, x)| *x == i as f64));
        let mut v: Vec<u64> = with_capacity(n);
        v.extend(0..n as u64);
        assert_eq!(v.get(n - 1), Some(&(n as u64 - 1)));
    }
}
