//! The calibration record of SPEC §14 as plain values: what was calibrated, by which
//! procedure, against which reference standards, under which conditions. The recipe check
//! builds them (with spans kept beside them), `result.json` stores them, reports print them.

use serde::{Deserialize, Serialize};

use super::date::Date;

/// `[item]`: what was calibrated.
#[derive(Debug, Clone, Default, PartialEq, Serialize, Deserialize)]
pub struct Item {
    pub description: Option<String>,
    /// Asset or serial number.
    pub id: Option<String>,
}

/// `[procedure]`: the documented procedure followed.
#[derive(Debug, Clone, Default, PartialEq, Serialize, Deserialize)]
pub struct Procedure {
    pub id: Option<String>,
    pub revision: Option<String>,
}

/// One of `[[standards]]`: a reference standard used.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Standard {
    pub id: String,
    pub certificate: Option<String>,
    /// Calibration due date.
    pub due: Option<Date>,
    /// Standard uncertainty, in the unit of `applies_to`; enters the budget when given.
    pub u: Option<f64>,
    pub applies_to: Option<String>,
    /// Degrees of freedom of `u` (infinite unless given).
    pub dof: Option<f64>,
}

impl Standard {
    /// The standard as a budget component, when it states `u` and `applies_to`.
    pub fn component(&self) -> Option<super::gum::Component> {
        Some(super::gum::Component {
            name: match &self.certificate {
                Some(c) => format!("reference standard {} (certificate {c})", self.id),
                None => format!("reference standard {}", self.id),
            },
            u: self.u?,
            applies_to: self.applies_to.clone()?,
            dof: self.dof,
        })
    }
}

/// One quantity of `[conditions]`, e.g. `ambient = { value = 21.3, min = 18, max = 25,
/// unit = "°C" }`.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Condition {
    pub name: String,
    pub value: f64,
    pub min: Option<f64>,
    pub max: Option<f64>,
    pub unit: Option<String>,
}

impl Condition {
    /// Whether the value lies within the limits (`None` when no limit is given).
    pub fn within(&self) -> Option<bool> {
        if self.min.is_none() && self.max.is_none() {
            return None;
        }
        Some(
            self.min.is_none_or(|lo| self.value >= lo)
                && self.max.is_none_or(|hi| self.value <= hi),
        )
    }
}

/// The unique id of a report: `<recipe name>-<run id>` (the run id holds the UTC time and the
/// inputs' hash, so two reports of one recipe never share an id).
pub fn report_id(name: &str, run_id: &str) -> String {
    format!("{name}-{run_id}")
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn condition_limits_are_inclusive_and_optional() {
        let mut c = Condition {
            name: "ambient".into(),
            value: 25.0,
            min: Some(18.0),
            max: Some(25.0),
            unit: Some("°C".into()),
        };
        assert_eq!(c.within(), Some(true));
        c.value = 25.01;
        assert_eq!(c.within(), Some(false));
        c.min = None;
        c.max = None;
        assert_eq!(c.within(), None);
    }

    #[test]
    fn standard_enters_the_budget_only_with_u_and_variable() {
        let mut s = Standard {
            id: "REF-PRT-2".into(),
            certificate: Some("C-2291".into()),
            due: None,
            u: Some(0.01),
            applies_to: Some("T".into()),
            dof: None,
        };
        let c = s.component().expect("component");
        assert_eq!(c.name, "reference standard REF-PRT-2 (certificate C-2291)");
        s.u = None;
        assert!(s.component().is_none());
    }
}
