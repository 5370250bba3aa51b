//! Decision rules for statements of conformity (ILAC-G8:09/2019, "Guidelines on Decision
//! Rules and Statements of Conformity"; section numbers from memory).
//!
//! A measured deviation d is judged against a symmetric tolerance limit TL (|d| ≤ TL is in
//! tolerance) with the expanded uncertainty U of d:
//! - simple acceptance (ILAC-G8 4.2.1, guard band w = 0): pass when |d| ≤ TL, fail
//!   otherwise; at the limit the risk of a false pass can reach 50 %;
//! - guard band (ILAC-G8 4.2.2/4.2.3, w = U): the acceptance limit is narrowed to
//!   AL = TL − U. Pass when |d| ≤ TL − U; "conditional pass" when TL − U < |d| ≤ TL;
//!   "conditional fail" when TL < |d| ≤ TL + U; fail when |d| > TL + U. Only a pass meets the
//!   criterion: the conditional zones are shown for the reviewer.

use serde::{Deserialize, Serialize};

/// `[decision] rule`.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, Serialize, Deserialize)]
#[serde(rename_all = "kebab-case")]
pub enum DecisionRule {
    #[default]
    Simple,
    GuardBand,
}

impl DecisionRule {
    pub const NAMES: [&'static str; 2] = ["simple", "guard-band"];

    pub fn parse(name: &str) -> Option<DecisionRule> {
        match name {
            "simple" => Some(DecisionRule::Simple),
            "guard-band" => Some(DecisionRule::GuardBand),
            _ => None,
        }
    }

    pub fn name(self) -> &'static str {
        match self {
            DecisionRule::Simple => "simple",
            DecisionRule::GuardBand => "guard-band",
        }
    }

    /// The rule in words, for the report beside the verdict.
    pub fn describe(self) -> &'static str {
        match self {
            DecisionRule::Simple => {
                "simple acceptance (ILAC-G8:09/2019 4.2.1, guard band w = 0): a value within its tolerance passes; at the limit the probability of a false pass can reach 50 %"
            }
            DecisionRule::GuardBand => {
                "guard band w = U (ILAC-G8:09/2019 4.2.2): a value passes only within its tolerance narrowed by the expanded uncertainty U; within the tolerance by less than U is a conditional pass and is not met"
            }
        }
    }
}

/// The statement for one value (ILAC-G8 4.2.3 zones).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "kebab-case")]
pub enum Decision {
    Pass,
    ConditionalPass,
    ConditionalFail,
    Fail,
}

impl Decision {
    /// Whether the criterion is met (only a pass).
    pub fn met(self) -> bool {
        self == Decision::Pass
    }

    pub fn label(self) -> &'static str {
        match self {
            Decision::Pass => "pass",
            Decision::ConditionalPass => "conditional pass",
            Decision::ConditionalFail => "conditional fail",
            Decision::Fail => "fail",
        }
    }
}

/// The acceptance limit of a rule: TL (simple) or TL − U (guard band; may be negative, in
/// which case nothing can pass).
pub fn acceptance_limit(tolerance: f64, expanded: f64, rule: DecisionRule) -> f64 {
    match rule {
        DecisionRule::Simple => tolerance,
        DecisionRule::GuardBand => tolerance - expanded,
    }
}

/// Judge a deviation against ±`tolerance` with expanded uncertainty `expanded` (see the
/// module docs). A non-finite deviation fails.
pub fn decide(deviation: f64, tolerance: f64, expanded: f64, rule: DecisionRule) -> Decision {
    let d = deviation.abs();
    if !d.is_finite() {
        return Decision::Fail;
    }
    match rule {
        DecisionRule::Simple => {
            if d <= tolerance {
                Decision::Pass
            } else {
                Decision::Fail
            }
        }
        DecisionRule::GuardBand => {
            let w = expanded.max(0.0);
            if d <= tolerance - w {
                Decision::Pass
            } else if d <= tolerance {
                Decision::ConditionalPass
            } else if d <= tolerance + w {
                Decision::ConditionalFail
            } else {
                Decision::Fail
            }
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    // Zones of ILAC-G8:09/2019 4.2.2–4.2.3 (from memory), tolerance ±1.0, U = 0.2.

    #[test]
    fn inside_by_less_than_u_is_a_conditional_pass_under_the_guard_band() {
        assert_eq!(
            decide(0.79, 1.0, 0.2, DecisionRule::GuardBand),
            Decision::Pass
        );
        assert_eq!(
            decide(0.81, 1.0, 0.2, DecisionRule::GuardBand),
            Decision::ConditionalPass
        );
        assert_eq!(
            decide(-0.95, 1.0, 0.2, DecisionRule::GuardBand),
            Decision::ConditionalPass
        );
        assert!(!Decision::ConditionalPass.met());
        // The same value passes under simple acceptance.
        assert_eq!(decide(0.95, 1.0, 0.2, DecisionRule::Simple), Decision::Pass);
    }

    #[test]
    fn outside_by_less_than_u_is_a_conditional_fail_and_beyond_is_a_fail() {
        assert_eq!(
            decide(1.1, 1.0, 0.2, DecisionRule::GuardBand),
            Decision::ConditionalFail
        );
        assert_eq!(
            decide(1.21, 1.0, 0.2, DecisionRule::GuardBand),
            Decision::Fail
        );
        assert_eq!(decide(1.1, 1.0, 0.2, DecisionRule::Simple), Decision::Fail);
    }

    #[test]
    fn the_edges_belong_to_the_inner_zone() {
        assert_eq!(
            decide(0.75, 1.0, 0.25, DecisionRule::GuardBand),
            Decision::Pass
        );
        assert_eq!(
            decide(1.0, 1.0, 0.25, DecisionRule::GuardBand),
            Decision::ConditionalPass
        );
        assert_eq!(decide(1.0, 1.0, 0.25, DecisionRule::Simple), Decision::Pass);
        assert_eq!(acceptance_limit(1.0, 0.25, DecisionRule::GuardBand), 0.75);
    }

    #[test]
    fn an_uncertainty_wider_than_the_tolerance_lets_nothing_pass() {
        assert_eq!(
            decide(0.0, 0.1, 0.2, DecisionRule::GuardBand),
            Decision::ConditionalPass
        );
        assert_eq!(
            decide(f64::NAN, 1.0, 0.0, DecisionRule::Simple),
            Decision::Fail
        );
    }
}
