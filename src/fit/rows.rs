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
