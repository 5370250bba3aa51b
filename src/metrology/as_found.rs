//! Calibration points against a curve (as found / as left) and the change of a curve between
//! two calibrations (SPEC §14).
//!
//! Deviation of a point (x, y) — x the reference setting, y the indication:
//! - in response units: d = y − f(x), the indication against the curve's value;
//! - in predictor units: d = f⁻¹(y) − x, the value the curve reads from y against the
//!   reference (the root of f⁻¹ nearest to x).
//!
//! Each deviation is judged against the tolerance at the indicated value with the decision
//! rule ([`super::decision`]) and the expanded uncertainty U of the deviation:
//! - as found (against the last curve that met its criteria): the listed components only,
//!   propagated through the old curve's slope — that curve is what the instrument used;
//! - as left (against the new curve): the new curve's fit uncertainty ⊕ the components.

use serde::{Deserialize, Serialize};

use super::curve::{self, Curve};
use super::decision::{self, Decision, DecisionRule};
use super::gum::{self, Contribution, Expanded};
use super::read_off::{Budget, FIT_COMPONENT};
use super::tolerance::{Axis, Tolerance};

/// A calibration point: where it came from, the reference setting x, the indication y.
#[derive(Debug, Clone, PartialEq)]
pub struct CalPoint {
    pub origin: String,
    pub x: f64,
    pub y: f64,
}

/// One point judged against a curve.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct PointDeviation {
    /// `file:line` of the row.
    pub origin: String,
    pub x: f64,
    pub y: f64,
    /// The reference value of the compared quantity: f(x) (response) or x (predictor).
    pub reference: f64,
    /// The indicated value: y (response) or f⁻¹(y) (predictor); `None` when the curve does
    /// not reach y near x.
    pub indicated: Option<f64>,
    /// indicated − reference.
    pub deviation: Option<f64>,
    /// The tolerance half-width at the indicated value.
    pub limit: f64,
    /// U of the deviation.
    pub expanded: f64,
    pub decision: Decision,
    pub note: Option<String>,
}

/// Every point judged against one curve.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Deviations {
    pub axis: Axis,
    pub tolerance: Tolerance,
    pub rule: DecisionRule,
    pub points: Vec<PointDeviation>,
}

impl Deviations {
    /// Points whose decision is a pass.
    pub fn passed(&self) -> usize {
        self.points.iter().filter(|p| p.decision.met()).count()
    }

    /// Whether every point passes.
    pub fn all_pass(&self) -> bool {
        !self.points.is_empty() && self.passed() == self.points.len()
    }

    /// The point with the largest |deviation| relative to its limit.
    pub fn worst(&self) -> Option<&PointDeviation> {
        self.points
            .iter()
            .max_by(|a, b| ratio(a).total_cmp(&ratio(b)))
    }

    /// Counts per decision, e.g. "18 pass, 1 conditional pass".
    pub fn tally(&self) -> String {
        let mut parts = Vec::new();
        for d in [
            Decision::Pass,
            Decision::ConditionalPass,
            Decision::ConditionalFail,
            Decision::Fail,
        ] {
            let n = self.points.iter().filter(|p| p.decision == d).count();
            if n > 0 {
                parts.push(format!("{n} {}", d.label()));
            }
        }
        parts.join(", ")
    }
}

fn ratio(p: &PointDeviation) -> f64 {
    match p.deviation {
        Some(d) if p.limit > 0.0 => d.abs() / p.limit,
        Some(0.0) => 0.0,
        _ => f64::INFINITY,
    }
}

/// U of a deviation at x (module docs): the components through the slope, plus the curve's
/// fit uncertainty when `include_fit`.
pub fn deviation_uncertainty(
    curve: &dyn Curve,
    x: f64,
    axis: Axis,
    budget: &Budget,
    include_fit: bool,
) -> Result<Expanded, String> {
    let slope = curve.slope(x)?;
    let (to_response, to_predictor) = match axis {
        Axis::Response => (1.0, slope),
        Axis::Predictor => {
            if slope == 0.0 || !slope.is_finite() {
                return Err(format!("the curve is flat at {} = {x}", curve.predictor()));
            }
            (1.0 / slope, 1.0)
        }
    };
    let mut parts = Vec::new();
    if include_fit {
        let u = curve.fit_uncertainty(x, None)?;
        parts.push(Contribution {
            name: FIT_COMPONENT.into(),
            u,
            applies_to: curve.response().into(),
            sensitivity: to_response,
            contribution: (u * to_response).abs(),
            dof: curve.fit_dof(),
        });
    }
    for c in &budget.components {
        let s = if c.applies_to == curve.response() {
            to_response
        } else if c.applies_to == curve.predictor() {
            to_predictor
        } else {
            return Err(format!(
                "the component `{}` applies to `{}`, not a variable of the curve",
                c.name, c.applies_to
            ));
        };
        parts.push(Contribution::of(c, s));
    }
    gum::combine(&parts, budget.coverage)
}

/// Judge every point against `curve` (module docs).
pub fn deviations(
    curve: &dyn Curve,
    points: &[CalPoint],
    tolerance: Tolerance,
    axis: Axis,
    rule: DecisionRule,
    budget: &Budget,
    include_fit: bool,
) -> Deviations {
    let (lo, hi) = curve::widened(curve.range(), 0.5);
    let judged = points
        .iter()
        .map(|p| {
            let (reference, indicated, at) = match axis {
                Axis::Response => match curve.value(p.x) {
                    Ok(v) => (v, Some(p.y), Some(p.x)),
                    Err(e) => return unreadable(p, f64::NAN, e),
                },
                Axis::Predictor => {
                    let root = curve::inverse_near(curve, p.y, p.x, lo.min(p.x), hi.max(p.x));
                    (p.x, root, root)
                }
            };
            let (Some(indicated), Some(at)) = (indicated, at) else {
                return unreadable(
                    p,
                    reference,
                    format!(
                        "the curve does not reach {} = {} near {} = {}",
                        curve.response(),
                        p.y,
                        curve.predictor(),
                        p.x
                    ),
                );
            };
            let deviation = indicated - reference;
            let limit = tolerance.limit(indicated);
            match deviation_uncertainty(curve, at, axis, budget, include_fit) {
                Ok(u) => PointDeviation {
                    origin: p.origin.clone(),
                    x: p.x,
                    y: p.y,
                    reference,
                    indicated: Some(indicated),
                    deviation: Some(deviation),
                    limit,
                    expanded: u.expanded,
                    decision: decision::decide(deviation, limit, u.expanded, rule),
                    note: None,
                },
                Err(e) => PointDeviation {
                    indicated: Some(indicated),
                    deviation: Some(deviation),
                    limit,
                    ..unreadable(p, reference, format!("no uncertainty: {e}"))
                },
            }
        })
        .collect();
    Deviations {
        axis,
        tolerance,
        rule,
        points: judged,
    }
}

fn unreadable(p: &CalPoint, reference: f64, why: String) -> PointDeviation {
    PointDeviation {
        origin: p.origin.clone(),
        x: p.x,
        y: p.y,
        reference,
        indicated: None,
        deviation: None,
        limit: f64::NAN,
        expanded: f64::NAN,
        decision: Decision::Fail,
        note: Some(why),
    }
}

/// Number of points at which two curves are compared over the calibrated range.
pub const CURVE_SAMPLES: usize = 201;

/// The largest difference between two curves over a range.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct CurveChange {
    pub axis: Axis,
    /// max |Δ| over the samples.
    pub max_abs: f64,
    /// The predictor value where it occurs.
    pub at: f64,
    pub samples: usize,
}

/// max over [`CURVE_SAMPLES`] evenly spaced x in `range` of |new(x) − old(x)| (response) or
/// of |old⁻¹(new(x)) − x| (predictor: how far the old curve would misread the new one's
/// value). Parameters alone are correlated; the curve is what a reading uses (SPEC §14).
pub fn curve_change(
    new: &dyn Curve,
    old: &dyn Curve,
    range: (f64, f64),
    axis: Axis,
) -> Result<CurveChange, String> {
    let (lo, hi) = range;
    let (wlo, whi) = curve::widened(range, 0.5);
    let mut best = CurveChange {
        axis,
        max_abs: 0.0,
        at: lo,
        samples: CURVE_SAMPLES,
    };
    for i in 0..CURVE_SAMPLES {
        let x = lo + (hi - lo) * i as f64 / (CURVE_SAMPLES - 1) as f64;
        let y_new = new.value(x)?;
        let diff = match axis {
            Axis::Response => y_new - old.value(x)?,
            Axis::Predictor => {
                let back = curve::inverse_near(old, y_new, x, wlo, whi).ok_or_else(|| {
                    format!(
                        "the previous curve does not reach {} = {y_new} near {} = {x}",
                        new.response(),
                        new.predictor()
                    )
                })?;
                back - x
            }
        };
        if !diff.is_finite() {
            return Err(format!(
                "the curves cannot be compared at {} = {x}",
                new.predictor()
            ));
        }
        if diff.abs() > best.max_abs {
            best.max_abs = diff.abs();
            best.at = x;
        }
    }
    Ok(best)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::metrology::curve::tests::line;
    use crate::metrology::gum::{Component, Coverage};

    fn points(curve: &dyn Curve, shift: f64) -> Vec<CalPoint> {
        (0..=10)
            .map(|i| {
                let x = i as f64;
                CalPoint {
                    origin: format!("row {i}"),
                    x,
                    y: curve.value(x).expect("finite") + shift,
                }
            })
            .collect()
    }

    fn budget(u_y: f64) -> Budget {
        Budget {
            components: vec![Component {
                name: "readout".into(),
                u: u_y,
                applies_to: "y".into(),
                dof: None,
            }],
            coverage: Coverage::Fixed { k: 2.0 },
        }
    }

    #[test]
    fn as_found_against_a_shifted_curve_finds_the_shift_at_every_point() {
        // The new data lie 0.3 above the old curve y = 1 + 2x (invented); tolerance ±0.5,
        // U = 2·0.05 = 0.1: inside by 0.2 > U, so every point passes the guard band.
        let old = line(1.0, 2.0, [[0.0, 0.0], [0.0, 0.0]], 0.0, 9);
        let data = points(&old, 0.3);
        let d = deviations(
            &old,
            &data,
            Tolerance::absolute(0.5),
            Axis::Response,
            DecisionRule::GuardBand,
            &budget(0.05),
            false,
        );
        assert_eq!(d.points.len(), 11);
        for p in &d.points {
            assert!((p.deviation.expect("read") - 0.3).abs() < 1e-12);
            assert!((p.expanded - 0.1).abs() < 1e-15);
            assert_eq!(p.decision, Decision::Pass);
        }
        // Shifted by 0.45: inside the tolerance by less than U — conditional pass, not met.
        let d = deviations(
            &old,
            &points(&old, 0.45),
            Tolerance::absolute(0.5),
            Axis::Response,
            DecisionRule::GuardBand,
            &budget(0.05),
            false,
        );
        assert!(
            d.points
                .iter()
                .all(|p| p.decision == Decision::ConditionalPass)
        );
        assert!(!d.all_pass());
        assert_eq!(d.tally(), "11 conditional pass");
    }

    #[test]
    fn as_found_in_predictor_units_reads_through_the_inverse() {
        // A shift of 0.3 in y on a slope of 2 reads as 0.15 in x; the readout u = 0.05 in y
        // is 0.025 in x (sensitivity 1/2).
        let old = line(1.0, 2.0, [[0.0, 0.0], [0.0, 0.0]], 0.0, 9);
        let d = deviations(
            &old,
            &points(&old, 0.3),
            Tolerance::absolute(0.1),
            Axis::Predictor,
            DecisionRule::Simple,
            &budget(0.05),
            false,
        );
        for p in &d.points {
            assert!((p.deviation.expect("read") - 0.15).abs() < 1e-12, "{p:?}");
            assert!((p.expanded - 0.05).abs() < 1e-15);
            assert_eq!(p.decision, Decision::Fail);
        }
        assert_eq!(d.passed(), 0);
    }

    #[test]
    fn curve_change_is_the_largest_gap_over_the_range() {
        // 1 + 2x against 1.2 + 1.9x on [0, 10]: |0.2 − 0.1x| peaks at 0.8 at x = 10;
        // in x units that is 0.8/1.9 read through the old curve.
        let new = line(1.0, 2.0, [[0.0, 0.0], [0.0, 0.0]], 0.0, 9);
        let old = line(1.2, 1.9, [[0.0, 0.0], [0.0, 0.0]], 0.0, 9);
        let c = curve_change(&new, &old, (0.0, 10.0), Axis::Response).expect("compares");
        assert!((c.max_abs - 0.8).abs() < 1e-12 && c.at == 10.0, "{c:?}");
        let c = curve_change(&new, &old, (0.0, 10.0), Axis::Predictor).expect("compares");
        assert!((c.max_abs - 0.8 / 1.9).abs() < 1e-12, "{c:?}");
    }
}
