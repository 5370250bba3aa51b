//! Information criteria AIC, AICc and BIC for least-squares fits.
//!
//! Gaussian errors, additive constants dropped (they cancel in every
//! comparison on the same rows). Sources: H. Akaike, IEEE Trans. Autom.
//! Control 19 (1974) 716–723; C. M. Hurvich & C.-L. Tsai, Biometrika 76
//! (1989) 297–307 for AICc; G. Schwarz, Ann. Statist. 6 (1978) 461–464 for
//! BIC; least-squares forms as in K. P. Burnham & D. R. Anderson, *Model
//! Selection and Multimodel Inference*, 2nd ed., §2.2 (all from memory).
//! Conventions fixed by SPEC §13.

use super::StatsError;

/// How the error variance enters the likelihood.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum VarianceModel {
    /// σ² estimated from the residuals (`uncertainty = "residuals"`):
    /// K = p + 1 estimated quantities.
    Estimated,
    /// σ known through the weights `w = 1/σ²` (`uncertainty = "weights"`):
    /// K = p, and `SSR_w` is the χ² of the fit.
    Known,
}

/// AIC, AICc and BIC of one fit.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct InformationCriteria {
    /// Number of estimated quantities K.
    pub k: usize,
    /// Akaike's information criterion.
    pub aic: f64,
    /// Small-sample corrected AIC; `None` when n ≤ K + 1 (not defined).
    pub aicc: Option<f64>,
    /// Schwarz's Bayesian information criterion.
    pub bic: f64,
}

/// Information criteria from the weighted residual sum of squares
/// `ssr_w = Σw·e²`, n observations and p fitted parameters.
///
/// - `Estimated`: K = p + 1, `AIC = n·ln(SSR_w/n) + 2K`,
///   `BIC = n·ln(SSR_w/n) + K·ln n`.
/// - `Known`: K = p, `AIC = χ² + 2p`, `BIC = χ² + p·ln n` (χ² = SSR_w; the
///   −2 ln L of known-σ Gaussian errors up to a constant — the BIC form is
///   our choice, SPEC §13 gives only the AIC).
/// - Both: `AICc = AIC + 2K(K + 1)/(n − K − 1)`, undefined when n ≤ K + 1.
///
/// `ssr_w` must be finite and ≥ 0; with `Estimated` a zero SSR gives
/// `−∞` (a perfect fit), which is returned as is.
pub fn information_criteria(
    ssr_w: f64,
    n: usize,
    p: usize,
    model: VarianceModel,
) -> Result<InformationCriteria, StatsError> {
    if !(ssr_w.is_finite() && ssr_w >= 0.0) {
        return Err(StatsError::InvalidArgument {
            what: "SSR",
            reason: format!("must be finite and non-negative, got {ssr_w}"),
        });
    }
    if n == 0 {
        return Err(StatsError::InvalidArgument {
            what: "n",
            reason: "no observations".into(),
        });
    }
    let nf = n as f64;
    let (k, aic, bic) = match model {
        VarianceModel::Estimated => {
            let k = p + 1;
            let core = nf * (ssr_w / nf).ln();
            (k, core + 2.0 * k as f64, core + k as f64 * nf.ln())
        }
        VarianceModel::Known => (p, ssr_w + 2.0 * p as f64, ssr_w + p as f64 * nf.ln()),
    };
    let kf = k as f64;
    let aicc = (n > k + 1).then(|| aic + 2.0 * kf * (kf + 1.0) / (nf - kf - 1.0));
    Ok(InformationCriteria { k, aic, aicc, bic })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn estimated_variance_counts_sigma_as_a_parameter() {
        // n = 10, p = 2, SSR = 10: ln(1) = 0, so AIC = 2·3 = 6,
        // AICc = 6 + 2·3·4/6 = 10, BIC = 3·ln 10 (by hand).
        let ic = information_criteria(10.0, 10, 2, VarianceModel::Estimated).unwrap();
        assert_eq!(ic.k, 3);
        assert!((ic.aic - 6.0).abs() < 1e-12);
        assert!((ic.aicc.unwrap() - 10.0).abs() < 1e-12);
        assert!((ic.bic - 3.0 * 10f64.ln()).abs() < 1e-12);
    }

    #[test]
    fn known_variance_uses_chi_squared() {
        // χ² = 12.5, p = 3, n = 20: AIC = 18.5, AICc = 18.5 + 2·3·4/16 (by hand).
        let ic = information_criteria(12.5, 20, 3, VarianceModel::Known).unwrap();
        assert!((ic.aic - 18.5).abs() < 1e-12);
        assert!((ic.aicc.unwrap() - (18.5 + 24.0 / 16.0)).abs() < 1e-12);
    }

    #[test]
    fn aicc_is_undefined_for_too_few_points() {
        // n = 4, p = 2: K = 3, n ≤ K + 1.
        let ic = information_criteria(1.0, 4, 2, VarianceModel::Estimated).unwrap();
        assert_eq!(ic.aicc, None);
        assert!(information_criteria(f64::NAN, 4, 2, VarianceModel::Estimated).is_err());
    }
}
