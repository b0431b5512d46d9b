//! Streaming profile of one column: push cells one at a time, then `finish` once.
//!
//! `push` is the hot path (once per cell of million-row tables): a cell whose text was seen
//! before costs one hash lookup and no allocation, because its classification and number are
//! cached with its level. Only the `f64` of each number is kept (8 bytes a cell) for the
//! quantiles. Distinct levels are counted exactly up to `max_levels`; past that, new values
//! are still typed and counted, but not listed, and the distinct count reads "at least".

use std::collections::HashMap;

use serde::{Deserialize, Serialize};

use super::finding::{
    Finding, FindingDetail, FindingKind, FixSuggestion, MagnitudeFinding, MissingBasis, RowName,
    Severity, SuspectedMissing, WriteIn, sort_findings,
};
use super::levels::LevelGroup;
use super::stats::{Moments, NumericSummary, summarize};
use super::types::{CellKind, DateOrder, Family, InferredType, KindCounts, classify, infer_type};
use super::variants::{
    Respelling, abbreviation_respellings, case_respellings, codes_among_names, find_variants,
    respellings, title_case_respellings,
};

/// An identifier column with more levels than this is not searched for case variants.
const MAX_CASE_COMPARED_IDENTIFIERS: usize = 20_000;

/// How many row positions are kept per level, for listing write-ins.
const ROWS_KEPT: usize = 3;

/// Knobs for one column. `Default` gives the documented defaults.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct ProfileOptions {
    /// Cell values declared to mean "missing" for this column (compared after trimming);
    /// such cells count as declared missing and are left out of every statistic.
    pub declared_codes: Vec<String>,
    /// How many of the most frequent levels to report. Default 10.
    pub top_n: usize,
    /// The most distinct levels tracked exactly. Default 100,000.
    pub max_levels: usize,
    /// A column whose top level holds at least this share of present cells is
    /// near-constant. Default 0.99.
    pub near_constant_share: f64,
    /// A column with more than this share of missing cells is mostly missing. Default 0.5.
    pub mostly_missing_share: f64,
    /// Text with at most this many distinct levels (and at least two cells per level on
    /// average) is categorical. Default 50.
    pub categorical_max_levels: u64,
    /// The most values listed in one finding or list. Default 20.
    pub max_listed: usize,
    /// How often a sentinel such as -999 must occur to be suspected. Default 2.
    pub sentinel_min_count: u64,
}

impl Default for ProfileOptions {
    fn default() -> Self {
        ProfileOptions {
            declared_codes: Vec::new(),
            top_n: 10,
            max_levels: 100_000,
            near_constant_share: 0.99,
            mostly_missing_share: 0.5,
            categorical_max_levels: 50,
            max_listed: 20,
            sentinel_min_count: 2,
        }
    }
}

/// One level as tracked while streaming.
struct Level {
    count: u64,
    kind: CellKind,
    rows: [u64; ROWS_KEPT],
    /// Order of first appearance, for cross-column counts.
    id: u32,
}

/// Accumulates one column, cell by cell.
///
/// ```
/// use emend::profile::{ColumnProfiler, InferredType, ProfileOptions};
/// let mut p = ColumnProfiler::new("age", ProfileOptions::default());
/// for cell in ["34", "", "41", "n/a", "29"] {
///     p.push(Some(cell));
/// }
/// p.push(None);
/// let profile = p.finish();
/// assert_eq!(profile.inferred, InferredType::Integer);
/// assert_eq!((profile.counts.blank, profile.counts.declared_missing), (1, 1));
/// assert_eq!(profile.numeric.unwrap().quartiles.median, 34.0);
/// ```
pub struct ColumnProfiler {
    name: String,
    options: ProfileOptions,
    cells: u64,
    blank: u64,
    declared_missing: u64,
    present: u64,
    untracked: u64,
    kinds: KindCounts,
    levels: HashMap<Box<str>, Level>,
    values: Vec<f64>,
    moments: Moments,
}

/// Cell counts of a column.
#[derive(Clone, Debug, PartialEq, Eq, Serialize, Deserialize)]
pub struct Counts {
    /// Every cell pushed.
    pub cells: u64,
    /// Cells that are present: not blank and not declared missing.
    pub present: u64,
    /// Empty or whitespace-only cells.
    pub blank: u64,
    /// Cells set missing by a fix, or equal to a declared missing code.
    pub declared_missing: u64,
    /// Distinct present values (exact unless `distinct_capped`).
    pub distinct: u64,
    /// The level cap was reached: the column has at least `distinct` distinct values.
    pub distinct_capped: bool,
}

impl Counts {
    /// Blank plus declared missing.
    pub fn missing(&self) -> u64 {
        self.blank + self.declared_missing
    }
}

/// A frequent level.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct LevelFreq {
    /// The value as written.
    pub value: String,
    /// How many cells hold it.
    pub count: u64,
    /// Its share of present cells, in percent.
    pub percent: f64,
}

/// A reason to distrust a column.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum Flag {
    /// Every present cell holds one value.
    Constant,
    /// One value holds at least the near-constant share of present cells.
    NearConstant {
        /// Its share, in [0, 1].
        share: f64,
    },
    /// More cells are missing than the threshold allows.
    MostlyMissing {
        /// The missing share, in [0, 1].
        share: f64,
    },
    /// Another column's blanks contradict this one's in a few rows.
    Contradicted {
        /// The other column.
        other: String,
    },
}

/// A numeric value and the first rows holding it.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct ValueRows {
    /// The value.
    pub value: f64,
    /// How many cells hold it.
    pub count: u64,
    /// The first few rows holding it, over every spelling of the value (by 1-based position;
    /// a stored version's profile adds the keys).
    pub rows: Vec<RowName>,
}

/// Every figure of one column.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct ColumnProfile {
    /// The column name.
    pub name: String,
    /// The dominant type of its present cells.
    pub inferred: InferredType,
    /// Day/month order of slash dates, for date columns that have any.
    pub date_order: Option<DateOrder>,
    /// Cell counts.
    pub counts: Counts,
    /// How many present cells looked like each kind.
    pub kinds: KindCounts,
    /// The most frequent levels, most frequent first (ties by value).
    pub top_levels: Vec<LevelFreq>,
    /// Numeric figures, for integer and decimal columns.
    pub numeric: Option<NumericSummary>,
    /// Present cells that break the inferred type (missing tokens excluded), counted in
    /// full.
    pub write_in_cells: u64,
    /// The most frequent write-in values, with rows.
    pub write_ins: Vec<WriteIn>,
    /// Values that look like missing codes.
    pub suspected_missing: Vec<SuspectedMissing>,
    /// Spellings of one value, grouped.
    pub near_duplicates: Vec<LevelGroup>,
    /// Values with stray spacing or punctuation, and their clean form.
    #[serde(default)]
    pub spacing: Vec<Respelling>,
    /// Values with one word capitalised against the column's usual form.
    #[serde(default)]
    pub case_variants: Vec<Respelling>,
    /// Values title-cased by a program, with short function words in lower case.
    #[serde(default)]
    pub title_case: Vec<Respelling>,
    /// Values using the rare one of two forms of a word (abbreviated or in full).
    #[serde(default)]
    pub word_forms: Vec<Respelling>,
    /// Bare codes among written-out names, with rows.
    #[serde(default)]
    pub short_codes: Vec<WriteIn>,
    /// Each value beyond the inner fences with the first rows holding it (rows are known
    /// while the column's levels are tracked; past the level cap the list is empty).
    #[serde(default)]
    pub outside_rows: Vec<ValueRows>,
    /// Values that stand in for "unknown".
    #[serde(default)]
    pub placeholders: Vec<SuspectedMissing>,
    /// Reasons to distrust the column.
    pub flags: Vec<Flag>,
    /// This column's findings, worst first.
    pub findings: Vec<Finding>,
}

impl ColumnProfiler {
    /// Starts a column.
    pub fn new(name: impl Into<String>, options: ProfileOptions) -> ColumnProfiler {
        ColumnProfiler {
            name: name.into(),
            options,
            cells: 0,
            blank: 0,
            declared_missing: 0,
            present: 0,
            untracked: 0,
            kinds: KindCounts::default(),
            levels: HashMap::new(),
            values: Vec::new(),
            moments: Moments::default(),
        }
    }

    /// Adds the next cell: `None` for a cell declared missing by a fix, `Some("")` (or only
    /// whitespace) for a blank, otherwise the text. Rows are numbered by push order from 1.
    pub fn push(&mut self, value: Option<&str>) {
        self.push_cell(value);
    }

    /// The column's name.
    pub fn name(&self) -> &str {
        &self.name
    }

    /// The value a level id stands for (ids come from [`ColumnProfiler::push_level`]).
    pub(crate) fn level_names(&self) -> Vec<&str> {
        let mut names = vec![""; self.levels.len()];
        for (value, level) in &self.levels {
            names[level.id as usize] = value;
        }
        names
    }

    /// Adds a cell and tells whether it was present (neither blank nor declared missing).
    pub(crate) fn push_cell(&mut self, value: Option<&str>) -> bool {
        self.push_level(value).is_some()
    }

    /// Adds a cell; for a present cell, its level id (`u32::MAX` past the level cap).
    pub(crate) fn push_level(&mut self, value: Option<&str>) -> Option<u32> {
        self.cells += 1;
        let row = self.cells;
        let Some(text) = value else {
            self.declared_missing += 1;
            return None;
        };
        let trimmed = text.trim();
        if trimmed.is_empty() {
            self.blank += 1;
            return None;
        }
        if self
            .options
            .declared_codes
            .iter()
            .any(|c| c.trim() == trimmed)
        {
            self.declared_missing += 1;
            return None;
        }
        self.present += 1;
        let mut id = u32::MAX;
        let kind = if let Some(level) = self.levels.get_mut(text) {
            level.count += 1;
            if let Some(slot) = level.rows.get_mut((level.count - 1) as usize) {
                *slot = row;
            }
            id = level.id;
            level.kind
        } else {
            let kind = classify(text);
            if self.levels.len() < self.options.max_levels {
                let mut rows = [0; ROWS_KEPT];
                rows[0] = row;
                id = self.levels.len() as u32;
                let level = Level {
                    count: 1,
                    kind,
                    rows,
                    id,
                };
                self.levels.insert(text.into(), level);
            } else {
                self.untracked += 1;
            }
            kind
        };
        self.kinds.add(&kind);
        if let Some(number) = kind.number() {
            self.values.push(number.value);
            self.moments.push(number);
        }
        Some(id)
    }

    /// Computes every figure and the column's findings.
    pub fn finish(self) -> ColumnProfile {
        let ColumnProfiler {
            name,
            options,
            cells,
            blank,
            declared_missing,
            present,
            untracked,
            kinds,
            levels,
            mut values,
            moments,
        } = self;
        let counts = Counts {
            cells,
            present,
            blank,
            declared_missing,
            distinct: levels.len() as u64,
            distinct_capped: untracked > 0,
        };
        let (inferred, family) =
            infer_type(&kinds, counts.distinct, options.categorical_max_levels);
        let date_order = (inferred == InferredType::Date)
            .then(|| kinds.date_order())
            .flatten();

        let mut sorted: Vec<(&str, &Level)> = levels.iter().map(|(k, v)| (&**k, v)).collect();
        sorted.sort_unstable_by(|a, b| b.1.count.cmp(&a.1.count).then_with(|| a.0.cmp(b.0)));

        let percent = |count: u64| 100.0 * count as f64 / present.max(1) as f64;
        let top_levels = sorted
            .iter()
            .take(options.top_n)
            .map(|(value, level)| LevelFreq {
                value: (*value).to_owned(),
                count: level.count,
                percent: percent(level.count),
            })
            .collect();

        let zero_one = kinds.zero_one_coded();
        let (write_in_cells, write_ins) = match family {
            Some(f) if f != Family::Text => {
                let cells = present - kinds.missing_token - kinds.family_count(f);
                let listed = sorted
                    .iter()
                    .filter(|(_, level)| {
                        let of = Family::of(&level.kind, zero_one);
                        of.is_some() && of != Some(f)
                    })
                    .take(options.max_listed)
                    .map(|(value, level)| WriteIn {
                        value: (*value).to_owned(),
                        count: level.count,
                        rows: level.rows[..(level.count as usize).min(ROWS_KEPT)].to_vec(),
                    })
                    .collect();
                (cells, listed)
            }
            _ => (0, Vec::new()),
        };

        let numeric = if inferred.is_numeric() {
            summarize(
                &mut values,
                &moments,
                options.max_listed,
                options.sentinel_min_count,
            )
        } else {
            None
        };
        drop(values);

        // Spellings of a number as found among the levels, for fixes that name values.
        let written = |x: f64| -> Vec<String> {
            let mut out: Vec<String> = sorted
                .iter()
                .filter(|(_, level)| level.kind.number().is_some_and(|n| n.value == x))
                .map(|(value, _)| (*value).to_owned())
                .collect();
            out.sort();
            out
        };

        let mut suspected_missing = Vec::new();
        if let Some(summary) = &numeric {
            for sentinel in &summary.sentinels {
                let spellings = written(sentinel.value);
                if spellings.is_empty() {
                    // Past the level cap: the spelling was not kept, so show the number.
                    suspected_missing.push(SuspectedMissing {
                        value: fmt_num(sentinel.value),
                        count: sentinel.count,
                        basis: MissingBasis::Sentinel,
                    });
                }
                for value in spellings {
                    let count = levels[value.as_str()].count;
                    suspected_missing.push(SuspectedMissing {
                        value,
                        count,
                        basis: MissingBasis::Sentinel,
                    });
                }
            }
        }
        suspected_missing.extend(
            sorted
                .iter()
                .filter(|(_, level)| level.kind == CellKind::MissingToken)
                .take(options.max_listed)
                .map(|(value, level)| SuspectedMissing {
                    value: (*value).to_owned(),
                    count: level.count,
                    basis: MissingBasis::CommonToken,
                }),
        );

        // Every text level is compared (not only the most frequent): a singleton misspelling
        // among thousands of levels is exactly what an analyst needs found.
        let text_levels: Vec<(&str, u64)> = sorted
            .iter()
            .filter(|(_, level)| matches!(level.kind, CellKind::Text | CellKind::Boolean))
            .map(|(value, level)| (*value, level.count))
            .collect();
        // A column of identifiers (nearly every value once) has no spellings to compare.
        let identifiers = text_levels.len() as u64 * 2 > present;
        let near_duplicates = if identifiers {
            Vec::new()
        } else {
            find_variants(&text_levels)
        };
        let grouped: std::collections::HashSet<&str> = near_duplicates
            .iter()
            .flat_map(|g| g.members.iter().map(|m| m.value.as_str()))
            .collect();
        let ungrouped: Vec<(&str, u64)> = text_levels
            .iter()
            .copied()
            .filter(|(v, _)| !grouped.contains(v))
            .collect();
        let spacing = respellings(&ungrouped);
        let respelt: std::collections::HashSet<&str> =
            spacing.iter().map(|r| r.from.as_str()).collect();
        let unspaced: Vec<(&str, u64)> = ungrouped
            .iter()
            .copied()
            .filter(|(v, _)| !respelt.contains(v))
            .collect();
        // Word case is compared across the levels of a register of names too (airport names),
        // but not across a column of many thousands of identifiers, where it costs a split of
        // every level and finds nothing.
        let case_variants = if identifiers && text_levels.len() > MAX_CASE_COMPARED_IDENTIFIERS {
            Vec::new()
        } else {
            case_respellings(&unspaced)
        };
        let (title_case, word_forms) =
            if identifiers && text_levels.len() > MAX_CASE_COMPARED_IDENTIFIERS {
                (Vec::new(), Vec::new())
            } else {
                (
                    title_case_respellings(&unspaced),
                    abbreviation_respellings(&unspaced),
                )
            };
        let short_codes: Vec<WriteIn> = codes_among_names(&text_levels)
            .into_iter()
            .map(|value| {
                let level = &levels[value];
                WriteIn {
                    value: value.to_owned(),
                    count: level.count,
                    rows: level.rows[..(level.count as usize).min(ROWS_KEPT)].to_vec(),
                }
            })
            .collect();

        // A common missing token that is the most frequent of several word levels is a
        // category of the column ("None" meaning no damage), not a code for missing.
        let top_value = sorted.first().map(|(v, _)| *v);
        let word_levels = text_levels.len();
        suspected_missing.retain(|s| {
            !(s.basis == MissingBasis::CommonToken
                && top_value == Some(s.value.as_str())
                && word_levels >= 2)
        });

        // Placeholders: values that stand in for "unknown" without being a listed token.
        let all_short = !text_levels.is_empty()
            && text_levels
                .iter()
                .all(|(v, _)| v.trim().chars().count() <= 3);
        let placeholders: Vec<SuspectedMissing> = text_levels
            .iter()
            .filter(|(v, _)| is_placeholder(v, all_short))
            .map(|(v, count)| SuspectedMissing {
                value: (*v).to_owned(),
                count: *count,
                basis: MissingBasis::CommonToken,
            })
            .collect();

        // In a coded (categorical) column, a rare level written unlike the codes that fill the
        // column is most likely from another scheme or a write-in: a one- or two-character
        // code among words, a value at least twice as long as the longest usual code, or one
        // with a comma, question mark, semicolon or slash that no usual code has. The usual codes are the levels that each hold at least 5% of
        // present cells; a rare level holds at most 1%. (Our own rule, checked on the
        // labelled corpus; a bare rare level is often a real, rare category.)
        let (write_in_cells, write_ins) = if inferred == InferredType::Categorical
            && present >= 100
            && write_ins.is_empty()
            && sorted
                .first()
                .is_some_and(|(_, top)| top.count * 100 < present * 99)
        {
            let usual: Vec<&str> = sorted
                .iter()
                .filter(|(_, level)| level.count * 20 >= present)
                .map(|(v, _)| v.trim())
                .collect();
            let usual_cells: u64 = sorted
                .iter()
                .filter(|(_, level)| level.count * 20 >= present)
                .map(|(_, level)| level.count)
                .sum();
            let len = |v: &str| v.chars().count();
            let shortest = usual.iter().map(|v| len(v)).min().unwrap_or(0);
            let longest = usual.iter().map(|v| len(v)).max().unwrap_or(0);
            let unlike = |v: &str| {
                let v = v.trim();
                (len(v) <= 2 && shortest >= 4)
                    || len(v) >= 2 * longest.max(3)
                    || [',', '?', ';', '/']
                        .iter()
                        .any(|p| v.contains(*p) && !usual.iter().any(|u| u.contains(*p)))
            };
            let rare: Vec<WriteIn> = if usual_cells * 100 >= present * 90 {
                sorted
                    .iter()
                    .filter(|(value, level)| {
                        level.count * 100 <= present
                            && level.kind != CellKind::MissingToken
                            && !grouped.contains(*value)
                            && unlike(value)
                    })
                    .map(|(value, level)| WriteIn {
                        value: (*value).to_owned(),
                        count: level.count,
                        rows: level.rows[..(level.count as usize).min(ROWS_KEPT)].to_vec(),
                    })
                    .collect()
            } else {
                Vec::new()
            };
            let n: u64 = rare.iter().map(|w| w.count).sum();
            (n, rare.into_iter().take(options.max_listed).collect())
        } else {
            (write_in_cells, write_ins)
        };

        let mut flags = Vec::new();
        let missing_share = counts.missing() as f64 / cells.max(1) as f64;
        if cells > 0 && missing_share > options.mostly_missing_share {
            flags.push(Flag::MostlyMissing {
                share: missing_share,
            });
        }
        let top = sorted.first().map(|(value, level)| (*value, level.count));
        let mut dominant = None;
        if let Some((value, count)) = top.filter(|_| present >= 2 && !counts.distinct_capped) {
            let share = count as f64 / present as f64;
            if counts.distinct == 1 {
                flags.push(Flag::Constant);
                dominant = Some((value.to_owned(), share));
            } else if share >= options.near_constant_share {
                flags.push(Flag::NearConstant { share });
                dominant = Some((value.to_owned(), share));
            }
        }

        let magnitude: Vec<MagnitudeFinding> = numeric
            .iter()
            .flat_map(|s| {
                s.magnitude_errors
                    .iter()
                    .filter(|e| s.isolated.iter().any(|o| o.value == e.value))
            })
            .map(|e| MagnitudeFinding {
                error: *e,
                written: written(e.value),
            })
            .collect();

        let outside_rows: Vec<ValueRows> = numeric
            .iter()
            .flat_map(|s| s.outside.iter())
            .map(|o| {
                let mut rows: Vec<u64> = sorted
                    .iter()
                    .filter(|(_, level)| level.kind.number().is_some_and(|n| n.value == o.value))
                    .flat_map(|(_, level)| {
                        level.rows[..(level.count as usize).min(ROWS_KEPT)]
                            .iter()
                            .copied()
                    })
                    .collect();
                rows.sort_unstable();
                ValueRows {
                    value: o.value,
                    count: o.count,
                    rows: rows
                        .into_iter()
                        .map(|row| RowName { row, key: None })
                        .collect(),
                }
            })
            .collect();

        let mut profile = ColumnProfile {
            name,
            inferred,
            date_order,
            counts,
            kinds,
            top_levels,
            numeric,
            write_in_cells,
            write_ins,
            suspected_missing,
            near_duplicates,
            spacing,
            case_variants,
            title_case,
            word_forms,
            short_codes,
            outside_rows,
            placeholders,
            flags,
            findings: Vec::new(),
        };
        profile.findings = column_findings(&profile, dominant, &magnitude);
        profile
    }
}

/// Whether a value stands in for "unknown": it starts or ends with a word for unknown
/// ("Unknown bird - small", "ENGINE UNKN"), or is a phrase such as "not recorded". A lone `U`
/// counts only in a column of short codes. The phrases are common practice, from memory.
fn is_placeholder(value: &str, short_codes: bool) -> bool {
    const WORDS: [&str; 4] = ["unknown", "unkn", "unk", "unspecified"];
    const PHRASES: [&str; 9] = [
        "not recorded",
        "not known",
        "not stated",
        "not available",
        "not given",
        "none given",
        "no data",
        "tbd",
        "to be determined",
    ];
    let v = value.trim().to_lowercase();
    if short_codes && v == "u" {
        return true;
    }
    if PHRASES.contains(&v.as_str()) {
        return true;
    }
    let words: Vec<&str> = v
        .split(|c: char| !c.is_alphanumeric())
        .filter(|w| !w.is_empty())
        .collect();
    if words.len() < 2 {
        return false;
    }
    let first = words[0];
    let last = words[words.len() - 1];
    WORDS.contains(&first) || WORDS.contains(&last)
}

/// Formats a number the way it would be typed: shortest exact form, no exponent.
fn fmt_num(x: f64) -> String {
    // Round to 12 significant digits first, so float noise (1.7600000000000002) never reaches
    // a message or a suggested command.
    let rounded: f64 = format!("{x:.11e}").parse().unwrap_or(x);
    format!("{rounded}")
}

/// "1 cell", "3 cells".
fn cells(n: u64) -> String {
    if n == 1 {
        "1 cell".to_owned()
    } else {
        format!("{n} cells")
    }
}

/// Quotes and joins values for a message, at most `max` of them.
fn quote_list<'a>(values: impl Iterator<Item = &'a str>, max: usize) -> String {
    let mut out: Vec<String> = values.take(max + 1).map(|v| format!("{v:?}")).collect();
    if out.len() > max {
        out.truncate(max);
        out.push("...".to_owned());
    }
    out.join(", ")
}

fn column_findings(
    p: &ColumnProfile,
    dominant: Option<(String, f64)>,
    magnitude: &[MagnitudeFinding],
) -> Vec<Finding> {
    let column = || p.name.clone();
    let mut out = Vec::new();
    let mut add = |kind, severity, message: String, detail, suggestion, evidence: String| {
        out.push(Finding {
            column: p.name.clone(),
            kind,
            severity,
            message,
            detail,
            suggestion,
            evidence,
            rows: Vec::new(),
            decided: None,
        });
    };

    for flag in &p.flags {
        match flag {
            Flag::MostlyMissing { share } => add(
                FindingKind::MostlyMissing,
                if p.counts.present == 0 {
                    Severity::High
                } else {
                    Severity::Medium
                },
                format!(
                    "{:.0}% of cells are blank or declared missing ({} of {})",
                    share * 100.0,
                    p.counts.missing(),
                    p.counts.cells
                ),
                FindingDetail::Missing {
                    missing: p.counts.missing(),
                    cells: p.counts.cells,
                },
                // Only a column that is nearly empty is offered for distrust outright; at lower
                // shares the present values may be exactly what is needed.
                (*share >= 0.9).then(|| FixSuggestion::Distrust { column: column() }),
                "a count, exact".to_owned(),
            ),
            Flag::Constant | Flag::NearConstant { .. } => {
                let (value, share) = dominant.clone().expect("a constant flag has its value");
                let (kind, severity, message) = if *flag == Flag::Constant {
                    (
                        FindingKind::Constant,
                        Severity::Medium,
                        format!("every present cell is {value:?}"),
                    )
                } else {
                    (
                        FindingKind::NearConstant,
                        Severity::Low,
                        format!("{:.1}% of present cells are {value:?}", share * 100.0),
                    )
                };
                add(
                    kind,
                    severity,
                    message,
                    FindingDetail::Dominant { value, share },
                    None,
                    "a count, exact; whether the column carries information is for the people who know how it was filled".to_owned(),
                );
            }
            Flag::Contradicted { .. } => {}
        }
    }

    for (basis, severity, why) in [
        (
            MissingBasis::Sentinel,
            Severity::High,
            "repeated sentinel far outside the other values",
        ),
        (
            MissingBasis::CommonToken,
            Severity::Medium,
            "common-practice missing token",
        ),
    ] {
        let values: Vec<SuspectedMissing> = p
            .suspected_missing
            .iter()
            .filter(|s| s.basis == basis)
            .cloned()
            .collect();
        if values.is_empty() {
            continue;
        }
        let n_cells: u64 = values.iter().map(|v| v.count).sum();
        let codes: Vec<String> = values.iter().map(|v| v.value.clone()).collect();
        add(
            FindingKind::SuspectedMissingCode,
            severity,
            format!(
                "{} may mean missing ({why}; {})",
                quote_list(codes.iter().map(String::as_str), 5),
                cells(n_cells)
            ),
            FindingDetail::SuspectedMissing { values },
            Some(FixSuggestion::Missing {
                column: column(),
                codes,
            }),
            match basis {
                MissingBasis::Sentinel => "a listed sentinel (-9, -99, -999, -9999 and their positives; common practice) repeated and beyond Tukey's outer fence of the other values".to_owned(),
                MissingBasis::CommonToken => "a common-practice missing token that is not the column's usual value".to_owned(),
            },
        );
    }

    if !p.placeholders.is_empty() {
        let n: u64 = p.placeholders.iter().map(|v| v.count).sum();
        let share = n as f64 / p.counts.present.max(1) as f64;
        let values: Vec<&str> = p.placeholders.iter().map(|v| v.value.as_str()).collect();
        let (severity, tail) = if share >= 0.5 {
            (
                Severity::Medium,
                ": most of the column says nothing known, so it cannot be trusted for analysis by value",
            )
        } else {
            (Severity::Low, "")
        };
        add(
            FindingKind::Placeholder,
            severity,
            format!(
                "{} stand for an unknown value ({}, {:.0}% of present cells){tail}",
                quote_list(values.into_iter(), 5),
                cells(n),
                share * 100.0
            ),
            FindingDetail::Placeholders {
                values: p.placeholders.clone(),
                share,
            },
            None,
            "the value begins or ends with a word for unknown, or is a phrase for not recorded; they may still carry information (a size class), so nothing is offered".to_owned(),
        );
    }

    if !magnitude.is_empty() {
        // One finding per column, however many values: a column with a slipped decimal in
        // many places is one problem to look into.
        let n: u64 = magnitude.iter().map(|m| m.error.count).sum();
        let mut listed: Vec<String> = magnitude
            .iter()
            .take(5)
            .map(|m| {
                let e = &m.error;
                format!(
                    "{} may be {} (×{})",
                    fmt_num(e.value),
                    fmt_num(e.scaled),
                    e.factor
                )
            })
            .collect();
        if magnitude.len() > 5 {
            listed.push(format!("and {} more values", magnitude.len() - 5));
        }
        add(
            FindingKind::MagnitudeError,
            Severity::Medium,
            format!(
                "{} may be off by a power of ten: {}",
                cells(n),
                listed.join(", ")
            ),
            FindingDetail::Magnitudes {
                values: magnitude.to_vec(),
            },
            None,
            "far out and cut off from the rest, and inside the fences when divided by a power of ten; check the source before changing it".to_owned(),
        );
    }

    if p.write_in_cells > 0 {
        let type_name = match p.inferred {
            InferredType::Integer => "integers",
            InferredType::Decimal => "numbers",
            InferredType::Date => "dates",
            InferredType::Boolean => "booleans",
            InferredType::Categorical => "written like the usual codes",
            _ => "the column type",
        };
        add(
            FindingKind::WriteIns,
            Severity::Medium,
            format!(
                "{} not {type_name}: {}",
                cells(p.write_in_cells),
                quote_list(p.write_ins.iter().map(|w| w.value.as_str()), 5)
            ),
            FindingDetail::WriteIns {
                expected: p.inferred,
                cells: p.write_in_cells,
                values: p.write_ins.clone(),
            },
            None,
            "cells that do not read as the type that fills the column".to_owned(),
        );
    }

    if !p.short_codes.is_empty() {
        let n: u64 = p.short_codes.iter().map(|w| w.count).sum();
        add(
            FindingKind::ShortCodes,
            Severity::Medium,
            format!(
                "{} written as a bare code among written-out names: {}",
                cells(n),
                quote_list(p.short_codes.iter().map(|w| w.value.as_str()), 5)
            ),
            FindingDetail::WriteIns {
                expected: p.inferred,
                cells: n,
                values: p.short_codes.clone(),
            },
            None,
            "at least 20 levels are written-out names filling nine in ten cells, and these are a few bare codes (no lower-case letter, at most four characters); they may be another scheme's value for one of the names".to_owned(),
        );
    }

    for group in &p.near_duplicates {
        let from: Vec<String> = group.variants().map(|m| m.value.clone()).collect();
        let certain = group.basis.certain();
        add(
            FindingKind::NearDuplicateLevels,
            if certain {
                Severity::Medium
            } else {
                Severity::Low
            },
            format!(
                "{} and {:?} {}{}",
                quote_list(from.iter().map(String::as_str), 5),
                group.canonical,
                group.basis.phrase(),
                if certain {
                    ""
                } else {
                    ": check before merging"
                }
            ),
            FindingDetail::NearDuplicates(group.clone()),
            certain.then(|| FixSuggestion::Recode {
                column: column(),
                from,
                to: group.canonical.clone(),
            }),
            if certain {
                "the spellings are equal once case, accents, punctuation and spacing are set aside (or one is a rare copy with a lost space); the most frequent spelling is kept".to_owned()
            } else {
                "similar spellings, but not equal under the folding key; they may name different things".to_owned()
            },
        );
    }

    // Respellings: spacing and case are certain (a ready recode of each value); title-casing
    // and word forms are for review.
    for (kind, list, ready, what, why) in [
        (
            FindingKind::Whitespace,
            &p.spacing,
            true,
            "stray spacing or punctuation",
            "the text is the same once spaces are collapsed, a lone final stop is dropped (the value without it is also present) and a hyphen is spaced on both sides",
        ),
        (
            FindingKind::CaseVariants,
            &p.case_variants,
            true,
            "a word capitalised against the column's usual form",
            "at least four in five of the values that use the word write it this way",
        ),
        (
            FindingKind::TitleCase,
            &p.title_case,
            false,
            "short function words capitalised, as a program title-cases",
            "nearly every many-word value capitalises every word and none writes a short function word in lower case: the mark of text title-cased by a program; headline style lower-cases them, but an official name may differ (hyphens, other languages), so check before recoding",
        ),
        (
            FindingKind::WordForms,
            &p.word_forms,
            false,
            "a word abbreviated where the column writes it in full, or the other way",
            "at least four in five of the values that use the word write it the other way; \"St\" may also be \"Street\", so check before recoding",
        ),
    ] {
        if list.is_empty() {
            continue;
        }
        let n: u64 = list.iter().map(|r| r.count).sum();
        add(
            kind,
            if ready {
                Severity::Medium
            } else {
                Severity::Low
            },
            format!(
                "{} with {what}: {}",
                cells(n),
                quote_list(list.iter().map(|r| r.from.as_str()), 5)
            ),
            FindingDetail::Respellings {
                values: list.clone(),
            },
            ready.then(|| FixSuggestion::RecodeEach {
                column: column(),
                pairs: list
                    .iter()
                    .map(|r| (r.from.clone(), r.to.clone()))
                    .collect(),
            }),
            why.to_owned(),
        );
    }

    if let Some(s) = &p.numeric {
        let sentinels: Vec<f64> = s.sentinels.iter().map(|v| v.value).collect();
        let magnitudes: Vec<f64> = magnitude.iter().map(|m| m.error.value).collect();
        let values: Vec<_> = s
            .isolated
            .iter()
            .filter(|o| !sentinels.contains(&o.value) && !magnitudes.contains(&o.value))
            .copied()
            .collect();
        if !values.is_empty() {
            let modified_z: Vec<_> = s
                .modified_z_flagged
                .iter()
                .filter(|z| values.iter().any(|o| o.value == z.value))
                .copied()
                .collect();
            let n_cells: u64 = values.iter().map(|o| o.count).sum();
            add(
                FindingKind::Outliers,
                Severity::Medium,
                format!(
                    "{} far out and cut off from the rest: {} ({} outside the fences [{}, {}], 1.5 times the quartile spread beyond the quartiles; {} more than 3.5 robust deviations from the median)",
                    cells(n_cells),
                    quote_list(values.iter().map(|o| fmt_num(o.value)).collect::<Vec<_>>().iter().map(String::as_str), 5),
                    cells(s.beyond_inner),
                    fmt_num(s.fences.lower_inner),
                    fmt_num(s.fences.upper_inner),
                    cells(s.modified_z_cells)
                ),
                FindingDetail::Outliers {
                    fences: s.fences,
                    values,
                    modified_z,
                },
                None,
                "beyond Tukey's outer fence and separated from every other value by a gap wider than 3 IQR; a long real tail has no such gap".to_owned(),
            );
        }
    }

    if let Some(order) = p.date_order {
        let message = match order {
            DateOrder::Ambiguous => Some((Severity::Low, "day/month order ambiguous")),
            DateOrder::Inconsistent => Some((
                Severity::Medium,
                "some dates read only day-first and others only month-first",
            )),
            DateOrder::DayMonthYear | DateOrder::MonthDayYear => None,
        };
        if let Some((severity, message)) = message {
            add(
                FindingKind::DateOrder,
                severity,
                message.to_owned(),
                FindingDetail::DateOrder {
                    order,
                    cells: p.kinds.date_slash,
                },
                None,
                "slash dates counted by which readings name a real day".to_owned(),
            );
        }
    }

    sort_findings(&mut out);
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    fn profile(cells: &[Option<&str>], options: ProfileOptions) -> ColumnProfile {
        let mut p = ColumnProfiler::new("col", options);
        for cell in cells {
            p.push(*cell);
        }
        p.finish()
    }

    fn of(cells: &[&str]) -> ColumnProfile {
        profile(
            &cells.iter().map(|c| Some(*c)).collect::<Vec<_>>(),
            ProfileOptions::default(),
        )
    }

    fn kinds(p: &ColumnProfile) -> Vec<FindingKind> {
        p.findings.iter().map(|f| f.kind).collect()
    }

    fn check_type(cells: &[&str], expected: InferredType) {
        assert_eq!(of(cells).inferred, expected, "{cells:?}");
    }

    #[test]
    fn types() {
        check_type(&["1", "2", "3"], InferredType::Integer);
        check_type(&["1", "2.5", "3"], InferredType::Decimal);
        check_type(&["2024-01-02", "2024-03-04", "x"], InferredType::Date);
        check_type(&["yes", "No", "YES", "n"], InferredType::Boolean);
        check_type(&["0", "1", "1", "0"], InferredType::Boolean);
        check_type(&["0", "1", "yes", "no"], InferredType::Boolean);
        check_type(&["a", "b", "a", "b", "a"], InferredType::Categorical);
        check_type(&["the cat", "a dog", "some bird"], InferredType::Text);
        check_type(&[], InferredType::Empty);
        check_type(&["N/A", "-"], InferredType::Empty);
    }

    #[test]
    fn counts_and_missing() {
        let options = ProfileOptions {
            declared_codes: vec!["-99".to_owned()],
            ..ProfileOptions::default()
        };
        let p = profile(
            &[
                Some("5"),
                Some(""),
                Some("  "),
                None,
                Some("-99"),
                Some("7"),
                Some("5"),
            ],
            options,
        );
        let c = &p.counts;
        assert_eq!(
            (c.cells, c.present, c.blank, c.declared_missing, c.distinct),
            (7, 3, 2, 2, 2)
        );
        // Declared codes are out of the statistics.
        let n = p.numeric.unwrap();
        assert_eq!((n.n, n.quartiles.min, n.quartiles.max), (3, 5.0, 7.0));
        assert_eq!(p.top_levels[0].value, "5");
        assert!((p.top_levels[0].percent - 200.0 / 3.0).abs() < 1e-12);
    }

    #[test]
    fn write_ins_list_values_and_rows() {
        let p = of(&["12", "15", "about 20", "11", "see notes", "about 20", "14"]);
        assert_eq!(p.inferred, InferredType::Integer);
        assert_eq!(p.write_in_cells, 3);
        assert_eq!(
            p.write_ins,
            vec![
                WriteIn {
                    value: "about 20".into(),
                    count: 2,
                    rows: vec![3, 6]
                },
                WriteIn {
                    value: "see notes".into(),
                    count: 1,
                    rows: vec![5]
                },
            ]
        );
        assert!(kinds(&p).contains(&FindingKind::WriteIns));
        assert_eq!(p.numeric.unwrap().n, 4);
    }

    #[test]
    fn missing_tokens_are_not_write_ins() {
        let p = of(&["3", "4", "N/A", "5", "n/a", "6"]);
        assert_eq!(p.write_in_cells, 0);
        let tokens: Vec<(&str, u64)> = p
            .suspected_missing
            .iter()
            .map(|s| (s.value.as_str(), s.count))
            .collect();
        assert_eq!(tokens, [("N/A", 1), ("n/a", 1)]);
        let f = &p.findings[0];
        assert_eq!(
            (f.kind, f.severity),
            (FindingKind::SuspectedMissingCode, Severity::Medium)
        );
        assert_eq!(
            f.suggestion,
            Some(FixSuggestion::Missing {
                column: "col".into(),
                codes: vec!["N/A".into(), "n/a".into()]
            })
        );
    }

    #[test]
    fn sentinel_codes_come_first() {
        let p = of(&["34", "-999", "41", "29", "-999", "52", "38", "-999.0", "45"]);
        let codes: Vec<(&str, u64)> = p
            .suspected_missing
            .iter()
            .map(|s| (s.value.as_str(), s.count))
            .collect();
        assert_eq!(codes, [("-999", 2), ("-999.0", 1)]);
        let f = &p.findings[0];
        assert_eq!(
            (f.kind, f.severity),
            (FindingKind::SuspectedMissingCode, Severity::High)
        );
        // The sentinel is not also reported as an outlier or a magnitude error.
        assert!(!kinds(&p).contains(&FindingKind::MagnitudeError));
        assert!(!kinds(&p).contains(&FindingKind::Outliers));
    }

    #[test]
    fn magnitude_error_is_named_but_not_fixed() {
        let p = of(&["61", "64.5", "70", "72", "6800", "75", "80", "66"]);
        let f = p
            .findings
            .iter()
            .find(|f| f.kind == FindingKind::MagnitudeError)
            .expect("a magnitude finding");
        // A shifted decimal point is one reading; a keying slip is another. The source decides.
        assert_eq!(f.suggestion, None);
        assert_eq!(
            f.message,
            "1 cell may be off by a power of ten: 6800 may be 68 (×100)"
        );
    }

    #[test]
    fn magnitude_errors_of_one_column_are_one_finding() {
        let mut cells = vec![
            "7.2", "7.4", "7.1", "7.3", "7.5", "7.0", "7.6", "7.2", "7.3", "7.4",
        ];
        cells.extend(["72", "740"]);
        let p = of(&cells);
        let found: Vec<&Finding> = p
            .findings
            .iter()
            .filter(|f| f.kind == FindingKind::MagnitudeError)
            .collect();
        assert_eq!(found.len(), 1, "{:#?}", p.findings);
        let FindingDetail::Magnitudes { values } = &found[0].detail else {
            panic!("{:?}", found[0].detail)
        };
        assert_eq!(values.len(), 2);
    }

    #[test]
    fn near_duplicates_suggest_the_common_spelling_only_when_certain() {
        let mut cells = vec!["Mill Creek"; 200];
        cells.extend(vec!["Oak Flat"; 60]);
        cells.extend(vec!["Fox Run"; 50]);
        cells.extend(["mill craek", "MILL CREEK", "MILL CREEK"]);
        let p = of(&cells);
        assert_eq!(p.inferred, InferredType::Categorical);
        let groups: Vec<&Finding> = p
            .findings
            .iter()
            .filter(|f| f.kind == FindingKind::NearDuplicateLevels)
            .collect();
        assert_eq!(groups.len(), 2, "{groups:#?}");
        // Case only: a ready recode.
        assert_eq!(
            groups[0].suggestion,
            Some(FixSuggestion::Recode {
                column: "col".into(),
                from: vec!["MILL CREEK".into()],
                to: "Mill Creek".into()
            })
        );
        // A misspelt word: named for review, no command.
        assert_eq!(groups[1].suggestion, None);
        assert!(
            groups[1].message.contains("mill craek"),
            "{}",
            groups[1].message
        );
    }

    #[test]
    fn flags() {
        let constant = of(&["x", "x", "x"]);
        assert_eq!(constant.flags, [Flag::Constant]);
        assert_eq!(kinds(&constant), [FindingKind::Constant]);

        let mut cells = vec!["a"; 199];
        cells.push("b");
        let near = of(&cells);
        assert_eq!(near.flags, [Flag::NearConstant { share: 0.995 }]);
        let strict = profile(
            &cells.iter().map(|c| Some(*c)).collect::<Vec<_>>(),
            ProfileOptions {
                near_constant_share: 0.999,
                ..ProfileOptions::default()
            },
        );
        assert!(strict.flags.is_empty());

        let sparse = of(&["1", "", "", "2", ""]);
        assert_eq!(sparse.flags, [Flag::MostlyMissing { share: 0.6 }]);
        let half = of(&["1", "", "2", ""]);
        assert!(half.flags.is_empty(), "exactly half is not mostly");
        let empty = profile(&[None, None], ProfileOptions::default());
        assert_eq!(empty.findings[0].severity, Severity::High);
    }

    #[test]
    fn date_order_findings() {
        let ambiguous = of(&["01/02/2024", "03/04/2024", "05/06/2024"]);
        assert_eq!(ambiguous.date_order, Some(DateOrder::Ambiguous));
        assert_eq!(ambiguous.findings[0].message, "day/month order ambiguous");
        let dmy = of(&["25/02/2024", "03/04/2024"]);
        assert_eq!(dmy.date_order, Some(DateOrder::DayMonthYear));
        assert!(dmy.findings.is_empty());
        let mixed = of(&["25/02/2024", "02/25/2024"]);
        assert_eq!(mixed.date_order, Some(DateOrder::Inconsistent));
    }

    #[test]
    fn level_cap_counts_but_does_not_list() {
        let options = ProfileOptions {
            max_levels: 3,
            ..ProfileOptions::default()
        };
        let cells: Vec<String> = (0..10).map(|i| i.to_string()).collect();
        let p = profile(
            &cells.iter().map(|c| Some(c.as_str())).collect::<Vec<_>>(),
            options,
        );
        assert_eq!((p.counts.distinct, p.counts.distinct_capped), (3, true));
        // Every number still counts towards the statistics.
        assert_eq!(p.numeric.unwrap().n, 10);
    }

    #[test]
    fn strd_through_the_profiler() {
        // Source: NIST StRD univariate, NumAcc4 certified mean 10000000.2 and s = 0.1
        // (tests/reference/strd_univariate.json); the cells go through push() as text.
        let text = crate::testdata::reference_text("strd/NumAcc4.dat");
        let mut p = ColumnProfiler::new("y", ProfileOptions::default());
        for line in text.lines().skip(60) {
            p.push(Some(line.trim()));
        }
        let n = p.finish().numeric.unwrap();
        assert_eq!(n.mean, 10000000.2);
        assert!((n.std_dev.unwrap() - 0.1).abs() <= 0.1 * 1e-14);
    }
}
