//! Contradictions between columns, mined from the data: a value of one column that almost
//! always goes with one value of another, and the few rows that break it.
//!
//! These are conditional functional dependencies in the sense of Fan, Geerts, Jia and
//! Kementsietsidis (2008), "Conditional functional dependencies for capturing data
//! inconsistencies", *ACM Transactions on Database Systems* 33(2): a pattern `A = a → B = b`
//! that holds with high confidence over enough rows (support), whose exceptions are the likely
//! errors. Candidate patterns come from counting value pairs of two columns, as association
//! rules are mined (Agrawal, Imieliński and Swami 1993, support and confidence). A pattern is
//! only reported when the column it conditions on determines the other almost everywhere:
//! most of its frequent values map to one value each, so a model that always has two engines
//! and one row that says three stands out, while two columns that merely correlate do not.
//!
//! Cost is bounded: the first [`MAX_COLUMNS`] columns, the first [`MAX_ROWS`] rows, and at
//! most [`MAX_PAIR_CELLS`] distinct value pairs per column pair (a pair that has more is
//! dropped: it is not a dependency of the kind we look for).

use std::collections::HashMap;

use super::finding::{Finding, FindingDetail, FindingKind, Severity};

/// Columns whose pairs are counted.
pub const MAX_COLUMNS: usize = 12;
/// Rows counted.
pub const MAX_ROWS: u64 = 100_000;
/// Distinct value pairs kept per column pair.
pub const MAX_PAIR_CELLS: usize = 5_000;
/// Rows a value must have before its pattern counts (support).
const MIN_SUPPORT: u64 = 10;
/// Share of a value's rows that must agree (confidence), below 1.
const MIN_CONFIDENCE: f64 = 0.95;
/// The most breaking rows of one value.
const MAX_BREAKS: u64 = 3;
/// Row positions kept per value pair.
const ROWS_KEPT: usize = 3;

#[derive(Clone, Copy, Default)]
struct PairCell {
    count: u64,
    rows: [u64; ROWS_KEPT],
}

/// Counts value pairs of column pairs, row by row.
pub struct PairCounter {
    n_cols: usize,
    /// Per unordered pair (a < b): (id_a, id_b) → count and first rows; `None` once dropped.
    maps: Vec<Option<HashMap<u64, PairCell>>>,
    rows: u64,
}

impl PairCounter {
    /// A counter for a table of `n_cols` columns (only the first [`MAX_COLUMNS`] count).
    pub fn new(n_cols: usize) -> PairCounter {
        let n = n_cols.min(MAX_COLUMNS);
        PairCounter {
            n_cols: n,
            maps: (0..n * n).map(|_| Some(HashMap::new())).collect(),
            rows: 0,
        }
    }

    /// Adds a row given each column's level id (`None` for missing cells, `u32::MAX` for
    /// levels past the cap); `row` is its 1-based number.
    pub fn push(&mut self, row: u64, ids: &[Option<u32>]) {
        if self.rows >= MAX_ROWS {
            return;
        }
        self.rows += 1;
        let n = self.n_cols.min(ids.len());
        for a in 0..n {
            let Some(ia) = ids[a].filter(|&i| i != u32::MAX) else {
                continue;
            };
            for (b, id_b) in ids.iter().enumerate().take(n).skip(a + 1) {
                let Some(ib) = id_b.filter(|&i| i != u32::MAX) else {
                    continue;
                };
                let slot = &mut self.maps[a * self.n_cols + b];
                let Some(map) = slot else { continue };
                let key = (u64::from(ia) << 32) | u64::from(ib);
                if !map.contains_key(&key) && map.len() >= MAX_PAIR_CELLS {
                    *slot = None;
                    continue;
                }
                let cell = map.entry(key).or_default();
                if let Some(r) = cell.rows.get_mut(cell.count as usize) {
                    *r = row;
                }
                cell.count += 1;
            }
        }
    }

    /// Adds a batch of rows given column by column: `ids[c][k]` is row `k`'s level id in
    /// column `c`, as for [`PairCounter::push`]; the first row is number `first_row + 1`.
    /// Columns marked in `skip` (keys) take part in no pair. Column pairs are counted side by
    /// side on the caller's thread pool; each pair still sees its rows in order, so the counts
    /// are those of pushing the rows one by one.
    pub fn push_columns(&mut self, first_row: u64, ids: &[Vec<Option<u32>>], skip: &[bool]) {
        use rayon::prelude::*;
        let room = MAX_ROWS.saturating_sub(self.rows);
        let n_rows = ids.first().map_or(0, Vec::len).min(room as usize);
        if n_rows == 0 || self.n_cols == 0 {
            return;
        }
        self.rows += n_rows as u64;
        let n = self.n_cols.min(ids.len());
        let n_cols = self.n_cols;
        let real = |id: Option<u32>| id.filter(|&i| i != u32::MAX);
        self.maps
            .par_chunks_mut(n_cols)
            .enumerate()
            .take(n)
            .for_each(|(a, maps_a)| {
                if skip[a] {
                    return;
                }
                for (k, &id_a) in ids[a].iter().enumerate().take(n_rows) {
                    let Some(ia) = real(id_a) else {
                        continue;
                    };
                    for b in a + 1..n {
                        if skip[b] {
                            continue;
                        }
                        let Some(ib) = real(ids[b][k]) else {
                            continue;
                        };
                        let slot = &mut maps_a[b];
                        let Some(map) = slot else { continue };
                        let key = (u64::from(ia) << 32) | u64::from(ib);
                        if !map.contains_key(&key) && map.len() >= MAX_PAIR_CELLS {
                            *slot = None;
                            continue;
                        }
                        let cell = map.entry(key).or_default();
                        if let Some(r) = cell.rows.get_mut(cell.count as usize) {
                            *r = first_row + k as u64 + 1;
                        }
                        cell.count += 1;
                    }
                }
            });
    }

    /// The contradictions found: one finding per value whose few rows break its pattern.
    /// `names[c][id]` is the value of level `id` of column `c`; `columns` the column names;
    /// `skip[c]` leaves a column out (keys, distrusted columns).
    pub fn finish(self, names: &[Vec<&str>], columns: &[String], skip: &[bool]) -> Vec<Finding> {
        let mut out = Vec::new();
        for a in 0..self.n_cols {
            for b in a + 1..self.n_cols {
                let Some(map) = &self.maps[a * self.n_cols + b] else {
                    continue;
                };
                if skip[a] || skip[b] {
                    continue;
                }
                for (from, to, flip) in [(a, b, false), (b, a, true)] {
                    out.extend(dependency(map, flip, from, to, names, columns));
                }
            }
        }
        out
    }
}

/// Patterns `from = x → to = y` in one direction of a pair's counts.
fn dependency(
    map: &HashMap<u64, PairCell>,
    flip: bool,
    from: usize,
    to: usize,
    names: &[Vec<&str>],
    columns: &[String],
) -> Vec<Finding> {
    // Group by the conditioning value.
    let mut groups: HashMap<u32, Vec<(u32, PairCell)>> = HashMap::new();
    for (&key, &cell) in map {
        let (x, y) = ((key >> 32) as u32, key as u32);
        let (cond, other) = if flip { (y, x) } else { (x, y) };
        groups.entry(cond).or_default().push((other, cell));
    }
    let mut frequent = 0u64;
    let mut pure = 0u64;
    // (value conditioned on, the value it goes with, support, the other values found)
    type Near = (u32, u32, u64, Vec<(u32, PairCell)>);
    let mut near: Vec<Near> = Vec::new();
    let mut dominants = std::collections::HashSet::new();
    for (&cond, list) in &groups {
        let support: u64 = list.iter().map(|(_, c)| c.count).sum();
        if support < MIN_SUPPORT {
            continue;
        }
        frequent += 1;
        let &(top, top_cell) = list
            .iter()
            .max_by_key(|(v, c)| (c.count, std::cmp::Reverse(*v)))
            .expect("a group has a pair");
        dominants.insert(top);
        let breaks = support - top_cell.count;
        if breaks == 0 {
            pure += 1;
        } else if top_cell.count as f64 >= MIN_CONFIDENCE * support as f64 && breaks <= MAX_BREAKS {
            let others: Vec<(u32, PairCell)> =
                list.iter().filter(|(v, _)| *v != top).copied().collect();
            near.push((cond, top, support, others));
        }
    }
    // The conditioning column must determine the other almost everywhere.
    let holds = frequent >= 3
        && pure >= 2
        && dominants.len() >= 2
        && !near.is_empty()
        && (pure + near.len() as u64) * 10 >= frequent * 9;
    if !holds {
        return Vec::new();
    }
    near.sort_by_key(|(cond, ..)| *cond);
    near.into_iter()
        .map(|(cond, top, support, others)| {
            let value = names[from][cond as usize];
            let expected = names[to][top as usize];
            let mut rows: Vec<u64> = others
                .iter()
                .flat_map(|(_, c)| c.rows[..(c.count as usize).min(ROWS_KEPT)].to_vec())
                .collect();
            rows.sort_unstable();
            let found: Vec<String> = others
                .iter()
                .map(|(v, _)| names[to][*v as usize].to_owned())
                .collect();
            let n_breaks: u64 = others.iter().map(|(_, c)| c.count).sum();
            Finding {
                column: columns[to].clone(),
                kind: FindingKind::Contradiction,
                severity: Severity::Medium,
                message: format!(
                    "where {:?} is {value:?}, {:?} is {expected:?} in {} of {support} rows; {} {} {}",
                    columns[from],
                    columns[to],
                    support - n_breaks,
                    if rows.len() == 1 { "row" } else { "rows" },
                    rows.iter()
                        .map(u64::to_string)
                        .collect::<Vec<_>>()
                        .join(", "),
                    if found.len() == 1 {
                        format!("{}", format_args!("{:?} instead", found[0]))
                    } else {
                        format!("{found:?} instead")
                    }
                ),
                detail: FindingDetail::Dependency {
                    determinant: columns[from].clone(),
                    value: value.to_owned(),
                    expected: expected.to_owned(),
                    support,
                    found,
                    rows,
                },
                suggestion: None,
                evidence: format!(
                    "a conditional dependency (Fan et al. 2008): {:?} determines {:?} for most of its frequent values, and this value's pattern holds in at least 95% of at least {MIN_SUPPORT} rows",
                    columns[from], columns[to]
                ),
                rows: Vec::new(),
                decided: None,
            }
        })
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    fn run(rows: &[[&str; 2]]) -> Vec<Finding> {
        let mut ids: Vec<HashMap<&str, u32>> = vec![HashMap::new(), HashMap::new()];
        let mut counter = PairCounter::new(2);
        for (i, r) in rows.iter().enumerate() {
            let row_ids: Vec<Option<u32>> = (0..2)
                .map(|c| {
                    let n = ids[c].len() as u32;
                    Some(*ids[c].entry(r[c]).or_insert(n))
                })
                .collect();
            counter.push(i as u64 + 1, &row_ids);
        }
        let names: Vec<Vec<&str>> = ids
            .iter()
            .map(|m| {
                let mut v = vec![""; m.len()];
                for (k, &i) in m {
                    v[i as usize] = k;
                }
                v
            })
            .collect();
        counter.finish(&names, &["model".into(), "engines".into()], &[false, false])
    }

    #[test]
    fn one_row_against_a_dependency_is_found() {
        // Worked example in the spirit of Fan et al. (2008), section 2: a model determines its
        // engine count; one record of model B says 3.
        let mut rows = Vec::new();
        for _ in 0..20 {
            rows.push(["A", "2"]);
            rows.push(["B", "2"]);
            rows.push(["C", "4"]);
        }
        rows.push(["B", "3"]);
        let found = run(&rows);
        assert_eq!(found.len(), 1, "{found:#?}");
        assert_eq!(found[0].column, "engines");
        match &found[0].detail {
            FindingDetail::Dependency {
                value,
                expected,
                rows,
                found,
                ..
            } => {
                assert_eq!((value.as_str(), expected.as_str()), ("B", "2"));
                assert_eq!(found, &["3"]);
                assert_eq!(rows, &[61]);
            }
            other => panic!("{other:?}"),
        }
    }

    #[test]
    fn columns_that_only_correlate_are_quiet() {
        // Each model mostly has one engine count, but not nearly always: no dependency.
        let mut rows = Vec::new();
        for i in 0..40 {
            rows.push(["A", if i % 5 == 0 { "4" } else { "2" }]);
            rows.push(["B", if i % 4 == 0 { "2" } else { "4" }]);
            rows.push(["C", "2"]);
        }
        assert!(run(&rows).is_empty());
    }
}
