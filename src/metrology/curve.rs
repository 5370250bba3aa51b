//! A calibration curve y = f(x) of one predictor, as the metrology computations see it: its
//! value, slope and fit uncertainty at a point, and its inverse (the x that gives a reading y)
//! found inside the calibrated range.
//!
//! [`ModelCurve`] is the curve of a fitted model: the equation compiled once to a tape that
//! gives f, ∂f/∂θ (for the band) and ∂f/∂x (the slope) exactly, built either from a run in the
//! pipeline or from a stored `result.json` ([`ModelCurve::from_result`]).

use nalgebra::DMatrix;

use crate::expr::{self, Expr, MultiTape, Symbols, Tape};
use crate::fit::covariance::{NewReading, ParameterUncertainty, UncertaintyMode};
use crate::result::ResultDoc;

/// What the metrology computations need of a curve.
pub trait Curve {
    /// Name of the response variable (y).
    fn response(&self) -> &str;
    /// Name of the predictor variable (x).
    fn predictor(&self) -> &str;
    /// f(x).
    fn value(&self, x: f64) -> Result<f64, String>;
    /// dy/dx at x.
    fn slope(&self, x: f64) -> Result<f64, String>;
    /// The standard uncertainty of f(x) from the fit (the band's s.e. √(gᵀCg)), or with
    /// `readings = Some(m)` that of the mean of m new readings at x (the s.e. of prediction
    /// √(gᵀCg + σ²/(m·w₀))).
    fn fit_uncertainty(&self, x: f64, readings: Option<u32>) -> Result<f64, String>;
    /// Degrees of freedom of the fit component: n − p, or `None` (infinite) when σ is known
    /// (`uncertainty = "weights"`).
    fn fit_dof(&self) -> Option<f64>;
    /// The calibrated range [min, max] of the predictor.
    fn range(&self) -> (f64, f64);
}

/// Number of intervals of the grid on which [`inverse`] looks for sign changes.
pub const INVERSE_GRID: usize = 256;

/// Every x in [lo, hi] with f(x) = y: sign changes of f − y on a grid of [`INVERSE_GRID`]
/// intervals, each refined by bisection to adjacent floating-point numbers. Points where f
/// is undefined are skipped; a root where f only touches y without crossing is not found
/// (calibration curves are monotone over their range). Sorted ascending.
pub fn inverse(curve: &dyn Curve, y: f64, lo: f64, hi: f64) -> Vec<f64> {
    let mut roots: Vec<f64> = Vec::new();
    if !(lo.is_finite() && hi.is_finite() && y.is_finite()) || hi < lo {
        return roots;
    }
    let g = |x: f64| curve.value(x).ok().map(|v| v - y).filter(|v| v.is_finite());
    let step = (hi - lo) / INVERSE_GRID as f64;
    let mut prev: Option<(f64, f64)> = None;
    for i in 0..=INVERSE_GRID {
        let x = if i == INVERSE_GRID {
            hi
        } else {
            lo + step * i as f64
        };
        let Some(gx) = g(x) else {
            prev = None;
            continue;
        };
        if gx == 0.0 {
            roots.push(x);
        } else if let Some((xp, gp)) = prev
            && gp != 0.0
            && gp.signum() != gx.signum()
        {
            roots.push(bisect(&g, xp, gp, x));
        }
        prev = Some((x, gx));
        if step == 0.0 {
            break;
        }
    }
    roots.dedup();
    roots
}

fn bisect(g: &dyn Fn(f64) -> Option<f64>, mut a: f64, mut ga: f64, mut b: f64) -> f64 {
    // At most 200 halvings: enough to reach adjacent doubles from any finite bracket.
    for _ in 0..200 {
        let m = 0.5 * (a + b);
        if m <= a.min(b) || m >= a.max(b) {
            break;
        }
        match g(m) {
            Some(0.0) => return m,
            Some(gm) if gm.signum() == ga.signum() => {
                a = m;
                ga = gm;
            }
            Some(_) => b = m,
            None => break,
        }
    }
    if ga.abs() <= g(b).map_or(f64::INFINITY, f64::abs) {
        a
    } else {
        b
    }
}

/// The root of f(x) = y nearest to `near` in [lo, hi], if any.
pub fn inverse_near(curve: &dyn Curve, y: f64, near: f64, lo: f64, hi: f64) -> Option<f64> {
    inverse(curve, y, lo, hi)
        .into_iter()
        .min_by(|a, b| (a - near).abs().total_cmp(&(b - near).abs()))
}

/// The calibrated range widened by `factor`·span on each side (for back-calculations and
/// curve comparisons that may step just outside the range).
pub fn widened(range: (f64, f64), factor: f64) -> (f64, f64) {
    let span = (range.1 - range.0).abs().max(f64::MIN_POSITIVE);
    (range.0 - factor * span, range.1 + factor * span)
}

/// The weights expression evaluated at a new point: it may use the predictor and the response
/// (taken as the curve's value there), nothing else (SPEC §13).
#[derive(Debug, Clone)]
struct WeightAt {
    text: String,
    tape: Option<Tape>,
    /// Why a new point has no weight (the expression uses another column).
    unavailable: Option<String>,
}

/// The curve of a fitted model of one predictor.
#[derive(Debug, Clone)]
pub struct ModelCurve {
    response: String,
    predictor: String,
    /// Outputs: f, ∂f/∂θⱼ for each free parameter, ∂f/∂x.
    tape: MultiTape,
    /// f alone.
    value_tape: Tape,
    params: Vec<f64>,
    uncertainty: Option<ParameterUncertainty>,
    weight: Option<WeightAt>,
    range: (f64, f64),
}

/// What a [`ModelCurve`] is built from.
pub struct CurveSpec<'a> {
    pub response: &'a str,
    pub predictor: &'a str,
    /// The right-hand side; every name other than the predictor is a parameter in `names`
    /// (fixed parameters substituted or listed with their values).
    pub rhs: &'a Expr,
    pub names: &'a [String],
    pub values: &'a [f64],
    /// The parameter uncertainty, its covariance in the order of `names`; `None` for a
    /// curve known only by its values (a history line).
    pub uncertainty: Option<ParameterUncertainty>,
    /// `[fit] weights`, when the fit was weighted.
    pub weights: Option<&'a str>,
    pub range: (f64, f64),
}

impl ModelCurve {
    pub fn new(spec: CurveSpec<'_>) -> Result<ModelCurve, String> {
        if spec.names.len() != spec.values.len() {
            return Err(format!(
                "{} parameter names for {} values",
                spec.names.len(),
                spec.values.len()
            ));
        }
        if let Some(u) = &spec.uncertainty
            && u.covariance.nrows() != spec.names.len()
        {
            return Err(format!(
                "the covariance is {}×{}, the curve has {} parameters",
                u.covariance.nrows(),
                u.covariance.ncols(),
                spec.names.len()
            ));
        }
        let symbols = Symbols {
            variables: vec![spec.predictor.to_string()],
            parameters: spec.names.to_vec(),
        };
        let mut outputs = vec![spec.rhs.clone()];
        for n in spec.names {
            outputs.push(expr::derivative(spec.rhs, n));
        }
        outputs.push(expr::derivative(spec.rhs, spec.predictor));
        let tape = MultiTape::compile(&outputs, &symbols).map_err(|e| e.message.clone())?;
        let value_tape = Tape::compile(spec.rhs, &symbols).map_err(|e| e.message.clone())?;
        let weight = match spec.weights {
            None => None,
            Some(text) => Some(weight_at(text, spec.predictor, spec.response)),
        };
        Ok(ModelCurve {
            response: spec.response.to_string(),
            predictor: spec.predictor.to_string(),
            tape,
            value_tape,
            params: spec.values.to_vec(),
            uncertainty: spec.uncertainty,
            weight,
            range: spec.range,
        })
    }

    /// The curve of a stored result: its equation with the fitted (and fixed) parameters,
    /// the covariance of the free ones, the calibrated range of its one predictor.
    pub fn from_result(doc: &ResultDoc) -> Result<ModelCurve, String> {
        let eq = expr::parse_equation(&doc.model.equation)
            .map_err(|e| format!("the stored equation does not parse: {}", e.message))?;
        let [predictor] = doc.model.predictors.as_slice() else {
            return Err(format!(
                "read-offs need a model of one predictor; this one has {}",
                doc.model.predictors.len()
            ));
        };
        let mut rhs = eq.rhs;
        for p in &doc.model.parameters {
            if let Some(v) = p.fixed {
                rhs = rhs.substitute(&p.name, &number(v));
            }
        }
        let values: Vec<f64> = doc
            .free_parameters
            .iter()
            .map(|n| {
                doc.param(n)
                    .map(|p| p.value)
                    .ok_or_else(|| format!("the result has no value of `{n}`"))
            })
            .collect::<Result<_, _>>()?;
        let p = values.len();
        if doc.covariance.len() != p || doc.covariance.iter().any(|r| r.len() != p) {
            return Err(format!(
                "the stored covariance is not {p}×{p} for the free parameters"
            ));
        }
        let covariance = DMatrix::from_fn(p, p, |i, j| doc.covariance[i][j]);
        let std_errors: Vec<Option<f64>> = doc
            .free_parameters
            .iter()
            .map(|n| doc.param(n).and_then(|p| p.std_error))
            .collect();
        let mode = if doc.fit.uncertainty == "weights" {
            UncertaintyMode::Weights
        } else {
            UncertaintyMode::Residuals
        };
        let uncertainty = ParameterUncertainty {
            mode,
            confidence: doc.fit.confidence,
            quantile: doc.statistics.quantile,
            dof: doc.statistics.dof,
            unit_variance: doc.statistics.unit_variance,
            correlation: correlation_of(&covariance),
            covariance,
            estimated: std_errors.iter().map(Option::is_some).collect(),
            rel_std_errors: vec![None; p],
            intervals: vec![None; p],
            std_errors,
            condition: None,
        };
        let range = doc
            .data
            .ranges
            .get(predictor)
            .map(|r| (r[0], r[1]))
            .ok_or_else(|| format!("the result has no calibrated range of `{predictor}`"))?;
        ModelCurve::new(CurveSpec {
            response: &doc.model.response,
            predictor,
            rhs: &rhs,
            names: &doc.free_parameters,
            values: &values,
            uncertainty: Some(uncertainty),
            weights: doc.data.weights.as_deref(),
            range,
        })
    }

    /// All outputs at x: f, ∂f/∂θ…, ∂f/∂x.
    fn outputs(&self, x: f64) -> Result<Vec<f64>, String> {
        let n = self.params.len() + 2;
        let mut values = vec![[0.0_f64]; n];
        let mut outs: Vec<&mut [f64]> = values.iter_mut().map(|v| v.as_mut_slice()).collect();
        self.tape
            .eval(&[&[x]], &self.params, &mut outs)
            .map_err(|e| at_x(&self.predictor, x, &e))?;
        Ok(values.into_iter().map(|v| v[0]).collect())
    }

    /// w₀ at x (1 for an unweighted fit).
    fn weight(&self, x: f64, fitted: f64) -> Result<f64, String> {
        let Some(w) = &self.weight else {
            return Ok(1.0);
        };
        if let Some(why) = &w.unavailable {
            return Err(why.clone());
        }
        let tape = w
            .tape
            .as_ref()
            .ok_or_else(|| format!("the weights `{}` cannot be evaluated", w.text))?;
        let mut out = [0.0];
        tape.eval(&[&[x], &[fitted]], &[], &mut out).map_err(|e| {
            format!(
                "the weights `{}` at {} = {x}: {}",
                w.text, self.predictor, e.message
            )
        })?;
        if out[0] > 0.0 && out[0].is_finite() {
            Ok(out[0])
        } else {
            Err(format!(
                "the weights `{}` give {} at {} = {x}",
                w.text, out[0], self.predictor
            ))
        }
    }
}

/// Cᵢⱼ/√(CᵢᵢCⱼⱼ), zero where a variance is zero.
fn correlation_of(c: &DMatrix<f64>) -> DMatrix<f64> {
    DMatrix::from_fn(c.nrows(), c.ncols(), |i, j| {
        let d = (c[(i, i)] * c[(j, j)]).sqrt();
        if d > 0.0 { c[(i, j)] / d } else { 0.0 }
    })
}

fn number(v: f64) -> Expr {
    if v < 0.0 {
        Expr::negate(Expr::number(-v))
    } else {
        Expr::number(v)
    }
}

fn at_x(var: &str, x: f64, e: &expr::EvalError) -> String {
    if e.subexpr.is_empty() {
        format!("{} at {var} = {x}", e.message)
    } else {
        format!("{} in `{}` at {var} = {x}", e.message, e.subexpr)
    }
}

fn weight_at(text: &str, predictor: &str, response: &str) -> WeightAt {
    let parsed = match expr::parse_expression(text) {
        Ok(e) => e,
        Err(e) => {
            return WeightAt {
                text: text.into(),
                tape: None,
                unavailable: Some(format!("the weights `{text}` do not parse: {}", e.message)),
            };
        }
    };
    let others: Vec<String> = parsed
        .identifiers()
        .into_iter()
        .map(|(n, _)| n)
        .filter(|n| n != predictor && n != response && n != "pi")
        .collect();
    if let Some(other) = others.first() {
        return WeightAt {
            text: text.into(),
            tape: None,
            unavailable: Some(format!(
                "the weights `{text}` use the column `{other}`, which a new reading does not give: no prediction uncertainty there (SPEC §13)"
            )),
        };
    }
    let symbols = Symbols {
        variables: vec![predictor.to_string(), response.to_string()],
        parameters: Vec::new(),
    };
    match Tape::compile(&parsed, &symbols) {
        Ok(t) => WeightAt {
            text: text.into(),
            tape: Some(t),
            unavailable: None,
        },
        Err(e) => WeightAt {
            text: text.into(),
            tape: None,
            unavailable: Some(format!(
                "the weights `{text}` do not compile: {}",
                e.message
            )),
        },
    }
}

impl Curve for ModelCurve {
    fn response(&self) -> &str {
        &self.response
    }

    fn predictor(&self) -> &str {
        &self.predictor
    }

    fn value(&self, x: f64) -> Result<f64, String> {
        let mut out = [0.0];
        self.value_tape
            .eval(&[&[x]], &self.params, &mut out)
            .map_err(|e| at_x(&self.predictor, x, &e))?;
        Ok(out[0])
    }

    fn slope(&self, x: f64) -> Result<f64, String> {
        let o = self.outputs(x)?;
        o.last()
            .copied()
            .ok_or_else(|| "internal: the curve tape has no slope output".to_string())
    }

    fn fit_uncertainty(&self, x: f64, readings: Option<u32>) -> Result<f64, String> {
        let u = self.uncertainty.as_ref().ok_or_else(|| {
            "this curve has no parameter covariance, so no fit uncertainty".to_string()
        })?;
        let o = self.outputs(x)?;
        let p = self.params.len();
        let fitted = o[0];
        let gradient = &o[1..=p];
        let reading = match readings {
            None => None,
            Some(m) => Some(NewReading {
                weight: self.weight(x, fitted)?,
                count: m,
            }),
        };
        let band = u
            .band(gradient, fitted, reading)
            .map_err(|e| format!("no band at {} = {x}: {e}", self.predictor))?;
        Ok(match readings {
            None => band.se_fit,
            Some(_) => band.se_prediction.unwrap_or(band.se_fit),
        })
    }

    fn fit_dof(&self) -> Option<f64> {
        let u = self.uncertainty.as_ref()?;
        match u.mode {
            UncertaintyMode::Weights => None,
            UncertaintyMode::Residuals => Some(u.dof as f64),
        }
    }

    fn range(&self) -> (f64, f64) {
        self.range
    }
}

#[cfg(test)]
pub(crate) mod tests {
    use super::*;

    /// y = a + b·x with the given covariance (for tests of the read-off formulas).
    pub fn line(a: f64, b: f64, cov: [[f64; 2]; 2], s2: f64, dof: usize) -> ModelCurve {
        let rhs = expr::parse_expression("a + b*x").expect("parses");
        let uncertainty = ParameterUncertainty {
            mode: UncertaintyMode::Residuals,
            confidence: 0.95,
            quantile: 2.0,
            dof,
            unit_variance: s2,
            covariance: DMatrix::from_fn(2, 2, |i, j| cov[i][j]),
            estimated: vec![true, true],
            std_errors: vec![Some(cov[0][0].sqrt()), Some(cov[1][1].sqrt())],
            rel_std_errors: vec![None, None],
            correlation: DMatrix::identity(2, 2),
            intervals: vec![None, None],
            condition: None,
        };
        ModelCurve::new(CurveSpec {
            response: "y",
            predictor: "x",
            rhs: &rhs,
            names: &["a".to_string(), "b".to_string()],
            values: &[a, b],
            uncertainty: Some(uncertainty),
            weights: None,
            range: (0.0, 10.0),
        })
        .expect("builds")
    }

    #[test]
    fn line_value_slope_and_band_follow_the_closed_form() {
        // Var(a + b·x) = Var(a) + 2x·Cov(a,b) + x²·Var(b) (propagation of the linear
        // combination, JCGM 100:2008 5.2.2).
        let c = line(1.0, 2.0, [[0.04, -0.005], [-0.005, 0.001]], 0.09, 8);
        assert_eq!(c.value(3.0), Ok(7.0));
        assert_eq!(c.slope(3.0), Ok(2.0));
        let var: f64 = 0.04 + 2.0 * 3.0 * -0.005 + 9.0 * 0.001;
        let u = c.fit_uncertainty(3.0, None).expect("band");
        assert!((u - var.sqrt()).abs() < 1e-15);
        let up = c.fit_uncertainty(3.0, Some(3)).expect("band");
        assert!((up - (var + 0.09 / 3.0).sqrt()).abs() < 1e-15);
        assert_eq!(c.fit_dof(), Some(8.0));
    }

    #[test]
    fn inverse_finds_the_root_to_full_precision_inside_the_range_only() {
        let c = line(1.0, 2.0, [[0.0, 0.0], [0.0, 0.0]], 0.0, 8);
        let roots = inverse(&c, 8.0, 0.0, 10.0);
        assert_eq!(roots, vec![3.5]);
        assert!(inverse(&c, 30.0, 0.0, 10.0).is_empty());
        assert_eq!(inverse(&c, 1.0, 0.0, 10.0), vec![0.0], "a root on the edge");
        // A curve with two roots in range: y = (x − 5)² reaches 4 at x = 3 and 7.
        let rhs = expr::parse_expression("(x - c)^2").expect("parses");
        let q = ModelCurve::new(CurveSpec {
            response: "y",
            predictor: "x",
            rhs: &rhs,
            names: &["c".to_string()],
            values: &[5.0],
            uncertainty: None,
            weights: None,
            range: (0.0, 10.0),
        })
        .expect("builds");
        let r = inverse(&q, 4.0, 0.0, 10.0);
        assert_eq!(r.len(), 2);
        assert!(
            (r[0] - 3.0).abs() < 1e-14 && (r[1] - 7.0).abs() < 1e-14,
            "{r:?}"
        );
        assert_eq!(
            inverse_near(&q, 4.0, 6.0, 0.0, 10.0).map(|x| x.round()),
            Some(7.0)
        );
        assert!(q.fit_uncertainty(1.0, None).is_err(), "no covariance");
    }

    #[test]
    fn weights_depending_on_another_column_give_no_prediction_uncertainty() {
        let mut c = line(1.0, 2.0, [[0.04, 0.0], [0.0, 0.001]], 1.0, 8);
        c.weight = Some(weight_at("1/u^2", "x", "y"));
        assert!(
            c.fit_uncertainty(2.0, None).is_ok(),
            "the confidence band needs no weight"
        );
        let e = c.fit_uncertainty(2.0, Some(1)).expect_err("no w0");
        assert!(e.contains("`u`"), "{e}");
        c.weight = Some(weight_at("1/y^2", "x", "y"));
        let u = c
            .fit_uncertainty(2.0, Some(1))
            .expect("w0 from the fitted value");
        let var_fit: f64 = 0.04 + 4.0 * 0.001;
        assert!((u - (var_fit + 25.0).sqrt()).abs() < 1e-12, "w0 = 1/5²");
    }
}
