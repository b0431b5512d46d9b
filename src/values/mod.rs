//! What a cell value is: a number, a date, a boolean, a missing token or text.
//!
//! One vocabulary for the whole crate. The profile classifies cells with it and the rules
//! checker tests declared types with it, so a column the profile calls boolean passes
//! `type = "boolean"`, a value it reads as a number is a number to every rule, and a date is
//! the same day everywhere. Pure functions over the text of one cell; nothing allocates.
//!
//! Settled here, where two copies used to disagree:
//! - `0` and `1` are numbers at cell level and booleans to a boolean rule; a column of only 0
//!   and 1 (both present) is typed boolean by the profile, so it passes `type = "boolean"`.
//! - `13/01/2024` is a date to both: a slash date that names one real day. `03/04/2024` is a
//!   date in form (the profile reports the column's day/month order as ambiguous) but names no
//!   single day, so a date rule asks for `yyyy-mm-dd`.
//! - Numbers never include `NaN`, `inf` or thousands separators, wherever they are read.

pub mod date;
pub mod formula;
pub mod number;
pub mod transform;

pub use date::{Date, DateForm, parse_date};
pub use formula::{FORMULA_LEADS, defuse_formula, looks_like_formula};
pub use number::{Decimal, Number, is_integer, number_value, parse_number};

/// Boolean words, compared ignoring ASCII case. `0`/`1` are numbers at cell level; a column
/// of only 0 and 1 (both present) is typed boolean by the profile, and [`parse_bool`] reads
/// them as booleans.
pub const BOOLEAN_WORDS: [&str; 6] = ["true", "false", "yes", "no", "y", "n"];

/// Tokens that common practice uses for "missing", compared ignoring ASCII case after
/// trimming. Source: tests/reference/missing_values.json, `string_tokens_common` and
/// pandas 3.1.1 `read_csv` default `na_values` (common practice and a library default; no
/// standard defines them).
pub const COMMON_MISSING_TOKENS: [&str; 19] = [
    "NA", "N/A", "NULL", "None", "NaN", "-NaN", "-", ".", "?", "missing", "unknown", "#N/A",
    "#N/A N/A", "#NA", "-1.#IND", "-1.#QNAN", "1.#IND", "1.#QNAN", "<NA>",
];

/// Whether the cell is one of the [`COMMON_MISSING_TOKENS`].
pub fn is_common_missing_token(text: &str) -> bool {
    let t = text.trim_ascii();
    COMMON_MISSING_TOKENS
        .iter()
        .any(|tok| tok.eq_ignore_ascii_case(t))
}

/// Reads a boolean: the [`BOOLEAN_WORDS`] in any letter case, or `1`/`0`.
///
/// ```
/// use emend::values::parse_bool;
/// assert_eq!(parse_bool("Yes"), Some(true));
/// assert_eq!(parse_bool("0"), Some(false));
/// assert_eq!(parse_bool("on"), None);
/// ```
pub fn parse_bool(text: &str) -> Option<bool> {
    let t = text.trim_ascii();
    match t {
        "1" => return Some(true),
        "0" => return Some(false),
        _ => {}
    }
    let at = BOOLEAN_WORDS
        .iter()
        .position(|w| w.eq_ignore_ascii_case(t))?;
    // The words come in true/false pairs.
    Some(at % 2 == 0)
}
