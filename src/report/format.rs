//! Number formatting for report text cells, so every number in a report
//! follows one style.
//!
//! The style:
//! - a number is written plainly when `1e-4 <= |x| < 1e6`, otherwise in
//!   scientific notation `1.2346e-7` (an ASCII `e`, no `+`, no padding of the
//!   exponent) — both forms paste into spreadsheets and programs unchanged;
//! - trailing zeros are kept: they carry the stated significance
//!   (`sig(0.1, 3)` is `0.100`);
//! - the minus sign is ASCII `-`; zero is always `0` (never `-0`);
//! - non-finite values are written `NaN`, `inf`, `-inf` (never hidden);
//! - uncertainties are given to 2 significant digits and their value to the
//!   same decimal place (GUM, JCGM 100:2008, 7.2.6 — from memory);
//! - coefficients meant for loading into instruments use [`full`], the
//!   shortest text that reads back to the same `f64`.
//!
//! Rounding is that of Rust's `{:e}` formatting: the exact binary value is
//! rounded to the nearest decimal, ties to even.

/// Significant digits used by [`num`] for ordinary cells (values, statistics).
pub const DEFAULT_SIG: usize = 5;

/// Significant digits of an uncertainty (GUM 7.2.6 advises "at most two";
/// common practice is two).
pub const UNCERTAINTY_SIG: usize = 2;

/// Smallest magnitude written without an exponent.
const PLAIN_MIN_EXP: i32 = -4;
/// Largest decimal exponent written without an exponent (`999999.9…`).
const PLAIN_MAX_EXP: i32 = 5;

fn non_finite(x: f64) -> Option<String> {
    if x.is_nan() {
        Some("NaN".to_string())
    } else if x == f64::INFINITY {
        Some("inf".to_string())
    } else if x == f64::NEG_INFINITY {
        Some("-inf".to_string())
    } else {
        None
    }
}

/// Splits Rust's `{:.Ne}` output (`-1.2346e3`) into sign, digit string
/// (`12346`) and decimal exponent (`3`).
fn decompose(x: f64, digits: usize) -> (bool, String, i32) {
    let text = format!("{:.*e}", digits.saturating_sub(1), x);
    let (mantissa, exp) = text.split_once('e').unwrap_or((text.as_str(), "0"));
    let negative = mantissa.starts_with('-');
    let digit_string: String = mantissa.chars().filter(|c| c.is_ascii_digit()).collect();
    let exp = exp.parse::<i32>().unwrap_or(0);
    (negative, digit_string, exp)
}

/// Places the decimal point into a digit string `d₁d₂…` meaning
/// `d₁.d₂… × 10^exp`.
fn plain_from_digits(digits: &str, exp: i32) -> String {
    let n = digits.len() as i32;
    if exp < 0 {
        let zeros = "0".repeat((-exp - 1) as usize);
        format!("0.{zeros}{digits}")
    } else if exp + 1 >= n {
        let zeros = "0".repeat((exp + 1 - n) as usize);
        format!("{digits}{zeros}")
    } else {
        let (int, frac) = digits.split_at((exp + 1) as usize);
        format!("{int}.{frac}")
    }
}

fn scientific_from_digits(digits: &str, exp: i32) -> String {
    let (first, rest) = digits.split_at(1.min(digits.len()));
    if rest.is_empty() {
        format!("{first}e{exp}")
    } else {
        format!("{first}.{rest}e{exp}")
    }
}

/// `x` to `digits` significant digits (clamped to 1–17) in the module style.
///
/// `sig(1234.5678, 3) == "1230"`, `sig(0.000123456, 3) == "0.000123"`,
/// `sig(1.5e-7, 2) == "1.5e-7"`, `sig(2.0, 3) == "2.00"`.
pub fn sig(x: f64, digits: usize) -> String {
    if let Some(text) = non_finite(x) {
        return text;
    }
    if x == 0.0 {
        return "0".to_string();
    }
    let digits = digits.clamp(1, 17);
    let (negative, digit_string, exp) = decompose(x, digits);
    let body = if (PLAIN_MIN_EXP..=PLAIN_MAX_EXP).contains(&exp) {
        plain_from_digits(&digit_string, exp)
    } else {
        scientific_from_digits(&digit_string, exp)
    };
    if negative { format!("-{body}") } else { body }
}

/// `x` to [`DEFAULT_SIG`] significant digits: the default for text cells.
pub fn num(x: f64) -> String {
    sig(x, DEFAULT_SIG)
}

/// `x` with exactly `decimals` digits after the point, never `-0.00`.
pub fn fixed(x: f64, decimals: usize) -> String {
    if let Some(text) = non_finite(x) {
        return text;
    }
    let text = format!("{:.*}", decimals.min(30), x);
    if text.starts_with('-') && text.chars().all(|c| matches!(c, '-' | '0' | '.')) {
        text[1..].to_string()
    } else {
        text
    }
}

/// The shortest text that parses back to exactly `x` ("do not round" tables).
///
/// Plain decimal for `1e-4 <= |x| < 1e15`, otherwise Rust's shortest
/// scientific form (`1e-7`, `6.02214076e23`).
pub fn full(x: f64) -> String {
    if let Some(text) = non_finite(x) {
        return text;
    }
    if x == 0.0 {
        return "0".to_string();
    }
    let magnitude = x.abs();
    if (1e-4..1e15).contains(&magnitude) {
        format!("{x}")
    } else {
        format!("{x:e}")
    }
}

/// An uncertainty (standard error, standard uncertainty) to
/// [`UNCERTAINTY_SIG`] significant digits.
pub fn uncertainty(u: f64) -> String {
    sig(u, UNCERTAINTY_SIG)
}

/// Decimal exponent of the last digit kept when `u` is written to
/// [`UNCERTAINTY_SIG`] significant digits (`0.0123 → 0.012`: `-3`).
fn uncertainty_last_place(u: f64) -> i32 {
    let (_, _, exp) = decompose(u, UNCERTAINTY_SIG);
    exp - (UNCERTAINTY_SIG as i32 - 1)
}

/// A value and its uncertainty, the uncertainty to 2 significant digits and
/// the value rounded to the same decimal place (GUM 7.2.6, from memory).
///
/// `value_with_uncertainty(100.02147, 0.00035) == ("100.02147", "0.00035")`,
/// `value_with_uncertainty(10234.5, 123.0) == ("10230", "120")`.
/// When `u` is zero, negative or not finite the value falls back to [`num`]
/// and the uncertainty is written as given.
pub fn value_with_uncertainty(value: f64, u: f64) -> (String, String) {
    if !value.is_finite() || !u.is_finite() || u <= 0.0 {
        return (num(value), sig(u, UNCERTAINTY_SIG));
    }
    let place = uncertainty_last_place(u);
    let u_text = uncertainty(u);
    let (_, _, u_exp) = decompose(u, UNCERTAINTY_SIG);
    let plain = (PLAIN_MIN_EXP..=PLAIN_MAX_EXP).contains(&u_exp) && value.abs() < 1e9;
    let value_text = if plain {
        if place <= 0 {
            fixed(value, (-place) as usize)
        } else {
            let step = 10f64.powi(place);
            let q = (value / step).round();
            if q == 0.0 {
                "0".to_string()
            } else {
                format!("{}{}", fixed(q, 0), "0".repeat(place as usize))
            }
        }
    } else if value == 0.0 {
        "0".to_string()
    } else {
        let (_, _, v_exp) = decompose(value, DEFAULT_SIG);
        if v_exp < place {
            "0".to_string()
        } else {
            sig(value, (v_exp - place + 1) as usize)
        }
    };
    (value_text, u_text)
}

/// `value ± u` in the style of [`value_with_uncertainty`].
pub fn plus_minus(value: f64, u: f64) -> String {
    let (v, u) = value_with_uncertainty(value, u);
    format!("{v} ± {u}")
}

/// A fraction shown as a percentage with `digits` significant digits and a
/// space before the sign (SI Brochure, 9th ed., 5.4.7 — from memory):
/// `percent(0.001234, 2) == "0.12 %"`.
pub fn percent(fraction: f64, digits: usize) -> String {
    format!("{} %", sig(fraction * 100.0, digits))
}

/// A p-value: `< 0.0001` below 1e-4, otherwise 3 significant digits
/// (common practice, no source).
pub fn p_value(p: f64) -> String {
    if p.is_finite() && (0.0..1e-4).contains(&p) {
        "< 0.0001".to_string()
    } else {
        sig(p, 3)
    }
}

/// An interval `[low, high]` with both ends to `digits` significant digits.
pub fn interval(low: f64, high: f64, digits: usize) -> String {
    format!("[{}, {}]", sig(low, digits), sig(high, digits))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn sig_keeps_trailing_zeros_that_carry_significance() {
        assert_eq!(sig(0.1, 3), "0.100");
        assert_eq!(sig(2.0, 3), "2.00");
        assert_eq!(sig(1234.5678, 3), "1230");
        assert_eq!(sig(1234.5678, 6), "1234.57");
    }

    #[test]
    fn sig_switches_to_scientific_outside_plain_range() {
        assert_eq!(sig(0.000123456, 3), "0.000123");
        assert_eq!(sig(0.0000123456, 3), "1.23e-5");
        assert_eq!(sig(999_999.0, 6), "999999");
        assert_eq!(sig(1_234_567.0, 3), "1.23e6");
        assert_eq!(sig(-1.5e-7, 2), "-1.5e-7");
        assert_eq!(sig(3e20, 1), "3e20");
    }

    #[test]
    fn sig_carries_rounding_into_the_exponent() {
        assert_eq!(sig(9.996, 3), "10.0");
        assert_eq!(sig(999_999.7, 6), "1.00000e6");
    }

    #[test]
    fn zero_and_non_finite_are_explicit() {
        assert_eq!(sig(0.0, 4), "0");
        assert_eq!(sig(-0.0, 4), "0");
        assert_eq!(sig(f64::NAN, 4), "NaN");
        assert_eq!(sig(f64::INFINITY, 4), "inf");
        assert_eq!(sig(f64::NEG_INFINITY, 4), "-inf");
        assert_eq!(fixed(-0.0001, 2), "0.00");
        assert_eq!(fixed(-0.01, 2), "-0.01");
    }

    #[test]
    fn full_round_trips_exactly() {
        for x in [
            0.1,
            1.0 / 3.0,
            6.02214076e23,
            1e-7,
            -273.15,
            3987.123456789012,
        ] {
            let text = full(x);
            assert_eq!(text.parse::<f64>().ok(), Some(x), "{text}");
        }
        assert_eq!(full(1e-7), "1e-7");
        assert_eq!(full(-273.15), "-273.15");
    }

    #[test]
    fn value_rounded_to_the_place_of_its_two_digit_uncertainty() {
        // GUM 7.2.2 example (from memory): m_S = 100.021 47 g, u_c = 0.35 mg.
        assert_eq!(
            value_with_uncertainty(100.021_47, 0.000_35),
            ("100.02147".to_string(), "0.00035".to_string())
        );
        assert_eq!(
            value_with_uncertainty(9.876_54, 0.012_345),
            ("9.877".to_string(), "0.012".to_string())
        );
        // The uncertainty rounds up to a new decade: 0.0996 → 0.10, two decimals.
        assert_eq!(
            value_with_uncertainty(4.51739, 0.0996),
            ("4.52".to_string(), "0.10".to_string())
        );
        assert_eq!(
            value_with_uncertainty(10_234.5, 123.0),
            ("10230".to_string(), "120".to_string())
        );
        assert_eq!(
            value_with_uncertainty(1.234_56e-7, 3.4e-9),
            ("1.235e-7".to_string(), "3.4e-9".to_string())
        );
        assert_eq!(plus_minus(3987.26, 11.42), "3987 ± 11");
    }

    #[test]
    fn value_with_unusable_uncertainty_falls_back_to_default_digits() {
        assert_eq!(
            value_with_uncertainty(3987.123, 0.0),
            ("3987.1".to_string(), "0".to_string())
        );
        assert_eq!(
            value_with_uncertainty(3987.123, f64::NAN),
            ("3987.1".to_string(), "NaN".to_string())
        );
    }

    #[test]
    fn percent_and_p_values() {
        assert_eq!(percent(0.001234, 2), "0.12 %");
        assert_eq!(p_value(0.000_01), "< 0.0001");
        assert_eq!(p_value(0.052_31), "0.0523");
        assert_eq!(p_value(f64::NAN), "NaN");
        assert_eq!(interval(9.5, 10.26, 3), "[9.50, 10.3]");
    }
}
