//! Cells a spreadsheet would run as a formula when it opens an exported CSV, and the standard
//! defusing: a leading apostrophe, which spreadsheets read as "this cell is text".
//!
//! Source: OWASP, "CSV Injection" (community page; quoted from memory): a cell that begins
//! with `=`, `+`, `-`, `@`, tab (0x09) or carriage return (0x0D) may be evaluated as a
//! formula; prefixing it with a single quote keeps it text. A value that reads as a number
//! (`-3.2`, `+7`) is evaluated as that number, which is harmless, so it is left alone: the
//! number is read by [`crate::values::parse_number`], the one parser the crate has.

/// The characters that make a spreadsheet read a cell as a formula (OWASP "CSV Injection").
pub const FORMULA_LEADS: [char; 6] = ['=', '+', '-', '@', '\t', '\r'];

/// Whether a spreadsheet would run `cell` as a formula: it starts with one of
/// [`FORMULA_LEADS`] and is not a number.
///
/// ```
/// use emend::values::looks_like_formula;
/// assert!(looks_like_formula("=HYPERLINK(\"http://x\")"));
/// assert!(!looks_like_formula("-3.2"));
/// assert!(!looks_like_formula("Heron Pool"));
/// ```
pub fn looks_like_formula(cell: &str) -> bool {
    cell.starts_with(FORMULA_LEADS) && super::parse_number(cell).is_none()
}

/// `cell` with a leading apostrophe when it [`looks_like_formula`], else unchanged.
///
/// ```
/// use emend::values::defuse_formula;
/// assert_eq!(defuse_formula("@SUM(A1)"), "'@SUM(A1)");
/// assert_eq!(defuse_formula("-3.2"), "-3.2");
/// ```
pub fn defuse_formula(cell: &str) -> String {
    if looks_like_formula(cell) {
        format!("'{cell}")
    } else {
        cell.to_owned()
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn check(cell: &str, formula: bool) {
        assert_eq!(looks_like_formula(cell), formula, "{cell:?}");
        let defused = defuse_formula(cell);
        if formula {
            assert_eq!(defused, format!("'{cell}"));
        } else {
            assert_eq!(defused, cell);
        }
    }

    #[test]
    fn the_owasp_formula_leads_are_defused_and_numbers_are_not() {
        // Source: OWASP "CSV Injection" (from memory): =, +, -, @, tab and carriage return
        // lead a formula; the defusing is a leading single quote.
        check("=1+2", true);
        check("+1+2", true);
        check("-1+2", true);
        check("@SUM(A1:A9)", true);
        check("\t=1+2", true);
        check("\r=1+2", true);
        check("=HYPERLINK(\"http://example.org\",\"click\")", true);
        // Numbers (the project's parser) are values, not formulas.
        check("-3.2", false);
        check("+7", false);
        check("-0", false);
        check("1e3", false);
        // Text that only contains the characters later, or is empty.
        check("pH 7=ok", false);
        check("", false);
        check("Heron Pool", false);
        // A lone sign is not a number, so it counts.
        check("-", true);
    }
}
