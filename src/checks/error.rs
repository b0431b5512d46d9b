//! The one error of this module: a rules file that cannot be used, with the place to look.
//!
//! Dirty data is never a [`RuleError`]: it is a [`Violation`](super::Violation) in the report.
//! A `RuleError` means the rules themselves are wrong (bad TOML, an unknown key, a wrong type,
//! a regex that does not compile, inverted bounds) or do not fit the table (a column the
//! header lacks).

use std::fmt;

use serde::Serialize;

/// A rules file that cannot be parsed or does not fit the table.
///
/// `Display` reads `line L, key K: message` (or `line L: message` when no key applies), with
/// the key written as a dotted path such as `columns.ph.hard.min`.
#[derive(Clone, Debug, PartialEq, Eq, Serialize)]
pub struct RuleError {
    /// The 1-based line in the rules file.
    pub line: usize,
    /// The 1-based column (in characters) in that line.
    pub column: usize,
    /// The dotted path of the key involved, when there is one.
    pub key: Option<String>,
    /// What is wrong, lowercase, without a trailing period.
    pub message: String,
}

impl fmt::Display for RuleError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match &self.key {
            Some(key) => write!(f, "line {}, key {}: {}", self.line, key, self.message),
            None => write!(f, "line {}: {}", self.line, self.message),
        }
    }
}

impl std::error::Error for RuleError {}

/// A place in the rules file: 1-based line and column of a key or value.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Default)]
pub(crate) struct Pos {
    pub(crate) line: usize,
    pub(crate) column: usize,
}

impl Pos {
    /// The line and column of byte `offset` in `text`; an offset past the end (or inside a
    /// character) is clamped to the nearest character boundary before it.
    pub(crate) fn at(text: &str, offset: usize) -> Pos {
        let mut offset = offset.min(text.len());
        while !text.is_char_boundary(offset) {
            offset -= 1;
        }
        let before = &text[..offset];
        let line = before.matches('\n').count() + 1;
        let line_start = before.rfind('\n').map_or(0, |i| i + 1);
        let column = before[line_start..].chars().count() + 1;
        Pos { line, column }
    }

    /// An error at this place.
    pub(crate) fn error(self, key: Option<&str>, message: impl Into<String>) -> RuleError {
        RuleError {
            line: self.line,
            column: self.column,
            key: key.map(str::to_owned),
            message: message.into(),
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn check(text: &str, offset: usize, expected: (usize, usize)) {
        let pos = Pos::at(text, offset);
        assert_eq!(
            (pos.line, pos.column),
            expected,
            "offset {offset} in {text:?}"
        );
    }

    #[test]
    fn positions_are_one_based() {
        check("abc", 0, (1, 1));
        check("abc\ndef", 4, (2, 1));
        check("abc\ndef", 6, (2, 3));
        check("é = 1\nx", 3, (1, 3));
        check("ab", 99, (1, 3));
    }

    #[test]
    fn display_names_line_and_key() {
        let err =
            Pos { line: 3, column: 1 }.error(Some("columns.ph.hard"), "min 14 is above max 0");
        assert_eq!(
            err.to_string(),
            "line 3, key columns.ph.hard: min 14 is above max 0"
        );
        let err = Pos { line: 2, column: 5 }.error(None, "duplicate key");
        assert_eq!(err.to_string(), "line 2: duplicate key");
    }
}
