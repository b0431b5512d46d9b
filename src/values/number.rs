//! Numbers as written in cells: a plain decimal with an optional sign, point and exponent.
//!
//! One parser for the whole crate: the profile, the rules checker, the report and the CLI all
//! read numbers here, so a value is a number to all of them or to none.

/// A number read from a cell: its nearest `f64`, and its exact decimal form when it has one.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Number {
    /// The nearest `f64` to the written number.
    pub value: f64,
    /// The written number exactly as `mantissa × 10^-scale`, when it has at most 18
    /// significant digits, at most 18 digits after the point and no exponent.
    pub exact: Option<Decimal>,
}

/// An exact decimal `mantissa × 10^-scale`, as written in the cell.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct Decimal {
    /// The digits of the number with the point removed, with the sign.
    pub mantissa: i64,
    /// How many of those digits stood after the point.
    pub scale: u8,
}

/// The most digits kept in an exact [`Decimal`]; more would not fit an `i64` safely.
const MAX_EXACT_DIGITS: u32 = 18;

/// Reads a plain decimal number: optional sign, digits with at most one point, optional
/// exponent. Surrounding ASCII whitespace is ignored. Returns the number and whether it was
/// written as an integer (no point, no exponent).
///
/// Thousands separators, `NaN`, `inf` and hexadecimal are refused on purpose: in data
/// extracts they are text, and `NaN` is a common missing-value token.
///
/// ```
/// use emend::values::parse_number;
/// let (n, is_int) = parse_number(" -12.50 ").unwrap();
/// assert_eq!((n.value, is_int), (-12.5, false));
/// assert!(parse_number("1,000").is_none());
/// ```
pub fn parse_number(text: &str) -> Option<(Number, bool)> {
    let t = text.trim_ascii();
    let bytes = t.as_bytes();
    let mut i = 0;
    let negative = match bytes.first() {
        Some(b'-') => {
            i = 1;
            true
        }
        Some(b'+') => {
            i = 1;
            false
        }
        _ => false,
    };
    let mut mantissa: i64 = 0;
    let mut significant = 0u32;
    let mut scale = 0u32;
    let mut digits = 0u32;
    let mut seen_point = false;
    let mut seen_exponent = false;
    let mut exact_ok = true;
    while i < bytes.len() {
        match bytes[i] {
            b @ b'0'..=b'9' => {
                digits += 1;
                if seen_point {
                    scale += 1;
                }
                if mantissa != 0 || b != b'0' {
                    significant += 1;
                }
                if significant > MAX_EXACT_DIGITS || scale > MAX_EXACT_DIGITS {
                    exact_ok = false;
                } else {
                    mantissa = mantissa * 10 + i64::from(b - b'0');
                }
            }
            b'.' if !seen_point => seen_point = true,
            b'e' | b'E' => {
                seen_exponent = true;
                break;
            }
            _ => return None,
        }
        i += 1;
    }
    if digits == 0 {
        return None;
    }
    if seen_exponent {
        // The exponent needs at least one digit, after an optional sign.
        let rest = &bytes[i + 1..];
        let rest = match rest.first() {
            Some(b'+' | b'-') => &rest[1..],
            _ => rest,
        };
        if rest.is_empty() || !rest.iter().all(u8::is_ascii_digit) {
            return None;
        }
        exact_ok = false;
    }
    let value: f64 = t.parse().ok()?;
    if !value.is_finite() {
        return None;
    }
    let exact = exact_ok.then(|| Decimal {
        mantissa: if negative { -mantissa } else { mantissa },
        scale: u8::try_from(scale).expect("scale is at most MAX_EXACT_DIGITS"),
    });
    Some((Number { value, exact }, !seen_point && !seen_exponent))
}

/// Whether `text` is written as an integer: an optional sign and digits, nothing else (surrounding
/// ASCII whitespace aside).
pub fn is_integer(text: &str) -> bool {
    parse_number(text).is_some_and(|(_, integer)| integer)
}

/// The nearest `f64` of a number written in a cell, when it is one.
pub fn number_value(text: &str) -> Option<f64> {
    parse_number(text).map(|(n, _)| n.value)
}
