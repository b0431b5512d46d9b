//! Findings: what the profile thinks a person should look at, worst first, each with an
//! optional fix in structured form.
//!
//! A finding never applies anything. Its [`FixSuggestion`] is plain data that the CLI turns
//! into a command line (for example `emend recode samples site --from "mill craek" --to
//! "Mill Creek" --why "..."`); the person decides whether to run it.

use serde::{Deserialize, Serialize};

use super::levels::LevelGroup;
use super::stats::{Fences, MagnitudeError, OutsideValue, ZScore};
use super::types::{DateOrder, InferredType};
use super::variants::Respelling;

/// How much a finding matters; `High` sorts first.
#[derive(Clone, Copy, Debug, PartialEq, Eq, PartialOrd, Ord, Hash, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum Severity {
    /// Likely wrong values that distort statistics or contradict other data.
    High,
    /// Worth a look before the data is used.
    Medium,
    /// Informational.
    Low,
}

/// What kind of problem a finding reports. The order here breaks ties within a severity.
#[derive(Clone, Copy, Debug, PartialEq, Eq, PartialOrd, Ord, Hash, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum FindingKind {
    /// Two columns whose blanks follow a pattern, broken in a few rows.
    Contradiction,
    /// Values that look like codes for "missing" (sentinels such as -999, tokens such as N/A).
    SuspectedMissingCode,
    /// A value that fits the column when divided by a power of ten.
    MagnitudeError,
    /// Cells that break the column's inferred type.
    WriteIns,
    /// A few bare codes among written-out names.
    ShortCodes,
    /// Exact copies of another row.
    DuplicateRows,
    /// Rows whose every measurement is blank or missing.
    EmptyRows,
    /// One value spelled several ways.
    NearDuplicateLevels,
    /// Values with stray spacing or punctuation: leading, trailing or doubled spaces, a lone
    /// final full stop, a hyphen spaced on one side only.
    Whitespace,
    /// One word capitalised differently across levels.
    CaseVariants,
    /// Short function words capitalised throughout, as a program title-cases.
    TitleCase,
    /// One word written both abbreviated and in full across levels.
    WordForms,
    /// Values that stand in for "unknown" without being a listed missing token.
    Placeholder,
    /// More missing cells than the threshold allows.
    MostlyMissing,
    /// Values beyond the Tukey fences or with a large modified z-score.
    Outliers,
    /// Day/month order of slash dates is ambiguous or inconsistent.
    DateOrder,
    /// Every present cell holds one value.
    Constant,
    /// Almost every present cell holds one value.
    NearConstant,
}

/// Why a value is suspected to mean "missing".
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum MissingBasis {
    /// A repeated numeric sentinel far outside the other values (common practice).
    Sentinel,
    /// A common-practice token such as `N/A` or `-` (no standard defines these).
    CommonToken,
}

/// A value suspected to be a missing-value code.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct SuspectedMissing {
    /// The value as written (one entry per spelling).
    pub value: String,
    /// How many cells hold it.
    pub count: u64,
    /// Why it is suspected.
    pub basis: MissingBasis,
}

/// Cells of one value that break the column's type.
#[derive(Clone, Debug, PartialEq, Eq, Serialize, Deserialize)]
pub struct WriteIn {
    /// The value as written.
    pub value: String,
    /// How many cells hold it.
    pub count: u64,
    /// The first few 1-based row positions (data rows, header excluded) holding it.
    pub rows: Vec<u64>,
}

/// A magnitude error with the spellings of the value found in the column.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct MagnitudeFinding {
    /// The value, count, factor and scaled value.
    pub error: MagnitudeError,
    /// How the value is written in the column (may be several: `1200`, `1200.0`); empty when
    /// the value was past the level cap.
    pub written: Vec<String>,
}

/// The blank pattern two columns share.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum PairPattern {
    /// Filled together and blank together, except in a few rows where only one is filled.
    Paired,
    /// One is filled exactly where the other is blank, except in a few rows where both are.
    Alternative,
}

/// Counts of the four blank/filled combinations of two columns.
#[derive(Clone, Debug, PartialEq, Eq, Serialize, Deserialize)]
pub struct PairCounts {
    /// Rows where both are filled.
    pub both_filled: u64,
    /// Rows where both are blank or declared missing.
    pub both_blank: u64,
    /// Rows where the finding's column is blank and the other filled.
    pub only_other_filled: u64,
    /// Rows where the finding's column is filled and the other blank.
    pub only_this_filled: u64,
}

/// The figures behind a finding.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum FindingDetail {
    /// Blank-pattern contradiction between two columns.
    Contradiction {
        /// The other column.
        other: String,
        /// The pattern the rows mostly follow.
        pattern: PairPattern,
        /// The four counts.
        counts: PairCounts,
        /// Rows that break the pattern, as many as are known (first few, 1-based).
        rows: Vec<u64>,
    },
    /// Suspected missing-value codes.
    SuspectedMissing {
        /// The values.
        values: Vec<SuspectedMissing>,
    },
    /// Suspected magnitude errors of one column, one entry per value.
    Magnitudes {
        /// The values.
        values: Vec<MagnitudeFinding>,
    },
    /// Cells that break the inferred type.
    WriteIns {
        /// The type they break.
        expected: InferredType,
        /// All such cells, including ones past the level cap.
        cells: u64,
        /// The most frequent such values (at most the listing cap).
        values: Vec<WriteIn>,
    },
    /// A group of near-duplicate spellings.
    NearDuplicates(LevelGroup),
    /// Values and the clean spelling of each.
    Respellings {
        /// One entry per value.
        values: Vec<Respelling>,
    },
    /// Placeholder values and their share of present cells.
    Placeholders {
        /// The values, with counts.
        values: Vec<SuspectedMissing>,
        /// Their share of present cells, in [0, 1].
        share: f64,
    },
    /// A value of one column that almost always goes with one value of another, and the
    /// rows that break it.
    Dependency {
        /// The column conditioned on.
        determinant: String,
        /// Its value.
        value: String,
        /// The value the other column almost always holds then.
        expected: String,
        /// Rows with `value`.
        support: u64,
        /// The other values found instead.
        found: Vec<String>,
        /// The rows that break the pattern (1-based).
        rows: Vec<u64>,
    },
    /// Rows, by 1-based position.
    Rows {
        /// How many rows in all.
        count: u64,
        /// The first rows (for duplicates: the copies, each with the row it repeats).
        rows: Vec<u64>,
        /// For duplicates: the earlier row each listed copy repeats.
        originals: Vec<u64>,
    },
    /// Missing cells.
    Missing {
        /// Blank or declared-missing cells.
        missing: u64,
        /// All cells.
        cells: u64,
    },
    /// Values beyond the fences.
    Outliers {
        /// The fences used.
        fences: Fences,
        /// Distinct values beyond the inner fences (suspected sentinels left out).
        values: Vec<OutsideValue>,
        /// Distinct values with |M| > 3.5 (empty when MAD = 0).
        modified_z: Vec<ZScore>,
    },
    /// Day/month order of slash dates.
    DateOrder {
        /// What the dates allow.
        order: DateOrder,
        /// How many slash dates.
        cells: u64,
    },
    /// The value that fills (nearly) every present cell.
    Dominant {
        /// The value.
        value: String,
        /// Its share of present cells, in [0, 1].
        share: f64,
    },
}

/// A fix in structured form, for the CLI to turn into a command line.
#[derive(Clone, Debug, PartialEq, Eq, Serialize, Deserialize)]
#[serde(tag = "action", rename_all = "snake_case")]
pub enum FixSuggestion {
    /// Replace every cell equal to one of `from` with `to`.
    Recode {
        /// The column.
        column: String,
        /// The values to replace, as written.
        from: Vec<String>,
        /// The replacement.
        to: String,
    },
    /// Declare these values missing codes for the column.
    Missing {
        /// The column.
        column: String,
        /// The codes, as written.
        codes: Vec<String>,
    },
    /// Replace each value with its own replacement (one `recode` per pair).
    RecodeEach {
        /// The column.
        column: String,
        /// (from, to) pairs.
        pairs: Vec<(String, String)>,
    },
    /// Mark the column as not to be trusted in analysis.
    Distrust {
        /// The column.
        column: String,
    },
}

/// Something a person should look at.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct Finding {
    /// The column it is about (for contradictions, the first of the two).
    pub column: String,
    /// What kind of problem it is.
    pub kind: FindingKind,
    /// How much it matters.
    pub severity: Severity,
    /// One line for people, lowercase, no trailing period.
    pub message: String,
    /// The figures behind it.
    pub detail: FindingDetail,
    /// A fix to offer, only when the evidence makes it near-certain.
    pub suggestion: Option<FixSuggestion>,
    /// How sure the finding is, and why, in words a statistician would accept.
    #[serde(default)]
    pub evidence: String,
    /// The rows it points at, by position and (for a keyed table) key, as far as they are
    /// known: the first few of each value it names. Filled when a stored version is
    /// profiled; empty for a finding about whole values of a column.
    #[serde(default, skip_serializing_if = "Vec::is_empty")]
    pub rows: Vec<RowName>,
    /// Set when a recorded decision already answers the finding (a distrusted column).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub decided: Option<Decided>,
}

/// A row a finding points at.
#[derive(Clone, Debug, PartialEq, Eq, Serialize, Deserialize)]
pub struct RowName {
    /// 1-based position in the extract.
    pub row: u64,
    /// The row's key, for a keyed table.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub key: Option<String>,
}

impl std::fmt::Display for RowName {
    /// The key with the position after it (`S-00412 (#412)`), or the position alone (`#412`).
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        match &self.key {
            Some(k) => write!(f, "{k} (#{})", self.row),
            None => write!(f, "#{}", self.row),
        }
    }
}

/// A decision that answers a finding.
#[derive(Clone, Debug, PartialEq, Eq, Serialize, Deserialize)]
pub struct Decided {
    /// The commit that recorded it.
    pub seq: u64,
    /// What was decided, for people ("column distrusted").
    pub how: String,
}

/// Orders findings worst first: by severity, then kind; otherwise keeps the given order
/// (columns in table order).
pub fn sort_findings(findings: &mut [Finding]) {
    findings.sort_by_key(|f| (f.severity, f.kind));
}

#[cfg(test)]
mod tests {
    use super::*;

    fn finding(column: &str, kind: FindingKind, severity: Severity) -> Finding {
        Finding {
            column: column.to_owned(),
            kind,
            severity,
            message: String::new(),
            detail: FindingDetail::Missing {
                missing: 0,
                cells: 0,
            },
            suggestion: None,
            evidence: String::new(),
            rows: Vec::new(),
            decided: None,
        }
    }

    #[test]
    fn worst_first_then_table_order() {
        let mut findings = vec![
            finding("a", FindingKind::Constant, Severity::Low),
            finding("b", FindingKind::WriteIns, Severity::Medium),
            finding("c", FindingKind::MagnitudeError, Severity::High),
            finding("d", FindingKind::WriteIns, Severity::Medium),
            finding("e", FindingKind::Contradiction, Severity::High),
        ];
        sort_findings(&mut findings);
        let order: Vec<&str> = findings.iter().map(|f| f.column.as_str()).collect();
        assert_eq!(order, ["e", "c", "b", "d", "a"]);
    }

    #[test]
    fn suggestion_serializes_with_action_tag() {
        let fix = FixSuggestion::Recode {
            column: "site".into(),
            from: vec!["mill craek".into()],
            to: "Mill Creek".into(),
        };
        let json = serde_json::to_string(&fix).unwrap();
        assert_eq!(
            json,
            r#"{"action":"recode","column":"site","from":["mill craek"],"to":"Mill Creek"}"#
        );
    }
}
