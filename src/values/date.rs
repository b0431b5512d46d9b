//! Calendar dates as written in cells.
//!
//! A date is a real day of the proleptic Gregorian calendar written ISO 8601 `YYYY-MM-DD`, or
//! `D/M/YYYY` / `M/D/YYYY` with one- or two-digit parts. [`parse_date`] tells how a cell is
//! written (the profile counts the forms to judge a column's day/month order); [`Date::read`]
//! gives the day itself when the text names exactly one, which is what rules compare. An
//! ambiguous slash date such as `03/04/2024` is a date in form but names no single day, so a
//! rule declaring `type = "date"` refuses it with a request to write `yyyy-mm-dd`.

use std::fmt;

/// How a cell that looks like a date is written.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum DateForm {
    /// ISO 8601 calendar date `YYYY-MM-DD`, checked against the calendar.
    Iso,
    /// `NN/NN/YYYY`, read either way round.
    Slash {
        /// It is a real date when read as day/month/year.
        day_first: bool,
        /// It is a real date when read as month/day/year.
        month_first: bool,
    },
}

fn is_leap(year: u32) -> bool {
    (year.is_multiple_of(4) && !year.is_multiple_of(100)) || year.is_multiple_of(400)
}

fn days_in_month(year: u32, month: u32) -> u32 {
    match month {
        1 | 3 | 5 | 7 | 8 | 10 | 12 => 31,
        4 | 6 | 9 | 11 => 30,
        2 if is_leap(year) => 29,
        2 => 28,
        _ => 0,
    }
}

fn valid_date(year: u32, month: u32, day: u32) -> bool {
    day >= 1 && day <= days_in_month(year, month)
}

/// The three numbers of `N/N/YYYY` (one- or two-digit first parts, a four-digit year).
fn slash_parts(b: &[u8]) -> Option<(u32, u32, u32)> {
    let mut parts = b.split(|&c| c == b'/');
    let (p1, p2, p3) = (parts.next()?, parts.next()?, parts.next()?);
    if parts.next().is_some()
        || !(1..=2).contains(&p1.len())
        || !(1..=2).contains(&p2.len())
        || p3.len() != 4
    {
        return None;
    }
    Some((digits_value(p1)?, digits_value(p2)?, digits_value(p3)?))
}

fn digits_value(bytes: &[u8]) -> Option<u32> {
    if bytes.is_empty() || !bytes.iter().all(u8::is_ascii_digit) {
        return None;
    }
    Some(
        bytes
            .iter()
            .fold(0, |acc, b| acc * 10 + u32::from(b - b'0')),
    )
}

/// Reads a calendar date: ISO 8601 `YYYY-MM-DD`, or `D/M/YYYY` / `M/D/YYYY` with one or two
/// digit parts. Dates with dots or dashes in day-first order are not recognised: they are
/// rare in the extracts we see and easy to confuse with decimals and ranges.
///
/// ```
/// use emend::values::{parse_date, DateForm};
/// assert_eq!(parse_date("2024-02-29"), Some(DateForm::Iso));
/// assert_eq!(parse_date("2023-02-29"), None);
/// assert_eq!(parse_date("13/01/2024"), Some(DateForm::Slash { day_first: true, month_first: false }));
/// ```
pub fn parse_date(text: &str) -> Option<DateForm> {
    let b = text.trim_ascii().as_bytes();
    if b.len() == 10 && b[4] == b'-' && b[7] == b'-' {
        let year = digits_value(&b[..4])?;
        let month = digits_value(&b[5..7])?;
        let day = digits_value(&b[8..])?;
        return valid_date(year, month, day).then_some(DateForm::Iso);
    }
    let (a, m, year) = slash_parts(b)?;
    let day_first = valid_date(year, m, a);
    let month_first = valid_date(year, a, m);
    (day_first || month_first).then_some(DateForm::Slash {
        day_first,
        month_first,
    })
}

/// A calendar day, ordered by year, month, day.
#[derive(Clone, Copy, Debug, PartialEq, Eq, PartialOrd, Ord)]
pub struct Date {
    year: u16,
    month: u8,
    day: u8,
}

impl Date {
    /// A date from its parts, when they name a real day.
    pub fn new(year: u16, month: u8, day: u8) -> Option<Date> {
        valid_date(u32::from(year), u32::from(month), u32::from(day)).then_some(Date {
            year,
            month,
            day,
        })
    }

    /// The ISO 8601 extended form `YYYY-MM-DD` only, checked against the calendar: the one form
    /// rules files use for bounds.
    ///
    /// ```
    /// use emend::values::Date;
    /// assert_eq!(Date::parse_iso("2024-02-29").unwrap().to_string(), "2024-02-29");
    /// assert!(Date::parse_iso("2023-02-29").is_none());
    /// assert!(Date::parse_iso("29/02/2024").is_none());
    /// ```
    pub fn parse_iso(text: &str) -> Option<Date> {
        let b = text.trim_ascii().as_bytes();
        if b.len() != 10 || b[4] != b'-' || b[7] != b'-' {
            return None;
        }
        let year = u16::try_from(digits_value(&b[..4])?).ok()?;
        let month = u8::try_from(digits_value(&b[5..7])?).ok()?;
        let day = u8::try_from(digits_value(&b[8..])?).ok()?;
        Date::new(year, month, day)
    }

    /// The day a cell names: an ISO 8601 date, or a slash date that is a real day read only
    /// one way round (`13/01/2024` is 13 January; `03/04/2024` names no single day).
    ///
    /// ```
    /// use emend::values::Date;
    /// assert_eq!(Date::read("13/01/2024"), Date::parse_iso("2024-01-13"));
    /// assert_eq!(Date::read("1/31/2024"), Date::parse_iso("2024-01-31"));
    /// assert_eq!(Date::read("03/04/2024"), None);
    /// ```
    pub fn read(text: &str) -> Option<Date> {
        if let Some(date) = Date::parse_iso(text) {
            return Some(date);
        }
        let (a, m, year) = slash_parts(text.trim_ascii().as_bytes())?;
        let year = u16::try_from(year).ok()?;
        let as_day_first = Date::new(year, u8::try_from(m).ok()?, u8::try_from(a).ok()?);
        let as_month_first = Date::new(year, u8::try_from(a).ok()?, u8::try_from(m).ok()?);
        match (as_day_first, as_month_first) {
            (Some(d), None) | (None, Some(d)) => Some(d),
            (Some(d), Some(e)) if d == e => Some(d),
            _ => None,
        }
    }
}

impl fmt::Display for Date {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(f, "{:04}-{:02}-{:02}", self.year, self.month, self.day)
    }
}
