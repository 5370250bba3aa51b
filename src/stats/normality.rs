//! Shapiro–Wilk test of normality, W and its p-value by Royston's method.
//!
//! Sources (from memory): S. S. Shapiro & M. B. Wilk, "An analysis of
//! variance test for normality (complete samples)", Biometrika 52 (1965)
//! 591–611; J. P. Royston, "Approximating the Shapiro–Wilk W-test for
//! non-normality", Statistics and Computing 2 (1992) 117–119; P. Royston,
//! "Remark AS R94: A remark on algorithm AS 181: the W-test for normality",
//! Applied Statistics 44 (1995) 547–551, whose polynomial constants are used
//! below. Valid for 3 ≤ n ≤ 5000.

use super::distributions::{normal_quantile, normal_sf};
use super::{NotApplicable, Outcome, StatsError, ensure_finite};

/// Smallest sample the method covers.
pub const MIN_N: usize = 3;
/// Largest sample the method covers (Royston 1995).
pub const MAX_N: usize = 5000;

/// Shapiro–Wilk statistic and p-value.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct ShapiroWilk {
    /// Sample size.
    pub n: usize,
    /// W statistic, 0 < W ≤ 1; small W signals non-normality.
    pub w: f64,
    /// p-value: probability of a W this small or smaller under normality.
    pub p_value: f64,
}

/// Evaluate `c[0] + c[1]·x + c[2]·x² + …` by Horner's rule.
fn poly(c: &[f64], x: f64) -> f64 {
    c.iter().rev().fold(0.0, |acc, &ci| acc * x + ci)
}

// Royston (1992, 1995) polynomial coefficients, as in AS R94.
const C1: [f64; 6] = [0.0, 0.221157, -0.147981, -2.071190, 4.434685, -2.706056];
const C2: [f64; 6] = [0.0, 0.042981, -0.293762, -1.752461, 5.682633, -3.582633];
const G: [f64; 2] = [-2.273, 0.459];
const C3: [f64; 4] = [0.5440, -0.39978, 0.025054, -6.714e-4];
const C4: [f64; 4] = [1.3822, -0.77857, 0.062767, -0.0020322];
const C5: [f64; 4] = [-1.5861, -0.31082, -0.083751, 0.0038915];
const C6: [f64; 3] = [-0.4803, -0.082676, 0.0030302];

/// Shapiro–Wilk W and p-value of `values` (any order) by Royston's algorithm
/// AS R94.
///
/// - Coefficients: `m_i = Φ⁻¹((i − 3/8)/(n + 1/4))`, `u = 1/√n`; for the
///   largest order statistic `a_n = m_n/√(mᵀm) + 0.221157u − 0.147981u² −
///   2.071190u³ + 4.434685u⁴ − 2.706056u⁵`, for n > 5 also
///   `a_{n−1} = m_{n−1}/√(mᵀm) + 0.042981u − 0.293762u² − 1.752461u³ +
///   5.682633u⁴ − 3.582633u⁵`; the other `a_i = m_i/√ε`, with ε chosen so
///   that `Σa² = 1`; `a_{n+1−i} = −a_i`. n = 3 uses `a = (−√½, 0, √½)`.
/// - `W = (Σ a_i x_(i))² / Σ(x_i − x̄)²`, computed as one minus the
///   complement of a squared correlation for accuracy near 1.
/// - p-value: n = 3, exact `p = (6/π)(asin √W − asin √¾)`; 4 ≤ n ≤ 11,
///   `γ = −2.273 + 0.459n`, `y = −ln(γ − ln(1 − W))`, μ and ln σ cubic in n
///   (C3, C4); 12 ≤ n ≤ 5000, `y = ln(1 − W)`, μ cubic and ln σ quadratic in
///   ln n (C5, C6); `p = 1 − Φ((y − μ)/σ)`.
///
/// Not applicable for n < 3, n > 5000 or zero range (all values equal).
pub fn shapiro_wilk(values: &[f64]) -> Result<Outcome<ShapiroWilk>, StatsError> {
    ensure_finite("values", values)?;
    let n = values.len();
    if n < MIN_N {
        return Ok(Outcome::NotApplicable(NotApplicable::TooFewObservations {
            n,
            needed: MIN_N,
        }));
    }
    if n > MAX_N {
        return Ok(Outcome::NotApplicable(NotApplicable::TooManyObservations {
            n,
            limit: MAX_N,
        }));
    }
    let mut x = values.to_vec();
    x.sort_by(f64::total_cmp);
    let (Some(&first), Some(&last)) = (x.first(), x.last()) else {
        return Ok(Outcome::NotApplicable(NotApplicable::TooFewObservations {
            n,
            needed: MIN_N,
        }));
    };
    let range = last - first;
    // AS R94 refuses a range below an absolute 1e-19; residuals may be tiny
    // in their own units, so only an exactly zero range is refused here.
    if range <= 0.0 {
        return Ok(Outcome::NotApplicable(NotApplicable::ZeroRange));
    }
    let a = coefficients(n)?;
    let w = w_statistic(&x, &a, range);
    let p_value = p_value(n, w)?;
    Ok(Outcome::Computed(ShapiroWilk { n, w, p_value }))
}

/// The full antisymmetric coefficient vector `a` for sorted data of size n
/// (negative for the lower half, Σa = 0, Σa² = 1).
fn coefficients(n: usize) -> Result<Vec<f64>, StatsError> {
    let half = n / 2;
    let mut upper = vec![0.0; half]; // upper[i] is the coefficient of x_(n−i)
    if n == 3 {
        upper[0] = std::f64::consts::FRAC_1_SQRT_2;
    } else {
        let an = n as f64;
        let m: Vec<f64> = (1..=half)
            .map(|i| normal_quantile((i as f64 - 0.375) / (an + 0.25)))
            .collect::<Result<_, _>>()?;
        // m_i < 0 for the lower half; the upper half mirrors with sign flipped.
        let summ2 = 2.0 * m.iter().map(|v| v * v).sum::<f64>();
        let ssumm2 = summ2.sqrt();
        let rsn = 1.0 / an.sqrt();
        let m1 = m[0];
        let a1 = poly(&C1, rsn) - m1 / ssumm2;
        let (first_free, fac) = if n > 5 {
            let m2 = m[1];
            let a2 = -m2 / ssumm2 + poly(&C2, rsn);
            upper[1] = a2;
            let fac = ((summ2 - 2.0 * m1 * m1 - 2.0 * m2 * m2)
                / (1.0 - 2.0 * a1 * a1 - 2.0 * a2 * a2))
                .sqrt();
            (2, fac)
        } else {
            let fac = ((summ2 - 2.0 * m1 * m1) / (1.0 - 2.0 * a1 * a1)).sqrt();
            (1, fac)
        };
        upper[0] = a1;
        for (u, mi) in upper.iter_mut().zip(&m).skip(first_free) {
            *u = -mi / fac;
        }
    }
    let mut a = vec![0.0; n];
    for (i, &c) in upper.iter().enumerate() {
        a[i] = -c;
        a[n - 1 - i] = c;
    }
    Ok(a)
}

/// W as the squared correlation between the sorted data and `a`, in the
/// cancellation-free form `W = 1 − (√(SaSx) − Sax)(√(SaSx) + Sax)/(SaSx)`
/// of AS R94 (data scaled by the range).
fn w_statistic(sorted: &[f64], a: &[f64], range: f64) -> f64 {
    let n = sorted.len() as f64;
    let a_mean = a.iter().sum::<f64>() / n;
    let x_mean = sorted.iter().map(|v| v / range).sum::<f64>() / n;
    let (mut ssa, mut ssx, mut sax) = (0.0, 0.0, 0.0);
    for (&ai, &xi) in a.iter().zip(sorted) {
        let da = ai - a_mean;
        let dx = xi / range - x_mean;
        ssa += da * da;
        ssx += dx * dx;
        sax += da * dx;
    }
    let root = (ssa * ssx).sqrt();
    let w1 = (root - sax) * (root + sax) / (ssa * ssx);
    1.0 - w1
}

/// Royston's p-value for W at sample size n (3 ≤ n ≤ 5000).
fn p_value(n: usize, w: f64) -> Result<f64, StatsError> {
    if n == 3 {
        // Exact for n = 3 (Shapiro & Wilk 1965): W ≥ 3/4 always.
        let pi6 = 6.0 / std::f64::consts::PI;
        let stqr = std::f64::consts::FRAC_PI_3; // asin(√(3/4))
        return Ok((pi6 * (w.sqrt().min(1.0).asin() - stqr)).clamp(0.0, 1.0));
    }
    let an = n as f64;
    let w1 = 1.0 - w;
    if w1 <= 0.0 {
        return Ok(1.0);
    }
    let y = w1.ln();
    let (z, m, s) = if n <= 11 {
        let gamma = poly(&G, an);
        if y >= gamma {
            // Beyond the range of the approximation: W far below any value a
            // normal sample gives (AS R94 returns 1e-99 here).
            return Ok(0.0);
        }
        let y = -(gamma - y).ln();
        (y, poly(&C3, an), poly(&C4, an).exp())
    } else {
        let xx = an.ln();
        (y, poly(&C5, xx), poly(&C6, xx).exp())
    };
    normal_sf((z - m) / s)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn coefficients_are_antisymmetric_and_normalised() {
        for n in [3, 4, 5, 6, 7, 11, 12, 50, 501] {
            let a = coefficients(n).unwrap();
            let sum: f64 = a.iter().sum();
            let sq: f64 = a.iter().map(|v| v * v).sum();
            assert!(sum.abs() < 1e-12, "n={n}: Σa = {sum}");
            assert!((sq - 1.0).abs() < 1e-12, "n={n}: Σa² = {sq}");
        }
    }

    #[test]
    fn equally_spaced_triple_is_exactly_normal_looking() {
        // n = 3 with equal spacing gives W = 1 and p = 1 (exact formula).
        let r = shapiro_wilk(&[1.0, 2.0, 3.0]).unwrap().computed().unwrap();
        assert!((r.w - 1.0).abs() < 1e-12);
        assert!((r.p_value - 1.0).abs() < 1e-6);
    }

    #[test]
    fn sample_size_outside_the_method_is_not_applicable() {
        assert_eq!(
            shapiro_wilk(&[1.0, 2.0]).unwrap().reason(),
            Some(&NotApplicable::TooFewObservations { n: 2, needed: 3 })
        );
        let big: Vec<f64> = (0..5001).map(|i| (i as f64).sin()).collect();
        assert_eq!(
            shapiro_wilk(&big).unwrap().reason(),
            Some(&NotApplicable::TooManyObservations {
                n: 5001,
                limit: 5000
            })
        );
    }

    #[test]
    fn constant_sample_is_not_applicable() {
        assert_eq!(
            shapiro_wilk(&[2.5; 10]).unwrap().reason(),
            Some(&NotApplicable::ZeroRange)
        );
    }
}
