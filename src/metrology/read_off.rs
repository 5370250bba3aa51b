//! Values read off a calibration curve with their measurement uncertainty (SPEC §14, GUM).
//!
//! Forward, ŷ = f(x₀) at a setting x₀:
//!   u_c²(ŷ) = u_fit² + Σ_{components in y} u² + Σ_{components in x} (f′(x₀)·u)²,
//! where u_fit = √(gᵀCg) (the confidence band's standard error; with m readings the
//! prediction s.e.) and f′ the slope — the sensitivity coefficient of an input in x.
//! Inverse, x̂ = f⁻¹(ȳ) from the mean ȳ of m new readings:
//!   u_c²(x̂) = (u_pred/f′(x̂))² + Σ_{components in y} (u/f′(x̂))² + Σ_{components in x} u²,
//! with u_pred = √(gᵀCg + σ²/(m·w₀)) at x̂: the prediction s.e. already holds the scatter of
//! the new readings about the curve, so a repeatability component must not be listed again.
//! Both are the first-order propagation of JCGM 100:2008 5.1.2 with sensitivity
//! coefficients dy/dx or dx/dy = 1/f′ (from memory). The fit component has ν = n − p
//! (infinite when σ is known), every listed component its own ν (infinite unless given);
//! then U = k·u_c as in [`super::gum`].

use serde::{Deserialize, Serialize};

use super::curve::{self, Curve};
use super::gum::{self, Component, Contribution, Coverage, Expanded};
use crate::report::format;

/// The listed components and the coverage rule (`[uncertainty]` plus the `[[standards]]`
/// that state a `u`), as the stored result keeps them for `predict`.
#[derive(Debug, Clone, Default, PartialEq, Serialize, Deserialize)]
pub struct Budget {
    pub components: Vec<Component>,
    pub coverage: Coverage,
}

/// Name of the fit component in budgets.
pub const FIT_COMPONENT: &str = "calibration curve (fit)";

/// Which way a value is read off.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "kebab-case")]
pub enum Direction {
    /// ŷ = f(x₀).
    Forward,
    /// x̂ = f⁻¹(ȳ).
    Inverse,
}

/// A value read off the curve with its uncertainty budget.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct ReadOff {
    pub direction: Direction,
    /// The variable given (x₀ forward, ȳ inverse) and its value.
    pub given: String,
    pub input: f64,
    /// The variable read off and its value.
    pub read: String,
    pub value: f64,
    /// m, the number of readings averaged (inverse, or forward prediction).
    pub readings: Option<u32>,
    /// dy/dx where the value was read.
    pub slope: f64,
    /// The fit first, then the listed components.
    pub contributions: Vec<Contribution>,
    pub expanded: Expanded,
    /// Whether the point lies inside the calibrated range of the predictor.
    pub in_range: bool,
}

impl ReadOff {
    /// "25.013 ± 0.021" (U), GUM-rounded: U to 2 significant digits, the value to the same
    /// decimal place (JCGM 100:2008 7.2.6).
    pub fn text(&self) -> String {
        format::plus_minus(self.value, self.expanded.expanded)
    }

    /// "R = 10012 ± 12 Ω (U, k = 2, coverage probability approximately 95 %)".
    pub fn statement(&self, unit: &str) -> String {
        let (v, u) = format::value_with_uncertainty(self.value, self.expanded.expanded);
        let unit = if unit.is_empty() {
            String::new()
        } else {
            format!(" {unit}")
        };
        format!(
            "{} = {v} ± {u}{unit} (expanded uncertainty U, {})",
            self.read,
            self.expanded.describe()
        )
    }
}

fn component_contribution(
    c: &Component,
    curve: &dyn Curve,
    to_response: f64,
    to_predictor: f64,
) -> Result<Contribution, String> {
    if c.applies_to == curve.response() {
        Ok(Contribution::of(c, to_response))
    } else if c.applies_to == curve.predictor() {
        Ok(Contribution::of(c, to_predictor))
    } else {
        Err(format!(
            "the component `{}` applies to `{}`, which is neither the response `{}` nor the predictor `{}`",
            c.name,
            c.applies_to,
            curve.response(),
            curve.predictor()
        ))
    }
}

fn outside(curve: &dyn Curve, x: f64) -> String {
    let (lo, hi) = curve.range();
    format!(
        "{} = {} lies outside the calibrated range [{}, {}]",
        curve.predictor(),
        crate::acceptance::fmt_num(x),
        crate::acceptance::fmt_num(lo),
        crate::acceptance::fmt_num(hi)
    )
}

/// ŷ = f(x₀) with its uncertainty (module docs). `readings = Some(m)` treats the value as
/// the mean of m new readings at x₀ (the prediction s.e.), `None` as the curve's value.
/// Outside the calibrated range it is an error unless `extrapolate`.
pub fn forward(
    curve: &dyn Curve,
    x: f64,
    readings: Option<u32>,
    budget: &Budget,
    extrapolate: bool,
) -> Result<ReadOff, String> {
    let (lo, hi) = curve.range();
    let in_range = (lo..=hi).contains(&x);
    if !in_range && !extrapolate {
        return Err(format!(
            "{}; a read-off there is an extrapolation (allow it explicitly)",
            outside(curve, x)
        ));
    }
    let value = curve.value(x)?;
    let slope = curve.slope(x)?;
    let u_fit = curve.fit_uncertainty(x, readings)?;
    let mut contributions = vec![Contribution {
        name: FIT_COMPONENT.into(),
        u: u_fit,
        applies_to: curve.response().into(),
        sensitivity: 1.0,
        contribution: u_fit,
        dof: curve.fit_dof(),
    }];
    for c in &budget.components {
        contributions.push(component_contribution(c, curve, 1.0, slope)?);
    }
    let expanded = gum::combine(&contributions, budget.coverage)?;
    Ok(ReadOff {
        direction: Direction::Forward,
        given: curve.predictor().into(),
        input: x,
        read: curve.response().into(),
        value,
        readings,
        slope,
        contributions,
        expanded,
        in_range,
    })
}

/// The uncertainty of x̂ = f⁻¹(ȳ) at a known root x̂ (module docs).
pub fn inverse_at(
    curve: &dyn Curve,
    y: f64,
    x: f64,
    readings: u32,
    budget: &Budget,
) -> Result<ReadOff, String> {
    let slope = curve.slope(x)?;
    if slope == 0.0 || !slope.is_finite() {
        return Err(format!(
            "the curve is flat at {} = {}: a reading there does not determine {}",
            curve.predictor(),
            crate::acceptance::fmt_num(x),
            curve.predictor()
        ));
    }
    let (lo, hi) = curve.range();
    let u_pred = curve.fit_uncertainty(x, Some(readings.max(1)))?;
    let c = 1.0 / slope;
    let mut contributions = vec![Contribution {
        name: FIT_COMPONENT.into(),
        u: u_pred,
        applies_to: curve.response().into(),
        sensitivity: c,
        contribution: (c * u_pred).abs(),
        dof: curve.fit_dof(),
    }];
    for comp in &budget.components {
        contributions.push(component_contribution(comp, curve, c, 1.0)?);
    }
    let expanded = gum::combine(&contributions, budget.coverage)?;
    Ok(ReadOff {
        direction: Direction::Inverse,
        given: curve.response().into(),
        input: y,
        read: curve.predictor().into(),
        value: x,
        readings: Some(readings.max(1)),
        slope,
        contributions,
        expanded,
        in_range: (lo..=hi).contains(&x),
    })
}

/// x̂ = f⁻¹(ȳ) for the mean ȳ of `readings` new readings: every root inside the calibrated
/// range, each with its uncertainty (SPEC §13: several roots are all reported). With
/// `extrapolate`, roots up to one span beyond each end count too; without it, a reading
/// whose root lies only outside is an error saying so.
pub fn inverse(
    curve: &dyn Curve,
    y: f64,
    readings: u32,
    budget: &Budget,
    extrapolate: bool,
) -> Result<Vec<ReadOff>, String> {
    let (lo, hi) = curve.range();
    let roots = if extrapolate {
        let (a, b) = curve::widened((lo, hi), 1.0);
        curve::inverse(curve, y, a, b)
    } else {
        curve::inverse(curve, y, lo, hi)
    };
    if roots.is_empty() {
        let (a, b) = curve::widened((lo, hi), 1.0);
        let beyond = curve::inverse(curve, y, a, b);
        return Err(match beyond.first() {
            Some(x) if !extrapolate => format!(
                "{} = {} is reached only outside the calibrated range ({}); a read-off there is an extrapolation (allow it explicitly)",
                curve.response(),
                crate::acceptance::fmt_num(y),
                outside(curve, *x)
            ),
            _ => format!(
                "the curve does not reach {} = {} within the calibrated range of {}",
                curve.response(),
                crate::acceptance::fmt_num(y),
                curve.predictor()
            ),
        });
    }
    roots
        .into_iter()
        .map(|x| inverse_at(curve, y, x, readings, budget))
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::metrology::curve::tests::line;

    fn budget(components: Vec<Component>) -> Budget {
        Budget {
            components,
            coverage: Coverage::Fixed { k: 2.0 },
        }
    }

    fn comp(name: &str, u: f64, applies_to: &str) -> Component {
        Component {
            name: name.into(),
            u,
            applies_to: applies_to.into(),
            dof: None,
        }
    }

    #[test]
    fn components_in_the_other_variable_go_through_the_slope() {
        // y = 1 + 2x: a component of 0.1 in x contributes 0.2 in y forward; a component of
        // 0.3 in y contributes 0.15 in x inverse (sensitivity dx/dy = 1/2).
        let c = line(1.0, 2.0, [[0.0, 0.0], [0.0, 0.0]], 0.0, 8);
        let b = budget(vec![comp("standard", 0.1, "x"), comp("readout", 0.3, "y")]);
        let f = forward(&c, 3.0, None, &b, false).expect("reads");
        assert_eq!(f.value, 7.0);
        assert!((f.contributions[1].contribution - 0.2).abs() < 1e-15);
        assert!((f.expanded.u_c - (0.04f64 + 0.09).sqrt()).abs() < 1e-15);
        assert_eq!(f.expanded.expanded, 2.0 * f.expanded.u_c);
        let inv = inverse(&c, 7.0, 1, &b, false).expect("reads");
        assert_eq!(inv.len(), 1);
        assert!((inv[0].value - 3.0).abs() < 1e-15);
        assert!((inv[0].contributions[2].contribution - 0.15).abs() < 1e-15);
        assert!((inv[0].expanded.u_c - (0.01f64 + 0.0225).sqrt()).abs() < 1e-15);
    }

    #[test]
    fn outside_the_range_needs_extrapolation() {
        let c = line(1.0, 2.0, [[0.01, 0.0], [0.0, 0.0001]], 0.01, 8);
        let b = budget(Vec::new());
        let e = forward(&c, 12.0, None, &b, false).expect_err("outside");
        assert!(e.contains("outside the calibrated range"), "{e}");
        let f = forward(&c, 12.0, None, &b, true).expect("extrapolates");
        assert!(!f.in_range);
        let e = inverse(&c, 25.0, 1, &b, false).expect_err("root at x = 12");
        assert!(e.contains("only outside the calibrated range"), "{e}");
        let inv = inverse(&c, 25.0, 1, &b, true).expect("extrapolates");
        assert!((inv[0].value - 12.0).abs() < 1e-12 && !inv[0].in_range);
    }

    #[test]
    fn thermometer_correction_reproduces_gum_h3() {
        // JCGM 100:2008 Annex H.3, calibration of a thermometer (data of Table H.6 typed from
        // memory; they reproduce every figure the guide prints): b(t) = y1 + y2·(t − t0),
        // t0 = 20 °C. The guide gets y1 = −0.1712(29) °C, y2 = 0.00218(67), r = −0.930,
        // s = 0.0035 °C, and at t = 30 °C the correction b = −0.1494 °C with
        // u_c(b) = 0.0041 °C.
        use crate::fit::covariance::{self, UncertaintySettings};
        let t = [
            21.521, 22.012, 22.512, 23.003, 23.507, 23.999, 24.513, 25.002, 25.503, 26.010, 26.511,
        ];
        let b = [
            -0.171, -0.169, -0.166, -0.159, -0.164, -0.165, -0.156, -0.157, -0.159, -0.161, -0.160,
        ];
        let design =
            nalgebra::DMatrix::from_fn(11, 2, |i, j| if j == 0 { 1.0 } else { t[i] - 20.0 });
        let names = ["y1".to_string(), "y2".to_string()];
        let fit = crate::fit::linear::fit_linear(&design, &b, None, &names).expect("fits");
        let u = covariance::uncertainty_from_jacobian(
            &design,
            None,
            &fit.coefficients,
            &[false, false],
            &names,
            fit.ssr,
            UncertaintySettings::default(),
        )
        .expect("covariance");
        assert_eq!(format::sig(fit.coefficients[0], 4), "-0.1712");
        assert_eq!(format::sig(u.correlation[(0, 1)], 3), "-0.930");
        let rhs = crate::expr::parse_expression("y1 + y2*(t - 20)").expect("parses");
        let curve = crate::metrology::ModelCurve::new(crate::metrology::CurveSpec {
            response: "b",
            predictor: "t",
            rhs: &rhs,
            names: &names,
            values: &fit.coefficients,
            uncertainty: Some(u),
            weights: None,
            range: (21.521, 26.511),
        })
        .expect("builds");
        let r = forward(&curve, 30.0, None, &budget(Vec::new()), true).expect("reads");
        assert_eq!(format::sig(r.value, 4), "-0.1494");
        assert_eq!(format::sig(r.expanded.u_c, 2), "0.0041");
        assert_eq!(r.contributions[0].dof, Some(9.0), "n − p = 11 − 2");
        assert!(!r.in_range, "30 °C is beyond the calibrated 21.5–26.5 °C");
    }

    #[test]
    fn gum_rounding_keeps_two_digits_of_u_and_the_value_to_that_place() {
        // JCGM 100:2008 7.2.6 (from memory): "if y = 10.057 62 Ω with u_c(y) = 27 mΩ, y should
        // be rounded to 10.058 Ω"; "u(xᵢ) = 28.05 kHz should be rounded down to 28 kHz". The
        // guide allows rounding an uncertainty up (10.47 mΩ → 11 mΩ); fitwright rounds to the
        // nearest, so 10.47 gives 10.
        assert_eq!(
            format::value_with_uncertainty(10.057_62, 0.027),
            ("10.058".to_string(), "0.027".to_string())
        );
        assert_eq!(format::uncertainty(28.05), "28");
        assert_eq!(format::uncertainty(10.47), "10");
        // A read-off states U that way: 2 digits of U, the value to the same place.
        let c = line(1.0, 2.0, [[0.0, 0.0], [0.0, 0.0]], 0.0, 8);
        let b = budget(vec![comp("readout", 0.0123, "y")]);
        let r = forward(&c, 3.0123456, None, &b, false).expect("reads");
        assert_eq!(r.text(), "7.025 ± 0.025");
        assert!(
            r.statement("mA")
                .starts_with("y = 7.025 ± 0.025 mA (expanded uncertainty U, k = 2,")
        );
    }

    #[test]
    fn unknown_variable_in_a_component_is_an_error() {
        let c = line(1.0, 2.0, [[0.0, 0.0], [0.0, 0.0]], 0.0, 8);
        let b = budget(vec![comp("ambient", 0.1, "T_room")]);
        assert!(forward(&c, 1.0, None, &b, false).is_err());
    }
}
