//! The life of one value, one row or one column: every fix that touched it, with who, when,
//! why, on what evidence, and whether the record's signature holds.
//!
//! For a cell that fixes touched, everything comes from the cell-edit index and the bodies of
//! the commits involved: the cost grows with the cell's history, not with the table. Only a
//! cell no fix touched needs its raw value read from the extract.

use super::commits::{decode, ingest_record};
use super::rev::Rev;
use super::version::Version;
use crate::error::{Error, Result};
use crate::hash::CommitId;
use crate::model::{Author, Change, Evidence, RowId};
use crate::signing;
use crate::store::Reader;

/// One fix in a value's life.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct FixEvent {
    /// Commit sequence.
    pub seq: u64,
    /// Commit id.
    pub id: CommitId,
    /// Who signed.
    pub author: Author,
    /// Commit time (RFC 3339, UTC).
    pub time: String,
    /// Commit message.
    pub message: String,
    /// Kind of fix.
    pub kind: String,
    /// One line describing the fix.
    pub description: String,
    /// The reason.
    pub why: String,
    /// Attached files.
    pub evidence: Vec<Evidence>,
    /// Who was consulted.
    pub consulted: Option<String>,
    /// The cell's value before (cell events only).
    pub old: Option<String>,
    /// The cell's value after (cell events only).
    pub new: Option<String>,
    /// The column (row histories list several).
    pub column: Option<String>,
    /// For a carried fix, the commits it came from, oldest first.
    pub origins: Vec<crate::model::Origin>,
    /// The commit's signature verifies.
    pub signature_ok: bool,
    /// The signing key is one the store trusts.
    pub trusted: bool,
}

/// The life of one cell.
#[derive(Debug, Clone)]
pub struct CellStory {
    /// Table.
    pub table: String,
    /// Row.
    pub row: RowId,
    /// Column.
    pub column: String,
    /// The commit that ingested the extract the story starts from.
    pub ingest_seq: u64,
    /// The extract's file name.
    pub extract_file: String,
    /// The value in the raw extract.
    pub raw: Option<String>,
    /// Every fix that changed it, oldest first.
    pub events: Vec<FixEvent>,
    /// The version the story runs to.
    pub at_seq: u64,
    /// The value at that version.
    pub value: Option<String>,
    /// The fix that excluded its row, if any.
    pub row_excluded_by: Option<FixEvent>,
    /// The fix that distrusted its column, if any.
    pub column_distrusted_by: Option<FixEvent>,
    /// Decisions that change no value: the value kept on purpose, notes on the cell or its
    /// row, oldest first.
    pub decisions: Vec<FixEvent>,
}

struct Events<'r, 'a> {
    reader: &'r Reader<'a>,
    trusted: crate::store::TrustList,
}

impl Events<'_, '_> {
    fn event(&self, seq: u64, fix_idx: u64) -> Result<FixEvent> {
        let stored = self
            .reader
            .try_commit(seq)?
            .ok_or_else(|| Error::Corrupt(format!("commit {seq} is missing")))?;
        let body = decode(&stored)?;
        let signature_ok =
            signing::verify(&body.author.key, stored.id.as_bytes(), &stored.signature);
        let Change::Fixes(list) = body.change else {
            return Err(Error::Corrupt(format!(
                "commit {seq} is indexed as fixes but is not"
            )));
        };
        let rec = list
            .into_iter()
            .nth(fix_idx as usize)
            .ok_or_else(|| Error::Corrupt(format!("commit {seq} has no fix number {fix_idx}")))?;
        Ok(FixEvent {
            seq,
            id: stored.id,
            trusted: self.trusted.trusts(&body.author.key, seq),
            author: body.author,
            time: body.time,
            message: body.message,
            kind: rec.fix.action.kind().to_string(),
            description: rec.fix.action.describe(),
            why: rec.fix.why,
            evidence: rec.fix.evidence,
            consulted: rec.fix.consulted,
            old: None,
            new: None,
            column: rec.fix.action.column().map(str::to_string),
            origins: rec.fix.origins,
            signature_ok,
        })
    }
}

fn start(
    reader: &Reader<'_>,
    table: &str,
    rev: Rev,
) -> Result<(u64, u64, crate::model::IngestRecord)> {
    let (ingest_seq, _) = reader
        .extract_at(table, rev.seq)?
        .ok_or_else(|| Error::UnknownTable(table.to_string()))?;
    let upto = if rev.raw { ingest_seq } else { rev.seq };
    Ok((ingest_seq, upto, ingest_record(reader, ingest_seq)?))
}

fn events<'r, 'a>(reader: &'r Reader<'a>) -> Result<Events<'r, 'a>> {
    Ok(Events {
        reader,
        trusted: reader.trust_list()?,
    })
}

/// The life of the cell (`row`, `column`) of `table`, from its raw extract to `rev`.
pub fn why_cell(
    reader: &Reader<'_>,
    table: &str,
    row: &RowId,
    column: &str,
    rev: Rev,
) -> Result<CellStory> {
    let (ingest_seq, upto, def) = start(reader, table, rev)?;
    if !def.header.iter().any(|h| h == column) {
        return Err(Error::UnknownColumn {
            table: table.to_string(),
            column: column.to_string(),
        });
    }
    let ev = events(reader)?;
    let edits = reader.cell_history(table, row.as_str(), column, ingest_seq, upto)?;
    let mut list = Vec::new();
    for e in &edits {
        let mut event = ev.event(e.seq, e.fix_idx)?;
        event.old = e.old.clone();
        event.new = e.new.clone();
        list.push(event);
    }
    let raw = match edits.first() {
        Some(first) => first.old.clone(),
        None => {
            let version = Version::load(reader, table, ingest_seq, true)?;
            let col = version.col_idx(column)?;
            let (_, cells, _) =
                version
                    .find_row(reader, row)?
                    .ok_or_else(|| Error::UnknownRow {
                        table: table.to_string(),
                        row: row.to_string(),
                    })?;
            cells[col].clone()
        }
    };
    let value = edits
        .last()
        .map(|e| e.new.clone())
        .unwrap_or_else(|| raw.clone());
    let first_mark = |kind: &str, target: &str| -> Result<Option<FixEvent>> {
        match reader
            .marks_of(table, kind, target, ingest_seq, upto)?
            .first()
        {
            Some(m) => Ok(Some(ev.event(m.seq, m.fix_idx)?)),
            None => Ok(None),
        }
    };
    let cell = crate::model::cell_target(row.as_str(), column);
    let mut decisions = Vec::new();
    for (kind, target) in [
        ("keep", cell.as_str()),
        ("note", cell.as_str()),
        ("note", row.as_str()),
    ] {
        for m in reader.marks_of(table, kind, target, ingest_seq, upto)? {
            decisions.push(ev.event(m.seq, m.fix_idx)?);
        }
    }
    decisions.sort_by_key(|e| e.seq);
    Ok(CellStory {
        table: table.to_string(),
        row: row.clone(),
        column: column.to_string(),
        ingest_seq,
        extract_file: def.file_name,
        raw,
        events: list,
        at_seq: upto,
        value,
        row_excluded_by: first_mark("exclude", row.as_str())?,
        column_distrusted_by: first_mark("distrust", column)?,
        decisions,
    })
}

/// The history of a row: its exclusion and every edit of its cells, oldest first.
pub fn why_row(
    reader: &Reader<'_>,
    table: &str,
    row: &RowId,
    rev: Rev,
) -> Result<(u64, Vec<FixEvent>)> {
    let (ingest_seq, upto, _) = start(reader, table, rev)?;
    let ev = events(reader)?;
    let mut out = Vec::new();
    for e in reader.row_history(table, row.as_str(), ingest_seq, upto)? {
        let mut event = ev.event(e.seq, e.fix_idx)?;
        event.old = e.old;
        event.new = e.new;
        event.column = Some(e.column);
        out.push(event);
    }
    for m in reader.marks_of(table, "exclude", row.as_str(), ingest_seq, upto)? {
        out.push(ev.event(m.seq, m.fix_idx)?);
    }
    if out.is_empty() {
        let version = Version::load(reader, table, ingest_seq, true)?;
        if version.find_row(reader, row)?.is_none() {
            return Err(Error::UnknownRow {
                table: table.to_string(),
                row: row.to_string(),
            });
        }
    }
    out.sort_by_key(|e| e.seq);
    Ok((ingest_seq, out))
}

/// The history of a column: distrust, recodes and missing-value codes, oldest first, each with
/// the number of cells it changed.
pub fn why_column(
    reader: &Reader<'_>,
    table: &str,
    column: &str,
    rev: Rev,
) -> Result<(u64, Vec<(FixEvent, usize)>)> {
    let (ingest_seq, upto, def) = start(reader, table, rev)?;
    if !def.header.iter().any(|h| h == column) {
        return Err(Error::UnknownColumn {
            table: table.to_string(),
            column: column.to_string(),
        });
    }
    let ev = events(reader)?;
    let mut out = Vec::new();
    for seq in ingest_seq + 1..=upto {
        let Some(stored) = reader.try_commit(seq)? else {
            continue;
        };
        if let Change::Fixes(list) = decode(&stored)?.change {
            for (i, r) in list.iter().enumerate() {
                // Every fix that names the column or changed a cell of it.
                let about_column = r.fix.table == table
                    && (r.fix.action.column() == Some(column)
                        || r.edits.iter().any(|e| e.column == column));
                if about_column {
                    let n = r.edits.iter().filter(|e| e.column == column).count();
                    out.push((ev.event(seq, i as u64)?, n));
                }
            }
        }
    }
    Ok((ingest_seq, out))
}
