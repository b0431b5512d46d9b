//! Profiling a table version: the glue between a rebuilt version and the pure statistics in
//! [`crate::profile`].
//!
//! Excluded rows are left out (they are not part of the cleaned data); missing-value codes
//! declared by `missing` fixes up to the version are passed on, so a code that reappears is
//! counted as declared missing. Row numbers in the result are 1-based positions in the extract.

use crate::error::Result;
use crate::model::{Change, FixAction};
use crate::profile::finding::Decided;
use crate::profile::{FindingDetail, TableOptions, TableProfile, TableProfiler};
use crate::query::{Version, decode};
use crate::store::Reader;
use std::collections::BTreeMap;
use std::ops::ControlFlow;

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

/// Profile every column of a version in one streaming pass.
pub fn profile_version(
    reader: &Reader<'_>,
    version: &Version,
    mut options: TableOptions,
) -> Result<TableProfile> {
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
    let mut profiler = TableProfiler::new(version.header(), options);
    let mut positions: Vec<u64> = Vec::new();
    version.for_each_row(reader, |row| {
        if row.excluded {
            return Ok(ControlFlow::Continue(()));
        }
        positions.push(row.pos);
        let cells: Vec<Option<&str>> = row.cells.iter().map(|c| c.as_deref()).collect();
        profiler.push_row(&cells);
        Ok(ControlFlow::Continue(()))
    })?;
    let mut profile = profiler.finish();
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
            .for_each(|w| w.rows.iter_mut().for_each(map));
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
