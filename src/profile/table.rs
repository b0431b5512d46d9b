//! Profile of a whole table: one [`ColumnProfiler`] per column, plus cheap cross-column
//! checks of blank patterns.
//!
//! For the first `max_pair_columns` columns (at most 64, one bit each), every row adds one
//! to `blank_filled[a][b]` for each pair where `a` is blank and `b` is filled. With each
//! column's filled count this gives all four blank/filled combinations of every pair,
//! without storing rows. Two patterns are reported when a few rows break them:
//! *paired* (filled together and blank together) and *alternative* (exactly one of the two
//! filled). Columns past the limit are profiled alone. Cost per row is
//! O(blank × filled) among tracked columns, at most 32 × 32 pair updates.

use std::collections::BTreeMap;

use serde::{Deserialize, Serialize};

use crate::model::RowBatch;

use super::column::{ColumnProfile, ColumnProfiler, Flag, ProfileOptions};
use super::dependencies::{MAX_COLUMNS, PairCounter};
use super::finding::{
    Finding, FindingDetail, FindingKind, PairCounts, PairPattern, Severity, sort_findings,
};

/// The most columns whose pairs are tracked (one bit each in a `u64`).
pub const MAX_PAIR_COLUMNS: usize = 64;

/// Row positions kept per pair, for listing rows that break a pattern.
const PAIR_ROWS_KEPT: usize = 3;

/// Knobs for a table.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct TableOptions {
    /// Options for every column; their `declared_codes` apply to all columns.
    pub column: ProfileOptions,
    /// Further declared missing codes by column name.
    pub declared_codes: BTreeMap<String, Vec<String>>,
    /// How many leading columns get pair checks; capped at [`MAX_PAIR_COLUMNS`]. Default 64.
    pub max_pair_columns: usize,
    /// Rows that must follow a pattern on each side before breaks are reported. Default 10.
    pub pair_min_support: u64,
    /// The most breaking rows, as a share of the rows following the pattern. Default 0.05.
    pub pair_exception_share: f64,
    /// The table's key columns. Key cells are left out when looking for copies (rows equal in
    /// every other column, reported when rare) and for empty rows.
    #[serde(default)]
    pub key_columns: Vec<String>,
}

impl Default for TableOptions {
    fn default() -> Self {
        TableOptions {
            column: ProfileOptions::default(),
            declared_codes: BTreeMap::new(),
            max_pair_columns: MAX_PAIR_COLUMNS,
            pair_min_support: 10,
            pair_exception_share: 0.05,
            key_columns: Vec::new(),
        }
    }
}

/// Every figure of a table.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct TableProfile {
    /// Data rows (header excluded).
    pub n_rows: u64,
    /// One profile per column, in header order.
    pub columns: Vec<ColumnProfile>,
    /// All findings, of every column and across columns, worst first.
    pub findings: Vec<Finding>,
}

/// Accumulates a table row by row.
///
/// ```
/// use emend::profile::{TableOptions, TableProfiler};
/// let mut t = TableProfiler::new(&["site", "count"], TableOptions::default());
/// t.push_row(&[Some("Mill Creek"), Some("12")]);
/// t.push_row(&[Some("mill creek"), Some("")]);
/// let profile = t.finish();
/// assert_eq!(profile.n_rows, 2);
/// assert_eq!(profile.columns[1].counts.blank, 1);
/// ```
pub struct TableProfiler {
    columns: Vec<ColumnProfiler>,
    n_rows: u64,
    tracked: usize,
    blank_filled: Vec<u64>,
    pair_rows: Vec<[u64; PAIR_ROWS_KEPT]>,
    options: TableOptions,
    /// Per column: part of the key.
    is_key: Vec<bool>,
    /// Without a key: each row's 64-bit fingerprint, in row order (0 for an empty row).
    seen: Option<Vec<u64>>,
    /// Rows with every measurement missing: the first few, and how many.
    empty: Vec<u64>,
    n_empty: u64,
    /// Value pairs of the leading columns, for mined dependencies.
    pairs: PairCounter,
    ids: Vec<Option<u32>>,
    /// Level ids of a batch, column by column (reused batch after batch).
    batch_ids: Vec<Vec<Option<u32>>>,
}

/// Rows listed in a row-level finding.
const ROWS_LISTED: usize = 20;

impl TableProfiler {
    /// Starts a table with the given header.
    pub fn new<S: AsRef<str>>(header: &[S], options: TableOptions) -> TableProfiler {
        let columns = header
            .iter()
            .map(|name| {
                let name = name.as_ref();
                let mut column = options.column.clone();
                if let Some(codes) = options.declared_codes.get(name) {
                    column.declared_codes.extend(codes.iter().cloned());
                }
                ColumnProfiler::new(name, column)
            })
            .collect::<Vec<_>>();
        let tracked = columns
            .len()
            .min(options.max_pair_columns)
            .min(MAX_PAIR_COLUMNS);
        let is_key: Vec<bool> = header
            .iter()
            .map(|h| options.key_columns.iter().any(|k| k == h.as_ref()))
            .collect();
        let seen = Some(Vec::new());
        TableProfiler {
            columns,
            n_rows: 0,
            tracked,
            blank_filled: vec![0; tracked * tracked],
            pair_rows: vec![[0; PAIR_ROWS_KEPT]; tracked * tracked],
            options,
            is_key,
            seen,
            empty: Vec::new(),
            n_empty: 0,
            pairs: PairCounter::new(header.len()),
            ids: Vec::with_capacity(header.len()),
            batch_ids: Vec::new(),
        }
    }

    /// Adds the next data row. `None` is a cell declared missing by a fix. A row shorter
    /// than the header counts its absent cells as blank; extra cells are ignored (ingest
    /// refuses ragged rows, so neither should happen).
    pub fn push_row(&mut self, row: &[Option<&str>]) {
        self.n_rows += 1;
        self.row_checks(row);
        let mut blank_mask = 0u64;
        self.ids.clear();
        for (i, column) in self.columns.iter_mut().enumerate() {
            let cell = row.get(i).copied().unwrap_or(Some(""));
            let id = column.push_level(cell);
            if i < self.tracked && id.is_none() {
                blank_mask |= 1 << i;
            }
            if i < MAX_COLUMNS {
                // Key values are unique: they take part in no pattern.
                self.ids.push(if self.is_key[i] { None } else { id });
            }
        }
        self.pairs.push(self.n_rows, &self.ids);
        if self.tracked == 0 || blank_mask == 0 {
            return;
        }
        let all = if self.tracked == 64 {
            u64::MAX
        } else {
            (1u64 << self.tracked) - 1
        };
        let filled_mask = !blank_mask & all;
        let mut blanks = blank_mask;
        while blanks != 0 {
            let a = blanks.trailing_zeros() as usize;
            blanks &= blanks - 1;
            let mut filled = filled_mask;
            while filled != 0 {
                let b = filled.trailing_zeros() as usize;
                filled &= filled - 1;
                let idx = a * self.tracked + b;
                self.blank_filled[idx] += 1;
                if let Some(slot) =
                    self.pair_rows[idx].get_mut((self.blank_filled[idx] - 1) as usize)
                {
                    *slot = self.n_rows;
                }
            }
        }
    }

    /// Adds a batch of rows: the rows `rows` of `batch`, in that order, as if each were given
    /// to [`TableProfiler::push_row`]. Columns are profiled side by side on the caller's
    /// thread pool, then the pairs of columns; every column and pair sees its cells in row
    /// order, so the profile is the same as row by row, with one thread or many.
    pub fn push_batch(&mut self, batch: &RowBatch, rows: &[usize]) {
        use rayon::prelude::*;
        if rows.is_empty() {
            return;
        }
        let first = self.n_rows;
        let n_cols = self.columns.len();
        let mut ids = std::mem::take(&mut self.batch_ids);
        ids.resize_with(n_cols, Vec::new);
        let TableProfiler {
            columns,
            is_key,
            seen,
            empty,
            n_empty,
            ..
        } = self;
        let mut row = Vec::with_capacity(n_cols);
        rayon::join(
            || {
                columns
                    .par_iter_mut()
                    .zip(ids.par_iter_mut())
                    .enumerate()
                    .for_each(|(c, (column, out))| {
                        out.clear();
                        out.extend(rows.iter().map(|&r| column.push_level(batch.cell(r, c))));
                    })
            },
            || {
                let mut rc = RowChecks {
                    is_key,
                    seen,
                    empty,
                    n_empty,
                };
                for (k, &r) in rows.iter().enumerate() {
                    batch.row_into(r, &mut row);
                    rc.row(first + k as u64 + 1, &row);
                }
            },
        );
        self.n_rows += rows.len() as u64;
        let tracked = self.tracked;
        let (pairs, blank_filled, pair_rows) =
            (&mut self.pairs, &mut self.blank_filled, &mut self.pair_rows);
        let is_key = &self.is_key;
        let ids_ref = &ids;
        rayon::join(
            || pairs.push_columns(first, &ids_ref[..n_cols.min(MAX_COLUMNS)], is_key),
            || {
                if tracked == 0 {
                    return;
                }
                blank_filled
                    .par_chunks_mut(tracked)
                    .zip(pair_rows.par_chunks_mut(tracked))
                    .enumerate()
                    .for_each(|(a, (counts, kept))| {
                        for (k, id_a) in ids_ref[a].iter().enumerate().take(rows.len()) {
                            if id_a.is_some() {
                                continue;
                            }
                            for b in 0..tracked {
                                if ids_ref[b][k].is_none() {
                                    continue;
                                }
                                counts[b] += 1;
                                if let Some(slot) = kept[b].get_mut((counts[b] - 1) as usize) {
                                    *slot = first + k as u64 + 1;
                                }
                            }
                        }
                    })
            },
        );
        self.batch_ids = ids;
    }

    /// Exact copies (tables without a key) and rows with every measurement missing.
    fn row_checks(&mut self, row: &[Option<&str>]) {
        RowChecks {
            is_key: &self.is_key,
            seen: &mut self.seen,
            empty: &mut self.empty,
            n_empty: &mut self.n_empty,
        }
        .row(self.n_rows, row);
    }
}

/// The state of the whole-row checks (copies, empty rows), borrowed from a [`TableProfiler`].
struct RowChecks<'a> {
    is_key: &'a [bool],
    seen: &'a mut Option<Vec<u64>>,
    empty: &'a mut Vec<u64>,
    n_empty: &'a mut u64,
}

impl RowChecks<'_> {
    /// Row number `n_row` (1-based).
    fn row(&mut self, n_row: u64, row: &[Option<&str>]) {
        let n = self.is_key.len();
        let measured = (0..n).filter(|&i| !self.is_key[i]).count();
        let empty = measured > 0
            && (0..n).filter(|&i| !self.is_key[i]).all(|i| {
                row.get(i)
                    .copied()
                    .flatten()
                    .is_none_or(|c| c.trim().is_empty())
            });
        if empty {
            *self.n_empty += 1;
            if self.empty.len() < ROWS_LISTED {
                self.empty.push(n_row);
            }
            if let Some(seen) = self.seen.as_mut() {
                seen.push(0);
            }
            return;
        }
        if let Some(seen) = self.seen.as_mut() {
            // FNV-1a over the cells with a separator byte: a 64-bit fingerprint of the row.
            // Two different rows share one with odds of about n²/2⁶⁵, so a reported copy is
            // checked by value only in the sense that such a collision is vanishingly rare.
            let mut h: u64 = 0xcbf2_9ce4_8422_2325;
            let mut eat = |b: u8| {
                h ^= u64::from(b);
                h = h.wrapping_mul(0x0000_0100_0000_01b3);
            };
            for i in (0..n).filter(|&i| !self.is_key[i]) {
                match row.get(i).copied().flatten() {
                    Some(c) => {
                        eat(1);
                        c.bytes().for_each(&mut eat);
                        eat(0xff);
                    }
                    None => eat(0),
                }
            }
            // 0 marks an empty row; a real row that hashes to 0 moves aside.
            seen.push(h.max(1));
        }
    }
}

impl TableProfiler {
    /// Computes every column's profile and all findings.
    pub fn finish(self) -> TableProfile {
        let TableProfiler {
            columns,
            n_rows,
            tracked,
            blank_filled,
            pair_rows,
            options,
            empty,
            n_empty,
            seen,
            pairs: counter,
            is_key,
            ..
        } = self;
        let dependencies = {
            let names: Vec<Vec<&str>> = columns.iter().map(|c| c.level_names()).collect();
            let column_names: Vec<String> = columns.iter().map(|c| c.name().to_owned()).collect();
            counter.finish(&names, &column_names, &is_key)
        };
        let mut columns: Vec<ColumnProfile> =
            columns.into_iter().map(ColumnProfiler::finish).collect();
        let mut findings: Vec<Finding> = columns
            .iter()
            .flat_map(|c| c.findings.iter().cloned())
            .collect();

        let pairs = PairTable {
            tracked,
            blank_filled: &blank_filled,
            pair_rows: &pair_rows,
        };
        let filled: Vec<u64> = columns.iter().map(|c| c.counts.present).collect();
        for a in 0..tracked {
            for b in a + 1..tracked {
                let Some(finding) = pairs.check(a, b, &columns, &filled, n_rows, &options) else {
                    continue;
                };
                let (name_a, name_b) = (columns[a].name.clone(), columns[b].name.clone());
                columns[a].flags.push(Flag::Contradicted { other: name_b });
                columns[b].flags.push(Flag::Contradicted { other: name_a });
                findings.push(finding);
            }
        }
        findings.extend(dependencies);
        // Copies: sort row numbers by fingerprint; in each run of equal fingerprints the first
        // row is the original and the others repeat it. Memory: 8 bytes a row while streaming, 16 while sorting.
        let (copies, n_copies) = match seen {
            Some(hashes) => {
                // Sorting (fingerprint, row) pairs reads memory in order, which beats sorting
                // row numbers by a looked-up fingerprint several times over on a million rows.
                let mut order: Vec<(u64, u32)> = hashes
                    .into_iter()
                    .enumerate()
                    .filter(|&(_, h)| h != 0)
                    .map(|(i, h)| (h, i as u32))
                    .collect();
                order.sort_unstable();
                let mut copies: Vec<(u64, u64)> = Vec::new();
                let mut n = 0u64;
                for w in order.chunk_by(|a, b| a.0 == b.0) {
                    for &(_, copy) in &w[1..] {
                        n += 1;
                        if copies.len() < ROWS_LISTED * 50 {
                            copies.push((u64::from(copy) + 1, u64::from(w[0].1) + 1));
                        }
                    }
                }
                copies.sort_unstable();
                copies.truncate(ROWS_LISTED);
                (copies, n)
            }
            None => (Vec::new(), 0),
        };
        let whole_rows =
            |kind, message: String, rows: Vec<u64>, originals, evidence: &str| Finding {
                column: String::new(),
                kind,
                severity: Severity::Medium,
                message,
                detail: FindingDetail::Rows {
                    count: rows.len() as u64,
                    rows,
                    originals,
                },
                suggestion: None,
                evidence: evidence.to_owned(),
                rows: Vec::new(),
                decided: None,
            };
        // With a key, rows that repeat another in every other column are copies under a new
        // key (one visit logged twice) only while they are rare: a register of aircraft has
        // many rows with the same specification, which is no error.
        let keyed = is_key.iter().any(|&k| k);
        let copies_rare = !keyed || n_copies * 100 <= n_rows;
        if n_copies > 0 && copies_rare {
            let listed: Vec<String> = copies
                .iter()
                .take(5)
                .map(|(r, o)| format!("row {r} repeats row {o}"))
                .collect();
            let mut f = whole_rows(
                FindingKind::DuplicateRows,
                format!(
                    "{n_copies} rows are {} of an earlier row ({}{})",
                    if keyed {
                        "copies, in every column but the key,"
                    } else {
                        "exact copies"
                    },
                    listed.join(", "),
                    if n_copies > 5 { ", ..." } else { "" }
                ),
                copies.iter().map(|c| c.0).collect(),
                copies.iter().map(|c| c.1).collect(),
                "every cell equal to an earlier row's (compared by a 64-bit hash of the whole row); the table has no key to tell them apart",
            );
            if let FindingDetail::Rows { count, .. } = &mut f.detail {
                *count = n_copies;
            }
            findings.push(f);
        }
        if n_empty > 0 {
            let mut f = whole_rows(
                FindingKind::EmptyRows,
                format!("{n_empty} rows have every measurement blank or missing"),
                empty,
                Vec::new(),
                "every cell outside the key is blank or declared missing",
            );
            if let FindingDetail::Rows { count, .. } = &mut f.detail {
                *count = n_empty;
            }
            findings.push(f);
        }
        sort_findings(&mut findings);
        TableProfile {
            n_rows,
            columns,
            findings,
        }
    }
}

/// The pair counts gathered while streaming.
struct PairTable<'a> {
    tracked: usize,
    blank_filled: &'a [u64],
    pair_rows: &'a [[u64; PAIR_ROWS_KEPT]],
}

impl PairTable<'_> {
    /// Rows where `a` is blank and `b` filled, and the first few of them.
    fn blank_filled(&self, a: usize, b: usize) -> (u64, &[u64]) {
        let idx = a * self.tracked + b;
        let n = self.blank_filled[idx];
        (n, &self.pair_rows[idx][..(n as usize).min(PAIR_ROWS_KEPT)])
    }

    fn check(
        &self,
        a: usize,
        b: usize,
        columns: &[ColumnProfile],
        filled: &[u64],
        n_rows: u64,
        options: &TableOptions,
    ) -> Option<Finding> {
        let (only_b, rows_only_b) = self.blank_filled(a, b);
        let (only_a, rows_only_a) = self.blank_filled(b, a);
        let both = filled[b] - only_b;
        let neither = n_rows - both - only_a - only_b;
        let counts = PairCounts {
            both_filled: both,
            both_blank: neither,
            only_other_filled: only_b,
            only_this_filled: only_a,
        };
        let support = options.pair_min_support;
        let share = options.pair_exception_share;
        let (name_a, name_b) = (&columns[a].name, &columns[b].name);

        let paired_breaks = only_a + only_b;
        if both >= support
            && neither >= support
            && paired_breaks > 0
            && paired_breaks as f64 <= share * (both + neither) as f64
        {
            let mut rows: Vec<u64> = rows_only_a.iter().chain(rows_only_b).copied().collect();
            rows.sort_unstable();
            return Some(Finding {
                column: name_a.clone(),
                kind: FindingKind::Contradiction,
                severity: Severity::High,
                message: format!(
                    "{name_a:?} and {name_b:?} are filled and blank together in {} rows, \
                     but only {name_a:?} is filled in {only_a} and only {name_b:?} in {only_b}",
                    both + neither
                ),
                detail: FindingDetail::Contradiction {
                    other: name_b.clone(),
                    pattern: PairPattern::Paired,
                    counts,
                    rows,
                },
                suggestion: None,
                evidence: format!(
                    "the pattern holds in {} of {} rows",
                    both + neither,
                    both + neither + paired_breaks
                ),
                rows: Vec::new(),
                decided: None,
            });
        }
        if only_a >= support
            && only_b >= support
            && both > 0
            && both as f64 <= share * (only_a + only_b) as f64
        {
            return Some(Finding {
                column: name_a.clone(),
                kind: FindingKind::Contradiction,
                severity: Severity::High,
                message: format!(
                    "exactly one of {name_a:?} and {name_b:?} is filled in {} rows, \
                     but both are filled in {both}",
                    only_a + only_b
                ),
                detail: FindingDetail::Contradiction {
                    other: name_b.clone(),
                    pattern: PairPattern::Alternative,
                    counts,
                    // Rows with both filled are not kept; only their count is known.
                    rows: Vec::new(),
                },
                suggestion: None,
                evidence: format!(
                    "the pattern holds in {} of {} rows",
                    only_a + only_b,
                    only_a + only_b + both
                ),
                rows: Vec::new(),
                decided: None,
            });
        }
        None
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Builds a table from rows of text where "." stands for a blank cell.
    fn table(header: &[&str], rows: &[&[&str]]) -> TableProfile {
        let mut t = TableProfiler::new(header, TableOptions::default());
        for row in rows {
            let cells: Vec<Option<&str>> = row
                .iter()
                .map(|c| Some(if *c == "." { "" } else { *c }))
                .collect();
            t.push_row(&cells);
        }
        t.finish()
    }

    fn contradictions(p: &TableProfile) -> Vec<(String, PairPattern, Vec<u64>)> {
        p.findings
            .iter()
            .filter_map(|f| match &f.detail {
                FindingDetail::Contradiction {
                    other,
                    pattern,
                    rows,
                    ..
                } => Some((format!("{}/{other}", f.column), *pattern, rows.clone())),
                _ => None,
            })
            .collect()
    }

    #[test]
    fn paired_columns_broken_in_one_row() {
        // "dose" is given exactly when "drug" is, except row 25.
        let mut rows: Vec<Vec<&str>> = Vec::new();
        for i in 0..40 {
            rows.push(if i % 2 == 0 {
                vec!["x", "5", "a"]
            } else {
                vec![".", ".", "b"]
            });
        }
        rows[24] = vec![".", "7", "a"];
        let refs: Vec<&[&str]> = rows.iter().map(Vec::as_slice).collect();
        let p = table(&["drug", "dose", "other"], &refs);
        assert_eq!(
            contradictions(&p),
            [("drug/dose".to_owned(), PairPattern::Paired, vec![25])]
        );
        assert_eq!(p.findings[0].kind, FindingKind::Contradiction);
        assert!(p.columns[0].flags.contains(&Flag::Contradicted {
            other: "dose".into()
        }));
    }

    #[test]
    fn alternative_columns_both_filled_once() {
        let mut rows: Vec<Vec<&str>> = Vec::new();
        for i in 0..40 {
            rows.push(if i % 2 == 0 {
                vec!["70", "."]
            } else {
                vec![".", "150"]
            });
        }
        rows[3] = vec!["70", "155"];
        let refs: Vec<&[&str]> = rows.iter().map(Vec::as_slice).collect();
        let p = table(&["weight_kg", "weight_lb"], &refs);
        assert_eq!(
            contradictions(&p),
            [(
                "weight_kg/weight_lb".to_owned(),
                PairPattern::Alternative,
                vec![]
            )]
        );
    }

    #[test]
    fn clean_patterns_and_noise_are_quiet() {
        // A perfect pair, and a column with scattered blanks, raise nothing.
        let mut rows: Vec<Vec<&str>> = Vec::new();
        for i in 0..40 {
            let paired = if i % 2 == 0 { ["x", "5"] } else { [".", "."] };
            let noisy = if i % 7 == 0 { "." } else { "n" };
            rows.push(vec![paired[0], paired[1], noisy]);
        }
        let refs: Vec<&[&str]> = rows.iter().map(Vec::as_slice).collect();
        let p = table(&["a", "b", "c"], &refs);
        assert_eq!(contradictions(&p), []);
    }

    #[test]
    fn short_rows_and_declared_codes() {
        let options = TableOptions {
            declared_codes: BTreeMap::from([("b".to_owned(), vec!["-9".to_owned()])]),
            ..TableOptions::default()
        };
        let mut t = TableProfiler::new(&["a", "b"], options);
        t.push_row(&[Some("1")]);
        t.push_row(&[Some("2"), Some("-9")]);
        t.push_row(&[None, Some("3")]);
        let p = t.finish();
        assert_eq!(p.n_rows, 3);
        let b = &p.columns[1].counts;
        assert_eq!((b.blank, b.declared_missing, b.present), (1, 1, 1));
        assert_eq!(p.columns[0].counts.declared_missing, 1);
    }

    #[test]
    fn findings_worst_first_across_columns() {
        let mut rows: Vec<Vec<&str>> = Vec::new();
        for value in ["10", "12", "11", "13", "9", "-999", "-999", "12", "11"] {
            rows.push(vec!["same", value]);
        }
        let refs: Vec<&[&str]> = rows.iter().map(Vec::as_slice).collect();
        let p = table(&["constant", "value"], &refs);
        let order: Vec<(FindingKind, Severity)> =
            p.findings.iter().map(|f| (f.kind, f.severity)).collect();
        // Rows 7 and 9 repeat rows 5 and 2 exactly: the table has no key, so they are copies.
        assert_eq!(
            order,
            [
                (FindingKind::SuspectedMissingCode, Severity::High),
                (FindingKind::DuplicateRows, Severity::Medium),
                (FindingKind::Constant, Severity::Medium),
            ]
        );
    }

    #[test]
    fn copies_and_empty_rows_are_named_and_keys_are_not_measurements() {
        let rows: &[&[&str]] = &[
            &["A", "1", "x"],
            &["B", "", ""],
            &["A", "1", "x"],
            &["C", "2", "y"],
        ];
        let keyless = table(&["id", "n", "s"], rows);
        let copies: Vec<_> = keyless
            .findings
            .iter()
            .filter(|f| f.kind == FindingKind::DuplicateRows)
            .collect();
        assert_eq!(copies.len(), 1);
        assert!(matches!(
            &copies[0].detail,
            FindingDetail::Rows { count: 1, rows, originals } if rows == &[3] && originals == &[1]
        ));
        assert!(
            !keyless
                .findings
                .iter()
                .any(|f| f.kind == FindingKind::EmptyRows)
        );
        let options = TableOptions {
            key_columns: vec!["id".into()],
            ..TableOptions::default()
        };
        let mut t = TableProfiler::new(&["id", "n", "s"], options);
        for r in [["A", "1", "x"], ["B", "", ""], ["C", "1", "x"]] {
            t.push_row(&r.map(Some));
        }
        let keyed = t.finish();
        let kinds: Vec<FindingKind> = keyed.findings.iter().map(|f| f.kind).collect();
        assert!(kinds.contains(&FindingKind::EmptyRows), "{kinds:?}");
        // "C" repeats "A" but for the key; one copy in three rows is not rare, so it is not
        // reported (a register of identical specifications looks like this).
        assert!(!kinds.contains(&FindingKind::DuplicateRows), "{kinds:?}");
    }

    #[test]
    fn profile_serializes() {
        let p = table(
            &["site", "n"],
            &[
                &["Mill Creek", "3"],
                &["Mill Creek", "4"],
                &["mill creek", "5"],
                &["mill creek", "."],
            ],
        );
        let json = serde_json::to_value(&p).unwrap();
        assert_eq!(json["n_rows"], 4);
        assert_eq!(json["columns"][1]["inferred"], "integer");
        assert_eq!(json["columns"][1]["counts"]["blank"], 1);
        assert_eq!(json["findings"][0]["suggestion"]["action"], "recode");
    }

    #[test]
    fn wide_tables_track_only_the_first_columns() {
        let header: Vec<String> = (0..70).map(|i| format!("c{i}")).collect();
        let mut t = TableProfiler::new(&header, TableOptions::default());
        let row: Vec<Option<&str>> = (0..70)
            .map(|i| Some(if i % 2 == 0 { "" } else { "1" }))
            .collect();
        t.push_row(&row);
        let p = t.finish();
        assert_eq!(p.columns.len(), 70);
        assert_eq!(p.columns[69].counts.present, 1);
    }
}
