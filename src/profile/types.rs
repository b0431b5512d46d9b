//! What one cell looks like, and what a column of such cells is.
//!
//! Classification works on the text of a single cell and never allocates: numbers are
//! checked by hand and then read with `str::parse::<f64>`, which borrows. The column type is
//! decided later, from counts, by [`infer_type`]. Nothing here changes a value or guesses a
//! fix; it only names what it sees.

use crate::values::{BOOLEAN_WORDS, is_common_missing_token};
use serde::{Deserialize, Serialize};

pub use crate::values::{DateForm, Decimal, Number, parse_date, parse_number};

/// What a single non-blank cell looks like.
#[derive(Clone, Copy, Debug, PartialEq)]
pub enum CellKind {
    /// An integer such as `-12` or `007`.
    Integer(Number),
    /// A decimal such as `3.25`, `.5` or `1e3`.
    Decimal(Number),
    /// A calendar date.
    Date(DateForm),
    /// One of the boolean words (true/false, yes/no, y/n, any case).
    Boolean,
    /// A common-practice missing token such as `N/A` or `-`.
    MissingToken,
    /// Anything else.
    Text,
}

impl CellKind {
    /// The number in the cell, if it is one.
    pub fn number(&self) -> Option<Number> {
        match *self {
            CellKind::Integer(n) | CellKind::Decimal(n) => Some(n),
            _ => None,
        }
    }
}

/// Classifies one non-blank cell. Numbers win over dates, dates over booleans, booleans over
/// missing tokens; the rest is text.
///
/// ```
/// use emend::profile::types::{classify, CellKind};
/// assert!(matches!(classify("42"), CellKind::Integer(_)));
/// assert_eq!(classify("Yes"), CellKind::Boolean);
/// assert_eq!(classify("n/a"), CellKind::MissingToken);
/// ```
pub fn classify(text: &str) -> CellKind {
    if let Some((number, is_integer)) = parse_number(text) {
        return if is_integer {
            CellKind::Integer(number)
        } else {
            CellKind::Decimal(number)
        };
    }
    if let Some(form) = parse_date(text) {
        return CellKind::Date(form);
    }
    let t = text.trim_ascii();
    if BOOLEAN_WORDS.iter().any(|w| w.eq_ignore_ascii_case(t)) {
        return CellKind::Boolean;
    }
    if is_common_missing_token(t) {
        return CellKind::MissingToken;
    }
    CellKind::Text
}

/// The type of a column, decided from the kinds of its non-missing cells.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum InferredType {
    /// No present cell to judge by.
    Empty,
    /// Whole numbers.
    Integer,
    /// Numbers, some with a fractional part.
    Decimal,
    /// Calendar dates.
    Date,
    /// Boolean words, or 0/1 with both present.
    Boolean,
    /// Text with few distinct levels relative to the count.
    Categorical,
    /// Free text.
    Text,
}

impl InferredType {
    /// Whether the type is a number type (integer or decimal).
    pub fn is_numeric(self) -> bool {
        matches!(self, InferredType::Integer | InferredType::Decimal)
    }
}

/// Day/month order of the `NN/NN/YYYY` dates in a column.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum DateOrder {
    /// Some date only reads as day/month/year, and all read that way.
    DayMonthYear,
    /// Some date only reads as month/day/year, and all read that way.
    MonthDayYear,
    /// Every date reads both ways (all parts ≤ 12): day/month order ambiguous.
    Ambiguous,
    /// Some dates only read day-first and others only month-first.
    Inconsistent,
}

/// How many present cells of a column were of each kind.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq, Serialize, Deserialize)]
pub struct KindCounts {
    /// Integer cells.
    pub integer: u64,
    /// Integer cells equal to 0.
    pub integer_zero: u64,
    /// Integer cells equal to 1.
    pub integer_one: u64,
    /// Decimal cells.
    pub decimal: u64,
    /// ISO 8601 date cells.
    pub date_iso: u64,
    /// `NN/NN/YYYY` date cells.
    pub date_slash: u64,
    /// Slash dates that are real dates read day-first.
    pub date_slash_day_first: u64,
    /// Slash dates that are real dates read month-first.
    pub date_slash_month_first: u64,
    /// Boolean word cells.
    pub boolean: u64,
    /// Common-practice missing tokens (not counted as any type).
    pub missing_token: u64,
    /// Other text.
    pub text: u64,
}

impl KindCounts {
    /// Counts one cell.
    pub fn add(&mut self, kind: &CellKind) {
        match kind {
            CellKind::Integer(n) => {
                self.integer += 1;
                self.integer_zero += u64::from(n.value == 0.0);
                self.integer_one += u64::from(n.value == 1.0);
            }
            CellKind::Decimal(_) => self.decimal += 1,
            CellKind::Date(DateForm::Iso) => self.date_iso += 1,
            CellKind::Date(DateForm::Slash {
                day_first,
                month_first,
            }) => {
                self.date_slash += 1;
                self.date_slash_day_first += u64::from(*day_first);
                self.date_slash_month_first += u64::from(*month_first);
            }
            CellKind::Boolean => self.boolean += 1,
            CellKind::MissingToken => self.missing_token += 1,
            CellKind::Text => self.text += 1,
        }
    }

    /// Whether the integers are all 0 or 1, with both present, which makes them a boolean
    /// code rather than counts.
    pub fn zero_one_coded(&self) -> bool {
        self.integer_zero > 0
            && self.integer_one > 0
            && self.integer_zero + self.integer_one == self.integer
    }

    /// How many cells belong to a family (see [`Family::of`]).
    pub fn family_count(&self, family: Family) -> u64 {
        let zero_one = self.zero_one_coded();
        match family {
            Family::Numeric if zero_one => self.decimal,
            Family::Numeric => self.integer + self.decimal,
            Family::Date => self.date_iso + self.date_slash,
            Family::Boolean if zero_one => self.boolean + self.integer,
            Family::Boolean => self.boolean,
            Family::Text => self.text,
        }
    }

    /// Day/month order of the slash dates, when there are any.
    pub fn date_order(&self) -> Option<DateOrder> {
        let n = self.date_slash;
        if n == 0 {
            return None;
        }
        let (d, m) = (self.date_slash_day_first, self.date_slash_month_first);
        Some(match (d == n, m == n) {
            (true, true) => DateOrder::Ambiguous,
            (true, false) => DateOrder::DayMonthYear,
            (false, true) => DateOrder::MonthDayYear,
            (false, false) => DateOrder::Inconsistent,
        })
    }
}

/// The family a cell belongs to when deciding the dominant type.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Family {
    /// Integers and decimals.
    Numeric,
    /// Dates of either form.
    Date,
    /// Boolean words, and 0/1 when the column is 0/1 coded.
    Boolean,
    /// Everything else except missing tokens.
    Text,
}

impl Family {
    /// The family of a cell kind within a column whose integers are (or are not) 0/1 coded.
    /// Missing tokens belong to no family.
    pub fn of(kind: &CellKind, zero_one_coded: bool) -> Option<Family> {
        Some(match kind {
            CellKind::Integer(_) if zero_one_coded => Family::Boolean,
            CellKind::Integer(_) | CellKind::Decimal(_) => Family::Numeric,
            CellKind::Date(_) => Family::Date,
            CellKind::Boolean => Family::Boolean,
            CellKind::Text => Family::Text,
            CellKind::MissingToken => return None,
        })
    }
}

/// Decides the dominant type of a column: the family with the most cells (ties go to the
/// more specific family: numeric, date, boolean, then text). Text becomes categorical when
/// there are at most `categorical_max_levels` distinct values and at least two cells per
/// distinct value on average.
///
/// ```
/// use emend::profile::types::{infer_type, InferredType, KindCounts};
/// let counts = KindCounts { integer: 9, text: 1, ..KindCounts::default() };
/// assert_eq!(infer_type(&counts, 10, 50).0, InferredType::Integer);
/// ```
pub fn infer_type(
    counts: &KindCounts,
    distinct: u64,
    categorical_max_levels: u64,
) -> (InferredType, Option<Family>) {
    let date = counts.date_iso + counts.date_slash;
    let candidates = [Family::Numeric, Family::Date, Family::Boolean, Family::Text]
        .map(|family| (counts.family_count(family), family));
    let mut best = (0, None);
    for (n, family) in candidates {
        if n > best.0 {
            best = (n, Some(family));
        }
    }
    let Some(family) = best.1 else {
        return (InferredType::Empty, None);
    };
    let ty = match family {
        Family::Numeric if counts.decimal > 0 => InferredType::Decimal,
        Family::Numeric => InferredType::Integer,
        Family::Date => InferredType::Date,
        Family::Boolean => InferredType::Boolean,
        Family::Text => {
            let typed = counts.integer
                + counts.decimal
                + date
                + counts.boolean
                + counts.text
                + counts.missing_token;
            if distinct <= categorical_max_levels && distinct.saturating_mul(2) <= typed {
                InferredType::Categorical
            } else {
                InferredType::Text
            }
        }
    };
    (ty, Some(family))
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Value, written as an integer, and exact (mantissa, scale).
    type Parsed = (f64, bool, Option<(i64, u8)>);

    fn check_number(input: &str, expected: Option<Parsed>) {
        let got = parse_number(input)
            .map(|(n, int)| (n.value, int, n.exact.map(|d| (d.mantissa, d.scale))));
        assert_eq!(got, expected, "input {input:?}");
    }

    #[test]
    fn numbers() {
        check_number("12", Some((12.0, true, Some((12, 0)))));
        check_number("-007", Some((-7.0, true, Some((-7, 0)))));
        check_number("+3.50", Some((3.5, false, Some((350, 2)))));
        check_number(".5", Some((0.5, false, Some((5, 1)))));
        check_number("5.", Some((5.0, false, Some((5, 0)))));
        check_number("1e3", Some((1000.0, false, None)));
        check_number("1.5E-2", Some((0.015, false, None)));
        check_number(
            " 10000000.2 ",
            Some((10000000.2, false, Some((100000002, 1)))),
        );
        check_number(
            "1234567890123456789",
            Some((1234567890123456789.0, true, None)),
        );
        for bad in [
            "", "-", ".", "1,000", "NaN", "inf", "1e", "1e+", "1.2.3", "0x10", "12a", "--1",
        ] {
            check_number(bad, None);
        }
    }

    fn check_date(input: &str, expected: Option<DateForm>) {
        assert_eq!(parse_date(input), expected, "input {input:?}");
    }

    #[test]
    fn dates() {
        let slash = |day_first, month_first| {
            Some(DateForm::Slash {
                day_first,
                month_first,
            })
        };
        check_date("2024-01-31", Some(DateForm::Iso));
        check_date("2000-02-29", Some(DateForm::Iso));
        check_date("1900-02-29", None);
        check_date("2024-13-01", None);
        check_date("2024-1-01", None);
        check_date("25/12/2024", slash(true, false));
        check_date("12/25/2024", slash(false, true));
        check_date("3/4/2024", slash(true, true));
        check_date("31/02/2024", None);
        check_date("1/2/24", None);
        check_date("1/2/2024/5", None);
    }

    #[test]
    fn cell_kinds() {
        let check = |input: &str, expected: &str| {
            let got = match classify(input) {
                CellKind::Integer(_) => "integer",
                CellKind::Decimal(_) => "decimal",
                CellKind::Date(_) => "date",
                CellKind::Boolean => "boolean",
                CellKind::MissingToken => "missing",
                CellKind::Text => "text",
            };
            assert_eq!(got, expected, "input {input:?}");
        };
        check("0", "integer");
        check("-2.5", "decimal");
        check("2024-05-01", "date");
        check("YES", "boolean");
        check("n", "boolean");
        check("N/A", "missing");
        check("nan", "missing");
        check(" - ", "missing");
        check("unknown", "missing");
        check("Mill Creek", "text");
        check("t", "text");
    }

    #[test]
    fn common_practice_tokens_are_missing() {
        // Source: tests/reference/missing_values.json, common_practice_not_standards:
        // `string_tokens_common` (common practice, no single source) and pandas 3.1.1
        // `read_csv` default na_values (a library default). The empty string is a blank,
        // handled before classification.
        let json = crate::testdata::reference("missing_values.json");
        let practice = &json["common_practice_not_standards"];
        let tokens = practice["string_tokens_common"]
            .as_array()
            .unwrap()
            .iter()
            .chain(
                practice["pandas_read_csv_default_na_values"]["values"]
                    .as_array()
                    .unwrap(),
            );
        let mut checked = 0;
        for token in tokens {
            let token = token.as_str().unwrap();
            if token.is_empty() {
                continue;
            }
            assert_eq!(classify(token), CellKind::MissingToken, "{token:?}");
            checked += 1;
        }
        assert_eq!(checked, 13 + 18);
        // Source: same file, `numeric_sentinel_codes`; -1 and 0 are left out on purpose
        // (the file notes they collide with real values).
        let codes = crate::testdata::f64s(&practice["numeric_sentinel_codes"]);
        let mut ours = crate::profile::stats::SENTINEL_CODES.to_vec();
        let mut theirs: Vec<f64> = codes
            .into_iter()
            .filter(|c| *c != -1.0 && *c != 0.0)
            .collect();
        ours.sort_unstable_by(f64::total_cmp);
        theirs.sort_unstable_by(f64::total_cmp);
        assert_eq!(ours, theirs);
    }

    fn check_infer(counts: KindCounts, distinct: u64, expected: InferredType) {
        assert_eq!(infer_type(&counts, distinct, 50).0, expected, "{counts:?}");
    }

    #[test]
    fn inference() {
        let k = KindCounts::default;
        check_infer(k(), 0, InferredType::Empty);
        check_infer(
            KindCounts {
                integer: 8,
                text: 2,
                ..k()
            },
            10,
            InferredType::Integer,
        );
        check_infer(
            KindCounts {
                integer: 5,
                decimal: 3,
                ..k()
            },
            8,
            InferredType::Decimal,
        );
        check_infer(
            KindCounts {
                integer: 3,
                text: 6,
                ..k()
            },
            9,
            InferredType::Text,
        );
        check_infer(
            KindCounts { text: 100, ..k() },
            3,
            InferredType::Categorical,
        );
        check_infer(
            KindCounts {
                date_iso: 4,
                text: 1,
                ..k()
            },
            5,
            InferredType::Date,
        );
        check_infer(KindCounts { boolean: 4, ..k() }, 2, InferredType::Boolean);
        // Decision: 0/1 with both present is a boolean code; only 0 or only 1 stays integer.
        let zero_one = KindCounts {
            integer: 10,
            integer_zero: 4,
            integer_one: 6,
            ..k()
        };
        check_infer(zero_one, 2, InferredType::Boolean);
        let ones = KindCounts {
            integer: 10,
            integer_one: 10,
            ..k()
        };
        check_infer(ones, 1, InferredType::Integer);
        let counts = KindCounts {
            integer: 10,
            integer_zero: 4,
            integer_one: 5,
            ..k()
        };
        check_infer(counts, 3, InferredType::Integer);
    }

    #[test]
    fn date_order() {
        let check = |day_first, month_first, expected| {
            let counts = KindCounts {
                date_slash: 10,
                date_slash_day_first: day_first,
                date_slash_month_first: month_first,
                ..KindCounts::default()
            };
            assert_eq!(counts.date_order(), Some(expected));
        };
        check(10, 10, DateOrder::Ambiguous);
        check(10, 7, DateOrder::DayMonthYear);
        check(6, 10, DateOrder::MonthDayYear);
        check(8, 9, DateOrder::Inconsistent);
    }
}
