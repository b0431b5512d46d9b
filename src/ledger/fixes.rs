//! Recording fixes as pending (checked against the latest version; evidence stored
//! content-addressed) and committing them: one streaming pass per table resolves each fix to
//! the exact cells it changes and computes the new version hash.

use super::apply::FixApplier;
use super::seal::{CommitContext, CommitOutcome, seal};
use crate::error::{Error, Result};
use crate::hash::{BlobId, Digest};
use crate::model::{CellEdit, Change, Evidence, Fix, FixAction, FixRecord, RowId, TableVersion};
use crate::query::Version;
use crate::store::{PIECE_SIZE, PieceEncoder, Reader, Store, WriteTx};
use crate::table::VersionHashBuilder;
use std::io::Read;
use std::ops::ControlFlow;
use std::path::{Path, PathBuf};

/// A fix as asked for on the command line, before it is checked.
#[derive(Debug, Clone)]
pub struct FixRequest {
    /// Table.
    pub table: String,
    /// What to do.
    pub action: FixAction,
    /// Why.
    pub why: String,
    /// Files to attach.
    pub evidence: Vec<PathBuf>,
    /// Who was consulted.
    pub consulted: Option<String>,
}

/// A fix that was recorded as pending.
#[derive(Debug, Clone)]
pub struct Recorded {
    /// The fix as stored.
    pub fix: Fix,
    /// A remark for the user (e.g. the cell already holds the value).
    pub note: Option<String>,
}

/// Check a fix against the table's latest version and record it as pending.
pub fn record_fix(store: &mut Store, req: FixRequest, now: &str) -> Result<Recorded> {
    if req.why.trim().is_empty() {
        return Err(Error::EmptyReason);
    }
    let tx = store.transaction()?;
    let reader = tx.read();
    let head = reader.head()?.map(|(s, _)| s).unwrap_or(0);
    if reader.extract_at(&req.table, head)?.is_none() {
        return Err(Error::UnknownTable(req.table));
    }
    let version = Version::load(&reader, &req.table, head, false)?;
    let mut note = None;
    if let Some(col) = req.action.column() {
        version.col_idx(col)?;
        if version.def.key.iter().any(|k| k == col)
            && !matches!(req.action, FixAction::Distrust { .. })
        {
            return Err(Error::KeyColumn {
                table: req.table.clone(),
                column: col.to_string(),
            });
        }
    }
    let find = |row: &RowId| {
        version
            .find_row(&reader, row)?
            .ok_or_else(|| Error::UnknownRow {
                table: req.table.clone(),
                row: row.to_string(),
            })
    };
    match &req.action {
        FixAction::Set { row, column, value } => {
            let (_, cells, _) = find(row)?;
            if &cells[version.col_idx(column)?] == value {
                note = Some(format!("row {row} {column} already holds this value"));
            }
        }
        FixAction::Exclude { row } => {
            find(row)?;
        }
        FixAction::Recode { pairs, .. } => {
            if pairs.is_empty() {
                return Err(Error::Invalid(
                    "recode needs at least one from/to pair".into(),
                ));
            }
            if let Some((a, _)) = pairs.iter().find(|(a, b)| a == b) {
                return Err(Error::Invalid(format!(
                    "recode of '{a}' to itself changes nothing"
                )));
            }
        }
        FixAction::Missing { codes, .. } => {
            if codes.is_empty() {
                return Err(Error::Invalid("missing needs at least one --code".into()));
            }
        }
        FixAction::Distrust { .. } => {}
        FixAction::Rules { .. } => {
            return Err(Error::Invalid(
                "a rules file is adopted with 'emend rules TABLE FILE --why ...'".into(),
            ));
        }
    }
    let mut evidence = Vec::new();
    for path in &req.evidence {
        let (blob, n_bytes) = store_file(&tx, path)?;
        evidence.push(Evidence {
            name: path
                .file_name()
                .map(|n| n.to_string_lossy().into_owned())
                .unwrap_or_default(),
            blob,
            n_bytes,
        });
    }
    let fix = Fix {
        table: req.table,
        action: req.action,
        why: req.why.trim().to_string(),
        evidence,
        consulted: req.consulted.filter(|c| !c.trim().is_empty()),
        origins: Vec::new(),
    };
    tx.add_pending(&fix, None, now)?;
    tx.commit()?;
    Ok(Recorded { fix, note })
}

/// Store any file (evidence) content-addressed, streaming it in pieces.
pub fn store_file(tx: &WriteTx<'_>, path: &Path) -> Result<(BlobId, u64)> {
    let mut file = crate::ingest::open_input(path)?;
    let mut hasher = blake3::Hasher::new();
    let mut chunks = Vec::new();
    let mut n_bytes = 0u64;
    let mut buf = vec![0u8; PIECE_SIZE];
    let mut encoder = PieceEncoder::new()?;
    loop {
        let mut filled = 0;
        while filled < buf.len() {
            let n = file
                .read(&mut buf[filled..])
                .map_err(|e| Error::io(path, e))?;
            if n == 0 {
                break;
            }
            filled += n;
        }
        if filled == 0 {
            break;
        }
        let piece = &buf[..filled];
        hasher.update(piece);
        n_bytes += filled as u64;
        let encoded = encoder.plain(piece)?;
        tx.put_piece(&encoded)?;
        chunks.push(encoded.id);
        if filled < buf.len() {
            break;
        }
    }
    let id = BlobId(Digest(*hasher.finalize().as_bytes()));
    tx.put_blob(&id, n_bytes, &chunks)?;
    Ok((id, n_bytes))
}

/// Drop every pending fix. Returns how many were dropped.
pub fn discard(store: &mut Store) -> Result<usize> {
    let tx = store.transaction()?;
    let n = tx.clear_pending()?;
    tx.commit()?;
    Ok(n)
}

/// Apply the pending fixes of one table to a version, row by row, recording each cell changed.
fn resolve_fixes(
    reader: &Reader<'_>,
    version: &Version,
    fixes: &[&Fix],
) -> Result<(Vec<Vec<CellEdit>>, TableVersion)> {
    let mut appliers: Vec<FixApplier<'_>> = fixes
        .iter()
        .map(|f| FixApplier::new(f, version))
        .collect::<Result<_>>()?;
    let mut edits: Vec<Vec<CellEdit>> = vec![Vec::new(); fixes.len()];
    let header = version.header().to_vec();
    let mut distrusted = version.distrusted().to_vec();
    for a in &appliers {
        if let (FixAction::Distrust { .. }, Some(c)) = (&a.fix().action, a.column()) {
            distrusted[c] = true;
        }
    }
    let mut hash = VersionHashBuilder::new(&header);
    let mut n_rows = 0u64;
    let mut cells: Vec<Option<String>> = Vec::new();
    version.for_each_row(reader, |row| {
        cells.clear();
        cells.extend_from_slice(row.cells);
        let mut excluded = row.excluded;
        for (k, a) in appliers.iter_mut().enumerate() {
            a.apply(row.id, &mut cells, &mut excluded, |col, old, new| {
                edits[k].push(CellEdit {
                    row: row.id.clone(),
                    column: header[col].clone(),
                    old,
                    new,
                });
            });
        }
        hash.row(row.id, excluded, &cells);
        n_rows += 1;
        Ok(ControlFlow::Continue(()))
    })?;
    if let Some(row) = appliers.iter().find_map(FixApplier::missed_row) {
        return Err(Error::UnknownRow {
            table: version.table.clone(),
            row: row.to_string(),
        });
    }
    Ok((
        edits,
        TableVersion {
            table: version.table.clone(),
            hash: hash.finish(&header, &distrusted),
            n_rows,
        },
    ))
}

/// Commit every pending fix as one signed commit.
pub fn commit_pending(
    store: &mut Store,
    message: &str,
    ctx: &CommitContext<'_>,
) -> Result<CommitOutcome> {
    if message.trim().is_empty() {
        return Err(Error::Invalid(
            "a commit needs a message: -m \"...\"".into(),
        ));
    }
    let tx = store.transaction()?;
    let reader = tx.read();
    let pending = reader.pending()?;
    if pending.is_empty() {
        return Err(Error::NothingPending);
    }
    let head = reader.head()?.map(|(s, _)| s).unwrap_or(0);
    let mut tables: Vec<&str> = Vec::new();
    for p in &pending {
        if !tables.contains(&p.fix.table.as_str()) {
            tables.push(&p.fix.table);
        }
    }
    let mut records: Vec<Option<FixRecord>> = vec![None; pending.len()];
    let mut versions = Vec::new();
    for table in tables {
        let idx: Vec<usize> = (0..pending.len())
            .filter(|&i| pending[i].fix.table == table)
            .collect();
        let fixes: Vec<&Fix> = idx.iter().map(|&i| &pending[i].fix).collect();
        let version = Version::load(&reader, table, head, false)?;
        let (edits, tv) = resolve_fixes(&reader, &version, &fixes)?;
        for (i, e) in idx.into_iter().zip(edits) {
            records[i] = Some(FixRecord {
                fix: pending[i].fix.clone(),
                edits: e,
            });
        }
        versions.push(tv);
    }
    let records: Vec<FixRecord> = records
        .into_iter()
        .map(|r| r.expect("every pending fix belongs to one table"))
        .collect();
    let done = seal(&tx, ctx, message.trim(), Change::Fixes(records), versions)?;
    tx.clear_pending()?;
    tx.commit()?;
    Ok(done)
}

#[cfg(test)]
mod tests {
    use super::super::testkit::{Kit, NOW};
    use super::*;
    use crate::query::{Version, decode};

    #[test]
    fn a_commit_resolves_each_fix_to_the_exact_cells_it_changes() {
        let mut kit = Kit::new();
        kit.fix(FixAction::Recode {
            column: "site".into(),
            pairs: vec![("mill craek".into(), "Mill Creek".into())],
        });
        kit.fix(FixAction::Missing {
            column: "ph".into(),
            codes: vec!["-999".into()],
        });
        kit.fix(FixAction::Set {
            row: RowId("S-2".into()),
            column: "ph".into(),
            value: Some("7.1".into()),
        });
        let seq = kit.commit("first pass");
        assert_eq!(seq, 2);
        let reader = kit.store.read();
        let body = decode(&reader.try_commit(seq).unwrap().unwrap()).unwrap();
        let Change::Fixes(records) = &body.change else {
            panic!("a fixes commit")
        };
        let cells: Vec<Vec<(&str, &str, Option<&str>)>> = records
            .iter()
            .map(|r| {
                r.edits
                    .iter()
                    .map(|e| (e.row.as_str(), e.column.as_str(), e.new.as_deref()))
                    .collect()
            })
            .collect();
        assert_eq!(
            cells,
            vec![
                vec![
                    ("S-1", "site", Some("Mill Creek")),
                    ("S-3", "site", Some("Mill Creek"))
                ],
                vec![("S-3", "ph", None)],
                vec![("S-2", "ph", Some("7.1"))],
            ]
        );
        // The hash signed into the commit is the hash of the version rebuilt from the extract.
        let rebuilt = Version::load(&reader, "samples", seq, false).unwrap();
        assert_eq!(rebuilt.hash(&reader).unwrap().0, body.versions[0].hash);
        assert!(reader.pending().unwrap().is_empty());
    }

    #[test]
    fn fixes_that_cannot_apply_are_refused_before_they_are_recorded() {
        let mut kit = Kit::new();
        let req = |action| FixRequest {
            table: "samples".into(),
            action,
            why: "test".into(),
            evidence: Vec::new(),
            consulted: None,
        };
        let key = record_fix(
            &mut kit.store,
            req(FixAction::Set {
                row: RowId("S-1".into()),
                column: "sample_id".into(),
                value: Some("S-9".into()),
            }),
            NOW,
        );
        assert!(matches!(key, Err(Error::KeyColumn { .. })), "{key:?}");
        let row = record_fix(
            &mut kit.store,
            req(FixAction::Exclude {
                row: RowId("S-404".into()),
            }),
            NOW,
        );
        assert!(matches!(row, Err(Error::UnknownRow { .. })), "{row:?}");
        let mut no_reason = req(FixAction::Distrust {
            column: "ph".into(),
        });
        no_reason.why = "  ".into();
        assert!(matches!(
            record_fix(&mut kit.store, no_reason, NOW),
            Err(Error::EmptyReason)
        ));
        assert!(kit.store.read().pending().unwrap().is_empty());
        let signer = super::super::testkit::signer();
        let ctx = super::super::testkit::ctx(&signer);
        let nothing = commit_pending(&mut kit.store, "nothing", &ctx);
        assert!(matches!(nothing, Err(Error::NothingPending)));
    }
}
