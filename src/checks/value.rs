//! The value types a rule can declare, and comparing two values in a domain.
//!
//! What a number, a date or a boolean is comes from the crate's one cell vocabulary,
//! [`crate::values`], which the profile uses too. Everything here works on the text of one
//! cell, trimmed of surrounding whitespace by the caller, and never allocates. Nothing guesses:
//! thousands separators, `NaN`, `inf`, dates that name no single day and booleans outside a
//! short fixed list are refused, so the type rule can report them.

use crate::values::{self, Date, is_integer, parse_bool};
use std::cmp::Ordering;

/// The value types a column rule can declare.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub(crate) enum ValueType {
    /// Optional sign and digits only.
    Integer,
    /// An integer or a plain decimal number, with an optional exponent.
    Decimal,
    /// A calendar day: ISO 8601 `YYYY-MM-DD`, or a slash date that reads one way only.
    Date,
    /// `true/false/yes/no/y/n/1/0`, case-insensitive.
    Boolean,
    /// Anything.
    Text,
}

impl ValueType {
    /// Reads the word used in rules files.
    pub(crate) fn from_word(word: &str) -> Option<ValueType> {
        Some(match word {
            "integer" => ValueType::Integer,
            "decimal" => ValueType::Decimal,
            "date" => ValueType::Date,
            "boolean" => ValueType::Boolean,
            "text" => ValueType::Text,
            _ => return None,
        })
    }

    /// The words [`ValueType::from_word`] accepts, for error messages.
    pub(crate) const WORDS: &'static str = "integer, decimal, date, boolean, text";

    /// How the type reads in a description: "an integer", "a date (yyyy-mm-dd)".
    pub(crate) fn phrase(self) -> &'static str {
        match self {
            ValueType::Integer => "an integer",
            ValueType::Decimal => "a decimal number",
            ValueType::Date => "a date (yyyy-mm-dd, or d/m/yyyy that reads one way only)",
            ValueType::Boolean => "a boolean (true/false, yes/no, y/n, 1/0)",
            ValueType::Text => "text",
        }
    }

    /// Whether `text` (already trimmed) is a value of this type.
    pub(crate) fn accepts(self, text: &str) -> bool {
        match self {
            ValueType::Integer => is_integer(text),
            ValueType::Decimal => parse_number(text).is_some(),
            ValueType::Date => parse_date(text).is_some(),
            ValueType::Boolean => parse_bool(text).is_some(),
            ValueType::Text => true,
        }
    }

    /// The domain in which values of this type are compared.
    pub(crate) fn domain(self) -> Domain {
        match self {
            ValueType::Integer | ValueType::Decimal => Domain::Number,
            ValueType::Date => Domain::Date,
            ValueType::Boolean => Domain::Bool,
            ValueType::Text => Domain::Text,
        }
    }
}

/// A number in the one cell vocabulary ([`crate::values`]).
pub(crate) fn parse_number(text: &str) -> Option<f64> {
    values::number_value(text)
}

/// A definite calendar day in the one cell vocabulary: ISO 8601, or a slash date that reads
/// one way only.
pub(crate) fn parse_date(text: &str) -> Option<Date> {
    Date::read(text)
}

/// The way two values are compared.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub(crate) enum Domain {
    /// As numbers (nearest `f64`).
    Number,
    /// As calendar dates.
    Date,
    /// As booleans; equality only.
    Bool,
    /// As exact text.
    Text,
}

impl Domain {
    /// The domain of two values when neither side declares one: numbers when both read as
    /// numbers, dates when both read as dates, text otherwise.
    pub(crate) fn infer(a: &str, b: &str) -> Domain {
        if parse_number(a).is_some() && parse_number(b).is_some() {
            Domain::Number
        } else if parse_date(a).is_some() && parse_date(b).is_some() {
            Domain::Date
        } else {
            Domain::Text
        }
    }

    /// Orders `a` against `b` in this domain; `None` when either does not read in it, or
    /// for booleans, which have no order.
    fn order(self, a: &str, b: &str) -> Option<Ordering> {
        match self {
            Domain::Number => parse_number(a)?.partial_cmp(&parse_number(b)?),
            Domain::Date => Some(parse_date(a)?.cmp(&parse_date(b)?)),
            Domain::Bool => None,
            Domain::Text => Some(a.cmp(b)),
        }
    }

    /// Whether `a` equals `b` in this domain; values that do not read in it are unequal.
    pub(crate) fn equal(self, a: &str, b: &str) -> bool {
        match self {
            Domain::Number => {
                matches!((parse_number(a), parse_number(b)), (Some(x), Some(y)) if x == y)
            }
            Domain::Date => matches!((parse_date(a), parse_date(b)), (Some(x), Some(y)) if x == y),
            Domain::Bool => matches!((parse_bool(a), parse_bool(b)), (Some(x), Some(y)) if x == y),
            Domain::Text => a == b,
        }
    }
}

/// The comparisons a condition may make.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub(crate) enum Test {
    /// Equal.
    Eq,
    /// Not equal.
    Ne,
    /// Less than.
    Lt,
    /// Less than or equal.
    Le,
    /// Greater than.
    Gt,
    /// Greater than or equal.
    Ge,
    /// Equal to one of a list of values.
    In,
    /// The cell is missing.
    IsMissing,
    /// The cell is present.
    IsPresent,
}

impl Test {
    /// Reads the words used in rules files and conditions. The short forms of the first
    /// rules files (`eq`, `ne`, `lt`, `le`, `gt`, `ge`, `in`) stay readable for ever: rules
    /// files and conditions already signed into a store use them.
    pub(crate) fn from_word(word: &str) -> Option<Test> {
        Some(match word {
            "equals" | "eq" => Test::Eq,
            "not" | "ne" => Test::Ne,
            "below" | "lt" => Test::Lt,
            "at most" | "le" => Test::Le,
            "above" | "gt" => Test::Gt,
            "at least" | "ge" => Test::Ge,
            "one of" | "in" => Test::In,
            "is missing" => Test::IsMissing,
            "is present" => Test::IsPresent,
            _ => return None,
        })
    }

    /// The words [`Test::from_word`] accepts, for error messages.
    pub(crate) const WORDS: &'static str =
        "equals, not, below, at most, above, at least, one of, is missing, is present";

    /// The words as written in rules files and conditions.
    pub(crate) fn word(self) -> &'static str {
        match self {
            Test::Eq => "equals",
            Test::Ne => "not",
            Test::Lt => "below",
            Test::Le => "at most",
            Test::Gt => "above",
            Test::Ge => "at least",
            Test::In => "one of",
            Test::IsMissing => "is missing",
            Test::IsPresent => "is present",
        }
    }

    /// Whether the test orders values (and so has no verdict on booleans).
    pub(crate) fn orders(self) -> bool {
        matches!(self, Test::Lt | Test::Le | Test::Gt | Test::Ge)
    }

    /// Applies a two-value test in `domain`. `Some(verdict)` when there is one; `None` when an
    /// ordering test meets a value that does not read in the domain (the type rule reports
    /// such values). `In`, `IsMissing` and `IsPresent` are decided by the caller.
    pub(crate) fn compare(self, domain: Domain, a: &str, b: &str) -> Option<bool> {
        let ord = || domain.order(a, b);
        Some(match self {
            Test::Eq | Test::In => domain.equal(a, b),
            Test::Ne => !domain.equal(a, b),
            Test::Lt => ord()?.is_lt(),
            Test::Le => ord()?.is_le(),
            Test::Gt => ord()?.is_gt(),
            Test::Ge => ord()?.is_ge(),
            Test::IsMissing | Test::IsPresent => return None,
        })
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn integers_are_sign_and_digits() {
        for ok in ["0", "-12", "+7", "00012"] {
            assert!(is_integer(ok), "{ok}");
        }
        for bad in ["", "-", "1.0", "1e3", "1,000", "one"] {
            assert!(!is_integer(bad), "{bad}");
        }
    }

    #[test]
    fn numbers_refuse_words_and_separators() {
        assert_eq!(parse_number("-12.5"), Some(-12.5));
        assert_eq!(parse_number("1e3"), Some(1000.0));
        assert_eq!(parse_number(".5"), Some(0.5));
        for bad in [
            "",
            "NaN",
            "inf",
            "-infinity",
            "1,5",
            "1 000",
            "e",
            ".",
            "1e999",
            "0x10",
        ] {
            assert_eq!(parse_number(bad), None, "{bad}");
        }
    }

    #[test]
    fn dates_are_calendar_checked() {
        assert_eq!(
            parse_date("2024-02-29").map(|d| d.to_string()),
            Some("2024-02-29".into())
        );
        assert!(parse_date("2000-02-29").is_some());
        for bad in [
            "2023-02-29",
            "1900-02-29",
            "2024-13-01",
            "2024-00-10",
            "2024-04-31",
            "2024-4-03",
            "20240403",
            "2024/04/03",
            "03-04-2024",
            "03/04/2024",
            "2024-04-03T10:00",
        ] {
            assert_eq!(parse_date(bad), None, "{bad}");
        }
        assert!(parse_date("2024-01-31") < parse_date("2024-02-01"));
        // The profile calls this a date, so a date rule does too (one vocabulary).
        assert_eq!(parse_date("13/01/2024"), parse_date("2024-01-13"));
    }

    #[test]
    fn booleans_take_a_fixed_list_in_any_case() {
        for (text, value) in [("YES", true), ("n", false), ("True", true), ("0", false)] {
            assert_eq!(parse_bool(text), Some(value), "{text}");
        }
        for bad in ["", "ja", "2", "t", "on"] {
            assert_eq!(parse_bool(bad), None, "{bad}");
        }
    }

    #[test]
    fn comparisons_follow_the_domain() {
        let check = |test: &str, domain, a, b, expected| {
            let test = Test::from_word(test).unwrap();
            assert_eq!(
                test.compare(domain, a, b),
                expected,
                "{a} {test:?} {b} in {domain:?}"
            );
        };
        check("eq", Domain::Number, "1.0", "1", Some(true));
        check("lt", Domain::Number, "9", "10", Some(true));
        check("lt", Domain::Text, "9", "10", Some(false));
        check("ge", Domain::Date, "2024-03-01", "2024-02-29", Some(true));
        check("eq", Domain::Bool, "Yes", "y", Some(true));
        check("ne", Domain::Number, "abc", "1", Some(true));
        check("eq", Domain::Number, "abc", "abc", Some(false));
        check("gt", Domain::Number, "abc", "1", None);
        check("gt", Domain::Bool, "yes", "no", None);
        assert_eq!(Domain::infer("3", "4.5"), Domain::Number);
        assert_eq!(Domain::infer("2024-01-01", "2023-12-31"), Domain::Date);
        assert_eq!(Domain::infer("3", "x"), Domain::Text);
    }
}
