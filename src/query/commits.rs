//! Commit bodies as stored: decoding one, the whole log, and the ingest record of an extract.

use crate::error::{Error, Result};
use crate::model::{Change, CommitBody, IngestRecord};
use crate::store::{Reader, StoredCommit};

/// Decode a stored commit's body, checking nothing.
pub fn decode(stored: &StoredCommit) -> Result<CommitBody> {
    CommitBody::decode(&stored.body)
        .map_err(|e| Error::Corrupt(format!("commit {} does not decode: {e}", stored.seq)))
}

/// Every commit body in sequence order.
pub fn log(reader: &Reader<'_>) -> Result<Vec<(StoredCommit, CommitBody)>> {
    reader
        .commits()?
        .into_iter()
        .map(|c| {
            let b = decode(&c)?;
            Ok((c, b))
        })
        .collect()
}

/// The ingest record of the ingest commit `seq`.
pub fn ingest_record(reader: &Reader<'_>, seq: u64) -> Result<IngestRecord> {
    let stored = reader
        .try_commit(seq)?
        .ok_or_else(|| Error::Corrupt(format!("commit {seq} is missing")))?;
    match decode(&stored)?.change {
        Change::Ingest(r) => Ok(r),
        _ => Err(Error::Corrupt(format!(
            "commit {seq} is indexed as an ingest but records something else"
        ))),
    }
}

/// The fixes withdrawn by commits `after < seq <= upto`, as (commit, 1-based fix).
pub fn withdrawn_fixes(
    reader: &Reader<'_>,
    after: u64,
    upto: u64,
) -> Result<std::collections::HashSet<(u64, u64)>> {
    let mut out = std::collections::HashSet::new();
    for seq in after + 1..=upto {
        if let Some(stored) = reader.try_commit(seq)?
            && let Change::Fixes(list) = decode(&stored)?.change
        {
            for r in list {
                if let crate::model::FixAction::Withdraw { seq, fix } = r.fix.action {
                    out.insert((seq, fix));
                }
            }
        }
    }
    Ok(out)
}
