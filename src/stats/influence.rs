//! Leverage, standardized and studentized residuals and Cook's distance of a
//! (weighted) least-squares fit.
//!
//! The caller passes the weighted Jacobian (for a linear model the weighted
//! design matrix) `A = W½J`, n × p, evaluated at the solution. For a nonlinear
//! fit these are the usual linear-approximation figures at the solution
//! (Bates & Watts 1988, §2.3 — from memory). Flag, never drop (SPEC §6).
//!
//! Formulas (Draper & Smith, *Applied Regression Analysis*, 3rd ed., ch. 8;
//! Cook & Weisberg, *Residuals and Influence in Regression*, 1982 — from
//! memory), with Pearson residuals `√w·e`:
//! - leverage `h = diag(A(AᵀA)⁻¹Aᵀ) = diag(W½J(JᵀWJ)⁻¹JᵀW½)`, computed from
//!   the thin QR factorization `A = QR` as `h_i = ‖row i of Q‖²`, never from
//!   the normal equations. Below [`LEVERAGE_FROM_R_FROM`] rows Q is formed
//!   explicitly; from there on only R is computed (in blocks of rows, Q never
//!   stored) and `h_i = ‖R⁻ᵀ·a_iᵀ‖²`, a_i row i of A, by the exact identity
//!   `Q = A·R⁻¹` of the thin QR (Golub & Van Loan, *Matrix Computations*,
//!   3rd ed., §5.2 on the thin QR and §5.3 on least squares — from memory).
//!   Its rounding error grows with cond(R), which column scaling keeps small
//!   for calibration designs; the explicit-Q path keeps every reference test
//!   on its former figures;
//! - standardized (internally studentized) `r_i = √w_i·e_i / (s·√(1 − h_i))`;
//! - externally studentized `t_i = √w_i·e_i / (s_(i)·√(1 − h_i))` with the
//!   leave-one-out variance `s_(i)² = (Σw·e² − w_i·e_i²/(1 − h_i))/(n − p − 1)`;
//! - Cook's distance `D_i = r_i²·h_i / (p·(1 − h_i))`.

use nalgebra::DMatrix;

use super::{StatsError, ensure_finite, ensure_len};

/// Below this, `1 − h` counts as zero: the point alone determines its fitted
/// value and its standardized residual and Cook's distance are undefined.
pub const LEVERAGE_ONE_TOL: f64 = 1e-12;

/// Per-observation influence figures, in row order.
#[derive(Debug, Clone, PartialEq)]
pub struct Influence {
    /// Leverage `h_i`, 0 ≤ h ≤ 1, Σh = p.
    pub leverage: Vec<f64>,
    /// Pearson residuals `√w_i·e_i`.
    pub pearson: Vec<f64>,
    /// Standardized residuals `r_i`; `None` where `1 − h_i` is zero.
    pub standardized: Vec<Option<f64>>,
    /// Externally studentized residuals `t_i`; `None` where `1 − h_i` is zero,
    /// where `n − p − 1 ≤ 0`, or where the leave-one-out variance is zero.
    pub studentized: Vec<Option<f64>>,
    /// Cook's distance `D_i`; `None` where `1 − h_i` is zero.
    pub cooks_distance: Vec<Option<f64>>,
}

/// Rows from which leverage is computed from R alone (see the module docs): the
/// explicit Q of a million rows and three columns is a 24 MB matrix written and
/// read once more, besides the 24 MB copy its factorization works on. The
/// solver switches its own QR at the same size (`fit::lm::STREAMING_QR_FROM`).
pub const LEVERAGE_FROM_R_FROM: usize = 50_000;

/// Rows per block of the R-only factorization: the (p + block) × p buffer
/// stays in cache for the few columns of calibration models (common practice,
/// not tuned).
const R_BLOCK: usize = 256;

/// Leverage `h_i = ‖Q_i‖²` of the rows of the weighted design `a` (n × p,
/// n ≥ p) from its Householder thin QR factorization. Columns are scaled to
/// unit norm first (leverage does not change under column scaling); rank is
/// judged on the scaled factor with tolerance `max(n, p)·ε·max|R_jj|`
/// (SPEC §13). From [`LEVERAGE_FROM_R_FROM`] rows on, `h_i = ‖R⁻ᵀa_iᵀ‖²`.
pub fn leverage(a: &DMatrix<f64>) -> Result<Vec<f64>, StatsError> {
    let (n, p) = a.shape();
    if n < LEVERAGE_FROM_R_FROM {
        check_design(n, p)?;
        if let Some(index) = a.iter().position(|v| !v.is_finite()) {
            return Err(StatsError::NonFinite {
                what: "design matrix",
                index,
            });
        }
        return leverage_explicit_q(a);
    }
    let columns: Vec<&[f64]> = (0..p).map(|j| &a.as_slice()[j * n..(j + 1) * n]).collect();
    leverage_of_columns(&columns, None)
}

fn check_design(n: usize, p: usize) -> Result<(), StatsError> {
    if n < p || p == 0 {
        return Err(StatsError::InvalidArgument {
            what: "design matrix",
            reason: format!("{n} rows and {p} columns; at least one column and n ≥ p needed"),
        });
    }
    Ok(())
}

/// Leverage of the design `A = diag(√w)·[c₀ … c_{p−1}]` given by its columns
/// (each of length n) and optional weights `w` (`None`: all 1), without
/// forming A for large n. Same figures as [`leverage`] of that matrix.
pub fn leverage_of_columns(
    columns: &[&[f64]],
    weights: Option<&[f64]>,
) -> Result<Vec<f64>, StatsError> {
    let p = columns.len();
    let n = columns.first().map_or(0, |c| c.len());
    check_design(n, p)?;
    for c in columns {
        ensure_len("design column", c, n)?;
    }
    if let Some(w) = weights {
        ensure_len("weights", w, n)?;
    }
    if n >= LEVERAGE_FROM_R_FROM {
        // It checks finiteness in its pass over the column norms.
        return leverage_from_r(columns, weights);
    }
    if let Some(index) = first_non_finite(columns, weights, 0..p) {
        return Err(StatsError::NonFinite {
            what: "design matrix",
            index,
        });
    }
    let row_scale = |i: usize| weights.map_or(1.0, |w| w[i].sqrt());
    let a = DMatrix::from_fn(n, p, |i, j| columns[j][i] * row_scale(i));
    leverage_explicit_q(&a)
}

/// Column-major index (as `DMatrix::iter` counts) of the first non-finite entry of
/// `A = diag(√w)·[c₀ …]` among the columns `cols`.
fn first_non_finite(
    columns: &[&[f64]],
    weights: Option<&[f64]>,
    cols: std::ops::Range<usize>,
) -> Option<usize> {
    let n = columns.first().map_or(0, |c| c.len());
    let row_scale = |i: usize| weights.map_or(1.0, |w| w[i].sqrt());
    cols.into_iter().find_map(|j| {
        let c = columns.get(j)?;
        (0..n)
            .position(|i| !(c[i] * row_scale(i)).is_finite())
            .map(|i| j * n + i)
    })
}

/// The explicit-Q path of [`leverage`]; `a` is finite with n ≥ p ≥ 1.
fn leverage_explicit_q(a: &DMatrix<f64>) -> Result<Vec<f64>, StatsError> {
    let (n, p) = a.shape();
    let mut scaled = a.clone();
    for mut col in scaled.column_iter_mut() {
        let norm = col.norm();
        if norm > 0.0 {
            col /= norm;
        }
    }
    let qr = scaled.qr();
    let r = qr.r();
    let diag_max = r.diagonal().iter().fold(0.0f64, |m, v| m.max(v.abs()));
    let tol = n.max(p) as f64 * f64::EPSILON * diag_max;
    let rank = r.diagonal().iter().filter(|v| v.abs() > tol).count();
    if rank < p || diag_max == 0.0 {
        return Err(StatsError::RankDeficient { rank, columns: p });
    }
    let q = qr.q();
    Ok(q.row_iter().map(|row| row.norm_squared()).collect())
}

/// The R-only path of [`leverage_of_columns`] (inputs checked there: n ≥ p ≥ 1,
/// equal lengths; a non-finite entry is found here, in the pass over the column norms). Columns of A are scaled to unit norm, R of
/// the scaled matrix is taken by Householder reflections over blocks of
/// [`R_BLOCK`] rows stacked under the current R (the sequential TSQR of
/// Demmel, Grigori, Hoemmen & Langou, SIAM J. Sci. Comput. 34(1), 2012 —
/// backward stable like one Householder QR), and `h_i = ‖z‖²` with
/// `Rᵀz = ã_iᵀ` solved by forward substitution. Sequential, so the result
/// does not depend on the number of threads.
fn leverage_from_r(columns: &[&[f64]], weights: Option<&[f64]>) -> Result<Vec<f64>, StatsError> {
    let p = columns.len();
    let n = columns.first().map_or(0, |c| c.len());
    // √w of rows lo..lo + len (1 without weights: multiplying by 1 is exact).
    let fill_scale = |scale: &mut Vec<f64>, lo: usize, len: usize| {
        scale.clear();
        match weights {
            Some(w) => scale.extend(w[lo..lo + len].iter().map(|w| w.sqrt())),
            None => scale.resize(len, 1.0),
        }
    };
    let mut scale = Vec::with_capacity(R_BLOCK);
    // Scale factors 1/‖A_j‖ (a zero column keeps factor 1 and makes R singular).
    let mut sums = vec![0.0f64; p];
    let mut lo = 0;
    while lo < n {
        let len = R_BLOCK.min(n - lo);
        fill_scale(&mut scale, lo, len);
        for (sum, c) in sums.iter_mut().zip(columns) {
            for (v, s) in c[lo..lo + len].iter().zip(&scale) {
                let a = v * s;
                *sum += a * a;
            }
        }
        lo += len;
    }
    let mut inv_norm = Vec::with_capacity(p);
    for (j, (c, sum)) in columns.iter().zip(&sums).enumerate() {
        // A non-finite entry makes its column's sum non-finite; earlier columns have none.
        if !sum.is_finite()
            && let Some(index) = first_non_finite(columns, weights, j..j + 1)
        {
            return Err(StatsError::NonFinite {
                what: "design matrix",
                index,
            });
        }
        let norm = if sum.is_finite() {
            sum.sqrt()
        } else {
            // Entries so large that their squares overflow: the norm scaled by the
            // largest magnitude (rare).
            let a = |i: usize| c[i] * weights.map_or(1.0, |w| w[i].sqrt());
            let big = (0..n).fold(0.0f64, |m, i| m.max(a(i).abs()));
            big * (0..n).map(|i| (a(i) / big).powi(2)).sum::<f64>().sqrt()
        };
        inv_norm.push(if norm > 0.0 { 1.0 / norm } else { 1.0 });
    }
    let ld = p + R_BLOCK;
    // Column-major (p + block) × p: rows 0..p hold R, rows p.. the next block.
    let mut work = vec![0.0f64; ld * p];
    // The block steps of the solver's streaming QR (same kernel, AVX2 when available).
    crate::vector::vectorized(
        n,
        #[inline(always)]
        || {
            let mut lo = 0;
            while lo < n {
                let len = R_BLOCK.min(n - lo);
                let m = p + len;
                fill_scale(&mut scale, lo, len);
                for (j, c) in columns.iter().enumerate() {
                    let dest = &mut work[j * ld + p..j * ld + m];
                    for ((d, v), s) in dest.iter_mut().zip(&c[lo..lo + len]).zip(&scale) {
                        *d = v * s * inv_norm[j];
                    }
                }
                crate::fit::dense::reduce_stacked(&mut work, ld, p, p, m);
                lo += len;
            }
        },
    );
    // R: column k of the upper triangle is work[k·ld .. k·ld + k + 1].
    let r_col = |k: usize| &work[k * ld..k * ld + k + 1];
    let diag_max = (0..p).fold(0.0f64, |m, k| m.max(r_col(k)[k].abs()));
    let tol = n.max(p) as f64 * f64::EPSILON * diag_max;
    let rank = (0..p).filter(|&k| r_col(k)[k].abs() > tol).count();
    if rank < p || diag_max == 0.0 {
        return Err(StatsError::RankDeficient { rank, columns: p });
    }
    // Forward substitution Rᵀz = ã for a block of rows at a time, one unknown zₖ over the
    // whole block per step: each row sees the same operations in the same order as alone.
    let mut h = vec![0.0f64; n];
    let mut z = vec![0.0f64; p * R_BLOCK];
    let mut lo = 0;
    while lo < n {
        let len = R_BLOCK.min(n - lo);
        fill_scale(&mut scale, lo, len);
        for (k, c) in columns.iter().enumerate() {
            let rk = r_col(k);
            let (done, rest) = z.split_at_mut(k * R_BLOCK);
            let zk = &mut rest[..len];
            for ((zi, v), s) in zk.iter_mut().zip(&c[lo..lo + len]).zip(&scale) {
                *zi = v * s * inv_norm[k];
            }
            for (j, rjk) in rk[..k].iter().enumerate() {
                let zj = &done[j * R_BLOCK..j * R_BLOCK + len];
                for (zi, zji) in zk.iter_mut().zip(zj) {
                    *zi -= rjk * zji;
                }
            }
            let rkk = rk[k];
            for (hi, zi) in h[lo..lo + len].iter_mut().zip(zk.iter_mut()) {
                *zi /= rkk;
                *hi += *zi * *zi;
            }
        }
        lo += len;
    }
    Ok(h)
}

/// Influence figures for a fit with weighted design `a` (n × p), residuals
/// `e = y − ŷ` in response units, weights `w` (`None`: all 1) and residual
/// standard error `s` (SPEC §6: `s = √(Σw·e²/(n − p))`; pass `s = 1` for
/// known σ). See the module docs for the formulas.
pub fn influence(
    a: &DMatrix<f64>,
    residuals: &[f64],
    weights: Option<&[f64]>,
    s: f64,
) -> Result<Influence, StatsError> {
    let (n, p) = a.shape();
    figures(n, p, residuals, weights, s, || leverage(a))
}

/// [`influence`] of the design `A = diag(√w)·[c₀ … c_{p−1}]` given by the
/// unweighted columns (for a fit, the columns of the Jacobian J of the free
/// parameters) and the weights `w`, without forming A for large n (see
/// [`leverage_of_columns`]).
pub fn influence_of_columns(
    columns: &[&[f64]],
    residuals: &[f64],
    weights: Option<&[f64]>,
    s: f64,
) -> Result<Influence, StatsError> {
    figures(
        residuals.len(),
        columns.len(),
        residuals,
        weights,
        s,
        || leverage_of_columns(columns, weights),
    )
}

/// The figures of [`influence`] from the leverage `h` (computed once the
/// other inputs are checked).
fn figures(
    n: usize,
    p: usize,
    residuals: &[f64],
    weights: Option<&[f64]>,
    s: f64,
    h: impl FnOnce() -> Result<Vec<f64>, StatsError>,
) -> Result<Influence, StatsError> {
    ensure_len("residuals", residuals, n)?;
    ensure_finite("residuals", residuals)?;
    let ones;
    let w = match weights {
        Some(w) => {
            ensure_len("weights", w, n)?;
            ensure_finite("weights", w)?;
            if let Some(i) = w.iter().position(|&v| v < 0.0) {
                return Err(StatsError::InvalidArgument {
                    what: "weights",
                    reason: format!("weight at index {i} is negative"),
                });
            }
            w
        }
        None => {
            ones = vec![1.0; n];
            &ones[..]
        }
    };
    if !(s.is_finite() && s > 0.0) {
        return Err(StatsError::InvalidArgument {
            what: "s",
            reason: format!("residual standard error must be positive and finite, got {s}"),
        });
    }
    let h = h()?;
    ensure_len("leverage", &h, n)?;
    let pearson: Vec<f64> = residuals
        .iter()
        .zip(w)
        .map(|(e, wi)| wi.sqrt() * e)
        .collect();
    let ssr_w: f64 = pearson.iter().map(|r| r * r).sum();
    let dof_loo = n as f64 - p as f64 - 1.0;
    let mut standardized = Vec::with_capacity(n);
    let mut studentized = Vec::with_capacity(n);
    let mut cooks = Vec::with_capacity(n);
    for (&hi, &ri) in h.iter().zip(&pearson) {
        let one_minus_h = 1.0 - hi;
        if one_minus_h <= LEVERAGE_ONE_TOL {
            standardized.push(None);
            studentized.push(None);
            cooks.push(None);
            continue;
        }
        let r = ri / (s * one_minus_h.sqrt());
        standardized.push(Some(r));
        cooks.push(Some(r * r * hi / (p as f64 * one_minus_h)));
        let s2_loo = if dof_loo > 0.0 {
            (ssr_w - ri * ri / one_minus_h) / dof_loo
        } else {
            0.0
        };
        studentized.push((s2_loo > 0.0).then(|| ri / (s2_loo.sqrt() * one_minus_h.sqrt())));
    }
    Ok(Influence {
        leverage: h,
        pearson,
        standardized,
        studentized,
        cooks_distance: cooks,
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn leverage_of_a_straight_line_has_the_closed_form() {
        // h_i = 1/n + (x_i − x̄)²/Sxx for y = a + b·x (Draper & Smith ch. 8).
        let x = [1.0, 2.0, 4.0, 7.0, 11.0];
        let a = DMatrix::from_fn(5, 2, |i, j| if j == 0 { 1.0 } else { x[i] });
        let h = leverage(&a).unwrap();
        let mean = x.iter().sum::<f64>() / 5.0;
        let sxx: f64 = x.iter().map(|v| (v - mean).powi(2)).sum();
        for (hi, xi) in h.iter().zip(x) {
            let exact = 0.2 + (xi - mean).powi(2) / sxx;
            assert!((hi - exact).abs() < 1e-14, "{hi} vs {exact}");
        }
        assert!((h.iter().sum::<f64>() - 2.0).abs() < 1e-14);
    }

    /// A 60,000-row weighted design of an invented decay-sensor calibration:
    /// columns 1, t, exp(−0.3·t), t² for t in [0, 10], weights 1/(1 + 0.1·t)².
    fn decay_design(n: usize) -> (Vec<Vec<f64>>, Vec<f64>) {
        let t: Vec<f64> = (0..n).map(|i| 10.0 * i as f64 / (n - 1) as f64).collect();
        let columns = vec![
            vec![1.0; n],
            t.clone(),
            t.iter().map(|t| (-0.3 * t).exp()).collect(),
            t.iter().map(|t| t * t).collect(),
        ];
        let w = t.iter().map(|t| 1.0 / (1.0 + 0.1 * t).powi(2)).collect();
        (columns, w)
    }

    #[test]
    fn leverage_from_r_agrees_with_the_explicit_q_of_the_same_design() {
        let n = 60_000;
        assert!(n >= LEVERAGE_FROM_R_FROM);
        let (columns, w) = decay_design(n);
        let cols: Vec<&[f64]> = columns.iter().map(Vec::as_slice).collect();
        let from_r = leverage_of_columns(&cols, Some(&w)).unwrap();
        let a = DMatrix::from_fn(n, cols.len(), |i, j| cols[j][i] * w[i].sqrt());
        let explicit = leverage_explicit_q(&a).unwrap();
        // The same matrix through the public entry takes the R path too.
        assert_eq!(leverage(&a).unwrap(), from_r);
        // Tolerance: both paths are backward stable and differ by rounding of order
        // ε·cond(Ã) relative to the largest leverage. cond(Ã) of the unit-column design is
        // 117 (numpy.linalg.cond, computed once); the observed worst difference is 4e-12 of
        // h_max, the bound 1e-10 allows the usual factor of growth (common practice).
        let h_max = explicit.iter().fold(0.0f64, |m, h| m.max(*h));
        let worst = from_r
            .iter()
            .zip(&explicit)
            .map(|(a, b)| (a - b).abs())
            .fold(0.0f64, f64::max);
        assert!(worst <= 1e-10 * h_max, "worst {worst:e}, h_max {h_max:e}");
        // Σh = p (trace of the projection).
        let trace: f64 = from_r.iter().sum();
        assert!((trace - 4.0).abs() < 1e-9, "{trace}");
    }

    #[test]
    fn influence_of_columns_equals_influence_of_the_weighted_matrix_below_the_switch() {
        let n = 200;
        let (columns, w) = decay_design(n);
        let cols: Vec<&[f64]> = columns.iter().map(Vec::as_slice).collect();
        let a = DMatrix::from_fn(n, cols.len(), |i, j| cols[j][i] * w[i].sqrt());
        let e: Vec<f64> = (0..n)
            .map(|i| ((i * 37 % 11) as f64 - 5.0) * 0.01)
            .collect();
        let by_matrix = influence(&a, &e, Some(&w), 0.03).unwrap();
        let by_columns = influence_of_columns(&cols, &e, Some(&w), 0.03).unwrap();
        assert_eq!(by_matrix, by_columns);
    }

    #[test]
    fn a_non_finite_entry_is_named_by_its_column_major_index_on_both_paths() {
        for n in [100, LEVERAGE_FROM_R_FROM] {
            let (mut columns, w) = decay_design(n);
            columns[2][7] = f64::NAN;
            columns[3][3] = f64::INFINITY;
            let cols: Vec<&[f64]> = columns.iter().map(Vec::as_slice).collect();
            let err = leverage_of_columns(&cols, Some(&w)).unwrap_err();
            assert!(
                matches!(err, StatsError::NonFinite { index, .. } if index == 2 * n + 7),
                "{n}: {err:?}"
            );
        }
    }

    #[test]
    fn dependent_columns_are_rank_deficient_on_the_r_path_too() {
        let (mut columns, _) = decay_design(LEVERAGE_FROM_R_FROM);
        columns[3] = columns[1].iter().map(|t| -2.5 * t).collect();
        let cols: Vec<&[f64]> = columns.iter().map(Vec::as_slice).collect();
        assert!(matches!(
            leverage_of_columns(&cols, None),
            Err(StatsError::RankDeficient {
                rank: 3,
                columns: 4
            })
        ));
    }

    #[test]
    fn dependent_columns_are_rank_deficient() {
        let a = DMatrix::from_fn(4, 2, |i, _| i as f64 + 1.0);
        assert!(matches!(
            leverage(&a),
            Err(StatsError::RankDeficient {
                rank: 1,
                columns: 2
            })
        ));
    }

    #[test]
    fn a_point_with_leverage_one_gets_no_standardized_residual() {
        // Two columns, the second nonzero only in row 2: that row is fitted
        // exactly, h = 1.
        let a = DMatrix::from_row_slice(4, 2, &[1.0, 0.0, 1.0, 0.0, 1.0, 1.0, 1.0, 0.0]);
        let inf = influence(&a, &[0.5, -0.5, 0.0, 0.1], None, 0.3).unwrap();
        assert!((inf.leverage[2] - 1.0).abs() < 1e-12);
        assert_eq!(inf.standardized[2], None);
        assert_eq!(inf.cooks_distance[2], None);
        assert!(inf.standardized[0].is_some());
    }

    #[test]
    fn mismatched_lengths_and_bad_weights_are_errors() {
        let a = DMatrix::from_fn(3, 1, |_, _| 1.0);
        assert!(matches!(
            influence(&a, &[1.0, 2.0], None, 1.0),
            Err(StatsError::LengthMismatch { .. })
        ));
        assert!(matches!(
            influence(&a, &[1.0, 2.0, 3.0], Some(&[1.0, -1.0, 1.0]), 1.0),
            Err(StatsError::InvalidArgument { .. })
        ));
        assert!(matches!(
            influence(&a, &[1.0, 2.0, 3.0], None, 0.0),
            Err(StatsError::InvalidArgument { .. })
        ));
    }
}
