//! A fast path for plain decimal numbers in text cells: `[+-]digits[.digits][(e|E)[+-]digits]`
//! with at most 19 digits and a small power of ten. Anything else (more digits,
//! large exponents, thousands separators, `nan`, `inf`, stray characters) gets `None`, and the
//! caller falls back to [`super::number::parse_number`], which is exact for every input.
//!
//! Method (Clinger's fast path, W. D. Clinger, "How to read floating point numbers
//! accurately", PLDI 1990): with the digits read as an integer `m ≤ 2^53` and the value
//! `m · 10^e` for `|e| ≤ 22`, both `m` and `10^|e|` are exact `f64`s, so one IEEE multiply
//! (`e ≥ 0`) or divide (`e < 0`) gives the correctly rounded result, the same bits as
//! `str::parse::<f64>`, which is correctly rounded too.

/// The powers of ten that are exact `f64`s: 10^k = 2^k · 5^k is exact while 5^k < 2^53, that
/// is for k ≤ 22.
const POW10: [f64; 23] = [
    1e0, 1e1, 1e2, 1e3, 1e4, 1e5, 1e6, 1e7, 1e8, 1e9, 1e10, 1e11, 1e12, 1e13, 1e14, 1e15, 1e16,
    1e17, 1e18, 1e19, 1e20, 1e21, 1e22,
];

/// Every integer up to 2^53 is an exact `f64`.
const MAX_EXACT: u64 = 1 << 53;

/// At most this many digits (leading zeros included) are read into a `u64`: 10^19 < 2^64.
const MAX_DIGITS: usize = 19;

/// The value of a cell holding a plain decimal number with decimal mark `mark` (`b'.'` or
/// `b','`), surrounding blanks allowed; `None` when the cell is anything else or needs the
/// exact parser.
pub fn parse_plain(cell: &[u8], mark: u8) -> Option<f64> {
    match scan_plain(cell, mark) {
        (value, n) if n == cell.len() => value,
        _ => None,
    }
}

/// Blanks around a number: the ASCII characters that `str::trim` removes, except the line end
/// (so that a scan stops there).
fn is_blank(b: u8) -> bool {
    matches!(b, b' ' | b'\t' | b'\r' | b'\x0b' | b'\x0c')
}

/// An optional `+` or `-` at `s[*i]`, stepped over; true for `-`.
fn read_sign(s: &[u8], i: &mut usize) -> bool {
    match s.get(*i) {
        Some(b'-') => {
            *i += 1;
            true
        }
        Some(b'+') => {
            *i += 1;
            false
        }
        _ => false,
    }
}

/// Scan a plain number with its surrounding blanks from the start of `s`, up to the first
/// byte that cannot continue it: the number of bytes read, and the value when those bytes
/// are a complete plain number in range of the fast path. The caller decides whether the
/// byte after them ends the cell.
pub fn scan_plain(s: &[u8], mark: u8) -> (Option<f64>, usize) {
    let mut i = skip_blanks(s, 0);
    let negative = read_sign(s, &mut i);
    let mut mantissa = 0u64;
    let int_digits = read_digits(s.get(i..).unwrap_or(&[]), &mut mantissa);
    i += int_digits;
    let mut frac_digits = 0;
    if s.get(i) == Some(&mark) {
        i += 1;
        frac_digits = read_digits(s.get(i..).unwrap_or(&[]), &mut mantissa);
        i += frac_digits;
    }
    let digits = int_digits + frac_digits;
    let mut ok = digits > 0 && digits <= MAX_DIGITS;
    let mut exponent: i64 = 0;
    if matches!(s.get(i), Some(b'e' | b'E')) {
        i += 1;
        let exp_negative = read_sign(s, &mut i);
        let mut e = 0u64;
        let n = read_digits(s.get(i..).unwrap_or(&[]), &mut e);
        i += n;
        // More than four exponent digits: outside the fast path (and `e` may have wrapped).
        if n == 0 || n > 4 {
            ok = false;
        }
        exponent = i64::try_from(e).unwrap_or(i64::MAX);
        if exp_negative {
            exponent = -exponent;
        }
    }
    let i = skip_blanks(s, i);
    if !ok {
        return (None, i);
    }
    (value(negative, mantissa, exponent, frac_digits), i)
}

/// `±mantissa · 10^(exponent − frac_digits)` when Clinger's fast path gives it exactly.
fn value(negative: bool, mantissa: u64, exponent: i64, frac_digits: usize) -> Option<f64> {
    let magnitude = if mantissa == 0 {
        0.0
    } else {
        let e = exponent.checked_sub(i64::try_from(frac_digits).ok()?)?;
        if mantissa > MAX_EXACT || !(-22..=22).contains(&e) {
            return None;
        }
        let m = mantissa as f64;
        let p = *POW10.get(usize::try_from(e.unsigned_abs()).ok()?)?;
        if e >= 0 { m * p } else { m / p }
    };
    Some(if negative { -magnitude } else { magnitude })
}

/// The index of the first byte at or after `i` that is not a blank.
fn skip_blanks(s: &[u8], mut i: usize) -> usize {
    while s.get(i).copied().is_some_and(is_blank) {
        i += 1;
    }
    i
}

/// Read the leading ASCII digits of `s` into `value` (`value · 10 + digit`, wrapping: the
/// caller refuses more than [`MAX_DIGITS`] digits); the number of digits.
fn read_digits(s: &[u8], value: &mut u64) -> usize {
    let mut n = 0;
    for &b in s {
        let d = b.wrapping_sub(b'0');
        if d > 9 {
            break;
        }
        *value = value.wrapping_mul(10).wrapping_add(u64::from(d));
        n += 1;
    }
    n
}

#[cfg(test)]
mod tests {
    use super::*;
    use proptest::prelude::*;

    /// The reference: `str::parse::<f64>` (correctly rounded), after the decimal comma is
    /// replaced as `parse_number` does.
    fn reference(s: &str, mark: u8) -> Option<f64> {
        let t = s.trim();
        if mark == b',' {
            if t.contains('.') {
                return None;
            }
            t.replace(',', ".").parse().ok()
        } else {
            t.parse().ok()
        }
    }

    /// Whenever the fast path gives a value, it has the bits of the reference.
    fn agrees(s: &str, mark: u8) -> bool {
        match parse_plain(s.as_bytes(), mark) {
            Some(v) => reference(s, mark).is_some_and(|r| r.to_bits() == v.to_bits()),
            None => true,
        }
    }

    #[test]
    fn plain_numbers_take_the_fast_path_with_exact_bits() {
        let cases = [
            "0",
            "-0",
            "+0",
            "0.0",
            "-0.0",
            "5",
            "+5",
            "-5",
            ".5",
            "5.",
            "-.5",
            "+5.",
            "007",
            "0.000123",
            "00012.50",
            "1e5",
            "1E5",
            "1e+5",
            "1e-5",
            "-2.5e-3",
            "123456789",
            "0.1",
            "0.2",
            "0.3",
            "3.141592653589793",
            "9007199254740992",
            "9007199254740993e-5",
            "4.874617",
            "0.000060",
            " 12.5 ",
            "\t7\r",
            "1e22",
            "1e-22",
            "123e-20",
            "0e999999999",
            "-0e-999999999",
            "1234567890123456789e-22",
        ];
        for s in cases {
            let fast = parse_plain(s.as_bytes(), b'.');
            let exact = reference(s, b'.');
            assert!(exact.is_some(), "{s} is a number");
            if let Some(v) = fast {
                assert_eq!(Some(v.to_bits()), exact.map(f64::to_bits), "{s}");
            }
        }
        // These must actually take the fast path, or the file loads slowly.
        for s in [
            "4.874617",
            "-0.000060",
            "1e5",
            ".5",
            "5.",
            "-0",
            "1234567890123456",
        ] {
            assert!(parse_plain(s.as_bytes(), b'.').is_some(), "{s}");
        }
        assert_eq!(
            parse_plain(b"-0", b'.').map(f64::to_bits),
            Some((-0.0f64).to_bits())
        );
    }

    #[test]
    fn hard_numbers_fall_back_to_the_exact_parser() {
        for s in [
            // 17+ significant digits, large exponents, subnormals, overflow.
            "12345678901234567890",
            "0.30000000000000000444",
            "9007199254740993",
            "1e23",
            "1e-23",
            "4.9406564584124654e-324",
            "2.2250738585072011e-308",
            "1.7976931348623157e308",
            "1e400",
            "123.456e-30",
        ] {
            assert_eq!(parse_plain(s.as_bytes(), b'.'), None, "{s}");
            assert!(agrees(s, b'.'));
        }
    }

    #[test]
    fn non_numbers_are_left_to_the_exact_parser() {
        for s in [
            "",
            " ",
            "+",
            "-",
            ".",
            "e5",
            "1e",
            "1e+",
            "1.2.3",
            "1,5",
            "nan",
            "NaN",
            "inf",
            "-infinity",
            "1 234",
            "1_000",
            "0x10",
            "--1",
            "+-1",
            "1e5.0",
            "١٢",
            "1\u{a0}",
            "1.5e3e2",
        ] {
            assert_eq!(parse_plain(s.as_bytes(), b'.'), None, "{s:?}");
        }
    }

    #[test]
    fn the_decimal_comma_replaces_the_point() {
        assert_eq!(parse_plain(b"12,5", b','), Some(12.5));
        assert_eq!(parse_plain(b"-1,5e3", b','), Some(-1500.0));
        assert_eq!(parse_plain(b"12.5", b','), None);
        assert_eq!(parse_plain(b"12,5", b'.'), None);
        assert!(agrees(",25", b','));
    }

    /// Decimal strings built from parts: sign, leading zeros, integer and fraction digits,
    /// exponent, surrounding blanks.
    fn decimal() -> impl Strategy<Value = String> {
        (
            prop_oneof![Just(""), Just("-"), Just("+")],
            "0{0,3}",
            "[0-9]{0,20}",
            proptest::option::of("[0-9]{0,20}"),
            proptest::option::of((
                "[eE]",
                prop_oneof![Just(""), Just("-"), Just("+")],
                0u32..400,
            )),
            prop_oneof![Just(""), Just(" "), Just("\t")],
        )
            .prop_map(|(sign, zeros, int, frac, exp, pad)| {
                let mut s = format!("{pad}{sign}{zeros}{int}");
                if let Some(f) = frac {
                    s.push('.');
                    s.push_str(&f);
                }
                if let Some((e, es, n)) = exp {
                    s.push_str(&format!("{e}{es}{n}"));
                }
                s.push_str(pad);
                s
            })
    }

    // A fixed seed: the same cases every run, so a failure is a change in the code.
    proptest! {
        #![proptest_config(ProptestConfig { cases: 20_000, rng_seed: proptest::test_runner::RngSeed::Fixed(20_261_210), ..ProptestConfig::default() })]

        #[test]
        fn fast_path_matches_std_parse_bit_for_bit(s in decimal()) {
            let fast = parse_plain(s.as_bytes(), b'.');
            let exact = reference(&s, b'.');
            if let Some(v) = fast {
                prop_assert_eq!(Some(v.to_bits()), exact.map(f64::to_bits), "{:?}", s);
            }
            // The fast path refuses a valid number only when it is outside its range.
            if fast.is_none() && exact.is_some_and(f64::is_finite) && s.trim().len() <= 12 && !s.contains(['e', 'E']) {
                prop_assert!(false, "{:?} should take the fast path", s);
            }
        }

        #[test]
        fn random_doubles_printed_in_full_read_back_exactly(bits in any::<u64>()) {
            let v = f64::from_bits(bits);
            prop_assume!(v.is_finite());
            for s in [format!("{v}"), format!("{v:e}"), format!("{v:.6}"), format!("{v:.3e}")] {
                let fast = parse_plain(s.as_bytes(), b'.');
                if let Some(f) = fast {
                    prop_assert_eq!(Some(f.to_bits()), s.parse::<f64>().ok().map(f64::to_bits), "{}", s);
                }
            }
        }
    }
}
