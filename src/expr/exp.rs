//! The exponential function of the expression engine. One definition serves the tape (over
//! slices, where the compiler vectorizes the loop) and the scalar evaluators
//! ([`super::Func::apply`], used by the recursive, checked and symbolic evaluators), so every
//! evaluator gives the same bits for `exp(…)`, on every machine (only IEEE additions,
//! multiplications and bit operations; no fused multiply-add, no platform library call).
//!
//! # Method
//! Argument reduction of Cody & Waite (W. J. Cody and W. Waite, *Software Manual for the
//! Elementary Functions*, Prentice-Hall 1980, ch. 6): x = k·ln 2 + r with k = round(x/ln 2),
//! |r| ≤ ln 2/2 (to rounding), r = (x − k·L₁) − k·L₂ where L₁ + L₂ ≈ ln 2 and L₁ has 21
//! trailing zero bits, so k·L₁ and x − k·L₁ are exact for |k| < 2²¹ (the split of fdlibm's
//! `e_exp.c`, from memory; the values are checked against ln 2 in the tests). Then
//! eʳ = 1 + r + r²·(1/2! + r·(1/3! + … + r/13!)) (the Taylor series to degree 13; the first
//! omitted term, r¹⁴/14!, is below 4.3·10⁻¹⁸ for |r| ≤ 0.347, 0.02 ulp), summed with the
//! rounding errors of r and of 1 + r carried along (see `reduce`), and
//! eˣ = eʳ·2ᵏ, the power of two built from its exponent bits. k is rounded by adding
//! and subtracting 1.5·2⁵² (exact for |x/ln 2| < 2⁵¹; common practice).
//!
//! The error is below 0.6 ulp, and about 99 % of results are the correctly rounded double
//! (measured against 60-digit values from mpmath: `tests/exp_reference.rs`); the platform's
//! `exp` may round differently in the last bit.
//!
//! For |x| ≤ 708 the result is a normal number and the main path applies; outside it
//! (and for NaN) [`exp_outside`] scales in two steps, so results in the subnormal range are
//! rounded once, overflow gives +∞ and underflow 0.

/// log₂ e, rounded to double.
const LOG2_E: f64 = std::f64::consts::LOG2_E;
/// The high part of ln 2 (21 trailing zero bits): 0x3FE62E42FEE00000.
const LN2_HI: f64 = f64::from_bits(0x3FE6_2E42_FEE0_0000);
/// ln 2 − LN2_HI, rounded to double: 0x3DEA39EF35793C76.
const LN2_LO: f64 = f64::from_bits(0x3DEA_39EF_3579_3C76);
/// 1.5·2⁵²: adding and subtracting it rounds to an integer (ties to even).
const SHIFT: f64 = 6_755_399_441_055_744.0;
/// Where the main path stops giving normal results.
const MAIN_LIMIT: f64 = 708.0;

/// 1/k! for k = 2…13, rounded to double.
const INV_FACT: [f64; 12] = [
    1.0 / 2.0,
    1.0 / 6.0,
    1.0 / 24.0,
    1.0 / 120.0,
    1.0 / 720.0,
    1.0 / 5_040.0,
    1.0 / 40_320.0,
    1.0 / 362_880.0,
    1.0 / 3_628_800.0,
    1.0 / 39_916_800.0,
    1.0 / 479_001_600.0,
    1.0 / 6_227_020_800.0,
];

/// eˣ: the main path for |x| ≤ 708, [`exp_outside`] elsewhere.
#[inline]
pub fn exp(x: f64) -> f64 {
    if in_main_range(x) {
        main_path(x)
    } else {
        exp_outside(x)
    }
}

/// `out[i] = exp(xs[i])` for every i, to the bit [`exp`]'s value; the main loop has no branch,
/// so the compiler vectorizes it. Panics when the lengths differ (a caller's bug).
pub fn exp_slice(xs: &[f64], out: &mut [f64]) {
    exp_slice_inline(xs, out);
}

/// [`exp_slice`], inlined into the caller (so that it is compiled for the caller's target
/// features, e.g. the AVX2 build of the tape).
#[inline(always)]
pub fn exp_slice_inline(xs: &[f64], out: &mut [f64]) {
    assert_eq!(xs.len(), out.len(), "exp_slice: lengths differ");
    let mut inside = true;
    for (o, &x) in out.iter_mut().zip(xs) {
        *o = main_path(x);
        inside &= in_main_range(x);
    }
    if !inside {
        for (o, &x) in out.iter_mut().zip(xs) {
            if !in_main_range(x) {
                *o = exp_outside(x);
            }
        }
    }
}

/// eʳ ≈ 1 + q(r) for the reduced argument r, and k (as the low bits of `SHIFT + k`,
/// wrapping). The reduced argument is kept as r + r_lo (the rounding error of
/// r = (x − k·L₁) − k·L₂, by Dekker's Fast2Sum since |x − k·L₁| ≥ |k·L₂| except for tiny
/// arguments), and 1 + r as the pair s + s_lo (Fast2Sum again, |r| < 1), so the result is
/// rounded once in the final sum s + (s_lo + r_lo + r²·P(r)) where P(r) = 1/2! + r/3! + ….
/// T. J. Dekker, "A floating-point technique for extending the available precision",
/// Numer. Math. 18 (1971).
#[inline(always)]
fn reduce(x: f64) -> (f64, u64) {
    let t = x * LOG2_E + SHIFT;
    let k = t - SHIFT;
    let hi = x - k * LN2_HI;
    let kl = k * LN2_LO;
    let r = hi - kl;
    let r_lo = (hi - r) - kl;
    let [c2, c3, c4, c5, c6, c7, c8, c9, c10, c11, c12, c13] = INV_FACT;
    let p = c12 + r * c13;
    let p = c11 + r * p;
    let p = c10 + r * p;
    let p = c9 + r * p;
    let p = c8 + r * p;
    let p = c7 + r * p;
    let p = c6 + r * p;
    let p = c5 + r * p;
    let p = c4 + r * p;
    let p = c3 + r * p;
    let p = c2 + r * p;
    let s = 1.0 + r;
    let s_lo = (1.0 - s) + r;
    let e = s + (s_lo + (r_lo + (r * r) * p));
    (e, t.to_bits().wrapping_sub(SHIFT.to_bits()))
}

/// 2ᵏ for the k of [`reduce`] plus `bias` (the biased exponent must lie in 1…2046).
#[inline(always)]
fn power_of_two(k: u64, bias: u64) -> f64 {
    f64::from_bits(k.wrapping_add(bias).wrapping_shl(52))
}

/// |x| ≤ 708 (false for NaN).
#[inline(always)]
fn in_main_range(x: f64) -> bool {
    x.abs() <= MAIN_LIMIT
}

/// The branch-free path; exact to the description above for |x| ≤ 708, meaningless elsewhere.
#[inline(always)]
fn main_path(x: f64) -> f64 {
    let (p, k) = reduce(x);
    p * power_of_two(k, 1023)
}

/// eˣ for |x| > 708 and NaN: +∞ above 710, 0 below −746, NaN for NaN; in between the power
/// of two is applied in two steps, 2^(k−1)·2 upwards (overflowing to +∞ past the largest
/// double) and 2^(k+1022)·2⁻¹⁰²² downwards (one rounding into the subnormal range).
#[cold]
pub fn exp_outside(x: f64) -> f64 {
    if x.is_nan() {
        x
    } else if x > 710.0 {
        f64::INFINITY
    } else if x < -746.0 {
        0.0
    } else {
        let (p, k) = reduce(x);
        if x > 0.0 {
            p * power_of_two(k, 1022) * 2.0
        } else {
            p * power_of_two(k, 1023 + 1022) * f64::from_bits(1 << 52)
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn the_split_of_ln2_is_exact_for_every_reduction() {
        // 21 trailing zero bits: k·LN2_HI is exact for |k| < 2²¹ (|k| ≤ 1076 is used).
        assert_eq!(LN2_HI.to_bits() & ((1 << 21) - 1), 0);
        // The two parts add up to ln 2 rounded to double (std's LN_2, common practice).
        assert_eq!(LN2_HI + LN2_LO, std::f64::consts::LN_2);
        assert!(LN2_LO.abs() < 1e-9);
    }

    #[test]
    fn special_arguments() {
        assert_eq!(exp(0.0).to_bits(), 1.0_f64.to_bits());
        assert_eq!(exp(-0.0).to_bits(), 1.0_f64.to_bits());
        assert!(exp(f64::NAN).is_nan());
        assert_eq!(exp(f64::INFINITY), f64::INFINITY);
        assert_eq!(exp(f64::NEG_INFINITY).to_bits(), 0);
        assert_eq!(exp(1000.0), f64::INFINITY);
        assert_eq!(exp(709.79), f64::INFINITY);
        assert!(exp(709.78).is_finite());
        assert_eq!(exp(-800.0).to_bits(), 0);
        // The smallest subnormal, 2⁻¹⁰⁷⁴ ≈ e^−744.44.
        assert_eq!(exp(-744.44).to_bits(), 1);
        // e to within one ulp of std's E (common practice: E is e rounded to double).
        assert!((exp(1.0) - std::f64::consts::E).abs() <= f64::EPSILON * std::f64::consts::E);
    }

    #[test]
    fn slices_give_the_bits_of_the_scalar_function() {
        let mut xs: Vec<f64> = (0..4000)
            .map(|i| (f64::from(i) - 2000.0) * 0.3771 + 1e-3 * f64::from(i % 7))
            .collect();
        xs.extend([
            f64::NAN,
            f64::INFINITY,
            f64::NEG_INFINITY,
            708.0,
            -708.0,
            709.5,
            -745.0,
        ]);
        xs.extend([1e300, -1e300, 5e-324, -0.0, 0.0]);
        let mut out = vec![0.0; xs.len()];
        exp_slice(&xs, &mut out);
        for (x, v) in xs.iter().zip(&out) {
            assert_eq!(v.to_bits(), exp(*x).to_bits(), "x = {x}");
        }
        // An all-inside slice takes the branch-free loop only.
        let inside: Vec<f64> = (0..999).map(|i| f64::from(i) * 1.4 - 700.0).collect();
        let mut out = vec![0.0; inside.len()];
        exp_slice(&inside, &mut out);
        for (x, v) in inside.iter().zip(&out) {
            assert_eq!(v.to_bits(), exp(*x).to_bits(), "x = {x}");
        }
    }

    #[test]
    fn agrees_with_the_platform_exp_to_one_ulp() {
        // The platform libm (glibc here) as a second, independent implementation; the
        // accuracy itself is measured against mpmath in tests/exp_reference.rs.
        let mut worst = 0_u64;
        for i in 0..200_000 {
            let x = (f64::from(i) - 100_000.0) * 0.007_080_1;
            let (a, b) = (exp(x), x.exp());
            if b.is_normal() {
                worst = worst.max(a.to_bits().abs_diff(b.to_bits()));
            }
        }
        assert!(worst <= 1, "largest difference {worst} ulp");
    }
}
