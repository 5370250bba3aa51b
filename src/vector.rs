//! Run-time choice of the AVX2 build of a vector kernel, shared by the expression tape and the
//! solver's row passes. Results never depend on the choice: see [`vectorized`] and
//! DEVELOPERS.md, "Vector kernels".

/// Runs `f` compiled for AVX2 when the processor has it, and as compiled for the baseline
/// target otherwise, behind a call the optimizer does not inline (it keeps each kernel's
/// lane sums apart from the code that combines them, which it otherwise vectorizes badly).
///
/// The two builds give the same bits: Rust never contracts a·b + c into a fused multiply-add
/// (and FMA is not enabled), and never reorders a floating-point sum, so wider registers only
/// change how many of the independent lane operations run at once. Every kernel that sums
/// writes its sums out in lanes (e.g. the four partial sums of `fit::dense::dot`), combined afterwards
/// in one fixed order. See DEVELOPERS.md, "Vector kernels".
///
/// `len` is the length of the vectors `f` works on: below [`VECTOR_MIN_LEN`] it runs inline,
/// as compiled for the baseline (the call and the longer loop set-up would cost more than the
/// wider registers save).
#[inline(always)]
pub(crate) fn vectorized<R>(len: usize, f: impl FnOnce() -> R) -> R {
    if len < VECTOR_MIN_LEN {
        return f();
    }
    dispatch(f)
}

/// [`vectorized`] without the length test, for kernels long enough in themselves (the
/// expression tape runs a whole program per call).
#[inline(always)]
pub(crate) fn dispatch<R>(f: impl FnOnce() -> R) -> R {
    #[cfg(target_arch = "x86_64")]
    if std::arch::is_x86_feature_detected!("avx2") {
        // SAFETY: the processor supports AVX2 (checked on the line above), the one
        // requirement for calling a function compiled with that feature.
        return unsafe { run_avx2(f) };
    }
    run_baseline(f)
}

/// Shortest vector for which [`vectorized`] calls its kernel (not tuned: on NIST DanWood,
/// 6 rows, and Misra1a, 14 rows, callgrind and the clock showed the call slower than inline).
const VECTOR_MIN_LEN: usize = 32;

/// `f` as compiled for the baseline target, behind a call (also the reference the tests
/// compare the AVX2 build with).
#[inline(never)]
pub(crate) fn run_baseline<R>(f: impl FnOnce() -> R) -> R {
    f()
}

/// `f` compiled for AVX2. Callers must know that the processor has AVX2 ([`vectorized`]
/// checks; tests check before calling it directly).
#[cfg(target_arch = "x86_64")]
#[target_feature(enable = "avx2")]
#[inline(never)]
pub(crate) fn run_avx2<R>(f: impl FnOnce() -> R) -> R {
    f()
}

/// Whether every value is finite: x·0 is ±0 for finite x and NaN for ±∞ and NaN, so the sum
/// of the x·0 is zero exactly when all are finite. Summed in eight independent lanes (the
/// order of a sum of zeros and NaNs does not matter), which the compiler keeps in vector
/// registers; a boolean fold was not vectorized and cost more than the arithmetic it checked.
/// Inlined: callers run it inside their own [`vectorized`] or [`dispatch`] kernel.
#[inline(always)]
pub(crate) fn all_finite(xs: &[f64]) -> bool {
    let mut lanes = [0.0_f64; 8];
    let chunks = xs.chunks_exact(8);
    let mut rest = 0.0;
    for &x in chunks.remainder() {
        rest += x * 0.0;
    }
    for c in chunks {
        for (l, &x) in lanes.iter_mut().zip(c) {
            *l += x * 0.0;
        }
    }
    lanes.iter().sum::<f64>() + rest == 0.0
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn finiteness_check_finds_every_non_finite_position() {
        for len in [0, 1, 7, 8, 9, 16, 23, 64] {
            let clean: Vec<f64> = (0..len).map(|i| i as f64 * -1.5e300 - 0.0).collect();
            assert!(all_finite(&clean), "len {len}");
            for pos in 0..len {
                for bad in [f64::INFINITY, f64::NEG_INFINITY, f64::NAN] {
                    let mut v = clean.clone();
                    v[pos] = bad;
                    assert!(!all_finite(&v), "{bad} at {pos} of {len}");
                }
            }
        }
        assert!(all_finite(&[
            f64::MAX,
            -f64::MAX,
            f64::MIN_POSITIVE,
            5e-324,
            -0.0
        ]));
    }
}
