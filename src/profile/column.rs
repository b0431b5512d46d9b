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
    Finding, FindingDetail, FindingKind, FixSuggestion, MagnitudeFinding, MissingBasis, Severity,
    SuspectedMissing, WriteIn, sort_findings,
};
use super::levels::{LevelGroup, near_duplicate_groups};
use super::stats::{Moments, NumericSummary, summarize};
use super::types::{CellKind, DateOrder, Family, InferredType, KindCounts, classify, infer_type};

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
    /// How many of the most frequent text levels are compared for near-duplicates.
    /// Default 300.
    pub max_compared_levels: usize,
    /// Jaro–Winkler similarity at which long spellings may group. Default 0.92.
    pub jaro_winkler_threshold: f64,
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
            max_compared_levels: 300,
            jaro_winkler_threshold: 0.92,
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

    /// Adds a cell and tells whether it was present (neither blank nor declared missing).
    pub(crate) fn push_cell(&mut self, value: Option<&str>) -> bool {
        self.cells += 1;
        let row = self.cells;
        let Some(text) = value else {
            self.declared_missing += 1;
            return false;
        };
        let trimmed = text.trim();
        if trimmed.is_empty() {
            self.blank += 1;
            return false;
        }
        if self
            .options
            .declared_codes
            .iter()
            .any(|c| c.trim() == trimmed)
        {
            self.declared_missing += 1;
            return false;
        }
        self.present += 1;
        let kind = if let Some(level) = self.levels.get_mut(text) {
            level.count += 1;
            if let Some(slot) = level.rows.get_mut((level.count - 1) as usize) {
                *slot = row;
            }
            level.kind
        } else {
            let kind = classify(text);
            if self.levels.len() < self.options.max_levels {
                let mut rows = [0; ROWS_KEPT];
                rows[0] = row;
                let level = Level {
                    count: 1,
                    kind,
                    rows,
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
        true
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

        let text_levels: Vec<(&str, u64)> = sorted
            .iter()
            .filter(|(_, level)| matches!(level.kind, CellKind::Text | CellKind::Boolean))
            .take(options.max_compared_levels)
            .map(|(value, level)| (*value, level.count))
            .collect();
        let near_duplicates = near_duplicate_groups(&text_levels, options.jaro_winkler_threshold);

        // In a coded (categorical) column, a level far rarer than the others is most likely a
        // free-text write-in: at most 0.5% of present cells and at most a twentieth of the
        // most frequent level. Spellings already grouped as near-duplicates are left to that
        // finding. (Thresholds are our own choice, not from a published source.)
        let (write_in_cells, write_ins) =
            if inferred == InferredType::Categorical && present >= 100 && write_ins.is_empty() {
                let top_count = sorted.first().map(|(_, l)| l.count).unwrap_or(0);
                let grouped = |v: &str| {
                    near_duplicates
                        .iter()
                        .any(|g| g.members.iter().any(|m| m.value == v))
                };
                let rare: Vec<WriteIn> = sorted
                    .iter()
                    .filter(|(value, level)| {
                        level.count * 200 <= present
                            && level.count * 20 <= top_count
                            && level.kind != CellKind::MissingToken
                            && !grouped(value)
                    })
                    .map(|(value, level)| WriteIn {
                        value: (*value).to_owned(),
                        count: level.count,
                        rows: level.rows[..(level.count as usize).min(ROWS_KEPT)].to_vec(),
                    })
                    .collect();
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
            .flat_map(|s| &s.magnitude_errors)
            .map(|e| MagnitudeFinding {
                error: *e,
                written: written(e.value),
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
            flags,
            findings: Vec::new(),
        };
        profile.findings = column_findings(&profile, dominant, &magnitude);
        profile
    }
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
    let mut add = |kind, severity, message: String, detail, suggestion| {
        out.push(Finding {
            column: p.name.clone(),
            kind,
            severity,
            message,
            detail,
            suggestion,
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
                Some(FixSuggestion::Distrust { column: column() }),
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
                    Some(FixSuggestion::Distrust { column: column() }),
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
        );
    }

    for m in magnitude {
        let e = &m.error;
        let suggestion = (!m.written.is_empty()).then(|| FixSuggestion::Recode {
            column: column(),
            from: m.written.clone(),
            to: fmt_num(e.scaled),
        });
        add(
            FindingKind::MagnitudeError,
            Severity::Medium,
            format!(
                "{} may be {} off by a factor of {} ({})",
                fmt_num(e.value),
                fmt_num(e.scaled),
                e.factor,
                cells(e.count)
            ),
            FindingDetail::Magnitude(m.clone()),
            suggestion,
        );
    }

    if p.write_in_cells > 0 {
        let type_name = match p.inferred {
            InferredType::Integer => "integers",
            InferredType::Decimal => "numbers",
            InferredType::Date => "dates",
            InferredType::Boolean => "booleans",
            InferredType::Categorical => "one of the usual codes",
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
        );
    }

    for group in &p.near_duplicates {
        let from: Vec<String> = group.variants().map(|m| m.value.clone()).collect();
        add(
            FindingKind::NearDuplicateLevels,
            Severity::Medium,
            format!(
                "{} look like spellings of {:?}",
                quote_list(from.iter().map(String::as_str), 5),
                group.canonical
            ),
            FindingDetail::NearDuplicates(group.clone()),
            Some(FixSuggestion::Recode {
                column: column(),
                from,
                to: group.canonical.clone(),
            }),
        );
    }

    if let Some(s) = &p.numeric {
        let sentinels: Vec<f64> = s.sentinels.iter().map(|v| v.value).collect();
        let values: Vec<_> = s
            .outside
            .iter()
            .filter(|o| !sentinels.contains(&o.value))
            .copied()
            .collect();
        let modified_z: Vec<_> = s
            .modified_z_flagged
            .iter()
            .filter(|z| !sentinels.contains(&z.value))
            .copied()
            .collect();
        if !values.is_empty() || !modified_z.is_empty() {
            let extreme = values
                .iter()
                .any(|o| o.outside == super::stats::Outside::Extreme);
            let n_cells: u64 = values.iter().map(|o| o.count).sum();
            add(
                FindingKind::Outliers,
                if extreme {
                    Severity::Medium
                } else {
                    Severity::Low
                },
                format!(
                    "{} beyond the Tukey fences [{}, {}], {} values with |modified z| > 3.5",
                    cells(n_cells),
                    fmt_num(s.fences.lower_inner),
                    fmt_num(s.fences.upper_inner),
                    modified_z.len()
                ),
                FindingDetail::Outliers {
                    fences: s.fences,
                    values,
                    modified_z,
                },
                None,
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
    fn magnitude_error_suggests_recode() {
        let p = of(&["61", "64.5", "70", "72", "6800", "75", "80", "66"]);
        let f = p
            .findings
            .iter()
            .find(|f| f.kind == FindingKind::MagnitudeError)
            .expect("a magnitude finding");
        assert_eq!(
            f.suggestion,
            Some(FixSuggestion::Recode {
                column: "col".into(),
                from: vec!["6800".into()],
                to: "68".into()
            })
        );
        assert_eq!(f.message, "6800 may be 68 off by a factor of 100 (1 cell)");
    }

    #[test]
    fn near_duplicates_suggest_the_common_spelling() {
        let mut cells = vec!["Mill Creek"; 20];
        cells.extend([
            "mill craek",
            "MILL CREEK",
            "Oak Flat",
            "Oak Flat",
            "Oak Flat",
        ]);
        let p = of(&cells);
        assert_eq!(p.inferred, InferredType::Categorical);
        let f = p
            .findings
            .iter()
            .find(|f| f.kind == FindingKind::NearDuplicateLevels)
            .expect("a near-duplicate finding");
        assert_eq!(
            f.suggestion,
            Some(FixSuggestion::Recode {
                column: "col".into(),
                from: vec!["MILL CREEK".into(), "mill craek".into()],
                to: "Mill Creek".into()
            })
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
