//! What each [`Transform`] does to one cell: the single definition that recording, committing
//! and carrying a fix all use.
//!
//! Numbers are changed as decimal text, digit by digit, never through floating point, so
//! `112.457` negated is exactly `-112.457` and `71` scaled by 10^-1 is exactly `7.1`.

use crate::model::edit::{DayOrder, LetterCase, Transform};
use regex::Regex;
use std::borrow::Cow;

use super::Date;

/// Why a transform does not fit a cell.
#[derive(Debug, Clone, PartialEq, Eq)]
pub enum TransformError {
    /// A number transform met a cell that is not a plain decimal number.
    NotANumber,
    /// A date transform met a cell that does not read in the stated order.
    NotADate,
    /// The pattern does not compile.
    BadPattern(String),
}

impl std::fmt::Display for TransformError {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        match self {
            TransformError::NotANumber => write!(f, "not a plain decimal number"),
            TransformError::NotADate => write!(f, "not a date in the stated order"),
            TransformError::BadPattern(e) => write!(f, "the pattern does not compile: {e}"),
        }
    }
}

/// A transform ready to apply (its pattern compiled once).
#[derive(Debug, Clone)]
pub struct Compiled<'t> {
    transform: &'t Transform,
    regex: Option<Regex>,
}

impl<'t> Compiled<'t> {
    /// Compiles `transform`.
    pub fn new(transform: &'t Transform) -> Result<Compiled<'t>, TransformError> {
        let regex = match transform {
            Transform::Replace { pattern, .. } => {
                Some(Regex::new(pattern).map_err(|e| TransformError::BadPattern(e.to_string()))?)
            }
            _ => None,
        };
        Ok(Compiled { transform, regex })
    }

    /// The new value of a cell holding `cell` (`None`: missing). A missing cell stays missing
    /// under every transform but [`Transform::Value`].
    pub fn apply(&self, cell: Option<&str>) -> Result<Option<String>, TransformError> {
        let Some(v) = cell else {
            return Ok(match self.transform {
                Transform::Value(to) => to.clone(),
                _ => None,
            });
        };
        Ok(Some(match self.transform {
            Transform::Value(to) => return Ok(to.clone()),
            Transform::Negate => negate(v)?,
            Transform::Scale(p) => scale(v, *p)?,
            Transform::Round(n) => round(v, *n)?,
            Transform::Spaces => v.split_whitespace().collect::<Vec<_>>().join(" "),
            Transform::FinalStop => match v.strip_suffix('.') {
                Some(rest) if !rest.ends_with('.') && !rest.is_empty() => rest.to_owned(),
                _ => v.to_owned(),
            },
            Transform::Case(c) => letter_case(v, *c),
            Transform::Replace { with, .. } => {
                let re = self.regex.as_ref().expect("compiled with the transform");
                match re.replace_all(v, with.as_str()) {
                    Cow::Borrowed(_) => v.to_owned(),
                    Cow::Owned(s) => s,
                }
            }
            Transform::Dates(order) => iso_date(v, *order)?,
        }))
    }
}

/// A plain decimal number split into sign, integer digits and fraction digits.
fn parts(v: &str) -> Result<(bool, &str, &str), TransformError> {
    let t = v.trim();
    let (negative, body) = match t.as_bytes().first() {
        Some(b'-') => (true, &t[1..]),
        Some(b'+') => (false, &t[1..]),
        _ => (false, t),
    };
    let (int, frac) = body.split_once('.').unwrap_or((body, ""));
    let digits = |s: &str| s.bytes().all(|b| b.is_ascii_digit());
    if (int.is_empty() && frac.is_empty()) || !digits(int) || !digits(frac) {
        return Err(TransformError::NotANumber);
    }
    Ok((negative, int, frac))
}

fn join(negative: bool, int: &str, frac: &str) -> String {
    let int = int.trim_start_matches('0');
    let int = if int.is_empty() { "0" } else { int };
    let zero = int == "0" && frac.bytes().all(|b| b == b'0');
    let sign = if negative && !zero { "-" } else { "" };
    if frac.is_empty() {
        format!("{sign}{int}")
    } else {
        format!("{sign}{int}.{frac}")
    }
}

fn negate(v: &str) -> Result<String, TransformError> {
    let (negative, int, frac) = parts(v)?;
    Ok(join(!negative, int, frac))
}

/// Moves the decimal point. Zeros at the end of the fraction beyond the cell's own number of
/// decimals are dropped, so the result has no more decimals than the cell unless its digits
/// need them: 185.0 × 10^-1 is 18.5 (not 18.50), 7.10 × 10^-1 is 0.71, 7.25 × 10^-1 is 0.725.
fn scale(v: &str, power: i32) -> Result<String, TransformError> {
    let (negative, int, frac) = parts(v)?;
    let decimals = frac.len();
    let digits: String = format!("{int}{frac}");
    let point = int.len() as i64 + i64::from(power);
    let (int, frac) = if point <= 0 {
        let zeros = "0".repeat((-point) as usize);
        ("0".to_owned(), format!("{zeros}{digits}"))
    } else if point as usize >= digits.len() {
        let zeros = "0".repeat(point as usize - digits.len());
        (format!("{digits}{zeros}"), String::new())
    } else {
        let (a, b) = digits.split_at(point as usize);
        (a.to_owned(), b.to_owned())
    };
    let mut frac = frac;
    while frac.len() > decimals && frac.ends_with('0') {
        frac.pop();
    }
    Ok(join(negative, &int, &frac))
}

fn round(v: &str, places: u32) -> Result<String, TransformError> {
    let (negative, int, frac) = parts(v)?;
    let keep = places as usize;
    if frac.len() <= keep {
        return Ok(v.trim().to_owned());
    }
    let mut digits: Vec<u8> = format!("{int}{}", &frac[..keep]).into_bytes();
    // Half away from zero, on the decimal digits as written.
    if frac.as_bytes()[keep] >= b'5' {
        let mut i = digits.len();
        loop {
            if i == 0 {
                digits.insert(0, b'1');
                break;
            }
            i -= 1;
            if digits[i] == b'9' {
                digits[i] = b'0';
            } else {
                digits[i] += 1;
                break;
            }
        }
    }
    let digits = String::from_utf8(digits).expect("ascii digits");
    let (a, b) = digits.split_at(digits.len() - keep);
    Ok(join(negative, a, b))
}

fn letter_case(v: &str, c: LetterCase) -> String {
    match c {
        LetterCase::Lower => v.to_lowercase(),
        LetterCase::Upper => v.to_uppercase(),
        LetterCase::Title => {
            let mut out = String::with_capacity(v.len());
            let mut start = true;
            for ch in v.chars() {
                if ch.is_alphabetic() {
                    if start {
                        out.extend(ch.to_uppercase());
                    } else {
                        out.extend(ch.to_lowercase());
                    }
                    start = false;
                } else {
                    out.push(ch);
                    start = ch.is_whitespace() || ch == '-';
                }
            }
            out
        }
    }
}

fn iso_date(v: &str, order: DayOrder) -> Result<String, TransformError> {
    let t = v.trim();
    if Date::parse_iso(t).is_some() {
        return Ok(t.to_owned());
    }
    let fields: Vec<&str> = t.split(['/', '-', '.']).collect();
    let [a, b, y] = fields[..] else {
        return Err(TransformError::NotADate);
    };
    let num = |s: &str, max_len: usize| -> Result<u32, TransformError> {
        if s.is_empty() || s.len() > max_len || !s.bytes().all(|b| b.is_ascii_digit()) {
            return Err(TransformError::NotADate);
        }
        s.parse().map_err(|_| TransformError::NotADate)
    };
    if y.len() != 4 {
        return Err(TransformError::NotADate);
    }
    let (day, month) = match order {
        DayOrder::DayMonthYear => (num(a, 2)?, num(b, 2)?),
        DayOrder::MonthDayYear => (num(b, 2)?, num(a, 2)?),
    };
    let year = num(y, 4)?;
    let date = Date::new(year as u16, month as u8, day as u8).ok_or(TransformError::NotADate)?;
    Ok(date.to_string())
}

#[cfg(test)]
mod tests {
    use super::*;

    fn run(t: Transform, v: &str) -> Result<Option<String>, TransformError> {
        Compiled::new(&t).unwrap().apply(Some(v))
    }

    #[test]
    fn numbers_change_as_decimal_text() {
        // Exact decimal arithmetic on the written digits (IEEE 754 would give 7.1000000000000005
        // for 71 * 0.1); common practice, no outside source.
        assert_eq!(
            run(Transform::Negate, "112.457").unwrap().unwrap(),
            "-112.457"
        );
        assert_eq!(run(Transform::Negate, "-0.5").unwrap().unwrap(), "0.5");
        assert_eq!(run(Transform::Negate, "0").unwrap().unwrap(), "0");
        assert_eq!(run(Transform::Scale(-1), "71").unwrap().unwrap(), "7.1");
        assert_eq!(run(Transform::Scale(-1), "185.0").unwrap().unwrap(), "18.5");
        assert_eq!(run(Transform::Scale(-1), "7.10").unwrap().unwrap(), "0.71");
        assert_eq!(run(Transform::Scale(-1), "7.25").unwrap().unwrap(), "0.725");
        assert_eq!(run(Transform::Scale(-2), "100").unwrap().unwrap(), "1");
        assert_eq!(run(Transform::Scale(-2), "5").unwrap().unwrap(), "0.05");
        assert_eq!(run(Transform::Scale(3), "1.5").unwrap().unwrap(), "1500");
        assert_eq!(run(Transform::Scale(1), "-0.25").unwrap().unwrap(), "-2.5");
        assert_eq!(run(Transform::Scale(-1), "710").unwrap().unwrap(), "71");
        assert!(run(Transform::Scale(1), "1e3").is_err());
        assert!(run(Transform::Negate, "abc").is_err());
    }

    #[test]
    fn rounding_is_half_away_from_zero() {
        // Half away from zero, the usual rule for reported values (common practice, no
        // outside source); on the written digits, 2.675 rounds to 2.68, where binary floating
        // point gives 2.67.
        for (v, n, want) in [
            ("2.675", 2, "2.68"),
            ("-2.675", 2, "-2.68"),
            ("9.995", 2, "10.00"),
            ("7.44", 1, "7.4"),
            ("7.45", 1, "7.5"),
            ("12", 1, "12"),
            ("0.04", 1, "0.0"),
        ] {
            assert_eq!(
                run(Transform::Round(n), v).unwrap().unwrap(),
                want,
                "{v} to {n}"
            );
        }
    }

    #[test]
    fn text_transforms() {
        assert_eq!(
            run(Transform::Spaces, "  Heron   Pool ").unwrap().unwrap(),
            "Heron Pool"
        );
        assert_eq!(
            run(Transform::FinalStop, "Abilene.").unwrap().unwrap(),
            "Abilene"
        );
        assert_eq!(
            run(Transform::FinalStop, "etc..").unwrap().unwrap(),
            "etc.."
        );
        assert_eq!(
            run(Transform::Case(LetterCase::Title), "mARY-ann o'neil")
                .unwrap()
                .unwrap(),
            "Mary-Ann O'neil"
        );
        let t = Transform::Replace {
            pattern: r"\s+$".into(),
            with: String::new(),
        };
        assert_eq!(run(t, "algae   ").unwrap().unwrap(), "algae");
        let bad = Transform::Replace {
            pattern: "(".into(),
            with: String::new(),
        };
        assert!(matches!(
            Compiled::new(&bad),
            Err(TransformError::BadPattern(_))
        ));
        // A missing cell stays missing.
        let c = Transform::Negate;
        assert_eq!(Compiled::new(&c).unwrap().apply(None).unwrap(), None);
    }

    #[test]
    fn dates_in_a_stated_order_become_iso_8601() {
        // ISO 8601-1:2019, 5.2.2.1 calendar date complete representation, extended format
        // YYYY-MM-DD.
        let dmy = Transform::Dates(DayOrder::DayMonthYear);
        assert_eq!(
            run(dmy.clone(), "13/01/2026").unwrap().unwrap(),
            "2026-01-13"
        );
        assert_eq!(run(dmy.clone(), "3.1.2026").unwrap().unwrap(), "2026-01-03");
        assert_eq!(
            run(dmy.clone(), "2026-01-13").unwrap().unwrap(),
            "2026-01-13"
        );
        let mdy = Transform::Dates(DayOrder::MonthDayYear);
        assert_eq!(
            run(mdy.clone(), "01/13/2026").unwrap().unwrap(),
            "2026-01-13"
        );
        assert!(run(mdy, "13/01/2026").is_err());
        assert!(run(dmy.clone(), "31/02/2026").is_err());
        assert!(run(dmy, "13/01/26").is_err());
    }
}
