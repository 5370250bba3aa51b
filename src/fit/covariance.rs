//! Parameter covariance, standard errors, confidence intervals, bands and the summary
//! statistics of a fit, in the original space of the model.
//!
//! Notation: n observations, p estimated parameters, weights wᵢ (1 when unweighted),
//! residuals eᵢ = yᵢ − ŷᵢ, SSR = Σ wᵢ·eᵢ², J the n × p Jacobian ∂ŷ/∂θ at the solution
//! (the design matrix X for a linear model). Sources, all from memory: Draper & Smith,
//! *Applied Regression Analysis*, 3rd ed. (1998), ch. 2, 5 and 24; Seber & Wild, *Nonlinear
//! Regression* (1989), §2.1 and §5.1; Bates & Watts, *Nonlinear Regression Analysis and Its
//! Applications* (1988), §2.3.
//!
//! Two uncertainty modes (SPEC §2, §13):
//! - [`UncertaintyMode::Residuals`]: the weights are relative; σ² is estimated by
//!   s² = SSR/(n − p) and Cov(θ) = s²·(JᵀWJ)⁻¹; intervals use Student's t with n − p
//!   degrees of freedom.
//! - [`UncertaintyMode::Weights`]: wᵢ = 1/σᵢ² with known σᵢ; Cov(θ) = (JᵀWJ)⁻¹ unscaled,
//!   intervals use normal quantiles, and χ² = SSR is tested against χ²(n − p).

use std::fmt;

use nalgebra::DMatrix;
use statrs::distribution::{ChiSquared, ContinuousCDF, Normal, StudentsT};

use super::dense::{self, ScaledQrError};

/// How the parameter uncertainty is scaled (SPEC §2 `uncertainty`).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub enum UncertaintyMode {
    /// Weights are relative; covariance scaled by s² = SSR/(n − p); t quantiles.
    #[default]
    Residuals,
    /// Weights are 1/σ² of known σ; covariance unscaled; normal quantiles; χ² test.
    Weights,
}

/// Whether R² was computed about the (weighted) mean or about zero.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum RSquaredKind {
    /// 1 − Σw·e² / Σw·(y − ȳ_w)², for models with a constant term.
    Centred,
    /// 1 − Σw·e² / Σw·y², for models without a constant term (regression through the
    /// origin) — the NIST StRD convention.
    Uncentred,
}

/// χ² goodness-of-fit test (uncertainty mode "weights").
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct ChiSquareTest {
    /// χ² = Σ wᵢ·eᵢ² = SSR with wᵢ = 1/σᵢ².
    pub statistic: f64,
    pub dof: usize,
    /// Upper-tail probability P(χ²(dof) ≥ statistic).
    pub p_value: f64,
}

/// Summary statistics of a fit.
#[derive(Debug, Clone, PartialEq)]
pub struct FitStatistics {
    pub n: usize,
    pub p: usize,
    /// n − p.
    pub dof: usize,
    /// Σ wᵢ·eᵢ².
    pub ssr: f64,
    /// R² (see [`RSquaredKind`]); None when the total sum of squares is zero.
    pub r_squared: Option<f64>,
    pub r_squared_kind: RSquaredKind,
    /// Adjusted R²: 1 − (1 − R²)·(n − 1)/(n − p) centred, 1 − (1 − R²)·n/(n − p) uncentred
    /// (the total sum of squares has n − 1 resp. n degrees of freedom; Draper & Smith §5.2,
    /// from memory).
    pub adjusted_r_squared: Option<f64>,
    /// Standard error of the estimate s = √(SSR/(n − p)) (with weights: √reduced χ²).
    pub residual_sd: f64,
    /// Present in uncertainty mode "weights".
    pub chi_square: Option<ChiSquareTest>,
}

/// Parameter uncertainty of a fit.
#[derive(Debug, Clone, PartialEq)]
pub struct ParameterUncertainty {
    pub mode: UncertaintyMode,
    /// Confidence level of the intervals and bands (e.g. 0.95).
    pub confidence: f64,
    /// t_{1−α/2}(n − p) in mode "residuals", z_{1−α/2} in mode "weights".
    pub quantile: f64,
    pub dof: usize,
    /// σ² of a unit-weight observation: s² (residuals) or 1 (weights).
    pub unit_variance: f64,
    /// Cov(θ), p × p. Rows and columns of parameters that are not estimated (at an active
    /// bound) are zero: those parameters are treated as fixed.
    pub covariance: DMatrix<f64>,
    /// false for a parameter at an active bound: it has no standard error.
    pub estimated: Vec<bool>,
    /// √Cov(θ)ⱼⱼ.
    pub std_errors: Vec<Option<f64>>,
    /// SEⱼ/|θⱼ|; None when θⱼ = 0 or not estimated.
    pub rel_std_errors: Vec<Option<f64>>,
    /// Cov(θ)ᵢⱼ/(SEᵢ·SEⱼ); zero in rows and columns of parameters not estimated.
    pub correlation: DMatrix<f64>,
    /// θⱼ ± quantile·SEⱼ.
    pub intervals: Vec<Option<(f64, f64)>>,
    /// 2-norm condition number κ of the column-scaled W½J of the estimated parameters, when
    /// the uncertainty was computed from a Jacobian: about log₁₀ κ of the ~16 significant
    /// digits of the parameters can be lost to rounding (Golub & Van Loan §5.3, from memory).
    pub condition: Option<f64>,
}

/// Pointwise confidence and prediction band at one point x₀.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Band {
    pub fitted: f64,
    /// √(gᵀ·C·g).
    pub se_fit: f64,
    /// ŷ ± quantile·√(gᵀ·C·g).
    pub confidence: (f64, f64),
    /// √(gᵀ·C·g + σ²/(m·w₀)) when a new reading was described.
    pub se_prediction: Option<f64>,
    /// ŷ ± quantile·√(gᵀ·C·g + σ²/(m·w₀)).
    pub prediction: Option<(f64, f64)>,
}

/// A future reading for the prediction band: the mean of `m` readings, each of weight `w0`
/// (w₀ = 1 unweighted; w₀ = 1/σ₀² with known σ₀).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct NewReading {
    pub weight: f64,
    pub count: u32,
}

/// Why uncertainty or statistics could not be computed.
#[derive(Debug, Clone, PartialEq)]
#[non_exhaustive]
pub enum CovarianceError {
    DimensionMismatch {
        what: &'static str,
        expected: usize,
        found: usize,
    },
    /// Fewer than p + 1 observations: no degrees of freedom for s².
    NoDegreesOfFreedom { n: usize, p: usize },
    /// Confidence level outside (0, 1).
    InvalidConfidence(f64),
    /// NaN or infinity in an input (0-based row).
    NonFinite { what: &'static str, row: usize },
    /// Negative weight, or all weights zero.
    InvalidWeights(String),
    /// The parameter has no effect on the model at the solution (zero Jacobian column).
    NoEffect { index: usize, name: String },
    /// Parameters that cannot be separated at the solution (rank tolerance
    /// max(n,p)·ε·σ_max on the column-scaled W½J).
    Dependent {
        parameters: Vec<(usize, String)>,
        condition: f64,
    },
    /// Band inputs: the gradient length, or a non-positive weight / zero count.
    InvalidBandInput(String),
}

impl fmt::Display for CovarianceError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            CovarianceError::DimensionMismatch {
                what,
                expected,
                found,
            } => {
                write!(f, "{what} has {found} entries, expected {expected}")
            }
            CovarianceError::NoDegreesOfFreedom { n, p } => write!(
                f,
                "{n} observations for {p} parameters leave no degrees of freedom; at least {} are needed",
                p + 1
            ),
            CovarianceError::InvalidConfidence(c) => {
                write!(
                    f,
                    "confidence level {c} must lie strictly between 0 and 1 (e.g. 0.95)"
                )
            }
            CovarianceError::NonFinite { what, row } => {
                write!(f, "{what} is not finite at row {}", row + 1)
            }
            CovarianceError::InvalidWeights(m) => f.write_str(m),
            CovarianceError::NoEffect { index, name } => write!(
                f,
                "parameter {} ({name}) has no effect on the model at the solution, so it has no \
                 standard error; fix it or remove it",
                index + 1
            ),
            CovarianceError::Dependent {
                parameters,
                condition,
            } => {
                let list: Vec<String> = parameters
                    .iter()
                    .map(|(i, n)| format!("{} ({n})", i + 1))
                    .collect();
                write!(
                    f,
                    "parameters {} cannot be separated by these data at the solution \
                     (condition number {condition:.3e} of the scaled Jacobian); fix one of them \
                     or add data that distinguishes them",
                    list.join(", ")
                )
            }
            CovarianceError::InvalidBandInput(m) => f.write_str(m),
        }
    }
}

impl std::error::Error for CovarianceError {}

fn check_confidence(confidence: f64) -> Result<(), CovarianceError> {
    if confidence > 0.0 && confidence < 1.0 {
        Ok(())
    } else {
        Err(CovarianceError::InvalidConfidence(confidence))
    }
}

fn check_weights(weights: Option<&[f64]>, n: usize) -> Result<(), CovarianceError> {
    if let Some(w) = weights {
        if w.len() != n {
            return Err(CovarianceError::DimensionMismatch {
                what: "weights",
                expected: n,
                found: w.len(),
            });
        }
        if let Some(row) = w.iter().position(|v| !v.is_finite()) {
            return Err(CovarianceError::NonFinite {
                what: "weight",
                row,
            });
        }
        if let Some(row) = w.iter().position(|v| *v < 0.0) {
            return Err(CovarianceError::InvalidWeights(format!(
                "weight at row {} is negative; weights must be ≥ 0",
                row + 1
            )));
        }
        if w.iter().all(|v| *v == 0.0) {
            return Err(CovarianceError::InvalidWeights(
                "all weights are zero".into(),
            ));
        }
    }
    Ok(())
}

/// Two-sided quantile for the mode: t_{1−α/2}(dof) or z_{1−α/2}, α = 1 − confidence.
///
/// Student's t and the normal distribution from `statrs`; the inverse CDF of t there is
/// computed through the inverse regularized incomplete beta function.
pub fn quantile(
    mode: UncertaintyMode,
    confidence: f64,
    dof: usize,
) -> Result<f64, CovarianceError> {
    check_confidence(confidence)?;
    let prob = 1.0 - (1.0 - confidence) / 2.0;
    match mode {
        UncertaintyMode::Residuals => {
            if dof == 0 {
                return Err(CovarianceError::NoDegreesOfFreedom { n: 0, p: 0 });
            }
            let t = StudentsT::new(0.0, 1.0, dof as f64)
                .map_err(|_| CovarianceError::NoDegreesOfFreedom { n: dof, p: 0 })?;
            Ok(t.inverse_cdf(prob))
        }
        UncertaintyMode::Weights => {
            #[allow(
                clippy::expect_used,
                reason = "invariant: N(0, 1) has valid parameters"
            )]
            let z = Normal::new(0.0, 1.0).expect("invariant: N(0, 1) is valid");
            Ok(z.inverse_cdf(prob))
        }
    }
}

/// Summary statistics of a fit in the original space of the model.
///
/// - SSR = Σ wᵢ·eᵢ², s = √(SSR/(n − p)) (Draper & Smith §1.3, from memory).
/// - R² = 1 − SSR/SST with SST = Σ wᵢ·(yᵢ − ȳ_w)², ȳ_w = Σwᵢyᵢ/Σwᵢ, when `has_constant`;
///   otherwise SST = Σ wᵢ·yᵢ² (uncentred; NIST StRD convention for regression through the
///   origin, SPEC §13).
/// - Mode "weights": χ² = SSR against χ²(n − p), p-value = upper tail (Bates & Watts §3.x,
///   from memory).
pub fn fit_statistics(
    y: &[f64],
    weights: Option<&[f64]>,
    fitted: &[f64],
    p: usize,
    has_constant: bool,
    mode: UncertaintyMode,
) -> Result<FitStatistics, CovarianceError> {
    let n = y.len();
    if fitted.len() != n {
        return Err(CovarianceError::DimensionMismatch {
            what: "fitted values",
            expected: n,
            found: fitted.len(),
        });
    }
    check_weights(weights, n)?;
    if n <= p {
        return Err(CovarianceError::NoDegreesOfFreedom { n, p });
    }
    if let Some(row) = y.iter().position(|v| !v.is_finite()) {
        return Err(CovarianceError::NonFinite {
            what: "response",
            row,
        });
    }
    if let Some(row) = fitted.iter().position(|v| !v.is_finite()) {
        return Err(CovarianceError::NonFinite {
            what: "fitted value",
            row,
        });
    }
    let w = |i: usize| weights.map_or(1.0, |w| w[i]);
    let dof = n - p;
    let ssr: f64 = (0..n).map(|i| w(i) * (y[i] - fitted[i]).powi(2)).sum();
    let sum_w: f64 = (0..n).map(w).sum();
    let sst = if has_constant {
        let mean = (0..n).map(|i| w(i) * y[i]).sum::<f64>() / sum_w;
        (0..n).map(|i| w(i) * (y[i] - mean).powi(2)).sum::<f64>()
    } else {
        (0..n).map(|i| w(i) * y[i] * y[i]).sum::<f64>()
    };
    let r_squared = (sst > 0.0).then(|| 1.0 - ssr / sst);
    let total_dof = if has_constant { n - 1 } else { n } as f64;
    let adjusted_r_squared = r_squared.map(|r2| 1.0 - (1.0 - r2) * total_dof / dof as f64);
    let chi_square = match mode {
        UncertaintyMode::Residuals => None,
        UncertaintyMode::Weights => {
            let dist = ChiSquared::new(dof as f64)
                .map_err(|_| CovarianceError::NoDegreesOfFreedom { n, p })?;
            Some(ChiSquareTest {
                statistic: ssr,
                dof,
                p_value: dist.sf(ssr),
            })
        }
    };
    Ok(FitStatistics {
        n,
        p,
        dof,
        ssr,
        r_squared,
        r_squared_kind: if has_constant {
            RSquaredKind::Centred
        } else {
            RSquaredKind::Uncentred
        },
        adjusted_r_squared,
        residual_sd: (ssr / dof as f64).sqrt(),
        chi_square,
    })
}

/// Inputs shared by both ways of building a [`ParameterUncertainty`].
#[derive(Debug, Clone, Copy)]
pub struct UncertaintySettings {
    pub mode: UncertaintyMode,
    /// Confidence level, strictly between 0 and 1.
    pub confidence: f64,
}

impl Default for UncertaintySettings {
    /// Mode "residuals", confidence 0.95 (the SPEC §2 defaults).
    fn default() -> Self {
        UncertaintySettings {
            mode: UncertaintyMode::Residuals,
            confidence: 0.95,
        }
    }
}

/// Parameter uncertainty from the Jacobian J = ∂ŷ/∂θ at the solution (unweighted; the design
/// matrix for a linear model).
///
/// Cov(θ) = σ²·(JᵀWJ)⁻¹ with σ² = s² = SSR/(n − p) (mode "residuals") or 1 (mode "weights")
/// (Seber & Wild §2.1; Bates & Watts §2.3 — from memory). (JᵀWJ)⁻¹ comes from a Householder
/// QR of the column-scaled W½J, (JᵀWJ)⁻¹ = D⁻¹R⁻¹R⁻ᵀD⁻¹, never from inverting JᵀWJ; the rank
/// test uses max(n,p)·ε·σ_max on the scaled matrix (SPEC §13) and names dependent parameters.
/// From [`BLOCKED_QR_FROM`] rows R comes from the parallel blocked QR of W½J
/// ([`dense::streaming_qr`]) and is scaled afterwards (R·D⁻¹ is the R of the scaled matrix,
/// D from R's column norms): the same figures up to rounding, without an n × p copy.
///
/// Parameters flagged in `at_bound` are treated as fixed: their columns are left out, their
/// covariance rows/columns are zero and they get no standard error (SPEC §13). The degrees of
/// freedom stay n − p with p = all parameters, the conservative choice.
pub fn uncertainty_from_jacobian<S: AsRef<str>>(
    jacobian: &DMatrix<f64>,
    weights: Option<&[f64]>,
    params: &[f64],
    at_bound: &[bool],
    names: &[S],
    ssr: f64,
    settings: UncertaintySettings,
) -> Result<ParameterUncertainty, CovarianceError> {
    let (n, p) = jacobian.shape();
    for (what, len) in [
        ("parameters", params.len()),
        ("at-bound flags", at_bound.len()),
        ("names", names.len()),
    ] {
        if len != p {
            return Err(CovarianceError::DimensionMismatch {
                what,
                expected: p,
                found: len,
            });
        }
    }
    check_weights(weights, n)?;
    let free: Vec<usize> = (0..p).filter(|&j| !at_bound[j]).collect();
    // From BLOCKED_QR_FROM rows, R of W½J comes from the parallel blocked QR, whose pass also
    // checks that the free columns are finite (if not: the checks and the dense QR below).
    let blocked = (n >= BLOCKED_QR_FROM && !free.is_empty())
        .then(|| blocked_triangle(jacobian, weights, &free))
        .flatten();
    for j in 0..p {
        if blocked.is_some() && !at_bound[j] {
            continue;
        }
        if let Some(row) = jacobian.column(j).iter().position(|v| !v.is_finite()) {
            return Err(CovarianceError::NonFinite {
                what: "Jacobian",
                row,
            });
        }
    }
    let name = |j: usize| names[j].as_ref().to_string();
    let qr_error = |e: ScaledQrError| match e {
        ScaledQrError::ZeroColumn(k) => CovarianceError::NoEffect {
            index: free[k],
            name: name(free[k]),
        },
        ScaledQrError::Deficient { columns, condition } => CovarianceError::Dependent {
            parameters: columns
                .into_iter()
                .map(|k| (free[k], name(free[k])))
                .collect(),
            condition,
        },
    };
    let mut unscaled = DMatrix::zeros(p, p);
    let mut condition = None;
    if !free.is_empty() {
        let (g, cond) = match blocked {
            Some(r) => {
                let sr = dense::scaled_triangle(r, n).map_err(qr_error)?;
                (sr.inverse_gram(), sr.condition)
            }
            None => {
                let mut a = DMatrix::zeros(n, free.len());
                for (k, &j) in free.iter().enumerate() {
                    for i in 0..n {
                        a[(i, k)] = jacobian[(i, j)] * weights.map_or(1.0, |w| w[i].sqrt());
                    }
                }
                let sq = dense::scaled_qr(a).map_err(qr_error)?;
                (sq.inverse_gram(), sq.condition)
            }
        };
        condition = Some(cond);
        let g = g.ok_or_else(|| CovarianceError::Dependent {
            parameters: free.iter().map(|&j| (j, name(j))).collect(),
            condition: cond,
        })?;
        for (a_, &i) in free.iter().enumerate() {
            for (b_, &j) in free.iter().enumerate() {
                unscaled[(i, j)] = g[(a_, b_)];
            }
        }
    }
    let estimated: Vec<bool> = at_bound.iter().map(|b| !b).collect();
    let mut u = uncertainty_from_unscaled(&unscaled, params, &estimated, n, ssr, settings)?;
    u.condition = condition;
    Ok(u)
}

/// Rows from which [`uncertainty_from_jacobian`] takes R of W½J from the parallel blocked QR
/// of the solver's large-data path ([`dense::streaming_qr`], the same rows as
/// [`super::lm::STREAMING_QR_FROM`]) rather than from a Householder QR of an n × p copy: no
/// copy, every core, and the same bits with any number of threads. Below, every reference
/// test (NIST StRD included) keeps its figures.
pub const BLOCKED_QR_FROM: usize = super::lm::STREAMING_QR_FROM;

/// R (p × p, p = `free.len()`) of the QR of W½J restricted to the columns `free`, by the
/// blocked parallel QR; None when an entry of W½J or R is not finite (the caller then finds
/// the row, or takes the dense path). Only for at-bound parameters are the free columns
/// copied first.
fn blocked_triangle(
    jacobian: &DMatrix<f64>,
    weights: Option<&[f64]>,
    free: &[usize],
) -> Option<DMatrix<f64>> {
    let (n, p) = jacobian.shape();
    let all = jacobian.as_slice();
    let picked: Vec<f64>;
    let jac = if free.len() == p {
        all
    } else {
        picked = free
            .iter()
            .flat_map(|&j| &all[j * n..(j + 1) * n])
            .copied()
            .collect();
        &picked
    };
    let sqrt_w: Vec<f64> = weights.map_or_else(Vec::new, |w| w.iter().map(|v| v.sqrt()).collect());
    let k = free.len();
    let mut r = DMatrix::zeros(k, k);
    let finite = dense::streaming_qr(
        jac,
        &sqrt_w,
        weights.is_none(),
        &[],
        None,
        None,
        &mut r,
        &mut [],
    );
    (finite && r.iter().all(|v| v.is_finite())).then_some(r)
}

/// Parameter uncertainty from an unscaled covariance (JᵀWJ)⁻¹ already computed, e.g.
/// [`crate::fit::linear::LinearFit::unscaled_covariance`]. `estimated[j] = false` marks a
/// parameter without a standard error (its row and column must be zero).
///
/// SEⱼ = √Cⱼⱼ, relative SE = SEⱼ/|θⱼ|, correlation Cᵢⱼ/(SEᵢ·SEⱼ), interval θⱼ ± q·SEⱼ with
/// q = t_{1−α/2}(n − p) or z_{1−α/2} (Draper & Smith §2.x and §24, from memory).
pub fn uncertainty_from_unscaled(
    unscaled: &DMatrix<f64>,
    params: &[f64],
    estimated: &[bool],
    n: usize,
    ssr: f64,
    settings: UncertaintySettings,
) -> Result<ParameterUncertainty, CovarianceError> {
    let p = params.len();
    if unscaled.shape() != (p, p) {
        return Err(CovarianceError::DimensionMismatch {
            what: "covariance",
            expected: p,
            found: unscaled.nrows(),
        });
    }
    if estimated.len() != p {
        return Err(CovarianceError::DimensionMismatch {
            what: "estimated flags",
            expected: p,
            found: estimated.len(),
        });
    }
    check_confidence(settings.confidence)?;
    if n <= p {
        return Err(CovarianceError::NoDegreesOfFreedom { n, p });
    }
    if !ssr.is_finite() || ssr < 0.0 {
        return Err(CovarianceError::NonFinite {
            what: "residual sum of squares",
            row: 0,
        });
    }
    let dof = n - p;
    let unit_variance = match settings.mode {
        UncertaintyMode::Residuals => ssr / dof as f64,
        UncertaintyMode::Weights => 1.0,
    };
    let q = quantile(settings.mode, settings.confidence, dof)?;
    let mut covariance = unscaled * unit_variance;
    for j in 0..p {
        if !estimated[j] {
            for k in 0..p {
                covariance[(j, k)] = 0.0;
                covariance[(k, j)] = 0.0;
            }
        }
    }
    let std_errors: Vec<Option<f64>> = (0..p)
        .map(|j| estimated[j].then(|| covariance[(j, j)].max(0.0).sqrt()))
        .collect();
    let rel_std_errors = std_errors
        .iter()
        .zip(params)
        .map(|(se, t)| se.and_then(|se| (*t != 0.0).then(|| se / t.abs())))
        .collect();
    let correlation = DMatrix::from_fn(p, p, |i, j| match (std_errors[i], std_errors[j]) {
        (Some(a), Some(b)) if a > 0.0 && b > 0.0 => covariance[(i, j)] / (a * b),
        (Some(_), Some(_)) if i == j => 1.0,
        _ => 0.0,
    });
    let intervals = std_errors
        .iter()
        .zip(params)
        .map(|(se, t)| se.map(|se| (t - q * se, t + q * se)))
        .collect();
    Ok(ParameterUncertainty {
        mode: settings.mode,
        confidence: settings.confidence,
        quantile: q,
        dof,
        unit_variance,
        covariance,
        estimated: estimated.to_vec(),
        std_errors,
        rel_std_errors,
        correlation,
        intervals,
        condition: None,
    })
}

impl ParameterUncertainty {
    /// Pointwise band at x₀ from the gradient g = ∂f/∂θ at x₀ (linear approximation;
    /// Seber & Wild §5.1, Bates & Watts §2.3.x — from memory):
    /// confidence ŷ ± q·√(gᵀCg); prediction of the mean of m readings of weight w₀
    /// ŷ ± q·√(gᵀCg + σ²/(m·w₀)), σ² = s² (mode "residuals") or 1 (mode "weights").
    pub fn band(
        &self,
        gradient: &[f64],
        fitted: f64,
        reading: Option<NewReading>,
    ) -> Result<Band, CovarianceError> {
        let p = self.covariance.nrows();
        if gradient.len() != p {
            return Err(CovarianceError::InvalidBandInput(format!(
                "gradient has {} entries, expected {p}",
                gradient.len()
            )));
        }
        if !fitted.is_finite() || gradient.iter().any(|g| !g.is_finite()) {
            return Err(CovarianceError::InvalidBandInput(
                "the model or its gradient is not finite at this point".into(),
            ));
        }
        let mut var_fit = 0.0;
        for i in 0..p {
            for j in 0..p {
                var_fit += gradient[i] * self.covariance[(i, j)] * gradient[j];
            }
        }
        let se_fit = var_fit.max(0.0).sqrt();
        let q = self.quantile;
        let se_prediction = match reading {
            None => None,
            Some(r) => {
                if !(r.weight > 0.0 && r.weight.is_finite()) || r.count == 0 {
                    return Err(CovarianceError::InvalidBandInput(format!(
                        "a new reading needs a positive weight and count ≥ 1 (got weight {}, count {})",
                        r.weight, r.count
                    )));
                }
                Some(
                    (var_fit.max(0.0) + self.unit_variance / (f64::from(r.count) * r.weight))
                        .sqrt(),
                )
            }
        };
        Ok(Band {
            fitted,
            se_fit,
            confidence: (fitted - q * se_fit, fitted + q * se_fit),
            se_prediction,
            prediction: se_prediction.map(|s| (fitted - q * s, fitted + q * s)),
        })
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    // Straight line, invented data (a gas sensor's output against concentration).
    const X: [f64; 6] = [0.0, 10.0, 20.0, 30.0, 40.0, 50.0];
    const Y: [f64; 6] = [0.21, 1.18, 2.26, 3.11, 4.32, 5.17];

    fn line_fit() -> (Vec<f64>, Vec<f64>, f64, DMatrix<f64>) {
        let j = DMatrix::from_fn(6, 2, |i, k| if k == 0 { 1.0 } else { X[i] });
        let fit = crate::fit::linear::fit_linear(&j, &Y, None, &["a", "b"]).unwrap();
        (fit.coefficients, fit.fitted, fit.ssr, j)
    }

    #[test]
    fn t_quantile_matches_the_table() {
        // Student's t table, two-sided 95 %: t(0.975; 10) = 2.228, t(0.975; 1) = 12.706
        // (any statistics handbook, e.g. Draper & Smith Table; from memory). z(0.975) = 1.960.
        assert!((quantile(UncertaintyMode::Residuals, 0.95, 10).unwrap() - 2.228).abs() < 5e-4);
        assert!((quantile(UncertaintyMode::Residuals, 0.95, 1).unwrap() - 12.706).abs() < 5e-3);
        assert!((quantile(UncertaintyMode::Weights, 0.95, 3).unwrap() - 1.960).abs() < 5e-4);
        assert!(matches!(
            quantile(UncertaintyMode::Residuals, 1.0, 3),
            Err(CovarianceError::InvalidConfidence(_))
        ));
    }

    #[test]
    fn straight_line_standard_errors_match_the_closed_form() {
        // Draper & Smith §1.4 (from memory): se(b) = s/√Sxx, se(a) = s·√(1/n + x̄²/Sxx),
        // Cov(a, b) = −x̄·s²/Sxx; band at x₀: s·√(1/n + (x₀ − x̄)²/Sxx).
        let (beta, fitted, ssr, j) = line_fit();
        let n = 6.0;
        let xm = X.iter().sum::<f64>() / n;
        let sxx: f64 = X.iter().map(|x| (x - xm).powi(2)).sum();
        let s2 = ssr / 4.0;
        let u = uncertainty_from_jacobian(
            &j,
            None,
            &beta,
            &[false, false],
            &["a", "b"],
            ssr,
            UncertaintySettings::default(),
        )
        .unwrap();
        let se_b = (s2 / sxx).sqrt();
        let se_a = (s2 * (1.0 / n + xm * xm / sxx)).sqrt();
        assert!((u.std_errors[1].unwrap() - se_b).abs() < 1e-15);
        assert!((u.std_errors[0].unwrap() - se_a).abs() < 1e-14);
        let corr = -xm * s2 / sxx / (se_a * se_b);
        assert!((u.correlation[(0, 1)] - corr).abs() < 1e-13);
        let x0 = 35.0;
        let band = u
            .band(
                &[1.0, x0],
                beta[0] + beta[1] * x0,
                Some(NewReading {
                    weight: 1.0,
                    count: 2,
                }),
            )
            .unwrap();
        let want = (s2 * (1.0 / n + (x0 - xm).powi(2) / sxx)).sqrt();
        assert!((band.se_fit - want).abs() < 1e-14);
        let want_pred = (s2 * (0.5 + 1.0 / n + (x0 - xm).powi(2) / sxx)).sqrt();
        assert!((band.se_prediction.unwrap() - want_pred).abs() < 1e-14);
        let t = quantile(UncertaintyMode::Residuals, 0.95, 4).unwrap();
        assert!((band.confidence.1 - band.fitted - t * want).abs() < 1e-13);
        let stats = fit_statistics(&Y, None, &fitted, 2, true, UncertaintyMode::Residuals).unwrap();
        assert!((stats.residual_sd - s2.sqrt()).abs() < 1e-15);
        assert_eq!(stats.dof, 4);
    }

    #[test]
    fn r_squared_is_uncentred_without_a_constant_term() {
        let fitted = [1.0, 2.0, 3.0];
        let y = [1.1, 1.9, 3.0];
        let ssr = 0.01 + 0.01;
        let c = fit_statistics(&y, None, &fitted, 1, false, UncertaintyMode::Residuals).unwrap();
        let sst0: f64 = y.iter().map(|v| v * v).sum();
        assert!((c.r_squared.unwrap() - (1.0 - ssr / sst0)).abs() < 1e-14);
        assert_eq!(c.r_squared_kind, RSquaredKind::Uncentred);
        assert!((c.adjusted_r_squared.unwrap() - (1.0 - ssr / sst0 * 3.0 / 2.0)).abs() < 1e-14);
    }

    #[test]
    fn weighted_r_squared_uses_the_weighted_mean() {
        // SPEC §13: R² = 1 − Σw·e²/Σw·(y − ȳ_w)².
        let y = [1.0, 2.0, 4.0];
        let f = [1.1, 2.1, 3.8];
        let w = [1.0, 2.0, 0.5];
        let ybar: f64 = (1.0 + 4.0 + 2.0) / 3.5;
        let sst: f64 =
            (1.0 - ybar).powi(2) + 2.0 * (2.0 - ybar).powi(2) + 0.5 * (4.0 - ybar).powi(2);
        let ssr = 0.01 + 2.0 * 0.01 + 0.5 * 0.04;
        let s = fit_statistics(&y, Some(&w), &f, 1, true, UncertaintyMode::Weights).unwrap();
        assert!((s.r_squared.unwrap() - (1.0 - ssr / sst)).abs() < 1e-14);
        let chi = s.chi_square.unwrap();
        assert_eq!(chi.dof, 2);
        // χ²(2) upper tail is exp(−x/2) exactly.
        assert!((chi.p_value - (-ssr / 2.0_f64).exp()).abs() < 1e-12);
    }

    #[test]
    fn weights_mode_leaves_the_covariance_unscaled() {
        let (beta, _, ssr, j) = line_fit();
        let settings = UncertaintySettings {
            mode: UncertaintyMode::Weights,
            confidence: 0.95,
        };
        let u =
            uncertainty_from_jacobian(&j, None, &beta, &[false, false], &["a", "b"], ssr, settings)
                .unwrap();
        let xm = 25.0;
        let sxx: f64 = X.iter().map(|x| (x - xm).powi(2)).sum();
        assert!((u.covariance[(1, 1)] - 1.0 / sxx).abs() < 1e-18);
        assert_eq!(u.unit_variance, 1.0);
    }

    #[test]
    fn parameter_at_bound_has_no_standard_error() {
        let (beta, _, ssr, j) = line_fit();
        let u = uncertainty_from_jacobian(
            &j,
            None,
            &beta,
            &[true, false],
            &["a", "b"],
            ssr,
            UncertaintySettings::default(),
        )
        .unwrap();
        assert_eq!(u.std_errors[0], None);
        assert_eq!(u.intervals[0], None);
        assert!(u.std_errors[1].is_some());
        assert_eq!(u.covariance[(0, 1)], 0.0);
    }

    #[test]
    fn dependent_parameters_are_named() {
        // f = a·b·x: the columns ∂f/∂a = b·x and ∂f/∂b = a·x are proportional.
        let (a, b) = (2.0, 3.0);
        let j = DMatrix::from_fn(6, 2, |i, k| if k == 0 { b * X[i] } else { a * X[i] });
        let e = uncertainty_from_jacobian(
            &j,
            None,
            &[a, b],
            &[false, false],
            &["a", "b"],
            1.0,
            UncertaintySettings::default(),
        )
        .unwrap_err();
        match e {
            CovarianceError::Dependent { parameters, .. } => {
                assert_eq!(parameters, vec![(0, "a".to_string()), (1, "b".to_string())]);
            }
            other => panic!("expected Dependent, got {other:?}"),
        }
    }

    /// A 60,000-row design (above [`BLOCKED_QR_FROM`]) of three columns, 1, x and a smooth
    /// bump, with invented weights: the blocked path's input.
    fn long_design() -> (DMatrix<f64>, Vec<f64>) {
        let n = 60_000;
        let j = DMatrix::from_fn(n, 3, |i, k| {
            let x = i as f64 * 1e-3;
            match k {
                0 => 1.0,
                1 => x,
                _ => (-0.05 * (x - 30.0).powi(2)).exp(),
            }
        });
        let w = (0..n).map(|i| 1.0 + (i % 5) as f64 * 0.5).collect();
        (j, w)
    }

    #[test]
    fn large_designs_give_the_closed_form_line_figures() {
        // The straight line of the closed-form test above on 60,000 weighted rows, through
        // the blocked QR: se(b) = s/√Sxx, se(a) = s·√(1/Σw + x̄²/Sxx) with the weighted mean
        // x̄ = Σwx/Σw and Sxx = Σw(x − x̄)² (Draper & Smith §1.4 and ch. 9, from memory).
        let (design, w) = long_design();
        let j = design.columns(0, 2).into_owned();
        let x: Vec<f64> = j.column(1).iter().copied().collect();
        let sw: f64 = w.iter().sum();
        let xm = x.iter().zip(&w).map(|(x, w)| w * x).sum::<f64>() / sw;
        let sxx: f64 = x.iter().zip(&w).map(|(x, w)| w * (x - xm).powi(2)).sum();
        let ssr = 1234.5;
        let s2 = ssr / (x.len() - 2) as f64;
        let u = uncertainty_from_jacobian(
            &j,
            Some(&w),
            &[1.0, 2.0],
            &[false, false],
            &["a", "b"],
            ssr,
            UncertaintySettings::default(),
        )
        .unwrap();
        let se_b = (s2 / sxx).sqrt();
        let se_a = (s2 * (1.0 / sw + xm * xm / sxx)).sqrt();
        let close = |a: f64, b: f64| (a - b).abs() <= 1e-11 * b.abs();
        assert!(close(u.std_errors[1].unwrap(), se_b), "{:?}", u.std_errors);
        assert!(close(u.std_errors[0].unwrap(), se_a), "{:?}", u.std_errors);
        assert!(close(u.correlation[(0, 1)], -xm * s2 / sxx / (se_a * se_b)));
    }

    #[test]
    fn the_blocked_path_agrees_with_the_dense_qr() {
        // Same covariance and condition number as the Householder QR of the n × p copy
        // (dense::scaled_qr, the path below BLOCKED_QR_FROM rows), with a parameter at a
        // bound left out; relative 1e-10 (the two differ by rounding only).
        let (j, w) = long_design();
        for at_bound in [[false, false, false], [false, true, false]] {
            let u = uncertainty_from_jacobian(
                &j,
                Some(&w),
                &[1.0, 2.0, 3.0],
                &at_bound,
                &["a", "b", "c"],
                50.0,
                UncertaintySettings::default(),
            )
            .unwrap();
            let free: Vec<usize> = (0..3).filter(|&k| !at_bound[k]).collect();
            let a = DMatrix::from_fn(j.nrows(), free.len(), |i, k| j[(i, free[k])] * w[i].sqrt());
            let sq = dense::scaled_qr(a).unwrap();
            let g = sq.inverse_gram().unwrap();
            let s2 = 50.0 / (j.nrows() - 3) as f64;
            for (a_, &r) in free.iter().enumerate() {
                for (b_, &c) in free.iter().enumerate() {
                    // Relative to √(CᵢᵢCⱼⱼ): an off-diagonal entry may be near zero.
                    let want = g[(a_, b_)] * s2;
                    let size = (g[(a_, a_)] * g[(b_, b_)]).sqrt() * s2;
                    let got = u.covariance[(r, c)];
                    assert!((got - want).abs() <= 1e-10 * size, "{got} vs {want}");
                }
            }
            let cond = u.condition.unwrap();
            assert!((cond - sq.condition).abs() <= 1e-10 * sq.condition);
        }
    }

    #[test]
    fn the_blocked_path_names_bad_rows_and_dependent_parameters() {
        let (mut j, w) = long_design();
        // Columns 0 and 2 proportional: named as dependent, as on the dense path.
        let dependent = DMatrix::from_fn(j.nrows(), 2, |i, k| {
            if k == 0 { j[(i, 1)] } else { 2.0 * j[(i, 1)] }
        });
        let e = uncertainty_from_jacobian(
            &dependent,
            Some(&w),
            &[1.0, 2.0],
            &[false, false],
            &["a", "b"],
            1.0,
            UncertaintySettings::default(),
        )
        .unwrap_err();
        assert!(matches!(e, CovarianceError::Dependent { .. }), "{e:?}");
        j[(41_234, 2)] = f64::NAN;
        let e = uncertainty_from_jacobian(
            &j,
            None,
            &[1.0, 2.0, 3.0],
            &[false; 3],
            &["a", "b", "c"],
            1.0,
            UncertaintySettings::default(),
        )
        .unwrap_err();
        assert_eq!(
            e,
            CovarianceError::NonFinite {
                what: "Jacobian",
                row: 41_234
            }
        );
    }
}
