//! Calendar dates of metrology records (`due`, `measured_on`): TOML local dates, compared
//! and printed as ISO 8601 `YYYY-MM-DD`.

use std::fmt;

use serde::{Deserialize, Serialize};

/// A proleptic Gregorian calendar date.
#[derive(Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord, Hash)]
pub struct Date {
    pub year: i32,
    pub month: u32,
    pub day: u32,
}

impl Date {
    /// A date, checked: month 1–12 and a day that exists in that month.
    pub fn new(year: i32, month: u32, day: u32) -> Option<Date> {
        ((1..=12).contains(&month) && day >= 1 && day <= days_in_month(year, month))
            .then_some(Date { year, month, day })
    }

    /// The date of a TOML value when it is a local date (no time, no offset).
    pub fn from_toml(d: &toml::value::Datetime) -> Option<Date> {
        match (&d.date, &d.time, &d.offset) {
            (Some(date), None, None) => Date::new(
                i32::from(date.year),
                u32::from(date.month),
                u32::from(date.day),
            ),
            _ => None,
        }
    }

    /// Parse `YYYY-MM-DD` (also the date part of `YYYY-MM-DDTHH:MM:SSZ`).
    pub fn parse(text: &str) -> Option<Date> {
        let date = text.get(..10)?;
        let mut parts = date.split('-');
        let year = parts.next()?.parse().ok()?;
        let month = parts.next()?.parse().ok()?;
        let day = parts.next()?.parse().ok()?;
        if parts.next().is_some() || text.len() > 10 && !text[10..].starts_with('T') {
            return None;
        }
        Date::new(year, month, day)
    }
}

fn days_in_month(year: i32, month: u32) -> u32 {
    match month {
        1 | 3 | 5 | 7 | 8 | 10 | 12 => 31,
        4 | 6 | 9 | 11 => 30,
        // Gregorian leap years: divisible by 4, except centuries not divisible by 400.
        2 if (year % 4 == 0 && year % 100 != 0) || year % 400 == 0 => 29,
        2 => 28,
        _ => 0,
    }
}

impl fmt::Display for Date {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(f, "{:04}-{:02}-{:02}", self.year, self.month, self.day)
    }
}

impl Serialize for Date {
    fn serialize<S: serde::Serializer>(&self, s: S) -> Result<S::Ok, S::Error> {
        s.collect_str(self)
    }
}

impl<'de> Deserialize<'de> for Date {
    fn deserialize<D: serde::Deserializer<'de>>(d: D) -> Result<Date, D::Error> {
        let text = String::deserialize(d)?;
        Date::parse(&text)
            .ok_or_else(|| serde::de::Error::custom(format!("`{text}` is not a YYYY-MM-DD date")))
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn dates_order_by_calendar_and_print_iso() {
        let a = Date::new(2026, 11, 28).expect("valid");
        let b = Date::new(2027, 3, 1).expect("valid");
        assert!(a < b);
        assert_eq!(b.to_string(), "2027-03-01");
        assert_eq!(Date::parse("2026-11-28T10:00:00Z"), Some(a));
        assert_eq!(Date::parse("2026-11-28"), Some(a));
    }

    #[test]
    fn impossible_days_are_rejected() {
        assert!(Date::new(2026, 2, 29).is_none());
        assert!(Date::new(2028, 2, 29).is_some());
        assert!(Date::new(1900, 2, 29).is_none(), "1900 is not a leap year");
        assert!(Date::new(2000, 2, 29).is_some(), "2000 is");
        assert!(Date::new(2026, 4, 31).is_none());
        assert!(Date::new(2026, 13, 1).is_none());
        assert!(Date::parse("2026-1-5x").is_none());
    }
}
