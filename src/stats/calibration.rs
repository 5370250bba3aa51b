//! Calibration figures: limits of detection and quantification, Fieller's
//! interval for inverse prediction on a straight line, and a general inverse
//! prediction that finds where a fitted curve and its prediction band cross a
//! measured value.

use super::distributions::t_upper;
use super::roots::{RootError, brent};
use super::{StatsError, ensure_finite};

/// Limits of detection and quantification in predictor units.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct DetectionLimits {
    /// `LOD = 3.3·σ/|slope|`.
    pub lod: f64,
    /// `LOQ = 10·σ/|slope|`.
    pub loq: f64,
}

/// LOD and LOQ from the standard deviation of the response `sigma` (residual
/// SD of the straight line, or SD of the intercept) and the slope:
/// `LOD = 3.3·σ/S`, `LOQ = 10·σ/S` (ICH Q2(R1), "Validation of analytical
/// procedures: text and methodology", 2005, §§6.3 and 7.3 — from memory).
/// They assume a linear, homoscedastic response near the limit. A decreasing
/// line uses |slope|.
pub fn detection_limits(sigma: f64, slope: f64) -> Result<DetectionLimits, StatsError> {
    if !(sigma.is_finite() && sigma >= 0.0) {
        return Err(StatsError::InvalidArgument {
            what: "sigma",
            reason: format!("must be finite and non-negative, got {sigma}"),
        });
    }
    if !(slope.is_finite() && slope != 0.0) {
        return Err(StatsError::InvalidArgument {
            what: "slope",
            reason: format!("must be finite and non-zero, got {slope}"),
        });
    }
    Ok(DetectionLimits {
        lod: 3.3 * sigma / slope.abs(),
        loq: 10.0 * sigma / slope.abs(),
    })
}

/// An unweighted straight-line calibration `y = a + b·x`, with what
/// Fieller's interval needs from the calibration data.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct StraightLine {
    /// Intercept a.
    pub intercept: f64,
    /// Slope b.
    pub slope: f64,
    /// Residual standard error `s = √(SSR/(n − 2))`.
    pub s: f64,
    /// Number of calibration points n.
    pub n: usize,
    /// Mean of the calibration x values.
    pub x_mean: f64,
    /// `Sxx = Σ(x − x̄)²`.
    pub sxx: f64,
}

impl StraightLine {
    /// Describe a fitted line from its parameters, s and the calibration x
    /// values. Needs n ≥ 3, s ≥ 0 and at least two distinct x.
    pub fn from_fit(intercept: f64, slope: f64, s: f64, x: &[f64]) -> Result<Self, StatsError> {
        ensure_finite("x", x)?;
        let n = x.len();
        let x_mean = x.iter().sum::<f64>() / n.max(1) as f64;
        let sxx: f64 = x.iter().map(|v| (v - x_mean).powi(2)).sum();
        Self::from_moments(intercept, slope, s, n, x_mean, sxx)
    }

    /// The same from the calibration x values' count n, mean x̄ and Sxx = Σ(x − x̄)² (what a
    /// stored result keeps instead of the rows).
    pub fn from_moments(
        intercept: f64,
        slope: f64,
        s: f64,
        n: usize,
        x_mean: f64,
        sxx: f64,
    ) -> Result<Self, StatsError> {
        for (what, v) in [
            ("intercept", intercept),
            ("slope", slope),
            ("s", s),
            ("x mean", x_mean),
            ("Sxx", sxx),
        ] {
            if !v.is_finite() {
                return Err(StatsError::InvalidArgument {
                    what,
                    reason: format!("must be finite, got {v}"),
                });
            }
        }
        if s < 0.0 {
            return Err(StatsError::InvalidArgument {
                what: "s",
                reason: format!("must be non-negative, got {s}"),
            });
        }
        if n < 3 {
            return Err(StatsError::InvalidArgument {
                what: "x",
                reason: format!("{n} calibration points, at least 3 needed"),
            });
        }
        if sxx <= 0.0 {
            return Err(StatsError::InvalidArgument {
                what: "x",
                reason: "all calibration x values are equal".into(),
            });
        }
        Ok(StraightLine {
            intercept,
            slope,
            s,
            n,
            x_mean,
            sxx,
        })
    }

    /// Fitted value `a + b·x`.
    pub fn value(&self, x: f64) -> f64 {
        self.intercept + self.slope * x
    }

    /// Half-width of the prediction band for the mean of m new readings,
    /// `t·s·√(1/m + 1/n + (x − x̄)²/Sxx)` (Draper & Smith, 3rd ed., §3.1 —
    /// from memory). `m = 0` is treated as 1.
    pub fn prediction_half_width(&self, x: f64, m: usize, t: f64) -> f64 {
        let c0 = 1.0 / m.max(1) as f64 + 1.0 / self.n as f64;
        t * self.s * (c0 + (x - self.x_mean).powi(2) / self.sxx).sqrt()
    }

    /// Two-sided t quantile for confidence `level` on n − 2 dof.
    pub fn t_value(&self, level: f64) -> Result<f64, StatsError> {
        if !(level > 0.0 && level < 1.0) {
            return Err(StatsError::InvalidProbability { value: level });
        }
        t_upper((1.0 - level) / 2.0, self.n as f64 - 2.0)
    }
}

/// Fieller's confidence set for x₀, as the set it really is.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum FiellerSet {
    /// The usual interval `lower ≤ x₀ ≤ upper` (g < 1).
    Bounded { lower: f64, upper: f64 },
    /// Unbounded, the complement of an interval: `x₀ ≤ lower` or
    /// `x₀ ≥ upper` (g > 1, slope not significantly non-zero).
    Exclusive { lower: f64, upper: f64 },
    /// Unbounded on one side only: `x₀ ≥ bound` (`above`) or `x₀ ≤ bound`
    /// (g = 1 exactly).
    HalfLine { bound: f64, above: bool },
    /// Unbounded, every x (g > 1): the data say nothing about x₀.
    WholeLine,
}

impl FiellerSet {
    /// Whether the set is a finite interval.
    pub fn is_bounded(&self) -> bool {
        matches!(self, FiellerSet::Bounded { .. })
    }
}

/// Inverse prediction on a straight line with Fieller's interval.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct FiellerEstimate {
    /// Point estimate `x₀ = (ȳ₀ − a)/b`; `None` for a zero slope.
    pub x0: Option<f64>,
    /// `g = t²·s²/(b²·Sxx) = t²·s_b²/b²`; ≥ 1 means unbounded.
    pub g: f64,
    /// The t quantile used.
    pub t: f64,
    /// The confidence set.
    pub set: FiellerSet,
}

/// Fieller's interval for `x₀ = (ȳ₀ − a)/b`, the x of the mean `y0_mean` of
/// `m` new readings, at confidence `level`, t on n − 2 dof.
///
/// It is the set of x where `(ȳ₀ − a − b·x)² ≤ t²s²(1/m + 1/n + (x − x̄)²/Sxx)`,
/// i.e. where ȳ₀ lies inside the prediction band for a mean of m readings.
/// With `d = ȳ₀ − ȳ` and `g = t²s²/(b²Sxx)`, the bounded case (g < 1) is
/// `x̄ + [d/b ± (t·s/b)·√(d²/(b²Sxx) + (1 − g)(1/m + 1/n))]/(1 − g)`
/// (E. C. Fieller, J. R. Statist. Soc. Suppl. 7 (1940) 1–64; Draper & Smith,
/// 3rd ed., §3.2 — from memory). For g ≥ 1 the set is unbounded: two rays,
/// a half-line or the whole line. The limits are computed as the roots of
/// the quadratic in `u = x − x̄` in cancellation-free form.
pub fn fieller(
    line: &StraightLine,
    y0_mean: f64,
    m: usize,
    level: f64,
) -> Result<FiellerEstimate, StatsError> {
    if !y0_mean.is_finite() {
        return Err(StatsError::InvalidArgument {
            what: "y0",
            reason: format!("must be finite, got {y0_mean}"),
        });
    }
    if m == 0 {
        return Err(StatsError::InvalidArgument {
            what: "m",
            reason: "at least one reading is needed".into(),
        });
    }
    let t = line.t_value(level)?;
    let b = line.slope;
    let ts2 = (t * line.s).powi(2);
    let c0 = 1.0 / m as f64 + 1.0 / line.n as f64;
    let d = y0_mean - line.value(line.x_mean);
    let g = if b == 0.0 {
        f64::INFINITY
    } else {
        ts2 / (b * b * line.sxx)
    };
    // (d − b·u)² − ts²(c0 + u²/Sxx) ≤ 0  ⇔  A·u² + B·u + C ≤ 0.
    let qa = b * b - ts2 / line.sxx;
    let qb = -2.0 * d * b;
    let qc = d * d - ts2 * c0;
    let shift = |u: f64| line.x_mean + u;
    let set = if qa == 0.0 {
        if qb == 0.0 {
            FiellerSet::WholeLine
        } else {
            // B·u + C ≤ 0.
            FiellerSet::HalfLine {
                bound: shift(-qc / qb),
                above: qb < 0.0,
            }
        }
    } else {
        let disc = qb * qb - 4.0 * qa * qc;
        if disc <= 0.0 {
            if qa > 0.0 {
                // For A > 0 the discriminant is 4b²(g·d² + (1 − g)·t²s²·c0),
                // zero only for s = 0 (an exact fit): the set is the point x₀.
                let x0 = shift(-qb / (2.0 * qa));
                FiellerSet::Bounded {
                    lower: x0,
                    upper: x0,
                }
            } else {
                // A < 0 and no real roots: the quadratic is ≤ 0 everywhere.
                FiellerSet::WholeLine
            }
        } else {
            // Roots q/A and C/q with q = −½(B + sign(B)·√disc).
            let sq = disc.sqrt();
            let q = -0.5 * (qb + sq.copysign(qb));
            let (r1, r2) = if q == 0.0 {
                let r = (-qc / qa).sqrt();
                (-r, r)
            } else {
                (q / qa, qc / q)
            };
            let (lower, upper) = (shift(r1.min(r2)), shift(r1.max(r2)));
            if qa > 0.0 {
                FiellerSet::Bounded { lower, upper }
            } else {
                FiellerSet::Exclusive { lower, upper }
            }
        }
    };
    Ok(FiellerEstimate {
        x0: (b != 0.0).then(|| (y0_mean - line.intercept) / b),
        g,
        t,
        set,
    })
}

/// Settings of [`inverse_predict`].
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct InverseOptions {
    /// Grid points of the bracketing scan over the range (default 2001).
    /// Roots closer together than the grid spacing, and roots where the
    /// curve touches the target without crossing it, can be missed.
    pub scan_points: usize,
    /// Relative tolerance of each root and band end (default 1e-12).
    pub rel_tol: f64,
}

impl Default for InverseOptions {
    fn default() -> Self {
        InverseOptions {
            scan_points: 2001,
            rel_tol: 1e-12,
        }
    }
}

/// Largest accepted [`InverseOptions::scan_points`].
pub const MAX_SCAN_POINTS: usize = 10_000_000;

/// A connected stretch of the range where the prediction band contains the
/// target: `|f(x) − y| ≤ half_width(x)`.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct BandCrossing {
    /// Lower end.
    pub lower: f64,
    /// Upper end.
    pub upper: f64,
    /// The lower end is the end of the calibrated range, not a crossing:
    /// the true interval extends further (the search stays in range).
    pub lower_at_range_end: bool,
    /// Likewise for the upper end.
    pub upper_at_range_end: bool,
}

/// Result of [`inverse_predict`].
#[derive(Debug, Clone, PartialEq)]
pub struct InversePrediction {
    /// Every root of `f(x) = y` found in the range, ascending.
    pub roots: Vec<f64>,
    /// The stretches where the band contains y, ascending.
    pub bands: Vec<BandCrossing>,
    /// For each root, the index in `bands` of the stretch containing it.
    pub root_band: Vec<Option<usize>>,
}

/// Inverse prediction: all x in `[xmin, xmax]` with `f(x) = target`, and
/// the stretches where the prediction band `f(x) ± half_width(x)` contains
/// the target (SPEC §13: roots only inside the calibrated range, all of them
/// reported).
///
/// Method: a scan of `scan_points` equally spaced points finds sign changes
/// of `f(x) − y` and of `half_width(x) − |f(x) − y|`, each refined by
/// Brent's method ([`brent`]) to `rel_tol` relative (plus `rel_tol·10⁻³` of
/// the range absolute). A band stretch around a root that falls between two
/// grid points is found from the root outward. For a straight line and the
/// band of [`StraightLine::prediction_half_width`] the stretch equals
/// Fieller's interval (tested).
///
/// Errors: an empty or non-finite range, a non-finite target, a model or
/// half-width that is not finite on the range, a negative half-width.
pub fn inverse_predict<F, H>(
    f: F,
    half_width: H,
    target: f64,
    range: (f64, f64),
    options: &InverseOptions,
) -> Result<InversePrediction, StatsError>
where
    F: Fn(f64) -> f64,
    H: Fn(f64) -> f64,
{
    let (xmin, xmax) = range;
    if !(xmin.is_finite() && xmax.is_finite() && xmin < xmax) {
        return Err(StatsError::InvalidArgument {
            what: "range",
            reason: format!("need finite xmin < xmax, got [{xmin}, {xmax}]"),
        });
    }
    if !target.is_finite() {
        return Err(StatsError::InvalidArgument {
            what: "target",
            reason: format!("must be finite, got {target}"),
        });
    }
    let npts = options.scan_points;
    if !(2..=MAX_SCAN_POINTS).contains(&npts) {
        return Err(StatsError::InvalidArgument {
            what: "scan_points",
            reason: format!("must be between 2 and {MAX_SCAN_POINTS}, got {npts}"),
        });
    }
    let rel_tol = options.rel_tol;
    if !(rel_tol.is_finite() && rel_tol > 0.0) {
        return Err(StatsError::InvalidArgument {
            what: "rel_tol",
            reason: format!("must be positive, got {rel_tol}"),
        });
    }
    let abs_tol = rel_tol * 1e-3 * (xmax - xmin);
    let miss = |x: f64| f(x) - target;
    let inside = |x: f64| half_width(x) - (f(x) - target).abs();
    let bad_value = |what: &str, x: f64| StatsError::InvalidArgument {
        what: "model",
        reason: format!("{what} is not finite or is negative at x = {x}"),
    };
    let root_err = |e: RootError| match e {
        RootError::NonFinite { x } => bad_value("the model or band", x),
        RootError::NotBracketed => StatsError::InvalidArgument {
            what: "model",
            reason: "the model gave different values for the same x".into(),
        },
    };

    let step = (xmax - xmin) / (npts - 1) as f64;
    let grid: Vec<f64> = (0..npts)
        .map(|k| {
            if k + 1 == npts {
                xmax
            } else {
                xmin + k as f64 * step
            }
        })
        .collect();
    let mut g = Vec::with_capacity(npts);
    let mut q = Vec::with_capacity(npts);
    for &x in &grid {
        let fx = f(x);
        let hx = half_width(x);
        if !fx.is_finite() {
            return Err(bad_value("the model value", x));
        }
        if !(hx.is_finite() && hx >= 0.0) {
            return Err(bad_value("the band half-width", x));
        }
        g.push(fx - target);
        q.push(hx - (fx - target).abs());
    }

    // Roots of f(x) = y: exact zeros on the grid, and sign changes.
    let mut roots = Vec::new();
    for k in 0..npts {
        let (gk, xk) = (g[k], grid[k]);
        if gk == 0.0 {
            if k == 0 || g[k - 1] != 0.0 {
                roots.push(xk);
            }
        } else if k + 1 < npts && g[k + 1] != 0.0 && (gk > 0.0) != (g[k + 1] > 0.0) {
            roots.push(brent(miss, xk, grid[k + 1], rel_tol, abs_tol).map_err(root_err)?);
        }
    }

    // Stretches where the band holds the target: runs of inside grid points.
    let mut bands: Vec<BandCrossing> = Vec::new();
    let mut k = 0;
    while k < npts {
        if q[k] < 0.0 {
            k += 1;
            continue;
        }
        let start = k;
        while k + 1 < npts && q[k + 1] >= 0.0 {
            k += 1;
        }
        let end = k;
        let (lower, lower_at_range_end) = if start == 0 {
            (xmin, true)
        } else {
            let x =
                brent(inside, grid[start - 1], grid[start], rel_tol, abs_tol).map_err(root_err)?;
            (x, false)
        };
        let (upper, upper_at_range_end) = if end + 1 == npts {
            (xmax, true)
        } else {
            let x = brent(inside, grid[end], grid[end + 1], rel_tol, abs_tol).map_err(root_err)?;
            (x, false)
        };
        bands.push(BandCrossing {
            lower,
            upper,
            lower_at_range_end,
            upper_at_range_end,
        });
        k += 1;
    }

    // A root whose band stretch lies between two grid points (a band much
    // narrower than the grid spacing): search from the root outward. Both
    // neighbouring grid points are then outside the band.
    for &r in &roots {
        if bands.iter().any(|b| b.lower <= r && r <= b.upper) {
            continue;
        }
        let cell = (((r - xmin) / step).floor().max(0.0) as usize).min(npts - 2);
        let lower = brent(inside, grid[cell], r, rel_tol, abs_tol).map_err(root_err)?;
        let upper = brent(inside, r, grid[cell + 1], rel_tol, abs_tol).map_err(root_err)?;
        bands.push(BandCrossing {
            lower,
            upper,
            lower_at_range_end: false,
            upper_at_range_end: false,
        });
    }
    bands.sort_by(|a, b| a.lower.total_cmp(&b.lower));
    let root_band = roots
        .iter()
        .map(|&r| bands.iter().position(|b| b.lower <= r && r <= b.upper))
        .collect();
    Ok(InversePrediction {
        roots,
        bands,
        root_band,
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Least-squares straight line through (x, y) by centred sums (test helper).
    fn line_through(x: &[f64], y: &[f64]) -> StraightLine {
        let n = x.len() as f64;
        let xm = x.iter().sum::<f64>() / n;
        let ym = y.iter().sum::<f64>() / n;
        let sxx: f64 = x.iter().map(|v| (v - xm).powi(2)).sum();
        let sxy: f64 = x.iter().zip(y).map(|(a, b)| (a - xm) * (b - ym)).sum();
        let b = sxy / sxx;
        let a = ym - b * xm;
        let ssr: f64 = x.iter().zip(y).map(|(u, v)| (v - a - b * u).powi(2)).sum();
        StraightLine::from_fit(a, b, (ssr / (n - 2.0)).sqrt(), x).unwrap()
    }

    // Invented test vector: a gas sensor's output (mV) against concentration (ppm).
    const X: [f64; 8] = [0.0, 5.0, 10.0, 20.0, 40.0, 60.0, 80.0, 100.0];
    const Y: [f64; 8] = [1.2, 6.1, 11.4, 21.0, 41.9, 60.8, 81.7, 100.9];

    #[test]
    fn lod_and_loq_follow_the_ich_factors() {
        // ICH Q2(R1) §6.3/§7.3 (from memory): 3.3·σ/S and 10·σ/S.
        let l = detection_limits(0.5, -2.0).unwrap();
        assert!((l.lod - 0.825).abs() < 1e-15);
        assert!((l.loq - 2.5).abs() < 1e-15);
        assert!(detection_limits(0.5, 0.0).is_err());
    }

    #[test]
    fn band_crossing_interval_equals_fiellers_interval_for_a_straight_line() {
        // SPEC §13 requires this identity; it holds by algebra.
        let line = line_through(&X, &Y);
        for (y0, m) in [(30.0, 1), (30.0, 3), (75.5, 2), (8.0, 5)] {
            let fe = fieller(&line, y0, m, 0.95).unwrap();
            let FiellerSet::Bounded { lower, upper } = fe.set else {
                panic!("expected a bounded interval, got {:?}", fe.set)
            };
            let t = fe.t;
            let inv = inverse_predict(
                |x| line.value(x),
                |x| line.prediction_half_width(x, m, t),
                y0,
                (0.0, 100.0),
                &InverseOptions::default(),
            )
            .unwrap();
            assert_eq!(inv.roots.len(), 1);
            let x0 = fe.x0.unwrap();
            assert!((inv.roots[0] - x0).abs() <= 1e-11 * x0.abs());
            assert_eq!(inv.bands.len(), 1);
            let band = inv.bands[0];
            assert!(!band.lower_at_range_end && !band.upper_at_range_end);
            let close = |a: f64, b: f64| (a - b).abs() <= 1e-10 * b.abs().max(1.0);
            assert!(close(band.lower, lower), "{band:?} vs {lower}");
            assert!(close(band.upper, upper), "{band:?} vs {upper}");
        }
    }

    #[test]
    fn fieller_set_satisfies_its_defining_inequality() {
        // A nearly flat, noisy line (invented): g > 1 and the set is unbounded.
        let x = [1.0, 2.0, 3.0, 4.0, 5.0];
        let y = [2.0, 1.0, 2.6, 1.2, 2.3];
        let line = line_through(&x, &y);
        for y0 in [1.9, 3.5, 10.0] {
            let fe = fieller(&line, y0, 1, 0.95).unwrap();
            assert!(fe.g > 1.0);
            assert!(!fe.set.is_bounded());
            let c0 = 1.0 + 1.0 / 5.0;
            let member = |x: f64| {
                let lhs = (y0 - line.value(x)).powi(2);
                let rhs = (fe.t * line.s).powi(2) * (c0 + (x - line.x_mean).powi(2) / line.sxx);
                lhs <= rhs
            };
            for k in -200..=200 {
                let xv = k as f64 * 0.37;
                let inside = match fe.set {
                    FiellerSet::Exclusive { lower, upper } => xv <= lower || xv >= upper,
                    FiellerSet::WholeLine => true,
                    other => panic!("unexpected {other:?}"),
                };
                assert_eq!(inside, member(xv), "y0={y0} x={xv} {:?}", fe.set);
            }
        }
    }

    #[test]
    fn an_exact_straight_line_gives_a_point_interval() {
        let line = StraightLine::from_fit(1.0, 2.0, 0.0, &[0.0, 1.0, 2.0, 3.0]).unwrap();
        let fe = fieller(&line, 4.0, 1, 0.95).unwrap();
        assert_eq!(fe.x0, Some(1.5));
        assert_eq!(
            fe.set,
            FiellerSet::Bounded {
                lower: 1.5,
                upper: 1.5
            }
        );
    }

    #[test]
    fn all_roots_inside_the_range_are_reported() {
        let cubic = |x: f64| (x - 1.0) * (x - 2.0) * (x - 3.0);
        let inv =
            inverse_predict(cubic, |_| 0.01, 0.0, (0.0, 4.0), &InverseOptions::default()).unwrap();
        assert_eq!(inv.roots.len(), 3);
        for (r, exact) in inv.roots.iter().zip([1.0, 2.0, 3.0]) {
            assert!((r - exact).abs() < 1e-12, "{r}");
        }
        assert_eq!(inv.bands.len(), 3);
        assert_eq!(inv.root_band, vec![Some(0), Some(1), Some(2)]);
    }

    #[test]
    fn a_target_the_curve_does_not_reach_on_the_range_has_no_root() {
        let inv = inverse_predict(
            |x| 2.0 * x,
            |_| 0.1,
            50.0,
            (0.0, 10.0),
            &InverseOptions::default(),
        )
        .unwrap();
        assert!(inv.roots.is_empty());
        assert!(inv.bands.is_empty());
    }

    #[test]
    fn a_band_wider_than_the_range_is_cut_at_the_range_end() {
        let inv =
            inverse_predict(|x| x, |_| 5.0, 1.0, (0.0, 10.0), &InverseOptions::default()).unwrap();
        let b = inv.bands[0];
        assert!(b.lower_at_range_end && !b.upper_at_range_end);
        assert_eq!(b.lower, 0.0);
        assert!((b.upper - 6.0).abs() < 1e-12);
    }

    #[test]
    fn a_band_narrower_than_the_grid_is_still_found() {
        let opts = InverseOptions {
            scan_points: 3,
            rel_tol: 1e-12,
        };
        let inv = inverse_predict(|x| x, |_| 1e-3, 1.3, (0.0, 10.0), &opts).unwrap();
        assert_eq!(inv.bands.len(), 1);
        assert!((inv.bands[0].lower - 1.299).abs() < 1e-12);
        assert!((inv.bands[0].upper - 1.301).abs() < 1e-12);
    }

    #[test]
    fn a_model_undefined_on_the_range_is_an_error() {
        let opts = InverseOptions::default();
        assert!(inverse_predict(|x: f64| x.ln(), |_| 0.1, 0.5, (-1.0, 2.0), &opts).is_err());
        assert!(inverse_predict(|x| x, |_| 0.1, 0.5, (2.0, 1.0), &opts).is_err());
        assert!(inverse_predict(|x| x, |_| -0.1, 0.5, (0.0, 1.0), &opts).is_err());
    }
}
