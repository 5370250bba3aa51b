//! Numbers written as text: the decimal mark, thousands separators and the cells that are not
//! numbers (SPEC §13, §15). Pure functions, shared by text files and text cells of workbooks.

use std::borrow::Cow;

/// How numbers are written in a file.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub struct NumberFormat {
    /// `decimal = ","`: the decimal mark is a comma and a "." is an error unless it is the
    /// thousands separator.
    pub decimal_comma: bool,
    /// `thousands = "." | "," | " " | "'"`.
    pub thousands: Option<char>,
}

/// What a text cell holds.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Parsed {
    Value(f64),
    /// Empty, NaN or infinite: an error by default, a skipped row with `missing = "skip"`.
    Missing(&'static str),
    /// Not a number under the file's format.
    Bad,
}

impl NumberFormat {
    fn decimal_mark(self) -> char {
        if self.decimal_comma { ',' } else { '.' }
    }

    /// The characters accepted as the thousands separator: a space also matches the
    /// no-break spaces U+00A0 and U+202F that some locales write.
    fn is_separator(self, c: char) -> bool {
        match self.thousands {
            Some(' ') => matches!(c, ' ' | '\u{a0}' | '\u{202f}'),
            Some(t) => c == t,
            None => false,
        }
    }
}

/// Parse one cell. With a thousands separator, separators may only group the digits before
/// the decimal mark: a first group of one to three digits, then groups of exactly three
/// (`1.234.567,5`). So `1.5` with `thousands = "."` is an error, not fifteen.
pub fn parse_number(raw: &str, f: NumberFormat) -> Parsed {
    let t = raw.trim();
    if t.is_empty() {
        return Parsed::Missing("empty cell");
    }
    let Some(ungrouped) = remove_grouping(t, f) else {
        return Parsed::Bad;
    };
    let plain = if f.decimal_comma {
        if ungrouped.contains('.') {
            return Parsed::Bad;
        }
        Cow::Owned(ungrouped.replace(',', "."))
    } else {
        if ungrouped.contains(',') {
            return Parsed::Bad;
        }
        ungrouped
    };
    match plain.parse::<f64>() {
        Ok(v) if v.is_nan() => Parsed::Missing("NaN"),
        Ok(v) if v.is_infinite() => Parsed::Missing("infinite value"),
        Ok(v) => Parsed::Value(v),
        Err(_) => Parsed::Bad,
    }
}

/// The number without its thousands separators, or `None` when they are misplaced. Borrowed
/// when there are none (the common case: no allocation per cell).
fn remove_grouping(t: &str, f: NumberFormat) -> Option<Cow<'_, str>> {
    if f.thousands.is_none() || !t.chars().any(|c| f.is_separator(c)) {
        return Some(Cow::Borrowed(t));
    }
    let (sign, rest) = match t.strip_prefix(['+', '-']) {
        Some(r) => (&t[..1], r),
        None => ("", t),
    };
    let int_len = rest
        .char_indices()
        .find(|&(_, c)| !(c.is_ascii_digit() || f.is_separator(c)))
        .map_or(rest.len(), |(i, _)| i);
    let (int_part, tail) = rest.split_at(int_len);
    if tail.chars().any(|c| f.is_separator(c)) {
        return None;
    }
    // After the integer digits only the decimal mark or an exponent may follow.
    if let Some(c) = tail.chars().next()
        && c != f.decimal_mark()
        && !matches!(c, 'e' | 'E')
    {
        return None;
    }
    let groups: Vec<&str> = int_part.split(|c| f.is_separator(c)).collect();
    let first_ok = groups.first().is_some_and(|g| (1..=3).contains(&g.len()));
    if !first_ok || groups.iter().skip(1).any(|g| g.len() != 3) {
        return None;
    }
    Some(Cow::Owned(format!("{sign}{}{tail}", groups.concat())))
}

/// A hint for a cell that [`parse_number`] called [`Parsed::Bad`], when the cause is likely a
/// number format setting.
pub fn bad_number_help(raw: &str, f: NumberFormat) -> Option<String> {
    let t = raw.trim();
    let has_sep = t.chars().any(|c| f.is_separator(c));
    if has_sep {
        let sep = f.thousands.unwrap_or(' ');
        return Some(format!(
            "with `thousands = \"{sep}\"` the separator may only group the digits before the decimal mark in threes (1{sep}234{sep}567); check the file's number format"
        ));
    }
    if f.decimal_comma && t.contains('.') {
        return Some(
            "with `decimal = \",\"` a \".\" is not allowed in a number unless `thousands = \".\"` is set; check the file's number format"
                .to_string(),
        );
    }
    if !f.decimal_comma
        && t.contains(',')
        && parse_number(
            t,
            NumberFormat {
                decimal_comma: true,
                thousands: None,
            },
        ) != Parsed::Bad
    {
        return Some(
            "the file seems to use a decimal comma: set `decimal = \",\"` in [data] (the delimiter is then \";\" unless set)"
                .to_string(),
        );
    }
    None
}

/// A label for a number (group and channel names): the shortest text that reads back as the
/// same `f64`, so `20`, `20.0` and `2e1` name one group.
pub fn number_label(v: f64) -> String {
    if v == 0.0 {
        // -0 and 0 are one group.
        return "0".to_string();
    }
    format!("{v}")
}

#[cfg(test)]
mod tests {
    use super::*;

    const POINT: NumberFormat = NumberFormat {
        decimal_comma: false,
        thousands: None,
    };
    const COMMA: NumberFormat = NumberFormat {
        decimal_comma: true,
        thousands: None,
    };

    fn with(decimal_comma: bool, thousands: char) -> NumberFormat {
        NumberFormat {
            decimal_comma,
            thousands: Some(thousands),
        }
    }

    #[test]
    fn decimal_point_and_comma() {
        assert_eq!(parse_number(" 12.5 ", POINT), Parsed::Value(12.5));
        assert_eq!(parse_number("12,5", COMMA), Parsed::Value(12.5));
        assert_eq!(parse_number("-1,5e3", COMMA), Parsed::Value(-1500.0));
        assert_eq!(parse_number("12,5", POINT), Parsed::Bad);
    }

    #[test]
    fn point_in_a_decimal_comma_number_is_refused_without_thousands() {
        assert_eq!(parse_number("12.5", COMMA), Parsed::Bad);
        assert_eq!(parse_number("1.234,5", COMMA), Parsed::Bad);
        assert!(bad_number_help("12.5", COMMA).is_some_and(|h| h.contains("thousands")));
    }

    #[test]
    fn thousands_separators_group_the_integer_digits_in_threes() {
        assert_eq!(
            parse_number("1.234,5", with(true, '.')),
            Parsed::Value(1234.5)
        );
        assert_eq!(
            parse_number("-12.345.678", with(true, '.')),
            Parsed::Value(-12_345_678.0)
        );
        assert_eq!(
            parse_number("1,234.5", with(false, ',')),
            Parsed::Value(1234.5)
        );
        assert_eq!(
            parse_number("1 234,5", with(true, ' ')),
            Parsed::Value(1234.5)
        );
        assert_eq!(
            parse_number("1\u{a0}234", with(true, ' ')),
            Parsed::Value(1234.0)
        );
        assert_eq!(
            parse_number("1'234.25", with(false, '\'')),
            Parsed::Value(1234.25)
        );
        // No separator at all is fine.
        assert_eq!(
            parse_number("1234,5", with(true, '.')),
            Parsed::Value(1234.5)
        );
    }

    #[test]
    fn misplaced_thousands_separators_are_refused() {
        // "1.5" with thousands "." is a decimal point written by mistake, not fifteen.
        assert_eq!(parse_number("1.5", with(true, '.')), Parsed::Bad);
        assert_eq!(parse_number("1234.567", with(true, '.')), Parsed::Bad);
        assert_eq!(parse_number(".123", with(true, '.')), Parsed::Bad);
        assert_eq!(parse_number("1.234,5.6", with(true, '.')), Parsed::Bad);
        assert_eq!(parse_number("1,23", with(false, ',')), Parsed::Bad);
        assert!(bad_number_help("1.5", with(true, '.')).is_some_and(|h| h.contains("threes")));
    }

    #[test]
    fn missing_values_are_told_apart_from_bad_ones() {
        assert_eq!(parse_number("  ", POINT), Parsed::Missing("empty cell"));
        assert_eq!(parse_number("NaN", POINT), Parsed::Missing("NaN"));
        assert_eq!(
            parse_number("-inf", COMMA),
            Parsed::Missing("infinite value")
        );
        assert_eq!(parse_number("OVL", POINT), Parsed::Bad);
    }

    #[test]
    fn decimal_comma_hint_for_a_point_file() {
        assert!(bad_number_help("12,5", POINT).is_some_and(|h| h.contains("decimal")));
        assert_eq!(bad_number_help("abc", POINT), None);
    }

    #[test]
    fn equal_numbers_get_equal_labels() {
        assert_eq!(number_label(20.0), "20");
        assert_eq!(number_label(2e1), "20");
        assert_eq!(number_label(-0.0), "0");
        assert_eq!(number_label(0.1), "0.1");
    }
}
