//! Tolerances as calibration procedures phrase them (SPEC §14): an absolute limit, a
//! percentage of the reading, a percentage of full scale, combined by sum or by maximum —
//! "±(0.05 % of reading + 0.02 % of full scale)".

use serde::{Deserialize, Serialize};

use crate::acceptance::fmt_num;

/// Which variable a tolerance (or a deviation) is expressed in.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "kebab-case")]
pub enum Axis {
    /// The response (left-hand side of the equation): `tolerance`.
    Response,
    /// The predictor, read through the inverse of the curve: `tolerance_x`.
    Predictor,
}

/// How the terms of a tolerance are combined.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "kebab-case")]
pub enum Combine {
    /// rel·|reading| + fs·full_scale + abs.
    Sum,
    /// max(rel·|reading|, fs·full_scale, abs).
    Max,
}

/// A symmetric tolerance ±limit(reading). The "reading" is the indicated value being judged
/// (the curve's value, or the value read through the inverse of the curve).
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct Tolerance {
    /// Fraction of the reading (0.0005 = 0.05 %).
    pub rel: f64,
    /// Fraction of full scale.
    pub fs: f64,
    /// Full scale, in the tolerance's unit.
    pub full_scale: f64,
    /// An absolute term, in the tolerance's unit.
    pub abs: f64,
    pub combine: Combine,
}

impl Tolerance {
    /// A plain ±`limit`.
    pub fn absolute(limit: f64) -> Tolerance {
        Tolerance {
            rel: 0.0,
            fs: 0.0,
            full_scale: 0.0,
            abs: limit,
            combine: Combine::Sum,
        }
    }

    /// Whether only the absolute term is set.
    pub fn is_absolute(&self) -> bool {
        self.rel == 0.0 && self.fs == 0.0
    }

    /// The half-width of the tolerance at `reading`.
    pub fn limit(&self, reading: f64) -> f64 {
        let terms = [
            self.rel * reading.abs(),
            self.fs * self.full_scale,
            self.abs,
        ];
        match self.combine {
            Combine::Sum => terms.iter().sum(),
            Combine::Max => terms.iter().copied().fold(0.0, f64::max),
        }
    }

    /// The tolerance as a procedure writes it: "±60 Ω", "±(0.05 % of reading + 0.02 % of
    /// 100 °C)", "±max(0.05 % of reading, 0.1 °C)".
    pub fn describe(&self, unit: &str) -> String {
        let with_unit = |v: f64| {
            if unit.is_empty() {
                fmt_num(v)
            } else {
                format!("{} {unit}", fmt_num(v))
            }
        };
        if self.is_absolute() {
            return format!("±{}", with_unit(self.abs));
        }
        let mut terms = Vec::new();
        if self.rel != 0.0 {
            terms.push(format!("{} % of reading", fmt_num(self.rel * 100.0)));
        }
        if self.fs != 0.0 {
            terms.push(format!(
                "{} % of full scale {}",
                fmt_num(self.fs * 100.0),
                with_unit(self.full_scale)
            ));
        }
        if self.abs != 0.0 {
            terms.push(with_unit(self.abs));
        }
        match self.combine {
            Combine::Sum if terms.len() == 1 => format!("±{}", terms.join("")),
            Combine::Sum => format!("±({})", terms.join(" + ")),
            Combine::Max => format!("±max({})", terms.join(", ")),
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn reading_plus_full_scale_sums_or_takes_the_larger() {
        // "±(0.05 % of reading + 0.02 % of full scale)", full scale 100: at a reading of 40
        // the limit is 0.02 + 0.02 = 0.04 (arithmetic of the procedure text).
        let mut t = Tolerance {
            rel: 0.0005,
            fs: 0.0002,
            full_scale: 100.0,
            abs: 0.0,
            combine: Combine::Sum,
        };
        assert!((t.limit(40.0) - 0.04).abs() < 1e-15);
        assert!(
            (t.limit(-40.0) - 0.04).abs() < 1e-15,
            "symmetric in the reading"
        );
        assert_eq!(
            t.describe("bar"),
            "±(0.05 % of reading + 0.02 % of full scale 100 bar)"
        );
        t.combine = Combine::Max;
        assert!((t.limit(80.0) - 0.04).abs() < 1e-15);
        assert!((t.limit(10.0) - 0.02).abs() < 1e-15);
        assert!(t.describe("bar").starts_with("±max("));
        assert_eq!(Tolerance::absolute(60.0).describe("Ω"), "±60 Ω");
    }
}
