//! Rules that travel with the data: a TOML rules file, checked against a table row by row.
//!
//! Analysts know things the data cannot tell (pH lies in 0 to 14; a score must be blank when
//! the training was not completed). A rules file writes them down once, as structured data
//! with no formula language: per-column rules (`type`, `required`, `unique`, `levels`,
//! `pattern`, `hard` and `soft` bounds, `missing_codes`), per-table `[[conditions]]` written
//! as `when` / `then` clauses, and `[flags]` thresholds for untrustworthy columns. The file
//! shape is described in `docs/rules.md`.
//!
//! The flow is plain data in, plain data out: [`RuleSet::parse`] turns text into rules (or a
//! [`RuleError`] naming the line and key), [`Checker::new`] resolves them against a header,
//! [`Checker::push_row`] streams rows, and [`Checker::finish`] returns a [`CheckReport`].
//! Dirty data is a result, never an error; this module does no I/O.

mod checker;
mod condition;
mod error;
mod outcome;
mod rules;
mod value;

pub use checker::{Checker, TRACKED_VALUES};
pub use condition::{Condition, ConditionError, parse_condition};
pub use error::RuleError;
pub use outcome::{
    CheckReport, ColumnFlag, FlagKind, MAX_EXAMPLES, RuleOutcome, Severity, Violation,
};
pub use rules::RuleSet;
