//! The stored shape of fixes that choose rows and transform cells: which rows ([`Rows`]), on
//! what condition ([`Clause`]), and how each chosen cell changes ([`Transform`]).
//!
//! These are plain data inside signed commit bodies (postcard, so new variants only ever go at
//! the end of an enum). What they mean is defined once: conditions in
//! [`crate::checks::condition`], transforms in [`crate::values::transform`], and both are
//! applied to rows by [`crate::ledger::FixApplier`].

use super::RowId;
use crate::hash::BlobId;
use serde::{Deserialize, Serialize};
use std::fmt;

/// Which rows a fix acts on.
#[derive(Clone, Debug, PartialEq, Eq, Serialize, Deserialize)]
pub enum Rows {
    /// These rows, by key (or position for a table without a key), as resolved when the fix
    /// was recorded.
    Listed(Vec<RowId>),
    /// Every row where all the clauses hold, evaluated on each extract the fix meets (so
    /// `carry` finds new rows with the same problem).
    Where(Vec<Clause>),
    /// Rows equal to an earlier row in the given columns (every column when empty); the
    /// first of each set of copies stays.
    Duplicates(Vec<String>),
    /// The rows a rule of a stored rules file finds (`ph.hard`, or a condition's id), taken
    /// from that file wherever the fix applies, so the fix means the same on every extract.
    Breaking {
        /// The rule id.
        rule: String,
        /// The stored rules file the rule comes from.
        rules: BlobId,
    },
}

impl fmt::Display for Rows {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            Rows::Listed(rows) => {
                let shown: Vec<String> = rows.iter().take(5).map(ToString::to_string).collect();
                write!(f, "rows {}", shown.join(", "))?;
                if rows.len() > 5 {
                    write!(f, " and {} more", rows.len() - 5)?;
                }
                Ok(())
            }
            Rows::Where(clauses) if clauses.is_empty() => write!(f, "every row"),
            Rows::Where(clauses) => {
                let text: Vec<String> = clauses.iter().map(ToString::to_string).collect();
                write!(f, "rows where {}", text.join(" and "))
            }
            Rows::Duplicates(columns) if columns.is_empty() => {
                write!(f, "rows that repeat an earlier row")
            }
            Rows::Duplicates(columns) if columns.len() <= 3 => {
                write!(
                    f,
                    "rows that repeat an earlier row in {}",
                    columns.join(", ")
                )
            }
            Rows::Duplicates(columns) => write!(
                f,
                "rows that repeat an earlier row in {} columns ({}, …)",
                columns.len(),
                columns[..2].join(", ")
            ),
            Rows::Breaking { rule, .. } => write!(f, "rows breaking {rule}"),
        }
    }
}

/// One test on one column of a row: `ph above 14`, `site one of "Fox Run","Heron Pool"`,
/// `notes is missing`. The words are those of the rules file.
#[derive(Clone, Debug, PartialEq, Eq, Serialize, Deserialize)]
pub struct Clause {
    /// The column tested.
    pub column: String,
    /// The test, as written in rules files (`equals`, `not`, `below`, `at most`, `above`,
    /// `at least`, `one of`; the short forms `eq` … `in` of earlier files still read;
    /// `is missing`, `is present`).
    pub test: String,
    /// The value compared with (several for `in`, none for `is missing` / `is present`).
    pub values: Vec<String>,
}

fn quoted(v: &str) -> String {
    if !v.is_empty()
        && v.chars()
            .all(|c| c.is_alphanumeric() || matches!(c, '-' | '.' | '_' | '+' | ':' | '/'))
    {
        v.to_owned()
    } else {
        format!("\"{}\"", v.replace('\\', "\\\\").replace('"', "\\\""))
    }
}

impl fmt::Display for Clause {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(f, "{} {}", quoted(&self.column), self.test)?;
        if !self.values.is_empty() {
            let values: Vec<String> = self.values.iter().map(|v| quoted(v)).collect();
            write!(f, " {}", values.join(","))?;
        }
        Ok(())
    }
}

/// Letter case for [`Transform::Case`].
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, Deserialize)]
pub enum LetterCase {
    /// all lower case.
    Lower,
    /// ALL UPPER CASE.
    Upper,
    /// Each Word Capitalised, the rest lower case.
    Title,
}

/// Day and month order of slash or dash dates, for [`Transform::Dates`].
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, Deserialize)]
pub enum DayOrder {
    /// 13/01/2026.
    DayMonthYear,
    /// 01/13/2026.
    MonthDayYear,
}

/// How a chosen cell changes.
#[derive(Clone, Debug, PartialEq, Eq, Serialize, Deserialize)]
pub enum Transform {
    /// To this value, or to missing.
    Value(Option<String>),
    /// A number's sign turned.
    Negate,
    /// A number times ten to this power (−1 moves the decimal point one place left).
    Scale(i32),
    /// A number rounded to this many decimal places (half away from zero).
    Round(u32),
    /// Leading and trailing whitespace dropped, runs of whitespace inside made one space.
    Spaces,
    /// A lone final full stop dropped.
    FinalStop,
    /// Letter case.
    Case(LetterCase),
    /// Every match of a pattern (the `regex` crate's syntax) replaced; `$1` names a group.
    Replace {
        /// The pattern.
        pattern: String,
        /// The replacement.
        with: String,
    },
    /// A date written in this order, with `/`, `-` or `.` between the parts, rewritten as
    /// ISO 8601 (`yyyy-mm-dd`).
    Dates(DayOrder),
}

impl Transform {
    /// What the transform does to `column`, as a verb phrase: `scale ph by 10^-1`.
    pub fn phrase(&self, column: &str) -> String {
        match self {
            Transform::Value(Some(v)) => format!("set {column} to '{v}'"),
            Transform::Value(None) => format!("set {column} to missing"),
            Transform::Negate => format!("turn the sign of {column}"),
            Transform::Scale(p) => format!("scale {column} by 10^{p}"),
            Transform::Round(n) => format!("round {column} to {n} places"),
            Transform::Spaces => format!("tidy the spacing of {column}"),
            Transform::FinalStop => format!("drop a final full stop from {column}"),
            Transform::Case(c) => format!(
                "write {column} in {} case",
                match c {
                    LetterCase::Lower => "lower",
                    LetterCase::Upper => "upper",
                    LetterCase::Title => "title",
                }
            ),
            Transform::Replace { pattern, with } => {
                format!("replace /{pattern}/ by '{with}' in {column}")
            }
            Transform::Dates(DayOrder::DayMonthYear) => {
                format!("rewrite {column} from day-month-year to ISO 8601")
            }
            Transform::Dates(DayOrder::MonthDayYear) => {
                format!("rewrite {column} from month-day-year to ISO 8601")
            }
        }
    }
}

impl fmt::Display for Transform {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            Transform::Value(Some(v)) => write!(f, "to '{v}'"),
            Transform::Value(None) => write!(f, "to missing"),
            Transform::Negate => write!(f, "sign turned"),
            Transform::Scale(p) => write!(f, "times 10^{p}"),
            Transform::Round(n) => write!(f, "rounded to {n} places"),
            Transform::Spaces => write!(f, "spacing tidied"),
            Transform::FinalStop => write!(f, "final full stop dropped"),
            Transform::Case(c) => write!(
                f,
                "{} case",
                match c {
                    LetterCase::Lower => "lower",
                    LetterCase::Upper => "upper",
                    LetterCase::Title => "title",
                }
            ),
            Transform::Replace { pattern, with } => write!(f, "/{pattern}/ replaced by '{with}'"),
            Transform::Dates(DayOrder::DayMonthYear) => {
                write!(f, "day-month-year dates to ISO 8601")
            }
            Transform::Dates(DayOrder::MonthDayYear) => {
                write!(f, "month-day-year dates to ISO 8601")
            }
        }
    }
}
