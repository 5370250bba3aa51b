//! The combined and expanded uncertainty of the GUM (JCGM 100:2008, "Evaluation of
//! measurement data — Guide to the expression of uncertainty in measurement"; section
//! numbers below are from memory).
//!
//! For a result y = f(x₁, …, x_N) of uncorrelated inputs with standard uncertainties u(xᵢ):
//! - sensitivity coefficients cᵢ = ∂f/∂xᵢ (GUM 5.1.3), contributions uᵢ(y) = |cᵢ|·u(xᵢ);
//! - combined standard uncertainty u_c(y) = √(Σ uᵢ(y)²) (GUM 5.1.2, eq. 10);
//! - effective degrees of freedom by the Welch–Satterthwaite formula
//!   ν_eff = u_c⁴ / Σ (uᵢ⁴/νᵢ) (GUM G.4.1, eq. G.2b), with νᵢ = ∞ for a type-B component
//!   unless a value is given (GUM G.4.2), so such terms drop out;
//! - expanded uncertainty U = k·u_c (GUM 6.2.1) with either a chosen k (k = 2: a coverage
//!   probability of approximately 95 % for a normal distribution, GUM 6.3.3) or
//!   k = t_p(ν_eff), the Student-t quantile for coverage probability p, with ν_eff truncated
//!   to the next lower integer (GUM G.4.1 note; EA-4/02 M:2022 Annex E uses p = 95.45 %).

use serde::{Deserialize, Serialize};
use statrs::distribution::{ContinuousCDF, Normal, StudentsT};

/// Coverage probability used with `coverage_k = "auto"` unless another is given: the 95.45 %
/// of EA-4/02 M:2022 (the probability of ±2σ of a normal distribution; from memory).
pub const DEFAULT_PROBABILITY: f64 = 0.9545;

/// One input of an uncertainty budget: a standard uncertainty in the unit of the variable it
/// applies to.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Component {
    /// What it is, e.g. "reference thermometer REF-PRT-2 (certificate C-2291)".
    pub name: String,
    /// Standard uncertainty u(xᵢ) (never negative).
    pub u: f64,
    /// The model variable whose unit `u` is in (the response or the predictor).
    pub applies_to: String,
    /// Degrees of freedom νᵢ; `None` is infinite (type B without a stated reliability).
    #[serde(default)]
    pub dof: Option<f64>,
}

/// A component's share in one combined uncertainty.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Contribution {
    pub name: String,
    /// u(xᵢ), in the unit of `applies_to`.
    pub u: f64,
    pub applies_to: String,
    /// cᵢ = ∂(result)/∂xᵢ.
    pub sensitivity: f64,
    /// |cᵢ|·u(xᵢ), in the unit of the result.
    pub contribution: f64,
    /// νᵢ; `None` is infinite.
    pub dof: Option<f64>,
}

impl Contribution {
    /// The contribution of `component` through sensitivity `c`.
    pub fn of(component: &Component, c: f64) -> Contribution {
        Contribution {
            name: component.name.clone(),
            u: component.u,
            applies_to: component.applies_to.clone(),
            sensitivity: c,
            contribution: (c * component.u).abs(),
            dof: component.dof,
        }
    }
}

/// How the coverage factor k is chosen (`[uncertainty] coverage_k`).
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
#[serde(tag = "kind", rename_all = "kebab-case")]
pub enum Coverage {
    /// A fixed k (usually 2).
    Fixed { k: f64 },
    /// k = t_p(ν_eff) from the Welch–Satterthwaite effective degrees of freedom.
    Auto { probability: f64 },
}

impl Default for Coverage {
    fn default() -> Self {
        Coverage::Fixed { k: 2.0 }
    }
}

impl Coverage {
    /// How k is chosen, in words.
    pub fn describe(&self) -> String {
        match self {
            Coverage::Fixed { k } => format!(
                "k = {} (coverage probability approximately {} for a normal distribution)",
                crate::report::format::full(*k),
                approximate_percent(normal_probability(*k))
            ),
            Coverage::Auto { probability } => format!(
                "k = t_p(ν_eff) for a coverage probability p = {} (Welch–Satterthwaite, JCGM 100:2008 G.4)",
                percent(*probability)
            ),
        }
    }
}

/// Combined and expanded uncertainty of one result.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct Expanded {
    /// u_c = √(Σ contributions²).
    pub u_c: f64,
    /// ν_eff; `None` is infinite.
    pub nu_eff: Option<f64>,
    /// The coverage factor.
    pub k: f64,
    /// U = k·u_c.
    pub expanded: f64,
    /// The coverage probability.
    pub probability: f64,
    /// Whether the probability is approximate (a fixed k, normal distribution assumed).
    pub approximate: bool,
}

impl Expanded {
    /// The coverage factor as text: a chosen k as given ("2"), a t quantile to 3
    /// significant digits ("2.92").
    pub fn k_text(&self) -> String {
        if self.approximate {
            crate::acceptance::fmt_num(self.k)
        } else {
            crate::report::format::sig(self.k, 3)
        }
    }

    /// "k = 2, coverage probability approximately 95 %" or "k = 2.92, ν_eff = 16, coverage
    /// probability 99 %".
    pub fn describe(&self) -> String {
        let nu = match self.nu_eff {
            Some(v) if v < 1e6 => format!(", ν_eff = {}", v.floor() as i64),
            Some(_) => String::new(),
            None => String::new(),
        };
        let k = self.k_text();
        format!(
            "k = {k}{nu}, coverage probability {}",
            if self.approximate {
                format!("approximately {}", approximate_percent(self.probability))
            } else {
                percent(self.probability)
            }
        )
    }
}

fn percent(p: f64) -> String {
    // 0.95 → "95 %", 0.9545 → "95.45 %", 0.99 → "99 %".
    let v = p * 100.0;
    let text = format!("{v:.2}");
    let text = text.trim_end_matches('0').trim_end_matches('.');
    format!("{text} %")
}

/// A probability stated as approximate: 2 significant digits below 99 % (k = 2 gives
/// "95 %", JCGM 100:2008 6.3.3), 3 above ("99.7 %" for k = 3).
fn approximate_percent(p: f64) -> String {
    let digits = if p < 0.99 { 2 } else { 3 };
    format!("{} %", crate::report::format::sig(p * 100.0, digits))
}

/// P(|Z| ≤ k) for a standard normal Z: 2Φ(k) − 1.
pub fn normal_probability(k: f64) -> f64 {
    #[allow(
        clippy::expect_used,
        reason = "invariant: N(0, 1) has valid parameters"
    )]
    let z = Normal::new(0.0, 1.0).expect("invariant: N(0, 1) is a valid distribution");
    2.0 * z.cdf(k) - 1.0
}

/// Welch–Satterthwaite ν_eff = u_c⁴ / Σ uᵢ⁴/νᵢ (JCGM 100:2008 G.2b); terms with infinite νᵢ
/// or zero contribution drop out; `None` (infinite) when no term remains.
pub fn effective_dof(contributions: &[Contribution]) -> Option<f64> {
    let u_c2: f64 = contributions.iter().map(|c| c.contribution.powi(2)).sum();
    let denominator: f64 = contributions
        .iter()
        .filter_map(|c| match c.dof {
            Some(nu) if nu > 0.0 && nu.is_finite() && c.contribution > 0.0 => {
                Some(c.contribution.powi(4) / nu)
            }
            _ => None,
        })
        .sum();
    (denominator > 0.0).then(|| u_c2 * u_c2 / denominator)
}

/// The coverage factor t_p(ν) for coverage probability p: the two-sided Student-t quantile
/// t_{(1+p)/2}(ν) with ν truncated to the next lower integer (at least 1), or the normal
/// quantile z_{(1+p)/2} for infinite ν (JCGM 100:2008 G.3, G.4.1).
pub fn coverage_factor(nu: Option<f64>, probability: f64) -> Result<f64, String> {
    if !(probability > 0.0 && probability < 1.0) {
        return Err(format!(
            "the coverage probability must lie strictly between 0 and 1, found {probability}"
        ));
    }
    let q = 0.5 * (1.0 + probability);
    match nu {
        Some(v) if v.is_finite() => {
            let nu = v.floor().max(1.0);
            let t = StudentsT::new(0.0, 1.0, nu)
                .map_err(|e| format!("no Student-t distribution for ν = {nu}: {e}"))?;
            Ok(t.inverse_cdf(q))
        }
        _ => {
            #[allow(
                clippy::expect_used,
                reason = "invariant: N(0, 1) has valid parameters"
            )]
            let z = Normal::new(0.0, 1.0).expect("invariant: N(0, 1) is a valid distribution");
            Ok(z.inverse_cdf(q))
        }
    }
}

/// u_c, ν_eff, k and U of uncorrelated contributions (see the module docs for the formulas).
pub fn combine(contributions: &[Contribution], coverage: Coverage) -> Result<Expanded, String> {
    if let Some(c) = contributions
        .iter()
        .find(|c| !(c.contribution.is_finite() && c.contribution >= 0.0))
    {
        return Err(format!(
            "the contribution of `{}` is not a finite non-negative number ({})",
            c.name, c.contribution
        ));
    }
    let u_c = contributions
        .iter()
        .map(|c| c.contribution.powi(2))
        .sum::<f64>()
        .sqrt();
    let nu_eff = effective_dof(contributions);
    let (k, probability, approximate) = match coverage {
        Coverage::Fixed { k } => {
            if !(k > 0.0 && k.is_finite()) {
                return Err(format!("the coverage factor must be positive, found {k}"));
            }
            (k, normal_probability(k), true)
        }
        Coverage::Auto { probability } => {
            (coverage_factor(nu_eff, probability)?, probability, false)
        }
    };
    Ok(Expanded {
        u_c,
        nu_eff,
        k,
        expanded: k * u_c,
        probability,
        approximate,
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    fn part(name: &str, contribution: f64, dof: Option<f64>) -> Contribution {
        Contribution {
            name: name.into(),
            u: contribution,
            applies_to: "l".into(),
            sensitivity: 1.0,
            contribution,
            dof,
        }
    }

    #[test]
    fn end_gauge_budget_reproduces_gum_h1() {
        // JCGM 100:2008 Annex H.1, end-gauge calibration, Table H.1 (numbers typed from
        // memory): contributions in nm with their degrees of freedom — calibration of the
        // standard 25 (18), measured difference 9.7 (25.6), difference of expansion
        // coefficients 2.9 (50), difference of temperatures 16.6 (2). The guide gets
        // u_c = 32 nm, ν_eff = 16, t_99(16) = 2.92 and U_99 = 93 nm.
        let parts = [
            part("u(l_s)", 25.0, Some(18.0)),
            part("u(d)", 9.7, Some(25.6)),
            part("u(δα)", 2.9, Some(50.0)),
            part("u(δθ)", 16.6, Some(2.0)),
        ];
        let e = combine(&parts, Coverage::Auto { probability: 0.99 }).expect("combines");
        assert_eq!(crate::report::format::sig(e.u_c, 2), "32");
        assert_eq!(e.nu_eff.map(f64::floor), Some(16.0));
        assert!((e.k - 2.92).abs() < 0.005, "k = {}", e.k);
        assert_eq!(crate::report::format::sig(e.expanded, 2), "93");
        assert!(!e.approximate);
    }

    #[test]
    fn sub_budget_dof_reproduces_gum_h1_measured_difference() {
        // JCGM 100:2008 H.1.3.2 (from memory): u(d̄) = 5.8 nm (ν 24), u(d₁) = 3.9 nm (ν 5),
        // u(d₂) = 6.7 nm (ν 8) give u(d) = 9.7 nm with ν_eff = 25.6 (the guide's value, from
        // unrounded inputs; these rounded ones give 25.4).
        let parts = [
            part("d̄", 5.8, Some(24.0)),
            part("d1", 3.9, Some(5.0)),
            part("d2", 6.7, Some(8.0)),
        ];
        let e = combine(&parts, Coverage::default()).expect("combines");
        assert_eq!(crate::report::format::sig(e.u_c, 2), "9.7");
        let nu = e.nu_eff.expect("finite");
        assert!((nu - 25.6).abs() < 0.5, "ν_eff = {nu}");
        assert_eq!(e.k, 2.0);
    }

    #[test]
    fn coverage_factors_match_the_ea_4_02_table() {
        // EA-4/02 M:2022 Annex E, Table E.1 (from memory): k for p = 95.45 % by ν_eff.
        for (nu, k) in [
            (Some(1.0), 13.97),
            (Some(2.0), 4.53),
            (Some(3.0), 3.31),
            (Some(4.0), 2.87),
            (Some(5.0), 2.65),
            (Some(6.0), 2.52),
            (Some(8.0), 2.37),
            (Some(10.0), 2.28),
            (Some(20.0), 2.13),
            (Some(50.0), 2.05),
            (None, 2.00),
        ] {
            let got = coverage_factor(nu, DEFAULT_PROBABILITY).expect("valid");
            assert!((got - k).abs() < 0.006, "ν = {nu:?}: k = {got}, table {k}");
        }
        // ν_eff is truncated, not rounded (JCGM 100:2008 G.4.1 note).
        assert_eq!(
            coverage_factor(Some(10.9), DEFAULT_PROBABILITY).ok(),
            coverage_factor(Some(10.0), DEFAULT_PROBABILITY).ok()
        );
    }

    #[test]
    fn type_b_components_without_dof_give_infinite_effective_dof() {
        let parts = [part("a", 0.3, None), part("b", 0.4, None)];
        let e = combine(
            &parts,
            Coverage::Auto {
                probability: 0.9545,
            },
        )
        .expect("combines");
        assert_eq!(e.u_c, 0.5);
        assert_eq!(e.nu_eff, None);
        assert!((e.k - 2.0).abs() < 1e-3);
        // k = 2 states approximately 95 % (JCGM 100:2008 6.3.3).
        let fixed = combine(&parts, Coverage::default()).expect("combines");
        assert_eq!(fixed.expanded, 1.0);
        assert!(
            fixed.describe().contains("approximately 95 %"),
            "{}",
            fixed.describe()
        );
    }

    #[test]
    fn bad_coverage_settings_are_errors() {
        let parts = [part("a", 0.3, None)];
        assert!(combine(&parts, Coverage::Fixed { k: 0.0 }).is_err());
        assert!(combine(&parts, Coverage::Auto { probability: 1.0 }).is_err());
        assert!(combine(&[part("bad", f64::NAN, None)], Coverage::default()).is_err());
    }
}
