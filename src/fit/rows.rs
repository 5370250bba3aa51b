//! Passes over the rows of large data sets on the rayon pool, with the same bits on every
//! machine.
//!
//! The rows are cut into blocks of [`BLOCK`] rows, a constant: the cuts do not depend on the
//! number of threads. Each block's sums are taken in row order inside the block (by the
//! caller's kernel), and the per-block results come back in block order, for the caller to
//! combine in that order on one thread. A sum over the rows is then Σₖ (Σ over block k), a
//! fixed order of the same additions whatever the pool size — so a 2-core laptop and a
//! 64-core server give the same fit to the last bit (see "Same bits on every machine" in
//! DEVELOPERS.md). Small problems never come here: the solver uses these passes from
//! [`super::lm::STREAMING_QR_FROM`] rows on.

use std::ops::Range;

use rayon::prelude::*;

/// Rows per block: the block's share of a Jacobian with a handful of columns (8,192 rows ×
/// 8 bytes × p) stays in a core's L2 cache between the passes of one block, and a
/// million rows give 123 blocks to share out (common practice, not tuned per machine).
pub(crate) const BLOCK: usize = 8192;

/// `f(rows)` for the row range of every block of `n` rows, in block order.
pub(crate) fn map<T, F>(n: usize, f: F) -> Vec<T>
where
    T: Send,
    F: Fn(Range<usize>) -> T + Sync + Send,
{
    (0..n.div_ceil(BLOCK))
        .into_par_iter()
        .map(|k| f(k * BLOCK..((k + 1) * BLOCK).min(n)))
        .collect()
}

/// `f(rows, out[rows])` for every block of `out`'s rows, in block order: as [`map`], with
/// each block writing its own part of `out`.
pub(crate) fn map_mut<T, F>(out: &mut [f64], f: F) -> Vec<T>
where
    T: Send,
    F: Fn(Range<usize>, &mut [f64]) -> T + Sync + Send,
{
    out.par_chunks_mut(BLOCK)
        .enumerate()
        .map(|(k, part)| {
            let lo = k * BLOCK;
            f(lo..lo + part.len(), part)
        })
        .collect()
}

/// A vector of `len` zeros for the rows of a large data set, its memory backed by
/// transparent huge pages where the system offers them (Linux `madvise(MADV_HUGEPAGE)`;
/// elsewhere, or when refused, ordinary pages). The allocator hands out fresh zero pages for
/// large sizes, which the kernel fills at the first write: with 4 KiB pages that is one
/// page fault per 512 values (some 6,000 for a 1,000,000 × 3 Jacobian, a fifth of a large
/// fit's time), with 2 MiB pages one per 262,144. The values are the same either way.
pub(crate) fn zeroed(len: usize) -> Vec<f64> {
    let mut v = vec![0.0; len];
    advise_huge_pages(&mut v);
    v
}

/// Asks the kernel to back the 2 MiB-aligned part of `v`'s memory with huge pages (advice
/// only: the contents and the program's behaviour do not change; an error is ignored).
#[cfg(target_os = "linux")]
fn advise_huge_pages(v: &mut [f64]) {
    const HUGE: usize = 2 << 20;
    let start = v.as_mut_ptr() as usize;
    let end = start + std::mem::size_of_val(v);
    let (lo, hi) = (start.next_multiple_of(HUGE), end / HUGE * HUGE);
    if hi > lo {
        // SAFETY: [lo, hi) lies inside `v`'s allocation, which we hold mutably; MADV_HUGEPAGE
        // only changes how the kernel backs those pages, never their contents.
        unsafe {
            libc::madvise(lo as *mut libc::c_void, hi - lo, libc::MADV_HUGEPAGE);
        }
    }
}

#[cfg(not(target_os = "linux"))]
fn advise_huge_pages(_: &mut [f64]) {}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn blocks_cover_every_row_once_in_order() {
        let n = 3 * BLOCK + 17;
        let ranges = map(n, |r| r);
        assert_eq!(ranges.len(), 4);
        assert_eq!(ranges[0], 0..BLOCK);
        assert_eq!(ranges[3], 3 * BLOCK..n);
        assert!(ranges.windows(2).all(|w| w[0].end == w[1].start));
        let mut out = vec![0.0; n];
        let lens = map_mut(&mut out, |r, part| {
            for (i, v) in r.clone().zip(part.iter_mut()) {
                *v = i as f64;
            }
            part.len()
        });
        assert_eq!(lens, vec![BLOCK, BLOCK, BLOCK, 17]);
        assert!(out.iter().enumerate().all(|(i, v)| *v == i as f64));
    }

    #[test]
    fn huge_page_buffers_are_ordinary_zeroed_vectors() {
        // 5 MiB: at least one whole 2 MiB page inside, whatever the alignment.
        let mut v = zeroed(5 << 17);
        assert_eq!(v.len(), 5 << 17);
        assert!(v.iter().all(|x| x.to_bits() == 0));
        v.iter_mut().enumerate().for_each(|(i, x)| *x = i as f64);
        assert!(v.iter().enumerate().all(|(i, x)| *x == i as f64));
    }

    #[test]
    fn sums_do_not_depend_on_the_number_of_threads() {
        // The same block sums on a 1-thread and a 3-thread pool, to the last bit.
        let x: Vec<f64> = (0..5 * BLOCK + 3)
            .map(|i| (i as f64 * 0.618).sin() * 1e3)
            .collect();
        let total = |threads: usize| {
            rayon::ThreadPoolBuilder::new()
                .num_threads(threads)
                .build()
                .unwrap()
                .install(|| {
                    map(x.len(), |r| x[r].iter().sum::<f64>())
                        .into_iter()
                        .fold(0.0, |a, b| a + b)
                })
        };
        assert_eq!(total(1).to_bits(), total(3).to_bits());
    }
}
