//! `fitwright predict`: values read off a stored calibration (`result.json`), with
//! confidence and prediction intervals (SPEC §6, §10, §13).
//!
//! Forward: ŷ(x₀) ± q·√(gᵀCg) (confidence) and ± q·√(gᵀCg + σ²/(m·w₀)) (prediction of the
//! mean of m new readings), g = ∂f/∂θ at x₀, C the stored covariance of the free parameters,
//! σ² the unit variance (s², or 1 with known σ), q the t quantile on n − p degrees of freedom
//! (normal with known σ) — pointwise, linear approximation (Seber & Wild 1989, §5.1; from
//! memory).
//! Inverse: every x in the calibrated range where f(x) equals the mean of m readings, with the
//! interval where the prediction band crosses that value; for a straight line also Fieller's
//! interval (Draper & Smith, §3.2; from memory).

use crate::error::{Error, Result};
use crate::expr::{self, Expr};
use crate::result::ResultDoc;
use crate::stats;

/// A calibration curve rebuilt from `result.json`.
pub struct Curve {
    pub doc: ResultDoc,
    rhs: Expr,
    gradient: Vec<Expr>,
    /// Weights expression, when the fit was weighted.
    weights: Option<Expr>,
}

/// One forward prediction.
#[derive(Debug, Clone, serde::Serialize)]
pub struct Forward {
    pub at: Vec<(String, f64)>,
    pub value: f64,
    pub se_fit: f64,
    pub confidence: (f64, f64),
    pub prediction: Option<(f64, f64)>,
    pub replicates: u32,
    pub level: f64,
    pub note: Option<String>,
}

/// One inverse prediction.
#[derive(Debug, Clone, serde::Serialize)]
pub struct Inverse {
    pub reading: f64,
    pub replicates: u32,
    pub solve_for: String,
    pub given: Vec<(String, f64)>,
    pub roots: Vec<f64>,
    /// Interval where the prediction band crosses the reading, per root (None: not bounded
    /// inside the range).
    pub intervals: Vec<Option<(f64, f64)>>,
    /// Fieller's interval for straight lines, as text ("[a, b]", "unbounded …").
    pub fieller: Option<String>,
    pub level: f64,
    pub notes: Vec<String>,
}

fn bad_result(msg: impl Into<String>) -> Error {
    Error::input(msg)
        .help("the result.json may be from another fitwright version or edited by hand")
}

impl Curve {
    pub fn load(path: &std::path::Path) -> Result<Curve> {
        let doc = ResultDoc::read(path)?;
        let eq = expr::parse_equation(&doc.model.equation).map_err(|e| {
            bad_result(format!("the stored equation does not parse: {}", e.message))
        })?;
        let mut rhs = eq.rhs;
        for p in &doc.model.parameters {
            if let Some(v) = p.fixed {
                let value = if v < 0.0 {
                    Expr::negate(Expr::number(-v))
                } else {
                    Expr::number(v)
                };
                rhs = rhs.substitute(&p.name, &value);
            }
        }
        let gradient = doc
            .free_parameters
            .iter()
            .map(|p| expr::derivative(&rhs, p))
            .collect();
        let weights = match &doc.data.weights {
            Some(w) => Some(expr::parse_expression(w).map_err(|e| {
                bad_result(format!("the stored weights do not parse: {}", e.message))
            })?),
            None => None,
        };
        Ok(Curve {
            doc,
            rhs,
            gradient,
            weights,
        })
    }

    fn lookup<'a>(&'a self, at: &'a [(String, f64)]) -> impl Fn(&str) -> Option<f64> + 'a {
        move |name: &str| {
            at.iter()
                .find(|(k, _)| k == name)
                .map(|(_, v)| *v)
                .or_else(|| self.doc.param(name).map(|p| p.value))
        }
    }

    /// f(x₀).
    pub fn value(&self, at: &[(String, f64)]) -> Result<f64> {
        expr::eval_recursive(&self.rhs, &self.lookup(at)).map_err(|e| {
            Error::input(format!("the curve cannot be evaluated there: {e}"))
                .help("choose a setting inside the model's domain")
        })
    }

    /// g = ∂f/∂θ at x₀ and gᵀCg.
    fn variance_of_fit(&self, at: &[(String, f64)]) -> Result<f64> {
        let l = self.lookup(at);
        let g: Vec<f64> = self
            .gradient
            .iter()
            .map(|d| expr::eval_recursive(d, &l))
            .collect::<std::result::Result<_, _>>()
            .map_err(|e| {
                Error::input(format!(
                    "the curve's gradient cannot be evaluated there: {e}"
                ))
            })?;
        let c = &self.doc.covariance;
        let mut v = 0.0;
        for (i, gi) in g.iter().enumerate() {
            for (j, gj) in g.iter().enumerate() {
                v += gi * gj * c.get(i).and_then(|r| r.get(j)).copied().unwrap_or(0.0);
            }
        }
        Ok(v.max(0.0))
    }

    /// The quantile of a two-sided interval at `level`.
    pub fn quantile(&self, level: f64) -> Result<f64> {
        let alpha = 1.0 - level;
        let q = if self.doc.fit.uncertainty == "weights" {
            stats::distributions::normal_upper(alpha / 2.0)
        } else {
            stats::distributions::t_upper(alpha / 2.0, self.doc.statistics.dof as f64)
        };
        q.map_err(|e| {
            Error::usage(format!("--level {level}: {e}"))
                .help("give a level strictly between 0 and 1, e.g. 0.95")
        })
    }

    /// Variance of one new reading at x₀: σ²/w₀, or None when the weights cannot be evaluated
    /// at a new point (they use other columns).
    fn reading_variance(&self, at: &[(String, f64)], fitted: f64) -> Option<f64> {
        let sigma2 = self.doc.statistics.unit_variance;
        match &self.weights {
            None => Some(sigma2),
            Some(w) => {
                let resp = &self.doc.model.response;
                let l = |name: &str| {
                    if name == resp {
                        Some(fitted)
                    } else {
                        at.iter().find(|(k, _)| k == name).map(|(_, v)| *v)
                    }
                };
                let w0 = expr::eval_recursive(w, &l).ok()?;
                (w0.is_finite() && w0 > 0.0).then(|| sigma2 / w0)
            }
        }
    }

    /// Whether x₀ is inside the calibrated range of every predictor; the names outside.
    pub fn outside_range(&self, at: &[(String, f64)]) -> Vec<String> {
        at.iter()
            .filter(|(k, v)| {
                self.doc
                    .data
                    .ranges
                    .get(k)
                    .is_some_and(|[lo, hi]| *v < *lo || *v > *hi)
            })
            .map(|(k, v)| {
                let [lo, hi] = self
                    .doc
                    .data
                    .ranges
                    .get(k)
                    .copied()
                    .unwrap_or([f64::NAN, f64::NAN]);
                format!("{k} = {v} is outside the calibrated range [{lo}, {hi}]")
            })
            .collect()
    }

    /// A forward prediction at x₀.
    pub fn forward(&self, at: &[(String, f64)], level: f64, replicates: u32) -> Result<Forward> {
        for p in &self.doc.model.predictors {
            if !at.iter().any(|(k, _)| k == p) {
                return Err(
                    Error::usage(format!("--at does not give the predictor `{p}`")).help(format!(
                        "write e.g. `--at {p}=25`; several predictors: `--at T=25,P=1`"
                    )),
                );
            }
        }
        for (k, _) in at {
            if !self.doc.model.predictors.contains(k) {
                return Err(
                    Error::usage(format!("`{k}` is not a predictor of this calibration")).help(
                        format!(
                            "its predictors are {}",
                            self.doc.model.predictors.join(", ")
                        ),
                    ),
                );
            }
        }
        let value = self.value(at)?;
        let var = self.variance_of_fit(at)?;
        let q = self.quantile(level)?;
        let se = var.sqrt();
        let (prediction, note) = match self.reading_variance(at, value) {
            Some(v) => {
                let h = q * (var + v / replicates.max(1) as f64).sqrt();
                (Some((value - h, value + h)), None)
            }
            None => (None, Some("no prediction interval: the weights use columns other than the predictors and the response".into())),
        };
        Ok(Forward {
            at: at.to_vec(),
            value,
            se_fit: se,
            confidence: (value - q * se, value + q * se),
            prediction,
            replicates,
            level,
            note,
        })
    }

    /// The predictor solved for by an inverse prediction: the one `given` does not fix.
    fn unknown(&self, given: &[(String, f64)]) -> Result<String> {
        let free: Vec<&String> = self
            .doc
            .model
            .predictors
            .iter()
            .filter(|p| !given.iter().any(|(k, _)| k == *p))
            .collect();
        match free.as_slice() {
            [one] => Ok((*one).clone()),
            [] => Err(Error::usage(
                "every predictor is given with --at; nothing is left to solve for",
            )
            .help("leave out the predictor to solve for")),
            many => Err(Error::usage(format!(
                "{} predictors are not given; inverse prediction solves for one",
                many.len()
            ))
            .help(format!(
                "give all but one with --at, e.g. `--at {}=…`",
                many.get(1).map_or("x", |s| s.as_str())
            ))),
        }
    }

    /// An inverse prediction: the predictor value(s) where the curve gives `reading` (the mean
    /// of `replicates` readings).
    pub fn inverse(
        &self,
        response: &str,
        reading: f64,
        given: &[(String, f64)],
        level: f64,
        replicates: u32,
        extrapolate: bool,
    ) -> Result<Inverse> {
        if response != self.doc.model.response {
            return Err(Error::usage(format!(
                "`{response}` is not the response of this calibration"
            ))
            .help(format!("write `--inverse {}=…`", self.doc.model.response)));
        }
        let var = self.unknown(given)?;
        let [lo, hi] = self
            .doc
            .data
            .ranges
            .get(&var)
            .copied()
            .ok_or_else(|| bad_result(format!("no calibrated range stored for `{var}`")))?;
        let (lo, hi) = if extrapolate {
            let w = (hi - lo).max(f64::MIN_POSITIVE);
            (lo - w, hi + w)
        } else {
            (lo, hi)
        };
        let q = self.quantile(level)?;
        let at = |x: f64| {
            let mut a = given.to_vec();
            a.push((var.clone(), x));
            a
        };
        let f = |x: f64| self.value(&at(x)).unwrap_or(f64::NAN);
        let half = |x: f64| {
            let a = at(x);
            let fx = self.value(&a).unwrap_or(f64::NAN);
            match (self.variance_of_fit(&a), self.reading_variance(&a, fx)) {
                (Ok(v), Some(r)) => q * (v + r / replicates.max(1) as f64).sqrt(),
                _ => f64::NAN,
            }
        };
        let ip = stats::calibration::inverse_predict(
            f,
            half,
            reading,
            (lo, hi),
            &stats::calibration::InverseOptions::default(),
        )
        .map_err(|e| {
            Error::input(format!("inverse prediction failed: {e}"))
                .help("check the reading and the calibrated range")
        })?;
        let mut notes = Vec::new();
        if ip.roots.is_empty() {
            let num = crate::expr::print::format_number_short;
            return Err(Error::input(format!(
                "the curve does not reach {response} = {} inside the calibrated range of {var} [{}, {}]",
                num(reading),
                num(lo),
                num(hi)
            ))
            .help(if extrapolate { "the reading lies outside what the curve gives even beyond the range" } else { "the reading lies outside the calibrated range; `--extrapolate` searches beyond it, at your own risk" }));
        }
        if ip.roots.len() > 1 {
            notes.push(format!(
                "the curve reaches this reading {} times in the range: every solution is listed",
                ip.roots.len()
            ));
        }
        if extrapolate {
            notes.push("--extrapolate: the search went beyond the calibrated range".into());
        }
        let intervals = ip
            .root_band
            .iter()
            .map(|b| {
                b.and_then(|i| ip.bands.get(i))
                    .filter(|b| !b.lower_at_range_end && !b.upper_at_range_end)
                    .map(|b| (b.lower, b.upper))
            })
            .collect::<Vec<_>>();
        if intervals.iter().any(Option::is_none) {
            notes.push("the prediction band does not close inside the range for some solution: the interval is not bounded there".into());
        }
        let fieller = self.fieller(&var, reading, replicates, level, &mut notes);
        Ok(Inverse {
            reading,
            replicates,
            solve_for: var,
            given: given.to_vec(),
            roots: ip.roots,
            intervals,
            fieller,
            level,
            notes,
        })
    }

    /// Fieller's interval when the curve is a straight line in its one predictor.
    fn fieller(
        &self,
        var: &str,
        reading: f64,
        m: u32,
        level: f64,
        notes: &mut Vec<String>,
    ) -> Option<String> {
        if self.doc.model.predictors.len() != 1
            || self.doc.free_parameters.len() != 2
            || self.weights.is_some()
        {
            return None;
        }
        let slope_expr = expr::simplify(&expr::derivative(&self.rhs, var));
        if slope_expr.mentions(var)
            || self
                .gradient
                .iter()
                .any(|g| self.doc.free_parameters.iter().any(|p| g.mentions(p)))
        {
            return None;
        }
        let a = self.value(&[(var.to_string(), 0.0)]).ok()?;
        let b = self.value(&[(var.to_string(), 1.0)]).ok()? - a;
        let xm = self.doc.moments(var)?;
        let line = stats::calibration::StraightLine::from_moments(
            a,
            b,
            self.doc.statistics.std_error,
            xm.n,
            xm.mean,
            xm.sxx,
        )
        .ok()?;
        let est = stats::calibration::fieller(&line, reading, m.max(1) as usize, level).ok()?;
        use stats::calibration::FiellerSet;
        Some(match est.set {
            FiellerSet::Bounded { lower, upper } => format!(
                "[{}, {}]",
                crate::report::format::num(lower),
                crate::report::format::num(upper)
            ),
            other => {
                notes.push(format!("Fieller's interval is unbounded (g = {:.3} ≥ 1: the slope is not significantly different from zero)", est.g));
                match other {
                    FiellerSet::Exclusive { lower, upper } => format!(
                        "unbounded: x ≤ {} or x ≥ {}",
                        crate::report::format::num(lower),
                        crate::report::format::num(upper)
                    ),
                    FiellerSet::HalfLine { bound, above } => format!(
                        "unbounded: x {} {}",
                        if above { "≥" } else { "≤" },
                        crate::report::format::num(bound)
                    ),
                    _ => "unbounded: the whole line".into(),
                }
            }
        })
    }
}

/// Parse `NAME=VALUE[,NAME=VALUE…]`.
pub fn parse_assignments(text: &str, flag: &str) -> Result<Vec<(String, f64)>> {
    let mut out = Vec::new();
    for part in text.split(',') {
        let (k, v) = part.split_once('=').ok_or_else(|| {
            Error::usage(format!("`{flag} {text}`: expected NAME=VALUE"))
                .help(format!("for example `{flag} T=25`"))
        })?;
        let v: f64 = v.trim().parse().map_err(|_| {
            Error::usage(format!("`{flag} {text}`: `{}` is not a number", v.trim()))
                .help(format!("for example `{flag} T=25`"))
        })?;
        if !v.is_finite() {
            return Err(
                Error::usage(format!("`{flag} {text}`: the value must be finite"))
                    .help("give an ordinary number"),
            );
        }
        out.push((k.trim().to_string(), v));
    }
    Ok(out)
}
