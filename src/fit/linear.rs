//! Weighted linear least squares by Householder QR on column-scaled data.
//!
//! Problem: minimise `SSR_w = Σᵢ wᵢ·(yᵢ − Σⱼ Xᵢⱼ·βⱼ)²` over β (wᵢ ≥ 0; wᵢ = 1/σᵢ² when the
//! standard uncertainties σᵢ are known, relative weights otherwise).
//!
//! Method (Golub & Van Loan, *Matrix Computations*, 3rd ed., §5.3.3 and §5.3.5; Björck,
//! *Numerical Methods for Least Squares Problems*, 1996, §2.3 on column scaling and §2.9 on
//! iterative refinement — all from memory):
//! 1. A = W½·X, b = W½·y.
//! 2. Scale each column of A to unit 2-norm: A_s = A·D⁻¹, D = diag(‖aⱼ‖). Scaling changes
//!    neither the solution (β = D⁻¹·β_s) nor the fit, only the conditioning of the arithmetic.
//! 3. Householder QR A_s = Q·R; rank test on the singular values of R (shared with A_s) with
//!    tolerance max(n, p)·ε·σ_max (SPEC §13). A rank-deficient design is an error naming the
//!    collinear columns — never a silent minimum-norm answer.
//! 4. β_s = R⁻¹·(Qᵀb)₁..ₚ by back substitution.
//! 5. Iterative refinement of the augmented system `[I A; Aᵀ 0]·[r; β] = [b; 0]`, its
//!    residuals computed in compensated (double-double) arithmetic and the corrections solved
//!    with the same QR, repeated while they shrink (at most [`REFINEMENT_STEPS`] times). This
//!    recovers digits lost to rounding for ill-conditioned or large-residual designs (the NIST
//!    Filip and Wampler problems) without changing the mathematical problem.
//! 6. (XᵀWX)⁻¹ = D⁻¹·R⁻¹·R⁻ᵀ·D⁻¹ from the triangle (the normal equations are never formed).

use std::fmt;

use nalgebra::DMatrix;

use super::dense::{self, ScaledQrError};

/// Upper limit of refinement passes (common practice: two or three passes suffice when
/// the correction shrinks at all; a fixed small cap keeps the cost bounded).
pub const REFINEMENT_STEPS: usize = 4;

/// The result of a weighted linear least-squares fit.
#[derive(Debug, Clone, PartialEq)]
pub struct LinearFit {
    /// β, one per design column.
    pub coefficients: Vec<f64>,
    /// Unscaled covariance (XᵀWX)⁻¹ (multiply by s² for the "residuals" uncertainty mode).
    pub unscaled_covariance: DMatrix<f64>,
    /// Weighted residual sum of squares Σ wᵢ·eᵢ².
    pub ssr: f64,
    /// Residuals eᵢ = yᵢ − ŷᵢ in response units (unweighted).
    pub residuals: Vec<f64>,
    /// Fitted values ŷᵢ = Σⱼ Xᵢⱼ·βⱼ.
    pub fitted: Vec<f64>,
    /// 2-norm condition number of the column-scaled weighted design W½·X·D⁻¹.
    pub condition: f64,
}

/// Why a linear fit could not be computed.
#[derive(Debug, Clone, PartialEq)]
#[non_exhaustive]
pub enum LinearError {
    /// Lengths of design, response, weights or names disagree.
    DimensionMismatch {
        what: &'static str,
        expected: usize,
        found: usize,
    },
    /// No columns, or fewer rows than columns.
    TooFewRows { rows: usize, columns: usize },
    /// A NaN or infinite value in the input (0-based row; column for the design).
    NonFinite {
        what: &'static str,
        row: usize,
        column: Option<usize>,
    },
    /// A negative weight (0-based row).
    NegativeWeight { row: usize, value: f64 },
    /// A design column that is zero on every row with non-zero weight.
    ZeroColumn { index: usize, name: String },
    /// Columns that are linearly dependent within the rank tolerance max(n,p)·ε·σ_max.
    RankDeficient {
        columns: Vec<(usize, String)>,
        condition: f64,
    },
}

impl fmt::Display for LinearError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            LinearError::DimensionMismatch {
                what,
                expected,
                found,
            } => {
                write!(f, "{what} has {found} entries, expected {expected}")
            }
            LinearError::TooFewRows { rows, columns } => write!(
                f,
                "a linear fit of {columns} coefficient(s) needs at least {columns} rows, got {rows}"
            ),
            LinearError::NonFinite { what, row, column } => match column {
                Some(c) => write!(
                    f,
                    "{what} is not finite at row {}, column {}",
                    row + 1,
                    c + 1
                ),
                None => write!(f, "{what} is not finite at row {}", row + 1),
            },
            LinearError::NegativeWeight { row, value } => {
                write!(
                    f,
                    "weight {value} at row {} is negative; weights must be ≥ 0",
                    row + 1
                )
            }
            LinearError::ZeroColumn { index, name } => write!(
                f,
                "basis function {} ({name}) is zero on every weighted row; remove it from the model",
                index + 1
            ),
            LinearError::RankDeficient { columns, condition } => {
                let list: Vec<String> = columns
                    .iter()
                    .map(|(i, n)| format!("{} ({n})", i + 1))
                    .collect();
                write!(
                    f,
                    "the basis functions {} are linearly dependent on these rows \
                     (condition number {condition:.3e} of the scaled design); \
                     drop one of them or add data that separates them",
                    list.join(", ")
                )
            }
        }
    }
}

impl std::error::Error for LinearError {}

/// Weighted linear least squares; see the module documentation for the method.
///
/// `design` is the n × p matrix X (row i = basis functions at observation i), `y` the
/// response, `weights` the wᵢ (None = all 1), `names` one label per column for messages.
pub fn fit_linear<S: AsRef<str>>(
    design: &DMatrix<f64>,
    y: &[f64],
    weights: Option<&[f64]>,
    names: &[S],
) -> Result<LinearFit, LinearError> {
    let (n, p) = design.shape();
    validate(design, y, weights, names)?;
    let sqrt_w: Vec<f64> = match weights {
        Some(w) => w.iter().map(|v| v.sqrt()).collect(),
        None => vec![1.0; n],
    };
    let mut a = design.clone();
    for j in 0..p {
        for (v, sw) in a.column_mut(j).iter_mut().zip(&sqrt_w) {
            *v *= sw;
        }
    }
    let b: Vec<f64> = y.iter().zip(&sqrt_w).map(|(y, sw)| y * sw).collect();
    let name = |i: usize| {
        names
            .get(i)
            .map(|s| s.as_ref().to_string())
            .unwrap_or_default()
    };
    let sq = dense::scaled_qr(a.clone()).map_err(|e| match e {
        ScaledQrError::ZeroColumn(j) => LinearError::ZeroColumn {
            index: j,
            name: name(j),
        },
        ScaledQrError::Deficient { columns, condition } => LinearError::RankDeficient {
            columns: columns.into_iter().map(|j| (j, name(j))).collect(),
            condition,
        },
    })?;

    let mut beta = vec![0.0; p];
    let mut scratch = b.clone();
    if !sq.solve(&mut scratch, &mut beta) {
        // The rank test passed, so R has a non-zero diagonal.
        return Err(LinearError::RankDeficient {
            columns: (0..p).map(|j| (j, name(j))).collect(),
            condition: sq.condition,
        });
    }
    refine(&a, &b, &sq, &mut beta);

    let unscaled_covariance = sq
        .inverse_gram()
        .ok_or_else(|| LinearError::RankDeficient {
            columns: (0..p).map(|j| (j, name(j))).collect(),
            condition: sq.condition,
        })?;
    let fitted: Vec<f64> = (0..n)
        .map(|i| compensated_dot((0..p).map(|j| (design[(i, j)], beta[j]))))
        .collect();
    let residuals: Vec<f64> = y.iter().zip(&fitted).map(|(y, f)| y - f).collect();
    let ssr = residuals
        .iter()
        .zip(&sqrt_w)
        .map(|(e, sw)| (sw * e) * (sw * e))
        .sum();
    Ok(LinearFit {
        coefficients: beta,
        unscaled_covariance,
        ssr,
        residuals,
        fitted,
        condition: sq.condition,
    })
}

fn validate<S: AsRef<str>>(
    design: &DMatrix<f64>,
    y: &[f64],
    weights: Option<&[f64]>,
    names: &[S],
) -> Result<(), LinearError> {
    let (n, p) = design.shape();
    if y.len() != n {
        return Err(LinearError::DimensionMismatch {
            what: "response",
            expected: n,
            found: y.len(),
        });
    }
    if names.len() != p {
        return Err(LinearError::DimensionMismatch {
            what: "column names",
            expected: p,
            found: names.len(),
        });
    }
    if p == 0 || n < p {
        return Err(LinearError::TooFewRows {
            rows: n,
            columns: p,
        });
    }
    if let Some(w) = weights {
        if w.len() != n {
            return Err(LinearError::DimensionMismatch {
                what: "weights",
                expected: n,
                found: w.len(),
            });
        }
        for (row, &v) in w.iter().enumerate() {
            if !v.is_finite() {
                return Err(LinearError::NonFinite {
                    what: "weight",
                    row,
                    column: None,
                });
            }
            if v < 0.0 {
                return Err(LinearError::NegativeWeight { row, value: v });
            }
        }
    }
    if let Some(row) = y.iter().position(|v| !v.is_finite()) {
        return Err(LinearError::NonFinite {
            what: "response",
            row,
            column: None,
        });
    }
    for j in 0..p {
        if let Some(row) = design.column(j).iter().position(|v| !v.is_finite()) {
            return Err(LinearError::NonFinite {
                what: "design",
                row,
                column: Some(j),
            });
        }
    }
    Ok(())
}

/// Iterative refinement of the least-squares solution through the augmented system
/// `[I A; Aᵀ 0]·[r; β] = [b; 0]` (Björck, "Iterative refinement of linear least squares
/// solutions I", BIT 7, 1967; Björck 1996 §2.9 — from memory). Refining r together with β
/// converges also for large-residual problems (NIST Wampler4/5), where refining β alone stalls
/// at κ²·ε·‖r‖. Residuals of the augmented system are computed in compensated arithmetic;
/// corrections are solved with the existing QR of the scaled matrix A_s = A·D⁻¹:
/// Rᵀh = D⁻¹g, d = Qᵀf, δβ_s = R⁻¹(d₁ − h), δr = Q·[h; d₂], δβ = D⁻¹δβ_s.
fn refine(a: &DMatrix<f64>, b: &[f64], sq: &dense::ScaledQr, beta: &mut [f64]) {
    let (n, p) = a.shape();
    let mut r: Vec<f64> = (0..n)
        .map(|i| {
            compensated_dot(
                std::iter::once((b[i], 1.0)).chain((0..p).map(|j| (a[(i, j)], -beta[j]))),
            )
        })
        .collect();
    let mut f = vec![0.0; n];
    let mut g = vec![0.0; p];
    let mut h = vec![0.0; p];
    let mut u = vec![0.0; p];
    let mut delta = vec![0.0; p];
    let mut dr = vec![0.0; n];
    let mut last = f64::INFINITY;
    for _ in 0..REFINEMENT_STEPS {
        for i in 0..n {
            f[i] = compensated_dot(
                [(b[i], 1.0), (r[i], -1.0)]
                    .into_iter()
                    .chain((0..p).map(|j| (a[(i, j)], -beta[j]))),
            );
        }
        for j in 0..p {
            g[j] = -compensated_dot((0..n).map(|i| (a[(i, j)], r[i]))) / sq.scale[j];
        }
        if !dense::solve_upper_transposed(&sq.qr, &g, &mut h) {
            return;
        }
        dense::apply_qt(&sq.qr, &sq.tau, &mut f);
        for j in 0..p {
            u[j] = f[j] - h[j];
        }
        if !dense::solve_upper(&sq.qr, &u, &mut delta) {
            return;
        }
        dr[..p].copy_from_slice(&h);
        dr[p..].copy_from_slice(&f[p..]);
        dense::apply_q(&sq.qr, &sq.tau, &mut dr);
        // Size of the correction relative to β, in the scaled coordinates.
        let size = delta
            .iter()
            .zip(beta.iter())
            .zip(&sq.scale)
            .map(|((d, x), s)| d.abs() / (x * s).abs().max(f64::MIN_POSITIVE))
            .fold(0.0_f64, f64::max);
        if !size.is_finite() || size >= last {
            return;
        }
        for ((x, d), s) in beta.iter_mut().zip(&delta).zip(&sq.scale) {
            *x += d / s;
        }
        for (ri, d) in r.iter_mut().zip(&dr) {
            *ri += d;
        }
        last = size;
        if size <= f64::EPSILON {
            return;
        }
    }
}

/// Σ aₖ·bₖ in compensated arithmetic: each product split exactly with a fused multiply-add
/// and the sum accumulated with Knuth's TwoSum (Ogita, Rump & Oishi, "Accurate sum and dot
/// product", SIAM J. Sci. Comput. 26, 2005 — algorithm Dot2, from memory). The result is as
/// accurate as if computed in twice the working precision, then rounded.
pub(crate) fn compensated_dot(terms: impl Iterator<Item = (f64, f64)>) -> f64 {
    let mut s = 0.0_f64;
    let mut c = 0.0_f64;
    for (a, b) in terms {
        let p = a * b;
        let pe = a.mul_add(b, -p);
        let t = s + p;
        let z = t - s;
        let se = (s - (t - z)) + (p - z);
        s = t;
        c += se + pe;
    }
    s + c
}

#[cfg(test)]
mod tests {
    use super::*;

    fn straight_line_design(x: &[f64]) -> DMatrix<f64> {
        DMatrix::from_fn(x.len(), 2, |i, j| if j == 0 { 1.0 } else { x[i] })
    }

    #[test]
    fn exact_straight_line_is_recovered() {
        // y = 2 + 3x exactly: any least-squares method must return (2, 3) and zero residuals.
        let x = [0.0, 1.0, 2.0, 3.0, 4.0];
        let y: Vec<f64> = x.iter().map(|x| 2.0 + 3.0 * x).collect();
        let fit = fit_linear(&straight_line_design(&x), &y, None, &["a", "b"]).unwrap();
        assert!((fit.coefficients[0] - 2.0).abs() < 1e-14);
        assert!((fit.coefficients[1] - 3.0).abs() < 1e-14);
        assert!(fit.ssr < 1e-26);
    }

    #[test]
    fn straight_line_matches_the_closed_form() {
        // Closed form for a straight line (Draper & Smith, Applied Regression Analysis, 3rd ed.,
        // §1.2, from memory): b = Sxy/Sxx, a = ȳ − b·x̄, Var(b) factor 1/Sxx,
        // Var(a) factor 1/n + x̄²/Sxx. Data invented (a load-cell reading against mass).
        let x = [0.0, 5.0, 10.0, 15.0, 20.0, 25.0];
        let y = [0.12, 5.31, 10.09, 15.42, 20.11, 25.37];
        let n = x.len() as f64;
        let xm = x.iter().sum::<f64>() / n;
        let ym = y.iter().sum::<f64>() / n;
        let sxx: f64 = x.iter().map(|x| (x - xm) * (x - xm)).sum();
        let sxy: f64 = x.iter().zip(&y).map(|(x, y)| (x - xm) * (y - ym)).sum();
        let b = sxy / sxx;
        let a = ym - b * xm;
        let fit = fit_linear(&straight_line_design(&x), &y, None, &["a", "b"]).unwrap();
        assert!((fit.coefficients[0] - a).abs() < 1e-13);
        assert!((fit.coefficients[1] - b).abs() < 1e-14);
        assert!((fit.unscaled_covariance[(1, 1)] - 1.0 / sxx).abs() < 1e-16);
        assert!((fit.unscaled_covariance[(0, 0)] - (1.0 / n + xm * xm / sxx)).abs() < 1e-14);
        assert!((fit.unscaled_covariance[(0, 1)] - (-xm / sxx)).abs() < 1e-15);
    }

    #[test]
    fn weights_equal_to_row_repetition() {
        // A weight of 2 on a row is the same as that row appearing twice (the definition of
        // the weighted sum of squares).
        let x = [1.0, 2.0, 3.0, 4.0];
        let y = [1.1, 1.9, 3.2, 3.9];
        let w = [1.0, 2.0, 1.0, 1.0];
        let weighted = fit_linear(&straight_line_design(&x), &y, Some(&w), &["a", "b"]).unwrap();
        let xr = [1.0, 2.0, 2.0, 3.0, 4.0];
        let yr = [1.1, 1.9, 1.9, 3.2, 3.9];
        let repeated = fit_linear(&straight_line_design(&xr), &yr, None, &["a", "b"]).unwrap();
        for j in 0..2 {
            assert!((weighted.coefficients[j] - repeated.coefficients[j]).abs() < 1e-14);
        }
        assert!((weighted.ssr - repeated.ssr).abs() < 1e-14);
    }

    #[test]
    fn collinear_columns_are_named_not_solved() {
        let x = [1.0, 2.0, 3.0, 4.0];
        let design = DMatrix::from_fn(4, 3, |i, j| match j {
            0 => 1.0,
            1 => x[i],
            _ => 2.0 * x[i] - 1.0,
        });
        let err = fit_linear(&design, &[1.0, 2.0, 3.0, 5.0], None, &["a", "b", "c"]).unwrap_err();
        match &err {
            LinearError::RankDeficient { columns, .. } => {
                let names: Vec<&str> = columns.iter().map(|(_, n)| n.as_str()).collect();
                assert_eq!(names, ["a", "b", "c"]);
            }
            other => panic!("expected RankDeficient, got {other:?}"),
        }
        assert!(err.to_string().contains("1 (a), 2 (b), 3 (c)"));
    }

    #[test]
    fn zero_column_is_an_error_naming_it() {
        let design = DMatrix::from_fn(3, 2, |i, j| if j == 0 { 1.0 + i as f64 } else { 0.0 });
        let err = fit_linear(&design, &[1.0, 2.0, 3.0], None, &["slope", "c"]).unwrap_err();
        assert_eq!(
            err,
            LinearError::ZeroColumn {
                index: 1,
                name: "c".into()
            }
        );
    }

    #[test]
    fn bad_input_is_reported_not_panicked() {
        let d = straight_line_design(&[1.0, 2.0, 3.0]);
        assert!(matches!(
            fit_linear(&d, &[1.0, f64::NAN, 3.0], None, &["a", "b"]),
            Err(LinearError::NonFinite { row: 1, .. })
        ));
        assert!(matches!(
            fit_linear(&d, &[1.0, 2.0, 3.0], Some(&[1.0, -1.0, 1.0]), &["a", "b"]),
            Err(LinearError::NegativeWeight { row: 1, .. })
        ));
        assert!(matches!(
            fit_linear(&d, &[1.0, 2.0], None, &["a", "b"]),
            Err(LinearError::DimensionMismatch { .. })
        ));
        let tall = DMatrix::from_element(1, 2, 1.0);
        assert!(matches!(
            fit_linear(&tall, &[1.0], None, &["a", "b"]),
            Err(LinearError::TooFewRows { .. })
        ));
    }

    #[test]
    fn compensated_dot_recovers_cancelled_digits() {
        // 1e16 + 1 − 1e16 = 1 exactly; plain summation in f64 gives 0.
        let v = compensated_dot([(1e16, 1.0), (1.0, 1.0), (-1e16, 1.0)].into_iter());
        assert_eq!(v, 1.0);
    }
}
