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
//!   the normal equations;
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

/// Leverage `h_i = ‖Q_i‖²` of the rows of the weighted design `a` (n × p,
/// n ≥ p) from its Householder thin QR factorization. Columns are scaled to
/// unit norm first (leverage does not change under column scaling); rank is
/// judged on the scaled factor with tolerance `max(n, p)·ε·max|R_jj|`
/// (SPEC §13).
pub fn leverage(a: &DMatrix<f64>) -> Result<Vec<f64>, StatsError> {
    let (n, p) = a.shape();
    if n < p || p == 0 {
        return Err(StatsError::InvalidArgument {
            what: "design matrix",
            reason: format!("{n} rows and {p} columns; at least one column and n ≥ p needed"),
        });
    }
    if let Some(index) = a.iter().position(|v| !v.is_finite()) {
        return Err(StatsError::NonFinite {
            what: "design matrix",
            index,
        });
    }
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
    let h = leverage(a)?;
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
