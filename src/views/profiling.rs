//! Profiling a table version: the glue between a rebuilt version and the pure statistics in
//! [`crate::profile`].
//!
//! Excluded rows are left out (they are not part of the cleaned data); missing-value codes
//! declared by `missing` fixes up to the version are passed on, so a code that reappears is
//! counted as declared missing. Row numbers in the result are 1-based positions in the extract.

use crate::error::Result;
use crate::model::RowBatch;
use crate::model::{Change, FixAction};
use crate::profile::Finding;
use crate::profile::column::ValueRows;
use crate::profile::finding::{Decided, RowName};
use crate::profile::{FindingDetail, TableOptions, TableProfile, TableProfiler};
use crate::progress::Progress;
use crate::query::RowSink;
use crate::query::{Version, decode};
use crate::store::Reader;
use std::collections::{BTreeMap, HashMap};

/// Missing-value codes declared for each column of `version`'s table by fixes up to it.
pub fn declared_codes(
    reader: &Reader<'_>,
    version: &Version,
) -> Result<BTreeMap<String, Vec<String>>> {
    let mut out: BTreeMap<String, Vec<String>> = BTreeMap::new();
    if version.raw || version.seq <= version.ingest_seq {
        return Ok(out);
    }
    for seq in version.ingest_seq + 1..=version.seq {
        let Some(stored) = reader.try_commit(seq)? else {
            continue;
        };
        if let Change::Fixes(list) = decode(&stored)?.change {
            for r in list {
                if r.fix.table != version.table {
                    continue;
                }
                if let FixAction::Missing { column, codes } = r.fix.action {
                    let entry = out.entry(column).or_default();
                    for c in codes {
                        if !entry.contains(&c) {
                            entry.push(c);
                        }
                    }
                }
            }
        }
    }
    Ok(out)
}

/// The most rows named on one finding.
pub const MAX_NAMED_ROWS: usize = 50;

/// The rows a finding points at, in the profiler's numbering, first seen first, at most
/// [`MAX_NAMED_ROWS`].
fn finding_rows(f: &Finding, outside: &[ValueRows]) -> Vec<u64> {
    let of_values = |values: &mut dyn Iterator<Item = f64>| -> Vec<u64> {
        let wanted: Vec<f64> = values.collect();
        outside
            .iter()
            .filter(|v| wanted.contains(&v.value))
            .flat_map(|v| v.rows.iter().map(|r| r.row))
            .collect()
    };
    let mut rows: Vec<u64> = match &f.detail {
        FindingDetail::WriteIns { values, .. } => {
            values.iter().flat_map(|w| w.rows.iter().copied()).collect()
        }
        FindingDetail::Contradiction { rows, .. } | FindingDetail::Dependency { rows, .. } => {
            rows.clone()
        }
        FindingDetail::Rows { rows, .. } => rows.clone(),
        FindingDetail::Outliers { values, .. } => of_values(&mut values.iter().map(|o| o.value)),
        FindingDetail::Magnitudes { values } => {
            of_values(&mut values.iter().map(|m| m.error.value))
        }
        _ => Vec::new(),
    };
    let mut seen = std::collections::HashSet::new();
    rows.retain(|r| seen.insert(*r));
    rows.truncate(MAX_NAMED_ROWS);
    rows
}

/// Every row's key in one buffer (a few bytes a row), for naming a finding's rows; empty for
/// a table without a key, whose rows are named by position.
struct KeyNames {
    keyed: bool,
    text: String,
    /// Where each key ends in `text` (4 bytes a row; past 4 GiB of keys, naming stops).
    ends: Vec<u32>,
}

impl KeyNames {
    fn new(keyed: bool) -> KeyNames {
        KeyNames {
            keyed,
            text: String::new(),
            ends: Vec::new(),
        }
    }

    fn push(&mut self, key: &str) {
        if self.keyed {
            self.text.push_str(key);
            match u32::try_from(self.text.len()) {
                Ok(end) => self.ends.push(end),
                Err(_) => {
                    self.keyed = false;
                    self.text = String::new();
                    self.ends = Vec::new();
                }
            }
        }
    }

    /// The key of the `n`th row given (1-based), as stored in a row id.
    fn raw(&self, n: u64) -> Option<&str> {
        let i = (n as usize).checked_sub(1)?;
        let end = *self.ends.get(i)? as usize;
        let start = if i == 0 { 0 } else { self.ends[i - 1] as usize };
        Some(&self.text[start..end])
    }

    /// The key of the `n`th row given (1-based), as people write it.
    fn get(&self, n: u64) -> Option<String> {
        self.raw(n)
            .map(|k| crate::model::RowId(k.to_owned()).to_string())
    }
}

/// The profile of a version as its rows stream past (excluded rows left out).
pub(crate) struct ProfileSink {
    profiler: TableProfiler,
    positions: Vec<u64>,
    keys: KeyNames,
}

impl RowSink for ProfileSink {
    fn push_batch(&mut self, batch: &RowBatch) {
        let rows = batch.included();
        for &r in &rows {
            self.positions.push(batch.pos(r));
            self.keys.push(batch.id(r));
        }
        self.profiler.push_batch(batch, &rows);
    }
}

/// Profile every column of a version in one streaming pass, on the caller's thread pool.
pub fn profile_version(
    reader: &Reader<'_>,
    version: &Version,
    options: TableOptions,
) -> Result<TableProfile> {
    profile_version_with(reader, version, options, &crate::progress::NONE)
}

/// [`profile_version`], telling `progress` how many rows are done.
pub fn profile_version_with(
    reader: &Reader<'_>,
    version: &Version,
    options: TableOptions,
    progress: &dyn Progress,
) -> Result<TableProfile> {
    let mut sink = ProfileSink::new(reader, version, options)?;
    crate::query::scan(reader, version, &mut [&mut sink], progress, "profile")?;
    sink.finish(reader, version)
}

impl ProfileSink {
    /// A profile of `version` to feed with its rows (in a [`crate::query::scan`] that may
    /// feed other work too), then [`ProfileSink::finish`].
    pub(crate) fn new(
        reader: &Reader<'_>,
        version: &Version,
        mut options: TableOptions,
    ) -> Result<ProfileSink> {
        for (col, codes) in declared_codes(reader, version)? {
            let entry = options.declared_codes.entry(col).or_default();
            for c in codes {
                if !entry.contains(&c) {
                    entry.push(c);
                }
            }
        }
        if options.key_columns.is_empty() {
            options.key_columns = version.def.key.clone();
        }
        Ok(ProfileSink {
            profiler: TableProfiler::new(version.header(), options),
            positions: Vec::new(),
            keys: KeyNames::new(!version.def.key.is_empty()),
        })
    }

    /// The profile of every row given, with the decisions taken up to `version`.
    pub(crate) fn finish(self, reader: &Reader<'_>, version: &Version) -> Result<TableProfile> {
        finish_profile(reader, version, self)
    }
}

fn finish_profile(
    reader: &Reader<'_>,
    version: &Version,
    sink: ProfileSink,
) -> Result<TableProfile> {
    let ProfileSink {
        profiler,
        positions,
        keys,
    } = sink;
    let mut profile = profiler.finish();
    // Name each finding's rows by key and position, before the numbers below turn into
    // positions (the profiler numbers the rows it was given, 1 for the first).
    let name = |n: u64| RowName {
        row: positions
            .get((n as usize).wrapping_sub(1))
            .copied()
            .unwrap_or(n),
        key: keys.get(n),
    };
    let outside: BTreeMap<String, Vec<ValueRows>> = profile
        .columns
        .iter()
        .map(|c| (c.name.clone(), c.outside_rows.clone()))
        .collect();
    // Values kept on purpose (`emend keep`): a finding about a column whose every named row
    // holds a kept value of that column is answered.
    let mut kept: HashMap<String, u64> = HashMap::new();
    if !version.raw {
        for m in reader.marks(&version.table, version.ingest_seq, version.seq)? {
            if m.kind == "keep" {
                kept.entry(m.target).or_insert(m.seq);
            }
        }
    }
    let row_id = |n: u64| -> String {
        match keys.raw(n) {
            Some(k) => k.to_owned(),
            None => positions
                .get((n as usize).wrapping_sub(1))
                .copied()
                .unwrap_or(n)
                .to_string(),
        }
    };
    let named = |f: &mut Finding| {
        let rows = finding_rows(f, outside.get(&f.column).map_or(&[][..], Vec::as_slice));
        if !kept.is_empty() && !rows.is_empty() && !f.column.is_empty() {
            let seqs: Option<Vec<u64>> = rows
                .iter()
                .map(|&n| {
                    let target = crate::model::cell_target(&row_id(n), &f.column);
                    kept.get(&target).copied()
                })
                .collect();
            if let Some(seq) = seqs.and_then(|s| s.into_iter().max()) {
                f.decided = Some(Decided {
                    seq,
                    how: "values kept on purpose".to_owned(),
                });
                f.suggestion = None;
            }
        }
        f.rows = rows.into_iter().map(name).collect();
    };
    profile.findings.iter_mut().for_each(named);
    for c in &mut profile.columns {
        c.findings.iter_mut().for_each(named);
    }
    // The profiler numbers the rows it was given; name them by their extract position.
    let map = |n: &mut u64| {
        if let Some(p) = positions.get((*n as usize).wrapping_sub(1)) {
            *n = *p;
        }
    };
    let fix_detail = |d: &mut FindingDetail| match d {
        FindingDetail::WriteIns { values, .. } => values
            .iter_mut()
            .for_each(|w| w.rows.iter_mut().for_each(map)),
        FindingDetail::Contradiction { rows, .. } => rows.iter_mut().for_each(map),
        FindingDetail::Rows {
            rows, originals, ..
        } => rows.iter_mut().chain(originals.iter_mut()).for_each(map),
        FindingDetail::Dependency { rows, .. } => rows.iter_mut().for_each(map),
        _ => {}
    };
    for c in &mut profile.columns {
        c.write_ins
            .iter_mut()
            .chain(c.short_codes.iter_mut())
            .for_each(|w| w.rows.iter_mut().for_each(map));
        for v in &mut c.outside_rows {
            for r in &mut v.rows {
                *r = name(r.row);
            }
        }
        c.findings
            .iter_mut()
            .for_each(|f| fix_detail(&mut f.detail));
    }
    profile
        .findings
        .iter_mut()
        .for_each(|f| fix_detail(&mut f.detail));
    // A distrusted column's findings are answered: show them as decided, with the commit.
    if !version.raw {
        let mut distrusted_in: BTreeMap<String, u64> = BTreeMap::new();
        for m in reader.marks(&version.table, version.ingest_seq, version.seq)? {
            if m.kind == "distrust" {
                distrusted_in.entry(m.target).or_insert(m.seq);
            }
        }
        let decide = |f: &mut crate::profile::Finding| {
            if let Some(&seq) = distrusted_in.get(&f.column) {
                f.decided = Some(Decided {
                    seq,
                    how: "column distrusted".to_owned(),
                });
                f.suggestion = None;
            }
        };
        profile.findings.iter_mut().for_each(decide);
        for c in &mut profile.columns {
            c.findings.iter_mut().for_each(decide);
        }
    }
    Ok(profile)
}
