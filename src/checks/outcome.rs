//! What a check finds: plain data, serialisable for `--json`, with no formatting for people.
//!
//! Every rule of the rules file gets a [`RuleOutcome`], also when it found nothing, so a
//! report shows what was checked as well as what failed. Counts are exact; examples are
//! capped at [`MAX_EXAMPLES`] per rule to keep memory bounded on large tables.

use serde::Serialize;

/// The most example violations kept per rule; counts stay exact past it.
pub const MAX_EXAMPLES: usize = 100;

/// How bad breaking a rule is.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash, Serialize)]
#[serde(rename_all = "lowercase")]
pub enum Severity {
    /// The value is impossible or breaks a stated rule; `check` exits 1.
    Error,
    /// The value is implausible and worth a look; `check` still exits 0.
    Warning,
}

/// One cell (or row) that breaks one rule.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct Violation {
    /// The row's 1-based position in the table, as given to
    /// [`Checker::push_row`](super::Checker::push_row).
    pub pos: u64,
    /// The row as the caller names it (its key, or its position).
    pub row: String,
    /// The column of the offending cell, when the rule is about one.
    pub column: Option<String>,
    /// The offending cell as written (untrimmed); `None` when the cell is absent.
    pub value: Option<String>,
    /// For `unique`: the position of the first row holding the same value.
    pub other_pos: Option<u64>,
    /// What is wrong, lowercase, one line.
    pub message: String,
}

/// The result of one rule over the whole table.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct RuleOutcome {
    /// A stable id: `COLUMN.KIND` (`ph.hard`, `site.levels`) for column rules, the given `id`
    /// or `when#N` (N the 1-based place among the `[[conditions]]`) for conditions.
    pub id: String,
    /// What the rule asks, lowercase, one line.
    pub description: String,
    /// Whether breaking it is an error or a warning.
    pub severity: Severity,
    /// The 1-based line of the rule in the rules file.
    pub line: usize,
    /// How many rows break it (exact).
    pub violations: u64,
    /// The first violations, at most [`MAX_EXAMPLES`], in row order.
    pub examples: Vec<Violation>,
}

/// Why a column looks untrustworthy.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum FlagKind {
    /// More than the threshold share of its cells is missing.
    MostlyMissing,
    /// One value fills at least the threshold share of its present cells.
    NearConstant,
}

/// A column flagged by a `[flags]` threshold. Flags are warnings: they never fail a check.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct ColumnFlag {
    /// The column.
    pub column: String,
    /// Which flag.
    pub kind: FlagKind,
    /// The measured share, in [0, 1]: missing cells over rows, or the top value's cells
    /// over present cells.
    pub share: f64,
    /// The threshold from the rules file.
    pub threshold: f64,
    /// The 1-based line of the threshold in the rules file.
    pub line: usize,
    /// For `near_constant`: the value that fills the column.
    pub value: Option<String>,
    /// Whether `share` is exact. A column with very many distinct values is counted
    /// approximately, and `share` is then a lower bound.
    pub exact: bool,
}

/// Everything a check found.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct CheckReport {
    /// How many rows were checked.
    pub n_rows: u64,
    /// One outcome per rule, in rules-file order.
    pub rules: Vec<RuleOutcome>,
    /// Flagged columns, in header order.
    pub flags: Vec<ColumnFlag>,
}

impl CheckReport {
    /// Whether no error-level rule was broken (warnings and flags do not count).
    pub fn passed(&self) -> bool {
        self.count(Severity::Error) == 0
    }

    /// How many violations rules of `severity` found, summed over rules.
    pub fn count(&self, severity: Severity) -> u64 {
        self.rules
            .iter()
            .filter(|rule| rule.severity == severity)
            .map(|rule| rule.violations)
            .sum()
    }
}
