//! Levenberg–Marquardt for weighted nonlinear least squares with an exact Jacobian.
//!
//! Problem: minimise `SSR(θ) = Σᵢ wᵢ·(yᵢ − f(xᵢ; θ))²` subject to `lowerⱼ ≤ θⱼ ≤ upperⱼ`.
//! Write e = W½·(y − f(θ)) and J_w = W½·∂f/∂θ.
//!
//! # Step
//! The step δ minimises `‖e − J_w·δ‖² + λ·‖D·δ‖²`, i.e. it is the least-squares solution of
//! the augmented system `[J_w; √λ·D]·δ ≈ [e; 0]`, computed by a Householder QR of J_w (once per
//! Jacobian) followed by Givens rotations that fold √λ·D into R for each trial λ (MINPACK's
//! `qrsolv`; Moré, Garbow & Hillstrom, ANL-80-74, 1980). JᵀJ is never formed.
//!
//! # Scaling
//! D = diag(dⱼ), dⱼ = the largest ‖column j of J_w‖ seen so far (1 if always zero) — Moré,
//! "The Levenberg–Marquardt algorithm: implementation and theory", Springer LNM
//! vol. 630 (1978), §6. This makes the iteration invariant to the units of θ.
//!
//! # Damping update
//! Nielsen's rule (H. B. Nielsen, "Damping parameter in Marquardt's method", IMM-REP-1999-05,
//! DTU 1999; also Madsen, Nielsen & Tingleff, "Methods for non-linear least squares problems",
//! 2nd ed. 2004, §3.2): with gain ratio ρ = (actual reduction)/(reduction predicted by the
//! linear model), a step is accepted when ρ > 0 and then λ ← λ·max(1/3, 1 − (2ρ − 1)³), ν ← 2;
//! otherwise λ ← λ·ν, ν ← 2ν. Initial λ = τ (default 10⁻³, Nielsen's suggestion for a start
//! of unknown quality); with the scaled damping term this is τ·‖J_w,j‖² per parameter.
//! The actual reduction is computed as Σ (eᵢ − ẽᵢ)(eᵢ + ẽᵢ), and a step is also accepted
//! (λ unchanged) when the linear model predicts a reduction below ftol·SSR and the actual
//! change lies within the rounding noise of evaluating SSR: there the comparison cannot
//! decide, and rejecting would stop large-residual problems short of their minimum
//! (our addition; see `trial_sums`).
//!
//! # Geodesic acceleration (optional, on by default)
//! Transtrum & Sethna, "Improvements to the Levenberg–Marquardt algorithm for nonlinear
//! least-squares minimization", arXiv:1201.5885 (2012): with the velocity v (the step above),
//! the acceleration a solves the same damped system with right-hand side −W½·f_vv, where the
//! second directional derivative is estimated by finite differences along v,
//! f_vv ≈ (2/h)·((f(θ + h·v) − f(θ))/h − J·v) with h = 0.1 (their choice). The step is
//! δ = v + a/2, rejected when 2‖D·a‖/‖D·v‖ > α = 0.75 (their default). The Jacobian stays exact;
//! only this curvature correction uses a model evaluation at a nearby point.
//!
//! When (our rule, measured below): a fit starts with plain steps and uses the acceleration
//! from the first trial that is rejected or whose gain ratio ρ is below ½ — where Nielsen's
//! update stops shrinking λ, i.e. where the linear model has begun to mispredict the
//! reduction, the curved-valley case the correction is for — to its end. While the linear
//! model predicts well the correction is small and its extra model evaluation per trial
//! buys nothing. On the 54 NIST StRD fits (2026-12-02) this left the converged set and the
//! lowest parameter LRE (9.7) unchanged and cut the model evaluations from 4,518 to 3,991
//! (Misra1a start 1: 41 → 26, DanWood start 1: 29 → 9), while the fits that need the
//! correction kept it (Lanczos3 start 1: 59 evaluations; 101 with no acceleration); the
//! 1,000,000-row benchmark of scripts/bench went from 10 iterations and 23 evaluations to
//! 7 and 8.
//!
//! # Bounds
//! By projection with an active set (Kelley, *Iterative Methods for Optimization*, SIAM 1999,
//! §5.5 — from memory): a parameter at a bound whose descent direction points outwards is held
//! for the step (its Jacobian column is zeroed, which makes its step component exactly zero);
//! the trial point is clamped into the box. The gradient test uses the projected gradient.
//! A parameter that ends exactly on a bound is flagged in [`LmOutcome::at_bound`].
//!
//! # Stop rules (SPEC §13)
//! Checked in this order and reported as [`StopReason`]:
//! - relative reduction and relative step both at most `xtol`/`ftol`: after any trial,
//!   |SSR − SSR_trial| ≤ ftol·SSR, the predicted reduction ≤ ftol·SSR, and
//!   |δⱼ| ≤ xtol·(|θⱼ| + xtol) for all j (MINPACK's tests, per component);
//! - scaled gradient: maxⱼ |J_w,jᵀ·e| / (‖J_w,j‖·‖e‖) ≤ gtol (MINPACK's cosine test);
//! - zero residual: SSR ≤ 10⁻³⁰·Σ wᵢ·yᵢ²;
//! - not converged: 200·(p + 1) Jacobian evaluations reached, or no acceptable step exists
//!   (λ overflowed). Non-convergence is a result, not an error.
//!
//! After a stop by the step test (small n), the Gauss–Newton step (λ = 0) from the final point
//! is computed; when it fails the step test itself it is tried, and kept when it lowers SSR
//! (`refine`): the damped step can pass the step test short of the minimum when rounding noise
//! has inflated λ (NIST Lanczos1: lowest parameter LRE 9.8 → 10.6, the data's own limit, as
//! the reference library's; no other NIST fit changed).
//!
//! A domain error (or non-finite value) of the model at a trial point rejects the step; at the
//! start it is an error.
//!
//! # Passes over the rows
//! The model values at a trial point are computed together with the Jacobian there
//! ([`Model::eval_with_jacobian`]; from [`SPECULATIVE_FROM`] rows, at present every size):
//! most trials are accepted, and the Jacobian then costs no second pass over the rows. The values are the
//! same as those of [`Model::eval`], so the iterations are those of the one-pass-each order;
//! a Jacobian computed for a rejected trial is discarded (and not counted in
//! [`LmOutcome::jacobian_evals`], which counts the Jacobians the iterations used). The
//! per-row sums of each trial (residuals, SSR, actual reduction and its noise) are taken in
//! one pass over the rows. From [`STREAMING_QR_FROM`] rows on the QR of J_w is computed block
//! by block, keeping only R and the first p entries of Qᵀe, which is all the damped solve
//! uses (TSQR: Demmel, Grigori, Hoemmen & Langou, "Communication-optimal parallel and
//! sequential QR and LU factorizations", SIAM J. Sci. Comput. 34(1), 2012), and that pass,
//! the trial sums (in four lanes per block, so that they vectorize) and the acceleration's
//! projection run in the fixed row blocks of [`super::rows`] on the rayon pool: the same
//! bits with any number of threads.

use std::fmt;

use nalgebra::DMatrix;

use super::dense::{self, DampedWork};

/// An error of the caller's model evaluator, e.g. a logarithm of a negative number at some row;
/// the message says where (row, sub-expression).
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct ModelError {
    pub message: String,
}

impl ModelError {
    pub fn new(message: impl Into<String>) -> Self {
        ModelError {
            message: message.into(),
        }
    }
}

impl fmt::Display for ModelError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(&self.message)
    }
}

impl std::error::Error for ModelError {}

/// A model f(x; θ) over fixed data rows, with its exact Jacobian.
///
/// The model owns its predictor data; the fit passes buffers sized to the response:
/// `f_out.len() == n` and `j_out` is n × [`Model::n_params`], `j_out[(i, j)] = ∂f(xᵢ; θ)/∂θⱼ`.
/// Implementations should not allocate: they are called in the inner loop.
pub trait Model {
    fn n_params(&self) -> usize;
    fn eval(&self, params: &[f64], f_out: &mut [f64]) -> Result<(), ModelError>;
    fn jacobian(&self, params: &[f64], j_out: &mut DMatrix<f64>) -> Result<(), ModelError>;

    /// f and the Jacobian at one point, where the model can share the work between them.
    /// `f_out` must receive exactly the values [`Model::eval`] gives; the default calls the
    /// two in turn.
    fn eval_with_jacobian(
        &self,
        params: &[f64],
        f_out: &mut [f64],
        j_out: &mut DMatrix<f64>,
    ) -> Result<(), ModelError> {
        self.eval(params, f_out)?;
        self.jacobian(params, j_out)
    }

    /// Whether [`Model::eval`], [`Model::jacobian`] and [`Model::eval_with_jacobian`] return
    /// an error rather than any non-finite value. The solver then leaves out its own passes
    /// over the Jacobian looking for them; the default, false, keeps them.
    fn finite_or_error(&self) -> bool {
        false
    }
}

/// Rows from which the QR of J_w is taken block by block ([`dense::streaming_qr`]): R and
/// Qᵀe in one pass over the weighted Jacobian instead of a dozen, and no n × p copy of it.
/// The reflectors are not kept, so the acceleration's right-hand side is always projected
/// through R (see [`acceleration`]). Small problems, NIST's included, keep the reflectors.
pub const STREAMING_QR_FROM: usize = 50_000;

/// Rows from which a trial point's values come with its Jacobian (see "Large data sets" in
/// the module docs): from the first. Most trials are accepted, and then the Jacobian costs no
/// second pass; a rejected trial wastes one. With the engine's vectorized `exp` and the AVX2
/// tape, callgrind counts 9–17 % fewer instructions per fit this way on the NIST problems
/// measured (Chwirut1 −9 %, Gauss1 −10 %, Lanczos3 −11 %, Misra1a −16 %, BoxBOD −17 %;
/// 2026-12-02). Before those changes the balance was the other way (12–24 % more on
/// Chwirut1, Gauss1, Lanczos3), so it was used from 50,000 rows only. The option stays for
/// callers that prefer one pass each ([`LmOptions::with_speculative_from`]).
pub const SPECULATIVE_FROM: usize = 0;

/// Rows from which the acceleration's right-hand side is projected through R
/// (R⁻ᵀ·J_wᵀ·rhs, one pass, see [`acceleration`]) rather than by the stored reflectors. Not
/// tuned; small problems, the NIST ones included, keep the reflectors.
pub const PROJECTED_RHS_FROM: usize = 50_000;

/// Box constraint of one parameter (use ±∞ for none).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Bound {
    pub lower: f64,
    pub upper: f64,
}

impl Bound {
    /// No constraint.
    pub const FREE: Bound = Bound {
        lower: f64::NEG_INFINITY,
        upper: f64::INFINITY,
    };
}

impl Default for Bound {
    fn default() -> Self {
        Bound::FREE
    }
}

/// The data the model is fitted to.
#[derive(Debug, Clone, Copy)]
pub struct Observations<'a> {
    pub y: &'a [f64],
    /// wᵢ ≥ 0; None means all 1.
    pub weights: Option<&'a [f64]>,
}

/// An option value out of range.
#[derive(Debug, Clone, PartialEq)]
pub struct OptionError {
    pub option: &'static str,
    pub value: f64,
    pub expected: &'static str,
}

impl fmt::Display for OptionError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(
            f,
            "{} = {} is out of range: expected {}",
            self.option, self.value, self.expected
        )
    }
}

impl std::error::Error for OptionError {}

/// Settings of the Levenberg–Marquardt fit; setters check their range.
#[derive(Debug, Clone, PartialEq)]
pub struct LmOptions {
    xtol: f64,
    ftol: f64,
    gtol: f64,
    max_jacobian_evals: Option<usize>,
    initial_damping: f64,
    geodesic_acceleration: bool,
    speculative_from: usize,
    streaming_qr_from: usize,
    refine: bool,
}

impl Default for LmOptions {
    fn default() -> Self {
        LmOptions {
            xtol: 1e-12,
            ftol: 1e-12,
            gtol: 1e-12,
            max_jacobian_evals: None,
            initial_damping: 1e-3,
            speculative_from: SPECULATIVE_FROM,
            streaming_qr_from: STREAMING_QR_FROM,
            geodesic_acceleration: true,
            refine: true,
        }
    }
}

fn tolerance(option: &'static str, v: f64) -> Result<f64, OptionError> {
    if (f64::EPSILON..1.0).contains(&v) {
        Ok(v)
    } else {
        Err(OptionError {
            option,
            value: v,
            expected: "a number in [2.2e-16, 1)",
        })
    }
}

impl LmOptions {
    /// Relative step tolerance; default 1e-12 (SPEC §13). Range [ε, 1).
    pub fn with_xtol(mut self, v: f64) -> Result<Self, OptionError> {
        self.xtol = tolerance("xtol", v)?;
        Ok(self)
    }
    /// Relative SSR reduction tolerance; default 1e-12 (SPEC §13). Range [ε, 1).
    pub fn with_ftol(mut self, v: f64) -> Result<Self, OptionError> {
        self.ftol = tolerance("ftol", v)?;
        Ok(self)
    }
    /// Scaled gradient tolerance; default 1e-12 (SPEC §13). Range [ε, 1).
    pub fn with_gtol(mut self, v: f64) -> Result<Self, OptionError> {
        self.gtol = tolerance("gtol", v)?;
        Ok(self)
    }
    /// Jacobian evaluation limit; default 200·(p + 1) (SPEC §13). At least 1.
    pub fn with_max_jacobian_evals(mut self, v: usize) -> Result<Self, OptionError> {
        if v == 0 {
            return Err(OptionError {
                option: "max_jacobian_evals",
                value: 0.0,
                expected: "at least 1",
            });
        }
        self.max_jacobian_evals = Some(v);
        Ok(self)
    }
    /// Initial damping τ; default 1e-3 (Nielsen 1999). Range (0, 1e10].
    pub fn with_initial_damping(mut self, v: f64) -> Result<Self, OptionError> {
        if !(v > 0.0 && v <= 1e10) {
            return Err(OptionError {
                option: "initial_damping",
                value: v,
                expected: "a number in (0, 1e10]",
            });
        }
        self.initial_damping = v;
        Ok(self)
    }
    /// Geodesic acceleration on or off; default on.
    /// The number of rows from which trial values come with the Jacobian (default
    /// [`SPECULATIVE_FROM`]; `usize::MAX` never). The iterations are the same either way.
    pub fn with_speculative_from(mut self, rows: usize) -> Self {
        self.speculative_from = rows;
        self
    }

    /// The number of rows from which the QR is taken block by block, keeping only R (default
    /// [`STREAMING_QR_FROM`]; `usize::MAX` never).
    pub fn with_streaming_qr_from(mut self, rows: usize) -> Self {
        self.streaming_qr_from = rows;
        self
    }

    /// The final Gauss–Newton step after a stop by the step test (see `refine`); default on.
    pub fn with_refinement(mut self, on: bool) -> Self {
        self.refine = on;
        self
    }

    pub fn with_geodesic_acceleration(mut self, on: bool) -> Self {
        self.geodesic_acceleration = on;
        self
    }
    pub fn xtol(&self) -> f64 {
        self.xtol
    }
    pub fn ftol(&self) -> f64 {
        self.ftol
    }
    pub fn gtol(&self) -> f64 {
        self.gtol
    }
    /// The Jacobian evaluation limit for p parameters.
    pub fn max_jacobian_evals(&self, p: usize) -> usize {
        self.max_jacobian_evals.unwrap_or(200 * (p + 1))
    }
}

/// Why a non-converged fit stopped.
#[derive(Debug, Clone, PartialEq)]
pub enum NonConvergence {
    /// The Jacobian evaluation limit was reached.
    JacobianLimit { limit: usize },
    /// λ grew past 1e300 without an acceptable step.
    NoAcceptableStep { last_model_error: Option<String> },
}

/// Why the fit stopped. The first three mean converged.
#[derive(Debug, Clone, PartialEq)]
pub enum StopReason {
    RelativeReductionAndStep {
        ftol: f64,
        xtol: f64,
    },
    Gradient {
        gtol: f64,
    },
    ZeroResidual,
    DidNotConverge {
        iterations: usize,
        cause: NonConvergence,
    },
}

impl StopReason {
    /// Converged = one of the first three reasons (SPEC §13).
    pub fn converged(&self) -> bool {
        !matches!(self, StopReason::DidNotConverge { .. })
    }
}

impl fmt::Display for StopReason {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            StopReason::RelativeReductionAndStep { ftol, xtol } if ftol == xtol => {
                write!(f, "relative reduction and step below {ftol:e}")
            }
            StopReason::RelativeReductionAndStep { ftol, xtol } => {
                write!(
                    f,
                    "relative reduction below {ftol:e} and relative step below {xtol:e}"
                )
            }
            StopReason::Gradient { gtol } => write!(f, "scaled gradient below {gtol:e}"),
            StopReason::ZeroResidual => {
                f.write_str("residual sum of squares below 1e-30·Σw·y² (zero-residual fit)")
            }
            StopReason::DidNotConverge { iterations, cause } => {
                write!(f, "did not converge after {iterations} iterations: ")?;
                match cause {
                    NonConvergence::JacobianLimit { limit } => {
                        write!(f, "Jacobian evaluation limit of {limit} reached")
                    }
                    NonConvergence::NoAcceptableStep { last_model_error } => {
                        f.write_str("no step reduces the sum of squares (damping exceeded 1e300)")?;
                        if let Some(m) = last_model_error {
                            write!(f, "; the model failed near the current point: {m}")?;
                        }
                        Ok(())
                    }
                }
            }
        }
    }
}

/// Result of a fit (converged or not).
#[derive(Debug, Clone, PartialEq)]
pub struct LmOutcome {
    pub params: Vec<f64>,
    /// Σ wᵢ·eᵢ² at `params`.
    pub ssr: f64,
    /// eᵢ = yᵢ − f(xᵢ; θ) in response units.
    pub residuals: Vec<f64>,
    pub fitted: Vec<f64>,
    /// ∂f/∂θ at `params` (unweighted), n × p.
    pub jacobian: DMatrix<f64>,
    /// Accepted steps.
    pub iterations: usize,
    pub jacobian_evals: usize,
    pub function_evals: usize,
    pub stop: StopReason,
    /// θⱼ ended exactly on a bound.
    pub at_bound: Vec<bool>,
}

/// Errors that prevent a fit from starting.
#[derive(Debug, Clone, PartialEq)]
#[non_exhaustive]
pub enum LmError {
    /// Lengths of start, bounds, weights, response disagree, or p = 0 / n < p.
    Dimension(String),
    /// NaN/infinite response or weight, negative weight (0-based row).
    InvalidData { what: &'static str, row: usize },
    /// A bound pair with lower > upper or NaN (0-based parameter).
    InvalidBound { param: usize },
    /// A start value that is not finite or outside its bounds.
    InvalidStart { param: usize, value: f64 },
    /// The model failed at the start values.
    ModelAtStart(ModelError),
    /// The model's Jacobian failed at the start values.
    JacobianAtStart(ModelError),
    /// The model or Jacobian gave a non-finite value at the start (0-based row).
    NonFiniteAtStart { what: &'static str, row: usize },
}

impl fmt::Display for LmError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            LmError::Dimension(m) => f.write_str(m),
            LmError::InvalidData { what, row } => {
                write!(
                    f,
                    "{what} at row {} is not usable (NaN, infinite or negative)",
                    row + 1
                )
            }
            LmError::InvalidBound { param } => {
                write!(f, "bounds of parameter {} need min ≤ max", param + 1)
            }
            LmError::InvalidStart { param, value } => write!(
                f,
                "start value {value} of parameter {} is not finite or lies outside its bounds",
                param + 1
            ),
            LmError::ModelAtStart(e) => {
                write!(f, "the model cannot be evaluated at the start values: {e}")
            }
            LmError::JacobianAtStart(e) => {
                write!(
                    f,
                    "the model's derivatives cannot be evaluated at the start values: {e}"
                )
            }
            LmError::NonFiniteAtStart { what, row } => write!(
                f,
                "the {what} is not finite at row {} for the start values; choose other starts",
                row + 1
            ),
        }
    }
}

impl std::error::Error for LmError {}

/// Smallest and largest damping: λ beyond 1e300 means no step can be found (see
/// [`NonConvergence::NoAcceptableStep`]); below 1e-300 it is held (common practice, keeps the
/// augmented system away from exact singularity).
const LAMBDA_MAX: f64 = 1e300;
const LAMBDA_MIN: f64 = 1e-300;
/// Finite-difference step of the geodesic acceleration and its acceptance ratio
/// (Transtrum & Sethna 2012).
const ACCEL_H: f64 = 0.1;
const ACCEL_ALPHA: f64 = 0.75;
/// Gain ratio below which the acceleration is switched on for the rest of the fit: ½, where
/// Nielsen's update max(1/3, 1 − (2ρ − 1)³) stops shrinking λ (see the module docs).
const ACCEL_FROM_GAIN: f64 = 0.5;
/// Zero-residual threshold factor (SPEC §13).
const ZERO_RESIDUAL: f64 = 1e-30;

/// Buffers of one fit, allocated once.
struct Work {
    sqrt_w: Vec<f64>,
    /// Every √wᵢ is 1 (no weights, or all wᵢ = 1): the passes over the rows then skip the
    /// multiplications by √w, which would not change a bit (1·x = x).
    unit: bool,
    f: Vec<f64>,
    f_trial: Vec<f64>,
    e: Vec<f64>,
    e_trial: Vec<f64>,
    jac: DMatrix<f64>,
    jac_trial: DMatrix<f64>,
    qr: DMatrix<f64>,
    tau: Vec<f64>,
    qte: Vec<f64>,
    rhs: Vec<f64>,
    damped: DampedWork,
    diag: Vec<f64>,
    col_norm: Vec<f64>,
    grad: Vec<f64>,
    frozen: Vec<bool>,
    v: Vec<f64>,
    a: Vec<f64>,
    step: Vec<f64>,
    theta: Vec<f64>,
    theta_trial: Vec<f64>,
    rstep: Vec<f64>,
    /// J_wᵀ·rhs of the acceleration on large data sets.
    jtr: Vec<f64>,
    /// From [`STREAMING_QR_FROM`] rows: the passes over the rows run in the fixed blocks of
    /// [`super::rows`] on the rayon pool (the same bits with any number of threads).
    blocked: bool,
    /// (J_w,jᵀ·e, ‖J_w,j‖²) per column, from the streaming QR's pass.
    sums: Vec<(f64, f64)>,
}

/// Fit `model` to `obs` from `start` within `bounds` (None = unbounded).
pub fn fit<M: Model + ?Sized>(
    model: &M,
    obs: &Observations<'_>,
    start: &[f64],
    bounds: Option<&[Bound]>,
    options: &LmOptions,
) -> Result<LmOutcome, LmError> {
    let p = model.n_params();
    let n = obs.y.len();
    let free_bounds = vec![Bound::FREE; p];
    let bounds = bounds.unwrap_or(&free_bounds);
    validate(p, n, obs, start, bounds)?;
    // Buffers of n values: on large data sets backed by huge pages where possible (fewer page
    // faults, the same values), zeroed by the allocator otherwise.
    let zeroed = |len: usize| {
        if n >= options.streaming_qr_from {
            crate::memory::zeroed_f64(len)
        } else {
            vec![0.0; len]
        }
    };

    // From STREAMING_QR_FROM rows on only R and the first p entries of Qᵀe are kept.
    let streaming = n >= options.streaming_qr_from;
    let rows = if streaming { p } else { n };
    let unit = obs.weights.is_none_or(|wt| wt.iter().all(|v| *v == 1.0));
    let mut w = Work {
        sqrt_w: match obs.weights {
            // The blocked passes do not read √w = 1.
            _ if unit && streaming => Vec::new(),
            Some(wt) => wt.iter().map(|v| v.sqrt()).collect(),
            None => vec![1.0; n],
        },
        unit,
        f: zeroed(n),
        f_trial: zeroed(n),
        e: zeroed(n),
        e_trial: zeroed(n),
        jac: DMatrix::from_vec(n, p, zeroed(n * p)),
        jac_trial: DMatrix::from_vec(n, p, zeroed(n * p)),
        qr: DMatrix::zeros(rows, p),
        tau: vec![0.0; p],
        qte: vec![0.0; rows],
        rhs: vec![0.0; rows],
        blocked: streaming,
        sums: vec![(0.0, 0.0); p],
        damped: DampedWork::new(p),
        diag: vec![0.0; p],
        col_norm: vec![0.0; p],
        grad: vec![0.0; p],
        frozen: vec![false; p],
        v: vec![0.0; p],
        a: vec![0.0; p],
        step: vec![0.0; p],
        theta: start.to_vec(),
        theta_trial: vec![0.0; p],
        rstep: vec![0.0; p],
        jtr: vec![0.0; p],
    };

    // Values and Jacobian at the start in one pass for large n; on any error the two are
    // evaluated apart, so that the error says which of them failed.
    let both = n >= options.speculative_from
        && model
            .eval_with_jacobian(&w.theta, &mut w.f, &mut w.jac)
            .is_ok();
    if !both {
        model
            .eval(&w.theta, &mut w.f)
            .map_err(LmError::ModelAtStart)?;
    }
    // (A model that errs on non-finite values has been checked by its evaluation.)
    let checked = model.finite_or_error();
    if !checked && let Some(row) = w.f.iter().position(|v| !v.is_finite()) {
        return Err(LmError::NonFiniteAtStart {
            what: "model value",
            row,
        });
    }
    let (mut ssr, y_sum) = if streaming {
        blocked_residuals(obs.y, &w.f, &w.sqrt_w, w.unit, &mut w.e)
    } else {
        let ssr = weighted_residuals(obs.y, &w.f, &w.sqrt_w, &mut w.e);
        let y_sum = obs
            .y
            .iter()
            .zip(&w.sqrt_w)
            .map(|(y, s)| (s * y) * (s * y))
            .sum::<f64>();
        (ssr, y_sum)
    };
    if !both {
        model
            .jacobian(&w.theta, &mut w.jac)
            .map_err(LmError::JacobianAtStart)?;
    }
    if !checked && let Some(k) = w.jac.as_slice().iter().position(|v| !v.is_finite()) {
        return Err(LmError::NonFiniteAtStart {
            what: "Jacobian",
            row: k % n,
        });
    }
    let mut nfev = 1;
    let mut njev = 1;
    let max_jev = options.max_jacobian_evals(p);
    let zero_threshold = ZERO_RESIDUAL * y_sum;
    let mut lambda = options.initial_damping;
    let mut nu = 2.0;
    let mut iterations = 0;
    let mut last_model_error: Option<String> = None;
    let speculative = n >= options.speculative_from;
    // (`streaming` is decided with the work buffers above.)
    // Whether `w.jac_trial` holds the Jacobian at `w.theta_trial` already.
    let mut jac_ready;
    // The acceleration starts off, and is on from the first trial whose gain ratio falls
    // below ACCEL_FROM_GAIN (or that is rejected) to the end of the fit (see the module docs).
    let mut accelerate = false;

    let stop = 'outer: loop {
        if ssr <= zero_threshold {
            break StopReason::ZeroResidual;
        }
        // Weighted Jacobian, scaling and projected gradient. Streaming: the column sums come
        // with R and Qᵀe from one blocked pass over the rows (‖e‖ = √SSR, SSR being ‖e‖²).
        let enorm = if streaming {
            ssr.sqrt()
        } else {
            dense::norm2(&w.e)
        };
        let mut gnorm = 0.0_f64;
        let sqrt_w = (!w.unit).then_some(&w.sqrt_w[..]);
        if streaming {
            w.frozen.fill(false);
            dense::streaming_qr(
                w.jac.as_slice(),
                &w.sqrt_w,
                w.unit,
                &w.frozen,
                Some(&w.e),
                Some(&mut w.sums),
                &mut w.qr,
                &mut w.qte,
            );
        }
        for j in 0..p {
            let col = &w.jac.as_slice()[j * n..(j + 1) * n];
            let (g, c) = if streaming {
                let (g, sum) = w.sums[j];
                (g, dense::column_norm(sum, col, sqrt_w))
            } else {
                let qcol = &mut w.qr.as_mut_slice()[j * n..(j + 1) * n];
                dense::weighted_column(col, sqrt_w, &w.e, qcol)
            };
            w.col_norm[j] = c;
            w.diag[j] = w.diag[j].max(c);
            if w.diag[j] == 0.0 {
                w.diag[j] = 1.0;
            }
            w.grad[j] = g;
            // Descent direction of SSR is +g; hold a parameter at a bound it would leave.
            let th = w.theta[j];
            w.frozen[j] = (th <= bounds[j].lower && g < 0.0) || (th >= bounds[j].upper && g > 0.0);
            if w.frozen[j] {
                if !streaming {
                    w.qr.as_mut_slice()[j * n..(j + 1) * n].fill(0.0);
                }
            } else if c > 0.0 && enorm > 0.0 {
                gnorm = gnorm.max(g.abs() / (c * enorm));
            }
        }
        if gnorm <= options.gtol {
            break StopReason::Gradient { gtol: options.gtol };
        }
        if streaming {
            // A held parameter's column is zero in R: the QR again without it (rare: only
            // at an active bound).
            if w.frozen.iter().any(|f| *f) {
                dense::streaming_qr(
                    w.jac.as_slice(),
                    &w.sqrt_w,
                    w.unit,
                    &w.frozen,
                    Some(&w.e),
                    None,
                    &mut w.qr,
                    &mut w.qte,
                );
            }
        } else {
            w.qte.copy_from_slice(&w.e);
            dense::householder_qr_with_qtb(&mut w.qr, &mut w.tau, &mut w.qte);
        }

        // Inner loop: trial steps at increasing damping until one is accepted.
        loop {
            if lambda.is_nan() || lambda > LAMBDA_MAX {
                break 'outer StopReason::DidNotConverge {
                    iterations,
                    cause: NonConvergence::NoAcceptableStep {
                        last_model_error: last_model_error.clone(),
                    },
                };
            }
            let mut ok =
                dense::damped_solve(&w.qr, &w.diag, lambda, &w.qte, &mut w.damped, &mut w.v);
            // Predicted reduction of the linear model for the velocity part u of the step
            // (u = v projected into the box): 2·(Ru)ᵀ(Qᵀe) − ‖Ru‖². The acceleration corrects
            // for curvature the linear model does not see, so the gain ratio compares the
            // actual reduction of v + a/2 with the reduction predicted for v (Transtrum &
            // Sethna 2012, §III).
            let mut pred = 0.0;
            if ok {
                for j in 0..p {
                    w.rstep[j] =
                        (w.theta[j] + w.v[j]).clamp(bounds[j].lower, bounds[j].upper) - w.theta[j];
                }
                for i in 0..p {
                    let mut s = 0.0;
                    for k in i..p {
                        s += w.qr[(i, k)] * w.rstep[k];
                    }
                    pred += 2.0 * s * w.qte[i] - s * s;
                }
            }
            // Below a predicted relative reduction of ftol the second-order correction is
            // beneath the resolution of the stop test; skipping it saves a model evaluation
            // per trial in the final, noise-limited iterations.
            w.a.fill(0.0);
            if ok && accelerate && options.geodesic_acceleration && pred > options.ftol * ssr {
                ok = acceleration(
                    model,
                    obs,
                    &mut w,
                    &mut nfev,
                    n >= PROJECTED_RHS_FROM || streaming,
                    streaming,
                );
            }
            if ok {
                // Trial point, projected into the box.
                for j in 0..p {
                    let t = w.theta[j] + w.v[j] + 0.5 * w.a[j];
                    let t = t.clamp(bounds[j].lower, bounds[j].upper);
                    w.theta_trial[j] = t;
                    w.step[j] = t - w.theta[j];
                }
                ok = w.step.iter().all(|s| s.is_finite());
            }
            if ok {
                let rel_step = (0..p)
                    .map(|j| w.step[j].abs() / (w.theta[j].abs() + options.xtol))
                    .fold(0.0_f64, f64::max);
                nfev += 1;
                // With the Jacobian alongside (large n); a model error there may belong to the
                // Jacobian alone, so the values are then evaluated by themselves, as below.
                jac_ready = speculative
                    && model
                        .eval_with_jacobian(&w.theta_trial, &mut w.f_trial, &mut w.jac_trial)
                        .is_ok();
                let evaluated = match if jac_ready {
                    Ok(())
                } else {
                    model.eval(&w.theta_trial, &mut w.f_trial)
                } {
                    Ok(()) => true,
                    Err(e) => {
                        last_model_error = Some(e.message);
                        false
                    }
                };
                // ẽ = W½·(y − f̃), SSR_trial = ‖ẽ‖², and SSR − SSR_trial as
                // Σ (eᵢ − ẽᵢ)(eᵢ + ẽᵢ): accurate even when the two sums agree in most digits,
                // where their difference would be rounding noise.
                let trial = if evaluated {
                    trial_sums(obs.y, &mut w)
                } else {
                    None
                };
                if evaluated && trial.is_none() {
                    last_model_error = Some("the model gave a non-finite value".into());
                }
                if let Some(TrialSums {
                    ssr: ssr_trial,
                    actual,
                    noise,
                }) = trial
                {
                    let converged_here = actual.abs() <= options.ftol * ssr
                        && pred <= options.ftol * ssr
                        && rel_step <= options.xtol;
                    let rho = if pred > 0.0 { actual / pred } else { -1.0 };
                    if rho < ACCEL_FROM_GAIN {
                        accelerate = true;
                    }
                    // Near the minimum of a large-residual problem Gauss–Newton converges
                    // only linearly, and the last steps change SSR by less than the rounding
                    // noise of evaluating it. Such a comparison cannot decide; when the linear
                    // model (still accurate there) predicts a reduction below ftol·SSR, the
                    // step is taken rather than inflating λ until the step test passes short
                    // of the minimum (seen on NIST ENSO: parameter LRE 6.8 → above 9).
                    let inconclusive = pred > 0.0 && pred <= options.ftol * ssr && actual >= -noise;
                    if (rho > 0.0 || inconclusive || (converged_here && actual > 0.0))
                        && njev < max_jev
                        && accept(model, &mut w, &mut njev, jac_ready)
                    {
                        std::mem::swap(&mut w.f, &mut w.f_trial);
                        std::mem::swap(&mut w.e, &mut w.e_trial);
                        std::mem::swap(&mut w.theta, &mut w.theta_trial);
                        ssr = ssr_trial;
                        iterations += 1;
                        if rho > 0.0 {
                            let factor = 1.0 - (2.0 * rho - 1.0).powi(3);
                            lambda = (lambda * factor.max(1.0 / 3.0)).max(LAMBDA_MIN);
                        }
                        nu = 2.0;
                        if converged_here {
                            break 'outer StopReason::RelativeReductionAndStep {
                                ftol: options.ftol,
                                xtol: options.xtol,
                            };
                        }
                        break;
                    }
                    if converged_here {
                        break 'outer StopReason::RelativeReductionAndStep {
                            ftol: options.ftol,
                            xtol: options.xtol,
                        };
                    }
                }
            }
            if njev >= max_jev {
                break 'outer StopReason::DidNotConverge {
                    iterations,
                    cause: NonConvergence::JacobianLimit { limit: max_jev },
                };
            }
            // A rejected trial (including one the acceleration rejected, or where the model
            // failed): accelerate from now on.
            accelerate = true;
            lambda *= nu;
            nu *= 2.0;
        }
        if njev >= max_jev {
            break StopReason::DidNotConverge {
                iterations,
                cause: NonConvergence::JacobianLimit { limit: max_jev },
            };
        }
    };

    // Stopped by the step test: one Gauss–Newton step from there, kept when it lowers SSR
    // (see `refine`). Small n only: the streaming path keeps no reflectors to reuse.
    if options.refine
        && matches!(stop, StopReason::RelativeReductionAndStep { .. })
        && !streaming
        && let Some(refined) = refine(model, obs, &mut w, bounds, options.xtol, &mut nfev)
    {
        ssr = refined;
        njev += 1;
        iterations += 1;
    }

    // With unit weights e = y − f already, to the bit (both passes leave out the factor 1).
    let residuals: Vec<f64> = if w.unit {
        std::mem::take(&mut w.e)
    } else {
        obs.y.iter().zip(&w.f).map(|(y, f)| y - f).collect()
    };
    let at_bound = (0..p)
        .map(|j| w.theta[j] == bounds[j].lower || w.theta[j] == bounds[j].upper)
        .collect();
    Ok(LmOutcome {
        params: w.theta,
        ssr,
        residuals,
        fitted: w.f,
        jacobian: w.jac,
        iterations,
        jacobian_evals: njev,
        function_evals: nfev,
        stop,
        at_bound,
    })
}

/// The Gauss–Newton step δ = R⁻¹·(Qᵀe)[..p] (λ = 0) from the point where the step test stopped
/// the fit, from the QR of J_w there. When δ itself fails the step test (some
/// |δⱼ| > xtol·(|θⱼ| + xtol)), the trial point θ + δ (values and Jacobian in one pass)
/// becomes the result if it lies in the box and lowers SSR, judged by the actual reduction
/// Σ (eᵢ − ẽᵢ)(eᵢ + ẽᵢ) of [`trial_sums`] (accurate where the two sums agree in most
/// digits). Returns the new SSR; `nfev` counts the evaluation.
///
/// Why: the step test passes once the *damped* step is below xtol, which a λ inflated by
/// trials the rounding noise rejected also achieves short of the minimum. An undamped step
/// that passes the test too says the fit had stopped moving, and nothing is evaluated (every
/// NIST fit but Lanczos1: relative Gauss–Newton steps of 2·10⁻¹² at most). Otherwise the
/// undamped step of the linear model, which is accurate so close to the solution (Gauss–Newton
/// converges quadratically on small-residual problems: Madsen, Nielsen & Tingleff, "Methods
/// for non-linear least squares problems", 2nd ed. 2004, §3.1, from memory), closes the
/// remaining gap. MINPACK's `lmder` likewise reports the last point only when SSR did not
/// grow. On NIST Lanczos1, whose data are exact to about 10⁻¹³, the lowest parameter LRE goes
/// from 9.8 to the figure in docs/conformance.md.
fn refine<M: Model + ?Sized>(
    model: &M,
    obs: &Observations<'_>,
    w: &mut Work,
    bounds: &[Bound],
    xtol: f64,
    nfev: &mut usize,
) -> Option<f64> {
    let (n, p) = w.jac.shape();
    let sqrt_w = (!w.unit).then_some(&w.sqrt_w[..]);
    for j in 0..p {
        let col = &w.jac.as_slice()[j * n..(j + 1) * n];
        let qcol = &mut w.qr.as_mut_slice()[j * n..(j + 1) * n];
        dense::weighted_column(col, sqrt_w, &w.e, qcol);
    }
    w.qte.copy_from_slice(&w.e);
    dense::householder_qr_with_qtb(&mut w.qr, &mut w.tau, &mut w.qte);
    if !dense::solve_upper(&w.qr, &w.qte[..p], &mut w.step) {
        return None;
    }
    // The undamped step passes the step test too: the fit had stopped moving.
    if (0..p).all(|j| w.step[j].abs() <= xtol * (w.theta[j].abs() + xtol)) {
        return None;
    }
    *nfev += 1;
    for j in 0..p {
        let t = w.theta[j] + w.step[j];
        if !(t.is_finite() && bounds[j].lower <= t && t <= bounds[j].upper) {
            return None;
        }
        w.theta_trial[j] = t;
    }
    model
        .eval_with_jacobian(&w.theta_trial, &mut w.f_trial, &mut w.jac_trial)
        .ok()?;
    let trial = trial_sums(obs.y, w)?;
    let lower = trial.actual > 0.0;
    if !lower || !(model.finite_or_error() || all_finite(w.jac_trial.as_slice())) {
        return None;
    }
    std::mem::swap(&mut w.f, &mut w.f_trial);
    std::mem::swap(&mut w.e, &mut w.e_trial);
    std::mem::swap(&mut w.theta, &mut w.theta_trial);
    std::mem::swap(&mut w.jac, &mut w.jac_trial);
    Some(trial.ssr)
}

/// Evaluate the Jacobian at the trial point (unless `ready`: computed with the values); true
/// when usable (then it becomes current).
fn accept<M: Model + ?Sized>(model: &M, w: &mut Work, njev: &mut usize, ready: bool) -> bool {
    *njev += 1;
    let evaluated = if ready {
        Ok(())
    } else {
        model.jacobian(&w.theta_trial, &mut w.jac_trial)
    };
    let finite = || {
        model.finite_or_error()
            || if w.blocked {
                blocked_all_finite(w.jac_trial.as_slice())
            } else {
                all_finite(w.jac_trial.as_slice())
            }
    };
    match evaluated {
        Ok(()) if finite() => {
            std::mem::swap(&mut w.jac, &mut w.jac_trial);
            true
        }
        _ => false,
    }
}

/// Geodesic acceleration for the velocity in `w.v` (see the module docs); fills `w.a`.
/// Returns false when the step must be rejected (acceleration too large relative to v).
/// If the model fails at θ + h·v, the acceleration is dropped (a = 0) and the plain step is tried.
fn acceleration<M: Model + ?Sized>(
    model: &M,
    obs: &Observations<'_>,
    w: &mut Work,
    nfev: &mut usize,
    large: bool,
    streaming: bool,
) -> bool {
    let p = w.v.len();
    let n = obs.y.len();
    w.a.fill(0.0);
    for j in 0..p {
        w.theta_trial[j] = w.theta[j] + ACCEL_H * w.v[j];
    }
    *nfev += 1;
    if model.eval(&w.theta_trial, &mut w.f_trial).is_err() {
        return true;
    }
    // rhs = −W½·f_vv with f_vv ≈ (2/h)·((f(θ + h·v) − f(θ))/h − J·v), in one pass over the
    // rows (J·v summed over the columns in order).
    // Only the first p entries of Qᵀ·rhs enter the damped solve. For large n they are taken
    // as R⁻ᵀ·(J_wᵀ·rhs) in the same pass (J_w = Q·R with the thin Q, so Qᵀ·rhs = R⁻ᵀ·J_wᵀ·rhs:
    // exact in exact arithmetic, with a rounding error that grows with R's condition number,
    // which is harmless here: the accelerated step is judged by its actual reduction like any
    // other). Otherwise, or when R is singular, by the Householder reflectors.
    // Without stored reflectors (streaming QR) a singular R leaves the plain step.
    let projected = large && projected_second_directional(w, n, p);
    if !projected {
        if streaming || !second_directional(w, n, p) {
            w.a.fill(0.0);
            return true;
        }
        dense::apply_qt(&w.qr, &w.tau, &mut w.rhs);
    }
    // Same R, D and λ as the velocity's solve just before: its rotations are replayed on the
    // new right-hand side (the same bits as a fresh solve, for O(p²) work).
    if !dense::damped_resolve(&mut w.damped, &w.rhs, &mut w.a) {
        w.a.fill(0.0);
        return true;
    }
    let (mut na, mut nv) = (0.0, 0.0);
    for j in 0..p {
        na += (w.diag[j] * w.a[j]).powi(2);
        nv += (w.diag[j] * w.v[j]).powi(2);
    }
    2.0 * na.sqrt() <= ACCEL_ALPHA * nv.sqrt()
}

/// f_vv at a row from f(θ + h·v), f(θ) and (J·v) there: (2/h)·((f̃ − f)/h − J·v).
#[inline(always)]
fn second_difference_of(ft: f64, f: f64, jv: f64) -> f64 {
    (2.0 / ACCEL_H) * ((ft - f) / ACCEL_H - jv)
}

/// rhs = −W½·f_vv, f_vv ≈ (2/h)·((f(θ + h·v) − f(θ))/h − J·v) with f(θ + h·v) in `w.f_trial`
/// (see the module docs); false when a value at θ + h·v is not finite.
///
/// J·v is accumulated into `rhs` column after column, row by row the same sum as in
/// a row-by-row loop (0 + J₀v₀ + J₁v₁ + …, in that order) and so the same bits, in
/// passes the compiler vectorizes over the rows.
fn second_directional(w: &mut Work, n: usize, p: usize) -> bool {
    let jac = &w.jac.as_slice()[..n * p];
    let (ft, f, v) = (&w.f_trial[..n], &w.f[..n], &w.v[..p]);
    let sqrt_w = (!w.unit).then_some(&w.sqrt_w[..n]);
    let rhs = &mut w.rhs[..n];
    crate::vector::vectorized(
        n,
        #[inline(always)]
        || {
            rhs.fill(0.0);
            for (col, vj) in jac.chunks_exact(n).zip(v) {
                for (r, c) in rhs.iter_mut().zip(col) {
                    *r += c * vj;
                }
            }
            let mut finite = true;
            let rows = rhs.iter_mut().zip(ft).zip(f);
            match sqrt_w {
                // −1·x = −x exactly.
                None => {
                    for ((r, ft), f) in rows {
                        finite &= ft.abs() < f64::INFINITY;
                        *r = -second_difference_of(*ft, *f, *r);
                    }
                }
                Some(sw) => {
                    for (((r, ft), f), sw) in rows.zip(sw) {
                        finite &= ft.abs() < f64::INFINITY;
                        *r = -sw * second_difference_of(*ft, *f, *r);
                    }
                }
            }
            finite
        },
    )
}

/// The first p entries of Qᵀ·rhs for rhs = −W½·f_vv (see [`second_directional`]) as
/// R⁻ᵀ·(J_wᵀ·rhs), in one pass over the rows without storing rhs; into `w.rhs[..p]`. False
/// when a value at θ + h·v is not finite or R has a zero on its diagonal (a held parameter,
/// whose column was zeroed, or a rank-deficient J_w): then nothing usable was written.
fn projected_second_directional(w: &mut Work, n: usize, p: usize) -> bool {
    let jac = w.jac.as_slice();
    // (√w is empty for unit weights on the blocked path, and not read then.)
    let (ft, f, sw, v) = (&w.f_trial[..n], &w.f[..n], &w.sqrt_w[..], &w.v[..p]);
    let unit = w.unit;
    // Per block of rows (fit::rows, on the rayon pool): whether every f(θ + h·v) is finite,
    // and J_wᵀ·rhs over the block; the blocks' sums are added in block order.
    let parts = super::rows::map(n, |rows| {
        crate::vector::vectorized(
            rows.len(),
            #[inline(always)]
            || projected_rows(jac, n, rows, ft, f, sw, unit, v),
        )
    });
    let jtr = &mut w.jtr[..p];
    jtr.fill(0.0);
    let mut finite = true;
    for (ok, part) in &parts {
        finite &= ok;
        for (g, add) in jtr.iter_mut().zip(part) {
            *g += add;
        }
    }
    if !finite {
        return false;
    }
    // Rᵀ·z = J_wᵀ·rhs by forward substitution (Rᵀ is lower triangular).
    for k in 0..p {
        let rkk = w.qr[(k, k)];
        if rkk == 0.0 || w.frozen[k] {
            return false;
        }
        let mut s = jtr[k];
        for i in 0..k {
            s -= w.qr[(i, k)] * w.rhs[i];
        }
        w.rhs[k] = s / rkk;
    }
    w.rhs[..p].iter().all(|z| z.is_finite())
}

/// Rows per piece of [`projected_rows`]: the piece's rhs values (16 KB) stay in L1.
const PROJECTED_PIECE: usize = 2048;

/// One block of [`projected_second_directional`]: (every f(θ + h·v) finite, J_wᵀ·rhs over
/// `rows`), with rhsᵢ = −√wᵢ·f_vv,ᵢ (see [`second_difference_of`]) computed a piece of rows at a
/// time and then multiplied into each weighted column with the four-lane sums of a dot
/// product; the pieces' sums are added in order.
#[allow(clippy::too_many_arguments)]
#[inline(always)]
fn projected_rows(
    jac: &[f64],
    n: usize,
    rows: std::ops::Range<usize>,
    ft: &[f64],
    f: &[f64],
    sw: &[f64],
    unit: bool,
    v: &[f64],
) -> (bool, Vec<f64>) {
    let p = v.len();
    let mut jtr = vec![0.0; p];
    let mut finite = true;
    let mut swr = [0.0_f64; PROJECTED_PIECE];
    let mut lo = rows.start;
    while lo < rows.end {
        let len = PROJECTED_PIECE.min(rows.end - lo);
        let piece = &mut swr[..len];
        // J·v summed over the columns in order (0 + J₀v₀ + J₁v₁ + …).
        piece.fill(0.0);
        for (j, vj) in v.iter().enumerate() {
            for (r, c) in piece.iter_mut().zip(&jac[j * n + lo..j * n + lo + len]) {
                *r += c * vj;
            }
        }
        let (ftp, fp) = (&ft[lo..lo + len], &f[lo..lo + len]);
        if unit {
            // √w = 1: rhs = −f_vv and √w·rhs = rhs exactly.
            for ((r, ft), f) in piece.iter_mut().zip(ftp).zip(fp) {
                finite &= ft.abs() < f64::INFINITY;
                *r = -second_difference_of(*ft, *f, *r);
            }
        } else {
            for (((r, ft), f), s) in piece.iter_mut().zip(ftp).zip(fp).zip(&sw[lo..lo + len]) {
                finite &= ft.abs() < f64::INFINITY;
                *r = s * (-s * second_difference_of(*ft, *f, *r));
            }
        }
        for (j, g) in jtr.iter_mut().enumerate() {
            *g += dense::dot_kernel(&jac[j * n + lo..j * n + lo + len], piece);
        }
        lo += len;
    }
    (finite, jtr)
}

/// Allowance for rounding inside the model's evaluation, in units of ε·|f| (common practice:
/// a few ulps per elementary operation; 16 covers formulas of a dozen operations).
const MODEL_ROUNDING_ULPS: f64 = 16.0;

/// The sums of one trial point, from [`trial_sums`].
struct TrialSums {
    /// SSR_trial = ‖ẽ‖².
    ssr: f64,
    /// The actual reduction SSR − SSR_trial.
    actual: f64,
    /// A bound on the rounding noise of `actual`.
    noise: f64,
}

/// In one pass over the rows: ẽ = W½·(y − f̃) into `w.e_trial`, SSR_trial = ‖ẽ‖², the actual
/// reduction SSR − SSR_trial computed as Σ (eᵢ − ẽᵢ)(eᵢ + ẽᵢ) — accurate even when the two
/// sums agree in most digits — and a bound on its rounding noise,
/// Σ |eᵢ + ẽᵢ|·√wᵢ·(|fᵢ| + |f̃ᵢ|)·16ε (each model value carries a relative rounding error of
/// a few ε, which enters eᵢ − ẽᵢ = √wᵢ·(f̃ᵢ − fᵢ)). None when a trial value is not finite.
///
/// The three sums run over the rows in order (on the blocked path, in four lanes per block,
/// see [`trial_lanes`]); with unit weights the multiplications by √wᵢ = 1 are left out
/// (1·x = x exactly).
fn trial_sums(y: &[f64], w: &mut Work) -> Option<TrialSums> {
    let n = y.len();
    let (f, ft, e) = (&w.f[..n], &w.f_trial[..n], &w.e[..n]);
    let et = &mut w.e_trial[..n];
    let (finite, ssr, actual, noise) = if w.blocked {
        blocked_trial_rows(y, f, ft, &w.sqrt_w, w.unit, e, et)
    } else if w.unit {
        crate::vector::vectorized(
            n,
            #[inline(always)]
            || trial_rows::<true>(y, f, ft, e, e, et),
        )
    } else {
        let sw = &w.sqrt_w[..n];
        crate::vector::vectorized(
            n,
            #[inline(always)]
            || trial_rows::<false>(y, f, ft, sw, e, et),
        )
    };
    finite.then_some(TrialSums {
        ssr,
        actual,
        noise: noise * MODEL_ROUNDING_ULPS * f64::EPSILON,
    })
}

/// The pass of [`trial_sums`]: ẽ into `et`; whether every f̃ᵢ is finite, SSR_trial, the actual
/// reduction and the unscaled noise sum. With `UNIT`, `sw` is not read.
#[inline(always)]
fn trial_rows<const UNIT: bool>(
    y: &[f64],
    f: &[f64],
    ft: &[f64],
    sw: &[f64],
    e: &[f64],
    et: &mut [f64],
) -> (bool, f64, f64, f64) {
    let weigh = |s: f64, x: f64| if UNIT { x } else { s * x };
    let (mut ssr, mut actual, mut noise) = (0.0, 0.0, 0.0);
    let mut finite = true;
    let rows = y.iter().zip(f).zip(ft).zip(sw).zip(e).zip(et);
    for (((((y, f), ft), sw), a), et) in rows {
        finite &= ft.abs() < f64::INFINITY;
        let b = weigh(*sw, y - ft);
        *et = b;
        ssr += b * b;
        actual += (a - b) * (a + b);
        noise += weigh(*sw, (a + b).abs()) * (f.abs() + ft.abs());
    }
    (finite, ssr, actual, noise)
}

/// The sums of [`trial_rows`] over one block of a large data set, each with four partial
/// sums as in [`dense::dot`]: lane k over rows 4m + k, the n mod 4 rows left over in order,
/// combined as (s₀ + s₁) + (s₂ + s₃) + tail. The lanes are independent, so the pass runs
/// four rows per vector operation instead of one row per chain of dependent additions
/// (a plain row-order sum cannot be vectorized without reordering it). Whether every f̃ᵢ is
/// finite comes from Σ f̃ᵢ·0, which is 0 exactly when they all are (as
/// [`crate::vector::all_finite`]).
#[inline(always)]
fn trial_lanes<const UNIT: bool>(
    y: &[f64],
    f: &[f64],
    ft: &[f64],
    sw: &[f64],
    e: &[f64],
    et: &mut [f64],
) -> (bool, f64, f64, f64) {
    let weigh = |s: f64, x: f64| if UNIT { x } else { s * x };
    let n = y
        .len()
        .min(f.len())
        .min(ft.len())
        .min(sw.len())
        .min(e.len())
        .min(et.len());
    let whole = n - n % 4;
    let (y, f, ft, sw, e, et) = (&y[..n], &f[..n], &ft[..n], &sw[..n], &e[..n], &mut et[..n]);
    // Behind an optimization barrier, as dense's lane sums (else the loop is laid out for
    // the final combination and runs one row at a time). No effect on any value.
    let [zero, ssr, actual, noise] = std::hint::black_box(trial_blocks::<UNIT>(
        &y[..whole],
        &f[..whole],
        &ft[..whole],
        &sw[..whole],
        &e[..whole],
        &mut et[..whole],
    ));
    let (mut ssr_t, mut actual_t, mut noise_t, mut zero_t) = (0.0, 0.0, 0.0, 0.0);
    for i in whole..n {
        zero_t += ft[i] * 0.0;
        let (a, b) = (e[i], weigh(sw[i], y[i] - ft[i]));
        et[i] = b;
        ssr_t += b * b;
        actual_t += (a - b) * (a + b);
        noise_t += weigh(sw[i], (a + b).abs()) * (f[i].abs() + ft[i].abs());
    }
    let total = |l: [f64; 4], t: f64| (l[0] + l[1]) + (l[2] + l[3]) + t;
    (
        total(zero, zero_t) == 0.0,
        total(ssr, ssr_t),
        total(actual, actual_t),
        total(noise, noise_t),
    )
}

/// The four lane sums of [`trial_lanes`] over whole groups of four rows: Σ f̃·0, SSR_trial,
/// the actual reduction and the unscaled noise, writing ẽ.
#[inline(always)]
fn trial_blocks<const UNIT: bool>(
    y: &[f64],
    f: &[f64],
    ft: &[f64],
    sw: &[f64],
    e: &[f64],
    et: &mut [f64],
) -> [[f64; 4]; 4] {
    let weigh = |s: f64, x: f64| if UNIT { x } else { s * x };
    let (mut ssr, mut actual, mut noise, mut zero) = ([0.0_f64; 4], [0.0; 4], [0.0; 4], [0.0; 4]);
    let rows = y
        .chunks_exact(4)
        .zip(f.chunks_exact(4))
        .zip(ft.chunks_exact(4))
        .zip(sw.chunks_exact(4))
        .zip(e.chunks_exact(4))
        .zip(et.chunks_exact_mut(4));
    for (((((y, f), ft), sw), a), et) in rows {
        for k in 0..4 {
            zero[k] += ft[k] * 0.0;
            let b = weigh(sw[k], y[k] - ft[k]);
            et[k] = b;
            ssr[k] += b * b;
            actual[k] += (a[k] - b) * (a[k] + b);
            noise[k] += weigh(sw[k], (a[k] + b).abs()) * (f[k].abs() + ft[k].abs());
        }
    }
    [zero, ssr, actual, noise]
}

/// [`trial_lanes`] over the blocks of [`super::rows`] on the rayon pool, the blocks' sums
/// added in block order.
fn blocked_trial_rows(
    y: &[f64],
    f: &[f64],
    ft: &[f64],
    sw: &[f64],
    unit: bool,
    e: &[f64],
    et: &mut [f64],
) -> (bool, f64, f64, f64) {
    let parts = super::rows::map_mut(et, |r, et| {
        let (y, f, ft, e) = (&y[r.clone()], &f[r.clone()], &ft[r.clone()], &e[r.clone()]);
        if unit {
            // √w may be empty and is not read: `e` stands in for it.
            crate::vector::vectorized(
                y.len(),
                #[inline(always)]
                || trial_lanes::<true>(y, f, ft, e, e, et),
            )
        } else {
            let sw = &sw[r];
            crate::vector::vectorized(
                y.len(),
                #[inline(always)]
                || trial_lanes::<false>(y, f, ft, sw, e, et),
            )
        }
    });
    parts.into_iter().fold(
        (true, 0.0, 0.0, 0.0),
        |(fin, ssr, actual, noise), (f2, s2, a2, n2)| (fin & f2, ssr + s2, actual + a2, noise + n2),
    )
}

/// Whether every value is finite ([`crate::vector::all_finite`], in the AVX2 build when the
/// processor has it; these checks run over n·p values on every trial).
fn all_finite(xs: &[f64]) -> bool {
    crate::vector::vectorized(
        xs.len(),
        #[inline(always)]
        || crate::vector::all_finite(xs),
    )
}

/// [`all_finite`] over blocks of values on the rayon pool.
fn blocked_all_finite(xs: &[f64]) -> bool {
    super::rows::map(xs.len(), |r| all_finite(&xs[r]))
        .into_iter()
        .all(|ok| ok)
}

/// e = W½·(y − f) and (‖e‖², ‖W½·y‖²) over the blocks of [`super::rows`] on the rayon pool,
/// each block summed in row order and the blocks in block order; with `unit` `sqrt_w` is not
/// read (1·x = x).
fn blocked_residuals(
    y: &[f64],
    f: &[f64],
    sqrt_w: &[f64],
    unit: bool,
    e: &mut [f64],
) -> (f64, f64) {
    let parts = super::rows::map_mut(&mut e[..y.len()], |r, e| {
        let (y, f) = (&y[r.clone()], &f[r.clone()]);
        let (mut ssr, mut yy) = (0.0, 0.0);
        if unit {
            for ((e, y), f) in e.iter_mut().zip(y).zip(f) {
                let v = y - f;
                *e = v;
                ssr += v * v;
                yy += y * y;
            }
        } else {
            for (((e, y), f), s) in e.iter_mut().zip(y).zip(f).zip(&sqrt_w[r]) {
                let v = s * (y - f);
                *e = v;
                ssr += v * v;
                yy += (s * y) * (s * y);
            }
        }
        (ssr, yy)
    });
    parts
        .into_iter()
        .fold((0.0, 0.0), |(a, b), (c, d)| (a + c, b + d))
}

/// e = W½·(y − f); returns ‖e‖².
fn weighted_residuals(y: &[f64], f: &[f64], sqrt_w: &[f64], e: &mut [f64]) -> f64 {
    let mut ssr = 0.0;
    for i in 0..y.len() {
        let v = sqrt_w[i] * (y[i] - f[i]);
        e[i] = v;
        ssr += v * v;
    }
    ssr
}

fn validate(
    p: usize,
    n: usize,
    obs: &Observations<'_>,
    start: &[f64],
    bounds: &[Bound],
) -> Result<(), LmError> {
    if p == 0 {
        return Err(LmError::Dimension(
            "the model has no parameters to fit".into(),
        ));
    }
    if n < p {
        return Err(LmError::Dimension(format!(
            "{n} observations cannot determine {p} parameters"
        )));
    }
    if start.len() != p {
        return Err(LmError::Dimension(format!(
            "{} start values for {p} parameters",
            start.len()
        )));
    }
    if bounds.len() != p {
        return Err(LmError::Dimension(format!(
            "{} bounds for {p} parameters",
            bounds.len()
        )));
    }
    // (The vectorized test first: the row is looked for only when there is one.)
    if !all_finite(obs.y)
        && let Some(row) = obs.y.iter().position(|v| !v.is_finite())
    {
        return Err(LmError::InvalidData {
            what: "response",
            row,
        });
    }
    if let Some(wt) = obs.weights {
        if wt.len() != n {
            return Err(LmError::Dimension(format!(
                "{} weights for {n} observations",
                wt.len()
            )));
        }
        if let Some(row) = wt.iter().position(|v| !(v.is_finite() && *v >= 0.0)) {
            return Err(LmError::InvalidData {
                what: "weight",
                row,
            });
        }
        if wt.iter().all(|v| *v == 0.0) {
            return Err(LmError::Dimension(
                "all weights are zero: nothing to fit".into(),
            ));
        }
    }
    for (j, b) in bounds.iter().enumerate() {
        if b.lower.is_nan() || b.upper.is_nan() || b.lower > b.upper {
            return Err(LmError::InvalidBound { param: j });
        }
        let s = start[j];
        if !s.is_finite() || s < b.lower || s > b.upper {
            return Err(LmError::InvalidStart { param: j, value: s });
        }
    }
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;

    /// y = a·exp(−b·x), invented data of a thermistor's cooling curve.
    struct Decay {
        x: Vec<f64>,
    }

    impl Model for Decay {
        fn n_params(&self) -> usize {
            2
        }
        fn eval(&self, t: &[f64], f: &mut [f64]) -> Result<(), ModelError> {
            for (fi, x) in f.iter_mut().zip(&self.x) {
                *fi = t[0] * (-t[1] * x).exp();
            }
            Ok(())
        }
        fn jacobian(&self, t: &[f64], j: &mut DMatrix<f64>) -> Result<(), ModelError> {
            for (i, x) in self.x.iter().enumerate() {
                let e = (-t[1] * x).exp();
                j[(i, 0)] = e;
                j[(i, 1)] = -t[0] * x * e;
            }
            Ok(())
        }
    }

    fn decay_data() -> (Decay, Vec<f64>) {
        let x: Vec<f64> = (0..12).map(|i| i as f64 * 0.5).collect();
        // Exact curve 80·exp(−0.35x) plus a fixed, invented perturbation.
        let noise = [
            0.3, -0.2, 0.1, -0.4, 0.2, 0.0, -0.1, 0.15, -0.05, 0.1, -0.2, 0.05,
        ];
        let y = x
            .iter()
            .zip(noise)
            .map(|(x, e)| 80.0 * (-0.35 * x).exp() + e)
            .collect();
        (Decay { x }, y)
    }

    /// 60,000 rows of the decay curve with a fixed, invented perturbation (a sawtooth of
    /// ±0.2): above the large-data thresholds.
    fn long_decay() -> (Decay, Vec<f64>) {
        let x: Vec<f64> = (0..60_000).map(|i| f64::from(i) * 1e-4).collect();
        let y: Vec<f64> = x
            .iter()
            .enumerate()
            .map(|(i, x)| 80.0 * (-0.35 * x).exp() + 0.04 * ((i % 11) as f64 - 5.0))
            .collect();
        (Decay { x }, y)
    }

    #[test]
    fn values_with_the_jacobian_give_the_same_iterations_to_the_last_bit() {
        // Fitted from a far start once with trial values computed alone and once with them
        // computed together with the Jacobian: same path, same bits.
        let (m, y) = long_decay();
        let obs = Observations {
            y: &y,
            weights: None,
        };
        let alone = fit(
            &m,
            &obs,
            &[10.0, 1.5],
            None,
            &LmOptions::default().with_speculative_from(usize::MAX),
        )
        .unwrap();
        let together = fit(
            &m,
            &obs,
            &[10.0, 1.5],
            None,
            &LmOptions::default().with_speculative_from(1),
        )
        .unwrap();
        assert!(alone.stop.converged(), "{}", alone.stop);
        assert_eq!(alone.iterations, together.iterations);
        assert_eq!(alone.jacobian_evals, together.jacobian_evals);
        assert_eq!(alone.function_evals, together.function_evals);
        for (a, b) in alone.params.iter().zip(&together.params) {
            assert_eq!(a.to_bits(), b.to_bits());
        }
        assert_eq!(alone.ssr.to_bits(), together.ssr.to_bits());
    }

    #[test]
    fn the_streaming_qr_reaches_the_same_minimum() {
        // Block-by-block QR against the stored reflectors. The paths
        // differ by rounding only, so the minimum agrees to the tolerance of the stop rules.
        let (m, y) = long_decay();
        let obs = Observations {
            y: &y,
            weights: None,
        };
        let stored = LmOptions::default().with_streaming_qr_from(usize::MAX);
        let streamed = LmOptions::default().with_streaming_qr_from(1);
        let a = fit(&m, &obs, &[10.0, 1.5], None, &stored).unwrap();
        let b = fit(&m, &obs, &[10.0, 1.5], None, &streamed).unwrap();
        assert!(
            a.stop.converged() && b.stop.converged(),
            "{} / {}",
            a.stop,
            b.stop
        );
        for (u, v) in a.params.iter().zip(&b.params) {
            assert!((u - v).abs() <= 1e-10 * u.abs(), "{u} vs {v}");
        }
        assert!((a.ssr - b.ssr).abs() <= 1e-12 * a.ssr);
    }

    #[test]
    fn a_large_fit_gives_the_same_bits_with_any_number_of_threads() {
        // 60,000 rows with weights: the blocked parallel passes (fit::rows) on pools of 1, 2
        // and 3 threads; every parameter, the SSR and the path must agree to the last bit.
        let (m, y) = long_decay();
        let wts: Vec<f64> = (0..y.len()).map(|i| 1.0 + (i % 7) as f64 * 0.25).collect();
        let obs = Observations {
            y: &y,
            weights: Some(&wts),
        };
        let run = |threads: usize| {
            rayon::ThreadPoolBuilder::new()
                .num_threads(threads)
                .build()
                .unwrap()
                .install(|| fit(&m, &obs, &[10.0, 1.5], None, &LmOptions::default()).unwrap())
        };
        let one = run(1);
        assert!(one.stop.converged(), "{}", one.stop);
        for threads in [2, 3] {
            let other = run(threads);
            let bits = |o: &LmOutcome| o.params.iter().map(|v| v.to_bits()).collect::<Vec<_>>();
            assert_eq!(bits(&one), bits(&other), "{threads} threads");
            assert_eq!(one.ssr.to_bits(), other.ssr.to_bits());
            assert_eq!(one.function_evals, other.function_evals);
        }
    }

    #[test]
    fn lane_trial_sums_agree_with_the_row_order_sums() {
        // trial_lanes (the blocked passes) against trial_rows over every tail length: the
        // same ẽ to the bit, the sums up to their order (relative 1e-13, common practice for
        // a few thousand terms), and a non-finite trial value found wherever it is.
        let (m, y) = long_decay();
        let n = 4099;
        let f: Vec<f64> = m.x[..n].iter().map(|x| 80.0 * (-0.35 * x).exp()).collect();
        let ft: Vec<f64> = m.x[..n].iter().map(|x| 79.0 * (-0.34 * x).exp()).collect();
        let sw: Vec<f64> = (0..n).map(|i| 1.0 + (i % 3) as f64 * 0.5).collect();
        let e: Vec<f64> = (0..n).map(|i| sw[i] * (y[i] - f[i])).collect();
        for len in [0, 1, 2, 3, 4, 5, 7, n] {
            let (mut et1, mut et2) = (vec![0.0; len], vec![0.0; len]);
            let args = (&y[..len], &f[..len], &ft[..len], &sw[..len], &e[..len]);
            let a = trial_rows::<false>(args.0, args.1, args.2, args.3, args.4, &mut et1);
            let b = trial_lanes::<false>(args.0, args.1, args.2, args.3, args.4, &mut et2);
            assert_eq!(et1, et2);
            assert!(a.0 && b.0);
            for (u, v) in [(a.1, b.1), (a.2, b.2), (a.3, b.3)] {
                assert!((u - v).abs() <= 1e-13 * u.abs(), "{len}: {u} vs {v}");
            }
        }
        for bad in [0, 5, n - 1] {
            let mut ft = ft.clone();
            ft[bad] = f64::INFINITY;
            let mut et = vec![0.0; n];
            assert!(!trial_lanes::<true>(&y[..n], &f, &ft, &e, &e, &mut et).0);
        }
    }

    #[test]
    fn converges_to_a_stationary_point_from_a_far_start() {
        let (m, y) = decay_data();
        let obs = Observations {
            y: &y,
            weights: None,
        };
        let out = fit(&m, &obs, &[10.0, 1.5], None, &LmOptions::default()).unwrap();
        assert!(out.stop.converged(), "{}", out.stop);
        // First-order optimality: Jᵀe = 0 at the minimum (independent of the method).
        for j in 0..2 {
            let g: f64 = (0..y.len())
                .map(|i| out.jacobian[(i, j)] * out.residuals[i])
                .sum();
            let scale: f64 = (0..y.len())
                .map(|i| out.jacobian[(i, j)].abs() * out.residuals[i].abs())
                .sum();
            assert!(g.abs() <= 1e-9 * scale, "gradient component {j}: {g}");
        }
        assert!((out.params[0] - 80.0).abs() < 1.0 && (out.params[1] - 0.35).abs() < 0.02);
    }

    /// y = Σ aₖ·exp(−bₖ·x), three terms.
    struct ThreeExp {
        x: Vec<f64>,
    }

    impl Model for ThreeExp {
        fn n_params(&self) -> usize {
            6
        }
        fn eval(&self, t: &[f64], f: &mut [f64]) -> Result<(), ModelError> {
            for (fi, x) in f.iter_mut().zip(&self.x) {
                *fi = (0..3).map(|k| t[2 * k] * (-t[2 * k + 1] * x).exp()).sum();
            }
            Ok(())
        }
        fn jacobian(&self, t: &[f64], j: &mut DMatrix<f64>) -> Result<(), ModelError> {
            for (i, x) in self.x.iter().enumerate() {
                for k in 0..3 {
                    let e = (-t[2 * k + 1] * x).exp();
                    j[(i, 2 * k)] = e;
                    j[(i, 2 * k + 1)] = -t[2 * k] * x * e;
                }
            }
            Ok(())
        }
    }

    #[test]
    fn the_final_gauss_newton_step_lowers_ssr_after_a_stop_by_the_step_test() {
        // Invented: three decays of a mixed sample, 24 readings written to 13 decimals, so
        // that the residuals at the minimum are rounding-sized and the exponentials nearly
        // interchangeable (an ill-conditioned, near-zero-residual fit). The fit stops by the
        // step test with a damped step; the undamped one from there is not small, and taking
        // it must lower SSR and the scaled gradient (both measured here, not assumed).
        let m = ThreeExp {
            x: (0..24).map(|i| f64::from(i) * 0.04).collect(),
        };
        let mut y = vec![0.0; 24];
        m.eval(&[0.12, 1.1, 0.79, 3.2, 1.49, 5.3], &mut y).unwrap();
        for v in &mut y {
            *v = (*v * 1e13).round() / 1e13;
        }
        let obs = Observations {
            y: &y,
            weights: None,
        };
        let start = [0.5, 0.8, 0.7, 3.5, 1.2, 5.9];
        let opts = LmOptions::default();
        let plain = fit(&m, &obs, &start, None, &opts.clone().with_refinement(false)).unwrap();
        let refined = fit(&m, &obs, &start, None, &opts).unwrap();
        assert!(
            matches!(plain.stop, StopReason::RelativeReductionAndStep { .. }),
            "{}",
            plain.stop
        );
        assert_eq!(refined.stop, plain.stop);
        assert_eq!(refined.iterations, plain.iterations + 1);
        assert_eq!(refined.function_evals, plain.function_evals + 1);
        assert!(refined.ssr < plain.ssr, "{} ≥ {}", refined.ssr, plain.ssr);
        let cosine = |o: &LmOutcome| {
            let enorm = o.residuals.iter().map(|r| r * r).sum::<f64>().sqrt();
            (0..6)
                .map(|j| {
                    let c = o.jacobian.column(j);
                    let g: f64 = c.iter().zip(&o.residuals).map(|(a, r)| a * r).sum();
                    g.abs() / (c.norm() * enorm)
                })
                .fold(0.0_f64, f64::max)
        };
        assert!(
            cosine(&refined) < cosine(&plain),
            "{} vs {}",
            cosine(&refined),
            cosine(&plain)
        );
        // A well-determined fit's undamped step passes the step test: nothing is evaluated.
        let (d, yd) = decay_data();
        let obs = Observations {
            y: &yd,
            weights: None,
        };
        let a = fit(
            &d,
            &obs,
            &[10.0, 1.5],
            None,
            &opts.clone().with_refinement(false),
        )
        .unwrap();
        let b = fit(&d, &obs, &[10.0, 1.5], None, &opts).unwrap();
        assert_eq!(a, b);
    }

    #[test]
    fn exact_data_stop_as_zero_residual() {
        let x: Vec<f64> = (0..8).map(f64::from).collect();
        let y: Vec<f64> = x.iter().map(|x| 5.0 * (-0.2 * x).exp()).collect();
        let m = Decay { x };
        let obs = Observations {
            y: &y,
            weights: None,
        };
        let out = fit(&m, &obs, &[1.0, 0.5], None, &LmOptions::default()).unwrap();
        assert!(out.stop.converged(), "{}", out.stop);
        assert!((out.params[0] - 5.0).abs() < 1e-10 && (out.params[1] - 0.2).abs() < 1e-11);
    }

    #[test]
    fn active_upper_bound_is_flagged_and_respected() {
        let (m, y) = decay_data();
        let obs = Observations {
            y: &y,
            weights: None,
        };
        let bounds = [
            Bound {
                lower: 0.0,
                upper: 60.0,
            },
            Bound::FREE,
        ];
        let out = fit(&m, &obs, &[10.0, 1.0], Some(&bounds), &LmOptions::default()).unwrap();
        assert!(out.stop.converged(), "{}", out.stop);
        assert_eq!(out.params[0], 60.0);
        assert_eq!(out.at_bound, vec![true, false]);
        // With a held at 60, b must minimise the 1-parameter problem: ∂SSR/∂b = 0.
        let g: f64 = (0..y.len())
            .map(|i| out.jacobian[(i, 1)] * out.residuals[i])
            .sum();
        let jn: f64 = (0..y.len())
            .map(|i| out.jacobian[(i, 1)].powi(2))
            .sum::<f64>()
            .sqrt();
        let en: f64 = out.residuals.iter().map(|e| e * e).sum::<f64>().sqrt();
        // Cosine test at the noise floor of the SSR comparison (SSR ≈ 788 here).
        assert!(g.abs() <= 1e-9 * jn * en, "{g} {jn} {en} {}", out.stop);
    }

    /// A model that fails for negative b (like a log of a negative number would).
    struct Fussy(Decay);
    impl Model for Fussy {
        fn n_params(&self) -> usize {
            2
        }
        fn eval(&self, t: &[f64], f: &mut [f64]) -> Result<(), ModelError> {
            if t[1] < 0.0 {
                return Err(ModelError::new("row 3: ln(b) of a negative number"));
            }
            self.0.eval(t, f)
        }
        fn jacobian(&self, t: &[f64], j: &mut DMatrix<f64>) -> Result<(), ModelError> {
            self.0.jacobian(t, j)
        }
    }

    #[test]
    fn domain_error_at_a_trial_point_rejects_the_step_and_at_the_start_is_an_error() {
        let (m, y) = decay_data();
        let fussy = Fussy(m);
        let obs = Observations {
            y: &y,
            weights: None,
        };
        let out = fit(&fussy, &obs, &[80.0, 0.01], None, &LmOptions::default()).unwrap();
        assert!(out.stop.converged(), "{}", out.stop);
        let err = fit(&fussy, &obs, &[80.0, -1.0], None, &LmOptions::default()).unwrap_err();
        assert!(matches!(err, LmError::ModelAtStart(_)));
        assert!(err.to_string().contains("row 3"));
    }

    #[test]
    fn iteration_limit_is_a_result_not_an_error() {
        let (m, y) = decay_data();
        let obs = Observations {
            y: &y,
            weights: None,
        };
        let opts = LmOptions::default().with_max_jacobian_evals(3).unwrap();
        let out = fit(&m, &obs, &[10.0, 1.5], None, &opts).unwrap();
        assert!(!out.stop.converged());
        assert_eq!(out.jacobian_evals, 3);
        assert!(
            out.stop.to_string().starts_with("did not converge after"),
            "{}",
            out.stop
        );
    }

    #[test]
    fn setters_reject_out_of_range_values() {
        assert!(LmOptions::default().with_xtol(0.0).is_err());
        assert!(LmOptions::default().with_ftol(f64::NAN).is_err());
        assert!(LmOptions::default().with_gtol(1.0).is_err());
        assert!(LmOptions::default().with_initial_damping(-1.0).is_err());
        assert_eq!(LmOptions::default().max_jacobian_evals(3), 800);
        assert_eq!(
            StopReason::RelativeReductionAndStep {
                ftol: 1e-12,
                xtol: 1e-12
            }
            .to_string(),
            "relative reduction and step below 1e-12"
        );
    }

    #[test]
    fn bad_input_is_an_error() {
        let (m, y) = decay_data();
        let obs = Observations {
            y: &y,
            weights: None,
        };
        let o = LmOptions::default();
        assert!(matches!(
            fit(&m, &obs, &[1.0], None, &o),
            Err(LmError::Dimension(_))
        ));
        let b = [
            Bound {
                lower: 2.0,
                upper: 1.0,
            },
            Bound::FREE,
        ];
        assert!(matches!(
            fit(&m, &obs, &[1.5, 1.0], Some(&b), &o),
            Err(LmError::InvalidBound { param: 0 })
        ));
        let b = [
            Bound {
                lower: 0.0,
                upper: 1.0,
            },
            Bound::FREE,
        ];
        assert!(matches!(
            fit(&m, &obs, &[5.0, 1.0], Some(&b), &o),
            Err(LmError::InvalidStart { param: 0, .. })
        ));
        let zero = vec![0.0; y.len()];
        let obs0 = Observations {
            y: &y,
            weights: Some(&zero),
        };
        assert!(matches!(
            fit(&m, &obs0, &[1.0, 1.0], None, &o),
            Err(LmError::Dimension(_))
        ));
        let mut bad = y.clone();
        bad[2] = f64::INFINITY;
        let obs = Observations {
            y: &bad,
            weights: None,
        };
        assert!(matches!(
            fit(&m, &obs, &[1.0, 1.0], None, &o),
            Err(LmError::InvalidData { row: 2, .. })
        ));
    }
}
