//! Running the fit methods of SPEC §5 on a prepared model: the model compiled once to two
//! tapes (the value alone, and the value with its exact Jacobian in one pass), weighted linear
//! least squares for models linear in their parameters, Levenberg–Marquardt in the original
//! space otherwise.

use std::cell::RefCell;

use nalgebra::DMatrix;

use crate::error::{Error, Result};
use crate::expr::{self, Expr, MultiTape, Symbols, TapeScratch};
use crate::fit::linear;
use crate::fit::lm::{self, Bound, LmOptions, Model as LmModel, ModelError, Observations};
use crate::model::Prepared;

/// The model `f(x; θ)` over the rows of the data, with fixed parameters substituted, as the
/// Levenberg–Marquardt solver sees it. Output 0 of `tape` is f, output 1 + j is ∂f/∂θⱼ;
/// `value_tape` computes f alone, for the trial points where the solver needs no Jacobian.
/// Both compile the same simplified f, so they give the same values to the last bit. Each
/// keeps its working memory between calls, so the fit's inner loop does not allocate.
pub struct TapeModel<'a> {
    tape: MultiTape,
    value_tape: MultiTape,
    work: RefCell<TapeScratch>,
    value_work: RefCell<TapeScratch>,
    columns: Vec<&'a [f64]>,
    n: usize,
    p: usize,
    scratch: RefCell<Vec<f64>>,
    describe_row: &'a dyn Fn(usize) -> String,
}

impl<'a> TapeModel<'a> {
    /// Compile `rhs` over `predictors` (columns) and `free` (parameter vector order).
    pub fn new(
        rhs: &Expr,
        predictors: &[String],
        columns: Vec<&'a [f64]>,
        free: &[String],
        describe_row: &'a dyn Fn(usize) -> String,
    ) -> Result<TapeModel<'a>> {
        let symbols = Symbols {
            variables: predictors.to_vec(),
            parameters: free.to_vec(),
        };
        let compile_error = |e: expr::ExprError| {
            Error::internal(format!("the model does not compile: {}", e.message))
        };
        let tape = MultiTape::model_and_jacobian(rhs, &symbols).map_err(compile_error)?;
        let value_tape = MultiTape::compile(&tape.exprs()[..1], &symbols).map_err(compile_error)?;
        let n = columns.first().map_or(0, |c| c.len());
        Ok(TapeModel {
            tape,
            value_tape,
            // The columns are borrowed for the model's lifetime: the same data on every call.
            work: RefCell::new(TapeScratch::for_fixed_columns()),
            value_work: RefCell::new(TapeScratch::for_fixed_columns()),
            columns,
            n,
            p: free.len(),
            // Sized on first use: only a Jacobian asked for without the values needs it.
            scratch: RefCell::new(Vec::new()),
            describe_row,
        })
    }

    fn error(&self, e: expr::EvalError) -> ModelError {
        let sub = if e.subexpr.is_empty() {
            String::new()
        } else {
            format!(" in `{}`", e.subexpr)
        };
        ModelError::new(format!(
            "{}{sub} at {}",
            e.message,
            (self.describe_row)(e.row)
        ))
    }

    /// The model's value on every row.
    pub fn values(&self, params: &[f64]) -> std::result::Result<Vec<f64>, ModelError> {
        let mut f = vec![0.0; self.n];
        self.eval(params, &mut f)?;
        Ok(f)
    }

    /// ∂f/∂θ on every row (n × p).
    pub fn jacobian_at(&self, params: &[f64]) -> std::result::Result<DMatrix<f64>, ModelError> {
        let mut j = DMatrix::zeros(self.n, self.p);
        self.jacobian(params, &mut j)?;
        Ok(j)
    }
}

impl LmModel for TapeModel<'_> {
    fn n_params(&self) -> usize {
        self.p
    }

    /// The tape evaluates with its checks on (`eval_in`): a non-finite value anywhere is an
    /// error that names the row and sub-expression, never an output.
    fn finite_or_error(&self) -> bool {
        true
    }

    fn eval(&self, params: &[f64], f_out: &mut [f64]) -> std::result::Result<(), ModelError> {
        self.value_tape
            .eval_in(
                &mut self.value_work.borrow_mut(),
                &self.columns,
                params,
                &mut [f_out],
            )
            .map_err(|e| self.error(e))
    }

    fn jacobian(
        &self,
        params: &[f64],
        j_out: &mut DMatrix<f64>,
    ) -> std::result::Result<(), ModelError> {
        let mut f = self.scratch.borrow_mut();
        f.resize(self.n, 0.0);
        self.eval_with_jacobian(params, f.as_mut_slice(), j_out)
    }

    /// The Jacobian tape's first output is the model itself, to the last bit the value tape's
    /// (tested below): written straight into `f_out`.
    fn eval_with_jacobian(
        &self,
        params: &[f64],
        f_out: &mut [f64],
        j_out: &mut DMatrix<f64>,
    ) -> std::result::Result<(), ModelError> {
        // The output slices: the values, then the Jacobian's columns (DMatrix is column-major:
        // each column is a contiguous slice of n values). On the stack for up to 15
        // parameters, so that the evaluations of a fit allocate nothing.
        const ON_STACK: usize = 16;
        let columns = j_out.as_mut_slice().chunks_mut(self.n.max(1));
        let mut stack: [&mut [f64]; ON_STACK] = std::array::from_fn(|_| Default::default());
        let mut heap: Vec<&mut [f64]>;
        let outs: &mut [&mut [f64]] = if self.p < ON_STACK {
            let mut k = 0;
            for (slot, out) in stack.iter_mut().zip(std::iter::once(f_out).chain(columns)) {
                *slot = out;
                k += 1;
            }
            &mut stack[..k]
        } else {
            heap = Vec::with_capacity(self.p + 1);
            heap.push(f_out);
            heap.extend(columns);
            &mut heap
        };
        self.tape
            .eval_in(&mut self.work.borrow_mut(), &self.columns, params, outs)
            .map_err(|e| self.error(e))
    }
}

/// The outcome of the fit, in the original space of the model.
#[derive(Debug, Clone)]
pub struct Estimate {
    /// `linear`, `nonlinear`, `linearized` or `linearized+nonlinear`.
    pub method_used: String,
    pub transform: Option<String>,
    /// Free parameters, in [`crate::model::Model::free`] order.
    pub params: Vec<f64>,
    pub fitted: Vec<f64>,
    pub residuals: Vec<f64>,
    /// ∂f/∂θ at the solution (n × p, unweighted).
    pub jacobian: DMatrix<f64>,
    pub ssr: f64,
    pub at_bound: Vec<bool>,
    pub iterations: usize,
    pub jacobian_evals: usize,
    pub converged: bool,
    pub stop_reason: String,
    /// Whether the constant function lies in the span of the model's basis (R² centring).
    pub has_constant: bool,
}

/// Whether `f` is linear in its free parameters as written: every ∂f/∂θⱼ is free of θ.
pub fn is_linear_in_parameters(rhs: &Expr, free: &[String]) -> bool {
    free.iter().all(|p| {
        let d = expr::derivative(rhs, p);
        free.iter().all(|q| !d.mentions(q))
    })
}

/// Whether the constant vector lies in the span of the columns of `design` on these rows
/// (a least-squares fit of 1 on the columns leaves a residual below 1e-10·√n).
pub fn spans_constant(design: &DMatrix<f64>) -> bool {
    let n = design.nrows();
    if n == 0 || design.ncols() == 0 {
        return false;
    }
    let ones = vec![1.0; n];
    let names: Vec<String> = (0..design.ncols())
        .map(|j| format!("column {}", j + 1))
        .collect();
    match linear::fit_linear(design, &ones, None, &names) {
        Ok(f) => f.ssr.sqrt() <= 1e-10 * (n as f64).sqrt(),
        Err(_) => false,
    }
}

/// Weighted linear least squares for a model linear in its free parameters:
/// f = h₀(x) + Σ θⱼ·hⱼ(x) with hⱼ = ∂f/∂θⱼ and h₀ = f(x; 0).
pub fn fit_linear_model(
    prep: &Prepared,
    model: &TapeModel<'_>,
    names: &[String],
) -> Result<Estimate> {
    let y = prep.y();
    let p = names.len();
    let zeros = vec![0.0; p];
    // The basis of a linear model does not depend on the parameters: a value it cannot take
    // on a row stays whatever the fit does.
    let unevaluable = |e: ModelError| {
        Error::input(format!("the model cannot be evaluated: {e}")).help(
            "a term of the model is not finite on that row whatever the parameters: \
             rescale the predictor (another unit) or change the model",
        )
    };
    let h0 = model.values(&zeros).map_err(unevaluable)?;
    let design = model.jacobian_at(&zeros).map_err(unevaluable)?;
    let target: Vec<f64> = y.iter().zip(&h0).map(|(a, b)| a - b).collect();
    let fit = linear::fit_linear(&design, &target, prep.weights.as_deref(), names).map_err(|e| {
        let mut err = Error::input(format!("the linear fit failed: {e}")).help("a design with dependent basis functions cannot be fitted: remove a parameter or add data that separates them");
        if matches!(e, linear::LinearError::RankDeficient { .. } | linear::LinearError::ZeroColumn { .. }) {
            for note in predictor_notes(prep) {
                err = err.note(note);
            }
        }
        err
    })?;
    let fitted: Vec<f64> = fit.fitted.iter().zip(&h0).map(|(a, b)| a + b).collect();
    let residuals: Vec<f64> = y.iter().zip(&fitted).map(|(a, b)| a - b).collect();
    // h₀ is not fitted, so only the basis hⱼ decides whether there is a constant term.
    let has_constant = spans_constant(&design);
    Ok(Estimate {
        method_used: "linear".into(),
        transform: None,
        params: fit.coefficients,
        fitted,
        residuals,
        jacobian: design,
        ssr: fit.ssr,
        at_bound: vec![false; p],
        iterations: 0,
        jacobian_evals: 1,
        converged: true,
        stop_reason: "direct solution (linear least squares by Householder QR)".into(),
        has_constant,
    })
}

/// Facts about the predictor columns that explain a singular or ill-conditioned design: a
/// predictor that does not vary, one with subnormal values (too small to scale), or one whose
/// offset dwarfs its spread, so that its powers and products lose their digits to
/// cancellation (then the model should be written in the centred predictor).
pub fn predictor_notes(prep: &Prepared) -> Vec<String> {
    let mut notes = Vec::new();
    for (name, col) in prep.model.predictors.iter().zip(prep.x()) {
        let finite = col.iter().copied().filter(|v| v.is_finite());
        let (lo, hi) = finite.fold((f64::INFINITY, f64::NEG_INFINITY), |(lo, hi), v| {
            (lo.min(v), hi.max(v))
        });
        if lo > hi {
            continue;
        }
        if lo == hi {
            notes.push(format!(
                "`{name}` has the same value ({}) on every row",
                crate::expr::print::format_number(lo)
            ));
        } else if col.iter().any(|v| v.is_subnormal()) {
            notes.push(format!(
                "`{name}` holds subnormal values (below {:.1e} in magnitude), too small to \
                 scale: express it in a smaller unit, so that its numbers are larger",
                f64::MIN_POSITIVE
            ));
        } else {
            let (mid, spread) = (lo / 2.0 + hi / 2.0, hi - lo);
            if mid.abs() > 1e3 * spread {
                // A round number near the data: any value close to them removes the offset.
                let step = 10f64.powi(mid.abs().log10().floor() as i32 - 3);
                let centre = (mid.abs() / step).floor() * step;
                let shifted = if mid > 0.0 {
                    format!("{name} - {}", crate::expr::print::format_number(centre))
                } else {
                    format!("{name} + {}", crate::expr::print::format_number(centre))
                };
                notes.push(format!(
                    "`{name}` lies between {} and {}: its offset is {:.1e} times its spread, so \
                     its powers and products lose their digits to cancellation; write the model \
                     in `{shifted}`",
                    crate::expr::print::format_number_short(lo),
                    crate::expr::print::format_number_short(hi),
                    mid.abs() / spread
                ));
            }
        }
    }
    notes
}

/// The fit statistics could not be computed: a value outside the range of 64-bit floats
/// (about ±1.8·10³⁰⁸) named by its data row, or the error as it is.
pub fn statistics_error(prep: &Prepared, e: crate::fit::covariance::CovarianceError) -> Error {
    use crate::fit::covariance::CovarianceError;
    match e {
        CovarianceError::NonFinite { what, row } => Error::input(format!(
            "the fit statistics cannot be computed: the {what} is not finite at {}",
            prep.data.describe_row(row)
        ))
        .help(
            "the data or the model leave the range of 64-bit floats (about ±1.8e308) in the fit; \
             express the columns in another unit so that their values are moderate",
        ),
        e => Error::input(format!("the fit statistics cannot be computed: {e}"))
            .help("check the data for constant or degenerate columns"),
    }
}

/// A warning when the scaled Jacobian at the solution is so ill-conditioned that the
/// parameters may keep fewer than about 6 significant digits (κ·ε > 10⁻⁶, ε = 2.2·10⁻¹⁶;
/// the error bound κ·ε of Golub & Van Loan §5.3, from memory — the threshold is common
/// practice: reports show 6 significant digits).
pub fn conditioning_warning(prep: &Prepared, condition: Option<f64>) -> Option<String> {
    let k = condition.filter(|k| k.is_finite() && k * f64::EPSILON > 1e-6)?;
    let mut text = format!(
        "the fit is ill-conditioned: the condition number of the scaled Jacobian is {k:.1e}, \
         so about {} of the 16 significant digits of the parameters can be lost to rounding; \
         the parameters are nearly interchangeable on these data (see their correlations)",
        k.log10().round()
    );
    for n in predictor_notes(prep) {
        text.push_str("; ");
        text.push_str(&n);
    }
    Some(text)
}

/// Levenberg–Marquardt in the original space from `start`.
pub fn fit_nonlinear(
    prep: &Prepared,
    model: &TapeModel<'_>,
    start: &[f64],
    tolerance: f64,
) -> Result<Estimate> {
    let free = prep.model.free();
    let bounds: Vec<Bound> = free
        .iter()
        .map(|p| Bound {
            lower: p.min.unwrap_or(f64::NEG_INFINITY),
            upper: p.max.unwrap_or(f64::INFINITY),
        })
        .collect();
    let options = LmOptions::default()
        .with_xtol(tolerance)
        .and_then(|o| o.with_ftol(tolerance))
        .map_err(|e| Error::input(format!("[fit] tolerance: {e}")))?;
    let obs = Observations {
        y: prep.y(),
        weights: prep.weights.as_deref(),
    };
    let out = lm::fit(model, &obs, start, Some(&bounds), &options).map_err(|e| {
        Error::input(format!("the nonlinear fit cannot start: {e}")).help("check the start values in [model.parameters]: the model must be defined on every row at the start")
    })?;
    // A model that does not respond to any parameter at the start (every derivative zero on
    // every row, as when exp(−b·x) underflows to 0) gives the solver no direction to move: it
    // stops at once, by the gradient test, with the start's Jacobian.
    if out.iterations == 0 && !out.jacobian.is_empty() && out.jacobian.iter().all(|v| *v == 0.0) {
        return Err(Error::input(
            "the nonlinear fit cannot start: the model does not change with any parameter at \
             the start values (every derivative is zero on every row, as when an exponential \
             underflows to 0)",
        )
        .help("choose start values at which the model responds to its parameters, e.g. a smaller rate in exp(-b*x)"));
    }
    let converged = out.stop.converged();
    Ok(Estimate {
        method_used: "nonlinear".into(),
        transform: None,
        params: out.params,
        fitted: out.fitted,
        residuals: out.residuals,
        jacobian: out.jacobian,
        ssr: out.ssr,
        at_bound: out.at_bound,
        iterations: out.iterations,
        jacobian_evals: out.jacobian_evals,
        converged,
        stop_reason: out.stop.to_string(),
        has_constant: true,
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn value_tape_gives_the_jacobian_tapes_values_to_the_last_bit() {
        // The solver compares SSR at trial points (value tape) with SSR at accepted points
        // (the Jacobian tape's output 0); they must be the same function.
        let eq = expr::parse_equation("y = b1*exp(-b2*x)/(1 + b3*x^2) - sqrt(x + b2)").unwrap();
        let x: Vec<f64> = (0..37).map(|i| 0.1 + 0.37 * f64::from(i)).collect();
        let names = ["b1".to_string(), "b2".to_string(), "b3".to_string()];
        let describe = |row: usize| format!("row {row}");
        let model =
            TapeModel::new(&eq.rhs, &["x".to_string()], vec![&x], &names, &describe).unwrap();
        let theta = [2.5, 0.31, 0.07];
        let f = model.values(&theta).unwrap();
        let j = model.jacobian_at(&theta).unwrap();
        let from_jacobian_tape = model.scratch.borrow().clone();
        assert_eq!(j.ncols(), 3);
        for (a, b) in f.iter().zip(&from_jacobian_tape) {
            assert_eq!(a.to_bits(), b.to_bits());
        }
        // And both are the model: b1·e^(−b2·x)/(1 + b3·x²) − √(x + b2) at the first row.
        let x0 = x[0];
        let direct = 2.5 * (-0.31 * x0).exp() / (1.0 + 0.07 * x0 * x0) - (x0 + 0.31).sqrt();
        assert!((f[0] - direct).abs() <= 1e-15 * direct.abs().max(1.0));
    }
}
