//! Recording fixes as pending (checked against the latest version; evidence stored
//! content-addressed) and committing them: one streaming pass per table resolves each fix to
//! the exact cells it changes and computes the new version hash.

use super::apply::FixApplier;
use super::seal::{CommitContext, CommitOutcome, seal};
use crate::error::{Error, Result};
use crate::hash::{BlobId, Digest};
use crate::model::{CellEdit, Change, Evidence, Fix, FixAction, FixRecord, TableVersion};
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
    match &req.action {
        FixAction::Set { row, column, value } => {
            let (_, cells, _) =
                version
                    .find_row(&reader, row)?
                    .ok_or_else(|| Error::UnknownRow {
                        table: req.table.clone(),
                        row: row.to_string(),
                    })?;
            if &cells[version.col_idx(column)?] == value {
                note = Some(format!("row {row} {column} already holds this value"));
            }
        }
        FixAction::Exclude { row } => {
            version
                .find_row(&reader, row)?
                .ok_or_else(|| Error::UnknownRow {
                    table: req.table.clone(),
                    row: row.to_string(),
                })?;
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
