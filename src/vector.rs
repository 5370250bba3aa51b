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
